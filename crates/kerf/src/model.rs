//! Reading a model folder's limits: how many tokens fit, what each input costs, what comes out.
//!
//! Every limit lives in a different file of a standard model folder, and they disagree on
//! purpose: the architecture allows `max_position_embeddings` positions, the sentence-embedding
//! config truncates earlier, and tokenizer.json may truncate earlier still. This module reads
//! them all and reports every problem it finds at once, each naming its file.
use std::collections::BTreeMap;
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
    /// The folder reads fine but kerf cannot make vectors with it.
    #[error("kerf cannot make vectors with {dir}:\n  - {}", reasons.join("\n  - "))]
    CannotRun {
        /// The folder (or tokenizer file).
        dir: PathBuf,
        /// Each reason, naming its file.
        reasons: Vec<String>,
    },
}

/// Token pooling modes kerf's encoder applies (names as profiles and reports spell them).
pub const RUNNABLE_POOLING: &[&str] = &["mean", "cls", "max", "mean-sqrt-len"];

/// Token pooling a folder declares in its Pooling module's config (1_Pooling/config.json).
///
/// Two layouts exist: older sentence-transformers versions write one boolean per mode
/// (`pooling_mode_mean_tokens: true`, ...) with `word_embedding_dimension`; the 6.x line writes
/// one `pooling_mode` string (or a list, whose vectors are concatenated) with
/// `embedding_dimension`. Both are read into the same names.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
pub struct DeclaredPooling {
    /// The first declared mode: "mean", "cls", "max", "mean-sqrt-len", "weighted-mean" or
    /// "last-token".
    pub mode: String,
    /// Every declared mode, in the order sentence-transformers concatenates them.
    pub modes: Vec<String>,
    /// Vector width the pooling config states.
    pub dimension: Option<usize>,
    /// Whether prompt tokens are pooled with the text (`include_prompt`, default true).
    pub include_prompt: bool,
    /// The file it was read from, relative to the folder.
    pub file: String,
}

impl DeclaredPooling {
    /// Why kerf's encoder cannot apply this pooling, if it cannot.
    pub fn unsupported(&self) -> Option<String> {
        if self.modes.len() > 1 {
            return Some(format!(
                "{}: pooling modes {} are concatenated into one vector; kerf pools with one mode",
                self.file,
                self.modes.join(" + ")
            ));
        }
        if !RUNNABLE_POOLING.contains(&self.mode.as_str()) {
            return Some(format!(
                "{}: pooling mode `{}` is not one kerf's encoder applies (it applies {})",
                self.file,
                self.mode,
                RUNNABLE_POOLING.join(", ")
            ));
        }
        if !self.include_prompt {
            return Some(format!(
                "{}: include_prompt is false (prompt tokens left out of the pooling); kerf pools every token of an input",
                self.file
            ));
        }
        None
    }
}

/// Pooling mode names as sentence-transformers writes them, to kerf's names.
fn pooling_name(st: &str) -> Option<&'static str> {
    Some(match st {
        "mean" => "mean",
        "cls" => "cls",
        "max" => "max",
        "mean_sqrt_len_tokens" => "mean-sqrt-len",
        "weightedmean" => "weighted-mean",
        "lasttoken" => "last-token",
        _ => return None,
    })
}

/// The older layout's boolean keys, in sentence-transformers' concatenation order.
const LEGACY_POOLING_KEYS: &[(&str, &str)] = &[
    ("pooling_mode_cls_token", "cls"),
    ("pooling_mode_max_tokens", "max"),
    ("pooling_mode_mean_tokens", "mean"),
    ("pooling_mode_mean_sqrt_len_tokens", "mean-sqrt-len"),
    ("pooling_mode_weightedmean_tokens", "weighted-mean"),
    ("pooling_mode_lasttoken", "last-token"),
];

