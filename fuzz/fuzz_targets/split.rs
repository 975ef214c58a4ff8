//! Fuzz target `split`: a valid plan drawn from the input's first bytes, the rest as text; see
//! `checks::split` for what it asserts.
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    if let Ok(case) = kerf_fuzz::split_case(data) {
        kerf_fuzz::checks::split(&case);
    }
});
