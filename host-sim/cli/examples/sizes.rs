//! Prints sizes of the gauge's parts on the host (`cargo run -p isochor-sim --example sizes`).
use isochor_core::app::Gauge;
use isochor_core::app::fixed::Pipeline;
use isochor_core::link::device::Responder;
use isochor_core::model::DeviceModel;
use isochor_core::model::device::TableBuf;
use isochor_core::store::sim::SimFlash;
type F = SimFlash<1024, 1024, 4>;
fn main() {
    println!("Gauge {}", size_of::<Gauge<'static, F>>() - size_of::<F>());
    println!("Responder {}", size_of::<Responder<F>>() - size_of::<F>());
    println!("Pipeline {}", size_of::<Pipeline<DeviceModel<'static>>>());
    println!("DeviceModel {}", size_of::<DeviceModel<'static>>());
    println!("TableBuf {}", size_of::<TableBuf>());
    println!(
        "Tracker {}",
        size_of::<isochor_core::track::fixed::Tracker<DeviceModel<'static>>>()
    );
    println!(
        "Records {}",
        size_of::<isochor_core::link::device::Records>()
    );
    println!(
        "Accumulator {}",
        size_of::<isochor_core::link::Accumulator>()
    );
    println!("Message {}", size_of::<isochor_core::link::Message>());
}
