//! `kerf explore` refuses bad input before it takes over the terminal.
mod common;

#[test]
fn no_readable_documents_is_an_error() {
    common::model_dir();
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("picture.png"), b"\x89PNG\0\0").unwrap();
    std::fs::write(dir.path().join("bin.txt"), b"\0\x01\x02").unwrap();
    let e = common::fails(&common::kerf(&[
        "explore",
        "--hash-embedder",
        "--no-cache",
        dir.path().to_str().unwrap(),
    ]));
    assert!(e.contains("no readable documents"), "{e}");
    assert!(e.contains("bin.txt") && e.contains("binary"), "{e}");
}

#[test]
fn missing_model_names_the_fetch_command() {
    let dir = tempfile::tempdir().unwrap();
    let e = common::fails(&common::kerf(&[
        "explore",
        "--model",
        dir.path().join("nope").to_str().unwrap(),
        "demo-texts",
    ]));
    assert!(e.contains("scripts/fetch-model"), "{e}");
}

#[test]
fn probes_asked_for_on_a_corpus_without_prose_are_refused_before_the_screen() {
    common::model_dir();
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("titles.md"), "# Timetable\n\n## Summer\n").unwrap();
    let e = common::fails(&common::kerf(&[
        "explore",
        "--hash-embedder",
        "--no-cache",
        "--probes",
        "5",
        dir.path().to_str().unwrap(),
    ]));
    assert!(e.contains("no sentence of the corpus qualifies"), "{e}");
    assert!(!e.contains("terminal"), "{e}");
}
