//! Sweeps: a grid of plans, their quality and their cost, the Pareto front, a recommendation.
//!
//! Plans that differ only in chunk aggregation share one set of chunks and one set of vectors;
//! [`group_plans`] puts them together so each distinct chunk set is embedded once.
use std::collections::BTreeMap;

use serde::Serialize;

use crate::embed::{Precision, TokenPooling};
use crate::pool::ChunkPooling;
use crate::profile::{Boundary, Profile};

/// Errors in a grid description.
#[derive(Debug, thiserror::Error)]
#[error("grid: {0}")]
pub struct GridError(pub String);

/// The values to sweep along each dimension.
#[derive(Debug, Clone, PartialEq)]
pub struct Grid {
    /// Windows in tokens (specials included).
    pub window: Vec<usize>,
    /// Overlaps in tokens.
    pub overlap: Vec<usize>,
    /// Boundary rules.
    pub boundary: Vec<Boundary>,
    /// Token poolings.
    pub tokens: Vec<TokenPooling>,
    /// Chunk aggregations.
    pub chunks: Vec<ChunkPooling>,
    /// Precisions.
    pub precision: Vec<Precision>,
    /// Late-chunking contexts in tokens (0: each chunk encoded alone).
    pub context: Vec<usize>,
}

impl Default for Grid {
    fn default() -> Self {
        Self {
            window: vec![128, 256],
            overlap: vec![0, 32],
            boundary: vec![Boundary::Token, Boundary::Sentence, Boundary::Paragraph],
            tokens: vec![TokenPooling::Mean],
            chunks: vec![
                ChunkPooling::Mean,
                ChunkPooling::TokenMean,
                ChunkPooling::Best,
            ],
            precision: vec![Precision::F32],
            context: vec![0],
        }
    }
}

fn parse_value<T: serde::de::DeserializeOwned>(key: &str, v: &str) -> Result<T, GridError> {
    T::deserialize(serde::de::value::StrDeserializer::<serde::de::value::Error>::new(v))
        .map_err(|e| GridError(format!("`{key}={v}`: {e}")))
}

impl Grid {
    /// Parse `key=v1,v2 key=v3 …` (keys: window, overlap, boundary, tokens, chunks, precision,
    /// context);
    /// keys not given keep their defaults.
    pub fn parse(spec: &str) -> Result<Self, GridError> {
        let mut g = Grid::default();
        for part in spec.split_whitespace() {
            let (key, values) = part
                .split_once('=')
                .ok_or_else(|| GridError(format!("`{part}` is not key=value[,value…]")))?;
            let vals: Vec<&str> = values.split(',').filter(|v| !v.is_empty()).collect();
            if vals.is_empty() {
                return Err(GridError(format!("`{key}` has no values")));
            }
            let nums = || -> Result<Vec<usize>, GridError> {
                vals.iter()
                    .map(|v| {
                        v.parse::<usize>()
                            .map_err(|_| GridError(format!("`{key}={v}`: not a whole number")))
                    })
                    .collect()
            };
            match key {
                "window" => g.window = nums()?,
                "overlap" => g.overlap = nums()?,
                "context" => g.context = nums()?,
                "boundary" => g.boundary = vals.iter().map(|v| parse_value(key, v)).collect::<Result<_, _>>()?,
                "tokens" => g.tokens = vals.iter().map(|v| parse_value(key, v)).collect::<Result<_, _>>()?,
                "chunks" => g.chunks = vals.iter().map(|v| parse_value(key, v)).collect::<Result<_, _>>()?,
                "precision" => g.precision = vals.iter().map(|v| parse_value(key, v)).collect::<Result<_, _>>()?,
                other => {
                    return Err(GridError(format!(
                        "unknown dimension `{other}` (use window, overlap, boundary, tokens, chunks, precision, context)"
                    )))
                }
            }
        }
        Ok(g)
    }

