//! The linear solver behind one trait: dense LU for small systems, sparse LU (faer, with the
//! fill-reducing ordering computed once per pattern) for large ones, and the automatic choice.

use faer::dyn_stack::{MemBuffer, MemStack, StackReq};
use faer::perm::PermRef;
use faer::sparse::linalg::amd;
use faer::sparse::linalg::lu::{factorize_symbolic_lu, simplicial, LuSymbolicParams};
use faer::sparse::linalg::{LuError, SupernodalThreshold};
use faer::sparse::{SparseColMatRef, SymbolicSparseColMatRef};
use faer::{Conj, MatMut, Par};

use crate::numeric::{larger, DenseMatrix};

/// Occurs when factorisation finds no usable pivot in `column` (an unknown's index).
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
    /// Solves the accumulated matrix against `rhs`, which is overwritten by the solution.
    /// A right-hand side of the wrong length is padded or cut to the size.
    fn solve_in_place(&mut self, rhs: &mut Vec<f64>) -> Result<(), SingularColumn>;
    /// The accumulated matrix times `x` into `product`, and the sum of the magnitudes of the
    /// terms of each row, Σ|a_ij·x_j|, into `magnitude` (the scale of a residual test). Both
    /// are resized to the size.
    fn multiply(&self, x: &[f64], product: &mut Vec<f64>, magnitude: &mut Vec<f64>);
    /// Keeps the entries accumulated since the last reset as a base that
    /// [`LinearSolver::reset_to_base`] starts from (the stamps that never change during a
    /// run, so they are added once instead of at every assembly). [`LinearSolver::reset`]
    /// drops it, so a base never outlives the assemblies that use it (a solver reused for
    /// another circuit of the same size starts over).
    fn save_base(&mut self) {}
    /// Like [`LinearSolver::reset`], but every entry starts at the saved base. False, with
    /// nothing done, when there is no base for this size (then reset and stamp as usual).
    fn reset_to_base(&mut self, _size: usize) -> bool {
        false
    }
}

/// The largest |v| of `values` (NaNs ignored), folded in four independent lanes: a single
/// running maximum makes every comparison wait for the one before, and this runs at every
/// factorisation.
fn largest_magnitude(values: &[f64]) -> f64 {
    let mut lanes = [0.0f64; 4];
    let chunks = values.chunks_exact(4);
    let rest = chunks.remainder();
    for chunk in chunks {
        for (lane, &v) in lanes.iter_mut().zip(chunk) {
            *lane = larger(*lane, v.abs());
        }
    }
    for &v in rest {
        lanes[0] = larger(lanes[0], v.abs());
    }
    larger(larger(lanes[0], lanes[1]), larger(lanes[2], lanes[3]))
}

/// `buffer` emptied and filled with `length` zeros, keeping its allocation.
pub(crate) fn fill_with_zeros(buffer: &mut Vec<f64>, length: usize) {
    buffer.clear();
    buffer.resize(length, 0.0);
}

fn prepare(size: usize, product: &mut Vec<f64>, magnitude: &mut Vec<f64>) {
    fill_with_zeros(product, size);
    fill_with_zeros(magnitude, size);
}

/// A pivot counts as zero below this share of the largest matrix entry (the same rule as the
/// dense elimination: only a vanished pivot is singular; ill-conditioning is Newton's to see).
const ZERO_PIVOT_SHARE: f64 = 1e-300;

/// Dense LU with partial pivoting; right for the tens of unknowns of a stage or a short chain.
#[derive(Debug, Clone)]
pub struct DenseSolver {
    matrix: DenseMatrix,
    /// See [`LinearSolver::save_base`].
    base: Option<DenseMatrix>,
}

impl Default for DenseSolver {
    fn default() -> Self {
        DenseSolver { matrix: DenseMatrix::zeros(0), base: None }
    }
}

impl LinearSolver for DenseSolver {
    fn reset(&mut self, size: usize) {
        self.base = None;
        if self.matrix.size() == size {
            self.matrix.clear();
        } else {
            self.matrix = DenseMatrix::zeros(size);
        }
    }
    fn save_base(&mut self) {
        self.base = Some(self.matrix.clone());
    }
    fn reset_to_base(&mut self, size: usize) -> bool {
        match &self.base {
            Some(base) if base.size() == size && self.matrix.size() == size => {
                self.matrix.clone_from(base);
                true
            }
            _ => false,
        }
    }
    fn add(&mut self, row: usize, column: usize, value: f64) {
        if row < self.matrix.size() && column < self.matrix.size() {
            self.matrix.add(row, column, value);
        }
    }
    fn solve_in_place(&mut self, rhs: &mut Vec<f64>) -> Result<(), SingularColumn> {
        *rhs = self.matrix.solve(rhs).map_err(|e| SingularColumn { column: e.column })?;
        Ok(())
    }
    fn multiply(&self, x: &[f64], product: &mut Vec<f64>, magnitude: &mut Vec<f64>) {
        let size = self.matrix.size();
        prepare(size, product, magnitude);
        for (row, (p, m)) in product.iter_mut().zip(magnitude.iter_mut()).enumerate() {
            for (column, &value) in x.iter().enumerate().take(size) {
                let term = self.matrix.get(row, column) * value;
                *p += term;
                *m += term.abs();
            }
        }
    }
}

/// Where one `add` call of the assembly landed last time: the stamp order of a circuit is the
/// same at every Newton iteration, so the k-th call nearly always hits the k-th slot again.
#[derive(Debug, Clone, Copy)]
struct CallSlot {
    row: usize,
    column: usize,
    slot: usize,
}

/// The compressed-column pattern and values being assembled.
#[derive(Debug, Clone, Default)]
struct Pattern {
    size: usize,
    column_starts: Vec<usize>,
    row_indices: Vec<usize>,
    values: Vec<f64>,
}

impl Pattern {
    fn slot(&self, row: usize, column: usize) -> Option<usize> {
        let start = *self.column_starts.get(column)?;
        let end = *self.column_starts.get(column + 1)?;
        let rows = self.row_indices.get(start..end)?;
        rows.binary_search(&row).ok().map(|offset| start + offset)
    }

