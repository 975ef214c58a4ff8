//! The Debian FAQ retrieval check (tests/debian_faq.rs) run over the HTML edition as well as the
//! plain-text one (Debian package debian-faq 11.1, fetched by scripts/fetch-testdata): the same
//! plan must rank the chapters for the 119 question headings about as well whichever edition
//! kerf read, MRR@10 within 0.03 (the bar the issue sets). In both editions the question
//! headings are taken out of the chapters, so a question cannot find itself verbatim.
mod common;

use kerf::compare::engine::{self, Corpus};
use kerf::corpus::Document;
use kerf::embed::{BertEmbedder, EmbedOptions};
use kerf::extract::html::{self, HtmlOptions};
use kerf::plan;
use kerf::pool::ChunkPooling;
use kerf::profile::{Boundary, Profile};

/// Chapters of the HTML edition as documents `chapter-NN`, each the text kerf extracts with
/// its headings taken out.
fn html_chapters() -> Vec<Document> {
    let dir = common::testdata("debian-faq/html");
    let mut docs = Vec::new();
    for e in std::fs::read_dir(&dir).unwrap() {
        let p = e.unwrap().path();
        let x = html::extract(&std::fs::read(&p).unwrap(), "faq", HtmlOptions::default()).unwrap();
        let Some(n) = x
            .title
            .as_deref()
            .and_then(|t| t.strip_prefix("Chapter "))
            .and_then(|t| t.split('.').next())
            .and_then(|n| n.parse::<usize>().ok())
        else {
            continue; // the index page
        };
        let mut body = String::new();
        let mut at = 0;
        for h in &x.headings {
            body.push_str(&x.text[at..h.bytes.start]);
            at = h.bytes.end;
        }
        body.push_str(&x.text[at..]);
        docs.push((n, body));
    }
    docs.sort_by_key(|d| d.0);
    docs.into_iter()
        .map(|(n, body)| Document::plain(format!("chapter-{n:02}"), "faq-html", body))
        .collect()
}

#[test]
fn html_edition_retrieves_like_the_plain_text_edition() {
    let text = std::fs::read_to_string(common::testdata("debian-faq/debian-faq.en.txt")).unwrap();
    let (chapters, questions) = common::faq::parse(&text);
    let (text_docs, refs) = common::faq::documents_and_questions(&chapters, &questions);
    let html_docs = html_chapters();
    assert_eq!(html_docs.len(), 16);
    let (info, counter) = kerf::model::inspect(&common::model_dir()).unwrap();
    let embedder = BertEmbedder::load(
        &info.dir,
        &EmbedOptions {
            max_input_tokens: 512,
            ..Default::default()
        },
    )
    .unwrap();
    let ref_vectors = engine::embed_refs(&embedder, None, &refs).unwrap();
    let mut p = Profile::default();
    p.cut.window = 128;
    p.cut.boundary = Boundary::Sentence;
    p.name = "sentence-128".into();
    let base = plan::resolve(&p, &info, &counter, "faq").unwrap();
    let mut mrr = Vec::new();
    for (edition, docs) in [("text", text_docs), ("html", html_docs)] {
        let corpus = Corpus::new(docs, &counter).unwrap();
        let chunks = engine::cut_corpus(&corpus, &base, &counter);
        let (vectors, _) =
            engine::embed_chunks(&corpus, &chunks, &base, &embedder, None, &mut |_, _| {}).unwrap();
        for agg in [ChunkPooling::Mean, ChunkPooling::Best] {
            let mut plan = base.clone();
            plan.profile.pool.chunks = agg;
            let s = engine::score_plan(
                &corpus,
                &refs,
                &ref_vectors,
                &plan,
                chunks.clone(),
                &vectors,
                &Default::default(),
            )
            .summary;
            println!(
                "{edition}: {} chunks, {}: MRR@10 {:.3}",
                chunks.iter().map(Vec::len).sum::<usize>(),
                agg.name(),
                s.mrr_at_10
            );
            mrr.push((edition, agg, s.mrr_at_10));
        }
    }
    for agg in [ChunkPooling::Mean, ChunkPooling::Best] {
        let of = |e: &str| mrr.iter().find(|m| m.0 == e && m.1 == agg).unwrap().2;
        let (t, h) = (of("text"), of("html"));
        assert!(
            (t - h).abs() <= 0.03,
            "{}: MRR@10 {t:.3} over the plain text, {h:.3} over the HTML",
            agg.name()
        );
    }
}
