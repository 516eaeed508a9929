//! Picks the memory map of the board that matches the build target and puts
//! it where cortex-m-rt's `link.x` looks for `memory.x`; writes the gas of a
//! single-gas build (`ISOCHOR_GAS=<name>`, e.g. `nitrogen`; unset or `all`:
//! every built-in table).

use std::{env, fs, path::PathBuf};

/// Gas names (as `isochor_core::Gas::name` spells them) and their variants.
const GASES: &[(&str, &str)] = &[
    ("nitrogen", "Nitrogen"),
    ("oxygen", "Oxygen"),
    ("argon", "Argon"),
    ("helium", "Helium"),
    ("hydrogen", "Hydrogen"),
    ("methane", "Methane"),
    ("air", "Air"),
    ("carbon dioxide", "CarbonDioxide"),
    ("carbon-dioxide", "CarbonDioxide"),
    ("neon", "Neon"),
    ("krypton", "Krypton"),
    ("xenon", "Xenon"),
    ("ethane", "Ethane"),
    ("propane", "Propane"),
];

fn main() {
    let target = env::var("TARGET").unwrap_or_default();
    // `ISOCHOR_MEMORY=mps2`: the `mps2` map for Cortex-M0 code too, to run
    // measurement programs whose float runs need more than 16 KiB of RAM
    // on QEMU's `mps2-an385` (its Cortex-M3 executes Cortex-M0 code
    // instruction for instruction).
    let mps2 = env::var("ISOCHOR_MEMORY").is_ok_and(|m| m == "mps2");
    let memory = if target.starts_with("thumbv6m") && !mps2 {
        // QEMU `microbit`: nRF51822, 256 KiB flash at 0, 16 KiB RAM. The
        // last 21 KiB of flash hold the store (0x3AC00) and the
        // provisioning page (0x3FC00): code gets the rest.
        "MEMORY\n{\n  FLASH : ORIGIN = 0x00000000, LENGTH = 0x3AC00\n  RAM : ORIGIN = 0x20000000, LENGTH = 16K\n}\n"
    } else {
        // QEMU `mps2-an386`: 4 MiB SSRAM1 at 0 for code, 4 MiB SSRAM2/3 for
        // data (the store and provisioning live in PSRAM at 0x21000000).
        "MEMORY\n{\n  FLASH : ORIGIN = 0x00000000, LENGTH = 4M\n  RAM : ORIGIN = 0x20000000, LENGTH = 4M\n}\n"
    };
    let out = PathBuf::from(env::var_os("OUT_DIR").expect("OUT_DIR set by cargo"));
    fs::write(out.join("memory.x"), memory).expect("write memory.x");

    let gas = env::var("ISOCHOR_GAS").unwrap_or_default().to_lowercase();
    let only = if gas.is_empty() || gas == "all" {
        "None".to_string()
    } else {
        match GASES.iter().find(|(n, _)| *n == gas) {
            Some((_, v)) => format!("Some(isochor_core::Gas::{v})"),
            None => panic!("ISOCHOR_GAS={gas}: not a gas of the built-in tables"),
        }
    };
    fs::write(
        out.join("only_gas.rs"),
        format!("/// The only built-in gas of this build (`None`: all).\npub const ONLY_GAS: Option<isochor_core::Gas> = {only};\n"),
    )
    .expect("write only_gas.rs");
    println!("cargo:rustc-check-cfg=cfg(isochor_mps2)");
    if mps2 || !target.starts_with("thumbv6m") {
        println!("cargo:rustc-cfg=isochor_mps2");
    }
    println!("cargo:rustc-link-search={}", out.display());
    println!("cargo:rerun-if-changed=build.rs");
    println!("cargo:rerun-if-env-changed=ISOCHOR_GAS");
    println!("cargo:rerun-if-env-changed=ISOCHOR_MEMORY");
}
