//! Sentence and paragraph boundaries of plain text and Markdown, as byte ranges into the source.
//!
//! The splitter packs whole sentences and paragraphs into encoder windows, so it needs to know
//! where they are without owning any text: this module answers with byte ranges, and
//! `&text[range]` is always the unit itself, trimmed of surrounding whitespace.
//!
//! Paragraphs come from the line structure alone: blank lines, Markdown headings (ATX and
//! setext), short ALL-CAPS title lines standing alone, list items with their continuation lines,
//! fenced code blocks and pipe tables. One pass over the lines, no backtracking.
//!
//! Sentences come from Unicode sentence boundaries (UAX #29, through `unicode-segmentation`)
//! inside each prose or list paragraph, then corrected by rules UAX #29 leaves to the
//! application: abbreviations and initials, list numbering, ellipses, URLs and e-mail
//! addresses, and continuation in lower case. Code blocks give one unit per non-blank line,
//! tables one per row and headings one per heading, so the splitter never cuts a log line or a
//! table row in the middle.
//!
//! Corpora run to tens of megabytes, so everything is linear: each correction looks at a bounded
//! neighbourhood of its candidate boundary, and the UAX #29 state machine, the slowest part, runs
//! only over short windows around possible terminals (with the same result as over the whole
//! text, which a property test checks).
use std::ops::Range;

use unicode_segmentation::UnicodeSegmentation;

/// What kind of block a paragraph is; the splitter treats code and tables as units to keep whole
/// where possible.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum BlockKind {
    /// Running text.
    Prose,
    /// A heading: an ATX line, a setext line with its underline, or an ALL-CAPS title line.
    Heading,
    /// One list item with its continuation lines.
    ListItem,
    /// A fenced code block, fences included.
    Code,
    /// Consecutive pipe-table rows.
    Table,
}

/// One paragraph: its byte range in the source (trimmed) and its kind.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Paragraph {
    /// Byte range in the source, trimmed of surrounding whitespace, never empty.
    pub bytes: Range<usize>,
    /// Kind of block.
    pub kind: BlockKind,
}

/// Paragraphs and sentences of one text, found in one pass.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Segments {
    /// Paragraphs in order.
    pub paragraphs: Vec<Paragraph>,
    /// Sentences in order; none crosses a paragraph boundary.
    pub sentences: Vec<Range<usize>>,
    /// For each sentence, the index of its paragraph in `paragraphs`.
    pub sentence_paragraph: Vec<usize>,
}

/// Paragraphs in order: non-overlapping, ascending, each trimmed of surrounding whitespace, never
/// empty.
pub fn paragraphs(text: &str) -> Vec<Paragraph> {
    find_paragraphs(text)
}

/// Sentences in order: non-overlapping, ascending, trimmed, never empty; a sentence never crosses
/// a paragraph boundary. Inside a Code block each non-blank line is one unit; a table row is one
/// unit; a heading is one unit.
pub fn sentences(text: &str) -> Vec<Range<usize>> {
    segment(text).sentences
}

/// Both at once: paragraphs, then sentences with, for each sentence, the index of its paragraph.
pub fn segment(text: &str) -> Segments {
    let paragraphs = find_paragraphs(text);
    let mut sentences = Vec::with_capacity(paragraphs.len() * 2);
    let mut sentence_paragraph = Vec::with_capacity(paragraphs.len() * 2);
    let mut scratch = Scratch::default();
    for (index, p) in paragraphs.iter().enumerate() {
        let before = sentences.len();
        match p.kind {
            BlockKind::Code | BlockKind::Table => line_units(text, p.bytes.clone(), &mut sentences),
            BlockKind::Heading => sentences.push(p.bytes.clone()),
            BlockKind::Prose | BlockKind::ListItem => {
                prose_sentences(text, p.bytes.clone(), &mut scratch, &mut sentences)
            }
        }
        sentence_paragraph.resize(sentences.len(), index);
        debug_assert!(sentences.len() > before, "every paragraph has a sentence");
    }
    Segments {
        paragraphs,
        sentences,
        sentence_paragraph,
    }
}

/// 1-based line number of a byte offset (counting '\n'); helper for reports. An offset past the
/// end counts the whole text.
pub fn line_of(text: &str, byte: usize) -> usize {
    let end = byte.min(text.len());
    1 + text.as_bytes()[..end]
        .iter()
        .filter(|&&b| b == b'\n')
        .count()
}

/// `range` without leading and trailing whitespace, or `None` if nothing is left.
fn trim_range(text: &str, range: Range<usize>) -> Option<Range<usize>> {
    let s = &text[range.clone()];
    let start = range.start + (s.len() - s.trim_start().len());
    let end = range.start + s.trim_end().len();
    (start < end).then_some(start..end)
}

// ---------------------------------------------------------------------------------------------
// Paragraphs

/// An opening code fence: its character and run length (a closing fence must be at least as
/// long).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct Fence {
    ch: u8,
    len: usize,
}

/// The paragraph being built.
#[derive(Debug)]
struct Open {
    start: usize,
    end: usize,
    kind: BlockKind,
    lines: usize,
}

/// What one line (outside a code fence) can be.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Line {
    Blank,
    Fence(Fence),
    AtxHeading,
    /// `===` or `---`: a setext underline under a single line of text, else a rule if
    /// `rule` is set, else text.
    Underline {
        rule: bool,
    },
    /// `***`, `___`, `- - -`: a thematic break.
    Rule,
    TableRow,
    ListItem {
        may_interrupt: bool,
    },
    Text,
}

fn classify_line(line: &str) -> Line {
    let Some(&lead) = line.trim_start().as_bytes().first() else {
        return Line::Blank;
    };
    // Most lines start with a capital, a quote or a bracket, and can only be text; this test
    // spares them the checks below.
    let may_be_block = matches!(
        lead,
        b'`' | b'~' | b'#' | b'=' | b'-' | b'*' | b'_' | b'+' | b'|' | b'0'..=b'9' | b'a'..=b'z'
    ) || !lead.is_ascii();
    if !may_be_block {
        return Line::Text;
    }
    if line.trim().is_empty() {
        return Line::Blank;
    }
    if let Some(f) = opening_fence(line) {
        return Line::Fence(f);
    }
    if is_atx_heading(line) {
        return Line::AtxHeading;
    }
    if is_setext_underline(line) {
        return Line::Underline {
            rule: is_thematic_break(line),
        };
    }
    if is_thematic_break(line) {
        return Line::Rule;
    }
    if is_table_row(line) {
        return Line::TableRow;
    }
    if let Some(may_interrupt) = list_marker(line) {
        return Line::ListItem { may_interrupt };
    }
    Line::Text
}

fn find_paragraphs(text: &str) -> Vec<Paragraph> {
    let mut out = Vec::new();
    let mut open: Option<Open> = None;
    let mut fence: Option<Fence> = None;
    let mut pos = 0;
    for raw in text.split_inclusive('\n') {
        let start = pos;
        pos += raw.len();
        let line = raw.strip_suffix('\n').unwrap_or(raw);
        let line = line.strip_suffix('\r').unwrap_or(line);
        let end = start + line.len();

        if let Some(f) = fence {
            if let Some(o) = open.as_mut() {
                o.end = end;
            }
            if closes_fence(line, f) {
                fence = None;
                close(text, &mut open, &mut out);
            }
            continue;
        }
        let kind = classify_line(line);
        let single_text_line = open
            .as_ref()
            .is_some_and(|o| o.kind == BlockKind::Prose && o.lines == 1);
        let in_prose = open.as_ref().is_some_and(|o| o.kind == BlockKind::Prose);
        match kind {
            Line::Blank => close(text, &mut open, &mut out),
            Line::Fence(f) => {
                close(text, &mut open, &mut out);
                fence = Some(f);
                open = Some(Open {
                    start,
                    end,
                    kind: BlockKind::Code,
                    lines: 1,
                });
            }
            Line::AtxHeading => {
                close(text, &mut open, &mut out);
                push(text, start..end, BlockKind::Heading, &mut out);
            }
            Line::Underline { .. } if single_text_line => {
                let o = open.as_mut().expect("checked: a prose line is open");
                o.end = end;
                o.kind = BlockKind::Heading;
                close(text, &mut open, &mut out);
            }
            Line::Underline { rule: true } | Line::Rule => {
                // A rule is a paragraph of its own: it belongs to neither neighbour.
                close(text, &mut open, &mut out);
                push(text, start..end, BlockKind::Prose, &mut out);
            }
            Line::TableRow => match open.as_mut() {
                Some(o) if o.kind == BlockKind::Table => {
                    o.end = end;
                    o.lines += 1;
                }
                _ => {
                    close(text, &mut open, &mut out);
                    open = Some(Open {
                        start,
                        end,
                        kind: BlockKind::Table,
                        lines: 1,
                    });
                }
            },
            // As in CommonMark, an ordered item that does not start at 1 (or a) cannot
            // interrupt running text: "chapter\n3. The" is a wrapped sentence, not a list.
            Line::ListItem { may_interrupt } if may_interrupt || !in_prose => {
                close(text, &mut open, &mut out);
                open = Some(Open {
                    start,
                    end,
                    kind: BlockKind::ListItem,
                    lines: 1,
                });
            }
            Line::Underline { rule: false } | Line::ListItem { .. } | Line::Text => {
                match open.as_mut() {
                    // Continuation: indented or lazy, as in CommonMark.
                    Some(o) if matches!(o.kind, BlockKind::Prose | BlockKind::ListItem) => {
                        o.end = end;
                        o.lines += 1;
                    }
                    _ => {
                        close(text, &mut open, &mut out);
                        open = Some(Open {
                            start,
                            end,
                            kind: BlockKind::Prose,
                            lines: 1,
                        });
                    }
                }
            }
        }
    }
    close(text, &mut open, &mut out);
    out
}

