//! Numerical kernels of kerf's packed encoder.
//!
//! Matrix products go through the `gemm` crate (the same CPU kernels candle uses, called
//! directly so no tensor is copied or transposed). The row-wise steps between them (bias, GELU,
//! softmax, LayerNorm) are plain loops over slices; `multiversion` compiles them a second time
//! for AVX2+FMA and picks the build at run time, so a binary built for any x86-64 uses the wide
//! instructions where the CPU has them and still runs where it does not.
use multiversion::multiversion;

/// A matrix inside a slice: element (r, c) is `data[r * row_stride + c * col_stride]`.
#[derive(Clone, Copy, Debug)]
pub struct View<'a> {
    /// Backing storage.
    pub data: &'a [f32],
    /// Rows.
    pub rows: usize,
    /// Columns.
    pub cols: usize,
    /// Distance between consecutive rows.
    pub row_stride: usize,
    /// Distance between consecutive columns.
    pub col_stride: usize,
}

impl<'a> View<'a> {
    /// A dense row-major matrix.
    pub fn rows(data: &'a [f32], rows: usize, cols: usize) -> Self {
        Self {
            data,
            rows,
            cols,
            row_stride: cols,
            col_stride: 1,
        }
    }

    /// The transpose of a dense row-major `rows x cols` matrix, without copying: a PyTorch
    /// `Linear` weight is stored `[out, in]` and used as its transpose.
    pub fn transposed(data: &'a [f32], rows: usize, cols: usize) -> Self {
        Self {
            data,
            rows: cols,
            cols: rows,
            row_stride: 1,
            col_stride: cols,
        }
    }

    fn fits(&self) -> bool {
        self.rows == 0
            || self.cols == 0
            || (self.rows - 1) * self.row_stride + (self.cols - 1) * self.col_stride
                < self.data.len()
    }
}

/// `dst = scale * lhs * rhs` (or `dst += ...` with `accumulate`), where `dst` is row-major with
/// rows `dst_row_stride` apart. `threads > 1` splits the product over the current rayon pool.
///
/// Panics when a view does not fit its slice or the shapes disagree: these are programming
/// errors, checked here so the one `unsafe` call below only ever sees in-bounds pointers.
pub fn matmul(
    dst: &mut [f32],
    dst_row_stride: usize,
    lhs: View<'_>,
    rhs: View<'_>,
    scale: f32,
    accumulate: bool,
    threads: usize,
) {
    let (m, k, n) = (lhs.rows, lhs.cols, rhs.cols);
    assert_eq!(k, rhs.rows, "inner dimensions differ");
    assert!(lhs.fits() && rhs.fits(), "matrix view outside its slice");
    assert!(
        m == 0 || n == 0 || (m - 1) * dst_row_stride + n <= dst.len(),
        "destination too small"
    );
    assert!(n <= dst_row_stride || m <= 1, "destination rows overlap");
    if m == 0 || n == 0 {
        return;
    }
    if k == 0 {
        if !accumulate {
            for r in 0..m {
                dst[r * dst_row_stride..r * dst_row_stride + n].fill(0.0);
            }
        }
        return;
    }
    let parallelism = if threads > 1 {
        gemm::Parallelism::Rayon(threads)
    } else {
        gemm::Parallelism::None
    };
    // SAFETY: the asserts above prove every element gemm reads or writes lies inside `lhs.data`,
    // `rhs.data` and `dst` (last index = (rows-1)*row_stride + (cols-1)*col_stride), and that
    // distinct destination elements do not alias; `dst` is borrowed mutably, so nothing else
    // reads it meanwhile. gemm only reads through `lhs` and `rhs`.
    unsafe {
        gemm::gemm(
            m,
            n,
            k,
            dst.as_mut_ptr(),
            1,
            dst_row_stride as isize,
            accumulate,
            lhs.data.as_ptr(),
            lhs.col_stride as isize,
            lhs.row_stride as isize,
            rhs.data.as_ptr(),
            rhs.col_stride as isize,
            rhs.row_stride as isize,
            1.0,
            scale,
            false,
            false,
            false,
            parallelism,
        );
    }
}

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

/// The error function, with absolute error below 4e-7 (the fit plus f32 rounding in the
/// exponential; measured 2.9e-7 in the tests): the complementary error function by the
/// Chebyshev fit of Press et al., Numerical Recipes (2nd ed., section 6.2, `erfcc`, fractional
/// error < 1.2e-7), quoted from memory and checked against the Maclaurin series in the tests.
#[inline(always)]
pub fn erf(x: f32) -> f32 {
    let z = x.abs();
    let t = 1.0 / (1.0 + 0.5 * z);
    let poly = -1.265_512_2
        + t * (1.000_023_7
            + t * (0.374_091_96
                + t * (0.096_784_18
                    + t * (-0.186_288_06
                        + t * (0.278_868_07
                            + t * (-1.135_203_98
                                + t * (1.488_515_87 + t * (-0.822_152_23 + t * 0.170_872_77))))))));
    let erfc = t * exp(-z * z + poly);
    let e = 1.0 - erfc;
    if x < 0.0 {
        -e
    } else {
        e
    }
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

#[cfg(test)]
mod tests {
    use super::*;

    fn naive(a: &[f32], b: &[f32], m: usize, k: usize, n: usize) -> Vec<f32> {
        let mut out = vec![0f32; m * n];
        for i in 0..m {
            for j in 0..n {
                out[i * n + j] = (0..k).map(|p| a[i * k + p] * b[p * n + j]).sum();
            }
        }
        out
    }

    fn data(len: usize, seed: u32) -> Vec<f32> {
        let mut s = seed;
        (0..len)
            .map(|_| {
                s = s.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
                (s >> 8) as f32 / (1u32 << 24) as f32 - 0.5
            })
            .collect()
    }

    #[test]
    fn matmul_matches_the_schoolbook_product_for_dense_and_transposed_views() {
        let (m, k, n) = (37, 29, 23);
        let a = data(m * k, 1);
        let b = data(k * n, 2);
        let want = naive(&a, &b, m, k, n);
        let mut got = vec![0f32; m * n];
        matmul(
            &mut got,
            n,
            View::rows(&a, m, k),
            View::rows(&b, k, n),
            1.0,
            false,
            1,
        );
        for (g, w) in got.iter().zip(&want) {
            assert!((g - w).abs() < 1e-5, "{g} vs {w}");
        }
        // The same product with the right factor stored transposed ([n, k], as Linear weights).
        let mut bt = vec![0f32; n * k];
        for p in 0..k {
            for j in 0..n {
                bt[j * k + p] = b[p * n + j];
            }
        }
        let mut got2 = vec![1f32; m * n];
        matmul(
            &mut got2,
            n,
            View::rows(&a, m, k),
            View::transposed(&bt, n, k),
            2.0,
            true,
            2,
        );
        for (g, w) in got2.iter().zip(&want) {
            assert!((g - (1.0 + 2.0 * w)).abs() < 1e-5);
        }
    }

    #[test]
    #[should_panic(expected = "outside its slice")]
    fn matmul_refuses_a_view_larger_than_its_slice() {
        let a = vec![0f32; 10];
        let mut d = vec![0f32; 100];
        matmul(
            &mut d,
            10,
            View::rows(&a, 4, 4),
            View::rows(&a, 4, 2),
            1.0,
            false,
            1,
        );
    }

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
        assert!(worst < 4e-7, "worst absolute error {worst}");
        assert_eq!(erf(0.0), 0.0);
        assert!((erf(9.0) - 1.0).abs() < 1e-7 && (erf(-9.0) + 1.0).abs() < 1e-7);
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
