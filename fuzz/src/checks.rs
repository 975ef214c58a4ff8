//! The invariants each fuzz target asserts, as plain functions over an input.
//!
//! Shared by the libFuzzer targets (`fuzz/fuzz_targets/*.rs`, through the `kerf_fuzz` crate) and
//! by `tests/fuzz_regressions.rs`, which includes this file with `#[path]` and replays every
//! input saved under `fuzz/regressions/<target>/` without libFuzzer. Every check panics on a
//! broken invariant, so a failure is a crash for libFuzzer and a failed test for cargo.
//!
//! Only `kerf`, `serde`, `serde_json`, `toml` and `tempfile` are used here: the root package has
//! them all, so the regression test needs no dependency of its own.
use std::collections::{BTreeMap, HashMap, HashSet};
use std::io::Cursor;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use kerf::cache::{text_key, VectorCache};
use kerf::compare::refs::{self, Reference};
use kerf::corpus::{DocStream, InputOptions};
use kerf::model::{self, ModelInfo};
use kerf::plan::{self, ResolvedPlan};
use kerf::profile::{Boundary, Profile};
use kerf::segment;
use kerf::split;
use kerf::survey;
use kerf::tokens::TokenCounter;

/// The targets, in the order `scripts/fuzz` runs them.
pub const TARGETS: [&str; 9] = [
    "segment",
    "split",
    "profile",
    "refs_toml",
    "refs_trec",
    "jsonl",
    "cache",
    "html",
    "pdf",
];

/// Run the check of `target` on one saved input (the split target's inputs are [`SplitCase`]
/// JSON; every other target takes the raw bytes libFuzzer gave it).
pub fn run(target: &str, data: &[u8]) {
    match target {
        "segment" => segment(data),
        "html" => html(data),
        "pdf" => pdf(data),
        "split" => {
            let case: SplitCase = serde_json::from_slice(data).expect("a split case as JSON");
            split(&case)
        }
        "profile" => profile(data),
        "refs_toml" => refs_toml(data),
        "refs_trec" => refs_trec(data),
        "jsonl" => jsonl(data),
        "cache" => cache(data),
        other => panic!("unknown fuzz target {other}"),
    }
}

fn text_of(data: &[u8]) -> String {
    String::from_utf8_lossy(data).into_owned()
}

// ---------------------------------------------------------------------------------------------
// segment

/// Paragraphs and sentences: non-empty, trimmed, ascending, non-overlapping, on char boundaries
/// inside the text; each sentence inside its paragraph; every visible character in exactly one
/// sentence; `paragraphs` and `sentences` agree with `segment`.
pub fn segment(data: &[u8]) {
    let text = text_of(data);
    let text = text.as_str();
    let s = segment::segment(text);
    assert_eq!(s.sentences.len(), s.sentence_paragraph.len());
    let mut last_end = 0;
    for p in &s.paragraphs {
        let r = &p.bytes;
        assert!(
            r.start >= last_end && r.start < r.end && r.end <= text.len(),
            "paragraph {r:?}"
        );
        assert!(text.is_char_boundary(r.start) && text.is_char_boundary(r.end));
        assert_eq!(
            text[r.clone()].trim(),
            &text[r.clone()],
            "paragraph trimmed"
        );
        last_end = r.end;
    }
    let mut covered = vec![0u8; text.len()];
    let mut last_end = 0;
    let mut last_para = 0;
    for (r, &pi) in s.sentences.iter().zip(&s.sentence_paragraph) {
        assert!(
            r.start >= last_end && r.start < r.end && r.end <= text.len(),
            "sentence {r:?}"
        );
        assert!(text.is_char_boundary(r.start) && text.is_char_boundary(r.end));
        assert_eq!(text[r.clone()].trim(), &text[r.clone()], "sentence trimmed");
        assert!(pi >= last_para && pi < s.paragraphs.len());
        let p = &s.paragraphs[pi].bytes;
        assert!(
            p.start <= r.start && r.end <= p.end,
            "sentence {r:?} outside its paragraph {p:?}"
        );
        for b in r.clone() {
            covered[b] += 1;
        }
        last_end = r.end;
        last_para = pi;
    }
    for (i, c) in text.char_indices() {
        if !c.is_whitespace() {
            assert_eq!(
                covered[i], 1,
                "{c:?} at byte {i} not in exactly one sentence"
            );
        }
    }
    assert_eq!(s.paragraphs, segment::paragraphs(text));
    assert_eq!(s.sentences, segment::sentences(text));
}

