//! An output folder written whole or not at all.
//!
//! Everything goes into a hidden `.NAME.partial-PID` folder beside the target: chunks.jsonl and
//! the vectors stream in as the job makes them, `manifest.json` (with each file's sha256) comes
//! last, and only then is the folder renamed into place. A run that dies leaves no folder under
//! the final name; partial folders of processes that are gone are swept away by the next run.
use std::fs::File;
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

use super::npy::{sha256_file, NpyWriter};
use super::parquet::ParquetPair;
use super::{ChunkSink, StoreError};
use crate::records::ChunkRecord;

/// How vectors are stored.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Format {
    /// `chunk_vectors.npy`, `doc_vectors.npy` and `doc_ids.json` beside `chunks.jsonl`.
    #[default]
    Npy,
    /// `chunks.parquet` and `documents.parquet` (vectors as fixed-size lists) beside
    /// `chunks.jsonl`.
    Parquet,
}

enum Vectors {
    Npy {
        chunks: NpyWriter,
        docs: NpyWriter,
        ids: BufWriter<File>,
        ids_written: usize,
    },
    Parquet(Box<ParquetPair>),
}

/// Counts of what a folder holds.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct FolderCounts {
    /// Documents seen.
    pub documents: usize,
    /// Documents with a vector (those with at least one chunk).
    pub documents_with_vectors: usize,
    /// Chunks written.
    pub chunks: usize,
    /// Encoder-input tokens of all chunks.
    pub input_tokens: usize,
}

/// The embedding job's output folder.
pub struct FolderSink {
    target: PathBuf,
    tmp: PathBuf,
    jsonl: Option<BufWriter<File>>,
    vectors: Option<Vectors>,
    counts: FolderCounts,
    files: Vec<&'static str>,
}

fn partial_prefix(target: &Path) -> (PathBuf, String) {
    let parent = match target.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    let name = target
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "out".into());
    (parent, format!(".{name}.partial-"))
}

/// Remove partial folders left beside `target` by processes that no longer run (on systems
/// with /proc; elsewhere only this process's own name is reused).
fn sweep_stale_partials(target: &Path) {
    let (parent, prefix) = partial_prefix(target);
    if !Path::new("/proc/self").exists() {
        return;
    }
    let Ok(entries) = std::fs::read_dir(&parent) else {
        return;
    };
    for e in entries.flatten() {
        let name = e.file_name().to_string_lossy().into_owned();
        let Some(pid) = name.strip_prefix(&prefix) else {
            continue;
        };
        let pid = pid.trim_end_matches(".old");
        if pid.parse::<u32>().is_ok() && !Path::new("/proc").join(pid).exists() {
            let _ = std::fs::remove_dir_all(e.path());
        }
    }
}

impl FolderSink {
    /// Start an output folder at `target` for vectors of width `dim`. Refuses an existing
    /// target unless `overwrite` (the old folder is replaced only when the new one is whole).
    pub fn create(
        target: &Path,
        overwrite: bool,
        format: Format,
        dim: usize,
    ) -> Result<Self, StoreError> {
        if target.exists() && !overwrite {
            return Err(StoreError::Exists {
                path: target.to_path_buf(),
            });
        }
        sweep_stale_partials(target);
        let (parent, prefix) = partial_prefix(target);
        let tmp = parent.join(format!("{prefix}{}", std::process::id()));
        if tmp.exists() {
            std::fs::remove_dir_all(&tmp).map_err(StoreError::io(&tmp))?;
        }
        std::fs::create_dir_all(&tmp).map_err(StoreError::io(&tmp))?;
        let open = |name: &str| -> Result<BufWriter<File>, StoreError> {
            let p = tmp.join(name);
            let f = File::create(&p).map_err(StoreError::io(target.join(name)))?;
            Ok(BufWriter::with_capacity(1 << 20, f))
        };
        let jsonl = open("chunks.jsonl")?;
        let (vectors, files) = match format {
            Format::Npy => {
                let mut ids = open("doc_ids.json")?;
                ids.write_all(b"[")
                    .map_err(StoreError::io(target.join("doc_ids.json")))?;
                (
                    Vectors::Npy {
                        chunks: NpyWriter::create(&tmp.join("chunk_vectors.npy"), dim)?,
                        docs: NpyWriter::create(&tmp.join("doc_vectors.npy"), dim)?,
                        ids,
                        ids_written: 0,
                    },
                    vec![
                        "chunks.jsonl",
                        "chunk_vectors.npy",
                        "doc_vectors.npy",
                        "doc_ids.json",
                    ],
                )
            }
            Format::Parquet => (
                Vectors::Parquet(Box::new(ParquetPair::create(
                    &tmp.join("chunks.parquet"),
                    &tmp.join("documents.parquet"),
                    dim,
                )?)),
                vec!["chunks.jsonl", "chunks.parquet", "documents.parquet"],
            ),
        };
        Ok(Self {
            target: target.to_path_buf(),
            tmp,
            jsonl: Some(jsonl),
            vectors: Some(vectors),
            counts: FolderCounts::default(),
            files,
        })
    }

