//! A run: the physics, the sensors and the gauge under test, sample by
//! sample, scored against the simulated truth.
//!
//! # Scores
//!
//! * **Content error**: (m_gauge − m_true)/m_true of every sample with an
//!   estimate. The *judged* samples are those the gauge vouches for: a valid
//!   estimate with its uncertainty, no `not_settled` and no sensor fault
//!   (the gauge's uncertainty budget leaves out the gas–sensor temperature
//!   difference of a fast fill, which it flags instead), and a true content
//!   above the reserve (5 % of the rated content; below it a relative error
//!   has little meaning: full-scale errors dominate and the gauge reports
//!   low content). `max_abs_error_fraction`,
//!   the bias and the rms are over judged samples; `_all` variants over
//!   every sample with an estimate.
//! * **Uncertainty coverage**: share of judged samples whose k = 2 interval
//!   m ± U(m) holds the true mass; and the largest |error|/U(m) of a judged
//!   sample (`max_error_over_uncertainty`).
//! * **Leak detection**: time from the start of the first leak to the first
//!   `leak` alarm after it.
//! * **False alarms**: raises the truth does not justify: `leak` before any
//!   leak began; `sensor_fault` with no fault injected in the last minute;
//!   `low_content` with the true fill fraction above the threshold + 2 % and
//!   more than 1.5 h to the reserve at the true rate; `over_pressure` with
//!   the true content below the over-fill limit − 2 % of the rated content
//!   and the pressure below the pressure limit − 1 % of the rated pressure;
//!   `over_temperature`/`under_temperature` with the gas more than 2 K inside
//!   the limit. `not_settled` is information, never counted.
//! * **Ramp faults** (`kind = "ramp"`): an injected failure of a sensor
//!   whose reading walks away from the truth. While a ramp lasts (from its
//!   start to its end; for good when it has no end) the samples are not
//!   judged — the instrument is outside anything it declares, so the content
//!   error there measures the injection, not the gauge (they stay in the
//!   `_all` maximum) — and every alarm raised from its start to one minute
//!   after its end is justified by it: a fast ramp is the device's to flag
//!   (`sensor_fault`), a slow one looks like a real change and the gauge
//!   acts on it as on one (a pressure walking down is a leak to it). Such a
//!   `leak` raise is not a leak found.
//! * **Time to empty** at the present rate, as the gauge defines it: once a
//!   minute where the gauge states one, against (m_true − m_reserve)/R_true
//!   with R_true the true mean outflow over the last 32 minutes (the gauge's
//!   rate window), judged where that outflow was steady (every minute within
//!   ±5 % of the mean), more than 1 h is left and the gauge knows its rate
//!   to ±50 % (U(rate) ≤ |rate|/2, the condition under which the gauge itself
//!   uses its time to empty): the relative error of the expected time and
//!   whether earliest … latest holds the truth.
//!
//! # How to read them
//!
//! * **The instrument** ([`InstrumentErrors`]): the errors the readings
//!   carry — the pressure sensor's offset and span error, the temperature
//!   sensor's offset, gain error, place and lag, and the water capacity the
//!   gauge is told — drawn from the gauge's declared uncertainties (a new
//!   seed is another instrument) plus the errors the scenario states.
//! * **Expected bias** ([`ExpectedBias`]): the mean content error those
//!   static errors explain, to first order through the true gas's
//!   sensitivities (c_p = ∂ln ρ/∂ln p, c_T = ∂ln ρ/∂ln T from the reference
//!   equation of state, evaluated again when p has moved by 1 % or T by
//!   0.5 K), over the judged samples once a minute. The
//!   difference from the measured bias is the gauge's own part (sensor lag
//!   and the gas–wall temperature difference, gas model, arithmetic).
//! * **Time to empty**: beside the errors, what the judged minutes were —
//!   the median true outflow and time to the reserve, and the median
//!   U(rate)/|rate| the gauge stated there: a time to empty is no better
//!   than the rate it divides by.

use super::gauge::{Backend, FixedGauge, FloatGauge, Reading};
use super::physics::{Simulator, Truth};
use super::scenario::Scenario;
use super::sensors::{FaultKind, Mount, SensorPair};
use crate::Error;
use isochor_core::Status;
use isochor_core::alarm::{AlarmEvent, AlarmKind};
use isochor_core::constants::{STANDARD_ATMOSPHERE_PA, ZERO_CELSIUS_K};
use isochor_core::time::Instant;
use isochor_eos::composition::GasSpec;
use isochor_eos::fluid::Fluid;
use serde::Serialize;

