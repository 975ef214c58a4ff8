//! End-to-end runs of `kerf model` on model folders of both sentence-transformers layouts, and
//! of `kerf survey` / `kerf cut` planning with a bare tokenizer.json (`--tokenizer --window`).
//!
//! The folders and the values checked come from tests/reference/model_layouts.py: saved by
//! sentence-transformers 6.3 (the older layout hand-adjusted from a 6.3 save), with what
//! sentence-transformers reports when it loads them in tests/fixtures/model-layouts/expected.json.
mod common;

use std::path::PathBuf;

use common::{fails, kerf, ok};
use kerf::records::ChunkRecord;

fn folder(name: &str) -> PathBuf {
    common::repo()
        .join("tests/fixtures/model-layouts")
        .join(name)
}

fn expected(name: &str) -> serde_json::Value {
    common::fixture("model-layouts/expected.json")[name].clone()
}

fn model_report(name: &str) -> String {
    ok(&kerf(&["model", folder(name).to_str().unwrap()]))
}

#[test]
fn model_shows_the_older_layout_as_sentence_transformers_reads_it() {
    let out = model_report("st2-layout");
    let want = expected("st2-layout");
    // sentence-transformers 6.3 reads max_seq_length 256 from sentence_bert_config.json.
    assert_eq!(want["max_seq_length"], 256);
    assert!(
        out.contains("configured length  256 tokens (sentence_bert_config.json max_seq_length)"),
        "{out}"
    );
    assert!(
        out.contains(
            "token pooling      mean (1_Pooling/config.json), then L2-normalised (modules.json)"
        ),
        "{out}"
    );
    assert!(out.contains("prompts            none declared"), "{out}");
}

#[test]
fn model_shows_the_6x_layout_with_prompts() {
    let out = model_report("bert-st6");
    // sentence-transformers 6.3: max_seq_length 200, kept as tokenizer_config.json
    // model_max_length; prompts query and passage, default "query".
    assert_eq!(expected("bert-st6")["max_seq_length"], 200);
    assert!(
        out.contains("configured length  200 tokens (tokenizer_config.json model_max_length)"),
        "{out}"
    );
    assert!(
        out.contains("passage = \"passage: \" (kerf puts it before every chunk"),
        "{out}"
    );
    assert!(
        out.contains("query = \"query: \" (default_prompt_name)"),
        "{out}"
    );
    // The fixtures carry no weights: kerf says it cannot make vectors, and why.
    assert!(
        out.contains("kerf can run it    no: model.safetensors: missing"),
        "{out}"
    );
}

#[test]
fn model_shows_the_usable_positions_of_roberta_style_folders() {
    // transformers' RoBERTa and XLM-R embeddings number positions from pad_token_id + 1, MPNet
    // from 2 (padding_idx fixed at 1): 514 positions, 512 tokens.
    for name in ["roberta-st6", "xlmr-st6", "mpnet-st6"] {
        let out = model_report(name);
        assert_eq!(expected(name)["max_position_embeddings"], 514);
        assert!(
            out.contains("position limit     514 positions"),
            "{name}: {out}"
        );
        assert!(
            out.contains("usable positions   512 tokens"),
            "{name}: {out}"
        );
    }
    // sentence-transformers reports 514 as the RoBERTa folder's max_seq_length; kerf says the
    // window it plans with is 512.
    assert_eq!(expected("roberta-st6")["max_seq_length"], 514);
    let out = model_report("roberta-st6");
    assert!(out.contains("configured length  514 tokens (tokenizer_config.json model_max_length): inputs past it are cut; more than the 512 usable positions, so kerf plans with 512"), "{out}");
    assert!(
        out.contains("token pooling      cls (1_Pooling/config.json), not normalised"),
        "{out}"
    );
    let out = model_report("xlmr-st6");
    assert!(
        out.contains("mean-sqrt-len (1_Pooling/config.json), run as mean"),
        "{out}"
    );
    // A window past the usable positions is refused, naming the offset.
    let err = fails(&kerf(&[
        "survey",
        "--model",
        folder("roberta-st6").to_str().unwrap(),
        "--window",
        "513",
        "demo-texts",
    ]));
    assert!(err.contains("window 513 exceeds the model's limit of 512 positions (config.json max_position_embeddings 514 less 2 the roberta family reserves"), "{err}");
}

#[test]
fn model_json_carries_every_convention() {
    let out = ok(&kerf(&[
        "model",
        "--json",
        folder("xlmr-st6").to_str().unwrap(),
    ]));
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let want = expected("xlmr-st6");
    assert_eq!(v["configured_max_tokens"], want["max_seq_length"]);
    assert_eq!(
        v["configured_from"],
        "tokenizer_config.json model_max_length"
    );
    assert_eq!(v["prompts"], want["prompts"]);
    assert_eq!(v["normalize"], want["normalize"]);
    assert_eq!(v["pooling"]["mode"], "mean-sqrt-len");
    assert_eq!(v["pad_token_id"], want["pad_token_id"]);
}

