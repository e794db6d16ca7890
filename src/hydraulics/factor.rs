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

/// Lower triangle of a symmetric matrix in compressed sparse column form, diagonal first in
/// each column, rows sorted.
#[derive(Debug, Clone)]
pub struct LowerPattern {
    pub n: usize,
    pub col_ptr: Vec<usize>,
    pub row_idx: Vec<usize>,
}

impl LowerPattern {
    pub fn nnz(&self) -> usize {
        self.row_idx.len()
    }

    /// Slot of the diagonal entry of column `j`.
    pub fn diagonal_slot(&self, j: usize) -> usize {
        self.col_ptr[j]
    }

    /// Slot of entry (row, col) with row > col, if present.
    pub fn slot(&self, row: usize, col: usize) -> Option<usize> {
        let range = self.col_ptr[col]..self.col_ptr[col + 1];
        self.row_idx[range.clone()]
            .binary_search(&row)
            .ok()
            .map(|k| range.start + k)
    }
}

/// The shared, immutable part: the pattern and its symbolic factorization.
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
    /// Orders (AMD) and analyses the pattern; done once per network.
    pub fn new(pattern: &LowerPattern) -> Result<Arc<Self>, String> {
        let n = pattern.n;
        let sym = SymbolicSparseColMat::<usize>::new_checked(
            n,
            n,
            pattern.col_ptr.clone(),
            None,
            pattern.row_idx.clone(),
        );
        let symbolic = factorize_symbolic_cholesky(
            sym.as_ref(),
            Side::Lower,
            SymmetricOrdering::Amd,
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
                Side::Lower,
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
    fn solves_a_small_spd_system() {
        // [4 -1 0; -1 4 -1; 0 -1 4] x = [3, 2, 3] has x = [1, 1, 1].
        let pattern = LowerPattern {
            n: 3,
            col_ptr: vec![0, 2, 4, 5],
            row_idx: vec![0, 1, 1, 2, 2],
        };
        let analysis = SymbolicAnalysis::new(&pattern).expect("symbolic");
        let mut f = FaerCholesky::new(analysis);
        f.refactor(&[4.0, -1.0, 4.0, -1.0, 4.0]).expect("spd");
        let mut b = vec![3.0, 2.0, 3.0];
        f.solve_in_place(&mut b);
        for x in b {
            assert!((x - 1.0).abs() < 1e-14);
        }
        assert_eq!(pattern.slot(2, 1), Some(3));
        assert_eq!(pattern.slot(2, 0), None);
        assert!(f.refactor(&[1.0, -2.0, 1.0, 0.0, 1.0]).is_err());
    }
}
