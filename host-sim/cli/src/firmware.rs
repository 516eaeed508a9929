//! The reference firmware in QEMU: building it, provisioning it, starting
//! the emulator with its serial port on a TCP socket, and reading its
//! images' sizes.
//!
//! The emulator runs under a deadline: [`Qemu`] kills it when dropped or when
//! the deadline passes. Nothing here needs the firmware's source except
//! [`build`], which runs `cargo` in the firmware folder.

use std::io::Write as _;
use std::net::{TcpListener, TcpStream};
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use isochor_core::auth::{Provisioning, Secret};

use crate::Error;

/// A board the firmware runs on in QEMU.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Board {
    /// QEMU `microbit`: nRF51822, Cortex-M0.
    Microbit,
    /// QEMU `mps2-an386`: Cortex-M4F.
    Mps2An386,
}

impl Board {
    /// Both boards.
    pub const ALL: [Board; 2] = [Board::Microbit, Board::Mps2An386];

    /// The board's name (its QEMU machine).
    pub fn name(self) -> &'static str {
        match self {
            Board::Microbit => "microbit",
            Board::Mps2An386 => "mps2-an386",
        }
    }

    /// The board of a name ([`Board::name`]).
    pub fn from_name(name: &str) -> Result<Board, Error> {
        Board::ALL
            .into_iter()
            .find(|b| b.name() == name)
            .ok_or_else(|| {
                Error::Invalid(format!(
                    "unknown board {name:?}: one of {}",
                    Board::ALL.map(Board::name).join(", ")
                ))
            })
    }

    /// The Rust target of the board.
    pub fn target(self) -> &'static str {
        match self {
            Board::Microbit => "thumbv6m-none-eabi",
            Board::Mps2An386 => "thumbv7em-none-eabihf",
        }
    }

    /// Where QEMU loads the provisioning block.
    pub fn provisioning_address(self) -> u32 {
        match self {
            Board::Microbit => 0x0003_FC00,
            Board::Mps2An386 => 0x21FF_FC00,
        }
    }
}

/// The firmware folder of this source tree.
pub fn default_firmware_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../../firmware")
}

/// One firmware build: board and features.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Build {
    /// Name in reports.
    pub name: String,
    /// The board.
    pub board: Board,
    /// `--no-default-features`.
    pub no_default_features: bool,
    /// Features to turn on (`--features`).
    pub features: Vec<String>,
}

impl Build {
    /// The default build of a board (the firmware's default features).
    pub fn standard(board: Board) -> Build {
        Build {
            name: board.name().into(),
            board,
            no_default_features: false,
            features: Vec::new(),
        }
    }

    /// A build of `board` named `name` with only `features`.
    pub fn with_features(board: Board, name: &str, features: &[&str]) -> Build {
        Build {
            name: format!("{}-{name}", board.name()),
            board,
            no_default_features: true,
            features: features.iter().map(|f| f.to_string()).collect(),
        }
    }

    /// The target folder of this build: `firmware/target` for the standard
    /// build of each board, one shared `firmware/target/variants` for every
    /// other build. Cargo keeps each feature set's artifacts apart inside
    /// it, so the variants do not rebuild each other, while the host's build
    /// scripts and procedural macros and every crate whose features do not
    /// change are built once (a folder per variant cost about 400 MB of disk
    /// each).
    pub fn target_dir(&self, firmware: &Path) -> PathBuf {
        if self.is_standard() {
            firmware.join("target")
        } else {
            firmware.join("target").join("variants")
        }
    }

    fn is_standard(&self) -> bool {
        *self == Build::standard(self.board)
    }

    /// Path of a binary of this build: where cargo leaves it for a standard
    /// build; a copy in a folder of the build's name for the others (the
    /// shared folder's own path holds whichever variant was built last).
    pub fn elf(&self, firmware: &Path, bin: &str) -> PathBuf {
        let release = self
            .target_dir(firmware)
            .join(self.board.target())
            .join("release");
        if self.is_standard() {
            release.join(bin)
        } else {
            release.join(&self.name).join(bin)
        }
    }
}

/// Runs a command to completion; its output is returned on success.
fn run_checked(mut cmd: Command, what: &str) -> Result<String, Error> {
    let out = cmd
        .output()
        .map_err(|e| Error::Link(format!("{what}: {e}")))?;
    if !out.status.success() {
        return Err(Error::Link(format!(
            "{what} failed: {}\n{}",
            out.status,
            String::from_utf8_lossy(&out.stderr)
        )));
    }
    Ok(String::from_utf8_lossy(&out.stdout).into_owned())
}

