//! Gas compositions: what a tank holds when it is a mixture.
//!
//! Written `name=fraction` items separated by commas, mole fractions as
//! percentages (`82%`) or plain fractions (`0.82`):
//! `argon=82%,carbon_dioxide=18%`. Rules:
//!
//! * component names are those of the gas list (`nitrogen`, `carbon_dioxide`,
//!   …) and, for the other GERG-2008 components, `isobutane`, `n_butane`,
//!   `isopentane`, `n_pentane`, `n_hexane`, `n_heptane`, `n_octane`,
//!   `n_nonane`, `n_decane`, `carbon_monoxide`, `water`, `hydrogen_sulfide`;
//!   case is ignored, `-` and spaces count as `_`, and chemical formulas are
//!   accepted (`CO2`, `He`, `C3H8`); `air` stands for dry air as
//!   nitrogen 78.12 %, oxygen 20.96 %, argon 0.92 % (the composition of Lemmon
//!   et al., J. Phys. Chem. Ref. Data 29, 331 (2000)) and adds to those
//!   components;
//! * each fraction is finite and not negative (a zero drops the component),
//!   each component appears once;
//! * the fractions must sum to 1 within 1e-6 (100 % within 1e-4 %); they are
//!   then divided by their sum, so the composition used sums to one.
//!
//! A composition of one component that has its own reference equation (a gas
//! of the gas list) is that pure gas ([`GasSpec::Pure`]); anything else is a
//! mixture evaluated with GERG-2008. Neon, krypton and xenon are not
//! GERG-2008 components: they can only be used pure.

use crate::Error;
use isochor_core::{Gas, Mixture, fx};
use std::fmt;

/// Tolerance of the sum of the fractions.
pub const SUM_TOLERANCE: f64 = 1e-6;

/// A GERG-2008 component, in GERG-2008's order.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Component {
    /// CH4.
    Methane,
    /// N2.
    Nitrogen,
    /// CO2.
    CarbonDioxide,
    /// C2H6.
    Ethane,
    /// C3H8.
    Propane,
    /// i-C4H10.
    Isobutane,
    /// n-C4H10.
    NButane,
    /// i-C5H12.
    Isopentane,
    /// n-C5H12.
    NPentane,
    /// n-C6H14.
    NHexane,
    /// n-C7H16.
    NHeptane,
    /// n-C8H18.
    NOctane,
    /// n-C9H20.
    NNonane,
    /// n-C10H22.
    NDecane,
    /// H2.
    Hydrogen,
    /// O2.
    Oxygen,
    /// CO.
    CarbonMonoxide,
    /// H2O.
    Water,
    /// H2S.
    HydrogenSulfide,
    /// He.
    Helium,
    /// Ar.
    Argon,
}

impl Component {
    /// Every component, in GERG-2008's order.
    pub const ALL: [Component; 21] = [
        Component::Methane,
        Component::Nitrogen,
        Component::CarbonDioxide,
        Component::Ethane,
        Component::Propane,
        Component::Isobutane,
        Component::NButane,
        Component::Isopentane,
        Component::NPentane,
        Component::NHexane,
        Component::NHeptane,
        Component::NOctane,
        Component::NNonane,
        Component::NDecane,
        Component::Hydrogen,
        Component::Oxygen,
        Component::CarbonMonoxide,
        Component::Water,
        Component::HydrogenSulfide,
        Component::Helium,
        Component::Argon,
    ];

    /// Index in GERG-2008's tables (1…21).
    pub fn gerg_index(self) -> usize {
        self as usize + 1
    }

