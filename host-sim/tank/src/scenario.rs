//! Scenario files (TOML, format `isochor-scenario 1`): the tank, its
//! weather and use, the sensors and their faults, and the gauge under test.
//! The format is documented in docs/simulator.md ("Scenario files"); the
//! built-in scenarios are in `host-sim/tank/scenarios/`.
//!
//! Quantities carry their units as text (`"200bar"`, `"15C"`, `"50L"`,
//! `"7d"`, `"0.2kg/h"`); engineering constants are plain numbers with the
//! unit in the key (`wall_mass_kg`). Unknown keys are refused, so a typo
//! never silently falls back to a default.

use super::gauge::{GaugeConfig, ModelKind};
use super::physics::{
    self, Blowdown, Cylinder, Draw, Fill, Front, Leak, LeakSize, MAX_CYLINDERS, Manifold, Plant,
    Vessel, Weather,
};
use super::sensors::{
    self, Channel, Fault, FaultKind, Mount, PressureFrontEnd, PressureSensor, TemperatureFrontEnd,
    TemperatureSensor,
};
use crate::Error;
use isochor_core::constants::{BAR_PA, STANDARD_ATMOSPHERE_PA, ZERO_CELSIUS_K};
use isochor_core::sensor::PressureKind;
use isochor_core::sensor::current_loop::LoopConfig;
use isochor_core::sensor::ntc::NtcConfig;
use isochor_core::sensor::plausibility::PlausibilityConfig;
use isochor_core::sensor::resistive::Circuit;
use isochor_core::sensor::rtd::RtdConfig;
use isochor_core::time::Millis;
use isochor_core::track::LeakMode;
use isochor_core::track::float::TrackConfig;
use isochor_core::uncertainty::float::UncertaintyConfig;
use isochor_core::{Gas, Setup, Tank};
use isochor_eos::composition::GasSpec;
use isochor_eos::fluid::Fluid;
use isochor_eos::units;
use rand::rngs::ChaCha8Rng;
use rand::{RngExt, SeedableRng};
use serde::Deserialize;

/// The format line every scenario file carries.
pub const FORMAT: &str = "isochor-scenario 1";

/// The built-in scenarios: (name, TOML text). The first is the demo.
pub const BUILTIN: [(&str, &str); 16] = [
    (
        "workshop-leak",
        include_str!("../scenarios/workshop-leak.toml"),
    ),
    (
        "hydrogen-fast-fill",
        include_str!("../scenarios/hydrogen-fast-fill.toml"),
    ),
    (
        "helium-party",
        include_str!("../scenarios/helium-party.toml"),
    ),
    (
        "oxygen-clinic",
        include_str!("../scenarios/oxygen-clinic.toml"),
    ),
    (
        "methane-cold-night",
        include_str!("../scenarios/methane-cold-night.toml"),
    ),
    (
        "contractor-busy-days",
        include_str!("../scenarios/contractor-busy-days.toml"),
    ),
    (
        "run-to-empty",
        include_str!("../scenarios/run-to-empty.toml"),
    ),
    (
        "sunny-rack-weather",
        include_str!("../scenarios/sunny-rack-weather.toml"),
    ),
    (
        "quiet-sensor-leak",
        include_str!("../scenarios/quiet-sensor-leak.toml"),
    ),
    (
        "dead-sensor-draw",
        include_str!("../scenarios/dead-sensor-draw.toml"),
    ),
    (
        "shielding-gas-cold-week",
        include_str!("../scenarios/shielding-gas-cold-week.toml"),
    ),
    (
        "ngv-fast-fill",
        include_str!("../scenarios/ngv-fast-fill.toml"),
    ),
    (
        "methane-store-winter",
        include_str!("../scenarios/methane-store-winter.toml"),
    ),
    (
        "transmitter-ramp",
        include_str!("../scenarios/transmitter-ramp.toml"),
    ),
    (
        "workshop-odd-days",
        include_str!("../scenarios/workshop-odd-days.toml"),
    ),
    (
        "lab-argon-manifold",
        include_str!("../scenarios/lab-argon-manifold.toml"),
    ),
];

/// A scenario file as written.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ScenarioFile {
    /// Must be [`FORMAT`].
    pub format: String,
    /// Short name (file names of the outputs).
    pub name: String,
    /// One line for people.
    pub title: String,
    /// Length of the run (`"7d"`).
    pub duration: String,
    /// Sample interval of the gauge (`"1s"`, default).
    #[serde(default = "default_interval")]
    pub sample_interval: String,
    /// Seed of every random part (weather, noise, drawn instrument errors,
    /// irregular draw schedules).
    #[serde(default)]
    pub seed: u64,
    /// The weekday of the run's first day, for `[[draw]] weekdays`
    /// (`"mon"` … `"sun"`, default `"mon"`).
    #[serde(default = "default_weekday")]
    pub start_weekday: String,
    /// The tank.
    pub tank: TankSection,
    /// The weather.
    pub ambient: AmbientSection,
    /// Scripted weather fronts on top of the drawn weather.
    #[serde(default)]
    pub front: Vec<FrontSection>,
    /// Regulated draws.
    #[serde(default)]
    pub draw: Vec<DrawSection>,
    /// Leaks.
    #[serde(default)]
    pub leak: Vec<LeakSection>,
    /// Blow-downs (fast draws through an open valve).
    #[serde(default)]
    pub blowdown: Vec<BlowdownSection>,
    /// Fills.
    #[serde(default)]
    pub fill: Vec<FillSection>,
    /// The sensors.
    pub sensors: SensorsSection,
    /// Sensor faults.
    #[serde(default)]
    pub fault: Vec<FaultSection>,
    /// Several cylinders on one manifold (two or more; none: the single
    /// `[tank]`, whose keys are then the cylinders' defaults).
    #[serde(default)]
    pub cylinder: Vec<CylinderSection>,
    /// Cylinder valves opened or closed at chosen times.
    #[serde(default)]
    pub valve: Vec<ValveSection>,
    /// The gauge under test.
    #[serde(default)]
    pub gauge: GaugeSection,
}

fn default_interval() -> String {
    "1s".into()
}
fn default_weekday() -> String {
    "mon".into()
}

/// The weekdays, day 0 of a week first.
const WEEKDAYS: [&str; 7] = ["mon", "tue", "wed", "thu", "fri", "sat", "sun"];

/// Days in the longest run (two years), for irregular draw schedules.
const SCHEDULE_DAYS: usize = 2 * 366 + 1;

