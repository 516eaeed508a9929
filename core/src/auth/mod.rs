//! Authenticated commands: challenge–response with HMAC-SHA-256.
//!
//! Reading telemetry, identity and records needs nothing. Every command that
//! changes the device ([`Command`](crate::link::Command)) must be signed with the per-device secret
//! provisioned at manufacture:
//!
//! 1. The host sends [`GetChallenge`](crate::link::GetChallenge); the device
//!    draws a fresh 16-byte nonce from its [`NonceSource`] and opens a signing
//!    session valid for [`Policy::session_ms`].
//! 2. The host signs each command: `mac = HMAC-SHA-256(secret, input)` with
//!    `input` = [`command_signing_input`] (a domain string, the device serial,
//!    the nonce, a counter 1, 2, … and the postcard encoding of the command).
//! 3. The device checks the signature, then the counter (must be the next one
//!    of the session), and only then looks at the command. A replayed frame
//!    fails the counter (same session) or the signature (any other session,
//!    whose nonce differs); a frame for another device fails the signature
//!    (the serial is signed).
//! 4. The device answers a carried-out command with its own signature
//!    ([`done_signing_input`]) so the host knows the command really took effect.
//!
//! A failed signature or counter closes the session and counts as a failure;
//! after [`Policy::free_failures`] failures in a row the device refuses
//! everything for a back-off that doubles with each further failure (time is
//! passed in), up to [`Policy::max_lockout_ms`]. A good signature resets the
//! count.
//!
//! The secret never leaves the device and is never sent: it is not a record
//! and no request reads it.

use crate::error::DeviceSetting;
use hmac::{Hmac, KeyInit, Mac};
use sha2::Sha256;

use crate::Error;
/// Length of a device nonce, bytes.
pub const NONCE_LEN: usize = 16;
/// Length of an HMAC-SHA-256 tag, bytes.
pub const MAC_LEN: usize = 32;

use crate::time::{Instant, Millis};

/// Length of the device secret, bytes.
pub const SECRET_LEN: usize = 32;

/// Domain string that starts every command signature.
pub const COMMAND_DOMAIN: &[u8] = b"isochor/1/command";
/// Domain string that starts every confirmation signature.
pub const DONE_DOMAIN: &[u8] = b"isochor/1/done";

type HmacSha256 = Hmac<Sha256>;

/// Where the device gets its nonces: implemented by the firmware.
///
/// Contract: every call fills `out` with bytes an attacker cannot predict
/// (a hardware random generator, or a cryptographic generator seeded from
/// one); two calls never give the same nonce in practice. A counter or a
/// timer is **not** acceptable.
pub trait NonceSource {
    /// Fills `out` with fresh unpredictable bytes.
    fn fill_nonce(&mut self, out: &mut [u8; NONCE_LEN]);
}

/// The per-device secret (256 bits, random, provisioned at manufacture).
#[derive(Clone)]
pub struct Secret([u8; SECRET_LEN]);

impl Secret {
    /// Wraps secret bytes.
    pub const fn new(bytes: [u8; SECRET_LEN]) -> Secret {
        Secret(bytes)
    }

    /// Parses 64 hexadecimal digits (surrounding whitespace ignored).
    pub fn from_hex(text: &str) -> Result<Secret, Error> {
        let text = text.trim();
        let mut out = [0u8; SECRET_LEN];
        if text.len() != 2 * SECRET_LEN {
            return Err(Error::OutOfRange(DeviceSetting::SecretLength.into()));
        }
        for (byte, pair) in out.iter_mut().zip(text.as_bytes().chunks_exact(2)) {
            let hi = hex_digit(pair.first().copied())?;
            let lo = hex_digit(pair.get(1).copied())?;
            *byte = (hi << 4) | lo;
        }
        Ok(Secret(out))
    }

    /// A 256-bit key derived from the secret for another purpose,
    /// HMAC-SHA-256(secret, `label`): the secret itself never leaves this
    /// type (for example the key of a board's nonce generator).
    pub fn derive(&self, label: &[u8]) -> [u8; 32] {
        let mut m = self.mac();
        m.update(label);
        m.finalize().into_bytes().into()
    }

    fn mac(&self) -> HmacSha256 {
        // HMAC takes keys of any length: this cannot fail for 32 bytes.
        match HmacSha256::new_from_slice(&self.0) {
            Ok(m) => m,
            Err(_) => HmacSha256::new(&Default::default()),
        }
    }
}

impl core::fmt::Debug for Secret {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str("Secret(..)")
    }
}

/// The provisioning block written at manufacture into the device's
/// protected flash (or, in emulation, loaded by the emulator at a fixed
/// address): who the device is and its secret.
///
/// ```text
/// magic "IZPV" · version:u8 = 1 · 3 zero bytes · serial:u64-le · secret:32 bytes
/// · CRC-32C:u32-le of everything before it          (52 bytes)
/// ```
#[derive(Clone, Debug)]
pub struct Provisioning {
    /// Serial number.
    pub serial: u64,
    /// The device secret.
    pub secret: Secret,
}

