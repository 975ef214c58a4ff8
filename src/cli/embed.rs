//! `kerf embed`: the embedding job, from the same profile that was planned.
use std::io::Write;
use std::path::PathBuf;

use anyhow::{Context, Result};
use clap::{Args, ValueEnum};

use kerf::corpus::DocStream;
use kerf::job::{EmbedJob, JobSettings};
use kerf::shard::{Shard, SHARD_RULE};
use kerf::store::{self, FolderSink, LineSink};

use super::{load_plan, report_notices, InputArgs, PlanArgs};

#[derive(Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Format {
    /// NumPy .npy matrices (f32) beside chunks.jsonl.
    Npy,
    /// Parquet tables with vectors as fixed-size lists of f32.
    Parquet,
}

/// Encoder settings shared by embed, compare and sweep.
#[derive(Args, Clone)]
pub struct EncoderArgs {
    /// Vector cache (SQLite) file.
    #[arg(long)]
    pub cache: Option<PathBuf>,
    /// Do not read or write the vector cache.
    #[arg(long)]
    pub no_cache: bool,
    /// Delete and recreate a vector cache that fails its integrity check.
    #[arg(long)]
    pub rebuild_cache: bool,
    /// Encoder threads (0: all cores).
    #[arg(long, default_value_t = 0)]
    pub threads: usize,
    /// Tokens per encoder batch.
    #[arg(long, default_value_t = 8192)]
    pub batch_tokens: usize,
    /// Forward pass: `packed` (kerf's padding-free pass) or `candle` (the stock candle BERT,
    /// slower, kept as the correctness reference).
    #[arg(long, default_value = "packed", value_parser = parse_engine)]
    pub engine: kerf::embed::Engine,
    /// No progress bar.
    #[arg(long, short = 'q')]
    pub quiet: bool,
}

fn parse_engine(s: &str) -> Result<kerf::embed::Engine, String> {
    match s {
        "packed" => Ok(kerf::embed::Engine::Packed),
        "candle" => Ok(kerf::embed::Engine::Candle),
        _ => Err(format!("`{s}` is not an engine (packed or candle)")),
    }
}

impl EncoderArgs {
    /// Open the cache unless switched off.
    pub fn open_cache(&self) -> Result<Option<kerf::cache::VectorCache>> {
        if self.no_cache {
            return Ok(None);
        }
        let path = self.cache.clone().unwrap_or_else(|| {
            kerf::model::kerf_home()
                .join("cache")
                .join("vectors.sqlite")
        });
        if let Some(dir) = path.parent() {
            std::fs::create_dir_all(dir).with_context(|| format!("creating {}", dir.display()))?;
        }
        if self.rebuild_cache {
            return Ok(Some(kerf::cache::VectorCache::rebuild(&path)?));
        }
        Ok(Some(kerf::cache::VectorCache::open(&path)?))
    }
}

/// How `--relay` writes vectors in its lines.
#[derive(Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum VectorText {
    /// A JSON array of numbers, field `vector`.
    Array,
    /// Base64 of the little-endian f32 bytes, field `vector_b64` (exact, a third of the size).
    Base64,
}

#[derive(Args)]
pub struct EmbedArgs {
    #[command(flatten)]
    pub input: InputArgs,
    #[command(flatten)]
    pub plan: PlanArgs,
    #[command(flatten)]
    pub encoder: EncoderArgs,
    /// Output folder (written whole, then moved into place; manifest.json last). With --shard
    /// I/N the shard's folder is OUT/shard=I, so N shards make one partitioned dataset.
    #[arg(
        long,
        short = 'o',
        required_unless_present = "relay",
        conflicts_with = "relay"
    )]
    pub out: Option<PathBuf>,
    /// Replace an existing output folder.
    #[arg(long)]
    pub force: bool,
    /// Vector file format.
    #[arg(long, value_enum, default_value = "npy", conflicts_with = "relay")]
    pub format: Format,
    /// Encoder-input tokens per block: the job cuts, embeds and writes a block at a time, so
    /// memory holds one block whatever the corpus size.
    #[arg(long, default_value_t = JobSettings::default().block_tokens)]
    pub block_tokens: usize,
    /// Run as a stage of another pipeline: read JSONL documents (`-` is standard input) and
    /// write one JSON line per chunk and per document to standard output, flushed after every
    /// block, ending with a line of kind "end". Ids are not checked for repeats, so memory stays
    /// bounded on input of any length.
    #[arg(long)]
    pub relay: bool,
    /// With --relay: how vectors are written in the lines.
    #[arg(long, value_enum, default_value = "array", requires = "relay")]
    pub vector_text: VectorText,
    /// Embed only the documents of shard I of N (from 0): those whose id's SHA-256, first 8
    /// bytes big-endian, is I modulo N. N runs with 0/N .. N-1/N cover the corpus once.
    #[arg(long, value_name = "I/N", value_parser = parse_shard)]
    pub shard: Option<Shard>,
}

fn parse_shard(s: &str) -> Result<Shard, String> {
    Shard::parse(s).map_err(|e| e.to_string())
}

/// A progress bar on a terminal, nothing otherwise; with a total of 0 (a stream of unknown
/// length) a counter with its rate instead of a bar.
pub fn progress_bar(
    total_tokens: usize,
    quiet: bool,
    what: &str,
) -> Option<indicatif::ProgressBar> {
    use std::io::IsTerminal;
    if quiet || !std::io::stderr().is_terminal() {
        return None;
    }
    let (bar, template) = if total_tokens == 0 {
        (
            indicatif::ProgressBar::new_spinner(),
            format!("{what} {{spinner}} {{pos}} tokens · {{per_sec}} · {{elapsed}} · {{msg}}"),
        )
    } else {
        (
            indicatif::ProgressBar::new(total_tokens as u64),
            format!(
                "{what} {{bar:30}} {{pos}}/{{len}} tokens · {{per_sec}} · eta {{eta}} · {{msg}}"
            ),
        )
    };
    bar.set_style(indicatif::ProgressStyle::with_template(&template).expect("valid template"));
    Some(bar)
}

