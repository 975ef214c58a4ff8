//! The vector cache: chunk vectors by model fingerprint and exact input text, in SQLite.
//!
//! Planning embeds the same chunks again and again (every sweep, every key press in the
//! explorer); the cache makes that cheap. Writes happen in transactions, so a killed run leaves
//! a consistent store; WAL mode and a busy timeout let two kerf processes share one file. A file
//! that fails SQLite's integrity check, or a stored vector whose checksum does not match
//! (garbage written over its bytes passes SQLite's structural check), is reported, never used.
use std::path::{Path, PathBuf};

use rusqlite::{params, Connection, OptionalExtension};
use sha2::{Digest, Sha256};

/// The on-disk schema this build reads and writes. Schema 2 appends to every vector an 8-byte
/// checksum of model, key and vector; schema 1 files (no checksums) are emptied and upgraded on
/// open, since their vectors cannot be verified.
const SCHEMA: i64 = 2;

/// Bytes of the checksum after each stored vector.
const CHECK_BYTES: usize = 8;

/// Errors from the cache.
#[derive(Debug, thiserror::Error)]
pub enum CacheError {
    /// SQLite failed.
    #[error("vector cache {path}: {source}")]
    Sql {
        /// The file or folder concerned.
        path: PathBuf,
        /// What the operating system or library said.
        source: rusqlite::Error,
    },
    /// The file can be read but not written (file mode, an immutable flag, a read-only mount).
    #[error("vector cache {path} is read-only: kerf stores every new vector in it")]
    ReadOnly {
        /// The cache file.
        path: PathBuf,
    },
    /// `rebuild` could not delete the old file.
    #[error("vector cache {path} cannot be deleted to rebuild it: {reason}")]
    Undeletable {
        /// The file that stayed.
        path: PathBuf,
        /// What the operating system said.
        reason: String,
    },
    /// The file is damaged.
    #[error("vector cache {path} is corrupt ({detail})")]
    Corrupt {
        /// The file or folder concerned.
        path: PathBuf,
        /// What is wrong.
        detail: String,
    },
}

/// A handle on the cache file.
pub struct VectorCache {
    conn: Connection,
    path: PathBuf,
}

/// Cache key of an input: sha256 of the prefix, a zero byte, and the text.
pub fn text_key(prefix: &str, text: &str) -> [u8; 32] {
    let mut h = Sha256::new();
    h.update(prefix.as_bytes());
    h.update([0u8]);
    h.update(text.as_bytes());
    h.finalize().into()
}

fn checksum(model: &[u8], key: &[u8], vector: &[u8]) -> [u8; CHECK_BYTES] {
    let mut h = Sha256::new();
    h.update(model);
    h.update(key);
    h.update(vector);
    let d = h.finalize();
    let mut out = [0u8; CHECK_BYTES];
    out.copy_from_slice(&d[..CHECK_BYTES]);
    out
}

/// A vector as stored: f32 little-endian, then its checksum.
fn to_blob(model: &[u8], key: &[u8], v: &[f32]) -> Vec<u8> {
    let mut b: Vec<u8> = v.iter().flat_map(|x| x.to_le_bytes()).collect();
    let c = checksum(model, key, &b);
    b.extend_from_slice(&c);
    b
}

/// The vector of a stored blob, or `None` when its length or checksum is wrong.
fn from_blob(model: &[u8], key: &[u8], b: &[u8]) -> Option<Vec<f32>> {
    if b.len() <= CHECK_BYTES || !(b.len() - CHECK_BYTES).is_multiple_of(4) {
        return None;
    }
    let (data, check) = b.split_at(b.len() - CHECK_BYTES);
    if checksum(model, key, data) != check {
        return None;
    }
    Some(
        data.chunks_exact(4)
            .map(|c| f32::from_le_bytes([c[0], c[1], c[2], c[3]]))
            .collect(),
    )
}

