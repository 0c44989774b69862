//! The dashboard drawn into ratatui's TestBackend, at 80×24, 120×40 and
//! 200×60, for each panel and the whole screen, in the states an operator
//! meets: no data yet, a stale gauge, over-range, an alarm unacknowledged,
//! acknowledged and shelved, a gate not ready and ready, replay paused.
//! Snapshots live in tests/snapshots/ and are reviewed by hand.

use std::path::Path;

use chrono::{DateTime, Utc};
use ratatui::Terminal;
use ratatui::backend::TestBackend;
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::style::Modifier;

use rarefy::alarm::Monitor;
use rarefy::config;
use rarefy::logfile::open_log;
use rarefy::pipeline::Operation;
use rarefy::sample::{ChannelUnit, Sample, SourceEvent};
use rarefy::ui::app::{App, GaugeInfo};
use rarefy::ui::render::{self, Look, Panel};
use rarefy::ui::run::{ReplaySetup, index};
use rarefy::units::PressureUnit;

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

fn time(s: &str) -> DateTime<Utc> {
    DateTime::parse_from_rfc3339(&format!("2026-11-09T{s}Z"))
        .expect("time")
        .with_timezone(&Utc)
}

/// The demo config's dashboard fed `sample-logs/demo.csv` up to `until`.
fn app_at(until: Option<&str>) -> App {
    let cfg = config::load(&root().join("config/demo.toml")).expect("demo config");
    let monitor = Monitor::new(cfg.monitor_setup(Vec::new()));
    let gauges = GaugeInfo::configured(&cfg);
    let mut app = App::new(cfg.chamber.name.clone(), monitor, gauges);
    app.color = false;
    app.window_s = 900.0;
    if let Some(until) = until {
        let until = time(until);
        let log = open_log(&root().join("sample-logs/demo.csv"), None).expect("log");
        for row in log {
            let row = row.expect("row");
            if row.time > until {
                break;
            }
            app.ingest(&SourceEvent::Samples(row.samples), None);
        }
    }
    app
}

fn screen(app: &App, w: u16, h: u16) -> String {
    let mut t = Terminal::new(TestBackend::new(w, h)).expect("terminal");
    t.draw(|f| render::draw(f, app)).expect("draw");
    format!("{}", t.backend())
}

fn panel(app: &App, p: Panel, w: u16, h: u16) -> String {
    let area = Rect::new(0, 0, w, h);
    let mut buf = Buffer::empty(area);
    render::draw_panel(p, app, &Look::of(app), area, &mut buf);
    let mut out = String::new();
    for y in 0..h {
        for x in 0..w {
            out.push_str(buf[(x, y)].symbol());
        }
        out.push('\n');
    }
    out
}

const SIZES: [(u16, u16); 3] = [(80, 24), (120, 40), (200, 60)];

#[test]
fn whole_screen_no_data_yet() {
    let app = app_at(None);
    for (w, h) in SIZES {
        insta::assert_snapshot!(format!("no_data_{w}x{h}"), screen(&app, w, h));
    }
}

#[test]
fn whole_screen_during_pumpdown_with_over_range_and_gate_not_ready() {
    // 09:00:30: the capacitance gauge is still over-range, the ion gauge
    // protects itself (suppressed by design), the gate is not ready.
    let app = app_at(Some("09:00:30"));
    for (w, h) in SIZES {
        insta::assert_snapshot!(format!("pumpdown_{w}x{h}"), screen(&app, w, h));
    }
    let s = screen(&app, 120, 40);
    assert!(s.contains("over-range"), "{s}");
    assert!(s.contains("NOT READY"), "{s}");
    assert!(s.contains("suppressed"), "{s}");
}

#[test]
fn gate_ready_at_high_vacuum() {
    let app = app_at(Some("09:10:00"));
    let s = screen(&app, 120, 40);
    assert!(s.contains("READY") && !s.contains("NOT READY"), "{s}");
    insta::assert_snapshot!("gate_ready_120x40", s);
}

