//! The parallel, ordered fold over fixed chunks of frames that every pass of
//! `reduce_run` uses (`fold_chunks`).
//!
//! Owns: the worker threads, the bound on chunks taken and not yet merged,
//! and the merge in chunk order. Does not own what a chunk computes.

use std::collections::BTreeMap;
use std::sync::{mpsc, Condvar, Mutex, MutexGuard};

use super::CHUNK;
use crate::error::Result;

/// Runs `per_chunk` over fixed chunks of `items` on `jobs` worker threads,
/// each worker with its own state `W` (made once per worker, handed to
/// every chunk it takes: the gradient engine, `derive::Workspace`), and
/// folds the results with `merge` in chunk order, on the calling thread,
/// as soon as each next result is there: workers never wait for a batch to
/// finish, only when `2 × jobs` chunks are taken and not yet merged (the
/// memory bound). The first error in chunk order is returned, as a
/// sequential loop would return it: chunks are taken in order, so every
/// chunk before a failing one has been taken and is reduced; after a
/// failure no new chunk is started.
pub(super) fn fold_chunks<T: Sync, A: Send, W: Default>(
    jobs: usize,
    items: &[T],
    per_chunk: impl Fn(&mut W, &[T]) -> Result<A> + Sync,
    merge: impl FnMut(A),
) -> Result<()> {
    let chunks: Vec<&[T]> = items.chunks(CHUNK).collect();
    let n = chunks.len();
    let jobs = jobs.clamp(1, n.max(1));
    let queue = Queue::new(n, 2 * jobs);
    let (tx, rx) = mpsc::channel::<(usize, Result<A>)>();
    std::thread::scope(|s| {
        for _ in 0..jobs {
            let tx = tx.clone();
            let (queue, chunks, per_chunk) = (&queue, &chunks, &per_chunk);
            s.spawn(move || work(queue, chunks, per_chunk, tx));
        }
        drop(tx);
        merge_in_order(&queue, rx, merge)
    })
}

/// The chunks taken so far, merged so far, and whether to stop.
struct Taken {
    next: usize,
    merged: usize,
    stop: bool,
}

/// Hands out chunk numbers in order to the workers, at most `window`
/// ahead of the last merged chunk.
struct Queue {
    taken: Mutex<Taken>,
    wake: Condvar,
    /// The number of chunks.
    n: usize,
    /// The most chunks taken and not yet merged.
    window: usize,
}

impl Queue {
    /// A queue of `n` chunks, nothing taken.
    fn new(n: usize, window: usize) -> Queue {
        Queue {
            taken: Mutex::new(Taken {
                next: 0,
                merged: 0,
                stop: false,
            }),
            wake: Condvar::new(),
            n,
            window,
        }
    }

    /// The lock on the counters (a poisoned lock is taken over).
    fn lock(&self) -> MutexGuard<'_, Taken> {
        self.taken.lock().unwrap_or_else(|e| e.into_inner())
    }

    /// The next chunk to reduce, waiting while the window is full; `None`
    /// when every chunk is taken or the fold stops.
    fn take(&self) -> Option<usize> {
        let mut t = self.lock();
        while !t.stop && t.next < self.n && t.next >= t.merged + self.window {
            t = self.wake.wait(t).unwrap_or_else(|e| e.into_inner());
        }
        if t.stop || t.next >= self.n {
            return None;
        }
        t.next += 1;
        Some(t.next - 1)
    }

    /// Tells every worker to take no new chunk.
    fn stop(&self) {
        self.lock().stop = true;
        self.wake.notify_all();
    }

    /// Records that the chunks before `next` are merged (frees the window).
    fn set_merged(&self, next: usize) {
        self.lock().merged = next;
        self.wake.notify_all();
    }
}

/// Stops the other workers when a worker unwinds (a panic), so that
/// none waits for a result that will never be merged.
struct StopOnPanic<'a>(&'a Queue);

impl Drop for StopOnPanic<'_> {
    fn drop(&mut self) {
        if std::thread::panicking() {
            if let Ok(mut t) = self.0.taken.lock() {
                t.stop = true;
            }
            self.0.wake.notify_all();
        }
    }
}

/// One worker: takes chunks in order, reduces each and sends the result,
/// until none is left, a chunk fails or the merging side has gone.
fn work<T, A, W: Default>(
    queue: &Queue,
    chunks: &[&[T]],
    per_chunk: &impl Fn(&mut W, &[T]) -> Result<A>,
    tx: mpsc::Sender<(usize, Result<A>)>,
) {
    let _guard = StopOnPanic(queue);
    let mut state = W::default();
    while let Some(c) = queue.take() {
        let r = per_chunk(&mut state, chunks[c]);
        let failed = r.is_err();
        if tx.send((c, r)).is_err() || failed {
            queue.stop();
            break;
        }
    }
}

/// Merges the workers' results in chunk order as they arrive; the first
/// error in chunk order stops the fold and is returned.
fn merge_in_order<A>(
    queue: &Queue,
    rx: mpsc::Receiver<(usize, Result<A>)>,
    mut merge: impl FnMut(A),
) -> Result<()> {
    let mut pending: BTreeMap<usize, Result<A>> = BTreeMap::new();
    let mut next = 0;
    for (c, r) in rx.iter() {
        pending.insert(c, r);
        while let Some(r) = pending.remove(&next) {
            match r {
                Ok(a) => merge(a),
                Err(e) => {
                    queue.stop();
                    return Err(e);
                }
            }
            next += 1;
            queue.set_merged(next);
        }
    }
    // every chunk merged, or a worker panicked (the scope re-raises it)
    Ok(())
}
