//! `kerf profile check|show|new`.
use std::io::Write;
use std::path::{Path, PathBuf};

use anyhow::{Context, Result};
use clap::{Args, Subcommand};

use kerf::embed::{Precision, TokenPooling};
use kerf::model;
use kerf::plan;
use kerf::pool::ChunkPooling;
use kerf::profile::{Boundary, Profile};

#[derive(Subcommand)]
pub enum ProfileCmd {
    /// Parse and validate profiles against their model; exit non-zero on the first bad one.
    Check {
        /// Profile files.
        #[arg(required = true)]
        files: Vec<PathBuf>,
    },
    /// Show a profile as resolved against its model: the real content budget.
    Show {
        /// Profile file.
        file: PathBuf,
    },
    /// Write a new profile.
    New(NewArgs),
}

#[derive(Args)]
pub struct NewArgs {
    /// Name shown in reports.
    #[arg(long, default_value = "my-plan")]
    pub name: String,
    /// Tokens per encoder input, specials included.
    #[arg(long, default_value_t = 256)]
    pub window: usize,
    /// Boundary rule.
    #[arg(long, default_value = "sentence", value_parser = parse_boundary)]
    pub boundary: Boundary,
    /// Overlap in tokens.
    #[arg(long, default_value_t = 0)]
    pub overlap: usize,
    /// Minimum new tokens of a last chunk.
    #[arg(long, default_value_t = 0)]
    pub min_chunk: usize,
    /// Prefix put before every chunk; it may name {title} and {section} (default: the model's
    /// passage or document prompt from config_sentence_transformers.json, if it declares one;
    /// give "" for none).
    #[arg(long)]
    pub prefix: Option<String>,
    /// Tokens kept for a prefix that names {title} or {section} (default 32).
    #[arg(long)]
    pub prefix_limit: Option<usize>,
    /// Headings of this level and above (1 = outermost) start a new chunk; 0: none do.
    #[arg(long, default_value_t = 0)]
    pub heading_breaks: u8,
    /// Token pooling: mean, cls, max.
    #[arg(long, default_value = "mean", value_parser = parse_enum::<TokenPooling>)]
    pub tokens: TokenPooling,
    /// Chunk aggregation: mean, dim-max, token-mean, soft-centroid, first, best, sum.
    #[arg(long, default_value = "mean", value_parser = parse_enum::<ChunkPooling>)]
    pub chunks: ChunkPooling,
    /// Late chunking: tokens the encoder sees in one pass around the chunks it pools (at
    /// least the window, at most the model's positions); 0 encodes each chunk alone.
    #[arg(long, default_value_t = 0)]
    pub context: usize,
    /// Model folder (default: the fetched default model).
    #[arg(long)]
    pub model: Option<PathBuf>,
    /// Write here instead of standard output (refuses to overwrite without --force).
    #[arg(long, short = 'o')]
    pub out: Option<PathBuf>,
    /// Replace an existing file.
    #[arg(long)]
    pub force: bool,
}

/// Parse a kebab-case enum value the way profiles spell it.
pub fn parse_enum<T: serde::de::DeserializeOwned>(s: &str) -> Result<T, String> {
    T::deserialize(serde::de::value::StrDeserializer::<serde::de::value::Error>::new(s))
        .map_err(|e| e.to_string())
}

fn parse_boundary(s: &str) -> Result<Boundary, String> {
    parse_enum(s)
}

fn resolve_file(file: &Path) -> Result<(Profile, plan::ResolvedPlan)> {
    let p = Profile::load(file)?;
    let (info, counter) = model::inspect(&p.model_dir())?;
    let r = plan::resolve(&p, &info, &counter, &file.display().to_string())?;
    Ok((p, r))
}

/// The model's passage prompt, offered as a new profile's prefix (announced on stderr). A model
/// folder that cannot be read offers none: `profile new` does not need a model.
fn model_prompt(model_dir: Option<&Path>) -> String {
    let dir = model_dir.map_or_else(model::default_model_dir, Path::to_path_buf);
    let Ok((info, _)) = model::inspect(&dir) else {
        return String::new();
    };
    match info.passage_prompt() {
        Some((name, text)) => {
            eprintln!(
                "kerf: prefix {text:?}: the model's {name:?} prompt (config_sentence_transformers.json in {}), counted in the window; --prefix \"\" for none",
                dir.display()
            );
            text.to_string()
        }
        None => String::new(),
    }
}

pub fn run(c: ProfileCmd) -> Result<()> {
    let mut out = std::io::stdout().lock();
    match c {
        ProfileCmd::Check { files } => {
            for f in &files {
                let (p, r) = resolve_file(f)?;
                writeln!(
                    out,
                    "{}: ok ({}: window {}, {} content tokens per chunk, boundary {}, overlap {})",
                    f.display(),
                    p.name,
                    r.window,
                    r.budget(),
                    p.cut.boundary.name(),
                    p.cut.overlap
                )?;
            }
        }
        ProfileCmd::Show { file } => {
            let (p, r) = resolve_file(&file)?;
            write!(out, "{}", p.to_toml())?;
            writeln!(out, "\n# resolved against {}", p.model_dir().display())?;
            writeln!(
                out,
                "# window {} = {} special + {} prefix + {} content tokens per chunk",
                r.window,
                r.specials,
                r.prefix_tokens,
                r.budget()
            )?;
            if r.templated() {
                writeln!(
                    out,
                    "# each chunk's prefix names its document or section; it is shortened to fit {} tokens (outer headings first)",
                    r.prefix_tokens
                )?;
            }
            if p.cut.heading_breaks > 0 {
                writeln!(
                    out,
                    "# headings of level 1 to {} start a new chunk (a section under {} tokens may share one with the next)",
                    p.cut.heading_breaks, p.cut.min_chunk
                )?;
            }
            if let Some(late) = p.pool.late() {
                writeln!(
                    out,
                    "# late chunking: passes of up to {} tokens, {} tokens of left context before a pass's first chunk",
                    late.context, late.overlap
                )?;
            }
        }
        ProfileCmd::New(a) => {
            let prefix = match a.prefix {
                Some(p) => p,
                None => model_prompt(a.model.as_deref()),
            };
            let p = Profile {
                name: a.name,
                model: kerf::profile::ModelSection { folder: a.model },
                cut: kerf::profile::CutSection {
                    window: a.window,
                    boundary: a.boundary,
                    overlap: a.overlap,
                    min_chunk: a.min_chunk,
                    prefix,
                    prefix_limit: a.prefix_limit,
                    heading_breaks: a.heading_breaks,
                },
                pool: kerf::profile::PoolSection {
                    tokens: a.tokens,
                    chunks: a.chunks,
                    precision: Precision::F32,
                    context: a.context,
                    ..Default::default()
                },
                ..Profile::default()
            };
            p.validate("new profile")?;
            let text = p.to_toml();
            match a.out {
                Some(path) => {
                    kerf::store::write_atomic(&path, text.as_bytes(), a.force)
                        .with_context(|| format!("saving the profile to {}", path.display()))?;
                    eprintln!("kerf: wrote {}", path.display());
                }
                None => write!(out, "{text}")?,
            }
        }
    }
    Ok(())
}