#[test]
fn stale_gauge() {
    let mut app = app_at(Some("09:10:00"));
    // No readings for 30 s of data time: every gauge goes stale.
    app.tick(time("09:10:30"));
    let s = screen(&app, 80, 24);
    assert!(s.contains("stale"), "{s}");
    insta::assert_snapshot!("stale_80x24", s);
}

#[test]
fn alarm_unacknowledged_acknowledged_and_shelved() {
    let mut app = app_at(Some("09:31:30"));
    // Select ion-high, the first rule.
    app.selected = 0;
    let s = screen(&app, 120, 40);
    assert!(s.contains("unacknowledged"), "{s}");
    insta::assert_snapshot!("alarm_unack_120x40", s);
    let now = app.monitor().now().expect("time");
    app.operate(&Operation::Acknowledge("ion-high".into()), now, None)
        .expect("ack");
    let s = screen(&app, 120, 40);
    assert!(s.contains("acknowledged"), "{s}");
    insta::assert_snapshot!("alarm_ack_120x40", s);
    app.operate(&Operation::Shelve("fast-rise".into(), 1800.0), now, None)
        .expect("shelve");
    let s = screen(&app, 80, 24);
    assert!(s.contains("shelved"), "{s}");
    insta::assert_snapshot!("alarm_shelved_80x24", s);
}

#[test]
fn replay_paused_with_timeline() {
    let cfg = config::load(&root().join("config/demo.toml")).expect("config");
    let setup = ReplaySetup {
        file: root().join("sample-logs/demo.csv"),
        foreign: None,
        monitor: cfg.monitor_setup(Vec::new()),
        gases: cfg.gases.clone(),
    };
    let mut replay = index(&setup).expect("index");
    replay.paused = true;
    let mut app = app_at(Some("09:31:30"));
    app.replay = Some(replay);
    for (w, h) in SIZES {
        let s = screen(&app, w, h);
        assert!(s.contains("REPLAY PAUSED"), "{s}");
        insta::assert_snapshot!(format!("replay_paused_{w}x{h}"), s);
    }
}

#[test]
fn each_panel_alone() {
    let app = app_at(Some("09:31:30"));
    for (p, name, w, h) in [
        (Panel::Title, "title", 80, 1),
        (Panel::Readings, "readings", 40, 6),
        (Panel::Kinetics, "kinetics_compact", 40, 7),
        (Panel::Kinetics, "kinetics_full", 50, 11),
        (Panel::Lengths, "lengths", 36, 5),
        (Panel::Alarms, "alarms", 80, 10),
        (Panel::Trend, "trend", 80, 12),
        (Panel::Status, "status", 80, 1),
        (Panel::Footer, "footer", 80, 1),
    ] {
        insta::assert_snapshot!(format!("panel_{name}"), panel(&app, p, w, h));
    }
}

#[test]
fn ascii_mode_uses_only_ascii() {
    let mut app = app_at(Some("09:31:30"));
    app.ascii = true;
    for (w, h) in SIZES {
        let s = screen(&app, w, h);
        assert!(s.is_ascii(), "non-ASCII in:\n{s}");
    }
    insta::assert_snapshot!("ascii_80x24", screen(&app, 80, 24));
}

#[test]
fn help_overlay_shows_the_caution() {
    let mut app = app_at(Some("09:05:00"));
    app.overlay = rarefy::ui::app::Overlay::Help;
    let s = screen(&app, 80, 24);
    assert!(s.contains("not a safety interlock"), "{s}");
    insta::assert_snapshot!("help_80x24", s);
}

#[test]
fn tiny_terminals_do_not_panic() {
    let app = app_at(Some("09:31:30"));
    for (w, h) in [(1, 1), (10, 3), (20, 6), (40, 10), (60, 16), (79, 23)] {
        let _ = screen(&app, w, h);
    }
}

