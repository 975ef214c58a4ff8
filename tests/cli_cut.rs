//! End-to-end runs of the binary: survey and cut over demo-texts and over bad input.
mod common;

use common::{fails, kerf, kerf_in, ok};
use kerf::records::ChunkRecord;

fn records(jsonl: &str) -> Vec<ChunkRecord> {
    jsonl
        .lines()
        .map(|l| serde_json::from_str(l).expect("each line is a chunk record"))
        .collect()
}

#[test]
fn cut_demo_texts_with_every_shipped_profile() {
    common::model_dir();
    let (_, counter) = kerf::model::inspect(&common::model_dir()).unwrap();
    for profile in [
        "head-256",
        "sentences-128",
        "sentences-256",
        "paragraphs-256-overlap",
        "tokens-512",
        "sections-128",
    ] {
        let path = format!("profiles/{profile}.toml");
        let out = ok(&kerf(&["cut", "--profile", &path, "demo-texts"]));
        let recs = records(&out);
        assert!(!recs.is_empty(), "{profile} wrote no chunks");
        let window =
            kerf::profile::Profile::load(std::path::Path::new(&common::repo().join(&path)))
                .unwrap()
                .cut
                .window;
        let mut formats = std::collections::BTreeSet::new();
        let mut sources = std::collections::HashMap::new();
        for r in &recs {
            // HTML and PDF: byte ranges refer to the text `kerf text` prints.
            let src = sources.entry(r.doc.clone()).or_insert_with(|| {
                let path = common::repo().join("demo-texts").join(&r.doc);
                match r.extracted {
                    Some(_) => ok(&kerf(&["text", &path.to_string_lossy()])),
                    None => std::fs::read_to_string(&path).unwrap(),
                }
            });
            if let Some(f) = r.extracted {
                formats.insert(format!("{f:?}"));
            }
            assert_eq!(
                &src[r.bytes[0]..r.bytes[1]],
                r.text,
                "{profile}: byte range of {}#{}",
                r.doc,
                r.chunk
            );
            // A templated profile's records carry the prefix each chunk is embedded with.
            let input = format!("{}{}", r.prefix.as_deref().unwrap_or(""), r.text);
            let re = counter.count_input(&input).unwrap();
            assert!(
                re <= window,
                "{profile}: {}#{} re-encodes to {re} > {window}",
                r.doc,
                r.chunk
            );
            assert_eq!(
                re, r.tokens,
                "{profile}: reported tokens of {}#{}",
                r.doc, r.chunk
            );
        }
        assert_eq!(
            formats.len(),
            2,
            "{profile}: chunks of the HTML page and the PDF"
        );
        if profile == "head-256" {
            let docs: std::collections::BTreeSet<_> = recs.iter().map(|r| &r.doc).collect();
            assert_eq!(docs.len(), recs.len(), "head keeps one chunk per document");
        }
    }
}

#[test]
fn cut_to_file_is_atomic_and_refuses_to_overwrite() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("chunks.jsonl");
    let o = out.to_str().unwrap();
    ok(&kerf(&[
        "cut",
        "-p",
        "profiles/sentences-256.toml",
        "demo-texts",
        "--out",
        o,
    ]));
    let first = std::fs::read(&out).unwrap();
    let err = fails(&kerf(&[
        "cut",
        "-p",
        "profiles/sentences-256.toml",
        "demo-texts",
        "--out",
        o,
    ]));
    assert!(err.contains("already exists"), "{err}");
    // A failing run (bad input after good input) leaves the old file untouched and no temp file.
    let bad = dir.path().join("bad.txt");
    std::fs::write(&bad, b"fine text\n\xff\xfe broken").unwrap();
    let err = fails(&kerf(&[
        "cut",
        "-p",
        "profiles/sentences-256.toml",
        "demo-texts",
        bad.to_str().unwrap(),
        "--out",
        o,
        "--force",
    ]));
    assert!(err.contains("bad.txt: invalid UTF-8 at byte 10"), "{err}");
    assert_eq!(std::fs::read(&out).unwrap(), first);
    let leftovers: Vec<_> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name())
        .collect();
    assert_eq!(
        leftovers.len(),
        2,
        "only chunks.jsonl and bad.txt: {leftovers:?}"
    );
}

