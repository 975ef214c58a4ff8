//! Fuzz target `refs_trec`: see `checks::refs_trec` for what it asserts.
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    kerf_fuzz::checks::refs_trec(data);
});
