//! The content report: one sample through both core paths, side by side.
//!
//! The `float` side is the `f64` path run on exactly the values given; the
//! `fixed` side is the device path run on the same values rounded to its
//! formats. The JSON field names are an interface (other tools read them):
//! keep them stable.

use crate::Error;
use isochor_core::content::{fixed, float};
use isochor_core::model::{Compressibility, CompressibilityFx, DeviceModel, Ideal};
use isochor_core::{Setup, SetupFx, StandardCondition, Status, Tank, fx};
use isochor_eos::composition::GasSpec;
use isochor_eos::fluid::Fluid;
use isochor_eos::reference::ReferenceModel;
use isochor_eos::{safety, units};
use serde::Serialize;
use std::collections::BTreeMap;

/// Which gas model to use.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, clap::ValueEnum)]
pub enum ModelChoice {
    /// The ideal gas (Z = 1).
    Ideal,
    /// The reference equation of state (host only; the fixed-point side runs
    /// the device arithmetic on its answers).
    Reference,
    /// The built-in device table of the gas (what a device runs).
    #[default]
    Device,
}

impl ModelChoice {
    /// Stable name, as in the JSON `model` field.
    pub fn name(self) -> &'static str {
        match self {
            ModelChoice::Ideal => "ideal",
            ModelChoice::Reference => "reference",
            ModelChoice::Device => "device",
        }
    }
}

/// What to estimate.
#[derive(Clone, Debug)]
pub struct ContentRequest {
    /// The gas or mixture.
    pub gas: GasSpec,
    /// The gas model.
    pub model: ModelChoice,
    /// The tank.
    pub tank: Tank,
    /// Absolute pressure, Pa.
    pub pressure_pa: f64,
    /// Gas temperature, K.
    pub temperature_k: f64,
    /// Standard condition for standard volume, and its name.
    pub standard: (String, StandardCondition),
    /// Settled reference temperature, K.
    pub settled_reference_k: f64,
}

/// The sample as used.
#[derive(Clone, Debug, Serialize)]
pub struct SampleReport {
    /// Absolute pressure, Pa.
    pub pressure_pa: f64,
    /// Gas temperature, K.
    pub temperature_k: f64,
}

/// The tank as used.
#[derive(Clone, Debug, Serialize)]
pub struct TankReport {
    /// Water capacity, m³.
    pub water_capacity_m3: f64,
    /// Rated pressure, absolute, Pa.
    pub rated_pressure_pa: f64,
    /// Temperature of the rating, K.
    pub rated_temperature_k: f64,
    /// Elastic expansion per MPa.
    pub elastic_expansion_per_mpa: f64,
    /// Thermal expansion per K.
    pub thermal_expansion_per_k: f64,
    /// Rated content (mass at rated pressure and temperature), kg, f64 path.
    pub rated_mass_kg: f64,
}

/// The standard condition, and the content by the reference equation of
/// state when it applies.
#[derive(Clone, Debug, Serialize)]
pub struct ReferenceReport {
    /// Its name (`iso13443`, `normal`, `ntp`, `60f` or `custom`).
    pub name: String,
    /// Temperature, K.
    pub temperature_k: f64,
    /// Absolute pressure, Pa.
    pub pressure_pa: f64,
    /// The content by the reference equation of state (f64 estimate), with the
    /// same field names as `fixed` and `float`; absent when the reference
    /// estimate cannot be prepared (e.g. a two-phase rated condition).
    #[serde(flatten)]
    pub eos: Option<Outputs>,
}

/// The outputs of one path. Content values are `null` when the status says
/// they are not valid (liquid or two-phase).
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct Outputs {
    /// Density, kg/m³.
    pub density_kg_m3: Option<f64>,
    /// Mass, kg.
    pub mass_kg: Option<f64>,
    /// Amount of substance, mol.
    pub amount_mol: Option<f64>,
    /// Standard volume, m³.
    pub standard_volume_m3: Option<f64>,
    /// Settled pressure, absolute, Pa.
    pub settled_pressure_pa: Option<f64>,
    /// Fill fraction (1 = rated content).
    pub fill_fraction: Option<f64>,
    /// Compressibility factor used.
    pub z: f64,
    /// Status flag names.
    pub status: Vec<String>,
}

