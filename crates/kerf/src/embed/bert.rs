//! The encoder on CPU: tokenizer, memory-mapped weights, forward pass, pooling over the
//! attention mask, normalisation. The packed engine runs every family [`super::family`] maps
//! (BERT, RoBERTa, XLM-RoBERTa, DistilBERT, MPNet); the candle engine, kept as the reference, runs
//! BERT.
use std::path::Path;
use std::sync::Mutex;
use std::time::Instant;

use candle_core::{DType, Device, Tensor};
use candle_nn::VarBuilder;
use candle_transformers::models::bert::{BertModel, Config};
use sha2::{Digest, Sha256};
use tokenizers::{Tokenizer, TruncationParams};

use super::family::{self, WeightNames};
use super::packed::{self, PackedModel};
use super::{
    EmbedError, EmbedOptions, EmbedStats, Embedder, Engine, Precision, SpanPass, TokenIds,
    TokenPooling,
};
use crate::model::ModelInfo;

/// The forward pass behind a [`BertEmbedder`].
enum Runner {
    Packed(PackedModel),
    Candle(BertModel),
}

/// A sentence encoder of one of the families in [`super::family`] (the name is historical).
pub struct BertEmbedder {
    runner: Runner,
    threads: usize,
    tokenizer: Tokenizer,
    /// The same tokenizer without truncation, for counting.
    counter: Tokenizer,
    pooling: TokenPooling,
    normalize: bool,
    dim: usize,
    max_batch_tokens: usize,
    /// Most tokens an input may hold, specials included.
    max_input: usize,
    /// Special ids before and after the content of an input, as the tokenizer's
    /// post-processor puts them.
    lead_ids: Vec<u32>,
    tail_ids: Vec<u32>,
    fingerprint: String,
    pool: rayon::ThreadPool,
    stats: Mutex<EmbedStats>,
}

/// The special ids the post-processor puts before and after a text's content (`[CLS]` and
/// `[SEP]` for BERT), read off the encoding of a one-word text.
fn special_layout(tokenizer: &Tokenizer) -> Result<(Vec<u32>, Vec<u32>), String> {
    let enc = tokenizer.encode("a", true).map_err(|e| e.to_string())?;
    let (ids, mask) = (enc.get_ids(), enc.get_special_tokens_mask());
    let lead = mask.iter().take_while(|&&m| m == 1).count();
    let tail = mask.iter().rev().take_while(|&&m| m == 1).count();
    if lead + tail >= ids.len() {
        return Err("the tokenizer gives no content token for the text \"a\"".into());
    }
    Ok((ids[..lead].to_vec(), ids[ids.len() - tail..].to_vec()))
}

/// Each input's rows (`[len, dim]`) in the packed engine's output, which holds them one after
/// another with no padding.
fn rows_per_input<'a>(
    hidden: &'a [f32],
    ids: &'a [&[u32]],
    dim: usize,
) -> impl Iterator<Item = &'a [f32]> {
    ids.iter().scan(0, move |off, s| {
        let rows = &hidden[*off * dim..(*off + s.len()) * dim];
        *off += s.len();
        Some(rows)
    })
}

fn file_err(path: &Path, reason: impl ToString) -> EmbedError {
    EmbedError::File {
        path: path.to_path_buf(),
        reason: reason.to_string(),
    }
}

