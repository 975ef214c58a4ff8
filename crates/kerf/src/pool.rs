//! From chunk vectors to a document vector or a document score.
//!
//! Two families: aggregations that build one document vector (mean, per-dimension max,
//! token-weighted mean, soft centroid, first chunk), and scorings that only exist per reference
//! (best chunk, sum of chunks; MaxP and SumP in Dai & Callan, SIGIR 2019; FirstP is `first`).
//! All are pure functions over plain slices.
pub use crate::profile::ChunkPooling;

/// Vectors of every chunk of every document: `[doc][chunk]`.
pub type ChunkVectors = Vec<Vec<Vec<f32>>>;

/// Dot product.
pub fn dot(a: &[f32], b: &[f32]) -> f32 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

/// Cosine similarity; 0 when either vector is zero.
pub fn cosine(a: &[f32], b: &[f32]) -> f32 {
    let (na, nb) = (dot(a, a).sqrt(), dot(b, b).sqrt());
    if na == 0.0 || nb == 0.0 {
        0.0
    } else {
        dot(a, b) / (na * nb)
    }
}

/// Scale to unit length (a zero vector stays zero).
pub fn normalize(mut v: Vec<f32>) -> Vec<f32> {
    let n = dot(&v, &v).sqrt();
    if n > 0.0 {
        v.iter_mut().for_each(|x| *x /= n);
    }
    v
}

/// Weighted mean of vectors; weights need not sum to one.
pub fn weighted_mean(chunks: &[&[f32]], weights: &[f32]) -> Vec<f32> {
    let dim = chunks.first().map_or(0, |c| c.len());
    let mut out = vec![0.0f32; dim];
    let total: f32 = weights.iter().sum();
    if total <= 0.0 {
        return out;
    }
    for (c, w) in chunks.iter().zip(weights) {
        for (o, x) in out.iter_mut().zip(c.iter()) {
            *o += x * w / total;
        }
    }
    out
}

/// Per-dimension maximum.
pub fn dim_max(chunks: &[&[f32]]) -> Vec<f32> {
    let dim = chunks.first().map_or(0, |c| c.len());
    let mut out = vec![f32::NEG_INFINITY; dim];
    for c in chunks {
        for (o, x) in out.iter_mut().zip(c.iter()) {
            *o = o.max(*x);
        }
    }
    if chunks.is_empty() {
        out.clear();
    }
    out
}

/// Softmax weights of each chunk's cosine to the plain mean, at a temperature.
pub fn soft_centroid_weights(chunks: &[&[f32]], temperature: f32) -> Vec<f32> {
    let centre = weighted_mean(chunks, &vec![1.0; chunks.len()]);
    let logits: Vec<f32> = chunks
        .iter()
        .map(|c| cosine(c, &centre) / temperature)
        .collect();
    let top = logits.iter().cloned().fold(f32::NEG_INFINITY, f32::max);
    let exp: Vec<f32> = logits.iter().map(|l| (l - top).exp()).collect();
    let sum: f32 = exp.iter().sum();
    exp.iter().map(|e| e / sum).collect()
}

/// A document vector (unit length) for vector aggregations; `None` for scorings (`best`,
/// `sum`) and for documents with no chunks. `new_tokens[i]` is the tokens chunk i adds.
pub fn doc_vector(
    how: ChunkPooling,
    chunks: &[&[f32]],
    new_tokens: &[usize],
    temperature: f32,
) -> Option<Vec<f32>> {
    if chunks.is_empty() {
        return None;
    }
    let v = match how {
        ChunkPooling::Mean => weighted_mean(chunks, &vec![1.0; chunks.len()]),
        ChunkPooling::DimMax => dim_max(chunks),
        ChunkPooling::TokenMean => {
            let w: Vec<f32> = new_tokens.iter().map(|&t| t as f32).collect();
            weighted_mean(chunks, &w)
        }
        ChunkPooling::SoftCentroid => {
            weighted_mean(chunks, &soft_centroid_weights(chunks, temperature))
        }
        ChunkPooling::First => chunks[0].to_vec(),
        ChunkPooling::Best | ChunkPooling::Sum => return None,
    };
    Some(normalize(v))
}

