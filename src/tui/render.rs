//! Drawing the explorer: a pure function of [`App`] into a ratatui buffer.
//!
//! Geometry lives in [`super::geometry`], shared with `update` and the mouse mapping in
//! [`crate::tui::keys`], so they agree with what is drawn. The Board draws only its visible lines from the precomputed layout, so a frame costs
//! the same for a page of text as for 30,000 words.
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::style::{Color, Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Clear, Gauge, Paragraph, Widget, Wrap};
use ratatui::Frame;

use super::action::Pane;
use super::app::{App, Mode, PromptKind};
use super::board::Seg;
pub use super::geometry::{
    areas, board_rows, board_text_width, too_small, Areas, GUTTER, MIN_SIZE,
};
use kerf::compare::engine;
use kerf::compare::sweep::plan_name;

/// Draw the whole explorer into a frame.
pub fn draw(frame: &mut Frame, app: &App) {
    frame.render_widget(app, frame.area());
}

fn thousands(n: usize) -> String {
    let s = n.to_string();
    let mut out = String::with_capacity(s.len() + s.len() / 3);
    for (i, c) in s.chars().enumerate() {
        if i > 0 && (s.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(c);
    }
    out
}

fn truncate(s: &str, width: usize) -> String {
    if s.chars().count() <= width {
        return s.to_string();
    }
    let mut t: String = s.chars().take(width.saturating_sub(1)).collect();
    t.push('…');
    t
}

const KEY: Style = Style::new().fg(Color::Yellow);
const DIM: Style = Style::new().fg(Color::DarkGray);
const BAR_SEEN: Color = Color::Green;
const BAR_UNSEEN: [Color; 2] = [Color::Red, Color::LightRed];
const SHADE: [Color; 2] = [Color::Indexed(236), Color::Indexed(238)];
const OVERLAP_BG: Color = Color::Indexed(53);
const BEST_BG: Color = Color::Indexed(22);

impl Widget for &App {
    fn render(self, area: Rect, buf: &mut Buffer) {
        if area.width == 0 || area.height == 0 {
            return;
        }
        let size = (area.width, area.height);
        if too_small(size) {
            Clear.render(area, buf);
            Paragraph::new(vec![
                Line::styled(
                    "Terminal too small",
                    Style::new()
                        .fg(Color::LightRed)
                        .add_modifier(Modifier::BOLD),
                ),
                Line::raw(format!(
                    "this one is {}×{}; kerf explore needs at least {}×{}.",
                    size.0, size.1, MIN_SIZE.0, MIN_SIZE.1
                )),
                Line::raw("Enlarge the window (it redraws on resize), or press q to quit."),
            ])
            .wrap(Wrap { trim: true })
            .render(area, buf);
            return;
        }
        let a = areas(size);
        let a = Areas {
            header: offset(a.header, area),
            tabs: offset(a.tabs, area),
            body: offset(a.body, area),
            status: offset(a.status, area),
        };
        header(self, a.header, buf);
        tabs(self, a.tabs, buf);
        match self.pane {
            Pane::Stock => stock(self, a.body, buf),
            Pane::Board => board(self, a.body, buf),
            Pane::Fit => fit(self, a.body, buf),
        }
        status(self, a.status, buf);
        if self.mode == Mode::Help {
            help(a.body, buf);
        }
    }
}

fn offset(r: Rect, area: Rect) -> Rect {
    Rect::new(r.x + area.x, r.y + area.y, r.width, r.height)
}

/// The header's plan line at `width` columns: the whole plan always, the model's name when
/// there is room. Forms from the widest: labelled with the model; labelled, model's name cut
/// short; labelled without the model; short labels without the model. Returns the line and
/// whether the model's name is on it (if not, the third header row shows it).
pub fn plan_line(p: &kerf::profile::Profile, model: &str, width: usize) -> (Line<'static>, bool) {
    let sep = || Span::styled(" │ ", DIM);
    let value = Style::new().fg(Color::Cyan).add_modifier(Modifier::BOLD);
    let badge = || {
        vec![
            Span::styled(" kerf ", Style::new().fg(Color::Black).bg(Color::Cyan)),
            Span::raw(" "),
        ]
    };
    let tokens = format!("{:?}", p.pool.tokens).to_lowercase();
    let mut full: Vec<(&str, String)> = vec![
        ("window ", p.cut.window.to_string()),
        ("boundary ", p.cut.boundary.name().to_string()),
        ("overlap ", p.cut.overlap.to_string()),
        ("min chunk ", p.cut.min_chunk.to_string()),
        ("tokens ", tokens.clone()),
        ("chunks ", p.pool.chunks.name().to_string()),
        ("precision ", p.pool.precision.name().to_string()),
    ];
    let mut short: Vec<(&str, String)> = vec![
        ("window ", p.cut.window.to_string()),
        ("", p.cut.boundary.name().to_string()),
        ("overlap ", p.cut.overlap.to_string()),
        ("min ", p.cut.min_chunk.to_string()),
        ("tokens ", tokens),
        ("chunks ", p.pool.chunks.name().to_string()),
        ("", p.pool.precision.name().to_string()),
    ];
    if p.pool.context > 0 {
        full.push(("context ", p.pool.context.to_string()));
        short.push(("late ", p.pool.context.to_string()));
    }
    let items_width = |items: &[(&str, String)]| {
        items
            .iter()
            .map(|(k, v)| 3 + k.len() + v.chars().count())
            .sum::<usize>()
    };
    let build = |model: Option<String>, items: &[(&str, String)]| {
        let mut spans = badge();
        let mut first = true;
        if let Some(m) = model {
            spans.push(Span::styled("model ", DIM));
            spans.push(Span::styled(m, value));
            first = false;
        }
        for (k, v) in items {
            if !first {
                spans.push(sep());
            }
            first = false;
            spans.push(Span::styled(k.to_string(), DIM));
            spans.push(Span::styled(v.clone(), value));
        }
        Line::from(spans)
    };
    let badge_w = 7;
    let model_w = model.chars().count();
    // Labelled, with the model's name (whole or cut to at least 12 columns).
    let room = width.saturating_sub(badge_w + "model ".len() + items_width(&full));
    if room >= model_w {
        return (build(Some(model.to_string()), &full), true);
    }
    if room >= 12 {
        let cut: String = model.chars().take(room - 1).collect();
        return (build(Some(format!("{cut}…")), &full), true);
    }
    if badge_w + items_width(&full) - 3 <= width {
        return (build(None, &full), false);
    }
    (build(None, &short), false)
}

fn header(app: &App, area: Rect, buf: &mut Buffer) {
    let p = &app.current.plan.profile;
    let sep = || Span::styled(" │ ", DIM);
    let (plan, model_shown) = plan_line(p, &app.model_label, area.width as usize);
    buf.set_line(area.x, area.y, &plan, area.width);
    let t = &app.totals;
    let pct = if t.tokens == 0 {
        0.0
    } else {
        100.0 * t.unseen_tokens as f64 / t.tokens as f64
    };
    let num = |n: String| Span::styled(n, Style::new().add_modifier(Modifier::BOLD));
    let totals = Line::from(vec![
        Span::raw(" "),
        num(thousands(t.documents)),
        Span::raw(" documents"),
        sep(),
        num(thousands(t.tokens)),
        Span::raw(" tokens"),
        sep(),
        num(thousands(t.chunks)),
        Span::raw(" chunks"),
        sep(),
        Span::styled(
            thousands(t.unseen_tokens),
            Style::new()
                .fg(Color::LightRed)
                .add_modifier(Modifier::BOLD),
        ),
        Span::raw(format!(" tokens lost to truncation ({pct:.0}%)")),
        sep(),
        Span::styled(
            thousands(t.oversize_sentences),
            Style::new()
                .fg(if t.oversize_sentences > 0 {
                    Color::LightRed
                } else {
                    Color::Reset
                })
                .add_modifier(Modifier::BOLD),
        ),
        Span::raw(format!(
            " {} over budget ({})",
            if t.oversize_sentences == 1 {
                "sentence"
            } else {
                "sentences"
            },
            app.current.plan.budget()
        )),
    ]);
    if area.height > 1 {
        buf.set_line(area.x, area.y + 1, &totals, area.width);
    }
    if area.height > 2 {
        let row = Rect::new(area.x, area.y + 2, area.width, 1);
        if app.busy() {
            let (done, total) = app.progress();
            let ratio = if total == 0 {
                0.0
            } else {
                (done as f64 / total as f64).clamp(0.0, 1.0)
            };
            Gauge::default()
                .gauge_style(Style::new().fg(Color::Blue).bg(Color::Indexed(236)))
                .ratio(ratio)
                .label(if total == 0 {
                    format!(
                        "judging by {} self-retrieval probes: re-embedding chunks without their sentence (the UI stays live)",
                        app.probe_count()
                    )
                } else if model_shown {
                    format!("embedding {done}/{total} chunks (the UI stays live)")
                } else {
                    format!(
                        "{}: embedding {done}/{total} chunks (the UI stays live)",
                        app.model_label
                    )
                })
                .render(row, buf);
        } else {
            let cmp = app.comparison();
            let what = if app.pinned.is_some() {
                "pinned plan"
            } else {
                "truncation baseline"
            };
            let mut spans = Vec::new();
            if !model_shown {
                spans.push(Span::styled(" model ", DIM));
                spans.push(Span::raw(app.model_label.clone()));
            }
            spans.extend([
                Span::styled(" plan ", DIM),
                Span::raw(plan_name(p)),
                Span::styled("  compared with ", DIM),
                Span::raw(cmp.plan.profile.name.clone()),
                Span::styled(format!(" ({what}; p pins, P back to baseline)"), DIM),
                Span::styled(
                    format!(
                        "  · {} embedded this session",
                        thousands(app.embedded_total)
                    ),
                    DIM,
                ),
            ]);
            buf.set_line(row.x, row.y, &Line::from(spans), row.width);
        }
    }
}

fn tabs(app: &App, area: Rect, buf: &mut Buffer) {
    let mut spans = vec![Span::raw(" ")];
    for (i, p) in Pane::ALL.iter().enumerate() {
        let style = if *p == app.pane {
            Style::new()
                .fg(Color::Black)
                .bg(Color::Yellow)
                .add_modifier(Modifier::BOLD)
        } else {
            Style::new().fg(Color::Yellow)
        };
        spans.push(Span::styled(format!(" {} {} ", i + 1, p.title()), style));
        spans.push(Span::raw(" "));
    }
    spans.push(Span::styled(
        "Tab switches · f/Enter opens the document · ? help",
        DIM,
    ));
    buf.set_style(area, Style::new().bg(Color::Indexed(235)));
    buf.set_line(area.x, area.y, &Line::from(spans), area.width);
}

/// x ranges of the pane names in the tab bar (for mouse clicks).
pub fn tab_spans() -> Vec<(u16, u16, Pane)> {
    let mut x = 1u16;
    Pane::ALL
        .iter()
        .enumerate()
        .map(|(i, p)| {
            let w = format!(" {} {} ", i + 1, p.title()).chars().count() as u16;
            let r = (x, x + w, *p);
            x += w + 1;
            r
        })
        .collect()
}

fn stock(app: &App, area: Rect, buf: &mut Buffer) {
    let budget = app.current.plan.budget();
    let title = Line::from(vec![
        Span::styled(" Documents", Style::new().add_modifier(Modifier::BOLD)),
        Span::styled(format!(" sorted by {} (s)", app.stock.sort.label()), DIM),
        Span::styled("   █ first window  ", Style::new().fg(BAR_SEEN)),
        Span::styled("░ never seen by truncation", Style::new().fg(BAR_UNSEEN[0])),
        Span::styled(
            format!(
                "  (one cell ≈ {} tokens)",
                thousands(cell_tokens(app, bar_width(area.width)))
            ),
            DIM,
        ),
    ]);
    buf.set_line(area.x, area.y, &title, area.width);
    let rows = area.height.saturating_sub(1) as usize;
    let problems = app.problems.len().min(rows / 3);
    let doc_rows = rows - problems;
    let id_w = (area.width as usize / 3).clamp(12, 40);
    let bar_w = bar_width(area.width);
    let per_cell = cell_tokens(app, bar_w).max(1);
    let scored = app.current.scored.as_ref();
    for (i, &d) in app
        .stock
        .order
        .iter()
        .enumerate()
        .skip(app.stock.top)
        .take(doc_rows)
    {
        let y = area.y + 1 + (i - app.stock.top) as u16;
        let selected = i == app.stock.row;
        let n = app.doc_tokens[d];
        let chunks = app.current.chunks[d].len();
        let mut spans = vec![
            Span::styled(if selected { "▶ " } else { "  " }, KEY),
            Span::styled(
                format!("{:<id_w$}", truncate(&app.corpus.docs[d].id, id_w)),
                if selected {
                    Style::new().add_modifier(Modifier::BOLD | Modifier::REVERSED)
                } else {
                    Style::new()
                },
            ),
            Span::raw(format!(" {:>7} ", thousands(n))),
            Span::styled(format!("×{:<3} ", chunks), Style::new().fg(Color::Cyan)),
        ];
        // The budget bar: one cell per `per_cell` tokens; the first window solid, each later
        // window in alternating shades of the colour for what truncation never sees.
        let cells = n.div_ceil(per_cell).min(bar_w);
        for c in 0..cells {
            let tok = c * per_cell;
            if tok < budget {
                spans.push(Span::styled("█", Style::new().fg(BAR_SEEN)));
            } else {
                let window = tok / budget.max(1);
                spans.push(Span::styled("░", Style::new().fg(BAR_UNSEEN[window % 2])));
            }
        }
        spans.push(Span::raw(" ".repeat(bar_w - cells + 1)));
        if let Some(s) = scored {
            if let Some((rank, score)) = s.rank_score(app.fit.reference, d) {
                spans.push(Span::styled(
                    format!("{score:.3} #{rank}"),
                    Style::new().fg(Color::Green),
                ));
            }
        }
        buf.set_line(area.x, y, &Line::from(spans), area.width);
    }
    for (j, p) in app.problems.iter().take(problems).enumerate() {
        let y = area.y + 1 + doc_rows as u16 + j as u16;
        buf.set_line(
            area.x,
            y,
            &Line::from(vec![
                Span::styled("  ✗ ", Style::new().fg(Color::LightRed)),
                Span::styled(
                    format!("{}: {}", p.origin, p.message),
                    Style::new().fg(Color::LightRed),
                ),
            ]),
            area.width,
        );
    }
    if app.corpus.docs.len() > doc_rows {
        let more = format!(
            " {}-{} of {} ",
            app.stock.top + 1,
            (app.stock.top + doc_rows).min(app.stock.order.len()),
            app.stock.order.len()
        );
        let x = area.right().saturating_sub(more.chars().count() as u16);
        buf.set_string(x, area.y, more, DIM);
    }
}

fn bar_width(width: u16) -> usize {
    let id_w = (width as usize / 3).clamp(12, 40);
    (width as usize)
        .saturating_sub(id_w + 2 + 9 + 5 + 12)
        .max(4)
}

fn cell_tokens(app: &App, bar_w: usize) -> usize {
    let longest = app.doc_tokens.iter().copied().max().unwrap_or(0);
    longest.div_ceil(bar_w.max(1)).max(1)
}

fn board(app: &App, area: Rect, buf: &mut Buffer) {
    let l = &app.board.layout;
    let doc = l.doc;
    let Some(d) = app.corpus.docs.get(doc) else {
        return;
    };
    let chunks = &app.current.chunks[doc];
    let best = app.best_chunk();
    let mut title = vec![
        Span::styled(
            format!(" {} ", d.id),
            Style::new().add_modifier(Modifier::BOLD),
        ),
        Span::styled(
            format!(
                " chunk {}/{}",
                (app.board.chunk + 1).min(chunks.len()),
                chunks.len()
            ),
            Style::new().fg(Color::Cyan),
        ),
    ];
    if let Some(c) = chunks.get(app.board.chunk) {
        title.push(Span::styled(
            format!(
                " · {} tokens, {} overlap · lines {}-{}",
                app.current.plan.chunk_input_tokens(c),
                c.overlap_tokens,
                kerf::segment::line_of(&d.text, c.byte_range.start),
                kerf::segment::line_of(&d.text, c.byte_range.end.saturating_sub(1))
            ),
            DIM,
        ));
    }
    if let (Some(b), Some(r)) = (best, app.refs.get(app.fit.reference)) {
        title.push(Span::styled(
            format!(" · best for {}: #{b} (x)", r.id),
            Style::new().fg(Color::Green),
        ));
    }
    title.push(Span::styled(" · ]/[ chunks · ▒ overlap · ! oversize", DIM));
    buf.set_line(area.x, area.y, &Line::from(title), area.width);
    let rows = area.height.saturating_sub(1) as usize;
    let text_x = area.x + GUTTER;
    let text_w = area.width.saturating_sub(GUTTER + 1);
    for (i, line) in l.lines.iter().enumerate().skip(app.board.scroll).take(rows) {
        let y = area.y + 1 + (i - app.board.scroll) as u16;
        // Gutter: chunk index and encoder tokens where a chunk starts; its shade elsewhere.
        let chunk_here = line.segs.iter().find_map(|s| s.chunk).or_else(|| {
            chunks
                .iter()
                .rposition(|c| c.byte_range.start <= line.bytes.start)
                .filter(|&k| line.bytes.start < chunks[k].byte_range.end)
        });
        let overlap = line.segs.iter().any(|s| s.overlap);
        let oversize = line.segs.iter().any(|s| s.oversize);
        let unseen = !line.segs.is_empty() && line.segs.iter().all(|s| s.unseen);
        let (label, style) = if !line.chunk_starts.is_empty() {
            let k = line.chunk_starts.start;
            let more = if line.chunk_starts.len() > 1 { "+" } else { "" };
            let c = &chunks[k];
            let st = Style::new().fg(Color::Black).bg(if best == Some(k) {
                Color::Green
            } else {
                Color::Cyan
            });
            (
                format!("#{k} {}t{more}", app.current.plan.chunk_input_tokens(c)),
                st,
            )
        } else if unseen {
            ("  unseen".to_string(), DIM)
        } else if overlap {
            (" ≈ overlap".to_string(), Style::new().fg(Color::Magenta))
        } else {
            (
                format!("  {}", if chunk_here.is_some() { "│" } else { " " }),
                DIM,
            )
        };
        buf.set_stringn(
            area.x,
            y,
            format!("{label:<w$}", w = GUTTER as usize - 1),
            GUTTER as usize - 1,
            style,
        );
        if oversize {
            buf.set_string(
                area.x + GUTTER - 2,
                y,
                "!",
                Style::new()
                    .fg(Color::LightRed)
                    .add_modifier(Modifier::BOLD),
            );
        }
        let mut x = text_x;
        for s in &line.segs {
            let style = seg_style(s, best);
            let t: String = d.text[s.bytes.clone()]
                .chars()
                .map(|c| if c == '\t' || c.is_control() { ' ' } else { c })
                .collect();
            let remaining = (text_x + text_w).saturating_sub(x);
            if remaining == 0 {
                break;
            }
            let (nx, _) = buf.set_stringn(x, y, &t, remaining as usize, style);
            x = nx;
        }
    }
    // Scroll bar.
    let total = l.lines.len().max(1);
    if rows > 0 {
        let bar_x = area.right().saturating_sub(1);
        let thumb = (app.board.scroll * rows / total).min(rows - 1);
        let thumb_len = (rows * rows / total).clamp(1, rows);
        for r in 0..rows {
            let on = r >= thumb && r < thumb + thumb_len;
            buf.set_string(
                bar_x,
                area.y + 1 + r as u16,
                if on { "┃" } else { "│" },
                if on {
                    Style::new().fg(Color::Cyan)
                } else {
                    DIM
                },
            );
        }
    }
}

fn seg_style(s: &Seg, best: Option<usize>) -> Style {
    let mut st = Style::new();
    if s.unseen {
        return st.fg(Color::DarkGray);
    }
    if let Some(c) = s.chunk {
        st = st.bg(if best == Some(c) {
            BEST_BG
        } else {
            SHADE[c % 2]
        });
        if s.overlap {
            st = st.bg(OVERLAP_BG);
        }
    }
    if s.oversize {
        st = st.fg(Color::LightRed).add_modifier(Modifier::UNDERLINED);
    }
    st
}

fn fit(app: &App, area: Rect, buf: &mut Buffer) {
    if app.refs.is_empty() {
        Paragraph::new(vec![
            Line::styled(" No reference texts and no probes, so there is nothing to measure similarity against.", Style::new().add_modifier(Modifier::BOLD)),
            Line::raw(""),
            Line::raw(" Without --refs (and without --probes 0) kerf judges plans by self-retrieval probes."),
            Line::raw(" Start kerf explore with --refs FILE, a TOML file of questions or passages you care about:"),
            Line::raw(""),
            Line::styled("   schema = 1", KEY),
            Line::styled("   [[reference]]", KEY),
            Line::styled("   id = \"q-washout\"", KEY),
            Line::styled("   text = \"How often is No. 7 washed out?\"", KEY),
            Line::styled("   kind = \"question\"                          # or \"passage\"", KEY),
            Line::styled("   expect = [\"locomotive-maintenance-manual.md\"]  # optional document ids", KEY),
            Line::raw(""),
            Line::raw(" demo-texts/references.toml is a worked example; a TREC queries file works too (kerf compare --qrels)."),
        ])
        .wrap(Wrap { trim: false })
        .render(area, buf);
        return;
    }
    let r = &app.refs[app.fit.reference];
    let given = app.given_refs();
    let is_probe = app.fit.reference >= given;
    let cmp = app.comparison();
    let cmp_kind = if app.pinned.is_some() {
        "pinned"
    } else {
        "baseline"
    };
    let line0 = Line::from(vec![
        Span::styled(
            if is_probe {
                format!(
                    " Probe {}/{} (r/R) ",
                    app.fit.reference - given + 1,
                    app.probe_count()
                )
            } else {
                format!(" Reference {}/{} (r/R) ", app.fit.reference + 1, given)
            },
            Style::new().fg(Color::Black).bg(Color::Yellow),
        ),
        Span::styled(
            format!(" {} ", r.id),
            Style::new().add_modifier(Modifier::BOLD),
        ),
        Span::raw(truncate(&r.text, area.width as usize)),
    ]);
    buf.set_line(area.x, area.y, &line0, area.width);
    let (Some(now), Some(then)) = (app.current.scored.as_ref(), cmp.scored.as_ref()) else {
        let (done, total) = app.progress();
        buf.set_string(
            area.x + 1,
            area.y + 2,
            if total == 0 && app.judging() > 0 {
                format!(
                    "judging by {} probes: re-embedding the chunks that held each sentence without it…",
                    app.probe_count()
                )
            } else {
                format!("embedding… scores appear when the vectors are in ({done}/{total})")
            },
            DIM,
        );
        return;
    };
    let delta = |x: f64, better_up: bool| -> Span<'static> {
        let up = x > 1e-9;
        let down = x < -1e-9;
        let good = if better_up { up } else { down };
        let style = if up || down {
            Style::new().fg(if good { Color::Green } else { Color::LightRed })
        } else {
            DIM
        };
        let arrow = if up {
            "▲"
        } else if down {
            "▼"
        } else {
            "="
        };
        Span::styled(format!("{arrow}{:.3}", x.abs()), style)
    };
    let s = &now.summary;
    let b = &then.summary;
    let mut metrics = vec![Span::styled(
        format!(
            " {} vs {} {}{}:",
            plan_name(&app.current.plan.profile),
            cmp_kind,
            cmp.plan.profile.name,
            if given == 0 { ", by probes" } else { "" }
        ),
        DIM,
    )];
    for (k, x, y) in [
        ("MRR@10", s.mrr_at_10, b.mrr_at_10),
        ("nDCG@10", s.ndcg_at_10, b.ndcg_at_10),
        ("R@1", s.recall_at_1, b.recall_at_1),
    ] {
        metrics.push(Span::raw(format!("  {k} {x:.3} ")));
        metrics.push(delta(x - y, true));
    }
    buf.set_line(area.x, area.y + 1, &Line::from(metrics), area.width);
    // With probes, a line of their own: MRR@10 by where the sentence starts (what a
    // truncating plan never sees shows in the later bands).
    let mut top = area.y + 2;
    if let (Some(p), Some(q)) = (&now.probes, &then.probes) {
        let mut line = vec![Span::styled(
            format!(
                " self-retrieval by {} probes{}: ",
                app.probe_count(),
                if given == 0 { " (no --refs given)" } else { "" }
            ),
            DIM,
        )];
        if given > 0 {
            line.push(Span::raw(format!("MRR@10 {:.3} ", p.summary.mrr_at_10)));
            line.push(delta(p.summary.mrr_at_10 - q.summary.mrr_at_10, true));
            line.push(Span::raw("  "));
        }
        line.push(Span::styled("MRR@10 by depth:", DIM));
        for (band, m) in &p.bands {
            line.push(Span::styled(format!(" {} ", band.label()), DIM));
            line.push(Span::raw(format!("{:.3} ", m.mrr_at_10)));
            if let Some((_, w)) = q.bands.iter().find(|(b, _)| b == band) {
                line.push(delta(m.mrr_at_10 - w.mrr_at_10, true));
            }
        }
        line.push(Span::styled("  best chunk held it ", DIM));
        line.push(Span::raw(format!("{:.0}%", 100.0 * p.chunk_hits)));
        buf.set_line(area.x, top, &Line::from(line), area.width);
        top += 1;
    }
    let id_w = (area.width as usize / 3).clamp(12, 44);
    buf.set_string(
        area.x,
        top,
        format!(
            " {:>4}  {:<id_w$} {:>6} {:>7} {:>5} {:>5}",
            "rank", "document", "cosine", "Δcos", "was", "Δrank"
        ),
        DIM,
    );
    let strip_rows = (app.refs.len() + 2).min((area.height as usize).saturating_sub(6) / 2);
    let table_rows =
        (area.height as usize).saturating_sub((top - area.y) as usize + 1 + strip_rows);
    let ranking = &now.ranking[app.fit.reference];
    let sel = app.selected_doc();
    let sel_pos = ranking.iter().position(|x| x.doc == sel).unwrap_or(0);
    let first = sel_pos.saturating_sub(table_rows.saturating_sub(1));
    for (i, ds) in ranking.iter().enumerate().skip(first).take(table_rows) {
        let y = top + 1 + (i - first) as u16;
        let id = &app.corpus.docs[ds.doc].id;
        let expected = r.expect.get(id).is_some_and(|&g| g > 0);
        let was = then.rank_score(app.fit.reference, ds.doc);
        let mut spans = vec![
            Span::raw(format!(" {:>4}  ", i + 1)),
            Span::styled(
                format!("{:<id_w$}", truncate(id, id_w)),
                if ds.doc == sel {
                    Style::new().add_modifier(Modifier::REVERSED)
                } else {
                    Style::new()
                },
            ),
            Span::raw(format!(" {:>6.3} ", ds.score)),
        ];
        match was {
            Some((wr, ws)) => {
                spans.push(delta((ds.score - ws) as f64, true));
                spans.push(Span::raw(format!(" {:>5}", format!("#{wr}"))));
                let moved = wr as isize - (i as isize + 1);
                spans.push(Span::styled(
                    format!(
                        " {:>5}",
                        match moved.cmp(&0) {
                            std::cmp::Ordering::Greater => format!("▲{moved}"),
                            std::cmp::Ordering::Less => format!("▼{}", -moved),
                            std::cmp::Ordering::Equal => "=".into(),
                        }
                    ),
                    Style::new().fg(match moved.cmp(&0) {
                        std::cmp::Ordering::Greater => Color::Green,
                        std::cmp::Ordering::Less => Color::LightRed,
                        std::cmp::Ordering::Equal => Color::DarkGray,
                    }),
                ));
            }
            None => spans.push(Span::styled("   new", DIM)),
        }
        if expected {
            spans.push(Span::styled("  ✓ expected", Style::new().fg(Color::Green)));
        }
        buf.set_line(area.x, y, &Line::from(spans), area.width);
    }
    // The per-chunk strip: where in the selected document each reference lands.
    let y0 = top + 1 + table_rows as u16;
    let cos = now
        .chunk_cos
        .iter()
        .map(|per_doc| &per_doc[sel])
        .collect::<Vec<_>>();
    let n = cos.first().map_or(0, |c| c.len());
    buf.set_line(
        area.x,
        y0,
        &Line::from(vec![
            Span::styled(
                format!(" {} ", app.corpus.docs[sel].id),
                Style::new().add_modifier(Modifier::BOLD),
            ),
            Span::styled(
                format!("{n} chunks, start → end; taller is closer; ◆ best chunk per reference"),
                DIM,
            ),
        ]),
        area.width,
    );
    let label_w = 22usize;
    let strip_w = (area.width as usize).saturating_sub(label_w + 2);
    if n == 0 || strip_w == 0 {
        return;
    }
    let (lo, hi) = cos
        .iter()
        .flat_map(|c| c.iter())
        .fold((f32::INFINITY, f32::NEG_INFINITY), |(a, b), &x| {
            (a.min(x), b.max(x))
        });
    const LEVELS: [&str; 8] = ["▁", "▂", "▃", "▄", "▅", "▆", "▇", "█"];
    let shown = strip_rows.saturating_sub(1);
    let first_ref = app.fit.reference.saturating_sub(shown.saturating_sub(1));
    for (ri, c) in cos.iter().enumerate().skip(first_ref).take(shown) {
        let y = y0 + 1 + (ri - first_ref) as u16;
        let selected = ri == app.fit.reference;
        let lab = truncate(&app.refs[ri].id, label_w - 1);
        buf.set_stringn(
            area.x + 1,
            y,
            format!("{lab:<w$}", w = label_w - 1),
            label_w,
            if selected {
                KEY.add_modifier(Modifier::BOLD)
            } else {
                DIM
            },
        );
        let best = engine::best_chunk(c);
        let width = strip_w.min(n * 3);
        let mut marked = false;
        for cell in 0..width {
            // Chunks this cell covers: the highest cosine among them.
            let from = cell * n / width;
            let to = ((cell + 1) * n).div_ceil(width).clamp(from + 1, n);
            let v = c[from..to]
                .iter()
                .copied()
                .fold(f32::NEG_INFINITY, f32::max);
            let level = if hi > lo {
                (((v - lo) / (hi - lo)) * 7.0).round() as usize
            } else {
                7
            };
            let is_best = (from..to).contains(&best);
            let glyph = if is_best && !marked {
                marked = true;
                "◆"
            } else {
                LEVELS[level.min(7)]
            };
            let style = if is_best {
                Style::new().fg(Color::Green).add_modifier(Modifier::BOLD)
            } else if selected {
                Style::new().fg(Color::Yellow)
            } else {
                Style::new().fg(Color::Blue)
            };
            buf.set_string(area.x + 1 + label_w as u16 + cell as u16, y, glyph, style);
        }
    }
}

