//! How close kerf's int8 vectors come to its f32 ones over a JSONL file of texts
//! (`{"text": ...}` per line): the worst and mean cosine, and the texts of the worst few. Used
//! by scripts/bench-embed beside the speed figures (its 450 Debian FAQ chunks of 20 to 256
//! tokens), and to choose the int8 product's settings.
//!
//! Usage: cargo run --release --example int8_accuracy -- TEXTS.jsonl [MAX_INPUT_TOKENS]
//!
//! The model folder is the default model's unless `KERF_BENCH_MODEL` names another folder.
#[path = "common/texts.rs"]
mod texts;
use kerf::embed::{BertEmbedder, EmbedOptions, Embedder, Precision};
use kerf::pool::cosine;

fn main() -> anyhow::Result<()> {
    let args: Vec<String> = std::env::args().collect();
    let path = args
        .get(1)
        .ok_or_else(|| anyhow::anyhow!("usage: int8_accuracy TEXTS.jsonl [MAX_INPUT_TOKENS]"))?;
    let max_input_tokens: usize = args.get(2).map_or(Ok(256), |t| t.parse())?;
    let texts = texts::read(path)?;
    let refs: Vec<&str> = texts.iter().map(String::as_str).collect();
    let model_dir = std::env::var_os("KERF_BENCH_MODEL")
        .map_or_else(kerf::model::default_model_dir, std::path::PathBuf::from);
    let embed = |precision| -> anyhow::Result<Vec<Vec<f32>>> {
        let e = BertEmbedder::load(
            &model_dir,
            &EmbedOptions {
                max_input_tokens,
                precision,
                ..Default::default()
            },
        )?;
        Ok(e.embed(&refs)?)
    };
    let f = embed(Precision::F32)?;
    let q = embed(Precision::Int8)?;
    let mut cos: Vec<(f32, usize)> = f
        .iter()
        .zip(&q)
        .enumerate()
        .map(|(i, (a, b))| (cosine(a, b), i))
        .collect();
    let mean = cos.iter().map(|c| c.0 as f64).sum::<f64>() / cos.len() as f64;
    cos.sort_by(|a, b| a.0.total_cmp(&b.0));
    println!(
        "{{\"texts\": {}, \"worst_cosine\": {:.5}, \"mean_cosine\": {:.5}}}",
        cos.len(),
        cos[0].0,
        mean
    );
    for (c, i) in cos.iter().take(6) {
        let t: String = texts[*i].chars().take(70).collect();
        eprintln!("  {c:.5}  {t:?}");
    }
    Ok(())
}
