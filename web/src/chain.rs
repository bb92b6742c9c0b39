//! The chain plan and its verification as the page shows them: transfer structs cut from
//! `core::chain::design::ChainDesign` (the count table, timing, reset or feedback, loads and
//! extra parts of the chosen method) and the plan's logic timing diagram (ideal levels from
//! the count sequence, drawn by `plots`). Conversion only; the engineering is in the core.

use serde::Serialize;
use wasm_bindgen::prelude::*;

use flipwright::chain::design::{design_chain, ChainDesign};
use flipwright::chain::loads::StageLoads;
use flipwright::chain::reset_driver::DrivenResetNetwork;
use flipwright::chain::timing::ChainTiming;
use flipwright::chain::{CorrectionKind, GlitchKind, Method, MethodKind, MethodPlan, OutputCycle, StartUp};
use flipwright::design_file::{ChainSection, DesignFile};
use flipwright::stage::analysis::StageReport;
use flipwright::stage::StageDesign;
use flipwright::verify::{self, CountCheck, InputPulse, RunAccuracy, SearchSettings, SimulationCorner};

use crate::plots::TimingDiagram;
use crate::traces::{DecimatedRun, DecimatedTrace, MAX_BUCKETS};
use crate::{polarity_assumptions, to_js, Outcome};

/// One method as the comparison table shows it.
#[derive(Serialize)]
pub struct MethodSummary {
    pub kind: MethodKind,
    pub name: &'static str,
    pub recommended: bool,
    pub chosen: bool,
    pub extra_parts: u32,
    pub parts_description: Vec<String>,
    pub output: OutputCycle,
    pub start_up: StartUp,
    pub glitch_windows: usize,
    pub natural_binary: bool,
    pub timing: Option<ChainTiming>,
    pub timing_problem: Option<String>,
}

/// One row of the count table.
#[derive(Serialize)]
pub struct CountRow {
    pub pulse: u32,
    /// Settled state and its bits, last stage first.
    pub state: u32,
    pub bits: String,
    pub output_high: bool,
    /// "reset from 10 (1010)" or "preset from 8 (1000)" where a correction follows the ripple.
    pub correction: Option<String>,
}

/// Momentary states a decoder of the outputs would see, by kind, with the first few.
#[derive(Serialize)]
pub struct GlitchSummary {
    pub ripple: usize,
    pub reset_transient: usize,
    pub preset_transient: usize,
    /// "after pulse 2: 0 (0000) for 1 stage delay from 1"…
    pub examples: Vec<String>,
}

/// The feedback connections of a skip-state chain.
#[derive(Serialize)]
pub struct FeedbackView {
    pub source_stage: u32,
    pub receiving_stages: Vec<u32>,
    pub skipped_states: u32,
    /// State the count jumps from, and to.
    pub jumps_from: u32,
    pub jumps_to: u32,
}

/// The chain plan of the design file's `chain` section, for the page.
#[derive(Serialize)]
pub struct ChainPlanView {
    pub divide_by: u32,
    pub stage_count: u32,
    pub chosen: MethodKind,
    pub chosen_name: &'static str,
    pub chosen_by_user: bool,
    pub recommended: MethodKind,
    pub recommendation_reasons: Vec<String>,
    pub methods: Vec<MethodSummary>,
    /// The count table as the page shows it: every row up to [`COUNT_ROWS_SHOWN`], else the
    /// first rows and the last [`COUNT_TAIL_ROWS`] (a divide-by-1024 table is not read row by
    /// row, and sending it whole cost the page a third of its recompute time).
    pub count_table: Vec<CountRow>,
    /// Rows of the whole table (one per input pulse of the cycle).
    pub count_rows: usize,
    /// Rows of `count_table` before the rows left out (all of them when it is whole).
    pub count_head_rows: usize,
    /// Rows left out after the first `count_head_rows` (0 when the table is whole).
    pub count_rows_omitted: usize,
    pub decoded_stages: Vec<u32>,
    pub feedback: Option<FeedbackView>,
    pub glitches: GlitchSummary,
    pub reset: Option<DrivenResetNetwork>,
    pub reset_problem: Option<String>,
    pub loads: Vec<StageLoads>,
    pub loads_problem: Option<String>,
    pub stage_max_toggle_rate_hz: f64,
    pub parts: Vec<flipwright::table::ComponentRow>,
    pub notes: Vec<String>,
    /// Input and every stage's Q over one output period, ideal logic levels.
    pub diagram: TimingDiagram,
}