// ---------------------------------------------------------------------------------------------
// split

/// The default model's folder and tokenizer, loaded once per process.
pub fn model() -> &'static (ModelInfo, TokenCounter) {
    static M: OnceLock<(ModelInfo, TokenCounter)> = OnceLock::new();
    M.get_or_init(|| {
        let dir = model::default_model_dir();
        model::inspect(&dir).unwrap_or_else(|e| {
            panic!(
                "the default model is needed at {} (run scripts/fetch-model): {e}",
                dir.display()
            )
        })
    })
}

/// Prefixes a split case may put before every chunk.
pub const PREFIXES: [&str; 4] = ["", "passage: ", "query: ", "search_document: "];

/// One cut to check: the profile's `[cut]` numbers and a text.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct SplitCase {
    /// Boundary rule.
    pub boundary: Boundary,
    /// Window, specials and prefix included.
    pub window: usize,
    /// Overlap asked for.
    pub overlap: usize,
    /// Shortest last chunk.
    pub min_chunk: usize,
    /// Prefix before every chunk.
    pub prefix: String,
    /// The document.
    pub text: String,
}

/// The resolved plan of a case; panics if the case is not a valid plan for the default model.
///
/// A case whose content budget is below the tokenizer's piece floor
/// ([`TokenCounter::piece_floor`]) must be refused by `plan::resolve` with a message naming the
/// floor; it is then checked at the smallest window the plan accepts, so the same text still
/// runs through every guarantee.
pub fn split_plan(case: &SplitCase) -> ResolvedPlan {
    let (info, counter) = model();
    let mut p = Profile::default();
    p.cut.window = case.window;
    p.cut.boundary = case.boundary;
    p.cut.overlap = case.overlap;
    p.cut.min_chunk = case.min_chunk;
    p.cut.prefix = case.prefix.clone();
    p.validate("split case").expect("a valid profile");
    let floor = counter.piece_floor();
    let fixed = counter.specials_per_input()
        + if case.prefix.is_empty() {
            0
        } else {
            counter.count_content(&case.prefix).unwrap()
        };
    if case.boundary != Boundary::Head && case.window - fixed < floor {
        let e = plan::resolve(&p, info, counter, "split case")
            .err()
            .unwrap_or_else(|| panic!("budget below the piece floor {floor} accepted: {case:?}"));
        assert!(
            e.to_string().contains(&format!("at least {floor}")),
            "refusal does not name the floor: {e}"
        );
        p.cut.window = (fixed + floor).min(info.max_position_embeddings);
        p.validate("split case at the floor")
            .expect("a valid profile");
    }
    plan::resolve(&p, info, counter, "split case").expect("a plan the model accepts")
}

