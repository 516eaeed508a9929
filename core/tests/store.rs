//! Configuration storage against a NOR-flash double that enforces write-once
//! and erase rules and cuts the power at any byte.
//!
//! Figures (`cargo test -p isochor-core --test store -- --nocapture`): power
//! cut at every byte of ≥ 1,000 configuration writes with 0 lost, 0 corrupted,
//! 0 panics, 0 flash-rule violations; random images never panic; every
//! single-bit flip in stored copies is detected.

use isochor_core::Status;
use isochor_core::store::sim::SimFlash;
use isochor_core::store::{
    BlobRef, BlobSlots, ChunkOutcome, ConfigRef, Loaded, Origin, Record, RecordArea, RecordKind,
    ZERO_PRESSURE_MAX, ZERO_TEMPERATURE_MAX,
};
use postcard::experimental::max_size::MaxSize;
use proptest::prelude::*;

type Flash = SimFlash<4096, 1024, 4>;

/// xorshift64* (Vigna 2016): a small deterministic generator for test data.
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }
    fn range(&mut self, lo: u64, hi: u64) -> u64 {
        lo + self.next() % (hi - lo + 1)
    }
}

/// A random configuration reference inside the accepted ranges.
fn random_ref(rng: &mut Rng) -> ConfigRef {
    let v = ConfigRef {
        blob: BlobRef {
            slot: rng.range(0, 1) as u8,
            len: rng.range(0, u64::from(u32::MAX)) as u32,
            crc: rng.next() as u32,
        },
        zero_pressure: rng.range(0, 2 * ZERO_PRESSURE_MAX as u64) as i32 - ZERO_PRESSURE_MAX,
        zero_temperature: rng.range(0, 2 * ZERO_TEMPERATURE_MAX as u64) as i32
            - ZERO_TEMPERATURE_MAX,
    };
    v.validate().unwrap();
    v
}

fn area(flash: &Flash) -> RecordArea {
    RecordArea::new(flash, RecordKind::CONFIG, 0, 1024).unwrap()
}

fn cost<const N: usize>(before: &SimFlash<N, 1024, 4>, after: &SimFlash<N, 1024, 4>) -> u64 {
    (after.bytes_written() - before.bytes_written()) + 2 * (after.erases() - before.erases())
}

#[test]
fn record_max_size_is_a_true_bound() {
    // Largest values in every field: every varint at its longest.
    let v = ConfigRef {
        blob: BlobRef {
            slot: u8::MAX,
            len: u32::MAX,
            crc: u32::MAX,
        },
        zero_pressure: i32::MIN,
        zero_temperature: i32::MIN,
    };
    let mut buf = [0u8; 64];
    let n = postcard::to_slice(&v, &mut buf).unwrap().len();
    assert_eq!(n, ConfigRef::POSTCARD_MAX_SIZE);
    ConfigRef::safe_default().validate().unwrap();
}

#[test]
fn store_and_load_round_trip() {
    let mut flash = Flash::new();
    let a = area(&flash);
    let empty: Loaded<ConfigRef> = a.load(&mut flash);
    assert_eq!(empty.origin, Origin::Default);
    assert!(!empty.damaged);
    assert_eq!(empty.value, ConfigRef::safe_default());
    let mut rng = Rng(11);
    for i in 1..=100u32 {
        let s = random_ref(&mut rng);
        assert_eq!(a.store(&mut flash, &s), Ok(i));
        let l: Loaded<ConfigRef> = a.load(&mut flash);
        assert_eq!(
            (l.value, l.origin, l.damaged, l.seq),
            (s, Origin::Stored, false, Some(i))
        );
    }
    assert_eq!(flash.violations(), 0);
    // 100 copies of 36–52 bytes (header, data, CRC) in two 1 KiB banks:
    // the banks alternated.
    assert!(flash.erases() >= 3, "{}", flash.erases());
}

#[test]
fn out_of_range_values_are_never_stored() {
    let mut flash = Flash::new();
    let a = area(&flash);
    let s = ConfigRef {
        zero_pressure: ZERO_PRESSURE_MAX + 1,
        ..ConfigRef::default()
    };
    assert_eq!(
        a.store(&mut flash, &s),
        Err(isochor_core::Error::OutOfRange(
            isochor_core::SensorSetting::PressureZeroOffset.into()
        ))
    );
    assert_eq!(flash.bytes_written(), 0);
    assert_eq!(flash.erases(), 0);
}

#[test]
fn layout_is_checked() {
    let flash = Flash::new();
    assert!(RecordArea::new(&flash, RecordKind::CONFIG, 512, 1024).is_err()); // not sector aligned
    assert!(RecordArea::new(&flash, RecordKind::CONFIG, 0, 1000).is_err()); // not whole sectors
    assert!(RecordArea::new(&flash, RecordKind::CONFIG, 3072, 1024).is_err()); // past the end
    assert!(RecordArea::new(&flash, RecordKind::CONFIG, 2048, 1024).is_ok());
    assert!(BlobSlots::new(&flash, 2048, 1000).is_err());
}

