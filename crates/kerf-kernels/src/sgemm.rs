//! Products of activations with a fixed weight matrix packed once at load time.
//!
//! The register tile and the weight layout follow the published BLIS design (Van Zee & van de
//! Geijn, "BLIS: A Framework for Rapidly Instantiating BLAS Functionality", ACM TOMS 2015): the
//! weight matrix `B` (inner `k` by `n` outputs) is stored as panels of `NR` = 16 columns, each
//! contiguous and k-major, so the micro-kernel streams one panel. The activations `A` are cut
//! into blocks of `MC` rows (one thread's unit of work) and each block into `MR` = 6-row
//! slivers, read in place. The micro-kernel keeps a 6x16 tile of `C` in twelve 8-wide
//! registers: twelve fused multiply-adds per two panel loads and six broadcasts. Packing `B`
//! once, at load, instead of on every call as a general-purpose product must, and applying the
//! bias (and GELU) to each block while it is in cache, is what lifted the encoder from 70% to
//! over 80% of PyTorch's own matrix-product rate (notes/encoder-speed.md).
//!
//! Everything here is safe Rust: the micro-kernel is plain loops over fixed-size arrays that
//! `multiversion` compiles for AVX2+FMA, where LLVM turns them into register-resident FMAs.
use multiversion::multiversion;
use rayon::prelude::*;

/// Rows of the register tile.
pub const MR: usize = 6;
/// Columns of the register tile (two 8-wide vectors).
pub const NR: usize = 16;
/// Inner-dimension block. MiniLM's inner sizes (384 and 1,536) fit in one; blocks of 256 (a
/// weight panel in L1) measured no faster on the encoder (notes/encoder-speed.md, step 9).
const KC: usize = 2048;
/// Activation rows per block: the unit of work handed to a thread, and the rows that pass
/// under each weight panel while it is in cache.
const MC: usize = 72;

/// A weight matrix `B` (`k x n`) in the blocked panel layout described in the module docs,
/// columns padded with zeros to a multiple of [`NR`].
#[derive(Clone, Debug, Default)]
pub struct PackedRhs {
    k: usize,
    n: usize,
    n_padded: usize,
    data: Vec<f32>,
}

impl PackedRhs {
    /// Pack the transpose of a PyTorch `Linear` weight stored row-major as `[outputs, inputs]`,
    /// so `x * packed` is `x W^T`.
    ///
    /// Panics when `weight.len() != outputs * inputs`.
    pub fn from_linear_weight(weight: &[f32], outputs: usize, inputs: usize) -> Self {
        assert_eq!(weight.len(), outputs * inputs, "weight shape");
        let mut packed = Self::default();
        packed.repack_rows_transposed(Rows::new(weight, outputs, inputs, inputs), 1.0);
        packed
    }

    /// Pack a row-major `k x n` matrix.
    ///
    /// Panics when `b.len() != k * n`.
    pub fn from_rows(b: &[f32], k: usize, n: usize) -> Self {
        assert_eq!(b.len(), k * n, "matrix shape");
        let mut packed = Self::default();
        packed.repack_rows(Rows::new(b, k, n, n), 1.0);
        packed
    }

    /// Refill with `scale * src` (`src.rows() x src.cols()`), copying row pieces whole,
    /// reusing the allocation: the values of one attention head as the right-hand side of
    /// `P V`.
    pub fn repack_rows(&mut self, src: Rows<'_>, scale: f32) {
        self.refill(src.rows, src.cols, |pc, jr, panel| {
            let cols = NR.min(src.cols - jr);
            for (p, out) in panel.chunks_exact_mut(NR).enumerate() {
                for (o, v) in out.iter_mut().zip(src.row(pc + p, jr, cols)) {
                    *o = scale * v;
                }
            }
        });
    }

