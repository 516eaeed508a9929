//! The device's services to the host that touch its storage and its
//! secret: the configuration in force and its zero offsets, loading a new
//! configuration, signature checks. The [`Gauge`](super::Gauge) dispatches
//! the host's messages here and runs the pipeline.

use embedded_storage::nor_flash::NorFlash;

use super::Zero;
use crate::auth::{Authenticator, NonceSource};
use crate::link::{
    CHUNK_MAX_LEN, ConfigFault, ConfigPart, Identity, MAX_FRAME_LEN, PROTOCOL_VERSION, Refusal,
};
use crate::store::{BlobRef, ChunkOutcome, ConfigRef, Layout, Loaded, Origin, origin_status};
use crate::time::Instant;
use crate::{Error, Status};

/// What a completed configuration load asks of the gauge.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum LoadStep {
    /// More pieces to come.
    More,
    /// The blob is complete and intact in its slot: the gauge checks that
    /// it is a configuration it can run, then commits it
    /// ([`Service::commit`]).
    Complete(BlobRef),
}

/// Storage, identity and signatures of a device.
pub struct Service<F> {
    identity: Identity,
    auth: Authenticator,
    flash: F,
    layout: Layout,
    config: Loaded<ConfigRef>,
    write_failed: bool,
}

impl<F: NorFlash> Service<F> {
    /// A service for the device `identity` (its protocol and frame size are
    /// filled in here) with its authenticator, flash and storage layout.
    /// Loads the configuration reference (falling back as the store
    /// documents); a reference whose blob is damaged reads as none.
    #[inline(never)]
    pub fn new(
        mut identity: Identity,
        auth: Authenticator,
        mut flash: F,
        layout: Layout,
    ) -> Result<Service<F>, Error> {
        layout.check()?;
        identity.protocol = PROTOCOL_VERSION;
        identity.max_frame_len = MAX_FRAME_LEN as u16;
        identity.config_capacity = layout.blobs.capacity();
        let mut config: Loaded<ConfigRef> = layout.config.load(&mut flash);
        if config.value.blob.len > 0 && !layout.blobs.check(&mut flash, &config.value.blob) {
            // The blob itself is damaged: no configuration (the offsets stay).
            config.value.blob = BlobRef::NONE;
            config.damaged = true;
            config.origin = Origin::Default;
        }
        Ok(Service {
            identity,
            auth,
            flash,
            layout,
            config,
            write_failed: false,
        })
    }

    /// The identity announced.
    pub fn identity(&self) -> &Identity {
        &self.identity
    }

    /// The configuration reference in force and where it came from.
    pub fn config(&self) -> &Loaded<ConfigRef> {
        &self.config
    }

    /// The zero offsets in force.
    pub fn zero(&self) -> Zero {
        Zero {
            pressure: self.config.value.zero_pressure,
            temperature: self.config.value.zero_temperature,
        }
    }

    /// The storage layout.
    pub fn layout(&self) -> &Layout {
        &self.layout
    }

    /// The flash.
    pub fn flash_mut(&mut self) -> &mut F {
        &mut self.flash
    }

    /// The flash and the layout together (to map a blob).
    pub fn flash_and_layout(&mut self) -> (&mut F, &Layout) {
        (&mut self.flash, &self.layout)
    }

    /// Gives the flash back (a restart builds a new service from it).
    pub fn into_flash(self) -> F {
        self.flash
    }

    /// The authenticator.
    pub fn auth_mut(&mut self) -> &mut Authenticator {
        &mut self.auth
    }

    /// Device status flags (bits 24–30) of the storage and the signatures.
    pub fn status(&self, now: Instant) -> Status {
        let c = &self.config;
        let mut s = origin_status(c.origin, c.damaged);
        if c.value.blob.len == 0 {
            s |= Status::CONFIG_DEFAULT;
        }
        if self.write_failed {
            s |= Status::STORAGE_WRITE_FAILED;
        }
        if self.auth.locked_for(now).is_some() {
            s |= Status::AUTH_LOCKED_OUT;
        }
        s
    }

    /// Opens a signing session.
    pub fn challenge(
        &mut self,
        now: Instant,
        rng: &mut dyn NonceSource,
    ) -> Result<[u8; crate::auth::NONCE_LEN], Error> {
        self.auth.challenge(now, rng)
    }

