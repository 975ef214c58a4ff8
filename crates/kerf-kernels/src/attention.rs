//! Scaled dot-product attention for one sequence and one head, on the packed product.
//!
//! A BERT layer's attention is, per head, `softmax(Q K^T / sqrt(d)) V` over one sequence's
//! rows. Both products here go through the same register-tiled kernel as the projections
//! ([`crate::sgemm`]): the head's keys are packed as the right-hand side of `Q K^T` (with the
//! scale folded in while packing, so no pass over the scores is spent on it) and its values as
//! the right-hand side of `P V`. Packing is linear in the sequence length while the products
//! are quadratic, and the scratch space is reused from call to call, so a worker thread
//! allocates only when it meets a longer sequence than before.
//!
//! Some families add a learned bias to the scores that depends only on the distance between key
//! and query (MPNet's relative position bias, T5's). It comes in as one vector per head and
//! sequence, indexed by `j - i + len - 1`, so query row `i` adds the contiguous slice
//! `bias[len - 1 - i..][..len]` to its scores: one pass over the score matrix, no index
//! arithmetic per element.
use crate::sgemm::{matmul_packed_strided, Epilogue, PackedRhs, Rows};

/// Reusable buffers for [`attend`]: the packed keys and values and the score matrix.
#[derive(Debug, Default)]
pub struct Scratch {
    keys: PackedRhs,
    values: PackedRhs,
    scores: Vec<f32>,
}

