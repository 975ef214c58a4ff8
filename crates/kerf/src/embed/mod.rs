//! The encoder stage: text in, one vector per text out.
//!
//! Everything downstream (pooling chunks into documents, comparing with references) talks to
//! the model through the [`Embedder`] trait, so it is tested fast with the model-free
//! [`HashEmbedder`] and run for real with [`BertEmbedder`], a CPU forward pass over a
//! checkpoint of one of the families in [`family`]: BERT (MiniLM, BGE-small, E5-small and
//! GTE-small share it), RoBERTa, XLM-RoBERTa, DistilBERT and MPNet.
mod bert;
pub mod family;
pub use kerf_kernels as kernels;
pub mod mpnet;
pub mod packed;

pub use bert::BertEmbedder;

pub use crate::profile::{Engine, Precision, TokenPooling};

/// Options for building an embedder.
#[derive(Debug, Clone, PartialEq)]
pub struct EmbedOptions {
    /// Token pooling; `None` takes what 1_Pooling/config.json declares (mean when absent).
    pub pooling: Option<TokenPooling>,
    /// L2-normalise; `None` follows modules.json (a Normalize step means yes).
    pub normalize: Option<bool>,
    /// Inputs longer than this (specials included) are truncated as encoders do: the head is
    /// kept and the closing special token restored.
    pub max_input_tokens: usize,
    /// Padded tokens one batch may hold.
    pub max_batch_tokens: usize,
    /// Threads for the matrix products (0: all cores).
    pub threads: usize,
    /// Arithmetic precision.
    pub precision: Precision,
    /// Forward pass.
    pub engine: Engine,
}

impl Default for EmbedOptions {
    fn default() -> Self {
        Self {
            pooling: None,
            normalize: None,
            max_input_tokens: 512,
            max_batch_tokens: 8192,
            threads: 0,
            precision: Precision::F32,
            engine: Engine::Packed,
        }
    }
}

