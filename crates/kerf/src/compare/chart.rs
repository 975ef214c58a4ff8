//! The quality-against-cost chart of a sweep or a comparison, as plain geometry and then SVG.
//!
//! Layout and drawing are kept apart: [`layout`] turns plan figures into pixel positions (axes
//! fitted to the data, a marker shape per role, label boxes placed so that none overlaps
//! another or covers a mark), and [`Layout::to_svg`] writes them out. The terminal commands and
//! the HTML handout embed the same drawing, and tests check the geometry on the layout as well
//! as on the rendered picture.
//!
//! Only the Pareto front, the recommended plan and the baseline carry name labels; every other
//! plan gets a small number beside its mark and a line in the numbered list under the plot.
//! Marks differ in shape and fill as well as colour, so the chart still reads in black and
//! white.
use std::fmt::Write as _;

/// What the cost axis measures.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CostAxis {
    /// Encoder-input tokens over the corpus (specials, prefix and overlap included).
    Tokens,
    /// Estimated seconds to embed the corpus at the throughput measured in the run.
    Seconds,
}

impl CostAxis {
    /// The axis title.
    pub fn title(self) -> &'static str {
        match self {
            CostAxis::Tokens => "cost: encoder-input tokens",
            CostAxis::Seconds => "cost: estimated seconds to embed",
        }
    }

    /// A cost value as written on the chart.
    pub fn format(self, v: f64) -> String {
        match self {
            CostAxis::Tokens => thousands(v.round() as i64),
            CostAxis::Seconds if v.abs() >= 100.0 => format!("{} s", thousands(v.round() as i64)),
            CostAxis::Seconds => format!("{v:.1} s"),
        }
    }

    /// The unit after a formatted value in running text.
    fn unit(self) -> &'static str {
        match self {
            CostAxis::Tokens => " tokens",
            CostAxis::Seconds => "",
        }
    }
}

/// One plan as the chart sees it.
#[derive(Debug, Clone, PartialEq)]
pub struct ChartPlan {
    /// Plan name.
    pub name: String,
    /// Cost on the chosen axis.
    pub cost: f64,
    /// Quality on the chosen metric.
    pub quality: f64,
    /// On the Pareto front.
    pub on_front: bool,
}

/// Everything the chart shows.
#[derive(Debug, Clone, PartialEq)]
pub struct ChartInput {
    /// Title above the plot.
    pub title: String,
    /// Name of the quality metric (`nDCG@10`).
    pub metric: String,
    /// What the cost figures are.
    pub cost_axis: CostAxis,
    /// The plans. Plans whose cost or quality is not a finite number are listed, not plotted.
    pub plans: Vec<ChartPlan>,
    /// Index into `plans` of the recommended plan.
    pub recommended: Option<usize>,
    /// The truncation baseline, drawn as a reference line at its quality.
    pub baseline: Option<ChartPlan>,
}

/// An axis-aligned box in pixels (y grows downwards).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Rect {
    /// Left edge.
    pub x: f64,
    /// Top edge.
    pub y: f64,
    /// Width.
    pub w: f64,
    /// Height.
    pub h: f64,
}

impl Rect {
    /// Right edge.
    pub fn right(&self) -> f64 {
        self.x + self.w
    }
    /// Bottom edge.
    pub fn bottom(&self) -> f64 {
        self.y + self.h
    }
    /// Whether the two boxes share any area (touching edges do not count).
    pub fn intersects(&self, o: &Rect) -> bool {
        self.x < o.right() && o.x < self.right() && self.y < o.bottom() && o.y < self.bottom()
    }
    /// Whether `o` lies wholly inside this box.
    pub fn contains(&self, o: &Rect) -> bool {
        o.x >= self.x && o.y >= self.y && o.right() <= self.right() && o.bottom() <= self.bottom()
    }
    /// Whether the point lies inside or on the edge.
    pub fn contains_point(&self, (px, py): (f64, f64)) -> bool {
        px >= self.x && px <= self.right() && py >= self.y && py <= self.bottom()
    }
    fn inflate(&self, d: f64) -> Rect {
        Rect {
            x: self.x - d,
            y: self.y - d,
            w: self.w + 2.0 * d,
            h: self.h + 2.0 * d,
        }
    }
    /// The point of the box nearest to `p`.
    fn nearest(&self, (px, py): (f64, f64)) -> (f64, f64) {
        (
            px.clamp(self.x, self.right()),
            py.clamp(self.y, self.bottom()),
        )
    }
    /// Whether the segment from `a` to `b` passes through the box (Liang–Barsky clipping).
    fn cut_by(&self, a: (f64, f64), b: (f64, f64)) -> bool {
        let (dx, dy) = (b.0 - a.0, b.1 - a.1);
        let (mut t0, mut t1) = (0.0f64, 1.0f64);
        for (p, q) in [
            (-dx, a.0 - self.x),
            (dx, self.right() - a.0),
            (-dy, a.1 - self.y),
            (dy, self.bottom() - a.1),
        ] {
            if p == 0.0 {
                if q < 0.0 {
                    return false;
                }
            } else {
                let r = q / p;
                if p < 0.0 {
                    t0 = t0.max(r);
                } else {
                    t1 = t1.min(r);
                }
                if t0 > t1 {
                    return false;
                }
            }
        }
        true
    }
}