/// Cut `case.text` as `job::cut_document` does and check every guarantee of the splitter.
pub fn split(case: &SplitCase) {
    let (_, counter) = model();
    let plan = split_plan(case);
    let text = case.text.as_str();
    let an = survey::analyze(text, counter).expect("tokenizes");
    let recount = |t: &str| counter.count_content(t).unwrap_or(usize::MAX);
    let chunks = split::cut(text, &an.tokens, &an.segments, &plan.cut, &recount);
    let ctx = || serde_json::to_string(case).unwrap();
    let n = an.tokens.len();
    let budget = plan.budget();
    let prefix = &plan.profile.cut.prefix;
    for (i, ch) in chunks.iter().enumerate() {
        let r = &ch.byte_range;
        assert!(
            r.start < r.end && r.end <= text.len(),
            "chunk {i} bytes {r:?} outside the text; case {}",
            ctx()
        );
        assert!(
            text.is_char_boundary(r.start) && text.is_char_boundary(r.end),
            "chunk {i} bytes {r:?} not on char boundaries; case {}",
            ctx()
        );
        let piece = &text[r.clone()];
        let re = counter.count_content(piece).unwrap();
        assert!(
            re <= budget,
            "chunk {i} re-tokenises to {re} > budget {budget}: {piece:?}; case {}",
            ctx()
        );
        assert_eq!(
            re,
            ch.content_tokens,
            "reported token count of chunk {i} {piece:?}; case {}",
            ctx()
        );
        let input = counter.count_input(&format!("{prefix}{piece}")).unwrap();
        assert!(
            input <= plan.window,
            "chunk {i} with prefix is {input} tokens > window {}; case {}",
            plan.window,
            ctx()
        );
        assert_eq!(ch.index, i);
        assert!(!ch.token_range.is_empty() && ch.token_range.end <= n);
        if i == 0 {
            assert_eq!(ch.token_range.start, 0, "first chunk starts at token 0");
            assert_eq!(ch.overlap_tokens, 0);
        } else {
            let prev = &chunks[i - 1];
            assert!(
                ch.token_range.start > prev.token_range.start && r.start > prev.byte_range.start,
                "chunk {i} does not advance; case {}",
                ctx()
            );
            assert!(
                ch.token_range.start <= prev.token_range.end,
                "gap between chunks {} and {i}; case {}",
                i - 1,
                ctx()
            );
            assert_eq!(
                ch.overlap_tokens,
                prev.token_range.end - ch.token_range.start
            );
            // A short last chunk may be extended backwards when min_chunk asks for it.
            let tail_merge = i == chunks.len() - 1 && plan.cut.min_chunk_tokens > 0;
            if !tail_merge {
                assert!(
                    ch.overlap_tokens <= plan.cut.overlap_tokens,
                    "chunk {i} overlaps {} tokens, asked {}; case {}",
                    ch.overlap_tokens,
                    plan.cut.overlap_tokens,
                    ctx()
                );
                if plan.cut.overlap_tokens == 0 {
                    assert!(
                        r.start >= prev.byte_range.end,
                        "chunks {} and {i} share bytes without overlap asked; case {}",
                        i - 1,
                        ctx()
                    );
                }
            }
        }
    }
    if plan.cut.boundary == Boundary::Head {
        assert!(chunks.len() <= 1, "head keeps one window");
        return;
    }
    if n == 0 {
        assert!(chunks.is_empty());
        return;
    }
    assert_eq!(
        chunks.last().unwrap().token_range.end,
        n,
        "chunks reach the last token; case {}",
        ctx()
    );
    // Every visible character is in some chunk, unless the tokenizer drops it on its own
    // (control characters, U+FFFD, lone combining marks): the model never sees those.
    let mut covered = vec![false; text.len()];
    for ch in &chunks {
        for b in ch.byte_range.clone() {
            covered[b] = true;
        }
    }
    for (i, c) in text.char_indices() {
        if !c.is_whitespace() && !covered[i] {
            let alone = counter.count_content(&c.to_string()).unwrap();
            assert_eq!(alone, 0, "{c:?} at byte {i} is in no chunk; case {}", ctx());
        }
    }
}

// ---------------------------------------------------------------------------------------------
// profile

/// A profile either parses, validates and round-trips through `to_toml` unchanged, or is refused
/// with a message that names its origin.
pub fn profile(data: &[u8]) {
    let text = text_of(data);
    match Profile::from_toml_str(&text, "fuzz.toml") {
        Ok(p) => {
            p.validate("fuzz.toml").expect("a parsed profile is valid");
            let again = Profile::from_toml_str(&p.to_toml(), "again")
                .unwrap_or_else(|e| panic!("{p:?} does not round-trip: {e}"));
            assert_eq!(p, again, "profile round trip");
        }
        Err(e) => {
            let m = e.to_string();
            assert!(m.starts_with("fuzz.toml: "), "{m}");
            if let Some(rest) = m.strip_prefix("fuzz.toml: line ") {
                let line: usize = rest
                    .split(',')
                    .next()
                    .and_then(|l| l.parse().ok())
                    .expect("a line number");
                assert!((1..=text.split('\n').count()).contains(&line), "{m}");
            }
        }
    }
}

// ---------------------------------------------------------------------------------------------
// references

fn check_refs(refs: &[Reference]) {
    assert!(!refs.is_empty(), "accepted references are never empty");
    let mut seen = HashSet::new();
    for r in refs {
        assert!(!r.id.trim().is_empty(), "empty id accepted");
        assert!(seen.insert(r.id.clone()), "duplicate id {} accepted", r.id);
        assert!(!r.text.trim().is_empty(), "empty text accepted");
        assert!(r.kind == "question" || r.kind == "passage", "{}", r.kind);
    }
}

