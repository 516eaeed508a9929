//! The ideal gas: Z = 1 everywhere.
//!
//! Exact in the limit p → 0 and the model every real-gas model must reduce to
//! there. At high pressure it is wrong by several to tens of per cent (see
//! docs/gases.md); it is the baseline, not a recommendation.

use super::{Compressibility, CompressibilityFx, ModelRange, ZPoint, ZPointFx};
use crate::{Gas, Real, Status, envelope, fx};

/// The ideal-gas model for one gas.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Ideal {
    gas: Gas,
}

impl Ideal {
    /// The ideal-gas model of `gas`.
    pub const fn new(gas: Gas) -> Ideal {
        Ideal { gas }
    }
}

impl<F: Real> Compressibility<F> for Ideal {
    fn gas(&self) -> Gas {
        self.gas
    }
    fn kind(&self) -> &'static str {
        "ideal"
    }
    fn range(&self) -> ModelRange {
        ModelRange {
            pressure_max_pa: envelope::PRESSURE_MAX_PA,
            temperature_min_k: envelope::TEMPERATURE_MIN_K,
            temperature_max_k: envelope::TEMPERATURE_MAX_K,
        }
    }
    fn z(&self, _p_pa: F, _t_k: F) -> ZPoint<F> {
        ZPoint {
            z: F::ONE,
            dz_dp_per_mpa: F::ZERO,
            dz_dt_per_k: F::ZERO,
            flags: Status::OK,
        }
    }
}

impl CompressibilityFx for Ideal {
    fn gas(&self) -> Gas {
        self.gas
    }
    fn z_fx(&self, _p: fx::Pressure, _t: fx::Temperature) -> ZPointFx {
        ZPointFx {
            z: fx::Compressibility::ONE,
            dz_dp_per_mpa: fx::ZSlope::ZERO,
            dz_dt_per_k: fx::ZSlope::ZERO,
            flags: Status::OK,
        }
    }
    fn z_floor(&self) -> fx::Compressibility {
        fx::Compressibility::ONE
    }
}
