//! Host side of the sensor front-ends: quantity parsing for sensor options,
//! the multi-point least-squares calibration fit, and its CSV input.
//!
//! The fit finds the correction polynomial of
//! `Correction` (`isochor_core::sensor::calibration`):
//! with `lo`, `hi` the smallest and largest measured value,
//! `x = (measured − lo)/(hi − lo)` and `y = (reference − lo)/(hi − lo)`, it
//! minimises `Σ (P(x) − y)²` over `P(x) = c₀ + c₁x + … + c_d·x^d`
//! (`d` = 1 … 3) by Householder QR of the Vandermonde matrix (no normal
//! equations, so no squared condition number).

pub mod convert;

use crate::Error;
use isochor_core::sensor::calibration::Correction;
use isochor_eos::units;

/// Parses a pressure range `LO..HI` with one unit after `HI` (`0..300bar`)
/// or a unit on each end (`-1bar..10bar`). Returns Pa.
pub fn pressure_range(input: &str, what: &'static str) -> Result<(f64, f64), Error> {
    let err = |reason: &str| Error::Quantity {
        what,
        input: input.to_string(),
        reason: reason.to_string(),
    };
    let (a, b) = input
        .split_once("..")
        .ok_or_else(|| err("expected LOW..HIGH with a unit, e.g. 0..300bar"))?;
    let hi = units::pressure_pa(b, what)?;
    let lo = match units::pressure_pa(a, what) {
        Ok(v) => v,
        Err(_) => {
            // Borrow the unit of the high end.
            let unit: String = b
                .trim()
                .chars()
                .skip_while(|c| c.is_ascii_digit() || matches!(c, '.' | '-' | '+' | 'e' | 'E'))
                .collect();
            units::pressure_pa(&format!("{}{unit}", a.trim()), what)?
        }
    };
    if hi <= lo {
        return Err(err("the high end must be above the low end"));
    }
    Ok((lo, hi))
}

/// Parses a resistance: a plain number of ohms, or with `ohm`, `Ω`, `kohm`,
/// `kΩ`, `Mohm`, `MΩ`. Refuses non-finite and non-positive values.
pub fn ohms(input: &str, what: &'static str) -> Result<f64, Error> {
    let s = input.trim();
    let (num, factor) = [
        ("kohm", 1e3),
        ("kΩ", 1e3),
        ("Mohm", 1e6),
        ("MΩ", 1e6),
        ("ohm", 1.0),
        ("Ω", 1.0),
    ]
    .iter()
    .find_map(|(u, f)| s.strip_suffix(u).map(|n| (n, *f)))
    .unwrap_or((s, 1.0));
    let v = units::number(num, what)? * factor;
    if v <= 0.0 {
        return Err(Error::Quantity {
            what,
            input: input.to_string(),
            reason: "must be positive".to_string(),
        });
    }
    Ok(v)
}

/// What the points of a calibration file measure.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Quantity {
    /// Pressure, Pa (`measured_pa,reference_pa`).
    Pressure,
    /// Temperature, K (`measured_k,reference_k`).
    Temperature,
}

impl Quantity {
    /// SI unit symbol.
    pub fn unit(self) -> &'static str {
        match self {
            Quantity::Pressure => "Pa",
            Quantity::Temperature => "K",
        }
    }
}

fn malformed(line: Option<usize>, reason: String) -> Error {
    Error::Malformed {
        what: "calibration file".into(),
        line,
        reason,
    }
}

