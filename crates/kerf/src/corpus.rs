//! Reading a corpus: files, folders, JSONL and standard input, as a lazy stream of documents.
//!
//! Documents are read one at a time so memory stays flat however large the corpus is. Bad input
//! is named precisely: invalid UTF-8 gives the file and byte offset, a JSONL line without its
//! text field gives the file and line. Binary files are skipped with a notice, not an error.
//! HTML pages (and JSONL fields holding HTML, when asked) go through [`crate::extract`] first,
//! and their documents carry a [`Layout`] (format, headings, what was dropped).
use std::collections::HashSet;
use std::io::{BufRead, BufReader, Read};
use std::path::{Path, PathBuf};
use std::sync::Arc;

use crate::extract::{self, Format, Layout};

/// Errors reading input.
#[derive(Debug, thiserror::Error)]
pub enum CorpusError {
    /// A path given on the command line does not exist.
    #[error("{path}: no such file or folder")]
    Missing {
        /// The file or folder concerned.
        path: PathBuf,
    },
    /// Reading failed.
    #[error("{path}: {source}")]
    Io {
        /// The file or folder concerned.
        path: PathBuf,
        /// What the operating system or library said.
        source: std::io::Error,
    },
    /// The bytes are not UTF-8.
    #[error("{path}: invalid UTF-8 at byte {offset}")]
    Utf8 {
        /// The file or folder concerned.
        path: PathBuf,
        /// Byte offset of the first bad byte.
        offset: usize,
    },
    /// A JSONL line is not a JSON object with the text field.
    #[error("{path}:{line}: {reason}")]
    Jsonl {
        /// The file or folder concerned.
        path: PathBuf,
        /// Line number, from 1.
        line: usize,
        /// What is wrong.
        reason: String,
    },
    /// A file could not be extracted (an encrypted or broken PDF, a scanned one).
    #[error(transparent)]
    Extract(#[from] extract::ExtractError),
    /// Two documents share an id.
    #[error("duplicate document id `{id}` (from {path}); ids must be unique")]
    DuplicateId {
        /// The id.
        id: String,
        /// The file or folder concerned.
        path: PathBuf,
    },
}

/// One JSONL line as a document, or what is wrong with it.
fn parse_jsonl_line(
    line: &str,
    path: &Path,
    line_no: usize,
    opts: &InputOptions,
) -> Result<Document, String> {
    let v: serde_json::Value =
        serde_json::from_str(line).map_err(|e| format!("not valid JSON: {e}"))?;
    let obj = v.as_object().ok_or("expected a JSON object")?;
    let text = match obj.get(&opts.text_field) {
        Some(serde_json::Value::String(s)) => s.clone(),
        Some(_) => return Err(format!("field `{}` is not a string", opts.text_field)),
        None => return Err(format!("no field `{}`", opts.text_field)),
    };
    let file = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let id = match obj.get(&opts.id_field) {
        Some(serde_json::Value::String(s)) => s.clone(),
        Some(serde_json::Value::Number(n)) => n.to_string(),
        _ => format!("{file}:{line_no}"),
    };
    let origin = format!("{}:{}", path.display(), line_no);
    if opts.html_fields {
        return html_document(id, origin, text.as_bytes(), opts).map_err(|e| e.to_string());
    }
    Ok(Document {
        id,
        origin,
        text,
        layout: None,
    })
}

/// A document from an HTML page's bytes.
fn html_document(
    id: String,
    origin: String,
    bytes: &[u8],
    opts: &InputOptions,
) -> Result<Document, extract::ExtractError> {
    let (text, layout) = extract::html::extract(
        bytes,
        &origin,
        extract::html::HtmlOptions {
            keep_chrome: opts.html_keep_chrome,
        },
    )?
    .into_parts(Format::Html);
    Ok(Document {
        id,
        origin,
        text,
        layout: Some(Arc::new(layout)),
    })
}

/// How inputs are read.
#[derive(Debug, Clone)]
pub struct InputOptions {
    /// JSONL field holding the text.
    pub text_field: String,
    /// JSONL field holding the document id (absent: `file:line`).
    pub id_field: String,
    /// Replace invalid UTF-8 instead of failing.
    pub lossy: bool,
    /// Treat standard input as JSONL rather than one document.
    pub stdin_jsonl: bool,
    /// A JSONL line that is not a usable document (bad JSON, bad UTF-8, no text field) is left
    /// out with a [`Notice`] naming its line, instead of stopping the stream.
    pub skip_broken_lines: bool,
    /// Refuse a document whose id came before ([`CorpusError::DuplicateId`]). This keeps every
    /// id seen, so memory grows with the corpus; a stage in someone else's pipeline, whose
    /// table owns its keys, turns it off to run in bounded memory on input of any length.
    pub check_unique_ids: bool,
    /// JSONL text fields hold HTML: extract their text and headings as for .html files.
    pub html_fields: bool,
    /// Keep HTML navigation, headers, footers and the like (see [`extract::html`]).
    pub html_keep_chrome: bool,
}

impl Default for InputOptions {
    fn default() -> Self {
        Self {
            text_field: "text".into(),
            id_field: "id".into(),
            lossy: false,
            stdin_jsonl: false,
            skip_broken_lines: false,
            check_unique_ids: true,
            html_fields: false,
            html_keep_chrome: false,
        }
    }
}

/// One document.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Document {
    /// Unique id: path relative to the folder given, the file name of a file given, the JSONL id
    /// field, or `stdin`.
    pub id: String,
    /// Where it came from, for messages.
    pub origin: String,
    /// The text (for HTML and PDF, the text kerf extracted; byte ranges refer to it).
    pub text: String,
    /// Format, headings and pages of an extracted document (`None`: the text as read).
    pub layout: Option<Arc<Layout>>,
}