#[test]
fn power_cut_at_every_byte_of_1000_writes() {
    let mut flash = Flash::new();
    let a = area(&flash);
    let mut rng = Rng(0x5EED_1234);
    let mut previous: Option<ConfigRef> = None;
    let (mut cuts, mut old_kept, mut new_taken) = (0u64, 0u64, 0u64);
    let writes = 1000;
    for _ in 0..writes {
        let next = random_ref(&mut rng);
        let recovery = random_ref(&mut rng);
        let mut done = flash.clone();
        a.store(&mut done, &next).unwrap();
        let ops = cost(&flash, &done);
        for cut in 0..ops {
            cuts += 1;
            let mut f = flash.clone();
            f.cut_power_after(cut);
            assert!(
                a.store(&mut f, &next).is_err(),
                "write finished inside its budget"
            );
            f.restore_power();
            // Reboot: the value is the acknowledged one or the new one.
            let l: Loaded<ConfigRef> = a.load(&mut f);
            match previous {
                Some(p) if l.value == p => old_kept += 1,
                _ if l.value == next => new_taken += 1,
                None if l.value == ConfigRef::safe_default() => {
                    assert_eq!(l.origin, Origin::Default);
                    old_kept += 1;
                }
                _ => panic!("lost or corrupted after a cut at {cut} of {ops}: {l:?}"),
            }
            if previous.is_some() {
                assert_ne!(l.origin, Origin::Default, "acknowledged value lost");
            }
            // The store keeps working after the cut.
            a.store(&mut f, &recovery).unwrap();
            let l: Loaded<ConfigRef> = a.load(&mut f);
            assert_eq!((l.value, l.origin), (recovery, Origin::Stored));
            assert_eq!(f.violations(), 0, "flash rule broken after a cut at {cut}");
        }
        flash = done;
        previous = Some(next);
        let l: Loaded<ConfigRef> = a.load(&mut flash);
        assert_eq!((l.value, l.origin), (next, Origin::Stored));
    }
    assert_eq!(flash.violations(), 0);
    println!(
        "power cuts: {writes} writes, {cuts} cut points (every byte and erase half), \
         {old_kept} kept the previous value, {new_taken} the new one; 0 lost, 0 corrupted"
    );
    assert!(cuts >= 30_000);
}

#[test]
fn every_single_bit_flip_in_stored_copies_is_detected() {
    let mut flash = Flash::new();
    let a = area(&flash);
    let mut rng = Rng(77);
    // Enough writes that both banks hold copies.
    let values: Vec<ConfigRef> = (0..40).map(|_| random_ref(&mut rng)).collect();
    for v in &values {
        a.store(&mut flash, v).unwrap();
    }
    let latest = *values.last().unwrap();
    let used: Vec<usize> = (0..flash.image().len())
        .filter(|&i| flash.image()[i] != 0xFF)
        .collect();
    let (mut flips, mut fallback) = (0u64, 0u64);
    // Every bit of every non-erased byte, and every bit of the erased bytes
    // right after the copies (a flip there must be noticed too).
    for &byte in &used {
        for bit in 0..8 {
            let mut f = flash.clone();
            f.flip_bit(byte * 8 + bit);
            flips += 1;
            let l: Loaded<ConfigRef> = a.load(&mut f);
            assert!(l.damaged, "flip of bit {bit} of byte {byte} not detected");
            assert!(values.contains(&l.value), "flip gave a value never written");
            if l.value != latest {
                assert_eq!(l.origin, Origin::Fallback);
                fallback += 1;
            }
            let status = isochor_core::store::origin_status(l.origin, l.damaged);
            assert!(status.contains(Status::STORAGE_DAMAGED));
        }
    }
    println!(
        "bit flips: {flips} single-bit flips in {} stored bytes, {flips} detected, \
         {fallback} fell back to an older copy",
        used.len()
    );
    assert!(fallback > 0);
}