/// Reads calibration points from CSV text: a header `measured_pa,reference_pa`
/// or `measured_k,reference_k`, then one `measured,reference` pair per line
/// (SI units; blank lines and lines starting with `#` are skipped).
pub fn parse_points(text: &str) -> Result<(Quantity, Vec<(f64, f64)>), Error> {
    let mut lines = text
        .lines()
        .enumerate()
        .map(|(i, l)| (i + 1, l.trim()))
        .filter(|(_, l)| !l.is_empty() && !l.starts_with('#'));
    let (_, header) = lines
        .next()
        .ok_or_else(|| malformed(None, "no header line".to_string()))?;
    let cols: Vec<&str> = header.split(',').map(str::trim).collect();
    let quantity = match cols.as_slice() {
        ["measured_pa", "reference_pa"] => Quantity::Pressure,
        ["measured_k", "reference_k"] => Quantity::Temperature,
        _ => {
            return Err(malformed(
                None,
                format!(
                    "header '{header}' must be 'measured_pa,reference_pa' or \
                     'measured_k,reference_k' (SI units)"
                ),
            ));
        }
    };
    let mut points = Vec::new();
    for (n, line) in lines {
        let fields: Vec<&str> = line.split(',').map(str::trim).collect();
        let [m, r] = fields.as_slice() else {
            return Err(malformed(
                Some(n),
                format!("expected two values, found '{line}'"),
            ));
        };
        let parse = |v: &str| -> Result<f64, Error> {
            let x: f64 = v
                .parse()
                .map_err(|_| malformed(Some(n), format!("'{v}' is not a number")))?;
            if !x.is_finite() {
                return Err(malformed(Some(n), format!("'{v}' is not a finite number")));
            }
            Ok(x)
        };
        points.push((parse(m)?, parse(r)?));
    }
    Ok((quantity, points))
}

/// A least-squares correction and how well it fits.
#[derive(Clone, Debug, serde::Serialize)]
pub struct Fit {
    /// Polynomial degree.
    pub degree: usize,
    /// Number of points.
    pub points: usize,
    /// Low end of the calibrated interval (smallest measured value), SI.
    pub lo: f64,
    /// High end (largest measured value), SI.
    pub hi: f64,
    /// `[c₀, c₁, c₂, c₃]` (unused orders are 0).
    pub coefficients: [f64; 4],
    /// Largest |corrected − reference| over the points, SI.
    pub residual_max: f64,
    /// Root-mean-square residual, SI.
    pub residual_rms: f64,
}

/// Fits a correction of `degree` (1 … 3) to `(measured, reference)` points.
/// Needs at least `degree + 2` points (so that residuals mean something) and
/// distinct measured values.
pub fn fit(points: &[(f64, f64)], degree: usize) -> Result<Fit, Error> {
    if !(1..=3).contains(&degree) {
        return Err(Error::Invalid(format!("--degree {degree}: use 1, 2 or 3")));
    }
    if points.len() < degree + 2 {
        return Err(Error::Invalid(format!(
            "a degree-{degree} fit needs at least {} points, the file has {}",
            degree + 2,
            points.len()
        )));
    }
    let lo = points.iter().map(|p| p.0).fold(f64::INFINITY, f64::min);
    let hi = points.iter().map(|p| p.0).fold(f64::NEG_INFINITY, f64::max);
    if hi <= lo {
        return Err(Error::Invalid(
            "the measured values must not all be equal".to_string(),
        ));
    }
    let span = hi - lo;
    let cols = degree + 1;
    // Vandermonde matrix (row-major) and right-hand side.
    let mut a: Vec<Vec<f64>> = points
        .iter()
        .map(|(m, _)| {
            let x = (m - lo) / span;
            (0..cols).map(|k| x.powi(k as i32)).collect()
        })
        .collect();
    let mut b: Vec<f64> = points.iter().map(|(_, r)| (r - lo) / span).collect();
    let c = least_squares(&mut a, &mut b, cols)?;
    let mut coefficients = [0.0; 4];
    coefficients[..cols].copy_from_slice(&c);
    let correct = |m: f64| {
        let x = (m - lo) / span;
        lo + span * (0..cols).map(|k| c[k] * x.powi(k as i32)).sum::<f64>()
    };
    let residuals: Vec<f64> = points.iter().map(|(m, r)| correct(*m) - r).collect();
    let residual_max = residuals.iter().fold(0f64, |acc, r| acc.max(r.abs()));
    let residual_rms =
        (residuals.iter().map(|r| r * r).sum::<f64>() / residuals.len() as f64).sqrt();
    Ok(Fit {
        degree,
        points: points.len(),
        lo,
        hi,
        coefficients,
        residual_max,
        residual_rms,
    })
}

impl Fit {
    /// The correction in the record's fixed-point form (refused when a
    /// coefficient exceeds ±2: the points do not describe a usable sensor).
    pub fn correction(&self) -> Result<Correction, Error> {
        Correction::from_f64(self.lo, self.hi, self.coefficients).map_err(|source| {
            Error::Rejected {
                what: "fitted correction",
                source,
            }
        })
    }
}