/// The alarm table's line for `id`.
fn line_with<'a>(s: &'a str, id: &str) -> &'a str {
    s.lines().find(|l| l.contains(id)).unwrap_or("")
}

#[test]
fn at_80x24_alarm_rows_keep_id_severity_state_and_value() {
    let app = app_at(Some("09:31:30"));
    let s = screen(&app, 80, 24);
    // The trip and a notice are told apart by their severity word.
    let ion = line_with(&s, "ion-high");
    assert!(
        ion.contains("trip") && ion.contains("unack") && ion.contains("4.15e-5 mbar"),
        "{s}"
    );
    let line = line_with(&s, "line-regime");
    assert!(
        line.contains("note") && line.contains("rtn-unack") && line.contains("molecular"),
        "{s}"
    );
    // The rows below the fold are announced.
    assert!(s.contains("more ↓"), "{s}");
    // The title counts the returned-unacknowledged alarms.
    assert!(s.contains("4 to attend"), "{s}");
    // Length names whole, regime words short (and listed in help).
    assert!(
        s.contains("source-to-substrate") && s.contains("molec"),
        "{s}"
    );
    insta::assert_snapshot!("alarms_80x24", s);
}

#[test]
fn wide_alarm_rows_use_the_full_words_and_the_label() {
    let app = app_at(Some("09:31:30"));
    for (w, h) in [(120, 40), (200, 60)] {
        let s = screen(&app, w, h);
        let ion = line_with(&s, "│>ion-high");
        assert!(
            ion.contains("unacknowledged") && ion.contains("trip"),
            "{s}"
        );
        assert!(
            line_with(&s, "│ line-regime").contains("returned-unacknowledged"),
            "{s}"
        );
        assert!(s.contains("Ion gauge pressure high"), "{s}");
        // On a large screen the events fill the left column rather than
        // empty rows.
        assert!(w < 200 || s.contains("events · latest"), "{s}");
    }
}

#[test]
fn the_threshold_line_is_labelled_with_its_own_value() {
    let app = app_at(Some("09:31:30"));
    for (w, h) in SIZES {
        let s = screen(&app, w, h);
        let rows: Vec<&str> = s.lines().filter(|l| l.contains("╌")).collect();
        assert!(!rows.is_empty(), "{s}");
        // ion-high is above 5e-5 mbar: its row says 5e-5, not a decade.
        assert!(rows.iter().all(|l| l.contains("5e-5")), "{s}");
    }
}

#[test]
fn without_colour_each_gauge_has_its_own_mark() {
    let app = app_at(Some("09:31:30"));
    let s = panel(&app, Panel::Trend, 80, 12);
    assert!(
        s.contains("* cdg") && s.contains("o chamber") && s.contains("+ ion"),
        "{s}"
    );
    assert!(
        !s.contains('⠀') && !s.contains('⣀'),
        "braille without colour:\n{s}"
    );
}

#[test]
fn a_pressure_below_zero_is_shown_as_read_and_dimmed() {
    // A gauge's zero drift: the reading is kept as read, without kinetics.
    let mut app = app_at(Some("09:31:30"));
    let unit = ChannelUnit::Pressure(PressureUnit::Mbar);
    app.ingest(
        &SourceEvent::Samples(vec![Sample::ok(time("09:31:31"), "cdg", -1.5e-4, unit)]),
        None,
    );
    let look = Look::of(&app);
    let area = Rect::new(0, 0, 40, 6);
    let mut buf = Buffer::empty(area);
    render::draw_panel(Panel::Readings, &app, &look, area, &mut buf);
    let line = |y: u16| (0..40).map(|x| buf[(x, y)].symbol()).collect::<String>();
    let row = (0..6)
        .find(|y| line(*y).contains("cdg"))
        .expect("the cdg row");
    assert!(line(row).contains("-1.50e-4 mbar"), "{}", line(row));
    let x = (0..40)
        .find(|x| buf[(*x, row)].symbol() == "-" && buf[(*x + 1, row)].symbol() == "1")
        .expect("the value");
    // Not the bold of a valid reading, nor an alarm.
    let style = buf[(x, row)].style();
    assert!(!style.add_modifier.contains(Modifier::BOLD), "{style:?}");
    assert_ne!(style, look.alarm);
}

