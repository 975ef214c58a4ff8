//! The census: how each document and the whole corpus sit against the model's window.
//!
//! Each document is tokenized and segmented once ([`analyze`]); the same analysis feeds both the
//! census figures here and the splitter, so surveying and cutting never tokenize twice.
use serde::Serialize;

use crate::corpus::Document;
use crate::extract::{sections, Format};
use crate::plan::ResolvedPlan;
use crate::segment::{self, Segments};
use crate::tokens::{TokenCounter, Tokenized, TokensError};

/// A document tokenized and segmented once.
pub struct Analysis {
    /// Content tokens with byte offsets.
    pub tokens: Tokenized,
    /// Paragraphs and sentences.
    pub segments: Segments,
}

/// Tokenize and segment a text.
pub fn analyze(text: &str, counter: &TokenCounter) -> Result<Analysis, TokensError> {
    Ok(Analysis {
        tokens: counter.tokenize(text)?,
        segments: segment::segment(text),
    })
}

/// A sentence that alone exceeds the chunk budget.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Oversize {
    /// 1-based line where it starts.
    pub line: usize,
    /// Its content tokens.
    pub tokens: usize,
    /// Its first words.
    pub preview: String,
}

/// Census of one document.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DocStats {
    /// Document id.
    pub id: String,
    /// Unicode scalar values.
    pub chars: usize,
    /// Words (Unicode word segmentation).
    pub words: usize,
    /// Sentences.
    pub sentences: usize,
    /// Paragraphs.
    pub paragraphs: usize,
    /// Content tokens (no specials).
    pub content_tokens: usize,
    /// Encoder inputs needed to see every token under the plan's window and overlap.
    pub windows: usize,
    /// Tokens a plain truncating embed (first window only) would never see.
    pub unseen_tokens: usize,
    /// `unseen_tokens / content_tokens` (0 for an empty document).
    pub unseen_share: f64,
    /// Content tokens of the longest sentence.
    pub longest_sentence_tokens: usize,
    /// Line where the longest sentence starts.
    pub longest_sentence_line: usize,
    /// Sentences that alone exceed the chunk budget.
    pub oversize: Vec<Oversize>,
    /// The format it was read from.
    pub format: Format,
    /// Pages (PDF).
    pub pages: usize,
    /// Pages without text (PDF).
    pub empty_pages: usize,
    /// Characters of boilerplate extraction left out (HTML chrome, PDF running lines).
    pub dropped_chars: usize,
    /// Headings found (the sections of the document).
    pub sections: usize,
    /// Content tokens of the longest section (from one heading to the next; the text before
    /// the first heading counts as a section).
    pub longest_section_tokens: usize,
}

/// Content tokens of each section of a document: from each heading's start to the next's,
/// the text before the first heading included when there is any.
pub fn section_tokens(token_starts: &[usize], heading_starts: &[usize]) -> Vec<usize> {
    let mut bounds: Vec<usize> = vec![0];
    bounds.extend(heading_starts.iter().copied().filter(|&s| s > 0));
    bounds.push(usize::MAX);
    bounds
        .windows(2)
        .map(|w| {
            token_starts.partition_point(|&t| t < w[1])
                - token_starts.partition_point(|&t| t < w[0])
        })
        .filter(|&n| n > 0)
        .collect()
}

/// Windows needed to cover `n` tokens with windows of `budget` tokens sharing `overlap`.
pub fn windows_needed(n: usize, budget: usize, overlap: usize) -> usize {
    if n == 0 {
        0
    } else if n <= budget {
        1
    } else {
        let stride = budget - overlap.min(budget - 1);
        1 + (n - budget).div_ceil(stride)
    }
}

fn preview(text: &str, words: usize) -> String {
    let mut out: Vec<&str> = text.split_whitespace().take(words + 1).collect();
    let more = out.len() > words;
    out.truncate(words);
    let mut s = out.join(" ");
    if more {
        s.push_str(" …");
    }
    s
}

