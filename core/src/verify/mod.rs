//! Verification by simulation: the designed stage (or a ripple chain of it, or a planned
//! divide-by-N chain with its feedback or driven reset) built as a transient circuit, run, and
//! checked count by count, at one corner or a list of them; trigger sensitivity and maximum
//! toggle rate measured by bisection and reported beside the handbook estimates.
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

pub use build::{
    chain_circuit, chain_circuit_with_reset, stage_circuit, BuildError, BuiltCircuit, InputPulse, ResetNodes,
    SimulationCorner,
};
pub use count::{run_and_check, CountCheck, RunAccuracy, RunError};
pub use search::{measure_max_rate, measure_sensitivity, Measured, SearchOutcome, SearchSettings};
pub use timing::{measure_timings, MeasuredTimings};

use crate::chain::reset::ResetStage;
use crate::chain::reset_driver::{
    design_reset_driver, evaluate_reset_driver, DrivenResetNetwork, DriverValues,
};
use crate::chain::timing::StageTiming;
use crate::chain::{Method, MethodKind, MethodPlan};
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
    /// The collector's 10–90 % voltage rise, 2.2·RC·(C1 + Cob + Ct): the figure to set beside
    /// the measured rise (the current fall is far shorter; RC and the capacitors set the edge).
    pub estimated_collector_rise_s: f64,
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
    /// Occurs when the reset network of a reset-on-count plan cannot be designed for this
    /// stage (the reason says what to change).
    Reset(String),
    /// Occurs when more corners are asked for than a verification may run.
    TooManyCorners {
        requested: usize,
    },
}

impl std::fmt::Display for VerifyError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            VerifyError::Build(error) => write!(f, "{error}"),
            VerifyError::Run(error) => write!(f, "{error}"),
            VerifyError::Analysis(reason) => write!(f, "the analysis behind the estimates failed: {reason}"),
            VerifyError::Reset(reason) => write!(f, "the reset network cannot be designed: {reason}"),
            VerifyError::TooManyCorners { requested } => {
                write!(f, "corners: {requested} asked for, at most {MAX_CORNERS}: give fewer corners")
            }
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
            estimated_collector_rise_s: switching.collector_voltage_rise_s,
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

/// Spread of stage times the reset of a planned chain is designed with (the same as
/// `flipwright chain` states; our choice).
pub const CHAIN_TIMING_SPREAD: f64 = 0.3;
/// Bus dips shorter than this share of the input period belong to one reset pulse (our
/// choice: a reset lasts a small fraction of a period, resets are N periods apart).
pub const RESET_PULSE_MERGE_SHARE: f64 = 0.1;
/// Most corners one planned-chain verification runs (each run takes seconds).
pub const MAX_CORNERS: usize = 8;

/// The driven reset network the planner designs for a reset-on-count plan of this stage
/// (timing from the stage's switching estimate with [`CHAIN_TIMING_SPREAD`]).
pub fn planned_reset_driver(
    design: &StageDesign,
    plan: &MethodPlan,
) -> Result<DrivenResetNetwork, VerifyError> {
    let report = analyse(design).map_err(|e| VerifyError::Analysis(e.to_string()))?;
    let timing = StageTiming::from_switching(&report.switching, CHAIN_TIMING_SPREAD);
    design_reset_driver(plan, &ResetStage::from_design(design), &timing)
        .map_err(|e| VerifyError::Reset(e.to_string()))
}

/// A simulation corner with the name it is reported under.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NamedCorner {
    pub name: String,
    pub corner: SimulationCorner,
}

/// Nominal and the stage's two worst corners for a chain: "slow" (lowest supply, resistors
/// high, capacitors high, minimum hFE, coldest: least base drive, longest storage) and "fast"
/// (highest supply, resistors low, capacitors low, maximum hFE, hottest: most leakage, the
/// shortest trigger and reset times, so the tightest race). From the design's tolerances.
pub fn chain_corners(design: &StageDesign) -> Vec<NamedCorner> {
    let input = design.input();
    let supply = input.supplies.tolerance;
    let resistors = input.conditions.resistor_tolerance;
    let capacitors = input.conditions.capacitor_tolerance;
    vec![
        NamedCorner { name: "nominal".to_string(), corner: SimulationCorner::nominal() },
        NamedCorner {
            name: "slow".to_string(),
            corner: SimulationCorner {
                temperature_c: input.conditions.t_min_c,
                supply_factor: 1.0 - supply,
                resistor_factor: 1.0 + resistors,
                capacitor_factor: 1.0 + capacitors,
                hfe_spread: -1.0,
            },
        },
        NamedCorner {
            name: "fast".to_string(),
            corner: SimulationCorner {
                temperature_c: input.conditions.t_max_c,
                supply_factor: 1.0 + supply,
                resistor_factor: 1.0 - resistors,
                capacitor_factor: 1.0 - capacitors,
                hfe_spread: 1.0,
            },
        },
    ]
}

