//! Sentence and paragraph boundaries of plain text and Markdown, as byte ranges into the source.
//!
//! The splitter packs whole sentences and paragraphs into encoder windows, so it needs to know
//! where they are without owning any text: this module answers with byte ranges, and
//! `&text[range]` is always the unit itself, trimmed of surrounding whitespace.
//!
//! Paragraphs come from the line structure alone: blank lines, Markdown headings (ATX and
//! setext), short ALL-CAPS title lines standing alone, list items with their continuation lines,
//! fenced code blocks and pipe tables. One pass over the lines, no backtracking.
//!
//! Sentences come from Unicode sentence boundaries (UAX #29, through `unicode-segmentation`)
//! inside each prose or list paragraph, then corrected by rules UAX #29 leaves to the
//! application: abbreviations and initials, list numbering, ellipses, URLs and e-mail
//! addresses, and continuation in lower case, some of them per language (German, French,
//! Spanish, Italian, Dutch, Chinese, Japanese, Hindi, Arabic; chosen per paragraph, see
//! `lang`). Code blocks give one unit per non-blank line,
//! tables one per row and headings one per heading, so the splitter never cuts a log line or a
//! table row in the middle.
//!
//! Corpora run to tens of megabytes, so everything is linear: each correction looks at a bounded
//! neighbourhood of its candidate boundary, and the UAX #29 state machine, the slowest part, runs
//! only over short windows around possible terminals (with the same result as over the whole
//! text, which a property test checks).
//!
//! Files: `blocks` finds paragraphs from the line structure, `sentences` cuts prose into
//! sentences, `lang` chooses each paragraph's language for the rules that depend on it,
//! `lexicon` holds the word lists the sentence rules consult.
use std::ops::Range;

mod blocks;
mod lang;
mod lexicon;
mod sentences;

pub use lang::{detect_language, Language};

use blocks::{find_paragraphs, line_units};
use sentences::{prose_sentences, Scratch};

/// What kind of block a paragraph is; the splitter treats code and tables as units to keep whole
/// where possible.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum BlockKind {
    /// Running text.
    Prose,
    /// A heading: an ATX line, a setext line with its underline, or an ALL-CAPS title line.
    Heading,
    /// One list item with its continuation lines.
    ListItem,
    /// A fenced code block, fences included.
    Code,
    /// Consecutive pipe-table rows.
    Table,
}

/// One paragraph: its byte range in the source (trimmed) and its kind.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Paragraph {
    /// Byte range in the source, trimmed of surrounding whitespace, never empty.
    pub bytes: Range<usize>,
    /// Kind of block.
    pub kind: BlockKind,
}

/// Paragraphs and sentences of one text, found in one pass.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Segments {
    /// Paragraphs in order.
    pub paragraphs: Vec<Paragraph>,
    /// Sentences in order; none crosses a paragraph boundary.
    pub sentences: Vec<Range<usize>>,
    /// For each sentence, the index of its paragraph in `paragraphs`.
    pub sentence_paragraph: Vec<usize>,
}

/// Paragraphs in order: non-overlapping, ascending, each trimmed of surrounding whitespace, never
/// empty.
pub fn paragraphs(text: &str) -> Vec<Paragraph> {
    find_paragraphs(text)
}

/// Sentences in order: non-overlapping, ascending, trimmed, never empty; a sentence never crosses
/// a paragraph boundary. Inside a Code block each non-blank line is one unit; a table row is one
/// unit; a heading is one unit.
pub fn sentences(text: &str) -> Vec<Range<usize>> {
    segment(text).sentences
}

/// Both at once: paragraphs, then sentences with, for each sentence, the index of its paragraph.
pub fn segment(text: &str) -> Segments {
    let paragraphs = find_paragraphs(text);
    let mut sentences = Vec::with_capacity(paragraphs.len() * 2);
    let mut sentence_paragraph = Vec::with_capacity(paragraphs.len() * 2);
    let mut scratch = Scratch::default();
    for (index, p) in paragraphs.iter().enumerate() {
        let before = sentences.len();
        match p.kind {
            BlockKind::Code | BlockKind::Table => line_units(text, p.bytes.clone(), &mut sentences),
            BlockKind::Heading => sentences.push(p.bytes.clone()),
            BlockKind::Prose | BlockKind::ListItem => {
                prose_sentences(text, p.bytes.clone(), &mut scratch, &mut sentences)
            }
        }
        sentence_paragraph.resize(sentences.len(), index);
        debug_assert!(sentences.len() > before, "every paragraph has a sentence");
    }
    Segments {
        paragraphs,
        sentences,
        sentence_paragraph,
    }
}