/// Solves `min |A·c − b|` by Householder QR (A is `m × n`, `m ≥ n`).
// Index loops read like the textbook algorithm.
#[allow(clippy::needless_range_loop)]
fn least_squares(a: &mut [Vec<f64>], b: &mut [f64], n: usize) -> Result<Vec<f64>, Error> {
    let m = a.len();
    for k in 0..n {
        let norm = (k..m).map(|i| a[i][k] * a[i][k]).sum::<f64>().sqrt();
        if norm == 0.0 {
            return Err(Error::Invalid(
                "the points do not determine the polynomial (too few distinct values)".to_string(),
            ));
        }
        let alpha = if a[k][k] > 0.0 { -norm } else { norm };
        let mut v: Vec<f64> = (k..m).map(|i| a[i][k]).collect();
        v[0] -= alpha;
        let vv: f64 = v.iter().map(|x| x * x).sum();
        if vv == 0.0 {
            continue;
        }
        for j in k..n {
            let d: f64 = (k..m).map(|i| v[i - k] * a[i][j]).sum::<f64>() * 2.0 / vv;
            for i in k..m {
                a[i][j] -= d * v[i - k];
            }
        }
        let d: f64 = (k..m).map(|i| v[i - k] * b[i]).sum::<f64>() * 2.0 / vv;
        for i in k..m {
            b[i] -= d * v[i - k];
        }
    }
    let mut c = vec![0.0; n];
    for k in (0..n).rev() {
        let s: f64 = (k + 1..n).map(|j| a[k][j] * c[j]).sum();
        if a[k][k].abs() < 1e-12 {
            return Err(Error::Invalid(
                "the points do not determine the polynomial (ill-conditioned)".to_string(),
            ));
        }
        c[k] = (b[k] - s) / a[k][k];
    }
    Ok(c)
}

