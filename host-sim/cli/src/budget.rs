//! The firmware's budget: for each firmware build, flash (by module),
//! static RAM (the largest statics), the measured peak stack and the panic
//! paths linked; instructions per full estimate on the Cortex-M0 in fixed
//! point, by stage of the chain, and for the same algorithm in `f32` and
//! `f64` software float.
//!
//! Method:
//! - **Flash and static RAM**: the firmware image's sections and symbols
//!   ([`crate::image`]): flash is everything loaded (vector table, code,
//!   read-only data, `.data`'s initial values), static RAM `.data`, `.bss`
//!   and `.uninit`; flash by module from the symbol sizes.
//! - **Instructions**: the budget program (`firmware/src/bin/budget.rs`),
//!   built for `thumbv6m-none-eabi` (Cortex-M0 code) with the `mps2` memory
//!   map (the `f64` run needs more RAM than the `microbit` has), run on QEMU's
//!   `mps2-an385` (its Cortex-M3 executes Cortex-M0 code instruction for
//!   instruction) with `-icount shift=0`: every instruction advances virtual
//!   time by 1 ns and the program reads SysTick around each of 3600 samples
//!   at 1 Hz after two hours not timed (the tracker's windows full: steady
//!   state; sixty block closes and one hourly leak step in the hour, each in
//!   its share). A full estimate is raw converter codes to the tracker's
//!   output: sensor channels, plausibility, content, tracking, uncertainty
//!   and alarms. Stages: the same run with the core's stage marks on
//!   (`isochor_core::probe`); `link` (the telemetry frame's values and
//!   encoding) is measured there too and reported beside the estimate.
//! - **Stack** (`stack_bytes`): the firmware image itself runs in QEMU on its
//!   board, takes its configuration (a prepared configuration in signed
//!   pieces) and [`STACK_RUN_SAMPLES`] samples injected over its serial
//!   link, then restarts with the configuration stored (the start-up of a
//!   device in service prepares its pipeline) and takes a few more, and
//!   reports the deepest stack it used (it paints its stack at each start)
//!   in its diagnostics: the larger of the two runs. Beside it (`estimate_stack_bytes`), the budget
//!   program paints the free stack before each path and prints over
//!   semihosting the deepest stack that preparing the pipeline and running its
//!   samples took there.

use std::collections::BTreeMap;
use std::io::Read as _;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use serde::Serialize;

use crate::Error;
use crate::firmware::{self, Board, Build};
use crate::image::{self, Symbol};

/// Goal: instructions per full estimate in fixed point on the Cortex-M0.
pub const GOAL_INSTRUCTIONS_FIXED: f64 = 2000.0;
/// Goal: at least this many times fewer instructions than the `f64` build.
pub const GOAL_RATIO_F64: f64 = 20.0;
/// Goal: at least this many times fewer instructions than the `f32` build.
pub const GOAL_RATIO_F32: f64 = 5.0;
/// Goal: flash of the Cortex-M0 build with one gas model, bytes.
pub const GOAL_FLASH_BYTES: u64 = 32 * 1024;
/// Goal: RAM of the Cortex-M0 build with one gas model, statics and stack,
/// bytes.
pub const GOAL_RAM_BYTES: u64 = 6 * 1024;

/// The gas of the configuration the budget is measured with (the firmware
/// holds no gas of its own: the gas comes with its configuration).
pub const ONE_GAS: &str = "nitrogen";

/// Longest a QEMU run of the budget program may take.
const RUN_LIMIT: Duration = Duration::from_secs(300);

/// Figures of one firmware build.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct BuildBudget {
    /// Name of the build (board, and gas of a single-gas build).
    pub name: String,
    /// The board (QEMU machine).
    pub board: String,
    /// The Rust target.
    pub target: String,
    /// The gas of the configuration measured.
    pub gas: Option<String>,
    /// Flash: vector table, code, read-only data, initial values of `.data`.
    pub flash_bytes: u64,
    /// RAM taken by statics (`.data`, `.bss`, `.uninit`).
    pub static_ram_bytes: u64,
    /// Deepest stack of the firmware image itself over a run with its
    /// configuration written and samples injected over its link (stack
    /// painting, from its diagnostics; see [`firmware_stack`]).
    pub stack_bytes: u64,
    /// Static RAM and `stack_bytes`.
    pub ram_bytes: u64,
    /// Deepest stack of preparing the fixed-point pipeline and of its
    /// samples in the budget program built for this build's target (stack
    /// painting, below the program's own frames; the pipeline's values pass
    /// through the stack there, so this is above what the firmware needs).
    pub estimate_stack_bytes: u64,
    /// Flash by module, bytes (see [`crate::image`]; adds up to
    /// `flash_bytes`).
    pub flash_by_module: BTreeMap<String, u64>,
    /// The largest statics, largest first (at most [`STATICS_SHOWN`]).
    pub largest_statics: Vec<Symbol>,
    /// Functions of the panic machinery the image links (none wanted).
    pub panic_symbols: Vec<String>,
}