/// Finish the open paragraph, if any; a single prose line in capitals becomes a heading.
fn close(text: &str, open: &mut Option<Open>, out: &mut Vec<Paragraph>) {
    if let Some(o) = open.take() {
        let mut kind = o.kind;
        if kind == BlockKind::Prose && o.lines == 1 && is_caps_title(&text[o.start..o.end]) {
            kind = BlockKind::Heading;
        }
        push(text, o.start..o.end, kind, out);
    }
}

fn push(text: &str, range: Range<usize>, kind: BlockKind, out: &mut Vec<Paragraph>) {
    if let Some(bytes) = trim_range(text, range) {
        out.push(Paragraph { bytes, kind });
    }
}

/// Leading spaces of a line (tabs count as one; CommonMark's 4-column tab stop is not needed
/// for the "at most three" checks below to be useful).
fn indent_of(line: &str) -> usize {
    line.len() - line.trim_start_matches([' ', '\t']).len()
}

/// ```` ``` ```` or `~~~` (three or more) opening a fenced code block, at any indent so that
/// fences inside list items count. A backtick fence's info string cannot hold a backtick, so an
/// inline span like ```` ```x``` ```` is not a fence.
fn opening_fence(line: &str) -> Option<Fence> {
    let t = line.trim_start();
    let ch = *t.as_bytes().first()?;
    if ch != b'`' && ch != b'~' {
        return None;
    }
    let len = t.bytes().take_while(|&b| b == ch).count();
    if len < 3 || (ch == b'`' && t[len..].contains('`')) {
        return None;
    }
    Some(Fence { ch, len })
}

fn closes_fence(line: &str, fence: Fence) -> bool {
    let t = line.trim();
    t.len() >= fence.len && t.bytes().all(|b| b == fence.ch)
}

/// `#` to `######` followed by a space, a tab or the end of the line, indented at most three.
fn is_atx_heading(line: &str) -> bool {
    if indent_of(line) > 3 {
        return false;
    }
    let t = line.trim_start();
    let hashes = t.bytes().take_while(|&b| b == b'#').count();
    (1..=6).contains(&hashes) && (t.len() == hashes || t[hashes..].starts_with([' ', '\t']))
}

/// A run of `=` or `-` (two or more) under a line of text, indented at most three.
fn is_setext_underline(line: &str) -> bool {
    let t = line.trim();
    indent_of(line) <= 3
        && t.len() >= 2
        && (t.bytes().all(|b| b == b'=') || t.bytes().all(|b| b == b'-'))
}

/// `---`, `***`, `___` (spaces allowed between) or a run of three or more `=`: a rule line.
fn is_thematic_break(line: &str) -> bool {
    let t = line.trim();
    let Some(&ch) = t.as_bytes().first() else {
        return false;
    };
    if !matches!(ch, b'-' | b'*' | b'_' | b'=') {
        return false;
    }
    let mut count = 0;
    for b in t.bytes() {
        if b == ch {
            count += 1;
        } else if !(b == b' ' || b == b'\t') || ch == b'=' {
            return false;
        }
    }
    count >= 3
}

fn is_table_row(line: &str) -> bool {
    line.trim_start().starts_with('|')
}

/// Bullet characters of plain-text lists (besides Markdown's `-`, `*`, `+`).
fn is_bullet(c: char) -> bool {
    matches!(c, '•' | '‣' | '⁃' | '◦' | '▪' | '●')
}

/// A list marker at the start of a line (any indent) followed by whitespace or the end of the
/// line: `-`, `*`, `+`, a bullet, `1.`, `1)`, `1.)`, `1.2.`, `a.`, `a)`. Returns whether the
/// item may interrupt a prose paragraph (bullets, and ordered items starting at 1 or a).
fn list_marker(line: &str) -> Option<bool> {
    let t = line.trim_start();
    let c = t.chars().next()?;
    let (rest, may_interrupt) = if matches!(c, '-' | '*' | '+') || is_bullet(c) {
        (&t[c.len_utf8()..], true)
    } else if let Some((label_len, first)) = ordered_label(t) {
        (&t[label_len..], first)
    } else {
        return None;
    };
    (rest.is_empty() || rest.starts_with([' ', '\t'])).then_some(may_interrupt)
}

/// An ordered-list label at the start of `t` with its punctuation: `12.`, `3)`, `1.)`, `1.2.`,
/// `b)`. Returns its byte length and whether it is a first label (`1`, `1.1`, `a`).
fn ordered_label(t: &str) -> Option<(usize, bool)> {
    let b = t.as_bytes();
    let mut i = 0;
    let first;
    if b.first().is_some_and(u8::is_ascii_lowercase) {
        first = b[0] == b'a';
        i = 1;
    } else {
        // digits ('.' digits)*, each group 1 to 3 digits
        let mut last_group = 0..0;
        loop {
            let s = i;
            while i < b.len() && b[i].is_ascii_digit() {
                i += 1;
            }
            if i == s || i - s > 3 {
                return None;
            }
            last_group = s..i;
            if i + 1 < b.len() && b[i] == b'.' && b[i + 1].is_ascii_digit() {
                i += 1;
                continue;
            }
            break;
        }
        first = &t[last_group] == "1";
    }
    let punct = if t[i..].starts_with(".)") {
        2
    } else if t[i..].starts_with(['.', ')']) {
        1
    } else {
        return None;
    };
    Some((i + punct, first))
}

/// A plain-text title: one short line in capitals without closing punctuation ("INSTALLATION",
/// "PART II: RESULTS").
fn is_caps_title(line: &str) -> bool {
    let t = line.trim();
    let mut upper = 0;
    for c in t.chars() {
        if c.is_lowercase() {
            return false;
        }
        upper += usize::from(c.is_uppercase());
    }
    upper >= 2 && t.chars().count() <= 80 && !t.ends_with(['.', ',', ';'])
}

// ---------------------------------------------------------------------------------------------
// Units of code blocks and tables

/// One unit per non-blank line.
fn line_units(text: &str, para: Range<usize>, out: &mut Vec<Range<usize>>) {
    let mut pos = para.start;
    for line in text[para].split_inclusive('\n') {
        if let Some(r) = trim_range(text, pos..pos + line.len()) {
            out.push(r);
        }
        pos += line.len();
    }
}

// ---------------------------------------------------------------------------------------------
// Sentences of prose

/// Buffers reused from one paragraph to the next.
#[derive(Default)]
struct Scratch {
    flat: String,
    candidates: Vec<usize>,
    forced: Vec<usize>,
    cuts: Vec<usize>,
}

/// Characters UAX #29 treats as paragraph separators; inside one of our paragraphs they are only
/// line breaks. Each is replaced by spaces of the same byte length, so offsets carry over.
fn is_line_break(c: char) -> bool {
    matches!(c, '\n' | '\r' | '\u{85}' | '\u{2028}' | '\u{2029}')
}

