//! Counter chains of toggle stages: how many stages divide by N, how a modulus that is not a
//! power of two is made (reset on reaching N, or feedback that skips states), each method's
//! count sequence, timing and extra parts, and the loads the chain puts on each stage.
//!
//! Conventions used throughout: stage 0 takes the input pulses; stage k+1 toggles on the
//! falling (1 → 0) edge of stage k's count output Q, which is the collector of the stage's Q2
//! (Q = 1 when Q2 is OFF and its collector is high); Q1's collector is the complement output.
//! A state is the stage outputs read as a binary number with stage 0 the least significant
//! bit. The chain's output is the last stage's Q; it falls once per N input pulses (the
//! carry). Everything is in the NPN frame, like the stage module.

pub mod design;
pub mod loads;
pub mod reset;
pub mod reset_driver;
pub mod sequence;
pub mod timing;

use serde::{Deserialize, Serialize};

use self::reset::ResetNetwork;
use self::reset_driver::DrivenResetNetwork;
pub use self::sequence::{
    CorrectionKind, CountStep, GlitchKind, GlitchWindow, OutputCycle, SequenceCheck, StageActivity, StartUp,
};

/// Smallest division ratio a chain can have (one binary).
pub const MIN_MODULUS: u32 = 2;
/// Largest division ratio planned (16 stages); the plan holds one table row per count.
pub const MAX_MODULUS: u32 = 65_536;

/// Why a chain could not be planned, timed or loaded.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum ChainError {
    /// Occurs when the division ratio is below [`MIN_MODULUS`] or above [`MAX_MODULUS`].
    ModulusOutOfRange { modulus: u64 },
    /// Occurs when a timing, rate or level input is not a usable number.
    InvalidInput { field: String, value: f64, expected: String },
    /// Occurs when a method-specific function is given a plan of another method.
    WrongMethod { expected: MethodKind, got: MethodKind },
    /// Occurs when the stage has no toggle trigger network, which every chain stage needs.
    MissingTriggerNetwork,
    /// Occurs when the loads of a reset-on-count chain are asked for without its reset network.
    MissingResetNetwork,
    /// Occurs when the reset network cannot be built from this stage and supply.
    ResetUnbuildable { reason: String },
}

impl std::fmt::Display for ChainError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            ChainError::ModulusOutOfRange { modulus } => write!(
                f,
                "modulus: {modulus} cannot be planned; give a division ratio from {MIN_MODULUS} to {MAX_MODULUS}"
            ),
            ChainError::InvalidInput { field, value, expected } => {
                write!(f, "{field}: must be {expected}, got {value}")
            }
            ChainError::WrongMethod { expected, got } => write!(
                f,
                "method: this needs a {} plan, got a {} plan; pick the plan of that method from the chain plan",
                expected.name(),
                got.name()
            ),
            ChainError::MissingTriggerNetwork => write!(
                f,
                "values.trigger: a chain stage is triggered by the previous one, so it needs a trigger network; add one or run the synthesis"
            ),
            ChainError::MissingResetNetwork => write!(
                f,
                "reset: the loads of a reset-on-count chain include its decoding gate; design the reset network first (chain::reset::design_reset_for_stage)"
            ),
            ChainError::ResetUnbuildable { reason } => write!(f, "reset network: {reason}"),
        }
    }
}

impl std::error::Error for ChainError {}

/// Returns a typed error unless `value` is finite and within `[low, high]`.
pub(crate) fn check_range(
    field: &str,
    value: f64,
    low: f64,
    high: f64,
    what: &str,
) -> Result<(), ChainError> {
    if value.is_finite() && value >= low && value <= high {
        Ok(())
    } else {
        Err(ChainError::InvalidInput {
            field: field.to_string(),
            value,
            expected: format!("{what} between {low} and {high}"),
        })
    }
}

/// Number of binary stages that divide by `modulus`: ⌈log2 N⌉.
pub fn stage_count(modulus: u32) -> Result<u32, ChainError> {
    if !(MIN_MODULUS..=MAX_MODULUS).contains(&modulus) {
        return Err(ChainError::ModulusOutOfRange { modulus: u64::from(modulus) });
    }
    // For N ≥ 2, ⌈log2 N⌉ is the bit length of N − 1.
    Ok(u32::BITS - (modulus - 1).leading_zeros())
}

/// The three ways a chain can divide; which one a plan uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum MethodKind {
    PlainBinary,
    ResetOnCount,
    SkipFeedback,
}

impl MethodKind {
    pub fn name(self) -> &'static str {
        match self {
            MethodKind::PlainBinary => "plain binary",
            MethodKind::ResetOnCount => "reset on reaching N",
            MethodKind::SkipFeedback => "feedback that skips states",
        }
    }
}

