//! Sentence and paragraph boundaries of plain text and Markdown, as byte ranges into the source.
//!
//! Paragraphs come from the line structure: blank lines, Markdown headings (ATX and setext),
//! short ALL-CAPS title lines, list items, fenced code blocks and pipe tables. Sentences come
//! from Unicode sentence boundaries (UAX #29, through unicode-segmentation) inside each
//! paragraph, then corrected by rules that UAX #29 leaves to the application: abbreviations,
//! initials, numbers, ellipses, inline list markers, continuation in lower case.
//!
//! Code blocks give one unit per line and tables one per row, so the splitter never has to
//! break a log line or a table row in the middle.
use std::ops::Range;

use unicode_segmentation::UnicodeSegmentation;

/// What kind of block a paragraph is; the splitter keeps code and tables whole where possible.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum BlockKind {
    /// Running text.
    Prose,
    /// A heading line (with its underline, for setext headings).
    Heading,
    /// One list item with its continuation lines.
    ListItem,
    /// A fenced code block.
    Code,
    /// Consecutive pipe-table rows.
    Table,
}

/// One paragraph: its byte range (trimmed) and kind.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Paragraph {
    /// Byte range in the source.
    pub bytes: Range<usize>,
    /// Kind of block.
    pub kind: BlockKind,
}

/// Paragraphs and sentences of one text.
#[derive(Debug, Clone, Default)]
pub struct Segments {
    /// Paragraphs in order.
    pub paragraphs: Vec<Paragraph>,
    /// Sentences in order; none crosses a paragraph boundary.
    pub sentences: Vec<Range<usize>>,
    /// Paragraph index of each sentence.
    pub sentence_paragraph: Vec<usize>,
}

/// Paragraphs in order: non-overlapping, ascending, trimmed, never empty.
pub fn paragraphs(text: &str) -> Vec<Paragraph> {
    segment(text).paragraphs
}

/// Sentences in order: non-overlapping, ascending, trimmed, never empty.
pub fn sentences(text: &str) -> Vec<Range<usize>> {
    segment(text).sentences
}

/// 1-based line number of a byte offset (counting '\n').
pub fn line_of(text: &str, byte: usize) -> usize {
    1 + text.as_bytes()[..byte.min(text.len())]
        .iter()
        .filter(|&&b| b == b'\n')
        .count()
}

fn trim_range(text: &str, r: Range<usize>) -> Option<Range<usize>> {
    let s = &text[r.clone()];
    let start = r.start + (s.len() - s.trim_start().len());
    let end = r.start + s.trim_end().len();
    (start < end).then_some(start..end)
}

// ---------------------------------------------------------------------------------------------
// Paragraphs

fn is_fence(line: &str) -> Option<&'static str> {
    let t = line.trim_start();
    if t.starts_with("```") {
        Some("```")
    } else if t.starts_with("~~~") {
        Some("~~~")
    } else {
        None
    }
}

fn is_atx_heading(line: &str) -> bool {
    let t = line.trim_start();
    let hashes = t.bytes().take_while(|&b| b == b'#').count();
    (1..=6).contains(&hashes) && t[hashes..].starts_with([' ', '\t'])
}

fn is_setext_underline(line: &str) -> bool {
    let t = line.trim();
    t.len() >= 3 && (t.bytes().all(|b| b == b'=') || t.bytes().all(|b| b == b'-'))
}

/// Length in bytes of a list marker at the start of `s` (after optional indent), with the
/// space that follows it.
fn list_marker_len(s: &str) -> Option<usize> {
    let indent = s.len() - s.trim_start().len();
    let t = &s[indent..];
    let mut chars = t.char_indices();
    let (_, c) = chars.next()?;
    let after = if matches!(c, '-' | '*' | '+' | '•' | '⁃' | '‣' | '◦') {
        c.len_utf8()
    } else {
        let digits = t.bytes().take_while(|b| b.is_ascii_digit()).count();
        let head = if (1..=3).contains(&digits) {
            digits
        } else if c.is_ascii_lowercase() && t[1..].starts_with(['.', ')']) {
            1
        } else {
            return None;
        };
        let rest = &t[head..];
        if rest.starts_with(".)") {
            head + 2
        } else if rest.starts_with(['.', ')']) {
            head + 1
        } else {
            return None;
        }
    };
    let rest = &t[after..];
    (rest.starts_with([' ', '\t'])).then_some(indent + after + 1)
}

fn is_table_row(line: &str) -> bool {
    line.trim_start().starts_with('|')
}

