//! Phase stability of a mixture: the tangent-plane criterion on GERG-2008
//! fugacities (Michelsen, Fluid Phase Equilib. 9, 1 (1982)), and the dew
//! line found with it.
//!
//! A feed z at (p, T) is unstable — a second (liquid) phase can form — when
//! some trial composition w gives a negative tangent-plane distance
//! `tm(W) = 1 + Σ Wᵢ(ln Wᵢ + ln φᵢ(w) − dᵢ − 1)`, `dᵢ = ln zᵢ + ln φᵢ(z)`,
//! w = W/ΣW. Trials start from Wilson's K-factors (a vapour-like W = zK and a
//! liquid-like W = z/K) and follow successive substitution
//! `ln Wᵢ ← dᵢ − ln φᵢ(w)`; any iterate with tm < 0 proves instability, and an
//! iterate that returns to the feed (the trivial solution) or converges with
//! tm ≥ 0 leaves the feed stable for that trial. Each phase takes the density
//! root of lower Gibbs energy at (p, T).
//!
//! The dew line: at each temperature, the lowest pressure at which the feed
//! is unstable ([`dew_pressure`]), from a scan in pressure and bisection.

use super::{Branch, Gerg, MixState};
use crate::composition::Component;

/// Critical pressure (Pa) and acentric factor of each component, for
/// Wilson's K-factor estimate `K = (p_c/p)·exp(5.373(1 + ω)(1 − T_c/T))`
/// only (starting guesses of the trial phases; the result does not depend
/// on them). Values from memory (handbook values, e.g. Poling, Prausnitz &
/// O'Connell, The Properties of Gases and Liquids, 5th ed., appendix A).
fn wilson_constants(c: Component) -> (f64, f64) {
    let (pc_mpa, omega) = match c {
        Component::Methane => (4.599, 0.011),
        Component::Nitrogen => (3.396, 0.037),
        Component::CarbonDioxide => (7.377, 0.224),
        Component::Ethane => (4.872, 0.099),
        Component::Propane => (4.248, 0.152),
        Component::Isobutane => (3.640, 0.184),
        Component::NButane => (3.796, 0.200),
        Component::Isopentane => (3.378, 0.227),
        Component::NPentane => (3.370, 0.251),
        Component::NHexane => (3.025, 0.300),
        Component::NHeptane => (2.740, 0.350),
        Component::NOctane => (2.490, 0.399),
        Component::NNonane => (2.290, 0.445),
        Component::NDecane => (2.110, 0.490),
        Component::Hydrogen => (1.296, -0.219),
        Component::Oxygen => (5.043, 0.022),
        Component::CarbonMonoxide => (3.494, 0.050),
        Component::Water => (22.064, 0.344),
        Component::HydrogenSulfide => (9.000, 0.100),
        Component::Helium => (0.2275, -0.390),
        Component::Argon => (4.863, -0.002),
    };
    (pc_mpa * 1e6, omega)
}

/// One phase at (p, T): its density root of lower Gibbs energy and the
/// logarithms of its fugacity coefficients.
/// `guesses` holds the densities of the previous call (gas, liquid) and
/// receives this call's: successive trial compositions differ little.
fn phase(
    g: &Gerg,
    x: &[f64],
    p: f64,
    t: f64,
    guesses: &mut [f64; 2],
) -> Option<(MixState, Vec<f64>)> {
    let mut best: Option<(MixState, Vec<f64>, f64)> = None;
    for (k, branch) in [Branch::Gas, Branch::Liquid].into_iter().enumerate() {
        let found = g.solve_at(x, p, t, branch, guesses[k]);
        guesses[k] = found.map_or(0.0, |s| s.density_mol_m3);
        let Some(s) = found else {
            continue;
        };
        if best
            .as_ref()
            .is_some_and(|b| (b.0.density_mol_m3 / s.density_mol_m3 - 1.0).abs() < 1e-7)
        {
            continue;
        }
        let (lnphi, _) = g.ln_fugacity_coefficients(x, s.density_mol_m3, t);
        // Residual Gibbs energy per RT of the phase: Σ xᵢ ln φᵢ.
        let gres: f64 = x.iter().zip(&lnphi).map(|(a, b)| a * b).sum();
        if best.as_ref().is_none_or(|b| gres < b.2) {
            best = Some((s, lnphi, gres));
        }
    }
    best.map(|b| (b.0, b.1))
}

/// The outcome of a stability test.
#[derive(Clone, Debug, PartialEq)]
pub struct Stability {
    /// A second phase can form: the feed is not stable as one phase.
    pub unstable: bool,
    /// The smallest tangent-plane distance found.
    pub tm_min: f64,
    /// The trial composition of that distance (mole fractions).
    pub trial: Vec<f64>,
}

