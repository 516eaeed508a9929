//! # isochor-eos
//!
//! The physics of gases on the host, in `f64` and without I/O: the reference
//! equations of state, the reference as a gas model for the core, the builder
//! and checker of device gas models, quantities with units, and the cautions
//! that go with every gas.
//!
//! * the crate root — the reference equations of state ([`Eos`]), below;
//! * [`reference`](mod@reference) — the reference equation of state as a gas model;
//! * [`model`] — building and checking device gas models;
//! * [`units`] — quantities with units (`200bar`, `35C`, `50L`);
//! * [`safety`] — the cautions printed with every human-readable result.
//!
//! # Reference equations of state
//!
//! Each gas is described by a multiparameter equation of state explicit in the
//! reduced Helmholtz energy, α(τ, δ) = α⁰ + αʳ with τ = T_r/T and
//! δ = ρ/ρ_r. The residual part αʳ alone gives the pressure–density–
//! temperature behaviour:
//!
//! * p = ρ·R·T·(1 + δ·∂αʳ/∂δ), so Z = 1 + δ·∂αʳ/∂δ;
//! * ∂p/∂ρ|_T = R·T·(1 + 2δ·αʳ_δ + δ²·αʳ_δδ);
//! * ∂p/∂T|_ρ = ρ·R·(1 + δ·αʳ_δ − δτ·αʳ_δτ).
//!
//! αʳ is a sum of terms of the forms used by the reference equations:
//! power terms `n δ^d τ^t` (times `exp(−δ^l)` when l > 0), Gaussian bell-shaped
//! terms `n δ^d τ^t exp(−η(δ−ε)² − β(τ−γ)²)`, and the non-analytic terms of
//! carbon dioxide `n Δ^b δ ψ`. Derivatives are exact (second-order dual
//! numbers, [`dual`]).
//!
//! The ideal-gas part α⁰ ([`IdealTerm`]) adds the caloric properties
//! ([`Eos::caloric`]): u = RT·τ(α⁰_τ + αʳ_τ), h = u + RT(1 + δαʳ_δ),
//! c_v = −R·τ²(α⁰_ττ + αʳ_ττ), c_p = c_v + R(1 + δαʳ_δ − δτ·αʳ_δτ)²/(1 + 2δαʳ_δ +
//! δ²αʳ_δδ) and w² = (c_p/c_v)·(∂p/∂ρ)_T/M (Span, "Multiparameter Equations of
//! State", Springer 2000, table 3.1; from memory), on CoolProp's reference
//! state for u and h.
//!
//! The coefficients are data: one file per gas in `host-sim/eos/data/`,
//! exported from CoolProp 8.0.0 by `host-sim/eos/tools/export_eos.py` (format in
//! DEVELOPERS.md), compiled into the binary. Each equation keeps its own gas
//! constant R, molar mass, reducing state and declared range.
//!
//! Density from (p, T) is solved on the gas / supercritical branch by a
//! safeguarded Newton iteration (bracket kept, bisection when a step leaves it).
//! States outside the declared range, and liquid or two-phase states (below
//! the critical temperature at or above the saturation pressure given by the
//! fluid's ancillary equation), are refused with a typed error.

pub mod composition;
pub mod dual;
mod error;
pub mod fluid;
mod format;
pub mod gerg;
pub mod model;
pub mod reference;
pub mod safety;
pub mod units;

pub use error::Error;

use dual::D2;
use isochor_core::Gas;
use isochor_core::constants::MOLAR_GAS_CONSTANT_J_MOL_K;
use std::sync::OnceLock;

pub use format::parse;

/// One residual Helmholtz-energy term.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Term {
    /// `n δ^d τ^t exp(−δ^l)` (no exponential when `l` = 0).
    Power {
        /// Coefficient.
        n: f64,
        /// Density exponent.
        d: f64,
        /// Temperature exponent.
        t: f64,
        /// Exponent inside the exponential (0: none).
        l: f64,
    },
    /// `n δ^d τ^t exp(−η(δ−ε)² − β(τ−γ)²)`.
    Gaussian {
        /// Coefficient.
        n: f64,
        /// Density exponent.
        d: f64,
        /// Temperature exponent.
        t: f64,
        /// η.
        eta: f64,
        /// ε.
        epsilon: f64,
        /// β.
        beta: f64,
        /// γ.
        gamma: f64,
    },
    /// `n Δ^b δ ψ` with `Δ = θ² + B((δ−1)²)^a`,
    /// `θ = (1−τ) + A((δ−1)²)^(1/(2β))`, `ψ = exp(−C(δ−1)² − D(τ−1)²)`
    /// (Span & Wagner 1996).
    NonAnalytic {
        /// Coefficient.
        n: f64,
        /// a.
        a: f64,
        /// b.
        b: f64,
        /// β.
        beta: f64,
        /// A.
        big_a: f64,
        /// B.
        big_b: f64,
        /// C.
        big_c: f64,
        /// D.
        big_d: f64,
    },
}

