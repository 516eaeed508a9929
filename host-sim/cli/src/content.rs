//! The content report: one sample through both core paths, side by side.
//!
//! The `float` side is the `f64` path run on exactly the values given; the
//! `fixed` side is the device path run on the same values rounded to its
//! formats. The JSON field names are an interface (other tools read them):
//! keep them stable.

use crate::Error;
use isochor_core::constants::{BAR_PA, ZERO_CELSIUS_K};
use isochor_core::content::{fixed, float};
use isochor_core::envelope as env;
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
    /// Elastic expansion per bar (as `--elastic-expansion-per-bar` takes
    /// it: a tenth of the per-MPa figure).
    pub elastic_expansion_per_bar: f64,
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

/// The outputs of one path. Content values (and Z) are `null` when the
/// status says they are not valid ([`Status::CONTENT_INVALID`]: liquid,
/// `two_phase` or `liquid_full`, or a sample outside the operating
/// envelope, whose content would be the edge's and not the tank's).
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
    /// Compressibility factor used (`null` where the content is not valid:
    /// the model's answer there belongs to another state).
    pub z: Option<f64>,
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
            z: valid(z, content_ok),
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
    /// The pressure, absolute, Pa, the rated content has at the sample's
    /// temperature (the rated pressure corrected to this temperature; f64
    /// path): above it, the vessel holds more than its rated content.
    /// `null` where the gas model has no gas answer there.
    pub rated_pressure_at_temperature_pa: Option<f64>,
    /// The absolute pressure limit, Pa: 5/4 of the service (gauge) pressure
    /// above the standard atmosphere (see the `over_pressure` alarm).
    pub pressure_limit_pa: f64,
    /// What the reader must act on: over-fill, over-pressure, liquid in the
    /// vessel (one sentence each; empty when none applies).
    pub warnings: Vec<String>,
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
    check_rated_and_standard(req, &float_model)?;
    let float_est = float::Estimator::new(setup, float_model)?;
    let a = float_est.estimate(req.pressure_pa, req.temperature_k)?;
    let (p_rated_now, p_rated_now_status) = float_est.pressure_at(1.0, a.temperature_k);
    let rated_pressure_at_temperature_pa = (!p_rated_now_status
        .intersects(Status::CONTENT_INVALID | Status::MODEL_OUT_OF_RANGE))
    .then_some(p_rated_now);
    let limits = isochor_core::alarm::float::Limits::for_tank(&req.tank);

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
            elastic_expansion_per_bar: req.tank.elastic_expansion_per_mpa / 10.0,
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
        warnings: warnings(
            req,
            a.status | b.status,
            a.fill_fraction,
            rated_pressure_at_temperature_pa,
            limits.pressure_max_pa,
        ),
        rated_pressure_at_temperature_pa,
        pressure_limit_pa: limits.pressure_max_pa,
        caution: safety::paragraph_for(&req.gas),
    })
}

/// Refuses, with the reason and what to do, a rated or standard condition
/// where the gas model has no gas answer (liquid, or liquid and vapour).
fn check_rated_and_standard<M: Compressibility<f64>>(
    req: &ContentRequest,
    model: &M,
) -> Result<(), Error> {
    let t = &req.tank;
    let rated = model.z(t.rated_pressure_pa, t.rated_temperature_k);
    if rated.flags.intersects(Status::CONTENT_INVALID) {
        let vapour = match &req.gas {
            GasSpec::Pure(g) => isochor_eos::Eos::of(*g)
                .saturation_pressure_pa(t.rated_temperature_k)
                .map(|p| {
                    format!(
                        " (its vapour pressure at {} is about {} abs)",
                        units::fmt_celsius(t.rated_temperature_k),
                        units::fmt_bar(p)
                    )
                })
                .unwrap_or_default(),
            GasSpec::Mixture(_) => " (at or above the mixture's dew line)".to_string(),
        };
        return Err(Error::TwoPhase(format!(
            "no usable answer at the rated condition: {} at {} abs and {} is liquid, or liquid \
             and vapour{vapour}, not a gas (the gas model refuses liquid states). The content of a cylinder holding liquid cannot be \
             found from its pressure: weigh the cylinder (gross weight less the tare marked \
             on it). For a vessel rated for gas only, give its rated pressure and temperature \
             as marked (--rated-pressure, --rated-temperature).",
            gas_words(&req.gas),
            units::fmt_bar(t.rated_pressure_pa),
            units::fmt_celsius(t.rated_temperature_k),
        )));
    }
    let std = &req.standard.1;
    let z = model.z(std.pressure_pa, std.temperature_k);
    if z.flags.intersects(Status::CONTENT_INVALID) {
        return Err(Error::TwoPhase(format!(
            "no usable answer at the standard condition {} ({} and {:.3} kPa): {} is liquid \
             there, so a standard volume of gas means nothing; choose another --standard",
            req.standard.0,
            units::fmt_celsius(std.temperature_k),
            std.pressure_pa / 1e3,
            gas_words(&req.gas),
        )));
    }
    Ok(())
}

/// A gas in a sentence: a pure gas's name in words, a mixture's composition.
fn gas_words(spec: &GasSpec) -> String {
    match spec {
        GasSpec::Pure(g) => g.name().replace('_', " "),
        GasSpec::Mixture(c) => format!("the mixture {c}"),
    }
}

