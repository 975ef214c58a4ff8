//! `kerf embed`: the embedding job, from the same profile that was planned.
use std::io::Write;
use std::path::{Path, PathBuf};

use anyhow::{Context, Result};
use clap::{Args, ValueEnum};

use kerf::export;
use kerf::job;
use kerf::pool::{self, ChunkPooling};
use kerf::records::ChunkRecord;
use kerf::split;
use kerf::survey;

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

#[derive(Args)]
pub struct EmbedArgs {
    #[command(flatten)]
    pub input: InputArgs,
    #[command(flatten)]
    pub plan: PlanArgs,
    #[command(flatten)]
    pub encoder: EncoderArgs,
    /// Output folder (written whole, then moved into place; manifest.json last).
    #[arg(long, short = 'o')]
    pub out: PathBuf,
    /// Replace an existing output folder.
    #[arg(long)]
    pub force: bool,
    /// Vector file format.
    #[arg(long, value_enum, default_value = "npy")]
    pub format: Format,
}

/// A progress bar on a terminal, nothing otherwise.
pub fn progress_bar(
    total_tokens: usize,
    quiet: bool,
    what: &str,
) -> Option<indicatif::ProgressBar> {
    use std::io::IsTerminal;
    if quiet || !std::io::stderr().is_terminal() {
        return None;
    }
    let bar = indicatif::ProgressBar::new(total_tokens as u64);
    bar.set_style(
        indicatif::ProgressStyle::with_template(&format!(
            "{what} {{bar:30}} {{pos}}/{{len}} tokens · {{per_sec}} · eta {{eta}} · {{msg}}"
        ))
        .expect("valid template"),
    );
    Some(bar)
}

fn fresh_dir_beside(target: &Path) -> Result<PathBuf> {
    let parent = match target.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    let name = target
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "out".into());
    let tmp = parent.join(format!(".{name}.partial-{}", std::process::id()));
    if tmp.exists() {
        std::fs::remove_dir_all(&tmp)
            .with_context(|| format!("removing stale {}", tmp.display()))?;
    }
    std::fs::create_dir_all(&tmp).with_context(|| format!("creating {}", tmp.display()))?;
    Ok(tmp)
}

