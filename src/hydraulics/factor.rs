//! Sparse Cholesky factorization of the junction matrix, behind a small trait of ours.
//!
//! The pattern of the matrix never changes for a network, so the fill-reducing ordering (AMD)
//! and the symbolic factorization are computed once and shared by every thread; each thread
//! owns only the numeric values of L and a scratch buffer, and refactorizes without allocating.
//! faer was measured against nalgebra-sparse and sprs on network-like matrices and chosen for
//! its built-in ordering and shareable symbolic object; it also supplies the triangular solves
//! and the dense Cholesky of the factor's trailing block. The sparse numeric phase is ours (see
//! [`SparseCholesky`]): the sweep refactors one pattern thousands of times.

use std::sync::Arc;

use thiserror::Error;

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::linalg::cholesky::llt::factor::{
    cholesky_in_place, cholesky_in_place_scratch, LltRegularization,
};
use faer::sparse::linalg::cholesky::{
    factorize_symbolic_cholesky, CholeskySymbolicParams, SymbolicCholesky, SymbolicCholeskyRaw,
    SymmetricOrdering,
};
use faer::sparse::linalg::{amd, SupernodalThreshold};
use faer::sparse::SymbolicSparseColMat;
use faer::{MatMut, Par, Side};

/// A numeric factorization of a symmetric positive definite matrix with a fixed pattern.
pub trait SpdFactorization: Send {
    /// Factorizes the matrix with these values (in the order of the pattern's slots).
    fn refactor(&mut self, values: &[f64]) -> Result<(), NotPositiveDefinite>;
    /// Overwrites `rhs` with the solution of A·x = rhs, using the last factorization.
    fn solve_in_place(&mut self, rhs: &mut [f64]);
}

/// Why the ordering or the symbolic analysis of a junction matrix failed. None of these is a
/// property of the user's network that the user can fix, except its size.
#[derive(Debug, Clone, PartialEq, Eq, Error)]
pub enum FactorError {
    #[error("fill-reducing ordering failed: {0}")]
    Ordering(String),
    #[error("symbolic factorization failed: {0}")]
    Symbolic(String),
    #[error("symbolic factorization is not simplicial")]
    NotSimplicial,
    #[error("the network is too large for 32-bit matrix indices")]
    TooLarge,
    #[error("the factor's columns do not start with their diagonal")]
    DiagonalNotFirst,
}

/// The matrix was not numerically positive definite (a junction cut off from every fixed grade).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct NotPositiveDefinite;

/// The pattern of the junction matrix, ordered once to limit fill-in: the upper triangle of
/// P·A·Pᵀ in compressed sparse column form (rows sorted, so the diagonal closes each column),
/// where P is an approximate-minimum-degree permutation (faer's AMD, the algorithm of Amestoy,
/// Davis & Duff, SIAM J. Matrix Anal. Appl. 17(4), 1996). Ordering once and assembling values
/// directly in the ordered positions saves the permutation that faer would otherwise make at
/// every factorization.
#[derive(Debug, Clone)]
pub struct OrderedPattern {
    pub n: usize,
    col_ptr: Vec<usize>,
    row_idx: Vec<usize>,
    /// Row and column of each original index in the ordered matrix.
    position: Vec<usize>,
}

impl OrderedPattern {
    /// The pattern with a diagonal for each of `n` indices and an off-diagonal entry for each
    /// pair (a, b), a ≠ b (duplicates allowed).
    pub fn new(n: usize, pairs: &[(usize, usize)]) -> Result<Self, FactorError> {
        // Natural-order lower triangle, for the ordering.
        let (col_ptr, row_idx) = compressed_columns(n, pairs, |a, b| (a.min(b), a.max(b)));
        let natural = SymbolicSparseColMat::<usize>::new_checked(n, n, col_ptr, None, row_idx);
        let mut perm = vec![0usize; n];
        let mut perm_inv = vec![0usize; n];
        let nnz = natural.compute_nnz();
        let mut mem = MemBuffer::new(amd::order_scratch::<usize>(n, nnz));
        amd::order(
            &mut perm,
            &mut perm_inv,
            natural.as_ref(),
            amd::Control::default(),
            MemStack::new(&mut mem),
        )
        .map_err(|e| FactorError::Ordering(format!("{e:?}")))?;
        // perm[new] = old, so the position of original index i is perm_inv[i].
        Ok(Self::with_positions(n, pairs, perm_inv))
    }

