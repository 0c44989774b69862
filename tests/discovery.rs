//! Where the configuration comes from (`--config`, `RAREFY_CONFIG`,
//! `./rarefy.toml`, the XDG config directory), shell completions and the
//! manual page, through the real binary in a controlled environment.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn tempdir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("rarefy-discovery-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).expect("tmp");
    d
}

fn write_config(path: &Path) {
    std::fs::create_dir_all(path.parent().expect("parent")).expect("dir");
    std::fs::write(path, "[chamber]\nname = \"Bench B-4\"\n").expect("config");
}

/// `rarefy ARGS` in `cwd` with only the given environment.
fn rarefy_in(cwd: &Path, env: &[(&str, &Path)], args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_rarefy"))
        .args(args)
        .current_dir(cwd)
        .env_clear()
        .envs(env.iter().map(|(k, v)| (k, v.as_os_str())))
        .output()
        .expect("run rarefy")
}

/// The `config: …` line on stderr, if any.
fn config_line(o: &Output) -> Option<String> {
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    String::from_utf8_lossy(&o.stderr)
        .lines()
        .find(|l| l.starts_with("rarefy: config: "))
        .map(str::to_string)
}

#[test]
fn config_is_found_by_flag_then_env_then_working_dir_then_xdg_dir() {
    let root = tempdir("order");
    let (home, work, xdg) = (root.join("home"), root.join("work"), root.join("xdg"));
    std::fs::create_dir_all(&work).expect("work");
    let gases = |env: &[(&str, &Path)], extra: &[&str]| {
        let mut args = vec!["gases"];
        args.extend_from_slice(extra);
        rarefy_in(&work, env, &args)
    };
    // Nothing anywhere: the built-in defaults, and nothing said.
    assert_eq!(config_line(&gases(&[("HOME", &home)], &[])), None);
    // ~/.config/rarefy/rarefy.toml.
    let home_file = home.join(".config/rarefy/rarefy.toml");
    write_config(&home_file);
    let line = config_line(&gases(&[("HOME", &home)], &[])).expect("said");
    assert!(
        line.contains(&home_file.display().to_string())
            && line.ends_with("(from the user config directory)"),
        "{line}"
    );
    // $XDG_CONFIG_HOME replaces ~/.config: with no file there, none is used.
    let env_xdg = [("HOME", home.as_path()), ("XDG_CONFIG_HOME", xdg.as_path())];
    assert_eq!(config_line(&gases(&env_xdg, &[])), None);
    let xdg_file = xdg.join("rarefy/rarefy.toml");
    write_config(&xdg_file);
    let line = config_line(&gases(&env_xdg, &[])).expect("said");
    assert!(line.contains(&xdg_file.display().to_string()), "{line}");
    // ./rarefy.toml comes before the user directory …
    write_config(&work.join("rarefy.toml"));
    let line = config_line(&gases(&env_xdg, &[])).expect("said");
    assert_eq!(
        line,
        "rarefy: config: rarefy.toml (from the working directory)"
    );
    // … RAREFY_CONFIG before that …
    let env_file = root.join("from-env.toml");
    write_config(&env_file);
    let env_all = [
        ("HOME", home.as_path()),
        ("XDG_CONFIG_HOME", xdg.as_path()),
        ("RAREFY_CONFIG", env_file.as_path()),
    ];
    let line = config_line(&gases(&env_all, &[])).expect("said");
    assert!(
        line.contains("from-env.toml") && line.ends_with("(from RAREFY_CONFIG)"),
        "{line}"
    );
    // … and --config before everything.
    let flag_file = root.join("flag.toml");
    write_config(&flag_file);
    let flag = flag_file.display().to_string();
    let line = config_line(&gases(&env_all, &["--config", &flag])).expect("said");
    assert!(
        line.contains("flag.toml") && line.ends_with("(from --config)"),
        "{line}"
    );
    // A file named by RAREFY_CONFIG must exist; one found by looking need not.
    let missing = root.join("missing.toml");
    let o = gases(
        &[
            ("HOME", home.as_path()),
            ("RAREFY_CONFIG", missing.as_path()),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("missing.toml"));
    // A bad file lower down is never read when one above it is found.
    std::fs::write(&xdg_file, "this is not toml = = =").expect("bad");
    assert!(config_line(&gases(&env_xdg, &[])).is_some());
    let _ = std::fs::remove_dir_all(&root);
}

#[test]
fn completions_for_bash_zsh_and_fish() {
    let dir = tempdir("completions");
    for (shell, marker) in [
        ("bash", "complete -F"),
        ("zsh", "#compdef rarefy"),
        ("fish", "complete -c rarefy"),
    ] {
        let o = rarefy_in(&dir, &[], &["completions", shell]);
        assert_eq!(o.status.code(), Some(0), "{shell}");
        let script = String::from_utf8_lossy(&o.stdout);
        assert!(script.contains(marker), "{shell}: {script}");
        for cmd in ["record", "gate", "simulate", "completions"] {
            assert!(script.contains(cmd), "{shell} completes {cmd}");
        }
    }
    let o = rarefy_in(&dir, &[], &["completions", "tcsh"]);
    assert_eq!(o.status.code(), Some(2));
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn the_man_page_has_every_command() {
    let dir = tempdir("man");
    let o = rarefy_in(&dir, &[], &["man"]);
    assert_eq!(o.status.code(), Some(0));
    let page = String::from_utf8_lossy(&o.stdout);
    assert!(
        page.starts_with(".ie") || page.contains(".TH rarefy 1"),
        "{page}"
    );
    for section in [
        "RAREFY-WATCH",
        "RAREFY-REPLAY",
        "RAREFY-CALC",
        "RAREFY-GASES",
        "RAREFY-RECORD",
        "RAREFY-SIMULATE",
        "RAREFY-GATE-WAIT",
        "RAREFY-CONFIG-CHECK",
        "RAREFY-COMPLETIONS",
        "RAREFY-MAN",
    ] {
        assert!(page.contains(&format!(".SH \"{section}\"")), "{section}");
    }
    assert!(
        page.contains("RAREFY_CONFIG"),
        "the discovery order is documented"
    );
    assert!(page.contains("\\-\\-timeout"), "options are listed");
    let _ = std::fs::remove_dir_all(&dir);
}
