//! Reference texts: what the user wants documents to be close to, and which documents should be.
//!
//! Two formats: kerf's TOML (`[[reference]]` tables with id, text, optional prefix, kind and
//! expected documents), and the open TREC pair of a queries file (`id<TAB>text` per line) with a
//! qrels file (`query 0 doc relevance`).
use std::collections::{HashMap, HashSet};
use std::path::Path;

use serde::Deserialize;

use super::metrics::Judgments;

/// One reference text.
#[derive(Debug, Clone, PartialEq)]
pub struct Reference {
    /// Unique id.
    pub id: String,
    /// The text to embed.
    pub text: String,
    /// Text put before it when embedding (some models expect a query prefix).
    pub prefix: String,
    /// "question" or "passage".
    pub kind: String,
    /// Expected documents with their grades (empty: no expectation).
    pub expect: Judgments,
}

/// Errors reading references.
#[derive(Debug, thiserror::Error)]
pub enum RefsError {
    /// The file could not be read.
    #[error("{path}: {source}")]
    Read {
        /// The file or folder concerned.
        path: String,
        /// What the operating system or library said.
        source: std::io::Error,
    },
    /// Syntax or content problem, with its line where known.
    #[error("{origin}: {message}")]
    Bad {
        /// Where it came from (file, or a label).
        origin: String,
        /// What is wrong.
        message: String,
    },
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RefFile {
    schema: u32,
    #[serde(default)]
    reference: Vec<RefEntry>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RefEntry {
    id: String,
    text: String,
    #[serde(default)]
    prefix: String,
    #[serde(default = "question")]
    kind: String,
    #[serde(default)]
    expect: Vec<String>,
}

fn question() -> String {
    "question".into()
}

fn line_of(text: &str, byte: usize) -> usize {
    text[..byte.min(text.len())].matches('\n').count() + 1
}

/// Parse kerf's reference TOML.
pub fn parse_toml(text: &str, origin: &str) -> Result<Vec<Reference>, RefsError> {
    let bad = |message: String| RefsError::Bad {
        origin: origin.into(),
        message,
    };
    let file: RefFile = toml::from_str(text).map_err(|e| {
        let at = e
            .span()
            .map(|s| format!("line {}: ", line_of(text, s.start)))
            .unwrap_or_default();
        bad(format!("{at}{}", e.message().trim()))
    })?;
    if file.schema != 1 {
        return Err(bad(format!(
            "references schema {} is not supported (expected 1)",
            file.schema
        )));
    }
    let refs: Vec<Reference> = file
        .reference
        .into_iter()
        .map(|e| Reference {
            id: e.id,
            text: e.text,
            prefix: e.prefix,
            kind: e.kind,
            expect: e.expect.into_iter().map(|d| (d, 1)).collect(),
        })
        .collect();
    check(refs, origin, |id| {
        text.find(&format!("\"{id}\""))
            .map(|b| format!("line {}: ", line_of(text, b)))
            .unwrap_or_default()
    })
}

fn check(
    refs: Vec<Reference>,
    origin: &str,
    locate: impl Fn(&str) -> String,
) -> Result<Vec<Reference>, RefsError> {
    let bad = |message: String| {
        Err(RefsError::Bad {
            origin: origin.into(),
            message,
        })
    };
    if refs.is_empty() {
        return bad("no references in the file (add [[reference]] tables with id and text)".into());
    }
    let mut seen = HashSet::new();
    for r in &refs {
        if r.id.trim().is_empty() {
            return bad("a reference has an empty id".into());
        }
        if !seen.insert(r.id.clone()) {
            return bad(format!(
                "{}duplicate reference id `{}`",
                locate(&r.id),
                r.id
            ));
        }
        if r.text.trim().is_empty() {
            return bad(format!("{}reference `{}` has no text", locate(&r.id), r.id));
        }
        if r.kind != "question" && r.kind != "passage" {
            return bad(format!(
                "{}reference `{}`: kind must be \"question\" or \"passage\", found {:?}",
                locate(&r.id),
                r.id,
                r.kind
            ));
        }
    }
    Ok(refs)
}

/// Parse a TREC queries file (`id<TAB>text` or `id text`) and qrels (`query iter doc rel`).
pub fn parse_trec(queries: &str, qrels: &str, origin: &str) -> Result<Vec<Reference>, RefsError> {
    let mut judged: HashMap<String, Judgments> = HashMap::new();
    for (i, line) in qrels.lines().enumerate() {
        if line.trim().is_empty() {
            continue;
        }
        let f: Vec<&str> = line.split_whitespace().collect();
        let rel = f.get(3).and_then(|r| r.parse::<i64>().ok());
        match (f.len(), rel) {
            (4, Some(rel)) => {
                // Negative grades count as 0; a grade past u32 is refused, not wrapped.
                let grade = u32::try_from(rel.max(0)).map_err(|_| RefsError::Bad {
                    origin: format!("{origin} (qrels)"),
                    message: format!("line {}: relevance {rel} is out of range", i + 1),
                })?;
                judged
                    .entry(f[0].to_string())
                    .or_default()
                    .insert(f[2].to_string(), grade);
            }
            _ => {
                return Err(RefsError::Bad {
                    origin: format!("{origin} (qrels)"),
                    message: format!(
                        "line {}: expected `query iteration document relevance`, found {line:?}",
                        i + 1
                    ),
                })
            }
        }
    }
    let mut refs = Vec::new();
    for (i, line) in queries.lines().enumerate() {
        if line.trim().is_empty() {
            continue;
        }
        let (id, text) = line
            .split_once('\t')
            .or_else(|| line.split_once(' '))
            .ok_or_else(|| RefsError::Bad {
                origin: format!("{origin} (queries)"),
                message: format!("line {}: expected `id<TAB>text`", i + 1),
            })?;
        refs.push(Reference {
            id: id.trim().to_string(),
            text: text.trim().to_string(),
            prefix: String::new(),
            kind: "question".into(),
            expect: judged.remove(id.trim()).unwrap_or_default(),
        });
    }
    if let Some(q) = judged.keys().next() {
        return Err(RefsError::Bad {
            origin: format!("{origin} (qrels)"),
            message: format!("judgments for query `{q}`, which the queries file lacks"),
        });
    }
    check(refs, origin, |_| String::new())
}

/// Load references from a TOML file, or a queries file with a qrels file beside it.
pub fn load(path: &Path, qrels: Option<&Path>) -> Result<Vec<Reference>, RefsError> {
    let read = |p: &Path| {
        std::fs::read_to_string(p).map_err(|source| RefsError::Read {
            path: p.display().to_string(),
            source,
        })
    };
    let text = read(path)?;
    match qrels {
        Some(q) => parse_trec(&text, &read(q)?, &path.display().to_string()),
        None => parse_toml(&text, &path.display().to_string()),
    }
}

/// Every expected document must exist in the corpus: a typo is an error, not a silent zero.
pub fn check_known(
    refs: &[Reference],
    known: &HashSet<String>,
    origin: &str,
) -> Result<(), RefsError> {
    for r in refs {
        let mut unknown: Vec<&String> = r.expect.keys().filter(|d| !known.contains(*d)).collect();
        unknown.sort();
        if let Some(d) = unknown.first() {
            return Err(RefsError::Bad {
                origin: origin.into(),
                message: format!(
                    "reference `{}` expects document `{d}`, which is not in the corpus",
                    r.id
                ),
            });
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn toml_references() {
        let t = "schema = 1\n[[reference]]\nid = \"a\"\ntext = \"Where?\"\nexpect = [\"x.md\"]\n\n[[reference]]\nid = \"b\"\nkind = \"passage\"\ntext = \"Some passage.\"\n";
        let r = parse_toml(t, "r.toml").unwrap();
        assert_eq!(r.len(), 2);
        assert_eq!(r[0].expect.get("x.md"), Some(&1));
        assert_eq!(r[1].kind, "passage");
    }

    #[test]
    fn bad_reference_files() {
        let cases = [
            ("schema = 1\n", "no references"),
            ("schema = 1\n[[reference]]\nid = \"a\"\ntext = \"  \"\n", "line 3: reference `a` has no text"),
            ("schema = 1\n[[reference]]\nid = \"a\"\ntext = \"x\"\n[[reference]]\nid = \"a\"\ntext = \"y\"\n", "duplicate reference id `a`"),
            ("schema = 1\n[[reference]]\nid = \"a\"\ntxt = \"x\"\n", "line 4"),
        ];
        for (t, want) in cases {
            let e = parse_toml(t, "r.toml").unwrap_err().to_string();
            assert!(e.contains(want), "{t:?}: {e}");
        }
    }

    #[test]
    fn trec_pair_and_unknown_documents() {
        let r = parse_trec(
            "q1\tfirst query\nq2\tsecond\n",
            "q1 0 d1 2\nq1 0 d2 0\n",
            "q.tsv",
        )
        .unwrap();
        assert_eq!(r[0].expect.get("d1"), Some(&2));
        assert!(r[1].expect.is_empty());
        let e = parse_trec("q1\tx\n", "q1 0 d1\n", "q.tsv")
            .unwrap_err()
            .to_string();
        assert!(e.contains("line 1"), "{e}");
        // Found by the refs_trec fuzz target: 2^32 + 2 used to wrap to a grade of 2.
        let e = parse_trec("q1\tx\n", "q1 0 d1 4294967298\n", "q.tsv")
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("line 1: relevance 4294967298 is out of range"),
            "{e}"
        );
        let r = parse_trec("q1\tx\n", "q1 0 d1 -5\nq1 0 d2 4294967295\n", "q.tsv").unwrap();
        assert_eq!(r[0].expect.get("d1"), Some(&0));
        assert_eq!(r[0].expect.get("d2"), Some(&u32::MAX));
        let known: HashSet<String> = ["d2".to_string()].into();
        let e = check_known(&r, &known, "q.tsv").unwrap_err().to_string();
        assert!(e.contains("expects document `d1`"), "{e}");
    }
}
