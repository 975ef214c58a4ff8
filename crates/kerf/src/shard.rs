//! Shards: a split of a corpus into N parts by document id, the same on every machine.
//!
//! A job array of N tasks, or N Spark partitions, each given `I/N`, must together cover the
//! corpus exactly once whatever order the documents come in and whichever build of kerf runs
//! them. So a document's shard depends on its id alone, through a hash that is fixed by
//! definition rather than by a library's version: the first 8 bytes of the SHA-256 of the id's
//! UTF-8 bytes, read as a big-endian unsigned 64-bit integer, modulo N (called
//! `sha256-be64-mod-n` in manifests). Anyone can recompute it, e.g. in Python:
//! `int.from_bytes(hashlib.sha256(id.encode()).digest()[:8], "big") % n`.
use sha2::{Digest, Sha256};

use crate::corpus::{CorpusError, Document};

/// The name of the rule that assigns a document to a shard, as written in manifests.
pub const SHARD_RULE: &str = "sha256-be64-mod-n";

/// Errors in a shard given as `I/N`.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum ShardError {
    /// The text is not two whole numbers around a slash.
    #[error("shard `{given}` is not INDEX/COUNT (e.g. 0/4)")]
    Form {
        /// What was given.
        given: String,
    },
    /// The count is zero or the index is not below it.
    #[error("shard `{given}`: the index must be below the count, counting from 0 (0/{count} to {last}/{count})", last = count.saturating_sub(1))]
    Range {
        /// What was given.
        given: String,
        /// The count given.
        count: u32,
    },
}

/// One part of a split of the corpus into `count` parts, counted from 0.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct Shard {
    /// Which part, from 0 to `count - 1`.
    pub index: u32,
    /// How many parts in all.
    pub count: u32,
}

/// The 64-bit key a document id is sharded by: the first 8 bytes of SHA-256 of its UTF-8
/// bytes, big-endian.
pub fn shard_key(id: &str) -> u64 {
    let digest = Sha256::digest(id.as_bytes());
    let mut first = [0u8; 8];
    first.copy_from_slice(&digest[..8]);
    u64::from_be_bytes(first)
}

/// The shard (from 0) a document id falls in when the corpus is split into `count` parts.
/// `count` of 0 is treated as 1.
pub fn shard_of(id: &str, count: u32) -> u32 {
    (shard_key(id) % u64::from(count.max(1))) as u32
}

impl Shard {
    /// The whole corpus as a single shard.
    pub const WHOLE: Shard = Shard { index: 0, count: 1 };

    /// A shard, checked: `count` at least 1 and `index` below it.
    pub fn new(index: u32, count: u32) -> Result<Self, ShardError> {
        if count == 0 || index >= count {
            return Err(ShardError::Range {
                given: format!("{index}/{count}"),
                count,
            });
        }
        Ok(Self { index, count })
    }

    /// Read `I/N` (e.g. `3/16`; spaces around the numbers are allowed).
    pub fn parse(given: &str) -> Result<Self, ShardError> {
        let form = || ShardError::Form {
            given: given.to_string(),
        };
        let (i, n) = given.split_once('/').ok_or_else(form)?;
        let index: u32 = i.trim().parse().map_err(|_| form())?;
        let count: u32 = n.trim().parse().map_err(|_| form())?;
        Self::new(index, count).map_err(|_| ShardError::Range {
            given: given.to_string(),
            count,
        })
    }

    /// Whether the document with this id belongs to this shard.
    pub fn owns(&self, id: &str) -> bool {
        shard_of(id, self.count) == self.index
    }

    /// The documents of `docs` that belong to this shard; errors pass through, so a bad line
    /// stops every shard alike.
    pub fn keep<I>(self, docs: I) -> impl Iterator<Item = Result<Document, CorpusError>>
    where
        I: IntoIterator<Item = Result<Document, CorpusError>>,
    {
        docs.into_iter().filter(move |d| match d {
            Ok(d) => self.owns(&d.id),
            Err(_) => true,
        })
    }