/// Which in-process gauge runs.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum BackendKind {
    /// The fixed-point core (the device path).
    #[default]
    Fixed,
    /// The `f64` core (the reference mirror).
    Float,
}

impl BackendKind {
    /// Prepares the gauge of a scenario.
    pub fn build(self, sc: &Scenario) -> Result<Box<dyn Backend>, Error> {
        Ok(match self {
            BackendKind::Fixed => Box::new(FixedGauge::new(&sc.gauge)?),
            BackendKind::Float => Box::new(FloatGauge::new(&sc.gauge)?),
        })
    }
}

/// One point of the recorded time series.
#[derive(Clone, Copy, Debug, Default, Serialize)]
pub struct TracePoint {
    /// Time since the start, s.
    pub t_s: f64,
    /// True pressure, Pa absolute.
    pub pressure_true_pa: f64,
    /// Pressure the gauge reports, Pa absolute: the smoothed reading its
    /// content comes from (`null`: not a measurement or no content).
    pub pressure_read_pa: Option<f64>,
    /// True gas temperature, K.
    pub gas_temperature_k: f64,
    /// True wall temperature, K.
    pub wall_temperature_k: f64,
    /// Ambient temperature, K.
    pub ambient_temperature_k: f64,
    /// Temperature the gauge reports, K (smoothed likewise).
    pub temperature_read_k: Option<f64>,
    /// True mass, kg.
    pub mass_true_kg: f64,
    /// The gauge's mass, kg.
    pub mass_gauge_kg: Option<f64>,
    /// The gauge's expanded uncertainty (k = 2), kg.
    pub u_mass_kg: Option<f64>,
    /// The gauge's fill fraction.
    pub fill_fraction: Option<f64>,
    /// The gauge's consumption rate, kg/h.
    pub rate_kg_h: Option<f64>,
    /// True net outflow, kg/h.
    pub true_outflow_kg_h: f64,
    /// The gauge's expected time to empty, s.
    pub time_to_empty_s: Option<f64>,
    /// The gauge's loss per day (leak detector), as a fraction of the
    /// content per day (0.005: 0.5 % a day).
    pub loss_fraction_per_day: Option<f64>,
    /// The gauge's status word (bits).
    pub status: u32,
    /// Why the gauge gives no time to empty (`None` while it gives one).
    pub time_to_empty_withheld: Option<&'static str>,
}

/// One alarm change, judged.
#[derive(Clone, Debug, Serialize)]
pub struct TimelineEvent {
    /// Time since the start, s.
    pub t_s: f64,
    /// The alarm's name.
    pub alarm: &'static str,
    /// `raised` or `cleared`.
    pub change: &'static str,
    /// For raises: whether the truth justified it.
    pub justified: Option<bool>,
}

/// The instrument under test: the errors its readings carry (JSON
/// `instrument`). With `instrument = "drawn"` they are drawn from the
/// gauge's declared uncertainties (plus the errors the scenario states);
/// with `"nominal"` only the stated ones.
#[derive(Clone, Debug, Serialize)]
pub struct InstrumentErrors {
    /// Drawn from the declaration (`true`) or nominal (`false`).
    pub drawn: bool,
    /// The scenario's seed (another seed draws another instrument).
    pub seed: u64,
    /// Pressure offset, Pa.
    pub pressure_offset_pa: f64,
    /// Pressure span (gain) error, relative.
    pub pressure_span_error: f64,
    /// Pressure offset drift, Pa per year.
    pub pressure_offset_drift_pa_per_year: f64,
    /// Pressure span drift, relative per year.
    pub pressure_span_drift_per_year: f64,
    /// Pressure noise, standard deviation, Pa.
    pub pressure_noise_pa: f64,
    /// Temperature offset, K.
    pub temperature_offset_k: f64,
    /// Temperature gain error about 0 °C, relative.
    pub temperature_gain_error: f64,
    /// Temperature offset drift, K per year.
    pub temperature_drift_k_per_year: f64,
    /// When the pressure sensor's drifts begin, s from the start.
    pub pressure_drift_start_s: f64,
    /// When the temperature sensor's drift begins, s from the start.
    pub temperature_drift_start_s: f64,
    /// Temperature noise, standard deviation, K.
    pub temperature_noise_k: f64,
    /// Where the temperature sensor sits: `wall` or `gas`.
    pub temperature_mount: &'static str,
    /// The temperature sensor's own time constant, s.
    pub temperature_time_constant_s: f64,
    /// The lag the gauge declares for its temperature reading, u(τ), s.
    pub temperature_lag_declared_s: f64,
    /// The true water capacity, m³.
    pub capacity_true_m3: f64,
    /// The water capacity the gauge is told, m³.
    pub capacity_told_m3: f64,
    /// capacity_told / capacity_true − 1.
    pub capacity_error_fraction: f64,
}

