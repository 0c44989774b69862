//! `[alarms]`, `[[alarm]]` and `[[gate]]`: shared settings, rules, gates
//! and the commands they run.

use super::{Errors, GaugeConfig, file};
use crate::engine::NamedLength;

/// A command run on an alarm's or gate's events (never through a shell).
#[derive(Debug, Clone, PartialEq)]
pub struct ActionSpec {
    /// Rule or gate id.
    pub id: String,
    /// Program and arguments.
    pub argv: Vec<String>,
    /// Stopped after this long, s.
    pub timeout_s: f64,
    /// At most one run this often, s.
    pub repeat_after_s: f64,
}

/// Alarms, gates and their settings.
#[derive(Debug, Clone)]
pub struct AlarmConfig {
    /// Rules.
    pub rules: Vec<crate::alarm::RuleSpec>,
    /// Gates.
    pub gates: Vec<crate::alarm::Gate>,
    /// Commands to run.
    pub actions: Vec<ActionSpec>,
    /// Gauge for rules and conditions that name none.
    pub default_gauge: Option<String>,
    /// A gauge with no reading for this long is stale, s.
    pub stale_after_s: f64,
    /// Window of the rate-of-change fit, s.
    pub rate_window_s: f64,
    /// Severity of no-valid-reading alarms.
    pub input_severity: crate::alarm::Severity,
    /// Ring the bell on new alarms.
    pub bell: bool,
}

impl Default for AlarmConfig {
    fn default() -> Self {
        AlarmConfig {
            rules: Vec::new(),
            gates: Vec::new(),
            actions: Vec::new(),
            default_gauge: None,
            stale_after_s: 10.0,
            rate_window_s: 10.0,
            input_severity: crate::alarm::Severity::Warning,
            bell: true,
        }
    }
}

