//! Run a built circuit for a number of input edges and check the count it holds after each:
//! every stage read from its two collectors just before the next active edge.

use serde::Serialize;

use super::build::BuiltCircuit;
use crate::transient::{simulate, RunStatistics, SimulationError, TransientResult, TransientSettings};

/// The two collectors must differ by this share of the collector supply for a stage's state
/// to count as decided (our choice: well clear of the middle, below any usable swing).
pub const DECIDED_SHARE_OF_SUPPLY: f64 = 0.2;
/// States are read this share of a period before the next active edge.
const SAMPLE_LEAD_SHARE: f64 = 0.02;

/// Accuracy and limits of the runs a verification makes.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, serde::Deserialize)]
pub struct RunAccuracy {
    /// The engine's relative tolerance (charges and Newton).
    pub relative_tolerance: f64,
    /// The engine's absolute tolerance on each charge's local truncation error, C.
    pub charge_tolerance_c: f64,
    /// Most accepted steps one run may take.
    pub max_steps: usize,
}

impl Default for RunAccuracy {
    fn default() -> Self {
        RunAccuracy { relative_tolerance: 1e-3, charge_tolerance_c: 1e-15, max_steps: 2_000_000 }
    }
}

/// The charge tolerance of runs that check a chain's count ([`RunAccuracy::for_counting`]).
/// A count needs each stage's state before the next edge, not its edges to picoseconds:
/// measured on the ten-stage benchmark chain (`cargo bench -p flipwright-core --bench chain
/// -- accuracy-only 10 128 1e-13`, 2026-12-03), every stage's 255 edges stay within 0.16 ns
/// (median) and 0.76 ns (largest) of a run at relative tolerance 1e-5 and 1 fC, against 0.010
/// and 0.137 ns at the default 1 fC, in half the steps (17 566 against 35 343). The edges of
/// these chains take tens of nanoseconds and their periods microseconds.
pub const COUNTING_CHARGE_TOLERANCE_C: f64 = 1e-13;

impl RunAccuracy {
    /// For runs that check a chain's count: the default with
    /// [`COUNTING_CHARGE_TOLERANCE_C`]. Measurements of a stage's trigger sensitivity and
    /// toggle rate keep the default.
    pub fn for_counting() -> Self {
        RunAccuracy { charge_tolerance_c: COUNTING_CHARGE_TOLERANCE_C, ..RunAccuracy::default() }
    }

    /// What verification runs a circuit of `stages` stages at: a stage alone at the default
    /// (its runs time edges for the searches), a chain at [`RunAccuracy::for_counting`]. The
    /// native and wasm chain benchmarks both time their runs at this accuracy.
    pub fn for_stages(stages: usize) -> Self {
        if stages > 1 {
            RunAccuracy::for_counting()
        } else {
            RunAccuracy::default()
        }
    }
}

/// The count checked after each input edge.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CountCheck {
    pub stages: usize,
    pub edges: usize,
    /// Count before the first edge (every stage should start at 0).
    pub initial: Option<u64>,
    /// Expected count after edge k (k + 1 modulo 2^stages).
    pub expected: Vec<u64>,
    /// Count read after edge k; `None` where some stage sat between its states.
    pub observed: Vec<Option<u64>>,
    /// First edge (0-based) after which the count was wrong.
    pub first_error: Option<usize>,
    pub correct: bool,
    pub statistics: RunStatistics,
}

impl CountCheck {
    /// How many edges in a row, from the first, gave the right count.
    pub fn correct_edges(&self) -> usize {
        self.first_error.unwrap_or(self.edges)
    }
}

/// Why a check could not be made.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum RunError {
    Simulation(SimulationError),
    /// Occurs when asked for no edges, or more than a run may hold.
    EdgeCount {
        requested: usize,
    },
    /// Occurs when the progress callback asked to stop.
    Cancelled,
}

impl std::fmt::Display for RunError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            RunError::Simulation(error) => write!(f, "{error}"),
            RunError::EdgeCount { requested } => {
                write!(f, "a run needs 1 to {MAX_EDGES} input edges, not {requested}")
            }
            RunError::Cancelled => write!(f, "cancelled"),
        }
    }
}

impl std::error::Error for RunError {}

impl From<SimulationError> for RunError {
    fn from(error: SimulationError) -> Self {
        RunError::Simulation(error)
    }
}

/// Most input edges one run may be asked for.
pub const MAX_EDGES: usize = 1 << 17;