/// How the chain divides, with the connections the method adds.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Method {
    /// N = 2^n: the ripple chain alone divides by N.
    PlainBinary,
    /// A diode AND gate on the outputs that are 1 in N's binary code resets every stage when
    /// the count reaches N (the count then runs 0 … N − 1 in natural binary).
    ResetOnCount {
        /// Stages whose Q feeds the gate, lowest first.
        decoded_stages: Vec<u32>,
    },
    /// The last stage's 0 → 1 transition (its complement output falling) presets the stages
    /// that are 1 in S = 2^n − N, so the count jumps from 2^(n−1) to 2^(n−1) + S and S states
    /// are skipped: the classic decade of four binaries, generalised.
    SkipFeedback {
        source_stage: u32,
        /// Stages set to 1 by the feedback, lowest first.
        receiving_stages: Vec<u32>,
        skipped_states: u32,
    },
}

impl Method {
    pub fn kind(&self) -> MethodKind {
        match self {
            Method::PlainBinary => MethodKind::PlainBinary,
            Method::ResetOnCount { .. } => MethodKind::ResetOnCount,
            Method::SkipFeedback { .. } => MethodKind::SkipFeedback,
        }
    }
}

/// Parts a method adds to the n binaries.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct ExtraParts {
    pub diodes: u32,
    pub resistors: u32,
    pub capacitors: u32,
    pub transistors: u32,
    /// What they are, one line per kind.
    pub description: Vec<String>,
}

impl ExtraParts {
    pub fn total(&self) -> u32 {
        self.diodes + self.resistors + self.capacitors + self.transistors
    }
}

/// One method worked out for one modulus.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct MethodPlan {
    pub method: Method,
    /// One row per input pulse of a full cycle from the all-zero state.
    pub count_sequence: Vec<CountStep>,
    pub output: OutputCycle,
    pub stages: Vec<StageActivity>,
    /// Momentary states between input pulses and settled counts, and the transient states
    /// the method corrects.
    pub glitch_windows: Vec<GlitchWindow>,
    /// Most stage delays after one input pulse before the count has rippled through (the
    /// correction that may follow is timed separately).
    pub longest_ripple_stage_delays: u32,
    pub parts: ExtraParts,
    pub start_up: StartUp,
    pub check: SequenceCheck,
}

/// What to ask of the planner.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct ChainRequest {
    /// Division ratio N.
    pub modulus: u32,
    /// The stage outputs must read as natural binary 0 … N − 1 (for example 8-4-2-1 code for a
    /// display decoder); only the reset method gives that for N not a power of two.
    #[serde(default)]
    pub natural_binary_code: bool,
}

/// The method to build, and why.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct Recommendation {
    pub method: MethodKind,
    pub reasons: Vec<String>,
}

/// Every applicable method for one modulus, and the one to build.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ChainPlan {
    pub request: ChainRequest,
    pub modulus: u32,
    pub stage_count: u32,
    /// Plain binary alone for a power of two; otherwise reset on count and skip feedback.
    pub methods: Vec<MethodPlan>,
    /// From the plans alone; [`ChainPlan::recommend_with_reset`] adds the reset race.
    pub recommendation: Recommendation,
}

impl ChainPlan {
    pub fn method(&self, kind: MethodKind) -> Option<&MethodPlan> {
        self.methods.iter().find(|m| m.method.kind() == kind)
    }

    /// The recommendation once the reset network (and so its race margin) is known.
    pub fn recommend_with_reset(&self, reset: &ResetNetwork) -> Recommendation {
        let verdict = ResetVerdict {
            passes: reset.passes,
            problems: reset.problems.clone(),
            race_margin_s: reset.race.available_hold_s - reset.race.required_hold_s,
            driven: false,
            gate_sink_share: reset.gate_sink_share,
        };
        recommend(&self.methods, self.request.natural_binary_code, Some(&verdict))
    }

    /// The recommendation once the driven reset network (with its driver transistor) is known.
    pub fn recommend_with_driven_reset(&self, reset: &DrivenResetNetwork) -> Recommendation {
        let verdict = ResetVerdict {
            passes: reset.passes,
            problems: reset.problems.clone(),
            race_margin_s: reset.race.available_hold_s - reset.race.required_hold_s,
            driven: true,
            gate_sink_share: reset.gate_sink_share,
        };
        recommend(&self.methods, self.request.natural_binary_code, Some(&verdict))
    }
}

/// Plans every applicable method for `request.modulus` and recommends one.
pub fn plan_chain(request: &ChainRequest) -> Result<ChainPlan, ChainError> {
    let stage_count = stage_count(request.modulus)?;
    let methods = if request.modulus.is_power_of_two() {
        vec![sequence::plan_method(request.modulus, stage_count, MethodKind::PlainBinary)]
    } else {
        vec![
            sequence::plan_method(request.modulus, stage_count, MethodKind::ResetOnCount),
            sequence::plan_method(request.modulus, stage_count, MethodKind::SkipFeedback),
        ]
    };
    let recommendation = recommend(&methods, request.natural_binary_code, None);
    Ok(ChainPlan { request: *request, modulus: request.modulus, stage_count, methods, recommendation })
}

