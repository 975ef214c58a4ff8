//! Reading a model folder's limits: how many tokens fit, what each input costs, what comes out.
//!
//! Every limit lives in a different file of a standard model folder, and they disagree on
//! purpose: the architecture allows `max_position_embeddings` positions, the sentence-embedding
//! config truncates earlier, and tokenizer.json may truncate earlier still. This module reads
//! them all and reports every problem it finds at once, each naming its file.
use std::path::{Path, PathBuf};

use serde_json::Value;

use crate::tokens::{TokenCounter, TokenizerDefaults};

pub use crate::home::{default_model_dir, kerf_home, DEFAULT_MODEL_NAME, FETCH_COMMAND};

/// Problems found in a model folder.
#[derive(Debug, thiserror::Error)]
pub enum ModelError {
    /// The folder itself is missing.
    #[error("model folder {dir} does not exist (run {FETCH_COMMAND} to fetch the default model, or point the profile's [model] folder at a model folder)")]
    MissingFolder {
        /// The folder.
        dir: PathBuf,
    },
    /// One or more files are missing or malformed; each entry names its file.
    #[error("model folder {dir} is not usable:\n  - {}", problems.join("\n  - "))]
    Problems {
        /// The folder.
        dir: PathBuf,
        /// Each problem, naming its file.
        problems: Vec<String>,
    },
}

/// Token pooling a folder declares in 1_Pooling/config.json.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
pub struct DeclaredPooling {
    /// "mean", "cls", "max" or "mean-sqrt-len" (several may be set; the first set wins here).
    pub mode: String,
    /// Vector width the pooling config states.
    pub dimension: Option<usize>,
}

/// The facts kerf needs about a model folder.
#[derive(Debug, Clone, serde::Serialize)]
pub struct ModelInfo {
    /// The folder.
    pub dir: PathBuf,
    /// config.json `model_type`.
    pub model_type: String,
    /// Architectural limit: config.json `max_position_embeddings`.
    pub max_position_embeddings: usize,
    /// Configured input length (sentence_bert_config.json `max_seq_length`), where present.
    pub configured_max_tokens: Option<usize>,
    /// Truncation and padding tokenizer.json applies (kerf turns both off for counting).
    pub tokenizer_defaults: TokenizerDefaults,
    /// Special tokens each input costs, measured by encoding an empty input.
    pub specials_per_input: usize,
    /// Vector width (config.json `hidden_size`).
    pub hidden_size: usize,
    /// Vocabulary size in config.json.
    pub vocab_size: usize,
    /// Vocabulary size of the tokenizer.
    pub tokenizer_vocab_size: usize,
    /// Pooling declared in 1_Pooling/config.json, if the folder has one.
    pub pooling: Option<DeclaredPooling>,
    /// Whether modules.json lists a Normalize step.
    pub normalize: bool,
    /// config.json as read, for the encoder (the folder's JSON files are read once, here).
    #[serde(skip)]
    pub config: Value,
}

impl ModelInfo {
    /// The window an encoder applies by default: configured length, else the architecture's.
    pub fn default_window(&self) -> usize {
        self.configured_max_tokens
            .unwrap_or(self.max_position_embeddings)
            .min(self.max_position_embeddings)
    }
}

fn read_json(dir: &Path, name: &str, problems: &mut Vec<String>, required: bool) -> Option<Value> {
    let path = dir.join(name);
    match std::fs::read_to_string(&path) {
        Ok(s) => match serde_json::from_str::<Value>(&s) {
            Ok(v) if v.is_object() || v.is_array() => Some(v),
            Ok(_) => {
                problems.push(format!("{name}: expected a JSON object"));
                None
            }
            Err(e) => {
                problems.push(format!("{name}: malformed JSON: {e}"));
                None
            }
        },
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
            if required {
                problems.push(format!("{name}: missing"));
            }
            None
        }
        Err(e) => {
            problems.push(format!("{name}: cannot read: {e}"));
            None
        }
    }
}

fn usize_key(v: &Value, file: &str, key: &str, problems: &mut Vec<String>) -> Option<usize> {
    match v.get(key) {
        Some(x) => match x.as_u64() {
            Some(n) if n > 0 => Some(n as usize),
            _ => {
                problems.push(format!(
                    "{file}: `{key}` must be a positive integer, found {x}"
                ));
                None
            }
        },
        None => {
            problems.push(format!("{file}: missing key `{key}`"));
            None
        }
    }
}

