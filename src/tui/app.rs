//! The explorer's state and [`App::update`], the only place it changes.
//!
//! Re-cutting is pure and fast, so it happens inside `update` the moment a plan key is pressed;
//! embedding is not, so `update` only queues [`Request`]s for texts whose vectors are neither
//! in memory nor already asked for, and the event loop hands them to the worker. Vectors come
//! back as [`Action::Worker`] reports and are kept in memory by (token pooling, cache key), so a
//! plan seen before costs nothing the second time.
use std::collections::{HashMap, HashSet};
use std::ops::Range;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use kerf::compare::engine::{self, Corpus};
use kerf::compare::probes::{self, ProbeEval, ProbeSet};
use kerf::compare::refs::Reference;
use kerf::compare::sweep::plan_name;
use kerf::corpus::Notice;
use kerf::embed::{Precision, TokenPooling};
use kerf::model::ModelInfo;
use kerf::plan::{self, ResolvedPlan};
use kerf::pool::ChunkPooling;
use kerf::profile::{Boundary, Profile};
use kerf::split;
use kerf::tokens::TokenCounter;

use super::action::{Action, Pane};
use super::board::{build_layout, BoardView};
use super::geometry;
use super::plans::FitView;
use super::plans::{chunk_vectors, cut_state, judge_key, ref_vectors, score_state};
use super::plans::{Ident, PlanState, VecId};
use super::stock::{self, SortOrder, StockView};
use super::worker::{Input, Job, Judge, Report, Request};
use kerf::profile::Encoding;

/// Window sizes the w/W keys step through (those above the model's limit are skipped).
pub const WINDOW_STEPS: [usize; 8] = [64, 128, 192, 256, 320, 384, 448, 512];
/// Overlaps the o/O keys step through.
pub const OVERLAP_STEPS: [usize; 10] = [0, 8, 16, 32, 48, 64, 96, 128, 192, 256];
/// Late-chunking contexts the c/C keys step through (0 encodes each chunk alone; the others
/// are kept when at least the window and within the model's positions).
pub const CONTEXT_STEPS: [usize; 4] = [0, 256, 384, 512];
/// Minimum last-chunk sizes the m/M keys step through.
pub const MIN_CHUNK_STEPS: [usize; 7] = [0, 8, 16, 32, 48, 64, 96];
const TOKEN_POOLINGS: [TokenPooling; 3] =
    [TokenPooling::Mean, TokenPooling::Cls, TokenPooling::Max];

/// What the explorer starts from.
pub struct AppInit {
    /// Documents, analysed.
    pub corpus: Corpus,
    /// The model's tokenizer (re-cutting needs it for pieces inside words).
    pub counter: TokenCounter,
    /// The model's limits.
    pub info: ModelInfo,
    /// How the model is named in the header.
    pub model_label: String,
    /// The plan to start with.
    pub plan: ResolvedPlan,
    /// Reference texts (empty: none given).
    pub refs: Vec<Reference>,
    /// Where the references came from, if anywhere.
    pub refs_origin: Option<String>,
    /// Self-retrieval probes to judge plans by (beside the references, or alone).
    pub probes: Option<ProbeSet>,
    /// Text put before each probe sentence when it is embedded.
    pub probe_prefix: String,
    /// Files skipped or documents left out, with the reason.
    pub problems: Vec<Notice>,
    /// Terminal size (columns, rows).
    pub size: (u16, u16),
}

/// What the prompt line asks for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PromptKind {
    /// A file name to save the plan to.
    Save,
    /// A profile to load.
    Load,
}

/// Modal state on top of the panes.
#[derive(Debug, Clone, PartialEq)]
pub enum Mode {
    /// Keys act on the panes.
    Normal,
    /// The help overlay is up.
    Help,
    /// The prompt line takes the keys.
    Prompt {
        /// What it asks for.
        kind: PromptKind,
        /// Typed so far.
        input: String,
    },
    /// A save target exists; waiting for y.
    ConfirmOverwrite {
        /// The file that would be replaced.
        path: PathBuf,
    },
}

/// A line for the status row.
#[derive(Debug, Clone, PartialEq)]
pub struct Status {
    /// The text.
    pub text: String,
    /// Shown as an error.
    pub error: bool,
}

/// Corpus figures under a plan.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct Totals {
    /// Documents.
    pub documents: usize,
    /// Content tokens.
    pub tokens: usize,
    /// Chunks under the plan.
    pub chunks: usize,
    /// Tokens a truncating embed at this window never sees.
    pub unseen_tokens: usize,
    /// Sentences longer than the chunk budget.
    pub oversize_sentences: usize,
}

/// The explorer's whole state.
pub struct App {
    /// Documents, analysed (shared with the worker).
    pub corpus: Arc<Corpus>,
    counter: TokenCounter,
    /// Model limits.
    pub info: ModelInfo,
    /// Model name in the header.
    pub model_label: String,
    /// References: those the user gave, then one per probe.
    pub refs: Vec<Reference>,
    /// Where the given ones came from.
    pub refs_origin: Option<String>,
    /// The probes, when plans are judged by self-retrieval.
    pub probes: Option<Arc<ProbeSet>>,
    /// Probe verdicts by plan ([`judge_key`]), so a plan seen before is judged at once.
    judged: HashMap<String, ProbeEval>,
    /// Judgements asked of the worker: job id and plan key.
    judging: HashMap<u64, String>,
    /// Skipped files and documents left out.
    pub problems: Vec<Notice>,
    /// Content tokens per document.
    pub doc_tokens: Vec<usize>,
    /// Per document, each sentence's bytes and content tokens.
    sentence_tokens: Vec<Vec<(Range<usize>, usize)>>,
    /// The plan being shaped.
    pub current: PlanState,
    /// The truncation baseline.
    pub baseline: PlanState,
    /// A plan pinned for comparison (instead of the baseline).
    pub pinned: Option<PlanState>,
    /// Figures of the current plan.
    pub totals: Totals,
    /// Overlap to restore when leaving the `head` rule.
    stashed_overlap: usize,
    /// Pane shown.
    pub pane: Pane,
    /// Modal state.
    pub mode: Mode,
    /// The Stock pane: document list, its order and selection.
    pub stock: StockView,
    /// The Board pane: the selected document's layout and position.
    pub board: BoardView,
    /// The Fit pane: the selected reference.
    pub fit: FitView,
    /// Terminal size.
    pub size: (u16, u16),
    /// Last message.
    pub status: Option<Status>,
    /// Set when the user quits.
    pub quit: bool,
    vectors: HashMap<VecId, Vec<f32>>,
    pending: HashMap<u64, Vec<VecId>>,
    pending_keys: HashSet<VecId>,
    progress: HashMap<u64, (usize, usize)>,
    outbox: Vec<Request>,
    next_job: u64,
    generation: u64,
    /// Inputs the worker had to embed (not cached), for the status line.
    pub embedded_total: usize,
}

