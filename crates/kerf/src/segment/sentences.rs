//! Sentences of prose: Unicode sentence boundaries (UAX #29) in short windows around possible
//! terminals, corrected for abbreviations and initials, list numbering, ellipses, URLs and
//! e-mail addresses, and continuation in lower case; some of the corrections depend on the
//! paragraph's language (see `lang`).
use std::ops::Range;

use unicode_segmentation::UnicodeSegmentation;

use super::blocks::{is_bullet, ordered_label};
use super::lang::{detect_or, Language};
use super::lexicon::*;
use super::trim_range;

// ---------------------------------------------------------------------------------------------
// Sentences of prose

/// Buffers reused from one paragraph to the next.
#[derive(Default)]
pub(super) struct Scratch {
    flat: String,
    candidates: Vec<usize>,
    forced: Vec<usize>,
    cuts: Vec<usize>,
    /// The language of the last prose paragraph, for the next one if it holds no evidence.
    lang: Language,
}

/// Characters UAX #29 treats as paragraph separators; inside one of our paragraphs they are only
/// line breaks. Each is replaced by spaces of the same byte length, so offsets carry over.
pub(super) fn is_line_break(c: char) -> bool {
    matches!(c, '\n' | '\r' | '\u{85}' | '\u{2028}' | '\u{2029}')
}

/// `src` with every `is_line_break` character replaced by spaces of the same byte length (built
/// in `buf`), or `src` itself when it has none. All searches are memchr-backed; the Unicode
/// separators are rare enough to take a character-by-character pass.
pub(super) fn flatten<'a>(src: &'a str, buf: &'a mut String) -> &'a str {
    let bytes = src.as_bytes();
    let unicode_breaks = !src.is_ascii()
        && (src.contains('\u{85}') || src.contains('\u{2028}') || src.contains('\u{2029}'));
    if !unicode_breaks && !bytes.contains(&b'\n') && !bytes.contains(&b'\r') {
        return src;
    }
    buf.clear();
    if unicode_breaks {
        for c in src.chars() {
            if is_line_break(c) {
                buf.extend(std::iter::repeat_n(' ', c.len_utf8()));
            } else {
                buf.push(c);
            }
        }
    } else {
        for (k, line) in src.split('\n').enumerate() {
            if k > 0 {
                buf.push(' ');
            }
            let body = line.strip_suffix('\r').unwrap_or(line);
            if body.as_bytes().contains(&b'\r') {
                buf.extend(body.chars().map(|c| if c == '\r' { ' ' } else { c }));
            } else {
                buf.push_str(body);
            }
            if body.len() < line.len() {
                buf.push(' ');
            }
        }
    }
    debug_assert_eq!(buf.len(), src.len());
    buf
}

/// Sentence ranges inside one prose or list paragraph, pushed as absolute offsets.
pub(super) fn prose_sentences(
    text: &str,
    para: Range<usize>,
    s: &mut Scratch,
    out: &mut Vec<Range<usize>>,
) {
    let src = &text[para.clone()];
    let flat = flatten(src, &mut s.flat);
    let lang = detect_or(flat, s.lang);
    s.lang = lang;
    uax_candidates(flat, &mut s.candidates);
    s.forced.clear();
    ellipsis_cuts(flat, &mut s.forced);
    inline_list_cuts(flat, &mut s.forced);
    if lang == Language::Arabic {
        arabic_comma_cuts(flat, &mut s.forced);
    }
    s.forced.sort_unstable();
    s.forced.dedup();
    choose_cuts(flat, &s.candidates, &s.forced, &mut s.cuts, lang);

    let mut start = 0;
    for &cut in s.cuts.iter().chain(std::iter::once(&flat.len())) {
        if let Some(r) = trim_range(text, para.start + start..para.start + cut) {
            out.push(r);
        }
        start = cut;
    }
}

