//! Requests and signed commands to a device (`isochor send`), and their
//! reports.
//!
//! A [`Request`] is in SI units and checked (the command line's parsing is
//! the command's); [`execute`] runs it with a connected [`Client`] and returns
//! a typed [`Report`]: its JSON form (field names are an interface: keep them
//! stable; objects print with their keys in name order) and its text form.
//! The pieces a request is made of — the setup a configuration is written
//! with, the configuration that results, the field settings — are functions
//! here, usable without a device.

use isochor_core::alarm::fixed::LimitsFx;
use isochor_core::field::FieldConfig;
use isochor_core::link::{Command, SensorChannel};
use isochor_core::model::device::TableBuf;
use isochor_core::prepared::GaugeConfig;
use isochor_core::store::Origin;
use isochor_core::{Gas, Setup, SetupFx, StandardCondition, Tank, fx};
use isochor_eos::composition::{Composition, GasSpec};
use isochor_eos::fluid::Fluid;
use isochor_eos::safety;
use serde::Serialize;
use std::collections::BTreeMap;

use crate::Error;
use crate::link::client::DeviceConfig;
use crate::link::{Client, Transport};

/// The setup to store: the gas, the tank, the standard condition and the
/// settled pressure's reference temperature.
#[derive(Clone, Debug)]
pub struct SetupRequest {
    /// The gas or mixture.
    pub gas: GasSpec,
    /// The tank (absolute rated pressure).
    pub tank: Tank,
    /// Standard condition for standard volume.
    pub standard: StandardCondition,
    /// Temperature the settled pressure refers to, K.
    pub settled_reference_k: f64,
}