/// `src` with every `is_line_break` character replaced by spaces of the same byte length (built
/// in `buf`), or `src` itself when it has none. All searches are memchr-backed; the Unicode
/// separators are rare enough to take a character-by-character pass.
fn flatten<'a>(src: &'a str, buf: &'a mut String) -> &'a str {
    let bytes = src.as_bytes();
    let unicode_breaks = !src.is_ascii()
        && (src.contains('\u{85}') || src.contains('\u{2028}') || src.contains('\u{2029}'));
    if !unicode_breaks && !bytes.contains(&b'\n') && !bytes.contains(&b'\r') {
        return src;
    }
    buf.clear();
    if unicode_breaks {
        for c in src.chars() {
            if is_line_break(c) {
                buf.extend(std::iter::repeat_n(' ', c.len_utf8()));
            } else {
                buf.push(c);
            }
        }
    } else {
        for (k, line) in src.split('\n').enumerate() {
            if k > 0 {
                buf.push(' ');
            }
            let body = line.strip_suffix('\r').unwrap_or(line);
            if body.as_bytes().contains(&b'\r') {
                buf.extend(body.chars().map(|c| if c == '\r' { ' ' } else { c }));
            } else {
                buf.push_str(body);
            }
            if body.len() < line.len() {
                buf.push(' ');
            }
        }
    }
    debug_assert_eq!(buf.len(), src.len());
    buf
}

/// Sentence ranges inside one prose or list paragraph, pushed as absolute offsets.
fn prose_sentences(text: &str, para: Range<usize>, s: &mut Scratch, out: &mut Vec<Range<usize>>) {
    let src = &text[para.clone()];
    let flat = flatten(src, &mut s.flat);
    uax_candidates(flat, &mut s.candidates);
    s.forced.clear();
    ellipsis_cuts(flat, &mut s.forced);
    inline_list_cuts(flat, &mut s.forced);
    s.forced.sort_unstable();
    s.forced.dedup();
    choose_cuts(flat, &s.candidates, &s.forced, &mut s.cuts);

    let mut start = 0;
    for &cut in s.cuts.iter().chain(std::iter::once(&flat.len())) {
        if let Some(r) = trim_range(text, para.start + start..para.start + cut) {
            out.push(r);
        }
        start = cut;
    }
}

/// Whether UAX #29 could treat `c` as a sentence terminal (STerm or ATerm): '.', '!', '?', or
/// any non-ASCII character that is neither a letter, a digit nor whitespace. Over-inclusive on
/// purpose (curly quotes, dashes, emoji qualify); a test checks that no other character is a
/// terminal.
fn may_be_terminal(c: char) -> bool {
    matches!(c, '.' | '!' | '?') || (!c.is_ascii() && !c.is_alphanumeric() && !c.is_whitespace())
}

/// UAX #29 sentence boundaries of `flat` (which holds no line breaks), without 0, in order.
///
/// UAX #29 only ever breaks after a terminal with its closing punctuation and spaces (rule
/// SB11); whether it does depends on the letter before the terminal (SB7) and on what comes
/// before the next letter after it (SB6, SB8, SB8a). So instead of running the state machine over
/// every character, run it over short windows, each from just before a possible terminal to the
/// first letter after it, merged when they touch: the same boundaries for a fraction of the
/// work. The property test `windowed_uax_matches_whole_text_uax` holds this to the whole-text
/// run.
fn uax_candidates(flat: &str, out: &mut Vec<usize>) {
    out.clear();
    let bytes = flat.as_bytes();
    let mut window: Option<Range<usize>> = None;
    let mut i = 0;
    while i < bytes.len() {
        let byte = bytes[i];
        if byte.is_ascii() && !matches!(byte, b'.' | b'!' | b'?') {
            i += 1;
            continue;
        }
        let c = flat[i..].chars().next().expect("i is a char boundary");
        if !may_be_terminal(c) {
            i += c.len_utf8();
            continue;
        }
        // Start: back over the letter before the terminal (SB7), and over any marks or format
        // characters between them (SB5), never before the current window's end.
        let floor = window.as_ref().map_or(0, |w| w.end);
        let mut start = i;
        for _ in 0..16 {
            if start <= floor {
                break;
            }
            let prev = flat[..start].chars().next_back().expect("start > 0");
            start -= prev.len_utf8();
            if prev.is_ascii() || prev.is_whitespace() || (prev.is_alphanumeric() && !is_mark(prev))
            {
                break;
            }
        }
        // End: just past the first letter after the terminal (where SB8's look-ahead stops).
        let mut end = flat.len();
        for (k, ch) in flat[i + c.len_utf8()..].char_indices() {
            if ch.is_alphabetic() && (ch.is_ascii() || !is_mark(ch)) {
                end = i + c.len_utf8() + k + ch.len_utf8();
                break;
            }
        }
        match window.as_mut() {
            Some(w) if start <= w.end => w.end = end,
            _ => {
                if let Some(w) = window.take() {
                    uax_window(flat, w, out);
                }
                window = Some(start..end);
            }
        }
        i = end;
    }
    if let Some(w) = window {
        uax_window(flat, w, out);
    }
}

/// A character UAX #29 folds into the one before it (Extend or Format, SB5), such as the
/// alphabetic marks U+0D81 or U+1067: it neither starts nor ends a window. Asked of the sentence
/// rules themselves: after "?", a letter starts a new sentence and a mark does not.
fn is_mark(c: char) -> bool {
    if c.is_ascii() {
        return false;
    }
    let mut buf = [0u8; 6];
    buf[0] = b'?';
    let len = 1 + c.encode_utf8(&mut buf[1..5]).len();
    buf[len] = b'A';
    std::str::from_utf8(&buf[..=len])
        .is_ok_and(|s| !s.split_sentence_bound_indices().any(|(k, _)| k == 1))
}

fn uax_window(flat: &str, w: Range<usize>, out: &mut Vec<usize>) {
    let base = w.start;
    out.extend(
        flat[w]
            .split_sentence_bound_indices()
            .skip(1)
            .map(|(k, _)| base + k),
    );
}

/// Merge the forced cuts with the UAX #29 candidates that survive the corrections.
fn choose_cuts(flat: &str, candidates: &[usize], forced: &[usize], cuts: &mut Vec<usize>) {
    cuts.clear();
    let mut seg_start = 0;
    let mut links = LinkCache::default();
    let mut f = 0;
    for (k, &b) in candidates.iter().enumerate() {
        while f < forced.len() && forced[f] <= b {
            take_forced(flat, forced[f], &mut seg_start, cuts, &mut links);
            f += 1;
        }
        if b <= seg_start {
            continue;
        }
        let next = candidates.get(k + 1).copied().unwrap_or(flat.len());
        if let Some(cut) = keep_candidate(flat, seg_start, b, next, &mut links) {
            cuts.push(cut);
            seg_start = cut;
        }
    }
    for &c in &forced[f..] {
        take_forced(flat, c, &mut seg_start, cuts, &mut links);
    }
}

/// Take a forced cut unless it falls inside a URL ("http://x.org/a...B").
fn take_forced(
    flat: &str,
    cut: usize,
    seg_start: &mut usize,
    cuts: &mut Vec<usize>,
    links: &mut LinkCache,
) {
    if cut > *seg_start && cut < flat.len() && !links.inside_link(flat.as_bytes(), cut) {
        cuts.push(cut);
        *seg_start = cut;
    }
}

/// Quotes and closing brackets that end with a sentence, and Markdown emphasis and code marks.
fn is_closer(c: char) -> bool {
    matches!(
        c,
        '"' | '\'' | '”' | '’' | '»' | '›' | ')' | ']' | '}' | '*' | '_' | '`' | '~'
    )
}

/// Quotes and opening brackets that start a sentence, and Markdown emphasis marks.
fn is_opener(c: char) -> bool {
    matches!(
        c,
        '"' | '\'' | '“' | '‘' | '«' | '‹' | '(' | '[' | '{' | '*' | '_' | '`'
    )
}

