//! Gases known by name.
//!
//! Molar masses are the values adopted by each gas's reference equation of
//! state (the publication is named in [`GasInfo::source`]); they are the
//! values CoolProp 8.0.0 carries for the same equations, so the ideal, device
//! and reference paths all use one molar mass per gas. They agree with the
//! IUPAC/CIAAW 2021 standard atomic weights to better than 1e-4 relative (see
//! the test below).
//!
//! A mixture ([`Gas::Mixture`]) is known to the core only by a fingerprint of
//! its composition and its molar mass ([`Mixture`]): its equation of state
//! (GERG-2008) lives on the host, which builds a device table for the
//! composition; the table names the same mixture, so an estimator refuses a
//! table of another composition.

use crate::Error;
use crate::error::TankSetting;
use crate::fx::{self, Coef};

/// A gas this crate knows by name.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Gas {
    /// Nitrogen, N2.
    Nitrogen,
    /// Oxygen, O2.
    Oxygen,
    /// Argon, Ar.
    Argon,
    /// Helium (helium-4), He.
    Helium,
    /// Normal hydrogen, H2.
    Hydrogen,
    /// Methane, CH4.
    Methane,
    /// Dry air as a pseudo-pure fluid.
    Air,
    /// Carbon dioxide, CO2.
    CarbonDioxide,
    /// Neon, Ne.
    Neon,
    /// Krypton, Kr.
    Krypton,
    /// Xenon, Xe.
    Xenon,
    /// Ethane, C2H6.
    Ethane,
    /// Propane, C3H8.
    Propane,
    /// A mixture, identified by its composition (see [`Mixture`]).
    Mixture(Mixture),
}

/// A mixture as the core knows it: the fingerprint of its composition and
/// its molar mass. Two values are the same mixture when both agree.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Mixture {
    /// CRC-32C of the composition's canonical form ([`Composition::fingerprint`];
    /// hosts: `isochor_eos::composition::Composition::fingerprint`).
    pub fingerprint: u32,
    /// Molar mass Σ xᵢMᵢ, kg/mol.
    pub molar_mass_kg_mol: fx::MolarMass,
}

/// Most components of a [`Composition`] (GERG-2008 has 21).
pub const MAX_COMPONENTS: usize = 21;

/// One part in a billion: the unit of a [`Composition`]'s mole fractions.
pub const FRACTION_ONE: u32 = 1_000_000_000;

/// A mixture's composition as a host writes it into a configuration (the
/// canonical form [`Mixture::fingerprint`] is taken of): per component its
/// GERG-2008 number (1…21, the order of Kunz & Wagner's component table)
/// and its mole fraction in units of 1e-9, in increasing component order.
/// Hosts name the components (`isochor_eos::composition`); a device never
/// reads it.
#[derive(Clone, Debug, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct Composition {
    /// (component number, mole fraction × 1e9), component numbers strictly
    /// increasing.
    pub parts: heapless::Vec<(u8, u32), MAX_COMPONENTS>,
}

impl Composition {
    /// CRC-32C of the canonical form: per part its component number (one
    /// byte) and fraction (u32, little-endian).
    pub fn fingerprint(&self) -> u32 {
        let mut c = crate::checksum::Crc32c::new();
        for &(i, f) in &self.parts {
            c.update(&[i]);
            c.update(&f.to_le_bytes());
        }
        c.finish()
    }

    /// Checks the form: at least one part, component numbers 1…21 strictly
    /// increasing, positive fractions summing to one within 1e-6 (the rule
    /// of `--gas`).
    pub fn validate(&self) -> Result<(), Error> {
        let bad = Error::OutOfRange(TankSetting::Composition.into());
        let mut last = 0u8;
        let mut sum = 0u64;
        for &(i, f) in &self.parts {
            if i <= last || usize::from(i) > MAX_COMPONENTS || f == 0 {
                return Err(bad);
            }
            last = i;
            sum += u64::from(f);
        }
        if self.parts.is_empty() || sum.abs_diff(u64::from(FRACTION_ONE)) > 1_000 {
            return Err(bad);
        }
        Ok(())
    }

