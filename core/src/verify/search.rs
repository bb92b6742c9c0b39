//! Measured trigger sensitivity and maximum toggle rate: bisection on the trigger amplitude
//! and on the input rate until a run of consecutive correct toggles fails. Each search states
//! its bounds and resolution with its result.

use serde::{Deserialize, Serialize};

use super::build::{stage_circuit, InputPulse, SimulationCorner};
use super::count::{run_and_check, RunAccuracy, RunError};
use crate::stage::StageDesign;
use crate::units::{format_quantity, Unit};

/// Hard bound on the bisection steps of one search (resolution reached long before).
const MAX_BISECTIONS: usize = 40;

/// How a search ended.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum SearchOutcome {
    /// The threshold lies between a passing and a failing value no further apart than the
    /// resolution.
    Bracketed { passing: f64, failing: f64 },
    /// Even the most favourable bound failed.
    FailsAtBestBound,
    /// Even the least favourable bound passed: the threshold lies beyond the search.
    PassesAtWorstBound,
}

/// One measured figure beside its estimate.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Measured {
    pub quantity: String,
    pub unit: String,
    /// The handbook estimate, where there is one.
    pub estimate: Option<f64>,
    /// The passing end of the final bracket (the conservative reading), if bracketed.
    pub measured: Option<f64>,
    pub outcome: SearchOutcome,
    pub search_low: f64,
    pub search_high: f64,
    /// Width of the final bracket: volts for amplitude, a ratio for rate.
    pub resolution: f64,
    pub resolution_text: String,
    /// Input edges per trial run; a trial passes when every one toggles correctly.
    pub edges_per_run: usize,
    pub runs: usize,
    pub conditions: String,
}

/// One search's definition: which way passing lies and how values are bisected.
pub struct SearchSpec {
    pub low: f64,
    pub high: f64,
    /// True when large values pass (amplitude), false when small values pass (rate).
    pub passes_high: bool,
    /// Bisect on the logarithm (rates) rather than linearly (amplitudes).
    pub logarithmic: bool,
    /// Stop when the bracket is this narrow: volts, or the ratio − 1 when logarithmic.
    pub resolution: f64,
    /// When the least favourable bound still passes, move it this many times by
    /// `expansion_factor` further out (up for a rate, down for an amplitude) before giving up.
    pub expansions: usize,
    pub expansion_factor: f64,
}

/// Bisection on a pass/fail trial. `trial` returns whether the value passes.
pub fn bisect(
    spec: &SearchSpec,
    mut trial: impl FnMut(f64) -> Result<bool, RunError>,
) -> Result<(SearchOutcome, usize), RunError> {
    let (best, worst) = if spec.passes_high { (spec.high, spec.low) } else { (spec.low, spec.high) };
    let mut runs = 1;
    if !trial(best)? {
        return Ok((SearchOutcome::FailsAtBestBound, runs));
    }
    let mut passing = best;
    let mut worst = worst;
    let mut expansions_left = spec.expansions;
    loop {
        runs += 1;
        if !trial(worst)? {
            break;
        }
        if expansions_left == 0 || !(spec.expansion_factor > 1.0) {
            return Ok((SearchOutcome::PassesAtWorstBound, runs));
        }
        expansions_left -= 1;
        passing = worst;
        worst = if spec.passes_high { worst / spec.expansion_factor } else { worst * spec.expansion_factor };
    }
    let mut failing = worst;
    let narrow = |a: f64, b: f64| {
        if spec.logarithmic {
            a.max(b) / a.min(b) - 1.0 <= spec.resolution
        } else {
            (a - b).abs() <= spec.resolution
        }
    };
    for _ in 0..MAX_BISECTIONS {
        if narrow(passing, failing) {
            break;
        }
        let middle = if spec.logarithmic { (passing * failing).sqrt() } else { 0.5 * (passing + failing) };
        runs += 1;
        if trial(middle)? {
            passing = middle;
        } else {
            failing = middle;
        }
    }
    Ok((SearchOutcome::Bracketed { passing, failing }, runs))
}

/// What the two searches run with.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct SearchSettings {
    /// Consecutive edges that must all toggle correctly for a trial to pass.
    pub edges_per_run: usize,
    /// Edge time of the input pulses, s.
    pub edge_s: f64,
    pub accuracy: RunAccuracy,
}

impl Default for SearchSettings {
    /// Six edges (three full output cycles of a stage) and 20 ns edges, about what a
    /// driving transistor stage gives (our choice).
    fn default() -> Self {
        SearchSettings { edges_per_run: 6, edge_s: 20e-9, accuracy: RunAccuracy::default() }
    }
}