    /// Refill with `scale * src^T` (`src.cols() x src.rows()`), reading each source row once,
    /// reusing the allocation: a `Linear` weight, or the keys of one attention head as the
    /// right-hand side of `Q K^T`.
    pub fn repack_rows_transposed(&mut self, src: Rows<'_>, scale: f32) {
        self.refill(src.cols, src.rows, |pc, jr, panel| {
            let kc = panel.len() / NR;
            for j in 0..NR.min(src.rows - jr) {
                for (p, v) in src.row(jr + j, pc, kc).iter().enumerate() {
                    panel[p * NR + j] = scale * v;
                }
            }
        });
    }

    /// Size for a `k x n` matrix with every value zero (padding columns must stay so), then
    /// hand `fill` each panel in turn as `(first inner row, first column, panel)`; a panel is
    /// `kc x NR` values, k-major. The one place the layout is written; [`Self::panel`] reads it.
    fn refill(&mut self, k: usize, n: usize, mut fill: impl FnMut(usize, usize, &mut [f32])) {
        self.n_padded = n.div_ceil(NR) * NR;
        self.k = k;
        self.n = n;
        self.data.clear();
        self.data.resize(k * self.n_padded, 0.0);
        for pc in (0..k).step_by(KC) {
            let kc = KC.min(k - pc);
            for jr in (0..self.n_padded).step_by(NR) {
                let start = pc * self.n_padded + jr * kc;
                fill(pc, jr, &mut self.data[start..start + kc * NR]);
            }
        }
    }

    /// Inner dimension.
    pub fn inner(&self) -> usize {
        self.k
    }

    /// Output columns.
    pub fn outputs(&self) -> usize {
        self.n
    }

    /// The `KC x NR` panel `jr / NR` of the block starting at inner row `pc`.
    fn panel(&self, pc: usize, kc: usize, jr: usize) -> &[f32] {
        let start = pc * self.n_padded + jr * kc;
        &self.data[start..start + kc * NR]
    }
}

/// What happens to each output element after the product.
#[derive(Clone, Copy, Debug)]
pub enum Epilogue<'a> {
    /// `C = A B`.
    Plain,
    /// `C = A B + bias` (bias per output column).
    Bias(&'a [f32]),
    /// `C = gelu(A B + bias)`.
    BiasGelu(&'a [f32]),
}

impl Epilogue<'_> {
    /// Panics unless a bias (if any) has one value per output column.
    pub(crate) fn check(self, outputs: usize) {
        if let Epilogue::Bias(b) | Epilogue::BiasGelu(b) = self {
            assert_eq!(b.len(), outputs, "bias length");
        }
    }

    /// Apply to finished output rows (`dst` whole rows, one bias value per column).
    pub(crate) fn apply(self, dst: &mut [f32]) {
        match self {
            Epilogue::Plain => {}
            Epilogue::Bias(b) => crate::add_bias(dst, b),
            Epilogue::BiasGelu(b) => crate::add_bias_gelu(dst, b),
        }
    }
}

/// `dst = epilogue(a * rhs)` where `a` is row-major `m x rhs.inner()` and `dst` row-major
/// `m x rhs.outputs()`. With `threads > 1` the rows are shared out over the current rayon pool.
///
/// Panics when the slices do not have those shapes or a bias has the wrong length.
pub fn matmul_packed(
    dst: &mut [f32],
    a: &[f32],
    rhs: &PackedRhs,
    epilogue: Epilogue<'_>,
    threads: usize,
) {
    let k = rhs.k;
    assert!(k > 0, "empty inner dimension");
    assert_eq!(a.len() % k, 0, "activation rows");
    matmul_packed_strided(dst, Rows::new(a, a.len() / k, k, k), rhs, epilogue, threads);
}

/// Rows of activations inside a slice: row `r` is `data[r * stride..r * stride + cols]`, so
/// the columns of a wider matrix (one attention head's share of the query/key/value rows)
/// can be read in place.
#[derive(Clone, Copy, Debug)]
pub struct Rows<'a> {
    data: &'a [f32],
    rows: usize,
    cols: usize,
    stride: usize,
}

