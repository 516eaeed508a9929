//! A driver for a 24-bit delta-sigma converter of the TI ADS1220 kind
//! (four inputs, programmable gain, ratiometric references, excitation
//! current sources), generic over an `embedded_hal::spi::SpiDevice`, and
//! a [`SampleSource`] that reads the pressure bridge and the temperature
//! sensor through it.
//!
//! Protocol (ADS1220 data sheet, SBAS501; from memory, check against your
//! part): SPI mode 1; commands RESET 0x06, START/SYNC 0x08, POWERDOWN 0x02,
//! RDATA 0x10, RREG 0x20 | reg << 2 | (n − 1), WREG 0x40 | reg << 2 |
//! (n − 1); four 8-bit configuration registers (input multiplexer and gain;
//! data rate and mode; reference, filter and excitation current; current
//! routing); conversion results are 24-bit two's complement, most
//! significant byte first.

use embedded_hal::spi::{Operation, SpiDevice};
use isochor_core::sensor::channel::RawSample;
use isochor_core::time::{Instant, Millis};

use crate::board::SampleSource;

/// Commands.
pub mod cmd {
    /// Reset the device.
    pub const RESET: u8 = 0x06;
    /// Start or restart a conversion.
    pub const START: u8 = 0x08;
    /// Power down.
    pub const POWERDOWN: u8 = 0x02;
    /// Read the latest result.
    pub const RDATA: u8 = 0x10;
    /// Write registers from `reg`, `n` of them.
    pub const fn wreg(reg: u8, n: u8) -> u8 {
        0x40 | (reg & 3) << 2 | (n.saturating_sub(1) & 3)
    }
    /// Read registers from `reg`, `n` of them.
    pub const fn rreg(reg: u8, n: u8) -> u8 {
        0x20 | (reg & 3) << 2 | (n.saturating_sub(1) & 3)
    }
}

/// The four configuration registers of one measurement.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Channel {
    /// Registers 0 … 3.
    pub registers: [u8; 4],
    /// Time one single-shot conversion takes at the configured rate, ms.
    pub conversion: Millis,
}

/// The converter.
pub struct Ads1220<SPI> {
    spi: SPI,
}

impl<SPI: SpiDevice> Ads1220<SPI> {
    /// A converter on `spi` (chip select handled by the `SpiDevice`).
    pub fn new(spi: SPI) -> Self {
        Ads1220 { spi }
    }

    /// Resets it.
    pub fn reset(&mut self) -> Result<(), SPI::Error> {
        self.spi.write(&[cmd::RESET])
    }

    /// Writes the four configuration registers.
    pub fn configure(&mut self, registers: &[u8; 4]) -> Result<(), SPI::Error> {
        let [a, b, c, d] = *registers;
        self.spi.write(&[cmd::wreg(0, 4), a, b, c, d])
    }

    /// Reads the four configuration registers back.
    pub fn registers(&mut self) -> Result<[u8; 4], SPI::Error> {
        let mut r = [0u8; 4];
        self.spi.transaction(&mut [
            Operation::Write(&[cmd::rreg(0, 4)]),
            Operation::Read(&mut r),
        ])?;
        Ok(r)
    }

    /// Starts a conversion.
    pub fn start(&mut self) -> Result<(), SPI::Error> {
        self.spi.write(&[cmd::START])
    }

    /// The latest result, as the raw 24-bit two's-complement code in the
    /// low bits of a `u32`.
    pub fn read_code(&mut self) -> Result<u32, SPI::Error> {
        let mut r = [0u8; 3];
        self.spi
            .transaction(&mut [Operation::Write(&[cmd::RDATA]), Operation::Read(&mut r)])?;
        let [a, b, c] = r;
        Ok(u32::from(a) << 16 | u32::from(b) << 8 | u32::from(c))
    }

    /// The SPI device back.
    pub fn release(self) -> SPI {
        self.spi
    }
}

/// Where the sampler is in its cycle.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Phase {
    Idle,
    Pressure { since: Instant },
    Temperature { since: Instant, pressure: u32 },
}

/// Reads the pressure channel, then the temperature channel, once per
/// period, without blocking: each call does at most one step.
pub struct AdcSampler<SPI> {
    adc: Ads1220<SPI>,
    pressure: Channel,
    temperature: Channel,
    period: Millis,
    next: Instant,
    phase: Phase,
    /// Results are taken as unsigned codes of this many bits for the
    /// temperature channel (a resistive ratio is positive; negative codes
    /// from noise read as 0).
    temperature_bits: u8,
    errors: u32,
}

impl<SPI: SpiDevice> AdcSampler<SPI> {
    /// A sampler taking one sample per `period` from the two channels.
    pub fn new(
        adc: Ads1220<SPI>,
        pressure: Channel,
        temperature: Channel,
        temperature_bits: u8,
        period: Millis,
    ) -> Self {
        AdcSampler {
            adc,
            pressure,
            temperature,
            period,
            next: Instant(0),
            phase: Phase::Idle,
            temperature_bits,
            errors: 0,
        }
    }

