//! `kerf embed --relay` (JSONL documents in, one JSON line per chunk and per document out) and
//! `--shard I/N`: the lines carry the same chunks and the same vector bits as the folder output
//! of the same profile; N shards cover the input once and their union is the unsharded output,
//! on standard output and as a partitioned Parquet folder; bad lines stop with their number or
//! are skipped; a closed standard output ends the stage quietly.
//!
//! Model: the default all-MiniLM-L6-v2 folder (scripts/fetch-model). Outside references: the
//! `base64` crate (RFC 4648) decodes vectors, the `parquet` crate reads the Parquet parts, and
//! Python's hashlib recomputes each document's shard.
mod common;

use std::collections::BTreeMap;
use std::io::{BufRead, BufReader, Write};
use std::path::Path;
use std::process::{Command, Output, Stdio};

use arrow_array::{Array, FixedSizeListArray, Float32Array, StringArray, UInt32Array, UInt64Array};
use base64::Engine;
use common::{fails, ok, short_documents};

fn profile() -> String {
    common::repo()
        .join("profiles/sentences-128.toml")
        .to_string_lossy()
        .into_owned()
}

/// Run kerf in `dir` with `input` on standard input.
fn kerf_stdin(dir: &Path, args: &[&str], input: &[u8]) -> Output {
    let mut child = Command::new(env!("CARGO_BIN_EXE_kerf"))
        .args(args)
        .current_dir(dir)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("kerf runs");
    let mut stdin = child.stdin.take().unwrap();
    let input = input.to_vec();
    let feeder = std::thread::spawn(move || {
        // The stage may stop reading early (a bad line): a closed pipe here is expected.
        let _ = stdin.write_all(&input);
    });
    let out = child.wait_with_output().unwrap();
    feeder.join().unwrap();
    out
}

fn relay(dir: &Path, extra: &[&str], input: &[u8]) -> Vec<serde_json::Value> {
    let p = profile();
    let mut args = vec!["embed", "--relay", "-p", &p, "-", "--no-cache", "-q"];
    args.extend_from_slice(extra);
    let out = ok(&kerf_stdin(dir, &args, input));
    out.lines()
        .map(|l| serde_json::from_str(l).expect("every line is JSON"))
        .collect()
}

/// Decode a `vector_b64` field with the reference decoder: little-endian f32.
fn b64_vector(v: &serde_json::Value) -> Vec<f32> {
    // Source: the base64 crate's standard engine (RFC 4648 section 4, padded).
    let bytes = base64::engine::general_purpose::STANDARD
        .decode(v.as_str().expect("a base64 string"))
        .unwrap();
    assert_eq!(bytes.len() % 4, 0);
    bytes
        .chunks_exact(4)
        .map(|b| f32::from_le_bytes([b[0], b[1], b[2], b[3]]))
        .collect()
}

fn bits(v: &[f32]) -> Vec<u32> {
    v.iter().map(|x| x.to_bits()).collect()
}

