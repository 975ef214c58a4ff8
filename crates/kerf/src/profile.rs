//! Profiles: the whole plan (model, window, boundary rule, overlap, pooling) as a TOML file.
//!
//! Parsing is strict (unknown keys are errors with line and column) and kept apart from loading
//! from disk so tests never need files. Checks that need no model run in [`Profile::validate`];
//! checks against the model's limits run when the plan is resolved in [`crate::plan`].
//!
//! The plan's choices (boundary rule, token pooling, chunk aggregation, precision, engine) are
//! plain data defined here; the stages that carry them out (split, pool, embed) import them,
//! never the reverse.
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

/// The profile schema this build reads and writes.
pub const SCHEMA_VERSION: u32 = 1;

/// Where chunk boundaries may fall.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize, Hash)]
#[serde(rename_all = "kebab-case")]
pub enum Boundary {
    /// Only the first window of each document: what a truncating encoder does.
    Head,
    /// Fixed token windows (cut at word starts where a word allows).
    Token,
    /// Whole sentences packed up to the budget.
    #[default]
    Sentence,
    /// Whole paragraphs packed up to the budget, falling back to sentences, then words.
    Paragraph,
}

impl Boundary {
    /// Every rule, in the order a user would step through them.
    pub const ALL: [Boundary; 4] = [
        Boundary::Head,
        Boundary::Token,
        Boundary::Sentence,
        Boundary::Paragraph,
    ];
    /// The profile spelling.
    pub fn name(self) -> &'static str {
        match self {
            Boundary::Head => "head",
            Boundary::Token => "token",
            Boundary::Sentence => "sentence",
            Boundary::Paragraph => "paragraph",
        }
    }
}

/// How token vectors inside one input become one vector.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize, Hash)]
#[serde(rename_all = "kebab-case")]
pub enum TokenPooling {
    /// Average over the attention mask, specials included (the sentence-embedding default).
    #[default]
    Mean,
    /// The first (`[CLS]`) token's vector.
    Cls,
    /// Per-dimension maximum over the tokens.
    Max,
}

/// Arithmetic of the forward pass.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize, Hash)]
#[serde(rename_all = "kebab-case")]
pub enum Precision {
    /// 32-bit floats.
    #[default]
    F32,
    /// bfloat16 weights with f32 arithmetic: the accuracy of bf16, not yet its speed (no kernel
    /// for bf16 dot-product instructions; notes/encoder-speed.md).
    Bf16,
    /// 8-bit weights (per output column) and activations (per row, quantised as they arrive)
    /// with 32-bit integer sums, in the dense layers; attention stays f32.
    Int8,
}

impl Precision {
    /// Every precision, widest first.
    pub const ALL: [Precision; 3] = [Precision::F32, Precision::Bf16, Precision::Int8];

    /// The name profiles use.
    pub fn name(self) -> &'static str {
        match self {
            Precision::F32 => "f32",
            Precision::Bf16 => "bf16",
            Precision::Int8 => "int8",
        }
    }
}

/// Which forward pass runs the model.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize, Hash)]
#[serde(rename_all = "kebab-case")]
pub enum Engine {
    /// kerf's padding-free packed forward pass (the default).
    #[default]
    Packed,
    /// candle-transformers' stock BERT, padded batches: the correctness reference.
    Candle,
}

/// How chunk vectors of one document are combined.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize, Hash)]
#[serde(rename_all = "kebab-case")]
pub enum ChunkPooling {
    /// Mean of the chunk vectors.
    #[default]
    Mean,
    /// Per-dimension maximum.
    DimMax,
    /// Mean weighted by the tokens each chunk adds (overlap counted once).
    TokenMean,
    /// Each chunk weighs by softmax(cosine to the plain mean / temperature): chunks near the
    /// document's centre count more; an attention-free weighting.
    SoftCentroid,
    /// First chunk only (FirstP).
    First,
    /// Score = the best chunk's cosine (MaxP).
    Best,
    /// Score = the sum of chunk cosines (SumP).
    Sum,
}

