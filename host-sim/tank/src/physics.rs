//! The tank's physics: mass and energy balance of the gas, a lumped wall,
//! the weather, and the vessel's expansion, integrated with steps the physics
//! chooses.
//!
//! # Model
//!
//! State: gas mass m, gas temperature T, wall temperature T_w (plus running
//! totals of what crossed the boundary, for the conservation checks). The gas
//! is one well-mixed volume V(p, T_w) = V₀·(1 + e_p·(p − p_atm) + e_T·(T_w −
//! T_rated)); its state comes from the reference equation of state
//! ([`isochor_eos::Eos`]) at ρ = m/V, solved together with V by Newton's method on p.
//!
//! * **Mass**: dm/dt = Σ inflow − Σ outflow: regulated draws (the demand,
//!   reduced in proportion when the tank falls below the regulator's lowest
//!   inlet pressure), leaks and blow-downs through an orifice to ambient
//!   pressure, fills through an orifice from a supply.
//! * **Orifice flow** through an effective area A (discharge coefficient
//!   included) from stagnation state (p₀, ρ₀) to back pressure p_b, with γ
//!   the ideal-gas heat capacity ratio at T₀: choked when
//!   p_b/p₀ ≤ (2/(γ+1))^(γ/(γ−1)), ṁ = A·√(γ·p₀·ρ₀)·(2/(γ+1))^((γ+1)/(2(γ−1)));
//!   else ṁ = A·√(2γ/(γ−1)·p₀·ρ₀·(r^(2/γ) − r^((γ+1)/γ))), r = p_b/p₀
//!   (isentropic nozzle flow of a perfect gas, e.g. Anderson, "Modern
//!   Compressible Flow", ch. 5; with the real-gas density ρ₀ = p₀M/(ZRT₀), the
//!   form of API 520 Part I for gas relief; from memory).
//! * **Energy of the gas** (first law for an open system):
//!   d(m·u)/dt = ṁ_in·h_in − ṁ_out·h + Q̇_wall − p·dV/dt, with u, h, c_v,
//!   (∂p/∂ρ)_T and (∂p/∂T)_ρ from the equation of state; h_in is the supply's
//!   stagnation enthalpy (throttling is isenthalpic, so Joule–Thomson effects
//!   come out of the equation of state). Written for dT/dt with
//!   (∂u/∂ρ)_T = (p − T·(∂p/∂T)_ρ)/ρ² and the vessel's dV/dt = V₀·(e_p·ṗ + e_T·Ṫ_w)
//!   solved together (a 2 × 2 linear system, closed form, DEVELOPERS.md "Tank simulator").
//!   A fast fill heats the gas (the inflow's enthalpy does work on the gas
//!   already in), a fast draw cools it (what stays expands).
//! * **Wall**: C_w·dT_w/dt = h_i·A_i·(T − T_w) + h_o·A_o·(T_amb − T_w) + α·A_sun·G(t),
//!   with a larger inner coefficient while a fill's jet stirs the gas.
//! * **Manifold** ([`Manifold`]): several such vessels, each with its own
//!   m, T, T_w and wall, on one header through their valves. Between two
//!   open cylinders the gas flows from the higher pressure to the lower
//!   through both valves in series (area (A_i⁻² + A_j⁻²)^(−1/2), the orifice
//!   law above at the upstream state, linear in Δp below
//!   [`VALVE_LINEAR_PA`]), arriving with the upstream enthalpy; draws and
//!   leaks leave through the header, shared by the open cylinders in
//!   proportion to their capacity. The header has no volume; its pressure is
//!   the open cylinders' weighted by A² (exact for two in incompressible
//!   flow). The truth is the content open to the header, the header's
//!   pressure and the sensor's cylinder's temperatures.
//! * **Weather** ([`Weather`]): daily mean that wanders from day to day, a
//!   day/night sine whose amplitude also varies, and sunshine between sunrise
//!   and sunset with a daily cloudiness.
//!
//! # Steps
//!
//! Dormand–Prince 5(4) with error control on m, T and T_w (Dormand & Prince,
//! J. Comput. Appl. Math. 6 (1980) 19–26; step-size rule of Hairer, Nørsett &
//! Wanner, "Solving Ordinary Differential Equations I", II.4). Steps never
//! cross a breakpoint (start or end of a draw window, a fill, a leak, a
//! blow-down, sunrise, sunset, midnight), a fill or blow-down stops exactly at
//! its target pressure (the step is shortened by the secant rule), and no step
//! is longer than [`MAX_STEP_S`]. A quiet tank is integrated in half-hour steps
//! with a handful of equation-of-state evaluations each; between steps the
//! samples are interpolated (cubic Hermite on the values and rates at both
//! ends), so the equation of state is never evaluated per sample.

use crate::Error;
use isochor_core::Gas;
use isochor_core::constants::STANDARD_ATMOSPHERE_PA;
use isochor_eos::Caloric;
use isochor_eos::fluid::Fluid;
use rand::rngs::ChaCha8Rng;
use rand::{RngExt, SeedableRng};

/// Seconds per day.
pub const DAY_S: f64 = 86_400.0;
/// Longest step, s.
pub const MAX_STEP_S: f64 = 1800.0;
/// Relative tolerance of the step control.
const RTOL: f64 = 1e-8;
/// Absolute tolerance on temperatures, K.
const ATOL_K: f64 = 1e-5;

/// Below this pressure difference the flow between two cylinders is taken
/// linear in the difference, through the flow at this difference, Pa: the
/// square-root law's infinite slope at equal pressures would make the
/// equations stiff (steps of milliseconds once a bank has equalised).
/// Common practice for valve models in explicit integrators.
pub const VALVE_LINEAR_PA: f64 = 1e5;
/// Most cylinders on one manifold.
pub const MAX_CYLINDERS: usize = 8;
/// Size of the state vector: m, T, T_w of each vessel (a single tank: one),
/// then the five running totals ([`ix::totals`]).
pub const N: usize = 3 * MAX_CYLINDERS + 5;
/// Index of each state component of a single tank (a manifold: vessel i's
/// m, T, T_w at 3i, 3i + 1, 3i + 2, the totals from [`ix::totals`] on, in
/// the order of `MASS_IN` … `EXPANSION_WORK`).
pub mod ix {
    /// Where the running totals begin for `k` vessels.
    pub const fn totals(k: usize) -> usize {
        3 * k
    }
    /// Gas mass, kg.
    pub const MASS: usize = 0;
    /// Gas temperature, K.
    pub const GAS_T: usize = 1;
    /// Wall temperature, K.
    pub const WALL_T: usize = 2;
    /// Mass that came in, kg.
    pub const MASS_IN: usize = 3;
    /// Mass that went out, kg.
    pub const MASS_OUT: usize = 4;
    /// Enthalpy carried by the flows, in minus out, J.
    pub const FLOW_ENERGY: usize = 5;
    /// Heat from ambient and sun into the wall, J.
    pub const AMBIENT_ENERGY: usize = 6;
    /// Work done by the gas on the expanding vessel, J.
    pub const EXPANSION_WORK: usize = 7;
}

