//! The small rule language of rarefy, for gate conditions, enabling
//! conditions and one-off alarms on the command line.
//!
//! ```text
//! condition := [GAUGE] QUANTITY[(LENGTH)] TEST [deadband VALUE]
//! TEST      := above VALUE | below VALUE | is CLASS | is not CLASS
//! VALUE     := NUMBER [UNIT] | NUMBER x LENGTH        (a multiple of a named length)
//! QUANTITY  := pressure | mean_free_path | mean free path | …   (spaces for '_' allowed)
//!
//! alarm     := [GAUGE] QUANTITY[(LENGTH)] ATEST OPTION*
//! ATEST     := above VALUE | below VALUE | enters CLASS | leaves CLASS | crosses CLASS/CLASS
//! OPTION    := for DURATION          on-delay
//!            | clear after DURATION  off-delay
//!            | deadband VALUE        "10 %", "0.1 decade" or a value with unit
//!            | as SEVERITY           notice, warning (default) or trip
//!            | latching
//!            | named ID
//! ```
//!
//! The config's `[[alarm]]` `condition` key takes the same alarm text, and
//! its structured keys (`above = "…"`, `deadband = "…"`) go through the same
//! [`value`], [`test()`] and [`deadband`] readers, so every form accepts the
//! same values with the same messages.
//!
//! Examples: `chamber pressure below 5e-6 mbar`,
//! `mean_free_path above 10 x source-to-substrate`,
//! `regime(pumping line) is molecular`,
//! `pressure above 2e-5 mbar for 10 s as trip`,
//! `chamber mean free path above 10 x source-to-substrate for 5 s as warning`,
//! `ion rate_of_change above 0.5 decade/min clear after 1 min latching`.

use super::quantity::{Class, NAMES, Quantity};
use super::rule::{Deadband, Rule, Severity, Test};
use crate::units::{self, TimeUnit};

/// A condition of a gate (or an alarm's enabling condition).
#[derive(Debug, Clone, PartialEq)]
pub struct Condition {
    /// As written.
    pub text: String,
    /// Gauge; `None` means the default gauge.
    pub gauge: Option<String>,
    /// Quantity.
    pub quantity: Quantity,
    /// Test.
    pub test: CondTest,
    /// Once the condition holds, it keeps holding until the value is past
    /// the threshold by more than this (`deadband 0.1 decade`, as alarms).
    pub deadband: Deadband,
}

/// A condition's test; thresholds in SI.
#[derive(Debug, Clone, PartialEq)]
pub enum CondTest {
    /// Value above.
    Above(f64),
    /// Value below.
    Below(f64),
    /// Class is.
    Is(Class),
    /// Class is not.
    IsNot(Class),
}

const KEYWORDS: [&str; 6] = ["for", "clear", "deadband", "as", "latching", "named"];

/// The comparison words, in the order they are looked for.
const OPS: [&str; 6] = ["above", "below", "is", "enters", "leaves", "crosses"];

struct Head<'a> {
    gauge: Option<String>,
    quantity: Quantity,
    op: String,
    rest: &'a str,
}

/// The words of `text` outside parentheses, with their byte ranges.
fn words(text: &str) -> Vec<(usize, usize)> {
    let mut out = Vec::new();
    let mut depth = 0usize;
    let mut start = None;
    for (i, c) in text.char_indices() {
        match c {
            '(' => depth += 1,
            ')' => depth = depth.saturating_sub(1),
            _ => {}
        }
        if c.is_whitespace() && depth == 0 {
            if let Some(s) = start.take() {
                out.push((s, i));
            }
        } else if start.is_none() {
            start = Some(i);
        }
    }
    if let Some(s) = start {
        out.push((s, text.len()));
    }
    out
}

