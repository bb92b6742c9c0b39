//! Chain timing from per-stage times: each stage's input rate, the accumulated ripple delay,
//! the settling-limited maximum input rate f(max) = 1/(n·tpd) of a ripple chain (standard
//! digital texts, e.g. Floyd, *Digital Fundamentals*), and the longer settling of a pulse that
//! ends in a correction.

use serde::{Deserialize, Serialize};

use super::reset::ResetNetwork;
use super::{check_range, ChainError, CorrectionKind, MethodPlan};
use crate::stage::analysis::StageReport;
use crate::stage::switching::SwitchingEstimate;

/// Times of one stage that the chain is built from, taken as inputs (from the stage's
/// switching estimate, a measurement, or a datasheet).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct StageTiming {
    /// Trigger edge to a settled output, s.
    pub propagation_delay_s: f64,
    /// Reset drive applied to the stage's Q falling past the decoding gate's threshold: the
    /// turn-on delay and rise of the Q2 the reset turns on, s.
    pub reset_output_fall_s: f64,
    /// Reset drive applied to the stage latched in 0: Q2's turn-on, then Q1's storage and fall,
    /// s. The reset must hold this long.
    pub reset_clear_s: f64,
    /// How long an edge keeps acting on the next stage's trigger input, s; a reset that lets
    /// go earlier lets that stage toggle on the edge its neighbour's clearing sent.
    pub trigger_pulse_s: f64,
    /// Fractional spread of every time above between stages (0.2 = ±20 %).
    pub spread: f64,
    /// The fastest the stage itself can toggle, Hz, when known: a stage whose trigger edges
    /// come k input periods apart at best limits the input rate to k times this, whatever
    /// the settling allows. Taken as given (no spread applied): pass the slow corner's.
    #[serde(default)]
    pub max_toggle_rate_hz: Option<f64>,
}

impl StageTiming {
    /// From the stage's charge-control estimate (`stage::switching::estimate`). The trigger
    /// pulse is taken as the time the trigger's exponential decay (time constant Rt·Ct) stays
    /// above the estimated minimum amplitude: Rt·Ct·ln(available/minimum). The reset times use
    /// the stage's own base drive; a reset drives Q2 harder, so its output falls sooner and the
    /// race is tighter than these figures say: measure it in the transient simulation.
    pub fn from_switching(estimate: &SwitchingEstimate, spread: f64) -> StageTiming {
        let rise = estimate.rise_s.unwrap_or(estimate.transition_s);
        let trigger_time_constant = estimate.trigger_recovery_s / 5.0;
        let trigger_pulse_s = match estimate.min_trigger_amplitude_v {
            Some(minimum) if minimum > 0.0 && estimate.available_trigger_amplitude_v > minimum => {
                trigger_time_constant * (estimate.available_trigger_amplitude_v / minimum).ln()
            }
            _ => 0.0,
        };
        StageTiming {
            propagation_delay_s: estimate.transition_s,
            reset_output_fall_s: estimate.delay_s + rise,
            reset_clear_s: estimate
                .switching_time_s
                .unwrap_or(estimate.delay_s + rise + estimate.storage_s + estimate.fall_s),
            trigger_pulse_s,
            spread,
            max_toggle_rate_hz: Some(estimate.max_toggle_rate_hz),
        }
    }

    /// [`StageTiming::from_switching`] of an analysed stage, with the toggle rate of its slow
    /// corner (what the per-stage rates are compared with) as the toggle limit.
    pub fn from_report(report: &StageReport, spread: f64) -> StageTiming {
        StageTiming {
            max_toggle_rate_hz: Some(report.worst_max_toggle_rate_hz),
            ..StageTiming::from_switching(&report.switching, spread)
        }
    }

