//! `isochor sensor` end to end: the examples of the interface exactly as
//! written, JSON fields in SI, refusals of bad input with exit code 2, and
//! the calibration flow from a CSV file to a stored, re-read record.

use serde_json::Value;
use std::process::{Command, Output};

fn isochor(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_isochor"))
        .args(args)
        .output()
        .expect("run isochor")
}

fn json(args: &[&str]) -> Value {
    let mut all = args.to_vec();
    all.extend(["--format", "json"]);
    let out = isochor(&all);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("valid JSON")
}

fn num(v: &Value, key: &str) -> f64 {
    v[key].as_f64().unwrap_or_else(|| panic!("{key} in {v}"))
}

#[test]
fn rtd_examples() {
    // IEC 60751: a Pt100 reads 138.5055 Ω at 100 °C (formula value; the
    // standard's table prints 138.51 Ω).
    let j = json(&["sensor", "rtd", "--r0", "100", "--ohms", "138.5055"]);
    assert!((num(&j, "temperature_k") - 373.15).abs() < 1e-4);
    assert!((num(&j["fixed"], "temperature_k") - 373.15).abs() < 1e-4);
    assert_eq!(j["status"], Value::Array(vec![]));
    let j = json(&["sensor", "rtd", "--r0", "100", "--temperature", "100C"]);
    assert!((num(&j, "ohms") - 138.5055).abs() < 1e-6);
    assert!((num(&j["fixed"], "ohms") - 138.5055).abs() < 1e-3);
    // Text output carries the cautions.
    let out = isochor(&["sensor", "rtd", "--r0", "100", "--ohms", "138.5055"]);
    assert!(out.status.success());
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("100.0000 °C") && text.contains("CAUTION"));
    // The conversion's settings in SI with snake_case names beside the
    // stored form (raw bits): 4·R0 reference resistor by default.
    let j = json(&["sensor", "rtd", "--r0", "100", "--ohms", "100"]);
    let s = &j["settings"];
    assert_eq!(s["kind"], "rtd");
    assert_eq!(num(s, "r0_ohms"), 100.0);
    assert_eq!(s["front_end"]["circuit"], "ratiometric");
    assert_eq!(num(&s["front_end"], "reference_ohms"), 400.0);
    assert!(j["config"]["Rtd"]["r0_ohms"]["bits"].is_u64());
    // 0 °C never prints as −0.0000 °C (the fixed path rounds a hair below).
    let out = isochor(&["sensor", "rtd", "--r0", "100", "--ohms", "100"]);
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(!text.contains("-0.0000"), "{text}");
    assert!(text.contains("FOR HARDWARE TEAMS"));
}

#[test]
fn ntc_example() {
    // Beta model by definition: 10 kΩ·exp(3950·(1/273.15 − 1/298.15)) =
    // 33 620.6 Ω at 0 °C.
    let j = json(&[
        "sensor", "ntc", "--beta", "3950", "--r25", "10000", "--ohms", "33620.6",
    ]);
    assert!((num(&j, "temperature_k") - 273.15).abs() < 1e-4);
    assert!((num(&j["fixed"], "temperature_k") - 273.15).abs() < 1e-4);
    let j = json(&[
        "sensor",
        "ntc",
        "--beta",
        "3950",
        "--r25",
        "10000",
        "--temperature",
        "0C",
    ]);
    assert!((num(&j, "ohms") - 33_620.6).abs() < 0.05);
}

#[test]
fn loop_example_is_a_failure_signal() {
    // NAMUR NE 43: 3.59 mA is in the failure band (≤ 3.6 mA).
    let j = json(&[
        "sensor",
        "loop",
        "--milliamps",
        "3.59",
        "--range",
        "0..300bar",
    ]);
    assert_eq!(j["band"], "failure_low");
    assert_eq!(j["status"], serde_json::json!(["sensor_loop_failure"]));
    assert!(j["pressure_pa"].is_null());
    assert!((num(&j, "milliamps") - 3.59).abs() < 1e-12);
    // 12 mA on 0–300 bar gauge: 150 bar gauge, plus the barometric pressure.
    let j = json(&[
        "sensor",
        "loop",
        "--milliamps",
        "12",
        "--range",
        "0..300bar",
        "--gauge",
    ]);
    assert!((num(&j, "gauge_pressure_pa") - 150e5).abs() < 1e-6);
    assert!((num(&j, "pressure_pa") - 150e5 - 101_325.0).abs() < 1e-6);
    let j = json(&[
        "sensor",
        "loop",
        "--pressure",
        "150bar",
        "--range",
        "0..300bar",
    ]);
    assert!((num(&j, "milliamps") - 12.0).abs() < 1e-12);
}

