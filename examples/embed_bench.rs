//! Throughput of kerf's CPU encoder over a JSONL file of texts (`{"text": ...}` per line).
//! Used by scripts/bench-embed, which runs sentence-transformers on the same texts in the same
//! run and prints the ratio.
//!
//! Usage: cargo run --release --example embed_bench -- TEXTS.jsonl [THREADS] [MAX_INPUT_TOKENS]
use std::time::Instant;

use kerf::embed::{BertEmbedder, EmbedOptions, Embedder};

fn main() -> anyhow::Result<()> {
    let args: Vec<String> = std::env::args().collect();
    let path = args.get(1).ok_or_else(|| {
        anyhow::anyhow!("usage: embed_bench TEXTS.jsonl [THREADS] [MAX_INPUT_TOKENS]")
    })?;
    let threads: usize = args.get(2).map_or(Ok(0), |t| t.parse())?;
    let max_input_tokens: usize = args.get(3).map_or(Ok(256), |t| t.parse())?;
    let texts: Vec<String> = std::fs::read_to_string(path)?
        .lines()
        .filter(|l| !l.trim().is_empty())
        .map(|l| {
            serde_json::from_str::<serde_json::Value>(l)
                .map(|v| v["text"].as_str().unwrap_or_default().to_string())
        })
        .collect::<Result<_, _>>()?;
    let e = BertEmbedder::load(
        &kerf::model::default_model_dir(),
        &EmbedOptions {
            threads,
            max_input_tokens,
            ..Default::default()
        },
    )?;
    let refs: Vec<&str> = texts.iter().map(String::as_str).collect();
    e.embed(&refs[..refs.len().min(16)])?; // warm-up
    let before = e.stats();
    let t = Instant::now();
    e.embed(&refs)?;
    let secs = t.elapsed().as_secs_f64();
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
        })
    );
    Ok(())
}
