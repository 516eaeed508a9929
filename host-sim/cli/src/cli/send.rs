//! `isochor send`: one request or signed command to a device.

use std::time::Duration;

use clap::{Args, Subcommand, ValueEnum};
use isochor_core::alarm::fixed::LimitsFx;
use isochor_core::auth::Secret;
use isochor_core::link::{Command, SensorChannel};
use isochor_core::model::device::TableBuf;
use isochor_core::prepared::GaugeConfig;
use isochor_core::store::Origin;
use isochor_core::{Gas, Setup, SetupFx, fx};
use isochor_eos::composition::{Composition, GasSpec};
use isochor_eos::fluid::Fluid;
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

/// The field settings of `a` over `current`.
pub fn field_settings(
    a: &WriteFieldArgs,
    current: isochor_core::field::FieldConfig,
) -> Result<isochor_core::field::FieldConfig, Error> {
    use isochor_core::field::{Failure, LoopQuantity, Parity, Protocol};
    let bad = |what: &str, v: &str, allowed: &str| {
        Error::Invalid(format!("--{what} {v:?}: one of {allowed}"))
    };
    let mut f = current;
    if let Some(p) = &a.protocol {
        f.serial.protocol = match p.as_str() {
            "link" => Protocol::Link,
            "modbus" => Protocol::Modbus,
            _ => return Err(bad("protocol", p, "link, modbus")),
        };
    }
    if let Some(x) = a.address {
        f.serial.address = x;
    }
    if let Some(b) = a.baud {
        f.serial.baud = b;
    }
    if let Some(p) = &a.parity {
        f.serial.parity = match p.as_str() {
            "none" => Parity::None,
            "even" => Parity::Even,
            "odd" => Parity::Odd,
            _ => return Err(bad("parity", p, "none, even, odd")),
        };
    }
    if let Some(q) = &a.loop_quantity {
        f.loop_output.quantity = match q.as_str() {
            "fill" => LoopQuantity::FillFraction,
            "mass" => LoopQuantity::Mass,
            _ => return Err(bad("loop-quantity", q, "fill, mass")),
        };
    }
    if let Some(v) = a.loop_lower {
        f.loop_output.lower = fx::from_f64(v, "--loop-lower")?;
    }
    if let Some(v) = a.loop_upper {
        f.loop_output.upper = fx::from_f64(v, "--loop-upper")?;
    }
    if let Some(d) = &a.loop_failure {
        f.loop_output.failure = match d.as_str() {
            "low" => Failure::Low,
            "high" => Failure::High,
            _ => return Err(bad("loop-failure", d, "low, high")),
        };
    }
    f.validate()?;
    Ok(f)
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
    /// tank.
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
    let tank = a.tank.tank()?;
    let mut s = Setup::new(gas, tank);
    s.standard = super::content::parse_standard(&a.standard)?.1;
    s.settled_reference_k =
        units::temperature_k(&a.reference_temperature, "--reference-temperature")?;
    SetupFx::from_f64(&s).map_err(|e| Error::Invalid(format!("setup: {e}")))
}

/// `--barometric` of write-config as the device stores it, when given.
pub fn barometric_fx(t: &super::tank::TankArgs) -> Result<Option<fx::Pressure>, Error> {
    t.barometric_given_pa()?
        .map(|b| Ok(fx::from_f64(b, "--barometric")?))
        .transpose()
}

/// The device's configuration with `setup` in place of its own: sensors,
/// tracking settings and plausibility checks kept, the barometric pressure
/// `barometric_pa` when given (else kept), the alarm limits those of the new
/// tank, a loaded gas model kept only for the same gas. A device without a
/// configuration gets the nominal one.
pub fn with_setup(
    current: Option<GaugeConfig>,
    setup: SetupFx,
    barometric_pa: Option<fx::Pressure>,
) -> GaugeConfig {
    let mut c = match current {
        None => GaugeConfig::nominal(setup),
        Some(mut c) => {
            if c.setup.gas != setup.gas {
                c.model = None;
            }
            c.setup = setup;
            c.track.limits = LimitsFx::for_tank(&setup.tank);
            c
        }
    };
    if let Some(b) = barometric_pa {
        c.barometric_pa = b;
    }
    c
}

