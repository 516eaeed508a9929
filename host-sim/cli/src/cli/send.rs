//! `isochor send`: one request or signed command to a device. The options
//! become a [`crate::send::Request`], the library runs it and reports, and
//! this renders the report.

use std::time::Duration;

use clap::{Args, Subcommand, ValueEnum};
use isochor_core::auth::Secret;
use isochor_core::field::{Failure, LoopQuantity, Parity, Protocol};
use isochor_core::link::SensorChannel;
use isochor_eos::units;

use super::{Format, to_json};
use crate::Error;
use crate::link::Client;
use crate::send::{self as lib, FieldChanges, SetupRequest};

/// Environment variable that may hold the device secret (64 hex digits).
pub const SECRET_ENV: &str = "ISOCHOR_SECRET";

/// Where the device is (serial port or TCP).
#[derive(Debug, Args)]
#[group(required = true, multiple = false, id = "device")]
pub struct Device {
    /// Serial port of the device (e.g. /dev/ttyUSB0).
    #[arg(long)]
    pub port: Option<String>,
    /// TCP address of a serial bridge or emulated device (HOST:PORT).
    #[arg(long)]
    pub tcp: Option<String>,
}

/// Arguments of `isochor send`.
#[derive(Debug, Args)]
pub struct SendArgs {
    /// The device.
    #[command(flatten)]
    pub device: Device,
    /// Baud rate of the serial port.
    #[arg(long, default_value_t = 115_200)]
    pub baud: u32,
    /// File holding the device secret (64 hex digits); otherwise the
    /// ISOCHOR_SECRET environment variable. Needed for commands that change
    /// the device.
    #[arg(long)]
    pub secret_file: Option<std::path::PathBuf>,
    /// Seconds to wait for each reply.
    #[arg(long, default_value_t = 2.0)]
    pub timeout: f64,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
    /// The request.
    #[command(subcommand)]
    pub request: Request,
}

/// Arguments of `isochor send write-field`.
#[derive(Debug, Args)]
pub struct WriteFieldArgs {
    /// Protocol on a board with one UART: link or modbus.
    #[arg(long)]
    pub protocol: Option<String>,
    /// Modbus address (1 … 247).
    #[arg(long)]
    pub address: Option<u8>,
    /// Baud rate of the Modbus line.
    #[arg(long)]
    pub baud: Option<u32>,
    /// Parity of the Modbus line: none (two stop bits), even, odd.
    #[arg(long)]
    pub parity: Option<String>,
    /// Quantity on the 4–20 mA output: fill (fraction of the rated
    /// content) or mass (kg).
    #[arg(long)]
    pub loop_quantity: Option<String>,
    /// Value at 4 mA.
    #[arg(long)]
    pub loop_lower: Option<f64>,
    /// Value at 20 mA.
    #[arg(long)]
    pub loop_upper: Option<f64>,
    /// Failure current: low (3.5 mA) or high (21.5 mA).
    #[arg(long)]
    pub loop_failure: Option<String>,
}

/// A sensor channel on the command line.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Channel {
    /// The pressure sensor.
    Pressure,
    /// The temperature sensor.
    Temperature,
}

/// The requests.
#[derive(Debug, Subcommand)]
pub enum Request {
    /// Check that the device answers; prints the round-trip time.
    Ping,
    /// Show the device's identity and capabilities.
    Identity,
    /// Show the configuration in force in the device (setup, zero offsets).
    ReadConfig,
    /// Store a new setup in the device (signed); its sensors, tracking
    /// settings and zero offsets are kept, the alarm limits follow the new
    /// tank, and its barometric pressure is kept unless --barometric is
    /// given.
    WriteConfig(WriteConfigArgs),
    /// Store the field settings in the device (signed; the rest of its
    /// configuration is kept): the Modbus line (protocol on a one-UART
    /// board, address, baud rate, parity) and the 4–20 mA output (quantity,
    /// range, failure direction). Options not given keep their stored
    /// values.
    WriteField(WriteFieldArgs),
    /// Take the present reading of a sensor as its zero (signed).
    ///
    /// Pressure: the transducer must be vented to atmosphere first (vessel
    /// valve closed, the transducer's port open to air); the device takes
    /// the reading as the barometric pressure. Never zero a transducer that
    /// is connected to a pressurised vessel: a full vessel would then read
    /// nearly empty and the over-pressure alarm would be blinded. The device
    /// refuses a zero more than 2 % of the transducer's span (at least
    /// 10 kPa) away from the barometric pressure.
    ///
    /// Temperature: put the sensor in an ice bath (crushed ice topped up
    /// with water, stirred) first; the device takes the reading as 0 °C and
    /// refuses a zero more than 2 K away from it.
    ZeroCalibration {
        /// The sensor channel.
        #[arg(long, value_enum)]
        channel: Channel,
    },
    /// Clear latched alarms (signed).
    ClearAlarms,
    /// Restart the device (signed).
    Reboot,
    /// Use a gas-model table built on a host (`isochor model build --emit
    /// blob`) in the device's configuration (signed; the table's gas must
    /// be the setup's).
    LoadGasModel {
        /// The table file.
        #[arg(long)]
        file: std::path::PathBuf,
    },
}

