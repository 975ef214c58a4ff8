//! PDF files as plain text with pages and headings, so long PDF documents can be planned and cut
//! like any other text.
//!
//! A PDF holds glyphs at positions, not paragraphs. This module reads the text layer page by page
//! (glyphs decoded by `pdf-extract`, the file read by `lopdf`), rebuilds lines from the glyphs'
//! baselines and paragraphs from the gaps and indents between lines, and then cleans what
//! typesetting added: running headers and footers that repeat on most pages (page numbers too)
//! are dropped and reported, and words hyphenated at a line end are joined when the document's
//! own words say the joined form is the word. Headings come from the document outline
//! (bookmarks), placed where their titles are on their destination pages; without an outline
//! there are no headings (font sizes are not guessed from).
//!
//! The pure steps work on plain data and are tested on their own: [`lines_from_glyphs`],
//! [`blocks_from_lines`], [`running_lines`], [`join_hyphens`] and [`place_heading`].
//!
//! Encrypted PDFs are refused, even those an empty user password opens: kerf says so and the
//! user decrypts the file knowingly. A PDF reader can panic on a malformed file, so every call
//! into one runs under `catch_unwind` and a panic becomes [`ExtractError::Broken`]. The default
//! panic hook still prints its message for such a panic: silencing it would mean swapping the
//! process-wide hook, which races other threads.
use std::collections::{HashMap, HashSet};
use std::ops::Range;
use std::panic::{catch_unwind, AssertUnwindSafe};

use lopdf::{Dictionary, Document, Object, ObjectId};
use pdf_extract::{MediaBox, OutputDev, OutputError, Transform};

use super::{ExtractError, ExtractReport, Extracted, Heading};

/// Extract a PDF's text layer page by page in reading order.
///
/// `origin` names the file in errors. Paragraphs are one line each and are separated by a blank
/// line, as are pages; `pages[i]` is the byte range of page i+1's text (empty for a page without
/// text). Headings come from the outline, in document order.
pub fn extract(bytes: &[u8], origin: &str) -> Result<Extracted, ExtractError> {
    let broken = |detail: String| ExtractError::Broken {
        origin: origin.to_string(),
        detail,
    };
    if !bytes.starts_with(b"%PDF") {
        // Some writers put junk before the header; the specification allows it within 1024 bytes.
        let head = &bytes[..bytes.len().min(1024)];
        if !head.windows(5).any(|w| w == b"%PDF-") {
            return Err(broken("not a PDF (no %PDF header)".into()));
        }
    }
    let doc = match guarded(|| Document::load_mem(bytes)) {
        Err(message) => return Err(broken(reader_failed(&message))),
        Ok(Err(e)) => {
            if has_encrypt_entry(bytes) {
                return Err(ExtractError::Encrypted {
                    origin: origin.to_string(),
                });
            }
            return Err(broken(format!("damaged: {e}")));
        }
        Ok(Ok(doc)) => doc,
    };
    if doc.trailer.get(b"Encrypt").is_ok() || doc.was_encrypted() {
        return Err(ExtractError::Encrypted {
            origin: origin.to_string(),
        });
    }
    let page_ids = match guarded(|| doc.get_pages()) {
        Ok(p) => p,
        Err(message) => return Err(broken(reader_failed(&message))),
    };
    if page_ids.is_empty() {
        return Err(broken("damaged: no pages".into()));
    }
    let page_count = page_ids.len();

    // Glyphs → lines, page by page.
    let mut page_lines: Vec<Vec<Line>> = Vec::with_capacity(page_count);
    for &number in page_ids.keys() {
        let mut sink = GlyphSink::default();
        match guarded(|| pdf_extract::output_doc_page(&doc, &mut sink, number)) {
            Err(message) => return Err(broken(reader_failed(&message))),
            Ok(Err(e)) => return Err(broken(format!("damaged: page {number}: {e}"))),
            Ok(Ok(())) => {}
        }
        page_lines.push(lines_from_glyphs(&sink.glyphs));
    }

    // Running headers and footers.
    let texts: Vec<Vec<String>> = page_lines
        .iter()
        .map(|lines| lines.iter().map(|l| l.text.clone()).collect())
        .collect();
    let running = running_lines(&texts);
    let kept: Vec<Vec<Line>> = page_lines
        .into_iter()
        .zip(&running.drop)
        .map(|(lines, drop)| {
            lines
                .into_iter()
                .zip(drop)
                .filter(|(_, d)| !**d)
                .map(|(l, _)| l)
                .collect()
        })
        .collect();

    // Lines → paragraphs, hyphens joined, pages assembled.
    let blocks: Vec<Vec<Vec<String>>> = kept.iter().map(|l| blocks_from_lines(l)).collect();
    let (paragraphs, joined) = join_hyphens(&blocks);
    let mut text = String::new();
    let mut pages = Vec::with_capacity(page_count);
    let mut empty_pages = 0;
    for page in &paragraphs {
        if page.is_empty() {
            empty_pages += 1;
            pages.push(text.len()..text.len());
            continue;
        }
        if !text.is_empty() {
            text.push_str("\n\n");
        }
        let start = text.len();
        text.push_str(&page.join("\n\n"));
        pages.push(start..text.len());
    }
    if text.is_empty() {
        return Err(ExtractError::NoText {
            origin: origin.to_string(),
            pages: page_count,
        });
    }

    // Headings from the outline.
    let page_of: HashMap<ObjectId, usize> = page_ids
        .iter()
        .enumerate()
        .map(|(i, (_, id))| (*id, i))
        .collect();
    let entries = guarded(|| outline(&doc, &page_of)).unwrap_or_default();
    let headings = place_headings(&text, &pages, &entries);

    let title = guarded(|| info_title(&doc)).ok().flatten();
    Ok(Extracted {
        text,
        headings,
        pages,
        title,
        report: ExtractReport {
            pages: page_count,
            empty_pages,
            dropped_chars: running.dropped_chars,
            dropped: running.dropped,
            joined_hyphens: joined,
        },
    })
}

