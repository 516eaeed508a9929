//! # isochor-core
//!
//! How much gas is inside a pressurised tank, from one pressure and one
//! temperature reading: density, mass, amount of substance, standard volume,
//! settled pressure and fill fraction, with a status word that says when an
//! answer should not be trusted.
//!
//! The crate is `no_std`, never allocates and never panics on any input. Every
//! computation exists twice, with the same structure and names:
//!
//! * a **fixed-point path** ([`content::fixed`]) for microcontrollers without an
//!   FPU (down to a Cortex-M0): 32-bit integer arithmetic with config-time
//!   scale factors, formats listed in [`fx`];
//! * a **float path** ([`content::float`]), generic over [`Real`] (`f64` is the
//!   reference; `f32` exists so that firmware budgets can be measured).
//!
//! Tests compare the two quantity by quantity over the whole operating
//! envelope ([`envelope`]).
//!
//! ```
//! use isochor_core::{content::float::Estimator, model::Ideal, Gas, Setup, Tank};
//!
//! // A 50 L nitrogen cylinder rated 200 bar at 15 °C, read at 200 bar and 35 °C.
//! let setup = Setup::new(Gas::Nitrogen, Tank::new(0.050, 200e5));
//! let est = Estimator::new(setup, Ideal::new(Gas::Nitrogen)).unwrap();
//! let c = est.estimate(200e5, 308.15).unwrap();
//! assert!((c.mass_kg - 10.93).abs() < 0.01);
//! assert!(c.fill_fraction < 1.0); // warm gas: less content than the pressure suggests
//! ```
#![cfg_attr(not(test), no_std)]
#![forbid(unsafe_code)]
#![warn(missing_docs)]
#![cfg_attr(
    not(test),
    deny(
        clippy::unwrap_used,
        clippy::expect_used,
        clippy::panic,
        clippy::indexing_slicing,
        clippy::unimplemented,
        clippy::todo
    )
)]

pub mod alarm;
pub mod app;
pub mod auth;
pub mod checksum;
pub mod constants;
pub mod content;
pub mod curve;
pub mod encode;
pub mod envelope;
pub mod error;
pub mod field;
pub mod fx;
pub mod fxmath;
mod gas;
pub mod link;
pub mod model;
pub mod prepared;
pub mod probe;
mod real;
pub mod sensor;
mod setup;
mod status;
pub mod store;
pub mod time;
pub mod track;
pub mod uncertainty;

pub use error::{
    AlarmSetting, Condition, CurveSetting, Defect, DeviceSetting, Error, FieldSetting, Measured,
    ModelDefect, Quantity, SensorSetting, TankSetting, TrackSetting, UncertaintyInput,
};
/// The fixed-point crate the device formats come from (re-exported so users
/// name the same types).
pub use fixed;
pub use gas::{Composition, Gas, GasInfo, Mixture};
pub use real::Real;
pub use setup::{Setup, SetupFx, StandardCondition, StandardConditionFx, Tank, TankFx};
pub use status::Status;
