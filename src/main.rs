//! The kerf binary: parse arguments, call the library, print. See `kerf --help`.
fn main() -> std::process::ExitCode {
    kerf_app::cli::run()
}