fn bits(state: u32, stages: u32) -> String {
    (0..stages).rev().map(|bit| if state >> bit & 1 == 1 { '1' } else { '0' }).collect()
}

/// Count-table rows shown whole; a longer table shows its first rows and the last
/// [`COUNT_TAIL_ROWS`], this many in all.
pub const COUNT_ROWS_SHOWN: usize = 64;
pub const COUNT_TAIL_ROWS: usize = 8;

/// The count table's rows as shown (see [`ChainPlanView::count_table`]), the rows before the
/// gap, and the rows left out there.
fn count_table(plan: &MethodPlan, stages: u32) -> (Vec<CountRow>, usize, usize) {
    let rows = &plan.count_sequence;
    let omitted = rows.len().saturating_sub(COUNT_ROWS_SHOWN);
    let head = if omitted > 0 { COUNT_ROWS_SHOWN - COUNT_TAIL_ROWS } else { rows.len() };
    let shown = rows.iter().take(head).chain(rows.iter().skip(head + omitted));
    let table = shown
        .map(|row| CountRow {
            pulse: row.pulse,
            state: row.settled_state,
            bits: bits(row.settled_state, stages),
            output_high: row.output_high,
            correction: row.correction.as_ref().map(|c| {
                let kind = match c.kind {
                    CorrectionKind::Reset => "reset",
                    CorrectionKind::Preset => "preset",
                };
                format!("{kind} from {} ({})", row.reached_state, bits(row.reached_state, stages))
            }),
        })
        .collect();
    (table, head, omitted)
}

/// Glitch examples listed at most (the counts cover them all).
const GLITCH_EXAMPLES: usize = 6;

fn glitches(plan: &MethodPlan, stages: u32) -> GlitchSummary {
    let count = |kind: GlitchKind| plan.glitch_windows.iter().filter(|g| g.kind == kind).count();
    let examples = plan
        .glitch_windows
        .iter()
        .filter(|g| g.kind != GlitchKind::Ripple)
        .chain(plan.glitch_windows.iter().filter(|g| g.kind == GlitchKind::Ripple))
        .take(GLITCH_EXAMPLES)
        .map(|g| {
            let until = match g.to_stage_delays {
                Some(to) => format!("from {} to {to} stage delays", g.from_stage_delays),
                None => format!("from {} stage delays until the reset clears it", g.from_stage_delays),
            };
            let kind = match g.kind {
                GlitchKind::Ripple => "ripple",
                GlitchKind::ResetTransient => "reset transient",
                GlitchKind::PresetTransient => "preset transient",
            };
            format!("after pulse {}: {} ({}), {kind}, {until}", g.pulse, g.state, bits(g.state, stages))
        })
        .collect();
    GlitchSummary {
        ripple: count(GlitchKind::Ripple),
        reset_transient: count(GlitchKind::ResetTransient),
        preset_transient: count(GlitchKind::PresetTransient),
        examples,
    }
}

