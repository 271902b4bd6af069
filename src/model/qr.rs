//! Dense linear algebra for the model engine: Householder QR (Householder 1958, "Unitary
//! triangularization of a nonsymmetric matrix", J. ACM 5), row-chunked accumulation of the
//! triangular factor of the augmented design [X | y], and triangular solves.
//!
//! Everything works on small column-major matrices whose sizes the engine controls; no
//! function here can be reached with sizes taken from user data without validation.

/// Number of data rows triangularised at a time. Chunk boundaries are fixed so that the
/// result does not depend on how the caller schedules chunks; a later parallel version can
/// triangularise chunks independently and merge them in this same order.
pub(crate) const CHUNK_ROWS: usize = 4096;

/// Relative tolerance for declaring a column aliased: a column whose part orthogonal to the
/// columns kept before it has norm below `ALIAS_TOL` times the column's own norm (columns are
/// centred and scaled to unit root-mean-square, so this is 1e-10 relative to sqrt(n)) is
/// treated as a linear combination of them. Rounding noise in the residual of an exactly
/// dependent column is of order 1e-15 * sqrt(n) * condition, far below; genuinely distinct but
/// highly collinear columns (correlations up to 1 - 1e-18) stay above it.
pub(crate) const ALIAS_TOL: f64 = 1e-10;

/// A column-major dense matrix.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Mat {
    pub rows: usize,
    pub cols: usize,
    pub data: Vec<f64>,
}

impl Mat {
    /// An all-zero matrix.
    pub fn zeros(rows: usize, cols: usize) -> Mat {
        Mat {
            rows,
            cols,
            data: vec![0.0; rows * cols],
        }
    }
    /// Entry (i, j); 0 outside the matrix.
    pub fn get(&self, i: usize, j: usize) -> f64 {
        if i < self.rows && j < self.cols {
            self.data.get(j * self.rows + i).copied().unwrap_or(0.0)
        } else {
            0.0
        }
    }
    /// Set entry (i, j); ignored outside the matrix.
    pub fn set(&mut self, i: usize, j: usize, v: f64) {
        if i < self.rows && j < self.cols {
            if let Some(x) = self.data.get_mut(j * self.rows + i) {
                *x = v;
            }
        }
    }
    /// Column j as a slice (empty outside the matrix).
    pub fn col(&self, j: usize) -> &[f64] {
        if j < self.cols {
            &self.data[j * self.rows..(j + 1) * self.rows]
        } else {
            &[]
        }
    }
}

fn norm2(x: &[f64]) -> f64 {
    dot(x, x).sqrt()
}

/// Number of running sums in [`dot`] and [`sum_of`]. A single running sum waits on the previous
/// addition at every step; eight independent ones fill the processor's vector units.
const LANES: usize = 8;

/// The dot product of the common length of `a` and `b`, summed in [`LANES`] running sums
/// (element i goes to sum i mod LANES), which are then added in a fixed tree: the same
/// order for the same input whatever the thread count, and no less accurate than summing
/// in row order.
pub(crate) fn dot(a: &[f64], b: &[f64]) -> f64 {
    let n = a.len().min(b.len());
    let (a8, b8) = (a[..n].chunks_exact(LANES), b[..n].chunks_exact(LANES));
    let tail: f64 = a8
        .remainder()
        .iter()
        .zip(b8.remainder())
        .map(|(x, y)| x * y)
        .sum();
    let mut acc = [0.0f64; LANES];
    for (x, y) in a8.zip(b8) {
        for ((s, p), q) in acc.iter_mut().zip(x).zip(y) {
            *s += p * q;
        }
    }
    reduce(acc) + tail
}

/// The sum of `f(v)` over `x`, in the order of [`dot`].
#[inline]
pub(crate) fn sum_of(x: &[f64], f: impl Fn(f64) -> f64) -> f64 {
    let x8 = x.chunks_exact(LANES);
    let tail: f64 = x8.remainder().iter().map(|&v| f(v)).sum();
    let mut acc = [0.0f64; LANES];
    for v in x8 {
        for (s, &p) in acc.iter_mut().zip(v) {
            *s += f(p);
        }
    }
    reduce(acc) + tail
}

/// True when every value of `x` is finite: a sum of v * 0 is NaN exactly when some v is
/// infinite or NaN, and it runs in lanes where a search would go one value at a time.
pub(crate) fn all_finite(x: &[f64]) -> bool {
    !sum_of(x, |v| v * 0.0).is_nan()
}

