//! The Board pane's text layout: a document wrapped to the pane's width, each stretch marked
//! with its chunk, overlap, oversize sentence and whether the plan sees it. Pure: computed once
//! per plan, document or size change, so drawing a frame touches only the visible lines.
use std::ops::Range;

use kerf::split::Chunk;

/// The Board pane's state: the selected document's layout and where the view is.
#[derive(Debug, Clone, Default)]
pub struct BoardView {
    /// Board layout of the selected document.
    pub layout: BoardLayout,
    /// First visible Board line.
    pub scroll: usize,
    /// Chunk the Board cursor is on.
    pub chunk: usize,
}

impl BoardView {
    /// Scroll by `n` lines, keeping a page of `page_rows` inside the text; the cursor follows
    /// to the chunk that starts at or above the top line.
    pub fn scroll_by(&mut self, n: isize, page_rows: usize) {
        let max = self.layout.lines.len().saturating_sub(page_rows.max(1));
        self.scroll = (self.scroll as isize)
            .saturating_add(n)
            .clamp(0, max as isize) as usize;
        let top = self.scroll;
        self.chunk = self
            .layout
            .chunk_line
            .partition_point(|&l| l <= top)
            .saturating_sub(1);
    }

    /// Scroll so `chunk` starts near the top (two lines of context above it).
    pub fn scroll_to_chunk(&mut self, chunk: usize, page_rows: usize) {
        if let Some(&line) = self.layout.chunk_line.get(chunk) {
            let max = self.layout.lines.len().saturating_sub(page_rows.max(1));
            self.scroll = line.saturating_sub(2).min(max);
        }
    }
}

/// How a stretch of the Board's text is drawn.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Seg {
    /// Bytes of the document.
    pub bytes: Range<usize>,
    /// The chunk it belongs to (the later one inside an overlap).
    pub chunk: Option<usize>,
    /// Inside two chunks.
    pub overlap: bool,
    /// Past the last chunk: text this plan never embeds.
    pub unseen: bool,
    /// Inside a sentence that alone exceeds the budget.
    pub oversize: bool,
}

/// One screen line of the Board.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct VisualLine {
    /// Bytes of the document on this line (no newline).
    pub bytes: Range<usize>,
    /// Stretches with their drawing.
    pub segs: Vec<Seg>,
    /// Chunks that start on this line.
    pub chunk_starts: Range<usize>,
}

/// The Board's text wrapped to its width, computed once per plan, document or size change so
/// drawing a frame only touches the visible lines.
#[derive(Debug, Clone, Default)]
pub struct BoardLayout {
    /// The document.
    pub doc: usize,
    /// Text columns.
    pub width: usize,
    /// Screen lines.
    pub lines: Vec<VisualLine>,
    /// Line on which each chunk starts.
    pub chunk_line: Vec<usize>,
}

