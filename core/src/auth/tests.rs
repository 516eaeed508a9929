use super::*;

/// A deterministic nonce source for tests (xorshift64*; not for devices).
struct TestNonces(u64);

impl NonceSource for TestNonces {
    fn fill_nonce(&mut self, out: &mut [u8; NONCE_LEN]) {
        for chunk in out.chunks_mut(8) {
            self.0 ^= self.0 >> 12;
            self.0 ^= self.0 << 25;
            self.0 ^= self.0 >> 27;
            let v = self.0.wrapping_mul(0x2545_F491_4F6C_DD1D).to_le_bytes();
            chunk.copy_from_slice(&v[..chunk.len()]);
        }
    }
}

const SERIAL: u64 = 0x1234_5678;

fn secret() -> Secret {
    Secret::new([7u8; SECRET_LEN])
}

/// A signed message as the link carries it: counter, MAC and the command's
/// bytes. The authenticator sees bytes only (it sits below the wire format),
/// so the commands here are short byte strings standing for encoded ones.
struct Signed {
    counter: u32,
    mac: [u8; MAC_LEN],
    command: &'static [u8],
}

/// Stand-ins for three encoded commands (any bytes do: only their MAC counts).
const CLEAR_ALARMS: &[u8] = &[3];
const REBOOT: &[u8] = &[5];
const ZERO_PRESSURE: &[u8] = &[6, 0];

fn signed(
    secret: &Secret,
    nonce: &[u8; NONCE_LEN],
    counter: u32,
    command: &'static [u8],
) -> Signed {
    Signed {
        counter,
        mac: sign_command(secret, SERIAL, nonce, counter, command),
        command,
    }
}

/// What a device does with a signed message: its counter, MAC and command
/// bytes to the authenticator.
fn check(auth: &mut Authenticator, now: Instant, s: &Signed) -> Result<Verified, Error> {
    auth.verify(now, s.counter, &s.mac, s.command)
}

#[test]
fn hmac_sha256_known_vectors() {
    // RFC 4231 §4.2 (test case 1) and §4.3 (test case 2), HMAC-SHA-256.
    let mut m = HmacSha256::new_from_slice(&[0x0b; 20]).unwrap();
    m.update(b"Hi There");
    assert_eq!(
        m.finalize().into_bytes()[..],
        hex("b0344c61d8db38535ca8afceaf0bf12b881dc200c9833da726e9376c2e32cff7")
    );
    let mut m = HmacSha256::new_from_slice(b"Jefe").unwrap();
    m.update(b"what do ya want for nothing?");
    assert_eq!(
        m.finalize().into_bytes()[..],
        hex("5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843")
    );
}

fn hex(s: &str) -> std::vec::Vec<u8> {
    (0..s.len())
        .step_by(2)
        .map(|i| u8::from_str_radix(&s[i..i + 2], 16).unwrap())
        .collect()
}

#[test]
fn secret_hex_parsing() {
    let text = "00112233445566778899aabbccddeeff00112233445566778899AABBCCDDEEFF\n";
    let s = Secret::from_hex(text).unwrap();
    assert_eq!(s.0[1], 0x11);
    assert_eq!(s.0[31], 0xff);
    assert!(Secret::from_hex("0011").is_err());
    assert!(Secret::from_hex(&"zz".repeat(32)).is_err());
    assert_eq!(std::format!("{s:?}"), "Secret(..)");
}

#[test]
fn good_session_then_replay_and_reorder_rejected() {
    let mut auth = Authenticator::new(secret(), SERIAL, Policy::default());
    let mut rng = TestNonces(1);
    let t0 = Instant(1_000);
    let nonce = auth.challenge(t0, &mut rng).unwrap();
    let first = signed(&secret(), &nonce, 1, CLEAR_ALARMS);
    let v = check(&mut auth, t0, &first).unwrap();
    assert_eq!(v.counter, 1);
    assert!(verify_done(&secret(), SERIAL, &nonce, 1, &v.done_mac));
    assert!(!verify_done(&secret(), SERIAL, &nonce, 2, &v.done_mac));
    // Same frame again: the counter is no longer the next one.
    assert_eq!(check(&mut auth, t0, &first), Err(Error::Replay));
    // The session is closed after a failure.
    let second = signed(&secret(), &nonce, 2, REBOOT);
    assert_eq!(check(&mut auth, t0, &second), Err(Error::NoSession));
    // In a new session the old frames carry the wrong nonce.
    let nonce2 = auth.challenge(t0, &mut rng).unwrap();
    assert_ne!(nonce, nonce2);
    assert_eq!(check(&mut auth, t0, &first), Err(Error::BadSignature));
    // Skipping ahead is refused too.
    let nonce3 = auth.challenge(t0, &mut rng).unwrap();
    let skip = signed(&secret(), &nonce3, 2, CLEAR_ALARMS);
    assert_eq!(check(&mut auth, t0, &skip), Err(Error::Replay));
}

