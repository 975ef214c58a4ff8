//! Cutting a document into chunks that fit the encoder's window.
//!
//! The splitter owns no tokenizer: it takes the text, its content-token offsets and its
//! sentence/paragraph ranges, and returns chunks that carry their byte range and token range.
//! Every rule is the same greedy packer over a different kind of *unit* (words, sentences or
//! paragraphs); a unit larger than the budget falls back to the next finer kind, down to token
//! pieces of a single very long word.
//!
//! Why units are cut at word starts: a BERT-style pre-tokenizer splits on whitespace and
//! punctuation before WordPiece runs, so a slice that begins at a word start re-encodes to exactly
//! the tokens it had inside the document, and token costs of neighbouring units add up. Only a
//! piece that begins inside a word (a continuation piece) may re-encode differently; those are
//! re-counted with the caller's `recount` function and shrunk until they fit.
//!
//! Heading breaks ([`cut_at_headings`]): a unit that starts at a chosen heading starts a new
//! chunk, and no overlap reaches back across it, so no chunk crosses a section boundary; a
//! section shorter than the minimum chunk gives up its break at the end and shares a chunk
//! with the next section.
use std::ops::Range;

use serde::Serialize;

use crate::profile::Boundary;
use crate::segment::Segments;
use crate::tokens::Tokenized;

pub use crate::plan::CutPlan;

/// One chunk of a document.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Chunk {
    /// Position in the document, from 0.
    pub index: usize,
    /// Byte range in the source text.
    pub byte_range: Range<usize>,
    /// Range of the document's content tokens this chunk holds.
    pub token_range: Range<usize>,
    /// Content tokens the chunk's text encodes to on its own (no specials, no prefix).
    pub content_tokens: usize,
    /// Content tokens shared with the previous chunk.
    pub overlap_tokens: usize,
    /// Sentences (indices into the document's sentence list) the chunk touches.
    pub sentence_range: Range<usize>,
    /// The chunk's own prefix when the plan's names `{title}` or `{section}` (set after
    /// cutting, by `prefix::of_chunks`); `None`: the plan's fixed prefix.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub prefix: Option<crate::prefix::ChunkPrefix>,
}

/// A packable run of tokens.
#[derive(Debug, Clone)]
struct Unit {
    tokens: Range<usize>,
    /// Tokens this unit encodes to on its own.
    cost: usize,
    /// A piece of a word that continues in the next unit: never pack past it, never overlap it.
    glued_to_next: bool,
}

/// Partition tokens among byte ranges (ascending, non-overlapping): range i takes the tokens
/// that end by the time range i+1 starts. Every token lands in exactly one range.
///
/// A token that straddles the start of the next range goes with the next range: a byte-level
/// token such as `ĠPackages` covers the space before a sentence's first word (see
/// `tokens::keep_leading_spaces`) and belongs to that sentence. WordPiece tokens never straddle
/// a sentence or paragraph start, so for them this is the same as "starting before".
pub fn token_ranges_of(tokens: &Tokenized, ranges: &[Range<usize>]) -> Vec<Range<usize>> {
    let mut out = Vec::with_capacity(ranges.len());
    let mut t = 0;
    for (i, _) in ranges.iter().enumerate() {
        let start = t;
        match ranges.get(i + 1) {
            Some(next) => {
                while t < tokens.len()
                    && tokens.offsets[t].start < next.start
                    && tokens.offsets[t].end <= next.start
                {
                    t += 1;
                }
            }
            None => t = tokens.len(),
        }
        out.push(start..t);
    }
    out
}

/// Byte range covered by a run of tokens.
fn bytes_of(tokens: &Tokenized, r: &Range<usize>) -> Range<usize> {
    tokens.offsets[r.start].start..tokens.offsets[r.end - 1].end
}

/// Word units of a token range; words above the budget become pieces.
fn word_units(
    text: &str,
    tokens: &Tokenized,
    range: Range<usize>,
    budget: usize,
    recount: &dyn Fn(&str) -> usize,
    out: &mut Vec<Unit>,
) {
    let mut w = range.start;
    while w < range.end {
        let mut e = w + 1;
        while e < range.end && !tokens.word_start[e] {
            e += 1;
        }
        if e - w <= budget {
            out.push(Unit {
                tokens: w..e,
                cost: e - w,
                glued_to_next: false,
            });
        } else {
            // One word longer than the budget: token pieces. The first piece is a prefix of the
            // word and re-encodes to the same tokens; later pieces start inside the word, so
            // they are re-counted and shrunk until they fit.
            let mut s = w;
            while s < e {
                let mut pe = (s + budget).min(e);
                let mut cost = pe - s;
                if s > w {
                    loop {
                        cost = recount(&text[bytes_of(tokens, &(s..pe))]);
                        if cost <= budget || pe == s + 1 {
                            break;
                        }
                        pe -= 1;
                    }
                }
                out.push(Unit {
                    tokens: s..pe,
                    cost: cost.min(budget),
                    glued_to_next: pe < e,
                });
                s = pe;
            }
        }
        w = e;
    }
}

