//! The same profile as a stage of Apache Spark: `cluster/spark_embed.py` under pyspark in local
//! mode (`local[2,4]`: two cores, up to four attempts per task) pipes each partition through
//! `kerf embed --relay`, and its Parquet output holds the same chunks (document, index, byte
//! range, tokens), the same vector bits and the same counts as single-machine `kerf embed` runs
//! of the profile, even though one kerf process is killed part way and Spark retries its task.
//! The single-machine runs are `--shard 0/2` and `1/2` into one partitioned folder, which Spark's
//! own Parquet reader then loads as one dataset (`cluster/read_kerf_parts.py`).
//!
//! Corpus: demo-texts/ (ten long documents) and 2,000 short generated ones, in one table.
//! Model: the default all-MiniLM-L6-v2 (scripts/fetch-model). Needs Java (17) and pyspark in the
//! Python of `KERF_SPARK_PYTHON` or ~/.cache/kerf/venv (.ci/run installs both); the test fails,
//! never skips, when they are missing. Outside references: Spark's Parquet writer and reader,
//! Python's base64 and struct for the vectors, and the parquet crate reading Spark's files.
mod common;

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

use arrow_array::{
    Array, FixedSizeListArray, Float32Array, Int32Array, Int64Array, ListArray, StringArray,
    UInt32Array, UInt64Array,
};
use common::{ok, short_documents};

/// The Python with pyspark; panics (the test fails) when there is none.
fn spark_python() -> PathBuf {
    let py = std::env::var_os("KERF_SPARK_PYTHON")
        .map(PathBuf::from)
        .unwrap_or_else(|| kerf::model::kerf_home().join("venv/bin/python"));
    let java = Command::new("java").arg("-version").output();
    assert!(
        java.as_ref().is_ok_and(|o| o.status.success()),
        "java not found: install Java 17 (apt-get install openjdk-17-jre-headless), as .ci/run does"
    );
    let probe = Command::new(&py)
        .args(["-c", "import pyspark; print(pyspark.__version__)"])
        .output();
    assert!(
        probe.as_ref().is_ok_and(|o| o.status.success()),
        "pyspark not importable from {}: make the venv as .ci/run does \
         (python3 -m venv {}; pip install pyspark), or set KERF_SPARK_PYTHON",
        py.display(),
        kerf::model::kerf_home().join("venv").display()
    );
    py
}

fn files_under(dir: &Path, name_ends: &str) -> Vec<PathBuf> {
    let mut out = Vec::new();
    for e in std::fs::read_dir(dir).unwrap() {
        let p = e.unwrap().path();
        if p.is_dir() {
            out.extend(files_under(&p, name_ends));
        } else if p.to_string_lossy().ends_with(name_ends) {
            out.push(p);
        }
    }
    out.sort();
    out
}

fn batches(file: &Path) -> Vec<arrow_array::RecordBatch> {
    parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder::try_new(
        std::fs::File::open(file).unwrap(),
    )
    .unwrap()
    .build()
    .unwrap()
    .map(|b| b.unwrap())
    .collect()
}

