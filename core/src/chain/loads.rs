//! The loads a chain puts on each stage's collectors, as `stage::Load` for the DC analysis
//! (combined with the design's own loads), and the capacitance each collector drives.
//!
//! What loads what (index 0 is Q1's collector, the complement output; index 1 is Q2's, Q):
//! - the next stage's trigger network hangs on Q through its trigger capacitors, which block
//!   DC: no DC load, only capacitance (2·Ct for base steering, Ct for collector steering);
//! - the decoding gate of a reset chain loads each decoded Q with Rp to VCC − VF;
//! - the feedback of a skip chain hangs on the last stage's complement output through one
//!   preset capacitor (Ct) per receiving stage: capacitance only;
//! - the reset diodes and preset diodes sit on bases and are reverse-biased at rest: no load.

use serde::{Deserialize, Serialize};

use super::reset::ResetNetwork;
use super::{ChainError, Method, MethodPlan};
use crate::stage::{FieldError, Load, StageDesign, Steering};

/// Loads on one stage of a chain.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StageLoads {
    pub stage: u32,
    /// DC loads on [Q1's collector, Q2's collector]: the design's own combined with the chain's.
    pub loads: [Load; 2],
    /// Capacitance the chain hangs on each collector, F (switching only, no DC current).
    pub capacitance_f: [f64; 2],
    /// What each load is.
    pub sources: Vec<String>,
}

/// Two loads on one node as one: resistances in parallel with their Thévenin return, a
/// current as a shift of the return (I drawn out through R equals R to a return I·R lower).
pub fn combine_loads(first: Load, second: Load) -> Load {
    match (first, second) {
        (Load::None, other) | (other, Load::None) => other,
        (Load::Current { current_a: a }, Load::Current { current_a: b }) => {
            Load::Current { current_a: a + b }
        }
        (Load::Resistance { resistance_ohm, return_v }, Load::Current { current_a })
        | (Load::Current { current_a }, Load::Resistance { resistance_ohm, return_v }) => {
            Load::Resistance { resistance_ohm, return_v: return_v - current_a * resistance_ohm }
        }
        (
            Load::Resistance { resistance_ohm: r1, return_v: v1 },
            Load::Resistance { resistance_ohm: r2, return_v: v2 },
        ) => {
            let resistance_ohm = r1 * r2 / (r1 + r2);
            Load::Resistance { resistance_ohm, return_v: (v1 / r1 + v2 / r2) * resistance_ohm }
        }
    }
}

/// Every stage's loads in a planned chain of identical `design` stages. A reset plan needs its
/// reset network (the decoding gate's pull-up).
pub fn chain_stage_loads(
    plan: &MethodPlan,
    design: &StageDesign,
    reset: Option<&ResetNetwork>,
) -> Result<Vec<StageLoads>, ChainError> {
    chain_stage_loads_with_decode(plan, design, reset.map(|r| r.decode_load))
}

/// [`chain_stage_loads`] with the decoding gate's load given directly (`decode_load` of either
/// reset network, passive or driven).
pub fn chain_stage_loads_with_decode(
    plan: &MethodPlan,
    design: &StageDesign,
    decode_load: Option<Load>,
) -> Result<Vec<StageLoads>, ChainError> {
    let trigger = design.values().trigger.ok_or(ChainError::MissingTriggerNetwork)?;
    let trigger_input_f = match trigger.steering {
        Steering::Base => 2.0 * trigger.trigger_capacitor_f,
        Steering::Collector => trigger.trigger_capacitor_f,
    };
    let decode_load = match (&plan.method, decode_load) {
        (Method::ResetOnCount { .. }, None) => return Err(ChainError::MissingResetNetwork),
        (Method::ResetOnCount { decoded_stages }, Some(load)) => Some((decoded_stages, load)),
        _ => None,
    };
    let stage_count = u32::try_from(plan.stages.len()).unwrap_or(u32::MAX);
    let own = design.input().loads;
    let loads = (0..stage_count)
        .map(|stage| {
            let mut loads = own;
            let mut capacitance_f = [0.0; 2];
            let mut sources = Vec::new();
            if own.iter().any(|l| *l != Load::None) {
                sources.push("the design's own loads, kept on every stage".to_string());
            }
            if stage + 1 < stage_count {
                capacitance_f[1] += trigger_input_f;
                sources.push(format!(
                    "Q drives stage {}'s trigger network through its trigger capacitors (no DC load)",
                    stage + 1
                ));
            } else {
                sources.push("Q is the chain output".to_string());
            }
            if let Some((decoded, load)) = decode_load {
                if decoded.contains(&stage) {
                    loads[1] = combine_loads(loads[1], load);
                    sources.push("Q feeds a diode of the decoding gate (Rp to VCC − VF)".to_string());
                }
                sources.push(
                    "a reset diode (and series resistor) into Q2's base, reverse-biased at rest (no DC load)"
                        .to_string(),
                );
            }
            if let Method::SkipFeedback { source_stage, receiving_stages, .. } = &plan.method {
                if stage == *source_stage {
                    let receivers = u32::try_from(receiving_stages.len()).unwrap_or(u32::MAX);
                    capacitance_f[0] += f64::from(receivers) * trigger.trigger_capacitor_f;
                    sources.push(format!(
                        "the complement output drives {receivers} preset capacitors (no DC load)"
                    ));
                }
                if receiving_stages.contains(&stage) {
                    sources.push(
                        "a preset diode into Q2's base, reverse-biased at rest (no DC load)".to_string(),
                    );
                }
            }
            StageLoads { stage, loads, capacitance_f, sources }
        })
        .collect();
    Ok(loads)
}

/// The stage design with one chain position's loads, validated again, ready for
/// `stage::analysis::analyse`.
pub fn stage_design_with_loads(
    design: &StageDesign,
    loads: &StageLoads,
) -> Result<StageDesign, Vec<FieldError>> {
    let mut input = design.input().clone();
    input.loads = loads.loads;
    StageDesign::new(input)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn loads_combine_by_thevenin() {
        // 10 kΩ to 10 V with 10 kΩ to 0 V is 5 kΩ to 5 V; 1 mA drawn through 1 kΩ to 5 V is
        // 1 kΩ to 4 V.
        let both = combine_loads(
            Load::Resistance { resistance_ohm: 10e3, return_v: 10.0 },
            Load::Resistance { resistance_ohm: 10e3, return_v: 0.0 },
        );
        assert_eq!(both, Load::Resistance { resistance_ohm: 5e3, return_v: 5.0 });
        let shifted = combine_loads(
            Load::Current { current_a: 1e-3 },
            Load::Resistance { resistance_ohm: 1e3, return_v: 5.0 },
        );
        assert_eq!(shifted, Load::Resistance { resistance_ohm: 1e3, return_v: 4.0 });
        assert_eq!(
            combine_loads(Load::None, Load::Current { current_a: 2e-3 }),
            Load::Current { current_a: 2e-3 }
        );
    }
}
