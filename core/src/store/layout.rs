//! Where a device keeps its records and gas-model blobs.

use embedded_storage::nor_flash::NorFlash;

use super::{BlobSlots, RecordArea, RecordKind};
use crate::Error;

/// The flash layout of a device: one area per record kind and the two
/// gas-model slots.
#[derive(Clone)]
pub struct Layout {
    /// The setup (kind 1).
    pub setup: RecordArea,
    /// Calibration of the pressure channel (kind 2).
    pub pressure_calibration: RecordArea,
    /// Alarm thresholds (kind 3).
    pub alarm_thresholds: RecordArea,
    /// The gas-model reference (kind 4).
    pub gas_model_ref: RecordArea,
    /// Calibration of the temperature channel (kind 5).
    pub temperature_calibration: RecordArea,
    /// Tracking settings (kind 6).
    pub tracking: RecordArea,
    /// The gas-model slots.
    pub blobs: BlobSlots,
}

impl Layout {
    /// Areas one after another from `start` in kind order, each two banks of
    /// `bank_len` bytes, then two gas-model slots of `slot_len` bytes. Every
    /// length must be a whole number of erase sectors (see
    /// [`RecordArea::new`], [`BlobSlots::new`]).
    pub fn contiguous<F: NorFlash>(
        flash: &F,
        start: u32,
        bank_len: u32,
        slot_len: u32,
    ) -> Result<Layout, Error> {
        let area_len = bank_len.checked_mul(2).ok_or(Error::StoreLayout)?;
        let at = |i: u32| -> Result<u32, Error> {
            area_len
                .checked_mul(i)
                .and_then(|o| start.checked_add(o))
                .ok_or(Error::StoreLayout)
        };
        let area = |i: u32, kind| RecordArea::new(flash, kind, at(i)?, bank_len);
        Ok(Layout {
            setup: area(0, RecordKind::SETUP)?,
            pressure_calibration: area(1, RecordKind::PRESSURE_CALIBRATION)?,
            alarm_thresholds: area(2, RecordKind::ALARM_THRESHOLDS)?,
            gas_model_ref: area(3, RecordKind::GAS_MODEL_REF)?,
            temperature_calibration: area(4, RecordKind::TEMPERATURE_CALIBRATION)?,
            tracking: area(5, RecordKind::TRACKING)?,
            blobs: BlobSlots::new(flash, at(6)?, slot_len)?,
        })
    }

    /// Bytes [`Layout::contiguous`] takes for these lengths.
    pub const fn size(bank_len: u32, slot_len: u32) -> u32 {
        6 * 2 * bank_len + 2 * slot_len
    }

    /// Checks that every area holds its own kind.
    pub fn check(&self) -> Result<(), Error> {
        let kinds = [
            (self.setup.kind(), RecordKind::SETUP),
            (
                self.pressure_calibration.kind(),
                RecordKind::PRESSURE_CALIBRATION,
            ),
            (self.alarm_thresholds.kind(), RecordKind::ALARM_THRESHOLDS),
            (self.gas_model_ref.kind(), RecordKind::GAS_MODEL_REF),
            (
                self.temperature_calibration.kind(),
                RecordKind::TEMPERATURE_CALIBRATION,
            ),
            (self.tracking.kind(), RecordKind::TRACKING),
        ];
        if kinds.iter().all(|(a, b)| a == b) {
            Ok(())
        } else {
            Err(Error::StoreLayout)
        }
    }
}