/// Ideal logic levels of the input and every stage's Q over one output period of `plan`, at
/// `input_rate_hz`: the input is high in the second half of each period and its falling edge
/// (the active edge) ends the period; the state after pulse k holds from edge k to edge k+1.
pub fn logic_diagram(plan: &MethodPlan, stages: u32, input_rate_hz: f64) -> TimingDiagram {
    let period_s = if input_rate_hz.is_finite() && input_rate_hz > 0.0 { 1.0 / input_rate_hz } else { 1.0 };
    let pulses = plan.count_sequence.len();
    // Half a period of the all-zero state before the first edge, half after the last.
    let start_s = 0.0;
    let first_edge_s = 0.5 * period_s;
    let stop_s = first_edge_s + pulses as f64 * period_s + 0.5 * period_s;
    let buckets = (8 * (pulses + 1)).min(MAX_BUCKETS);
    let width_s = (stop_s - start_s) / buckets as f64;
    // State in force at time t: 0 before the first edge, then the settled state of pulse k.
    let state_at = |t: f64| -> u32 {
        if t < first_edge_s {
            return 0;
        }
        let k = ((t - first_edge_s) / period_s).floor() as usize;
        plan.count_sequence.get(k.min(pulses.saturating_sub(1))).map_or(0, |r| r.settled_state)
    };
    let last_edge_s = first_edge_s + pulses.saturating_sub(1) as f64 * period_s;
    let input_at = |t: f64| -> f64 {
        // High for the half period before each edge, and low after the last one: the next
        // cycle's first edge is not drawn, so neither is the pulse before it.
        if t > last_edge_s {
            return 0.0;
        }
        let phase = ((t - first_edge_s) / period_s).rem_euclid(1.0);
        if phase >= 0.5 {
            1.0
        } else {
            0.0
        }
    };
    // Sample each bucket just inside its two ends and on both sides of every edge or
    // mid-period inside it, so the envelope holds every level the bucket spans and no other.
    // The samples keep a small inset from every boundary and edge: a bucket that starts on an
    // edge (8 buckets per period put every edge on a boundary) must not see the level before
    // it, nor the rounding of the period arithmetic decide which side of the edge a sample is.
    let inset = 1e-6 * width_s;
    let samples_in = |i: usize| -> Vec<f64> {
        let (a, b) = (start_s + i as f64 * width_s, start_s + (i + 1) as f64 * width_s);
        let mut times = vec![a + inset, b - inset];
        let half = 0.5 * period_s;
        let mut t = first_edge_s + ((a - first_edge_s) / half).ceil() * half;
        while t < b {
            times.extend([t - inset, t + inset].into_iter().filter(|&x| a < x && x < b));
            t += half;
        }
        times
    };
    let mut traces: Vec<DecimatedTrace> = std::iter::once(("in".to_string(), "input".to_string()))
        .chain((0..stages).map(|k| (format!("q{k}"), format!("stage {} Q · bit {k}", k + 1))))
        .map(|(node, label)| DecimatedTrace { node, label, min_v: Vec::new(), max_v: Vec::new() })
        .collect();
    let mut states: Vec<u32> = Vec::new();
    for i in 0..buckets {
        let times = samples_in(i);
        // The state at each sample once, not once per lane (ten lanes for divide by 1024).
        states.clear();
        states.extend(times.iter().map(|&t| state_at(t)));
        for (lane, trace) in traces.iter_mut().enumerate() {
            let levels = times.iter().zip(&states).map(|(&t, &state)| {
                if lane == 0 {
                    input_at(t)
                } else {
                    f64::from(state >> (lane - 1) & 1)
                }
            });
            let (low, high) =
                levels.fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), v| (l.min(v), h.max(v)));
            trace.min_v.push(low);
            trace.max_v.push(high);
        }
    }
    let edge_times_s: Vec<f64> = (0..=pulses).map(|k| first_edge_s + k as f64 * period_s).collect();
    TimingDiagram {
        run: DecimatedRun { start_s, stop_s, buckets, recorded_points: 0, traces },
        edge_times_s,
        counts: plan.count_sequence.iter().map(|r| Some(u64::from(r.settled_state))).collect(),
        logic: true,
    }
}