impl Document {
    /// A document of plain text.
    pub fn plain(
        id: impl Into<String>,
        origin: impl Into<String>,
        text: impl Into<String>,
    ) -> Self {
        Self {
            id: id.into(),
            origin: origin.into(),
            text: text.into(),
            layout: None,
        }
    }

    /// The format it was read from: its layout's, else what its origin's name says (plain
    /// text when it says nothing).
    pub fn format(&self) -> Format {
        match &self.layout {
            Some(l) => l.format,
            None => match Format::of_path(Path::new(&self.origin)) {
                Some(Format::Markdown) => Format::Markdown,
                _ if self.origin.contains(".jsonl:") || self.origin.contains(".ndjson:") => {
                    Format::Jsonl
                }
                _ => Format::Text,
            },
        }
    }
}

/// Something skipped or worth telling, that is not an error.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
pub struct Notice {
    /// The file or document concerned.
    pub origin: String,
    /// What happened.
    pub message: String,
}

#[derive(Debug, Clone)]
enum Source {
    File { path: PathBuf, id: String },
    Jsonl { path: PathBuf },
    Stdin,
}

/// Formats read from files found in a folder (JSONL aside).
fn is_document_file(path: &Path) -> bool {
    matches!(
        Format::of_path(path),
        Some(Format::Text | Format::Markdown | Format::Html | Format::Pdf)
    )
}

fn is_jsonl(path: &Path) -> bool {
    matches!(
        path.extension().and_then(|e| e.to_str()),
        Some("jsonl" | "ndjson")
    )
}