/// How many statics a build lists.
pub const STATICS_SHOWN: usize = 10;

/// The whole budget.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Budget {
    /// One entry per firmware build.
    pub builds: Vec<BuildBudget>,
    /// Instructions per full estimate, fixed point, Cortex-M0 (mean).
    pub instructions_fixed: f64,
    /// Instructions per full estimate, `f32` software float, Cortex-M0 (mean).
    pub instructions_f32: f64,
    /// Instructions per full estimate, `f64` software float, Cortex-M0 (mean).
    pub instructions_f64: f64,
    /// Most instructions of one sample (a block close), fixed point.
    pub instructions_fixed_max: u64,
    /// Most instructions of one sample, `f32`.
    pub instructions_f32_max: u64,
    /// Most instructions of one sample, `f64`.
    pub instructions_f64_max: u64,
    /// `instructions_f64 / instructions_fixed`.
    pub ratio_f64: f64,
    /// `instructions_f32 / instructions_fixed`.
    pub ratio_f32: f64,
    /// Deepest stack of the `f32` path on the Cortex-M0, bytes.
    pub stack_bytes_f32: u64,
    /// Deepest stack of the `f64` path on the Cortex-M0, bytes.
    pub stack_bytes_f64: u64,
    /// Flash by module of the Cortex-M0 build, bytes.
    pub flash_by_module: BTreeMap<String, u64>,
    /// Instructions per sample by stage of the chain, fixed point,
    /// Cortex-M0 (mean; `link` is the telemetry frame, outside the
    /// estimate).
    pub instructions_by_stage: BTreeMap<String, f64>,
    /// The same stages in the largest sample (the one with the most
    /// instructions in the estimate's stages).
    pub instructions_by_stage_largest_sample: BTreeMap<String, u64>,
}

/// What the budget program printed.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ProgramOutput {
    /// `(mean, max)` instructions per sample, fixed point.
    pub fixed: Option<(f64, u64)>,
    /// `(mean, max)`, `f32`.
    pub f32: Option<(f64, u64)>,
    /// `(mean, max)`, `f64`.
    pub f64: Option<(f64, u64)>,
    /// Deepest stack of each path, bytes (fixed, f32, f64).
    pub stack: [Option<u64>; 3],
    /// The scale check (instructions of a 2-instruction loop iteration).
    pub scale_check: Option<f64>,
    /// `(mean, in the largest sample)` instructions by stage, fixed point.
    pub stages: BTreeMap<String, (f64, u64)>,
}

/// Reads the lines of the budget program (`name=value [max=value]`).
pub fn parse_program_output(text: &str) -> ProgramOutput {
    let mut out = ProgramOutput::default();
    for line in text.lines() {
        let mut words = line.split_whitespace();
        let Some((key, value)) = words.next().and_then(|w| w.split_once('=')) else {
            continue;
        };
        let rest: Vec<&str> = words.collect();
        let field = |name: &str| {
            rest.iter()
                .find_map(|w| w.strip_prefix(name))
                .and_then(|m| m.parse::<u64>().ok())
        };
        let max = field("max=");
        let mean = value.parse::<f64>().ok();
        let pair = mean.zip(max);
        if let Some(stage) = key.strip_prefix("stage_") {
            if let Some(v) = mean.zip(field("worst=")) {
                out.stages.insert(stage.to_string(), v);
            }
            continue;
        }
        match key {
            "instructions_fixed" => out.fixed = pair,
            "instructions_f32" => out.f32 = pair,
            "instructions_f64" => out.f64 = pair,
            "stack_fixed" => out.stack[0] = value.parse().ok(),
            "stack_f32" => out.stack[1] = value.parse().ok(),
            "stack_f64" => out.stack[2] = value.parse().ok(),
            "scale_check_2" => out.scale_check = mean,
            _ => {}
        }
    }
    out
}

/// Samples the firmware takes over its link when its stack is measured
/// (three 60 s blocks and more at 1 Hz).
pub const STACK_RUN_SAMPLES: u64 = 200;