impl InstrumentErrors {
    /// The instrument of a scenario.
    pub fn of(sc: &Scenario) -> InstrumentErrors {
        let (p, t) = (&sc.pressure, &sc.temperature);
        let told = sc.gauge.setup.tank.water_capacity_m3;
        let truth = sc.tank.water_capacity_m3;
        InstrumentErrors {
            drawn: sc.source.gauge.instrument == "drawn",
            seed: sc.source.seed,
            pressure_offset_pa: p.offset_pa,
            pressure_span_error: p.span_error,
            pressure_offset_drift_pa_per_year: p.offset_drift_pa_per_year,
            pressure_span_drift_per_year: p.span_drift_per_year,
            pressure_noise_pa: p.noise_pa,
            temperature_offset_k: t.offset_k,
            temperature_gain_error: t.gain_error,
            temperature_drift_k_per_year: t.drift_k_per_year,
            pressure_drift_start_s: p.drift_start_s,
            temperature_drift_start_s: t.drift_start_s,
            temperature_noise_k: t.noise_k,
            temperature_mount: match t.mount {
                Mount::Wall => "wall",
                Mount::Gas => "gas",
            },
            temperature_time_constant_s: t.time_constant_s,
            temperature_lag_declared_s: sc.gauge.track.uncertainty.temperature_lag.0 as f64 / 1e3,
            capacity_true_m3: truth,
            capacity_told_m3: told,
            capacity_error_fraction: told / truth - 1.0,
        }
    }

    /// The relative content error the static errors give at a true state
    /// (first order): capacity, pressure and temperature parts. `c_p`,
    /// `c_t`: ∂ln ρ/∂ln p and ∂ln ρ/∂ln T of the gas there; `t_s` since
    /// the start (drifts, from their own starts).
    fn content_error(&self, p_pa: f64, t_k: f64, c_p: f64, c_t: f64, t_s: f64) -> [f64; 3] {
        let years = crate::sensors::drift_years(t_s, self.pressure_drift_start_s);
        let dp = p_pa * (self.pressure_span_error + self.pressure_span_drift_per_year * years)
            + self.pressure_offset_pa
            + self.pressure_offset_drift_pa_per_year * years;
        let dt = self.temperature_offset_k
            + self.temperature_drift_k_per_year
                * crate::sensors::drift_years(t_s, self.temperature_drift_start_s)
            + self.temperature_gain_error * (t_k - ZERO_CELSIUS_K);
        [
            self.capacity_error_fraction,
            c_p * dp / p_pa,
            c_t * dt / t_k,
        ]
    }
}

/// The mean content error the instrument's static errors explain (JSON
/// `expected_bias`): see the module documentation.
#[derive(Clone, Copy, Debug, Serialize)]
pub struct ExpectedBias {
    /// From the water capacity the gauge is told.
    pub capacity_fraction: f64,
    /// From the pressure offset and span error (and their drifts).
    pub pressure_fraction: f64,
    /// From the temperature offset and gain error (and drift).
    pub temperature_fraction: f64,
    /// The sum: what the instrument explains of `mean_error_fraction`.
    pub total_fraction: f64,
}

