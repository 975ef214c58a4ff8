//! Fuzz target `html`: see `checks::html` for what it asserts.
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    kerf_fuzz::checks::html(data);
});
