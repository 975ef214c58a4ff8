//! `kerf sweep`: a grid of plans, quality against cost, the Pareto front, a recommendation.
use std::io::{IsTerminal, Write};
use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::Instant;

use anyhow::{Context, Result};
use clap::{Args, ValueEnum};

use kerf::compare::chart::{self, ChartInput, ChartPlan, CostAxis};
use kerf::compare::engine::{self, Corpus, PlanEval};
use kerf::compare::handout::{self, Handout, HandoutPlan};
use kerf::compare::refs::{self, Reference};
use kerf::compare::sweep::{self, Cost, Grid};
use kerf::embed::Precision;
use kerf::plan;
use kerf::profile::Profile;

use super::comparecmd::{baseline_profile, read_corpus, Encoders};
use super::embed::EncoderArgs;
use super::probing::{self, ProbeArgs};
use super::{load_plan, InputArgs, PlanArgs};
use kerf::compare::probes::{self, ProbeEval};

#[derive(Clone, Copy, ValueEnum)]
pub enum Metric {
    /// nDCG@10.
    Ndcg,
    /// MRR@10.
    Mrr,
    /// Recall@10.
    Recall,
}

/// Documents listed per reference and plan in the handout.
const HANDOUT_TOP: usize = 3;

/// What the chart's cost axis shows.
#[derive(Clone, Copy, ValueEnum)]
pub enum ChartCost {
    /// Encoder-input tokens over the corpus.
    Tokens,
    /// Estimated seconds to embed the corpus, at the throughput measured in this run.
    Seconds,
}

#[derive(Args)]
pub struct SweepArgs {
    #[command(flatten)]
    pub input: InputArgs,
    /// Reference texts: kerf TOML, or a TREC queries file (with --qrels). Without it, plans
    /// are judged by self-retrieval (see --probes).
    #[arg(long)]
    pub refs: Option<PathBuf>,
    /// TREC qrels beside a queries file given as --refs.
    #[arg(long)]
    pub qrels: Option<PathBuf>,
    /// Grid: `window=128,256 overlap=0,32 boundary=token,sentence tokens=mean chunks=mean,best precision=f32`.
    #[arg(long, default_value = "")]
    pub grid: String,
    /// Base profile for everything the grid does not vary (model, prefix, min_chunk).
    #[arg(long, short = 'p')]
    pub profile: Option<PathBuf>,
    /// Model folder.
    #[arg(long)]
    pub model: Option<PathBuf>,
    /// Quality measure on the front.
    #[arg(long, value_enum, default_value = "ndcg")]
    pub metric: Metric,
    /// Plans within this much of the best quality count as equally good.
    #[arg(long, default_value_t = 0.01)]
    pub tolerance: f64,
    /// Refuse grids with more plans than this (on a terminal, ask instead).
    #[arg(long, default_value_t = 60)]
    pub max_plans: usize,
    /// Answer yes to the plan-count question.
    #[arg(long, short = 'y')]
    pub yes: bool,
    /// Sweep a length-stratified sample of N documents and extrapolate cost.
    #[arg(long)]
    pub sample: Option<usize>,
    /// Write the recommended plan as a profile.
    #[arg(long)]
    pub save_best: Option<PathBuf>,
    /// Write a quality-against-cost chart (SVG).
    #[arg(long)]
    pub chart: Option<PathBuf>,
    /// Write a self-contained HTML handout: plans, chart, rankings per reference, census,
    /// the recommended profile. It quotes document text: share it as you would the documents.
    #[arg(long, value_name = "FILE.html", requires = "refs")]
    pub handout: Option<PathBuf>,
    /// The chart's cost axis: encoder-input tokens, or estimated seconds to embed.
    #[arg(long, value_enum, default_value = "tokens")]
    pub chart_cost: ChartCost,
    /// Machine-readable output (JSON).
    #[arg(long)]
    pub json: bool,
    #[command(flatten)]
    pub probing: ProbeArgs,
    #[command(flatten)]
    pub encoder: EncoderArgs,
}

