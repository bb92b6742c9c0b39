//! Small dense linear algebra and scalar root finding used by the stage analyses, and the
//! elementary functions of the junction laws ([`elementary`]).

pub mod elementary;

/// The larger of `a` and `b`, written as a comparison: on wasm32 `f64::max` is a call to a
/// library function (its NaN rule is not the instruction's), which the engine's inner loops
/// felt (5 % of a stage run under Node, measured with `node --cpu-prof`). A NaN `b` gives
/// `a`, as `f64::max` does; keep the value that may be NaN second.
#[inline(always)]
pub fn larger(a: f64, b: f64) -> f64 {
    if b > a {
        b
    } else {
        a
    }
}

/// Occurs when a linear system has no unique solution (a pivot vanished).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SingularMatrix {
    /// Column at which elimination found no usable pivot.
    pub column: usize,
}

/// Dense square matrix in row-major order.
#[derive(Debug, Clone, PartialEq)]
pub struct DenseMatrix {
    size: usize,
    entries: Vec<f64>,
}

impl DenseMatrix {
    pub fn zeros(size: usize) -> Self {
        DenseMatrix { size, entries: vec![0.0; size * size] }
    }
    pub fn size(&self) -> usize {
        self.size
    }
    pub fn clear(&mut self) {
        self.entries.iter_mut().for_each(|entry| *entry = 0.0);
    }
    /// Adds to entry (row, column); out-of-range indices are a caller bug and are ignored
    /// in release builds rather than aborting the analysis.
    pub fn add(&mut self, row: usize, column: usize, value: f64) {
        debug_assert!(row < self.size && column < self.size);
        if let Some(entry) = self.entries.get_mut(row * self.size + column) {
            *entry += value;
        }
    }
    pub fn get(&self, row: usize, column: usize) -> f64 {
        self.entries.get(row * self.size + column).copied().unwrap_or(0.0)
    }

    /// Solves `self · x = rhs` by Gaussian elimination with partial pivoting on a copy of the
    /// matrix. Returns `x`.
    // Indices stay below `size`, and `entries.len() == size²` by construction, so direct
    // indexing cannot go out of bounds; it keeps this innermost loop tight.
    #[allow(clippy::indexing_slicing)]
    pub fn solve(&self, rhs: &[f64]) -> Result<Vec<f64>, SingularMatrix> {
        let n = self.size;
        let mut a = self.entries.clone();
        let mut b: Vec<f64> = rhs.to_vec();
        b.resize(n, 0.0);
        if a.len() != n * n {
            return Err(SingularMatrix { column: 0 });
        }
        let scale = a.iter().fold(0.0f64, |m, v| m.max(v.abs())).max(f64::MIN_POSITIVE);
        for column in 0..n {
            let mut pivot_row = column;
            let mut pivot_abs = 0.0;
            for row in column..n {
                let value = a[row * n + column].abs();
                if value > pivot_abs {
                    pivot_abs = value;
                    pivot_row = row;
                }
            }
            if !(pivot_abs > scale * 1e-300) || !pivot_abs.is_finite() {
                return Err(SingularMatrix { column });
            }
            if pivot_row != column {
                for k in 0..n {
                    a.swap(pivot_row * n + k, column * n + k);
                }
                b.swap(pivot_row, column);
            }
            let pivot = a[column * n + column];
            let (done, rest) = a.split_at_mut((column + 1) * n);
            let pivot_tail = &done[column * n + column..(column + 1) * n];
            let b_pivot = b[column];
            for (offset, target) in rest.chunks_exact_mut(n).enumerate() {
                let factor = target[column] / pivot;
                if factor == 0.0 {
                    continue;
                }
                for (t, p) in target[column..].iter_mut().zip(pivot_tail) {
                    *t -= factor * p;
                }
                b[column + 1 + offset] -= factor * b_pivot;
            }
        }
        let mut x = vec![0.0; n];
        for row in (0..n).rev() {
            let mut sum = b[row];
            for k in (row + 1)..n {
                sum -= a[row * n + k] * x[k];
            }
            x[row] = sum / a[row * n + row];
        }
        if x.iter().all(|v| v.is_finite()) {
            Ok(x)
        } else {
            Err(SingularMatrix { column: n.saturating_sub(1) })
        }
    }
}

/// Finds a root of `f` in [low, high] by bisection, given a sign change; at most
/// `max_iterations` halvings. `None` when the ends do not bracket a root.
pub fn bisect(
    mut f: impl FnMut(f64) -> f64,
    mut low: f64,
    mut high: f64,
    tolerance: f64,
    max_iterations: usize,
) -> Option<f64> {
    let mut f_low = f(low);
    let f_high = f(high);
    if !(f_low.is_finite() && f_high.is_finite()) || f_low * f_high > 0.0 {
        return None;
    }
    for _ in 0..max_iterations {
        let middle = 0.5 * (low + high);
        if (high - low).abs() <= tolerance {
            return Some(middle);
        }
        let f_middle = f(middle);
        if !f_middle.is_finite() {
            return None;
        }
        if (f_middle < 0.0) == (f_low < 0.0) {
            low = middle;
            f_low = f_middle;
        } else {
            high = middle;
        }
    }
    Some(0.5 * (low + high))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn solves_a_pivoting_system() {
        // 0x + 2y = 5, 3x + 4y = 6 → y = 2.5, x = −4/3; the zero first pivot forces a swap.
        let mut m = DenseMatrix::zeros(2);
        m.add(0, 0, 0.0);
        m.add(0, 1, 2.0);
        m.add(1, 0, 3.0);
        m.add(1, 1, 4.0);
        let x = m.solve(&[5.0, 6.0]).unwrap_or_default();
        assert!((x[0] - (-4.0 / 3.0)).abs() < 1e-12 && (x[1] - 2.5).abs() < 1e-12, "{x:?}");
    }

    #[test]
    fn reports_singular() {
        let mut m = DenseMatrix::zeros(2);
        m.add(0, 0, 1.0);
        m.add(0, 1, 1.0);
        m.add(1, 0, 2.0);
        m.add(1, 1, 2.0);
        assert!(m.solve(&[1.0, 2.0]).is_err());
    }
}
