//! Readable text and headings out of an HTML page.
//!
//! The page is decoded by the encoding it declares (a byte-order mark, then a `<meta charset>`
//! or `http-equiv` declaration in its first 1024 bytes, as the HTML standard's prescan does;
//! undeclared pages are read as UTF-8, or as windows-1252 when they are not valid UTF-8),
//! parsed with an HTML5 parser (html5ever, through the `scraper` crate, which also decodes
//! character references), and walked once in document order without recursion, so a deeply
//! nested page cannot exhaust the stack.
//!
//! Headings, paragraphs, list items, table cells, preformatted text and the like each become a
//! block; blocks are separated by a blank line. Left out as boilerplate unless asked to keep
//! it ([`HtmlOptions::keep_chrome`]): scripts, styles, `<noscript>`, `<template>`, embedded
//! frames and objects, SVG and canvas, forms' controls, `<nav>` and `<aside>`, a `<header>` or
//! `<footer>` outside `<main>`/`<article>`, elements whose ARIA role is navigation, banner,
//! contentinfo or search, and elements whose class or id names them navigation (a word
//! starting with `nav`, or `breadcrumb`, `sidebar`, `menu`, `toc`, `skip`). `<head>` gives only
//! the page's `<title>`.
use std::collections::BTreeSet;

use ego_tree::iter::Edge;
use scraper::node::{Element, Node};
use scraper::Html;

use super::{ExtractError, Extracted, Heading};

/// Deepest element nesting read. An HTML5 parser checks the stack of open elements for many
/// tags, so a page nested hundreds of thousands deep takes minutes; real pages stay far below
/// this (browsers themselves cap the depth their trees are built to).
pub const MAX_NESTING: usize = 5_000;

/// Elements that never hold content, or whose end tag may be left out (the parser closes
/// them by itself), so they do not count towards nesting.
fn nests(name: &[u8]) -> bool {
    !matches!(
        name,
        b"area"
            | b"base"
            | b"br"
            | b"col"
            | b"embed"
            | b"hr"
            | b"img"
            | b"input"
            | b"link"
            | b"meta"
            | b"source"
            | b"track"
            | b"wbr"
            | b"p"
            | b"li"
            | b"dt"
            | b"dd"
            | b"tr"
            | b"td"
            | b"th"
            | b"option"
            | b"optgroup"
            | b"thead"
            | b"tbody"
            | b"tfoot"
            | b"colgroup"
            | b"caption"
            | b"rb"
            | b"rt"
            | b"rp"
            | b"html"
            | b"head"
            | b"body"
    )
}

/// How deep the page's tags nest, counted from the bytes without parsing: start tags of
/// elements that nest, less end tags (an estimate, close enough to refuse adversarial pages).
pub fn nesting_estimate(bytes: &[u8]) -> usize {
    let (mut depth, mut max) = (0usize, 0usize);
    let mut i = 0;
    while let Some(p) = bytes[i..].iter().position(|&b| b == b'<') {
        i += p + 1;
        let close = bytes.get(i) == Some(&b'/');
        let start = i + usize::from(close);
        let len = bytes[start..]
            .iter()
            .take_while(|b| b.is_ascii_alphanumeric())
            .count();
        if len == 0 {
            continue;
        }
        let name = bytes[start..start + len].to_ascii_lowercase();
        if !nests(&name) {
            continue;
        }
        let tag_end = bytes[start..].iter().position(|&b| b == b'>');
        let self_closing = tag_end.is_some_and(|e| e > 0 && bytes[start + e - 1] == b'/');
        if close {
            depth = depth.saturating_sub(1);
        } else if !self_closing {
            depth += 1;
            max = max.max(depth);
        }
    }
    max
}

/// How to read HTML.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct HtmlOptions {
    /// Keep navigation, headers, footers and the like (scripts and styles are never text).
    pub keep_chrome: bool,
}

/// A page's text decoded by its declared encoding; the encoding's name is returned with it.
pub fn decode(bytes: &[u8]) -> (String, &'static str) {
    if let Some((enc, bom)) = encoding_rs::Encoding::for_bom(bytes) {
        let (text, _) = enc.decode_without_bom_handling(&bytes[bom..]);
        return (text.into_owned(), enc.name());
    }
    if let Some(enc) = declared_encoding(&bytes[..bytes.len().min(1024)]) {
        let (text, _, _) = enc.decode(bytes);
        return (text.into_owned(), enc.name());
    }
    match std::str::from_utf8(bytes) {
        Ok(t) => (t.to_string(), "UTF-8"),
        Err(_) => {
            let (text, _, _) = encoding_rs::WINDOWS_1252.decode(bytes);
            (text.into_owned(), "windows-1252")
        }
    }
}