    /// Bus errors so far (a failed cycle is dropped and retried next period).
    pub fn errors(&self) -> u32 {
        self.errors
    }

    fn step(&mut self, now: Instant) -> Result<Option<RawSample>, SPI::Error> {
        match self.phase {
            Phase::Idle if now >= self.next => {
                self.next = self.next.max(now) + self.period;
                self.adc.configure(&self.pressure.registers)?;
                self.adc.start()?;
                self.phase = Phase::Pressure { since: now };
                Ok(None)
            }
            Phase::Pressure { since } if now.since(since) >= self.pressure.conversion => {
                let pressure = self.adc.read_code()?;
                self.adc.configure(&self.temperature.registers)?;
                self.adc.start()?;
                self.phase = Phase::Temperature {
                    since: now,
                    pressure,
                };
                Ok(None)
            }
            Phase::Temperature { since, pressure }
                if now.since(since) >= self.temperature.conversion =>
            {
                let code = self.adc.read_code()?;
                self.phase = Phase::Idle;
                let sign = 1u32 << 23;
                let temperature = if code & sign != 0 {
                    0
                } else {
                    code >> 23u32.saturating_sub(u32::from(self.temperature_bits))
                };
                Ok(Some(RawSample {
                    pressure,
                    temperature,
                }))
            }
            _ => Ok(None),
        }
    }
}

impl<SPI: SpiDevice> SampleSource for AdcSampler<SPI> {
    const INJECTED: bool = false;
    fn poll(&mut self, now: Instant) -> Option<RawSample> {
        match self.step(now) {
            Ok(s) => s,
            Err(_) => {
                self.errors = self.errors.wrapping_add(1);
                self.phase = Phase::Idle;
                None
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use core::convert::Infallible;
    use embedded_hal::spi::ErrorType;

    /// A converter in software: records what is written, answers reads.
    #[derive(Default)]
    struct Mock {
        written: Vec<Vec<u8>>,
        results: Vec<[u8; 3]>,
        registers: [u8; 4],
    }

    impl ErrorType for Mock {
        type Error = Infallible;
    }

    impl SpiDevice for Mock {
        fn transaction(&mut self, ops: &mut [Operation<'_, u8>]) -> Result<(), Infallible> {
            let mut last = 0u8;
            for op in ops {
                match op {
                    Operation::Write(w) => {
                        self.written.push(w.to_vec());
                        last = w[0];
                        if w[0] == cmd::wreg(0, 4) {
                            self.registers.copy_from_slice(&w[1..5]);
                        }
                    }
                    Operation::Read(r) if last == cmd::RDATA => {
                        r.copy_from_slice(&self.results.remove(0));
                    }
                    Operation::Read(r) if last == cmd::rreg(0, 4) => {
                        r.copy_from_slice(&self.registers);
                    }
                    _ => {}
                }
            }
            Ok(())
        }
    }

    #[test]
    fn commands_and_codes() {
        assert_eq!(cmd::wreg(0, 4), 0x43);
        assert_eq!(cmd::rreg(1, 2), 0x25);
        let mut adc = Ads1220::new(Mock::default());
        adc.configure(&[0x0E, 0x04, 0x40, 0x00]).unwrap();
        assert_eq!(adc.registers().unwrap(), [0x0E, 0x04, 0x40, 0x00]);
        adc.spi.results.push([0x80, 0x00, 0x01]);
        assert_eq!(adc.read_code().unwrap(), 0x80_0001);
    }

    #[test]
    fn the_sampler_paces_itself_and_never_blocks() {
        let mut m = Mock::default();
        m.results = vec![
            [0xFF, 0xFF, 0xF0],
            [0x12, 0x34, 0x56],
            [0x00, 0x10, 0x00],
            [0xFF, 0, 0],
        ];
        let ch = |mux: u8| Channel {
            registers: [mux, 0x04, 0x40, 0x00],
            conversion: Millis(60),
        };
        let mut s = AdcSampler::new(Ads1220::new(m), ch(0x0E), ch(0x5E), 23, Millis(1000));
        assert_eq!(s.poll(Instant(0)), None); // pressure conversion started
        assert_eq!(s.poll(Instant(30)), None); // not ready
        assert_eq!(s.poll(Instant(60)), None); // pressure read, temperature started
        let got = s.poll(Instant(120)).unwrap();
        assert_eq!(got.pressure, 0xFF_FFF0);
        assert_eq!(got.temperature, 0x12_3456);
        assert_eq!(s.poll(Instant(500)), None); // next period not due
        assert_eq!(s.poll(Instant(1000)), None);
        assert_eq!(s.poll(Instant(1060)), None);
        // A negative ratio from noise reads as zero.
        assert_eq!(s.poll(Instant(1120)).unwrap().temperature, 0);
        let w = &s.adc.spi.written;
        assert!(w.contains(&vec![cmd::wreg(0, 4), 0x5E, 0x04, 0x40, 0x00]));
        assert_eq!(w.iter().filter(|c| c[0] == cmd::START).count(), 4);
    }
}
