//! GERG-2008: the reference equation of state of mixtures (Kunz & Wagner,
//! J. Chem. Eng. Data 57 (2012) 3032; ISO 20765-2).
//!
//! The mixture's reduced Helmholtz energy is
//! α(τ, δ, x) = α⁰(ρ, T, x) + Σᵢ xᵢ α⁰ʳᵢ(τ, δ) + Σᵢ<ⱼ xᵢxⱼFᵢⱼ αʳᵢⱼ(τ, δ), with
//! τ = T_r(x)/T and δ = ρ/ρ_r(x) from the reducing functions
//! v_r = Σᵢ Σⱼ xᵢxⱼ β_v,ij γ_v,ij (xᵢ + xⱼ)/(β²_v,ij xᵢ + xⱼ) · v_c,ij (and the
//! same form for T_r). The pure-fluid terms are `n τ^t δ^d exp(−δ^c)`, the
//! departure functions of the 15 binaries that have one add
//! `n τ^t δ^d exp(−η(δ−ε)² − β(δ−γ))` terms. Coefficients: [`coefficients`]
//! (the publication's values as coded in NIST's AGA8 reference code).
//!
//! A [`Gerg`] is prepared for one composition: every coefficient is multiplied
//! by its composition factor once, and the terms that depend on τ only are
//! computed once per temperature, so a density solve evaluates only the δ
//! parts (a handful of exponentials) per Newton step. The general evaluation
//! at any composition of the same components ([`Gerg::ln_fugacity_coefficients`]) serves the
//! phase-stability test ([`stability`]).
//!
//! Derivatives follow the usual notation `a_ij = τ^i δ^j ∂^(i+j)αʳ/∂τ^i∂δ^j`:
//! Z = 1 + a01, ∂p/∂ρ = RT(1 + 2a01 + a02), ∂p/∂T = ρR(1 + a01 − a11),
//! c_v = −R(a⁰20 + a20) (Kunz & Wagner 2012, table B1; the same relations as
//! for the pure gases, see the crate root).

pub mod coefficients;
pub mod stability;

use crate::Error;
use crate::composition::{Component, Composition};
use coefficients::*;

/// The molar gas constant of GERG-2008, J/(mol·K).
pub const GAS_CONSTANT: f64 = RGERG;
/// Lowest temperature of GERG-2008's extended range, K.
pub const TEMPERATURE_MIN_K: f64 = 60.0;
/// Highest temperature of GERG-2008's extended range, K.
pub const TEMPERATURE_MAX_K: f64 = 700.0;
/// Highest pressure of GERG-2008's extended range, Pa (70 MPa).
pub const PRESSURE_MAX_PA: f64 = 70.0e6;

/// One residual term of a pure fluid, composition factor included:
/// `n τ^t δ^d exp(−δ^c)` (no exponential when c = 0).
#[derive(Clone, Copy, Debug)]
struct PureTerm {
    n: f64,
    t: f64,
    d: i32,
    c: i32,
}

/// One exponential departure term, composition factor included, in NIST's
/// prepared form `n δ^d exp(c δ² + e δ + g + t ln τ)`.
#[derive(Clone, Copy, Debug)]
struct DepTerm {
    n: f64,
    t: f64,
    d: i32,
    c: f64,
    e: f64,
    g: f64,
}

/// A term prepared for the per-density loop: `n τ^t δ^d` (times
/// `exp(−δ^c)` in the exponential list).
#[derive(Clone, Copy, Debug)]
struct FastTerm {
    n: f64,
    t: f64,
    d: f64,
    di: usize,
    c: f64,
    ci: usize,
    /// Index of τ^t in the distinct exponents.
    ti: usize,
}

/// An exponential departure term prepared: `n·e^g τ^t δ^d exp(cδ² + eδ)`,
/// with exp(cδ² + eδ) shared by the terms of the same (c, e).
#[derive(Clone, Copy, Debug)]
struct FastDep {
    n: f64,
    t: f64,
    d: f64,
    di: usize,
    c: f64,
    e: f64,
    ce: usize,
    ti: usize,
}

/// The terms of a composition in the form the density loop evaluates.
#[derive(Clone, Debug, Default)]
struct Prepared {
    /// Distinct exponents of τ.
    ts: Vec<f64>,
    /// Polynomial terms (pure fluids and departure functions together).
    poly: Vec<FastTerm>,
    /// Pure-fluid terms with exp(−δ^c).
    expo: Vec<FastTerm>,
    /// Exponential departure terms.
    dep: Vec<FastDep>,
    /// Distinct (c, e) of the departure terms.
    ce: Vec<(f64, f64)>,
    /// Largest c of `expo`.
    max_c: usize,
}

