//! Sparse symmetric positive-definite solves (faer's sparse Cholesky).
//!
//! The solver sees only an assembled system: a [`SymmetricPattern`] (which entries exist),
//! a vector of values for those entries, and right-hand sides. It knows nothing of chips.
//!
//! The work is split as in faer: [`SymbolicCholesky`] (fill-reducing ordering and the
//! structure of L) depends on the pattern only and is computed once; [`Cholesky`] (the
//! numeric factor) is recomputed whenever the values change, e.g. in a sweep over channel
//! widths, without repeating the analysis.

use faer::dyn_stack::{MemBuffer, MemStack, StackReq};
use faer::linalg::cholesky::llt::factor::LltRegularization;
use faer::sparse::linalg::cholesky::{
    factorize_symbolic_cholesky, CholeskySymbolicParams, LltRef, SymbolicCholesky as FaerSymbolic,
    SymmetricOrdering,
};
use faer::sparse::{SparseColMatRef, SymbolicSparseColMatRef};
use faer::{Conj, MatMut, Par, Side};

/// Failure of the linear algebra.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum SolverError {
    #[error("the symbolic analysis of the {n}×{n} system failed: {reason}")]
    Symbolic { n: usize, reason: String },
    #[error(
        "the conductance matrix is not numerically positive definite (pivot {pivot} of {n}); \
         channel resistances may span too many orders of magnitude"
    )]
    NotPositiveDefinite { pivot: usize, n: usize },
    #[error("out of memory for a workspace of the {n}×{n} system")]
    OutOfMemory { n: usize },
}

/// How many threads the factorisation may use.
///
/// Measured by `cargo run --release --example scale` on the 2-core reference machine: the
/// sequential factorisation is faster than the threaded one (see README, Performance), so
/// sequential is the default.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Parallelism {
    #[default]
    Sequential,
    /// Use faer's rayon backend with this many threads.
    Threads(usize),
}

impl Parallelism {
    fn par(self) -> Par {
        match self {
            Parallelism::Sequential => Par::Seq,
            Parallelism::Threads(n) => Par::rayon(n),
        }
    }
}

/// Lower-triangle (row ≥ column) structure of a symmetric matrix in compressed sparse
/// column form, rows sorted within each column, no duplicates.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct SymmetricPattern {
    n: usize,
    col_ptr: Vec<usize>,
    row_idx: Vec<usize>,
}

impl SymmetricPattern {
    /// Build the pattern of an `n`×`n` symmetric matrix from `(row, col)` positions (either
    /// triangle; repeats allowed). Returns the pattern and, for each input position, the
    /// index of its slot in the value array, so values can be scattered with `+=`.
    ///
    /// ```
    /// use rillnet::solver::SymmetricPattern;
    /// let (p, slots) = SymmetricPattern::from_positions(2, &[(0, 0), (1, 0), (0, 1), (1, 1)]);
    /// assert_eq!(p.nnz(), 3);
    /// assert_eq!(slots[1], slots[2]); // (1,0) and (0,1) share one stored entry
    /// ```
    pub fn from_positions(n: usize, positions: &[(usize, usize)]) -> (Self, Vec<usize>) {
        Self::from_entries(n, positions.len(), |k| positions[k])
    }

    /// [`SymmetricPattern::from_positions`] with the positions given by a function of their
    /// index `0..count`, so callers need not build a list of them.
    ///
    /// O(n + count), no comparison sort: the positions are bucketed by row (a counting sort),
    /// then the rows are walked in increasing order and each position is appended to its
    /// column, so every column's rows come out sorted; a repeat of a position is met in the
    /// same row as its first occurrence and is found by marking each column with the last row
    /// appended to it (the transpose-twice idea of sparse matrix codes, e.g. Gustavson 1978,
    /// ACM TOMS 4).
    pub fn from_entries(
        n: usize,
        count: usize,
        position: impl Fn(usize) -> (usize, usize),
    ) -> (Self, Vec<usize>) {
        // 32-bit indices where they fit: half the bytes to move, and fewer cache lines.
        if n < u32::MAX as usize && count < u32::MAX as usize {
            bucketed::<u32>(n, count, position)
        } else {
            bucketed::<usize>(n, count, position)
        }
    }

