//! Gas models: the compressibility factor Z(p, T) and its slopes.
//!
//! The content estimate needs, at a pressure and temperature, the
//! compressibility factor `Z = p / (ρ_molar·R·T)` and its partial derivatives
//! (for the settled-pressure solver and for uncertainty), whether the state is
//! inside the model's validity range, and whether the gas is liquid or
//! two-phase there. That is the whole seam:
//!
//! * [`Compressibility`] — the float form, generic over [`Real`];
//! * [`CompressibilityFx`] — the fixed-point form for devices.
//!
//! A model reports trouble through [`Status`] flags in its answer
//! ([`Status::MODEL_OUT_OF_RANGE`], [`Status::TWO_PHASE`], [`Status::LIQUID_FULL`],
//! and for mixtures [`Status::CONDENSATION_RISK`]); it never fails.
//! Models are per gas: one value answers for one gas.

pub mod device;
mod ideal;

pub use device::DeviceModel;
pub use ideal::Ideal;

use crate::{Gas, Real, Status, fx};

/// A model's answer at one (p, T), float form.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ZPoint<F = f64> {
    /// Compressibility factor Z (1 for an ideal gas).
    pub z: F,
    /// ∂Z/∂p at constant T, per MPa.
    pub dz_dp_per_mpa: F,
    /// ∂Z/∂T at constant p, per K.
    pub dz_dt_per_k: F,
    /// [`Status::MODEL_OUT_OF_RANGE`] and/or [`Status::TWO_PHASE`] or
    /// [`Status::LIQUID_FULL`] (a mixture: [`Status::CONDENSATION_RISK`])
    /// when they apply.
    pub flags: Status,
}

/// A model's answer at one (p, T), fixed-point form (formats in [`fx`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ZPointFx {
    /// Compressibility factor Z.
    pub z: fx::Compressibility,
    /// ∂Z/∂p at constant T, per MPa.
    pub dz_dp_per_mpa: fx::ZSlope,
    /// ∂Z/∂T at constant p, per K.
    pub dz_dt_per_k: fx::ZSlope,
    /// [`Status::MODEL_OUT_OF_RANGE`] and/or [`Status::TWO_PHASE`] or
    /// [`Status::LIQUID_FULL`] when they apply.
    pub flags: Status,
}

/// The states a model declares itself valid for.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ModelRange {
    /// Highest pressure, Pa.
    pub pressure_max_pa: f64,
    /// Lowest temperature, K.
    pub temperature_min_k: f64,
    /// Highest temperature, K.
    pub temperature_max_k: f64,
}

/// The float form of a gas model.
pub trait Compressibility<F: Real> {
    /// The gas this model describes.
    fn gas(&self) -> Gas;
    /// Short stable name of the model kind (`"ideal"`, `"device"`, `"reference"`).
    fn kind(&self) -> &'static str;
    /// Where the model is valid.
    fn range(&self) -> ModelRange;
    /// Z and its slopes at absolute pressure `p_pa` (Pa) and temperature
    /// `t_k` (K). Inputs are finite and inside the envelope (callers clamp).
    fn z(&self, p_pa: F, t_k: F) -> ZPoint<F>;
}

/// Most coefficients an [`IsothermFx`] holds (a device model's pressure
/// basis functions: knots + 2). None on ARMv6-M (Cortex-M0/M0+/M1, no 32-bit
/// atomics), whose reference board has 16 KiB of RAM and does without the
/// settled-pressure table that uses the isotherm (see
/// `content::fixed::SETTLE_TABLE_INTERVALS`): an isotherm without
/// coefficients answers through [`CompressibilityFx::z_fx`].
pub const ISOTHERM_COEFS: usize = if cfg!(all(target_arch = "arm", not(target_has_atomic = "32"))) {
    0
} else {
    device::MAX_KNOTS + 2
};

/// Z(p) along one isotherm, prepared once by a model
/// ([`CompressibilityFx::isotherm_fx`]) so that evaluations at that
/// temperature ([`CompressibilityFx::isotherm_z_fx`]) work along the
/// pressure axis only. The content estimate prepares the isotherm of its
/// settled reference temperature.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct IsothermFx {
    /// The temperature of the isotherm.
    pub temperature: fx::Temperature,
    /// Model-specific data (a device model: the coefficients of the pressure
    /// basis functions at this temperature, and its boundary pressures).
    pub(crate) coefs: heapless::Vec<u32, ISOTHERM_COEFS>,
    /// Highest gas pressure and highest covered pressure at this
    /// temperature (raw bits; device models of liquefiable gases).
    pub(crate) saturation: u32,
    pub(crate) limit: u32,
    /// Flags every answer on this isotherm carries (temperature outside the
    /// model's range).
    pub(crate) flags: Status,
}