/// The truncation baseline: the first window at the model's configured length, scored by that
/// one chunk, with the model's default token pooling.
pub fn baseline_profile(info: &ModelInfo, model_folder: Option<PathBuf>) -> Profile {
    let window = info.default_window();
    Profile {
        name: format!("baseline-head-{window}"),
        about: "first window only: what a truncating encoder sees".into(),
        model: kerf::profile::ModelSection {
            folder: model_folder,
        },
        cut: kerf::profile::CutSection {
            window,
            boundary: Boundary::Head,
            overlap: 0,
            min_chunk: 0,
            prefix: String::new(),
            prefix_limit: None,
            heading_breaks: 0,
        },
        pool: kerf::profile::PoolSection {
            tokens: TokenPooling::Mean,
            chunks: ChunkPooling::First,
            ..Default::default()
        },
        ..Profile::default()
    }
}

impl App {
    /// Build the state and queue the first embedding jobs.
    pub fn new(init: AppInit) -> Result<Self, plan::PlanError> {
        let AppInit {
            corpus,
            counter,
            info,
            model_label,
            plan,
            mut refs,
            refs_origin,
            probes: probe_set,
            probe_prefix,
            problems,
            size,
        } = init;
        let corpus = Arc::new(corpus);
        if let Some(set) = &probe_set {
            refs.extend(probes::references(&corpus, set, &probe_prefix));
        }
        let doc_tokens: Vec<usize> = corpus.analyses.iter().map(|a| a.tokens.len()).collect();
        let sentence_tokens = corpus
            .analyses
            .iter()
            .map(|a| {
                let t = split::token_ranges_of(&a.tokens, &a.segments.sentences);
                a.segments
                    .sentences
                    .iter()
                    .cloned()
                    .zip(t.iter().map(|r| r.len()))
                    .collect()
            })
            .collect();
        let base = plan::resolve(
            &baseline_profile(&info, plan.profile.model.folder.clone()),
            &info,
            &counter,
            "baseline",
        )?;
        let current = cut_state(&corpus, &counter, plan);
        let baseline = cut_state(&corpus, &counter, base);
        let order = (0..corpus.docs.len()).collect();
        let mut app = App {
            corpus,
            counter,
            info,
            model_label,
            refs,
            refs_origin,
            probes: probe_set.map(Arc::new),
            judged: HashMap::new(),
            judging: HashMap::new(),
            problems,
            doc_tokens,
            sentence_tokens,
            current,
            baseline,
            pinned: None,
            totals: Totals::default(),
            stashed_overlap: 0,
            pane: Pane::Stock,
            mode: Mode::Normal,
            stock: StockView {
                sort: SortOrder::Input,
                order,
                row: 0,
                top: 0,
            },
            board: BoardView::default(),
            fit: FitView::default(),
            size,
            status: None,
            quit: false,
            vectors: HashMap::new(),
            pending: HashMap::new(),
            pending_keys: HashSet::new(),
            progress: HashMap::new(),
            outbox: Vec::new(),
            next_job: 1,
            generation: 0,
            embedded_total: 0,
        };
        app.totals = app.compute_totals();
        app.request_missing();
        app.relayout(None);
        Ok(app)
    }

    /// The model's tokenizer.
    pub fn counter(&self) -> &TokenCounter {
        &self.counter
    }

    /// Requests for the worker queued since the last call.
    pub fn take_requests(&mut self) -> Vec<Request> {
        std::mem::take(&mut self.outbox)
    }

    /// The plan compared against: the pinned one, else the baseline.
    pub fn comparison(&self) -> &PlanState {
        self.pinned.as_ref().unwrap_or(&self.baseline)
    }

    /// Document selected in the Stock list (and shown in the Board and Fit panes).
    pub fn selected_doc(&self) -> usize {
        self.stock.order.get(self.stock.row).copied().unwrap_or(0)
    }

    /// True while the worker has jobs of ours.
    pub fn busy(&self) -> bool {
        !self.pending.is_empty() || !self.judging.is_empty()
    }

    /// References the user gave (the rest of `refs` are probes).
    pub fn given_refs(&self) -> usize {
        self.refs.len() - self.probe_count()
    }

    /// Probes in `refs`.
    pub fn probe_count(&self) -> usize {
        self.probes.as_ref().map_or(0, |p| p.probes.len())
    }

    /// Plans being judged by probes on the worker.
    pub fn judging(&self) -> usize {
        self.judging.len()
    }

    /// (done, total) inputs across pending jobs.
    pub fn progress(&self) -> (usize, usize) {
        let mut done = 0;
        let mut total = 0;
        for (id, keys) in &self.pending {
            match self.progress.get(id) {
                Some(&(d, t)) => {
                    done += d;
                    total += t;
                }
                None => total += keys.len(),
            }
        }
        (done, total)
    }

    /// Oversize sentences of a document under the current budget (byte ranges).
    pub fn oversize_of(&self, doc: usize) -> Vec<Range<usize>> {
        let budget = self.current.plan.budget();
        self.sentence_tokens[doc]
            .iter()
            .filter(|(_, t)| *t > budget)
            .map(|(r, _)| r.clone())
            .collect()
    }

    /// The chunk of the selected document best matching the selected reference.
    pub fn best_chunk(&self) -> Option<usize> {
        let s = self.current.scored.as_ref()?;
        let doc = self.selected_doc();
        let cos = s.chunk_cos.get(self.fit.reference)?.get(doc)?;
        (!cos.is_empty()).then(|| engine::best_chunk(cos))
    }