impl VectorCache {
    /// Open or create the cache, checking its integrity and schema.
    pub fn open(path: &Path) -> Result<Self, CacheError> {
        let sql = |source| CacheError::Sql {
            path: path.to_path_buf(),
            source,
        };
        let corrupt = |detail: String| CacheError::Corrupt {
            path: path.to_path_buf(),
            detail,
        };
        let conn = Connection::open(path).map_err(sql)?;
        // SQLite falls back to read-only when it may not write the file; every run stores
        // vectors, so say so now rather than after the first batch has been embedded.
        if conn.is_readonly(rusqlite::MAIN_DB).map_err(sql)? {
            return Err(CacheError::ReadOnly {
                path: path.to_path_buf(),
            });
        }
        conn.busy_timeout(std::time::Duration::from_secs(30))
            .map_err(sql)?;
        // A file that is not SQLite at all fails on the first statement.
        let mode: String = conn
            .query_row("PRAGMA journal_mode=WAL", [], |r| r.get(0))
            .map_err(|e| corrupt(e.to_string()))?;
        let _ = mode;
        let check: String = conn
            .query_row("PRAGMA quick_check", [], |r| r.get(0))
            .map_err(|e| corrupt(e.to_string()))?;
        if check != "ok" {
            return Err(corrupt(check));
        }
        conn.execute_batch(
            "CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value INTEGER NOT NULL);
             CREATE TABLE IF NOT EXISTS vectors (
                 model BLOB NOT NULL, key BLOB NOT NULL, vector BLOB NOT NULL,
                 PRIMARY KEY (model, key)) WITHOUT ROWID;",
        )
        .map_err(|e| corrupt(e.to_string()))?;
        let schema: Option<i64> = conn
            .query_row("SELECT value FROM meta WHERE key = 'schema'", [], |r| {
                r.get(0)
            })
            .optional()
            .map_err(sql)?;
        match schema {
            None => {
                conn.execute(
                    "INSERT OR IGNORE INTO meta VALUES ('schema', ?1)",
                    params![SCHEMA],
                )
                .map_err(sql)?;
            }
            Some(SCHEMA) => {}
            Some(1) => {
                conn.execute_batch(&format!(
                    "DELETE FROM vectors; UPDATE meta SET value = {SCHEMA} WHERE key = 'schema';"
                ))
                .map_err(sql)?;
            }
            Some(other) => {
                return Err(corrupt(format!(
                    "schema {other}, this kerf reads schema {SCHEMA}"
                )))
            }
        }
        Ok(Self {
            conn,
            path: path.to_path_buf(),
        })
    }

    /// Delete the file (and its WAL files) and create an empty cache.
    pub fn rebuild(path: &Path) -> Result<Self, CacheError> {
        for suffix in ["", "-wal", "-shm"] {
            let p = PathBuf::from(format!("{}{suffix}", path.display()));
            if p.exists() {
                std::fs::remove_file(&p).map_err(|e| CacheError::Undeletable {
                    path: p.clone(),
                    reason: e.to_string(),
                })?;
            }
        }
        Self::open(path)
    }

    /// Where the cache lives.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Look up vectors for keys under a model fingerprint.
    pub fn get_many(
        &self,
        fingerprint: &str,
        keys: &[[u8; 32]],
    ) -> Result<Vec<Option<Vec<f32>>>, CacheError> {
        let sql = |source| CacheError::Sql {
            path: self.path.clone(),
            source,
        };
        let model = fingerprint_bytes(fingerprint);
        let mut stmt = self
            .conn
            .prepare_cached("SELECT vector FROM vectors WHERE model = ?1 AND key = ?2")
            .map_err(sql)?;
        let mut out = Vec::with_capacity(keys.len());
        let mut width: Option<usize> = None;
        for k in keys {
            let blob: Option<Vec<u8>> = stmt
                .query_row(params![model, &k[..]], |r| r.get(0))
                .optional()
                .map_err(sql)?;
            out.push(match blob {
                None => None,
                Some(b) => {
                    let v = from_blob(&model, k, &b)
                        .filter(|v| width.is_none_or(|w| w == v.len()))
                        .ok_or_else(|| CacheError::Corrupt {
                            path: self.path.clone(),
                            detail: format!(
                                "a stored vector ({} bytes) fails its length or checksum check",
                                b.len()
                            ),
                        })?;
                    width = Some(v.len());
                    Some(v)
                }
            });
        }
        Ok(out)
    }

    /// Store vectors in one transaction.
    pub fn put_many(
        &self,
        fingerprint: &str,
        items: &[([u8; 32], Vec<f32>)],
    ) -> Result<(), CacheError> {
        let sql = |source| CacheError::Sql {
            path: self.path.clone(),
            source,
        };
        let model = fingerprint_bytes(fingerprint);
        let tx = self.conn.unchecked_transaction().map_err(sql)?;
        {
            let mut stmt = tx
                .prepare_cached("INSERT OR REPLACE INTO vectors VALUES (?1, ?2, ?3)")
                .map_err(sql)?;
            for (k, v) in items {
                stmt.execute(params![model, &k[..], to_blob(&model, k, v)])
                    .map_err(sql)?;
            }
        }
        tx.commit().map_err(sql)
    }

    /// Vectors stored under a fingerprint.
    pub fn count(&self, fingerprint: &str) -> Result<usize, CacheError> {
        self.conn
            .query_row(
                "SELECT COUNT(*) FROM vectors WHERE model = ?1",
                params![fingerprint_bytes(fingerprint)],
                |r| r.get::<_, i64>(0),
            )
            .map(|n| n as usize)
            .map_err(|source| CacheError::Sql {
                path: self.path.clone(),
                source,
            })
    }
}