/// The weather around the tank.
#[derive(Clone, Debug, PartialEq)]
pub struct Weather {
    /// Mean ambient temperature, K.
    pub mean_k: f64,
    /// Amplitude of the day/night sine, K (±).
    pub swing_k: f64,
    /// Day-to-day change of the amplitude, fraction of it (uniform ±).
    pub swing_spread: f64,
    /// Hour of the warmest moment (0 … 24).
    pub warmest_hour: f64,
    /// Standard deviation of the daily mean around `mean_k`, K.
    pub day_to_day_k: f64,
    /// Ambient (barometric) pressure, Pa.
    pub pressure_pa: f64,
    /// Peak solar irradiance on a clear day, W/m².
    pub sun_peak_w_m2: f64,
    /// Sunrise, hour.
    pub sunrise_hour: f64,
    /// Sunset, hour.
    pub sunset_hour: f64,
    /// Lowest daily clearness (the daily factor on the irradiance is drawn
    /// uniformly between this and 1).
    pub clearness_min: f64,
    /// Scripted weather fronts, on top of the drawn weather.
    pub fronts: Vec<Front>,
}

/// A scripted weather front: the ambient temperature moves by `change_k`
/// from `start_s` on, linearly over `over_s`, and stays moved.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Front {
    /// Start, s.
    pub start_s: f64,
    /// Change of the ambient temperature, K (negative: a cold front).
    pub change_k: f64,
    /// Time the change takes, s (> 0).
    pub over_s: f64,
}

/// The vessel and how it exchanges heat.
#[derive(Clone, Debug, PartialEq)]
pub struct Vessel {
    /// Water capacity V₀, m³.
    pub water_capacity_m3: f64,
    /// Elastic volume expansion per Pa.
    pub elastic_per_pa: f64,
    /// Volumetric thermal expansion per K.
    pub thermal_per_k: f64,
    /// Temperature at which V = V₀ (with p = p_atm), K.
    pub reference_k: f64,
    /// Heat capacity of the wall (mass × specific heat), J/K.
    pub wall_heat_capacity_j_k: f64,
    /// Inner surface, m².
    pub inner_area_m2: f64,
    /// Outer surface, m².
    pub outer_area_m2: f64,
    /// Inner heat transfer coefficient, quiet gas, W/(m²·K).
    pub inner_htc: f64,
    /// Inner heat transfer coefficient while a fill stirs the gas, W/(m²·K).
    pub fill_htc: f64,
    /// Outer heat transfer coefficient (convection and radiation), W/(m²·K).
    pub outer_htc: f64,
    /// Area in the sun times its absorptivity, m².
    pub sun_area_m2: f64,
}

impl Vessel {
    /// Inner surface of a cylinder with flat ends of volume `v_m3` and
    /// length `ratio` × diameter, m², and its projected side area, m².
    pub fn cylinder_areas(v_m3: f64, ratio: f64) -> (f64, f64) {
        let d = (4.0 * v_m3 / (std::f64::consts::PI * ratio)).cbrt();
        let l = ratio * d;
        (
            std::f64::consts::PI * d * l + std::f64::consts::PI * d * d / 2.0,
            d * l,
        )
    }
}

/// A regulated draw: a demand in kg/s while the tank can deliver it.
#[derive(Clone, Debug, PartialEq)]
pub struct Draw {
    /// Start, s.
    pub start_s: f64,
    /// End, s.
    pub end_s: f64,
    /// Demand, kg/s.
    pub kg_s: f64,
    /// Daily windows (start hour, end hour) in which the draw runs; empty:
    /// all day.
    pub windows: Vec<(f64, f64)>,
    /// The regulator's lowest inlet pressure, Pa absolute: below it the flow
    /// falls in proportion to p − p_atm.
    pub min_pressure_pa: f64,
    /// An irregular schedule: the demand of each day (day n from n·24 h),
    /// kg/s, 0 on days without the draw, none after the last entry; empty:
    /// every day at `kg_s`.
    pub day_demand: Vec<f64>,
}

impl Draw {
    /// The demand on the day of `t_s` (the draw's windows and span aside),
    /// kg/s.
    pub fn day_kg_s(&self, t_s: f64) -> f64 {
        if self.day_demand.is_empty() {
            return self.kg_s;
        }
        let day = (t_s / DAY_S).floor();
        if day < 0.0 {
            return 0.0;
        }
        self.day_demand.get(day as usize).copied().unwrap_or(0.0)
    }

    /// Whether the draw runs at `t_s`: inside its span, on one of its days
    /// and inside one of its daily windows.
    pub fn on(&self, t_s: f64) -> bool {
        if t_s < self.start_s || t_s >= self.end_s {
            return false;
        }
        if !self.day_demand.is_empty() && self.day_kg_s(t_s) <= 0.0 {
            return false;
        }
        if self.windows.is_empty() {
            return true;
        }
        let hour = (t_s.rem_euclid(DAY_S)) / 3600.0;
        self.windows.iter().any(|&(a, b)| hour >= a && hour < b)
    }

    /// The demand at `t_s` (0 while the draw does not run), kg/s, before the
    /// regulator's limit.
    pub fn demand_kg_s(&self, t_s: f64) -> f64 {
        if self.on(t_s) {
            self.day_kg_s(t_s)
        } else {
            0.0
        }
    }
}

/// A leak to ambient through an orifice.
#[derive(Clone, Debug, PartialEq)]
pub struct Leak {
    /// Start, s.
    pub start_s: f64,
    /// How big it is.
    pub size: LeakSize,
}

/// The size of a leak.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum LeakSize {
    /// Effective area, m².
    Area(f64),
    /// Loss at the start, fraction of the content per day (the area is set
    /// from the state then).
    LossPerDay(f64),
}

/// A blow-down (a fast draw through an open valve) to ambient.
#[derive(Clone, Debug, PartialEq)]
pub struct Blowdown {
    /// Start, s.
    pub start_s: f64,
    /// Effective area, m².
    pub area_m2: f64,
    /// Stops when the pressure falls to this, Pa absolute.
    pub to_pressure_pa: f64,
    /// Stops at the latest after this, s.
    pub max_duration_s: f64,
}

