//! `kerf survey`: the census of a corpus against the window.
use std::io::Write;
use std::path::PathBuf;

use anyhow::Result;
use clap::{Args, ValueEnum};

use kerf::profile::{Boundary, Profile};
use kerf::survey::{self, CorpusStats, DocStats};

use super::{load_plan, load_plan_tokenizer, report_notices, InputArgs, PlanArgs, NO_VECTORS_NOTE};

#[derive(Clone, Copy, ValueEnum)]
pub enum Order {
    /// As read.
    Input,
    /// Most content tokens first.
    Tokens,
    /// Most tokens a truncating embed never sees first.
    Unseen,
    /// Largest unseen share first.
    Share,
    /// Longest sentence first.
    Longest,
    /// By document id.
    Id,
}

#[derive(Args)]
pub struct SurveyArgs {
    #[command(flatten)]
    pub input: InputArgs,
    #[command(flatten)]
    pub plan: PlanArgs,
    /// Window in tokens when no profile is given (default: the model's configured length).
    #[arg(long)]
    pub window: Option<usize>,
    /// Count with this tokenizer.json instead of a model folder's (needs --window): plan for a
    /// model kerf cannot run, or before choosing one. No vectors can be made with it.
    #[arg(long, value_name = "FILE", requires = "window", conflicts_with_all = ["model", "profile"])]
    pub tokenizer: Option<PathBuf>,
    /// Row order of the document table.
    #[arg(long, value_enum, default_value = "input")]
    pub order: Order,
    /// Show only the first N documents of the table.
    #[arg(long)]
    pub top: Option<usize>,
    /// Show only documents that do not fit one window.
    #[arg(long)]
    pub overflowing: bool,
    /// Machine-readable output (JSON).
    #[arg(long)]
    pub json: bool,
}

fn sort_docs(docs: &mut [DocStats], order: Order) {
    match order {
        Order::Input => {}
        Order::Tokens => docs.sort_by_key(|d| std::cmp::Reverse(d.content_tokens)),
        Order::Unseen => docs.sort_by_key(|d| std::cmp::Reverse(d.unseen_tokens)),
        Order::Share => docs.sort_by(|a, b| b.unseen_share.total_cmp(&a.unseen_share)),
        Order::Longest => docs.sort_by_key(|d| std::cmp::Reverse(d.longest_sentence_tokens)),
        Order::Id => docs.sort_by(|a, b| a.id.cmp(&b.id)),
    }
}

