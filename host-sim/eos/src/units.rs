//! Quantities with units, as typed on the command line.
//!
//! Every quantity must carry its unit: a bare `200` could be bar or psi, and a
//! gauge that guesses wrong by a factor of 14.5 is dangerous. Unit symbols are
//! case-sensitive where case carries meaning (`MPa` is not `mPa`).
//!
//! | quantity | accepted units |
//! |---|---|
//! | pressure | `Pa`, `kPa`, `MPa`, `bar`, `mbar`, `psi`; `bara`, `psia` (absolute), `barg`, `psig` (gauge) |
//! | temperature | `K`, `C` (also `°C`, `degC`), `F` (also `°F`, `degF`) |
//! | volume | `L` (also `l`), `mL`, `m3` (also `m³`) |

//!
//! Pressure references: `bara`/`psia` say "absolute", `barg`/`psig` say
//! "gauge" (above the surrounding atmosphere); the other units leave it to
//! the option (absolute unless the command says otherwise). Working
//! pressures marked on cylinders are gauge pressures. A gauge pressure
//! becomes absolute by adding a barometric pressure ([`absolute_pa`]); where
//! a command has none, a gauge unit is refused ([`pressure_pa`]).

use crate::Error;
use isochor_core::constants::{BAR_PA, PSI_PA, ZERO_CELSIUS_K, fahrenheit_to_kelvin};

/// What a pressure's unit says about its reference.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Reference {
    /// A plain unit (`bar`, `psi`, `Pa`, …): the option decides.
    Unstated,
    /// `bara`, `psia`: absolute.
    Absolute,
    /// `barg`, `psig`: gauge, above the surrounding atmosphere.
    Gauge,
}

/// Splits `"200bar"` into `(200.0, "bar")` using the longest prefix that reads
/// as a finite number.
pub fn split(input: &str, what: &'static str) -> Result<(f64, String), Error> {
    let s = input.trim();
    let err = |reason: &str| Error::Quantity {
        what,
        input: input.to_string(),
        reason: reason.to_string(),
    };
    let cut = (1..=s.len())
        .rev()
        .filter(|&i| s.is_char_boundary(i))
        .find(|&i| {
            let head = &s[..i];
            // Rust's float parser accepts "inf" and "nan"; a quantity never is.
            head.bytes().any(|b| b.is_ascii_digit()) && head.parse::<f64>().is_ok()
        })
        .ok_or_else(|| err("expected a number followed by a unit"))?;
    let value: f64 = s[..cut].parse().map_err(|_| err("not a number"))?;
    if !value.is_finite() {
        return Err(err("not a finite number"));
    }
    let unit = s[cut..].trim().to_string();
    if unit.is_empty() {
        return Err(err("missing unit"));
    }
    Ok((value, unit))
}

/// Parses a pressure to Pa as written (sign kept: gauge pressures may be
/// negative) and what its unit says about the reference.
pub fn pressure(input: &str, what: &'static str) -> Result<(f64, Reference), Error> {
    let (v, unit) = split(input, what)?;
    let (factor, reference) = match unit.as_str() {
        "Pa" => (1.0, Reference::Unstated),
        "kPa" => (1e3, Reference::Unstated),
        "MPa" => (1e6, Reference::Unstated),
        "bar" => (BAR_PA, Reference::Unstated),
        "mbar" => (BAR_PA / 1000.0, Reference::Unstated),
        "psi" => (PSI_PA, Reference::Unstated),
        "bara" => (BAR_PA, Reference::Absolute),
        "psia" => (PSI_PA, Reference::Absolute),
        "barg" => (BAR_PA, Reference::Gauge),
        "psig" => (PSI_PA, Reference::Gauge),
        _ => {
            return Err(Error::Quantity {
                what,
                input: input.to_string(),
                reason: format!(
                    "unknown pressure unit '{unit}' (use Pa, kPa, MPa, bar, mbar or psi; \
                     bara, psia for absolute, barg, psig for gauge pressures)"
                ),
            });
        }
    };
    Ok((v * factor, reference))
}

