//! File sources: read a file once, or follow it as it grows — surviving
//! rotation (the file renamed away and a new one created) and truncation —
//! holding back a partial last line until it is complete.
//!
//! A truncation is noticed by size (the file is shorter than what was read)
//! and, when the file has already grown past its old length again between
//! two polls, by content: the bytes just before the read position and the
//! first bytes of the file are compared with what was read there. Either way
//! the file is read again from its start, and an unfinished line cut off by
//! it is reported as `unparsed`.

use std::os::unix::fs::MetadataExt;
use std::path::{Path, PathBuf};
use std::time::Duration;

use tokio::io::{AsyncReadExt, AsyncSeekExt};

use super::{Backoff, Closed, Sink};
use crate::parse::{Decoder, Framed, LineSplitter};
use crate::sample::{SourceEvent, SourceState, escape_bytes};

/// How often a followed file is checked for new data.
const POLL: Duration = Duration::from_millis(200);

/// Bytes remembered at the start of the file and before the read position,
/// to recognise the same file content at the next poll.
const WITNESS: usize = 64;

/// Identity of a file: device and inode.
fn identity(m: &std::fs::Metadata) -> (u64, u64) {
    (m.dev(), m.ino())
}

struct Open {
    file: tokio::fs::File,
    id: (u64, u64),
    pos: u64,
    /// The first bytes read (up to [`WITNESS`]).
    head: Vec<u8>,
    /// The last bytes read, ending at `pos` (up to [`WITNESS`]).
    tail: Vec<u8>,
}

impl Open {
    /// Remembers bytes just read at the old position.
    fn witness(&mut self, bytes: &[u8]) {
        if self.head.len() < WITNESS && self.pos < WITNESS as u64 {
            let room = WITNESS - self.head.len();
            self.head.extend_from_slice(&bytes[..bytes.len().min(room)]);
        }
        self.tail
            .extend_from_slice(&bytes[bytes.len().saturating_sub(WITNESS)..]);
        let over = self.tail.len().saturating_sub(WITNESS);
        self.tail.drain(..over);
    }

    /// Whether the file still holds what was read before `pos`: its first
    /// bytes and the bytes just before `pos` are unchanged. Leaves the file
    /// positioned at `resume`.
    async fn unchanged(&mut self, resume: u64) -> std::io::Result<bool> {
        let head = std::mem::take(&mut self.head);
        let tail = std::mem::take(&mut self.tail);
        let result = async {
            Ok::<_, std::io::Error>(
                self.holds(0, &head).await?
                    && self.holds(self.pos - tail.len() as u64, &tail).await?,
            )
        }
        .await;
        self.head = head;
        self.tail = tail;
        self.file.seek(std::io::SeekFrom::Start(resume)).await?;
        result
    }

    /// Whether the file holds `expected` at byte `at`.
    async fn holds(&mut self, at: u64, expected: &[u8]) -> std::io::Result<bool> {
        if expected.is_empty() {
            return Ok(true);
        }
        self.file.seek(std::io::SeekFrom::Start(at)).await?;
        let mut now = vec![0u8; expected.len()];
        let mut got = 0;
        while got < now.len() {
            match self.file.read(&mut now[got..]).await? {
                0 => break,
                n => got += n,
            }
        }
        Ok(got == now.len() && now == expected)
    }
}

async fn open(path: &Path, from_end: bool) -> Result<Open, String> {
    let mut file = tokio::fs::File::open(path)
        .await
        .map_err(|e| format!("cannot open {}: {e}", path.display()))?;
    let meta = file
        .metadata()
        .await
        .map_err(|e| format!("cannot stat {}: {e}", path.display()))?;
    let pos = if from_end {
        file.seek(std::io::SeekFrom::End(0))
            .await
            .map_err(|e| format!("cannot seek {}: {e}", path.display()))?
    } else {
        0
    };
    let mut f = Open {
        file,
        id: identity(&meta),
        pos,
        head: Vec::new(),
        tail: Vec::new(),
    };
    if pos > 0 {
        // Started at the end: remember what is there now.
        let seed = async {
            f.file.seek(std::io::SeekFrom::Start(0)).await?;
            let mut head = vec![0u8; WITNESS.min(pos as usize)];
            f.file.read_exact(&mut head).await?;
            let tail_len = WITNESS.min(pos as usize);
            f.file
                .seek(std::io::SeekFrom::Start(pos - tail_len as u64))
                .await?;
            let mut tail = vec![0u8; tail_len];
            f.file.read_exact(&mut tail).await?;
            f.head = head;
            f.tail = tail;
            f.file.seek(std::io::SeekFrom::Start(pos)).await.map(|_| ())
        };
        seed.await
            .map_err(|e| format!("cannot read {}: {e}", path.display()))?;
    }
    Ok(f)
}

/// How reading what is there now ended.
enum Drained {
    /// At the end of the file.
    Done,
    /// A read failed.
    Failed(String),
    /// The bytes before the read position changed while reading (the file
    /// was truncated and written again): what was just read is not sent.
    Changed,
}

