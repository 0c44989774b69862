//! Source URIs: `serial:///dev/ttyUSB0?baud=9600&parity=none&data=8&stop=1`,
//! `tcp://host:port`, `file:///path/log.csv?follow=true`, `stdin:`,
//! `sim:?scenario=demo&rate=60`.

use std::path::PathBuf;

use crate::suggest::nearest;

/// Serial line settings.
#[derive(Debug, Clone, PartialEq)]
pub struct SerialSettings {
    /// Device path.
    pub path: String,
    /// Baud rate.
    pub baud: u32,
    /// `none`, `even`, `odd`.
    pub parity: Parity,
    /// 5–8.
    pub data_bits: u8,
    /// 1 or 2.
    pub stop_bits: u8,
    /// `none`, `rtscts`, `xonxoff`.
    pub flow: Flow,
    /// Open with TIOCEXCL so no other program can open the port.
    pub exclusive: bool,
}

/// Serial parity.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Parity {
    /// No parity bit.
    None,
    /// Even parity.
    Even,
    /// Odd parity.
    Odd,
}

/// Serial flow control.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Flow {
    /// None.
    None,
    /// Hardware RTS/CTS.
    RtsCts,
    /// Software XON/XOFF.
    XonXoff,
}

/// Simulated-chamber settings.
#[derive(Debug, Clone, PartialEq)]
pub struct SimSettings {
    /// Scenario name.
    pub scenario: String,
    /// Random seed.
    pub seed: u64,
    /// Speed-up over real time; `None` runs as fast as the consumer takes.
    pub rate: Option<f64>,
    /// Stop after this much data time, s (default: the scenario's length).
    pub duration_s: Option<f64>,
    /// Stop after this many sample steps.
    pub steps: Option<u64>,
    /// Sample interval, s.
    pub interval_s: f64,
}

/// What kind of source, with its settings.
#[derive(Debug, Clone, PartialEq)]
pub enum SourceKind {
    /// A serial port.
    Serial(SerialSettings),
    /// A TCP client connection.
    Tcp {
        /// `host:port`.
        addr: String,
    },
    /// A file, read once or followed as it grows.
    File {
        /// Path.
        path: PathBuf,
        /// Keep reading as the file grows, across rotation and truncation.
        follow: bool,
        /// Start at the end of the file (only new lines).
        from_end: bool,
    },
    /// Standard input.
    Stdin,
    /// The simulated chamber.
    Sim(SimSettings),
}

/// A parsed source URI.
#[derive(Debug, Clone, PartialEq)]
pub struct SourceUri {
    /// The URI as written (used as the source's name).
    pub text: String,
    /// Kind and settings.
    pub kind: SourceKind,
    /// `channel=` for the plain format's bare numbers.
    pub channel: Option<String>,
    /// `unit=` for the plain format's bare numbers.
    pub unit: Option<String>,
}

fn params(query: &str) -> Result<Vec<(String, String)>, String> {
    query
        .split('&')
        .filter(|p| !p.is_empty())
        .map(|p| match p.split_once('=') {
            Some((k, v)) => Ok((k.to_string(), percent_decode(v)?)),
            None => Err(format!("parameter \"{p}\" needs a value (key=value)")),
        })
        .collect()
}

fn percent_decode(s: &str) -> Result<String, String> {
    let mut out = Vec::new();
    let b = s.as_bytes();
    let mut i = 0;
    while i < b.len() {
        if b[i] == b'%' {
            let hex = s
                .get(i + 1..i + 3)
                .and_then(|h| u8::from_str_radix(h, 16).ok())
                .ok_or_else(|| format!("bad percent escape in \"{s}\""))?;
            out.push(hex);
            i += 3;
        } else {
            out.push(b[i]);
            i += 1;
        }
    }
    String::from_utf8(out).map_err(|_| format!("\"{s}\" is not UTF-8 after percent decoding"))
}

fn unknown(key: &str, valid: &[&str], scheme: &str) -> String {
    let hint = nearest(key, valid.iter().copied())
        .map(|s| format!(" (did you mean `{s}`?)"))
        .unwrap_or_default();
    format!(
        "unknown parameter `{key}` for {scheme}:{hint}; expected one of {}",
        valid.join(", ")
    )
}