/// Builds binaries of `build` (release) in `firmware`; returns the path of
/// the first. One build at a time over a lock file in the target folder
/// (across threads and processes): the variants share their folder, and a
/// variant's binaries are copied out of it before another variant replaces
/// them.
pub fn build(firmware: &Path, b: &Build, bins: &[&str]) -> Result<PathBuf, Error> {
    let lock_path = firmware.join("target").join("isochor-build.lock");
    if let Some(dir) = lock_path.parent() {
        std::fs::create_dir_all(dir).map_err(|e| Error::Link(format!("{}: {e}", dir.display())))?;
    }
    let lock = std::fs::File::create(&lock_path)
        .map_err(|e| Error::Link(format!("{}: {e}", lock_path.display())))?;
    lock.lock()
        .map_err(|e| Error::Link(format!("locking {}: {e}", lock_path.display())))?;
    let mut cmd = Command::new(std::env::var("CARGO").unwrap_or_else(|_| "cargo".into()));
    cmd.current_dir(firmware)
        .args(["build", "--release", "--target", b.board.target()])
        .arg("--target-dir")
        .arg(b.target_dir(firmware))
        .env_remove("RUSTFLAGS")
        .env_remove("CARGO_ENCODED_RUSTFLAGS")
        .env_remove("CARGO_TARGET_DIR")
        .env_remove("ISOCHOR_MEMORY");
    for bin in bins {
        cmd.args(["--bin", bin]);
    }
    if b.no_default_features {
        cmd.arg("--no-default-features");
    }
    if !b.features.is_empty() {
        cmd.arg("--features").arg(b.features.join(","));
    }
    run_checked(cmd, &format!("building the firmware ({})", b.name))?;
    if !b.is_standard() {
        let built = b
            .target_dir(firmware)
            .join(b.board.target())
            .join("release");
        for bin in bins {
            let to = b.elf(firmware, bin);
            if let Some(dir) = to.parent() {
                std::fs::create_dir_all(dir)
                    .map_err(|e| Error::Link(format!("{}: {e}", dir.display())))?;
            }
            std::fs::copy(built.join(bin), &to)
                .map_err(|e| Error::Link(format!("copying {bin} of {}: {e}", b.name)))?;
        }
    }
    Ok(b.elf(
        firmware,
        bins.first().copied().unwrap_or("isochor-firmware"),
    ))
}

/// True when `qemu-system-arm` can be started.
pub fn qemu_available() -> bool {
    Command::new("qemu-system-arm")
        .arg("--version")
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .status()
        .is_ok_and(|s| s.success())
}

/// The command that installs QEMU's Arm system emulator on Debian (what
/// `tests/setup.sh` runs when it is missing).
pub const QEMU_INSTALL: &str = "sudo apt-get install qemu-system-arm";

/// True when the standard library of the Rust target `target` is in the
/// sysroot of the `rustc` found from the current folder (rustup's
/// `rust-toolchain.toml` applies).
pub fn target_installed(target: &str) -> bool {
    let Ok(out) = Command::new("rustc").args(["--print", "sysroot"]).output() else {
        return false;
    };
    let sysroot = String::from_utf8_lossy(&out.stdout).trim().to_string();
    Path::new(&sysroot)
        .join("lib/rustlib")
        .join(target)
        .join("lib")
        .is_dir()
}

/// What building the firmware for every board and running it in QEMU needs
/// that is missing here, with the command that fixes it; `None` when
/// everything is there.
pub fn missing_tools() -> Option<String> {
    if !qemu_available() {
        return Some(format!(
            "qemu-system-arm is missing: run `tests/setup.sh` (it installs the Debian package) \
             or `{QEMU_INSTALL}`"
        ));
    }
    Board::ALL
        .iter()
        .map(|b| b.target())
        .find(|t| !target_installed(t))
        .map(|t| {
            format!(
                "the Rust target {t} is not installed: run `tests/setup.sh` or `rustup target add {t}`"
            )
        })
}

/// A running emulator; killed when dropped.
pub struct Qemu {
    child: Arc<Mutex<Child>>,
    /// The serial port, connected.
    pub serial: TcpStream,
    deadline: Instant,
    messages: Arc<Mutex<String>>,
    _provisioning: Option<tempfile_path::TempPath>,
}

