//! The embedding job: documents in as a stream, chunk records and vectors out through a sink.
//!
//! Documents are read and cut in input order and gathered into blocks of about
//! [`JobSettings::block_tokens`] encoder-input tokens (a block ends at a document boundary, so a
//! document longer than a block is a block of its own). Within a block, distinct inputs are
//! looked up in the vector cache, the misses sorted by length and batched under
//! [`JobSettings::batch_tokens`], embedded and stored; then the block's chunks and document
//! vectors go to the [`ChunkSink`] in input order and the block is dropped. Memory holds one
//! block, whatever the corpus size.
//!
//! [`embed_cached`] is the one path from texts to vectors through the cache: the job, compare,
//! sweep and the terminal UI's worker all call it. Exact resumption rests on the packed encoder
//! giving each input the same vector whatever else shares its batch (tested in
//! `tests/job_resume.rs`), so a job killed part way and run again reads what it stored and
//! computes the rest to the same bits.
use std::collections::HashMap;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Instant;

use rayon::prelude::*;

use crate::cache::{text_key, CacheError, VectorCache};
use crate::corpus::{CorpusError, Document};
use crate::embed::{EmbedError, Embedder};
use crate::plan::ResolvedPlan;
use crate::pool::{self, ChunkPooling};
use crate::records::ChunkRecord;
use crate::split;
use crate::store::{ChunkSink, StoreError};
use crate::survey;
use crate::tokens::{TokenCounter, TokensError};