    /// True when this is the composition `m` was made from (same
    /// fingerprint).
    pub fn is_of(&self, m: &Mixture) -> bool {
        self.fingerprint() == m.fingerprint
    }
}

/// 1/R in mol·K/J (CODATA 2018), for a mixture's M/R.
const INV_R: Coef = Coef::from_f64(1.0 / crate::constants::MOLAR_GAS_CONSTANT_J_MOL_K);

/// What the core reports of a mixture through [`Gas::info`]: its own molar
/// mass is [`Gas::molar_mass_kg_mol`]; no critical point (NaN).
const MIXTURE: GasInfo = GasInfo {
    name: "mixture",
    formula: "",
    molar_mass_kg_mol: f64::NAN,
    critical_temperature_k: f64::NAN,
    critical_pressure_pa: f64::NAN,
    source: "GERG-2008: Kunz & Wagner, J. Chem. Eng. Data 57, 3032 (2012)",
    m_over_r: Coef::ZERO,
    inv_molar_mass: Coef::ZERO,
};

/// What the crate knows about one gas.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct GasInfo {
    /// Stable lower-case name, as used on the command line and in JSON.
    pub name: &'static str,
    /// Chemical formula.
    pub formula: &'static str,
    /// Molar mass in kg/mol.
    pub molar_mass_kg_mol: f64,
    /// Critical temperature in K (from the same equation of state).
    pub critical_temperature_k: f64,
    /// Critical pressure in Pa (from the same equation of state).
    pub critical_pressure_pa: f64,
    /// The publication of the reference equation of state whose molar mass
    /// and critical point are used here.
    pub source: &'static str,
    /// M/R in kg·K/J as a fixed-point constant (computed at compile time).
    pub(crate) m_over_r: Coef,
    /// 1/M in mol/kg as a fixed-point constant (computed at compile time).
    pub(crate) inv_molar_mass: Coef,
}

const fn info(
    name: &'static str,
    formula: &'static str,
    molar_mass_kg_mol: f64,
    critical_temperature_k: f64,
    critical_pressure_pa: f64,
    source: &'static str,
) -> GasInfo {
    GasInfo {
        name,
        formula,
        molar_mass_kg_mol,
        critical_temperature_k,
        critical_pressure_pa,
        source,
        m_over_r: Coef::from_f64(molar_mass_kg_mol / crate::constants::MOLAR_GAS_CONSTANT_J_MOL_K),
        inv_molar_mass: Coef::from_f64(1.0 / molar_mass_kg_mol),
    }
}

