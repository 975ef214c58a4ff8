//! Command-line glue: arguments become a validated run configuration, then the library runs.
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

use anyhow::{Context, Result};
use clap::{Args, Parser, Subcommand};

use kerf::corpus::{DocStream, InputOptions};
use kerf::model::{self, ModelInfo};
use kerf::plan::{self, ResolvedPlan};
use kerf::profile::Profile;
use kerf::tokens::TokenCounter;

mod comparecmd;
mod cut;
mod embed;
mod explore;
mod modelcmd;
mod probing;
mod profilecmd;
mod survey;
mod sweepcmd;
mod textcmd;

#[derive(Parser)]
#[command(
    name = "kerf",
    version,
    about = "Plan how long documents are cut, embedded and pooled for windowed encoders"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Read a model folder and report its limits.
    Model(modelcmd::ModelArgs),
    /// Census of a corpus against the model's window: tokens, overflow, long sentences.
    Survey(survey::SurveyArgs),
    /// Cut documents into chunks that fit the window; writes JSONL.
    Cut(cut::CutArgs),
    /// Print the text kerf reads from documents (for HTML and PDF, the extracted text chunk
    /// byte ranges refer to), or with --jsonl each document's text, headings and pages.
    Text(textcmd::TextArgs),
    /// Embed every chunk on CPU and write vectors (NumPy .npy or Parquet) with a manifest.
    Embed(embed::EmbedArgs),
    /// Compare plans against reference texts: rankings, metrics, shifts against the baseline.
    Compare(comparecmd::CompareArgs),
    /// Sweep a grid of plans: quality against cost, the Pareto front, a recommended profile.
    Sweep(sweepcmd::SweepArgs),
    /// The planning terminal UI: budgets, chunk boundaries and similarity shifts, live.
    Explore(explore::ExploreArgs),
    /// Check, show or create profiles.
    #[command(subcommand)]
    Profile(profilecmd::ProfileCmd),
}

/// Inputs shared by every command that reads a corpus.
#[derive(Args, Clone)]
pub struct InputArgs {
    /// Files, folders (walked for .txt, .md, .html, .jsonl) or `-` for standard input.
    #[arg(required = true)]
    pub paths: Vec<PathBuf>,
    /// JSONL field holding the text.
    #[arg(long, default_value = "text")]
    pub text_field: String,
    /// JSONL field holding the document id.
    #[arg(long, default_value = "id")]
    pub id_field: String,
    /// Read standard input as JSONL instead of one document.
    #[arg(long)]
    pub stdin_jsonl: bool,
    /// Replace invalid UTF-8 with U+FFFD instead of stopping.
    #[arg(long)]
    pub lossy: bool,
    /// Leave out JSONL lines that are not usable documents (each reported on stderr with its
    /// line number) instead of stopping at the first.
    #[arg(long)]
    pub skip_broken_lines: bool,
    /// The JSONL text field holds HTML: extract its text and headings as for .html files.
    #[arg(long)]
    pub html_fields: bool,
    /// Keep what kerf leaves out of HTML as page chrome: navigation, site headers and
    /// footers, sidebars (scripts and styles are never text).
    #[arg(long)]
    pub html_keep_chrome: bool,
}

impl InputArgs {
    /// The inputs by file or folder name, for titles ("demo-texts", "a.txt, b.txt").
    pub fn label(&self) -> String {
        self.paths
            .iter()
            .map(|p| {
                p.file_name().map_or_else(
                    || p.display().to_string(),
                    |n| n.to_string_lossy().into_owned(),
                )
            })
            .collect::<Vec<_>>()
            .join(", ")
    }

    /// The reading options these flags ask for.
    pub fn options(&self) -> InputOptions {
        InputOptions {
            text_field: self.text_field.clone(),
            id_field: self.id_field.clone(),
            lossy: self.lossy,
            stdin_jsonl: self.stdin_jsonl,
            skip_broken_lines: self.skip_broken_lines,
            html_fields: self.html_fields,
            html_keep_chrome: self.html_keep_chrome,
            ..InputOptions::default()
        }
    }

    fn open(&self) -> Result<DocStream> {
        Ok(DocStream::open(&self.paths, self.options())?)
    }
}

/// The plan a command runs under: profile plus model override.
#[derive(Args, Clone)]
pub struct PlanArgs {
    /// Profile (TOML) with the plan.
    #[arg(long, short = 'p')]
    pub profile: Option<PathBuf>,
    /// Model folder (overrides the profile's).
    #[arg(long)]
    pub model: Option<PathBuf>,
}

