//! Late chunking: chunk vectors that see their context.
//!
//! Ordinary chunking encodes each chunk alone. Late chunking (Günther et al. 2024, "Late
//! Chunking: Contextual Chunk Embeddings Using Long-Context Embedding Models", arXiv
//! 2409.04701) tokenizes the document once, runs the encoder over passes longer than a chunk,
//! and pools each chunk's own token rows from the pass that holds it. Chunks are cut exactly as
//! for ordinary chunking, so they keep their fit guarantee; only their vectors change.
//!
//! Choices made here where the paper leaves room:
//! - A pass holds whole chunks. A document longer than one pass gets several ("long late
//!   chunking"): each new pass starts `overlap` tokens before its first chunk, so that chunk has
//!   left context too, and the last pass is pulled back to end at the document's end.
//! - The first chunk of a pass takes the start special token (and the prefix, if the plan has
//!   one: under a prefix template, the pass takes its first chunk's prefix, and every pass of a
//!   document keeps room for the longest of its chunks' prefixes) when the pass starts with it, and the last chunk takes the end special token when the
//!   pass ends with it. So a chunk that is a whole pass pools exactly the rows ordinary chunking
//!   pools. Tokens of the overlap and after the last chunk are context only.
//! - A chunk's tokens are the document tokens whose first byte lies in its byte range (a chunk
//!   cut inside a word owns the document tokens that start in it).
//!
//! The planning functions are pure; [`embed_documents`] runs the passes through the cache.
use std::collections::HashMap;
use std::ops::Range;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Instant;

use sha2::{Digest, Sha256};

use crate::cache::VectorCache;
use crate::embed::{EmbedError, Embedder, SpanPass, TokenIds};
use crate::job::{CacheReport, Input, JobError};

/// The late-chunking dimension of a plan.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct LateOptions {
    /// Tokens the encoder sees in one pass, specials and prefix included.
    pub context: usize,
    /// Tokens of left context a pass keeps before its first chunk.
    pub overlap: usize,
}

/// One encoder pass over a document: a run of its content tokens and the chunks it pools.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Pass {
    /// Content tokens of the document the pass covers.
    pub tokens: Range<usize>,
    /// Chunks (indices) whose vectors come from this pass: a contiguous run.
    pub chunks: Range<usize>,
}

/// Each chunk's document tokens: those whose first byte lies in the chunk's byte range, at
/// most `cap` of them (a chunk's own tokens never exceed its window; the cap only guards a
/// tokenizer that reads the whole document differently from the chunk alone).
pub fn chunk_spans(
    offsets: &[Range<usize>],
    chunks: &[Range<usize>],
    cap: usize,
) -> Vec<Range<usize>> {
    chunks
        .iter()
        .map(|c| {
            let lo = offsets.partition_point(|o| o.start < c.start);
            let hi = offsets.partition_point(|o| o.start < c.end);
            lo..hi.min(lo.saturating_add(cap))
        })
        .collect()
}

/// Passes of at most `capacity` content tokens over a document of `n` tokens whose chunks hold
/// `spans` (ascending, each no longer than `capacity`). Every chunk with tokens lands in exactly
/// one pass that holds all of its tokens; a chunk without tokens may sit in a pass's run of
/// chunks but has no rows to pool.
pub fn passes(n: usize, spans: &[Range<usize>], capacity: usize, overlap: usize) -> Vec<Pass> {
    let mut out = Vec::new();
    let mut i = 0;
    while i < spans.len() {
        if spans[i].is_empty() {
            i += 1;
            continue;
        }
        let first = &spans[i];
        let mut start = first.start.saturating_sub(overlap);
        if first.end > start + capacity {
            start = first.end.saturating_sub(capacity);
        }
        // The last pass reaches back for context instead of ending short.
        let tail = n.saturating_sub(capacity);
        if tail < start && tail <= first.start {
            start = tail;
        }
        let end = n.min(start + capacity);
        let mut j = i;
        while j < spans.len()
            && (spans[j].is_empty() || (spans[j].start >= start && spans[j].end <= end))
        {
            j += 1;
        }
        out.push(Pass {
            tokens: start..end,
            chunks: i..j,
        });
        i = j;
    }
    out
}

