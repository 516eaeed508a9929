//! Building and checking device gas models from the reference equations of
//! state.
//!
//! A device model ([`isochor_core::model::device`]) is a tensor-product cubic
//! B-spline of the effective compressibility factor Z_eff(T, p) on
//! non-uniform knots. [`build`] makes one for a gas and an envelope:
//!
//! 1. **Domain.** Temperatures `t_min…t_max`, pressures `0…p_max` (capped at
//!    the equation's declared limit). For a gas that can be liquid in that
//!    range, only gas states of density ≤ `density_max` are kept: below the
//!    saturation curve p_sat(T) and below the isochore p_lim(T); both curves
//!    are fitted on the temperature knots and lowered until they never exceed
//!    the true curve (the device flags states above them).
//! 2. **Samples.** Z_eff from the reference equation on a grid of 1 K ×
//!    p_max/500 (finer below 30 % of p_max), inside the domain.
//! 3. **Knots.** Placed so that each span carries an equal share of
//!    ∫ |∂⁴Z/∂x⁴|^¼ dx along each axis (the error of a cubic spline goes as
//!    h⁴·Z⁗), measured on the samples.
//! 4. **Fit.** Weighted least squares of the relative error, with a light
//!    second-difference penalty that fixes coefficients no sample reaches,
//!    then a few Lawson reweightings towards the minimax fit.
//! 5. **Quantisation** to `u16` steps of 2^-e above an offset.
//! 6. **Check** with the device's own fixed-point evaluation on a grid off the
//!    sample nodes; the knot counts grow (the axis whose refinement helps most
//!    per byte) until the target error is met or the size limit reached.

mod emit;
mod fit;

pub use emit::rust_module;

use crate::Eos;
use crate::Error;
use crate::fluid::Fluid;
use isochor_core::model::device::{BoundaryBuf, MAX_COEFS, MAX_KNOTS, TableBuf};
use isochor_core::model::{Compressibility, CompressibilityFx, DeviceModel, ZPoint};
use isochor_core::{Gas, fx};

/// What to build.
#[derive(Clone, Debug)]
pub struct BuildSpec {
    /// The gas or mixture.
    pub fluid: Fluid,
    /// Lowest temperature, K.
    pub t_min_k: f64,
    /// Highest temperature, K.
    pub t_max_k: f64,
    /// Highest pressure, Pa (capped at the equation's declared limit).
    pub p_max_pa: f64,
    /// Largest density covered for liquefiable gases, kg/m³ (`None`: the
    /// gas's default, [`default_density_max`]).
    pub density_max_kg_m3: Option<f64>,
    /// Target: largest relative density error on the check grid.
    pub target: f64,
    /// Size limit of the blob, bytes.
    pub max_bytes: usize,
}

impl BuildSpec {
    /// The built-in envelope: −40…+85 °C, 0…1000 bar (or the equation's
    /// limit), target 9e-5, at most 2 KiB (a mixture: from −60 °C, see
    /// [`BuildSpec::for_fluid`]).
    pub fn builtin(gas: Gas) -> BuildSpec {
        BuildSpec::for_fluid(Fluid::pure(gas))
    }

    /// The built-in envelope for a pure gas or a mixture.
    /// A mixture's table starts at −60 °C, the envelope's lowest
    /// temperature, so that its condensation guard covers every temperature
    /// the device accepts (a pure gas's at −40 °C).
    pub fn for_fluid(fluid: Fluid) -> BuildSpec {
        let t_min_k = match fluid {
            Fluid::Pure(_) => 233.15,
            Fluid::Mixture(_) => isochor_core::envelope::TEMPERATURE_MIN_K,
        };
        BuildSpec {
            fluid,
            t_min_k,
            t_max_k: 358.15,
            p_max_pa: 1.0e8,
            density_max_kg_m3: None,
            target: 9e-5,
            max_bytes: 2048,
        }
    }
}

impl BuildSpec {
    /// The gas (the core's value: a mixture by its fingerprint).
    pub fn gas(&self) -> Gas {
        self.fluid.gas()
    }
}

/// Default density limit of the device table of a liquefiable gas: a third of
/// the critical density, a quarter for xenon (whose critical temperature,
/// 16.6 °C, lies mid-range). Denser states are near-critical, where a compact
/// table cannot hold 1e-4 (measured with `isochor model build`).
pub fn default_density_max(gas: Gas) -> f64 {
    let e = Eos::of(gas);
    let fraction = if gas == Gas::Xenon { 0.25 } else { 1.0 / 3.0 };
    e.critical_density_mol_m3 * e.molar_mass_kg_mol * fraction
}

