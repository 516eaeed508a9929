//! The reference equation of state as a gas model (host only): it answers the
//! gas-model seam of `isochor_core::model` with the effective compressibility
//! factor Z_eff = p·M/(ρ·R·T) (CODATA R), so the content estimate reproduces
//! the equation's mass density exactly.
//!
//! It implements both forms of the seam: the float form evaluates the equation
//! in f64; the fixed-point form rounds that answer to the device formats (so
//! the fixed-point estimator's arithmetic can be run with reference Z). States
//! the equation refuses are answered at the nearest state it accepts, with
//! [`Status::TWO_PHASE`] (liquid and vapour), [`Status::LIQUID_FULL`] (more
//! than [`LIQUID_FULL_MARGIN`] above the vapour pressure: compressed liquid)
//! or [`Status::MODEL_OUT_OF_RANGE`] (outside its declared range).
//!
//! A mixture ([`Fluid::Mixture`]) is answered by GERG-2008; at or above its
//! dew line (the tangent-plane test's single-phase limit) the answer is
//! flagged [`Status::CONDENSATION_RISK`] (never `liquid_full`: the dew line
//! is not a vapour pressure) and taken just below the line.

use crate::fluid::Fluid;
use isochor_core::model::device::LIQUID_FULL_MARGIN;
use isochor_core::model::{Compressibility, CompressibilityFx, ModelRange, ZPoint, ZPointFx};
use isochor_core::{Gas, Status, envelope, fx};

/// The reference equation of state of one gas or mixture, as a gas model.
#[derive(Clone, Debug)]
pub struct ReferenceModel {
    fluid: Fluid,
    gas: Gas,
    z_floor: f64,
}

impl ReferenceModel {
    /// The model of a pure gas, or of a mixture this process has met (see
    /// [`Fluid::for_gas`]; else [`ReferenceModel::of`] with its fluid).
    pub fn new(gas: Gas) -> Result<ReferenceModel, crate::Error> {
        Ok(ReferenceModel::of(Fluid::for_gas(gas)?))
    }

    /// The model of a pure gas or a mixture.
    pub fn of(fluid: Fluid) -> ReferenceModel {
        let eos = &fluid;
        // Smallest Z_eff over the envelope's gas states (coarse grid), with a
        // margin: the fixed-point estimator sizes its density scale from it.
        let mut floor = 1.0f64;
        for i in 0..=24 {
            let t = envelope::TEMPERATURE_MIN_K
                + (envelope::TEMPERATURE_MAX_K - envelope::TEMPERATURE_MIN_K) * i as f64 / 24.0;
            for j in 1..=50 {
                let p = envelope::PRESSURE_MAX_PA * j as f64 / 50.0;
                if let Ok(s) = eos.state(p, t) {
                    floor = floor.min(s.z_eff);
                }
            }
        }
        ReferenceModel {
            gas: fluid.gas(),
            z_floor: (0.8 * floor).max(0.05),
            fluid,
        }
    }

    /// The fluid.
    pub fn fluid(&self) -> &Fluid {
        &self.fluid
    }

    /// The answer in f64.
    pub fn answer(&self, p_pa: f64, t_k: f64) -> ZPoint<f64> {
        let e = &self.fluid;
        let mut flags = Status::OK;
        let mut t = t_k;
        let (t_min, t_max) = (e.temperature_min_k(), e.temperature_max_k());
        if t < t_min || t > t_max {
            flags |= Status::MODEL_OUT_OF_RANGE;
            t = t.clamp(t_min, t_max);
        }
        let mut p = p_pa.max(0.0);
        if p > e.pressure_max_pa() {
            flags |= Status::MODEL_OUT_OF_RANGE;
            p = e.pressure_max_pa();
        }
        if let Some(ps) = e.condensation_pressure_pa(t)
            && p >= ps
        {
            // A pure gas far above its vapour pressure: no vapour space
            // left (the same margin as the device models).
            flags |= if self.gas.mixture().is_some() {
                self.gas.phase_flag()
            } else if p > ps * (1.0 + LIQUID_FULL_MARGIN) {
                Status::LIQUID_FULL
            } else {
                Status::TWO_PHASE
            };
            p = ps * (1.0 - 1e-9);
        }
        // Slopes at p = 0 are the low-pressure limit: take them just above.
        let pe = p.max(1.0);
        let state = match e {
            Fluid::Pure(_) => e.state(pe, t),
            // Already below the dew line: no second check.
            Fluid::Mixture(_) => e.state_any_phase(pe, t),
        };
        match state {
            Ok(s) => {
                let z = if p == 0.0 { e.z_eff_factor() } else { s.z_eff };
                // Z_eff = p·M/(ρ·R·T): dZ/dp = Z(1/p − ρ_p/ρ), dZ/dT = −Z(1/T + ρ_T/ρ).
                let dz_dp = s.z_eff * (1.0 / pe - s.drho_dp_mol_m3_pa / s.density_mol_m3);
                let dz_dt = -s.z_eff * (1.0 / t + s.drho_dt_mol_m3_k / s.density_mol_m3);
                ZPoint {
                    z: z.max(self.z_floor),
                    dz_dp_per_mpa: dz_dp * 1e6,
                    dz_dt_per_k: dz_dt,
                    flags,
                }
            }
            Err(_) => ZPoint {
                z: 1.0,
                dz_dp_per_mpa: 0.0,
                dz_dt_per_k: 0.0,
                flags: flags | Status::MODEL_OUT_OF_RANGE,
            },
        }
    }
}

impl Compressibility<f64> for ReferenceModel {
    fn gas(&self) -> Gas {
        self.gas
    }
    fn kind(&self) -> &'static str {
        "reference"
    }
    fn range(&self) -> ModelRange {
        ModelRange {
            pressure_max_pa: self.fluid.pressure_max_pa(),
            temperature_min_k: self.fluid.temperature_min_k(),
            temperature_max_k: self.fluid.temperature_max_k(),
        }
    }
    fn z(&self, p_pa: f64, t_k: f64) -> ZPoint<f64> {
        self.answer(p_pa, t_k)
    }
}

impl CompressibilityFx for ReferenceModel {
    fn gas(&self) -> Gas {
        self.gas
    }
    fn z_fx(&self, p: fx::Pressure, t: fx::Temperature) -> ZPointFx {
        let a = self.answer(fx::to_f64(p), fx::to_f64(t));
        ZPointFx {
            z: fx::Compressibility::saturating_from_num(a.z.max(self.z_floor)),
            dz_dp_per_mpa: fx::ZSlope::saturating_from_num(a.dz_dp_per_mpa),
            dz_dt_per_k: fx::ZSlope::saturating_from_num(a.dz_dt_per_k),
            flags: a.flags,
        }
    }
    fn z_floor(&self) -> fx::Compressibility {
        fx::Compressibility::saturating_from_num(self.z_floor)
    }
}