fn status(app: &App, area: Rect, buf: &mut Buffer) {
    buf.set_style(area, Style::new().bg(Color::Indexed(235)));
    let line = match &app.mode {
        Mode::Prompt { kind, input } => Line::from(vec![
            Span::styled(
                match kind {
                    PromptKind::Save => " save plan as: ",
                    PromptKind::Load => " load profile: ",
                },
                KEY.add_modifier(Modifier::BOLD),
            ),
            Span::raw(input.clone()),
            Span::styled("█", Style::new().fg(Color::Yellow)),
            Span::styled("   Enter confirms · Ctrl-U clears · Esc cancels", DIM),
        ]),
        Mode::ConfirmOverwrite { path } => Line::from(vec![Span::styled(
            format!(
                " {} exists: overwrite it? y replaces it, any other key keeps it",
                path.display()
            ),
            Style::new().fg(Color::Black).bg(Color::LightRed),
        )]),
        _ => match &app.status {
            Some(s) => Line::from(Span::styled(
                format!(" {}", s.text),
                if s.error {
                    Style::new()
                        .fg(Color::LightRed)
                        .add_modifier(Modifier::BOLD)
                } else {
                    Style::new().fg(Color::Green)
                },
            )),
            None => Line::from(vec![
                Span::styled(" w/W", KEY),
                Span::raw(" window "),
                Span::styled("o/O", KEY),
                Span::raw(" overlap "),
                Span::styled("b", KEY),
                Span::raw(" boundary "),
                Span::styled("t", KEY),
                Span::raw(" tokens "),
                Span::styled("a", KEY),
                Span::raw(" chunks "),
                Span::styled("p/P", KEY),
                Span::raw(" pin/baseline "),
                Span::styled(">", KEY),
                Span::raw(" save "),
                Span::styled("?", KEY),
                Span::raw(" help "),
                Span::styled("q", KEY),
                Span::raw(" quit"),
            ]),
        },
    };
    buf.set_line(area.x, area.y, &line, area.width);
}

