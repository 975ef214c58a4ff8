//! End-to-end runs of `kerf compare` and `kerf sweep` over real text: four chapters of the
//! Debian FAQ (debian-faq 11.1) with questions taken from their own section headings.
mod common;

use std::path::Path;

use common::{fails, kerf_in, ok};

fn setup(d: &Path) {
    let faq = std::fs::read_to_string(common::testdata("debian-faq/debian-faq.en.txt")).unwrap();
    std::fs::create_dir(d.join("corpus")).unwrap();
    for (i, part) in faq
        .split("\nChapter\u{a0}")
        .enumerate()
        .skip(1)
        .filter(|(i, _)| [3, 6, 9, 12].contains(i))
    {
        // Section headings stay in the text here: this test is about behaviour, not figures.
        std::fs::write(d.join(format!("corpus/chapter-{i:02}.txt")), part).unwrap();
    }
    std::fs::write(
        d.join("refs.toml"),
        r#"schema = 1
[[reference]]
id = "q-distribution"
text = "Which Debian distribution should I choose: stable, testing or unstable?"
expect = ["chapter-03.txt"]
[[reference]]
id = "q-archive"
text = "How are the Debian archive areas main, contrib and non-free organised?"
expect = ["chapter-06.txt"]
[[reference]]
id = "q-upgrade"
text = "How do I keep my Debian system up to date with security upgrades?"
expect = ["chapter-09.txt"]
[[reference]]
id = "q-support"
text = "Where can I get support, mailing lists and report bugs?"
expect = ["chapter-12.txt"]
"#,
    )
    .unwrap();
}

#[test]
fn compare_against_the_baseline() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    setup(d);
    let prof = |n: &str| {
        common::repo()
            .join("profiles")
            .join(n)
            .display()
            .to_string()
    };
    let (s128, p256) = (
        prof("sentences-128.toml"),
        prof("paragraphs-256-overlap.toml"),
    );
    let args = [
        "compare",
        "--refs",
        "refs.toml",
        "-p",
        &s128,
        "-p",
        &p256,
        "corpus",
        "--cache",
        "c.sqlite",
        "-q",
    ];
    let v: serde_json::Value =
        serde_json::from_str(&ok(&kerf_in(d, &[&args[..], &["--json"]].concat()))).unwrap();
    let plans = v["plans"].as_array().unwrap();
    assert_eq!(plans.len(), 3, "baseline plus two profiles");
    assert!(plans[0]["name"]
        .as_str()
        .unwrap()
        .starts_with("baseline-head-256"));
    assert_eq!(plans[0]["kendall_tau_vs_baseline"], 1.0);
    for p in plans {
        let s = &p["summary"];
        assert_eq!(s["queries"], 4);
        for k in [
            "mrr_at_10",
            "ndcg_at_10",
            "recall_at_1",
            "recall_at_5",
            "recall_at_10",
        ] {
            let x = s[k].as_f64().unwrap();
            assert!((0.0..=1.0).contains(&x), "{k} {x}");
        }
        // The best chunk's line range lies inside its document.
        for r in p["references"].as_array().unwrap() {
            let top = &r["top"][0];
            let doc = std::fs::read_to_string(d.join("corpus").join(top["doc"].as_str().unwrap()))
                .unwrap();
            let lines = doc.lines().count() as u64 + 1;
            let lr = top["best_chunk_lines"].as_array().unwrap();
            assert!(lr[0].as_u64().unwrap() >= 1 && lr[1].as_u64().unwrap() <= lines);
        }
    }
    // Chunked plans see whole chapters, so they should not do worse than the first window here.
    let mrr = |i: usize| plans[i]["summary"]["mrr_at_10"].as_f64().unwrap();
    assert!(
        mrr(1).max(mrr(2)) >= mrr(0),
        "{} {} {}",
        mrr(0),
        mrr(1),
        mrr(2)
    );
    let human = ok(&kerf_in(d, &args));
    assert!(
        human.contains("MRR@10") && human.contains("was #"),
        "{human}"
    );
    let csv = ok(&kerf_in(d, &[&args[..], &["--csv", "--top", "2"]].concat()));
    assert_eq!(csv.lines().next().unwrap(), "plan,reference,rank,doc,score,baseline_rank,score_change,best_chunk,line_start,line_end,expected");
    assert_eq!(csv.lines().count(), 1 + 3 * 4 * 2);

    // Bad input: a reference naming an unknown document, an empty file, duplicate ids.
    std::fs::write(
        d.join("bad.toml"),
        "schema = 1\n[[reference]]\nid = \"a\"\ntext = \"x\"\nexpect = [\"nope.txt\"]\n",
    )
    .unwrap();
    let e = fails(&kerf_in(
        d,
        &["compare", "--refs", "bad.toml", "-p", &s128, "corpus", "-q"],
    ));
    assert!(
        e.contains("expects document `nope.txt`, which is not in the corpus"),
        "{e}"
    );
    std::fs::write(d.join("empty.toml"), "schema = 1\n").unwrap();
    let e = fails(&kerf_in(
        d,
        &[
            "compare",
            "--refs",
            "empty.toml",
            "-p",
            &s128,
            "corpus",
            "-q",
        ],
    ));
    assert!(e.contains("no references"), "{e}");
    // Plans on different model folders are refused.
    let m2 = d.join("model2");
    std::fs::create_dir(&m2).unwrap();
    let src = common::model_dir();
    for f in ["config.json", "tokenizer.json", "sentence_bert_config.json"] {
        std::fs::copy(src.join(f), m2.join(f)).unwrap();
    }
    std::fs::hard_link(src.join("model.safetensors"), m2.join("model.safetensors")).unwrap();
    std::fs::write(
        d.join("other.toml"),
        format!(
            "schema = 1\n[model]\nfolder = \"{}\"\n[cut]\nwindow = 128\n",
            m2.display()
        ),
    )
    .unwrap();
    let e = fails(&kerf_in(
        d,
        &[
            "compare",
            "--refs",
            "refs.toml",
            "-p",
            &s128,
            "-p",
            "other.toml",
            "corpus",
            "-q",
        ],
    ));
    assert!(
        e.contains("cosines of different models do not compare"),
        "{e}"
    );
}

