//! Chunk records: what `kerf cut` writes, one JSON object per line.
use serde::{Deserialize, Serialize};

use crate::corpus::Document;
use crate::plan::ResolvedPlan;
use crate::segment::LineIndex;
use crate::split::Chunk;

/// One chunk as written to JSONL.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ChunkRecord {
    /// Document id.
    pub doc: String,
    /// Chunk index within the document, from 0.
    pub chunk: usize,
    /// Byte range `[start, end)` in the source document.
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
}

impl ChunkRecord {
    /// The records of a document's chunks (its lines indexed once).
    pub fn of_document(doc: &Document, chunks: &[Chunk], plan: &ResolvedPlan) -> Vec<Self> {
        let lines = LineIndex::new(&doc.text);
        chunks
            .iter()
            .map(|c| Self::new(doc, c, plan, &lines))
            .collect()
    }

    /// Build the record of a chunk; `lines` indexes the document's text.
    pub fn new(doc: &Document, chunk: &Chunk, plan: &ResolvedPlan, lines: &LineIndex) -> Self {
        let b = &chunk.byte_range;
        Self {
            doc: doc.id.clone(),
            chunk: chunk.index,
            bytes: [b.start, b.end],
            lines: [
                lines.line_of(b.start),
                lines.line_of(b.end.saturating_sub(1).max(b.start)),
            ],
            tokens: plan.input_tokens(chunk.content_tokens),
            overlap: chunk.overlap_tokens,
            sentences: [chunk.sentence_range.start, chunk.sentence_range.end],
            text: doc.text[b.clone()].to_string(),
        }
    }
}