impl Outputs {
    #[allow(clippy::too_many_arguments)]
    fn new(
        density: f64,
        mass: f64,
        amount: f64,
        standard_volume: f64,
        settled: f64,
        fraction: f64,
        z: f64,
        status: Status,
    ) -> Outputs {
        let content_ok = !status.intersects(Status::CONTENT_INVALID);
        let settled_ok = content_ok && !status.contains(Status::SETTLED_TWO_PHASE);
        let valid = |v: f64, ok: bool| ok.then_some(v);
        Outputs {
            density_kg_m3: valid(density, content_ok),
            mass_kg: valid(mass, content_ok),
            amount_mol: valid(amount, content_ok),
            standard_volume_m3: valid(standard_volume, content_ok),
            settled_pressure_pa: valid(settled, settled_ok),
            fill_fraction: valid(fraction, content_ok),
            z,
            status: status.names().map(str::to_string).collect(),
        }
    }
}

/// The full report of `isochor content`.
#[derive(Clone, Debug, Serialize)]
pub struct ContentReport {
    /// Gas name (a mixture: its composition in the `--gas` form).
    pub gas: String,
    /// Mole fractions by component (a pure gas: itself, 1).
    pub composition: BTreeMap<String, f64>,
    /// Model name.
    pub model: String,
    /// The device table built (or reused) for a mixture; absent for a pure
    /// gas's built-in table and for the other models.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub device_table: Option<crate::model_cache::TableNote>,
    /// The sample.
    pub sample: SampleReport,
    /// The tank.
    pub tank: TankReport,
    /// Standard condition of `standard_volume_m3`.
    pub reference: ReferenceReport,
    /// Settled reference temperature, K.
    pub settled_reference_k: f64,
    /// The device (fixed-point) path.
    pub fixed: Outputs,
    /// The f64 path.
    pub float: Outputs,
    /// Safety cautions.
    pub caution: String,
}

/// Runs one sample through both paths, and through the reference equation.
pub fn report(req: &ContentRequest) -> Result<ContentReport, Error> {
    let gas = req.gas.gas();
    let mut r = match req.model {
        ModelChoice::Ideal => run(req, Ideal::new(gas), Ideal::new(gas))?,
        ModelChoice::Reference => {
            let m = ReferenceModel::of(Fluid::of(&req.gas));
            run(req, m.clone(), m)?
        }
        ModelChoice::Device => match &req.gas {
            GasSpec::Pure(g) => {
                let m = DeviceModel::builtin(*g)?;
                run(req, m.clone(), m)?
            }
            GasSpec::Mixture(_) => {
                let (table, note) = crate::model_cache::table_for(&Fluid::of(&req.gas))?;
                let m = DeviceModel::new(table.table())?;
                let mut r = run(req, m.clone(), m)?;
                r.device_table = Some(note);
                r
            }
        },
    };
    r.reference.eos = reference_outputs(req);
    Ok(r)
}

/// The f64 estimate with the reference equation of state.
fn reference_outputs(req: &ContentRequest) -> Option<Outputs> {
    let setup = Setup {
        gas: req.gas.gas(),
        tank: req.tank,
        standard: req.standard.1,
        settled_reference_k: req.settled_reference_k,
    };
    let est = float::Estimator::new(setup, ReferenceModel::of(Fluid::of(&req.gas))).ok()?;
    let a = est.estimate(req.pressure_pa, req.temperature_k).ok()?;
    Some(Outputs::new(
        a.density_kg_m3,
        a.mass_kg,
        a.amount_mol,
        a.standard_volume_m3,
        a.settled_pressure_pa,
        a.fill_fraction,
        a.z.z,
        a.status,
    ))
}

