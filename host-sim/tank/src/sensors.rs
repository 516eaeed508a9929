//! Simulated sensors: from the true state to the raw converter codes a board
//! would read, with the sensors' own errors and faults.
//!
//! Each channel takes the true quantity, adds its errors — offset and span
//! (gain) error, offset and span drift growing linearly with time, white
//! noise — and, for temperature, its own first-order thermal lag behind what
//! it touches (the wall, or the gas in a thermowell), then maps the value to
//! a code with the core's own `f64` inverse of the configured front-end
//! (bridge code, loop current through the shunt, RTD or NTC resistance
//! through the resistive circuit) and rounds it: the converter's
//! quantisation. Faults replace the code while they last:
//!
//! | fault | pressure (bridge) | pressure (4–20 mA) | temperature (RTD, NTC) |
//! |---|---|---|---|
//! | `open` | top rail (a broken wire pulls the input up) | 0 mA | resistance → ∞ (top code) |
//! | `short` | zero signal (code 0) | 25 mA (loop shorted to supply) | resistance 0 (code 0) |
//! | `stuck` | the code at the fault's start, frozen | same | same |
//! | `spikes` | single-sample jumps of ±20 % of the range at random times | same | ±30 K |
//! | `failure_low` | — | 3.4 mA (NAMUR NE 43 low failure signal) | — |
//! | `failure_high` | — | 21.5 mA (NE 43 high failure signal) | — |
//! | `ramp` | the reading moves away from the truth by `to` (Pa), linearly over `over` | same | the same in K |
//!
//! A ramp adds to the reading (errors and noise stay) rather than replacing
//! the code: the reading leaves the truth at the fault's start, reaches
//! `to` after `over` and stays there until the fault ends (a permanent
//! fault: for good), when it snaps back. A ramp faster than the device's
//! plausible rate (5 % of full scale a second plus 1 % between samples for
//! pressure, 5 K/s plus 1 K for temperature, see docs/simulator.md) is
//! flagged by the device's rate check; one that ends beyond the plausible
//! range by its range check; a slower one inside the range looks like a real
//! change of pressure or temperature.

use super::physics::Truth;
use crate::Error;
use isochor_core::sensor::bridge::{BridgeConfig, float::Bridge};
use isochor_core::sensor::current_loop::{LoopConfig, float::Loop};
use isochor_core::sensor::ntc::{NtcConfig, float::Ntc};
use isochor_core::sensor::resistive::{Circuit, FrontEnd};
use isochor_core::sensor::rtd::{RtdConfig, float::Rtd};
use isochor_core::{fx, fx::to_f64};
use rand::rngs::ChaCha8Rng;
use rand::{RngExt, SeedableRng};
use rand_distr::StandardNormal;

/// Years a drift beginning at `start_s` has run at `t_s` (none before it).
pub fn drift_years(t_s: f64, start_s: f64) -> f64 {
    (t_s - start_s).max(0.0) / YEAR_S
}

/// Seconds per year (365.25 days), for drift rates.
pub const YEAR_S: f64 = 365.25 * 86_400.0;

/// The pressure front-end a board has.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum PressureFrontEnd {
    /// A ratiometric bridge transducer.
    Bridge(BridgeConfig),
    /// A 4–20 mA transmitter through a shunt.
    Loop(LoopConfig),
}

/// The temperature front-end a board has.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum TemperatureFrontEnd {
    /// A platinum RTD.
    Rtd(RtdConfig),
    /// An NTC thermistor.
    Ntc(NtcConfig),
}

/// Where the temperature sensor sits.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Mount {
    /// Bonded to the outside of the vessel wall.
    Wall,
    /// In a thermowell in the gas.
    Gas,
}

/// The pressure channel and its errors.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PressureSensor {
    /// Front-end.
    pub front_end: PressureFrontEnd,
    /// Offset, Pa.
    pub offset_pa: f64,
    /// Span (gain) error, relative.
    pub span_error: f64,
    /// Offset drift, Pa per year.
    pub offset_drift_pa_per_year: f64,
    /// Span drift, relative per year.
    pub span_drift_per_year: f64,
    /// When the drifts begin, s from the start.
    pub drift_start_s: f64,
    /// White noise, standard deviation, Pa.
    pub noise_pa: f64,
}