// Molar masses and critical points as adopted by each equation of state
// (values read from CoolProp 8.0.0, which implements those publications).
const NITROGEN: GasInfo = info(
    "nitrogen",
    "N2",
    0.028_013_48,
    126.192,
    3_395_800.0,
    "Span, Lemmon, Jacobsen, Wagner, Yokozeki, J. Phys. Chem. Ref. Data 29, 1361 (2000)",
);
const OXYGEN: GasInfo = info(
    "oxygen",
    "O2",
    0.031_998_8,
    154.599,
    5_046_410.0,
    "Schmidt & Wagner, Fluid Phase Equilib. 19, 175 (1985)",
);
const ARGON: GasInfo = info(
    "argon",
    "Ar",
    0.039_948,
    150.687,
    4_863_000.0,
    "Tegeler, Span, Wagner, J. Phys. Chem. Ref. Data 28, 779 (1999)",
);
const HELIUM: GasInfo = info(
    "helium",
    "He",
    0.004_002_602,
    5.1953,
    228_322.8,
    "Ortiz-Vega, Hall, Holste, Lemmon et al., J. Phys. Chem. Ref. Data (2019)",
);
const HYDROGEN: GasInfo = info(
    "hydrogen",
    "H2",
    0.002_015_88,
    33.1443,
    1_296_357.6,
    "Leachman, Jacobsen, Penoncello, Lemmon, J. Phys. Chem. Ref. Data 38, 721 (2009)",
);
const METHANE: GasInfo = info(
    "methane",
    "CH4",
    0.016_042_8,
    190.564,
    4_599_200.0,
    "Setzmann & Wagner, J. Phys. Chem. Ref. Data 20, 1061 (1991)",
);
const AIR: GasInfo = info(
    "air",
    "N2+O2+Ar",
    0.028_965_46,
    132.5306,
    3_786_000.0,
    "Lemmon, Jacobsen, Penoncello, Friend, J. Phys. Chem. Ref. Data 29, 331 (2000)",
);
const CARBON_DIOXIDE: GasInfo = info(
    "carbon_dioxide",
    "CO2",
    0.044_009_8,
    304.1282,
    7_377_298.4,
    "Span & Wagner, J. Phys. Chem. Ref. Data 25, 1509 (1996)",
);
const NEON: GasInfo = info(
    "neon",
    "Ne",
    0.020_179,
    44.4,
    2_661_630.7,
    "Thol, Fenkl, Lemmon, J. Phys. Chem. Ref. Data (2019, neon)",
);
const KRYPTON: GasInfo = info(
    "krypton",
    "Kr",
    0.083_798,
    209.4796,
    5_525_432.5,
    "Lemmon & Span, J. Chem. Eng. Data 51, 785 (2006)",
);
const XENON: GasInfo = info(
    "xenon",
    "Xe",
    0.131_293,
    289.7326,
    5_841_913.6,
    "Lemmon & Span, J. Chem. Eng. Data 51, 785 (2006)",
);
const ETHANE: GasInfo = info(
    "ethane",
    "C2H6",
    0.030_069_04,
    305.322,
    4_872_200.0,
    "Buecker & Wagner, J. Phys. Chem. Ref. Data 35, 205 (2006)",
);
const PROPANE: GasInfo = info(
    "propane",
    "C3H8",
    0.044_095_62,
    369.89,
    4_251_165.3,
    "Lemmon, McLinden, Wagner, J. Chem. Eng. Data 54, 3141 (2009)",
);

impl Gas {
    /// Every gas, in a stable order.
    pub const ALL: [Gas; 13] = [
        Gas::Nitrogen,
        Gas::Oxygen,
        Gas::Argon,
        Gas::Helium,
        Gas::Hydrogen,
        Gas::Methane,
        Gas::Air,
        Gas::CarbonDioxide,
        Gas::Neon,
        Gas::Krypton,
        Gas::Xenon,
        Gas::Ethane,
        Gas::Propane,
    ];