/// Shapes every checkpoint of a family must have, checked before loading so a bad file gets a
/// message naming the tensor rather than a failure deep in the forward pass.
fn expected_shapes(d: &packed::Dims, names: &WeightNames) -> Vec<(String, Vec<usize>)> {
    let (h, i) = (d.hidden, d.intermediate);
    let mut out = vec![
        (format!("{}.weight", names.word), vec![d.vocab, h]),
        (format!("{}.weight", names.position), vec![d.positions, h]),
        (format!("{}.weight", names.embed_norm), vec![h]),
        (format!("{}.bias", names.embed_norm), vec![h]),
    ];
    if let Some(t) = names.token_type {
        out.push((format!("{t}.weight"), vec![d.type_vocab, h]));
    }
    if let Some(b) = names.relative_bias {
        out.push((
            format!("{b}.weight"),
            vec![super::mpnet::NUM_BUCKETS, d.heads],
        ));
    }
    for l in 0..d.layers {
        for (part, outputs, inputs) in [
            (names.query, h, h),
            (names.key, h, h),
            (names.value, h, h),
            (names.attn_out, h, h),
            (names.up, i, h),
            (names.down, h, i),
        ] {
            let name = names.layer(l, part);
            out.push((format!("{name}.weight"), vec![outputs, inputs]));
            out.push((format!("{name}.bias"), vec![outputs]));
        }
        for part in [names.attn_norm, names.out_norm] {
            let name = names.layer(l, part);
            out.push((format!("{name}.weight"), vec![h]));
            out.push((format!("{name}.bias"), vec![h]));
        }
    }
    out
}

fn check_tensors(
    path: &Path,
    st: &safetensors::SafeTensors<'_>,
    dims: &packed::Dims,
    names: &WeightNames,
) -> Result<(), EmbedError> {
    let present: std::collections::HashSet<String> =
        st.names().into_iter().map(String::from).collect();
    for (name, shape) in expected_shapes(dims, names) {
        let found = std::iter::once(name.clone())
            .chain(names.prefixes.iter().map(|p| format!("{p}{name}")))
            .find(|n| present.contains(n));
        let Some(found) = found else {
            return Err(EmbedError::Tensor {
                path: path.to_path_buf(),
                name,
                problem: "is missing".into(),
            });
        };
        let t = st.tensor(&found).map_err(|e| file_err(path, e))?;
        if t.shape() != shape.as_slice() {
            return Err(EmbedError::Tensor {
                path: path.to_path_buf(),
                name: found,
                problem: format!(
                    "has shape {:?}, expected {:?} from config.json",
                    t.shape(),
                    shape
                ),
            });
        }
    }
    Ok(())
}

impl BertEmbedder {
    /// Load a model folder: its JSON files through [`crate::model::inspect`], then
    /// model.safetensors (memory-mapped) and tokenizer.json.
    pub fn load(dir: &Path, opts: &EmbedOptions) -> Result<Self, EmbedError> {
        let (info, _) = crate::model::inspect(dir)?;
        Self::from_model(&info, opts)
    }