/// Decide one UAX #29 candidate boundary `b` of the segment starting at `seg_start` (the next
/// candidate is `next`). Returns where to cut (usually `b`), or `None` to join.
fn keep_candidate(
    flat: &str,
    seg_start: usize,
    mut b: usize,
    next: usize,
    links: &mut LinkCache,
) -> Option<usize> {
    let bytes = flat.as_bytes();
    let glued = !flat[..b].ends_with(char::is_whitespace);
    if glued {
        // "**Note.** The": the emphasis closes with the sentence; cut after it.
        let marks = bytes[b..next]
            .iter()
            .take_while(|c| matches!(c, b'*' | b'_' | b'`' | b'~'))
            .count();
        if marks > 0
            && flat[b + marks..]
                .chars()
                .next()
                .is_none_or(char::is_whitespace)
        {
            b += marks;
        } else {
            if links.inside_link(bytes, b) {
                return None;
            }
            // "Jane.Doe", "README.Debian", "java.util.List": a dot between letters is no end.
            let before = flat[..b].chars().next_back();
            let after = flat[b..].chars().next();
            if before == Some('.')
                && bytes
                    .get(b.wrapping_sub(2))
                    .is_some_and(u8::is_ascii_alphanumeric)
                && after.is_some_and(|c| c.is_ascii_alphanumeric())
            {
                return None;
            }
        }
    }
    let left = flat[seg_start..b].trim_end();
    let core = left.trim_end_matches(is_closer);
    let closers = &left[core.len()..];
    let Some(term) = core.chars().next_back() else {
        // Nothing but quotes and brackets so far: they open the next sentence.
        return None;
    };
    let after = next_word(&flat[b..]);
    // Continuation in lower case: "Yahoo! in", "'Great.' she said", "e.g. the".
    if after.first.is_some_and(char::is_lowercase) {
        return None;
    }
    // A fragment without letters or digits ("!!", a stray quote) is not a sentence of its own.
    if !flat[b..next].chars().any(char::is_alphanumeric) {
        return None;
    }
    // Ellipses decide for themselves (see `ellipsis_cuts`).
    if ends_with_ellipsis(core) {
        return None;
    }
    // Editorial marks in brackets: "(!)", "(?)".
    if closers.starts_with([')', ']'])
        && core.trim_end_matches(['!', '?', '.']).ends_with(['(', '['])
    {
        return None;
    }
    if term != '.' {
        return Some(b);
    }
    // "1." at the start of an item is part of it.
    if is_marker_only(left.trim_start()) {
        return None;
    }
    let word = last_word(core);
    let keep = match classify(word) {
        Abbr::None => true,
        Abbr::Title | Abbr::Inner => false,
        Abbr::Numbered | Abbr::NumberedWord if after.is_number_like() => false,
        Abbr::NumberedWord => true,
        Abbr::Etc => after.first.is_some_and(char::is_uppercase),
        Abbr::Numbered | Abbr::Ambiguous | Abbr::Initial => {
            !after.first.is_some_and(|c| c.is_ascii_digit())
                && (after.is_starter()
                    || (after.is_title() && at_least_words(&flat[seg_start..b], 4)))
        }
    };
    keep.then_some(b)
}

/// The last whitespace-separated word of `core` (which ends with '.'), without leading quotes or
/// brackets. Long words are cut short: no abbreviation is that long.
fn last_word(core: &str) -> &str {
    let mut from = core.len().saturating_sub(24);
    while !core.is_char_boundary(from) {
        from -= 1;
    }
    let tail = &core[from..];
    let start = tail.rfind(char::is_whitespace).map_or(0, |i| {
        i + tail[i..].chars().next().map_or(1, char::len_utf8)
    });
    tail[start..].trim_start_matches(is_opener)
}

/// Whether `s` holds at least `n` whitespace-separated words (looks at no more than those).
fn at_least_words(s: &str, n: usize) -> bool {
    s.split_whitespace().take(n).count() == n
}

/// How a word ending in '.' behaves.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Abbr {
    /// Not a known abbreviation: the period ends the sentence.
    None,
    /// A title before a name (Mr., Dr.): never ends a sentence.
    Title,
    /// e.g., i.e., vs.: never ends a sentence.
    Inner,
    /// p., Fig., Sept.: joins before a number, else ambiguous.
    Numbered,
    /// No., Art.: joins before a number, else a plain word.
    NumberedWord,
    /// Inc., Jr., U.S.: ends a sentence only before a sentence starter.
    Ambiguous,
    /// A single capital letter (J. T. Smith): like `Ambiguous`.
    Initial,
    /// etc.: ends a sentence before any capitalised word.
    Etc,
}

/// Classify the word before a period (`word` still ends with the period).
fn classify(word: &str) -> Abbr {
    let bare = word.strip_suffix('.').unwrap_or(word);
    let mut chars = bare.chars();
    match (chars.next(), chars.next()) {
        (None, _) => return Abbr::None,
        (Some(c), None) if c.is_uppercase() => return Abbr::Initial,
        (Some('p'), None) => return Abbr::Numbered,
        (Some('v'), None) => return Abbr::Inner,
        (Some(_), None) => return Abbr::None,
        _ => {}
    }
    let mut buf = [0u8; 16];
    if bare.len() <= buf.len() {
        let lower = &mut buf[..bare.len()];
        lower.copy_from_slice(bare.as_bytes());
        lower.make_ascii_lowercase();
        let lower: &[u8] = lower;
        let found = |list: &[&str]| list.binary_search_by(|k| k.as_bytes().cmp(lower)).is_ok();
        if lower == b"etc" {
            return Abbr::Etc;
        }
        if found(TITLES) {
            return Abbr::Title;
        }
        if found(INNER) {
            return Abbr::Inner;
        }
        if found(NUMBERED) {
            return Abbr::Numbered;
        }
        if found(NUMBERED_WORDS) {
            return Abbr::NumberedWord;
        }
        if found(AMBIGUOUS) {
            return Abbr::Ambiguous;
        }
    }
    if is_dotted_acronym(bare) {
        return Abbr::Ambiguous;
    }
    // "Staff-Insp.", "ex-Gov.": the last part decides.
    match bare.rsplit_once('-') {
        Some((_, last)) if !last.is_empty() && last.len() < bare.len() => classify(last),
        _ => Abbr::None,
    }
}

/// U.S, Ph.D, a.m, E.U: two or more groups of one to three ASCII letters joined by dots, at
/// least one of them a single letter.
fn is_dotted_acronym(bare: &str) -> bool {
    let mut groups = 0;
    let mut single = false;
    for g in bare.split('.') {
        if g.is_empty() || g.len() > 3 || !g.bytes().all(|b| b.is_ascii_alphabetic()) {
            return false;
        }
        groups += 1;
        single |= g.len() == 1;
    }
    groups >= 2 && single
}

/// The word after a candidate boundary.
struct NextWord<'a> {
    /// First character after spaces and opening quotes or brackets.
    first: Option<char>,
    /// The word itself, up to whitespace or punctuation (apostrophes included).
    word: &'a str,
    /// Whether a period follows the word directly ("Mr." rather than "Mr").
    dotted: bool,
}

fn next_word(s: &str) -> NextWord<'_> {
    let t = s.trim_start().trim_start_matches(is_opener);
    let mut end = t.len();
    for (n, (i, c)) in t.char_indices().enumerate() {
        if n == 32
            || c.is_whitespace()
            || matches!(
                c,
                ',' | ';' | ':' | '!' | '?' | '.' | '(' | ')' | '[' | ']' | '"' | '“' | '”'
            )
        {
            end = i;
            break;
        }
    }
    NextWord {
        first: t.chars().next(),
        word: &t[..end],
        dotted: t[end..].starts_with('.'),
    }
}

impl NextWord<'_> {
    /// The word without a contraction: "It's" -> "It", "Don’t" -> "Don".
    fn base(&self) -> &str {
        self.word.split(['\'', '’']).next().unwrap_or("")
    }

    /// A common sentence-initial word ("The", "It", "How", "I'm"); a dotted single letter is an
    /// initial, not the pronoun.
    fn is_starter(&self) -> bool {
        !(self.dotted && self.word.chars().count() == 1)
            && STARTERS.binary_search(&self.base()).is_ok()
    }

    /// A title such as "Mr." or "Dr.".
    fn is_title(&self) -> bool {
        self.dotted && TITLES.iter().any(|t| t.eq_ignore_ascii_case(self.word))
    }

    /// A number, a roman numeral or a single capital: what follows "p.", "Fig.", "Vol.".
    fn is_number_like(&self) -> bool {
        let w = self.word;
        self.first.is_some_and(|c| c.is_ascii_digit())
            || (!w.is_empty() && w.len() <= 4 && w.bytes().all(|b| b"IVXLC".contains(&b)))
            || (w.len() == 1 && w.bytes().all(|b| b.is_ascii_uppercase()))
    }

    /// The pronoun "I" or a contraction of it, which is capitalised anywhere in a sentence.
    fn is_pronoun_i(&self) -> bool {
        self.base() == "I" && !self.dotted
    }
}

/// Whether the segment, before any closing quotes or brackets, ends in an ellipsis: three or
/// more dots, spaced or not, or '…'.
fn ends_with_ellipsis(core: &str) -> bool {
    let mut t = core;
    let mut dots = 0;
    loop {
        if let Some(r) = t.strip_suffix('.') {
            dots += 1;
            t = r;
        } else if let Some(r) = t.strip_suffix('…') {
            dots += 3;
            t = r;
        } else {
            break;
        }
        if dots >= 3 {
            return true;
        }
        if let Some(r) = t.strip_suffix(' ').filter(|r| r.ends_with(['.', '…'])) {
            t = r;
        }
    }
    false
}