impl ChunkPooling {
    /// Every aggregation, in the order a user steps through them.
    pub const ALL: [ChunkPooling; 7] = [
        ChunkPooling::Mean,
        ChunkPooling::DimMax,
        ChunkPooling::TokenMean,
        ChunkPooling::SoftCentroid,
        ChunkPooling::First,
        ChunkPooling::Best,
        ChunkPooling::Sum,
    ];
    /// The profile spelling.
    pub fn name(self) -> &'static str {
        match self {
            ChunkPooling::Mean => "mean",
            ChunkPooling::DimMax => "dim-max",
            ChunkPooling::TokenMean => "token-mean",
            ChunkPooling::SoftCentroid => "soft-centroid",
            ChunkPooling::First => "first",
            ChunkPooling::Best => "best",
            ChunkPooling::Sum => "sum",
        }
    }
    /// True for scorings that give no single document vector.
    pub fn is_scoring(self) -> bool {
        matches!(self, ChunkPooling::Best | ChunkPooling::Sum)
    }
}

/// Errors from reading or checking a profile.
#[derive(Debug, thiserror::Error)]
pub enum ProfileError {
    /// The file could not be read.
    #[error("{path}: cannot read profile: {source}")]
    Read {
        /// The file or folder concerned.
        path: PathBuf,
        /// What the operating system or library said.
        source: std::io::Error,
    },
    /// TOML syntax or an unknown/mistyped key (the message carries line and column).
    #[error("{origin}: {message}")]
    Parse {
        /// Where it came from (file, or a label).
        origin: String,
        /// What is wrong.
        message: String,
    },
    /// A value that cannot work.
    #[error("{origin}: {message}")]
    Invalid {
        /// Where it came from (file, or a label).
        origin: String,
        /// What is wrong.
        message: String,
    },
}

/// `[model]`: which model folder to use.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ModelSection {
    /// Model folder; absent means the default model fetched by scripts/fetch-model. Relative
    /// paths are taken from the profile file's folder; `~/` is the home folder.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub folder: Option<PathBuf>,
}

/// `[cut]`: how documents become chunks.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CutSection {
    /// Tokens per encoder input, special tokens and prefix included.
    pub window: usize,
    /// Where chunk boundaries may fall.
    #[serde(default)]
    pub boundary: Boundary,
    /// Tokens each chunk shares with the one before (honoured at the boundary rule's level).
    #[serde(default)]
    pub overlap: usize,
    /// A final chunk with fewer new tokens than this is merged into, or extended over, the one before.
    #[serde(default)]
    pub min_chunk: usize,
    /// Text put before every chunk (some models expect one); its tokens count against the window.
    /// It may name `{title}` and `{section}` (see `kerf::prefix`).
    #[serde(default, skip_serializing_if = "String::is_empty")]
    pub prefix: String,
    /// Tokens kept for a prefix that names `{title}` or `{section}` (each chunk's rendered
    /// prefix is shortened to fit); unset: `prefix::DEFAULT_LIMIT`. A fixed prefix takes its own
    /// count.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub prefix_limit: Option<usize>,
    /// Headings of this level and above (1 = outermost) start a new chunk: no chunk crosses
    /// one, unless the section before it is shorter than `min_chunk`. 0: headings are text
    /// like any other.
    #[serde(default, skip_serializing_if = "is_zero_u8")]
    pub heading_breaks: u8,
}

fn is_zero_u8(n: &u8) -> bool {
    *n == 0
}

impl Default for CutSection {
    fn default() -> Self {
        Self {
            window: 256,
            boundary: Boundary::Sentence,
            overlap: 0,
            min_chunk: 0,
            prefix: String::new(),
            prefix_limit: None,
            heading_breaks: 0,
        }
    }
}

