//! `kerf cut`: chunks as JSONL.
use std::io::Write;
use std::path::PathBuf;

use anyhow::{Context, Result};
use clap::Args;

use super::{load_plan, open_output, report_notices, InputArgs, PlanArgs};

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
}

pub fn run(a: CutArgs) -> Result<()> {
    if a.plan.profile.is_none() {
        anyhow::bail!("kerf cut needs --profile FILE (see profiles/ for ready-made plans)");
    }
    let loaded = load_plan(&a.plan, |_| unreachable!("a profile was given"))?;
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
