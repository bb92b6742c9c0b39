//! Synthesis that targets a yield: the stage synthesis is asked for a design whose Monte
//! Carlo yield over the chain it will sit in reaches a minimum at a confidence (the one-sided
//! Wilson lower bound), and its design aims are raised step by step until it does, or the
//! result explains why no step gets there.
//!
//! The synthesis chooses values for the worst case; when the worst case cannot be met (or is
//! met only by the bare stage while the chain's loads take it away), the yield says how many
//! builds still work. The knobs are the synthesis's own aims, never a pass requirement: the
//! target overdrive (more base drive than the minimum) and, for a bias divider, the divider
//! current fraction (a stiffer divider). Each candidate is the full synthesis at those aims,
//! its chain loaded as the plan loads it, and the same seed for every candidate (common random
//! numbers), so the candidates are compared on the same builds. The first candidate in order of
//! least change that reaches the goal is taken.

use serde::{Deserialize, Serialize};

use super::chain::{loaded_chain, ChainShape};
use super::monte_carlo::{monte_carlo_yield, MonteCarloOptions, YieldReport, MAX_TRIALS};
use super::statistics::{normal_quantile, wilson_lower_bound};
use super::{check_confidence, invalid, Distribution, ToleranceError};
use crate::stage::synthesis::{synthesise, SynthesisError, SynthesisOutcome};
use crate::stage::{BiasScheme, StageDesign, StageInput};

/// What the yield must reach, and the Monte Carlo that checks it.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct YieldGoal {
    /// Smallest acceptable yield, a fraction (0.99 = 99 % of builds pass every DC margin).
    pub min_yield: f64,
    /// Confidence that the yield is at least `min_yield` (one-sided Wilson lower bound).
    pub confidence: f64,
    /// The chain the stage is for (its loads enter every stage's margins).
    pub shape: ChainShape,
    /// Trials per candidate; raised when too few could ever show `min_yield`.
    pub trials: u32,
    pub seed: u64,
    pub distribution: Distribution,
}

impl Default for YieldGoal {
    fn default() -> Self {
        YieldGoal {
            min_yield: 0.99,
            confidence: 0.95,
            shape: ChainShape::Stages { stages: 1 },
            trials: 10_000,
            seed: 1,
            distribution: Distribution::Uniform,
        }
    }
}

impl YieldGoal {
    pub fn validate(&self) -> Result<(), ToleranceError> {
        if !(self.min_yield > 0.0 && self.min_yield < 1.0) {
            return Err(invalid(
                "min_yield",
                self.min_yield,
                "a fraction above 0 and below 1 (0.99 for 99 %); a yield of 1 cannot be shown by sampling: ask the worst case instead",
            ));
        }
        check_confidence("confidence", self.confidence)?;
        if !(1..=MAX_TRIALS).contains(&self.trials) {
            return Err(invalid("trials", self.trials, &format!("a whole number from 1 to {MAX_TRIALS}")));
        }
        Ok(())
    }
}

/// Fewest trials whose lower bound can reach `min_yield` when every trial passes: the
/// one-sided Wilson bound with x = n is n/(n + z²), so n ≥ z²·y/(1 − y).
pub fn fewest_trials_for(min_yield: f64, confidence: f64) -> f64 {
    let z = normal_quantile(confidence);
    z * z * min_yield / (1.0 - min_yield)
}

/// One candidate tried.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct YieldCandidate {
    pub target_overdrive: f64,
    pub divider_current_fraction: f64,
    /// What changed from the request, in words ("target overdrive 2 → 3").
    pub change: String,
    /// The synthesis met every worst-case margin (the yield is then 1 by construction, up to
    /// the sampling).
    pub worst_case_met: bool,
    pub passed: u32,
    pub trials: u32,
    pub yield_fraction: f64,
    pub lower_bound: f64,
    pub reaches_goal: bool,
    /// Why the candidate could not be evaluated, when it could not.
    pub problem: Option<String>,
}

/// The result: the chosen design and its run, every candidate, and the reasons when the goal
/// is not reached.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct YieldSynthesis {
    pub goal: YieldGoal,
    /// Trials actually run per candidate (at least the goal's, raised when needed).
    pub trials: u32,
    pub met: bool,
    /// The chosen candidate (the first that reaches the goal, or the best lower bound).
    pub chosen: usize,
    pub candidates: Vec<YieldCandidate>,
    pub synthesis: SynthesisOutcome,
    /// The requirements with the chosen aims (write these back with the values).
    pub input: StageInput,
    pub report: YieldReport,
    pub chain: String,
    /// Why the goal is not reached and what would change that, when it is not.
    pub explanation: Vec<String>,
}

