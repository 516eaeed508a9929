//! Reader of isochor's coefficient file format (`*.eos`, format 2).
//!
//! Line oriented; `#` starts a comment; each record is a keyword followed by
//! whitespace-separated fields. Numbers are written as the shortest decimal
//! that reads back as the same binary64 value. Records (see DEVELOPERS.md):
//!
//! ```text
//! format isochor-eos 2
//! gas <isochor gas name>
//! coolprop <CoolProp fluid name> <CoolProp version>
//! source <publication, to the end of the line>        (one or more)
//! molar_mass_kg_mol <M>
//! gas_constant_j_mol_k <R of this equation>
//! reducing <T_r K> <ρ_r mol/m³>
//! critical <T_c K> <p_c Pa> <ρ_c mol/m³>
//! range <T_min K> <T_max K> <p_max Pa>
//! psat <T_r> <p_r Pa> <tau_r 0|1> <T_min> <T_max>      then psat_term <n> <t> ...
//! rhov <T_r> <ρ_r mol/m³> <tau_r 0|1> <T_min> <T_max>  then rhov_term <n> <t> ...
//! ideal_lead <a1> <a2>                  α⁰ += ln δ + a1 + a2·τ
//! ideal_offset <a1> <a2>                α⁰ += a1 + a2·τ
//! ideal_log_tau <a>                     α⁰ += a·ln τ
//! ideal_power <n> <t>                   α⁰ += n·τ^t
//! ideal_planck_einstein <n> <θ> <c> <d> α⁰ += n·ln(c + d·exp(θ·τ))
//! power <n> <d> <t> <l>
//! gauss <n> <d> <t> <η> <ε> <β> <γ>
//! nonanalytic <n> <a> <b> <β> <A> <B> <C> <D>
//! ```

use super::{Ancillary, Eos, IdealTerm, Term};
use crate::Error;
use isochor_core::Gas;

fn bad(line: usize, what: &str) -> Error {
    Error::EosData(format!("line {line}: {what}"))
}

fn numbers<const N: usize>(fields: &[&str], line: usize) -> Result<[f64; N], Error> {
    if fields.len() != N {
        return Err(bad(
            line,
            &format!("expected {N} numbers, found {}", fields.len()),
        ));
    }
    let mut out = [0.0; N];
    for (o, f) in out.iter_mut().zip(fields) {
        *o = f
            .parse::<f64>()
            .ok()
            .filter(|v| v.is_finite())
            .ok_or_else(|| bad(line, &format!("not a number: {f}")))?;
    }
    Ok(out)
}

fn ancillary(fields: &[&str], line: usize) -> Result<Ancillary, Error> {
    let [t_r, y_r, tau_r, t_min, t_max] = numbers::<5>(fields, line)?;
    Ok(Ancillary {
        t_r,
        y_r,
        tau_r: tau_r != 0.0,
        t_min,
        t_max,
        terms: Vec::new(),
    })
}

