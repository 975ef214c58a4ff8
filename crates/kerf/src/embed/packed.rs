//! The packed encoder: a BERT-style forward pass (BERT, RoBERTa, XLM-RoBERTa, DistilBERT and
//! MPNet: the differences are data in [`super::family`], plus MPNet's relative position bias in
//! attention) over sequences laid end to end, with no padding.
//!
//! The stock candle model pads every batch to its longest input and runs attention over the
//! padded square. Here a batch is one `[tokens, hidden]` matrix holding every sequence's rows
//! back to back: the projections and the feed-forward are single large matrix products over all
//! real tokens, and attention runs per sequence and head on exactly that sequence's rows, read
//! from the fused query/key/value matrix (no masks; each head's keys and values are packed for
//! the tiled product, a copy linear in the length against quadratic work). Bias and GELU are
//! applied inside the products, bias+residual+LayerNorm in one pass. Weights are packed once,
//! at load, into the layout the products want. With several threads, each takes its own run of
//! the batch ([`PackedModel::forward_shared_out`]).
use rayon::prelude::*;

use super::family::WeightNames;
use super::kernels;
use super::kernels::attention::{attend, Scratch};
use super::kernels::qgemm::{matmul_i8, PackedI8};
use super::kernels::sgemm::{matmul_packed, Epilogue, PackedRhs, Rows};
use super::mpnet::RelativeBias;
use super::{Precision, TokenPooling};

/// Sizes of an encoder, from config.json (read with its family's key names:
/// [`super::family::Family::dims`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Dims {
    /// Width of the hidden states.
    pub hidden: usize,
    /// Attention heads.
    pub heads: usize,
    /// Width of the feed-forward layer.
    pub intermediate: usize,
    /// Encoder layers.
    pub layers: usize,
    /// Position embeddings (the longest input).
    pub positions: usize,
    /// Vocabulary.
    pub vocab: usize,
    /// Rows of the token-type table (0: the family has none).
    pub type_vocab: usize,
    /// LayerNorm epsilon.
    pub eps: f32,
}

/// A dense layer's weight `W^T` (PyTorch stores `W` as `[out, in]`), packed once in the
/// layout of the product of its precision.
pub enum Weight {
    /// f32 panels (also bf16: f32 panels of values rounded to bf16).
    F32(PackedRhs),
    /// 8-bit codes with a scale per output.
    I8(PackedI8),
}

impl Weight {
    /// Pack a `[outputs, inputs]` row-major weight for `precision`.
    pub fn pack(w: &[f32], outputs: usize, inputs: usize, precision: Precision) -> Self {
        match precision {
            Precision::F32 => Self::F32(PackedRhs::from_linear_weight(w, outputs, inputs)),
            Precision::Bf16 => {
                let rounded: Vec<f32> = w
                    .iter()
                    .map(|&v| half::bf16::from_f32(v).to_f32())
                    .collect();
                Self::F32(PackedRhs::from_linear_weight(&rounded, outputs, inputs))
            }
            Precision::Int8 => Self::I8(PackedI8::from_linear_weight(w, outputs, inputs)),
        }
    }
}

/// A dense layer `y = x W^T + b`, its weight packed once for the blocked product.
pub struct Linear {
    /// The weight, in its precision's layout.
    pub weight: Weight,
    /// Bias, `[out]`.
    pub bias: Vec<f32>,
    /// Input width.
    pub inputs: usize,
    /// Output width.
    pub outputs: usize,
}

/// LayerNorm parameters.
pub struct Norm {
    /// Scale.
    pub weight: Vec<f32>,
    /// Shift.
    pub bias: Vec<f32>,
}

/// One encoder layer.
pub struct Layer {
    /// Query, key and value projections fused into one `[3 * hidden, hidden]` layer.
    pub qkv: Linear,
    /// Attention output projection.
    pub attn_out: Linear,
    /// LayerNorm after attention.
    pub attn_norm: Norm,
    /// Feed-forward up projection.
    pub up: Linear,
    /// Feed-forward down projection.
    pub down: Linear,
    /// LayerNorm after the feed-forward.
    pub out_norm: Norm,
}