    /// The union of the current pattern and `extra`, with values summed.
    fn merged(&self, extra: &[(usize, usize, f64)]) -> Pattern {
        let mut entries: Vec<(usize, usize, f64)> = Vec::with_capacity(self.values.len() + extra.len());
        for column in 0..self.size {
            let start = self.column_starts.get(column).copied().unwrap_or(0);
            let end = self.column_starts.get(column + 1).copied().unwrap_or(start);
            for slot in start..end {
                if let (Some(&row), Some(&value)) = (self.row_indices.get(slot), self.values.get(slot)) {
                    entries.push((column, row, value));
                }
            }
        }
        entries.extend(extra.iter().map(|&(row, column, value)| (column, row, value)));
        entries.sort_by_key(|entry| (entry.0, entry.1));
        let mut merged = Pattern {
            size: self.size,
            column_starts: vec![0; self.size + 1],
            row_indices: Vec::with_capacity(entries.len()),
            values: Vec::with_capacity(entries.len()),
        };
        let mut last: Option<(usize, usize)> = None;
        for (column, row, value) in entries {
            if last == Some((column, row)) {
                if let Some(v) = merged.values.last_mut() {
                    *v += value;
                }
                continue;
            }
            last = Some((column, row));
            merged.row_indices.push(row);
            merged.values.push(value);
            if let Some(count) = merged.column_starts.get_mut(column + 1) {
                *count += 1;
            }
        }
        for column in 0..self.size {
            let before = merged.column_starts.get(column).copied().unwrap_or(0);
            if let Some(count) = merged.column_starts.get_mut(column + 1) {
                *count += before;
            }
        }
        merged
    }
}

/// The fill-reducing column ordering of one pattern and the workspace of its factorisations.
struct Symbolic {
    column_order: Vec<usize>,
    column_order_inverse: Vec<usize>,
    workspace: MemBuffer,
}

/// The numeric factors: L, U and the row pivots chosen by partial pivoting.
struct Numeric {
    lu: simplicial::SimplicialLu<usize, f64>,
    row_order: Vec<usize>,
    row_order_inverse: Vec<usize>,
}

/// Counts of a [`SparseSolver`]'s work, for tests and benchmarks.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct SparseStatistics {
    /// Fill-reducing orderings computed (once per new pattern).
    pub symbolic_analyses: usize,
    /// Factorisations with partial pivoting (faer).
    pub pivoting_factorisations: usize,
    /// Factorisations that reused the previous pivots and pattern.
    pub frozen_refactorisations: usize,
    /// Frozen refactorisations abandoned for a tiny or non-finite pivot (each followed by a
    /// pivoting factorisation).
    pub fallbacks: usize,
    /// Columns of the factors that frozen refactorisations left as they were (their entries
    /// of A and the columns updating them unchanged), and those they recomputed.
    pub columns_kept: usize,
    pub columns_refactored: usize,
}

/// Sparse LU. The pattern is learnt from the stamps: entries outside it are collected and
/// merged at the next solve, and only then is the fill-reducing ordering ([`FillOrdering`])
/// computed again, so a circuit pays for it once or twice per run (the operating point adds
/// hint entries), not once per Newton iteration. The first factorisation of a pattern pivots
/// (faer's simplicial kernel); later ones reuse its pivots and fill pattern
/// ([`FrozenFactors`]) until a pivot becomes too small, when they pivot afresh.
#[derive(Default)]
pub struct SparseSolver {
    pattern: Pattern,
    calls: Vec<CallSlot>,
    call_index: usize,
    /// (row, column, value) of entries outside the pattern since the last reset.
    outside: Vec<(usize, usize, f64)>,
    symbolic: Option<Symbolic>,
    numeric: Option<Numeric>,
    frozen: Option<FrozenFactors>,
    /// Pivot afresh at every solve (faer only), for comparison.
    always_pivot: bool,
    ordering: FillOrdering,
    /// Values and call count of [`LinearSolver::save_base`]; empty when there is none (it
    /// names slots of the current pattern, so a new pattern drops it).
    base_values: Vec<f64>,
    base_calls: usize,
    statistics: SparseStatistics,
}

impl std::fmt::Debug for SparseSolver {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("SparseSolver")
            .field("size", &self.pattern.size)
            .field("entries", &self.pattern.values.len())
            .field("statistics", &self.statistics)
            .finish()
    }
}

impl SparseSolver {
    /// A solver that pivots afresh at every solve (no frozen refactorisation): slower, kept
    /// to compare against and to check the frozen kernel.
    pub fn always_pivoting() -> SparseSolver {
        SparseSolver { always_pivot: true, ..SparseSolver::default() }
    }

    /// A solver with the given fill-reducing ordering (the default is
    /// [`FillOrdering::Symmetric`]), to compare orderings.
    pub fn with_ordering(ordering: FillOrdering) -> SparseSolver {
        SparseSolver { ordering, ..SparseSolver::default() }
    }

    /// Number of stored entries of the learnt pattern.
    pub fn pattern_entries(&self) -> usize {
        self.pattern.values.len()
    }

    fn add_uncached(&mut self, index: usize, row: usize, column: usize, value: f64) {
        if row >= self.pattern.size || column >= self.pattern.size {
            return;
        }
        match self.pattern.slot(row, column) {
            Some(slot) => {
                if let Some(v) = self.pattern.values.get_mut(slot) {
                    *v += value;
                }
                let call = CallSlot { row, column, slot };
                if let Some(entry) = self.calls.get_mut(index) {
                    *entry = call;
                } else if self.calls.len() == index {
                    self.calls.push(call);
                }
            }
            None => self.outside.push((row, column, value)),
        }
    }

    pub fn statistics(&self) -> SparseStatistics {
        self.statistics
    }

    /// Stored entries of the factors (L below the diagonal, U including it) in use, or
    /// `None` before the first factorisation: the fill the ordering left.
    pub fn factor_entries(&self) -> Option<usize> {
        if let Some(frozen) = &self.frozen {
            return Some(frozen.l_rows.len() + frozen.u_rows.len() + frozen.size);
        }
        let numeric = self.numeric.as_ref()?;
        Some(numeric.lu.l_factor_unsorted().compute_nnz() + numeric.lu.u_factor_unsorted().compute_nnz())
    }