/// The scores of a run (the JSON summary).
#[derive(Clone, Debug, Serialize)]
pub struct Summary {
    /// Scenario name.
    pub scenario: String,
    /// Scenario title.
    pub title: String,
    /// Gas (a mixture: its composition in the `--gas` form).
    pub gas: String,
    /// Mole fractions by component (a pure gas: itself, 1).
    pub composition: std::collections::BTreeMap<String, f64>,
    /// The gauge: `fixed` or `float`.
    pub backend: String,
    /// The gauge's gas model.
    pub model: String,
    /// Simulated time, s.
    pub duration_s: f64,
    /// Samples taken.
    pub samples: u64,
    /// Samples per second of wall time.
    pub samples_per_second: f64,
    /// Wall time, s.
    pub wall_time_s: f64,
    /// Physics steps and equation-of-state right-hand sides evaluated.
    pub physics_steps: u64,
    /// Right-hand side evaluations of the physics.
    pub physics_evaluations: u64,
    /// Samples judged (see the module documentation).
    pub judged_samples: u64,
    /// Largest |content error| / true content, judged samples.
    pub max_abs_error_fraction: Option<f64>,
    /// Mean content error / true content (bias), judged samples.
    pub mean_error_fraction: Option<f64>,
    /// Rms content error / true content, judged samples.
    pub rms_error_fraction: Option<f64>,
    /// Largest |content error| / true content over every sample with an
    /// estimate (fills and faults included).
    pub max_abs_error_fraction_all: Option<f64>,
    /// Share of judged samples whose k = 2 interval holds the true mass.
    pub uncertainty_coverage: Option<f64>,
    /// Largest |content error| / U(m) (k = 2), judged samples: above 1 the
    /// interval missed the truth; a drawn instrument is beyond 2 (4 standard
    /// uncertainties) with a probability of about 1e-4 if the declared
    /// uncertainties hold.
    pub max_error_over_uncertainty: Option<f64>,
    /// Median U(m)/m, judged samples (once a minute).
    pub median_relative_uncertainty: Option<f64>,
    /// Start of the first leak, s (null: no leak).
    pub leak_started_s: Option<f64>,
    /// Time from the first leak's start to the first leak alarm, s (null:
    /// none found).
    pub leak_detected_after_s: Option<f64>,
    /// Alarm raises the truth does not justify.
    pub false_alarms: u64,
    /// Minutes judged for time to empty.
    pub time_to_empty_minutes: u64,
    /// Median |relative error| of the expected time to empty.
    pub time_to_empty_median_error: Option<f64>,
    /// Largest |relative error| of the expected time to empty.
    pub time_to_empty_max_error: Option<f64>,
    /// Share of judged minutes whose earliest … latest holds the truth.
    pub time_to_empty_coverage: Option<f64>,
    /// Median true outflow over the judged minutes, kg/h.
    pub time_to_empty_outflow_kg_h: Option<f64>,
    /// Median true time to the reserve over the judged minutes, s.
    pub time_to_empty_true_median_s: Option<f64>,
    /// Median U(rate)/|rate| (k = 2) the gauge stated in the judged minutes.
    pub time_to_empty_rate_uncertainty: Option<f64>,
    /// The instrument under test.
    pub instrument: InstrumentErrors,
    /// The mean content error the instrument's static errors explain
    /// (`null`: no judged sample).
    pub expected_bias: Option<ExpectedBias>,
    /// The first leak's loss per day at its start, as the scenario states it
    /// (`null`: no leak, or a leak given by its area).
    pub leak_loss_per_day: Option<f64>,
    /// Regulated draws (`[[draw]]`) in the scenario.
    pub draws: usize,
    /// True mass at the start and the end, kg.
    pub mass_start_kg: f64,
    /// True mass at the end, kg.
    pub mass_end_kg: f64,
    /// True rated content (reference equation at the rated state), kg.
    pub rated_mass_true_kg: f64,
    /// Largest and smallest true gas temperature, K.
    pub gas_temperature_max_k: f64,
    /// Smallest true gas temperature, K.
    pub gas_temperature_min_k: f64,
    /// Largest true pressure, Pa.
    pub pressure_max_pa: f64,
    /// The alarm timeline.
    pub alarms: Vec<TimelineEvent>,
    /// Cautions.
    pub caution: String,
}

/// Everything a run produced.
#[derive(Clone, Debug)]
pub struct RunResult {
    /// The scores.
    pub summary: Summary,
    /// The recorded time series.
    pub trace: Vec<TracePoint>,
}

/// How to run.
#[derive(Clone, Copy, Debug)]
pub struct RunOptions {
    /// The gauge.
    pub backend: BackendKind,
    /// Record a trace point every this many seconds (0: none).
    pub trace_every_s: f64,
    /// Show a progress bar (only drawn on a terminal, and only with the
    /// `progress` feature).
    pub progress: bool,
}

impl Default for RunOptions {
    fn default() -> Self {
        RunOptions {
            backend: BackendKind::Fixed,
            trace_every_s: 60.0,
            progress: false,
        }
    }
}

/// Runs one scenario.
pub fn run(sc: &Scenario, opts: &RunOptions) -> Result<RunResult, Error> {
    let backend = opts.backend.build(sc)?;
    run_with(sc, backend, opts)
}