#[test]
fn bad_inputs_get_clear_errors_and_no_panic() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let p = common::repo().join("profiles/sentences-128.toml");
    let p = p.to_str().unwrap();
    // Invalid UTF-8: file and byte offset; --lossy goes through.
    std::fs::write(d.join("latin1.txt"), b"caf\xe9 au lait").unwrap();
    let err = fails(&kerf_in(d, &["survey", "latin1.txt"]));
    assert!(err.contains("latin1.txt: invalid UTF-8 at byte 3"), "{err}");
    ok(&kerf_in(d, &["survey", "--lossy", "latin1.txt"]));
    // Binary files are skipped with a notice.
    std::fs::write(d.join("blob.txt"), b"\x00\x01\x02PNG").unwrap();
    let out = kerf_in(d, &["cut", "-p", p, "blob.txt"]);
    ok(&out);
    assert!(
        String::from_utf8_lossy(&out.stderr).contains("binary"),
        "binary notice"
    );
    // Empty and whitespace-only: reported, no chunks.
    std::fs::write(d.join("empty.txt"), "").unwrap();
    std::fs::write(d.join("blank.md"), " \n\t\n").unwrap();
    let out = kerf_in(d, &["cut", "-p", p, "empty.txt", "blank.md"]);
    assert!(ok(&out).is_empty());
    assert!(String::from_utf8_lossy(&out.stderr).contains("empty or whitespace-only"));
    // A 50,000-character line with no spaces or punctuation; words beyond the word limit;
    // CRLF; mixed scripts. All cut, all fit.
    let long_line = "a".repeat(50_000);
    let long_words = (0..50)
        .map(|i| format!("{}{}", "pneumono".repeat(3 + i % 20), i))
        .collect::<Vec<_>>()
        .join(" ");
    std::fs::write(d.join("longline.txt"), &long_line).unwrap();
    std::fs::write(d.join("longwords.txt"), &long_words).unwrap();
    std::fs::write(
        d.join("crlf.txt"),
        "First line.\r\nSecond line.\r\n\r\nNew paragraph here.\r\n",
    )
    .unwrap();
    std::fs::write(
        d.join("mixed.txt"),
        "東京駅の北口で会いましょう。 مرحبا بالعالم. Family: 👩‍👩‍👧‍👦 and 🇫🇷 flags. Ünïcödé.",
    )
    .unwrap();
    for f in ["longline.txt", "longwords.txt", "crlf.txt", "mixed.txt"] {
        let recs = records(&ok(&kerf_in(d, &["cut", "-p", p, f])));
        assert!(!recs.is_empty(), "{f}");
        assert!(recs.iter().all(|r| r.tokens <= 128), "{f}");
    }
    // Missing model folder names the fetch command.
    let err = fails(&kerf_in(
        d,
        &["survey", "--model", "/nonexistent/model", "crlf.txt"],
    ));
    assert!(err.contains("scripts/fetch-model"), "{err}");
    // Malformed profile: file, line and column.
    std::fs::write(
        d.join("bad.toml"),
        "schema = 1\n[cut]\nwindow = 128\nstride = 9\n",
    )
    .unwrap();
    let err = fails(&kerf_in(d, &["cut", "-p", "bad.toml", "crlf.txt"]));
    assert!(
        err.contains("bad.toml: line 4, column 1") && err.contains("stride"),
        "{err}"
    );
    // Window beyond the model's position limit.
    std::fs::write(d.join("big.toml"), "schema = 1\n[cut]\nwindow = 1024\n").unwrap();
    let err = fails(&kerf_in(d, &["profile", "check", "big.toml"]));
    assert!(err.contains("exceeds the model's limit of 512"), "{err}");
    // Missing input path.
    let err = fails(&kerf_in(d, &["survey", "nope.txt"]));
    assert!(err.contains("nope.txt: no such file or folder"), "{err}");
}