    /// Solves with the factors in place (frozen, else faer's); false when there are none.
    fn solve_with_factors(&mut self, rhs: &mut [f64]) -> bool {
        let size = self.pattern.size;
        if let Some(frozen) = self.frozen.as_mut() {
            frozen.solve(rhs);
            return true;
        }
        let (Some(symbolic), Some(numeric)) = (self.symbolic.as_mut(), self.numeric.as_ref()) else {
            return false;
        };
        let row_order = PermRef::new_checked(&numeric.row_order, &numeric.row_order_inverse, size);
        let column_order = PermRef::new_checked(&symbolic.column_order, &symbolic.column_order_inverse, size);
        numeric.lu.solve_in_place_with_conj(
            row_order,
            column_order,
            Conj::No,
            MatMut::from_column_major_slice_mut(rhs, size, 1),
            Par::Seq,
            MemStack::new(&mut symbolic.workspace),
        );
        true
    }

    fn analyse(&mut self) -> Result<(), SingularColumn> {
        let size = self.pattern.size;
        let matrix = SymbolicSparseColMatRef::new_checked(
            size,
            size,
            &self.pattern.column_starts,
            None,
            &self.pattern.row_indices,
        );
        let (forward, inverse) = match self.ordering {
            FillOrdering::Symmetric => symmetric_order(matrix, self.pattern.row_indices.len()),
            FillOrdering::Column => None,
        }
        .map_or_else(|| column_order(matrix), Ok)?;
        let requirement = StackReq::any_of(&[
            simplicial::factorize_simplicial_numeric_lu_scratch::<usize, f64>(size, size),
            simplicial::solve_in_place_scratch::<usize, f64>(size, 1, Par::Seq),
        ]);
        let workspace = MemBuffer::try_new(requirement).map_err(|_| SingularColumn { column: 0 })?;
        self.symbolic = Some(Symbolic { column_order: forward, column_order_inverse: inverse, workspace });
        self.statistics.symbolic_analyses += 1;
        Ok(())
    }

    fn factorise(&mut self) -> Result<(), SingularColumn> {
        let size = self.pattern.size;
        let Some(symbolic) = self.symbolic.as_mut() else { return Err(SingularColumn { column: 0 }) };
        let numeric = self.numeric.get_or_insert_with(|| Numeric {
            lu: simplicial::SimplicialLu::new(),
            row_order: Vec::new(),
            row_order_inverse: Vec::new(),
        });
        numeric.row_order.resize(size, 0);
        numeric.row_order_inverse.resize(size, 0);
        let structure = SymbolicSparseColMatRef::new_checked(
            size,
            size,
            &self.pattern.column_starts,
            None,
            &self.pattern.row_indices,
        );
        let matrix = SparseColMatRef::new(structure, &self.pattern.values);
        let column_order = PermRef::new_checked(&symbolic.column_order, &symbolic.column_order_inverse, size);
        let name = |index: usize| SingularColumn {
            column: symbolic.column_order.get(index).copied().unwrap_or(index),
        };
        simplicial::factorize_simplicial_numeric_lu(
            &mut numeric.row_order,
            &mut numeric.row_order_inverse,
            &mut numeric.lu,
            matrix,
            column_order,
            MemStack::new(&mut symbolic.workspace),
        )
        .map_err(|error| match error {
            LuError::SymbolicSingular { index } => name(index),
            LuError::Generic(_) => SingularColumn { column: 0 },
        })?;
        // Partial pivoting takes the largest candidate even when it is zero: check each pivot
        // (the last entry of each column of U) the way the dense elimination does.
        let scale = larger(largest_magnitude(&self.pattern.values), f64::MIN_POSITIVE);
        let u = numeric.lu.u_factor_unsorted();
        for column in 0..size {
            let pivot = u.val_of_col(column).last().copied().unwrap_or(0.0).abs();
            if !(pivot > scale * ZERO_PIVOT_SHARE) || !pivot.is_finite() {
                return Err(name(column));
            }
        }
        Ok(())
    }
}

/// The fill-reducing column ordering of a [`SparseSolver`].
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum FillOrdering {
    /// Approximate minimum degree on the pattern of A + Aᵀ (Amestoy, Davis & Duff, SIAM J.
    /// Matrix Anal. Appl. 17, 1996), as the column order; partial pivoting still picks the
    /// rows. Nodal-analysis matrices are structurally nearly symmetric and their pivots
    /// mostly diagonal (not a voltage source's row, whose diagonal is zero), which this
    /// order exploits; on the ten-stage chain it leaves 476 factor entries where the
    /// column order leaves 783, and a fifth of the refactorisation work.
    #[default]
    Symmetric,
    /// Column approximate minimum degree (COLAMD; Davis, Gilbert, Larimore & Ng, ACM TOMS
    /// 30, 2004), which bounds fill for any row pivoting; kept to compare against, and the
    /// fallback when the symmetric order fails.
    Column,
}

/// The symmetric order and its inverse, `None` when faer's routine fails (then the column
/// order serves).
fn symmetric_order(
    matrix: SymbolicSparseColMatRef<'_, usize>,
    entries: usize,
) -> Option<(Vec<usize>, Vec<usize>)> {
    let size = matrix.ncols();
    let mut forward = vec![0; size];
    let mut inverse = vec![0; size];
    let mut workspace = MemBuffer::try_new(amd::order_scratch::<usize>(size, entries)).ok()?;
    amd::order(&mut forward, &mut inverse, matrix, amd::Control::default(), MemStack::new(&mut workspace))
        .ok()?;
    Some((forward, inverse))
}

/// faer's COLAMD order and its inverse.
fn column_order(
    matrix: SymbolicSparseColMatRef<'_, usize>,
) -> Result<(Vec<usize>, Vec<usize>), SingularColumn> {
    let params = LuSymbolicParams {
        supernodal_flop_ratio_threshold: SupernodalThreshold::FORCE_SIMPLICIAL,
        ..LuSymbolicParams::default()
    };
    // Out of memory is the only failure here; it has no column, so the first is named.
    let symbolic = factorize_symbolic_lu(matrix, params).map_err(|_| SingularColumn { column: 0 })?;
    let (forward, inverse) = symbolic.col_perm().arrays();
    Ok((forward.to_vec(), inverse.to_vec()))
}