/// A fill through an orifice from a supply.
#[derive(Clone, Debug, PartialEq)]
pub struct Fill {
    /// Start, s.
    pub start_s: f64,
    /// Supply pressure, Pa absolute.
    pub supply_pressure_pa: f64,
    /// Supply temperature, K.
    pub supply_temperature_k: f64,
    /// Effective area, m².
    pub area_m2: f64,
    /// Stops when the tank reaches this pressure, Pa absolute.
    pub to_pressure_pa: f64,
    /// Stops at the latest after this, s.
    pub max_duration_s: f64,
}

/// Everything the physics needs.
#[derive(Clone, Debug, PartialEq)]
pub struct Plant {
    /// The gas.
    pub gas: Gas,
    /// The vessel.
    pub vessel: Vessel,
    /// The weather.
    pub weather: Weather,
    /// Initial pressure, Pa absolute.
    pub initial_pressure_pa: f64,
    /// Initial gas temperature (the wall starts at it too), K; `None`: the
    /// ambient temperature at the start.
    pub initial_temperature_k: Option<f64>,
    /// Draws.
    pub draws: Vec<Draw>,
    /// Leaks.
    pub leaks: Vec<Leak>,
    /// Blow-downs.
    pub blowdowns: Vec<Blowdown>,
    /// Fills.
    pub fills: Vec<Fill>,
    /// Seed of the weather's random parts.
    pub seed: u64,
    /// Several cylinders on one manifold instead of the single vessel
    /// (`vessel`, `initial_pressure_pa` and `initial_temperature_k` are then
    /// not used).
    pub manifold: Option<Manifold>,
}

/// One cylinder of a manifold, connected to the header through its valve.
#[derive(Clone, Debug, PartialEq)]
pub struct Cylinder {
    /// The vessel.
    pub vessel: Vessel,
    /// Initial pressure, Pa absolute.
    pub initial_pressure_pa: f64,
    /// Initial gas and wall temperature, K; `None`: the ambient at the start.
    pub initial_temperature_k: Option<f64>,
    /// Effective area of its valve to the header, m².
    pub valve_area_m2: f64,
    /// Whether its valve is open at the start.
    pub open: bool,
    /// Valve changes: (time s, open), in time order.
    pub switches: Vec<(f64, bool)>,
}

impl Cylinder {
    /// Whether the valve is open at `t_s` (a change at `t_s` has happened).
    pub fn open_at(&self, t_s: f64) -> bool {
        let mut open = self.open;
        for &(at, o) in &self.switches {
            if t_s >= at - 1e-9 {
                open = o;
            }
        }
        open
    }
}

/// Several cylinders on one header (see the module documentation).
#[derive(Clone, Debug, PartialEq)]
pub struct Manifold {
    /// The cylinders (2 … [`MAX_CYLINDERS`]).
    pub cylinders: Vec<Cylinder>,
    /// The cylinder whose wall (or gas) the temperature sensor is on.
    pub sensor: usize,
}

/// The true state at one time.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Truth {
    /// Time, s.
    pub t_s: f64,
    /// Gas mass, kg.
    pub mass_kg: f64,
    /// Gas temperature, K.
    pub gas_k: f64,
    /// Wall temperature, K.
    pub wall_k: f64,
    /// Pressure, Pa absolute.
    pub pressure_pa: f64,
    /// Ambient temperature, K (NaN from [`Simulator::truth`]: ask
    /// [`Simulator::ambient_k`] when it is needed).
    pub ambient_k: f64,
    /// Net outflow, kg/s (negative while filling).
    pub outflow_kg_s: f64,
}

/// One integration point: state, rates and derived values.
#[derive(Clone, Copy, Debug, PartialEq)]
struct Knot {
    t: f64,
    y: [f64; N],
    f: [f64; N],
    p: [f64; MAX_CYLINDERS],
    dp: [f64; MAX_CYLINDERS],
    v: [f64; MAX_CYLINDERS],
}

impl Default for Knot {
    fn default() -> Knot {
        Knot {
            t: 0.0,
            y: [0.0; N],
            f: [0.0; N],
            p: [0.0; MAX_CYLINDERS],
            dp: [0.0; MAX_CYLINDERS],
            v: [0.0; MAX_CYLINDERS],
        }
    }
}

/// Derived values of one right-hand side evaluation, per vessel.
#[derive(Clone, Copy, Debug, Default)]
struct Aux {
    p: [f64; MAX_CYLINDERS],
    dp: [f64; MAX_CYLINDERS],
    v: [f64; MAX_CYLINDERS],
}

/// What is going on at a time (discrete state of the events).
#[derive(Clone, Debug, Default)]
struct Modes {
    /// Leak areas once started (m²), per leak.
    leak_area: Vec<Option<f64>>,
    /// Whether each fill runs.
    fill_on: Vec<bool>,
    /// Whether each fill is over.
    fill_done: Vec<bool>,
    /// Whether each blow-down runs / is over.
    blow_on: Vec<bool>,
    blow_done: Vec<bool>,
    /// Whether each vessel's valve is open (a single tank: always).
    open: [bool; MAX_CYLINDERS],
}

/// One Dormand–Prince step: the new state, the error estimate, and the
/// rates and derived values at the new state.
type Stage = ([f64; N], [f64; N], [f64; N], Aux);

/// The gas of one vessel at one evaluation: pressure, volume, caloric
/// state, mass density.
type GasState = (f64, f64, Caloric, f64);

/// The supply state of a fill (computed once).
#[derive(Clone, Copy, Debug)]
struct Supply {
    rho_kg_m3: f64,
    h_j_kg: f64,
    gamma: f64,
}

/// The integrator: advances the plant and answers the truth at any time
/// inside the last step.
pub struct Simulator {
    plant: Plant,
    /// The vessels: the single tank, or the manifold's cylinders.
    vessels: Vec<Cylinder>,
    /// The vessel the temperature sensor is on.
    sensor: usize,
    /// Valve states during the last step (for the truth inside it).
    seg_open: [bool; MAX_CYLINDERS],
    eos: Fluid,
    molar_mass: f64,
    modes: Modes,
    supplies: Vec<Supply>,
    /// Daily weather draws: (mean offset K, amplitude K, clearness), per day.
    days: Vec<(f64, f64, f64)>,
    rng: ChaCha8Rng,
    a: Knot,
    b: Knot,
    /// Rates (and ṗ) just after `b` when a discontinuity happened there.
    after: Option<([f64; N], [f64; MAX_CYLINDERS])>,
    h: f64,
    max_step: f64,
    p_guess: [f64; MAX_CYLINDERS],
    /// Right-hand side evaluations so far.
    pub evaluations: u64,
    /// Accepted steps so far.
    pub steps: u64,
}

