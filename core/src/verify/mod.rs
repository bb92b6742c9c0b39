//! Verification by simulation: the designed stage (or a ripple chain of it) built as a
//! transient circuit, run, and checked count by count; trigger sensitivity and maximum toggle
//! rate measured by bisection and reported beside the handbook estimates.
//!
//! - [`build`]: design → circuit (input pulse, corner, stage and chain builders);
//! - [`count`]: a run over K input edges and the count read after each;
//! - [`search`]: bisection on amplitude and rate;
//! - [`timing`]: switching times measured on a run.

pub mod build;
pub mod count;
pub mod search;
pub mod timing;

use serde::{Deserialize, Serialize};

pub use build::{chain_circuit, stage_circuit, BuildError, BuiltCircuit, InputPulse, SimulationCorner};
pub use count::{run_and_check, CountCheck, RunAccuracy, RunError};
pub use search::{measure_max_rate, measure_sensitivity, Measured, SearchOutcome, SearchSettings};
pub use timing::{measure_timings, MeasuredTimings};

use crate::stage::analysis::analyse;
use crate::stage::StageDesign;
use crate::transient::TransientResult;

/// What a stage verification runs.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct VerifyOptions {
    /// Edges of the nominal run at the design's rate and trigger amplitude.
    pub nominal_edges: usize,
    pub corner: SimulationCorner,
    pub search: SearchSettings,
    /// Also bisect for sensitivity and maximum rate (the long part).
    pub measure: bool,
}

impl Default for VerifyOptions {
    fn default() -> Self {
        VerifyOptions {
            nominal_edges: 8,
            corner: SimulationCorner::nominal(),
            search: SearchSettings::default(),
            measure: true,
        }
    }
}

/// Where a verification has got to, for a progress bar.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Progress {
    pub done_runs: usize,
    /// Upper bound on the runs the whole verification makes.
    pub total_runs: usize,
    pub phase: &'static str,
}

/// Everything a stage verification found.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StageVerification {
    pub pulse: InputPulse,
    pub corner: SimulationCorner,
    /// The nominal run: the stage toggles on every edge at the design rate.
    pub nominal: CountCheck,
    /// Switching times measured on the nominal run.
    pub timings: Option<MeasuredTimings>,
    /// The charge-control estimates to compare them with, s: storage time; collector
    /// *current* rise at turn-on (seen as the collector voltage's fall; None when the drive
    /// cannot saturate) and current fall at turn-off (the start of the collector voltage's
    /// rise, which the collector resistor and C1 then slow further).
    pub estimated_storage_s: f64,
    pub estimated_current_rise_s: Option<f64>,
    pub estimated_current_fall_s: f64,
    pub sensitivity: Option<Measured>,
    pub max_rate: Option<Measured>,
    pub assumptions: Vec<String>,
}

/// Errors of a verification.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum VerifyError {
    Build(BuildError),
    Run(RunError),
    /// Occurs when the analysis that provides the estimates fails.
    Analysis(String),
    /// Occurs when a chain method has no simulated circuit yet (reset on count).
    NotSimulated,
}

impl std::fmt::Display for VerifyError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            VerifyError::Build(error) => write!(f, "{error}"),
            VerifyError::Run(error) => write!(f, "{error}"),
            VerifyError::Analysis(reason) => write!(f, "the analysis behind the estimates failed: {reason}"),
            VerifyError::NotSimulated => write!(
                f,
                "the reset-on-count chain is not simulated yet: verify the skip-feedback plan, or a power of two"
            ),
        }
    }
}

impl std::error::Error for VerifyError {}

impl From<BuildError> for VerifyError {
    fn from(error: BuildError) -> Self {
        VerifyError::Build(error)
    }
}
impl From<RunError> for VerifyError {
    fn from(error: RunError) -> Self {
        VerifyError::Run(error)
    }
}

/// Bisection runs of one search at most: two bound checks and the bisections to resolution
/// (sensitivity: 2/0.005 = 400 → 9; rate: ln 64 / ln 1.02 ≈ 210 → 8; one spare each).
const RUNS_PER_SEARCH: usize = 12;

/// The pulse a stage sees in service: the design's rate, its available trigger amplitude
/// (the requirement, or the stage's own swing when driven by an identical stage), square.
pub fn design_pulse(design: &StageDesign, available_amplitude_v: f64, edge_s: f64) -> InputPulse {
    InputPulse {
        amplitude_v: available_amplitude_v,
        rate_hz: design.input().requirements.toggle_rate_hz,
        edge_s,
        duty: 0.5,
    }
}