/// A profile resolved against its loaded model.
pub struct Loaded {
    pub info: ModelInfo,
    pub counter: TokenCounter,
    pub plan: ResolvedPlan,
}

/// Load the profile (or `fallback` when none is given), the model, and resolve.
pub fn load_plan(args: &PlanArgs, fallback: impl FnOnce(&ModelInfo) -> Profile) -> Result<Loaded> {
    let mut profile = match &args.profile {
        Some(p) => Some(Profile::load(p)?),
        None => None,
    };
    let dir = args
        .model
        .clone()
        .or_else(|| profile.as_ref().and_then(|p| p.model.folder.clone()))
        .unwrap_or_else(model::default_model_dir);
    let (info, counter) = model::inspect(&dir)?;
    let origin = args
        .profile
        .as_ref()
        .map(|p| p.display().to_string())
        .unwrap_or_else(|| "plan".into());
    let profile = profile.take().unwrap_or_else(|| fallback(&info));
    let plan = plan::resolve(&profile, &info, &counter, &origin)?;
    Ok(Loaded {
        info,
        counter,
        plan,
    })
}

/// Plan with a bare tokenizer.json and a window the user gives (`--tokenizer FILE --window N`):
/// the profile (or `fallback`) is resolved against the tokenizer's limits, its window set to N.
/// Counting and cutting work; no vectors can be made.
pub fn load_plan_tokenizer(
    profile: Option<&Path>,
    tokenizer: &Path,
    window: usize,
    fallback: impl FnOnce(&ModelInfo) -> Profile,
) -> Result<Loaded> {
    if window == 0 {
        anyhow::bail!("--window must be a positive number of tokens");
    }
    let counter = TokenCounter::from_file(tokenizer)?;
    let info = ModelInfo::tokenizer_only(tokenizer, &counter, window);
    let mut profile = match profile {
        Some(p) => Profile::load(p)?,
        None => fallback(&info),
    };
    profile.cut.window = window;
    let origin = profile_origin(profile.name.as_str(), tokenizer);
    let plan = plan::resolve(&profile, &info, &counter, &origin)?;
    Ok(Loaded {
        info,
        counter,
        plan,
    })
}

fn profile_origin(name: &str, tokenizer: &Path) -> String {
    format!("plan {name} with tokenizer {}", tokenizer.display())
}

/// What a report says when only a tokenizer was given.
pub const NO_VECTORS_NOTE: &str =
    "tokenizer only: kerf can count and cut with it but cannot make vectors (no model to run)";

/// The encoder for a resolved plan. Chunks always fit their window, so the encoder's own
/// truncation is set to the position limit: vectors (and cache entries) are then shared by
/// every plan whatever its window.
pub fn load_embedder(
    loaded: &Loaded,
    enc: &embed::EncoderArgs,
) -> Result<std::sync::Arc<dyn kerf::embed::Embedder>> {
    loaded.info.check_runnable()?;
    let p = &loaded.plan.profile;
    let opts = kerf::embed::EmbedOptions {
        pooling: Some(p.pool.tokens),
        normalize: None,
        max_input_tokens: loaded.info.usable_positions(),
        max_batch_tokens: enc.batch_tokens,
        threads: enc.threads,
        precision: p.pool.precision,
        engine: enc.engine,
    };
    Ok(std::sync::Arc::new(kerf::embed::BertEmbedder::from_model(
        &loaded.info,
        &opts,
    )?))
}

/// Print notices (skipped files, empty documents) to stderr.
pub fn report_notices(notices: &[kerf::corpus::Notice]) {
    for n in notices {
        eprintln!("kerf: note: {}: {}", n.origin, n.message);
    }
}

/// Write to stdout, or atomically to a file.
pub fn open_output(out: Option<&Path>, force: bool) -> Result<Box<dyn OutputSink>> {
    Ok(match out {
        Some(p) => Box::new(kerf::store::AtomicFile::create(p, force)?),
        None => Box::new(std::io::BufWriter::new(std::io::stdout().lock())),
    })
}

/// An output that may need a final commit.
pub trait OutputSink: Write {
    /// Finish the output (rename a temporary file into place).
    fn finish(self: Box<Self>) -> Result<()>;
}

impl OutputSink for kerf::store::AtomicFile {
    fn finish(self: Box<Self>) -> Result<()> {
        Ok((*self).commit()?)
    }
}

