//! `kerf explore`: load corpus, model and references, set up the terminal, run the event loop.
//! Everything the explorer does lives in `crate::tui`; this file only wires it to a real
//! terminal and makes sure the terminal is restored on every way out, a panic included.
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::Duration;

use anyhow::{Context, Result};
use clap::Args;
use crossterm::event::{self, DisableMouseCapture, EnableMouseCapture};
use crossterm::terminal::{self, EnterAlternateScreen, LeaveAlternateScreen};
use ratatui::backend::CrosstermBackend;
use ratatui::Terminal;

use crate::tui::worker::{EmbedderFactory, Encoding, Worker};
use crate::tui::{keys, render, Action, App, AppInit};
use kerf::compare::engine::Corpus;
use kerf::compare::refs;
use kerf::compare::sweep::plan_name;
use kerf::corpus::{Document, InputOptions, Notice};
use kerf::embed::{BertEmbedder, EmbedOptions, Embedder, HashEmbedder};
use kerf::profile::Profile;

use super::embed::EncoderArgs;
use super::{load_plan, InputArgs, PlanArgs};

#[derive(Args)]
pub struct ExploreArgs {
    #[command(flatten)]
    pub input: InputArgs,
    #[command(flatten)]
    pub plan: PlanArgs,
    /// Reference texts: kerf TOML (see demo-texts/references.toml), or a TREC queries file
    /// with --qrels.
    #[arg(long)]
    pub refs: Option<PathBuf>,
    /// TREC qrels beside a queries file given as --refs.
    #[arg(long, requires = "refs")]
    pub qrels: Option<PathBuf>,
    #[command(flatten)]
    pub probes: super::probing::ProbeArgs,
    #[command(flatten)]
    pub encoder: EncoderArgs,
    /// Embed with a model-free hashing embedder (for tests of the interface; similarity
    /// figures are meaningless).
    #[arg(long, hide = true)]
    pub hash_embedder: bool,
}

/// Read the corpus, leaving out (and listing) documents that are not valid UTF-8 unless
/// --lossy was given.
fn read_documents(input: &InputArgs) -> Result<(Vec<Document>, Vec<Notice>)> {
    let mut stream = kerf::corpus::DocStream::open(
        &input.paths,
        InputOptions {
            lossy: true,
            ..input.options()
        },
    )?;
    let mut docs = Vec::new();
    let mut problems = Vec::new();
    for d in stream.by_ref() {
        let d = d?;
        if !input.lossy && d.text.contains('\u{fffd}') {
            let path = Path::new(&d.origin);
            if let Ok(bytes) = std::fs::read(path) {
                if let Err(e) = kerf::corpus::decode(bytes, path, false) {
                    problems.push(Notice {
                        origin: d.origin.clone(),
                        message: format!(
                            "left out: {}",
                            e.to_string().trim_start_matches(&format!("{}: ", d.origin))
                        ),
                    });
                    continue;
                }
            }
        }
        docs.push(d);
    }
    problems.extend(stream.notices);
    Ok((docs, problems))
}

struct TerminalGuard;

/// Set while the screen is ours. Restoring twice (panic hook, then the guard while unwinding)
/// would leave the alternate screen twice, and a second leave moves the cursor back to where
/// the first enter saved it, over the panic message.
static SCREEN_TAKEN: AtomicBool = AtomicBool::new(false);

fn restore_terminal() {
    if !SCREEN_TAKEN.swap(false, Ordering::SeqCst) {
        return;
    }
    let _ = terminal::disable_raw_mode();
    let _ = crossterm::execute!(
        std::io::stdout(),
        DisableMouseCapture,
        LeaveAlternateScreen,
        crossterm::cursor::Show
    );
}

impl Drop for TerminalGuard {
    fn drop(&mut self) {
        restore_terminal();
    }
}