impl Prepared {
    fn new(pure: &[PureTerm], dep_poly: &[PureTerm], dep_exp: &[DepTerm]) -> Prepared {
        let mut p = Prepared::default();
        let t_index = |ts: &mut Vec<f64>, t: f64| match ts.iter().position(|&x| x == t) {
            Some(i) => i,
            None => {
                ts.push(t);
                ts.len() - 1
            }
        };
        let mut poly: Vec<PureTerm> = pure
            .iter()
            .chain(dep_poly)
            .filter(|q| q.c == 0)
            .copied()
            .collect();
        merge_pure(&mut poly);
        for q in poly {
            let ti = t_index(&mut p.ts, q.t);
            p.poly.push(FastTerm {
                n: q.n,
                t: q.t,
                d: q.d as f64,
                di: q.d as usize,
                c: 0.0,
                ci: 0,
                ti,
            });
        }
        for q in pure.iter().filter(|q| q.c != 0) {
            let ti = t_index(&mut p.ts, q.t);
            p.max_c = p.max_c.max(q.c as usize);
            p.expo.push(FastTerm {
                n: q.n,
                t: q.t,
                d: q.d as f64,
                di: q.d as usize,
                c: q.c as f64,
                ci: q.c as usize,
                ti,
            });
        }
        for q in dep_exp {
            let ti = t_index(&mut p.ts, q.t);
            let ce = match p.ce.iter().position(|&(c, e)| c == q.c && e == q.e) {
                Some(i) => i,
                None => {
                    p.ce.push((q.c, q.e));
                    p.ce.len() - 1
                }
            };
            p.dep.push(FastDep {
                n: q.n * libm::exp(q.g),
                t: q.t,
                d: q.d as f64,
                di: q.d as usize,
                c: q.c,
                e: q.e,
                ce,
                ti,
            });
        }
        p
    }
}

/// The residual Helmholtz energy and its scaled derivatives `a_ij`.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Residual {
    /// αʳ.
    pub a00: f64,
    /// δ·αʳ_δ.
    pub a01: f64,
    /// δ²·αʳ_δδ.
    pub a02: f64,
    /// τ·αʳ_τ.
    pub a10: f64,
    /// τδ·αʳ_τδ.
    pub a11: f64,
    /// τ²·αʳ_ττ.
    pub a20: f64,
    /// δ³·αʳ_δδδ (the density loop's Halley step; zero from the general
    /// evaluation).
    pub a03: f64,
}

/// The factors of τ of one temperature (computed once per temperature).
#[derive(Clone, Debug, Default)]
pub struct TauCache {
    t_k: f64,
    /// n·τ^t of every term: the polynomial, exponential and departure
    /// lists one after the other.
    nt: Vec<f64>,
    /// Where the exponential and the departure lists start in `nt`.
    expo_at: usize,
    dep_at: usize,
}

impl TauCache {
    fn poly(&self) -> &[f64] {
        self.nt.get(..self.expo_at).unwrap_or(&[])
    }
    fn expo(&self) -> &[f64] {
        self.nt.get(self.expo_at..self.dep_at).unwrap_or(&[])
    }
    fn dep(&self) -> &[f64] {
        self.nt.get(self.dep_at..).unwrap_or(&[])
    }
}

/// GERG-2008 prepared for one composition.
#[derive(Clone, Debug)]
pub struct Gerg {
    composition: Composition,
    /// GERG indices (1…21) of the components, in the composition's order.
    idx: Vec<usize>,
    /// Mole fractions, same order.
    x: Vec<f64>,
    /// Reducing temperature, K.
    t_r: f64,
    /// Reducing density, mol/m³.
    rho_r: f64,
    /// Molar mass, kg/mol.
    molar_mass: f64,
    fast: Prepared,
}

/// A solved state of a mixture.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct MixState {
    /// Molar density, mol/m³.
    pub density_mol_m3: f64,
    /// Compressibility factor p/(ρRT) with GERG-2008's R.
    pub z: f64,
    /// ∂p/∂ρ at constant T, Pa per mol/m³.
    pub dp_drho: f64,
    /// ∂p/∂T at constant ρ, Pa/K.
    pub dp_dt: f64,
}

/// Which density root a solve looks for.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Branch {
    /// The root reached from zero density (gas, or the single fluid phase
    /// above the critical region).
    Gas,
    /// The root reached from a liquid-like density.
    Liquid,
}

/// 1-based coefficient row of a GERG index.
fn row(i: usize) -> usize {
    i
}

impl Gerg {
    /// GERG-2008 for `composition` (its components must be GERG-2008
    /// components; fractions positive, summing to one).
    pub fn new(composition: &Composition) -> Gerg {
        let idx: Vec<usize> = composition
            .parts()
            .iter()
            .map(|(c, _)| c.gerg_index())
            .collect();
        let x: Vec<f64> = composition.parts().iter().map(|&(_, f)| f).collect();
        let (t_r, v_r) = reducing(&idx, &x);
        let molar_mass = idx
            .iter()
            .zip(&x)
            .map(|(&i, &xi)| xi * MMI_GERG[row(i)])
            .sum::<f64>()
            / 1000.0;
        let mut pure = Vec::new();
        for (&i, &xi) in idx.iter().zip(&x) {
            pure.extend(pure_terms(i, xi));
        }
        let mut dep_poly = Vec::new();
        let mut dep_exp = Vec::new();
        for a in 0..idx.len() {
            for b in a + 1..idx.len() {
                let (i, j) = ordered(idx[a], idx[b]);
                let (p, e) = departure_terms(i, j, x[a] * x[b]);
                dep_poly.extend(p);
                dep_exp.extend(e);
            }
        }
        // Terms of the same form (pure fluids sharing exponents, binaries
        // sharing the generalised departure function) are added into one.
        merge_pure(&mut pure);
        merge_dep(&mut dep_exp);
        let fast = Prepared::new(&pure, &dep_poly, &dep_exp);
        Gerg {
            composition: composition.clone(),
            idx,
            x,
            t_r,
            rho_r: 1000.0 / v_r,
            molar_mass,
            fast,
        }
    }