/// Whether UAX #29 could treat `c` as a sentence terminal (STerm or ATerm): '.', '!', '?', or
/// any non-ASCII character that is neither a letter, a digit nor whitespace. Over-inclusive on
/// purpose (curly quotes, dashes, emoji qualify); a test checks that no other character is a
/// terminal.
pub(super) fn may_be_terminal(c: char) -> bool {
    matches!(c, '.' | '!' | '?') || (!c.is_ascii() && !c.is_alphanumeric() && !c.is_whitespace())
}

/// UAX #29 sentence boundaries of `flat` (which holds no line breaks), without 0, in order.
///
/// UAX #29 only ever breaks after a terminal with its closing punctuation and spaces (rule
/// SB11); whether it does depends on the letter before the terminal (SB7) and on what comes
/// before the next letter after it (SB6, SB8, SB8a). So instead of running the state machine over
/// every character, run it over short windows, each from just before a possible terminal to the
/// first letter after it, merged when they touch: the same boundaries for a fraction of the
/// work. The property test `windowed_uax_matches_whole_text_uax` holds this to the whole-text
/// run.
pub(super) fn uax_candidates(flat: &str, out: &mut Vec<usize>) {
    out.clear();
    let bytes = flat.as_bytes();
    let mut window: Option<Range<usize>> = None;
    let mut i = 0;
    while i < bytes.len() {
        let byte = bytes[i];
        if byte.is_ascii() && !matches!(byte, b'.' | b'!' | b'?') {
            i += 1;
            continue;
        }
        let c = flat[i..].chars().next().expect("i is a char boundary");
        if !may_be_terminal(c) {
            i += c.len_utf8();
            continue;
        }
        // Start: back over the letter before the terminal (SB7), and over any marks or format
        // characters between them (SB5), never before the current window's end.
        let floor = window.as_ref().map_or(0, |w| w.end);
        let mut start = i;
        for _ in 0..16 {
            if start <= floor {
                break;
            }
            let prev = flat[..start].chars().next_back().expect("start > 0");
            start -= prev.len_utf8();
            if prev.is_ascii() || prev.is_whitespace() || (prev.is_alphanumeric() && !is_mark(prev))
            {
                break;
            }
        }
        // End: just past the first letter after the terminal (where SB8's look-ahead stops).
        let mut end = flat.len();
        for (k, ch) in flat[i + c.len_utf8()..].char_indices() {
            if ch.is_alphabetic() && (ch.is_ascii() || !is_mark(ch)) {
                end = i + c.len_utf8() + k + ch.len_utf8();
                break;
            }
        }
        match window.as_mut() {
            Some(w) if start <= w.end => w.end = end,
            _ => {
                if let Some(w) = window.take() {
                    uax_window(flat, w, out);
                }
                window = Some(start..end);
            }
        }
        i = end;
    }
    if let Some(w) = window {
        uax_window(flat, w, out);
    }
}

/// A character UAX #29 folds into the one before it (Extend or Format, SB5), such as the
/// alphabetic marks U+0D81 or U+1067: it neither starts nor ends a window. Asked of the sentence
/// rules themselves: after "?", a letter starts a new sentence and a mark does not.
pub(super) fn is_mark(c: char) -> bool {
    if c.is_ascii() {
        return false;
    }
    let mut buf = [0u8; 6];
    buf[0] = b'?';
    let len = 1 + c.encode_utf8(&mut buf[1..5]).len();
    buf[len] = b'A';
    std::str::from_utf8(&buf[..=len])
        .is_ok_and(|s| !s.split_sentence_bound_indices().any(|(k, _)| k == 1))
}

pub(super) fn uax_window(flat: &str, w: Range<usize>, out: &mut Vec<usize>) {
    let base = w.start;
    out.extend(
        flat[w]
            .split_sentence_bound_indices()
            .skip(1)
            .map(|(k, _)| base + k),
    );
}