    /// Apply one action.
    pub fn update(&mut self, action: Action) {
        // A message stays up until the next thing the user does.
        if !matches!(action, Action::Worker(_) | Action::Resize(..)) {
            self.status = None;
        }
        match action {
            Action::Quit => self.quit = true,
            Action::NextPane => self.pane = step_pane(self.pane, 1),
            Action::PrevPane => self.pane = step_pane(self.pane, -1),
            Action::ShowPane(p) => self.pane = p,
            Action::FocusDocument => {
                self.pane = Pane::Board;
                self.relayout(None);
            }
            Action::WindowDown | Action::WindowUp => {
                self.change_window(matches!(action, Action::WindowUp))
            }
            Action::OverlapDown | Action::OverlapUp => {
                self.change_overlap(matches!(action, Action::OverlapUp))
            }
            Action::MinChunkDown | Action::MinChunkUp => {
                let mut p = self.current.plan.profile.clone();
                p.cut.min_chunk = step(
                    &MIN_CHUNK_STEPS,
                    p.cut.min_chunk,
                    matches!(action, Action::MinChunkUp),
                );
                self.apply(p);
            }
            Action::BoundaryNext | Action::BoundaryPrev => {
                let mut p = self.current.plan.profile.clone();
                let next = cycle(
                    &Boundary::ALL,
                    p.cut.boundary,
                    matches!(action, Action::BoundaryNext),
                );
                if next == Boundary::Head {
                    self.stashed_overlap = p.cut.overlap;
                    p.cut.overlap = 0;
                } else if p.cut.boundary == Boundary::Head {
                    p.cut.overlap = self.stashed_overlap;
                }
                p.cut.boundary = next;
                self.apply(p);
            }
            Action::TokensNext | Action::TokensPrev => {
                let mut p = self.current.plan.profile.clone();
                p.pool.tokens = cycle(
                    &TOKEN_POOLINGS,
                    p.pool.tokens,
                    matches!(action, Action::TokensNext),
                );
                self.apply(p);
            }
            Action::PrecisionNext | Action::PrecisionPrev => {
                let mut p = self.current.plan.profile.clone();
                p.pool.precision = cycle(
                    &Precision::ALL,
                    p.pool.precision,
                    matches!(action, Action::PrecisionNext),
                );
                self.apply(p);
            }
            Action::ContextDown | Action::ContextUp => {
                self.change_context(matches!(action, Action::ContextUp))
            }
            Action::ChunksNext | Action::ChunksPrev => {
                let mut p = self.current.plan.profile.clone();
                p.pool.chunks = cycle(
                    &ChunkPooling::ALL,
                    p.pool.chunks,
                    matches!(action, Action::ChunksNext),
                );
                self.apply(p);
            }
            Action::Pin => {
                let name = plan_name(&self.current.plan.profile);
                self.pinned = Some(self.current.clone());
                self.say(
                    format!("pinned {name}: the Fit pane now compares against it"),
                    false,
                );
            }
            Action::Unpin => {
                self.pinned = None;
                self.say("comparing against the truncation baseline".into(), false);
            }
            Action::Move(n) => self.move_by(n),
            Action::Page(n) => {
                let page = self.page_rows() as isize;
                self.move_by(n * page.max(1));
            }
            Action::Home => self.move_by(isize::MIN / 2),
            Action::End => self.move_by(isize::MAX / 2),
            Action::SelectRow(r) => {
                if r < self.stock.order.len() {
                    self.stock.row = r;
                    self.relayout(None);
                }
            }
            Action::NextChunk | Action::PrevChunk => {
                let n = self
                    .current
                    .chunks
                    .get(self.board.layout.doc)
                    .map_or(0, Vec::len);
                if n > 0 {
                    self.board.chunk = if matches!(action, Action::NextChunk) {
                        (self.board.chunk + 1).min(n - 1)
                    } else {
                        self.board.chunk.saturating_sub(1)
                    };
                    self.scroll_to_chunk(self.board.chunk);
                }
                self.pane = Pane::Board;
            }
            Action::BestChunk => match self.best_chunk() {
                Some(b) => {
                    self.pane = Pane::Board;
                    self.relayout(None);
                    self.board.chunk = b;
                    self.scroll_to_chunk(b);
                }
                None if self.refs.is_empty() => self.say(
                    "no references: start with --refs FILE to find best chunks".into(),
                    true,
                ),
                None => self.say(
                    "best chunk not known yet: embedding is still running".into(),
                    false,
                ),
            },
            Action::NextRef | Action::PrevRef => {
                let n = self.refs.len();
                if n > 0 {
                    self.fit.reference = if matches!(action, Action::NextRef) {
                        (self.fit.reference + 1) % n
                    } else {
                        (self.fit.reference + n - 1) % n
                    };
                    if self.stock.sort == SortOrder::Similarity {
                        self.resort_keep_selection();
                    }
                }
            }
            Action::Sort => {
                self.stock.sort = self.stock.sort.next();
                self.resort_keep_selection();
            }
            Action::SavePrompt => {
                self.mode = Mode::Prompt {
                    kind: PromptKind::Save,
                    input: format!("{}.toml", plan_name(&self.current.plan.profile)),
                }
            }
            Action::LoadPrompt => {
                self.mode = Mode::Prompt {
                    kind: PromptKind::Load,
                    input: String::new(),
                }
            }
            Action::PromptChar(c) => {
                if let Mode::Prompt { input, .. } = &mut self.mode {
                    input.push(c);
                }
            }
            Action::PromptBackspace => {
                if let Mode::Prompt { input, .. } = &mut self.mode {
                    input.pop();
                }
            }
            Action::PromptClear => {
                if let Mode::Prompt { input, .. } = &mut self.mode {
                    input.clear();
                }
            }
            Action::PromptSubmit => self.submit_prompt(),
            Action::Confirm(yes) => {
                if let Mode::ConfirmOverwrite { path } =
                    std::mem::replace(&mut self.mode, Mode::Normal)
                {
                    if yes {
                        self.save(&path, true);
                    } else {
                        self.say(
                            format!("not saved: {} kept as it was", path.display()),
                            false,
                        );
                    }
                }
            }
            Action::Cancel => {
                if matches!(
                    self.mode,
                    Mode::Prompt { .. } | Mode::ConfirmOverwrite { .. }
                ) {
                    self.say("cancelled".into(), false);
                }
                self.mode = Mode::Normal;
            }
            Action::ToggleHelp => {
                self.mode = if self.mode == Mode::Help {
                    Mode::Normal
                } else {
                    Mode::Help
                }
            }
            Action::Resize(w, h) => {
                self.size = (w, h);
                self.relayout(None);
            }
            Action::Worker(r) => self.on_report(r),
        }
    }

    fn say(&mut self, text: String, error: bool) {
        self.status = Some(Status { text, error });
    }

    fn change_window(&mut self, up: bool) {
        let mut p = self.current.plan.profile.clone();
        let limit = self.info.usable_positions();
        let steps: Vec<usize> = WINDOW_STEPS
            .iter()
            .copied()
            .filter(|&w| w <= limit)
            .collect();
        let next = step(&steps, p.cut.window, up);
        if next == p.cut.window {
            self.say(
                if up {
                    format!("window {next} is the largest step (model limit {limit})")
                } else {
                    format!("window {next} is the smallest step")
                },
                false,
            );
            return;
        }
        p.cut.window = next;
        // Keep overlap and the minimum chunk inside the new budget.
        let fixed = self.current.plan.specials + self.current.plan.prefix_tokens;
        let budget = next.saturating_sub(fixed);
        let mut notes = Vec::new();
        if p.cut.overlap >= budget / 2 && p.cut.overlap > 0 {
            p.cut.overlap = largest_below(&OVERLAP_STEPS, budget / 2);
            notes.push(format!("overlap lowered to {}", p.cut.overlap));
        }
        if p.cut.min_chunk >= budget / 2 && p.cut.min_chunk > 0 {
            p.cut.min_chunk = largest_below(&MIN_CHUNK_STEPS, budget / 2);
            notes.push(format!("min chunk lowered to {}", p.cut.min_chunk));
        }
        if p.pool.context > 0 && p.pool.context < next {
            p.pool.context = next;
            notes.push(format!("late-chunking context raised to {next}"));
        }
        if self.apply(p) && !notes.is_empty() {
            self.say(notes.join(", "), false);
        }
    }