/// Run a PDF library call, turning a panic into its message.
fn guarded<T>(f: impl FnOnce() -> T) -> Result<T, String> {
    catch_unwind(AssertUnwindSafe(f)).map_err(|payload| {
        if let Some(s) = payload.downcast_ref::<&str>() {
            (*s).to_string()
        } else if let Some(s) = payload.downcast_ref::<String>() {
            s.clone()
        } else {
            "a panic without a message".to_string()
        }
    })
}

/// The detail of a `Broken` error for a reader that panicked.
fn reader_failed(message: &str) -> String {
    format!("the PDF reader failed on it: {message}")
}

/// Whether the raw file names an /Encrypt dictionary (used when the reader could not load it).
fn has_encrypt_entry(bytes: &[u8]) -> bool {
    bytes.windows(8).any(|w| w == b"/Encrypt")
}

/// One glyph as placed on the page (PDF user space: y grows upwards).
#[derive(Debug, Clone, PartialEq)]
pub struct Glyph {
    /// Left edge.
    pub x: f64,
    /// Baseline.
    pub y: f64,
    /// Font size on the page.
    pub size: f64,
    /// Where the glyph's advance ends.
    pub end: f64,
    /// The text it decodes to.
    pub text: String,
}

/// A line of text rebuilt from glyphs on one baseline.
#[derive(Debug, Clone, PartialEq)]
pub struct Line {
    /// The line's text, single-spaced, without leading or trailing spaces.
    pub text: String,
    /// Left edge.
    pub x0: f64,
    /// Right edge.
    pub x1: f64,
    /// Baseline.
    pub y: f64,
    /// Largest font size on the line.
    pub size: f64,
}

/// Collects the glyphs of one page from pdf-extract.
#[derive(Default)]
struct GlyphSink {
    glyphs: Vec<Glyph>,
}

impl OutputDev for GlyphSink {
    fn begin_page(
        &mut self,
        _page_num: u32,
        _media_box: &MediaBox,
        _art_box: Option<(f64, f64, f64, f64)>,
    ) -> Result<(), OutputError> {
        Ok(())
    }
    fn end_page(&mut self) -> Result<(), OutputError> {
        Ok(())
    }
    fn output_character(
        &mut self,
        trm: &Transform,
        width: f64,
        _spacing: f64,
        font_size: f64,
        char: &str,
    ) -> Result<(), OutputError> {
        let scale = (trm.m11 * trm.m22 - trm.m12 * trm.m21).abs().sqrt();
        let size = font_size * scale;
        let (x, y) = (trm.m31, trm.m32);
        if x.is_finite() && y.is_finite() && size.is_finite() {
            self.glyphs.push(Glyph {
                x,
                y,
                size,
                end: x + width * size,
                text: char.to_string(),
            });
        }
        Ok(())
    }
    fn begin_word(&mut self) -> Result<(), OutputError> {
        Ok(())
    }
    fn end_word(&mut self) -> Result<(), OutputError> {
        Ok(())
    }
    fn end_line(&mut self) -> Result<(), OutputError> {
        Ok(())
    }
}

/// Typographic ligatures spelled out, so that "ﬁle" is the word "file".
fn expand_ligature(c: char) -> Option<&'static str> {
    Some(match c {
        '\u{fb00}' => "ff",
        '\u{fb01}' => "fi",
        '\u{fb02}' => "fl",
        '\u{fb03}' => "ffi",
        '\u{fb04}' => "ffl",
        '\u{fb05}' | '\u{fb06}' => "st",
        _ => return None,
    })
}