/// Runs one scenario on a given gauge.
pub fn run_with(
    sc: &Scenario,
    mut gauge: Box<dyn Backend>,
    opts: &RunOptions,
) -> Result<RunResult, Error> {
    let started = std::time::Instant::now();
    let mut sim = Simulator::new(sc.plant.clone())?;
    let mut sensors = SensorPair::new(
        sc.pressure,
        sc.temperature,
        sc.faults.clone(),
        sc.plant.weather.pressure_pa,
        sc.seed ^ 0x5E45_0A5E,
    )?;
    let rated_true = true_rated_mass(sc)?;
    let n = (sc.duration_s * 1e3 / sc.interval_ms as f64).floor() as u64;
    let trace_every = if opts.trace_every_s > 0.0 {
        ((opts.trace_every_s * 1e3 / sc.interval_ms as f64).round() as u64).max(1)
    } else {
        u64::MAX
    };
    let bar = Progress::new(opts.progress, n + 1, &sc.name);
    let mut score = Scorer::new(sc, rated_true);
    let mut trace = Vec::new();
    let mut first_mass = None;
    let mut last = Truth::default();
    let mut trace_in = 0u64;
    for i in 0..=n {
        let ms = i * sc.interval_ms;
        let t = ms as f64 / 1e3;
        let truth = sim.truth(t)?;
        let codes = sensors.sample(&truth)?;
        let r = gauge.sample(Instant(ms), &codes)?;
        first_mass.get_or_insert(truth.mass_kg);
        score.add(ms, &truth, &r, &sensors);
        // i % trace_every == 0, counted down (no division per sample).
        if trace_in == 0 {
            trace_in = trace_every;
            let mut tp = point(&truth, &r);
            tp.ambient_temperature_k = sim.ambient_k(t);
            trace.push(tp);
        }
        trace_in -= 1;
        if i % 65_536 == 0 {
            bar.at(i);
        }
        last = truth;
    }
    bar.finish();
    let wall = started.elapsed().as_secs_f64();
    let summary = score.finish(
        sc,
        gauge.name(),
        n + 1,
        wall,
        (sim.steps, sim.evaluations),
        (first_mass.unwrap_or(0.0), last.mass_kg),
    );
    Ok(RunResult { summary, trace })
}

/// The progress bar of a run: drawn with indicatif when the `progress`
/// feature is on (and only on a terminal), nothing otherwise.
struct Progress {
    #[cfg(feature = "progress")]
    bar: Option<indicatif::ProgressBar>,
}

impl Progress {
    #[cfg_attr(not(feature = "progress"), allow(unused_variables))]
    fn new(on: bool, len: u64, name: &str) -> Progress {
        #[cfg(feature = "progress")]
        {
            let bar = on.then(|| {
                let b = indicatif::ProgressBar::new(len);
                if let Ok(style) = indicatif::ProgressStyle::with_template(
                    "{prefix} [{bar:40}] {percent:>3}% simulated, {eta} left",
                ) {
                    b.set_style(style.progress_chars("=> "));
                }
                b.set_prefix(name.to_string());
                b
            });
            Progress { bar }
        }
        #[cfg(not(feature = "progress"))]
        Progress {}
    }

    #[cfg_attr(not(feature = "progress"), allow(unused_variables))]
    fn at(&self, i: u64) {
        #[cfg(feature = "progress")]
        if let Some(b) = &self.bar {
            b.set_position(i);
        }
    }

    fn finish(self) {
        #[cfg(feature = "progress")]
        if let Some(b) = self.bar {
            b.finish_and_clear();
        }
    }
}

fn point(t: &Truth, r: &Reading) -> TracePoint {
    TracePoint {
        t_s: t.t_s,
        pressure_true_pa: t.pressure_pa,
        pressure_read_pa: r.pressure_pa,
        gas_temperature_k: t.gas_k,
        wall_temperature_k: t.wall_k,
        ambient_temperature_k: t.ambient_k,
        temperature_read_k: r.temperature_k,
        mass_true_kg: t.mass_kg,
        mass_gauge_kg: r.mass_kg,
        u_mass_kg: r.u_mass_kg,
        fill_fraction: r.fill_fraction,
        rate_kg_h: r.rate_kg_h,
        true_outflow_kg_h: t.outflow_kg_s * 3600.0,
        time_to_empty_s: r.time_to_empty_s.map(|x| x.0),
        loss_fraction_per_day: r.loss_fraction_per_day,
        status: r.status.bits(),
        time_to_empty_withheld: r.time_to_empty_withheld.map(|w| w.name()),
    }
}

/// The gas specification of a core gas value (a mixture the scenario
/// registered; an unknown one reads as its own name).
pub fn spec_of(gas: isochor_core::Gas) -> GasSpec {
    Fluid::for_gas(gas).map_or(GasSpec::Pure(gas), |f| f.spec())
}

/// The true rated content: the reference equation of state at the rated
/// pressure and temperature, in the vessel's volume there.
pub fn true_rated_mass(sc: &Scenario) -> Result<f64, Error> {
    let t = &sc.tank;
    let s = Fluid::for_gas(sc.gas)?.state(t.rated_pressure_pa, t.rated_temperature_k)?;
    let v = t.water_capacity_m3
        * (1.0
            + t.elastic_expansion_per_mpa * 1e-6 * (t.rated_pressure_pa - STANDARD_ATMOSPHERE_PA));
    Ok(s.density_kg_m3 * v)
}

