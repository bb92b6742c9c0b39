//! Monte Carlo yield of a chain: every part of every stage drawn independently within its
//! tolerance, each transistor's hFE, VCE(sat) and VBE(sat) within its datasheet spread, each
//! rail once per build (the stages share it), the temperature uniformly over the design's
//! range once per build; a build passes when every DC margin of every stage holds.

use serde::{Deserialize, Serialize};

use super::chain::LoadedChain;
use super::kernel::{Capacitors, DcMargins, MarginKernel, MARGIN_COUNT};
use super::sampling::Sampler;
use super::statistics::{histogram, sample_size, wilson_lower_bound, wilson_two_sided, Histogram, Interval};
use super::{check_confidence, invalid, Distribution, ToleranceError};
use crate::device::SpreadPoint;
use crate::stage::margins::{required_value, MarginKind, DC_MARGINS};
use crate::stage::network::Corner;
use crate::stage::worst_case::nominal_temperature_c;
use crate::stage::{BiasScheme, Load, StageDesign, Steering};

/// Most trials one run takes.
pub const MAX_TRIALS: u32 = 1_000_000;

/// What to run.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct MonteCarloOptions {
    pub trials: u32,
    pub seed: u64,
    pub distribution: Distribution,
    /// Confidence of the two-sided interval and of the one-sided lower bound.
    pub confidence: f64,
    pub histogram_bins: u32,
    /// Interval half-width the sample-size figure is computed for.
    pub half_width: f64,
}

impl Default for MonteCarloOptions {
    fn default() -> Self {
        MonteCarloOptions {
            trials: 10_000,
            seed: 1,
            distribution: Distribution::Uniform,
            confidence: 0.95,
            histogram_bins: 24,
            half_width: 0.01,
        }
    }
}

impl MonteCarloOptions {
    /// Every problem is an `InvalidOption` naming the field and its range.
    pub fn validate(&self) -> Result<(), ToleranceError> {
        if !(1..=MAX_TRIALS).contains(&self.trials) {
            return Err(invalid("trials", self.trials, &format!("a whole number from 1 to {MAX_TRIALS}")));
        }
        check_confidence("confidence", self.confidence)?;
        if !(1..=200).contains(&self.histogram_bins) {
            return Err(invalid("histogram_bins", self.histogram_bins, "a bin count from 1 to 200"));
        }
        if !(self.half_width > 0.0 && self.half_width <= 0.5) {
            return Err(invalid(
                "half_width",
                self.half_width,
                "an interval half-width above 0 and at most 0.5",
            ));
        }
        Ok(())
    }
}

/// One margin over the run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MarginStatistics {
    pub kind: MarginKind,
    pub title: String,
    pub unit: String,
    pub required: f64,
    /// Smallest value over the stages at nominal.
    pub nominal: f64,
    /// Over the trials, of the tightest stage in each trial.
    pub min: f64,
    pub mean: f64,
    /// Trials in which this margin failed in at least one stage.
    pub failing_trials: u32,
    /// Per stage: trials in which this margin failed in that stage.
    pub failures_per_stage: Vec<u32>,
    /// The tightest stage's value in each trial.
    pub histogram: Histogram,
}

/// The margin and stage that fail most often.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MostFrequentFailure {
    pub kind: MarginKind,
    pub stage: u32,
    pub failures: u32,
    pub fraction: f64,
}

/// The result of a Monte Carlo run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct YieldReport {
    pub options: MonteCarloOptions,
    pub stage_count: u32,
    pub passed: u32,
    pub yield_fraction: f64,
    /// Two-sided Wilson score interval at `options.confidence` (Wilson 1927).
    pub interval: Interval,
    /// One-sided Wilson lower bound at `options.confidence`.
    pub lower_bound: f64,
    /// Trials for a normal-approximation half-width of `options.half_width` at the observed
    /// yield, n = z²p(1−p)/E² (Cochran 1977); 0.5 is used when the yield is 0 or 1.
    pub trials_for_half_width: Option<u64>,
    pub margins: Vec<MarginStatistics>,
    pub most_frequent_failure: Option<MostFrequentFailure>,
    /// FNV-1a (64 bit) over the bit patterns of every margin of every stage of every trial,
    /// in order, as 16 hex digits: equal digests mean bit-identical runs.
    pub digest: String,
    pub notes: Vec<String>,
}

/// FNV-1a, 64 bit (G. Fowler, L. C. Noll, K.-P. Vo; offset basis and prime as published).
#[derive(Debug, Clone, Copy)]
pub struct Fnv1a(u64);

