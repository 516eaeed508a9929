//! A simple, honest truth generator for long series: an ideal gas in a rigid
//! tank, a known mass history (leak, draw, fill), a known temperature history
//! (day/night swing, weather, heat of a fast fill) and a sensor pair with
//! declared errors. Everything is deterministic for a given seed (ChaCha8).
//!
//! Physics kept on purpose simple (the desktop tank simulator with real
//! physics is another piece of work):
//!
//! * ambient temperature: mean + daily mean that wanders from day to day
//!   (linear between random daily values) + a sine of 24 h period whose
//!   amplitude also changes from day to day;
//! * gas temperature: first order towards ambient (the cylinder's thermal
//!   time constant), plus an excess after a fast fill that decays with the
//!   settling time constant;
//! * temperature sensor: first order towards the *wall*, i.e. towards the
//!   ambient-following gas temperature without the fill excess (a sensor on
//!   the outside of the vessel does not see the hot gas core), plus its lag,
//!   offset, gain error and noise;
//! * mass: a relative leak (fraction of content per day, exponential decay),
//!   a constant draw in kg/h, and fills that add mass linearly over their
//!   duration;
//! * pressure: p = m·R·T_gas/(M·V₀) (ideal gas, rigid tank), read with a
//!   gain error, an offset and noise.

use isochor_core::Gas;
use isochor_core::constants::MOLAR_GAS_CONSTANT_J_MOL_K;
use rand::rngs::ChaCha8Rng;
use rand::{RngExt, SeedableRng};

/// Milliseconds per day.
pub const DAY_MS: u64 = 86_400_000;
/// Milliseconds per hour.
pub const HOUR_MS: u64 = 3_600_000;

/// The weather: day/night swing and day-to-day changes.
#[derive(Clone, Copy, Debug)]
pub struct Weather {
    /// Mean ambient temperature, K.
    pub mean_k: f64,
    /// Amplitude of the day/night sine, K (±).
    pub swing_k: f64,
    /// Day-to-day change of the amplitude, as a fraction of it (uniform ±).
    pub swing_spread: f64,
    /// Standard deviation of the daily mean around `mean_k`, K.
    pub daily_mean_sd_k: f64,
}

/// The sensor pair's errors (constant offsets and gain are drawn by the
/// caller; noise is drawn per sample).
#[derive(Clone, Copy, Debug, Default)]
pub struct SensorErrors {
    /// Pressure offset, Pa.
    pub p_offset_pa: f64,
    /// Pressure gain error (relative).
    pub p_gain: f64,
    /// Pressure noise, standard deviation, Pa.
    pub p_noise_pa: f64,
    /// Temperature offset, K.
    pub t_offset_k: f64,
    /// Temperature gain error about 0 °C (relative): the reading gains
    /// `t_gain × (T − 273.15 K)`.
    pub t_gain: f64,
    /// Temperature noise, standard deviation, K.
    pub t_noise_k: f64,
    /// Temperature sensor lag behind the wall, s.
    pub t_lag_s: f64,
}

/// A fast fill.
#[derive(Clone, Copy, Debug)]
pub struct Fill {
    /// Start, ms.
    pub at_ms: u64,
    /// Duration, ms.
    pub duration_ms: u64,
    /// Mass after the fill, kg.
    pub to_mass_kg: f64,
    /// Gas temperature excess over the wall at the end of the fill, K.
    pub heat_k: f64,
    /// Time constant of the gas settling to the wall, s.
    pub settle_tau_s: f64,
}

/// One scenario.
#[derive(Clone, Debug)]
pub struct Scenario {
    /// The gas.
    pub gas: Gas,
    /// Water capacity, m³.
    pub capacity_m3: f64,
    /// Sample interval, ms.
    pub dt_ms: u64,
    /// Length, ms.
    pub duration_ms: u64,
    /// Initial mass, kg.
    pub mass0_kg: f64,
    /// Relative leak, fraction of the content per day, from `leak_start_ms`.
    pub leak_per_day: f64,
    /// Leak start, ms.
    pub leak_start_ms: u64,
    /// Constant draw, kg/h, from `draw_start_ms`.
    pub draw_kg_h: f64,
    /// Draw start, ms.
    pub draw_start_ms: u64,
    /// Fills.
    pub fills: Vec<Fill>,
    /// Weather.
    pub weather: Weather,
    /// Thermal time constant of the cylinder (gas and wall) to ambient, s.
    pub vessel_tau_s: f64,
    /// Sensor errors.
    pub sensors: SensorErrors,
    /// Random seed.
    pub seed: u64,
}