/// Cuts decided by ellipses, which UAX #29 gets wrong both ways (it never breaks after '…' and
/// always breaks after "..." before a capital). An ellipsis of three dots (or '…') followed by
/// a capitalised word other than "I" ends a sentence; four dots (an ellipsis and a period) end
/// one before any capital. When a period closes a word and a spaced ellipsis follows
/// ("compounds. . . . The"), the period ends the sentence and the ellipsis opens the next one,
/// marking an omission there. An ellipsis in brackets ("[...]") marks an omission and ends
/// nothing; neither does one followed by lower case, a digit or nothing.
fn ellipsis_cuts(flat: &str, out: &mut Vec<usize>) {
    const HELLIP: &[u8] = "…".as_bytes();
    let b = flat.as_bytes();
    let dot_at = |j: usize| match b.get(j) {
        Some(b'.') => true,
        Some(0xE2) => b[j + 1..].starts_with(&HELLIP[1..]),
        _ => false,
    };
    let has_hellip = flat.contains('…');
    let mut i = 0;
    while i < b.len() {
        // Jump to the next '.' (memchr), or to the next '.' or '…' when there are any '…'.
        let found = if has_hellip {
            flat[i..].find(['.', '…'])
        } else {
            flat[i..].find('.')
        };
        let Some(k) = found else {
            break;
        };
        i += k;
        let start = i;
        let mut dots = 0;
        let mut j = i;
        loop {
            if b.get(j) == Some(&b'.') {
                dots += 1;
                j += 1;
            } else if b[j..].starts_with(HELLIP) {
                dots += 3;
                j += HELLIP.len();
            } else {
                break;
            }
            if b.get(j) == Some(&b' ') && dot_at(j + 1) {
                j += 1;
            }
        }
        i = j;
        if dots < 3 {
            continue;
        }
        let attached = !flat[..start].ends_with(char::is_whitespace) && start > 0;
        if start > 0 && matches!(b[start - 1], b'[' | b'(') && matches!(b.get(j), Some(b']' | b')'))
        {
            continue;
        }
        let rest = &flat[j..];
        let rest_trim = rest.trim_start_matches(is_closer).trim_start();
        let at = flat.len() - rest_trim.len();
        let after = next_word(rest_trim);
        if !after.first.is_some_and(char::is_uppercase) {
            continue;
        }
        if dots >= 4 {
            if attached && b[start] == b'.' && b.get(start + 1) == Some(&b' ') {
                out.push(start + 1);
            } else {
                out.push(at);
            }
        } else if !after.is_pronoun_i() {
            out.push(at);
        }
    }
}

/// Cuts before inline list markers in a paragraph that starts with one: "1) The first item
/// 2) The second item", "a. one b. two", "• 9. nine • 10. ten". Only the next label in sequence
/// (same punctuation) or the same bullet counts, so "1. Mix 2 cups" or "3.) and" elsewhere does
/// not cut. Markdown's `-`, `*` and `+` are left alone: " - " is a dash in running text.
fn inline_list_cuts(flat: &str, out: &mut Vec<usize>) {
    let Some(c) = flat.chars().next() else {
        return;
    };
    if is_bullet(c) {
        let mut needle = [0u8; 8];
        needle[0] = b' ';
        let len = 1 + c.encode_utf8(&mut needle[1..]).len();
        let needle = std::str::from_utf8(&needle[..len]).expect("a space and one char");
        let mut from = 0;
        while let Some(i) = flat[from..].find(needle) {
            out.push(from + i + 1);
            from += i + len;
        }
        return;
    }
    let Some((label_len, _)) = ordered_label(flat) else {
        return;
    };
    let label = &flat[..label_len];
    if !flat[label_len..].starts_with(' ') {
        return;
    }
    let head = label.trim_end_matches(['.', ')']);
    let punct = &label[head.len()..];
    let mut next = if let Ok(n) = head.parse::<u32>() {
        Label::Number(n)
    } else if head.len() == 1 && head.bytes().all(|b| b.is_ascii_lowercase()) {
        Label::Letter(head.as_bytes()[0])
    } else {
        return; // "1.2." and other nested labels do not run inline
    };
    let mut from = label_len;
    let mut needle = String::new();
    loop {
        next = match next.succ() {
            Some(n) => n,
            None => return,
        };
        needle.clear();
        needle.push(' ');
        match next {
            Label::Number(n) => needle.push_str(&n.to_string()),
            Label::Letter(l) => needle.push(char::from(l)),
        }
        needle.push_str(punct);
        needle.push(' ');
        match flat[from..].find(needle.as_str()) {
            Some(i) => {
                out.push(from + i + 1);
                from += i + needle.len() - 1;
            }
            None => return,
        }
    }
}

/// An inline list label.
#[derive(Clone, Copy)]
enum Label {
    Number(u32),
    Letter(u8),
}

impl Label {
    fn succ(self) -> Option<Label> {
        match self {
            Label::Number(n) => n.checked_add(1).map(Label::Number),
            Label::Letter(b'z') => None,
            Label::Letter(l) => Some(Label::Letter(l + 1)),
        }
    }
}

/// A segment that is nothing but a list label: "1.", "2.)", "a.", "• 9.", "⁃10.", "- 2.", "iv.".
fn is_marker_only(seg: &str) -> bool {
    let t = seg
        .trim_start_matches(|c| is_bullet(c) || matches!(c, '-' | '*' | '+'))
        .trim_start();
    if t.len() > 12 {
        return false;
    }
    let head = t.trim_end_matches(['.', ')']);
    let punct = &t[head.len()..];
    if !matches!(punct, "." | ")" | ".)") || head.is_empty() {
        return false;
    }
    let numeric = head
        .split('.')
        .all(|g| (1..=3).contains(&g.len()) && g.bytes().all(|b| b.is_ascii_digit()));
    let letter = head.len() == 1 && head.bytes().all(|b| b.is_ascii_alphabetic());
    let roman = head.len() <= 4 && head.bytes().all(|b| b"ivxIVX".contains(&b));
    numeric || letter || roman
}

/// Remembers the last whitespace-delimited ASCII token examined, so that many candidates inside
/// one long token cost one scan of it.
#[derive(Default)]
struct LinkCache {
    span: Range<usize>,
    is_link: bool,
}

impl LinkCache {
    /// Whether the candidate at `b` (with no whitespace before it) lies inside a URL or an
    /// e-mail address.
    fn inside_link(&mut self, bytes: &[u8], b: usize) -> bool {
        let token_byte = |c: &u8| c.is_ascii_graphic();
        if !(bytes.get(b).is_some_and(token_byte) && b > 0 && token_byte(&bytes[b - 1])) {
            return false;
        }
        if !self.span.contains(&b) {
            let start = bytes[..b]
                .iter()
                .rposition(|c| !token_byte(c))
                .map_or(0, |i| i + 1);
            let end = bytes[b..]
                .iter()
                .position(|c| !token_byte(c))
                .map_or(bytes.len(), |i| b + i);
            self.span = start..end;
            self.is_link = looks_like_link(&bytes[start..end]);
        }
        self.is_link
    }
}

/// `scheme://...`, `www.example...`, or `name@domain.tld`.
fn looks_like_link(token: &[u8]) -> bool {
    let t = token
        .iter()
        .position(|c| c.is_ascii_alphanumeric())
        .map_or(&token[..0], |i| &token[i..]);
    if t.windows(3).any(|w| w == b"://") || t.starts_with(b"www.") {
        return true;
    }
    match t.iter().position(|&c| c == b'@') {
        Some(at) => at > 0 && t[at + 1..].contains(&b'.'),
        None => false,
    }
}

// ---------------------------------------------------------------------------------------------
// Word lists (each sorted by bytes, for binary search; a test checks the order)

