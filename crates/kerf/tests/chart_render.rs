//! The sweep chart rendered by an independent SVG renderer (resvg, a general-purpose library):
//! the geometry is measured on the rendered tree, with the fonts this machine has, not taken
//! from the layout code that placed it.
//!
//! Checks: no two pieces of text overlap (plot labels, ticks, axis titles, key, numbered list);
//! each label's text stays inside the box the layout drew for it; every mark lies inside the
//! plot area; the picture fits its own canvas. The first case is the demo corpus's sweep
//! (16 plans whose figures are those `kerf sweep` printed for demo-texts with the grid
//! `window=128,256 boundary=sentence,paragraph chunks=mean,best`), which drew every label on top
//! of the others before; a property test then tries random crowds of plans.
use kerf::compare::chart::{self, ChartInput, ChartPlan, CostAxis};
use proptest::prelude::*;
use resvg::{tiny_skia, usvg};

/// Bounding boxes `(x0, y0, x1, y1)` of what the renderer drew.
type Bbox = (f32, f32, f32, f32);

fn options() -> usvg::Options<'static> {
    let mut opt = usvg::Options::default();
    opt.fontdb_mut().load_system_fonts();
    assert!(
        !opt.fontdb.is_empty(),
        "no system fonts: the chart test needs one (Debian: fonts-dejavu-core)"
    );
    opt
}

fn bbox(r: usvg::Rect) -> Bbox {
    (r.left(), r.top(), r.right(), r.bottom())
}

fn overlap(a: Bbox, b: Bbox) -> bool {
    a.0 < b.2 && b.0 < a.2 && a.1 < b.3 && b.1 < a.3
}

fn inside(outer: Bbox, inner: Bbox, slack: f32) -> bool {
    inner.0 >= outer.0 - slack
        && inner.1 >= outer.1 - slack
        && inner.2 <= outer.2 + slack
        && inner.3 <= outer.3 + slack
}

fn texts(g: &usvg::Group, out: &mut Vec<(String, Bbox)>) {
    for n in g.children() {
        match n {
            usvg::Node::Group(g) => texts(g, out),
            usvg::Node::Text(t) => {
                let s: String = t.chunks().iter().map(|c| c.text()).collect();
                out.push((s, bbox(t.abs_bounding_box())));
            }
            _ => {}
        }
    }
}

fn leaves(n: &usvg::Node, out: &mut Vec<Bbox>) {
    match n {
        usvg::Node::Group(g) => g.children().iter().for_each(|c| leaves(c, out)),
        other => out.push(bbox(other.abs_stroke_bounding_box())),
    }
}

/// Render and check; returns the rendered picture for an artefact.
fn check(input: &ChartInput) -> tiny_skia::Pixmap {
    let svg = chart::render(input);
    let tree = usvg::Tree::from_str(&svg, &options()).expect("the chart parses as SVG");
    let size = tree.size();
    let canvas = (0.0, 0.0, size.width(), size.height());

    let mut all = Vec::new();
    texts(tree.root(), &mut all);
    assert!(
        all.len() >= input.plans.len(),
        "every plan's name or number is drawn: {} texts",
        all.len()
    );
    for (i, (ta, a)) in all.iter().enumerate() {
        assert!(
            inside(canvas, *a, 0.5),
            "`{ta}` {a:?} leaves the canvas {canvas:?}"
        );
        for (tb, b) in &all[i + 1..] {
            assert!(!overlap(*a, *b), "`{ta}` {a:?} overlaps `{tb}` {b:?}");
        }
    }

    let plot = bbox(
        tree.node_by_id("plot-area")
            .expect("plot area")
            .abs_bounding_box(),
    );
    let mut marks = Vec::new();
    leaves(tree.node_by_id("marks").expect("marks"), &mut marks);
    let plotted = input
        .plans
        .iter()
        .filter(|p| p.cost.is_finite() && p.quality.is_finite())
        .count();
    assert!(
        marks.len() >= plotted,
        "{} marks for {plotted} plans",
        marks.len()
    );
    for m in &marks {
        assert!(
            inside(plot, *m, 0.0),
            "mark {m:?} outside the plot {plot:?}"
        );
    }

    let mut k = 0;
    while let Some(boxn) = tree.node_by_id(&format!("label-box-{k}")) {
        let b = bbox(boxn.abs_bounding_box());
        assert!(inside(plot, b, 0.0), "label box {b:?} outside the plot");
        let text = tree
            .node_by_id(&format!("label-{k}"))
            .expect("each label box has its text");
        let t = bbox(text.abs_bounding_box());
        assert!(
            inside(b, t, 0.5),
            "label {k}'s text {t:?} spills out of its box {b:?}"
        );
        for m in &marks {
            assert!(!overlap(b, *m), "label box {b:?} covers mark {m:?}");
        }
        k += 1;
    }
    // Every plan is named somewhere: by a label in the plot or a line of the numbered list.
    for p in &input.plans {
        assert!(
            all.iter().any(|(t, _)| t.contains(&p.name)),
            "{} is named nowhere",
            p.name
        );
    }
    assert!(k > 0 || input.plans.is_empty(), "no label placed");

    let mut pixmap =
        tiny_skia::Pixmap::new(size.width().ceil() as u32, size.height().ceil() as u32).unwrap();
    resvg::render(&tree, tiny_skia::Transform::default(), &mut pixmap.as_mut());
    let inked = pixmap
        .pixels()
        .iter()
        .filter(|p| p.alpha() > 0 && (p.red() < 128 || p.blue() < 128))
        .count();
    assert!(
        inked > 2_000,
        "the rendered chart is nearly blank: {inked} dark pixels"
    );
    pixmap
}