/// Merge the forced cuts with the UAX #29 candidates that survive the corrections.
pub(super) fn choose_cuts(
    flat: &str,
    candidates: &[usize],
    forced: &[usize],
    cuts: &mut Vec<usize>,
    lang: Language,
) {
    cuts.clear();
    let mut seg_start = 0;
    let mut links = LinkCache::default();
    let mut f = 0;
    for (k, &b) in candidates.iter().enumerate() {
        while f < forced.len() && forced[f] <= b {
            take_forced(flat, forced[f], &mut seg_start, cuts, &mut links);
            f += 1;
        }
        if b <= seg_start {
            continue;
        }
        let next = candidates.get(k + 1).copied().unwrap_or(flat.len());
        if let Some(cut) = keep_candidate(flat, seg_start, b, next, &mut links, lang) {
            cuts.push(cut);
            seg_start = cut;
        }
    }
    for &c in &forced[f..] {
        take_forced(flat, c, &mut seg_start, cuts, &mut links);
    }
}

/// Take a forced cut unless it falls inside a URL ("http://x.org/a...B").
pub(super) fn take_forced(
    flat: &str,
    cut: usize,
    seg_start: &mut usize,
    cuts: &mut Vec<usize>,
    links: &mut LinkCache,
) {
    if cut > *seg_start && cut < flat.len() && !links.inside_link(flat.as_bytes(), cut) {
        cuts.push(cut);
        *seg_start = cut;
    }
}

/// Quotes and closing brackets that end with a sentence (CJK ones included), and Markdown
/// emphasis and code marks.
pub(super) fn is_closer(c: char) -> bool {
    matches!(
        c,
        '"' | '\'' | '”' | '’' | '»' | '›' | ')' | ']' | '}' | '*' | '_' | '`' | '~'
    ) || matches!(c, '」' | '』' | '）' | '】' | '〉' | '》' | '〕' | '］')
}

/// Quotes and opening brackets that start a sentence (CJK ones included), and Markdown emphasis
/// marks.
pub(super) fn is_opener(c: char) -> bool {
    matches!(
        c,
        '"' | '\'' | '“' | '‘' | '«' | '‹' | '(' | '[' | '{' | '*' | '_' | '`'
    ) || is_cjk_opener(c)
}

/// Opening brackets and quotes of CJK text.
pub(super) fn is_cjk_opener(c: char) -> bool {
    matches!(c, '「' | '『' | '（' | '【' | '〈' | '《' | '〔' | '［')
}

/// Opening quotes and brackets that UAX #29 leaves with the sentence before when no space
/// separates them from its mark ("。“分区", "插紧。(小心"): they belong to the next one. Straight
/// quotes are left out (they open and close alike).
fn is_glued_opener(c: char) -> bool {
    matches!(c, '“' | '‘' | '(' | '[') || is_cjk_opener(c)
}

/// Sentence marks that end a sentence whatever follows, lower case included: the ideographic
/// full stop and the full-width marks of CJK text, the danda and double danda of Devanagari,
/// and the Arabic question mark and full stop.
pub(super) fn is_hard_stop(c: char) -> bool {
    matches!(c, '。' | '！' | '？' | '｡' | '।' | '॥' | '؟' | '۔')
}

/// Cuts after the Arabic comma (،) followed by a space. pysbd 0.3.4, the reference for Arabic
/// (tests/sentences_multilingual.rs), ends sentences there: Arabic prose links many clauses with
/// "، و" where English would start new sentences, so these are the units a reader (and the
/// splitter) can cut between.
pub(super) fn arabic_comma_cuts(flat: &str, out: &mut Vec<usize>) {
    for (i, _) in flat.match_indices('،') {
        let rest = &flat[i + '،'.len_utf8()..];
        let t = rest.trim_start();
        if t.len() < rest.len() && t.chars().next().is_some_and(char::is_alphanumeric) {
            out.push(flat.len() - t.len());
        }
    }
}