    /// The composition.
    pub fn composition(&self) -> &Composition {
        &self.composition
    }

    /// Molar mass, kg/mol (Σ xᵢMᵢ with GERG-2008's molar masses).
    pub fn molar_mass_kg_mol(&self) -> f64 {
        self.molar_mass
    }

    /// Reducing temperature T_r(x), K.
    pub fn reducing_temperature_k(&self) -> f64 {
        self.t_r
    }

    /// Reducing density ρ_r(x), mol/m³.
    pub fn reducing_density_mol_m3(&self) -> f64 {
        self.rho_r
    }

    /// Pseudo-critical density Σ... (1/Σ xᵢ/ρ_c,i), mol/m³: the scale of a
    /// liquid-like start.
    pub fn pseudo_critical_density_mol_m3(&self) -> f64 {
        1000.0
            / self
                .idx
                .iter()
                .zip(&self.x)
                .map(|(&i, &xi)| xi / DC[row(i)])
                .sum::<f64>()
    }

    /// The τ factors at `t_k`.
    pub fn tau_cache(&self, t_k: f64) -> TauCache {
        let ln_tau = libm::log(self.t_r / t_k);
        let f = &self.fast;
        let (expo_at, dep_at) = (f.poly.len(), f.poly.len() + f.expo.len());
        // τ^t once per distinct exponent (stored where the terms go, then
        // multiplied by each term's n).
        let mut powers = vec![0.0f64; f.ts.len()];
        for (pw, &t) in powers.iter_mut().zip(&f.ts) {
            *pw = if t == 0.0 { 1.0 } else { libm::exp(t * ln_tau) };
        }
        let pw = |ti: usize| powers.get(ti).copied().unwrap_or(1.0);
        let mut nt = Vec::with_capacity(dep_at + f.dep.len());
        nt.extend(f.poly.iter().map(|p| p.n * pw(p.ti)));
        nt.extend(f.expo.iter().map(|p| p.n * pw(p.ti)));
        nt.extend(f.dep.iter().map(|p| p.n * pw(p.ti)));
        TauCache {
            t_k,
            nt,
            expo_at,
            dep_at,
        }
    }

    /// αʳ and its derivatives at `rho_mol_m3` on the temperature of `tc`.
    pub fn residual(&self, tc: &TauCache, rho_mol_m3: f64) -> Residual {
        let f = &self.fast;
        let del = rho_mol_m3 / self.rho_r;
        // δ^k for k = 0…10, exp(−δ^k) for the k in use.
        let mut delp = [1.0f64; 11];
        let mut expd = [1.0f64; 8];
        for k in 1..11 {
            delp[k] = delp[k - 1] * del;
        }
        for k in 1..=f.max_c.min(7) {
            expd[k] = libm::exp(-delp[k]);
        }
        let mut r = Residual::default();
        for (p, &nt) in f.poly.iter().zip(tc.poly()) {
            let v = nt * delp[p.di];
            let d = p.d;
            add3(&mut r, v, p.t, d, d * (d - 1.0), d * (d - 1.0) * (d - 2.0));
        }
        for (p, &nt) in f.expo.iter().zip(tc.expo()) {
            let v = nt * delp[p.di] * expd[p.ci];
            let (c, d) = (p.c, p.d);
            let ex = c * delp[p.ci];
            let ex2 = d - ex;
            let ex3 = ex2 * (ex2 - 1.0);
            add3(
                &mut r,
                v,
                p.t,
                ex2,
                ex3 - c * ex,
                ex3 * (ex2 - 2.0) - ex * (3.0 * ex2 - 3.0 + c) * c,
            );
        }
        if !f.dep.is_empty() {
            // GERG-2008 has 10 distinct (c, e) over all its departure
            // functions.
            let mut ce = [0.0f64; 16];
            for (k, &(c, e)) in f.ce.iter().enumerate().take(16) {
                ce[k] = libm::exp(c * delp[2] + e * del);
            }
            for (p, &nt) in f.dep.iter().zip(tc.dep()) {
                let v = nt * delp[p.di] * ce.get(p.ce).copied().unwrap_or(0.0);
                let d = p.d;
                let c0 = p.c * delp[2];
                let e0 = p.e * del;
                let ex = d + 2.0 * c0 + e0;
                let ex2 = ex * ex - d + 2.0 * c0;
                add3(
                    &mut r,
                    v,
                    p.t,
                    ex,
                    ex2,
                    ex * (ex2 - 2.0 * (d - 2.0 * c0)) + 2.0 * d,
                );
            }
        }
        r
    }