impl Simulator {
    /// Prepares the plant at t = 0. Errors when the initial or a supply
    /// state is outside the equation of state (liquid, out of range).
    pub fn new(plant: Plant) -> Result<Simulator, Error> {
        let eos = Fluid::for_gas(plant.gas)?;
        let molar_mass = eos.molar_mass_kg_mol();
        let mut supplies = Vec::new();
        for f in &plant.fills {
            let s = eos.state(f.supply_pressure_pa, f.supply_temperature_k)?;
            let c = eos.caloric(s.density_mol_m3, f.supply_temperature_k);
            let cv0 = eos.ideal_cv(f.supply_temperature_k);
            supplies.push(Supply {
                rho_kg_m3: s.density_kg_m3,
                h_j_kg: c.h_j_mol / molar_mass,
                gamma: (cv0 + eos.gas_constant()) / cv0,
            });
        }
        let modes = Modes {
            leak_area: vec![None; plant.leaks.len()],
            fill_on: vec![false; plant.fills.len()],
            fill_done: vec![false; plant.fills.len()],
            blow_on: vec![false; plant.blowdowns.len()],
            blow_done: vec![false; plant.blowdowns.len()],
            open: [false; MAX_CYLINDERS],
        };
        let (vessels, sensor) = match &plant.manifold {
            None => (
                vec![Cylinder {
                    vessel: plant.vessel.clone(),
                    initial_pressure_pa: plant.initial_pressure_pa,
                    initial_temperature_k: plant.initial_temperature_k,
                    valve_area_m2: 0.0,
                    open: true,
                    switches: Vec::new(),
                }],
                0,
            ),
            Some(m) => {
                if m.cylinders.is_empty()
                    || m.cylinders.len() > MAX_CYLINDERS
                    || m.sensor >= m.cylinders.len()
                {
                    return Err(Error::Invalid(format!(
                        "a manifold has 1 … {MAX_CYLINDERS} cylinders and its sensor on one of them"
                    )));
                }
                (m.cylinders.clone(), m.sensor)
            }
        };
        let mut sim = Simulator {
            vessels,
            sensor,
            seg_open: [false; MAX_CYLINDERS],
            rng: ChaCha8Rng::seed_from_u64(plant.seed),
            eos,
            molar_mass,
            modes,
            supplies,
            days: Vec::new(),
            a: Knot::default(),
            b: Knot::default(),
            after: None,
            h: 60.0,
            max_step: MAX_STEP_S,
            p_guess: [0.0; MAX_CYLINDERS],
            evaluations: 0,
            steps: 0,
            plant,
        };
        let mut y = [0.0; N];
        for i in 0..sim.vessels.len() {
            let t0 = sim.vessels[i]
                .initial_temperature_k
                .unwrap_or_else(|| sim.ambient_k(0.0));
            let p0 = sim.vessels[i].initial_pressure_pa;
            let v0 = sim.volume(i, p0, t0);
            let s = sim.eos.state(p0, t0)?;
            y[3 * i + ix::MASS] = s.density_kg_m3 * v0;
            y[3 * i + ix::GAS_T] = t0;
            y[3 * i + ix::WALL_T] = t0;
            sim.p_guess[i] = p0;
        }
        sim.switch_modes(0.0, &y)?;
        sim.seg_open = sim.modes.open;
        let (f, aux) = sim.rates(0.0, &y)?;
        sim.b = Knot {
            t: 0.0,
            y,
            f,
            p: aux.p,
            dp: aux.dp,
            v: aux.v,
        };
        sim.a = sim.b;
        Ok(sim)
    }

    /// Limits the steps to `s` seconds (tests compare against short steps).
    pub fn with_max_step(mut self, s: f64) -> Simulator {
        self.max_step = s.clamp(1e-3, MAX_STEP_S);
        self
    }

    /// The plant.
    pub fn plant(&self) -> &Plant {
        &self.plant
    }

    /// The equation of state in use.
    pub fn eos(&self) -> &Fluid {
        &self.eos
    }

    /// The full state vector at the end of the last step (for the
    /// conservation checks: see [`ix`]).
    pub fn state(&self) -> ([f64; N], f64, f64, f64) {
        (self.b.y, self.b.p[0], self.b.v[0], self.b.t)
    }

    /// Internal energy of the gas and the wall at the end of the last step,
    /// J (the wall as C_w·T_w), summed over the vessels.
    pub fn energy_j(&self) -> Result<f64, Error> {
        let k = &self.b;
        let mut e = 0.0;
        for (i, c) in self.vessels.iter().enumerate() {
            let m = k.y[3 * i + ix::MASS];
            let rho = m / (self.molar_mass * k.v[i]);
            let cal = self.eos.caloric(rho, k.y[3 * i + ix::GAS_T]);
            e += m * cal.u_j_mol / self.molar_mass
                + c.vessel.wall_heat_capacity_j_k * k.y[3 * i + ix::WALL_T];
        }
        Ok(e)
    }

    /// The number of vessels (1: a single tank).
    pub fn vessels(&self) -> usize {
        self.vessels.len()
    }

    /// Gas mass, gas and wall temperature and pressure of vessel `i` at the
    /// end of the last step.
    pub fn vessel_state(&self, i: usize) -> Option<(f64, f64, f64, f64)> {
        (i < self.vessels.len()).then(|| {
            let y = &self.b.y;
            (y[3 * i], y[3 * i + 1], y[3 * i + 2], self.b.p[i])
        })
    }