fn run<MF, MX>(
    req: &ContentRequest,
    float_model: MF,
    fixed_model: MX,
) -> Result<ContentReport, Error>
where
    MF: Compressibility<f64>,
    MX: CompressibilityFx,
{
    if req.pressure_pa.is_nan() || req.pressure_pa < 0.0 {
        return Err(Error::Invalid(format!(
            "absolute pressure {} is negative",
            units::fmt_bar(req.pressure_pa)
        )));
    }
    let setup = Setup {
        gas: req.gas.gas(),
        tank: req.tank,
        standard: req.standard.1,
        settled_reference_k: req.settled_reference_k,
    };
    let float_est = float::Estimator::new(setup, float_model)?;
    let a = float_est.estimate(req.pressure_pa, req.temperature_k)?;

    let fixed_est = fixed::Estimator::new(SetupFx::from_f64(&setup)?, fixed_model)?;
    let (p, p_sat) = saturating::<fx::Pressure>(req.pressure_pa);
    let (t, t_sat) = saturating::<fx::Temperature>(req.temperature_k);
    let mut b = fixed_est.estimate(p, t);
    if p_sat {
        b.status |= Status::PRESSURE_OUTSIDE_ENVELOPE;
    }
    if t_sat {
        b.status |= Status::TEMPERATURE_OUTSIDE_ENVELOPE;
    }

    Ok(ContentReport {
        gas: crate::cli::gas::gas_field(&req.gas),
        composition: crate::cli::gas::composition_map(&req.gas),
        model: float_est.model().kind().to_string(),
        device_table: None,
        sample: SampleReport {
            pressure_pa: req.pressure_pa,
            temperature_k: req.temperature_k,
        },
        tank: TankReport {
            water_capacity_m3: req.tank.water_capacity_m3,
            rated_pressure_pa: req.tank.rated_pressure_pa,
            rated_temperature_k: req.tank.rated_temperature_k,
            elastic_expansion_per_mpa: req.tank.elastic_expansion_per_mpa,
            thermal_expansion_per_k: req.tank.thermal_expansion_per_k,
            rated_mass_kg: float_est.rated_mass_kg(),
        },
        reference: ReferenceReport {
            name: req.standard.0.clone(),
            temperature_k: req.standard.1.temperature_k,
            pressure_pa: req.standard.1.pressure_pa,
            eos: None,
        },
        settled_reference_k: req.settled_reference_k,
        fixed: Outputs::new(
            fx::to_f64(b.density_kg_m3),
            fx::to_f64(b.mass_kg),
            fx::to_f64(b.amount_mol),
            fx::to_f64(b.standard_volume_m3),
            fx::to_f64(b.settled_pressure_pa),
            fx::to_f64(b.fill_fraction),
            fx::to_f64(b.z.z),
            b.status,
        ),
        float: Outputs::new(
            a.density_kg_m3,
            a.mass_kg,
            a.amount_mol,
            a.standard_volume_m3,
            a.settled_pressure_pa,
            a.fill_fraction,
            a.z.z,
            a.status,
        ),
        caution: safety::paragraph_for(&req.gas),
    })
}

/// Converts to a fixed-point format, clamping; the flag says it clamped.
fn saturating<T: isochor_core::fixed::traits::Fixed>(v: f64) -> (T, bool) {
    let clamped = v > T::MAX.to_num::<f64>() || v < T::MIN.to_num::<f64>();
    (T::saturating_from_num(v), clamped)
}

