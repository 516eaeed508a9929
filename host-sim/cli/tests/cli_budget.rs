//! `isochor budget` end to end: builds the firmware and the budget program,
//! runs them in QEMU and checks that every figure of the JSON interface is
//! present, positive and consistent (no figure is compared with a fixed
//! value: they are measurements, quoted in docs/budget.md).
//!
//! The end-to-end test needs `qemu-system-arm` and the Cortex-M targets
//! (`tests/setup.sh` installs them). When one is missing it shows as
//! *ignored* in cargo's summary with the reason and the command that fixes
//! it; under the environment variable `CI` it fails instead. A custom
//! harness (`libtest-mimic`, `harness = false`) gives the run-time ignore.

use libtest_mimic::{Completion, Trial};
use serde_json::Value;
use std::process::{Command, ExitCode, Output};

fn main() -> ExitCode {
    let args = libtest_mimic::Arguments::from_args();
    let trials = vec![
        needs_qemu(
            "budget_reports_every_figure_positive_and_consistent",
            budget_reports_every_figure_positive_and_consistent,
        ),
        plain(
            "a_folder_without_firmware_is_bad_input",
            a_folder_without_firmware_is_bad_input,
        ),
        plain(
            "the_budget_programs_lines_are_read",
            the_budget_programs_lines_are_read,
        ),
    ];
    libtest_mimic::run(&args, trials).exit_code()
}

/// A test that runs everywhere; a panic fails it.
fn plain(name: &str, test: fn()) -> Trial {
    Trial::test(name, move || {
        test();
        Ok(())
    })
}

/// A test that builds the firmware and runs it in QEMU: ignored with the
/// reason when a tool is missing (a failure under `CI`); a panic fails it.
fn needs_qemu(name: &str, test: fn()) -> Trial {
    Trial::ignorable_test(name, move || {
        if let Some(why) = isochor_sim::firmware::missing_tools() {
            if std::env::var_os("CI").is_some() {
                return Err(format!("{why} (under CI a missing tool is a failure)").into());
            }
            return Ok(Completion::ignored_with(why));
        }
        test();
        Ok(Completion::Completed)
    })
}

fn isochor(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_isochor"))
        .args(args)
        .output()
        .expect("run isochor")
}

fn u(v: &Value, key: &str) -> u64 {
    v[key]
        .as_u64()
        .unwrap_or_else(|| panic!("{key} missing or not an integer in {v}"))
}

fn f(v: &Value, key: &str) -> f64 {
    v[key]
        .as_f64()
        .unwrap_or_else(|| panic!("{key} missing or not a number in {v}"))
}