/// `dst = softmax(scale * q k^T + B) v` for one head of one sequence: `q`, `k` and `v` are
/// `len x d` row sets (read in place, e.g. a head's columns of the fused query/key/value
/// rows); `dst` is dense row-major `len x d`. `B` is zero when `relative_bias` is `None`;
/// otherwise `B[i][j] = relative_bias[j - i + len - 1]` (key `j`, query `i`), a slice of
/// `2 * len - 1` values. Runs on the calling thread.
///
/// Panics when the three row sets differ in shape, `dst` is not `len x d` or the bias is not
/// `2 * len - 1` long.
pub fn attend(
    dst: &mut [f32],
    q: Rows<'_>,
    k: Rows<'_>,
    v: Rows<'_>,
    scale: f32,
    relative_bias: Option<&[f32]>,
    scratch: &mut Scratch,
) {
    let (len, d) = (q.rows(), q.cols());
    assert!(
        (k.rows(), k.cols()) == (len, d) && (v.rows(), v.cols()) == (len, d),
        "query, key and value shapes differ"
    );
    assert_eq!(dst.len(), len * d, "destination shape");
    if let Some(b) = relative_bias {
        assert_eq!(b.len(), (2 * len).saturating_sub(1), "relative bias length");
    }
    if len == 0 || d == 0 {
        return;
    }
    // K^T (d x len), scaled: element (p, j) is key j's component p.
    scratch.keys.repack_rows_transposed(k, scale);
    scratch.scores.resize(len * len, 0.0);
    matmul_packed_strided(&mut scratch.scores, q, &scratch.keys, Epilogue::Plain, 1);
    if let Some(bias) = relative_bias {
        for (i, row) in scratch.scores.chunks_exact_mut(len).enumerate() {
            crate::add_into(row, &bias[len - 1 - i..][..len]);
        }
    }
    crate::softmax_rows(&mut scratch.scores, len);
    scratch.values.repack_rows(v, 1.0);
    let p = Rows::new(&scratch.scores, len, len, len);
    matmul_packed_strided(dst, p, &scratch.values, Epilogue::Plain, 1);
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testdata::data;

    /// Attention from its definition (Vaswani et al. 2017, eq. 1), in f64, plus an additive
    /// score bias `bias(i, j)` for query `i` and key `j` (MPNet's relative position bias as
    /// transformers' MPNetSelfAttention adds it to the scaled scores before the softmax).
    fn by_definition(
        q: &[f64],
        k: &[f64],
        v: &[f64],
        len: usize,
        d: usize,
        scale: f64,
        bias: impl Fn(usize, usize) -> f64,
    ) -> Vec<f64> {
        let mut out = vec![0f64; len * d];
        for i in 0..len {
            let s: Vec<f64> = (0..len)
                .map(|j| {
                    scale * (0..d).map(|c| q[i * d + c] * k[j * d + c]).sum::<f64>() + bias(i, j)
                })
                .collect();
            let top = s.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
            let e: Vec<f64> = s.iter().map(|x| (x - top).exp()).collect();
            let z: f64 = e.iter().sum();
            for c in 0..d {
                out[i * d + c] = (0..len).map(|j| e[j] / z * v[j * d + c]).sum();
            }
        }
        out
    }

    #[test]
    fn one_head_read_in_place_matches_the_definition() {
        check_against_definition(false);
    }

    #[test]
    fn relative_bias_is_added_by_distance_before_the_softmax() {
        check_against_definition(true);
    }

    /// Two heads of width 8 inside fused rows [q | k | v] of width 3 * 16, lengths around the
    /// tile edges (6 rows, 16 columns); with `biased`, a bias per head and key-query distance
    /// large enough (about +-2) to move the softmax visibly.
    fn check_against_definition(biased: bool) {
        let (heads, d) = (2, 8);
        let width = 3 * heads * d;
        let mut scratch = Scratch::default();
        for len in [1, 5, 6, 7, 17, 40] {
            let fused: Vec<f32> = data(len * width, len as u32)
                .iter()
                .map(|x| 3.0 * x)
                .collect();
            for head in 0..heads {
                let at = |part: usize| {
                    let start = part * heads * d + head * d;
                    Rows::new(&fused[start..], len, d, width)
                };
                let mut got = vec![f32::NAN; len * d];
                let scale = 1.0 / (d as f32).sqrt();
                // Distance r = j - i in -(len-1)..=len-1 sits at index r + len - 1.
                let bias: Vec<f32> = (0..2 * len - 1)
                    .map(|x| {
                        let r = x as f32 - (len as f32 - 1.0);
                        2.0 * (0.37 * r + head as f32).sin()
                    })
                    .collect();
                let b = biased.then_some(bias.as_slice());
                attend(&mut got, at(0), at(1), at(2), scale, b, &mut scratch);
                let pick = |part: usize| -> Vec<f64> {
                    (0..len * d)
                        .map(|x| {
                            fused[(x / d) * width + part * heads * d + head * d + x % d] as f64
                        })
                        .collect()
                };
                let by_distance = |i: usize, j: usize| match b {
                    Some(b) => b[j + len - 1 - i] as f64,
                    None => 0.0,
                };
                let want = by_definition(
                    &pick(0),
                    &pick(1),
                    &pick(2),
                    len,
                    d,
                    scale as f64,
                    by_distance,
                );
                for (g, w) in got.iter().zip(&want) {
                    assert!(
                        (*g as f64 - w).abs() < 1e-5,
                        "len {len} head {head}: {g} vs {w}"
                    );
                }
            }
        }
    }

    #[test]
    #[should_panic(expected = "shapes differ")]
    fn refuses_keys_of_another_length() {
        let x = [0f32; 12];
        attend(
            &mut [0.0; 4],
            Rows::new(&x, 2, 2, 2),
            Rows::new(&x, 3, 2, 2),
            Rows::new(&x, 2, 2, 2),
            1.0,
            None,
            &mut Scratch::default(),
        );
    }

    #[test]
    #[should_panic(expected = "relative bias length")]
    fn refuses_a_bias_of_another_length() {
        let x = [0f32; 4];
        let r = Rows::new(&x, 2, 2, 2);
        attend(
            &mut [0.0; 4],
            r,
            r,
            r,
            1.0,
            Some(&[0.0; 2]),
            &mut Scratch::default(),
        );
    }
}