    /// The pattern ordered by `rank` (index i goes before j when rank\[i\] < rank\[j\]; ranks
    /// distinct), without an ordering of its own: for a part of a matrix already ordered, whose
    /// positions there are a good order for the part too (elimination in a fill-reducing
    /// order restricted to a subgraph only creates fill that the whole would — from memory).
    pub fn in_rank_order(n: usize, pairs: &[(usize, usize)], rank: &[usize]) -> Self {
        let mut by_rank: Vec<usize> = (0..n).collect();
        by_rank.sort_unstable_by_key(|&i| rank[i]);
        let mut position = vec![0usize; n];
        for (p, &i) in by_rank.iter().enumerate() {
            position[i] = p;
        }
        Self::with_positions(n, pairs, position)
    }

    fn with_positions(n: usize, pairs: &[(usize, usize)], position: Vec<usize>) -> Self {
        // Ordered upper triangle: the entry of (a, b) in the column of the later position.
        let (col_ptr, row_idx) = compressed_columns(n, pairs, |a, b| {
            let (p, q) = (position[a], position[b]);
            (p.max(q), p.min(q))
        });
        OrderedPattern {
            n,
            col_ptr,
            row_idx,
            position,
        }
    }

    pub fn nnz(&self) -> usize {
        self.row_idx.len()
    }

    /// Row and column of original index `i` in the ordered matrix.
    pub fn position(&self, i: usize) -> usize {
        self.position[i]
    }

    /// Slot of the diagonal entry of original index `i`.
    pub fn diagonal_slot(&self, i: usize) -> usize {
        self.col_ptr[self.position[i] + 1] - 1
    }

    /// Slot of the entry joining original indices `a` ≠ `b`, if present.
    pub fn slot(&self, a: usize, b: usize) -> Option<usize> {
        let (p, q) = (self.position[a], self.position[b]);
        let (row, col) = (p.min(q), p.max(q));
        let range = self.col_ptr[col]..self.col_ptr[col + 1];
        self.row_idx[range.clone()]
            .binary_search(&row)
            .ok()
            .map(|k| range.start + k)
    }
}

/// Compressed sparse columns of an n × n pattern with every diagonal entry and, for each pair
/// (a, b) with a ≠ b, the entry `place(a, b)` = (column, row); rows sorted and unique.
fn compressed_columns(
    n: usize,
    pairs: &[(usize, usize)],
    place: impl Fn(usize, usize) -> (usize, usize),
) -> (Vec<usize>, Vec<usize>) {
    let mut columns: Vec<Vec<usize>> = (0..n).map(|j| vec![j]).collect();
    for &(a, b) in pairs {
        if a != b {
            let (col, row) = place(a, b);
            columns[col].push(row);
        }
    }
    let mut col_ptr = Vec::with_capacity(n + 1);
    col_ptr.push(0);
    let mut row_idx = Vec::new();
    for col in &mut columns {
        col.sort_unstable();
        col.dedup();
        row_idx.extend_from_slice(col);
        col_ptr.push(row_idx.len());
    }
    (col_ptr, row_idx)
}

/// The shared, immutable part: the ordered pattern, its symbolic factorization, and the row
/// structure of L for the numeric phase.
pub struct SymbolicAnalysis {
    pattern: SymbolicSparseColMat<usize>,
    symbolic: SymbolicCholesky<usize>,
    /// Column pointers and row indices of L (diagonal first in each column, rows ascending).
    l_col_ptr: Vec<u32>,
    l_row_idx: Vec<u32>,
    /// Row k of L below the diagonal: `row_entries[row_ptr[k]..row_ptr[k + 1]]` = (column j,
    /// slot of column j's first entry below its diagonal, slot of L(k, j)), columns ascending.
    /// Keeping the column's start here saves the elimination a dependent load per entry
    /// (10-12 % of a numeric factorization, docs/performance.md).
    row_ptr: Vec<u32>,
    row_entries: Vec<(u32, u32, u32)>,
    /// Column pointers and row indices of the ordered upper triangle of A, as u32.
    a_col_ptr: Vec<u32>,
    a_row_idx: Vec<u32>,
    n: usize,
    /// First row of the trailing block of L factorized as a dense matrix (n when none).
    dense_start: usize,
}