impl LinearSolver for SparseSolver {
    fn reset(&mut self, size: usize) {
        if size != self.pattern.size {
            *self = SparseSolver {
                always_pivot: self.always_pivot,
                ordering: self.ordering,
                statistics: self.statistics,
                ..SparseSolver::default()
            };
            self.pattern.size = size;
            self.pattern.column_starts = vec![0; size + 1];
        }
        self.pattern.values.iter_mut().for_each(|v| *v = 0.0);
        self.outside.clear();
        self.call_index = 0;
        self.base_values.clear();
    }

    fn save_base(&mut self) {
        self.base_values.clear();
        // Entries outside the pattern have no slot yet; the next assembly saves again.
        if self.outside.is_empty() {
            self.base_values.extend_from_slice(&self.pattern.values);
            self.base_calls = self.call_index;
        }
    }

    fn reset_to_base(&mut self, size: usize) -> bool {
        if size != self.pattern.size
            || self.base_values.is_empty()
            || self.base_values.len() != self.pattern.values.len()
        {
            return false;
        }
        self.pattern.values.copy_from_slice(&self.base_values);
        self.outside.clear();
        self.call_index = self.base_calls;
        true
    }

    #[inline]
    fn add(&mut self, row: usize, column: usize, value: f64) {
        let index = self.call_index;
        self.call_index = index + 1;
        // A cached call names a slot of the current pattern (the cache is cleared whenever
        // the pattern changes), so its row and column were in range when cached.
        if let Some(call) = self.calls.get(index) {
            if call.row == row && call.column == column {
                if let Some(v) = self.pattern.values.get_mut(call.slot) {
                    *v += value;
                    return;
                }
            }
        }
        self.add_uncached(index, row, column, value);
    }

    fn solve_in_place(&mut self, rhs: &mut Vec<f64>) -> Result<(), SingularColumn> {
        let size = self.pattern.size;
        rhs.resize(size, 0.0);
        if size == 0 {
            return Ok(());
        }
        if !self.outside.is_empty() {
            self.pattern = self.pattern.merged(&self.outside);
            self.outside.clear();
            // Slots moved: the call cache refills from the new pattern on the next assembly,
            // and the base must be stamped again.
            self.calls.clear();
            self.base_values.clear();
            self.symbolic = None;
            self.numeric = None;
        }
        if self.symbolic.is_none() {
            self.frozen = None;
            self.analyse()?;
        }
        let scale = larger(largest_magnitude(&self.pattern.values), f64::MIN_POSITIVE);
        let refactored = match self.frozen.as_mut() {
            Some(frozen) => {
                let outcome = frozen.refactor(&self.pattern, scale);
                let done = outcome.is_ok();
                if let Ok(kept) = outcome {
                    self.statistics.frozen_refactorisations += 1;
                    self.statistics.columns_kept += kept;
                    self.statistics.columns_refactored += frozen.size - kept;
                } else {
                    self.statistics.fallbacks += 1;
                    self.frozen = None;
                }
                done
            }
            None => false,
        };
        if !refactored {
            self.factorise()?;
            self.statistics.pivoting_factorisations += 1;
            if !self.always_pivot {
                self.frozen = self.numeric.as_ref().and_then(|numeric| {
                    let symbolic = self.symbolic.as_ref()?;
                    FrozenFactors::from_pivoted(&self.pattern, symbolic, numeric)
                });
            }
        }
        if !self.solve_with_factors(rhs) {
            return Err(SingularColumn { column: 0 });
        }
        match rhs.iter().position(|v| !v.is_finite()) {
            Some(column) => Err(SingularColumn { column }),
            None => Ok(()),
        }
    }

    fn multiply(&self, x: &[f64], product: &mut Vec<f64>, magnitude: &mut Vec<f64>) {
        let pattern = &self.pattern;
        prepare(pattern.size, product, magnitude);
        let mut add = |row: usize, term: f64| {
            if let (Some(p), Some(m)) = (product.get_mut(row), magnitude.get_mut(row)) {
                *p += term;
                *m += term.abs();
            }
        };
        // Column by column with x's entry read once and the column's slices taken once (the
        // residual test runs this every iteration; per-entry lookups made it 3 times slower
        // under Node than natively).
        for (column, bounds) in pattern.column_starts.windows(2).enumerate().take(pattern.size) {
            let xc = x.get(column).copied().unwrap_or(0.0);
            let range = bounds[0]..bounds[1];
            let (Some(rows), Some(values)) =
                (pattern.row_indices.get(range.clone()), pattern.values.get(range))
            else {
                continue;
            };
            for (&row, &value) in rows.iter().zip(values) {
                add(row, value * xc);
            }
        }
        for &(row, column, value) in &self.outside {
            add(row, value * x.get(column).copied().unwrap_or(0.0));
        }
    }
}

/// A frozen pivot is accepted while it is at least this share of the largest entry below it
/// in its column. Partial pivoting keeps every multiplier at most 1; this bound keeps them at
/// most 1000, which the growth analysis of threshold pivoting (Duff, Erisman & Reid, *Direct
/// Methods for Sparse Matrices*, threshold partial pivoting) allows with a loss of at most
/// three digits, while switching transistors move entries by decades between iterations.
const FROZEN_PIVOT_SHARE: f64 = 1e-3;

