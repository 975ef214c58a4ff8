//! The embedding worker: a thread that embeds chunk and reference texts through the SQLite
//! vector cache, and judges plans by self-retrieval probes, so the UI never waits on the
//! encoder.
//!
//! The UI sends [`Job`]s and [`Judge`]s and receives [`Report`]s over `std::sync::mpsc`. Work
//! that belongs to a plan the user has already moved past is dropped before it starts
//! (reported as [`Report::Skipped`]), so a quick run of key presses does not queue minutes of
//! encoder work. Everything here calls the library's own paths: `job::embed_cached` for texts,
//! `late::embed_chunks` for late chunking, `probes::score` for probes.
use std::collections::HashMap;
use std::ops::Range;
use std::path::PathBuf;
use std::sync::atomic::AtomicBool;
use std::sync::mpsc::{self, Receiver, Sender};
use std::sync::Arc;
use std::thread::JoinHandle;

use kerf::cache::VectorCache;
use kerf::compare::engine::{Corpus, REF_BATCH_TOKENS};
use kerf::compare::probes::{self, ProbeEval, ProbeSet};
use kerf::embed::Embedder;
use kerf::job;
use kerf::late::{self, LateOptions};
use kerf::plan::ResolvedPlan;
pub use kerf::profile::Encoding;
use kerf::split::Chunk;

/// What a job embeds.
#[derive(Clone)]
pub enum Input {
    /// Texts, each encoded alone.
    Texts {
        /// The texts (without their prefixes).
        texts: Vec<String>,
        /// What goes before each text.
        prefixes: Vec<String>,
        /// Encoder-input tokens of each text (prefix and specials included), for batching.
        tokens: Vec<usize>,
    },
    /// Whole documents under late chunking: one vector per chunk, pooled from passes over
    /// the document.
    Late {
        /// The corpus the documents are in.
        corpus: Arc<Corpus>,
        /// (document index, byte range of each of its chunks, each chunk's prefix).
        docs: Vec<(usize, Vec<Range<usize>>, Vec<String>)>,
        /// Context and overlap of the passes.
        options: LateOptions,
    },
}

impl Input {
    /// Vectors the input gives.
    pub fn vectors(&self) -> usize {
        match self {
            Input::Texts { texts, .. } => texts.len(),
            Input::Late { docs, .. } => docs.iter().map(|(_, c, _)| c.len()).sum(),
        }
    }
}

/// Vectors to make under one encoding.
#[derive(Clone)]
pub struct Job {
    /// Identifier the reports carry.
    pub id: u64,
    /// Plan generation the job serves; `None` for jobs that never go stale (references).
    pub generation: Option<u64>,
    /// Token pooling and precision (select the encoder).
    pub encoding: Encoding,
    /// What to embed.
    pub input: Input,
}

/// A plan to judge by self-retrieval probes once its chunk vectors are in: the probes'
/// sentences are taken out of the chunks that hold them, which are embedded again here.
#[derive(Clone)]
pub struct Judge {
    /// Identifier the reports carry.
    pub id: u64,
    /// Plan generation the work serves.
    pub generation: Option<u64>,
    /// The plan.
    pub plan: ResolvedPlan,
    /// The corpus.
    pub corpus: Arc<Corpus>,
    /// The plan's chunks of each document.
    pub chunks: Arc<Vec<Vec<Chunk>>>,
    /// Their vectors, `[doc][chunk]`.
    pub vectors: Vec<Vec<Vec<f32>>>,
    /// The probes.
    pub set: Arc<ProbeSet>,
    /// The probes' vectors under the plan's encoding.
    pub probe_vectors: Vec<Vec<f32>>,
}