/// What a planned-chain verification runs.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PlannedChainOptions {
    /// Input edges per corner (two output periods: 2·N).
    pub edges: usize,
    pub pulse: InputPulse,
    /// One run per corner, in order; at most [`MAX_CORNERS`].
    pub corners: Vec<NamedCorner>,
    pub accuracy: RunAccuracy,
    /// Reset values to simulate instead of the planner's (to try a hand-built network).
    pub reset_values: Option<DriverValues>,
}

/// The reset pulses seen on the reset bus of one run: the spans where it stays at or above
/// the corner's own knee (where the reset diodes conduct into the ON bases: VE + VBE(sat) +
/// VF at the corner's temperature and hFE position), beside the planner's closed form
/// evaluated at the same corner.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MeasuredResetPulses {
    pub level_v: f64,
    /// Width of each pulse in order, from the first rise above the level to the last fall
    /// (dips shorter than `RESET_PULSE_MERGE_SHARE` of a period merged), s; a pulse still high
    /// at the end of the run is left out.
    pub widths_s: Vec<f64>,
    /// For each pulse, the time from the gate's removal (the gate node falling below the hold
    /// node, so the hold diode blocks) to the pulse's end, s; `None` where no removal was seen.
    pub holds_after_removal_s: Vec<Option<f64>>,
    /// The closed form at this corner (devices, supplies and parts at the corner's values, no
    /// spread): the pulse width and the hold after the gate's removal, s; `None` when the
    /// closed form cannot time the network at this corner.
    pub closed_form_pulse_s: Option<f64>,
    pub closed_form_hold_after_removal_s: Option<f64>,
}

impl MeasuredResetPulses {
    pub fn shortest_s(&self) -> Option<f64> {
        self.widths_s.iter().copied().reduce(f64::min)
    }
    pub fn shortest_hold_after_removal_s(&self) -> Option<f64> {
        self.holds_after_removal_s.iter().flatten().copied().reduce(f64::min)
    }
}

/// The driven reset's closed form at one simulation corner: the stage and its devices at the
/// corner's temperature, hFE position, supply and resistor factors, the reset parts scaled as
/// the circuit builder scales them, the stage times without spread.
pub fn reset_closed_form_at_corner(
    design: &StageDesign,
    plan: &MethodPlan,
    values: &DriverValues,
    corner: &SimulationCorner,
) -> Result<DrivenResetNetwork, VerifyError> {
    let report = analyse(design).map_err(|e| VerifyError::Analysis(e.to_string()))?;
    let timing = StageTiming::from_switching(&report.switching, 0.0);
    let stage = ResetStage::at_point(
        design,
        corner.temperature_c,
        corner.hfe_spread,
        corner.supply_factor,
        corner.resistor_factor,
    );
    let r = corner.resistor_factor;
    let scaled = DriverValues {
        pull_up_ohm: values.pull_up_ohm * r,
        divider_upper_ohm: values.divider_upper_ohm * r,
        divider_lower_ohm: values.divider_lower_ohm * r,
        hold_capacitor_f: values.hold_capacitor_f * corner.capacitor_factor,
        emitter_resistor_ohm: values.emitter_resistor_ohm * r,
        series_resistor_ohm: values.series_resistor_ohm * r,
    };
    evaluate_reset_driver(plan, &stage, &timing, &scaled).map_err(|e| VerifyError::Reset(e.to_string()))
}

/// The count check at one corner.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CornerCount {
    pub name: String,
    pub corner: SimulationCorner,
    pub check: CountCheck,
    /// Reset-on-count plans only.
    pub reset_pulses: Option<MeasuredResetPulses>,
}