/// Accepted TOML references are well formed and survive writing back as TOML and reading
/// again; refused ones get a message naming the file.
pub fn refs_toml(data: &[u8]) {
    let text = text_of(data);
    match refs::parse_toml(&text, "r.toml") {
        Ok(list) => {
            check_refs(&list);
            for r in &list {
                assert!(r.expect.values().all(|&g| g == 1), "TOML grades are 1");
            }
            let mut entries = Vec::new();
            for r in &list {
                let mut t = toml::Table::new();
                t.insert("id".into(), r.id.clone().into());
                t.insert("text".into(), r.text.clone().into());
                t.insert("prefix".into(), r.prefix.clone().into());
                t.insert("kind".into(), r.kind.clone().into());
                let docs: Vec<toml::Value> = r
                    .expect
                    .keys()
                    .map(|d| toml::Value::String(d.clone()))
                    .collect();
                t.insert("expect".into(), toml::Value::Array(docs));
                entries.push(toml::Value::Table(t));
            }
            let mut file = toml::Table::new();
            file.insert("schema".into(), 1.into());
            file.insert("reference".into(), toml::Value::Array(entries));
            let written = toml::to_string(&file).expect("serialises");
            let again = refs::parse_toml(&written, "again")
                .unwrap_or_else(|e| panic!("written back, refused: {e}\n{written}"));
            assert_eq!(list, again, "references round trip");
        }
        Err(e) => assert!(e.to_string().starts_with("r.toml: "), "{e}"),
    }
}

/// Input: queries, a NUL byte, qrels. Accepted references hold exactly the non-blank query
/// lines, in order, each with the grades its qrels lines give (last one wins, negatives are 0).
pub fn refs_trec(data: &[u8]) {
    let (q, r) = match data.iter().position(|&b| b == 0) {
        Some(i) => (&data[..i], &data[i + 1..]),
        None => (data, &[][..]),
    };
    let (queries, qrels) = (text_of(q), text_of(r));
    match refs::parse_trec(&queries, &qrels, "q.tsv") {
        Ok(list) => {
            check_refs(&list);
            let lines: Vec<&str> = queries.lines().filter(|l| !l.trim().is_empty()).collect();
            assert_eq!(list.len(), lines.len(), "one reference per query line");
            let mut want: HashMap<String, BTreeMap<String, i64>> = HashMap::new();
            for line in qrels.lines().filter(|l| !l.trim().is_empty()) {
                let f: Vec<&str> = line.split_whitespace().collect();
                assert_eq!(f.len(), 4, "accepted qrels line {line:?}");
                let rel: i64 = f[3].parse().expect("accepted relevance");
                want.entry(f[0].into())
                    .or_default()
                    .insert(f[2].into(), rel.max(0));
            }
            for r in &list {
                assert_eq!(r.id, r.id.trim());
                assert_eq!(r.text, r.text.trim());
                let got: BTreeMap<String, i64> = r
                    .expect
                    .iter()
                    .map(|(d, &g)| (d.clone(), i64::from(g)))
                    .collect();
                let want_r = want.remove(&r.id).unwrap_or_default();
                assert_eq!(got, want_r, "grades of query {}", r.id);
            }
            assert!(want.is_empty(), "judged queries missing: {want:?}");
        }
        Err(e) => assert!(e.to_string().starts_with("q.tsv"), "{e}"),
    }
}

// ---------------------------------------------------------------------------------------------
// jsonl

#[derive(Debug, PartialEq)]
enum Event {
    Doc { id: String, text: String },
    Broken { line: usize },
    Duplicate { id: String },
}