/// What the worker tells the UI.
#[derive(Debug, Clone, PartialEq)]
pub enum Report {
    /// Inputs of a job done so far (cache hits included).
    Progress {
        /// Job id.
        id: u64,
        /// Done.
        done: usize,
        /// To do.
        total: usize,
    },
    /// A job is finished: one vector per text (or per chunk of a late job), in order.
    Done {
        /// Job id.
        id: u64,
        /// Encoding the vectors were made with.
        encoding: Encoding,
        /// The vectors.
        vectors: Vec<Vec<f32>>,
        /// Inputs that were not in the cache.
        embedded: usize,
    },
    /// A plan is judged by its probes.
    Judged {
        /// Work id.
        id: u64,
        /// The evaluation.
        eval: Box<ProbeEval>,
    },
    /// A job was dropped because a newer plan replaced it.
    Skipped {
        /// Job id.
        id: u64,
    },
    /// A job failed.
    Failed {
        /// Job id.
        id: u64,
        /// What went wrong.
        message: String,
    },
}

/// What the UI sends.
pub enum Request {
    /// Embed these texts.
    Embed(Job),
    /// Judge a plan by probes.
    Judge(Box<Judge>),
    /// Plans older than this generation are stale.
    Generation(u64),
}

/// Builds (or fetches) the encoder for an encoding.
pub type EmbedderFactory = Box<dyn FnMut(Encoding) -> anyhow::Result<Arc<dyn Embedder>> + Send>;

/// A running worker.
pub struct Worker {
    /// Send jobs here.
    pub requests: Sender<Request>,
    /// Reports arrive here.
    pub reports: Receiver<Report>,
    handle: Option<JoinHandle<()>>,
}

impl Worker {
    /// Start the worker thread. The cache file (if any) is opened on the thread, since a SQLite
    /// connection stays with the thread that uses it.
    pub fn spawn(factory: EmbedderFactory, cache_path: Option<PathBuf>) -> Self {
        let (req_tx, req_rx) = mpsc::channel();
        let (rep_tx, rep_rx) = mpsc::channel();
        let handle = std::thread::Builder::new()
            .name("kerf-embed".into())
            .spawn(move || run(factory, cache_path, req_rx, rep_tx))
            .expect("spawning the embedding thread");
        Self {
            requests: req_tx,
            reports: rep_rx,
            handle: Some(handle),
        }
    }

    /// Stop taking jobs and wait for the one in progress to finish.
    pub fn shutdown(mut self) {
        let (tx, _) = mpsc::channel();
        drop(std::mem::replace(&mut self.requests, tx));
        if let Some(h) = self.handle.take() {
            let _ = h.join();
        }
    }
}

fn run(
    mut factory: EmbedderFactory,
    cache_path: Option<PathBuf>,
    requests: Receiver<Request>,
    reports: Sender<Report>,
) {
    let mut cache_error = None;
    let cache = cache_path.and_then(|p| match VectorCache::open(&p) {
        Ok(c) => Some(c),
        Err(e) => {
            cache_error = Some(e.to_string());
            None
        }
    });
    let mut embedders: HashMap<Encoding, Arc<dyn Embedder>> = HashMap::new();
    let mut generation = 0u64;
    let mut queue: std::collections::VecDeque<Work> = Default::default();
    loop {
        // Take everything waiting, so stale work is seen before any of it starts.
        if queue.is_empty() {
            match requests.recv() {
                Ok(r) => absorb(r, &mut queue, &mut generation),
                Err(_) => return,
            }
        }
        while let Ok(r) = requests.try_recv() {
            absorb(r, &mut queue, &mut generation);
        }
        let Some(work) = queue.pop_front() else {
            continue;
        };
        let (id, serves) = work.id_generation();
        if serves.is_some_and(|g| g < generation) {
            if reports.send(Report::Skipped { id }).is_err() {
                return;
            }
            continue;
        }
        let mut poll = |generation_now: &mut u64| {
            while let Ok(r) = requests.try_recv() {
                absorb(r, &mut queue, &mut generation);
            }
            *generation_now = generation;
        };
        let outcome = match &work {
            Work::Embed(job) => embed_job(
                job,
                &mut factory,
                &mut embedders,
                cache.as_ref(),
                &reports,
                &mut poll,
            ),
            Work::Judge(judge) => {
                judge_plan(judge, &mut factory, &mut embedders, cache.as_ref()).map(Some)
            }
        };
        let report = match outcome {
            Ok(Some(r)) => r,
            Ok(None) => Report::Skipped { id },
            Err(e) => Report::Failed {
                id,
                message: match &cache_error {
                    Some(c) => format!("{e:#} (vector cache not used: {c})"),
                    None => format!("{e:#}"),
                },
            },
        };
        if reports.send(report).is_err() {
            return;
        }
    }
}