#[test]
fn an_under_range_pressure_gauge_is_not_painted_as_an_alarm() {
    let app = app_at(Some("09:31:30"));
    let look = Look::of(&app);
    let area = Rect::new(0, 0, 40, 6);
    let mut buf = Buffer::empty(area);
    render::draw_panel(Panel::Readings, &app, &look, area, &mut buf);
    let row = (0..6)
        .find(|y| {
            (0..40)
                .map(|x| buf[(x, *y)].symbol())
                .collect::<String>()
                .contains("under-range")
        })
        .expect("cdg under-range");
    let x = (0..40)
        .find(|x| buf[(*x, row)].symbol() == "u" && buf[(*x + 1, row)].symbol() == "n")
        .expect("the word");
    assert_ne!(buf[(x, row)].style(), look.alarm);
}

#[test]
fn the_status_line_says_folding_is_display_only() {
    let app = app_at(Some("09:31:30"));
    let s = panel(&app, Panel::Status, 80, 1);
    assert!(s.contains("folded 0 (display only)"), "{s}");
}

#[test]
fn the_replay_footer_keeps_quit_at_80_columns() {
    let cfg = config::load(&root().join("config/demo.toml")).expect("config");
    let setup = ReplaySetup {
        file: root().join("sample-logs/demo.csv"),
        foreign: None,
        monitor: cfg.monitor_setup(Vec::new()),
        gases: cfg.gases.clone(),
    };
    let mut app = app_at(Some("09:31:30"));
    app.replay = Some(index(&setup).expect("index"));
    let s = screen(&app, 80, 24);
    let footer = s.lines().last().expect("footer");
    assert!(
        footer.contains("q:quit") && footer.contains("r:step"),
        "{s}"
    );
    // Timeline marks by severity: a notice N, warnings W, the ion gauge's
    // trip a T (seen once the playhead is elsewhere).
    assert!(
        s.lines()
            .nth(1)
            .is_some_and(|l| l.contains('W') && l.contains('N')),
        "{s}"
    );
    let mut early = app_at(Some("09:05:00"));
    early.replay = app.replay.clone();
    let e = screen(&early, 80, 24);
    assert!(e.lines().nth(1).is_some_and(|l| l.contains('T')), "{e}");
    // The event list with the detail of the last event reached.
    let s = screen(&app, 200, 60);
    assert!(s.contains("reached"), "{s}");
    insta::assert_snapshot!("replay_events_200x60", s);
}

#[test]
fn the_help_overlay_scrolls_and_lists_the_short_forms() {
    let mut app = app_at(Some("09:05:00"));
    app.overlay = rarefy::ui::app::Overlay::Help;
    let s = screen(&app, 80, 24);
    assert!(s.contains("more ↓"), "{s}");
    assert!(!s.contains("rtn-unack"), "{s}");
    app.help_scroll = 1000;
    let s = screen(&app, 80, 24);
    assert!(
        s.contains("returned-unacknowledged") && s.contains("molec"),
        "{s}"
    );
    assert!(s.contains("above"), "{s}");
    insta::assert_snapshot!("help_scrolled_80x24", s);
}