/// A planned chain verified at every corner asked for.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PlannedChainVerification {
    pub method: MethodKind,
    pub stage_count: usize,
    /// The reset network simulated (reset-on-count plans only), with its closed-form checks.
    pub reset: Option<DrivenResetNetwork>,
    pub corners: Vec<CornerCount>,
    /// True when the count was right after every edge at every corner.
    pub all_correct: bool,
}

/// Widths of the spans where `values` stays at or above `level_v`, linear between samples;
/// spans closer together than `merge_gap_s` count as one (a reset bus dips briefly while the
/// stages it drives change state, which is one reset pulse, not two).
pub fn pulse_widths_above(times: &[f64], values: &[f64], level_v: f64, merge_gap_s: f64) -> Vec<f64> {
    pulse_spans_above(times, values, level_v, merge_gap_s)
        .into_iter()
        .map(|(start, end)| end - start)
        .collect()
}

/// The spans (start, end) behind [`pulse_widths_above`], s.
pub fn pulse_spans_above(times: &[f64], values: &[f64], level_v: f64, merge_gap_s: f64) -> Vec<(f64, f64)> {
    let mut spans: Vec<(f64, f64)> = Vec::new();
    let mut rise: Option<f64> = None;
    let cross = |i: usize| {
        let (t0, t1, v0, v1) = (times[i - 1], times[i], values[i - 1], values[i]);
        if v1 != v0 {
            t0 + (level_v - v0) * (t1 - t0) / (v1 - v0)
        } else {
            t1
        }
    };
    let count = times.len().min(values.len());
    for i in 1..count {
        let (before, after) = (values[i - 1] >= level_v, values[i] >= level_v);
        if !before && after {
            rise = Some(cross(i));
        } else if before && !after {
            if let Some(start) = rise.take() {
                let end = cross(i);
                match spans.last_mut() {
                    Some(last) if start - last.1 < merge_gap_s => last.1 = end,
                    _ => spans.push((start, end)),
                }
            }
        }
    }
    spans
}

/// For each span, the time from the first sample inside it where `gate` is below `hold` (the
/// hold diode blocks: the gate has removed itself) to the span's end, s.
fn holds_after_removal(times: &[f64], gate: &[f64], hold: &[f64], spans: &[(f64, f64)]) -> Vec<Option<f64>> {
    spans
        .iter()
        .map(|&(start, end)| {
            let first = times.partition_point(|&t| t < start);
            let last = times.partition_point(|&t| t <= end);
            (first..last.min(gate.len()).min(hold.len())).find(|&i| gate[i] < hold[i]).map(|i| end - times[i])
        })
        .collect()
}