fn boolean(key: &str, v: &str) -> Result<bool, String> {
    match v {
        "true" | "yes" | "1" => Ok(true),
        "false" | "no" | "0" => Ok(false),
        _ => Err(format!("`{key}` must be true or false, got \"{v}\"")),
    }
}

fn number<T: std::str::FromStr>(key: &str, v: &str, what: &str) -> Result<T, String> {
    v.parse()
        .map_err(|_| format!("`{key}` must be {what}, got \"{v}\""))
}

const SCHEMES: [&str; 5] = ["serial", "tcp", "file", "stdin", "sim"];

impl SourceUri {
    /// Parses a source URI; errors say which part is wrong and what is expected.
    pub fn parse(text: &str) -> Result<Self, String> {
        let text = text.trim();
        let (scheme, rest) = text.split_once(':').ok_or_else(|| {
            format!(
                "\"{text}\" is not a source URI; expected one of serial:///dev/ttyUSB0?baud=9600, \
                 tcp://host:port, file:///path/log.csv?follow=true, stdin:, sim:"
            )
        })?;
        let (body, query) = rest.split_once('?').unwrap_or((rest, ""));
        let mut ps = params(query)?;
        let mut channel = None;
        let mut unit = None;
        ps.retain(|(k, v)| match k.as_str() {
            "channel" => {
                channel = Some(v.clone());
                false
            }
            "unit" => {
                unit = Some(v.clone());
                false
            }
            _ => true,
        });
        if let Some(u) = &unit
            && crate::sample::ChannelUnit::parse(u).is_none()
        {
            return Err(unknown_unit(u));
        }
        let kind = match scheme {
            "serial" => Self::serial(body, &ps)?,
            "tcp" => {
                let addr = body
                    .strip_prefix("//")
                    .unwrap_or(body)
                    .trim_end_matches('/');
                let ok = addr
                    .rsplit_once(':')
                    .is_some_and(|(h, p)| !h.is_empty() && p.parse::<u16>().is_ok());
                if !ok {
                    return Err(format!(
                        "tcp source \"{text}\" needs host:port, e.g. tcp://192.0.2.10:4001"
                    ));
                }
                if let Some((k, _)) = ps.first() {
                    return Err(unknown(k, &["channel", "unit"], "tcp"));
                }
                SourceKind::Tcp {
                    addr: addr.to_string(),
                }
            }
            "file" => {
                let path = body.strip_prefix("//").unwrap_or(body);
                if path.is_empty() {
                    return Err("file source needs a path, e.g. file:///var/log/chamber.csv".into());
                }
                let mut follow = false;
                let mut from_end = false;
                for (k, v) in &ps {
                    match k.as_str() {
                        "follow" => follow = boolean(k, v)?,
                        "from" => {
                            from_end = match v.as_str() {
                                "start" => false,
                                "end" => true,
                                _ => {
                                    return Err(format!(
                                        "`from` must be start or end, got \"{v}\""
                                    ));
                                }
                            }
                        }
                        _ => {
                            return Err(unknown(k, &["follow", "from", "channel", "unit"], "file"));
                        }
                    }
                }
                SourceKind::File {
                    path: PathBuf::from(percent_decode(path)?),
                    follow,
                    from_end,
                }
            }
            "stdin" => {
                if !body.is_empty() && body != "-" {
                    return Err(format!("stdin: takes no path, got \"{body}\""));
                }
                if let Some((k, _)) = ps.first() {
                    return Err(unknown(k, &["channel", "unit"], "stdin"));
                }
                SourceKind::Stdin
            }
            "sim" => Self::sim(body, &ps)?,
            other => {
                let hint = nearest(other, SCHEMES)
                    .map(|s| format!(" (did you mean `{s}:`?)"))
                    .unwrap_or_default();
                return Err(format!(
                    "unknown source scheme `{other}:`{hint}; expected serial:, tcp:, file:, stdin: or sim:"
                ));
            }
        };
        Ok(SourceUri {
            text: text.to_string(),
            kind,
            channel,
            unit,
        })
    }