    /// Matrix dimension.
    pub fn dim(&self) -> usize {
        self.n
    }

    /// Number of stored (lower-triangle) entries.
    pub fn nnz(&self) -> usize {
        self.row_idx.len()
    }

    /// The stored rows of column `j` (sorted, all ≥ `j`) and the slot of the first of them in
    /// the value array (the others follow in order).
    pub fn column(&self, j: usize) -> (usize, &[usize]) {
        let range = self.col_ptr[j]..self.col_ptr[j + 1];
        (range.start, &self.row_idx[range])
    }

    fn symbolic(&self) -> SymbolicSparseColMatRef<'_, usize> {
        // SAFETY-free constructor: faer checks the invariants we maintain by construction.
        SymbolicSparseColMatRef::new_checked(self.n, self.n, &self.col_ptr, None, &self.row_idx)
    }

    /// y = A·x for the symmetric matrix with these `values` (both triangles implied).
    pub fn multiply(&self, values: &[f64], x: &[f64], y: &mut [f64]) {
        y.iter_mut().for_each(|v| *v = 0.0);
        for j in 0..self.n {
            let range = self.col_ptr[j]..self.col_ptr[j + 1];
            for (&i, &a) in self.row_idx[range.clone()].iter().zip(&values[range]) {
                y[i] += a * x[j];
                if i != j {
                    y[j] += a * x[i];
                }
            }
        }
    }
}

/// An index type for [`bucketed`]: `u32` where the sizes allow, else `usize`.
trait Index: Copy + Eq {
    const NONE: Self;
    fn at(i: usize) -> Self;
    fn get(self) -> usize;
}

impl Index for u32 {
    const NONE: Self = u32::MAX;
    #[inline]
    fn at(i: usize) -> Self {
        i as u32
    }
    #[inline]
    fn get(self) -> usize {
        self as usize
    }
}

impl Index for usize {
    const NONE: Self = usize::MAX;
    #[inline]
    fn at(i: usize) -> Self {
        i
    }
    #[inline]
    fn get(self) -> usize {
        self
    }
}

/// The work of [`SymmetricPattern::from_entries`] with indices of type `I`.
fn bucketed<I: Index>(
    n: usize,
    count: usize,
    position: impl Fn(usize) -> (usize, usize),
) -> (SymmetricPattern, Vec<usize>) {
    let lower = |k: usize| {
        let (r, c) = position(k);
        if r >= c {
            (r, c)
        } else {
            (c, r)
        }
    };
    // Bucket the positions by row: (column, original index) per position, by row.
    let mut row_start = vec![0usize; n + 1];
    for k in 0..count {
        row_start[lower(k).0 + 1] += 1;
    }
    for i in 0..n {
        row_start[i + 1] += row_start[i];
    }
    let mut by_row = vec![(I::NONE, I::NONE); count];
    {
        let mut next = row_start[..n].to_vec();
        for k in 0..count {
            let (r, c) = lower(k);
            by_row[next[r]] = (I::at(c), I::at(k));
            next[r] += 1;
        }
    }
    // Per column, in one record: the last row appended to it, and its count of distinct rows
    // (then the next free place in it).
    let mut col = vec![(I::NONE, I::at(0)); n];
    for r in 0..n {
        for &(c, _) in &by_row[row_start[r]..row_start[r + 1]] {
            let e = &mut col[c.get()];
            if e.0.get() != r {
                *e = (I::at(r), I::at(e.1.get() + 1));
            }
        }
    }
    let mut col_ptr = Vec::with_capacity(n + 1);
    col_ptr.push(0usize);
    for e in &mut col {
        let start = col_ptr[col_ptr.len() - 1];
        col_ptr.push(start + e.1.get());
        *e = (I::NONE, I::at(start));
    }
    // Append each row to its columns in increasing row order (so every column comes out
    // sorted); a repeat meets its first occurrence in the same row.
    let mut row_idx = vec![0usize; col_ptr[n]];
    let mut slots = vec![0usize; count];
    for r in 0..n {
        for &(c, k) in &by_row[row_start[r]..row_start[r + 1]] {
            let e = &mut col[c.get()];
            if e.0.get() != r {
                row_idx[e.1.get()] = r;
                *e = (I::at(r), I::at(e.1.get() + 1));
            }
            slots[k.get()] = e.1.get() - 1;
        }
    }
    (
        SymmetricPattern {
            n,
            col_ptr,
            row_idx,
        },
        slots,
    )
}

