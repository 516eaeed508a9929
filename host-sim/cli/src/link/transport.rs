//! Byte transports (serial port, TCP, standard input, in-memory) and the
//! frame reader on top of them.

use std::collections::VecDeque;
use std::io::{self, Read, Write};
use std::net::TcpStream;
use std::sync::mpsc::{Receiver, RecvTimeoutError, Sender, channel};
use std::time::{Duration, Instant};

use isochor_core::link::{self, Accumulator, Feed, FromDevice, MAX_FRAME_LEN, ToDevice};

use crate::Error;

/// A byte stream to a device.
pub trait Transport: Send {
    /// Sends all bytes.
    fn send(&mut self, bytes: &[u8]) -> io::Result<()>;
    /// Reads what arrives within `timeout`: `Ok(0)` when nothing did;
    /// `Err(UnexpectedEof)` once the other end has closed.
    fn receive(&mut self, buf: &mut [u8], timeout: Duration) -> io::Result<usize>;
}

fn timed_out(e: &io::Error) -> bool {
    matches!(
        e.kind(),
        io::ErrorKind::TimedOut | io::ErrorKind::WouldBlock
    )
}

/// A serial port (8 data bits, no parity, 1 stop bit, no flow control).
pub struct Serial(Box<dyn serialport::SerialPort>);

impl Serial {
    /// Opens `path` at `baud`.
    pub fn open(path: &str, baud: u32) -> Result<Serial, Error> {
        serialport::new(path, baud)
            .timeout(Duration::from_millis(100))
            .open()
            .map(Serial)
            .map_err(|e| Error::Link(format!("serial port {path}: {e}")))
    }

    /// Opens `path` at `baud` with `parity` and `stop` bits (a Modbus line).
    pub fn open_with(
        path: &str,
        baud: u32,
        parity: serialport::Parity,
        stop: serialport::StopBits,
    ) -> Result<Serial, Error> {
        serialport::new(path, baud)
            .parity(parity)
            .stop_bits(stop)
            .timeout(Duration::from_millis(100))
            .open()
            .map(Serial)
            .map_err(|e| Error::Link(format!("serial port {path}: {e}")))
    }
}

impl Transport for Serial {
    fn send(&mut self, bytes: &[u8]) -> io::Result<()> {
        self.0.write_all(bytes)?;
        self.0.flush()
    }
    fn receive(&mut self, buf: &mut [u8], timeout: Duration) -> io::Result<usize> {
        self.0
            .set_timeout(timeout.max(Duration::from_millis(1)))
            .map_err(io::Error::other)?;
        match self.0.read(buf) {
            Err(e) if timed_out(&e) => Ok(0),
            r => r,
        }
    }
}

/// A TCP connection (a serial-to-network bridge, or an emulated device).
pub struct Tcp(TcpStream);

impl Tcp {
    /// Connects to `addr` (HOST:PORT).
    pub fn connect(addr: &str) -> Result<Tcp, Error> {
        let s = TcpStream::connect(addr).map_err(|e| Error::Link(format!("tcp {addr}: {e}")))?;
        let _ = s.set_nodelay(true);
        Ok(Tcp(s))
    }

    /// Wraps a connected stream.
    pub fn from_stream(s: TcpStream) -> Tcp {
        Tcp(s)
    }
}

impl Transport for Tcp {
    fn send(&mut self, bytes: &[u8]) -> io::Result<()> {
        self.0.write_all(bytes)
    }
    fn receive(&mut self, buf: &mut [u8], timeout: Duration) -> io::Result<usize> {
        self.0
            .set_read_timeout(Some(timeout.max(Duration::from_millis(1))))?;
        match self.0.read(buf) {
            Ok(0) => Err(io::ErrorKind::UnexpectedEof.into()),
            Err(e) if timed_out(&e) => Ok(0),
            r => r,
        }
    }
}

/// Any reader (standard input, a recorded capture): receive only.
pub struct ReadOnly<R>(pub R);

impl<R: Read + Send> Transport for ReadOnly<R> {
    fn send(&mut self, _bytes: &[u8]) -> io::Result<()> {
        Err(io::Error::new(
            io::ErrorKind::Unsupported,
            "this input only receives",
        ))
    }
    fn receive(&mut self, buf: &mut [u8], _timeout: Duration) -> io::Result<usize> {
        match self.0.read(buf) {
            Ok(0) => Err(io::ErrorKind::UnexpectedEof.into()),
            r => r,
        }
    }
}

/// One end of an in-memory byte pipe (tests: host and device in one process).
pub struct MemoryEnd {
    tx: Sender<Vec<u8>>,
    rx: Receiver<Vec<u8>>,
    pending: VecDeque<u8>,
}

/// Two connected in-memory ends.
pub fn memory_pair() -> (MemoryEnd, MemoryEnd) {
    let (a_tx, b_rx) = channel();
    let (b_tx, a_rx) = channel();
    (
        MemoryEnd {
            tx: a_tx,
            rx: a_rx,
            pending: VecDeque::new(),
        },
        MemoryEnd {
            tx: b_tx,
            rx: b_rx,
            pending: VecDeque::new(),
        },
    )
}

