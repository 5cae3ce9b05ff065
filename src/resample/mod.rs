//! Reproducible resampling: random streams, fixed-size chunks run in parallel, and
//! Monte Carlo p-values with their error (METHODS §3.3 and §10).
//!
//! Every resample's random numbers depend only on (seed, purpose, term, chunk index)
//! and the fixed chunk size, never on thread count or scheduling, so the same seed
//! gives bit-identical results on 1 or 16 threads. This module knows no engine's
//! statistic: engines pass closures.

pub mod interval;
pub mod mc;
pub mod permute;
pub mod progress;
pub mod stream;
pub mod tail;

use rayon::prelude::*;
pub use stream::{Purpose, Stream, StreamKey, CHUNK};

/// One chunk of resamples: the stream of chunk `chunk` draws resamples `first..hi` in
/// order; only `lo..hi` are wanted (resamples before `lo` were used in an earlier pass
/// and must still be drawn, to keep every later resample the same).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ChunkTask {
    /// Chunk index ⌊b/CHUNK⌋.
    pub chunk: u64,
    /// First resample of the chunk (chunk·CHUNK).
    pub first: u64,
    /// First wanted resample.
    pub lo: u64,
    /// One past the last wanted resample.
    pub hi: u64,
}

impl ChunkTask {
    /// The stream for this chunk.
    pub fn stream(&self, seed: u64, purpose: Purpose, term: u64, aux: u64) -> Stream {
        Stream::new(seed, StreamKey { purpose, term, chunk: self.chunk, aux })
    }
}

/// The chunks covering resamples `start..end`.
pub fn chunk_tasks(start: u64, end: u64) -> Vec<ChunkTask> {
    if end <= start {
        return Vec::new();
    }
    (start / CHUNK..end.div_ceil(CHUNK))
        .map(|chunk| {
            let first = chunk * CHUNK;
            ChunkTask { chunk, first, lo: start.max(first), hi: end.min(first + CHUNK) }
        })
        .collect()
}

/// Runs `f` on every chunk of `start..end` in parallel and returns the results in chunk
/// order. Reductions over the results must be done by the caller, sequentially in that
/// order (integer counts are order-free; floating sums are not).
pub fn par_chunks<T, F>(start: u64, end: u64, f: F) -> Vec<T>
where
    T: Send,
    F: Fn(ChunkTask) -> T + Sync + Send,
{
    chunk_tasks(start, end).into_par_iter().map(f).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn chunks_cover_a_range_exactly_once() {
        let t = chunk_tasks(4999, 9999);
        assert_eq!(t.first().unwrap(), &ChunkTask { chunk: 19, first: 4864, lo: 4999, hi: 5120 });
        assert_eq!(t.last().unwrap().hi, 9999);
        let total: u64 = t.iter().map(|c| c.hi - c.lo).sum();
        assert_eq!(total, 5000);
        assert!(chunk_tasks(5, 5).is_empty());
    }

    #[test]
    fn parallel_results_do_not_depend_on_thread_count() {
        // Property: the same seed gives the same draws on 1 and 4 threads.
        let draw = || {
            par_chunks(0, 1000, |task| {
                let mut s = task.stream(7, Purpose::Permutation, 0, 0);
                (task.first..task.hi).map(|_| s.bounded(1000)).skip((task.lo - task.first) as usize).collect::<Vec<_>>()
            })
            .concat()
        };
        let one = rayon::ThreadPoolBuilder::new().num_threads(1).build().unwrap().install(draw);
        let four = rayon::ThreadPoolBuilder::new().num_threads(4).build().unwrap().install(draw);
        assert_eq!(one, four);
        assert_eq!(one.len(), 1000);
    }
}
