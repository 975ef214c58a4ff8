//! A sink that writes one JSON line per chunk and per document to any writer: the output of
//! kerf as a stage in someone else's pipeline (a Spark partition piped through `kerf embed`,
//! a shell pipe, a queue consumer).
//!
//! Lines come in input order: each chunk of a document, then the document, then the next
//! document. The writer is flushed at the end of every block of the job, so a reader sees
//! whole blocks as soon as they are done and the process never holds more than one block. The
//! last line, `{"kind":"end",...}`, carries the counts: a stream without it is incomplete
//! (the process died or stopped part way), whatever came before.
//!
//! ```text
//! {"kind":"chunk","doc":"a","chunk":0,"bytes":[0,812],"tokens":121,"vector":[0.01,...]}
//! {"kind":"document","doc":"a","chunks":1,"vector":[0.01,...]}
//! {"kind":"end","documents":1,"chunks":1}
//! ```
//!
//! Vectors are JSON arrays of numbers (the shortest decimal that reads back to the same f32),
//! or, with [`VectorText::Base64`], the base64 (RFC 4648, with padding) of the little-endian
//! f32 bytes in field `vector_b64`: a third of the size and exact by construction.
use std::io::Write;
use std::path::PathBuf;

use serde::Serialize;

use super::{ChunkSink, StoreError};
use crate::records::ChunkRecord;

/// How a vector is written in a line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum VectorText {
    /// A JSON array of numbers, field `vector`.
    #[default]
    Array,
    /// Base64 of the little-endian f32 bytes, field `vector_b64`.
    Base64,
}

/// Counts of what a line sink has written.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize)]
pub struct LineCounts {
    /// Document lines.
    pub documents: usize,
    /// Chunk lines.
    pub chunks: usize,
}

/// Chunk and document lines to a writer, flushed per block.
pub struct LineSink<W: Write> {
    out: W,
    /// The writer's name in errors (e.g. `<stdout>`).
    label: PathBuf,
    vectors: VectorText,
    dim: usize,
    chunks_of_document: usize,
    counts: LineCounts,
    line: Vec<u8>,
}

#[derive(Serialize)]
struct ChunkLine<'a> {
    kind: &'static str,
    doc: &'a str,
    chunk: usize,
    bytes: [usize; 2],
    tokens: usize,
    #[serde(skip_serializing_if = "Option::is_none")]
    vector: Option<&'a [f32]>,
    #[serde(skip_serializing_if = "Option::is_none")]
    vector_b64: Option<String>,
}

#[derive(Serialize)]
struct DocumentLine<'a> {
    kind: &'static str,
    doc: &'a str,
    chunks: usize,
    /// Absent vectors (a document with no chunks) are written as `null` in the field the
    /// stream uses, so every document line has the same keys.
    #[serde(skip_serializing_if = "Option::is_none")]
    vector: Option<Option<&'a [f32]>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    vector_b64: Option<Option<String>>,
}

#[derive(Serialize)]
struct EndLine {
    kind: &'static str,
    documents: usize,
    chunks: usize,
}

/// Base64 (RFC 4648 section 4, standard alphabet, with `=` padding) of `bytes`.
pub fn base64(bytes: &[u8]) -> String {
    const ALPHABET: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    let mut out = String::with_capacity(bytes.len().div_ceil(3) * 4);
    for group in bytes.chunks(3) {
        let b = [
            group[0],
            group.get(1).copied().unwrap_or(0),
            group.get(2).copied().unwrap_or(0),
        ];
        let n = (u32::from(b[0]) << 16) | (u32::from(b[1]) << 8) | u32::from(b[2]);
        let sextets = [n >> 18, n >> 12, n >> 6, n];
        for (k, s) in sextets.iter().enumerate() {
            if k <= group.len() {
                out.push(char::from(ALPHABET[(s & 63) as usize]));
            } else {
                out.push('=');
            }
        }
    }
    out
}

