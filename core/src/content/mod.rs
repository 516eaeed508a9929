//! The content estimate: from one (pressure, temperature) sample to density,
//! mass, amount of substance, standard volume, settled pressure and fill
//! fraction.
//!
//! Both paths follow the same steps, under the same names:
//!
//! 1. `clamp_inputs` — limit the sample to the [envelope](crate::envelope),
//!    flagging what was clamped (the outputs are then those of the edge and
//!    not valid: [`Status::CONTENT_INVALID`](crate::Status::CONTENT_INVALID)).
//! 2. gas model — Z and its slopes at (p, T).
//! 3. `density` — ρ = p·M / (Z·R·T).
//! 4. `vessel_factor` — V/V₀ = 1 + e_p·(p − p_atm) + e_T·(T − T_rated).
//! 5. `ρv = ρ·V/V₀`; every extensive output is ρv times a prepared constant:
//!    mass = ρv·V₀, amount = ρv·V₀/M,
//!    standard volume = amount·Z_std·R·T_std/p_std, fill fraction = ρv/ρv_rated
//!    (ρv_rated: the same product at the rated pressure and temperature).
//! 6. `settle` — the settled pressure p_s, the pressure at which the same mass
//!    in the same (elastic) vessel would be at the reference temperature T_ref:
//!    solve φ(p) = p·f(p, T_ref) − τ·Z(p, T_ref) = 0 with τ = ρv·R·T_ref/M,
//!    f the vessel factor, by Newton's method seeded with τ·Z(p, T), at most
//!    [`SETTLE_ITERATIONS`] steps; stopping before convergence flags
//!    [`Status::NOT_CONVERGED`](crate::Status::NOT_CONVERGED).
//! 7. `over_fill` — a fill fraction above [`OVER_FILL_FRACTION`] flags
//!    [`Status::OVER_FILL`](crate::Status::OVER_FILL).
//!
//! # Over-fill
//!
//! The rated (service) pressure of a vessel is the settled pressure of its
//! full content at the rated temperature (15 °C in ISO practice; some
//! markings refer to 21.1 °C, 70 °F). The rated content is therefore the
//! content at the rated pressure and temperature, and "above the rated
//! pressure corrected to the present temperature" is the same statement as
//! "fill fraction above 1": the pressure the rated content develops at the
//! present temperature ([`float::Estimator::pressure_at`] with fraction 1)
//! is that corrected rated pressure, and a gas's pressure rises with its
//! content at a fixed temperature. An estimate is flagged over-filled when
//! its fill fraction exceeds [`OVER_FILL_FRACTION`]; the alarm of the same
//! name family ([`crate::alarm`], `over_pressure`) adds debounce,
//! hysteresis, the settled prediction after a fast fill and an absolute
//! pressure limit.
//!
//! Liquid and two-phase states ([`Status::CONTENT_INVALID`](crate::Status::CONTENT_INVALID))
//! have no valid fill fraction and are never flagged over-filled.
//!
//! Standard volume uses the gas model's own Z at the standard condition (the
//! real-gas standard volume of ISO 13443; Z_std = 1 for the ideal model).

pub mod fixed;
pub mod float;

/// Fill fraction above which an estimate is flagged
/// [`Status::OVER_FILL`](crate::Status::OVER_FILL): 2 % above the rated
/// content. Common practice (no published source): about the expanded
/// uncertainty of a good gauge, so a vessel filled exactly to its rating is
/// not flagged by its own measurement error; the same default as the
/// over-fill criterion of the `over_pressure` alarm
/// ([`Limits::for_tank`](crate::alarm::float::Limits::for_tank)).
pub const OVER_FILL_FRACTION: f64 = 1.02;

/// [`OVER_FILL_FRACTION`] in `Fraction` (U32F32) bits, rounded to nearest.
pub const OVER_FILL_FRACTION_BITS: u64 = 4_380_866_642;

/// Upper bound on Newton iterations of the settled-pressure solver. Both paths
/// use the same bound, so the loop always terminates.
pub const SETTLE_ITERATIONS: u32 = 8;

/// Lower bound on φ'(p) in the settled-pressure solver. φ' = 1 for an ideal
/// gas in a rigid vessel and approaches 0 only at a critical point; clamping
/// keeps each step bounded there (convergence then slows and may be flagged).
pub const SETTLE_SLOPE_MIN: f64 = 1.0 / 16.0;
