//! `[alarms]`, `[[alarm]]` and `[[gate]]`: shared settings, rules, gates
//! and the commands they run.

use toml::Spanned;

use super::{Errors, GaugeConfig, file};
use crate::alarm::rule::{Deadband, Rule, Severity};
use crate::alarm::{Gate, RuleSpec, quantity::Quantity, syntax};
use crate::engine::NamedLength;

/// Whether a gauge id names a configured gauge (any id does while none is
/// configured); reports the problem at the id's span when not.
type KnownGauge<'k> = dyn Fn(&mut Errors<'_>, &Spanned<String>) -> bool + 'k;

/// A named length's value, m.
type LengthOf<'k> = dyn Fn(&str) -> Option<f64> + 'k;

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
    let mut out = AlarmConfig::default();
    let gauge_ids: Vec<String> = gauges.iter().map(|g| g.id.clone()).collect();
    let all_lengths = lengths;
    let lengths = lengths.to_vec();
    let length_of = move |name: &str| lengths.iter().find(|l| l.name == name).map(|l| l.length_m);
    let known_gauge = |this: &mut Errors<'_>, g: &toml::Spanned<String>| -> bool {
        let id = g.get_ref();
        if gauge_ids.is_empty() || gauge_ids.contains(id) || id == crate::alarm::AUTO {
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
        let rule = match &a.condition {
            Some(text) => from_text(errs, &a, &id, text, &out, &length_of, &known_gauge),
            None => from_keys(errs, &a, &id, &out, all_lengths, &length_of, &known_gauge),
        };
        let Some(rule) = rule else { continue };
        let enable = match &a.enable {
            Some(c) => match syntax::condition(c.get_ref(), &length_of) {
                Ok(cond) if cond.deadband != Deadband::None => {
                    errs.err(
                        c.span(),
                        "an enabling condition takes no deadband; give the alarm one (`deadband = \"…\"`) or use a gate",
                    );
                    continue;
                }
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
        out.rules.push(RuleSpec { rule, enable });
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
                    // A condition that names no gauge, without a default
                    // gauge, watches the chamber pressure.
                    if let Some(gid) = &cond.gauge
                        && gid != crate::alarm::AUTO
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

/// The keys a `condition` text says itself, so they may not be given too.
fn keys_the_text_says(a: &file::AlarmSection) -> Vec<(&'static str, std::ops::Range<usize>)> {
    let strings = [
        ("gauge", &a.gauge),
        ("quantity", &a.quantity),
        ("length", &a.length),
        ("above", &a.above),
        ("below", &a.below),
        ("enters", &a.enters),
        ("leaves", &a.leaves),
        ("crosses", &a.crosses),
        ("deadband", &a.deadband),
    ];
    let durations = [("on_delay", &a.on_delay), ("off_delay", &a.off_delay)];
    strings
        .into_iter()
        .filter_map(|(k, v)| v.as_ref().map(|v| (k, v.span())))
        .chain(
            durations
                .into_iter()
                .filter_map(|(k, v)| v.as_ref().map(|v| (k, v.span()))),
        )
        .chain(a.severity.as_ref().map(|v| ("severity", v.span())))
        .chain(a.latching.as_ref().map(|v| ("latching", v.span())))
        .collect()
}

/// An `[[alarm]]` written as one text, `condition = "…"`: the same alarm
/// text as `--alarm`, read by the same parser.
fn from_text(
    errs: &mut Errors<'_>,
    a: &file::AlarmSection,
    id: &str,
    text: &Spanned<String>,
    settings: &AlarmConfig,
    length_of: &LengthOf<'_>,
    known_gauge: &KnownGauge<'_>,
) -> Option<Rule> {
    let extra = keys_the_text_says(a);
    for (key, span) in &extra {
        errs.err(
            span.clone(),
            format!(
                "alarm `{id}`: `{key}` is said by its `condition` text; write it there \
                 (e.g. \"chamber pressure above 2e-5 mbar deadband 10 % for 10 s clear after 30 s as trip latching\") \
                 or drop `condition` and use the keys"
            ),
        );
    }
    if !extra.is_empty() {
        return None;
    }
    let parsed = match syntax::alarm_text(text.get_ref(), length_of) {
        Ok(p) => p,
        Err(e) => {
            errs.err(text.span(), e);
            return None;
        }
    };
    let mut rule = parsed.rule;
    if let Some(named) = parsed.named
        && named != id
    {
        errs.err(
            text.span(),
            format!(
                "the condition says `named {named}` but the alarm's id is `{id}`; drop `named` (the id is `id`)"
            ),
        );
        return None;
    }
    rule.gauge = match (parsed.gauge, &settings.default_gauge) {
        (Some(g), _) => {
            // Temperature channels are not gauges of the config.
            let spanned = Spanned::new(text.span(), g);
            if !rule.quantity.is_temperature() && !known_gauge(errs, &spanned) {
                return None;
            }
            spanned.into_inner()
        }
        (None, Some(d)) => d.clone(),
        // Neither: the chamber pressure.
        (None, None) => crate::alarm::AUTO.to_string(),
    };
    rule.id = id.to_string();
    rule.label = a.label.clone().unwrap_or_else(|| id.to_string());
    Some(rule)
}

/// An `[[alarm]]` written with keys (`quantity`, `above`, `deadband`, …);
/// values go through the alarm text's readers.
fn from_keys(
    errs: &mut Errors<'_>,
    a: &file::AlarmSection,
    id: &str,
    settings: &AlarmConfig,
    lengths: &[NamedLength],
    length_of: &LengthOf<'_>,
    known_gauge: &KnownGauge<'_>,
) -> Option<Rule> {
    let Some(quantity_key) = &a.quantity else {
        errs.err(
            a.id.span(),
            format!(
                "alarm `{id}` says nothing to watch; give `condition` (e.g. \"chamber pressure above 2e-5 mbar for 10 s\") \
                 or `quantity` with one of above, below, enters, leaves, crosses"
            ),
        );
        return None;
    };
    let gauge = match (&a.gauge, &settings.default_gauge) {
        // Temperature channels are not gauges of the config.
        (Some(g), _) if quantity_key.get_ref() == "temperature" => g.get_ref().clone(),
        (Some(g), _) => {
            if !known_gauge(errs, g) {
                return None;
            }
            g.get_ref().clone()
        }
        (None, Some(d)) => d.clone(),
        // Neither: the chamber pressure.
        (None, None) => crate::alarm::AUTO.to_string(),
    };
    let quantity = match Quantity::parse(
        quantity_key.get_ref(),
        a.length.as_ref().map(|l| l.get_ref().as_str()),
    ) {
        Ok(q) => q,
        Err(e) => {
            errs.err(quantity_key.span(), e);
            return None;
        }
    };
    if let Some(l) = quantity.length()
        && length_of(l).is_none()
    {
        let span = a.length.as_ref().map_or(quantity_key.span(), |s| s.span());
        let hint = crate::suggest::nearest(l, lengths.iter().map(|l| l.name.as_str()))
            .map(|s| format!(" (did you mean `{s}`?)"))
            .unwrap_or_default();
        errs.err(
            span,
            format!("no length named `{l}` is configured{hint} ([[length]])"),
        );
        return None;
    }
    let tests: Vec<(&str, &Spanned<String>)> = [
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
        return None;
    };
    let (quantity, test) = match syntax::test(&quantity, op, value.get_ref(), length_of) {
        Ok(t) => t,
        Err(e) => {
            errs.err(value.span(), e);
            return None;
        }
    };
    let deadband = match &a.deadband {
        None => Deadband::None,
        Some(d) => match syntax::deadband(&quantity, d.get_ref(), length_of) {
            Ok(db) => db,
            Err(e) => {
                errs.err(d.span(), e);
                return None;
            }
        },
    };
    Some(Rule {
        label: a.label.clone().unwrap_or_else(|| id.to_string()),
        id: id.to_string(),
        gauge,
        quantity,
        test,
        deadband,
        on_delay_s: a.on_delay.as_ref().map_or(0.0, |d| d.get_ref().si),
        off_delay_s: a.off_delay.as_ref().map_or(0.0, |d| d.get_ref().si),
        severity: a
            .severity
            .as_ref()
            .map_or(Severity::Warning, |s| *s.get_ref()),
        latching: a.latching.as_ref().is_some_and(|l| *l.get_ref()),
    })
}