fn fingerprint_bytes(f: &str) -> Vec<u8> {
    Sha256::digest(f.as_bytes()).to_vec()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_trip() {
        let dir = tempfile::tempdir().unwrap();
        let c = VectorCache::open(&dir.path().join("v.sqlite")).unwrap();
        let (a, b) = (text_key("", "a"), text_key("", "b"));
        c.put_many("m", &[(a, vec![1.0, -2.5])]).unwrap();
        assert_eq!(
            c.get_many("m", &[a, b]).unwrap(),
            vec![Some(vec![1.0, -2.5]), None]
        );
        assert_eq!(c.get_many("other", &[a]).unwrap(), vec![None]);
        // A prefix is part of the key.
        assert_ne!(text_key("query: ", "a"), a);
    }

    #[test]
    fn corrupt_file_is_reported() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("v.sqlite");
        std::fs::write(
            &p,
            b"this is not a database, just garbage bytes that fill a page....",
        )
        .unwrap();
        let e = VectorCache::open(&p).err().unwrap().to_string();
        assert!(e.contains("is corrupt") && e.contains("v.sqlite"), "{e}");
        let c = VectorCache::rebuild(&p).unwrap();
        assert_eq!(c.count("x").unwrap(), 0);
    }

    #[test]
    fn wrong_length_blob_is_not_trusted() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("v.sqlite");
        let c = VectorCache::open(&p).unwrap();
        let k = text_key("", "x");
        c.conn
            .execute(
                "INSERT INTO vectors VALUES (?1, ?2, ?3)",
                params![fingerprint_bytes("m"), &k[..], vec![1u8, 2, 3]],
            )
            .unwrap();
        let e = c.get_many("m", &[k]).err().unwrap().to_string();
        assert!(e.contains("is corrupt"), "{e}");
    }

    #[test]
    fn garbage_over_a_stored_vector_is_caught_by_its_checksum() {
        let dir = tempfile::tempdir().unwrap();
        let c = VectorCache::open(&dir.path().join("v.sqlite")).unwrap();
        let k = text_key("", "x");
        c.put_many("m", &[(k, vec![0.25, 0.5, -1.0])]).unwrap();
        assert_eq!(
            c.get_many("m", &[k]).unwrap(),
            vec![Some(vec![0.25, 0.5, -1.0])]
        );
        // Same length, one byte of the vector changed: SQLite sees a valid row.
        c.conn
            .execute(
                "UPDATE vectors SET vector = ?1",
                params![{
                    let mut b = to_blob(&fingerprint_bytes("m"), &k, &[0.25, 0.5, -1.0]);
                    b[5] ^= 0x40;
                    b
                }],
            )
            .unwrap();
        let e = c.get_many("m", &[k]).err().unwrap().to_string();
        assert!(e.contains("is corrupt") && e.contains("checksum"), "{e}");
    }

    #[test]
    fn schema_1_files_are_emptied_and_upgraded() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("v.sqlite");
        {
            let conn = Connection::open(&p).unwrap();
            conn.execute_batch(
                "CREATE TABLE meta (key TEXT PRIMARY KEY, value INTEGER NOT NULL);
                 CREATE TABLE vectors (model BLOB NOT NULL, key BLOB NOT NULL, vector BLOB NOT NULL,
                     PRIMARY KEY (model, key)) WITHOUT ROWID;
                 INSERT INTO meta VALUES ('schema', 1);",
            )
            .unwrap();
            conn.execute(
                "INSERT INTO vectors VALUES (?1, ?2, ?3)",
                params![fingerprint_bytes("m"), &text_key("", "x")[..], vec![0u8; 8]],
            )
            .unwrap();
        }
        let c = VectorCache::open(&p).unwrap();
        assert_eq!(c.count("m").unwrap(), 0);
        assert_eq!(c.get_many("m", &[text_key("", "x")]).unwrap(), vec![None]);
    }

    #[test]
    fn two_connections_write_concurrently() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("v.sqlite");
        VectorCache::open(&p).unwrap();
        let handles: Vec<_> = (0..4)
            .map(|t| {
                let p = p.clone();
                std::thread::spawn(move || {
                    let c = VectorCache::open(&p).unwrap();
                    for i in 0..50 {
                        c.put_many(
                            "m",
                            &[(text_key("", &format!("{t}-{i}")), vec![t as f32, i as f32])],
                        )
                        .unwrap();
                    }
                })
            })
            .collect();
        for h in handles {
            h.join().unwrap();
        }
        assert_eq!(VectorCache::open(&p).unwrap().count("m").unwrap(), 200);
    }
}