/// Words that commonly begin a sentence (as capitalised; contractions are cut at the apostrophe).
#[rustfmt::skip]
const STARTERS: &[&str] = &[
    "A", "About", "Above", "According", "Across", "After", "Again", "Against", "Ah", "All",
    "Almost", "Along", "Already", "Also", "Although", "Always", "Among", "An", "And", "Another",
    "Any", "Anyway", "Are", "Aren", "As", "At", "Be", "Because", "Before", "Being", "Below",
    "Beside", "Besides", "Between", "Beyond", "Both", "But", "By", "Can", "Certainly", "Clearly",
    "Could", "Couldn", "Despite", "Did", "Didn", "Do", "Does", "Doesn", "Don", "During", "Each",
    "Either", "Even", "Eventually", "Every", "Everyone", "Everything", "Few", "Finally", "First",
    "For", "Fortunately", "From", "Further", "Furthermore", "Generally", "Given", "Had", "Has",
    "Have", "Having", "He", "Hence", "Her", "Here", "Hers", "Herself", "Him", "Himself", "His",
    "How", "However", "I", "If", "In", "Indeed", "Instead", "Is", "Isn", "It", "Its", "Itself",
    "Just", "Last", "Later", "Let", "Like", "Many", "May", "Maybe", "Meanwhile", "Might",
    "Moreover", "Most", "Much", "Must", "My", "Neither", "Never", "Nevertheless", "Next", "No",
    "None", "Nonetheless", "Nor", "Not", "Nothing", "Now", "Of", "Often", "Oh", "Ok", "Okay", "On",
    "Once", "One", "Only", "Or", "Other", "Others", "Otherwise", "Our", "Out", "Over", "Perhaps",
    "Please", "Rather", "Second", "See", "She", "Should", "Shouldn", "Similarly", "Since", "So",
    "Some", "Someone", "Something", "Sometimes", "Soon", "Still", "Such", "Suddenly", "Sure",
    "Than", "Thank", "Thanks", "That", "The", "Their", "Them", "Then", "There", "Therefore",
    "These", "They", "This", "Those", "Though", "Through", "Throughout", "Thus", "To", "Today",
    "Together", "Tomorrow", "Too", "Under", "Unfortunately", "Unless", "Unlike", "Until", "Upon",
    "Usually", "Very", "Was", "Wasn", "We", "Well", "Were", "Weren", "What", "Whatever", "When",
    "Whenever", "Where", "Whereas", "Whether", "Which", "While", "Who", "Whoever", "Whom", "Whose",
    "Why", "Will", "With", "Within", "Without", "Won", "Would", "Wouldn", "Yes", "Yesterday",
    "Yet", "You", "Your", "Yours",
];
/// Titles before a name: never end a sentence.
const TITLES: &[&str] = &[
    "adm", "brig", "capt", "cmdr", "col", "cpl", "det", "dr", "drs", "fr", "gen", "gov", "hon",
    "insp", "lt", "maj", "messrs", "mlle", "mme", "mmes", "mr", "mrs", "ms", "mx", "pres", "prof",
    "profs", "pvt", "rep", "rev", "revd", "sen", "sgt", "sra", "srta", "supt",
];

/// Abbreviations that practically never end a sentence.
const INNER: &[&str] = &[
    "a.k.a", "approx", "ca", "cf", "e.g", "esp", "i.e", "incl", "resp", "viz", "vs", "w.r.t",
];

/// Abbreviations that stand before a number (`p. 55`, `Fig. 3`, `Sept. 12`); before anything else they are ambiguous.
const NUMBERED: &[&str] = &[
    "apr", "aug", "ch", "chap", "chs", "eq", "eqn", "eqs", "est", "ext", "feb", "fig", "figs",
    "jan", "jul", "nos", "nov", "nr", "n°", "oct", "p", "paras", "pp", "refs", "secs", "sect",
    "sep", "sept", "suppl", "tel", "ver", "vol", "vols",
];

/// Ordinary words that are also abbreviations before a number (`No. 4`, `Art. 12`); before anything else they are plain words.
const NUMBERED_WORDS: &[&str] = &[
    "art", "arts", "dec", "ed", "eds", "ex", "jun", "mar", "no", "op", "para", "pt", "pts", "ref",
    "sec", "tab",
];

/// Abbreviations that may end a sentence: they do when a sentence starter follows.
const AMBIGUOUS: &[&str] = &[
    "al", "assn", "ave", "blvd", "bros", "co", "corp", "dept", "esq", "ft", "govt", "hr", "hrs",
    "hwy", "inc", "intl", "jr", "lb", "lbs", "llc", "ltd", "mins", "mt", "natl", "oz", "plc", "rd",
    "sq", "sr", "st", "univ", "yd", "yds", "yrs",
];

#[cfg(test)]
mod tests {
    use super::*;
    use BlockKind::*;

    fn sents(t: &str) -> Vec<&str> {
        sentences(t).into_iter().map(|r| &t[r]).collect()
    }

    fn paras(t: &str) -> Vec<(BlockKind, &str)> {
        paragraphs(t)
            .into_iter()
            .map(|p| (p.kind, &t[p.bytes]))
            .collect()
    }

    // --- paragraphs ---------------------------------------------------------------------

    #[test]
    fn blank_and_whitespace_lines_separate_paragraphs() {
        let t = "One line\nand more.\n \t \nTwo.\r\n\r\nThree.\n\n\n";
        assert_eq!(
            paras(t),
            [
                (Prose, "One line\nand more."),
                (Prose, "Two."),
                (Prose, "Three.")
            ]
        );
        assert!(paragraphs("").is_empty());
        assert!(paragraphs(" \n\n\t\r\n").is_empty());
    }

    #[test]
    fn atx_headings_are_their_own_paragraph() {
        let t = "# Title\nText under it.\n###### Six\n####### seven\n#tag here\n    # indented";
        assert_eq!(
            paras(t),
            [
                (Heading, "# Title"),
                (Prose, "Text under it."),
                (Heading, "###### Six"),
                (Prose, "####### seven\n#tag here\n    # indented"),
            ]
        );
        assert_eq!(paras("#"), [(Heading, "#")]);
    }

    #[test]
    fn setext_headings_take_their_underline() {
        let t = "Title\n=====\nBody text.\n\nSub\n---\n\nTwo lines\nof text\n---\n";
        assert_eq!(
            paras(t),
            [
                (Heading, "Title\n====="),
                (Prose, "Body text."),
                (Heading, "Sub\n---"),
                (Prose, "Two lines\nof text"),
                (Prose, "---"),
            ]
        );
    }

    #[test]
    fn thematic_breaks_stand_alone() {
        let t = "Above.\n\n* * *\n\nBelow.\n=========";
        assert_eq!(
            paras(t),
            [
                (Prose, "Above."),
                (Prose, "* * *"),
                (Heading, "Below.\n=========")
            ]
        );
        assert_eq!(
            paras("-----\n\n====\n___"),
            [(Prose, "-----"), (Prose, "===="), (Prose, "___")]
        );
    }

    #[test]
    fn caps_lines_standing_alone_are_headings() {
        let t = "INSTALLATION\n\nRun it.\n\nNOTE: THIS IS LOUD.\n\nTHE END\nof the story.\n\nPART II: RESULTS\n\n東京\n\nOK";
        assert_eq!(
            paras(t),
            [
                (Heading, "INSTALLATION"),
                (Prose, "Run it."),
                (Prose, "NOTE: THIS IS LOUD."),
                (Prose, "THE END\nof the story."),
                (Heading, "PART II: RESULTS"),
                (Prose, "東京"),
                (Heading, "OK"),
            ]
        );
        let long = "A".repeat(81);
        assert_eq!(paras(&long), [(Prose, long.as_str())]);
    }

    #[test]
    fn list_items_with_continuation_lines() {
        let t = "Intro:\n- one\n  wraps\n* two\n+ three\nlazy line\n1. first\n2) second\n  10.) tenth\na) alpha\nb. beta\n• dot\n1.1. nested\n";
        assert_eq!(
            paras(t),
            [
                (Prose, "Intro:"),
                (ListItem, "- one\n  wraps"),
                (ListItem, "* two"),
                (ListItem, "+ three\nlazy line"),
                (ListItem, "1. first"),
                (ListItem, "2) second"),
                (ListItem, "  10.) tenth".trim()),
                (ListItem, "a) alpha"),
                (ListItem, "b. beta"),
                (ListItem, "• dot"),
                (ListItem, "1.1. nested"),
            ]
        );
    }

    #[test]
    fn ordered_items_not_starting_at_one_do_not_interrupt_prose() {
        assert_eq!(
            paras("It is covered in chapter\n3. The next one is short.\n1. A list"),
            [
                (Prose, "It is covered in chapter\n3. The next one is short."),
                (ListItem, "1. A list"),
            ]
        );
        // Not markers: no space after, too many digits, a decimal, emphasis.
        assert_eq!(
            paras("1.5 million\n2024. Was\n*em* text\n-x"),
            [(Prose, "1.5 million\n2024. Was\n*em* text\n-x")]
        );
    }

    #[test]
    fn fenced_code_is_one_paragraph_even_with_blank_lines() {
        let t = "Before.\n```rust\nfn main() {\n\n    x();\n}\n```\nAfter.\n~~~~\n```\nstill code\n~~~~~\n```a`b```\n\n  ```\nunclosed\n\nto the end";
        assert_eq!(
            paras(t),
            [
                (Prose, "Before."),
                (Code, "```rust\nfn main() {\n\n    x();\n}\n```"),
                (Prose, "After."),
                (Code, "~~~~\n```\nstill code\n~~~~~"),
                (Prose, "```a`b```"),
                (Code, "```\nunclosed\n\nto the end"),
            ]
        );
    }

