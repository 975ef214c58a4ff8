//! Token counts against an independent implementation: a pure-Python WordPiece from the
//! `transformers` package (BertTokenizerLegacy), run by tests/reference/token_counts.py over
//! demo-texts, the Lee corpus (gensim 4.4.0 test data) and a few tricky strings. The fixture is
//! committed; this test re-reads the same texts and must match every count exactly.
mod common;

use kerf::model;

#[test]
fn counts_match_the_pure_python_wordpiece() {
    let (_, counter) = model::inspect(&common::model_dir()).unwrap();
    let fixture: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(common::repo().join("tests/fixtures/token_counts.json")).unwrap(),
    )
    .unwrap();
    let lee: Vec<String> = {
        let raw = std::fs::read(common::testdata("lee/lee.cor")).unwrap();
        // Latin-1: each byte is the code point of the same value.
        let text: String = raw.iter().map(|&b| b as char).collect();
        text.split('\n')
            .filter(|l| !l.trim().is_empty())
            .map(String::from)
            .collect()
    };
    let mut checked = 0;
    let mut mismatches = Vec::new();
    for t in fixture["texts"].as_array().unwrap() {
        let name = t["name"].as_str().unwrap();
        let text = if let Some(inline) = t["text"].as_str() {
            inline.to_string()
        } else if let Some(i) = name.strip_prefix("lee:") {
            lee[i.parse::<usize>().unwrap()].clone()
        } else {
            std::fs::read_to_string(common::repo().join(name)).unwrap()
        };
        assert_eq!(
            kerf::store::sha256_hex(text.as_bytes()),
            t["sha256"].as_str().unwrap(),
            "{name} changed since the fixture was made: rerun tests/reference/token_counts.py"
        );
        let want = t["content_tokens"].as_u64().unwrap() as usize;
        let got = counter.count_content(&text).unwrap();
        if got != want {
            mismatches.push(format!("{name}: kerf {got}, reference {want}"));
        }
        checked += 1;
    }
    println!(
        "token counts: {checked} texts checked, {} mismatches",
        mismatches.len()
    );
    assert!(
        checked >= 57,
        "fixture holds the demo texts, 50 Lee documents and the tricky strings"
    );
    assert!(mismatches.is_empty(), "{}", mismatches.join("\n"));
}

/// Long documents are tokenized in pieces cut before whitespace (to bound memory); the pieces
/// must give exactly the tokens, offsets and word starts of tokenizing the whole text. Checked
/// on the Debian FAQ (debian-faq 11.1) and every demo text, with pieces far smaller than the
/// real limit so there are hundreds of cuts, including the tricky strings of the fixture.
#[test]
fn pieces_tokenize_exactly_like_the_whole() {
    let (_, counter) = model::inspect(&common::model_dir()).unwrap();
    let mut texts =
        vec![std::fs::read_to_string(common::testdata("debian-faq/debian-faq.en.txt")).unwrap()];
    for e in std::fs::read_dir(common::repo().join("demo-texts")).unwrap() {
        let p = e.unwrap().path();
        if matches!(p.extension().and_then(|x| x.to_str()), Some("md" | "txt")) {
            texts.push(std::fs::read_to_string(p).unwrap());
        }
    }
    texts.push(
        "naïve café\r\n\u{feff}東京駅の北口 مرحبا 👩\u{200d}🔧 x\u{0301}y   \t\n\nend".repeat(300),
    );
    for (i, text) in texts.iter().enumerate() {
        let whole = counter.tokenize_in_pieces(text, usize::MAX).unwrap();
        for piece in [97, 1000, 4096] {
            let parts = counter.tokenize_in_pieces(text, piece).unwrap();
            assert_eq!(parts.offsets, whole.offsets, "text {i}, pieces of {piece}");
            assert_eq!(
                parts.word_start, whole.word_start,
                "text {i}, pieces of {piece}"
            );
        }
    }
}

/// BERT's WordPiece as published (greedy longest-match-first over the vocabulary, `##` before
/// every piece after the first, the whole word `[UNK]` when a piece has no match; Devlin et al.
/// 2019 and google-research/bert `tokenization.py`, written here from memory), for a word that
/// is already lower-case and has no punctuation.
fn wordpiece_count(word: &str, vocab: &std::collections::HashSet<String>) -> usize {
    let chars: Vec<char> = word.chars().collect();
    let mut start = 0;
    let mut count = 0;
    while start < chars.len() {
        let mut end = chars.len();
        let mut found = false;
        while end > start {
            let piece: String = chars[start..end].iter().collect();
            let piece = if start > 0 {
                format!("##{piece}")
            } else {
                piece
            };
            if vocab.contains(&piece) {
                found = true;
                break;
            }
            end -= 1;
        }
        if !found {
            return 1; // the whole word becomes [UNK]
        }
        count += 1;
        start = end;
    }
    count
}

/// The piece floor (the most tokens one vocabulary token re-tokenizes to when cut out of a word)
/// against an independent WordPiece over the model's own vocab.txt: every continuation entry made
/// of lower-case ASCII letters and digits counts the same both ways, and the floor is the largest
/// count. The plan refuses a budget under the floor and accepts one at it.
#[test]
fn piece_floor_matches_an_independent_wordpiece() {
    let dir = common::model_dir();
    let (info, counter) = model::inspect(&dir).unwrap();
    let vocab_txt = std::fs::read_to_string(dir.join("vocab.txt")).unwrap();
    let vocab: std::collections::HashSet<String> = vocab_txt.lines().map(str::to_string).collect();
    let mut checked = 0;
    let mut independent_max = 0;
    for entry in vocab_txt.lines() {
        let Some(rest) = entry.strip_prefix("##") else {
            continue;
        };
        if rest.is_empty()
            || !rest
                .chars()
                .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit())
        {
            continue;
        }
        let ours = counter.count_content(rest).unwrap();
        let theirs = wordpiece_count(rest, &vocab);
        assert_eq!(ours, theirs, "{entry:?} alone");
        independent_max = independent_max.max(theirs);
        checked += 1;
    }
    assert!(
        checked > 4000,
        "only {checked} continuation entries checked"
    );
    let floor = counter.piece_floor();
    assert!(
        floor >= independent_max,
        "floor {floor} < {independent_max}"
    );
    // The example the split fuzz target found: `##ick` (of "pennick") alone is two tokens.
    assert!(vocab.contains("##ick"));
    assert_eq!(wordpiece_count("ick", &vocab), 2);
    eprintln!("piece floor {floor}; {checked} entries checked, independent max {independent_max}");

    let mut p = kerf::profile::Profile::default();
    p.cut.boundary = kerf::profile::Boundary::Token;
    p.cut.overlap = 0;
    p.cut.min_chunk = 0;
    p.cut.window = counter.specials_per_input() + floor - 1;
    let e = kerf::plan::resolve(&p, &info, &counter, "t.toml").unwrap_err();
    assert!(e.to_string().contains(&format!("at least {floor}")), "{e}");
    p.cut.window += 1;
    let plan = kerf::plan::resolve(&p, &info, &counter, "t.toml").unwrap();
    assert_eq!(plan.budget(), floor);
}