fn reduce(acc: [f64; LANES]) -> f64 {
    ((acc[0] + acc[4]) + (acc[1] + acc[5])) + ((acc[2] + acc[6]) + (acc[3] + acc[7]))
}

/// Result of a column-by-column Householder triangularisation.
#[derive(Debug, Clone)]
pub(crate) struct Tri {
    /// Columns (of the input) that were kept, in order.
    pub kept: Vec<usize>,
    /// Upper-triangular factor of the kept columns: kept.len() x kept.len().
    pub r: Mat,
}

/// Householder QR of `a` in place, column by column (Golub & Van Loan, "Matrix Computations",
/// algorithm 5.2.1), without pivoting. With `skip_tol = Some(tol)`, a column whose remaining
/// part (below the current row) has norm <= tol * (its original norm) is skipped (aliased)
/// and the next column is reduced at the same row. With `keep_last`, the last column is
/// never skipped (used for the response column of an augmented matrix, whose diagonal is
/// then the root residual sum of squares). Diagonal entries are made non-negative so the
/// factor is unique for a full-rank input.
pub(crate) fn triangularize(a: &mut Mat, skip_tol: Option<f64>, keep_last: bool) -> Tri {
    let m = a.rows;
    let n = a.cols;
    // The original norms only matter for the aliasing test.
    let orig: Vec<f64> = match skip_tol {
        Some(_) => (0..n).map(|j| norm2(a.col(j))).collect(),
        None => Vec::new(),
    };
    let mut kept = Vec::new();
    let mut r = 0usize;
    for j in 0..n {
        let is_last = j + 1 == n;
        let sub = if r < m {
            norm2(&a.data[j * m + r..(j + 1) * m])
        } else {
            0.0
        };
        let forced = keep_last && is_last;
        if let Some(tol) = skip_tol {
            let o = orig.get(j).copied().unwrap_or(0.0);
            if !forced && (o == 0.0 || sub <= tol * o || !sub.is_finite()) {
                continue;
            }
        }
        if r >= m {
            if forced {
                kept.push(j);
            }
            continue;
        }
        reflect(a, r, j, sub);
        kept.push(j);
        r += 1;
    }
    // Compact factor of the kept columns, with non-negative diagonal.
    let k = kept.len();
    let mut rm = Mat::zeros(k, k);
    for (c, &j) in kept.iter().enumerate() {
        for i in 0..=c {
            rm.set(i, c, a.get(i, j));
        }
    }
    for i in 0..k {
        if rm.get(i, i) < 0.0 {
            for c in i..k {
                let v = rm.get(i, c);
                rm.set(i, c, -v);
            }
        }
    }
    Tri { kept, r: rm }
}

/// Apply the Householder reflection that zeroes column j below row r (whose norm from row r
/// down is `norm`) to columns j.. of `a`.
fn reflect(a: &mut Mat, r: usize, j: usize, norm: f64) {
    let m = a.rows;
    if norm == 0.0 || !norm.is_finite() || r >= m {
        return;
    }
    let x0 = a.get(r, j);
    let alpha = if x0 >= 0.0 { -norm } else { norm };
    let vtv = 2.0 * norm * (norm + x0.abs());
    if vtv == 0.0 {
        return;
    }
    // Column j from row r down holds the Householder vector v while the later columns are
    // reflected, then becomes (alpha, 0, ..., 0).
    let (head, later) = a.data.split_at_mut((j + 1) * m);
    let v = &mut head[j * m + r..];
    v[0] = x0 - alpha;
    for colk in later.chunks_exact_mut(m) {
        let colk = &mut colk[r..];
        let f = 2.0 * dot(v, colk) / vtv;
        for (q, p) in colk.iter_mut().zip(v.iter()) {
            *q -= f * p;
        }
    }
    v[0] = alpha;
    v[1..].fill(0.0);
}

/// Accumulates the upper-triangular factor R of a tall matrix delivered one row at a time,
/// in chunks of [`CHUNK_ROWS`] rows: each full chunk is stacked under the running R and the
/// stack is re-triangularised (the "updating" form of QR; Golub & Van Loan, section 6.5).
/// Memory is O(CHUNK_ROWS * cols) whatever the number of rows.
pub(crate) struct RAccumulator {
    cols: usize,
    chunk: usize,
    r: Mat,
    buf: Vec<f64>,
    buf_rows: usize,
}