/// Parses a pressure to Pa where the command takes it as it is (absolute,
/// or a difference): plain and absolute units (`bara`, `psia`); a gauge unit
/// (`barg`, `psig`) is refused, as there is no barometric pressure to add.
pub fn pressure_pa(input: &str, what: &'static str) -> Result<f64, Error> {
    match pressure(input, what)? {
        (_, Reference::Gauge) => Err(Error::Quantity {
            what,
            input: input.to_string(),
            reason: "a gauge pressure (barg, psig) is not accepted here: give the absolute \
                     pressure (bar, bara, psia, ...)"
                .to_string(),
        }),
        (v, _) => Ok(v),
    }
}

/// Parses a pressure to absolute Pa: a gauge unit (`barg`, `psig`), or a
/// plain unit when `gauge_by_default` (a command's `--gauge`), adds
/// `barometric_pa`; an absolute unit (`bara`, `psia`) is taken as it is.
pub fn absolute_pa(
    input: &str,
    what: &'static str,
    gauge_by_default: bool,
    barometric_pa: f64,
) -> Result<f64, Error> {
    let (v, reference) = pressure(input, what)?;
    Ok(match reference {
        Reference::Gauge => v + barometric_pa,
        Reference::Absolute => v,
        Reference::Unstated if gauge_by_default => v + barometric_pa,
        Reference::Unstated => v,
    })
}

/// Parses a temperature to K; refuses temperatures below absolute zero.
pub fn temperature_k(input: &str, what: &'static str) -> Result<f64, Error> {
    let (v, unit) = split(input, what)?;
    let k = match unit.as_str() {
        "K" => v,
        "C" | "°C" | "degC" => v + ZERO_CELSIUS_K,
        "F" | "°F" | "degF" => fahrenheit_to_kelvin(v),
        _ => {
            return Err(Error::Quantity {
                what,
                input: input.to_string(),
                reason: format!("unknown temperature unit '{unit}' (use K, C or F)"),
            });
        }
    };
    if k <= 0.0 {
        return Err(Error::Quantity {
            what,
            input: input.to_string(),
            reason: "at or below absolute zero".to_string(),
        });
    }
    Ok(k)
}

/// Parses a volume to m³; refuses zero and negative volumes.
pub fn volume_m3(input: &str, what: &'static str) -> Result<f64, Error> {
    let (v, unit) = split(input, what)?;
    let factor = match unit.as_str() {
        "L" | "l" => 1e-3,
        "mL" | "ml" => 1e-6,
        "m3" | "m³" => 1.0,
        _ => {
            return Err(Error::Quantity {
                what,
                input: input.to_string(),
                reason: format!("unknown volume unit '{unit}' (use L, mL or m3)"),
            });
        }
    };
    if v <= 0.0 {
        return Err(Error::Quantity {
            what,
            input: input.to_string(),
            reason: "must be positive".to_string(),
        });
    }
    Ok(v * factor)
}

/// Parses a plain number (no unit), refusing NaN and infinities.
pub fn number(input: &str, what: &'static str) -> Result<f64, Error> {
    let v: f64 = input.trim().parse().map_err(|_| Error::Quantity {
        what,
        input: input.to_string(),
        reason: "not a number".to_string(),
    })?;
    if !v.is_finite() {
        return Err(Error::Quantity {
            what,
            input: input.to_string(),
            reason: "not a finite number".to_string(),
        });
    }
    Ok(v)
}

/// Formats a number with `digits` decimals, never as a negative zero
/// (`-0.0000` becomes `0.0000`).
pub fn fmt_decimal(v: f64, digits: usize) -> String {
    let s = format!("{v:.digits$}");
    match s.strip_prefix('-') {
        Some(rest) if rest.bytes().all(|b| b == b'0' || b == b'.') => rest.to_string(),
        _ => s,
    }
}

/// Formats a pressure in bar with a sensible number of decimals.
pub fn fmt_bar(pa: f64) -> String {
    format!("{} bar", fmt_decimal(pa / BAR_PA, 3))
}