#[test]
fn survey_reports_overflow_and_json() {
    let out = ok(&kerf(&["survey", "demo-texts", "--json"]));
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let corpus = &v["corpus"];
    assert!(corpus["documents"].as_u64().unwrap() >= 8);
    assert_eq!(v["window"], 256);
    assert_eq!(v["budget"], 254);
    assert!(corpus["unseen_tokens"].as_u64().unwrap() > 0);
    // The demo corpus holds a run-on sentence longer than 512 tokens.
    assert!(
        corpus["longest_sentence_tokens"].as_u64().unwrap() > 512,
        "{corpus}"
    );
    let docs = v["documents"].as_array().unwrap();
    let sum: u64 = docs
        .iter()
        .map(|d| d["content_tokens"].as_u64().unwrap())
        .sum();
    assert_eq!(sum, corpus["content_tokens"].as_u64().unwrap());
    for d in docs {
        let (n, u) = (
            d["content_tokens"].as_u64().unwrap(),
            d["unseen_tokens"].as_u64().unwrap(),
        );
        assert_eq!(u, n.saturating_sub(254), "{}", d["id"]);
    }
    let human = ok(&kerf(&[
        "survey",
        "demo-texts",
        "--order",
        "unseen",
        "--top",
        "3",
    ]));
    assert!(human.contains("a truncating embed never sees"), "{human}");
    assert!(human.contains("(3 of"), "{human}");
    assert!(
        human.contains("sentences longer than the 254-token budget"),
        "{human}"
    );
    // Piped into a closed reader is not an error.
    let status = std::process::Command::new("bash")
        .arg("-c")
        .arg(format!(
            "set -o pipefail; {} survey demo-texts | head -1 >/dev/null",
            env!("CARGO_BIN_EXE_kerf")
        ))
        .current_dir(common::repo())
        .status()
        .unwrap();
    assert!(status.success());
}

#[test]
fn stdin_and_jsonl() {
    let dir = tempfile::tempdir().unwrap();
    let f = dir.path().join("docs.jsonl");
    std::fs::write(
        &f,
        "{\"doc_id\":\"a\",\"body\":\"One. Two.\"}\n{\"doc_id\":\"b\",\"body\":\"Three.\"}\n",
    )
    .unwrap();
    let out = ok(&kerf(&[
        "cut",
        "-p",
        "profiles/sentences-128.toml",
        "--text-field",
        "body",
        "--id-field",
        "doc_id",
        f.to_str().unwrap(),
    ]));
    let recs = records(&out);
    assert_eq!(
        recs.iter().map(|r| r.doc.as_str()).collect::<Vec<_>>(),
        ["a", "b"]
    );
    let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_kerf"))
        .args(["survey", "--json", "-"])
        .current_dir(common::repo())
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    use std::io::Write;
    child
        .stdin
        .take()
        .unwrap()
        .write_all(b"A short note from standard input.")
        .unwrap();
    let out = child.wait_with_output().unwrap();
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["documents"][0]["id"], "stdin");
    assert_eq!(v["documents"][0]["content_tokens"], 7);
}

/// A JSONL file with a broken line in the middle: refused naming its line number, or, with
/// --skip-broken-lines, that line left out and reported while every other line is cut.
#[test]
fn broken_jsonl_line_is_refused_or_skipped_never_silently() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    let mut lines: Vec<String> = (0..40)
        .map(|i| {
            format!(r#"{{"id": "d{i}", "text": "Document {i} says one thing. Then another."}}"#)
        })
        .collect();
    lines[17] = r#"{"id": "d17", "text": "cut off mid-"#.to_string();
    lines[30] = r#"{"id": "d30", "body": "the text field is missing"}"#.to_string();
    std::fs::write(d.join("docs.jsonl"), lines.join("\n") + "\n").unwrap();
    let profile = common::repo().join("profiles/sentences-128.toml");
    let p = profile.to_str().unwrap();
    let e = fails(&kerf_in(d, &["cut", "-p", p, "docs.jsonl"]));
    assert!(e.contains("docs.jsonl:18: not valid JSON"), "{e}");
    assert!(e.contains("--skip-broken-lines"), "{e}");
    let out = kerf_in(d, &["cut", "-p", p, "docs.jsonl", "--skip-broken-lines"]);
    let stdout = ok(&out);
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("docs.jsonl:18: skipped: not valid JSON"),
        "{err}"
    );
    assert!(
        err.contains("docs.jsonl:31: skipped: no field `text`"),
        "{err}"
    );
    let ids: std::collections::BTreeSet<String> =
        records(&stdout).into_iter().map(|r| r.doc).collect();
    assert_eq!(ids.len(), 38, "{ids:?}");
    assert!(!ids.contains("d17") && !ids.contains("d30"));
}