/// Rebuild lines from glyphs in content-stream order: a glyph whose baseline moves by more than
/// half its size, or that jumps far back to the left, starts a new line; a horizontal gap wider
/// than 0.15 of the font size (or a space glyph) is a space.
pub fn lines_from_glyphs(glyphs: &[Glyph]) -> Vec<Line> {
    let mut lines = Vec::new();
    let mut cur: Option<Line> = None;
    let mut last_end = 0.0;
    let mut pending_space = false;
    for g in glyphs {
        let size = if g.size > 0.0 { g.size } else { 1.0 };
        if let Some(line) = cur.as_mut() {
            let new_line = (g.y - line.y).abs() > 0.5 * size.max(line.size.min(size * 2.0))
                || g.x < last_end - 3.0 * size;
            if new_line {
                if let Some(done) = cur.take() {
                    push_line(&mut lines, done);
                }
                pending_space = false;
            }
        }
        if g.text.chars().all(char::is_whitespace) {
            pending_space = true;
            if let Some(line) = cur.as_mut() {
                last_end = g.end.max(last_end);
                line.x1 = line.x1.max(g.end);
            }
            continue;
        }
        let text: String = g
            .text
            .chars()
            .map(|c| match expand_ligature(c) {
                Some(s) => s.to_string(),
                None => c.to_string(),
            })
            .collect();
        match cur.as_mut() {
            None => {
                cur = Some(Line {
                    text,
                    x0: g.x,
                    x1: g.end.max(g.x),
                    y: g.y,
                    size,
                });
            }
            Some(line) => {
                if (pending_space || g.x > last_end + 0.15 * size) && !line.text.ends_with(' ') {
                    line.text.push(' ');
                }
                line.text.push_str(&text);
                line.x0 = line.x0.min(g.x);
                line.x1 = line.x1.max(g.end);
                line.size = line.size.max(size);
            }
        }
        pending_space = false;
        last_end = g.end;
    }
    if let Some(done) = cur {
        push_line(&mut lines, done);
    }
    lines
}

/// Add a line with its whitespace evened out, unless it has no text.
fn push_line(lines: &mut Vec<Line>, mut line: Line) {
    line.text = line.text.split_whitespace().collect::<Vec<_>>().join(" ");
    if !line.text.is_empty() {
        lines.push(line);
    }
}

/// Group a page's lines (in reading order) into blocks of lines. A block ends where the line
/// spacing opens up (more than 1.4 times the font size between baselines), where the font size
/// changes, where the text goes back up the page, before a list bullet, and before a line
/// indented against a previous line that stopped short of the right margin (a paragraph's
/// first-line indent).
pub fn blocks_from_lines(lines: &[Line]) -> Vec<Vec<String>> {
    let right = lines.iter().map(|l| l.x1).fold(f64::MIN, f64::max);
    let mut blocks: Vec<Vec<String>> = Vec::new();
    let mut prev: Option<&Line> = None;
    for line in lines {
        let new_block = match prev {
            None => true,
            Some(p) => {
                let size = p.size.min(line.size);
                let dy = p.y - line.y;
                dy < -0.5 * size
                    || dy > 1.4 * size
                    || (p.size - line.size).abs() > 0.12 * p.size.max(line.size)
                    || line.text.starts_with(['•', '◦', '▪', '‣', '∙'])
                    || (line.x0 > p.x0 + 0.7 * size && p.x1 < right - 1.5 * size)
            }
        };
        match blocks.last_mut() {
            Some(block) if !new_block => block.push(line.text.clone()),
            _ => blocks.push(vec![line.text.clone()]),
        }
        prev = Some(line);
    }
    blocks
}

/// Which lines are running headers or footers, and what was dropped.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct RunningLines {
    /// For each page, for each line: drop it.
    pub drop: Vec<Vec<bool>>,
    /// Each distinct running line once, as it first appeared (lines that differ only in their
    /// numbers, like page numbers, are one running line).
    pub dropped: Vec<String>,
    /// Characters dropped in all.
    pub dropped_chars: usize,
}

/// How many lines at the top and at the bottom of a page may be running lines.
const RUNNING_DEPTH: usize = 2;

/// The form a running line keeps from page to page: whitespace evened out, each run of digits
/// one `#`; a bare page number (arabic or roman) is `#` too.
fn running_key(line: &str) -> String {
    let words: Vec<&str> = line.split_whitespace().collect();
    let joined = words.join(" ");
    let lower = joined.to_lowercase();
    if !lower.is_empty() && lower.chars().all(|c| "ivxlcdm".contains(c)) && lower.len() <= 8 {
        return "#".to_string();
    }
    let mut key = String::with_capacity(joined.len());
    for c in joined.chars() {
        if c.is_ascii_digit() {
            if !key.ends_with('#') {
                key.push('#');
            }
        } else {
            key.push(c);
        }
    }
    key
}

/// The first two words of a line's running key, when they hold a letter: what a running
/// header that names the current chapter or section keeps from page to page ("CHAPTER #.").
fn running_lead(line: &str) -> Option<String> {
    let key = running_key(line);
    let words: Vec<&str> = key.split_whitespace().take(2).collect();
    (words.len() == 2 && words.iter().any(|w| w.chars().any(char::is_alphabetic)))
        .then(|| words.join(" "))
}