/// Per-minute record for the time-to-empty score.
#[derive(Clone, Copy)]
struct Minute {
    mass_kg: f64,
    outflow_kg_s: f64,
    tte: Option<(f64, f64, Option<f64>)>,
    /// U(rate)/|rate| where the gauge states a time to empty.
    rate_u: Option<f64>,
}

struct Scorer {
    rated_true: f64,
    limits: isochor_core::alarm::float::Limits,
    reserve_fraction: f64,
    n_judged: u64,
    n_covered: u64,
    max_err: f64,
    max_err_over_u: f64,
    max_err_all: f64,
    any_all: bool,
    sum_err: f64,
    sum_sq: f64,
    rel_u: Vec<f32>,
    leak_start: Option<f64>,
    leak_found: Option<f64>,
    events: Vec<TimelineEvent>,
    false_alarms: u64,
    minutes: Vec<Minute>,
    last_fault_s: f64,
    /// The last sample with a ramp fault in effect, s.
    last_ramp_s: f64,
    t_gas: (f64, f64),
    p_max: f64,
    interval_ms: u64,
    instrument: InstrumentErrors,
    /// The reference equation of the gas or mixture (`None`: a mixture
    /// this process has not met; no expected bias then).
    eos: Option<Fluid>,
    /// Sums of the expected content error (capacity, pressure, temperature)
    /// over judged minutes, and their count.
    bias_sum: [f64; 3],
    bias_n: u64,
    /// The last sensitivities (c_p, c_T) and the true (p, T) they were
    /// evaluated at: the reference equation costs ~2e5 instructions a call,
    /// and c_p, c_T change little until p moves by 1 % or T by 0.5 K.
    sensitivities: Option<(f64, f64, f64, f64)>,
}

impl Scorer {
    fn new(sc: &Scenario, rated_true: f64) -> Scorer {
        Scorer {
            rated_true,
            limits: sc.gauge.track.limits,
            reserve_fraction: sc.gauge.track.reserve_fraction,
            n_judged: 0,
            n_covered: 0,
            max_err: 0.0,
            max_err_over_u: 0.0,
            max_err_all: 0.0,
            any_all: false,
            sum_err: 0.0,
            sum_sq: 0.0,
            rel_u: Vec::new(),
            // A leak the scenario starts after the end of this run (a
            // shortened one) is not part of it.
            leak_start: sc
                .leak_starts_s
                .iter()
                .copied()
                .filter(|&s| s < sc.duration_s)
                .reduce(f64::min),
            leak_found: None,
            events: Vec::new(),
            false_alarms: 0,
            minutes: Vec::new(),
            last_fault_s: f64::NEG_INFINITY,
            last_ramp_s: f64::NEG_INFINITY,
            t_gas: (f64::INFINITY, f64::NEG_INFINITY),
            p_max: 0.0,
            interval_ms: sc.interval_ms,
            instrument: InstrumentErrors::of(sc),
            eos: Fluid::for_gas(sc.gas).ok(),
            bias_sum: [0.0; 3],
            bias_n: 0,
            sensitivities: None,
        }
    }

    fn add(&mut self, ms: u64, truth: &Truth, r: &Reading, sensors: &SensorPair) {
        let t = truth.t_s;
        let mut ramp = false;
        for f in sensors.faults() {
            if f.active(t) {
                self.last_fault_s = t;
                ramp |= f.kind == FaultKind::Ramp;
            }
        }
        if ramp {
            self.last_ramp_s = t;
        }
        self.t_gas = (self.t_gas.0.min(truth.gas_k), self.t_gas.1.max(truth.gas_k));
        self.p_max = self.p_max.max(truth.pressure_pa);
        let minute = ms % 60_000 < self.interval_ms;
        let flagged = r
            .status
            .intersects(Status::NOT_SETTLED | Status::SENSOR_FAULT | Status::SENSOR_RANGE);
        let above_reserve = truth.mass_kg > self.reserve_fraction * self.rated_true;
        if let Some(m) = r.mass_kg
            && truth.mass_kg > 0.0
        {
            let e = (m - truth.mass_kg) / truth.mass_kg;
            self.max_err_all = self.max_err_all.max(e.abs());
            self.any_all = true;
            if let (Some(u), false, true) = (r.u_mass_kg, flagged || ramp, above_reserve) {
                self.n_judged += 1;
                self.max_err = self.max_err.max(e.abs());
                self.sum_err += e;
                self.sum_sq += e * e;
                if (m - truth.mass_kg).abs() <= u {
                    self.n_covered += 1;
                }
                if u > 0.0 {
                    self.max_err_over_u = self.max_err_over_u.max((m - truth.mass_kg).abs() / u);
                }
                if minute {
                    self.rel_u.push((u / truth.mass_kg) as f32);
                    self.expect(truth);
                }
            }
        }
        if minute {
            let rate_u = r
                .rate_kg_h
                .zip(r.u_rate_kg_h)
                .filter(|(x, _)| *x != 0.0)
                .map(|(x, u)| u / x.abs());
            let confident = rate_u.is_some_and(|u| u <= 0.5);
            self.minutes.push(Minute {
                mass_kg: truth.mass_kg,
                outflow_kg_s: truth.outflow_kg_s,
                tte: r.time_to_empty_s.filter(|_| confident),
                rate_u: rate_u.filter(|_| confident),
            });
        }
        for ev in r.events.iter() {
            self.judge(&ev, truth);
        }
    }