/// The device's fixed-point setup of `r` (validated).
pub fn setup(r: &SetupRequest) -> Result<SetupFx, Error> {
    let mut s = Setup::new(r.gas.gas(), r.tank);
    s.standard = r.standard;
    s.settled_reference_k = r.settled_reference_k;
    SetupFx::from_f64(&s).map_err(|source| Error::Rejected {
        what: "setup",
        source,
    })
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

/// Changes to the field settings; `None` keeps the stored value.
#[derive(Clone, Copy, Debug, Default)]
pub struct FieldChanges {
    /// Protocol on a board with one UART.
    pub protocol: Option<isochor_core::field::Protocol>,
    /// Modbus address.
    pub address: Option<u8>,
    /// Baud rate of the Modbus line.
    pub baud: Option<u32>,
    /// Parity of the Modbus line.
    pub parity: Option<isochor_core::field::Parity>,
    /// Quantity on the 4–20 mA output.
    pub loop_quantity: Option<isochor_core::field::LoopQuantity>,
    /// Value at 4 mA.
    pub loop_lower: Option<f64>,
    /// Value at 20 mA.
    pub loop_upper: Option<f64>,
    /// Failure current.
    pub loop_failure: Option<isochor_core::field::Failure>,
}

/// The field settings `c` makes of `current` (validated).
pub fn field_settings(c: &FieldChanges, current: FieldConfig) -> Result<FieldConfig, Error> {
    let mut f = current;
    if let Some(p) = c.protocol {
        f.serial.protocol = p;
    }
    if let Some(x) = c.address {
        f.serial.address = x;
    }
    if let Some(b) = c.baud {
        f.serial.baud = b;
    }
    if let Some(p) = c.parity {
        f.serial.parity = p;
    }
    if let Some(q) = c.loop_quantity {
        f.loop_output.quantity = q;
    }
    if let Some(v) = c.loop_lower {
        f.loop_output.lower = crate::error::fixed_option(v, "--loop-lower")?;
    }
    if let Some(v) = c.loop_upper {
        f.loop_output.upper = crate::error::fixed_option(v, "--loop-upper")?;
    }
    if let Some(d) = c.loop_failure {
        f.loop_output.failure = d;
    }
    f.validate()?;
    Ok(f)
}

/// A request to a device.
#[derive(Clone, Debug)]
pub enum Request {
    /// Check that the device answers.
    Ping,
    /// The device's identity and capabilities.
    Identity,
    /// The configuration in force.
    ReadConfig,
    /// Store a new setup (signed).
    WriteConfig {
        /// The setup.
        setup: SetupRequest,
        /// A barometric pressure to store, Pa; `None` keeps the device's.
        barometric_pa: Option<f64>,
    },
    /// Store field settings (signed).
    WriteField(FieldChanges),
    /// Take the present reading of a sensor as its zero (signed).
    ZeroCalibration(SensorChannel),
    /// Clear latched alarms (signed).
    ClearAlarms,
    /// Restart the device (signed).
    Reboot,
    /// Use a gas-model table in the configuration (signed).
    LoadGasModel {
        /// Where the table came from (for messages).
        file: String,
        /// The table's bytes.
        bytes: Vec<u8>,
    },
}

impl Request {
    /// Whether the request changes the device (and must be signed).
    pub fn changes_device(&self) -> bool {
        !matches!(
            self,
            Request::Ping | Request::Identity | Request::ReadConfig
        )
    }
}

/// Checks a request before any connection: the setup and barometric
/// pressure of a configuration are built here as they will be sent.
pub fn check(r: &Request) -> Result<(), Error> {
    if let Request::WriteConfig {
        setup: s,
        barometric_pa,
    } = r
    {
        setup(s)?;
        barometric_fx(*barometric_pa)?;
    }
    Ok(())
}

fn barometric_fx(b: Option<f64>) -> Result<Option<fx::Pressure>, Error> {
    b.map(|b| crate::error::fixed_option(b, "--barometric"))
        .transpose()
}

/// The standard condition in a setup's JSON.
#[derive(Clone, Debug, Serialize)]
pub struct StandardView {
    /// Pressure, Pa.
    pub pressure_pa: f64,
    /// Temperature, K.
    pub temperature_k: f64,
}

/// A setup as JSON (SI units), as stored in the device.
#[derive(Clone, Debug, Serialize)]
pub struct SetupView {
    /// Barometric pressure in the device's configuration, Pa (write-config,
    /// read-config).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub barometric_pa: Option<f64>,
    /// Name → mole fraction.
    pub composition: BTreeMap<String, f64>,
    /// Elastic volume expansion per MPa.
    pub elastic_expansion_per_mpa: f64,
    /// The gas: a pure gas's name or a mixture in the `--gas` form.
    pub gas: String,
    /// Rated pressure (absolute), Pa.
    pub rated_pressure_pa: f64,
    /// Rated temperature, K.
    pub rated_temperature_k: f64,
    /// Settled pressure's reference temperature, K.
    pub settled_reference_k: f64,
    /// Standard condition.
    pub standard: StandardView,
    /// Volumetric thermal expansion per K.
    pub thermal_expansion_per_k: f64,
    /// Water capacity, m³.
    pub water_capacity_m3: f64,
}

impl SetupView {
    /// The view of a fixed-point setup of gas `spec`.
    pub fn new(s: &SetupFx, spec: &GasSpec) -> SetupView {
        let f: Setup<f64> = s.to_real();
        SetupView {
            barometric_pa: None,
            composition: crate::cli::gas::composition_map(spec),
            elastic_expansion_per_mpa: f.tank.elastic_expansion_per_mpa,
            gas: crate::cli::gas::gas_field(spec),
            rated_pressure_pa: f.tank.rated_pressure_pa,
            rated_temperature_k: f.tank.rated_temperature_k,
            settled_reference_k: f.settled_reference_k,
            standard: StandardView {
                pressure_pa: f.standard.pressure_pa,
                temperature_k: f.standard.temperature_k,
            },
            thermal_expansion_per_k: f.tank.thermal_expansion_per_k,
            water_capacity_m3: f.tank.water_capacity_m3,
        }
    }
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

/// The reply to `ping`.
#[derive(Clone, Debug, Serialize)]
pub struct PingReport {
    /// Always `pong`.
    pub reply: &'static str,
    /// Round-trip time, ms.
    pub round_trip_ms: f64,
}

/// The device's identity.
#[derive(Clone, Debug, Serialize)]
pub struct IdentityReport {
    /// Capability bits.
    pub capabilities: u32,
    /// Firmware version, `MAJOR.MINOR.PATCH`.
    pub firmware_version: String,
    /// Hardware revision.
    pub hardware_rev: u16,
    /// Largest frame, bytes.
    pub max_frame_len: u16,
    /// Protocol version.
    pub protocol: u8,
    /// Serial number.
    pub serial: u64,
}

/// The configuration in force.
#[derive(Clone, Debug, Serialize)]
pub struct ConfigReport {
    /// Configuration length, bytes.
    pub config_len: usize,
    /// Its CRC-32C, hex.
    pub crc32c: String,
    /// `loaded` or `built-in`, when the device holds a configuration.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub gas_model: Option<&'static str>,
    /// Where the device took it from: stored, fallback, default.
    pub origin: &'static str,
    /// The setup, `null` when the device holds no configuration.
    #[serde(flatten)]
    pub setup: Option<SetupView>,
    /// Pressure zero offset, Pa.
    pub zero_pressure_pa: f64,
    /// Temperature zero offset, K.
    pub zero_temperature_k: f64,
}

/// The field settings written.
#[derive(Clone, Debug, Serialize)]
pub struct FieldView {
    /// Modbus address.
    pub address: u8,
    /// Baud rate.
    pub baud: u32,
    /// Failure current direction.
    pub loop_failure: String,
    /// Value at 4 mA.
    pub loop_lower: f64,
    /// Quantity on the loop.
    pub loop_quantity: String,
    /// Value at 20 mA.
    pub loop_upper: f64,
    /// Parity.
    pub parity: String,
    /// Protocol.
    pub protocol: String,
}

/// What a request reports, in JSON.
#[derive(Clone, Debug, Serialize)]
#[serde(untagged)]
pub enum ReportJson {
    /// `ping`.
    Ping(PingReport),
    /// `identity`.
    Identity(IdentityReport),
    /// `read-config` with a configuration.
    Config(ConfigReport),
    /// `read-config` without one (`setup: null`).
    NoConfig {
        /// The report's other fields.
        #[serde(flatten)]
        head: ConfigReport,
        /// Always `null`.
        setup: (),
    },
    /// `write-config`.
    WrittenSetup {
        /// The setup written.
        written: SetupView,
    },
    /// `write-field`.
    WrittenField {
        /// The field settings written.
        written: FieldView,
    },
    /// `load-gas-model`.
    Loaded {
        /// Configuration length sent, bytes.
        config_len: usize,
        /// Always `load-gas-model`.
        done: &'static str,
        /// The table's length, bytes.
        table_len: usize,
    },
    /// A signed command confirmed.
    Done {
        /// The command.
        done: &'static str,
    },
}

/// A request's report: its JSON and text forms.
#[derive(Clone, Debug)]
pub struct Report {
    /// The JSON form.
    pub json: ReportJson,
    /// The text form.
    pub text: String,
}

fn done_text(what: &str) -> String {
    format!(
        "{what}: done (confirmed by the device)\n{}\n{}\n",
        safety::GENERAL,
        safety::HARDWARE
    )
}

/// What the device's configuration reads back as.
fn config_report(d: &DeviceConfig) -> Result<Report, Error> {
    let (zp, zt) = d.zero.to_f64();
    let mut head = ConfigReport {
        config_len: d.blob.len(),
        crc32c: format!("{:08x}", d.crc),
        gas_model: None,
        origin: d.origin.name(),
        setup: None,
        zero_pressure_pa: zp,
        zero_temperature_k: zt,
    };
    let zero_line = format!(
        "zero offsets: pressure {:+.1} Pa, temperature {:+.3} K\n",
        zp, zt
    );
    let note = match d.origin {
        Origin::Stored | Origin::Default => "",
        Origin::Fallback => "NOTE: the newest stored copy is damaged; an older copy is in use\n",
    };
    let Some(cfg) = d.config()? else {
        return Ok(Report {
            json: ReportJson::NoConfig { head, setup: () },
            text: format!(
                "{note}NO CONFIGURATION: the device reports config_unusable and shows no \
                 content; store one with `isochor send write-config`\n{zero_line}"
            ),
        });
    };
    let spec = config_gas(&cfg);
    let gas_model = if cfg.model.is_some() {
        "loaded"
    } else {
        "built-in"
    };
    let mut setup = SetupView::new(&cfg.setup, &spec);
    setup.barometric_pa = Some(fx::to_f64(cfg.barometric_pa));
    head.gas_model = Some(gas_model);
    head.setup = Some(setup);
    let mut t = format!(
        "{note}{}gas model {gas_model}\nbarometric pressure {:.1} hPa\n{zero_line}configuration {} bytes, CRC-32C {:08x}\n",
        setup_text(&cfg.setup, &spec),
        fx::to_f64(cfg.barometric_pa) / 100.0,
        d.blob.len(),
        d.crc
    );
    t.push_str(&safety::lines_for(&spec).join("\n"));
    t.push('\n');
    Ok(Report {
        json: ReportJson::Config(head),
        text: t,
    })
}

/// A table's gas in a message: a pure gas's name, or a mixture's
/// fingerprint (a table does not carry the composition).
fn describe_gas(g: Gas) -> String {
    match g.mixture() {
        Some(m) => format!("a mixture (fingerprint {:08x})", m.fingerprint),
        None => g.name().to_string(),
    }
}

/// Runs one request with a connected client.
pub fn execute<T: Transport>(client: &mut Client<T>, request: &Request) -> Result<Report, Error> {
    Ok(match request {
        Request::Ping => {
            let rtt = client.ping(0x15_0C_40)?;
            let ms = rtt.as_secs_f64() * 1e3;
            Report {
                json: ReportJson::Ping(PingReport {
                    reply: "pong",
                    round_trip_ms: ms,
                }),
                text: format!("pong in {ms:.2} ms\n"),
            }
        }
        Request::Identity => {
            let id = client.identity()?;
            let v = id.firmware_version;
            let firmware_version = format!("{}.{}.{}", v[0], v[1], v[2]);
            let text = format!(
                "serial {}\nhardware rev {}\nfirmware {firmware_version}\nprotocol {}\nmax frame {} bytes\ncapabilities {:#x}\n",
                id.serial, id.hardware_rev, id.protocol, id.max_frame_len, id.capabilities
            );
            Report {
                json: ReportJson::Identity(IdentityReport {
                    capabilities: id.capabilities,
                    firmware_version,
                    hardware_rev: id.hardware_rev,
                    max_frame_len: id.max_frame_len,
                    protocol: id.protocol,
                    serial: id.serial,
                }),
                text,
            }
        }
        Request::ReadConfig => config_report(&client.read_config()?)?,
        Request::WriteConfig {
            setup: req,
            barometric_pa,
        } => {
            let s = setup(req)?;
            let barometric = barometric_fx(*barometric_pa)?;
            let current = client.read_config()?.config()?;
            let config = with_mixture(with_setup(current, s, barometric), &req.gas)?;
            client.configure(&config, &mut |_, _| {})?;
            let b = fx::to_f64(config.barometric_pa);
            let mut text = setup_text(&s, &req.gas);
            text.push_str(&format!(
                "barometric pressure {:.1} hPa ({})\n",
                b / 100.0,
                if barometric.is_some() {
                    "written"
                } else {
                    "kept"
                }
            ));
            text.push_str(&done_text("write-config"));
            let mut written = SetupView::new(&s, &req.gas);
            written.barometric_pa = Some(b);
            Report {
                json: ReportJson::WrittenSetup { written },
                text,
            }
        }
        Request::WriteField(changes) => {
            let Some(mut config) = client.read_config()?.config()? else {
                return Err(Error::NoConfiguration);
            };
            config.field = field_settings(changes, config.field)?;
            client.configure(&config, &mut |_, _| {})?;
            let s = &config.field.serial;
            let l = &config.field.loop_output;
            let text = format!(
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
                done_text("write-field")
            );
            Report {
                json: ReportJson::WrittenField {
                    written: FieldView {
                        address: s.address,
                        baud: s.baud,
                        loop_failure: format!("{:?}", l.failure).to_lowercase(),
                        loop_lower: fx::to_f64(l.lower),
                        loop_quantity: format!("{:?}", l.quantity).to_lowercase(),
                        loop_upper: fx::to_f64(l.upper),
                        parity: format!("{:?}", s.parity).to_lowercase(),
                        protocol: format!("{:?}", s.protocol).to_lowercase(),
                    },
                },
                text,
            }
        }
        Request::ZeroCalibration(channel) => {
            client.signed(Command::ZeroCalibration { channel: *channel })?;
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
            Report {
                json: ReportJson::Done {
                    done: "zero-calibration",
                },
                text: format!("{note}{}", done_text("zero-calibration")),
            }
        }
        Request::ClearAlarms => {
            client.signed(Command::ClearAlarms)?;
            Report {
                json: ReportJson::Done {
                    done: "clear-alarms",
                },
                text: done_text("clear-alarms"),
            }
        }
        Request::Reboot => {
            client.signed(Command::Reboot)?;
            Report {
                json: ReportJson::Done { done: "reboot" },
                text: done_text("reboot"),
            }
        }
        Request::LoadGasModel { file, bytes } => {
            let table = TableBuf::from_blob(bytes)
                .map_err(|e| Error::Invalid(format!("--file {file}: {e}")))?;
            let Some(mut config) = client.read_config()?.config()? else {
                return Err(Error::NoConfiguration);
            };
            if table.gas != config.setup.gas {
                return Err(Error::Invalid(format!(
                    "--file {file}: a table of {}, but the device is set up for {}",
                    describe_gas(table.gas),
                    config_gas(&config)
                )));
            }
            config.model = Some(table);
            let mut sent = 0;
            client.configure(&config, &mut |n, _| sent = n)?;
            Report {
                json: ReportJson::Loaded {
                    config_len: sent,
                    done: "load-gas-model",
                    table_len: bytes.len(),
                },
                text: format!(
                    "gas model loaded: table {} bytes, configuration {sent} bytes\n{}",
                    bytes.len(),
                    done_text("load-gas-model")
                ),
            }
        }
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use isochor_core::constants::STANDARD_ATMOSPHERE_PA;

    fn request(rated_pressure_pa: f64) -> SetupRequest {
        SetupRequest {
            gas: GasSpec::Pure(Gas::Nitrogen),
            tank: Tank {
                water_capacity_m3: 0.05,
                rated_pressure_pa,
                rated_temperature_k: 288.15,
                elastic_expansion_per_mpa: 0.0,
                thermal_expansion_per_k: 0.0,
            },
            standard: StandardCondition::ISO_13443,
            settled_reference_k: 288.15,
        }
    }

    #[test]
    fn a_written_setup_keeps_or_replaces_the_barometric_pressure() {
        let s = setup(&request(200e5)).unwrap();
        let mut current = GaugeConfig::nominal(s);
        current.barometric_pa =
            fx::from_f64(90e3, isochor_core::SensorSetting::BarometricPressure).unwrap();
        let kept = with_setup(Some(current.clone()), s, None);
        assert_eq!(fx::to_f64(kept.barometric_pa), 90e3);
        let written = with_setup(
            Some(current),
            s,
            Some(fx::from_f64(95e3, isochor_core::SensorSetting::BarometricPressure).unwrap()),
        );
        assert_eq!(fx::to_f64(written.barometric_pa), 95e3);
        // A device without a configuration gets the nominal one: the
        // standard atmosphere (101 325 Pa by definition) unless given.
        let fresh = with_setup(None, s, None);
        assert_eq!(fx::to_f64(fresh.barometric_pa), STANDARD_ATMOSPHERE_PA);
        assert_eq!(fresh.track.limits, LimitsFx::for_tank(&s.tank));
    }

    #[test]
    fn requests_are_checked_before_any_connection() {
        let bad = Request::WriteConfig {
            setup: request(-1.0),
            barometric_pa: None,
        };
        assert!(check(&bad).is_err());
        let good = Request::WriteConfig {
            setup: request(200e5),
            barometric_pa: Some(95e3),
        };
        check(&good).unwrap();
        assert!(good.changes_device());
        assert!(!Request::ReadConfig.changes_device());
    }

    #[test]
    fn field_changes_apply_over_the_stored_settings() {
        use isochor_core::field::Parity;
        let current = FieldConfig::default();
        let f = field_settings(
            &FieldChanges {
                address: Some(7),
                parity: Some(Parity::Even),
                ..FieldChanges::default()
            },
            current,
        )
        .unwrap();
        assert_eq!(f.serial.address, 7);
        assert_eq!(f.serial.parity, Parity::Even);
        assert_eq!(f.serial.protocol, current.serial.protocol);
        assert_eq!(f.loop_output, current.loop_output);
        let none = field_settings(&FieldChanges::default(), current).unwrap();
        assert_eq!(none, current);
    }
}
