//! The event loops: `select!` over terminal input, the sample channel (live)
//! or the log reader (replay), signals, and a render tick that draws at most
//! ten times a second and only when something changed.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use chrono::{DateTime, Utc};
use crossterm::event::{Event as TermEvent, KeyEventKind};
use tokio::signal::unix::{SignalKind, signal};
use tokio::sync::mpsc;

use super::app::{App, Effect, Replay, Speed};
use super::keys;
use super::render;
use super::term::Guard;
use crate::alarm::{Event, Monitor, MonitorSetup};
use crate::record::{RecordEvent, Recorder};
use crate::sample::SourceEvent;
use rarefy_app::action::Outcome;
use rarefy_app::pipeline::DataClock;
use rarefy_app::pipeline::replay::Rows;
use rarefy_app::pipeline::sinks::{RecordingNote, RecordingState};
use std::sync::{Arc, Mutex};

/// Frame interval: at most ten redraws a second.
pub const FRAME: Duration = Duration::from_millis(100);

/// Reads terminal events on a thread of its own.
fn input() -> mpsc::Receiver<TermEvent> {
    let (tx, rx) = mpsc::channel(64);
    std::thread::spawn(move || {
        loop {
            match crossterm::event::poll(Duration::from_millis(200)) {
                Ok(true) => match crossterm::event::read() {
                    Ok(ev) => {
                        if tx.blocking_send(ev).is_err() {
                            return;
                        }
                    }
                    Err(_) => return,
                },
                Ok(false) => {
                    if tx.is_closed() {
                        return;
                    }
                }
                Err(_) => return,
            }
        }
    });
    rx
}

/// SIGTERM, SIGHUP and SIGINT: each ends the dashboard through the
/// terminal guard. (Raw mode turns Ctrl-C into a key, but a SIGINT sent from
/// elsewhere must also leave cleanly rather than kill the process.)
struct Stop {
    term: tokio::signal::unix::Signal,
    hup: tokio::signal::unix::Signal,
    int: tokio::signal::unix::Signal,
}

impl Stop {
    fn new() -> Result<Stop, String> {
        let on = |k: SignalKind| signal(k).map_err(|e| e.to_string());
        Ok(Stop {
            term: on(SignalKind::terminate())?,
            hup: on(SignalKind::hangup())?,
            int: on(SignalKind::interrupt())?,
        })
    }

    /// Waits for any of them.
    async fn recv(&mut self) {
        tokio::select! {
            _ = self.term.recv() => {}
            _ = self.hup.recv() => {}
            _ = self.int.recv() => {}
        }
    }
}

/// What both loops select over besides their data: signals, keys, the frame
/// tick, and the terminal they draw on.
struct Screen {
    stop: Stop,
    guard: Guard,
    keys: mpsc::Receiver<TermEvent>,
    tick: tokio::time::Interval,
}

impl Screen {
    fn open() -> Result<Screen, String> {
        let stop = Stop::new()?;
        let guard = Guard::enter().map_err(|e| format!("cannot set up the terminal: {e}"))?;
        let mut tick = tokio::time::interval(FRAME);
        tick.set_missed_tick_behavior(tokio::time::MissedTickBehavior::Skip);
        Ok(Screen {
            stop,
            guard,
            keys: input(),
            tick,
        })
    }
}

/// Applies what a key asked for that the app cannot do itself (saving).
fn apply_save(app: &mut App, effect: &Effect) {
    if let Effect::Save(path, text) = effect {
        // Write beside and rename, so the file is never half written.
        let tmp = path.with_extension("toml.partial");
        let result = std::fs::write(&tmp, text).and_then(|()| std::fs::rename(&tmp, path));
        app.message = Some(match result {
            Ok(()) => format!("saved to {}", path.display()),
            Err(e) => format!("cannot save {}: {e}", path.display()),
        });
    }
}

fn draw(guard: &mut Guard, app: &mut App) -> std::io::Result<()> {
    if app.dirty {
        guard.term.draw(|f| render::draw(f, app))?;
        app.dirty = false;
    }
    if std::mem::take(&mut app.bell) {
        let out = guard.term.backend_mut();
        let _ = out.write_all(b"\x07");
        let _ = Write::flush(out);
    }
    Ok(())
}

