//! # isochor-tank
//!
//! The desktop tank simulator: real physics, simulated sensors, the gauge
//! under test, scores, time series and plots. Pure host code over
//! `isochor-core` and `isochor-eos`: no serial ports, no threads; plots and
//! the progress bar are features (`plots`, `progress`).
//!
//! * [`physics`] — mass and energy balance of the gas with the reference
//!   equation of state, lumped wall, weather, vessel expansion; adaptive
//!   steps.
//! * [`sensors`] — the sensors' errors, lag and faults, down to raw codes.
//! * [`gauge`] — the gauge under test behind the [`gauge::Backend`] trait
//!   (the core in-process, fixed point or `f64`).
//!   The `isochor` command implements the same trait over the reference
//!   firmware in QEMU (`isochor sim --firmware BOARD`).
//! * [`scenario`] — scenario files (TOML) and the built-in scenarios.
//! * [`run`](mod@run) — a run and its scores.
//! * [`output`] — the summary table, CSV and JSON-lines time series.
//! * `plot` — PNG and SVG plots (feature `plots`).

mod error;
pub mod gauge;
pub mod output;
pub mod physics;
#[cfg(feature = "plots")]
pub mod plot;
pub mod population;
pub mod run;
pub mod scenario;
pub mod sensors;

pub use error::Error;
pub use run::{BackendKind, RunOptions, RunResult, Summary, run};
pub use scenario::Scenario;