/// Sentence units of a token range (given the sentences' token ranges), falling back to words.
fn sentence_units(
    text: &str,
    tokens: &Tokenized,
    sentence_tokens: &[Range<usize>],
    budget: usize,
    recount: &dyn Fn(&str) -> usize,
    out: &mut Vec<Unit>,
) {
    for r in sentence_tokens.iter().filter(|r| !r.is_empty()) {
        if r.len() <= budget {
            out.push(Unit {
                tokens: r.clone(),
                cost: r.len(),
                glued_to_next: false,
            });
        } else {
            word_units(text, tokens, r.clone(), budget, recount, out);
        }
    }
}

fn units_for(
    text: &str,
    tokens: &Tokenized,
    segs: &Segments,
    plan: &CutPlan,
    recount: &dyn Fn(&str) -> usize,
) -> Vec<Unit> {
    let budget = plan.budget_tokens;
    let mut units = Vec::new();
    match plan.boundary {
        Boundary::Head | Boundary::Token => {
            word_units(text, tokens, 0..tokens.len(), budget, recount, &mut units)
        }
        Boundary::Sentence => {
            let st = token_ranges_of(tokens, &segs.sentences);
            sentence_units(text, tokens, &st, budget, recount, &mut units);
        }
        Boundary::Paragraph => {
            let pranges: Vec<Range<usize>> =
                segs.paragraphs.iter().map(|p| p.bytes.clone()).collect();
            let pt = token_ranges_of(tokens, &pranges);
            let st = token_ranges_of(tokens, &segs.sentences);
            let mut s = 0;
            for (pi, r) in pt.iter().enumerate() {
                let first = s;
                while s < segs.sentence_paragraph.len() && segs.sentence_paragraph[s] == pi {
                    s += 1;
                }
                if r.is_empty() {
                    continue;
                }
                if r.len() <= budget {
                    units.push(Unit {
                        tokens: r.clone(),
                        cost: r.len(),
                        glued_to_next: false,
                    });
                } else {
                    // Sentence token ranges partition the document; clip them to this
                    // paragraph so that together they cover it exactly, no token lost or doubled.
                    let mut covered: Vec<Range<usize>> = Vec::new();
                    let mut at = r.start;
                    for x in &st[first..s] {
                        let end = x.end.min(r.end);
                        if end > at {
                            covered.push(at..end);
                            at = end;
                        }
                    }
                    if at < r.end {
                        covered.push(at..r.end);
                    }
                    sentence_units(text, tokens, &covered, budget, recount, &mut units);
                }
            }
        }
    }
    units
}

/// Which units start a new chunk: those beginning at one of the `breaks` (content-token
/// indices), less the break that ends a section shorter than `min_section` tokens (that
/// section then shares a chunk with the next one).
fn break_units(units: &[Unit], breaks: &[usize], min_section: usize) -> Vec<bool> {
    let mut flags = vec![false; units.len()];
    let mut b = breaks.iter().peekable();
    for (i, u) in units.iter().enumerate() {
        while b.peek().is_some_and(|&&t| t < u.tokens.start) {
            b.next();
        }
        if i > 0 && b.peek().is_some_and(|&&t| t == u.tokens.start) {
            flags[i] = true;
        }
    }
    if min_section > 0 {
        let mut section_start = 0;
        let mut cost = 0;
        for i in 0..units.len() {
            if flags[i] {
                if cost < min_section && section_start < i {
                    flags[i] = false;
                } else {
                    section_start = i;
                    cost = 0;
                }
            }
            cost += units[i].cost;
        }
    }
    flags
}

/// Greedy packing of units into unit-index ranges under the budget, with overlap; a unit
/// flagged in `breaks` always starts a chunk, with nothing shared across it.
fn pack(units: &[Unit], plan: &CutPlan, first_only: bool, breaks: &[bool]) -> Vec<Range<usize>> {
    let budget = plan.budget_tokens;
    let mut out = Vec::new();
    let mut start = 0;
    while start < units.len() {
        let mut end = start;
        let mut cost = 0;
        while end < units.len() && cost + units[end].cost <= budget {
            if end > start && breaks[end] {
                break;
            }
            cost += units[end].cost;
            end += 1;
            if units[end - 1].glued_to_next {
                break;
            }
        }
        debug_assert!(end > start, "every unit fits the budget");
        out.push(start..end);
        if end == units.len() || first_only {
            break;
        }
        if breaks[end] {
            start = end;
            continue;
        }
        let mut next = end;
        let mut shared = 0;
        while next > start + 1
            && !units[next - 1].glued_to_next
            && shared + units[next - 1].cost <= plan.overlap_tokens
        {
            shared += units[next - 1].cost;
            next -= 1;
        }
        start = next;
    }
    out
}

