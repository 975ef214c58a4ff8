//! Cutting corpora that mix languages and scripts keeps the splitter's guarantee (every chunk
//! re-encodes within the window, counts are exact, chunks cover the text in order; see
//! `common::fit`) with the real MiniLM tokenizer, at every boundary rule. The paragraphs are the
//! open Debian texts of the multilingual sentence fixtures (tests/fixtures/sentences/: German,
//! French, Spanish, Italian, Dutch, Chinese, Japanese, Hindi, Arabic; sources named in
//! scripts/reference/make_sentence_fixtures.py), drawn and joined at random (proptest).
mod common;

use std::sync::OnceLock;

use kerf::model;
use kerf::plan::ResolvedPlan;
use kerf::profile::Boundary;
use kerf::segment::{self, Language};
use kerf::split;
use kerf::survey;
use kerf::tokens::TokenCounter;
use proptest::prelude::*;

const LANGS: [&str; 9] = ["de", "fr", "es", "it", "nl", "zh", "ja", "hi", "ar"];

fn counter() -> &'static TokenCounter {
    static C: OnceLock<TokenCounter> = OnceLock::new();
    C.get_or_init(|| model::inspect(&common::model_dir()).expect("model loads").1)
}

/// The fixture paragraphs of each language in `LANGS`, in that order.
fn paragraphs() -> &'static Vec<Vec<String>> {
    static P: OnceLock<Vec<Vec<String>>> = OnceLock::new();
    P.get_or_init(|| {
        LANGS
            .iter()
            .map(|lang| {
                let doc = common::fixture(&format!("sentences/{lang}.json"));
                doc["paragraphs"]
                    .as_array()
                    .expect("paragraphs is a list")
                    .iter()
                    .map(|p| p["text"].as_str().expect("text is a string").to_string())
                    .collect()
            })
            .collect()
    })
}

fn resolved(boundary: Boundary, window: usize, overlap: usize) -> ResolvedPlan {
    common::fit::plan_for(boundary, window, overlap, 0, "")
}

/// A document of 1 to 11 fixture paragraphs from any of the languages, joined by a blank line
/// (separate paragraphs), a line break or a space (languages mixed inside one paragraph).
fn mixed_text() -> impl Strategy<Value = String> {
    prop::collection::vec(
        (
            0..LANGS.len(),
            any::<prop::sample::Index>(),
            prop::sample::select(vec!["\n\n", "\n", " "]),
        ),
        1..12,
    )
    .prop_map(|picks| {
        let paras = paragraphs();
        let mut s = String::new();
        for (lang, index, sep) in picks {
            s.push_str(&paras[lang][index.index(paras[lang].len())]);
            s.push_str(sep);
        }
        s
    })
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 64, .. ProptestConfig::default() })]

    #[test]
    fn mixed_language_corpora_keep_the_fit(
        text in mixed_text(),
        boundary in prop::sample::select(Boundary::ALL.to_vec()),
        window in 6usize..160,
        overlap_frac in 0.0f64..0.5,
    ) {
        let window = window.max(2 + counter().piece_floor());
        let budget = window - 2;
        let overlap = ((budget as f64) * overlap_frac) as usize;
        let plan = resolved(boundary, window, overlap.min(budget - 1));
        let an = survey::analyze(&text, counter()).unwrap();
        let recount = |t: &str| counter().count_content(t).unwrap();
        let chunks = split::cut(&text, &an.tokens, &an.segments, &plan.cut, &recount);
        common::fit::check(counter(), &text, &chunks, &plan)?;
    }
}

/// The language is chosen per paragraph: in a document of blocks of paragraphs in nine
/// languages, each block is cut into the same sentences as when it stands alone (each block
/// starts with a paragraph the detector names by itself; a paragraph without evidence takes the
/// language of the one before). The detector alone names the fixture's language for most
/// paragraphs: the misses are short list items ("Xen 4.1.4;", "1.2 Rex, sortie en décembre
/// 1996") with none of the function words, hence the 75% floor.
#[test]
fn each_paragraph_of_a_mixed_document_gets_its_own_rules() {
    let paras = paragraphs();
    let mut doc = String::new();
    let mut blocks = Vec::new();
    for (lang, list) in LANGS.iter().zip(paras) {
        let want = Language::from_code(lang).expect("a known code");
        let hits = list
            .iter()
            .filter(|p| segment::detect_language(p) == want)
            .count();
        assert!(
            hits * 4 >= list.len() * 3,
            "{lang}: detected in {hits} of {} paragraphs",
            list.len()
        );
        let first = list
            .iter()
            .position(|p| segment::detect_language(p) == want)
            .expect("some paragraph is detected");
        let block = list[first..]
            .iter()
            .take(20)
            .map(|p| format!("{p}\n\n"))
            .collect::<String>();
        blocks.push((doc.len(), block.clone()));
        doc.push_str(&block);
    }
    let together = segment::sentences(&doc);
    let alone: Vec<_> = blocks
        .iter()
        .flat_map(|(base, block)| {
            segment::sentences(block)
                .into_iter()
                .map(move |r| base + r.start..base + r.end)
        })
        .collect();
    assert_eq!(together, alone);
}