fn is_caps_title(line: &str) -> bool {
    let t = line.trim();
    let letters: Vec<char> = t.chars().filter(|c| c.is_alphabetic()).collect();
    t.len() <= 80
        && letters.len() >= 2
        && letters.iter().all(|c| !c.is_lowercase())
        && !t.ends_with(['.', ',', ';'])
}

fn find_paragraphs(text: &str) -> Vec<Paragraph> {
    let mut out: Vec<Paragraph> = Vec::new();
    // The paragraph being built: start, end, kind, number of lines.
    let mut cur: Option<(usize, usize, BlockKind, usize)> = None;
    let mut fence: Option<&'static str> = None;
    let flush = |cur: &mut Option<(usize, usize, BlockKind, usize)>, out: &mut Vec<Paragraph>| {
        if let Some((s, e, mut kind, lines)) = cur.take() {
            if let Some(r) = trim_range(text, s..e) {
                if kind == BlockKind::Prose && lines == 1 && is_caps_title(&text[r.clone()]) {
                    kind = BlockKind::Heading;
                }
                out.push(Paragraph { bytes: r, kind });
            }
        }
    };
    let mut pos = 0;
    for raw in text.split_inclusive('\n') {
        let (start, end) = (pos, pos + raw.len());
        pos = end;
        let line = raw.trim_end_matches(['\n', '\r']);
        if let Some(f) = fence {
            if let Some(c) = cur.as_mut() {
                c.1 = end;
            }
            if line.trim_start().starts_with(f) && line.trim().trim_start_matches(f).is_empty() {
                fence = None;
                flush(&mut cur, &mut out);
            }
            continue;
        }
        if line.trim().is_empty() {
            flush(&mut cur, &mut out);
            continue;
        }
        if let Some(f) = is_fence(line) {
            flush(&mut cur, &mut out);
            fence = Some(f);
            cur = Some((start, end, BlockKind::Code, 1));
            continue;
        }
        if is_atx_heading(line) {
            flush(&mut cur, &mut out);
            cur = Some((start, end, BlockKind::Heading, 1));
            flush(&mut cur, &mut out);
            continue;
        }
        if is_setext_underline(line) {
            if let Some((_, _, BlockKind::Prose, 1)) = cur {
                let c = cur.as_mut().expect("checked");
                c.1 = end;
                c.2 = BlockKind::Heading;
                flush(&mut cur, &mut out);
                continue;
            }
        }
        if is_table_row(line) {
            match cur.as_mut() {
                Some(c) if c.2 == BlockKind::Table => {
                    c.1 = end;
                    c.3 += 1;
                }
                _ => {
                    flush(&mut cur, &mut out);
                    cur = Some((start, end, BlockKind::Table, 1));
                }
            }
            continue;
        }
        if list_marker_len(line).is_some() {
            flush(&mut cur, &mut out);
            cur = Some((start, end, BlockKind::ListItem, 1));
            continue;
        }
        match cur.as_mut() {
            Some(c) if matches!(c.2, BlockKind::Prose | BlockKind::ListItem) => {
                c.1 = end;
                c.3 += 1;
            }
            _ => {
                flush(&mut cur, &mut out);
                cur = Some((start, end, BlockKind::Prose, 1));
            }
        }
    }
    flush(&mut cur, &mut out);
    out
}

// ---------------------------------------------------------------------------------------------
// Sentences

/// Abbreviations that do not end a sentence whatever follows (lower-case, without the period).
const PREPOSITIVE: &[&str] = &[
    "mr", "mrs", "ms", "dr", "prof", "st", "mt", "capt", "gen", "rev", "sen", "rep", "gov", "lt",
    "col", "sgt", "fig", "figs", "vol", "vols", "pp", "p", "vs", "cf", "approx", "ca", "e.g",
    "i.e", "eq", "eqs", "no", "nos", "dept", "est", "ft", "in", "al", "ref", "sec", "ch", "op",
    "ed", "eds", "n°", "viz",
];

/// Abbreviations that may also end a sentence: they end one when a sentence starter follows.
const AMBIGUOUS: &[&str] = &[
    "co", "inc", "ltd", "corp", "jr", "sr", "etc", "bros", "a.m", "p.m", "u.s", "u.s.a", "u.k",
    "e.u", "mins", "hrs", "km", "kg", "lb", "lbs", "oz", "yd", "yds", "mph", "psi",
];

