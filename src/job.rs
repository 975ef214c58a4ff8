//! The embedding job: every chunk of a corpus through the encoder, resumable through the cache.
//!
//! Batches are a fixed function of the job's chunk set (unique inputs sorted by token count,
//! grouped under a token budget), never of what the cache happens to hold. A batch whose every
//! input is cached is skipped; any other batch is embedded whole and stored in one
//! transaction. So a job killed half way and run again computes exactly the batches an
//! uninterrupted run computes, and its outputs match byte for byte.
use std::collections::HashMap;
use std::time::Instant;

use crate::cache::{text_key, VectorCache};
use crate::embed::Embedder;

/// The unique encoder inputs of a job and how they group into batches.
#[derive(Debug, Clone, PartialEq)]
pub struct BatchPlan {
    /// Unique chunk texts (without prefix), in first-seen order.
    pub texts: Vec<String>,
    /// Token count of each unique input (specials and prefix included).
    pub tokens: Vec<usize>,
    /// For each chunk of the job, the index of its unique input.
    pub input_of_chunk: Vec<usize>,
    /// Batches as lists of unique-input indices; inputs sorted by length so rows pack tightly.
    pub batches: Vec<Vec<usize>>,
}

/// Deduplicate chunk texts and group them into batches of at most `max_batch_tokens` tokens
/// (a single longer input gets a batch of its own).
pub fn plan_batches(
    chunks: impl IntoIterator<Item = (String, usize)>,
    max_batch_tokens: usize,
) -> BatchPlan {
    let mut index: HashMap<String, usize> = HashMap::new();
    let (mut texts, mut tokens, mut input_of_chunk) = (Vec::new(), Vec::new(), Vec::new());
    for (text, n) in chunks {
        let i = *index.entry(text.clone()).or_insert_with(|| {
            texts.push(text);
            tokens.push(n);
            texts.len() - 1
        });
        input_of_chunk.push(i);
    }
    let mut order: Vec<usize> = (0..texts.len()).collect();
    order.sort_by_key(|&i| (tokens[i], i));
    let mut batches: Vec<Vec<usize>> = Vec::new();
    let mut used = 0usize;
    for i in order {
        match batches.last_mut() {
            Some(b) if used + tokens[i] <= max_batch_tokens => {
                b.push(i);
                used += tokens[i];
            }
            _ => {
                batches.push(vec![i]);
                used = tokens[i];
            }
        }
    }
    BatchPlan {
        texts,
        tokens,
        input_of_chunk,
        batches,
    }
}

/// Progress of a job.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Progress {
    /// Unique inputs done (cached or embedded).
    pub inputs_done: usize,
    /// Unique inputs in all.
    pub inputs_total: usize,
    /// Tokens of the inputs done.
    pub tokens_done: usize,
    /// Tokens in all.
    pub tokens_total: usize,
}

/// What a job did.
#[derive(Debug, Clone, Copy, Default, PartialEq, serde::Serialize)]
pub struct JobReport {
    /// Chunks in the job.
    pub chunks: usize,
    /// Distinct chunk texts.
    pub unique_inputs: usize,
    /// Inputs found in the cache.
    pub cached_inputs: usize,
    /// Inputs embedded by this run.
    pub embedded_inputs: usize,
    /// Tokens this run sent through the encoder (specials and prefix included).
    pub embedded_tokens: usize,
    /// Seconds spent in the encoder.
    pub encoder_seconds: f64,
}

/// Run the job: vectors of every unique input, in `plan.texts` order.
pub fn run(
    plan: &BatchPlan,
    prefix: &str,
    embedder: &dyn Embedder,
    cache: Option<&VectorCache>,
    progress: &mut dyn FnMut(Progress),
) -> anyhow::Result<(Vec<Vec<f32>>, JobReport)> {
    let fingerprint = embedder.fingerprint();
    let mut vectors: Vec<Option<Vec<f32>>> = vec![None; plan.texts.len()];
    let mut report = JobReport {
        chunks: plan.input_of_chunk.len(),
        unique_inputs: plan.texts.len(),
        ..Default::default()
    };
    let tokens_total = plan.tokens.iter().sum();
    let mut p = Progress {
        inputs_done: 0,
        inputs_total: plan.texts.len(),
        tokens_done: 0,
        tokens_total,
    };
    progress(p);
    for batch in &plan.batches {
        let keys: Vec<[u8; 32]> = batch
            .iter()
            .map(|&i| text_key(prefix, &plan.texts[i]))
            .collect();
        let hits = match cache {
            Some(c) => c.get_many(&fingerprint, &keys)?,
            None => vec![None; batch.len()],
        };
        if hits.iter().all(Option::is_some) {
            for (&i, v) in batch.iter().zip(hits) {
                vectors[i] = v;
            }
            report.cached_inputs += batch.len();
        } else {
            let inputs: Vec<String> = batch
                .iter()
                .map(|&i| format!("{prefix}{}", plan.texts[i]))
                .collect();
            let refs: Vec<&str> = inputs.iter().map(String::as_str).collect();
            let t = Instant::now();
            let out = embedder.embed(&refs)?;
            report.encoder_seconds += t.elapsed().as_secs_f64();
            anyhow::ensure!(
                out.len() == batch.len(),
                "the encoder returned {} vectors for {} inputs",
                out.len(),
                batch.len()
            );
            if let Some(c) = cache {
                let items: Vec<([u8; 32], Vec<f32>)> =
                    keys.iter().copied().zip(out.iter().cloned()).collect();
                c.put_many(&fingerprint, &items)?;
            }
            report.embedded_inputs += batch.len();
            report.embedded_tokens += batch.iter().map(|&i| plan.tokens[i]).sum::<usize>();
            for (&i, v) in batch.iter().zip(out) {
                vectors[i] = Some(v);
            }
        }
        p.inputs_done += batch.len();
        p.tokens_done += batch.iter().map(|&i| plan.tokens[i]).sum::<usize>();
        progress(p);
    }
    Ok((
        vectors
            .into_iter()
            .map(|v| v.expect("every batch filled its vectors"))
            .collect(),
        report,
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn batches_dedupe_sort_and_respect_the_budget() {
        let chunks = vec![
            ("a".to_string(), 50),
            ("b".to_string(), 10),
            ("a".to_string(), 50),
            ("c".to_string(), 30),
            ("d".to_string(), 200),
        ];
        let p = plan_batches(chunks, 100);
        assert_eq!(p.texts, ["a", "b", "c", "d"]);
        assert_eq!(p.input_of_chunk, [0, 1, 0, 2, 3]);
        // sorted by tokens: b(10) c(30) a(50) | d(200, alone)
        assert_eq!(p.batches, vec![vec![1, 2, 0], vec![3]]);
    }
}