/// The tangent-plane test of the feed of `g` at (p, T). `None` when the
/// feed itself has no density root there.
pub fn test(g: &Gerg, p_pa: f64, t_k: f64) -> Option<Stability> {
    let z = g.fractions().to_vec();
    let n = z.len();
    if n < 2 {
        return Some(Stability {
            unstable: false,
            tm_min: 0.0,
            trial: z,
        });
    }
    let (_, lnphi_z) = phase(g, &z, p_pa, t_k, &mut [0.0; 2])?;
    let d: Vec<f64> = z.iter().zip(&lnphi_z).map(|(zi, f)| zi.ln() + f).collect();
    let k: Vec<f64> = g
        .composition()
        .parts()
        .iter()
        .map(|&(c, _)| {
            let (pc, om) = wilson_constants(c);
            let tc = super::critical_temperature_k(c);
            (pc / p_pa) * (5.373 * (1.0 + om) * (1.0 - tc / t_k)).exp()
        })
        .collect();
    let mut out = Stability {
        unstable: false,
        tm_min: f64::INFINITY,
        trial: z.clone(),
    };
    for liquid_like in [true, false] {
        let mut w_big: Vec<f64> = z
            .iter()
            .zip(&k)
            .map(|(zi, ki)| if liquid_like { zi / ki } else { zi * ki })
            .collect();
        let mut guesses = [0.0f64; 2];
        for it in 0..120 {
            let sum: f64 = w_big.iter().sum();
            if !(sum.is_finite() && sum > 0.0) {
                break;
            }
            let w: Vec<f64> = w_big.iter().map(|v| (v / sum).max(1e-300)).collect();
            let Some((_, lnphi_w)) = phase(g, &w, p_pa, t_k, &mut guesses) else {
                break;
            };
            // tm of the current W (any W with tm < 0 proves instability).
            let tm = 1.0
                + w_big
                    .iter()
                    .zip(&lnphi_w)
                    .zip(&d)
                    .map(|((wb, f), di)| wb * (wb.max(1e-300).ln() + f - di - 1.0))
                    .sum::<f64>();
            if tm < out.tm_min {
                out.tm_min = tm;
                out.trial = w.clone();
            }
            if tm < -1e-10 {
                out.unstable = true;
                return Some(out);
            }
            let next: Vec<f64> = d
                .iter()
                .zip(&lnphi_w)
                .map(|(di, f)| (di - f).exp())
                .collect();
            let step: f64 = next
                .iter()
                .zip(&w_big)
                .map(|(a, b)| (a.max(1e-300).ln() - b.max(1e-300).ln()).powi(2))
                .sum();
            // Back at the feed: the trivial solution.
            let trivial: f64 = w.iter().zip(&z).map(|(a, b)| (a - b).powi(2)).sum();
            w_big = next;
            if step < 1e-20 || (it > 2 && trivial < 1e-12 * n as f64) {
                break;
            }
        }
    }
    Some(out)
}

/// True when the feed of `g` is stable as one phase at (p, T) (a state
/// without a density root counts as unstable).
pub fn is_stable(g: &Gerg, p_pa: f64, t_k: f64) -> bool {
    test(g, p_pa, t_k).is_some_and(|s| !s.unstable)
}

/// The lowest pressure (Pa) at which the feed of `g` is unstable at `t_k`,
/// searched up to `p_max`: a scan of `steps` pressures spaced evenly in
/// ln p from 0.5 bar, then bisection to `rel_tol`. `None`: stable at every
/// pressure of the scan.
pub fn dew_pressure(g: &Gerg, t_k: f64, p_max: f64, steps: usize, rel_tol: f64) -> Option<f64> {
    let p_lo = 0.5e5f64;
    let ratio = (p_max / p_lo).ln() / steps as f64;
    let mut last_stable = 0.0;
    for i in 0..=steps {
        let p = p_lo * (ratio * i as f64).exp();
        if is_stable(g, p, t_k) {
            last_stable = p;
            continue;
        }
        return Some(bisect(g, t_k, last_stable, p, rel_tol));
    }
    None
}

/// [`dew_pressure`] starting from `hint`, the dew pressure at a nearby
/// temperature: the bracket is widened from there by 10 % steps (then by
/// the scan of [`dew_pressure`] when that fails).
pub fn dew_pressure_near(g: &Gerg, t_k: f64, p_max: f64, hint: f64, rel_tol: f64) -> Option<f64> {
    if is_stable(g, hint, t_k) {
        let mut lo = hint;
        for _ in 0..12 {
            let hi = (lo * 1.1).min(p_max);
            if !is_stable(g, hi, t_k) {
                // The lowest unstable pressure lies in (lo, hi] unless the
                // line has another branch below: checked at the half.
                return Some(bisect(g, t_k, lo, hi, rel_tol));
            }
            if hi >= p_max {
                return None;
            }
            lo = hi;
        }
    } else {
        let mut hi = hint;
        for _ in 0..12 {
            let lo = hi / 1.1;
            if is_stable(g, lo, t_k) {
                return Some(bisect(g, t_k, lo, hi, rel_tol));
            }
            hi = lo;
        }
    }
    dew_pressure(g, t_k, p_max, 28, rel_tol)
}

/// Bisection (in ln p) between a stable `lo` (0: none found) and an
/// unstable `hi`; returns the stable end.
fn bisect(g: &Gerg, t_k: f64, mut lo: f64, mut hi: f64, rel_tol: f64) -> f64 {
    while hi - lo > rel_tol * hi {
        let mid = if lo > 0.0 { (lo * hi).sqrt() } else { 0.5 * hi };
        if is_stable(g, mid, t_k) {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    lo
}
