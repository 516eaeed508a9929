//! One face for what a tank holds: a pure gas with its own reference equation
//! of state ([`Eos`]) or a mixture with GERG-2008 ([`MixtureEos`]). The
//! reference gas model, the device-model builder and the simulator's
//! physics work on a [`Fluid`].

use crate::composition::{Composition, GasSpec};
use crate::gerg::{self, Branch, Gerg};
use crate::{Caloric, Eos, Error, Phase, State};
use isochor_core::Gas;
use isochor_core::constants::MOLAR_GAS_CONSTANT_J_MOL_K;
use std::collections::HashMap;
use std::sync::{Arc, Mutex, OnceLock};

/// Temperatures the single-phase range of a mixture is computed for, K:
/// the envelope's −60 … +150 °C with 20 K on each side.
pub const ENVELOPE_T_MIN_K: f64 = 193.15;
/// See [`ENVELOPE_T_MIN_K`].
pub const ENVELOPE_T_MAX_K: f64 = 443.15;
/// Step of the dew-line grid, K.
pub const ENVELOPE_STEP_K: f64 = 2.0;

/// A mixture: GERG-2008 for its composition and its dew line.
#[derive(Debug)]
pub struct MixtureEos {
    /// The equation of state prepared for the composition.
    pub gerg: Gerg,
    dew: OnceLock<DewLine>,
}

/// Where a mixture stays one phase: the lowest pressure at which a liquid can
/// form, per temperature, on a grid (tangent-plane test,
/// [`gerg::stability`]).
#[derive(Clone, Debug, PartialEq)]
pub struct DewLine {
    /// Grid temperatures, K (every [`ENVELOPE_STEP_K`]).
    pub temperatures_k: Vec<f64>,
    /// Lowest unstable pressure at each temperature, Pa; `None`: one phase
    /// at every pressure up to GERG-2008's limit.
    pub pressures_pa: Vec<Option<f64>>,
}

impl DewLine {
    /// The highest grid temperature with a dew pressure (an estimate of the
    /// cricondentherm from below, within the grid step); `None`: the mixture
    /// does not condense in the range.
    pub fn cricondentherm_k(&self) -> Option<f64> {
        self.temperatures_k
            .iter()
            .zip(&self.pressures_pa)
            .filter(|(_, p)| p.is_some())
            .map(|(t, _)| *t)
            .fold(None, |a: Option<f64>, t| Some(a.map_or(t, |a| a.max(t))))
    }

    /// The lowest pressure at which a liquid can form at `t_k`, Pa (linear
    /// interpolation in ln p; where only one neighbour has a dew pressure —
    /// the grid step above the cricondentherm estimate — that one's, so the
    /// true cricondentherm, inside that step, stays covered). `None`: one
    /// phase at every pressure.
    pub fn dew_pressure_pa(&self, t_k: f64) -> Option<f64> {
        let n = self.temperatures_k.len();
        if n == 0 {
            return None;
        }
        let t0 = self.temperatures_k[0];
        let pos = ((t_k - t0) / ENVELOPE_STEP_K).clamp(0.0, (n - 1) as f64);
        let i = (pos.floor() as usize).min(n.saturating_sub(2));
        let f = pos - i as f64;
        let (a, b) = (
            self.pressures_pa.get(i).copied().flatten(),
            self.pressures_pa.get(i + 1).copied().flatten(),
        );
        match (a, b) {
            (Some(a), Some(b)) => Some((a.ln() * (1.0 - f) + b.ln() * f).exp()),
            (Some(a), None) | (None, Some(a)) => Some(a),
            (None, None) => None,
        }
    }
}

/// The mixtures met in this process, by fingerprint.
fn cache() -> std::sync::MutexGuard<'static, HashMap<u32, Arc<MixtureEos>>> {
    static CACHE: OnceLock<Mutex<HashMap<u32, Arc<MixtureEos>>>> = OnceLock::new();
    CACHE
        .get_or_init(|| Mutex::new(HashMap::new()))
        .lock()
        .unwrap_or_else(|e| e.into_inner())
}

