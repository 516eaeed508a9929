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
//!
//! Standard volume uses the gas model's own Z at the standard condition (the
//! real-gas standard volume of ISO 13443; Z_std = 1 for the ideal model).

pub mod fixed;
pub mod float;

/// Upper bound on Newton iterations of the settled-pressure solver. Both paths
/// use the same bound, so the loop always terminates.
pub const SETTLE_ITERATIONS: u32 = 8;

/// Lower bound on φ'(p) in the settled-pressure solver. φ' = 1 for an ideal
/// gas in a rigid vessel and approaches 0 only at a critical point; clamping
/// keeps each step bounded there (convergence then slows and may be flagged).
pub const SETTLE_SLOPE_MIN: f64 = 1.0 / 16.0;