impl Provisioning {
    /// Length of the block, bytes.
    pub const LEN: usize = 52;
    const MAGIC: [u8; 4] = *b"IZPV";
    const VERSION: u8 = 1;

    /// The block's bytes.
    pub fn to_bytes(&self) -> [u8; Provisioning::LEN] {
        let mut out = [0u8; Provisioning::LEN];
        let serial = self.serial.to_le_bytes();
        let body = Provisioning::MAGIC
            .iter()
            .chain(&[Provisioning::VERSION, 0, 0, 0])
            .chain(&serial)
            .chain(&self.secret.0);
        for (d, s) in out.iter_mut().zip(body) {
            *d = *s;
        }
        if let Some((head, tail)) = out.split_last_chunk_mut::<4>() {
            *tail = crate::checksum::crc32c(head).to_le_bytes();
        }
        out
    }

    /// Reads a block; `None` when it is not a valid one (never
    /// provisioned, erased, damaged or of another version).
    pub fn from_bytes(b: &[u8]) -> Option<Provisioning> {
        let b = b.get(..Provisioning::LEN)?;
        let (head, crc) = b.split_last_chunk::<4>()?;
        if crate::checksum::crc32c(head) != u32::from_le_bytes(*crc)
            || head.get(..4)? != Provisioning::MAGIC
            || *head.get(4)? != Provisioning::VERSION
        {
            return None;
        }
        let serial = u64::from_le_bytes(head.get(8..16)?.try_into().ok()?);
        let secret: [u8; SECRET_LEN] = head.get(16..48)?.try_into().ok()?;
        Some(Provisioning {
            serial,
            secret: Secret(secret),
        })
    }
}

fn hex_digit(c: Option<u8>) -> Result<u8, Error> {
    match c {
        Some(c @ b'0'..=b'9') => Ok(c - b'0'),
        Some(c @ b'a'..=b'f') => Ok(c - b'a' + 10),
        Some(c @ b'A'..=b'F') => Ok(c - b'A' + 10),
        _ => Err(Error::OutOfRange(DeviceSetting::SecretDigits.into())),
    }
}

/// The bytes a command signature covers, fed to `sink` piece by piece:
/// `COMMAND_DOMAIN ‖ serial (u64 LE) ‖ nonce (16) ‖ counter (u32 LE) ‖
/// command`, where `command` is the command's encoding as it travels (the
/// link's postcard bytes).
pub fn command_signing_input(
    serial: u64,
    nonce: &[u8; NONCE_LEN],
    counter: u32,
    command: &[u8],
    sink: &mut dyn FnMut(&[u8]),
) {
    sink(COMMAND_DOMAIN);
    sink(&serial.to_le_bytes());
    sink(nonce);
    sink(&counter.to_le_bytes());
    sink(command);
}

fn command_mac(
    secret: &Secret,
    serial: u64,
    nonce: &[u8; NONCE_LEN],
    counter: u32,
    command: &[u8],
) -> HmacSha256 {
    let mut mac = secret.mac();
    command_signing_input(serial, nonce, counter, command, &mut |b| mac.update(b));
    mac
}

/// The bytes a confirmation signature covers:
/// `DONE_DOMAIN ‖ serial (u64 LE) ‖ nonce (16) ‖ counter (u32 LE)`.
pub fn done_signing_input(
    serial: u64,
    nonce: &[u8; NONCE_LEN],
    counter: u32,
    sink: &mut dyn FnMut(&[u8]),
) {
    sink(DONE_DOMAIN);
    sink(&serial.to_le_bytes());
    sink(nonce);
    sink(&counter.to_le_bytes());
}

/// Signs a command's bytes (host side).
pub fn sign_command(
    secret: &Secret,
    serial: u64,
    nonce: &[u8; NONCE_LEN],
    counter: u32,
    command: &[u8],
) -> [u8; MAC_LEN] {
    command_mac(secret, serial, nonce, counter, command)
        .finalize()
        .into_bytes()
        .into()
}

/// Signs a confirmation (device side).
pub fn sign_done(
    secret: &Secret,
    serial: u64,
    nonce: &[u8; NONCE_LEN],
    counter: u32,
) -> [u8; MAC_LEN] {
    let mut mac = secret.mac();
    done_signing_input(serial, nonce, counter, &mut |b| mac.update(b));
    mac.finalize().into_bytes().into()
}

/// Checks a confirmation in constant time (host side).
pub fn verify_done(
    secret: &Secret,
    serial: u64,
    nonce: &[u8; NONCE_LEN],
    counter: u32,
    tag: &[u8; MAC_LEN],
) -> bool {
    let mut mac = secret.mac();
    done_signing_input(serial, nonce, counter, &mut |b| mac.update(b));
    mac.verify_slice(tag).is_ok()
}