    /// The truth at `t_s`, advancing the integration as needed. Times must
    /// not go back beyond the start of the last step.
    pub fn truth(&mut self, t_s: f64) -> Result<Truth, Error> {
        while self.b.t < t_s {
            self.step()?;
        }
        let (a, b) = (&self.a, &self.b);
        let h = b.t - a.t;
        // Cubic Hermite basis, once for every quantity.
        let x = if h > 0.0 {
            ((t_s - a.t) / h).clamp(0.0, 1.0)
        } else {
            1.0
        };
        let (x2, x3) = (x * x, x * x * x);
        let (h00, h10, h01, h11) = (
            2.0 * x3 - 3.0 * x2 + 1.0,
            (x3 - 2.0 * x2 + x) * h,
            -2.0 * x3 + 3.0 * x2,
            (x3 - x2) * h,
        );
        let herm = |ya: f64, fa: f64, yb: f64, fb: f64| h00 * ya + h10 * fa + h01 * yb + h11 * fb;
        let lin = |ya: f64, yb: f64| ya + (yb - ya) * x;
        if self.vessels.len() == 1 {
            return Ok(Truth {
                t_s,
                mass_kg: herm(a.y[0], a.f[0], b.y[0], b.f[0]),
                gas_k: herm(a.y[1], a.f[1], b.y[1], b.f[1]),
                wall_k: herm(a.y[2], a.f[2], b.y[2], b.f[2]),
                pressure_pa: herm(a.p[0], a.dp[0], b.p[0], b.dp[0]),
                ambient_k: f64::NAN,
                outflow_kg_s: -lin(a.f[0], b.f[0]),
            });
        }
        // A manifold: the content open to the header, the header's pressure
        // (the open cylinders' pressures weighted by their valves' A²), the
        // sensor's cylinder's temperatures.
        let (mut mass, mut outflow, mut pa2, mut a2) = (0.0, 0.0, 0.0, 0.0);
        for (i, c) in self.vessels.iter().enumerate() {
            if !self.seg_open[i] {
                continue;
            }
            let m = 3 * i;
            mass += herm(a.y[m], a.f[m], b.y[m], b.f[m]);
            outflow -= lin(a.f[m], b.f[m]);
            let w = c.valve_area_m2 * c.valve_area_m2;
            pa2 += w * herm(a.p[i], a.dp[i], b.p[i], b.dp[i]);
            a2 += w;
        }
        let k = 3 * self.sensor;
        Ok(Truth {
            t_s,
            mass_kg: mass,
            gas_k: herm(a.y[k + 1], a.f[k + 1], b.y[k + 1], b.f[k + 1]),
            wall_k: herm(a.y[k + 2], a.f[k + 2], b.y[k + 2], b.f[k + 2]),
            pressure_pa: if a2 > 0.0 {
                pa2 / a2
            } else {
                self.plant.weather.pressure_pa
            },
            ambient_k: f64::NAN,
            outflow_kg_s: outflow,
        })
    }

    /// One accepted step from `b`.
    fn step(&mut self) -> Result<(), Error> {
        let t0 = self.b.t;
        let bp = self.next_breakpoint(t0);
        let mut h = self.h.min(self.max_step).min(bp - t0).max(1e-3);
        let mut start = self.b;
        if let Some((f, dp)) = self.after {
            start.f = f;
            start.dp = dp;
        }
        let (y0, f0) = (start.y, start.f);
        let k = self.vessels.len();
        let mut scale_m = [0.0; MAX_CYLINDERS];
        for (i, s) in scale_m.iter_mut().enumerate().take(k) {
            *s = y0[3 * i + ix::MASS].abs().max(1e-6);
        }
        for _ in 0..200 {
            let (y1, err, f1, aux1) = self.dp45(t0, &y0, &f0, h)?;
            let tol = |i: usize| -> f64 {
                match i % 3 {
                    ix::MASS => RTOL * scale_m[i / 3].max(y1[i].abs()),
                    _ => ATOL_K + RTOL * y1[i].abs(),
                }
            };
            let e = (0..3 * k)
                .map(|i| (err[i] / tol(i)).powi(2))
                .sum::<f64>()
                .sqrt()
                / ((3 * k) as f64).sqrt();
            if !e.is_finite() || e > 1.0 {
                let f = if e.is_finite() {
                    (0.9 * e.powf(-0.2)).max(0.2)
                } else {
                    0.25
                };
                h *= f;
                continue;
            }
            // Event: a fill or blow-down reaching its pressure inside the
            // step (from 0.999 of the step on, it happens at its end).
            if let Some(frac) = self.pressure_event(self.b.p[0], aux1.p[0])
                && frac < 0.999
            {
                h *= frac.max(1e-3);
                continue;
            }
            let grow = if e > 0.0 {
                (0.9 * e.powf(-0.2)).min(5.0)
            } else {
                5.0
            };
            self.h = (h * grow).min(self.max_step);
            self.a = start;
            self.after = None;
            self.b = Knot {
                t: t0 + h,
                y: y1,
                f: f1,
                p: aux1.p,
                dp: aux1.dp,
                v: aux1.v,
            };
            self.steps += 1;
            self.p_guess = aux1.p;
            self.seg_open = self.modes.open;
            let t1 = t0 + h;
            let changed = self.switch_modes(t1, &y1)?;
            if changed {
                // A discontinuity at t1: the rates after it start the next
                // step; the segment ending here keeps the rates before it.
                let (f, aux) = self.rates(t1, &y1)?;
                self.after = Some((f, aux.dp));
                self.h = self.h.min(10.0);
            }
            return Ok(());
        }
        Err(Error::NoConvergence(format!(
            "simulation step at {t0:.1} s did not meet its tolerance"
        )))
    }

    /// For a running fill or blow-down whose target lies between `p0` and
    /// `p1`, the fraction of the step at which it is reached (secant).
    fn pressure_event(&self, p0: f64, p1: f64) -> Option<f64> {
        let mut best: Option<f64> = None;
        let mut consider = |target: f64| {
            if (p0 - target) * (p1 - target) < 0.0 && p1 != p0 {
                let fr = (target - p0) / (p1 - p0);
                // Within 1e-5 of the target counts as reached.
                let fr = if (p1 - target).abs() <= 1e-5 * target {
                    1.0
                } else {
                    fr
                };
                best = Some(best.map_or(fr, |b: f64| b.min(fr)));
            }
        };
        for (i, f) in self.plant.fills.iter().enumerate() {
            if self.modes.fill_on[i] {
                consider(f.to_pressure_pa);
            }
        }
        for (i, b) in self.plant.blowdowns.iter().enumerate() {
            if self.modes.blow_on[i] {
                consider(b.to_pressure_pa);
            }
        }
        best
    }

    /// Updates the discrete modes at `t`; true when something changed.
    fn switch_modes(&mut self, t: f64, y: &[f64; N]) -> Result<bool, Error> {
        let mut changed = false;
        let p = self.p_guess[0];
        for i in 0..self.vessels.len() {
            let open = self.vessels[i].open_at(t);
            if open != self.modes.open[i] {
                self.modes.open[i] = open;
                changed = true;
            }
        }
        for i in 0..self.plant.fills.len() {
            let f = &self.plant.fills[i];
            let on = !self.modes.fill_done[i]
                && t >= f.start_s - 1e-9
                && t < f.start_s + f.max_duration_s - 1e-9
                && p < f.to_pressure_pa * (1.0 - 1e-5);
            if self.modes.fill_on[i] && !on {
                self.modes.fill_done[i] = true;
            }
            if on != self.modes.fill_on[i] {
                self.modes.fill_on[i] = on;
                changed = true;
            }
        }
        for i in 0..self.plant.blowdowns.len() {
            let b = &self.plant.blowdowns[i];
            let on = !self.modes.blow_done[i]
                && t >= b.start_s - 1e-9
                && t < b.start_s + b.max_duration_s - 1e-9
                && p > b.to_pressure_pa * (1.0 + 1e-5);
            if self.modes.blow_on[i] && !on {
                self.modes.blow_done[i] = true;
            }
            if on != self.modes.blow_on[i] {
                self.modes.blow_on[i] = on;
                changed = true;
            }
        }
        for i in 0..self.plant.leaks.len() {
            if self.modes.leak_area[i].is_none() && t >= self.plant.leaks[i].start_s - 1e-9 {
                let area = match self.plant.leaks[i].size {
                    LeakSize::Area(a) => a,
                    LeakSize::LossPerDay(r) => {
                        let (flux, mass) = self.tank_orifice_flux(y)?;
                        if flux > 0.0 {
                            r * mass / DAY_S / flux
                        } else {
                            0.0
                        }
                    }
                };
                self.modes.leak_area[i] = Some(area);
                changed = true;
            }
        }
        // Draw windows, sunrise/sunset and midnight are breakpoints only
        // (a day's new demand on an irregular schedule changes the rates).
        Ok(changed
            || self.plant.draws.iter().any(|d| {
                d.on(t - 1e-6) != d.on(t + 1e-6)
                    || (!d.day_demand.is_empty()
                        && d.demand_kg_s(t - 1e-6) != d.demand_kg_s(t + 1e-6))
            }))
    }