/// One sample: what the sensors read and what is true.
#[derive(Clone, Copy, Debug)]
pub struct Sample {
    /// Time, ms.
    pub t_ms: u64,
    /// Pressure read, Pa.
    pub p_read_pa: f64,
    /// Temperature read, K.
    pub t_read_k: f64,
    /// True mass, kg.
    pub mass_kg: f64,
    /// True gas temperature, K.
    pub gas_k: f64,
    /// True wall temperature (what the gas settles to), K.
    pub wall_k: f64,
    /// True pressure, Pa.
    pub p_true_pa: f64,
}

/// The generator: an iterator of samples.
pub struct Series {
    sc: Scenario,
    rng: ChaCha8Rng,
    t_ms: u64,
    mass: f64,
    wall: f64,
    excess: f64,
    sensor_t: f64,
    /// Daily mean offsets and amplitudes for the current and next day.
    day: u64,
    day_mean: [f64; 2],
    day_amp: [f64; 2],
    k_pressure: f64,
}

impl Scenario {
    /// A calm standby scenario on a 50 L nitrogen cylinder at 200 bar, 1 Hz,
    /// ±15 K day/night swing; callers change what they test.
    pub fn standby(days: u64, seed: u64) -> Scenario {
        let gas = Gas::Nitrogen;
        let cap = 0.05;
        // Rated mass at 200 bar absolute, 15 °C, ideal gas.
        let m_rated = rated_mass(gas, cap, 200e5, 288.15);
        Scenario {
            gas,
            capacity_m3: cap,
            dt_ms: 1000,
            duration_ms: days * DAY_MS,
            mass0_kg: 0.9 * m_rated,
            leak_per_day: 0.0,
            leak_start_ms: 0,
            draw_kg_h: 0.0,
            draw_start_ms: 0,
            fills: Vec::new(),
            weather: Weather {
                mean_k: 288.15,
                swing_k: 15.0,
                swing_spread: 0.3,
                daily_mean_sd_k: 3.0,
            },
            vessel_tau_s: 3600.0,
            sensors: SensorErrors {
                p_offset_pa: 0.3e5,
                p_gain: 0.001,
                p_noise_pa: 0.05e5,
                t_offset_k: 0.3,
                t_gain: 0.0,
                t_noise_k: 0.05,
                t_lag_s: 600.0,
            },
            seed,
        }
    }

    /// The samples.
    pub fn series(&self) -> Series {
        let mut rng = ChaCha8Rng::seed_from_u64(self.seed);
        let day_mean = [
            normal(&mut rng) * self.weather.daily_mean_sd_k,
            normal(&mut rng) * self.weather.daily_mean_sd_k,
        ];
        let w = self.weather;
        let day_amp = [
            w.swing_k * (1.0 + w.swing_spread * (2.0 * rng.random::<f64>() - 1.0)),
            w.swing_k * (1.0 + w.swing_spread * (2.0 * rng.random::<f64>() - 1.0)),
        ];
        let mut s = Series {
            sc: self.clone(),
            rng,
            t_ms: 0,
            mass: self.mass0_kg,
            wall: 0.0,
            excess: 0.0,
            sensor_t: 0.0,
            day: 0,
            day_mean,
            day_amp,
            k_pressure: MOLAR_GAS_CONSTANT_J_MOL_K
                / (self.gas.info().molar_mass_kg_mol * self.capacity_m3),
        };
        s.wall = s.ambient(0);
        s.sensor_t = s.wall;
        s
    }
}