/// Read a Pooling module config of either layout; problems name `file`.
pub fn read_pooling(v: &Value, file: &str) -> Result<DeclaredPooling, String> {
    let modes: Vec<String> = match v.get("pooling_mode") {
        Some(Value::String(m)) => vec![m.clone()],
        Some(Value::Array(ms)) => ms
            .iter()
            .map(|m| m.as_str().map(str::to_string).ok_or(m.to_string()))
            .collect::<Result<_, _>>()
            .map_err(|m| format!("{file}: `pooling_mode` entries must be strings, found {m}"))?,
        Some(other) => {
            return Err(format!(
                "{file}: `pooling_mode` must be a string or a list of strings, found {other}"
            ))
        }
        None => {
            let set: Vec<String> = LEGACY_POOLING_KEYS
                .iter()
                .filter(|(k, _)| v.get(*k).and_then(Value::as_bool).unwrap_or(false))
                .map(|(_, m)| m.to_string())
                .collect();
            // sentence-transformers reads a config with no mode set as mean (pooling.py,
            // _convert_legacy_pooling_kwargs).
            if set.is_empty() {
                vec!["mean".to_string()]
            } else {
                set
            }
        }
    };
    let mut names = Vec::with_capacity(modes.len());
    for m in &modes {
        match pooling_name(m) {
            Some(n) => names.push(n.to_string()),
            None if v.get("pooling_mode").is_none() => names.push(m.clone()),
            None => {
                return Err(format!(
                    "{file}: unknown pooling mode `{m}` (sentence-transformers knows cls, max, mean, mean_sqrt_len_tokens, weightedmean, lasttoken)"
                ))
            }
        }
    }
    if names.is_empty() {
        return Err(format!("{file}: `pooling_mode` lists no mode"));
    }
    let dimension = v
        .get("embedding_dimension")
        .or_else(|| v.get("word_embedding_dimension"))
        .and_then(Value::as_u64)
        .map(|n| n as usize);
    Ok(DeclaredPooling {
        mode: names[0].clone(),
        modes: names,
        dimension,
        include_prompt: v
            .get("include_prompt")
            .and_then(Value::as_bool)
            .unwrap_or(true),
        file: file.to_string(),
    })
}

/// Where the limits of a [`ModelInfo`] came from.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum ModelSource {
    /// A model folder read by [`inspect`].
    Folder,
    /// A bare tokenizer.json with a window the user gave ([`ModelInfo::tokenizer_only`]):
    /// kerf can count and cut with it but has no encoder to make vectors.
    TokenizerOnly,
}

/// Where the configured input length was declared.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum LengthSource {
    /// sentence_bert_config.json `max_seq_length` (older sentence-transformers layout).
    #[serde(rename = "sentence_bert_config.json max_seq_length")]
    SentenceBertConfig,
    /// sentence_bert_config.json `processor_kwargs.model_max_length`.
    #[serde(rename = "sentence_bert_config.json processor_kwargs.model_max_length")]
    ProcessorKwargs,
    /// tokenizer_config.json `model_max_length` (where sentence-transformers 6.x keeps it).
    #[serde(rename = "tokenizer_config.json model_max_length")]
    TokenizerConfig,
}

impl LengthSource {
    /// The file and key, as reports name them.
    pub fn name(self) -> &'static str {
        match self {
            Self::SentenceBertConfig => "sentence_bert_config.json max_seq_length",
            Self::ProcessorKwargs => "sentence_bert_config.json processor_kwargs.model_max_length",
            Self::TokenizerConfig => "tokenizer_config.json model_max_length",
        }
    }
}

