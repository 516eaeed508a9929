//! Mixtures end to end: `content` with a composition (the device path on a
//! table built for it, within the device-model bound of GERG-2008), the
//! `composition` JSON field, the condensation flag below the dew line,
//! refusals of bad compositions, composition files, `props` and `model`.

use serde_json::Value;
use std::process::{Command, Output};

fn isochor(args: &[&str], cache: &std::path::Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_isochor"))
        .args(args)
        .env("ISOCHOR_CACHE_DIR", cache)
        .output()
        .unwrap()
}

fn cache(name: &str) -> std::path::PathBuf {
    let d = std::env::temp_dir().join(format!(
        "isochor-cli-mixtures-{name}-{}",
        std::process::id()
    ));
    let _ = std::fs::remove_dir_all(&d);
    d
}

fn json(out: &Output) -> Value {
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

const CONTENT: [&str; 11] = [
    "content",
    "--capacity",
    "50L",
    "--rated-pressure",
    "200bar",
    "--format",
    "json",
    "--gas",
    "argon=82%,carbon_dioxide=18%",
    "--temperature",
    "15C",
];

#[test]
fn content_of_a_shielding_gas_names_it_and_holds_the_bound() {
    let dir = cache("content");
    let mut args = CONTENT.to_vec();
    args.extend(["--pressure", "200bar"]);
    let j = json(&isochor(&args, &dir));
    assert_eq!(j["gas"], "carbon_dioxide=18%,argon=82%");
    assert!((j["composition"]["argon"].as_f64().unwrap() - 0.82).abs() < 1e-12);
    assert!((j["composition"]["carbon_dioxide"].as_f64().unwrap() - 0.18).abs() < 1e-12);
    assert_eq!(j["model"], "device");
    assert_eq!(j["device_table"]["source"], "built");
    assert!(j["device_table"]["bytes"].as_u64().unwrap() <= 2048);
    // The device path against GERG-2008 (the reference column): within the
    // device-model bound of 1e-4 in density, and the estimate's rounding.
    let dev = j["fixed"]["density_kg_m3"].as_f64().unwrap();
    let gerg = j["reference"]["density_kg_m3"].as_f64().unwrap();
    assert!((dev / gerg - 1.0).abs() < 1e-4, "{dev} vs {gerg}");
    assert_eq!(j["fixed"]["status"].as_array().unwrap().len(), 0);
    // The second run reuses the kept table.
    let j = json(&isochor(&args, &dir));
    assert_eq!(j["device_table"]["source"], "cached");
    assert_eq!(j["fixed"]["density_kg_m3"].as_f64().unwrap(), dev);
    // Cold, above the dew line: flagged, no content shown, both paths and
    // the reference (−57 °C, 45 bar; dew pressure about 34 bar there).
    let mut cold = CONTENT.to_vec();
    cold.pop();
    cold.extend(["-57C", "--pressure", "45bar"]);
    let j = json(&isochor(&cold, &dir));
    for path in ["fixed", "float"] {
        assert!(j[path]["density_kg_m3"].is_null(), "{path}");
        let st: Vec<&str> = j[path]["status"]
            .as_array()
            .unwrap()
            .iter()
            .filter_map(|v| v.as_str())
            .collect();
        assert!(st.contains(&"condensation_risk"), "{path}: {st:?}");
    }
    assert!(
        j["reference"]["status"]
            .as_array()
            .unwrap()
            .iter()
            .any(|v| v == "condensation_risk")
    );
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn bad_compositions_are_refused_with_exit_code_2() {
    let dir = cache("bad");
    for (gas, says) in [
        ("argon=82%,carbon_dioxide=17%", "sum to"),
        ("argon=90%,unobtainium=10%", "unknown component"),
        ("argon=102%,carbon_dioxide=-2%", "negative"),
        ("neon=50%,helium=50%", "not a GERG-2008 component"),
    ] {
        let out = isochor(
            &[
                "content",
                "--gas",
                gas,
                "--capacity",
                "50L",
                "--pressure",
                "200bar",
                "--temperature",
                "15C",
                "--rated-pressure",
                "200bar",
            ],
            &dir,
        );
        assert_eq!(out.status.code(), Some(2), "{gas}");
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains(says), "{gas}: {err}");
    }
}

#[test]
fn composition_files_props_and_model_check() {
    let dir = cache("files");
    std::fs::create_dir_all(&dir).unwrap();
    let file = dir.join("heliox.toml");
    std::fs::write(
        &file,
        "name = \"heliox 21/79\"\n[composition]\nhelium = \"79%\"\noxygen = 0.21\n",
    )
    .unwrap();
    let f = file.to_str().unwrap();
    let j = json(&isochor(
        &[
            "props",
            "--gas-file",
            f,
            "--pressure",
            "200bar",
            "--temperature",
            "20C",
            "--format",
            "json",
        ],
        &dir,
    ));
    assert_eq!(j["gas"], "oxygen=21%,helium=79%");
    assert!(j["source"].as_str().unwrap().contains("GERG-2008"));
    // Magnitude only (the values are checked in host-sim/eos/tests): ideal
    // gas 81 kg/m³ at this state, Z about 1.08 (common practice).
    let rho = j["density_kg_m3"].as_f64().unwrap();
    assert!((70.0..80.0).contains(&rho), "{rho}");
    // A pure gas keeps its name and gets a composition of itself.
    let j = json(&isochor(
        &[
            "props",
            "--gas",
            "argon",
            "--pressure",
            "200bar",
            "--temperature",
            "20C",
            "--format",
            "json",
        ],
        &dir,
    ));
    assert_eq!(j["gas"], "argon");
    assert_eq!(j["composition"]["argon"], 1.0);
    // props refuses a state below the dew line.
    let out = isochor(
        &[
            "props",
            "--gas",
            "argon=82%,carbon_dioxide=18%",
            "--pressure",
            "45bar",
            "--temperature",
            "-57C",
        ],
        &dir,
    );
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("condense"));
    // model check builds (or reuses) the mixture's table and reports it.
    let j = json(&isochor(
        &["model", "check", "--gas-file", f, "--format", "json"],
        &dir,
    ));
    assert!(j["max_rel_error"].as_f64().unwrap() < 1e-4);
    assert_eq!(j["composition"]["helium"], 0.79);
    let _ = std::fs::remove_dir_all(&dir);
}
