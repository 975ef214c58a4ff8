//! Numerical kernels of kerf's packed encoder.
//!
//! Matrix products are [`sgemm`]'s register-tiled product against weights packed once at load
//! time, and [`attention`] runs each head on the same product; [`qgemm`] is the 8-bit product
//! of `precision = "int8"`. The row-wise steps between them
//! (bias, GELU, softmax, LayerNorm) are plain loops over slices. Everything is safe Rust:
//! `multiversion` compiles the hot loops a second time for AVX2+FMA and picks the build at run
//! time, so a binary built for any x86-64 uses the wide instructions where the CPU has them and
//! still runs where it does not.
use multiversion::multiversion;

pub mod attention;
pub mod qgemm;
pub mod sgemm;

const LOG2E: f32 = std::f32::consts::LOG2_E;

/// e^x for x in about [-87, 88], to within 2 ulp: Cody-Waite range reduction, then the Cephes
/// `expf` minimax polynomial (coefficients as published in the Cephes library's expf.c, quoted
/// from memory and checked against `f64::exp` in the tests below).
#[inline(always)]
pub fn exp(x: f32) -> f32 {
    let x = x.clamp(-87.0, 88.0);
    // Round to nearest by adding 1.5 * 2^23: the sum's low mantissa bits then hold n as a
    // two's-complement integer, read back with integer operations only. (A float-to-int `as`
    // cast would saturate, which the compiler cannot vectorise.)
    const SHIFT: f32 = 12_582_912.0;
    let t = x.mul_add(LOG2E, SHIFT);
    let n_int = (t.to_bits() as i32).wrapping_sub(SHIFT.to_bits() as i32);
    let n = t - SHIFT;
    let r = n.mul_add(-0.693_359_4, x);
    let r = n.mul_add(2.121_944_4e-4, r);
    let p = 1.987_569_1e-4f32
        .mul_add(r, 1.398_199_9e-3)
        .mul_add(r, 8.333_452e-3)
        .mul_add(r, 4.166_579_6e-2)
        .mul_add(r, 0.166_666_65)
        .mul_add(r, 0.5);
    let y = (p * r).mul_add(r, r) + 1.0;
    y * f32::from_bits((n_int.wrapping_add(127) << 23) as u32)
}

/// The error function, with absolute error below 3e-7 (measured 2.3e-7 in the tests against
/// the Maclaurin series): the rational fit erf(x) = x P(x^2) / Q(x^2) on |x| <= 3.8325 (beyond
/// which erf rounds to +-1 in f32), with the single-precision coefficients of the Eigen
/// library's `generic_fast_erf_float`, quoted from memory and checked in the tests below. No
/// exponential and one division, so GELU costs a dozen fused multiply-adds per element.
#[inline(always)]
pub fn erf(x: f32) -> f32 {
    let x = x.clamp(-3.832_507, 3.832_507);
    let x2 = x * x;
    let p = (-2.726_142_3e-10f32)
        .mul_add(x2, 2.770_681_4e-8)
        .mul_add(x2, -2.101_024e-6)
        .mul_add(x2, -5.692_506_4e-5)
        .mul_add(x2, -7.349_906_3e-4)
        .mul_add(x2, -2.9546e-3)
        .mul_add(x2, -1.609_603_3e-2);
    let q = (-1.456_607_2e-5f32)
        .mul_add(x2, -2.133_740_6e-4)
        .mul_add(x2, -1.682_827e-3)
        .mul_add(x2, -7.373_329e-3)
        .mul_add(x2, -1.426_473_9e-2);
    x * p / q
}

/// GELU as BERT defines it: x * Phi(x) = 0.5 x (1 + erf(x / sqrt 2)).
#[inline(always)]
pub fn gelu(x: f32) -> f32 {
    0.5 * x * (1.0 + erf(x * std::f32::consts::FRAC_1_SQRT_2))
}

/// Sum with eight independent accumulators, which the compiler keeps in one vector register.
#[inline(always)]
fn lane_sum(xs: &[f32]) -> f32 {
    let mut acc = [0f32; 8];
    let mut chunks = xs.chunks_exact(8);
    for c in &mut chunks {
        for i in 0..8 {
            acc[i] += c[i];
        }
    }
    let tail: f32 = chunks.remainder().iter().sum();
    acc.iter().sum::<f32>() + tail
}

