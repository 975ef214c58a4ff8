//! Invariants of the splitter with the real model tokenizer, over random texts (proptest).
//!
//! The guarantee kerf makes: every chunk, re-encoded on its own with the model's tokenizer and
//! its special tokens (and the profile's prefix), fits the window; the reported token count is
//! exactly what re-encoding gives; chunks cover the document in order with no gap; overlap is
//! the shared token run, never more than asked.
mod common;

use std::sync::OnceLock;

use kerf::model;
use kerf::plan::{self, ResolvedPlan};
use kerf::profile::{Boundary, Profile};
use kerf::split::{self, Chunk};
use kerf::survey;
use kerf::tokens::TokenCounter;
use proptest::prelude::*;

fn counter() -> &'static TokenCounter {
    static C: OnceLock<TokenCounter> = OnceLock::new();
    C.get_or_init(|| model::inspect(&common::model_dir()).expect("model loads").1)
}

use common::fit::plan_for as resolved;

const PIECES: &[&str] = &[
    "the",
    "valve",
    "inspection",
    "was",
    "completed",
    "No.",
    "4",
    "3.5",
    "mm",
    "e.g.",
    "Mr.",
    "J.",
    "T.",
    "Abernethy",
    "said",
    "\"Stop.\"",
    "(see",
    "Fig.",
    "2)",
    "…",
    "well",
    "and",
    "then",
    "—",
    "unbelievably",
    "hyperextraordinarilyunprecedentedcircumnavigational",
    "naïve",
    "café",
    "°C",
    "東京駅",
    "の",
    "北口",
    "مرحبا",
    "بالعالم",
    "👩‍🔧",
    "🚂",
    "x",
    ".",
    ",",
    ";",
    "!",
    "?",
];
const SEPS: &[&str] = &[
    " ",
    " ",
    " ",
    " ",
    "\n",
    "\n\n",
    "\r\n",
    "  ",
    "\n\n# Heading\n\n",
    "\n- ",
    "\n1. ",
];

fn text_strategy() -> impl Strategy<Value = String> {
    prop::collection::vec(
        (prop::sample::select(PIECES), prop::sample::select(SEPS)),
        0..220,
    )
    .prop_map(|v| {
        let mut s = String::new();
        for (w, sep) in v {
            s.push_str(w);
            s.push_str(sep);
        }
        s
    })
}

