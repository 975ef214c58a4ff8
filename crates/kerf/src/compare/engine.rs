//! Scoring a corpus under a plan: cut, embed (through whatever embedding function the caller
//! gives, usually the cache in front of the encoder), aggregate, rank, measure.
//!
//! Everything here is plain data in, plain data out, so the CLI, the sweep and the terminal UI
//! share it and tests can run it with a model-free embedder.
use std::collections::HashSet;

use rayon::prelude::*;
use serde::Serialize;

use super::metrics::{self, Summary};
use super::refs::Reference;
use crate::corpus::Document;
use crate::job::{embed_cached, CacheReport, Input, JobError};
use crate::plan::ResolvedPlan;
use crate::pool::{self, ChunkPooling};
use crate::split::{self, Chunk};
use crate::survey::{self, Analysis};
use crate::tokens::{TokenCounter, TokensError};

/// A corpus held in memory with each document analysed once.
pub struct Corpus {
    /// Documents in input order.
    pub docs: Vec<Document>,
    /// Tokens and segments of each document.
    pub analyses: Vec<Analysis>,
}

impl Corpus {
    /// Analyse documents in parallel.
    pub fn new(docs: Vec<Document>, counter: &TokenCounter) -> Result<Self, TokensError> {
        let analyses = docs
            .par_iter()
            .map(|d| survey::analyze(&d.text, counter))
            .collect::<Result<Vec<_>, _>>()?;
        Ok(Self { docs, analyses })
    }
    /// Document ids.
    pub fn ids(&self) -> HashSet<String> {
        self.docs.iter().map(|d| d.id.clone()).collect()
    }
    /// Total content tokens.
    pub fn content_tokens(&self) -> usize {
        self.analyses.iter().map(|a| a.tokens.len()).sum()
    }
}

/// Cut every document of a corpus under a plan (in parallel); under a prefix template each
/// chunk carries its own prefix.
pub fn cut_corpus(corpus: &Corpus, plan: &ResolvedPlan, counter: &TokenCounter) -> Vec<Vec<Chunk>> {
    let recount = |t: &str| counter.count_content(t).unwrap_or(usize::MAX);
    corpus
        .docs
        .par_iter()
        .zip(&corpus.analyses)
        .map(|(d, a)| {
            // Headings are looked for only when the plan breaks at them or names them.
            let headings = if plan.cut.heading_breaks > 0 || plan.templated() {
                crate::extract::sections::of_document(d, &a.segments.paragraphs)
            } else {
                std::borrow::Cow::Borrowed(&[][..])
            };
            let breaks = crate::extract::sections::break_starts(&headings, plan.cut.heading_breaks);
            let mut chunks = split::cut_at_headings(
                &d.text,
                &a.tokens,
                &a.segments,
                &plan.cut,
                &recount,
                &breaks,
            );
            crate::prefix::attach(plan, d, &headings, &mut chunks, &recount);
            chunks
        })
        .collect()
}

/// Split a flat list of chunk vectors back into per-document lists.
pub fn unflatten(chunks: &[Vec<Chunk>], mut flat: Vec<Vec<f32>>) -> Vec<Vec<Vec<f32>>> {
    let mut out = Vec::with_capacity(chunks.len());
    let mut rest = flat.drain(..);
    for cs in chunks {
        out.push(rest.by_ref().take(cs.len()).collect());
    }
    out
}

/// Tokens each chunk adds beyond its overlap with the previous one.
pub fn new_tokens(chunks: &[Chunk]) -> Vec<usize> {
    chunks
        .iter()
        .map(|c| c.content_tokens.saturating_sub(c.overlap_tokens))
        .collect()
}

/// One document's score for one reference.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct DocScore {
    /// Index of the document in the corpus.
    pub doc: usize,
    /// Score (cosine for vector aggregations; max or sum of chunk cosines for scorings).
    pub score: f32,
    /// Index of the chunk with the highest cosine.
    pub best_chunk: usize,
}

/// Scores of every document for every reference, each reference's list best first (ties by
/// document id descending, as trec_eval orders them). Documents without chunks are left out.
pub fn score_all(
    corpus: &Corpus,
    refs: &[Vec<f32>],
    chunk_vectors: &[Vec<Vec<f32>>],
    chunks: &[Vec<Chunk>],
    how: ChunkPooling,
    temperature: f32,
) -> Vec<Vec<DocScore>> {
    let refs: Vec<&[f32]> = refs.iter().map(Vec::as_slice).collect();
    let chunk_vectors: Vec<Vec<&[f32]>> = chunk_vectors
        .iter()
        .map(|vs| vs.iter().map(Vec::as_slice).collect())
        .collect();
    score_views(corpus, &refs, &chunk_vectors, chunks, how, temperature)
        .into_iter()
        .map(|s| s.ranking)
        .collect()
}