/// Value of a waveform at `time_s`, linear between recorded points.
pub fn value_at(times: &[f64], values: &[f64], time_s: f64) -> Option<f64> {
    let upper = times.partition_point(|&t| t < time_s);
    if upper == 0 {
        return values.first().copied();
    }
    let (t1, v1) = (*times.get(upper)?, *values.get(upper)?);
    let (t0, v0) = (times[upper - 1], *values.get(upper - 1)?);
    if t1 > t0 {
        Some(v0 + (v1 - v0) * (time_s - t0) / (t1 - t0))
    } else {
        Some(v1)
    }
}

/// The count held at `time_s`, `None` if any stage is undecided or missing.
pub fn count_at(built: &BuiltCircuit, result: &TransientResult, time_s: f64) -> Option<u64> {
    let decided = DECIDED_SHARE_OF_SUPPLY * built.collector_supply_v;
    let mut count = 0u64;
    for (bit, stage) in built.stages.iter().enumerate() {
        let c1 = value_at(&result.time_s, result.voltage(&stage.collectors[0])?, time_s)?;
        let c2 = value_at(&result.time_s, result.voltage(&stage.collectors[1])?, time_s)?;
        // Q is Q2's collector: high means bit 1.
        if c2 - c1 > decided {
            count |= 1 << bit;
        } else if c1 - c2 <= decided {
            return None;
        }
    }
    Some(count)
}

/// Settings for a run covering `edges` active edges and the period after the last.
pub fn run_settings(built: &BuiltCircuit, edges: usize, accuracy: &RunAccuracy) -> TransientSettings {
    let period = built.pulse.period_s();
    let stop = built.pulse.edge_time_s(edges);
    let mut settings = TransientSettings::new(stop);
    settings.max_step_s = Some((stop / 50.0).min(period / 4.0));
    settings.initial_step_s = Some(built.pulse.effective_edge_s() * 1e-3);
    settings.relative_tolerance = accuracy.relative_tolerance;
    settings.charge_tolerance_c = accuracy.charge_tolerance_c;
    settings.max_steps = accuracy.max_steps;
    settings
}

/// Checks an already simulated run of a plain binary chain (count modulo 2^stages).
pub fn check_counts(built: &BuiltCircuit, result: &TransientResult, edges: usize) -> CountCheck {
    check_counts_against(built, result, edges, &binary_cycle(built))
}

/// Settled counts of a plain binary chain over one cycle: 1, 2, …, 2^n − 1, 0.
fn binary_cycle(built: &BuiltCircuit) -> Vec<u64> {
    let modulus = 1u64 << built.stages.len().min(63);
    (1..=modulus).map(|k| k % modulus).collect()
}

/// Checks a run against a settled-state cycle: `cycle[k]` is the count after edge k + 1 of
/// each cycle from the all-zero state (the planner's count-sequence table, for instance).
pub fn check_counts_against(
    built: &BuiltCircuit,
    result: &TransientResult,
    edges: usize,
    cycle: &[u64],
) -> CountCheck {
    let stages = built.stages.len();
    let lead = SAMPLE_LEAD_SHARE * built.pulse.period_s();
    let initial = count_at(built, result, built.pulse.first_edge_s() - lead);
    let mut expected = Vec::with_capacity(edges);
    let mut observed = Vec::with_capacity(edges);
    let mut first_error = if initial == Some(0) { None } else { Some(0) };
    for k in 0..edges {
        let want = if cycle.is_empty() { 0 } else { cycle[k % cycle.len()] };
        let got = count_at(built, result, built.pulse.edge_time_s(k + 1) - lead);
        if got != Some(want) && first_error.is_none() {
            first_error = Some(k);
        }
        expected.push(want);
        observed.push(got);
    }
    CountCheck {
        stages,
        edges,
        initial,
        expected,
        observed,
        first_error,
        correct: first_error.is_none(),
        statistics: result.statistics,
    }
}

/// Simulates `edges` input edges and checks the count after each; the waveforms come back
/// too, for plots and CSV.
pub fn run_and_check(
    built: &BuiltCircuit,
    edges: usize,
    accuracy: &RunAccuracy,
) -> Result<(CountCheck, TransientResult), RunError> {
    run_and_check_against(built, edges, accuracy, &binary_cycle(built))
}

/// [`run_and_check`] against a settled-state cycle (see [`check_counts_against`]).
pub fn run_and_check_against(
    built: &BuiltCircuit,
    edges: usize,
    accuracy: &RunAccuracy,
    cycle: &[u64],
) -> Result<(CountCheck, TransientResult), RunError> {
    if edges == 0 || edges > MAX_EDGES {
        return Err(RunError::EdgeCount { requested: edges });
    }
    let settings = run_settings(built, edges, accuracy);
    let result = simulate(&built.circuit, &settings, &built.hints)?;
    Ok((check_counts_against(built, &result, edges, cycle), result))
}