/// Line numbers of byte offsets in one text, from the positions of its line breaks found once:
/// each lookup is a binary search, so numbering every chunk of a long document stays linear.
#[derive(Debug, Clone, Default)]
pub struct LineIndex {
    breaks: Vec<usize>,
}

impl LineIndex {
    /// Index the line breaks ('\n') of `text`.
    pub fn new(text: &str) -> Self {
        Self {
            breaks: text
                .bytes()
                .enumerate()
                .filter(|&(_, b)| b == b'\n')
                .map(|(i, _)| i)
                .collect(),
        }
    }

    /// 1-based line number of a byte offset, as [`line_of`] counts it.
    pub fn line_of(&self, byte: usize) -> usize {
        1 + self.breaks.partition_point(|&i| i < byte)
    }
}

/// 1-based line number of a byte offset (counting '\n'); helper for reports. An offset past the
/// end counts the whole text.
pub fn line_of(text: &str, byte: usize) -> usize {
    let end = byte.min(text.len());
    1 + text.as_bytes()[..end]
        .iter()
        .filter(|&&b| b == b'\n')
        .count()
}

/// `range` without leading and trailing whitespace, or `None` if nothing is left.
pub(crate) fn trim_range(text: &str, range: Range<usize>) -> Option<Range<usize>> {
    let s = &text[range.clone()];
    let start = range.start + (s.len() - s.trim_start().len());
    let end = range.start + s.trim_end().len();
    (start < end).then_some(start..end)
}

#[cfg(test)]
mod tests {
    use super::lexicon::*;
    use super::*;
    use BlockKind::*;

    fn sents(t: &str) -> Vec<&str> {
        sentences(t).into_iter().map(|r| &t[r]).collect()
    }

    fn paras(t: &str) -> Vec<(BlockKind, &str)> {
        paragraphs(t)
            .into_iter()
            .map(|p| (p.kind, &t[p.bytes]))
            .collect()
    }

    // --- paragraphs ---------------------------------------------------------------------

    #[test]
    fn blank_and_whitespace_lines_separate_paragraphs() {
        let t = "One line\nand more.\n \t \nTwo.\r\n\r\nThree.\n\n\n";
        assert_eq!(
            paras(t),
            [
                (Prose, "One line\nand more."),
                (Prose, "Two."),
                (Prose, "Three.")
            ]
        );
        assert!(paragraphs("").is_empty());
        assert!(paragraphs(" \n\n\t\r\n").is_empty());
    }

    #[test]
    fn atx_headings_are_their_own_paragraph() {
        let t = "# Title\nText under it.\n###### Six\n####### seven\n#tag here\n    # indented";
        assert_eq!(
            paras(t),
            [
                (Heading, "# Title"),
                (Prose, "Text under it."),
                (Heading, "###### Six"),
                (Prose, "####### seven\n#tag here\n    # indented"),
            ]
        );
        assert_eq!(paras("#"), [(Heading, "#")]);
    }

    #[test]
    fn setext_headings_take_their_underline() {
        let t = "Title\n=====\nBody text.\n\nSub\n---\n\nTwo lines\nof text\n---\n";
        assert_eq!(
            paras(t),
            [
                (Heading, "Title\n====="),
                (Prose, "Body text."),
                (Heading, "Sub\n---"),
                (Prose, "Two lines\nof text"),
                (Prose, "---"),
            ]
        );
    }

    #[test]
    fn thematic_breaks_stand_alone() {
        let t = "Above.\n\n* * *\n\nBelow.\n=========";
        assert_eq!(
            paras(t),
            [
                (Prose, "Above."),
                (Prose, "* * *"),
                (Heading, "Below.\n=========")
            ]
        );
        assert_eq!(
            paras("-----\n\n====\n___"),
            [(Prose, "-----"), (Prose, "===="), (Prose, "___")]
        );
    }

