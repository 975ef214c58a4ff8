//! Judging plans without labelled queries: the inverse cloze task (Lee, Chang and Toutanova
//! 2019, "Latent Retrieval for Weakly Supervised Open Domain Question Answering").
//!
//! A sentence drawn from a document becomes a query (a *probe*) that must find its own
//! document. While a probe is scored, the sentence is taken out of the chunks that hold it, so
//! the match cannot be verbatim: only those chunks are embedded again (through the cache), and
//! every other document keeps its ordinary vectors. The metrics are the ones references give
//! (MRR@10, nDCG@10, Recall@k with the probe's own document as the one relevant document), over
//! all probes and per depth band, so what a truncating plan never sees shows up in the bands
//! past its window.
use std::collections::{HashMap, HashSet};
use std::ops::Range;

use serde::Serialize;

use super::engine::{self, new_tokens, Corpus, DocScore, REF_BATCH_TOKENS};
use super::metrics::{self, Summary};
use super::refs::Reference;
use crate::embed::Embedder;
use crate::job::{embed_cached, Input, JobError};
use crate::plan::ResolvedPlan;
use crate::pool;
use crate::segment::BlockKind;
use crate::split::Chunk;

/// How probes are drawn.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct ProbeOptions {
    /// How many probes to draw at most.
    pub count: usize,
    /// Seed of the draw; the same corpus and seed give the same probes.
    pub seed: u64,
    /// Shortest sentence taken, in content tokens.
    pub min_tokens: usize,
    /// Longest sentence taken, in content tokens.
    pub max_tokens: usize,
    /// Tokens counted as a document's first window for the depth bands (the model's
    /// configured length is the natural choice: what a truncating encoder sees).
    pub first_window: usize,
}

impl ProbeOptions {
    /// `count` probes with the given seed and first window; sentences of 8 to 64 tokens.
    pub fn new(count: usize, seed: u64, first_window: usize) -> Self {
        Self {
            count,
            seed,
            min_tokens: 8,
            max_tokens: 64,
            first_window,
        }
    }
}

/// Where in its document a probe's sentence starts.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Depth {
    /// Within the first window of tokens.
    First,
    /// After the first window and before the last tenth.
    Middle,
    /// In the last tenth of the document's tokens (and past the first window).
    Last,
}

impl Depth {
    /// The bands in document order.
    pub const ALL: [Depth; 3] = [Depth::First, Depth::Middle, Depth::Last];

    /// The band of a sentence starting at content token `start` of a document of `total`
    /// tokens.
    pub fn of(start: usize, total: usize, first_window: usize) -> Depth {
        if start < first_window {
            Depth::First
        } else if start * 10 >= total * 9 {
            Depth::Last
        } else {
            Depth::Middle
        }
    }

    /// A short name for tables.
    pub fn label(self) -> &'static str {
        match self {
            Depth::First => "first window",
            Depth::Middle => "middle",
            Depth::Last => "last tenth",
        }
    }
}

/// One probe: a sentence of a document.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Probe {
    /// Index of the document in the corpus.
    pub doc: usize,
    /// Byte range of the sentence in the document's text.
    pub bytes: Range<usize>,
    /// Content tokens of the sentence.
    pub tokens: usize,
    /// Where it starts in its document.
    pub depth: Depth,
}

/// Why candidate sentences were passed over.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize)]
pub struct Skipped {
    /// Shorter than `min_tokens`.
    pub short: usize,
    /// Longer than `max_tokens`.
    pub long: usize,
    /// In a heading, code block or table rather than running text.
    pub not_prose: usize,
    /// Found (after case and spacing are evened out) in more than one document.
    pub repeated: usize,
}

/// The probes drawn from a corpus and how they were drawn.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct ProbeSet {
    /// The probes, in draw order.
    pub probes: Vec<Probe>,
    /// The options used.
    pub options: ProbeOptions,
    /// Sentences that qualified.
    pub candidates: usize,
    /// Documents at least one probe was drawn from.
    pub documents: usize,
    /// Sentences passed over, by reason.
    pub skipped: Skipped,
}

impl ProbeSet {
    /// Probes per depth band.
    pub fn per_band(&self) -> [(Depth, usize); 3] {
        Depth::ALL.map(|b| (b, self.probes.iter().filter(|p| p.depth == b).count()))
    }
}

