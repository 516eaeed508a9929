//! The `isochor` command line: argument parsing and one module per command.
//! Commands are thin: they parse, call the library, and print.

mod budget;
mod content;
mod demo;
mod emulate;
pub mod gas;
mod listen;
mod modbus;
mod model;
mod props;
mod send;
mod sensor;
mod sim;
mod tank;

use clap::{Parser, Subcommand, ValueEnum};
use std::process::ExitCode;

/// Gas content of pressurised tanks from pressure and temperature.
#[derive(Debug, Parser)]
#[command(name = "isochor", version, about, long_about = None)]
pub struct Cli {
    /// The command to run.
    #[command(subcommand)]
    pub command: Command,
}

/// The commands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Run the built-in demo: a 50 L nitrogen cylinder in an unheated
    /// workshop over a week, with a valve leak from day four.
    Demo(demo::DemoArgs),
    /// Simulate tanks with real physics and score the gauge against the
    /// truth (built-in scenarios or scenario files).
    Sim(sim::SimArgs),
    /// Estimate the content of one tank from one pressure and temperature.
    Content(content::ContentArgs),
    /// Show what a device sends: live view, JSON lines or CSV.
    Listen(listen::ListenArgs),
    /// Send a request or a signed command to a device.
    Send(send::SendArgs),
    /// Read a gauge's Modbus RTU registers (decoded), acknowledge alarms,
    /// read its identification.
    Modbus(modbus::ModbusArgs),
    /// Run the reference firmware in QEMU with its serial ports on local
    /// TCP ports, until stopped: an emulated gauge any client can talk to.
    Emulate(emulate::EmulateArgs),
    /// Sensor front-ends: convert single values both ways, fit a calibration,
    /// read back a calibration record.
    Sensor(sensor::SensorArgs),
    /// Reference equation of state at one pressure and temperature.
    Props(props::PropsArgs),
    /// Build or check device gas models (compact tables for the device).
    Model(model::ModelArgs),
    /// Measure the firmware in QEMU: flash, RAM, stack and instructions per
    /// estimate against the goals.
    Budget(budget::BudgetArgs),
}

/// Output format shared by the commands.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, ValueEnum)]
pub enum Format {
    /// A readable table with units and cautions.
    #[default]
    Text,
    /// One JSON object with SI fields, for other programs.
    Json,
}

/// Parses the process arguments, runs the command and returns the exit code
/// (0 success, 2 bad input, 1 other failure).
pub fn main() -> ExitCode {
    let cli = Cli::parse();
    match run(cli) {
        Ok(out) => {
            print!("{out}");
            ExitCode::SUCCESS
        }
        Err(e) => {
            eprintln!("isochor: error: {e}");
            ExitCode::from(e.exit_code())
        }
    }
}

/// Runs a parsed command and returns what it prints on success.
pub fn run(cli: Cli) -> Result<String, crate::Error> {
    match cli.command {
        Command::Content(args) => content::run(&args),
        Command::Listen(args) => listen::run(&args),
        Command::Send(args) => send::run(&args),
        Command::Modbus(args) => modbus::run(&args),
        Command::Emulate(args) => emulate::run(&args),
        Command::Sensor(args) => sensor::run(&args),
        Command::Props(args) => props::run(&args),
        Command::Model(args) => model::run(&args),
        Command::Demo(args) => demo::run(&args),
        Command::Sim(args) => sim::run_cmd(&args),
        Command::Budget(args) => budget::run(&args),
    }
}

/// Serialises a value as pretty JSON with a trailing newline.
pub(crate) fn to_json<T: serde::Serialize>(value: &T) -> Result<String, crate::Error> {
    serde_json::to_string_pretty(value)
        .map(|s| s + "\n")
        .map_err(|e| crate::Error::Output(e.to_string()))
}