/// Verifies one stage: the nominal run, then (with `options.measure`) the two searches.
/// `progress` is called before every run; returning false cancels.
pub fn verify_stage(
    design: &StageDesign,
    options: &VerifyOptions,
    progress: &mut dyn FnMut(Progress) -> bool,
) -> Result<(StageVerification, TransientResult), VerifyError> {
    let report = analyse(design).map_err(|e| VerifyError::Analysis(e.to_string()))?;
    let switching = &report.switching;
    let pulse = design_pulse(design, switching.available_trigger_amplitude_v, options.search.edge_s);
    let total_runs = 1 + if options.measure { 2 * RUNS_PER_SEARCH } else { 0 };
    let mut done = 0;
    let mut tick = |phase: &'static str| {
        let go_on = progress(Progress { done_runs: done, total_runs, phase });
        done += 1;
        go_on
    };
    if !tick("nominal run") {
        return Err(VerifyError::Run(RunError::Cancelled));
    }
    let built = stage_circuit(design, &pulse, &options.corner)?;
    let (nominal, waveforms) = run_and_check(&built, options.nominal_edges, &options.search.accuracy)?;
    let timings = measure_timings(&built, &waveforms, 0);
    let (sensitivity, max_rate) = if options.measure {
        let sensitivity = measure_sensitivity(
            design,
            pulse.rate_hz,
            &options.corner,
            &options.search,
            switching.min_trigger_amplitude_v,
            || tick("trigger sensitivity"),
        )?;
        let max_rate = measure_max_rate(
            design,
            pulse.amplitude_v,
            &options.corner,
            &options.search,
            Some(switching.max_toggle_rate_hz),
            || tick("maximum toggle rate"),
        )?;
        (Some(sensitivity), Some(max_rate))
    } else {
        (None, None)
    };
    Ok((
        StageVerification {
            pulse,
            corner: options.corner,
            nominal,
            timings,
            estimated_storage_s: switching.storage_s,
            estimated_current_rise_s: switching.rise_s,
            estimated_current_fall_s: switching.fall_s,
            sensitivity,
            max_rate,
            assumptions: built.assumptions,
        },
        waveforms,
    ))
}

/// The pulse the first stage of a chain sees in service: the design's rate and its available
/// trigger amplitude (the requirement, or the swing of an identical driving stage), with
/// `edge_s` edges. Front ends pass it to [`verify_chain`].
pub fn service_pulse(design: &StageDesign, edge_s: f64) -> Result<InputPulse, VerifyError> {
    let report = analyse(design).map_err(|e| VerifyError::Analysis(e.to_string()))?;
    Ok(design_pulse(design, report.switching.available_trigger_amplitude_v, edge_s))
}

/// Verifies a ripple chain of `stages` copies of the stage: `edges` input edges at the
/// design's rate and amplitude, the count checked after each.
pub fn verify_chain(
    design: &StageDesign,
    stages: usize,
    edges: usize,
    pulse: &InputPulse,
    corner: &SimulationCorner,
    accuracy: &RunAccuracy,
) -> Result<(CountCheck, TransientResult, BuiltCircuit), VerifyError> {
    let built = chain_circuit(design, stages, pulse, corner)?;
    let (check, result) = run_and_check(&built, edges, accuracy)?;
    Ok((check, result, built))
}

/// The waveforms of an NPN-frame run in the design's real polarity: for a PNP design
/// (`sign` −1) every node voltage and source current is negated, as the analysis report does.
pub fn in_real_polarity(mut result: TransientResult, sign: f64) -> TransientResult {
    if sign < 0.0 {
        for wave in result.node_voltages_v.iter_mut().chain(result.source_currents_a.iter_mut()) {
            for value in wave.iter_mut() {
                *value = -*value;
            }
        }
    }
    result
}

/// Verifies a planned chain for any N by simulation: plain binary or skip feedback are
/// built (the reset method is not simulated yet), run for `edges` input edges, and the count
/// after each compared with the plan's settled count sequence.
pub fn verify_planned_chain(
    design: &StageDesign,
    plan: &crate::chain::MethodPlan,
    stage_count: usize,
    edges: usize,
    pulse: &InputPulse,
    corner: &SimulationCorner,
    accuracy: &RunAccuracy,
) -> Result<(CountCheck, TransientResult, BuiltCircuit), VerifyError> {
    let receiving: Vec<u32> = match &plan.method {
        crate::chain::Method::PlainBinary => Vec::new(),
        crate::chain::Method::SkipFeedback { receiving_stages, .. } => receiving_stages.clone(),
        crate::chain::Method::ResetOnCount { .. } => return Err(VerifyError::NotSimulated),
    };
    let built = build::chain_circuit_with_feedback(design, stage_count, &receiving, pulse, corner)?;
    let cycle: Vec<u64> = plan.count_sequence.iter().map(|step| u64::from(step.settled_state)).collect();
    let (check, result) = count::run_and_check_against(&built, edges, accuracy, &cycle)?;
    Ok((check, result, built))
}
