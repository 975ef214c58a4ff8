//! The explorer drawn with ratatui's TestBackend on the demo corpus: the plan bar, budget bars,
//! chunk boundaries, the similarity view, small and zero-size terminals, and nothing drawn
//! outside the area given.
mod common;

use std::path::PathBuf;

use kerf::compare::engine::Corpus;
use kerf::compare::refs;
use kerf::corpus::{DocStream, InputOptions};
use kerf::embed::HashEmbedder;
use kerf::plan;
use kerf::profile::Profile;
use kerf::tui::worker::run_inline;
use kerf::tui::{Action, App, Effect, Setup};
use ratatui::backend::TestBackend;
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::widgets::Widget;
use ratatui::Terminal;

fn demo() -> PathBuf {
    common::repo().join("demo-texts")
}

/// The explorer on demo-texts with the real tokenizer; references when `with_refs`.
fn app(with_refs: bool) -> App {
    let (info, counter) = kerf::model::inspect(&common::model_dir()).unwrap();
    let docs: Vec<_> = DocStream::open(&[demo()], InputOptions::default())
        .unwrap()
        .collect::<Result<_, _>>()
        .unwrap();
    assert!(docs.len() >= 3, "demo-texts has documents");
    let corpus = Corpus::new(docs, &counter).unwrap();
    let mut p = Profile::default();
    p.cut.window = 256;
    let plan = plan::resolve(&p, &info, &counter, "test").unwrap();
    let refs_path = demo().join("references.toml");
    let references = if with_refs {
        refs::load(&refs_path, None).unwrap()
    } else {
        Vec::new()
    };
    App::new(Setup {
        corpus,
        unreadable: vec![kerf::corpus::Notice {
            origin: "demo-texts/broken.txt".into(),
            message: "invalid UTF-8 at byte 12 (pass --lossy to replace bad bytes with U+FFFD)"
                .into(),
        }],
        counter,
        info,
        plan,
        plan_origin: "default".into(),
        model_folder: None,
        refs: references,
        refs_origin: with_refs.then(|| "demo-texts/references.toml".into()),
        encoder_label: "hash embedder".into(),
        hint: None,
    })
}

/// Carry out embed effects at once with the hash embedder.
fn settle(app: &mut App) {
    let e = HashEmbedder { dim: 384 };
    loop {
        let effects = app.take_effects();
        if effects.is_empty() {
            break;
        }
        for eff in effects {
            if let Effect::Embed(job) = eff {
                for r in run_inline(&job, &e) {
                    app.update(Action::Worker(r));
                }
            }
        }
    }
}

fn draw(app: &mut App, w: u16, h: u16) -> Buffer {
    app.update(Action::Resize {
        width: w,
        height: h,
    });
    let mut t = Terminal::new(TestBackend::new(w, h)).unwrap();
    t.draw(|f| f.render_widget(&*app, f.area())).unwrap();
    t.backend().buffer().clone()
}

fn rows(b: &Buffer) -> Vec<String> {
    let a = b.area;
    (0..a.height)
        .map(|y| (0..a.width).map(|x| b[(x, y)].symbol()).collect::<String>())
        .collect()
}

fn screen(b: &Buffer) -> String {
    rows(b).join("\n")
}

#[test]
fn wide_screen_shows_plan_bars_and_chunk_boundaries() {
    let mut a = app(true);
    settle(&mut a);
    let b = draw(&mut a, 120, 40);
    let r = rows(&b);
    let s = screen(&b);
    // The plan bar and the corpus totals under it.
    assert!(r[0].contains("all-MiniLM-L6-v2"), "{}", r[0]);
    for want in ["window 256 (254 text)", "boundary sentence", "overlap 0", "tokens mean", "chunks mean"] {
        assert!(r[0].contains(want), "{want:?} in {:?}", r[0]);
    }
    for want in ["documents", "tokens", "chunks", "truncation loses", "budget", "1 unreadable"] {
        assert!(r[1].contains(want), "{want:?} in {:?}", r[1]);
    }
    assert!(r[2].contains("vectors ready") && r[2].contains("vs baseline-head-256"), "{}", r[2]);
    // Stock with budget bars: the first window seen (█) then windows only chunking reaches (▓).
    assert!(s.contains("Stock · "), "{s}");
    assert!(r.iter().any(|l| l.contains("█▓")), "a budget bar:\n{s}");
    // The unreadable file is listed with its reason.
    assert!(s.contains("✗ demo-texts/broken.txt"), "{s}");
    assert!(s.contains("invalid UTF-8 at byte 12"), "{s}");
    // The Board: first chunk opened in the gutter with its index and tokens.
    assert!(s.contains("Board · "), "{s}");
    assert!(r.iter().any(|l| l.contains("┏#0 ")), "chunk #0 boundary:\n{s}");
    assert!(s.contains("┏┃┗ chunk"), "legend:\n{s}");
    // Scores in the Stock list.
    assert!(r[4].contains("cos"), "{}", r[4]);
}

