//! Plans as the explorer holds them: a plan cut over the corpus, the in-memory identity of each
//! vector it needs, and its scores once every vector is in (scored by the library's one
//! scoring paths, [`kerf::compare::engine::score_views`] for references and
//! [`kerf::compare::probes::score`] for self-retrieval probes, as compare and sweep are).
use std::collections::HashMap;
use std::hash::{Hash, Hasher};

use kerf::compare::engine::{self, Corpus, DocScore};
use kerf::compare::metrics::Summary;
use kerf::compare::probes::{Depth, ProbeEval, ProbeSet};
use kerf::compare::refs::Reference;
use kerf::plan::ResolvedPlan;
use kerf::profile::Encoding;
use kerf::split::Chunk;
use kerf::tokens::TokenCounter;

/// The Fit pane's state: which reference the scores are shown for.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct FitView {
    /// Selected reference.
    pub reference: usize,
}

/// Scores of a plan for every reference.
#[derive(Debug, Clone)]
pub struct Scored {
    /// Per reference, documents best first.
    pub ranking: Vec<Vec<DocScore>>,
    /// Per reference and document, the cosine of each chunk.
    pub chunk_cos: Vec<Vec<Vec<f32>>>,
    /// Ranking metrics over references with expectations (over the probes when there are
    /// no references).
    pub summary: Summary,
    /// Self-retrieval figures, when the plan is judged by probes.
    pub probes: Option<ProbeFigures>,
}

/// What self-retrieval probes say of a plan.
#[derive(Debug, Clone, PartialEq)]
pub struct ProbeFigures {
    /// Metrics over all probes.
    pub summary: Summary,
    /// Metrics per depth band.
    pub bands: Vec<(Depth, Summary)>,
    /// Share of probes whose best chunk held the sentence.
    pub chunk_hits: f64,
}

impl Scored {
    /// (rank from 1, score) of a document for a reference.
    pub fn rank_score(&self, reference: usize, doc: usize) -> Option<(usize, f32)> {
        self.ranking[reference]
            .iter()
            .position(|s| s.doc == doc)
            .map(|p| (p + 1, self.ranking[reference][p].score))
    }
}

/// In-memory identity of a vector: a chunk by its document and byte range under a prefix (and,
/// under late chunking, the passes it was pooled from), or a reference by its index. Hashing
/// every chunk's text on every key press would cost more than re-cutting; the SQLite cache
/// behind the worker still keys by the text itself.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Ident {
    /// A chunk of a document.
    Chunk {
        /// Hash of the prefix put before the chunk.
        prefix: u64,
        /// Document index.
        doc: u32,
        /// First byte.
        start: u32,
        /// Byte past the end.
        end: u32,
        /// 0 for a chunk encoded alone; under late chunking a hash of the context, its
        /// overlap and every chunk range of the document (the passes depend on all of them).
        late: u64,
    },
    /// A reference by its index.
    Ref(u32),
}

/// A vector in memory: its identity under an encoding (token pooling and precision).
pub type VecId = (Encoding, Ident);

/// A plan cut over the corpus.
#[derive(Clone)]
pub struct PlanState {
    /// The plan.
    pub plan: ResolvedPlan,
    /// Chunks of each document.
    pub chunks: Vec<Vec<Chunk>>,
    /// Identity of each chunk's vector.
    pub keys: Vec<Vec<Ident>>,
    /// Scores, once every vector is in.
    pub scored: Option<Scored>,
    /// The probes' verdict, once the worker has judged the plan.
    pub probed: Option<ProbeEval>,
}

/// What identifies a plan's probe verdict: everything that shapes its chunks and vectors.
pub fn judge_key(plan: &ResolvedPlan) -> String {
    let p = &plan.profile;
    format!("{:?}{:?}{:?}", p.cut, p.pool, p.model)
}