impl std::fmt::Debug for SymbolicAnalysis {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("SymbolicAnalysis")
            .field("n", &self.pattern.nrows())
            .field("factor_values", &self.symbolic.len_val())
            .finish()
    }
}

impl SymbolicAnalysis {
    /// Analyses the ordered pattern (done once per network).
    pub fn new(pattern: &OrderedPattern) -> Result<Arc<Self>, FactorError> {
        let n = pattern.n;
        let sym = SymbolicSparseColMat::<usize>::new_checked(
            n,
            n,
            pattern.col_ptr.clone(),
            None,
            pattern.row_idx.clone(),
        );
        // With the identity ordering faer reads the upper triangle.
        let symbolic = factorize_symbolic_cholesky(
            sym.as_ref(),
            Side::Upper,
            SymmetricOrdering::Identity,
            CholeskySymbolicParams {
                // Junction matrices of water networks give factors with little dense structure
                // (supernodal measured ~50 % slower at 10k junctions), and the numeric phase
                // below works on the simplicial layout.
                supernodal_flop_ratio_threshold: SupernodalThreshold::FORCE_SIMPLICIAL,
                ..Default::default()
            },
        )
        .map_err(|e| FactorError::Symbolic(format!("{e:?}")))?;
        let SymbolicCholeskyRaw::Simplicial(simplicial) = symbolic.raw() else {
            return Err(FactorError::NotSimplicial);
        };
        let to_u32 = |v: &[usize]| -> Result<Vec<u32>, FactorError> {
            v.iter()
                .map(|&x| u32::try_from(x).map_err(|_| FactorError::TooLarge))
                .collect()
        };
        let l_col_ptr = to_u32(simplicial.col_ptr())?;
        let l_row_idx = to_u32(simplicial.row_idx())?;
        let mut counts = vec![0u32; n + 1];
        for j in 0..n {
            let (first, end) = (l_col_ptr[j] as usize, l_col_ptr[j + 1] as usize);
            if first >= end || l_row_idx[first] as usize != j {
                return Err(FactorError::DiagonalNotFirst);
            }
            for &i in &l_row_idx[first + 1..end] {
                counts[i as usize + 1] += 1;
            }
        }
        let mut row_ptr = counts;
        for k in 0..n {
            row_ptr[k + 1] += row_ptr[k];
        }
        let mut fill: Vec<u32> = row_ptr[..n].to_vec();
        let mut row_entries = vec![(0u32, 0u32, 0u32); row_ptr[n] as usize];
        for j in 0..n {
            let (first, end) = (l_col_ptr[j] as usize, l_col_ptr[j + 1] as usize);
            for (p, &i) in l_row_idx.iter().enumerate().take(end).skip(first + 1) {
                let i = i as usize;
                row_entries[fill[i] as usize] = (j as u32, first as u32 + 1, p as u32);
                fill[i] += 1;
            }
        }
        let dense_start = n - dense_block_size(&l_col_ptr);
        Ok(Arc::new(SymbolicAnalysis {
            a_col_ptr: to_u32(&pattern.col_ptr)?,
            a_row_idx: to_u32(&pattern.row_idx)?,
            pattern: sym,
            symbolic,
            l_col_ptr,
            l_row_idx,
            row_ptr,
            row_entries,
            n,
            dense_start,
        }))
    }

    /// Rows of L in the trailing block factorized as a dense matrix.
    pub fn dense_rows(&self) -> usize {
        self.n - self.dense_start
    }

    /// Number of stored values of L.
    pub fn factor_len(&self) -> usize {
        self.symbolic.len_val()
    }
}

/// Smallest trailing block worth factorizing as a dense matrix.
const MIN_DENSE_BLOCK: usize = 32;
/// Largest one (its dense storage, per workspace, is the square of this times 8 bytes).
const MAX_DENSE_BLOCK: usize = 2048;
/// Fill ratio of the trailing block of L above which it is factorized as a dense matrix.
const DENSE_FILL: f64 = 0.5;