/// The warnings of one sample (see [`ContentReport::warnings`]).
fn warnings(
    req: &ContentRequest,
    status: Status,
    fill_fraction: f64,
    rated_now: Option<f64>,
    pressure_limit: f64,
) -> Vec<String> {
    let mut w = Vec::new();
    let t = units::fmt_celsius(req.temperature_k);
    let (gas, vapour) = match &req.gas {
        GasSpec::Pure(g) => (
            g.name().replace('_', " "),
            isochor_eos::Eos::of(*g)
                .saturation_pressure_pa(req.temperature_k)
                .map(|p| format!(" ({} abs)", units::fmt_bar(p)))
                .unwrap_or_default(),
        ),
        GasSpec::Mixture(_) => (gas_words(&req.gas), String::new()),
    };
    if status.contains(Status::CONDENSATION_RISK) {
        w.push(format!(
            "CONDENSATION RISK: at {t} and {} abs {gas} is at or above its dew \
             line, where a liquid can form; the content figures are not valid. Warm the cylinder to \
             room temperature before use.",
            units::fmt_bar(req.pressure_pa)
        ));
    }
    if status.contains(Status::LIQUID_FULL) {
        w.push(format!(
            "LIQUID-FULL: {} abs is far above the vapour pressure of {gas} at {t}{vapour}: the \
             vessel is full of liquid with no vapour space left, and its pressure rises by \
             several bar for every kelvin it warms. Danger of bursting: keep it cool and away \
             from heat, do not fill it, and have it checked. Its content cannot be found from \
             its pressure: weigh it.",
            units::fmt_bar(req.pressure_pa)
        ));
    } else if status.contains(Status::TWO_PHASE) {
        w.push(format!(
            "LIQUID IN THE VESSEL: at {t} the reading is at (or just above) the vapour \
             pressure of {gas}{vapour}: the vessel holds liquid and vapour, and the pressure \
             stays the same until the liquid is gone, whatever the content. Weigh the \
             cylinder (gross weight less the tare marked on it) to know the content."
        ));
    }
    if status.contains(Status::OVER_FILL) {
        let above = rated_now
            .map(|p| {
                format!(
                    "; the pressure {} abs is above {} abs, the pressure of the rated content at \
                     {t} (the rated pressure corrected to this temperature)",
                    units::fmt_bar(req.pressure_pa),
                    units::fmt_bar(p)
                )
            })
            .unwrap_or_default();
        w.push(format!(
            "OVER-FILL: the content is {:.1} % of the rated content{above}. Do not fill \
             further or heat the vessel; have the excess removed safely as your local codes \
             require.",
            fill_fraction * 100.0
        ));
    }
    if req.pressure_pa > pressure_limit {
        w.push(format!(
            "OVER-PRESSURE: {} abs is above {} abs, 5/4 of the service pressure (gauge): above \
             what the vessel may see at any temperature. Move it somewhere cool and safe and \
             have it checked.",
            units::fmt_bar(req.pressure_pa),
            units::fmt_bar(pressure_limit)
        ));
    }
    w
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
    let z = |v: Option<f64>| v.map(|z| format!("{z:.6}"));
    row(&mut s, "Z (CODATA R)", z(f.z), z(x.z), third(&|o| z(o.z)));
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
    let outside = [&r.fixed, &r.float].iter().any(|o| {
        o.status
            .iter()
            .any(|f| f == "pressure_outside_envelope" || f == "temperature_outside_envelope")
    });
    if outside {
        let _ = writeln!(
            s,
            "\nnot valid: the sample lies outside the operating envelope ({:.0}–{:.0} bar abs, \
             {:.0} … {:+.0} °C).\nThe device clamps it to the edge so nothing overflows, and \
             flags it; the content\ncomputed there is the edge's, not the tank's, so it is not \
             shown as a number.",
            env::PRESSURE_MIN_PA / BAR_PA,
            env::PRESSURE_MAX_PA / BAR_PA,
            env::TEMPERATURE_MIN_K - ZERO_CELSIUS_K,
            env::TEMPERATURE_MAX_K - ZERO_CELSIUS_K,
        );
    }
    let _ = writeln!(
        s,
        "\nstandard volume at {} and {:.3} kPa ({}); settled pressure at {}; rated content {:.4} kg.",
        units::fmt_celsius(r.reference.temperature_k),
        r.reference.pressure_pa / 1e3,
        r.reference.name,
        units::fmt_celsius(r.settled_reference_k),
        r.tank.rated_mass_kg
    );
    if let Some(p) = r.rated_pressure_at_temperature_pa {
        let _ = writeln!(
            s,
            "rated content at {}: {} abs (over-fill above {:.0} % of it); pressure limit {} abs.",
            units::fmt_celsius(r.sample.temperature_k),
            units::fmt_bar(p),
            isochor_core::content::OVER_FILL_FRACTION * 100.0,
            units::fmt_bar(r.pressure_limit_pa)
        );
    }
    for w in &r.warnings {
        let _ = writeln!(s, "\n{w}");
    }
    if let Ok(g) = GasSpec::parse(&r.gas) {
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