    /// Every valid plan of the grid, built on `base` (model, prefix, min_chunk, temperature).
    /// Combinations that cannot work (overlap not below the window, overlap with `head`) are
    /// left out; `head` appears once per window with aggregation `first`.
    pub fn plans(&self, base: &Profile) -> Vec<Profile> {
        let mut out = Vec::new();
        let mut seen = std::collections::HashSet::new();
        for &window in &self.window {
            for &boundary in &self.boundary {
                for &overlap in &self.overlap {
                    for &tokens in &self.tokens {
                        for &precision in &self.precision {
                            for (&chunks, &context) in self
                                .chunks
                                .iter()
                                .flat_map(|c| self.context.iter().map(move |x| (c, x)))
                            {
                                let (overlap, chunks) = if boundary == Boundary::Head {
                                    (0, ChunkPooling::First)
                                } else {
                                    (overlap, chunks)
                                };
                                if overlap >= window / 2 {
                                    continue;
                                }
                                // Late chunking needs a pass at least a window long and
                                // token rows to pool.
                                if context > 0 && (context < window || tokens == TokenPooling::Cls)
                                {
                                    continue;
                                }
                                let mut p = base.clone();
                                p.cut.window = window;
                                p.cut.boundary = boundary;
                                p.cut.overlap = overlap;
                                p.cut.min_chunk = base.cut.min_chunk.min(window / 4);
                                p.pool.tokens = tokens;
                                p.pool.chunks = chunks;
                                p.pool.precision = precision;
                                p.pool.context = context;
                                p.name = plan_name(&p);
                                if seen.insert(p.name.clone()) {
                                    out.push(p);
                                }
                            }
                        }
                    }
                }
            }
        }
        out
    }
}

/// A short name for a plan: `sentence-256-o32-mean-best`.
pub fn plan_name(p: &Profile) -> String {
    let tokens = match p.pool.tokens {
        TokenPooling::Mean => "mean",
        TokenPooling::Cls => "cls",
        TokenPooling::Max => "max",
    };
    let mut n = format!("{}-{}", p.cut.boundary.name(), p.cut.window);
    if p.cut.overlap > 0 {
        n.push_str(&format!("-o{}", p.cut.overlap));
    }
    if p.cut.heading_breaks > 0 {
        n.push_str(&format!("-h{}", p.cut.heading_breaks));
    }
    n.push_str(&format!("-{tokens}-{}", p.pool.chunks.name()));
    if p.pool.context > 0 {
        n.push_str(&format!("-late{}", p.pool.context));
    }
    if p.pool.precision != Precision::F32 {
        n.push('-');
        n.push_str(p.pool.precision.name());
    }
    n
}

/// What decides a plan's chunks and vectors (everything but the chunk aggregation).
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct ChunkKey {
    /// Window.
    pub window: usize,
    /// Boundary rule name.
    pub boundary: &'static str,
    /// Overlap.
    pub overlap: usize,
    /// Minimum chunk.
    pub min_chunk: usize,
    /// Heading level that starts a chunk.
    pub heading_breaks: u8,
    /// Token pooling.
    pub tokens: String,
    /// Precision.
    pub precision: String,
    /// Late-chunking context and its pass overlap (0, _: chunks encoded alone).
    pub context: (usize, usize),
}

/// The chunk key of a plan.
pub fn chunk_key(p: &Profile) -> ChunkKey {
    ChunkKey {
        window: p.cut.window,
        boundary: p.cut.boundary.name(),
        overlap: p.cut.overlap,
        min_chunk: p.cut.min_chunk,
        heading_breaks: p.cut.heading_breaks,
        tokens: format!("{:?}", p.pool.tokens),
        precision: format!("{:?}", p.pool.precision),
        context: match p.pool.context {
            0 => (0, 0),
            c => (c, p.pool.context_overlap),
        },
    }
}

/// Plans grouped by chunk key: each group is cut and embedded once.
pub fn group_plans(plans: &[Profile]) -> BTreeMap<ChunkKey, Vec<usize>> {
    let mut g: BTreeMap<ChunkKey, Vec<usize>> = BTreeMap::new();
    for (i, p) in plans.iter().enumerate() {
        g.entry(chunk_key(p)).or_default().push(i);
    }
    g
}

/// A plan's cost.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct Cost {
    /// Chunks over the corpus.
    pub chunks: usize,
    /// Encoder-input tokens (specials, prefix and overlap included).
    pub input_tokens: usize,
    /// `input_tokens` over the corpus' plain content tokens.
    pub overhead: f64,
    /// Padding tokens the encoder computed and threw away.
    pub padding_tokens: usize,
    /// Estimated seconds to embed everything at the throughput measured in this sweep.
    pub embed_seconds: f64,
    /// Bytes of chunk vectors as f32.
    pub storage_f32_bytes: usize,
    /// Bytes of chunk vectors as f16.
    pub storage_f16_bytes: usize,
}

