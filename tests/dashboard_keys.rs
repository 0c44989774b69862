//! The dashboard's keys in-process: editing a threshold and saving it to the
//! config file with its comments kept; replay determinism (the same log and
//! keys give the same screen); seeking to the next alarm.

use std::path::{Path, PathBuf};

use crossterm::event::{KeyCode, KeyEvent, KeyModifiers};
use ratatui::Terminal;
use ratatui::backend::TestBackend;

use rarefy::alarm::Monitor;
use rarefy::config;
use rarefy::ui::app::{App, Effect, Overlay};
use rarefy::ui::keys;
use rarefy::ui::render;
use rarefy::ui::run::{Player, ReplaySetup, index, seek};

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

fn key(c: char) -> KeyEvent {
    KeyEvent::new(KeyCode::Char(c), KeyModifiers::NONE)
}

fn code(k: KeyCode) -> KeyEvent {
    KeyEvent::new(k, KeyModifiers::NONE)
}

fn screen(app: &App) -> String {
    let mut t = Terminal::new(TestBackend::new(100, 30)).expect("terminal");
    t.draw(|f| render::draw(f, app)).expect("draw");
    format!("{}", t.backend())
}

fn demo_app(config_path: Option<PathBuf>) -> (App, ReplaySetup) {
    let path = config_path
        .clone()
        .unwrap_or_else(|| root().join("config/demo.toml"));
    let cfg = config::load(&path).expect("config");
    let setup = ReplaySetup {
        file: root().join("sample-logs/demo.csv"),
        foreign: None,
        monitor: cfg.monitor_setup(Vec::new()),
        gases: cfg.gases.clone(),
    };
    let mut app = App::new("demo", Monitor::new(setup.monitor.clone()), Vec::new());
    app.color = false;
    app.config_path = config_path;
    app.replay = Some(index(&setup).expect("index"));
    (app, setup)
}