/// The shape of a mark: each role has its own, so the chart reads without colour.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Shape {
    /// Filled circle: a plan on the Pareto front.
    Circle,
    /// Hollow square: any other plan.
    Square,
    /// Hollow diamond: the truncation baseline.
    Diamond,
}

/// A plotted mark.
#[derive(Debug, Clone, PartialEq)]
pub struct Mark {
    /// Centre in pixels.
    pub at: (f64, f64),
    /// Shape.
    pub shape: Shape,
    /// Half the mark's size in pixels.
    pub radius: f64,
    /// Ringed as the recommended plan.
    pub recommended: bool,
    /// The plan's name.
    pub plan: String,
}

impl Mark {
    /// The box the mark covers (the recommendation ring included).
    pub fn bounds(&self) -> Rect {
        let r = if self.recommended {
            RING_RADIUS + 1.0
        } else {
            self.radius + 1.0
        };
        Rect {
            x: self.at.0 - r,
            y: self.at.1 - r,
            w: 2.0 * r,
            h: 2.0 * r,
        }
    }
}

/// A text label in the plot with its box and, when it sits away from its mark, a leader line.
#[derive(Debug, Clone, PartialEq)]
pub struct Label {
    /// The text.
    pub text: String,
    /// The box the text is drawn in.
    pub bounds: Rect,
    /// Bold (the recommendation).
    pub bold: bool,
    /// Leader line from the mark to the box edge, when the box is not beside the mark.
    pub leader: Option<((f64, f64), (f64, f64))>,
}

/// One axis: its fitted range and ticks.
#[derive(Debug, Clone, PartialEq)]
pub struct Axis {
    /// Lowest value shown.
    pub low: f64,
    /// Highest value shown.
    pub high: f64,
    /// Tick values.
    pub ticks: Vec<f64>,
    /// Title, with a note when the axis does not start at zero.
    pub title: String,
}

/// A line of text at a fixed place outside the plot (title, ticks, axis titles, key, list).
#[derive(Debug, Clone, PartialEq)]
pub struct Note {
    /// The text.
    pub text: String,
    /// Anchor point (start, middle or end of the baseline, by `anchor`).
    pub at: (f64, f64),
    /// `start`, `middle` or `end`.
    pub anchor: &'static str,
    /// Font size in pixels.
    pub size: f64,
    /// Rotated a quarter turn anticlockwise about `at`.
    pub vertical: bool,
}

/// The chart's geometry in pixels.
#[derive(Debug, Clone, PartialEq)]
pub struct Layout {
    /// Whole picture width.
    pub width: f64,
    /// Whole picture height.
    pub height: f64,
    /// The plot area; every mark lies inside it.
    pub plot: Rect,
    /// Cost axis.
    pub x: Axis,
    /// Quality axis.
    pub y: Axis,
    /// Marks, baseline first when it is plotted.
    pub marks: Vec<Mark>,
    /// The front joined, left to right.
    pub front_line: Vec<(f64, f64)>,
    /// The baseline's reference line height, when there is a baseline.
    pub baseline_y: Option<f64>,
    /// Labels inside the plot.
    pub labels: Vec<Label>,
    /// Text outside the plot.
    pub notes: Vec<Note>,
    /// Key marks drawn beside key text (shape, centre, ringed).
    pub key: Vec<(Shape, (f64, f64), bool)>,
    /// Accessible title.
    pub title: String,
}

const WIDTH: f64 = 760.0;
const PLOT_LEFT: f64 = 78.0;
const PLOT_TOP: f64 = 42.0;
const PLOT_RIGHT_MARGIN: f64 = 18.0;
const PLOT_HEIGHT: f64 = 380.0;
const LABEL_SIZE: f64 = 11.0;
const LABEL_PAD: f64 = 3.0;
const TICK_SIZE: f64 = 11.0;
const RING_RADIUS: f64 = 9.0;
const DIRECTIONS: u32 = 24;
const LINE_STEP: f64 = 17.0;
const FRONT_COLOUR: &str = "#9a3f0f";
const OTHER_COLOUR: &str = "#3f5f80";
const BASE_COLOUR: &str = "#222222";