struct Row {
    /// Index into the sweep's plans (the baseline comes after the grid's plans).
    index: usize,
    profile: Profile,
    quality: f64,
    summary: kerf::compare::metrics::Summary,
    cost: Cost,
    /// The plan judged by self-retrieval, when probes were drawn.
    probes: Option<ProbeEval>,
}

/// The chart's input from the sweep's rows: cost on the chosen axis, quality on the metric.
fn chart_input(
    rows: &[Row],
    baseline: Option<&Row>,
    front: &[usize],
    recommended: Option<usize>,
    metric: &str,
    axis: CostAxis,
    corpus_name: &str,
) -> ChartInput {
    let cost = |r: &Row| match axis {
        CostAxis::Tokens => r.cost.input_tokens as f64,
        CostAxis::Seconds => r.cost.embed_seconds,
    };
    let point = |r: &Row, on_front: bool| ChartPlan {
        name: r.profile.name.clone(),
        cost: cost(r),
        quality: r.quality,
        on_front,
    };
    ChartInput {
        title: format!("kerf sweep of {corpus_name}: {metric} against cost"),
        metric: metric.to_string(),
        cost_axis: axis,
        plans: rows
            .iter()
            .enumerate()
            .map(|(i, r)| point(r, front.contains(&i)))
            .collect(),
        recommended,
        baseline: baseline.map(|b| point(b, false)),
    }
}

