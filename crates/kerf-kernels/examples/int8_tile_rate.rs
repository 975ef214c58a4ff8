//! Would an int8 matrix product pay on this CPU? `int_mul_rate` times bare instructions; this
//! times whole register tiles, the inner loop of a real product, with every load, broadcast and
//! widening step an int8 product on AVX2 needs, against the fp32 tile kerf ships (6 rows by 16
//! columns, one broadcast and two fused multiply-adds a row and step).
//!
//! The int8 tile follows the usual AVX2 recipe (common practice where there is no VNNI):
//! activations as u8, weights as i8, four inner steps a 32-bit lane;
//! `vpmaddubsw` multiplies and sums pairs into int16, `vpmaddwd` against ones sums those pairs
//! into int32, and `vpaddd` accumulates. Two shapes are timed, 6x16 (twelve accumulators, as the
//! fp32 tile) and 4x16 (eight, leaving registers for the temporaries). Operands stay in L1 (256
//! inner steps), so this is the kernel's ceiling: packing, quantising activations and scaling
//! outputs would come on top. Each tile is checked against a scalar product before timing.
//!
//! notes/encoder-speed.md records what it printed. The intrinsics need `unsafe` (the functions
//! are compiled for AVX2+FMA and must only be called where the CPU has them, which `main`
//! checks first); this is a measuring tool, not library code.
//!
//! Usage: cargo run --release -p kerf-kernels --example int8_tile_rate
#[cfg(target_arch = "x86_64")]
mod probe {
    use std::arch::x86_64::*;

    pub const KC: usize = 256;
    pub const NR: usize = 16;

    /// fp32 6x16 tile: `a[r * KC + p]`, `panel[p * NR + j]`.
    #[target_feature(enable = "avx2,fma")]
    pub unsafe fn f32_tile(a: &[f32], panel: &[f32], out: &mut [f32]) {
        assert!(a.len() >= 6 * KC && panel.len() >= KC * NR && out.len() >= 6 * NR);
        let mut acc = [[_mm256_setzero_ps(); 2]; 6];
        for p in 0..KC {
            let b0 = _mm256_loadu_ps(panel.as_ptr().add(p * NR));
            let b1 = _mm256_loadu_ps(panel.as_ptr().add(p * NR + 8));
            for (r, acc) in acc.iter_mut().enumerate() {
                let x = _mm256_broadcast_ss(&*a.as_ptr().add(r * KC + p));
                acc[0] = _mm256_fmadd_ps(x, b0, acc[0]);
                acc[1] = _mm256_fmadd_ps(x, b1, acc[1]);
            }
        }
        for (r, acc) in acc.iter().enumerate() {
            _mm256_storeu_ps(out.as_mut_ptr().add(r * NR), acc[0]);
            _mm256_storeu_ps(out.as_mut_ptr().add(r * NR + 8), acc[1]);
        }
    }

    /// int8 MRx16 tile: `a[r * KC + p]` (u8), and the panel in groups of four inner steps,
    /// `panel[(g * NR + j) * 4 + q]` the weight (i8) for step `4g + q` and column `j`, so one
    /// 32-byte load holds eight columns' four steps.
    #[target_feature(enable = "avx2")]
    pub unsafe fn i8_tile<const MR: usize>(a: &[u8], panel: &[i8], out: &mut [i32]) {
        assert!(a.len() >= MR * KC && panel.len() >= KC * NR && out.len() >= MR * NR);
        let ones = _mm256_set1_epi16(1);
        let mut acc = [[_mm256_setzero_si256(); 2]; MR];
        for g in 0..KC / 4 {
            let bp = panel.as_ptr().add(g * NR * 4) as *const __m256i;
            let b0 = _mm256_loadu_si256(bp);
            let b1 = _mm256_loadu_si256(bp.add(1));
            for (r, acc) in acc.iter_mut().enumerate() {
                let four = (a.as_ptr().add(r * KC + 4 * g) as *const i32).read_unaligned();
                let x = _mm256_set1_epi32(four);
                let p0 = _mm256_madd_epi16(_mm256_maddubs_epi16(x, b0), ones);
                let p1 = _mm256_madd_epi16(_mm256_maddubs_epi16(x, b1), ones);
                acc[0] = _mm256_add_epi32(acc[0], p0);
                acc[1] = _mm256_add_epi32(acc[1], p1);
            }
        }
        for (r, acc) in acc.iter().enumerate() {
            _mm256_storeu_si256(out.as_mut_ptr().add(r * NR) as *mut __m256i, acc[0]);
            _mm256_storeu_si256(out.as_mut_ptr().add(r * NR + 8) as *mut __m256i, acc[1]);
        }
    }
}