#[test]
fn editing_a_threshold_saves_it_with_comments_kept() {
    let dir = std::env::temp_dir().join(format!("rarefy-edit-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("tmp");
    let cfg = dir.join("demo.toml");
    let original = std::fs::read_to_string(root().join("config/demo.toml")).expect("read");
    std::fs::write(&cfg, &original).expect("copy");
    let (mut app, setup) = demo_app(Some(cfg.clone()));
    let mut player = Player::open(&setup).expect("player");
    seek(
        &mut app,
        &mut player,
        &setup,
        "2026-11-09T09:10:00Z".parse().expect("time"),
    )
    .expect("seek");

    // ion-high is the first alarm; `e` opens the editor with its value.
    app.selected = 0;
    assert_eq!(keys::handle(&mut app, key('e')), Effect::None);
    let Overlay::Edit(e) = &app.overlay else {
        panic!("{:?}", app.overlay)
    };
    assert_eq!(e.key, "above");
    let old_len = e.input.chars().count();
    for _ in 0..old_len {
        keys::handle(&mut app, code(KeyCode::Backspace));
    }
    // A value of the wrong kind is refused before confirmation.
    for c in "3 m".chars() {
        keys::handle(&mut app, key(c));
    }
    keys::handle(&mut app, code(KeyCode::Enter));
    assert!(matches!(app.overlay, Overlay::Edit(_)), "{:?}", app.overlay);
    assert!(
        app.message
            .as_deref()
            .is_some_and(|m| m.contains("pressure")),
        "{:?}",
        app.message
    );
    for _ in 0..3 {
        keys::handle(&mut app, code(KeyCode::Backspace));
    }
    for c in "2e-5 mbar".chars() {
        keys::handle(&mut app, key(c));
    }
    keys::handle(&mut app, code(KeyCode::Enter));
    assert!(
        matches!(app.overlay, Overlay::Confirm(_)),
        "{:?}",
        app.overlay
    );
    assert!(
        screen(&app).contains("save to"),
        "the confirmation names the file"
    );
    let Effect::Save(path, text) = keys::handle(&mut app, key('y')) else {
        panic!("expected a save");
    };
    assert_eq!(path, cfg);
    // Only that value changed; every comment and the layout are kept.
    let expected = original.replacen("above = \"5e-5 mbar\"", "above = \"2e-5 mbar\"", 1);
    assert_eq!(text, expected);
    config::parse(&text, &path).expect("the saved config is valid");
    // And it applies at once.
    let a = app.monitor().alarms();
    assert!(
        a[0].threshold_text.contains("2.00e-5 mbar"),
        "{}",
        a[0].threshold_text
    );

    // Saying no leaves the file alone.
    keys::handle(&mut app, key('e'));
    keys::handle(&mut app, code(KeyCode::Enter));
    assert_eq!(keys::handle(&mut app, key('n')), Effect::None);
    assert_eq!(app.message.as_deref(), Some("not saved"));
}

#[test]
fn gate_hold_is_editable_too() {
    let (mut app, _) = demo_app(None);
    let n = app.monitor().alarms().len();
    app.selected = n; // the first gate
    keys::handle(&mut app, key('e'));
    let Overlay::Edit(e) = &app.overlay else {
        panic!()
    };
    assert_eq!((e.kind, e.key.as_str()), ("gate", "hold"));
    for _ in 0..e.input.chars().count() {
        keys::handle(&mut app, code(KeyCode::Backspace));
    }
    for c in "60 s".chars() {
        keys::handle(&mut app, key(c));
    }
    keys::handle(&mut app, code(KeyCode::Enter));
    // No config file (built-in): applied in memory, nothing to save.
    assert_eq!(keys::handle(&mut app, key('y')), Effect::None);
    assert_eq!(app.monitor().gates()[0].gate.hold_s, 60.0);
}

/// Plays a key sequence the way the replay loop does (seeks and steps).
fn play(keys_in: &[KeyEvent]) -> String {
    let (mut app, setup) = demo_app(None);
    let mut player = Player::open(&setup).expect("player");
    for k in keys_in {
        match keys::handle(&mut app, *k) {
            Effect::Seek(t) => seek(&mut app, &mut player, &setup, t).expect("seek"),
            Effect::Step => {
                player.feed(&mut app, None, 1);
            }
            _ => {}
        }
    }
    screen(&app)
}

#[test]
fn replay_is_deterministic_and_seeks_to_alarms() {
    let seq = [
        key(' '),
        key('n'),
        key('n'),
        code(KeyCode::Right),
        key(']'),
        key('u'),
        key('p'),
        key('r'),
        key('r'),
        key('A'),
        key('}'),
        key('{'),
    ];
    let a = play(&seq);
    let b = play(&seq);
    assert_eq!(a, b);
    // `n` goes to the next alarm going off: the first is the pumping line
    // crossing into molecular flow at 09:02:05.
    let s = play(&[key(' '), key('n')]);
    assert!(s.contains("2026-11-09 09:02:05"), "{s}");
    // Jumping on reaches the trip of the ion gauge at 09:31:11.
    let mut seq = vec![key(' ')];
    seq.extend(std::iter::repeat_n(key('n'), 5));
    let s = play(&seq);
    assert!(s.contains("09:31:11") && s.contains("trip unack"), "{s}");
    // End of the log.
    let s = play(&[key('G')]);
    assert!(s.contains("09:40:00"), "{s}");
    // A typed time after the log's end goes to the end.
    let mut seq = vec![key('t')];
    seq.extend("23:59".chars().map(key));
    seq.push(code(KeyCode::Enter));
    let s = play(&seq);
    assert!(s.contains("2026-11-09 09:40:00"), "{s}");
}

#[test]
fn the_step_key_is_r_and_the_dot_does_nothing() {
    let (mut app, _) = demo_app(None);
    assert_eq!(keys::handle(&mut app, key('r')), Effect::Step);
    assert_eq!(keys::handle(&mut app, key('.')), Effect::None);
    assert!(
        keys::HELP
            .iter()
            .any(|(k, w)| *k == "r" && w.contains("one row"))
    );
    assert!(keys::FOOTER_REPLAY.contains("r:step"));
}

#[test]
fn typing_replaces_the_suggested_value() {
    let (mut app, _) = demo_app(None);
    app.selected = 0;
    keys::handle(&mut app, key('s'));
    assert_eq!(app.overlay, Overlay::Shelve("30 min".into()));
    keys::handle(&mut app, key('2'));
    assert_eq!(app.overlay, Overlay::Shelve("2".into()));
    for c in "h".chars() {
        keys::handle(&mut app, key(c));
    }
    keys::handle(&mut app, code(KeyCode::Enter));
    assert_eq!(
        app.message.as_deref(),
        Some("ion-high shelved for 2h"),
        "{:?}",
        app.message
    );
    // Backspace edits the suggestion instead.
    app.selected = 1;
    keys::handle(&mut app, key('s'));
    keys::handle(&mut app, code(KeyCode::Backspace));
    keys::handle(&mut app, code(KeyCode::Backspace));
    keys::handle(&mut app, code(KeyCode::Backspace));
    keys::handle(&mut app, key('d'));
    keys::handle(&mut app, code(KeyCode::Enter));
    assert_eq!(
        app.message.as_deref(),
        Some("fast-rise shelved for 30 d"),
        "{:?}",
        app.message
    );
    // The threshold editor too.
    app.selected = 0;
    keys::handle(&mut app, key('e'));
    keys::handle(&mut app, key('1'));
    let Overlay::Edit(e) = &app.overlay else {
        panic!("{:?}", app.overlay)
    };
    assert_eq!(e.input, "1");
}

#[test]
fn next_and_previous_say_which_event_was_reached() {
    let (mut app, setup) = demo_app(None);
    let mut player = Player::open(&setup).expect("player");
    let Effect::Seek(t) = keys::handle(&mut app, key('n')) else {
        panic!("no seek")
    };
    seek(&mut app, &mut player, &setup, t).expect("seek");
    let m = app.message.clone().unwrap_or_default();
    assert!(
        m.starts_with("alarm event 1 of ") && m.contains("line-regime"),
        "{m}"
    );
    assert_eq!(keys::handle(&mut app, key('p')), Effect::None);
    assert_eq!(app.message.as_deref(), Some("no earlier alarm event"));
}

#[test]
fn a_clamped_seek_says_so() {
    let (mut app, setup) = demo_app(None);
    let mut player = Player::open(&setup).expect("player");
    seek(
        &mut app,
        &mut player,
        &setup,
        "2026-11-10T00:00:00Z".parse().expect("time"),
    )
    .expect("seek");
    let m = app.message.clone().unwrap_or_default();
    assert!(m.contains("after the log") && m.contains("09:40:00"), "{m}");
}

#[test]
fn the_replay_window_fits_the_log() {
    use rarefy::ui::run::fit_window;
    assert_eq!(fit_window(40.0 * 60.0), 3600.0);
    assert_eq!(fit_window(3.0 * 86_400.0), 7.0 * 86_400.0);
    assert_eq!(fit_window(30.0 * 86_400.0), 7.0 * 86_400.0);
}

#[test]
fn help_scrolls_with_the_arrows_and_closes_on_another_key() {
    let (mut app, _) = demo_app(None);
    keys::handle(&mut app, key('?'));
    let mut t = Terminal::new(TestBackend::new(80, 24)).expect("terminal");
    t.draw(|f| render::draw(f, &app)).expect("draw");
    assert!(app.help_max.get() > 0);
    keys::handle(&mut app, code(KeyCode::Down));
    assert_eq!(app.help_scroll, 1);
    assert_eq!(app.overlay, Overlay::Help);
    keys::handle(&mut app, code(KeyCode::PageDown));
    keys::handle(&mut app, code(KeyCode::Up));
    assert_eq!(app.help_scroll, 10);
    keys::handle(&mut app, key('x'));
    assert_eq!(app.overlay, Overlay::None);
}