    /// Stable snake_case name (as on the command line and in JSON).
    pub fn name(self) -> &'static str {
        self.names().0
    }

    /// (name, formula).
    fn names(self) -> (&'static str, &'static str) {
        match self {
            Component::Methane => ("methane", "CH4"),
            Component::Nitrogen => ("nitrogen", "N2"),
            Component::CarbonDioxide => ("carbon_dioxide", "CO2"),
            Component::Ethane => ("ethane", "C2H6"),
            Component::Propane => ("propane", "C3H8"),
            Component::Isobutane => ("isobutane", "i-C4H10"),
            Component::NButane => ("n_butane", "n-C4H10"),
            Component::Isopentane => ("isopentane", "i-C5H12"),
            Component::NPentane => ("n_pentane", "n-C5H12"),
            Component::NHexane => ("n_hexane", "n-C6H14"),
            Component::NHeptane => ("n_heptane", "n-C7H16"),
            Component::NOctane => ("n_octane", "n-C8H18"),
            Component::NNonane => ("n_nonane", "n-C9H20"),
            Component::NDecane => ("n_decane", "n-C10H22"),
            Component::Hydrogen => ("hydrogen", "H2"),
            Component::Oxygen => ("oxygen", "O2"),
            Component::CarbonMonoxide => ("carbon_monoxide", "CO"),
            Component::Water => ("water", "H2O"),
            Component::HydrogenSulfide => ("hydrogen_sulfide", "H2S"),
            Component::Helium => ("helium", "He"),
            Component::Argon => ("argon", "Ar"),
        }
    }

    /// The pure gas of the gas list with the same substance, if any.
    pub fn pure_gas(self) -> Option<Gas> {
        Some(match self {
            Component::Methane => Gas::Methane,
            Component::Nitrogen => Gas::Nitrogen,
            Component::CarbonDioxide => Gas::CarbonDioxide,
            Component::Ethane => Gas::Ethane,
            Component::Propane => Gas::Propane,
            Component::Hydrogen => Gas::Hydrogen,
            Component::Oxygen => Gas::Oxygen,
            Component::Helium => Gas::Helium,
            Component::Argon => Gas::Argon,
            _ => return None,
        })
    }

    /// Looks a component up by name or formula (case ignored; `-`, `_` and
    /// spaces interchangeable).
    pub fn from_name(name: &str) -> Option<Component> {
        let norm = |s: &str| -> String {
            s.trim()
                .chars()
                .map(|c| match c {
                    '-' | ' ' => '_',
                    c => c.to_ascii_lowercase(),
                })
                .collect()
        };
        let wanted = norm(name);
        let alias = match wanted.as_str() {
            "butane" => Some(Component::NButane),
            "pentane" => Some(Component::NPentane),
            "hexane" => Some(Component::NHexane),
            "heptane" => Some(Component::NHeptane),
            "octane" => Some(Component::NOctane),
            "nonane" => Some(Component::NNonane),
            "decane" => Some(Component::NDecane),
            "co2" => Some(Component::CarbonDioxide),
            _ => None,
        };
        alias.or_else(|| {
            Component::ALL.iter().copied().find(|c| {
                let (n, f) = c.names();
                wanted == n || wanted == norm(f)
            })
        })
    }

    /// Molar mass in GERG-2008, kg/mol.
    pub fn molar_mass_kg_mol(self) -> f64 {
        crate::gerg::component_molar_mass_kg_mol(self)
    }
}

impl fmt::Display for Component {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// Dry air as a mixture (Lemmon et al. 2000): N2, O2, Ar mole fractions.
pub const AIR: [(Component, f64); 3] = [
    (Component::Nitrogen, 0.7812),
    (Component::Oxygen, 0.2096),
    (Component::Argon, 0.0092),
];

/// A mixture's composition: components in GERG-2008 order with positive mole
/// fractions summing to one.
#[derive(Clone, Debug, PartialEq)]
pub struct Composition {
    parts: Vec<(Component, f64)>,
}

impl Composition {
    /// A composition from (component, fraction) pairs, checked and normalised
    /// by the rules of the module documentation.
    pub fn new(pairs: &[(Component, f64)]) -> Result<Composition, Error> {
        let mut parts: Vec<(Component, f64)> = Vec::new();
        for &(c, f) in pairs {
            if !f.is_finite() {
                return Err(Error::Invalid(format!(
                    "{c}: the mole fraction must be a number"
                )));
            }
            if f < 0.0 {
                return Err(Error::Invalid(format!(
                    "{c}: negative mole fraction {f} (fractions are 0 … 1, or 0 … 100 %)"
                )));
            }
            match parts.iter_mut().find(|(p, _)| *p == c) {
                Some(p) => p.1 += f,
                None => parts.push((c, f)),
            }
        }
        let sum: f64 = parts.iter().map(|p| p.1).sum();
        if (sum - 1.0).abs() > SUM_TOLERANCE {
            return Err(Error::Invalid(format!(
                "the mole fractions sum to {} ({}%), not 1 (100%) within {SUM_TOLERANCE}",
                fmt_g(sum),
                fmt_g(sum * 100.0)
            )));
        }
        parts.retain(|p| p.1 > 0.0);
        if parts.is_empty() {
            return Err(Error::Invalid("a composition needs a component".into()));
        }
        for p in &mut parts {
            p.1 /= sum;
        }
        parts.sort_by_key(|p| p.0);
        Ok(Composition { parts })
    }

