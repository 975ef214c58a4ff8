//! Where kerf keeps things on this machine: `$KERF_HOME` (models, the vector cache).
//!
//! Plain paths at the bottom of the type graph, so the profile (which names a model folder) and
//! the model reader both use them without importing each other.
use std::path::PathBuf;

/// Name of the default model's cache folder under `$KERF_HOME/models`.
pub const DEFAULT_MODEL_NAME: &str = "all-MiniLM-L6-v2";

/// The command that fetches and verifies the default model.
pub const FETCH_COMMAND: &str = "scripts/fetch-model";

/// kerf's cache root: `$KERF_HOME`, else `~/.cache/kerf`.
pub fn kerf_home() -> PathBuf {
    if let Some(h) = std::env::var_os("KERF_HOME").filter(|h| !h.is_empty()) {
        return PathBuf::from(h);
    }
    let home = std::env::var_os("HOME")
        .map(PathBuf::from)
        .unwrap_or_else(|| PathBuf::from("."));
    home.join(".cache").join("kerf")
}

/// Where `scripts/fetch-model` puts the default model.
pub fn default_model_dir() -> PathBuf {
    kerf_home().join("models").join(DEFAULT_MODEL_NAME)
}