/// Decide one UAX #29 candidate boundary `b` of the segment starting at `seg_start` (the next
/// candidate is `next`). Returns where to cut (usually `b`), or `None` to join.
pub(super) fn keep_candidate(
    flat: &str,
    seg_start: usize,
    mut b: usize,
    next: usize,
    links: &mut LinkCache,
    lang: Language,
) -> Option<usize> {
    let bytes = flat.as_bytes();
    let glued = !flat[..b].ends_with(char::is_whitespace);
    if glued && flat[..b].ends_with(is_glued_opener) {
        // "。“分区": the quote opens the next sentence; cut before it.
        // Only when the openers touch both the mark and the next word; otherwise as before.
        let kept = flat[..b].trim_end_matches(is_glued_opener);
        if kept.len() > seg_start
            && !kept.ends_with(char::is_whitespace)
            && !flat[b..].starts_with(char::is_whitespace)
        {
            b = kept.len();
        }
    }
    if glued {
        // "**Note.** The": the emphasis closes with the sentence; cut after it.
        let marks = bytes[b..next]
            .iter()
            .take_while(|c| matches!(c, b'*' | b'_' | b'`' | b'~'))
            .count();
        if marks > 0
            && flat[b + marks..]
                .chars()
                .next()
                .is_none_or(char::is_whitespace)
        {
            b += marks;
        } else {
            if links.inside_link(bytes, b) {
                return None;
            }
            // "Jane.Doe", "README.Debian", "java.util.List": a dot between letters is no end.
            let before = flat[..b].chars().next_back();
            let after = flat[b..].chars().next();
            if before == Some('.')
                && bytes
                    .get(b.wrapping_sub(2))
                    .is_some_and(u8::is_ascii_alphanumeric)
                && after.is_some_and(|c| c.is_ascii_alphanumeric())
            {
                return None;
            }
        }
    }
    let left = flat[seg_start..b].trim_end();
    let core = left.trim_end_matches(is_closer);
    let closers = &left[core.len()..];
    let Some(term) = core.chars().next_back() else {
        // Nothing but quotes and brackets so far: they open the next sentence.
        return None;
    };
    let after = next_word(&flat[b..]);
    // A quotation closed by 」 or 』 and followed by a particle in Hiragana ("…でした!」と報告")
    // continues the sentence.
    if closers.ends_with(['」', '』']) && after.first.is_some_and(is_hiragana) {
        return None;
    }
    if is_hard_stop(term) {
        return flat[b..next]
            .chars()
            .any(char::is_alphanumeric)
            .then_some(b);
    }
    // Continuation in lower case: "Yahoo! in", "'Great.' she said", "e.g. the".
    if after.first.is_some_and(char::is_lowercase) {
        return None;
    }
    // A fragment without letters or digits ("!!", a stray quote) is not a sentence of its own.
    if !flat[b..next].chars().any(char::is_alphanumeric) {
        return None;
    }
    // Ellipses decide for themselves (see `ellipsis_cuts`).
    if ends_with_ellipsis(core) {
        return None;
    }
    // Editorial marks in brackets: "(!)", "(?)".
    if closers.starts_with([')', ']'])
        && core.trim_end_matches(['!', '?', '.']).ends_with(['(', '['])
    {
        return None;
    }
    if term != '.' {
        return Some(b);
    }
    // "1." at the start of an item is part of it.
    if is_marker_only(left.trim_start()) {
        return None;
    }
    let word = last_word(core);
    let keep = match classify_in(word, lang) {
        Abbr::None => true,
        Abbr::Title | Abbr::Inner => false,
        Abbr::Numbered | Abbr::NumberedWord if after.is_number_like() => false,
        Abbr::NumberedWord => true,
        Abbr::Etc => after.first.is_some_and(char::is_uppercase),
        Abbr::Numbered | Abbr::Ambiguous | Abbr::Initial => {
            !after.first.is_some_and(|c| c.is_ascii_digit())
                && (after.is_starter()
                    || (after.is_title() && at_least_words(&flat[seg_start..b], 4)))
        }
    };
    keep.then_some(b)
}