/// The little-endian bytes of `vector`, base64-encoded.
pub fn vector_base64(vector: &[f32]) -> String {
    let bytes: Vec<u8> = vector.iter().flat_map(|x| x.to_le_bytes()).collect();
    base64(&bytes)
}

impl<W: Write> LineSink<W> {
    /// A sink writing to `out` (named `label` in errors) vectors of width `dim`.
    pub fn new(out: W, label: impl Into<PathBuf>, vectors: VectorText, dim: usize) -> Self {
        Self {
            out,
            label: label.into(),
            vectors,
            dim,
            chunks_of_document: 0,
            counts: LineCounts::default(),
            line: Vec::with_capacity(1 << 14),
        }
    }

    /// What has been written so far.
    pub fn counts(&self) -> LineCounts {
        self.counts
    }

    fn check(&self, vector: &[f32]) -> Result<(), StoreError> {
        if vector.len() != self.dim {
            return Err(StoreError::Width {
                path: self.label.clone(),
                expected: self.dim,
                got: vector.len(),
            });
        }
        Ok(())
    }

    fn emit(&mut self, value: &impl Serialize) -> Result<(), StoreError> {
        self.line.clear();
        serde_json::to_writer(&mut self.line, value).expect("lines of plain data serialise");
        self.line.push(b'\n');
        self.out
            .write_all(&self.line)
            .map_err(StoreError::io(&self.label))
    }

    /// Write the end line with the counts, flush, and give the writer back. Only a stream
    /// that reached this has the end line, so a reader can tell a whole stream from a cut one.
    pub fn finish(mut self) -> Result<(W, LineCounts), StoreError> {
        let end = EndLine {
            kind: "end",
            documents: self.counts.documents,
            chunks: self.counts.chunks,
        };
        self.emit(&end)?;
        self.out.flush().map_err(StoreError::io(&self.label))?;
        Ok((self.out, self.counts))
    }
}

impl<W: Write> ChunkSink for LineSink<W> {
    fn chunk(&mut self, record: &ChunkRecord, vector: &[f32]) -> Result<(), StoreError> {
        self.check(vector)?;
        let (array, b64) = match self.vectors {
            VectorText::Array => (Some(vector), None),
            VectorText::Base64 => (None, Some(vector_base64(vector))),
        };
        self.emit(&ChunkLine {
            kind: "chunk",
            doc: &record.doc,
            chunk: record.chunk,
            bytes: record.bytes,
            tokens: record.tokens,
            vector: array,
            vector_b64: b64,
        })?;
        self.chunks_of_document += 1;
        self.counts.chunks += 1;
        Ok(())
    }

    fn document(&mut self, id: &str, vector: Option<&[f32]>) -> Result<(), StoreError> {
        if let Some(v) = vector {
            self.check(v)?;
        }
        let (array, b64) = match self.vectors {
            VectorText::Array => (Some(vector), None),
            VectorText::Base64 => (None, Some(vector.map(vector_base64))),
        };
        self.emit(&DocumentLine {
            kind: "document",
            doc: id,
            chunks: self.chunks_of_document,
            vector: array,
            vector_b64: b64,
        })?;
        self.chunks_of_document = 0;
        self.counts.documents += 1;
        Ok(())
    }