/// Rows of a pass's output (specials counted: row 0 is the first start special) that chunk
/// `k`'s vector pools. `lead` and `tail` are the specials' counts; `prefix` the prefix tokens
/// that follow the start specials.
pub fn rows_of(
    pass: &Pass,
    span: &Range<usize>,
    (lead, tail): (usize, usize),
    prefix: usize,
) -> Range<usize> {
    let base = lead + prefix;
    let start = if span.start == pass.tokens.start {
        0
    } else {
        base + span.start - pass.tokens.start
    };
    let end = base + span.end - pass.tokens.start;
    let end = if span.end == pass.tokens.end {
        end + tail
    } else {
        end
    };
    start..end
}

/// A pass ready for the encoder: its input, the chunk each span stands for, and cache keys.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct PlannedPass {
    /// Encoder input.
    pub input: SpanPass,
    /// Chunk index of each span.
    pub chunks: Vec<usize>,
    /// Cache key of each span's vector.
    pub keys: Vec<[u8; 32]>,
}

/// Cache key of one span's vector: the pass's ids and the span decide it (the embedder's
/// fingerprint is the cache's other key).
fn span_key(ids: &[u32], span: &Range<usize>) -> [u8; 32] {
    let mut h = Sha256::new();
    h.update(b"kerf-late-v1\0");
    h.update((ids.len() as u64).to_le_bytes());
    for id in ids {
        h.update(id.to_le_bytes());
    }
    h.update((span.start as u64).to_le_bytes());
    h.update((span.end as u64).to_le_bytes());
    h.finalize().into()
}

/// The passes of one document, with `hole` (a byte range, for self-retrieval probes) taken
/// out of the tokens when given: then only passes whose tokens meet the hole are returned,
/// and a chunk left without tokens gets no span. `prefix_ids` holds each chunk's prefix ids
/// (empty: no prefix); a pass takes its first chunk's.
pub fn plan_document(
    tokens: &TokenIds,
    prefix_ids: &[&[u32]],
    chunks: &[Range<usize>],
    options: &LateOptions,
    specials: (usize, usize),
    hole: Option<&Range<usize>>,
) -> Vec<PlannedPass> {
    let longest_prefix = prefix_ids.iter().map(|p| p.len()).max().unwrap_or(0);
    let capacity = options
        .context
        .saturating_sub(specials.0 + specials.1 + longest_prefix)
        .max(1);
    let spans = chunk_spans(&tokens.offsets, chunks, capacity);
    let hole_tokens = hole.map(|h| {
        let lo = tokens.offsets.partition_point(|o| o.start < h.start);
        let hi = tokens.offsets.partition_point(|o| o.start < h.end);
        lo..hi
    });
    let mut out = Vec::new();
    for pass in passes(tokens.ids.len(), &spans, capacity, options.overlap) {
        let cut = match &hole_tokens {
            None => 0..0,
            Some(h) if h.start < pass.tokens.end && h.end > pass.tokens.start && !h.is_empty() => {
                h.start.max(pass.tokens.start)..h.end.min(pass.tokens.end)
            }
            Some(_) => continue,
        };
        let prefix: &[u32] = prefix_ids.get(pass.chunks.start).copied().unwrap_or(&[]);
        let mut ids = prefix.to_vec();
        ids.extend(
            (pass.tokens.clone())
                .filter(|t| !cut.contains(t))
                .map(|t| tokens.ids[t]),
        );
        // A document token's place once the hole's tokens are taken out.
        let shift = |t: usize| -> usize {
            if t >= cut.end {
                t - cut.len()
            } else {
                t.min(cut.start)
            }
        };
        let local = Pass {
            tokens: pass.tokens.start..shift(pass.tokens.end),
            chunks: pass.chunks.clone(),
        };
        let mut input = SpanPass {
            ids,
            spans: Vec::new(),
        };
        let mut idx = Vec::new();
        for k in pass.chunks {
            let kept = shift(spans[k].start)..shift(spans[k].end);
            if !kept.is_empty() {
                input
                    .spans
                    .push(rows_of(&local, &kept, specials, prefix.len()));
                idx.push(k);
            }
        }
        if input.spans.is_empty() {
            continue;
        }
        let keys = input
            .spans
            .iter()
            .map(|s| span_key(&input.ids, s))
            .collect();
        out.push(PlannedPass {
            input,
            chunks: idx,
            keys,
        });
    }
    out
}

