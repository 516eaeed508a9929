//! `isochor listen`: show what a device sends.

use std::time::Duration;

use clap::Args;

use crate::Error;
use crate::link::transport::{ReadOnly, Serial, Tcp};
use crate::link::view::{ListenFormat, listen};
use crate::link::{Link, Transport};

/// Where the device is.
#[derive(Debug, Args)]
#[group(required = true, multiple = false, id = "source")]
pub struct Source {
    /// Serial port of the device (e.g. /dev/ttyUSB0).
    #[arg(long)]
    pub port: Option<String>,
    /// TCP address of a serial bridge or emulated device (HOST:PORT).
    #[arg(long)]
    pub tcp: Option<String>,
    /// Read frames from standard input (a capture, or a pipe).
    #[arg(long)]
    pub stdin: bool,
}

/// Arguments of `isochor listen`.
#[derive(Debug, Args)]
pub struct ListenArgs {
    /// The device.
    #[command(flatten)]
    pub source: Source,
    /// Baud rate of the serial port.
    #[arg(long, default_value_t = 115_200)]
    pub baud: u32,
    /// Output: readable live view, JSON lines, or CSV.
    #[arg(long, value_enum, default_value_t = ListenFormat::Text)]
    pub format: ListenFormat,
    /// Stop after this many telemetry and alarm messages.
    #[arg(long)]
    pub count: Option<u64>,
    /// Stop after this many seconds without data.
    #[arg(long)]
    pub idle_timeout: Option<f64>,
}

/// Opens the source named on the command line.
pub fn open(source: &Source, baud: u32) -> Result<Box<dyn Transport>, Error> {
    Ok(match (&source.port, &source.tcp) {
        (Some(p), _) => Box::new(Serial::open(p, baud)?),
        (None, Some(a)) => Box::new(Tcp::connect(a)?),
        (None, None) => Box::new(ReadOnly(std::io::stdin())),
    })
}

/// Runs the command (writes as data arrives; returns nothing more to print).
pub fn run(a: &ListenArgs) -> Result<String, Error> {
    let idle = match a.idle_timeout {
        Some(s) if s.is_finite() && s > 0.0 => Some(Duration::from_secs_f64(s)),
        Some(s) => return Err(Error::Invalid(format!("--idle-timeout {s}: must be > 0"))),
        None => None,
    };
    let mut link = Link::new(open(&a.source, a.baud)?);
    let stdout = std::io::stdout();
    let mut out = stdout.lock();
    listen(&mut link, a.format, a.count, idle, &mut out)?;
    Ok(String::new())
}