/// Verifies a planned chain for any N by simulation at every corner of `options`: plain
/// binary, skip feedback, or reset on count with the driven reset network (the planner's, or
/// `options.reset_values`), run for `options.edges` input edges, the count after each compared
/// with the plan's settled count sequence. `progress` is called before every run; returning
/// false cancels. Returns the first corner's waveforms and circuit for plots and CSV.
pub fn verify_planned_chain_at_corners(
    design: &StageDesign,
    plan: &MethodPlan,
    stage_count: usize,
    options: &PlannedChainOptions,
    progress: &mut dyn FnMut(Progress) -> bool,
) -> Result<(PlannedChainVerification, TransientResult, BuiltCircuit), VerifyError> {
    if options.corners.is_empty() || options.corners.len() > MAX_CORNERS {
        return Err(VerifyError::TooManyCorners { requested: options.corners.len() });
    }
    let reset = match &plan.method {
        Method::ResetOnCount { .. } => {
            let mut network = planned_reset_driver(design, plan)?;
            if let Some(values) = options.reset_values {
                let report = analyse(design).map_err(|e| VerifyError::Analysis(e.to_string()))?;
                let timing = StageTiming::from_switching(&report.switching, CHAIN_TIMING_SPREAD);
                // Values the closed form cannot even time are still simulated (that is how a
                // mis-sized network is shown to fail), with the reason among the problems.
                network =
                    match evaluate_reset_driver(plan, &ResetStage::from_design(design), &timing, &values) {
                        Ok(evaluated) => evaluated,
                        Err(error) => {
                            let mut given = network;
                            given.values = values;
                            given.passes = false;
                            given.parts.clear();
                            given.problems = vec![format!("the given values: {error}")];
                            given
                        }
                    };
            }
            Some(network)
        }
        _ => None,
    };
    let cycle: Vec<u64> = plan.count_sequence.iter().map(|step| u64::from(step.settled_state)).collect();
    let total_runs = options.corners.len();
    let mut corners = Vec::with_capacity(total_runs);
    let mut first: Option<(TransientResult, BuiltCircuit)> = None;
    for (done_runs, named) in options.corners.iter().enumerate() {
        if !progress(Progress { done_runs, total_runs, phase: "chain run" }) {
            return Err(VerifyError::Run(RunError::Cancelled));
        }
        let built = match (&plan.method, &reset) {
            (Method::ResetOnCount { decoded_stages }, Some(network)) => build::chain_circuit_with_reset(
                design,
                stage_count,
                decoded_stages,
                &network.values,
                &options.pulse,
                &named.corner,
            )?,
            (Method::SkipFeedback { receiving_stages, .. }, _) => build::chain_circuit_with_feedback(
                design,
                stage_count,
                receiving_stages,
                &options.pulse,
                &named.corner,
            )?,
            _ => build::chain_circuit(design, stage_count, &options.pulse, &named.corner)?,
        };
        let (check, result) = count::run_and_check_against(&built, options.edges, &options.accuracy, &cycle)?;
        let reset_pulses = match (&built.reset, &reset) {
            (Some(nodes), Some(network)) => {
                let at_corner =
                    reset_closed_form_at_corner(design, plan, &network.values, &named.corner).ok();
                let level_v = at_corner.as_ref().map_or(network.levels.knee_v, |n| n.levels.knee_v);
                result.voltage(&nodes.bus).map(|bus| {
                    let spans = pulse_spans_above(
                        &result.time_s,
                        bus,
                        level_v,
                        RESET_PULSE_MERGE_SHARE * options.pulse.period_s(),
                    );
                    let holds = match (result.voltage(&nodes.gate), result.voltage(&nodes.hold)) {
                        (Some(gate), Some(hold)) => holds_after_removal(&result.time_s, gate, hold, &spans),
                        _ => vec![None; spans.len()],
                    };
                    MeasuredResetPulses {
                        level_v,
                        widths_s: spans.iter().map(|(start, end)| end - start).collect(),
                        holds_after_removal_s: holds,
                        closed_form_pulse_s: at_corner.as_ref().map(|n| n.pulse_width_s),
                        closed_form_hold_after_removal_s: at_corner.as_ref().map(|n| n.race.available_hold_s),
                    }
                })
            }
            _ => None,
        };
        corners.push(CornerCount { name: named.name.clone(), corner: named.corner, check, reset_pulses });
        if first.is_none() {
            first = Some((result, built));
        }
    }
    let all_correct = corners.iter().all(|c| c.check.correct);
    let Some((result, built)) = first else {
        return Err(VerifyError::TooManyCorners { requested: 0 });
    };
    Ok((
        PlannedChainVerification { method: plan.method.kind(), stage_count, reset, corners, all_correct },
        result,
        built,
    ))
}

/// Verifies a planned chain for any N by simulation at one corner (see
/// [`verify_planned_chain_at_corners`]; a reset plan gets the planner's driven reset).
pub fn verify_planned_chain(
    design: &StageDesign,
    plan: &MethodPlan,
    stage_count: usize,
    edges: usize,
    pulse: &InputPulse,
    corner: &SimulationCorner,
    accuracy: &RunAccuracy,
) -> Result<(CountCheck, TransientResult, BuiltCircuit), VerifyError> {
    let options = PlannedChainOptions {
        edges,
        pulse: *pulse,
        corners: vec![NamedCorner { name: "given".to_string(), corner: *corner }],
        accuracy: *accuracy,
        reset_values: None,
    };
    let (verification, result, built) =
        verify_planned_chain_at_corners(design, plan, stage_count, &options, &mut |_| true)?;
    let check = verification.corners.into_iter().next().map(|c| c.check);
    check.map(|check| (check, result, built)).ok_or(VerifyError::TooManyCorners { requested: 0 })
}