/// What the live dashboard reads besides the keyboard.
pub struct LiveInput {
    /// The sources' events.
    pub rx: mpsc::Receiver<SourceEvent>,
    /// Whether every source is a finished file (then wall time never moves
    /// data time).
    pub finite: bool,
    /// What the recording says, when recording.
    pub notes: Option<mpsc::UnboundedReceiver<RecordingNote>>,
    /// The recording's state, when recording.
    pub recording: Option<Arc<Mutex<RecordingState>>>,
    /// Outcomes of actions.
    pub outcomes: Option<mpsc::UnboundedReceiver<Outcome>>,
}

/// Runs the live dashboard until the operator quits or a signal arrives.
/// Returns what the pipeline's sinks had to say at the end (rows that could
/// not be written …), for the caller to print once the terminal is back.
pub async fn live(mut app: App, mut input: LiveInput) -> Result<Vec<String>, String> {
    let mut sh = Screen::open()?;
    let mut clock = DataClock::start();
    if !input.finite {
        app.start(clock.now());
    }
    let mut last_flush = Instant::now();
    let mut sources_open = true;
    let mut rate_mark = (Instant::now(), 0u64);
    loop {
        tokio::select! {
            biased;
            () = sh.stop.recv() => break,
            Some(ev) = sh.keys.recv() => {
                match ev {
                    TermEvent::Key(k) if k.kind == KeyEventKind::Press => {
                        let effect = keys::handle(&mut app, k);
                        if effect == Effect::Quit {
                            break;
                        }
                        apply_save(&mut app, &effect);
                    }
                    TermEvent::Resize(..) => app.dirty = true,
                    _ => {}
                }
            }
            // The frame, the recording's notes and the actions' outcomes
            // before the data: a backlog of rows (a source that sends faster
            // than real time, or one catching up) still leaves the screen
            // redrawn every frame, rather than frozen until the queue is
            // empty.
            _ = sh.tick.tick() => {
                if !input.finite {
                    app.tick(clock.now());
                }
                // Rows per wall second, over the last second or so.
                let dt = rate_mark.0.elapsed().as_secs_f64();
                if dt >= 1.0 {
                    let rate = (app.counters.rows - rate_mark.1) as f64 / dt;
                    if (rate - app.counters.rate).abs() > 1e-9 {
                        app.counters.rate = rate;
                        app.dirty = true;
                    }
                    rate_mark = (Instant::now(), app.counters.rows);
                }
                if last_flush.elapsed() >= Duration::from_secs(1) {
                    app.pipeline.flush();
                    last_flush = Instant::now();
                    if let Some(state) = &input.recording
                        && let Ok(s) = state.lock()
                        && s.failing
                    {
                        app.message = Some(format!("RECORDING FAILS: {} rows kept in memory", s.buffered));
                        app.dirty = true;
                    }
                }
                draw(&mut sh.guard, &mut app).map_err(|e| e.to_string())?;
            }
            Some(n) = recv_opt(&mut input.notes) => {
                // The status line names the file; only trouble is a message.
                match n {
                    RecordingNote::Recorder(RecordEvent::Opened { path, .. }) => {
                        app.log_file = Some(path);
                    }
                    RecordingNote::Recorder(RecordEvent::Closed { .. }) => {}
                    RecordingNote::Recorder(RecordEvent::WriteFailed { path, error, buffered }) => {
                        app.message = Some(format!(
                            "RECORDING FAILS: {}: {error}; {buffered} rows kept in memory",
                            path.display()
                        ));
                    }
                    RecordingNote::Recorder(RecordEvent::Recovered { path }) => {
                        app.message = Some(format!("recording again, to {}", path.display()));
                    }
                    RecordingNote::Recorder(RecordEvent::Lost { rows, total, .. }) => {
                        app.message = Some(format!(
                            "DATA LOST: {rows} rows dropped ({total} in all)"
                        ));
                    }
                    RecordingNote::EventLog(m) => app.message = Some(m),
                }
                app.dirty = true;
            }
            Some(o) = recv_opt(&mut input.outcomes) => {
                if o.status != "ok" {
                    app.message = Some(format!("action for {}: {}: {}", o.id, o.status, o.message));
                    app.dirty = true;
                }
            }
            ev = input.rx.recv(), if sources_open => {
                let Some(ev) = ev else {
                    sources_open = false;
                    app.message = Some("all sources ended".into());
                    app.dirty = true;
                    continue;
                };
                // Take what is queued, up to a bound, before drawing again.
                let mut batch = vec![ev];
                while batch.len() < 2000 {
                    match input.rx.try_recv() {
                        Ok(ev) => batch.push(ev),
                        Err(_) => break,
                    }
                }
                for ev in &batch {
                    if let SourceEvent::Samples(s) = ev
                        && let Some(t) = s.iter().map(|s| s.time).max()
                    {
                        clock.saw(t);
                    }
                    let now = (!input.finite).then(|| clock.now());
                    app.ingest(ev, now);
                }
                app.counters.behind = input.rx.len();
            }
        }
    }
    let problems = app.pipeline.finish();
    drop(sh);
    Ok(problems)
}