/// The deepest stack of the firmware image `elf` on `board`: the firmware
/// runs in QEMU, provisioned with a secret of this run; it answers a ping and
/// its identity, takes the nominal configuration in signed pieces (the last
/// one validates the whole and prepares the pipeline) and sends it back,
/// then [`STACK_RUN_SAMPLES`] samples injected
/// over its link (a slow draw of a 50 L nitrogen cylinder at 20 °C, each
/// answered with telemetry, block closes included), and reports its stack
/// peak (stack painting) in its diagnostics; then it is restarted with its
/// configuration stored, prepares the pipeline at start-up, takes a few
/// samples and reports the peak of that start. The figure is the larger.
///
/// An image without signed configuration writes (`signed: false`, feature
/// `signed-config` off) cannot take the configuration over its link: it
/// runs without one (its configuration is written at manufacture), so its
/// samples end at "configuration unusable" and the figure leaves out the
/// pipeline's preparation and the estimate (a lower bound; see
/// docs/budget.md).
pub fn firmware_stack(board: Board, elf: &Path, signed: bool) -> Result<u64, Error> {
    use isochor_core::auth::Secret;
    use isochor_core::prepared::GaugeConfig;
    use isochor_core::{Gas, Setup, SetupFx, Tank};
    let mut key = [0u8; 32];
    getrandom::fill(&mut key).map_err(|e| Error::Tool(format!("random secret: {e}")))?;
    let secret = Secret::new(key);
    let q = firmware::Qemu::start(
        board,
        elf,
        Some((STACK_RUN_SERIAL, &secret)),
        Duration::from_secs(240),
    )?;
    let mut c = crate::link::Client::new(q.connection()?, Duration::from_secs(5))
        .with_secret(secret.clone());
    let mut answer = c.ping(0);
    for i in 1..6 {
        if answer.is_ok() {
            break;
        }
        answer = c.ping(i);
    }
    if let Err(e) = answer {
        return Err(Error::Tool(format!(
            "the firmware ({}) does not answer in QEMU: {e}",
            board.name()
        )));
    }
    c.identity()?;
    let setup = SetupFx::from_f64(&Setup::new(Gas::Nitrogen, Tank::new(0.050, 200e5)))?;
    let config = GaugeConfig::nominal(setup);
    if signed {
        c.configure(&config, &mut |_, _| {})?;
    }
    c.read_config()?;
    let bench = crate::bench::Bench::new(config.pressure, config.temperature, 101_325.0);
    for i in 0..STACK_RUN_SAMPLES {
        if q.expired() {
            return Err(Error::Tool("the firmware run took too long".into()));
        }
        let p = 150e5 - 2e3 * i as f64;
        let raw = bench.sample(p, 293.15)?;
        c.inject(i * 1000, raw.pressure, raw.temperature)?;
        c.take_unsolicited();
    }
    let running = c.diagnostics()?.stack_peak_bytes;
    if !signed {
        return Ok(running.into());
    }
    // A start with the configuration already stored (every start of a
    // device in service): the gauge and its pipeline prepared at start-up,
    // then samples. The stack is painted anew at each start.
    c.signed(isochor_core::link::Command::Reboot)?;
    std::thread::sleep(Duration::from_millis(300));
    let bench_at = STACK_RUN_SAMPLES * 1000;
    for i in 0..STACK_RUN_RESTART_SAMPLES {
        let raw = bench.sample(140e5, 293.15)?;
        c.inject(bench_at + i * 1000, raw.pressure, raw.temperature)?;
        c.take_unsolicited();
    }
    let d = c.diagnostics()?;
    if d.boot.reason != isochor_core::link::ResetReason::Requested {
        return Err(Error::Tool(format!(
            "the firmware ({}) did not restart when asked (boot reason {:?})",
            board.name(),
            d.boot.reason
        )));
    }
    Ok(running.max(d.stack_peak_bytes).into())
}

/// Samples taken after the stack run's restart.
const STACK_RUN_RESTART_SAMPLES: u64 = 5;

/// Serial number the firmware is provisioned with for its stack run.
const STACK_RUN_SERIAL: u64 = 7_000_001;

/// Fails with a clear message, naming the command that fixes it, when
/// `qemu-system-arm` or a Rust target the budget needs is missing.
pub fn check_tools() -> Result<(), Error> {
    match firmware::missing_tools() {
        Some(why) => Err(Error::Tool(why)),
        None => Ok(()),
    }
}

