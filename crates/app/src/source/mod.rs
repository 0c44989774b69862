//! Sources: tokio tasks that read gauge data where it lives — a serial port,
//! a TCP connection, a growing file, standard input, the simulated chamber —
//! and send [`SourceEvent`]s down a bounded channel. A full channel makes the
//! source wait (back-pressure); nothing is dropped here.
//!
//! Serial and TCP sources reconnect with a capped exponential backoff when the
//! device goes away (end of stream, an I/O error, a vanished path), reporting
//! `retrying in Ns` as a [`SourceState`].

mod file;
pub mod sim;
mod stream;
pub mod uri;

use std::time::Duration;

use chrono::Utc;
use tokio::sync::mpsc;
use tokio::task::JoinHandle;

use crate::parse::Decoder;
use crate::sample::{SourceEvent, SourceState};
pub use uri::{SourceKind, SourceUri};

/// A request sent to a device at a fixed interval, for controllers that must
/// be asked.
#[derive(Debug, Clone, PartialEq)]
pub struct Poll {
    /// Bytes to send.
    pub bytes: Vec<u8>,
    /// Interval.
    pub every: Duration,
}

/// Everything a source task needs.
pub struct SourceSpec {
    /// Where and how to read.
    pub uri: SourceUri,
    /// Turns lines into samples.
    pub decoder: Box<dyn Decoder>,
    /// Optional poll request (serial and TCP).
    pub poll: Option<Poll>,
}

/// Capped exponential backoff: 1 s, 2 s, 4 s … up to `max`.
#[derive(Debug, Clone)]
pub struct Backoff {
    next: Duration,
    first: Duration,
    max: Duration,
}

impl Backoff {
    /// Starts at `first`, doubles up to `max`.
    pub fn new(first: Duration, max: Duration) -> Self {
        Backoff {
            next: first.min(max),
            first: first.min(max),
            max,
        }
    }

    /// The delay before the next attempt; doubles the one after.
    pub fn next_delay(&mut self) -> Duration {
        let d = self.next;
        self.next = (self.next * 2).min(self.max);
        d
    }

    /// After a successful connection.
    pub fn reset(&mut self) {
        self.next = self.first;
    }
}

impl Default for Backoff {
    fn default() -> Self {
        Backoff::new(Duration::from_secs(1), Duration::from_secs(30))
    }
}

/// The sending side a source task uses; `Err` means the consumer is gone
/// and the task should end.
#[derive(Clone)]
pub struct Sink {
    name: String,
    tx: mpsc::Sender<SourceEvent>,
}

/// The consumer has gone away.
#[derive(Debug)]
pub struct Closed;

impl Sink {
    /// A sink for the source called `name`.
    pub fn new(name: impl Into<String>, tx: mpsc::Sender<SourceEvent>) -> Self {
        Sink {
            name: name.into(),
            tx,
        }
    }

    /// The source's name.
    pub fn name(&self) -> &str {
        &self.name
    }

    /// Sends an event, waiting while the channel is full.
    pub async fn send(&self, event: SourceEvent) -> Result<(), Closed> {
        self.tx.send(event).await.map_err(|_| Closed)
    }

    /// Reports a state change.
    pub async fn state(&self, state: SourceState) -> Result<(), Closed> {
        self.send(SourceEvent::Status {
            source: self.name.clone(),
            state,
        })
        .await
    }

    /// Reports a problem the source survives.
    pub async fn error(&self, message: impl Into<String>) -> Result<(), Closed> {
        self.send(SourceEvent::Error {
            source: self.name.clone(),
            message: message.into(),
        })
        .await
    }

    /// Decodes framed lines and sends the resulting events.
    pub async fn lines(
        &self,
        decoder: &mut dyn Decoder,
        framed: Vec<crate::parse::Framed>,
    ) -> Result<(), Closed> {
        let now = Utc::now();
        for f in framed {
            for e in crate::parse::decode_framed(decoder, f, now, &self.name) {
                self.send(e).await?;
            }
        }
        Ok(())
    }
}

/// Channels a source will produce that its decoder cannot know in advance
/// (the simulated chamber's gauges).
pub fn channels_of(uri: &SourceUri) -> Vec<crate::sample::ChannelInfo> {
    match &uri.kind {
        SourceKind::Sim(s) => sim::simulator(s).map(|s| s.channels()).unwrap_or_default(),
        _ => Vec::new(),
    }
}

/// Starts a source task. It ends when the source ends (end of a file that is
/// not followed, stdin closed, the simulation over) or when `tx`'s receiver
/// is dropped.
pub fn spawn(spec: SourceSpec, tx: mpsc::Sender<SourceEvent>) -> JoinHandle<()> {
    let sink = Sink::new(spec.uri.text.clone(), tx);
    tokio::spawn(async move {
        let SourceSpec { uri, decoder, poll } = spec;
        let _ = match uri.kind {
            SourceKind::Serial(settings) => stream::serial(settings, decoder, poll, sink).await,
            SourceKind::Tcp { addr } => stream::tcp(addr, decoder, poll, sink).await,
            SourceKind::Stdin => stream::stdin(decoder, sink).await,
            SourceKind::File {
                path,
                follow,
                from_end,
            } => file::run(path, follow, from_end, decoder, sink).await,
            SourceKind::Sim(settings) => sim::run(settings, sink).await,
        };
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn backoff_doubles_and_caps() {
        let mut b = Backoff::new(Duration::from_secs(1), Duration::from_secs(5));
        let got: Vec<u64> = (0..5).map(|_| b.next_delay().as_secs()).collect();
        assert_eq!(got, [1, 2, 4, 5, 5]);
        b.reset();
        assert_eq!(b.next_delay().as_secs(), 1);
    }
}