/// Find running headers and footers: a line among the first or last two of a page that, with
/// digits replaced by a placeholder, is among the first or last two lines of at least half the
/// pages that have text, and of at least 3 pages. Also a page's very first (or very last) line
/// whose first two words are those of the first (last) line of at least half the pages, and of
/// at least 3: a header that names the current section changes from page to page, but its
/// lead ("CHAPTER 6. THE DEBIAN ARCHIVES 6.3 ...", "CHAPTER 7. ...") does not.
pub fn running_lines(pages: &[Vec<String>]) -> RunningLines {
    let edge = |n: usize, i: usize| i < RUNNING_DEPTH || i + RUNNING_DEPTH >= n;
    let mut seen: HashMap<String, HashSet<usize>> = HashMap::new();
    let mut tops: HashMap<String, usize> = HashMap::new();
    let mut bottoms: HashMap<String, usize> = HashMap::new();
    for (p, lines) in pages.iter().enumerate() {
        for (i, line) in lines.iter().enumerate() {
            if edge(lines.len(), i) {
                seen.entry(running_key(line)).or_default().insert(p);
            }
        }
        if let Some(lead) = lines.first().and_then(|l| running_lead(l)) {
            *tops.entry(lead).or_default() += 1;
        }
        if lines.len() > 1 {
            if let Some(lead) = lines.last().and_then(|l| running_lead(l)) {
                *bottoms.entry(lead).or_default() += 1;
            }
        }
    }
    let with_text = pages.iter().filter(|l| !l.is_empty()).count();
    let often = |n: usize| n >= 3 && n * 2 >= with_text;
    let running: HashSet<&String> = seen
        .iter()
        .filter(|(_, on)| often(on.len()))
        .map(|(k, _)| k)
        .collect();
    let running_top =
        |l: &str| running_lead(l).is_some_and(|k| tops.get(&k).is_some_and(|&n| often(n)));
    let running_bottom =
        |l: &str| running_lead(l).is_some_and(|k| bottoms.get(&k).is_some_and(|&n| often(n)));
    let mut out = RunningLines::default();
    let mut listed = HashSet::new();
    for lines in pages {
        let mut drop = Vec::with_capacity(lines.len());
        for (i, line) in lines.iter().enumerate() {
            let key = running_key(line);
            let d = (edge(lines.len(), i) && running.contains(&key))
                || (i == 0 && running_top(line))
                || (i + 1 == lines.len() && i > 0 && running_bottom(line));
            if d {
                out.dropped_chars += line.chars().count();
                if listed.insert(key) {
                    out.dropped.push(line.clone());
                }
            }
            drop.push(d);
        }
        out.drop.push(drop);
    }
    out
}

/// Characters that end a line as a hyphen.
const HYPHENS: [char; 3] = ['-', '\u{ad}', '\u{2010}'];

/// A token as a dictionary word: trimmed of what is not a letter or digit at its edges, lower
/// case.
fn dictionary_word(token: &str) -> String {
    token
        .trim_matches(|c: char| !c.is_alphanumeric())
        .to_lowercase()
}

/// Join each block's lines into one paragraph line. A word hyphenated at a line end ("exam-",
/// "ple") is joined ("example") when the joined word occurs elsewhere in the document at least
/// once and at least as often as the hyphenated pair ("exam-ple") does; otherwise the hyphen
/// stays ("well-known"). Either way no space is put at a hyphen. Returns the pages' paragraphs
/// and the number of words joined.
pub fn join_hyphens(pages: &[Vec<Vec<String>>]) -> (Vec<Vec<String>>, usize) {
    let mut counts: HashMap<String, usize> = HashMap::new();
    for line in pages.iter().flatten().flatten() {
        for token in line.split_whitespace() {
            *counts.entry(dictionary_word(token)).or_default() += 1;
        }
    }
    let count = |w: &str| counts.get(w).copied().unwrap_or(0);
    let mut joined = 0;
    let out = pages
        .iter()
        .map(|blocks| {
            blocks
                .iter()
                .map(|lines| {
                    let mut para = String::new();
                    for line in lines {
                        if para.is_empty() {
                            para.push_str(line);
                            continue;
                        }
                        let hyphenated = para
                            .strip_suffix(HYPHENS)
                            .filter(|head| head.chars().last().is_some_and(char::is_alphabetic))
                            .is_some()
                            && line.chars().next().is_some_and(char::is_alphabetic);
                        if !hyphenated {
                            para.push(' ');
                            para.push_str(line);
                            continue;
                        }
                        let head = para
                            .rsplit(char::is_whitespace)
                            .next()
                            .unwrap_or_default()
                            .trim_end_matches(HYPHENS);
                        let tail = line.split_whitespace().next().unwrap_or_default();
                        let whole = dictionary_word(&format!("{head}{tail}"));
                        let pair = dictionary_word(&format!("{head}-{tail}"));
                        let soft = para.ends_with('\u{ad}');
                        if soft || (count(&whole) >= 1 && count(&whole) >= count(&pair)) {
                            let keep = para.len() - para.chars().last().map_or(0, char::len_utf8);
                            para.truncate(keep);
                            joined += 1;
                        }
                        para.push_str(line);
                    }
                    para
                })
                .collect()
        })
        .collect();
    (out, joined)
}