impl IsothermFx {
    /// An isotherm without prepared data: evaluations go through
    /// [`CompressibilityFx::z_fx`].
    pub fn plain(temperature: fx::Temperature) -> IsothermFx {
        IsothermFx {
            temperature,
            ..IsothermFx::default()
        }
    }
}

/// The fixed-point form of a gas model.
///
/// Contract for implementors: never panic, answer every input (clamping to
/// the model's range and flagging [`Status::MODEL_OUT_OF_RANGE`]), and never
/// return a Z below [`CompressibilityFx::z_floor`].
pub trait CompressibilityFx {
    /// The gas this model describes.
    fn gas(&self) -> Gas;
    /// Z and its slopes at absolute pressure `p` and temperature `t`.
    fn z_fx(&self, p: fx::Pressure, t: fx::Temperature) -> ZPointFx;
    /// Z alone and the flags (the per-sample call; models whose slopes cost
    /// extra work skip them here).
    fn z_value_fx(&self, p: fx::Pressure, t: fx::Temperature) -> (fx::Compressibility, Status) {
        let z = self.z_fx(p, t);
        (z.z, z.flags)
    }
    /// The settled pressure of a content τ = ρv·R·T_ref/M (raw `Pressure`
    /// bits), where the model carries a settled-pressure table prepared for
    /// the estimator's setup (a prepared configuration's model does); `None`
    /// otherwise or beyond the table.
    fn settle_fx(&self, _tau: u32) -> Option<u32> {
        None
    }
    /// The smallest Z the model returns. The estimator sizes its internal
    /// density scale from it (a smaller floor costs density resolution).
    fn z_floor(&self) -> fx::Compressibility;
    /// The pressures (raw [`fx::Pressure`] bits, increasing) where the
    /// model's Z(p) changes form — a device model's pressure knots. Prepared
    /// tables along pressure put their nodes there. Empty (the default): Z is
    /// smooth in pressure.
    fn pressure_knots_fx(&self) -> &[u32] {
        &[]
    }
    /// Prepares the isotherm `t` for [`CompressibilityFx::isotherm_z_fx`]
    /// (preparation time; may divide). The default prepares nothing.
    fn isotherm_fx(&self, t: fx::Temperature) -> IsothermFx {
        IsothermFx::plain(t)
    }
    /// Z and its slopes at pressure `p` on a prepared isotherm: the same
    /// answer as `z_fx(p, iso.temperature)` (within the rounding of the
    /// fixed-point formats), cheaper. The default calls
    /// [`CompressibilityFx::z_fx`].
    fn isotherm_z_fx(&self, iso: &IsothermFx, p: fx::Pressure) -> ZPointFx {
        self.z_fx(p, iso.temperature)
    }
}

impl<F: Real, M: Compressibility<F>> Compressibility<F> for &M {
    fn gas(&self) -> Gas {
        (**self).gas()
    }
    fn kind(&self) -> &'static str {
        (**self).kind()
    }
    fn range(&self) -> ModelRange {
        (**self).range()
    }
    fn z(&self, p_pa: F, t_k: F) -> ZPoint<F> {
        (**self).z(p_pa, t_k)
    }
}

impl<M: CompressibilityFx> CompressibilityFx for &M {
    fn gas(&self) -> Gas {
        (**self).gas()
    }
    fn z_fx(&self, p: fx::Pressure, t: fx::Temperature) -> ZPointFx {
        (**self).z_fx(p, t)
    }
    fn z_value_fx(&self, p: fx::Pressure, t: fx::Temperature) -> (fx::Compressibility, Status) {
        (**self).z_value_fx(p, t)
    }
    fn settle_fx(&self, tau: u32) -> Option<u32> {
        (**self).settle_fx(tau)
    }
    fn z_floor(&self) -> fx::Compressibility {
        (**self).z_floor()
    }
    fn pressure_knots_fx(&self) -> &[u32] {
        (**self).pressure_knots_fx()
    }
    fn isotherm_fx(&self, t: fx::Temperature) -> IsothermFx {
        (**self).isotherm_fx(t)
    }
    fn isotherm_z_fx(&self, iso: &IsothermFx, p: fx::Pressure) -> ZPointFx {
        (**self).isotherm_z_fx(iso, p)
    }
}