/// Find the sources behind the given paths (`-` is standard input). Folders are walked in
/// sorted order for .txt, .md, .html, .pdf and .jsonl files.
fn discover(paths: &[PathBuf], notices: &mut Vec<Notice>) -> Result<Vec<Source>, CorpusError> {
    let mut out = Vec::new();
    for p in paths {
        if p.as_os_str() == "-" {
            out.push(Source::Stdin);
        } else if p.is_dir() {
            let mut files = Vec::new();
            walk(p, &mut files)?;
            files.sort();
            for f in files {
                let ext = f.extension().and_then(|e| e.to_str()).unwrap_or("");
                let rel = f
                    .strip_prefix(p)
                    .unwrap_or(&f)
                    .to_string_lossy()
                    .replace('\\', "/");
                if is_jsonl(&f) {
                    out.push(Source::Jsonl { path: f });
                } else if is_document_file(&f) {
                    out.push(Source::File { path: f, id: rel });
                } else if !rel.starts_with('.') && !rel.contains("/.") && ext != "toml" {
                    notices.push(Notice {
                        origin: f.display().to_string(),
                        message: "skipped: not a .txt, .md, .html, .pdf or .jsonl file".into(),
                    });
                }
            }
        } else if p.is_file() {
            if is_jsonl(p) {
                out.push(Source::Jsonl { path: p.clone() });
            } else {
                let id = p
                    .file_name()
                    .map(|n| n.to_string_lossy().into_owned())
                    .unwrap_or_default();
                out.push(Source::File {
                    path: p.clone(),
                    id,
                });
            }
        } else {
            return Err(CorpusError::Missing { path: p.clone() });
        }
    }
    Ok(out)
}

fn walk(dir: &Path, out: &mut Vec<PathBuf>) -> Result<(), CorpusError> {
    let io = |source| CorpusError::Io {
        path: dir.to_path_buf(),
        source,
    };
    for entry in std::fs::read_dir(dir).map_err(io)? {
        let entry = entry.map_err(io)?;
        let path = entry.path();
        let ft = entry.file_type().map_err(io)?;
        if ft.is_dir() {
            walk(&path, out)?;
        } else if ft.is_file() {
            out.push(path);
        }
    }
    Ok(())
}

/// Decode bytes as UTF-8, or say where they stop being UTF-8.
pub fn decode(bytes: Vec<u8>, path: &Path, lossy: bool) -> Result<String, CorpusError> {
    match String::from_utf8(bytes) {
        Ok(s) => Ok(s),
        Err(e) if lossy => Ok(String::from_utf8_lossy(e.as_bytes()).into_owned()),
        Err(e) => Err(CorpusError::Utf8 {
            path: path.to_path_buf(),
            offset: e.utf8_error().valid_up_to(),
        }),
    }
}

/// True when the bytes look binary: a NUL byte in the first 8 KiB.
pub fn looks_binary(bytes: &[u8]) -> bool {
    bytes[..bytes.len().min(8192)].contains(&0)
}

/// A lazy stream of documents over files, folders, JSONL and standard input.
pub struct DocStream {
    sources: std::vec::IntoIter<Source>,
    current_jsonl: Option<(PathBuf, Box<dyn BufRead + Send>, usize)>,
    opts: InputOptions,
    seen: HashSet<String>,
    /// Files skipped and other remarks, collected as the stream goes.
    pub notices: Vec<Notice>,
    failed: bool,
}

impl DocStream {
    /// Open a stream over paths (`-` for standard input).
    pub fn open(paths: &[PathBuf], opts: InputOptions) -> Result<Self, CorpusError> {
        let mut notices = Vec::new();
        let sources = discover(paths, &mut notices)?;
        Ok(Self {
            sources: sources.into_iter(),
            current_jsonl: None,
            opts,
            seen: HashSet::new(),
            notices,
            failed: false,
        })
    }

    /// A stream over documents already in memory (for tests and the terminal UI).
    pub fn from_documents(
        docs: Vec<Document>,
    ) -> impl Iterator<Item = Result<Document, CorpusError>> {
        docs.into_iter().map(Ok)
    }

    /// A stream over JSONL read from any reader (a buffer in tests and fuzzing); `label` stands
    /// for the file in ids and messages, as a path would.
    pub fn from_jsonl_reader(
        reader: impl BufRead + Send + 'static,
        label: &Path,
        opts: InputOptions,
    ) -> Self {
        Self {
            sources: Vec::new().into_iter(),
            current_jsonl: Some((label.to_path_buf(), Box::new(reader), 0)),
            opts,
            seen: HashSet::new(),
            notices: Vec::new(),
            failed: false,
        }
    }