impl Fnv1a {
    pub const OFFSET_BASIS: u64 = 0xcbf2_9ce4_8422_2325;
    pub const PRIME: u64 = 0x0000_0100_0000_01b3;
    pub fn new() -> Fnv1a {
        Fnv1a(Self::OFFSET_BASIS)
    }
    pub fn bytes(&mut self, bytes: &[u8]) {
        for &b in bytes {
            self.0 ^= u64::from(b);
            self.0 = self.0.wrapping_mul(Self::PRIME);
        }
    }
    pub fn f64(&mut self, value: f64) {
        self.bytes(&value.to_bits().to_le_bytes());
    }
    pub fn finish(self) -> u64 {
        self.0
    }
}

impl Default for Fnv1a {
    fn default() -> Self {
        Fnv1a::new()
    }
}

/// What is drawn for one distinct stage design.
#[derive(Debug, Clone)]
struct StageModel {
    kernel: MarginKernel,
    nominal: Corner,
    capacitors: Capacitors,
    self_bias: bool,
    load_is_resistance: [bool; 2],
    base_steering: bool,
}

impl StageModel {
    fn new(design: &StageDesign) -> StageModel {
        let kernel = MarginKernel::new(design);
        let loads = design.input().loads;
        StageModel {
            capacitors: kernel.nominal_capacitors(),
            kernel,
            nominal: Corner::nominal(design, nominal_temperature_c(design)),
            self_bias: design.values().bias == BiasScheme::SelfBias,
            load_is_resistance: [
                matches!(loads[0], Load::Resistance { .. }),
                matches!(loads[1], Load::Resistance { .. }),
            ],
            base_steering: design.values().trigger.is_some_and(|t| t.steering == Steering::Base),
        }
    }
}

/// One build's shared draws.
struct BuildDraw {
    temperature_c: f64,
    collector_supply_factor: f64,
    bias_supply_factor: f64,
}

/// Draws one stage of one build (the order of draws is part of the reproducibility: it
/// must not change without changing the digest test's expectation of equality only).
fn draw_stage(
    model: &StageModel,
    build: &BuildDraw,
    tolerances: (f64, f64),
    distribution: Distribution,
    sampler: &mut Sampler,
) -> (Corner, Capacitors) {
    let (resistor, capacitor) = tolerances;
    let nominal = &model.nominal;
    let mut corner = *nominal;
    corner.temperature_c = build.temperature_c;
    corner.collector_supply_v = nominal.collector_supply_v * build.collector_supply_factor;
    corner.bias_supply_v = nominal.bias_supply_v * build.bias_supply_factor;
    for side in 0..2 {
        corner.collector_resistor_ohm[side] =
            sampler.toleranced(nominal.collector_resistor_ohm[side], resistor, distribution);
        corner.cross_resistor_ohm[side] =
            sampler.toleranced(nominal.cross_resistor_ohm[side], resistor, distribution);
        corner.base_resistor_ohm[side] =
            sampler.toleranced(nominal.base_resistor_ohm[side], resistor, distribution);
    }
    if model.self_bias {
        corner.emitter_resistor_ohm =
            sampler.toleranced(nominal.emitter_resistor_ohm, resistor, distribution);
    }
    for side in 0..2 {
        if model.load_is_resistance[side] {
            corner.load_resistance_factor[side] = sampler.toleranced(1.0, resistor, distribution);
        }
        if model.base_steering {
            corner.trigger_resistor_ohm[side] =
                sampler.toleranced(nominal.trigger_resistor_ohm[side], resistor, distribution);
        }
    }
    let mut capacitors = model.capacitors;
    for side in 0..2 {
        capacitors.commutating_f[side] =
            sampler.toleranced(capacitors.commutating_f[side], capacitor, distribution);
        capacitors.trigger_f[side] = sampler.toleranced(capacitors.trigger_f[side], capacitor, distribution);
    }
    for side in 0..2 {
        corner.spread[side] = SpreadPoint {
            hfe: sampler.position(distribution),
            vce_sat: sampler.position(distribution),
            vbe_sat: sampler.position(distribution),
        };
    }
    (corner, capacitors)
}

/// How often a run reports its progress: before every this many trials.
pub const PROGRESS_EVERY_TRIALS: u32 = 5000;

/// The raw run: every trial's margins, passed to `visit(trial, stage, margins)`.
pub fn run_trials(
    chain: &LoadedChain,
    options: &MonteCarloOptions,
    visit: impl FnMut(u32, u32, &DcMargins),
) -> Result<(), ToleranceError> {
    run_trials_with_progress(chain, options, visit, &mut |_, _| true)
}

