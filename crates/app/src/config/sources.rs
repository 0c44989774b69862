//! `[[source]]`: where readings come from, an optional poll request, and the
//! line templates that read them.

use super::{Errors, file};
use crate::parse::DecoderSettings;
use crate::parse::template::{Template, TemplateSpec};
use crate::sample::ChannelUnit;
use crate::source::{Poll, SourceUri};
use crate::timefmt::{TimeFormat, Zone};
use crate::units::{PressureUnit, TemperatureUnit, UnitKind};
use toml::Spanned;

/// A configured source, ready to start.
#[derive(Debug, Clone)]
pub struct SourceConfig {
    /// Where to read.
    pub uri: SourceUri,
    /// Poll request, if the controller must be asked.
    pub poll: Option<Poll>,
    /// How its lines are read: checked line templates, else the plain
    /// format with the URI's channel and unit.
    pub decoding: DecoderSettings,
}

impl SourceConfig {
    /// A source from a URI alone (the plain format).
    pub fn from_uri(uri: SourceUri) -> Self {
        let decoding = plain_settings(&uri);
        SourceConfig {
            uri,
            poll: None,
            decoding,
        }
    }
}

/// The plain format's settings for a URI: its `channel` (else `p`) and its
/// `unit` (else mbar).
fn plain_settings(uri: &SourceUri) -> DecoderSettings {
    DecoderSettings::Plain {
        channel: uri.channel.clone().unwrap_or_else(|| "p".into()),
        unit: uri
            .unit
            .as_deref()
            .and_then(ChannelUnit::parse)
            .unwrap_or(ChannelUnit::Pressure(PressureUnit::Mbar)),
    }
}

/// Resolves one `[[source]]`: its URI, poll request and line templates.
pub(super) fn resolve(errs: &mut Errors<'_>, s: file::SourceSection) -> Option<SourceConfig> {
    let uri = match SourceUri::parse(s.uri.get_ref()) {
        Ok(u) => u,
        Err(e) => {
            errs.err(s.uri.span(), e);
            return None;
        }
    };
    let poll = match &s.poll {
        Some(p) => match crate::parse::unescape(p.get_ref()) {
            Ok(bytes) => {
                let every = s.poll_interval.as_ref().map_or(1.0, |d| d.get_ref().si);
                if every <= 0.0 {
                    let span = s.poll_interval.as_ref().map_or(p.span(), |d| d.span());
                    errs.err(span, "poll_interval must be longer than zero");
                    None
                } else {
                    Some(Poll {
                        bytes,
                        every: std::time::Duration::from_secs_f64(every),
                    })
                }
            }
            Err(e) => {
                errs.err(p.span(), e);
                None
            }
        },
        None => {
            if let Some(d) = &s.poll_interval {
                errs.err(d.span(), "poll_interval without a poll string");
            }
            None
        }
    };
    let mut templates = Vec::new();
    for t in &s.template {
        let span = t.span();
        let t = t.get_ref();
        // An unknown unit is located at its own value, with the nearest
        // known unit as a hint.
        let unit = |this: &mut Errors<'_>, given: &Spanned<String>| -> Option<ChannelUnit> {
            let text = given.get_ref();
            let u = ChannelUnit::parse(text);
            if u.is_none() {
                let symbols = PressureUnit::ALL
                    .iter()
                    .map(|u| u.symbol())
                    .chain(TemperatureUnit::ALL.iter().map(|u| u.symbol()));
                let hint = crate::suggest::nearest(text.trim(), symbols)
                    .map(|s| format!("; did you mean \"{s}\"?"))
                    .unwrap_or_default();
                this.err(
                    given.span(),
                    format!("unknown unit \"{}\"; expected a pressure or temperature unit (mbar, Torr, Pa, C, K …){hint}", crate::sample::escape_bytes(text.as_bytes())),
                );
            }
            u
        };
        let mut spec = TemplateSpec {
            pattern: t.pattern.get_ref().clone(),
            unit: None,
            units: Default::default(),
            status: t.status.clone(),
            time_format: None,
            time_zone: None,
        };
        let mut ok = true;
        if let Some(u) = &t.unit {
            spec.unit = unit(errs, u);
            ok &= spec.unit.is_some();
        }
        for (ch, u) in &t.units {
            match unit(errs, u) {
                Some(u) => {
                    spec.units.insert(ch.clone(), u);
                }
                None => ok = false,
            }
        }
        if let Some(f) = &t.time_format {
            match TimeFormat::parse(f.get_ref()) {
                Ok(f) => spec.time_format = Some(f),
                Err(e) => {
                    errs.err(f.span(), e);
                    ok = false;
                }
            }
        }
        if let Some(z) = &t.timezone {
            match Zone::parse(z.get_ref()) {
                Ok(zone) => spec.time_zone = Some(zone),
                Err(e) => {
                    errs.err(z.span(), e);
                    ok = false;
                }
            }
            if let Some(f) = &spec.time_format
                && let Err(e) = crate::timefmt::check_zone(f, true)
            {
                errs.err(z.span(), e);
                ok = false;
            }
        }
        if !ok {
            continue;
        }
        // Checked here, so the error points at the template; the source
        // builds its decoder from the same settings when it starts.
        match Template::new(&spec) {
            Ok(_) => templates.push(spec),
            Err(e) => {
                let at = if e.starts_with("bad pattern") {
                    t.pattern.span()
                } else {
                    span
                };
                errs.err(at, format!("template: {e}"));
            }
        }
    }
    let decoding = if templates.is_empty() {
        plain_settings(&uri)
    } else {
        DecoderSettings::Templates(templates)
    };
    Some(SourceConfig {
        uri,
        poll,
        decoding,
    })
}