/// Default density limit of a fluid's table: [`default_density_max`] for a
/// pure gas; for a mixture [`MIXTURE_DENSITY_FRACTION`] times its
/// pseudo-critical density (1/Σxᵢ/ρ_c,i), which no state of the range
/// reaches: a mixture's table is bounded by its dew line only (below the
/// cricondentherm) and covers the dense states above it (measured: the
/// mixtures of `tests/tests/mixture_models.rs` hold 1e-4 up to 700 bar).
pub fn default_density_max_of(fluid: &Fluid) -> f64 {
    match fluid {
        Fluid::Pure(e) => default_density_max(e.gas),
        Fluid::Mixture(m) => {
            m.gerg.pseudo_critical_density_mol_m3()
                * m.gerg.molar_mass_kg_mol()
                * MIXTURE_DENSITY_FRACTION
        }
    }
}

/// Multiple of the pseudo-critical density a mixture's table is limited to
/// (three: beyond every state of the envelope, so no limit in practice).
pub const MIXTURE_DENSITY_FRACTION: f64 = 3.0;

/// A built model with its measured accuracy.
#[derive(Clone, Debug)]
pub struct Built {
    /// The table.
    pub table: TableBuf,
    /// Check of the fixed-point evaluation.
    pub check: CheckReport,
    /// The spec it was built for (effective limits).
    pub spec: BuildSpec,
}

/// Accuracy of a device model against the reference equation.
#[derive(Clone, Copy, Debug, Default, serde::Serialize)]
pub struct CheckReport {
    /// States compared.
    pub samples: usize,
    /// Largest relative density error of the fixed-point evaluation.
    pub max_rel_error: f64,
    /// Mean relative density error of the fixed-point evaluation.
    pub mean_rel_error: f64,
    /// Largest relative density error of the float (f64) evaluation.
    pub max_rel_error_float: f64,
    /// Mean relative density error of the float evaluation.
    pub mean_rel_error_float: f64,
    /// Pressure of the largest fixed-point error, Pa.
    pub worst_pressure_pa: f64,
    /// Temperature of the largest fixed-point error, K.
    pub worst_temperature_k: f64,
    /// Largest |Z_fixed − Z_float|.
    pub max_fixed_vs_float: f64,
}

/// The domain of a table: temperature range, pressure range and, for
/// liquefiable gases, the boundary curves.
#[derive(Clone, Debug)]
pub struct Domain {
    fluid: Fluid,
    /// Lowest temperature, K.
    pub t_min: f64,
    /// Highest temperature, K.
    pub t_max: f64,
    /// Highest pressure of the table, Pa.
    pub p_max: f64,
    /// Saturation curve and density limit of a liquefiable gas.
    pub liquefiable: Option<Liquefiable>,
}

/// Boundary data of a liquefiable gas.
#[derive(Clone, Debug)]
pub struct Liquefiable {
    /// Top of the saturation line, K.
    pub t_sat_max: f64,
    /// Density limit, mol/m³.
    pub rho_max_mol_m3: f64,
}

impl Domain {
    /// The domain of a spec.
    pub fn new(spec: &BuildSpec) -> Result<Domain, Error> {
        let fluid = spec.fluid.clone();
        if spec.t_min_k.partial_cmp(&spec.t_max_k) != Some(std::cmp::Ordering::Less)
            || spec.t_min_k < fluid.temperature_min_k()
            || spec.t_max_k > fluid.temperature_max_k()
            || spec.t_min_k < isochor_core::envelope::TEMPERATURE_MIN_K - 20.0
            || spec.t_max_k > isochor_core::envelope::TEMPERATURE_MAX_K + 20.0
        {
            return Err(Error::Invalid(format!(
                "temperature range {}..{} K is outside what a table of {} can cover",
                spec.t_min_k,
                spec.t_max_k,
                fluid.label()
            )));
        }
        if !(1e5..=isochor_core::envelope::PRESSURE_MAX_PA).contains(&spec.p_max_pa)
            || spec.p_max_pa == 1e5
        {
            return Err(Error::Invalid(format!(
                "highest pressure {} bar: must be above 1 bar and at most 1000 bar",
                spec.p_max_pa / 1e5
            )));
        }
        // Top of the liquid region: a pure gas's saturation line; a
        // mixture's cricondentherm estimate plus one step of its dew-line
        // grid (the true one lies within that step).
        let top = match &fluid {
            Fluid::Pure(e) => Some(e.saturation_temperature_max_k()),
            Fluid::Mixture(_) => fluid
                .condensation_temperature_max_k()
                .map(|t| t + crate::fluid::ENVELOPE_STEP_K),
        };
        let liquefiable = top.filter(|&t| t > spec.t_min_k).map(|t_sat_max| {
            let rho_kg = spec
                .density_max_kg_m3
                .unwrap_or_else(|| default_density_max_of(&fluid));
            Liquefiable {
                t_sat_max,
                rho_max_mol_m3: rho_kg / fluid.molar_mass_kg_mol(),
            }
        });
        Ok(Domain {
            t_min: spec.t_min_k,
            t_max: spec.t_max_k,
            p_max: spec.p_max_pa.min(fluid.pressure_max_pa()),
            liquefiable,
            fluid,
        })
    }