pub fn run(a: SweepArgs) -> Result<()> {
    let grid = Grid::parse(&a.grid).map_err(|e| anyhow::anyhow!("--{e}"))?;
    let base_loaded = load_plan(
        &PlanArgs {
            profile: a.profile.clone(),
            model: a.model.clone(),
        },
        |_| Profile::default(),
    )?;
    let mut base = base_loaded.plan.profile.clone();
    base.model.folder = Some(base_loaded.info.dir.clone());
    let mut plans = grid.plans(&base);
    anyhow::ensure!(
        !plans.is_empty(),
        "the grid gives no valid plan (check windows against overlaps)"
    );
    let groups = sweep::group_plans(&plans);
    if plans.len() > a.max_plans && !a.yes {
        let question = format!(
            "the grid has {} plans ({} distinct chunk sets to embed), more than --max-plans {}",
            plans.len(),
            groups.len(),
            a.max_plans
        );
        if std::io::stdin().is_terminal() && std::io::stderr().is_terminal() {
            eprint!("kerf: {question}. Run them all? [y/N] ");
            let mut answer = String::new();
            std::io::stdin().read_line(&mut answer)?;
            if !answer.trim().eq_ignore_ascii_case("y") {
                anyhow::bail!("sweep cancelled");
            }
        } else {
            anyhow::bail!("{question}; raise --max-plans or pass --yes");
        }
    }
    let references: Vec<Reference> = match &a.refs {
        Some(p) => refs::load(p, a.qrels.as_deref())?,
        None => Vec::new(),
    };
    let full = read_corpus(&a.input, &base_loaded)?;
    if let Some(p) = &a.refs {
        refs::check_known(&references, &full.ids(), &p.display().to_string())?;
    }
    let total_tokens = full.content_tokens();
    // Sample: every expected document plus evenly spread others by length.
    let (corpus, scale) = match a.sample {
        Some(n) if n < full.docs.len() => {
            let lengths: Vec<usize> = full.analyses.iter().map(|x| x.tokens.len()).collect();
            let must: Vec<usize> = full
                .docs
                .iter()
                .enumerate()
                .filter(|(_, d)| references.iter().any(|r| r.expect.contains_key(&d.id)))
                .map(|(i, _)| i)
                .collect();
            let pick = sweep::stratified_sample(&lengths, &must, n);
            let docs: Vec<_> = pick.iter().map(|&i| full.docs[i].clone()).collect();
            let sample = Corpus::new(docs, &base_loaded.counter)?;
            let scale = total_tokens as f64 / sample.content_tokens().max(1) as f64;
            eprintln!(
                "kerf: sweeping a length-stratified sample of {} of {} documents; costs are extrapolated ×{scale:.2} to the whole corpus",
                sample.docs.len(),
                full.docs.len()
            );
            (sample, scale)
        }
        _ => (full, 1.0),
    };
    let stop = Arc::new(AtomicBool::new(false));
    {
        let stop = stop.clone();
        let _ = ctrlc::set_handler(move || stop.store(true, Ordering::SeqCst));
    }
    let cache = a.encoder.open_cache()?;
    let mut encoders = Encoders::new(&a.encoder);
    let mut rows: Vec<Row> = Vec::new();
    let (mut embedded, mut scored) = (0usize, 0usize);
    // Encoding seconds and tokens per precision: int8 runs faster than f32, so each plan's
    // time is estimated from its own precision's measured rate.
    let mut measured: Vec<(RateKey, f64, usize)> = Vec::new();
    let bar = super::embed::progress_bar(groups.len() + 1, a.encoder.quiet, "sweep");
    let mut interrupted = false;
    let probe_set = match a.probing.wanted(a.refs.is_some()) {
        Some(n) => Some(
            a.probing
                .draw(&corpus, n, base_loaded.info.default_window())?,
        ),
        None => None,
    };
    // The truncation baseline is measured after the grid, as one more chunk set: the chart
    // draws it as the reference line and the handout measures rank moves against it.
    let base_index = plans.len();
    plans.push(baseline_profile(
        base_loaded.info.default_window(),
        base.model.folder.clone(),
    ));
    let mut order: Vec<Vec<usize>> = groups.values().cloned().collect();
    order.push(vec![base_index]);
    let mut evals: Vec<(usize, PlanEval)> = Vec::new();
    for (gi, members) in order.iter().enumerate() {
        if stop.load(Ordering::SeqCst) {
            interrupted = true;
            break;
        }
        let first = &plans[members[0]];
        let l = load_plan(
            &PlanArgs {
                profile: None,
                model: first.model.folder.clone(),
            },
            |_| first.clone(),
        )?;
        let resolved = plan::resolve(first, &l.info, &l.counter, &first.name)?;
        let e = encoders.get(&l)?;
        let rv = engine::embed_refs(e.as_ref(), cache.as_ref(), &references)?;
        let pv = match &probe_set {
            Some(set) => engine::embed_refs(
                e.as_ref(),
                cache.as_ref(),
                &probes::references(&corpus, set, &a.probing.probe_prefix),
            )?,
            None => Vec::new(),
        };
        let chunks = engine::cut_corpus(&corpus, &resolved, &l.counter);
        let before = e.stats();
        let t0 = Instant::now();
        let (vectors, report) = engine::embed_chunks(
            &corpus,
            &chunks,
            &resolved,
            e.as_ref(),
            cache.as_ref(),
            &mut |_, _| {},
        )?;
        let after = e.stats();
        let (seconds, tokens) = (
            t0.elapsed().as_secs_f64(),
            after.real_tokens - before.real_tokens,
        );
        let key = rate_key(first);
        match measured.iter_mut().find(|m| m.0 == key) {
            Some(m) => (m.1, m.2) = (m.1 + seconds, m.2 + tokens),
            None => measured.push((key, seconds, tokens)),
        }
        if members[0] != base_index {
            embedded += report.embedded;
        }
        let padding = after.padded_tokens.saturating_sub(after.real_tokens)
            - before.padded_tokens.saturating_sub(before.real_tokens);
        for &pi in members {
            let mut rp = resolved.clone();
            rp.profile = plans[pi].clone();
            let ev = engine::score_plan(
                &corpus,
                &references,
                &rv,
                &rp,
                chunks.clone(),
                &vectors,
                &report,
            );
            let n_chunks: usize = ev.chunks.iter().map(Vec::len).sum();
            if pi != base_index {
                scored += n_chunks;
            }
            let probe_eval = match &probe_set {
                Some(set) => Some(probes::score(
                    &corpus,
                    set,
                    &pv,
                    &rp,
                    &ev.chunks,
                    &vectors,
                    e.as_ref(),
                    cache.as_ref(),
                )?),
                None => None,
            };
            // Without references, the plan is judged by its probes alone.
            let summary = match (&probe_eval, references.is_empty()) {
                (Some(pe), true) => pe.summary.clone(),
                _ => ev.summary.clone(),
            };
            let quality = match a.metric {
                Metric::Ndcg => summary.ndcg_at_10,
                Metric::Mrr => summary.mrr_at_10,
                Metric::Recall => summary.recall_at_10,
            };
            let dim = e.dim();
            let cost = Cost {
                chunks: (n_chunks as f64 * scale).round() as usize,
                input_tokens: (ev.input_tokens as f64 * scale).round() as usize,
                overhead: ev.input_tokens as f64 / corpus.content_tokens().max(1) as f64,
                padding_tokens: (padding as f64 * scale).round() as usize,
                embed_seconds: 0.0,
                storage_f32_bytes: (n_chunks as f64 * scale) as usize * dim * 4,
                storage_f16_bytes: (n_chunks as f64 * scale) as usize * dim * 2,
            };
            rows.push(Row {
                index: pi,
                profile: plans[pi].clone(),
                quality,
                summary,
                cost,
                probes: probe_eval,
            });
            if a.handout.is_some() {
                evals.push((pi, ev));
            }
        }
        if let Some(b) = &bar {
            b.set_position(gi as u64 + 1);
        }
    }
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    let mut baseline_row = rows
        .iter()
        .position(|r| r.index == base_index)
        .map(|i| rows.remove(i));
    anyhow::ensure!(!rows.is_empty(), "sweep interrupted before any plan finished (vectors embedded so far are kept in the cache)");
    // Time estimates from the throughput measured in this sweep, per precision (unknown when
    // a precision's vectors all came from the cache).
    let rates = measured_rates(&measured);
    for r in rows.iter_mut().chain(baseline_row.as_mut()) {
        r.cost.embed_seconds = match rates.iter().find(|(k, _)| *k == rate_key(&r.profile)) {
            Some((_, rate)) => r.cost.input_tokens as f64 / rate,
            None => f64::NAN,
        };
    }
    let rate_note: String = rates
        .iter()
        .map(|(p, rate)| {
            if rates.len() == 1 {
                format!(" · {rate:.0} tokens/s measured")
            } else {
                format!(" · {} {rate:.0} tokens/s measured", rate_name(*p))
            }
        })
        .collect();
    let points: Vec<(f64, f64)> = rows
        .iter()
        .map(|r| (r.quality, r.cost.input_tokens as f64))
        .collect();
    let names: Vec<String> = rows.iter().map(|r| r.profile.name.clone()).collect();
    let front = sweep::pareto_front(&points);
    let metric = match a.metric {
        Metric::Ndcg => "nDCG@10",
        Metric::Mrr => "MRR@10",
        Metric::Recall => "Recall@10",
    };
    let rec = sweep::recommend(&names, &points, a.tolerance, metric);
    let best_profile = rec.as_ref().map(|(i, why)| {
        let mut p = rows[*i].profile.clone();
        p.about = format!("recommended by kerf sweep: {why}");
        p
    });
    if let (Some(path), Some(p)) = (&a.save_best, &best_profile) {
        kerf::store::write_atomic(path, p.to_toml().as_bytes(), true)
            .with_context(|| format!("saving {}", path.display()))?;
        eprintln!("kerf: wrote the recommended plan to {}", path.display());
    }
    let mut axis = match a.chart_cost {
        ChartCost::Tokens => CostAxis::Tokens,
        ChartCost::Seconds => CostAxis::Seconds,
    };
    if axis == CostAxis::Seconds && rows.iter().any(|r| !r.cost.embed_seconds.is_finite()) {
        eprintln!("kerf: no embedding time was measured for every plan (their vectors came from the cache), so the chart's cost axis shows tokens");
        axis = CostAxis::Tokens;
    }
    let corpus_name = a.input.label();
    let chart_in = chart_input(
        &rows,
        baseline_row.as_ref(),
        &front,
        rec.as_ref().map(|(i, _)| *i),
        metric,
        axis,
        &corpus_name,
    );
    if let Some(path) = &a.chart {
        kerf::store::write_atomic(path, chart::render(&chart_in).as_bytes(), true)
            .with_context(|| format!("writing the chart {}", path.display()))?;
        eprintln!("kerf: wrote the chart to {}", path.display());
    }
    if let Some(path) = &a.handout {
        let eval_of = |index: usize| evals.iter().find(|(i, _)| *i == index).map(|(_, e)| e);
        let base_eval = eval_of(base_index);
        let ordered: Vec<&PlanEval> = base_eval
            .into_iter()
            .chain(rows.iter().filter_map(|r| eval_of(r.index)))
            .collect();
        let plan_row = |r: &Row, pareto: bool, recommended: bool, baseline: bool| HandoutPlan {
            name: r.profile.name.clone(),
            quality: r.quality,
            summary: r.summary.clone(),
            chunks: r.cost.chunks,
            input_tokens: r.cost.input_tokens,
            seconds: Some(r.cost.embed_seconds).filter(|x| x.is_finite()),
            pareto,
            recommended,
            baseline,
        };
        let doc = Handout {
            title: format!("Chunking plans for {corpus_name}"),
            made_by: format!(
                "kerf sweep {} over {} documents{}, {} references, grid \"{}\", quality measured as {metric}.",
                env!("CARGO_PKG_VERSION"),
                corpus.docs.len(),
                if scale != 1.0 { " (a length-stratified sample; costs extrapolated)" } else { "" },
                references.len(),
                a.grid
            ),
            metric: metric.to_string(),
            plans: baseline_row
                .iter()
                .map(|b| plan_row(b, false, false, true))
                .chain(rows.iter().enumerate().map(|(i, r)| {
                    plan_row(r, front.contains(&i), rec.as_ref().is_some_and(|(k, _)| *k == i), false)
                }))
                .collect(),
            recommendation: rec.as_ref().map(|(_, why)| why.clone()),
            chart_svg: Some(chart::render(&chart_in)),
            references: handout::ref_sections(&corpus, &references, &ordered, base_eval, HANDOUT_TOP),
            census: base_eval.map(|b| handout::census(&corpus, &b.plan)),
            profile_toml: best_profile.as_ref().map(Profile::to_toml),
            model: base_loaded.info.clone(),
        };
        doc.write(path)
            .with_context(|| format!("writing the handout {}", path.display()))?;
        eprintln!(
            "kerf: wrote the handout to {} (it quotes the documents: share it as you would them)",
            path.display()
        );
    }
    let mut out = std::io::BufWriter::new(std::io::stdout().lock());
    if a.json {
        let plans_json: Vec<serde_json::Value> = rows
            .iter()
            .enumerate()
            .map(|(i, r)| serde_json::json!({ "name": r.profile.name, "profile": r.profile, "quality": r.quality, "summary": r.summary, "cost": r.cost, "pareto": front.contains(&i), "self_retrieval": r.probes }))
            .collect();
        writeln!(
            out,
            "{}",
            serde_json::to_string_pretty(&serde_json::json!({
                "metric": metric,
                "plans": plans_json,
                "recommended": rec.as_ref().map(|(i, why)| serde_json::json!({"name": names[*i], "reason": why})),
                "chunk_sets": groups.len(),
                "chunks_embedded": embedded,
                "chunks_scored": scored,
                "tokens_per_second": rates.iter().map(|(p, r)| (rate_name(*p), *r)).collect::<std::collections::BTreeMap<_, _>>(),
                "sampled": scale != 1.0,
                "interrupted": interrupted,
                "baseline": baseline_row.as_ref().map(|b| serde_json::json!({ "name": b.profile.name, "quality": b.quality, "summary": b.summary, "cost": b.cost, "self_retrieval": b.probes })),
                "judged_by": if references.is_empty() { "self-retrieval" } else { "references" },
                "probes": probe_set.as_ref().map(probing::set_json),
            }))?
        )?;
    } else {
        let w = names.iter().map(|n| n.len()).max().unwrap_or(8).max(8);
        writeln!(
            out,
            "  {:<w$} {:>8} {:>7} {:>7} {:>8} {:>10} {:>8} {:>8} {:>10}",
            "plan", metric, "MRR@10", "R@10", "chunks", "tokens", "overhead", "time", "f32 store"
        )?;
        for (i, r) in rows.iter().enumerate() {
            writeln!(
                out,
                "{} {:<w$} {:>8.3} {:>7.3} {:>7.3} {:>8} {:>10} {:>7.2}x {:>8} {:>9.1}M",
                if front.contains(&i) { "◆" } else { " " },
                r.profile.name,
                r.quality,
                r.summary.mrr_at_10,
                r.summary.recall_at_10,
                r.cost.chunks,
                super::survey::thousands(r.cost.input_tokens),
                r.cost.overhead,
                if r.cost.embed_seconds.is_finite() {
                    format!("{:.0}s", r.cost.embed_seconds)
                } else {
                    "—".to_string() // every vector came from the cache: no rate measured
                },
                r.cost.storage_f32_bytes as f64 / 1e6
            )?;
        }
        if let Some(b) = &baseline_row {
            writeln!(
                out,
                "  {:<w$} {:>8.3} {:>7.3} {:>7.3} {:>8} {:>10}   (truncation baseline)",
                b.profile.name,
                b.quality,
                b.summary.mrr_at_10,
                b.summary.recall_at_10,
                b.cost.chunks,
                super::survey::thousands(b.cost.input_tokens),
            )?;
        }
        writeln!(out, "◆ on the quality/cost front · {} chunk sets for {} plans: {embedded} chunks embedded, {scored} chunks scored{rate_note}", groups.len(), rows.len())?;
        if scale != 1.0 {
            writeln!(
                out,
                "costs extrapolated from a sample to the whole corpus (×{scale:.2})"
            )?;
        }
        if probe_set.is_some() {
            if references.is_empty() {
                writeln!(out, "quality: {metric} of self-retrieval (no --refs)")?;
            }
            writeln!(out)?;
            let table: Vec<(String, &ProbeEval)> = rows
                .iter()
                .chain(baseline_row.as_ref())
                .filter_map(|r| Some((r.profile.name.clone(), r.probes.as_ref()?)))
                .collect();
            probing::write_table(&mut out, &table)?;
        }
        if interrupted {
            writeln!(
                out,
                "interrupted: {} of {} plans finished; their vectors stay in the cache",
                rows.len(),
                plans.len()
            )?;
        }
        if let Some((_, why)) = &rec {
            writeln!(out, "recommended: {why}")?;
        }
    }
    out.flush()?;
    Ok(())
}