fn weekday(input: &str, what: &'static str) -> Result<usize, Error> {
    let w = input.trim().to_ascii_lowercase();
    WEEKDAYS.iter().position(|d| *d == w).ok_or_else(|| {
        bad(
            what,
            format!("'{input}': mon, tue, wed, thu, fri, sat or sun"),
        )
    })
}

/// The demand of each day of an irregular draw schedule, kg/s (see
/// [`DrawSection`]): days allowed by `days` and `weekdays` run with
/// probability `probability`, at a demand uniform in `lo … hi`. The draws
/// come from a generator of their own (the seed and the draw's index), two
/// per day in day order whatever the filters say, so a schedule depends on
/// the seed and the draw's own keys only, never on the weather or the
/// other draws.
fn day_demands(
    seed: u64,
    index: usize,
    allowed: impl Fn(usize) -> bool,
    probability: f64,
    lo: f64,
    hi: f64,
) -> Vec<f64> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed ^ 0xD7A0_5C4E_0000_0000 ^ index as u64);
    (0..SCHEDULE_DAYS)
        .map(|day| {
            let (u_on, u_flow) = (rng.random::<f64>(), rng.random::<f64>());
            if allowed(day) && u_on < probability {
                lo + (hi - lo) * u_flow
            } else {
                0.0
            }
        })
        .collect()
}

/// `[tank]`.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TankSection {
    /// Gas name, or a mixture as mole fractions
    /// (`"argon=82%,carbon_dioxide=18%"`, see `isochor_eos::composition`).
    pub gas: String,
    /// Water capacity (`"50L"`).
    pub water_capacity: String,
    /// Rated (service) pressure, absolute, at the rated temperature.
    pub rated_pressure: String,
    /// Temperature of the rating (default 15 °C).
    #[serde(default = "default_rated_temperature")]
    pub rated_temperature: String,
    /// Pressure at the start, absolute.
    pub pressure: String,
    /// Gas temperature at the start (default: the ambient then).
    pub temperature: Option<String>,
    /// Elastic volume expansion per bar (e.g. 1.2e-5).
    #[serde(default)]
    pub elastic_expansion_per_bar: f64,
    /// Volumetric thermal expansion per kelvin (e.g. 3.6e-5 for steel).
    #[serde(default)]
    pub thermal_expansion_per_k: f64,
    /// Mass of the wall, kg.
    pub wall_mass_kg: f64,
    /// Specific heat of the wall, J/(kg·K) (steel about 480).
    #[serde(default = "default_wall_cp")]
    pub wall_specific_heat_j_kg_k: f64,
    /// Length over diameter of the (cylindrical) vessel.
    #[serde(default = "default_ratio")]
    pub length_to_diameter: f64,
    /// Inner heat transfer coefficient, quiet gas, W/(m²·K).
    #[serde(default = "default_inner_htc")]
    pub inner_htc_w_m2_k: f64,
    /// Inner heat transfer coefficient during a fill, W/(m²·K).
    #[serde(default = "default_fill_htc")]
    pub fill_htc_w_m2_k: f64,
    /// Outer heat transfer coefficient (convection and radiation), W/(m²·K).
    #[serde(default = "default_outer_htc")]
    pub outer_htc_w_m2_k: f64,
    /// Share of the projected side area in the sun (0 … 1).
    #[serde(default)]
    pub sun_exposure: f64,
    /// Solar absorptivity of the surface (0 … 1).
    #[serde(default = "default_absorptivity")]
    pub absorptivity: f64,
}

fn default_rated_temperature() -> String {
    "15C".into()
}
fn default_wall_cp() -> f64 {
    480.0
}
fn default_ratio() -> f64 {
    4.0
}
fn default_inner_htc() -> f64 {
    10.0
}
fn default_fill_htc() -> f64 {
    250.0
}
fn default_outer_htc() -> f64 {
    8.0
}
fn default_absorptivity() -> f64 {
    0.6
}

/// `[ambient]`.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AmbientSection {
    /// Mean temperature (`"12C"`).
    pub mean: String,
    /// Day/night amplitude, ± (`"6K"`).
    pub swing: String,
    /// Warmest hour of the day (`"15:00"`).
    #[serde(default = "default_warmest")]
    pub warmest_at: String,
    /// Day-to-day standard deviation of the daily mean (`"2K"`).
    #[serde(default = "default_zero_k")]
    pub day_to_day: String,
    /// Day-to-day change of the amplitude, fraction (uniform ±).
    #[serde(default = "default_swing_spread")]
    pub swing_spread: f64,
    /// Barometric pressure.
    #[serde(default = "default_baro")]
    pub pressure: String,
    /// Peak solar irradiance on a clear day, W/m² (0: no sun).
    #[serde(default)]
    pub sun_peak_w_m2: f64,
    /// Sunrise (`"06:00"`).
    #[serde(default = "default_sunrise")]
    pub sunrise: String,
    /// Sunset (`"20:00"`).
    #[serde(default = "default_sunset")]
    pub sunset: String,
    /// Lowest daily clearness (0 … 1; 1: every day clear).
    #[serde(default = "default_clearness")]
    pub clearness_min: f64,
}

fn default_warmest() -> String {
    "15:00".into()
}
fn default_zero_k() -> String {
    "0K".into()
}
fn default_swing_spread() -> f64 {
    0.2
}
fn default_baro() -> String {
    "101.325kPa".into()
}
fn default_sunrise() -> String {
    "06:00".into()
}
fn default_sunset() -> String {
    "20:00".into()
}
fn default_clearness() -> f64 {
    0.5
}

/// `[[front]]`: a scripted weather front.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FrontSection {
    /// Start (`"5d12h"` is not accepted: `"132h"`).
    pub start: String,
    /// Change of the ambient temperature (`"-10K"`: a cold front).
    pub change: String,
    /// Time the change takes (default 3 h).
    #[serde(default = "default_front_over")]
    pub over: String,
}

fn default_front_over() -> String {
    "3h".into()
}

/// `[[draw]]`: a regulated draw.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DrawSection {
    /// Start (`"2d"`).
    #[serde(default = "default_zero_s")]
    pub start: String,
    /// End (default: the end of the run).
    pub end: Option<String>,
    /// Demand: `"0.5kg/h"`, `"2g/s"`, `"20sL/min"` (standard litres per
    /// minute at 15 °C, 101.325 kPa), `"1.2sm3/h"`.
    pub flow: String,
    /// Daily windows (`["08:00-12:00", "13:00-17:00"]`); none: all day.
    #[serde(default)]
    pub daily: Vec<String>,
    /// The regulator's lowest inlet pressure, absolute (default 5 bar).
    #[serde(default = "default_regulator")]
    pub min_pressure: String,
    /// Only on these days, counted from 0 (day n runs from n·24 h: `start =
    /// "3d"` is the start of day 3); none: every day.
    #[serde(default)]
    pub days: Vec<u32>,
    /// Only on these weekdays (`["mon", "thu"]`; day 0 is the scenario's
    /// `start_weekday`); none: every day.
    #[serde(default)]
    pub weekdays: Vec<String>,
    /// Each day the draw may run on (by `days` and `weekdays`), it runs with
    /// this probability (0 … 1), drawn from the scenario's seed (default 1).
    pub probability: Option<f64>,
    /// With it, each day's demand is drawn uniformly between `flow` and
    /// this (from the seed; same units as `flow`).
    pub flow_max: Option<String>,
}