    /// True saturation (dew) pressure below the top of the line.
    fn p_sat(&self, t: f64) -> Option<f64> {
        let l = self.liquefiable.as_ref()?;
        if t >= l.t_sat_max {
            return None;
        }
        self.fluid.condensation_pressure_pa(t)
    }

    /// Highest pressure of the gas states kept at `t` (exact curves).
    pub fn p_limit_exact(&self, t: f64) -> f64 {
        let Some(l) = &self.liquefiable else {
            return self.p_max;
        };
        let sat = self.p_sat(t);
        // The isochore of the density limit, where it lies in the gas region.
        let (p_iso, _, _) = self.fluid.pressure(l.rho_max_mol_m3, t);
        let in_gas = match (&self.fluid, sat) {
            // Saturated vapour denser than the limit: the isochore is in
            // the gas region.
            (Fluid::Pure(e), Some(ps)) => e.vapour_density.eval(t) > l.rho_max_mol_m3 && p_iso < ps,
            (Fluid::Mixture(_), Some(ps)) => p_iso > 0.0 && p_iso < ps,
            (_, None) => true,
        };
        let mut lim = self.p_max;
        if in_gas {
            lim = lim.min(p_iso);
        }
        if let Some(ps) = sat {
            lim = lim.min(ps);
        }
        lim
    }

    /// Highest pressure of the gas states kept at any temperature of the
    /// range, Pa.
    pub fn p_top(&self) -> f64 {
        (0..=250)
            .map(|i| self.p_limit_exact(self.t_min + (self.t_max - self.t_min) * i as f64 / 250.0))
            .fold(0.0, f64::max)
    }

    /// Z_eff from the reference equation (None outside the gas region).
    pub fn z_ref(&self, p: f64, t: f64) -> Option<f64> {
        self.fluid.state(p, t).ok().map(|s| s.z_eff)
    }
}

/// Builds a device model.
pub fn build(spec: &BuildSpec) -> Result<Built, Error> {
    let dom = Domain::new(spec)?;
    let samples = fit::Samples::new(&dom, 1.0, 500);
    let check = fit::Samples::new_offset(&dom);
    let mut nt = 3usize;
    let mut np = 6usize;
    let mut best: Option<Built> = None;
    for _ in 0..40 {
        let (cand, report) = match fit::fit_table(spec.gas(), &dom, &samples, nt, np)
            .and_then(|c| check_table(&c.table(), &check).map(|r| (c, r)))
        {
            Ok(x) => x,
            Err(_) => {
                // This split does not fit: try the next size.
                nt = (nt + 1).min(MAX_KNOTS - 1);
                np = (np + 2).min(MAX_KNOTS - 1);
                continue;
            }
        };
        let bytes = blob_len(&cand)?;
        if std::env::var_os("ISOCHOR_BUILD_TRACE").is_some() {
            eprintln!(
                "{}: {nt}×{np} spans, {bytes} bytes, max {:.2e}",
                spec.fluid.label(),
                report.max_rel_error
            );
        }
        if bytes > spec.max_bytes {
            break;
        }
        let done = report.max_rel_error <= spec.target;
        if best
            .as_ref()
            .is_none_or(|b| report.max_rel_error < b.check.max_rel_error)
        {
            best = Some(Built {
                table: cand,
                check: report,
                spec: spec.clone(),
            });
        }
        if done {
            break;
        }
        // Grow the axis that gains most per added coefficient.
        let try_t = (nt + 2).min(MAX_KNOTS - 1);
        let try_p = (np + 4).min(MAX_KNOTS - 1);
        let gain = |a: usize, b: usize| -> Result<f64, Error> {
            if (a + 3) * (b + 3) > MAX_COEFS {
                return Ok(0.0);
            }
            let Ok(t) = fit::fit_table(spec.gas(), &dom, &samples, a, b) else {
                return Ok(0.0);
            };
            let Ok(r) = check_table(&t.table(), &check) else {
                return Ok(0.0);
            };
            let added = ((a + 3) * (b + 3) - (nt + 3) * (np + 3)) as f64;
            Ok((report.max_rel_error / r.max_rel_error).ln() / added)
        };
        let (gt, gp) = (gain(try_t, np)?, gain(nt, try_p)?);
        if gt <= 0.0 && gp <= 0.0 {
            // Neither helps on its own: grow both.
            nt = try_t;
            np = try_p;
        } else if gt > gp {
            nt = try_t;
        } else {
            np = try_p;
        }
        if (nt + 3) * (np + 3) > MAX_COEFS {
            break;
        }
    }
    let b = best.ok_or_else(|| Error::Build(format!("{}: no table fits", spec.fluid.label())))?;
    Ok(b)
}