/// One reference scored against a plan's chunks.
#[derive(Debug, Clone, PartialEq)]
pub struct RefScores {
    /// Documents best first (see [`rank_documents`]).
    pub ranking: Vec<DocScore>,
    /// Cosine of the reference to every chunk, `[doc][chunk]`.
    pub chunk_cos: Vec<Vec<f32>>,
}

/// The one scoring path of compare, sweep and the terminal UI: every reference against every
/// chunk (vectors borrowed, `chunk_vectors[doc][chunk]`), documents pooled under `how`.
pub fn score_views(
    corpus: &Corpus,
    refs: &[&[f32]],
    chunk_vectors: &[Vec<&[f32]>],
    chunks: &[Vec<Chunk>],
    how: ChunkPooling,
    temperature: f32,
) -> Vec<RefScores> {
    let doc_vecs: Vec<Option<Vec<f32>>> = chunk_vectors
        .iter()
        .zip(chunks)
        .map(|(vs, cs)| pool::doc_vector(how, vs, &new_tokens(cs), temperature))
        .collect();
    refs.par_iter()
        .map(|q| {
            let chunk_cos: Vec<Vec<f32>> = chunk_vectors
                .iter()
                .map(|vs| vs.iter().map(|v| pool::cosine(q, v)).collect())
                .collect();
            RefScores {
                ranking: rank_documents(corpus, q, &chunk_cos, &doc_vecs, how),
                chunk_cos,
            }
        })
        .collect()
}

/// Index of the highest cosine (the first on ties; NaN, a chunk with nothing left, never wins
/// over a number); 0 for an empty list.
pub fn best_chunk(cos: &[f32]) -> usize {
    cos.iter().enumerate().fold(0, |b, (i, &s)| {
        if s > cos[b] || (cos[b].is_nan() && !s.is_nan()) {
            i
        } else {
            b
        }
    })
}

/// One reference's ranking of the documents, best first (ties by document id descending, as
/// trec_eval orders them), from its cosine to every chunk (`chunk_cos[doc][chunk]`) and the
/// documents' pooled vectors. Documents without chunks are left out.
pub fn rank_documents(
    corpus: &Corpus,
    q: &[f32],
    chunk_cos: &[Vec<f32>],
    doc_vecs: &[Option<Vec<f32>>],
    how: ChunkPooling,
) -> Vec<DocScore> {
    rank_documents_by(corpus, q, chunk_cos, &|d| doc_vecs[d].as_deref(), how)
}

/// [`rank_documents`] with each document's pooled vector given by a function, so that one
/// document's vector can be swapped for another without copying the rest.
pub fn rank_documents_by<'v>(
    corpus: &Corpus,
    q: &[f32],
    chunk_cos: &[Vec<f32>],
    doc_vec: &dyn Fn(usize) -> Option<&'v [f32]>,
    how: ChunkPooling,
) -> Vec<DocScore> {
    let mut scores: Vec<DocScore> = chunk_cos
        .iter()
        .enumerate()
        .filter(|(_, cos)| !cos.is_empty())
        .map(|(d, cos)| {
            let best_chunk = best_chunk(cos);
            let score = match how {
                ChunkPooling::Best => cos[best_chunk],
                ChunkPooling::Sum => cos.iter().sum(),
                _ => doc_vec(d).map_or(0.0, |dv| pool::cosine(q, dv)),
            };
            DocScore {
                doc: d,
                score,
                best_chunk,
            }
        })
        .collect();
    scores.sort_by(|a, b| {
        b.score
            .total_cmp(&a.score)
            .then_with(|| corpus.docs[b.doc].id.cmp(&corpus.docs[a.doc].id))
    });
    scores
}

/// Ranking metrics of a plan over the references that name expected documents.
pub fn summarize(corpus: &Corpus, refs: &[Reference], scores: &[Vec<DocScore>]) -> Summary {
    let rankings: Vec<Vec<String>> = scores
        .iter()
        .map(|s| s.iter().map(|d| corpus.docs[d.doc].id.clone()).collect())
        .collect();
    metrics::summarize(
        rankings
            .iter()
            .zip(refs)
            .map(|(r, q)| (r.as_slice(), &q.expect)),
    )
}

