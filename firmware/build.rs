//! Picks the memory map of the board that matches the build target and puts
//! it where cortex-m-rt's `link.x` looks for `memory.x`.

use std::{env, fs, path::PathBuf};

fn main() {
    let target = env::var("TARGET").unwrap_or_default();
    // `ISOCHOR_MEMORY=mps2`: the `mps2` map for Cortex-M0 code too, to run
    // measurement programs whose float runs need more than 16 KiB of RAM
    // on QEMU's `mps2-an385` (its Cortex-M3 executes Cortex-M0 code
    // instruction for instruction).
    let mps2 = env::var("ISOCHOR_MEMORY").is_ok_and(|m| m == "mps2");
    let memory = if target.starts_with("thumbv6m") && !mps2 {
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
