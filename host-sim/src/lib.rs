//! # isochor-sim
//!
//! The desktop side of isochor: the `isochor` command line, built as thin
//! commands over this library, and the host-only computations behind them.
//!
//! * [`units`] — parsing of quantities with units (`200bar`, `35C`, `50L`).
//! * [`content`] — the content report of `isochor content` (both core paths).
//! * [`link`] — the serial link: transports, client, emulated device, views.
//! * [`firmware`] — the reference firmware in QEMU: builds, provisioning, the emulator, image sizes.
//! * [`budget`] — the firmware's flash, RAM, stack and instructions per estimate, measured in QEMU.
//! * [`mod@bench`] — converter codes for given readings (drives devices that take injected samples).
//! * [`eos`] — the reference equations of state (f64, host only).
//! * [`model`] — building and checking device gas models.
//! * [`reference`](mod@reference) — the reference equation of state as a gas model.
//! * [`safety`] — the cautions printed with every human-readable result.
//! * [`sensor`] — sensor option parsing and the least-squares calibration fit.
//! * [`sim`] — the tank simulator: physics, sensors, scenarios, scored runs, plots.
//! * [`cli`] — argument parsing and the commands.

pub mod bench;
pub mod budget;
pub mod cli;
pub mod content;
pub mod eos;
mod error;
pub mod firmware;
pub mod link;
pub mod model;
pub mod reference;
pub mod safety;
pub mod sensor;
pub mod sim;
pub mod units;

pub use error::Error;