    /// δαʳ_δ, δ²αʳ_δδ and δ³αʳ_δδδ only (what the density loop needs;
    /// about half the work of [`Gerg::residual`]).
    fn residual_delta(&self, tc: &TauCache, rho_mol_m3: f64) -> [f64; 3] {
        let f = &self.fast;
        let del = rho_mol_m3 / self.rho_r;
        let mut delp = [1.0f64; 11];
        let mut expd = [1.0f64; 8];
        for k in 1..11 {
            delp[k] = delp[k - 1] * del;
        }
        for k in 1..=f.max_c.min(7) {
            expd[k] = libm::exp(-delp[k]);
        }
        let (mut a1, mut a2, mut a3) = (0.0, 0.0, 0.0);
        for (p, &nt) in f.poly.iter().zip(tc.poly()) {
            let v = nt * delp[p.di];
            let d = p.d;
            a1 += v * d;
            a2 += v * d * (d - 1.0);
            a3 += v * d * (d - 1.0) * (d - 2.0);
        }
        for (p, &nt) in f.expo.iter().zip(tc.expo()) {
            let v = nt * delp[p.di] * expd[p.ci];
            let (c, d) = (p.c, p.d);
            let ex = c * delp[p.ci];
            let ex2 = d - ex;
            let ex3 = ex2 * (ex2 - 1.0);
            a1 += v * ex2;
            a2 += v * (ex3 - c * ex);
            a3 += v * (ex3 * (ex2 - 2.0) - ex * (3.0 * ex2 - 3.0 + c) * c);
        }
        if !f.dep.is_empty() {
            let mut ce = [0.0f64; 16];
            for (k, &(c, e)) in f.ce.iter().enumerate().take(16) {
                ce[k] = libm::exp(c * delp[2] + e * del);
            }
            for (p, &nt) in f.dep.iter().zip(tc.dep()) {
                let v = nt * delp[p.di] * ce.get(p.ce).copied().unwrap_or(0.0);
                let d = p.d;
                let c0 = p.c * delp[2];
                let ex = d + 2.0 * c0 + p.e * del;
                let ex2 = ex * ex - d + 2.0 * c0;
                a1 += v * ex;
                a2 += v * ex2;
                a3 += v * (ex * (ex2 - 2.0 * (d - 2.0 * c0)) + 2.0 * d);
            }
        }
        [a1, a2, a3]
    }

    /// Pressure (Pa), ∂p/∂ρ and ∂p/∂T at a molar density on the temperature
    /// of `tc`.
    pub fn pressure_at(&self, tc: &TauCache, rho_mol_m3: f64) -> MixState {
        let r = self.residual(tc, rho_mol_m3);
        let rt = GAS_CONSTANT * tc.t_k;
        MixState {
            density_mol_m3: rho_mol_m3,
            z: 1.0 + r.a01,
            dp_drho: rt * (1.0 + 2.0 * r.a01 + r.a02),
            dp_dt: rho_mol_m3 * GAS_CONSTANT * (1.0 + r.a01 - r.a11),
        }
    }

    /// Second virial coefficient B(T), m³/mol: the low-density limit of
    /// (Z − 1)/ρ.
    pub fn second_virial(&self, tc: &TauCache) -> f64 {
        // a01/ρ as ρ → 0: the terms with d = 1 (and exp → 1).
        let f = &self.fast;
        let s: f64 = f
            .poly
            .iter()
            .zip(tc.poly())
            .chain(f.expo.iter().zip(tc.expo()))
            .filter(|(p, _)| p.di == 1)
            .map(|(_, nt)| nt)
            .sum::<f64>()
            + f.dep
                .iter()
                .zip(tc.dep())
                .filter(|(p, _)| p.di == 1)
                .map(|(_, nt)| nt)
                .sum::<f64>();
        s / self.rho_r
    }

