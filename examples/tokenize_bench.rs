//! The floor kerf's census and cutter are measured against: the tokenizers crate's own
//! `encode_batch` over the same files, a batch of 64 documents at a time, with the model's
//! tokenizer (truncation and padding off) and the same rayon threads.
//!
//! Usage: cargo run --release --example tokenize_bench -- FOLDER
use std::time::Instant;

fn main() -> anyhow::Result<()> {
    let dir = std::env::args()
        .nth(1)
        .ok_or_else(|| anyhow::anyhow!("usage: tokenize_bench FOLDER"))?;
    let mut files: Vec<_> = std::fs::read_dir(&dir)?
        .map(|e| e.map(|e| e.path()))
        .collect::<Result<_, _>>()?;
    files.sort();
    let mut tok =
        tokenizers::Tokenizer::from_file(kerf::model::default_model_dir().join("tokenizer.json"))
            .map_err(anyhow::Error::msg)?;
    tok.with_truncation(None).map_err(anyhow::Error::msg)?;
    tok.with_padding(None);
    let t = Instant::now();
    let (mut tokens, mut bytes) = (0usize, 0usize);
    for batch in files.chunks(64) {
        let texts: Vec<String> = batch
            .iter()
            .map(std::fs::read_to_string)
            .collect::<Result<_, _>>()?;
        bytes += texts.iter().map(String::len).sum::<usize>();
        let enc = tok.encode_batch(texts, false).map_err(anyhow::Error::msg)?;
        tokens += enc.iter().map(|e| e.len()).sum::<usize>();
    }
    let secs = t.elapsed().as_secs_f64();
    println!(
        "{}",
        serde_json::json!({"files": files.len(), "bytes": bytes, "tokens": tokens, "seconds": secs})
    );
    Ok(())
}