    fn end_block(&mut self) -> Result<(), StoreError> {
        self.out.flush().map_err(StoreError::io(&self.label))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn record(doc: &str, chunk: usize) -> ChunkRecord {
        ChunkRecord {
            doc: doc.into(),
            chunk,
            bytes: [chunk * 10, chunk * 10 + 10],
            lines: [1, 1],
            tokens: 7,
            overlap: 0,
            sentences: [0, 1],
            text: "0123456789".into(),
            ..Default::default()
        }
    }

    #[test]
    fn base64_matches_rfc_4648_vectors() {
        // Source: RFC 4648, section 10 (test vectors).
        for (plain, coded) in [
            ("", ""),
            ("f", "Zg=="),
            ("fo", "Zm8="),
            ("foo", "Zm9v"),
            ("foob", "Zm9vYg=="),
            ("fooba", "Zm9vYmE="),
            ("foobar", "Zm9vYmFy"),
        ] {
            assert_eq!(base64(plain.as_bytes()), coded, "{plain:?}");
        }
        // 1.0f32 is 0x3f800000 (IEEE 754 binary32), little-endian bytes 00 00 80 3f.
        assert_eq!(vector_base64(&[1.0]), base64(&[0, 0, 0x80, 0x3f]));
    }

    #[test]
    fn lines_in_order_with_document_lines_and_an_end() {
        let mut sink = LineSink::new(Vec::new(), "<mem>", VectorText::Array, 2);
        sink.chunk(&record("a", 0), &[0.5, -1.0]).unwrap();
        sink.chunk(&record("a", 1), &[0.25, 2.0]).unwrap();
        sink.document("a", Some(&[0.375, 0.5])).unwrap();
        sink.document("empty", None).unwrap();
        sink.end_block().unwrap();
        let (bytes, counts) = sink.finish().unwrap();
        assert_eq!(
            counts,
            LineCounts {
                documents: 2,
                chunks: 2
            }
        );
        let text = String::from_utf8(bytes).unwrap();
        let lines: Vec<serde_json::Value> = text
            .lines()
            .map(|l| serde_json::from_str(l).unwrap())
            .collect();
        assert_eq!(
            lines[0],
            serde_json::json!({"kind":"chunk","doc":"a","chunk":0,"bytes":[0,10],"tokens":7,"vector":[0.5,-1.0]})
        );
        assert_eq!(lines[1]["chunk"], 1);
        assert_eq!(
            lines[2],
            serde_json::json!({"kind":"document","doc":"a","chunks":2,"vector":[0.375,0.5]})
        );
        assert_eq!(
            lines[3],
            serde_json::json!({"kind":"document","doc":"empty","chunks":0,"vector":null})
        );
        assert_eq!(
            lines[4],
            serde_json::json!({"kind":"end","documents":2,"chunks":2})
        );
        assert_eq!(lines.len(), 5);
    }

    #[test]
    fn base64_lines_hold_the_exact_bits() {
        let mut sink = LineSink::new(Vec::new(), "<mem>", VectorText::Base64, 2);
        let v = [0.1f32, -3.25e-7];
        sink.chunk(&record("a", 0), &v).unwrap();
        sink.document("a", Some(&v)).unwrap();
        let (bytes, _) = sink.finish().unwrap();
        let text = String::from_utf8(bytes).unwrap();
        let first: serde_json::Value = serde_json::from_str(text.lines().next().unwrap()).unwrap();
        assert!(first.get("vector").is_none());
        assert_eq!(first["vector_b64"], vector_base64(&v));
        let doc: serde_json::Value = serde_json::from_str(text.lines().nth(1).unwrap()).unwrap();
        assert_eq!(doc["vector_b64"], vector_base64(&v));
    }

    #[test]
    fn wrong_width_and_write_errors_name_the_writer() {
        let mut sink = LineSink::new(Vec::new(), "<mem>", VectorText::Array, 3);
        let e = sink.chunk(&record("a", 0), &[1.0]).unwrap_err();
        assert_eq!(
            e.to_string(),
            "<mem>: a vector of 1 values where the model gives 3"
        );
        struct Closed;
        impl Write for Closed {
            fn write(&mut self, _: &[u8]) -> std::io::Result<usize> {
                Err(std::io::ErrorKind::BrokenPipe.into())
            }
            fn flush(&mut self) -> std::io::Result<()> {
                Ok(())
            }
        }
        let mut sink = LineSink::new(Closed, "<stdout>", VectorText::Array, 1);
        let e = sink.chunk(&record("a", 0), &[1.0]).unwrap_err();
        match e {
            StoreError::Io { path, source } => {
                assert_eq!(path, PathBuf::from("<stdout>"));
                assert_eq!(source.kind(), std::io::ErrorKind::BrokenPipe);
            }
            other => panic!("{other}"),
        }
    }
}