    /// Solves the density at (p, T) on a branch, from `guess` (mol/m³; 0:
    /// none). Newton's method on p(ρ) − p with a kept bracket, bisecting when
    /// a step leaves it or lands where ∂p/∂ρ ≤ 0 — the safeguards of the
    /// pure-gas solver. `None` when the branch has no root there.
    pub fn solve(&self, tc: &TauCache, p_pa: f64, branch: Branch, guess: f64) -> Option<MixState> {
        let rt = GAS_CONSTANT * tc.t_k;
        let (mut lo, mut hi) = (0.0f64, f64::INFINITY);
        let mut rho = match branch {
            Branch::Gas => {
                if guess > 0.0 {
                    guess
                } else {
                    // Virial start: ρ = p/(RT(1 + Bρ)).
                    let b = self.second_virial(tc);
                    let q = b * p_pa / rt;
                    let ideal = p_pa / rt;
                    if q > -0.2 {
                        ideal * 2.0 / (1.0 + libm::sqrt((1.0 + 4.0 * q).max(0.0)))
                    } else {
                        ideal
                    }
                }
            }
            Branch::Liquid => {
                hi = 5.0 * self.pseudo_critical_density_mol_m3();
                if guess > 0.0 {
                    guess
                } else {
                    3.0 * self.pseudo_critical_density_mol_m3()
                }
            }
        };
        // Close to the root (|p − p_target| < 1e-7 p), the whole residual
        // is evaluated, so that the last step needs no further evaluation.
        let mut near = false;
        for _ in 0..200 {
            let (a01, a02, a03, a11) = if near {
                let r = self.residual(tc, rho);
                (r.a01, r.a02, r.a03, Some(r.a11))
            } else {
                let [a01, a02, a03] = self.residual_delta(tc, rho);
                (a01, a02, a03, None)
            };
            let s = MixState {
                density_mol_m3: rho,
                z: 1.0 + a01,
                dp_drho: rt * (1.0 + 2.0 * a01 + a02),
                dp_dt: rho * GAS_CONSTANT * (1.0 + a01 - a11.unwrap_or(0.0)),
            };
            let p = rho * rt * s.z;
            let f = p - p_pa;
            // Converged: the residual is below 1e-13 of p or below what
            // rounding of ρ allows.
            let tol = (1e-13 * p_pa).max(8.0 * f64::EPSILON * rho * s.dp_drho.abs());
            if f.abs() <= tol && s.dp_drho > 0.0 {
                return Some(if a11.is_some() {
                    s
                } else {
                    self.pressure_at(tc, rho)
                });
            }
            let was_near = a11.is_some();
            near = f.abs() < 1e-7 * p_pa;
            let below = match branch {
                Branch::Gas => f < 0.0 && s.dp_drho > 0.0,
                // Below the liquid spinodal (∂p/∂ρ ≤ 0) the root is above.
                Branch::Liquid => f < 0.0 || s.dp_drho <= 0.0,
            };
            if below {
                lo = rho;
            } else {
                hi = rho;
            }
            // Halley's step (cubic convergence) where it stays close to
            // Newton's, else Newton's.
            let d2p = rt * (2.0 * a01 + 4.0 * a02 + a03) / rho;
            let h = 1.0 - 0.5 * f * d2p / (s.dp_drho * s.dp_drho);
            let mut newton = if s.dp_drho > 0.0 {
                if (0.5..2.0).contains(&h) {
                    rho - f / (s.dp_drho * h)
                } else {
                    rho - f / s.dp_drho
                }
            } else {
                f64::NAN
            };
            if branch == Branch::Liquid {
                // Down the liquid branch by at most 10 % a step, so that the
                // iteration cannot jump past the liquid root into the loops
                // of the two-phase region (where a multiparameter equation
                // has spurious roots with ∂p/∂ρ > 0).
                newton = newton.max(0.9 * rho);
            }
            let next = if newton.is_finite() && newton > lo && newton < hi {
                newton
            } else if hi.is_finite() {
                0.5 * (lo + hi)
            } else {
                2.0 * rho.max(lo)
            };
            if was_near && s.dp_drho > 0.0 && (next - rho).abs() <= 1e-9 * rho {
                // Halley from within 1e-7: the step leaves an error far below
                // rounding. Z at the new density; slopes from this evaluation
                // (1e-9 away).
                return Some(MixState {
                    density_mol_m3: next,
                    z: p_pa / (next * rt),
                    dp_drho: s.dp_drho,
                    dp_dt: s.dp_dt * next / rho,
                });
            }
            if (next - rho).abs() <= 4.0 * f64::EPSILON * rho.max(1e-300) || hi - lo < 1e-14 * hi {
                let s = self.pressure_at(tc, next);
                let p = next * rt * s.z;
                // Converged onto a root, not onto a spinodal or a bracket end.
                if s.dp_drho > 0.0 && (p - p_pa).abs() <= 1e-9 * p_pa.max(1.0) {
                    return Some(s);
                }
                return None;
            }
            rho = next;
        }
        None
    }

    /// True when p(ρ) rises all the way from zero to `rho_mol_m3` (∂p/∂ρ > 0
    /// at eight densities below it): a root found there is on the gas
    /// branch, not one of the spurious roots a multiparameter equation has
    /// inside the two-phase region.
    pub fn on_gas_branch(&self, tc: &TauCache, rho_mol_m3: f64) -> bool {
        (1..=8).all(|k| self.pressure_at(tc, rho_mol_m3 * k as f64 / 9.0).dp_drho > 0.0)
    }

    /// The α⁰ parts: (α⁰, τα⁰_τ, τ²α⁰_ττ) at (ρ, T) in NIST's form (ln of
    /// the density in mol/l, its reference state).
    fn ideal(&self, rho_mol_m3: f64, t_k: f64) -> (f64, f64, f64) {
        let logd = libm::log((rho_mol_m3 / 1000.0).max(1e-15));
        let logt = libm::log(t_k);
        let (mut a0, mut a1, mut a2) = (0.0, 0.0, 0.0);
        for (&i, &xi) in self.idx.iter().zip(&self.x) {
            let r = row(i);
            let (mut h0, mut h1, mut h2) = (0.0, 0.0, 0.0);
            for j in 4..8 {
                let th = TH0I[r][j];
                if th > 1e-15 {
                    let tht = th / t_k;
                    let ep = libm::exp(tht);
                    let em = 1.0 / ep;
                    let hs = (ep - em) / 2.0;
                    let hc = (ep + em) / 2.0;
                    if j == 4 || j == 6 {
                        h0 += N0I[r][j] * libm::log(hs.abs());
                        h1 += N0I[r][j] * tht * hc / hs;
                        h2 += N0I[r][j] * (tht / hs) * (tht / hs);
                    } else {
                        h0 -= N0I[r][j] * libm::log(hc.abs());
                        h1 -= N0I[r][j] * tht * hs / hc;
                        h2 += N0I[r][j] * (tht / hc) * (tht / hc);
                    }
                }
            }
            a0 += xi * (logd + libm::log(xi) + N0I[r][1] + N0I[r][2] / t_k - N0I[r][3] * logt + h0);
            a1 += xi * (N0I[r][3] + N0I[r][2] / t_k + h1);
            a2 += -xi * (N0I[r][3] + h2);
        }
        (a0, a1, a2)
    }

    /// Isochoric molar heat capacity of the ideal gas at `t_k`, J/(mol·K).
    pub fn ideal_cv(&self, t_k: f64) -> f64 {
        -GAS_CONSTANT * self.ideal(1.0, t_k).2
    }