fn check(text: &str, chunks: &[Chunk], plan: &ResolvedPlan) -> Result<(), TestCaseError> {
    common::fit::check(counter(), text, chunks, plan)
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 160, .. ProptestConfig::default() })]

    #[test]
    fn chunks_fit_cover_and_overlap(
        text in text_strategy(),
        boundary in prop::sample::select(Boundary::ALL.to_vec()),
        window in 6usize..90,
        overlap_frac in 0.0f64..0.6,
        min_frac in 0.0f64..0.5,
        with_prefix in any::<bool>(),
    ) {
        let prefix = if with_prefix { "passage: " } else { "" };
        let fixed = 2 + if with_prefix { 3 } else { 0 };
        // Budgets under the tokenizer's piece floor are refused by the plan (tested in
        // tests/token_counts.rs), so the smallest window drawn is the smallest accepted.
        let window = window.max(fixed + counter().piece_floor());
        let budget = window - fixed;
        let overlap = ((budget as f64) * overlap_frac) as usize;
        let min_chunk = ((budget as f64) * min_frac) as usize;
        let plan = resolved(boundary, window, overlap.min(budget - 1), min_chunk.min(budget - 1), prefix);
        let an = survey::analyze(&text, counter()).unwrap();
        let recount = |t: &str| counter().count_content(t).unwrap();
        let chunks = split::cut(&text, &an.tokens, &an.segments, &plan.cut, &recount);
        check(&text, &chunks, &plan)?;
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 96, .. ProptestConfig::default() })]

    /// With heading breaks at paragraph starts: chunks still fit, cover and overlap as above,
    /// each break starts a chunk (when the section before it is at least the minimum chunk),
    /// and no chunk reaches back across a break.
    #[test]
    fn heading_breaks_keep_the_fit_and_start_chunks(
        text in text_strategy(),
        boundary in prop::sample::select(vec![Boundary::Token, Boundary::Sentence, Boundary::Paragraph]),
        window in 6usize..90,
        overlap_frac in 0.0f64..0.6,
        every in 1usize..4,
    ) {
        let window = window.max(2 + counter().piece_floor());
        let budget = window - 2;
        let overlap = ((budget as f64) * overlap_frac) as usize;
        let plan = resolved(boundary, window, overlap.min(budget - 1), 0, "");
        let an = survey::analyze(&text, counter()).unwrap();
        let breaks: Vec<usize> = an
            .segments
            .paragraphs
            .iter()
            .step_by(every)
            .map(|p| p.bytes.start)
            .collect();
        let recount = |t: &str| counter().count_content(t).unwrap();
        let chunks = split::cut_at_headings(&text, &an.tokens, &an.segments, &plan.cut, &recount, &breaks);
        check(&text, &chunks, &plan)?;
        for &b in &breaks {
            if an.tokens.offsets.iter().all(|o| o.start < b) {
                continue; // nothing left after it
            }
            // The chunk holding the break's first token starts there.
            let t = an.tokens.offsets.partition_point(|o| o.start < b);
            let holder = chunks.iter().find(|c| c.token_range.contains(&t));
            if let Some(c) = holder {
                if t > 0 {
                    prop_assert_eq!(c.token_range.start, t, "break at byte {} inside {:?}", b, c);
                }
            }
        }
    }
}

/// A Markdown document of sections whose headings are drawn from the same hostile pieces.
fn sectioned_strategy() -> impl Strategy<Value = String> {
    prop::collection::vec(
        (
            1usize..4,
            prop::collection::vec(prop::sample::select(PIECES), 1..14),
            text_strategy(),
        ),
        1..6,
    )
    .prop_map(|sections| {
        let mut s = String::new();
        for (level, title, body) in sections {
            s.push_str(&"#".repeat(level));
            s.push(' ');
            s.push_str(&title.join(" "));
            s.push_str("\n\n");
            s.push_str(&body);
            s.push_str("\n\n");
        }
        s
    })
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 96, .. ProptestConfig::default() })]

    /// A prefix template renders per chunk (title and section path) and is shortened to its
    /// room: every chunk, re-encoded with its own prefix and the specials, still fits the
    /// window, and no rendered prefix takes more than the room.
    #[test]
    fn templated_prefixes_keep_the_fit(
        text in sectioned_strategy(),
        boundary in prop::sample::select(vec![Boundary::Token, Boundary::Sentence, Boundary::Paragraph]),
        window in 20usize..90,
        limit in 2usize..24,
        breaks in 0u8..3,
    ) {
        let (info, c) = model::inspect(&common::model_dir()).unwrap();
        let mut p = Profile::default();
        p.cut.window = window;
        p.cut.boundary = boundary;
        p.cut.prefix = "{title} > {section}: ".into();
        p.cut.prefix_limit = Some(limit);
        p.cut.heading_breaks = breaks;
        let plan = plan::resolve(&p, &info, &c, "prop");
        prop_assume!(plan.is_ok());
        let plan = plan.unwrap();
        let doc = kerf::corpus::Document::plain("maintenance-log.md", "prop", text.clone());
        let (records, _) = kerf::job::cut_document(&plan, counter(), &doc).unwrap();
        for r in &records {
            let prefix = r.prefix.as_deref().expect("a templated plan gives every record a prefix");
            let pt = if prefix.is_empty() { 0 } else { counter().count_content(prefix).unwrap() };
            prop_assert!(pt <= limit, "prefix {:?} takes {} > {}", prefix, pt, limit);
            let re = counter().count_input(&format!("{prefix}{}", r.text)).unwrap();
            prop_assert!(re <= window, "chunk {} with prefix {:?} re-encodes to {} > {}", r.chunk, prefix, re, window);
            prop_assert!(r.tokens <= window);
        }
    }
}

