//! `--gas` and `--gas-file`: the gas or mixture a command is about.
//!
//! A composition file is TOML with a `[composition]` table of component
//! names and mole fractions (numbers, or strings with `%`), and optionally a
//! `name` for people:
//!
//! ```toml
//! name = "pipeline gas, winter"
//! [composition]
//! methane = "91.2%"
//! ethane = "4.5%"
//! propane = 0.012
//! ```
//!
//! The rules of `isochor_eos::composition` apply (sum within 1e-6 of one,
//! then normalised; unknown components and negative fractions refused).

use crate::Error;
use clap::Args;
use isochor_eos::composition::{Composition, GasSpec};
use std::collections::BTreeMap;

/// The gas options shared by `content`, `props` and `model`.
#[derive(Clone, Debug, Default, Args)]
pub struct GasArgs {
    /// Gas name or formula (nitrogen, oxygen, argon, helium, hydrogen, methane,
    /// air, carbon_dioxide, neon, krypton, xenon, ethane, propane), or a
    /// mixture as mole fractions: argon=82%,carbon_dioxide=18% (see
    /// docs/mixtures.md).
    #[arg(long, required_unless_present = "gas_file", allow_hyphen_values = true)]
    pub gas: Option<String>,
    /// A composition file (TOML: a `[composition]` table of name = fraction).
    #[arg(long, conflicts_with = "gas")]
    pub gas_file: Option<String>,
}

impl GasArgs {
    /// The gas or mixture named.
    pub fn spec(&self) -> Result<GasSpec, Error> {
        match (&self.gas, &self.gas_file) {
            (Some(g), _) => parse(g),
            (None, Some(path)) => read_file(path),
            (None, None) => Err(Error::Invalid("--gas or --gas-file is needed".into())),
        }
    }
}

/// Reads `--gas`: a gas name or a composition.
pub fn parse(text: &str) -> Result<GasSpec, Error> {
    GasSpec::parse(text).map_err(|e| Error::Quantity {
        what: "--gas",
        input: text.to_string(),
        reason: e.to_string(),
    })
}

/// Reads a composition file.
pub fn read_file(path: &str) -> Result<GasSpec, Error> {
    let text = std::fs::read_to_string(path).map_err(|e| Error::File {
        path: path.to_string(),
        reason: e.to_string(),
    })?;
    parse_file(&text).map_err(|reason| Error::Malformed {
        what: path.to_string(),
        line: None,
        reason,
    })
}

/// The composition of a composition file's text.
pub fn parse_file(text: &str) -> Result<GasSpec, String> {
    #[derive(serde::Deserialize)]
    #[serde(deny_unknown_fields)]
    struct File {
        #[allow(dead_code)]
        name: Option<String>,
        composition: BTreeMap<String, toml::Value>,
    }
    let f: File = toml::from_str(text).map_err(|e| e.message().to_string())?;
    let mut items = Vec::new();
    for (k, v) in f.composition {
        let value = match v {
            toml::Value::Float(x) => format!("{x}"),
            toml::Value::Integer(i) => format!("{i}"),
            toml::Value::String(s) => s,
            other => return Err(format!("{k}: {other} is not a mole fraction")),
        };
        items.push((k, value));
    }
    Composition::from_items(&items)
        .map(GasSpec::from_composition)
        .map_err(|e| e.to_string())
}

/// Name → mole fraction, for the `composition` field of JSON outputs.
pub fn composition_map(spec: &GasSpec) -> BTreeMap<String, f64> {
    spec.composition_map()
        .into_iter()
        .map(|(n, f)| (n.to_string(), f))
        .collect()
}

/// The `gas` field of JSON outputs: a pure gas's name, or a mixture's
/// composition in the `--gas` form.
pub fn gas_field(spec: &GasSpec) -> String {
    spec.to_string()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn files_are_read_by_the_same_rules() {
        let s = parse_file(
            "name = \"winter gas\"\n[composition]\nmethane = \"90%\"\nethane = 0.06\npropane = \"4%\"\n",
        )
        .unwrap();
        assert!(matches!(s, GasSpec::Mixture(_)));
        assert!(
            parse_file("[composition]\nmethane = \"90%\"\nethane = 0.06\n")
                .unwrap_err()
                .contains("sum to 0.96")
        );
        assert!(parse_file("[composition]\nmethane = 1.0\ncolour = \"red\"\n").is_err());
        assert!(parse_file("gas = \"x\"\n[composition]\nmethane = 1.0\n").is_err());
        assert_eq!(
            parse_file("[composition]\nargon = 1\n").unwrap(),
            GasSpec::Pure(isochor_core::Gas::Argon)
        );
    }
}