    /// Caloric properties at (ρ, T), molar basis, on GERG-2008's reference
    /// state as NIST's code sets it.
    pub fn caloric(&self, rho_mol_m3: f64, t_k: f64) -> crate::Caloric {
        let tc = self.tau_cache(t_k);
        self.caloric_with(&tc, rho_mol_m3)
    }

    /// [`Gerg::caloric`] on a prepared temperature.
    pub fn caloric_with(&self, tc: &TauCache, rho_mol_m3: f64) -> crate::Caloric {
        let t_k = tc.t_k;
        let r = self.residual(tc, rho_mol_m3);
        let (_, i1, i2) = self.ideal(rho_mol_m3, t_k);
        let big_r = GAS_CONSTANT;
        let rt = big_r * t_k;
        let dp_drho_red = 1.0 + 2.0 * r.a01 + r.a02;
        let dp_dt_red = 1.0 + r.a01 - r.a11;
        let u = rt * (i1 + r.a10);
        let cv = -big_r * (i2 + r.a20);
        let cp = cv + big_r * dp_dt_red * dp_dt_red / dp_drho_red;
        let w2 = cp / cv * rt * dp_drho_red / self.molar_mass;
        crate::Caloric {
            pressure_pa: rho_mol_m3 * rt * (1.0 + r.a01),
            dp_drho: rt * dp_drho_red,
            dp_dt: rho_mol_m3 * big_r * dp_dt_red,
            u_j_mol: u,
            h_j_mol: u + rt * (1.0 + r.a01),
            cv_j_mol_k: cv,
            cp_j_mol_k: cp,
            speed_of_sound_m_s: libm::sqrt(w2.max(0.0)),
        }
    }

    /// Entropy (J/(mol·K)) and Gibbs energy (J/mol) at (ρ, T), NIST's
    /// reference state (for the published check values).
    pub fn entropy_gibbs(&self, rho_mol_m3: f64, t_k: f64) -> (f64, f64) {
        let tc = self.tau_cache(t_k);
        let r = self.residual(&tc, rho_mol_m3);
        let (i0, i1, _) = self.ideal(rho_mol_m3, t_k);
        let s = GAS_CONSTANT * (i1 + r.a10 - i0 - r.a00);
        let g = GAS_CONSTANT * t_k * (1.0 + r.a01 + i0 + r.a00);
        (s, g)
    }

    /// Natural logarithms of the fugacity coefficients of the components
    /// (composition order) for mole fractions `x` of this mixture's
    /// components at (ρ, T); also Z. Kunz & Wagner 2012, table B4:
    /// ln φᵢ = αʳ + n(∂αʳ/∂nᵢ)_T,V − ln Z with
    /// n(∂αʳ/∂nᵢ) = δαʳ_δ(1 − n(∂ρ_r/∂nᵢ)/ρ_r) + ταʳ_τ n(∂T_r/∂nᵢ)/T_r
    ///              + αʳ_xᵢ − Σₖ xₖαʳ_xₖ.
    pub fn ln_fugacity_coefficients(
        &self,
        x: &[f64],
        rho_mol_m3: f64,
        t_k: f64,
    ) -> (Vec<f64>, f64) {
        let n = self.idx.len();
        let (t_r, v_r, dt_dx, dv_dx) = reducing_with_derivatives(&self.idx, x);
        let rho_r = 1000.0 / v_r;
        let tau = t_r / t_k;
        let del = rho_mol_m3 / rho_r;
        // αʳ, its δ and τ derivatives, and ∂αʳ/∂xᵢ at constant τ, δ.
        let mut total = Residual::default();
        let mut ax = vec![0.0f64; n];
        let pure: Vec<Residual> = self
            .idx
            .iter()
            .map(|&i| general(&pure_terms(i, 1.0), &[], tau, del))
            .collect();
        for a in 0..n {
            scale_add(&mut total, &pure[a], x[a]);
            ax[a] += pure[a].a00;
        }
        for a in 0..n {
            for b in a + 1..n {
                let (i, j) = ordered(self.idx[a], self.idx[b]);
                let (p, e) = departure_terms(i, j, 1.0);
                if p.is_empty() && e.is_empty() {
                    continue;
                }
                let dep = general(&p, &e, tau, del);
                scale_add(&mut total, &dep, x[a] * x[b]);
                ax[a] += x[b] * dep.a00;
                ax[b] += x[a] * dep.a00;
            }
        }
        let sum_ax: f64 = x.iter().zip(&ax).map(|(xi, a)| xi * a).sum();
        let sum_dt: f64 = x.iter().zip(&dt_dx).map(|(xi, d)| xi * d).sum();
        let sum_dv: f64 = x.iter().zip(&dv_dx).map(|(xi, d)| xi * d).sum();
        let z = 1.0 + total.a01;
        let ln_z = libm::log(z);
        let out = (0..n)
            .map(|i| {
                // n∂ρ_r/∂nᵢ / ρ_r = −ρ_r·n∂v_r/∂nᵢ (v_r in l/mol here).
                let nv = dv_dx[i] - sum_dv;
                let nt = dt_dx[i] - sum_dt;
                let nd = total.a00 + total.a01 * (1.0 + nv / v_r) + total.a10 * nt / t_r + ax[i]
                    - sum_ax;
                nd - ln_z
            })
            .collect();
        (out, z)
    }

