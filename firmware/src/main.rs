//! isochor reference firmware (minimal): links the core and runs one content
//! estimate in fixed point, reporting it over semihosting. The application
//! loop, boards, link and storage grow here (see DEVELOPERS.md).
#![no_std]
#![no_main]

use cortex_m_rt::entry;
use cortex_m_semihosting::{debug, hprintln};
use isochor_core::content::fixed::Estimator;
use isochor_core::model::Ideal;
use isochor_core::{Gas, SetupFx, StandardConditionFx, TankFx, fx};

/// A 50 L nitrogen cylinder rated 200 bar at 15 °C; ISO 13443 standard
/// volume; settled pressure at 15 °C. Fixed-point literals: no float on the device.
const SETUP: SetupFx = SetupFx {
    gas: Gas::Nitrogen,
    tank: TankFx {
        water_capacity_m3: fx::Volume::lit("0.05"),
        rated_pressure_pa: fx::Pressure::lit("20000000"),
        rated_temperature_k: fx::Temperature::lit("288.15"),
        elastic_expansion_per_mpa: fx::ElasticExpansion::ZERO,
        thermal_expansion_per_k: fx::ThermalExpansion::ZERO,
    },
    standard: StandardConditionFx {
        temperature_k: fx::Temperature::lit("288.15"),
        pressure_pa: fx::Pressure::lit("101325"),
    },
    settled_reference_k: fx::Temperature::lit("288.15"),
};

#[entry]
fn main() -> ! {
    let code = match Estimator::new(SETUP, Ideal::new(Gas::Nitrogen)) {
        Ok(est) => {
            let c = est.estimate(
                fx::Pressure::lit("20000000"),
                fx::Temperature::lit("308.15"),
            );
            // Print raw bits: formatting fixed-point numbers pulls in float code.
            hprintln!(
                "mass_bits={} settled_bits={} status={:#x}",
                c.mass_kg.to_bits(),
                c.settled_pressure_pa.to_bits(),
                c.status.bits()
            );
            debug::EXIT_SUCCESS
        }
        Err(_) => debug::EXIT_FAILURE,
    };
    debug::exit(code);
    loop {
        cortex_m::asm::wfi();
    }
}

#[panic_handler]
fn panic(_: &core::panic::PanicInfo) -> ! {
    debug::exit(debug::EXIT_FAILURE);
    loop {
        cortex_m::asm::wfi();
    }
}