/// The aims tried, in order of least change: (target-overdrive factor, divider-fraction
/// factor). The divider fraction is a knob of the fixed-bias divider only.
fn aims(bias: BiasScheme) -> Vec<(f64, f64)> {
    let mut list = vec![(1.0, 1.0), (1.25, 1.0), (1.5, 1.0), (2.0, 1.0), (3.0, 1.0)];
    if bias == BiasScheme::Fixed {
        list.extend([(1.0, 1.5), (1.25, 1.5), (1.5, 1.5), (1.0, 2.0), (1.5, 2.0), (2.0, 2.0)]);
    }
    list
}

/// Synthesises `input` for `goal`; `progress(done, total)` after each candidate, returning
/// false cancels (the best so far is returned, marked not met).
pub fn synthesise_for_yield(
    input: &StageInput,
    goal: &YieldGoal,
    progress: &mut dyn FnMut(usize, usize) -> bool,
) -> Result<YieldSynthesis, ToleranceError> {
    goal.validate()?;
    let needed = fewest_trials_for(goal.min_yield, goal.confidence);
    if needed > f64::from(MAX_TRIALS) {
        return Err(invalid(
            "min_yield",
            goal.min_yield,
            &format!(
                "a yield that {MAX_TRIALS} trials can show at {:.0} % confidence (it needs {needed:.0}): lower min_yield or the confidence",
                100.0 * goal.confidence
            ),
        ));
    }
    // Room for a few failures: 1.5 times the all-pass minimum, rounded up to a thousand.
    let trials = if f64::from(goal.trials) >= 1.5 * needed {
        goal.trials
    } else {
        ((1.5 * needed / 1000.0).ceil() * 1000.0).min(f64::from(MAX_TRIALS)) as u32
    };
    let options = MonteCarloOptions {
        trials,
        seed: goal.seed,
        distribution: goal.distribution,
        confidence: goal.confidence,
        ..MonteCarloOptions::default()
    };
    let requested = &input.requirements;
    let list = aims(requested.bias);
    let total = list.len();
    let mut candidates = Vec::with_capacity(total);
    // (candidate index, synthesis, input, report, chain description)
    let mut best: Option<(usize, SynthesisOutcome, StageInput, YieldReport, String)> = None;
    let mut best_lower = f64::NEG_INFINITY;
    for (index, (overdrive_factor, fraction_factor)) in list.into_iter().enumerate() {
        let mut aimed = input.clone();
        // Rounded to two decimals (a design aim, not a measured value) and kept in range.
        let round = |x: f64| (x * 100.0).round() / 100.0;
        aimed.requirements.target_overdrive = round(requested.target_overdrive * overdrive_factor).min(20.0);
        aimed.requirements.divider_current_fraction =
            round(requested.divider_current_fraction * fraction_factor).clamp(0.01, 2.0);
        let change = describe_change(requested, &aimed.requirements);
        let mut candidate = YieldCandidate {
            target_overdrive: aimed.requirements.target_overdrive,
            divider_current_fraction: aimed.requirements.divider_current_fraction,
            change,
            worst_case_met: false,
            passed: 0,
            trials,
            yield_fraction: 0.0,
            lower_bound: 0.0,
            reaches_goal: false,
            problem: None,
        };
        match evaluate(&aimed, goal.shape, &options) {
            Ok((outcome, report, chain)) => {
                candidate.worst_case_met = outcome.met;
                candidate.passed = report.passed;
                candidate.yield_fraction = report.yield_fraction;
                candidate.lower_bound =
                    wilson_lower_bound(u64::from(report.passed), u64::from(trials), goal.confidence);
                candidate.reaches_goal = candidate.lower_bound >= goal.min_yield;
                if candidate.lower_bound > best_lower {
                    best_lower = candidate.lower_bound;
                    aimed.values = outcome.values;
                    best = Some((index, outcome, aimed, report, chain));
                }
            }
            Err(problem) => candidate.problem = Some(problem),
        }
        let reached = candidate.reaches_goal;
        candidates.push(candidate);
        let go_on = progress(index + 1, total);
        if reached || !go_on {
            break;
        }
    }
    let Some((chosen, synthesis, input, report, chain)) = best else {
        let reasons: Vec<String> = candidates.iter().filter_map(|c| c.problem.clone()).collect();
        return Err(ToleranceError::Synthesis {
            reason: format!("no candidate could be synthesised and run: {}", reasons.join("; ")),
        });
    };
    let met = candidates.get(chosen).is_some_and(|c| c.reaches_goal);
    let explanation = if met { Vec::new() } else { explain(goal, &report, &candidates, total) };
    Ok(YieldSynthesis {
        goal: *goal,
        trials,
        met,
        chosen,
        candidates,
        synthesis,
        input,
        report,
        chain,
        explanation,
    })
}