/// What an encoder's throughput depends on in a sweep: the arithmetic, and whether it runs
/// long late-chunking passes (attention costs more per token in a longer input).
type RateKey = (Precision, bool);

fn rate_key(p: &kerf::profile::Profile) -> RateKey {
    (p.pool.precision, p.pool.context > 0)
}

fn rate_name((precision, late): RateKey) -> String {
    if late {
        format!("{} late", precision.name())
    } else {
        precision.name().to_string()
    }
}

/// Tokens a second per key, from `(key, seconds, tokens)` measured while embedding; only
/// measurements long enough to mean something (half a second) count.
fn measured_rates<K: Copy>(measured: &[(K, f64, usize)]) -> Vec<(K, f64)> {
    measured
        .iter()
        .filter(|(_, seconds, tokens)| *seconds > 0.5 && *tokens > 0)
        .map(|(p, seconds, tokens)| (*p, *tokens as f64 / seconds))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::measured_rates;
    use kerf::embed::Precision;

    #[test]
    fn rates_are_per_precision_and_skip_short_measurements() {
        let m = [
            (Precision::F32, 2.0, 10_000),
            (Precision::Int8, 1.0, 8_000),
            (Precision::Bf16, 0.2, 1_000), // too short to trust
        ];
        assert_eq!(
            measured_rates(&m),
            vec![(Precision::F32, 5_000.0), (Precision::Int8, 8_000.0)]
        );
        // Everything from the cache: no tokens through the encoder, no rate.
        assert_eq!(measured_rates(&[(Precision::F32, 3.0, 0)]), vec![]);
    }
}