/// Reads `[GAUGE] QUANTITY[(LENGTH)] OP REST`. A quantity may be written
/// with spaces for its underscores (`mean free path`).
fn head<'a>(text: &'a str, lengths: &dyn Fn(&str) -> Option<f64>) -> Result<Head<'a>, String> {
    let t = text.trim();
    let not_form = || {
        format!(
            "\"{t}\" is not of the form [gauge] quantity above|below|is VALUE, e.g. \"chamber pressure below 5e-6 mbar\""
        )
    };
    let ws = words(t);
    let at = ws
        .iter()
        .position(|&(a, b)| OPS.contains(&&t[a..b]))
        .ok_or_else(not_form)?;
    let (op_start, mut op_end) = ws[at];
    let mut op = t[op_start..op_end].to_string();
    if op == "is"
        && let Some(&(a, b)) = ws.get(at + 1)
        && &t[a..b] == "not"
    {
        op = "is not".into();
        op_end = b;
    }
    let subject = t[..op_start].trim();
    let rest = t[op_end..].trim();
    if subject.is_empty() || rest.is_empty() {
        return Err(not_form());
    }
    let (names, length) = match subject.strip_suffix(')') {
        Some(open) => {
            let (names, length) = open.split_once('(').ok_or_else(not_form)?;
            (names.trim(), Some(length))
        }
        None => (subject, None),
    };
    let name_words: Vec<&str> = names.split_whitespace().collect();
    let known = |w: &[&str]| !w.is_empty() && NAMES.contains(&w.join("_").as_str());
    let (gauge, quantity) = match name_words.as_slice() {
        [] => return Err(not_form()),
        all if known(all) => (None, all.join("_")),
        [one] => (None, (*one).to_string()),
        [gauge, quantity @ ..] => (Some(*gauge), quantity.join("_")),
    };
    if let Some(g) = gauge
        && !g
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || "_.-".contains(c))
    {
        return Err(not_form());
    }
    let quantity = Quantity::parse(&quantity, length)?;
    if let Some(l) = quantity.length()
        && lengths(l).is_none()
    {
        return Err(format!("no length named `{l}` is configured ([[length]])"));
    }
    Ok(Head {
        gauge: gauge.map(str::to_string),
        quantity,
        op,
        rest,
    })
}

/// Reads a threshold for `q`: a value with its unit, or, for a mean free
/// path, `N x LENGTH` (a multiple of a named length; `×` works too). The one
/// value parser of gate conditions, `--alarm` texts and the config's
/// `[[alarm]]` keys.
pub fn value(
    q: &Quantity,
    text: &str,
    lengths: &dyn Fn(&str) -> Option<f64>,
) -> Result<f64, String> {
    let text = text.trim();
    if matches!(q, Quantity::MeanFreePath)
        && let Some((n, name)) = text.split_once(" x ").or_else(|| text.split_once(" × "))
    {
        let k: f64 = n
            .trim()
            .parse()
            .map_err(|_| format!("\"{}\" is not a number", n.trim()))?;
        let l = lengths(name.trim())
            .ok_or_else(|| format!("no length named `{}` is configured", name.trim()))?;
        return Ok(k * l);
    }
    q.threshold(text)
}

/// An alarm's test from its comparison (`above`, `below`, `enters`,
/// `leaves`, `crosses`) and value text, as written after the quantity in an
/// alarm text or as a config `[[alarm]]` key. A rate in decades turns
/// `rate_of_change` into decades per minute, so the quantity is returned too.
pub fn test(
    quantity: &Quantity,
    op: &str,
    value_text: &str,
    lengths: &dyn Fn(&str) -> Option<f64>,
) -> Result<(Quantity, Test), String> {
    let quantity = rate_kind(quantity.clone(), value_text);
    let class = |w: &str| Class::parse(&quantity, w);
    let test = match (op, quantity.is_class()) {
        ("above", false) => Test::Above(value(&quantity, value_text, lengths)?),
        ("below", false) => Test::Below(value(&quantity, value_text, lengths)?),
        ("enters", true) => Test::Enters(class(value_text)?),
        ("leaves", true) => Test::Leaves(class(value_text)?),
        ("crosses", true) => {
            let (a, b) = value_text.split_once('/').ok_or_else(|| {
                "crosses needs two neighbouring classes, e.g. transitional/molecular".to_string()
            })?;
            let (a, b) = (class(a)?, class(b)?);
            if a.rank().abs_diff(b.rank()) != 1 {
                return Err(format!("{}/{} are not neighbours", a.as_str(), b.as_str()));
            }
            Test::Crosses(a, b)
        }
        (op, true) => {
            return Err(format!(
                "{quantity} is a class; use enters, leaves or crosses, not {op}"
            ));
        }
        (op, false) => {
            return Err(format!(
                "{quantity} is a number; use above or below, not {op}"
            ));
        }
    };
    Ok((quantity, test))
}