    fn change_context(&mut self, up: bool) {
        let mut p = self.current.plan.profile.clone();
        let limit = self.info.usable_positions();
        let window = p.cut.window;
        let steps: Vec<usize> = CONTEXT_STEPS
            .iter()
            .copied()
            .filter(|&c| c == 0 || (c >= window && c <= limit))
            .collect();
        let next = step(&steps, p.pool.context, up);
        if next == p.pool.context {
            self.say(
                match (up, next) {
                    (false, 0) => "context 0: each chunk is encoded alone".into(),
                    (false, _) => format!("context {next} is the smallest at window {window}"),
                    (true, 0) => format!(
                        "no late-chunking context fits: it must be at least the window ({window}) and at most the model's {limit} positions"
                    ),
                    (true, _) => format!("context {next} is the model's limit"),
                },
                false,
            );
            return;
        }
        if next > 0 && p.pool.tokens == TokenPooling::Cls {
            self.say(
                "late chunking pools each chunk's own token rows, and a chunk has no [CLS] row: press t for mean or max token pooling first".into(),
                true,
            );
            return;
        }
        p.pool.context = next;
        if next > 0 && p.pool.context_overlap >= next / 2 {
            p.pool.context_overlap = kerf::profile::DEFAULT_CONTEXT_OVERLAP.min(next / 4);
        }
        self.apply(p);
    }

    fn change_overlap(&mut self, up: bool) {
        let mut p = self.current.plan.profile.clone();
        if p.cut.boundary == Boundary::Head {
            self.say(
                "overlap has no meaning with boundary head (one chunk per document): press b for another rule".into(),
                true,
            );
            return;
        }
        let next = step(&OVERLAP_STEPS, p.cut.overlap, up);
        if next == p.cut.overlap {
            return;
        }
        // More than half the budget shared means most of every chunk is repeated text: the
        // sweep leaves such plans out too.
        let half = self.current.plan.budget() / 2;
        if up && next > half {
            self.say(
                format!("overlap {next} would be more than half the {}-token budget; raise the window first (W)", self.current.plan.budget()),
                true,
            );
            return;
        }
        p.cut.overlap = next;
        self.apply(p);
    }

    /// Resolve and switch to a profile; false (with a message) when it does not fit the model.
    fn apply(&mut self, mut profile: Profile) -> bool {
        profile.name = plan_name(&profile);
        let cur = &self.current.plan.profile;
        if profile.cut == cur.cut && profile.pool == cur.pool && profile.model == cur.model {
            return false;
        }
        let plan = match plan::resolve(&profile, &self.info, &self.counter, "plan") {
            Ok(p) => p,
            Err(e) => {
                self.say(e.message, true);
                return false;
            }
        };
        let top_byte = self
            .board
            .layout
            .lines
            .get(self.board.scroll)
            .map(|l| l.bytes.start);
        self.current = cut_state(&self.corpus, &self.counter, plan);
        self.generation += 1;
        self.outbox.push(Request::Generation(self.generation));
        self.totals = self.compute_totals();
        self.request_missing();
        self.rescore();
        self.resort_keep_selection();
        self.relayout(top_byte);
        true
    }

    fn compute_totals(&self) -> Totals {
        let budget = self.current.plan.budget();
        Totals {
            documents: self.corpus.docs.len(),
            tokens: self.doc_tokens.iter().sum(),
            chunks: self.current.chunks.iter().map(Vec::len).sum(),
            unseen_tokens: self
                .doc_tokens
                .iter()
                .map(|n| n.saturating_sub(budget))
                .sum(),
            oversize_sentences: self
                .sentence_tokens
                .iter()
                .flatten()
                .filter(|(_, t)| *t > budget)
                .count(),
        }
    }

    /// Queue embedding jobs for every vector the current and comparison plans lack, and probe
    /// judgements for plans whose vectors are all in.
    fn request_missing(&mut self) {
        let mut jobs: Vec<(Job, Vec<VecId>)> = Vec::new();
        let states: Vec<&PlanState> = [
            Some(&self.current),
            Some(&self.baseline),
            self.pinned.as_ref(),
        ]
        .into_iter()
        .flatten()
        .collect();
        let mut asked: HashSet<VecId> = HashSet::new();
        let mut encodings: Vec<Encoding> = Vec::new();
        let missing = |id: &VecId, asked: &mut HashSet<VecId>| {
            !self.vectors.contains_key(id) && !self.pending_keys.contains(id) && asked.insert(*id)
        };
        for st in &states {
            let encoding = Encoding::of(&st.plan.profile);
            if !encodings.contains(&encoding) {
                encodings.push(encoding);
            }
            let mut ids = Vec::new();
            let input = match st.plan.profile.pool.late() {
                None => {
                    let mut texts = Vec::new();
                    let mut prefixes = Vec::new();
                    let mut tokens = Vec::new();
                    for (d, keys) in st.keys.iter().enumerate() {
                        for (c, k) in keys.iter().enumerate() {
                            let id = (encoding, *k);
                            if missing(&id, &mut asked) {
                                let chunk = &st.chunks[d][c];
                                texts.push(
                                    self.corpus.docs[d].text[chunk.byte_range.clone()].to_string(),
                                );
                                prefixes.push(st.plan.prefix_of(chunk).to_string());
                                tokens.push(st.plan.chunk_input_tokens(chunk));
                                ids.push(id);
                            }
                        }
                    }
                    Input::Texts {
                        texts,
                        prefixes,
                        tokens,
                    }
                }
                Some(options) => {
                    // A late vector comes from passes over the whole document: a document
                    // missing any of its chunks is embedded whole (the cache serves the rest).
                    let mut docs = Vec::new();
                    for (d, keys) in st.keys.iter().enumerate() {
                        let doc_ids: Vec<VecId> = keys.iter().map(|k| (encoding, *k)).collect();
                        if doc_ids.iter().any(|id| missing(id, &mut asked)) {
                            for id in &doc_ids {
                                asked.insert(*id);
                            }
                            ids.extend(doc_ids);
                            docs.push((
                                d,
                                st.chunks[d].iter().map(|c| c.byte_range.clone()).collect(),
                                st.chunks[d]
                                    .iter()
                                    .map(|c| st.plan.prefix_of(c).to_string())
                                    .collect(),
                            ));
                        }
                    }
                    Input::Late {
                        corpus: self.corpus.clone(),
                        docs,
                        options,
                    }
                }
            };
            if !ids.is_empty() {
                let job = Job {
                    id: 0,
                    generation: Some(self.generation),
                    encoding,
                    input,
                };
                jobs.push((job, ids));
            }
        }
        for encoding in encodings {
            // (prefix, texts, their identities)
            let mut by_prefix: Vec<(String, Vec<String>, Vec<VecId>)> = Vec::new();
            for (i, r) in self.refs.iter().enumerate() {
                let id = (encoding, Ident::Ref(i as u32));
                if !missing(&id, &mut asked) {
                    continue;
                }
                match by_prefix.iter_mut().find(|(p, _, _)| *p == r.prefix) {
                    Some((_, t, ids)) => {
                        t.push(r.text.clone());
                        ids.push(id);
                    }
                    None => by_prefix.push((r.prefix.clone(), vec![r.text.clone()], vec![id])),
                }
            }
            for (prefix, texts, ids) in by_prefix {
                // References first: the Fit pane needs them before any chunk helps.
                let tokens = texts
                    .iter()
                    .map(|t| {
                        self.counter
                            .count_input(&format!("{prefix}{t}"))
                            .unwrap_or(0)
                    })
                    .collect();
                let job = Job {
                    id: 0,
                    generation: None,
                    encoding,
                    input: Input::Texts {
                        prefixes: vec![prefix; texts.len()],
                        texts,
                        tokens,
                    },
                };
                jobs.insert(0, (job, ids));
            }
        }
        for (mut job, ids) in jobs {
            job.id = self.next_job;
            self.next_job += 1;
            self.pending_keys.extend(ids.iter().copied());
            self.pending.insert(job.id, ids);
            self.outbox.push(Request::Embed(job));
        }
        self.request_judgements();
    }

