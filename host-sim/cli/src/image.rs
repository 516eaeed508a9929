//! What a firmware image holds, read from its ELF file: flash and static
//! RAM (section headers), flash by module and the largest statics (the
//! symbol table, with Rust names demangled), and the panic paths linked.
//!
//! Flash is everything loaded from the image (vector table, code,
//! read-only data, the initial values of `.data`); static RAM is `.data`,
//! `.bss` and `.uninit`. A module is a core module (`core::track`), a
//! firmware module (`firmware::run`), a dependency crate (`sha2`), the
//! Rust library (`rust::core`) or the runtime (`runtime`: compiler
//! built-ins such as the software division, and cortex-m-rt); flash no
//! symbol covers (alignment, data without a symbol) is `unattributed`, so
//! the modules add up to the flash figure.

use std::collections::BTreeMap;
use std::path::Path;

use object::{Object, ObjectSection, ObjectSymbol, SectionKind, SymbolKind};

use crate::Error;

/// Sizes of an image.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, serde::Serialize)]
pub struct ImageSize {
    /// Bytes of flash.
    pub flash_bytes: u64,
    /// Bytes of RAM taken by statics.
    pub static_ram_bytes: u64,
}

/// One symbol of an image.
#[derive(Clone, Debug, PartialEq, Eq, serde::Serialize)]
pub struct Symbol {
    /// Its Rust name (demangled, without the hash).
    pub name: String,
    /// Its module (see the module documentation).
    pub module: String,
    /// Bytes.
    pub bytes: u64,
}

/// Everything `isochor budget` reads from an image.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Image {
    /// Flash and static RAM.
    pub size: ImageSize,
    /// Flash by module, bytes (adds up to `size.flash_bytes`).
    pub flash_by_module: BTreeMap<String, u64>,
    /// Statics, largest first.
    pub statics: Vec<Symbol>,
    /// Names of the linked functions of the panic machinery
    /// (`core::panicking::*`, `core::option::unwrap_failed`, slice index
    /// failures, ...).
    pub panic_symbols: Vec<String>,
}

fn file_error(elf: &Path, reason: impl ToString) -> Error {
    Error::File {
        path: elf.display().to_string(),
        reason: reason.to_string(),
    }
}

/// The module of a Rust symbol name (demangled, without hash).
pub fn module_of(name: &str) -> String {
    // `<T as Trait>::f` and `<T>::f` belong to T's path.
    let mut path = name.trim_start_matches('<');
    path = path.trim_start_matches("&mut ").trim_start_matches('&');
    path = path.trim_start_matches("mut ").trim_start_matches('[');
    let end = path
        .find(|c: char| !(c.is_alphanumeric() || c == '_' || c == ':'))
        .unwrap_or(path.len());
    let segs: Vec<&str> = path[..end].split("::").filter(|s| !s.is_empty()).collect();
    match segs.as_slice() {
        ["isochor_core", m, ..] => format!("core::{m}"),
        ["isochor_firmware", m, ..] => format!("firmware::{m}"),
        ["isochor_firmware"] | ["budget", ..] | ["isochor_firmware_main", ..] => "firmware".into(),
        ["core", ..] | ["alloc", ..] => "rust::core".into(),
        ["compiler_builtins", ..] | ["cortex_m_rt", ..] => "runtime".into(),
        [krate, ..] if krate.starts_with("__") || krate.starts_with("memc") => "runtime".into(),
        [
            "memset"
            | "memmove"
            | "memcmp"
            | "bcmp"
            | "Reset"
            | "HardFault"
            | "DefaultHandler"
            | "DefaultPreInit"
            | "HardFaultTrampoline"
            | "main"
            | "_start",
        ] => "runtime".into(),
        [krate, ..] => krate.replace('_', "-"),
        [] => "unattributed".into(),
    }
}

fn is_panic_machinery(name: &str) -> bool {
    name.starts_with("core::panicking::")
        || name.starts_with("core::option::unwrap_failed")
        || name.starts_with("core::option::expect_failed")
        || name.starts_with("core::result::unwrap_failed")
        || name.starts_with("core::slice::index::")
        || name.starts_with("core::str::slice_error_fail")
        || name.starts_with("core::cell::panic_already")
        || name.contains("panic_bounds_check")
        || name.starts_with("core::fmt::")
}

