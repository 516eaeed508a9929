//! `isochor emulate`: the reference firmware in QEMU with its serial ports
//! on local TCP ports, until stopped, so any client can talk to an emulated
//! gauge (`isochor listen`/`send` on the link, `isochor modbus` or any
//! Modbus RTU tool on the Modbus port).

use std::net::SocketAddr;
use std::time::Duration;

use clap::Args;

use crate::Error;
use crate::firmware::{self, Board, Build};
use isochor_eos::safety;

/// Serial number the emulated gauge is provisioned with.
pub const EMULATED_SERIAL: u64 = 20_260_014;

/// Arguments of `isochor emulate`.
#[derive(Debug, Args)]
pub struct EmulateArgs {
    /// The board: microbit (Cortex-M0, one UART) or mps2-an386 (Cortex-M4,
    /// Modbus on its second UART).
    #[arg(long)]
    pub board: String,
    /// Local address of the isochor link (e.g. 127.0.0.1:7000).
    #[arg(long)]
    pub link: SocketAddr,
    /// Local address of the Modbus RTU line (e.g. 127.0.0.1:7001).
    #[arg(long)]
    pub modbus: Option<SocketAddr>,
    /// File holding the device secret (64 hex digits); otherwise the
    /// ISOCHOR_SECRET environment variable; without either the gauge makes
    /// a secret nobody knows (telemetry flows, nothing can be configured).
    #[arg(long)]
    pub secret_file: Option<std::path::PathBuf>,
    /// Stop after this many seconds (default: run until stopped).
    #[arg(long)]
    pub seconds: Option<f64>,
}

/// Runs the command: builds the firmware, starts QEMU and waits.
pub fn run(a: &EmulateArgs) -> Result<String, Error> {
    let board = Board::from_name(&a.board)?;
    if a.modbus == Some(a.link) {
        return Err(Error::Invalid("--link and --modbus must differ".into()));
    }
    let limit = match a.seconds {
        Some(s) if s.is_finite() && s > 0.0 => Some(Duration::from_secs_f64(s)),
        Some(s) => return Err(Error::Invalid(format!("--seconds {s}: must be > 0"))),
        None => None,
    };
    let secret = super::send::secret(a.secret_file.as_deref())?;
    if let Some(reason) = firmware::missing_tools() {
        return Err(Error::Link(reason));
    }
    let fw = firmware::default_firmware_dir();
    eprintln!("isochor: building the firmware for {}…", board.name());
    let elf = firmware::build(&fw, &Build::standard(board), &["isochor-firmware"])?;
    let mut emu = firmware::emulate(
        board,
        &elf,
        secret.as_ref().map(|s| (EMULATED_SERIAL, s)),
        a.link,
        a.modbus,
    )?;
    eprintln!(
        "isochor: emulated {} gauge (serial {EMULATED_SERIAL}{}): isochor link on {}{}; stop with Ctrl-C",
        board.name(),
        if secret.is_some() {
            ""
        } else {
            ", not provisioned"
        },
        a.link,
        a.modbus
            .map(|m| format!(", Modbus RTU on {m}"))
            .unwrap_or_default()
    );
    if board == Board::Microbit && a.modbus.is_some() {
        eprintln!(
            "isochor: the microbit has one UART: it answers Modbus once its configuration \
             chooses the Modbus protocol (the link is still answered, nothing is sent unasked)"
        );
    }
    eprintln!("{}", safety::HARDWARE);
    let start = std::time::Instant::now();
    while emu.running() {
        if limit.is_some_and(|l| start.elapsed() > l) {
            break;
        }
        std::thread::sleep(Duration::from_millis(200));
    }
    Ok(String::new())
}
