//! # isochor-sim
//!
//! The desktop side of isochor: the `isochor` command line, built as thin
//! commands over this library, and the host-only computations behind them.
//!
//! * [`units`] — parsing of quantities with units (`200bar`, `35C`, `50L`).
//! * [`content`] — the content report of `isochor content` (both core paths).
//! * [`link`] — the serial link: transports, client, emulated device, views.
//! * [`safety`] — the cautions printed with every human-readable result.
//! * [`sensor`] — sensor option parsing and the least-squares calibration fit.
//! * [`cli`] — argument parsing and the commands.

pub mod cli;
pub mod content;
mod error;
pub mod link;
pub mod safety;
pub mod sensor;
pub mod units;

pub use error::Error;