#[test]
fn relay_lines_hold_the_folder_outputs_chunks_and_vector_bits() {
    common::model_dir();
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    let corpus = short_documents(240);
    std::fs::write(d.join("docs.jsonl"), &corpus).unwrap();
    let p = profile();
    ok(&common::kerf_in(
        d,
        &[
            "embed",
            "-p",
            &p,
            "docs.jsonl",
            "--out",
            "whole",
            "--no-cache",
            "-q",
        ],
    ));
    // Small blocks, so the stream is flushed many times along the way.
    let lines = relay(
        d,
        &["--vector-text", "base64", "--block-tokens", "512"],
        corpus.as_bytes(),
    );
    let chunk_lines: Vec<&serde_json::Value> =
        lines.iter().filter(|l| l["kind"] == "chunk").collect();
    let doc_lines: Vec<&serde_json::Value> =
        lines.iter().filter(|l| l["kind"] == "document").collect();
    let records: Vec<serde_json::Value> = std::fs::read_to_string(d.join("whole/chunks.jsonl"))
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    assert_eq!(chunk_lines.len(), records.len());
    assert_eq!(doc_lines.len(), 240);
    let (rows, dim, chunk_vectors) =
        kerf::store::read_npy_f32(&std::fs::read(d.join("whole/chunk_vectors.npy")).unwrap())
            .unwrap();
    assert_eq!(rows, records.len());
    for (k, (line, rec)) in chunk_lines.iter().zip(&records).enumerate() {
        for field in ["doc", "chunk", "bytes", "tokens"] {
            assert_eq!(line[field], rec[field], "chunk {k}: {field}");
        }
        assert_eq!(
            bits(&b64_vector(&line["vector_b64"])),
            bits(&chunk_vectors[k * dim..(k + 1) * dim]),
            "chunk {k}: the same bits as chunk_vectors.npy"
        );
    }
    // Document lines: every document in input order, after its chunks; those with chunks carry
    // the rows of doc_vectors.npy in order, the empty ones null.
    let ids: Vec<String> = corpus
        .lines()
        .map(|l| serde_json::from_str::<serde_json::Value>(l).unwrap()["id"].to_string())
        .collect();
    let got: Vec<String> = doc_lines.iter().map(|l| l["doc"].to_string()).collect();
    assert_eq!(got, ids);
    let (_, _, doc_vectors) =
        kerf::store::read_npy_f32(&std::fs::read(d.join("whole/doc_vectors.npy")).unwrap())
            .unwrap();
    let with: Vec<&&serde_json::Value> = doc_lines
        .iter()
        .filter(|l| !l["vector_b64"].is_null())
        .collect();
    assert_eq!(with.len() * dim, doc_vectors.len());
    for (k, l) in with.iter().enumerate() {
        assert_eq!(
            bits(&b64_vector(&l["vector_b64"])),
            bits(&doc_vectors[k * dim..(k + 1) * dim])
        );
    }
    let empty: Vec<&&serde_json::Value> = doc_lines
        .iter()
        .filter(|l| l["vector_b64"].is_null())
        .collect();
    assert!(!empty.is_empty() && empty.iter().all(|l| l["chunks"] == 0));
    // Each document line follows its own chunks.
    let mut open = None::<serde_json::Value>;
    for l in &lines {
        match l["kind"].as_str().unwrap() {
            "chunk" => open = Some(l["doc"].clone()),
            "document" if l["chunks"] != 0 => assert_eq!(Some(l["doc"].clone()), open),
            _ => {}
        }
    }
    // The end line closes the stream with the manifest's counts.
    let manifest: serde_json::Value =
        serde_json::from_slice(&std::fs::read(d.join("whole/manifest.json")).unwrap()).unwrap();
    let end = lines.last().unwrap();
    assert_eq!(end["kind"], "end");
    assert_eq!(end["documents"], manifest["counts"]["documents"]);
    assert_eq!(end["chunks"], manifest["counts"]["chunks"]);
    // Vectors as JSON arrays read back (as a JSON reader's f64, then to f32) to the same bits.
    let arrays = relay(d, &[], corpus.as_bytes());
    let array_chunks: Vec<&serde_json::Value> =
        arrays.iter().filter(|l| l["kind"] == "chunk").collect();
    assert_eq!(array_chunks.len(), records.len());
    for (k, l) in array_chunks.iter().enumerate() {
        let v = common::f32s(&l["vector"]);
        assert_eq!(bits(&v), bits(&chunk_vectors[k * dim..(k + 1) * dim]));
    }
}

/// Each document's shard as Python's hashlib computes it: first 8 bytes of SHA-256, big-endian,
/// modulo `n`.
fn python_shards(ids: &[String], n: u32) -> BTreeMap<String, u32> {
    let script = format!(
        "import hashlib, json, sys\n\
         for line in sys.stdin:\n\
         \x20   i = json.loads(line)\n\
         \x20   print(json.dumps([i, int.from_bytes(hashlib.sha256(i.encode()).digest()[:8], 'big') % {n}]))\n"
    );
    let mut child = Command::new("python3")
        .args(["-c", &script])
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .spawn()
        .expect("python3 is needed for this test (the outside reference for the shard rule)");
    let input: String = ids
        .iter()
        .map(|i| serde_json::Value::from(i.as_str()).to_string() + "\n")
        .collect();
    child
        .stdin
        .take()
        .unwrap()
        .write_all(input.as_bytes())
        .unwrap();
    let out = child.wait_with_output().unwrap();
    assert!(out.status.success());
    String::from_utf8(out.stdout)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str::<(String, u32)>(l).unwrap())
        .collect()
}