impl<W: Write> OutputSink for std::io::BufWriter<W> {
    fn finish(mut self: Box<Self>) -> Result<()> {
        self.flush().context("writing to standard output")
    }
}

fn is_broken_pipe(e: &anyhow::Error) -> bool {
    e.chain().any(|c| {
        c.downcast_ref::<std::io::Error>()
            .is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe)
    })
}

/// A face ended by SIGINT, SIGTERM or SIGHUP after cleaning up (the explorer); reported without
/// "error" and with exit 130, like a stopped job.
#[derive(Debug)]
pub struct Interrupted {
    /// The command that stopped.
    pub what: &'static str,
    /// What of its work is kept.
    pub kept: &'static str,
}

impl std::fmt::Display for Interrupted {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{} stopped by a signal; {}", self.what, self.kept)
    }
}

impl std::error::Error for Interrupted {}

fn is_interrupted(e: &anyhow::Error) -> bool {
    e.chain().any(|c| c.downcast_ref::<Interrupted>().is_some())
}

fn is_stopped(e: &anyhow::Error) -> bool {
    e.chain().any(|c| {
        matches!(
            c.downcast_ref::<kerf::job::JobError>(),
            Some(kerf::job::JobError::Stopped)
        )
    })
}

/// What the user can do about a library error, in this binary's flags (the library's messages
/// say what is wrong; only the faces know their options).
fn hint(e: &(dyn std::error::Error + 'static)) -> &'static str {
    use kerf::cache::CacheError;
    use kerf::corpus::CorpusError;
    use kerf::job::JobError;
    use kerf::store::StoreError;
    fn corpus(e: &CorpusError) -> &'static str {
        match e {
            CorpusError::Utf8 { .. } => " (pass --lossy to replace bad bytes with U+FFFD)",
            CorpusError::Jsonl { reason, .. } if reason.starts_with("no field") => {
                " (choose another with --text-field, or pass --skip-broken-lines)"
            }
            CorpusError::Jsonl { .. } => " (pass --skip-broken-lines to leave such lines out)",
            _ => "",
        }
    }
    fn cache(e: &CacheError) -> &'static str {
        match e {
            CacheError::Corrupt { .. } => "; pass --rebuild-cache to delete and recreate it",
            CacheError::ReadOnly { .. } => {
                " (make it writable, give --cache another file, or pass --no-cache)"
            }
            CacheError::Undeletable { .. } => " (remove it by hand or give --cache another file)",
            _ => "",
        }
    }
    fn store(e: &StoreError) -> &'static str {
        match e {
            StoreError::Exists { .. } => " (pass --force to replace it)",
            _ => "",
        }
    }
    if let Some(e) = e.downcast_ref::<CorpusError>() {
        return corpus(e);
    }
    if let Some(e) = e.downcast_ref::<CacheError>() {
        return cache(e);
    }
    if let Some(e) = e.downcast_ref::<StoreError>() {
        return store(e);
    }
    match e.downcast_ref::<JobError>() {
        Some(JobError::Input(e)) => corpus(e),
        Some(JobError::Cache(e)) => cache(e),
        Some(JobError::Store(e)) => store(e),
        _ => "",
    }
}

/// Entry point for the binary.
pub fn run() -> ExitCode {
    let cli = Cli::parse();
    let result = match cli.command {
        Command::Model(a) => modelcmd::run(a),
        Command::Survey(a) => survey::run(a),
        Command::Cut(a) => cut::run(a),
        Command::Text(a) => textcmd::run(a),
        Command::Embed(a) => embed::run(a),
        Command::Compare(a) => comparecmd::run(a),
        Command::Sweep(a) => sweepcmd::run(a),
        Command::Explore(a) => explore::run(a),
        Command::Profile(c) => profilecmd::run(c),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) if is_broken_pipe(&e) => ExitCode::SUCCESS,
        Err(e) if is_interrupted(&e) => {
            eprintln!("kerf: {e}");
            ExitCode::from(130)
        }
        Err(e) if is_stopped(&e) => {
            eprintln!("kerf: stopped: {e}; run the same command again to resume");
            // 128 + SIGINT, as shells report an interrupted command.
            ExitCode::from(130)
        }
        Err(e) => {
            let mut msg = String::new();
            for (i, cause) in e.chain().enumerate() {
                let lead = if i == 0 {
                    "kerf: error: "
                } else {
                    "\n  caused by: "
                };
                msg.push_str(&format!("{lead}{cause}{}", hint(cause)));
            }
            eprintln!("{msg}");
            ExitCode::FAILURE
        }
    }
}