    /// The components' GERG indices (composition order).
    pub fn indices(&self) -> &[usize] {
        &self.idx
    }

    /// The mole fractions (composition order).
    pub fn fractions(&self) -> &[f64] {
        &self.x
    }

    /// Solves the density at (p, T) for mole fractions `x` of this
    /// mixture's components on a branch (the stability test's trial phases),
    /// from `guess` (0: none).
    pub fn solve_at(
        &self,
        x: &[f64],
        p_pa: f64,
        t_k: f64,
        branch: Branch,
        guess: f64,
    ) -> Option<MixState> {
        let g = Gerg::new(&self.composition.with_fractions(x));
        let tc = g.tau_cache(t_k);
        let s = g.solve(&tc, p_pa, branch, guess)?;
        (branch == Branch::Liquid || g.on_gas_branch(&tc, s.density_mol_m3)).then_some(s)
    }

    /// Checks and solves the state at (p, T) on the gas branch: the density,
    /// Z and the pressure derivatives. Refuses states outside GERG-2008's
    /// extended range.
    pub fn state(&self, p_pa: f64, t_k: f64) -> Result<MixState, Error> {
        self.check(p_pa, t_k)?;
        let tc = self.tau_cache(t_k);
        if p_pa == 0.0 {
            return Ok(MixState {
                density_mol_m3: 0.0,
                z: 1.0,
                dp_drho: GAS_CONSTANT * t_k,
                dp_dt: 0.0,
            });
        }
        self.solve(&tc, p_pa, Branch::Gas, 0.0).ok_or_else(|| {
            Error::NoConvergence(format!(
                "{}: no gas-branch density at {} bar, {t_k} K",
                self.composition,
                p_pa / 1e5
            ))
        })
    }

    /// Checks that (p, T) is inside GERG-2008's extended range.
    pub fn check(&self, p_pa: f64, t_k: f64) -> Result<(), Error> {
        if !p_pa.is_finite() || !t_k.is_finite() {
            return Err(Error::Invalid(
                "pressure and temperature must be numbers".into(),
            ));
        }
        if p_pa < 0.0 {
            return Err(Error::EosRange(format!(
                "{}: negative absolute pressure {p_pa} Pa",
                self.composition
            )));
        }
        if !(TEMPERATURE_MIN_K..=TEMPERATURE_MAX_K).contains(&t_k) {
            return Err(Error::EosRange(format!(
                "{}: {t_k} K is outside the extended range of GERG-2008 ({TEMPERATURE_MIN_K} K to {TEMPERATURE_MAX_K} K)",
                self.composition
            )));
        }
        if p_pa > PRESSURE_MAX_PA {
            return Err(Error::EosRange(format!(
                "{}: {} bar is above the extended range of GERG-2008 ({} bar)",
                self.composition,
                p_pa / 1e5,
                PRESSURE_MAX_PA / 1e5
            )));
        }
        Ok(())
    }
}

/// Adds terms of the same (t, d, c) into one (first occurrence's place).
fn merge_pure(terms: &mut Vec<PureTerm>) {
    let mut out: Vec<PureTerm> = Vec::with_capacity(terms.len());
    for t in terms.iter() {
        match out
            .iter_mut()
            .find(|o| o.t == t.t && o.d == t.d && o.c == t.c)
        {
            Some(o) => o.n += t.n,
            None => out.push(*t),
        }
    }
    *terms = out;
}

/// Adds exponential departure terms of the same form into one.
fn merge_dep(terms: &mut Vec<DepTerm>) {
    let mut out: Vec<DepTerm> = Vec::with_capacity(terms.len());
    for t in terms.iter() {
        match out
            .iter_mut()
            .find(|o| o.t == t.t && o.d == t.d && o.c == t.c && o.e == t.e && o.g == t.g)
        {
            Some(o) => o.n += t.n,
            None => out.push(*t),
        }
    }
    *terms = out;
}

fn add3(r: &mut Residual, v: f64, t: f64, dd: f64, dd2: f64, dd3: f64) {
    add(r, v, t, dd, dd2);
    r.a03 += v * dd3;
}

fn add(r: &mut Residual, v: f64, t: f64, dd: f64, dd2: f64) {
    r.a00 += v;
    r.a01 += v * dd;
    r.a02 += v * dd2;
    r.a10 += v * t;
    r.a11 += v * t * dd;
    r.a20 += v * t * (t - 1.0);
}

fn scale_add(r: &mut Residual, s: &Residual, f: f64) {
    r.a00 += f * s.a00;
    r.a01 += f * s.a01;
    r.a02 += f * s.a02;
    r.a10 += f * s.a10;
    r.a11 += f * s.a11;
    r.a20 += f * s.a20;
}