impl Term {
    fn eval(&self, tau: D2, delta: D2) -> D2 {
        match *self {
            Term::Power { n, d, t, l } => {
                let mut x = delta.powf(d) * tau.powf(t);
                if l > 0.0 {
                    x = x * (-delta.powf(l)).exp();
                }
                x.scale(n)
            }
            Term::Gaussian {
                n,
                d,
                t,
                eta,
                epsilon,
                beta,
                gamma,
            } => {
                let de = delta - D2::c(epsilon);
                let tg = tau - D2::c(gamma);
                let e = (de * de).scale(-eta) - (tg * tg).scale(beta);
                (delta.powf(d) * tau.powf(t) * e.exp()).scale(n)
            }
            Term::NonAnalytic {
                n,
                a,
                b,
                beta,
                big_a,
                big_b,
                big_c,
                big_d,
            } => {
                let dm = delta - D2::c(1.0);
                let dm2 = dm * dm;
                let tm = tau - D2::c(1.0);
                let theta = (D2::c(1.0) - tau) + dm2.powf(1.0 / (2.0 * beta)).scale(big_a);
                let big_delta = theta * theta + dm2.powf(a).scale(big_b);
                let psi = (dm2.scale(-big_c) - (tm * tm).scale(big_d)).exp();
                (big_delta.powf(b) * delta * psi).scale(n)
            }
        }
    }
}

/// One term of the ideal-gas part α⁰(τ, δ) (CoolProp's forms).
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum IdealTerm {
    /// `ln δ + a1 + a2·τ`.
    Lead {
        /// Constant.
        a1: f64,
        /// Coefficient of τ.
        a2: f64,
    },
    /// `a1 + a2·τ` (the reference-state offset of u and s).
    Offset {
        /// Constant.
        a1: f64,
        /// Coefficient of τ.
        a2: f64,
    },
    /// `a·ln τ`.
    LogTau {
        /// Coefficient.
        a: f64,
    },
    /// `n·τ^t`.
    Power {
        /// Coefficient.
        n: f64,
        /// Exponent.
        t: f64,
    },
    /// `n·ln(c + d·exp(θ·τ))` (Planck–Einstein; the usual
    /// `n·ln(1 − exp(−t·τ))` is θ = −t, c = 1, d = −1).
    PlanckEinstein {
        /// Coefficient.
        n: f64,
        /// θ.
        theta: f64,
        /// c.
        c: f64,
        /// d.
        d: f64,
    },
}

impl IdealTerm {
    /// The value and the first two τ-derivatives (the δ part is `ln δ` in
    /// [`IdealTerm::Lead`], handled by the caller).
    fn eval_tau(&self, tau: f64) -> (f64, f64, f64) {
        match *self {
            IdealTerm::Lead { a1, a2 } | IdealTerm::Offset { a1, a2 } => (a1 + a2 * tau, a2, 0.0),
            IdealTerm::LogTau { a } => (a * libm::log(tau), a / tau, -a / (tau * tau)),
            IdealTerm::Power { n, t } => {
                let v = n * libm::pow(tau, t);
                (v, v * t / tau, v * t * (t - 1.0) / (tau * tau))
            }
            IdealTerm::PlanckEinstein { n, theta, c, d } => {
                let e = libm::exp(theta * tau);
                let g = c + d * e;
                (
                    n * libm::log(g),
                    n * d * theta * e / g,
                    n * c * d * theta * theta * e / (g * g),
                )
            }
        }
    }
}