fn artefact_dir() -> std::path::PathBuf {
    let target = std::env::var_os("CARGO_TARGET_DIR")
        .map(std::path::PathBuf::from)
        .unwrap_or_else(|| std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../../target"));
    let dir = target.join("kerf-artefacts");
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

/// The figures `kerf sweep` printed for demo-texts (name, input tokens, nDCG@10, on the front),
/// and its truncation baseline.
fn demo_sweep() -> ChartInput {
    let rows = [
        ("paragraph-128-mean-mean", 63_324.0, 0.948, true),
        ("paragraph-128-mean-best", 63_324.0, 0.907, false),
        ("paragraph-128-o32-mean-mean", 70_992.0, 0.948, false),
        ("paragraph-128-o32-mean-best", 70_992.0, 0.933, false),
        ("sentence-128-mean-mean", 63_268.0, 0.926, false),
        ("sentence-128-mean-best", 63_268.0, 0.903, false),
        ("sentence-128-o32-mean-mean", 73_993.0, 0.947, false),
        ("sentence-128-o32-mean-best", 73_993.0, 0.928, false),
        ("paragraph-256-mean-mean", 62_704.0, 0.947, false),
        ("paragraph-256-mean-best", 62_704.0, 0.942, false),
        ("paragraph-256-o32-mean-mean", 65_924.0, 0.946, false),
        ("paragraph-256-o32-mean-best", 65_924.0, 0.936, false),
        ("sentence-256-mean-mean", 62_654.0, 0.947, true),
        ("sentence-256-mean-best", 62_654.0, 0.918, false),
        ("sentence-256-o32-mean-mean", 67_139.0, 0.933, false),
        ("sentence-256-o32-mean-best", 67_139.0, 0.942, false),
    ];
    ChartInput {
        title: "kerf sweep of demo-texts: nDCG@10 against cost".into(),
        metric: "nDCG@10".into(),
        cost_axis: CostAxis::Tokens,
        plans: rows
            .iter()
            .map(|&(n, c, q, f)| ChartPlan {
                name: n.into(),
                cost: c,
                quality: q,
                on_front: f,
            })
            .collect(),
        recommended: Some(12),
        baseline: Some(ChartPlan {
            name: "baseline-head-256".into(),
            cost: 2_560.0,
            quality: 0.852,
            on_front: false,
        }),
    }
}

#[test]
fn the_demo_sweep_chart_is_legible() {
    let input = demo_sweep();
    let pixmap = check(&input);
    let png = artefact_dir().join("chart-demo.png");
    pixmap.save_png(&png).unwrap();
    println!("rendered chart: {}", png.display());
    // The axes are fitted: the cost axis does not start at zero and says so.
    let l = chart::layout(&input);
    assert!(
        l.x.low > 50_000.0 && l.x.title.contains("not at zero"),
        "{:?}",
        l.x
    );
    assert_eq!(l.front_line.len(), 2, "the front is joined");
    assert!(l
        .labels
        .iter()
        .any(|x| x.text == "recommended: sentence-256-mean-mean"));
}

#[test]
fn the_chart_reads_by_time_and_with_a_baseline_among_the_plans() {
    let mut input = demo_sweep();
    input.cost_axis = CostAxis::Seconds;
    for p in &mut input.plans {
        p.cost /= 3_200.0;
    }
    // A baseline as dear as the plans sits on the cost axis with its own mark.
    input.baseline = Some(ChartPlan {
        name: "baseline-head-256".into(),
        cost: 19.0,
        quality: 0.90,
        on_front: false,
    });
    check(&input);
    let l = chart::layout(&input);
    assert!(l.x.title.contains("seconds"), "{}", l.x.title);
    assert_eq!(l.marks.len(), 17, "baseline mark plus 16 plans");
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(24))]
    /// Random crowds: up to 30 plans, many sharing a cost or a quality, with long names.
    #[test]
    fn no_crowd_makes_labels_collide(
        pts in prop::collection::vec((0u32..6, 0u32..8, any::<bool>()), 1..30),
        base in prop::option::of((0u32..100, 0u32..100)),
    ) {
        let figures: Vec<(f64, f64)> = pts
            .iter()
            .map(|&(c, q, _)| (0.90 + f64::from(q) * 0.007, 60_000.0 + f64::from(c) * 2_500.0))
            .collect();
        let front = kerf::compare::sweep::pareto_front(&figures);
        let plans: Vec<ChartPlan> = pts
            .iter()
            .zip(&figures)
            .enumerate()
            .map(|(i, (&(c, _, _), &(q, cost)))| ChartPlan {
                name: format!("paragraph-{}-o32-mean-token-mean-{i}", 128 << (c % 3)),
                cost,
                quality: q,
                on_front: front.contains(&i),
            })
            .collect();
        let input = ChartInput {
            title: "random".into(),
            metric: "MRR@10".into(),
            cost_axis: CostAxis::Tokens,
            recommended: front.first().copied(),
            plans,
            baseline: base.map(|(c, q)| ChartPlan {
                name: "baseline-head-512".into(),
                cost: f64::from(c) * 1_000.0,
                quality: f64::from(q) / 100.0,
                on_front: false,
            }),
        };
        check(&input);
    }
}