/// Embedding tables.
pub struct Embeddings {
    /// `[vocab, hidden]`.
    pub word: Vec<f32>,
    /// `[positions, hidden]`.
    pub position: Vec<f32>,
    /// Token type 0's row, `[hidden]` (kerf embeds single segments); zeros for a family
    /// without token types.
    pub token_type0: Vec<f32>,
    /// RoBERTa-style position numbering: `Some(padding_idx)` (see
    /// [`super::family::Positions::AfterPadding`]); `None`: token `i` takes row `i`.
    pub padding_idx: Option<u32>,
    /// LayerNorm after the sum.
    pub norm: Norm,
}

/// A loaded encoder ready for packed forward passes.
pub struct PackedModel {
    /// Sizes.
    pub dims: Dims,
    /// Embedding tables.
    pub embeddings: Embeddings,
    /// Encoder layers.
    pub layers: Vec<Layer>,
    /// MPNet's relative position bias, shared by every layer's attention (`None`: the family
    /// has none).
    pub relative_bias: Option<RelativeBias>,
}

/// Rows per parallel task in the row-wise steps.
const ROWS_PER_TASK: usize = 32;

impl PackedModel {
    /// Hidden states of the last layer for each sequence, laid end to end: row `offsets[s] + i`
    /// is token `i` of sequence `s`. Every id must be below the vocabulary size and no sequence
    /// longer than the position table (the caller tokenizes with truncation).
    pub fn forward(&self, seqs: &[&[u32]], threads: usize) -> Vec<f32> {
        let d = self.dims;
        let h = d.hidden;
        let total: usize = seqs.iter().map(|s| s.len()).sum();
        let offsets: Vec<usize> = seqs
            .iter()
            .scan(0, |acc, s| {
                let o = *acc;
                *acc += s.len();
                Some(o)
            })
            .collect();

        let mut hidden = vec![0f32; total * h];
        self.embed_tokens(seqs, &offsets, &mut hidden);

        let mut qkv = vec![0f32; total * 3 * h];
        let mut ctx = vec![0f32; total * h];
        let mut ctx_heads = vec![0f32; total * h];
        let mut update = vec![0f32; total * h];
        let mut inter = vec![0f32; total * d.intermediate];
        for layer in &self.layers {
            // Fused query/key/value projection over every token of the batch.
            dense(
                &mut qkv,
                &hidden,
                &layer.qkv,
                Epilogue::Bias(&layer.qkv.bias),
                threads,
            );
            self.attention(&qkv, seqs, &offsets, &mut ctx_heads);
            interleave_heads(&ctx_heads, &mut ctx, total, d.heads, h / d.heads);
            dense(&mut update, &ctx, &layer.attn_out, Epilogue::Plain, threads);
            residual_norm(
                &mut hidden,
                &update,
                &layer.attn_out.bias,
                &layer.attn_norm,
                d.eps,
            );
            dense(
                &mut inter,
                &hidden,
                &layer.up,
                Epilogue::BiasGelu(&layer.up.bias),
                threads,
            );
            dense(&mut update, &inter, &layer.down, Epilogue::Plain, threads);
            residual_norm(
                &mut hidden,
                &update,
                &layer.down.bias,
                &layer.out_norm,
                d.eps,
            );
        }
        hidden
    }

    /// [`forward`](Self::forward) with the sequences cut into [`RUNS_PER_THREAD`] runs a
    /// thread, of about equal token counts, each run's products on one thread and the runs
    /// handed out to the threads as they come free: no thread waits at the end of every product
    /// for the other, as it does when each product is shared, and a core slowed by other work
    /// takes fewer runs. Rows come back in input order and equal `forward`'s bit for bit: every
    /// row's arithmetic is the same whichever run it is in.
    pub fn forward_shared_out(&self, seqs: &[&[u32]], threads: usize) -> Vec<f32> {
        let lens: Vec<usize> = seqs.iter().map(|s| s.len()).collect();
        let runs = split_by_tokens(&lens, threads * RUNS_PER_THREAD);
        if runs.len() <= 1 {
            return self.forward(seqs, threads);
        }
        let parts: Vec<Vec<f32>> = runs
            .into_par_iter()
            .map(|r| self.forward(&seqs[r], 1))
            .collect();
        parts.concat()
    }

