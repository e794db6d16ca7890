//! Sparse Cholesky factorization of the junction matrix, behind a small trait of ours.
//!
//! The pattern of the matrix never changes for a network, so the fill-reducing ordering (AMD)
//! and the symbolic factorization are computed once and shared by every thread; each thread
//! owns only the numeric values of L and a scratch buffer, and refactorizes without allocating.
//! faer was measured against nalgebra-sparse and sprs on network-like matrices and chosen for
//! its built-in ordering, shareable symbolic object and allocation-free refactorization.

use std::sync::Arc;

use faer::dyn_stack::{MemBuffer, MemStack, StackReq};
use faer::linalg::cholesky::llt::factor::LltRegularization;
use faer::sparse::linalg::amd;
use faer::sparse::linalg::cholesky::{
    factorize_symbolic_cholesky, CholeskySymbolicParams, LltRef, SymbolicCholesky,
    SymmetricOrdering,
};
use faer::sparse::{SparseColMatRef, SymbolicSparseColMat};
use faer::{Conj, MatMut, Par, Side};

/// A numeric factorization of a symmetric positive definite matrix with a fixed pattern.
pub trait SpdFactorization: Send {
    /// Factorizes the matrix with these values (in the order of the pattern's slots).
    fn refactor(&mut self, values: &[f64]) -> Result<(), NotPositiveDefinite>;
    /// Overwrites `rhs` with the solution of A·x = rhs, using the last factorization.
    fn solve_in_place(&mut self, rhs: &mut [f64]);
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
    pub fn new(n: usize, pairs: &[(usize, usize)]) -> Result<Self, String> {
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
        .map_err(|e| format!("fill-reducing ordering failed: {e:?}"))?;
        // perm[new] = old, so the position of original index i is perm_inv[i].
        let position = perm_inv;
        // Ordered upper triangle: the entry of (a, b) in the column of the later position.
        let (col_ptr, row_idx) = compressed_columns(n, pairs, |a, b| {
            let (p, q) = (position[a], position[b]);
            (p.max(q), p.min(q))
        });
        Ok(OrderedPattern {
            n,
            col_ptr,
            row_idx,
            position,
        })
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

/// The shared, immutable part: the ordered pattern and its symbolic factorization.
pub struct SymbolicAnalysis {
    pattern: SymbolicSparseColMat<usize>,
    symbolic: SymbolicCholesky<usize>,
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
    pub fn new(pattern: &OrderedPattern) -> Result<Arc<Self>, String> {
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
            CholeskySymbolicParams::default(),
        )
        .map_err(|e| format!("symbolic factorization failed: {e:?}"))?;
        Ok(Arc::new(SymbolicAnalysis {
            pattern: sym,
            symbolic,
        }))
    }

    /// Number of stored values of L.
    pub fn factor_len(&self) -> usize {
        self.symbolic.len_val()
    }
}

/// faer's sparse LLᵀ: one per thread, sharing the symbolic analysis.
pub struct FaerCholesky {
    analysis: Arc<SymbolicAnalysis>,
    l_values: Vec<f64>,
    mem: MemBuffer,
}

impl FaerCholesky {
    pub fn new(analysis: Arc<SymbolicAnalysis>) -> Self {
        let s = &analysis.symbolic;
        let req = StackReq::any_of(&[
            s.factorize_numeric_llt_scratch::<f64>(Par::Seq, Default::default()),
            s.solve_in_place_scratch::<f64>(1, Par::Seq),
        ]);
        FaerCholesky {
            l_values: vec![0.0; s.len_val()],
            mem: MemBuffer::new(req),
            analysis,
        }
    }
}

impl FaerCholesky {
    /// The numeric values of L (to copy a factorization between workspaces).
    pub fn values(&self) -> &[f64] {
        &self.l_values
    }

    /// Replaces the numeric values of L by a copy of another factorization of the same pattern.
    pub fn set_values(&mut self, values: &[f64]) {
        self.l_values.copy_from_slice(values);
    }
}

impl SpdFactorization for FaerCholesky {
    fn refactor(&mut self, values: &[f64]) -> Result<(), NotPositiveDefinite> {
        let a = SparseColMatRef::new(self.analysis.pattern.as_ref(), values);
        self.analysis
            .symbolic
            .factorize_numeric_llt::<f64>(
                &mut self.l_values,
                a,
                Side::Upper,
                LltRegularization::default(),
                Par::Seq,
                MemStack::new(&mut self.mem),
                Default::default(),
            )
            .map(|_| ())
            .map_err(|_| NotPositiveDefinite)
    }

    fn solve_in_place(&mut self, rhs: &mut [f64]) {
        let n = rhs.len();
        LltRef::new(&self.analysis.symbolic, &self.l_values).solve_in_place_with_conj(
            Conj::No,
            MatMut::from_column_major_slice_mut(rhs, n, 1),
            Par::Seq,
            MemStack::new(&mut self.mem),
        );
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
        let mut f = FaerCholesky::new(analysis);
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
}
