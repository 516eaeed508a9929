//! The host end of the serial link: transports, a frame reader, a client for
//! requests and signed commands, an emulated device, and the views of
//! `isochor listen`.
//!
//! The frames and messages are those of [`isochor_core::link`]: one
//! definition for both ends.

pub mod client;
pub mod emulated;
pub mod transport;
pub mod view;

pub use client::Client;
pub use transport::{Link, LinkEvent, Transport, memory_pair};
