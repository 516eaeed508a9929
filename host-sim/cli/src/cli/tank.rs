//! The tank's arguments, one group for every command that takes a tank
//! (`isochor content`, `isochor send write-config`), with one rule for gauge
//! and absolute pressures.
//!
//! The rule: a pressure in `bara`/`psia` is absolute; in `barg`/`psig` it is a
//! gauge pressure and the barometric pressure is added; in a plain unit (`bar`,
//! `psi`, `Pa`, …) it is absolute, or gauge with `--gauge`. The barometric
//! pressure is `--barometric` when given, else the standard atmosphere
//! (101.325 kPa). The working pressure marked on a cylinder is a gauge
//! pressure: give it as `200barg` (or `200bar --gauge`).

use clap::Args;
use isochor_core::Tank;
use isochor_core::constants::STANDARD_ATMOSPHERE_PA;
use isochor_core::sensor::gauge::{BAROMETRIC_MAX_PA, BAROMETRIC_MIN_PA};
use isochor_eos::units;

use crate::Error;

/// The tank: capacity, rating, expansion, and how its pressures read.
#[derive(Debug, Args)]
pub struct TankArgs {
    /// Water capacity of the tank, with unit (L, mL, m3).
    #[arg(long, allow_hyphen_values = true)]
    pub capacity: String,
    /// Rated (service) pressure of the tank, with unit: bara/psia absolute,
    /// barg/psig gauge (the barometric pressure is added), a plain unit
    /// (bar, psi, Pa, kPa, MPa) absolute unless --gauge. The working pressure
    /// marked on a cylinder is a gauge pressure: give it as e.g. 200barg or
    /// 2015psig (or use --gauge).
    #[arg(long, allow_hyphen_values = true)]
    pub rated_pressure: String,
    /// Temperature the rated pressure refers to. 15 °C in ISO practice; some
    /// markings (US practice) refer to 70 °F (21.1 °C): give 70F then, or the
    /// rated content comes out about 2 % too high.
    #[arg(long, default_value = "15C", allow_hyphen_values = true)]
    pub rated_temperature: String,
    /// Elastic volume expansion of the vessel per bar of pressure (e.g.
    /// 1.2e-5); reported in JSON both per bar (`elastic_expansion_per_bar`,
    /// where the command reports it) and per MPa (`elastic_expansion_per_mpa`,
    /// ten times larger).
    #[arg(long, default_value = "0", allow_hyphen_values = true)]
    pub elastic_expansion_per_bar: String,
    /// Volumetric thermal expansion of the vessel per kelvin (e.g. 3.6e-5).
    #[arg(long, default_value = "0", allow_hyphen_values = true)]
    pub thermal_expansion_per_k: String,
    /// Pressures with a plain unit (bar, psi, ...) are gauge pressures: the
    /// barometric pressure is added. bara/psia stay absolute and barg/psig
    /// gauge whatever --gauge says.
    #[arg(long)]
    pub gauge: bool,
    /// Barometric pressure added to gauge pressures (barg, psig, or plain
    /// units with --gauge), 50-110 kPa; the standard atmosphere (101.325 kPa)
    /// when not given. `send write-config` also stores it in the device (for
    /// its gauge-type transducers); without it the device keeps its own.
    #[arg(long, allow_hyphen_values = true)]
    pub barometric: Option<String>,
}

impl TankArgs {
    /// `--barometric` as given (checked to be a barometric pressure), or
    /// `None`.
    pub fn barometric_given_pa(&self) -> Result<Option<f64>, Error> {
        self.barometric
            .as_deref()
            .map(|b| {
                let pa = units::pressure_pa(b, "--barometric")?;
                if !(BAROMETRIC_MIN_PA..=BAROMETRIC_MAX_PA).contains(&pa) {
                    return Err(Error::Invalid(format!(
                        "--barometric {b}: outside 50-110 kPa, not a barometric pressure"
                    )));
                }
                Ok(pa)
            })
            .transpose()
    }

    /// The barometric pressure added to gauge pressures: `--barometric`, or
    /// the standard atmosphere.
    pub fn barometric_pa(&self) -> Result<f64, Error> {
        Ok(self
            .barometric_given_pa()?
            .unwrap_or(STANDARD_ATMOSPHERE_PA))
    }

    /// A pressure option read by the group's rule, as an absolute pressure
    /// in Pa (not checked for sign).
    pub fn absolute_pa(&self, input: &str, what: &'static str) -> Result<f64, Error> {
        Ok(units::absolute_pa(
            input,
            what,
            self.gauge,
            self.barometric_pa()?,
        )?)
    }