/// Caloric properties at one (ρ, T), molar basis, on the reference state of
/// the equation as CoolProp sets it (only differences of u and h matter).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Caloric {
    /// Pressure, Pa.
    pub pressure_pa: f64,
    /// ∂p/∂ρ at constant T, Pa per mol/m³.
    pub dp_drho: f64,
    /// ∂p/∂T at constant ρ, Pa/K.
    pub dp_dt: f64,
    /// Molar internal energy, J/mol.
    pub u_j_mol: f64,
    /// Molar enthalpy, J/mol.
    pub h_j_mol: f64,
    /// Isochoric molar heat capacity, J/(mol·K).
    pub cv_j_mol_k: f64,
    /// Isobaric molar heat capacity, J/(mol·K).
    pub cp_j_mol_k: f64,
    /// Speed of sound, m/s.
    pub speed_of_sound_m_s: f64,
}

/// A saturation ancillary equation:
/// `y = y_r · exp((T_r/T if tau_r) · Σ nᵢ θ^tᵢ)`, θ = 1 − T/T_r.
#[derive(Clone, Debug, PartialEq)]
pub struct Ancillary {
    /// Reducing temperature, K.
    pub t_r: f64,
    /// Reducing value (Pa or mol/m³).
    pub y_r: f64,
    /// Whether the sum is multiplied by T_r/T.
    pub tau_r: bool,
    /// Validity, K.
    pub t_min: f64,
    /// Validity, K (the top of the saturation line).
    pub t_max: f64,
    /// (nᵢ, tᵢ).
    pub terms: Vec<(f64, f64)>,
}

impl Ancillary {
    /// The value at `t_k` (meaningful for `t_min ≤ T ≤ t_max`).
    pub fn eval(&self, t_k: f64) -> f64 {
        let theta = (1.0 - t_k / self.t_r).max(0.0);
        let s: f64 = self
            .terms
            .iter()
            .map(|&(n, t)| n * libm::pow(theta, t))
            .sum();
        let f = if self.tau_r { self.t_r / t_k } else { 1.0 };
        self.y_r * libm::exp(f * s)
    }
}

/// A reference equation of state of one gas.
#[derive(Clone, Debug, PartialEq)]
pub struct Eos {
    /// The gas.
    pub gas: Gas,
    /// CoolProp's name of the fluid and the CoolProp version exported from.
    pub coolprop: String,
    /// The original publications (the first is the equation of state).
    pub sources: Vec<String>,
    /// Molar mass, kg/mol.
    pub molar_mass_kg_mol: f64,
    /// The equation's own molar gas constant, J/(mol·K).
    pub gas_constant: f64,
    /// Reducing temperature, K.
    pub reducing_temperature_k: f64,
    /// Reducing density, mol/m³.
    pub reducing_density_mol_m3: f64,
    /// Critical temperature, K.
    pub critical_temperature_k: f64,
    /// Critical pressure, Pa.
    pub critical_pressure_pa: f64,
    /// Critical density, mol/m³.
    pub critical_density_mol_m3: f64,
    /// Declared range: lowest temperature (triple point), K.
    pub temperature_min_k: f64,
    /// Declared range: highest temperature, K.
    pub temperature_max_k: f64,
    /// Declared range: highest pressure, Pa.
    pub pressure_max_pa: f64,
    /// Saturation (dew) pressure ancillary, Pa.
    pub saturation_pressure: Ancillary,
    /// Saturated vapour density ancillary, mol/m³.
    pub vapour_density: Ancillary,
    /// The residual terms.
    pub terms: Vec<Term>,
    /// The ideal-gas terms.
    pub ideal: Vec<IdealTerm>,
}

/// Where a state lies.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Phase {
    /// Gas (vapour below the critical temperature, or above it below the
    /// critical pressure).
    Gas,
    /// Above both the critical temperature and the critical pressure.
    Supercritical,
}

impl Phase {
    /// Stable name, as in JSON.
    pub fn name(self) -> &'static str {
        match self {
            Phase::Gas => "gas",
            Phase::Supercritical => "supercritical",
        }
    }
}

/// A solved state.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct State {
    /// Temperature, K.
    pub temperature_k: f64,
    /// Pressure, Pa.
    pub pressure_pa: f64,
    /// Molar density, mol/m³.
    pub density_mol_m3: f64,
    /// Mass density, kg/m³.
    pub density_kg_m3: f64,
    /// The equation's own compressibility factor, p/(ρ·R_eos·T).
    pub z: f64,
    /// Effective compressibility factor with the CODATA 2018 gas constant:
    /// p·M/(ρ·R·T). This is the Z that reproduces this mass density in the
    /// content estimate (which uses CODATA R).
    pub z_eff: f64,
    /// ∂ρ/∂p at constant T, (mol/m³)/Pa.
    pub drho_dp_mol_m3_pa: f64,
    /// ∂ρ/∂T at constant p, (mol/m³)/K.
    pub drho_dt_mol_m3_k: f64,
    /// Gas or supercritical.
    pub phase: Phase,
}

