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