/// Merge a short last chunk back: into the previous one when both fit together, otherwise by
/// extending the last chunk backwards over whole units up to the budget.
fn merge_tail(units: &[Unit], plan: &CutPlan, chunks: &mut Vec<Range<usize>>, breaks: &[bool]) {
    if chunks.len() < 2 || plan.min_chunk_tokens == 0 {
        return;
    }
    let cost = |r: Range<usize>| units[r].iter().map(|u| u.cost).sum::<usize>();
    let n = chunks.len();
    let (prev, last) = (chunks[n - 2].clone(), chunks[n - 1].clone());
    // A last chunk that opens a section stays on its own side of the heading.
    if breaks[prev.start + 1..last.end].iter().any(|&b| b) {
        return;
    }
    let new_tokens = cost(last.start.max(prev.end)..last.end);
    if new_tokens >= plan.min_chunk_tokens {
        return;
    }
    let glued_inside = units[prev.start..last.end - 1]
        .iter()
        .any(|u| u.glued_to_next);
    if !glued_inside && cost(prev.start..last.end) <= plan.budget_tokens {
        chunks.pop();
        chunks[n - 2] = prev.start..last.end;
        return;
    }
    let mut s = last.start;
    let mut total = cost(last.clone());
    while s > prev.start + 1
        && !units[s - 1].glued_to_next
        && total + units[s - 1].cost <= plan.budget_tokens
    {
        total += units[s - 1].cost;
        s -= 1;
    }
    chunks[n - 1] = s..last.end;
}

/// Cut one document. `recount` gives the content tokens of a text encoded on its own; it is
/// called only for pieces that begin inside a word.
pub fn cut(
    text: &str,
    tokens: &Tokenized,
    segs: &Segments,
    plan: &CutPlan,
    recount: &dyn Fn(&str) -> usize,
) -> Vec<Chunk> {
    cut_at_headings(text, tokens, segs, plan, recount, &[])
}

