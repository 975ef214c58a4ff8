//! Parquet tables of chunks and documents with their vectors, written a block at a time.
//!
//! Each block of the embedding job becomes one row group, flushed as the block ends, so the
//! writer never holds more than one block. Vectors are fixed-size lists of f32 (`vector`); a
//! chunk's section path is a list of strings (`section`, outermost heading first) and its pages
//! (`page_first`, `page_last`) are null unless the document was a PDF.
use std::fs::File;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use arrow_array::builder::{ListBuilder, StringBuilder};
use arrow_array::{
    ArrayRef, FixedSizeListArray, Float32Array, RecordBatch, StringArray, UInt32Array, UInt64Array,
};
use arrow_schema::{DataType, Field, Schema};
use parquet::arrow::ArrowWriter;

use super::StoreError;
use crate::records::ChunkRecord;

fn vector_field(dim: usize) -> Field {
    let item = Arc::new(Field::new("item", DataType::Float32, false));
    Field::new("vector", DataType::FixedSizeList(item, dim as i32), false)
}

fn vector_array(dim: usize, data: Vec<f32>) -> ArrayRef {
    let values = Arc::new(Float32Array::from(data));
    let field = Arc::new(Field::new("item", DataType::Float32, false));
    Arc::new(FixedSizeListArray::new(field, dim as i32, values, None))
}

/// The columns of `chunks.parquet`.
pub fn chunk_schema(dim: usize) -> Schema {
    Schema::new(vec![
        Field::new("doc", DataType::Utf8, false),
        Field::new("chunk", DataType::UInt32, false),
        Field::new("byte_start", DataType::UInt64, false),
        Field::new("byte_end", DataType::UInt64, false),
        Field::new("tokens", DataType::UInt32, false),
        Field::new("text", DataType::Utf8, false),
        Field::new(
            "section",
            DataType::List(Arc::new(Field::new("item", DataType::Utf8, true))),
            false,
        ),
        Field::new("page_first", DataType::UInt32, true),
        Field::new("page_last", DataType::UInt32, true),
        vector_field(dim),
    ])
}

fn section_array(sections: Vec<Vec<String>>) -> ArrayRef {
    let mut b = ListBuilder::new(StringBuilder::new());
    for s in sections {
        for t in s {
            b.values().append_value(t);
        }
        b.append(true);
    }
    Arc::new(b.finish())
}

/// The columns of `documents.parquet`.
pub fn document_schema(dim: usize) -> Schema {
    Schema::new(vec![
        Field::new("doc", DataType::Utf8, false),
        vector_field(dim),
    ])
}

/// Rows of one block, buffered until the block ends.
#[derive(Default)]
struct ChunkRows {
    doc: Vec<String>,
    chunk: Vec<u32>,
    byte_start: Vec<u64>,
    byte_end: Vec<u64>,
    tokens: Vec<u32>,
    text: Vec<String>,
    section: Vec<Vec<String>>,
    page_first: Vec<Option<u32>>,
    page_last: Vec<Option<u32>>,
    vectors: Vec<f32>,
}

/// A Parquet file written one row group per block.
struct Table {
    path: PathBuf,
    schema: Arc<Schema>,
    writer: ArrowWriter<File>,
}

impl Table {
    fn create(path: &Path, schema: Schema) -> Result<Self, StoreError> {
        let file = File::create(path).map_err(StoreError::io(path))?;
        let schema = Arc::new(schema);
        let writer =
            ArrowWriter::try_new(file, schema.clone(), None).map_err(|e| StoreError::Parquet {
                path: path.to_path_buf(),
                message: e.to_string(),
            })?;
        Ok(Self {
            path: path.to_path_buf(),
            schema,
            writer,
        })
    }

    fn fail(&self, e: impl ToString) -> StoreError {
        StoreError::Parquet {
            path: self.path.clone(),
            message: e.to_string(),
        }
    }

    fn write(&mut self, columns: Vec<ArrayRef>) -> Result<(), StoreError> {
        let batch = RecordBatch::try_new(self.schema.clone(), columns).map_err(|e| self.fail(e))?;
        if batch.num_rows() == 0 {
            return Ok(());
        }
        self.writer.write(&batch).map_err(|e| self.fail(e))?;
        self.writer.flush().map_err(|e| self.fail(e))
    }

    fn finish(self) -> Result<(), StoreError> {
        let path = self.path.clone();
        let file = self.writer.into_inner().map_err(|e| StoreError::Parquet {
            path: path.clone(),
            message: e.to_string(),
        })?;
        file.sync_all().map_err(StoreError::io(&path))
    }
}

/// `chunks.parquet` and `documents.parquet`, written a block at a time.
pub struct ParquetPair {
    dim: usize,
    chunks: Table,
    documents: Table,
    rows: ChunkRows,
    doc_ids: Vec<String>,
    doc_vectors: Vec<f32>,
}

impl ParquetPair {
    /// Create both files for vectors of width `dim`.
    pub fn create(chunks: &Path, documents: &Path, dim: usize) -> Result<Self, StoreError> {
        Ok(Self {
            dim,
            chunks: Table::create(chunks, chunk_schema(dim))?,
            documents: Table::create(documents, document_schema(dim))?,
            rows: ChunkRows::default(),
            doc_ids: Vec::new(),
            doc_vectors: Vec::new(),
        })
    }