/// Rows of every `chunks.parquet` under `root` (the parts of a partitioned folder), read with
/// the parquet crate: (doc, chunk, byte_start, byte_end, tokens, vector bits).
type Row = (String, u32, u64, u64, u32, Vec<u32>);

fn parquet_rows(files: &[std::path::PathBuf]) -> Vec<Row> {
    let mut rows = Vec::new();
    for f in files {
        let reader = parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder::try_new(
            std::fs::File::open(f).unwrap(),
        )
        .unwrap()
        .build()
        .unwrap();
        for batch in reader {
            let b = batch.unwrap();
            let col = |name: &str| b.column_by_name(name).unwrap().clone();
            let doc = col("doc");
            let doc = doc.as_any().downcast_ref::<StringArray>().unwrap();
            let chunk = col("chunk");
            let chunk = chunk.as_any().downcast_ref::<UInt32Array>().unwrap();
            let start = col("byte_start");
            let start = start.as_any().downcast_ref::<UInt64Array>().unwrap();
            let end = col("byte_end");
            let end = end.as_any().downcast_ref::<UInt64Array>().unwrap();
            let tokens = col("tokens");
            let tokens = tokens.as_any().downcast_ref::<UInt32Array>().unwrap();
            let vector = col("vector");
            let vector = vector
                .as_any()
                .downcast_ref::<FixedSizeListArray>()
                .unwrap();
            for r in 0..b.num_rows() {
                let v = vector.value(r);
                let v = v.as_any().downcast_ref::<Float32Array>().unwrap();
                rows.push((
                    doc.value(r).to_string(),
                    chunk.value(r),
                    start.value(r),
                    end.value(r),
                    tokens.value(r),
                    v.values().iter().map(|x| x.to_bits()).collect(),
                ));
            }
        }
    }
    rows.sort();
    rows
}

#[test]
fn shards_cover_the_input_once_and_their_union_is_the_whole() {
    common::model_dir();
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    let corpus = short_documents(300);
    std::fs::write(d.join("docs.jsonl"), &corpus).unwrap();
    let n = 3u32;
    let strip_end = |lines: Vec<serde_json::Value>| -> Vec<String> {
        assert_eq!(lines.last().unwrap()["kind"], "end");
        let mut v: Vec<String> = lines[..lines.len() - 1]
            .iter()
            .map(|l| l.to_string())
            .collect();
        v.sort();
        v
    };
    let whole = strip_end(relay(d, &["--vector-text", "base64"], corpus.as_bytes()));
    let mut union = Vec::new();
    let mut shard_of_doc = BTreeMap::new();
    for i in 0..n {
        let shard = format!("{i}/{n}");
        let lines = relay(
            d,
            &["--vector-text", "base64", "--shard", &shard],
            corpus.as_bytes(),
        );
        for l in lines.iter().filter(|l| l["kind"] == "document") {
            let prev = shard_of_doc.insert(l["doc"].as_str().unwrap().to_string(), i);
            assert_eq!(prev, None, "a document in two shards");
        }
        let part = strip_end(lines);
        assert!(!part.is_empty(), "shard {shard} is empty");
        union.extend(part);
    }
    union.sort();
    assert_eq!(union.len(), whole.len());
    assert!(
        union == whole,
        "the union of the shards is the whole output"
    );
    // Every document is in the shard the published rule gives it.
    let ids: Vec<String> = shard_of_doc.keys().cloned().collect();
    assert_eq!(ids.len(), 300);
    // Source: Python's hashlib.sha256, independent of kerf's sha2 crate.
    assert_eq!(python_shards(&ids, n), shard_of_doc);

    // The same split into a partitioned Parquet folder: ds/shard=I, one part per run.
    let p = profile();
    ok(&common::kerf_in(
        d,
        &[
            "embed",
            "-p",
            &p,
            "docs.jsonl",
            "--out",
            "single",
            "--format",
            "parquet",
            "--no-cache",
            "-q",
        ],
    ));
    let mut parts = Vec::new();
    for i in 0..n {
        let shard = format!("{i}/{n}");
        ok(&common::kerf_in(
            d,
            &[
                "embed",
                "-p",
                &p,
                "docs.jsonl",
                "--out",
                "ds",
                "--shard",
                &shard,
                "--format",
                "parquet",
                "--no-cache",
                "-q",
            ],
        ));
        let part = d.join(format!("ds/shard={i}"));
        let manifest: serde_json::Value =
            serde_json::from_slice(&std::fs::read(part.join("manifest.json")).unwrap()).unwrap();
        assert_eq!(manifest["shard"]["index"], i);
        assert_eq!(manifest["shard"]["count"], n);
        assert_eq!(manifest["shard"]["rule"], kerf::shard::SHARD_RULE);
        parts.push(part.join("chunks.parquet"));
    }
    let single = parquet_rows(&[d.join("single/chunks.parquet")]);
    let all = parquet_rows(&parts);
    assert!(!single.is_empty());
    assert!(
        all == single,
        "the shard parts read back as the whole table"
    );
    // Rerunning a shard without --force is refused, naming its folder.
    let e = fails(&common::kerf_in(
        d,
        &[
            "embed",
            "-p",
            &p,
            "docs.jsonl",
            "--out",
            "ds",
            "--shard",
            "1/3",
            "-q",
        ],
    ));
    assert!(e.contains("shard=1 already exists"), "{e}");
    // A shard outside its count is a usage error (exit 2, as for any bad flag value).
    let out = common::kerf_in(
        d,
        &[
            "embed",
            "-p",
            &p,
            "docs.jsonl",
            "--out",
            "x",
            "--shard",
            "3/3",
        ],
    );
    let e = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{e}");
    assert!(e.contains("index must be below the count"), "{e}");
    assert!(!d.join("x").exists());
}