    /// A piece of the configuration in force from `offset`.
    #[inline(never)]
    pub fn read_config(&mut self, offset: u32) -> Result<ConfigPart, Error> {
        let c = self.config.value;
        let mut part = ConfigPart {
            total_len: c.blob.len,
            crc: c.blob.crc,
            origin: self.config.origin.code(),
            zero_pressure: c.zero_pressure,
            zero_temperature: c.zero_temperature,
            offset,
            bytes: heapless::Vec::new(),
        };
        if offset < c.blob.len {
            let n = (c.blob.len - offset).min(CHUNK_MAX_LEN as u32) as usize;
            let mut buf = [0u8; CHUNK_MAX_LEN];
            let out = buf.get_mut(..n).ok_or(Error::BufferTooSmall)?;
            self.layout
                .blobs
                .read(&mut self.flash, &c.blob, offset, out)?;
            part.bytes = heapless::Vec::from_slice(out).map_err(|_| Error::BufferTooSmall)?;
        }
        Ok(part)
    }

    /// Takes one piece of a new configuration (into the slot not in use).
    #[inline(never)]
    pub fn chunk(
        &mut self,
        offset: u32,
        total_len: u32,
        blob_crc: u32,
        bytes: &[u8],
    ) -> Result<LoadStep, Error> {
        let current = self.config.value.blob;
        let outcome = self.layout.blobs.chunk(
            &mut self.flash,
            &current,
            offset,
            total_len,
            blob_crc,
            bytes,
        )?;
        Ok(match outcome {
            ChunkOutcome::Next(_) => LoadStep::More,
            ChunkOutcome::Complete(r) => LoadStep::Complete(r),
        })
    }

    /// Commits a new reference: `blob` (a completed load, checked by the
    /// gauge) and `zero` (power-safe: the previous reference stays in force
    /// until the new one is written whole).
    #[inline(never)]
    pub fn commit(&mut self, blob: BlobRef, zero: Zero) -> Result<(), Error> {
        let value = ConfigRef {
            blob,
            zero_pressure: zero.pressure,
            zero_temperature: zero.temperature,
        };
        let area = self.layout.config;
        let stored = area.store(&mut self.flash, &value);
        self.write_failed = stored.is_err();
        stored?;
        self.config = area.load(&mut self.flash);
        Ok(())
    }
}

/// The refusal of a configuration that does not validate: every reason is
/// [`Refusal::BadConfig`].
pub fn config_refusal(e: Error) -> Refusal {
    match e {
        Error::OutOfRange(why) | Error::NotFinite(why) => bad_config(ConfigFault::Value(why)),
        e => match refusal(e) {
            r @ Refusal::BadConfig { .. } => r,
            _ => bad_config(ConfigFault::Content),
        },
    }
}

fn bad_config(reason: ConfigFault) -> Refusal {
    Refusal::BadConfig { reason }
}

/// The refusal that tells the host about `e`.
pub fn refusal(e: Error) -> Refusal {
    match e {
        Error::NoSession => Refusal::NoSession,
        Error::BadSignature => Refusal::BadSignature,
        Error::Replay => Refusal::Replay,
        Error::LockedOut(ms) => Refusal::LockedOut {
            retry_after_ms: u32::try_from(ms).unwrap_or(u32::MAX),
        },
        Error::OutOfRange(field) | Error::NotFinite(field) => Refusal::OutOfRange { field },
        Error::ChunkOrder(expected) => Refusal::ChunkOrder { expected },
        Error::BlobCrc => Refusal::BlobCrc,
        Error::RecordTooLarge => Refusal::BlobTooLarge,
        Error::Flash | Error::SequenceExhausted | Error::StoreLayout => Refusal::Storage,
        Error::Malformed(why) => bad_config(ConfigFault::Malformed(why)),
        Error::ModelData(why) => bad_config(ConfigFault::ModelData(why)),
        Error::ModelUnusable(why) => bad_config(ConfigFault::ModelUnusable(why)),
        Error::ChecksumMismatch => bad_config(ConfigFault::Checksum),
        Error::ProtocolVersion(_) => bad_config(ConfigFault::FormatVersion),
        _ => Refusal::Unsupported,
    }
}