/// What the recommendation needs to know of a designed reset (passive or driven).
struct ResetVerdict {
    passes: bool,
    problems: Vec<String>,
    race_margin_s: f64,
    driven: bool,
    /// Current a decoded stage sinks from the gate at rest over its collector current.
    gate_sink_share: f64,
}

fn recommend(
    methods: &[MethodPlan],
    natural_binary_code: bool,
    reset: Option<&ResetVerdict>,
) -> Recommendation {
    let find = |kind: MethodKind| methods.iter().find(|m| m.method.kind() == kind);
    let (Some(reset_plan), Some(feedback_plan)) =
        (find(MethodKind::ResetOnCount), find(MethodKind::SkipFeedback))
    else {
        return Recommendation {
            method: MethodKind::PlainBinary,
            reasons: vec![
                "N is a power of two: the ripple chain divides by N with no extra parts".to_string()
            ],
        };
    };
    let duty = format!(
        "both give the same output duty cycle, {:.1} % high (the last stage is 1 for N − 2^(n−1) of the N counts); take the complement output for {:.1} %",
        100.0 * reset_plan.output.duty_cycle,
        100.0 * (1.0 - reset_plan.output.duty_cycle)
    );
    let parts = format!(
        "feedback adds {} parts, the reset {}",
        feedback_plan.parts.total(),
        reset_plan.parts.total()
    );
    let transient = "feedback shows its transient state (2^(n−1)) for one stage delay; the reset shows N on the outputs for the whole reset pulse".to_string();
    if let Some(network) = reset.filter(|r| !r.passes) {
        let what = if network.driven { "the driven reset network" } else { "the passive reset network" };
        let mut reasons = vec![format!("{what} fails its checks (feedback has none of them):")];
        reasons.extend(network.problems.iter().cloned());
        if natural_binary_code {
            reasons.push("natural binary outputs were asked for, which only the reset gives: fix the reset, or decode the feedback sequence instead".to_string());
        }
        reasons.extend([parts, duty]);
        return Recommendation { method: MethodKind::SkipFeedback, reasons };
    }
    if natural_binary_code {
        let race = match reset {
            Some(network) => format!(
                "the {} reset passes its checks: it wins its race with {} to spare, and the gate loads a decoded stage with {:.0} % of its collector current at rest",
                if network.driven { "driven" } else { "passive" },
                crate::units::format_quantity(network.race_margin_s, crate::units::Unit::Second),
                100.0 * network.gate_sink_share
            ),
            None => "its race margin is not yet known: design the reset network with the stages' timing"
                .to_string(),
        };
        return Recommendation {
            method: MethodKind::ResetOnCount,
            reasons: vec![
                "the outputs must read 0 … N − 1 in natural binary, which the reset gives and the feedback does not (it jumps from 2^(n−1) to 2^(n−1) + S)".to_string(),
                race,
                parts,
                duty,
            ],
        };
    }
    let mut reasons = vec![
        "feedback has no race to win: the preset follows the completed ripple and needs no pulse stretching"
            .to_string(),
        parts,
        transient,
        duty,
    ];
    if let Some(network) = reset {
        reasons.push(format!(
            "the {} reset passes its checks too (race margin {}, gate load {:.0} % of a decoded stage's collector current): feedback is preferred only for its fewer parts and its lack of a race; ask for natural binary outputs to get the reset",
            if network.driven { "driven" } else { "passive" },
            crate::units::format_quantity(network.race_margin_s, crate::units::Unit::Second),
            100.0 * network.gate_sink_share
        ));
    }
    Recommendation { method: MethodKind::SkipFeedback, reasons }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn stage_count_is_the_bit_length_of_n_minus_one() {
        for (modulus, stages) in [(2, 1), (3, 2), (4, 2), (5, 3), (10, 4), (16, 4), (17, 5), (65_536, 16)] {
            assert_eq!(stage_count(modulus), Ok(stages), "N = {modulus}");
        }
        for modulus in [0, 1, 65_537, u32::MAX] {
            assert!(matches!(stage_count(modulus), Err(ChainError::ModulusOutOfRange { .. })));
        }
    }

    #[test]
    fn powers_of_two_plan_plain_binary_only() {
        let plan = plan_chain(&ChainRequest { modulus: 8, natural_binary_code: false });
        assert!(
            matches!(&plan, Ok(p) if p.methods.len() == 1 && p.recommendation.method == MethodKind::PlainBinary),
            "{plan:?}"
        );
    }
}