/// Mean score of expected documents over references with expectations.
pub fn mean_expected_score(
    corpus: &Corpus,
    refs: &[Reference],
    scores: &[Vec<DocScore>],
) -> Option<f64> {
    let mut total = 0.0;
    let mut n = 0usize;
    for (r, s) in refs.iter().zip(scores) {
        for d in s
            .iter()
            .filter(|d| r.expect.get(&corpus.docs[d.doc].id).is_some_and(|&g| g > 0))
        {
            total += d.score as f64;
            n += 1;
        }
    }
    (n > 0).then(|| total / n as f64)
}

/// Kendall's tau-b between two plans' scores for one reference, over documents both scored.
pub fn tau_between(a: &[DocScore], b: &[DocScore]) -> f64 {
    let mut by_doc = std::collections::HashMap::new();
    for s in b {
        by_doc.insert(s.doc, s.score as f64);
    }
    let (mut xa, mut xb) = (Vec::new(), Vec::new());
    for s in a {
        if let Some(&o) = by_doc.get(&s.doc) {
            xa.push(s.score as f64);
            xb.push(o);
        }
    }
    metrics::kendall_tau_b(&xa, &xb)
}

/// Rank (1-based) of a document in a reference's list.
pub fn rank_of(scores: &[DocScore], doc: usize) -> Option<usize> {
    scores.iter().position(|s| s.doc == doc).map(|p| p + 1)
}

/// Everything measured about one plan over a corpus and references.
pub struct PlanEval {
    /// The plan.
    pub plan: ResolvedPlan,
    /// Chunks of each document.
    pub chunks: Vec<Vec<Chunk>>,
    /// Per reference, documents best first.
    pub scores: Vec<Vec<DocScore>>,
    /// Ranking metrics.
    pub summary: Summary,
    /// Mean score of expected documents.
    pub mean_expected: Option<f64>,
    /// Encoder-input tokens of all chunks.
    pub input_tokens: usize,
    /// Chunks embedded now (not found in the cache).
    pub embedded: usize,
}

/// Embed reference texts (each with its own prefix) through the cache.
pub fn embed_refs(
    embedder: &dyn crate::embed::Embedder,
    cache: Option<&crate::cache::VectorCache>,
    refs: &[Reference],
) -> Result<Vec<Vec<f32>>, JobError> {
    let inputs = refs
        .iter()
        .map(|r| {
            let tokens = embedder.count_tokens(&format!("{}{}", r.prefix, r.text))?;
            Ok(Input::new(&r.prefix, &r.text, tokens))
        })
        .collect::<Result<Vec<_>, crate::embed::EmbedError>>()?;
    let (vectors, _) = embed_cached(embedder, cache, &inputs, REF_BATCH_TOKENS, &mut |_, _| {})?;
    Ok(vectors)
}

/// Tokens per encoder batch when compare, sweep and explore embed (as `kerf embed`'s default).
pub const REF_BATCH_TOKENS: usize = 8192;

pub use crate::pool::ChunkVectors;

/// Chunk vectors of a corpus under a plan, through the cache, and what embedding them did
/// (its `input_tokens` is the plan's encoder cost: every chunk input, or every late-chunking
/// pass).
pub fn embed_chunks(
    corpus: &Corpus,
    chunks: &[Vec<Chunk>],
    plan: &ResolvedPlan,
    embedder: &dyn crate::embed::Embedder,
    cache: Option<&crate::cache::VectorCache>,
    progress: &mut dyn FnMut(usize, usize),
) -> Result<(ChunkVectors, CacheReport), JobError> {
    if let Some(late) = plan.profile.pool.late() {
        let ranges = crate::late::byte_ranges(chunks);
        let prefixes = crate::late::prefixes(plan, chunks);
        let docs = crate::late::documents(
            corpus.docs.iter().map(|d| d.text.as_str()),
            &ranges,
            &prefixes,
        );
        return crate::late::embed_chunks(
            embedder,
            cache,
            &docs,
            &late,
            REF_BATCH_TOKENS,
            progress,
            &std::sync::atomic::AtomicBool::new(false),
        );
    }
    let inputs: Vec<Input<'_>> = corpus
        .docs
        .iter()
        .zip(chunks)
        .flat_map(|(d, cs)| {
            cs.iter().map(move |c| {
                Input::new(
                    plan.prefix_of(c),
                    &d.text[c.byte_range.clone()],
                    plan.chunk_input_tokens(c),
                )
            })
        })
        .collect();
    let (flat, report) = embed_cached(embedder, cache, &inputs, REF_BATCH_TOKENS, progress)?;
    Ok((unflatten(chunks, flat), report))
}

