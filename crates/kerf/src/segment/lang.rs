//! The language of a paragraph, as far as the sentence rules care: which abbreviations a period
//! may follow, whether a number with a period is an ordinal ("3. Oktober"), whether a comma ends
//! a sentence (Arabic, after the reference convention) and whether lower case after a mark
//! continues a sentence (not after 。, । or ؟).
//!
//! The language is chosen per paragraph, so a corpus (or a document) mixing languages gets each
//! paragraph's rules. The choice is cheap: the script of the letters in the paragraph's first
//! kilobyte (Kana means Japanese, Han without Kana Chinese, Devanagari Hindi, Arabic letters
//! Arabic), and for Latin script a vote of short function words that are frequent in one of
//! English, German, French, Spanish, Italian or Dutch and rare in the others (lists written from
//! general knowledge of these languages). English wins ties, which keeps the English behaviour
//! unchanged. A paragraph without evidence (no letters of those scripts, none of the function
//! words: a list item such as "Xen 4.1.4;") takes the language of the paragraph before it in the
//! same text, English at the start.

/// A language whose sentence rules kerf knows. Text in another language gets the English rules,
/// which are mostly script-neutral (UAX #29 plus corrections).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Language {
    /// English, and the fallback for any language not listed.
    #[default]
    English,
    /// German: ordinal numbers ("am 3. Oktober"), abbreviations such as "z. B.", "bzw.".
    German,
    /// French: abbreviations such as "M.", "Mme", "cf.", "p. ex.".
    French,
    /// Spanish: abbreviations such as "Sra.", "pág.", "Ud.".
    Spanish,
    /// Italian: abbreviations such as "Sig.", "ecc.", "pag.".
    Italian,
    /// Dutch: abbreviations such as "bijv.", "d.w.z.", "blz.".
    Dutch,
    /// Chinese: 。！？ end sentences with no space after them.
    Chinese,
    /// Japanese: as Chinese, and 「…」 followed by a particle continues the sentence.
    Japanese,
    /// Hindi: the danda । and double danda ॥ end sentences.
    Hindi,
    /// Arabic: ؟ and the Arabic full stop end sentences; so does the Arabic comma before a space.
    Arabic,
}

impl Language {
    /// The ISO 639-1 code: "en", "de", "fr", "es", "it", "nl", "zh", "ja", "hi", "ar".
    pub fn code(self) -> &'static str {
        match self {
            Language::English => "en",
            Language::German => "de",
            Language::French => "fr",
            Language::Spanish => "es",
            Language::Italian => "it",
            Language::Dutch => "nl",
            Language::Chinese => "zh",
            Language::Japanese => "ja",
            Language::Hindi => "hi",
            Language::Arabic => "ar",
        }
    }

    /// The language whose ISO 639-1 code is `code` (any case), if kerf knows it.
    pub fn from_code(code: &str) -> Option<Language> {
        const ALL: [Language; 10] = [
            Language::English,
            Language::German,
            Language::French,
            Language::Spanish,
            Language::Italian,
            Language::Dutch,
            Language::Chinese,
            Language::Japanese,
            Language::Hindi,
            Language::Arabic,
        ];
        ALL.into_iter()
            .find(|l| l.code().eq_ignore_ascii_case(code))
    }
}

/// How many bytes of a paragraph the script count looks at.
const SCRIPT_SAMPLE_BYTES: usize = 1024;
/// How many words of a Latin-script paragraph the function-word vote looks at.
const VOTE_WORDS: usize = 80;

/// The language of `text` (one paragraph, or any sample of a document): see the module docs.
/// English when `text` holds no evidence for any language.
pub fn detect_language(text: &str) -> Language {
    detect_or(text, Language::English)
}

