//! Paragraphs from the line structure alone: blank lines, Markdown headings (ATX and setext),
//! short ALL-CAPS title lines, list items with their continuation lines, fenced code blocks and
//! pipe tables; and the one-unit-per-line split of code blocks and tables.
use std::ops::Range;

use super::{trim_range, BlockKind, Paragraph};

// ---------------------------------------------------------------------------------------------
// Paragraphs

/// An opening code fence: its character and run length (a closing fence must be at least as
/// long).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) struct Fence {
    ch: u8,
    len: usize,
}

/// The paragraph being built.
#[derive(Debug)]
pub(super) struct Open {
    start: usize,
    end: usize,
    kind: BlockKind,
    lines: usize,
}

/// What one line (outside a code fence) can be.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Line {
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

pub(super) fn classify_line(line: &str) -> Line {
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

pub(super) fn find_paragraphs(text: &str) -> Vec<Paragraph> {
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
pub(super) fn close(text: &str, open: &mut Option<Open>, out: &mut Vec<Paragraph>) {
    if let Some(o) = open.take() {
        let mut kind = o.kind;
        if kind == BlockKind::Prose && o.lines == 1 && is_caps_title(&text[o.start..o.end]) {
            kind = BlockKind::Heading;
        }
        push(text, o.start..o.end, kind, out);
    }
}

pub(super) fn push(text: &str, range: Range<usize>, kind: BlockKind, out: &mut Vec<Paragraph>) {
    if let Some(bytes) = trim_range(text, range) {
        out.push(Paragraph { bytes, kind });
    }
}

/// Leading spaces of a line (tabs count as one; CommonMark's 4-column tab stop is not needed
/// for the "at most three" checks below to be useful).
pub(super) fn indent_of(line: &str) -> usize {
    line.len() - line.trim_start_matches([' ', '\t']).len()
}

/// ```` ``` ```` or `~~~` (three or more) opening a fenced code block, at any indent so that
/// fences inside list items count. A backtick fence's info string cannot hold a backtick, so an
/// inline span like ```` ```x``` ```` is not a fence.
pub(super) fn opening_fence(line: &str) -> Option<Fence> {
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

pub(super) fn closes_fence(line: &str, fence: Fence) -> bool {
    let t = line.trim();
    t.len() >= fence.len && t.bytes().all(|b| b == fence.ch)
}

/// `#` to `######` followed by a space, a tab or the end of the line, indented at most three.
pub(super) fn is_atx_heading(line: &str) -> bool {
    if indent_of(line) > 3 {
        return false;
    }
    let t = line.trim_start();
    let hashes = t.bytes().take_while(|&b| b == b'#').count();
    (1..=6).contains(&hashes) && (t.len() == hashes || t[hashes..].starts_with([' ', '\t']))
}

/// A run of `=` or `-` (two or more) under a line of text, indented at most three.
pub(super) fn is_setext_underline(line: &str) -> bool {
    let t = line.trim();
    indent_of(line) <= 3
        && t.len() >= 2
        && (t.bytes().all(|b| b == b'=') || t.bytes().all(|b| b == b'-'))
}

/// `---`, `***`, `___` (spaces allowed between) or a run of three or more `=`: a rule line.
pub(super) fn is_thematic_break(line: &str) -> bool {
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

pub(super) fn is_table_row(line: &str) -> bool {
    line.trim_start().starts_with('|')
}

/// Bullet characters of plain-text lists (besides Markdown's `-`, `*`, `+`).
pub(super) fn is_bullet(c: char) -> bool {
    matches!(c, '•' | '‣' | '⁃' | '◦' | '▪' | '●')
}

/// A list marker at the start of a line (any indent) followed by whitespace or the end of the
/// line: `-`, `*`, `+`, a bullet, `1.`, `1)`, `1.)`, `1.2.`, `a.`, `a)`. Returns whether the
/// item may interrupt a prose paragraph (bullets, and ordered items starting at 1 or a).
pub(super) fn list_marker(line: &str) -> Option<bool> {
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
pub(super) fn ordered_label(t: &str) -> Option<(usize, bool)> {
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
pub(super) fn is_caps_title(line: &str) -> bool {
    let t = line.trim();
    let mut upper = 0;
    for c in t.chars() {
        // Lower case, or a letter of a script without case (Han, Arabic, Devanagari): "完成。
        // 如果没有及时输入 PIN，请返回" holds capitals but is no title.
        if c.is_alphabetic() && !c.is_uppercase() {
            return false;
        }
        upper += usize::from(c.is_uppercase());
    }
    upper >= 2 && t.chars().count() <= 80 && !t.ends_with(['.', ',', ';'])
}

// ---------------------------------------------------------------------------------------------
// Units of code blocks and tables

/// One unit per non-blank line.
pub(super) fn line_units(text: &str, para: Range<usize>, out: &mut Vec<Range<usize>>) {
    let mut pos = para.start;
    for line in text[para].split_inclusive('\n') {
        if let Some(r) = trim_range(text, pos..pos + line.len()) {
            out.push(r);
        }
        pos += line.len();
    }
}