fn default_zero_s() -> String {
    "0s".into()
}
fn default_regulator() -> String {
    "5bar".into()
}

/// `[[cylinder]]`: one cylinder of a manifolded group; every key but the
/// valve's defaults to `[tank]`'s.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CylinderSection {
    /// Water capacity (`"50L"`).
    pub water_capacity: Option<String>,
    /// Pressure at the start, absolute.
    pub pressure: Option<String>,
    /// Gas and wall temperature at the start.
    pub temperature: Option<String>,
    /// Mass of the wall, kg.
    pub wall_mass_kg: Option<f64>,
    /// Share of the projected side area in the sun (0 … 1).
    pub sun_exposure: Option<f64>,
    /// Effective area of its valve to the header (default `"3mm2"`).
    #[serde(default = "default_valve_area")]
    pub valve_area: String,
    /// Whether its valve is open at the start (default true).
    #[serde(default = "default_true")]
    pub open: bool,
    /// The gauge's temperature sensor is on this cylinder (at most one;
    /// default: the first).
    #[serde(default)]
    pub temperature_sensor: bool,
}

fn default_valve_area() -> String {
    "3mm2".into()
}
fn default_true() -> bool {
    true
}

/// `[[valve]]`: a cylinder's valve opened or closed at a time.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ValveSection {
    /// The cylinder, numbered from 1 in the order of the `[[cylinder]]`
    /// tables.
    pub cylinder: usize,
    /// When (`"40h"`).
    pub at: String,
    /// Opened (`true`) or closed (`false`).
    pub open: bool,
}

/// `[[leak]]`.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LeakSection {
    /// Start.
    pub start: String,
    /// Effective area (`"3e-5mm2"`); or give `loss_per_day`.
    pub area: Option<String>,
    /// Loss at the start, as a fraction of the content per day (0.005: 0.5 %
    /// a day; sets the area).
    pub loss_per_day: Option<f64>,
}

/// `[[blowdown]]`.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BlowdownSection {
    /// Start.
    pub start: String,
    /// Effective area of the open valve (`"1mm2"`).
    pub area: String,
    /// Stops at this pressure, absolute.
    pub to_pressure: String,
    /// Stops at the latest after this (default 1 h).
    #[serde(default = "default_hour")]
    pub max_duration: String,
}

fn default_hour() -> String {
    "1h".into()
}

/// `[[fill]]`.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FillSection {
    /// Start.
    pub start: String,
    /// Supply pressure, absolute.
    pub supply_pressure: String,
    /// Supply temperature.
    pub supply_temperature: String,
    /// Effective area of the fill line (`"2mm2"`).
    pub area: String,
    /// Stops when the tank reaches this pressure, absolute.
    pub to_pressure: String,
    /// Stops at the latest after this (default 1 h).
    #[serde(default = "default_hour")]
    pub max_duration: String,
}

/// `[sensors]`.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SensorsSection {
    /// The pressure channel.
    pub pressure: PressureSection,
    /// The temperature channel.
    pub temperature: TemperatureSection,
}

/// `[sensors.pressure]`.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PressureSection {
    /// `bridge` (ratiometric, absolute) or `loop` (4–20 mA, absolute).
    pub kind: String,
    /// Full scale, absolute (`"300bar"`).
    pub full_scale: String,
    /// Converter bits (default 24 for a bridge, 16 for a loop).
    pub adc_bits: Option<u8>,
    /// White noise, standard deviation (`"0.02bar"`).
    #[serde(default = "default_zero_bar")]
    pub noise: String,
    /// Offset (added to what the drawn instrument has).
    #[serde(default = "default_zero_bar")]
    pub offset: String,
    /// Span error, relative.
    #[serde(default)]
    pub span_error: f64,
    /// Offset drift per year.
    #[serde(default = "default_zero_bar")]
    pub offset_drift_per_year: String,
    /// Span drift per year, relative.
    #[serde(default)]
    pub span_drift_per_year: f64,
    /// When the drifts begin (`"0s"`, default: at the start; e.g. `"3d"`:
    /// a sensor aged or damaged on day three).
    #[serde(default = "default_zero_s")]
    pub drift_start: String,
}

fn default_zero_bar() -> String {
    "0bar".into()
}

/// `[sensors.temperature]`.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TemperatureSection {
    /// `pt100`, `pt1000` (series reference resistor, 16 bits) or `ntc10k`
    /// (beta 3950 K, divider, 16 bits).
    pub kind: String,
    /// `wall` or `gas`.
    #[serde(default = "default_mount")]
    pub mount: Mount,
    /// Its own thermal time constant (`"60s"`).
    #[serde(default = "default_tau")]
    pub time_constant: String,
    /// White noise, standard deviation (`"0.02K"`).
    #[serde(default = "default_zero_k")]
    pub noise: String,
    /// Offset (added to what the drawn instrument has).
    #[serde(default = "default_zero_k")]
    pub offset: String,
    /// Gain error about 0 °C, relative.
    #[serde(default)]
    pub gain_error: f64,
    /// Offset drift per year (`"0.1K"`).
    #[serde(default = "default_zero_k")]
    pub drift_per_year: String,
    /// When the drift begins (`"0s"`, default: at the start).
    #[serde(default = "default_zero_s")]
    pub drift_start: String,
}

fn default_mount() -> Mount {
    Mount::Wall
}
fn default_tau() -> String {
    "30s".into()
}

/// `[[fault]]`.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FaultSection {
    /// `pressure` or `temperature`.
    pub channel: Channel,
    /// `open`, `short`, `stuck`, `spikes`, `failure_low`, `failure_high`,
    /// `ramp`.
    pub kind: FaultKind,
    /// Start.
    pub start: String,
    /// Duration (default: to the end of the run, a permanent fault).
    pub duration: Option<String>,
    /// Spikes per hour (spikes only; default 6).
    #[serde(default = "default_spikes")]
    pub spikes_per_hour: f64,
    /// Ramps only (required there): how far the reading ends up from the
    /// truth, a pressure difference (`"+30bar"`, `"-8bar"`) or a temperature
    /// difference (`"-8K"`) by the channel.
    pub to: Option<String>,
    /// Ramps only (required there): the time the reading takes to get
    /// there, linearly (`"2h"`; above 0).
    pub over: Option<String>,
}