#[inline(always)]
fn lane_max(xs: &[f32]) -> f32 {
    let mut acc = [f32::NEG_INFINITY; 8];
    let mut chunks = xs.chunks_exact(8);
    for c in &mut chunks {
        for i in 0..8 {
            acc[i] = acc[i].max(c[i]);
        }
    }
    let tail = chunks
        .remainder()
        .iter()
        .fold(f32::NEG_INFINITY, |a, &b| a.max(b));
    acc.iter().fold(tail, |a, &b| a.max(b))
}

/// `dst = a + b + c`, element by element (the embedding sum).
#[multiversion(targets("x86_64+avx2+fma"))]
pub fn sum3(dst: &mut [f32], a: &[f32], b: &[f32], c: &[f32]) {
    for (((d, x), y), z) in dst.iter_mut().zip(a).zip(b).zip(c) {
        *d = x + y + z;
    }
}

/// `acc += row`, element by element.
#[multiversion(targets("x86_64+avx2+fma"))]
pub fn add_into(acc: &mut [f32], row: &[f32]) {
    for (a, v) in acc.iter_mut().zip(row) {
        *a += v;
    }
}

/// `acc = max(acc, row)`, element by element.
#[multiversion(targets("x86_64+avx2+fma"))]
pub fn max_into(acc: &mut [f32], row: &[f32]) {
    for (a, v) in acc.iter_mut().zip(row) {
        *a = a.max(*v);
    }
}

/// Add `bias` to every row of `x` (rows of `bias.len()`).
#[multiversion(targets("x86_64+avx2+fma"))]
pub fn add_bias(x: &mut [f32], bias: &[f32]) {
    for row in x.chunks_exact_mut(bias.len()) {
        for (v, b) in row.iter_mut().zip(bias) {
            *v += b;
        }
    }
}

/// `x = gelu(x + bias)` row by row.
#[multiversion(targets("x86_64+avx2+fma"))]
pub fn add_bias_gelu(x: &mut [f32], bias: &[f32]) {
    for row in x.chunks_exact_mut(bias.len()) {
        for (v, b) in row.iter_mut().zip(bias) {
            *v = gelu(*v + b);
        }
    }
}

/// Softmax of each row of `x` (rows of `width`), in place.
#[multiversion(targets("x86_64+avx2+fma"))]
pub fn softmax_rows(x: &mut [f32], width: usize) {
    for row in x.chunks_exact_mut(width) {
        let max = lane_max(row);
        for v in row.iter_mut() {
            *v = exp(*v - max);
        }
        let inv = 1.0 / lane_sum(row);
        for v in row.iter_mut() {
            *v *= inv;
        }
    }
}

/// LayerNorm of each row of `x` in place: `(x - mean) / sqrt(var + eps) * weight + bias`, with
/// the biased variance, as PyTorch computes it.
#[multiversion(targets("x86_64+avx2+fma"))]
pub fn layer_norm(x: &mut [f32], weight: &[f32], bias: &[f32], eps: f32) {
    let n = weight.len();
    for row in x.chunks_exact_mut(n) {
        let mean = lane_sum(row) / n as f32;
        for v in row.iter_mut() {
            *v -= mean;
        }
        let mut sq = [0f32; 8];
        let mut chunks = row.chunks_exact(8);
        for c in &mut chunks {
            for i in 0..8 {
                sq[i] += c[i] * c[i];
            }
        }
        let tail: f32 = chunks.remainder().iter().map(|v| v * v).sum();
        let var = (sq.iter().sum::<f32>() + tail) / n as f32;
        let inv = 1.0 / (var + eps).sqrt();
        for ((v, w), b) in row.iter_mut().zip(weight).zip(bias) {
            *v = *v * inv * w + b;
        }
    }
}

/// `hidden = LayerNorm(update + bias + hidden)`: the residual step closing each half of a layer.
#[multiversion(targets("x86_64+avx2+fma"))]
pub fn residual_layer_norm(
    hidden: &mut [f32],
    update: &[f32],
    bias: &[f32],
    weight: &[f32],
    ln_bias: &[f32],
    eps: f32,
) {
    let n = bias.len();
    for (h, u) in hidden.chunks_exact_mut(n).zip(update.chunks_exact(n)) {
        for ((hv, uv), b) in h.iter_mut().zip(u).zip(bias) {
            *hv += uv + b;
        }
    }
    layer_norm(hidden, weight, ln_bias, eps);
}