impl Transport for MemoryEnd {
    fn send(&mut self, bytes: &[u8]) -> io::Result<()> {
        self.tx
            .send(bytes.to_vec())
            .map_err(|_| io::ErrorKind::BrokenPipe.into())
    }
    fn receive(&mut self, buf: &mut [u8], timeout: Duration) -> io::Result<usize> {
        if self.pending.is_empty() {
            match self.rx.recv_timeout(timeout) {
                Ok(v) => self.pending.extend(v),
                Err(RecvTimeoutError::Timeout) => return Ok(0),
                Err(RecvTimeoutError::Disconnected) => {
                    return Err(io::ErrorKind::UnexpectedEof.into());
                }
            }
        }
        let n = buf.len().min(self.pending.len());
        for (dst, src) in buf.iter_mut().zip(self.pending.drain(..n)) {
            *dst = src;
        }
        Ok(n)
    }
}

/// What the reader got.
#[derive(Debug, PartialEq, Eq)]
#[allow(clippy::large_enum_variant)] // returned once per frame, never stored in bulk
pub enum LinkEvent {
    /// A decoded message of the device.
    Message(FromDevice),
    /// A frame that did not decode, and why.
    BadFrame(isochor_core::Error),
    /// A frame longer than the protocol allows.
    Overfull,
}

/// Counts of what the reader has seen.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, serde::Serialize)]
pub struct LinkStats {
    /// Frames decoded.
    pub frames: u64,
    /// Frames refused (COBS, length, CRC, version, kind, body).
    pub bad_frames: u64,
    /// Frames too long.
    pub overfull: u64,
}

/// Frames over a transport, at the host's end: sends [`ToDevice`]
/// messages, reads [`FromDevice`] ones.
pub struct Link<T> {
    transport: T,
    acc: Accumulator<FromDevice>,
    pending: Vec<u8>,
    stats: LinkStats,
    closed: bool,
}

impl<T: Transport> Link<T> {
    /// Frames over `transport`.
    pub fn new(transport: T) -> Link<T> {
        Link {
            transport,
            acc: Accumulator::new(),
            pending: Vec::new(),
            stats: LinkStats::default(),
            closed: false,
        }
    }

    /// What has been seen so far.
    pub fn stats(&self) -> LinkStats {
        self.stats
    }

    /// True once the other end has closed and everything received was read.
    pub fn closed(&self) -> bool {
        self.closed && self.pending.is_empty()
    }

    /// Sends one message as a frame.
    pub fn send(&mut self, msg: &ToDevice) -> Result<(), Error> {
        let mut out = [0u8; MAX_FRAME_LEN];
        let n = link::encode(msg, &mut out)?;
        self.transport
            .send(&out[..n])
            .map_err(|e| Error::Link(format!("send: {e}")))
    }

    /// Sends bytes as they are, not framed (tests: damaged frames, noise).
    pub fn send_raw(&mut self, bytes: &[u8]) -> Result<(), Error> {
        self.transport
            .send(bytes)
            .map_err(|e| Error::Link(format!("send: {e}")))
    }

    /// The next event, waiting at most `timeout`; `None` when nothing
    /// complete arrived in time or the stream has ended.
    pub fn next_event(&mut self, timeout: Duration) -> Result<Option<LinkEvent>, Error> {
        let deadline = Instant::now() + timeout;
        loop {
            if !self.pending.is_empty() {
                let input = std::mem::take(&mut self.pending);
                let (event, rest) = match self.acc.feed(&input) {
                    Feed::NeedMore => (None, &[][..]),
                    Feed::Frame { message, rest } => {
                        self.stats.frames += 1;
                        (Some(LinkEvent::Message(message)), rest)
                    }
                    Feed::BadFrame { error, rest } => {
                        self.stats.bad_frames += 1;
                        (Some(LinkEvent::BadFrame(error)), rest)
                    }
                    Feed::Overfull { rest } => {
                        self.stats.overfull += 1;
                        (Some(LinkEvent::Overfull), rest)
                    }
                };
                self.pending = rest.to_vec();
                if event.is_some() {
                    return Ok(event);
                }
            }
            if self.closed {
                return Ok(None);
            }
            let left = deadline.saturating_duration_since(Instant::now());
            if left.is_zero() {
                return Ok(None);
            }
            let mut buf = [0u8; 512];
            match self.transport.receive(&mut buf, left) {
                Ok(n) => self.pending.extend_from_slice(&buf[..n]),
                Err(e) if e.kind() == io::ErrorKind::UnexpectedEof => self.closed = true,
                Err(e) if e.kind() == io::ErrorKind::Interrupted => {}
                Err(e) => return Err(Error::Link(format!("receive: {e}"))),
            }
        }
    }
}

impl Transport for Box<dyn Transport> {
    fn send(&mut self, bytes: &[u8]) -> io::Result<()> {
        (**self).send(bytes)
    }
    fn receive(&mut self, buf: &mut [u8], timeout: Duration) -> io::Result<usize> {
        (**self).receive(buf, timeout)
    }
}
