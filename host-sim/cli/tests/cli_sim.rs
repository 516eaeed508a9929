//! `isochor demo` and `isochor sim` end to end: the files a user opens, the
//! JSON interface, the cautions, and clear refusals of bad input.

use serde_json::Value;
use std::path::PathBuf;
use std::process::{Command, Output};

fn isochor(dir: &PathBuf, args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_isochor"))
        .current_dir(dir)
        .args(args)
        .output()
        .expect("run isochor")
}

fn temp(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("isochor-cli-sim-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// The README's first command: the demo writes its files into
/// `isochor-out/` of the current folder, names them, and carries the
/// cautions; the PNG is a real PNG of the size drawn.
#[test]
fn demo_writes_summary_series_and_plots() {
    let dir = temp("demo");
    let out = isochor(&dir, &["demo"]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("workshop-leak"));
    assert!(text.contains("detected after"));
    assert!(text.contains("CAUTION: gas under pressure can kill"));
    assert!(text.contains("Asphyxiant"));
    let o = dir.join("isochor-out");
    for f in [
        "workshop-leak.png",
        "workshop-leak.svg",
        "workshop-leak.csv",
        "workshop-leak.jsonl",
        "workshop-leak.summary.json",
    ] {
        assert!(text.contains(&format!("isochor-out/{f}")), "{f} not named");
        assert!(o.join(f).metadata().unwrap().len() > 1000, "{f}");
    }
    let png = std::fs::read(o.join("workshop-leak.png")).unwrap();
    assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n");
    let (w, h) = (
        u32::from_be_bytes(png[16..20].try_into().unwrap()),
        u32::from_be_bytes(png[20..24].try_into().unwrap()),
    );
    assert_eq!((w, h), (1500, 1700));
    let svg = std::fs::read_to_string(o.join("workshop-leak.svg")).unwrap();
    assert!(svg.contains("Pressure") && svg.contains("bar (absolute)"));
    assert!(svg.contains("sensor reading (abs)"));
    let csv = std::fs::read_to_string(o.join("workshop-leak.csv")).unwrap();
    assert!(csv.starts_with("t_s,pressure_true_pa,"));
    assert!(
        csv.lines()
            .next()
            .unwrap()
            .contains(",loss_fraction_per_day,")
    );
    assert_eq!(csv.lines().count(), 1 + 7 * 24 * 60 + 1);
    let first: Value = serde_json::from_str(
        std::fs::read_to_string(o.join("workshop-leak.jsonl"))
            .unwrap()
            .lines()
            .nth(1)
            .unwrap(),
    )
    .unwrap();
    assert_eq!(first["t_s"], 60.0);
    assert!(first["status"].is_array());
    let _ = std::fs::remove_dir_all(&dir);
}

/// `isochor demo --no-files` prints the summary and writes nothing.
#[test]
fn demo_without_files() {
    let dir = temp("demo-no-files");
    let out = isochor(&dir, &["demo", "--no-files"]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("workshop-leak") && text.contains("CAUTION"));
    assert!(!dir.join("isochor-out").exists());
    assert!(!text.contains("Open the PNG"));
    let _ = std::fs::remove_dir_all(&dir);
}

/// The demo explains itself: it prints the simulated instrument's errors
/// and a reading of each headline score, and what it prints agrees with
/// the summary JSON it wrote. The bias the instrument's errors explain
/// (first order, through the true gas's sensitivities) accounts for the
/// measured bias: the gauge itself is not biased beyond its instrument.
#[test]
fn demo_explains_its_instrument_and_scores() {
    let dir = temp("demo-explains");
    let out = isochor(&dir, &["demo"]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8(out.stdout).unwrap();
    let j: Value = serde_json::from_str(
        &std::fs::read_to_string(dir.join("isochor-out/workshop-leak.summary.json")).unwrap(),
    )
    .unwrap();
    let num = |v: &Value, k: &str| {
        v[k].as_f64()
            .unwrap_or_else(|| panic!("{k} missing or not a number"))
    };
    let has = |needle: String| assert!(text.contains(&needle), "{needle:?} missing in:\n{text}");

    // The instrument: drawn (the scenario says so), seed 4, and its errors
    // as the JSON holds them.
    let i = &j["instrument"];
    assert_eq!(i["drawn"], true);
    assert_eq!(i["seed"], 4);
    has("drawn from the gauge's declared uncertainties (seed 4".into());
    has(format!(
        "pressure sensor: offset {:+.3} bar, span error {:+.3} %",
        num(i, "pressure_offset_pa") / 1e5,
        num(i, "pressure_span_error") * 100.0
    ));
    has(format!(
        "temperature sensor: offset {:+.3} K, gain error {:+.3} %",
        num(i, "temperature_offset_k"),
        num(i, "temperature_gain_error") * 100.0
    ));
    has(format!(
        "on the wall, own time constant {:.0} s (the gauge declares a lag of {:.0} min)",
        num(i, "temperature_time_constant_s"),
        num(i, "temperature_lag_declared_s") / 60.0
    ));
    let (told, truth) = (num(i, "capacity_told_m3"), num(i, "capacity_true_m3"));
    assert_eq!(truth, 0.050);
    assert!((num(i, "capacity_error_fraction") - (told / truth - 1.0)).abs() < 1e-15);
    has(format!(
        "water capacity told to the gauge: {:.3} L for a true 50.000 L ({:+.3} %)",
        told * 1e3,
        num(i, "capacity_error_fraction") * 100.0
    ));
    // The drawn errors are those of a real instrument: within the
    // declaration's bounds (uniform ±√3·u for pressure offset and gain,
    // UncertaintyConfig::example: 0.144 % of 300 bar and 0.058 %).
    assert!(num(i, "pressure_offset_pa").abs() <= 3f64.sqrt() * 0.00144 * 300e5);
    assert!(num(i, "pressure_span_error").abs() <= 3f64.sqrt() * 0.00058);

    // One reading under every headline score.
    let rows = [
        "content error, max |e| (judged)",
        "content error, mean (bias)",
        "content error, rms",
        "content error, max |e| (every sample)",
        "uncertainty (k = 2) holds the truth",
        "uncertainty (k = 2), median U(m)/m",
        "leak ",
        "false alarms",
        "time to empty, median / max error",
    ];
    let lines: Vec<&str> = text.lines().collect();
    for row in rows {
        let at = lines
            .iter()
            .position(|l| l.trim_start().starts_with(row))
            .unwrap_or_else(|| panic!("row {row:?} missing"));
        assert!(
            lines[at + 1].trim_start().starts_with("reading: "),
            "no reading under {row:?}: {}",
            lines[at + 1]
        );
    }
    assert_eq!(text.matches("reading: ").count(), rows.len());

    // The bias: the parts sum to the total, the text quotes them, and the
    // instrument explains the measured bias (the rest, the gauge's own part,
    // is a small share of its stated uncertainty).
    let b = &j["expected_bias"];
    let (c, p, t, total) = (
        num(b, "capacity_fraction"),
        num(b, "pressure_fraction"),
        num(b, "temperature_fraction"),
        num(b, "total_fraction"),
    );
    assert!((c + p + t - total).abs() < 1e-15);
    assert!((c - num(i, "capacity_error_fraction")).abs() < 1e-12);
    let mean = num(&j, "mean_error_fraction");
    has(format!(
        "this instrument's errors explain {:+.2} % (capacity {:+.2} %, pressure {:+.2} %, \
         temperature {:+.2} %); the gauge's own part is {:+.3} %",
        total * 100.0,
        c * 100.0,
        p * 100.0,
        t * 100.0,
        (mean - total) * 100.0
    ));
    let u = num(&j, "median_relative_uncertainty");
    assert!(
        (mean - total).abs() < 0.1 * u,
        "bias {mean} not explained by the instrument ({total}); U {u}"
    );
    has(format!("the bias is {:.0} % of it", 100.0 * mean.abs() / u));

    // The leak and the time to empty: what the scenario and the judged
    // minutes were.
    assert_eq!(j["leak_loss_per_day"], 0.005);
    assert_eq!(j["draws"], 0);
    has("a leak of 0.50 % of the content per day from 3.00 d".into());
    let q = num(&j, "time_to_empty_outflow_kg_h");
    let ru = num(&j, "time_to_empty_rate_uncertainty");
    has(format!(
        "median {q:.4} kg/h, {:.2} d to the reserve (the leak alone: no draw in this scenario); \
         the gauge stated its rate to ±{:.0} % (k = 2)",
        num(&j, "time_to_empty_true_median_s") / 86_400.0,
        ru * 100.0
    ));
    // 0.5 %/day of about 11 kg is about 0.0023 kg/h; the gauge knows such a
    // small rate only to tens of per cent, and the error is of that order.
    assert!((0.001..0.005).contains(&q), "{q}");
    assert!(ru > 0.1 && ru <= 0.5, "{ru}");
    assert!(num(&j, "time_to_empty_median_error") < ru, "{j}");
    let _ = std::fs::remove_dir_all(&dir);
}

/// `--format json` carries the interface fields.
#[test]
fn json_summary_has_the_interface_fields() {
    let dir = temp("json");
    let out = isochor(
        &dir,
        &[
            "sim",
            "workshop-leak",
            "--duration",
            "4d",
            "--no-files",
            "--format",
            "json",
        ],
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    for k in [
        "max_abs_error_fraction",
        "uncertainty_coverage",
        "leak_detected_after_s",
        "false_alarms",
        "samples",
        "samples_per_second",
    ] {
        assert!(v.get(k).is_some(), "{k} missing");
    }
    assert_eq!(v["samples"], 4 * 86_400 + 1);
    assert!(v["leak_detected_after_s"].as_f64().unwrap() > 0.0);
    assert!(v["caution"].as_str().unwrap().contains("CAUTION"));
    // No leak in a day without one: null.
    let out = isochor(
        &dir,
        &[
            "sim",
            "workshop-leak",
            "--duration",
            "1d",
            "--no-files",
            "--format",
            "json",
        ],
    );
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert!(v["leak_detected_after_s"].is_null());
    assert!(!dir.join("isochor-out").exists());
    let _ = std::fs::remove_dir_all(&dir);
}

/// Several scenarios at once (in parallel) give a JSON array; a scenario
/// file of the user's runs like a built-in.
#[test]
fn several_scenarios_and_a_file() {
    let dir = temp("many");
    let file = dir.join("mine.toml");
    let text = isochor_tank::scenario::BUILTIN[2]
        .1
        .replace("name = \"helium-party\"", "name = \"my-counter\"");
    std::fs::write(&file, text).unwrap();
    let out = isochor(
        &dir,
        &[
            "sim",
            "mine.toml",
            "methane-cold-night",
            "--duration",
            "6h",
            "--no-files",
            "--format",
            "json",
        ],
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    let names: Vec<&str> = v
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s["scenario"].as_str().unwrap())
        .collect();
    assert_eq!(names, ["my-counter", "methane-cold-night"]);
    let list = isochor(&dir, &["sim", "--list"]);
    let list = String::from_utf8(list.stdout).unwrap();
    for (name, _) in isochor_tank::scenario::BUILTIN {
        assert!(list.contains(name));
    }
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn bad_input_exits_with_2() {
    let dir = temp("bad");
    std::fs::write(
        dir.join("bad.toml"),
        "format = \"isochor-scenario 1\"\nname = 3\n",
    )
    .unwrap();
    for args in [
        vec!["sim", "no-such-scenario"],
        vec!["sim", "bad.toml"],
        vec!["sim", "workshop-leak", "--duration", "3 fortnights"],
        vec!["sim"],
    ] {
        let out = isochor(&dir, &args);
        assert_eq!(out.status.code(), Some(2), "{args:?}");
        assert!(String::from_utf8_lossy(&out.stderr).contains("error"));
    }
    let _ = std::fs::remove_dir_all(&dir);
}

/// `isochor sim NAME --population N`: N drawn instruments of one scenario,
/// pooled. The JSON carries the run count, the instrument-years, the
/// pooled coverage (the judged-sample-weighted mean of the runs' own, which
/// the single runs reproduce), and the text the gas's cautions.
#[test]
fn population_pools_drawn_instruments() {
    let dir = temp("population");
    let out = isochor(
        &dir,
        &[
            "sim",
            "workshop-leak",
            "--population",
            "4",
            "--duration",
            "2h",
            "--seed",
            "40",
            "--format",
            "json",
        ],
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["scenario"], "workshop-leak");
    assert_eq!(v["runs"], 4);
    assert_eq!(v["seed_first"], 40);
    let years = v["instrument_years"].as_f64().unwrap();
    assert!((years - 4.0 * 2.0 * 3600.0 / (365.25 * 86_400.0)).abs() < 1e-12);
    // The same four instruments one by one (seeds 40 … 43, drawn).
    let (mut judged, mut covered) = (0.0, 0.0);
    let mut offsets = Vec::new();
    for seed in 40..44 {
        let one = isochor(
            &dir,
            &[
                "sim",
                "workshop-leak",
                "--duration",
                "2h",
                "--seed",
                &seed.to_string(),
                "--no-files",
                "--format",
                "json",
            ],
        );
        let s: Value = serde_json::from_slice(&one.stdout).unwrap();
        let k = s["judged_samples"].as_f64().unwrap();
        judged += k;
        covered += k * s["uncertainty_coverage"].as_f64().unwrap();
        offsets.push(s["instrument"]["pressure_offset_pa"].as_f64().unwrap());
    }
    assert_eq!(v["judged_samples"].as_f64().unwrap(), judged);
    let pooled = v["coverage_pooled"].as_f64().unwrap();
    assert!((pooled - covered / judged).abs() < 1e-12, "{pooled}");
    // Each seed drew another instrument.
    offsets.sort_by(f64::total_cmp);
    offsets.dedup();
    assert_eq!(offsets.len(), 4, "{offsets:?}");
    for key in [
        "false_alarms_per_instrument_year",
        "coverage_min",
        "rms_error_pooled",
        "uncertainty_over_rms",
        "time_to_empty_coverage_pooled",
    ] {
        assert!(v.get(key).is_some(), "{key}");
    }
    let text = isochor(
        &dir,
        &[
            "sim",
            "workshop-leak",
            "--population",
            "2",
            "--duration",
            "1h",
        ],
    );
    let text = String::from_utf8(text.stdout).unwrap();
    assert!(text.contains("2 instruments drawn from the gauge's declaration"));
    assert!(text.contains("CAUTION: gas under pressure can kill"));
    // A population of none is refused.
    let none = isochor(&dir, &["sim", "workshop-leak", "--population", "0"]);
    assert!(!none.status.success());
    assert!(String::from_utf8_lossy(&none.stderr).contains("at least one run"));
}
