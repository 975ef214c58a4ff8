//! Helpers shared by the integration tests.
#![allow(dead_code)]
pub mod faq;
pub mod fit;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// The default model folder; fails loudly (never skips) when it has not been fetched.
pub fn model_dir() -> PathBuf {
    let dir = kerf::model::default_model_dir();
    assert!(
        dir.join("model.safetensors").is_file(),
        "model not found at {}: run scripts/fetch-model first",
        dir.display()
    );
    dir
}

/// A cached test-data file; fails loudly when scripts/fetch-testdata has not been run.
pub fn testdata(rel: &str) -> PathBuf {
    let p = kerf::model::kerf_home().join("testdata").join(rel);
    assert!(
        p.exists(),
        "test data {} missing: run scripts/fetch-testdata first",
        p.display()
    );
    p
}

/// A committed JSON fixture from tests/fixtures (made by a script in tests/reference).
pub fn fixture(name: &str) -> serde_json::Value {
    let path = repo().join("tests/fixtures").join(name);
    serde_json::from_str(&std::fs::read_to_string(&path).unwrap())
        .unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

/// A fixture's JSON array of numbers as f32 (the reference scripts write vectors so).
pub fn f32s(v: &serde_json::Value) -> Vec<f32> {
    v.as_array()
        .unwrap_or_else(|| panic!("not an array: {v}"))
        .iter()
        .map(|x| x.as_f64().unwrap() as f32)
        .collect()
}

/// A fixture's JSON array of non-negative integers (token ids, row numbers).
pub fn uints<T: TryFrom<u64>>(v: &serde_json::Value) -> Vec<T> {
    v.as_array()
        .unwrap_or_else(|| panic!("not an array: {v}"))
        .iter()
        .map(|x| {
            x.as_u64()
                .and_then(|n| T::try_from(n).ok())
                .unwrap_or_else(|| panic!("not a small non-negative integer: {x}"))
        })
        .collect()
}

/// The repository root.
pub fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// Run the kerf binary with arguments in a folder.
pub fn kerf_in(dir: &Path, args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_kerf"))
        .args(args)
        .current_dir(dir)
        .output()
        .expect("kerf runs")
}

/// Run the kerf binary from the repository root.
pub fn kerf(args: &[&str]) -> Output {
    kerf_in(&repo(), args)
}

/// Stdout of a successful run; panics with stderr otherwise.
pub fn ok(out: &Output) -> String {
    assert!(
        out.status.success(),
        "kerf failed ({:?})\nstdout:\n{}\nstderr:\n{}",
        out.status.code(),
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout.clone()).expect("utf-8 stdout")
}

/// Stderr of a failed run; panics if it succeeded or panicked.
pub fn fails(out: &Output) -> String {
    let err = String::from_utf8_lossy(&out.stderr).into_owned();
    assert_eq!(
        out.status.code(),
        Some(1),
        "expected exit 1, got {:?}; stderr:\n{err}",
        out.status.code()
    );
    assert!(!err.contains("panicked"), "kerf panicked:\n{err}");
    err
}

/// Every file of a folder with its bytes, sorted by name (for byte-for-byte comparisons of
/// output folders).
pub fn files_of(dir: &Path) -> Vec<(String, Vec<u8>)> {
    let mut v: Vec<(String, Vec<u8>)> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap())
        .map(|e| {
            (
                e.file_name().to_string_lossy().into_owned(),
                std::fs::read(e.path()).unwrap(),
            )
        })
        .collect();
    v.sort();
    v
}

/// The Debian FAQ (debian-faq 11.1, from scripts/fetch-testdata) written into `dir` as one file
/// per chapter, the first `n` chapters (it has 16).
pub fn faq_chapters(dir: &Path, n: usize) -> usize {
    let faq = std::fs::read_to_string(testdata("debian-faq/debian-faq.en.txt")).unwrap();
    let mut written = 0;
    for (i, part) in faq.split("\nChapter\u{a0}").enumerate().skip(1).take(n) {
        std::fs::write(dir.join(format!("chapter-{i:02}.txt")), part).unwrap();
        written += 1;
    }
    written
}

/// A corpus of `n` short documents as JSONL (`id`, `text`), made from a fixed word list by a
/// fixed rule, so every run gets the same corpus: one to three sentences each, some with two
/// paragraphs, and every 97th empty (a document with no chunks).
pub fn short_documents(n: usize) -> String {
    const WORDS: [&str; 24] = [
        "boiler",
        "signal",
        "timetable",
        "parapet",
        "crossing",
        "platform",
        "tender",
        "sleeper",
        "gauge",
        "whistle",
        "ballast",
        "carriage",
        "inspection",
        "summer",
        "repair",
        "lamp",
        "station",
        "valve",
        "bridge",
        "curve",
        "wagon",
        "fare",
        "brake",
        "cutting",
    ];
    let mut out = String::new();
    for i in 0..n {
        let mut text = String::new();
        if i % 97 != 5 {
            let sentences = 1 + i % 3;
            for s in 0..sentences {
                if s == 2 && i % 2 == 0 {
                    text.push_str("\n\n");
                } else if s > 0 {
                    text.push(' ');
                }
                let w = |k: usize| WORDS[(i * 7 + s * 5 + k * 11) % WORDS.len()];
                text.push_str(&format!(
                    "The {} by the {} was checked {} times before the {} ran.",
                    w(0),
                    w(1),
                    i % 13 + s,
                    w(2)
                ));
            }
        }
        let line = serde_json::json!({ "id": format!("doc-{i:05}"), "text": text });
        out.push_str(&line.to_string());
        out.push('\n');
    }
    out
}