fn describe_change(requested: &crate::stage::Requirements, aimed: &crate::stage::Requirements) -> String {
    let mut parts = Vec::new();
    if aimed.target_overdrive != requested.target_overdrive {
        parts.push(format!("target overdrive {} → {}", requested.target_overdrive, aimed.target_overdrive));
    }
    if aimed.divider_current_fraction != requested.divider_current_fraction {
        parts.push(format!(
            "divider current fraction {} → {}",
            requested.divider_current_fraction, aimed.divider_current_fraction
        ));
    }
    if parts.is_empty() {
        "the requirements as given".to_string()
    } else {
        parts.join(", ")
    }
}

/// Synthesis at the aims of `aimed`, then the Monte Carlo of its chain.
fn evaluate(
    aimed: &StageInput,
    shape: ChainShape,
    options: &MonteCarloOptions,
) -> Result<(SynthesisOutcome, YieldReport, String), String> {
    let outcome = synthesise(aimed).map_err(|e| match e {
        SynthesisError::Invalid(errors) => {
            errors.iter().map(|e| e.to_string()).collect::<Vec<_>>().join("; ")
        }
        other => other.to_string(),
    })?;
    let mut with_values = aimed.clone();
    with_values.values = outcome.values;
    let design = StageDesign::new(with_values)
        .map_err(|errors| errors.iter().map(|e| e.to_string()).collect::<Vec<_>>().join("; "))?;
    let (chain, description) = loaded_chain(&design, shape).map_err(|e| e.to_string())?;
    let report = monte_carlo_yield(&chain, options).map_err(|e| e.to_string())?;
    Ok((outcome, report, description))
}

/// Why the best candidate falls short, and what would change that.
fn explain(
    goal: &YieldGoal,
    report: &YieldReport,
    candidates: &[YieldCandidate],
    total: usize,
) -> Vec<String> {
    let mut lines = Vec::new();
    let best = candidates.iter().map(|c| c.lower_bound).fold(0.0f64, f64::max);
    lines.push(format!(
        "no design aim tried reaches a yield of {:.2} % at {:.0} % confidence; the best shows at least {:.2} % ({} of {} candidates tried{})",
        100.0 * goal.min_yield,
        100.0 * goal.confidence,
        100.0 * best,
        candidates.len(),
        total,
        if candidates.len() < total { ", stopped early" } else { "" }
    ));
    if let Some(failure) = &report.most_frequent_failure {
        lines.push(format!(
            "the most frequent failure of the best design: {} in stage {} ({:.2} % of builds)",
            failure.kind.title(),
            failure.stage + 1,
            100.0 * failure.fraction
        ));
        lines.push(advice(failure.kind).to_string());
    }
    if candidates.iter().any(|c| c.problem.is_some()) {
        lines.push("some aims could not be synthesised; their problems are listed with them".to_string());
    }
    lines
}

fn advice(kind: crate::stage::margins::MarginKind) -> &'static str {
    use crate::stage::margins::MarginKind as K;
    match kind {
        K::Overdrive => "base drive runs short: a transistor type with a higher minimum hFE, a higher collector supply, a narrower temperature range (hFE falls in the cold) or tighter resistors would raise it",
        K::Cutoff => "the OFF base is not held off firmly enough: a larger bias supply, a lower temperature ceiling (leakage) or tighter resistors would help",
        K::OutputSwing => "the output swing runs short: a higher collector supply or a lighter load on the outputs would raise it; lower min_output_swing_v if the next stage needs less",
        K::ReverseBaseEmitter => "the reverse base–emitter voltage exceeds VEBO: a transistor with a higher VEBO, a smaller bias supply or a clamp diode at each base",
        K::CollectorEmitterVoltage | K::CollectorBaseVoltage => "a collector voltage exceeds the transistor's rating: a higher-voltage transistor type or a lower supply",
        K::CollectorCurrent | K::TransistorDissipation => "the transistor is overloaded: a lower collector current or a larger transistor type",
        K::LoopGain | K::ToggleRate | K::TriggerAmplitude => "this margin is checked by the worst case only",
    }
}