    /// Load the encoder of a folder already read by [`crate::model::inspect`]: its config and
    /// declared pooling come from `info`; only the weights and the tokenizer are read here.
    pub fn from_model(info: &ModelInfo, opts: &EmbedOptions) -> Result<Self, EmbedError> {
        if opts.precision != Precision::F32 && opts.engine == Engine::Candle {
            return Err(EmbedError::Unsupported(format!(
                "precision {:?} needs the packed engine; the candle reference runs f32 only",
                opts.precision
            )));
        }
        let dir = info.dir.as_path();
        let cfg_path = dir.join("config.json");
        let family = family::family_of(&info.model_type);
        let Some((family, names)) = family.and_then(|f| f.weights.as_ref().map(|n| (f, n))) else {
            return Err(EmbedError::Architecture {
                path: cfg_path,
                model_type: info.model_type.clone(),
                supported: family::runnable_model_types().join(", "),
            });
        };
        if opts.engine == Engine::Candle && info.model_type != "bert" {
            return Err(EmbedError::Unsupported(format!(
                "{}: the candle engine is the BERT reference and runs model_type \"bert\" only; `{}` runs on the packed engine",
                cfg_path.display(),
                info.model_type
            )));
        }
        let dims = family
            .dims(&info.config)
            .map_err(|e| file_err(&cfg_path, e))?;
        let padding_idx = family.padding_idx(info.pad_token_id);
        let usable = info.usable_positions();
        if opts.max_input_tokens == 0 || opts.max_input_tokens > usable {
            return Err(EmbedError::Mismatch(format!(
                "max_input_tokens {} must be between 1 and the model's {usable} usable positions",
                opts.max_input_tokens
            )));
        }
        let weights_path = dir.join("model.safetensors");
        let file = std::fs::File::open(&weights_path).map_err(|e| file_err(&weights_path, e))?;
        // SAFETY: the weights file is mapped read-only and not modified while the model lives;
        // this is the one memory-mapped load the project allows.
        let mmap = unsafe { memmap2::Mmap::map(&file) }.map_err(|e| file_err(&weights_path, e))?;
        let st = safetensors::SafeTensors::deserialize(&mmap)
            .map_err(|e| file_err(&weights_path, format!("not a safetensors file: {e}")))?;
        check_tensors(&weights_path, &st, &dims, names)?;
        family
            .check_heads(&dims)
            .map_err(|e| file_err(&cfg_path, e))?;

        let tok_path = dir.join("tokenizer.json");
        let tok_bytes = std::fs::read(&tok_path).map_err(|e| file_err(&tok_path, e))?;
        let mut tokenizer =
            Tokenizer::from_bytes(&tok_bytes).map_err(|e| file_err(&tok_path, e))?;
        let vocab = tokenizer.get_vocab_size(true);
        if vocab > dims.vocab {
            return Err(EmbedError::Mismatch(format!(
                "{}: the tokenizer has {vocab} tokens but the weights' vocabulary (config.json vocab_size) has {}",
                tok_path.display(),
                dims.vocab
            )));
        }
        tokenizer.with_padding(None);
        let mut counter = tokenizer.clone();
        counter
            .with_truncation(None)
            .map_err(|e| file_err(&tok_path, e))?;
        let (lead_ids, tail_ids) = special_layout(&counter).map_err(|e| file_err(&tok_path, e))?;
        tokenizer
            .with_truncation(Some(TruncationParams {
                max_length: opts.max_input_tokens,
                ..Default::default()
            }))
            .map_err(|e| file_err(&tok_path, e))?;

        let folder_pooling = match info.pooling.as_ref().map(|p| p.mode.as_str()) {
            Some("cls") => TokenPooling::Cls,
            Some("max") => TokenPooling::Max,
            _ => TokenPooling::Mean,
        };
        let folder_normalize = info.normalize;
        let pooling = opts.pooling.unwrap_or(folder_pooling);
        let normalize = opts.normalize.unwrap_or(folder_normalize);

        let mut h = Sha256::new();
        h.update(b"kerf-bert-v1\0");
        h.update(&mmap[..]);
        h.update(&tok_bytes);
        h.update(
            format!(
                "{pooling:?}/{normalize}/{}/{:?}/{:?}",
                opts.max_input_tokens, opts.precision, opts.engine
            )
            .as_bytes(),
        );
        if opts.precision == Precision::Int8 {
            // The quantisation scheme's code ranges: vectors cached under another scheme are
            // other vectors.
            use crate::embed::kernels::qgemm::{ACT_MAX, W_MAX};
            h.update(format!("/int8 codes u{ACT_MAX} i{W_MAX}").as_bytes());
        }
        let fingerprint: String = h.finalize().iter().map(|b| format!("{b:02x}")).collect();

        let runner = match opts.engine {
            Engine::Candle => {
                let config: Config = serde_json::from_value(info.config.clone())
                    .map_err(|e| file_err(&cfg_path, format!("not a BERT config: {e}")))?;
                let vb = VarBuilder::from_slice_safetensors(&mmap, DType::F32, &Device::Cpu)
                    .map_err(|e| file_err(&weights_path, e))?;
                Runner::Candle(
                    BertModel::load(vb, &config).map_err(|e| file_err(&weights_path, e))?,
                )
            }
            Engine::Packed => {
                let options = family.unsupported_options(&info.config);
                if !options.is_empty() {
                    return Err(EmbedError::Unsupported(format!(
                        "{}: {} (the packed engine; the candle reference runs other BERT activations)",
                        cfg_path.display(),
                        options.join("; ")
                    )));
                }
                let model = packed::load(&st, dims, names, padding_idx, opts.precision)
                    .map_err(|e| file_err(&weights_path, e))?;
                Runner::Packed(model)
            }
        };
        let threads = if opts.threads == 0 {
            std::thread::available_parallelism().map_or(1, |n| n.get())
        } else {
            opts.threads
        };
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .map_err(|e| EmbedError::Run(e.to_string()))?;
        Ok(Self {
            runner,
            threads,
            tokenizer,
            counter,
            pooling,
            normalize,
            dim: dims.hidden,
            max_batch_tokens: opts.max_batch_tokens.max(1),
            max_input: opts.max_input_tokens,
            lead_ids,
            tail_ids,
            fingerprint,
            pool,
            stats: Mutex::new(EmbedStats::default()),
        })
    }