/// Vectors per document and chunk, `None` where a chunk got none (see [`embed_documents`]).
pub type PartialVectors = Vec<Vec<Option<Vec<f32>>>>;

/// One document to embed with late chunking: its text and its chunks' byte ranges.
#[derive(Debug, Clone, Copy)]
pub struct LateDocument<'a> {
    /// The document's text.
    pub text: &'a str,
    /// Byte range of each chunk.
    pub chunks: &'a [Range<usize>],
    /// Each chunk's prefix (empty: no prefix at all).
    pub prefixes: &'a [&'a str],
    /// A byte range to take out of the text first (a self-retrieval probe's sentence).
    pub hole: Option<&'a Range<usize>>,
}

/// Each chunk's byte range, per document.
pub fn byte_ranges(chunks: &[Vec<crate::split::Chunk>]) -> Vec<Vec<Range<usize>>> {
    chunks
        .iter()
        .map(|cs| cs.iter().map(|c| c.byte_range.clone()).collect())
        .collect()
}

/// Each chunk's prefix under a plan, per document.
pub fn prefixes<'a>(
    plan: &'a crate::plan::ResolvedPlan,
    chunks: &'a [Vec<crate::split::Chunk>],
) -> Vec<Vec<&'a str>> {
    chunks
        .iter()
        .map(|cs| cs.iter().map(|c| plan.prefix_of(c)).collect())
        .collect()
}

/// The documents of `texts` with their chunks' byte ranges and prefixes (an empty list: no
/// prefix), no hole.
pub fn documents<'a>(
    texts: impl IntoIterator<Item = &'a str>,
    ranges: &'a [Vec<Range<usize>>],
    prefixes: &'a [Vec<&'a str>],
) -> Vec<LateDocument<'a>> {
    texts
        .into_iter()
        .zip(ranges)
        .enumerate()
        .map(|(i, (text, chunks))| LateDocument {
            text,
            chunks,
            prefixes: prefixes.get(i).map_or(&[][..], Vec::as_slice),
            hole: None,
        })
        .collect()
}

