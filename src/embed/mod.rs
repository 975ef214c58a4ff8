//! Encoder front (placeholder until the CPU encoder lands).

/// How token vectors inside one input become one vector.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum TokenPooling {
    #[default]
    Mean,
    Cls,
    Max,
}

/// Numeric precision of the encoder's forward pass.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Precision {
    #[default]
    F32,
    Bf16,
    Int8,
}

/// Errors from an encoder.
#[derive(Debug, thiserror::Error)]
pub enum EmbedError {
    /// The requested feature is not available.
    #[error("{0}")]
    Unsupported(String),
}

/// Cumulative counters of an embedder.
#[derive(Debug, Clone, Copy, Default, PartialEq, serde::Serialize)]
pub struct EmbedStats {
    pub inputs: usize,
    pub real_tokens: usize,
    pub padded_tokens: usize,
    pub batches: usize,
    pub seconds: f64,
}

/// Something that turns texts into vectors.
pub trait Embedder: Send + Sync {
    fn dim(&self) -> usize;
    fn fingerprint(&self) -> String;
    fn embed(&self, texts: &[&str]) -> Result<Vec<Vec<f32>>, EmbedError>;
    fn count_tokens(&self, text: &str) -> Result<usize, EmbedError>;
    fn stats(&self) -> EmbedStats;
}

/// Deterministic, model-free embedder for tests: hashed bag of lowercase words.
pub struct HashEmbedder {
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
            .map(|t| {
                let mut v = vec![0f32; self.dim];
                for w in t
                    .split(|c: char| !c.is_alphanumeric())
                    .filter(|w| !w.is_empty())
                {
                    let h = w
                        .to_lowercase()
                        .bytes()
                        .fold(1469598103934665603u64, |h, b| {
                            (h ^ b as u64).wrapping_mul(1099511628211)
                        });
                    v[(h % self.dim as u64) as usize] += if h >> 63 == 0 { 1.0 } else { -1.0 };
                }
                crate::pool::normalize(v)
            })
            .collect())
    }
    fn count_tokens(&self, text: &str) -> Result<usize, EmbedError> {
        Ok(text.split_whitespace().count() + 2)
    }
    fn stats(&self) -> EmbedStats {
        EmbedStats::default()
    }
}
