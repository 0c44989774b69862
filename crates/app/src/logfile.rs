//! Opening log files from disk; the readers themselves live in the core
//! ([`rarefy_core::log`]) and work on any buffered reader.

use std::fs::File;
use std::io::BufReader;
use std::path::Path;

use rarefy_core::log::{ForeignLogSpec, LogError, LogSource, open_log_from};

/// Opens a log file: a file starting with the v1 magic line is read as v1
/// (even when `foreign` is given); any other file needs `foreign`, the
/// checked `[log]` section of a configuration.
pub fn open_log(
    path: &Path,
    foreign: Option<&ForeignLogSpec>,
) -> Result<Box<dyn LogSource>, LogError> {
    let name = path.display().to_string();
    let file =
        File::open(path).map_err(|e| LogError::file(&name, format!("cannot open the log: {e}")))?;
    open_log_from(BufReader::new(file), &name, foreign)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn open_reports_a_missing_file() {
        let e = match open_log(Path::new("/nonexistent/run.csv"), None) {
            Ok(_) => panic!("opened"),
            Err(e) => e,
        };
        assert!(
            e.to_string()
                .starts_with("/nonexistent/run.csv: cannot open the log"),
            "{e}"
        );
    }
}