    fn check(&self, path: &Path, got: usize) -> Result<(), StoreError> {
        if got != self.dim {
            return Err(StoreError::Width {
                path: path.to_path_buf(),
                expected: self.dim,
                got,
            });
        }
        Ok(())
    }

    /// Buffer one chunk.
    pub fn chunk(&mut self, r: &ChunkRecord, vector: &[f32]) -> Result<(), StoreError> {
        self.check(&self.chunks.path, vector.len())?;
        let rows = &mut self.rows;
        rows.doc.push(r.doc.clone());
        rows.chunk.push(r.chunk as u32);
        rows.byte_start.push(r.bytes[0] as u64);
        rows.byte_end.push(r.bytes[1] as u64);
        rows.tokens.push(r.tokens as u32);
        rows.text.push(r.text.clone());
        rows.section.push(r.section.clone());
        rows.page_first.push(r.pages.map(|p| p[0] as u32));
        rows.page_last.push(r.pages.map(|p| p[1] as u32));
        rows.vectors.extend_from_slice(vector);
        Ok(())
    }

    /// Buffer one document vector.
    pub fn document(&mut self, id: &str, vector: &[f32]) -> Result<(), StoreError> {
        self.check(&self.documents.path, vector.len())?;
        self.doc_ids.push(id.to_string());
        self.doc_vectors.extend_from_slice(vector);
        Ok(())
    }

    /// Write the buffered rows as one row group in each file.
    pub fn end_block(&mut self) -> Result<(), StoreError> {
        let r = std::mem::take(&mut self.rows);
        self.chunks.write(vec![
            Arc::new(StringArray::from(r.doc)),
            Arc::new(UInt32Array::from(r.chunk)),
            Arc::new(UInt64Array::from(r.byte_start)),
            Arc::new(UInt64Array::from(r.byte_end)),
            Arc::new(UInt32Array::from(r.tokens)),
            Arc::new(StringArray::from(r.text)),
            section_array(r.section),
            Arc::new(UInt32Array::from(r.page_first)),
            Arc::new(UInt32Array::from(r.page_last)),
            vector_array(self.dim, r.vectors),
        ])?;
        let ids = std::mem::take(&mut self.doc_ids);
        let vectors = std::mem::take(&mut self.doc_vectors);
        self.documents.write(vec![
            Arc::new(StringArray::from(ids)),
            vector_array(self.dim, vectors),
        ])
    }

    /// Write what is buffered and close both files.
    pub fn finish(mut self) -> Result<(), StoreError> {
        self.end_block()?;
        self.chunks.finish()?;
        self.documents.finish()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;

    fn rec(doc: &str, chunk: usize, text: &str) -> ChunkRecord {
        ChunkRecord {
            doc: doc.into(),
            chunk,
            bytes: [0, text.len()],
            lines: [1, 1],
            tokens: 4,
            overlap: 0,
            sentences: [0, 1],
            text: text.into(),
            ..Default::default()
        }
    }

    fn read(path: &Path) -> (Vec<String>, usize, usize) {
        let reader = ParquetRecordBatchReaderBuilder::try_new(File::open(path).unwrap()).unwrap();
        let groups = reader.metadata().num_row_groups();
        let batches: Vec<_> = reader.build().unwrap().map(|b| b.unwrap()).collect();
        let names = batches[0]
            .schema()
            .fields()
            .iter()
            .map(|f| f.name().clone())
            .collect();
        (names, batches.iter().map(|b| b.num_rows()).sum(), groups)
    }

    #[test]
    fn blocks_become_row_groups_of_one_table() {
        let dir = tempfile::tempdir().unwrap();
        let (c, d) = (dir.path().join("c.parquet"), dir.path().join("d.parquet"));
        let mut p = ParquetPair::create(&c, &d, 2).unwrap();
        p.chunk(&rec("a", 0, "hello"), &[1.0, 0.0]).unwrap();
        p.chunk(&rec("a", 1, "you"), &[0.0, 1.0]).unwrap();
        p.document("a", &[0.7, 0.7]).unwrap();
        p.end_block().unwrap();
        p.chunk(&rec("b", 0, "again"), &[1.0, 1.0]).unwrap();
        p.document("b", &[0.7, 0.7]).unwrap();
        p.finish().unwrap();
        let (names, rows, groups) = read(&c);
        assert_eq!(
            names,
            [
                "doc",
                "chunk",
                "byte_start",
                "byte_end",
                "tokens",
                "text",
                "section",
                "page_first",
                "page_last",
                "vector"
            ]
        );
        assert_eq!((rows, groups), (3, 2));
        let (names, rows, groups) = read(&d);
        assert_eq!(names, ["doc", "vector"]);
        assert_eq!((rows, groups), (2, 2));
    }

    #[test]
    fn a_vector_of_the_wrong_width_is_refused() {
        let dir = tempfile::tempdir().unwrap();
        let (c, d) = (dir.path().join("c.parquet"), dir.path().join("d.parquet"));
        let mut p = ParquetPair::create(&c, &d, 2).unwrap();
        assert!(matches!(
            p.chunk(&rec("a", 0, "x"), &[1.0]),
            Err(StoreError::Width { .. })
        ));
    }
}