    /// Reads `name=fraction,…` (see the module documentation).
    pub fn parse(text: &str) -> Result<Composition, Error> {
        let mut items = Vec::new();
        for item in text.split(',').map(str::trim).filter(|s| !s.is_empty()) {
            let (name, value) = item.split_once('=').ok_or_else(|| {
                Error::Invalid(format!(
                    "'{item}': a composition item is name=fraction (e.g. argon=82%)"
                ))
            })?;
            items.push((name.trim().to_string(), value.trim().to_string()));
        }
        Composition::from_items(&items)
    }

    /// A composition from (name, fraction text) items, e.g. the keys and
    /// values of a composition file.
    pub fn from_items(items: &[(String, String)]) -> Result<Composition, Error> {
        let mut pairs = Vec::new();
        let mut named: Vec<Component> = Vec::new();
        let mut air = false;
        let twice = |name: &str| Error::Invalid(format!("{name}: named twice in the composition"));
        for (name, value) in items {
            let f = parse_fraction(name, value)?;
            if name.trim().eq_ignore_ascii_case("air") {
                if air {
                    return Err(twice(name));
                }
                air = true;
                pairs.extend(AIR.iter().map(|&(c, a)| (c, a * f)));
                continue;
            }
            let c = Component::from_name(name).ok_or_else(|| unknown(name))?;
            if named.contains(&c) {
                return Err(twice(name));
            }
            named.push(c);
            pairs.push((c, f));
        }
        Composition::new(&pairs)
    }

    /// The components and their mole fractions, in GERG-2008 order.
    pub fn parts(&self) -> &[(Component, f64)] {
        &self.parts
    }

    /// The same components with other fractions (same order; normalised to
    /// sum one).
    pub fn with_fractions(&self, x: &[f64]) -> Composition {
        let sum: f64 = x.iter().sum();
        Composition {
            parts: self
                .parts
                .iter()
                .zip(x)
                .map(|(&(c, _), &f)| (c, f / sum))
                .collect(),
        }
    }

    /// Molar mass Σ xᵢMᵢ (GERG-2008 molar masses), kg/mol.
    pub fn molar_mass_kg_mol(&self) -> f64 {
        self.parts
            .iter()
            .map(|&(c, f)| f * c.molar_mass_kg_mol())
            .sum()
    }

    /// CRC-32C of the canonical form: per component its GERG index (one byte)
    /// and its fraction in units of 1e-9 (u32, little-endian), in GERG order.
    pub fn fingerprint(&self) -> u32 {
        let mut bytes = Vec::with_capacity(5 * self.parts.len());
        for &(c, f) in &self.parts {
            bytes.push(c.gerg_index() as u8);
            bytes.extend_from_slice(&((f * 1e9).round() as u32).to_le_bytes());
        }
        isochor_core::checksum::crc32c(&bytes)
    }

    /// The canonical form the fingerprint is taken of, as a configuration
    /// holds it ([`isochor_core::Composition`]; the same fingerprint).
    pub fn to_core(&self) -> isochor_core::Composition {
        let mut c = isochor_core::Composition::default();
        for &(comp, f) in &self.parts {
            // At most 21 parts: one per component.
            let _ = c
                .parts
                .push((comp.gerg_index() as u8, (f * 1e9).round() as u32));
        }
        c
    }

    /// A composition read back from a configuration: the fractions as
    /// stored (not normalised again, so the fingerprint is the stored one).
    pub fn from_core(c: &isochor_core::Composition) -> Result<Composition, Error> {
        c.validate()
            .map_err(|_| Error::Invalid("the stored composition is not valid".into()))?;
        let parts = c
            .parts
            .iter()
            .map(|&(i, f)| {
                Component::ALL
                    .get(usize::from(i).wrapping_sub(1))
                    .map(|&comp| (comp, f64::from(f) / 1e9))
                    .ok_or_else(|| Error::Invalid(format!("unknown GERG-2008 component {i}")))
            })
            .collect::<Result<Vec<_>, _>>()?;
        Ok(Composition { parts })
    }

    /// The mixture as the core knows it (fingerprint and molar mass).
    pub fn mixture(&self) -> Mixture {
        Mixture {
            fingerprint: self.fingerprint(),
            molar_mass_kg_mol: fx::MolarMass::saturating_from_num(self.molar_mass_kg_mol()),
        }
    }