/// Receives from an optional channel; pends for ever without one.
async fn recv_opt<T>(rx: &mut Option<mpsc::UnboundedReceiver<T>>) -> Option<T> {
    match rx {
        Some(rx) => rx.recv().await,
        None => std::future::pending().await,
    }
}

/// What a replay needs to start over.
pub struct ReplaySetup {
    /// The log.
    pub file: PathBuf,
    /// A `[log]` spec for foreign logs.
    pub foreign: Option<crate::log::ForeignLogSpec>,
    /// The monitor's setup.
    pub monitor: MonitorSetup,
    /// Gases the log's `gas` column may name (the config's table).
    pub gases: crate::gas::GasTable,
}

/// Reads the whole log once, played through an app as playback plays it
/// (see [`super::keyframe::index`]): start, end, gaps and the alarm
/// events, for the timeline and for jumping between alarms, and the
/// keyframes seeks start from. The events are exactly those playback gives
/// at any speed.
pub fn index(setup: &ReplaySetup) -> Result<Replay, String> {
    let (replay, _) = index_events(setup)?;
    Ok(replay)
}

/// [`index`], and every event of the log.
pub fn index_events(setup: &ReplaySetup) -> Result<(Replay, Vec<Event>), String> {
    index_every(setup, super::keyframe::EVERY)
}

/// [`index_events`] with a keyframe every `every` rows.
pub fn index_every(setup: &ReplaySetup, every: u64) -> Result<(Replay, Vec<Event>), String> {
    index_keyframes(setup, every, super::keyframe::MOST)
}

/// [`index_every`] keeping at most `most` keyframes (the spacing doubles
/// whenever there would be more).
pub fn index_keyframes(
    setup: &ReplaySetup,
    every: u64,
    most: usize,
) -> Result<(Replay, Vec<Event>), String> {
    let (ix, keyframes) = super::keyframe::index(setup, every, most)?;
    let marks = ix
        .events
        .iter()
        .map(|e| (e.time, e.id.clone(), e.to_text().to_string()))
        .collect();
    Ok((
        Replay {
            file: setup.file.clone(),
            paused: false,
            speed: Speed::Times(60.0),
            start: ix.start,
            end: ix.end,
            marks,
            events: ix.events.clone(),
            gaps: ix.gaps,
            bad_rows: ix.bad_rows,
            times_went_back: ix.times_went_back,
            times_repeated: ix.times_repeated,
            at_end: false,
            keyframes,
        },
        ix.events,
    ))
}

/// A replay in progress: the log's rows, fed to the app.
pub struct Player {
    pub(crate) rows: Rows,
    /// The last row's `gas` cell.
    pub(crate) gas: Option<String>,
}

impl Player {
    /// Opens the log at its start.
    pub fn open(setup: &ReplaySetup) -> Result<Player, String> {
        Ok(Player {
            rows: Rows::open(&setup.file, setup.foreign.as_ref())?,
            gas: None,
        })
    }

    /// Time of the next row.
    pub fn next_time(&self) -> Option<DateTime<Utc>> {
        self.rows.next_time()
    }

    /// Rows fed so far (since the log's start).
    pub fn rows_fed(&self) -> u64 {
        self.rows.taken()
    }