/// Cut one document so that a chunk starts at each byte offset of `heading_starts` (ascending;
/// the headings chosen by the plan's `heading_breaks`), as [`cut`] does otherwise.
pub fn cut_at_headings(
    text: &str,
    tokens: &Tokenized,
    segs: &Segments,
    plan: &CutPlan,
    recount: &dyn Fn(&str) -> usize,
    heading_starts: &[usize],
) -> Vec<Chunk> {
    if tokens.is_empty() || plan.budget_tokens == 0 {
        return Vec::new();
    }
    let units = units_for(text, tokens, segs, plan, recount);
    let break_tokens: Vec<usize> = heading_starts
        .iter()
        .map(|&b| tokens.offsets.partition_point(|o| o.start < b))
        .collect();
    let breaks = break_units(&units, &break_tokens, plan.min_chunk_tokens);
    let mut ranges = pack(&units, plan, plan.boundary == Boundary::Head, &breaks);
    merge_tail(&units, plan, &mut ranges, &breaks);
    let mut chunks: Vec<Chunk> = Vec::with_capacity(ranges.len());
    for (index, r) in ranges.into_iter().enumerate() {
        let token_range = units[r.start].tokens.start..units[r.end - 1].tokens.end;
        let byte_range = bytes_of(tokens, &token_range);
        let content_tokens = units[r.clone()].iter().map(|u| u.cost).sum();
        let overlap_tokens = chunks.last().map_or(0, |p: &Chunk| {
            p.token_range.end.saturating_sub(token_range.start)
        });
        let first = segs
            .sentences
            .partition_point(|s| s.end <= byte_range.start);
        let last = segs.sentences.partition_point(|s| s.start < byte_range.end);
        chunks.push(Chunk {
            index,
            byte_range,
            token_range,
            content_tokens,
            overlap_tokens,
            sentence_range: first..last.max(first),
            prefix: None,
        });
    }
    chunks
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::segment;

    /// A whitespace tokenizer stand-in: each word is one token, punctuation is its own word.
    fn toy_tokens(text: &str) -> Tokenized {
        let mut t = Tokenized::default();
        let mut start = None;
        for (i, c) in text
            .char_indices()
            .chain(std::iter::once((text.len(), ' ')))
        {
            let punct = c.is_ascii_punctuation();
            if c.is_whitespace() || punct {
                if let Some(s) = start.take() {
                    t.offsets.push(s..i);
                    t.word_start.push(true);
                }
                if punct {
                    t.offsets.push(i..i + 1);
                    t.word_start.push(true);
                }
            } else if start.is_none() {
                start = Some(i);
            }
        }
        t
    }

    fn toy_count(text: &str) -> usize {
        toy_tokens(text).len()
    }

    fn plan(boundary: Boundary, budget: usize, overlap: usize) -> CutPlan {
        CutPlan {
            heading_breaks: 0,
            boundary,
            budget_tokens: budget,
            overlap_tokens: overlap,
            min_chunk_tokens: 0,
        }
    }

    #[test]
    fn token_windows_with_overlap() {
        let text = "a b c d e f g h i j";
        let t = toy_tokens(text);
        let s = segment::segment(text);
        let chunks = cut(text, &t, &s, &plan(Boundary::Token, 4, 1), &toy_count);
        let spans: Vec<&str> = chunks.iter().map(|c| &text[c.byte_range.clone()]).collect();
        assert_eq!(spans, ["a b c d", "d e f g", "g h i j"]);
        assert_eq!(
            chunks.iter().map(|c| c.overlap_tokens).collect::<Vec<_>>(),
            [0, 1, 1]
        );
    }

    #[test]
    fn sentences_stay_whole() {
        let text = "One two three. Four five. Six seven eight nine.";
        let t = toy_tokens(text);
        let s = segment::segment(text);
        let chunks = cut(text, &t, &s, &plan(Boundary::Sentence, 7, 0), &toy_count);
        let spans: Vec<&str> = chunks.iter().map(|c| &text[c.byte_range.clone()]).collect();
        assert_eq!(
            spans,
            ["One two three. Four five.", "Six seven eight nine."]
        );
        assert_eq!(chunks[1].sentence_range, 2..3);
    }

    #[test]
    fn head_keeps_only_the_first_window() {
        let text = "a b c d e f g";
        let t = toy_tokens(text);
        let chunks = cut(
            text,
            &t,
            &segment::segment(text),
            &plan(Boundary::Head, 3, 0),
            &toy_count,
        );
        assert_eq!(chunks.len(), 1);
        assert_eq!(&text[chunks[0].byte_range.clone()], "a b c");
    }

    #[test]
    fn short_tail_merges_back() {
        let text = "a b c d e f g h i";
        let t = toy_tokens(text);
        let mut p = plan(Boundary::Token, 4, 0);
        p.min_chunk_tokens = 2;
        let chunks = cut(text, &t, &segment::segment(text), &p, &toy_count);
        // Windows a-d, e-h leave "i" alone; it cannot join e-h (5 > 4), so the last chunk is
        // extended backwards to the full budget instead.
        let spans: Vec<&str> = chunks.iter().map(|c| &text[c.byte_range.clone()]).collect();
        assert_eq!(spans, ["a b c d", "e f g h", "f g h i"]);
        assert_eq!(chunks[2].overlap_tokens, 3);
    }

    #[test]
    fn heading_breaks_start_chunks_and_stop_overlap() {
        let text = "Boiler\n\nTubes were renewed. Test passed.\n\nBrakes\n\nBlocks were worn. New ones fitted. Adjusted.";
        let t = toy_tokens(text);
        let s = segment::segment(text);
        let brakes = text.find("Brakes").unwrap();
        let p = plan(Boundary::Sentence, 10, 4);
        // Without breaks the heading "Brakes" rides along with the boiler's sentences.
        let plain = cut(text, &t, &s, &p, &toy_count);
        assert!(plain[0].byte_range.contains(&brakes));
        let chunks = cut_at_headings(text, &t, &s, &p, &toy_count, &[0, brakes]);
        let spans: Vec<&str> = chunks.iter().map(|c| &text[c.byte_range.clone()]).collect();
        assert_eq!(
            spans,
            [
                "Boiler\n\nTubes were renewed. Test passed.",
                "Brakes\n\nBlocks were worn. New ones fitted.",
                "New ones fitted. Adjusted."
            ]
        );
        // Nothing shared across the heading; overlap as usual inside the section.
        assert_eq!(chunks[1].overlap_tokens, 0);
        assert!(chunks[2].overlap_tokens > 0);
        // A section shorter than the minimum chunk shares a chunk with the next one.
        let mut q = plan(Boundary::Sentence, 30, 0);
        q.min_chunk_tokens = 9;
        let merged = cut_at_headings(text, &t, &s, &q, &toy_count, &[0, brakes]);
        assert_eq!(merged.len(), 1, "the 8-token boiler section is under 9");
        q.min_chunk_tokens = 8;
        let kept = cut_at_headings(text, &t, &s, &q, &toy_count, &[0, brakes]);
        assert_eq!(kept.len(), 2);
        assert_eq!(kept[1].byte_range.start, brakes);
    }

    #[test]
    fn empty_text_has_no_chunks() {
        let t = toy_tokens("   ");
        assert!(cut(
            "   ",
            &t,
            &segment::segment("   "),
            &plan(Boundary::Sentence, 8, 0),
            &toy_count
        )
        .is_empty());
    }
}