/// Resolves `[alarms]`, the `[[alarm]]` rules and the `[[gate]]`s against
/// the configured gauges and lengths.
pub(super) fn resolve(
    errs: &mut Errors<'_>,
    gauges: &[GaugeConfig],
    lengths: &[NamedLength],
    settings: Option<file::AlarmsSection>,
    alarms: Vec<file::AlarmSection>,
    gates: Vec<file::GateSection>,
) -> AlarmConfig {
    use crate::alarm::rule::{Deadband, Rule, Severity, Test};
    use crate::alarm::{Gate, RuleSpec, quantity::Class, quantity::Quantity, syntax};
    let mut out = AlarmConfig::default();
    let gauge_ids: Vec<String> = gauges.iter().map(|g| g.id.clone()).collect();
    let all_lengths = lengths;
    let lengths = lengths.to_vec();
    let length_of = move |name: &str| lengths.iter().find(|l| l.name == name).map(|l| l.length_m);
    let known_gauge = |this: &mut Errors<'_>, g: &toml::Spanned<String>| -> bool {
        let id = g.get_ref();
        if gauge_ids.is_empty() || gauge_ids.contains(id) {
            return true;
        }
        let hint = crate::suggest::nearest(id, gauge_ids.iter().map(String::as_str))
            .map(|s| format!(" (did you mean `{s}`?)"))
            .unwrap_or_default();
        this.err(
            g.span(),
            format!(
                "no gauge `{id}` is configured{hint}; gauges: {}",
                gauge_ids.join(", ")
            ),
        );
        false
    };
    if let Some(s) = settings {
        if let Some(g) = &s.default_gauge
            && known_gauge(errs, g)
        {
            out.default_gauge = Some(g.get_ref().clone());
        }
        for (field, slot) in [
            (&s.stale_after, &mut out.stale_after_s),
            (&s.rate_window, &mut out.rate_window_s),
        ] {
            if let Some(d) = field {
                if d.get_ref().si <= 0.0 {
                    errs.err(d.span(), "must be longer than zero");
                } else {
                    *slot = d.get_ref().si;
                }
            }
        }
        if let Some(sev) = s.input_severity {
            out.input_severity = sev;
        }
        if let Some(b) = s.bell {
            out.bell = b;
        }
    }
    let action = |this: &mut Errors<'_>,
                  id: &str,
                  cmd: &Option<toml::Spanned<Vec<String>>>,
                  timeout: &Option<toml::Spanned<crate::units::Duration>>,
                  repeat: &Option<toml::Spanned<crate::units::Duration>>|
     -> Option<ActionSpec> {
        let cmd = cmd.as_ref()?;
        if cmd.get_ref().is_empty() || cmd.get_ref()[0].trim().is_empty() {
            this.err(
                cmd.span(),
                "command needs a program: [\"program\", \"arg\", …]",
            );
            return None;
        }
        let timeout_s = timeout.as_ref().map_or(10.0, |d| d.get_ref().si);
        if timeout_s <= 0.0 {
            this.err(
                timeout.as_ref().map_or(cmd.span(), |d| d.span()),
                "command_timeout must be longer than zero",
            );
            return None;
        }
        Some(ActionSpec {
            id: id.to_string(),
            argv: cmd.get_ref().clone(),
            timeout_s,
            repeat_after_s: repeat.as_ref().map_or(60.0, |d| d.get_ref().si),
        })
    };
    let mut ids: Vec<String> = Vec::new();
    for a in alarms {
        let id = a.id.get_ref().trim().to_string();
        if id.is_empty() || id.contains(char::is_whitespace) || id.ends_with(".input") {
            errs.err(
                a.id.span(),
                "an alarm id must be one word (and not end in .input)",
            );
            continue;
        }
        if ids.contains(&id) {
            errs.err(a.id.span(), format!("alarm id `{id}` is used twice"));
            continue;
        }
        ids.push(id.clone());
        let gauge = match (&a.gauge, &out.default_gauge) {
            // Temperature channels are not gauges of the config.
            (Some(g), _) if a.quantity.get_ref() == "temperature" => g.get_ref().clone(),
            (Some(g), _) => {
                if !known_gauge(errs, g) {
                    continue;
                }
                g.get_ref().clone()
            }
            (None, Some(d)) => d.clone(),
            (None, None) => {
                errs.err(
                    a.id.span(),
                    format!("alarm `{id}` names no gauge; give `gauge` or [alarms] default_gauge"),
                );
                continue;
            }
        };
        let quantity = match Quantity::parse(
            a.quantity.get_ref(),
            a.length.as_ref().map(|l| l.get_ref().as_str()),
        ) {
            Ok(q) => q,
            Err(e) => {
                errs.err(a.quantity.span(), e);
                continue;
            }
        };
        if let Some(l) = quantity.length()
            && length_of(l).is_none()
        {
            let span = a.length.as_ref().map_or(a.quantity.span(), |s| s.span());
            let names: Vec<String> = all_lengths.iter().map(|l| l.name.clone()).collect();
            let hint = crate::suggest::nearest(l, names.iter().map(String::as_str))
                .map(|s| format!(" (did you mean `{s}`?)"))
                .unwrap_or_default();
            errs.err(
                span,
                format!("no length named `{l}` is configured{hint} ([[length]])"),
            );
            continue;
        }
        let tests: Vec<(&str, &toml::Spanned<String>)> = [
            ("above", &a.above),
            ("below", &a.below),
            ("enters", &a.enters),
            ("leaves", &a.leaves),
            ("crosses", &a.crosses),
        ]
        .into_iter()
        .filter_map(|(k, v)| v.as_ref().map(|v| (k, v)))
        .collect();
        let [(op, value)] = tests.as_slice() else {
            errs.err(
                a.id.span(),
                format!("alarm `{id}` needs exactly one of above, below, enters, leaves, crosses"),
            );
            continue;
        };
        let mut quantity = quantity;
        if quantity == Quantity::RateOfChange
            && crate::alarm::quantity::rate(value.get_ref()).is_ok_and(|(_, decades)| decades)
        {
            quantity = Quantity::DecadesPerMinute;
        }
        let class = |w: &str| Class::parse(&quantity, w);
        let test = match *op {
            "above" | "below" => match quantity.threshold(value.get_ref()) {
                Ok(t) if *op == "above" => Ok(Test::Above(t)),
                Ok(t) => Ok(Test::Below(t)),
                Err(e) => Err(e),
            },
            "enters" => class(value.get_ref()).map(Test::Enters),
            "leaves" => class(value.get_ref()).map(Test::Leaves),
            _ => match value.get_ref().split_once('/') {
                Some((x, y)) => match (class(x), class(y)) {
                    (Ok(x), Ok(y)) if x.rank().abs_diff(y.rank()) == 1 => Ok(Test::Crosses(x, y)),
                    (Ok(x), Ok(y)) => {
                        Err(format!("{}/{} are not neighbours", x.as_str(), y.as_str()))
                    }
                    (Err(e), _) | (_, Err(e)) => Err(e),
                },
                None => Err(
                    "crosses needs two neighbouring classes, e.g. \"transitional/molecular\""
                        .into(),
                ),
            },
        };
        let test = match test {
            Ok(t) => t,
            Err(e) => {
                errs.err(value.span(), e);
                continue;
            }
        };
        let deadband = match &a.deadband {
            None => Deadband::None,
            Some(d) if quantity.is_class() => {
                errs.err(
                    d.span(),
                    format!("{quantity} has no deadband; use on_delay/off_delay"),
                );
                continue;
            }
            Some(d) => match Deadband::parse(d.get_ref(), |s| quantity.threshold(s)) {
                Ok(db) => db,
                Err(e) => {
                    errs.err(d.span(), e);
                    continue;
                }
            },
        };
        let enable = match &a.enable {
            Some(c) => match syntax::condition(c.get_ref(), &length_of) {
                Ok(c) => Some(c),
                Err(e) => {
                    errs.err(c.span(), e);
                    continue;
                }
            },
            None => None,
        };
        if let Some(act) = action(errs, &id, &a.command, &a.command_timeout, &a.repeat_after) {
            out.actions.push(act);
        }
        out.rules.push(RuleSpec {
            rule: Rule {
                label: a.label.clone().unwrap_or_else(|| id.clone()),
                id,
                gauge,
                quantity,
                test,
                deadband,
                on_delay_s: a.on_delay.as_ref().map_or(0.0, |d| d.get_ref().si),
                off_delay_s: a.off_delay.as_ref().map_or(0.0, |d| d.get_ref().si),
                severity: a.severity.unwrap_or(Severity::Warning),
                latching: a.latching.unwrap_or(false),
            },
            enable,
        });
    }
    let mut gate_ids: Vec<String> = Vec::new();
    for g in gates {
        let id = g.id.get_ref().trim().to_string();
        if id.is_empty() || id.contains(char::is_whitespace) {
            errs.err(g.id.span(), "a gate id must be one word");
            continue;
        }
        if gate_ids.contains(&id) {
            errs.err(g.id.span(), format!("gate id `{id}` is used twice"));
            continue;
        }
        gate_ids.push(id.clone());
        if g.conditions.is_empty() {
            errs.err(g.id.span(), format!("gate `{id}` has no conditions"));
            continue;
        }
        let mut conditions = Vec::new();
        for c in &g.conditions {
            match syntax::condition(c.get_ref(), &length_of) {
                Ok(cond) => {
                    if cond.gauge.is_none() && out.default_gauge.is_none() {
                        errs.err(
                            c.span(),
                            "the condition names no gauge and [alarms] has no default_gauge",
                        );
                    } else if let Some(gid) = &cond.gauge
                        && !gauge_ids.is_empty()
                        && !gauge_ids.contains(gid)
                    {
                        errs.err(
                            c.span(),
                            format!(
                                "no gauge `{gid}` is configured; gauges: {}",
                                gauge_ids.join(", ")
                            ),
                        );
                    } else {
                        conditions.push(cond);
                    }
                }
                Err(e) => errs.err(c.span(), e),
            }
        }
        if let Some(act) = action(errs, &id, &g.command, &g.command_timeout, &None) {
            out.actions.push(act);
        }
        out.gates.push(Gate {
            label: g.label.clone().unwrap_or_else(|| id.clone()),
            id,
            conditions,
            hold_s: g.hold.get_ref().si,
        });
    }
    out
}