/// Size of the trailing block of L, given its column pointers, that is at least half full:
/// the rows factorized last, where the separators of a network end up under a fill-reducing
/// ordering. On the 10k synthetic network, its last 100 rows are 90 % full and carry 59 % of
/// the factorization's work, which a dense kernel does several times faster than row by row.
fn dense_block_size(l_col_ptr: &[u32]) -> usize {
    let n = l_col_ptr.len() - 1;
    let mut best = 0;
    let mut entries = 0usize;
    for m in 1..=n.min(MAX_DENSE_BLOCK) {
        let j = n - m;
        entries += (l_col_ptr[j + 1] - l_col_ptr[j]) as usize;
        if entries as f64 >= DENSE_FILL * (m * (m + 1) / 2) as f64 {
            best = m;
        }
    }
    if best >= MIN_DENSE_BLOCK {
        best
    } else {
        0
    }
}

/// Sparse LLᵀ with a fixed pattern: faer's ordering, symbolic analysis and triangular solves,
/// and our own up-looking numeric phase (the row-by-row algorithm of Davis, *Direct Methods
/// for Sparse Linear Systems*, SIAM 2006, §4.2) on a row structure of L computed once, the
/// trailing block that is at least half full being finished by faer's dense Cholesky. The
/// sweep refactors the same pattern thousands of times, so finding each row's structure again
/// (as a general-purpose factorization must, 20 % of its time here) is work saved.
pub struct SparseCholesky {
    analysis: Arc<SymbolicAnalysis>,
    l_values: Vec<f64>,
    /// 1 / L(j, j).
    inverse_diagonal: Vec<f64>,
    /// Dense work vector of the up-looking phase (all zero between rows).
    work: Vec<f64>,
    /// The trailing block's Schur complement, then its dense factor (column-major, lower).
    dense: Vec<f64>,
    /// Scratch of faer's dense Cholesky of the trailing block.
    mem: MemBuffer,
}

impl SparseCholesky {
    pub fn new(analysis: Arc<SymbolicAnalysis>) -> Self {
        let n = analysis.n;
        let m = n - analysis.dense_start;
        // Scratch for the dense block's Cholesky only: the triangular solves are ours.
        let req = cholesky_in_place_scratch::<f64>(m, Par::Seq, Default::default());
        SparseCholesky {
            l_values: vec![0.0; analysis.symbolic.len_val()],
            inverse_diagonal: vec![0.0; n],
            work: vec![0.0; n],
            dense: vec![0.0; m * m],
            mem: MemBuffer::new(req),
            analysis,
        }
    }

    /// The numeric values of L (to copy a factorization between workspaces).
    pub fn values(&self) -> &[f64] {
        &self.l_values
    }

    /// Replaces the numeric values of L by a copy of another factorization of the same pattern.
    pub fn set_values(&mut self, values: &[f64]) {
        self.l_values.copy_from_slice(values);
        let s = &self.analysis;
        for (j, inv) in self.inverse_diagonal.iter_mut().enumerate() {
            *inv = 1.0 / self.l_values[s.l_col_ptr[j] as usize];
        }
    }

    /// Scatters column k of A's upper triangle into the work vector and computes row k of L
    /// in the columns before `end` (L(k, j) = x_j / L(j, j), then column j's entries above row
    /// k update x). Returns the pivot left, A(k, k) − Σ L(k, j)², with x[k] cleared.
    fn eliminate_row(&mut self, k: usize, values: &[f64], end: usize) -> f64 {
        let s = &*self.analysis;
        let x = &mut self.work;
        let (a_start, a_end) = (s.a_col_ptr[k] as usize, s.a_col_ptr[k + 1] as usize);
        for (&i, &v) in s.a_row_idx[a_start..a_end]
            .iter()
            .zip(&values[a_start..a_end])
        {
            x[i as usize] = v;
        }
        let mut d = x[k];
        x[k] = 0.0;
        let (r_start, r_end) = (s.row_ptr[k] as usize, s.row_ptr[k + 1] as usize);
        for &(j, first, slot) in &s.row_entries[r_start..r_end] {
            let j = j as usize;
            if j >= end {
                break;
            }
            let slot = slot as usize;
            let lkj = x[j] * self.inverse_diagonal[j];
            x[j] = 0.0;
            // Entries of column j above row k (rows j < i < k), already final.
            let first = first as usize;
            for (&i, &lij) in s.l_row_idx[first..slot]
                .iter()
                .zip(&self.l_values[first..slot])
            {
                x[i as usize] -= lij * lkj;
            }
            d -= lkj * lkj;
            self.l_values[slot] = lkj;
        }
        d
    }