/// [`run_trials`], calling `progress(done_trials, trials)` before the first trial and every
/// [`PROGRESS_EVERY_TRIALS`] after; an answer of `false` stops the run with
/// [`ToleranceError::Cancelled`]. The draws do not depend on it: a seed gives the same trials.
pub fn run_trials_with_progress(
    chain: &LoadedChain,
    options: &MonteCarloOptions,
    mut visit: impl FnMut(u32, u32, &DcMargins),
    progress: &mut dyn FnMut(u32, u32) -> bool,
) -> Result<(), ToleranceError> {
    options.validate()?;
    let Some(first) = chain.distinct.first() else {
        return Err(ToleranceError::InvalidChain { reason: "the chain has no stage".to_string() });
    };
    let models: Vec<StageModel> = chain.distinct.iter().map(StageModel::new).collect();
    let input = first.input();
    let conditions = input.conditions;
    let supply_tolerance = input.supplies.tolerance;
    let fixed_bias = first.values().bias == BiasScheme::Fixed;
    let tolerances = (conditions.resistor_tolerance, conditions.capacitor_tolerance);
    let distribution = options.distribution;
    let mut sampler = Sampler::new(options.seed);
    for trial in 0..options.trials {
        if trial % PROGRESS_EVERY_TRIALS == 0 && !progress(trial, options.trials) {
            return Err(ToleranceError::Cancelled { done_trials: trial });
        }
        let temperature_c = conditions.t_min_c + (conditions.t_max_c - conditions.t_min_c) * sampler.unit();
        let collector_supply_factor = sampler.toleranced(1.0, supply_tolerance, distribution);
        let bias_supply_factor =
            if fixed_bias { sampler.toleranced(1.0, supply_tolerance, distribution) } else { 1.0 };
        let build = BuildDraw { temperature_c, collector_supply_factor, bias_supply_factor };
        // Every stage is the same transistor type and diode at one ambient temperature.
        let thermal = models[0].kernel.thermal_point(temperature_c);
        for (stage, &index) in chain.stage_to_distinct.iter().enumerate() {
            let Some(model) = models.get(index) else { continue };
            let (corner, capacitors) = draw_stage(model, &build, tolerances, distribution, &mut sampler);
            let margins = model.kernel.evaluate(&corner, &capacitors, &thermal);
            visit(trial, stage as u32, &margins);
        }
    }
    Ok(())
}

/// The Monte Carlo yield of the chain's DC margins.
pub fn monte_carlo_yield(
    chain: &LoadedChain,
    options: &MonteCarloOptions,
) -> Result<YieldReport, ToleranceError> {
    monte_carlo_yield_with_progress(chain, options, &mut |_, _| true)
}