    /// The pooling in force.
    pub fn pooling(&self) -> TokenPooling {
        self.pooling
    }

    fn run_batch(&self, ids: &[&[u32]]) -> Result<Vec<Vec<f32>>, EmbedError> {
        Ok(match &self.runner {
            Runner::Candle(model) => self
                .run_candle(model, ids)?
                .into_iter()
                .map(|v| self.finish(v))
                .collect(),
            Runner::Packed(model) => {
                // Each core runs its own share of the inputs (measured faster than sharing
                // every product since the tiled product: notes/encoder-speed.md, step 10).
                let hidden = model.forward_shared_out(ids, self.threads);
                rows_per_input(&hidden, ids, self.dim)
                    .map(|rows| self.pool_rows(rows))
                    .collect()
            }
        })
    }

    /// One vector from token rows (`[len, dim]`): the token pooling, then normalisation.
    fn pool_rows(&self, rows: &[f32]) -> Vec<f32> {
        self.finish(packed::pool_tokens(rows, self.dim, self.pooling))
    }

    /// L2-normalise when the model folder (or the options) say so.
    fn finish(&self, v: Vec<f32>) -> Vec<f32> {
        if self.normalize {
            crate::pool::normalize(v)
        } else {
            v
        }
    }

    /// Add a call's counters to the totals.
    fn record(&self, add: EmbedStats) {
        let mut s = self.stats.lock().expect("stats lock");
        s.inputs += add.inputs;
        s.real_tokens += add.real_tokens;
        s.padded_tokens += add.padded_tokens;
        s.batches += add.batches;
        s.seconds += add.seconds;
    }

    /// Final hidden rows of each input, `[len, dim]` flattened, in input order.
    fn hidden_rows(&self, ids: &[&[u32]]) -> Result<Vec<Vec<f32>>, EmbedError> {
        match &self.runner {
            Runner::Packed(model) => {
                let hidden = model.forward_shared_out(ids, self.threads);
                Ok(rows_per_input(&hidden, ids, self.dim)
                    .map(<[f32]>::to_vec)
                    .collect())
            }
            Runner::Candle(model) => {
                // One input at a time: no padding, so no mask can leak into the rows.
                let run = |e: candle_core::Error| EmbedError::Run(e.to_string());
                ids.iter()
                    .map(|x| {
                        let input = Tensor::from_vec(x.to_vec(), (1, x.len()), &Device::Cpu)
                            .map_err(run)?;
                        let types = input.zeros_like().map_err(run)?;
                        let hidden = model.forward(&input, &types, None).map_err(run)?;
                        hidden
                            .squeeze(0)
                            .and_then(|t| t.flatten_all())
                            .and_then(|t| t.to_vec1::<f32>())
                            .map_err(run)
                    })
                    .collect()
            }
        }
    }