/// Census of one analysed document under a plan.
pub fn doc_stats(doc: &Document, a: &Analysis, plan: &ResolvedPlan) -> DocStats {
    use unicode_segmentation::UnicodeSegmentation;
    let text = &doc.text;
    let n = a.tokens.len();
    let budget = plan.budget();
    let sentence_tokens = crate::split::token_ranges_of(&a.tokens, &a.segments.sentences);
    let mut longest = (0usize, 0usize);
    let mut oversize = Vec::new();
    let lines = segment::LineIndex::new(text);
    for (s, t) in a.segments.sentences.iter().zip(&sentence_tokens) {
        if t.len() > longest.0 {
            longest = (t.len(), s.start);
        }
        if t.len() > budget {
            oversize.push(Oversize {
                line: lines.line_of(s.start),
                tokens: t.len(),
                preview: preview(&text[s.clone()], 12),
            });
        }
    }
    let unseen = n.saturating_sub(budget);
    let headings = sections::of_document(doc, &a.segments.paragraphs);
    let token_starts: Vec<usize> = a.tokens.offsets.iter().map(|r| r.start).collect();
    let heading_starts: Vec<usize> = headings.iter().map(|h| h.bytes.start).collect();
    let report = doc.layout.as_ref().map(|l| &l.report);
    DocStats {
        id: doc.id.clone(),
        chars: text.chars().count(),
        words: text.unicode_words().count(),
        sentences: a.segments.sentences.len(),
        paragraphs: a.segments.paragraphs.len(),
        content_tokens: n,
        windows: windows_needed(n, budget, plan.cut.overlap_tokens),
        unseen_tokens: unseen,
        unseen_share: if n == 0 {
            0.0
        } else {
            unseen as f64 / n as f64
        },
        longest_sentence_tokens: longest.0,
        longest_sentence_line: if longest.0 == 0 {
            0
        } else {
            segment::line_of(text, longest.1)
        },
        oversize,
        format: doc.format(),
        pages: report.map_or(0, |r| r.pages),
        empty_pages: report.map_or(0, |r| r.empty_pages),
        dropped_chars: report.map_or(0, |r| r.dropped_chars),
        sections: headings.len(),
        longest_section_tokens: section_tokens(&token_starts, &heading_starts)
            .into_iter()
            .max()
            .unwrap_or(0),
    }
}

/// One histogram bar: documents whose content tokens fall in `[low, high)`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Bin {
    /// Inclusive lower edge in tokens.
    pub low: usize,
    /// Exclusive upper edge in tokens.
    pub high: usize,
    /// Documents in the bin.
    pub documents: usize,
}

/// Census of the corpus.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CorpusStats {
    /// Documents read (empty ones included).
    pub documents: usize,
    /// Empty or whitespace-only documents.
    pub empty_documents: usize,
    /// Totals over documents.
    pub chars: usize,
    /// Total words.
    pub words: usize,
    /// Total sentences.
    pub sentences: usize,
    /// Total paragraphs.
    pub paragraphs: usize,
    /// Total content tokens.
    pub content_tokens: usize,
    /// Total windows needed.
    pub windows: usize,
    /// Tokens truncation would never see.
    pub unseen_tokens: usize,
    /// Share of all tokens truncation would never see.
    pub unseen_share: f64,
    /// Documents longer than one window.
    pub overflowing_documents: usize,
    /// Sentences longer than the chunk budget.
    pub oversize_sentences: usize,
    /// Longest sentence anywhere, in tokens.
    pub longest_sentence_tokens: usize,
    /// Document length percentiles in content tokens (nearest rank).
    pub p50: usize,
    /// 90th percentile.
    pub p90: usize,
    /// 99th percentile.
    pub p99: usize,
    /// Longest document.
    pub max: usize,
    /// Length distribution, bins whose width is the chunk budget.
    pub histogram: Vec<Bin>,
    /// Figures per input format, in a fixed order (formats with no document left out).
    pub formats: Vec<FormatStats>,
}

/// Census of the documents of one format.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FormatStats {
    /// The format.
    pub format: Format,
    /// Documents.
    pub documents: usize,
    /// Pages (PDF).
    pub pages: usize,
    /// Characters of text read or extracted.
    pub chars: usize,
    /// Characters of boilerplate left out.
    pub dropped_chars: usize,
    /// Pages without text.
    pub empty_pages: usize,
    /// Headings found.
    pub sections: usize,
    /// Content tokens of the longest section.
    pub longest_section_tokens: usize,
}

/// Per-format figures of document censuses.
pub fn by_format(docs: &[DocStats]) -> Vec<FormatStats> {
    let mut out: Vec<FormatStats> = Vec::new();
    let mut formats: Vec<Format> = docs.iter().map(|d| d.format).collect();
    formats.sort();
    formats.dedup();
    for f in formats {
        let of = docs.iter().filter(|d| d.format == f);
        out.push(FormatStats {
            format: f,
            documents: of.clone().count(),
            pages: of.clone().map(|d| d.pages).sum(),
            chars: of.clone().map(|d| d.chars).sum(),
            dropped_chars: of.clone().map(|d| d.dropped_chars).sum(),
            empty_pages: of.clone().map(|d| d.empty_pages).sum(),
            sections: of.clone().map(|d| d.sections).sum(),
            longest_section_tokens: of.map(|d| d.longest_section_tokens).max().unwrap_or(0),
        });
    }
    out
}

