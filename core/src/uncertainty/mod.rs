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
//!
//! # The gas–sensor temperature difference
//!
//! A sensor on the wall reads the wall, not the gas. The quiet gas follows
//! its wall with a time constant τ = τ_v·F: τ_v the vessel's gas–wall time
//! constant at the rated content (n·c_v/(h·A); the tracker's settling time
//! constant `settle_time_constant` is that declaration), F the fill
//! fraction (the gas's heat capacity goes with its mass). Two effects
//! follow, each reading as a content error |c_T|·F·ΔT/T:
//!
//! * a draw cools the gas isentropically at (∂T/∂ρ)_s·dρ/dt while the wall
//!   warms it back, so in a steady draw the gas is colder than its wall by
//!   ΔT = τ·(∂ln T/∂ln ρ)_s·T·|dF/dt|/F, with
//!   (∂ln T/∂ln ρ)_s = (R/c_v)·(∂p/∂T)_ρ/(ρ·R) = (R/c_v)·Z·|c_T|/c_p from
//!   the model's own sensitivities and c_v of the ideal gas (a lower bound:
//!   [`float::ideal_r_over_cv`]); as content
//!   u_draw = τ·(R/c_v)·Z·c_T²/c_p·|dF/dt|;
//! * the gas trails the wall's temperature changes by τ and the sensor by
//!   its declared lag u(τ): u_trail = |c_T|·F·|dT/dt|·√(τ² + u(τ)²)/T.
//!
//! dF/dt and dT/dt are the rate window's (see below). The difference is not
//! corrected but widens the budget, u(m)² and u(F)² gaining
//! u_draw² + u_trail² (the reasons are in docs/uncertainty.md); while
//! u_draw exceeds twice the rest of u(F) the gauge reports `not_settled`.
//! The same τ joins u(τ) in quadrature in the rate's lag term below, and
//! u_draw·R/left is a level error of the time to empty, shown only after a
//! steady draw of two gas time constants (the cooling still grows before).
//! A sensor in the gas declares τ_v as about its own time constant (at
//! least 1 min).
//!
//! # Consumption rate and time to empty
//!
//! The tracker ([`crate::track`]) measures the rate R = −dF/dt as the
//! least-squares slope of the last n ≤ 32 block means of the fill fraction F.
//! Its uncertainty is propagated input by input (GUM eq. 10), per block:
//!
//! * **Scatter of the fit** (type A): the standard error of the slope from
//!   the residuals, widened for their lag-1 autocorrelation ρ (0 ≤ ρ ≤ 1) by
//!   the effective sample size n_e = n·(1 − ρ)/(1 + ρ):
//!   u_fit² = SE²·(n − 2)/(n_e − 2), n_e kept ≥ 3 (Santer et al. 2000,
//!   "Statistical significance of trends and trend differences in
//!   layer-average atmospheric temperature time series", J. Geophys. Res.
//!   105(D6), 7337–7356; from memory). Smooth drifts and smoothing longer
//!   than a block make neighbouring residuals alike; the plain SE then
//!   claims far too much.
//! * **Temperature dynamics** (type B). A reading error ε of the temperature
//!   shifts the content by e = k·F·ε with k = c_T/T, and the rate by ė:
//!   - the temperature reading lags (or leads) the gas by τ, declared as a
//!     standard uncertainty u(τ) (`temperature_lag`, not corrected):
//!     ε = −τ·dT/dt and ė = −k·τ·A with A = F·(d²T/dt² − (dT/dt)²/T) +
//!     dF/dt·dT/dt, so u = |k|·u(τ)·|A|;
//!   - a gain error g of the sensor's slope (`temperature_gain`): ε̇ = g·dT/dt,
//!     u = |k|·u(g)·F·|dT/dt|;
//!   - an offset (`temperature_k`): u = |k|·u(T)·|dF/dt − F·(dT/dt)/T|;
//!   - the pressure offset (full-scale part) reads as content
//!     u_FS,F = c_p·(m/p)·u_FS·p_FS/m_rated that goes as 1/(Z·T):
//!     u = |k|·u_FS,F·|dT/dt|.
//!
//!   dT/dt and d²T/dt² come from the tracker's own smoothed temperatures: a
//!   least-squares parabola through the temperature at each block's close
//!   over the rate window and up to as many blocks before it (64 at most;
//!   the curvature's noise falls as the window length to the power −2.5),
//!   the slope taken at the rate window's centre. c_T and c_p are the
//!   sensitivities above, from the gas model's derivatives.
//! * **Scale errors** of the rate in kg/h: the pressure reading part
//!   |c_p|·u_rd·R, the water capacity u_V·R and the model u_Z·R.
//!
//! u(R)² is the sum of the squares; U(R) = 2·u(R) (k = 2) and the reported
//! confidence is 1 − U/|R| (clamped to 0 … 1).
//!
//! The time to empty t = left/R (left = F_end − F_reserve) takes each input
//! through both the level and the rate, since the same error moves both:
//! δt/t = e/left + ė/R. Written as a rate spread u_t = R·u(t)/t:
//!
//! u_t² = u_fit²·[(1 + r·(n − 1)/2)² + r²·(n² − 1)/12]
//!      + (|k|·u(τ)·(F·(dT/dt)·R/left + A))² + (|k|·u(g)·F·dT/dt)²
//!      + (|k|·u(T)·(F_reserve·R/left − F·(dT/dt)/T))² + (u_FS,F·(R/left + k·dT/dt))²
//!      + (c_p·u_rd·F_reserve·R/left)² + 2·(u_Z·F_reserve·R/left)²
//!
//! with r = R/left per block: the fit's scatter reaches t through the slope
//! and through F_end = mean + slope·(n − 1)/2 (mean and slope independent).
//! The pressure gain and the model scale level and rate alike, so only the
//! reserve's share is left; the capacity cancels. The bounds are
//! earliest = left/(R + 2·u_t) and latest = left/(R − 2·u_t) (none when
//! R ≤ 2·u_t).
//!
//! Not included: the delay of the content behind the gas by the pressure
//! smoothing (τ_p × R in the level; 4 s by default), and second-order terms
//! (the product of the lag and the noise of d²T/dt² makes |d²T/dt²| as
//! estimated slightly larger than the truth on average: conservative).

pub mod fixed;
pub mod float;