    fn run_candle(&self, model: &BertModel, ids: &[&[u32]]) -> Result<Vec<Vec<f32>>, EmbedError> {
        let run = |e: candle_core::Error| EmbedError::Run(e.to_string());
        let len = ids.iter().map(|x| x.len()).max().unwrap_or(0);
        let b = ids.len();
        let mut flat = vec![0u32; b * len];
        let mut mask = vec![0f32; b * len];
        for (r, x) in ids.iter().enumerate() {
            flat[r * len..r * len + x.len()].copy_from_slice(x);
            mask[r * len..r * len + x.len()]
                .iter_mut()
                .for_each(|m| *m = 1.0);
        }
        let dev = Device::Cpu;
        let input = Tensor::from_vec(flat, (b, len), &dev).map_err(run)?;
        let types = input.zeros_like().map_err(run)?;
        let mask_t = Tensor::from_vec(mask, (b, len), &dev).map_err(run)?;
        let hidden = model.forward(&input, &types, Some(&mask_t)).map_err(run)?; // (b, len, dim)
        let pooled = match self.pooling {
            TokenPooling::Cls => hidden
                .narrow(1, 0, 1)
                .and_then(|t| t.squeeze(1))
                .map_err(run)?,
            TokenPooling::Mean => {
                let m = mask_t.unsqueeze(2).map_err(run)?;
                let sum = hidden
                    .broadcast_mul(&m)
                    .and_then(|t| t.sum(1))
                    .map_err(run)?;
                let count = m.sum(1).map_err(run)?;
                sum.broadcast_div(&count).map_err(run)?
            }
            TokenPooling::Max => {
                // Padded positions get a very negative value so they never win the maximum.
                let m = mask_t.unsqueeze(2).map_err(run)?;
                let neg =
                    ((m.ones_like().map_err(run)? - &m).map_err(run)? * -1e9f64).map_err(run)?;
                hidden
                    .broadcast_add(&neg)
                    .and_then(|t| t.max(1))
                    .map_err(run)?
            }
        };
        pooled.to_vec2::<f32>().map_err(run)
    }
}

impl Embedder for BertEmbedder {
    fn dim(&self) -> usize {
        self.dim
    }

    fn fingerprint(&self) -> String {
        self.fingerprint.clone()
    }

    fn embed(&self, texts: &[&str]) -> Result<Vec<Vec<f32>>, EmbedError> {
        let t0 = Instant::now();
        let encodings = self
            .tokenizer
            .encode_batch(texts.to_vec(), true)
            .map_err(|e| EmbedError::Run(format!("tokenizer: {e}")))?;
        let ids: Vec<&[u32]> = encodings.iter().map(|e| e.get_ids()).collect();
        // Length-sorted batches under the padded-token budget keep padding small.
        let mut order: Vec<usize> = (0..ids.len()).collect();
        order.sort_by_key(|&i| (ids[i].len(), i));
        let mut out: Vec<Option<Vec<f32>>> = vec![None; ids.len()];
        let mut stats = EmbedStats::default();
        let mut start = 0;
        while start < order.len() {
            let mut end = start + 1;
            // Sorted ascending, so the newest input is the longest: the padded size of the
            // batch is its length times the count. The packed engine pads nothing, so its
            // budget counts real tokens.
            let pads_nothing = matches!(self.runner, Runner::Packed(_));
            let mut real = ids[order[start]].len();
            while end < order.len() {
                let next = ids[order[end]].len();
                let cost = if pads_nothing {
                    real + next
                } else {
                    next * (end + 1 - start)
                };
                if cost > self.max_batch_tokens {
                    break;
                }
                real += next;
                end += 1;
            }
            let batch: Vec<&[u32]> = order[start..end].iter().map(|&i| ids[i]).collect();
            let longest = batch.iter().map(|x| x.len()).max().unwrap_or(0);
            let vecs = self.pool.install(|| self.run_batch(&batch))?;
            for (&i, v) in order[start..end].iter().zip(vecs) {
                out[i] = Some(v);
            }
            stats.batches += 1;
            stats.real_tokens += batch.iter().map(|x| x.len()).sum::<usize>();
            stats.padded_tokens += if pads_nothing {
                batch.iter().map(|x| x.len()).sum::<usize>()
            } else {
                longest * batch.len()
            };
            start = end;
        }
        stats.inputs = texts.len();
        stats.seconds = t0.elapsed().as_secs_f64();
        self.record(stats);
        Ok(out
            .into_iter()
            .map(|v| v.expect("every input embedded"))
            .collect())
    }