#[test]
fn bad_lines_stop_with_their_number_or_are_skipped() {
    common::model_dir();
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    let input = "{\"id\":\"a\",\"text\":\"The boiler was retubed in May.\"}\n\
                 {\"id\":\"b\",\"text\":\"It passed its test.\"}\n\
                 {\"id\":\"c\",\"text\":\"unterminated\n\
                 {\"id\":\"d\",\"text\":\"The parapet was rebuilt.\"}\n";
    let p = profile();
    let out = kerf_stdin(
        d,
        &["embed", "--relay", "-p", &p, "-", "--no-cache", "-q"],
        input.as_bytes(),
    );
    let err = fails(&out);
    assert!(err.contains("<stdin>:3: not valid JSON"), "{err}");
    assert!(
        !String::from_utf8_lossy(&out.stdout).contains("\"end\""),
        "a stopped stream has no end line"
    );
    let out = kerf_stdin(
        d,
        &[
            "embed",
            "--relay",
            "-p",
            &p,
            "-",
            "--no-cache",
            "-q",
            "--skip-broken-lines",
        ],
        input.as_bytes(),
    );
    let text = ok(&out);
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("<stdin>:3: skipped: not valid JSON"), "{err}");
    let docs: Vec<String> = text
        .lines()
        .map(|l| serde_json::from_str::<serde_json::Value>(l).unwrap())
        .filter(|l| l["kind"] == "document")
        .map(|l| l["doc"].as_str().unwrap().to_string())
        .collect();
    assert_eq!(docs, ["a", "b", "d"]);
    assert!(text.ends_with("{\"kind\":\"end\",\"documents\":3,\"chunks\":3}\n"));
}

#[test]
fn closed_standard_output_ends_the_stage_quietly() {
    common::model_dir();
    let tmp = tempfile::tempdir().unwrap();
    let corpus = short_documents(400);
    let p = profile();
    let mut child = Command::new(env!("CARGO_BIN_EXE_kerf"))
        .args([
            "embed",
            "--relay",
            "-p",
            &p,
            "-",
            "--no-cache",
            "-q",
            "--block-tokens",
            "256",
        ])
        .current_dir(tmp.path())
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut stdin = child.stdin.take().unwrap();
    let feeder = std::thread::spawn(move || {
        let _ = stdin.write_all(corpus.as_bytes());
    });
    // Read one line, then close the pipe while the stage still has much to write.
    let mut first = String::new();
    BufReader::new(child.stdout.take().unwrap())
        .read_line(&mut first)
        .unwrap();
    assert!(first.starts_with("{\"kind\":\"chunk\""), "{first}");
    let out = child.wait_with_output().unwrap();
    feeder.join().unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(!err.contains("panicked"), "{err}");
    assert_eq!(out.status.code(), Some(0), "{err}");
}