    /// Orifice mass flux per unit area to ambient, kg/(s·m²) — of the
    /// tank, or of the header, the open cylinders sharing it by capacity —
    /// and the content open to it, kg.
    fn tank_orifice_flux(&mut self, y: &[f64; N]) -> Result<(f64, f64), Error> {
        let share = self.shares();
        let (mut flux, mut mass) = (0.0, 0.0);
        for (i, &sh) in share.iter().enumerate().take(self.vessels.len()) {
            if sh <= 0.0 {
                continue;
            }
            let (p, _v, _c, rho_kg) = self.gas_state(i, y)?;
            let t = y[3 * i + ix::GAS_T];
            let cv0 = self.eos.ideal_cv(t);
            let gamma = (cv0 + self.eos.gas_constant()) / cv0;
            flux += sh * orifice_flux(p, rho_kg, gamma, self.plant.weather.pressure_pa);
            mass += y[3 * i + ix::MASS];
        }
        Ok((flux, mass))
    }

    /// Each vessel's share of what the header delivers or takes (draws,
    /// leaks, blow-downs, fills): its water capacity over that of the
    /// vessels open to the header (a single tank: 1).
    fn shares(&self) -> [f64; MAX_CYLINDERS] {
        let mut share = [0.0; MAX_CYLINDERS];
        if self.vessels.len() == 1 {
            share[0] = 1.0;
            return share;
        }
        let open: f64 = self
            .vessels
            .iter()
            .zip(&self.modes.open)
            .filter(|(_, o)| **o)
            .map(|(c, _)| c.vessel.water_capacity_m3)
            .sum();
        if open > 0.0 {
            for (i, c) in self.vessels.iter().enumerate() {
                if self.modes.open[i] {
                    share[i] = c.vessel.water_capacity_m3 / open;
                }
            }
        }
        share
    }

    /// Vessel `i`'s volume at pressure `p` and wall temperature `tw`, m³.
    fn volume(&self, i: usize, p: f64, tw: f64) -> f64 {
        let ves = &self.vessels[i].vessel;
        ves.water_capacity_m3
            * (1.0
                + ves.elastic_per_pa * (p - STANDARD_ATMOSPHERE_PA)
                + ves.thermal_per_k * (tw - ves.reference_k))
    }

    /// Pressure, volume, caloric state and mass density of vessel `i` from
    /// its (m, T, T_w).
    fn gas_state(&mut self, i: usize, y: &[f64; N]) -> Result<GasState, Error> {
        let m = y[3 * i + ix::MASS].max(1e-12);
        let t = y[3 * i + ix::GAS_T];
        let tw = y[3 * i + ix::WALL_T];
        if !(t.is_finite() && t > 1.0 && t < 2.0 * self.eos.temperature_max_k()) {
            return Err(Error::Invalid(format!(
                "simulated gas temperature {t} K is outside the equation of state"
            )));
        }
        let (v0, e_p) = (
            self.vessels[i].vessel.water_capacity_m3,
            self.vessels[i].vessel.elastic_per_pa,
        );
        // One evaluation at the volume of the guessed pressure, then the
        // Newton correction of p = P(m/V(p)) applied linearly to p, V and
        // ρ: the guess comes from the previous stage, so the correction is
        // tiny and what is left is second order in it.
        let p_g = self.p_guess[i];
        let v_g = self.volume(i, p_g, tw);
        let rho_g = m / (self.molar_mass * v_g);
        let c = self.eos.caloric(rho_g, t);
        let (p, v, rho_mol) = if e_p == 0.0 {
            (c.pressure_pa, v_g, rho_g)
        } else {
            let g = p_g - c.pressure_pa;
            let dg = 1.0 + c.dp_drho * rho_g * v0 * e_p / v_g;
            let p = p_g - g / dg;
            let v = self.volume(i, p, tw);
            let rho = m / (self.molar_mass * v);
            (c.pressure_pa + c.dp_drho * (rho - rho_g), v, rho)
        };
        let rho = rho_mol * self.molar_mass;
        if !p.is_finite() || p > self.eos.pressure_max_pa() * 1.5 {
            return Err(Error::Invalid(format!(
                "simulated pressure {p} Pa is outside the equation of state"
            )));
        }
        self.p_guess[i] = p;
        Ok((p, v, c, rho))
    }