/// How strict the device is.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Policy {
    /// How long a session stays open after its challenge, ms.
    pub session_ms: u32,
    /// Failures in a row that cost nothing (typing or clock slips).
    pub free_failures: u32,
    /// Lock-out after the first costly failure, ms; doubles with each further one.
    pub base_lockout_ms: u64,
    /// Longest lock-out, ms.
    pub max_lockout_ms: u64,
}

impl Default for Policy {
    /// 60 s sessions; 3 free failures; then 1 s, 2 s, 4 s … up to 15 min.
    fn default() -> Policy {
        Policy {
            session_ms: 60_000,
            free_failures: 3,
            base_lockout_ms: 1_000,
            max_lockout_ms: 15 * 60_000,
        }
    }
}

#[derive(Clone, Copy, Debug)]
struct Session {
    nonce: [u8; NONCE_LEN],
    opened: Instant,
    next_counter: u32,
}

/// A command that passed the checks, with what the device needs to confirm it.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Verified {
    /// The command's counter.
    pub counter: u32,
    /// The confirmation signature to send back ([`sign_done`]).
    pub done_mac: [u8; MAC_LEN],
}

/// The device side: sessions, signature checks, failure count and back-off.
#[derive(Debug)]
pub struct Authenticator {
    secret: Secret,
    serial: u64,
    policy: Policy,
    session: Option<Session>,
    failures: u32,
    locked_until: Option<Instant>,
}

impl Authenticator {
    /// The authenticator of device `serial` with its secret.
    pub fn new(secret: Secret, serial: u64, policy: Policy) -> Authenticator {
        Authenticator {
            secret,
            serial,
            policy,
            session: None,
            failures: 0,
            locked_until: None,
        }
    }

    /// The policy in force.
    pub fn policy(&self) -> &Policy {
        &self.policy
    }

    /// Failed attempts since the last good signature.
    pub fn failures(&self) -> u32 {
        self.failures
    }

    /// Time left in a lock-out, if one is running at `now`.
    pub fn locked_for(&self, now: Instant) -> Option<Millis> {
        match self.locked_until {
            Some(until) if until > now => Some(until - now),
            _ => None,
        }
    }

    /// True while a session is open at `now`.
    pub fn session_open(&self, now: Instant) -> bool {
        self.session
            .is_some_and(|s| now.since(s.opened).as_millis() < u64::from(self.policy.session_ms))
    }

    /// Opens a new session (closing any other) and returns its nonce.
    /// Refused during a lock-out.
    pub fn challenge(
        &mut self,
        now: Instant,
        rng: &mut dyn NonceSource,
    ) -> Result<[u8; NONCE_LEN], Error> {
        if let Some(left) = self.locked_for(now) {
            return Err(Error::LockedOut(left.as_millis()));
        }
        let mut nonce = [0u8; NONCE_LEN];
        rng.fill_nonce(&mut nonce);
        self.session = Some(Session {
            nonce,
            opened: now,
            next_counter: 1,
        });
        Ok(nonce)
    }

    /// Checks a signed command at `now`: its counter, tag and bytes (as
    /// they travelled). On success the session moves to the next counter;
    /// on any failure the session is closed.
    pub fn verify(
        &mut self,
        now: Instant,
        counter: u32,
        tag: &[u8; MAC_LEN],
        command: &[u8],
    ) -> Result<Verified, Error> {
        if let Some(left) = self.locked_for(now) {
            return Err(Error::LockedOut(left.as_millis()));
        }
        let Some(session) = self.session.filter(|_| self.session_open(now)) else {
            self.session = None;
            return Err(Error::NoSession);
        };
        let good = command_mac(&self.secret, self.serial, &session.nonce, counter, command)
            .verify_slice(tag)
            .is_ok();
        if !good {
            return Err(self.fail(now, Error::BadSignature));
        }
        if counter != session.next_counter {
            return Err(self.fail(now, Error::Replay));
        }
        self.failures = 0;
        self.session = Some(Session {
            next_counter: session.next_counter.saturating_add(1),
            ..session
        });
        Ok(Verified {
            counter,
            done_mac: sign_done(&self.secret, self.serial, &session.nonce, counter),
        })
    }

    /// Closes the session (after a reboot command, for example).
    pub fn close_session(&mut self) {
        self.session = None;
    }

    fn fail(&mut self, now: Instant, error: Error) -> Error {
        self.session = None;
        self.failures = self.failures.saturating_add(1);
        if self.failures > self.policy.free_failures {
            let doublings = (self.failures - self.policy.free_failures - 1).min(40);
            let lock = self
                .policy
                .base_lockout_ms
                .saturating_mul(1u64 << doublings)
                .min(self.policy.max_lockout_ms);
            self.locked_until = Some(now + Millis(lock));
        }
        error
    }
}

#[cfg(test)]
mod tests;