pub fn run(a: ExploreArgs) -> Result<()> {
    let mut loaded = load_plan(&a.plan, |info| {
        let mut p = Profile::default();
        p.cut.window = info.default_window();
        p.name = plan_name(&p);
        p
    })
    .context("kerf explore needs the model's tokenizer even to cut (scripts/fetch-model fetches the default model)")?;
    // Saved profiles must name the model the explorer runs, from wherever they are used.
    if a.plan.model.is_some() || loaded.plan.profile.model.folder.is_some() {
        loaded.plan.profile.model.folder =
            Some(std::fs::canonicalize(&loaded.info.dir).unwrap_or(loaded.info.dir.clone()));
    }
    let references = match &a.refs {
        Some(p) => refs::load(p, a.qrels.as_deref())?,
        None => Vec::new(),
    };
    let (docs, problems) = read_documents(&a.input)?;
    if docs.is_empty() {
        let mut msg = format!(
            "no readable documents in {} (kerf reads .txt, .md and .jsonl files)",
            a.input
                .paths
                .iter()
                .map(|p| p.display().to_string())
                .collect::<Vec<_>>()
                .join(", ")
        );
        for p in &problems {
            msg.push_str(&format!("\n  {}: {}", p.origin, p.message));
        }
        anyhow::bail!(msg);
    }
    let corpus = Corpus::new(docs, &loaded.counter)?;
    if let Some(p) = &a.refs {
        refs::check_known(&references, &corpus.ids(), &p.display().to_string())?;
    }
    // Without references, plans are judged by self-retrieval probes (said on stderr here and
    // in the Fit pane); `--probes 0` turns them off.
    let probe_set = match a.probes.wanted(a.refs.is_some()) {
        Some(n) if n > 0 => match a.probes.draw(&corpus, n, loaded.info.default_window()) {
            Ok(set) => Some(set),
            // Probes nobody asked for are not worth refusing the explorer over: the cut can
            // still be explored, and the Fit pane says how to add references.
            Err(e) if a.probes.probes.is_none() => {
                eprintln!("kerf: {e:#}; exploring without similarity figures");
                None
            }
            Err(e) => return Err(e),
        },
        _ => None,
    };
    let cache_path = if a.encoder.no_cache {
        None
    } else {
        // Open (and check, or rebuild) here so a bad cache is reported before the screen
        // changes; the worker opens its own connection.
        let c = a.encoder.open_cache()?;
        c.map(|c| c.path().to_path_buf())
    };
    let factory = embedder_factory(&a, &loaded)?;
    let model_name = loaded
        .info
        .dir
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| loaded.info.dir.display().to_string());
    let model_label = if a.hash_embedder {
        format!("{model_name} (hash)")
    } else {
        model_name
    };

    let (w, h) = terminal::size().context("kerf explore needs a terminal")?;
    let mut app = App::new(AppInit {
        corpus,
        counter: loaded.counter,
        info: loaded.info,
        model_label,
        plan: loaded.plan,
        refs: references,
        refs_origin: a.refs.as_ref().map(|p| p.display().to_string()),
        probes: probe_set,
        probe_prefix: a.probes.probe_prefix.clone(),
        problems,
        size: (w, h),
    })?;
    let worker = Worker::spawn(factory, cache_path);

    // SIGINT, SIGTERM and SIGHUP (a closed terminal window) end the loop below, so the terminal
    // is restored by the guard instead of being left in raw mode on the alternate screen.
    let signalled = Arc::new(AtomicBool::new(false));
    for sig in [
        signal_hook::consts::SIGINT,
        signal_hook::consts::SIGTERM,
        signal_hook::consts::SIGHUP,
    ] {
        signal_hook::flag::register(sig, signalled.clone())
            .context("installing a signal handler")?;
    }

    // From here on the terminal is ours: restore it on return, on error and on panic.
    let previous = std::panic::take_hook();
    std::panic::set_hook(Box::new(move |info| {
        restore_terminal();
        previous(info);
    }));
    SCREEN_TAKEN.store(true, Ordering::SeqCst);
    let _guard = TerminalGuard;
    terminal::enable_raw_mode().context("switching the terminal to raw mode")?;
    let mut out = std::io::stdout();
    crossterm::execute!(out, EnterAlternateScreen, EnableMouseCapture)
        .context("setting up the terminal")?;
    let mut term = Terminal::new(CrosstermBackend::new(std::io::stdout()))?;
    // A hook for the end-to-end test that the panic path restores the terminal.
    if std::env::var_os("KERF_EXPLORE_TEST_PANIC").is_some() {
        term.draw(|f| render::draw(f, &app))?;
        panic!("KERF_EXPLORE_TEST_PANIC is set: panicking with the screen up");
    }
    let mut dirty = true;
    loop {
        for r in app.take_requests() {
            // A worker that has gone away reports nothing more; the UI carries on.
            let _ = worker.requests.send(r);
        }
        if dirty {
            term.draw(|f| render::draw(f, &app))?;
            dirty = false;
        }
        if app.quit || signalled.load(Ordering::SeqCst) {
            break;
        }
        let wait = Duration::from_millis(if app.busy() { 40 } else { 250 });
        if event::poll(wait)? {
            loop {
                let ev = event::read()?;
                if let Some(action) = keys::action_for(&ev, &app) {
                    app.update(action);
                    dirty = true;
                }
                if app.quit || !event::poll(Duration::ZERO)? {
                    break;
                }
            }
        }
        while let Ok(r) = worker.reports.try_recv() {
            app.update(Action::Worker(r));
            dirty = true;
        }
    }
    term.show_cursor()?;
    out.flush()?;
    // The worker may be inside a long batch; its finished groups are already in the cache, so
    // the process leaves without waiting for it.
    drop(worker);
    if signalled.load(Ordering::SeqCst) {
        return Err(super::Interrupted {
            what: "kerf explore",
            kept: "profiles saved before it are kept, and finished vectors are in the cache",
        }
        .into());
    }
    Ok(())
}

fn embedder_factory(a: &ExploreArgs, loaded: &super::Loaded) -> Result<EmbedderFactory> {
    if a.hash_embedder {
        let e: Arc<dyn Embedder> = Arc::new(HashEmbedder { dim: 384 });
        return Ok(Box::new(move |_: Encoding| {
            Ok::<_, anyhow::Error>(e.clone())
        }));
    }
    loaded.info.check_runnable()?;
    let info = loaded.info.clone();
    let dir = info.dir.clone();
    let base = EmbedOptions {
        pooling: None,
        normalize: None,
        max_input_tokens: loaded.info.usable_positions(),
        max_batch_tokens: a.encoder.batch_tokens,
        threads: a.encoder.threads,
        precision: Default::default(), // each encoding sets its own
        engine: a.encoder.engine,
    };
    let load = move |encoding: Encoding| -> Result<Arc<dyn Embedder>> {
        let opts = EmbedOptions {
            pooling: Some(encoding.pooling),
            precision: encoding.precision,
            ..base.clone()
        };
        Ok(Arc::new(
            BertEmbedder::from_model(&info, &opts).with_context(|| {
                format!(
                    "loading the encoder from {} (scripts/fetch-model fetches the default model)",
                    dir.display()
                )
            })?,
        ))
    };
    // Load the first encoder now, so a missing or broken model is reported before the screen
    // changes.
    let first_encoding = Encoding::of(&loaded.plan.profile);
    let first = load(first_encoding)?;
    let mut ready = Some((first_encoding, first));
    Ok(Box::new(move |encoding: Encoding| match ready.take() {
        Some((p, e)) if p == encoding => Ok(e),
        _ => load(encoding),
    }))
}