    /// The rates of every state component at (t, y).
    fn rates(&mut self, t: f64, y: &[f64; N]) -> Result<([f64; N], Aux), Error> {
        self.evaluations += 1;
        let k = self.vessels.len();
        let mut gas: [Option<GasState>; MAX_CYLINDERS] = [None; MAX_CYLINDERS];
        for (i, g) in gas.iter_mut().enumerate().take(k) {
            *g = Some(self.gas_state(i, y)?);
        }
        let share = self.shares();
        let p_amb = self.plant.weather.pressure_pa;

        // Flows to and from outside, per vessel: its share of the header's.
        let mut out = [0.0; MAX_CYLINDERS];
        let mut inflow = [0.0; MAX_CYLINDERS];
        let mut in_h = [0.0; MAX_CYLINDERS];
        let mut filling = false;
        let open_area: f64 = self.modes.leak_area.iter().flatten().sum::<f64>()
            + self
                .plant
                .blowdowns
                .iter()
                .zip(&self.modes.blow_on)
                .filter(|(_, on)| **on)
                .map(|(b, _)| b.area_m2)
                .sum::<f64>();
        for i in 0..k {
            let (sh, Some((p, _, _, rho))) = (share[i], gas[i]) else {
                continue;
            };
            if sh <= 0.0 {
                continue;
            }
            let temp = y[3 * i + ix::GAS_T];
            for d in &self.plant.draws {
                if d.on(t) {
                    let room = ((p - p_amb) / (d.min_pressure_pa - p_amb).max(1.0)).clamp(0.0, 1.0);
                    out[i] += d.day_kg_s(t) * room * sh;
                }
            }
            if open_area > 0.0 {
                let cv0 = self.eos.ideal_cv(temp);
                let gamma = (cv0 + self.eos.gas_constant()) / cv0;
                out[i] += sh * open_area * orifice_flux(p, rho, gamma, p_amb);
            }
            for (j, f) in self.plant.fills.iter().enumerate() {
                if self.modes.fill_on[j] {
                    let s = self.supplies[j];
                    let q = f.area_m2
                        * orifice_flux(f.supply_pressure_pa, s.rho_kg_m3, s.gamma, p)
                        * sh;
                    inflow[i] += q;
                    in_h[i] += q * s.h_j_kg;
                    filling = true;
                }
            }
        }
        // What crosses the boundary (before the flows between vessels).
        let (ext_in, ext_out, ext_in_h) = (inflow, out, in_h);
        // Between the cylinders open to the header: from the higher pressure
        // to the lower through both valves in series (effective area
        // (A_i⁻² + A_j⁻²)^(−1/2)), at the upstream stagnation state; the gas
        // arrives with the upstream enthalpy (throttling is isenthalpic).
        if k > 1 {
            for i in 0..k {
                for j in i + 1..k {
                    if !(self.modes.open[i] && self.modes.open[j]) {
                        continue;
                    }
                    let (Some(gi), Some(gj)) = (gas[i], gas[j]) else {
                        continue;
                    };
                    let (ai, aj) = (self.vessels[i].valve_area_m2, self.vessels[j].valve_area_m2);
                    if ai <= 0.0 || aj <= 0.0 || gi.0 == gj.0 {
                        continue;
                    }
                    let area = 1.0 / (1.0 / (ai * ai) + 1.0 / (aj * aj)).sqrt();
                    let (up, down, gu, gd) = if gi.0 > gj.0 {
                        (i, j, gi, gj)
                    } else {
                        (j, i, gj, gi)
                    };
                    let temp = y[3 * up + ix::GAS_T];
                    let cv0 = self.eos.ideal_cv(temp);
                    let gamma = (cv0 + self.eos.gas_constant()) / cv0;
                    let dp = gu.0 - gd.0;
                    let q = if dp >= VALVE_LINEAR_PA {
                        area * orifice_flux(gu.0, gu.3, gamma, gd.0)
                    } else {
                        area * orifice_flux(gu.0, gu.3, gamma, gu.0 - VALVE_LINEAR_PA) * dp
                            / VALVE_LINEAR_PA
                    };
                    out[up] += q;
                    inflow[down] += q;
                    in_h[down] += q * gu.2.h_j_mol / self.molar_mass;
                }
            }
        }

        let amb = self.ambient_k(t);
        let sun = self.sun(t);
        let mm = self.molar_mass;
        let mut f = [0.0; N];
        let mut aux = Aux::default();
        let tot = ix::totals(k);
        for i in 0..k {
            let Some((p, v, c, rho)) = gas[i] else {
                continue;
            };
            let m = y[3 * i + ix::MASS].max(1e-12);
            let temp = y[3 * i + ix::GAS_T];
            let tw = y[3 * i + ix::WALL_T];
            let u = c.u_j_mol / mm;
            let h = c.h_j_mol / mm;
            let cv = c.cv_j_mol_k / mm;
            let p_rho = c.dp_drho / mm;
            let p_t = c.dp_dt;
            let (out, inflow, in_h) = (out[i], inflow[i], in_h[i]);

            // Heat.
            let ves = &self.vessels[i].vessel;
            let h_in = if filling { ves.fill_htc } else { ves.inner_htc };
            let q_wall = h_in * ves.inner_area_m2 * (tw - temp);
            let q_amb = ves.outer_htc * ves.outer_area_m2 * (amb - tw) + ves.sun_area_m2 * sun;
            let dtw = (-q_wall + q_amb) / ves.wall_heat_capacity_j_k;

            // Energy and volume together (see the module documentation).
            let mdot = inflow - out;
            let rhs = (in_h - inflow * u) - out * p / rho + q_wall;
            let a = ves.water_capacity_m3 * ves.elastic_per_pa;
            let b = ves.water_capacity_m3 * ves.thermal_per_k * dtw;
            let dd = 1.0 + a * p_rho * rho / v;
            let c0 = a * p_rho * mdot / v + b;
            let tpt = temp * p_t;
            let dt = (rhs - (p - tpt) * mdot / rho - tpt * c0 / dd) / (m * cv + tpt * a * p_t / dd);
            let dv = (c0 + a * p_t * dt) / dd;
            let drho = (mdot - rho * dv) / v;
            let dp = p_rho * drho + p_t * dt;

            f[3 * i + ix::MASS] = mdot;
            f[3 * i + ix::GAS_T] = dt;
            f[3 * i + ix::WALL_T] = dtw;
            let totals = [
                ext_in[i],
                ext_out[i],
                ext_in_h[i] - ext_out[i] * h,
                q_amb,
                p * dv,
            ];
            for (n, x) in totals.into_iter().enumerate() {
                if i == 0 {
                    f[tot + n] = x;
                } else {
                    f[tot + n] += x;
                }
            }
            aux.p[i] = p;
            aux.dp[i] = dp;
            aux.v[i] = v;
        }
        Ok((f, aux))
    }

