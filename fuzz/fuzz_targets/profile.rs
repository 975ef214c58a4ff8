//! Fuzz target `profile`: see `checks::profile` for what it asserts.
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    kerf_fuzz::checks::profile(data);
});