    fn embed_tokens(&self, seqs: &[&[u32]], offsets: &[usize], hidden: &mut [f32]) {
        let h = self.dims.hidden;
        let e = &self.embeddings;
        for (s, &off) in seqs.iter().zip(offsets) {
            // Non-padding tokens seen so far, for RoBERTa-style numbering.
            let mut counted = 0usize;
            for (i, &id) in s.iter().enumerate() {
                let pos = match e.padding_idx {
                    None => i,
                    Some(p) if id == p => p as usize,
                    Some(p) => {
                        counted += 1;
                        p as usize + counted
                    }
                };
                let row = &mut hidden[(off + i) * h..(off + i + 1) * h];
                let word = &e.word[id as usize * h..(id as usize + 1) * h];
                let place = &e.position[pos * h..(pos + 1) * h];
                kernels::sum3(row, word, place, &e.token_type0);
            }
        }
        let eps = self.dims.eps;
        par_rows(hidden, h, |rows| {
            kernels::layer_norm(rows, &e.norm.weight, &e.norm.bias, eps)
        });
    }

    /// Scaled dot-product attention for every (sequence, head) pair, in parallel. Output is
    /// head-major: head `k`'s context rows for all tokens form one contiguous block, so each
    /// task owns a disjoint slice.
    fn attention(&self, qkv: &[f32], seqs: &[&[u32]], offsets: &[usize], out: &mut [f32]) {
        let d = self.dims;
        let h = d.hidden;
        let hd = h / d.heads;
        let total: usize = seqs.iter().map(|s| s.len()).sum();
        let scale = 1.0 / (hd as f32).sqrt();
        let mut tasks: Vec<(usize, usize, &mut [f32])> = Vec::with_capacity(d.heads * seqs.len());
        for (head, block) in out.chunks_mut(total * hd).enumerate() {
            let mut rest = block;
            for (s, seq) in seqs.iter().enumerate() {
                let (mine, tail) = rest.split_at_mut(seq.len() * hd);
                tasks.push((head, s, mine));
                rest = tail;
            }
        }
        // Longest sequences first so the pool's last tasks are the short ones.
        tasks.sort_by_key(|t| std::cmp::Reverse(seqs[t.1].len()));
        tasks
            .into_par_iter()
            .for_each_init(Scratch::default, |scratch, (head, s, dst)| {
                let len = seqs[s].len();
                let base = offsets[s] * 3 * h;
                // Part 0, 1, 2 (query, key, value) of this head: `hd` columns of each fused row.
                let part = |p: usize| Rows::new(&qkv[base + p * h + head * hd..], len, hd, 3 * h);
                let bias = self
                    .relative_bias
                    .as_ref()
                    .map(|b| b.for_sequence(head, len));
                attend(dst, part(0), part(1), part(2), scale, bias, scratch);
            });
    }
}

/// [`load`] from the bytes of a safetensors file.
pub fn load_bytes(
    bytes: &[u8],
    dims: Dims,
    names: &WeightNames,
    padding_idx: Option<usize>,
    precision: Precision,
) -> Result<PackedModel, String> {
    let st = safetensors::SafeTensors::deserialize(bytes).map_err(|e| e.to_string())?;
    load(&st, dims, names, padding_idx, precision)
}