fn plan_view(chain: ChainDesign, input_rate_hz: f64) -> Result<ChainPlanView, String> {
    let stages = chain.plan.stage_count;
    let chosen_plan =
        chain.plan.method(chain.chosen).ok_or_else(|| "the chosen method has no plan".to_string())?;
    let methods = chain
        .plan
        .methods
        .iter()
        .map(|m| {
            let kind = m.method.kind();
            let timing = chain.timing.iter().find(|t| t.method == kind).map(|t| t.timing.clone());
            MethodSummary {
                kind,
                name: kind.name(),
                recommended: kind == chain.recommendation.method,
                chosen: kind == chain.chosen,
                extra_parts: m.parts.total(),
                parts_description: m.parts.description.clone(),
                output: m.output.clone(),
                start_up: m.start_up.clone(),
                glitch_windows: m.glitch_windows.len(),
                natural_binary: m
                    .count_sequence
                    .iter()
                    .all(|r| r.settled_state == r.pulse % chain.plan.modulus),
                timing_problem: timing.clone().and_then(|t| t.err()),
                timing: timing.and_then(|t| t.ok()),
            }
        })
        .collect();
    let (decoded_stages, feedback) = match &chosen_plan.method {
        Method::PlainBinary => (Vec::new(), None),
        Method::ResetOnCount { decoded_stages } => (decoded_stages.clone(), None),
        Method::SkipFeedback { source_stage, receiving_stages, skipped_states } => {
            let jumps_from = 1u32 << source_stage;
            (
                Vec::new(),
                Some(FeedbackView {
                    source_stage: *source_stage,
                    receiving_stages: receiving_stages.clone(),
                    skipped_states: *skipped_states,
                    jumps_from,
                    jumps_to: jumps_from + skipped_states,
                }),
            )
        }
    };
    let (count_table, count_head_rows, count_rows_omitted) = count_table(chosen_plan, stages);
    let (loads, loads_problem) = match chain.loads {
        Ok(loads) => (loads, None),
        Err(problem) => (Vec::new(), Some(problem)),
    };
    Ok(ChainPlanView {
        divide_by: chain.plan.modulus,
        stage_count: stages,
        chosen: chain.chosen,
        chosen_name: chain.chosen.name(),
        chosen_by_user: chain.chosen_by_user,
        recommended: chain.recommendation.method,
        recommendation_reasons: chain.recommendation.reasons.clone(),
        methods,
        count_table,
        count_rows: chosen_plan.count_sequence.len(),
        count_head_rows,
        count_rows_omitted,
        decoded_stages,
        feedback,
        glitches: glitches(chosen_plan, stages),
        reset: if chain.chosen == MethodKind::ResetOnCount { chain.reset.clone() } else { None },
        reset_problem: chain.reset_problem.clone(),
        loads,
        loads_problem,
        stage_max_toggle_rate_hz: chain.stage_max_toggle_rate_hz,
        parts: chain.parts.clone(),
        notes: chain.notes.clone(),
        diagram: logic_diagram(chosen_plan, stages, input_rate_hz),
    })
}

/// The chain view of a file's `chain` section, `None` for a single stage.
pub fn chain_view(
    section: Option<&ChainSection>,
    design: &StageDesign,
    report: &StageReport,
) -> Option<Outcome<ChainPlanView>> {
    let section = section?;
    let outcome = match design_chain(&section.request(), section.method.method(), design, report) {
        Ok(chain) => match plan_view(chain, design.input().requirements.toggle_rate_hz) {
            Ok(view) => Outcome::Ok(view),
            Err(message) => Outcome::Failed { message },
        },
        Err(e) => Outcome::Failed { message: e.to_string() },
    };
    Some(outcome)
}

/// A planned chain's verification as the page shows it.
#[derive(Serialize)]
pub struct PlannedChainVerificationView {
    pub divide_by: u32,
    pub stage_count: u32,
    pub method: MethodKind,
    pub method_name: &'static str,
    pub check: CountCheck,
    /// The plan's settled count after each edge, to set beside the simulated count.
    pub planned: Vec<u32>,
    pub pulse: InputPulse,
    pub polarity_sign: f64,
    pub assumptions: Vec<String>,
    pub diagram: TimingDiagram,
}

