//! The planning terminal UI behind `kerf explore`: look at token budgets, overflow, chunk
//! boundaries and how each change of plan shifts similarity to the reference texts, live.
//!
//! Events become [`Action`]s ([`keys`]), [`App::update`] is the only place state changes
//! ([`app`]), rendering is a pure function of the state ([`render`]), and embedding runs on a
//! worker thread that reports over a channel ([`worker`]). Nothing here touches the terminal:
//! the event loop and terminal set-up live in the CLI (`cli/explore.rs`), so every piece is
//! tested with ratatui's `TestBackend` and plain function calls.
pub mod action;
pub mod app;
pub mod board;
pub mod geometry;
pub mod keys;
pub mod plans;
pub mod render;
pub mod stock;
pub mod worker;

pub use action::Action;
pub use app::{App, AppInit};