/// Token windows take the largest run of whole words that fits the asked overlap.
#[test]
fn token_overlap_is_exact_on_short_words() {
    let text = (0..400)
        .map(|i| format!("w{}", i % 10))
        .collect::<Vec<_>>()
        .join(" ");
    // "w3" is one word of two tokens here or one; whatever it is, each word has the same count.
    let plan = resolved(Boundary::Token, 66, 16, 0, "");
    let an = survey::analyze(&text, counter()).unwrap();
    let chunks = split::cut(&text, &an.tokens, &an.segments, &plan.cut, &|t| {
        counter().count_content(t).unwrap()
    });
    let per_word = counter().count_content("w3").unwrap();
    assert!(chunks.len() > 3);
    for c in &chunks[1..] {
        assert_eq!(c.overlap_tokens, 16 / per_word * per_word, "{c:?}");
    }
}

/// Named hostile texts (common practice in text-handling tests; the code points are from the
/// Unicode standard): a byte-order mark, lone CR line ends, NUL bytes, stacked combining marks,
/// zero-width joiner sequences, right-to-left text with bidi controls, line and paragraph
/// separators, and a 200,000-byte run with no whitespace. Every rule at a small and a large
/// window: chunks match their byte ranges, fit, and cover the text in order.
#[test]
fn hostile_unicode_texts_still_fit_and_cover() {
    let zalgo: String = "Z\u{0351}\u{0346}\u{0329}a\u{0300}\u{0301}\u{0302}\u{0303}\u{0304}l\u{0308}\u{0330}g\u{035B}o\u{0489} "
        .repeat(60);
    let cases: Vec<(&str, String)> = vec![
        ("bom", "\u{feff}First line after a byte-order mark. Second sentence.\n\nNext paragraph.".repeat(20)),
        ("lone cr", "Old Mac line ends.\rAnother line.\r\rA paragraph after two CRs.\r".repeat(40)),
        ("nul bytes", "Text with a NUL\u{0}inside. And\u{0}\u{0}two more. End.\n".repeat(40)),
        ("combining marks", zalgo),
        ("zwj sequences", "Crew 👩\u{200d}🔧👨\u{200d}👩\u{200d}👧\u{200d}👦 on duty 🏳\u{fe0f}\u{200d}🌈. ".repeat(80)),
        ("rtl and bidi", "\u{202e}reversed\u{202c} مرحبا بالعالم. \u{200f}שלום עולם.\u{200e} Mixed text, then English. ".repeat(50)),
        ("separators", "Line one\u{2028}line two\u{2029}next paragraph\u{85}after NEL. ".repeat(60)),
        ("no whitespace", "x".repeat(200_000)),
        ("invisible", "\u{200b}\u{2060}\u{feff}\u{00ad}".repeat(500)),
    ];
    for (name, text) in &cases {
        for boundary in Boundary::ALL {
            for window in [16usize, 256] {
                let plan = resolved(
                    boundary,
                    window,
                    if boundary == Boundary::Head { 0 } else { 4 },
                    0,
                    "",
                );
                let an = survey::analyze(text, counter()).unwrap();
                let recount = |t: &str| counter().count_content(t).unwrap();
                let chunks = split::cut(text, &an.tokens, &an.segments, &plan.cut, &recount);
                for c in &chunks {
                    assert!(
                        text.is_char_boundary(c.byte_range.start)
                            && text.is_char_boundary(c.byte_range.end)
                            && c.byte_range.end <= text.len(),
                        "{name} {boundary:?} {window}: byte range {:?}",
                        c.byte_range
                    );
                }
                if let Err(e) = check(text, &chunks, &plan) {
                    panic!("{name}, {boundary:?}, window {window}: {e}");
                }
            }
        }
    }
}