/// αʳ_δ, αʳ_δδ, αʳ_δτ, αʳ_τ, αʳ_ττ at one point.
struct Residual {
    d: f64,
    dd: f64,
    td: f64,
    t: f64,
    tt: f64,
}

impl Eos {
    /// The built-in equation of state of `gas` (parsed once from the
    /// committed data).
    ///
    /// # Panics
    ///
    /// For [`Gas::Mixture`]: a mixture's equation (GERG-2008) needs its
    /// composition, see [`fluid::Fluid`].
    pub fn of(gas: Gas) -> &'static Eos {
        assert!(
            gas.mixture().is_none(),
            "Eos::of: a mixture is evaluated through fluid::Fluid (GERG-2008)"
        );
        static ALL: OnceLock<Vec<Eos>> = OnceLock::new();
        let all = ALL.get_or_init(|| {
            Gas::ALL
                .iter()
                .map(|&g| match parse(data(g)) {
                    Ok(e) if e.gas == g => e,
                    Ok(e) => panic!("EOS data of {g} names {}", e.gas),
                    Err(e) => panic!("committed EOS data of {g} is malformed: {e}"),
                })
                .collect()
        });
        let i = Gas::ALL.iter().position(|&g| g == gas).unwrap_or(0);
        &all[i]
    }

    /// The publication of the equation of state (first source line).
    pub fn source(&self) -> &str {
        self.sources.first().map(String::as_str).unwrap_or("")
    }

    /// Temperature below which the gas can be liquid or two-phase (top of the
    /// saturation ancillary).
    pub fn saturation_temperature_max_k(&self) -> f64 {
        self.saturation_pressure.t_max
    }

    /// Saturation (dew) pressure at `t_k` from the ancillary equation, Pa;
    /// `None` at or above the top of the saturation line.
    pub fn saturation_pressure_pa(&self, t_k: f64) -> Option<f64> {
        (t_k < self.saturation_pressure.t_max).then(|| self.saturation_pressure.eval(t_k))
    }

    fn residual(&self, tau: f64, delta: f64) -> Residual {
        // The non-analytic terms are singular at δ = 1 exactly; nudge.
        let delta = if (delta - 1.0).abs() < 1e-12 {
            1.0 + 1e-12
        } else {
            delta
        };
        let (t, d) = (D2::tau(tau), D2::delta(delta));
        let sum = self
            .terms
            .iter()
            .fold(D2::default(), |acc, term| acc + term.eval(t, d));
        Residual {
            d: sum.d,
            dd: sum.dd,
            td: sum.td,
            t: sum.t,
            tt: sum.tt,
        }
    }

    /// Isochoric molar heat capacity of the ideal gas c_v⁰ = −R·τ²·α⁰_ττ at
    /// `t_k`, J/(mol·K) (no residual terms: cheap).
    pub fn ideal_cv(&self, t_k: f64) -> f64 {
        let tau = self.reducing_temperature_k / t_k;
        let tt: f64 = self.ideal.iter().map(|term| term.eval_tau(tau).2).sum();
        -self.gas_constant * tau * tau * tt
    }

    /// Caloric properties at a molar density and temperature (one evaluation
    /// of every term; no iteration).
    pub fn caloric(&self, rho_mol_m3: f64, t_k: f64) -> Caloric {
        let delta = rho_mol_m3 / self.reducing_density_mol_m3;
        let tau = self.reducing_temperature_k / t_k;
        let r = self.residual(tau, delta);
        let (mut i_t, mut i_tt) = (0.0, 0.0);
        for term in &self.ideal {
            let (_, a, b) = term.eval_tau(tau);
            i_t += a;
            i_tt += b;
        }
        let big_r = self.gas_constant;
        let rt = big_r * t_k;
        let p = rho_mol_m3 * rt * (1.0 + delta * r.d);
        let dp_drho_red = 1.0 + 2.0 * delta * r.d + delta * delta * r.dd;
        let dp_dt_red = 1.0 + delta * r.d - delta * tau * r.td;
        let u = rt * tau * (i_t + r.t);
        let cv = -big_r * tau * tau * (i_tt + r.tt);
        let cp = cv + big_r * dp_dt_red * dp_dt_red / dp_drho_red;
        let w2 = cp / cv * rt * dp_drho_red / self.molar_mass_kg_mol;
        Caloric {
            pressure_pa: p,
            dp_drho: rt * dp_drho_red,
            dp_dt: rho_mol_m3 * big_r * dp_dt_red,
            u_j_mol: u,
            h_j_mol: u + rt * (1.0 + delta * r.d),
            cv_j_mol_k: cv,
            cp_j_mol_k: cp,
            speed_of_sound_m_s: libm::sqrt(w2.max(0.0)),
        }
    }

    /// Pressure (Pa), ∂p/∂ρ (Pa per mol/m³) and ∂p/∂T (Pa/K) at a molar
    /// density and temperature.
    pub fn pressure(&self, rho_mol_m3: f64, t_k: f64) -> (f64, f64, f64) {
        let delta = rho_mol_m3 / self.reducing_density_mol_m3;
        let tau = self.reducing_temperature_k / t_k;
        let r = self.residual(tau, delta);
        let rt = self.gas_constant * t_k;
        let p = rho_mol_m3 * rt * (1.0 + delta * r.d);
        let dp_drho = rt * (1.0 + 2.0 * delta * r.d + delta * delta * r.dd);
        let dp_dt = rho_mol_m3 * self.gas_constant * (1.0 + delta * r.d - delta * tau * r.td);
        (p, dp_drho, dp_dt)
    }

    /// Compressibility factor 1 + δ·αʳ_δ at a molar density and temperature.
    pub fn z_at_density(&self, rho_mol_m3: f64, t_k: f64) -> f64 {
        let delta = rho_mol_m3 / self.reducing_density_mol_m3;
        let tau = self.reducing_temperature_k / t_k;
        1.0 + delta * self.residual(tau, delta).d
    }

    /// Checks that (p, T) is inside the declared range and in the gas or
    /// supercritical region.
    pub fn check(&self, p_pa: f64, t_k: f64) -> Result<(), Error> {
        let name = self.gas.name();
        if !p_pa.is_finite() || !t_k.is_finite() {
            return Err(Error::Invalid(
                "pressure and temperature must be numbers".into(),
            ));
        }
        if p_pa < 0.0 {
            return Err(Error::EosRange(format!(
                "{name}: negative absolute pressure {p_pa} Pa"
            )));
        }
        if t_k < self.temperature_min_k || t_k > self.temperature_max_k {
            return Err(Error::EosRange(format!(
                "{name}: {t_k} K is outside the range of its reference equation of state \
                 ({} K to {} K)",
                self.temperature_min_k, self.temperature_max_k
            )));
        }
        if p_pa > self.pressure_max_pa {
            return Err(Error::EosRange(format!(
                "{name}: {} bar is above the range of its reference equation of state \
                 ({} bar)",
                p_pa / 1e5,
                self.pressure_max_pa / 1e5
            )));
        }
        if let Some(ps) = self.saturation_pressure_pa(t_k)
            && p_pa >= ps
        {
            return Err(Error::TwoPhase(format!(
                "{name} at {t_k} K is liquid or two-phase at or above its saturation \
                 pressure {:.6} bar",
                ps / 1e5
            )));
        }
        Ok(())
    }

    /// Solves the state at absolute pressure `p_pa` and temperature `t_k` on
    /// the gas / supercritical branch.
    pub fn state(&self, p_pa: f64, t_k: f64) -> Result<State, Error> {
        self.check(p_pa, t_k)?;
        let m = self.molar_mass_kg_mol;
        let rt = self.gas_constant * t_k;
        let phase = if t_k >= self.critical_temperature_k && p_pa >= self.critical_pressure_pa {
            Phase::Supercritical
        } else {
            Phase::Gas
        };
        if p_pa == 0.0 {
            return Ok(State {
                temperature_k: t_k,
                pressure_pa: 0.0,
                density_mol_m3: 0.0,
                density_kg_m3: 0.0,
                z: 1.0,
                z_eff: self.gas_constant / MOLAR_GAS_CONSTANT_J_MOL_K,
                drho_dp_mol_m3_pa: 1.0 / rt,
                drho_dt_mol_m3_k: 0.0,
                phase,
            });
        }
        let rho = self.solve_density(p_pa, t_k)?;
        let (_, dp_drho, dp_dt) = self.pressure(rho, t_k);
        let z = self.z_at_density(rho, t_k);
        Ok(State {
            temperature_k: t_k,
            pressure_pa: p_pa,
            density_mol_m3: rho,
            density_kg_m3: rho * m,
            z,
            z_eff: z * self.gas_constant / MOLAR_GAS_CONSTANT_J_MOL_K,
            drho_dp_mol_m3_pa: 1.0 / dp_drho,
            drho_dt_mol_m3_k: -dp_dt / dp_drho,
            phase,
        })
    }

    /// Newton's method on p(ρ) − p = 0 from the ideal-gas density, keeping a
    /// bracket [lo, hi] on the gas branch and bisecting when a step leaves it
    /// or lands where ∂p/∂ρ ≤ 0 (beyond the vapour spinodal).
    fn solve_density(&self, p_pa: f64, t_k: f64) -> Result<f64, Error> {
        let rt = self.gas_constant * t_k;
        let mut lo = 0.0f64;
        let mut hi = f64::INFINITY;
        if t_k < self.vapour_density.t_max {
            // Below the critical temperature the vapour root lies below the
            // saturated vapour density; allow the ancillary's error.
            hi = 1.2 * self.vapour_density.eval(t_k.max(self.vapour_density.t_min));
        }
        let mut rho = (p_pa / rt).min(if hi.is_finite() { 0.5 * hi } else { f64::MAX });
        for _ in 0..300 {
            let (p, dp, _) = self.pressure(rho, t_k);
            let f = p - p_pa;
            if f < 0.0 && dp > 0.0 {
                lo = rho;
            } else {
                hi = rho;
            }
            if f.abs() <= 1e-15 * p_pa {
                return Ok(rho);
            }
            let newton = if dp > 0.0 { rho - f / dp } else { f64::NAN };
            let next = if newton.is_finite() && newton > lo && newton < hi {
                newton
            } else if hi.is_finite() {
                0.5 * (lo + hi)
            } else {
                2.0 * rho.max(lo)
            };
            if (next - rho).abs() <= 4.0 * f64::EPSILON * rho {
                return Ok(next);
            }
            rho = next;
        }
        Err(Error::NoConvergence(format!(
            "{}: density at {p_pa} Pa, {t_k} K did not converge",
            self.gas.name()
        )))
    }
}