/// A replay of `file` (read with `config`'s `[log]`) played up to `until`,
/// paused there.
fn replay_app(file: &Path, config_text: &str, until: &str) -> App {
    let cfg = config::parse(config_text, Path::new("t.toml")).expect("config");
    let setup = ReplaySetup {
        file: file.to_path_buf(),
        foreign: cfg.log.clone(),
        monitor: cfg.monitor_setup(Vec::new()),
        gases: cfg.gases.clone(),
    };
    let mut replay = index(&setup).expect("index");
    replay.paused = true;
    let mut app = App::new("t", Monitor::new(setup.monitor.clone()), Vec::new());
    app.color = false;
    app.replay = Some(replay);
    let mut player = rarefy::ui::run::Player::open(&setup).expect("player");
    let until = DateTime::parse_from_rfc3339(until)
        .expect("time")
        .with_timezone(&Utc);
    player.feed(&mut app, Some(until), usize::MAX);
    app
}

#[test]
fn replay_shows_the_latest_operator_note_at_the_playhead() {
    let file = root().join("sample-logs/foreign/marrowgate-ml3.csv");
    let text = std::fs::read_to_string(root().join("sample-logs/foreign/marrowgate-ml3.toml"))
        .expect("config");
    // 02:05 and 02:17 local (summer time, +02:00) are 00:05 and 00:17 UTC.
    let app = replay_app(&file, &text, "2026-10-25T00:10:00Z");
    let s = screen(&app, 200, 60);
    assert!(
        s.contains("note 00:05:00 Event: Roughing valve open"),
        "{s}"
    );
    let app = replay_app(&file, &text, "2026-10-25T00:20:00Z");
    let s = screen(&app, 200, 60);
    assert!(s.contains("note 00:17:00 Event: Crossover"), "{s}");
    assert!(!s.contains("Roughing valve open"), "{s}");
}

#[test]
fn replay_notes_are_escaped_and_times_out_of_order_are_said() {
    let dir = std::env::temp_dir().join(format!("rarefy-render-notes-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("dir");
    let file = dir.join("notes.csv");
    std::fs::write(
        &file,
        "Time;P;Remark\n2026-01-01T00:00:00Z;1;\n2026-01-01T00:00:01Z;2;\x1b[31mvent\x07\n\
         2026-01-01T00:00:01Z;3;\n2026-01-01T00:00:00.500Z;4;\n2026-01-01T00:00:02Z;5;\n",
    )
    .expect("write");
    let config = r#"
[log]
delimiter = ";"
time = { column = "Time", format = "rfc3339" }
notes = ["Remark"]

[[log.column]]
name = "P"
channel = "p"
unit = "mbar"
"#;
    let app = replay_app(&file, config, "2026-01-01T00:00:02Z");
    let s = screen(&app, 200, 60);
    let status = s.lines().rev().nth(1).expect("status line");
    assert!(
        s.contains("note 00:00:01 Remark: \\x1b[31mvent\\x07"),
        "{status}"
    );
    assert!(!s.contains('\x1b') && !s.contains('\x07'), "{s}");
    assert!(s.contains("time went back 1×"), "{status}");
    assert!(s.contains("time repeated 1×"), "{status}");
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn at_80x24_the_event_list_takes_the_trends_place_on_v() {
    let cfg = config::load(&root().join("config/demo.toml")).expect("config");
    let setup = ReplaySetup {
        file: root().join("sample-logs/demo.csv"),
        foreign: None,
        monitor: cfg.monitor_setup(Vec::new()),
        gases: cfg.gases.clone(),
    };
    let (replay, _) = rarefy::ui::run::index_events(&setup).expect("index");
    let mut app = app_at(Some("09:31:30"));
    app.replay = Some(replay);
    let s = screen(&app, 80, 24);
    assert!(!s.contains("reached"), "no event list at first:\n{s}");
    rarefy::ui::keys::handle(
        &mut app,
        crossterm::event::KeyEvent::from(crossterm::event::KeyCode::Char('v')),
    );
    let s = screen(&app, 80, 24);
    assert!(s.contains("events · "), "{s}");
    assert!(s.contains("reached"), "{s}");
    assert!(s.contains("ion-high"), "{s}");
    assert!(!s.contains("log pressure"), "the trend gave way:\n{s}");
}