/// Fill-reducing ordering and structure of the Cholesky factor of one pattern.
#[derive(Debug)]
pub struct SymbolicCholesky {
    inner: FaerSymbolic<usize>,
    par: Parallelism,
}

impl SymbolicCholesky {
    /// Analyse a pattern (approximate minimum degree ordering, elimination tree,
    /// supernodes). Done once per topology.
    pub fn analyse(pattern: &SymmetricPattern, par: Parallelism) -> Result<Self, SolverError> {
        let inner = factorize_symbolic_cholesky(
            pattern.symbolic(),
            Side::Lower,
            SymmetricOrdering::Amd,
            CholeskySymbolicParams::default(),
        )
        .map_err(|e| SolverError::Symbolic {
            n: pattern.n,
            reason: format!("{e:?}"),
        })?;
        Ok(SymbolicCholesky { inner, par })
    }

    /// Number of stored values in the factor L (a measure of fill-in).
    pub fn factor_nnz(&self) -> usize {
        self.inner.len_val()
    }

    /// Numeric factorisation A = L·Lᵀ for `values` on `pattern` (the analysed pattern).
    pub fn factorize(
        &self,
        pattern: &SymmetricPattern,
        values: &[f64],
    ) -> Result<Cholesky<'_>, SolverError> {
        let n = pattern.n;
        let par = self.par.par();
        let mut l_values = vec![0.0f64; self.inner.len_val()];
        let req = self
            .inner
            .factorize_numeric_llt_scratch::<f64>(par, Default::default());
        let mut mem = MemBuffer::try_new(req).map_err(|_| SolverError::OutOfMemory { n })?;
        let stack = MemStack::new(&mut mem);
        let a = SparseColMatRef::new(pattern.symbolic(), values);
        self.inner
            .factorize_numeric_llt(
                &mut l_values,
                a,
                Side::Lower,
                LltRegularization::default(),
                par,
                stack,
                Default::default(),
            )
            .map_err(|e| SolverError::NotPositiveDefinite {
                pivot: match e {
                    faer::linalg::cholesky::llt::factor::LltError::NonPositivePivot { index } => {
                        index
                    }
                },
                n,
            })?;
        Ok(Cholesky {
            symbolic: self,
            l_values,
        })
    }
}

/// A numeric Cholesky factor, ready to solve.
#[derive(Debug)]
pub struct Cholesky<'s> {
    symbolic: &'s SymbolicCholesky,
    l_values: Vec<f64>,
}

impl Cholesky<'_> {
    /// Solve A·x = b for every column of `rhs` (column-major, `n` rows each), in place.
    pub fn solve_in_place(&self, rhs: &mut [f64]) -> Result<(), SolverError> {
        let n = self.symbolic.inner.nrows();
        if n == 0 {
            return Ok(());
        }
        let ncols = rhs.len() / n;
        let par = self.symbolic.par.par();
        let req: StackReq = self
            .symbolic
            .inner
            .solve_in_place_scratch::<f64>(ncols, par);
        let mut mem = MemBuffer::try_new(req).map_err(|_| SolverError::OutOfMemory { n })?;
        let stack = MemStack::new(&mut mem);
        let llt = LltRef::new(&self.symbolic.inner, &self.l_values);
        let mat = MatMut::from_column_major_slice_mut(rhs, n, ncols);
        llt.solve_in_place_with_conj(Conj::No, mat, par, stack);
        Ok(())
    }
}

