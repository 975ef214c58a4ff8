#![warn(missing_docs)]
//! kerf: plan how long documents are cut, embedded and pooled for windowed transformer encoders.
//!
//! One module per pipeline stage: [`model`] reads a model folder's limits, [`tokens`] counts
//! tokens as the encoder sees them, [`segment`] finds sentences and paragraphs, [`split`] cuts
//! chunks that fit, [`survey`] takes the census, [`profile`] and [`plan`] hold the plan,
//! [`pool`] turns chunk vectors into document vectors or scores. The library never touches the
//! terminal; the binary in `main.rs` and the `cli` module are thin.
pub mod cache;
pub mod compare;
pub mod corpus;
pub mod embed;
pub mod extract;
pub mod home;
pub mod job;
pub mod late;
pub mod model;
pub mod plan;
pub mod pool;
pub mod prefix;
pub mod profile;
pub mod records;
pub mod segment;
pub mod shard;
pub mod split;
pub mod store;
pub mod survey;
pub mod tokens;

use rayon::prelude::*;

/// Run `work` over items in parallel, a batch at a time, and hand results to `sink` in input
/// order. Memory holds one batch, so a corpus of any size streams through.
pub fn process_in_order<T, R, E, I, W, S>(
    items: I,
    batch_size: usize,
    work: W,
    mut sink: S,
) -> Result<(), E>
where
    I: Iterator<Item = Result<T, E>>,
    T: Send + Sync,
    R: Send,
    E: Send,
    W: Fn(&T) -> Result<R, E> + Sync,
    S: FnMut(T, R) -> Result<(), E>,
{
    let mut items = items.peekable();
    let mut batch: Vec<T> = Vec::with_capacity(batch_size);
    while items.peek().is_some() {
        batch.clear();
        let mut pending_err = None;
        for item in items.by_ref() {
            match item {
                Ok(t) => batch.push(t),
                Err(e) => {
                    pending_err = Some(e);
                    break;
                }
            }
            if batch.len() == batch_size {
                break;
            }
        }
        let results: Vec<Result<R, E>> = batch.par_iter().map(&work).collect();
        for (t, r) in batch.drain(..).zip(results) {
            sink(t, r?)?;
        }
        if let Some(e) = pending_err {
            return Err(e);
        }
    }
    Ok(())
}