impl MixtureEos {
    /// The mixture of `composition` (cached by fingerprint: later
    /// [`Fluid::for_gas`] finds it from the core's [`Gas::Mixture`]).
    pub fn of(composition: &Composition) -> Arc<MixtureEos> {
        let key = composition.fingerprint();
        let mut map = cache();
        map.entry(key)
            .or_insert_with(|| {
                Arc::new(MixtureEos {
                    gerg: Gerg::new(composition),
                    dew: OnceLock::new(),
                })
            })
            .clone()
    }

    /// The dew line (computed once, on first use: about a second).
    pub fn dew_line(&self) -> &DewLine {
        self.dew.get_or_init(|| {
            let n = ((ENVELOPE_T_MAX_K - ENVELOPE_T_MIN_K) / ENVELOPE_STEP_K).round() as usize;
            let temperatures_k: Vec<f64> = (0..=n)
                .map(|i| ENVELOPE_T_MIN_K + ENVELOPE_STEP_K * i as f64)
                .collect();
            // From the coldest temperature up: each dew pressure starts from
            // the last one; three temperatures in a row without one end the
            // search (the temperatures with a dew point form one interval,
            // up to the cricondentherm).
            let mut pressures_pa = Vec::with_capacity(temperatures_k.len());
            let (mut last, mut without) = (None, 0);
            for &t in &temperatures_k {
                let p = if without >= 3 {
                    None
                } else {
                    match last {
                        Some(hint) => gerg::stability::dew_pressure_near(
                            &self.gerg,
                            t,
                            gerg::PRESSURE_MAX_PA,
                            hint,
                            2e-4,
                        ),
                        None => gerg::stability::dew_pressure(
                            &self.gerg,
                            t,
                            gerg::PRESSURE_MAX_PA,
                            28,
                            2e-4,
                        ),
                    }
                };
                if p.is_some() {
                    last = p;
                    without = 0;
                } else {
                    without += 1;
                }
                pressures_pa.push(p);
            }
            DewLine {
                temperatures_k,
                pressures_pa,
            }
        })
    }
}

/// A pure gas or a mixture, with its equation of state.
#[derive(Clone, Debug)]
pub enum Fluid {
    /// A gas of the gas list with its reference equation.
    Pure(&'static Eos),
    /// A mixture with GERG-2008.
    Mixture(Arc<MixtureEos>),
}

impl Fluid {
    /// The fluid of a gas specification.
    pub fn of(spec: &GasSpec) -> Fluid {
        match spec {
            GasSpec::Pure(g) => Fluid::Pure(Eos::of(*g)),
            GasSpec::Mixture(c) => Fluid::Mixture(MixtureEos::of(c)),
        }
    }

    /// The fluid of a core gas value: a pure gas, or a mixture whose
    /// composition this process has met ([`MixtureEos::of`]; the core knows
    /// a mixture only by fingerprint and molar mass).
    pub fn for_gas(gas: Gas) -> Result<Fluid, Error> {
        match gas.mixture() {
            None => Ok(Fluid::pure(gas)),
            Some(m) => cache()
                .get(&m.fingerprint)
                .filter(|e| e.gerg.composition().mixture() == m)
                .map(|e| Fluid::Mixture(e.clone()))
                .ok_or_else(|| {
                    Error::Invalid(format!(
                        "mixture {:08x}: its composition is not known here (give the composition)",
                        m.fingerprint
                    ))
                }),
        }
    }

    /// The fluid of a pure gas.
    pub fn pure(gas: Gas) -> Fluid {
        Fluid::Pure(Eos::of(gas))
    }

    /// The core's gas value.
    pub fn gas(&self) -> Gas {
        match self {
            Fluid::Pure(e) => e.gas,
            Fluid::Mixture(m) => Gas::Mixture(m.gerg.composition().mixture()),
        }
    }

