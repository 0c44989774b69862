//! File sources: read a file once, or follow it as it grows — surviving
//! rotation (the file renamed away and a new one created) and truncation —
//! holding back a partial last line until it is complete.

use std::os::unix::fs::MetadataExt;
use std::path::{Path, PathBuf};
use std::time::Duration;

use tokio::io::{AsyncReadExt, AsyncSeekExt};

use super::{Backoff, Closed, Sink};
use crate::parse::{Decoder, LineSplitter};
use crate::sample::SourceState;

/// How often a followed file is checked for new data.
const POLL: Duration = Duration::from_millis(200);

/// Identity of a file: device and inode.
fn identity(m: &std::fs::Metadata) -> (u64, u64) {
    (m.dev(), m.ino())
}

struct Open {
    file: tokio::fs::File,
    id: (u64, u64),
    pos: u64,
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
    Ok(Open {
        file,
        id: identity(&meta),
        pos,
    })
}

/// Reads what is there now; returns the number of bytes read.
async fn drain(
    f: &mut Open,
    splitter: &mut LineSplitter,
    decoder: &mut dyn Decoder,
    sink: &Sink,
) -> Result<Result<u64, String>, Closed> {
    let mut buf = vec![0u8; 64 * 1024];
    let mut total = 0;
    loop {
        match f.file.read(&mut buf).await {
            Ok(0) => return Ok(Ok(total)),
            Ok(n) => {
                f.pos += n as u64;
                total += n as u64;
                let lines = splitter.push(&buf[..n]);
                sink.lines(decoder, lines).await?;
            }
            Err(e) => return Ok(Err(e.to_string())),
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
        if let Err(e) = drain(&mut f, &mut splitter, &mut *decoder, &sink).await? {
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
            if let Err(e) = drain(&mut f, &mut splitter, &mut *decoder, &sink).await? {
                sink.error(format!("{shown}: {e}")).await?;
            }
            tokio::time::sleep(POLL).await;
            match tokio::fs::metadata(&path).await {
                Ok(m) if identity(&m) != f.id => {
                    // Rotated: finish the old file, then start on the new one.
                    if let Err(e) = drain(&mut f, &mut splitter, &mut *decoder, &sink).await? {
                        sink.error(format!("{shown}: {e}")).await?;
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
                    // Truncated in place: read again from the start.
                    let dropped = splitter.reset();
                    let note = match dropped {
                        Some(_) => " (an unfinished line before it was discarded)",
                        None => "",
                    };
                    sink.error(format!(
                        "{shown}: truncated from {} to {} bytes; reading from the start{note}",
                        f.pos,
                        m.len()
                    ))
                    .await?;
                    if let Err(e) = f.file.seek(std::io::SeekFrom::Start(0)).await {
                        sink.error(format!("{shown}: cannot seek: {e}")).await?;
                        break;
                    }
                    f.pos = 0;
                }
                // Renamed away and not yet replaced: keep reading the old one.
                Ok(_) | Err(_) => {}
            }
        }
    }
}