    fn serial(body: &str, ps: &[(String, String)]) -> Result<SourceKind, String> {
        let path = body.strip_prefix("//").unwrap_or(body);
        if path.is_empty() {
            return Err("serial source needs a device path, e.g. serial:///dev/ttyUSB0".into());
        }
        let mut s = SerialSettings {
            path: percent_decode(path)?,
            baud: 9600,
            parity: Parity::None,
            data_bits: 8,
            stop_bits: 1,
            flow: Flow::None,
            exclusive: true,
        };
        for (k, v) in ps {
            match k.as_str() {
                "baud" => {
                    s.baud = number(k, v, "a baud rate such as 9600")?;
                    if s.baud == 0 {
                        return Err("`baud` must be greater than zero".into());
                    }
                }
                "parity" => {
                    s.parity = match v.as_str() {
                        "none" | "n" => Parity::None,
                        "even" | "e" => Parity::Even,
                        "odd" | "o" => Parity::Odd,
                        _ => {
                            return Err(format!("`parity` must be none, even or odd, got \"{v}\""));
                        }
                    }
                }
                "data" => {
                    s.data_bits = number(k, v, "5, 6, 7 or 8")?;
                    if !(5..=8).contains(&s.data_bits) {
                        return Err(format!("`data` must be 5, 6, 7 or 8, got \"{v}\""));
                    }
                }
                "stop" => {
                    s.stop_bits = number(k, v, "1 or 2")?;
                    if !(1..=2).contains(&s.stop_bits) {
                        return Err(format!("`stop` must be 1 or 2, got \"{v}\""));
                    }
                }
                "flow" => {
                    s.flow = match v.as_str() {
                        "none" => Flow::None,
                        "rtscts" | "hardware" => Flow::RtsCts,
                        "xonxoff" | "software" => Flow::XonXoff,
                        _ => {
                            return Err(format!(
                                "`flow` must be none, rtscts or xonxoff, got \"{v}\""
                            ));
                        }
                    }
                }
                "exclusive" => s.exclusive = boolean(k, v)?,
                _ => {
                    return Err(unknown(
                        k,
                        &[
                            "baud",
                            "parity",
                            "data",
                            "stop",
                            "flow",
                            "exclusive",
                            "channel",
                            "unit",
                        ],
                        "serial",
                    ));
                }
            }
        }
        Ok(SourceKind::Serial(s))
    }

    fn sim(body: &str, ps: &[(String, String)]) -> Result<SourceKind, String> {
        let mut s = SimSettings {
            scenario: if body.is_empty() {
                "demo".into()
            } else {
                body.to_string()
            },
            seed: 1,
            rate: Some(1.0),
            duration_s: None,
            steps: None,
            interval_s: 1.0,
        };
        for (k, v) in ps {
            match k.as_str() {
                "scenario" => s.scenario = v.clone(),
                "seed" => s.seed = number(k, v, "a whole number")?,
                "rate" => {
                    s.rate = if v == "max" {
                        None
                    } else {
                        let r: f64 = number(k, v, "a speed-up factor such as 60, or max")?;
                        if !(r.is_finite() && r > 0.0) {
                            return Err(format!("`rate` must be positive, got \"{v}\""));
                        }
                        Some(r)
                    }
                }
                "duration" => {
                    s.duration_s = Some(
                        crate::units::parse_duration(v)
                            .map_err(|e| format!("`duration`: {e}"))?
                            .si,
                    )
                }
                "steps" => s.steps = Some(number(k, v, "a whole number")?),
                "interval" => {
                    let i = crate::units::parse_duration(v)
                        .map_err(|e| format!("`interval`: {e}"))?
                        .si;
                    if i <= 0.0 {
                        return Err("`interval` must be longer than zero".into());
                    }
                    s.interval_s = i;
                }
                _ => {
                    return Err(unknown(
                        k,
                        &["scenario", "seed", "rate", "duration", "steps", "interval"],
                        "sim",
                    ));
                }
            }
        }
        s.scenario
            .parse::<crate::sim::Scenario>()
            .map_err(|e| format!("sim: {e}"))?;
        Ok(SourceKind::Sim(s))
    }
}