    #[test]
    fn caps_lines_standing_alone_are_headings() {
        let t = "INSTALLATION\n\nRun it.\n\nNOTE: THIS IS LOUD.\n\nTHE END\nof the story.\n\nPART II: RESULTS\n\n東京\n\nOK";
        assert_eq!(
            paras(t),
            [
                (Heading, "INSTALLATION"),
                (Prose, "Run it."),
                (Prose, "NOTE: THIS IS LOUD."),
                (Prose, "THE END\nof the story."),
                (Heading, "PART II: RESULTS"),
                (Prose, "東京"),
                (Heading, "OK"),
            ]
        );
        let long = "A".repeat(81);
        assert_eq!(paras(&long), [(Prose, long.as_str())]);
    }

    #[test]
    fn list_items_with_continuation_lines() {
        let t = "Intro:\n- one\n  wraps\n* two\n+ three\nlazy line\n1. first\n2) second\n  10.) tenth\na) alpha\nb. beta\n• dot\n1.1. nested\n";
        assert_eq!(
            paras(t),
            [
                (Prose, "Intro:"),
                (ListItem, "- one\n  wraps"),
                (ListItem, "* two"),
                (ListItem, "+ three\nlazy line"),
                (ListItem, "1. first"),
                (ListItem, "2) second"),
                (ListItem, "  10.) tenth".trim()),
                (ListItem, "a) alpha"),
                (ListItem, "b. beta"),
                (ListItem, "• dot"),
                (ListItem, "1.1. nested"),
            ]
        );
    }

    #[test]
    fn ordered_items_not_starting_at_one_do_not_interrupt_prose() {
        assert_eq!(
            paras("It is covered in chapter\n3. The next one is short.\n1. A list"),
            [
                (Prose, "It is covered in chapter\n3. The next one is short."),
                (ListItem, "1. A list"),
            ]
        );
        // Not markers: no space after, too many digits, a decimal, emphasis.
        assert_eq!(
            paras("1.5 million\n2024. Was\n*em* text\n-x"),
            [(Prose, "1.5 million\n2024. Was\n*em* text\n-x")]
        );
    }

    #[test]
    fn fenced_code_is_one_paragraph_even_with_blank_lines() {
        let t = "Before.\n```rust\nfn main() {\n\n    x();\n}\n```\nAfter.\n~~~~\n```\nstill code\n~~~~~\n```a`b```\n\n  ```\nunclosed\n\nto the end";
        assert_eq!(
            paras(t),
            [
                (Prose, "Before."),
                (Code, "```rust\nfn main() {\n\n    x();\n}\n```"),
                (Prose, "After."),
                (Code, "~~~~\n```\nstill code\n~~~~~"),
                (Prose, "```a`b```"),
                (Code, "```\nunclosed\n\nto the end"),
            ]
        );
    }

    #[test]
    fn pipe_tables() {
        let t = "Costs:\n| a | b |\n|---|---|\n| 1 | 2 |\nAfter the table.";
        assert_eq!(
            paras(t),
            [
                (Prose, "Costs:"),
                (Table, "| a | b |\n|---|---|\n| 1 | 2 |"),
                (Prose, "After the table."),
            ]
        );
    }

    // --- units of code, tables and headings ------------------------------------------------

    #[test]
    fn code_lines_table_rows_and_headings_are_units() {
        let t = "# A heading. With two sentences.\n\n```\nlet a = 1; let b = 2.\n\n  log line. Another.\n```\n| x. Y | z |\n|---|---|\n\nSetext. Heading\n---";
        assert_eq!(
            sents(t),
            [
                "# A heading. With two sentences.",
                "```",
                "let a = 1; let b = 2.",
                "log line. Another.",
                "```",
                "| x. Y | z |",
                "|---|---|",
                "Setext. Heading\n---",
            ]
        );
    }

    // --- sentences ---------------------------------------------------------------------

    #[test]
    fn plain_terminals_and_closers() {
        assert_eq!(
            sents("Hello World. My name is Jonas! Really?! Yes."),
            ["Hello World.", "My name is Jonas!", "Really?!", "Yes."]
        );
        assert_eq!(
            sents("He said \"Stop.\" Then he left. (It was late.) We slept."),
            [
                "He said \"Stop.\"",
                "Then he left.",
                "(It was late.)",
                "We slept."
            ]
        );
        assert_eq!(sents("東京です。大阪です。"), ["東京です。", "大阪です。"]);
    }