/// `[pool]`: how token vectors become chunk vectors, and chunk vectors a document's.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PoolSection {
    /// Token pooling inside a chunk.
    #[serde(default)]
    pub tokens: TokenPooling,
    /// Chunk aggregation into a document score or vector.
    #[serde(default)]
    pub chunks: ChunkPooling,
    /// Temperature of the soft-centroid weighting (ignored by the other aggregations).
    #[serde(default = "default_temperature")]
    pub temperature: f32,
    /// Arithmetic of the encoder's forward pass.
    #[serde(default)]
    pub precision: Precision,
    /// Late chunking: tokens the encoder sees in one pass around the chunks it pools (specials
    /// and prefix included; at most the model's positions). 0 encodes each chunk alone.
    #[serde(default, skip_serializing_if = "is_zero")]
    pub context: usize,
    /// Late chunking: tokens of left context a pass keeps before its first chunk when a
    /// document needs more than one pass.
    #[serde(
        default = "default_context_overlap",
        skip_serializing_if = "is_default_context_overlap"
    )]
    pub context_overlap: usize,
}

fn default_temperature() -> f32 {
    0.1
}

fn is_zero(n: &usize) -> bool {
    *n == 0
}

/// Left context a late-chunking pass keeps by default.
pub const DEFAULT_CONTEXT_OVERLAP: usize = 64;

fn default_context_overlap() -> usize {
    DEFAULT_CONTEXT_OVERLAP
}

fn is_default_context_overlap(n: &usize) -> bool {
    *n == DEFAULT_CONTEXT_OVERLAP
}

impl PoolSection {
    /// The late-chunking settings, or `None` when each chunk is encoded alone.
    pub fn late(&self) -> Option<crate::late::LateOptions> {
        (self.context > 0).then_some(crate::late::LateOptions {
            context: self.context,
            overlap: self.context_overlap,
        })
    }
}

/// Which encoder a vector comes from: a plan's token pooling and arithmetic. Two plans with the
/// same encoding share chunk vectors for the same input text.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct Encoding {
    /// Token pooling.
    pub pooling: TokenPooling,
    /// Arithmetic of the forward pass.
    pub precision: Precision,
}

impl Encoding {
    /// The encoding a profile asks for.
    pub fn of(profile: &Profile) -> Self {
        Self {
            pooling: profile.pool.tokens,
            precision: profile.pool.precision,
        }
    }
}

impl Default for PoolSection {
    fn default() -> Self {
        Self {
            tokens: TokenPooling::Mean,
            chunks: ChunkPooling::Mean,
            temperature: default_temperature(),
            precision: Precision::F32,
            context: 0,
            context_overlap: DEFAULT_CONTEXT_OVERLAP,
        }
    }
}

/// A whole plan.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Profile {
    /// Schema version; must equal [`SCHEMA_VERSION`].
    pub schema: u32,
    /// Short name shown in reports.
    #[serde(default)]
    pub name: String,
    /// One line on what the plan is for.
    #[serde(default, skip_serializing_if = "String::is_empty")]
    pub about: String,
    /// Model folder.
    #[serde(default)]
    pub model: ModelSection,
    /// Cutting rules.
    pub cut: CutSection,
    /// Pooling rules.
    #[serde(default)]
    pub pool: PoolSection,
}

impl Default for Profile {
    fn default() -> Self {
        Self {
            schema: SCHEMA_VERSION,
            name: "sentences-256".into(),
            about: String::new(),
            model: ModelSection::default(),
            cut: CutSection::default(),
            pool: PoolSection::default(),
        }
    }
}