/// Every key, for the help overlay and the README.
pub const KEYS: [(&str, &str); 27] = [
    ("Tab / Shift-Tab, 1 2 3", "switch pane: Stock, Board, Fit"),
    ("f, Enter", "open the selected document in the Board"),
    (
        "↑ ↓, PgUp PgDn, Home End",
        "move in the list / scroll the Board",
    ),
    ("mouse wheel, click", "scroll; pick a pane or a document"),
    (
        "w / W",
        "window one step smaller / larger (64…512, model limit)",
    ),
    ("o / O", "overlap smaller / larger"),
    ("m / M", "minimum last chunk smaller / larger"),
    (
        "b / B",
        "next / previous boundary rule (head token sentence paragraph)",
    ),
    ("t / T", "next / previous token pooling (mean cls max)"),
    (
        "c / C",
        "late-chunking context smaller / larger (0 = chunks alone; 256 384 512)",
    ),
    ("a / A", "next / previous chunk aggregation"),
    ("e / E", "next / previous encoder precision (f32 bf16 int8)"),
    ("p", "pin the current plan as the comparison"),
    ("P", "compare against the truncation baseline again"),
    ("] / [", "next / previous chunk in the Board"),
    ("x", "jump to the chunk best matching the reference"),
    ("r / R", "next / previous reference or probe"),
    ("s", "sort the list: input, length, overflow, similarity"),
    (">", "save the plan as a profile (asks for a file name)"),
    ("<", "load a profile"),
    ("y", "confirm overwriting a file when saving"),
    ("Ctrl-U", "clear the prompt line"),
    ("Esc", "cancel a prompt; quit otherwise"),
    ("?", "this help (any key closes it)"),
    ("q", "quit"),
    ("Ctrl-C", "quit"),
    ("", "the terminal is restored on every exit"),
];

fn help(area: Rect, buf: &mut Buffer) {
    let w = area.width.min(96);
    let h = area.height.min(KEYS.len() as u16 + 2);
    let r = Rect::new(
        area.x + (area.width - w) / 2,
        area.y + (area.height - h) / 2,
        w,
        h,
    );
    Clear.render(r, buf);
    let lines: Vec<Line> = KEYS
        .iter()
        .map(|(k, v)| Line::from(vec![Span::styled(format!(" {k:<26}"), KEY), Span::raw(*v)]))
        .collect();
    Paragraph::new(lines)
        .block(
            Block::default()
                .borders(Borders::ALL)
                .title(" kerf explore: keys "),
        )
        .render(r, buf);
}
