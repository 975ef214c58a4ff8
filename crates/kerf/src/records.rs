//! Chunk records: what `kerf cut` writes, one JSON object per line.
use serde::{Deserialize, Serialize};

use crate::corpus::Document;
use crate::extract::sections::{self, SectionIndex};
use crate::extract::{Format, Heading};
use crate::plan::ResolvedPlan;
use crate::segment::LineIndex;
use crate::split::Chunk;

/// One chunk as written to JSONL.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct ChunkRecord {
    /// Document id.
    pub doc: String,
    /// Chunk index within the document, from 0.
    pub chunk: usize,
    /// Byte range `[start, end)` in the source document (for HTML and PDF, in the text kerf
    /// extracted from it: see `extracted`).
    pub bytes: [usize; 2],
    /// 1-based first and last line.
    pub lines: [usize; 2],
    /// Tokens of the encoder input: special tokens and prefix included.
    pub tokens: usize,
    /// Content tokens shared with the previous chunk.
    pub overlap: usize,
    /// Sentence index range `[start, end)` within the document.
    pub sentences: [usize; 2],
    /// The chunk's text, exactly `source[bytes]`.
    pub text: String,
    /// The headings the chunk starts under, outermost first (empty: none).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub section: Vec<String>,
    /// The prefix put before the chunk, when the plan's names `{title}` or `{section}` (a
    /// fixed prefix is the profile's, the same for every chunk).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub prefix: Option<String>,
    /// First and last page (PDF).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub pages: Option<[usize; 2]>,
    /// Set when the document's text was extracted from another format (`html`, `pdf`): then
    /// `bytes` and `lines` refer to the extracted text, which `kerf text FILE` prints.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub extracted: Option<Format>,
}

/// What a document's records need to know of its structure: where its sections start and, for
/// a PDF, its pages.
pub struct DocIndex<'d> {
    lines: LineIndex,
    sections: SectionIndex,
    pages: &'d [std::ops::Range<usize>],
    extracted: Option<Format>,
}

impl<'d> DocIndex<'d> {
    /// Index a document with its headings (see `sections::of_document`).
    pub fn new(doc: &'d Document, headings: &[Heading]) -> Self {
        let (pages, extracted) = match &doc.layout {
            Some(l) => (
                l.pages.as_slice(),
                l.format.is_extracted().then_some(l.format),
            ),
            None => (&[][..], None),
        };
        Self {
            lines: LineIndex::new(&doc.text),
            sections: SectionIndex::new(headings),
            pages,
            extracted,
        }
    }
}

impl ChunkRecord {
    /// The records of a document's chunks (its lines and sections indexed once); `headings`
    /// are the document's (see `sections::of_document`).
    pub fn of_document(
        doc: &Document,
        headings: &[Heading],
        chunks: &[Chunk],
        plan: &ResolvedPlan,
    ) -> Vec<Self> {
        let index = DocIndex::new(doc, headings);
        chunks
            .iter()
            .map(|c| Self::new(doc, c, plan, &index))
            .collect()
    }

    /// Build the record of a chunk; `index` indexes the document.
    pub fn new(doc: &Document, chunk: &Chunk, plan: &ResolvedPlan, index: &DocIndex<'_>) -> Self {
        let lines = &index.lines;
        let b = &chunk.byte_range;
        Self {
            doc: doc.id.clone(),
            chunk: chunk.index,
            bytes: [b.start, b.end],
            lines: [
                lines.line_of(b.start),
                lines.line_of(b.end.saturating_sub(1).max(b.start)),
            ],
            tokens: plan.chunk_input_tokens(chunk),
            overlap: chunk.overlap_tokens,
            sentences: [chunk.sentence_range.start, chunk.sentence_range.end],
            text: doc.text[b.clone()].to_string(),
            section: index.sections.path_at(b.start),
            prefix: chunk.prefix.as_ref().map(|p| p.text.clone()),
            pages: sections::pages_of(index.pages, b),
            extracted: index.extracted,
        }
    }
}
