//! `kerf model`: a model folder's limits.
use std::path::PathBuf;

use anyhow::Result;
use clap::Args;

use kerf::model::{self, ModelInfo};

#[derive(Args)]
pub struct ModelArgs {
    /// Model folder (default: the cached default model).
    pub folder: Option<PathBuf>,
    /// Machine-readable output.
    #[arg(long)]
    pub json: bool,
}

/// Human lines describing a model's limits; shared with other reports.
pub fn describe(info: &ModelInfo) -> Vec<String> {
    let mut l = vec![
        format!("model folder       {}", info.dir.display()),
        format!(
            "architecture       {} (model_type), vectors of {} dimensions",
            info.model_type, info.hidden_size
        ),
        format!(
            "position limit     {} tokens (config.json max_position_embeddings)",
            info.max_position_embeddings
        ),
    ];
    match info.configured_max_tokens {
        Some(n) => l.push(format!("configured length  {n} tokens (sentence_bert_config.json max_seq_length): inputs past it are cut")),
        None => l.push("configured length  none declared: the position limit applies".into()),
    }
    let d = &info.tokenizer_defaults;
    if d.truncation_tokens.is_some() || d.padding.is_some() {
        l.push(format!(
            "tokenizer.json     truncates at {}, pads {}: kerf turns both off for counting",
            d.truncation_tokens.map_or("—".into(), |n| n.to_string()),
            d.padding.clone().unwrap_or_else(|| "—".into())
        ));
    } else {
        l.push("tokenizer.json     no truncation or padding of its own".into());
    }
    l.push(format!(
        "specials per input {} tokens (measured on an empty input)",
        info.specials_per_input
    ));
    l.push(format!(
        "token pooling      {}{}",
        info.pooling
            .as_ref()
            .map_or("not declared (mean assumed)".to_string(), |p| format!(
                "{} (1_Pooling/config.json)",
                p.mode
            )),
        if info.normalize {
            ", then L2-normalised (modules.json)"
        } else {
            ""
        }
    ));
    l.push(format!(
        "vocabulary         {} (config) / {} (tokenizer)",
        info.vocab_size, info.tokenizer_vocab_size
    ));
    l
}

pub fn run(a: ModelArgs) -> Result<()> {
    let dir = a.folder.unwrap_or_else(model::default_model_dir);
    let (info, _) = model::inspect(&dir)?;
    let mut out = std::io::stdout().lock();
    use std::io::Write;
    if a.json {
        writeln!(out, "{}", serde_json::to_string_pretty(&info)?)?;
    } else {
        for line in describe(&info) {
            writeln!(out, "{line}")?;
        }
    }
    Ok(())
}
