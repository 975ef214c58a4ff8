//! End-to-end runs of `kerf embed`: outputs, refusal to overwrite, bad output paths, and a
//! job killed with SIGKILL half way that resumes to byte-identical output.
mod common;

use std::process::Command;

use common::{fails, faq_chapters, files_of, kerf_in, ok};

#[test]
fn killed_job_resumes_to_identical_output() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    std::fs::create_dir(d.join("corpus")).unwrap();
    assert_eq!(faq_chapters(&d.join("corpus"), usize::MAX), 16);
    let profile = common::repo().join("profiles/sentences-128.toml");
    let p = profile.to_str().unwrap();
    let args = |out: &str, cache: &str| -> Vec<String> {
        [
            "embed",
            "-p",
            p,
            "corpus",
            "--out",
            out,
            "--cache",
            cache,
            "--batch-tokens",
            "512",
            "--quiet",
        ]
        .iter()
        .map(|s| s.to_string())
        .collect()
    };
    // Uninterrupted reference run.
    ok(&kerf_in(
        d,
        &args("whole", "cache-a.sqlite")
            .iter()
            .map(String::as_str)
            .collect::<Vec<_>>(),
    ));
    // Same job, killed once the cache holds some but not all vectors.
    let mut child = Command::new(env!("CARGO_BIN_EXE_kerf"))
        .args(args("resumed", "cache-b.sqlite"))
        .current_dir(d)
        .spawn()
        .unwrap();
    // Distinct vectors the whole job needs: the rows the uninterrupted run left in its cache.
    let total = rusqlite::Connection::open(d.join("cache-a.sqlite"))
        .unwrap()
        .query_row("SELECT COUNT(*) FROM vectors", [], |r| r.get::<_, i64>(0))
        .unwrap() as usize;
    let mut stored_at_kill = 0;
    for _ in 0..6000 {
        std::thread::sleep(std::time::Duration::from_millis(10));
        if let Ok(c) = rusqlite::Connection::open_with_flags(
            d.join("cache-b.sqlite"),
            rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY,
        ) {
            if let Ok(n) = c.query_row("SELECT COUNT(*) FROM vectors", [], |r| r.get::<_, i64>(0)) {
                if n > 0 {
                    stored_at_kill = n as usize;
                    break;
                }
            }
        }
    }
    child.kill().unwrap(); // SIGKILL on Unix
    child.wait().unwrap();
    assert!(
        stored_at_kill > 0 && stored_at_kill < total,
        "killed half way: {stored_at_kill} of {total} stored"
    );
    assert!(
        !d.join("resumed/manifest.json").exists(),
        "a killed job leaves no output that looks complete"
    );
    // Run again: it finishes, embedding only what was missing, and matches byte for byte.
    let out = kerf_in(
        d,
        &args("resumed", "cache-b.sqlite")
            .iter()
            .map(String::as_str)
            .collect::<Vec<_>>(),
    );
    ok(&out);
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        !err.contains(" 0 from cache"),
        "the rerun reused cached vectors: {err}"
    );
    assert_eq!(files_of(&d.join("whole")), files_of(&d.join("resumed")));
    // No temporary folders left behind.
    let leftovers: Vec<String> = std::fs::read_dir(d)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.contains("partial"))
        .collect();
    assert!(leftovers.is_empty(), "{leftovers:?}");
}