/// Units a channel may be in, for messages.
const UNITS: [&str; 13] = [
    "Pa", "kPa", "hPa", "mbar", "bar", "Torr", "mTorr", "micron", "atm", "psi", "K", "C", "F",
];

/// The error for a `unit=` that is neither a pressure nor a temperature unit.
fn unknown_unit(u: &str) -> String {
    let hint = crate::suggest::nearest(u, UNITS)
        .map(|s| format!("; did you mean `{s}`?"))
        .unwrap_or_default();
    format!(
        "unknown unit \"{u}\" in `unit=`{hint} (expected a pressure or temperature unit: {})",
        UNITS.join(", ")
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_unknown_unit_is_refused_with_a_suggestion() {
        let e = SourceUri::parse("stdin:?unit=mbr").expect_err("unknown unit");
        assert!(e.contains("unknown unit \"mbr\""), "{e}");
        assert!(e.contains("did you mean `mbar`?"), "{e}");
        assert!(SourceUri::parse("file:///x.log?unit=Torr").is_ok());
        assert!(SourceUri::parse("tcp://host:4000?unit=C").is_ok());
    }

    #[test]
    fn parses_every_scheme() {
        let s = SourceUri::parse(
            "serial:///dev/ttyUSB0?baud=19200&parity=even&data=7&stop=2&flow=rtscts",
        )
        .expect("serial");
        match s.kind {
            SourceKind::Serial(ser) => {
                assert_eq!(ser.path, "/dev/ttyUSB0");
                assert_eq!((ser.baud, ser.data_bits, ser.stop_bits), (19200, 7, 2));
                assert_eq!(ser.parity, Parity::Even);
                assert_eq!(ser.flow, Flow::RtsCts);
                assert!(ser.exclusive);
            }
            other => panic!("{other:?}"),
        }
        assert_eq!(
            SourceUri::parse("tcp://127.0.0.1:4001").expect("tcp").kind,
            SourceKind::Tcp {
                addr: "127.0.0.1:4001".into()
            }
        );
        assert_eq!(
            SourceUri::parse("file:///tmp/a%20b.csv?follow=true")
                .expect("file")
                .kind,
            SourceKind::File {
                path: "/tmp/a b.csv".into(),
                follow: true,
                from_end: false
            }
        );
        let s = SourceUri::parse("stdin:?channel=main&unit=Torr").expect("stdin");
        assert_eq!(s.kind, SourceKind::Stdin);
        assert_eq!(s.channel.as_deref(), Some("main"));
        match SourceUri::parse("sim:pumpdown?rate=max&steps=100&seed=7")
            .expect("sim")
            .kind
        {
            SourceKind::Sim(sim) => {
                assert_eq!(sim.scenario, "pumpdown");
                assert_eq!(sim.rate, None);
                assert_eq!(sim.steps, Some(100));
                assert_eq!(sim.seed, 7);
            }
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn bad_uris_say_what_is_expected() {
        let e = |s: &str| SourceUri::parse(s).expect_err(s);
        assert!(e("serial:///dev/x?baud=fast").contains("baud rate"));
        assert!(e("serial:///dev/x?bauds=9600").contains("did you mean `baud`?"));
        assert!(e("serial:///dev/x?parity=mark").contains("none, even or odd"));
        assert!(e("serial:///dev/x?data=9").contains("5, 6, 7 or 8"));
        assert!(e("serial://").contains("device path"));
        assert!(e("tcp://host").contains("host:port"));
        assert!(e("tcp://host:99999").contains("host:port"));
        assert!(e("file://").contains("needs a path"));
        assert!(e("file:///x?follow=maybe").contains("true or false"));
        assert!(e("sim:?rate=-2").contains("positive"));
        assert!(e("sim:pumpdwn").contains("pumpdown"));
        assert!(e("sim:?duration=5 parsecs").contains("duration"));
        assert!(e("serail:///dev/x").contains("did you mean `serial:`?"));
        assert!(e("nothing").contains("not a source URI"));
        assert!(e("stdin:?x").contains("needs a value"));
    }
}
