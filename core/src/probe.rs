//! Stage marks: where a sample's instructions go.
//!
//! The sample path calls [`enter`] where each stage of the chain begins
//! (and where the stage it was called from resumes). Without the `probe`
//! feature [`enter`] is empty and inlined away: the device image carries no
//! trace of it. With the feature, [`enter`] calls the hook a measuring
//! program installed with `set_hook` (feature `probe`) (none: nothing happens); the firmware
//! budget program reads the cycle counter there and charges the time since
//! the last mark to the stage that was running.
//!
//! Marks are switches, not a stack: a stage nested in another (the model
//! inside the content estimate, the uncertainty inside a block close) is
//! left with a mark of the stage that called it.

/// A stage of the chain.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
#[repr(u8)]
pub enum Stage {
    /// Raw codes to corrected readings (both channels).
    Sensor = 0,
    /// The plausibility checks of the readings.
    Plausibility = 1,
    /// The gas model: Z at the sample's pressure and temperature.
    Model = 2,
    /// Density, mass, standard volume and fill fraction from Z.
    Content = 3,
    /// The settled pressure.
    Settle = 4,
    /// The tracker: smoothing, blocks, rate, time to empty, leak, settling.
    Track = 5,
    /// The uncertainty of the content and the rate.
    Uncertainty = 6,
    /// Alarm conditions and their debounce.
    Alarms = 7,
    /// Telemetry and alarm frames: values and encoding.
    Link = 8,
    /// Outside the chain (the measuring program itself).
    Outside = 9,
}

impl Stage {
    /// Every stage of the chain, in order ([`Stage::Outside`] last).
    pub const ALL: [Stage; 10] = [
        Stage::Sensor,
        Stage::Plausibility,
        Stage::Model,
        Stage::Content,
        Stage::Settle,
        Stage::Track,
        Stage::Uncertainty,
        Stage::Alarms,
        Stage::Link,
        Stage::Outside,
    ];

    /// Stable snake_case name.
    pub const fn name(self) -> &'static str {
        match self {
            Stage::Sensor => "sensor",
            Stage::Plausibility => "plausibility",
            Stage::Model => "model",
            Stage::Content => "content",
            Stage::Settle => "settle",
            Stage::Track => "track",
            Stage::Uncertainty => "uncertainty",
            Stage::Alarms => "alarms",
            Stage::Link => "link",
            Stage::Outside => "outside",
        }
    }
}

#[cfg(feature = "probe")]
mod hook {
    use core::cell::Cell;

    use critical_section::Mutex;

    use super::Stage;

    /// The installed hook, if any.
    type Hook = Option<fn(Stage)>;

    static HOOK: Mutex<Cell<Hook>> = Mutex::new(Cell::new(None));

    /// Installs `hook` (called at every mark from now on).
    pub fn set_hook(hook: fn(Stage)) {
        critical_section::with(|cs| HOOK.borrow(cs).set(Some(hook)));
    }

    /// Marks the start of `stage`: calls the hook, if one is installed.
    #[inline(never)]
    pub fn enter(stage: Stage) {
        if let Some(f) = critical_section::with(|cs| HOOK.borrow(cs).get()) {
            f(stage);
        }
    }
}

#[cfg(feature = "probe")]
pub use hook::{enter, set_hook};

/// Marks the start of `stage` (nothing without the `probe` feature).
#[cfg(not(feature = "probe"))]
#[inline(always)]
pub fn enter(_stage: Stage) {}