fn default_spikes() -> f64 {
    6.0
}

/// `[gauge]`: the device under test and what it declares.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct GaugeSection {
    /// Gas model: `device` (default), `ideal`, `reference`.
    #[serde(default)]
    pub model: ModelKind,
    /// `standby` (default) or `in_use`.
    #[serde(default = "default_leak_mode")]
    pub leak_mode: String,
    /// Declared draw for in-use leak detection (none: learned).
    pub declared_draw: Option<String>,
    /// `drawn` (default): the instrument's pressure offset and gain, its
    /// temperature offset and the water capacity it is told are drawn from
    /// the declared uncertainties (seeded), on top of the `[sensors]`
    /// values; `nominal`: the `[sensors]` values only, capacity exact.
    #[serde(default = "default_instrument")]
    pub instrument: String,
    /// Declared standard uncertainty of pressure, fraction of full scale
    /// (default 0.25 % / √3).
    pub pressure_fs: Option<f64>,
    /// Declared standard uncertainty of pressure, fraction of reading
    /// (default 0.1 % / √3).
    pub pressure_reading: Option<f64>,
    /// Declared standard uncertainty of temperature (default `"0.5K"`).
    pub temperature: Option<String>,
    /// Declared relative standard uncertainty of the capacity (default 0.5 %).
    pub capacity: Option<f64>,
    /// Declared relative standard uncertainty of the gas model (default 0.1 %).
    pub model_uncertainty: Option<f64>,
    /// Declared standard uncertainty of the temperature lag (default 10 min).
    pub temperature_lag: Option<String>,
    /// The time constant with which the gas settles to what its
    /// temperature sensor reads (the tracker's settling time constant;
    /// default 30 min): for a sensor on the wall the vessel's gas–wall time
    /// constant at the rated content, for a sensor in the gas about its own
    /// (at least 1 min). It sizes the settling after fast fills and the
    /// gas–sensor term of the content's uncertainty (a draw cools the gas
    /// below a wall-mounted sensor; the gas trails its wall).
    pub settle_time_constant: Option<String>,
    /// `over_temperature` limit (default 50 °C, the storage limit of cylinder
    /// labels, see `Limits::for_tank`; e.g. `"85C"` for a hydrogen
    /// vehicle tank).
    pub temperature_max: Option<String>,
    /// Stuck check of the pressure channel: a converted value that does not
    /// move at all for this long is stuck (default 60 s; `"0s"` turns it
    /// off).
    #[serde(default = "default_stuck")]
    pub stuck_after: String,
    /// Stuck check of the temperature channel (default 6 h; `"0s"` turns it
    /// off). Much longer than the pressure's: a quiet temperature front end
    /// (noise at or below the code step, about 0.016 K for 16 bits) repeats
    /// its code for minutes on a working sensor, while any vessel in a room
    /// or outdoors moves by more than a code step within hours.
    #[serde(default = "default_temperature_stuck")]
    pub temperature_stuck_after: String,
}

fn default_leak_mode() -> String {
    "standby".into()
}
fn default_instrument() -> String {
    "drawn".into()
}
fn default_stuck() -> String {
    "60s".into()
}
fn default_temperature_stuck() -> String {
    "6h".into()
}

impl Default for GaugeSection {
    fn default() -> Self {
        GaugeSection {
            model: ModelKind::Device,
            leak_mode: default_leak_mode(),
            declared_draw: None,
            instrument: default_instrument(),
            pressure_fs: None,
            pressure_reading: None,
            temperature: None,
            capacity: None,
            model_uncertainty: None,
            temperature_lag: None,
            settle_time_constant: None,
            temperature_max: None,
            stuck_after: default_stuck(),
            temperature_stuck_after: default_temperature_stuck(),
        }
    }
}

/// A scenario ready to run.
#[derive(Clone, Debug)]
pub struct Scenario {
    /// Short name.
    pub name: String,
    /// One line for people.
    pub title: String,
    /// The gas.
    pub gas: Gas,
    /// Length, s.
    pub duration_s: f64,
    /// Sample interval, ms.
    pub interval_ms: u64,
    /// The physics.
    pub plant: Plant,
    /// The pressure sensor (with the drawn instrument's errors).
    pub pressure: PressureSensor,
    /// The temperature sensor.
    pub temperature: TemperatureSensor,
    /// Faults.
    pub faults: Vec<Fault>,
    /// The gauge's configuration.
    pub gauge: GaugeConfig,
    /// The true tank (the gauge may be told another capacity).
    pub tank: Tank,
    /// Seed of the sensor noise.
    pub seed: u64,
    /// Start times of the leaks, s (for scoring).
    pub leak_starts_s: Vec<f64>,
    /// The file it was built from.
    pub source: ScenarioFile,
}

impl Scenario {
    /// Reads a scenario from TOML text.
    pub fn from_toml(text: &str) -> Result<Scenario, Error> {
        let file: ScenarioFile =
            toml::from_str(text).map_err(|e| Error::Invalid(format!("scenario: {e}")))?;
        file.build()
    }

    /// A built-in scenario by name.
    pub fn builtin(name: &str) -> Result<Scenario, Error> {
        BUILTIN
            .iter()
            .find(|(n, _)| *n == name)
            .map(|(_, text)| Scenario::from_toml(text))
            .unwrap_or_else(|| {
                Err(Error::Invalid(format!(
                    "no built-in scenario '{name}' (built-in: {})",
                    BUILTIN.map(|b| b.0).join(", ")
                )))
            })
    }

    /// The same scenario cut to `duration_s` and with another seed: another
    /// weather, noise and — with `instrument = "drawn"` — another instrument
    /// drawn from the declared uncertainties.
    pub fn with(mut self, duration_s: Option<f64>, seed: Option<u64>) -> Scenario {
        if let Some(s) = seed {
            let mut file = self.source.clone();
            file.seed = s;
            let interval = self.interval_ms;
            if let Ok(sc) = file.build() {
                self = sc;
                self.interval_ms = interval;
            }
        }
        if let Some(d) = duration_s {
            self.duration_s = d;
        }
        self
    }
}

fn bad(what: &str, why: impl std::fmt::Display) -> Error {
    Error::Invalid(format!("scenario: {what}: {why}"))
}