/// Read the weights of a checkpoint from safetensors bytes (f32, f16 or bf16 tensors, named as
/// `names` says, with or without one of its prefixes) into the packed layouts; `padding_idx`
/// selects RoBERTa-style position numbering ([`Embeddings::padding_idx`]). Shapes must already
/// have been checked against `dims`; `Err` carries the name of a tensor that could not be read. The dense
/// layers' weights are packed for `precision`: bf16 rounds them to bfloat16 (products then see
/// bf16 weights with f32 accumulation, what bf16 dot-product instructions compute), int8
/// quantises them per output column for the 8-bit product.
pub fn load(
    st: &safetensors::SafeTensors<'_>,
    dims: Dims,
    names: &WeightNames,
    padding_idx: Option<usize>,
    precision: Precision,
) -> Result<PackedModel, String> {
    let get = |name: &str| -> Result<Vec<f32>, String> {
        let t = std::iter::once(String::new())
            .chain(names.prefixes.iter().map(|p| p.to_string()))
            .find_map(|p| st.tensor(&format!("{p}{name}")).ok())
            .ok_or_else(|| format!("tensor `{name}` is missing"))?;
        let b = t.data();
        use safetensors::Dtype;
        Ok(match t.dtype() {
            Dtype::F32 => b
                .chunks_exact(4)
                .map(|c| f32::from_le_bytes([c[0], c[1], c[2], c[3]]))
                .collect(),
            Dtype::F16 => b
                .chunks_exact(2)
                .map(|c| half::f16::from_le_bytes([c[0], c[1]]).to_f32())
                .collect(),
            Dtype::BF16 => b
                .chunks_exact(2)
                .map(|c| half::bf16::from_le_bytes([c[0], c[1]]).to_f32())
                .collect(),
            other => {
                return Err(format!(
                    "tensor `{name}` has dtype {other:?}; expected F32, F16 or BF16"
                ))
            }
        })
    };
    // A dense layer's `[outputs, inputs]` weight and `[outputs]` bias, sizes checked here so a
    // malformed file is an error naming the tensor, never a panic in the packing.
    let weight_and_bias = |pre: &str, inputs: usize, outputs: usize| {
        let (w, b) = (get(&format!("{pre}.weight"))?, get(&format!("{pre}.bias"))?);
        if w.len() != inputs * outputs || b.len() != outputs {
            return Err(format!(
                "tensor `{pre}` does not have {outputs}x{inputs} weights and {outputs} biases"
            ));
        }
        Ok((w, b))
    };
    let linear = |pre: &str, inputs: usize, outputs: usize| -> Result<Linear, String> {
        let (weight, bias) = weight_and_bias(pre, inputs, outputs)?;
        Ok(Linear {
            weight: Weight::pack(&weight, outputs, inputs, precision),
            bias,
            inputs,
            outputs,
        })
    };
    let norm = |pre: &str| -> Result<Norm, String> {
        Ok(Norm {
            weight: get(&format!("{pre}.weight"))?,
            bias: get(&format!("{pre}.bias"))?,
        })
    };
    let (h, i) = (dims.hidden, dims.intermediate);
    let token_type0 = match names.token_type {
        Some(t) => {
            let types = get(&format!("{t}.weight"))?;
            if types.len() < h {
                return Err(format!("tensor `{t}.weight` has no row for token type 0"));
            }
            types[..h].to_vec()
        }
        None => vec![0.0; h],
    };
    let padding_idx = match padding_idx {
        Some(p) if p >= dims.positions => {
            return Err(format!(
                "padding index {p} lies outside the {} position rows",
                dims.positions
            ))
        }
        p => p.map(|p| p as u32),
    };
    let embeddings = Embeddings {
        word: get(&format!("{}.weight", names.word))?,
        position: get(&format!("{}.weight", names.position))?,
        token_type0,
        padding_idx,
        norm: norm(names.embed_norm)?,
    };
    let mut layers = Vec::with_capacity(dims.layers);
    for l in 0..dims.layers {
        let name = |part: &str| names.layer(l, part);
        // Query, key and value stacked as one [3h, h] weight: one product instead of three.
        let part = |p: &str| weight_and_bias(&name(p), h, h);
        let (q, k, v) = (part(names.query)?, part(names.key)?, part(names.value)?);
        let qkv = Linear {
            weight: Weight::pack(&[q.0, k.0, v.0].concat(), 3 * h, h, precision),
            bias: [q.1, k.1, v.1].concat(),
            inputs: h,
            outputs: 3 * h,
        };
        layers.push(Layer {
            qkv,
            attn_out: linear(&name(names.attn_out), h, h)?,
            attn_norm: norm(&name(names.attn_norm))?,
            up: linear(&name(names.up), h, i)?,
            down: linear(&name(names.down), i, h)?,
            out_norm: norm(&name(names.out_norm))?,
        });
    }
    let relative_bias = match names.relative_bias {
        Some(b) => Some(
            RelativeBias::new(&get(&format!("{b}.weight"))?, dims.heads, dims.positions)
                .map_err(|e| format!("tensor `{b}.weight` {e}"))?,
        ),
        None => None,
    };
    Ok(PackedModel {
        dims,
        embeddings,
        layers,
        relative_bias,
    })
}

