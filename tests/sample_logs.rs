//! Every sample log reads back completely, and every v1 sample log is exactly
//! what the command listed in sample-logs/README.md makes.

use std::path::{Path, PathBuf};
use std::process::Command;

use rarefy::log::LogFormat;
use rarefy::logfile::open_log;

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

/// The `rarefy simulate …` commands of sample-logs/README.md, split into
/// arguments (quoted arguments kept whole).
fn commands() -> Vec<Vec<String>> {
    let text = std::fs::read_to_string(root().join("sample-logs/README.md")).expect("README");
    text.lines()
        .filter_map(|l| {
            let start = l.find("`rarefy simulate")? + 1;
            let end = start + l[start..].find('`')?;
            let cmd = &l[start..end];
            let mut args = Vec::new();
            let mut cur = String::new();
            let mut quoted = false;
            for c in cmd.chars() {
                match c {
                    '"' => quoted = !quoted,
                    ' ' if !quoted => {
                        if !cur.is_empty() {
                            args.push(std::mem::take(&mut cur));
                        }
                    }
                    c => cur.push(c),
                }
            }
            args.push(cur);
            Some(args[1..].to_vec())
        })
        .collect()
}

#[test]
fn every_v1_sample_log_reads_back_without_errors() {
    let mut seen = 0;
    for entry in std::fs::read_dir(root().join("sample-logs")).expect("dir") {
        let path = entry.expect("entry").path();
        if path.extension().is_none_or(|e| e != "csv") {
            continue;
        }
        let mut log = open_log(&path, None).unwrap_or_else(|e| panic!("{e}"));
        assert_eq!(log.format(), LogFormat::V1);
        let ids: Vec<String> = log.channels().into_iter().map(|c| c.id).collect();
        assert_eq!(ids, ["cdg", "chamber", "ion", "wall"], "{}", path.display());
        let mut rows = 0;
        for row in log.by_ref() {
            let row = row.unwrap_or_else(|e| panic!("{e}"));
            assert_eq!(row.samples.len(), 4);
            rows += 1;
        }
        assert!(rows > 1000, "{}: {rows} rows", path.display());
        assert_eq!(log.times_went_back(), 0);
        seen += 1;
    }
    assert_eq!(seen, 6);
}

#[test]
fn the_foreign_sample_reads_back_with_its_config() {
    let dir = root().join("sample-logs/foreign");
    let config =
        rarefy::config::load(&dir.join("marrowgate-ml3.toml")).unwrap_or_else(|e| panic!("{e}"));
    let spec = config.log.as_ref().expect("[log] section");
    let log =
        open_log(&dir.join("marrowgate-ml3.csv"), Some(spec)).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(log.format(), LogFormat::Foreign);
    let rows: Vec<_> = log.map(|r| r.unwrap_or_else(|e| panic!("{e}"))).collect();
    assert!(rows.len() > 100, "{}", rows.len());
    // Local Vienna time after the daylight-saving change reads as UTC+1.
    assert!(
        rows.windows(2).all(|w| w[0].time < w[1].time),
        "times increase"
    );
}

#[test]
fn sample_logs_are_what_their_commands_make() {
    let cmds = commands();
    assert_eq!(cmds.len(), 6, "{cmds:?}");
    let tmp: PathBuf = std::env::temp_dir().join(format!("rarefy-samples-{}", std::process::id()));
    std::fs::create_dir_all(&tmp).expect("tmp");
    for mut args in cmds {
        let out_at = args.iter().position(|a| a == "--out").expect("--out") + 1;
        let committed = root().join(&args[out_at]);
        let fresh = tmp.join(committed.file_name().expect("name"));
        args[out_at] = fresh.display().to_string();
        let o = Command::new(env!("CARGO_BIN_EXE_rarefy"))
            .args(&args)
            .output()
            .expect("run simulate");
        assert!(
            o.status.success(),
            "{args:?}: {}",
            String::from_utf8_lossy(&o.stderr)
        );
        let a = std::fs::read(&committed).expect("committed log");
        let b = std::fs::read(&fresh).expect("fresh log");
        assert!(
            a == b,
            "{} differs from what {args:?} makes",
            committed.display()
        );
    }
}

#[test]
fn recording_the_simulator_writes_exactly_n_rows() {
    let tmp = std::env::temp_dir().join(format!("rarefy-simrec-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&tmp);
    let o = Command::new(env!("CARGO_BIN_EXE_rarefy"))
        .args([
            "record",
            "--source",
            "sim:process?rate=max&steps=1234",
            "--out",
        ])
        .arg(&tmp)
        .output()
        .expect("run record");
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let mut rows = 0;
    for e in std::fs::read_dir(&tmp).expect("dir") {
        let log = open_log(&e.expect("entry").path(), None).unwrap_or_else(|e| panic!("{e}"));
        for r in log {
            assert_eq!(r.unwrap_or_else(|e| panic!("{e}")).samples.len(), 4);
            rows += 1;
        }
    }
    assert_eq!(rows, 1234);
}