/// The passes of every document (`(document, pass)`), tokenized once with the embedder's own
/// tokenizer, and the embedder's specials.
fn plan_all(
    embedder: &dyn Embedder,
    docs: &[LateDocument<'_>],
    options: &LateOptions,
) -> Result<Vec<(usize, PlannedPass)>, JobError> {
    let token_ids = |text: &str| {
        embedder.token_ids(text)?.ok_or_else(|| {
            JobError::Embed(EmbedError::Unsupported(
                "late chunking ([pool] context) needs an encoder that shows its token outputs; this one does not".into(),
            ))
        })
    };
    // Each distinct prefix tokenized once.
    let mut ids_of: HashMap<&str, Vec<u32>> = HashMap::new();
    for p in docs.iter().flat_map(|d| d.prefixes.iter().copied()) {
        if !ids_of.contains_key(p) {
            let ids = if p.is_empty() {
                Vec::new()
            } else {
                token_ids(p)?.ids
            };
            ids_of.insert(p, ids);
        }
    }
    let options = LateOptions {
        context: options.context.min(embedder.max_input_tokens()),
        ..*options
    };
    let mut planned = Vec::new();
    for (d, doc) in docs.iter().enumerate() {
        let tokens = token_ids(doc.text)?;
        let prefix_ids: Vec<&[u32]> = doc.prefixes.iter().map(|p| ids_of[p].as_slice()).collect();
        planned.extend(
            plan_document(
                &tokens,
                &prefix_ids,
                doc.chunks,
                &options,
                embedder.specials(),
                doc.hole,
            )
            .into_iter()
            .map(|p| (d, p)),
        );
    }
    Ok(planned)
}

/// Vectors of every chunk of every document under late chunking, through the cache:
/// `out[doc][chunk]`, `None` for a chunk that has no tokens left (emptied by a hole, or a
/// chunk the tokenizer gives nothing for). With a hole, only chunks of the passes that meet it
/// are returned (the others are `None`). Passes missing from the cache run in batches of at
/// most `batch_tokens` tokens, each stored as soon as it is done. The report's `input_tokens`
/// counts every pass, cached or not: the plan's encoder cost.
#[allow(clippy::too_many_arguments)]
pub fn embed_documents(
    embedder: &dyn Embedder,
    cache: Option<&VectorCache>,
    docs: &[LateDocument<'_>],
    options: &LateOptions,
    batch_tokens: usize,
    progress: &mut dyn FnMut(usize, usize),
    stop: &AtomicBool,
) -> Result<(PartialVectors, CacheReport), JobError> {
    let planned = plan_all(embedder, docs, options)?;
    let fingerprint = embedder.fingerprint();
    let keys: Vec<[u8; 32]> = planned.iter().flat_map(|(_, p)| p.keys.clone()).collect();
    let mut found: HashMap<[u8; 32], Vec<f32>> = HashMap::new();
    if let Some(c) = cache {
        for (k, v) in keys.iter().zip(c.get_many(&fingerprint, &keys)?) {
            if let Some(v) = v {
                found.insert(*k, v);
            }
        }
    }
    let (lead, tail) = embedder.specials();
    let cost = |p: &PlannedPass| p.input.ids.len() + lead + tail;
    let misses: Vec<usize> = (0..planned.len())
        .filter(|&i| planned[i].1.keys.iter().any(|k| !found.contains_key(k)))
        .collect();
    let total: usize = planned.iter().map(|(_, p)| cost(p)).sum();
    let mut done = total - misses.iter().map(|&i| cost(&planned[i].1)).sum::<usize>();
    let mut report = CacheReport {
        inputs: keys.len(),
        input_tokens: total,
        distinct: keys.len(),
        cached: planned
            .iter()
            .filter(|(_, p)| p.keys.iter().all(|k| found.contains_key(k)))
            .map(|(_, p)| p.keys.len())
            .sum(),
        ..Default::default()
    };
    progress(done, total);
    let mut start = 0;
    while start < misses.len() {
        if stop.load(Ordering::Relaxed) {
            return Err(JobError::Stopped);
        }
        let mut end = start + 1;
        let mut used = cost(&planned[misses[start]].1);
        while end < misses.len() && used + cost(&planned[misses[end]].1) <= batch_tokens {
            used += cost(&planned[misses[end]].1);
            end += 1;
        }
        let batch: Vec<SpanPass> = misses[start..end]
            .iter()
            .map(|&i| planned[i].1.input.clone())
            .collect();
        let t = Instant::now();
        let out = embedder.embed_spans(&batch)?;
        report.encoder_seconds += t.elapsed().as_secs_f64();
        if out.len() != batch.len() {
            return Err(JobError::VectorCount {
                expected: batch.len(),
                got: out.len(),
            });
        }
        let mut items = Vec::new();
        for (&i, vs) in misses[start..end].iter().zip(out) {
            let p = &planned[i].1;
            if vs.len() != p.keys.len() {
                return Err(JobError::VectorCount {
                    expected: p.keys.len(),
                    got: vs.len(),
                });
            }
            for (k, v) in p.keys.iter().zip(vs) {
                items.push((*k, v.clone()));
                found.insert(*k, v);
            }
            report.embedded += p.keys.len();
        }
        if let Some(c) = cache {
            c.put_many(&fingerprint, &items)?;
        }
        report.embedded_tokens += used;
        done += used;
        progress(done, total);
        start = end;
    }
    let mut out: PartialVectors = docs.iter().map(|d| vec![None; d.chunks.len()]).collect();
    for (d, p) in &planned {
        for (k, key) in p.chunks.iter().zip(&p.keys) {
            out[*d][*k] = found.get(key).cloned();
        }
    }
    Ok((out, report))
}

/// Every chunk's late-chunked vector (`docs` without holes): [`embed_documents`], then each
/// chunk that owns no token of the document's own tokenization (a piece cut inside a word
/// whose token starts in the chunk before) encoded alone, as ordinary chunking would, through
/// the cache. The report covers both.
#[allow(clippy::too_many_arguments)]
pub fn embed_chunks(
    embedder: &dyn Embedder,
    cache: Option<&VectorCache>,
    docs: &[LateDocument<'_>],
    options: &LateOptions,
    batch_tokens: usize,
    progress: &mut dyn FnMut(usize, usize),
    stop: &AtomicBool,
) -> Result<(crate::pool::ChunkVectors, CacheReport), JobError> {
    let (vectors, mut report) =
        embed_documents(embedder, cache, docs, options, batch_tokens, progress, stop)?;
    let mut inputs: Vec<Input<'_>> = Vec::new();
    for (d, vs) in docs.iter().zip(&vectors) {
        for (k, (c, v)) in d.chunks.iter().zip(vs).enumerate() {
            if v.is_none() {
                let text = &d.text[c.clone()];
                let prefix = d.prefixes.get(k).copied().unwrap_or("");
                let tokens = embedder.count_tokens(&format!("{prefix}{text}"))?;
                inputs.push(Input::new(prefix, text, tokens));
            }
        }
    }
    let mut alone = Vec::new().into_iter();
    if !inputs.is_empty() {
        let (v, r) = crate::job::embed_cached_until(
            embedder,
            cache,
            &inputs,
            batch_tokens,
            &mut |_, _| {},
            stop,
        )?;
        report.add(&r);
        alone = v.into_iter();
    }
    Ok((
        vectors
            .into_iter()
            .map(|vs| {
                vs.into_iter()
                    .map(|v| v.unwrap_or_else(|| alone.next().expect("one vector per gap")))
                    .collect()
            })
            .collect(),
        report,
    ))
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn ranges(bounds: &[usize]) -> Vec<Range<usize>> {
        bounds.windows(2).map(|w| w[0]..w[1]).collect()
    }

    #[test]
    fn a_chunk_that_is_the_whole_pass_takes_both_specials_and_the_prefix() {
        let p = Pass {
            tokens: 0..10,
            chunks: 0..1,
        };
        assert_eq!(rows_of(&p, &(0..10), (1, 1), 3), 0..15);
    }

    #[test]
    fn inner_chunks_pool_only_their_own_rows() {
        let p = Pass {
            tokens: 4..20,
            chunks: 0..3,
        };
        // Overlap context 4..6 comes first: the chunk at 6..10 does not take the start special.
        assert_eq!(rows_of(&p, &(6..10), (1, 1), 0), 3..7);
        assert_eq!(rows_of(&p, &(10..20), (1, 1), 0), 7..18);
        assert_eq!(rows_of(&p, &(4..8), (1, 1), 2), 0..7);
    }

    #[test]
    fn a_short_document_is_one_pass() {
        let spans = ranges(&[0, 30, 60, 90]);
        assert_eq!(
            passes(90, &spans, 510, 64),
            vec![Pass {
                tokens: 0..90,
                chunks: 0..3
            }]
        );
    }

    #[test]
    fn a_long_document_gets_passes_with_left_context() {
        let spans = ranges(&[0, 100, 200, 300, 400, 500, 600]);
        let ps = passes(600, &spans, 250, 50);
        assert_eq!(ps[0].tokens, 0..250);
        assert_eq!(ps[0].chunks, 0..2);
        assert_eq!(ps[1].tokens, 150..400);
        assert_eq!(ps[1].chunks, 2..4);
        // The last pass reaches back to end at the document's end.
        assert_eq!(ps[2].tokens, 350..600);
        assert_eq!(ps[2].chunks, 4..6);
    }

    proptest! {
        // Every chunk with tokens is in exactly one pass, which holds all its tokens and fits.
        #[test]
        fn every_chunk_is_pooled_from_one_pass_that_holds_it(
            lens in proptest::collection::vec(0usize..120, 1..40),
            back in proptest::collection::vec(0usize..60, 40),
            capacity in 120usize..600,
            overlap in 0usize..200,
        ) {
            // Chunks in order, each starting at or after the one before (overlaps allowed).
            let mut spans = Vec::new();
            let mut at = 0usize;
            for (i, &l) in lens.iter().enumerate() {
                let start = at.saturating_sub(back[i].min(l / 2));
                let start = start.max(spans.last().map_or(0, |s: &Range<usize>| s.start));
                spans.push(start..start + l);
                at = start + l;
            }
            let n = spans.iter().map(|s| s.end).max().unwrap_or(0) + 7;
            let ps = passes(n, &spans, capacity, overlap);
            let mut seen = vec![0usize; spans.len()];
            for p in &ps {
                prop_assert!(p.tokens.len() <= capacity);
                prop_assert!(p.tokens.end <= n);
                for k in p.chunks.clone() {
                    seen[k] += 1;
                    if !spans[k].is_empty() {
                        prop_assert!(spans[k].start >= p.tokens.start && spans[k].end <= p.tokens.end,
                            "chunk {k} {:?} outside pass {:?}", spans[k], p.tokens);
                    }
                }
            }
            for (k, s) in spans.iter().enumerate() {
                if !s.is_empty() {
                    prop_assert_eq!(seen[k], 1, "chunk {} {:?}", k, s);
                }
            }
        }
    }

    #[test]
    fn chunk_spans_follow_the_first_byte_of_each_token() {
        // "ab cd|ef gh": tokens ab, cd, ##ef (starting inside the second chunk), gh.
        let offsets = vec![0..2, 3..5, 5..7, 8..10];
        let spans = chunk_spans(&offsets, &[0..5, 5..10], 100);
        assert_eq!(spans, vec![0..2, 2..4]);
    }

    #[test]
    fn a_hole_takes_its_tokens_out_and_shifts_the_rows_after_it() {
        let tokens = TokenIds {
            ids: (100..110).collect(),
            offsets: (0..10).map(|i| i * 3..i * 3 + 2).collect(),
        };
        let options = LateOptions {
            context: 64,
            overlap: 0,
        };
        let chunks = vec![0..12, 12..30];
        let full = plan_document(&tokens, &[], &chunks, &options, (1, 1), None);
        assert_eq!(full.len(), 1);
        assert_eq!(full[0].input.spans, vec![0..5, 5..12]);
        // Take out tokens 2 and 3 (bytes 6..11): the first chunk keeps 2 tokens.
        let holed = plan_document(&tokens, &[], &chunks, &options, (1, 1), Some(&(6..11)));
        assert_eq!(
            holed[0].input.ids,
            vec![100, 101, 104, 105, 106, 107, 108, 109]
        );
        assert_eq!(holed[0].input.spans, vec![0..3, 3..10]);
        assert_ne!(holed[0].keys, full[0].keys);
        // A hole that covers a whole chunk leaves it without a span.
        let emptied = plan_document(&tokens, &[], &chunks, &options, (1, 1), Some(&(0..12)));
        assert_eq!(emptied[0].chunks, vec![1]);
        assert_eq!(emptied[0].input.spans, vec![0..8]);
    }
}