    /// Ask the worker to judge by probes every shown plan whose vectors are all in and whose
    /// verdict is neither known nor asked for.
    fn request_judgements(&mut self) {
        let Some(set) = self.probes.clone() else {
            return;
        };
        let given = self.given_refs();
        let mut asks = Vec::new();
        for st in [
            Some(&self.current),
            Some(&self.baseline),
            self.pinned.as_ref(),
        ]
        .into_iter()
        .flatten()
        {
            let key = judge_key(&st.plan);
            if st.probed.is_some()
                || self.judged.contains_key(&key)
                || self.judging.values().any(|k| *k == key)
                || asks.iter().any(|(k, _): &(String, Judge)| *k == key)
            {
                continue;
            }
            let (Some(vectors), Some(probe_vectors)) = (
                chunk_vectors(st, &self.vectors),
                ref_vectors(st, given..self.refs.len(), &self.vectors),
            ) else {
                continue;
            };
            let judge = Judge {
                id: 0,
                generation: Some(self.generation),
                plan: st.plan.clone(),
                corpus: self.corpus.clone(),
                chunks: Arc::new(st.chunks.clone()),
                vectors: vectors
                    .iter()
                    .map(|vs| vs.iter().map(|v| v.to_vec()).collect())
                    .collect(),
                set: set.clone(),
                probe_vectors: probe_vectors.iter().map(|v| v.to_vec()).collect(),
            };
            asks.push((key, judge));
        }
        for (key, mut judge) in asks {
            judge.id = self.next_job;
            self.next_job += 1;
            self.judging.insert(judge.id, key);
            self.outbox.push(Request::Judge(Box::new(judge)));
        }
    }

    fn on_report(&mut self, r: Report) {
        match r {
            Report::Progress { id, done, total } => {
                if self.pending.contains_key(&id) {
                    self.progress.insert(id, (done, total));
                }
            }
            Report::Done {
                id,
                encoding,
                vectors,
                embedded,
            } => {
                // The vectors come back in the order the job listed its inputs.
                let ids = self.pending.get(&id).cloned().unwrap_or_default();
                self.forget_job(id);
                self.embedded_total += embedded;
                for ((p, k), v) in ids.into_iter().zip(vectors) {
                    debug_assert_eq!(p, encoding);
                    self.vectors.insert((p, k), v);
                }
                self.request_judgements();
                self.rescore();
                if self.stock.sort == SortOrder::Similarity {
                    self.resort_keep_selection();
                }
            }
            Report::Judged { id, eval } => {
                if let Some(key) = self.judging.remove(&id) {
                    self.embedded_total += eval.embedded;
                    self.judged.insert(key, *eval);
                    self.rescore();
                    if self.stock.sort == SortOrder::Similarity {
                        self.resort_keep_selection();
                    }
                }
            }
            Report::Skipped { id } => {
                self.forget_job(id);
                self.judging.remove(&id);
                self.request_missing();
            }
            Report::Failed { id, message } => {
                self.forget_job(id);
                self.judging.remove(&id);
                self.say(format!("embedding failed: {message}"), true);
            }
        }
    }

    fn forget_job(&mut self, id: u64) {
        if let Some(keys) = self.pending.remove(&id) {
            for k in keys {
                self.pending_keys.remove(&k);
            }
        }
        self.progress.remove(&id);
    }

    fn rescore(&mut self) {
        let set = self.probes.as_deref();
        let judged = &self.judged;
        let score = |st: &mut PlanState, corpus: &Corpus, refs: &[Reference], vectors| {
            if st.probed.is_none() && set.is_some() {
                st.probed = judged.get(&judge_key(&st.plan)).cloned();
            }
            if st.scored.is_none() {
                st.scored = score_state(st, corpus, refs, set, vectors);
            }
        };
        score(&mut self.current, &self.corpus, &self.refs, &self.vectors);
        score(&mut self.baseline, &self.corpus, &self.refs, &self.vectors);
        if let Some(p) = &mut self.pinned {
            score(p, &self.corpus, &self.refs, &self.vectors);
        }
    }

    fn resort(&mut self) {
        let ranking = self
            .current
            .scored
            .as_ref()
            .map(|s| s.ranking[self.fit.reference].as_slice());
        self.stock.order = stock::order(
            self.stock.sort,
            &self.doc_tokens,
            self.current.plan.budget(),
            ranking,
        );
    }

    /// Re-sort the Stock list keeping the selected document selected (so the Board stays).
    fn resort_keep_selection(&mut self) {
        let doc = self.selected_doc();
        self.resort();
        self.stock.row = self.stock.order.iter().position(|&d| d == doc).unwrap_or(0);
        self.clamp_stock();
    }

    fn page_rows(&self) -> usize {
        geometry::board_rows(self.size)
    }