/// A heading from the outline: depth (1 = top), title, destination page (0-based) if known.
type OutlineEntry = (u8, String, Option<usize>);

/// The document outline in document order, with each bookmark's depth and page.
fn outline(doc: &Document, page_of: &HashMap<ObjectId, usize>) -> Vec<OutlineEntry> {
    let mut out = Vec::new();
    let Ok(catalog) = doc.catalog() else {
        return out;
    };
    let Some(root) = catalog
        .get(b"Outlines")
        .ok()
        .and_then(|o| deref_dict(doc, o))
    else {
        return out;
    };
    let names = NamedDests::new(doc, catalog);
    let mut visited = HashSet::new();
    // Depth-first over First/Next, an explicit stack of next siblings.
    let mut stack: Vec<(Object, u8)> = Vec::new();
    if let Ok(first) = root.get(b"First") {
        stack.push((first.clone(), 1));
    }
    while let Some((node, depth)) = stack.pop() {
        if let Object::Reference(id) = node {
            if !visited.insert(id) {
                continue;
            }
        }
        let Some(item) = deref_dict(doc, &node) else {
            continue;
        };
        if visited.len() > 100_000 {
            break;
        }
        if let Ok(next) = item.get(b"Next") {
            stack.push((next.clone(), depth));
        }
        if let Ok(first) = item.get(b"First") {
            stack.push((first.clone(), depth.saturating_add(1)));
        }
        let title = item
            .get(b"Title")
            .ok()
            .and_then(|t| deref(doc, t))
            .and_then(|t| t.as_str().ok())
            .map(decode_pdf_string)
            .unwrap_or_default();
        let title = title.split_whitespace().collect::<Vec<_>>().join(" ");
        let dest = item.get(b"Dest").ok().or_else(|| {
            let action = item.get(b"A").ok().and_then(|a| deref_dict(doc, a))?;
            (action.get(b"S").ok()?.as_name().ok()? == b"GoTo")
                .then(|| action.get(b"D").ok())
                .flatten()
        });
        let page = dest.and_then(|d| dest_page(doc, d, &names, page_of));
        if !title.is_empty() {
            out.push((depth, title, page));
        }
    }
    out
}

/// Follow a reference (a few hops at most).
fn deref<'a>(doc: &'a Document, mut obj: &'a Object) -> Option<&'a Object> {
    for _ in 0..8 {
        match obj {
            Object::Reference(id) => obj = doc.get_object(*id).ok()?,
            other => return Some(other),
        }
    }
    None
}

/// Follow references to a dictionary.
fn deref_dict<'a>(doc: &'a Document, obj: &'a Object) -> Option<&'a Dictionary> {
    deref(doc, obj)?.as_dict().ok()
}

/// The page a destination points to: an explicit array `[page /XYZ ...]`, a dictionary with /D,
/// or a name looked up among the named destinations.
fn dest_page(
    doc: &Document,
    dest: &Object,
    names: &NamedDests,
    page_of: &HashMap<ObjectId, usize>,
) -> Option<usize> {
    let mut dest = deref(doc, dest)?;
    for _ in 0..4 {
        match dest {
            Object::Array(a) => {
                let page = a.first()?;
                return match page {
                    Object::Reference(id) => page_of.get(id).copied(),
                    _ => None,
                };
            }
            Object::Dictionary(d) => dest = deref(doc, d.get(b"D").ok()?)?,
            Object::String(s, _) | Object::Name(s) => dest = deref(doc, names.get(s)?)?,
            _ => return None,
        }
    }
    None
}

/// Named destinations: the catalog's /Dests dictionary and its /Names /Dests name tree.
struct NamedDests<'a> {
    doc: &'a Document,
    dests: Option<&'a Dictionary>,
    tree: HashMap<Vec<u8>, &'a Object>,
}

impl<'a> NamedDests<'a> {
    fn new(doc: &'a Document, catalog: &'a Dictionary) -> Self {
        let dests = catalog.get(b"Dests").ok().and_then(|d| deref_dict(doc, d));
        let mut tree = HashMap::new();
        let root = catalog
            .get(b"Names")
            .ok()
            .and_then(|n| deref_dict(doc, n))
            .and_then(|n| n.get(b"Dests").ok())
            .and_then(|d| deref_dict(doc, d));
        let mut stack: Vec<(&Dictionary, usize)> = root.into_iter().map(|r| (r, 0)).collect();
        let mut nodes = 0;
        while let Some((node, depth)) = stack.pop() {
            nodes += 1;
            if depth > 32 || nodes > 100_000 {
                break;
            }
            if let Some(Object::Array(pairs)) = node.get(b"Names").ok().and_then(|n| deref(doc, n))
            {
                for pair in pairs.chunks(2) {
                    if let [Object::String(key, _), value] = pair {
                        tree.insert(key.clone(), value);
                    }
                }
            }
            if let Some(Object::Array(kids)) = node.get(b"Kids").ok().and_then(|k| deref(doc, k)) {
                for kid in kids {
                    if let Some(d) = deref_dict(doc, kid) {
                        stack.push((d, depth + 1));
                    }
                }
            }
        }
        NamedDests { doc, dests, tree }
    }