    fn next_jsonl(&mut self) -> Option<Result<Document, CorpusError>> {
        let (path, reader, line_no) = self.current_jsonl.as_mut()?;
        loop {
            let mut raw = Vec::new();
            *line_no += 1;
            match reader.read_until(b'\n', &mut raw) {
                Ok(0) => {
                    self.current_jsonl = None;
                    return None;
                }
                Ok(_) => {}
                Err(source) => {
                    return Some(Err(CorpusError::Io {
                        path: path.clone(),
                        source,
                    }))
                }
            }
            let parsed = match decode(raw, path, self.opts.lossy) {
                Ok(line) if line.trim().is_empty() => continue,
                Ok(line) => parse_jsonl_line(&line, path, *line_no, &self.opts),
                Err(CorpusError::Utf8 { offset, .. }) => {
                    Err(format!("invalid UTF-8 at byte {offset} of the line"))
                }
                Err(e) => return Some(Err(e)),
            };
            match parsed {
                Ok(doc) => return Some(Ok(doc)),
                Err(reason) if self.opts.skip_broken_lines => self.notices.push(Notice {
                    origin: format!("{}:{}", path.display(), line_no),
                    message: format!("skipped: {reason}"),
                }),
                Err(reason) => {
                    return Some(Err(CorpusError::Jsonl {
                        path: path.clone(),
                        line: *line_no,
                        reason,
                    }))
                }
            }
        }
    }

    fn read_file(&mut self, path: &Path, id: String) -> Option<Result<Document, CorpusError>> {
        let bytes = match std::fs::read(path) {
            Ok(b) => b,
            Err(source) => {
                return Some(Err(CorpusError::Io {
                    path: path.to_path_buf(),
                    source,
                }))
            }
        };
        if Format::of_path(path) == Some(Format::Pdf) {
            let origin = path.display().to_string();
            return match extract::pdf::extract(&bytes, &origin) {
                Ok(x) => {
                    let (text, layout) = x.into_parts(Format::Pdf);
                    Some(Ok(Document {
                        id,
                        origin,
                        text,
                        layout: Some(Arc::new(layout)),
                    }))
                }
                // A scanned PDF is not an error in the corpus, but it must not pass for an
                // empty document either: it is left out and named.
                Err(extract::ExtractError::NoText { pages, .. }) => {
                    self.notices.push(Notice {
                        origin,
                        message: format!(
                            "skipped: no text layer on any of its {pages} pages (a scanned PDF?); run OCR on it first"
                        ),
                    });
                    None
                }
                Err(e) => Some(Err(e.into())),
            };
        }
        if looks_binary(&bytes) {
            self.notices.push(Notice {
                origin: path.display().to_string(),
                message: "skipped: binary file (NUL bytes)".into(),
            });
            return None;
        }
        if Format::of_path(path) == Some(Format::Html) {
            return Some(
                html_document(id, path.display().to_string(), &bytes, &self.opts)
                    .map_err(CorpusError::from),
            );
        }
        Some(decode(bytes, path, self.opts.lossy).map(|text| Document {
            id,
            origin: path.display().to_string(),
            text,
            layout: None,
        }))
    }
}

impl Iterator for DocStream {
    type Item = Result<Document, CorpusError>;

    fn next(&mut self) -> Option<Self::Item> {
        if self.failed {
            return None;
        }
        loop {
            if self.current_jsonl.is_some() {
                if let Some(item) = self.next_jsonl() {
                    return Some(self.check(item));
                }
                continue;
            }
            let item = match self.sources.next()? {
                Source::File { path, id } => match self.read_file(&path, id) {
                    Some(item) => item,
                    None => continue,
                },
                Source::Jsonl { path } => match std::fs::File::open(&path) {
                    Ok(f) => {
                        self.current_jsonl = Some((path, Box::new(BufReader::new(f)), 0));
                        continue;
                    }
                    Err(source) => Err(CorpusError::Io { path, source }),
                },
                Source::Stdin => {
                    let path = PathBuf::from("<stdin>");
                    if self.opts.stdin_jsonl {
                        self.current_jsonl =
                            Some((path, Box::new(BufReader::new(std::io::stdin())), 0));
                        continue;
                    }
                    let mut bytes = Vec::new();
                    match std::io::stdin().read_to_end(&mut bytes) {
                        Ok(_) => decode(bytes, &path, self.opts.lossy).map(|text| Document {
                            id: "stdin".into(),
                            origin: "<stdin>".into(),
                            text,
                            layout: None,
                        }),
                        Err(source) => Err(CorpusError::Io { path, source }),
                    }
                }
            };
            return Some(self.check(item));
        }
    }
}