    pub fn validate(&self) -> Result<(), ChainError> {
        check_range("timing.propagation_delay_s", self.propagation_delay_s, 1e-15, 1.0, "a time in seconds")?;
        check_range("timing.reset_output_fall_s", self.reset_output_fall_s, 0.0, 1.0, "a time in seconds")?;
        check_range("timing.reset_clear_s", self.reset_clear_s, 0.0, 1.0, "a time in seconds")?;
        check_range("timing.trigger_pulse_s", self.trigger_pulse_s, 0.0, 1.0, "a time in seconds")?;
        check_range("timing.spread", self.spread, 0.0, 0.9, "a fraction (0.2 = ±20 %)")?;
        match self.max_toggle_rate_hz {
            Some(rate) => check_range("timing.max_toggle_rate_hz", rate, 1e-6, 1e12, "a rate in hertz"),
            None => Ok(()),
        }
    }

    /// The slowest stage's value of a time.
    pub fn slowest(&self, time_s: f64) -> f64 {
        time_s * (1.0 + self.spread)
    }

    /// The fastest stage's value of a time.
    pub fn fastest(&self, time_s: f64) -> f64 {
        time_s * (1.0 - self.spread)
    }
}

/// Accumulated ripple delay through `stage_count` stages: n·tpd, s.
pub fn ripple_delay_s(stage_count: u32, propagation_delay_s: f64) -> f64 {
    f64::from(stage_count) * propagation_delay_s
}

/// Settling-limited maximum input rate of a ripple chain, f(max) = 1/(n·tpd): every output
/// valid within one input period (needed when the outputs are decoded).
pub fn ripple_max_input_rate_hz(stage_count: u32, propagation_delay_s: f64) -> f64 {
    let delay = ripple_delay_s(stage_count, propagation_delay_s);
    if delay > 0.0 {
        1.0 / delay
    } else {
        f64::INFINITY
    }
}

/// The rates one stage sees at a given chain input rate.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct StageRate {
    pub stage: u32,
    /// Trigger edges per second, averaged over the cycle.
    pub average_trigger_rate_hz: f64,
    /// The rate its trigger edges come at when closest together: the toggle rate the stage
    /// itself must reach (compare with its maximum toggle rate).
    pub required_toggle_rate_hz: f64,
}

/// Timing of one planned method at one input rate.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ChainTiming {
    pub input_rate_hz: f64,
    /// Propagation delay of the slowest stage, s.
    pub propagation_delay_s: f64,
    /// n·tpd, s.
    pub ripple_delay_s: f64,
    /// 1/(n·tpd), Hz.
    pub settling_max_input_rate_hz: f64,
    /// Time the correction takes after the ripple that ends in it: one stage delay for the
    /// preset, the reset cycle for the reset (none without a correction or a reset network).
    pub correction_s: Option<f64>,
    /// Longest time from an input edge to a settled count, s.
    pub worst_settling_s: f64,
    /// The input rate at which the busiest stage reaches the stage's own maximum toggle rate
    /// (its maximum toggle rate times the fewest input periods between its trigger edges),
    /// Hz; `None` when the stage's toggle rate was not given.
    pub toggle_max_input_rate_hz: Option<f64>,
    /// The highest input rate the chain takes: the lower of 1/worst settling (the chain and
    /// its correction settle within one period) and the toggle limit above, Hz.
    pub max_input_rate_hz: f64,
    /// What sets `max_input_rate_hz`, in words.
    pub limited_by: String,
    pub meets_input_rate: bool,
    pub stages: Vec<StageRate>,
    pub notes: Vec<String>,
}

/// Times a planned method at `input_rate_hz`; a reset plan needs its reset network to time
/// the correction (without one, only the ripple is timed and a note says so).
pub fn chain_timing(
    plan: &MethodPlan,
    timing: &StageTiming,
    input_rate_hz: f64,
    reset: Option<&ResetNetwork>,
) -> Result<ChainTiming, ChainError> {
    chain_timing_with_reset_cycle(plan, timing, input_rate_hz, reset.map(|r| r.timeline.reset_cycle_s))
}

