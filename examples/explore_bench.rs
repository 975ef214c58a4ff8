//! Speed of the explorer: time from a key press that changes the overlap to the redrawn screen
//! (re-cutting, cache keys, Board layout and a frame into a TestBackend; embedding excluded,
//! since it runs on the worker thread), and the time of one frame, on demo-texts and on a
//! generated corpus of 200 documents. Prints medians; the aims are under 50 ms and under 10 ms.
//!
//! cargo run --release --example explore_bench
use std::time::Instant;

use kerf::compare::engine::Corpus;
use kerf::corpus::Document;
use kerf::profile::{Boundary, Profile};
use kerf_app::tui::action::Pane;
use kerf_app::tui::{render, Action, App, AppInit};
use ratatui::backend::TestBackend;
use ratatui::Terminal;

fn demo_docs(root: &std::path::Path) -> Vec<Document> {
    let mut files: Vec<_> = std::fs::read_dir(root)
        .expect("demo-texts")
        .map(|e| e.unwrap().path())
        .filter(|p| matches!(p.extension().and_then(|e| e.to_str()), Some("md" | "txt")))
        .collect();
    files.sort();
    files
        .into_iter()
        .map(|p| Document {
            id: p.file_name().unwrap().to_string_lossy().into_owned(),
            origin: p.display().to_string(),
            text: std::fs::read_to_string(&p).unwrap(),
            layout: None,
        })
        .collect()
}

/// 200 documents of 300 to 6,000 words, stitched from the demo corpus's paragraphs in a fixed
/// pseudo-random order.
fn generated(demo: &[Document]) -> Vec<Document> {
    let paras: Vec<&str> = demo
        .iter()
        .flat_map(|d| d.text.split("\n\n"))
        .filter(|p| !p.trim().is_empty())
        .collect();
    let mut state = 0x2545F4914F6CDD1Du64;
    let mut next = move || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        state
    };
    (0..200)
        .map(|i| {
            let target = 300 + (next() % 5700) as usize;
            let mut text = String::new();
            let mut words = 0;
            while words < target {
                let p = paras[(next() % paras.len() as u64) as usize];
                words += p.split_whitespace().count();
                text.push_str(p);
                text.push_str("\n\n");
            }
            Document {
                id: format!("gen-{i:03}.md"),
                origin: "generated".into(),
                text,
                layout: None,
            }
        })
        .collect()
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn bench(name: &str, docs: Vec<Document>) {
    let dir = kerf::model::default_model_dir();
    let (info, counter) = kerf::model::inspect(&dir).expect("model (run scripts/fetch-model)");
    let words: usize = docs.iter().map(|d| d.text.split_whitespace().count()).sum();
    let n = docs.len();
    let corpus = Corpus::new(docs, &counter).unwrap();
    let mut profile = Profile::default();
    profile.cut.boundary = Boundary::Token;
    let plan = kerf::plan::resolve(&profile, &info, &counter, "bench").unwrap();
    let size = (140u16, 45u16);
    let mut app = App::new(AppInit {
        corpus,
        counter,
        info,
        model_label: "bench".into(),
        plan,
        refs: vec![],
        refs_origin: None,
        probes: None,
        probe_prefix: String::new(),
        problems: vec![],
        size,
    })
    .unwrap();
    app.update(Action::ShowPane(Pane::Board));
    let mut term = Terminal::new(TestBackend::new(size.0, size.1)).unwrap();
    term.draw(|f| render::draw(f, &app)).unwrap();
    let mut key_ms = Vec::new();
    for i in 0..30 {
        let t = Instant::now();
        app.update(if i % 2 == 0 {
            Action::OverlapUp
        } else {
            Action::OverlapDown
        });
        term.draw(|f| render::draw(f, &app)).unwrap();
        key_ms.push(t.elapsed().as_secs_f64() * 1e3);
        // The embedding requests go nowhere: embedding is not part of this measurement.
        app.take_requests();
    }
    // Of which re-cutting alone (the splitter over every document).
    let mut cut_ms = Vec::new();
    for _ in 0..10 {
        let t = Instant::now();
        let st =
            kerf_app::tui::plans::cut_state(&app.corpus, app.counter(), app.current.plan.clone());
        cut_ms.push(t.elapsed().as_secs_f64() * 1e3);
        drop(st);
    }
    let mut frame_ms = Vec::new();
    for pane in [Pane::Stock, Pane::Board, Pane::Fit] {
        app.update(Action::ShowPane(pane));
        for _ in 0..30 {
            app.update(Action::Move(1));
            let t = Instant::now();
            term.draw(|f| render::draw(f, &app)).unwrap();
            frame_ms.push(t.elapsed().as_secs_f64() * 1e3);
        }
    }
    println!(
        "{name:<22} {n:>4} documents {words:>7} words  overlap key to redraw: median {:>6.2} ms (re-cut alone {:>6.2} ms)  frame: median {:>5.2} ms",
        median(key_ms),
        median(cut_ms),
        median(frame_ms)
    );
}

fn main() {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-texts");
    let demo = demo_docs(&root);
    let gen = generated(&demo);
    bench("demo-texts", demo);
    bench("generated (200 docs)", gen);
}