/// Reads what is there now. When `check`, every read is checked to follow
/// on from what was read before it.
async fn drain(
    f: &mut Open,
    splitter: &mut LineSplitter,
    decoder: &mut dyn Decoder,
    sink: &Sink,
    check: bool,
) -> Result<Drained, Closed> {
    let mut buf = vec![0u8; 64 * 1024];
    loop {
        let at = f.pos;
        match f.file.read(&mut buf).await {
            Ok(0) => return Ok(Drained::Done),
            Ok(n) => {
                // Checked after the read: a truncation before it shows here.
                if check && at > 0 {
                    match f.unchanged(at + n as u64).await {
                        Ok(true) => {}
                        Ok(false) => return Ok(Drained::Changed),
                        Err(e) => return Ok(Drained::Failed(e.to_string())),
                    }
                }
                f.witness(&buf[..n]);
                f.pos += n as u64;
                let lines = splitter.push(&buf[..n]);
                sink.lines(decoder, lines).await?;
            }
            Err(e) => return Ok(Drained::Failed(e.to_string())),
        }
    }
}

/// Runs a file source.
pub(super) async fn run(
    path: PathBuf,
    follow: bool,
    from_end: bool,
    mut decoder: Box<dyn Decoder>,
    sink: Sink,
) -> Result<(), Closed> {
    let mut splitter = LineSplitter::new();
    let shown = path.display().to_string();
    if !follow {
        let mut f = match open(&path, false).await {
            Ok(f) => f,
            Err(e) => {
                sink.error(e).await?;
                return sink.state(SourceState::Ended).await;
            }
        };
        sink.state(SourceState::Connected).await?;
        if let Drained::Failed(e) =
            drain(&mut f, &mut splitter, &mut *decoder, &sink, false).await?
        {
            sink.error(format!("{shown}: {e}")).await?;
        }
        if let Some(last) = splitter.finish() {
            sink.lines(&mut *decoder, vec![last]).await?;
        }
        return sink.state(SourceState::Ended).await;
    }

    let mut backoff = Backoff::new(Duration::from_millis(250), Duration::from_secs(5));
    let mut first = true;
    loop {
        // Wait for the file to exist.
        let mut f = match open(&path, first && from_end).await {
            Ok(f) => f,
            Err(e) => {
                if first {
                    sink.error(e).await?;
                    first = false;
                }
                let d = backoff.next_delay();
                sink.state(SourceState::Retrying {
                    in_s: d.as_secs_f64(),
                })
                .await?;
                tokio::time::sleep(d).await;
                continue;
            }
        };
        first = false;
        backoff.reset();
        sink.state(SourceState::Connected).await?;
        loop {
            match drain(&mut f, &mut splitter, &mut *decoder, &sink, true).await? {
                Drained::Done => {}
                Drained::Failed(e) => sink.error(format!("{shown}: {e}")).await?,
                Drained::Changed => {
                    let why = "truncated and written again while being read";
                    if restart(&mut f, &mut splitter, &sink, &shown, why).await? {
                        continue;
                    }
                    break;
                }
            }
            tokio::time::sleep(POLL).await;
            match tokio::fs::metadata(&path).await {
                Ok(m) if identity(&m) != f.id => {
                    // Rotated: finish the old file, then start on the new one.
                    match drain(&mut f, &mut splitter, &mut *decoder, &sink, false).await? {
                        Drained::Done | Drained::Changed => {}
                        Drained::Failed(e) => sink.error(format!("{shown}: {e}")).await?,
                    }
                    if let Some(last) = splitter.finish() {
                        sink.lines(&mut *decoder, vec![last]).await?;
                    }
                    sink.error(format!(
                        "{shown}: rotated; reading the new file from its start"
                    ))
                    .await?;
                    break;
                }
                Ok(m) if m.len() < f.pos => {
                    let why = format!("truncated from {} to {} bytes", f.pos, m.len());
                    if !restart(&mut f, &mut splitter, &sink, &shown, &why).await? {
                        break;
                    }
                }
                Ok(_) if f.pos > 0 => match f.unchanged(f.pos).await {
                    Ok(true) => {}
                    Ok(false) => {
                        let why = format!(
                            "truncated and rewritten past the {} bytes already read",
                            f.pos
                        );
                        if !restart(&mut f, &mut splitter, &sink, &shown, &why).await? {
                            break;
                        }
                    }
                    Err(e) => {
                        sink.error(format!("{shown}: cannot check the file: {e}"))
                            .await?;
                        break;
                    }
                },
                // Renamed away and not yet replaced: keep reading the old one.
                Ok(_) | Err(_) => {}
            }
        }
    }
}

/// After a truncation: reports it, reports an unfinished line it cut off as
/// `unparsed`, and goes back to the start of the file. `false` when the file
/// cannot be read again (the caller reopens it).
async fn restart(
    f: &mut Open,
    splitter: &mut LineSplitter,
    sink: &Sink,
    shown: &str,
    why: &str,
) -> Result<bool, Closed> {
    sink.error(format!("{shown}: {why}; reading from the start"))
        .await?;
    let cut = match splitter.reset() {
        Some(Framed::Line(l)) => Some(l),
        Some(Framed::TooLong { head, .. }) => Some(head),
        None => None,
    };
    if let Some(bytes) = cut {
        sink.send(SourceEvent::Unparsed {
            source: sink.name().to_string(),
            time: chrono::Utc::now(),
            text: format!(
                "incomplete line cut off by truncation: {}",
                escape_bytes(&bytes)
            ),
        })
        .await?;
    }
    if let Err(e) = f.file.seek(std::io::SeekFrom::Start(0)).await {
        sink.error(format!("{shown}: cannot seek: {e}")).await?;
        return Ok(false);
    }
    f.pos = 0;
    f.head.clear();
    f.tail.clear();
    Ok(true)
}
