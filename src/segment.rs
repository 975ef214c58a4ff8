//! Sentence and paragraph boundaries of plain text and Markdown, as byte ranges into the source.
//! (Placeholder: the full rule set replaces this file.)
use std::ops::Range;

/// What kind of block a paragraph is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum BlockKind {
    Prose,
    Heading,
    ListItem,
    Code,
    Table,
}

/// One paragraph: its byte range and kind.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Paragraph {
    pub bytes: Range<usize>,
    pub kind: BlockKind,
}

/// Paragraphs and sentences of one text.
pub struct Segments {
    pub paragraphs: Vec<Paragraph>,
    pub sentences: Vec<Range<usize>>,
    pub sentence_paragraph: Vec<usize>,
}

fn trim_range(text: &str, r: Range<usize>) -> Option<Range<usize>> {
    let s = &text[r.clone()];
    let start = r.start + (s.len() - s.trim_start().len());
    let end = r.start + s.trim_end().len();
    (start < end).then_some(start..end)
}

/// Paragraphs in order.
pub fn paragraphs(text: &str) -> Vec<Paragraph> {
    segment(text).paragraphs
}

/// Sentences in order.
pub fn sentences(text: &str) -> Vec<Range<usize>> {
    segment(text).sentences
}

/// Both at once.
pub fn segment(text: &str) -> Segments {
    let mut paragraphs = Vec::new();
    let mut start = 0;
    for (i, _) in text.match_indices("\n\n") {
        if let Some(r) = trim_range(text, start..i) {
            paragraphs.push(Paragraph {
                bytes: r,
                kind: BlockKind::Prose,
            });
        }
        start = i;
    }
    if let Some(r) = trim_range(text, start..text.len()) {
        paragraphs.push(Paragraph {
            bytes: r,
            kind: BlockKind::Prose,
        });
    }
    let mut sentences = Vec::new();
    let mut sentence_paragraph = Vec::new();
    use unicode_segmentation::UnicodeSegmentation;
    for (pi, p) in paragraphs.iter().enumerate() {
        for (off, s) in text[p.bytes.clone()].split_sentence_bound_indices() {
            let a = p.bytes.start + off;
            if let Some(r) = trim_range(text, a..a + s.len()) {
                sentences.push(r);
                sentence_paragraph.push(pi);
            }
        }
    }
    Segments {
        paragraphs,
        sentences,
        sentence_paragraph,
    }
}

/// 1-based line number of a byte offset.
pub fn line_of(text: &str, byte: usize) -> usize {
    1 + text.as_bytes()[..byte.min(text.len())]
        .iter()
        .filter(|&&b| b == b'\n')
        .count()
}