/// Length of the blob of a table, bytes.
pub fn blob_len(t: &TableBuf) -> Result<usize, Error> {
    Ok(blob(t)?.len())
}

/// The blob of a table.
pub fn blob(t: &TableBuf) -> Result<Vec<u8>, Error> {
    let mut out = vec![0u8; 8192];
    let n = t.to_blob(&mut out)?;
    out.truncate(n);
    Ok(out)
}

/// Checks a table against the reference equation on the grid of
/// `fit::Samples::new_offset` (0.5 K × p_max/1000, offset from the sample
/// nodes), fixed point and float.
pub fn check(table: &isochor_core::model::device::Table<'_>) -> Result<CheckReport, Error> {
    if table.gas.mixture().is_some() {
        return Err(Error::Invalid(
            "a mixture's table is checked against its composition (check_fluid)".into(),
        ));
    }
    check_fluid(table, &Fluid::pure(table.gas))
}

/// [`check`] for a table of `fluid` (a mixture's table needs its
/// composition; its gas must be the fluid's).
pub fn check_fluid(
    table: &isochor_core::model::device::Table<'_>,
    fluid: &Fluid,
) -> Result<CheckReport, Error> {
    if table.gas != fluid.gas() {
        return Err(Error::Invalid(format!(
            "the table is not of {} (another gas or composition)",
            fluid.label()
        )));
    }
    let r = table.range();
    let density_max = match fluid {
        Fluid::Pure(eos) => eos.critical_density_mol_m3 * eos.molar_mass_kg_mol,
        Fluid::Mixture(m) => m.gerg.pseudo_critical_density_mol_m3() * m.gerg.molar_mass_kg_mol(),
    };
    let spec = BuildSpec {
        fluid: fluid.clone(),
        t_min_k: r.temperature_min_k,
        t_max_k: r.temperature_max_k,
        p_max_pa: r.pressure_max_pa,
        // Candidates up to the critical density; the table's own boundary
        // curves decide which of them it covers (states it flags are skipped).
        density_max_kg_m3: Some(density_max),
        target: 0.0,
        max_bytes: 0,
    };
    let dom = Domain::new(&spec)?;
    let grid = fit::Samples::new_offset(&dom);
    check_table(table, &grid)
}

fn check_table(
    table: &isochor_core::model::device::Table<'_>,
    grid: &fit::Samples,
) -> Result<CheckReport, Error> {
    let m = DeviceModel::new(*table)?;
    let mut r = CheckReport::default();
    let (mut sum, mut sum_f) = (0.0, 0.0);
    for s in &grid.points {
        let pf = fx::Pressure::from_num(s.p);
        let tf = fx::Temperature::from_num(s.t);
        let a = m.z_fx(pf, tf);
        if !a.flags.is_ok() {
            // Outside the table's own boundary curves (which lie inside the
            // exact ones): not covered.
            continue;
        }
        let zf: ZPoint<f64> = m.z(fx::to_f64(pf), fx::to_f64(tf));
        // Reference at exactly the fixed-point inputs.
        let z_ref = if fx::to_f64(pf) == s.p && fx::to_f64(tf) == s.t {
            s.z
        } else {
            match grid.dom_z(fx::to_f64(pf), fx::to_f64(tf)) {
                Some(z) => z,
                None => continue,
            }
        };
        let e = (z_ref / fx::to_f64(a.z) - 1.0).abs();
        let ef = (z_ref / zf.z - 1.0).abs();
        r.samples += 1;
        sum += e;
        sum_f += ef;
        if e > r.max_rel_error {
            r.max_rel_error = e;
            r.worst_pressure_pa = s.p;
            r.worst_temperature_k = s.t;
        }
        r.max_rel_error_float = r.max_rel_error_float.max(ef);
        r.max_fixed_vs_float = r.max_fixed_vs_float.max((fx::to_f64(a.z) - zf.z).abs());
    }
    if r.samples == 0 {
        return Err(Error::Build("no state of the check grid is covered".into()));
    }
    r.mean_rel_error = sum / r.samples as f64;
    r.mean_rel_error_float = sum_f / r.samples as f64;
    Ok(r)
}

/// The boundary of a table as fitted (for tests and reports).
pub fn boundary_of(t: &TableBuf) -> Option<&BoundaryBuf> {
    t.boundary.as_ref()
}