/// The human-readable report.
pub fn render_text(r: &ContentReport) -> String {
    use std::fmt::Write;
    let mut s = String::new();
    let _ = writeln!(
        s,
        "isochor content: {} in {} tank rated {} abs at {}; model: {}",
        r.gas,
        fmt_volume(r.tank.water_capacity_m3),
        units::fmt_bar(r.tank.rated_pressure_pa),
        units::fmt_celsius(r.tank.rated_temperature_k),
        r.model
    );
    let _ = writeln!(
        s,
        "sample: {} abs, {}\n",
        units::fmt_bar(r.sample.pressure_pa),
        units::fmt_celsius(r.sample.temperature_k)
    );
    if let Some(t) = &r.device_table {
        let _ = writeln!(s, "{}\n", t.describe());
    }
    let eos = r.reference.eos.as_ref();
    let _ = writeln!(
        s,
        "  {:<18} {:>22} {:>22} {:>22}",
        "",
        format!("fixed point ({})", r.model),
        format!("f64 ({})", r.model),
        if eos.is_some() { "reference EOS" } else { "" }
    );
    let row = |s: &mut String,
               name: &str,
               a: Option<String>,
               b: Option<String>,
               c: Option<Option<String>>| {
        let na = || "not valid".to_string();
        let _ = writeln!(
            s,
            "  {:<18} {:>22} {:>22} {:>22}",
            name,
            a.unwrap_or_else(na),
            b.unwrap_or_else(na),
            c.map(|c| c.unwrap_or_else(na)).unwrap_or_default()
        );
    };
    let (f, x) = (&r.fixed, &r.float);
    let num = |v: Option<f64>, unit: &str, prec: usize| v.map(|v| format!("{v:.prec$} {unit}"));
    let third = |g: &dyn Fn(&Outputs) -> Option<String>| eos.map(g);
    row(
        &mut s,
        "density",
        num(f.density_kg_m3, "kg/m³", 4),
        num(x.density_kg_m3, "kg/m³", 4),
        third(&|o| num(o.density_kg_m3, "kg/m³", 4)),
    );
    row(
        &mut s,
        "mass",
        num(f.mass_kg, "kg", 4),
        num(x.mass_kg, "kg", 4),
        third(&|o| num(o.mass_kg, "kg", 4)),
    );
    row(
        &mut s,
        "amount",
        num(f.amount_mol, "mol", 3),
        num(x.amount_mol, "mol", 3),
        third(&|o| num(o.amount_mol, "mol", 3)),
    );
    row(
        &mut s,
        "standard volume",
        num(f.standard_volume_m3, "m³", 4),
        num(x.standard_volume_m3, "m³", 4),
        third(&|o| num(o.standard_volume_m3, "m³", 4)),
    );
    let bar = |v: Option<f64>| v.map(|p| units::fmt_bar(p) + " abs");
    row(
        &mut s,
        "settled pressure",
        bar(f.settled_pressure_pa),
        bar(x.settled_pressure_pa),
        third(&|o| bar(o.settled_pressure_pa)),
    );
    let pct = |v: Option<f64>| v.map(|v| format!("{:.3} %", v * 100.0));
    row(
        &mut s,
        "fill fraction",
        pct(f.fill_fraction),
        pct(x.fill_fraction),
        third(&|o| pct(o.fill_fraction)),
    );
    row(
        &mut s,
        "Z (CODATA R)",
        Some(format!("{:.6}", f.z)),
        Some(format!("{:.6}", x.z)),
        third(&|o| Some(format!("{:.6}", o.z))),
    );
    let status = |v: &[String]| {
        if v.is_empty() {
            "ok".to_string()
        } else {
            v.join(",")
        }
    };
    row(
        &mut s,
        "status",
        Some(status(&f.status)),
        Some(status(&x.status)),
        third(&|o| Some(status(&o.status))),
    );
    let _ = writeln!(
        s,
        "\nstandard volume at {} and {:.3} kPa ({}); settled pressure at {}; rated content {:.4} kg.",
        units::fmt_celsius(r.reference.temperature_k),
        r.reference.pressure_pa / 1e3,
        r.reference.name,
        units::fmt_celsius(r.settled_reference_k),
        r.tank.rated_mass_kg
    );
    if let Ok(g) = GasSpec::parse(&r.gas) {
        if r.fixed
            .status
            .iter()
            .chain(&r.float.status)
            .any(|f| f == "condensation_risk")
        {
            let _ = writeln!(
                s,
                "\ncondensation_risk: below the mixture's dew line a liquid can form; the content \
                 figures are not valid (warm the cylinder to room temperature before use)."
            );
        }
        let _ = writeln!(s);
        for line in safety::lines_for(&g) {
            let _ = writeln!(s, "{line}");
        }
    }
    s
}

fn fmt_volume(m3: f64) -> String {
    if m3 < 1.0 {
        format!("{:.4} L", m3 * 1e3)
    } else {
        format!("{m3:.4} m³")
    }
}