/// Answer one request at once on the calling thread, through the code the worker thread runs
/// (no cache, no staleness): tests drive the explorer's state with it.
pub fn answer(request: Request, factory: &mut EmbedderFactory) -> Option<Report> {
    let mut embedders = HashMap::new();
    let (tx, _rx) = mpsc::channel();
    let outcome = match &request {
        Request::Embed(job) => embed_job(job, factory, &mut embedders, None, &tx, &mut |_| {}),
        Request::Judge(judge) => judge_plan(judge, factory, &mut embedders, None).map(Some),
        Request::Generation(_) => return None,
    };
    let id = match &request {
        Request::Embed(j) => j.id,
        Request::Judge(j) => j.id,
        Request::Generation(_) => unreachable!("returned above"),
    };
    Some(match outcome {
        Ok(Some(r)) => r,
        Ok(None) => Report::Skipped { id },
        Err(e) => Report::Failed {
            id,
            message: format!("{e:#}"),
        },
    })
}

/// A queued job or judgement.
enum Work {
    Embed(Job),
    Judge(Box<Judge>),
}

impl Work {
    fn id_generation(&self) -> (u64, Option<u64>) {
        match self {
            Work::Embed(j) => (j.id, j.generation),
            Work::Judge(j) => (j.id, j.generation),
        }
    }
}

fn absorb(r: Request, queue: &mut std::collections::VecDeque<Work>, generation: &mut u64) {
    match r {
        Request::Embed(j) => queue.push_back(Work::Embed(j)),
        Request::Judge(j) => queue.push_back(Work::Judge(j)),
        Request::Generation(g) => *generation = (*generation).max(g),
    }
}

/// Texts embedded between two looks at the request channel: small enough that a newer plan
/// stops a stale job within a second or two on CPU, large enough to batch well.
const SLICE: usize = 16;
/// Documents embedded with late chunking between two looks at the request channel.
const LATE_SLICE: usize = 2;

fn embedder_for(
    encoding: Encoding,
    factory: &mut EmbedderFactory,
    embedders: &mut HashMap<Encoding, Arc<dyn Embedder>>,
) -> anyhow::Result<Arc<dyn Embedder>> {
    Ok(match embedders.get(&encoding) {
        Some(e) => e.clone(),
        None => {
            let e = factory(encoding)?;
            embedders.insert(encoding, e.clone());
            e
        }
    })
}