impl RAccumulator {
    /// A new accumulator for rows of `cols` entries, with the given chunk size (>= 1).
    pub fn new(cols: usize, chunk: usize) -> RAccumulator {
        RAccumulator {
            cols,
            chunk: chunk.max(1),
            r: Mat::zeros(cols, cols),
            buf: Vec::with_capacity(chunk.clamp(1, CHUNK_ROWS) * cols),
            buf_rows: 0,
        }
    }
    /// Add one row (row-major, `cols` entries; shorter rows are padded with 0).
    pub fn push(&mut self, row: &[f64]) {
        for j in 0..self.cols {
            self.buf.push(row.get(j).copied().unwrap_or(0.0));
        }
        self.buf_rows += 1;
        if self.buf_rows >= self.chunk {
            self.flush();
        }
    }
    fn flush(&mut self) {
        if self.buf_rows == 0 {
            return;
        }
        let c = self.cols;
        let m = c + self.buf_rows;
        let mut a = Mat::zeros(m, c);
        for j in 0..c {
            for i in 0..c {
                a.set(i, j, self.r.get(i, j));
            }
            for i in 0..self.buf_rows {
                a.set(c + i, j, self.buf.get(i * c + j).copied().unwrap_or(0.0));
            }
        }
        let t = triangularize(&mut a, None, false);
        self.r = t.r;
        self.buf.clear();
        self.buf_rows = 0;
    }
    /// The final triangular factor (cols x cols, non-negative diagonal).
    pub fn finish(mut self) -> Mat {
        self.flush();
        self.r
    }
}

/// The triangular factor (`cols` x `cols`, non-negative diagonal) of a block of rows held
/// column-major in `a` with `cols` leading rows of zeros, which make the result square even
/// for a block shorter than it is wide.
pub(crate) fn block_factor(a: &mut Mat) -> Mat {
    let c = a.cols;
    let t = triangularize(a, None, false);
    if t.r.rows == c {
        t.r
    } else {
        // Fewer rows than columns cannot happen with the leading zero rows; keep a square
        // factor anyway.
        let mut r = Mat::zeros(c, c);
        for (k, &j) in t.kept.iter().enumerate() {
            for i in 0..=k {
                r.set(i, j, t.r.get(i, k));
            }
        }
        r
    }
}

/// The triangular factor of two stacked triangular factors `[a; b]` (both `c` x `c`): the
/// factor of the union of the rows behind them.
pub(crate) fn merge_factors(a: &Mat, b: &Mat) -> Mat {
    let c = a.cols;
    let mut s = Mat::zeros(2 * c, c);
    for j in 0..c {
        for i in 0..=j {
            s.set(i, j, a.get(i, j));
            s.set(c + i, j, b.get(i, j));
        }
    }
    block_factor(&mut s)
}

/// Solve R x = b for upper-triangular R (back substitution). Zero pivots give 0 entries
/// (callers only pass factors of kept, non-aliased columns).
pub(crate) fn solve_upper(r: &Mat, b: &[f64]) -> Vec<f64> {
    let n = r.cols.min(b.len());
    let mut x = vec![0.0; n];
    for i in (0..n).rev() {
        let mut s = b[i];
        for (k, xk) in x.iter().enumerate().skip(i + 1) {
            s -= r.get(i, k) * xk;
        }
        let d = r.get(i, i);
        x[i] = if d != 0.0 { s / d } else { 0.0 };
    }
    x
}

/// Solve R' x = b for upper-triangular R (forward substitution on the transpose).
pub(crate) fn solve_upper_transpose(r: &Mat, b: &[f64]) -> Vec<f64> {
    let mut x = vec![0.0; r.cols.min(b.len())];
    solve_upper_transpose_into(r, b, &mut x);
    x
}

/// [`solve_upper_transpose`] into `x` (whose length sets how many entries are solved for),
/// without allocating.
pub(crate) fn solve_upper_transpose_into(r: &Mat, b: &[f64], x: &mut [f64]) {
    let n = r.cols.min(b.len()).min(x.len());
    for i in 0..n {
        // Column i of R holds the coefficients of row i of R'.
        let ri = r.col(i);
        let mut s = b[i];
        for (rk, xk) in ri.iter().zip(x.iter()).take(i) {
            s -= rk * xk;
        }
        let d = ri.get(i).copied().unwrap_or(0.0);
        x[i] = if d != 0.0 { s / d } else { 0.0 };
    }
}
