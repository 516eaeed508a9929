//! `isochor send`: one request or signed command to a device.

use std::time::Duration;

use clap::{Args, Subcommand, ValueEnum};
use isochor_core::auth::Secret;
use isochor_core::link::{Command, Origin, SensorChannel};
use isochor_core::{Setup, SetupFx, Tank, fx};
use serde_json::json;

use super::{Format, to_json};
use crate::Error;
use crate::link::Client;
use isochor_eos::{safety, units};

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
    /// Show the setup stored in the device.
    ReadConfig,
    /// Store a new setup in the device (signed).
    WriteConfig(WriteConfigArgs),
    /// Take the present reading of a sensor as its zero (signed).
    ZeroCalibration {
        /// The sensor channel.
        #[arg(long, value_enum)]
        channel: Channel,
    },
    /// Clear latched alarms (signed).
    ClearAlarms,
    /// Restart the device (signed).
    Reboot,
    /// Load a gas-model blob into the device in chunks (signed).
    LoadGasModel {
        /// The blob file.
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
    /// Water capacity of the tank, with unit (L, mL, m3).
    #[arg(long, allow_hyphen_values = true)]
    pub capacity: String,
    /// Rated (service) pressure, absolute, with unit.
    #[arg(long, allow_hyphen_values = true)]
    pub rated_pressure: String,
    /// Temperature the rated pressure refers to.
    #[arg(long, default_value = "15C", allow_hyphen_values = true)]
    pub rated_temperature: String,
    /// Standard condition for standard volume (iso13443, normal, ntp, 60f, or T,P).
    #[arg(long, default_value = "iso13443", allow_hyphen_values = true)]
    pub standard: String,
    /// Temperature the settled pressure refers to.
    #[arg(long, default_value = "15C", allow_hyphen_values = true)]
    pub reference_temperature: String,
    /// Elastic volume expansion of the vessel per bar.
    #[arg(long, default_value = "0", allow_hyphen_values = true)]
    pub elastic_expansion_per_bar: String,
    /// Volumetric thermal expansion of the vessel per kelvin.
    #[arg(long, default_value = "0", allow_hyphen_values = true)]
    pub thermal_expansion_per_k: String,
}

/// Reads the secret from the file or the environment.
pub fn secret(file: Option<&std::path::Path>) -> Result<Option<Secret>, Error> {
    let text = match file {
        Some(f) => Some(
            std::fs::read_to_string(f)
                .map_err(|e| Error::Invalid(format!("--secret-file {}: {e}", f.display())))?,
        ),
        None => std::env::var(SECRET_ENV).ok(),
    };
    text.map(|t| Secret::from_hex(&t).map_err(|e| Error::Invalid(format!("device secret: {e}"))))
        .transpose()
}

/// Builds the fixed-point setup from the arguments (validated).
pub fn setup(a: &WriteConfigArgs) -> Result<SetupFx, Error> {
    let gas = super::gas::parse(&a.gas)?.gas();
    let tank = Tank {
        water_capacity_m3: units::volume_m3(&a.capacity, "--capacity")?,
        rated_pressure_pa: units::pressure_pa(&a.rated_pressure, "--rated-pressure")?,
        rated_temperature_k: units::temperature_k(&a.rated_temperature, "--rated-temperature")?,
        elastic_expansion_per_mpa: units::number(
            &a.elastic_expansion_per_bar,
            "--elastic-expansion-per-bar",
        )? * 10.0,
        thermal_expansion_per_k: units::number(
            &a.thermal_expansion_per_k,
            "--thermal-expansion-per-k",
        )?,
    };
    let mut s = Setup::new(gas, tank);
    s.standard = super::content::parse_standard(&a.standard)?.1;
    s.settled_reference_k =
        units::temperature_k(&a.reference_temperature, "--reference-temperature")?;
    SetupFx::from_f64(&s).map_err(|e| Error::Invalid(format!("setup: {e}")))
}

fn origin_name(o: Origin) -> &'static str {
    match o {
        Origin::Stored => "stored",
        Origin::Fallback => "fallback",
        Origin::Default => "default",
    }
}

/// The setup as JSON (SI units).
pub fn setup_json(s: &SetupFx) -> serde_json::Value {
    let f: Setup<f64> = s.to_real();
    json!({
        "gas": f.gas.name(),
        "water_capacity_m3": f.tank.water_capacity_m3,
        "rated_pressure_pa": f.tank.rated_pressure_pa,
        "rated_temperature_k": f.tank.rated_temperature_k,
        "elastic_expansion_per_mpa": f.tank.elastic_expansion_per_mpa,
        "thermal_expansion_per_k": f.tank.thermal_expansion_per_k,
        "standard": { "temperature_k": f.standard.temperature_k, "pressure_pa": f.standard.pressure_pa },
        "settled_reference_k": f.settled_reference_k,
    })
}

