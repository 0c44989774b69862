//! Every README example runs as written on a fresh clone: each `rarefy …`
//! command in a code block names only files that exist in the repository,
//! and runs (calc, gases, config check, simulate, record on simulated,
//! piped or file sources, gate wait, completions, man) or, where it needs
//! hardware or a terminal (serial and TCP sources, the dashboard), is
//! accepted by the argument parser. The line templates of the README and of
//! `config/rarefy.toml` read the replies their comments show.

use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use rarefy::sample::{Reading, SourceEvent};

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

fn tempdir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("rarefy-readme-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).expect("tmp");
    d
}

fn readme() -> String {
    std::fs::read_to_string(root().join("README.md")).expect("README.md")
}

/// The code blocks of a Markdown text: (language, first line number, text).
fn code_blocks(md: &str) -> Vec<(String, usize, String)> {
    let mut out = Vec::new();
    let mut open: Option<(String, usize, String)> = None;
    for (i, line) in md.lines().enumerate() {
        let fence = line.trim_start().strip_prefix("```");
        match (fence, open.take()) {
            (Some(lang), None) => open = Some((lang.trim().to_string(), i + 2, String::new())),
            (Some(_), Some(block)) => out.push(block),
            (None, Some(mut block)) => {
                block.2.push_str(line);
                block.2.push('\n');
                open = Some(block);
            }
            (None, None) => {}
        }
    }
    out
}

/// A shell word or operator.
#[derive(Debug, Clone, PartialEq)]
enum Tok {
    Word(String),
    Op(String),
}

/// Splits one shell line into words (with '…' and "…" quoting) and the
/// operators `|`, `||`, `&&`, `>`; a `#` starting a word begins a comment.
fn shell_words(line: &str) -> Vec<Tok> {
    let mut out = Vec::new();
    let mut word: Option<String> = None;
    let mut chars = line.chars().peekable();
    while let Some(c) = chars.next() {
        match c {
            '\'' | '"' => {
                let w = word.get_or_insert_with(String::new);
                for d in chars.by_ref() {
                    if d == c {
                        break;
                    }
                    w.push(d);
                }
            }
            '#' if word.is_none() => break,
            c if c.is_whitespace() => out.extend(word.take().map(Tok::Word)),
            '|' | '&' | '>' => {
                out.extend(word.take().map(Tok::Word));
                let mut op = c.to_string();
                if chars.peek().is_some_and(|&d| d == c && c != '>') {
                    op.push(c);
                    chars.next();
                }
                out.push(Tok::Op(op));
            }
            c => word.get_or_insert_with(String::new).push(c),
        }
    }
    out.extend(word.map(Tok::Word));
    out
}

/// One `rarefy …` command of the README.
#[derive(Debug)]
struct Example {
    line: usize,
    text: String,
    args: Vec<String>,
    /// Another program's output is piped into it.
    piped_in: bool,
}

fn examples() -> Vec<Example> {
    let mut out = Vec::new();
    for (_, first, text) in code_blocks(&readme()) {
        let mut joined: Vec<(usize, String)> = Vec::new();
        let mut carry: Option<(usize, String)> = None;
        for (i, line) in text.lines().enumerate() {
            let (n, mut acc) = carry.take().unwrap_or((first + i, String::new()));
            match line.trim_end().strip_suffix('\\') {
                Some(part) => {
                    acc.push_str(part);
                    acc.push(' ');
                    carry = Some((n, acc));
                }
                None => {
                    acc.push_str(line);
                    joined.push((n, acc));
                }
            }
        }
        for (line, text) in joined {
            let toks = shell_words(&text);
            for (k, t) in toks.iter().enumerate() {
                if *t != Tok::Word("rarefy".into()) {
                    continue;
                }
                if k > 0 && !matches!(&toks[k - 1], Tok::Op(_)) {
                    continue;
                }
                let args = toks[k + 1..]
                    .iter()
                    .map_while(|t| match t {
                        Tok::Word(w) => Some(w.clone()),
                        Tok::Op(_) => None,
                    })
                    .collect();
                out.push(Example {
                    line,
                    text: text.trim().to_string(),
                    args,
                    piped_in: k > 0 && toks[k - 1] == Tok::Op("|".into()),
                });
            }
        }
    }
    out
}