mod tempfile_path {
    /// A file removed when dropped.
    pub struct TempPath(pub std::path::PathBuf);
    impl Drop for TempPath {
        fn drop(&mut self) {
            let _ = std::fs::remove_file(&self.0);
        }
    }
}

impl Qemu {
    /// Starts `elf` on `board` with its UART on a loopback TCP socket
    /// (QEMU waits for the connection, so no byte is lost), provisioned with
    /// `serial` and `secret` (`None`: not provisioned), and connects. The
    /// emulator is killed after `limit`.
    pub fn start(
        board: Board,
        elf: &Path,
        provisioning: Option<(u64, &Secret)>,
        limit: Duration,
    ) -> Result<Qemu, Error> {
        // The free port found below may be taken by another program before
        // QEMU binds it: then QEMU exits at once and a new port is tried.
        let mut last = None;
        for _ in 0..4 {
            match Qemu::start_once(board, elf, provisioning, limit) {
                Ok(q) => return Ok(q),
                Err(Started::PortTaken(e)) => last = Some(e),
                Err(Started::Failed(e)) => return Err(e),
            }
        }
        Err(last.unwrap_or_else(|| Error::Link("qemu did not start".into())))
    }

    fn start_once(
        board: Board,
        elf: &Path,
        provisioning: Option<(u64, &Secret)>,
        limit: Duration,
    ) -> Result<Qemu, Started> {
        // A free port: bind, note it, release (QEMU binds it next).
        let port = TcpListener::bind("127.0.0.1:0")
            .and_then(|l| l.local_addr())
            .map_err(|e| Error::Link(format!("no free port: {e}")))?
            .port();
        let mut cmd = Command::new("qemu-system-arm");
        cmd.args(["-machine", board.name(), "-nographic", "-monitor", "none"])
            .args([
                "-serial",
                &format!("tcp:127.0.0.1:{port},server=on,wait=on,nodelay=on"),
            ])
            .arg("-kernel")
            .arg(elf)
            .stdin(Stdio::null())
            .stdout(Stdio::null())
            .stderr(Stdio::piped());
        let file = match provisioning {
            Some((serial, secret)) => {
                let path = std::env::temp_dir().join(format!(
                    "isochor-provisioning-{}-{port}.bin",
                    std::process::id()
                ));
                let block = Provisioning {
                    serial,
                    secret: secret.clone(),
                }
                .to_bytes();
                std::fs::File::create(&path)
                    .and_then(|mut f| f.write_all(&block))
                    .map_err(|e| Error::Link(format!("provisioning file: {e}")))?;
                cmd.arg("-device").arg(format!(
                    "loader,file={},addr={:#x},force-raw=on",
                    path.display(),
                    board.provisioning_address()
                ));
                Some(tempfile_path::TempPath(path))
            }
            None => None,
        };
        let mut child = cmd
            .spawn()
            .map_err(|e| Error::Link(format!("qemu-system-arm: {e}")))?;
        // QEMU's diagnostics are drained all along (a full pipe would stop
        // the emulator) and kept for the error message.
        let messages = Arc::new(Mutex::new(String::new()));
        if let Some(mut stderr) = child.stderr.take() {
            let sink = Arc::clone(&messages);
            std::thread::spawn(move || {
                use std::io::Read;
                let mut chunk = [0u8; 512];
                while let Ok(n) = stderr.read(&mut chunk) {
                    if n == 0 {
                        break;
                    }
                    if let Ok(mut m) = sink.lock() {
                        m.push_str(&String::from_utf8_lossy(chunk.get(..n).unwrap_or(&[])));
                    }
                }
            });
        }
        let start = Instant::now();
        let serial = loop {
            match TcpStream::connect(("127.0.0.1", port)) {
                Ok(s) => break s,
                Err(e) => {
                    if let Ok(Some(status)) = child.try_wait() {
                        // Give the reader the last lines.
                        std::thread::sleep(Duration::from_millis(50));
                        let err = messages.lock().map(|m| m.clone()).unwrap_or_default();
                        let e = Error::Link(format!("qemu exited ({status}): {err}"));
                        return Err(if err.contains("in use") {
                            Started::PortTaken(e)
                        } else {
                            Started::Failed(e)
                        });
                    }
                    if start.elapsed() > Duration::from_secs(20) {
                        let _ = child.kill();
                        let _ = child.wait();
                        return Err(Started::Failed(Error::Link(format!(
                            "qemu serial port: {e}"
                        ))));
                    }
                    std::thread::sleep(Duration::from_millis(20));
                }
            }
        };
        let _ = serial.set_nodelay(true);
        // The run's limit: the emulator is killed when it passes (the
        // client's reads then end with a closed link instead of hanging).
        let child = Arc::new(Mutex::new(child));
        let deadline = start + limit;
        {
            let child = Arc::clone(&child);
            std::thread::spawn(move || {
                loop {
                    std::thread::sleep(Duration::from_millis(100));
                    let Ok(mut c) = child.lock() else { return };
                    if !matches!(c.try_wait(), Ok(None)) {
                        return;
                    }
                    if Instant::now() > deadline {
                        let _ = c.kill();
                        let _ = c.wait();
                        return;
                    }
                }
            });
        }
        Ok(Qemu {
            child,
            serial,
            deadline,
            messages,
            _provisioning: file,
        })
    }

