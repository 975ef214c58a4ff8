//! Late chunking (Günther et al. 2024, arXiv 2409.04701) with the default model: pooled spans
//! against sentence-transformers' token embeddings, a whole-pass chunk against ordinary
//! pooling, chunk token spans against each chunk's own tokens, the cache, and the binary.
mod common;

use std::ops::Range;
use std::sync::atomic::AtomicBool;

use common::{faq_chapters, kerf_in, ok};
use kerf::embed::{BertEmbedder, EmbedOptions, Embedder, Engine};
use kerf::late::{self, LateDocument, LateOptions};
use kerf::pool::cosine;

fn encoder(engine: Engine) -> BertEmbedder {
    BertEmbedder::load(
        &common::model_dir(),
        &EmbedOptions {
            max_input_tokens: 512,
            engine,
            ..Default::default()
        },
    )
    .unwrap()
}

const FULL: LateOptions = LateOptions {
    context: 512,
    overlap: 64,
};

fn late_vectors(
    e: &dyn Embedder,
    docs: &[LateDocument<'_>],
    options: &LateOptions,
    cache: Option<&kerf::cache::VectorCache>,
) -> (Vec<Vec<Option<Vec<f32>>>>, kerf::job::CacheReport) {
    late::embed_documents(
        e,
        cache,
        docs,
        options,
        8192,
        &mut |_, _| {},
        &AtomicBool::new(false),
    )
    .unwrap()
}

#[test]
fn pooled_spans_match_sentence_transformers_token_embeddings() {
    // Fixture: tests/reference/late_st.py: sentence-transformers token_embeddings of Debian FAQ
    // passages (one pass each, up to 484 tokens), each paragraph's rows mean-pooled, the first
    // taking [CLS] and the last [SEP]. Tolerance: float32 sums in another order (as
    // tests/embed_reference.rs, whose measured worst is about 0.99999).
    let f = common::fixture("late_st.json");
    let items = f["texts"].as_array().unwrap();
    let ranges: Vec<Vec<Range<usize>>> = items
        .iter()
        .map(|t| {
            t["chunks"]
                .as_array()
                .unwrap()
                .iter()
                .map(|r| r[0].as_u64().unwrap() as usize..r[1].as_u64().unwrap() as usize)
                .collect()
        })
        .collect();
    let docs = late::documents(
        items.iter().map(|t| t["text"].as_str().unwrap()),
        &ranges,
        &[],
    );
    let chunks: usize = ranges.iter().map(Vec::len).sum();
    assert!(chunks >= 30);
    for engine in [Engine::Packed, Engine::Candle] {
        let e = encoder(engine);
        let (got, report) = late_vectors(&e, &docs, &FULL, None);
        assert_eq!(report.embedded, chunks);
        let mut worst = 1.0f32;
        for (t, vs) in items.iter().zip(&got) {
            for (want, v) in t["vectors"].as_array().unwrap().iter().zip(vs) {
                let want = common::f32s(want);
                worst = worst.min(cosine(&want, v.as_ref().expect("every chunk has tokens")));
            }
        }
        println!("{engine:?}: worst cosine to sentence-transformers spans {worst:.7}");
        assert!(worst >= 0.9999, "{engine:?}: worst cosine {worst}");
    }
}

#[test]
fn a_chunk_that_is_the_whole_pass_equals_ordinary_pooling() {
    // Texts from tests/fixtures/st_vectors.json (accents, CJK, emoji, CRLF, a 300-character
    // word); each is one chunk, so late chunking must pool exactly what ordinary chunking pools.
    let f = common::fixture("st_vectors.json");
    let texts: Vec<&str> = f["texts"]
        .as_array()
        .unwrap()
        .iter()
        .map(|t| t["text"].as_str().unwrap())
        .filter(|t| t.len() < 1500)
        .collect();
    assert!(texts.len() >= 15);
    let e = encoder(Engine::Packed);
    for prefix in ["", "passage: "] {
        let ranges: Vec<Vec<Range<usize>>> = texts
            .iter()
            .map(|t| std::iter::once(0..t.len()).collect())
            .collect();
        let prefixes: Vec<Vec<&str>> = ranges.iter().map(|r| vec![prefix; r.len()]).collect();
        let docs = late::documents(texts.iter().copied(), &ranges, &prefixes);
        let (late, _) = late_vectors(&e, &docs, &FULL, None);
        let with_prefix: Vec<String> = texts.iter().map(|t| format!("{prefix}{t}")).collect();
        let refs: Vec<&str> = with_prefix.iter().map(String::as_str).collect();
        let alone = e.embed(&refs).unwrap();
        for ((t, l), a) in texts.iter().zip(&late).zip(&alone) {
            let c = cosine(l[0].as_ref().unwrap(), a);
            assert!(c >= 0.99999, "prefix {prefix:?}, {t:?}: cosine {c}");
        }
    }
}

/// The Debian FAQ's chapters (scripts/fetch-testdata), cut into sentence chunks of 128 tokens.
fn faq_chunks(n: usize) -> (Vec<String>, Vec<Vec<Range<usize>>>) {
    let tmp = tempfile::tempdir().unwrap();
    faq_chapters(tmp.path(), n);
    let (info, counter) = kerf::model::inspect(&common::model_dir()).unwrap();
    let profile = kerf::profile::Profile {
        cut: kerf::profile::CutSection {
            window: 128,
            ..Default::default()
        },
        ..Default::default()
    };
    let plan = kerf::plan::resolve(&profile, &info, &counter, "test").unwrap();
    let mut texts = Vec::new();
    let mut ranges = Vec::new();
    let mut names: Vec<_> = std::fs::read_dir(tmp.path())
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    names.sort();
    for path in names {
        let text = std::fs::read_to_string(&path).unwrap();
        let doc = kerf::corpus::Document {
            id: path.display().to_string(),
            origin: path.display().to_string(),
            text,
            layout: None,
        };
        let (records, _) = kerf::job::cut_document(&plan, &counter, &doc).unwrap();
        ranges.push(records.iter().map(|r| r.bytes[0]..r.bytes[1]).collect());
        texts.push(doc.text);
    }
    (texts, ranges)
}

#[test]
fn each_chunk_span_holds_exactly_the_chunks_own_tokens() {
    // A chunk's span in the document's one tokenization must be the tokens the chunk encodes
    // to alone wherever its edges are word edges (sentence chunks nearly always are).
    let e = encoder(Engine::Packed);
    let (texts, ranges) = faq_chunks(6);
    let (mut checked, mut same) = (0usize, 0usize);
    for (text, rs) in texts.iter().zip(&ranges) {
        let doc = e.token_ids(text).unwrap().unwrap();
        let spans = late::chunk_spans(&doc.offsets, rs, usize::MAX);
        for (r, s) in rs.iter().zip(&spans) {
            let edge =
                |i: usize| i == 0 || i == text.len() || text[..i].ends_with(char::is_whitespace);
            let after = |i: usize| i == text.len() || text[i..].starts_with(char::is_whitespace);
            if !(edge(r.start) && after(r.end)) {
                continue;
            }
            checked += 1;
            let alone = e.token_ids(&text[r.clone()]).unwrap().unwrap();
            // Bytes as well as ids: each span token sits inside the chunk's range.
            assert!(doc.offsets[s.clone()]
                .iter()
                .all(|o| o.start >= r.start && o.end <= r.end));
            same += usize::from(doc.ids[s.clone()] == alone.ids[..]);
        }
    }
    println!("{same} of {checked} word-edged chunks: span ids equal the chunk's own ids");
    assert!(checked >= 100, "{checked}");
    assert_eq!(same, checked);
}

#[test]
fn long_documents_take_several_passes_and_the_cache_serves_them_again() {
    let e = encoder(Engine::Packed);
    let (texts, ranges) = faq_chunks(2);
    let docs = late::documents(texts.iter().map(String::as_str), &ranges, &[]);
    let tmp = tempfile::tempdir().unwrap();
    let cache = kerf::cache::VectorCache::open(&tmp.path().join("c.sqlite")).unwrap();
    let chunks: usize = ranges.iter().map(Vec::len).sum();
    let (first, r1) = late_vectors(&e, &docs, &FULL, Some(&cache));
    let (again, r2) = late_vectors(&e, &docs, &FULL, Some(&cache));
    assert_eq!(r1.embedded, chunks, "every chunk pooled once");
    assert_eq!((r2.embedded, r2.cached), (0, chunks));
    assert_eq!(first, again);
    // More than one pass per chapter: the encoder sees more tokens than the chapters hold (each
    // pass re-reads its left context and the partial chunk the pass before could not hold),
    // but well under twice as many.
    // The passes counted from the pure planning functions: 510 content tokens and 2 specials.
    let (mut pass_tokens, mut content, mut passes) = (0, 0, 0);
    for (t, r) in texts.iter().zip(&ranges) {
        let tokens = e.token_ids(t).unwrap().unwrap();
        let spans = late::chunk_spans(&tokens.offsets, r, 510);
        for p in late::passes(tokens.ids.len(), &spans, 510, FULL.overlap) {
            pass_tokens += p.tokens.len() + 2;
            passes += 1;
        }
        content += tokens.ids.len();
    }
    assert!(passes > 2 * texts.len(), "{passes} passes");
    assert_eq!(
        (r1.input_tokens, r1.embedded_tokens),
        (pass_tokens, pass_tokens)
    );
    assert_eq!((r2.input_tokens, r2.embedded_tokens), (pass_tokens, 0));
    assert!(
        pass_tokens > content && pass_tokens < content * 3 / 2,
        "{pass_tokens} vs {content}"
    );
    // Context changes vectors: late and alone differ, but stay about the same text.
    let inputs: Vec<&str> = docs
        .iter()
        .flat_map(|d| d.chunks.iter().map(|r| &d.text[r.clone()]))
        .collect();
    let alone = e.embed(&inputs).unwrap();
    let cos: Vec<f32> = first
        .iter()
        .flatten()
        .zip(&alone)
        .map(|(l, a)| cosine(l.as_ref().unwrap(), a))
        .collect();
    let mean = cos.iter().sum::<f32>() / cos.len() as f32;
    println!(
        "late vs alone over {} chunks: mean cosine {mean:.4}",
        cos.len()
    );
    assert!(cos.iter().all(|&c| c < 0.9999), "context changed nothing");
    assert!(mean > 0.5, "mean cosine {mean}");
}

#[test]
fn the_binary_embeds_and_compares_with_a_late_chunking_profile() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    std::fs::create_dir(d.join("corpus")).unwrap();
    faq_chapters(&d.join("corpus"), 2);
    let base = std::fs::read_to_string(common::repo().join("profiles/sentences-128.toml")).unwrap();
    assert!(!base.contains("context"));
    std::fs::write(
        d.join("late.toml"),
        base.replace("[pool]\n", "[pool]\ncontext = 512\n"),
    )
    .unwrap();
    let shown = ok(&kerf_in(d, &["profile", "show", "late.toml"]));
    assert!(
        shown.contains("late chunking: passes of up to 512 tokens"),
        "{shown}"
    );
    let base_path = common::repo().join("profiles/sentences-128.toml");
    let mut logs = Vec::new();
    for (profile, out) in [
        (base_path.to_str().unwrap(), "alone"),
        ("late.toml", "late"),
    ] {
        let o = kerf_in(
            d,
            &[
                "embed", "-p", profile, "corpus", "--out", out, "--cache", "c.sqlite",
            ],
        );
        ok(&o);
        logs.push(String::from_utf8_lossy(&o.stderr).into_owned());
    }
    // The late run embedded every pass afresh; its encoder tokens, as `embed` reports them.
    let late_tokens: usize = logs[1]
        .split(" tokens through the encoder")
        .next()
        .and_then(|h| h.rsplit(' ').next())
        .and_then(|n| n.parse().ok())
        .unwrap_or_else(|| panic!("no token count in {:?}", logs[1]));
    let read = |out: &str| {
        kerf::store::read_npy_f32(&std::fs::read(d.join(out).join("chunk_vectors.npy")).unwrap())
            .unwrap()
    };
    let ((ra, ca, a), (rl, _, l)) = (read("alone"), read("late"));
    assert_eq!(ra, rl, "the same chunks");
    assert!(ra >= 20);
    let differ = (0..ra)
        .filter(|r| a[r * ca..(r + 1) * ca] != l[r * ca..(r + 1) * ca])
        .count();
    assert_eq!(differ, ra, "every chunk vector changes with context");
    let chunks = |out: &str| std::fs::read_to_string(d.join(out).join("chunks.jsonl")).unwrap();
    assert_eq!(
        chunks("alone"),
        chunks("late"),
        "late chunking never changes the cut"
    );
    // Self-retrieval probes on the late plan: holed passes are embedded, results come out.
    let o = ok(&kerf_in(
        d,
        &[
            "compare",
            "corpus",
            "-p",
            "late.toml",
            "--probes",
            "12",
            "--json",
            "--cache",
            "c.sqlite",
        ],
    ));
    let v: serde_json::Value = serde_json::from_str(&o).unwrap();
    let plan = v["plans"]
        .as_array()
        .unwrap()
        .iter()
        .find(|p| p["profile"]["pool"]["context"] == 512)
        .unwrap_or_else(|| panic!("no late plan in {v}"));
    // compare costs the plan at the tokens the embedding job put through the encoder.
    assert_eq!(plan["input_tokens"], late_tokens, "{plan}");
    assert_eq!(plan["chunks"], ra, "{plan}");
    let probes = &plan["self_retrieval"];
    assert_eq!(probes["summary"]["queries"], 12, "{probes}");
    // Each probe re-runs at least one holed pass and re-pools at least the chunk that held it.
    assert!(probes["embedded"].as_u64().unwrap() >= 12, "{probes}");
    assert!(
        probes["holed_tokens"].as_u64().unwrap() >= 12 * 16,
        "{probes}"
    );
}