impl Profile {
    /// Parse and validate TOML text; `origin` names the source in messages.
    pub fn from_toml_str(text: &str, origin: &str) -> Result<Self, ProfileError> {
        // Read the schema first so an old or future file gets a message about its version, not
        // about whichever key changed.
        if let Ok(table) = text.parse::<toml::Table>() {
            match table.get("schema") {
                Some(toml::Value::Integer(v)) if *v != SCHEMA_VERSION as i64 => {
                    return Err(ProfileError::Invalid {
                        origin: origin.into(),
                        message: format!(
                            "profile schema {v} is not supported by this kerf (it reads schema {SCHEMA_VERSION})"
                        ),
                    })
                }
                None => {
                    return Err(ProfileError::Invalid {
                        origin: origin.into(),
                        message: format!("missing `schema = {SCHEMA_VERSION}` at the top of the profile"),
                    })
                }
                _ => {}
            }
        }
        let profile: Profile = toml::from_str(text).map_err(|e| ProfileError::Parse {
            origin: origin.into(),
            message: describe_toml_error(text, &e),
        })?;
        profile.validate(origin)?;
        Ok(profile)
    }

    /// Read, parse and validate a profile file. A relative model folder is resolved against the
    /// profile's own folder.
    pub fn load(path: &Path) -> Result<Self, ProfileError> {
        let text = std::fs::read_to_string(path).map_err(|source| ProfileError::Read {
            path: path.to_path_buf(),
            source,
        })?;
        let mut p = Self::from_toml_str(&text, &path.display().to_string())?;
        if let Some(folder) = &p.model.folder {
            p.model.folder = Some(resolve_folder(folder, path.parent()));
        }
        Ok(p)
    }

    /// Checks that need no model: sizes, ranges, names.
    pub fn validate(&self, origin: &str) -> Result<(), ProfileError> {
        let bad = |message: String| {
            Err(ProfileError::Invalid {
                origin: origin.into(),
                message,
            })
        };
        if self.schema != SCHEMA_VERSION {
            return bad(format!(
                "schema {} is not supported (expected {SCHEMA_VERSION})",
                self.schema
            ));
        }
        let c = &self.cut;
        if c.window == 0 {
            return bad("[cut] window must be at least 1 token".into());
        }
        if c.overlap >= c.window {
            return bad(format!(
                "[cut] overlap ({}) must be smaller than the window ({})",
                c.overlap, c.window
            ));
        }
        if c.min_chunk >= c.window {
            return bad(format!(
                "[cut] min_chunk ({}) must be smaller than the window ({})",
                c.min_chunk, c.window
            ));
        }
        if c.heading_breaks > 6 {
            return bad(format!(
                "[cut] heading_breaks ({}) is a heading level: 1 (outermost) to 6, or 0 for none",
                c.heading_breaks
            ));
        }
        if c.boundary == Boundary::Head && c.overlap > 0 {
            return bad("[cut] overlap has no meaning with boundary = \"head\" (one chunk per document); set it to 0".into());
        }
        let p = &self.pool;
        if p.context > 0 {
            if p.context < c.window {
                return bad(format!(
                    "[pool] context ({}) must be at least the window ({}): late chunking encodes each chunk inside a longer pass (0 encodes chunks alone)",
                    p.context, c.window
                ));
            }
            if p.tokens == TokenPooling::Cls {
                return bad("[pool] context needs tokens = \"mean\" or \"max\": late chunking pools each chunk's own token rows, and a chunk has no [CLS] row of its own".into());
            }
            if p.context_overlap >= p.context / 2 {
                return bad(format!(
                    "[pool] context_overlap ({}) must be below half the context ({})",
                    p.context_overlap, p.context
                ));
            }
        }
        let t = self.pool.temperature;
        if !(t.is_finite() && t > 0.0) {
            return bad(format!(
                "[pool] temperature must be a positive number, found {t}"
            ));
        }
        Ok(())
    }

    /// The model folder this profile names, or the default one.
    pub fn model_dir(&self) -> PathBuf {
        self.model
            .folder
            .clone()
            .unwrap_or_else(crate::home::default_model_dir)
    }

    /// Serialise as TOML (round-trips through [`Profile::from_toml_str`]).
    pub fn to_toml(&self) -> String {
        let body = toml::to_string_pretty(self).expect("a profile always serialises");
        format!(
            "# kerf profile: the whole plan for cutting, embedding and pooling a corpus.\n{body}"
        )
    }
}