    /// Adds the content error the instrument's static errors give at this
    /// true state (a judged minute).
    fn expect(&mut self, truth: &Truth) {
        let (p, t) = (truth.pressure_pa, truth.gas_k);
        let (c_p, c_t) = match self.sensitivities {
            Some((p0, t0, c_p, c_t)) if (p - p0).abs() <= 0.01 * p0 && (t - t0).abs() <= 0.5 => {
                (c_p, c_t)
            }
            _ => {
                let Some(Ok(s)) = self.eos.as_ref().map(|e| e.state(p, t)) else {
                    return;
                };
                if s.density_mol_m3 <= 0.0 {
                    return;
                }
                let c_p = p / s.density_mol_m3 * s.drho_dp_mol_m3_pa;
                let c_t = t / s.density_mol_m3 * s.drho_dt_mol_m3_k;
                self.sensitivities = Some((p, t, c_p, c_t));
                (c_p, c_t)
            }
        };
        let e = self
            .instrument
            .content_error(truth.pressure_pa, truth.gas_k, c_p, c_t, truth.t_s);
        for (sum, x) in self.bias_sum.iter_mut().zip(e) {
            *sum += x;
        }
        self.bias_n += 1;
    }

    fn judge(&mut self, ev: &AlarmEvent, truth: &Truth) {
        let t = truth.t_s;
        let justified = if ev.raised {
            let f_true = truth.mass_kg / self.rated_true;
            let lim = &self.limits;
            let truly = match ev.kind {
                AlarmKind::NotSettled => true,
                AlarmKind::Leak => self.leak_start.is_some_and(|s| t >= s),
                AlarmKind::SensorFault => t - self.last_fault_s <= 60.0,
                AlarmKind::LowContent => {
                    let left = (f_true - self.reserve_fraction).max(0.0) * self.rated_true;
                    let tte_h = if truth.outflow_kg_s > 0.0 {
                        left / truth.outflow_kg_s / 3600.0
                    } else {
                        f64::INFINITY
                    };
                    f_true <= lim.low_fraction + 0.02 || tte_h <= 1.5
                }
                AlarmKind::OverPressure => {
                    f_true >= lim.over_fill_fraction - 0.02
                        || truth.pressure_pa >= lim.pressure_max_pa - 0.01 * lim.pressure_max_pa
                }
                AlarmKind::OverTemperature => truth.gas_k >= lim.temperature_max_k - 2.0,
                AlarmKind::UnderTemperature => truth.gas_k <= lim.temperature_min_k + 2.0,
            };
            // A ramp fault in effect (or ended within the minute) explains
            // any raise (see the module documentation).
            let ok = truly || t - self.last_ramp_s <= 60.0;
            if ev.kind == AlarmKind::Leak
                && truly
                && self.leak_found.is_none()
                && let Some(s) = self.leak_start
            {
                self.leak_found = Some(t - s);
            }
            if !ok {
                self.false_alarms += 1;
            }
            if ev.kind == AlarmKind::NotSettled {
                None
            } else {
                Some(ok)
            }
        } else {
            None
        };
        self.events.push(TimelineEvent {
            t_s: t,
            alarm: ev.kind.name(),
            change: if ev.raised { "raised" } else { "cleared" },
            justified,
        });
    }

