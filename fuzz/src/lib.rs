//! Shared code of kerf's fuzz targets: the invariant checks (also replayed by
//! `tests/fuzz_regressions.rs`) and the decoding of the split target's input.
pub mod checks;

use arbitrary::{Result, Unstructured};
use checks::{SplitCase, PREFIXES};
use kerf::profile::Boundary;

/// Draw a valid plan for the default model from the front of the input (boundary rule, window
/// within the model's limit, overlap under half the budget, min_chunk under the budget, a
/// prefix), and take the rest as the text (invalid UTF-8 replaced).
pub fn split_case(data: &[u8]) -> Result<SplitCase> {
    let (info, counter) = checks::model();
    let mut u = Unstructured::new(data);
    let boundary = *u.choose(&Boundary::ALL)?;
    let prefix = PREFIXES[usize::from(u.int_in_range(0u8..=(PREFIXES.len() as u8 - 1))?)];
    let prefix_tokens = if prefix.is_empty() {
        0
    } else {
        counter.count_content(prefix).expect("prefix tokenizes")
    };
    let fixed = counter.specials_per_input() + prefix_tokens;
    let limit = info.max_position_embeddings;
    // Mostly small windows, so that short texts still make many chunks.
    let top = if u.ratio(3u8, 4u8)? {
        (fixed + 64).min(limit)
    } else {
        limit
    };
    let window = u.int_in_range(fixed + 1..=top)?;
    let budget = window - fixed;
    let overlap = if boundary == Boundary::Head {
        0
    } else {
        u.int_in_range(0..=(budget - 1) / 2)?
    };
    let min_chunk = if u.ratio(1u8, 2u8)? {
        0
    } else {
        u.int_in_range(0..=budget - 1)?
    };
    let text = String::from_utf8_lossy(u.take_rest()).into_owned();
    Ok(SplitCase {
        boundary,
        window,
        overlap,
        min_chunk,
        prefix: prefix.to_string(),
        text,
    })
}