#[test]
fn overlap_change_redraws_with_shared_tokens() {
    let mut a = app(false);
    settle(&mut a);
    let before = screen(&draw(&mut a, 120, 40));
    // Token windows share exactly the overlap (sentence packing shares whole sentences only).
    a.update(Action::Boundary(-1));
    a.update(Action::OverlapBy(32));
    a.update(Action::Open);
    let b = draw(&mut a, 120, 40);
    let s = screen(&b);
    assert!(rows(&b)[0].contains("boundary token"), "{}", rows(&b)[0]);
    assert!(rows(&b)[0].contains("overlap 32"), "{}", rows(&b)[0]);
    assert_ne!(before, s);
    assert!(s.contains("plan edited, unsaved"), "{s}");
    // Walk the Board to the second chunk: it shares tokens with the first.
    a.update(Action::ChunkStep(1));
    let s = screen(&draw(&mut a, 120, 40));
    assert!(s.contains("┏#1 ") || s.contains("╓#1 "), "{s}");
    assert!(s.contains("32 shared"), "overlap marked:\n{s}");
    assert!(s.contains("║"), "overlap marked:\n{s}");
}

#[test]
fn similarity_view_compares_with_the_baseline() {
    let mut a = app(true);
    settle(&mut a);
    a.update(Action::FlipDetail);
    let b = draw(&mut a, 120, 40);
    let s = screen(&b);
    assert!(s.contains("Fit · similarity to references"), "{s}");
    assert!(s.contains("ref 1/"), "{s}");
    assert!(s.contains("then (baseline) baseline-head-256"), "{s}");
    assert!(s.contains("rank document"), "{s}");
    assert!(s.contains("Δcos"), "{s}");
    assert!(s.contains("→"), "rank changes:\n{s}");
    assert!(s.contains("chunks of "), "per-chunk strip:\n{s}");
    assert!(s.contains("◆"), "best chunk in the strip:\n{s}");
    // Pinning the plan compares it with itself: no change anywhere.
    a.update(Action::Pin);
    let s = screen(&draw(&mut a, 120, 40));
    assert!(s.contains("then (pinned)"), "{s}");
    assert!(s.contains("+0.000") && !s.contains("▲"), "{s}");
}

#[test]
fn without_references_the_similarity_view_explains_how_to_add_them() {
    let mut a = app(false);
    settle(&mut a);
    a.update(Action::FlipDetail);
    let s = screen(&draw(&mut a, 120, 40));
    assert!(s.contains("No reference texts loaded."), "{s}");
    assert!(s.contains("--refs FILE"), "{s}");
    assert!(s.contains("[[reference]]"), "{s}");
}

#[test]
fn small_terminal_shows_one_pane_at_a_time() {
    let mut a = app(true);
    settle(&mut a);
    let b = draw(&mut a, 40, 12);
    let r = rows(&b);
    let s = screen(&b);
    assert!(r[0].contains("w 256") && r[0].contains("sentence"), "{s}");
    assert!(r[1].contains("docs"), "{s}");
    assert!(s.contains("Stock"), "{s}");
    assert!(r.iter().any(|l| l.contains('█')), "budget bar at 40x12:\n{s}");
    assert!(!s.contains("Board"), "{s}");
    a.update(Action::FocusStep(1));
    let s = screen(&draw(&mut a, 40, 12));
    assert!(s.contains("Board"), "{s}");
    assert!(s.contains("┏#0"), "chunk boundary at 40x12:\n{s}");
    a.update(Action::FlipDetail);
    let s = screen(&draw(&mut a, 40, 12));
    assert!(s.contains("Fit"), "{s}");
    a.update(Action::Help);
    let s = screen(&draw(&mut a, 40, 12));
    assert!(s.contains("Keys"), "{s}");
    a.update(Action::Help);
    a.update(Action::AskSave);
    let s = screen(&draw(&mut a, 40, 12));
    assert!(rows(&draw(&mut a, 40, 12))[11].contains("save plan as"), "{s}");
}