/// A configuration of a mixture carries its composition and a table built
/// for it (kept from the configuration when it is of the same mixture, else
/// from the table cache or built: `isochor content --model device` shares
/// it); a pure gas carries no composition.
pub fn with_mixture(mut c: GaugeConfig, spec: &GasSpec) -> Result<GaugeConfig, Error> {
    c.composition = spec.core_composition();
    if let GasSpec::Mixture(_) = spec
        && c.model.as_ref().map(|t| t.gas) != Some(c.setup.gas)
    {
        c.model = Some(crate::model_cache::table_for(&Fluid::of(spec))?.0);
    }
    Ok(c)
}

/// The gas of a configuration read back: a mixture's composition when it
/// carries one, else the setup's gas.
pub fn config_gas(c: &GaugeConfig) -> GasSpec {
    c.composition
        .as_ref()
        .and_then(|k| Composition::from_core(k).ok())
        .map_or(GasSpec::Pure(c.setup.gas), GasSpec::from_composition)
}

/// What the device's configuration reads back as, for text and JSON.
fn config_view(
    d: &crate::link::client::DeviceConfig,
) -> Result<(serde_json::Value, String), Error> {
    let (zp, zt) = d.zero.to_f64();
    let head = json!({
        "origin": d.origin.name(),
        "config_len": d.blob.len(),
        "crc32c": format!("{:08x}", d.crc),
        "zero_pressure_pa": zp,
        "zero_temperature_k": zt,
    });
    let zero_line = format!(
        "zero offsets: pressure {:+.1} Pa, temperature {:+.3} K\n",
        zp, zt
    );
    let note = match d.origin {
        Origin::Stored => "",
        Origin::Fallback => "NOTE: the newest stored copy is damaged; an older copy is in use\n",
        Origin::Default => "",
    };
    let Some(cfg) = d.config()? else {
        let mut v = head;
        v["setup"] = serde_json::Value::Null;
        return Ok((
            v,
            format!(
                "{note}NO CONFIGURATION: the device reports config_unusable and shows no \
                 content; store one with `isochor send write-config`\n{zero_line}"
            ),
        ));
    };
    let spec = config_gas(&cfg);
    let mut v = setup_json(&cfg.setup, &spec);
    for (k, x) in head.as_object().into_iter().flatten() {
        v[k] = x.clone();
    }
    v["gas_model"] = json!(if cfg.model.is_some() {
        "loaded"
    } else {
        "built-in"
    });
    v["barometric_pa"] = json!(fx::to_f64(cfg.barometric_pa));
    let mut t = format!(
        "{note}{}gas model {}\nbarometric pressure {:.1} hPa\n{zero_line}configuration {} bytes, CRC-32C {:08x}\n",
        setup_text(&cfg.setup, &spec),
        if cfg.model.is_some() {
            "loaded"
        } else {
            "built-in"
        },
        fx::to_f64(cfg.barometric_pa) / 100.0,
        d.blob.len(),
        d.crc
    );
    t.push_str(&safety::lines_for(&spec).join("\n"));
    t.push('\n');
    Ok((v, t))
}

/// The setup as JSON (SI units).
pub fn setup_json(s: &SetupFx, spec: &GasSpec) -> serde_json::Value {
    let f: Setup<f64> = s.to_real();
    json!({
        "gas": super::gas::gas_field(spec),
        "composition": super::gas::composition_map(spec),
        "water_capacity_m3": f.tank.water_capacity_m3,
        "rated_pressure_pa": f.tank.rated_pressure_pa,
        "rated_temperature_k": f.tank.rated_temperature_k,
        "elastic_expansion_per_mpa": f.tank.elastic_expansion_per_mpa,
        "thermal_expansion_per_k": f.tank.thermal_expansion_per_k,
        "standard": { "temperature_k": f.standard.temperature_k, "pressure_pa": f.standard.pressure_pa },
        "settled_reference_k": f.settled_reference_k,
    })
}

