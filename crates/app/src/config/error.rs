//! Configuration errors located by file, line and column.

use std::fmt;
use std::ops::Range;
use std::path::{Path, PathBuf};

/// One problem in a configuration file.
#[derive(Debug, Clone, PartialEq)]
pub struct ConfigError {
    /// The file.
    pub file: PathBuf,
    /// One-based line, when known.
    pub line: Option<usize>,
    /// One-based column (in characters), when known.
    pub column: Option<usize>,
    /// What is wrong and what is expected.
    pub message: String,
    /// The offending source line, for display.
    pub snippet: Option<String>,
    /// Length of the offending span on the snippet line, in characters.
    pub width: usize,
}

impl ConfigError {
    /// An error for the whole file (cannot read it, …).
    pub fn file(file: &Path, message: impl Into<String>) -> Self {
        ConfigError {
            file: file.to_path_buf(),
            line: None,
            column: None,
            message: message.into(),
            snippet: None,
            width: 0,
        }
    }

    /// An error at byte range `span` of `source`.
    pub fn at(file: &Path, source: &str, span: Range<usize>, message: impl Into<String>) -> Self {
        let start = span.start.min(source.len());
        let end = span.end.clamp(start, source.len());
        let line_start = source[..start].rfind('\n').map_or(0, |i| i + 1);
        let line_end = source[start..]
            .find('\n')
            .map_or(source.len(), |i| start + i);
        let line = source[..start].matches('\n').count() + 1;
        let column = source[line_start..start].chars().count() + 1;
        let width = source[start..end.min(line_end)].chars().count().max(1);
        ConfigError {
            file: file.to_path_buf(),
            line: Some(line),
            column: Some(column),
            message: message.into(),
            snippet: Some(
                source[line_start..line_end]
                    .trim_end_matches('\r')
                    .to_string(),
            ),
            width,
        }
    }
}

impl fmt::Display for ConfigError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.file.display())?;
        if let (Some(l), Some(c)) = (self.line, self.column) {
            write!(f, ":{l}:{c}")?;
        }
        write!(f, ": {}", self.message)?;
        if let (Some(snippet), Some(l), Some(c)) = (&self.snippet, self.line, self.column) {
            let gutter = l.to_string().len();
            write!(
                f,
                "\n{:gutter$} |\n{l} | {snippet}\n{:gutter$} | {:pad$}{}",
                "",
                "",
                "",
                "^".repeat(self.width),
                pad = c - 1
            )?;
        }
        Ok(())
    }
}

/// All the problems found in one file.
#[derive(Debug, Clone, PartialEq)]
pub struct ConfigErrors(pub Vec<ConfigError>);

impl fmt::Display for ConfigErrors {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for (i, e) in self.0.iter().enumerate() {
            if i > 0 {
                writeln!(f)?;
            }
            write!(f, "{e}")?;
        }
        Ok(())
    }
}

impl std::error::Error for ConfigErrors {}

impl From<ConfigError> for ConfigErrors {
    fn from(e: ConfigError) -> Self {
        ConfigErrors(vec![e])
    }
}

/// The `[section]` header in force at byte `pos` of a TOML text, for messages.
pub fn section_at(source: &str, pos: usize) -> Option<String> {
    source[..pos.min(source.len())]
        .lines()
        .rev()
        .map(str::trim)
        .find(|l| l.starts_with('['))
        .map(|l| l.split('#').next().unwrap_or(l).trim().to_string())
}

/// Rewrites serde's "unknown field `x`, expected one of `a`, `b`" and
/// "unknown variant" messages with the nearest valid word.
pub fn explain_serde_message(message: &str, section: Option<&str>) -> String {
    let quoted: Vec<&str> = message.split('`').skip(1).step_by(2).collect();
    let (what, rest) = if let Some(rest) = message.strip_prefix("unknown field `") {
        ("key", rest)
    } else if let Some(rest) = message.strip_prefix("unknown variant `") {
        ("value", rest)
    } else {
        return message.trim().to_string();
    };
    let Some(bad) = rest.split('`').next() else {
        return message.to_string();
    };
    let expected: Vec<&str> = quoted.iter().skip(1).copied().collect();
    let place = section.map(|s| format!(" in {s}")).unwrap_or_default();
    let hint = crate::suggest::nearest(bad, expected.iter().copied())
        .map(|s| format!("; did you mean `{s}`?"))
        .unwrap_or_default();
    let list = if expected.is_empty() {
        "none here".to_string()
    } else {
        expected.join(", ")
    };
    let label = if what == "key" {
        "valid keys"
    } else {
        "expected"
    };
    format!("unknown {what} `{bad}`{place}{hint} ({label}: {list})")
}

/// Rewrites serde's "unknown field `x`, expected one of …" for a top-level
/// key as an unknown section that names itself (`[x]`, `[[x]]`), with the
/// nearest valid section. `header` is `[]`, `[[]]` or empty for a plain key.
pub fn unknown_section(message: &str, key: &str, header: &str) -> String {
    let expected: Vec<&str> = message.split('`').skip(3).step_by(2).collect();
    let shown = |k: &str| match header {
        "[]" => format!("[{k}]"),
        "[[]]" => format!("[[{k}]]"),
        _ => k.to_string(),
    };
    let what = if header.is_empty() {
        "top-level key"
    } else {
        "section"
    };
    let hint = crate::suggest::nearest(key, expected.iter().copied())
        .map(|s| format!("; did you mean `{s}`?"))
        .unwrap_or_default();
    format!(
        "unknown {what} `{}`{hint} (sections: {})",
        shown(key),
        expected.join(", ")
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn locates_line_and_column() {
        let src = "[chamber]\nname = \"x\"\nvolum = 3\n";
        let pos = src.find("volum").expect("present");
        let e = ConfigError::at(Path::new("c.toml"), src, pos..pos + 5, "bad");
        assert_eq!((e.line, e.column), (Some(3), Some(1)));
        let shown = e.to_string();
        assert!(shown.starts_with("c.toml:3:1: bad"), "{shown}");
        assert!(shown.contains("3 | volum = 3"), "{shown}");
        assert!(shown.contains("| ^^^^^"), "{shown}");
        assert_eq!(section_at(src, pos).as_deref(), Some("[chamber]"));
    }

    #[test]
    fn serde_messages_get_suggestions() {
        let m = explain_serde_message(
            "unknown field `volum`, expected one of `name`, `volume`, `surface_area`",
            Some("[chamber]"),
        );
        assert_eq!(
            m,
            "unknown key `volum` in [chamber]; did you mean `volume`? (valid keys: name, volume, surface_area)"
        );
        let m = explain_serde_message(
            "unknown variant `hardsphere`, expected `hard-sphere` or `sutherland`",
            None,
        );
        assert!(m.contains("did you mean `hard-sphere`?"), "{m}");
    }
}
