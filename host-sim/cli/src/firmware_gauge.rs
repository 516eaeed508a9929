//! The gauge under test as emulated firmware: the reference firmware built
//! for a board, started in QEMU ([`crate::firmware::Qemu`]), configured over
//! its serial link with the prepared configuration the in-process device
//! backend runs (signed), and fed the simulator's raw codes as
//! sample-injection messages. Its telemetry and alarm frames
//! become the same [`Reading`]s the in-process backends give, so a run is
//! scored the same way.
//!
//! Each sample is one injection followed at once by a ping (no wait in
//! between): the firmware answers in order, so once the pong is in, the
//! sample's telemetry and alarm frames are in too.
//!
//! The readings differ from the in-process device backend's only in what
//! telemetry carries: pressure and temperature are the tracker's smoothed
//! values, times to empty whole seconds.

use std::time::Duration;

use isochor_core::alarm::{AlarmKind, AlarmSet, Events};
use isochor_core::auth::Secret;
use isochor_core::link::{AlarmTransition, FromDevice, InjectSample, Outcome, Ping, ToDevice};
use isochor_core::prepared::PreparedBuf;
use isochor_core::time::Instant;

use crate::Error;
use crate::firmware::{self, Board, Build, Qemu};
use crate::link::transport::Tcp;
use crate::link::{Client, Link, LinkEvent};
use isochor_tank::gauge::{Backend, FixedGauge, GaugeConfig, Reading};
use isochor_tank::sensors::{Codes, PressureCode, PressureFrontEnd};

/// Serial number the emulated gauge is provisioned with.
const SERIAL: u64 = 20_261_202;
/// Longest wait for one answer of the firmware.
const TIMEOUT: Duration = Duration::from_secs(10);

/// Emulated firmware on a board in QEMU.
pub struct FirmwareGauge {
    board: Board,
    link: Link<Tcp>,
    rated_kg: f64,
    next_tag: u16,
    pressure_bits: u8,
    _qemu: Qemu,
}

/// The firmware build that runs a gauge on `board` (the standard build:
/// the gas and everything else come with the configuration).
pub fn build_for(board: Board) -> Build {
    Build::standard(board)
}

impl FirmwareGauge {
    /// Builds the firmware for `board` (from this source tree), starts it in
    /// QEMU, provisions and configures it for `config`. The emulator is
    /// killed after `limit` (and when the gauge is dropped).
    pub fn start(board: Board, config: &GaugeConfig, limit: Duration) -> Result<Self, Error> {
        // Refuses what a device cannot run before anything is built.
        config
            .device()
            .map_err(|e| Error::Invalid(format!("--firmware: {e}")))?;
        if !firmware::qemu_available() {
            return Err(Error::Invalid(
                "--firmware needs qemu-system-arm (Debian package qemu-system-arm)".into(),
            ));
        }
        let dir = firmware::default_firmware_dir();
        let elf = firmware::build(&dir, &build_for(board), &["isochor-firmware"])?;
        Self::start_elf(board, &elf, config, limit)
    }

    /// As [`FirmwareGauge::start`] with an image already built.
    pub fn start_elf(
        board: Board,
        elf: &std::path::Path,
        config: &GaugeConfig,
        limit: Duration,
    ) -> Result<Self, Error> {
        let device = config
            .device()
            .map_err(|e| Error::Invalid(format!("--firmware: {e}")))?;
        let (blob, _) = PreparedBuf::build(&device)?;
        // The rated content as the device computes it.
        let rated_kg = FixedGauge::from_prepared(&blob, config.pressure)?.rated_mass_kg();
        let pressure_bits = match config.pressure {
            PressureFrontEnd::Bridge(b) => b.adc_bits,
            PressureFrontEnd::Loop(_) => 32,
        };

        let mut key = [0u8; 32];
        getrandom::fill(&mut key).map_err(|e| Error::Link(format!("random secret: {e}")))?;
        let secret = Secret::new(key);
        let qemu = Qemu::start(board, elf, Some((SERIAL, &secret)), limit)?;
        let mut c = Client::new(qemu.connection()?, Duration::from_secs(5)).with_secret(secret);
        // The emulator starts the board when the link connects.
        if !(0..6).any(|i| c.ping(i).is_ok()) {
            return Err(Error::Link(format!(
                "the firmware on {} does not answer: {}",
                board.name(),
                qemu.messages()
            )));
        }
        c.load_config(blob.bytes(), &mut |_, _| {})?;
        drop(c);
        Ok(FirmwareGauge {
            board,
            link: Link::new(qemu.connection()?),
            rated_kg,
            next_tag: 0x4000,
            pressure_bits,
            _qemu: qemu,
        })
    }

