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
