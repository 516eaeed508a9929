//! The isochor reference firmware: an application generic over narrow board
//! traits ([`board`]), the boards it runs on in QEMU ([`arm`]: the
//! `microbit` machine, nRF51 Cortex-M0, and `mps2-an386`, Cortex-M4F), and
//! the pieces a real board reuses: an SPI converter driver ([`adc`]), RAM
//! emulation of NOR flash ([`ram_nor`]) and the boot record kept across a
//! reset ([`retained`]).
//!
//! The application itself — records, link, sensor front-ends, tracking,
//! alarms — is the core's hardware-free [`isochor_core::app::Gauge`]; the
//! host's emulated device runs the same. This crate adds the loop around it
//! ([`run`]) and the hardware.
//!
//! The modules other than [`arm`] build and test on the host too
//! (`cargo test --lib --target x86_64-unknown-linux-gnu`).
#![cfg_attr(not(test), no_std)]
#![warn(missing_docs)]

pub mod adc;
pub mod board;
pub mod ram_nor;
pub mod retained;
pub mod run;
pub mod sweep;

#[cfg(target_arch = "arm")]
pub mod arm;

/// Logging through defmt when the `defmt` feature is on, nothing otherwise
/// (the code never names a logging backend).
#[macro_export]
macro_rules! log {
    ($($t:tt)*) => {
        #[cfg(feature = "defmt")]
        defmt::info!($($t)*);
    };
}
