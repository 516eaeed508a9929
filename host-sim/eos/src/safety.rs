//! Cautions printed with every human-readable result.
//!
//! Gas under pressure can kill. An estimate from this tool is an aid to a
//! trained person, not a safety device: it never replaces the vessel's
//! markings, a calibrated gauge, or the inspection, filling and handling rules
//! of local codes and licensed practice.

use crate::composition::{Component, GasSpec};
use isochor_core::Gas;

/// The caution every result carries.
pub const GENERAL: &str = "CAUTION: gas under pressure can kill. These figures are estimates, \
not a safety device: never fill or use a vessel beyond its rated pressure corrected for \
temperature, and follow the vessel's markings, its inspection dates and your local codes \
and licensed practice.";

/// The gas-specific caution, when there is one.
pub fn for_gas(gas: Gas) -> Option<&'static str> {
    Some(match gas {
        Gas::Oxygen => {
            "Oxygen: use only oxygen-clean, oil- and grease-free parts rated for oxygen \
             service; open valves slowly (adiabatic compression ignites)."
        }
        Gas::Hydrogen => {
            "Hydrogen: flammable over 4-75 % in air, nearly invisible flame, embrittles some \
             steels; use equipment rated for hydrogen and check for leaks."
        }
        Gas::Methane | Gas::Ethane | Gas::Propane => {
            "Flammable gas: keep ignition sources away, ventilate, and check for leaks."
        }
        Gas::Nitrogen | Gas::Argon | Gas::Helium | Gas::Neon | Gas::Krypton | Gas::Xenon => {
            "Asphyxiant: a leak displaces oxygen without warning; use only in ventilated \
             spaces, with oxygen monitoring in closed rooms."
        }
        Gas::CarbonDioxide => {
            "Carbon dioxide: toxic at a few per cent in air and heavier than air, it collects \
             in low places; ventilate, monitor, and never heat a cylinder (liquid-full \
             cylinders burst)."
        }
        Gas::Air => return None,
        _ => return None,
    })
}

/// Every caution for `gas`, as lines.
pub fn lines(gas: Gas) -> Vec<&'static str> {
    let mut v = vec![GENERAL];
    v.extend(for_gas(gas));
    v
}

/// Every caution for `gas`, as one paragraph (for JSON).
pub fn paragraph(gas: Gas) -> String {
    lines(gas).join(" ")
}

/// The caution every mixture carries.
pub const MIXTURE: &str = "Mixture: the figures hold for the composition given (check the \
cylinder's label or certificate); a mixture can separate or condense when cold, and then \
pressure no longer tells the content (condensation_risk).";

/// Every caution for a gas or a mixture, as lines: a mixture carries the
/// mixture caution and those of its components (oxygen above 23.5 % as an
/// oxidiser; flammable components; asphyxiants; carbon dioxide;
/// hydrogen sulfide above 10 ppm as toxic).
pub fn lines_for(spec: &GasSpec) -> Vec<&'static str> {
    let GasSpec::Mixture(c) = spec else {
        return lines(spec.gas());
    };
    let mut v = vec![GENERAL, MIXTURE];
    let mut add = |line: &'static str| {
        if !v.contains(&line) {
            v.push(line);
        }
    };
    for &(comp, x) in c.parts() {
        match comp {
            Component::Oxygen if x > 0.235 => add(OXIDISER),
            Component::HydrogenSulfide if x > 1e-5 => add(
                "Hydrogen sulfide: toxic at a few ppm and deadening the sense of smell; use \
                 gas detection and follow your toxic-gas rules.",
            ),
            Component::CarbonMonoxide if x > 1e-5 => {
                add("Carbon monoxide: toxic and odourless; use gas detection in closed rooms.")
            }
            _ => {
                if let Some(line) = comp.pure_gas().and_then(for_gas)
                    && comp != Component::Oxygen
                {
                    add(line);
                } else if comp.pure_gas().is_none() && comp != Component::Water {
                    // The heavier hydrocarbons.
                    add(
                        "Flammable gas: keep ignition sources away, ventilate, and check for leaks.",
                    );
                }
            }
        }
    }
    v
}

/// Oxygen-enriched mixtures.
const OXIDISER: &str = "Oxygen-enriched mixture (above 23.5 % oxygen): use only oxygen-clean, \
oil- and grease-free parts rated for oxygen service; open valves slowly.";

/// [`lines_for`] as one paragraph (for JSON).
pub fn paragraph_for(spec: &GasSpec) -> String {
    lines_for(spec).join(" ")
}
