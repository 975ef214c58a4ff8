//! Text and structure out of formats that are not text already: HTML pages and PDF files.
//!
//! Every later stage works on plain text with byte offsets, so an extractor turns a file into
//! that text plus what it knew of the document's structure: its headings (with their level and
//! where they are in the extracted text) and, for PDF, where each page's text is. Blocks
//! (paragraphs, headings, list items, table cells) are separated by a blank line, so the
//! segmenter finds the same paragraphs the source had. Byte ranges of chunks cut from an
//! extracted document refer to this text, which `kerf extract` writes out so they can be
//! checked.
pub mod pdf;

use std::ops::Range;

use serde::Serialize;

pub mod html;
pub mod sections;

/// A heading found in a document.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Heading {
    /// 1 for the outermost level (a chapter, `<h1>`, a top-level bookmark), 2 below it, ...
    pub level: u8,
    /// The heading's text, whitespace evened out.
    pub title: String,
    /// Where the heading's own text is in the extracted text (empty at the position where a
    /// heading known only from a PDF outline starts).
    pub bytes: Range<usize>,
}

/// What extraction left out or found worth reporting.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize)]
pub struct ExtractReport {
    /// Pages (PDF; 0 for other formats).
    pub pages: usize,
    /// Pages with no text at all (PDF).
    pub empty_pages: usize,
    /// Characters of boilerplate left out: scripts, styles and navigation in HTML, running
    /// headers and footers in PDF.
    pub dropped_chars: usize,
    /// What was left out, briefly and without repeats: element names for HTML (`script`,
    /// `nav`, ...), the running lines themselves for PDF.
    pub dropped: Vec<String>,
    /// Words split by a hyphen at a line end and joined again (PDF).
    pub joined_hyphens: usize,
}

/// A document's text and structure, extracted.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize)]
pub struct Extracted {
    /// The readable text in document order, blocks separated by a blank line.
    pub text: String,
    /// Headings in document order.
    pub headings: Vec<Heading>,
    /// PDF: the byte range of each page's text in `text`, page 1 first. Empty otherwise.
    pub pages: Vec<Range<usize>>,
    /// The document's own title (HTML `<title>`, PDF document information), when it has one.
    pub title: Option<String>,
    /// What was left out.
    pub report: ExtractReport,
}

/// The formats kerf reads.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, serde::Deserialize,
)]
#[serde(rename_all = "lowercase")]
pub enum Format {
    /// Plain text.
    Text,
    /// Markdown.
    Markdown,
    /// A JSONL field.
    Jsonl,
    /// HTML, extracted.
    Html,
    /// PDF, extracted.
    Pdf,
}

impl Format {
    /// The format a file name says (`None`: not one kerf reads as a document file).
    pub fn of_path(path: &std::path::Path) -> Option<Format> {
        let ext = path.extension()?.to_str()?.to_ascii_lowercase();
        Some(match ext.as_str() {
            "txt" | "text" => Format::Text,
            "md" | "markdown" => Format::Markdown,
            "jsonl" | "ndjson" => Format::Jsonl,
            "html" | "htm" | "xhtml" => Format::Html,
            "pdf" => Format::Pdf,
            _ => return None,
        })
    }

    /// Its name in reports.
    pub fn name(self) -> &'static str {
        match self {
            Format::Text => "text",
            Format::Markdown => "markdown",
            Format::Jsonl => "jsonl",
            Format::Html => "html",
            Format::Pdf => "pdf",
        }
    }

    /// True for formats whose text kerf extracted (byte ranges refer to the extracted text).
    pub fn is_extracted(self) -> bool {
        matches!(self, Format::Html | Format::Pdf)
    }
}

/// What a document's text carries beside itself: its format, headings and pages.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Layout {
    /// The format it was read from.
    pub format: Format,
    /// The document's own title, when it has one.
    pub title: Option<String>,
    /// Headings in document order.
    pub headings: Vec<Heading>,
    /// PDF: each page's byte range in the text.
    pub pages: Vec<Range<usize>>,
    /// What extraction left out.
    pub report: ExtractReport,
}

impl Extracted {
    /// The text and the layout around it.
    pub fn into_parts(self, format: Format) -> (String, Layout) {
        (
            self.text,
            Layout {
                format,
                title: self.title,
                headings: self.headings,
                pages: self.pages,
                report: self.report,
            },
        )
    }
}

/// Why a file could not be extracted. Every message starts with the file.
#[derive(Debug, thiserror::Error)]
pub enum ExtractError {
    /// The PDF is encrypted.
    #[error("{origin}: the PDF is encrypted; kerf reads only unencrypted PDFs (decrypt it first, for example with `qpdf --decrypt`)")]
    Encrypted {
        /// The file.
        origin: String,
    },
    /// The PDF has pages but no text on any of them.
    #[error("{origin}: no text layer on any of its {pages} pages (a scanned PDF?); run OCR on it first: kerf does not embed it as empty")]
    NoText {
        /// The file.
        origin: String,
        /// Pages in the file.
        pages: usize,
    },
    /// The file is damaged or not what its name says.
    #[error("{origin}: {detail}")]
    Broken {
        /// The file.
        origin: String,
        /// What is wrong.
        detail: String,
    },
}