/// Parses a duration: `s`, `min`, `h`, `d` (`"90min"`, `"7d"`), s.
pub fn duration_s(input: &str, what: &'static str) -> Result<f64, Error> {
    let (v, unit) = units::split(input, what)?;
    let f = match unit.as_str() {
        "ms" => 1e-3,
        "s" => 1.0,
        "min" => 60.0,
        "h" => 3600.0,
        "d" => 86_400.0,
        _ => {
            return Err(bad(
                what,
                format!("unknown time unit in '{input}' (s, min, h, d)"),
            ));
        }
    };
    if v < 0.0 {
        return Err(bad(what, "must not be negative"));
    }
    Ok(v * f)
}

/// Parses a temperature difference in kelvin (`"6K"`).
fn kelvin_diff(input: &str, what: &'static str) -> Result<f64, Error> {
    let (v, unit) = units::split(input, what)?;
    if unit != "K" {
        return Err(bad(
            what,
            format!("'{input}': a temperature difference is in K"),
        ));
    }
    Ok(v)
}

/// Parses a time of day `HH:MM` to hours.
fn clock(input: &str, what: &'static str) -> Result<f64, Error> {
    let (h, m) = input
        .trim()
        .split_once(':')
        .ok_or_else(|| bad(what, format!("'{input}' is not HH:MM")))?;
    let h: f64 = h.parse().map_err(|_| bad(what, "hour"))?;
    let m: f64 = m.parse().map_err(|_| bad(what, "minute"))?;
    if !(0.0..=24.0).contains(&h) || !(0.0..60.0).contains(&m) {
        return Err(bad(what, format!("'{input}' is not a time of day")));
    }
    Ok(h + m / 60.0)
}

/// Parses an area (`mm2`, `cm2`, `m2`) to m².
fn area_m2(input: &str, what: &'static str) -> Result<f64, Error> {
    let (v, unit) = units::split(input, what)?;
    let f = match unit.as_str() {
        "mm2" | "mm²" => 1e-6,
        "cm2" | "cm²" => 1e-4,
        "m2" | "m²" => 1.0,
        _ => {
            return Err(bad(
                what,
                format!("unknown area unit in '{input}' (mm2, cm2, m2)"),
            ));
        }
    };
    if v < 0.0 {
        return Err(bad(what, "must not be negative"));
    }
    Ok(v * f)
}

/// Parses a mass flow or a standard volume flow to kg/s.
fn flow_kg_s(input: &str, gas: Gas, what: &'static str) -> Result<f64, Error> {
    let (v, unit) = units::split(input, what)?;
    let std_rho = || -> Result<f64, Error> {
        Ok(Fluid::for_gas(gas)?
            .state(STANDARD_ATMOSPHERE_PA, ZERO_CELSIUS_K + 15.0)?
            .density_kg_m3)
    };
    let kg_s = match unit.as_str() {
        "kg/h" => v / 3600.0,
        "kg/s" => v,
        "g/s" => v * 1e-3,
        "g/min" => v * 1e-3 / 60.0,
        "sL/min" => v * 1e-3 / 60.0 * std_rho()?,
        "sm3/h" => v / 3600.0 * std_rho()?,
        _ => {
            return Err(bad(
                what,
                format!("unknown flow unit in '{input}' (kg/h, kg/s, g/s, g/min, sL/min, sm3/h)"),
            ));
        }
    };
    if kg_s < 0.0 {
        return Err(bad(what, "must not be negative"));
    }
    Ok(kg_s)
}