    fn get(&self, name: &[u8]) -> Option<&'a Object> {
        if let Some(v) = self.tree.get(name) {
            return Some(v);
        }
        let v = self.dests?.get(name).ok()?;
        deref(self.doc, v)
    }
}

/// A PDF text string: UTF-16BE with a byte-order mark, UTF-8 with one, or PDFDocEncoding (read
/// as Latin-1, which it matches for letters).
fn decode_pdf_string(bytes: &[u8]) -> String {
    if let Some(rest) = bytes.strip_prefix(&[0xfe, 0xff]) {
        let units: Vec<u16> = rest
            .chunks(2)
            .map(|c| u16::from_be_bytes([c[0], c.get(1).copied().unwrap_or(0)]))
            .collect();
        return String::from_utf16_lossy(&units);
    }
    if let Some(rest) = bytes.strip_prefix(&[0xef, 0xbb, 0xbf]) {
        return String::from_utf8_lossy(rest).into_owned();
    }
    bytes.iter().map(|&b| char::from(b)).collect()
}

/// Place outline entries in the text: each on its page (the previous entry's page, or the first,
/// when its destination is unknown), searched after the previous heading when that is on the
/// same page.
fn place_headings(text: &str, pages: &[Range<usize>], entries: &[OutlineEntry]) -> Vec<Heading> {
    let mut out = Vec::with_capacity(entries.len());
    let mut last_page = 0;
    let mut after = 0;
    for (level, title, page) in entries {
        let p = page.unwrap_or(last_page).min(pages.len().saturating_sub(1));
        let Some(range) = pages.get(p) else {
            continue;
        };
        if p != last_page {
            after = range.start;
        }
        let from = after.clamp(range.start, range.end);
        let bytes = place_heading(&text[range.start..range.end], from - range.start, title)
            .map(|r| r.start + range.start..r.end + range.start)
            .unwrap_or(range.start..range.start);
        if bytes.end > bytes.start {
            after = bytes.end;
        }
        last_page = p;
        out.push(Heading {
            level: *level,
            title: title.clone(),
            bytes,
        });
    }
    out
}

/// Where a heading's title is in a page's text, searching from byte `from`: letters and digits
/// compared case-insensitively, everything else (whitespace, punctuation, quotes the text layer
/// draws differently) ignored. A match that starts a paragraph, perhaps after numbering such as
/// "1.2.", is preferred to one inside running text; numbering right before a match and closing
/// punctuation right after it are taken into the range.
pub fn place_heading(page: &str, from: usize, title: &str) -> Option<Range<usize>> {
    let want: Vec<char> = title
        .chars()
        .filter(|c| c.is_alphanumeric())
        .flat_map(char::to_lowercase)
        .collect();
    if want.is_empty() || from > page.len() || !page.is_char_boundary(from) {
        return None;
    }
    // The page's letters and digits, lower-cased, each with its byte range.
    let mut have: Vec<(char, usize, usize)> = Vec::new();
    for (i, c) in page[from..].char_indices() {
        if c.is_alphanumeric() {
            let at = from + i;
            for l in c.to_lowercase() {
                have.push((l, at, at + c.len_utf8()));
            }
        }
    }
    let mut first_any = None;
    let mut k = 0;
    while k + want.len() <= have.len() {
        if have[k..k + want.len()]
            .iter()
            .zip(&want)
            .all(|((c, _, _), w)| c == w)
        {
            let start = have[k].1;
            let mut end = have[k + want.len() - 1].2;
            // Closing punctuation of the title's last word ("?", "’", ")") is the heading's too.
            end += page[end..]
                .chars()
                .take_while(|c| !c.is_whitespace() && !c.is_alphanumeric())
                .map(char::len_utf8)
                .sum::<usize>();
            let with_number = numbering_start(page, start);
            if starts_block(page, with_number) {
                return Some(with_number..end);
            }
            first_any.get_or_insert(with_number..end);
        }
        k += 1;
    }
    first_any
}

/// Where numbering like "1.2." right before byte `at` on the same line begins (`at` itself if
/// there is none).
fn numbering_start(page: &str, at: usize) -> usize {
    let trimmed = page[..at].trim_end_matches([' ', '\u{a0}']);
    let token_start = trimmed
        .char_indices()
        .rev()
        .find(|(_, c)| c.is_whitespace())
        .map_or(0, |(i, c)| i + c.len_utf8());
    let token = &trimmed[token_start..];
    let numeric = token.chars().all(|c| c.is_ascii_digit() || c == '.')
        && token.chars().any(|c| c.is_ascii_digit());
    if numeric {
        token_start
    } else {
        at
    }
}

