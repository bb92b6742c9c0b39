//! A chain worked out for one designed stage: the plan for N, the method to build (the
//! user's choice or the recommendation once the reset network's race is known), every
//! method's timing at the design's input rate, the reset network, the loads each stage of the
//! chosen chain sees, and the extra parts with reference designators. Front ends render it.

use serde::{Deserialize, Serialize};

use super::loads::{chain_stage_loads_with_decode, StageLoads};
use super::reset_driver::{design_reset_driver_for_stage, DrivenResetNetwork};
use super::timing::{chain_timing_with_reset_cycle, ChainTiming, StageTiming};
use super::{plan_chain, ChainError, ChainPlan, ChainRequest, Method, MethodKind, Recommendation};
use crate::stage::analysis::StageReport;
use crate::stage::StageDesign;
use crate::table::{component_table, reset_network_table, ComponentRow};

/// Spread of the stage times taken for chain timing: the slowest stage is 30 % slower than
/// the estimate (our choice for identical stages built from one batch, stated in the notes).
pub const CHAIN_TIMING_SPREAD: f64 = 0.3;

/// One method's timing, or why it could not be timed.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct MethodTiming {
    pub method: MethodKind,
    pub timing: Result<ChainTiming, String>,
}

/// Everything about the chain of one designed stage.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ChainDesign {
    pub plan: ChainPlan,
    /// The recommendation, with the reset race when the reset network could be designed.
    pub recommendation: Recommendation,
    /// The method to build.
    pub chosen: MethodKind,
    /// True when the user named the method, false when it is the recommendation.
    pub chosen_by_user: bool,
    pub timing: Vec<MethodTiming>,
    /// The stage's estimated maximum toggle rate at its slow corner, Hz.
    pub stage_max_toggle_rate_hz: f64,
    /// The driven reset network (the one the verification builds and simulates).
    pub reset: Option<DrivenResetNetwork>,
    /// Why the reset network could not be designed, when it could not.
    pub reset_problem: Option<String>,
    /// Loads on each stage of the chosen chain, or why they could not be worked out.
    pub loads: Result<Vec<StageLoads>, String>,
    /// Extra parts of the chosen method, for the component table.
    /// The method's extra parts (designators in the chain's own 9xx range, so they never
    /// collide with stage k's k01…k99), as component-table rows with tolerance, stress and
    /// rating like the stage's own.
    pub parts: Vec<ComponentRow>,
    pub notes: Vec<String>,
}

/// Works out the chain of `request.modulus` stages of `design` (already analysed in
/// `report`); `choice` names the method, `None` takes the recommendation.
pub fn design_chain(
    request: &ChainRequest,
    choice: Option<MethodKind>,
    design: &StageDesign,
    report: &StageReport,
) -> Result<ChainDesign, ChainError> {
    let plan = plan_chain(request)?;
    let stage_timing = StageTiming::from_report(report, CHAIN_TIMING_SPREAD);
    let input_rate_hz = design.input().requirements.toggle_rate_hz;
    let mut recommendation = plan.recommendation.clone();
    let (reset, reset_problem) = if plan.method(MethodKind::ResetOnCount).is_some() {
        match design_reset_driver_for_stage(&plan, design, &stage_timing) {
            Ok(network) => {
                recommendation = plan.recommend_with_driven_reset(&network);
                (Some(network), None)
            }
            Err(e) => {
                recommendation.reasons.push(format!("the reset cannot be built: {e}"));
                (None, Some(e.to_string()))
            }
        }
    } else {
        (None, None)
    };
    let chosen = match choice {
        Some(kind) if plan.method(kind).is_some() => kind,
        Some(kind) => {
            return Err(ChainError::WrongMethod { expected: kind, got: recommendation.method });
        }
        None => recommendation.method,
    };
    let timing = plan
        .methods
        .iter()
        .map(|method| {
            let kind = method.method.kind();
            let network = if kind == MethodKind::ResetOnCount { reset.as_ref() } else { None };
            MethodTiming {
                method: kind,
                timing: chain_timing_with_reset_cycle(
                    method,
                    &stage_timing,
                    input_rate_hz,
                    network.map(|r| r.timeline.reset_cycle_s),
                )
                .map_err(|e| e.to_string()),
            }
        })
        .collect::<Vec<MethodTiming>>();
    if let Some(Ok(t)) = timing.iter().find(|t| t.method == chosen).map(|t| &t.timing) {
        if !t.meets_input_rate {
            recommendation.reasons.push(format!(
                "the chain cannot take the required input rate of {}: at most {}, limited by {}",
                crate::units::format_quantity(t.input_rate_hz, crate::units::Unit::Hertz),
                crate::units::format_quantity(t.max_input_rate_hz, crate::units::Unit::Hertz),
                t.limited_by
            ));
        }
    }
    let chosen_plan = plan.method(chosen).ok_or(ChainError::WrongMethod { expected: chosen, got: chosen })?;
    let loads = chain_stage_loads_with_decode(
        chosen_plan,
        design,
        if chosen == MethodKind::ResetOnCount { reset.as_ref().map(|r| r.decode_load) } else { None },
    )
    .map_err(|e| e.to_string());
    let parts = extra_parts(&chosen_plan.method, reset.as_ref(), design, report);
    let notes = vec![format!(
        "chain timing takes the slowest stage {:.0} % slower than the stage's charge-control estimate",
        CHAIN_TIMING_SPREAD * 100.0
    )];
    Ok(ChainDesign {
        plan,
        recommendation,
        chosen,
        chosen_by_user: choice.is_some(),
        timing,
        stage_max_toggle_rate_hz: report.worst_max_toggle_rate_hz,
        reset,
        reset_problem,
        loads,
        parts,
        notes,
    })
}