#[test]
fn bridge_and_gauge() {
    let j = json(&[
        "sensor",
        "bridge",
        "--range",
        "0..300bar",
        "--zero",
        "0.01",
        "--span",
        "0.8",
        "--pressure",
        "150bar",
    ]);
    let code = num(&j, "code");
    // Half scale: signal 0.01 + 0.4 of the bipolar range, code ≈ 0.41·32768.
    assert!((code - 0.41 * 32768.0).abs() < 1e-6);
    let c = format!("{}", code.round() as i64);
    let j = json(&[
        "sensor",
        "bridge",
        "--range",
        "0..300bar",
        "--zero",
        "0.01",
        "--span",
        "0.8",
        "--code",
        &c,
    ]);
    assert!((num(&j, "pressure_pa") - 150e5).abs() < 300e5 / 20_000.0);
    let j = json(&[
        "sensor",
        "gauge",
        "--gauge",
        "-1.2bar",
        "--barometric",
        "1013.25mbar",
    ]);
    assert_eq!(num(&j, "pressure_pa"), 0.0);
    assert_eq!(j["status"], serde_json::json!(["sensor_under_range"]));
    // barg on the gauge side, bara on the absolute side; the other way
    // round is refused.
    let j = json(&["sensor", "gauge", "--gauge", "2barg"]);
    assert!((num(&j, "pressure_pa") - 2e5 - 101_325.0).abs() < 1e-6);
    let j = json(&["sensor", "gauge", "--absolute", "3.01325bara"]);
    assert!((num(&j, "gauge_pressure_pa") - 2e5).abs() < 1e-6);
    assert_eq!(
        isochor(&["sensor", "gauge", "--gauge", "2bara"])
            .status
            .code(),
        Some(2)
    );
}

#[test]
fn bad_input_exits_with_2() {
    for args in [
        vec!["sensor", "rtd", "--r0", "100", "--ohms", "nan"],
        vec!["sensor", "rtd", "--r0", "100", "--ohms", "inf"],
        vec!["sensor", "rtd", "--r0", "100", "--temperature", "900C"],
        vec!["sensor", "rtd", "--r0", "100", "--temperature", "100"],
        vec!["sensor", "rtd", "--r0", "-100", "--ohms", "100"],
        vec![
            "sensor", "ntc", "--beta", "3950", "--r25", "10000", "--ohms", "-5",
        ],
        vec![
            "sensor",
            "loop",
            "--milliamps",
            "NaN",
            "--range",
            "0..300bar",
        ],
        vec![
            "sensor",
            "loop",
            "--milliamps",
            "12",
            "--range",
            "300..0bar",
        ],
        vec!["sensor", "loop", "--milliamps", "12", "--range", "0..300"],
        vec!["sensor", "gauge", "--gauge", "1bar", "--barometric", "3bar"],
        vec!["sensor", "record", "/nonexistent/file"],
    ] {
        let out = isochor(&args);
        assert_eq!(
            out.status.code(),
            Some(2),
            "{args:?}: {}",
            String::from_utf8_lossy(&out.stdout)
        );
        assert!(!out.stderr.is_empty());
    }
}

#[test]
fn calibration_flow_from_csv_to_a_stored_record() {
    let dir = std::env::temp_dir().join(format!("isochor-cli-sensor-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    // The sensor configuration as `isochor sensor rtd` prints it.
    let j = json(&["sensor", "rtd", "--r0", "100", "--ohms", "100"]);
    let cfg = dir.join("pt100.json");
    std::fs::write(&cfg, j["config"].to_string()).unwrap();
    // The whole report is accepted too.
    let full = dir.join("pt100-report.json");
    std::fs::write(&full, j.to_string()).unwrap();
    // Bath points (invented): the channel reads 0.05 K high at the ice point
    // and 0.08 K low at 200 °C.
    let csv = dir.join("points.csv");
    std::fs::write(
        &csv,
        "# invented bath calibration\nmeasured_k,reference_k\n273.200,273.15\n323.168,323.15\n373.135,373.15\n423.102,423.15\n473.070,473.15\n",
    )
    .unwrap();
    let rec = dir.join("cal.rec");
    let (csv_s, cfg_s, rec_s) = (
        csv.to_str().unwrap(),
        cfg.to_str().unwrap(),
        rec.to_str().unwrap(),
    );
    let j = json(&[
        "sensor",
        "fit",
        "--input",
        csv_s,
        "--degree",
        "1",
        "--record",
        rec_s,
        "--sensor-config",
        cfg_s,
        "--sequence",
        "3",
        "--channel",
        "temperature",
    ]);
    assert_eq!(j["quantity"], "temperature");
    assert!(num(&j["fit"], "residual_max") < 0.01);
    let c1 = j["fit"]["coefficients"][1].as_f64().unwrap();
    assert!((c1 - 1.0).abs() < 0.01);
    let bytes = std::fs::read(&rec).unwrap();
    assert!(bytes.len() <= isochor_core::sensor::calibration::CalibrationRecord::MAX_SIZE);
    let back = json(&["sensor", "record", rec_s]);
    assert_eq!(back["sequence"], 3);
    assert_eq!(back["sensor_kind"], "rtd");
    assert_eq!(back["checksum"], "ok");
    assert_eq!(back["config"], j_config(&cfg));
    // The same fit from the whole report writes the same record.
    let rec2 = dir.join("cal2.rec");
    let _ = json(&[
        "sensor",
        "fit",
        "--input",
        csv_s,
        "--degree",
        "1",
        "--record",
        rec2.to_str().unwrap(),
        "--sensor-config",
        full.to_str().unwrap(),
        "--sequence",
        "3",
        "--channel",
        "temperature",
    ]);
    assert_eq!(std::fs::read(&rec2).unwrap(), bytes);
    // A corrupted record is refused.
    let mut bad = bytes.clone();
    bad[10] ^= 1;
    std::fs::write(&rec, &bad).unwrap();
    let out = isochor(&["sensor", "record", rec_s]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("checksum"));
    // A record needs its sensor configuration.
    let out = isochor(&["sensor", "fit", "--input", csv_s, "--record", rec_s]);
    assert_eq!(out.status.code(), Some(2));
    let _ = std::fs::remove_dir_all(&dir);
}

fn j_config(path: &std::path::Path) -> Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}