fn column<'a, T: 'static>(b: &'a arrow_array::RecordBatch, name: &str) -> &'a T {
    b.column_by_name(name)
        .unwrap_or_else(|| panic!("no column {name}"))
        .as_any()
        .downcast_ref::<T>()
        .unwrap_or_else(|| panic!("column {name} of another type"))
}

/// A chunk: byte range, tokens, vector.
type Chunk = ([u64; 2], u64, Vec<f32>);
/// Chunks by (document, index).
type Chunks = BTreeMap<(String, u64), Chunk>;
/// Documents as Spark wrote them: chunk count and vector (none for a document without chunks).
type SparkDocs = BTreeMap<String, (i32, Option<Vec<f32>>)>;

/// Chunks and document vectors of kerf's own Parquet tables.
fn kerf_tables(parts: &[PathBuf]) -> (Chunks, BTreeMap<String, Vec<f32>>) {
    let mut chunks = BTreeMap::new();
    let mut docs = BTreeMap::new();
    for part in parts {
        for b in batches(&part.join("chunks.parquet")) {
            let doc = column::<StringArray>(&b, "doc");
            let chunk = column::<UInt32Array>(&b, "chunk");
            let start = column::<UInt64Array>(&b, "byte_start");
            let end = column::<UInt64Array>(&b, "byte_end");
            let tokens = column::<UInt32Array>(&b, "tokens");
            let vector = column::<FixedSizeListArray>(&b, "vector");
            for r in 0..b.num_rows() {
                let v = vector.value(r);
                let v = v.as_any().downcast_ref::<Float32Array>().unwrap();
                let prev = chunks.insert(
                    (doc.value(r).to_string(), u64::from(chunk.value(r))),
                    (
                        [start.value(r), end.value(r)],
                        u64::from(tokens.value(r)),
                        v.values().to_vec(),
                    ),
                );
                assert!(prev.is_none());
            }
        }
        for b in batches(&part.join("documents.parquet")) {
            let doc = column::<StringArray>(&b, "doc");
            let vector = column::<FixedSizeListArray>(&b, "vector");
            for r in 0..b.num_rows() {
                let v = vector.value(r);
                let v = v.as_any().downcast_ref::<Float32Array>().unwrap();
                docs.insert(doc.value(r).to_string(), v.values().to_vec());
            }
        }
    }
    (chunks, docs)
}

fn list_vector(list: &ListArray, r: usize) -> Option<Vec<f32>> {
    if list.is_null(r) {
        return None;
    }
    let v = list.value(r);
    Some(
        v.as_any()
            .downcast_ref::<Float32Array>()
            .unwrap()
            .values()
            .to_vec(),
    )
}

/// What Spark wrote: chunks (no key twice), and every document with its vector if any.
fn spark_tables(out: &Path) -> (Chunks, SparkDocs) {
    let mut chunks = BTreeMap::new();
    let mut docs = BTreeMap::new();
    for f in files_under(&out.join("kind=chunk"), ".parquet") {
        for b in batches(&f) {
            let doc = column::<StringArray>(&b, "doc");
            let chunk = column::<Int32Array>(&b, "chunk");
            let start = column::<Int64Array>(&b, "byte_start");
            let end = column::<Int64Array>(&b, "byte_end");
            let tokens = column::<Int32Array>(&b, "tokens");
            let vector = column::<ListArray>(&b, "vector");
            for r in 0..b.num_rows() {
                let key = (doc.value(r).to_string(), chunk.value(r) as u64);
                let value = (
                    [start.value(r) as u64, end.value(r) as u64],
                    tokens.value(r) as u64,
                    list_vector(vector, r).expect("a chunk has a vector"),
                );
                let prev = chunks.insert(key.clone(), value);
                assert!(prev.is_none(), "chunk {key:?} written twice");
            }
        }
    }
    for f in files_under(&out.join("kind=document"), ".parquet") {
        for b in batches(&f) {
            let doc = column::<StringArray>(&b, "doc");
            let n = column::<Int32Array>(&b, "chunks");
            let vector = column::<ListArray>(&b, "vector");
            for r in 0..b.num_rows() {
                let prev = docs.insert(
                    doc.value(r).to_string(),
                    (n.value(r), list_vector(vector, r)),
                );
                assert!(prev.is_none(), "document {} written twice", doc.value(r));
            }
        }
    }
    (chunks, docs)
}

fn cosine(a: &[f32], b: &[f32]) -> f64 {
    let dot: f64 = a.iter().zip(b).map(|(x, y)| *x as f64 * *y as f64).sum();
    let na: f64 = a.iter().map(|x| (*x as f64).powi(2)).sum::<f64>().sqrt();
    let nb: f64 = b.iter().map(|x| (*x as f64).powi(2)).sum::<f64>().sqrt();
    dot / (na * nb)
}

fn bits(v: &[f32]) -> Vec<u32> {
    v.iter().map(|x| x.to_bits()).collect()
}

#[test]
fn spark_stage_matches_single_machine_runs_through_a_retried_task() {
    let model = common::model_dir();
    let py = spark_python();
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    // One documents table: demo-texts (ids: file names) and 2,000 short documents.
    let mut table = String::new();
    let mut names: Vec<PathBuf> = std::fs::read_dir(common::repo().join("demo-texts"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "md" || e == "txt"))
        .collect();
    names.sort();
    assert_eq!(names.len(), 10);
    for p in &names {
        let line = serde_json::json!({
            "id": p.file_name().unwrap().to_string_lossy(),
            "text": std::fs::read_to_string(p).unwrap(),
        });
        table.push_str(&line.to_string());
        table.push('\n');
    }
    table.push_str(&short_documents(2000));
    let n_docs = table.lines().count();
    std::fs::write(d.join("docs.jsonl"), &table).unwrap();
    let profile = common::repo().join("profiles/sentences-128.toml");
    let (p, m) = (profile.to_str().unwrap(), model.to_str().unwrap());

    // Single machine: the same profile in two shards of one partitioned folder.
    let started = Instant::now();
    for shard in ["0/2", "1/2"] {
        ok(&common::kerf_in(
            d,
            &[
                "embed",
                "-p",
                p,
                "--model",
                m,
                "docs.jsonl",
                "--out",
                "direct",
                "--shard",
                shard,
                "--format",
                "parquet",
                "--no-cache",
                "-q",
            ],
        ));
    }
    let direct_seconds = started.elapsed().as_secs_f64();
    let parts = [d.join("direct/shard=0"), d.join("direct/shard=1")];
    let (want_chunks, want_docs) = kerf_tables(&parts);

    // Spark, with one kerf process killed once part way (the script's test hook).
    let marker = d.join("killed-once");
    let started = Instant::now();
    let out = Command::new(&py)
        .arg(common::repo().join("cluster/spark_embed.py"))
        .args([
            "--master",
            "local[2,4]",
            "--documents",
            "docs.jsonl",
            "--profile",
            p,
            "--model",
            m,
            "--kerf",
            env!("CARGO_BIN_EXE_kerf"),
            "--out",
            "spark-out",
            "--partitions",
            "4",
            // Two tasks share two cores; small blocks, so a partition's lines flow while its
            // documents are still being read (and the kill lands part way).
            "--kerf-arg=--threads=1",
            "--kerf-arg=--block-tokens=2048",
        ])
        .current_dir(d)
        .env("PYSPARK_PYTHON", &py)
        .env("SPARK_LOCAL_IP", "127.0.0.1")
        .env("KERF_SPARK_KILL_ONCE", &marker)
        .output()
        .unwrap();
    let spark_seconds = started.elapsed().as_secs_f64();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "spark job failed:\n{stderr}");
    eprintln!(
        "direct kerf embed (2 shards): {direct_seconds:.1} s; Spark local[2]: {spark_seconds:.1} s"
    );
    // The kill happened, and Spark saw the task fail and ran it again.
    assert!(marker.exists(), "the kill hook never ran");
    assert!(
        stderr.contains("kerf exited with -9"),
        "no task failed from the kill:\n{stderr}"
    );

    // Counts as Spark's own Parquet reader reads the written dataset back.
    let stdout = String::from_utf8_lossy(&out.stdout);
    let counts: serde_json::Value =
        serde_json::from_str(stdout.lines().last().expect("a counts line")).unwrap();
    let mut manifest_chunks = 0;
    let mut manifest_docs = 0;
    let mut manifest_with = 0;
    for part in &parts {
        let mf: serde_json::Value =
            serde_json::from_slice(&std::fs::read(part.join("manifest.json")).unwrap()).unwrap();
        manifest_chunks += mf["counts"]["chunks"].as_u64().unwrap();
        manifest_docs += mf["counts"]["documents"].as_u64().unwrap();
        manifest_with += mf["counts"]["documents_with_vectors"].as_u64().unwrap();
    }
    assert_eq!(manifest_docs as usize, n_docs);
    assert_eq!(counts["chunks"].as_u64().unwrap(), manifest_chunks);
    assert_eq!(counts["documents"].as_u64().unwrap(), manifest_docs);
    assert_eq!(
        counts["documents_with_vectors"].as_u64().unwrap(),
        manifest_with
    );

    // Row by row, read with the parquet crate: the same chunks, the same bits.
    let (got_chunks, got_docs) = spark_tables(&d.join("spark-out"));
    assert_eq!(got_chunks.len(), want_chunks.len());
    assert!(
        got_chunks.keys().eq(want_chunks.keys()),
        "the same (document, chunk) keys"
    );
    let mut lowest = 1.0f64;
    for (key, (bytes, tokens, v)) in &want_chunks {
        let (gb, gt, gv) = &got_chunks[key];
        assert_eq!((bytes, tokens), (gb, gt), "{key:?}");
        lowest = lowest.min(cosine(v, gv));
        // The packed encoder gives an input the same bits whatever shares its batch
        // (tests/job_resume.rs), so bitwise equality holds, not only a close cosine.
        assert_eq!(bits(v), bits(gv), "{key:?}: vector bits");
    }
    assert!(lowest >= 0.99999, "lowest cosine {lowest}");
    assert_eq!(got_docs.len(), n_docs, "every document exactly once");
    for (doc, (n, v)) in &got_docs {
        match (v, want_docs.get(doc)) {
            (Some(v), Some(w)) => assert_eq!(bits(v), bits(w), "{doc}: document vector"),
            (None, None) => assert_eq!(*n, 0),
            _ => panic!("{doc}: a document vector on one side only"),
        }
        let chunks_of_doc = want_chunks.range((doc.clone(), 0)..(doc.clone(), u64::MAX));
        assert_eq!(chunks_of_doc.count(), *n as usize, "{doc}: chunk count");
    }

    // kerf's partitioned folder, loaded as one dataset by Spark's Parquet reader.
    let out = Command::new(&py)
        .arg(common::repo().join("cluster/read_kerf_parts.py"))
        .args(["--folder", "direct", "--master", "local[1]"])
        .current_dir(d)
        .env("PYSPARK_PYTHON", &py)
        .env("SPARK_LOCAL_IP", "127.0.0.1")
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let read: serde_json::Value = serde_json::from_str(
        String::from_utf8_lossy(&out.stdout)
            .lines()
            .last()
            .expect("a counts line"),
    )
    .unwrap();
    for (i, part) in parts.iter().enumerate() {
        let mf: serde_json::Value =
            serde_json::from_slice(&std::fs::read(part.join("manifest.json")).unwrap()).unwrap();
        let key = i.to_string();
        assert_eq!(read["chunks"][&key], mf["counts"]["chunks"]);
        assert_eq!(
            read["documents"][&key],
            mf["counts"]["documents_with_vectors"]
        );
    }
    assert_eq!(
        read["documents_distinct_docs"].as_u64().unwrap(),
        manifest_with
    );
}