/// The method's extra parts with designators in the 9xx range. The reset network's parts
/// come from its design (stresses and ratings by the component table's rules); the
/// feedback's preset capacitors, diodes and resistors repeat the stage's own trigger network
/// (one set per receiving stage, as the loads module assumes), so each takes the stress and
/// rating of the stage part it copies.
fn extra_parts(
    method: &Method,
    reset: Option<&DrivenResetNetwork>,
    design: &StageDesign,
    report: &StageReport,
) -> Vec<ComponentRow> {
    match method {
        Method::PlainBinary => Vec::new(),
        Method::ResetOnCount { .. } => {
            let conditions = &design.input().conditions;
            let mut rows = reset.map_or_else(Vec::new, |network| {
                reset_network_table(network, conditions.resistor_tolerance, conditions.capacitor_tolerance)
            });
            // Semiconductors are the stage's own types: name them, and hold their ratings
            // against what the network asks of them (the rows come in the parts' order).
            let parts = reset.map_or(&[][..], |network| network.parts.as_slice());
            let q = crate::units::format_quantity;
            use crate::units::Unit;
            for (row, part) in rows.iter_mut().zip(parts) {
                match row.part.as_str() {
                    "diode" => {
                        let diode = design.diode();
                        row.value_text = diode.label.clone();
                        row.meets = diode.piv_v >= part.voltage_v && diode.if_max_a >= part.current_a;
                        row.rating_text = format!(
                            "{}; the stage's diode has PIV {}, IF(max) {}",
                            row.rating_text,
                            q(diode.piv_v, Unit::Volt),
                            q(diode.if_max_a, Unit::Ampere)
                        );
                    }
                    "transistor" => {
                        let sheet = design.transistor();
                        row.value_text = sheet.label.clone();
                        row.meets = sheet.vceo_v >= part.voltage_v
                            && sheet.ic_max_a >= part.current_a
                            && sheet.ptot_w >= part.dissipation_w;
                        row.rating_text = format!(
                            "{}, {}; the stage's transistor has VCEO {}, IC(max) {}, Ptot(25 °C) {}",
                            row.rating_text,
                            q(part.dissipation_w, Unit::Watt),
                            q(sheet.vceo_v, Unit::Volt),
                            q(sheet.ic_max_a, Unit::Ampere),
                            q(sheet.ptot_w, Unit::Watt)
                        );
                    }
                    _ => {}
                }
            }
            rows
        }
        Method::SkipFeedback { source_stage, receiving_stages, .. } => {
            let stage_rows = component_table(design, report, 1);
            // Stage 1's Ct, first steering diode and Rt (C103, D101 and R108 with either
            // steering): the preset network copies the trigger network.
            let copy = |designator: &str| stage_rows.iter().find(|r| r.designator == designator).cloned();
            let mut rows = Vec::new();
            for (k, stage) in receiving_stages.iter().enumerate() {
                let copies = [
                    (
                        copy("C103"),
                        "C",
                        format!("preset capacitor from stage {} Q̄ to stage {}", source_stage + 1, stage + 1),
                    ),
                    (
                        copy("D101"),
                        "D",
                        format!("preset steering diode into stage {} Q2 base (sets it to 1)", stage + 1),
                    ),
                    (copy("R108"), "R", format!("preset bias resistor of stage {}", stage + 1)),
                ];
                for (row, letter, function) in copies {
                    if let Some(mut row) = row {
                        row.function = format!("{function}; the same part as {}", row.designator);
                        row.designator = format!("{letter}9{:02}", k + 1);
                        rows.push(row);
                    }
                }
            }
            rows
        }
    }
}