/// Nearest-rank percentile of sorted values (the definition in common use for reports).
pub fn percentile(sorted: &[usize], p: f64) -> usize {
    if sorted.is_empty() {
        return 0;
    }
    let rank = ((p / 100.0) * sorted.len() as f64).ceil() as usize;
    sorted[rank.clamp(1, sorted.len()) - 1]
}

/// Histogram of document lengths in bins of `width` tokens, at most `max_bins` (the last bin
/// takes the rest).
pub fn histogram(lengths: &[usize], width: usize, max_bins: usize) -> Vec<Bin> {
    let width = width.max(1);
    let top = lengths.iter().copied().max().unwrap_or(0);
    let mut bins_needed = top / width + 1;
    let mut w = width;
    while bins_needed > max_bins {
        w *= 2;
        bins_needed = top / w + 1;
    }
    let mut bins: Vec<Bin> = (0..bins_needed)
        .map(|i| Bin {
            low: i * w,
            high: (i + 1) * w,
            documents: 0,
        })
        .collect();
    for &l in lengths {
        bins[(l / w).min(bins_needed - 1)].documents += 1;
    }
    bins
}

/// Sum up document censuses.
pub fn summarize(docs: &[DocStats], plan: &ResolvedPlan) -> CorpusStats {
    let mut lengths: Vec<usize> = docs.iter().map(|d| d.content_tokens).collect();
    lengths.sort_unstable();
    let sum = |f: fn(&DocStats) -> usize| docs.iter().map(f).sum::<usize>();
    let content_tokens = sum(|d| d.content_tokens);
    let unseen_tokens = sum(|d| d.unseen_tokens);
    CorpusStats {
        documents: docs.len(),
        empty_documents: docs.iter().filter(|d| d.content_tokens == 0).count(),
        chars: sum(|d| d.chars),
        words: sum(|d| d.words),
        sentences: sum(|d| d.sentences),
        paragraphs: sum(|d| d.paragraphs),
        content_tokens,
        windows: sum(|d| d.windows),
        unseen_tokens,
        unseen_share: if content_tokens == 0 {
            0.0
        } else {
            unseen_tokens as f64 / content_tokens as f64
        },
        overflowing_documents: docs.iter().filter(|d| d.unseen_tokens > 0).count(),
        oversize_sentences: sum(|d| d.oversize.len()),
        longest_sentence_tokens: docs
            .iter()
            .map(|d| d.longest_sentence_tokens)
            .max()
            .unwrap_or(0),
        p50: percentile(&lengths, 50.0),
        p90: percentile(&lengths, 90.0),
        p99: percentile(&lengths, 99.0),
        max: lengths.last().copied().unwrap_or(0),
        histogram: histogram(&lengths, plan.budget(), 24),
        formats: by_format(docs),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn windows_with_stride() {
        assert_eq!(windows_needed(0, 10, 2), 0);
        assert_eq!(windows_needed(10, 10, 2), 1);
        // 11 tokens, windows of 10 with stride 8: [0,10) [8,18) -> 2
        assert_eq!(windows_needed(11, 10, 2), 2);
        assert_eq!(windows_needed(26, 10, 2), 3);
        assert_eq!(windows_needed(27, 10, 2), 4);
    }

    #[test]
    fn nearest_rank_percentiles() {
        // Worked example of the nearest-rank method (common practice): for 15, 20, 35, 40, 50 the
        // 30th percentile is 20, the 40th 20, the 50th 35, the 100th 50.
        let v = [15, 20, 35, 40, 50];
        assert_eq!(percentile(&v, 30.0), 20);
        assert_eq!(percentile(&v, 40.0), 20);
        assert_eq!(percentile(&v, 50.0), 35);
        assert_eq!(percentile(&v, 100.0), 50);
        assert_eq!(percentile(&[], 50.0), 0);
    }

    #[test]
    fn sections_split_tokens_at_headings() {
        // Tokens start at 0, 5, 10, ..., 45; headings at 0 and 20: sections of 4 and 6 tokens.
        let t: Vec<usize> = (0..10).map(|i| i * 5).collect();
        assert_eq!(section_tokens(&t, &[0, 20]), [4, 6]);
        // Text before the first heading is a section of its own.
        assert_eq!(section_tokens(&t, &[20]), [4, 6]);
        assert_eq!(section_tokens(&t, &[]), [10]);
        assert_eq!(section_tokens(&[], &[3]), Vec::<usize>::new());
    }

    #[test]
    fn histogram_widens_to_fit() {
        let h = histogram(&[0, 5, 10, 99], 10, 24);
        assert_eq!(h.len(), 10);
        assert_eq!(h.iter().map(|b| b.documents).sum::<usize>(), 4);
        let h = histogram(&[0, 1000], 10, 24);
        assert!(h.len() <= 24);
        assert_eq!(h.iter().map(|b| b.documents).sum::<usize>(), 2);
    }
}