/// The facts kerf needs about a model folder.
#[derive(Debug, Clone, serde::Serialize)]
pub struct ModelInfo {
    /// The folder (or the tokenizer file, for [`ModelSource::TokenizerOnly`]).
    pub dir: PathBuf,
    /// A folder, or a bare tokenizer.
    pub source: ModelSource,
    /// config.json `model_type` (empty for a bare tokenizer).
    pub model_type: String,
    /// Architectural limit: config.json `max_position_embeddings` (for a bare tokenizer, the
    /// window the user gave).
    pub max_position_embeddings: usize,
    /// config.json `pad_token_id`, where present (RoBERTa-style position ids start after it).
    pub pad_token_id: Option<usize>,
    /// Configured input length, where declared.
    pub configured_max_tokens: Option<usize>,
    /// Which file and key declared the configured length.
    pub configured_from: Option<LengthSource>,
    /// Truncation and padding tokenizer.json applies (kerf turns both off for counting).
    pub tokenizer_defaults: TokenizerDefaults,
    /// Special tokens each input costs, measured by encoding an empty input.
    pub specials_per_input: usize,
    /// Vector width (config.json `hidden_size`, `dim` for DistilBERT; 0 for a bare tokenizer).
    pub hidden_size: usize,
    /// Vocabulary size in config.json.
    pub vocab_size: usize,
    /// Vocabulary size of the tokenizer.
    pub tokenizer_vocab_size: usize,
    /// Pooling declared in the folder's Pooling module config, if it has one.
    pub pooling: Option<DeclaredPooling>,
    /// Whether modules.json lists a Normalize step.
    pub normalize: bool,
    /// Prompts from config_sentence_transformers.json `prompts` (name to text; empty ones left
    /// out).
    pub prompts: BTreeMap<String, String>,
    /// config_sentence_transformers.json `default_prompt_name`, if set.
    pub default_prompt_name: Option<String>,
    /// Whether model.safetensors is present (kerf reads conventions without it).
    pub has_weights: bool,
    /// config.json as read, for the encoder (the folder's JSON files are read once, here).
    #[serde(skip)]
    pub config: Value,
}

/// Prompt names that mark the text side of retrieval, in the order they are preferred (common
/// practice in sentence-transformers model configs: "passage" for E5-style models, "document"
/// elsewhere; from memory).
pub const PASSAGE_PROMPT_NAMES: &[&str] = &["passage", "document", "doc", "corpus"];

impl ModelInfo {
    /// The window an encoder applies by default: configured length, else the architecture's,
    /// never more than the usable positions.
    pub fn default_window(&self) -> usize {
        self.configured_max_tokens
            .unwrap_or(self.usable_positions())
            .min(self.usable_positions())
    }

    /// Positions an input can really use. RoBERTa-family models number positions from
    /// `padding_idx + 1` (transformers: roberta and xlm-roberta
    /// `create_position_ids_from_input_ids` with padding_idx = config pad_token_id; MPNet with
    /// a padding_idx fixed at 1 in `MPNetEmbeddings`), so 514 positions hold 512 tokens.
    pub fn usable_positions(&self) -> usize {
        self.max_position_embeddings
            .saturating_sub(self.position_offset())
    }

    /// Positions the family reserves before the first token (0 for BERT-style models and for
    /// architectures kerf does not know), from [`crate::embed::family`].
    pub fn position_offset(&self) -> usize {
        crate::embed::family::family_of(&self.model_type)
            .map_or(0, |f| f.position_offset(self.pad_token_id))
    }

    /// Where the position limit comes from, for messages.
    pub fn limit_origin(&self) -> String {
        match self.source {
            ModelSource::TokenizerOnly => {
                format!("--window given with tokenizer {}", self.dir.display())
            }
            ModelSource::Folder if self.position_offset() > 0 => format!(
                "config.json max_position_embeddings {} less {} the {} family reserves, in {}",
                self.max_position_embeddings,
                self.position_offset(),
                self.model_type,
                self.dir.display()
            ),
            ModelSource::Folder => format!(
                "config.json max_position_embeddings in {}",
                self.dir.display()
            ),
        }
    }

    /// The prompt to put before every chunk: the passage (or document) prompt, if declared.
    pub fn passage_prompt(&self) -> Option<(&str, &str)> {
        PASSAGE_PROMPT_NAMES.iter().find_map(|n| {
            self.prompts
                .get_key_value(*n)
                .map(|(k, v)| (k.as_str(), v.as_str()))
        })
    }

    /// Why kerf cannot make vectors with this model (empty when it can).
    pub fn unsupported(&self) -> Vec<String> {
        let mut why = Vec::new();
        if self.source == ModelSource::TokenizerOnly {
            why.push(format!(
                "{}: only a tokenizer was given, no model to run",
                self.dir.display()
            ));
            return why;
        }
        // Families kerf runs ([`crate::embed::family::FAMILIES`] maps their weights); other
        // known ones (CamemBERT) are read, surveyed and cut with their position offsets.
        let supported = crate::embed::family::runnable_model_types();
        if !supported.contains(&self.model_type.as_str()) {
            why.push(format!(
                "config.json: architecture `{}` (model_type) is not one kerf runs; supported: {}",
                self.model_type,
                supported.join(", ")
            ));
        } else if let Some(f) = crate::embed::family::family_of(&self.model_type) {
            why.extend(
                f.unsupported_options(&self.config)
                    .into_iter()
                    .map(|o| format!("config.json: {o}")),
            );
        }
        if !self.has_weights {
            why.push("model.safetensors: missing".to_string());
        }
        if let Some(p) = self.pooling.as_ref().and_then(DeclaredPooling::unsupported) {
            why.push(p);
        }
        why
    }