    #[test]
    fn pipe_tables() {
        let t = "Costs:\n| a | b |\n|---|---|\n| 1 | 2 |\nAfter the table.";
        assert_eq!(
            paras(t),
            [
                (Prose, "Costs:"),
                (Table, "| a | b |\n|---|---|\n| 1 | 2 |"),
                (Prose, "After the table."),
            ]
        );
    }

    // --- units of code, tables and headings ------------------------------------------------

    #[test]
    fn code_lines_table_rows_and_headings_are_units() {
        let t = "# A heading. With two sentences.\n\n```\nlet a = 1; let b = 2.\n\n  log line. Another.\n```\n| x. Y | z |\n|---|---|\n\nSetext. Heading\n---";
        assert_eq!(
            sents(t),
            [
                "# A heading. With two sentences.",
                "```",
                "let a = 1; let b = 2.",
                "log line. Another.",
                "```",
                "| x. Y | z |",
                "|---|---|",
                "Setext. Heading\n---",
            ]
        );
    }

    // --- sentences ---------------------------------------------------------------------

    #[test]
    fn plain_terminals_and_closers() {
        assert_eq!(
            sents("Hello World. My name is Jonas! Really?! Yes."),
            ["Hello World.", "My name is Jonas!", "Really?!", "Yes."]
        );
        assert_eq!(
            sents("He said \"Stop.\" Then he left. (It was late.) We slept."),
            [
                "He said \"Stop.\"",
                "Then he left.",
                "(It was late.)",
                "We slept."
            ]
        );
        assert_eq!(sents("東京です。大阪です。"), ["東京です。", "大阪です。"]);
    }

    #[test]
    fn lower_case_continues_the_sentence() {
        assert_eq!(
            sents("She works at Yahoo! in the office. \"Why?\" she asked. 'Great.' he said."),
            [
                "She works at Yahoo! in the office.",
                "\"Why?\" she asked.",
                "'Great.' he said."
            ]
        );
    }

    #[test]
    fn line_breaks_inside_a_paragraph_are_not_boundaries() {
        assert_eq!(
            sents("The valve was\nreplaced in May.\r\nIt held\u{2028}fine."),
            ["The valve was\nreplaced in May.", "It held\u{2028}fine."]
        );
        assert_eq!(
            sents("One.\r\nTwo here.\r\n\r\nThree."),
            ["One.", "Two here.", "Three."]
        );
    }

    #[test]
    fn titles_and_inner_abbreviations_never_end_a_sentence() {
        assert_eq!(
            sents("Mr. Smith met Dr. Who and Prof. Li. Use tools, e.g. The Saw, i.e. A blade. Roe v. Wade vs. Them."),
            [
                "Mr. Smith met Dr. Who and Prof. Li.",
                "Use tools, e.g. The Saw, i.e. A blade.",
                "Roe v. Wade vs. Them."
            ]
        );
        assert_eq!(
            sents("It was a joke, Staff-Insp. Mark Ellis said."),
            ["It was a joke, Staff-Insp. Mark Ellis said."]
        );
    }

    #[test]
    fn numbered_abbreviations_join_before_numbers() {
        assert_eq!(
            sents("Please turn to p. 55. See Fig. 3 and Vol. II on pp. 10-12. No. 4 was fine. I said no. The end."),
            [
                "Please turn to p. 55.",
                "See Fig. 3 and Vol. II on pp. 10-12.",
                "No. 4 was fine.",
                "I said no.",
                "The end."
            ]
        );
        assert_eq!(
            sents("It was Sept. 12 at N°. 1026.253.553. That is where."),
            ["It was Sept. 12 at N°. 1026.253.553.", "That is where."]
        );
    }

    #[test]
    fn ambiguous_abbreviations_end_before_sentence_starters() {
        assert_eq!(
            sents("They closed the deal with Pitt, Briggs & Co. It closed yesterday. Ask Jane and co. at noon."),
            [
                "They closed the deal with Pitt, Briggs & Co.",
                "It closed yesterday.",
                "Ask Jane and co. at noon."
            ]
        );
        assert_eq!(
            sents("I live in the U.S. How about you? I work for the U.S. Government. St. Michael's is on Main St. The house is red."),
            [
                "I live in the U.S.",
                "How about you?",
                "I work for the U.S. Government.",
                "St. Michael's is on Main St.",
                "The house is red."
            ]
        );
    }

    #[test]
    fn a_title_after_an_ambiguous_abbreviation_needs_a_full_sentence_before_it() {
        assert_eq!(
            sents("At 5 a.m. Mr. Smith went to the bank. He left the bank at 6 P.M. Mr. Smith then went home."),
            [
                "At 5 a.m. Mr. Smith went to the bank.",
                "He left the bank at 6 P.M.",
                "Mr. Smith then went home."
            ]
        );
    }

    #[test]
    fn etc_ends_a_sentence_before_any_capitalised_word() {
        // No Golden Rule covers "etc." before a capital, so the choice is ours: mid-sentence
        // "etc." is nearly always followed by lower case or punctuation.
        assert_eq!(
            sents("Bring pens, paper, etc. John will bring the rest. Apples, etc. are fine."),
            [
                "Bring pens, paper, etc.",
                "John will bring the rest.",
                "Apples, etc. are fine."
            ]
        );
    }

    #[test]
    fn initials_join_unless_a_sentence_starter_follows() {
        assert_eq!(
            sents("My name is Jonas E. Smith. J. T. Abernethy came. We make a good team, you and I. Did you see Albert I. Jones?"),
            [
                "My name is Jonas E. Smith.",
                "J. T. Abernethy came.",
                "We make a good team, you and I.",
                "Did you see Albert I. Jones?"
            ]
        );
    }

    #[test]
    fn decimals_versions_and_money_stay_whole() {
        assert_eq!(
            sents("Upgrade to v1.2.3 now. It costs $100.00. Pi is 3.14 or so."),
            [
                "Upgrade to v1.2.3 now.",
                "It costs $100.00.",
                "Pi is 3.14 or so."
            ]
        );
    }

    #[test]
    fn list_numbering_belongs_to_the_item() {
        assert_eq!(sents("1. The first item."), ["1. The first item."]);
        assert_eq!(sents("- 2. The second."), ["- 2. The second."]);
        assert_eq!(
            sents("1.1. What is this FAQ? It is a list."),
            ["1.1. What is this FAQ?", "It is a list."]
        );
        assert_eq!(sents("A. The first option."), ["A. The first option."]);
    }

    #[test]
    fn inline_lists_cut_before_the_next_label() {
        assert_eq!(
            sents("1) The first item 2) The second item 3) The third"),
            ["1) The first item", "2) The second item", "3) The third"]
        );
        assert_eq!(sents("1.) One. 2.) Two."), ["1.) One.", "2.) Two."]);
        assert_eq!(
            sents("a. The first item b. The second item c. The third"),
            ["a. The first item", "b. The second item", "c. The third"]
        );
        assert_eq!(
            sents("• 9. The first item • 10. The second item"),
            ["• 9. The first item", "• 10. The second item"]
        );
        assert_eq!(sents("⁃9. First ⁃10. Second"), ["⁃9. First", "⁃10. Second"]);
        // Only the next label in sequence counts; Markdown bullets never run inline.
        assert_eq!(
            sents("1. Mix 2 cups with 3) of them"),
            ["1. Mix 2 cups with 3) of them"]
        );
        assert_eq!(sents("- Range 5 - 10 works"), ["- Range 5 - 10 works"]);
    }

    #[test]
    fn ellipses() {
        // Three dots before lower case, before "I", or in brackets: no end.
        assert_eq!(
            sents("I wasn’t really ... well, what I mean...see . . . the thing is . . . I didn’t mean it."),
            ["I wasn’t really ... well, what I mean...see . . . the thing is . . . I didn’t mean it."]
        );
        assert_eq!(
            sents("\"Bohr [...] used stairways [...]\" (Smith 55). Next."),
            ["\"Bohr [...] used stairways [...]\" (Smith 55).", "Next."]
        );
        // Before another capital, three dots end the sentence, '…' included.
        assert_eq!(
            sents("He paused... Then he left. She waited… Nobody came."),
            [
                "He paused...",
                "Then he left.",
                "She waited…",
                "Nobody came."
            ]
        );
        // Four dots: an ellipsis and a period.
        assert_eq!(
            sents("I never meant that.... She left. It ends with a period . . . . Next one."),
            [
                "I never meant that....",
                "She left.",
                "It ends with a period . . . .",
                "Next one."
            ]
        );
        // A period on the word, then a spaced ellipsis: the omission opens the next sentence.
        assert_eq!(
            sents("They used compounds. . . . The practice was not abandoned. . . ."),
            [
                "They used compounds.",
                ". . . The practice was not abandoned. . . ."
            ]
        );
    }