/// Digits grouped by thousands (`62,654`).
pub fn thousands(n: i64) -> String {
    let s = n.unsigned_abs().to_string();
    let mut out = String::new();
    if n < 0 {
        out.push('-');
    }
    for (i, c) in s.chars().enumerate() {
        if i > 0 && (s.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(c);
    }
    out
}

/// A generous estimate of the width of `text` in pixels at `size`, for DejaVu Sans and narrower
/// sans-serif faces: label boxes are sized from it, so it errs wide.
pub fn text_width(text: &str, size: f64, bold: bool) -> f64 {
    let em: f64 = text
        .chars()
        .map(|c| match c {
            'i' | 'j' | 'l' | '\'' | '|' | '.' | ',' | ':' | ';' | '!' => 0.32,
            ' ' | 'f' | 't' | 'r' | '-' | '(' | ')' | '[' | ']' | 'I' => 0.42,
            'm' | 'w' | 'M' | 'W' | '@' | '%' | '—' => 1.0,
            'A'..='Z' => 0.78,
            _ => 0.65,
        })
        .sum();
    em * size * if bold { 1.12 } else { 1.0 }
}

/// Fit an axis to values: a margin of 8% of their spread each side, starting at zero only when
/// zero is near the data anyway; ticks on steps of 1, 2, 2.5 or 5 times a power of ten.
pub fn fit_axis(values: &[f64], title: &str, format: &dyn Fn(f64) -> String) -> Axis {
    let lo_v = values.iter().copied().fold(f64::INFINITY, f64::min);
    let hi_v = values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let (lo_v, hi_v) = if lo_v.is_finite() {
        (lo_v, hi_v)
    } else {
        (0.0, 1.0)
    };
    let spread = hi_v - lo_v;
    let pad = if spread > 0.0 {
        spread * 0.08
    } else {
        (hi_v.abs() * 0.05).max(1e-3)
    };
    let mut low = lo_v - pad;
    let mut high = hi_v + pad;
    if lo_v >= 0.0 && (low < 0.0 || lo_v <= 0.25 * hi_v) {
        low = 0.0;
    }
    // Both ends on a tick, so the axis starts and ends at round figures.
    let step = nice_step(high - low, 5);
    low = (low / step).floor() * step;
    high = (high / step).ceil() * step;
    if lo_v >= 0.0 {
        low = low.max(0.0);
    }
    let ticks = nice_ticks(low, high, 5);
    let title = if low > 0.0 {
        format!("{title} (axis starts at {}, not at zero)", format(low))
    } else {
        title.to_string()
    };
    Axis {
        low,
        high,
        ticks,
        title,
    }
}

/// Ticks inside `[low, high]`, about `want` of them, on a step of 1, 2, 2.5 or 5 × 10^k.
pub fn nice_ticks(low: f64, high: f64, want: usize) -> Vec<f64> {
    let span = high - low;
    if span.is_nan() || span <= 0.0 || want == 0 {
        return vec![low];
    }
    let step = nice_step(span, want);
    // A hair of tolerance so ends that are themselves multiples of the step stay in.
    let first = (low / step - 1e-9).ceil() as i64;
    let last = (high / step + 1e-9).floor() as i64;
    (first..=last).map(|k| k as f64 * step).collect()
}

/// The smallest step of 1, 2, 2.5 or 5 × 10^k that cuts `span` into at most about `want` parts.
pub fn nice_step(span: f64, want: usize) -> f64 {
    if span.is_nan() || span <= 0.0 || want == 0 {
        return 1.0;
    }
    let raw = span / want as f64;
    let mag = 10f64.powf(raw.log10().floor());
    [1.0, 2.0, 2.5, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * mag)
}

fn tick_text(v: f64, ticks: &[f64], format: &dyn Fn(f64) -> String) -> String {
    let step = if ticks.len() > 1 {
        ticks[1] - ticks[0]
    } else {
        1.0
    };
    if step < 1.0 {
        // As many decimals as the step needs, so 0.025 steps print 0.925, 0.950, 0.975.
        let decimals = (0..7)
            .find(|&d| {
                let scaled = step * 10f64.powi(d);
                (scaled - scaled.round()).abs() < 1e-6
            })
            .unwrap_or(6) as usize;
        format!("{v:.decimals$}")
    } else {
        format(v)
    }
}

/// Pixels between the plot's frame and the ends of its axes, so a mark at either end of a
/// range (a quality of zero, the cheapest plan) is still drawn whole inside the frame.
const INSET: f64 = 14.0;

fn x_px(plot: &Rect, axis: &Axis, v: f64) -> f64 {
    let span = (axis.high - axis.low).max(f64::MIN_POSITIVE);
    plot.x + INSET + (v - axis.low) / span * (plot.w - 2.0 * INSET)
}

fn y_px(plot: &Rect, axis: &Axis, v: f64) -> f64 {
    let span = (axis.high - axis.low).max(f64::MIN_POSITIVE);
    plot.bottom() - INSET - (v - axis.low) / span * (plot.h - 2.0 * INSET)
}

/// Lay out the chart.
pub fn layout(input: &ChartInput) -> Layout {
    let cost = input.cost_axis;
    let finite = |p: &ChartPlan| p.cost.is_finite() && p.quality.is_finite();
    let shown: Vec<usize> = (0..input.plans.len())
        .filter(|&i| finite(&input.plans[i]))
        .collect();
    let baseline = input.baseline.as_ref().filter(|b| b.quality.is_finite());
    // The baseline's cost joins the cost axis only when the plans still spread over at least
    // half of it; a far cheaper baseline is drawn as its reference line alone.
    let plan_costs: Vec<f64> = shown.iter().map(|&i| input.plans[i].cost).collect();
    let mut costs = plan_costs.clone();
    let base_on_axis = baseline.is_some_and(|b| {
        if !b.cost.is_finite() {
            return false;
        }
        let lo = plan_costs.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = plan_costs.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let spread = (hi - lo).max(hi.abs() * 0.02);
        plan_costs.is_empty() || (b.cost >= lo - spread && b.cost <= hi + spread)
    });
    if let (true, Some(b)) = (base_on_axis, baseline) {
        costs.push(b.cost);
    }
    let mut qualities: Vec<f64> = shown.iter().map(|&i| input.plans[i].quality).collect();
    if let Some(b) = baseline {
        qualities.push(b.quality);
    }
    let fmt_cost = |v: f64| cost.format(v);
    let fmt_q = |v: f64| format!("{v:.3}");
    let x = fit_axis(&costs, cost.title(), &fmt_cost);
    let y = fit_axis(&qualities, &input.metric, &fmt_q);
    let y = Axis {
        ticks: y
            .ticks
            .iter()
            .copied()
            .filter(|t| *t <= 1.0 + 1e-9)
            .collect(),
        ..y
    };
    let plot = Rect {
        x: PLOT_LEFT,
        y: PLOT_TOP,
        w: WIDTH - PLOT_LEFT - PLOT_RIGHT_MARGIN,
        h: PLOT_HEIGHT,
    };
    let sx = |v: f64| x_px(&plot, &x, v);
    let sy = |v: f64| y_px(&plot, &y, v);

    let mut marks = Vec::new();
    if let (true, Some(b)) = (base_on_axis, baseline) {
        marks.push(Mark {
            at: (sx(b.cost), sy(b.quality)),
            shape: Shape::Diamond,
            radius: 6.0,
            recommended: false,
            plan: b.name.clone(),
        });
    }
    for &i in &shown {
        let p = &input.plans[i];
        marks.push(Mark {
            at: (sx(p.cost), sy(p.quality)),
            shape: if p.on_front {
                Shape::Circle
            } else {
                Shape::Square
            },
            radius: if p.on_front { 5.0 } else { 4.0 },
            recommended: input.recommended == Some(i),
            plan: p.name.clone(),
        });
    }
    let mut front_line: Vec<(f64, f64)> = shown
        .iter()
        .filter(|&&i| input.plans[i].on_front)
        .map(|&i| (sx(input.plans[i].cost), sy(input.plans[i].quality)))
        .collect();
    front_line.sort_by(|a, b| a.0.total_cmp(&b.0).then(b.1.total_cmp(&a.1)));

    // Labels: baseline, recommendation, the rest of the front by cost, then numbers.
    let mut placer = Placer::new(plot, marks.iter().map(Mark::bounds).collect());
    let mut labels = Vec::new();
    let baseline_y = baseline.map(|b| sy(b.quality));
    if let Some(b) = baseline {
        let text = format!(
            "truncation baseline {}: {} {:.3}{}",
            b.name,
            input.metric,
            b.quality,
            if base_on_axis || !b.cost.is_finite() {
                String::new()
            } else {
                format!(
                    ", cost {}{} (off this axis)",
                    cost.format(b.cost),
                    cost.unit()
                )
            }
        );
        let anchor = if base_on_axis {
            marks[0].at
        } else {
            (plot.right() - 6.0, sy(b.quality))
        };
        labels.extend(placer.place(&text, anchor, false, 0.0));
    }
    let mut named: Vec<usize> = shown
        .iter()
        .copied()
        .filter(|&i| input.plans[i].on_front || input.recommended == Some(i))
        .collect();
    named.sort_by(|&a, &b| {
        (input.recommended != Some(a))
            .cmp(&(input.recommended != Some(b)))
            .then(input.plans[a].cost.total_cmp(&input.plans[b].cost))
    });
    let mark_of = |i: usize| {
        marks
            .iter()
            .find(|m| m.plan == input.plans[i].name)
            .map_or((0.0, 0.0), |m| m.at)
    };
    // A name that finds no free spot falls back to a number and a line in the list.
    named.retain(|&i| {
        let p = &input.plans[i];
        let rec = input.recommended == Some(i);
        let text = if rec {
            format!("recommended: {}", p.name)
        } else {
            p.name.clone()
        };
        let clearance = if rec { RING_RADIUS - 4.0 } else { 0.0 };
        let placed = placer.place(&text, mark_of(i), rec, clearance);
        let ok = placed.is_some();
        labels.extend(placed);
        ok
    });
    let numbered: Vec<usize> = (0..input.plans.len())
        .filter(|i| !named.contains(i))
        .collect();
    for (k, &i) in numbered.iter().enumerate() {
        if shown.contains(&i) {
            labels.extend(placer.place(&(k + 1).to_string(), mark_of(i), false, 0.0));
        }
    }

    // Text outside the plot: title, ticks, axis titles, key, numbered list.
    let mut notes = vec![Note {
        text: input.title.clone(),
        at: (plot.x, 24.0),
        anchor: "start",
        size: 15.0,
        vertical: false,
    }];
    for &t in &x.ticks {
        notes.push(Note {
            text: tick_text(t, &x.ticks, &fmt_cost),
            at: (sx(t), plot.bottom() + 16.0),
            anchor: "middle",
            size: TICK_SIZE,
            vertical: false,
        });
    }
    for &t in &y.ticks {
        notes.push(Note {
            text: tick_text(t, &y.ticks, &fmt_q),
            at: (plot.x - 6.0, sy(t) + 4.0),
            anchor: "end",
            size: TICK_SIZE,
            vertical: false,
        });
    }
    notes.push(Note {
        text: x.title.clone(),
        at: (plot.x + plot.w / 2.0, plot.bottom() + 36.0),
        anchor: "middle",
        size: 12.0,
        vertical: false,
    });
    notes.push(Note {
        text: y.title.clone(),
        at: (18.0, plot.y + plot.h / 2.0),
        anchor: "middle",
        size: 12.0,
        vertical: true,
    });
    let mut row = plot.bottom() + 64.0;
    let mut key = Vec::new();
    let mut kx = plot.x;
    let mut key_item = |shape: Shape, ring: bool, text: &str, notes: &mut Vec<Note>| {
        key.push((shape, (kx + 6.0, row - 4.0), ring));
        notes.push(Note {
            text: text.to_string(),
            at: (kx + 18.0, row),
            anchor: "start",
            size: LABEL_SIZE,
            vertical: false,
        });
        kx += 18.0 + text_width(text, LABEL_SIZE, false) + 16.0;
    };
    key_item(Shape::Circle, false, "on the front (joined)", &mut notes);
    key_item(Shape::Circle, true, "recommended", &mut notes);
    key_item(
        Shape::Square,
        false,
        "other plans, numbered below",
        &mut notes,
    );
    if baseline.is_some() {
        key_item(
            Shape::Diamond,
            false,
            "truncation baseline (dashed)",
            &mut notes,
        );
    }
    row += LINE_STEP + 4.0;
    if !numbered.is_empty() {
        notes.push(Note {
            text: format!(
                "Numbered plans: name — {}, {}",
                input.metric,
                cost.title().trim_start_matches("cost: ")
            ),
            at: (plot.x, row),
            anchor: "start",
            size: LABEL_SIZE,
            vertical: false,
        });
        row += LINE_STEP;
    }
    let lines: Vec<String> = numbered
        .iter()
        .enumerate()
        .map(|(k, &i)| {
            let p = &input.plans[i];
            if finite(p) {
                format!(
                    "{}  {} — {:.3}, {}{}",
                    k + 1,
                    p.name,
                    p.quality,
                    cost.format(p.cost),
                    if input.recommended == Some(i) {
                        " · recommended"
                    } else if p.on_front {
                        " · on the front"
                    } else {
                        ""
                    }
                )
            } else {
                format!("{}  {}  not plotted: no figure", k + 1, p.name)
            }
        })
        .collect();
    let col_w = plot.w / 2.0;
    let two = lines
        .iter()
        .all(|l| text_width(l, LABEL_SIZE, false) < col_w - 12.0);
    let per_col = if two {
        lines.len().div_ceil(2)
    } else {
        lines.len()
    };
    for (k, l) in lines.iter().enumerate() {
        let (c, r) = (k / per_col.max(1), k % per_col.max(1));
        notes.push(Note {
            text: l.clone(),
            at: (plot.x + c as f64 * col_w, row + r as f64 * LINE_STEP),
            anchor: "start",
            size: LABEL_SIZE,
            vertical: false,
        });
    }
    let height = row + per_col as f64 * LINE_STEP + 8.0;
    Layout {
        width: WIDTH,
        height,
        plot,
        x,
        y,
        marks,
        front_line,
        baseline_y,
        labels,
        notes,
        key,
        title: input.title.clone(),
    }
}

/// Greedy label placement: for each label, the nearest free spot around its mark, tried on
/// rings of growing radius in sixteen directions; a spot is free when its box stays in the
/// plot, overlaps no placed label and no mark, and its leader line crosses neither.
struct Placer {
    plot: Rect,
    marks: Vec<Rect>,
    placed: Vec<Rect>,
    leaders: Vec<((f64, f64), (f64, f64))>,
}

impl Placer {
    fn new(plot: Rect, marks: Vec<Rect>) -> Self {
        Self {
            plot,
            marks,
            placed: Vec::new(),
            leaders: Vec::new(),
        }
    }

    fn place(&mut self, text: &str, at: (f64, f64), bold: bool, clearance: f64) -> Option<Label> {
        let w = text_width(text, LABEL_SIZE, bold) + 2.0 * LABEL_PAD;
        let h = LABEL_SIZE * 1.3 + 2.0 * LABEL_PAD;
        let inner = self.plot.inflate(-2.0);
        // First pass: leaders cross no mark; second pass: a leader may pass over a mark.
        for strict in [true, false] {
            if let Some(l) = self.try_place(text, at, bold, clearance, w, h, inner, strict) {
                return Some(l);
            }
        }
        None
    }

    #[allow(clippy::too_many_arguments)]
    fn try_place(
        &mut self,
        text: &str,
        at: (f64, f64),
        bold: bool,
        clearance: f64,
        w: f64,
        h: f64,
        inner: Rect,
        strict: bool,
    ) -> Option<Label> {
        for r in [
            6.0, 12.0, 20.0, 30.0, 44.0, 60.0, 80.0, 105.0, 135.0, 170.0, 210.0, 260.0, 320.0,
            400.0,
        ] {
            let r = r + clearance;
            for k in 0..DIRECTIONS {
                let angle = std::f64::consts::PI * 2.0 * f64::from(k) / f64::from(DIRECTIONS);
                let (dx, dy) = (angle.cos(), -angle.sin());
                let bx = if dx > 0.3 {
                    at.0 + r * dx
                } else if dx < -0.3 {
                    at.0 + r * dx - w
                } else {
                    at.0 + r * dx - w / 2.0
                };
                let by = if dy > 0.3 {
                    at.1 + r * dy
                } else if dy < -0.3 {
                    at.1 + r * dy - h
                } else {
                    at.1 + r * dy - h / 2.0
                };
                let b = Rect { x: bx, y: by, w, h };
                if !inner.contains(&b) {
                    continue;
                }
                let pad = b.inflate(1.0);
                if self.placed.iter().any(|p| p.intersects(&pad))
                    || self.marks.iter().any(|m| m.intersects(&pad))
                {
                    continue;
                }
                let end = b.nearest(at);
                let far =
                    ((end.0 - at.0).powi(2) + (end.1 - at.1).powi(2)).sqrt() > 8.0 + clearance;
                let leader = far.then_some((at, end));
                if let Some((a, e)) = leader {
                    // The leader must not run through another label or mark, and no earlier
                    // leader may run through this box.
                    let own = Rect {
                        x: at.0 - 0.5,
                        y: at.1 - 0.5,
                        w: 1.0,
                        h: 1.0,
                    };
                    if self.placed.iter().any(|p| p.cut_by(a, e))
                        || strict
                            && self
                                .marks
                                .iter()
                                .filter(|m| !m.contains_point(at) && !m.intersects(&own))
                                .any(|m| m.cut_by(a, e))
                        || self
                            .leaders
                            .iter()
                            .any(|&(p, q)| segments_cross((p, q), (a, e)))
                    {
                        continue;
                    }
                }
                if self.leaders.iter().any(|&(p, q)| b.cut_by(p, q)) {
                    continue;
                }
                self.placed.push(b);
                if let Some(l) = leader {
                    self.leaders.push(l);
                }
                return Some(Label {
                    text: text.to_string(),
                    bounds: b,
                    bold,
                    leader,
                });
            }
        }
        None
    }
}

/// Whether two segments cross at a point inside both (shared end points do not count).
fn segments_cross(a: ((f64, f64), (f64, f64)), b: ((f64, f64), (f64, f64))) -> bool {
    let orient = |p: (f64, f64), q: (f64, f64), r: (f64, f64)| {
        (q.0 - p.0) * (r.1 - p.1) - (q.1 - p.1) * (r.0 - p.0)
    };
    let (d1, d2) = (orient(b.0, b.1, a.0), orient(b.0, b.1, a.1));
    let (d3, d4) = (orient(a.0, a.1, b.0), orient(a.0, a.1, b.1));
    d1 * d2 < 0.0 && d3 * d4 < 0.0
}

/// Escape text for XML and HTML content and attribute values.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            _ => out.push(c),
        }
    }
    out
}