    /// Keep the selected row of the Stock list in view (the list shares its rows with the
    /// problem lines under it, as drawn).
    fn clamp_stock(&mut self) {
        let all = self.page_rows();
        let rows = (all - self.problems.len().min(all / 3)).max(1);
        self.stock.keep_in_view(rows);
    }

    fn move_by(&mut self, n: isize) {
        match self.pane {
            Pane::Stock | Pane::Fit => {
                if self.stock.step(n) {
                    self.clamp_stock();
                    self.relayout(None);
                }
            }
            Pane::Board => self.board.scroll_by(n, self.page_rows()),
        }
    }

    fn scroll_to_chunk(&mut self, chunk: usize) {
        self.board.scroll_to_chunk(chunk, self.page_rows());
    }

    /// Re-wrap the selected document when the plan, the document or the size changed. With
    /// `keep_byte`, the line holding that byte stays at the top.
    fn relayout(&mut self, keep_byte: Option<usize>) {
        let doc = self.selected_doc();
        // Nothing is drawn below the minimum size; wrapping to a sliver would only cost time.
        if self.corpus.docs.is_empty() || geometry::too_small(self.size) {
            return;
        }
        let width = geometry::board_text_width(self.size);
        let same_doc = self.board.layout.doc == doc && !self.board.layout.lines.is_empty();
        let keep = keep_byte.filter(|_| same_doc).or_else(|| {
            (same_doc && self.board.layout.width != width)
                .then(|| {
                    self.board
                        .layout
                        .lines
                        .get(self.board.scroll)
                        .map(|l| l.bytes.start)
                })
                .flatten()
        });
        self.board.layout = build_layout(
            &self.corpus.docs[doc].text,
            &self.current.chunks[doc],
            &self.oversize_of(doc),
            width,
        );
        self.board.layout.doc = doc;
        match keep {
            Some(b) => {
                self.board.scroll = self
                    .board
                    .layout
                    .lines
                    .partition_point(|l| l.bytes.start <= b)
                    .saturating_sub(1);
            }
            None if same_doc => {}
            None => self.board.scroll = 0,
        }
        let max = self.board.layout.lines.len().saturating_sub(1);
        self.board.scroll = self.board.scroll.min(max);
        let top = self.board.scroll;
        self.board.chunk = self
            .board
            .layout
            .chunk_line
            .partition_point(|&l| l <= top)
            .saturating_sub(1);
    }

    fn submit_prompt(&mut self) {
        let Mode::Prompt { kind, input } = std::mem::replace(&mut self.mode, Mode::Normal) else {
            return;
        };
        let name = input.trim();
        if name.is_empty() {
            self.say("no file name given: nothing done".into(), true);
            return;
        }
        let path = PathBuf::from(name);
        match kind {
            PromptKind::Save => {
                if path.exists() {
                    self.mode = Mode::ConfirmOverwrite { path };
                } else {
                    self.save(&path, false);
                }
            }
            PromptKind::Load => self.load(&path),
        }
    }

    /// Write the current plan as a profile.
    fn save(&mut self, path: &Path, overwrite: bool) {
        let mut p = self.current.plan.profile.clone();
        if let Some(stem) = path.file_stem() {
            p.name = stem.to_string_lossy().into_owned();
        }
        if p.about.is_empty() || p.about.starts_with("saved from kerf explore") {
            p.about = format!("saved from kerf explore: {}", plan_name(&p));
        }
        match kerf::store::write_atomic(path, p.to_toml().as_bytes(), overwrite) {
            Ok(()) => self.say(
                format!("saved {} (use it with kerf cut -p {0} …)", path.display()),
                false,
            ),
            Err(e) => self.say(format!("not saved: {e}"), true),
        }
    }

    /// Load a profile as the current plan; it must use the model the explorer runs.
    fn load(&mut self, path: &Path) {
        let p = match Profile::load(path) {
            Ok(p) => p,
            Err(e) => return self.say(e.to_string(), true),
        };
        let ours = std::fs::canonicalize(&self.info.dir).unwrap_or_else(|_| self.info.dir.clone());
        let theirs = p.model_dir();
        let theirs = std::fs::canonicalize(&theirs).unwrap_or(theirs);
        if ours != theirs {
            return self.say(
                format!(
                    "{} uses model {}, but this explorer runs {}: restart with --model to use it",
                    path.display(),
                    theirs.display(),
                    ours.display()
                ),
                true,
            );
        }
        let mut keep = p.clone();
        keep.model.folder = self.current.plan.profile.model.folder.clone();
        if self.apply(keep) {
            self.say(format!("loaded {}", path.display()), false);
        }
    }
}

fn step_pane(p: Pane, by: isize) -> Pane {
    let i = Pane::ALL.iter().position(|x| *x == p).unwrap_or(0) as isize;
    let n = Pane::ALL.len() as isize;
    Pane::ALL[((i + by).rem_euclid(n)) as usize]
}

/// The next value up or down a ladder of steps from `current` (which need not be on it).
fn step(steps: &[usize], current: usize, up: bool) -> usize {
    if up {
        steps
            .iter()
            .copied()
            .find(|&s| s > current)
            .unwrap_or(current)
    } else {
        steps
            .iter()
            .rev()
            .copied()
            .find(|&s| s < current)
            .unwrap_or(current)
    }
}

fn largest_below(steps: &[usize], limit: usize) -> usize {
    steps
        .iter()
        .rev()
        .copied()
        .find(|&s| s < limit)
        .unwrap_or(0)
}

fn cycle<T: Copy + PartialEq>(all: &[T], current: T, forward: bool) -> T {
    let i = all.iter().position(|x| *x == current).unwrap_or(0);
    let n = all.len();
    all[if forward {
        (i + 1) % n
    } else {
        (i + n - 1) % n
    }]
}

#[cfg(test)]
mod tests {
    use super::super::worker::{answer, EmbedderFactory};
    use super::*;
    use kerf::corpus::Document;
    use kerf::embed::{Embedder, HashEmbedder};

    fn demo_app(files: &[&str]) -> App {
        let dir = kerf::model::default_model_dir();
        let (info, counter) =
            kerf::model::inspect(&dir).expect("model fetched (scripts/fetch-model)");
        let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-texts");
        let docs = files
            .iter()
            .map(|f| Document {
                id: f.to_string(),
                origin: f.to_string(),
                text: std::fs::read_to_string(root.join(f)).unwrap(),
                layout: None,
            })
            .collect();
        let corpus = Corpus::new(docs, &counter).unwrap();
        let refs = kerf::compare::refs::load(&root.join("references.toml"), None).unwrap();
        let profile = Profile::load(
            &Path::new(env!("CARGO_MANIFEST_DIR")).join("profiles/sentences-256.toml"),
        )
        .unwrap();
        let plan = plan::resolve(&profile, &info, &counter, "t").unwrap();
        App::new(AppInit {
            corpus,
            counter,
            info,
            model_label: "test".into(),
            plan,
            refs,
            refs_origin: Some("references.toml".into()),
            probes: None,
            probe_prefix: String::new(),
            problems: vec![],
            size: (120, 40),
        })
        .unwrap()
    }