/// Indices of plans on the Pareto front: no other plan is at least as good and at most as
/// costly, and strictly better in one of the two.
pub fn pareto_front(points: &[(f64, f64)]) -> Vec<usize> {
    (0..points.len())
        .filter(|&i| {
            let (qi, ci) = points[i];
            !points
                .iter()
                .enumerate()
                .any(|(j, &(qj, cj))| j != i && qj >= qi && cj <= ci && (qj > qi || cj < ci))
        })
        .collect()
}

/// Pick a plan: the cheapest on the front whose quality is within `tolerance` of the best.
/// Returns its index and a one-line reason.
pub fn recommend(
    names: &[String],
    points: &[(f64, f64)],
    tolerance: f64,
    metric: &str,
) -> Option<(usize, String)> {
    let front = pareto_front(points);
    let best_q = front
        .iter()
        .map(|&i| points[i].0)
        .fold(f64::NEG_INFINITY, f64::max);
    let pick = front
        .iter()
        .copied()
        .filter(|&i| points[i].0 >= best_q - tolerance)
        .min_by(|&a, &b| points[a].1.total_cmp(&points[b].1))?;
    let best = front.iter().copied().find(|&i| points[i].0 == best_q)?;
    let reason = if pick == best {
        format!(
            "{} has the best {metric} ({:.3}) and nothing cheaper comes within {tolerance}",
            names[pick], best_q
        )
    } else {
        format!(
            "{} reaches {metric} {:.3}, within {tolerance} of the best ({:.3}, {}), at {:.0}% of its cost",
            names[pick],
            points[pick].0,
            best_q,
            names[best],
            100.0 * points[pick].1 / points[best].1
        )
    };
    Some((pick, reason))
}

/// Documents for a length-stratified sample of `n`: every document some reference expects, then
/// evenly spaced picks over the documents sorted by length.
pub fn stratified_sample(lengths: &[usize], must: &[usize], n: usize) -> Vec<usize> {
    let mut chosen: std::collections::BTreeSet<usize> = must.iter().copied().collect();
    let mut order: Vec<usize> = (0..lengths.len()).collect();
    order.sort_by_key(|&i| (lengths[i], i));
    let want = n.saturating_sub(chosen.len());
    let rest: Vec<usize> = order.into_iter().filter(|i| !chosen.contains(i)).collect();
    if want > 0 && !rest.is_empty() {
        let step = rest.len() as f64 / want.min(rest.len()) as f64;
        for k in 0..want.min(rest.len()) {
            chosen.insert(rest[((k as f64 + 0.5) * step) as usize]);
        }
    }
    chosen.into_iter().collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn grid_parses_and_expands() {
        let g = Grid::parse("window=128,256 overlap=0,32 boundary=head,sentence chunks=mean,best")
            .unwrap();
        let plans = g.plans(&Profile::default());
        // head: one per window (2); sentence: 2 windows x 2 overlaps x 2 aggregations (8)
        assert_eq!(
            plans.len(),
            10,
            "{:?}",
            plans.iter().map(|p| &p.name).collect::<Vec<_>>()
        );
        let groups = group_plans(&plans);
        assert_eq!(groups.len(), 2 + 4, "aggregations share chunk sets");
        assert!(plans.iter().any(|p| p.name == "sentence-256-o32-mean-best"));
        for p in &plans {
            p.validate(&p.name).unwrap();
        }
    }

    #[test]
    fn grid_errors() {
        for (spec, want) in [
            ("window=12x", "not a whole number"),
            ("boundary=lines", "unknown variant"),
            ("stride=3", "unknown dimension `stride`"),
            ("window", "not key=value"),
        ] {
            let e = Grid::parse(spec).unwrap_err().to_string();
            assert!(e.contains(want), "{spec}: {e}");
        }
    }

    #[test]
    fn front_and_recommendation() {
        // (quality, cost)
        let pts = [
            (0.50, 100.0),
            (0.70, 200.0),
            (0.69, 150.0),
            (0.60, 300.0),
            (0.71, 400.0),
        ];
        assert_eq!(pareto_front(&pts), vec![0, 1, 2, 4]);
        let names: Vec<String> = (0..5).map(|i| format!("p{i}")).collect();
        let (pick, why) = recommend(&names, &pts, 0.02, "nDCG@10").unwrap();
        assert_eq!(pick, 2, "{why}");
        assert!(why.contains("p2") && why.contains("p4"), "{why}");
    }

    #[test]
    fn sample_keeps_expected_documents_and_spreads() {
        let lengths = [10, 500, 20, 400, 30, 300, 40, 200, 50, 100];
        let s = stratified_sample(&lengths, &[1], 4);
        assert_eq!(s.len(), 4);
        assert!(s.contains(&1));
    }
}