/// Read a model folder and load its tokenizer (truncation and padding off).
pub fn inspect(dir: &Path) -> Result<(ModelInfo, TokenCounter), ModelError> {
    if !dir.is_dir() {
        return Err(ModelError::MissingFolder {
            dir: dir.to_path_buf(),
        });
    }
    let mut problems = Vec::new();
    let config = read_json(dir, "config.json", &mut problems, true);
    let (mut model_type, mut max_pos, mut hidden, mut vocab) = (String::new(), None, None, None);
    if let Some(c) = &config {
        match c.get("model_type").and_then(Value::as_str) {
            Some(t) => model_type = t.to_string(),
            None => problems.push("config.json: missing key `model_type`".to_string()),
        }
        max_pos = usize_key(c, "config.json", "max_position_embeddings", &mut problems);
        hidden = usize_key(c, "config.json", "hidden_size", &mut problems);
        vocab = usize_key(c, "config.json", "vocab_size", &mut problems);
    }
    let configured = read_json(dir, "sentence_bert_config.json", &mut problems, false)
        .and_then(|v| v.get("max_seq_length").and_then(Value::as_u64))
        .map(|n| n as usize);
    let pooling = read_json(dir, "1_Pooling/config.json", &mut problems, false).map(|v| {
        let flag = |k: &str| v.get(k).and_then(Value::as_bool).unwrap_or(false);
        let mode = if flag("pooling_mode_cls_token") {
            "cls"
        } else if flag("pooling_mode_max_tokens") {
            "max"
        } else if flag("pooling_mode_mean_sqrt_len_tokens") {
            "mean-sqrt-len"
        } else {
            "mean"
        };
        DeclaredPooling {
            mode: mode.to_string(),
            dimension: v
                .get("word_embedding_dimension")
                .and_then(Value::as_u64)
                .map(|n| n as usize),
        }
    });
    let normalize = read_json(dir, "modules.json", &mut problems, false)
        .and_then(|v| {
            v.as_array().map(|mods| {
                mods.iter().any(|m| {
                    m.get("type")
                        .and_then(Value::as_str)
                        .is_some_and(|t| t.ends_with("Normalize"))
                })
            })
        })
        .unwrap_or(false);
    if !dir.join("model.safetensors").is_file() {
        problems.push("model.safetensors: missing".to_string());
    }
    let tok_path = dir.join("tokenizer.json");
    let counter = if tok_path.is_file() {
        match TokenCounter::from_file(&tok_path) {
            Ok(c) => Some(c),
            Err(e) => {
                problems.push(format!("tokenizer.json: {e}"));
                None
            }
        }
    } else {
        problems.push("tokenizer.json: missing".to_string());
        None
    };
    if let (Some(p), Some(h)) = (&pooling, hidden) {
        if let Some(d) = p.dimension.filter(|&d| d != h) {
            problems.push(format!(
                "1_Pooling/config.json: word_embedding_dimension {d} differs from config.json hidden_size {h}"
            ));
        }
    }
    if let (Some(c), Some(v)) = (&counter, vocab) {
        if c.vocab_size() > v {
            problems.push(format!(
                "tokenizer.json: vocabulary of {} tokens exceeds config.json vocab_size {v}",
                c.vocab_size()
            ));
        }
    }
    match (problems.is_empty(), counter, max_pos, hidden, vocab) {
        (
            true,
            Some(counter),
            Some(max_position_embeddings),
            Some(hidden_size),
            Some(vocab_size),
        ) => {
            let info = ModelInfo {
                dir: dir.to_path_buf(),
                model_type,
                max_position_embeddings,
                configured_max_tokens: configured,
                tokenizer_defaults: counter.defaults().clone(),
                specials_per_input: counter.specials_per_input(),
                hidden_size,
                vocab_size,
                tokenizer_vocab_size: counter.vocab_size(),
                pooling,
                normalize,
                config: config.unwrap_or(Value::Null),
            };
            Ok((info, counter))
        }
        _ => Err(ModelError::Problems {
            dir: dir.to_path_buf(),
            problems,
        }),
    }
}