    /// What to call it in messages: the gas name or the composition.
    pub fn label(&self) -> String {
        match self {
            Fluid::Pure(e) => e.gas.name().to_string(),
            Fluid::Mixture(m) => m.gerg.composition().to_string(),
        }
    }

    /// The gas specification.
    pub fn spec(&self) -> GasSpec {
        match self {
            Fluid::Pure(e) => GasSpec::Pure(e.gas),
            Fluid::Mixture(m) => GasSpec::Mixture(m.gerg.composition().clone()),
        }
    }

    /// The publication of the equation of state.
    pub fn source(&self) -> &str {
        match self {
            Fluid::Pure(e) => e.source(),
            Fluid::Mixture(_) => {
                "Kunz & Wagner, J. Chem. Eng. Data 57, 3032 (2012) (GERG-2008; ISO 20765-2)"
            }
        }
    }

    /// Molar mass, kg/mol (a mixture: Σ xᵢMᵢ with GERG-2008's values).
    pub fn molar_mass_kg_mol(&self) -> f64 {
        match self {
            Fluid::Pure(e) => e.molar_mass_kg_mol,
            Fluid::Mixture(m) => m.gerg.molar_mass_kg_mol(),
        }
    }

    /// The equation's own gas constant, J/(mol·K).
    pub fn gas_constant(&self) -> f64 {
        match self {
            Fluid::Pure(e) => e.gas_constant,
            Fluid::Mixture(_) => gerg::GAS_CONSTANT,
        }
    }

    /// Lowest temperature of the equation's range, K.
    pub fn temperature_min_k(&self) -> f64 {
        match self {
            Fluid::Pure(e) => e.temperature_min_k,
            Fluid::Mixture(_) => gerg::TEMPERATURE_MIN_K,
        }
    }

    /// Highest temperature of the equation's range, K.
    pub fn temperature_max_k(&self) -> f64 {
        match self {
            Fluid::Pure(e) => e.temperature_max_k,
            Fluid::Mixture(_) => gerg::TEMPERATURE_MAX_K,
        }
    }

    /// Highest pressure of the equation's range, Pa.
    pub fn pressure_max_pa(&self) -> f64 {
        match self {
            Fluid::Pure(e) => e.pressure_max_pa,
            Fluid::Mixture(_) => gerg::PRESSURE_MAX_PA,
        }
    }

    /// Factor from the equation's Z to the effective Z the content estimate
    /// needs (CODATA R and, for a mixture, the molar mass the core carries:
    /// `Z_eff = p·M_core/(ρ_mass·R·T)`).
    pub fn z_eff_factor(&self) -> f64 {
        match self {
            Fluid::Pure(e) => e.gas_constant / MOLAR_GAS_CONSTANT_J_MOL_K,
            Fluid::Mixture(m) => {
                let m_core = self.gas().molar_mass_kg_mol();
                gerg::GAS_CONSTANT / MOLAR_GAS_CONSTANT_J_MOL_K * m_core
                    / m.gerg.molar_mass_kg_mol()
            }
        }
    }

    /// Temperature below which a liquid can form (a pure gas: the top of its
    /// saturation line; a mixture: its cricondentherm estimate); `None` when
    /// it does not condense in the range.
    pub fn condensation_temperature_max_k(&self) -> Option<f64> {
        match self {
            Fluid::Pure(e) => Some(e.saturation_temperature_max_k()),
            Fluid::Mixture(m) => m.dew_line().cricondentherm_k(),
        }
    }

    /// The lowest pressure at which a liquid can form at `t_k` (pure gas: the
    /// saturation pressure; mixture: the dew line), Pa.
    pub fn condensation_pressure_pa(&self, t_k: f64) -> Option<f64> {
        match self {
            Fluid::Pure(e) => e.saturation_pressure_pa(t_k),
            Fluid::Mixture(m) => m.dew_line().dew_pressure_pa(t_k),
        }
    }

