//! Does an integer product pay on this CPU? Peak multiply-accumulate rates of the three AVX2
//! instruction forms an int8 or int16 matrix product would be built on, against fp32 fused
//! multiply-adds, each as twelve independent accumulator chains on one thread with no memory
//! traffic (the same shape as `fma_peak`):
//! - `vfmadd231ps`: 8 fp32 products a instruction;
//! - `vpmaddwd` + `vpaddd`: 16 int16 products (pairs summed into int32);
//! - `vpmaddubsw` + `vpaddw`: 32 u8 x i8 products (pairs summed into saturating int16; a real
//!   product must also widen to int32 with a further `vpmaddwd` on the same multiplier).
//!
//! notes/encoder-speed.md records what it printed. Its 1.5x bound for a widened int8 product
//! proved too low: `int8_tile_rate` times whole tiles, and measured 1.73x.
//! The intrinsics need `unsafe` (the functions are compiled for AVX2 and must only be called
//! where the CPU has it, which `main` checks first); this is a measuring tool, not library code.
//!
//! Usage: cargo run --release -p kerf-kernels --example int_mul_rate
#[cfg(target_arch = "x86_64")]
mod probe {
    use std::arch::x86_64::*;

    #[target_feature(enable = "avx2,fma")]
    pub unsafe fn f32_fma(steps: usize) -> f32 {
        let mut acc = [_mm256_set1_ps(1.0); 12];
        let b = _mm256_set1_ps(1.000_000_1);
        let c = _mm256_set1_ps(1e-7);
        for _ in 0..steps {
            for a in acc.iter_mut() {
                *a = _mm256_fmadd_ps(*a, b, c);
            }
        }
        let lanes: [[f32; 8]; 12] = std::mem::transmute(acc);
        lanes.iter().flatten().sum()
    }

    // Each chain multiplies its own accumulator (so no two multiplies are the same and none
    // can be shared) and then adds: the multiply and the add a real product's inner step needs.
    #[target_feature(enable = "avx2")]
    pub unsafe fn i16_madd(steps: usize) -> i32 {
        let mut acc: [__m256i; 12] = std::array::from_fn(|i| _mm256_set1_epi32(i as i32 + 1));
        let (b, c) = (_mm256_set1_epi16(3), _mm256_set1_epi32(7));
        for _ in 0..steps {
            for a in acc.iter_mut() {
                *a = _mm256_add_epi32(_mm256_madd_epi16(*a, b), c);
            }
        }
        let lanes: [[i32; 8]; 12] = std::mem::transmute(acc);
        lanes.iter().flatten().fold(0, |s, v| s.wrapping_add(*v))
    }

    #[target_feature(enable = "avx2")]
    pub unsafe fn u8_maddubs(steps: usize) -> i32 {
        let mut acc: [__m256i; 12] = std::array::from_fn(|i| _mm256_set1_epi16(i as i16 + 1));
        let (b, c) = (_mm256_set1_epi8(3), _mm256_set1_epi16(7));
        for _ in 0..steps {
            for a in acc.iter_mut() {
                *a = _mm256_add_epi16(_mm256_maddubs_epi16(*a, b), c);
            }
        }
        let lanes: [[i16; 16]; 12] = std::mem::transmute(acc);
        lanes
            .iter()
            .flatten()
            .fold(0i32, |s, v| s.wrapping_add(*v as i32))
    }
}

#[cfg(target_arch = "x86_64")]
fn main() {
    use std::time::Instant;
    if !(is_x86_feature_detected!("avx2") && is_x86_feature_detected!("fma")) {
        println!("this CPU has no AVX2+FMA: nothing to measure");
        return;
    }
    const STEPS: usize = 50_000_000;
    // The step count goes through black_box inside the timed region, so the compiler can
    // neither fold the pure chains into constants nor hoist them out of the timing.
    let rate = |products_per_step: usize, f: &dyn Fn(usize) -> f64| {
        (0..3)
            .map(|_| {
                let t = Instant::now();
                std::hint::black_box(f(std::hint::black_box(STEPS)));
                (STEPS * products_per_step) as f64 / t.elapsed().as_secs_f64() / 1e9
            })
            .fold(0f64, f64::max)
    };
    // SAFETY (all three calls): AVX2 and FMA were detected above.
    let fma = rate(12 * 8, &|s| unsafe { probe::f32_fma(s) } as f64);
    let madd = rate(12 * 16, &|s| unsafe { probe::i16_madd(s) } as f64);
    let maddubs = rate(12 * 32, &|s| unsafe { probe::u8_maddubs(s) } as f64);
    println!("one thread, billions of multiply-accumulates a second (best of three):");
    println!("fp32 vfmadd231ps    {fma:6.1}  1.00x");
    println!("int16 vpmaddwd      {madd:6.1}  {:.2}x", madd / fma);
    println!(
        "u8xi8 vpmaddubsw    {maddubs:6.1}  {:.2}x (saturating int16, before widening)",
        maddubs / fma
    );
}

#[cfg(not(target_arch = "x86_64"))]
fn main() {
    println!("x86-64 only");
}