/// Paths in the repository that an argument names: `config/…`,
/// `sample-logs/…` (also inside a `file://` URI).
fn repo_paths(args: &[String]) -> Vec<String> {
    args.iter()
        .map(|a| a.strip_prefix("file://").unwrap_or(a))
        .map(|a| a.split('?').next().unwrap_or(a))
        .filter(|a| a.starts_with("config/") || a.starts_with("sample-logs/"))
        .map(str::to_string)
        .collect()
}

/// Needs hardware or a terminal: checked by the parser only.
fn parse_only(args: &[String]) -> bool {
    matches!(args.first().map(String::as_str), Some("watch" | "replay"))
        || args.iter().any(|a| {
            a.starts_with("serial:")
                || a.starts_with("tcp:")
                || a.strip_prefix("file://").is_some_and(|p| {
                    let p = p.split('?').next().unwrap_or(p);
                    p.starts_with('/') && !Path::new(p).exists()
                })
        })
}

fn rarefy(args: &[String], stdin: Stdio) -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_rarefy"));
    c.args(args)
        .current_dir(root())
        .env_remove("RAREFY_CONFIG")
        .env(
            "XDG_CONFIG_HOME",
            std::env::temp_dir().join("rarefy-readme-no-config"),
        )
        .stdin(stdin)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped());
    c
}

