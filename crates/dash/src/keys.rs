//! Key handling, apart from drawing: a key changes the [`App`] and may ask
//! the loop for an [`Effect`].

use chrono::{DateTime, NaiveTime, TimeZone, Utc};
use crossterm::event::{KeyCode, KeyEvent, KeyModifiers};

use super::app::{App, Edit, Effect, Overlay, Speed, WINDOWS};
use crate::alarm::rule::Test;
use crate::units::{self, TimeUnit};
use rarefy_app::pipeline::Operation;

/// The footer's key list, live.
pub const FOOTER_LIVE: &str =
    "?:help  a:ack  A:ack all  s:shelve  e:edit  u:unit  w/W:window  f:freeze  q:quit";
/// The footer's key list, replay.
pub const FOOTER_REPLAY: &str = "?:help  space:pause  n/p:event  t:time  r:step  </>:speed  ←/→:10s  [/]:1min  {/}:10min  q:quit";

/// Every key, for the help overlay: (keys, what).
pub const HELP: [(&str, &str); 26] = [
    ("? h F1", "this help (Esc closes)"),
    ("q", "quit (recording stops cleanly)"),
    ("↑ ↓ j k", "select an alarm or gate"),
    ("a", "acknowledge the selected alarm"),
    ("A", "acknowledge every alarm"),
    ("s", "shelve the selected alarm for a time"),
    ("S", "return a shelved alarm to service"),
    (
        "e",
        "edit the threshold or hold of the selection, then save",
    ),
    ("u", "next pressure unit"),
    ("w W", "longer / shorter trend window"),
    ("f", "freeze the display (data keeps recording)"),
    (
        "v",
        "event list in place of the trend, and back (small screens)",
    ),
    ("x", "start the exposure again from zero"),
    (
        "c",
        "kinetics follow: auto (best gauge in range), each gauge",
    ),
    (
        "m",
        "gas in force: auto (config steps), base gas, step gases",
    ),
    ("space", "replay: pause / resume"),
    ("r", "replay: one row forward (pauses)"),
    ("< >", "replay: slower / faster (1x … 1000x, max)"),
    ("← →", "replay: back / forward 10 s"),
    ("[ ]", "replay: back / forward 1 min"),
    ("{ }", "replay: back / forward 10 min"),
    ("Home End g G", "replay: start / end of the log"),
    ("n p", "replay: next / previous alarm event"),
    ("t", "replay: go to a time (HH:MM:SS or RFC 3339)"),
    ("Enter", "confirm a prompt"),
    ("Esc", "cancel a prompt"),
];

fn now(app: &App) -> DateTime<Utc> {
    app.monitor()
        .now()
        .or(app.replay.as_ref().map(|r| r.start))
        .unwrap_or(DateTime::<Utc>::UNIX_EPOCH)
}

/// Carries out an operator's request now: at the monitor's data time, with
/// the wall-clock time for the audit trail.
fn operate(app: &mut App, op: Operation) -> Result<Vec<crate::alarm::Event>, String> {
    let t = now(app);
    app.operate(&op, t, Some(Utc::now()))
}

/// Number of selectable rows (alarms, then gates).
fn selectable(app: &App) -> usize {
    app.monitor().alarms().len() + app.monitor().gates().len()
}

/// Reads a typed time: `HH:MM[:SS]` on the day of the replay position, or
/// RFC 3339.
pub fn parse_time(text: &str, around: DateTime<Utc>) -> Result<DateTime<Utc>, String> {
    let t = text.trim();
    if let Ok(d) = DateTime::parse_from_rfc3339(t) {
        return Ok(d.with_timezone(&Utc));
    }
    let time = NaiveTime::parse_from_str(t, "%H:%M:%S")
        .or_else(|_| NaiveTime::parse_from_str(t, "%H:%M"))
        .map_err(|_| format!("\"{t}\" is not a time; type HH:MM:SS (UTC) or RFC 3339"))?;
    Utc.from_local_datetime(&around.date_naive().and_time(time))
        .single()
        .ok_or_else(|| format!("\"{t}\" is not a time"))
}