fn shape_svg(out: &mut String, shape: Shape, (x, y): (f64, f64), r: f64, class: &str) {
    let _ = match shape {
        Shape::Circle => write!(
            out,
            r#"<circle class="{class}" cx="{x:.1}" cy="{y:.1}" r="{r:.1}" fill="{FRONT_COLOUR}" stroke="{FRONT_COLOUR}"/>"#
        ),
        Shape::Square => write!(
            out,
            r#"<rect class="{class}" x="{:.1}" y="{:.1}" width="{:.1}" height="{:.1}" fill="white" stroke="{OTHER_COLOUR}" stroke-width="1.6"/>"#,
            x - r,
            y - r,
            2.0 * r,
            2.0 * r
        ),
        Shape::Diamond => write!(
            out,
            r#"<path class="{class}" d="M{x:.1},{:.1} L{:.1},{y:.1} L{x:.1},{:.1} L{:.1},{y:.1} Z" fill="white" stroke="{BASE_COLOUR}" stroke-width="1.6"/>"#,
            y - r,
            x + r,
            y + r,
            x - r
        ),
    };
}

fn ring_svg(out: &mut String, (x, y): (f64, f64)) {
    let _ = write!(
        out,
        r#"<circle class="ring" cx="{x:.1}" cy="{y:.1}" r="{RING_RADIUS:.1}" fill="none" stroke="{BASE_COLOUR}" stroke-width="1.5"/>"#
    );
}