/// The setup to write.
#[derive(Debug, Args)]
pub struct WriteConfigArgs {
    /// Gas name or formula, or a mixture as mole fractions
    /// (argon=82%,carbon_dioxide=18%: load its table with load-gas-model).
    #[arg(long)]
    pub gas: String,
    /// The tank, and how its pressures read (gauge or absolute).
    #[command(flatten)]
    pub tank: super::tank::TankArgs,
    /// Standard condition for standard volume (iso13443, normal, ntp, 60f, or T,P).
    #[arg(long, default_value = "iso13443", allow_hyphen_values = true)]
    pub standard: String,
    /// Temperature the settled pressure refers to.
    #[arg(long, default_value = "15C", allow_hyphen_values = true)]
    pub reference_temperature: String,
}

/// Reads the secret from the file or the environment.
pub fn secret(file: Option<&std::path::Path>) -> Result<Option<Secret>, Error> {
    let text = match file {
        Some(f) => Some(std::fs::read_to_string(f).map_err(|e| Error::InputFile {
            what: Some("--secret-file"),
            path: f.display().to_string(),
            reason: e.to_string(),
        })?),
        None => std::env::var(SECRET_ENV).ok(),
    };
    text.map(|t| Secret::from_hex(&t).map_err(|e| Error::Invalid(format!("device secret: {e}"))))
        .transpose()
}

/// The setup request of write-config's options (units and signs checked).
pub fn setup_request(a: &WriteConfigArgs) -> Result<SetupRequest, Error> {
    Ok(SetupRequest {
        gas: super::gas::parse(&a.gas)?,
        tank: a.tank.tank()?,
        standard: super::content::parse_standard(&a.standard)?.1,
        settled_reference_k: units::temperature_k(
            &a.reference_temperature,
            "--reference-temperature",
        )?,
    })
}

/// One of `allowed` (named `--{what}` in the message).
fn one_of<T: Copy>(
    what: &str,
    v: &Option<String>,
    allowed: &[(&str, T)],
) -> Result<Option<T>, Error> {
    v.as_deref()
        .map(|v| {
            allowed
                .iter()
                .find(|(name, _)| *name == v)
                .map(|(_, x)| *x)
                .ok_or_else(|| {
                    let names: Vec<&str> = allowed.iter().map(|(n, _)| *n).collect();
                    Error::Invalid(format!("--{what} {v:?}: one of {}", names.join(", ")))
                })
        })
        .transpose()
}

/// The field changes of write-field's options.
pub fn field_changes(a: &WriteFieldArgs) -> Result<FieldChanges, Error> {
    Ok(FieldChanges {
        protocol: one_of(
            "protocol",
            &a.protocol,
            &[("link", Protocol::Link), ("modbus", Protocol::Modbus)],
        )?,
        address: a.address,
        baud: a.baud,
        parity: one_of(
            "parity",
            &a.parity,
            &[
                ("none", Parity::None),
                ("even", Parity::Even),
                ("odd", Parity::Odd),
            ],
        )?,
        loop_quantity: one_of(
            "loop-quantity",
            &a.loop_quantity,
            &[
                ("fill", LoopQuantity::FillFraction),
                ("mass", LoopQuantity::Mass),
            ],
        )?,
        loop_lower: a.loop_lower,
        loop_upper: a.loop_upper,
        loop_failure: one_of(
            "loop-failure",
            &a.loop_failure,
            &[("low", Failure::Low), ("high", Failure::High)],
        )?,
    })
}

/// The library's request of the command line's.
pub fn request(r: &Request) -> Result<lib::Request, Error> {
    Ok(match r {
        Request::Ping => lib::Request::Ping,
        Request::Identity => lib::Request::Identity,
        Request::ReadConfig => lib::Request::ReadConfig,
        Request::WriteConfig(a) => lib::Request::WriteConfig {
            setup: setup_request(a)?,
            barometric_pa: a.tank.barometric_given_pa()?,
        },
        Request::WriteField(a) => lib::Request::WriteField(field_changes(a)?),
        Request::ZeroCalibration { channel } => lib::Request::ZeroCalibration(match channel {
            Channel::Pressure => SensorChannel::Pressure,
            Channel::Temperature => SensorChannel::Temperature,
        }),
        Request::ClearAlarms => lib::Request::ClearAlarms,
        Request::Reboot => lib::Request::Reboot,
        Request::LoadGasModel { file } => lib::Request::LoadGasModel {
            file: file.display().to_string(),
            bytes: std::fs::read(file).map_err(|e| Error::InputFile {
                what: Some("--file"),
                path: file.display().to_string(),
                reason: e.to_string(),
            })?,
        },
    })
}

/// Runs the command.
pub fn run(a: &SendArgs) -> Result<String, Error> {
    if !(a.timeout.is_finite() && a.timeout > 0.0) {
        return Err(Error::Invalid(format!(
            "--timeout {}: must be > 0",
            a.timeout
        )));
    }
    let secret = secret(a.secret_file.as_deref())?;
    // Input is checked before any connection is made.
    let request = request(&a.request)?;
    lib::check(&request)?;
    if request.changes_device() && secret.is_none() {
        return Err(Error::NoSecret);
    }
    let source = super::listen::Source {
        port: a.device.port.clone(),
        tcp: a.device.tcp.clone(),
        stdin: false,
    };
    let transport = super::listen::open(&source, a.baud)?;
    let mut client = Client::new(transport, Duration::from_secs_f64(a.timeout));
    if let Some(s) = secret {
        client = client.with_secret(s);
    }
    let report = lib::execute(&mut client, &request)?;
    match a.format {
        // Objects with their keys in name order at every level.
        Format::Json => {
            to_json(&serde_json::to_value(&report.json).map_err(|e| Error::Output(e.to_string()))?)
        }
        Format::Text => Ok(report.text),
    }
}
