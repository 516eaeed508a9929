//! `isochor modbus read|write|identify`: a gauge's Modbus RTU registers,
//! decoded with the register map.

use std::time::Duration;

use clap::{Args, Subcommand, ValueEnum};
use serde_json::json;

use super::{Format, to_json};
use crate::Error;
use crate::link::Transport;
use crate::link::transport::{Serial, Tcp};
use crate::modbus::{RtuClient, Space, holding_address};
use isochor_eos::safety;

/// Where the gauge is (serial port or TCP).
#[derive(Debug, Args)]
#[group(required = true, multiple = false, id = "line")]
pub struct Line {
    /// Serial port of the RS-485 adapter (e.g. /dev/ttyUSB0).
    #[arg(long)]
    pub port: Option<String>,
    /// TCP address of a serial bridge or an emulated gauge (HOST:PORT).
    #[arg(long)]
    pub tcp: Option<String>,
}

/// Parity of the serial port.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum ParityArg {
    /// No parity, two stop bits.
    None,
    /// Even parity (the Modbus default).
    Even,
    /// Odd parity.
    Odd,
}

/// Arguments of `isochor modbus`.
#[derive(Debug, Args)]
pub struct ModbusArgs {
    /// The line.
    #[command(flatten)]
    pub line: Line,
    /// Server address of the gauge (1 … 247).
    #[arg(long, default_value_t = 1)]
    pub address: u8,
    /// Baud rate of the serial port.
    #[arg(long, default_value_t = 19_200)]
    pub baud: u32,
    /// Parity of the serial port.
    #[arg(long, value_enum, default_value_t = ParityArg::Even)]
    pub parity: ParityArg,
    /// Seconds to wait for each reply.
    #[arg(long, default_value_t = 1.0)]
    pub timeout: f64,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
    /// What to do.
    #[command(subcommand)]
    pub action: Action,
}

/// The actions.
#[derive(Debug, Subcommand)]
pub enum Action {
    /// Read the whole register map and print it decoded.
    Read,
    /// Write one holding register (only `alarms_acknowledged` is writable:
    /// acknowledge alarms by their bits).
    Write {
        /// The holding register: its name in the map or its address.
        register: String,
        /// The value (0 … 65535; 0x… for hexadecimal).
        value: String,
    },
    /// Read the device identification (function 43/14).
    Identify,
}

fn open(a: &ModbusArgs) -> Result<Box<dyn Transport>, Error> {
    Ok(match (&a.line.port, &a.line.tcp) {
        (Some(p), _) => {
            let (parity, stop) = match a.parity {
                ParityArg::None => (serialport::Parity::None, serialport::StopBits::Two),
                ParityArg::Even => (serialport::Parity::Even, serialport::StopBits::One),
                ParityArg::Odd => (serialport::Parity::Odd, serialport::StopBits::One),
            };
            Box::new(Serial::open_with(p, a.baud, parity, stop)?)
        }
        (None, Some(t)) => Box::new(Tcp::connect(t)?),
        (None, None) => return Err(Error::Invalid("give --port or --tcp".into())),
    })
}

fn number(s: &str) -> Result<u16, Error> {
    let r = match s.strip_prefix("0x").or_else(|| s.strip_prefix("0X")) {
        Some(h) => u16::from_str_radix(h, 16),
        None => s.parse(),
    };
    r.map_err(|_| Error::Invalid(format!("value {s:?}: 0 … 65535")))
}

/// Runs the command.
pub fn run(a: &ModbusArgs) -> Result<String, Error> {
    if !(a.timeout.is_finite() && a.timeout > 0.0) {
        return Err(Error::Invalid(format!(
            "--timeout {}: must be > 0",
            a.timeout
        )));
    }
    if !(1..=247).contains(&a.address) {
        return Err(Error::Invalid(format!("--address {}: 1 … 247", a.address)));
    }
    // Input is checked before any connection is made.
    let write = match &a.action {
        Action::Write { register, value } => Some((holding_address(register)?, number(value)?)),
        _ => None,
    };
    let mut client = RtuClient::new(open(a)?, a.address, Duration::from_secs_f64(a.timeout));
    let cautions = format!("\n{}\n{}\n", safety::GENERAL, safety::HARDWARE);
    match &a.action {
        Action::Read => {
            let values = client.read_map()?;
            match a.format {
                Format::Json => to_json(&json!({ "address": a.address, "registers": values })),
                Format::Text => {
                    let mut s = format!("gauge at Modbus address {}\n", a.address);
                    for v in &values {
                        let space = match v.row.space {
                            Space::Input => "input",
                            Space::Holding => "holding",
                        };
                        let shown = match v.value {
                            Some(x) => {
                                let digits = match v.row.kind {
                                    crate::modbus::Kind::F32 => 6,
                                    crate::modbus::Kind::I32 => {
                                        usize::from(v.row.scale.unwrap_or(0))
                                    }
                                    _ => 0,
                                };
                                format!("{x:.digits$} {}", v.row.unit)
                            }
                            None => "not known".to_string(),
                        };
                        s += &format!(
                            "{space:<7} {:>3}  {:<26} {}\n",
                            v.row.address, v.row.quantity, shown
                        );
                    }
                    Ok(s + &cautions)
                }
            }
        }
        Action::Write { .. } => {
            let (reg, value) = write.unwrap_or((0, 0));
            client.write(reg, value)?;
            match a.format {
                Format::Json => to_json(&json!({ "written": { "address": reg, "value": value } })),
                Format::Text => Ok(format!("holding register {reg} = {value}\n{cautions}")),
            }
        }
        Action::Identify => {
            let objects = client.identify()?;
            match a.format {
                Format::Json => to_json(&json!({
                    "address": a.address,
                    "objects": objects.iter().map(|(id, s)| json!({ "id": id, "value": s })).collect::<Vec<_>>(),
                })),
                Format::Text => {
                    let names = [
                        "vendor",
                        "product code",
                        "revision",
                        "vendor URL",
                        "product",
                        "model",
                    ];
                    let mut s = String::new();
                    for (id, v) in &objects {
                        let n = names.get(usize::from(*id)).copied().unwrap_or("object");
                        s += &format!("{n:<13} {v}\n");
                    }
                    Ok(s + &cautions)
                }
            }
        }
    }
}
