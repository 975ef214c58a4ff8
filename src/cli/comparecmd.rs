//! `kerf compare`: how each plan shifts similarity to the reference texts, against the
//! truncation baseline.
use std::collections::HashMap;
use std::io::Write;
use std::path::PathBuf;
use std::sync::Arc;

use anyhow::{Context, Result};
use clap::Args;

use kerf::compare::engine::{self, Corpus, PlanEval};
use kerf::compare::refs::{self, Reference};
use kerf::embed::Embedder;
use kerf::profile::{Boundary, Profile};
use kerf::segment::line_of;

use super::embed::EncoderArgs;
use super::probing::{self, ProbeArgs};
use super::{load_plan, report_notices, InputArgs, Loaded, PlanArgs};
use kerf::compare::probes::{self, ProbeEval};

#[derive(Args)]
pub struct CompareArgs {
    #[command(flatten)]
    pub input: InputArgs,
    /// Reference texts: kerf TOML, or a TREC queries file (with --qrels). Without it, plans
    /// are judged by self-retrieval (see --probes).
    #[arg(long)]
    pub refs: Option<PathBuf>,
    /// TREC qrels beside a queries file given as --refs.
    #[arg(long)]
    pub qrels: Option<PathBuf>,
    /// Profiles to compare (repeat).
    #[arg(long = "profile", short = 'p', required = true)]
    pub profiles: Vec<PathBuf>,
    /// Model folder (overrides the profiles').
    #[arg(long)]
    pub model: Option<PathBuf>,
    /// Leave out the truncation baseline.
    #[arg(long)]
    pub no_baseline: bool,
    /// Documents listed per reference and plan.
    #[arg(long, default_value_t = 3)]
    pub top: usize,
    /// Machine-readable output (JSON).
    #[arg(long)]
    pub json: bool,
    /// One CSV row per reference, plan and listed document.
    #[arg(long, conflicts_with = "json", requires = "refs")]
    pub csv: bool,
    /// Write a self-contained HTML handout: plans, chart, rankings per reference, census,
    /// the recommended profile. It quotes document text: share it as you would the documents.
    #[arg(long, value_name = "FILE.html", requires = "refs")]
    pub handout: Option<PathBuf>,
    #[command(flatten)]
    pub probing: ProbeArgs,
    #[command(flatten)]
    pub encoder: EncoderArgs,
}

/// The truncation baseline: first window only, as an encoder does by default.
pub fn baseline_profile(window: usize, folder: Option<PathBuf>) -> Profile {
    let mut p = Profile {
        name: format!("baseline-head-{window}"),
        about: "first window only: what a truncating encoder sees".into(),
        ..Default::default()
    };
    p.model.folder = folder;
    p.cut.window = window;
    p.cut.boundary = Boundary::Head;
    p.cut.min_chunk = 0;
    p.pool.chunks = kerf::pool::ChunkPooling::First;
    p
}

/// Load every plan against one model; refuse plans on different models.
pub fn load_plans(
    profiles: &[PathBuf],
    model: Option<PathBuf>,
    baseline: bool,
) -> Result<Vec<Loaded>> {
    let mut loaded: Vec<Loaded> = Vec::new();
    for p in profiles {
        let l = load_plan(
            &PlanArgs {
                profile: Some(p.clone()),
                model: model.clone(),
            },
            |_| unreachable!(),
        )?;
        if let Some(first) = loaded.first() {
            let (a, b) = (
                std::fs::canonicalize(&first.info.dir)?,
                std::fs::canonicalize(&l.info.dir)?,
            );
            if a != b {
                anyhow::bail!(
                    "{} uses model {} but {} uses {}: cosines of different models do not compare",
                    profiles[0].display(),
                    a.display(),
                    p.display(),
                    b.display()
                );
            }
        }
        loaded.push(l);
    }
    if baseline {
        let dir = loaded[0].info.dir.clone();
        let window = loaded[0].info.default_window();
        let b = load_plan(
            &PlanArgs {
                profile: None,
                model: Some(dir.clone()),
            },
            |_| baseline_profile(window, Some(dir)),
        )?;
        loaded.insert(0, b);
    }
    Ok(loaded)
}