/// Runs of a batch per thread in [`PackedModel::forward_shared_out`]. One run a thread left
/// the encoder about 6% slower than four (the two cores of the bench machine differ in speed
/// from minute to minute, and a fixed half cannot follow that); eight measured the same as
/// four (notes/encoder-speed.md, step 11).
pub const RUNS_PER_THREAD: usize = 4;

/// Cut `lens` (tokens per sequence, in order) into at most `parts` contiguous non-empty runs
/// whose token sums are as even as whole sequences allow: each run ends at the sequence
/// boundary nearest its share of the total. (Ending it at the first boundary that reaches the
/// share gave the first of two runs one sequence too many whenever lengths were even: 17 of
/// 32 sequences of about 253 tokens.)
pub fn split_by_tokens(lens: &[usize], parts: usize) -> Vec<std::ops::Range<usize>> {
    let total: usize = lens.iter().sum();
    let parts = parts.clamp(1, lens.len().max(1));
    let mut runs = Vec::with_capacity(parts);
    let (mut start, mut acc) = (0, 0);
    for (i, len) in lens.iter().enumerate() {
        acc += len;
        // Run `runs.len()` closes once the running sum reaches its share of the total: after
        // this sequence, or before it when that is nearer the share (all scaled by `parts`).
        let share = total * (runs.len() + 1);
        if runs.len() + 1 < parts && acc * parts >= share {
            let past = acc * parts - share;
            let end = if 2 * past > len * parts && i > start {
                i
            } else {
                i + 1
            };
            runs.push(start..end);
            start = end;
        }
    }
    if start < lens.len() || runs.is_empty() {
        runs.push(start..lens.len());
    }
    runs
}

/// `out = epilogue(x W^T)` over all rows of `x`.
fn dense(out: &mut [f32], x: &[f32], layer: &Linear, epilogue: Epilogue<'_>, threads: usize) {
    match &layer.weight {
        Weight::F32(w) => matmul_packed(out, x, w, epilogue, threads),
        Weight::I8(w) => matmul_i8(out, x, w, epilogue, threads),
    }
}

fn par_rows(x: &mut [f32], width: usize, f: impl Fn(&mut [f32]) + Sync) {
    x.par_chunks_mut(width * ROWS_PER_TASK).for_each(&f);
}

fn residual_norm(hidden: &mut [f32], update: &[f32], bias: &[f32], norm: &Norm, eps: f32) {
    let h = bias.len();
    hidden
        .par_chunks_mut(h * ROWS_PER_TASK)
        .zip(update.par_chunks(h * ROWS_PER_TASK))
        .for_each(|(hs, us)| {
            kernels::residual_layer_norm(hs, us, bias, &norm.weight, &norm.bias, eps)
        });
}

/// Head-major context (`[heads][tokens][head_dim]`) to token-major (`[tokens][heads * head_dim]`).
fn interleave_heads(src: &[f32], dst: &mut [f32], total: usize, heads: usize, hd: usize) {
    let h = heads * hd;
    dst.par_chunks_mut(h * ROWS_PER_TASK)
        .enumerate()
        .for_each(|(c, rows)| {
            for (i, row) in rows.chunks_exact_mut(h).enumerate() {
                let t = c * ROWS_PER_TASK + i;
                for k in 0..heads {
                    let from = &src[k * total * hd + t * hd..k * total * hd + (t + 1) * hd];
                    row[k * hd..(k + 1) * hd].copy_from_slice(from);
                }
            }
        });
}

