//! Counting tokens the way the encoder will see them.
//!
//! A model folder's tokenizer.json often carries its own truncation and padding (128 tokens for
//! the default model). Left on, every count would silently stop at that length, which is exactly
//! the blind spot kerf exists to show, so both are switched off here and the fact is recorded.
use std::ops::Range;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use tokenizers::models::ModelWrapper;
use tokenizers::processors::PostProcessorWrapper;
use tokenizers::Tokenizer;

/// Errors from loading or running a tokenizer.
#[derive(Debug, thiserror::Error)]
pub enum TokensError {
    /// tokenizer.json could not be read or parsed.
    #[error("{path}: cannot load tokenizer: {reason}")]
    Load {
        /// The file or folder concerned.
        path: PathBuf,
        /// What is wrong.
        reason: String,
    },
    /// Encoding a text failed inside the tokenizer.
    #[error("tokenizer failed on {what}: {reason}")]
    Encode {
        /// The text (cut short).
        what: String,
        /// What is wrong.
        reason: String,
    },
}

/// Texts longer than this are tokenized in pieces (see [`TokenCounter::tokenize`]).
pub const TOKENIZE_PIECE_BYTES: usize = 256 * 1024;

/// Where the piece that starts at `start` ends: the text's end if within `piece_bytes`; else
/// just before the last line break in the second half of the piece, else before the last
/// whitespace character in it, else before the first whitespace character after it (a run with
/// no whitespace is never cut), else the text's end.
pub(crate) fn piece_end(text: &str, start: usize, piece_bytes: usize) -> usize {
    if text.len() - start <= piece_bytes {
        return text.len();
    }
    let mut limit = start + piece_bytes;
    while !text.is_char_boundary(limit) {
        limit -= 1;
    }
    let window = &text[start..limit];
    let mut half = window.len() / 2;
    while !window.is_char_boundary(half) {
        half += 1;
    }
    if let Some(i) = window[half..].rfind('\n').map(|i| half + i) {
        if i > 0 {
            return start + i;
        }
    }
    if let Some((i, _)) = window
        .char_indices()
        .rev()
        .find(|&(i, c)| i > 0 && c.is_whitespace())
    {
        return start + i;
    }
    match text[limit..]
        .char_indices()
        .find(|&(_, c)| c.is_whitespace())
    {
        Some((i, _)) => limit + i,
        None => text.len(),
    }
}

/// What the tokenizer file itself would have done to every input, before kerf turned it off.
#[derive(Debug, Clone, Default, PartialEq, Eq, serde::Serialize)]
pub struct TokenizerDefaults {
    /// Truncation length set in tokenizer.json, if any.
    pub truncation_tokens: Option<usize>,
    /// Padding set in tokenizer.json: a fixed length, or "longest".
    pub padding: Option<String>,
}

/// Content tokens of one text: byte offsets into the text and which tokens begin a word.
#[derive(Debug, Clone, Default)]
pub struct Tokenized {
    /// Byte range of each content token in the source text.
    pub offsets: Vec<Range<usize>>,
    /// `word_start[i]` is true when token i begins a pre-tokenizer word (a cut before it
    /// re-encodes to the same tokens).
    pub word_start: Vec<bool>,
}

impl Tokenized {
    /// Number of content tokens.
    pub fn len(&self) -> usize {
        self.offsets.len()
    }
    /// True when the text has no tokens.
    pub fn is_empty(&self) -> bool {
        self.offsets.is_empty()
    }
}

/// Whether a tokenizer.json normalizer or pre-tokenizer (walked through sequences) puts a space
/// marker before an input's first word.
fn prepends_space(v: &serde_json::Value) -> bool {
    match v["type"].as_str() {
        Some("Metaspace") => {
            v["prepend_scheme"].as_str().is_none_or(|p| p != "never")
                && v["add_prefix_space"].as_bool() != Some(false)
        }
        Some("ByteLevel") => v["add_prefix_space"].as_bool() == Some(true),
        Some("Prepend") => true,
        Some("Sequence") => ["pretokenizers", "normalizers"].iter().any(|k| {
            v[*k]
                .as_array()
                .is_some_and(|items| items.iter().any(prepends_space))
        }),
        _ => false,
    }
}

/// Whether a pre-tokenizer cuts words apart at whitespace and keeps no space with them
/// (BERT's, Whitespace, WhitespaceSplit): then text joined at a word start (a prefix and a
/// chunk) encodes to the sum of its parts.
fn splits_apart(v: &serde_json::Value) -> bool {
    match v["type"].as_str() {
        Some("BertPreTokenizer" | "Whitespace" | "WhitespaceSplit") => true,
        Some("Sequence") => v["pretokenizers"]
            .as_array()
            .is_some_and(|items| items.iter().any(splits_apart)),
        _ => false,
    }
}