    /// What the crate knows about this gas (a mixture's molar mass is not
    /// here: see [`Gas::molar_mass_kg_mol`]).
    pub const fn info(self) -> &'static GasInfo {
        match self {
            Gas::Mixture(_) => &MIXTURE,
            Gas::Nitrogen => &NITROGEN,
            Gas::Oxygen => &OXYGEN,
            Gas::Argon => &ARGON,
            Gas::Helium => &HELIUM,
            Gas::Hydrogen => &HYDROGEN,
            Gas::Methane => &METHANE,
            Gas::Air => &AIR,
            Gas::CarbonDioxide => &CARBON_DIOXIDE,
            Gas::Neon => &NEON,
            Gas::Krypton => &KRYPTON,
            Gas::Xenon => &XENON,
            Gas::Ethane => &ETHANE,
            Gas::Propane => &PROPANE,
        }
    }

    /// Stable lower-case name (`"nitrogen"`, `"carbon_dioxide"`, ...).
    pub const fn name(self) -> &'static str {
        self.info().name
    }

    /// Molar mass in kg/mol.
    pub fn molar_mass_kg_mol(self) -> f64 {
        match self {
            Gas::Mixture(m) => fx::to_f64(m.molar_mass_kg_mol),
            g => g.info().molar_mass_kg_mol,
        }
    }

    /// M/R in kg·K/J as a fixed-point constant: compile-time for a pure gas,
    /// computed (preparation time) from a mixture's molar mass.
    pub(crate) fn m_over_r(self) -> Coef {
        match self {
            Gas::Mixture(m) => mixture_coefs(m).0,
            g => g.info().m_over_r,
        }
    }

    /// 1/M in mol/kg as a fixed-point constant (like [`Gas::m_over_r`]).
    pub(crate) fn inv_molar_mass(self) -> Coef {
        match self {
            Gas::Mixture(m) => mixture_coefs(m).1,
            g => g.info().inv_molar_mass,
        }
    }

    /// The mixture, if this is one.
    pub const fn mixture(self) -> Option<Mixture> {
        match self {
            Gas::Mixture(m) => Some(m),
            _ => None,
        }
    }

    /// True when the gas can be liquid or two-phase somewhere in the
    /// operating envelope (its critical temperature is above −60 °C; a
    /// mixture: always, as far as the core knows).
    pub fn liquefiable_in_envelope(self) -> bool {
        match self {
            Gas::Mixture(_) => true,
            g => g.info().critical_temperature_k > crate::envelope::TEMPERATURE_MIN_K,
        }
    }

    /// The flag a gas model raises for states outside the single-phase gas
    /// region: [`Status::TWO_PHASE`](crate::Status::TWO_PHASE) for a pure
    /// gas, [`Status::CONDENSATION_RISK`](crate::Status::CONDENSATION_RISK)
    /// for a mixture.
    pub const fn phase_flag(self) -> crate::Status {
        match self {
            Gas::Mixture(_) => crate::Status::CONDENSATION_RISK,
            _ => crate::Status::TWO_PHASE,
        }
    }

    /// Looks a gas up by name or formula, ignoring case; `-`, `_` and spaces
    /// are interchangeable (`"carbon-dioxide"`, `"CO2"`, `"n2"`).
    pub fn from_name(name: &str) -> Result<Gas, Error> {
        let wanted = name.trim();
        Gas::ALL
            .iter()
            .copied()
            .find(|g| {
                let i = g.info();
                same_name(i.name, wanted) || i.formula.eq_ignore_ascii_case(wanted)
            })
            .ok_or(Error::UnknownGas)
    }
}

/// A mixture's M/R and 1/M as prepared constants (preparation time; kept
/// out of line so that pure-gas builds pay one call for it).
#[cold]
#[inline(never)]
fn mixture_coefs(m: Mixture) -> (Coef, Coef) {
    // U0F32 bits: 32 fraction bits.
    let mm = Coef::from_raw(m.molar_mass_kg_mol.to_bits() as u64, 32);
    (mm.mul(INV_R), mm.recip().unwrap_or(Coef::ZERO))
}

fn same_name(ours: &str, theirs: &str) -> bool {
    let norm = |c: char| match c {
        '-' | ' ' => '_',
        c => c.to_ascii_lowercase(),
    };
    ours.len() == theirs.len() && ours.chars().zip(theirs.chars()).all(|(a, b)| a == norm(b))
}

impl core::fmt::Display for Gas {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(self.name())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_round_trip() {
        for g in Gas::ALL {
            assert_eq!(Gas::from_name(g.name()), Ok(g));
            assert_eq!(Gas::from_name(&g.name().to_uppercase()), Ok(g));
        }
        assert_eq!(Gas::from_name("carbon-dioxide"), Ok(Gas::CarbonDioxide));
        assert_eq!(Gas::from_name("co2"), Ok(Gas::CarbonDioxide));
        assert_eq!(Gas::from_name("n2"), Ok(Gas::Nitrogen));
        assert_eq!(Gas::from_name("unobtainium"), Err(Error::UnknownGas));
    }