/// Read a corpus into memory.
pub fn read_corpus(input: &InputArgs, loaded: &Loaded) -> Result<Corpus> {
    let mut stream = input.open()?;
    let docs: Vec<kerf::corpus::Document> = stream.by_ref().collect::<Result<_, _>>()?;
    report_notices(&stream.notices);
    anyhow::ensure!(
        !docs.is_empty(),
        "no readable documents in {}",
        input
            .paths
            .iter()
            .map(|p| p.display().to_string())
            .collect::<Vec<_>>()
            .join(", ")
    );
    Ok(Corpus::new(docs, &loaded.counter)?)
}

/// Encoders keyed by token pooling and precision, shared across plans.
pub struct Encoders<'a> {
    by_key: HashMap<String, Arc<dyn Embedder>>,
    enc: &'a EncoderArgs,
}

impl<'a> Encoders<'a> {
    pub fn new(enc: &'a EncoderArgs) -> Self {
        Self {
            by_key: HashMap::new(),
            enc,
        }
    }
    pub fn get(&mut self, l: &Loaded) -> Result<Arc<dyn Embedder>> {
        let key = format!(
            "{:?}/{:?}",
            l.plan.profile.pool.tokens, l.plan.profile.pool.precision
        );
        if let Some(e) = self.by_key.get(&key) {
            return Ok(e.clone());
        }
        let e = super::load_embedder(l, self.enc)?;
        self.by_key.insert(key, e.clone());
        Ok(e)
    }
}

struct Evaluated {
    eval: PlanEval,
    tau_vs_first: f64,
    probes: Option<ProbeEval>,
}

fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