/// Cut, embed, score and measure one plan.
#[allow(clippy::too_many_arguments)]
pub fn evaluate_plan(
    corpus: &Corpus,
    refs: &[Reference],
    ref_vectors: &[Vec<f32>],
    plan: &ResolvedPlan,
    counter: &TokenCounter,
    embedder: &dyn crate::embed::Embedder,
    cache: Option<&crate::cache::VectorCache>,
    progress: &mut dyn FnMut(usize, usize),
) -> Result<PlanEval, JobError> {
    let chunks = cut_corpus(corpus, plan, counter);
    let (vectors, report) = embed_chunks(corpus, &chunks, plan, embedder, cache, progress)?;
    Ok(score_plan(
        corpus,
        refs,
        ref_vectors,
        plan,
        chunks,
        &vectors,
        &report,
    ))
}

/// Score already-embedded chunks under a plan's aggregation; `embedding` is what
/// [`embed_chunks`] reported for them (cost and work done).
pub fn score_plan(
    corpus: &Corpus,
    refs: &[Reference],
    ref_vectors: &[Vec<f32>],
    plan: &ResolvedPlan,
    chunks: Vec<Vec<Chunk>>,
    vectors: &[Vec<Vec<f32>>],
    embedding: &CacheReport,
) -> PlanEval {
    let scores = score_all(
        corpus,
        ref_vectors,
        vectors,
        &chunks,
        plan.profile.pool.chunks,
        plan.profile.pool.temperature,
    );
    PlanEval {
        summary: summarize(corpus, refs, &scores),
        mean_expected: mean_expected_score(corpus, refs, &scores),
        plan: plan.clone(),
        chunks,
        scores,
        input_tokens: embedding.input_tokens,
        embedded: embedding.embedded,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::embed::{Embedder, HashEmbedder};

    #[test]
    fn scoring_with_a_hash_embedder_finds_the_matching_document() {
        // Model-free: two chunks per document from a toy word tokenizer is not needed; use
        // ready-made chunk vectors from the hash embedder.
        let e = HashEmbedder { dim: 64 };
        let docs = vec![
            Document {
                id: "boiler".into(),
                origin: "t".into(),
                text: String::new(),
                layout: None,
            },
            Document {
                id: "timetable".into(),
                origin: "t".into(),
                text: String::new(),
                layout: None,
            },
        ];
        let corpus = Corpus {
            docs,
            analyses: vec![],
        };
        let v = |t: &str| e.embed(&[t]).unwrap().remove(0);
        let chunk_vectors = vec![
            vec![
                v("boiler tubes replaced"),
                v("pressure test passed at 180 psi"),
            ],
            vec![
                v("summer timetable trains every hour"),
                v("fares for children"),
            ],
        ];
        let mk = |n: usize| {
            (0..n)
                .map(|i| Chunk {
                    index: i,
                    byte_range: 0..0,
                    token_range: 0..1,
                    content_tokens: 10,
                    overlap_tokens: 0,
                    sentence_range: 0..0,
                    prefix: None,
                })
                .collect::<Vec<_>>()
        };
        let chunks = vec![mk(2), mk(2)];
        let q = vec![v("what pressure was the boiler test")];
        // Per-dimension max of signed hash features is not a similarity-preserving summary, so
        // it is left out of this check (it is covered by the pool module's own cases).
        for how in ChunkPooling::ALL
            .into_iter()
            .filter(|h| *h != ChunkPooling::DimMax)
        {
            let s = score_all(&corpus, &q, &chunk_vectors, &chunks, how, 0.1);
            assert_eq!(s[0][0].doc, 0, "{how:?}");
        }
        let s = score_all(
            &corpus,
            &q,
            &chunk_vectors,
            &chunks,
            ChunkPooling::Best,
            0.1,
        );
        assert_eq!(s[0][0].best_chunk, 1);
        let refs = vec![Reference {
            id: "q".into(),
            text: "x".into(),
            prefix: String::new(),
            kind: "question".into(),
            expect: [("boiler".to_string(), 1)].into(),
        }];
        assert_eq!(summarize(&corpus, &refs, &s).mrr_at_10, 1.0);
        assert_eq!(rank_of(&s[0], 1), Some(2));
        assert_eq!(tau_between(&s[0], &s[0]), 1.0);
    }
}