/// The general (unprepared) evaluation of a set of terms at (τ, δ).
fn general(pure: &[PureTerm], dep: &[DepTerm], tau: f64, del: f64) -> Residual {
    let ln_tau = libm::log(tau);
    let mut r = Residual::default();
    for p in pure {
        let d = p.d as f64;
        let nt = p.n * libm::exp(p.t * ln_tau);
        let dd = libm::pow(del, d);
        if p.c == 0 {
            add(&mut r, nt * dd, p.t, d, d * (d - 1.0));
        } else {
            let c = p.c as f64;
            let dc = libm::pow(del, c);
            let ex = c * dc;
            let ex2 = d - ex;
            add(
                &mut r,
                nt * dd * libm::exp(-dc),
                p.t,
                ex2,
                ex2 * (ex2 - 1.0) - c * ex,
            );
        }
    }
    for p in dep {
        let d = p.d as f64;
        let c0 = p.c * del * del;
        let e0 = p.e * del;
        let v = p.n * libm::pow(del, d) * libm::exp(c0 + e0 + p.g + p.t * ln_tau);
        let ex = d + 2.0 * c0 + e0;
        add(&mut r, v, p.t, ex, ex * ex - d + 2.0 * c0);
    }
    r
}

/// (lower, higher) GERG index.
fn ordered(a: usize, b: usize) -> (usize, usize) {
    if a < b { (a, b) } else { (b, a) }
}

/// The residual terms of pure fluid `i` times `f`.
fn pure_terms(i: usize, f: f64) -> Vec<PureTerm> {
    let r = row(i);
    (1..=KPOL[r] + KEXP[r])
        .map(|k| PureTerm {
            n: f * NOIK[r][k],
            t: TOIK[r][k],
            d: DOIK[r][k] as i32,
            c: if k > KPOL[r] { COIK[r][k] as i32 } else { 0 },
        })
        .collect()
}

/// The departure terms of the binary (i, j), i < j, times `f·F_ij`
/// (polynomial, exponential); empty for binaries without one.
fn departure_terms(i: usize, j: usize, f: f64) -> (Vec<PureTerm>, Vec<DepTerm>) {
    let mn = MNUMB[row(i)][row(j)];
    if mn == 0 || FIJ[row(i)][row(j)] == 0.0 {
        return (Vec::new(), Vec::new());
    }
    let fij = f * FIJ[row(i)][row(j)];
    let poly = (1..=KPOLIJ[mn])
        .map(|k| PureTerm {
            n: fij * NIJK[mn][k],
            t: TIJK[mn][k],
            d: DIJK[mn][k] as i32,
            c: 0,
        })
        .collect();
    let exp = (1 + KPOLIJ[mn]..=KPOLIJ[mn] + KEXPIJ[mn])
        .map(|k| DepTerm {
            n: fij * NIJK[mn][k],
            t: TIJK[mn][k],
            d: DIJK[mn][k] as i32,
            c: CIJK[mn][k],
            e: EIJK[mn][k],
            g: GIJK[mn][k],
        })
        .collect();
    (poly, exp)
}

/// Reducing temperature (K) and volume (l/mol) of fractions `x` of the
/// components `idx` (NIST's prepared form of the reducing functions).
fn reducing(idx: &[usize], x: &[f64]) -> (f64, f64) {
    let (t, v, _, _) = reducing_with_derivatives(idx, x);
    (t, v)
}

/// [`reducing`] with ∂T_r/∂xᵢ and ∂v_r/∂xᵢ (fractions treated as
/// independent).
fn reducing_with_derivatives(idx: &[usize], x: &[f64]) -> (f64, f64, Vec<f64>, Vec<f64>) {
    let n = idx.len();
    let (mut tr, mut vr) = (0.0, 0.0);
    let mut dt = vec![0.0; n];
    let mut dv = vec![0.0; n];
    for a in 0..n {
        for b in a..n {
            // Term f·G·xᵢxⱼ(xᵢ + xⱼ)/(B·xᵢ + xⱼ) for the lower GERG index i.
            let (a_, b_) = if idx[a] <= idx[b] { (a, b) } else { (b, a) };
            let (i, j) = (row(idx[a_]), row(idx[b_]));
            let (xi, xj) = (x[a_], x[b_]);
            for (g, bb, acc, dacc) in [
                (GVIJ[i][j], BVIJ[i][j], &mut vr, &mut dv),
                (GTIJ[i][j], BTIJ[i][j], &mut tr, &mut dt),
            ] {
                if a == b {
                    // xᵢ²·G (B = 1 on the diagonal): 2xᵢ³G/((B + 1)xᵢ).
                    let k = 2.0 * g / (bb + 1.0);
                    *acc += k * xi * xi;
                    dacc[a] += 2.0 * k * xi;
                } else {
                    let s = xi + xj;
                    let q = bb * xi + xj;
                    if q <= 0.0 {
                        continue;
                    }
                    let fg = 2.0 * g;
                    *acc += fg * xi * xj * s / q;
                    dacc[a_] += fg * (xj * s / q + xi * xj / q - xi * xj * s * bb / (q * q));
                    dacc[b_] += fg * (xi * s / q + xi * xj / q - xi * xj * s / (q * q));
                }
            }
        }
    }
    (tr, vr, dt, dv)
}

/// Critical temperature of a component in GERG-2008, K.
pub fn critical_temperature_k(c: Component) -> f64 {
    TC[row(c.gerg_index())]
}

/// Critical density of a component in GERG-2008, mol/m³.
pub fn critical_density_mol_m3(c: Component) -> f64 {
    DC[row(c.gerg_index())] * 1000.0
}

/// Molar mass of a component in GERG-2008, kg/mol.
pub fn component_molar_mass_kg_mol(c: Component) -> f64 {
    MMI_GERG[row(c.gerg_index())] / 1000.0
}
