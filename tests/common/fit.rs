//! The splitter's guarantee, checked chunk by chunk (shared by the property tests): every chunk,
//! re-encoded on its own with the model's tokenizer and its special tokens (and its own
//! prefix), fits the window; the reported token count is exactly what re-encoding gives; chunks
//! cover the document in order with no gap; overlap is the shared token run, never more than
//! asked.
use kerf::plan::{self, ResolvedPlan};
use kerf::profile::{Boundary, Profile};
use kerf::split::Chunk;
use kerf::tokens::TokenCounter;
use proptest::prelude::*;

/// Check `chunks` of `text` cut under `plan` against the guarantee above.
pub fn check(
    c: &TokenCounter,
    text: &str,
    chunks: &[Chunk],
    plan: &ResolvedPlan,
) -> Result<(), TestCaseError> {
    let an = c.tokenize(text).unwrap();
    let n = an.len();
    for (i, ch) in chunks.iter().enumerate() {
        let prefix = plan.prefix_of(ch);
        let piece = &text[ch.byte_range.clone()];
        let input = format!("{prefix}{piece}");
        let re = c.count_input(&input).unwrap();
        prop_assert!(
            re <= plan.window,
            "chunk {i} re-encodes to {re} > window {}: {piece:?}",
            plan.window
        );
        prop_assert_eq!(
            c.count_content(piece).unwrap(),
            ch.content_tokens,
            "reported count of chunk {} {:?}",
            i,
            piece
        );
        prop_assert_eq!(ch.index, i);
        prop_assert!(!ch.token_range.is_empty());
        if i == 0 {
            prop_assert_eq!(ch.token_range.start, 0);
        } else {
            let prev = &chunks[i - 1];
            prop_assert!(
                ch.token_range.start > prev.token_range.start,
                "chunks advance"
            );
            prop_assert!(
                ch.token_range.start <= prev.token_range.end,
                "no gap between chunks {} and {}",
                i - 1,
                i
            );
            prop_assert_eq!(
                ch.overlap_tokens,
                prev.token_range.end - ch.token_range.start
            );
            let last = i == chunks.len() - 1;
            if !last || plan.cut.min_chunk_tokens == 0 {
                prop_assert!(
                    ch.overlap_tokens <= plan.cut.overlap_tokens,
                    "overlap {} > asked {}",
                    ch.overlap_tokens,
                    plan.cut.overlap_tokens
                );
            }
        }
    }
    if plan.cut.boundary == Boundary::Head {
        prop_assert!(chunks.len() <= 1);
    } else if n > 0 {
        prop_assert_eq!(
            chunks.last().unwrap().token_range.end,
            n,
            "chunks reach the end"
        );
    } else {
        prop_assert!(chunks.is_empty());
    }
    Ok(())
}

/// A plan for the default model: `window` tokens cut at `boundary` with `overlap` (none for
/// `head`), `min_chunk` and `prefix`.
pub fn plan_for(
    boundary: Boundary,
    window: usize,
    overlap: usize,
    min_chunk: usize,
    prefix: &str,
) -> ResolvedPlan {
    let (info, c) = kerf::model::inspect(&super::model_dir()).unwrap();
    let mut p = Profile::default();
    p.cut.window = window;
    p.cut.boundary = boundary;
    p.cut.overlap = if boundary == Boundary::Head {
        0
    } else {
        overlap
    };
    p.cut.min_chunk = min_chunk;
    p.cut.prefix = prefix.to_string();
    plan::resolve(&p, &info, &c, "prop").unwrap()
}