/// The committed coefficient file of `gas`.
pub fn data(gas: Gas) -> &'static str {
    match gas {
        Gas::Nitrogen => include_str!("../data/nitrogen.eos"),
        Gas::Oxygen => include_str!("../data/oxygen.eos"),
        Gas::Argon => include_str!("../data/argon.eos"),
        Gas::Helium => include_str!("../data/helium.eos"),
        Gas::Hydrogen => include_str!("../data/hydrogen.eos"),
        Gas::Methane => include_str!("../data/methane.eos"),
        Gas::Air => include_str!("../data/air.eos"),
        Gas::CarbonDioxide => include_str!("../data/carbon_dioxide.eos"),
        Gas::Neon => include_str!("../data/neon.eos"),
        Gas::Krypton => include_str!("../data/krypton.eos"),
        Gas::Xenon => include_str!("../data/xenon.eos"),
        Gas::Ethane => include_str!("../data/ethane.eos"),
        Gas::Propane => include_str!("../data/propane.eos"),
        _ => "",
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_gas_parses_with_core_molar_mass() {
        for g in Gas::ALL {
            let e = Eos::of(g);
            assert_eq!(e.gas, g);
            // The core gas table carries each EOS's own molar mass.
            assert_eq!(e.molar_mass_kg_mol, g.molar_mass_kg_mol(), "{g}");
            assert!(!e.terms.is_empty());
            assert!(e.source().contains('('), "{g}: {}", e.source());
        }
    }

    #[test]
    fn liquid_and_out_of_range_are_refused() {
        let co2 = Eos::of(Gas::CarbonDioxide);
        assert!(matches!(co2.state(80e5, 288.15), Err(Error::TwoPhase(_))));
        assert!(co2.state(40e5, 288.15).is_ok());
        let o2 = Eos::of(Gas::Oxygen);
        assert!(matches!(o2.state(900e5, 300.0), Err(Error::EosRange(_))));
        assert!(matches!(o2.state(1e5, 20.0), Err(Error::EosRange(_))));
    }
}