/// Words that commonly begin a sentence (capitalised forms).
const STARTERS: &[&str] = &[
    "A", "An", "The", "I", "It", "He", "She", "We", "They", "You", "This", "That", "These",
    "Those", "There", "Here", "What", "Where", "When", "Why", "How", "Who", "Which", "Did", "Do",
    "Does", "Is", "Are", "Was", "Were", "Can", "Could", "Will", "Would", "Should", "If", "In",
    "On", "At", "But", "And", "So", "Then", "My", "Our", "Your", "His", "Her", "Their", "Its",
    "Please", "After", "Before", "All", "As", "For", "From", "No", "Not", "One", "Some", "Yes",
    "Let", "Let's", "Now", "Once", "When", "While", "With", "Each", "Every", "Both", "Many",
    "Most", "Our",
];

/// The last word of a segment (before its trailing whitespace), with its final period.
fn last_word(seg: &str) -> &str {
    let t = seg.trim_end();
    let start = t
        .rfind(|c: char| c.is_whitespace() || c == '(' || c == '"' || c == '“')
        .map_or(0, |i| i + t[i..].chars().next().map_or(1, |c| c.len_utf8()));
    &t[start..]
}

/// The first word of a segment, stripped of opening quotes and brackets.
fn first_word(seg: &str) -> &str {
    let t = seg
        .trim_start()
        .trim_start_matches(['"', '\'', '“', '‘', '(', '[']);
    let end = t.find(|c: char| c.is_whitespace()).unwrap_or(t.len());
    t[..end].trim_end_matches([',', ';', ':', '?', '!', '.'])
}

/// Should the boundary between `a` (ending) and `b` (starting) be removed?
fn joins(a: &str, b: &str) -> bool {
    let b_trim = b.trim_start();
    let Some(b0) = b_trim.chars().next() else {
        return true;
    };
    // Continuation in lower case, or a fragment of pure punctuation (". . ." runs, closing marks).
    if b0.is_lowercase() || !b_trim.chars().any(|c| c.is_alphanumeric()) {
        return true;
    }
    // A short bracketed citation closing the sentence: `… [...]" (Smith 55).`
    if b0 == '('
        && b_trim.len() <= 30
        && b_trim.trim_end().ends_with([')', '.'])
        && !b_trim[1..].contains('(')
    {
        let inner = b_trim.trim_end().trim_end_matches('.');
        if inner.ends_with(')') && a.trim_end().ends_with(['"', '”', ']', '\'', '’', '.']) {
            return true;
        }
    }
    let at = a.trim_end();
    if !at.ends_with('.') {
        return false;
    }
    let word = last_word(at);
    let bare = word.trim_end_matches('.');
    let lower = bare.to_lowercase();
    let next = first_word(b_trim);
    let starter = STARTERS.contains(&next);
    let digit_next = b0.is_ascii_digit();
    if PREPOSITIVE.contains(&lower.as_str()) {
        return digit_next
            || !starter
            || ["mr", "mrs", "ms", "dr", "prof", "st", "mt", "capt", "rev"]
                .contains(&lower.as_str());
    }
    if AMBIGUOUS.contains(&lower.as_str()) {
        return !starter;
    }
    // Single capital initial: "Jonas E. Smith" (but "you and I. Did you…" ends a sentence).
    let mut cs = bare.chars();
    if let (Some(c), None) = (cs.next(), cs.next()) {
        if c.is_uppercase() {
            return !starter;
        }
    }
    // Dotted acronyms (U.N., N.A.S.A.) behave like the ambiguous list.
    if bare.len() >= 3
        && bare
            .split('.')
            .all(|p| p.chars().count() == 1 && p.chars().all(char::is_alphabetic))
    {
        return !starter;
    }
    false
}

/// Byte length of a trailing inline list marker (` 2.`, ` • 10.`, ` b.`, ` 2.)`), if any.
fn trailing_marker(a: &str) -> Option<usize> {
    let t = a.trim_end();
    let ws = t.rfind(char::is_whitespace)?;
    let mut start = ws + 1;
    // A bullet standing alone before the number: "• 10."
    let before = t[..ws].trim_end();
    if let Some(b) = before
        .chars()
        .last()
        .filter(|c| matches!(c, '•' | '⁃' | '‣' | '◦'))
    {
        let b_at = before.len() - b.len_utf8();
        if before[..b_at].ends_with(char::is_whitespace) || b_at == 0 {
            start = b_at;
        }
    }
    let marker = &t[start..];
    let core = marker.trim_start_matches(['•', '⁃', '‣', '◦', ' ']);
    let head = core.trim_end_matches(['.', ')']);
    let tail = &core[head.len()..];
    let ok_head = (!head.is_empty() && head.len() <= 3 && head.bytes().all(|b| b.is_ascii_digit()))
        || (head.chars().count() == 1 && head.chars().all(|c| c.is_ascii_lowercase()));
    (ok_head && matches!(tail, "." | ")" | ".)")).then_some(a.len() - start)
}