pub fn run(a: CompareArgs) -> Result<()> {
    let plans = load_plans(&a.profiles, a.model.clone(), !a.no_baseline)?;
    let references: Vec<Reference> = match &a.refs {
        Some(p) => refs::load(p, a.qrels.as_deref())?,
        None => Vec::new(),
    };
    let corpus = read_corpus(&a.input, &plans[0])?;
    if let Some(p) = &a.refs {
        refs::check_known(&references, &corpus.ids(), &p.display().to_string())?;
    }
    let probe_set = match a.probing.wanted(a.refs.is_some()) {
        Some(n) => Some(a.probing.draw(&corpus, n, plans[0].info.default_window())?),
        None => None,
    };
    let cache = a.encoder.open_cache()?;
    let mut encoders = Encoders::new(&a.encoder);
    let mut evals: Vec<Evaluated> = Vec::new();
    for l in &plans {
        let e = encoders.get(l)?;
        let rv = engine::embed_refs(e.as_ref(), cache.as_ref(), &references)?;
        let bar = super::embed::progress_bar(0, a.encoder.quiet, &l.plan.profile.name);
        let chunks = engine::cut_corpus(&corpus, &l.plan, &l.counter);
        let (vectors, embedded) = engine::embed_chunks(
            &corpus,
            &chunks,
            &l.plan,
            e.as_ref(),
            cache.as_ref(),
            &mut |d, t| {
                if let Some(b) = &bar {
                    b.set_length(t as u64);
                    b.set_position(d as u64);
                }
            },
        )?;
        if let Some(b) = bar {
            b.finish_and_clear();
        }
        let eval = engine::score_plan(
            &corpus,
            &references,
            &rv,
            &l.plan,
            chunks,
            &vectors,
            &embedded,
        );
        let probe_eval = match &probe_set {
            Some(set) => {
                let pv = engine::embed_refs(
                    e.as_ref(),
                    cache.as_ref(),
                    &probes::references(&corpus, set, &a.probing.probe_prefix),
                )?;
                Some(probes::score(
                    &corpus,
                    set,
                    &pv,
                    &l.plan,
                    &eval.chunks,
                    &vectors,
                    e.as_ref(),
                    cache.as_ref(),
                )?)
            }
            None => None,
        };
        let tau = match evals.first() {
            Some(base) => {
                let taus: Vec<f64> = eval
                    .scores
                    .iter()
                    .zip(&base.eval.scores)
                    .map(|(x, y)| engine::tau_between(x, y))
                    .collect();
                taus.iter().sum::<f64>() / taus.len().max(1) as f64
            }
            None => 1.0,
        };
        evals.push(Evaluated {
            eval,
            tau_vs_first: tau,
            probes: probe_eval,
        });
    }
    if let Some(path) = &a.handout {
        write_handout(path, &a, &plans, &evals, &corpus, &references)?;
    }
    let base = &evals[0].eval;
    let mut out = std::io::BufWriter::new(std::io::stdout().lock());
    let line_range = |eval: &PlanEval, doc: usize, chunk: usize| -> [usize; 2] {
        let c = &eval.chunks[doc][chunk];
        let t = &corpus.docs[doc].text;
        [
            line_of(t, c.byte_range.start),
            line_of(t, c.byte_range.end.saturating_sub(1)),
        ]
    };
    if a.json {
        let plans_json: Vec<serde_json::Value> = evals
            .iter()
            .map(|ev| {
                let e = &ev.eval;
                let per_ref: Vec<serde_json::Value> = references
                    .iter()
                    .zip(&e.scores)
                    .zip(&base.scores)
                    .map(|((r, s), b)| {
                        let top: Vec<serde_json::Value> = s
                            .iter()
                            .take(a.top)
                            .enumerate()
                            .map(|(i, d)| {
                                let base_score = b.iter().find(|x| x.doc == d.doc).map(|x| x.score);
                                serde_json::json!({
                                    "doc": corpus.docs[d.doc].id,
                                    "rank": i + 1,
                                    "score": d.score,
                                    "baseline_rank": engine::rank_of(b, d.doc),
                                    "score_change": base_score.map(|bs| d.score - bs),
                                    "best_chunk": d.best_chunk,
                                    "best_chunk_lines": line_range(e, d.doc, d.best_chunk),
                                    "expected": r.expect.get(&corpus.docs[d.doc].id).is_some_and(|&g| g > 0),
                                })
                            })
                            .collect();
                        serde_json::json!({ "reference": r.id, "top": top })
                    })
                    .collect();
                serde_json::json!({
                    "name": e.plan.profile.name,
                    "profile": e.plan.profile,
                    "summary": e.summary,
                    "mean_expected_score": e.mean_expected,
                    "mean_expected_shift": e.mean_expected.zip(base.mean_expected).map(|(x, y)| x - y),
                    "kendall_tau_vs_baseline": ev.tau_vs_first,
                    "chunks": e.chunks.iter().map(Vec::len).sum::<usize>(),
                    "input_tokens": e.input_tokens,
                    "references": per_ref,
                    "self_retrieval": ev.probes,
                })
            })
            .collect();
        writeln!(
            out,
            "{}",
            serde_json::to_string_pretty(&serde_json::json!({
                "baseline": !a.no_baseline,
                "probes": probe_set.as_ref().map(probing::set_json),
                "plans": plans_json,
            }))?
        )?;
    } else if a.csv {
        writeln!(out, "plan,reference,rank,doc,score,baseline_rank,score_change,best_chunk,line_start,line_end,expected")?;
        for ev in &evals {
            let e = &ev.eval;
            for ((r, s), b) in references.iter().zip(&e.scores).zip(&base.scores) {
                for (i, d) in s.iter().take(a.top).enumerate() {
                    let bs = b.iter().find(|x| x.doc == d.doc).map(|x| x.score);
                    let lr = line_range(e, d.doc, d.best_chunk);
                    writeln!(
                        out,
                        "{},{},{},{},{:.6},{},{},{},{},{},{}",
                        csv_field(&e.plan.profile.name),
                        csv_field(&r.id),
                        i + 1,
                        csv_field(&corpus.docs[d.doc].id),
                        d.score,
                        engine::rank_of(b, d.doc).map_or(String::new(), |x| x.to_string()),
                        bs.map_or(String::new(), |bs| format!("{:.6}", d.score - bs)),
                        d.best_chunk,
                        lr[0],
                        lr[1],
                        r.expect.get(&corpus.docs[d.doc].id).is_some_and(|&g| g > 0)
                    )?;
                }
            }
        }
    } else {
        let w = evals
            .iter()
            .map(|e| e.eval.plan.profile.name.len())
            .max()
            .unwrap_or(8)
            .max(8);
        for (ri, r) in references.iter().enumerate() {
            let text: String = r.text.chars().take(90).collect();
            writeln!(
                out,
                "{}  {}{}",
                r.id,
                text,
                if r.text.chars().count() > 90 {
                    "…"
                } else {
                    ""
                }
            )?;
            for ev in &evals {
                let e = &ev.eval;
                let b = &base.scores[ri];
                for (i, d) in e.scores[ri].iter().take(a.top).enumerate() {
                    let bs = b
                        .iter()
                        .find(|x| x.doc == d.doc)
                        .map(|x| x.score)
                        .unwrap_or(0.0);
                    let br = engine::rank_of(b, d.doc).unwrap_or(0);
                    let lr = line_range(e, d.doc, d.best_chunk);
                    let mark = if r.expect.get(&corpus.docs[d.doc].id).is_some_and(|&g| g > 0) {
                        "✓"
                    } else {
                        " "
                    };
                    writeln!(
                        out,
                        "  {:<w$}  {}. {mark} {:<36} {:.3} ({:+.3}, was #{br})  chunk {} lines {}-{}",
                        if i == 0 { e.plan.profile.name.as_str() } else { "" },
                        i + 1,
                        corpus.docs[d.doc].id,
                        d.score,
                        d.score - bs,
                        d.best_chunk,
                        lr[0],
                        lr[1]
                    )?;
                }
            }
            writeln!(out)?;
        }
        if !references.is_empty() {
            writeln!(
                out,
                "{:<w$}  {:>7} {:>7} {:>6} {:>6} {:>6} {:>9} {:>7} {:>6} {:>9}",
                "plan",
                "MRR@10",
                "nDCG@10",
                "R@1",
                "R@5",
                "R@10",
                "expected",
                "shift",
                "tau",
                "tokens"
            )?;
            for ev in &evals {
                let e = &ev.eval;
                let s = &e.summary;
                writeln!(
                    out,
                    "{:<w$}  {:>7.3} {:>7.3} {:>6.3} {:>6.3} {:>6.3} {:>9} {:>7} {:>6.3} {:>9}",
                    e.plan.profile.name,
                    s.mrr_at_10,
                    s.ndcg_at_10,
                    s.recall_at_1,
                    s.recall_at_5,
                    s.recall_at_10,
                    e.mean_expected.map_or("—".into(), |x| format!("{x:.3}")),
                    e.mean_expected
                        .zip(base.mean_expected)
                        .map_or("—".into(), |(x, y)| format!("{:+.3}", x - y)),
                    ev.tau_vs_first,
                    super::survey::thousands(e.input_tokens)
                )?;
            }
            writeln!(
                out,
                "({} references with expectations; shift and tau against {})",
                evals[0].eval.summary.queries, base.plan.profile.name
            )?;
        }
        if probe_set.is_some() {
            if !references.is_empty() {
                writeln!(out)?;
            }
            let rows: Vec<(String, &ProbeEval)> = evals
                .iter()
                .filter_map(|ev| Some((ev.eval.plan.profile.name.clone(), ev.probes.as_ref()?)))
                .collect();
            probing::write_table(&mut out, &rows)?;
        }
    }
    out.flush().context("writing the comparison")?;
    Ok(())
}

