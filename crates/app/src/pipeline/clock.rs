//! The live data clock: data time between readings.

use std::time::Instant;

use chrono::{DateTime, Utc};

/// Data time as it goes on between readings, in live mode only: the last
/// reading's time plus the wall time since it arrived; before any reading,
/// the wall-clock time the sources were started plus the time since. A
/// silent gauge or a source that never connects therefore goes stale in
/// live use, while replays and finished files keep their own clock (they
/// never use this).
#[derive(Debug, Clone)]
pub struct DataClock {
    started: (DateTime<Utc>, Instant),
    last: Option<(DateTime<Utc>, Instant)>,
}

impl DataClock {
    /// A clock started now.
    pub fn start() -> Self {
        DataClock {
            started: (Utc::now(), Instant::now()),
            last: None,
        }
    }

    /// When the clock was started (wall time).
    pub fn started(&self) -> DateTime<Utc> {
        self.started.0
    }

    /// A reading with data time `t` arrived now.
    pub fn saw(&mut self, t: DateTime<Utc>) {
        if self.last.is_none_or(|(l, _)| t >= l) {
            self.last = Some((t, Instant::now()));
        }
    }

    /// Data time now.
    pub fn now(&self) -> DateTime<Utc> {
        let (t, at) = self.last.unwrap_or(self.started);
        t + chrono::Duration::from_std(at.elapsed()).unwrap_or_else(|_| chrono::Duration::zero())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn follows_the_last_reading_then_wall_time() {
        let mut c = DataClock::start();
        assert!(c.now() >= c.started());
        let past = c.started() - chrono::Duration::hours(3);
        c.saw(past);
        let now = c.now();
        assert!(now >= past && now < past + chrono::Duration::seconds(5));
        // An older reading does not move the clock back.
        c.saw(past - chrono::Duration::hours(1));
        assert!(c.now() >= now);
    }
}
