//! Byte-stream sources: serial ports, TCP connections and standard input.

use tokio::io::{AsyncRead, AsyncReadExt, AsyncWrite, AsyncWriteExt};

use super::uri::{Flow, Parity, SerialSettings};
use super::{Backoff, Closed, Poll, Sink};
use crate::parse::{Decoder, Framed, LineSplitter};
use crate::sample::{SourceEvent, SourceState, escape_bytes};

/// Why a connection ended.
enum End {
    /// Clean end of stream (EOF).
    Eof,
    /// A read or write error (EIO when a USB adapter is pulled …).
    Failed(String),
}

/// Reads until the stream ends, decoding lines and sending polls.
async fn pump<R, W>(
    mut rd: R,
    mut wr: Option<W>,
    decoder: &mut dyn Decoder,
    splitter: &mut LineSplitter,
    poll: Option<&Poll>,
    sink: &Sink,
) -> Result<End, Closed>
where
    R: AsyncRead + Unpin,
    W: AsyncWrite + Unpin,
{
    let mut buf = vec![0u8; 8192];
    let mut tick = poll.map(|p| tokio::time::interval(p.every));
    loop {
        let polled = async {
            match tick.as_mut() {
                Some(t) => {
                    t.tick().await;
                }
                None => std::future::pending::<()>().await,
            }
        };
        tokio::select! {
            r = rd.read(&mut buf) => match r {
                Ok(0) => return Ok(End::Eof),
                Ok(n) => {
                    let lines = splitter.push(&buf[..n]);
                    sink.lines(decoder, lines).await?;
                }
                Err(e) => return Ok(End::Failed(e.to_string())),
            },
            () = polled => {
                if let (Some(w), Some(p)) = (wr.as_mut(), poll)
                    && let Err(e) = w.write_all(&p.bytes).await
                {
                    return Ok(End::Failed(format!("cannot send the poll string: {e}")));
                }
            }
        }
    }
}

/// Reports a line cut off by a disconnect: kept as an `unparsed` event, not
/// silently lost, and not glued to the first line of the next connection.
async fn report_partial(splitter: &mut LineSplitter, sink: &Sink) -> Result<(), Closed> {
    let bytes = match splitter.reset() {
        Some(Framed::Line(l)) => l,
        Some(Framed::TooLong { head, .. }) => head,
        None => return Ok(()),
    };
    sink.send(SourceEvent::Unparsed {
        source: sink.name().to_string(),
        time: chrono::Utc::now(),
        text: format!("incomplete line at disconnect: {}", escape_bytes(&bytes)),
    })
    .await
}

/// A byte stream that can be read and written.
trait Duplex: AsyncRead + AsyncWrite + Unpin + Send {}
impl<T: AsyncRead + AsyncWrite + Unpin + Send> Duplex for T {}

/// Where a reconnecting source connects to.
enum Target {
    Serial(SerialSettings),
    Tcp(String),
}

impl Target {
    async fn open(&self) -> Result<Box<dyn Duplex>, String> {
        match self {
            Target::Serial(s) => Ok(Box::new(open_serial(s)?)),
            Target::Tcp(addr) => tokio::net::TcpStream::connect(addr)
                .await
                .map(|s| Box::new(s) as Box<dyn Duplex>)
                .map_err(|e| format!("cannot connect: {e}")),
        }
    }
}

/// A reconnecting connection: the target is opened until that succeeds, the
/// stream is read until it ends, and the cycle repeats with backoff.
async fn reconnecting(
    what: &str,
    target: Target,
    mut decoder: Box<dyn Decoder>,
    poll: Option<Poll>,
    sink: Sink,
) -> Result<(), Closed> {
    let mut backoff = Backoff::default();
    let mut splitter = LineSplitter::new();
    let mut last_error = String::new();
    loop {
        match target.open().await {
            Ok(stream) => {
                last_error.clear();
                backoff.reset();
                sink.state(SourceState::Connected).await?;
                let (rd, wr) = tokio::io::split(stream);
                let end = pump(
                    rd,
                    Some(wr),
                    &mut *decoder,
                    &mut splitter,
                    poll.as_ref(),
                    &sink,
                )
                .await?;
                report_partial(&mut splitter, &sink).await?;
                let why = match end {
                    End::Eof => "end of stream".to_string(),
                    End::Failed(e) => e,
                };
                sink.error(format!("{what}: disconnected ({why})")).await?;
            }
            Err(e) => {
                // Say it once, not at every retry.
                if e != last_error {
                    sink.error(format!("{what}: {e}")).await?;
                    last_error = e;
                }
            }
        }
        let delay = backoff.next_delay();
        sink.state(SourceState::Retrying {
            in_s: delay.as_secs_f64(),
        })
        .await?;
        tokio::time::sleep(delay).await;
    }
}

fn open_serial(s: &SerialSettings) -> Result<tokio_serial::SerialStream, String> {
    use tokio_serial::SerialPortBuilderExt;
    let data_bits = match s.data_bits {
        5 => tokio_serial::DataBits::Five,
        6 => tokio_serial::DataBits::Six,
        7 => tokio_serial::DataBits::Seven,
        _ => tokio_serial::DataBits::Eight,
    };
    let parity = match s.parity {
        Parity::None => tokio_serial::Parity::None,
        Parity::Even => tokio_serial::Parity::Even,
        Parity::Odd => tokio_serial::Parity::Odd,
    };
    let stop = if s.stop_bits == 2 {
        tokio_serial::StopBits::Two
    } else {
        tokio_serial::StopBits::One
    };
    let flow = match s.flow {
        Flow::None => tokio_serial::FlowControl::None,
        Flow::RtsCts => tokio_serial::FlowControl::Hardware,
        Flow::XonXoff => tokio_serial::FlowControl::Software,
    };
    let mut port = tokio_serial::new(&s.path, s.baud)
        .data_bits(data_bits)
        .parity(parity)
        .stop_bits(stop)
        .flow_control(flow)
        .open_native_async()
        .map_err(|e| format!("cannot open: {e}"))?;
    if s.exclusive {
        port.set_exclusive(true)
            .map_err(|e| format!("cannot get exclusive use: {e}"))?;
    }
    Ok(port)
}

/// A serial port, reopened whenever it disappears.
pub(super) async fn serial(
    settings: SerialSettings,
    decoder: Box<dyn Decoder>,
    poll: Option<Poll>,
    sink: Sink,
) -> Result<(), Closed> {
    let what = settings.path.clone();
    reconnecting(&what, Target::Serial(settings), decoder, poll, sink).await
}

/// A TCP client, reconnecting whenever the server goes away.
pub(super) async fn tcp(
    addr: String,
    decoder: Box<dyn Decoder>,
    poll: Option<Poll>,
    sink: Sink,
) -> Result<(), Closed> {
    let what = addr.clone();
    reconnecting(&what, Target::Tcp(addr), decoder, poll, sink).await
}

/// Standard input, until it is closed.
pub(super) async fn stdin(mut decoder: Box<dyn Decoder>, sink: Sink) -> Result<(), Closed> {
    let mut splitter = LineSplitter::new();
    sink.state(SourceState::Connected).await?;
    let end = pump(
        tokio::io::stdin(),
        None::<tokio::io::Sink>,
        &mut *decoder,
        &mut splitter,
        None,
        &sink,
    )
    .await?;
    if let End::Failed(e) = end {
        sink.error(format!("stdin: {e}")).await?;
    }
    // A last line without a line end still counts.
    if let Some(f) = splitter.finish() {
        sink.lines(&mut *decoder, vec![f]).await?;
    }
    sink.state(SourceState::Ended).await
}