/// A trial: the stage driven by `pulse` toggles correctly on every edge.
pub fn stage_toggles(
    design: &StageDesign,
    pulse: &InputPulse,
    corner: &SimulationCorner,
    settings: &SearchSettings,
) -> Result<bool, RunError> {
    let built = match stage_circuit(design, pulse, corner) {
        Ok(built) => built,
        // Values outside what a circuit can be built for (a rate beyond 10 GHz, say) fail.
        Err(_) => return Ok(false),
    };
    match run_and_check(&built, settings.edges_per_run, &settings.accuracy) {
        Ok((check, _)) => Ok(check.correct),
        // A run the engine cannot finish counts as a failed trial, not a failed search.
        Err(RunError::Simulation(_)) => Ok(false),
        Err(other) => Err(other),
    }
}

/// Smallest trigger amplitude at which the stage toggles on every edge at `rate_hz`.
/// Searched from 1 % to 200 % of the collector supply, to 0.5 % of it.
pub fn measure_sensitivity(
    design: &StageDesign,
    rate_hz: f64,
    corner: &SimulationCorner,
    settings: &SearchSettings,
    estimate_v: Option<f64>,
    progress: impl FnMut() -> bool,
) -> Result<Measured, RunError> {
    let supply = design.input().supplies.collector_supply_v * corner.supply_factor;
    let spec = SearchSpec {
        low: 0.01 * supply,
        high: 2.0 * supply,
        passes_high: true,
        logarithmic: false,
        resolution: 0.005 * supply,
        expansions: 0,
        expansion_factor: 1.0,
    };
    let (outcome, runs) = square_wave_search(design, corner, settings, &spec, progress, |amplitude_v| {
        InputPulse { amplitude_v, rate_hz, edge_s: settings.edge_s, duty: 0.5 }
    })?;
    Ok(Measured {
        quantity: "minimum trigger amplitude".to_string(),
        unit: "V".to_string(),
        estimate: estimate_v,
        measured: passing_end(outcome),
        outcome,
        search_low: spec.low,
        search_high: spec.high,
        resolution: spec.resolution,
        resolution_text: format!(
            "{} (0.5 % of the collector supply)",
            format_quantity(spec.resolution, Unit::Volt)
        ),
        edges_per_run: settings.edges_per_run,
        runs,
        conditions: format!(
            "square wave at {}, {} edges, {:.1} °C",
            format_quantity(rate_hz, Unit::Hertz),
            format_quantity(settings.edge_s, Unit::Second),
            corner.temperature_c
        ),
    })
}

/// Highest input rate at which the stage toggles on every edge with `amplitude_v` square
/// waves. Searched from an eighth of the lower to eight times the higher of the requirement
/// and the estimate (moved up eightfold at most three times while it still passes, at most
/// 10 GHz), to 2 %.
pub fn measure_max_rate(
    design: &StageDesign,
    amplitude_v: f64,
    corner: &SimulationCorner,
    settings: &SearchSettings,
    estimate_hz: Option<f64>,
    progress: impl FnMut() -> bool,
) -> Result<Measured, RunError> {
    let required = design.input().requirements.toggle_rate_hz;
    let reference = estimate_hz.filter(|f| f.is_finite() && *f > 0.0).unwrap_or(required);
    let spec = SearchSpec {
        low: required.min(reference) / 8.0,
        high: (required.max(reference) * 8.0).min(1e10),
        passes_high: false,
        logarithmic: true,
        resolution: 0.02,
        expansions: 3,
        expansion_factor: 8.0,
    };
    let (outcome, runs) = square_wave_search(design, corner, settings, &spec, progress, |rate_hz| {
        InputPulse { amplitude_v, rate_hz: rate_hz.min(1e10), edge_s: settings.edge_s, duty: 0.5 }
    })?;
    Ok(Measured {
        quantity: "maximum toggle rate".to_string(),
        unit: "Hz".to_string(),
        estimate: estimate_hz,
        measured: passing_end(outcome),
        outcome,
        search_low: spec.low,
        search_high: spec.high,
        resolution: spec.resolution,
        resolution_text: "2 % in rate".to_string(),
        edges_per_run: settings.edges_per_run,
        runs,
        conditions: format!(
            "{} square wave, {} edges (at most a tenth of the period), {:.1} °C",
            format_quantity(amplitude_v, Unit::Volt),
            format_quantity(settings.edge_s, Unit::Second),
            corner.temperature_c
        ),
    })
}

/// Bisection whose trials are square-wave runs of the stage: `pulse_at` turns the searched
/// value into the input pulse; `progress` is asked before every trial (false cancels).
fn square_wave_search(
    design: &StageDesign,
    corner: &SimulationCorner,
    settings: &SearchSettings,
    spec: &SearchSpec,
    mut progress: impl FnMut() -> bool,
    pulse_at: impl Fn(f64) -> InputPulse,
) -> Result<(SearchOutcome, usize), RunError> {
    bisect(spec, |value| {
        if !progress() {
            return Err(RunError::Cancelled);
        }
        stage_toggles(design, &pulse_at(value), corner, settings)
    })
}

fn passing_end(outcome: SearchOutcome) -> Option<f64> {
    match outcome {
        SearchOutcome::Bracketed { passing, .. } => Some(passing),
        _ => None,
    }
}