#[test]
fn blob_chunks_commit_only_when_whole_and_checked() {
    let mut flash = SimFlash::<8192, 1024, 4>::new();
    let mut slots = BlobSlots::new(&flash, 4096, 2048).unwrap();
    let blob: Vec<u8> = (0..1500u32).map(|i| (i * 7 + 3) as u8).collect();
    let crc = isochor_core::checksum::crc32c(&blob);
    let mut current = BlobRef::NONE;
    let mut offset = 0u32;
    let mut committed = None;
    for chunk in blob.chunks(113) {
        let r = slots
            .chunk(&mut flash, &current, offset, 1500, crc, chunk)
            .unwrap();
        offset += chunk.len() as u32;
        match r {
            ChunkOutcome::Next(n) => assert_eq!(n, offset),
            ChunkOutcome::Complete(g) => committed = Some(g),
        }
    }
    let g = committed.unwrap();
    assert_eq!((g.slot, g.len, g.crc), (0, 1500, crc));
    assert!(slots.check(&mut flash, &g));
    current = g;
    // A second load goes to the other slot; out-of-order and bad-CRC loads fail.
    let r = slots.chunk(&mut flash, &current, 0, 1500, crc ^ 1, &blob[..100]);
    assert!(matches!(r, Ok(ChunkOutcome::Next(100))));
    let r = slots.chunk(&mut flash, &current, 300, 1500, crc ^ 1, &blob[300..400]);
    assert_eq!(r, Err(isochor_core::Error::ChunkOrder(100)));
    let mut off = 100;
    let mut last = None;
    while off < 1500 {
        let end = (off + 100).min(1500);
        last = Some(slots.chunk(
            &mut flash,
            &current,
            off as u32,
            1500,
            crc ^ 1,
            &blob[off..end],
        ));
        off = end;
    }
    assert_eq!(last.unwrap(), Err(isochor_core::Error::BlobCrc));
    // The blob in use is untouched.
    assert!(slots.check(&mut flash, &current));
    // Every single-bit flip in the blob is detected.
    for bit in (4096 * 8..(4096 + 1500) * 8).step_by(7) {
        let mut f = flash.clone();
        f.flip_bit(bit);
        assert!(!slots.check(&mut f, &current));
    }
    assert_eq!(flash.violations(), 0);
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(2000))]

    /// Random flash images: loading never panics and gives a valid value;
    /// storing either fails cleanly or the value then loads back.
    #[test]
    fn random_images_never_panic(image in proptest::collection::vec(any::<u8>(), 0..4096),
                                 erased_runs in proptest::collection::vec((0usize..4096, 0usize..600), 0..6),
                                 seed in any::<u64>()) {
        let mut image = image;
        for (at, len) in erased_runs {
            for b in image.iter_mut().skip(at).take(len) { *b = 0xFF; }
        }
        let mut flash = Flash::from_image(&image);
        let a = area(&flash);
        let l: Loaded<ConfigRef> = a.load(&mut flash);
        prop_assert!(l.value.validate().is_ok());
        let v = random_ref(&mut Rng(seed | 1));
        if a.store(&mut flash, &v).is_ok() {
            let l: Loaded<ConfigRef> = a.load(&mut flash);
            prop_assert_eq!(l.value, v);
            prop_assert_eq!(l.origin, Origin::Stored);
        }
        let slots = BlobSlots::new(&flash, 2048, 1024).unwrap();
        let _ = slots.check(&mut flash, &BlobRef { slot: 1, len: 1024, crc: 0 });
    }
}

/// Loads one blob and commits its reference, as the device does.
fn load_blob(
    flash: &mut SimFlash<8192, 1024, 4>,
    slots: &mut BlobSlots,
    refs: &RecordArea,
    blob: &[u8],
) -> Result<BlobRef, isochor_core::Error> {
    let current: Loaded<ConfigRef> = refs.load(flash);
    let crc = isochor_core::checksum::crc32c(blob);
    let mut offset = 0u32;
    for chunk in blob.chunks(100) {
        if let ChunkOutcome::Complete(g) = slots.chunk(
            flash,
            &current.value.blob,
            offset,
            blob.len() as u32,
            crc,
            chunk,
        )? {
            refs.store(
                flash,
                &ConfigRef {
                    blob: g,
                    ..current.value
                },
            )?;
            return Ok(g);
        }
        offset += chunk.len() as u32;
    }
    Err(isochor_core::Error::BlobCrc)
}

#[test]
fn power_cut_during_configuration_loads_keeps_an_intact_configuration() {
    let mut flash = SimFlash::<8192, 1024, 4>::new();
    let refs = RecordArea::new(&flash, RecordKind::CONFIG, 0, 1024).unwrap();
    let slots = BlobSlots::new(&flash, 2048, 3072).unwrap();
    let blobs: Vec<Vec<u8>> = (0..4u32)
        .map(|k| {
            (0..(1500 + 300 * k))
                .map(|i| (i * (k + 3) + k) as u8)
                .collect()
        })
        .collect();
    let mut in_use: Option<BlobRef> = None;
    let mut cuts = 0;
    for blob in &blobs {
        let mut done = flash.clone();
        let g = load_blob(&mut done, &mut slots.clone(), &refs, blob).unwrap();
        let ops = cost(&flash, &done);
        for cut in 0..ops {
            cuts += 1;
            let mut f = flash.clone();
            f.cut_power_after(cut);
            assert!(load_blob(&mut f, &mut slots.clone(), &refs, blob).is_err());
            f.restore_power();
            let r: Loaded<ConfigRef> = refs.load(&mut f);
            let r = Loaded {
                value: r.value.blob,
                origin: r.origin,
                damaged: r.damaged,
                seq: r.seq,
            };
            if r.value == g {
                assert!(slots.check(&mut f, &g), "new reference to a damaged blob");
            } else {
                assert_eq!(
                    Some(r.value).filter(|v| v.len > 0),
                    in_use,
                    "configuration lost at {cut}"
                );
                if let Some(old) = in_use {
                    assert!(
                        slots.check(&mut f, &old),
                        "configuration in use damaged at {cut}"
                    );
                }
            }
            assert_eq!(f.violations(), 0);
        }
        flash = done;
        in_use = Some(g);
    }
    println!(
        "configuration loads: {} loads, {cuts} cut points, configuration in use always intact",
        blobs.len()
    );
}
