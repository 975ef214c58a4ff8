//! Rendering the explorer into ratatui's TestBackend on demo-texts, with the model-free hash
//! embedder standing in for the encoder (the tokenizer is the real model's).

use std::sync::Arc;

use kerf::compare::engine::Corpus;
use kerf::compare::probes::{self, ProbeOptions};
use kerf::corpus::{Document, Notice};
use kerf::embed::{Embedder, HashEmbedder};
use kerf::profile::Profile;
use kerf_app::tui::action::Pane;
use kerf_app::tui::worker::{answer, EmbedderFactory};
use kerf_app::tui::{render, Action, App, AppInit};
use ratatui::backend::TestBackend;
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::widgets::Widget;
use ratatui::Terminal;

mod common;

fn demo_docs() -> Vec<Document> {
    let root = common::repo().join("demo-texts");
    let mut files: Vec<_> = std::fs::read_dir(&root)
        .unwrap()
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

fn app_with(docs: Vec<Document>, with_refs: bool, size: (u16, u16)) -> App {
    app_judged(docs, with_refs, 0, size, 0)
}

/// An explorer over `docs`, with the demo references or not, `probes` self-retrieval probes
/// (0: none) and a late-chunking context (0: none).
fn app_judged(
    docs: Vec<Document>,
    with_refs: bool,
    probes: usize,
    size: (u16, u16),
    context: usize,
) -> App {
    let (info, counter) = kerf::model::inspect(&common::model_dir()).unwrap();
    let corpus = Corpus::new(docs, &counter).unwrap();
    let refs = if with_refs {
        kerf::compare::refs::load(&common::repo().join("demo-texts/references.toml"), None).unwrap()
    } else {
        vec![]
    };
    let mut profile = Profile::default();
    profile.cut.window = 256;
    profile.pool.context = context;
    profile.name = "sentences-256".into();
    let plan = kerf::plan::resolve(&profile, &info, &counter, "test").unwrap();
    let probes = (probes > 0).then(|| {
        probes::draw(
            &corpus,
            &ProbeOptions::new(probes, 1, info.default_window()),
        )
    });
    App::new(AppInit {
        corpus,
        counter,
        info,
        model_label: "all-MiniLM-L6-v2 (hash)".into(),
        plan,
        refs,
        refs_origin: None,
        probes,
        probe_prefix: String::new(),
        problems: vec![Notice {
            origin: "demo-texts/broken.txt".into(),
            message: "left out: invalid UTF-8 at byte 7".into(),
        }],
        size,
    })
    .unwrap()
}

/// Answer every queued job with the hash embedder, as the worker thread would.
fn serve(app: &mut App) {
    let mut factory: EmbedderFactory = Box::new(|_| {
        Ok::<_, anyhow::Error>(Arc::new(HashEmbedder { dim: 32 }) as Arc<dyn Embedder>)
    });
    loop {
        let reqs = app.take_requests();
        if reqs.is_empty() {
            break;
        }
        for r in reqs {
            if let Some(report) = answer(r, &mut factory) {
                app.update(Action::Worker(report));
            }
        }
    }
}

fn screen(app: &App, w: u16, h: u16) -> Vec<String> {
    let mut t = Terminal::new(TestBackend::new(w, h)).unwrap();
    t.draw(|f| render::draw(f, app)).unwrap();
    let buf = t.backend().buffer();
    (0..h)
        .map(|y| {
            (0..w)
                .map(|x| buf[(x, y)].symbol().to_string())
                .collect::<String>()
        })
        .collect()
}

fn has(lines: &[String], s: &str) -> bool {
    lines.iter().any(|l| l.contains(s))
}

#[test]
fn header_budget_bar_and_chunk_gutter_at_120x40() {
    let mut app = app_with(demo_docs(), true, (120, 40));
    let s = screen(&app, 120, 40);
    assert!(s[0].contains("window 256"), "{}", s[0]);
    assert!(
        s[0].contains("boundary sentence") && s[0].contains("overlap 0"),
        "{}",
        s[0]
    );
    assert!(
        s[1].contains("10 documents") && s[1].contains("tokens lost to truncation"),
        "{}",
        s[1]
    );
    // The embedding gauge is up until the vectors are in.
    assert!(s[2].contains("embedding 0/"), "{}", s[2]);
    // Budget bars: the first window solid, what truncation never sees shaded apart.
    let bars: Vec<&String> = s
        .iter()
        .filter(|l| l.contains("█") && l.contains("░"))
        .collect();
    assert!(bars.len() >= 5, "{}", s.join("\n"));
    assert!(
        has(&s, "✗ demo-texts/broken.txt: left out: invalid UTF-8"),
        "{}",
        s.join("\n")
    );

    app.update(Action::FocusDocument);
    let s = screen(&app, 120, 40);
    assert_eq!(app.pane, Pane::Board);
    // Gutter labels: chunk index and encoder tokens where each chunk starts.
    assert!(
        s.iter().any(|l| l.starts_with("#0 ") && l.contains('t')),
        "{}",
        s.join("\n")
    );
    assert!(s.iter().any(|l| l.starts_with("#1 ")), "{}", s.join("\n"));

    // A plan change shows at once in the header and re-cuts the Board.
    app.update(Action::WindowDown);
    app.update(Action::BoundaryNext);
    let s = screen(&app, 120, 40);
    assert!(
        s[0].contains("window 192") && s[0].contains("boundary paragraph"),
        "{}",
        s[0]
    );

    serve(&mut app);
    let s = screen(&app, 120, 40);
    assert!(
        !s[2].contains("embedding"),
        "gauge gone when idle: {}",
        s[2]
    );
    assert!(s[2].contains("compared with baseline-head-256"), "{}", s[2]);
}

#[test]
fn fit_pane_shows_shifts_and_strip() {
    let mut app = app_with(demo_docs(), true, (120, 40));
    serve(&mut app);
    app.update(Action::ShowPane(Pane::Fit));
    let s = screen(&app, 120, 40);
    assert!(has(&s, "Reference 1/"), "{}", s.join("\n"));
    assert!(has(&s, "MRR@10"), "{}", s.join("\n"));
    assert!(
        s.iter().any(|l| l.contains('▲') || l.contains('▼')),
        "{}",
        s.join("\n")
    );
    assert!(
        has(&s, "◆"),
        "best chunk marked on the strip: {}",
        s.join("\n")
    );
    app.update(Action::NextRef);
    let s = screen(&app, 120, 40);
    assert!(has(&s, "Reference 2/"), "{}", s.join("\n"));
}

#[test]
fn fit_pane_judges_by_probes_when_no_references_are_given() {
    let mut app = app_judged(demo_docs(), false, 40, (160, 45), 0);
    let n = app.probe_count();
    assert!(n >= 10, "{n} probes");
    serve(&mut app);
    app.update(Action::ShowPane(Pane::Fit));
    let s = screen(&app, 160, 45);
    let all = s.join("\n");
    assert!(has(&s, &format!("Probe 1/{n} (r/R)")), "{all}");
    assert!(
        has(
            &s,
            &format!("self-retrieval by {n} probes (no --refs given)")
        ) && has(&s, ", by probes:"),
        "{all}"
    );
    assert!(has(&s, "MRR@10") && has(&s, "first window"), "{all}");
    assert!(has(&s, "best chunk held it"), "{all}");
    assert!(has(&s, "◆"), "{all}");
    // The probe's own document is the one expected.
    assert!(has(&s, "✓ expected"), "{all}");
    app.update(Action::PrevRef);
    assert!(has(&screen(&app, 160, 45), &format!("Probe {n}/{n}")));
}

#[test]
fn header_names_a_late_chunking_context() {
    let mut app = app_judged(demo_docs(), true, 0, (160, 45), 512);
    let s = screen(&app, 160, 45);
    assert!(header_has(&s, "context 512"), "{}", s.join("\n"));
    serve(&mut app);
    app.update(Action::ShowPane(Pane::Fit));
    let s = screen(&app, 160, 45);
    assert!(has(&s, "MRR@10"), "late plan scored: {}", s.join("\n"));
    // 512 → 384 → 256 → 0 (chunks alone).
    app.update(Action::ContextDown);
    assert!(header_has(&screen(&app, 160, 45), "context 384"));
    app.update(Action::ContextDown);
    app.update(Action::ContextDown);
    let s = screen(&app, 160, 45);
    assert!(!header_has(&s, "context"), "{}", s.join("\n"));
}

fn header_has(lines: &[String], want: &str) -> bool {
    lines.first().is_some_and(|l| l.contains(want))
}

#[test]
fn fit_pane_without_references_says_how_to_add_them() {
    let mut app = app_with(demo_docs(), false, (120, 40));
    app.update(Action::ShowPane(Pane::Fit));
    let s = screen(&app, 120, 40);
    assert!(has(&s, "--refs FILE"), "{}", s.join("\n"));
    assert!(has(&s, "[[reference]]"), "{}", s.join("\n"));
}

#[test]
fn tiny_and_zero_terminals() {
    let mut app = app_with(demo_docs(), true, (40, 12));
    let s = screen(&app, 40, 12);
    assert!(has(&s, "Terminal too small"), "{}", s.join("\n"));
    assert!(has(&s, "40×12"), "{}", s.join("\n"));
    assert!(!has(&s, "window 256"));
    // Growing the terminal brings the explorer back.
    app.update(Action::Resize(120, 40));
    assert!(screen(&app, 120, 40)[0].contains("window 256"));
    // Zero size: nothing drawn, nothing panics.
    app.update(Action::Resize(0, 0));
    let mut buf = Buffer::empty(Rect::new(0, 0, 0, 0));
    (&app).render(Rect::new(0, 0, 0, 0), &mut buf);
    let _ = screen(&app, 0, 0);
    app.update(Action::ShowPane(Pane::Board));
    app.update(Action::Page(1));
    let _ = screen(&app, 1, 1);
}

#[test]
fn board_scrolls_through_a_30000_word_document() {
    let base =
        std::fs::read_to_string(common::repo().join("demo-texts/locomotive-manual-issue-6.md"))
            .unwrap();
    let mut text = String::new();
    while text.split_whitespace().count() < 30_000 {
        text.push_str(&base);
        text.push_str("\n\n");
    }
    let docs = vec![Document {
        id: "long.md".into(),
        origin: "long.md".into(),
        text,
        layout: None,
    }];
    let mut app = app_with(docs, false, (120, 40));
    app.update(Action::FocusDocument);
    let lines = app.board.layout.lines.len();
    assert!(lines > 2000, "{lines}");
    let first = screen(&app, 120, 40);
    for _ in 0..50 {
        app.update(Action::Page(1));
    }
    let later = screen(&app, 120, 40);
    assert_ne!(first[5..], later[5..]);
    app.update(Action::End);
    assert_eq!(app.board.scroll, lines - render::board_rows((120, 40)));
    let end = screen(&app, 120, 40);
    assert!(
        end.iter().skip(5).any(|l| l.trim().len() > 12),
        "{}",
        end.join("\n")
    );
    // ] jumps chunk by chunk, and the Board title follows.
    app.update(Action::Home);
    app.update(Action::NextChunk);
    app.update(Action::NextChunk);
    assert_eq!(app.board.chunk, 2);
    assert!(screen(&app, 120, 40)[4].contains("chunk 3/"));
}

#[test]
fn board_flags_oversize_sentences_and_marks_overlap() {
    let mut app = app_with(demo_docs(), true, (120, 40));
    for _ in 0..3 {
        app.update(Action::WindowDown);
    }
    assert_eq!(app.current.plan.window, 64);
    assert!(app.totals.oversize_sentences > 0);
    let s = screen(&app, 120, 40);
    assert!(s[1].contains("sentences over budget (62)"), "{}", s[1]);
    // Open a document with a sentence over the budget and scroll to it.
    let doc = (0..app.corpus.docs.len())
        .find(|&d| !app.oversize_of(d).is_empty())
        .unwrap();
    let row = app.stock.order.iter().position(|&d| d == doc).unwrap();
    app.update(Action::SelectRow(row));
    app.update(Action::FocusDocument);
    let line = app
        .board
        .layout
        .lines
        .iter()
        .position(|l| l.segs.iter().any(|s| s.oversize))
        .unwrap();
    app.update(Action::Home);
    app.update(Action::Move(line as isize));
    let s = screen(&app, 120, 40);
    let first_text_row = 5;
    let flagged = s[first_text_row..]
        .iter()
        .filter(|l| l.chars().nth(render::GUTTER as usize - 2) == Some('!'))
        .count();
    assert!(flagged > 0, "{}", s.join("\n"));

    // Token windows with overlap: lines inside a shared stretch say so in the gutter.
    app.update(Action::BoundaryPrev);
    assert_eq!(
        app.current.plan.profile.cut.boundary,
        kerf::profile::Boundary::Token
    );
    for _ in 0..4 {
        app.update(Action::OverlapUp);
    }
    let overlap_line = app
        .board
        .layout
        .lines
        .iter()
        .position(|l| l.chunk_starts.is_empty() && l.segs.iter().any(|s| s.overlap))
        .expect("a line inside an overlap");
    app.update(Action::Home);
    app.update(Action::Move(overlap_line as isize));
    let s = screen(&app, 120, 40);
    assert!(
        s[first_text_row].starts_with(" ≈ overlap"),
        "{}",
        s.join("\n")
    );
}

#[test]
fn keys_and_mouse_map_to_actions() {
    use crossterm::event::{
        Event, KeyCode, KeyEvent, KeyModifiers, MouseButton, MouseEvent, MouseEventKind,
    };
    use kerf_app::tui::keys::action_for;
    let mut app = app_with(demo_docs(), true, (120, 40));
    let key = |c: char| Event::Key(KeyEvent::new(KeyCode::Char(c), KeyModifiers::NONE));
    let mouse = |kind, column, row| {
        Event::Mouse(MouseEvent {
            kind,
            column,
            row,
            modifiers: KeyModifiers::NONE,
        })
    };
    assert_eq!(action_for(&key('O'), &app), Some(Action::OverlapUp));
    assert_eq!(action_for(&key('b'), &app), Some(Action::BoundaryNext));
    assert_eq!(action_for(&key('q'), &app), Some(Action::Quit));
    let ctrl_c = Event::Key(KeyEvent::new(KeyCode::Char('c'), KeyModifiers::CONTROL));
    assert_eq!(action_for(&ctrl_c, &app), Some(Action::Quit));
    // Clicking a pane name switches to it; clicking a row of the list selects that document.
    let tabs_row = render::areas((120, 40)).tabs.y;
    let (x0, _, pane) = render::tab_spans()[2];
    assert_eq!(
        action_for(
            &mouse(MouseEventKind::Down(MouseButton::Left), x0 + 1, tabs_row),
            &app
        ),
        Some(Action::ShowPane(pane))
    );
    let body = render::areas((120, 40)).body;
    assert_eq!(
        action_for(
            &mouse(MouseEventKind::Down(MouseButton::Left), 5, body.y + 3),
            &app
        ),
        Some(Action::SelectRow(2))
    );
    assert_eq!(
        action_for(&mouse(MouseEventKind::ScrollDown, 5, body.y + 3), &app),
        Some(Action::Move(3))
    );
    // In the save prompt, letters are text: q does not quit.
    app.update(Action::SavePrompt);
    assert_eq!(action_for(&key('q'), &app), Some(Action::PromptChar('q')));
    let esc = Event::Key(KeyEvent::new(KeyCode::Esc, KeyModifiers::NONE));
    assert_eq!(action_for(&esc, &app), Some(Action::Cancel));
    // Too small: only quitting does anything.
    app.update(Action::Cancel);
    app.update(Action::Resize(40, 12));
    assert_eq!(action_for(&key('O'), &app), None);
    assert_eq!(action_for(&key('q'), &app), Some(Action::Quit));
}

/// The header shows the whole plan at 100 columns, whatever its values: every setting of the
/// widest plan the keys can make is on the first row.
#[test]
fn header_shows_the_whole_plan_at_100_columns() {
    use kerf::profile::{Boundary, ChunkPooling, Precision};
    let mut p = Profile::default();
    p.cut.window = 512;
    p.cut.boundary = Boundary::Paragraph;
    p.cut.overlap = 256;
    p.cut.min_chunk = 96;
    p.pool.chunks = ChunkPooling::SoftCentroid;
    p.pool.precision = Precision::Int8;
    for width in [100usize, 120, 160] {
        let (line, _) = render::plan_line(&p, "all-MiniLM-L6-v2", width);
        let text: String = line.spans.iter().map(|s| s.content.as_ref()).collect();
        assert!(text.chars().count() <= width, "{width}: {text}");
        for v in [
            "512",
            "paragraph",
            "256",
            "96",
            "mean",
            "soft-centroid",
            "int8",
        ] {
            assert!(text.contains(v), "{width}: `{v}` missing from {text}");
        }
    }
    // At 160 columns there is room for the model's name too.
    let (line, shown) = render::plan_line(&p, "all-MiniLM-L6-v2", 160);
    let text: String = line.spans.iter().map(|s| s.content.as_ref()).collect();
    assert!(shown && text.contains("all-MiniLM-L6-v2"), "{text}");
    // Drawn at 100x30, the model moves to the third row rather than vanish.
    let app = app_with(demo_docs(), false, (100, 30));
    let s = screen(&app, 100, 30);
    assert!(
        s[0].contains("precision f32") || s[0].contains(" f32"),
        "{}",
        s[0]
    );
    assert!(
        s[0].contains("all-MiniLM") || s[2].contains("all-MiniLM"),
        "{}\n{}",
        s[0],
        s[2]
    );
}