/// Errors of the embedding job and of embedding through the cache.
#[derive(Debug, thiserror::Error)]
pub enum JobError {
    /// Reading a document failed.
    #[error(transparent)]
    Input(#[from] CorpusError),
    /// Tokenizing a document failed.
    #[error(transparent)]
    Tokens(#[from] TokensError),
    /// The vector cache failed or is damaged.
    #[error(transparent)]
    Cache(#[from] CacheError),
    /// The encoder failed.
    #[error(transparent)]
    Embed(#[from] EmbedError),
    /// Writing output failed.
    #[error(transparent)]
    Store(#[from] StoreError),
    /// The job was asked to stop (the stop flag was set); finished batches are in the cache.
    #[error(
        "stopped before the end (finished batches are kept in the vector cache, if one is used)"
    )]
    Stopped,
    /// The encoder gave a different number of vectors than it was given texts.
    #[error("the encoder returned {got} vectors for {expected} inputs")]
    VectorCount {
        /// Inputs sent.
        expected: usize,
        /// Vectors returned.
        got: usize,
    },
}

/// Sizes that bound the job's memory and shape its batches.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct JobSettings {
    /// Encoder-input tokens gathered before a block is embedded and written.
    pub block_tokens: usize,
    /// Tokens per encoder batch.
    pub batch_tokens: usize,
}

impl Default for JobSettings {
    fn default() -> Self {
        Self {
            block_tokens: 131_072,
            batch_tokens: 8192,
        }
    }
}

/// What embedding through the cache did.
#[derive(Debug, Clone, Copy, Default, PartialEq, serde::Serialize)]
pub struct CacheReport {
    /// Inputs asked for.
    pub inputs: usize,
    /// Encoder-input tokens of every input asked for, cached or not, repeats included: what the
    /// inputs cost to embed from nothing.
    pub input_tokens: usize,
    /// Distinct inputs among them.
    pub distinct: usize,
    /// Distinct inputs found in the cache.
    pub cached: usize,
    /// Distinct inputs embedded now.
    pub embedded: usize,
    /// Tokens sent through the encoder now (specials and prefix included).
    pub embedded_tokens: usize,
    /// Seconds spent in the encoder.
    pub encoder_seconds: f64,
}

impl CacheReport {
    /// Add another report's counts to this one.
    pub fn add(&mut self, o: &CacheReport) {
        self.inputs += o.inputs;
        self.input_tokens += o.input_tokens;
        self.distinct += o.distinct;
        self.cached += o.cached;
        self.embedded += o.embedded;
        self.embedded_tokens += o.embedded_tokens;
        self.encoder_seconds += o.encoder_seconds;
    }
}

/// Group inputs (indices with token counts) into batches of at most `max_batch_tokens`
/// tokens, shortest first so rows pack tightly; a longer single input gets a batch of its own.
pub fn batches_by_tokens(
    mut items: Vec<(usize, usize)>,
    max_batch_tokens: usize,
) -> Vec<Vec<usize>> {
    items.sort_by_key(|&(i, n)| (n, i));
    let mut batches: Vec<Vec<usize>> = Vec::new();
    let mut used = 0usize;
    for (i, n) in items {
        match batches.last_mut() {
            Some(b) if used + n <= max_batch_tokens => {
                b.push(i);
                used += n;
            }
            _ => {
                batches.push(vec![i]);
                used = n;
            }
        }
    }
    batches
}

/// One text to embed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Input<'a> {
    /// What goes before the text (part of the cache key).
    pub prefix: &'a str,
    /// The text.
    pub text: &'a str,
    /// Tokens of the encoder input (specials and prefix included), for batching.
    pub tokens: usize,
}

impl<'a> Input<'a> {
    /// An input.
    pub fn new(prefix: &'a str, text: &'a str, tokens: usize) -> Self {
        Self {
            prefix,
            text,
            tokens,
        }
    }
}

/// Vectors of `inputs` through the cache: each distinct input is looked up; the misses are embedded in length-sorted batches of at most
/// `batch_tokens` tokens, each batch stored in the cache as soon as it is done (so a killed run
/// keeps its work). `progress` gets the tokens done so far and in all.
pub fn embed_cached(
    embedder: &dyn Embedder,
    cache: Option<&VectorCache>,
    inputs: &[Input<'_>],
    batch_tokens: usize,
    progress: &mut dyn FnMut(usize, usize),
) -> Result<(Vec<Vec<f32>>, CacheReport), JobError> {
    let never = AtomicBool::new(false);
    embed_cached_until(embedder, cache, inputs, batch_tokens, progress, &never)
}

/// [`embed_cached`] that returns [`JobError::Stopped`] before the next batch once `stop` is set
/// (the batches done are already in the cache).
pub fn embed_cached_until(
    embedder: &dyn Embedder,
    cache: Option<&VectorCache>,
    inputs: &[Input<'_>],
    batch_tokens: usize,
    progress: &mut dyn FnMut(usize, usize),
    stop: &AtomicBool,
) -> Result<(Vec<Vec<f32>>, CacheReport), JobError> {
    let fingerprint = embedder.fingerprint();
    let mut first: HashMap<[u8; 32], usize> = HashMap::new();
    let mut distinct: Vec<usize> = Vec::new();
    let mut slot_of_input: Vec<usize> = Vec::with_capacity(inputs.len());
    let mut keys: Vec<[u8; 32]> = Vec::new();
    for (i, input) in inputs.iter().enumerate() {
        let k = text_key(input.prefix, input.text);
        let slot = *first.entry(k).or_insert_with(|| {
            distinct.push(i);
            keys.push(k);
            distinct.len() - 1
        });
        slot_of_input.push(slot);
    }
    let mut vectors: Vec<Option<Vec<f32>>> = match cache {
        Some(c) => c.get_many(&fingerprint, &keys)?,
        None => vec![None; distinct.len()],
    };
    let tokens_total: usize = distinct.iter().map(|&i| inputs[i].tokens).sum();
    let misses: Vec<(usize, usize)> = (0..distinct.len())
        .filter(|&s| vectors[s].is_none())
        .map(|s| (s, inputs[distinct[s]].tokens))
        .collect();
    let mut report = CacheReport {
        inputs: inputs.len(),
        input_tokens: inputs.iter().map(|i| i.tokens).sum(),
        distinct: distinct.len(),
        cached: distinct.len() - misses.len(),
        ..Default::default()
    };
    let mut tokens_done = tokens_total - misses.iter().map(|m| m.1).sum::<usize>();
    progress(tokens_done, tokens_total);
    for batch in batches_by_tokens(misses, batch_tokens) {
        if stop.load(Ordering::Relaxed) {
            return Err(JobError::Stopped);
        }
        let texts: Vec<String> = batch
            .iter()
            .map(|&s| {
                let i = &inputs[distinct[s]];
                format!("{}{}", i.prefix, i.text)
            })
            .collect();
        let refs: Vec<&str> = texts.iter().map(String::as_str).collect();
        let t = Instant::now();
        let out = embedder.embed(&refs)?;
        report.encoder_seconds += t.elapsed().as_secs_f64();
        if out.len() != batch.len() {
            return Err(JobError::VectorCount {
                expected: batch.len(),
                got: out.len(),
            });
        }
        if let Some(c) = cache {
            let items: Vec<([u8; 32], Vec<f32>)> = batch
                .iter()
                .map(|&s| keys[s])
                .zip(out.iter().cloned())
                .collect();
            c.put_many(&fingerprint, &items)?;
        }
        let batch_tokens_done: usize = batch.iter().map(|&s| inputs[distinct[s]].tokens).sum();
        report.embedded += batch.len();
        report.embedded_tokens += batch_tokens_done;
        for (&s, v) in batch.iter().zip(out) {
            vectors[s] = Some(v);
        }
        tokens_done += batch_tokens_done;
        progress(tokens_done, tokens_total);
    }
    let vectors: Vec<Vec<f32>> = vectors
        .into_iter()
        .map(|v| v.expect("every distinct input is cached or embedded"))
        .collect();
    Ok((
        slot_of_input.iter().map(|&s| vectors[s].clone()).collect(),
        report,
    ))
}

/// The aggregation that gives a document its stored vector: the profile's, or the mean where
/// the profile's is a scoring (best, sum) with no single document vector.
pub fn document_vector_pooling(how: ChunkPooling) -> ChunkPooling {
    if how.is_scoring() {
        ChunkPooling::Mean
    } else {
        how
    }
}

/// Progress of a running job.
#[derive(Debug, Clone, Copy, Default, PartialEq, serde::Serialize)]
pub struct JobProgress {
    /// Documents written.
    pub documents: usize,
    /// Chunks written.
    pub chunks: usize,
    /// Blocks written.
    pub blocks: usize,
    /// Encoder-input tokens of the chunks written, plus those done in the current block.
    pub tokens: usize,
    /// The whole run's cache and encoder figures so far.
    pub cache: CacheReport,
}

/// What a finished job did.
#[derive(Debug, Clone, Copy, Default, PartialEq, serde::Serialize)]
pub struct JobReport {
    /// Documents read.
    pub documents: usize,
    /// Documents with a vector (at least one chunk).
    pub documents_with_vectors: usize,
    /// Chunks written.
    pub chunks: usize,
    /// Blocks the job worked in.
    pub blocks: usize,
    /// Encoder-input tokens of all chunks.
    pub input_tokens: usize,
    /// Cache and encoder figures.
    pub cache: CacheReport,
}

/// A document's chunk records, with each chunk's tokens not shared with the chunk before it.
pub type CutRecords = (Vec<ChunkRecord>, Vec<usize>);

/// Cut one document into its chunk records under `plan`, with each chunk's tokens not shared
/// with the chunk before it.
pub fn cut_document(
    plan: &ResolvedPlan,
    counter: &TokenCounter,
    doc: &Document,
) -> Result<CutRecords, TokensError> {
    let recount = |t: &str| counter.count_content(t).unwrap_or(usize::MAX);
    let an = survey::analyze(&doc.text, counter)?;
    // The headings serve both the heading breaks and the records' section paths: found once.
    let headings = crate::extract::sections::of_document(doc, &an.segments.paragraphs);
    let breaks = crate::extract::sections::break_starts(&headings, plan.cut.heading_breaks);
    let mut chunks = split::cut_at_headings(
        &doc.text,
        &an.tokens,
        &an.segments,
        &plan.cut,
        &recount,
        &breaks,
    );
    crate::prefix::attach(plan, doc, &headings, &mut chunks, &recount);
    let new_tokens = chunks
        .iter()
        .map(|c| c.content_tokens.saturating_sub(c.overlap_tokens))
        .collect();
    let records = ChunkRecord::of_document(doc, &headings, &chunks, plan);
    Ok((records, new_tokens))
}

/// What goes before a record's text: its own prefix, else the plan's fixed one.
fn record_prefix<'a>(plan: &'a ResolvedPlan, r: &'a ChunkRecord) -> &'a str {
    r.prefix.as_deref().unwrap_or(plan.fixed_prefix.as_str())
}

/// A cut document waiting in a block.
struct CutDoc {
    id: String,
    records: Vec<ChunkRecord>,
    new_tokens: Vec<usize>,
    /// The document's text, kept only under late chunking (its passes span chunks).
    text: String,
}

/// The embedding job of a plan: cut, embed through the cache, pool, hand to a sink.
pub struct EmbedJob<'a> {
    /// The plan (profile resolved against its model).
    pub plan: &'a ResolvedPlan,
    /// The model's tokenizer, for cutting.
    pub counter: &'a TokenCounter,
    /// The encoder.
    pub embedder: &'a dyn Embedder,
    /// The vector cache, if any.
    pub cache: Option<&'a VectorCache>,
    /// Block and batch sizes.
    pub settings: JobSettings,
}

/// Documents cut together in parallel before they join a block.
const CUT_GROUP: usize = 64;

impl EmbedJob<'_> {
    /// Cut one document into its chunk records (with each chunk's tokens not shared with the
    /// chunk before it, the weights of a token-weighted document mean).
    pub fn cut(&self, doc: &Document) -> Result<CutRecords, TokensError> {
        cut_document(self.plan, self.counter, doc)
    }

    /// Run over `docs`, handing everything to `sink` in input order. `progress` is called after
    /// every encoder batch and every block.
    pub fn run<I>(
        &self,
        docs: I,
        sink: &mut dyn ChunkSink,
        progress: &mut dyn FnMut(&JobProgress),
    ) -> Result<JobReport, JobError>
    where
        I: IntoIterator<Item = Result<Document, CorpusError>>,
    {
        self.run_until(docs, sink, progress, &AtomicBool::new(false))
    }

    /// [`EmbedJob::run`] that stops with [`JobError::Stopped`] at the next encoder batch or
    /// document group once `stop` is set (an interrupt handler sets it). What the sink has is
    /// then incomplete and must not be finished; the finished batches are in the cache, so the
    /// same job run again resumes.
    pub fn run_until<I>(
        &self,
        docs: I,
        sink: &mut dyn ChunkSink,
        progress: &mut dyn FnMut(&JobProgress),
        stop: &AtomicBool,
    ) -> Result<JobReport, JobError>
    where
        I: IntoIterator<Item = Result<Document, CorpusError>>,
    {
        let mut report = JobReport::default();
        let mut block: Vec<CutDoc> = Vec::new();
        let mut block_tokens = 0usize;
        let mut docs = docs.into_iter().peekable();
        let mut group: Vec<Document> = Vec::with_capacity(CUT_GROUP);
        while docs.peek().is_some() {
            if stop.load(Ordering::Relaxed) {
                return Err(JobError::Stopped);
            }
            group.clear();
            let mut pending = None;
            for d in docs.by_ref() {
                match d {
                    Ok(d) => group.push(d),
                    Err(e) => {
                        pending = Some(e);
                        break;
                    }
                }
                if group.len() == CUT_GROUP {
                    break;
                }
            }
            let (plan, counter) = (self.plan, self.counter);
            let cut: Vec<Result<CutRecords, TokensError>> = group
                .par_iter()
                .map(|d| cut_document(plan, counter, d))
                .collect();
            let late = self.plan.profile.pool.late().is_some();
            for (d, c) in group.drain(..).zip(cut) {
                let (records, new_tokens) = c?;
                block_tokens += records.iter().map(|r| r.tokens).sum::<usize>();
                block.push(CutDoc {
                    id: d.id,
                    records,
                    new_tokens,
                    text: if late { d.text } else { String::new() },
                });
                if block_tokens >= self.settings.block_tokens {
                    self.flush(&mut block, sink, &mut report, progress, stop)?;
                    block_tokens = 0;
                }
            }
            if let Some(e) = pending {
                return Err(e.into());
            }
        }
        if !block.is_empty() || report.blocks == 0 {
            self.flush(&mut block, sink, &mut report, progress, stop)?;
        }
        Ok(report)
    }

    /// Embed a block, hand it to the sink in order, and empty it.
    fn flush(
        &self,
        block: &mut Vec<CutDoc>,
        sink: &mut dyn ChunkSink,
        report: &mut JobReport,
        progress: &mut dyn FnMut(&JobProgress),
        stop: &AtomicBool,
    ) -> Result<(), JobError> {
        let base = JobProgress {
            documents: report.documents,
            chunks: report.chunks,
            blocks: report.blocks,
            tokens: report.input_tokens,
            cache: report.cache,
        };
        let mut tell = |done: usize, _: usize| {
            progress(&JobProgress {
                tokens: base.tokens + done,
                ..base
            })
        };
        let plan = self.plan;
        let prefix_of = |r| record_prefix(plan, r);
        let (vectors, cache_report) = match plan.profile.pool.late() {
            None => {
                let inputs: Vec<Input<'_>> = block
                    .iter()
                    .flat_map(|d| {
                        d.records
                            .iter()
                            .map(|r| Input::new(prefix_of(r), &r.text, r.tokens))
                    })
                    .collect();
                embed_cached_until(
                    self.embedder,
                    self.cache,
                    &inputs,
                    self.settings.batch_tokens,
                    &mut tell,
                    stop,
                )?
            }
            Some(late) => {
                let ranges: Vec<Vec<std::ops::Range<usize>>> = block
                    .iter()
                    .map(|d| d.records.iter().map(|r| r.bytes[0]..r.bytes[1]).collect())
                    .collect();
                let prefixes: Vec<Vec<&str>> = block
                    .iter()
                    .map(|d| d.records.iter().map(prefix_of).collect())
                    .collect();
                let docs = crate::late::documents(
                    block.iter().map(|d| d.text.as_str()),
                    &ranges,
                    &prefixes,
                );
                let (vectors, cache_report) = crate::late::embed_chunks(
                    self.embedder,
                    self.cache,
                    &docs,
                    &late,
                    self.settings.batch_tokens,
                    &mut tell,
                    stop,
                )?;
                (vectors.into_iter().flatten().collect(), cache_report)
            }
        };
        report.cache.add(&cache_report);
        let how = document_vector_pooling(self.plan.profile.pool.chunks);
        let temperature = self.plan.profile.pool.temperature;
        let mut vectors = vectors.into_iter();
        for d in block.drain(..) {
            let mine: Vec<Vec<f32>> = vectors.by_ref().take(d.records.len()).collect();
            for (r, v) in d.records.iter().zip(&mine) {
                sink.chunk(r, v)?;
                report.input_tokens += r.tokens;
            }
            let views: Vec<&[f32]> = mine.iter().map(Vec::as_slice).collect();
            let doc_vector = pool::doc_vector(how, &views, &d.new_tokens, temperature);
            sink.document(&d.id, doc_vector.as_deref())?;
            report.documents += 1;
            report.documents_with_vectors += usize::from(doc_vector.is_some());
            report.chunks += d.records.len();
        }
        sink.end_block()?;
        report.blocks += 1;
        progress(&JobProgress {
            documents: report.documents,
            chunks: report.chunks,
            blocks: report.blocks,
            tokens: report.input_tokens,
            cache: report.cache,
        });
        Ok(())
    }

    /// The manifest fields that describe this job's plan, model and counts (the sink adds the
    /// files and their checksums).
    pub fn manifest(
        &self,
        model_dir: &std::path::Path,
        report: &JobReport,
    ) -> serde_json::Map<String, serde_json::Value> {
        let plan = self.plan;
        let how = plan.profile.pool.chunks;
        let value = serde_json::json!({
            "kerf_version": env!("CARGO_PKG_VERSION"),
            "profile": plan.profile,
            "profile_toml": plan.profile.to_toml(),
            "resolved": {
                "window": plan.window,
                "specials": plan.specials,
                "prefix_tokens": plan.prefix_tokens,
                "budget": plan.budget(),
            },
            "model": {
                "folder": model_dir,
                "fingerprint": self.embedder.fingerprint(),
                "dimensions": self.embedder.dim(),
            },
            "document_vectors": if how.is_scoring() {
                format!("mean of chunk vectors ({} is a scoring with no single document vector)", how.name())
            } else {
                how.name().to_string()
            },
            "counts": {
                "documents": report.documents,
                "documents_with_vectors": report.documents_with_vectors,
                "chunks": report.chunks,
                "blocks": report.blocks,
                "encoder_inputs": report.cache.distinct,
                "input_tokens": report.input_tokens,
            },
        });
        match value {
            serde_json::Value::Object(m) => m,
            _ => unreachable!("a JSON object literal"),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::embed::HashEmbedder;

    #[test]
    fn batches_sort_and_respect_the_budget() {
        // tokens: 0:50 1:10 2:30 3:200
        let b = batches_by_tokens(vec![(0, 50), (1, 10), (2, 30), (3, 200)], 100);
        assert_eq!(b, vec![vec![1, 2, 0], vec![3]]);
    }

    #[test]
    fn cached_embedding_dedupes_reuses_and_keys_the_prefix() {
        let dir = tempfile::tempdir().unwrap();
        let c = VectorCache::open(&dir.path().join("v.sqlite")).unwrap();
        let e = HashEmbedder { dim: 8 };
        let none = &mut |_: usize, _: usize| {};
        let i = |p, t, n| Input::new(p, t, n);
        let (v1, r1) = embed_cached(
            &e,
            Some(&c),
            &[i("", "a b", 4), i("", "c d", 4), i("", "a b", 4)],
            100,
            none,
        )
        .unwrap();
        assert_eq!(
            (r1.inputs, r1.distinct, r1.cached, r1.embedded),
            (3, 2, 0, 2)
        );
        assert_eq!(v1[0], v1[2]);
        assert_eq!(v1[0], e.embed(&["a b"]).unwrap()[0]);
        let (v2, r2) =
            embed_cached(&e, Some(&c), &[i("", "c d", 4), i("", "a b", 4)], 100, none).unwrap();
        assert_eq!((r2.cached, r2.embedded), (2, 0));
        assert_eq!(v2[1], v1[0]);
        // A prefix is part of the key, and goes in front of the text the encoder sees.
        let (v3, r3) = embed_cached(&e, Some(&c), &[i("query: ", "a b", 6)], 100, none).unwrap();
        assert_eq!(r3.embedded, 1);
        assert_eq!(v3[0], e.embed(&["query: a b"]).unwrap()[0]);
        assert_eq!(c.count("hash-8").unwrap(), 3);
        // Inputs of one call may each have their own prefix.
        let (v4, r4) = embed_cached(
            &e,
            Some(&c),
            &[i("query: ", "a b", 6), i("Seals: ", "a b", 6)],
            100,
            none,
        )
        .unwrap();
        assert_eq!((r4.cached, r4.embedded), (1, 1));
        assert_eq!(v4[1], e.embed(&["Seals: a b"]).unwrap()[0]);
    }
}