/// First byte: options (bit 0 lossy UTF-8, bit 1 skip broken lines); the rest is a JSONL file.
/// The stream yields exactly what an independent reading of the lines says, stops after the
/// first error, and names broken lines by number.
pub fn jsonl(data: &[u8]) {
    let (flags, body) = data.split_first().map_or((0, &[][..]), |(f, b)| (*f, b));
    let opts = InputOptions {
        lossy: flags & 1 != 0,
        skip_broken_lines: flags & 2 != 0,
        ..InputOptions::default()
    };
    // The independent reading.
    let mut want = Vec::new();
    let mut seen = HashSet::new();
    let mut start = 0;
    let mut line_no = 0;
    while start < body.len() {
        let end = body[start..]
            .iter()
            .position(|&b| b == b'\n')
            .map_or(body.len(), |i| start + i + 1);
        let raw = &body[start..end];
        start = end;
        line_no += 1;
        let line = match std::str::from_utf8(raw) {
            Ok(s) => s.to_string(),
            Err(_) if opts.lossy => String::from_utf8_lossy(raw).into_owned(),
            Err(_) => {
                want.push(Event::Broken { line: line_no });
                continue;
            }
        };
        if line.trim().is_empty() {
            continue;
        }
        let doc = serde_json::from_str::<serde_json::Value>(&line)
            .ok()
            .and_then(|v| {
                let obj = v.as_object()?;
                let text = obj.get("text")?.as_str()?.to_string();
                let id = match obj.get("id") {
                    Some(serde_json::Value::String(s)) => s.clone(),
                    Some(serde_json::Value::Number(n)) => n.to_string(),
                    _ => format!("in.jsonl:{line_no}"),
                };
                Some((id, text))
            });
        match doc {
            Some((id, text)) if seen.insert(id.clone()) => want.push(Event::Doc { id, text }),
            Some((id, _)) => want.push(Event::Duplicate { id }),
            None => want.push(Event::Broken { line: line_no }),
        }
    }
    // What the stream should give: broken lines are skipped or end it; a duplicate ends it.
    let mut expected = Vec::new();
    for e in want {
        match e {
            Event::Broken { .. } if opts.skip_broken_lines => {}
            Event::Doc { .. } => expected.push(e),
            _ => {
                expected.push(e);
                break;
            }
        }
    }
    let stream = DocStream::from_jsonl_reader(
        Cursor::new(body.to_vec()),
        Path::new("in.jsonl"),
        opts.clone(),
    );
    let mut got = Vec::new();
    for item in stream {
        got.push(match item {
            Ok(d) => Event::Doc {
                id: d.id,
                text: d.text,
            },
            Err(kerf::corpus::CorpusError::Jsonl { path, line, .. }) => {
                assert_eq!(path, PathBuf::from("in.jsonl"));
                Event::Broken { line }
            }
            Err(kerf::corpus::CorpusError::DuplicateId { id, .. }) => Event::Duplicate { id },
            Err(e) => panic!("unexpected error {e}"),
        });
    }
    assert_eq!(got, expected, "options {opts:?}");
}

// ---------------------------------------------------------------------------------------------
// cache

const FINGERPRINT: &str = "fuzz-model";

/// The vectors the template cache holds: (prefix, text, vector).
fn stored() -> Vec<([u8; 32], Vec<f32>)> {
    vec![
        (text_key("", "alpha"), vec![1.0, -2.5, 0.125, 3.0]),
        (text_key("passage: ", "beta"), vec![0.0, 1e-3, -7.0, 2.0]),
        (text_key("", "gamma"), vec![f32::MAX, -0.0, 0.5, 9.75]),
    ]
}

