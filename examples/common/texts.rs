//! The bench examples' input: a JSONL file with one `{"text": ...}` object per line.

/// Every line's `text` (blank lines skipped; a line without `text` gives an empty text).
pub fn read(path: &str) -> anyhow::Result<Vec<String>> {
    Ok(std::fs::read_to_string(path)?
        .lines()
        .filter(|l| !l.trim().is_empty())
        .map(|l| {
            serde_json::from_str::<serde_json::Value>(l)
                .map(|v| v["text"].as_str().unwrap_or_default().to_string())
        })
        .collect::<Result<_, _>>()?)
}