/// Turn off offset trimming in byte-level post-processors (RoBERTa-style tokenizers), so a
/// token's byte range includes the space the token carries (`Ġword` covers " word").
///
/// A chunk then starts at that space, and encoded on its own it gives the same `Ġword` token it
/// had inside the document. With trimmed offsets the chunk would start at "word", which a
/// byte-level BPE encodes without the space, often to more tokens, and the window could be
/// overrun. Returns whether anything changed.
fn keep_leading_spaces(pp: &mut PostProcessorWrapper) -> bool {
    match pp {
        PostProcessorWrapper::Roberta(r) if r.trim_offsets => {
            r.trim_offsets = false;
            true
        }
        PostProcessorWrapper::ByteLevel(b) if b.trim_offsets => {
            b.trim_offsets = false;
            true
        }
        PostProcessorWrapper::Sequence(seq) => {
            let mut changed = false;
            let mut i = 0;
            while let Some(p) = seq.get_mut(i) {
                changed |= keep_leading_spaces(p);
                i += 1;
            }
            changed
        }
        _ => false,
    }
}

/// A tokenizer with truncation and padding off, plus the facts needed to budget a window.
pub struct TokenCounter {
    tokenizer: Tokenizer,
    specials_per_input: usize,
    start_slack_tokens: usize,
    defaults: TokenizerDefaults,
    path: PathBuf,
    piece_floor: OnceLock<usize>,
}

impl TokenCounter {
    /// Load tokenizer.json, switch off its truncation and padding, and measure the special
    /// tokens its post-processor adds to every input (by encoding an empty text).
    pub fn from_file(path: &Path) -> Result<Self, TokensError> {
        let load_err = |reason: String| TokensError::Load {
            path: path.to_path_buf(),
            reason,
        };
        let mut tokenizer = Tokenizer::from_file(path).map_err(|e| load_err(e.to_string()))?;
        let defaults = TokenizerDefaults {
            truncation_tokens: tokenizer.get_truncation().map(|t| t.max_length),
            padding: tokenizer.get_padding().map(|p| match p.strategy {
                tokenizers::PaddingStrategy::Fixed(n) => format!("fixed {n}"),
                tokenizers::PaddingStrategy::BatchLongest => "longest in batch".to_string(),
            }),
        };
        tokenizer
            .with_truncation(None)
            .map_err(|e| load_err(e.to_string()))?;
        tokenizer.with_padding(None);
        if let Some(mut pp) = tokenizer.get_post_processor().cloned() {
            if keep_leading_spaces(&mut pp) {
                tokenizer.with_post_processor(Some(pp));
            }
        }
        let empty = tokenizer
            .encode("", true)
            .map_err(|e| load_err(format!("encoding an empty input failed: {e}")))?;
        let start_slack_tokens = std::fs::read_to_string(path)
            .ok()
            .and_then(|t| serde_json::from_str::<serde_json::Value>(&t).ok())
            .map_or(1, |v| {
                usize::from(
                    prepends_space(&v["normalizer"])
                        || prepends_space(&v["pre_tokenizer"])
                        || !splits_apart(&v["pre_tokenizer"]),
                )
            });
        Ok(Self {
            specials_per_input: empty.len(),
            start_slack_tokens,
            tokenizer,
            defaults,
            path: path.to_path_buf(),
            piece_floor: OnceLock::new(),
        })
    }

    /// Special tokens the post-processor adds to each input (`[CLS]` and `[SEP]` for BERT).
    pub fn specials_per_input(&self) -> usize {
        self.specials_per_input
    }

    /// Tokens a chunk may gain at its start when encoded on its own: 1 when the tokenizer puts
    /// a space marker before an input's first word (Metaspace with a prepend scheme, byte-level
    /// with `add_prefix_space`, a Prepend normalizer), which a word after a line break inside
    /// the document did not have, or when its pre-tokenizer keeps spaces with words (byte-level
    /// BPE: a prefix ending in a space merges with the chunk's first word); 0 for BERT-style
    /// pre-tokenizers. [`crate::plan::resolve`] keeps it out of the budget.
    ///
    /// Measured, not proven: on the Debian FAQ, byte-level BPE and Unigram (Metaspace, prepend
    /// "always") chunks re-encoded to at most one token more than their in-document count
    /// (tests/cli_model.rs, tests/split_other_tokenizers.rs).
    pub fn start_slack_tokens(&self) -> usize {
        self.start_slack_tokens
    }