    /// The folder name of this shard's part of a partitioned output: `shard=I` (the
    /// `name=value` form that Parquet dataset readers take as a column).
    pub fn folder_name(&self) -> String {
        format!("shard={}", self.index)
    }
}

impl std::fmt::Display for Shard {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}/{}", self.index, self.count)
    }
}

impl std::str::FromStr for Shard {
    type Err = ShardError;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        Self::parse(s)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn key_is_the_first_eight_bytes_of_sha256() {
        // Source: FIPS 180-2, appendix B.1: SHA-256("abc") =
        // ba7816bf 8f01cfea 414140de 5dae2223 b00361a3 96177a9c b410ff61 f20015ad.
        assert_eq!(shard_key("abc"), 0xba78_16bf_8f01_cfea);
        // Source: FIPS 180-2, appendix B.2 (the 56-byte message).
        assert_eq!(
            shard_key("abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq"),
            0x248d_6a61_d206_38b8
        );
        assert_eq!(shard_of("abc", 4), (0xba78_16bf_8f01_cfeau64 % 4) as u32);
    }

    #[test]
    fn parse_checks_form_and_range() {
        assert_eq!(
            Shard::parse("3/16").unwrap(),
            Shard {
                index: 3,
                count: 16
            }
        );
        assert_eq!(Shard::parse(" 0 / 1 ").unwrap(), Shard::WHOLE);
        for bad in ["3", "a/4", "1/2/3", "-1/4", ""] {
            assert!(
                matches!(Shard::parse(bad), Err(ShardError::Form { .. })),
                "{bad}"
            );
        }
        let e = Shard::parse("4/4").unwrap_err();
        assert_eq!(
            e.to_string(),
            "shard `4/4`: the index must be below the count, counting from 0 (0/4 to 3/4)"
        );
        assert!(matches!(Shard::parse("0/0"), Err(ShardError::Range { .. })));
        assert_eq!(Shard::parse("2/5").unwrap().to_string(), "2/5");
        assert_eq!(Shard::parse("2/5").unwrap().folder_name(), "shard=2");
    }

    #[test]
    fn shards_partition_ids_exactly_once() {
        let ids: Vec<String> = (0..2000).map(|i| format!("doc-{i}")).collect();
        let n = 7;
        let mut seen = vec![0u32; ids.len()];
        for index in 0..n {
            let s = Shard::new(index, n).unwrap();
            for (k, id) in ids.iter().enumerate() {
                seen[k] += u32::from(s.owns(id));
            }
        }
        assert!(seen.iter().all(|&c| c == 1));
        // Not all in one shard: each of 7 shards of 2000 ids gets a fair share.
        let sizes: Vec<usize> = (0..n)
            .map(|i| ids.iter().filter(|id| shard_of(id, n) == i).count())
            .collect();
        assert!(sizes.iter().all(|&s| s > 200), "{sizes:?}");
    }

    #[test]
    fn keep_filters_documents_and_passes_errors() {
        let doc = |id: &str| {
            Ok(Document {
                id: id.into(),
                origin: id.into(),
                text: "x".into(),
                layout: None,
            })
        };
        let s = Shard::new(shard_of("b", 2), 2).unwrap();
        let items = vec![
            doc("a"),
            doc("b"),
            Err(CorpusError::Missing {
                path: "gone".into(),
            }),
        ];
        let kept: Vec<_> = s.keep(items).collect();
        let ids: Vec<&str> = kept
            .iter()
            .filter_map(|d| d.as_ref().ok().map(|d| d.id.as_str()))
            .collect();
        assert!(ids.contains(&"b"));
        assert_eq!(ids.contains(&"a"), shard_of("a", 2) == shard_of("b", 2));
        assert!(kept.last().unwrap().is_err());
    }
}