/// Rated mass of an ideal gas, kg.
pub fn rated_mass(gas: Gas, capacity_m3: f64, p_pa: f64, t_k: f64) -> f64 {
    p_pa * capacity_m3 * gas.info().molar_mass_kg_mol / (MOLAR_GAS_CONSTANT_J_MOL_K * t_k)
}

/// A standard normal draw (Box–Muller).
pub fn normal(rng: &mut ChaCha8Rng) -> f64 {
    let u1: f64 = rng.random::<f64>().max(1e-300);
    let u2: f64 = rng.random::<f64>();
    (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
}

impl Series {
    /// Ambient temperature at `t_ms`.
    fn ambient(&self, t_ms: u64) -> f64 {
        let w = self.sc.weather;
        let x = (t_ms % DAY_MS) as f64 / DAY_MS as f64;
        let mean = self.day_mean[0] + (self.day_mean[1] - self.day_mean[0]) * x;
        let amp = self.day_amp[0] + (self.day_amp[1] - self.day_amp[0]) * x;
        // Coldest around 05:00, warmest around 17:00.
        w.mean_k + mean + amp * (2.0 * std::f64::consts::PI * (x - 11.0 / 24.0)).sin()
    }
}

impl Iterator for Series {
    type Item = Sample;

    fn next(&mut self) -> Option<Sample> {
        if self.t_ms > self.sc.duration_ms {
            return None;
        }
        let t = self.t_ms;
        let dt_s = self.sc.dt_ms as f64 / 1000.0;
        let day = t / DAY_MS;
        if day != self.day {
            self.day = day;
            let w = self.sc.weather;
            self.day_mean = [self.day_mean[1], normal(&mut self.rng) * w.daily_mean_sd_k];
            self.day_amp = [
                self.day_amp[1],
                w.swing_k * (1.0 + w.swing_spread * (2.0 * self.rng.random::<f64>() - 1.0)),
            ];
        }
        // Temperatures: wall towards ambient, sensor towards wall.
        let amb = self.ambient(t);
        self.wall += (amb - self.wall) * (dt_s / (self.sc.vessel_tau_s + dt_s));
        let lag = self.sc.sensors.t_lag_s;
        self.sensor_t += (self.wall - self.sensor_t) * (dt_s / (lag + dt_s));
        // Mass: leak, draw, fills.
        if t >= self.sc.leak_start_ms && self.sc.leak_per_day > 0.0 {
            self.mass *= (-self.sc.leak_per_day * dt_s / 86_400.0).exp();
        }
        if t >= self.sc.draw_start_ms && self.sc.draw_kg_h > 0.0 {
            self.mass -= self.sc.draw_kg_h * dt_s / 3600.0;
        }
        for f in &self.sc.fills {
            if t >= f.at_ms && t < f.at_ms + f.duration_ms {
                let left = (f.at_ms + f.duration_ms - t) as f64 / 1000.0;
                let step = ((f.to_mass_kg - self.mass) * dt_s / left).max(0.0);
                self.mass += step;
                // Heat of compression builds up over the fill.
                self.excess += f.heat_k * dt_s * 1000.0 / f.duration_ms as f64;
            }
        }
        self.mass = self.mass.max(0.0);
        let tau_fill = self
            .sc
            .fills
            .iter()
            .map(|f| f.settle_tau_s)
            .next()
            .unwrap_or(1800.0);
        self.excess -= self.excess * (dt_s / (tau_fill + dt_s));
        let gas = self.wall + self.excess;
        let p_true = self.mass * self.k_pressure * gas;
        let s = self.sc.sensors;
        let p_read =
            p_true * (1.0 + s.p_gain) + s.p_offset_pa + s.p_noise_pa * normal(&mut self.rng);
        let t_read = self.sensor_t
            + s.t_offset_k
            + s.t_gain * (self.sensor_t - 273.15)
            + s.t_noise_k * normal(&mut self.rng);
        self.t_ms += self.sc.dt_ms;
        Some(Sample {
            t_ms: t,
            p_read_pa: p_read.max(0.0),
            t_read_k: t_read,
            mass_kg: self.mass,
            gas_k: gas,
            wall_k: self.wall,
            p_true_pa: p_true,
        })
    }
}
