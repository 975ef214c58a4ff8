//! `kerf text`: the text kerf reads from documents. For HTML and PDF this is the extracted text
//! that chunk records' byte ranges refer to, so `text[start..end]` can always be checked.
use std::io::Write;
use std::path::PathBuf;

use anyhow::{Context, Result};
use clap::Args;

use super::{open_output, report_notices, InputArgs};

#[derive(Args)]
pub struct TextArgs {
    #[command(flatten)]
    pub input: InputArgs,
    /// One JSON object per document: id, format, title, text, headings (level, title, byte
    /// range), pages (byte ranges) and what extraction left out. Without it, exactly one
    /// document's text is printed as it is.
    #[arg(long)]
    pub jsonl: bool,
    /// Write to this file (atomically) instead of standard output.
    #[arg(long, short = 'o')]
    pub out: Option<PathBuf>,
    /// Replace an existing output file.
    #[arg(long)]
    pub force: bool,
}

pub fn run(a: TextArgs) -> Result<()> {
    let mut stream = a.input.open()?;
    let mut out = open_output(a.out.as_deref(), a.force)?;
    let mut count = 0usize;
    for doc in stream.by_ref() {
        let doc = doc?;
        count += 1;
        if a.jsonl {
            let layout = doc.layout.as_deref();
            let line = serde_json::json!({
                "doc": doc.id,
                "format": doc.format(),
                "title": layout.and_then(|l| l.title.clone()),
                "text": doc.text,
                "headings": layout.map(|l| l.headings.iter().map(|h| serde_json::json!({
                    "level": h.level, "title": h.title, "bytes": [h.bytes.start, h.bytes.end]
                })).collect::<Vec<_>>()),
                "pages": layout.map(|l| l.pages.iter().map(|p| [p.start, p.end]).collect::<Vec<_>>()),
                "report": layout.map(|l| &l.report),
            });
            writeln!(out, "{line}").context("writing text")?;
        } else {
            anyhow::ensure!(
                count == 1,
                "kerf text prints one document's text as it is, and {} holds more than one; give one file, or add --jsonl for one JSON object per document",
                a.input.label()
            );
            out.write_all(doc.text.as_bytes()).context("writing text")?;
        }
    }
    anyhow::ensure!(count > 0, "no readable documents in {}", a.input.label());
    out.finish()?;
    report_notices(&stream.notices);
    Ok(())
}