    fn finish(
        mut self,
        sc: &Scenario,
        backend: &str,
        samples: u64,
        wall: f64,
        physics: (u64, u64),
        mass: (f64, f64),
    ) -> Summary {
        let n = self.n_judged as f64;
        let judged = self.n_judged > 0;
        self.rel_u.sort_by(f32::total_cmp);
        // Time to empty at the true present rate (see the module documentation).
        let reserve = self.reserve_fraction * self.rated_true;
        let mut tte_err = Vec::new();
        let mut tte_cov = 0u64;
        let mut tte_outflow = Vec::new();
        let mut tte_true = Vec::new();
        let mut tte_rate_u = Vec::new();
        const WINDOW: usize = 32;
        for (i, m) in self.minutes.iter().enumerate().skip(WINDOW) {
            let Some((e, lo, hi)) = m.tte else { continue };
            let Some(w) = self.minutes.get(i + 1 - WINDOW..=i) else {
                continue;
            };
            let mean = w.iter().map(|x| x.outflow_kg_s).sum::<f64>() / WINDOW as f64;
            let steady = mean > 0.0
                && w.iter()
                    .all(|x| (x.outflow_kg_s - mean).abs() <= 0.05 * mean);
            if !steady {
                continue;
            }
            let truth = (m.mass_kg - reserve) / mean;
            if truth > 3600.0 {
                tte_err.push((e - truth).abs() / truth);
                tte_outflow.push(mean * 3600.0);
                tte_true.push(truth);
                tte_rate_u.extend(m.rate_u);
                if lo <= truth && hi.is_none_or(|h| truth <= h) {
                    tte_cov += 1;
                }
            }
        }
        tte_err.sort_by(f64::total_cmp);
        let median = |mut v: Vec<f64>| {
            v.sort_by(f64::total_cmp);
            v.get(v.len() / 2).copied()
        };
        let expected_bias = (self.bias_n > 0).then(|| {
            let k = self.bias_n as f64;
            let [c, p, t] = self.bias_sum.map(|x| x / k);
            ExpectedBias {
                capacity_fraction: c,
                pressure_fraction: p,
                temperature_fraction: t,
                total_fraction: c + p + t,
            }
        });
        let leak_loss_per_day = sc.source.leak.first().and_then(|l| l.loss_per_day);
        let gauge_model = match sc.gauge.model {
            super::gauge::ModelKind::Device => "device",
            super::gauge::ModelKind::Ideal => "ideal",
            super::gauge::ModelKind::Reference => "reference",
        };
        Summary {
            scenario: sc.name.clone(),
            title: sc.title.clone(),
            gas: spec_of(sc.gas).to_string(),
            composition: spec_of(sc.gas)
                .composition_map()
                .into_iter()
                .map(|(n, f)| (n.to_string(), f))
                .collect(),
            backend: backend.to_string(),
            model: gauge_model.to_string(),
            duration_s: sc.duration_s,
            samples,
            samples_per_second: samples as f64 / wall.max(1e-9),
            wall_time_s: wall,
            physics_steps: physics.0,
            physics_evaluations: physics.1,
            judged_samples: self.n_judged,
            max_abs_error_fraction: judged.then_some(self.max_err),
            mean_error_fraction: judged.then(|| self.sum_err / n),
            rms_error_fraction: judged.then(|| (self.sum_sq / n).sqrt()),
            max_abs_error_fraction_all: self.any_all.then_some(self.max_err_all),
            uncertainty_coverage: judged.then(|| self.n_covered as f64 / n),
            max_error_over_uncertainty: judged.then_some(self.max_err_over_u),
            median_relative_uncertainty: self
                .rel_u
                .get(self.rel_u.len() / 2)
                .map(|&x| f64::from(x)),
            leak_started_s: self.leak_start,
            leak_detected_after_s: self.leak_found,
            false_alarms: self.false_alarms,
            time_to_empty_minutes: tte_err.len() as u64,
            time_to_empty_median_error: tte_err.get(tte_err.len() / 2).copied(),
            time_to_empty_max_error: tte_err.last().copied(),
            time_to_empty_coverage: (!tte_err.is_empty())
                .then(|| tte_cov as f64 / tte_err.len() as f64),
            time_to_empty_outflow_kg_h: median(tte_outflow),
            time_to_empty_true_median_s: median(tte_true),
            time_to_empty_rate_uncertainty: median(tte_rate_u),
            instrument: self.instrument,
            expected_bias,
            leak_loss_per_day,
            draws: sc.source.draw.len(),
            mass_start_kg: mass.0,
            mass_end_kg: mass.1,
            rated_mass_true_kg: self.rated_true,
            gas_temperature_max_k: self.t_gas.1,
            gas_temperature_min_k: self.t_gas.0,
            pressure_max_pa: self.p_max,
            alarms: self.events,
            caution: isochor_eos::safety::paragraph_for(&spec_of(sc.gas)),
        }
    }
}