    /// One Dormand–Prince 5(4) step: the 5th-order solution and the error
    /// estimate.
    fn dp45(&mut self, t: f64, y: &[f64; N], k1: &[f64; N], h: f64) -> Result<Stage, Error> {
        const C: [f64; 6] = [0.2, 0.3, 0.8, 8.0 / 9.0, 1.0, 1.0];
        const A: [[f64; 6]; 6] = [
            [0.2, 0.0, 0.0, 0.0, 0.0, 0.0],
            [3.0 / 40.0, 9.0 / 40.0, 0.0, 0.0, 0.0, 0.0],
            [44.0 / 45.0, -56.0 / 15.0, 32.0 / 9.0, 0.0, 0.0, 0.0],
            [
                19372.0 / 6561.0,
                -25360.0 / 2187.0,
                64448.0 / 6561.0,
                -212.0 / 729.0,
                0.0,
                0.0,
            ],
            [
                9017.0 / 3168.0,
                -355.0 / 33.0,
                46732.0 / 5247.0,
                49.0 / 176.0,
                -5103.0 / 18656.0,
                0.0,
            ],
            [
                35.0 / 384.0,
                0.0,
                500.0 / 1113.0,
                125.0 / 192.0,
                -2187.0 / 6784.0,
                11.0 / 84.0,
            ],
        ];
        const E: [f64; 7] = [
            71.0 / 57600.0,
            0.0,
            -71.0 / 16695.0,
            71.0 / 1920.0,
            -17253.0 / 339200.0,
            22.0 / 525.0,
            -1.0 / 40.0,
        ];
        let mut k = [[0.0; N]; 7];
        k[0] = *k1;
        let p_save = self.p_guess;
        let mut last = Aux::default();
        for s in 0..6 {
            let mut ys = *y;
            for (i, v) in ys.iter_mut().enumerate() {
                for (j, kj) in k.iter().take(s + 1).enumerate() {
                    *v += h * A[s][j] * kj[i];
                }
            }
            match self.rates(t + C[s] * h, &ys) {
                Ok((f, aux)) => {
                    k[s + 1] = f;
                    last = aux;
                }
                Err(e) => {
                    self.p_guess = p_save;
                    // A trial state outside the equation of state: ask for a
                    // smaller step (NaN error).
                    if h > 1e-2 {
                        return Ok((*y, [f64::NAN; N], *k1, Aux::default()));
                    }
                    return Err(e);
                }
            }
        }
        // The last stage is evaluated at (t + h, y1) itself (first same as
        // last): its rates are the next step's first.
        let mut y1 = *y;
        for (i, v) in y1.iter_mut().enumerate() {
            for (j, kj) in k.iter().take(6).enumerate() {
                *v += h * A[5][j] * kj[i];
            }
        }
        let mut err = [0.0; N];
        for (i, e) in err.iter_mut().enumerate() {
            *e = h * E.iter().zip(&k).map(|(ej, kj)| ej * kj[i]).sum::<f64>();
        }
        self.p_guess = p_save;
        Ok((y1, err, k[6], last))
    }

    /// The first breakpoint after `t`.
    fn next_breakpoint(&self, t: f64) -> f64 {
        let mut best = f64::INFINITY;
        let mut take = |x: f64| {
            if x > t + 1e-6 && x < best {
                best = x;
            }
        };
        let day0 = (t / DAY_S).floor() * DAY_S;
        take(day0 + DAY_S);
        let w = &self.plant.weather;
        if w.sun_peak_w_m2 > 0.0 && self.plant.vessel.sun_area_m2 > 0.0 {
            take(day0 + w.sunrise_hour * 3600.0);
            take(day0 + w.sunset_hour * 3600.0);
        }
        for d in &self.plant.draws {
            take(d.start_s);
            take(d.end_s);
            for &(a, b) in &d.windows {
                take(day0 + a * 3600.0);
                take(day0 + b * 3600.0);
            }
        }
        for l in &self.plant.leaks {
            take(l.start_s);
        }
        for c in &self.vessels {
            for &(at, _) in &c.switches {
                take(at);
            }
        }
        for f in &self.plant.fills {
            take(f.start_s);
            take(f.start_s + f.max_duration_s);
        }
        for b in &self.plant.blowdowns {
            take(b.start_s);
            take(b.start_s + b.max_duration_s);
        }
        best
    }

    /// The weather draws of day `d` (drawn in order, so the series depends
    /// only on the seed).
    fn day(&mut self, d: usize) -> (f64, f64, f64) {
        while self.days.len() <= d + 1 {
            let w = &self.plant.weather;
            let mean = normal(&mut self.rng) * w.day_to_day_k;
            let amp = w.swing_k * (1.0 + w.swing_spread * (2.0 * self.rng.random::<f64>() - 1.0));
            let clear = w.clearness_min + (1.0 - w.clearness_min) * self.rng.random::<f64>();
            self.days.push((mean, amp, clear));
        }
        self.days[d]
    }

    /// Ambient temperature at `t`, K: daily means and amplitudes linear
    /// between midnights, a sine peaking at the warmest hour.
    pub fn ambient_k(&mut self, t: f64) -> f64 {
        let d = (t / DAY_S).floor().max(0.0) as usize;
        let x = (t - d as f64 * DAY_S) / DAY_S;
        let (m0, a0, _) = self.day(d);
        let (m1, a1, _) = self.day(d + 1);
        let w = &self.plant.weather;
        let phase = 2.0 * std::f64::consts::PI * (x * 24.0 - w.warmest_hour + 6.0) / 24.0;
        let fronts: f64 = w
            .fronts
            .iter()
            .map(|f| f.change_k * ((t - f.start_s) / f.over_s).clamp(0.0, 1.0))
            .sum();
        w.mean_k + m0 + (m1 - m0) * x + (a0 + (a1 - a0) * x) * phase.sin() + fronts
    }

    /// Solar irradiance at `t`, W/m².
    fn sun(&mut self, t: f64) -> f64 {
        let w = &self.plant.weather;
        if w.sun_peak_w_m2 <= 0.0 {
            return 0.0;
        }
        let (rise, set, peak) = (w.sunrise_hour, w.sunset_hour, w.sun_peak_w_m2);
        let d = (t / DAY_S).floor().max(0.0) as usize;
        let hour = (t - d as f64 * DAY_S) / 3600.0;
        if hour <= rise || hour >= set {
            return 0.0;
        }
        let (_, _, clear) = self.day(d);
        peak * clear * (std::f64::consts::PI * (hour - rise) / (set - rise)).sin()
    }
}

/// Mass flux through an orifice, kg/(s·m²), from stagnation pressure `p0`
/// and density `rho0` to back pressure `pb`, ideal-gas heat capacity ratio
/// `gamma` (see the module documentation).
pub fn orifice_flux(p0: f64, rho0: f64, gamma: f64, pb: f64) -> f64 {
    if p0 <= pb || p0 <= 0.0 || rho0 <= 0.0 {
        return 0.0;
    }
    let g = gamma;
    let r = pb / p0;
    let critical = (2.0 / (g + 1.0)).powf(g / (g - 1.0));
    if r <= critical {
        (g * p0 * rho0).sqrt() * (2.0 / (g + 1.0)).powf((g + 1.0) / (2.0 * (g - 1.0)))
    } else {
        let x = r.powf(2.0 / g) - r.powf((g + 1.0) / g);
        (2.0 * g / (g - 1.0) * p0 * rho0 * x.max(0.0)).sqrt()
    }
}

/// A standard normal draw (Box–Muller, one of the pair).
pub fn normal(rng: &mut ChaCha8Rng) -> f64 {
    let u1: f64 = rng.random::<f64>().max(1e-300);
    let u2: f64 = rng.random::<f64>();
    (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
}
