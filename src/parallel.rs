//! How covey uses the machine's cores: the one place that reads `COVEY_THREADS`.
//!
//! Work on many rows is split into blocks whose boundaries depend only on the input (a fixed
//! number of rows per block), each block is computed on its own, and the partial results are
//! combined in block order. So every output byte is the same whatever the number of threads;
//! threads only change how soon it is ready.

/// Environment variable that sets the number of worker threads (a whole number >= 1). Unset,
/// 0, empty or unreadable: one per core.
pub const THREADS_VAR: &str = "COVEY_THREADS";

/// Sets up the thread pool from [`THREADS_VAR`]; call once, before any parallel work. A value
/// that is not a whole number >= 1 is ignored (the default is kept), since the number of
/// threads cannot change any result.
pub fn configure() {
    let wanted = std::env::var(THREADS_VAR)
        .ok()
        .and_then(|v| v.trim().parse::<usize>().ok())
        .filter(|&n| n >= 1);
    if let Some(n) = wanted {
        // Fails only when a pool was already built, which leaves that pool in place.
        let _ = rayon::ThreadPoolBuilder::new()
            .num_threads(n)
            .build_global();
    }
}

/// Rows per block in [`row_blocks`].
pub const BLOCK_ROWS: usize = 1 << 16;

/// The rows 0..n in consecutive blocks of [`BLOCK_ROWS`] (the last may be shorter; none when
/// n is 0): boundaries that depend only on n, for [`map`].
pub fn row_blocks(n: usize) -> Vec<std::ops::Range<usize>> {
    (0..n)
        .step_by(BLOCK_ROWS)
        .map(|a| a..(a + BLOCK_ROWS).min(n))
        .collect()
}

/// `f` applied to every item, results in item order: on the thread pool when there is more
/// than one item, else on this thread (so small inputs never start the pool).
pub fn map<T: Sync, R: Send>(items: &[T], f: impl Fn(&T) -> R + Sync + Send) -> Vec<R> {
    use rayon::prelude::*;
    if items.len() > 1 {
        items.par_iter().map(f).collect()
    } else {
        items.iter().map(f).collect()
    }
}

/// `(a(), b())`, side by side on the thread pool when `parallel`, else one after the other on
/// this thread (so small inputs never start the pool).
pub fn join_if<A: Send, B: Send>(
    parallel: bool,
    a: impl FnOnce() -> A + Send,
    b: impl FnOnce() -> B + Send,
) -> (A, B) {
    if parallel {
        rayon::join(a, b)
    } else {
        (a(), b())
    }
}