fn seek_by(app: &App, seconds: i64) -> Effect {
    let Some(r) = &app.replay else {
        return Effect::None;
    };
    let t = now(app) + chrono::Duration::seconds(seconds);
    Effect::Seek(t.clamp(r.start, r.end))
}

fn jump_to_mark(app: &mut App, forward: bool) -> Effect {
    let Some(r) = &app.replay else {
        return Effect::None;
    };
    let here = now(app);
    // Alarm events: an alarm going off (the marks on the timeline).
    let going_off: Vec<&crate::alarm::Event> = r
        .events
        .iter()
        .filter(|e| e.to_text() == "unacknowledged")
        .collect();
    let found = if forward {
        going_off.iter().position(|e| e.time > here)
    } else {
        // Strictly before the current position, skipping the event at it.
        going_off
            .iter()
            .rposition(|e| e.time < here - chrono::Duration::milliseconds(500))
    };
    let (message, effect) = match found {
        Some(i) => {
            let e = going_off[i];
            (
                format!(
                    "alarm event {} of {}: {} went off ({}) at {}",
                    i + 1,
                    going_off.len(),
                    e.id,
                    e.severity.map_or("-", |s| s.as_str()),
                    e.time.format("%H:%M:%S")
                ),
                Effect::Seek(e.time),
            )
        }
        None if going_off.is_empty() => ("no alarm went off in this log".into(), Effect::None),
        None if forward => ("no later alarm event".into(), Effect::None),
        None => ("no earlier alarm event".into(), Effect::None),
    };
    app.message = Some(message);
    effect
}

/// `c`: the gauge the kinetics panel follows (auto → each gauge → auto).
fn follow_key(app: &mut App) {
    app.next_follow();
}

/// `m`: the gas in force, cycling auto (config steps) → the base gas →
/// each configured step's gas → auto. An audited operation.
fn gas_key(app: &mut App) {
    use crate::alarm::GasChoice;
    let setup = app.monitor().setup();
    let mut choices = vec![GasChoice::Auto, GasChoice::Fixed(setup.mixture.clone())];
    for step in &setup.gas_steps {
        let c = GasChoice::Fixed(step.mixture.clone());
        if !choices.contains(&c) {
            choices.push(c);
        }
    }
    let current = app.monitor().gas_choice();
    let next = choices
        .iter()
        .position(|c| c == current)
        .map_or(0, |i| (i + 1) % choices.len());
    let choice = choices.swap_remove(next);
    let label = choice.label();
    app.message = Some(match operate(app, Operation::SetGas(choice)) {
        Ok(_) => format!("gas: {label}"),
        Err(e) => e,
    });
}

