//! The linear solver behind one trait, so a sparse LU can replace the dense one.

use crate::numeric::DenseMatrix;

/// Occurs when factorisation finds no usable pivot in `column`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SingularColumn {
    pub column: usize,
}

/// What the Newton loop needs from a linear solver: clear, accumulate stamps, solve.
/// Implementations may keep a symbolic factorisation between calls, since the stamp pattern
/// of a circuit never changes.
pub trait LinearSolver {
    /// Sets every entry to zero and the size to `size` unknowns.
    fn reset(&mut self, size: usize);
    /// Adds `value` to entry (row, column). Out-of-range indices are ignored.
    fn add(&mut self, row: usize, column: usize, value: f64);
    /// Solves the accumulated matrix against `rhs`.
    fn solve(&mut self, rhs: &[f64]) -> Result<Vec<f64>, SingularColumn>;
}

/// Dense LU with partial pivoting; right for the tens of unknowns of a stage or a short chain.
#[derive(Debug, Clone)]
pub struct DenseSolver {
    matrix: DenseMatrix,
}

impl Default for DenseSolver {
    fn default() -> Self {
        DenseSolver { matrix: DenseMatrix::zeros(0) }
    }
}

impl LinearSolver for DenseSolver {
    fn reset(&mut self, size: usize) {
        if self.matrix.size() == size {
            self.matrix.clear();
        } else {
            self.matrix = DenseMatrix::zeros(size);
        }
    }
    fn add(&mut self, row: usize, column: usize, value: f64) {
        if row < self.matrix.size() && column < self.matrix.size() {
            self.matrix.add(row, column, value);
        }
    }
    fn solve(&mut self, rhs: &[f64]) -> Result<Vec<f64>, SingularColumn> {
        self.matrix.solve(rhs).map_err(|e| SingularColumn { column: e.column })
    }
}