    fn count_tokens(&self, text: &str) -> Result<usize, EmbedError> {
        self.counter
            .encode(text, true)
            .map(|e| e.len())
            .map_err(|e| EmbedError::Run(e.to_string()))
    }

    fn stats(&self) -> EmbedStats {
        *self.stats.lock().expect("stats lock")
    }

    fn token_ids(&self, text: &str) -> Result<Option<TokenIds>, EmbedError> {
        // In pieces cut before whitespace, as the token counter does, so memory stays bounded
        // on a long document and the tokens are the counter's.
        let mut out = TokenIds::default();
        let mut start = 0;
        while start < text.len() {
            let end = crate::tokens::piece_end(text, start, crate::tokens::TOKENIZE_PIECE_BYTES);
            let enc = self
                .counter
                .encode(&text[start..end], false)
                .map_err(|e| EmbedError::Run(format!("tokenizer: {e}")))?;
            out.ids.extend_from_slice(enc.get_ids());
            out.offsets
                .extend(enc.get_offsets().iter().map(|&(a, b)| start + a..start + b));
            start = end;
        }
        Ok(Some(out))
    }

    fn specials(&self) -> (usize, usize) {
        (self.lead_ids.len(), self.tail_ids.len())
    }

    fn max_input_tokens(&self) -> usize {
        self.max_input
    }

    fn embed_spans(&self, passes: &[SpanPass]) -> Result<Vec<Vec<Vec<f32>>>, EmbedError> {
        let t0 = Instant::now();
        let seqs: Vec<Vec<u32>> = passes
            .iter()
            .map(|p| {
                let mut s = Vec::with_capacity(p.ids.len() + 2);
                s.extend_from_slice(&self.lead_ids);
                s.extend_from_slice(&p.ids);
                s.extend_from_slice(&self.tail_ids);
                s
            })
            .collect();
        for (p, s) in passes.iter().zip(&seqs) {
            if s.len() > self.max_input {
                return Err(EmbedError::Run(format!(
                    "a late-chunking pass of {} tokens is longer than the encoder's {}",
                    s.len(),
                    self.max_input
                )));
            }
            if let Some(bad) = p.spans.iter().find(|r| r.is_empty() || r.end > s.len()) {
                return Err(EmbedError::Run(format!(
                    "span {bad:?} is empty or outside a pass of {} rows",
                    s.len()
                )));
            }
        }
        let mut out = Vec::with_capacity(passes.len());
        let mut stats = EmbedStats::default();
        let mut start = 0;
        while start < seqs.len() {
            let mut end = start + 1;
            let mut real = seqs[start].len();
            while end < seqs.len() && real + seqs[end].len() <= self.max_batch_tokens {
                real += seqs[end].len();
                end += 1;
            }
            let batch: Vec<&[u32]> = seqs[start..end].iter().map(Vec::as_slice).collect();
            let rows = self.pool.install(|| self.hidden_rows(&batch))?;
            for (p, r) in passes[start..end].iter().zip(rows) {
                out.push(
                    p.spans
                        .iter()
                        .map(|span| self.pool_rows(&r[span.start * self.dim..span.end * self.dim]))
                        .collect(),
                );
            }
            stats.batches += 1;
            stats.real_tokens += real;
            stats.padded_tokens += real;
            start = end;
        }
        stats.inputs = passes.len();
        stats.seconds = t0.elapsed().as_secs_f64();
        self.record(stats);
        Ok(out)
    }
}