/// A flag that SIGINT and SIGTERM set, so the job stops between batches and cleans up; and
/// SIGXFSZ (a file size limit reached) caught, so the write fails with an error naming the file
/// rather than the process dying with its partial output in place.
fn stop_flag() -> Result<std::sync::Arc<std::sync::atomic::AtomicBool>> {
    use signal_hook::consts::{SIGINT, SIGTERM, SIGXFSZ};
    let stop = std::sync::Arc::new(std::sync::atomic::AtomicBool::new(false));
    for sig in [SIGINT, SIGTERM] {
        signal_hook::flag::register(sig, stop.clone()).context("installing a signal handler")?;
    }
    let size_limit = std::sync::Arc::new(std::sync::atomic::AtomicBool::new(false));
    signal_hook::flag::register(SIGXFSZ, size_limit).context("installing a signal handler")?;
    Ok(stop)
}

pub fn run(a: EmbedArgs) -> Result<()> {
    if a.plan.profile.is_none() {
        anyhow::bail!("kerf embed needs --profile FILE (see profiles/ for ready-made plans)");
    }
    let shard = a.shard.unwrap_or(Shard::WHOLE);
    // With --shard the output is one part of a partitioned folder: OUT/shard=I.
    let target = a.out.as_ref().map(|out| match a.shard {
        Some(s) => out.join(s.folder_name()),
        None => out.clone(),
    });
    if let Some(t) = &target {
        if t.exists() && !a.force {
            return Err(kerf::store::StoreError::Exists { path: t.clone() }.into());
        }
    }
    let loaded = load_plan(&a.plan, |_| unreachable!("a profile was given"))?;
    let embedder = super::load_embedder(&loaded, &a.encoder)?;
    let cache = a.encoder.open_cache()?;
    let job = EmbedJob {
        plan: &loaded.plan,
        counter: &loaded.counter,
        embedder: embedder.as_ref(),
        cache: cache.as_ref(),
        settings: JobSettings {
            block_tokens: a.block_tokens,
            batch_tokens: a.encoder.batch_tokens,
        },
    };
    let stop = stop_flag()?;
    let mut options = a.input.options();
    if a.relay {
        // A stage reads documents as lines, and its input's keys are the caller's to keep
        // unique: remembering every id would make memory grow with the input.
        options.stdin_jsonl = true;
        options.check_unique_ids = false;
    }
    let mut stream = DocStream::open(&a.input.paths, options)?;
    let bar = progress_bar(0, a.encoder.quiet, "embedding");
    let mut show = |p: &kerf::job::JobProgress| {
        if let Some(b) = &bar {
            b.set_position(p.tokens as u64);
            b.set_message(format!(
                "{} documents · {} chunks · {} embedded, {} from cache",
                p.documents, p.chunks, p.cache.embedded, p.cache.cached
            ));
        }
    };
    let docs = shard.keep(stream.by_ref());
    let (report, written_to) = match target {
        None => {
            let vectors = match a.vector_text {
                VectorText::Array => store::VectorText::Array,
                VectorText::Base64 => store::VectorText::Base64,
            };
            let stdout = std::io::BufWriter::with_capacity(1 << 16, std::io::stdout().lock());
            let mut sink = LineSink::new(stdout, "<stdout>", vectors, embedder.dim());
            let result = job.run_until(docs, &mut sink, &mut show, &stop);
            if let Some(b) = &bar {
                b.finish_and_clear();
            }
            // On an error the end line is never written, so a reader knows the stream is cut.
            let report = result?;
            sink.finish()?;
            (report, "<stdout>".to_string())
        }
        Some(target) => {
            let format = match a.format {
                Format::Npy => store::Format::Npy,
                Format::Parquet => store::Format::Parquet,
            };
            if let Some(parent) = target.parent() {
                std::fs::create_dir_all(parent)
                    .with_context(|| format!("creating {}", parent.display()))?;
            }
            let mut sink = FolderSink::create(&target, a.force, format, embedder.dim())?;
            let result = job.run_until(docs, &mut sink, &mut show, &stop);
            if let Some(b) = &bar {
                b.finish_and_clear();
            }
            // On any error the sink is dropped unfinished: its partial folder is removed and
            // nothing appears under the output's name.
            let report = result?;
            let mut manifest = job.manifest(&loaded.info.dir, &report);
            if a.shard.is_some() {
                manifest.insert(
                    "shard".into(),
                    serde_json::json!({
                        "index": shard.index,
                        "count": shard.count,
                        "rule": SHARD_RULE,
                    }),
                );
            }
            sink.finish(manifest)?;
            (report, target.display().to_string())
        }
    };
    report_notices(&stream.notices);
    let mut err = std::io::stderr().lock();
    writeln!(
        err,
        "kerf: {} chunks of {} documents{} → {} ({} embedded, {} from cache, {} tokens through the encoder in {:.1} s)",
        report.chunks,
        report.documents,
        a.shard.map(|s| format!(" (shard {s})")).unwrap_or_default(),
        written_to,
        report.cache.embedded,
        report.cache.cached,
        report.cache.embedded_tokens,
        report.cache.encoder_seconds
    )?;
    Ok(())
}
