//! The kerf binary: parse arguments, call the library, print. See `kerf --help`.
fn main() -> std::process::ExitCode {
    kerf_cli::run()
}

#[path = "cli/mod.rs"]
mod kerf_cli;
