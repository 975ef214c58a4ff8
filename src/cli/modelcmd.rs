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
    let why = info.unsupported();
    let mut l = vec![
        format!("model folder       {}", info.dir.display()),
        format!(
            "architecture       {} (config.json model_type), vectors of {} dimensions",
            info.model_type, info.hidden_size
        ),
        if why.is_empty() {
            "kerf can run it    yes".to_string()
        } else {
            format!("kerf can run it    no: {}", why.join("; "))
        },
        format!(
            "position limit     {} positions (config.json max_position_embeddings)",
            info.max_position_embeddings
        ),
    ];
    if info.position_offset() > 0 {
        l.push(format!(
            "usable positions   {} tokens: the {} family numbers positions from {} (pad_token_id {} + 1)",
            info.usable_positions(),
            info.model_type,
            info.position_offset(),
            info.position_offset() - 1
        ));
    } else {
        l.push(format!(
            "usable positions   {} tokens",
            info.usable_positions()
        ));
    }
    match (info.configured_max_tokens, info.configured_from) {
        (Some(n), Some(from)) => {
            let mut line = format!(
                "configured length  {n} tokens ({}): inputs past it are cut",
                from.name()
            );
            if n > info.usable_positions() {
                line.push_str(&format!(
                    "; more than the {} usable positions, so kerf plans with {}",
                    info.usable_positions(),
                    info.default_window()
                ));
            }
            l.push(line);
        }
        _ => l.push("configured length  none declared: the usable positions apply".into()),
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
            .map_or("not declared (mean assumed)".to_string(), |p| {
                let mut s = format!("{} ({})", p.modes.join(" + "), p.file);
                if p.mode == "mean-sqrt-len" {
                    s.push_str(
                        ", run as mean: the two differ by one factor per vector, so cosines agree",
                    );
                }
                s
            }),
        if info.normalize {
            ", then L2-normalised (modules.json)"
        } else {
            ", not normalised (no Normalize in modules.json)"
        }
    ));
    if info.prompts.is_empty() {
        l.push("prompts            none declared".into());
    } else {
        for (i, (name, text)) in info.prompts.iter().enumerate() {
            let mut line = format!(
                "{}{name} = {text:?}",
                if i == 0 {
                    "prompts            "
                } else {
                    "                   "
                }
            );
            if info.default_prompt_name.as_deref() == Some(name) {
                line.push_str(" (default_prompt_name)");
            }
            if info.passage_prompt().map(|p| p.0) == Some(name.as_str()) {
                line.push_str(
                    " (kerf puts it before every chunk: `kerf profile new` makes it the prefix)",
                );
            }
            l.push(line);
        }
        l.push("                   (config_sentence_transformers.json)".into());
    }
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