    /// Feeds the app every row up to `until` (at most `max` rows).
    pub fn feed(&mut self, app: &mut App, until: Option<DateTime<Utc>>, max: usize) -> usize {
        let mut n = 0;
        while n < max {
            let Some(row) = self.rows.next_until(until) else {
                break;
            };
            if let Some((column, text)) = row.notes.last() {
                app.note = Some((row.time, column.clone(), text.clone()));
            }
            if let Some(ev) = crate::log::gas_event(&row, &mut self.gas) {
                app.ingest(&ev, None);
            }
            // The readings lent to the event and taken back: the row goes
            // back to be read into again.
            let mut row = row;
            let ev = SourceEvent::Samples(std::mem::take(&mut row.samples));
            app.ingest(&ev, None);
            if let SourceEvent::Samples(samples) = ev {
                row.samples = samples;
            }
            self.rows.give_back(row);
            n += 1;
        }
        n
    }
}

/// Puts the app back as it was before the log's first row (a monitor
/// fresh from the setup, no history, counters, recent events, note or
/// source error); what the operator chose to see stays.
pub(crate) fn reset(app: &mut App, setup: &ReplaySetup) {
    app.pipeline.reset(Monitor::new(setup.monitor.clone()));
    app.pipeline.set_gases(setup.gases.clone());
    app.history = super::history::History::default();
    app.origin = None;
    app.events.clear();
    app.events_seen = 0;
    app.counters = Default::default();
    app.frozen = None;
    app.note = None;
    app.source_error = None;
}

/// Starts the app over at the beginning of the log (for seeking back).
pub fn rewind(app: &mut App, setup: &ReplaySetup) -> Result<Player, String> {
    reset(app, setup);
    Player::open(setup)
}

/// The keyframe a seek to `t` starts from, if one is nearer than where
/// the player is: the last one at or before `t` (every row before it is),
/// for a seek back (`back`) or one forward past it. Not forward after an
/// operator's action in this replay (acknowledge, shelve, edit …): playing
/// on from the playhead keeps its effect, as before.
fn keyframe_for(
    app: &App,
    player: &Player,
    t: DateTime<Utc>,
    back: bool,
) -> Option<(super::keyframe::Keyframes, usize)> {
    let keyframes = app.replay.as_ref()?.keyframes.clone()?;
    let i = keyframes.last_before(t)?;
    if !back && (app.pipeline.operations() > 0 || player.rows_fed() >= keyframes.rows_before(i)) {
        return None;
    }
    Some((keyframes, i))
}

/// Moves the replay to data time `t`.
pub fn seek(
    app: &mut App,
    player: &mut Player,
    setup: &ReplaySetup,
    t: DateTime<Utc>,
) -> Result<(), String> {
    // A time outside the log goes to its nearest end, and says so.
    let asked = t;
    let t = match &app.replay {
        Some(r) => t.clamp(r.start, r.end),
        None => t,
    };
    if t != asked {
        app.message = Some(format!(
            "{} is {} the log; at its {} ({})",
            asked.format("%Y-%m-%d %H:%M:%S"),
            if asked < t { "before" } else { "after" },
            if asked < t { "start" } else { "end" },
            t.format("%Y-%m-%d %H:%M:%S")
        ));
    }
    let back = app.monitor().now().is_some_and(|now| t < now);
    // From the nearest keyframe when there is one (the same state as
    // playing every row before it); else from the start, or on.
    let jumped = keyframe_for(app, player, t, back)
        .is_some_and(|(k, i)| k.restore(i, app, player, setup, back).is_ok());
    if back && !jumped {
        *player = rewind(app, setup)?;
    }
    player.feed(app, Some(t), usize::MAX);
    // The displayed time is the seek target even between rows.
    app.tick(t);
    if let Some(r) = &mut app.replay {
        r.at_end = player.next_time().is_none();
    }
    app.dirty = true;
    Ok(())
}