fn starts_with_marker(s: &str) -> bool {
    let t = s
        .trim_start()
        .trim_start_matches(['•', '⁃', '‣', '◦'])
        .trim_start();
    list_marker_len(t).is_some() || {
        // "⁃9. The" (bullet glued to the number)
        let head = t.bytes().take_while(|b| b.is_ascii_digit()).count();
        head > 0 && t[head..].starts_with(['.', ')'])
    }
}

fn is_marker_only(s: &str) -> bool {
    let t = s.trim();
    !t.is_empty()
        && t.len() <= 8
        && starts_with_marker(&format!("{t} x"))
        && !t
            .chars()
            .any(|c| c.is_alphabetic() && !c.is_ascii_lowercase())
        && t.chars().filter(|c| c.is_alphabetic()).count() <= 1
}

/// Sentence ranges inside one prose or list paragraph (absolute offsets).
fn prose_sentences(text: &str, para: Range<usize>, out: &mut Vec<Range<usize>>) {
    let src = &text[para.clone()];
    // Single line breaks inside a paragraph are not boundaries: UAX #29 would break at every one,
    // so segment a copy with them turned into spaces (same byte length, same offsets).
    let flat: String = src
        .chars()
        .map(|c| if c == '\n' || c == '\r' { ' ' } else { c })
        .collect();
    let mut cuts: Vec<usize> = flat
        .split_sentence_bound_indices()
        .map(|(i, _)| i)
        .skip(1)
        .collect();
    cuts.push(flat.len());
    let list_like = starts_with_marker(&flat);
    let mut segs: Vec<Range<usize>> = Vec::new();
    let mut start = 0;
    for &c in &cuts {
        segs.push(start..c);
        start = c;
    }
    // Merge pass.
    let mut merged: Vec<Range<usize>> = Vec::new();
    for s in segs {
        match merged.last_mut() {
            Some(prev)
                if joins(&flat[prev.clone()], &flat[s.clone()])
                    || is_marker_only(&flat[prev.clone()]) =>
            {
                prev.end = s.end
            }
            _ => merged.push(s),
        }
    }
    // Inline list markers: "… first item 2. The second item" splits before "2.", not after.
    if list_like {
        for i in 0..merged.len().saturating_sub(1) {
            let a = &flat[merged[i].clone()];
            if let Some(m) = trailing_marker(a) {
                let cut = merged[i].end - m;
                if cut > merged[i].start {
                    merged[i].end = cut;
                    merged[i + 1].start = cut;
                }
            }
        }
    }
    for s in merged {
        if let Some(r) = trim_range(text, para.start + s.start..para.start + s.end) {
            out.push(r);
        }
    }
}