/// The temperature channel and its errors.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TemperatureSensor {
    /// Front-end.
    pub front_end: TemperatureFrontEnd,
    /// Where it sits.
    pub mount: Mount,
    /// Its own thermal time constant, s.
    pub time_constant_s: f64,
    /// Offset, K.
    pub offset_k: f64,
    /// Gain error about 0 °C, relative.
    pub gain_error: f64,
    /// Offset drift, K per year.
    pub drift_k_per_year: f64,
    /// When the drift begins, s from the start.
    pub drift_start_s: f64,
    /// White noise, standard deviation, K.
    pub noise_k: f64,
}

/// Which channel a fault hits.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Channel {
    /// The pressure channel.
    Pressure,
    /// The temperature channel.
    Temperature,
}

/// The kind of a fault (see the module table).
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum FaultKind {
    /// Open circuit.
    Open,
    /// Short circuit.
    Short,
    /// Frozen code.
    Stuck,
    /// Random single-sample spikes.
    Spikes,
    /// NE 43 low failure current (4–20 mA only).
    FailureLow,
    /// NE 43 high failure current (4–20 mA only).
    FailureHigh,
    /// The reading moves away from the truth linearly (see [`Fault::ramp_offset`]).
    Ramp,
}

/// A fault over a time span.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Fault {
    /// The channel.
    pub channel: Channel,
    /// The kind.
    pub kind: FaultKind,
    /// Start, s.
    pub start_s: f64,
    /// Duration, s.
    pub duration_s: f64,
    /// Spikes per hour (spikes only).
    pub spikes_per_hour: f64,
    /// Where a ramp goes: its offset from the truth at its end, Pa for
    /// pressure, K for temperature (ramps only; 0 otherwise).
    pub ramp_to: f64,
    /// Time a ramp takes to reach `ramp_to`, s (> 0 for a ramp).
    pub ramp_over_s: f64,
}

impl Fault {
    /// True while the fault lasts at `t_s`.
    pub fn active(&self, t_s: f64) -> bool {
        t_s >= self.start_s && t_s < self.start_s + self.duration_s
    }

    /// What a ramp adds to its channel's reading at `t_s` (Pa or K):
    /// `ramp_to` × (t − start)/over, at most `ramp_to`, while the fault
    /// lasts; 0 before, after, and for every other kind.
    pub fn ramp_offset(&self, t_s: f64) -> f64 {
        if self.kind != FaultKind::Ramp || !self.active(t_s) {
            return 0.0;
        }
        let x = if self.ramp_over_s > 0.0 {
            ((t_s - self.start_s) / self.ramp_over_s).clamp(0.0, 1.0)
        } else {
            1.0
        };
        self.ramp_to * x
    }
}

/// The raw pressure code of one sample.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum PressureCode {
    /// A bridge converter code (signed).
    Bridge(i32),
    /// The converter code across the loop shunt.
    Loop(u32),
}

/// The raw codes of one sample: what a board's converters deliver.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Codes {
    /// Pressure channel.
    pub pressure: PressureCode,
    /// Temperature channel.
    pub temperature: u32,
}

/// Prepared converters of the inverse direction and the running state.
pub struct SensorPair {
    pressure: PressureSensor,
    temperature: TemperatureSensor,
    faults: Vec<Fault>,
    bridge: Option<Bridge<f64>>,
    /// For a bridge without linearity correction and temperature
    /// coefficients, code = a + b·p (the core's inverse is linear then).
    bridge_linear: Option<(f64, f64)>,
    loop_: Option<(Loop<f64>, f64)>,
    rtd: Option<Rtd<f64>>,
    ntc: Option<Ntc<f64>>,
    resistive: FrontEnd,
    barometric_pa: f64,
    rng: ChaCha8Rng,
    sensor_k: Option<f64>,
    last_t_s: f64,
    /// The lag's step factor 1 − e^(−Δt/τ) and the Δt it was made for.
    lag: (f64, f64),
    /// Codes frozen by a stuck fault, per fault.
    frozen: Vec<Option<Codes>>,
    last: Option<Codes>,
    /// Next spike time per fault.
    next_spike: Vec<f64>,
    /// The temperature the sensor element had at the last sample, K.
    pub element_k: f64,
}

