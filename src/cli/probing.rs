//! The flags and the printed form of self-retrieval probes, shared by `compare` and `sweep`
//! (the work is `kerf::compare::probes`).
use std::io::Write;

use anyhow::Result;
use clap::Args;

use kerf::compare::engine::Corpus;
use kerf::compare::probes::{self, ProbeEval, ProbeOptions, ProbeSet};

/// Probes drawn when none are asked for and no references are given.
pub const DEFAULT_PROBES: usize = 150;

#[derive(Args, Clone)]
pub struct ProbeArgs {
    /// Judge plans by self-retrieval: N sentences drawn from the corpus must find their own
    /// document with the sentence taken out. Used on its own when no --refs is given (150
    /// probes), or beside the references when asked for.
    #[arg(long, value_name = "N")]
    pub probes: Option<usize>,
    /// Seed of the probe draw (the same corpus and seed give the same probes).
    #[arg(long, value_name = "S", default_value_t = 1)]
    pub probe_seed: u64,
    /// Text put before each probe when it is embedded, for models that expect a query prefix.
    #[arg(long, value_name = "TEXT", default_value = "")]
    pub probe_prefix: String,
}

impl ProbeArgs {
    /// How many probes to use: the number asked for, the default without references, or none.
    pub fn wanted(&self, have_refs: bool) -> Option<usize> {
        match (self.probes, have_refs) {
            (Some(n), _) => Some(n),
            (None, false) => Some(DEFAULT_PROBES),
            (None, true) => None,
        }
    }

    /// Draw the probes and say on stderr how they were drawn; an error when none qualify.
    pub fn draw(&self, corpus: &Corpus, count: usize, first_window: usize) -> Result<ProbeSet> {
        let set = probes::draw(
            corpus,
            &ProbeOptions::new(count, self.probe_seed, first_window),
        );
        let s = &set.skipped;
        anyhow::ensure!(
            !set.probes.is_empty(),
            "no sentence of the corpus qualifies as a probe (running text of {}-{} tokens found in one document only; passed over: {} short, {} long, {} headings/code/tables, {} repeated)",
            set.options.min_tokens,
            set.options.max_tokens,
            s.short,
            s.long,
            s.not_prose,
            s.repeated
        );
        let bands = set
            .per_band()
            .iter()
            .map(|(b, n)| format!("{n} {}", b.label()))
            .collect::<Vec<_>>()
            .join(", ");
        eprintln!(
            "kerf: self-retrieval: {} sentences (of {} that qualify) drawn from {} documents with seed {} ({bands}; first window = {} tokens) must find their own document with the sentence taken out",
            set.probes.len(),
            set.candidates,
            set.documents,
            set.options.seed,
            set.options.first_window
        );
        Ok(set)
    }
}

/// The plan table of a probe run: MRR@10 over all probes and per band, and the share whose own
/// document's best chunk held the sentence.
pub fn write_table(out: &mut dyn Write, rows: &[(String, &ProbeEval)]) -> Result<()> {
    let w = rows.iter().map(|r| r.0.len()).max().unwrap_or(8).max(8);
    writeln!(
        out,
        "{:<w$}  {:>7} {:>7} {:>6} {:>6}  {:>7} {:>7} {:>7}  {:>6} {:>9}",
        "self-retrieval",
        "MRR@10",
        "nDCG@10",
        "R@1",
        "R@10",
        "first",
        "middle",
        "last",
        "chunk",
        "extra tok"
    )?;
    for (name, e) in rows {
        let band = |d: probes::Depth| {
            e.bands
                .iter()
                .find(|b| b.0 == d)
                .map_or("—".to_string(), |b| format!("{:.3}", b.1.mrr_at_10))
        };
        writeln!(
            out,
            "{:<w$}  {:>7.3} {:>7.3} {:>6.3} {:>6.3}  {:>7} {:>7} {:>7}  {:>6.3} {:>9}",
            name,
            e.summary.mrr_at_10,
            e.summary.ndcg_at_10,
            e.summary.recall_at_1,
            e.summary.recall_at_10,
            band(probes::Depth::First),
            band(probes::Depth::Middle),
            band(probes::Depth::Last),
            e.chunk_hits,
            super::survey::thousands(e.holed_tokens)
        )?;
    }
    writeln!(
        out,
        "(first/middle/last: MRR@10 of probes by where their sentence starts; chunk: share whose best chunk held the sentence; extra tok: tokens re-embedded without the sentences)"
    )?;
    Ok(())
}

/// A probe set and its evaluation as JSON.
pub fn set_json(set: &ProbeSet) -> serde_json::Value {
    serde_json::json!({
        "count": set.probes.len(),
        "candidates": set.candidates,
        "documents": set.documents,
        "options": set.options,
        "skipped": set.skipped,
        "per_band": set.per_band().iter().map(|(b, n)| serde_json::json!({"band": b, "probes": n})).collect::<Vec<_>>(),
    })
}
