//! `isochor content` end to end: the JSON interface against an independent
//! ideal-gas computation, and clear refusals of bad input.

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

const BASE: [&str; 10] = [
    "content",
    "--gas",
    "nitrogen",
    "--capacity",
    "50L",
    "--pressure",
    "200bar",
    "--temperature",
    "35C",
    "--rated-pressure",
];

fn base(rest: &[&'static str]) -> Vec<&'static str> {
    let mut v = BASE.to_vec();
    v.push("200bar");
    // These checks compare with ideal-gas arithmetic done by hand.
    v.extend_from_slice(&["--model", "ideal"]);
    v.extend_from_slice(rest);
    v
}

fn close(v: &Value, expected: f64, rel: f64) -> bool {
    let x = v.as_f64().expect("number");
    ((x - expected) / expected).abs() <= rel
}

#[test]
fn json_matches_independent_ideal_gas_computation() {
    let j = json(&base(&[]));
    // Independent computation: CODATA 2018 R = 8.314462618 J/(mol K); N2
    // molar mass 28.01348 g/mol (Span et al., J. Phys. Chem. Ref. Data 29, 2000).
    let r = 8.314_462_618_153_24;
    let (p, t, v, m_mol) = (200e5, 308.15, 0.050, 0.028_013_48);
    let n = p * v / (r * t);
    let rho = p * m_mol / (r * t);
    let n_rated = 200e5 * v / (r * 288.15);
    let v_std = n * r * 288.15 / 101_325.0;
    let p_settled = p * 288.15 / t;
    assert_eq!(j["gas"], "nitrogen");
    assert_eq!(j["model"], "ideal");
    assert_eq!(j["reference"]["temperature_k"], 288.15);
    assert_eq!(j["reference"]["pressure_pa"], 101_325.0);
    assert_eq!(j["settled_reference_k"], 288.15);
    for (side, tol) in [("float", 1e-12), ("fixed", 1e-5)] {
        let o = &j[side];
        assert!(close(&o["density_kg_m3"], rho, tol), "{side} density");
        assert!(close(&o["mass_kg"], n * m_mol, tol), "{side} mass");
        assert!(close(&o["amount_mol"], n, tol), "{side} amount");
        assert!(
            close(&o["standard_volume_m3"], v_std, tol),
            "{side} standard volume"
        );
        assert!(
            close(&o["settled_pressure_pa"], p_settled, tol),
            "{side} settled"
        );
        assert!(
            close(&o["fill_fraction"], n / n_rated, tol),
            "{side} fraction"
        );
        assert_eq!(o["z"], 1.0);
        assert_eq!(o["status"], serde_json::json!([]));
    }
}

#[test]
fn gauge_standard_and_reference_options() {
    // Gauge: 200 bar gauge + 1.01325 bar barometric (both pressures; the
    // standard atmosphere, 101 325 Pa exactly by definition, is the default
    // barometric pressure).
    let j = json(&base(&["--gauge"]));
    let expected_p = 200e5 + 101_325.0;
    assert!(close(&j["sample"]["pressure_pa"], expected_p, 1e-15));
    assert!(close(&j["tank"]["rated_pressure_pa"], expected_p, 1e-15));
    // Normal conditions (0 °C): standard volume scales by 273.15/288.15
    // (0 °C and 15 °C in kelvin, exact by the definition of the Celsius
    // scale).
    let a = json(&base(&[]));
    let b = json(&base(&["--standard", "normal"]));
    let ratio = b["float"]["standard_volume_m3"].as_f64().unwrap()
        / a["float"]["standard_volume_m3"].as_f64().unwrap();
    assert!((ratio - 273.15 / 288.15).abs() < 1e-12);
    // Custom standard and settled reference at 20 °C.
    let c = json(&base(&[
        "--standard",
        "25C,100kPa",
        "--reference-temperature",
        "20C",
    ]));
    assert_eq!(c["reference"]["name"], "custom");
    assert!(close(&c["reference"]["temperature_k"], 298.15, 1e-15));
    assert!(close(
        &c["float"]["settled_pressure_pa"],
        200e5 * 293.15 / 308.15,
        1e-12
    ));
    // psi and Fahrenheit: 1 psi = 0.453 592 37 kg × 9.806 65 m/s² /
    // (0.0254 m)² = 6894.757 293 168 Pa, exact by the definitions of the
    // pound, standard gravity and the inch (NIST SP 811); 70 °F =
    // (70 − 32)·5/9 + 273.15 K = 294.261 111 K, exact by the definitions of
    // the scales.
    let d = json(&[
        "content",
        "--gas",
        "oxygen",
        "--capacity",
        "0.68m3",
        "--pressure",
        "2000psi",
        "--temperature",
        "70F",
        "--rated-pressure",
        "2015psi",
        "--standard",
        "60f",
    ]);
    assert!(close(
        &d["sample"]["pressure_pa"],
        2000.0 * 6_894.757_293_168,
        1e-12
    ));
    assert!(close(&d["sample"]["temperature_k"], 294.261_111_1, 1e-9));
}

#[test]
fn pressure_units_say_absolute_or_gauge() {
    let atm = 101_325.0; // standard atmosphere, exact by definition
    // barg adds the barometric pressure, bara does not, even with --gauge.
    let mut a = base(&[]);
    a[6] = "200barg";
    a[10] = "200bara";
    let j = json(&a);
    assert!(close(&j["sample"]["pressure_pa"], 200e5 + atm, 1e-15));
    assert!(close(&j["tank"]["rated_pressure_pa"], 200e5, 1e-15));
    let mut b = base(&["--gauge", "--barometric", "95kPa"]);
    b[6] = "200bara";
    let j = json(&b);
    assert!(close(&j["sample"]["pressure_pa"], 200e5, 1e-15));
    assert!(close(&j["tank"]["rated_pressure_pa"], 200e5 + 95e3, 1e-15));
    // psig (1 psi = 6894.757 293 168 Pa, exact; see above).
    let mut c = base(&[]);
    c[10] = "2900psig";
    let j = json(&c);
    assert!(close(
        &j["tank"]["rated_pressure_pa"],
        2900.0 * 6_894.757_293_168 + atm,
        1e-12
    ));
    // The elastic expansion is reported per bar as given and per MPa.
    let j = json(&base(&["--elastic-expansion-per-bar", "1.2e-5"]));
    assert!(close(
        &j["tank"]["elastic_expansion_per_bar"],
        1.2e-5,
        1e-15
    ));
    assert!(close(
        &j["tank"]["elastic_expansion_per_mpa"],
        1.2e-4,
        1e-15
    ));
}

/// A 50 L oxygen cylinder rated 200 bar at 15 °C read at 250 bar and 15 °C
/// holds about 123 % of its rated content: flagged `over_fill` on every
/// path, with a line that says so; at its rated pressure it is not.
#[test]
fn over_fill_is_flagged_and_explained() {
    let args = |p: &'static str| {
        vec![
            "content",
            "--gas",
            "oxygen",
            "--capacity",
            "50L",
            "--pressure",
            p,
            "--temperature",
            "15C",
            "--rated-pressure",
            "200bar",
        ]
    };
    let j = json(&args("250bar"));
    for side in ["fixed", "float", "reference"] {
        let o = if side == "reference" {
            &j["reference"]
        } else {
            &j[side]
        };
        let flags = o["status"].as_array().unwrap();
        assert!(flags.iter().any(|f| f == "over_fill"), "{side}: {flags:?}");
        assert!(close(&o["fill_fraction"], 1.23, 0.01), "{side}");
    }
    // The rated pressure corrected to 15 °C is the rated pressure itself.
    assert!(close(&j["rated_pressure_at_temperature_pa"], 200e5, 1e-9));
    let w = j["warnings"].as_array().unwrap();
    assert!(w[0].as_str().unwrap().starts_with("OVER-FILL"), "{w:?}");
    let out = isochor(&args("250bar"));
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(
        text.contains("over_fill") && text.contains("OVER-FILL"),
        "{text}"
    );
    let j = json(&args("200bar"));
    assert_eq!(j["float"]["status"], serde_json::json!([]));
    assert_eq!(j["warnings"], serde_json::json!([]));
}

/// Carbon dioxide at 15 °C: its vapour pressure is 50.9 bar (CoolProp 8.0.0,
/// see tests/tests/device_models.rs). Just above it the vessel holds liquid
/// and vapour (`two_phase`); at 150 bar it is full of liquid
/// (`liquid_full`, not `two_phase`); neither shows a content or a Z, both
/// say to weigh the cylinder. A rated condition in the liquid is refused
/// with the reason and what to do.
#[test]
fn liquefied_gas_states_are_told_apart_and_explained() {
    let args = |p: &'static str, rated: &'static str| {
        vec![
            "content",
            "--gas",
            "carbon_dioxide",
            "--capacity",
            "10L",
            "--pressure",
            p,
            "--temperature",
            "15C",
            "--rated-pressure",
            rated,
        ]
    };
    let full = json(&args("150bar", "40bar"));
    let two = json(&args("51.5bar", "40bar"));
    for side in ["fixed", "float"] {
        let f = full[side]["status"].as_array().unwrap();
        assert!(f.iter().any(|x| x == "liquid_full"), "{f:?}");
        assert!(!f.iter().any(|x| x == "two_phase"), "{f:?}");
        let t = two[side]["status"].as_array().unwrap();
        assert!(t.iter().any(|x| x == "two_phase"), "{t:?}");
        assert!(!t.iter().any(|x| x == "liquid_full"), "{t:?}");
        for j in [&full, &two] {
            assert!(j[side]["z"].is_null());
            assert!(j[side]["mass_kg"].is_null());
        }
    }
    let w = full["warnings"][0].as_str().unwrap();
    assert!(w.starts_with("LIQUID-FULL") && w.contains("weigh"), "{w}");
    let w = two["warnings"][0].as_str().unwrap();
    assert!(
        w.starts_with("LIQUID IN THE VESSEL") && w.contains("Weigh"),
        "{w}"
    );
    assert!(full["caution"].as_str().unwrap().contains("Liquefied gas"));
    let out = isochor(&args("50bar", "60bar"));
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8(out.stderr).unwrap();
    for needle in [
        "rated condition",
        "liquid",
        "vapour pressure",
        "weigh the cylinder",
    ] {
        assert!(err.contains(needle), "missing {needle}: {err}");
    }
}

#[test]
fn text_output_carries_units_and_cautions() {
    let out = isochor(&base(&[]));
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    for needle in [
        "kg/m³",
        "mass",
        "settled pressure",
        "fill fraction",
        "CAUTION",
        "Asphyxiant",
    ] {
        assert!(text.contains(needle), "missing {needle}:\n{text}");
    }
    let out = isochor(&[
        "content",
        "--gas",
        "oxygen",
        "--capacity",
        "10L",
        "--pressure",
        "150bar",
        "--temperature",
        "20C",
        "--rated-pressure",
        "200bar",
    ]);
    assert!(
        String::from_utf8(out.stdout)
            .unwrap()
            .contains("oxygen-clean")
    );
}

#[test]
fn outside_envelope_is_reported_not_refused() {
    let j = json(&[
        "content",
        "--gas",
        "helium",
        "--capacity",
        "50L",
        "--pressure",
        "1100bar",
        "--temperature",
        "20C",
        "--rated-pressure",
        "300bar",
    ]);
    for side in ["fixed", "float"] {
        let flags = j[side]["status"].as_array().unwrap();
        assert!(
            flags.iter().any(|f| f == "pressure_outside_envelope"),
            "{side}: {flags:?}"
        );
    }
}

/// A sample outside the envelope (the 2000 bar, and a temperature
/// beyond +150 °C) is computed at the edge so nothing overflows, but the
/// content is withheld everywhere: `null` in JSON on all three sides (the
/// field names stay), "not valid" in the text with the reason. The sample is
/// reported as given. Inside the envelope, the edge itself has numbers.
#[test]
fn outside_envelope_content_is_withheld_not_clamped_into_a_number() {
    let content = [
        "density_kg_m3",
        "mass_kg",
        "amount_mol",
        "standard_volume_m3",
        "settled_pressure_pa",
        "fill_fraction",
    ];
    for (p, t, flag) in [
        ("2000bar", "15C", "pressure_outside_envelope"),
        ("200bar", "170C", "temperature_outside_envelope"),
    ] {
        let args = [
            "content",
            "--gas",
            "nitrogen",
            "--capacity",
            "50L",
            "--pressure",
            p,
            "--temperature",
            t,
            "--rated-pressure",
            "200bar",
        ];
        let j = json(&args);
        for side in ["fixed", "float", "reference"] {
            let o = &j[side];
            for k in content {
                assert!(o.get(k).is_some(), "{side}.{k} missing: field names stay");
                assert!(o[k].is_null(), "{p} {t}: {side}.{k} = {}", o[k]);
            }
            let flags = o["status"].as_array().unwrap();
            assert!(flags.iter().any(|f| f == flag), "{side}: {flags:?}");
        }
        assert!(j["sample"]["pressure_pa"].as_f64().unwrap() > 0.0);

        let out = isochor(&args);
        assert!(
            out.status.success(),
            "an out-of-envelope reading is reported, not refused"
        );
        let text = String::from_utf8(out.stdout).unwrap();
        let mass = text
            .lines()
            .find(|l| l.trim_start().starts_with("mass"))
            .unwrap();
        assert_eq!(mass.matches("not valid").count(), 3, "{mass}");
        assert!(text.contains("outside the operating envelope (0–1000 bar abs, -60 … +150 °C)"));
        assert!(text.contains("not shown as a number"));
        assert!(text.contains("CAUTION"));
    }
    // The edge itself is inside: numbers, no envelope flag (five times the
    // rated pressure is an over-fill, said so).
    let j = json(&[
        "content",
        "--gas",
        "nitrogen",
        "--capacity",
        "50L",
        "--pressure",
        "1000bar",
        "--temperature",
        "15C",
        "--rated-pressure",
        "200bar",
    ]);
    for side in ["fixed", "float"] {
        assert!(j[side]["mass_kg"].as_f64().unwrap() > 0.0);
        assert_eq!(
            j[side]["status"],
            serde_json::json!(["over_fill"]),
            "{side}"
        );
    }
}

#[test]
fn bad_input_gives_clear_message_and_nonzero_exit() {
    let cases: &[(&[&str], &str)] = &[
        (
            &[
                "content",
                "--gas",
                "nitrogen",
                "--capacity",
                "50",
                "--pressure",
                "200bar",
                "--temperature",
                "35C",
                "--rated-pressure",
                "200bar",
            ],
            "missing unit",
        ),
        (
            &[
                "content",
                "--gas",
                "nitrogen",
                "--capacity",
                "50L",
                "--pressure",
                "200bbar",
                "--temperature",
                "35C",
                "--rated-pressure",
                "200bar",
            ],
            "unknown pressure unit",
        ),
        (
            &[
                "content",
                "--gas",
                "kryptonite",
                "--capacity",
                "50L",
                "--pressure",
                "200bar",
                "--temperature",
                "35C",
                "--rated-pressure",
                "200bar",
            ],
            "unknown gas",
        ),
        (
            &[
                "content",
                "--gas",
                "nitrogen",
                "--capacity",
                "-5L",
                "--pressure",
                "200bar",
                "--temperature",
                "35C",
                "--rated-pressure",
                "200bar",
            ],
            "must be positive",
        ),
        (
            &[
                "content",
                "--gas",
                "nitrogen",
                "--capacity",
                "0.01L",
                "--pressure",
                "200bar",
                "--temperature",
                "35C",
                "--rated-pressure",
                "200bar",
            ],
            "water capacity",
        ),
        (
            &[
                "content",
                "--gas",
                "nitrogen",
                "--capacity",
                "50L",
                "--pressure",
                "NaNbar",
                "--temperature",
                "35C",
                "--rated-pressure",
                "200bar",
            ],
            "--pressure",
        ),
        (
            &[
                "content",
                "--gas",
                "nitrogen",
                "--capacity",
                "50L",
                "--pressure",
                "-3bar",
                "--temperature",
                "35C",
                "--rated-pressure",
                "200bar",
            ],
            "negative",
        ),
        (
            &[
                "content",
                "--gas",
                "nitrogen",
                "--capacity",
                "50L",
                "--pressure",
                "-3bar",
                "--gauge",
                "--temperature",
                "35C",
                "--rated-pressure",
                "200bar",
            ],
            "negative",
        ),
        (
            &[
                "content",
                "--gas",
                "nitrogen",
                "--capacity",
                "50L",
                "--pressure",
                "200bar",
                "--temperature",
                "-300C",
                "--rated-pressure",
                "200bar",
            ],
            "absolute zero",
        ),
        (
            &[
                "content",
                "--gas",
                "nitrogen",
                "--capacity",
                "50L",
                "--pressure",
                "200bar",
                "--temperature",
                "35C",
                "--rated-pressure",
                "2000bar",
            ],
            "rated pressure",
        ),
        (
            &[
                "content",
                "--gas",
                "nitrogen",
                "--capacity",
                "50L",
                "--pressure",
                "200bar",
                "--temperature",
                "35C",
                "--rated-pressure",
                "200bar",
                "--standard",
                "moon",
            ],
            "--standard",
        ),
        (
            &[
                "content",
                "--gas",
                "nitrogen",
                "--capacity",
                "50L",
                "--pressure",
                "200bar",
                "--temperature",
                "35C",
                "--rated-pressure",
                "200bar",
                "--reference-temperature",
                "300C",
            ],
            "--reference-temperature",
        ),
        (
            &[
                "content",
                "--gas",
                "nitrogen",
                "--capacity",
                "50L",
                "--pressure",
                "200bar",
                "--temperature",
                "35C",
                "--rated-pressure",
                "200bar",
                "--gauge",
                "--barometric",
                "5bar",
            ],
            "--barometric",
        ),
        (
            &[
                "content",
                "--gas",
                "nitrogen",
                "--capacity",
                "50L",
                "--pressure",
                "200bar",
                "--temperature",
                "35C",
                "--rated-pressure",
                "200bar",
                "--elastic-expansion-per-bar",
                "1",
            ],
            "elastic expansion",
        ),
        (
            &[
                "content",
                "--gas",
                "nitrogen",
                "--capacity",
                "50L",
                "--pressure",
                "200bar",
                "--temperature",
                "35C",
                "--rated-pressure",
                "200bar",
                "--format",
                "xml",
            ],
            "invalid value",
        ),
        (
            &[
                "content",
                "--gas",
                "nitrogen",
                "--capacity",
                "50L",
                "--pressure",
                "200bar",
                "--temperature",
                "35C",
            ],
            "--rated-pressure",
        ),
    ];
    for (args, needle) in cases {
        let out = isochor(args);
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(!out.status.success(), "accepted: {args:?}");
        assert_eq!(out.status.code(), Some(2), "{args:?}: {err}");
        assert!(
            err.contains(needle),
            "{args:?}: expected '{needle}' in: {err}"
        );
        assert!(out.stdout.is_empty(), "{args:?} printed a result");
    }
}
