//! Plans as the explorer holds them: a plan cut over the corpus, the in-memory identity of each
//! vector it needs, and its scores once every vector is in (scored by the library's one
//! scoring path, [`kerf::compare::engine::score_views`], as compare and sweep are).
use std::collections::HashMap;

use kerf::compare::engine::{self, Corpus, DocScore};
use kerf::compare::metrics::Summary;
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
    /// Ranking metrics over references with expectations.
    pub summary: Summary,
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

/// In-memory identity of a vector: a chunk by its document and byte range under a prefix, or a
/// reference by its index. Hashing every chunk's text on every key press would cost more than
/// re-cutting; the SQLite cache behind the worker still keys by the text itself.
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
}

/// Cut the corpus under a plan and key every chunk for the cache.
pub fn cut_state(corpus: &Corpus, counter: &TokenCounter, plan: ResolvedPlan) -> PlanState {
    use rayon::prelude::*;
    let chunks = engine::cut_corpus(corpus, &plan, counter);
    let prefix = {
        use std::hash::{Hash, Hasher};
        let mut h = std::collections::hash_map::DefaultHasher::new();
        plan.profile.cut.prefix.hash(&mut h);
        h.finish()
    };
    let keys = chunks
        .par_iter()
        .enumerate()
        .map(|(doc, cs)| {
            cs.iter()
                .map(|c| Ident::Chunk {
                    prefix,
                    doc: doc as u32,
                    start: c.byte_range.start as u32,
                    end: c.byte_range.end as u32,
                })
                .collect::<Vec<Ident>>()
        })
        .collect();
    PlanState {
        plan,
        chunks,
        keys,
        scored: None,
    }
}

/// Score a plan when every vector it needs is in memory.
pub fn score_state(
    st: &PlanState,
    corpus: &Corpus,
    refs: &[Reference],
    vectors: &HashMap<VecId, Vec<f32>>,
) -> Option<Scored> {
    if refs.is_empty() {
        return None;
    }
    let encoding = Encoding::of(&st.plan.profile);
    let ref_vecs: Vec<&[f32]> = (0..refs.len())
        .map(|i| {
            vectors
                .get(&(encoding, Ident::Ref(i as u32)))
                .map(Vec::as_slice)
        })
        .collect::<Option<_>>()?;
    let chunk_vecs: Vec<Vec<&[f32]>> = st
        .keys
        .iter()
        .map(|ks| {
            ks.iter()
                .map(|k| vectors.get(&(encoding, *k)).map(Vec::as_slice))
                .collect::<Option<Vec<_>>>()
        })
        .collect::<Option<_>>()?;
    let (ranking, chunk_cos): (Vec<Vec<DocScore>>, Vec<Vec<Vec<f32>>>) = engine::score_views(
        corpus,
        &ref_vecs,
        &chunk_vecs,
        &st.chunks,
        st.plan.profile.pool.chunks,
        st.plan.profile.pool.temperature,
    )
    .into_iter()
    .map(|s| (s.ranking, s.chunk_cos))
    .unzip();
    let summary = engine::summarize(corpus, refs, &ranking);
    Some(Scored {
        ranking,
        chunk_cos,
        summary,
    })
}