/// The last whitespace-separated word of `core` (which ends with '.'), without leading quotes or
/// brackets. Long words are cut short: no abbreviation is that long.
pub(super) fn last_word(core: &str) -> &str {
    let mut from = core.len().saturating_sub(24);
    while !core.is_char_boundary(from) {
        from -= 1;
    }
    let tail = &core[from..];
    let start = tail.rfind(char::is_whitespace).map_or(0, |i| {
        i + tail[i..].chars().next().map_or(1, char::len_utf8)
    });
    tail[start..].trim_start_matches(is_opener)
}

/// Whether `s` holds at least `n` whitespace-separated words (looks at no more than those).
pub(super) fn at_least_words(s: &str, n: usize) -> bool {
    s.split_whitespace().take(n).count() == n
}

/// How a word ending in '.' behaves.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Abbr {
    /// Not a known abbreviation: the period ends the sentence.
    None,
    /// A title before a name (Mr., Dr.): never ends a sentence.
    Title,
    /// e.g., i.e., vs.: never ends a sentence.
    Inner,
    /// p., Fig., Sept.: joins before a number, else ambiguous.
    Numbered,
    /// No., Art.: joins before a number, else a plain word.
    NumberedWord,
    /// Inc., Jr., U.S.: ends a sentence only before a sentence starter.
    Ambiguous,
    /// A single capital letter (J. T. Smith): like `Ambiguous`.
    Initial,
    /// etc.: ends a sentence before any capitalised word.
    Etc,
}

/// Hiragana, which in Japanese marks particles and endings: never the start of a sentence after
/// a closing quote.
fn is_hiragana(c: char) -> bool {
    matches!(c, '\u{3041}'..='\u{309f}')
}

/// Classify the word before a period in a paragraph of language `lang`: the language's own
/// abbreviations and conventions first (German ordinals, "z. B." and "d. h."), then the general
/// rules of `classify`.
pub(super) fn classify_in(word: &str, lang: Language) -> Abbr {
    let list: &[&str] = match lang {
        Language::German => DE_INNER,
        Language::French => FR_INNER,
        Language::Spanish => ES_INNER,
        Language::Italian => IT_INNER,
        Language::Dutch => NL_INNER,
        _ => return classify(word),
    };
    let bare = word.strip_suffix('.').unwrap_or(word);
    if lang == Language::German {
        // "am 3. Oktober", "die 13. DebConf", "im 20. Jahrhundert": a number of one or two
        // digits with a period is an ordinal (a year such as "1993." ends the sentence).
        if (1..=2).contains(&bare.len()) && bare.bytes().all(|b| b.is_ascii_digit()) {
            return Abbr::Inner;
        }
        // "d. h.", "z. B.", "u. a.", "Anm. d. Ü.": a single lower-case letter is abbreviated.
        if bare.len() == 1 && bare.bytes().all(|b| b.is_ascii_lowercase()) {
            return Abbr::Inner;
        }
    }
    let lower = bare.to_lowercase();
    if ETC.binary_search(&lower.as_str()).is_ok() {
        return Abbr::Etc;
    }
    if list.binary_search(&lower.as_str()).is_ok() {
        return Abbr::Inner;
    }
    classify(word)
}

/// Classify the word before a period (`word` still ends with the period).
pub(super) fn classify(word: &str) -> Abbr {
    let bare = word.strip_suffix('.').unwrap_or(word);
    let mut chars = bare.chars();
    match (chars.next(), chars.next()) {
        (None, _) => return Abbr::None,
        (Some(c), None) if c.is_uppercase() => return Abbr::Initial,
        (Some('p'), None) => return Abbr::Numbered,
        (Some('v'), None) => return Abbr::Inner,
        (Some(_), None) => return Abbr::None,
        _ => {}
    }
    let mut buf = [0u8; 16];
    if bare.len() <= buf.len() {
        let lower = &mut buf[..bare.len()];
        lower.copy_from_slice(bare.as_bytes());
        lower.make_ascii_lowercase();
        let lower: &[u8] = lower;
        let found = |list: &[&str]| list.binary_search_by(|k| k.as_bytes().cmp(lower)).is_ok();
        if lower == b"etc" {
            return Abbr::Etc;
        }
        if found(TITLES) {
            return Abbr::Title;
        }
        if found(INNER) {
            return Abbr::Inner;
        }
        if found(NUMBERED) {
            return Abbr::Numbered;
        }
        if found(NUMBERED_WORDS) {
            return Abbr::NumberedWord;
        }
        if found(AMBIGUOUS) {
            return Abbr::Ambiguous;
        }
    }
    if is_dotted_acronym(bare) {
        return Abbr::Ambiguous;
    }
    // "Staff-Insp.", "ex-Gov.": the last part decides.
    match bare.rsplit_once('-') {
        Some((_, last)) if !last.is_empty() && last.len() < bare.len() => classify(last),
        _ => Abbr::None,
    }
}