/// Handles one key.
pub fn handle(app: &mut App, key: KeyEvent) -> Effect {
    app.dirty = true;
    if key.modifiers.contains(KeyModifiers::CONTROL) && key.code == KeyCode::Char('c') {
        return Effect::Quit;
    }
    match app.overlay.clone() {
        Overlay::Help => {
            let max = app.help_max.get();
            let page = 10;
            match key.code {
                KeyCode::Down | KeyCode::Char('j') => {
                    app.help_scroll = (app.help_scroll + 1).min(max);
                }
                KeyCode::Up | KeyCode::Char('k') => {
                    app.help_scroll = app.help_scroll.min(max).saturating_sub(1);
                }
                KeyCode::PageDown | KeyCode::Char(' ') => {
                    app.help_scroll = (app.help_scroll + page).min(max);
                }
                KeyCode::PageUp => app.help_scroll = app.help_scroll.min(max).saturating_sub(page),
                _ => app.overlay = Overlay::None,
            }
            return Effect::None;
        }
        Overlay::Goto(s) | Overlay::Shelve(s) if key.code == KeyCode::Esc => {
            let _ = s;
            app.overlay = Overlay::None;
            return Effect::None;
        }
        Overlay::Goto(mut s) => return prompt(app, key, &mut s, true),
        Overlay::Shelve(mut s) => {
            // The suggestion goes as soon as something is typed.
            if std::mem::take(&mut app.suggested) && matches!(key.code, KeyCode::Char(_)) {
                s.clear();
            }
            return prompt(app, key, &mut s, false);
        }
        Overlay::Edit(mut e) => {
            if std::mem::take(&mut app.suggested) && matches!(key.code, KeyCode::Char(_)) {
                e.input.clear();
            }
            return edit_key(app, key, &mut e);
        }
        Overlay::Confirm(e) => return confirm_key(app, key, e),
        Overlay::None => {}
    }
    app.message = None;
    let replay = app.replay.is_some();
    match key.code {
        KeyCode::Char('q') => return Effect::Quit,
        KeyCode::Char('?' | 'h') | KeyCode::F(1) => {
            app.overlay = Overlay::Help;
            app.help_scroll = 0;
        }
        KeyCode::Char('u') => app.next_unit(),
        KeyCode::Char('w') => {
            let i = WINDOWS.iter().position(|w| *w >= app.window_s).unwrap_or(0);
            app.window_s = WINDOWS[(i + 1).min(WINDOWS.len() - 1)];
        }
        KeyCode::Char('W') => {
            let i = WINDOWS.iter().position(|w| *w >= app.window_s).unwrap_or(0);
            app.window_s = WINDOWS[i.saturating_sub(1)];
        }
        KeyCode::Char('v') => {
            app.show_events = !app.show_events;
            app.message = Some(if app.show_events {
                "event list shown (v: trend)".into()
            } else {
                "trend shown (v: event list)".into()
            });
        }
        KeyCode::Char('f') => {
            let was = app.frozen.take();
            if was.is_none() {
                app.frozen = Some(Box::new((
                    app.monitor().clone(),
                    app.history.clone(),
                    app.monitor().now(),
                )));
                app.message = Some("display frozen; data keeps recording (f to resume)".into());
            }
        }
        KeyCode::Up | KeyCode::Char('k') => app.selected = app.selected.saturating_sub(1),
        KeyCode::Down | KeyCode::Char('j') => {
            app.selected = (app.selected + 1).min(selectable(app).saturating_sub(1));
        }
        KeyCode::Char('a') => {
            if let Some(id) = app.alarm_ids().get(app.selected).cloned() {
                match operate(app, Operation::Acknowledge(id.clone())) {
                    Ok(_) => app.message = Some(format!("{id} acknowledged")),
                    Err(e) => app.message = Some(e),
                }
            }
        }
        KeyCode::Char('A') => {
            let n = operate(app, Operation::AcknowledgeAll).map_or(0, |ev| ev.len());
            app.message = Some(format!("{n} acknowledged"));
        }
        KeyCode::Char('s') if app.selected < app.alarm_ids().len() => {
            app.overlay = Overlay::Shelve("30 min".into());
            app.suggested = true;
        }
        KeyCode::Char('S') => {
            if let Some(id) = app.alarm_ids().get(app.selected).cloned()
                && let Err(e) = operate(app, Operation::Unshelve(id))
            {
                app.message = Some(e);
            }
        }
        KeyCode::Char('e') => start_edit(app),
        KeyCode::Char('c') => follow_key(app),
        KeyCode::Char('m') => gas_key(app),
        KeyCode::Char('x') => {
            app.message = Some(match operate(app, Operation::ResetExposure) {
                Ok(_) => "exposure reset to zero".into(),
                Err(e) => e,
            });
        }
        KeyCode::Char(' ') if replay => {
            if let Some(r) = &mut app.replay {
                r.paused = !r.paused;
            }
        }
        KeyCode::Char('r') if replay => return Effect::Step,
        KeyCode::Char('>') if replay => change_speed(app, 1),
        KeyCode::Char('<') if replay => change_speed(app, -1),
        KeyCode::Right if replay => return seek_by(app, 10),
        KeyCode::Left if replay => return seek_by(app, -10),
        KeyCode::Char(']') if replay => return seek_by(app, 60),
        KeyCode::Char('[') if replay => return seek_by(app, -60),
        KeyCode::Char('}') if replay => return seek_by(app, 600),
        KeyCode::Char('{') if replay => return seek_by(app, -600),
        KeyCode::Home | KeyCode::Char('g') if replay => {
            return app
                .replay
                .as_ref()
                .map_or(Effect::None, |r| Effect::Seek(r.start));
        }
        KeyCode::End | KeyCode::Char('G') if replay => {
            return app
                .replay
                .as_ref()
                .map_or(Effect::None, |r| Effect::Seek(r.end));
        }
        KeyCode::Char('n') if replay => return jump_to_mark(app, true),
        KeyCode::Char('p') if replay => return jump_to_mark(app, false),
        KeyCode::Char('t') if replay => app.overlay = Overlay::Goto(String::new()),
        _ => {}
    }
    Effect::None
}