/// Solve the symmetric positive definite `n` × `n` system given by its lower-triangle
/// `positions` and `entries` (duplicates summed) in place on `rhs`, by sparse Cholesky.
pub fn solve_spd_positions(
    n: usize,
    positions: &[(usize, usize)],
    entries: &[f64],
    rhs: &mut [f64],
) -> Result<(), SolverError> {
    if n == 0 {
        return Ok(());
    }
    let (pattern, slots) = SymmetricPattern::from_positions(n, positions);
    let mut values = vec![0.0; pattern.nnz()];
    for (s, v) in slots.iter().zip(entries) {
        values[*s] += v;
    }
    let sym = SymbolicCholesky::analyse(&pattern, Parallelism::Sequential)?;
    sym.factorize(&pattern, &values)?.solve_in_place(rhs)?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn solves_a_small_spd_system() {
        // [4 1 0; 1 3 1; 0 1 2] x = [1 2 3]; checked by substituting back.
        let positions = [(0, 0), (1, 0), (1, 1), (2, 1), (2, 2)];
        let (p, slots) = SymmetricPattern::from_positions(3, &positions);
        let mut values = vec![0.0; p.nnz()];
        for (k, v) in [4.0, 1.0, 3.0, 1.0, 2.0].into_iter().enumerate() {
            values[slots[k]] += v;
        }
        let sym = SymbolicCholesky::analyse(&p, Parallelism::Sequential).unwrap();
        let f = sym.factorize(&p, &values).unwrap();
        let b = [1.0, 2.0, 3.0];
        let mut x = b;
        f.solve_in_place(&mut x).unwrap();
        let mut ax = [0.0; 3];
        p.multiply(&values, &x, &mut ax);
        for i in 0..3 {
            assert!((ax[i] - b[i]).abs() < 1e-14);
        }
        // Refactor with new values on the same analysis.
        let doubled: Vec<f64> = values.iter().map(|v| 2.0 * v).collect();
        let f2 = sym.factorize(&p, &doubled).unwrap();
        let mut x2 = b;
        f2.solve_in_place(&mut x2).unwrap();
        for i in 0..3 {
            assert!((2.0 * x2[i] - x[i]).abs() < 1e-14);
        }
    }

    #[test]
    fn bucketed_pattern_matches_a_sorted_set() {
        // Positions in both triangles with repeats, from a fixed pseudo-random sequence; the
        // pattern must be the sorted set of lower-triangle positions, each input mapped to its
        // own entry.
        let n = 40;
        let mut state = 7u64;
        let mut next = || {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (state >> 33) as usize % n
        };
        let positions: Vec<(usize, usize)> = (0..300).map(|_| (next(), next())).collect();
        let (p, slots) = SymmetricPattern::from_positions(n, &positions);
        let mut set: Vec<(usize, usize)> = positions
            .iter()
            .map(|&(r, c)| (c.min(r), r.max(c)))
            .collect();
        set.sort_unstable();
        set.dedup();
        let mut stored = Vec::new();
        for j in 0..n {
            let (first, rows) = p.column(j);
            assert!(rows.windows(2).all(|w| w[0] < w[1]), "column {j} sorted");
            for (t, &i) in rows.iter().enumerate() {
                stored.push((j, i));
                assert_eq!(first + t, stored.len() - 1);
            }
        }
        assert_eq!(stored, set);
        for (&(r, c), &s) in positions.iter().zip(&slots) {
            assert_eq!(stored[s], (c.min(r), r.max(c)));
        }
    }

    #[test]
    fn indefinite_matrix_is_reported() {
        let (p, slots) = SymmetricPattern::from_positions(2, &[(0, 0), (1, 0), (1, 1)]);
        let mut values = vec![0.0; p.nnz()];
        values[slots[0]] = 1.0;
        values[slots[1]] = 2.0;
        values[slots[2]] = 1.0;
        let sym = SymbolicCholesky::analyse(&p, Parallelism::Sequential).unwrap();
        assert!(matches!(
            sym.factorize(&p, &values),
            Err(SolverError::NotPositiveDefinite { .. })
        ));
    }
}
