//! Cautions printed with every human-readable result.
//!
//! Gas under pressure can kill. An estimate from this tool is an aid to a
//! trained person, not a safety device: it never replaces the vessel's
//! markings, a calibrated gauge, or the inspection, filling and handling rules
//! of local codes and licensed practice.
//!
//! Three kinds of caution: [`GENERAL`] (every result), the gas's own
//! ([`for_gas`], and [`LIQUEFIED`] for gases that can be liquid in a
//! cylinder), and [`HARDWARE`] for results that concern building or wiring a
//! gauge (sensors, firmware, the device link). The wording of these texts is
//! our own; the hazards are the usual ones of safety data sheets and trade
//! practice.

use crate::composition::{Component, GasSpec};
use isochor_core::Gas;

/// The caution every result carries.
pub const GENERAL: &str = "CAUTION: gas under pressure can kill. These figures are estimates, \
not a safety device: never fill or use a vessel beyond its rated pressure corrected for \
temperature, and follow the vessel's markings, its inspection dates and your local codes \
and licensed practice.";

/// The caution of results about building, wiring or configuring a gauge.
pub const HARDWARE: &str = "FOR HARDWARE TEAMS: the pressure port and the transducer are part \
of the vessel's pressure boundary: rate them for its pressure (and test pressure), use \
oxygen-clean parts for oxygen and hydrogen-compatible materials for hydrogen. Installations \
with flammable gases may need explosion protection (IEC 60079 series). A gauge for medical \
oxygen may be regulated as a medical device. The reference boards and firmware are certified \
for none of this.";

/// The caution of gases that can be liquid in a cylinder at ordinary
/// temperatures (below their critical temperature): pressure does not give
/// their content.
pub const LIQUEFIED: &str = "Liquefied gas: where the cylinder holds liquid, its pressure is the \
vapour pressure of the liquid and says nothing about how much is left; weigh the cylinder \
(gross weight less the tare marked on it) to know the content. Never fill beyond the \
permitted filling ratio: a cylinder full of liquid bursts when it warms.";

/// The gas-specific caution, when there is one.
pub fn for_gas(gas: Gas) -> Option<&'static str> {
    Some(match gas {
        Gas::Oxygen => {
            "Oxygen: no smoking, flames or sparks near it. Oil and grease can ignite in oxygen; \
             clothing and hair soaked with oxygen catch fire easily and burn fiercely (air them \
             out after exposure). Use only oxygen-clean parts rated for oxygen service and open \
             valves slowly (adiabatic compression ignites)."
        }
        Gas::Hydrogen => {
            "Hydrogen: flammable over 4-75 % in air, odourless, burns with a nearly invisible \
             flame; lighter than air, it rises and collects under ceilings and roofs. It also \
             asphyxiates and embrittles some steels: use equipment rated for hydrogen, \
             ventilate at high points and check for leaks with a detector."
        }
        Gas::Methane => {
            "Methane: flammable over about 5-15 % in air and odourless unless odorised; \
             lighter than air, it rises and collects under ceilings. It also asphyxiates: \
             ventilate at high points and check for leaks with a detector."
        }
        Gas::Ethane | Gas::Propane => {
            "Flammable gas heavier than air: a leak flows down and collects in low places \
             (pits, drains, cellars), where it can meet an ignition source far from the leak. \
             It also asphyxiates: keep ignition sources away, ventilate at floor level and \
             check for leaks with a detector."
        }
        Gas::Helium => {
            "Helium: an asphyxiant; never inhale it (from balloons or otherwise): breathing \
             it gives no warning and can cause unconsciousness and death. A leak displaces \
             oxygen: use only in ventilated spaces, with oxygen monitoring in closed rooms."
        }
        Gas::Nitrogen | Gas::Neon => {
            "Asphyxiant: a leak displaces oxygen without warning; use only in ventilated \
             spaces, with oxygen monitoring in closed rooms."
        }
        Gas::Argon | Gas::Krypton | Gas::Xenon => {
            "Asphyxiant heavier than air: a leak displaces oxygen without warning and \
             collects in low places; use only in ventilated spaces, with oxygen monitoring in \
             closed rooms and pits."
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

/// True for gases that can be liquid in a cylinder inside the operating
/// envelope (critical temperature above its lowest temperature): carbon
/// dioxide, ethane, propane and xenon.
pub fn can_be_liquid(gas: Gas) -> bool {
    gas.liquefiable_in_envelope()
}

/// Every caution for `gas`, as lines.
pub fn lines(gas: Gas) -> Vec<&'static str> {
    let mut v = vec![GENERAL];
    v.extend(for_gas(gas));
    if can_be_liquid(gas) {
        v.push(LIQUEFIED);
    }
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

/// Every caution for `gas` and the hardware caution, as lines (results
/// about a device: sensors, configuration, the link).
pub fn device_lines(gas: Gas) -> Vec<&'static str> {
    let mut v = lines(gas);
    v.push(HARDWARE);
    v
}

/// [`device_lines`] for a gas or a mixture ([`lines_for`] and the
/// hardware caution).
pub fn device_lines_for(spec: &GasSpec) -> Vec<&'static str> {
    let mut v = lines_for(spec);
    v.push(HARDWARE);
    v
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_gas_has_the_general_caution_and_liquefiable_ones_say_weigh() {
        for g in Gas::ALL {
            let l = lines(g);
            assert_eq!(l[0], GENERAL);
            assert_eq!(l.contains(&LIQUEFIED), can_be_liquid(g), "{g}");
            assert!(device_lines(g).contains(&HARDWARE));
        }
        // Critical temperatures (the core gas table: each reference
        // equation's critical point): carbon dioxide 31.0 °C, ethane 32.2 °C,
        // propane 96.7 °C, xenon 16.6 °C lie above the envelope's −60 °C;
        // krypton's −63.7 °C does not.
        for g in [Gas::CarbonDioxide, Gas::Ethane, Gas::Propane, Gas::Xenon] {
            assert!(can_be_liquid(g), "{g}");
        }
        for g in [Gas::Krypton, Gas::Nitrogen, Gas::Methane, Gas::Oxygen] {
            assert!(!can_be_liquid(g), "{g}");
        }
        assert!(paragraph(Gas::Oxygen).contains("burn fiercely"));
        assert!(paragraph(Gas::Helium).contains("never inhale"));
        assert!(paragraph(Gas::Propane).contains("low places"));
        assert!(paragraph(Gas::Hydrogen).contains("rises"));
    }
}
