//! The store stage: where chunk records and their vectors go once the job has made them.
//!
//! The embedding job ([`crate::job`]) hands every chunk, then every document vector, to a
//! [`ChunkSink`] in input order, and tells it when a block of documents is complete. A sink
//! decides how to keep them: [`FolderSink`] writes an output folder (chunks.jsonl with NumPy
//! .npy matrices or Parquet tables, and a manifest) that appears under its final name only when
//! whole; [`LineSink`] writes a JSON line per chunk and per document to any writer (kerf as a
//! stage of another pipeline, on standard output); [`CollectSink`] keeps everything in memory
//! for tests and small corpora. Nothing here holds more than one block: vectors stream to disk
//! or to the writer as they come.
mod atomic;
mod folder;
mod lines;
pub mod npy;
pub mod parquet;

use std::path::PathBuf;

pub use atomic::{write_atomic, AtomicFile};
pub use folder::{FolderSink, Format};
pub use lines::{base64, vector_base64, LineCounts, LineSink, VectorText};
pub use npy::{npy_f32, read_npy_f32, sha256_hex};

use crate::records::ChunkRecord;

/// Errors writing output.
#[derive(Debug, thiserror::Error)]
pub enum StoreError {
    /// Creating, writing, syncing or renaming a file failed.
    #[error("{path}: {source}")]
    Io {
        /// The file or folder concerned.
        path: PathBuf,
        /// What the operating system said.
        source: std::io::Error,
    },
    /// The target exists and replacing it was not asked for.
    #[error("{path} already exists")]
    Exists {
        /// The target.
        path: PathBuf,
    },
    /// The Parquet writer refused a batch.
    #[error("{path}: writing Parquet: {message}")]
    Parquet {
        /// The file concerned.
        path: PathBuf,
        /// The writer's message.
        message: String,
    },
    /// A vector of the wrong width reached the sink.
    #[error("{path}: a vector of {got} values where the model gives {expected}")]
    Width {
        /// The file concerned.
        path: PathBuf,
        /// The model's width.
        expected: usize,
        /// The width that arrived.
        got: usize,
    },
}

impl StoreError {
    pub(crate) fn io(path: impl Into<PathBuf>) -> impl FnOnce(std::io::Error) -> StoreError {
        let path = path.into();
        move |source| StoreError::Io { path, source }
    }
}

/// Where the embedding job puts what it makes. Calls come in input order: each chunk of a
/// document, then that document; [`ChunkSink::end_block`] after each block of documents.
pub trait ChunkSink {
    /// One chunk and its vector.
    fn chunk(&mut self, record: &ChunkRecord, vector: &[f32]) -> Result<(), StoreError>;
    /// A document after all its chunks, with its vector (`None` when it has no chunks).
    fn document(&mut self, id: &str, vector: Option<&[f32]>) -> Result<(), StoreError>;
    /// A block of documents is complete: a good moment to flush.
    fn end_block(&mut self) -> Result<(), StoreError> {
        Ok(())
    }
}

/// A sink that keeps everything in memory, in order.
#[derive(Debug, Default, Clone, PartialEq)]
pub struct CollectSink {
    /// Chunk records in order.
    pub records: Vec<ChunkRecord>,
    /// The vector of each record.
    pub vectors: Vec<Vec<f32>>,
    /// Documents in order with their vectors.
    pub documents: Vec<(String, Option<Vec<f32>>)>,
    /// Blocks completed.
    pub blocks: usize,
}

impl ChunkSink for CollectSink {
    fn chunk(&mut self, record: &ChunkRecord, vector: &[f32]) -> Result<(), StoreError> {
        self.records.push(record.clone());
        self.vectors.push(vector.to_vec());
        Ok(())
    }
    fn document(&mut self, id: &str, vector: Option<&[f32]>) -> Result<(), StoreError> {
        self.documents
            .push((id.to_string(), vector.map(<[f32]>::to_vec)));
        Ok(())
    }
    fn end_block(&mut self) -> Result<(), StoreError> {
        self.blocks += 1;
        Ok(())
    }
}