impl SensorPair {
    /// Prepares the pair. `seed` drives the noise and spikes.
    pub fn new(
        pressure: PressureSensor,
        temperature: TemperatureSensor,
        faults: Vec<Fault>,
        barometric_pa: f64,
        seed: u64,
    ) -> Result<SensorPair, Error> {
        let (bridge, loop_) = match pressure.front_end {
            PressureFrontEnd::Bridge(c) => (Some(Bridge::new(&c)?), None),
            PressureFrontEnd::Loop(c) => {
                // Codes per mA: shunt/V_ref·2^bits/1000.
                let per_ma = to_f64(c.shunt_ohms) / to_f64(c.adc_reference_v)
                    * f64::from(1u32 << c.adc_bits)
                    / 1000.0;
                (None, Some((Loop::new(&c)?, per_ma)))
            }
        };
        let (rtd, ntc, resistive) = match temperature.front_end {
            TemperatureFrontEnd::Rtd(c) => (Some(Rtd::new(&c)?), None, c.front_end),
            TemperatureFrontEnd::Ntc(c) => (None, Some(Ntc::new(&c)?), c.front_end),
        };
        let bridge_linear = match (&bridge, pressure.front_end) {
            (Some(b), PressureFrontEnd::Bridge(c)) if bridge_is_linear(&c) => {
                let (lo, hi) = (to_f64(c.range_lo_pa), to_f64(c.range_hi_pa));
                let ref_k = to_f64(c.reference_k);
                let c0 = b.code(lo, ref_k, barometric_pa)?;
                let c1 = b.code(hi, ref_k, barometric_pa)?;
                let slope = (c1 - c0) / (hi - lo);
                Some((c0 - slope * lo, slope))
            }
            _ => None,
        };
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let next_spike = faults
            .iter()
            .map(|f| f.start_s + exp_draw(&mut rng, f.spikes_per_hour))
            .collect();
        Ok(SensorPair {
            frozen: vec![None; faults.len()],
            next_spike,
            pressure,
            temperature,
            faults,
            bridge,
            bridge_linear,
            loop_,
            rtd,
            ntc,
            resistive,
            barometric_pa,
            rng,
            sensor_k: None,
            last_t_s: 0.0,
            lag: (f64::NAN, 0.0),
            last: None,
            element_k: 0.0,
        })
    }

    /// The faults.
    pub fn faults(&self) -> &[Fault] {
        &self.faults
    }

    /// True when a fault of `channel` is active at `t_s`.
    pub fn fault_active(&self, t_s: f64) -> bool {
        self.faults.iter().any(|f| f.active(t_s))
    }