/// Builds the budget program for `board`'s target (Cortex-M0 code with the
/// `mps2` memory map); returns its image.
pub fn build_program(firmware_dir: &Path, board: Board) -> Result<PathBuf, Error> {
    let dir = firmware_dir.join("target").join(match board {
        Board::Microbit => "m0-on-mps2",
        Board::Mps2An386 => "budget-mps2-an386",
    });
    let mut cmd = Command::new(std::env::var("CARGO").unwrap_or_else(|_| "cargo".into()));
    cmd.current_dir(firmware_dir)
        .args([
            "build",
            "--release",
            "--features",
            "budget",
            "--bin",
            "budget",
        ])
        .arg("--target")
        .arg(board.target())
        .arg("--target-dir")
        .arg(&dir)
        .env_remove("RUSTFLAGS")
        .env_remove("CARGO_ENCODED_RUSTFLAGS")
        .env_remove("CARGO_TARGET_DIR")
        .env("ISOCHOR_MEMORY", "mps2");
    let out = cmd
        .output()
        .map_err(|e| Error::Tool(format!("cargo: {e}")))?;
    if !out.status.success() {
        return Err(Error::Tool(format!(
            "building the budget program for {} failed: {}\n{}",
            board.target(),
            out.status,
            String::from_utf8_lossy(&out.stderr)
        )));
    }
    Ok(dir.join(board.target()).join("release").join("budget"))
}

/// Runs the budget program in QEMU (Cortex-M0 code on `mps2-an385`,
/// Cortex-M4F code on `mps2-an386`) with `-icount shift=0`; its output.
pub fn run_program(elf: &Path, board: Board) -> Result<ProgramOutput, Error> {
    let mut cmd = Command::new("qemu-system-arm");
    match board {
        Board::Microbit => cmd.args(["-machine", "mps2-an385", "-cpu", "cortex-m3"]),
        Board::Mps2An386 => cmd.args(["-machine", "mps2-an386"]),
    };
    cmd.args(["-nographic", "-monitor", "none", "-serial", "null"])
        .args(["-semihosting-config", "enable=on,target=native"])
        .args(["-icount", "shift=0", "-kernel"])
        .arg(elf)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped());
    let mut child = cmd
        .spawn()
        .map_err(|e| Error::Tool(format!("qemu-system-arm: {e}")))?;
    let start = Instant::now();
    let status = loop {
        match child.try_wait() {
            Ok(Some(status)) => break status,
            Ok(None) if start.elapsed() > RUN_LIMIT => {
                let _ = child.kill();
                let _ = child.wait();
                return Err(Error::Tool(format!(
                    "the budget program did not finish in {} s",
                    RUN_LIMIT.as_secs()
                )));
            }
            Ok(None) => std::thread::sleep(Duration::from_millis(50)),
            Err(e) => return Err(Error::Tool(format!("qemu-system-arm: {e}"))),
        }
    };
    let mut text = String::new();
    if let Some(mut s) = child.stdout.take() {
        let _ = s.read_to_string(&mut text);
    }
    if !status.success() {
        let mut err = String::new();
        if let Some(mut s) = child.stderr.take() {
            let _ = s.read_to_string(&mut err);
        }
        return Err(Error::Tool(format!(
            "the budget program failed in QEMU ({status}):\n{text}{err}"
        )));
    }
    Ok(parse_program_output(&text))
}

fn missing(what: &str) -> Error {
    Error::Tool(format!("the budget program printed no {what}"))
}