    /// Computes row k of L from column k of A's upper triangle and the rows before it.
    fn factor_row(&mut self, k: usize, values: &[f64]) -> Result<(), NotPositiveDefinite> {
        let d = self.eliminate_row(k, values, k);
        if !(d > 0.0 && d.is_finite()) {
            return Err(NotPositiveDefinite);
        }
        let diagonal = d.sqrt();
        self.l_values[self.analysis.l_col_ptr[k] as usize] = diagonal;
        self.inverse_diagonal[k] = 1.0 / diagonal;
        Ok(())
    }

    /// The rows of the trailing dense block: each row's entries in the sparse columns as in
    /// [`Self::factor_row`], which leaves the Schur complement S = A₂₂ − L₂₁·L₂₁ᵀ in the work
    /// vector, gathered into a dense matrix; then S = L₂₂·L₂₂ᵀ by faer's dense Cholesky, and
    /// L₂₂ scattered back into the sparse storage (entries outside the pattern are exactly
    /// zero in S's factor, as they are in exact arithmetic: every product forming them has a
    /// structurally zero factor).
    fn factor_dense_block(&mut self, values: &[f64]) -> Result<(), NotPositiveDefinite> {
        let analysis = Arc::clone(&self.analysis);
        let s = &*analysis;
        let (ds, n) = (s.dense_start, s.n);
        let m = n - ds;
        for k in ds..n {
            let pivot = self.eliminate_row(k, values, ds);
            // Row k of S (its lower triangle, column-major: S[row + m·col]).
            let row = k - ds;
            for (col, xi) in self.work[ds..k].iter_mut().enumerate() {
                self.dense[row + m * col] = *xi;
                *xi = 0.0;
            }
            self.dense[row + m * row] = pivot;
        }
        let block = MatMut::from_column_major_slice_mut(&mut self.dense, m, m);
        cholesky_in_place(
            block,
            LltRegularization::default(),
            Par::Seq,
            MemStack::new(&mut self.mem),
            Default::default(),
        )
        .map_err(|_| NotPositiveDefinite)?;
        for j in ds..n {
            let (start, end) = (s.l_col_ptr[j] as usize, s.l_col_ptr[j + 1] as usize);
            for p in start..end {
                let i = s.l_row_idx[p] as usize;
                self.l_values[p] = self.dense[(i - ds) + m * (j - ds)];
            }
            let diagonal = self.l_values[start];
            if !(diagonal > 0.0 && diagonal.is_finite()) {
                return Err(NotPositiveDefinite);
            }
            self.inverse_diagonal[j] = 1.0 / diagonal;
        }
        Ok(())
    }

    /// Clears the work vector after a failed row (it may hold partial sums).
    fn clear_work(&mut self) {
        self.work.iter_mut().for_each(|v| *v = 0.0);
    }
}

impl SpdFactorization for SparseCholesky {
    fn refactor(&mut self, values: &[f64]) -> Result<(), NotPositiveDefinite> {
        for k in 0..self.analysis.dense_start {
            if let Err(e) = self.factor_row(k, values) {
                self.clear_work();
                return Err(e);
            }
        }
        if self.analysis.dense_start < self.analysis.n {
            if let Err(e) = self.factor_dense_block(values) {
                self.clear_work();
                return Err(e);
            }
        }
        Ok(())
    }