/// Paragraphs, then sentences with the paragraph of each.
pub fn segment(text: &str) -> Segments {
    let paragraphs = find_paragraphs(text);
    let mut sentences = Vec::new();
    let mut sentence_paragraph = Vec::new();
    for (pi, p) in paragraphs.iter().enumerate() {
        let before = sentences.len();
        match p.kind {
            BlockKind::Code | BlockKind::Table => {
                let mut pos = p.bytes.start;
                for line in text[p.bytes.clone()].split_inclusive('\n') {
                    if let Some(r) = trim_range(text, pos..pos + line.len()) {
                        sentences.push(r);
                    }
                    pos += line.len();
                }
            }
            BlockKind::Heading => sentences.push(p.bytes.clone()),
            BlockKind::Prose | BlockKind::ListItem => {
                prose_sentences(text, p.bytes.clone(), &mut sentences)
            }
        }
        sentence_paragraph.extend(std::iter::repeat_n(pi, sentences.len() - before));
    }
    Segments {
        paragraphs,
        sentences,
        sentence_paragraph,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sents(t: &str) -> Vec<&str> {
        sentences(t).into_iter().map(|r| &t[r]).collect()
    }

    #[test]
    fn abbreviations_initials_and_numbers() {
        assert_eq!(
            sents("Mr. J. T. Abernethy measured approx. 3.5 mm on No. 4. It was fine."),
            [
                "Mr. J. T. Abernethy measured approx. 3.5 mm on No. 4.",
                "It was fine."
            ]
        );
        assert_eq!(
            sents("See Fig. 3 for e.g. the tubes. Then stop."),
            ["See Fig. 3 for e.g. the tubes.", "Then stop."]
        );
    }

    #[test]
    fn line_breaks_inside_a_paragraph_are_not_boundaries() {
        assert_eq!(
            sents("The valve was\nreplaced in May.\nIt held."),
            ["The valve was\nreplaced in May.", "It held."]
        );
    }

    #[test]
    fn quotes_and_lowercase_continuation() {
        assert_eq!(
            sents("He said \"Stop.\" Then he left."),
            ["He said \"Stop.\"", "Then he left."]
        );
        assert_eq!(
            sents("She works at Yahoo! in the office."),
            ["She works at Yahoo! in the office."]
        );
    }

    #[test]
    fn paragraphs_of_markdown_and_plain_text() {
        let t = "# Title\n\nFirst para\ncontinues.\n\n- item one\n  wraps\n- item two\n\n```\nlog 1\n\nlog 2\n```\n| a | b |\n|---|---|\n\nREPORT SUMMARY\n\nPlain\n=====\n";
        let p = paragraphs(t);
        let kinds: Vec<BlockKind> = p.iter().map(|p| p.kind).collect();
        use BlockKind::*;
        assert_eq!(
            kinds,
            [Heading, Prose, ListItem, ListItem, Code, Table, Heading, Heading]
        );
        assert_eq!(&t[p[2].bytes.clone()], "- item one\n  wraps");
        let s = segment(t);
        let code: Vec<&str> = s
            .sentences
            .iter()
            .zip(&s.sentence_paragraph)
            .filter(|(_, &pi)| p[pi].kind == Code)
            .map(|(r, _)| &t[r.clone()])
            .collect();
        assert_eq!(code, ["```", "log 1", "log 2", "```"]);
    }

    #[test]
    fn crlf_text() {
        let t = "One.\r\nTwo here.\r\n\r\nThree.";
        assert_eq!(sents(t), ["One.", "Two here.", "Three."]);
        assert_eq!(paragraphs(t).len(), 2);
    }

    #[test]
    fn line_numbers() {
        assert_eq!(line_of("a\nb\nc", 0), 1);
        assert_eq!(line_of("a\nb\nc", 4), 3);
    }
}

#[cfg(test)]
mod props {
    use super::*;
    use proptest::prelude::*;

    const BITS: &[&str] = &[
        "word",
        "Mr.",
        "e.g.",
        "3.5",
        "J.",
        "I",
        "etc.",
        ".",
        "!",
        "?",
        "…",
        "...",
        ". . .",
        "\"",
        "“",
        "”",
        "(",
        ")",
        "[",
        "]",
        " ",
        " ",
        "  ",
        "\n",
        "\r\n",
        "\n\n",
        "# ",
        "- ",
        "1. ",
        "a) ",
        "```",
        "|",
        "東京",
        "🚂",
        "👩‍🔧",
        "A",
        "The",
        "=====",
        "TITLE",
    ];

    proptest! {
        #![proptest_config(ProptestConfig { cases: 400, .. ProptestConfig::default() })]
        #[test]
        fn sentences_cover_every_visible_char_once(parts in prop::collection::vec(prop::sample::select(BITS), 0..80)) {
            let text: String = parts.concat();
            let s = segment(&text);
            let mut covered = vec![0u8; text.len()];
            let mut last_end = 0;
            for (r, &pi) in s.sentences.iter().zip(&s.sentence_paragraph) {
                prop_assert!(r.start >= last_end && r.start < r.end, "ascending, non-empty: {:?}", r);
                prop_assert!(text.is_char_boundary(r.start) && text.is_char_boundary(r.end));
                let p = &s.paragraphs[pi].bytes;
                prop_assert!(p.start <= r.start && r.end <= p.end, "sentence inside its paragraph");
                prop_assert_eq!(text[r.clone()].trim(), &text[r.clone()]);
                for b in r.clone() { covered[b] += 1; }
                last_end = r.end;
            }
            for (i, c) in text.char_indices() {
                if !c.is_whitespace() {
                    prop_assert_eq!(covered[i], 1, "char {:?} at {} covered {} times in {:?}", c, i, covered[i], text);
                }
            }
        }
    }
}
