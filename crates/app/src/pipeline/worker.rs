//! A stage of the report on a thread of its own: it is handed batches over
//! a bounded channel and hands each back to be filled again, so that
//! nothing is allocated per row on either side (rows allocated on one core
//! and freed on the other made an earlier design slower than one thread).
//! When asked, or when no thread can be started, the same stage runs on
//! the caller's thread instead, through the same function.

use std::sync::mpsc;
use std::thread::JoinHandle;

/// Batches in flight: one being filled, one being taken, one waiting.
const BATCHES: usize = 3;

enum Mode<B, S> {
    /// Taken at once, here.
    Here(Box<S>),
    /// Handed to the stage's thread.
    Thread {
        full: Option<mpsc::SyncSender<B>>,
        empty: mpsc::Receiver<B>,
        handle: Option<JoinHandle<Option<S>>>,
    },
    /// The thread stopped unexpectedly (a bug): what it held is gone.
    Lost,
}

/// A stage with state `S` that takes batches `B` (`take` must leave a
/// batch empty, ready to be filled again).
pub(crate) struct Worker<B, S> {
    mode: Mode<B, S>,
    take: fn(&mut S, &mut B),
    /// The batch being filled.
    pub(crate) batch: B,
}

impl<B: Default + Send + 'static, S: Send + 'static> Worker<B, S> {
    /// A stage starting from `state`, on a thread named `thread` when
    /// given (and one can be started), else here.
    pub(crate) fn new(state: S, thread: Option<&str>, take: fn(&mut S, &mut B)) -> Self {
        let mode = match thread {
            Some(name) => spawn(state, name, take),
            None => Mode::Here(Box::new(state)),
        };
        Worker {
            mode,
            take,
            batch: B::default(),
        }
    }

    /// Hands over (or takes here) the batch being filled; a fresh one is
    /// then being filled.
    pub(crate) fn hand_over(&mut self) {
        match &mut self.mode {
            Mode::Here(state) => (self.take)(state, &mut self.batch),
            Mode::Thread { full, empty, .. } => {
                // A batch comes back for each one sent, unless the thread
                // has stopped; then [`Worker::settle`] says so.
                let sent = full.as_ref().is_some_and(|tx| {
                    let next = empty.recv().unwrap_or_default();
                    tx.send(std::mem::replace(&mut self.batch, next)).is_ok()
                });
                if !sent {
                    full.take();
                    self.batch = B::default();
                }
            }
            Mode::Lost => self.batch = B::default(),
        }
    }

    /// Hands over what is being filled, waits for the thread to take
    /// everything, and from then on takes batches here. False if the
    /// thread was lost.
    pub(crate) fn settle(&mut self) -> bool {
        self.hand_over();
        if let Mode::Thread { full, handle, .. } = &mut self.mode {
            // Closing the channel ends the thread's loop.
            full.take();
            self.mode = match handle.take().map(JoinHandle::join) {
                Some(Ok(Some(state))) => Mode::Here(Box::new(state)),
                _ => Mode::Lost,
            };
        }
        !matches!(self.mode, Mode::Lost)
    }

    /// The state, once everything handed over is taken (after
    /// [`Worker::settle`], or at any time when the stage runs here).
    pub(crate) fn state(&self) -> Option<&S> {
        match &self.mode {
            Mode::Here(s) => Some(s),
            _ => None,
        }
    }

    /// The state, as [`Worker::state`].
    pub(crate) fn state_mut(&mut self) -> Option<&mut S> {
        match &mut self.mode {
            Mode::Here(s) => Some(s),
            _ => None,
        }
    }
}

impl<B, S> Drop for Worker<B, S> {
    fn drop(&mut self) {
        if let Mode::Thread { full, handle, .. } = &mut self.mode {
            full.take();
            if let Some(h) = handle.take() {
                let _ = h.join();
            }
        }
    }
}

/// The stage's thread; the stage runs here when none can be started.
fn spawn<B, S>(state: S, name: &str, take: fn(&mut S, &mut B)) -> Mode<B, S>
where
    B: Default + Send + 'static,
    S: Send + 'static,
{
    let (full_tx, full_rx) = mpsc::sync_channel::<B>(BATCHES);
    let (empty_tx, empty_rx) = mpsc::channel::<B>();
    let (state_tx, state_rx) = mpsc::channel::<S>();
    for _ in 0..BATCHES {
        // Cannot fail: the receiver is here.
        let _ = empty_tx.send(B::default());
    }
    let spawned = std::thread::Builder::new()
        .name(name.to_string())
        .spawn(move || {
            let mut state = state_rx.recv().ok()?;
            for mut b in full_rx.iter() {
                take(&mut state, &mut b);
                // The sender may be done with batches.
                let _ = empty_tx.send(b);
            }
            Some(state)
        });
    match spawned {
        // Cannot fail: the thread waits for it.
        Ok(handle) => match state_tx.send(state) {
            Ok(()) => Mode::Thread {
                full: Some(full_tx),
                empty: empty_rx,
                handle: Some(handle),
            },
            Err(mpsc::SendError(state)) => Mode::Here(Box::new(state)),
        },
        Err(_) => Mode::Here(Box::new(state)),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[derive(Default)]
    struct Numbers(Vec<u64>);

    fn sum(total: &mut (u64, u64), b: &mut Numbers) {
        for n in b.0.drain(..) {
            // Order matters: a running hash of the sequence.
            total.0 = total.0.wrapping_mul(31).wrapping_add(n);
            total.1 += 1;
        }
    }

    /// Here or on a thread, every batch is taken once, in order, and the
    /// state comes back.
    #[test]
    fn a_thread_takes_what_taking_here_takes() {
        let mut results = Vec::new();
        for thread in [None, Some("test stage")] {
            let mut w = Worker::new((0u64, 0u64), thread, sum);
            for i in 0..10_000u64 {
                w.batch.0.push(i);
                if w.batch.0.len() == 7 {
                    w.hand_over();
                }
            }
            assert!(w.settle());
            results.push(*w.state().expect("settled"));
            // Here from now on.
            w.batch.0.push(1);
            w.hand_over();
            assert_eq!(w.state().map(|s| s.1), Some(10_001));
        }
        assert_eq!(results[0], results[1]);
        assert_eq!(results[0].1, 10_000);
    }
}