#[test]
fn sweep_embeds_each_chunk_set_once_and_saves_the_best() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    setup(d);
    let grid = "window=128,256 overlap=0,32 boundary=token,sentence chunks=mean,best,token-mean";
    let args = [
        "sweep",
        "--refs",
        "refs.toml",
        "--grid",
        grid,
        "corpus",
        "--cache",
        "c.sqlite",
        "-q",
        "--json",
        "--save-best",
        "best.toml",
        "--chart",
        "front.svg",
    ];
    let v: serde_json::Value = serde_json::from_str(&ok(&kerf_in(d, &args))).unwrap();
    let plans = v["plans"].as_array().unwrap();
    assert_eq!(plans.len(), 24);
    assert_eq!(v["chunk_sets"], 8);
    let (embedded, scored) = (
        v["chunks_embedded"].as_u64().unwrap(),
        v["chunks_scored"].as_u64().unwrap(),
    );
    println!("chunks embedded {embedded}, chunks scored {scored}");
    // Three aggregations share each chunk set: at most a third of the scored chunks are embedded.
    assert!(
        embedded * 3 <= scored,
        "embedded {embedded}, scored {scored}"
    );
    assert!(plans.iter().any(|p| p["pareto"] == true));
    let best = v["recommended"]["name"].as_str().unwrap();
    assert!(
        plans
            .iter()
            .any(|p| p["name"] == best && p["pareto"] == true),
        "the recommendation is on the front"
    );
    // Warm run: everything comes from the cache.
    let v2: serde_json::Value = serde_json::from_str(&ok(&kerf_in(d, &args))).unwrap();
    assert_eq!(v2["chunks_embedded"], 0);
    // The saved profile works unchanged with cut and profile check.
    ok(&kerf_in(d, &["profile", "check", "best.toml"]));
    assert!(!ok(&kerf_in(d, &["cut", "-p", "best.toml", "corpus"])).is_empty());
    assert!(std::fs::read_to_string(d.join("front.svg"))
        .unwrap()
        .contains("<svg"));
    // Bad grids and grids too large for the time asked.
    let e = fails(&kerf_in(
        d,
        &[
            "sweep",
            "--refs",
            "refs.toml",
            "--grid",
            "stride=3",
            "corpus",
            "-q",
        ],
    ));
    assert!(e.contains("unknown dimension `stride`"), "{e}");
    let e = fails(&kerf_in(
        d,
        &[
            "sweep",
            "--refs",
            "refs.toml",
            "--grid",
            grid,
            "--max-plans",
            "5",
            "corpus",
            "-q",
        ],
    ));
    assert!(e.contains("24 plans") && e.contains("--max-plans 5"), "{e}");
}