    /// The tank (validated).
    pub fn tank(&self) -> Result<Tank, Error> {
        let tank = Tank {
            water_capacity_m3: units::volume_m3(&self.capacity, "--capacity")?,
            rated_pressure_pa: self.absolute_pa(&self.rated_pressure, "--rated-pressure")?,
            rated_temperature_k: units::temperature_k(
                &self.rated_temperature,
                "--rated-temperature",
            )?,
            elastic_expansion_per_mpa: units::number(
                &self.elastic_expansion_per_bar,
                "--elastic-expansion-per-bar",
            )? * 10.0,
            thermal_expansion_per_k: units::number(
                &self.thermal_expansion_per_k,
                "--thermal-expansion-per-k",
            )?,
        };
        tank.validate().map_err(|source| Error::Rejected {
            what: "tank",
            source,
        })?;
        Ok(tank)
    }
}

#[cfg(test)]
mod tests {
    use super::super::{Cli, Command, send};
    use clap::Parser;
    use isochor_core::fx;

    /// 1 psi = 6894.757 293 168 Pa, exact by the definitions of the pound,
    /// standard gravity and the inch (NIST SP 811); the standard atmosphere
    /// is 101 325 Pa by definition.
    const PSI: f64 = 6_894.757_293_168;
    const ATM: f64 = 101_325.0;

    /// The rated pressure `content` and `send write-config` make of the same
    /// tank options, in Pa (write-config's in the device's fixed point).
    fn rated(tank: &[&str]) -> (f64, f64) {
        let mut c = vec![
            "isochor",
            "content",
            "--gas",
            "nitrogen",
            "--pressure",
            "150bara",
            "--temperature",
            "20C",
        ];
        c.extend_from_slice(tank);
        let Command::Content(a) = Cli::try_parse_from(c).unwrap().command else {
            unreachable!("parsed as content")
        };
        let content = super::super::content::request(&a)
            .unwrap()
            .tank
            .rated_pressure_pa;
        let mut w = vec![
            "isochor",
            "send",
            "--tcp",
            "127.0.0.1:1",
            "write-config",
            "--gas",
            "nitrogen",
        ];
        w.extend_from_slice(tank);
        let Command::Send(s) = Cli::try_parse_from(w).unwrap().command else {
            unreachable!("parsed as send")
        };
        let send::Request::WriteConfig(wc) = &s.request else {
            unreachable!("parsed as write-config")
        };
        let setup = crate::send::setup(&send::setup_request(wc).unwrap()).unwrap();
        let device = fx::to_f64(setup.tank.rated_pressure_pa);
        (content, device)
    }

    #[test]
    fn both_commands_read_the_rated_pressure_alike() {
        let cases: [(&[&str], f64); 7] = [
            // Plain units are absolute unless --gauge.
            (&["--capacity", "50L", "--rated-pressure", "200bar"], 200e5),
            (&["--capacity", "50L", "--rated-pressure", "200bara"], 200e5),
            // barg adds the standard atmosphere when --barometric is not given.
            (
                &["--capacity", "50L", "--rated-pressure", "200barg"],
                200e5 + ATM,
            ),
            (
                &["--capacity", "50L", "--rated-pressure", "200bar", "--gauge"],
                200e5 + ATM,
            ),
            // bara stays absolute with --gauge.
            (
                &[
                    "--capacity",
                    "50L",
                    "--rated-pressure",
                    "200bara",
                    "--gauge",
                ],
                200e5,
            ),
            // --barometric is what a gauge pressure is added to.
            (
                &[
                    "--capacity",
                    "50L",
                    "--rated-pressure",
                    "200barg",
                    "--barometric",
                    "95kPa",
                ],
                200e5 + 95e3,
            ),
            (
                &[
                    "--capacity",
                    "0.68m3",
                    "--rated-pressure",
                    "2015psi",
                    "--gauge",
                    "--barometric",
                    "1000mbar",
                    "--rated-temperature",
                    "70F",
                ],
                2015.0 * PSI + 1e5,
            ),
        ];
        for (tank, expected) in cases {
            let (content, device) = rated(tank);
            assert!(
                (content - expected).abs() <= 1e-9 * expected,
                "{tank:?}: content {content}, expected {expected}"
            );
            // The device holds pressures in sixteenths of a pascal
            // (`fx::Pressure`, U28F4); 1 Pa bounds its rounding.
            assert!(
                (device - content).abs() <= 1.0,
                "{tank:?}: write-config {device}, content {content}"
            );
        }
    }

    #[test]
    fn a_barometric_pressure_out_of_range_is_refused() {
        let tank = [
            "--capacity",
            "50L",
            "--rated-pressure",
            "200barg",
            "--barometric",
            "5bar",
        ];
        let a = super::TankArgs {
            capacity: tank[1].into(),
            rated_pressure: tank[3].into(),
            rated_temperature: "15C".into(),
            elastic_expansion_per_bar: "0".into(),
            thermal_expansion_per_k: "0".into(),
            gauge: false,
            barometric: Some(tank[5].into()),
        };
        let e = a.tank().unwrap_err().to_string();
        assert!(e.contains("--barometric 5bar"), "{e}");
    }
}
