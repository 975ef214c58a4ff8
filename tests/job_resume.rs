//! The streaming job's exactness: a multi-block `kerf embed` killed with SIGKILL at random
//! moments and run again gives byte-identical output, and the encoder gives each input the same
//! bits whatever else shares its batch (what makes resumption exact when a rerun batches the
//! missing inputs differently).
//!
//! Text: the Debian FAQ (debian-faq 11.1, fetched by scripts/fetch-testdata). Model: the default
//! all-MiniLM-L6-v2 folder (scripts/fetch-model).
mod common;

use std::process::Command;
use std::time::Instant;

use common::{faq_chapters, files_of, kerf_in, ok};
use kerf::embed::{BertEmbedder, EmbedOptions, Embedder, Precision};

/// A small deterministic generator (SplitMix64), so a failing run can be repeated from its seed.
fn splitmix(state: &mut u64) -> u64 {
    *state = state.wrapping_add(0x9e37_79b9_7f4a_7c15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

#[test]
fn multi_block_job_killed_at_random_moments_resumes_to_identical_output() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    std::fs::create_dir(d.join("corpus")).unwrap();
    assert_eq!(faq_chapters(&d.join("corpus"), 8), 8);
    let profile = common::repo().join("profiles/sentences-128.toml");
    let args = |out: &str, cache: &str| -> Vec<String> {
        let p = profile.to_str().unwrap();
        [
            "embed",
            "-p",
            p,
            "corpus",
            "--out",
            out,
            "--cache",
            cache,
            "--block-tokens",
            "4096",
            "--batch-tokens",
            "1024",
            "--quiet",
            "--force",
        ]
        .iter()
        .map(|s| s.to_string())
        .collect()
    };
    let strs = |v: &[String]| v.iter().map(String::clone).collect::<Vec<_>>();
    let started = Instant::now();
    let whole = kerf_in(
        d,
        &strs(&args("whole", "cache-a.sqlite"))
            .iter()
            .map(String::as_str)
            .collect::<Vec<_>>(),
    );
    ok(&whole);
    let full_run = started.elapsed();
    let manifest: serde_json::Value =
        serde_json::from_slice(&std::fs::read(d.join("whole/manifest.json")).unwrap()).unwrap();
    let blocks = manifest["counts"]["blocks"].as_u64().unwrap();
    assert!(
        blocks >= 4,
        "the job must span several blocks, got {blocks}"
    );

    let seed: u64 = std::env::var("KERF_TEST_SEED")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or_else(|| {
            std::time::SystemTime::now()
                .duration_since(std::time::UNIX_EPOCH)
                .unwrap()
                .as_nanos() as u64
        });
    eprintln!("kill moments from KERF_TEST_SEED={seed} (full run took {full_run:?})");
    let mut state = seed;
    for round in 0..3 {
        // A moment anywhere in the first 90% of an uninterrupted run's time (the cache fills as
        // the rounds go, so later rounds die nearer their end or after it: both must hold).
        let frac = (splitmix(&mut state) % 900) as f64 / 1000.0;
        let wait = full_run.mul_f64(frac);
        let mut child = Command::new(env!("CARGO_BIN_EXE_kerf"))
            .args(args("resumed", "cache-b.sqlite"))
            .current_dir(d)
            .stderr(std::process::Stdio::null())
            .spawn()
            .unwrap();
        std::thread::sleep(wait);
        let _ = child.kill(); // SIGKILL; fails harmlessly if it already finished
        let status = child.wait().unwrap();
        // Whatever sits under the final name is a whole, correct output (an earlier finished
        // round's), never a part of one.
        if d.join("resumed").exists() {
            assert!(
                files_of(&d.join("resumed")) == files_of(&d.join("whole")),
                "round {round}: the folder under the final name is not a whole output (seed {seed})"
            );
        }
        eprintln!(
            "round {round}: killed after {wait:?} ({}finished)",
            if status.success() { "" } else { "not " }
        );
    }
    let rerun = kerf_in(
        d,
        &strs(&args("resumed", "cache-b.sqlite"))
            .iter()
            .map(String::as_str)
            .collect::<Vec<_>>(),
    );
    ok(&rerun);
    let whole_files = files_of(&d.join("whole"));
    let resumed_files = files_of(&d.join("resumed"));
    assert_eq!(
        whole_files.iter().map(|f| &f.0).collect::<Vec<_>>(),
        resumed_files.iter().map(|f| &f.0).collect::<Vec<_>>()
    );
    for (a, b) in whole_files.iter().zip(&resumed_files) {
        assert!(
            a.1 == b.1,
            "{} differs after kills and a rerun (seed {seed})",
            a.0
        );
    }
    let leftovers: Vec<String> = std::fs::read_dir(d)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.contains("partial"))
        .collect();
    assert!(leftovers.is_empty(), "{leftovers:?}");
}