impl Layout {
    /// The chart as a standalone SVG document (also valid inline in HTML).
    pub fn to_svg(&self) -> String {
        let mut s = String::new();
        let (w, h, p) = (self.width, self.height, self.plot);
        let _ = write!(
            s,
            r#"<svg xmlns="http://www.w3.org/2000/svg" class="kerf-chart" viewBox="0 0 {w:.0} {h:.0}" width="{w:.0}" height="{h:.0}" font-family="DejaVu Sans, Verdana, Arial, sans-serif" role="img" aria-labelledby="chart-title"><title id="chart-title">{}</title>"#,
            escape(&self.title)
        );
        let _ = write!(s, r#"<rect width="{w:.0}" height="{h:.0}" fill="white"/>"#);
        let _ = write!(
            s,
            r##"<rect id="plot-area" x="{:.1}" y="{:.1}" width="{:.1}" height="{:.1}" fill="#fcfcfa" stroke="#777" stroke-width="1"/>"##,
            p.x, p.y, p.w, p.h
        );
        s.push_str(r##"<g id="grid" stroke="#ddd" stroke-width="1">"##);
        let sx = |v: f64| x_px(&p, &self.x, v);
        let sy = |v: f64| y_px(&p, &self.y, v);
        for &t in &self.x.ticks {
            let _ = write!(
                s,
                r#"<line x1="{0:.1}" y1="{1:.1}" x2="{0:.1}" y2="{2:.1}"/>"#,
                sx(t),
                p.y,
                p.bottom()
            );
        }
        for &t in &self.y.ticks {
            let _ = write!(
                s,
                r#"<line x1="{1:.1}" y1="{0:.1}" x2="{2:.1}" y2="{0:.1}"/>"#,
                sy(t),
                p.x,
                p.right()
            );
        }
        s.push_str("</g>");
        if let Some(by) = self.baseline_y {
            let _ = write!(
                s,
                r#"<line id="baseline-line" x1="{:.1}" y1="{by:.1}" x2="{:.1}" y2="{by:.1}" stroke="{BASE_COLOUR}" stroke-width="1.2" stroke-dasharray="7 4"/>"#,
                p.x,
                p.right()
            );
        }
        if self.front_line.len() > 1 {
            let pts: Vec<String> = self
                .front_line
                .iter()
                .map(|(x, y)| format!("{x:.1},{y:.1}"))
                .collect();
            let _ = write!(
                s,
                r#"<polyline id="front-line" points="{}" fill="none" stroke="{FRONT_COLOUR}" stroke-width="1.6"/>"#,
                pts.join(" ")
            );
        }
        s.push_str(r##"<g id="leaders" stroke="#555" stroke-width="0.8">"##);
        for l in &self.labels {
            if let Some((a, b)) = l.leader {
                let _ = write!(
                    s,
                    r#"<line x1="{:.1}" y1="{:.1}" x2="{:.1}" y2="{:.1}"/>"#,
                    a.0, a.1, b.0, b.1
                );
            }
        }
        s.push_str("</g><g id=\"marks\">");
        for m in &self.marks {
            let class = match m.shape {
                Shape::Circle => "front",
                Shape::Square => "other",
                Shape::Diamond => "baseline",
            };
            let _ = write!(s, r#"<g class="mark" data-plan="{}">"#, escape(&m.plan));
            shape_svg(&mut s, m.shape, m.at, m.radius, class);
            if m.recommended {
                ring_svg(&mut s, m.at);
            }
            s.push_str("</g>");
        }
        s.push_str("</g><g id=\"labels\">");
        for (k, l) in self.labels.iter().enumerate() {
            let b = l.bounds;
            let _ = write!(
                s,
                r#"<g class="label"><rect id="label-box-{k}" x="{:.1}" y="{:.1}" width="{:.1}" height="{:.1}" fill="white" fill-opacity="0.9" stroke="{}" stroke-width="0.6"/><text id="label-{k}" x="{:.1}" y="{:.1}" font-size="{LABEL_SIZE}"{}>{}</text></g>"#,
                b.x,
                b.y,
                b.w,
                b.h,
                if l.bold { BASE_COLOUR } else { "#bbb" },
                b.x + LABEL_PAD,
                b.y + LABEL_PAD + LABEL_SIZE * 1.02,
                if l.bold { r#" font-weight="bold""# } else { "" },
                escape(&l.text)
            );
        }
        s.push_str("</g><g id=\"notes\" fill=\"#111\">");
        for n in &self.notes {
            let rotate = if n.vertical {
                format!(r#" transform="rotate(-90 {:.1} {:.1})""#, n.at.0, n.at.1)
            } else {
                String::new()
            };
            let _ = write!(
                s,
                r#"<text x="{:.1}" y="{:.1}" font-size="{}" text-anchor="{}"{rotate}>{}</text>"#,
                n.at.0,
                n.at.1,
                n.size,
                n.anchor,
                escape(&n.text)
            );
        }
        s.push_str("</g><g id=\"key\">");
        for &(shape, at, ring) in &self.key {
            shape_svg(
                &mut s,
                shape,
                at,
                if shape == Shape::Square { 4.0 } else { 5.0 },
                "key",
            );
            if ring {
                ring_svg(&mut s, at);
            }
        }
        s.push_str("</g></svg>\n");
        s
    }
}

/// Lay out and draw in one step.
pub fn render(input: &ChartInput) -> String {
    layout(input).to_svg()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn plan(name: &str, cost: f64, quality: f64, on_front: bool) -> ChartPlan {
        ChartPlan {
            name: name.into(),
            cost,
            quality,
            on_front,
        }
    }

    #[test]
    fn axes_fit_the_data_and_say_when_they_do_not_start_at_zero() {
        let a = fit_axis(&[62_654.0, 73_993.0], "tokens", &|v| format!("{v}"));
        // 8% of the 11,339 spread each side, widened to the 5,000 step's multiples.
        assert_eq!((a.low, a.high), (60_000.0, 75_000.0), "{a:?}");
        assert!(a.title.contains("not at zero"), "{}", a.title);
        // Zero near the data: the axis starts there and says nothing.
        let z = fit_axis(&[0.1, 0.9], "q", &|v| format!("{v}"));
        assert_eq!(z.low, 0.0);
        assert!(!z.title.contains("zero"));
        // One value: still a range around it.
        let one = fit_axis(&[5.0, 5.0], "q", &|v| format!("{v}"));
        assert!(one.low < 5.0 && one.high > 5.0);
    }

    #[test]
    fn ticks_agree_with_heckberts_loose_labels() {
        // Heckbert, "Nice numbers for graph labels", Graphics Gems (1990), loose labelling with
        // 5 ticks (algorithm from memory, worked by hand): range = nicenum(max - min, false),
        // step = nicenum(range / 4, true), ends = floor/ceil to the step.
        // [61,747, 74,900] (the demo sweep's costs plus margins): range 20,000, step 5,000,
        // axis 60,000 to 75,000.
        let a = fit_axis(&[62_654.0, 73_993.0], "t", &|v| format!("{v}"));
        assert_eq!((a.low, a.high), (60_000.0, 75_000.0));
        assert_eq!(a.ticks, vec![60_000.0, 65_000.0, 70_000.0, 75_000.0]);
        // [0.691, 0.967]: range 0.5, step 0.1, axis 0.6 to 1.0.
        let q = fit_axis(&[0.71, 0.948], "q", &|v| format!("{v}"));
        assert!(
            (q.low - 0.6).abs() < 1e-9 && (q.high - 1.0).abs() < 1e-9,
            "{q:?}"
        );
        assert_eq!(q.ticks.len(), 5, "{q:?}");
        // [0.5, 2.7]: range 5 (nicenum(2.2) = 5), step 1 (nicenum(1.25) = 1), axis 0 to 3 —
        // here the data's low end is near zero, so the axis starts at zero as Heckbert's does.
        let z = fit_axis(&[0.5, 2.7], "z", &|v| format!("{v}"));
        assert_eq!((z.low, z.high), (0.0, 3.0));
        assert_eq!(z.ticks, vec![0.0, 1.0, 2.0, 3.0]);
    }

    #[test]
    fn rects_and_segments() {
        let a = Rect {
            x: 0.0,
            y: 0.0,
            w: 10.0,
            h: 10.0,
        };
        let b = Rect {
            x: 10.0,
            y: 0.0,
            w: 5.0,
            h: 5.0,
        };
        assert!(!a.intersects(&b), "touching edges do not overlap");
        assert!(a.intersects(&Rect { x: 9.0, ..b }));
        assert!(a.cut_by((-5.0, 5.0), (15.0, 5.0)));
        assert!(!a.cut_by((-5.0, 15.0), (15.0, 15.0)));
        assert!(segments_cross(
            ((0.0, 0.0), (2.0, 2.0)),
            ((0.0, 2.0), (2.0, 0.0))
        ));
        assert!(!segments_cross(
            ((0.0, 0.0), (1.0, 0.0)),
            ((0.0, 1.0), (1.0, 1.0))
        ));
    }

    #[test]
    fn a_far_cheaper_baseline_stays_off_the_cost_axis() {
        let input = ChartInput {
            title: "t".into(),
            metric: "nDCG@10".into(),
            cost_axis: CostAxis::Tokens,
            plans: vec![
                plan("a", 62_000.0, 0.9, true),
                plan("b", 70_000.0, 0.95, true),
            ],
            recommended: Some(0),
            baseline: Some(plan("head", 2_800.0, 0.6, false)),
        };
        let l = layout(&input);
        assert!(l.x.low > 50_000.0, "{:?}", l.x);
        assert!(
            l.y.low < 0.6,
            "the baseline's quality is on the axis: {:?}",
            l.y
        );
        assert!(l.labels.iter().any(|x| x.text.contains("off this axis")));
        assert_eq!(l.marks.len(), 2);
        let svg = l.to_svg();
        assert!(svg.contains("baseline-line") && svg.contains("front-line"));
    }
}