fn verify_planned_text(design_json: &str, edges: Option<usize>) -> Outcome<PlannedChainVerificationView> {
    let (file, design) = match DesignFile::load(design_json) {
        Ok(pair) => pair,
        Err(errors) => return Outcome::Invalid { errors },
    };
    let Some(section) = file.chain else {
        return Outcome::Failed {
            message: "the design has no divide ratio: enter one to plan a chain".to_string(),
        };
    };
    let failed = |e: String| Outcome::Failed { message: format!("the chain verification failed: {e}") };
    let report = match flipwright::stage::analysis::analyse(&design) {
        Ok(report) => report,
        Err(e) => return failed(e.to_string()),
    };
    let chain = match design_chain(&section.request(), section.method.method(), &design, &report) {
        Ok(chain) => chain,
        Err(e) => return failed(e.to_string()),
    };
    let Some(plan) = chain.plan.method(chain.chosen) else {
        return failed("no plan for the method".to_string());
    };
    let stage_count = chain.plan.stage_count as usize;
    let edges = edges.unwrap_or(plan.count_sequence.len()).max(1);
    let pulse = match verify::service_pulse(&design, SearchSettings::default().edge_s) {
        Ok(pulse) => pulse,
        Err(e) => return failed(e.to_string()),
    };
    let corner = SimulationCorner::nominal();
    let (check, result, built) = match verify::verify_planned_chain(
        &design,
        plan,
        stage_count,
        edges,
        &pulse,
        &corner,
        &RunAccuracy::for_counting(),
    ) {
        Ok(triple) => triple,
        Err(e) => return failed(e.to_string()),
    };
    let sign = design.transistor().polarity.sign();
    let result = verify::in_real_polarity(result, sign);
    let planned = (0..edges)
        .map(|k| plan.count_sequence.get(k % plan.count_sequence.len().max(1)).map_or(0, |r| r.settled_state))
        .collect();
    Outcome::Ok(PlannedChainVerificationView {
        divide_by: chain.plan.modulus,
        stage_count: chain.plan.stage_count,
        method: chain.chosen,
        method_name: chain.chosen.name(),
        diagram: crate::chain_diagram(&built, &result, &check, &pulse),
        planned,
        pulse,
        polarity_sign: sign,
        assumptions: polarity_assumptions(built.assumptions, sign),
        check,
    })
}