/// Measures the whole budget: builds the firmware of each build and the
/// budget program for each board, reads the images and runs QEMU.
pub fn measure(firmware_dir: &Path) -> Result<Budget, Error> {
    check_tools()?;
    // The standard builds, and the Cortex-M0 image without each optional
    // part (what each feature costs: `modbus`, `uncertainty`,
    // `signed-config`) and with all of them off (`lean`). The budget
    // program runs once per board.
    let builds = [
        Build::standard(Board::Microbit),
        Build::standard(Board::Mps2An386),
        Build::with_features(
            Board::Microbit,
            "no-modbus",
            &["signed-config", "uncertainty", "tracking"],
        ),
        Build::with_features(
            Board::Microbit,
            "no-uncertainty",
            &["signed-config", "modbus", "tracking"],
        ),
        Build::with_features(
            Board::Microbit,
            "no-signed-config",
            &["modbus", "uncertainty", "tracking"],
        ),
        Build::with_features(
            Board::Microbit,
            "no-tracking",
            &["signed-config", "modbus", "uncertainty"],
        ),
        Build::with_features(Board::Microbit, "lean", &[]),
    ];
    let mut m0: Option<ProgramOutput> = None;
    let mut rows = Vec::new();
    for b in &builds {
        let elf = firmware::build(firmware_dir, b, &["isochor-firmware"])?;
        let img = image::read(&elf)?;
        let size = img.size;
        let out = match (&m0, b.no_default_features) {
            (Some(o), true) if b.board == Board::Microbit => o.clone(),
            _ => {
                let program = build_program(firmware_dir, b.board)?;
                run_program(&program, b.board)?
            }
        };
        let estimate_stack_bytes = out.stack[0].ok_or_else(|| missing("stack_fixed"))?;
        let signed = !b.no_default_features || b.features.iter().any(|f| f == "signed-config");
        let stack = firmware_stack(b.board, &elf, signed)?;
        rows.push(BuildBudget {
            name: b.name.clone(),
            board: b.board.name().into(),
            target: b.board.target().into(),
            gas: Some(ONE_GAS.into()),
            flash_bytes: size.flash_bytes,
            static_ram_bytes: size.static_ram_bytes,
            stack_bytes: stack,
            ram_bytes: size.static_ram_bytes + stack,
            estimate_stack_bytes,
            flash_by_module: img.flash_by_module,
            largest_statics: img.statics.into_iter().take(STATICS_SHOWN).collect(),
            panic_symbols: img.panic_symbols,
        });
        if b.board == Board::Microbit && m0.is_none() {
            m0 = Some(out);
        }
    }
    let m0 = m0.ok_or_else(|| missing("Cortex-M0 figures"))?;
    let (fixed, fixed_max) = m0.fixed.ok_or_else(|| missing("instructions_fixed"))?;
    let (f32_, f32_max) = m0.f32.ok_or_else(|| missing("instructions_f32"))?;
    let (f64_, f64_max) = m0.f64.ok_or_else(|| missing("instructions_f64"))?;
    if fixed <= 0.0 {
        return Err(missing("positive fixed-point figure"));
    }
    if m0.stages.is_empty() {
        return Err(missing("stage figures"));
    }
    let flash_by_module = rows
        .iter()
        .find(|r| r.board == Board::Microbit.name())
        .map(|r| r.flash_by_module.clone())
        .unwrap_or_default();
    Ok(Budget {
        builds: rows,
        instructions_fixed: fixed,
        instructions_f32: f32_,
        instructions_f64: f64_,
        instructions_fixed_max: fixed_max,
        instructions_f32_max: f32_max,
        instructions_f64_max: f64_max,
        ratio_f64: f64_ / fixed,
        ratio_f32: f32_ / fixed,
        stack_bytes_f32: m0.stack[1].ok_or_else(|| missing("stack_f32"))?,
        stack_bytes_f64: m0.stack[2].ok_or_else(|| missing("stack_f64"))?,
        flash_by_module,
        instructions_by_stage: m0.stages.iter().map(|(k, v)| (k.clone(), v.0)).collect(),
        instructions_by_stage_largest_sample: m0
            .stages
            .iter()
            .map(|(k, v)| (k.clone(), v.1))
            .collect(),
    })
}

/// `text` cut to `n` characters (an ellipsis at the end when cut).
fn cut(text: &str, n: usize) -> String {
    if text.chars().count() <= n {
        text.to_string()
    } else {
        let mut t: String = text.chars().take(n.saturating_sub(1)).collect();
        t.push('…');
        t
    }
}

/// `met` or `NOT met`.
fn verdict(ok: bool) -> &'static str {
    if ok { "met" } else { "NOT met" }
}