/// U.S, Ph.D, a.m, E.U: two or more groups of one to three ASCII letters joined by dots, at
/// least one of them a single letter.
pub(super) fn is_dotted_acronym(bare: &str) -> bool {
    let mut groups = 0;
    let mut single = false;
    for g in bare.split('.') {
        if g.is_empty() || g.len() > 3 || !g.bytes().all(|b| b.is_ascii_alphabetic()) {
            return false;
        }
        groups += 1;
        single |= g.len() == 1;
    }
    groups >= 2 && single
}

/// The word after a candidate boundary.
pub(super) struct NextWord<'a> {
    /// First character after spaces and opening quotes or brackets.
    first: Option<char>,
    /// The word itself, up to whitespace or punctuation (apostrophes included).
    word: &'a str,
    /// Whether a period follows the word directly ("Mr." rather than "Mr").
    dotted: bool,
}

pub(super) fn next_word(s: &str) -> NextWord<'_> {
    let t = s.trim_start().trim_start_matches(is_opener);
    let mut end = t.len();
    for (n, (i, c)) in t.char_indices().enumerate() {
        if n == 32
            || c.is_whitespace()
            || matches!(
                c,
                ',' | ';' | ':' | '!' | '?' | '.' | '(' | ')' | '[' | ']' | '"' | '“' | '”'
            )
        {
            end = i;
            break;
        }
    }
    NextWord {
        first: t.chars().next(),
        word: &t[..end],
        dotted: t[end..].starts_with('.'),
    }
}

impl NextWord<'_> {
    /// The word without a contraction: "It's" -> "It", "Don’t" -> "Don".
    fn base(&self) -> &str {
        self.word.split(['\'', '’']).next().unwrap_or("")
    }

    /// A common sentence-initial word ("The", "It", "How", "I'm"); a dotted single letter is an
    /// initial, not the pronoun.
    fn is_starter(&self) -> bool {
        !(self.dotted && self.word.chars().count() == 1)
            && STARTERS.binary_search(&self.base()).is_ok()
    }

    /// A title such as "Mr." or "Dr.".
    fn is_title(&self) -> bool {
        self.dotted && TITLES.iter().any(|t| t.eq_ignore_ascii_case(self.word))
    }

    /// A number, a roman numeral or a single capital: what follows "p.", "Fig.", "Vol.".
    fn is_number_like(&self) -> bool {
        let w = self.word;
        self.first.is_some_and(|c| c.is_ascii_digit())
            || (!w.is_empty() && w.len() <= 4 && w.bytes().all(|b| b"IVXLC".contains(&b)))
            || (w.len() == 1 && w.bytes().all(|b| b.is_ascii_uppercase()))
    }

    /// The pronoun "I" or a contraction of it, which is capitalised anywhere in a sentence.
    fn is_pronoun_i(&self) -> bool {
        self.base() == "I" && !self.dotted
    }
}

/// Whether the segment, before any closing quotes or brackets, ends in an ellipsis: three or
/// more dots, spaced or not, or '…'.
pub(super) fn ends_with_ellipsis(core: &str) -> bool {
    let mut t = core;
    let mut dots = 0;
    loop {
        if let Some(r) = t.strip_suffix('.') {
            dots += 1;
            t = r;
        } else if let Some(r) = t.strip_suffix('…') {
            dots += 3;
            t = r;
        } else {
            break;
        }
        if dots >= 3 {
            return true;
        }
        if let Some(r) = t.strip_suffix(' ').filter(|r| r.ends_with(['.', '…'])) {
            t = r;
        }
    }
    false
}