/// Verifies the design file's planned chain by simulation: the chosen method's circuit run
/// for `edges` input edges (one output period when not given), the count after each compared
/// with the plan's count table (every method, the reset-on-count one with its driven reset
/// network). Runs for seconds to minutes: call it from a worker.
#[wasm_bindgen]
pub fn verify_planned_chain_design(design_json: &str, edges: Option<usize>) -> Result<JsValue, JsError> {
    to_js(&verify_planned_text(design_json, edges))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::{synthesise_text, Outcome};

    fn demo_with_chain(section: &str) -> String {
        let mut value: serde_json::Value =
            serde_json::from_str(&flipwright::design_file::DesignFile::demo().to_json()).unwrap_or_default();
        value["chain"] = serde_json::from_str(section).unwrap_or_default();
        value.to_string()
    }

    fn plan_of(section: &str) -> ChainPlanView {
        let Outcome::Ok(view) = synthesise_text(&demo_with_chain(section)) else {
            unreachable!("synthesises")
        };
        match view.analysis.chain {
            Some(Outcome::Ok(plan)) => plan,
            _ => unreachable!("the chain is planned"),
        }
    }

    #[test]
    fn a_decade_by_reset_counts_zero_to_nine_and_decodes_1010() {
        // A decade counter counts 0 … 9 and returns to 0; the decade by reset decodes 1010
        // (ten) from the outputs of bits 1 and 3 (standard digital texts, e.g. Floyd,
        // Digital Fundamentals, asynchronous decade counter; from memory).
        let plan = plan_of(r#"{"divide_by": 10, "method": "reset_on_count"}"#);
        assert_eq!(plan.stage_count, 4);
        let states: Vec<u32> = plan.count_table.iter().map(|r| r.state).collect();
        assert_eq!(states, [1, 2, 3, 4, 5, 6, 7, 8, 9, 0]);
        assert_eq!(plan.decoded_stages, [1, 3]);
        assert_eq!(
            plan.count_table.last().and_then(|r| r.correction.clone()).as_deref(),
            Some("reset from 10 (1010)")
        );
        assert!(plan.parts.iter().any(|p| p.designator == "R901"), "reset network in the parts");
    }

    /// Every extra part of a chain carries what the stage's own parts carry: tolerance (for
    /// passives), worst-case stress and what to buy, and it reaches the CSV export.
    #[test]
    fn the_chains_extra_parts_have_tolerance_stress_and_rating() {
        for section in [
            r#"{"divide_by": 10, "method": "reset_on_count"}"#,
            r#"{"divide_by": 10, "method": "skip_feedback"}"#,
        ] {
            let Outcome::Ok(view) = synthesise_text(&demo_with_chain(section)) else {
                unreachable!("synthesises")
            };
            let Some(Outcome::Ok(plan)) = &view.analysis.chain else { unreachable!("planned") };
            assert!(!plan.parts.is_empty(), "{section}: the method adds parts");
            for row in &plan.parts {
                assert!(
                    row.designator.chars().nth(1) == Some('9'),
                    "{}: in the chain's 9xx range",
                    row.designator
                );
                assert!(!row.stress_text.is_empty() && !row.rating_text.is_empty(), "{section}: {row:?}");
                if matches!(row.part.as_str(), "resistor" | "capacitor") {
                    assert!(
                        row.tolerance_text.starts_with('±') && !row.code.is_empty(),
                        "{section}: {row:?}"
                    );
                }
                assert!(
                    view.analysis.table_csv.contains(&format!("{},", row.designator)),
                    "{} in the CSV",
                    row.designator
                );
            }
        }
        // The hold capacitor's rating covers its voltage with the table's derating.
        let plan = plan_of(r#"{"divide_by": 10, "method": "reset_on_count"}"#);
        let hold = plan.parts.iter().find(|r| r.designator == "C901");
        assert!(hold.is_some_and(|r| r.meets && r.tolerance_text.starts_with('±')), "{hold:?}");
        // The network's diodes are the stage's type, held against what the network asks: the
        // demo's 75 V diode passes; the same diode rated for 5 V reverse does not.
        let diode = |plan: &ChainPlanView| plan.parts.iter().find(|r| r.designator == "D901").cloned();
        let fitted = diode(&plan).unwrap_or_else(|| unreachable!("D901 listed"));
        assert!(fitted.meets && fitted.rating_text.contains("the stage's diode has PIV 75 V"), "{fitted:?}");
        let mut file = flipwright::design_file::DesignFile::demo();
        let mut weak = flipwright::device::archetypes::diode("si-signal-diode")
            .unwrap_or_else(|| unreachable!("archetype"));
        weak.piv_v = 5.0;
        file.diode = flipwright::design_file::DeviceChoice::Custom(weak);
        let mut value: serde_json::Value = serde_json::from_str(&file.to_json()).unwrap_or_default();
        value["chain"] = serde_json::json!({"divide_by": 10, "method": "reset_on_count"});
        let Outcome::Ok(view) = synthesise_text(&value.to_string()) else { unreachable!("synthesises") };
        let Some(Outcome::Ok(weak_plan)) = &view.analysis.chain else { unreachable!("planned") };
        let weak_diode = diode(weak_plan).unwrap_or_else(|| unreachable!("D901 listed"));
        assert!(
            !weak_diode.meets,
            "a 5 V diode cannot hold off the reset network's {}",
            weak_diode.stress_text
        );
    }

    #[test]
    fn a_long_count_table_keeps_its_first_and_last_rows() {
        // Divide by 1024 with ten binary stages: pulse k leaves the count k mod 1024 (a ripple
        // counter's natural binary sequence, common practice).
        let plan = plan_of(r#"{"divide_by": 1024}"#);
        assert_eq!((plan.count_rows, plan.count_table.len()), (1024, COUNT_ROWS_SHOWN));
        assert_eq!(plan.count_head_rows, COUNT_ROWS_SHOWN - COUNT_TAIL_ROWS);
        assert_eq!(plan.count_rows_omitted, 1024 - COUNT_ROWS_SHOWN);
        let pulses: Vec<u32> = plan.count_table.iter().map(|r| r.pulse).collect();
        let expected: Vec<u32> = (1..=56).chain(1017..=1024).collect();
        assert_eq!(pulses, expected);
        assert!(plan.count_table.iter().all(|r| r.state == r.pulse % 1024));
        assert_eq!(plan.count_table.last().map(|r| r.bits.as_str()), Some("0000000000"));
        // A short table is whole.
        let decade = plan_of(r#"{"divide_by": 10, "method": "reset_on_count"}"#);
        assert_eq!((decade.count_rows, decade.count_head_rows, decade.count_rows_omitted), (10, 10, 0));
    }

    #[test]
    fn the_logic_diagram_has_a_lane_per_stage_and_one_count_per_pulse() {
        let plan = plan_of(r#"{"divide_by": 12}"#);
        assert_eq!(plan.stage_count, 4);
        let d = &plan.diagram;
        assert_eq!(d.run.traces.len(), 5);
        assert_eq!(d.counts.len(), 12);
        assert_eq!(d.edge_times_s.len(), 13);
        // Stage 4 (bit 3) is high for part of the cycle and low for the rest.
        let top = &d.run.traces[4];
        assert!(top.max_v.contains(&1.0) && top.min_v.contains(&0.0));
        assert!(d.run.traces.iter().all(|t| t.min_v.len() == d.run.buckets));
    }

    /// The logic diagram of a divide-by-60 chain (reset on count: the count sequence 1 … 59, 0
    /// is the definition of a modulo-60 counter) read back from its buckets: the input is one
    /// clean pulse per period, and the stage lanes spell each period's count in binary.
    #[test]
    fn the_logic_diagram_reads_back_as_the_count_sequence_with_clean_input_pulses() {
        let plan = plan_of(r#"{"divide_by": 60, "method": "reset_on_count"}"#);
        let d = &plan.diagram;
        let run = &d.run;
        assert_eq!(run.buckets, 8 * 61, "eight buckets per period, below the bucket cap");
        // Every edge falls on a bucket boundary, so no bucket spans two levels.
        for trace in &run.traces {
            assert!(
                trace.min_v.iter().zip(&trace.max_v).all(|(a, b)| a == b),
                "{}: a bucket spans an edge",
                trace.label
            );
        }
        let input = &run.traces[0].max_v;
        let rising = input.windows(2).filter(|w| w[0] < w[1]).count();
        // High for the half period before every active edge: one rise per edge after the first
        // (the input starts high, half a period before the first edge), then low to the end.
        assert_eq!(rising, 59);
        let (periods, after) = input.split_at(8 * 60);
        assert!(periods.chunks(8).all(|p| p == [1.0, 1.0, 1.0, 1.0, 0.0, 0.0, 0.0, 0.0]), "{periods:?}");
        assert!(after.iter().all(|&v| v == 0.0));
        for (k, count) in d.counts.iter().enumerate() {
            // Middle of the period after edge k (edges at 4, 12, 20, … buckets).
            let middle = 8 + 8 * k;
            let read: u64 = run.traces[1..]
                .iter()
                .enumerate()
                .map(|(bit, t)| u64::from(t.max_v.get(middle).copied().unwrap_or(0.0) == 1.0) << bit)
                .sum();
            assert_eq!(Some(read), *count, "period after pulse {}", k + 1);
            assert_eq!(read, (k as u64 + 1) % 60);
        }
    }

    #[test]
    fn a_single_stage_file_has_no_chain_view() {
        let Outcome::Ok(view) = synthesise_text(&flipwright::design_file::DesignFile::demo().to_json())
        else {
            unreachable!("synthesises")
        };
        assert!(view.analysis.chain.is_none());
    }

    #[test]
    fn the_planned_decades_by_feedback_and_by_reset_verify_with_the_plans_counts() {
        let Outcome::Ok(view) = synthesise_text(&demo_with_chain(r#"{"divide_by": 10}"#)) else {
            unreachable!("synthesises")
        };
        let Outcome::Ok(run) = verify_planned_text(&view.analysis.design_json, None) else {
            unreachable!("the feedback decade verifies")
        };
        assert!(run.check.correct, "{:?}", run.check.observed);
        let observed: Vec<Option<u64>> = run.planned.iter().map(|&s| Some(u64::from(s))).collect();
        assert_eq!(run.check.observed, observed, "simulated counts match the plan's table");
        let Outcome::Ok(view) =
            synthesise_text(&demo_with_chain(r#"{"divide_by": 10, "method": "reset_on_count"}"#))
        else {
            unreachable!("synthesises")
        };
        let Outcome::Ok(run) = verify_planned_text(&view.analysis.design_json, None) else {
            unreachable!("the reset decade verifies")
        };
        assert!(run.check.correct, "{:?}", run.check.observed);
        let observed: Vec<Option<u64>> = run.planned.iter().map(|&s| Some(u64::from(s))).collect();
        assert_eq!(run.check.observed, observed, "simulated counts match the plan's table");
    }
}
