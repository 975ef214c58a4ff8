//! fp32 matrix-product rate of kerf's `matmul` (the gemm crate, both cores) on a square
//! 2048x2048 product and on the shapes of MiniLM's projections over an 8,192-token batch.
//! Compare with PyTorch on the same shapes (notes/encoder-speed.md shows the command).
//!
//! Usage: cargo run --release --example matmul_rate
use kerf::embed::kernels::{matmul, View};
use std::time::Instant;
fn main() {
    // (rows, inner, columns): square, then feed-forward up, down, fused QKV, attention output.
    for &(m, k, n) in &[
        (2048usize, 2048usize, 2048usize),
        (8192, 384, 1536),
        (8192, 1536, 384),
        (8192, 384, 1152),
        (8192, 384, 384),
    ] {
        let a = vec![0.5f32; m * k];
        let b = vec![0.25f32; k * n];
        let mut c = vec![0f32; m * n];
        matmul(
            &mut c,
            n,
            View::rows(&a, m, k),
            View::rows(&b, k, n),
            1.0,
            false,
            2,
        );
        let reps = 5;
        let t = Instant::now();
        for _ in 0..reps {
            matmul(
                &mut c,
                n,
                View::rows(&a, m, k),
                View::transposed(&b, n, k),
                1.0,
                false,
                2,
            );
        }
        let s = t.elapsed().as_secs_f64();
        println!(
            "{m}x{k}x{n}: {:.1} GFLOP/s",
            reps as f64 * 2.0 * (m * k * n) as f64 / s / 1e9
        );
    }
}