/// Pool one sequence's token rows (`[len, hidden]`) into one vector.
pub fn pool_tokens(rows: &[f32], hidden: usize, pooling: TokenPooling) -> Vec<f32> {
    let len = rows.len() / hidden;
    match pooling {
        TokenPooling::Cls => rows[..hidden].to_vec(),
        TokenPooling::Mean => {
            let mut acc = vec![0f32; hidden];
            for r in rows.chunks_exact(hidden) {
                kernels::add_into(&mut acc, r);
            }
            acc.iter_mut().for_each(|a| *a /= len as f32);
            acc
        }
        TokenPooling::Max => {
            let mut acc = vec![f32::NEG_INFINITY; hidden];
            for r in rows.chunks_exact(hidden) {
                kernels::max_into(&mut acc, r);
            }
            acc
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn head_interleaving_puts_each_heads_block_at_its_columns() {
        // 3 tokens, 2 heads of width 2: head-major [h0: t0 t1 t2][h1: t0 t1 t2].
        let src: Vec<f32> = (0..12).map(|v| v as f32).collect();
        let mut dst = vec![0f32; 12];
        interleave_heads(&src, &mut dst, 3, 2, 2);
        assert_eq!(dst, vec![0., 1., 6., 7., 2., 3., 8., 9., 4., 5., 10., 11.]);
    }

    #[test]
    fn token_runs_cover_every_sequence_in_order_and_share_tokens_evenly() {
        assert_eq!(split_by_tokens(&[5, 5, 5, 5], 2), vec![0..2, 2..4]);
        assert_eq!(split_by_tokens(&[100, 1, 1, 1], 2), vec![0..1, 1..4]);
        assert_eq!(split_by_tokens(&[7], 2), vec![0..1]);
        assert_eq!(split_by_tokens(&[], 2), vec![0..0]);
        assert_eq!(split_by_tokens(&[3, 4], 1), vec![0..2]);
        // Even lengths split in the middle, not one past it.
        assert_eq!(split_by_tokens(&[253; 32], 2), vec![0..16, 16..32]);
        assert_eq!(split_by_tokens(&[1; 7], 3), vec![0..2, 2..5, 5..7]);
        assert_eq!(split_by_tokens(&[1; 9], 8).len(), 8);
        // Many lengths: runs are contiguous, non-empty and cover everything; no run exceeds
        // its even share by more than one sequence.
        let lens: Vec<usize> = (0..97).map(|i| 20 + (i * 37) % 230).collect();
        for parts in 1..6 {
            let runs = split_by_tokens(&lens, parts);
            assert!(runs.len() <= parts && !runs.is_empty());
            assert_eq!(runs[0].start, 0);
            assert_eq!(runs.last().unwrap().end, lens.len());
            for w in runs.windows(2) {
                assert_eq!(w[0].end, w[1].start);
            }
            let total: usize = lens.iter().sum();
            for r in &runs {
                assert!(!r.is_empty());
                let sum: usize = lens[r.clone()].iter().sum();
                assert!(
                    sum <= total / parts + 250,
                    "{parts} parts: run {r:?} has {sum}"
                );
            }
        }
    }

    #[test]
    fn token_pooling_by_hand() {
        let rows = [1.0f32, -2.0, 3.0, 4.0, 5.0, 0.0];
        assert_eq!(pool_tokens(&rows, 2, TokenPooling::Cls), vec![1.0, -2.0]);
        assert_eq!(
            pool_tokens(&rows, 2, TokenPooling::Mean),
            vec![3.0, 2.0 / 3.0]
        );
        assert_eq!(pool_tokens(&rows, 2, TokenPooling::Max), vec![5.0, 4.0]);
    }
}