/// Reads an image.
pub fn read(elf: &Path) -> Result<Image, Error> {
    let data = std::fs::read(elf).map_err(|e| file_error(elf, e))?;
    let file = object::File::parse(&*data).map_err(|e| file_error(elf, e))?;
    let mut image = Image::default();
    // Sections: flash and RAM.
    let mut flash_sections = Vec::new();
    let mut ram_sections = Vec::new();
    for s in file.sections() {
        let name = s.name().unwrap_or("");
        let size = s.size();
        if size == 0 || s.address() == 0 && name.is_empty() {
            continue;
        }
        match s.kind() {
            SectionKind::Data if name == ".data" => {
                image.size.flash_bytes += size;
                image.size.static_ram_bytes += size;
                ram_sections.push(s.index());
            }
            SectionKind::UninitializedData | SectionKind::UninitializedTls => {
                image.size.static_ram_bytes += size;
                ram_sections.push(s.index());
            }
            SectionKind::Text | SectionKind::ReadOnlyData | SectionKind::ReadOnlyString => {
                image.size.flash_bytes += size;
                flash_sections.push(s.index());
            }
            SectionKind::Data | SectionKind::ReadOnlyDataWithRel => {
                // Loaded sections of other kinds (the vector table).
                image.size.flash_bytes += size;
                flash_sections.push(s.index());
            }
            _ if name == ".uninit" || name == ".bss" => {
                image.size.static_ram_bytes += size;
                ram_sections.push(s.index());
            }
            _ => {}
        }
    }
    // Symbols: flash by module, statics, panic paths.
    let mut attributed = 0u64;
    let mut seen = std::collections::HashSet::new();
    for sym in file.symbols() {
        let Some(section) = sym.section_index() else {
            continue;
        };
        let size = sym.size();
        if size == 0 || !seen.insert((sym.address() & !1, size)) {
            continue;
        }
        let raw = sym.name().unwrap_or("");
        let name = format!("{:#}", rustc_demangle::demangle(raw));
        if flash_sections.contains(&section) {
            let module = module_of(&name);
            *image.flash_by_module.entry(module).or_default() += size;
            attributed += size;
            if sym.kind() == SymbolKind::Text && is_panic_machinery(&name) {
                image.panic_symbols.push(name);
            }
        } else if ram_sections.contains(&section) {
            image.statics.push(Symbol {
                module: module_of(&name),
                name,
                bytes: size,
            });
        }
    }
    let rest = image.size.flash_bytes.saturating_sub(attributed);
    if rest > 0 {
        *image
            .flash_by_module
            .entry("unattributed".into())
            .or_default() += rest;
    }
    image
        .statics
        .sort_by(|a, b| b.bytes.cmp(&a.bytes).then(a.name.cmp(&b.name)));
    image.panic_symbols.sort();
    image.panic_symbols.dedup();
    Ok(image)
}

/// Reads the sizes of an image.
pub fn image_size(elf: &Path) -> Result<ImageSize, Error> {
    Ok(read(elf)?.size)
}

#[cfg(test)]
mod tests {
    use super::module_of;

    #[test]
    fn modules_of_rust_names() {
        for (name, module) in [
            (
                "isochor_core::track::fixed::Tracker<M>::update",
                "core::track",
            ),
            (
                "<isochor_core::link::FromDevice as isochor_core::link::Wire>::encode_body",
                "core::link",
            ),
            ("<&T as core::fmt::Debug>::fmt", "T"),
            ("sha2::sha256::soft::compress", "sha2"),
            ("core::panicking::panic", "rust::core"),
            (
                "compiler_builtins::int::specialized_div_rem::u64_div_rem",
                "runtime",
            ),
            ("__aeabi_uldivmod", "runtime"),
            ("memcpy", "runtime"),
            ("isochor_firmware::run::run", "firmware::run"),
            ("postcard::ser::to_slice", "postcard"),
        ] {
            assert_eq!(module_of(name), module, "{name}");
        }
    }
}
