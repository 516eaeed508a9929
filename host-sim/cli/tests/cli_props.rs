//! `isochor props` end to end: the JSON interface and its refusals.

use serde_json::Value;
use std::process::Command;

fn props(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_isochor"))
        .arg("props")
        .args(args)
        .output()
        .unwrap()
}

#[test]
fn props_json_interface() {
    let out = props(&[
        "--gas",
        "nitrogen",
        "--pressure",
        "200bar",
        "--temperature",
        "15C",
        "--format",
        "json",
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let j: Value = serde_json::from_slice(&out.stdout).unwrap();
    for f in [
        "gas",
        "z",
        "density_kg_m3",
        "molar_mass_kg_mol",
        "phase",
        "source",
    ] {
        assert!(!j[f].is_null(), "{f}");
    }
    assert_eq!(j["gas"], "nitrogen");
    assert_eq!(j["phase"], "supercritical");
    assert!(j["source"].as_str().unwrap().contains("Span"));
    // CoolProp 8.0.0: PropsSI("D", "T", 288.15, "P", 2e7, "Nitrogen")
    // = 223.18704635672685 kg/m³.
    let rho = j["density_kg_m3"].as_f64().unwrap();
    assert!((rho / 223.187_046_356_726_85 - 1.0).abs() < 1e-9, "{rho}");
}

#[test]
fn props_refuses_liquid_and_out_of_range_with_exit_2() {
    let liquid = props(&[
        "--gas",
        "co2",
        "--pressure",
        "80bar",
        "--temperature",
        "15C",
    ]);
    assert_eq!(liquid.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&liquid.stderr).contains("two-phase"));
    let high = props(&[
        "--gas",
        "oxygen",
        "--pressure",
        "900bar",
        "--temperature",
        "15C",
    ]);
    assert_eq!(high.status.code(), Some(2));
    let text = props(&[
        "--gas",
        "hydrogen",
        "--pressure",
        "700bar",
        "--temperature",
        "15C",
    ]);
    assert!(text.status.success());
    assert!(String::from_utf8_lossy(&text.stdout).contains("CAUTION"));
}