    #[test]
    fn molar_masses_match_standard_atomic_weights() {
        // IUPAC/CIAAW 2021 conventional standard atomic weights:
        // H 1.008, He 4.002602, C 12.011, N 14.007, O 15.999, Ne 20.1797,
        // Ar 39.95 (abridged; 39.948 for the atmospheric value), Kr 83.798,
        // Xe 131.293. Air: the EOS's own composition, checked separately.
        let expect = [
            (Gas::Nitrogen, 2.0 * 14.007),
            (Gas::Oxygen, 2.0 * 15.999),
            (Gas::Argon, 39.948),
            (Gas::Helium, 4.002_602),
            (Gas::Hydrogen, 2.0 * 1.008),
            (Gas::Methane, 12.011 + 4.0 * 1.008),
            (Gas::CarbonDioxide, 12.011 + 2.0 * 15.999),
            (Gas::Neon, 20.1797),
            (Gas::Krypton, 83.798),
            (Gas::Xenon, 131.293),
            (Gas::Ethane, 2.0 * 12.011 + 6.0 * 1.008),
            (Gas::Propane, 3.0 * 12.011 + 8.0 * 1.008),
        ];
        for (g, grams) in expect {
            let rel = (g.molar_mass_kg_mol() * 1000.0 - grams).abs() / grams;
            assert!(rel < 2e-4, "{g}: {rel}");
        }
        // Dry air, Lemmon et al. 2000 composition N2 0.7812, Ar 0.0092, O2 0.2096
        // gives 28.9586 g/mol; CoolProp 8.0.0 carries 28.96546 g/mol for the same
        // equation, which is the value used here (2.4e-4 apart).
        let air = 0.7812 * 28.013_48 + 0.0092 * 39.948 + 0.2096 * 31.9988;
        assert!((Gas::Air.molar_mass_kg_mol() * 1000.0 - air).abs() / air < 3e-4);
    }

    #[test]
    fn mixture_constants_are_computed_from_its_molar_mass() {
        // Argon 82 %, carbon dioxide 18 % (GERG-2008 molar masses).
        let m = 0.82 * 0.039_948 + 0.18 * 0.044_009_5;
        let g = Gas::Mixture(Mixture {
            fingerprint: 7,
            molar_mass_kg_mol: fx::MolarMass::from_num(m),
        });
        assert!((g.molar_mass_kg_mol() / m - 1.0).abs() < 1e-8);
        let k = g.molar_mass_kg_mol() / crate::constants::MOLAR_GAS_CONSTANT_J_MOL_K;
        assert!((g.m_over_r().to_f64() / k - 1.0).abs() < 1e-9);
        assert!((g.inv_molar_mass().to_f64() * g.molar_mass_kg_mol() - 1.0).abs() < 1e-9);
        assert_eq!(g.phase_flag(), crate::Status::CONDENSATION_RISK);
        assert_eq!(Gas::Nitrogen.phase_flag(), crate::Status::TWO_PHASE);
        // Another fingerprint is another mixture.
        let other = Gas::Mixture(Mixture {
            fingerprint: 8,
            molar_mass_kg_mol: fx::MolarMass::from_num(m),
        });
        assert_ne!(g, other);
    }

    #[test]
    fn pure_gases_encode_as_before_mixtures_and_a_mixture_round_trips() {
        // Postcard (the prepared configuration and its source): a pure gas is
        // one byte, its variant; a mixture is its variant (13), then its
        // fingerprint and molar mass bits as varints.
        let mut buf = [0u8; 16];
        assert_eq!(
            postcard::to_slice(&Gas::Propane, &mut buf).unwrap(),
            &[12u8]
        );
        let g = Gas::Mixture(Mixture {
            fingerprint: u32::MAX,
            molar_mass_kg_mol: fx::MolarMass::MAX,
        });
        let enc = postcard::to_slice(&g, &mut buf).unwrap();
        assert_eq!(enc.len(), 11);
        assert_eq!(enc[0], 13);
        assert_eq!(postcard::from_bytes::<Gas>(enc).unwrap(), g);
    }

    #[test]
    fn fixed_constants_match_f64() {
        for g in Gas::ALL {
            let i = g.info();
            let k = i.molar_mass_kg_mol / crate::constants::MOLAR_GAS_CONSTANT_J_MOL_K;
            assert!((i.m_over_r.to_f64() / k - 1.0).abs() < 1e-9);
            assert!((i.inv_molar_mass.to_f64() * i.molar_mass_kg_mol - 1.0).abs() < 1e-9);
        }
    }
}