impl DocStream {
    fn check(&mut self, item: Result<Document, CorpusError>) -> Result<Document, CorpusError> {
        let r = item.and_then(|d| {
            if self.opts.check_unique_ids && !self.seen.insert(d.id.clone()) {
                return Err(CorpusError::DuplicateId {
                    id: d.id,
                    path: PathBuf::from(d.origin),
                });
            }
            if d.text.trim().is_empty() {
                self.notices.push(Notice {
                    origin: d.origin.clone(),
                    message: "empty or whitespace-only: no chunks".into(),
                });
            }
            Ok(d)
        });
        if r.is_err() {
            self.failed = true;
        }
        r
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn utf8_error_names_the_byte() {
        let e = decode(b"ab\xffcd".to_vec(), Path::new("x.txt"), false).unwrap_err();
        assert_eq!(e.to_string(), "x.txt: invalid UTF-8 at byte 2");
        assert_eq!(
            decode(b"ab\xffcd".to_vec(), Path::new("x.txt"), true).unwrap(),
            "ab\u{fffd}cd"
        );
    }

    #[test]
    fn folders_jsonl_binary_and_duplicates() {
        let dir = tempfile::tempdir().unwrap();
        let d = dir.path();
        std::fs::create_dir(d.join("sub")).unwrap();
        std::fs::write(d.join("a.md"), "Alpha.").unwrap();
        std::fs::write(d.join("sub/b.txt"), "Beta.").unwrap();
        std::fs::write(d.join("c.bin.txt"), b"\0\x01binary").unwrap();
        std::fs::write(d.join("e.txt"), "  \n ").unwrap();
        std::fs::write(
            d.join("docs.jsonl"),
            "{\"id\":\"j1\",\"text\":\"Gamma.\"}\n\n{\"text\":\"Delta.\"}\n",
        )
        .unwrap();
        let mut s = DocStream::open(&[d.to_path_buf()], InputOptions::default()).unwrap();
        let ids: Vec<String> = s.by_ref().map(|r| r.unwrap().id).collect();
        assert_eq!(ids, ["a.md", "j1", "docs.jsonl:3", "e.txt", "sub/b.txt"]);
        assert!(s
            .notices
            .iter()
            .any(|n| n.origin.ends_with("c.bin.txt") && n.message.contains("binary")));
        assert!(s
            .notices
            .iter()
            .any(|n| n.origin.ends_with("e.txt") && n.message.contains("empty")));
        std::fs::write(d.join("dup.jsonl"), "{\"id\":\"a.md\",\"text\":\"x\"}\n").unwrap();
        let s = DocStream::open(
            &[d.join("a.md"), d.join("dup.jsonl")],
            InputOptions::default(),
        )
        .unwrap();
        let last = s.last().unwrap().unwrap_err().to_string();
        assert!(last.contains("duplicate document id `a.md`"), "{last}");
    }

    #[test]
    fn jsonl_errors_name_file_and_line() {
        let dir = tempfile::tempdir().unwrap();
        let f = dir.path().join("x.jsonl");
        std::fs::write(&f, "{\"text\":\"ok\"}\n{\"body\":\"no text\"}\n").unwrap();
        let errs: Vec<String> = DocStream::open(&[f], InputOptions::default())
            .unwrap()
            .filter_map(|r| r.err())
            .map(|e| e.to_string())
            .collect();
        assert_eq!(errs.len(), 1);
        assert!(
            errs[0].ends_with("x.jsonl:2: no field `text`"),
            "{}",
            errs[0]
        );
    }
}