/// Expand `~/` and make a relative folder relative to `base`.
pub fn resolve_folder(folder: &Path, base: Option<&Path>) -> PathBuf {
    if let Ok(rest) = folder.strip_prefix("~") {
        if let Some(home) = std::env::var_os("HOME") {
            return PathBuf::from(home).join(rest);
        }
    }
    match base {
        Some(b) if folder.is_relative() && !b.as_os_str().is_empty() => b.join(folder),
        _ => folder.to_path_buf(),
    }
}

/// A toml error as "line L, column C: message".
fn describe_toml_error(text: &str, e: &toml::de::Error) -> String {
    let msg = e.message().trim().to_string();
    match e.span() {
        Some(span) => {
            let before = &text[..span.start.min(text.len())];
            let line = before.matches('\n').count() + 1;
            let col = before
                .rsplit('\n')
                .next()
                .map(|l| l.chars().count())
                .unwrap_or(0)
                + 1;
            format!("line {line}, column {col}: {msg}")
        }
        None => msg,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const GOOD: &str = r#"
schema = 1
name = "t"
[cut]
window = 128
boundary = "token"
overlap = 32
"#;

    #[test]
    fn parses_and_fills_defaults() {
        let p = Profile::from_toml_str(GOOD, "good").unwrap();
        assert_eq!(p.cut.window, 128);
        assert_eq!(p.cut.boundary, Boundary::Token);
        assert_eq!(p.cut.overlap, 32);
        assert_eq!(p.pool.chunks, ChunkPooling::Mean);
        assert_eq!(p.pool.tokens, TokenPooling::Mean);
    }

    #[test]
    fn round_trips() {
        let mut p = Profile::from_toml_str(GOOD, "good").unwrap();
        p.cut.prefix = "passage: ".into();
        p.model.folder = Some(PathBuf::from("/models/x"));
        let again = Profile::from_toml_str(&p.to_toml(), "again").unwrap();
        assert_eq!(p, again);
    }

    #[test]
    fn unknown_key_names_line_and_column() {
        let text = "schema = 1\n[cut]\nwindow = 128\nstrides = 3\n";
        let e = Profile::from_toml_str(text, "p.toml")
            .unwrap_err()
            .to_string();
        assert!(e.starts_with("p.toml: line 4, column 1"), "{e}");
        assert!(e.contains("strides"), "{e}");
    }

    #[test]
    fn rejects_bad_values() {
        let cases = [
            (
                "schema = 1\n[cut]\nwindow = 0\n",
                "window must be at least 1",
            ),
            (
                "schema = 1\n[cut]\nwindow = 64\noverlap = 64\n",
                "overlap (64) must be smaller",
            ),
            (
                "schema = 1\n[cut]\nwindow = 64\nmin_chunk = 70\n",
                "min_chunk (70)",
            ),
            (
                "schema = 2\n[cut]\nwindow = 64\n",
                "schema 2 is not supported",
            ),
            ("[cut]\nwindow = 64\n", "missing `schema = 1`"),
            (
                "schema = 1\n[cut]\nwindow = 64\nboundary = \"words\"\n",
                "unknown variant",
            ),
            (
                "schema = 1\n[cut]\nwindow = 64\n[pool]\ntemperature = 0.0\n",
                "temperature",
            ),
            ("schema = 1\n[cut]\nwindow = -3\n", "line 3"),
        ];
        for (text, want) in cases {
            let e = Profile::from_toml_str(text, "x").unwrap_err().to_string();
            assert!(e.contains(want), "{text:?} gave {e:?}, wanted {want:?}");
        }
    }

    #[test]
    fn relative_model_folder_follows_the_profile() {
        assert_eq!(
            resolve_folder(Path::new("m"), Some(Path::new("/p"))),
            PathBuf::from("/p/m")
        );
        assert_eq!(
            resolve_folder(Path::new("/abs"), Some(Path::new("/p"))),
            PathBuf::from("/abs")
        );
    }
}