/// L and U with the row pivots and fill pattern of a pivoting factorisation, refactored with
/// new values without any search (left-looking, columns in pivot order). Indices are all
/// below `size` by construction in [`FrozenFactors::from_pivoted`], which checks them.
#[derive(Debug, Clone)]
struct FrozenFactors {
    size: usize,
    /// Pivot step → original row, and original row → pivot step.
    row_order: Vec<usize>,
    row_step: Vec<usize>,
    /// Pivot step → original column.
    column_order: Vec<usize>,
    /// Strictly lower part of L by columns (unit diagonal implied), rows as pivot steps.
    l_starts: Vec<usize>,
    l_rows: Vec<usize>,
    l_values: Vec<f64>,
    /// Strictly upper part of U by columns, rows as ascending pivot steps, and the inverse of
    /// its diagonal.
    u_starts: Vec<usize>,
    u_rows: Vec<usize>,
    u_values: Vec<f64>,
    /// 1 / each diagonal entry: the back substitution multiplies (a division's latency is
    /// several multiplications', and each step of the substitution waits for the one before).
    u_inverse: Vec<f64>,
    /// Pivot step of the row of each stored entry of the pattern.
    entry_steps: Vec<usize>,
    work: Vec<f64>,
    /// The pattern's values the factors are of: a column of the factors whose entries of A
    /// and whose updating columns are all unchanged is left as it is. (A refused pivot makes
    /// the solver drop these factors, so they never outlive a failed refactorisation.)
    factored_values: Vec<f64>,
    /// Per pivot step: recomputed at the last refactorisation.
    recomputed: Vec<bool>,
}

impl FrozenFactors {
    /// Copies faer's factors; `None` when anything is inconsistent (then every solve pivots).
    fn from_pivoted(pattern: &Pattern, symbolic: &Symbolic, numeric: &Numeric) -> Option<FrozenFactors> {
        let size = pattern.size;
        let l = numeric.lu.l_factor_unsorted();
        let u = numeric.lu.u_factor_unsorted();
        let row_step = numeric.row_order_inverse.clone();
        let mut frozen = FrozenFactors {
            size,
            row_order: numeric.row_order.clone(),
            column_order: symbolic.column_order.clone(),
            l_starts: Vec::with_capacity(size + 1),
            l_rows: Vec::new(),
            l_values: Vec::new(),
            u_starts: Vec::with_capacity(size + 1),
            u_rows: Vec::new(),
            u_values: Vec::new(),
            u_inverse: vec![0.0; size],
            entry_steps: Vec::with_capacity(pattern.row_indices.len()),
            work: vec![0.0; size],
            factored_values: pattern.values.clone(),
            recomputed: vec![true; size],
            row_step,
        };
        if frozen.row_order.len() != size
            || frozen.row_step.len() != size
            || frozen.column_order.len() != size
        {
            return None;
        }
        let mut column: Vec<(usize, f64)> = Vec::new();
        for j in 0..size {
            frozen.l_starts.push(frozen.l_rows.len());
            for (&row, &value) in l.symbolic().row_idx_of_col_raw(j).iter().zip(l.val_of_col(j)) {
                if row > j && row < size {
                    frozen.l_rows.push(row);
                    frozen.l_values.push(value);
                } else if row != j {
                    return None;
                }
            }
            frozen.u_starts.push(frozen.u_rows.len());
            column.clear();
            for (&row, &value) in u.symbolic().row_idx_of_col_raw(j).iter().zip(u.val_of_col(j)) {
                if row < j {
                    column.push((row, value));
                } else if row == j {
                    *frozen.u_inverse.get_mut(j)? = 1.0 / value;
                } else {
                    return None;
                }
            }
            // Ascending steps are a topological order of the column's updates.
            column.sort_by_key(|entry| entry.0);
            frozen.u_rows.extend(column.iter().map(|entry| entry.0));
            frozen.u_values.extend(column.iter().map(|entry| entry.1));
        }
        frozen.l_starts.push(frozen.l_rows.len());
        frozen.u_starts.push(frozen.u_rows.len());
        // Every entry of A must fall inside the frozen pattern of its column, or the
        // refactorisation would leave values behind in the work vector.
        let mut inside = vec![false; size];
        for j in 0..size {
            let q = *frozen.column_order.get(j)?;
            let (l_range, u_range) =
                (frozen.l_starts[j]..frozen.l_starts[j + 1], frozen.u_starts[j]..frozen.u_starts[j + 1]);
            for &step in frozen.l_rows[l_range.clone()].iter().chain(&frozen.u_rows[u_range.clone()]) {
                inside[step] = true;
            }
            inside[j] = true;
            for slot in *pattern.column_starts.get(q)?..*pattern.column_starts.get(q + 1)? {
                let step = *frozen.row_step.get(*pattern.row_indices.get(slot)?)?;
                if !inside.get(step).copied().unwrap_or(false) {
                    return None;
                }
            }
            for &step in frozen.l_rows[l_range].iter().chain(&frozen.u_rows[u_range]) {
                inside[step] = false;
            }
            inside[j] = false;
        }
        for &row in &pattern.row_indices {
            frozen.entry_steps.push(*frozen.row_step.get(row)?);
        }
        Some(frozen)
    }

    /// New values into the frozen pattern, `Ok` with the number of columns left as they
    /// were; `Err(step)` at the first unacceptable pivot.
    // All indices were checked against `size` when the factors were frozen.
    #[allow(clippy::indexing_slicing)]
    fn refactor(&mut self, pattern: &Pattern, scale: f64) -> Result<usize, usize> {
        let work = &mut self.work;
        let (l_rows, l_values, l_starts) = (&self.l_rows, &mut self.l_values, &self.l_starts);
        // Always true (a new pattern brings new factors); it keeps the slices below in range.
        let known = self.factored_values.len() == pattern.values.len();
        let mut kept = 0;
        for j in 0..self.size {
            let q = self.column_order[j];
            let entries = pattern.column_starts[q]..pattern.column_starts[q + 1];
            let uses = self.u_starts[j]..self.u_starts[j + 1];
            // Column j of L and U depends on column q of A and on the columns of L its U
            // entries name; when none of them changed, neither did it.
            let unchanged = known
                && pattern.values[entries.clone()] == self.factored_values[entries.clone()]
                && self.u_rows[uses.clone()].iter().all(|&k| !self.recomputed[k]);
            self.recomputed[j] = !unchanged;
            if unchanged {
                kept += 1;
                continue;
            }
            for (&step, &value) in self.entry_steps[entries.clone()].iter().zip(&pattern.values[entries]) {
                work[step] += value;
            }
            for (&k, u) in self.u_rows[uses.clone()].iter().zip(&mut self.u_values[uses]) {
                let xk = work[k];
                work[k] = 0.0;
                *u = xk;
                if xk != 0.0 {
                    let column = l_starts[k]..l_starts[k + 1];
                    for (&i, &l) in l_rows[column.clone()].iter().zip(&l_values[column]) {
                        work[i] -= l * xk;
                    }
                }
            }
            let pivot = work[j];
            work[j] = 0.0;
            let column = l_starts[j]..l_starts[j + 1];
            let largest = l_rows[column.clone()].iter().fold(0.0f64, |m, &i| larger(m, work[i].abs()));
            let magnitude = pivot.abs();
            let acceptable = magnitude > scale * ZERO_PIVOT_SHARE
                && magnitude >= FROZEN_PIVOT_SHARE * largest
                && magnitude.is_finite()
                && largest.is_finite();
            if !acceptable {
                work.iter_mut().for_each(|v| *v = 0.0);
                return Err(j);
            }
            let inverse = 1.0 / pivot;
            self.u_inverse[j] = inverse;
            for (&i, l) in l_rows[column.clone()].iter().zip(&mut l_values[column]) {
                *l = work[i] * inverse;
                work[i] = 0.0;
            }
        }
        self.factored_values.clone_from(&pattern.values);
        Ok(kept)
    }