    #[test]
    fn lower_case_continues_the_sentence() {
        assert_eq!(
            sents("She works at Yahoo! in the office. \"Why?\" she asked. 'Great.' he said."),
            [
                "She works at Yahoo! in the office.",
                "\"Why?\" she asked.",
                "'Great.' he said."
            ]
        );
    }

    #[test]
    fn line_breaks_inside_a_paragraph_are_not_boundaries() {
        assert_eq!(
            sents("The valve was\nreplaced in May.\r\nIt held\u{2028}fine."),
            ["The valve was\nreplaced in May.", "It held\u{2028}fine."]
        );
        assert_eq!(
            sents("One.\r\nTwo here.\r\n\r\nThree."),
            ["One.", "Two here.", "Three."]
        );
    }

    #[test]
    fn titles_and_inner_abbreviations_never_end_a_sentence() {
        assert_eq!(
            sents("Mr. Smith met Dr. Who and Prof. Li. Use tools, e.g. The Saw, i.e. A blade. Roe v. Wade vs. Them."),
            [
                "Mr. Smith met Dr. Who and Prof. Li.",
                "Use tools, e.g. The Saw, i.e. A blade.",
                "Roe v. Wade vs. Them."
            ]
        );
        assert_eq!(
            sents("It was a joke, Staff-Insp. Mark Ellis said."),
            ["It was a joke, Staff-Insp. Mark Ellis said."]
        );
    }

    #[test]
    fn numbered_abbreviations_join_before_numbers() {
        assert_eq!(
            sents("Please turn to p. 55. See Fig. 3 and Vol. II on pp. 10-12. No. 4 was fine. I said no. The end."),
            [
                "Please turn to p. 55.",
                "See Fig. 3 and Vol. II on pp. 10-12.",
                "No. 4 was fine.",
                "I said no.",
                "The end."
            ]
        );
        assert_eq!(
            sents("It was Sept. 12 at N°. 1026.253.553. That is where."),
            ["It was Sept. 12 at N°. 1026.253.553.", "That is where."]
        );
    }

    #[test]
    fn ambiguous_abbreviations_end_before_sentence_starters() {
        assert_eq!(
            sents("They closed the deal with Pitt, Briggs & Co. It closed yesterday. Ask Jane and co. at noon."),
            [
                "They closed the deal with Pitt, Briggs & Co.",
                "It closed yesterday.",
                "Ask Jane and co. at noon."
            ]
        );
        assert_eq!(
            sents("I live in the U.S. How about you? I work for the U.S. Government. St. Michael's is on Main St. The house is red."),
            [
                "I live in the U.S.",
                "How about you?",
                "I work for the U.S. Government.",
                "St. Michael's is on Main St.",
                "The house is red."
            ]
        );
    }

    #[test]
    fn a_title_after_an_ambiguous_abbreviation_needs_a_full_sentence_before_it() {
        assert_eq!(
            sents("At 5 a.m. Mr. Smith went to the bank. He left the bank at 6 P.M. Mr. Smith then went home."),
            [
                "At 5 a.m. Mr. Smith went to the bank.",
                "He left the bank at 6 P.M.",
                "Mr. Smith then went home."
            ]
        );
    }

    #[test]
    fn etc_ends_a_sentence_before_any_capitalised_word() {
        // No Golden Rule covers "etc." before a capital, so the choice is ours: mid-sentence
        // "etc." is nearly always followed by lower case or punctuation.
        assert_eq!(
            sents("Bring pens, paper, etc. John will bring the rest. Apples, etc. are fine."),
            [
                "Bring pens, paper, etc.",
                "John will bring the rest.",
                "Apples, etc. are fine."
            ]
        );
    }

    #[test]
    fn initials_join_unless_a_sentence_starter_follows() {
        assert_eq!(
            sents("My name is Jonas E. Smith. J. T. Abernethy came. We make a good team, you and I. Did you see Albert I. Jones?"),
            [
                "My name is Jonas E. Smith.",
                "J. T. Abernethy came.",
                "We make a good team, you and I.",
                "Did you see Albert I. Jones?"
            ]
        );
    }

