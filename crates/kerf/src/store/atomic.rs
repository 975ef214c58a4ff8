//! Single files written so that a failed run never leaves a file that looks complete.
//!
//! Everything goes to a temporary file beside the target and is renamed into place only when
//! the whole output was written and flushed; a file dropped without [`AtomicFile::commit`]
//! disappears.
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

use super::StoreError;

/// A file written in full or not at all.
pub struct AtomicFile {
    target: PathBuf,
    writer: BufWriter<tempfile::NamedTempFile>,
}

impl AtomicFile {
    /// Start writing `target`; refuses an existing target unless `overwrite`.
    pub fn create(target: &Path, overwrite: bool) -> Result<Self, StoreError> {
        if !overwrite && target.exists() {
            return Err(StoreError::Exists {
                path: target.to_path_buf(),
            });
        }
        let dir = match target.parent() {
            Some(p) if !p.as_os_str().is_empty() => p,
            _ => Path::new("."),
        };
        let name = target
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default();
        let tmp = tempfile::Builder::new()
            .prefix(&format!(".{name}."))
            .suffix(".partial")
            .tempfile_in(dir)
            .map_err(|source| StoreError::Io {
                path: target.to_path_buf(),
                source,
            })?;
        Ok(Self {
            target: target.to_path_buf(),
            writer: BufWriter::with_capacity(1 << 20, tmp),
        })
    }

    /// Where the file will land.
    pub fn target(&self) -> &Path {
        &self.target
    }

    /// Flush, sync and rename into place.
    pub fn commit(self) -> Result<(), StoreError> {
        let path = self.target.clone();
        let io = |source| StoreError::Io {
            path: path.clone(),
            source,
        };
        let tmp = self.writer.into_inner().map_err(|e| io(e.into_error()))?;
        tmp.as_file().sync_all().map_err(io)?;
        tmp.persist(&self.target).map_err(|e| io(e.error))?;
        Ok(())
    }
}

impl Write for AtomicFile {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        self.writer.write(buf)
    }
    fn flush(&mut self) -> std::io::Result<()> {
        self.writer.flush()
    }
}

/// Write a whole file atomically from bytes.
pub fn write_atomic(target: &Path, bytes: &[u8], overwrite: bool) -> Result<(), StoreError> {
    let mut f = AtomicFile::create(target, overwrite)?;
    f.write_all(bytes).map_err(|source| StoreError::Io {
        path: target.to_path_buf(),
        source,
    })?;
    f.commit()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dropped_file_leaves_nothing() {
        let dir = tempfile::tempdir().unwrap();
        let t = dir.path().join("out.jsonl");
        {
            let mut f = AtomicFile::create(&t, false).unwrap();
            f.write_all(b"half").unwrap();
        }
        assert!(!t.exists());
        assert_eq!(
            std::fs::read_dir(dir.path()).unwrap().count(),
            0,
            "no temp file left behind"
        );
        write_atomic(&t, b"whole", false).unwrap();
        assert_eq!(std::fs::read(&t).unwrap(), b"whole");
        assert!(matches!(
            write_atomic(&t, b"again", false),
            Err(StoreError::Exists { .. })
        ));
        write_atomic(&t, b"again", true).unwrap();
        assert_eq!(std::fs::read(&t).unwrap(), b"again");
    }
}
