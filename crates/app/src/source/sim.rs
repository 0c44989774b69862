//! The simulated chamber as a live source: one record per sample interval,
//! paced at `rate` times real time (or as fast as the consumer takes).

use std::time::Duration;

use chrono::{SubsecRound, Utc};

use super::uri::SimSettings;
use super::{Closed, Sink};
use crate::sample::{SourceEvent, SourceState};
use crate::sim::{Scenario, SimOptions, Simulator};

/// Builds the simulator a `sim:` URI describes, starting now.
pub fn simulator(settings: &SimSettings) -> Result<Simulator, String> {
    let scenario: Scenario = settings.scenario.parse()?;
    Ok(Simulator::new(SimOptions {
        scenario,
        seed: settings.seed,
        start: Utc::now().trunc_subsecs(3),
        interval_s: settings.interval_s,
    }))
}

/// Runs a `sim:` source.
pub(super) async fn run(settings: SimSettings, sink: Sink) -> Result<(), Closed> {
    let mut sim = match simulator(&settings) {
        Ok(s) => s,
        Err(e) => {
            sink.error(e).await?;
            return sink.state(SourceState::Ended).await;
        }
    };
    sink.state(SourceState::Connected).await?;
    let end_s = settings
        .duration_s
        .unwrap_or_else(|| sim.natural_duration_s());
    let started = tokio::time::Instant::now();
    let mut steps = 0u64;
    while settings.steps.is_none_or(|n| steps < n) && sim.elapsed_s() < end_s {
        let samples = sim.next_samples();
        steps += 1;
        sink.send(SourceEvent::Samples(samples)).await?;
        if let Some(rate) = settings.rate {
            let due = started + Duration::from_secs_f64(sim.elapsed_s() / rate);
            tokio::time::sleep_until(due).await;
        }
    }
    sink.state(SourceState::Ended).await
}