/// Test inputs shared by the kernels' unit tests.
#[cfg(test)]
pub(crate) mod testdata {
    /// `len` values in [-1, 1) from a linear congruential generator (Numerical Recipes'
    /// constants): reproducible without a dependency.
    pub fn data(len: usize, seed: u32) -> Vec<f32> {
        let mut s = seed;
        (0..len)
            .map(|_| {
                s = s.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
                (s >> 8) as f32 / (1u32 << 23) as f32 - 1.0
            })
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::testdata::data;
    use super::*;

    #[test]
    fn exp_is_within_two_ulp_of_f64_exp() {
        // Reference: the correctly rounded f64 exponential of the standard library.
        let mut worst = 0f64;
        let mut x = -87.0f32;
        while x < 88.0 {
            let want = (x as f64).exp();
            let rel = ((exp(x) as f64 - want) / want).abs();
            worst = worst.max(rel);
            x += 0.013;
        }
        assert!(worst < 2.5e-7, "worst relative error {worst}");
    }

    /// erf by its Maclaurin series, erf x = 2/sqrt(pi) sum (-1)^n x^(2n+1) / (n! (2n+1))
    /// (Abramowitz & Stegun 7.1.5), summed in f64 until the terms vanish.
    fn erf_series(x: f64) -> f64 {
        let mut term = x;
        let mut sum = x;
        let mut n = 0.0;
        while term.abs() > 1e-17 * sum.abs().max(1e-300) || n < 5.0 {
            n += 1.0;
            term *= -x * x / n;
            sum += term / (2.0 * n + 1.0);
            if n > 400.0 {
                break;
            }
        }
        sum * 2.0 / std::f64::consts::PI.sqrt()
    }

    #[test]
    fn erf_matches_its_maclaurin_series() {
        assert!((erf_series(1.0) - 0.842_700_792_949_715).abs() < 1e-13); // A&S table 7.1
        let mut worst = 0f64;
        let mut x = -4.5f32;
        while x <= 4.5 {
            worst = worst.max((erf(x) as f64 - erf_series(x as f64)).abs());
            x += 0.0071;
        }
        assert!(worst < 3e-7, "worst absolute error {worst}");
        assert_eq!(erf(0.0), 0.0);
        // Far tails (the fit's input is clamped): within the same bound of +-1, and odd.
        assert!((erf(9.0) - 1.0).abs() < 3e-7 && erf(-9.0) == -erf(9.0));
    }

    #[test]
    fn softmax_rows_sum_to_one_and_match_the_definition() {
        let mut x = vec![1.0f32, 2.0, 3.0, -50.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0];
        softmax_rows(&mut x, 5);
        let d = 1f64.exp() + 2f64.exp() + 3f64.exp() + (-50f64).exp() + 1.0;
        assert!((x[2] as f64 - 3f64.exp() / d).abs() < 1e-6);
        assert!((x[5..].iter().sum::<f32>() - 1.0).abs() < 1e-6);
        assert!((x[7] - 0.2).abs() < 1e-7);
    }

    #[test]
    fn layer_norm_gives_zero_mean_unit_variance_rows() {
        let mut x = data(3 * 19, 7);
        let w = vec![1.0f32; 19];
        let b = vec![0.0f32; 19];
        layer_norm(&mut x, &w, &b, 1e-12);
        for row in x.chunks(19) {
            let mean: f32 = row.iter().sum::<f32>() / 19.0;
            let var: f32 = row.iter().map(|v| (v - mean) * (v - mean)).sum::<f32>() / 19.0;
            assert!(mean.abs() < 1e-6 && (var - 1.0).abs() < 1e-4);
        }
    }

    #[test]
    fn gelu_matches_the_erf_definition_in_f64() {
        for &x in &[-3.0f32, -1.0, -0.1, 0.0, 0.5, 1.0, 2.5] {
            let want = 0.5 * x as f64 * (1.0 + erf_series(x as f64 / 2f64.sqrt()));
            assert!((gelu(x) as f64 - want).abs() < 1e-6, "{x}");
        }
    }
}