/// Embed a job slice by slice, reporting progress; `None` when a newer plan made it stale
/// part way (the slices done are in the cache, so asking again costs nothing for them).
fn embed_job(
    job: &Job,
    factory: &mut EmbedderFactory,
    embedders: &mut HashMap<Encoding, Arc<dyn Embedder>>,
    cache: Option<&VectorCache>,
    reports: &Sender<Report>,
    poll: &mut dyn FnMut(&mut u64),
) -> anyhow::Result<Option<Report>> {
    let embedder = embedder_for(job.encoding, factory, embedders)?;
    let total = job.input.vectors();
    let mut vectors = Vec::with_capacity(total);
    let mut embedded = 0;
    let stale = |poll: &mut dyn FnMut(&mut u64)| {
        let mut generation = 0;
        poll(&mut generation);
        job.generation.is_some_and(|g| g < generation)
    };
    match &job.input {
        Input::Texts {
            texts,
            prefixes,
            tokens,
        } => {
            let inputs: Vec<job::Input<'_>> = texts
                .iter()
                .zip(prefixes)
                .zip(tokens.iter().copied().chain(std::iter::repeat(0)))
                .map(|((t, p), n)| job::Input::new(p, t, n))
                .collect();
            for slice in inputs.chunks(SLICE) {
                if stale(poll) {
                    return Ok(None);
                }
                let (v, report) = job::embed_cached(
                    embedder.as_ref(),
                    cache,
                    slice,
                    REF_BATCH_TOKENS,
                    &mut |_, _| {},
                )?;
                embedded += report.embedded;
                vectors.extend(v);
                let _ = reports.send(Report::Progress {
                    id: job.id,
                    done: vectors.len(),
                    total,
                });
            }
        }
        Input::Late {
            corpus,
            docs,
            options,
        } => {
            for slice in docs.chunks(LATE_SLICE) {
                if stale(poll) {
                    return Ok(None);
                }
                let prefixes: Vec<Vec<&str>> = slice
                    .iter()
                    .map(|(_, _, ps)| ps.iter().map(String::as_str).collect())
                    .collect();
                let late_docs: Vec<late::LateDocument<'_>> = slice
                    .iter()
                    .zip(&prefixes)
                    .map(|((d, ranges, _), ps)| late::LateDocument {
                        text: &corpus.docs[*d].text,
                        chunks: ranges,
                        prefixes: ps,
                        hole: None,
                    })
                    .collect();
                let (v, report) = late::embed_chunks(
                    embedder.as_ref(),
                    cache,
                    &late_docs,
                    options,
                    REF_BATCH_TOKENS,
                    &mut |_, _| {},
                    &AtomicBool::new(false),
                )?;
                embedded += report.embedded;
                vectors.extend(v.into_iter().flatten());
                let _ = reports.send(Report::Progress {
                    id: job.id,
                    done: vectors.len(),
                    total,
                });
            }
        }
    }
    Ok(Some(Report::Done {
        id: job.id,
        encoding: job.encoding,
        vectors,
        embedded,
    }))
}

/// Judge a plan by its probes with the library's probe scoring (the encoder of the plan's
/// encoding embeds the holed chunks).
fn judge_plan(
    judge: &Judge,
    factory: &mut EmbedderFactory,
    embedders: &mut HashMap<Encoding, Arc<dyn Embedder>>,
    cache: Option<&VectorCache>,
) -> anyhow::Result<Report> {
    let embedder = embedder_for(Encoding::of(&judge.plan.profile), factory, embedders)?;
    let eval = probes::score(
        &judge.corpus,
        &judge.set,
        &judge.probe_vectors,
        &judge.plan,
        &judge.chunks,
        &judge.vectors,
        embedder.as_ref(),
        cache,
    )?;
    Ok(Report::Judged {
        id: judge.id,
        eval: Box::new(eval),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use kerf::embed::HashEmbedder;
    use kerf::profile::{Precision, TokenPooling};

    fn hash_factory() -> EmbedderFactory {
        Box::new(|_: Encoding| {
            Ok::<_, anyhow::Error>(Arc::new(HashEmbedder { dim: 16 }) as Arc<dyn Embedder>)
        })
    }

    #[test]
    fn embeds_and_skips_stale_jobs() {
        let w = Worker::spawn(hash_factory(), None);
        let job = |id, generation| Job {
            id,
            generation,
            encoding: Encoding {
                pooling: TokenPooling::Mean,
                precision: Precision::F32,
            },
            input: Input::Texts {
                texts: vec!["a b".into(), "c".into()],
                prefixes: vec![String::new(); 2],
                tokens: vec![4, 3],
            },
        };
        // Generation 2 arrives before the generation-1 job starts only if sent first.
        w.requests.send(Request::Generation(2)).unwrap();
        w.requests.send(Request::Embed(job(1, Some(1)))).unwrap();
        w.requests.send(Request::Embed(job(2, Some(2)))).unwrap();
        let mut got = Vec::new();
        while got.len() < 2 {
            match w.reports.recv().unwrap() {
                Report::Progress { .. } => {}
                r => got.push(r),
            }
        }
        assert_eq!(got[0], Report::Skipped { id: 1 });
        match &got[1] {
            Report::Done { id, vectors, .. } => {
                assert_eq!(*id, 2);
                let direct = HashEmbedder { dim: 16 }.embed(&["a b", "c"]).unwrap();
                assert_eq!(vectors, &direct);
            }
            other => panic!("expected Done, got {other:?}"),
        }
        w.shutdown();
    }
}
