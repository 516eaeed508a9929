//! The core's layer order: no module imports from a module above it.
//!
//! Each top-level module of `src/` has a place in [`LAYERS`], lowest first.
//! A module may name (`crate::x`, `crate::{x, …}`, or an item the crate root
//! re-exports) only modules placed before it. Comments (doc links included)
//! are not imports and are skipped. A new module must be given a place here;
//! DEVELOPERS.md ("Layers of the core") shows the same order.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// Top-level modules of the core, lowest layer first.
const LAYERS: &[&str] = &[
    // Numbers, units and checks every layer uses.
    "error",
    "fx",
    "real",
    "constants",
    "checksum",
    "encode",
    "time",
    "probe",
    "fxmath",
    "curve",
    "envelope",
    "status",
    // The gas and the vessel.
    "gas",
    "setup",
    "model",
    "content",
    // Over time.
    "alarm",
    "uncertainty",
    "track",
    // Raw codes to readings.
    "sensor",
    // The wire and what rests on it.
    "auth",
    "link",
    "store",
    "field",
    // One validated configuration, and the application that runs it.
    "prepared",
    "app",
];

/// Items the crate root re-exports, with the module they come from
/// (`pub use` in `src/lib.rs`).
fn root_items() -> BTreeMap<String, String> {
    let lib = std::fs::read_to_string(src().join("lib.rs")).unwrap();
    let mut items = BTreeMap::new();
    // One statement at a time: a `pub use` may span lines.
    for statement in strip_comments(&lib).split(';') {
        let statement = statement.split_whitespace().collect::<Vec<_>>().join(" ");
        let Some(rest) = statement.rsplit_once("pub use ").map(|(_, r)| r) else {
            continue;
        };
        let (module, names) = match rest.split_once("::") {
            Some((m, n)) => (m.to_string(), n),
            None => continue,
        };
        for name in names
            .trim_matches(|c| c == '{' || c == '}')
            .split(',')
            .map(str::trim)
            .filter(|n| !n.is_empty())
        {
            items.insert(name.to_string(), module.clone());
        }
    }
    items
}

fn src() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("src")
}

/// The text without `//` and `/* */` comments (string literals in the core
/// hold no comment markers that matter here).
fn strip_comments(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    let mut rest = text;
    while !rest.is_empty() {
        if let Some(r) = rest.strip_prefix("//") {
            rest = r.find('\n').map_or("", |i| &r[i..]);
        } else if let Some(r) = rest.strip_prefix("/*") {
            rest = r.find("*/").map_or("", |i| &r[i + 2..]);
        } else {
            let c = rest.chars().next().unwrap();
            out.push(c);
            rest = &rest[c.len_utf8()..];
        }
    }
    out
}

/// The first path segment of every `crate::` path in the code, groups
/// (`crate::{a, b::c}`) included.
fn crate_names(code: &str) -> Vec<String> {
    let ident = |s: &str| -> String {
        s.chars()
            .take_while(|c| c.is_ascii_alphanumeric() || *c == '_')
            .collect()
    };
    let mut names = Vec::new();
    let mut rest = code;
    while let Some(i) = rest.find("crate::") {
        let before = rest[..i].chars().next_back();
        rest = &rest[i + "crate::".len()..];
        if before.is_some_and(|c| c.is_ascii_alphanumeric() || c == '_' || c == '$') {
            continue; // `$crate::`, `my_crate::`
        }
        if let Some(group) = rest.strip_prefix('{') {
            // Top-level items of the group: split at commas outside braces.
            let mut depth = 0;
            let mut start = 0;
            for (j, c) in group.char_indices() {
                match c {
                    '{' => depth += 1,
                    '}' if depth == 0 => {
                        names.push(ident(group[start..j].trim()));
                        break;
                    }
                    '}' => depth -= 1,
                    ',' if depth == 0 => {
                        names.push(ident(group[start..j].trim()));
                        start = j + 1;
                    }
                    _ => {}
                }
            }
        } else {
            names.push(ident(rest));
        }
    }
    names.retain(|n| !n.is_empty());
    names
}

fn rust_files(dir: &Path, out: &mut Vec<PathBuf>) {
    for entry in std::fs::read_dir(dir).unwrap() {
        let path = entry.unwrap().path();
        if path.is_dir() {
            rust_files(&path, out);
        } else if path.extension().is_some_and(|e| e == "rs") {
            out.push(path);
        }
    }
}

/// The top-level module a source file belongs to.
fn module_of(path: &Path) -> String {
    let rel = path.strip_prefix(src()).unwrap();
    let first = rel
        .components()
        .next()
        .unwrap()
        .as_os_str()
        .to_string_lossy();
    first.trim_end_matches(".rs").to_string()
}

#[test]
fn no_module_imports_from_a_module_above_it() {
    let place: BTreeMap<&str, usize> = LAYERS.iter().enumerate().map(|(i, m)| (*m, i)).collect();
    let roots = root_items();
    let mut files = Vec::new();
    rust_files(&src(), &mut files);
    files.sort();
    let mut upward = Vec::new();
    let mut unplaced = Vec::new();
    for file in &files {
        let module = module_of(file);
        if module == "lib" {
            continue;
        }
        let Some(&own) = place.get(module.as_str()) else {
            unplaced.push(module);
            continue;
        };
        let code = strip_comments(&std::fs::read_to_string(file).unwrap());
        for name in crate_names(&code) {
            let target = if place.contains_key(name.as_str()) {
                name.clone()
            } else if let Some(m) = roots.get(&name) {
                m.clone()
            } else {
                // A crate-root item that is neither a module nor a
                // re-export (a macro, `fixed`): no layer.
                continue;
            };
            if target == module {
                continue;
            }
            if place[target.as_str()] > own {
                upward.push(format!(
                    "{} ({module}) imports crate::{name} ({target}), a layer above it",
                    file.strip_prefix(src()).unwrap().display()
                ));
            }
        }
    }
    unplaced.sort();
    unplaced.dedup();
    upward.dedup();
    assert!(
        unplaced.is_empty(),
        "modules without a place in LAYERS: {unplaced:?}"
    );
    assert!(upward.is_empty(), "upward imports:\n{}", upward.join("\n"));
}

#[test]
fn every_layer_is_a_module_of_the_core() {
    for m in LAYERS {
        let file = src().join(format!("{m}.rs"));
        let dir = src().join(m).join("mod.rs");
        assert!(
            file.exists() || dir.exists(),
            "LAYERS names {m}, not a module"
        );
    }
}

#[test]
fn the_scanner_sees_every_form_of_import() {
    let code = strip_comments(
        "use crate::{fx, link::{A, B}, Status};\n// crate::app in a comment\n\
         let x = crate::track::fixed::Thing; /* crate::prepared */ $crate::alarm",
    );
    assert_eq!(crate_names(&code), ["fx", "link", "Status", "track"]);
}
