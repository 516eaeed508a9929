//! Quantities with units, as typed on the command line.
//!
//! Every quantity must carry its unit: a bare `200` could be bar or psi, and a
//! gauge that guesses wrong by a factor of 14.5 is dangerous. Unit symbols are
//! case-sensitive where case carries meaning (`MPa` is not `mPa`).
//!
//! | quantity | accepted units |
//! |---|---|
//! | pressure | `Pa`, `kPa`, `MPa`, `bar`, `mbar`, `psi` |
//! | temperature | `K`, `C` (also `°C`, `degC`), `F` (also `°F`, `degF`) |
//! | volume | `L` (also `l`), `mL`, `m3` (also `m³`) |

use crate::Error;
use isochor_core::constants::{BAR_PA, PSI_PA, ZERO_CELSIUS_K, fahrenheit_to_kelvin};

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

/// Parses a pressure to Pa (sign kept: gauge pressures may be negative).
pub fn pressure_pa(input: &str, what: &'static str) -> Result<f64, Error> {
    let (v, unit) = split(input, what)?;
    let factor = match unit.as_str() {
        "Pa" => 1.0,
        "kPa" => 1e3,
        "MPa" => 1e6,
        "bar" => BAR_PA,
        "mbar" => BAR_PA / 1000.0,
        "psi" => PSI_PA,
        _ => {
            return Err(Error::Quantity {
                what,
                input: input.to_string(),
                reason: format!(
                    "unknown pressure unit '{unit}' (use Pa, kPa, MPa, bar, mbar or psi)"
                ),
            });
        }
    };
    Ok(v * factor)
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

/// Formats a pressure in bar with a sensible number of decimals.
pub fn fmt_bar(pa: f64) -> String {
    format!("{:.3} bar", pa / BAR_PA)
}

/// Formats a temperature in °C.
pub fn fmt_celsius(k: f64) -> String {
    format!("{:.2} °C", k - ZERO_CELSIUS_K)
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
    fn temperatures() {
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
        assert_eq!(volume_m3("50L", "v").unwrap(), 0.05);
        assert_eq!(volume_m3("2m3", "v").unwrap(), 2.0);
        assert_eq!(volume_m3("250mL", "v").unwrap(), 250e-6);
        assert!(volume_m3("0L", "v").is_err());
        assert!(volume_m3("-1L", "v").is_err());
        assert!(volume_m3("5gal", "v").is_err());
    }
}