/// Wrap a document to `width` columns and mark, for every stretch of text, its chunk, overlap,
/// oversize sentence and whether the plan sees it at all.
pub fn build_layout(
    text: &str,
    chunks: &[Chunk],
    oversize: &[Range<usize>],
    width: usize,
) -> BoardLayout {
    let width = width.max(1);
    let mut lines: Vec<Range<usize>> = Vec::new();
    let mut start = 0;
    for logical in text.split('\n') {
        let end = start + logical.len();
        wrap_line(text, start..end, width, &mut lines);
        start = end + 1;
    }
    // Points where the drawing of the text may change.
    let mut cuts: Vec<usize> = Vec::with_capacity(chunks.len() * 2 + oversize.len() * 2);
    for c in chunks {
        cuts.push(c.byte_range.start);
        cuts.push(c.byte_range.end);
    }
    for r in oversize {
        cuts.push(r.start);
        cuts.push(r.end);
    }
    cuts.sort_unstable();
    cuts.dedup();
    let seen_end = chunks.last().map_or(0, |c| c.byte_range.end);
    let mut k = 0; // first chunk ending after the position
    let mut o = 0; // first oversize sentence ending after the position
    let mut ci = 0; // cut pointer
    let mut next_start = 0; // next chunk whose start is not yet placed on a line
    let mut chunk_line = vec![0; chunks.len()];
    let mut out = Vec::with_capacity(lines.len());
    for (li, r) in lines.into_iter().enumerate() {
        let mut segs = Vec::new();
        let mut pos = r.start;
        while ci < cuts.len() && cuts[ci] <= pos {
            ci += 1;
        }
        while pos < r.end {
            let end = cuts
                .get(ci)
                .copied()
                .filter(|&c| c < r.end)
                .unwrap_or(r.end);
            while k < chunks.len() && chunks[k].byte_range.end <= pos {
                k += 1;
            }
            while o < oversize.len() && oversize[o].end <= pos {
                o += 1;
            }
            let inside = |c: &Chunk| c.byte_range.start <= pos && pos < c.byte_range.end;
            let a = chunks.get(k).filter(|&c| inside(c));
            let b = chunks.get(k + 1).filter(|&c| inside(c));
            segs.push(Seg {
                bytes: pos..end,
                chunk: b.or(a).map(|c| c.index),
                overlap: a.is_some() && b.is_some(),
                unseen: pos >= seen_end,
                oversize: oversize
                    .get(o)
                    .is_some_and(|s| s.start <= pos && pos < s.end),
            });
            pos = end;
            if ci < cuts.len() && cuts[ci] <= pos {
                ci += 1;
            }
        }
        let first = next_start;
        while next_start < chunks.len()
            && chunks[next_start].byte_range.start < r.end.max(r.start + 1)
        {
            chunk_line[next_start] = li;
            next_start += 1;
        }
        out.push(VisualLine {
            bytes: r,
            segs,
            chunk_starts: first..next_start,
        });
    }
    BoardLayout {
        doc: 0,
        width,
        lines: out,
        chunk_line,
    }
}

/// Greedy word wrap of one logical line (counting characters as columns).
fn wrap_line(text: &str, r: Range<usize>, width: usize, out: &mut Vec<Range<usize>>) {
    let s = &text[r.clone()];
    if s.is_empty() {
        out.push(r.start..r.start);
        return;
    }
    let mut line_start = 0;
    let mut cols = 0;
    let mut last_space: Option<usize> = None; // byte after a space in the current line
    for (i, ch) in s.char_indices() {
        if cols == width {
            let brk = last_space.filter(|&b| b > line_start).unwrap_or(i);
            out.push(r.start + line_start..r.start + brk);
            cols = s[brk..i].chars().count();
            line_start = brk;
            last_space = None;
        }
        cols += 1;
        if ch == ' ' || ch == '\t' {
            last_space = Some(i + ch.len_utf8());
        }
    }
    out.push(r.start + line_start..r.end);
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn layout_marks_chunks_overlap_and_unseen() {
        let text = "alpha beta gamma delta\nepsilon zeta";
        let mk = |i, r: Range<usize>| Chunk {
            index: i,
            byte_range: r,
            token_range: 0..1,
            content_tokens: 1,
            overlap_tokens: 0,
            sentence_range: 0..1,
            prefix: None,
        };
        let chunks = [mk(0, 0..16), mk(1, 11..22)];
        let l = build_layout(text, &chunks, &[], 12);
        let lines: Vec<&str> = l.lines.iter().map(|v| &text[v.bytes.clone()]).collect();
        assert_eq!(lines, ["alpha beta ", "gamma delta", "epsilon zeta"]);
        assert_eq!(l.chunk_line, [0, 1]);
        let g = &l.lines[1].segs;
        assert_eq!(&text[g[0].bytes.clone()], "gamma");
        assert!(g[0].overlap && g[0].chunk == Some(1));
        assert!(!g[1].overlap && g[1].chunk == Some(1));
        assert!(l.lines[2]
            .segs
            .iter()
            .all(|s| s.unseen && s.chunk.is_none()));
    }
}