/// Whether byte `at` starts the page's text or a paragraph.
fn starts_block(page: &str, at: usize) -> bool {
    at == 0 || page[..at].ends_with('\n')
}

/// The document information dictionary's `/Title`, whitespace evened out, when it has one.
fn info_title(doc: &lopdf::Document) -> Option<String> {
    let info = doc.trailer.get(b"Info").ok()?;
    let dict = match info {
        lopdf::Object::Reference(id) => doc.get_dictionary(*id).ok()?,
        lopdf::Object::Dictionary(d) => d,
        _ => return None,
    };
    let raw = match dict.get(b"Title").ok()? {
        lopdf::Object::String(bytes, _) => bytes.clone(),
        _ => return None,
    };
    // UTF-16BE with a byte-order mark, else PDFDocEncoding (read as Latin-1, which agrees
    // with it on letters and digits).
    let text = if raw.starts_with(&[0xfe, 0xff]) {
        let units: Vec<u16> = raw[2..]
            .chunks_exact(2)
            .map(|c| u16::from_be_bytes([c[0], c[1]]))
            .collect();
        String::from_utf16_lossy(&units)
    } else {
        raw.iter().map(|&b| b as char).collect()
    };
    let t = text.split_whitespace().collect::<Vec<_>>().join(" ");
    (!t.is_empty()).then_some(t)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn lines(v: &[&str]) -> Vec<String> {
        v.iter().map(|s| s.to_string()).collect()
    }

    #[test]
    fn headers_naming_the_current_section_are_running_by_their_lead() {
        let pages = vec![
            lines(&[
                "CHAPTER 1. TRACK 1.1 WHAT IS GAUGE?",
                "Gauge is the distance.",
                "1",
            ]),
            lines(&["CHAPTER 1. TRACK 1.2 WHY CURVES WEAR?", "Flanges rub.", "2"]),
            lines(&[
                "CHAPTER 2. SIGNALS 2.1 WHO WORKS THEM?",
                "Volunteers do.",
                "3",
            ]),
            lines(&["Chapter 3", "Fares", "Children travel free.", "4"]),
        ];
        let r = running_lines(&pages);
        // Three of four pages open with "CHAPTER #.": those headers go, whatever section
        // they name; the chapter opening page and every body line stay.
        assert_eq!(r.drop[0], [true, false, true]);
        assert_eq!(r.drop[2], [true, false, true]);
        assert_eq!(r.drop[3], [false, false, false, true]);
        assert!(!r.dropped.iter().any(|l| l.contains("Gauge is")));
    }

    #[test]
    fn hyphen_joined_when_the_document_has_the_word() {
        // "example" occurs unhyphenated elsewhere, so "exam-" + "ple" is joined.
        let pages = vec![vec![
            vec!["an exam-".to_string(), "ple here".to_string()],
            lines(&["one example more"]),
        ]];
        let (out, joined) = join_hyphens(&pages);
        assert_eq!(out[0][0], "an example here");
        assert_eq!(joined, 1);
    }

    #[test]
    fn hyphen_kept_when_the_word_is_not_known_joined() {
        // "wellknown" never occurs; "well-known" does: the hyphen is part of the word.
        let pages = vec![vec![
            lines(&["a well-", "known fact"]),
            lines(&["well-known again"]),
        ]];
        let (out, joined) = join_hyphens(&pages);
        assert_eq!(out[0][0], "a well-known fact");
        assert_eq!(joined, 0);
    }

    #[test]
    fn hyphen_kept_when_the_pair_is_more_frequent() {
        // "e-mail" twice in the text, "email" once: the hyphenated form wins.
        let pages = vec![vec![
            lines(&["send e-", "mail"]),
            lines(&["e-mail e-mail email"]),
        ]];
        let (out, joined) = join_hyphens(&pages);
        assert_eq!(out[0][0], "send e-mail");
        assert_eq!(joined, 0);
    }

    #[test]
    fn dash_and_digits_are_not_hyphenation() {
        let pages = vec![vec![lines(&["pages 10-", "20 and so -", "on"])]];
        let (out, joined) = join_hyphens(&pages);
        assert_eq!(out[0][0], "pages 10- 20 and so - on");
        assert_eq!(joined, 0);
    }

    #[test]
    fn running_lines_are_found_with_digits_as_placeholder() {
        // Six pages: a header with the page number in it, three body lines, a bare page number.
        let pages: Vec<Vec<String>> = (1..=6)
            .map(|p| {
                vec![
                    format!("Report {p} of the year"),
                    format!("first body line {}", "x".repeat(p)),
                    format!("body {}", "y".repeat(p)),
                    "the same middle line".to_string(),
                    format!("last body line {}", "z".repeat(p)),
                    format!("{p}"),
                ]
            })
            .collect();
        let r = running_lines(&pages);
        assert_eq!(r.dropped, vec!["Report 1 of the year", "1"]);
        for d in &r.drop {
            // The repeated middle line is not at a page edge: kept.
            assert_eq!(d, &vec![true, false, false, false, false, true]);
        }
        let chars: usize = (1..=6)
            .map(|p: usize| format!("Report {p} of the year").len() + p.to_string().len())
            .sum();
        assert_eq!(r.dropped_chars, chars);
    }

    #[test]
    fn lines_on_few_pages_are_not_running() {
        // "Chapter heading" tops 3 of 8 pages: fewer than half, kept. "Footer" ends 4 of 8:
        // half, dropped.
        let mut pages: Vec<Vec<String>> = (0..8)
            .map(|p| {
                vec![
                    format!("top {}", "t".repeat(p)),
                    format!("end {}", "e".repeat(p)),
                ]
            })
            .collect();
        for page in pages.iter_mut().take(3) {
            page.insert(0, "Chapter heading".into());
        }
        for page in pages.iter_mut().skip(4) {
            page.push("Footer".into());
        }
        let r = running_lines(&pages);
        assert_eq!(r.dropped, vec!["Footer"]);
        // A bare roman page number is a page number.
        assert_eq!(running_key("iv"), "#");
        assert_eq!(running_key("Page 12 of  30"), "Page # of #");
    }

    #[test]
    fn heading_found_case_and_space_insensitive_after_numbering() {
        let page = "Intro text about debian.\n\n1.2. What   is DEBIAN?\n\nBody.";
        let r = place_heading(page, 0, "What is Debian?").expect("found");
        assert_eq!(&page[r.clone()], "1.2. What   is DEBIAN?");
        // A later search start skips an earlier match.
        assert_eq!(place_heading(page, r.end, "What is Debian?"), None);
    }

    #[test]
    fn heading_prefers_a_paragraph_start() {
        let page = "See apt for details.\n\nAPT\n\nText.";
        let r = place_heading(page, 0, "APT").expect("found");
        assert_eq!(r.start, page.find("APT").unwrap_or(0));
        assert_eq!(place_heading(page, 0, "nowhere"), None);
    }

    #[test]
    fn headings_fall_back_to_the_page_start() {
        let text = "Page one.\n\nPage two text.\n\nHeading B";
        let pages = vec![0..9, 11..text.len()];
        let entries = vec![
            (1, "Missing".to_string(), Some(1)),
            (2, "Heading B".to_string(), Some(1)),
        ];
        let h = place_headings(text, &pages, &entries);
        assert_eq!(h[0].bytes, 11..11);
        assert_eq!(&text[h[1].bytes.clone()], "Heading B");
        assert_eq!(h[1].level, 2);
    }

    fn line(text: &str, x0: f64, x1: f64, y: f64, size: f64) -> Line {
        Line {
            text: text.into(),
            x0,
            x1,
            y,
            size,
        }
    }

    #[test]
    fn blocks_split_on_gaps_sizes_and_indents() {
        let lines = vec![
            line("Big heading", 50.0, 200.0, 800.0, 14.0),
            line("First line of a paragraph that", 50.0, 500.0, 780.0, 10.0),
            line("ends here.", 50.0, 200.0, 768.0, 10.0),
            line("An indented new paragraph", 65.0, 500.0, 756.0, 10.0),
            line("goes on.", 50.0, 150.0, 744.0, 10.0),
            line("After a gap.", 50.0, 150.0, 720.0, 10.0),
        ];
        let b = blocks_from_lines(&lines);
        assert_eq!(b.len(), 4, "{b:?}");
        assert_eq!(b[1], vec!["First line of a paragraph that", "ends here."]);
        assert_eq!(b[2], vec!["An indented new paragraph", "goes on."]);
    }

    #[test]
    fn glyphs_make_lines_and_spaces() {
        let g = |t: &str, x: f64, y: f64| Glyph {
            x,
            y,
            size: 10.0,
            end: x + 5.0,
            text: t.into(),
        };
        let glyphs = vec![
            g("a", 0.0, 100.0),
            g("b", 5.0, 100.0),
            g("c", 13.0, 100.0),
            g("\u{fb01}", 0.0, 88.0),
        ];
        let l = lines_from_glyphs(&glyphs);
        assert_eq!(l.len(), 2);
        assert_eq!(l[0].text, "ab c");
        assert_eq!(l[1].text, "fi");
    }

    #[test]
    fn garbage_is_broken_not_a_panic() {
        let e = extract(b"hello", "x.pdf").unwrap_err();
        assert!(matches!(e, ExtractError::Broken { .. }), "{e}");
        let e = extract(b"%PDF-1.4\n garbage", "x.pdf").unwrap_err();
        assert!(matches!(e, ExtractError::Broken { .. }), "{e}");
    }
}
