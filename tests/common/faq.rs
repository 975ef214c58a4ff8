//! The Debian FAQ (Debian package debian-faq 11.1, fetched by scripts/fetch-testdata) as a
//! retrieval set: chapters as documents, question headings as queries.
use kerf::compare::refs::Reference;
use kerf::corpus::Document;

/// Chapters as (number, text).
pub type Chapters = Vec<(usize, String)>;
/// Questions as (text, chapter number).
pub type Questions = Vec<(String, usize)>;

/// The parse rule of tests/reference/debian_faq.py, reimplemented.
pub fn parse(text: &str) -> (Chapters, Questions) {
    let lines: Vec<&str> = text.split('\n').collect();
    let mut chapters: Vec<(usize, Vec<&str>)> = Vec::new();
    let mut questions = Vec::new();
    let heading = |l: &str| -> Option<String> {
        let (num, rest) = l.split_once(".\u{a0}")?;
        let parts: Vec<&str> = num.split('.').collect();
        ((parts.len() == 2 || parts.len() == 3)
            && parts
                .iter()
                .all(|p| !p.is_empty() && p.bytes().all(|b| b.is_ascii_digit())))
        .then(|| rest.trim().to_string())
    };
    let mut i = 0;
    while i < lines.len() {
        let l = lines[i];
        if let Some(rest) = l.strip_prefix("Chapter\u{a0}") {
            let n: usize = rest.split('.').next().unwrap().parse().unwrap();
            chapters.push((n, Vec::new()));
            i += 1;
            continue;
        }
        if let Some(ch) = chapters.last_mut() {
            if let Some(first) = heading(l) {
                let mut parts = vec![first];
                i += 1;
                while i < lines.len() && !lines[i].trim().is_empty() {
                    parts.push(lines[i].trim().to_string());
                    i += 1;
                }
                let title = parts.join(" ");
                if title.ends_with('?') {
                    questions.push((title, ch.0));
                }
                continue;
            }
            ch.1.push(l);
        }
        i += 1;
    }
    (
        chapters
            .into_iter()
            .map(|(n, ls)| (n, ls.join("\n")))
            .collect(),
        questions,
    )
}

/// Chapters as documents (`chapter-NN`) and question headings as references expecting their
/// chapter.
pub fn documents_and_questions(
    chapters: &Chapters,
    questions: &Questions,
) -> (Vec<Document>, Vec<Reference>) {
    let docs: Vec<Document> = chapters
        .iter()
        .map(|(n, body)| Document {
            id: format!("chapter-{n:02}"),
            origin: "faq".into(),
            text: body.clone(),
            layout: None,
        })
        .collect();
    let refs: Vec<Reference> = questions
        .iter()
        .enumerate()
        .map(|(i, (q, ch))| Reference {
            id: format!("q{i}"),
            text: q.clone(),
            prefix: String::new(),
            kind: "question".into(),
            expect: [(format!("chapter-{ch:02}"), 1)].into(),
        })
        .collect();
    (docs, refs)
}

/// The model's encoder as the FAQ checks run it: f32, inputs of up to 512 tokens.
pub fn encoder(info: &kerf::model::ModelInfo) -> kerf::embed::BertEmbedder {
    kerf::embed::BertEmbedder::load(
        &info.dir,
        &kerf::embed::EmbedOptions {
            max_input_tokens: 512,
            ..Default::default()
        },
    )
    .unwrap()
}