fn change_speed(app: &mut App, by: i32) {
    if let Some(r) = &mut app.replay {
        let i = Speed::STEPS.iter().position(|s| *s == r.speed).unwrap_or(0) as i32;
        let j = (i + by).clamp(0, Speed::STEPS.len() as i32 - 1) as usize;
        r.speed = Speed::STEPS[j];
        app.message = Some(format!("speed {}", r.speed.label()));
    }
}

/// Typing into a one-line prompt; `goto` picks what Enter does.
fn prompt(app: &mut App, key: KeyEvent, text: &mut String, goto: bool) -> Effect {
    match key.code {
        KeyCode::Char(c) if !c.is_control() => text.push(c),
        KeyCode::Backspace => {
            text.pop();
        }
        KeyCode::Enter => {
            app.overlay = Overlay::None;
            if goto {
                match parse_time(text, now(app)) {
                    Ok(t) => return Effect::Seek(t),
                    Err(e) => app.message = Some(e),
                }
            } else {
                let Some(id) = app.alarm_ids().get(app.selected).cloned() else {
                    return Effect::None;
                };
                match units::parse::<TimeUnit>(text) {
                    Ok(d) if d.si > 0.0 => {
                        match operate(app, Operation::Shelve(id.clone(), d.si)) {
                            Ok(_) => {
                                app.message = Some(format!("{id} shelved for {}", text.trim()));
                            }
                            Err(e) => app.message = Some(e),
                        }
                    }
                    Ok(_) => app.message = Some("shelve for longer than zero".into()),
                    Err(e) => app.message = Some(e.to_string()),
                }
            }
            return Effect::None;
        }
        _ => {}
    }
    app.overlay = if goto {
        Overlay::Goto(text.clone())
    } else {
        Overlay::Shelve(text.clone())
    };
    Effect::None
}

fn start_edit(app: &mut App) {
    let alarms = app.monitor().alarms();
    let n = alarms.len();
    if app.selected < n {
        let a = &alarms[app.selected];
        let (key, value) = match a.rule.test {
            Test::Above(v) => ("above", v),
            Test::Below(v) => ("below", v),
            _ => {
                app.message = Some(format!("{} has no numeric threshold to edit", a.rule.id));
                return;
            }
        };
        if a.rule.id.ends_with(".input") || a.rule.id.starts_with("cli-") {
            app.message = Some(format!("{} is not in the config file", a.rule.id));
            return;
        }
        let old = threshold_text(&a.rule.quantity, value, app);
        app.overlay = Overlay::Edit(Edit {
            kind: "alarm",
            id: a.rule.id.clone(),
            key: key.into(),
            input: old.clone(),
            old,
        });
        app.suggested = true;
    } else if let Some(g) = app.monitor().gates().get(app.selected - n) {
        let old = format!("{} s", g.gate.hold_s);
        app.overlay = Overlay::Edit(Edit {
            kind: "gate",
            id: g.gate.id.clone(),
            key: "hold".into(),
            input: old.clone(),
            old,
        });
        app.suggested = true;
    }
}

