//! `kerf cut`: chunks as JSONL.
use std::io::Write;
use std::path::PathBuf;

use anyhow::{Context, Result};
use clap::Args;

use kerf::profile::{Boundary, Profile};

use super::{
    load_plan, load_plan_tokenizer, open_output, report_notices, InputArgs, PlanArgs,
    NO_VECTORS_NOTE,
};

#[derive(Args)]
pub struct CutArgs {
    #[command(flatten)]
    pub input: InputArgs,
    #[command(flatten)]
    pub plan: PlanArgs,
    /// Write to this file (atomically) instead of standard output.
    #[arg(long, short = 'o')]
    pub out: Option<PathBuf>,
    /// Replace an existing output file.
    #[arg(long)]
    pub force: bool,
    /// Count with this tokenizer.json instead of a model folder's (needs --window): cut for a
    /// model kerf cannot run, or before choosing one. No vectors can be made with it.
    #[arg(
        long,
        value_name = "FILE",
        requires = "window",
        conflicts_with = "model"
    )]
    pub tokenizer: Option<PathBuf>,
    /// Tokens per encoder input, specials included, with --tokenizer (replaces the profile's
    /// window; without a profile, sentence boundaries and no overlap).
    #[arg(long, requires = "tokenizer")]
    pub window: Option<usize>,
}

pub fn run(a: CutArgs) -> Result<()> {
    let loaded = match (&a.tokenizer, a.window) {
        (Some(t), Some(w)) => {
            let loaded = load_plan_tokenizer(a.plan.profile.as_deref(), t, w, |_| {
                let mut p = Profile {
                    name: "cut".into(),
                    ..Default::default()
                };
                p.cut.boundary = Boundary::Sentence;
                p
            })?;
            eprintln!("kerf: note: {NO_VECTORS_NOTE}");
            loaded
        }
        _ => {
            if a.plan.profile.is_none() {
                anyhow::bail!(
                    "kerf cut needs --profile FILE (see profiles/ for ready-made plans), or --tokenizer FILE --window N"
                );
            }
            load_plan(&a.plan, |_| unreachable!("a profile was given"))?
        }
    };
    let mut stream = a.input.open()?;
    let mut out = open_output(a.out.as_deref(), a.force)?;
    let (counter, plan) = (&loaded.counter, &loaded.plan);
    let mut chunks_written = 0usize;
    kerf::process_in_order(
        stream.by_ref().map(|r| r.map_err(anyhow::Error::from)),
        64,
        |doc| {
            let (records, _) = kerf::job::cut_document(plan, counter, doc)?;
            let mut buf = String::new();
            for r in &records {
                buf.push_str(&serde_json::to_string(r)?);
                buf.push('\n');
            }
            Ok((buf, records.len()))
        },
        |_, (buf, n)| {
            out.write_all(buf.as_bytes()).context("writing chunks")?;
            chunks_written += n;
            Ok(())
        },
    )?;
    out.finish()?;
    report_notices(&stream.notices);
    if let Some(p) = &a.out {
        eprintln!("kerf: wrote {chunks_written} chunks to {}", p.display());
    }
    Ok(())
}