impl<'a> Rows<'a> {
    /// `rows` rows of `cols` values, `stride` apart, starting at `data[0]`.
    ///
    /// Panics when the last row does not fit in `data` or `cols > stride` (rows would overlap).
    pub fn new(data: &'a [f32], rows: usize, cols: usize, stride: usize) -> Self {
        assert!(cols <= stride || rows <= 1, "rows overlap");
        assert!(
            rows == 0 || (rows - 1) * stride + cols <= data.len(),
            "rows outside their slice"
        );
        Self {
            data,
            rows,
            cols,
            stride,
        }
    }

    /// Number of rows.
    pub fn rows(&self) -> usize {
        self.rows
    }

    /// Values per row.
    pub fn cols(&self) -> usize {
        self.cols
    }

    fn row(&self, r: usize, from: usize, len: usize) -> &'a [f32] {
        let start = r * self.stride + from;
        &self.data[start..start + len]
    }
}

/// [`matmul_packed`] for activations read through [`Rows`]; `dst` is dense row-major.
///
/// Panics when `a.cols != rhs.inner()`, `dst` is not `a.rows x rhs.outputs()` or a bias has
/// the wrong length.
pub fn matmul_packed_strided(
    dst: &mut [f32],
    a: Rows<'_>,
    rhs: &PackedRhs,
    epilogue: Epilogue<'_>,
    threads: usize,
) {
    let (k, n, m) = (rhs.k, rhs.n, a.rows);
    assert!(k > 0, "empty inner dimension");
    assert_eq!(
        a.cols, k,
        "activation width differs from the inner dimension"
    );
    assert_eq!(dst.len(), m * n, "destination shape");
    epilogue.check(n);
    if m == 0 || n == 0 {
        return;
    }
    // Blocks of MC rows (whole MR slivers, so only the last block has a ragged sliver), handed
    // out to the pool's threads as they come free: a core slowed by other work on the machine
    // takes fewer blocks instead of holding the other one up at the end.
    if threads <= 1 {
        let mut ragged = Vec::new();
        for (b, d) in dst.chunks_mut(MC * n).enumerate() {
            matmul_block(d, a, b * MC, rhs, epilogue, &mut ragged);
        }
    } else {
        dst.par_chunks_mut(MC * n)
            .enumerate()
            .for_each_init(Vec::new, |ragged, (b, d)| {
                matmul_block(d, a, b * MC, rhs, epilogue, ragged)
            });
    }
}

/// One block of at most `MC` rows of `a` from row `first` on, into `dst` (dense, as many rows
/// as it holds). The tile kernel reads each sliver's `MR` rows in place as six streams; only a
/// last sliver of fewer than `MR` rows is copied, into zero-padded rows of `ragged` (scratch).
/// (Copying every sliver into one k-major stream, as BLIS does, measured no faster here and
/// cost 6% of the encoder's time in the copy.) The slivers' row slices are made once a block,
/// not once a tile. Compiled for AVX2+FMA as a whole, so the tile kernel is inlined into the
/// loops and the run-time choice of instructions is made once a block, not once a tile (a tile
/// of attention scores is only 32 inner steps long, where a call per tile cost a quarter of
/// the time).
#[multiversion(targets("x86_64+avx2+fma"))]
fn matmul_block<'a>(
    dst: &mut [f32],
    a: Rows<'a>,
    first: usize,
    rhs: &PackedRhs,
    epilogue: Epilogue<'a>,
    ragged: &mut Vec<f32>,
) {
    let (k, n) = (rhs.k, rhs.n);
    let mc = dst.len() / n;
    let full = mc / MR;
    let tail = mc % MR;
    for pc in (0..k).step_by(KC) {
        let kc = KC.min(k - pc);
        if tail > 0 {
            ragged.clear();
            ragged.resize(MR * kc, 0.0);
            for r in 0..tail {
                let row = a.row(first + full * MR + r, pc, kc);
                ragged[r * kc..(r + 1) * kc].copy_from_slice(row);
            }
        }
        // Row slices of every sliver, on the stack (a block has at most MC / MR + 1).
        let mut slivers = [[&[] as &[f32]; MR]; MC / MR + 1];
        for (s, sliver) in slivers.iter_mut().enumerate().take(full) {
            *sliver = std::array::from_fn(|r| a.row(first + s * MR + r, pc, kc));
        }
        if tail > 0 {
            slivers[full] = std::array::from_fn(|r| &ragged[r * kc..(r + 1) * kc]);
        }
        let slivers = &slivers[..full + usize::from(tail > 0)];
        for jr in (0..n).step_by(NR) {
            let panel = rhs.panel(pc, kc, jr);
            let cols = NR.min(n - jr);
            for (s, rows) in slivers.iter().enumerate() {
                let ir = s * MR;
                let tile = tile_product(kc, rows, panel);
                let out = &mut dst[ir * n + jr..];
                if ir + MR <= mc && cols == NR {
                    store_tile(out, n, &tile, pc == 0);
                } else {
                    store_part_tile(out, n, MR.min(mc - ir), cols, &tile, pc == 0);
                }
            }
        }
    }
    // The block's rows are finished and still in cache: apply the epilogue to them.
    epilogue.apply(dst);
}

