//! `isochor props`: the reference equation of state at one state.

use super::{Format, to_json};
use crate::Error;
use clap::Args;
use isochor_eos::composition::GasSpec;
use isochor_eos::fluid::Fluid;
use isochor_eos::{safety, units};
use serde::Serialize;
use std::collections::BTreeMap;

/// Arguments of `isochor props`.
#[derive(Debug, Args)]
pub struct PropsArgs {
    /// The gas or mixture.
    #[command(flatten)]
    pub gas: super::gas::GasArgs,
    /// Absolute pressure, with unit (Pa, kPa, MPa, bar, mbar, psi).
    #[arg(long, allow_hyphen_values = true)]
    pub pressure: String,
    /// Temperature, with unit (K, C, F).
    #[arg(long, allow_hyphen_values = true)]
    pub temperature: String,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
}

/// The JSON answer of `isochor props`.
#[derive(Clone, Debug, Serialize)]
pub struct PropsReport {
    /// Gas name (a mixture: its composition in the `--gas` form).
    pub gas: String,
    /// Mole fractions by component (a pure gas: itself, 1).
    pub composition: BTreeMap<String, f64>,
    /// Absolute pressure, Pa.
    pub pressure_pa: f64,
    /// Temperature, K.
    pub temperature_k: f64,
    /// The equation's own compressibility factor p/(ρ·R_eos·T), as CoolProp
    /// reports it.
    pub z: f64,
    /// Effective compressibility factor with the CODATA 2018 gas constant
    /// (the Z the content estimate uses for this density).
    pub z_codata: f64,
    /// Mass density, kg/m³.
    pub density_kg_m3: f64,
    /// Molar density, mol/m³.
    pub density_mol_m3: f64,
    /// ∂ρ/∂p at constant T, (kg/m³)/Pa.
    pub drho_dp_kg_m3_pa: f64,
    /// ∂ρ/∂T at constant p, (kg/m³)/K.
    pub drho_dt_kg_m3_k: f64,
    /// Molar mass of the equation of state, kg/mol.
    pub molar_mass_kg_mol: f64,
    /// The equation's own molar gas constant, J/(mol·K).
    pub gas_constant_j_mol_k: f64,
    /// `gas` or `supercritical`.
    pub phase: String,
    /// The publication of the equation of state.
    pub source: String,
    /// Safety cautions.
    pub caution: String,
}

/// Computes the report. A mixture at or above its dew line is refused (a
/// liquid can form there: tangent-plane test on GERG-2008).
pub fn report(gas: &GasSpec, p_pa: f64, t_k: f64) -> Result<PropsReport, Error> {
    let eos = Fluid::of(gas);
    let s = eos.state(p_pa, t_k)?;
    let m = eos.molar_mass_kg_mol();
    Ok(PropsReport {
        gas: super::gas::gas_field(gas),
        composition: super::gas::composition_map(gas),
        pressure_pa: p_pa,
        temperature_k: t_k,
        z: s.z,
        z_codata: s.z_eff,
        density_kg_m3: s.density_kg_m3,
        density_mol_m3: s.density_mol_m3,
        drho_dp_kg_m3_pa: s.drho_dp_mol_m3_pa * m,
        drho_dt_kg_m3_k: s.drho_dt_mol_m3_k * m,
        molar_mass_kg_mol: m,
        gas_constant_j_mol_k: eos.gas_constant(),
        phase: s.phase.name().to_string(),
        source: eos.source().to_string(),
        caution: safety::paragraph_for(gas),
    })
}

/// Runs the command.
pub fn run(a: &PropsArgs) -> Result<String, Error> {
    let gas = a.gas.spec()?;
    let p = units::pressure_pa(&a.pressure, "--pressure")?;
    let t = units::temperature_k(&a.temperature, "--temperature")?;
    let r = report(&gas, p, t)?;
    match a.format {
        Format::Json => to_json(&r),
        Format::Text => {
            use std::fmt::Write;
            let mut s = String::new();
            let _ = writeln!(
                s,
                "isochor props: {} at {} abs, {} (reference equation of state)\n",
                r.gas,
                units::fmt_bar(r.pressure_pa),
                units::fmt_celsius(r.temperature_k)
            );
            let _ = writeln!(s, "  phase              {}", r.phase);
            let _ = writeln!(s, "  density            {:.6} kg/m³", r.density_kg_m3);
            let _ = writeln!(s, "  Z (EOS's own R)    {:.8}", r.z);
            let _ = writeln!(s, "  Z (CODATA R)       {:.8}", r.z_codata);
            let _ = writeln!(
                s,
                "  ∂ρ/∂p              {:.6e} kg/m³ per Pa",
                r.drho_dp_kg_m3_pa
            );
            let _ = writeln!(
                s,
                "  ∂ρ/∂T              {:.6e} kg/m³ per K",
                r.drho_dt_kg_m3_k
            );
            let _ = writeln!(
                s,
                "  molar mass         {:.8} kg/mol (R of the equation {} J/(mol K))",
                r.molar_mass_kg_mol, r.gas_constant_j_mol_k
            );
            let _ = writeln!(s, "  source             {}\n", r.source);
            for line in safety::lines_for(&gas) {
                let _ = writeln!(s, "{line}");
            }
            Ok(s)
        }
    }
}
