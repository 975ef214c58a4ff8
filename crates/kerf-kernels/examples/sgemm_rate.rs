//! Rates of `sgemm::matmul_packed` (fp32, weights packed once) and `qgemm::matmul_i8` (8-bit,
//! activations quantised on the fly) on MiniLM's projection shapes and a 2048-cube, on
//! `THREADS` threads of one pool, in multiply-adds counted as two operations. Compare with
//! `fma_peak` (the hardware peak) and PyTorch's product measured by scripts/bench-embed.
//!
//! Usage: cargo run --release -p kerf-kernels --example sgemm_rate [THREADS]
use kerf_kernels::qgemm::{matmul_i8, PackedI8};
use kerf_kernels::sgemm::{matmul_packed, Epilogue, PackedRhs};
use std::time::Instant;

fn main() {
    let threads: usize = std::env::args()
        .nth(1)
        .map(|t| t.parse().expect("THREADS is a whole number"))
        .unwrap_or(2);
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build_global()
        .expect("pool");
    // (rows, inner, columns): square, then feed-forward up, down, fused QKV, attention output.
    for &(m, k, n) in &[
        (2048usize, 2048usize, 2048usize),
        (8192, 384, 1536),
        (8192, 1536, 384),
        (8192, 384, 1152),
        (8192, 384, 384),
    ] {
        let a: Vec<f32> = (0..m * k).map(|i| (i % 7) as f32 * 0.1).collect();
        let w: Vec<f32> = (0..n * k).map(|i| (i % 5) as f32 * 0.1).collect();
        let mut c = vec![0f32; m * n];
        let rhs = PackedRhs::from_linear_weight(&w, n, k);
        let rhs8 = PackedI8::from_linear_weight(&w, n, k);
        let flop = 2.0 * (m * k * n) as f64;
        // Best of three timings of four products: the machine is shared and noisy.
        let best = |f: &mut dyn FnMut()| {
            f();
            (0..3)
                .map(|_| {
                    let t = Instant::now();
                    for _ in 0..4 {
                        f();
                    }
                    4.0 * flop / t.elapsed().as_secs_f64() / 1e9
                })
                .fold(0f64, f64::max)
        };
        let f32_rate = best(&mut || matmul_packed(&mut c, &a, &rhs, Epilogue::Plain, threads));
        let i8_rate = best(&mut || matmul_i8(&mut c, &a, &rhs8, Epilogue::Plain, threads));
        println!(
            "{m}x{k}x{n}: f32 {f32_rate:.1} GFLOP/s, int8 {i8_rate:.1} GOP/s ({:.2}x)",
            i8_rate / f32_rate
        );
    }
}