/// SplitMix64 (Steele, Lea and Flood 2014): small, fixed for all time, so a seed gives the same
/// draw whatever the build.
fn splitmix(state: &mut u64) -> u64 {
    *state = state.wrapping_add(0x9e37_79b9_7f4a_7c15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

fn below(state: &mut u64, n: usize) -> usize {
    (splitmix(state) % n as u64) as usize
}

/// Lower case with runs of whitespace as one space: the form in which sentences are compared
/// across documents.
fn normalized(s: &str) -> String {
    s.split_whitespace()
        .map(str::to_lowercase)
        .collect::<Vec<_>>()
        .join(" ")
}

/// Content tokens whose start lies inside `bytes`, as a token range.
fn token_span(offsets: &[Range<usize>], bytes: &Range<usize>) -> Range<usize> {
    let a = offsets.partition_point(|o| o.start < bytes.start);
    let b = offsets.partition_point(|o| o.start < bytes.end);
    a..b
}

/// Draw probes: qualifying sentences (running text, `min_tokens..=max_tokens` tokens, found in
/// one document only) spread over documents in a seeded order, and within each document over
/// the depth bands in turn (first window, middle, last tenth), at random within a band.
pub fn draw(corpus: &Corpus, options: &ProbeOptions) -> ProbeSet {
    let mut skipped = Skipped::default();
    // Which documents each normalized sentence occurs in.
    let mut seen_in: HashMap<String, HashSet<usize>> = HashMap::new();
    for (d, a) in corpus.analyses.iter().enumerate() {
        for s in &a.segments.sentences {
            seen_in
                .entry(normalized(&corpus.docs[d].text[s.clone()]))
                .or_default()
                .insert(d);
        }
    }
    // Candidates per document per band.
    let mut by_doc: Vec<[Vec<Probe>; 3]> = Vec::with_capacity(corpus.docs.len());
    let mut candidates = 0;
    for (d, a) in corpus.analyses.iter().enumerate() {
        let text = &corpus.docs[d].text;
        let total = a.tokens.len();
        let mut bands: [Vec<Probe>; 3] = Default::default();
        for (s, &pi) in a
            .segments
            .sentences
            .iter()
            .zip(&a.segments.sentence_paragraph)
        {
            let kind = a.segments.paragraphs[pi].kind;
            if !matches!(kind, BlockKind::Prose | BlockKind::ListItem) {
                skipped.not_prose += 1;
                continue;
            }
            let span = token_span(&a.tokens.offsets, s);
            if span.len() < options.min_tokens {
                skipped.short += 1;
                continue;
            }
            if span.len() > options.max_tokens {
                skipped.long += 1;
                continue;
            }
            if seen_in[&normalized(&text[s.clone()])].len() > 1 {
                skipped.repeated += 1;
                continue;
            }
            // The document must keep some text of its own once the sentence is out.
            if total - span.len() < options.min_tokens {
                skipped.short += 1;
                continue;
            }
            let depth = Depth::of(span.start, total, options.first_window);
            let slot = Depth::ALL.iter().position(|&b| b == depth).unwrap_or(0);
            bands[slot].push(Probe {
                doc: d,
                bytes: s.clone(),
                tokens: span.len(),
                depth,
            });
            candidates += 1;
        }
        by_doc.push(bands);
    }
    let mut state = options.seed;
    // Documents in a seeded order (Fisher-Yates), then round-robin over them.
    let mut order: Vec<usize> = (0..corpus.docs.len()).collect();
    for i in (1..order.len()).rev() {
        order.swap(i, below(&mut state, i + 1));
    }
    let mut next_band = vec![0usize; corpus.docs.len()];
    let mut probes = Vec::new();
    let mut used_docs = HashSet::new();
    while probes.len() < options.count {
        let mut took = false;
        for &d in &order {
            if probes.len() >= options.count {
                break;
            }
            // The document's next band that still has candidates.
            let Some(slot) = (0..3)
                .map(|k| (next_band[d] + k) % 3)
                .find(|&b| !by_doc[d][b].is_empty())
            else {
                continue;
            };
            next_band[d] = (slot + 1) % 3;
            let pool = &mut by_doc[d][slot];
            let i = below(&mut state, pool.len());
            probes.push(pool.swap_remove(i));
            used_docs.insert(d);
            took = true;
        }
        if !took {
            break;
        }
    }
    ProbeSet {
        probes,
        options: options.clone(),
        candidates,
        documents: used_docs.len(),
        skipped,
    }
}

/// The probes as references: the sentence is the text, its document the one expected.
pub fn references(corpus: &Corpus, set: &ProbeSet, prefix: &str) -> Vec<Reference> {
    set.probes
        .iter()
        .map(|p| {
            let doc = &corpus.docs[p.doc];
            Reference {
                id: format!("probe:{}@{}", doc.id, p.bytes.start),
                text: doc.text[p.bytes.clone()].trim().to_string(),
                prefix: prefix.to_string(),
                kind: "passage".into(),
                expect: [(doc.id.clone(), 1)].into(),
            }
        })
        .collect()
}

/// A chunk's text with the bytes of `hole` taken out, or `None` when the chunk does not meet
/// the hole. An empty string means nothing of the chunk is left.
pub fn holed(text: &str, chunk: &Range<usize>, hole: &Range<usize>) -> Option<String> {
    if hole.end <= chunk.start || hole.start >= chunk.end {
        return None;
    }
    let before = &text[chunk.start..hole.start.max(chunk.start)];
    let after = &text[hole.end.min(chunk.end)..chunk.end];
    let joined = match (before.trim_end(), after.trim_start()) {
        ("", a) => a.to_string(),
        (b, "") => b.to_string(),
        (b, a) => format!("{b} {a}"),
    };
    Some(joined)
}

/// A chunk of a probe's own document whose vector changes while the probe is scored.
#[derive(Debug, Clone, PartialEq)]
struct Replacement {
    /// Chunk index.
    chunk: usize,
    /// Its vector without the sentence; `None` drops the chunk (nothing of it is left).
    vector: Option<Vec<f32>>,
    /// The chunk held the sentence (not merely saw it as context).
    held: bool,
}

/// Per probe, replacements in chunk order; chunks embedded now; encoder tokens spent.
type Holed = (Vec<Vec<Replacement>>, usize, usize);

/// Ordinary chunking: each chunk that held the sentence is embedded again alone without it.
fn holed_alone(
    corpus: &Corpus,
    set: &ProbeSet,
    chunks: &[Vec<Chunk>],
    plan: &ResolvedPlan,
    embedder: &dyn Embedder,
    cache: Option<&crate::cache::VectorCache>,
) -> Result<Holed, JobError> {
    let holes: Vec<Vec<(usize, String)>> = set
        .probes
        .iter()
        .map(|p| {
            let text = &corpus.docs[p.doc].text;
            chunks[p.doc]
                .iter()
                .enumerate()
                .filter_map(|(i, c)| holed(text, &c.byte_range, &p.bytes).map(|t| (i, t)))
                .collect()
        })
        .collect();
    let mut inputs: Vec<Input<'_>> = Vec::new();
    for (p, hs) in set.probes.iter().zip(&holes) {
        for (i, t) in hs {
            if !t.is_empty() {
                let prefix = plan.prefix_of(&chunks[p.doc][*i]);
                let tokens = embedder.count_tokens(&format!("{prefix}{t}"))?;
                inputs.push(Input::new(prefix, t, tokens));
            }
        }
    }
    let holed_tokens = inputs.iter().map(|x| x.tokens).sum();
    let (vectors, report) =
        embed_cached(embedder, cache, &inputs, REF_BATCH_TOKENS, &mut |_, _| {})?;
    let mut next = vectors.into_iter();
    let replacements = holes
        .into_iter()
        .map(|hs| {
            hs.into_iter()
                .map(|(chunk, t)| Replacement {
                    chunk,
                    vector: (!t.is_empty()).then(|| next.next().expect("one vector per input")),
                    held: true,
                })
                .collect()
        })
        .collect();
    Ok((replacements, report.embedded, holed_tokens))
}

/// Late chunking: the sentence's tokens are taken out of every pass that holds them, and every
/// chunk of those passes is pooled again (its context lost the sentence too).
fn holed_in_context(
    corpus: &Corpus,
    set: &ProbeSet,
    chunks: &[Vec<Chunk>],
    plan: &ResolvedPlan,
    late: &crate::late::LateOptions,
    embedder: &dyn Embedder,
    cache: Option<&crate::cache::VectorCache>,
) -> Result<Holed, JobError> {
    let ranges = crate::late::byte_ranges(chunks);
    let prefixes = crate::late::prefixes(plan, chunks);
    let docs: Vec<crate::late::LateDocument<'_>> = set
        .probes
        .iter()
        .map(|p| crate::late::LateDocument {
            text: &corpus.docs[p.doc].text,
            chunks: &ranges[p.doc],
            prefixes: &prefixes[p.doc],
            hole: Some(&p.bytes),
        })
        .collect();
    let (vectors, report) = crate::late::embed_documents(
        embedder,
        cache,
        &docs,
        late,
        REF_BATCH_TOKENS,
        &mut |_, _| {},
        &std::sync::atomic::AtomicBool::new(false),
    )?;
    let replacements = set
        .probes
        .iter()
        .zip(vectors)
        .map(|(p, vs)| {
            let text = &corpus.docs[p.doc].text;
            vs.into_iter()
                .enumerate()
                .filter_map(|(chunk, vector)| {
                    let rest = holed(text, &ranges[p.doc][chunk], &p.bytes);
                    let held = rest.is_some();
                    // A chunk that held the sentence and got no vector is dropped only when
                    // nothing of it is left.
                    let emptied = rest.is_some_and(|t| t.is_empty());
                    (vector.is_some() || emptied).then_some(Replacement {
                        chunk,
                        vector,
                        held,
                    })
                })
                .collect()
        })
        .collect();
    Ok((replacements, report.embedded, report.input_tokens))
}

/// A plan judged by its probes.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ProbeEval {
    /// Per probe, documents best first (its own document's chunks holed).
    #[serde(skip)]
    pub scores: Vec<Vec<DocScore>>,
    /// Metrics over all probes.
    pub summary: Summary,
    /// Metrics per depth band (bands without probes are left out).
    pub bands: Vec<(Depth, Summary)>,
    /// Share of probes whose own document's best chunk is one that held the sentence.
    pub chunk_hits: f64,
    /// Holed chunks embedded now (not found in the cache).
    pub embedded: usize,
    /// Encoder-input tokens of the holed chunks: the extra cost of judging by probes.
    pub holed_tokens: usize,
    /// Per probe, the cosine of each chunk of its own document with the sentence taken out
    /// (aligned with the document's chunks; NaN for a chunk nothing was left of), for showing
    /// where in the document a probe lands.
    #[serde(skip)]
    pub own_chunk_cos: Vec<Vec<f32>>,
}

/// Score a plan's already-embedded chunks (`vectors[doc][chunk]`) against probes whose vectors
/// are `probe_vectors` (see [`references`] and `engine::embed_refs`). The chunks each probe's
/// sentence touches are embedded again without it, through the cache.
#[allow(clippy::too_many_arguments)]
pub fn score(
    corpus: &Corpus,
    set: &ProbeSet,
    probe_vectors: &[Vec<f32>],
    plan: &ResolvedPlan,
    chunks: &[Vec<Chunk>],
    vectors: &[Vec<Vec<f32>>],
    embedder: &dyn Embedder,
    cache: Option<&crate::cache::VectorCache>,
) -> Result<ProbeEval, JobError> {
    let (replacements, embedded, holed_tokens) = match plan.profile.pool.late() {
        None => holed_alone(corpus, set, chunks, plan, embedder, cache)?,
        Some(late) => holed_in_context(corpus, set, chunks, plan, &late, embedder, cache)?,
    };
    let how = plan.profile.pool.chunks;
    let temperature = plan.profile.pool.temperature;
    let doc_vecs: Vec<Option<Vec<f32>>> = vectors
        .iter()
        .zip(chunks)
        .map(|(vs, cs)| {
            let views: Vec<&[f32]> = vs.iter().map(Vec::as_slice).collect();
            pool::doc_vector(how, &views, &new_tokens(cs), temperature)
        })
        .collect();
    let mut scores = Vec::with_capacity(set.probes.len());
    let mut own_chunk_cos = Vec::with_capacity(set.probes.len());
    let mut hits = 0usize;
    for ((p, q), rs) in set.probes.iter().zip(probe_vectors).zip(&replacements) {
        // The probe's own document: replaced chunks swapped in, emptied ones dropped.
        let mut own: Vec<&[f32]> = Vec::new();
        let mut own_new: Vec<usize> = Vec::new();
        let mut held = Vec::new(); // positions in `own` of chunks that held the sentence
        let mut aligned = Vec::with_capacity(chunks[p.doc].len());
        let fresh = new_tokens(&chunks[p.doc]);
        let mut r = rs.iter().peekable();
        for (i, v) in vectors[p.doc].iter().enumerate() {
            match r.peek() {
                Some(x) if x.chunk == i => {
                    match &x.vector {
                        Some(v) => {
                            if x.held {
                                held.push(own.len());
                            }
                            own.push(v);
                            own_new.push(fresh[i]);
                            aligned.push(pool::cosine(q, v));
                        }
                        None => aligned.push(f32::NAN),
                    }
                    r.next();
                }
                _ => {
                    own.push(v);
                    own_new.push(fresh[i]);
                    aligned.push(pool::cosine(q, v));
                }
            }
        }
        own_chunk_cos.push(aligned);
        let own_vec = pool::doc_vector(how, &own, &own_new, temperature);
        let chunk_cos: Vec<Vec<f32>> = vectors
            .iter()
            .enumerate()
            .map(|(d, vs)| {
                if d == p.doc {
                    own.iter().map(|v| pool::cosine(q, v)).collect()
                } else {
                    vs.iter().map(|v| pool::cosine(q, v)).collect()
                }
            })
            .collect();
        let ranking = engine::rank_documents_by(
            corpus,
            q,
            &chunk_cos,
            &|d| {
                if d == p.doc {
                    own_vec.as_deref()
                } else {
                    doc_vecs[d].as_deref()
                }
            },
            how,
        );
        if held.contains(&engine::best_chunk(&chunk_cos[p.doc])) && !chunk_cos[p.doc].is_empty() {
            hits += 1;
        }
        scores.push(ranking);
    }
    let refs = references(corpus, set, "");
    let summary = engine::summarize(corpus, &refs, &scores);
    let bands = Depth::ALL
        .into_iter()
        .filter_map(|b| {
            let (r, s): (Vec<&Reference>, Vec<&Vec<DocScore>>) = refs
                .iter()
                .zip(&scores)
                .zip(&set.probes)
                .filter(|(_, p)| p.depth == b)
                .map(|(x, _)| x)
                .unzip();
            if r.is_empty() {
                return None;
            }
            let rankings: Vec<Vec<String>> = s
                .iter()
                .map(|s| s.iter().map(|d| corpus.docs[d.doc].id.clone()).collect())
                .collect();
            Some((
                b,
                metrics::summarize(
                    rankings
                        .iter()
                        .zip(&r)
                        .map(|(x, q)| (x.as_slice(), &q.expect)),
                ),
            ))
        })
        .collect();
    Ok(ProbeEval {
        chunk_hits: hits as f64 / set.probes.len().max(1) as f64,
        scores,
        summary,
        bands,
        embedded,
        holed_tokens,
        own_chunk_cos,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bands_follow_the_first_window_and_the_last_tenth() {
        assert_eq!(Depth::of(0, 1000, 256), Depth::First);
        assert_eq!(Depth::of(255, 1000, 256), Depth::First);
        assert_eq!(Depth::of(256, 1000, 256), Depth::Middle);
        assert_eq!(Depth::of(899, 1000, 256), Depth::Middle);
        assert_eq!(Depth::of(900, 1000, 256), Depth::Last);
        // A document shorter than the window is all first window.
        assert_eq!(Depth::of(190, 200, 256), Depth::First);
    }

    #[test]
    fn holes_take_out_exactly_the_sentence() {
        let t = "Alpha one. Beta two. Gamma three.";
        let s = 11..20; // "Beta two."
        assert_eq!(&t[s.clone()], "Beta two.");
        assert_eq!(
            holed(t, &(0..t.len()), &s).unwrap(),
            "Alpha one. Gamma three."
        );
        assert_eq!(holed(t, &(0..10), &s), None);
        assert_eq!(holed(t, &(21..t.len()), &s), None);
        assert_eq!(holed(t, &(11..20), &s).unwrap(), "");
        // A chunk holding only part of the sentence keeps the rest of itself.
        assert_eq!(holed(t, &(0..16), &s).unwrap(), "Alpha one.");
        assert_eq!(holed(t, &(16..t.len()), &s).unwrap(), "Gamma three.");
    }

    #[test]
    fn normalized_evens_out_case_and_spacing() {
        assert_eq!(
            normalized("  The  Valve\nwas shut. "),
            "the valve was shut."
        );
    }
}
