//! The embedding worker: a thread that embeds chunk and reference texts through the SQLite
//! vector cache, so the UI never waits on the encoder.
//!
//! The UI sends [`Job`]s and receives [`Report`]s over `std::sync::mpsc`. Jobs that belong to a
//! plan the user has already moved past are dropped before they start (reported as
//! [`Report::Skipped`]), so a quick run of key presses does not queue minutes of encoder work.
use std::collections::HashMap;
use std::path::PathBuf;
use std::sync::mpsc::{self, Receiver, Sender};
use std::sync::Arc;
use std::thread::JoinHandle;

use kerf::cache::{self, VectorCache};
use kerf::embed::Embedder;
use kerf::job;
pub use kerf::profile::Encoding;

/// Cache key of one input: sha256 of prefix and text (see [`kerf::cache::text_key`]).
pub type Key = [u8; 32];

/// Texts to embed under one encoding and prefix.
#[derive(Debug, Clone, PartialEq)]
pub struct Job {
    /// Identifier the reports carry.
    pub id: u64,
    /// Plan generation the job serves; `None` for jobs that never go stale (references).
    pub generation: Option<u64>,
    /// Token pooling and precision (select the encoder).
    pub encoding: Encoding,
    /// Text put before every input.
    pub prefix: String,
    /// The texts (without the prefix).
    pub texts: Vec<String>,
    /// Encoder-input tokens of each text (prefix and specials included), for batching.
    pub tokens: Vec<usize>,
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
    /// A job is finished: one vector per text, in order.
    Done {
        /// Job id.
        id: u64,
        /// Encoding the vectors were made with.
        encoding: Encoding,
        /// Keys of the texts.
        keys: Vec<Key>,
        /// The vectors.
        vectors: Vec<Vec<f32>>,
        /// Inputs that were not in the cache.
        embedded: usize,
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
    let mut queue: std::collections::VecDeque<Job> = Default::default();
    loop {
        // Take everything waiting, so stale jobs are seen before any of them starts.
        if queue.is_empty() {
            match requests.recv() {
                Ok(r) => absorb(r, &mut queue, &mut generation),
                Err(_) => return,
            }
        }
        while let Ok(r) = requests.try_recv() {
            absorb(r, &mut queue, &mut generation);
        }
        let Some(job) = queue.pop_front() else {
            continue;
        };
        if job.generation.is_some_and(|g| g < generation) {
            if reports.send(Report::Skipped { id: job.id }).is_err() {
                return;
            }
            continue;
        }
        let report = match embed_job(
            &job,
            &mut factory,
            &mut embedders,
            cache.as_ref(),
            &reports,
            &mut |generation_now| {
                while let Ok(r) = requests.try_recv() {
                    absorb(r, &mut queue, &mut generation);
                }
                *generation_now = generation;
            },
        ) {
            Ok(Some(r)) => r,
            Ok(None) => Report::Skipped { id: job.id },
            Err(e) => Report::Failed {
                id: job.id,
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

fn absorb(r: Request, queue: &mut std::collections::VecDeque<Job>, generation: &mut u64) {
    match r {
        Request::Embed(j) => queue.push_back(j),
        Request::Generation(g) => *generation = (*generation).max(g),
    }
}

/// Texts embedded between two looks at the request channel: small enough that a newer plan
/// stops a stale job within a second or two on CPU, large enough to batch well.
const SLICE: usize = 16;

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
    let embedder = match embedders.get(&job.encoding) {
        Some(e) => e.clone(),
        None => {
            let e = factory(job.encoding)?;
            embedders.insert(job.encoding, e.clone());
            e
        }
    };
    let inputs: Vec<(&str, usize)> = job
        .texts
        .iter()
        .map(String::as_str)
        .zip(job.tokens.iter().copied().chain(std::iter::repeat(0)))
        .collect();
    let mut vectors = Vec::with_capacity(inputs.len());
    let mut embedded = 0;
    for slice in inputs.chunks(SLICE) {
        let mut generation = 0;
        poll(&mut generation);
        if job.generation.is_some_and(|g| g < generation) {
            return Ok(None);
        }
        let (v, report) = job::embed_cached(
            embedder.as_ref(),
            cache,
            &job.prefix,
            slice,
            kerf::compare::engine::REF_BATCH_TOKENS,
            &mut |_, _| {},
        )?;
        embedded += report.embedded;
        vectors.extend(v);
        let _ = reports.send(Report::Progress {
            id: job.id,
            done: vectors.len(),
            total: inputs.len(),
        });
    }
    Ok(Some(Report::Done {
        id: job.id,
        encoding: job.encoding,
        keys: job
            .texts
            .iter()
            .map(|t| cache::text_key(&job.prefix, t))
            .collect(),
        vectors,
        embedded,
    }))
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
            prefix: String::new(),
            texts: vec!["a b".into(), "c".into()],
            tokens: vec![4, 3],
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
            Report::Done {
                id, vectors, keys, ..
            } => {
                assert_eq!(*id, 2);
                assert_eq!(vectors.len(), 2);
                assert_eq!(keys[0], cache::text_key("", "a b"));
            }
            other => panic!("expected Done, got {other:?}"),
        }
        w.shutdown();
    }
}