#[test]
fn unsupported_architecture_and_pooling_are_named() {
    let out = model_report("electra-st6");
    assert!(
        out.contains("architecture `electra` (model_type) is not one kerf runs; supported: bert, roberta, xlm-roberta, distilbert, mpnet"),
        "{out}"
    );
    let out = model_report("bert-lasttoken");
    assert!(
        out.contains(
            "1_Pooling/config.json: pooling mode `last-token` is not one kerf's encoder applies"
        ),
        "{out}"
    );
    // Embedding with such a folder is refused before any work, with the same reasons.
    let dir = tempfile::tempdir().unwrap();
    let err = fails(&kerf(&[
        "embed",
        "--model",
        folder("electra-st6").to_str().unwrap(),
        "-p",
        "profiles/sentences-128.toml",
        "demo-texts",
        "--out",
        dir.path().join("v").to_str().unwrap(),
    ]));
    assert!(err.contains("kerf cannot make vectors with"), "{err}");
    assert!(err.contains("architecture `electra`"), "{err}");
}

#[test]
fn profile_new_offers_the_passage_prompt_as_prefix() {
    let out = kerf(&[
        "profile",
        "new",
        "--model",
        folder("bert-st6").to_str().unwrap(),
    ]);
    let toml = ok(&out);
    assert!(toml.contains("prefix = \"passage: \""), "{toml}");
    assert!(String::from_utf8_lossy(&out.stderr).contains("the model's \"passage\" prompt"));
    // An explicit empty prefix wins.
    let toml = ok(&kerf(&[
        "profile",
        "new",
        "--prefix",
        "",
        "--model",
        folder("bert-st6").to_str().unwrap(),
    ]));
    assert!(!toml.contains("passage: "), "{toml}");
}

/// Cut the Debian FAQ (Debian package debian-faq 11.1, scripts/fetch-testdata) with a bare
/// tokenizer of another family and check the fit guarantee with the tokenizers library itself:
/// every chunk, encoded with its special tokens, fits the window and has the reported count.
fn cut_fits_with(tokenizer: &str, window: usize, slack: usize) {
    let faq = common::testdata("debian-faq/debian-faq.en.txt");
    let tok_path = folder(tokenizer).join("tokenizer.json");
    let out = kerf(&[
        "cut",
        "--tokenizer",
        tok_path.to_str().unwrap(),
        "--window",
        &window.to_string(),
        faq.to_str().unwrap(),
    ]);
    let jsonl = ok(&out);
    assert!(String::from_utf8_lossy(&out.stderr).contains("cannot make vectors"));
    let text = std::fs::read_to_string(&faq).unwrap();
    let mut reference = tokenizers::Tokenizer::from_file(&tok_path).unwrap();
    reference.with_truncation(None).unwrap();
    reference.with_padding(None);
    let mut n = 0;
    let mut covered = 0;
    for line in jsonl.lines() {
        let r: ChunkRecord = serde_json::from_str(line).unwrap();
        assert_eq!(&text[r.bytes[0]..r.bytes[1]], r.text);
        let enc = reference.encode(r.text.as_str(), true).unwrap();
        assert!(
            enc.len() <= window,
            "{tokenizer}: chunk {} re-encodes to {} > {window}",
            r.chunk,
            enc.len()
        );
        // The reported count is the chunk's in-document count: re-encoded alone, a chunk may
        // gain the one token a start-of-input space marker adds (Metaspace) and may lose one or
        // two where a run of spaces at its end merges differently (byte-level BPE).
        assert!(
            enc.len() <= r.tokens + slack,
            "{tokenizer}: chunk {} re-encodes to {}, reported {}",
            r.chunk,
            enc.len(),
            r.tokens
        );
        covered = covered.max(r.bytes[1]);
        n += 1;
    }
    assert!(n > 100, "{tokenizer}: only {n} chunks");
    assert!(
        covered + 2 >= text.trim_end().len(),
        "{tokenizer}: chunks stop at byte {covered}"
    );
}

#[test]
fn cut_with_a_byte_level_bpe_tokenizer_fits_the_window() {
    cut_fits_with("roberta-st6", 64, 1);
}

#[test]
fn cut_with_a_unigram_tokenizer_fits_the_window() {
    cut_fits_with("xlmr-st6", 48, 1);
}

#[test]
fn survey_with_a_bare_tokenizer_says_no_vectors() {
    let tok = folder("roberta-st6").join("tokenizer.json");
    let args = [
        "survey",
        "--tokenizer",
        tok.to_str().unwrap(),
        "--window",
        "128",
        "demo-texts",
    ];
    let out = ok(&kerf(&args));
    assert!(out.contains("cannot make vectors"), "{out}");
    assert!(
        out.contains(
            "window 128 tokens (125 for text after 3 tokens of specials, prefix and start reserve)"
        ),
        "{out}"
    );
    let mut json_args = args.to_vec();
    json_args.push("--json");
    let v: serde_json::Value = serde_json::from_str(&ok(&kerf(&json_args))).unwrap();
    assert_eq!(v["vectors_possible"], false);
    // Specials measured on an empty input agree with transformers' count for the folder.
    assert_eq!(v["specials"], expected("roberta-st6")["specials_per_input"]);
    // --tokenizer needs --window; a missing file is named.
    let err = String::from_utf8_lossy(
        &kerf(&["survey", "--tokenizer", tok.to_str().unwrap(), "demo-texts"]).stderr,
    )
    .into_owned();
    assert!(err.contains("--window"), "{err}");
    let err = fails(&kerf(&[
        "survey",
        "--tokenizer",
        "no/such.json",
        "--window",
        "64",
        "demo-texts",
    ]));
    assert!(err.contains("no/such.json"), "{err}");
}

#[test]
fn cut_with_a_wordpiece_tokenizer_of_another_vocabulary_fits_the_window() {
    cut_fits_with("bert-st6", 48, 0);
}
