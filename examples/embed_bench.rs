//! Throughput of kerf's CPU encoder over a JSONL file of texts (`{"text": ...}` per line).
//! Used by scripts/bench-embed, which runs sentence-transformers on the same texts in the same
//! run and prints the ratio.
//!
//! Usage: cargo run --release --example embed_bench -- TEXTS.jsonl [THREADS] [MAX_INPUT_TOKENS]
//!        [ENGINE: packed|candle] [PRECISION: f32|bf16|int8]
//!
//! The model folder is the default model's unless `KERF_BENCH_MODEL` names another folder
//! (scripts/bench-embed-mpnet sets it to all-mpnet-base-v2's).
//!
//! Besides throughput it prints the floating-point work done (matrix products and attention,
//! counted from the model's sizes and each input's length), so the caller can compare the rate
//! with the machine's measured matrix-product peak.
//!
//! With `KERF_BENCH_VECTORS=PATH` set it also writes the timed run's vectors to PATH, row after
//! row in input order, as little-endian f32 (scripts/bench-engines compares them with other
//! engines' vectors of the same texts).
#[path = "common/texts.rs"]
mod texts;
use std::time::Instant;

use kerf::embed::{BertEmbedder, EmbedOptions, Embedder, Engine, Precision};

fn main() -> anyhow::Result<()> {
    let args: Vec<String> = std::env::args().collect();
    let path = args.get(1).ok_or_else(|| {
        anyhow::anyhow!("usage: embed_bench TEXTS.jsonl [THREADS] [MAX_INPUT_TOKENS]")
    })?;
    let threads: usize = args.get(2).map_or(Ok(0), |t| t.parse())?;
    let max_input_tokens: usize = args.get(3).map_or(Ok(256), |t| t.parse())?;
    let engine = match args.get(4).map(String::as_str) {
        None | Some("packed") => Engine::Packed,
        Some("candle") => Engine::Candle,
        Some(other) => anyhow::bail!("unknown engine {other}"),
    };
    let precision = match args.get(5).map(String::as_str) {
        None | Some("f32") => Precision::F32,
        Some("bf16") => Precision::Bf16,
        Some("int8") => Precision::Int8,
        Some(other) => anyhow::bail!("unknown precision {other}"),
    };
    let texts = texts::read(path)?;
    let model_dir = std::env::var_os("KERF_BENCH_MODEL")
        .map_or_else(kerf::model::default_model_dir, std::path::PathBuf::from);
    let e = BertEmbedder::load(
        &model_dir,
        &EmbedOptions {
            threads,
            max_input_tokens,
            engine,
            precision,
            max_batch_tokens: std::env::var("KERF_BATCH_TOKENS")
                .ok()
                .and_then(|v| v.parse().ok())
                .unwrap_or(8192),
            ..Default::default()
        },
    )?;
    let refs: Vec<&str> = texts.iter().map(String::as_str).collect();
    // MiniLM-L6 sizes (config.json of the default model): 6 layers, hidden 384, feed-forward
    // 1,536. Per token and layer: 2*(h*3h + h*h + 2*h*i) for the products, 4*len*h for
    // attention scores and weighted values.
    let cfg: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(model_dir.join("config.json"))?)?;
    let (h, i, layers) = (
        cfg["hidden_size"].as_f64().unwrap_or(384.0),
        cfg["intermediate_size"].as_f64().unwrap_or(1536.0),
        cfg["num_hidden_layers"].as_f64().unwrap_or(6.0),
    );
    let mut flops = 0f64;
    for t in &refs {
        let len = e.count_tokens(t)?.min(max_input_tokens) as f64;
        flops += layers * len * (2.0 * (h * 3.0 * h + h * h + 2.0 * h * i) + 4.0 * len * h);
    }
    e.embed(&refs[..refs.len().min(16)])?; // warm-up
    let before = e.stats();
    let t = Instant::now();
    let vectors = e.embed(&refs)?;
    let secs = t.elapsed().as_secs_f64();
    if let Some(out) = std::env::var_os("KERF_BENCH_VECTORS") {
        let bytes: Vec<u8> = vectors
            .iter()
            .flatten()
            .flat_map(|x| x.to_le_bytes())
            .collect();
        std::fs::write(&out, bytes)
            .map_err(|err| anyhow::anyhow!("cannot write {}: {err}", out.to_string_lossy()))?;
    }
    let s = e.stats();
    let real = s.real_tokens - before.real_tokens;
    let padded = s.padded_tokens - before.padded_tokens;
    println!(
        "{}",
        serde_json::json!({
            "texts": texts.len(),
            "tokens": real,
            "padded_tokens": padded,
            "padding_waste": if padded > 0 { (padded - real) as f64 / padded as f64 } else { 0.0 },
            "seconds": secs,
            "tokens_per_second": real as f64 / secs,
            "gflops_per_second": flops / secs / 1e9,
            "engine": format!("{engine:?}").to_lowercase(),
            "precision": format!("{precision:?}").to_lowercase(),
            "dimensions": vectors.first().map_or(0, Vec::len),
        })
    );
    Ok(())
}