/// Resumption and block boundaries may put an input in a different batch than an uninterrupted
/// run did; the packed encoder must give it the same bits anyway.
#[test]
fn packed_encoder_vectors_do_not_depend_on_batch_company() {
    let faq = std::fs::read_to_string(common::testdata("debian-faq/debian-faq.en.txt")).unwrap();
    let texts: Vec<&str> = faq
        .split("\n\n")
        .map(str::trim)
        .filter(|p| p.len() > 40)
        .take(24)
        .collect();
    for precision in [Precision::F32, Precision::Int8] {
        let e = BertEmbedder::load(
            &common::model_dir(),
            &EmbedOptions {
                precision,
                ..Default::default()
            },
        )
        .unwrap();
        let together = e.embed(&texts).unwrap();
        let reversed: Vec<&str> = texts.iter().rev().copied().collect();
        let mut apart_rev = e.embed(&reversed).unwrap();
        apart_rev.reverse();
        for (i, t) in texts.iter().enumerate() {
            let alone = e.embed(&[t]).unwrap().remove(0);
            assert!(
                alone == together[i] && alone == apart_rev[i],
                "{precision:?}: input {i} changed with its batch company"
            );
        }
    }
}

#[test]
fn library_job_streams_blocks_in_input_order() {
    // The same job through the library with blocks of very different sizes gives the same
    // records and vectors: block boundaries are invisible in the output.
    use kerf::corpus::Document;
    use kerf::job::{EmbedJob, JobSettings};
    use kerf::store::CollectSink;
    let (info, counter) = kerf::model::inspect(&common::model_dir()).unwrap();
    let profile =
        kerf::profile::Profile::load(&common::repo().join("profiles/sentences-128.toml")).unwrap();
    let plan = kerf::plan::resolve(&profile, &info, &counter, "t").unwrap();
    let faq = std::fs::read_to_string(common::testdata("debian-faq/debian-faq.en.txt")).unwrap();
    let docs: Vec<Document> = faq
        .split("\nChapter\u{a0}")
        .skip(1)
        .take(4)
        .enumerate()
        .map(|(i, t)| Document {
            id: format!("ch{i}"),
            origin: "faq".into(),
            text: t.to_string(),
            layout: None,
        })
        .collect();
    let e = BertEmbedder::load(&common::model_dir(), &EmbedOptions::default()).unwrap();
    let run = |block_tokens: usize| {
        let job = EmbedJob {
            plan: &plan,
            counter: &counter,
            embedder: &e,
            cache: None,
            settings: JobSettings {
                block_tokens,
                batch_tokens: 2048,
            },
        };
        let mut sink = CollectSink::default();
        let report = job
            .run(docs.iter().cloned().map(Ok), &mut sink, &mut |_| {})
            .unwrap();
        (report, sink)
    };
    let (one, a) = run(usize::MAX);
    let (many, b) = run(1000);
    assert_eq!(one.blocks, 1);
    assert!(many.blocks >= 4, "{} blocks", many.blocks);
    assert_eq!(one.chunks, many.chunks);
    assert_eq!(a.records, b.records);
    assert!(
        a.vectors == b.vectors,
        "chunk vectors differ between block sizes"
    );
    assert!(a.documents == b.documents, "document vectors differ");
    assert_eq!((a.blocks, b.blocks), (one.blocks, many.blocks));
    let ids: Vec<&str> = a.documents.iter().map(|d| d.0.as_str()).collect();
    assert_eq!(ids, ["ch0", "ch1", "ch2", "ch3"]);
}