    /// Name → mole fraction, for JSON.
    pub fn to_map(&self) -> Vec<(&'static str, f64)> {
        self.parts.iter().map(|&(c, f)| (c.name(), f)).collect()
    }
}

impl fmt::Display for Composition {
    /// `argon=82%,carbon_dioxide=18%` (shortest percentages that read back).
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for (i, &(c, x)) in self.parts.iter().enumerate() {
            if i > 0 {
                f.write_str(",")?;
            }
            write!(f, "{c}={}%", fmt_g(x * 100.0))?;
        }
        Ok(())
    }
}

/// A number in short form (up to 10 significant digits, no trailing zeros).
fn fmt_g(v: f64) -> String {
    let s = format!("{v:.10}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    let r: f64 = s.parse().unwrap_or(v);
    if (r - v).abs() <= 1e-9 * v.abs().max(1e-12) {
        s.to_string()
    } else {
        format!("{v}")
    }
}

fn parse_fraction(name: &str, value: &str) -> Result<f64, Error> {
    let v = value.trim();
    let (num, scale) = match v.strip_suffix('%') {
        Some(n) => (n.trim(), 0.01),
        None => (v, 1.0),
    };
    let f: f64 = num.parse().map_err(|_| {
        Error::Invalid(format!(
            "{name}: '{value}' is not a mole fraction (a number, or a percentage like 18%)"
        ))
    })?;
    if !f.is_finite() {
        return Err(Error::Invalid(format!(
            "{name}: the mole fraction must be a number"
        )));
    }
    if f < 0.0 {
        return Err(Error::Invalid(format!(
            "{name}: negative mole fraction {value}"
        )));
    }
    Ok(f * scale)
}

fn unknown(name: &str) -> Error {
    let lower = name.trim().to_ascii_lowercase();
    if ["neon", "ne", "krypton", "kr", "xenon", "xe"].contains(&lower.as_str()) {
        return Error::Invalid(format!(
            "{name} is not a GERG-2008 component: it can be gauged pure only (--gas {lower})"
        ));
    }
    let names: Vec<&str> = Component::ALL.iter().map(|c| c.name()).collect();
    Error::Invalid(format!(
        "unknown component '{name}'; known: {}, air",
        names.join(", ")
    ))
}

/// What `--gas` names: a pure gas with its own reference equation, or a
/// mixture.
#[derive(Clone, Debug, PartialEq)]
pub enum GasSpec {
    /// A gas of the gas list (its own reference equation of state).
    Pure(Gas),
    /// A mixture (GERG-2008).
    Mixture(Composition),
}

impl GasSpec {
    /// Reads a gas name (`nitrogen`, `CO2`) or a composition
    /// (`argon=82%,carbon_dioxide=18%`). A composition of one component of
    /// the gas list is that pure gas.
    pub fn parse(text: &str) -> Result<GasSpec, Error> {
        if !text.contains('=') {
            return Gas::from_name(text).map(GasSpec::Pure).map_err(|_| {
                let names: Vec<&str> = Gas::ALL.iter().map(|g| g.name()).collect();
                Error::Invalid(format!(
                    "unknown gas '{}'; known: {}, or a composition such as argon=82%,carbon_dioxide=18%",
                    text.trim(),
                    names.join(", ")
                ))
            });
        }
        Ok(GasSpec::from_composition(Composition::parse(text)?))
    }

    /// A composition, or the pure gas when it is one component of the gas
    /// list.
    pub fn from_composition(c: Composition) -> GasSpec {
        if let [(comp, _)] = c.parts()
            && let Some(g) = comp.pure_gas()
        {
            return GasSpec::Pure(g);
        }
        GasSpec::Mixture(c)
    }

    /// The core's gas value.
    pub fn gas(&self) -> Gas {
        match self {
            GasSpec::Pure(g) => *g,
            GasSpec::Mixture(c) => Gas::Mixture(c.mixture()),
        }
    }

    /// The composition a configuration carries (`None` for a pure gas).
    pub fn core_composition(&self) -> Option<isochor_core::Composition> {
        match self {
            GasSpec::Pure(_) => None,
            GasSpec::Mixture(c) => Some(c.to_core()),
        }
    }

    /// Name → mole fraction (a pure gas: itself, 1).
    pub fn composition_map(&self) -> Vec<(&'static str, f64)> {
        match self {
            GasSpec::Pure(g) => vec![(g.name(), 1.0)],
            GasSpec::Mixture(c) => c.to_map(),
        }
    }
}

impl fmt::Display for GasSpec {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            GasSpec::Pure(g) => write!(f, "{g}"),
            GasSpec::Mixture(c) => write!(f, "{c}"),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_configuration_form_keeps_the_fingerprint() {
        for c in Component::ALL {
            assert_eq!(Component::ALL[c.gerg_index() - 1], c);
        }
        for text in [
            "argon=82%,carbon_dioxide=18%",
            "oxygen=21%,helium=79%",
            "methane=0.3333333,ethane=0.3333333,propane=0.3333334",
            "methane=90%,ethane=5%,propane=2%,nitrogen=2%,carbon_dioxide=1%",
        ] {
            let c = Composition::parse(text).unwrap();
            let core = c.to_core();
            core.validate().unwrap();
            // The core computes the fingerprint the host does.
            assert_eq!(core.fingerprint(), c.fingerprint(), "{text}");
            assert!(core.is_of(&c.mixture()));
            let back = Composition::from_core(&core).unwrap();
            assert_eq!(back.fingerprint(), c.fingerprint(), "{text}");
            assert_eq!(back.to_core(), core);
            assert_eq!(back.to_string(), c.to_string());
        }
        // A damaged form is refused.
        let mut core = Composition::parse("argon=82%,carbon_dioxide=18%")
            .unwrap()
            .to_core();
        core.parts[0].1 += 10_000;
        assert!(Composition::from_core(&core).is_err());
        core.parts[0] = (22, 180_000_000);
        assert!(Composition::from_core(&core).is_err());
    }

    #[test]
    fn parse_rules() {
        let c = Composition::parse("argon=82%, carbon_dioxide=18%").unwrap();
        let want = [(Component::CarbonDioxide, 0.18), (Component::Argon, 0.82)];
        for (got, want) in c.parts().iter().zip(want) {
            assert_eq!(got.0, want.0);
            assert!((got.1 - want.1).abs() < 1e-15);
        }
        assert_eq!(c.to_string(), "carbon_dioxide=18%,argon=82%");
        let same = Composition::parse("Ar=0.82,CO2=0.18").unwrap();
        assert_eq!(same.fingerprint(), c.fingerprint());
        // Sum within 1e-6: accepted and normalised.
        let c = Composition::parse("argon=0.8200005,carbon_dioxide=0.18").unwrap();
        let s: f64 = c.parts().iter().map(|p| p.1).sum();
        assert!((s - 1.0).abs() < 1e-15);
        for bad in [
            "argon=82%,carbon_dioxide=17%",
            "argon=0.8200011,carbon_dioxide=0.18",
            "argon=102%,carbon_dioxide=-2%",
            "unobtainium=100%",
            "neon=50%,helium=50%",
            "argon=50%,argon=50%",
            "argon=half",
            "argon",
        ] {
            let e = Composition::parse(bad).unwrap_err().to_string();
            assert!(!e.is_empty(), "{bad}");
        }
        assert!(
            Composition::parse("neon=50%,helium=50%")
                .unwrap_err()
                .to_string()
                .contains("GERG-2008")
        );
        assert!(
            Composition::parse("argon=102%,carbon_dioxide=-2%")
                .unwrap_err()
                .to_string()
                .contains("negative")
        );
        assert!(
            Composition::parse("argon=82%,carbon_dioxide=17%")
                .unwrap_err()
                .to_string()
                .contains("sum to 0.99")
        );
    }

    #[test]
    fn air_expands_and_pure_components_are_pure_gases() {
        let c = Composition::parse("air=68%,oxygen=32%").unwrap();
        let o2 = c
            .parts()
            .iter()
            .find(|p| p.0 == Component::Oxygen)
            .unwrap()
            .1;
        assert!((o2 - (0.32 + 0.68 * 0.2096)).abs() < 1e-12);
        assert_eq!(
            GasSpec::parse("argon=100%").unwrap(),
            GasSpec::Pure(Gas::Argon)
        );
        assert_eq!(
            GasSpec::parse("CO2").unwrap(),
            GasSpec::Pure(Gas::CarbonDioxide)
        );
        assert!(matches!(
            GasSpec::parse("n_butane=100%").unwrap(),
            GasSpec::Mixture(_)
        ));
        let m = GasSpec::parse("helium=79%,oxygen=21%").unwrap();
        assert!(matches!(m.gas(), Gas::Mixture(_)));
        for c in Component::ALL {
            assert_eq!(Component::from_name(c.name()), Some(c));
        }
    }
}
