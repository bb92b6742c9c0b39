//! `flipwright chain N [DESIGN]`: the plan of a divide-by-N chain — stages, methods, count
//! sequence, duty cycle, glitch windows — and, with a design, its timing, per-stage toggle
//! rates and the reset network (with its driver transistor) with its race and parts.

use std::fmt::Write;

use serde::Serialize;

use flipwright::chain::reset::{design_reset_for_stage, ResetNetwork};
use flipwright::chain::reset_driver::{design_reset_driver_for_stage, DrivenResetNetwork};
use flipwright::chain::timing::{chain_timing_with_reset_cycle, ChainTiming, StageTiming};
use flipwright::chain::{plan_chain, ChainPlan, ChainRequest, MethodKind, MethodPlan, Recommendation};
use flipwright::stage::analysis::analyse;
use flipwright::units::{format_quantity, Unit};

use crate::{load_design, parse_options, usage, Failure};

/// Spread of stage times taken for the chain timing (our choice, stated in the output).
const TIMING_SPREAD: f64 = 0.3;
/// Rows of the count sequence printed before "…".
const ROWS_SHOWN: usize = 40;

#[derive(Serialize)]
struct ChainView {
    plan: ChainPlan,
    timing: Vec<(MethodKind, ChainTiming)>,
    /// The reset with its driver transistor: the one built and simulated.
    reset: Option<DrivenResetNetwork>,
    /// The driven reset's parts as component-table rows (with the design's tolerances).
    reset_table: Vec<flipwright::table::ComponentRow>,
    /// The passive diode gate alone, for comparison (why the driver is there).
    passive_reset: Option<ResetNetwork>,
    recommendation: Recommendation,
    stage_max_toggle_rate_hz: Option<f64>,
}

pub fn run(args: &[String]) -> Result<u8, Failure> {
    let options = parse_options(args, &[], &["json", "natural-binary"])?;
    let (modulus, design_path) = match options.positional.as_slice() {
        [n] => (n, None),
        [n, design] => (n, Some(design)),
        _ => return Err(usage("`chain` takes a division ratio N and optionally a design file")),
    };
    let modulus: u32 = modulus.parse().map_err(|_| {
        usage(format!("the division ratio must be a whole number from 2 to 65536, got \"{modulus}\""))
    })?;
    let request = ChainRequest { modulus, natural_binary_code: options.has("natural-binary") };
    let plan = plan_chain(&request).map_err(|e| usage(e.to_string()))?;
    let mut view = ChainView {
        recommendation: plan.recommendation.clone(),
        plan,
        timing: Vec::new(),
        reset: None,
        reset_table: Vec::new(),
        passive_reset: None,
        stage_max_toggle_rate_hz: None,
    };
    if let Some(path) = design_path {
        let (_, design) = load_design(std::path::Path::new(path))?;
        let report = analyse(&design).map_err(|e| Failure { code: 1, message: e.to_string() })?;
        let timing = StageTiming::from_report(&report, TIMING_SPREAD);
        let rate = design.input().requirements.toggle_rate_hz;
        view.stage_max_toggle_rate_hz = Some(report.worst_max_toggle_rate_hz);
        if view.plan.method(MethodKind::ResetOnCount).is_some() {
            view.passive_reset = design_reset_for_stage(&view.plan, &design, &timing).ok();
            match design_reset_driver_for_stage(&view.plan, &design, &timing) {
                Ok(network) => {
                    view.recommendation = view.plan.recommend_with_driven_reset(&network);
                    let conditions = &design.input().conditions;
                    view.reset_table = flipwright::table::reset_network_table(
                        &network,
                        conditions.resistor_tolerance,
                        conditions.capacitor_tolerance,
                    );
                    view.reset = Some(network);
                }
                Err(e) => view.recommendation.reasons.push(format!("the reset cannot be built: {e}")),
            }
        }
        for method in &view.plan.methods {
            let kind = method.method.kind();
            let reset_cycle = if kind == MethodKind::ResetOnCount {
                view.reset.as_ref().map(|r| r.timeline.reset_cycle_s)
            } else {
                None
            };
            if let Ok(t) = chain_timing_with_reset_cycle(method, &timing, rate, reset_cycle) {
                view.timing.push((kind, t));
            }
        }
    }
    if options.has("json") {
        let text = serde_json::to_string_pretty(&view).map_err(|e| usage(e.to_string()))?;
        println!("{text}");
    } else {
        print!("{}", render(&view));
    }
    Ok(0)
}

fn binary(state: u32, stages: u32) -> String {
    (0..stages).rev().map(|bit| if state >> bit & 1 == 1 { '1' } else { '0' }).collect()
}