/// A threshold written back in the display unit.
fn threshold_text(q: &crate::alarm::quantity::Quantity, si: f64, app: &App) -> String {
    use crate::alarm::quantity::Quantity;
    use crate::units::UnitKind;
    match q {
        Quantity::Pressure => format!(
            "{:e} {}",
            app.pressure_unit.value_of(si),
            app.pressure_unit.symbol()
        ),
        Quantity::Temperature => format!(
            "{} {}",
            app.temperature_unit.value_of(si),
            app.temperature_unit.symbol()
        ),
        Quantity::MeanFreePath => format!("{si} m"),
        Quantity::MonolayerTime => format!("{si} s"),
        Quantity::Exposure => format!("{si:e} Pa s"),
        Quantity::RateOfChange => format!(
            "{:e} {}/s",
            app.pressure_unit.value_of(si),
            app.pressure_unit.symbol()
        ),
        Quantity::DecadesPerMinute => format!("{si} decade/min"),
        _ => format!("{si}"),
    }
}

fn edit_key(app: &mut App, key: KeyEvent, e: &mut Edit) -> Effect {
    match key.code {
        KeyCode::Esc => {
            app.overlay = Overlay::None;
            return Effect::None;
        }
        KeyCode::Char(c) if !c.is_control() => e.input.push(c),
        KeyCode::Backspace => {
            e.input.pop();
        }
        KeyCode::Enter => {
            // Check the value now, so the confirmation is for a valid one.
            let check = if e.kind == "gate" {
                units::parse::<TimeUnit>(&e.input)
                    .map(|_| ())
                    .map_err(|x| x.to_string())
            } else {
                let q = app
                    .monitor()
                    .alarms()
                    .iter()
                    .find(|a| a.rule.id == e.id)
                    .map(|a| a.rule.quantity.clone());
                match q {
                    Some(q) => q.threshold(&e.input).map(|_| ()),
                    None => Err("the alarm is gone".into()),
                }
            };
            match check {
                Ok(()) => app.overlay = Overlay::Confirm(e.clone()),
                Err(err) => {
                    app.message = Some(err);
                    app.overlay = Overlay::Edit(e.clone());
                }
            }
            return Effect::None;
        }
        _ => {}
    }
    app.overlay = Overlay::Edit(e.clone());
    Effect::None
}

fn confirm_key(app: &mut App, key: KeyEvent, e: Edit) -> Effect {
    match key.code {
        KeyCode::Char('y' | 'Y') => {
            app.overlay = Overlay::None;
            // Apply in place first: the change takes effect even unsaved.
            let applied = if e.kind == "gate" {
                units::parse::<TimeUnit>(&e.input)
                    .map_err(|x| x.to_string())
                    .and_then(|d| operate(app, Operation::SetHold(e.id.clone(), d.si)).map(drop))
            } else {
                let q = app
                    .monitor()
                    .alarms()
                    .iter()
                    .find(|a| a.rule.id == e.id)
                    .map(|a| a.rule.quantity.clone());
                q.ok_or_else(|| "the alarm is gone".to_string())
                    .and_then(|q| q.threshold(&e.input))
                    .and_then(|v| operate(app, Operation::SetThreshold(e.id.clone(), v)).map(drop))
            };
            if let Err(err) = applied {
                app.message = Some(err);
                return Effect::None;
            }
            let Some(path) = app.config_path.clone() else {
                app.message = Some(format!(
                    "{} {} = {} (no config file to save to)",
                    e.id, e.key, e.input
                ));
                return Effect::None;
            };
            let text = match std::fs::read_to_string(&path) {
                Ok(t) => t,
                Err(err) => {
                    app.message = Some(format!("cannot read {}: {err}", path.display()));
                    return Effect::None;
                }
            };
            match crate::config::edit::set_value(&text, e.kind, &e.id, &e.key, e.input.trim()) {
                Ok(new) => match crate::config::parse(&new, &path) {
                    Ok(_) => return Effect::Save(path, new),
                    Err(err) => app.message = Some(format!("not saved: {err}")),
                },
                Err(err) => app.message = Some(format!("not saved: {err}")),
            }
        }
        KeyCode::Char('n' | 'N') | KeyCode::Esc => {
            app.overlay = Overlay::None;
            app.message = Some("not saved".into());
        }
        _ => app.overlay = Overlay::Confirm(e),
    }
    Effect::None
}