    fn tag(&mut self) -> u16 {
        self.next_tag = self.next_tag.wrapping_add(1).max(1);
        self.next_tag
    }
}

impl Backend for FirmwareGauge {
    fn name(&self) -> &'static str {
        match self.board {
            Board::Microbit => "firmware-microbit",
            Board::Mps2An386 => "firmware-mps2-an386",
        }
    }

    fn rated_mass_kg(&self) -> f64 {
        self.rated_kg
    }

    fn sample(&mut self, at: Instant, codes: &Codes) -> Result<Reading, isochor_tank::Error> {
        self.inject(at, codes)
            .map_err(|e| isochor_tank::Error::Gauge(e.to_string()))
    }
}

impl FirmwareGauge {
    /// One sample injected over the link, its telemetry read back.
    fn inject(&mut self, at: Instant, codes: &Codes) -> Result<Reading, Error> {
        let pressure = match codes.pressure {
            // A bipolar converter's two's-complement code in its low bits.
            PressureCode::Bridge(c) => {
                let mask = if self.pressure_bits >= 32 {
                    u32::MAX
                } else {
                    (1u32 << self.pressure_bits) - 1
                };
                (c as u32) & mask
            }
            PressureCode::Loop(c) => c,
        };
        let inject_tag = self.tag();
        let ping_tag = self.tag();
        let token = at.as_millis() as u32;
        let mut out = Vec::new();
        for m in [
            ToDevice::InjectSample(InjectSample {
                tag: inject_tag,
                at_ms: at.as_millis(),
                pressure,
                temperature: codes.temperature,
            }),
            ToDevice::Ping(Ping {
                tag: ping_tag,
                token,
            }),
        ] {
            let mut buf = [0u8; isochor_core::link::MAX_FRAME_LEN];
            let n = isochor_core::link::encode(&m, &mut buf)?;
            out.extend_from_slice(buf.get(..n).unwrap_or(&[]));
        }
        // Both frames in one write: the firmware answers them in order.
        self.link.send_raw(&out)?;
        let deadline = std::time::Instant::now() + TIMEOUT;
        let mut telemetry = None;
        let mut taken = false;
        let mut events = Events {
            raised: AlarmSet::EMPTY,
            cleared: AlarmSet::EMPTY,
            at,
        };
        loop {
            let left = deadline.saturating_duration_since(std::time::Instant::now());
            match self.link.next_event(left)? {
                Some(LinkEvent::Message(FromDevice::Reply(r))) if r.tag == inject_tag => {
                    match r.outcome {
                        Outcome::Taken => taken = true,
                        other => {
                            return Err(Error::Link(format!(
                                "the firmware refused a sample at {} ms: {other:?}",
                                at.as_millis()
                            )));
                        }
                    }
                }
                Some(LinkEvent::Message(FromDevice::Reply(r))) if r.tag == ping_tag => {
                    if !matches!(r.outcome, Outcome::Pong { token: t } if t == token) {
                        return Err(Error::Link("unexpected answer to a ping".into()));
                    }
                    break;
                }
                Some(LinkEvent::Message(FromDevice::Telemetry(t)))
                    if t.uptime_ms == at.as_millis() =>
                {
                    telemetry = Some(t);
                }
                Some(LinkEvent::Message(FromDevice::Alarm(a))) if a.uptime_ms == at.as_millis() => {
                    let kind = AlarmKind::from_code(a.alarm)
                        .ok_or_else(|| Error::Link(format!("unknown alarm {}", a.alarm)))?;
                    match a.transition {
                        AlarmTransition::Raised => {
                            events.raised = events.raised.with(kind, true);
                        }
                        AlarmTransition::Cleared => {
                            events.cleared = events.cleared.with(kind, true);
                        }
                    }
                }
                Some(_) => {} // boot messages, damaged frames (counted by the link)
                None => {
                    return Err(Error::Link(format!(
                        "the firmware on {} did not answer the sample at {} ms",
                        self.board.name(),
                        at.as_millis()
                    )));
                }
            }
        }
        match (taken, telemetry) {
            (true, Some(t)) => Ok(Reading::from_telemetry(&t, events)),
            _ => Err(Error::Link(format!(
                "no telemetry for the sample at {} ms",
                at.as_millis()
            ))),
        }
    }
}