    #[test]
    fn urls_and_email_addresses_are_never_cut() {
        assert_eq!(
            sents("Her email is Jane.Doe@example.com. I sent one. See https://a.example.org/x?Q=1&r=2!Yes and www.Example.com/A.B now."),
            [
                "Her email is Jane.Doe@example.com.",
                "I sent one.",
                "See https://a.example.org/x?Q=1&r=2!Yes and www.Example.com/A.B now."
            ]
        );
        assert_eq!(
            sents("The site is: https://www.example.50.com/new-site/awesome_content.html. Please check it."),
            ["The site is: https://www.example.50.com/new-site/awesome_content.html.", "Please check it."]
        );
        assert_eq!(
            sents("Read README.Debian first."),
            ["Read README.Debian first."]
        );
        assert_eq!(
            sents("Get http://x.org/a...B or mail me@x.org?Subject=Hi now."),
            ["Get http://x.org/a...B or mail me@x.org?Subject=Hi now."]
        );
    }

    #[test]
    fn brackets_quotes_and_emphasis_close_with_their_sentence() {
        assert_eq!(
            sents("He teaches science (He worked for 5 years as an engineer.) at the University."),
            ["He teaches science (He worked for 5 years as an engineer.) at the University."]
        );
        assert_eq!(
            sents("**Note.** The end is near. _Really._ Yes. It is 90 (?) Years."),
            [
                "**Note.**",
                "The end is near.",
                "_Really._",
                "Yes.",
                "It is 90 (?) Years."
            ]
        );
        assert_eq!(sents("Hello!! Long time. !!"), ["Hello!!", "Long time. !!"]);
    }

    #[test]
    fn segment_links_sentences_to_paragraphs() {
        let t = "# Head\n\nOne. Two.\n\n- Three.\n```\nfour\n```";
        let s = segment(t);
        assert_eq!(s.sentence_paragraph, [0, 1, 1, 2, 3, 3, 3]);
        assert_eq!(s.paragraphs, paragraphs(t));
        assert_eq!(s.sentences, sentences(t));
        assert_eq!(segment(""), Segments::default());
    }

    #[test]
    fn line_numbers() {
        let t = "a\nb\r\nc";
        assert_eq!(line_of(t, 0), 1);
        assert_eq!(line_of(t, 2), 2);
        assert_eq!(line_of(t, 5), 3);
        assert_eq!(line_of(t, 100), 3);
    }

    #[test]
    fn word_lists_are_sorted_for_binary_search() {
        for list in [STARTERS, TITLES, INNER, NUMBERED, NUMBERED_WORDS, AMBIGUOUS] {
            assert!(
                list.windows(2).all(|w| w[0].as_bytes() < w[1].as_bytes()),
                "{list:?}"
            );
        }
        for list in [TITLES, INNER, NUMBERED, NUMBERED_WORDS, AMBIGUOUS] {
            assert!(list.iter().all(|w| w.len() <= 16 && *w == w.to_lowercase()));
        }
    }
}

#[cfg(test)]
mod props {
    use super::*;
    use proptest::prelude::*;

    const BITS: &[&str] = &[
        "word",
        "Word",
        "The",
        "I",
        "A",
        "etc.",
        "Mr.",
        "e.g.",
        "U.S.",
        "J.",
        "3.5",
        "v1.2.3",
        ".",
        "!",
        "?",
        "…",
        "...",
        ". . .",
        "\"",
        "“",
        "”",
        "'",
        "’",
        "(",
        ")",
        "[",
        "]",
        "*",
        "**",
        "_",
        "`",
        " ",
        " ",
        "  ",
        "\t",
        "\n",
        "\r\n",
        "\n\n",
        "\n \n",
        "# ",
        "## ",
        "- ",
        "* ",
        "+ ",
        "1. ",
        "2) ",
        "a) ",
        "b. ",
        "• ",
        "```",
        "~~~",
        "|",
        "===",
        "---",
        "TITLE",
        "https://x.org/a?B=1",
        "jo@x.io",
        "東京",
        "。",
        "🚂",
        "👩‍🔧",
        "é",
        "\u{2028}",
        "\u{a0}",
    ];

    /// Every invariant the splitter relies on.
    fn check(text: &str) -> Result<(), TestCaseError> {
        let s = segment(text);
        prop_assert_eq!(s.sentences.len(), s.sentence_paragraph.len());
        let mut last_end = 0;
        for p in &s.paragraphs {
            let r = &p.bytes;
            prop_assert!(r.start >= last_end && r.start < r.end, "paragraph {:?}", r);
            prop_assert!(text.is_char_boundary(r.start) && text.is_char_boundary(r.end));
            prop_assert_eq!(text[r.clone()].trim(), &text[r.clone()]);
            last_end = r.end;
        }
        let mut covered = vec![0u8; text.len()];
        let mut last_end = 0;
        let mut last_para = 0;
        for (r, &pi) in s.sentences.iter().zip(&s.sentence_paragraph) {
            prop_assert!(r.start >= last_end && r.start < r.end, "sentence {:?}", r);
            prop_assert!(text.is_char_boundary(r.start) && text.is_char_boundary(r.end));
            prop_assert_eq!(text[r.clone()].trim(), &text[r.clone()]);
            prop_assert!(pi >= last_para && pi < s.paragraphs.len());
            let p = &s.paragraphs[pi].bytes;
            prop_assert!(
                p.start <= r.start && r.end <= p.end,
                "{:?} outside {:?}",
                r,
                p
            );
            for b in r.clone() {
                covered[b] += 1;
            }
            last_end = r.end;
            last_para = pi;
        }
        for (i, c) in text.char_indices() {
            if !c.is_whitespace() {
                prop_assert_eq!(covered[i], 1, "{:?} at {} in {:?}", c, i, text);
            }
        }
        prop_assert_eq!(&s.paragraphs, &paragraphs(text));
        Ok(())
    }

    const UAX_BITS: &[&str] = &[
        "a",
        "B",
        "word",
        "Word",
        "I",
        "3",
        "42",
        " ",
        "  ",
        "\t",
        ".",
        "!",
        "?",
        "?!",
        "...",
        "…",
        "\"",
        "'",
        "“",
        "”",
        "’",
        "(",
        ")",
        "[",
        "]",
        ",",
        ";",
        ":",
        "-",
        "—",
        "。",
        "！",
        "、",
        "東",
        "é",
        "e\u{301}",
        "\u{301}",
        "\u{200d}",
        "\u{ad}",
        "🚂",
        "👩‍🔧",
        "\u{a0}",
        "\u{3000}",
        "\u{5f3}",
        "\u{964}",
        "\u{589}",
        "\u{2024}",
        "ǅ",
        "ß",
        "x.Y",
        "U.S.",
    ];

    fn whole_text_uax(flat: &str) -> Vec<usize> {
        flat.split_sentence_bound_indices()
            .skip(1)
            .map(|(i, _)| i)
            .collect()
    }

    /// No character outside `may_be_terminal` ends a sentence for UAX #29: checked over every
    /// Unicode scalar value, so the windows of `uax_candidates` miss no terminal.
    #[test]
    fn only_may_be_terminal_chars_end_sentences() {
        let mut t = String::new();
        for c in (0..=0x10FFFFu32).filter_map(char::from_u32) {
            if may_be_terminal(c) || is_line_break(c) {
                continue;
            }
            t.clear();
            t.push('x');
            t.push(c);
            t.push_str(" Y");
            assert!(
                whole_text_uax(&t).is_empty(),
                "U+{:04X} ends a sentence",
                c as u32
            );
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig { cases: 1000, .. ProptestConfig::default() })]

        #[test]
        fn sentences_cover_every_visible_char_once(
            parts in prop::collection::vec(prop::sample::select(BITS), 0..100)
        ) {
            check(&parts.concat())?;
        }

        #[test]
        fn windowed_uax_matches_whole_text_uax(
            parts in prop::collection::vec(prop::sample::select(UAX_BITS), 0..60)
        ) {
            let flat = parts.concat();
            let mut got = Vec::new();
            uax_candidates(&flat, &mut got);
            prop_assert_eq!(got, whole_text_uax(&flat), "{:?}", flat);
        }

        #[test]
        fn windowed_uax_matches_on_arbitrary_text(text in "\\PC{0,120}") {
            let flat: String = text.chars().map(|c| if is_line_break(c) { ' ' } else { c }).collect();
            let mut got = Vec::new();
            uax_candidates(&flat, &mut got);
            prop_assert_eq!(got, whole_text_uax(&flat), "{:?}", flat);
        }

        #[test]
        fn arbitrary_unicode_is_segmented_safely(text in "(\\PC|\\s){0,200}") {
            check(&text)?;
        }
    }
}