/// Cuts decided by ellipses, which UAX #29 gets wrong both ways (it never breaks after '…' and
/// always breaks after "..." before a capital). An ellipsis of three dots (or '…') followed by
/// a capitalised word other than "I" ends a sentence; four dots (an ellipsis and a period) end
/// one before any capital. When a period closes a word and a spaced ellipsis follows
/// ("compounds. . . . The"), the period ends the sentence and the ellipsis opens the next one,
/// marking an omission there. An ellipsis in brackets ("[...]") marks an omission and ends
/// nothing; neither does one followed by lower case, a digit or nothing.
pub(super) fn ellipsis_cuts(flat: &str, out: &mut Vec<usize>) {
    const HELLIP: &[u8] = "…".as_bytes();
    let b = flat.as_bytes();
    let dot_at = |j: usize| match b.get(j) {
        Some(b'.') => true,
        Some(0xE2) => b[j + 1..].starts_with(&HELLIP[1..]),
        _ => false,
    };
    let has_hellip = flat.contains('…');
    let mut i = 0;
    while i < b.len() {
        // Jump to the next '.' (memchr), or to the next '.' or '…' when there are any '…'.
        let found = if has_hellip {
            flat[i..].find(['.', '…'])
        } else {
            flat[i..].find('.')
        };
        let Some(k) = found else {
            break;
        };
        i += k;
        let start = i;
        let mut dots = 0;
        let mut j = i;
        loop {
            if b.get(j) == Some(&b'.') {
                dots += 1;
                j += 1;
            } else if b[j..].starts_with(HELLIP) {
                dots += 3;
                j += HELLIP.len();
            } else {
                break;
            }
            if b.get(j) == Some(&b' ') && dot_at(j + 1) {
                j += 1;
            }
        }
        i = j;
        if dots < 3 {
            continue;
        }
        let attached = !flat[..start].ends_with(char::is_whitespace) && start > 0;
        if start > 0 && matches!(b[start - 1], b'[' | b'(') && matches!(b.get(j), Some(b']' | b')'))
        {
            continue;
        }
        let rest = &flat[j..];
        let rest_trim = rest.trim_start_matches(is_closer).trim_start();
        let at = flat.len() - rest_trim.len();
        let after = next_word(rest_trim);
        if !after.first.is_some_and(char::is_uppercase) {
            continue;
        }
        if dots >= 4 {
            if attached && b[start] == b'.' && b.get(start + 1) == Some(&b' ') {
                out.push(start + 1);
            } else {
                out.push(at);
            }
        } else if !after.is_pronoun_i() {
            out.push(at);
        }
    }
}

/// Cuts before inline list markers in a paragraph that starts with one: "1) The first item
/// 2) The second item", "a. one b. two", "• 9. nine • 10. ten". Only the next label in sequence
/// (same punctuation) or the same bullet counts, so "1. Mix 2 cups" or "3.) and" elsewhere does
/// not cut. Markdown's `-`, `*` and `+` are left alone: " - " is a dash in running text.
pub(super) fn inline_list_cuts(flat: &str, out: &mut Vec<usize>) {
    let Some(c) = flat.chars().next() else {
        return;
    };
    if is_bullet(c) {
        let mut needle = [0u8; 8];
        needle[0] = b' ';
        let len = 1 + c.encode_utf8(&mut needle[1..]).len();
        let needle = std::str::from_utf8(&needle[..len]).expect("a space and one char");
        let mut from = 0;
        while let Some(i) = flat[from..].find(needle) {
            out.push(from + i + 1);
            from += i + len;
        }
        return;
    }
    let Some((label_len, _)) = ordered_label(flat) else {
        return;
    };
    let label = &flat[..label_len];
    if !flat[label_len..].starts_with(' ') {
        return;
    }
    let head = label.trim_end_matches(['.', ')']);
    let punct = &label[head.len()..];
    let mut next = if let Ok(n) = head.parse::<u32>() {
        Label::Number(n)
    } else if head.len() == 1 && head.bytes().all(|b| b.is_ascii_lowercase()) {
        Label::Letter(head.as_bytes()[0])
    } else {
        return; // "1.2." and other nested labels do not run inline
    };
    let mut from = label_len;
    let mut needle = String::new();
    loop {
        next = match next.succ() {
            Some(n) => n,
            None => return,
        };
        needle.clear();
        needle.push(' ');
        match next {
            Label::Number(n) => needle.push_str(&n.to_string()),
            Label::Letter(l) => needle.push(char::from(l)),
        }
        needle.push_str(punct);
        needle.push(' ');
        match flat[from..].find(needle.as_str()) {
            Some(i) => {
                out.push(from + i + 1);
                from += i + needle.len() - 1;
            }
            None => return,
        }
    }
}

