//! Prints the sizes of the gauge's parts on the host, bytes
//! (`cargo run -p isochor-sim --example sizes`; a 32-bit device's are
//! smaller where pointers are involved, see `isochor budget` for the
//! device's own figures).
use isochor_core::app::fixed::Pipeline;
use isochor_core::app::service::Service;
use isochor_core::link::{Accumulator, FromDevice, ToDevice};
use isochor_core::model::device::TableBuf;
use isochor_core::prepared::{GaugeConfig, PreparedModel};
use isochor_core::store::sim::SimFlash;
use isochor_core::track::fixed::Tracker;

type F = SimFlash<1024, 1024, 4>;

fn main() {
    println!(
        "Service (without its flash) {}",
        size_of::<Service<F>>() - size_of::<F>()
    );
    println!("Pipeline {}", size_of::<Pipeline<&'static [u8]>>());
    println!(
        "Tracker {}",
        size_of::<Tracker<PreparedModel<&'static [u8]>>>()
    );
    println!("Accumulator {}", size_of::<Accumulator<ToDevice>>());
    println!("ToDevice {}", size_of::<ToDevice>());
    println!("FromDevice {}", size_of::<FromDevice>());
    println!("GaugeConfig (host side) {}", size_of::<GaugeConfig>());
    println!("TableBuf (host side) {}", size_of::<TableBuf>());
}