/// The 6x16 register tile of `rows * panel` over `kc` inner steps: `rows[r][p]` is row `r`'s
/// value at step `p`, `panel[p * NR + j]` the weight for step `p` and column `j`. Plain loops
/// over fixed-size arrays, which LLVM keeps in twelve 8-wide registers (one broadcast and two
/// fused multiply-adds a row and step).
#[inline(always)]
fn tile_product(kc: usize, rows: &[&[f32]; MR], panel: &[f32]) -> [[f32; NR]; MR] {
    let mut acc = [[0f32; NR]; MR];
    let [r0, r1, r2, r3, r4, r5] = *rows;
    let steps = r0[..kc]
        .iter()
        .zip(&r1[..kc])
        .zip(&r2[..kc])
        .zip(&r3[..kc])
        .zip(&r4[..kc])
        .zip(&r5[..kc])
        .zip(panel[..kc * NR].chunks_exact(NR));
    for ((((((a0, a1), a2), a3), a4), a5), b) in steps {
        let b: &[f32; NR] = b.try_into().unwrap();
        let a = [*a0, *a1, *a2, *a3, *a4, *a5];
        for r in 0..MR {
            for j in 0..NR {
                acc[r][j] = a[r].mul_add(b[j], acc[r][j]);
            }
        }
    }
    acc
}

/// A whole tile, written (`first` inner block) or added into `dst`, whose rows are `n` apart.
#[inline(always)]
fn store_tile(dst: &mut [f32], n: usize, tile: &[[f32; NR]; MR], first: bool) {
    for (r, t) in tile.iter().enumerate() {
        let out: &mut [f32; NR] = (&mut dst[r * n..r * n + NR]).try_into().unwrap();
        if first {
            *out = *t;
        } else {
            for j in 0..NR {
                out[j] += t[j];
            }
        }
    }
}