    #[test]
    fn decimals_versions_and_money_stay_whole() {
        assert_eq!(
            sents("Upgrade to v1.2.3 now. It costs $100.00. Pi is 3.14 or so."),
            [
                "Upgrade to v1.2.3 now.",
                "It costs $100.00.",
                "Pi is 3.14 or so."
            ]
        );
    }

    #[test]
    fn list_numbering_belongs_to_the_item() {
        assert_eq!(sents("1. The first item."), ["1. The first item."]);
        assert_eq!(sents("- 2. The second."), ["- 2. The second."]);
        assert_eq!(
            sents("1.1. What is this FAQ? It is a list."),
            ["1.1. What is this FAQ?", "It is a list."]
        );
        assert_eq!(sents("A. The first option."), ["A. The first option."]);
    }

    #[test]
    fn inline_lists_cut_before_the_next_label() {
        assert_eq!(
            sents("1) The first item 2) The second item 3) The third"),
            ["1) The first item", "2) The second item", "3) The third"]
        );
        assert_eq!(sents("1.) One. 2.) Two."), ["1.) One.", "2.) Two."]);
        assert_eq!(
            sents("a. The first item b. The second item c. The third"),
            ["a. The first item", "b. The second item", "c. The third"]
        );
        assert_eq!(
            sents("• 9. The first item • 10. The second item"),
            ["• 9. The first item", "• 10. The second item"]
        );
        assert_eq!(sents("⁃9. First ⁃10. Second"), ["⁃9. First", "⁃10. Second"]);
        // Only the next label in sequence counts; Markdown bullets never run inline.
        assert_eq!(
            sents("1. Mix 2 cups with 3) of them"),
            ["1. Mix 2 cups with 3) of them"]
        );
        assert_eq!(sents("- Range 5 - 10 works"), ["- Range 5 - 10 works"]);
    }

    #[test]
    fn ellipses() {
        // Three dots before lower case, before "I", or in brackets: no end.
        assert_eq!(
            sents("I wasn’t really ... well, what I mean...see . . . the thing is . . . I didn’t mean it."),
            ["I wasn’t really ... well, what I mean...see . . . the thing is . . . I didn’t mean it."]
        );
        assert_eq!(
            sents("\"Bohr [...] used stairways [...]\" (Smith 55). Next."),
            ["\"Bohr [...] used stairways [...]\" (Smith 55).", "Next."]
        );
        // Before another capital, three dots end the sentence, '…' included.
        assert_eq!(
            sents("He paused... Then he left. She waited… Nobody came."),
            [
                "He paused...",
                "Then he left.",
                "She waited…",
                "Nobody came."
            ]
        );
        // Four dots: an ellipsis and a period.
        assert_eq!(
            sents("I never meant that.... She left. It ends with a period . . . . Next one."),
            [
                "I never meant that....",
                "She left.",
                "It ends with a period . . . .",
                "Next one."
            ]
        );
        // A period on the word, then a spaced ellipsis: the omission opens the next sentence.
        assert_eq!(
            sents("They used compounds. . . . The practice was not abandoned. . . ."),
            [
                "They used compounds.",
                ". . . The practice was not abandoned. . . ."
            ]
        );
    }

    #[test]
    fn urls_and_email_addresses_are_never_cut() {
        assert_eq!(
            sents("Her email is Jane.Doe@example.com. I sent one. See https://a.example.org/x?Q=1&r=2!Yes and www.Example.com/A.B now."),
            [
                "Her email is Jane.Doe@example.com.",
                "I sent one.",
                "See https://a.example.org/x?Q=1&r=2!Yes and www.Example.com/A.B now."
            ]
        );
        assert_eq!(
            sents("The site is: https://www.example.50.com/new-site/awesome_content.html. Please check it."),
            ["The site is: https://www.example.50.com/new-site/awesome_content.html.", "Please check it."]
        );
        assert_eq!(
            sents("Read README.Debian first."),
            ["Read README.Debian first."]
        );
        assert_eq!(
            sents("Get http://x.org/a...B or mail me@x.org?Subject=Hi now."),
            ["Get http://x.org/a...B or mail me@x.org?Subject=Hi now."]
        );
    }