/// The budget as a table with the goals beside the figures.
pub fn render_text(b: &Budget) -> String {
    use std::fmt::Write as _;
    let mut s = String::new();
    let _ = writeln!(s, "Firmware budget (measured in QEMU)");
    let _ = writeln!(s);
    let _ = writeln!(
        s,
        "{:<22} {:>10} {:>13} {:>9} {:>12} {:>17}",
        "build", "flash B", "static RAM B", "stack B", "RAM total B", "estimate stack B"
    );
    for r in &b.builds {
        let _ = writeln!(
            s,
            "{:<22} {:>10} {:>13} {:>9} {:>12} {:>17}",
            r.name,
            r.flash_bytes,
            r.static_ram_bytes,
            r.stack_bytes,
            r.ram_bytes,
            r.estimate_stack_bytes
        );
    }
    let _ = writeln!(
        s,
        "(stack: the firmware's own peak over its configuration and {STACK_RUN_SAMPLES} samples \
         over its link; estimate stack: the fixed pipeline's preparation and samples in the budget program)"
    );
    let _ = writeln!(s);
    let _ = writeln!(
        s,
        "Instructions per full estimate, Cortex-M0 (raw codes to the tracker's output; mean of one hour at 1 Hz \
         after two hours' warm-up, max = one sample)"
    );
    let _ = writeln!(
        s,
        "{:<12} {:>12} {:>10} {:>10}   goal",
        "path", "mean", "max", "× fixed"
    );
    let _ = writeln!(
        s,
        "{:<12} {:>12.0} {:>10} {:>10}   ≤ {:.0}: {}",
        "fixed",
        b.instructions_fixed,
        b.instructions_fixed_max,
        "1",
        GOAL_INSTRUCTIONS_FIXED,
        verdict(b.instructions_fixed <= GOAL_INSTRUCTIONS_FIXED)
    );
    let _ = writeln!(
        s,
        "{:<12} {:>12.0} {:>10} {:>10.1}   ≥ {:.0}× fixed: {}",
        "f32",
        b.instructions_f32,
        b.instructions_f32_max,
        b.ratio_f32,
        GOAL_RATIO_F32,
        verdict(b.ratio_f32 >= GOAL_RATIO_F32)
    );
    let _ = writeln!(
        s,
        "{:<12} {:>12.0} {:>10} {:>10.1}   ≥ {:.0}× fixed: {}",
        "f64",
        b.instructions_f64,
        b.instructions_f64_max,
        b.ratio_f64,
        GOAL_RATIO_F64,
        verdict(b.ratio_f64 >= GOAL_RATIO_F64)
    );
    let _ = writeln!(s);
    let _ = writeln!(
        s,
        "Where the fixed-point instructions go, Cortex-M0 (mean per sample; largest sample)"
    );
    let mut estimate = 0.0;
    for stage in isochor_core::probe::Stage::ALL {
        let name = stage.name();
        let Some(mean) = b.instructions_by_stage.get(name) else {
            continue;
        };
        let worst = b
            .instructions_by_stage_largest_sample
            .get(name)
            .copied()
            .unwrap_or(0);
        if stage != isochor_core::probe::Stage::Link {
            estimate += mean;
        }
        let _ = writeln!(s, "  {name:<14} {mean:>10.0} {worst:>10}");
    }
    let _ = writeln!(
        s,
        "  (stages of the estimate add up to {estimate:.0}; link, the telemetry frame's values and encoding, comes on top)"
    );
    for r in &b.builds {
        let _ = writeln!(s);
        let _ = writeln!(s, "Flash by module, {} ({} B)", r.name, r.flash_bytes);
        let mut mods: Vec<(&String, &u64)> = r.flash_by_module.iter().collect();
        mods.sort_by(|a, b| b.1.cmp(a.1).then(a.0.cmp(b.0)));
        for (m, bytes) in mods {
            let _ = writeln!(s, "  {m:<28} {bytes:>8}");
        }
        let _ = writeln!(s, "Largest statics, {}", r.name);
        for st in &r.largest_statics {
            let _ = writeln!(s, "  {:<60} {:>8}", cut(&st.name, 60), st.bytes);
        }
        if r.panic_symbols.is_empty() {
            let _ = writeln!(s, "Panic paths linked: none");
        } else {
            let _ = writeln!(s, "Panic paths linked ({}):", r.panic_symbols.len());
            for p in &r.panic_symbols {
                let _ = writeln!(s, "  {}", cut(p, 100));
            }
        }
    }
    if let Some(m0) = b.builds.iter().find(|r| r.board == Board::Microbit.name()) {
        let _ = writeln!(s);
        let _ = writeln!(
            s,
            "Cortex-M0 build with one gas model ({}): flash {} B, goal ≤ {} B: {}; RAM {} B (statics and stack), goal ≤ {} B: {}",
            m0.name,
            m0.flash_bytes,
            GOAL_FLASH_BYTES,
            verdict(m0.flash_bytes <= GOAL_FLASH_BYTES),
            m0.ram_bytes,
            GOAL_RAM_BYTES,
            verdict(m0.ram_bytes <= GOAL_RAM_BYTES)
        );
    }
    let _ = writeln!(s);
    let _ = writeln!(s, "{}", isochor_eos::safety::GENERAL);
    let _ = writeln!(s, "{}", isochor_eos::safety::HARDWARE);
    s
}
