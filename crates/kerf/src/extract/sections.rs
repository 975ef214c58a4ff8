//! Section paths: which headings a place in a document sits under.
//!
//! Extracted formats bring their headings (HTML `<h1>`-`<h6>`, a PDF's outline). For Markdown
//! and plain text the headings come from the segmenter's paragraphs: ATX and setext headings,
//! single lines in capitals, and, in plain text, numbered headings such as `4.2 Title`,
//! `4.2. Title` or `Chapter 4. Title` standing as a paragraph of their own.
use std::ops::Range;

use super::Heading;
use crate::segment::{BlockKind, Paragraph};

/// A numbered heading's level and title: `"4.2 Title"` and `"4.2. Title"` are level 2,
/// `"Chapter 4. Title"` and `"4 Title"` level 1. The title must start with a capital letter
/// or a digit, a number has at most three digits, and running text (ending in `.`, `,`, `;`
/// or `:`, or longer than 200 characters or three lines) is not a heading.
pub fn numbered(block: &str) -> Option<(u8, String)> {
    let block = block.trim();
    if block.len() > 200 || block.lines().count() > 3 || block.ends_with(['.', ',', ';', ':']) {
        return None;
    }
    let (level, rest) = match block
        .strip_prefix("Chapter")
        .or_else(|| block.strip_prefix("CHAPTER"))
    {
        Some(r) if r.starts_with([' ', '\u{a0}']) => {
            let r = r.trim_start_matches([' ', '\u{a0}']);
            let digits = r.bytes().take_while(u8::is_ascii_digit).count();
            if digits == 0 || digits > 3 {
                return None;
            }
            (1u8, r[digits..].trim_start_matches('.'))
        }
        _ => {
            let mut parts = 0u8;
            let mut i = 0;
            let b = block.as_bytes();
            loop {
                let digits = b[i..].iter().take_while(|c| c.is_ascii_digit()).count();
                if digits == 0 || digits > 3 {
                    return None;
                }
                parts += 1;
                i += digits;
                if b.get(i) == Some(&b'.') && b.get(i + 1).is_some_and(u8::is_ascii_digit) {
                    i += 1;
                    continue;
                }
                if b.get(i) == Some(&b'.') {
                    i += 1;
                }
                break;
            }
            if parts > 6 {
                return None;
            }
            (parts, &block[i..])
        }
    };
    if !rest.starts_with([' ', '\u{a0}', '\t']) {
        return None;
    }
    let title = rest.split_whitespace().collect::<Vec<_>>().join(" ");
    let first = title.chars().next()?;
    (first.is_uppercase() || first.is_ascii_digit() || first == '"' || first == '\'')
        .then_some((level, title))
}

/// The headings of a Markdown or plain-text document from its paragraphs.
pub fn from_paragraphs(text: &str, paragraphs: &[Paragraph]) -> Vec<Heading> {
    let mut out = Vec::new();
    for p in paragraphs {
        let body = &text[p.bytes.clone()];
        match p.kind {
            BlockKind::Heading => {
                let first = body.lines().next().unwrap_or("");
                let hashes = first.bytes().take_while(|&b| b == b'#').count();
                let (level, title) = if (1..=6).contains(&hashes) {
                    (
                        hashes as u8,
                        first[hashes..].trim().trim_end_matches('#').trim(),
                    )
                } else if let Some(under) = body.lines().nth(1) {
                    (
                        if under.trim_start().starts_with('=') {
                            1
                        } else {
                            2
                        },
                        first.trim(),
                    )
                } else {
                    (1, first.trim())
                };
                if !title.is_empty() {
                    out.push(Heading {
                        level,
                        title: title.split_whitespace().collect::<Vec<_>>().join(" "),
                        bytes: p.bytes.clone(),
                    });
                }
            }
            BlockKind::Prose => {
                if let Some((level, title)) = numbered(body) {
                    out.push(Heading {
                        level,
                        title,
                        bytes: p.bytes.clone(),
                    });
                }
            }
            _ => {}
        }
    }
    out
}

/// A document's headings: those its extraction found, else those of its paragraphs.
pub fn of_document<'d>(
    doc: &'d crate::corpus::Document,
    paragraphs: &[Paragraph],
) -> std::borrow::Cow<'d, [Heading]> {
    match &doc.layout {
        Some(l) => std::borrow::Cow::Borrowed(l.headings.as_slice()),
        None => std::borrow::Cow::Owned(from_paragraphs(&doc.text, paragraphs)),
    }
}

/// Where the headings of level `level` and above start (byte offsets, ascending): the places
/// a plan with `heading_breaks = level` starts a chunk. Empty for level 0.
pub fn break_starts(headings: &[Heading], level: u8) -> Vec<usize> {
    if level == 0 {
        return Vec::new();
    }
    let mut v: Vec<usize> = headings
        .iter()
        .filter(|h| h.level <= level)
        .map(|h| h.bytes.start)
        .collect();
    v.sort_unstable();
    v.dedup();
    v
}

