//! Tolerances across a whole counter chain: the worst case of every stage's margins, the
//! margins against temperature, Monte Carlo yield with its binomial interval, and synthesis
//! for a yield target.
//!
//! A chain is N copies of one `StageDesign`, each with its own loads (`chain::loads`); every
//! analysis here takes a [`LoadedChain`]. The worst case runs the stage worst case
//! (`stage::worst_case`) once per distinct loaded stage and combines them. The Monte Carlo
//! path uses the closed-form margin kernel (`kernel`) and `libm`, so a seed gives the same
//! bits natively and in wasm.

pub mod chain;
pub mod kernel;
pub mod monte_carlo;
pub mod sampling;
pub mod statistics;
pub mod temperature;
pub mod yield_synthesis;

use serde::{Deserialize, Serialize};

pub use self::chain::{
    chain_worst_case, loaded_chain, ChainMarginWorst, ChainShape, ChainWorstCase, LoadedChain,
};
pub use self::kernel::{Capacitors, DcMargins, MarginKernel, ThermalPoint};
pub use self::monte_carlo::{
    monte_carlo_yield, monte_carlo_yield_with_progress, MonteCarloOptions, YieldReport,
};
pub use self::temperature::{margins_against_temperature, TemperatureSweep};
pub use self::yield_synthesis::{synthesise_for_yield, YieldGoal, YieldSynthesis};

/// How a toleranced value is drawn.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Distribution {
    /// Uniform over the tolerance band (every value within it equally likely).
    Uniform,
    /// Normal with the tolerance edge at 3σ, truncated at ±3σ (redrawn outside): a part
    /// outside its tolerance is not sold as that part.
    Normal,
}

impl Distribution {
    pub fn name(self) -> &'static str {
        match self {
            Distribution::Uniform => "uniform within tolerance",
            Distribution::Normal => "normal, tolerance at 3σ, truncated at ±3σ",
        }
    }
}

/// Why a tolerance analysis could not run.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum ToleranceError {
    /// Occurs when an option is outside its range or not a number; says the range.
    InvalidOption { field: String, value: String, expected: String },
    /// Occurs when a chain has no stage or a stage design with its loads does not validate.
    InvalidChain { reason: String },
    /// Occurs when the stage worst case cannot be computed for a stage (its nominal state
    /// cannot be solved).
    StageAnalysis { stage: u32, reason: String },
    /// Occurs when synthesis fails while aiming at a yield.
    Synthesis { reason: String },
    /// Occurs when a run's progress callback asked it to stop.
    Cancelled { done_trials: u32 },
}

impl std::fmt::Display for ToleranceError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            ToleranceError::InvalidOption { field, value, expected } => {
                write!(f, "{field}: must be {expected}, got {value}")
            }
            ToleranceError::InvalidChain { reason } => write!(f, "chain: {reason}"),
            ToleranceError::StageAnalysis { stage, reason } => {
                write!(f, "stage {}: the worst case cannot be computed: {reason}", stage + 1)
            }
            ToleranceError::Synthesis { reason } => write!(f, "synthesis for a yield target: {reason}"),
            ToleranceError::Cancelled { done_trials } => write!(f, "cancelled after {done_trials} trials"),
        }
    }
}

impl std::error::Error for ToleranceError {}

pub(crate) fn invalid(field: &str, value: impl std::fmt::Display, expected: &str) -> ToleranceError {
    ToleranceError::InvalidOption {
        field: field.to_string(),
        value: value.to_string(),
        expected: expected.to_string(),
    }
}

/// Checks that a confidence level is usable.
pub(crate) fn check_confidence(field: &str, confidence: f64) -> Result<(), ToleranceError> {
    if confidence.is_finite() && (0.5..=0.9999).contains(&confidence) {
        Ok(())
    } else {
        Err(invalid(field, confidence, "a confidence level between 0.5 and 0.9999 (0.95 = 95 %)"))
    }
}

/// Designs the tolerance tests share: the demo stage (fixed bias, base steering, a load on
/// Q), and variants that exercise self bias, collector steering, germanium PNP and a current
/// load.
#[cfg(test)]
pub(crate) mod test_designs {
    use crate::design_file::DesignFile;
    use crate::stage::synthesis::synthesise;
    use crate::stage::{BiasScheme, Load, StageDesign, Steering};

    pub(crate) fn synthesised(text: &str) -> StageDesign {
        let file = DesignFile::parse(text).unwrap_or_else(|e| unreachable!("{e:?}"));
        let input = file.synthesis_input().unwrap_or_else(|e| unreachable!("{e:?}"));
        let outcome = synthesise(&input).unwrap_or_else(|e| unreachable!("{e}"));
        let mut input = input;
        input.values = outcome.values;
        StageDesign::new(input).unwrap_or_else(|e| unreachable!("{e:?}"))
    }

    pub(crate) fn demo() -> StageDesign {
        synthesised(&DesignFile::demo().to_json())
    }

    pub(crate) fn variants() -> Vec<(&'static str, StageDesign)> {
        let demo = demo();
        let mut list = vec![("demo", demo.clone())];
        let mut input = demo.input().clone();
        input.loads =
            [Load::Current { current_a: 1e-4 }, Load::Resistance { resistance_ohm: 22e3, return_v: 3.0 }];
        if let Ok(d) = StageDesign::new(input) {
            list.push(("current load", d));
        }
        let mut input = demo.input().clone();
        if let Some(t) = input.values.trigger.as_mut() {
            t.steering = Steering::Collector;
        }
        if let Ok(d) = StageDesign::new(input) {
            list.push(("collector steering", d));
        }
        let text = DesignFile::demo().to_json().replace("\"fixed\"", "\"self_bias\"");
        let self_bias = synthesised(&text);
        assert_eq!(self_bias.values().bias, BiasScheme::SelfBias);
        list.push(("self bias", self_bias));
        let text = DesignFile::demo().to_json().replace("\"si-npn-switch-40v\"", "\"ge-pnp-alloy-15v\"");
        list.push(("germanium PNP", synthesised(&text)));
        list
    }
}
