//! kerf's faces over the `kerf` library: the command line ([`cli`]) and the planning terminal
//! UI ([`tui`]). Every computation lives in the library; this crate parses arguments, draws,
//! and prints.
pub mod cli;
pub mod tui;
