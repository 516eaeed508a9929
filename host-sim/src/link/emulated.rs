//! An emulated device: the core's device end of the link ([`Responder`]) on a
//! simulated NOR flash, served over any [`Transport`]. Tests use it to run
//! host and device together in one process; `isochor` commands can talk to it
//! over TCP.

use std::time::{Duration, Instant as StdInstant};

use isochor_core::auth::{Authenticator, NonceSource, Policy, Secret};
use isochor_core::link::device::{DeviceActions, Responder};
use isochor_core::link::{Identity, InjectSample, Message, NONCE_LEN, SensorChannel, capability};
use isochor_core::store::sim::SimFlash;
use isochor_core::store::{BlobSlots, GasModelRef, RecordArea, RecordKind};
use isochor_core::time::Instant;
use isochor_core::{Error as CoreError, SetupFx};

use super::transport::{Link, LinkEvent, Transport};
use crate::Error;

/// The emulated device's flash: 64 KiB, 1 KiB sectors, 4-byte writes.
pub type EmulatedFlash = SimFlash<65536, 1024, 4>;

/// Layout: setup area 0–4 KiB, gas-model reference 4–8 KiB (two 2 KiB banks
/// each), gas-model slots 8–64 KiB (two 28 KiB slots).
const SETUP_AT: u32 = 0;
const GAS_REF_AT: u32 = 4096;
const BANK_LEN: u32 = 2048;
const BLOBS_AT: u32 = 8192;
const SLOT_LEN: u32 = 28 * 1024;

/// Nonces from the operating system's random source.
pub struct OsNonces;

impl NonceSource for OsNonces {
    fn fill_nonce(&mut self, out: &mut [u8; NONCE_LEN]) {
        // The OS random source does not fail on supported systems; a device
        // without randomness must not answer challenges at all.
        getrandom::fill(out).expect("operating-system random source");
    }
}

/// What the emulated firmware was asked to do.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Actions {
    /// Setups applied, in order.
    pub setups: Vec<SetupFx>,
    /// Gas models committed, in order.
    pub gas_models: Vec<GasModelRef>,
    /// Channels zeroed, in order.
    pub zeroed: Vec<SensorChannel>,
    /// Times alarms were cleared.
    pub alarms_cleared: u32,
    /// Restarts done.
    pub reboots: u32,
    /// Samples injected, in order.
    pub samples: Vec<InjectSample>,
    reboot_pending: bool,
}

impl DeviceActions for Actions {
    fn setup_changed(&mut self, setup: &SetupFx) {
        self.setups.push(*setup);
    }
    fn gas_model_changed(&mut self, model: &GasModelRef) {
        self.gas_models.push(*model);
    }
    fn zero_calibration(&mut self, channel: SensorChannel) -> Result<(), CoreError> {
        self.zeroed.push(channel);
        Ok(())
    }
    fn clear_alarms(&mut self) {
        self.alarms_cleared += 1;
    }
    fn reboot_after_reply(&mut self) {
        self.reboot_pending = true;
    }
    fn inject(&mut self, sample: &InjectSample) -> Result<(), CoreError> {
        self.samples.push(sample.clone());
        Ok(())
    }
}

/// A device in software.
pub struct EmulatedDevice {
    responder: Option<Responder<EmulatedFlash>>,
    identity: Identity,
    secret: Secret,
    policy: Policy,
    started: StdInstant,
    /// What the firmware was asked to do.
    pub actions: Actions,
}

impl EmulatedDevice {
    /// A device with serial `serial` and `secret`, erased flash.
    pub fn new(serial: u64, secret: Secret) -> Result<EmulatedDevice, Error> {
        Self::with_flash(serial, secret, Box::new(EmulatedFlash::new()))
    }

    /// A device starting from the given flash contents.
    pub fn with_flash(
        serial: u64,
        secret: Secret,
        flash: Box<EmulatedFlash>,
    ) -> Result<EmulatedDevice, Error> {
        let identity = Identity {
            serial,
            hardware_rev: 1,
            firmware_version: [0, 1, 0],
            protocol: 0,
            max_frame_len: 0,
            capabilities: capability::SIGNED_CONFIG
                | capability::GAS_MODEL_LOAD
                | capability::SAMPLE_INJECTION,
        };
        let mut dev = EmulatedDevice {
            responder: None,
            identity,
            secret,
            policy: Policy::default(),
            started: StdInstant::now(),
            actions: Actions::default(),
        };
        dev.boot(*flash)?;
        Ok(dev)
    }

    fn boot(&mut self, flash: EmulatedFlash) -> Result<(), Error> {
        let setup = RecordArea::new(&flash, RecordKind::SETUP, SETUP_AT, BANK_LEN)?;
        let gas_ref = RecordArea::new(&flash, RecordKind::GAS_MODEL_REF, GAS_REF_AT, BANK_LEN)?;
        let blobs = BlobSlots::new(&flash, BLOBS_AT, SLOT_LEN)?;
        let auth = Authenticator::new(self.secret.clone(), self.identity.serial, self.policy);
        self.responder = Some(Responder::new(
            self.identity.clone(),
            auth,
            flash,
            setup,
            gas_ref,
            blobs,
        )?);
        Ok(())
    }

    /// The device's responder (its stored setup, status, flash).
    pub fn responder(&mut self) -> &mut Responder<EmulatedFlash> {
        self.responder
            .as_mut()
            .expect("the responder exists between boots")
    }

    /// Time since the device started.
    pub fn now(&self) -> Instant {
        Instant(self.started.elapsed().as_millis() as u64)
    }

    /// Answers one message (and restarts after a reboot command).
    pub fn handle(&mut self, msg: &Message) -> Result<Option<Message>, Error> {
        let now = self.now();
        let Some(r) = self.responder.as_mut() else {
            return Ok(None);
        };
        let reply = r.handle(now, msg, &mut OsNonces, &mut self.actions);
        if std::mem::take(&mut self.actions.reboot_pending) {
            self.actions.reboots += 1;
            if let Some(flash) = self.responder.take().map(Responder::into_flash) {
                self.boot(flash)?;
            }
        }
        Ok(reply)
    }

    /// Serves requests until the other end closes the link.
    pub fn serve<T: Transport>(&mut self, link: &mut Link<T>) -> Result<(), Error> {
        loop {
            match link.next_event(Duration::from_millis(50))? {
                Some(LinkEvent::Message(msg)) => {
                    if let Some(reply) = self.handle(&msg)? {
                        link.send(&reply)?;
                    }
                }
                Some(_) => {}
                None if link.closed() => return Ok(()),
                None => {}
            }
        }
    }
}
