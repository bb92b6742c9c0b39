//! Switching times measured on a stage's nominal run, to set beside the charge-control
//! estimates: delay from the input edge to the output's change, storage time, 10–90 % edges
//! of the collectors, and the output's period and duty cycle.

use serde::Serialize;

use super::build::BuiltCircuit;
use crate::transient::measure::{
    delay, fall_time_90_10, period_and_duty, rise_time_10_90, state_levels, Edge,
};
use crate::transient::TransientResult;

/// Times measured on the first two edges of a stage's run on its output Q, Q2's collector
/// (edge 0 turns Q2 off, edge 1 turns it back on); `None` where the waveform does not show
/// the event.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct MeasuredTimings {
    /// Q's levels (low, high) by the histogram method, V (NPN frame).
    pub output_levels_v: (f64, f64),
    /// Input edge at half amplitude to Q at half swing, rising, s.
    pub toggle_delay_s: Option<f64>,
    /// Input edge at half amplitude to the 10 % point of the ON collector's rise: the time
    /// the stored charge holds the transistor saturated, with the turn-off delay, s.
    pub storage_s: Option<f64>,
    /// 10–90 % rise of Q as Q2 turns off, s.
    pub collector_rise_s: Option<f64>,
    /// 90–10 % fall of Q as Q2 turns on again, s.
    pub collector_fall_s: Option<f64>,
    /// Output period and duty cycle over the whole run after the first edge.
    pub output_period_s: Option<f64>,
    pub output_duty: Option<f64>,
}

/// Measures the stage at index `stage` of a built circuit's run.
pub fn measure_timings(
    built: &BuiltCircuit,
    result: &TransientResult,
    stage: usize,
) -> Option<MeasuredTimings> {
    let nodes = built.stages.get(stage)?;
    let times = &result.time_s;
    let q = result.voltage(&nodes.collectors[1])?;
    let input = result.voltage(&nodes.input)?;
    let (low, high) = state_levels(times, q).ok()?;
    let span = high - low;
    let first_edge = built.pulse.first_edge_s() - 0.5 * built.pulse.effective_edge_s();
    let second_edge = built.pulse.edge_time_s(1) - 0.5 * built.pulse.effective_edge_s();
    // The driving node's own levels: the pulse source, or a previous stage's collector.
    let (in_low, in_high) = state_levels(times, input).ok()?;
    let in_middle = 0.5 * (in_low + in_high);
    let toggle_delay_s =
        delay(times, input, in_middle, Edge::Falling, q, low + 0.5 * span, Edge::Rising, first_edge).ok();
    let storage_s =
        delay(times, input, in_middle, Edge::Falling, q, low + 0.1 * span, Edge::Rising, first_edge).ok();
    let collector_rise_s = rise_time_10_90(times, q, low, high, first_edge).ok();
    let collector_fall_s = fall_time_90_10(times, q, low, high, second_edge).ok();
    let (output_period_s, output_duty) =
        match period_and_duty(times, q, low + 0.1 * span, low + 0.9 * span, first_edge) {
            Ok((period, duty)) => (Some(period), Some(duty)),
            Err(_) => (None, None),
        };
    Some(MeasuredTimings {
        output_levels_v: (low, high),
        toggle_delay_s,
        storage_s,
        collector_rise_s,
        collector_fall_s,
        output_period_s,
        output_duty,
    })
}