/// Parses one coefficient file.
pub fn parse(text: &str) -> Result<Eos, Error> {
    let mut gas = None;
    let mut coolprop = String::new();
    let mut sources = Vec::new();
    let mut molar_mass = None;
    let mut r = None;
    let mut reducing = None;
    let mut critical = None;
    let mut range = None;
    let mut psat: Option<Ancillary> = None;
    let mut rhov: Option<Ancillary> = None;
    let mut terms = Vec::new();
    let mut ideal = Vec::new();
    let mut format_ok = false;
    for (i, raw) in text.lines().enumerate() {
        let n = i + 1;
        let line = raw.split('#').next().unwrap_or("").trim();
        if line.is_empty() {
            continue;
        }
        let (key, rest) = line.split_once(char::is_whitespace).unwrap_or((line, ""));
        let fields: Vec<&str> = rest.split_whitespace().collect();
        match key {
            "format" => format_ok = fields == ["isochor-eos", "2"],
            "gas" => gas = Some(Gas::from_name(rest.trim()).map_err(|_| bad(n, "unknown gas"))?),
            "coolprop" => coolprop = rest.trim().to_string(),
            "source" => sources.push(rest.trim().to_string()),
            "molar_mass_kg_mol" => molar_mass = Some(numbers::<1>(&fields, n)?[0]),
            "gas_constant_j_mol_k" => r = Some(numbers::<1>(&fields, n)?[0]),
            "reducing" => reducing = Some(numbers::<2>(&fields, n)?),
            "critical" => critical = Some(numbers::<3>(&fields, n)?),
            "range" => range = Some(numbers::<3>(&fields, n)?),
            "psat" => psat = Some(ancillary(&fields, n)?),
            "rhov" => rhov = Some(ancillary(&fields, n)?),
            "psat_term" | "rhov_term" => {
                let [c, t] = numbers::<2>(&fields, n)?;
                let a = if key == "psat_term" {
                    psat.as_mut()
                } else {
                    rhov.as_mut()
                };
                a.ok_or_else(|| bad(n, "ancillary term before its header"))?
                    .terms
                    .push((c, t));
            }
            "ideal_lead" => {
                let [a1, a2] = numbers::<2>(&fields, n)?;
                ideal.push(IdealTerm::Lead { a1, a2 });
            }
            "ideal_offset" => {
                let [a1, a2] = numbers::<2>(&fields, n)?;
                ideal.push(IdealTerm::Offset { a1, a2 });
            }
            "ideal_log_tau" => {
                let [a] = numbers::<1>(&fields, n)?;
                ideal.push(IdealTerm::LogTau { a });
            }
            "ideal_power" => {
                let [c, t] = numbers::<2>(&fields, n)?;
                ideal.push(IdealTerm::Power { n: c, t });
            }
            "ideal_planck_einstein" => {
                let [c_n, theta, c, d] = numbers::<4>(&fields, n)?;
                ideal.push(IdealTerm::PlanckEinstein {
                    n: c_n,
                    theta,
                    c,
                    d,
                });
            }
            "power" => {
                let [c, d, t, l] = numbers::<4>(&fields, n)?;
                terms.push(Term::Power { n: c, d, t, l });
            }
            "gauss" => {
                let [c, d, t, eta, epsilon, beta, gamma] = numbers::<7>(&fields, n)?;
                terms.push(Term::Gaussian {
                    n: c,
                    d,
                    t,
                    eta,
                    epsilon,
                    beta,
                    gamma,
                });
            }
            "nonanalytic" => {
                let [c, a, b, beta, big_a, big_b, big_c, big_d] = numbers::<8>(&fields, n)?;
                terms.push(Term::NonAnalytic {
                    n: c,
                    a,
                    b,
                    beta,
                    big_a,
                    big_b,
                    big_c,
                    big_d,
                });
            }
            other => return Err(bad(n, &format!("unknown record '{other}'"))),
        }
    }
    let missing = |what: &str| Error::EosData(format!("missing record '{what}'"));
    if !format_ok {
        return Err(missing("format isochor-eos 2"));
    }
    let [t_r, rho_r] = reducing.ok_or_else(|| missing("reducing"))?;
    let [t_c, p_c, rho_c] = critical.ok_or_else(|| missing("critical"))?;
    let [t_min, t_max, p_max] = range.ok_or_else(|| missing("range"))?;
    let eos = Eos {
        gas: gas.ok_or_else(|| missing("gas"))?,
        coolprop,
        sources,
        molar_mass_kg_mol: molar_mass.ok_or_else(|| missing("molar_mass_kg_mol"))?,
        gas_constant: r.ok_or_else(|| missing("gas_constant_j_mol_k"))?,
        reducing_temperature_k: t_r,
        reducing_density_mol_m3: rho_r,
        critical_temperature_k: t_c,
        critical_pressure_pa: p_c,
        critical_density_mol_m3: rho_c,
        temperature_min_k: t_min,
        temperature_max_k: t_max,
        pressure_max_pa: p_max,
        saturation_pressure: psat.ok_or_else(|| missing("psat"))?,
        vapour_density: rhov.ok_or_else(|| missing("rhov"))?,
        terms,
        ideal,
    };
    let positive = [
        eos.molar_mass_kg_mol,
        eos.gas_constant,
        t_r,
        rho_r,
        t_c,
        p_c,
        rho_c,
        t_min,
        t_max,
        p_max,
    ];
    if positive.iter().any(|&v| v <= 0.0) || t_min >= t_max {
        return Err(Error::EosData(
            "non-positive constant or empty range".into(),
        ));
    }
    if eos.terms.is_empty() {
        return Err(missing("power"));
    }
    if !eos
        .ideal
        .iter()
        .any(|t| matches!(t, IdealTerm::Lead { .. }))
    {
        return Err(missing("ideal_lead"));
    }
    Ok(eos)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn malformed_files_are_refused() {
        assert!(parse("").is_err());
        let good = super::super::data(Gas::Nitrogen);
        assert!(parse(good).is_ok());
        assert!(parse(&good.replace("format isochor-eos 2", "format isochor-eos 1")).is_err());
        assert!(parse(&good.replace("ideal_lead", "# ideal_lead")).is_err());
        assert!(parse(&good.replace("ideal_log_tau 2.5", "ideal_log_tau")).is_err());
        assert!(parse(&good.replace("power ", "powr ")).is_err());
        assert!(parse(&good.replace("range 63.151", "range x")).is_err());
    }
}
