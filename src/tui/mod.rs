//! The planning terminal UI's state and rendering (placeholder until the UI lands).