/// A sensor configuration in SI units with snake_case names (the `settings`
/// object of `isochor sensor ... --format json`), for people and other
/// programs; the exact stored form (raw fixed-point bits) is its `config`
/// object. Resistances in Ω, temperatures in K, pressures in Pa (of the
/// transducer's `kind`: `absolute` or `gauge`), times in s; coefficients as
/// numbers.
pub fn settings(c: &isochor_core::sensor::calibration::SensorConfig) -> serde_json::Value {
    use isochor_core::fx::to_f64;
    use isochor_core::sensor::PressureKind;
    use isochor_core::sensor::calibration::SensorConfig;
    use isochor_core::sensor::ntc::NtcModel;
    use isochor_core::sensor::resistive::{Circuit, FrontEnd};
    use serde_json::json;
    let front_end = |f: &FrontEnd| {
        json!({
            "circuit": match f.circuit {
                Circuit::Ratiometric => "ratiometric",
                Circuit::DividerLow => "divider_low",
                Circuit::DividerHigh => "divider_high",
            },
            "adc_bits": f.adc_bits,
            "reference_ohms": to_f64(f.reference_ohms),
            "lead_ohms": to_f64(f.lead_ohms),
            "short_ohms": to_f64(f.short_ohms),
            "open_ohms": to_f64(f.open_ohms),
            "excitation": to_f64(f.excitation),
            "self_heating_k_per_mw": to_f64(f.self_heating_k_per_mw),
        })
    };
    let kind = |k: PressureKind| match k {
        PressureKind::Absolute => "absolute",
        PressureKind::Gauge => "gauge",
    };
    match c {
        SensorConfig::Rtd(r) => json!({
            "kind": "rtd",
            "r0_ohms": to_f64(r.r0_ohms),
            "front_end": front_end(&r.front_end),
            "range_min_k": to_f64(r.range_min_k),
            "range_max_k": to_f64(r.range_max_k),
        }),
        SensorConfig::Ntc(n) => {
            let model = match n.model {
                NtcModel::Beta {
                    r0_ohms,
                    t0_k,
                    beta_k,
                } => json!({
                    "model": "beta",
                    "r0_ohms": to_f64(r0_ohms),
                    "t0_k": to_f64(t0_k),
                    "beta_k": to_f64(beta_k),
                }),
                NtcModel::SteinhartHart { a, b, c } => json!({
                    "model": "steinhart_hart",
                    "a_per_k": to_f64(a),
                    "b_per_k": to_f64(b),
                    "c_per_k": to_f64(c),
                }),
            };
            json!({
                "kind": "ntc",
                "model": model,
                "front_end": front_end(&n.front_end),
                "range_min_k": to_f64(n.range_min_k),
                "range_max_k": to_f64(n.range_max_k),
            })
        }
        SensorConfig::Loop(l) => json!({
            "kind": "loop",
            "adc_bits": l.adc_bits,
            "adc_reference_v": to_f64(l.adc_reference_v),
            "shunt_ohms": to_f64(l.shunt_ohms),
            "range_lo_pa": to_f64(l.range_lo_pa),
            "range_hi_pa": to_f64(l.range_hi_pa),
            "pressure_kind": kind(l.kind),
            "persistence_s": l.persistence.0 as f64 / 1e3,
        }),
        SensorConfig::Bridge(b) => json!({
            "kind": "bridge",
            "adc_bits": b.adc_bits,
            "bipolar": b.bipolar,
            "zero": b.zero.map(to_f64),
            "span": to_f64(b.span),
            "span_tc": b.span_tc.map(to_f64),
            "reference_k": to_f64(b.reference_k),
            "linearity": b.linearity.map(to_f64),
            "range_lo_pa": to_f64(b.range_lo_pa),
            "range_hi_pa": to_f64(b.range_hi_pa),
            "pressure_kind": kind(b.kind),
            "range_margin": to_f64(b.range_margin),
        }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ranges_and_ohms() {
        assert_eq!(pressure_range("0..300bar", "r").unwrap(), (0.0, 300e5));
        assert_eq!(pressure_range("-1bar..10bar", "r").unwrap(), (-1e5, 10e5));
        assert_eq!(pressure_range("-1..10bar", "r").unwrap(), (-1e5, 10e5));
        assert!(pressure_range("300..0bar", "r").is_err());
        assert!(pressure_range("0..300", "r").is_err());
        assert!(pressure_range("300bar", "r").is_err());
        assert_eq!(ohms("138.5055", "o").unwrap(), 138.5055);
        assert_eq!(ohms("10kΩ", "o").unwrap(), 10_000.0);
        assert_eq!(ohms("2.2Mohm", "o").unwrap(), 2.2e6);
        assert!(ohms("-5", "o").is_err());
        assert!(ohms("nan", "o").is_err());
    }

    #[test]
    fn fit_recovers_a_known_cubic() {
        // Points generated from P(x) = 0.002 + 0.99x + 0.01x² − 0.004x³ on
        // 0 … 300 bar (invented): the fit must give the coefficients back.
        let (lo, hi) = (0.0, 300e5);
        let c = [0.002, 0.99, 0.01, -0.004];
        let pts: Vec<(f64, f64)> = (0..=20)
            .map(|i| {
                let x = i as f64 / 20.0;
                let y = c[0] + c[1] * x + c[2] * x * x + c[3] * x * x * x;
                (lo + x * (hi - lo), lo + y * (hi - lo))
            })
            .collect();
        let f = fit(&pts, 3).unwrap();
        for (got, want) in f.coefficients.iter().zip(c) {
            assert!((got - want).abs() < 1e-12, "{got} {want}");
        }
        assert!(f.residual_max < 1e-6);
        f.correction().unwrap();
        // A straight line through noisy points: residuals are reported.
        let pts = [(0.0, 0.1), (1.0, 1.0), (2.0, 2.1), (3.0, 2.9)];
        let f = fit(&pts, 1).unwrap();
        assert!(f.residual_max > 0.01 && f.residual_rms > 0.0);
        assert!(fit(&pts, 3).is_err(), "needs 5 points");
        assert!(fit(&[(1.0, 1.0); 5], 1).is_err());
    }

    #[test]
    fn csv_points() {
        let (q, p) = parse_points(
            "# bath calibration\nmeasured_k,reference_k\n273.2,273.15\n\n373.0,373.15\n",
        )
        .unwrap();
        assert_eq!(q, Quantity::Temperature);
        assert_eq!(p, vec![(273.2, 273.15), (373.0, 373.15)]);
        assert!(parse_points("a,b\n1,2\n").is_err());
        assert!(parse_points("measured_pa,reference_pa\n1,2,3\n").is_err());
        assert!(parse_points("measured_pa,reference_pa\n1,NaN\n").is_err());
        assert!(parse_points("").is_err());
    }
}