/// The encoding a page's first bytes declare with `charset=` (in a `<meta charset>` or an
/// `http-equiv="Content-Type"` content). A declared UTF-16 is read as UTF-8, as the standard
/// says for a declaration found by scanning bytes.
pub fn declared_encoding(head: &[u8]) -> Option<&'static encoding_rs::Encoding> {
    let lower: Vec<u8> = head.iter().map(|b| b.to_ascii_lowercase()).collect();
    let mut from = 0;
    while let Some(p) = find(&lower[from..], b"charset") {
        let mut i = from + p + b"charset".len();
        from = i;
        while i < lower.len() && lower[i].is_ascii_whitespace() {
            i += 1;
        }
        if lower.get(i) != Some(&b'=') {
            continue;
        }
        i += 1;
        while i < lower.len()
            && (lower[i].is_ascii_whitespace() || matches!(lower[i], b'"' | b'\''))
        {
            i += 1;
        }
        let start = i;
        while i < lower.len()
            && !lower[i].is_ascii_whitespace()
            && !matches!(lower[i], b'"' | b'\'' | b';' | b'>' | b'/')
        {
            i += 1;
        }
        if let Some(enc) = encoding_rs::Encoding::for_label(&lower[start..i]) {
            return Some(
                if enc == encoding_rs::UTF_16LE || enc == encoding_rs::UTF_16BE {
                    encoding_rs::UTF_8
                } else {
                    enc
                },
            );
        }
    }
    None
}

fn find(hay: &[u8], needle: &[u8]) -> Option<usize> {
    hay.windows(needle.len()).position(|w| w == needle)
}

/// Elements whose end starts a new block.
fn is_block(name: &str) -> bool {
    matches!(
        name,
        "p" | "div"
            | "li"
            | "ul"
            | "ol"
            | "dl"
            | "dt"
            | "dd"
            | "h1"
            | "h2"
            | "h3"
            | "h4"
            | "h5"
            | "h6"
            | "td"
            | "th"
            | "tr"
            | "table"
            | "caption"
            | "thead"
            | "tbody"
            | "tfoot"
            | "pre"
            | "blockquote"
            | "section"
            | "article"
            | "main"
            | "header"
            | "footer"
            | "figure"
            | "figcaption"
            | "address"
            | "hr"
            | "body"
            | "details"
            | "summary"
            | "fieldset"
            | "legend"
    )
}

/// Elements never read as text.
fn is_never_text(name: &str) -> bool {
    matches!(
        name,
        "script"
            | "style"
            | "noscript"
            | "template"
            | "iframe"
            | "object"
            | "embed"
            | "svg"
            | "canvas"
            | "button"
            | "select"
            | "textarea"
            | "head"
    )
}

/// Whether an element is page chrome (navigation and the like), given whether it sits inside
/// `<main>` or `<article>`.
fn is_chrome(e: &Element, in_content: bool) -> bool {
    let name = e.name();
    if matches!(name, "nav" | "aside") {
        return true;
    }
    if matches!(name, "header" | "footer") && !in_content {
        return true;
    }
    if let Some(role) = e.attr("role") {
        if matches!(
            role.trim().to_ascii_lowercase().as_str(),
            "navigation" | "banner" | "contentinfo" | "search"
        ) {
            return true;
        }
    }
    let words = e
        .attr("class")
        .into_iter()
        .chain(e.attr("id"))
        .flat_map(str::split_whitespace)
        .map(str::to_ascii_lowercase);
    for w in words {
        if w.starts_with("nav")
            || w.starts_with("breadcrumb")
            || w.starts_with("sidebar")
            || w.starts_with("skip")
            || w == "menu"
            || w == "toc"
        {
            return true;
        }
    }
    false
}

fn heading_level(name: &str) -> Option<u8> {
    match name {
        "h1" => Some(1),
        "h2" => Some(2),
        "h3" => Some(3),
        "h4" => Some(4),
        "h5" => Some(5),
        "h6" => Some(6),
        _ => None,
    }
}

/// The text being built.
#[derive(Default)]
struct Writer {
    out: String,
    block: String,
    space_pending: bool,
    headings: Vec<Heading>,
}

impl Writer {
    fn text(&mut self, t: &str, pre: bool) {
        if pre {
            self.block.push_str(t);
            self.space_pending = false;
            return;
        }
        for c in t.chars() {
            if c.is_whitespace() && c != '\u{a0}' {
                self.space_pending = true;
            } else {
                if self.space_pending && !self.block.is_empty() && !self.block.ends_with('\n') {
                    self.block.push(' ');
                }
                self.space_pending = false;
                self.block.push(c);
            }
        }
    }

    fn line_break(&mut self) {
        if !self.block.is_empty() && !self.block.ends_with('\n') {
            self.block.push('\n');
        }
        self.space_pending = false;
    }