    /// The codes of one sample at the truth's time.
    pub fn sample(&mut self, truth: &Truth) -> Result<Codes, Error> {
        let t = truth.t_s;
        // Temperature element: first order towards what it touches.
        let touched = match self.temperature.mount {
            Mount::Wall => truth.wall_k,
            Mount::Gas => truth.gas_k,
        };
        let el = match self.sensor_k {
            None => touched,
            Some(prev) => {
                let dt = (t - self.last_t_s).max(0.0);
                let tau = self.temperature.time_constant_s;
                if tau > 0.0 {
                    if dt != self.lag.0 {
                        self.lag = (dt, 1.0 - (-dt / tau).exp());
                    }
                    prev + (touched - prev) * self.lag.1
                } else {
                    touched
                }
            }
        };
        self.sensor_k = Some(el);
        self.element_k = el;
        self.last_t_s = t;
        let ts = &self.temperature;
        let t_read = el
            + ts.offset_k
            + ts.drift_k_per_year * drift_years(t, ts.drift_start_s)
            + ts.gain_error * (el - 273.15)
            + ts.noise_k * self.rng.sample::<f64, _>(StandardNormal);
        let ps = &self.pressure;
        let years = drift_years(t, ps.drift_start_s);
        let p_read = truth.pressure_pa * (1.0 + ps.span_error + ps.span_drift_per_year * years)
            + ps.offset_pa
            + ps.offset_drift_pa_per_year * years
            + ps.noise_pa * self.rng.sample::<f64, _>(StandardNormal);

        let mut t_val = t_read;
        let mut p_val = p_read;
        let mut p_override: Option<PressureCode> = None;
        let mut t_override: Option<u32> = None;
        for i in 0..self.faults.len() {
            let f = self.faults[i];
            if !f.active(t) {
                self.frozen[i] = None;
                continue;
            }
            match f.kind {
                FaultKind::Ramp => match f.channel {
                    Channel::Pressure => p_val += f.ramp_offset(t),
                    Channel::Temperature => t_val += f.ramp_offset(t),
                },
                FaultKind::Spikes => {
                    if t >= self.next_spike[i] {
                        self.next_spike[i] = t + exp_draw(&mut self.rng, f.spikes_per_hour);
                        let sign = if self.rng.random::<bool>() { 1.0 } else { -1.0 };
                        match f.channel {
                            Channel::Pressure => p_val += sign * 0.2 * self.pressure_range(),
                            Channel::Temperature => t_val += sign * 30.0,
                        }
                    }
                }
                FaultKind::Stuck => {
                    let frozen = *self.frozen[i].get_or_insert(self.last.unwrap_or(Codes {
                        pressure: PressureCode::Loop(0),
                        temperature: 0,
                    }));
                    match f.channel {
                        Channel::Pressure => p_override = Some(frozen.pressure),
                        Channel::Temperature => t_override = Some(frozen.temperature),
                    }
                }
                kind => match f.channel {
                    Channel::Pressure => p_override = Some(self.pressure_fault_code(kind)),
                    Channel::Temperature => t_override = Some(self.temperature_fault_code(kind)),
                },
            }
        }
        let codes = Codes {
            pressure: match p_override {
                Some(c) => c,
                None => self.pressure_code(p_val, truth.wall_k)?,
            },
            temperature: match t_override {
                Some(c) => c,
                None => self.temperature_code(t_val)?,
            },
        };
        if self.last.is_none() {
            // A stuck fault from the first sample freezes the first codes.
            for fr in self.frozen.iter_mut().flatten() {
                *fr = codes;
            }
        }
        self.last = Some(codes);
        Ok(codes)
    }

    fn pressure_range(&self) -> f64 {
        match self.pressure.front_end {
            PressureFrontEnd::Bridge(c) => to_f64(c.range_hi_pa) - to_f64(c.range_lo_pa),
            PressureFrontEnd::Loop(c) => to_f64(c.range_hi_pa) - to_f64(c.range_lo_pa),
        }
    }

    /// The code for a measured absolute pressure (transducer at `element_k`).
    fn pressure_code(&self, p_pa: f64, element_k: f64) -> Result<PressureCode, Error> {
        if let (Some(b), PressureFrontEnd::Bridge(c)) = (&self.bridge, self.pressure.front_end) {
            let (lo, hi) = c.rails();
            let range = to_f64(c.range_hi_pa) - to_f64(c.range_lo_pa);
            // Beyond 150 % of the range the converter is at a rail anyway.
            let lo_p = to_f64(c.range_lo_pa) - 1.49 * range;
            let hi_p = to_f64(c.range_lo_pa) + 1.49 * range;
            let p = p_pa.clamp(lo_p, hi_p);
            let code = match self.bridge_linear {
                Some((a, k)) => a + k * p,
                None => b.code(p, element_k, self.barometric_pa)?,
            };
            return Ok(PressureCode::Bridge(
                round_clamp(code, f64::from(lo), f64::from(hi)) as i32,
            ));
        }
        if let Some((l, per_ma)) = &self.loop_ {
            let ma = l.milliamps(p_pa, self.barometric_pa)?.clamp(0.0, 30.0);
            return Ok(PressureCode::Loop(self.loop_code(ma, *per_ma)));
        }
        Err(Error::Invalid("no pressure front-end".into()))
    }