    /// Solves in place: permute, forward with unit L, back with U, permute back.
    #[allow(clippy::indexing_slicing)]
    fn solve(&mut self, rhs: &mut [f64]) {
        let work = &mut self.work;
        for (w, &row) in work.iter_mut().zip(&self.row_order) {
            *w = rhs[row];
        }
        for j in 0..self.size {
            let wj = work[j];
            if wj != 0.0 {
                let column = self.l_starts[j]..self.l_starts[j + 1];
                for (&i, &l) in self.l_rows[column.clone()].iter().zip(&self.l_values[column]) {
                    work[i] -= l * wj;
                }
            }
        }
        for j in (0..self.size).rev() {
            let zj = work[j] * self.u_inverse[j];
            work[j] = zj;
            if zj != 0.0 {
                let column = self.u_starts[j]..self.u_starts[j + 1];
                for (&k, &u) in self.u_rows[column.clone()].iter().zip(&self.u_values[column]) {
                    work[k] -= u * zj;
                }
            }
        }
        for (w, &column) in work.iter_mut().zip(&self.column_order) {
            rhs[column] = *w;
            *w = 0.0;
        }
    }
}

/// Systems with at least this many unknowns go to the sparse solver. Measured with
/// `cargo bench -p flipwright-core --bench chain -- crossover` and callgrind on whole runs
/// (16 input edges): the sparse solver already needs 0.84 of the dense instructions for one
/// stage (12 unknowns) and 0.62 for four (30); smaller systems were not measured and stay
/// dense.
pub const SPARSE_FROM_UNKNOWNS: usize = 12;

/// Dense below [`SPARSE_FROM_UNKNOWNS`] unknowns, sparse from there: what [`simulate`]
/// uses.
///
/// [`simulate`]: super::integrator::simulate
#[derive(Debug, Default)]
pub struct AutomaticSolver {
    dense: DenseSolver,
    sparse: SparseSolver,
    use_sparse: bool,
}

impl AutomaticSolver {
    /// True when the last reset chose the sparse solver.
    pub fn is_sparse(&self) -> bool {
        self.use_sparse
    }
}