pub fn run(a: EmbedArgs) -> Result<()> {
    if a.plan.profile.is_none() {
        anyhow::bail!("kerf embed needs --profile FILE (see profiles/ for ready-made plans)");
    }
    if a.out.exists() && !a.force {
        anyhow::bail!(
            "{} already exists (pass --force to replace it)",
            a.out.display()
        );
    }
    let loaded = load_plan(&a.plan, |_| unreachable!("a profile was given"))?;
    let (counter, plan) = (&loaded.counter, &loaded.plan);
    let embedder = super::load_embedder(&loaded, &a.encoder)?;
    let cache = a.encoder.open_cache()?;

    // Cut everything first: the job's batches are a function of the whole chunk set.
    let mut stream = a.input.open()?;
    let recount = |t: &str| counter.count_content(t).unwrap_or(usize::MAX);
    let mut docs: Vec<(String, Vec<ChunkRecord>, Vec<usize>)> = Vec::new();
    kerf::process_in_order(
        stream.by_ref().map(|r| r.map_err(anyhow::Error::from)),
        64,
        |doc| {
            let an = survey::analyze(&doc.text, counter)?;
            let chunks = split::cut(&doc.text, &an.tokens, &an.segments, &plan.cut, &recount);
            let new_tokens = kerf::compare::engine::new_tokens(&chunks);
            Ok((
                chunks
                    .iter()
                    .map(|c| ChunkRecord::new(doc, c, plan))
                    .collect::<Vec<_>>(),
                new_tokens,
            ))
        },
        |doc, (recs, newt)| {
            docs.push((doc.id, recs, newt));
            Ok(())
        },
    )?;
    report_notices(&stream.notices);
    let all: Vec<&ChunkRecord> = docs.iter().flat_map(|d| d.1.iter()).collect();
    let batch_plan = job::plan_batches(
        all.iter().map(|r| (r.text.clone(), r.tokens)),
        a.encoder.batch_tokens,
    );
    let bar = progress_bar(batch_plan.tokens.iter().sum(), a.encoder.quiet, "embedding");
    let (unique_vectors, report) = job::run(
        &batch_plan,
        &plan.profile.cut.prefix,
        embedder.as_ref(),
        cache.as_ref(),
        &mut |p| {
            if let Some(b) = &bar {
                b.set_position(p.tokens_done as u64);
                b.set_message(format!("{}/{} chunks", p.inputs_done, p.inputs_total));
            }
        },
    )?;
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    let dim = embedder.dim();
    let chunk_vectors: Vec<&Vec<f32>> = batch_plan
        .input_of_chunk
        .iter()
        .map(|&i| &unique_vectors[i])
        .collect();

    // Document vectors by the profile's aggregation (scorings have none: mean stands in).
    let how = plan.profile.pool.chunks;
    let doc_how = if how.is_scoring() {
        ChunkPooling::Mean
    } else {
        how
    };
    let mut at = 0;
    let mut doc_ids: Vec<&str> = Vec::new();
    let mut doc_matrix: Vec<f32> = Vec::new();
    for (id, recs, newt) in &docs {
        let views: Vec<&[f32]> = chunk_vectors[at..at + recs.len()]
            .iter()
            .map(|v| v.as_slice())
            .collect();
        at += recs.len();
        if let Some(v) = pool::doc_vector(doc_how, &views, newt, plan.profile.pool.temperature) {
            doc_ids.push(id);
            doc_matrix.extend(v);
        }
    }
    let chunk_matrix: Vec<f32> = chunk_vectors
        .iter()
        .flat_map(|v| v.iter().copied())
        .collect();

    // Write everything into a fresh folder beside the target; manifest last; then move it in.
    let tmp = fresh_dir_beside(&a.out)?;
    let result = (|| -> Result<()> {
        let mut files = serde_json::Map::new();
        let mut put = |name: &str, bytes: Vec<u8>| -> Result<()> {
            let sum = export::write_file(&tmp, name, &bytes)
                .with_context(|| format!("writing {}", a.out.join(name).display()))?;
            files.insert(
                name.into(),
                serde_json::json!({ "sha256": sum, "bytes": bytes.len() }),
            );
            Ok(())
        };
        let mut jsonl = Vec::new();
        for r in &all {
            serde_json::to_writer(&mut jsonl, r)?;
            jsonl.push(b'\n');
        }
        put("chunks.jsonl", jsonl)?;
        match a.format {
            Format::Npy => {
                put(
                    "chunk_vectors.npy",
                    export::npy_f32(all.len(), dim, &chunk_matrix),
                )?;
                put(
                    "doc_vectors.npy",
                    export::npy_f32(doc_ids.len(), dim, &doc_matrix),
                )?;
                put("doc_ids.json", serde_json::to_vec_pretty(&doc_ids)?)?;
            }
            Format::Parquet => {
                let rows = export::ChunkRows {
                    doc: all.iter().map(|r| r.doc.as_str()).collect(),
                    chunk: all.iter().map(|r| r.chunk as u32).collect(),
                    byte_start: all.iter().map(|r| r.bytes[0] as u64).collect(),
                    byte_end: all.iter().map(|r| r.bytes[1] as u64).collect(),
                    tokens: all.iter().map(|r| r.tokens as u32).collect(),
                    text: all.iter().map(|r| r.text.as_str()).collect(),
                };
                put(
                    "chunks.parquet",
                    export::chunks_parquet(&rows, dim, &chunk_matrix)
                        .map_err(anyhow::Error::msg)?,
                )?;
                put(
                    "documents.parquet",
                    export::docs_parquet(&doc_ids, dim, &doc_matrix).map_err(anyhow::Error::msg)?,
                )?;
            }
        }
        let manifest = serde_json::json!({
            "kerf_version": env!("CARGO_PKG_VERSION"),
            "profile": plan.profile,
            "profile_toml": plan.profile.to_toml(),
            "resolved": { "window": plan.window, "specials": plan.specials, "prefix_tokens": plan.prefix_tokens, "budget": plan.budget() },
            "model": { "folder": loaded.info.dir, "fingerprint": embedder.fingerprint(), "dimensions": dim },
            "document_vectors": if how.is_scoring() {
                format!("mean of chunk vectors ({} is a scoring with no single document vector)", how.name())
            } else { how.name().to_string() },
            "counts": {
                "documents": docs.len(),
                "documents_with_vectors": doc_ids.len(),
                "chunks": all.len(),
                "unique_chunk_texts": batch_plan.texts.len(),
                "input_tokens": all.iter().map(|r| r.tokens).sum::<usize>(),
            },
            "files": files,
        });
        export::write_file(
            &tmp,
            "manifest.json",
            &serde_json::to_vec_pretty(&manifest)?,
        )?;
        Ok(())
    })();
    if let Err(e) = result {
        let _ = std::fs::remove_dir_all(&tmp);
        return Err(e);
    }
    if a.out.exists() {
        let old = tmp.with_extension("old");
        std::fs::rename(&a.out, &old)
            .with_context(|| format!("moving the old {} aside", a.out.display()))?;
        std::fs::rename(&tmp, &a.out)
            .with_context(|| format!("moving the output into {}", a.out.display()))?;
        let _ = std::fs::remove_dir_all(&old);
    } else {
        std::fs::rename(&tmp, &a.out)
            .with_context(|| format!("moving the output into {}", a.out.display()))?;
    }
    let mut err = std::io::stderr().lock();
    writeln!(
        err,
        "kerf: {} chunks of {} documents → {} ({} embedded, {} from cache, {} tokens through the encoder in {:.1} s)",
        all.len(),
        docs.len(),
        a.out.display(),
        report.embedded_inputs,
        report.cached_inputs,
        report.embedded_tokens,
        report.encoder_seconds
    )?;
    Ok(())
}