/// The ragged tiles at the bottom and right edges: only `rows x cols` of the tile is real.
fn store_part_tile(
    dst: &mut [f32],
    n: usize,
    rows: usize,
    cols: usize,
    tile: &[[f32; NR]; MR],
    first: bool,
) {
    for (r, t) in tile.iter().enumerate().take(rows) {
        let out = &mut dst[r * n..r * n + cols];
        if first {
            out.copy_from_slice(&t[..cols]);
        } else {
            for (o, v) in out.iter_mut().zip(t) {
                *o += v;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testdata::data;

    /// Schoolbook product in f64: the definition of the matrix product.
    fn schoolbook(a: &[f32], b: &[f32], m: usize, k: usize, n: usize) -> Vec<f64> {
        let mut c = vec![0f64; m * n];
        for i in 0..m {
            for j in 0..n {
                c[i * n + j] = (0..k)
                    .map(|p| a[i * k + p] as f64 * b[p * n + j] as f64)
                    .sum();
            }
        }
        c
    }

    #[test]
    fn packed_product_matches_the_schoolbook_product_on_ragged_shapes() {
        // Shapes straddle every block edge: rows not a multiple of MR or MC, inner sizes below,
        // at and above KC, columns not a multiple of NR.
        for &(m, k, n) in &[
            (1, 1, 1),
            (5, 7, 3),
            (6, 256, 16),
            (73, 257, 17),
            (150, 600, 40),
            (13, 384, 384),
            (7, 2100, 20),
        ] {
            let a = data(m * k, 1 + m as u32);
            let b = data(k * n, 2 + n as u32);
            let want = schoolbook(&a, &b, m, k, n);
            for threads in [1, 2, 3] {
                let mut got = vec![f32::NAN; m * n];
                matmul_packed(
                    &mut got,
                    &a,
                    &PackedRhs::from_rows(&b, k, n),
                    Epilogue::Plain,
                    threads,
                );
                for (g, w) in got.iter().zip(&want) {
                    // f32 accumulation over k terms of size <= 1: error well under k * 2^-24.
                    assert!(
                        (*g as f64 - w).abs() < 1e-5 * k as f64,
                        "{m}x{k}x{n}: {g} vs {w}"
                    );
                }
            }
        }
    }

    #[test]
    fn linear_weight_packing_is_the_transpose_and_epilogues_apply_bias_and_gelu() {
        let (m, k, n) = (9, 300, 20);
        let x = data(m * k, 3);
        let w = data(n * k, 4); // [outputs, inputs]
        let bias = data(n, 5);
        let mut wt = vec![0f32; k * n];
        for j in 0..n {
            for p in 0..k {
                wt[p * n + j] = w[j * k + p];
            }
        }
        let want = schoolbook(&x, &wt, m, k, n);
        let rhs = PackedRhs::from_linear_weight(&w, n, k);
        let mut biased = vec![0f32; m * n];
        matmul_packed(&mut biased, &x, &rhs, Epilogue::Bias(&bias), 2);
        let mut gelud = vec![0f32; m * n];
        matmul_packed(&mut gelud, &x, &rhs, Epilogue::BiasGelu(&bias), 2);
        for i in 0..m * n {
            let z = want[i] + bias[i % n] as f64;
            assert!((biased[i] as f64 - z).abs() < 1e-4);
            assert!((gelud[i] - crate::gelu(z as f32)).abs() < 1e-4);
        }
    }

    #[test]
    fn packed_layout_is_the_blis_panel_layout() {
        // The layout written out from its definition (module docs): panels of NR columns,
        // k-major inside each KC block, columns past n zero. Rows read in place from a wider
        // matrix (stride k + n + 3), scaled, straight and transposed; the second shape spans
        // two KC blocks.
        for (k, n) in [(37usize, 21usize), (KC + 52, 5)] {
            let stride = k + n + 3;
            let n_padded = n.div_ceil(NR) * NR;
            let expected = |b: &dyn Fn(usize, usize) -> f32| {
                let mut out = Vec::new();
                for pc in (0..k).step_by(KC) {
                    for jr in (0..n_padded).step_by(NR) {
                        for p in pc..(pc + KC).min(k) {
                            for j in jr..jr + NR {
                                out.push(if j < n { b(p, j) } else { 0.0 });
                            }
                        }
                    }
                }
                out
            };
            let wide = data(k * stride, 9);
            let mut got = PackedRhs::default();
            got.repack_rows(Rows::new(&wide, k, n, stride), 2.0);
            assert_eq!(got.data, expected(&|p, j| 2.0 * wide[p * stride + j]));
            // Transposed: the source rows are the n outputs, each k long (a Linear weight).
            let wide_t = data(n * stride, 10);
            got.repack_rows_transposed(Rows::new(&wide_t, n, k, stride), 2.0);
            assert_eq!(got.data, expected(&|p, j| 2.0 * wide_t[j * stride + p]));
            assert_eq!((got.inner(), got.outputs()), (k, n));
        }
    }

    #[test]
    #[should_panic(expected = "destination shape")]
    fn refuses_a_destination_of_the_wrong_size() {
        let rhs = PackedRhs::from_rows(&[1.0; 6], 2, 3);
        matmul_packed(&mut [0.0; 5], &[1.0; 4], &rhs, Epilogue::Plain, 1);
    }
}
