//! Uncertainty of the content estimate: first-order propagation after the
//! GUM (JCGM 100:2008, "Evaluation of measurement data — Guide to the
//! expression of uncertainty in measurement", clauses 5.1.2 and 6.2–6.3),
//! expanded with the coverage factor k = 2.
//!
//! # Method
//!
//! The mass is m = V₀·f(p, T)·p·M / (Z(p, T)·R·T), with V₀ the water
//! capacity and f the vessel factor V/V₀. The inputs are taken as
//! uncorrelated, each with a declared standard uncertainty (k = 1):
//!
//! | input | standard uncertainty u |
//! |---|---|
//! | pressure p | u(p)² = (u_FS·p_FS)² + (u_rd·p)² — a part in full scale and a part in reading |
//! | temperature T | u(T), K |
//! | water capacity V₀ | u_V relative |
//! | gas model Z | u_Z relative (the model's declared relative uncertainty of density) |
//!
//! The sensitivity coefficients come from the gas model's derivatives
//! ([`ZPoint`](crate::model::ZPoint) carries ∂Z/∂p and ∂Z/∂T):
//!
//! * c_p = ∂ln m/∂ln p = 1 − (p/Z)·∂Z/∂p + e_p·p
//! * c_T = ∂ln m/∂ln T = −1 − (T/Z)·∂Z/∂T + e_T·T
//!
//! (e_p, e_T: the vessel's elastic and thermal expansion; the vessel factor in
//! their denominators is taken as 1, a second-order simplification.) The
//! combined standard uncertainty of mass (GUM eq. 10) is
//!
//! u(m)² = (c_p·(m/p)·u_FS·p_FS)² + (c_p·m·u_rd)² + (c_T·m·u(T)/T)² + (m·u_V)² + (m·u_Z)²
//!
//! where m/p = V₀·f·M/(Z·R·T) stays finite at p = 0 (so the full-scale part
//! still counts on an empty tank). The fill fraction is m/m_rated with both
//! computed from the same V₀ and model: the capacity cancels, and the model's
//! errors at the sample and at the rated state are taken as uncorrelated
//! (a conservative choice: they are partly correlated in practice), so
//!
//! u(F)² = [(c_p·(m/p)·u_FS·p_FS)² + (c_p·m·u_rd)² + (c_T·m·u(T)/T)² + 2·(m·u_Z)²] / m_rated²
//!
//! The expanded uncertainties are U = 2·u (k = 2; about 95 % coverage for a
//! normal distribution, GUM 6.2–6.3). A datasheet limit ±a with no stated
//! distribution is entered as u = a/√3 (rectangular, GUM 4.3.7).
//!
//! Not included: sensor noise after smoothing (small next to the systematic
//! parts at one sample a second), the temperature difference between the gas
//! and its sensor after fast fills (see the settling prediction), and
//! correlation between inputs.

pub mod fixed;
pub mod float;