#[test]
fn outputs_read_back_and_match_the_manifest() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    std::fs::create_dir(d.join("corpus")).unwrap();
    std::fs::write(
        d.join("corpus/a.md"),
        "The boiler was retubed in May. It passed its test.\n\nThe parapet was rebuilt.",
    )
    .unwrap();
    std::fs::write(d.join("corpus/b.md"), "Trains run hourly in summer.").unwrap();
    std::fs::write(d.join("corpus/empty.md"), "").unwrap();
    let p = common::repo().join("profiles/sentences-128.toml");
    let p = p.to_str().unwrap();
    ok(&kerf_in(
        d,
        &[
            "embed", "-p", p, "corpus", "--out", "out", "--cache", "c.sqlite", "-q",
        ],
    ));
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(d.join("out/manifest.json")).unwrap()).unwrap();
    for (name, f) in m["files"].as_object().unwrap() {
        let bytes = std::fs::read(d.join("out").join(name)).unwrap();
        assert_eq!(
            kerf::store::sha256_hex(&bytes),
            f["sha256"].as_str().unwrap(),
            "{name}"
        );
    }
    let (rows, cols, data) =
        kerf::store::read_npy_f32(&std::fs::read(d.join("out/chunk_vectors.npy")).unwrap())
            .unwrap();
    let chunks = std::fs::read_to_string(d.join("out/chunks.jsonl")).unwrap();
    assert_eq!(rows, chunks.lines().count());
    assert_eq!(cols, 384);
    for r in 0..rows {
        let n: f32 = data[r * cols..(r + 1) * cols]
            .iter()
            .map(|x| x * x)
            .sum::<f32>()
            .sqrt();
        assert!((n - 1.0).abs() < 1e-4, "normalised as modules.json says");
    }
    let ids: Vec<String> =
        serde_json::from_slice(&std::fs::read(d.join("out/doc_ids.json")).unwrap()).unwrap();
    assert_eq!(ids, ["a.md", "b.md"], "the empty document has no vector");
    // An existing output folder is refused without --force, replaced with it.
    let e = fails(&kerf_in(
        d,
        &[
            "embed", "-p", p, "corpus", "--out", "out", "--cache", "c.sqlite", "-q",
        ],
    ));
    assert!(e.contains("out already exists (pass --force"), "{e}");
    ok(&kerf_in(
        d,
        &[
            "embed", "-p", p, "corpus", "--out", "out", "--cache", "c.sqlite", "-q", "--force",
            "--format", "parquet",
        ],
    ));
    let f = std::fs::File::open(d.join("out/chunks.parquet")).unwrap();
    let batches: Vec<_> = parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder::try_new(f)
        .unwrap()
        .build()
        .unwrap()
        .map(|b| b.unwrap())
        .collect();
    assert_eq!(batches.iter().map(|b| b.num_rows()).sum::<usize>(), rows);
    assert!(
        !d.join("out/chunk_vectors.npy").exists(),
        "the old output was replaced whole"
    );
    // An output path that cannot be created: clear error, nothing left.
    std::fs::write(d.join("afile"), "x").unwrap();
    let e = fails(&kerf_in(
        d,
        &[
            "embed",
            "-p",
            p,
            "corpus",
            "--out",
            "afile/sub/out",
            "--cache",
            "c.sqlite",
            "-q",
        ],
    ));
    assert!(e.contains("afile"), "{e}");
    // A corrupt cache is reported, and --rebuild-cache recovers.
    std::fs::write(d.join("bad.sqlite"), vec![0x42u8; 8192]).unwrap();
    let e = fails(&kerf_in(
        d,
        &[
            "embed",
            "-p",
            p,
            "corpus",
            "--out",
            "o2",
            "--cache",
            "bad.sqlite",
            "-q",
        ],
    ));
    assert!(
        e.contains("is corrupt") && e.contains("--rebuild-cache"),
        "{e}"
    );
    ok(&kerf_in(
        d,
        &[
            "embed",
            "-p",
            p,
            "corpus",
            "--out",
            "o2",
            "--cache",
            "bad.sqlite",
            "-q",
            "--rebuild-cache",
        ],
    ));
}

#[test]
fn int8_profile_embeds_its_own_vectors_close_to_f32() {
    // One cache for both runs: int8 vectors must not be served from f32 ones (the precision is
    // part of the model fingerprint), and must stay close to them. Tolerance as in
    // tests/embed_reference.rs (measured worst cosine 0.9922 over the reference texts).
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    std::fs::create_dir(d.join("corpus")).unwrap();
    assert_eq!(faq_chapters(&d.join("corpus"), usize::MAX), 16);
    // Three chapters are enough chunks (about 60) and keep the two runs short.
    for i in 4..=16 {
        std::fs::remove_file(d.join(format!("corpus/chapter-{i:02}.txt"))).unwrap();
    }
    let f32_profile = common::repo().join("profiles/sentences-128.toml");
    let text = std::fs::read_to_string(&f32_profile).unwrap();
    assert!(
        !text.contains("precision"),
        "the shipped profile is f32 by default"
    );
    let int8 = text.replace("[pool]\n", "[pool]\nprecision = \"int8\"\n");
    std::fs::write(d.join("int8.toml"), int8).unwrap();
    let run = |profile: &str, out: &str| {
        let o = kerf_in(
            d,
            &[
                "embed", "-p", profile, "corpus", "--out", out, "--cache", "c.sqlite",
            ],
        );
        ok(&o);
        let m: serde_json::Value =
            serde_json::from_slice(&std::fs::read(d.join(out).join("manifest.json")).unwrap())
                .unwrap();
        let (rows, cols, data) = kerf::store::read_npy_f32(
            &std::fs::read(d.join(out).join("chunk_vectors.npy")).unwrap(),
        )
        .unwrap();
        (
            String::from_utf8_lossy(&o.stderr).into_owned(),
            m,
            rows,
            cols,
            data,
        )
    };
    let (_, m32, rows, cols, a) = run(f32_profile.to_str().unwrap(), "f32");
    let (log, m8, rows8, _, b) = run("int8.toml", "int8");
    assert_eq!(
        m8["profile"]["pool"]["precision"], "int8",
        "{}",
        m8["profile"]
    );
    assert_eq!(m32["profile"]["pool"]["precision"], "f32");
    assert_eq!(rows, rows8, "the same chunks");
    assert!(
        log.contains(" 0 from cache"),
        "int8 took f32 vectors: {log}"
    );
    let mut worst = 1.0f32;
    for r in 0..rows {
        let (x, y) = (&a[r * cols..(r + 1) * cols], &b[r * cols..(r + 1) * cols]);
        worst = worst.min(x.iter().zip(y).map(|(p, q)| p * q).sum());
    }
    println!("int8 vs f32 over {rows} Debian FAQ chunks: worst cosine {worst:.5}");
    assert!(rows >= 30, "{rows} chunks");
    assert!((0.99..0.9999).contains(&worst), "worst cosine {worst}");
}