    /// Answer every queued job with the hash embedder, as the worker would.
    fn hash_factory() -> EmbedderFactory {
        Box::new(
            |_| Ok::<_, anyhow::Error>(Arc::new(HashEmbedder { dim: 32 }) as Arc<dyn Embedder>),
        )
    }

    fn serve(app: &mut App) {
        let mut factory = hash_factory();
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

    const DOCS: [&str; 2] = [
        "locomotive-manual-issue-6.md",
        "fares-and-timetables-2032.md",
    ];

    /// The demo app without references, judged by `n` probes drawn with seed 1.
    fn probe_app(files: &[&str], n: usize) -> App {
        let mut app = demo_app(files);
        let set = probes::draw(
            &app.corpus,
            &probes::ProbeOptions::new(n, 1, app.info.default_window()),
        );
        assert!(
            set.probes.len() >= 5,
            "too few probes: {}",
            set.probes.len()
        );
        app.refs = probes::references(&app.corpus, &set, "");
        app.probes = Some(Arc::new(set));
        app.take_requests();
        app.vectors.clear();
        app.pending.clear();
        app.pending_keys.clear();
        app.request_missing();
        app
    }

    /// What `kerf compare` computes for a plan with the same (hash) embedder: chunk vectors
    /// through `engine::embed_chunks`, then the probes' verdict through `probes::score`.
    fn library_verdict(app: &App, st: &PlanState) -> (Vec<Vec<Vec<f32>>>, ProbeEval) {
        let e = HashEmbedder { dim: 32 };
        let (vectors, _) =
            engine::embed_chunks(&app.corpus, &st.chunks, &st.plan, &e, None, &mut |_, _| {})
                .unwrap();
        let set = app.probes.as_ref().unwrap();
        let refs = probes::references(&app.corpus, set, "");
        let qv = engine::embed_refs(&e, None, &refs).unwrap();
        let eval = probes::score(
            &app.corpus,
            set,
            &qv,
            &st.plan,
            &st.chunks,
            &vectors,
            &e,
            None,
        )
        .unwrap();
        (vectors, eval)
    }

    #[test]
    fn probes_judge_plans_as_compare_does_alone_and_late() {
        let mut app = probe_app(&DOCS, 24);
        serve(&mut app);
        assert!(!app.busy());
        for st in [&app.current, &app.baseline] {
            let got = st.scored.as_ref().expect("judged by probes");
            let (_, want) = library_verdict(&app, st);
            assert_eq!(got.summary, want.summary, "{}", st.plan.profile.name);
            assert_eq!(got.probes.as_ref().unwrap().bands, want.bands);
            assert_eq!(got.ranking, want.scores);
        }
        // The probe's own document shows its chunks with the sentence taken out: its cosines
        // are the holed ones, the other documents' the ordinary ones.
        let set = app.probes.clone().unwrap();
        let got = app.current.scored.as_ref().unwrap();
        let (_, want) = library_verdict(&app, &app.current);
        for (i, p) in set.probes.iter().enumerate() {
            let own = &got.chunk_cos[i][p.doc];
            assert_eq!(own.len(), app.current.chunks[p.doc].len());
            for (a, b) in own.iter().zip(&want.own_chunk_cos[i]) {
                assert!(a == b || (a.is_nan() && b.is_nan()), "{a} vs {b}");
            }
        }

        // A late-chunking context: whole documents go to the worker, and both the vectors and
        // the verdict are the library's.
        app.update(Action::ContextUp);
        assert_eq!(app.current.plan.profile.pool.context, 256);
        let reqs = app.take_requests();
        assert!(
            reqs.iter().any(|r| matches!(
                r,
                Request::Embed(Job {
                    input: Input::Late { .. },
                    ..
                })
            )),
            "no late job"
        );
        for r in reqs {
            if let Some(report) = answer(r, &mut hash_factory()) {
                app.update(Action::Worker(report));
            }
        }
        serve(&mut app);
        let (want_vectors, want) = library_verdict(&app, &app.current);
        let have = chunk_vectors(&app.current, &app.vectors).unwrap();
        assert_eq!(have.len(), want_vectors.len());
        for (h, w) in have.iter().zip(&want_vectors) {
            let w: Vec<&[f32]> = w.iter().map(Vec::as_slice).collect();
            assert_eq!(h, &w);
        }
        let got = app.current.scored.as_ref().expect("late plan judged");
        assert_eq!(got.summary, want.summary);
        // Stepping the context back down finds the earlier verdict at once.
        app.update(Action::ContextDown);
        assert_eq!(app.current.plan.profile.pool.context, 0);
        assert!(app.current.scored.is_some());
        assert!(app
            .take_requests()
            .iter()
            .all(|r| matches!(r, Request::Generation(_))));
    }

    #[test]
    fn context_steps_respect_the_window_and_token_pooling() {
        let mut app = demo_app(&DOCS);
        app.update(Action::ContextUp);
        assert_eq!(app.current.plan.profile.pool.context, 256);
        // A larger window lifts the context with it.
        app.update(Action::WindowUp);
        assert_eq!(app.current.plan.window, 320);
        assert_eq!(app.current.plan.profile.pool.context, 320);
        app.update(Action::ContextUp);
        assert_eq!(app.current.plan.profile.pool.context, 384);
        app.update(Action::ContextUp);
        app.update(Action::ContextUp);
        assert_eq!(app.current.plan.profile.pool.context, 512);
        assert!(app.status.as_ref().unwrap().text.contains("limit"));
        // CLS pooling has no row per chunk: refused with a message.
        app.update(Action::ContextDown);
        app.update(Action::ContextDown);
        app.update(Action::ContextDown);
        assert_eq!(app.current.plan.profile.pool.context, 0);
        app.update(Action::TokensNext);
        assert_eq!(app.current.plan.profile.pool.tokens, TokenPooling::Cls);
        app.update(Action::ContextUp);
        assert_eq!(app.current.plan.profile.pool.context, 0);
        assert!(app.status.as_ref().unwrap().error);
    }

    #[test]
    fn window_change_recuts() {
        let mut app = demo_app(&DOCS);
        assert_eq!(app.current.plan.window, 256);
        let before = app.totals.chunks;
        app.update(Action::WindowDown);
        assert_eq!(app.current.plan.window, 192);
        assert!(
            app.totals.chunks > before,
            "{} -> {}",
            before,
            app.totals.chunks
        );
        // Every chunk fits the new budget.
        let budget = app.current.plan.budget();
        assert!(app
            .current
            .chunks
            .iter()
            .flatten()
            .all(|c| c.content_tokens <= budget));
        for _ in 0..10 {
            app.update(Action::WindowUp);
        }
        assert_eq!(app.current.plan.window, 512, "stops at the model limit");
        assert!(app.totals.chunks < before);
        assert!(app.totals.unseen_tokens < app.doc_tokens.iter().sum::<usize>());
    }

    #[test]
    fn overlap_change_changes_chunk_count() {
        let mut app = demo_app(&DOCS);
        app.update(Action::BoundaryPrev); // sentence -> token
        assert_eq!(app.current.plan.profile.cut.boundary, Boundary::Token);
        let before = app.totals.chunks;
        app.update(Action::OverlapUp);
        app.update(Action::OverlapUp);
        app.update(Action::OverlapUp);
        assert_eq!(app.current.plan.profile.cut.overlap, 32);
        assert!(
            app.totals.chunks > before,
            "{} -> {}",
            before,
            app.totals.chunks
        );
        assert!(app
            .current
            .chunks
            .iter()
            .flatten()
            .any(|c| c.overlap_tokens > 0));
        app.update(Action::OverlapDown);
        assert_eq!(app.current.plan.profile.cut.overlap, 16);
        // Head takes no overlap: it is refused with a message, the plan unchanged.
        app.update(Action::BoundaryPrev);
        assert_eq!(app.current.plan.profile.cut.boundary, Boundary::Head);
        assert_eq!(app.current.plan.profile.cut.overlap, 0);
        assert_eq!(app.totals.chunks, DOCS.len());
        app.update(Action::OverlapUp);
        assert!(app.status.as_ref().unwrap().error);
        assert_eq!(app.current.plan.profile.cut.overlap, 0);
        // Leaving head brings the overlap back.
        app.update(Action::BoundaryNext);
        assert_eq!(app.current.plan.profile.cut.overlap, 16);
    }

    #[test]
    fn pin_and_baseline() {
        let mut app = demo_app(&DOCS);
        serve(&mut app);
        assert!(app.current.scored.is_some() && app.baseline.scored.is_some());
        assert_eq!(app.comparison().plan.profile.cut.boundary, Boundary::Head);
        app.update(Action::WindowDown);
        app.update(Action::Pin);
        assert_eq!(app.comparison().plan.window, 192);
        app.update(Action::WindowDown);
        assert_eq!(app.current.plan.window, 128);
        assert_eq!(app.comparison().plan.window, 192, "pinned plan stays put");
        serve(&mut app);
        assert!(app.comparison().scored.is_some());
        app.update(Action::Unpin);
        assert_eq!(app.comparison().plan.profile.name, "baseline-head-256");
    }

    #[test]
    fn cached_vectors_are_reused() {
        let mut app = demo_app(&DOCS);
        serve(&mut app);
        app.update(Action::WindowDown);
        assert!(app
            .take_requests()
            .iter()
            .any(|r| matches!(r, Request::Embed(_))));
        app.update(Action::WindowUp);
        // Back to a plan seen before: nothing to embed, scores at once.
        assert!(!app
            .take_requests()
            .iter()
            .any(|r| matches!(r, Request::Embed(_))));
        assert!(app.current.scored.is_some());
    }

    #[test]
    fn precision_change_asks_for_vectors_of_that_precision() {
        let mut app = demo_app(&DOCS);
        serve(&mut app);
        assert_eq!(app.current.plan.profile.pool.precision, Precision::F32);
        app.update(Action::PrecisionPrev); // f32 -> int8
        assert_eq!(app.current.plan.profile.pool.precision, Precision::Int8);
        // The f32 vectors of the same chunks do not stand in for int8 ones.
        assert!(app.current.scored.is_none());
        let jobs: Vec<Job> = app
            .take_requests()
            .into_iter()
            .filter_map(|r| match r {
                Request::Embed(j) => Some(j),
                _ => None,
            })
            .collect();
        assert!(!jobs.is_empty());
        assert!(jobs.iter().all(|j| j.encoding.precision == Precision::Int8));
        let chunks: usize = app.current.chunks.iter().map(Vec::len).sum();
        let asked: usize = jobs.iter().map(|j| j.input.vectors()).sum();
        assert_eq!(
            asked,
            chunks + app.refs.len(),
            "every chunk and reference, once"
        );
        app.update(Action::PrecisionNext); // back to f32: all in memory
        assert!(app.current.scored.is_some());
        assert!(!app
            .take_requests()
            .iter()
            .any(|r| matches!(r, Request::Embed(_))));
    }

    #[test]
    fn save_prompt_flow_and_overwrite_refusal() {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("mine.toml");
        let mut app = demo_app(&DOCS);
        app.update(Action::OverlapUp);
        app.update(Action::SavePrompt);
        match &app.mode {
            Mode::Prompt {
                kind: PromptKind::Save,
                input,
            } => assert!(input.ends_with(".toml")),
            m => panic!("{m:?}"),
        }
        // Replace the suggested name with ours.
        for _ in 0..100 {
            app.update(Action::PromptBackspace);
        }
        for c in target.display().to_string().chars() {
            app.update(Action::PromptChar(c));
        }
        app.update(Action::PromptSubmit);
        assert_eq!(app.mode, Mode::Normal);
        let saved = Profile::load(&target).unwrap();
        assert_eq!(saved.cut.overlap, 8);
        assert_eq!(saved.name, "mine");
        assert!(plan::resolve(&saved, &app.info, &app.counter, "saved").is_ok());
        // Saving again asks first; "no" keeps the file, "yes" replaces it.
        app.update(Action::OverlapUp);
        app.update(Action::SavePrompt);
        app.mode = Mode::Prompt {
            kind: PromptKind::Save,
            input: target.display().to_string(),
        };
        app.update(Action::PromptSubmit);
        assert!(matches!(app.mode, Mode::ConfirmOverwrite { .. }));
        app.update(Action::Confirm(false));
        assert_eq!(Profile::load(&target).unwrap().cut.overlap, 8);
        app.mode = Mode::Prompt {
            kind: PromptKind::Save,
            input: target.display().to_string(),
        };
        app.update(Action::PromptSubmit);
        app.update(Action::Confirm(true));
        assert_eq!(Profile::load(&target).unwrap().cut.overlap, 16);
        // And loading it back gives the same plan.
        app.update(Action::OverlapDown);
        app.mode = Mode::Prompt {
            kind: PromptKind::Load,
            input: target.display().to_string(),
        };
        app.update(Action::PromptSubmit);
        assert_eq!(app.current.plan.profile.cut.overlap, 16, "{:?}", app.status);
    }
}
