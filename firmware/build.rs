//! Picks the memory map of the board that matches the build target and puts
//! it where cortex-m-rt's `link.x` looks for `memory.x`.

use std::{env, fs, path::PathBuf};

/// The size gate of the Cortex-M0 image (`ISOCHOR_MEMORY=gate`): flash
/// bytes, RAM bytes, and the part of that RAM kept free for the stack. The
/// image is linked against this map, so a change that grows it past the
/// gate fails to link. The goal is 32 KiB flash and 6 KiB RAM
/// (`ISOCHOR_MEMORY=goal`); until the image reaches it, the gate stands at
/// the figures reached (README, "Footprint"), to be lowered as it shrinks.
const GATE: (u32, u32, u32) = (85 * 1024, 14 * 1024, STACK_RESERVE);
/// The goal's map.
const GOAL: (u32, u32, u32) = (32 * 1024, 6 * 1024, STACK_RESERVE);
/// Stack kept free beside the statics: the firmware's measured stack peak
/// (`isochor budget`, `stack_bytes`: 6,792 bytes, the larger of a run
/// that writes its configuration in signed records and a start with the
/// configuration stored) plus 1.5 KiB of margin.
const STACK_RESERVE: u32 = 8_328;

fn gate_map((flash, ram, stack): (u32, u32, u32)) -> String {
    format!(
        "MEMORY\n{{\n  FLASH : ORIGIN = 0x00000000, LENGTH = {flash}\n  RAM : ORIGIN = 0x20000000, LENGTH = {ram}\n}}\n\
         ASSERT(_stack_start - _stack_end >= {stack}, \"isochor size gate: the statics leave less than {stack} bytes of stack\");\n"
    )
}

fn main() {
    let target = env::var("TARGET").unwrap_or_default();
    // `ISOCHOR_MEMORY=mps2`: the `mps2` map for Cortex-M0 code too, to run
    // measurement programs whose float runs need more than 16 KiB of RAM
    // on QEMU's `mps2-an385` (its Cortex-M3 executes Cortex-M0 code
    // instruction for instruction).
    let choice = env::var("ISOCHOR_MEMORY").unwrap_or_default();
    let mps2 = choice == "mps2";
    let gate = match choice.as_str() {
        "gate" => Some(GATE),
        "goal" => Some(GOAL),
        _ => None,
    };
    let gated;
    let memory = if let (Some(g), true) = (gate, target.starts_with("thumbv6m")) {
        // The size gate (see [`GATE`]): the Cortex-M0 image against a
        // smaller part's map.
        gated = gate_map(g);
        gated.as_str()
    } else if target.starts_with("thumbv6m") && !mps2 {
        // QEMU `microbit`: nRF51822, 256 KiB flash at 0, 16 KiB RAM. The
        // last 19 KiB of flash hold the store (0x3B400) and the
        // provisioning page (0x3FC00): code gets the rest.
        "MEMORY\n{\n  FLASH : ORIGIN = 0x00000000, LENGTH = 0x3B400\n  RAM : ORIGIN = 0x20000000, LENGTH = 16K\n}\n"
    } else {
        // QEMU `mps2-an386`: 4 MiB SSRAM1 at 0 for code, 4 MiB SSRAM2/3 for
        // data (the store and provisioning live in PSRAM at 0x21000000).
        "MEMORY\n{\n  FLASH : ORIGIN = 0x00000000, LENGTH = 4M\n  RAM : ORIGIN = 0x20000000, LENGTH = 4M\n}\n"
    };
    let out = PathBuf::from(env::var_os("OUT_DIR").expect("OUT_DIR set by cargo"));
    fs::write(out.join("memory.x"), memory).expect("write memory.x");

    println!("cargo:rustc-check-cfg=cfg(isochor_mps2)");
    if mps2 || !target.starts_with("thumbv6m") {
        println!("cargo:rustc-cfg=isochor_mps2");
    }
    println!("cargo:rustc-link-search={}", out.display());
    println!("cargo:rerun-if-changed=build.rs");
    println!("cargo:rerun-if-env-changed=ISOCHOR_MEMORY");
}