#[cfg(target_arch = "x86_64")]
fn main() {
    use probe::{KC, NR};
    if !(is_x86_feature_detected!("avx2") && is_x86_feature_detected!("fma")) {
        println!("this CPU has no AVX2+FMA: nothing to measure");
        return;
    }
    // Operands small enough to check exactly: u8 activations below 128 and i8 weights in
    // [-63, 63], the ranges that keep vpmaddubsw's int16 pair sums from saturating.
    let a8: Vec<u8> = (0..6 * KC).map(|i| (i * 37 % 128) as u8).collect();
    let w: Vec<i32> = (0..KC * NR).map(|i| (i * 53 % 127) as i32 - 63).collect(); // w[p*NR+j]
    let mut panel8 = vec![0i8; KC * NR];
    for p in 0..KC {
        for j in 0..NR {
            panel8[((p / 4) * NR + j) * 4 + p % 4] = w[p * NR + j] as i8;
        }
    }
    let a32: Vec<f32> = a8.iter().map(|&v| v as f32).collect();
    let panel32: Vec<f32> = w.iter().map(|&v| v as f32).collect();
    let expect = |r: usize, j: usize| -> i64 {
        (0..KC)
            .map(|p| a8[r * KC + p] as i64 * w[p * NR + j] as i64)
            .sum()
    };

    let mut out32 = vec![0f32; 6 * NR];
    let mut out_i = vec![0i32; 6 * NR];
    // SAFETY (every probe call below): AVX2 and FMA were detected above; slice lengths are
    // asserted inside.
    unsafe { probe::f32_tile(&a32, &panel32, &mut out32) };
    for r in 0..6 {
        for j in 0..NR {
            assert_eq!(out32[r * NR + j] as i64, expect(r, j), "f32 tile wrong");
        }
    }
    unsafe { probe::i8_tile::<6>(&a8, &panel8, &mut out_i) };
    for r in 0..6 {
        for j in 0..NR {
            assert_eq!(
                out_i[r * NR + j] as i64,
                expect(r, j),
                "6x16 int8 tile wrong"
            );
        }
    }
    unsafe { probe::i8_tile::<4>(&a8, &panel8, &mut out_i) };
    for r in 0..4 {
        for j in 0..NR {
            assert_eq!(
                out_i[r * NR + j] as i64,
                expect(r, j),
                "4x16 int8 tile wrong"
            );
        }
    }

    // SAFETY (the three calls): AVX2 and FMA were detected above; the slices are the sizes
    // the tiles assert.
    let f32_rate = unsafe { best_rate(6, &a32[..], &panel32[..], &mut out32[..], probe::f32_tile) };
    let i8_6 = unsafe { best_rate(6, &a8[..], &panel8[..], &mut out_i[..], probe::i8_tile::<6>) };
    let i8_4 = unsafe { best_rate(4, &a8[..], &panel8[..], &mut out_i[..], probe::i8_tile::<4>) };
    println!("one thread, tiles over {KC} inner steps in L1, billions of multiply-accumulates a second (best of five):");
    println!("fp32 6x16 (kerf's tile)   {f32_rate:6.1}  1.00x");
    println!(
        "int8 6x16                 {i8_6:6.1}  {:.2}x",
        i8_6 / f32_rate
    );
    println!(
        "int8 4x16                 {i8_4:6.1}  {:.2}x",
        i8_4 / f32_rate
    );
}

/// Best of five timings of 400,000 calls of `tile` (`rows` x 16 outputs over `KC` steps), in
/// billions of multiply-accumulates a second: the machine is shared and noisy. The operands
/// go through black_box on every call so no tile can be hoisted out of the loop.
///
/// # Safety
/// `tile` must be safe to call on this CPU with these operands.
#[cfg(target_arch = "x86_64")]
unsafe fn best_rate<A: ?Sized, B: ?Sized, O: ?Sized>(
    rows: usize,
    a: &A,
    b: &B,
    out: &mut O,
    tile: unsafe fn(&A, &B, &mut O),
) -> f64 {
    use std::time::Instant;
    const TILES: usize = 400_000;
    (0..5)
        .map(|_| {
            let t = Instant::now();
            for _ in 0..TILES {
                tile(std::hint::black_box(a), std::hint::black_box(b), out);
                std::hint::black_box(&*out);
            }
            (TILES * rows * probe::KC * probe::NR) as f64 / t.elapsed().as_secs_f64() / 1e9
        })
        .fold(0f64, f64::max)
}

#[cfg(not(target_arch = "x86_64"))]
fn main() {
    println!("x86-64 only");
}
