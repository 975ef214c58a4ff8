//! Fuzz target `pdf`: see `checks::pdf` for what it asserts.
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    kerf_fuzz::checks::pdf(data);
});