    /// Refuse a model kerf cannot run, every reason named.
    pub fn check_runnable(&self) -> Result<(), ModelError> {
        let why = self.unsupported();
        if why.is_empty() {
            Ok(())
        } else {
            Err(ModelError::CannotRun {
                dir: self.dir.clone(),
                reasons: why,
            })
        }
    }

    /// Limits for planning with a bare tokenizer.json and a window the user gives: counting
    /// and cutting work, vectors cannot be made.
    pub fn tokenizer_only(path: &Path, counter: &TokenCounter, window: usize) -> Self {
        Self {
            dir: path.to_path_buf(),
            source: ModelSource::TokenizerOnly,
            model_type: String::new(),
            max_position_embeddings: window,
            pad_token_id: None,
            configured_max_tokens: Some(window),
            configured_from: None,
            tokenizer_defaults: counter.defaults().clone(),
            specials_per_input: counter.specials_per_input(),
            hidden_size: 0,
            vocab_size: counter.vocab_size(),
            tokenizer_vocab_size: counter.vocab_size(),
            pooling: None,
            normalize: false,
            prompts: BTreeMap::new(),
            default_prompt_name: None,
            has_weights: false,
            config: Value::Null,
        }
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

/// A length key that may hold the "no limit" sentinel transformers writes (about 1e30) or a
/// positive integer.
fn length_key(v: &Value, key: &str) -> Option<usize> {
    v.get(key)
        .and_then(Value::as_u64)
        .filter(|&n| n > 0 && n < 1 << 40)
        .map(|n| n as usize)
}

/// The configured input length and where it was declared, as sentence-transformers 6.3 resolves
/// it (base/modules/transformer.py): `max_seq_length` in sentence_bert_config.json (the older
/// layout) or `processor_kwargs.model_max_length` there, else the tokenizer's
/// `model_max_length` in tokenizer_config.json (the 6.x layout).
fn configured_length(
    st_config: Option<&Value>,
    tok_config: Option<&Value>,
) -> Option<(usize, LengthSource)> {
    if let Some(c) = st_config {
        if let Some(n) = length_key(c, "max_seq_length") {
            return Some((n, LengthSource::SentenceBertConfig));
        }
        if let Some(n) = c
            .get("processor_kwargs")
            .and_then(|k| length_key(k, "model_max_length"))
        {
            return Some((n, LengthSource::ProcessorKwargs));
        }
    }
    tok_config
        .and_then(|c| length_key(c, "model_max_length"))
        .map(|n| (n, LengthSource::TokenizerConfig))
}

/// Read a model folder and load its tokenizer (truncation and padding off).
///
/// Weights are not required: conventions and limits are read from the JSON files, and
/// [`ModelInfo::check_runnable`] says whether vectors can be made.
pub fn inspect(dir: &Path) -> Result<(ModelInfo, TokenCounter), ModelError> {
    if !dir.is_dir() {
        return Err(ModelError::MissingFolder {
            dir: dir.to_path_buf(),
        });
    }
    let mut problems = Vec::new();
    let config = read_json(dir, "config.json", &mut problems, true);
    let (mut model_type, mut max_pos, mut hidden, mut vocab) = (String::new(), None, None, None);
    let mut pad_token_id = None;
    if let Some(c) = &config {
        match c.get("model_type").and_then(Value::as_str) {
            Some(t) => model_type = t.to_string(),
            None => problems.push("config.json: missing key `model_type`".to_string()),
        }
        max_pos = usize_key(c, "config.json", "max_position_embeddings", &mut problems);
        // Each family names the width its own way (DistilBERT: `dim`).
        let width_key =
            crate::embed::family::family_of(&model_type).map_or("hidden_size", |f| f.keys.hidden);
        hidden = usize_key(c, "config.json", width_key, &mut problems);
        vocab = usize_key(c, "config.json", "vocab_size", &mut problems);
        pad_token_id = c
            .get("pad_token_id")
            .and_then(Value::as_u64)
            .map(|n| n as usize);
    }
    let st_config = read_json(dir, "sentence_bert_config.json", &mut problems, false);
    let tok_config = read_json(dir, "tokenizer_config.json", &mut problems, false);
    let configured = configured_length(st_config.as_ref(), tok_config.as_ref());
    let modules = read_json(dir, "modules.json", &mut problems, false);
    let module_of = |suffix: &str| {
        modules.as_ref().and_then(Value::as_array).and_then(|mods| {
            mods.iter().find(|m| {
                m.get("type")
                    .and_then(Value::as_str)
                    .is_some_and(|t| t.ends_with(suffix))
            })
        })
    };
    let normalize = module_of("Normalize").is_some();
    let pooling_file = module_of("Pooling")
        .and_then(|m| m.get("path").and_then(Value::as_str))
        .filter(|p| !p.is_empty())
        .map_or("1_Pooling/config.json".to_string(), |p| {
            format!("{p}/config.json")
        });
    let pooling = read_json(dir, &pooling_file, &mut problems, false).and_then(|v| {
        read_pooling(&v, &pooling_file)
            .map_err(|e| problems.push(e))
            .ok()
    });
    let st_main = read_json(
        dir,
        "config_sentence_transformers.json",
        &mut problems,
        false,
    );
    let mut prompts = BTreeMap::new();
    let mut default_prompt_name = None;
    if let Some(v) = &st_main {
        match v.get("prompts") {
            None | Some(Value::Null) => {}
            Some(Value::Object(m)) => {
                for (name, text) in m {
                    match text.as_str() {
                        Some("") => {}
                        Some(t) => {
                            prompts.insert(name.clone(), t.to_string());
                        }
                        None => problems.push(format!(
                            "config_sentence_transformers.json: prompt `{name}` must be a string, found {text}"
                        )),
                    }
                }
            }
            Some(other) => problems.push(format!(
                "config_sentence_transformers.json: `prompts` must be an object, found {other}"
            )),
        }
        default_prompt_name = v
            .get("default_prompt_name")
            .and_then(Value::as_str)
            .map(str::to_string);
    }
    let has_weights = dir.join("model.safetensors").is_file();
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
                "{}: embedding dimension {d} differs from config.json hidden_size {h}",
                p.file
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
                source: ModelSource::Folder,
                model_type,
                max_position_embeddings,
                pad_token_id,
                configured_max_tokens: configured.map(|c| c.0),
                configured_from: configured.map(|c| c.1),
                tokenizer_defaults: counter.defaults().clone(),
                specials_per_input: counter.specials_per_input(),
                hidden_size,
                vocab_size,
                tokenizer_vocab_size: counter.vocab_size(),
                pooling,
                normalize,
                prompts,
                default_prompt_name,
                has_weights,
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

#[cfg(test)]
mod tests {
    use super::*;

    fn layouts() -> PathBuf {
        Path::new(env!("CARGO_MANIFEST_DIR")).join("../../tests/fixtures/model-layouts")
    }

    /// What sentence-transformers 6.3 reported when it loaded each fixture folder
    /// (tests/reference/model_layouts.py).
    fn expected() -> Value {
        let p = layouts().join("expected.json");
        serde_json::from_str(&std::fs::read_to_string(&p).unwrap()).unwrap()
    }

    const FOLDERS: &[&str] = &[
        "bert-st6",
        "st2-layout",
        "roberta-st6",
        "xlmr-st6",
        "mpnet-st6",
        "bert-lasttoken",
        "bert-weightedmean",
        "electra-st6",
    ];

    #[test]
    fn every_layout_reads_as_sentence_transformers_reads_it() {
        let all = expected();
        for name in FOLDERS {
            let want = &all[*name];
            let (info, _) =
                inspect(&layouts().join(name)).unwrap_or_else(|e| panic!("{name}: {e}"));
            // sentence-transformers 6.3: model.max_seq_length.
            assert_eq!(
                info.configured_max_tokens,
                want["max_seq_length"].as_u64().map(|n| n as usize),
                "{name}: configured length"
            );
            // get_sentence_embedding_dimension() (one pooling mode: the model width).
            let dim = want["dimension"].as_u64().unwrap() as usize;
            assert_eq!(info.hidden_size, dim, "{name}: width");
            let pooling = info.pooling.as_ref().unwrap();
            assert_eq!(pooling.dimension, Some(dim), "{name}: pooling width");
            // The Pooling module's pooling_mode, in kerf's spelling.
            let st_mode = want["pooling_mode"].as_str().unwrap();
            assert_eq!(
                Some(pooling.mode.as_str()),
                pooling_name(st_mode),
                "{name}: pooling"
            );
            // A Normalize module follows the pooling.
            assert_eq!(
                info.normalize,
                want["normalize"].as_bool().unwrap(),
                "{name}: normalise"
            );
            // model.prompts (empty prompts left out on both sides) and default_prompt_name.
            let prompts: BTreeMap<String, String> =
                serde_json::from_value(want["prompts"].clone()).unwrap();
            assert_eq!(info.prompts, prompts, "{name}: prompts");
            assert_eq!(
                info.default_prompt_name.as_deref(),
                want["default_prompt_name"].as_str(),
                "{name}: default prompt"
            );
            // The tokenizer's specials on an empty input (transformers' fast tokenizer).
            assert_eq!(
                info.specials_per_input as u64,
                want["specials_per_input"].as_u64().unwrap(),
                "{name}: specials"
            );
            assert_eq!(
                info.max_position_embeddings as u64,
                want["max_position_embeddings"].as_u64().unwrap()
            );
        }
    }

    #[test]
    fn the_configured_length_is_read_from_the_file_each_layout_keeps_it_in() {
        let src = |n: &str| inspect(&layouts().join(n)).unwrap().0.configured_from;
        // Older layout (the default model's): sentence_bert_config.json max_seq_length, even
        // though tokenizer_config.json says 512 (all-MiniLM-L6-v2 has both, 256 and 512).
        assert_eq!(src("st2-layout"), Some(LengthSource::SentenceBertConfig));
        // 6.x: tokenizer_config.json model_max_length.
        assert_eq!(src("bert-st6"), Some(LengthSource::TokenizerConfig));
        // transformers writes about 1e30 for "no limit": not a length.
        let huge: Value = serde_json::json!({"model_max_length": 1_000_000_000_000_000_019_884_624_838_656.0_f64});
        assert_eq!(configured_length(None, Some(&huge)), None);
        let kw: Value = serde_json::json!({"processor_kwargs": {"model_max_length": 300}});
        assert_eq!(
            configured_length(Some(&kw), None),
            Some((300, LengthSource::ProcessorKwargs))
        );
    }

    #[test]
    fn roberta_style_families_lose_the_padding_offset() {
        // transformers: RobertaEmbeddings / XLMRobertaEmbeddings number positions from
        // padding_idx + 1 with padding_idx = pad_token_id (1); MPNetEmbeddings fixes
        // padding_idx = 1. So 514 positions hold 512 tokens; BERT keeps all 512.
        for (name, usable) in [
            ("roberta-st6", 512),
            ("xlmr-st6", 512),
            ("mpnet-st6", 512),
            ("bert-st6", 512),
        ] {
            let (info, _) = inspect(&layouts().join(name)).unwrap();
            assert_eq!(info.usable_positions(), usable, "{name}");
        }
        // sentence-transformers reports max_seq_length 514 for the RoBERTa folder (it caps the
        // tokenizer's model_max_length at max_position_embeddings, not at the usable
        // positions); kerf plans with 512.
        let (info, _) = inspect(&layouts().join("roberta-st6")).unwrap();
        assert_eq!(expected()["roberta-st6"]["max_seq_length"], 514);
        assert_eq!(info.default_window(), 512);
    }

    #[test]
    fn the_passage_prompt_is_the_one_put_before_chunks() {
        let (info, _) = inspect(&layouts().join("bert-st6")).unwrap();
        // default_prompt_name is "query": a chunk is a passage, so the passage prompt is used.
        assert_eq!(info.passage_prompt(), Some(("passage", "passage: ")));
        let (info, _) = inspect(&layouts().join("xlmr-st6")).unwrap();
        assert_eq!(info.passage_prompt(), Some(("document", "document: ")));
        let (info, _) = inspect(&layouts().join("roberta-st6")).unwrap();
        assert_eq!(info.passage_prompt(), None);
    }

    #[test]
    fn what_kerf_cannot_run_is_refused_with_every_reason_named() {
        let reasons = |n: &str| {
            inspect(&layouts().join(n))
                .unwrap()
                .0
                .unsupported()
                .join("\n")
        };
        let r = reasons("electra-st6");
        assert!(r.contains("architecture `electra`"), "{r}");
        assert!(r.contains("supported: bert"), "{r}");
        let r = reasons("bert-lasttoken");
        assert!(
            r.contains("1_Pooling/config.json: pooling mode `last-token`"),
            "{r}"
        );
        let r = reasons("bert-weightedmean");
        assert!(r.contains("`weighted-mean`"), "{r}");
        // The fixtures carry no weights.
        assert!(reasons("bert-st6").contains("model.safetensors: missing"));
        let (info, _) = inspect(&layouts().join("electra-st6")).unwrap();
        let e = info.check_runnable().unwrap_err().to_string();
        assert!(e.contains("kerf cannot make vectors"), "{e}");
    }

    #[test]
    fn pooling_configs_of_both_layouts_and_bad_ones() {
        // The older layout: one boolean per mode (all-MiniLM-L6-v2's 1_Pooling/config.json).
        let old = serde_json::json!({"word_embedding_dimension": 384,
            "pooling_mode_cls_token": false, "pooling_mode_mean_tokens": true,
            "pooling_mode_max_tokens": false, "pooling_mode_mean_sqrt_len_tokens": false});
        let p = read_pooling(&old, "1_Pooling/config.json").unwrap();
        assert_eq!((p.mode.as_str(), p.dimension), ("mean", Some(384)));
        // None set reads as mean (sentence-transformers 6.3 pooling.py,
        // _convert_legacy_pooling_kwargs).
        let none = serde_json::json!({"pooling_mode_cls_token": false});
        assert_eq!(read_pooling(&none, "f").unwrap().mode, "mean");
        // Several modes are concatenated by sentence-transformers: refused with their names.
        let two = serde_json::json!({"embedding_dimension": 8, "pooling_mode": ["cls", "mean"]});
        let p = read_pooling(&two, "1_Pooling/config.json").unwrap();
        assert_eq!(p.modes, ["cls", "mean"]);
        assert!(p.unsupported().unwrap().contains("cls + mean"));
        let bad = serde_json::json!({"pooling_mode": "median"});
        let e = read_pooling(&bad, "1_Pooling/config.json").unwrap_err();
        assert!(
            e.contains("1_Pooling/config.json: unknown pooling mode `median`"),
            "{e}"
        );
        let bad = serde_json::json!({"pooling_mode": 3});
        assert!(read_pooling(&bad, "f").is_err());
        let no_prompt = serde_json::json!({"pooling_mode": "mean", "include_prompt": false});
        let p = read_pooling(&no_prompt, "f").unwrap();
        assert!(p.unsupported().unwrap().contains("include_prompt"));
    }

    #[test]
    fn a_malformed_prompts_block_names_its_file() {
        let dir = tempfile::tempdir().unwrap();
        let src = layouts().join("bert-st6");
        for f in ["config.json", "tokenizer.json", "modules.json"] {
            std::fs::copy(src.join(f), dir.path().join(f)).unwrap();
        }
        std::fs::write(
            dir.path().join("config_sentence_transformers.json"),
            r#"{"prompts": {"query": 7}}"#,
        )
        .unwrap();
        let e = inspect(dir.path()).err().unwrap().to_string();
        assert!(
            e.contains("config_sentence_transformers.json: prompt `query` must be a string"),
            "{e}"
        );
    }
}