/// [`monte_carlo_yield`] with progress and cancel, as in [`run_trials_with_progress`].
pub fn monte_carlo_yield_with_progress(
    chain: &LoadedChain,
    options: &MonteCarloOptions,
    progress: &mut dyn FnMut(u32, u32) -> bool,
) -> Result<YieldReport, ToleranceError> {
    options.validate()?;
    let Some(first) = chain.distinct.first() else {
        return Err(ToleranceError::InvalidChain { reason: "the chain has no stage".to_string() });
    };
    let stages = chain.stage_count();
    let trials = options.trials as usize;
    let required: Vec<f64> = DC_MARGINS.iter().map(|&k| required_value(k, first)).collect();
    let mut tightest = vec![[f64::INFINITY; MARGIN_COUNT]; trials];
    let mut failed_kind = vec![[false; MARGIN_COUNT]; trials];
    let mut failures_per_stage = vec![[0u32; MARGIN_COUNT]; stages];
    let mut digest = Fnv1a::new();
    run_trials_with_progress(
        chain,
        options,
        |trial, stage, margins| {
            let (Some(tight), Some(failed), Some(per_stage)) = (
                tightest.get_mut(trial as usize),
                failed_kind.get_mut(trial as usize),
                failures_per_stage.get_mut(stage as usize),
            ) else {
                return;
            };
            for (k, &value) in margins.iter().enumerate() {
                digest.f64(value);
                // NaN stays NaN in the tightest value: it fails, and shows as not finite.
                tight[k] = if value.is_nan() { value } else { tight[k].min(value) };
                let passes = required.get(k).is_some_and(|&r| value >= r && value.is_finite());
                if !passes {
                    failed[k] = true;
                    per_stage[k] += 1;
                }
            }
        },
        progress,
    )?;
    let passed = failed_kind.iter().filter(|f| !f.iter().any(|&x| x)).count() as u32;
    let n = u64::from(options.trials);
    let yield_fraction = f64::from(passed) / f64::from(options.trials);
    let p_for_size = if passed == 0 || passed == options.trials { 0.5 } else { yield_fraction };
    let nominal_margins: Vec<DcMargins> = chain
        .distinct
        .iter()
        .map(|d| {
            let kernel = MarginKernel::new(d);
            kernel.evaluate_corner(&Corner::nominal(d, nominal_temperature_c(d)))
        })
        .collect();
    let mut margins = Vec::with_capacity(MARGIN_COUNT);
    for (k, &kind) in DC_MARGINS.iter().enumerate() {
        let values: Vec<f64> = tightest.iter().map(|t| t[k]).collect();
        let finite: Vec<f64> = values.iter().copied().filter(|v| v.is_finite()).collect();
        margins.push(MarginStatistics {
            kind,
            title: kind.title().to_string(),
            unit: kind.unit().to_string(),
            required: required.get(k).copied().unwrap_or(0.0),
            nominal: nominal_margins.iter().map(|m| m[k]).fold(f64::INFINITY, f64::min),
            min: finite.iter().copied().fold(f64::INFINITY, f64::min),
            mean: if finite.is_empty() { f64::NAN } else { finite.iter().sum::<f64>() / finite.len() as f64 },
            failing_trials: failed_kind.iter().filter(|f| f[k]).count() as u32,
            failures_per_stage: failures_per_stage.iter().map(|s| s[k]).collect(),
            histogram: histogram(&values, options.histogram_bins as usize),
        });
    }
    let most_frequent_failure = failures_per_stage
        .iter()
        .enumerate()
        .flat_map(|(stage, counts)| counts.iter().enumerate().map(move |(k, &c)| (stage, k, c)))
        .filter(|&(_, _, c)| c > 0)
        // Highest count; ties go to the earlier stage and the earlier margin.
        .fold(None, |best: Option<(usize, usize, u32)>, item| match best {
            Some(b) if b.2 >= item.2 => Some(b),
            _ => Some(item),
        })
        .and_then(|(stage, k, failures)| {
            DC_MARGINS.get(k).map(|&kind| MostFrequentFailure {
                kind,
                stage: stage as u32,
                failures,
                fraction: f64::from(failures) / f64::from(options.trials),
            })
        });
    let conditions = first.input().conditions;
    let notes = vec![
        format!("distribution: {}", options.distribution.name()),
        format!(
            "per build: temperature uniform over {} … {} °C, each rail within ±{:.1} % once (shared by all stages)",
            conditions.t_min_c,
            conditions.t_max_c,
            100.0 * first.input().supplies.tolerance
        ),
        format!(
            "per stage, independently: every resistor (±{:.1} %), C1 and Ct (±{:.1} %), each transistor's hFE, VCE(sat) and VBE(sat) over its datasheet spread",
            100.0 * conditions.resistor_tolerance,
            100.0 * conditions.capacitor_tolerance
        ),
        "margins by the piecewise (handbook) model: the eight DC margins; the loop gain, toggle rate and trigger amplitude are checked by the worst case only".to_string(),
        "interval: Wilson score (Wilson 1927), two-sided; lower bound: one-sided Wilson".to_string(),
    ];
    Ok(YieldReport {
        options: *options,
        stage_count: stages as u32,
        passed,
        yield_fraction,
        interval: wilson_two_sided(u64::from(passed), n, options.confidence),
        lower_bound: wilson_lower_bound(u64::from(passed), n, options.confidence),
        trials_for_half_width: sample_size(p_for_size, options.half_width, options.confidence),
        margins,
        most_frequent_failure,
        digest: format!("{:016x}", digest.finish()),
        notes,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tolerance::test_designs;

    #[test]
    fn progress_sees_every_block_leaves_the_digest_alone_and_can_cancel() {
        let chain = LoadedChain::uniform(&test_designs::demo(), 2).unwrap_or_else(|e| unreachable!("{e}"));
        let options =
            MonteCarloOptions { trials: 2 * PROGRESS_EVERY_TRIALS + 1, seed: 3, ..Default::default() };
        let plain = monte_carlo_yield(&chain, &options).unwrap_or_else(|e| unreachable!("{e}"));
        let mut calls = Vec::new();
        let watched = monte_carlo_yield_with_progress(&chain, &options, &mut |done, total| {
            calls.push((done, total));
            true
        })
        .unwrap_or_else(|e| unreachable!("{e}"));
        assert_eq!(watched.digest, plain.digest, "progress does not change the draws");
        let total = options.trials;
        assert_eq!(calls, [(0, total), (PROGRESS_EVERY_TRIALS, total), (2 * PROGRESS_EVERY_TRIALS, total)]);
        let stopped = monte_carlo_yield_with_progress(&chain, &options, &mut |done, _| done == 0);
        assert_eq!(stopped, Err(ToleranceError::Cancelled { done_trials: PROGRESS_EVERY_TRIALS }));
    }
}