    #[test]
    fn brackets_quotes_and_emphasis_close_with_their_sentence() {
        assert_eq!(
            sents("He teaches science (He worked for 5 years as an engineer.) at the University."),
            ["He teaches science (He worked for 5 years as an engineer.) at the University."]
        );
        assert_eq!(
            sents("**Note.** The end is near. _Really._ Yes. It is 90 (?) Years."),
            [
                "**Note.**",
                "The end is near.",
                "_Really._",
                "Yes.",
                "It is 90 (?) Years."
            ]
        );
        assert_eq!(sents("Hello!! Long time. !!"), ["Hello!!", "Long time. !!"]);
    }

    #[test]
    fn segment_links_sentences_to_paragraphs() {
        let t = "# Head\n\nOne. Two.\n\n- Three.\n```\nfour\n```";
        let s = segment(t);
        assert_eq!(s.sentence_paragraph, [0, 1, 1, 2, 3, 3, 3]);
        assert_eq!(s.paragraphs, paragraphs(t));
        assert_eq!(s.sentences, sentences(t));
        assert_eq!(segment(""), Segments::default());
    }

    #[test]
    fn line_numbers() {
        let t = "a\nb\r\nc";
        assert_eq!(line_of(t, 0), 1);
        assert_eq!(line_of(t, 2), 2);
        assert_eq!(line_of(t, 5), 3);
        assert_eq!(line_of(t, 100), 3);
        let idx = LineIndex::new(t);
        for b in 0..=t.len() + 3 {
            assert_eq!(idx.line_of(b), line_of(t, b), "byte {b}");
        }
    }

    #[test]
    fn word_lists_are_sorted_for_binary_search() {
        for list in [STARTERS, TITLES, INNER, NUMBERED, NUMBERED_WORDS, AMBIGUOUS] {
            assert!(
                list.windows(2).all(|w| w[0].as_bytes() < w[1].as_bytes()),
                "{list:?}"
            );
        }
        for list in [TITLES, INNER, NUMBERED, NUMBERED_WORDS, AMBIGUOUS] {
            assert!(list.iter().all(|w| w.len() <= 16 && *w == w.to_lowercase()));
        }
        let per_language = [DE_INNER, FR_INNER, ES_INNER, IT_INNER, NL_INNER, ETC];
        let function_words = FUNCTION_WORDS.iter().map(|(_, list)| *list);
        for list in per_language.into_iter().chain(function_words) {
            assert!(
                list.windows(2).all(|w| w[0].as_bytes() < w[1].as_bytes()),
                "{list:?}"
            );
            assert!(list.iter().all(|w| *w == w.to_lowercase()), "{list:?}");
        }
        // The language vote folds only ASCII capitals and skips words longer than 8 bytes.
        for (_, list) in FUNCTION_WORDS {
            assert!(list.iter().all(|w| w.len() <= 8), "{list:?}");
        }
    }
}

#[cfg(test)]
mod props {
    use super::sentences::*;
    use super::*;
    use proptest::prelude::*;
    use unicode_segmentation::UnicodeSegmentation;

    const BITS: &[&str] = &[
        "word",
        "Word",
        "The",
        "I",
        "A",
        "etc.",
        "Mr.",
        "e.g.",
        "U.S.",
        "J.",
        "3.5",
        "v1.2.3",
        ".",
        "!",
        "?",
        "…",
        "...",
        ". . .",
        "\"",
        "“",
        "”",
        "'",
        "’",
        "(",
        ")",
        "[",
        "]",
        "*",
        "**",
        "_",
        "`",
        " ",
        " ",
        "  ",
        "\t",
        "\n",
        "\r\n",
        "\n\n",
        "\n \n",
        "# ",
        "## ",
        "- ",
        "* ",
        "+ ",
        "1. ",
        "2) ",
        "a) ",
        "b. ",
        "• ",
        "```",
        "~~~",
        "|",
        "===",
        "---",
        "TITLE",
        "https://x.org/a?B=1",
        "jo@x.io",
        "東京",
        "。",
        "🚂",
        "👩‍🔧",
        "é",
        "\u{2028}",
        "\u{a0}",
    ];