#[test]
fn tiny_and_zero_terminals_never_panic() {
    let mut a = app(true);
    settle(&mut a);
    for (w, h) in [(0, 0), (1, 1), (0, 20), (20, 0), (10, 3), (35, 9), (36, 10), (200, 60)] {
        let b = draw(&mut a, w, h);
        if w > 0 && h > 0 && (w < kerf::tui::MIN_WIDTH || h < kerf::tui::MIN_HEIGHT) && w >= 24 && h >= 3 {
            assert!(screen(&b).contains("needs 36×10"), "{w}x{h}:\n{}", screen(&b));
        }
    }
    // With every overlay and view.
    for action in [Action::Help, Action::Help, Action::FlipDetail, Action::AskLoad] {
        a.update(action);
        for (w, h) in [(36, 10), (40, 12), (80, 24)] {
            draw(&mut a, w, h);
        }
    }
}

#[test]
fn nothing_is_drawn_outside_the_area() {
    let mut a = app(true);
    settle(&mut a);
    a.update(Action::Resize {
        width: 100,
        height: 30,
    });
    for view in 0..3 {
        if view == 1 {
            a.update(Action::FlipDetail);
        }
        if view == 2 {
            a.update(Action::Help);
        }
        for area in [
            Rect::new(10, 5, 100, 30),
            Rect::new(3, 2, 40, 12),
            Rect::new(50, 30, 30, 8),
        ] {
            let full = Rect::new(0, 0, 160, 50);
            let mut buf = Buffer::empty(full);
            (&a).render(area, &mut buf);
            let blank = Buffer::empty(full);
            for y in 0..full.height {
                for x in 0..full.width {
                    if !area.contains((x, y).into()) {
                        assert_eq!(
                            buf[(x, y)],
                            blank[(x, y)],
                            "cell ({x},{y}) outside {area:?} was drawn"
                        );
                    }
                }
            }
            assert!(
                (area.y..area.bottom()).any(|y| (area.x..area.right()).any(|x| buf[(x, y)].symbol() != " ")),
                "something drawn inside {area:?}"
            );
        }
    }
}

#[test]
fn scrolling_draws_only_what_is_on_screen() {
    // A 30,000-word document: every frame stays cheap however far down the Board is.
    let (info, counter) = kerf::model::inspect(&common::model_dir()).unwrap();
    let mut text = String::new();
    let mut words = 0;
    let mut s = 0;
    while words < 30_000 {
        let sentence = format!(
            "Sentence {s} records the inspection of item {} on the line, with measurements taken at the usual points. ",
            s * 7 % 113
        );
        words += sentence.split_whitespace().count();
        text.push_str(&sentence);
        s += 1;
        if s % 6 == 0 {
            text.push_str("\n\n");
        }
    }
    let doc = kerf::corpus::Document {
        id: "long.txt".into(),
        origin: "long.txt".into(),
        text,
    };
    let corpus = Corpus::new(vec![doc], &counter).unwrap();
    let plan = plan::resolve(&Profile::default(), &info, &counter, "t").unwrap();
    let mut a = App::new(Setup {
        corpus,
        unreadable: Vec::new(),
        counter,
        info,
        plan,
        plan_origin: "default".into(),
        model_folder: None,
        refs: Vec::new(),
        refs_origin: None,
        encoder_label: "hash".into(),
        hint: None,
    });
    a.update(Action::Open);
    draw(&mut a, 120, 40);
    let lines = a.board().lines.len();
    assert!(lines > 2000, "{lines} lines");
    a.update(Action::Edge(true));
    let b = draw(&mut a, 120, 40);
    assert!(a.board_scroll() > lines - 40);
    assert!(screen(&b).contains(&format!("/{lines}")), "line counter");
    let t = std::time::Instant::now();
    for _ in 0..50 {
        a.update(Action::Page(-1));
        draw(&mut a, 120, 40);
    }
    // Not a timing test (see examples/explore_bench.rs); a sanity bound for a debug build.
    assert!(t.elapsed().as_secs() < 20);
}