    /// L·y = b by columns, then Lᵀ·x = y by rows of Lᵀ (Davis, *Direct Methods for Sparse
    /// Linear Systems*, SIAM 2006, §3.1 — from memory): one right-hand side, on the u32 indices
    /// and the reciprocal diagonal kept by the factorization. Measured against faer's general
    /// solve on the 10k sweep: see docs/performance.md.
    fn solve_in_place(&mut self, rhs: &mut [f64]) {
        let s = &*self.analysis;
        let (col_ptr, row_idx, l) = (&s.l_col_ptr, &s.l_row_idx, &self.l_values);
        let n = s.n.min(rhs.len());
        for j in 0..n {
            let (start, end) = (col_ptr[j] as usize, col_ptr[j + 1] as usize);
            let yj = rhs[j] * self.inverse_diagonal[j];
            rhs[j] = yj;
            if yj != 0.0 {
                for p in start + 1..end {
                    rhs[row_idx[p] as usize] -= l[p] * yj;
                }
            }
        }
        for j in (0..n).rev() {
            let (start, end) = (col_ptr[j] as usize, col_ptr[j + 1] as usize);
            let mut sum = rhs[j];
            for p in start + 1..end {
                sum -= l[p] * rhs[row_idx[p] as usize];
            }
            rhs[j] = sum * self.inverse_diagonal[j];
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn solves_a_small_spd_system_in_any_order() {
        // [4 -1 0; -1 4 -1; 0 -1 4] x = [3, 2, 3] has x = [1, 1, 1]: a linear-algebra identity.
        let pattern = OrderedPattern::new(3, &[(0, 1), (1, 2), (2, 1)]).expect("pattern");
        let analysis = SymbolicAnalysis::new(&pattern).expect("symbolic");
        let mut f = SparseCholesky::new(analysis);
        let mut values = vec![0.0; pattern.nnz()];
        for i in 0..3 {
            values[pattern.diagonal_slot(i)] = 4.0;
        }
        values[pattern.slot(0, 1).expect("slot")] = -1.0;
        values[pattern.slot(2, 1).expect("slot")] = -1.0;
        assert!(pattern.slot(0, 2).is_none());
        f.refactor(&values).expect("spd");
        let original = [3.0, 2.0, 3.0];
        let mut b = vec![0.0; 3];
        for i in 0..3 {
            b[pattern.position(i)] = original[i];
        }
        f.solve_in_place(&mut b);
        for x in b {
            assert!((x - 1.0).abs() < 1e-14);
        }
        values[pattern.diagonal_slot(1)] = -4.0;
        assert!(f.refactor(&values).is_err());
    }

    #[test]
    fn solves_grid_laplacians_with_and_without_a_dense_block() {
        // A k×k grid's weighted graph Laplacian plus a positive diagonal shift is SPD (it is
        // diagonally dominant with a positive diagonal: Gershgorin's circle theorem); b = A·x
        // for a known x, and the solve must return x. Large grids end in a dense block.
        for k in [4usize, 12, 40, 100] {
            let n = k * k;
            let mut pairs = Vec::new();
            for r in 0..k {
                for c in 0..k {
                    let v = r * k + c;
                    if c + 1 < k {
                        pairs.push((v, v + 1));
                    }
                    if r + 1 < k {
                        pairs.push((v, v + k));
                    }
                }
            }
            let pattern = OrderedPattern::new(n, &pairs).expect("pattern");
            let analysis = SymbolicAnalysis::new(&pattern).expect("symbolic");
            let dense = analysis.dense_rows();
            if k >= 40 {
                assert!(dense >= MIN_DENSE_BLOCK, "no dense block at {k}×{k}");
            }
            let x: Vec<f64> = (0..n).map(|i| 1.0 + (i % 7) as f64 * 0.25).collect();
            let mut ax = vec![0.0; n];
            let mut values = vec![0.0; pattern.nnz()];
            for (e, &(u, v)) in pairs.iter().enumerate() {
                let w = 1.0 + (e % 5) as f64;
                values[pattern.diagonal_slot(u)] += w;
                values[pattern.diagonal_slot(v)] += w;
                values[pattern.slot(u, v).expect("slot")] -= w;
                ax[u] += w * (x[u] - x[v]);
                ax[v] += w * (x[v] - x[u]);
            }
            for i in 0..n {
                values[pattern.diagonal_slot(i)] += 0.01;
                ax[i] += 0.01 * x[i];
            }
            let mut b = vec![0.0; n];
            for i in 0..n {
                b[pattern.position(i)] = ax[i];
            }
            let mut f = SparseCholesky::new(analysis);
            // Twice: the second factorization must not see the first one's leftovers.
            for _ in 0..2 {
                f.refactor(&values).expect("spd");
                let mut y = b.clone();
                f.solve_in_place(&mut y);
                for i in 0..n {
                    assert!(
                        (y[pattern.position(i)] - x[i]).abs() < 1e-9,
                        "k = {k}, dense rows {dense}"
                    );
                }
            }
        }
    }
}