fn budget_reports_every_figure_positive_and_consistent() {
    let out = isochor(&["budget", "--format", "json"]);
    assert!(
        out.status.success(),
        "isochor budget failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: Value = serde_json::from_slice(&out.stdout).expect("JSON");

    // Instructions per full estimate on the Cortex-M0: the fixed path is
    // the cheapest, f64 software float the dearest; a mean never exceeds
    // the largest single sample.
    let fixed = f(&v, "instructions_fixed");
    let f32_ = f(&v, "instructions_f32");
    let f64_ = f(&v, "instructions_f64");
    assert!(fixed > 0.0, "{v}");
    assert!(f64_ > f32_ && f32_ > fixed, "{v}");
    assert!(u(&v, "instructions_fixed_max") as f64 >= fixed, "{v}");
    assert!(u(&v, "instructions_f32_max") as f64 >= f32_, "{v}");
    assert!(u(&v, "instructions_f64_max") as f64 >= f64_, "{v}");
    assert!(
        (f(&v, "ratio_f64") - f64_ / fixed).abs() < 1e-9 * f64_,
        "{v}"
    );
    assert!(
        (f(&v, "ratio_f32") - f32_ / fixed).abs() < 1e-9 * f32_,
        "{v}"
    );
    assert!(u(&v, "stack_bytes_f32") > 0 && u(&v, "stack_bytes_f64") > 0);

    // One entry per firmware build, every size positive.
    let builds = v["builds"].as_array().expect("builds");
    let targets: Vec<&str> = builds
        .iter()
        .map(|b| b["target"].as_str().unwrap())
        .collect();
    assert_eq!(
        targets,
        [
            "thumbv6m-none-eabi",
            "thumbv7em-none-eabihf",
            "thumbv6m-none-eabi",
            "thumbv6m-none-eabi",
            "thumbv6m-none-eabi",
            "thumbv6m-none-eabi",
            "thumbv6m-none-eabi"
        ]
    );
    // Then the Cortex-M0 image without each optional part (features
    // `modbus`, `uncertainty`, `signed-config`, `tracking`) and with all of
    // them off:
    // each smaller than the standard image, the lean one smallest.
    let names: Vec<&str> = builds.iter().map(|b| b["name"].as_str().unwrap()).collect();
    assert_eq!(
        names[2..],
        [
            "microbit-no-modbus",
            "microbit-no-uncertainty",
            "microbit-no-signed-config",
            "microbit-no-tracking",
            "microbit-lean"
        ]
    );
    for b in &builds[2..] {
        assert!(u(b, "flash_bytes") < u(&builds[0], "flash_bytes"), "{b}");
        assert!(u(&builds[6], "flash_bytes") <= u(b, "flash_bytes"), "{b}");
    }
    assert_eq!(builds[0]["gas"].as_str(), Some("nitrogen"));
    for b in builds {
        let flash = u(b, "flash_bytes");
        let ram = u(b, "static_ram_bytes");
        let stack = u(b, "stack_bytes");
        assert!(flash > 0 && ram > 0 && stack > 0, "{b}");
        assert_eq!(u(b, "ram_bytes"), ram + stack, "{b}");
        assert!(u(b, "estimate_stack_bytes") > 0, "{b}");
        // Flash by module adds up to the flash figure, and the image's
        // own code is among the modules.
        let modules = b["flash_by_module"].as_object().expect("flash_by_module");
        let sum: u64 = modules.values().map(|x| x.as_u64().unwrap()).sum();
        assert_eq!(sum, flash, "{b}");
        assert!(
            modules.contains_key("core::app") && modules.contains_key("runtime"),
            "{b}"
        );
        let statics = b["largest_statics"].as_array().expect("largest_statics");
        assert!(!statics.is_empty(), "{b}");
        assert!(b["panic_symbols"].is_array(), "{b}");
    }
    assert_eq!(v["flash_by_module"], builds[0]["flash_by_module"]);
    // The Cortex-M0 image links no panic path (the footprint goal: bounds
    // checks, divisions and unwraps are all proven or checked by hand).
    assert_eq!(
        builds[0]["panic_symbols"],
        serde_json::json!([]),
        "panic paths in the Cortex-M0 image"
    );

    // Every stage of the chain has a figure; the estimate's stages add up
    // to the estimate within the cost of the marks (a few tens of
    // instructions each).
    let stages = v["instructions_by_stage"]
        .as_object()
        .expect("instructions_by_stage");
    for name in [
        "sensor",
        "plausibility",
        "model",
        "content",
        "settle",
        "track",
        "uncertainty",
        "alarms",
        "link",
    ] {
        assert!(stages[name].as_f64().is_some(), "{name} missing in {v}");
    }
    let estimate: f64 = stages
        .iter()
        .filter(|(k, _)| k.as_str() != "link")
        .map(|(_, x)| x.as_f64().unwrap())
        .sum();
    assert!(
        (estimate - fixed).abs() < 0.1 * fixed,
        "stages {estimate} vs estimate {fixed}"
    );
    assert!(v["instructions_by_stage_largest_sample"].is_object());

    // The human table: the goals beside the figures, and the cautions.
    let out = isochor(&["budget"]);
    assert!(out.status.success());
    let text = String::from_utf8_lossy(&out.stdout);
    for needle in [
        "≤ 2000",
        "≥ 20× fixed",
        "≥ 5× fixed",
        "32768",
        "6144",
        "CAUTION",
    ] {
        assert!(text.contains(needle), "{needle} missing in:\n{text}");
    }
}

fn a_folder_without_firmware_is_bad_input() {
    let out = isochor(&["budget", "--firmware", "/nonexistent/isochor-firmware"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("not a firmware folder"));
}

fn the_budget_programs_lines_are_read() {
    let text = "scale_check_2=2.00\ninstructions_fixed=8540.40 max=81520\nstack_fixed=16752\n\
                instructions_f32=218559.33 max=476000\nstack_f32=6404\n\
                instructions_f64=578383.66 max=1153520\nstack_f64=10060\n";
    let o = isochor_sim::budget::parse_program_output(text);
    assert_eq!(o.fixed, Some((8540.40, 81520)));
    assert_eq!(o.f32, Some((218559.33, 476000)));
    assert_eq!(o.f64, Some((578383.66, 1153520)));
    assert_eq!(o.stack, [Some(16752), Some(6404), Some(10060)]);
    assert_eq!(o.scale_check, Some(2.0));
    let o = isochor_sim::budget::parse_program_output(
        "stage_sensor=612.50 worst=640\nstage_link=900.00 worst=920\nmark_cost=48.00\n",
    );
    assert_eq!(o.stages["sensor"], (612.5, 640));
    assert_eq!(o.stages["link"], (900.0, 920));
    assert_eq!(o.stages.len(), 2);
    // A line without its maximum is not a figure.
    assert_eq!(
        isochor_sim::budget::parse_program_output("instructions_fixed=1.0").fixed,
        None
    );
}