/// An inline list label.
#[derive(Clone, Copy)]
pub(super) enum Label {
    Number(u32),
    Letter(u8),
}

impl Label {
    fn succ(self) -> Option<Label> {
        match self {
            Label::Number(n) => n.checked_add(1).map(Label::Number),
            Label::Letter(b'z') => None,
            Label::Letter(l) => Some(Label::Letter(l + 1)),
        }
    }
}

/// A segment that is nothing but a list label: "1.", "2.)", "a.", "• 9.", "⁃10.", "- 2.", "iv.".
pub(super) fn is_marker_only(seg: &str) -> bool {
    let t = seg
        .trim_start_matches(|c| is_bullet(c) || matches!(c, '-' | '*' | '+'))
        .trim_start();
    if t.len() > 12 {
        return false;
    }
    let head = t.trim_end_matches(['.', ')']);
    let punct = &t[head.len()..];
    if !matches!(punct, "." | ")" | ".)") || head.is_empty() {
        return false;
    }
    let numeric = head
        .split('.')
        .all(|g| (1..=3).contains(&g.len()) && g.bytes().all(|b| b.is_ascii_digit()));
    let letter = head.len() == 1 && head.bytes().all(|b| b.is_ascii_alphabetic());
    let roman = head.len() <= 4 && head.bytes().all(|b| b"ivxIVX".contains(&b));
    numeric || letter || roman
}

/// Remembers the last whitespace-delimited ASCII token examined, so that many candidates inside
/// one long token cost one scan of it.
#[derive(Default)]
pub(super) struct LinkCache {
    span: Range<usize>,
    is_link: bool,
}

impl LinkCache {
    /// Whether the candidate at `b` (with no whitespace before it) lies inside a URL or an
    /// e-mail address.
    fn inside_link(&mut self, bytes: &[u8], b: usize) -> bool {
        let token_byte = |c: &u8| c.is_ascii_graphic();
        if !(bytes.get(b).is_some_and(token_byte) && b > 0 && token_byte(&bytes[b - 1])) {
            return false;
        }
        if !self.span.contains(&b) {
            let start = bytes[..b]
                .iter()
                .rposition(|c| !token_byte(c))
                .map_or(0, |i| i + 1);
            let end = bytes[b..]
                .iter()
                .position(|c| !token_byte(c))
                .map_or(bytes.len(), |i| b + i);
            self.span = start..end;
            self.is_link = looks_like_link(&bytes[start..end]);
        }
        self.is_link
    }
}

/// `scheme://...`, `www.example...`, or `name@domain.tld`.
pub(super) fn looks_like_link(token: &[u8]) -> bool {
    let t = token
        .iter()
        .position(|c| c.is_ascii_alphanumeric())
        .map_or(&token[..0], |i| &token[i..]);
    if t.windows(3).any(|w| w == b"://") || t.starts_with(b"www.") {
        return true;
    }
    match t.iter().position(|&c| c == b'@') {
        Some(at) => at > 0 && t[at + 1..].contains(&b'.'),
        None => false,
    }
}