/// Plays one frame: moves the playhead by `elapsed_s` wall seconds at the
/// replay's speed (at max speed, up to 20 000 rows), feeding the rows it
/// passes and advancing data time to the playhead. Events do not depend on
/// how the frames fall: the monitor runs every deadline at its own time.
pub fn play(app: &mut App, player: &mut Player, head: &mut Option<DateTime<Utc>>, elapsed_s: f64) {
    let (paused, speed) = app
        .replay
        .as_ref()
        .map_or((true, Speed::Max), |r| (r.paused, r.speed));
    if paused {
        return;
    }
    match speed {
        Speed::Max => {
            player.feed(app, None, 20_000);
            *head = app.monitor().now();
        }
        Speed::Times(x) => {
            if let Some(h) = head.or(player.next_time()) {
                let t = h + chrono::Duration::milliseconds((elapsed_s * x * 1000.0) as i64);
                player.feed(app, Some(t), usize::MAX);
                app.tick(t.min(app.replay.as_ref().map_or(t, |r| r.end)));
                *head = Some(t);
            }
        }
    }
    let ended = player.next_time().is_none();
    if let Some(r) = &mut app.replay
        && ended
        && !r.at_end
    {
        r.at_end = true;
        r.paused = true;
        app.dirty = true;
    }
}

/// Runs the replay dashboard.
pub async fn replay(
    mut app: App,
    setup: ReplaySetup,
    from: Option<DateTime<Utc>>,
) -> Result<(), String> {
    let mut player = Player::open(&setup)?;
    if let Some(r) = &app.replay {
        app.window_s = fit_window((r.end - r.start).num_milliseconds() as f64 / 1000.0);
    }
    if let Some(t) = from {
        seek(&mut app, &mut player, &setup, t)?;
    }
    let mut sh = Screen::open()?;
    let mut last = Instant::now();
    // Data time of the playhead.
    let mut head = app.monitor().now().or(player.next_time());
    loop {
        tokio::select! {
            biased;
            () = sh.stop.recv() => break,
            Some(ev) = sh.keys.recv() => {
                match ev {
                    TermEvent::Key(k) if k.kind == KeyEventKind::Press => {
                        let effect = keys::handle(&mut app, k);
                        match &effect {
                            Effect::Quit => break,
                            Effect::Seek(t) => {
                                seek(&mut app, &mut player, &setup, *t)?;
                                head = Some(*t);
                            }
                            Effect::Step => {
                                if let Some(r) = &mut app.replay {
                                    r.paused = true;
                                }
                                player.feed(&mut app, None, 1);
                                head = app.monitor().now();
                            }
                            _ => apply_save(&mut app, &effect),
                        }
                    }
                    TermEvent::Resize(..) => app.dirty = true,
                    _ => {}
                }
            }
            _ = sh.tick.tick() => {
                let elapsed = last.elapsed().as_secs_f64();
                last = Instant::now();
                play(&mut app, &mut player, &mut head, elapsed);
                draw(&mut sh.guard, &mut app).map_err(|e| e.to_string())?;
            }
        }
    }
    drop(sh);
    Ok(())
}

/// The shortest trend window that shows a log `span_s` long whole (the
/// longest window for longer logs).
pub fn fit_window(span_s: f64) -> f64 {
    super::app::WINDOWS
        .iter()
        .copied()
        .find(|w| *w >= span_s)
        .unwrap_or(super::app::WINDOWS[super::app::WINDOWS.len() - 1])
}

/// Whether colour should be used: not with NO_COLOR set (any value), nor
/// on a terminal that says it is dumb.
pub fn use_color() -> bool {
    std::env::var_os("NO_COLOR").is_none_or(|v| v.is_empty())
        && std::env::var("TERM").map_or(true, |t| t != "dumb")
}

/// Whether the terminal probably cannot show braille: `TERM=linux` (the
/// console) or `dumb`, or a non-UTF-8 locale.
pub fn ascii_fallback() -> bool {
    let term = std::env::var("TERM").unwrap_or_default();
    let lang = ["LC_ALL", "LC_CTYPE", "LANG"]
        .iter()
        .find_map(|k| std::env::var(k).ok().filter(|v| !v.is_empty()))
        .unwrap_or_default();
    term == "linux"
        || term == "dumb"
        || !(lang.to_uppercase().contains("UTF-8") || lang.to_uppercase().contains("UTF8"))
}

/// The log file being recorded, for the status line.
pub fn recording_path(r: &Recorder) -> Option<&Path> {
    r.current_path()
}