/// Without `--refs`, compare judges plans by self-retrieval and says so; the draw is the same
/// from run to run; with `--refs` and `--probes` both are reported; outputs that need
/// references refuse to run without them.
#[test]
fn compare_without_references_judges_by_self_retrieval() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    setup(d);
    let s128 = common::repo()
        .join("profiles/sentences-128.toml")
        .display()
        .to_string();
    let args = [
        "compare", "-p", &s128, "corpus", "--probes", "40", "--cache", "c.sqlite", "-q",
    ];
    let run = kerf_in(d, &[&args[..], &["--json"]].concat());
    let stderr = String::from_utf8_lossy(&run.stderr).into_owned();
    let v: serde_json::Value = serde_json::from_str(&ok(&run)).unwrap();
    assert!(stderr.contains("self-retrieval: 40 sentences"), "{stderr}");
    assert_eq!(v["probes"]["count"], 40);
    assert_eq!(v["probes"]["documents"], 4, "spread over the four chapters");
    let plans = v["plans"].as_array().unwrap();
    assert_eq!(plans.len(), 2);
    for p in plans {
        let s = &p["self_retrieval"];
        assert_eq!(s["summary"]["queries"], 40, "{p}");
        let mrr = s["summary"]["mrr_at_10"].as_f64().unwrap();
        assert!((0.0..=1.0).contains(&mrr));
        assert!(s["holed_tokens"].as_u64().unwrap() > 0);
        assert!(!s["bands"].as_array().unwrap().is_empty());
    }
    // The same draw and the same figures on a second run (vectors now from the cache).
    let again: serde_json::Value =
        serde_json::from_str(&ok(&kerf_in(d, &[&args[..], &["--json"]].concat()))).unwrap();
    assert_eq!(again["probes"], v["probes"]);
    for (a, b) in again["plans"]
        .as_array()
        .unwrap()
        .iter()
        .zip(v["plans"].as_array().unwrap())
    {
        assert_eq!(
            a["self_retrieval"]["summary"],
            b["self_retrieval"]["summary"]
        );
    }
    let text = ok(&kerf_in(d, &args));
    assert!(
        text.contains("self-retrieval") && text.contains("last"),
        "{text}"
    );
    assert!(text.contains("baseline-head-256"), "{text}");
    // Beside references, when asked.
    let both: serde_json::Value = serde_json::from_str(&ok(&kerf_in(
        d,
        &[&args[..], &["--refs", "refs.toml", "--json"]].concat(),
    )))
    .unwrap();
    assert_eq!(both["plans"][1]["summary"]["queries"], 4);
    assert_eq!(both["plans"][1]["self_retrieval"]["summary"]["queries"], 40);
    // CSV and the handout list references: refused without them.
    for extra in [&["--csv"][..], &["--handout", "h.html"][..]] {
        // A usage error: clap's exit code 2.
        let out = kerf_in(d, &[&args[..], extra].concat());
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{err}");
        assert!(err.contains("--refs"), "{err}");
    }
    assert!(!d.join("h.html").exists());
}
