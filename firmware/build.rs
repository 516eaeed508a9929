//! Picks the memory map of the board that matches the build target and puts
//! it where cortex-m-rt's `link.x` looks for `memory.x`.

use std::{env, fs, path::PathBuf};

fn main() {
    let target = env::var("TARGET").unwrap_or_default();
    let memory = if target.starts_with("thumbv6m") {
        // QEMU `microbit`: nRF51822, 256 KiB flash at 0, 16 KiB RAM.
        "MEMORY\n{\n  FLASH : ORIGIN = 0x00000000, LENGTH = 256K\n  RAM : ORIGIN = 0x20000000, LENGTH = 16K\n}\n"
    } else {
        // QEMU `mps2-an386`: 4 MiB SSRAM1 at 0 for code, 4 MiB SSRAM2/3 for data.
        "MEMORY\n{\n  FLASH : ORIGIN = 0x00000000, LENGTH = 4M\n  RAM : ORIGIN = 0x20000000, LENGTH = 4M\n}\n"
    };
    let out = PathBuf::from(env::var_os("OUT_DIR").expect("OUT_DIR set by cargo"));
    fs::write(out.join("memory.x"), memory).expect("write memory.x");
    println!("cargo:rustc-link-search={}", out.display());
    println!("cargo:rerun-if-changed=build.rs");
}
