//! Fuzz target `refs_toml`: see `checks::refs_toml` for what it asserts.
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    kerf_fuzz::checks::refs_toml(data);
});