/// Digits grouped by thousands.
pub fn thousands(n: usize) -> String {
    let s = n.to_string();
    let mut out = String::new();
    for (i, c) in s.chars().enumerate() {
        if i > 0 && (s.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(c);
    }
    out
}

fn truncate_id(id: &str, width: usize) -> String {
    if id.chars().count() <= width {
        id.to_string()
    } else {
        let tail: String = id
            .chars()
            .rev()
            .take(width - 1)
            .collect::<Vec<_>>()
            .into_iter()
            .rev()
            .collect();
        format!("…{tail}")
    }
}

fn write_human(
    out: &mut impl Write,
    stats: &CorpusStats,
    docs: &[DocStats],
    all: &[DocStats],
    budget: usize,
    header: &str,
) -> Result<()> {
    writeln!(out, "{header}")?;
    writeln!(out)?;
    let w = docs
        .iter()
        .map(|d| d.id.chars().count())
        .max()
        .unwrap_or(8)
        .clamp(8, 40);
    writeln!(
        out,
        "{:<w$}  {:>8}  {:>7}  {:>8}  {:>7}  {:>8}  {:>8}",
        "document", "tokens", "windows", "unseen", "unseen%", "longest", "oversize"
    )?;
    for d in docs {
        writeln!(
            out,
            "{:<w$}  {:>8}  {:>7}  {:>8}  {:>6.1}%  {:>8}  {:>8}",
            truncate_id(&d.id, w),
            thousands(d.content_tokens),
            d.windows,
            thousands(d.unseen_tokens),
            100.0 * d.unseen_share,
            d.longest_sentence_tokens,
            d.oversize.len()
        )?;
    }
    if docs.len() < all.len() {
        writeln!(out, "({} of {} documents shown)", docs.len(), all.len())?;
    }
    writeln!(out)?;
    writeln!(
        out,
        "corpus: {} documents ({} empty), {} words, {} sentences, {} paragraphs",
        stats.documents,
        stats.empty_documents,
        thousands(stats.words),
        thousands(stats.sentences),
        thousands(stats.paragraphs)
    )?;
    writeln!(
        out,
        "tokens: {} content tokens in {} windows; {} documents overflow one window",
        thousands(stats.content_tokens),
        thousands(stats.windows),
        stats.overflowing_documents
    )?;
    writeln!(
        out,
        "a truncating embed never sees {} tokens ({:.1}% of the corpus)",
        thousands(stats.unseen_tokens),
        100.0 * stats.unseen_share
    )?;
    writeln!(
        out,
        "document length in tokens: p50 {}  p90 {}  p99 {}  max {}",
        thousands(stats.p50),
        thousands(stats.p90),
        thousands(stats.p99),
        thousands(stats.max)
    )?;
    for f in &stats.formats {
        let mut line = format!(
            "{}: {} document{}",
            f.format.name(),
            f.documents,
            if f.documents == 1 { "" } else { "s" }
        );
        if f.format == kerf::extract::Format::Pdf {
            line.push_str(&format!(
                ", {} pages ({} without text)",
                f.pages, f.empty_pages
            ));
        }
        if f.format.is_extracted() {
            line.push_str(&format!(
                ", {} characters extracted, {} left out as boilerplate",
                thousands(f.chars),
                thousands(f.dropped_chars)
            ));
        }
        line.push_str(&format!(
            ", {} sections, longest section {} tokens",
            thousands(f.sections),
            thousands(f.longest_section_tokens)
        ));
        writeln!(out, "{line}")?;
    }
    writeln!(out)?;
    let top = stats
        .histogram
        .iter()
        .map(|b| b.documents)
        .max()
        .unwrap_or(0)
        .max(1);
    let lw = stats
        .histogram
        .last()
        .map_or(1, |b| thousands(b.high).len());
    for b in &stats.histogram {
        let bar =
            "█".repeat((b.documents * 40).div_ceil(top).min(40) * usize::from(b.documents > 0));
        writeln!(
            out,
            "{:>lw$} – {:<lw$} tokens │{bar} {}",
            thousands(b.low),
            thousands(b.high),
            b.documents
        )?;
    }
    if stats.oversize_sentences > 0 {
        writeln!(out)?;
        writeln!(
            out,
            "sentences longer than the {budget}-token budget ({}):",
            stats.oversize_sentences
        )?;
        for d in all {
            for o in &d.oversize {
                writeln!(
                    out,
                    "  {}:{}  {} tokens  {}",
                    d.id, o.line, o.tokens, o.preview
                )?;
            }
        }
    }
    Ok(())
}

pub fn run(a: SurveyArgs) -> Result<()> {
    let window = a.window;
    if a.plan.profile.is_some() && window.is_some() {
        anyhow::bail!("give either --profile or --window, not both");
    }
    let fallback = |info: &kerf::model::ModelInfo| {
        let mut p = Profile {
            name: "survey".into(),
            ..Default::default()
        };
        p.cut.window = window.unwrap_or_else(|| info.default_window());
        p.cut.boundary = Boundary::Sentence;
        // The model's passage prompt goes before every input, so it is counted in the window.
        if let Some((_, prompt)) = info.passage_prompt() {
            p.cut.prefix = prompt.to_string();
        }
        p
    };
    let loaded = match (&a.tokenizer, window) {
        (Some(t), Some(w)) => load_plan_tokenizer(None, t, w, fallback)?,
        _ => load_plan(&a.plan, fallback)?,
    };
    let tokenizer_only = a.tokenizer.is_some();
    let mut stream = a.input.open()?;
    let mut docs: Vec<DocStats> = Vec::new();
    let (counter, plan) = (&loaded.counter, &loaded.plan);
    kerf::process_in_order(
        stream.by_ref().map(|r| r.map_err(anyhow::Error::from)),
        64,
        |doc| {
            Ok(survey::doc_stats(
                doc,
                &survey::analyze(&doc.text, counter)?,
                plan,
            ))
        },
        |_, stats| {
            docs.push(stats);
            Ok(())
        },
    )?;
    report_notices(&stream.notices);
    let stats = survey::summarize(&docs, plan);
    let mut out = std::io::BufWriter::new(std::io::stdout().lock());
    if a.json {
        let v = serde_json::json!({
            "model": loaded.info,
            "window": plan.window,
            "budget": plan.budget(),
            "specials": plan.specials,
            "prefix_tokens": plan.prefix_tokens,
            "prefix": plan.profile.cut.prefix,
            "vectors_possible": loaded.info.unsupported().is_empty(),
            "corpus": stats,
            "documents": docs,
            "notices": stream.notices,
        });
        writeln!(out, "{}", serde_json::to_string_pretty(&v)?)?;
    } else {
        let mut shown: Vec<DocStats> = docs
            .iter()
            .filter(|d| !a.overflowing || d.unseen_tokens > 0)
            .cloned()
            .collect();
        sort_docs(&mut shown, a.order);
        if let Some(n) = a.top {
            shown.truncate(n);
        }
        let name = loaded
            .info
            .dir
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default();
        let mut header = if tokenizer_only {
            format!(
                "survey of {} documents · tokenizer {} · window {} tokens ({} for text after {} tokens of specials, prefix and start reserve)\n{NO_VECTORS_NOTE}",
                stats.documents,
                loaded.info.dir.display(),
                plan.window,
                plan.budget(),
                plan.window - plan.budget(),
            )
        } else {
            format!(
                "survey of {} documents · model {name} · window {} tokens ({} for text after {} special{}) · position limit {}",
                stats.documents,
                plan.window,
                plan.budget(),
                plan.window - plan.budget(),
                if plan.prefix_tokens > 0 { " and prefix tokens" } else { " tokens" },
                loaded.info.usable_positions()
            )
        };
        if plan.prefix_tokens > 0 && a.plan.profile.is_none() {
            header.push_str(&format!(
                "\nprefix {:?} (the model's passage prompt) takes {} tokens of every window",
                plan.profile.cut.prefix, plan.prefix_tokens
            ));
        }
        write_human(&mut out, &stats, &shown, &docs, plan.budget(), &header)?;
    }
    out.flush()?;
    Ok(())
}
