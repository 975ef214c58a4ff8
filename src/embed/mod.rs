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