fn setup_text(s: &SetupFx) -> String {
    let c = |k: fx::Temperature| fx::to_f64(k) - isochor_core::constants::ZERO_CELSIUS_K;
    format!(
        "gas {}\nwater capacity {:.4} L\nrated pressure {:.3} bar (absolute) at {:.2} °C\n\
         elastic expansion {:.3e} per MPa, thermal expansion {:.3e} per K\n\
         standard condition {:.2} °C, {:.3} kPa\nsettled pressure at {:.2} °C\n",
        s.gas.name(),
        fx::to_f64(s.tank.water_capacity_m3) * 1000.0,
        fx::to_f64(s.tank.rated_pressure_pa) / 1e5,
        c(s.tank.rated_temperature_k),
        fx::to_f64(s.tank.elastic_expansion_per_mpa),
        fx::to_f64(s.tank.thermal_expansion_per_k),
        c(s.standard.temperature_k),
        fx::to_f64(s.standard.pressure_pa) / 1e3,
        c(s.settled_reference_k),
    )
}

/// Runs one request with a connected client; returns what to print.
pub fn execute<T: crate::link::Transport>(
    client: &mut Client<T>,
    request: &Request,
    format: Format,
) -> Result<String, Error> {
    let text_done = |what: &str| {
        format!(
            "{what}: done (confirmed by the device)\n{}\n",
            safety::GENERAL
        )
    };
    let (value, text) = match request {
        Request::Ping => {
            let rtt = client.ping(0x15_0C_40)?;
            let ms = rtt.as_secs_f64() * 1e3;
            (
                json!({ "reply": "pong", "round_trip_ms": ms }),
                format!("pong in {ms:.2} ms\n"),
            )
        }
        Request::Identity => {
            let id = client.identity()?;
            let v = json!({
                "serial": id.serial,
                "hardware_rev": id.hardware_rev,
                "firmware_version": format!("{}.{}.{}", id.firmware_version[0], id.firmware_version[1], id.firmware_version[2]),
                "protocol": id.protocol,
                "max_frame_len": id.max_frame_len,
                "capabilities": id.capabilities,
            });
            let t = format!(
                "serial {}\nhardware rev {}\nfirmware {}\nprotocol {}\nmax frame {} bytes\ncapabilities {:#x}\n",
                id.serial,
                id.hardware_rev,
                v["firmware_version"].as_str().unwrap_or(""),
                id.protocol,
                id.max_frame_len,
                id.capabilities
            );
            (v, t)
        }
        Request::ReadConfig => {
            let r = client.read_record::<SetupFx>()?;
            let mut v = setup_json(&r.value);
            v["origin"] = json!(origin_name(r.origin));
            let note = match r.origin {
                Origin::Stored => "",
                Origin::Fallback => {
                    "NOTE: the newest stored copy is damaged; an older copy is in use\n"
                }
                Origin::Default => {
                    "NOTE: nothing stored; safe defaults in use - figures mean nothing for a real tank\n"
                }
            };
            let mut t = format!("{note}{}", setup_text(&r.value));
            t.push_str(&safety::lines(r.value.gas).join("\n"));
            t.push('\n');
            (v, t)
        }
        Request::WriteConfig(a) => {
            let s = setup(a)?;
            client.write_record(&s)?;
            let mut t = setup_text(&s);
            t.push_str(&text_done("write-config"));
            (json!({ "written": setup_json(&s) }), t)
        }
        Request::ZeroCalibration { channel } => {
            let channel = match channel {
                Channel::Pressure => SensorChannel::Pressure,
                Channel::Temperature => SensorChannel::Temperature,
            };
            client.signed(Command::ZeroCalibration { channel })?;
            (
                json!({ "done": "zero-calibration" }),
                text_done("zero-calibration"),
            )
        }
        Request::ClearAlarms => {
            client.signed(Command::ClearAlarms)?;
            (json!({ "done": "clear-alarms" }), text_done("clear-alarms"))
        }
        Request::Reboot => {
            client.signed(Command::Reboot)?;
            (json!({ "done": "reboot" }), text_done("reboot"))
        }
        Request::LoadGasModel { file } => {
            let blob = std::fs::read(file)
                .map_err(|e| Error::Invalid(format!("--file {}: {e}", file.display())))?;
            client.load_gas_model(&blob, &mut |_| {})?;
            let crc = isochor_core::checksum::crc32c(&blob);
            (
                json!({ "done": "load-gas-model", "len": blob.len(), "crc32c": format!("{crc:08x}") }),
                format!(
                    "gas model loaded: {} bytes, CRC-32C {crc:08x}\n{}",
                    blob.len(),
                    text_done("load-gas-model")
                ),
            )
        }
    };
    match format {
        Format::Json => to_json(&value),
        Format::Text => Ok(text),
    }
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
    if let Request::WriteConfig(w) = &a.request {
        setup(w)?;
    }
    let needs_secret = !matches!(
        a.request,
        Request::Ping | Request::Identity | Request::ReadConfig
    );
    if needs_secret && secret.is_none() {
        return Err(Error::Invalid(format!(
            "this command changes the device and must be signed: give the device secret \
             with --secret-file or the {SECRET_ENV} environment variable"
        )));
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
    execute(&mut client, &a.request, a.format)
}