    fn loop_code(&self, ma: f64, per_ma: f64) -> u32 {
        let bits = match self.pressure.front_end {
            PressureFrontEnd::Loop(c) => c.adc_bits,
            PressureFrontEnd::Bridge(c) => c.adc_bits,
        };
        round_clamp(ma * per_ma, 0.0, f64::from((1u32 << bits) - 1)) as u32
    }

    fn pressure_fault_code(&self, kind: FaultKind) -> PressureCode {
        match self.pressure.front_end {
            PressureFrontEnd::Bridge(c) => {
                let (_, hi) = c.rails();
                PressureCode::Bridge(match kind {
                    FaultKind::Open => hi,
                    _ => 0,
                })
            }
            PressureFrontEnd::Loop(_) => {
                let per_ma = self.loop_.as_ref().map_or(0.0, |l| l.1);
                let ma = match kind {
                    FaultKind::Open => 0.0,
                    FaultKind::Short => 25.0,
                    FaultKind::FailureLow => 3.4,
                    _ => 21.5,
                };
                PressureCode::Loop(self.loop_code(ma, per_ma))
            }
        }
    }

    fn temperature_fault_code(&self, kind: FaultKind) -> u32 {
        let top = self.resistive.full_code() - 1;
        let (open, short) = match self.resistive.circuit {
            Circuit::Ratiometric | Circuit::DividerLow => (top, 0),
            Circuit::DividerHigh => (0, top),
        };
        match kind {
            FaultKind::Short => short,
            _ => open,
        }
    }

    /// The code for a measured temperature through the resistive circuit.
    fn temperature_code(&self, t_k: f64) -> Result<u32, Error> {
        let t = t_k.clamp(100.0, 1000.0);
        let ohms = if let Some(r) = &self.rtd {
            r.ohms(t)?
        } else if let Some(n) = &self.ntc {
            n.ohms(t)?
        } else {
            return Err(Error::Invalid("no temperature front-end".into()));
        };
        let f = &self.resistive;
        let r = ohms + to_f64(f.lead_ohms);
        let rref = to_f64(f.reference_ohms);
        let full = f64::from(f.full_code());
        let x = match f.circuit {
            Circuit::Ratiometric => r / rref,
            Circuit::DividerLow => r / (r + rref),
            Circuit::DividerHigh => rref / (r + rref),
        };
        Ok(round_clamp(x * full, 0.0, full - 1.0) as u32)
    }
}

/// True for a bridge whose code is linear in pressure at every temperature:
/// identity linearity, no temperature coefficients, absolute pressure.
fn bridge_is_linear(c: &BridgeConfig) -> bool {
    use isochor_core::fx::Coefficient as K;
    c.linearity == [K::ZERO, K::ONE, K::ZERO, K::ZERO]
        && c.zero[1] == K::ZERO
        && c.zero[2] == K::ZERO
        && c.span_tc == [K::ZERO; 2]
        && c.kind == isochor_core::sensor::PressureKind::Absolute
}

/// Rounds to the nearest integer within `lo..=hi`.
fn round_clamp(v: f64, lo: f64, hi: f64) -> f64 {
    if v.is_nan() {
        lo
    } else {
        v.round().clamp(lo, hi)
    }
}

/// An exponential waiting time for `per_hour` events per hour, s.
fn exp_draw(rng: &mut ChaCha8Rng, per_hour: f64) -> f64 {
    if per_hour <= 0.0 {
        return f64::INFINITY;
    }
    let u: f64 = rng.random::<f64>().max(1e-300);
    -u.ln() * 3600.0 / per_hour
}

/// A bridge channel for absolute pressure 0 … `full_scale_pa` on a 24-bit
/// bipolar converter with the zero at 10 % and the span at 80 % of its
/// range, 5 % margin (invented typical values).
pub fn default_bridge(full_scale_pa: f64, adc_bits: u8) -> Result<BridgeConfig, Error> {
    let mut c = BridgeConfig::new(
        adc_bits,
        true,
        0.1,
        0.8,
        0.0,
        full_scale_pa,
        isochor_core::sensor::PressureKind::Absolute,
    )?;
    c.range_margin = fx::from_f64(0.05, isochor_core::SensorSetting::RangeMargin)?;
    c.validate()?;
    Ok(c)
}