fn setup_text(s: &SetupFx, spec: &GasSpec) -> String {
    let c = |k: fx::Temperature| fx::to_f64(k) - isochor_core::constants::ZERO_CELSIUS_K;
    format!(
        "gas {}\nwater capacity {:.4} L\nrated pressure {:.3} bar (absolute) at {:.2} °C\n\
         elastic expansion {:.3e} per MPa, thermal expansion {:.3e} per K\n\
         standard condition {:.2} °C, {:.3} kPa\nsettled pressure at {:.2} °C\n",
        spec,
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
            "{what}: done (confirmed by the device)\n{}\n{}\n",
            safety::GENERAL,
            safety::HARDWARE
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
        Request::ReadConfig => config_view(&client.read_config()?)?,
        Request::WriteConfig(a) => {
            let spec = super::gas::parse(&a.gas)?;
            let s = setup(a)?;
            let current = client.read_config()?.config()?;
            let barometric = barometric_fx(&a.tank)?;
            let config = with_mixture(with_setup(current, s, barometric), &spec)?;
            client.configure(&config, &mut |_, _| {})?;
            let b = fx::to_f64(config.barometric_pa);
            let mut t = setup_text(&s, &spec);
            t.push_str(&format!(
                "barometric pressure {:.1} hPa ({})\n",
                b / 100.0,
                if barometric.is_some() {
                    "written"
                } else {
                    "kept"
                }
            ));
            t.push_str(&text_done("write-config"));
            let mut v = setup_json(&s, &spec);
            v["barometric_pa"] = json!(b);
            (json!({ "written": v }), t)
        }
        Request::WriteField(a) => {
            let Some(mut config) = client.read_config()?.config()? else {
                return Err(Error::Invalid(
                    "the device holds no configuration: store one with write-config first".into(),
                ));
            };
            config.field = field_settings(a, config.field)?;
            client.configure(&config, &mut |_, _| {})?;
            let s = &config.field.serial;
            let l = &config.field.loop_output;
            let t = format!(
                "field settings: protocol {:?}, Modbus address {}, {} Bd, parity {:?}; \
                 loop {:?} {} → 4 mA, {} → 20 mA, failure {:?}\n{}",
                s.protocol,
                s.address,
                s.baud,
                s.parity,
                l.quantity,
                fx::to_f64(l.lower),
                fx::to_f64(l.upper),
                l.failure,
                text_done("write-field")
            );
            (
                json!({ "written": {
                    "protocol": format!("{:?}", s.protocol).to_lowercase(),
                    "address": s.address,
                    "baud": s.baud,
                    "parity": format!("{:?}", s.parity).to_lowercase(),
                    "loop_quantity": format!("{:?}", l.quantity).to_lowercase(),
                    "loop_lower": fx::to_f64(l.lower),
                    "loop_upper": fx::to_f64(l.upper),
                    "loop_failure": format!("{:?}", l.failure).to_lowercase(),
                } }),
                t,
            )
        }
        Request::ZeroCalibration { channel } => {
            let channel = match channel {
                Channel::Pressure => SensorChannel::Pressure,
                Channel::Temperature => SensorChannel::Temperature,
            };
            client.signed(Command::ZeroCalibration { channel })?;
            let note = match channel {
                SensorChannel::Pressure => {
                    "The transducer's present reading is now the barometric pressure. Reconnect \
                     it and compare with a calibrated gauge before relying on its readings.\n"
                }
                SensorChannel::Temperature => {
                    "The sensor's present reading is now 0 °C. Refit it to the vessel and let it \
                     settle before relying on its readings.\n"
                }
            };
            (
                json!({ "done": "zero-calibration" }),
                format!("{note}{}", text_done("zero-calibration")),
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
            let bytes = std::fs::read(file)
                .map_err(|e| Error::Invalid(format!("--file {}: {e}", file.display())))?;
            let table = TableBuf::from_blob(&bytes)
                .map_err(|e| Error::Invalid(format!("--file {}: {e}", file.display())))?;
            let Some(mut config) = client.read_config()?.config()? else {
                return Err(Error::Invalid(
                    "the device holds no configuration: store one with write-config first".into(),
                ));
            };
            if table.gas != config.setup.gas {
                return Err(Error::Invalid(format!(
                    "--file {}: a table of {}, but the device is set up for {}",
                    file.display(),
                    describe_gas(table.gas),
                    config_gas(&config)
                )));
            }
            config.model = Some(table);
            let mut sent = 0;
            client.configure(&config, &mut |n, _| sent = n)?;
            (
                json!({ "done": "load-gas-model", "table_len": bytes.len(), "config_len": sent }),
                format!(
                    "gas model loaded: table {} bytes, configuration {sent} bytes\n{}",
                    bytes.len(),
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
        barometric_fx(&w.tank)?;
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

/// A table's gas in a message: a pure gas's name, or a mixture's
/// fingerprint (a table does not carry the composition).
fn describe_gas(g: Gas) -> String {
    match g.mixture() {
        Some(m) => format!("a mixture (fingerprint {:08x})", m.fingerprint),
        None => g.name().to_string(),
    }
}
