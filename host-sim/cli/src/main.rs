//! The `isochor` command: a thin shell over the `isochor_sim` library.

fn main() -> std::process::ExitCode {
    isochor_sim::cli::main()
}