/// The output of a child that was stopped or ended.
fn finish(child: Child) -> (Option<i32>, String) {
    let o = child.wait_with_output().expect("wait");
    (
        o.status.code(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

/// Waits up to `limit` for the child to end on its own.
fn ended_within(child: &mut Child, limit: Duration) -> bool {
    let start = Instant::now();
    while start.elapsed() < limit {
        if child.try_wait().expect("try_wait").is_some() {
            return true;
        }
        std::thread::sleep(Duration::from_millis(50));
    }
    false
}

#[test]
fn every_readme_command_names_existing_files_and_runs_or_parses() {
    let all = examples();
    assert!(all.len() >= 25, "only {} commands found", all.len());
    let out = tempdir("run");
    let mut failures = Vec::new();
    for (n, ex) in all.iter().enumerate() {
        let at = format!("README.md:{}: {}", ex.line, ex.text);
        for p in repo_paths(&ex.args) {
            if !root().join(&p).exists() {
                failures.push(format!("{at}: no file {p} in the repository"));
            }
        }
        // Without --source a live command reads its config's sources, else
        // stdin, which on a fresh clone is the terminal and is refused.
        let live_cmd = matches!(ex.args[0].as_str(), "record" | "gate" | "watch");
        let named_source = ex
            .args
            .iter()
            .any(|a| a == "--source" || a == "-s" || a == "--demo");
        if live_cmd && !named_source && !ex.piped_in {
            let config = ex
                .args
                .iter()
                .position(|a| a == "--config" || a == "-c")
                .and_then(|i| ex.args.get(i + 1))
                .and_then(|c| std::fs::read_to_string(root().join(c)).ok())
                .unwrap_or_default();
            if !config.lines().any(|l| l.trim() == "[[source]]") {
                failures.push(format!("{at}: no source: it would read the terminal"));
            }
        }
        if parse_only(&ex.args) {
            // Any argument clap rejects is reported before an unknown one at
            // the end, so an error naming the extra one means the rest parsed.
            let mut args = ex.args.clone();
            args.push("--readme-parse-check".into());
            let o = rarefy(&args, Stdio::null()).output().expect("run");
            let err = String::from_utf8_lossy(&o.stderr);
            if o.status.code() != Some(2)
                || !err.contains("unexpected argument '--readme-parse-check'")
            {
                failures.push(format!("{at}: does not parse: {err}"));
            }
            continue;
        }
        // Outputs go to a temporary directory, never into the clone.
        let mut args = ex.args.clone();
        for i in 1..args.len() {
            if matches!(args[i - 1].as_str(), "--out" | "-o" | "--record" | "--plot") {
                args[i] = out
                    .join(format!("{n}-{}", args[i].replace('/', "_")))
                    .display()
                    .to_string();
            }
        }
        let stdin = if ex.piped_in {
            Stdio::piped()
        } else {
            Stdio::null()
        };
        let mut child = rarefy(&args, stdin).spawn().expect("spawn");
        if let Some(mut input) = child.stdin.take() {
            use std::io::Write;
            input.write_all(b"1.0e-6\n2.0e-6\n").expect("stdin");
        }
        let live = matches!(args[0].as_str(), "record" | "gate");
        let limit = Duration::from_secs(if live { 3 } else { 60 });
        let (code, err) = if ended_within(&mut child, limit) {
            finish(child)
        } else if live {
            // Still recording or waiting after a few seconds: it started
            // well. SIGTERM ends a recording cleanly (exit 0).
            let pid = nix::unistd::Pid::from_raw(child.id() as i32);
            nix::sys::signal::kill(pid, nix::sys::signal::Signal::SIGTERM).expect("SIGTERM");
            if !ended_within(&mut child, Duration::from_secs(20)) {
                let _ = child.kill();
            }
            let (code, err) = finish(child);
            (if args[0] == "gate" { Some(0) } else { code }, err)
        } else {
            let _ = child.kill();
            failures.push(format!("{at}: still running after {limit:?}"));
            continue;
        };
        // record and report exit 3 when a trip alarm was active, as
        // documented.
        let trip_ok = matches!(args[0].as_str(), "record" | "report") && code == Some(3);
        if code != Some(0) && !trip_ok {
            failures.push(format!("{at}: exit {code:?}: {err}"));
        }
    }
    let _ = std::fs::remove_dir_all(&out);
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

/// The readings one reply line gives through a config's first source.
fn decode(config_text: &str, name: &str, reply: &str) -> Vec<(String, Reading)> {
    let config = rarefy::config::parse(config_text, Path::new(name)).expect("valid config");
    let source = config.sources.first().expect("a [[source]]");
    assert!(source.poll.is_some(), "{name}: the template polls");
    let mut decoder = rarefy::parse::decoder(&source.decoding).expect("decoder");
    decoder
        .decode(reply.as_bytes(), chrono::Utc::now(), "readme")
        .into_iter()
        .flat_map(|e| match e {
            SourceEvent::Samples(s) => s,
            other => panic!("{name}: {reply:?} gives {other:?}"),
        })
        .map(|s| (s.channel, s.reading))
        .collect()
}

#[test]
fn the_source_templates_read_the_replies_they_show() {
    let md = readme();
    let block = code_blocks(&md)
        .into_iter()
        .find(|(lang, _, text)| lang == "toml" && text.contains("[[source.template]]"))
        .expect("a template example")
        .2;
    let reply = "VX G1 +4.82E-06 GOOD G2 +1.20E-02 GOOD";
    assert!(block.contains(reply), "the README shows the reply it reads");
    let got = decode(&block, "README.md", reply);
    assert_eq!(
        got,
        [
            ("chamber".to_string(), Reading::Value(4.82e-6)),
            ("foreline".to_string(), Reading::Value(1.2e-2)),
        ]
    );
    let got = decode(
        &block,
        "README.md",
        "VX G1 +4.82E-06 IDLE G2 +9.99E+02 OVER",
    );
    assert!(matches!(got[0].1, Reading::Bad(_)) && matches!(got[1].1, Reading::Bad(_)));
    // config/rarefy.toml's commented [[source]] template, switched on.
    let sample = std::fs::read_to_string(root().join("config/rarefy.toml")).expect("sample");
    let on: String = sample
        .lines()
        .map(|l| {
            let t = l.strip_prefix("# ").unwrap_or(l);
            if t.starts_with("[[source")
                || t.starts_with("uri")
                || t.starts_with("poll")
                || t.starts_with("pattern")
                || t.starts_with("unit")
                || t.starts_with("status")
                || t.starts_with("time_format")
                || t.starts_with("timezone")
            {
                format!("{t}\n")
            } else {
                format!("{l}\n")
            }
        })
        .collect();
    let reply = "VX G1 +4.82E-06 GOOD G2 +3.10E-03 GOOD";
    assert!(
        sample.contains(reply),
        "config/rarefy.toml shows the reply it reads"
    );
    let got = decode(&on, "config/rarefy.toml", reply);
    assert_eq!(
        got,
        [
            ("chamber".to_string(), Reading::Value(4.82e-6)),
            ("process".to_string(), Reading::Value(3.1e-3)),
        ]
    );
}