/// For each heading, the index of the heading it sits under (`None` at the top): the nearest
/// earlier heading of a smaller level number.
pub fn parents(headings: &[Heading]) -> Vec<Option<usize>> {
    let mut stack: Vec<usize> = Vec::new();
    headings
        .iter()
        .enumerate()
        .map(|(i, h)| {
            while stack.last().is_some_and(|&j| headings[j].level >= h.level) {
                stack.pop();
            }
            let parent = stack.last().copied();
            stack.push(i);
            parent
        })
        .collect()
}

/// Finds the section path of any place in a document quickly.
#[derive(Debug, Clone, Default)]
pub struct SectionIndex {
    starts: Vec<usize>,
    titles: Vec<String>,
    parents: Vec<Option<usize>>,
}

impl SectionIndex {
    /// Index a document's headings (in document order).
    pub fn new(headings: &[Heading]) -> Self {
        Self {
            starts: headings.iter().map(|h| h.bytes.start).collect(),
            titles: headings.iter().map(|h| h.title.clone()).collect(),
            parents: parents(headings),
        }
    }

    /// The titles of the headings above byte `at`, outermost first (a place that is a heading
    /// sits under itself).
    pub fn path_at(&self, at: usize) -> Vec<String> {
        let n = self.starts.partition_point(|&s| s <= at);
        let mut path = Vec::new();
        let mut i = n.checked_sub(1);
        while let Some(j) = i {
            path.push(self.titles[j].clone());
            i = self.parents[j];
        }
        path.reverse();
        path
    }
}

/// 1-based first and last page of a byte range, from the pages' byte ranges (the page a byte
/// falls in, or the next page when it falls between two).
pub fn pages_of(pages: &[Range<usize>], bytes: &Range<usize>) -> Option<[usize; 2]> {
    if pages.is_empty() {
        return None;
    }
    let page_at = |b: usize| pages.partition_point(|p| p.end <= b).min(pages.len() - 1) + 1;
    let last_byte = bytes.end.saturating_sub(1).max(bytes.start);
    Some([page_at(bytes.start), page_at(last_byte)])
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbered_headings_and_what_is_not_one() {
        assert_eq!(
            numbered("4.2 Boiler washout"),
            Some((2, "Boiler washout".into()))
        );
        assert_eq!(
            numbered("4.2. Boiler washout"),
            Some((2, "Boiler washout".into()))
        );
        assert_eq!(
            numbered("1.2.\u{a0}What is Debian\nGNU/Linux?"),
            Some((2, "What is Debian GNU/Linux?".into()))
        );
        assert_eq!(numbered("Chapter 7. Tickets"), Some((1, "Tickets".into())));
        assert_eq!(numbered("3 Signalling"), Some((1, "Signalling".into())));
        assert_eq!(numbered("2031 was a busy year"), None, "year, four digits");
        assert_eq!(numbered("4.2 the pressure was raised."), None);
        assert_eq!(numbered("12 trains ran"), None, "lower case: running text");
        assert_eq!(numbered("4.2"), None);
        assert_eq!(numbered("Timetable"), None);
    }

    #[test]
    fn paths_follow_levels() {
        let text = "# Manual\n\nIntro.\n\n## Boiler\n\nText.\n\n### Washout\n\nMore.\n\n## Brakes\n\nEnd.\n";
        let seg = crate::segment::segment(text);
        let hs = from_paragraphs(text, &seg.paragraphs);
        let titles: Vec<(u8, &str)> = hs.iter().map(|h| (h.level, h.title.as_str())).collect();
        assert_eq!(
            titles,
            [(1, "Manual"), (2, "Boiler"), (3, "Washout"), (2, "Brakes")]
        );
        let ix = SectionIndex::new(&hs);
        assert_eq!(ix.path_at(0), ["Manual"]);
        assert_eq!(
            ix.path_at(text.find("More").unwrap()),
            ["Manual", "Boiler", "Washout"]
        );
        assert_eq!(ix.path_at(text.find("End").unwrap()), ["Manual", "Brakes"]);
        // Before the first heading: no section.
        let ix2 = SectionIndex::new(&hs[1..]);
        assert!(ix2.path_at(0).is_empty());
    }

    #[test]
    fn setext_and_numbered_plain_text() {
        let text = "Annual Report\n=============\n\n1 Track\n\nRails were renewed.\n\n1.1 Carn curves\n\nWear measured.\n";
        let seg = crate::segment::segment(text);
        let hs = from_paragraphs(text, &seg.paragraphs);
        let ix = SectionIndex::new(&hs);
        // The setext title and the numbered "1 Track" are both level 1: siblings.
        assert_eq!(ix.path_at(5), ["Annual Report"]);
        assert_eq!(
            ix.path_at(text.find("Wear").unwrap()),
            ["Track", "Carn curves"]
        );
    }

    #[test]
    fn pages_of_ranges() {
        let pages = vec![0..10, 12..20, 22..30];
        assert_eq!(pages_of(&pages, &(0..5)), Some([1, 1]));
        assert_eq!(pages_of(&pages, &(5..15)), Some([1, 2]));
        assert_eq!(
            pages_of(&pages, &(10..11)),
            Some([2, 2]),
            "between pages: the next"
        );
        assert_eq!(pages_of(&pages, &(25..30)), Some([3, 3]));
        assert_eq!(pages_of(&[], &(0..1)), None);
    }
}