    /// What the emulator wrote on its standard error so far.
    pub fn messages(&self) -> String {
        self.messages.lock().map(|m| m.clone()).unwrap_or_default()
    }

    /// True once the run's time is up.
    pub fn expired(&self) -> bool {
        Instant::now() > self.deadline
    }

    /// A second handle on the serial connection (for a client).
    pub fn connection(&self) -> Result<crate::link::transport::Tcp, Error> {
        self.serial
            .try_clone()
            .map(crate::link::transport::Tcp::from_stream)
            .map_err(|e| Error::Link(format!("serial connection: {e}")))
    }
}

impl Drop for Qemu {
    fn drop(&mut self) {
        if let Ok(mut c) = self.child.lock() {
            let _ = c.kill();
            let _ = c.wait();
        }
    }
}

/// Why one start of the emulator failed.
enum Started {
    /// Another program took the port first: try another.
    PortTaken(Error),
    /// Anything else.
    Failed(Error),
}

impl From<Error> for Started {
    fn from(e: Error) -> Started {
        Started::Failed(e)
    }
}

/// An emulated gauge on fixed local ports (`isochor emulate`, the Modbus
/// end-to-end tests): QEMU runs until this is dropped.
pub struct Emulator {
    child: Child,
    _provisioning: Option<tempfile_path::TempPath>,
    stop: Arc<std::sync::atomic::AtomicBool>,
}

impl Emulator {
    /// True while the emulator runs.
    pub fn running(&mut self) -> bool {
        matches!(self.child.try_wait(), Ok(None))
    }
}