/// A document's score for one reference vector, and the index of its best-matching chunk.
pub fn score(
    how: ChunkPooling,
    reference: &[f32],
    chunks: &[&[f32]],
    new_tokens: &[usize],
    temperature: f32,
) -> Option<(f32, usize)> {
    let per_chunk: Vec<f32> = chunks.iter().map(|c| cosine(reference, c)).collect();
    let best = per_chunk
        .iter()
        .enumerate()
        .fold(None, |acc: Option<(usize, f32)>, (i, &s)| match acc {
            Some((_, b)) if b >= s => acc,
            _ => Some((i, s)),
        })?
        .0;
    let s = match how {
        ChunkPooling::Best => per_chunk[best],
        ChunkPooling::Sum => per_chunk.iter().sum(),
        _ => cosine(
            reference,
            &doc_vector(how, chunks, new_tokens, temperature)?,
        ),
    };
    Some((s, best))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: &[f32], b: &[f32]) -> bool {
        a.len() == b.len() && a.iter().zip(b).all(|(x, y)| (x - y).abs() < 1e-6)
    }

    // Hand-computed cases: e1 = (1,0), e2 = (0,1).
    #[test]
    fn mean_of_orthogonal_units_is_the_diagonal() {
        let (a, b) = ([1.0f32, 0.0], [0.0f32, 1.0]);
        let v = doc_vector(ChunkPooling::Mean, &[&a, &b], &[1, 1], 0.1).unwrap();
        let h = 1.0 / 2f32.sqrt();
        assert!(close(&v, &[h, h]), "{v:?}");
    }

    #[test]
    fn token_mean_weighs_by_new_tokens() {
        // weights 3:1 -> (0.75, 0.25), normalised -> (3, 1)/sqrt(10)
        let (a, b) = ([1.0f32, 0.0], [0.0f32, 1.0]);
        let v = doc_vector(ChunkPooling::TokenMean, &[&a, &b], &[30, 10], 0.1).unwrap();
        let n = 10f32.sqrt();
        assert!(close(&v, &[3.0 / n, 1.0 / n]), "{v:?}");
    }

    #[test]
    fn dim_max_takes_each_dimension_separately() {
        let (a, b) = ([0.6f32, -0.8], [-0.6f32, 0.8]);
        assert!(close(&dim_max(&[&a, &b]), &[0.6, 0.8]));
    }

    #[test]
    fn soft_centroid_favours_the_chunk_nearest_the_centre() {
        // Three chunks: two alike, one apart. The centre lies near the pair, so each of the pair
        // outweighs the odd one; weights sum to one.
        let (a, b, c) = ([1.0f32, 0.0], [0.9f32, 0.1], [0.0f32, 1.0]);
        let w = soft_centroid_weights(&[&a, &b, &c], 0.1);
        assert!((w.iter().sum::<f32>() - 1.0).abs() < 1e-6);
        assert!(w[0] > w[2] && w[1] > w[2], "{w:?}");
        // At a huge temperature the weighting tends to the plain mean.
        let w = soft_centroid_weights(&[&a, &b, &c], 1e6);
        assert!(w.iter().all(|x| (x - 1.0 / 3.0).abs() < 1e-4), "{w:?}");
    }

    #[test]
    fn scorings_pick_best_and_sum() {
        let (a, b) = ([1.0f32, 0.0], [0.0f32, 1.0]);
        let q = [0.6f32, 0.8];
        let (s, i) = score(ChunkPooling::Best, &q, &[&a, &b], &[1, 1], 0.1).unwrap();
        assert!((s - 0.8).abs() < 1e-6 && i == 1);
        let (s, _) = score(ChunkPooling::Sum, &q, &[&a, &b], &[1, 1], 0.1).unwrap();
        assert!((s - 1.4).abs() < 1e-6);
        let (s, _) = score(ChunkPooling::First, &q, &[&a, &b], &[1, 1], 0.1).unwrap();
        assert!((s - 0.6).abs() < 1e-6);
        assert!(doc_vector(ChunkPooling::Best, &[&a], &[1], 0.1).is_none());
        assert!(score(ChunkPooling::Mean, &q, &[], &[], 0.1).is_none());
    }

    #[test]
    fn cosine_of_zero_vector_is_zero() {
        assert_eq!(cosine(&[0.0, 0.0], &[1.0, 0.0]), 0.0);
        assert!((cosine(&[2.0, 0.0], &[3.0, 0.0]) - 1.0).abs() < 1e-6);
    }
}