    /// Every invariant the splitter relies on.
    fn check(text: &str) -> Result<(), TestCaseError> {
        let s = segment(text);
        prop_assert_eq!(s.sentences.len(), s.sentence_paragraph.len());
        let mut last_end = 0;
        for p in &s.paragraphs {
            let r = &p.bytes;
            prop_assert!(r.start >= last_end && r.start < r.end, "paragraph {:?}", r);
            prop_assert!(text.is_char_boundary(r.start) && text.is_char_boundary(r.end));
            prop_assert_eq!(text[r.clone()].trim(), &text[r.clone()]);
            last_end = r.end;
        }
        let mut covered = vec![0u8; text.len()];
        let mut last_end = 0;
        let mut last_para = 0;
        for (r, &pi) in s.sentences.iter().zip(&s.sentence_paragraph) {
            prop_assert!(r.start >= last_end && r.start < r.end, "sentence {:?}", r);
            prop_assert!(text.is_char_boundary(r.start) && text.is_char_boundary(r.end));
            prop_assert_eq!(text[r.clone()].trim(), &text[r.clone()]);
            prop_assert!(pi >= last_para && pi < s.paragraphs.len());
            let p = &s.paragraphs[pi].bytes;
            prop_assert!(
                p.start <= r.start && r.end <= p.end,
                "{:?} outside {:?}",
                r,
                p
            );
            for b in r.clone() {
                covered[b] += 1;
            }
            last_end = r.end;
            last_para = pi;
        }
        for (i, c) in text.char_indices() {
            if !c.is_whitespace() {
                prop_assert_eq!(covered[i], 1, "{:?} at {} in {:?}", c, i, text);
            }
        }
        prop_assert_eq!(&s.paragraphs, &paragraphs(text));
        Ok(())
    }

    const UAX_BITS: &[&str] = &[
        "a",
        "B",
        "word",
        "Word",
        "I",
        "3",
        "42",
        " ",
        "  ",
        "\t",
        ".",
        "!",
        "?",
        "?!",
        "...",
        "…",
        "\"",
        "'",
        "“",
        "”",
        "’",
        "(",
        ")",
        "[",
        "]",
        ",",
        ";",
        ":",
        "-",
        "—",
        "。",
        "！",
        "、",
        "東",
        "é",
        "e\u{301}",
        "\u{301}",
        "\u{200d}",
        "\u{ad}",
        "🚂",
        "👩‍🔧",
        "\u{a0}",
        "\u{3000}",
        "\u{5f3}",
        "\u{964}",
        "\u{589}",
        "\u{2024}",
        "ǅ",
        "ß",
        "x.Y",
        "U.S.",
    ];

    fn whole_text_uax(flat: &str) -> Vec<usize> {
        flat.split_sentence_bound_indices()
            .skip(1)
            .map(|(i, _)| i)
            .collect()
    }

    /// No character outside `may_be_terminal` ends a sentence for UAX #29: checked over every
    /// Unicode scalar value, so the windows of `uax_candidates` miss no terminal.
    #[test]
    fn only_may_be_terminal_chars_end_sentences() {
        let mut t = String::new();
        for c in (0..=0x10FFFFu32).filter_map(char::from_u32) {
            if may_be_terminal(c) || is_line_break(c) {
                continue;
            }
            t.clear();
            t.push('x');
            t.push(c);
            t.push_str(" Y");
            assert!(
                whole_text_uax(&t).is_empty(),
                "U+{:04X} ends a sentence",
                c as u32
            );
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig { cases: 1000, .. ProptestConfig::default() })]

        #[test]
        fn sentences_cover_every_visible_char_once(
            parts in prop::collection::vec(prop::sample::select(BITS), 0..100)
        ) {
            check(&parts.concat())?;
        }

        #[test]
        fn windowed_uax_matches_whole_text_uax(
            parts in prop::collection::vec(prop::sample::select(UAX_BITS), 0..60)
        ) {
            let flat = parts.concat();
            let mut got = Vec::new();
            uax_candidates(&flat, &mut got);
            prop_assert_eq!(got, whole_text_uax(&flat), "{:?}", flat);
        }

        #[test]
        fn windowed_uax_matches_on_arbitrary_text(text in "\\PC{0,120}") {
            let flat: String = text.chars().map(|c| if is_line_break(c) { ' ' } else { c }).collect();
            let mut got = Vec::new();
            uax_candidates(&flat, &mut got);
            prop_assert_eq!(got, whole_text_uax(&flat), "{:?}", flat);
        }

        #[test]
        fn arbitrary_unicode_is_segmented_safely(text in "(\\PC|\\s){0,200}") {
            check(&text)?;
        }
    }
}