/// Errors from loading or running an encoder; each names the file or tensor concerned.
#[derive(Debug, thiserror::Error)]
pub enum EmbedError {
    /// A model file is missing or unreadable.
    #[error("{path}: {reason}")]
    File {
        /// The file or folder concerned.
        path: std::path::PathBuf,
        /// What is wrong.
        reason: String,
    },
    /// config.json names an architecture this encoder does not run.
    #[error("{path}: architecture `{model_type}` (model_type) is not one kerf's encoder runs; supported: {supported}")]
    Architecture {
        /// The file or folder concerned.
        path: std::path::PathBuf,
        /// The architecture config.json names.
        model_type: String,
        /// The model types kerf runs, comma-separated.
        supported: String,
    },
    /// A weight tensor is missing or has the wrong shape.
    #[error("{path}: tensor `{name}` {problem}")]
    Tensor {
        /// The file or folder concerned.
        path: std::path::PathBuf,
        /// Tensor name.
        name: String,
        /// What is wrong with it.
        problem: String,
    },
    /// Tokenizer and weights disagree.
    #[error("{0}")]
    Mismatch(String),
    /// The requested feature is not available in this build.
    #[error("{0}")]
    Unsupported(String),
    /// The forward pass failed.
    #[error("encoder failed: {0}")]
    Run(String),
    /// The model folder is missing or its files are unusable.
    #[error(transparent)]
    Model(#[from] crate::model::ModelError),
}

/// Cumulative counters of an embedder.
#[derive(Debug, Clone, Copy, Default, PartialEq, serde::Serialize)]
pub struct EmbedStats {
    /// Inputs embedded.
    pub inputs: usize,
    /// Real tokens (specials included).
    pub real_tokens: usize,
    /// Token slots computed including padding.
    pub padded_tokens: usize,
    /// Batches run.
    pub batches: usize,
    /// Seconds in the forward pass.
    pub seconds: f64,
}

/// Content tokens of a text as the encoder's own tokenizer reads it (for late chunking).
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct TokenIds {
    /// Token ids, no special tokens.
    pub ids: Vec<u32>,
    /// Byte range of each token in the text.
    pub offsets: Vec<std::ops::Range<usize>>,
}

/// One encoder pass of late chunking: content ids (the encoder wraps them in its special
/// tokens) and the spans of output rows to pool, counted with the specials (row 0 is the
/// first special token).
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct SpanPass {
    /// Content ids of the pass (prefix included), no specials.
    pub ids: Vec<u32>,
    /// Rows to pool into one vector each; never empty.
    pub spans: Vec<std::ops::Range<usize>>,
}

/// Something that turns texts into vectors.
pub trait Embedder: Send + Sync {
    /// Width of the vectors.
    fn dim(&self) -> usize;
    /// Stable identifier of weights, tokenizer and settings, for cache keys.
    fn fingerprint(&self) -> String;
    /// One vector per text, in input order.
    fn embed(&self, texts: &[&str]) -> Result<Vec<Vec<f32>>, EmbedError>;
    /// Tokens the encoder would see for a text, specials included, before truncation.
    fn count_tokens(&self, text: &str) -> Result<usize, EmbedError>;
    /// Counters so far.
    fn stats(&self) -> EmbedStats;
    /// Content tokens of `text` with byte offsets, or `None` when this embedder cannot show
    /// its token outputs (then late chunking is not available with it).
    fn token_ids(&self, _text: &str) -> Result<Option<TokenIds>, EmbedError> {
        Ok(None)
    }
    /// Special tokens the encoder puts before and after the content of every input.
    fn specials(&self) -> (usize, usize) {
        (1, 1)
    }
    /// Most tokens one input may hold, specials included.
    fn max_input_tokens(&self) -> usize {
        512
    }
    /// Run each pass through the encoder once and pool each of its spans of output rows with
    /// the embedder's token pooling and normalisation: `out[pass][span]`.
    fn embed_spans(&self, _passes: &[SpanPass]) -> Result<Vec<Vec<Vec<f32>>>, EmbedError> {
        Err(EmbedError::Unsupported(
            "this encoder does not expose its token outputs, so it cannot pool spans of a longer pass (late chunking)".into(),
        ))
    }
}

/// Deterministic, model-free embedder for tests: hashed bag of lower-case words, L2-normalised.
pub struct HashEmbedder {
    /// Width of the vectors.
    pub dim: usize,
}

impl Embedder for HashEmbedder {
    fn dim(&self) -> usize {
        self.dim
    }
    fn fingerprint(&self) -> String {
        format!("hash-{}", self.dim)
    }
    fn embed(&self, texts: &[&str]) -> Result<Vec<Vec<f32>>, EmbedError> {
        Ok(texts
            .iter()
            .map(|t| self.bag(words(t).map(|(_, w)| hash_word(w))))
            .collect())
    }
    fn count_tokens(&self, text: &str) -> Result<usize, EmbedError> {
        Ok(text.split_whitespace().count() + 2)
    }
    fn stats(&self) -> EmbedStats {
        EmbedStats::default()
    }
    fn token_ids(&self, text: &str) -> Result<Option<TokenIds>, EmbedError> {
        // Words are the tokens; an id is the word's hash, so a row depends on its word alone.
        let (offsets, ids) = words(text)
            .map(|(at, w)| (at..at + w.len(), hash_word(w)))
            .unzip();
        Ok(Some(TokenIds { ids, offsets }))
    }
    fn embed_spans(&self, passes: &[SpanPass]) -> Result<Vec<Vec<Vec<f32>>>, EmbedError> {
        // Specials (row 0 and the rows after the ids) add nothing, so the pooled span is the
        // hashed bag of its words, as [`Embedder::embed`] gives for the span's text.
        Ok(passes
            .iter()
            .map(|p| {
                p.spans
                    .iter()
                    .map(|span| {
                        self.bag(span.clone().filter_map(|row| {
                            row.checked_sub(1).and_then(|k| p.ids.get(k)).copied()
                        }))
                    })
                    .collect()
            })
            .collect())
    }
}

impl HashEmbedder {
    /// The L2-normalised signed count vector of word ids.
    fn bag(&self, ids: impl Iterator<Item = u32>) -> Vec<f32> {
        let mut v = vec![0f32; self.dim];
        for id in ids {
            v[id as usize % self.dim] += if id >> 31 == 0 { 1.0 } else { -1.0 };
        }
        crate::pool::normalize(v)
    }
}

/// The words of a text (runs of alphanumeric characters) with their byte offsets.
fn words(text: &str) -> impl Iterator<Item = (usize, &str)> {
    text.split(|c: char| !c.is_alphanumeric())
        .filter(|w| !w.is_empty())
        .map(move |w| (w.as_ptr() as usize - text.as_ptr() as usize, w))
}

/// FNV-1a of a lower-cased word, folded to 32 bits.
fn hash_word(w: &str) -> u32 {
    let h = w
        .to_lowercase()
        .bytes()
        .fold(0xcbf29ce484222325u64, |h, b| {
            (h ^ b as u64).wrapping_mul(0x100000001b3)
        });
    (h ^ (h >> 32)) as u32
}