    /// What has been written so far.
    pub fn counts(&self) -> FolderCounts {
        self.counts
    }

    fn io(&self, name: &str) -> impl FnOnce(std::io::Error) -> StoreError {
        StoreError::io(self.target.join(name))
    }

    /// Close every file, write `manifest.json` (the given fields plus `files`: each file's
    /// sha256 and size), and move the folder into place. On an error the partial folder is
    /// removed and nothing appears under the target's name.
    pub fn finish(
        mut self,
        mut manifest: serde_json::Map<String, serde_json::Value>,
    ) -> Result<FolderCounts, StoreError> {
        self.close_files()?;
        let mut files = serde_json::Map::new();
        for name in &self.files {
            let (sum, bytes) = sha256_file(&self.tmp.join(name))?;
            files.insert(
                name.to_string(),
                serde_json::json!({ "sha256": sum, "bytes": bytes }),
            );
        }
        manifest.insert("files".into(), serde_json::Value::Object(files));
        let bytes = serde_json::to_vec_pretty(&manifest).expect("JSON values serialise");
        let mut f =
            File::create(self.tmp.join("manifest.json")).map_err(self.io("manifest.json"))?;
        f.write_all(&bytes)
            .and_then(|_| f.sync_all())
            .map_err(self.io("manifest.json"))?;
        if self.target.exists() {
            let mut old_name = self.tmp.file_name().unwrap_or_default().to_os_string();
            old_name.push(".old");
            let old = self.tmp.with_file_name(old_name);
            std::fs::rename(&self.target, &old).map_err(StoreError::io(&self.target))?;
            std::fs::rename(&self.tmp, &self.target).map_err(StoreError::io(&self.target))?;
            let _ = std::fs::remove_dir_all(&old);
        } else {
            std::fs::rename(&self.tmp, &self.target).map_err(StoreError::io(&self.target))?;
        }
        Ok(self.counts)
    }

    fn close_files(&mut self) -> Result<(), StoreError> {
        let mut jsonl = self.jsonl.take().expect("files are closed once");
        jsonl
            .flush()
            .and_then(|_| jsonl.get_ref().sync_all())
            .map_err(self.io("chunks.jsonl"))?;
        match self.vectors.take().expect("files are closed once") {
            Vectors::Npy {
                chunks,
                docs,
                mut ids,
                ids_written,
            } => {
                chunks.finish()?;
                docs.finish()?;
                let end: &[u8] = if ids_written == 0 { b"]" } else { b"\n]" };
                ids.write_all(end)
                    .and_then(|_| ids.flush())
                    .and_then(|_| ids.get_ref().sync_all())
                    .map_err(self.io("doc_ids.json"))?;
            }
            Vectors::Parquet(p) => p.finish()?,
        }
        Ok(())
    }
}

impl ChunkSink for FolderSink {
    fn chunk(&mut self, record: &ChunkRecord, vector: &[f32]) -> Result<(), StoreError> {
        let io = StoreError::io(self.target.join("chunks.jsonl"));
        let jsonl = self.jsonl.as_mut().expect("open until finish");
        serde_json::to_writer(&mut *jsonl, record).map_err(|e| io(e.into()))?;
        jsonl
            .write_all(b"\n")
            .map_err(StoreError::io(self.target.join("chunks.jsonl")))?;
        match self.vectors.as_mut().expect("open until finish") {
            Vectors::Npy { chunks, .. } => chunks.push(vector)?,
            Vectors::Parquet(p) => p.chunk(record, vector)?,
        }
        self.counts.chunks += 1;
        self.counts.input_tokens += record.tokens;
        Ok(())
    }

    fn document(&mut self, id: &str, vector: Option<&[f32]>) -> Result<(), StoreError> {
        self.counts.documents += 1;
        let Some(v) = vector else {
            return Ok(());
        };
        self.counts.documents_with_vectors += 1;
        let ids_path = self.target.join("doc_ids.json");
        match self.vectors.as_mut().expect("open until finish") {
            Vectors::Npy {
                docs,
                ids,
                ids_written,
                ..
            } => {
                docs.push(v)?;
                // The layout serde_json's pretty printer gives a list of strings.
                let sep: &[u8] = if *ids_written == 0 { b"\n  " } else { b",\n  " };
                ids.write_all(sep)
                    .and_then(|_| serde_json::to_writer(&mut *ids, id).map_err(Into::into))
                    .map_err(StoreError::io(ids_path))?;
                *ids_written += 1;
            }
            Vectors::Parquet(p) => p.document(id, v)?,
        }
        Ok(())
    }

    fn end_block(&mut self) -> Result<(), StoreError> {
        if let Some(Vectors::Parquet(p)) = self.vectors.as_mut() {
            p.end_block()?;
        }
        Ok(())
    }
}

impl Drop for FolderSink {
    fn drop(&mut self) {
        // Not moved into place (an error, or a sink dropped part way): leave nothing behind.
        if self.tmp.exists() {
            let _ = std::fs::remove_dir_all(&self.tmp);
        }
    }
}
