//! The terminal: raw mode and the alternate screen, restored on every way
//! out — normal exit, panic (a hook), and signals (handled by the loops,
//! which then return through the guard).

use std::io::{self, Write};
use std::sync::Arc;
use std::sync::atomic::{AtomicU64, Ordering};

use crossterm::{cursor, execute, terminal};
use ratatui::Terminal;
use ratatui::backend::CrosstermBackend;

/// Counts the bytes written to the terminal (for the status of an SSH link
/// and for benchmarks).
#[derive(Debug, Clone)]
pub struct Counting<W> {
    inner: W,
    bytes: Arc<AtomicU64>,
}

impl<W> Counting<W> {
    /// Wraps a writer.
    pub fn new(inner: W) -> (Self, Arc<AtomicU64>) {
        let bytes = Arc::new(AtomicU64::new(0));
        (
            Counting {
                inner,
                bytes: bytes.clone(),
            },
            bytes,
        )
    }
}

impl<W: Write> Write for Counting<W> {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        let n = self.inner.write(buf)?;
        self.bytes.fetch_add(n as u64, Ordering::Relaxed);
        Ok(n)
    }
    fn flush(&mut self) -> io::Result<()> {
        self.inner.flush()
    }
}

/// The terminal type the dashboard draws on.
pub type Term = Terminal<CrosstermBackend<Counting<io::Stdout>>>;

/// Puts the terminal back as it was.
pub fn restore() {
    let _ = terminal::disable_raw_mode();
    let _ = execute!(
        io::stdout(),
        terminal::LeaveAlternateScreen,
        cursor::Show,
        crossterm::event::DisableBracketedPaste
    );
}

/// Owns the terminal while the dashboard runs; restores it when dropped.
pub struct Guard {
    /// The terminal.
    pub term: Term,
    /// Bytes written so far.
    pub bytes: Arc<AtomicU64>,
}

impl Guard {
    /// Enters raw mode and the alternate screen, and installs a panic hook
    /// that restores the terminal before the panic message is printed.
    pub fn enter() -> io::Result<Guard> {
        let previous = std::panic::take_hook();
        std::panic::set_hook(Box::new(move |info| {
            restore();
            previous(info);
        }));
        terminal::enable_raw_mode()?;
        let mut out = io::stdout();
        execute!(out, terminal::EnterAlternateScreen, cursor::Hide)?;
        let (counting, bytes) = Counting::new(io::stdout());
        let term = Terminal::new(CrosstermBackend::new(counting))?;
        Ok(Guard { term, bytes })
    }
}

impl Drop for Guard {
    fn drop(&mut self) {
        restore();
    }
}