    /// Pressure (Pa), ∂p/∂ρ (Pa per mol/m³) and ∂p/∂T (Pa/K) at a molar
    /// density and temperature.
    pub fn pressure(&self, rho_mol_m3: f64, t_k: f64) -> (f64, f64, f64) {
        match self {
            Fluid::Pure(e) => e.pressure(rho_mol_m3, t_k),
            Fluid::Mixture(m) => {
                let tc = m.gerg.tau_cache(t_k);
                let s = m.gerg.pressure_at(&tc, rho_mol_m3);
                (
                    rho_mol_m3 * gerg::GAS_CONSTANT * t_k * s.z,
                    s.dp_drho,
                    s.dp_dt,
                )
            }
        }
    }

    /// Caloric properties at a molar density and temperature.
    pub fn caloric(&self, rho_mol_m3: f64, t_k: f64) -> Caloric {
        match self {
            Fluid::Pure(e) => e.caloric(rho_mol_m3, t_k),
            Fluid::Mixture(m) => m.gerg.caloric(rho_mol_m3, t_k),
        }
    }

    /// Isochoric molar heat capacity of the ideal gas at `t_k`, J/(mol·K).
    pub fn ideal_cv(&self, t_k: f64) -> f64 {
        match self {
            Fluid::Pure(e) => e.ideal_cv(t_k),
            Fluid::Mixture(m) => m.gerg.ideal_cv(t_k),
        }
    }

    /// Solves the state at (p, T), refusing states outside the equation's
    /// range and states where a liquid can form (pure gas: at or above the
    /// saturation pressure; mixture: at or above the dew line).
    pub fn state(&self, p_pa: f64, t_k: f64) -> Result<State, Error> {
        match self {
            Fluid::Pure(e) => e.state(p_pa, t_k),
            Fluid::Mixture(m) => {
                m.gerg.check(p_pa, t_k)?;
                if let Some(pd) = m.dew_line().dew_pressure_pa(t_k)
                    && p_pa >= pd
                {
                    return Err(Error::TwoPhase(format!(
                        "{} at {t_k} K may condense at or above {:.4} bar: a liquid can form \
                         (tangent-plane test on GERG-2008)",
                        m.gerg.composition(),
                        pd / 1e5
                    )));
                }
                self.state_any_phase(p_pa, t_k)
            }
        }
    }

    /// Solves the state at (p, T) on the gas branch without the phase check
    /// (a mixture; a pure gas is checked as in [`Fluid::state`]).
    pub fn state_any_phase(&self, p_pa: f64, t_k: f64) -> Result<State, Error> {
        let Fluid::Mixture(m) = self else {
            return self.state(p_pa, t_k);
        };
        let g = &m.gerg;
        let s = g.state(p_pa, t_k)?;
        let molar = g.molar_mass_kg_mol();
        let rho = s.density_mol_m3;
        let phase = if rho > g.pseudo_critical_density_mol_m3() {
            Phase::Supercritical
        } else {
            Phase::Gas
        };
        Ok(State {
            temperature_k: t_k,
            pressure_pa: p_pa,
            density_mol_m3: rho,
            density_kg_m3: rho * molar,
            z: s.z,
            z_eff: s.z * self.z_eff_factor(),
            drho_dp_mol_m3_pa: 1.0 / s.dp_drho,
            drho_dt_mol_m3_k: if rho > 0.0 { -s.dp_dt / s.dp_drho } else { 0.0 },
            phase: if p_pa == 0.0 { Phase::Gas } else { phase },
        })
    }

    /// The density on the gas branch at (p, T) from a guess (mol/m³), for
    /// the simulator's repeated solves; no range or phase check.
    pub fn density_near(&self, p_pa: f64, t_k: f64, guess: f64) -> Option<f64> {
        match self {
            Fluid::Pure(e) => e.state(p_pa, t_k).ok().map(|s| s.density_mol_m3),
            Fluid::Mixture(m) => {
                let tc = m.gerg.tau_cache(t_k);
                m.gerg
                    .solve(&tc, p_pa, Branch::Gas, guess)
                    .map(|s| s.density_mol_m3)
            }
        }
    }
}