impl Drop for Emulator {
    fn drop(&mut self) {
        self.stop.store(true, std::sync::atomic::Ordering::Relaxed);
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

/// Starts `elf` on `board` with the isochor link on `link` and, when given,
/// Modbus RTU on `modbus` (local TCP ports; clients connect and reconnect
/// at will). `mps2-an386` has the two on its UART0 and UART1; the
/// `microbit` has one UART, so both ports reach it through a relay that
/// sends what the UART says to the client that wrote last (the board
/// serves Modbus there when its configuration says so).
pub fn emulate(
    board: Board,
    elf: &Path,
    provisioning: Option<(u64, &Secret)>,
    link: std::net::SocketAddr,
    modbus: Option<std::net::SocketAddr>,
) -> Result<Emulator, Error> {
    let tcp = |a: std::net::SocketAddr, wait: bool| {
        format!(
            "tcp:{}:{},server=on,wait={},nodelay=on",
            a.ip(),
            a.port(),
            if wait { "on" } else { "off" }
        )
    };
    let stop = Arc::new(std::sync::atomic::AtomicBool::new(false));
    let mut cmd = Command::new("qemu-system-arm");
    cmd.args(["-machine", board.name(), "-nographic", "-monitor", "none"]);
    let relay = match (board, modbus) {
        (Board::Mps2An386, Some(m)) => {
            cmd.args(["-serial", &tcp(link, false), "-serial", &tcp(m, false)]);
            None
        }
        (_, None) => {
            cmd.args(["-serial", &tcp(link, false)]);
            None
        }
        (Board::Microbit, Some(m)) => {
            // The relay listens on both ports; QEMU's UART on a port of its own.
            let inner = TcpListener::bind("127.0.0.1:0")
                .and_then(|l| l.local_addr())
                .map_err(|e| Error::Link(format!("no free port: {e}")))?;
            cmd.args(["-serial", &tcp(inner, false)]);
            let l = TcpListener::bind(link).map_err(|e| Error::Link(format!("{link}: {e}")))?;
            let mb = TcpListener::bind(m).map_err(|e| Error::Link(format!("{m}: {e}")))?;
            Some((inner, l, mb))
        }
    };
    cmd.arg("-kernel")
        .arg(elf)
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::inherit());
    let file = match provisioning {
        Some((serial, secret)) => {
            let path = std::env::temp_dir().join(format!(
                "isochor-provisioning-{}-{}.bin",
                std::process::id(),
                link.port()
            ));
            let block = Provisioning {
                serial,
                secret: secret.clone(),
            }
            .to_bytes();
            std::fs::File::create(&path)
                .and_then(|mut f| f.write_all(&block))
                .map_err(|e| Error::Link(format!("provisioning file: {e}")))?;
            cmd.arg("-device").arg(format!(
                "loader,file={},addr={:#x},force-raw=on",
                path.display(),
                board.provisioning_address()
            ));
            Some(tempfile_path::TempPath(path))
        }
        None => None,
    };
    let child = cmd
        .spawn()
        .map_err(|e| Error::Link(format!("qemu-system-arm: {e}")))?;
    let mut emu = Emulator {
        child,
        _provisioning: file,
        stop: Arc::clone(&stop),
    };
    if let Some((inner, l, mb)) = relay {
        let start = Instant::now();
        let uart = loop {
            match TcpStream::connect(inner) {
                Ok(s) => break s,
                Err(e) => {
                    if !emu.running() || start.elapsed() > Duration::from_secs(20) {
                        return Err(Error::Link(format!("qemu serial port: {e}")));
                    }
                    std::thread::sleep(Duration::from_millis(20));
                }
            }
        };
        relay_one_uart(uart, l, mb, stop)?;
    }
    Ok(emu)
}

/// The relay of a one-UART board: bytes from either client go to the UART;
/// the UART's bytes go to the client that wrote last.
fn relay_one_uart(
    uart: TcpStream,
    link: TcpListener,
    modbus: TcpListener,
    stop: Arc<std::sync::atomic::AtomicBool>,
) -> Result<(), Error> {
    use std::io::Read;
    use std::sync::atomic::{AtomicUsize, Ordering};
    let _ = uart.set_nodelay(true);
    // The clients: 0 link, 1 Modbus; `last` says who wrote last.
    let clients: Arc<Mutex<[Option<TcpStream>; 2]>> = Arc::new(Mutex::new([None, None]));
    let last = Arc::new(AtomicUsize::new(0));
    for (i, listener) in [link, modbus].into_iter().enumerate() {
        let clients = Arc::clone(&clients);
        let last = Arc::clone(&last);
        let stop = Arc::clone(&stop);
        let mut to_uart = uart
            .try_clone()
            .map_err(|e| Error::Link(format!("relay: {e}")))?;
        std::thread::spawn(move || {
            for conn in listener.incoming() {
                if stop.load(Ordering::Relaxed) {
                    return;
                }
                let Ok(mut conn) = conn else { continue };
                let _ = conn.set_nodelay(true);
                if let (Ok(mut c), Ok(copy)) = (clients.lock(), conn.try_clone()) {
                    c[i] = Some(copy);
                }
                let mut buf = [0u8; 512];
                loop {
                    match conn.read(&mut buf) {
                        Ok(0) | Err(_) => break,
                        Ok(n) => {
                            last.store(i, Ordering::Relaxed);
                            if to_uart.write_all(&buf[..n]).is_err() {
                                return;
                            }
                        }
                    }
                }
                if let Ok(mut c) = clients.lock() {
                    c[i] = None;
                }
            }
        });
    }
    let mut from_uart = uart;
    std::thread::spawn(move || {
        let mut buf = [0u8; 512];
        loop {
            match from_uart.read(&mut buf) {
                Ok(0) | Err(_) => return,
                Ok(n) => {
                    let who = last.load(Ordering::Relaxed);
                    if let Ok(mut c) = clients.lock()
                        && let Some(s) = c[who].as_mut()
                    {
                        let _ = s.write_all(&buf[..n]);
                    }
                }
            }
        }
    });
    Ok(())
}
