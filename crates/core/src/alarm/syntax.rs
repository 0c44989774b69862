//! The small rule language of rarefy, for gate conditions, enabling
//! conditions and one-off alarms on the command line.
//!
//! ```text
//! condition := [GAUGE] QUANTITY[(LENGTH)] TEST
//! TEST      := above VALUE | below VALUE | is CLASS | is not CLASS
//! VALUE     := NUMBER [UNIT] | NUMBER x LENGTH        (a multiple of a named length)
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
//! Examples: `chamber pressure below 5e-6 mbar`,
//! `mean_free_path above 10 x source-to-substrate`,
//! `regime(pumping line) is molecular`,
//! `pressure above 2e-5 mbar for 10 s as trip`,
//! `ion rate_of_change above 0.5 decade/min clear after 1 min latching`.

use std::sync::LazyLock;

use regex::Regex;

use super::quantity::{Class, Quantity};
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

static HEAD: LazyLock<Regex> = LazyLock::new(|| {
    Regex::new(
        r"^\s*(?:(?P<gauge>[A-Za-z0-9_.-]+)\s+)??(?P<q>[a-z_]+)(?:\((?P<len>[^)]*)\))?\s+(?P<op>above|below|is\s+not|is|enters|leaves|crosses)\s+(?P<rest>.+?)\s*$",
    )
    .expect("valid pattern")
});

const KEYWORDS: [&str; 6] = ["for", "clear", "deadband", "as", "latching", "named"];

struct Head<'a> {
    gauge: Option<String>,
    quantity: Quantity,
    op: String,
    rest: &'a str,
}

fn head<'a>(text: &'a str, lengths: &dyn Fn(&str) -> Option<f64>) -> Result<Head<'a>, String> {
    let caps = HEAD.captures(text).ok_or_else(|| {
        format!(
            "\"{}\" is not of the form [gauge] quantity above|below|is VALUE, e.g. \"chamber pressure below 5e-6 mbar\"",
            text.trim()
        )
    })?;
    let get = |n: &str| caps.name(n).map(|m| m.as_str());
    let quantity = Quantity::parse(get("q").unwrap_or_default(), get("len"))?;
    if let Some(l) = quantity.length()
        && lengths(l).is_none()
    {
        return Err(format!("no length named `{l}` is configured ([[length]])"));
    }
    let rest = caps.name("rest").map_or("", |m| m.as_str());
    Ok(Head {
        gauge: get("gauge").map(str::to_string),
        quantity,
        op: get("op")
            .unwrap_or_default()
            .split_whitespace()
            .collect::<Vec<_>>()
            .join(" "),
        rest,
    })
}

/// Reads a threshold for `q`: a value with its unit, or `N x LENGTH`.
fn value(q: &Quantity, text: &str, lengths: &dyn Fn(&str) -> Option<f64>) -> Result<f64, String> {
    if let Some((n, name)) = text.split_once(" x ")
        && matches!(q, Quantity::MeanFreePath)
    {
        let k: f64 = n
            .trim()
            .parse()
            .map_err(|_| format!("\"{n}\" is not a number"))?;
        let l = lengths(name.trim())
            .ok_or_else(|| format!("no length named `{}` is configured", name.trim()))?;
        return Ok(k * l);
    }
    q.threshold(text)
}

/// Parses a gate or enabling condition.
pub fn condition(text: &str, lengths: &dyn Fn(&str) -> Option<f64>) -> Result<Condition, String> {
    let h = head(text, lengths)?;
    let test = match (h.op.as_str(), h.quantity.is_class()) {
        ("above", false) => CondTest::Above(value(&h.quantity, h.rest, lengths)?),
        ("below", false) => CondTest::Below(value(&h.quantity, h.rest, lengths)?),
        ("is", true) => CondTest::Is(Class::parse(&h.quantity, h.rest)?),
        ("is not", true) => CondTest::IsNot(Class::parse(&h.quantity, h.rest)?),
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
    Ok(Condition {
        text: text.trim().to_string(),
        gauge: h.gauge,
        quantity: rate_kind(h.quantity, h.rest),
        test,
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

/// Parses a one-off alarm such as `pressure above 2e-5 mbar for 10 s as trip`.
/// `default_gauge` is used when the text names none; `index` numbers
/// unnamed rules.
pub fn alarm(
    text: &str,
    default_gauge: Option<&str>,
    index: usize,
    lengths: &dyn Fn(&str) -> Option<f64>,
) -> Result<Rule, String> {
    let h = head(text, lengths)?;
    let words: Vec<&str> = h.rest.split_whitespace().collect();
    let is_kw = |w: &str| KEYWORDS.contains(&w);
    let value_end = words.iter().position(|w| is_kw(w)).unwrap_or(words.len());
    let value_text = words[..value_end].join(" ");
    if value_text.is_empty() {
        return Err(format!("\"{}\": no value after `{}`", text.trim(), h.op));
    }
    let quantity = rate_kind(h.quantity.clone(), &value_text);
    let class = |w: &str| Class::parse(&quantity, w);
    let test = match (h.op.as_str(), quantity.is_class()) {
        ("above", false) => Test::Above(value(&quantity, &value_text, lengths)?),
        ("below", false) => Test::Below(value(&quantity, &value_text, lengths)?),
        ("enters", true) => Test::Enters(class(&value_text)?),
        ("leaves", true) => Test::Leaves(class(&value_text)?),
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
    let gauge = match (h.gauge, default_gauge) {
        (Some(g), _) => g,
        (None, Some(g)) => g.to_string(),
        (None, None) => return Err("name the gauge: \"GAUGE pressure above …\"".into()),
    };
    let mut rule = Rule {
        id: format!("cli-{index}"),
        label: text.trim().to_string(),
        gauge,
        quantity,
        test,
        deadband: Deadband::None,
        on_delay_s: 0.0,
        off_delay_s: 0.0,
        severity: Severity::Warning,
        latching: false,
    };
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
                let t = take_until_kw(&mut i);
                let q = rule.quantity.clone();
                rule.deadband = Deadband::parse(&t, |s| q.threshold(s))?;
            }
            "as" => rule.severity = Severity::parse(&take_until_kw(&mut i))?,
            "latching" => rule.latching = true,
            "named" => {
                let id = take_until_kw(&mut i);
                if id.is_empty() || id.contains(char::is_whitespace) {
                    return Err(format!("`named` needs one word, got \"{id}\""));
                }
                rule.id = id;
            }
            _ => return Err(format!("unexpected \"{kw}\"")),
        }
    }
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
}