/// The language of `text`, or `fallback` when it holds no evidence for any language.
pub(super) fn detect_or(text: &str, fallback: Language) -> Language {
    let mut end = text.len().min(SCRIPT_SAMPLE_BYTES);
    while !text.is_char_boundary(end) {
        end -= 1;
    }
    let sample = &text[..end];
    if !sample.is_ascii() {
        let (mut latin, mut han, mut kana, mut deva, mut arabic) = (0usize, 0, 0, 0, 0);
        for c in sample.chars() {
            match c {
                'a'..='z' | 'A'..='Z' | '\u{c0}'..='\u{24f}' => latin += 1,
                '\u{3040}'..='\u{30ff}' | '\u{31f0}'..='\u{31ff}' | '\u{ff66}'..='\u{ff9d}' => {
                    kana += 1
                }
                '\u{3400}'..='\u{4dbf}' | '\u{4e00}'..='\u{9fff}' | '\u{f900}'..='\u{faff}' => {
                    han += 1
                }
                '\u{900}'..='\u{97f}' => deva += 1,
                '\u{600}'..='\u{6ff}' | '\u{750}'..='\u{77f}' | '\u{fb50}'..='\u{fdff}' => {
                    arabic += 1
                }
                _ => {}
            }
        }
        // A CJK character carries about a word, a Latin letter a fifth of one.
        let latin_words = latin / 5;
        let best = [kana + han, deva, arabic].into_iter().max().unwrap_or(0);
        if best > 0 && best >= latin_words {
            if best == kana + han {
                return if kana > 0 {
                    Language::Japanese
                } else {
                    Language::Chinese
                };
            }
            return if best == deva {
                Language::Hindi
            } else {
                Language::Arabic
            };
        }
    }
    latin_vote(text).unwrap_or(fallback)
}

/// The Latin-script language whose function words are most frequent among the first words of
/// `text`; English on a tie (with English or between others), `None` when none is found.
fn latin_vote(text: &str) -> Option<Language> {
    use super::lexicon::FUNCTION_WORDS;
    let mut votes = [0usize; FUNCTION_WORDS.len()];
    let mut buf = [0u8; 8];
    for word in text
        .split(|c: char| !c.is_alphabetic())
        .filter(|w| !w.is_empty())
        .take(VOTE_WORDS)
    {
        if word.len() > buf.len() {
            continue;
        }
        let lower = &mut buf[..word.len()];
        lower.copy_from_slice(word.as_bytes());
        lower.make_ascii_lowercase();
        // Non-ASCII capitals (É, À) are rare at the start of these words; they are not folded.
        let Ok(lower) = std::str::from_utf8(lower) else {
            continue;
        };
        for (k, (_, list)) in FUNCTION_WORDS.iter().enumerate() {
            if list.binary_search(&lower).is_ok() {
                votes[k] += 1;
            }
        }
    }
    let (best, &n) = votes
        .iter()
        .enumerate()
        .max_by_key(|&(k, &v)| (v, std::cmp::Reverse(k)))
        .expect("the lists are not empty");
    (n > 0).then_some(FUNCTION_WORDS[best].0)
}

#[cfg(test)]
mod tests {
    use super::*;

    // How well the detector names real paragraphs is checked on the open Debian texts of the
    // multilingual fixtures (tests/split_multilingual.rs); here only the fallback.
    #[test]
    fn text_without_evidence_takes_the_fallback() {
        for text in ["", "Xen 4.1.4;", "1993", "OpenOffice.org 3.2.1"] {
            assert_eq!(detect_language(text), Language::English, "{text:?}");
            assert_eq!(
                detect_or(text, Language::German),
                Language::German,
                "{text:?}"
            );
        }
    }

    #[test]
    fn codes_round_trip() {
        for code in ["en", "de", "fr", "es", "it", "nl", "zh", "ja", "hi", "ar"] {
            assert_eq!(Language::from_code(code).map(Language::code), Some(code));
        }
        assert_eq!(Language::from_code("DE"), Some(Language::German));
        assert_eq!(Language::from_code("xx"), None);
    }
}