impl ScenarioFile {
    /// Checks and converts everything.
    pub fn build(&self) -> Result<Scenario, Error> {
        if self.format != FORMAT {
            return Err(bad("format", format!("expected '{FORMAT}'")));
        }
        let spec = GasSpec::parse(&self.tank.gas).map_err(|e| bad("tank.gas", e.to_string()))?;
        // Registers a mixture's composition for the physics and the gauge.
        let fluid = Fluid::of(&spec);
        let gas = fluid.gas();
        let duration = duration_s(&self.duration, "duration")?;
        if duration <= 0.0 || duration > 2.0 * 366.0 * 86_400.0 {
            return Err(bad("duration", "must be above 0 and at most two years"));
        }
        let interval = duration_s(&self.sample_interval, "sample_interval")?;
        if !(0.1..=10.0).contains(&interval) {
            return Err(bad("sample_interval", "0.1 s … 10 s"));
        }
        let t = &self.tank;
        let cap = units::volume_m3(&t.water_capacity, "water_capacity")?;
        let rated_p = units::pressure_pa(&t.rated_pressure, "rated_pressure")?;
        let rated_t = units::temperature_k(&t.rated_temperature, "rated_temperature")?;
        let mut tank = Tank::new(cap, rated_p);
        tank.rated_temperature_k = rated_t;
        tank.elastic_expansion_per_mpa = t.elastic_expansion_per_bar * 10.0;
        tank.thermal_expansion_per_k = t.thermal_expansion_per_k;
        tank.validate()?;
        for (v, what) in [
            (t.wall_mass_kg, "wall_mass_kg"),
            (t.wall_specific_heat_j_kg_k, "wall_specific_heat_j_kg_k"),
            (t.length_to_diameter, "length_to_diameter"),
        ] {
            if !(v.is_finite() && v > 0.0) {
                return Err(bad(what, "must be positive"));
            }
        }
        for (v, what) in [
            (t.inner_htc_w_m2_k, "inner_htc_w_m2_k"),
            (t.fill_htc_w_m2_k, "fill_htc_w_m2_k"),
            (t.outer_htc_w_m2_k, "outer_htc_w_m2_k"),
        ] {
            if !(v.is_finite() && (0.0..=1e4).contains(&v)) {
                return Err(bad(what, "0 … 10 000 W/(m²·K)"));
            }
        }
        for (v, what) in [
            (t.sun_exposure, "sun_exposure"),
            (t.absorptivity, "absorptivity"),
        ] {
            if !(0.0..=1.0).contains(&v) {
                return Err(bad(what, "0 … 1"));
            }
        }
        let make_vessel = |cap: f64, wall_mass_kg: f64, sun_exposure: f64| {
            let (area, side) = Vessel::cylinder_areas(cap, t.length_to_diameter);
            Vessel {
                water_capacity_m3: cap,
                elastic_per_pa: t.elastic_expansion_per_bar / BAR_PA,
                thermal_per_k: t.thermal_expansion_per_k,
                reference_k: rated_t,
                wall_heat_capacity_j_k: wall_mass_kg * t.wall_specific_heat_j_kg_k,
                inner_area_m2: area,
                // The outer surface of a wall a few per cent of the diameter thick.
                outer_area_m2: 1.1 * area,
                inner_htc: t.inner_htc_w_m2_k,
                fill_htc: t.fill_htc_w_m2_k,
                outer_htc: t.outer_htc_w_m2_k,
                sun_area_m2: side * sun_exposure * t.absorptivity,
            }
        };
        let vessel = make_vessel(cap, t.wall_mass_kg, t.sun_exposure);
        let a = &self.ambient;
        let weather = Weather {
            mean_k: units::temperature_k(&a.mean, "ambient.mean")?,
            swing_k: kelvin_diff(&a.swing, "ambient.swing")?,
            swing_spread: a.swing_spread.clamp(0.0, 1.0),
            warmest_hour: clock(&a.warmest_at, "ambient.warmest_at")?,
            day_to_day_k: kelvin_diff(&a.day_to_day, "ambient.day_to_day")?,
            pressure_pa: units::pressure_pa(&a.pressure, "ambient.pressure")?,
            sun_peak_w_m2: a.sun_peak_w_m2.max(0.0),
            sunrise_hour: clock(&a.sunrise, "ambient.sunrise")?,
            sunset_hour: clock(&a.sunset, "ambient.sunset")?,
            clearness_min: a.clearness_min.clamp(0.0, 1.0),
            fronts: self
                .front
                .iter()
                .map(|f| {
                    let over_s = duration_s(&f.over, "front.over")?;
                    if over_s <= 0.0 {
                        return Err(bad("front.over", "must be longer than 0 s"));
                    }
                    Ok(Front {
                        start_s: duration_s(&f.start, "front.start")?,
                        change_k: kelvin_diff(&f.change, "front.change")?,
                        over_s,
                    })
                })
                .collect::<Result<Vec<_>, Error>>()?,
        };
        if weather.sunset_hour <= weather.sunrise_hour {
            return Err(bad("ambient.sunset", "must be after sunrise"));
        }
        let first_weekday = weekday(&self.start_weekday, "start_weekday")?;
        let mut draws = Vec::new();
        for (i, d) in self.draw.iter().enumerate() {
            let mut windows = Vec::new();
            for w in &d.daily {
                let (x, y) = w
                    .split_once('-')
                    .ok_or_else(|| bad("draw.daily", format!("'{w}' is not HH:MM-HH:MM")))?;
                let (x, y) = (clock(x, "draw.daily")?, clock(y, "draw.daily")?);
                if y <= x {
                    return Err(bad("draw.daily", format!("'{w}' ends before it starts")));
                }
                windows.push((x, y));
            }
            let kg_s = flow_kg_s(&d.flow, gas, "draw.flow")?;
            let irregular = !d.days.is_empty()
                || !d.weekdays.is_empty()
                || d.probability.is_some()
                || d.flow_max.is_some();
            let day_demand = if irregular {
                let probability = d.probability.unwrap_or(1.0);
                if !(0.0..=1.0).contains(&probability) {
                    return Err(bad("draw.probability", "0 … 1"));
                }
                let hi = match &d.flow_max {
                    Some(f) => flow_kg_s(f, gas, "draw.flow_max")?,
                    None => kg_s,
                };
                if hi < kg_s {
                    return Err(bad("draw.flow_max", "must not be below flow"));
                }
                let week: Vec<usize> = d
                    .weekdays
                    .iter()
                    .map(|w| weekday(w, "draw.weekdays"))
                    .collect::<Result<_, _>>()?;
                if let Some(&n) = d.days.iter().find(|&&n| n as usize >= SCHEDULE_DAYS) {
                    return Err(bad("draw.days", format!("day {n} is beyond two years")));
                }
                let allowed = |day: usize| {
                    (d.days.is_empty() || d.days.contains(&(day as u32)))
                        && (week.is_empty() || week.contains(&((first_weekday + day) % 7)))
                };
                day_demands(self.seed, i, allowed, probability, kg_s, hi)
            } else {
                Vec::new()
            };
            draws.push(Draw {
                start_s: duration_s(&d.start, "draw.start")?,
                end_s: match &d.end {
                    Some(e) => duration_s(e, "draw.end")?,
                    None => f64::INFINITY,
                },
                kg_s,
                windows,
                min_pressure_pa: units::pressure_pa(&d.min_pressure, "draw.min_pressure")?,
                day_demand,
            });
        }
        let mut leaks = Vec::new();
        for l in &self.leak {
            let size = match (&l.area, l.loss_per_day) {
                (Some(a), None) => LeakSize::Area(area_m2(a, "leak.area")?),
                (None, Some(r)) if (0.0..=10.0).contains(&r) => LeakSize::LossPerDay(r),
                _ => return Err(bad("leak", "give either area or loss_per_day (0 … 10)")),
            };
            leaks.push(Leak {
                start_s: duration_s(&l.start, "leak.start")?,
                size,
            });
        }
        let mut blowdowns = Vec::new();
        for b in &self.blowdown {
            blowdowns.push(Blowdown {
                start_s: duration_s(&b.start, "blowdown.start")?,
                area_m2: area_m2(&b.area, "blowdown.area")?,
                to_pressure_pa: units::pressure_pa(&b.to_pressure, "blowdown.to_pressure")?,
                max_duration_s: duration_s(&b.max_duration, "blowdown.max_duration")?,
            });
        }
        let mut fills = Vec::new();
        for f in &self.fill {
            fills.push(Fill {
                start_s: duration_s(&f.start, "fill.start")?,
                supply_pressure_pa: units::pressure_pa(&f.supply_pressure, "fill.supply_pressure")?,
                supply_temperature_k: units::temperature_k(
                    &f.supply_temperature,
                    "fill.supply_temperature",
                )?,
                area_m2: area_m2(&f.area, "fill.area")?,
                to_pressure_pa: units::pressure_pa(&f.to_pressure, "fill.to_pressure")?,
                max_duration_s: duration_s(&f.max_duration, "fill.max_duration")?,
            });
        }
        let initial_pressure = units::pressure_pa(&t.pressure, "tank.pressure")?;
        let initial_temperature = t
            .temperature
            .as_deref()
            .map(|s| units::temperature_k(s, "tank.temperature"))
            .transpose()?;
        let manifold = if self.cylinder.is_empty() {
            if !self.valve.is_empty() {
                return Err(bad("valve", "valves are for [[cylinder]] groups"));
            }
            None
        } else {
            let n = self.cylinder.len();
            if !(2..=MAX_CYLINDERS).contains(&n) {
                return Err(bad(
                    "cylinder",
                    format!("a manifold has 2 … {MAX_CYLINDERS} cylinders"),
                ));
            }
            if !fills.is_empty() || !blowdowns.is_empty() {
                return Err(bad(
                    "cylinder",
                    "[[fill]] and [[blowdown]] are for a single [tank]",
                ));
            }
            let mut cylinders = Vec::new();
            for c in &self.cylinder {
                let cap_i = match &c.water_capacity {
                    Some(v) => units::volume_m3(v, "cylinder.water_capacity")?,
                    None => cap,
                };
                let wall = c.wall_mass_kg.unwrap_or(t.wall_mass_kg);
                let sun = c.sun_exposure.unwrap_or(t.sun_exposure);
                if !(cap_i.is_finite() && cap_i > 0.0) {
                    return Err(bad("cylinder.water_capacity", "must be positive"));
                }
                if !(wall.is_finite() && wall > 0.0) {
                    return Err(bad("cylinder.wall_mass_kg", "must be positive"));
                }
                if !(0.0..=1.0).contains(&sun) {
                    return Err(bad("cylinder.sun_exposure", "0 … 1"));
                }
                let valve = area_m2(&c.valve_area, "cylinder.valve_area")?;
                if valve <= 0.0 {
                    return Err(bad("cylinder.valve_area", "must be above 0"));
                }
                cylinders.push(Cylinder {
                    vessel: make_vessel(cap_i, wall, sun),
                    initial_pressure_pa: match &c.pressure {
                        Some(v) => units::pressure_pa(v, "cylinder.pressure")?,
                        None => initial_pressure,
                    },
                    initial_temperature_k: match &c.temperature {
                        Some(v) => Some(units::temperature_k(v, "cylinder.temperature")?),
                        None => initial_temperature,
                    },
                    valve_area_m2: valve,
                    open: c.open,
                    switches: Vec::new(),
                });
            }
            let mut valves = Vec::new();
            for v in &self.valve {
                if !(1..=n).contains(&v.cylinder) {
                    return Err(bad(
                        "valve.cylinder",
                        format!("{}: the cylinders are 1 … {n}", v.cylinder),
                    ));
                }
                valves.push((v.cylinder - 1, duration_s(&v.at, "valve.at")?, v.open));
            }
            valves.sort_by(|a, b| a.1.total_cmp(&b.1));
            for (i, at, open) in valves {
                cylinders[i].switches.push((at, open));
            }
            let sensors: Vec<usize> = (0..n)
                .filter(|&i| self.cylinder[i].temperature_sensor)
                .collect();
            let sensor = match sensors[..] {
                [] => 0,
                [i] => i,
                _ => {
                    return Err(bad(
                        "cylinder.temperature_sensor",
                        "the temperature sensor is on one cylinder",
                    ));
                }
            };
            // The gauge is told the water capacity open to the header at
            // the start (docs/simulator.md, "Several cylinders on one
            // manifold").
            let open_cap: f64 = cylinders
                .iter()
                .filter(|c| c.open)
                .map(|c| c.vessel.water_capacity_m3)
                .sum();
            if open_cap <= 0.0 {
                return Err(bad("cylinder.open", "open at least one valve at the start"));
            }
            tank.water_capacity_m3 = open_cap;
            tank.validate()?;
            Some(Manifold { cylinders, sensor })
        };
        let (vessel, initial_pressure, initial_temperature) = match &manifold {
            Some(m) => {
                let c = &m.cylinders[m.sensor];
                (
                    c.vessel.clone(),
                    c.initial_pressure_pa,
                    c.initial_temperature_k,
                )
            }
            None => (vessel, initial_pressure, initial_temperature),
        };
        let plant = Plant {
            gas,
            vessel,
            weather: weather.clone(),
            initial_pressure_pa: initial_pressure,
            initial_temperature_k: initial_temperature,
            draws,
            leaks: leaks.clone(),
            blowdowns,
            fills,
            seed: self.seed,
            manifold,
        };

        // The gauge's declaration.
        let ps = &self.sensors.pressure;
        let full_scale = units::pressure_pa(&ps.full_scale, "sensors.pressure.full_scale")?;
        let g = &self.gauge;
        let mut unc = UncertaintyConfig::example(full_scale);
        if let Some(v) = g.pressure_fs {
            unc.pressure_fs = v;
        }
        if let Some(v) = g.pressure_reading {
            unc.pressure_reading = v;
        }
        if let Some(v) = &g.temperature {
            unc.temperature_k = kelvin_diff(v, "gauge.temperature")?;
        }
        if let Some(v) = g.capacity {
            unc.capacity = v;
        }
        if let Some(v) = g.model_uncertainty {
            unc.model = v;
        }
        if let Some(v) = &g.temperature_lag {
            unc.temperature_lag = Millis((duration_s(v, "gauge.temperature_lag")? * 1e3) as u64);
        }
        unc.validate()?;

        // The instrument: drawn from the declaration, plus the stated errors.
        let drawn = match g.instrument.as_str() {
            "drawn" => true,
            "nominal" => false,
            other => {
                return Err(bad(
                    "gauge.instrument",
                    format!("'{other}': drawn or nominal"),
                ));
            }
        };
        let mut rng = ChaCha8Rng::seed_from_u64(self.seed ^ 0x5EED_1A57_0000_0001);
        let mut uniform = |half: f64| half * (2.0 * rng.random::<f64>() - 1.0);
        let sqrt3 = 3f64.sqrt();
        let (d_offset, d_gain) = if drawn {
            (
                uniform(sqrt3 * unc.pressure_fs * full_scale),
                uniform(sqrt3 * unc.pressure_reading),
            )
        } else {
            (0.0, 0.0)
        };
        let (d_temp, d_cap) = if drawn {
            let mut r2 = ChaCha8Rng::seed_from_u64(self.seed ^ 0x5EED_1A57_0000_0002);
            (
                physics::normal(&mut r2) * unc.temperature_k,
                physics::normal(&mut r2) * unc.capacity,
            )
        } else {
            (0.0, 0.0)
        };

        let pressure_fe = match ps.kind.as_str() {
            "bridge" => PressureFrontEnd::Bridge(sensors::default_bridge(
                full_scale,
                ps.adc_bits.unwrap_or(24),
            )?),
            "loop" => PressureFrontEnd::Loop(LoopConfig::new(
                ps.adc_bits.unwrap_or(16),
                // 150 Ω shunt read by a converter with a 3.3 V range: up to 22 mA.
                3.3,
                150.0,
                0.0,
                full_scale,
                PressureKind::Absolute,
                Millis::from_secs(5),
            )?),
            other => {
                return Err(bad(
                    "sensors.pressure.kind",
                    format!("'{other}': bridge or loop"),
                ));
            }
        };
        let pressure = PressureSensor {
            front_end: pressure_fe,
            offset_pa: units::pressure_pa(&ps.offset, "sensors.pressure.offset")? + d_offset,
            span_error: ps.span_error + d_gain,
            offset_drift_pa_per_year: units::pressure_pa(
                &ps.offset_drift_per_year,
                "sensors.pressure.offset_drift_per_year",
            )?,
            span_drift_per_year: ps.span_drift_per_year,
            drift_start_s: duration_s(&ps.drift_start, "sensors.pressure.drift_start")?,
            noise_pa: units::pressure_pa(&ps.noise, "sensors.pressure.noise")?.abs(),
        };
        let ts = &self.sensors.temperature;
        let temperature_fe = match ts.kind.as_str() {
            "pt100" => {
                TemperatureFrontEnd::Rtd(RtdConfig::new(100.0, Circuit::Ratiometric, 16, 400.0)?)
            }
            "pt1000" => {
                TemperatureFrontEnd::Rtd(RtdConfig::new(1000.0, Circuit::Ratiometric, 16, 4000.0)?)
            }
            "ntc10k" => TemperatureFrontEnd::Ntc(NtcConfig::new(
                NtcConfig::beta(10_000.0, 298.15, 3950.0)?,
                Circuit::DividerLow,
                16,
                10_000.0,
            )?),
            other => {
                return Err(bad(
                    "sensors.temperature.kind",
                    format!("'{other}': pt100, pt1000 or ntc10k"),
                ));
            }
        };
        let temperature = TemperatureSensor {
            front_end: temperature_fe,
            mount: ts.mount,
            time_constant_s: duration_s(&ts.time_constant, "sensors.temperature.time_constant")?,
            offset_k: kelvin_diff(&ts.offset, "sensors.temperature.offset")? + d_temp,
            gain_error: ts.gain_error,
            drift_k_per_year: kelvin_diff(
                &ts.drift_per_year,
                "sensors.temperature.drift_per_year",
            )?,
            drift_start_s: duration_s(&ts.drift_start, "sensors.temperature.drift_start")?,
            noise_k: kelvin_diff(&ts.noise, "sensors.temperature.noise")?.abs(),
        };
        let mut faults = Vec::new();
        for f in &self.fault {
            let loop_only = matches!(f.kind, FaultKind::FailureLow | FaultKind::FailureHigh);
            if loop_only
                && (f.channel != Channel::Pressure
                    || !matches!(pressure_fe, PressureFrontEnd::Loop(_)))
            {
                return Err(bad(
                    "fault.kind",
                    "failure currents need a 4–20 mA pressure channel",
                ));
            }
            let (ramp_to, ramp_over_s) = match (f.kind, &f.to, &f.over) {
                (FaultKind::Ramp, Some(to), Some(over)) => {
                    let to = match f.channel {
                        Channel::Pressure => units::pressure_pa(to, "fault.to")?,
                        Channel::Temperature => kelvin_diff(to, "fault.to")?,
                    };
                    let over = duration_s(over, "fault.over")?;
                    if over <= 0.0 {
                        return Err(bad("fault.over", "must be longer than 0 s"));
                    }
                    (to, over)
                }
                (FaultKind::Ramp, _, _) => {
                    return Err(bad("fault", "a ramp needs `to` and `over`"));
                }
                (_, None, None) => (0.0, 0.0),
                _ => return Err(bad("fault", "`to` and `over` are for ramps only")),
            };
            faults.push(Fault {
                channel: f.channel,
                kind: f.kind,
                start_s: duration_s(&f.start, "fault.start")?,
                duration_s: match &f.duration {
                    Some(d) => duration_s(d, "fault.duration")?,
                    None => f64::INFINITY,
                },
                spikes_per_hour: f.spikes_per_hour.max(0.0),
                ramp_to,
                ramp_over_s,
            });
        }

        let mut declared_tank = tank;
        declared_tank.water_capacity_m3 = tank.water_capacity_m3 * (1.0 + d_cap);
        let setup = Setup::new(gas, declared_tank);
        let mut track = TrackConfig::for_tank(&declared_tank, unc);
        track.leak_mode = match g.leak_mode.as_str() {
            "standby" => LeakMode::Standby,
            "in_use" => LeakMode::InUse,
            other => {
                return Err(bad(
                    "gauge.leak_mode",
                    format!("'{other}': standby or in_use"),
                ));
            }
        };
        track.declared_draw_kg_h = g
            .declared_draw
            .as_deref()
            .map(|d| flow_kg_s(d, gas, "gauge.declared_draw").map(|x| x * 3600.0))
            .transpose()?;
        if let Some(v) = &g.settle_time_constant {
            track.settle_time_constant =
                Millis((duration_s(v, "gauge.settle_time_constant")? * 1e3) as u64);
        }
        if let Some(t) = &g.temperature_max {
            track.limits.temperature_max_k = units::temperature_k(t, "gauge.temperature_max")?;
        }
        track.validate()?;
        let stuck = Millis((duration_s(&g.stuck_after, "gauge.stuck_after")? * 1e3) as u64);
        let t_stuck = Millis(
            (duration_s(&g.temperature_stuck_after, "gauge.temperature_stuck_after")? * 1e3) as u64,
        );
        let gauge = GaugeConfig {
            setup,
            model: g.model,
            pressure: pressure_fe,
            temperature: temperature_fe,
            barometric_pa: weather.pressure_pa,
            // Plausible: −5 % … 150 % of full scale, at most 5 % of full scale
            // per second plus 1 % between samples (a fast fill of a 700 bar
            // tank in 3 min is 1 %/s of an 875 bar range).
            pressure_plausibility: PlausibilityConfig::new(
                -0.05 * full_scale,
                1.5 * full_scale,
                0.05 * full_scale,
                0.01 * full_scale,
                0.0,
                stuck,
            )?,
            // −100 … +200 °C, at most 5 K/s plus 1 K between samples (a
            // sensor in the gas of a fast fill sees a few K/s).
            temperature_plausibility: PlausibilityConfig::new(
                173.15, 473.15, 5.0, 1.0, 0.0, t_stuck,
            )?,
            track,
        };
        Ok(Scenario {
            name: self.name.clone(),
            title: self.title.clone(),
            gas,
            duration_s: duration,
            interval_ms: (interval * 1e3).round() as u64,
            plant,
            pressure,
            temperature,
            faults,
            gauge,
            tank,
            seed: self.seed,
            leak_starts_s: leaks.iter().map(|l| l.start_s).collect(),
            source: self.clone(),
        })
    }
}