/// Cut the corpus under a plan and key every chunk for the cache.
pub fn cut_state(corpus: &Corpus, counter: &TokenCounter, plan: ResolvedPlan) -> PlanState {
    use rayon::prelude::*;
    let chunks = engine::cut_corpus(corpus, &plan, counter);
    let prefix = {
        let mut h = std::collections::hash_map::DefaultHasher::new();
        // A template's rendered prefixes depend on the document (in the key) and its room.
        (&plan.profile.cut.prefix, plan.profile.cut.prefix_limit).hash(&mut h);
        h.finish()
    };
    let late = plan.profile.pool.late();
    let keys = chunks
        .par_iter()
        .enumerate()
        .map(|(doc, cs)| {
            let late = late.map_or(0, |o| {
                let mut h = std::collections::hash_map::DefaultHasher::new();
                (o.context, o.overlap).hash(&mut h);
                for c in cs {
                    c.byte_range.hash(&mut h);
                }
                h.finish() | 1
            });
            cs.iter()
                .map(|c| Ident::Chunk {
                    prefix,
                    doc: doc as u32,
                    start: c.byte_range.start as u32,
                    end: c.byte_range.end as u32,
                    late,
                })
                .collect::<Vec<Ident>>()
        })
        .collect();
    PlanState {
        plan,
        chunks,
        keys,
        scored: None,
        probed: None,
    }
}

/// The plan's chunk vectors (`[doc][chunk]`) when every one is in memory.
pub fn chunk_vectors<'v>(
    st: &PlanState,
    vectors: &'v HashMap<VecId, Vec<f32>>,
) -> Option<Vec<Vec<&'v [f32]>>> {
    let encoding = Encoding::of(&st.plan.profile);
    st.keys
        .iter()
        .map(|ks| {
            ks.iter()
                .map(|k| vectors.get(&(encoding, *k)).map(Vec::as_slice))
                .collect::<Option<Vec<_>>>()
        })
        .collect()
}

/// Vectors of references `range` under the plan's encoding, when all are in memory.
pub fn ref_vectors<'v>(
    st: &PlanState,
    range: std::ops::Range<usize>,
    vectors: &'v HashMap<VecId, Vec<f32>>,
) -> Option<Vec<&'v [f32]>> {
    let encoding = Encoding::of(&st.plan.profile);
    range
        .map(|i| {
            vectors
                .get(&(encoding, Ident::Ref(i as u32)))
                .map(Vec::as_slice)
        })
        .collect()
}

/// Score a plan when every vector it needs is in memory and, with probes, the worker's verdict
/// is in. `refs` are the references the user gave followed by one per probe of `set`.
pub fn score_state(
    st: &PlanState,
    corpus: &Corpus,
    refs: &[Reference],
    set: Option<&ProbeSet>,
    vectors: &HashMap<VecId, Vec<f32>>,
) -> Option<Scored> {
    if refs.is_empty() {
        return None;
    }
    let probes = set.map_or(0, |s| s.probes.len());
    let given = refs.len() - probes;
    let chunk_vecs = chunk_vectors(st, vectors)?;
    let mut ranking = Vec::with_capacity(refs.len());
    let mut chunk_cos = Vec::with_capacity(refs.len());
    let mut summary = None;
    if given > 0 {
        let ref_vecs = ref_vectors(st, 0..given, vectors)?;
        for s in engine::score_views(
            corpus,
            &ref_vecs,
            &chunk_vecs,
            &st.chunks,
            st.plan.profile.pool.chunks,
            st.plan.profile.pool.temperature,
        ) {
            ranking.push(s.ranking);
            chunk_cos.push(s.chunk_cos);
        }
        summary = Some(engine::summarize(corpus, &refs[..given], &ranking));
    }
    let mut figures = None;
    if let Some(set) = set.filter(|_| probes > 0) {
        let eval = st.probed.as_ref()?;
        let probe_vecs = ref_vectors(st, given..refs.len(), vectors)?;
        for ((scores, own), (q, p)) in eval
            .scores
            .iter()
            .zip(&eval.own_chunk_cos)
            .zip(probe_vecs.iter().zip(&set.probes))
        {
            ranking.push(scores.clone());
            // The probe's own document shows its chunks with the sentence taken out.
            chunk_cos.push(
                chunk_vecs
                    .iter()
                    .enumerate()
                    .map(|(d, vs)| {
                        if d == p.doc {
                            own.clone()
                        } else {
                            vs.iter().map(|v| kerf::pool::cosine(q, v)).collect()
                        }
                    })
                    .collect(),
            );
        }
        figures = Some(ProbeFigures {
            summary: eval.summary.clone(),
            bands: eval.bands.clone(),
            chunk_hits: eval.chunk_hits,
        });
    }
    Some(Scored {
        ranking,
        chunk_cos,
        summary: summary.unwrap_or_else(|| eval_summary(&figures)),
        probes: figures,
    })
}

fn eval_summary(figures: &Option<ProbeFigures>) -> Summary {
    figures
        .as_ref()
        .map(|f| f.summary.clone())
        .unwrap_or_default()
}