/// [`chain_timing`] with the reset cycle given directly (from either reset network, passive
/// or driven: `timeline.reset_cycle_s`).
pub fn chain_timing_with_reset_cycle(
    plan: &MethodPlan,
    timing: &StageTiming,
    input_rate_hz: f64,
    reset_cycle_s: Option<f64>,
) -> Result<ChainTiming, ChainError> {
    timing.validate()?;
    check_range("input_rate_hz", input_rate_hz, 1e-6, 1e12, "a rate in hertz")?;
    let stage_count = u32::try_from(plan.stages.len()).unwrap_or(u32::MAX);
    let modulus = f64::from(u32::try_from(plan.count_sequence.len()).unwrap_or(u32::MAX).max(1));
    let tpd = timing.slowest(timing.propagation_delay_s);
    let ripple = ripple_delay_s(stage_count, tpd);
    let mut notes = vec![
        "the slowest stage's delay is used for every stage (the spread's upper end)".to_string(),
        "settling-limited: all outputs valid within one input period; the first stage alone could run faster when nothing decodes the outputs".to_string(),
    ];
    let mut worst_settling_s = ripple;
    let mut correction_s = None;
    for row in &plan.count_sequence {
        let Some(correction) = &row.correction else { continue };
        let ripple_part = f64::from(row.ripple_stage_delays) * tpd;
        let time = match correction.kind {
            CorrectionKind::Preset => Some(tpd),
            CorrectionKind::Reset => match reset_cycle_s {
                Some(cycle_s) => Some(cycle_s),
                None => {
                    notes.push("the reset is not timed: design the reset network for its cycle".to_string());
                    None
                }
            },
        };
        if let Some(time) = time {
            correction_s = Some(time);
            worst_settling_s = worst_settling_s.max(ripple_part + time);
        }
    }
    let settled_rate_hz = if worst_settling_s > 0.0 { 1.0 / worst_settling_s } else { f64::INFINITY };
    // The busiest stage: the one whose trigger edges come closest together.
    // The busiest stage: the one whose trigger edges come closest together (a stage with
    // none has spacing 0 and sets no limit).
    let busiest = plan
        .stages
        .iter()
        .filter(|activity| activity.min_trigger_spacing_pulses > 0)
        .min_by_key(|activity| activity.min_trigger_spacing_pulses);
    let toggle_limit = timing
        .max_toggle_rate_hz
        .zip(busiest)
        .map(|(rate, activity)| (rate * f64::from(activity.min_trigger_spacing_pulses), activity));
    let (max_input_rate_hz, limited_by) = match toggle_limit {
        Some((rate, activity)) if rate < settled_rate_hz => (
            rate,
            format!(
                "the stage's own maximum toggle rate: stage {} sees a trigger edge every {} input period(s) at the closest",
                activity.stage + 1,
                activity.min_trigger_spacing_pulses
            ),
        ),
        _ => (settled_rate_hz, "the settling of the count: every output valid within one input period".to_string()),
    };
    let stages = plan
        .stages
        .iter()
        .map(|activity| StageRate {
            stage: activity.stage,
            average_trigger_rate_hz: input_rate_hz * f64::from(activity.trigger_edges_per_cycle) / modulus,
            required_toggle_rate_hz: input_rate_hz / f64::from(activity.min_trigger_spacing_pulses.max(1)),
        })
        .collect();
    Ok(ChainTiming {
        input_rate_hz,
        propagation_delay_s: tpd,
        ripple_delay_s: ripple,
        settling_max_input_rate_hz: ripple_max_input_rate_hz(stage_count, tpd),
        correction_s,
        worst_settling_s,
        toggle_max_input_rate_hz: toggle_limit.map(|(rate, _)| rate),
        max_input_rate_hz,
        limited_by,
        meets_input_rate: input_rate_hz <= max_input_rate_hz,
        stages,
        notes,
    })
}
