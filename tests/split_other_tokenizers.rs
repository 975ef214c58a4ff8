//! The fit guarantee with tokenizers of other families than the default model's WordPiece
//! (proptest): a byte-level BPE (RoBERTa style) and a Unigram with Metaspace (XLM-R style),
//! both trained by tests/reference/model_layouts.py with the `tokenizers` library (PyPI) and
//! saved by sentence-transformers 6.3. Texts are random slices of the Debian FAQ starting at a word (Debian
//! package debian-faq 11.1, scripts/fetch-testdata) with random whitespace runs spliced in.
//!
//! Each chunk, with the prefix, is encoded on its own by the `tokenizers` library itself
//! (crates.io, special tokens on, truncation off): it must fit the window.
mod common;

use std::path::PathBuf;
use std::sync::OnceLock;

use kerf::model::ModelInfo;
use kerf::plan;
use kerf::profile::{Boundary, Profile};
use kerf::split;
use kerf::survey;
use kerf::tokens::TokenCounter;
use proptest::prelude::*;

const FAMILIES: &[&str] = &["roberta-st6", "xlmr-st6"];

fn tokenizer_path(family: &str) -> PathBuf {
    common::repo()
        .join("tests/fixtures/model-layouts")
        .join(family)
        .join("tokenizer.json")
}

fn faq() -> &'static str {
    static T: OnceLock<String> = OnceLock::new();
    T.get_or_init(|| {
        std::fs::read_to_string(common::testdata("debian-faq/debian-faq.en.txt")).unwrap()
    })
}

fn counters() -> &'static Vec<(TokenCounter, tokenizers::Tokenizer)> {
    static C: OnceLock<Vec<(TokenCounter, tokenizers::Tokenizer)>> = OnceLock::new();
    C.get_or_init(|| {
        FAMILIES
            .iter()
            .map(|f| {
                let p = tokenizer_path(f);
                let mut reference = tokenizers::Tokenizer::from_file(&p).unwrap();
                reference.with_truncation(None).unwrap();
                reference.with_padding(None);
                (TokenCounter::from_file(&p).unwrap(), reference)
            })
            .collect()
    })
}

const RUNS: &[&str] = &[
    " ", "  ", "    ", "\n", "\n\n", "\n    ", " \n ", "\t", "\r\n",
];

fn text_strategy() -> impl Strategy<Value = String> {
    let len = faq().len();
    prop::collection::vec((0..len, 1usize..400, prop::sample::select(RUNS)), 1..8).prop_map(
        move |parts| {
            let t = faq();
            let mut s = String::new();
            for (start, n, run) in parts {
                // Slices start at a word, as documents do (a text that opens inside a word
                // is one cut from the middle of a word; see README.md on prefixes).
                let mut a = start.min(len);
                while a < len
                    && (!t.is_char_boundary(a)
                        || (a > 0 && !t.as_bytes()[a - 1].is_ascii_whitespace()))
                {
                    a += 1;
                }
                let mut b = (a + n).min(len);
                while !t.is_char_boundary(b) {
                    b += 1;
                }
                s.push_str(&t[a..b]);
                s.push_str(run);
            }
            s
        },
    )
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 120, .. ProptestConfig::default() })]

    #[test]
    fn chunks_of_other_tokenizer_families_fit_the_window(
        text in text_strategy(),
        family in 0..FAMILIES.len(),
        boundary in prop::sample::select(Boundary::ALL.to_vec()),
        window in 12usize..90,
        overlap_frac in 0.0f64..0.5,
        with_prefix in any::<bool>(),
    ) {
        let (counter, reference) = &counters()[family];
        let info = ModelInfo::tokenizer_only(&tokenizer_path(FAMILIES[family]), counter, window);
        let mut p = Profile::default();
        p.cut.window = window;
        p.cut.boundary = boundary;
        p.cut.prefix = if with_prefix { "passage: ".into() } else { String::new() };
        let Ok(probe) = plan::resolve(&p, &info, counter, "prop") else {
            // Windows below the tokenizer's piece floor are refused (tests/token_counts.rs).
            return Ok(());
        };
        if boundary != Boundary::Head {
            p.cut.overlap = (probe.budget() as f64 * overlap_frac) as usize;
        }
        let plan = plan::resolve(&p, &info, counter, "prop").unwrap();
        let an = survey::analyze(&text, counter).unwrap();
        let recount = |t: &str| counter.count_content(t).unwrap_or(usize::MAX);
        let chunks = split::cut(&text, &an.tokens, &an.segments, &plan.cut, &recount);
        for (i, ch) in chunks.iter().enumerate() {
            let input = format!("{}{}", p.cut.prefix, &text[ch.byte_range.clone()]);
            let re = reference.encode(input.as_str(), true).unwrap().len();
            prop_assert!(
                re <= window,
                "{}: chunk {i} encodes to {re} > window {window}: {input:?}",
                FAMILIES[family]
            );
        }
        // A text of whitespace alone has byte-level tokens but nothing to cut.
        if boundary != Boundary::Head && !text.trim().is_empty() {
            prop_assert_eq!(chunks.last().unwrap().token_range.end, an.tokens.len());
        }
    }
}