#[test]
fn session_counts_up_and_expires() {
    let mut auth = Authenticator::new(secret(), SERIAL, Policy::default());
    let mut rng = TestNonces(2);
    let nonce = auth.challenge(Instant(0), &mut rng).unwrap();
    for counter in 1..=5 {
        let cmd = ZERO_PRESSURE;
        check(
            &mut auth,
            Instant(10 * u64::from(counter)),
            &signed(&secret(), &nonce, counter, cmd),
        )
        .unwrap();
    }
    let late = signed(&secret(), &nonce, 6, CLEAR_ALARMS);
    assert_eq!(
        check(&mut auth, Instant(60_000), &late),
        Err(Error::NoSession)
    );
}

#[test]
fn altered_command_wrong_secret_or_device_rejected() {
    let mut auth = Authenticator::new(secret(), SERIAL, Policy::default());
    let mut rng = TestNonces(3);
    let nonce = auth.challenge(Instant(0), &mut rng).unwrap();
    let mut s = signed(&secret(), &nonce, 1, CLEAR_ALARMS);
    s.command = REBOOT;
    assert_eq!(check(&mut auth, Instant(0), &s), Err(Error::BadSignature));

    let nonce = auth.challenge(Instant(0), &mut rng).unwrap();
    let other = Secret::new([8u8; SECRET_LEN]);
    let s = signed(&other, &nonce, 1, CLEAR_ALARMS);
    assert_eq!(check(&mut auth, Instant(0), &s), Err(Error::BadSignature));

    let nonce = auth.challenge(Instant(0), &mut rng).unwrap();
    let s = Signed {
        counter: 1,
        mac: sign_command(&secret(), SERIAL + 1, &nonce, 1, CLEAR_ALARMS),
        command: CLEAR_ALARMS,
    };
    assert_eq!(check(&mut auth, Instant(0), &s), Err(Error::BadSignature));
}

#[test]
fn every_single_bit_of_a_signature_matters() {
    let mut rng = TestNonces(4);
    for bit in 0..MAC_LEN * 8 {
        let mut auth = Authenticator::new(secret(), SERIAL, Policy::default());
        let nonce = auth.challenge(Instant(0), &mut rng).unwrap();
        let mut s = signed(&secret(), &nonce, 1, CLEAR_ALARMS);
        s.mac[bit / 8] ^= 1 << (bit % 8);
        assert_eq!(check(&mut auth, Instant(0), &s), Err(Error::BadSignature));
    }
}

#[test]
fn failures_back_off_and_success_resets() {
    let policy = Policy::default();
    let mut auth = Authenticator::new(secret(), SERIAL, policy);
    let mut rng = TestNonces(5);
    let bad_secret = Secret::new([9u8; SECRET_LEN]);
    let mut now = Instant(0);
    let mut lockouts = std::vec::Vec::new();
    for _ in 0..8 {
        let nonce = auth.challenge(now, &mut rng).unwrap();
        let s = signed(&bad_secret, &nonce, 1, CLEAR_ALARMS);
        assert_eq!(check(&mut auth, now, &s), Err(Error::BadSignature));
        match auth.locked_for(now) {
            None => lockouts.push(0),
            Some(left) => {
                lockouts.push(left.as_millis());
                // Everything is refused while locked, even a good signature.
                assert_eq!(
                    auth.challenge(now, &mut rng),
                    Err(Error::LockedOut(left.as_millis()))
                );
                now = now + left;
            }
        }
    }
    assert_eq!(lockouts, [0, 0, 0, 1_000, 2_000, 4_000, 8_000, 16_000]);
    assert_eq!(auth.failures(), 8);
    let nonce = auth.challenge(now, &mut rng).unwrap();
    check(&mut auth, now, &signed(&secret(), &nonce, 1, CLEAR_ALARMS)).unwrap();
    assert_eq!(auth.failures(), 0);
    // The back-off is capped.
    let mut auth = Authenticator::new(secret(), SERIAL, policy);
    let mut now = Instant(0);
    for _ in 0..100 {
        if let Some(left) = auth.locked_for(now) {
            now = now + left;
        }
        let nonce = auth.challenge(now, &mut rng).unwrap();
        let _ = check(&mut auth, now, &signed(&bad_secret, &nonce, 1, REBOOT));
    }
    assert_eq!(
        auth.locked_for(now).map(|m| m.as_millis()),
        Some(policy.max_lockout_ms)
    );
}

#[test]
fn no_session_costs_nothing() {
    let mut auth = Authenticator::new(secret(), SERIAL, Policy::default());
    let s = signed(&secret(), &[0; NONCE_LEN], 1, REBOOT);
    for _ in 0..10 {
        assert_eq!(check(&mut auth, Instant(0), &s), Err(Error::NoSession));
    }
    assert_eq!(auth.failures(), 0);
}

#[test]
fn provisioning_blocks_round_trip_and_damage_is_refused() {
    let p = Provisioning {
        serial: 20_260_001,
        secret: Secret::new([7; 32]),
    };
    let b = p.to_bytes();
    let back = Provisioning::from_bytes(&b).unwrap();
    assert_eq!(back.serial, p.serial);
    assert_eq!(back.secret.0, p.secret.0);
    for i in 0..b.len() {
        let mut bad = b;
        bad[i] ^= 1;
        assert!(Provisioning::from_bytes(&bad).is_none(), "byte {i}");
    }
    assert!(Provisioning::from_bytes(&[0xFF; 52]).is_none());
    assert!(Provisioning::from_bytes(&[0; 52]).is_none());
    assert!(Provisioning::from_bytes(&b[..51]).is_none());
}