/// An alarm's deadband for `quantity`: `"10 %"`, `"0.1 decade"` or a value
/// (read as thresholds are). A class has none.
pub fn deadband(
    quantity: &Quantity,
    text: &str,
    lengths: &dyn Fn(&str) -> Option<f64>,
) -> Result<Deadband, String> {
    if quantity.is_class() {
        return Err(format!(
            "{quantity} has no deadband; delay it instead (on_delay/off_delay, or `for`/`clear after`)"
        ));
    }
    Deadband::parse(text, |s| value(quantity, s, lengths))
}

/// Parses a gate or enabling condition, with an optional trailing
/// `deadband VALUE` (read as an alarm's deadband).
pub fn condition(text: &str, lengths: &dyn Fn(&str) -> Option<f64>) -> Result<Condition, String> {
    let h = head(text, lengths)?;
    let ws = words(h.rest);
    let (rest, band_text) = match ws.iter().position(|&(a, b)| &h.rest[a..b] == "deadband") {
        Some(i) => {
            let band = h.rest[ws[i].1..].trim();
            if band.is_empty() {
                return Err(format!(
                    "\"{}\": no value after `deadband`, e.g. \"deadband 0.1 decade\"",
                    text.trim()
                ));
            }
            (h.rest[..ws[i].0].trim(), Some(band))
        }
        None => (h.rest, None),
    };
    if rest.is_empty() {
        return Err(format!("\"{}\": no value after `{}`", text.trim(), h.op));
    }
    let test = match (h.op.as_str(), h.quantity.is_class()) {
        ("above", false) => CondTest::Above(value(&h.quantity, rest, lengths)?),
        ("below", false) => CondTest::Below(value(&h.quantity, rest, lengths)?),
        ("is", true) => CondTest::Is(Class::parse(&h.quantity, rest)?),
        ("is not", true) => CondTest::IsNot(Class::parse(&h.quantity, rest)?),
        ("above" | "below", true) => {
            return Err(format!("{} is a class; use is or is not", h.quantity));
        }
        ("is" | "is not", false) => {
            return Err(format!("{} is a number; use above or below", h.quantity));
        }
        (op, _) => {
            return Err(format!(
                "`{op}` is for alarms; a condition uses above, below, is or is not"
            ));
        }
    };
    let quantity = rate_kind(h.quantity, rest);
    let deadband = match band_text {
        Some(b) => deadband(&quantity, b, lengths)?,
        None => Deadband::None,
    };
    Ok(Condition {
        text: text.trim().to_string(),
        gauge: h.gauge,
        quantity,
        test,
        deadband,
    })
}

/// A rate threshold in decades turns the quantity into decades per minute.
fn rate_kind(q: Quantity, rest: &str) -> Quantity {
    if q == Quantity::RateOfChange
        && super::quantity::rate(rest.split(" for ").next().unwrap_or(rest)).is_ok_and(|(_, d)| d)
    {
        Quantity::DecadesPerMinute
    } else {
        q
    }
}

fn duration(text: &str, what: &str) -> Result<f64, String> {
    let compact = text.trim();
    units::parse::<TimeUnit>(compact)
        .map(|d| d.si)
        .map_err(|e| format!("{what}: {e}"))
}