fn render_method(out: &mut String, plan: &MethodPlan, stages: u32) {
    let _ = writeln!(out, "\n== {} ==", plan.method.kind().name());
    for line in &plan.parts.description {
        let _ = writeln!(out, "  adds: {line}");
    }
    let _ = writeln!(
        out,
        "  output (stage {} Q): high for {} of every {} input periods, duty cycle {:.1} %",
        plan.output.stage + 1,
        plan.output.high_counts,
        plan.count_sequence.len(),
        100.0 * plan.output.duty_cycle
    );
    let _ = writeln!(
        out,
        "  start-up: {} unused state(s), {}",
        plan.start_up.unused_states,
        if plan.start_up.every_state_enters_cycle {
            format!("every one joins the cycle within {} pulse(s)", plan.start_up.most_pulses_to_enter)
        } else {
            "SOME NEVER JOIN THE CYCLE (lock-out)".to_string()
        }
    );
    let _ = writeln!(out, "  momentary (glitch) states a decoder would see: {}", plan.glitch_windows.len());
    let _ = writeln!(out, "  pulse  settled   (stage {stages} … 1)   correction");
    for row in plan.count_sequence.iter().take(ROWS_SHOWN) {
        let correction = match &row.correction {
            Some(c) => format!(
                "{} from {} ({})",
                match c.kind {
                    flipwright::chain::sequence::CorrectionKind::Reset => "reset",
                    flipwright::chain::sequence::CorrectionKind::Preset => "preset",
                },
                row.reached_state,
                binary(row.reached_state, stages)
            ),
            None => String::new(),
        };
        let _ = writeln!(
            out,
            "  {:>5}  {:>7}   {:>14}   {correction}",
            row.pulse,
            row.settled_state,
            binary(row.settled_state, stages)
        );
    }
    if plan.count_sequence.len() > ROWS_SHOWN {
        let _ = writeln!(out, "  … {} more rows (--json for all)", plan.count_sequence.len() - ROWS_SHOWN);
    }
}

fn render(view: &ChainView) -> String {
    let mut out = String::new();
    let plan = &view.plan;
    let _ = writeln!(
        out,
        "Divide by {}: {} binary stages (⌈log2 {}⌉ = {}).",
        plan.modulus, plan.stage_count, plan.modulus, plan.stage_count
    );
    for method in &plan.methods {
        render_method(&mut out, method, plan.stage_count);
        if let Some((_, t)) = view.timing.iter().find(|(k, _)| *k == method.method.kind()) {
            let _ = writeln!(
                out,
                "  timing at {}: ripple n·tpd = {} (tpd {} with +{:.0} % spread), settling-limited f(max) = 1/(n·tpd) = {}; max input rate {} → {} (limited by {})",
                format_quantity(t.input_rate_hz, Unit::Hertz),
                format_quantity(t.ripple_delay_s, Unit::Second),
                format_quantity(t.propagation_delay_s, Unit::Second),
                TIMING_SPREAD * 100.0,
                format_quantity(t.settling_max_input_rate_hz, Unit::Hertz),
                format_quantity(t.max_input_rate_hz, Unit::Hertz),
                if t.meets_input_rate { "meets the input rate" } else { "TOO SLOW for the input rate" },
                t.limited_by
            );
            for stage in &t.stages {
                let limit = view.stage_max_toggle_rate_hz.unwrap_or(f64::INFINITY);
                let _ = writeln!(
                    out,
                    "    stage {}: average {}, must toggle at {}{}",
                    stage.stage + 1,
                    format_quantity(stage.average_trigger_rate_hz, Unit::Hertz),
                    format_quantity(stage.required_toggle_rate_hz, Unit::Hertz),
                    if stage.required_toggle_rate_hz > limit {
                        "  ABOVE the stage's estimated maximum"
                    } else {
                        ""
                    }
                );
            }
        }
        if method.method.kind() == MethodKind::ResetOnCount {
            if let Some(reset) = &view.reset {
                let _ = writeln!(
                    out,
                    "  reset network (driver transistor): {}; reset pulse {} (closed form); race {} ({})",
                    crate::report::reset_values(&reset.values),
                    format_quantity(reset.pulse_width_s, Unit::Second),
                    if reset.race.won { "won" } else { "LOST" },
                    reset.race.condition
                );
                let _ = writeln!(
                    out,
                    "    gate load: a decoded ON collector sinks {} at rest ({:.0} % of its collector current); driver {} at assertion",
                    format_quantity(reset.gate_sink_current_a, Unit::Ampere),
                    100.0 * reset.gate_sink_share,
                    format_quantity(reset.driver_current_a, Unit::Ampere)
                );
                for problem in &reset.problems {
                    let _ = writeln!(out, "    problem: {problem}");
                }
                for row in &view.reset_table {
                    let _ = writeln!(
                        out,
                        "    {:<5} {:<52} {:>8} {:>7}  stress {:<18} buy {}",
                        row.designator,
                        row.function,
                        row.value_text,
                        row.tolerance_text,
                        row.stress_text,
                        row.rating_text
                    );
                }
                if let Some(passive) = view.passive_reset.as_ref().filter(|p| !p.passes) {
                    let _ = writeln!(
                        out,
                        "  (the passive gate alone would fail: {})",
                        passive.problems.first().map_or("", String::as_str)
                    );
                }
            }
        }
    }
    let _ = writeln!(out, "\nRecommended: {}", view.recommendation.method.name());
    for reason in &view.recommendation.reasons {
        let _ = writeln!(out, "  - {reason}");
    }
    if view.timing.is_empty() {
        let _ = writeln!(out, "\nGive a design file (flipwright chain N DESIGN) for timing, per-stage rates and the reset network.");
    }
    let _ = writeln!(
        out,
        "Verify by simulation: flipwright simulate DESIGN --divide {} [--method feedback|reset] [--corners all].",
        plan.modulus
    );
    out
}