/// Under a prefix template each document's pass begins with its first chunk's own prefix: a
/// document that is a single chunk (texts of tests/fixtures/st_vectors.json, each titled by its
/// fixture id) gets the same vector late as encoded alone with that prefix, through the engine
/// path compare and sweep use.
#[test]
fn a_templated_prefix_leads_each_pass() {
    use kerf::compare::engine::{self, Corpus};
    let f = common::fixture("st_vectors.json");
    let docs: Vec<kerf::corpus::Document> = f["texts"]
        .as_array()
        .unwrap()
        .iter()
        .map(|t| t["text"].as_str().unwrap())
        .filter(|t| t.len() < 1500)
        .enumerate()
        .map(|(i, t)| kerf::corpus::Document::plain(format!("sample-{i}.txt"), "fixture", t))
        .collect();
    let (info, counter) = kerf::model::inspect(&common::model_dir()).unwrap();
    let e = encoder(Engine::Packed);
    let corpus = Corpus::new(docs, &counter).unwrap();
    let mut p = kerf::profile::Profile::default();
    p.cut.window = 512;
    p.cut.boundary = kerf::profile::Boundary::Head;
    p.cut.prefix = "{title}: ".into();
    let alone = kerf::plan::resolve(&p, &info, &counter, "t").unwrap();
    p.pool.context = 512;
    let late = kerf::plan::resolve(&p, &info, &counter, "t").unwrap();
    let chunks = engine::cut_corpus(&corpus, &alone, &counter);
    for (d, cs) in corpus.docs.iter().zip(&chunks) {
        // No headings in these texts: the title is the file name without its extension.
        let want = format!("{}: ", d.id.trim_end_matches(".txt"));
        assert_eq!(alone.prefix_of(&cs[0]), want);
    }
    let (a, _) = engine::embed_chunks(&corpus, &chunks, &alone, &e, None, &mut |_, _| {}).unwrap();
    let (l, _) = engine::embed_chunks(&corpus, &chunks, &late, &e, None, &mut |_, _| {}).unwrap();
    for ((d, a), l) in corpus.docs.iter().zip(&a).zip(&l) {
        let c = cosine(&a[0], &l[0]);
        assert!(c >= 0.99999, "{}: cosine {c}", d.id);
    }
    // And the prefix reached the encoder: the same text without it gives another vector.
    let bare = e
        .embed(&[&corpus.docs[0].text[chunks[0][0].byte_range.clone()]])
        .unwrap();
    assert!(cosine(&bare[0], &a[0][0]) < 0.9999);
}