/// An alarm text read, before its gauge and id are settled.
#[derive(Debug, Clone, PartialEq)]
pub struct AlarmText {
    /// The gauge the text names, if any.
    pub gauge: Option<String>,
    /// The id given with `named`, if any.
    pub named: Option<String>,
    /// The rule; its `gauge` and `id` are empty until the caller sets them,
    /// its label is the text.
    pub rule: Rule,
}

/// Reads an alarm text (`[GAUGE] QUANTITY TEST OPTION*`, see the module
/// docs) without settling its gauge or id: what `--alarm` and a config
/// `[[alarm]]`'s `condition` share.
pub fn alarm_text(text: &str, lengths: &dyn Fn(&str) -> Option<f64>) -> Result<AlarmText, String> {
    let h = head(text, lengths)?;
    let words: Vec<&str> = h.rest.split_whitespace().collect();
    let is_kw = |w: &str| KEYWORDS.contains(&w);
    let value_end = words.iter().position(|w| is_kw(w)).unwrap_or(words.len());
    let value_text = words[..value_end].join(" ");
    if value_text.is_empty() {
        return Err(format!("\"{}\": no value after `{}`", text.trim(), h.op));
    }
    let (quantity, test) = test(&h.quantity, &h.op, &value_text, lengths)?;
    let mut rule = Rule {
        id: String::new(),
        label: text.trim().to_string(),
        gauge: String::new(),
        quantity,
        test,
        deadband: Deadband::None,
        on_delay_s: 0.0,
        off_delay_s: 0.0,
        severity: Severity::Warning,
        latching: false,
    };
    let mut named = None;
    let mut i = value_end;
    let take_until_kw = |i: &mut usize| -> String {
        let start = *i;
        while *i < words.len() && !is_kw(words[*i]) {
            *i += 1;
        }
        words[start..*i].join(" ")
    };
    while i < words.len() {
        let kw = words[i];
        i += 1;
        match kw {
            "for" => rule.on_delay_s = duration(&take_until_kw(&mut i), "for")?,
            "clear" => {
                if words.get(i) != Some(&"after") {
                    return Err("write `clear after DURATION`".into());
                }
                i += 1;
                rule.off_delay_s = duration(&take_until_kw(&mut i), "clear after")?;
            }
            "deadband" => {
                rule.deadband = deadband(&rule.quantity, &take_until_kw(&mut i), lengths)?;
            }
            "as" => rule.severity = Severity::parse(&take_until_kw(&mut i))?,
            "latching" => rule.latching = true,
            "named" => {
                let id = take_until_kw(&mut i);
                if id.is_empty() || id.contains(char::is_whitespace) {
                    return Err(format!("`named` needs one word, got \"{id}\""));
                }
                named = Some(id);
            }
            _ => return Err(format!("unexpected \"{kw}\"")),
        }
    }
    Ok(AlarmText {
        gauge: h.gauge,
        named,
        rule,
    })
}

