//! # isochor-sim
//!
//! The `isochor` command line, built as thin commands over this library and
//! the host crates below it, and what only a desktop does: the serial link,
//! the reference firmware in QEMU and its budget.
//!
//! The host side is split by concern:
//!
//! * `isochor-eos` — reference equations of state, device gas-model
//!   building, quantities with units, gas cautions (pure `f64`, no I/O);
//! * `isochor-tank` — the tank simulator (physics, sensors, scenarios,
//!   scores; plots behind a feature);
//! * this crate:
//!   * [`content`] — the content report of `isochor content` (both core paths);
//!   * [`link`] — the serial link: transports, client, emulated device, views;
//!   * [`modbus`] — the host end of Modbus RTU: a client and the register map's decoder;
//!   * [`firmware`] — the reference firmware in QEMU: builds, provisioning, the emulator;
//!   * [`image`] — what a firmware image holds: flash and RAM, flash by module, statics, panic paths;
//!   * [`firmware_gauge`] — the simulator's gauge over the emulated firmware;
//!   * [`budget`] — the firmware's flash, RAM, stack and instructions per estimate, measured in QEMU;
//!   * [`mod@bench`] — converter codes for given readings (drives devices that take injected samples);
//!   * [`sensor`] — sensor option parsing, the least-squares calibration fit,
//!     and the reports of `isochor sensor` ([`sensor::convert`]);
//!   * [`send`] — requests and signed commands to a device, the setup and
//!     configuration they write, and their reports;
//!   * [`cli`] — argument parsing and the commands.

pub mod bench;
pub mod budget;
pub mod cli;
pub mod content;
mod error;
pub mod firmware;
pub mod firmware_gauge;
pub mod image;
pub mod link;
pub mod modbus;
pub mod model_cache;
pub mod send;
pub mod sensor;

pub use error::Error;