impl LinearSolver for AutomaticSolver {
    fn reset(&mut self, size: usize) {
        self.use_sparse = size >= SPARSE_FROM_UNKNOWNS;
        if self.use_sparse {
            self.sparse.reset(size);
        } else {
            self.dense.reset(size);
        }
    }
    fn add(&mut self, row: usize, column: usize, value: f64) {
        if self.use_sparse {
            self.sparse.add(row, column, value);
        } else {
            self.dense.add(row, column, value);
        }
    }
    fn solve_in_place(&mut self, rhs: &mut Vec<f64>) -> Result<(), SingularColumn> {
        if self.use_sparse {
            self.sparse.solve_in_place(rhs)
        } else {
            self.dense.solve_in_place(rhs)
        }
    }
    fn multiply(&self, x: &[f64], product: &mut Vec<f64>, magnitude: &mut Vec<f64>) {
        if self.use_sparse {
            self.sparse.multiply(x, product, magnitude);
        } else {
            self.dense.multiply(x, product, magnitude);
        }
    }
    fn save_base(&mut self) {
        if self.use_sparse {
            self.sparse.save_base();
        } else {
            self.dense.save_base();
        }
    }
    fn reset_to_base(&mut self, size: usize) -> bool {
        self.use_sparse = size >= SPARSE_FROM_UNKNOWNS;
        if self.use_sparse {
            self.sparse.reset_to_base(size)
        } else {
            self.dense.reset_to_base(size)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// An MNA-like system: nodes joined by conductances (each node also to ground, so it is
    /// regular), a few one-way transconductances (a transistor's gm from base to collector)
    /// and voltage sources from nodes to ground (a ±1 row and column with a zero diagonal).
    #[derive(Debug, Clone)]
    struct System {
        size: usize,
        entries: Vec<(usize, usize, f64)>,
        rhs: Vec<f64>,
    }

    fn mna_system() -> impl Strategy<Value = System> {
        (3usize..40, 0usize..4).prop_flat_map(|(nodes, sources)| {
            let sources = sources.min(nodes);
            (
                proptest::collection::vec((0..nodes, 0..nodes, 1e-3..1e-2f64), nodes..3 * nodes),
                proptest::collection::vec(1e-3..1e-2f64, nodes),
                proptest::collection::vec((0..nodes, 0..nodes, -2e-3..2e-3f64), 0..nodes / 2 + 1),
                proptest::collection::vec(-10.0..10.0f64, nodes + sources),
            )
                .prop_map(move |(branches, to_ground, gains, rhs)| {
                    let mut entries = Vec::new();
                    for (a, b, g) in branches {
                        if a != b {
                            entries.extend([(a, a, g), (b, b, g), (a, b, -g), (b, a, -g)]);
                        }
                    }
                    for (node, g) in to_ground.into_iter().enumerate() {
                        entries.push((node, node, g));
                    }
                    for (row, column, gm) in gains {
                        entries.push((row, column, gm));
                    }
                    // Sources on the first nodes, one each, so no two are in parallel.
                    for source in 0..sources {
                        let row = nodes + source;
                        entries.extend([(source, row, 1.0), (row, source, 1.0)]);
                    }
                    System { size: nodes + sources, entries, rhs }
                })
        })
    }

    fn solve_with<S: LinearSolver>(
        solver: &mut S,
        system: &System,
        scale: f64,
    ) -> Result<Vec<f64>, SingularColumn> {
        solver.reset(system.size);
        for &(row, column, value) in &system.entries {
            solver.add(row, column, value * scale);
        }
        let mut x = system.rhs.clone();
        solver.solve_in_place(&mut x)?;
        Ok(x)
    }

    fn close(a: &[f64], b: &[f64]) -> bool {
        let norm = b.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        a.len() == b.len() && a.iter().zip(b).all(|(x, y)| (x - y).abs() <= 1e-12 * norm)
    }

    proptest! {
        #![proptest_config(ProptestConfig { cases: 64, ..ProptestConfig::default() })]
        /// Partial-pivoting LU is backward stable (Higham, *Accuracy and Stability of
        /// Numerical Algorithms*, ch. 9): on these well-conditioned systems (every node has
        /// 1–10 mS to ground, gains below that) dense and sparse agree to 1e-12 of the
        /// largest unknown, on the pivoting first solve and on frozen refactorisations.
        #[test]
        fn sparse_and_dense_agree(system in mna_system()) {
            let mut sparse = SparseSolver::default();
            let mut pivoting = SparseSolver::always_pivoting();
            let mut dense = DenseSolver::default();
            for scale in [1.0, 1.7, 0.4] {
                let reference = solve_with(&mut dense, &system, scale);
                prop_assert!(reference.is_ok(), "{reference:?}");
                let reference = reference.unwrap_or_default();
                let frozen = solve_with(&mut sparse, &system, scale).unwrap_or_default();
                let fresh = solve_with(&mut pivoting, &system, scale).unwrap_or_default();
                prop_assert!(close(&frozen, &reference), "{frozen:?} vs {reference:?}");
                prop_assert!(close(&fresh, &reference), "{fresh:?} vs {reference:?}");
            }
            let statistics = sparse.statistics();
            prop_assert_eq!(statistics.symbolic_analyses, 1);
            prop_assert_eq!(statistics.frozen_refactorisations + statistics.fallbacks, 2);
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig { cases: 64, ..ProptestConfig::default() })]
        /// A frozen refactorisation recomputes only the columns of the factors whose entries
        /// or updating columns changed (left-looking LU: column j of L and U is a function of
        /// column j of A and of the columns of L that U's column j names; Davis, *Direct
        /// Methods for Sparse Linear Systems*, §6.2, from memory). Changing some entries and
        /// then others must give the dense answer every time, as a full refactorisation does.
        #[test]
        fn refactoring_only_changed_columns_gives_the_full_answer(
            system in mna_system(),
            changes in proptest::collection::vec((any::<proptest::sample::Index>(), 0.5..2.0f64), 1..6),
        ) {
            let mut sparse = SparseSolver::default();
            let mut dense = DenseSolver::default();
            let mut changed = system.clone();
            prop_assert!(solve_with(&mut sparse, &changed, 1.0).is_ok());
            let changes_made = changes.len();
            for (index, factor) in changes {
                if let Some(entry) = changed.entries.get_mut(index.index(system.entries.len())) {
                    entry.2 *= factor;
                }
                let reference = solve_with(&mut dense, &changed, 1.0);
                let partial = solve_with(&mut sparse, &changed, 1.0);
                prop_assert_eq!(partial.is_ok(), reference.is_ok());
                if let (Ok(partial), Ok(reference)) = (partial, reference) {
                    prop_assert!(close(&partial, &reference), "{partial:?} vs {reference:?}");
                }
            }
            // One pattern, one analysis: every later solve was a refactorisation (or its
            // fallback to pivoting), never a new analysis.
            let statistics = sparse.statistics();
            prop_assert_eq!(statistics.symbolic_analyses, 1);
            prop_assert_eq!(statistics.frozen_refactorisations + statistics.fallbacks, changes_made);
        }
    }

    #[test]
    fn a_change_in_one_of_two_separate_ladders_keeps_the_other_ladders_columns() {
        // Two ladders of conductances (node k to k + 1, each node to ground) with no entry
        // between them: the matrix is block diagonal, so in any elimination order no column
        // of one block depends on the other (the factors of a block-diagonal matrix are
        // block diagonal; common practice). Changing a diagonal entry of the second ladder
        // must leave all six columns of the first as they were, and recompute at least the
        // changed one.
        let (rungs, size) = (6, 12);
        let mut ladders = System { size, entries: Vec::new(), rhs: vec![1.0; size] };
        for first in [0, rungs] {
            for k in first..first + rungs {
                ladders.entries.push((k, k, 2e-3));
                if k + 1 < first + rungs {
                    ladders.entries.extend([
                        (k, k, 1e-3),
                        (k + 1, k + 1, 1e-3),
                        (k, k + 1, -1e-3),
                        (k + 1, k, -1e-3),
                    ]);
                }
            }
        }
        let mut sparse = SparseSolver::default();
        assert!(solve_with(&mut sparse, &ladders, 1.0).is_ok());
        assert!(solve_with(&mut sparse, &ladders, 1.0).is_ok());
        let unchanged = sparse.statistics();
        assert_eq!(unchanged.columns_refactored, 0, "nothing changed: {unchanged:?}");
        if let Some(entry) = ladders.entries.iter_mut().find(|e| e.0 == rungs + 2 && e.1 == rungs + 2) {
            entry.2 = 7e-3;
        }
        let outcomes =
            (solve_with(&mut sparse, &ladders, 1.0), solve_with(&mut DenseSolver::default(), &ladders, 1.0));
        assert!(
            matches!(&outcomes, (Ok(partial), Ok(reference)) if close(partial, reference)),
            "both solves succeed and agree: {outcomes:?}"
        );
        let after = sparse.statistics();
        let refactored = after.columns_refactored - unchanged.columns_refactored;
        assert!((1..=size - rungs).contains(&refactored), "{refactored} of {size} columns recomputed");
    }

    #[test]
    fn singular_matrices_name_a_column() {
        // Two voltage sources in parallel on node 0 (rows 1 and 2 equal), and a node that
        // nothing reaches (column 1 of the second system empty).
        let parallel = System {
            size: 3,
            entries: vec![(0, 0, 1e-3), (0, 1, 1.0), (1, 0, 1.0), (0, 2, 1.0), (2, 0, 1.0)],
            rhs: vec![0.0, 1.0, 2.0],
        };
        let floating = System { size: 2, entries: vec![(0, 0, 1.0)], rhs: vec![1.0, 1.0] };
        let zero_value = System { size: 2, entries: vec![(0, 0, 1.0), (1, 1, 0.0)], rhs: vec![1.0, 1.0] };
        for system in [&parallel, &floating, &zero_value] {
            for solver in [SparseSolver::default(), SparseSolver::always_pivoting()] {
                let mut solver = solver;
                let outcome = solve_with(&mut solver, system, 1.0);
                assert!(
                    matches!(outcome, Err(SingularColumn { column }) if column < system.size),
                    "{outcome:?}"
                );
            }
            assert!(solve_with(&mut DenseSolver::default(), system, 1.0).is_err());
        }
        let mut sparse = SparseSolver::default();
        assert_eq!(solve_with(&mut sparse, &floating, 1.0), Err(SingularColumn { column: 1 }));
    }

    #[test]
    fn a_vanishing_frozen_pivot_falls_back_to_pivoting() {
        // First [[4, 1], [1, 4]]: the pivots are the diagonal. Then [[0, 1], [1, 0]] with the
        // same pattern: a frozen diagonal pivot would be 0, so the solver must pivot afresh
        // (rows swapped) and still give x = (b1, b0).
        let first = System {
            size: 2,
            entries: vec![(0, 0, 4.0), (0, 1, 1.0), (1, 0, 1.0), (1, 1, 4.0)],
            rhs: vec![5.0, 5.0],
        };
        let swapped = System {
            size: 2,
            entries: vec![(0, 0, 0.0), (0, 1, 1.0), (1, 0, 1.0), (1, 1, 0.0)],
            rhs: vec![3.0, 7.0],
        };
        let mut solver = SparseSolver::default();
        assert_eq!(solve_with(&mut solver, &first, 1.0), Ok(vec![1.0, 1.0]));
        assert_eq!(solve_with(&mut solver, &swapped, 1.0), Ok(vec![7.0, 3.0]));
        let statistics = solver.statistics();
        assert_eq!((statistics.fallbacks, statistics.pivoting_factorisations), (1, 2), "{statistics:?}");
        // A tiny (not zero) pivot, 1e-9 against 1 below it, also falls back.
        let tiny = System {
            size: 2,
            entries: vec![(0, 0, 1e-9), (0, 1, 1.0), (1, 0, 1.0), (1, 1, 1e-9)],
            rhs: vec![1.0, 1.0],
        };
        let mut solver = SparseSolver::default();
        let _ = solve_with(&mut solver, &first, 1.0);
        let x = solve_with(&mut solver, &tiny, 1.0).unwrap_or_default();
        assert!(close(&x, &solve_with(&mut DenseSolver::default(), &tiny, 1.0).unwrap_or_default()), "{x:?}");
        assert_eq!(solver.statistics().fallbacks, 1);
    }

    /// A base is where [`LinearSolver::reset_to_base`] restarts from, bit for bit the same
    /// as stamping it again, and any plain reset drops it.
    fn base_round_trip<S: LinearSolver>(solver: &mut S) {
        let constant = [(0, 0, 2.0), (0, 1, -1.0), (1, 0, -1.0), (1, 1, 2.0), (2, 2, 1.0)];
        let varying = [(0, 0, 0.25), (2, 0, 0.5), (2, 2, 0.125)];
        let stamp = |solver: &mut S, entries: &[(usize, usize, f64)]| {
            for &(row, column, value) in entries {
                solver.add(row, column, value);
            }
        };
        assert!(!solver.reset_to_base(3), "no base before one is saved");
        // As the assembly does it: from the base when there is one, else stamp the constant
        // entries and save them (the sparse solver saves none while they are outside its
        // pattern, i.e. until its first solve has learnt it).
        let mut first: Option<Vec<f64>> = None;
        let mut restored = Vec::new();
        for _ in 0..3 {
            let from_base = solver.reset_to_base(3);
            if !from_base {
                solver.reset(3);
                stamp(solver, &constant);
                solver.save_base();
            }
            restored.push(from_base);
            stamp(solver, &varying);
            let mut x = vec![1.0, 2.0, 3.0];
            assert_eq!(solver.solve_in_place(&mut x), Ok(()));
            match &first {
                Some(first) => assert_eq!(&x, first),
                None => first = Some(x),
            }
        }
        assert_eq!(restored.last(), Some(&true), "{restored:?}");
        assert!(!solver.reset_to_base(4), "a base is for its own size");
        solver.reset(3);
        assert!(!solver.reset_to_base(3), "a reset drops the base");
    }

    #[test]
    fn a_base_restarts_assembly_and_a_reset_drops_it() {
        base_round_trip(&mut DenseSolver::default());
        base_round_trip(&mut SparseSolver::default());
        base_round_trip(&mut AutomaticSolver::default());
    }

    #[test]
    fn new_entries_extend_the_pattern_once() {
        // The operating point stamps hint conductances that the transient does not: the
        // pattern grows once, and is analysed again only then.
        let base = System { size: 2, entries: vec![(0, 0, 1.0), (1, 1, 1.0)], rhs: vec![1.0, 2.0] };
        let mut extended = base.clone();
        extended.entries.push((0, 1, 0.5));
        let mut solver = SparseSolver::default();
        assert_eq!(solve_with(&mut solver, &base, 1.0), Ok(vec![1.0, 2.0]));
        assert_eq!(solve_with(&mut solver, &extended, 1.0), Ok(vec![0.0, 2.0]));
        assert_eq!(solve_with(&mut solver, &base, 1.0), Ok(vec![1.0, 2.0]));
        assert_eq!(solver.statistics().symbolic_analyses, 2);
        assert_eq!(solver.pattern_entries(), 3);
    }
}