    /// Truncation and padding the file asked for (now disabled).
    pub fn defaults(&self) -> &TokenizerDefaults {
        &self.defaults
    }

    /// Vocabulary size including added tokens.
    pub fn vocab_size(&self) -> usize {
        self.tokenizer.get_vocab_size(true)
    }

    /// The most content tokens one vocabulary token can re-tokenize to when it is cut out of
    /// the middle of a word and encoded on its own (`##ick` of `pennick` alone is `ic ##k`: 2).
    ///
    /// A word longer than the budget is cut into token pieces, and every piece after the first
    /// starts inside the word, so a content budget below this figure cannot guarantee that a
    /// one-token piece fits. Worked out once per tokenizer from its vocabulary (WordPiece
    /// entries with the continuation prefix stripped; other models' tokens as decoded).
    pub fn piece_floor(&self) -> usize {
        *self.piece_floor.get_or_init(|| {
            let vocab = self.tokenizer.get_vocab(false);
            let prefix = match self.tokenizer.get_model() {
                ModelWrapper::WordPiece(wp) => Some(wp.continuing_subword_prefix.clone()),
                _ => None,
            };
            let mut floor = 1;
            for (token, id) in &vocab {
                let text = match &prefix {
                    Some(p) => match token.strip_prefix(p.as_str()) {
                        Some(rest) => rest.to_string(),
                        None => continue,
                    },
                    None => match self.tokenizer.decode(&[*id], false) {
                        Ok(t) => t,
                        Err(_) => continue,
                    },
                };
                if let Ok(n) = self.count_content(&text) {
                    floor = floor.max(n);
                }
            }
            floor
        })
    }

    /// Path of the tokenizer file.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Content tokens of a text with byte offsets and word starts.
    ///
    /// A text longer than [`TOKENIZE_PIECE_BYTES`] is tokenized in pieces cut just before a
    /// whitespace character (a line break where there is one), so memory stays bounded for a
    /// document of any length: the tokenizer's own working state costs about a hundred bytes
    /// per byte of text. Pre-tokenizers split at whitespace (BERT's WordPiece, byte-level BPE
    /// and Metaspace keep a space with the word after it), so the pieces give the same tokens
    /// as the whole; `tests/token_counts.rs` checks it on real text. A run of more than a
    /// piece with no whitespace is tokenized whole.
    pub fn tokenize(&self, text: &str) -> Result<Tokenized, TokensError> {
        self.tokenize_in_pieces(text, TOKENIZE_PIECE_BYTES)
    }

    /// [`TokenCounter::tokenize`] with pieces of at most about `piece_bytes` (for tests).
    pub fn tokenize_in_pieces(
        &self,
        text: &str,
        piece_bytes: usize,
    ) -> Result<Tokenized, TokensError> {
        let mut out = Tokenized::default();
        let mut start = 0;
        while start < text.len() {
            let end = piece_end(text, start, piece_bytes.max(1));
            self.tokenize_piece(&text[start..end], start, &mut out)?;
            start = end;
        }
        Ok(out)
    }

    fn tokenize_piece(
        &self,
        piece: &str,
        base: usize,
        out: &mut Tokenized,
    ) -> Result<(), TokensError> {
        let enc = self
            .tokenizer
            .encode(piece, false)
            .map_err(|e| TokensError::Encode {
                what: format!("a text of {} bytes", piece.len()),
                reason: e.to_string(),
            })?;
        let words = enc.get_word_ids();
        out.offsets.reserve(enc.len());
        out.word_start.reserve(enc.len());
        let mut prev_word: Option<u32> = None;
        for (i, &(a, b)) in enc.get_offsets().iter().enumerate() {
            out.offsets.push(base + a..base + b);
            let w = words.get(i).copied().flatten();
            out.word_start.push(i == 0 || w.is_none() || w != prev_word);
            prev_word = w;
        }
        Ok(())
    }

    /// Content tokens of a text (no specials).
    pub fn count_content(&self, text: &str) -> Result<usize, TokensError> {
        self.tokenizer
            .encode(text, false)
            .map(|e| e.len())
            .map_err(|e| TokensError::Encode {
                what: format!("{:.40?}", text),
                reason: e.to_string(),
            })
    }

    /// Tokens of a text as one encoder input, specials included.
    pub fn count_input(&self, text: &str) -> Result<usize, TokensError> {
        Ok(self.count_content(text)? + self.specials_per_input)
    }
}