/// The handout of a comparison: plans measured by nDCG@10 against encoder-input tokens, the
/// front and a recommendation among the given profiles (within 0.01 of the best counts as
/// equally good, as `kerf sweep`'s default tolerance).
fn write_handout(
    path: &std::path::Path,
    a: &CompareArgs,
    plans: &[Loaded],
    evals: &[Evaluated],
    corpus: &Corpus,
    references: &[Reference],
) -> Result<()> {
    use kerf::compare::chart::{self, ChartInput, ChartPlan, CostAxis};
    use kerf::compare::handout::{self, Handout, HandoutPlan};
    use kerf::compare::sweep;
    const METRIC: &str = "nDCG@10";
    let has_base = !a.no_baseline;
    let skip = usize::from(has_base);
    let rest = &evals[skip..];
    let points: Vec<(f64, f64)> = rest
        .iter()
        .map(|e| (e.eval.summary.ndcg_at_10, e.eval.input_tokens as f64))
        .collect();
    let names: Vec<String> = rest
        .iter()
        .map(|e| e.eval.plan.profile.name.clone())
        .collect();
    let front = sweep::pareto_front(&points);
    let rec = sweep::recommend(&names, &points, 0.01, METRIC);
    let chart_plan = |e: &PlanEval, on_front: bool| ChartPlan {
        name: e.plan.profile.name.clone(),
        cost: e.input_tokens as f64,
        quality: e.summary.ndcg_at_10,
        on_front,
    };
    let corpus_name = a.input.label();
    let chart_in = ChartInput {
        title: format!("kerf compare on {corpus_name}: {METRIC} against cost"),
        metric: METRIC.into(),
        cost_axis: CostAxis::Tokens,
        plans: rest
            .iter()
            .enumerate()
            .map(|(i, e)| chart_plan(&e.eval, front.contains(&i)))
            .collect(),
        recommended: rec.as_ref().map(|(i, _)| *i),
        baseline: has_base.then(|| chart_plan(&evals[0].eval, false)),
    };
    let base_eval = has_base.then(|| &evals[0].eval);
    let all: Vec<&PlanEval> = evals.iter().map(|e| &e.eval).collect();
    let best_profile = rec.as_ref().map(|(i, why)| {
        let mut p = rest[*i].eval.plan.profile.clone();
        p.about = format!("recommended by kerf compare: {why}");
        p
    });
    let doc = Handout {
        title: format!("Chunking plans for {corpus_name}"),
        made_by: format!(
            "kerf compare {} over {} documents, {} references, {} plans{}.",
            env!("CARGO_PKG_VERSION"),
            corpus.docs.len(),
            references.len(),
            rest.len(),
            if has_base {
                " and the truncation baseline"
            } else {
                ""
            }
        ),
        metric: METRIC.into(),
        plans: evals
            .iter()
            .enumerate()
            .map(|(k, e)| {
                let i = k.checked_sub(skip);
                let s = &e.eval.summary;
                HandoutPlan {
                    name: e.eval.plan.profile.name.clone(),
                    quality: s.ndcg_at_10,
                    summary: s.clone(),
                    chunks: e.eval.chunks.iter().map(Vec::len).sum(),
                    input_tokens: e.eval.input_tokens,
                    seconds: None,
                    pareto: i.is_some_and(|i| front.contains(&i)),
                    recommended: i.is_some() && rec.as_ref().map(|(r, _)| *r) == i,
                    baseline: i.is_none(),
                }
            })
            .collect(),
        recommendation: rec.as_ref().map(|(_, why)| why.clone()),
        chart_svg: Some(chart::render(&chart_in)),
        references: handout::ref_sections(corpus, references, &all, base_eval, a.top),
        census: Some(handout::census(corpus, &plans[0].plan)),
        profile_toml: best_profile.as_ref().map(Profile::to_toml),
        model: plans[0].info.clone(),
    };
    doc.write(path)
        .with_context(|| format!("writing the handout {}", path.display()))?;
    eprintln!(
        "kerf: wrote the handout to {} (it quotes the documents: share it as you would them)",
        path.display()
    );
    Ok(())
}
