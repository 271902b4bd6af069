//! How covey uses the machine's cores: the one place that reads `COVEY_THREADS`.
//!
//! Work on many rows is split into blocks whose boundaries depend only on the input (a fixed
//! number of rows per block), each block is computed on its own, and the partial results are
//! combined in block order. So every output byte is the same whatever the number of threads;
//! threads only change how soon it is ready.

/// Environment variable that sets the number of worker threads: a whole number from 1 up; 0,
/// empty or unset for one per core. More threads than cores are not started (they could not
/// run at once, and each costs memory and a start), and anything else is an error.
pub const THREADS_VAR: &str = "COVEY_THREADS";

/// The number of threads to run for the value of [`THREADS_VAR`] (`None` when unset) on a
/// machine with `cores` cores, or what is wrong with the value.
///
/// ```
/// use covey::parallel::threads_for;
/// assert_eq!(threads_for(None, 4), Ok(4));
/// assert_eq!(threads_for(Some("2"), 4), Ok(2));
/// assert_eq!(threads_for(Some("10000"), 4), Ok(4));
/// assert!(threads_for(Some("two"), 4).is_err());
/// ```
pub fn threads_for(value: Option<&str>, cores: usize) -> Result<usize, String> {
    let cores = cores.max(1);
    let Some(value) = value.map(str::trim).filter(|v| !v.is_empty()) else {
        return Ok(cores);
    };
    // Digits only: no sign, no decimals, no spaces inside.
    let wanted: Option<u64> = if value.bytes().all(|b| b.is_ascii_digit()) {
        // Digits beyond u64 are still a (very large) whole number: capped below.
        Some(value.parse().unwrap_or(u64::MAX))
    } else {
        None
    };
    match wanted {
        Some(0) => Ok(cores),
        Some(n) => Ok(usize::try_from(n).map_or(cores, |n| n.min(cores))),
        None => Err(format!(
            "{THREADS_VAR}={value:?} is not a number of threads; set it to a whole number (1 for \
             one thread, up to {cores}, the cores of this machine), or to 0 or nothing for one \
             thread per core"
        )),
    }
}

/// Sets up the thread pool from [`THREADS_VAR`] (see [`threads_for`]); call once, before any
/// parallel work. The number of threads cannot change any result, only how soon it is ready.
///
/// Errors: a value of [`THREADS_VAR`] that is not a number of threads.
pub fn configure() -> Result<(), String> {
    let value = std::env::var_os(THREADS_VAR);
    let text = match &value {
        None => None,
        Some(v) => Some(v.to_str().ok_or_else(|| {
            format!("{THREADS_VAR} is not readable text; set it to a whole number of threads")
        })?),
    };
    let cores = std::thread::available_parallelism().map_or(1, usize::from);
    let n = threads_for(text, cores)?;
    // Fails only when a pool was already built, which leaves that pool in place.
    let _ = rayon::ThreadPoolBuilder::new()
        .num_threads(n)
        .build_global();
    Ok(())
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