/// Parses a one-off alarm such as `pressure above 2e-5 mbar for 10 s as trip`.
/// `default_gauge` is used when the text names none; `index` numbers
/// unnamed rules.
pub fn alarm(
    text: &str,
    default_gauge: Option<&str>,
    index: usize,
    lengths: &dyn Fn(&str) -> Option<f64>,
) -> Result<Rule, String> {
    let AlarmText {
        gauge,
        named,
        mut rule,
    } = alarm_text(text, lengths)?;
    rule.gauge = match (gauge, default_gauge) {
        (Some(g), _) => g,
        (None, Some(g)) => g.to_string(),
        (None, None) => return Err("name the gauge: \"GAUGE pressure above …\"".into()),
    };
    rule.id = named.unwrap_or_else(|| format!("cli-{index}"));
    Ok(rule)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::regime::FlowRegime;

    fn lengths(name: &str) -> Option<f64> {
        match name {
            "source-to-substrate" => Some(0.12),
            "pumping line" => Some(0.04),
            _ => None,
        }
    }

    #[test]
    fn conditions() {
        let c = condition("chamber pressure below 5e-6 mbar", &lengths).expect("valid");
        assert_eq!(c.gauge.as_deref(), Some("chamber"));
        assert_eq!(c.quantity, Quantity::Pressure);
        assert!(matches!(c.test, CondTest::Below(t) if (t - 5e-4).abs() < 1e-15));
        let c =
            condition("mean_free_path above 10 x source-to-substrate", &lengths).expect("valid");
        assert_eq!(c.gauge, None);
        assert!(matches!(c.test, CondTest::Above(t) if (t - 1.2).abs() < 1e-12));
        let c = condition("ion regime(pumping line) is not viscous", &lengths).expect("valid");
        assert_eq!(c.test, CondTest::IsNot(Class::Regime(FlowRegime::Viscous)));
        let c = condition("knudsen(pumping line) above 0.5", &lengths).expect("valid");
        assert_eq!(c.quantity, Quantity::Knudsen("pumping line".into()));
    }

    #[test]
    fn conditions_take_a_deadband() {
        let c = condition(
            "chamber pressure below 5e-6 mbar deadband 0.1 decade",
            &lengths,
        )
        .expect("valid");
        assert_eq!(c.deadband, Deadband::Decades(0.1));
        assert!(matches!(c.test, CondTest::Below(t) if (t - 5e-4).abs() < 1e-15));
        let c = condition("pressure above 1 mbar deadband 10 %", &lengths).expect("valid");
        assert_eq!(c.deadband, Deadband::Fraction(0.1));
        let c = condition("pressure above 1 mbar", &lengths).expect("valid");
        assert_eq!(c.deadband, Deadband::None);
        let e = |s: &str| condition(s, &lengths).expect_err(s);
        assert!(e("pressure below 1 mbar deadband").contains("no value after `deadband`"));
        assert!(e("pressure below deadband 1 %").contains("no value after `below`"));
        assert!(e("regime(pumping line) is viscous deadband 10 %").contains("no deadband"));
        assert!(e("pressure below 1 mbar deadband 5 m").contains("deadband"));
    }

    #[test]
    fn bad_conditions_say_why() {
        let e = |s: &str| condition(s, &lengths).expect_err(s);
        assert!(e("pressure near 5 mbar").contains("is not of the form"));
        assert!(e("knudsen(bore) above 1").contains("no length named `bore`"));
        assert!(e("regime(pumping line) above 1").contains("use is or is not"));
        assert!(e("pressure is high").contains("use above or below"));
        assert!(e("pressure above 5 m").contains("unknown pressure unit"));
        assert!(e("presure below 1 mbar").contains("did you mean `pressure`?"));
        assert!(e("pressure enters 1 mbar").contains("for alarms"));
    }

    #[test]
    fn one_off_alarms() {
        let r = alarm(
            "pressure above 2e-5 mbar for 10 s as trip",
            Some("chamber"),
            1,
            &lengths,
        )
        .expect("valid");
        assert_eq!(r.gauge, "chamber");
        assert_eq!(r.on_delay_s, 10.0);
        assert_eq!(r.severity, Severity::Trip);
        assert!(matches!(r.test, Test::Above(t) if (t - 2e-3).abs() < 1e-15));
        let r = alarm(
            "ion rate_of_change above 0.5 decade/min clear after 1 min deadband 10 % latching named rise",
            None,
            2,
            &lengths,
        )
        .expect("valid");
        assert_eq!(r.quantity, Quantity::DecadesPerMinute);
        assert_eq!(r.off_delay_s, 60.0);
        assert_eq!(r.deadband, Deadband::Fraction(0.1));
        assert!(r.latching);
        assert_eq!(r.id, "rise");
        let r = alarm(
            "regime(pumping line) crosses transitional/molecular",
            Some("g"),
            3,
            &lengths,
        )
        .expect("valid");
        assert!(matches!(r.test, Test::Crosses(..)));
        let r = alarm(
            "pressure above 1e-3 mbar deadband 0.2 decade",
            Some("g"),
            4,
            &lengths,
        )
        .expect("valid");
        assert_eq!(r.deadband, Deadband::Decades(0.2));
        let r = alarm(
            "pressure below 1e-6 mbar deadband 1e-7 mbar",
            Some("g"),
            5,
            &lengths,
        )
        .expect("valid");
        assert!(matches!(r.deadband, Deadband::Absolute(a) if (a - 1e-5).abs() < 1e-18));
    }

    #[test]
    fn bad_alarms_say_why() {
        let e = |s: &str| alarm(s, Some("g"), 1, &lengths).expect_err(s);
        assert!(e("pressure above for 10 s").contains("no value"));
        assert!(e("pressure above 1 mbar as fatal").contains("unknown severity"));
        assert!(e("pressure above 1 mbar for -3 s").contains("must not be negative"));
        assert!(e("pressure above 1 mbar clear 3 s").contains("clear after"));
        assert!(e("regime(pumping line) crosses viscous/molecular").contains("not neighbours"));
        assert!(e("vacuum_range above 3").contains("class"));
        assert!(alarm("pressure above 1 mbar", None, 1, &lengths).is_err());
    }

    #[test]
    fn quantities_may_be_written_with_spaces() {
        let spaced = alarm(
            "chamber mean free path above 10 x source-to-substrate for 5 s as warning",
            None,
            1,
            &lengths,
        )
        .expect("valid");
        let joined = alarm(
            "chamber mean_free_path above 10 × source-to-substrate for 5 s as warning",
            None,
            1,
            &lengths,
        )
        .expect("valid");
        assert_eq!(spaced.gauge, "chamber");
        assert_eq!(spaced.quantity, Quantity::MeanFreePath);
        assert!(matches!(spaced.test, Test::Above(t) if (t - 1.2).abs() < 1e-12));
        assert_eq!(spaced.on_delay_s, 5.0);
        assert_eq!(
            (spaced.test, spaced.on_delay_s),
            (joined.test, joined.on_delay_s)
        );
        let c = condition("rate of change above 1 decade/min", &lengths).expect("valid");
        assert_eq!((c.gauge, c.quantity), (None, Quantity::DecadesPerMinute));
        let c = condition("g vacuum range is high", &lengths).expect("valid");
        assert_eq!(c.gauge.as_deref(), Some("g"));
        assert!(condition("mean free pth above 1 m", &lengths).is_err());
    }

    #[test]
    fn texts_and_parts_share_one_reader() {
        let t = alarm_text(
            "g pressure above 1e-3 mbar deadband 10 % named hi",
            &lengths,
        )
        .expect("valid");
        assert_eq!(
            (t.gauge.as_deref(), t.named.as_deref()),
            (Some("g"), Some("hi"))
        );
        assert_eq!(t.rule.deadband, Deadband::Fraction(0.1));
        let (q, tst) = test(
            &Quantity::MeanFreePath,
            "above",
            "10 x pumping line",
            &lengths,
        )
        .expect("valid");
        assert_eq!(q, Quantity::MeanFreePath);
        assert!(matches!(tst, Test::Above(v) if (v - 0.4).abs() < 1e-12));
        let e = test(&Quantity::Pressure, "above", "5 m", &lengths).expect_err("bad unit");
        let from_text = alarm("g pressure above 5 m", None, 1, &lengths).expect_err("bad unit");
        assert_eq!(e, from_text);
        let regime = Quantity::Regime("pumping line".into());
        assert!(
            deadband(&regime, "10 %", &lengths)
                .expect_err("class")
                .contains("no deadband")
        );
        let e = alarm(
            "regime(pumping line) enters viscous deadband 10 %",
            Some("g"),
            1,
            &lengths,
        )
        .expect_err("class");
        assert!(e.contains("no deadband"), "{e}");
    }
}