/// Formats a temperature in °C.
pub fn fmt_celsius(k: f64) -> String {
    format!("{} °C", fmt_decimal(k - ZERO_CELSIUS_K, 2))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pressures() {
        assert_eq!(pressure_pa("200bar", "p").unwrap(), 200e5);
        assert_eq!(pressure_pa(" 1.5 MPa ", "p").unwrap(), 1.5e6);
        assert_eq!(pressure_pa("1e5Pa", "p").unwrap(), 1e5);
        assert_eq!(pressure_pa("-0.5bar", "p").unwrap(), -0.5e5);
        // 1 psi = 0.453 592 37 kg × 9.806 65 m/s² / (0.0254 m)², exact by
        // the definitions of the pound, standard gravity and the inch (NIST
        // SP 811); 3000 psi is 206.842 718 8 bar by that product.
        assert!((pressure_pa("3000psi", "p").unwrap() - 206.842_718_8e5).abs() < 1.0);
        assert!(
            pressure_pa("200", "p")
                .unwrap_err()
                .to_string()
                .contains("missing unit")
        );
        assert!(
            pressure_pa("200mPa", "p")
                .unwrap_err()
                .to_string()
                .contains("unknown pressure unit")
        );
        assert!(pressure_pa("bar", "p").is_err());
        assert!(pressure_pa("infbar", "p").is_err());
        assert!(pressure_pa("NaNbar", "p").is_err());
        assert!(pressure_pa("", "p").is_err());
    }

    #[test]
    fn pressure_references() {
        let atm = 101_325.0;
        assert_eq!(
            pressure("200bara", "p").unwrap(),
            (200e5, Reference::Absolute)
        );
        assert_eq!(pressure("200barg", "p").unwrap(), (200e5, Reference::Gauge));
        assert_eq!(
            pressure("200bar", "p").unwrap(),
            (200e5, Reference::Unstated)
        );
        assert_eq!(pressure_pa("200bara", "p").unwrap(), 200e5);
        let e = pressure_pa("200barg", "p").unwrap_err().to_string();
        assert!(e.contains("gauge pressure"), "{e}");
        // Gauge units add the barometric pressure; absolute units do not,
        // whatever the default; plain units follow it.
        assert_eq!(
            absolute_pa("200barg", "p", false, atm).unwrap(),
            200e5 + atm
        );
        assert_eq!(absolute_pa("200bara", "p", true, atm).unwrap(), 200e5);
        assert_eq!(absolute_pa("200bar", "p", true, atm).unwrap(), 200e5 + atm);
        assert_eq!(absolute_pa("200bar", "p", false, atm).unwrap(), 200e5);
        let psig = absolute_pa("2015psig", "p", false, atm).unwrap();
        assert!((psig - (2015.0 * PSI_PA + atm)).abs() < 1e-6);
        assert_eq!(
            absolute_pa("14.7psia", "p", true, atm).unwrap(),
            14.7 * PSI_PA
        );
        assert!(pressure("200 BARG", "p").is_err());
    }

    #[test]
    fn no_negative_zero() {
        assert_eq!(fmt_decimal(-0.00001, 4), "0.0000");
        assert_eq!(fmt_decimal(-0.0001, 4), "-0.0001");
        assert_eq!(fmt_decimal(0.0, 2), "0.00");
        assert_eq!(fmt_celsius(273.149_999), "0.00 °C");
        assert_eq!(fmt_bar(-1e-4), "0.000 bar");
    }

    #[test]
    fn temperatures() {
        // 0 °C = 273.15 K and °F = 9/5 K from 32 °F at the ice point: both
        // exact by the definitions of the scales (−40 °F is −40 °C).
        assert_eq!(temperature_k("35C", "t").unwrap(), 308.15);
        assert_eq!(temperature_k("300K", "t").unwrap(), 300.0);
        assert!((temperature_k("-40F", "t").unwrap() - 233.15).abs() < 1e-9);
        assert!((temperature_k("-40°C", "t").unwrap() - 233.15).abs() < 1e-9);
        assert!(
            temperature_k("-300C", "t")
                .unwrap_err()
                .to_string()
                .contains("absolute zero")
        );
        assert!(temperature_k("35", "t").is_err());
        assert!(temperature_k("35X", "t").is_err());
    }

    #[test]
    fn volumes() {
        // 1 L = 1e-3 m³ exactly (CGPM 1964).
        assert_eq!(volume_m3("50L", "v").unwrap(), 0.05);
        assert_eq!(volume_m3("2m3", "v").unwrap(), 2.0);
        assert_eq!(volume_m3("250mL", "v").unwrap(), 250e-6);
        assert!(volume_m3("0L", "v").is_err());
        assert!(volume_m3("-1L", "v").is_err());
        assert!(volume_m3("5gal", "v").is_err());
    }
}