    /// End the block being built; a heading's block is recorded at the level given.
    fn flush(&mut self, heading: Option<u8>) {
        self.space_pending = false;
        let body = self
            .block
            .trim_matches(|c: char| c.is_whitespace() && c != '\u{a0}');
        if body.is_empty() {
            self.block.clear();
            return;
        }
        // A block never holds a blank line (that would split it in two paragraphs): lines with
        // nothing but spaces go, and the block holds no space at either end.
        let lines: Vec<&str> = body
            .split('\n')
            .map(str::trim_end)
            .filter(|l| !l.trim().is_empty())
            .collect();
        let joined = lines.join("\n");
        let joined = joined.trim_matches(|c: char| c.is_whitespace() && c != '\u{a0}');
        if joined.is_empty() {
            self.block.clear();
            return;
        }
        if !self.out.is_empty() {
            self.out.push_str("\n\n");
        }
        let start = self.out.len();
        self.out.push_str(joined);
        if let Some(level) = heading {
            self.headings.push(Heading {
                level,
                title: self.out[start..]
                    .split_whitespace()
                    .collect::<Vec<_>>()
                    .join(" "),
                bytes: start..self.out.len(),
            });
        }
        self.block.clear();
    }
}

/// Extract a page's readable text and headings. HTML parsing never fails (the standard says
/// how to read any bytes); only a page nested deeper than [`MAX_NESTING`] is refused. What
/// was left out is in the report.
pub fn extract(
    bytes: &[u8],
    origin: &str,
    options: HtmlOptions,
) -> Result<Extracted, ExtractError> {
    let depth = nesting_estimate(bytes);
    if depth > MAX_NESTING {
        return Err(ExtractError::Broken {
            origin: origin.to_string(),
            detail: format!(
                "elements nest about {depth} deep; kerf reads pages nested at most {MAX_NESTING} deep (an HTML parser would take minutes over this one)"
            ),
        });
    }
    let (text, _) = decode(bytes);
    let page = Html::parse_document(&text);
    let mut w = Writer::default();
    let mut skip_depth = 0usize; // elements open inside a left-out one
    let mut skipped_chars = 0usize;
    let mut dropped: BTreeSet<String> = BTreeSet::new();
    let mut pre_depth = 0usize;
    let mut content_depth = 0usize; // open <main>/<article>
    let mut heading: Option<(u8, usize)> = None; // level, depth it opened at
    let mut depth = 0usize;
    let mut title = None;
    let mut in_title = false;
    for edge in page.tree.root().traverse() {
        match edge {
            Edge::Open(node) => match node.value() {
                Node::Element(e) => {
                    depth += 1;
                    let name = e.name();
                    if skip_depth > 0 {
                        skip_depth += 1;
                        if name == "title" && title.is_none() {
                            in_title = true;
                        }
                        continue;
                    }
                    if is_never_text(name)
                        || (!options.keep_chrome && is_chrome(e, content_depth > 0))
                    {
                        skip_depth = 1;
                        if name != "head" {
                            dropped.insert(name.to_string());
                        }
                        continue;
                    }
                    if matches!(name, "main" | "article") {
                        content_depth += 1;
                    }
                    if name == "br" {
                        w.line_break();
                        continue;
                    }
                    if is_block(name) {
                        w.flush(heading.map(|h| h.0));
                    }
                    if let Some(level) = heading_level(name) {
                        if heading.is_none() {
                            heading = Some((level, depth));
                        }
                    }
                    if name == "pre" {
                        pre_depth += 1;
                    }
                }
                Node::Text(t) => {
                    if in_title {
                        let s = t.split_whitespace().collect::<Vec<_>>().join(" ");
                        if !s.is_empty() {
                            title = Some(s);
                        }
                    } else if skip_depth > 0 {
                        skipped_chars += t.trim().chars().count();
                    } else {
                        w.text(t, pre_depth > 0);
                    }
                }
                _ => {}
            },
            Edge::Close(node) => {
                let Node::Element(e) = node.value() else {
                    continue;
                };
                let name = e.name();
                if skip_depth > 0 {
                    skip_depth -= 1;
                    if name == "title" {
                        in_title = false;
                    }
                    depth -= 1;
                    continue;
                }
                if matches!(name, "main" | "article") {
                    content_depth = content_depth.saturating_sub(1);
                }
                if name == "pre" {
                    pre_depth = pre_depth.saturating_sub(1);
                }
                if is_block(name) {
                    w.flush(heading.map(|h| h.0));
                }
                if heading.is_some_and(|(_, d)| d == depth) {
                    w.flush(heading.map(|h| h.0));
                    heading = None;
                }
                depth -= 1;
            }
        }
    }
    w.flush(heading.map(|h| h.0));
    Ok(Extracted {
        text: w.out,
        headings: w.headings,
        pages: Vec::new(),
        title,
        report: super::ExtractReport {
            dropped_chars: skipped_chars,
            dropped: dropped.into_iter().collect(),
            ..Default::default()
        },
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn text_of(html: &str) -> Extracted {
        extract(html.as_bytes(), "t.html", HtmlOptions::default()).unwrap()
    }

    fn of_bytes(html: &[u8]) -> Extracted {
        extract(html, "t.html", HtmlOptions::default()).unwrap()
    }

    #[test]
    fn blocks_headings_and_boilerplate() {
        let e = text_of(
            "<html><head><title>Pennick  Halt</title><style>p{}</style></head><body>\
             <nav><a href=x>Home</a></nav>\
             <h1>Timetable</h1><p>Trains   run <b>hourly</b>&nbsp;from May.</p>\
             <ul><li>First at 10:00</li><li>Last at 16:00</li></ul>\
             <table><tr><td>Adult</td><td>&pound;12</td></tr></table>\
             <script>var x = 1;</script>\
             <h2>Fares</h2><p>Children&#39;s tickets&amp;more.<br>Dogs free.</p>\
             <div class=\"navfooter\">Prev Next</div></body></html>",
        );
        assert_eq!(
            e.text,
            "Timetable\n\nTrains run hourly\u{a0}from May.\n\nFirst at 10:00\n\nLast at 16:00\n\nAdult\n\n£12\n\nFares\n\nChildren's tickets&more.\nDogs free."
        );
        assert_eq!(e.title.as_deref(), Some("Pennick Halt"));
        let h: Vec<(u8, &str)> = e
            .headings
            .iter()
            .map(|h| (h.level, h.title.as_str()))
            .collect();
        assert_eq!(h, [(1, "Timetable"), (2, "Fares")]);
        for h in &e.headings {
            assert_eq!(&e.text[h.bytes.clone()], h.title);
        }
        // <style> sits in <head>, which gives only the title.
        assert_eq!(e.report.dropped, ["div", "nav", "script"]);
        // Kept on request: the navigation, never the script.
        let kept = extract(
            b"<body><nav>Home</nav><p>Body</p><script>x()</script></body>",
            "t.html",
            HtmlOptions { keep_chrome: true },
        )
        .unwrap();
        assert_eq!(kept.text, "Home\n\nBody");
    }

    #[test]
    fn preformatted_text_keeps_its_lines_but_no_blank_line() {
        let e = text_of("<p>Run:</p><pre>make\n  install\n\n\ndone</pre>");
        assert_eq!(e.text, "Run:\n\nmake\n  install\ndone");
    }

    #[test]
    fn declared_encodings_are_honoured() {
        // "Café" in ISO-8859-1 (encoding_rs reads that label as windows-1252, as the HTML
        // standard's encoding table says).
        let mut page = b"<meta charset=\"iso-8859-1\"><p>Caf".to_vec();
        page.push(0xe9);
        page.extend_from_slice(b"</p>");
        let e = of_bytes(&page);
        assert_eq!(e.text, "Café");
        let http = b"<meta http-equiv=\"Content-Type\" content=\"text/html; charset=windows-1251\"><p>\xcf\xf0\xe8</p>";
        assert_eq!(of_bytes(http).text, "При");
        // Undeclared and not UTF-8: windows-1252.
        assert_eq!(of_bytes(b"<p>na\xefve</p>").text, "naïve");
        // A byte-order mark wins over the declaration.
        let mut bom = vec![0xef, 0xbb, 0xbf];
        bom.extend_from_slice("<meta charset=\"koi8-r\"><p>Zoë</p>".as_bytes());
        assert_eq!(of_bytes(&bom).text, "Zoë");
    }

    #[test]
    fn nesting_is_read_to_the_limit_and_refused_past_it() {
        let nest = |depth: usize| {
            format!(
                "{}<p>deep<br/><img src=x></p>{}",
                "<div>".repeat(depth),
                "</div>".repeat(depth)
            )
        };
        assert_eq!(nesting_estimate(nest(MAX_NESTING).as_bytes()), MAX_NESTING);
        // Walked without recursion: a page at the limit is read.
        assert_eq!(text_of(&nest(MAX_NESTING)).text, "deep");
        let e = extract(
            nest(MAX_NESTING + 1).as_bytes(),
            "t.html",
            HtmlOptions::default(),
        )
        .unwrap_err()
        .to_string();
        assert!(
            e.starts_with("t.html: elements nest about 5001 deep"),
            "{e}"
        );
        // Paragraphs and list items left open do not count as nesting.
        let open = "<p>one<li>two".repeat(20_000);
        assert!(nesting_estimate(open.as_bytes()) < 10);
        assert!(!text_of(&open).text.is_empty());
    }
}