/// A scratch folder for cache files, and the bytes of a valid cache holding [`stored`].
fn cache_setup() -> &'static (PathBuf, Vec<u8>) {
    static S: OnceLock<(PathBuf, Vec<u8>)> = OnceLock::new();
    S.get_or_init(|| {
        let base = if Path::new("/dev/shm").is_dir() {
            PathBuf::from("/dev/shm")
        } else {
            std::env::temp_dir()
        };
        let dir = base.join(format!("kerf-fuzz-cache-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let p = dir.join("template.sqlite");
        remove_cache(&p);
        {
            let c = VectorCache::open(&p).unwrap();
            c.put_many(FINGERPRINT, &stored()).unwrap();
        }
        // The last connection closed: the WAL is checkpointed into the file and removed.
        let bytes = std::fs::read(&p).unwrap();
        remove_cache(&p);
        (dir, bytes)
    })
}

fn remove_cache(p: &Path) {
    for suffix in ["", "-wal", "-shm", "-journal"] {
        let _ = std::fs::remove_file(format!("{}{suffix}", p.display()));
    }
}

/// The file bytes a cache input stands for. First byte: 0 = the rest is the file; 1 = the valid
/// template with the rest applied as patches of (offset high, offset low, byte); 2 = the same,
/// after truncating the template to the length in the next two bytes.
pub fn cache_file(data: &[u8]) -> Vec<u8> {
    let template = &cache_setup().1;
    let (mode, rest) = data.split_first().map_or((0, &[][..]), |(m, r)| (*m, r));
    match mode % 3 {
        0 => rest.to_vec(),
        m => {
            let mut file = template.clone();
            let mut patches = rest;
            if m == 2 && rest.len() >= 2 {
                let len = usize::from(u16::from_be_bytes([rest[0], rest[1]]));
                file.truncate(len);
                patches = &rest[2..];
            }
            if !file.is_empty() {
                for p in patches.chunks_exact(3) {
                    let at = usize::from(u16::from_be_bytes([p[0], p[1]])) % file.len();
                    file[at] = p[2];
                }
            }
            file
        }
    }
}

/// Damaged cache files are refused or yield no vectors, never wrong ones; a file that opens
/// takes a new vector and gives it back.
pub fn cache(data: &[u8]) {
    let (dir, _) = cache_setup();
    let path = dir.join("case.sqlite");
    remove_cache(&path);
    std::fs::write(&path, cache_file(data)).unwrap();
    check_cache_file(&path);
    remove_cache(&path);
}

fn check_cache_file(path: &Path) {
    let Ok(c) = VectorCache::open(path) else {
        return;
    };
    let known = stored();
    let mut keys: Vec<[u8; 32]> = known.iter().map(|(k, _)| *k).collect();
    keys.push(text_key("", "never stored"));
    if let Ok(got) = c.get_many(FINGERPRINT, &keys) {
        assert_eq!(got.len(), keys.len());
        for (i, v) in got.iter().enumerate() {
            if let Some(v) = v {
                let right = known.get(i).map(|(_, w)| w);
                assert_eq!(Some(v), right, "wrong vector for key {i}");
            }
        }
    }
    if let Ok(got) = c.get_many("another-model", &keys) {
        assert!(got.iter().all(Option::is_none), "vectors of another model");
    }
    let fresh = (text_key("", "fresh"), vec![4.0f32, 5.0, 6.0, 7.0]);
    if c.put_many(FINGERPRINT, std::slice::from_ref(&fresh))
        .is_ok()
    {
        if let Ok(got) = c.get_many(FINGERPRINT, &[fresh.0]) {
            assert!(
                got[0].is_none() || got[0].as_ref() == Some(&fresh.1),
                "a vector just stored comes back different"
            );
        }
    }
}

/// Checks that hold for any extracted document: headings and pages lie inside the text on
/// character boundaries, in order, and each heading's range holds its title.
fn extracted_is_consistent(x: &kerf::extract::Extracted) {
    let t = &x.text;
    let mut last = 0;
    for h in &x.headings {
        assert!(
            h.bytes.start <= h.bytes.end && h.bytes.end <= t.len(),
            "{h:?}"
        );
        assert!(t.is_char_boundary(h.bytes.start) && t.is_char_boundary(h.bytes.end));
        assert!(h.bytes.start >= last, "headings in document order");
        last = h.bytes.start;
        assert!(h.level >= 1, "levels count from 1");
    }
    let mut end = 0;
    for p in &x.pages {
        assert!(
            p.start >= end && p.start <= p.end && p.end <= t.len(),
            "{p:?}"
        );
        assert!(t.is_char_boundary(p.start) && t.is_char_boundary(p.end));
        end = p.end;
    }
}

/// HTML: any bytes give text (or, nested past the limit, a refusal); blocks never hold a blank
/// line, the text has no whitespace at its ends, and each heading's range spells its title.
pub fn html(data: &[u8]) {
    use kerf::extract::html;
    match html::extract(data, "fuzz.html", html::HtmlOptions::default()) {
        Err(e) => assert!(
            html::nesting_estimate(data) > html::MAX_NESTING,
            "refused below the nesting limit: {e}"
        ),
        Ok(x) => {
            extracted_is_consistent(&x);
            assert!(!x.text.contains("\n\n\n"), "a blank line inside a block");
            assert_eq!(
                x.text
                    .trim_matches(|c: char| c.is_whitespace() && c != '\u{a0}'),
                x.text
            );
            for h in &x.headings {
                let spelled: Vec<&str> = x.text[h.bytes.clone()].split_whitespace().collect();
                assert_eq!(spelled.join(" "), h.title);
            }
        }
    }
}

/// PDF: any bytes give text or one of the promised errors, never a panic (a panic inside the
/// PDF reader is caught and reported as a damaged file).
pub fn pdf(data: &[u8]) {
    if let Ok(x) = kerf::extract::pdf::extract(data, "fuzz.pdf") {
        extracted_is_consistent(&x);
        assert!(!x.text.trim().is_empty(), "text, or NoText");
        assert_eq!(x.pages.len(), x.report.pages);
    }
}