/// A prefix template end to end, on a chapter of the Debian FAQ's HTML edition
/// (scripts/fetch-testdata): every record carries its own prefix naming the page title and the
/// section it starts under, and re-encoded with that prefix and the specials it fits the window
/// and takes exactly the tokens the record reports. A template naming an unknown field, or whose
/// own text outgrows its room, is refused with the profile named.
#[test]
fn cut_with_a_title_and_section_prefix() {
    let (_, counter) = kerf::model::inspect(&common::model_dir()).unwrap();
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    let page = common::testdata("debian-faq/html/kernel.en.html");
    std::fs::copy(&page, d.join("kernel.html")).unwrap();
    let profile = "schema = 1\nname = \"titled\"\n[cut]\nwindow = 96\nboundary = \"sentence\"\nprefix = \"{title} > {section}: \"\nprefix_limit = 24\n";
    std::fs::write(d.join("p.toml"), profile).unwrap();
    let shown = ok(&kerf_in(d, &["profile", "show", "p.toml"]));
    assert!(
        shown.contains("window 96 = 2 special + 24 prefix + 70 content tokens"),
        "{shown}"
    );
    let recs = records(&ok(&kerf_in(d, &["cut", "-p", "p.toml", "kernel.html"])));
    assert!(recs.len() > 5);
    let mut deep = 0;
    for r in &recs {
        let prefix = r.prefix.as_deref().expect("every record has its prefix");
        let re = counter.count_input(&format!("{prefix}{}", r.text)).unwrap();
        assert!(re <= 96, "#{} re-encodes to {re}", r.chunk);
        assert_eq!(re, r.tokens, "reported tokens of #{}", r.chunk);
        assert!(counter.count_content(prefix).unwrap() <= 24, "{prefix:?}");
        // The innermost heading the chunk starts under is named, in full or cut short.
        let inner = r
            .section
            .last()
            .expect("the page's chapter heading is above every chunk");
        let named = prefix.trim_end_matches(": ").rsplit(" > ").next().unwrap();
        assert!(
            inner.starts_with(named),
            "#{}: {prefix:?} for {inner:?}",
            r.chunk
        );
        if r.section.len() == 2 {
            deep += 1;
        }
    }
    assert!(deep > 5, "chunks under a question name it");
    // The page's title is its chapter heading: a section path that starts with the title
    // does not say it twice.
    assert_eq!(
        recs[0].prefix.as_deref(),
        Some("Chapter 10. Debian and the kernel: ")
    );

    std::fs::write(d.join("bad.toml"), profile.replace("{section}", "{author}")).unwrap();
    let err = fails(&kerf_in(d, &["cut", "-p", "bad.toml", "kernel.html"]));
    assert!(
        err.contains("bad.toml") && err.contains("unknown field `{author}`"),
        "{err}"
    );
    let long = "schema = 1\nname = \"x\"\n[cut]\nwindow = 96\nprefix = \"passage of the maintenance archive, {section}: \"\nprefix_limit = 4\n";
    std::fs::write(d.join("long.toml"), long).unwrap();
    let err = fails(&kerf_in(d, &["cut", "-p", "long.toml", "kernel.html"]));
    assert!(
        err.contains("long.toml") && err.contains("raise prefix_limit"),
        "{err}"
    );
}
