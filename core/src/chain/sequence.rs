//! The count sequence of each method, derived from its rule: the ripple of one input pulse
//! (each 1 → 0 transition passes an edge on, a 0 → 1 transition stops it), then the method's
//! correction (reset on decoding N, or the feedback preset). From the sequence follow the
//! output cycle, each stage's activity, the glitch windows and the start-up behaviour.

use serde::{Deserialize, Serialize};

use super::{ExtraParts, Method, MethodKind, MethodPlan};

/// What corrects a transient state.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum CorrectionKind {
    /// The decoding gate saw N and cleared every stage.
    Reset,
    /// The last stage's 0 → 1 transition set the receiving stages.
    Preset,
}

/// A correction applied after the ripple of one pulse.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct Correction {
    pub kind: CorrectionKind,
    /// Stages whose output the correction changed, lowest first.
    pub changed_stages: Vec<u32>,
}

/// One row of the count-sequence table.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct CountStep {
    /// Input pulse number, 1 for the first pulse after the all-zero state.
    pub pulse: u32,
    pub from_state: u32,
    /// Momentary states while the edge ripples, in order (the first exists one stage delay
    /// after the input edge).
    pub ripple_states: Vec<u32>,
    /// State when the ripple has ended; transient when `correction` is set.
    pub reached_state: u32,
    /// Stage delays the ripple took (stages that changed).
    pub ripple_stage_delays: u32,
    pub correction: Option<Correction>,
    pub settled_state: u32,
    /// The chain output (last stage's Q) once settled.
    pub output_high: bool,
}

/// The chain output over one cycle.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct OutputCycle {
    /// The stage whose Q is the output (the last one).
    pub stage: u32,
    /// Settled counts (input periods) during which the output is high.
    pub high_counts: u32,
    /// `high_counts / N`; transient states are not counted (they last a fraction of a period).
    pub duty_cycle: f64,
    /// Pulse after which the output rises, and after which it falls (the carry).
    pub rises_after_pulse: Option<u32>,
    pub falls_after_pulse: Option<u32>,
}

/// What one stage does over one cycle.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct StageActivity {
    pub stage: u32,
    /// Trigger edges that toggle the stage (input pulses for stage 0).
    pub trigger_edges_per_cycle: u32,
    /// Changes made by the reset or the preset.
    pub corrections_per_cycle: u32,
    /// Falling edges of the previous stage caused by the reset, which the reset must override.
    pub absorbed_edges_per_cycle: u32,
    /// Pulses in which the stage changes twice (a toggle undone by the reset: a runt).
    pub runts_per_cycle: u32,
    /// Fewest input periods between two trigger edges, over the cycle taken as repeating.
    pub min_trigger_spacing_pulses: u32,
    /// Fewest input periods between two pulses in which the stage changes at all.
    pub min_change_spacing_pulses: u32,
}

/// Which kind of momentary state a window holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum GlitchKind {
    /// Between two stage transitions of the ripple.
    Ripple,
    /// The state N, until the reset has cleared it.
    ResetTransient,
    /// The state 2^(n−1), until the preset has set the receiving stages.
    PresetTransient,
}

/// A state that exists only momentarily after an input pulse: a decoder of that state sees a
/// spike there.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct GlitchWindow {
    pub pulse: u32,
    pub state: u32,
    pub kind: GlitchKind,
    /// Start and end after the input edge, in stage propagation delays; no end for the reset
    /// transient, whose length is the reset pulse (see the reset network).
    pub from_stage_delays: u32,
    pub to_stage_delays: Option<u32>,
    /// How many inputs of the reset's decoding gate are high in this state (the gate acts
    /// only when all are).
    pub decoded_inputs_high: u32,
}

/// How the chain behaves from any state it may power up in.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct StartUp {
    /// States outside the count cycle.
    pub unused_states: u32,
    /// False when some state never reaches the cycle (lock-out).
    pub every_state_enters_cycle: bool,
    /// Most input pulses an unused state needs to join the cycle.
    pub most_pulses_to_enter: u32,
}

/// The plan's own check of its sequence.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct SequenceCheck {
    /// Pulses until the all-zero state returns (none within 2^n pulses: the cycle is broken).
    pub cycle_length: Option<u32>,
    pub output_rises_per_cycle: u32,
    pub output_falls_per_cycle: u32,
    /// Resets at a state other than N (a momentary state matching the decode).
    pub false_resets: u32,
    pub passed: bool,
    pub problems: Vec<String>,
}

/// The counting rule of one method.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Rule {
    pub modulus: u32,
    pub stage_count: u32,
    pub kind: MethodKind,
    /// Stages feeding the reset gate (N's 1 bits); zero for the other methods.
    pub decode_mask: u32,
    /// Stages the feedback sets (S's 1 bits); zero for the other methods.
    pub preset_mask: u32,
}

impl Rule {
    /// `stage_count` is ⌈log2 N⌉ from [`super::stage_count`], so it is 1 … 16.
    pub(crate) fn new(modulus: u32, stage_count: u32, kind: MethodKind) -> Rule {
        let states = state_count(stage_count);
        Rule {
            modulus,
            stage_count,
            kind,
            decode_mask: if kind == MethodKind::ResetOnCount { modulus } else { 0 },
            preset_mask: if kind == MethodKind::SkipFeedback { states.saturating_sub(modulus) } else { 0 },
        }
    }

    fn top_stage(&self) -> u32 {
        self.stage_count.saturating_sub(1)
    }

    fn decodes(&self, state: u32) -> bool {
        self.decode_mask != 0 && state & self.decode_mask == self.decode_mask
    }
}

/// 2^n as a count of states (n ≤ 16 here).
fn state_count(stage_count: u32) -> u32 {
    1u32.checked_shl(stage_count).unwrap_or(0)
}

fn bits(mask: u32, stage_count: u32) -> Vec<u32> {
    (0..stage_count).filter(|stage| mask >> stage & 1 == 1).collect()
}

/// Outcome of one input pulse.
struct Pulse {
    reached: u32,
    toggles: u32,
    correction: Option<CorrectionKind>,
    settled: u32,
}

/// Applies one input pulse to `from`; `momentary` sees each ripple state in order.
fn run_pulse(rule: &Rule, from: u32, mut momentary: impl FnMut(u32)) -> Pulse {
    let mut state = from;
    let mut toggles = 0;
    for stage in 0..rule.stage_count {
        let bit = 1u32 << stage;
        toggles += 1;
        if state & bit == 0 {
            state |= bit;
            // A 0 → 1 transition passes no edge on: the ripple ends here.
            if rule.kind == MethodKind::SkipFeedback && stage == rule.top_stage() {
                return Pulse {
                    reached: state,
                    toggles,
                    correction: Some(CorrectionKind::Preset),
                    settled: state | rule.preset_mask,
                };
            }
            break;
        }
        state &= !bit;
        if stage == rule.top_stage() {
            break; // the carry leaves the chain
        }
        // The next stage has not toggled yet: a momentary state, which the gate also sees.
        if rule.decodes(state) {
            return Pulse { reached: state, toggles, correction: Some(CorrectionKind::Reset), settled: 0 };
        }
        momentary(state);
    }
    if rule.decodes(state) {
        return Pulse { reached: state, toggles, correction: Some(CorrectionKind::Reset), settled: 0 };
    }
    Pulse { reached: state, toggles, correction: None, settled: state }
}

fn step(rule: &Rule, pulse: u32, from: u32) -> CountStep {
    let mut ripple_states = Vec::new();
    let outcome = run_pulse(rule, from, |state| ripple_states.push(state));
    let correction = outcome.correction.map(|kind| Correction {
        kind,
        changed_stages: bits(outcome.reached ^ outcome.settled, rule.stage_count),
    });
    CountStep {
        pulse,
        from_state: from,
        ripple_states,
        reached_state: outcome.reached,
        ripple_stage_delays: outcome.toggles,
        correction,
        settled_state: outcome.settled,
        output_high: outcome.settled >> rule.top_stage() & 1 == 1,
    }
}

/// The table of one cycle from the all-zero state; stops at the return to zero or after 2^n
/// pulses, whichever comes first.
pub(crate) fn count_sequence(rule: &Rule) -> Vec<CountStep> {
    let mut steps = Vec::new();
    let mut state = 0;
    for pulse in 1..=state_count(rule.stage_count) {
        let row = step(rule, pulse, state);
        state = row.settled_state;
        steps.push(row);
        if state == 0 {
            break;
        }
    }
    steps
}

fn cyclic_min_spacing(pulses: &[u32], cycle: u32) -> u32 {
    let (Some(first), Some(last)) = (pulses.first(), pulses.last()) else {
        return 0;
    };
    let wrap = cycle.saturating_sub(*last) + first;
    pulses.windows(2).map(|w| w[1].saturating_sub(w[0])).fold(wrap, u32::min)
}

/// Per-stage tallies gathered in one pass over the table.
#[derive(Default)]
struct Tally {
    trigger_pulses: Vec<u32>,
    change_pulses: Vec<u32>,
    corrections: u32,
    absorbed: u32,
    runts: u32,
    changes_this_pulse: u32,
}

fn stage_activity(rule: &Rule, steps: &[CountStep]) -> Vec<StageActivity> {
    let cycle = u32::try_from(steps.len()).unwrap_or(u32::MAX);
    let mut tallies: Vec<Tally> = (0..rule.stage_count).map(|_| Tally::default()).collect();
    for row in steps {
        tallies.iter_mut().for_each(|t| t.changes_this_pulse = 0);
        // Each ripple transition changes exactly one stage: the one whose bit differs.
        let mut previous = row.from_state;
        for state in row.ripple_states.iter().copied().chain([row.reached_state]) {
            if let Some(tally) = tallies.get_mut((previous ^ state).trailing_zeros() as usize) {
                tally.trigger_pulses.push(row.pulse);
                tally.changes_this_pulse += 1;
            }
            previous = state;
        }
        if let Some(correction) = &row.correction {
            for &stage in &correction.changed_stages {
                if let Some(tally) = tallies.get_mut(stage as usize) {
                    tally.corrections += 1;
                    tally.changes_this_pulse += 1;
                }
                // The reset's 1 → 0 edges reach the next stage's trigger input.
                if correction.kind == CorrectionKind::Reset {
                    if let Some(next) = tallies.get_mut(stage as usize + 1) {
                        next.absorbed += 1;
                    }
                }
            }
        }
        for tally in &mut tallies {
            if tally.changes_this_pulse > 1 {
                tally.runts += 1;
            }
            if tally.changes_this_pulse > 0 {
                tally.change_pulses.push(row.pulse);
            }
        }
    }
    (0..rule.stage_count)
        .zip(tallies)
        .map(|(stage, tally)| StageActivity {
            stage,
            trigger_edges_per_cycle: u32::try_from(tally.trigger_pulses.len()).unwrap_or(u32::MAX),
            corrections_per_cycle: tally.corrections,
            absorbed_edges_per_cycle: tally.absorbed,
            runts_per_cycle: tally.runts,
            min_trigger_spacing_pulses: cyclic_min_spacing(&tally.trigger_pulses, cycle),
            min_change_spacing_pulses: cyclic_min_spacing(&tally.change_pulses, cycle),
        })
        .collect()
}

fn glitch_windows(rule: &Rule, steps: &[CountStep]) -> Vec<GlitchWindow> {
    let decoded_high = |state: u32| (state & rule.decode_mask).count_ones();
    let mut windows = Vec::new();
    for row in steps {
        for (index, state) in (1u32..).zip(row.ripple_states.iter().copied()) {
            windows.push(GlitchWindow {
                pulse: row.pulse,
                state,
                kind: GlitchKind::Ripple,
                from_stage_delays: index,
                to_stage_delays: Some(index + 1),
                decoded_inputs_high: decoded_high(state),
            });
        }
        if let Some(correction) = &row.correction {
            let (kind, to) = match correction.kind {
                CorrectionKind::Reset => (GlitchKind::ResetTransient, None),
                // The preset is one more stage transition.
                CorrectionKind::Preset => (GlitchKind::PresetTransient, Some(row.ripple_stage_delays + 1)),
            };
            windows.push(GlitchWindow {
                pulse: row.pulse,
                state: row.reached_state,
                kind,
                from_stage_delays: row.ripple_stage_delays,
                to_stage_delays: to,
                decoded_inputs_high: decoded_high(row.reached_state),
            });
        }
    }
    windows
}

/// Follows every state's successor to the count cycle, each state visited once.
fn start_up(rule: &Rule, steps: &[CountStep]) -> StartUp {
    const UNKNOWN: u32 = u32::MAX;
    const NEVER: u32 = u32::MAX - 1;
    let size = state_count(rule.stage_count) as usize;
    let mut distance = vec![UNKNOWN; size];
    let mut visiting = vec![usize::MAX; size];
    for row in steps {
        if let Some(slot) = distance.get_mut(row.settled_state as usize) {
            *slot = 0;
        }
    }
    let mut path = Vec::new();
    for start in 0..size {
        path.clear();
        let mut current = start;
        let mut known = UNKNOWN;
        // Each pass walks at most every state once.
        for _ in 0..=size {
            match distance.get(current).copied() {
                Some(d) if d != UNKNOWN => {
                    known = d;
                    break;
                }
                Some(_) if visiting.get(current) == Some(&start) => {
                    known = NEVER; // a second cycle: these states never join the count
                    break;
                }
                Some(_) => {}
                None => {
                    known = NEVER;
                    break;
                }
            }
            if let Some(mark) = visiting.get_mut(current) {
                *mark = start;
            }
            path.push(current);
            let state = u32::try_from(current).unwrap_or(0);
            current = run_pulse(rule, state, |_| {}).settled as usize;
        }
        for (offset, state) in (1u32..).zip(path.iter().rev()) {
            let value = if known >= NEVER { NEVER } else { known.saturating_add(offset) };
            if let Some(slot) = distance.get_mut(*state) {
                *slot = value;
            }
        }
    }
    let unused = distance.iter().filter(|d| **d != 0).count();
    StartUp {
        unused_states: u32::try_from(unused).unwrap_or(u32::MAX),
        every_state_enters_cycle: distance.iter().all(|d| *d < NEVER),
        most_pulses_to_enter: distance.iter().copied().filter(|d| *d < NEVER).max().unwrap_or(0),
    }
}

fn check(rule: &Rule, steps: &[CountStep]) -> SequenceCheck {
    let returned = steps.last().is_some_and(|row| row.settled_state == 0);
    let cycle_length = if returned { u32::try_from(steps.len()).ok() } else { None };
    let top = rule.top_stage();
    let (mut rises, mut falls) = (0, 0);
    let mut previous = false;
    let mut count_edge = |state: u32| {
        let high = state >> top & 1 == 1;
        match (previous, high) {
            (false, true) => rises += 1,
            (true, false) => falls += 1,
            _ => {}
        }
        previous = high;
    };
    for row in steps {
        count_edge(row.from_state);
        row.ripple_states.iter().for_each(|state| count_edge(*state));
        count_edge(row.reached_state);
        count_edge(row.settled_state);
    }
    let false_resets = steps
        .iter()
        .filter(|row| {
            row.correction.as_ref().is_some_and(|c| c.kind == CorrectionKind::Reset)
                && row.reached_state != rule.modulus
        })
        .count();
    let false_resets = u32::try_from(false_resets).unwrap_or(u32::MAX);
    let mut problems = Vec::new();
    if cycle_length != Some(rule.modulus) {
        problems.push(format!(
            "the chain returns to zero after {} pulses instead of {}",
            cycle_length.map_or_else(|| "no number of".to_string(), |c| c.to_string()),
            rule.modulus
        ));
    }
    if rises != 1 || falls != 1 {
        problems
            .push(format!("the output rises {rises} and falls {falls} times per cycle instead of once each"));
    }
    if false_resets > 0 {
        problems.push(format!("{false_resets} resets at a momentary state other than N"));
    }
    SequenceCheck {
        cycle_length,
        output_rises_per_cycle: rises,
        output_falls_per_cycle: falls,
        false_resets,
        passed: problems.is_empty(),
        problems,
    }
}

fn output_cycle(rule: &Rule, steps: &[CountStep]) -> OutputCycle {
    let high_counts = u32::try_from(steps.iter().filter(|row| row.output_high).count()).unwrap_or(u32::MAX);
    let mut rises_after_pulse = None;
    let mut falls_after_pulse = None;
    let mut previous = false;
    for row in steps {
        if row.output_high && !previous {
            rises_after_pulse = Some(row.pulse);
        }
        if !row.output_high && previous {
            falls_after_pulse = Some(row.pulse);
        }
        previous = row.output_high;
    }
    OutputCycle {
        stage: rule.top_stage(),
        high_counts,
        duty_cycle: f64::from(high_counts) / f64::from(rule.modulus.max(1)),
        rises_after_pulse,
        falls_after_pulse,
    }
}

fn extra_parts(rule: &Rule) -> ExtraParts {
    let n = rule.stage_count;
    match rule.kind {
        MethodKind::PlainBinary => ExtraParts {
            diodes: 0,
            resistors: 0,
            capacitors: 0,
            transistors: 0,
            description: vec!["none: the ripple chain alone divides by N".to_string()],
        },
        MethodKind::ResetOnCount => {
            let decoded = rule.decode_mask.count_ones();
            ExtraParts {
                diodes: decoded + 1 + n,
                resistors: 4 + n,
                capacitors: 1,
                transistors: 1,
                description: vec![
                    format!("{decoded} decoding diodes and the gate's pull-up resistor"),
                    "a hold diode and hold capacitor that stretch the reset".to_string(),
                    "a reset driver transistor (emitter follower) with its base divider (two resistors) and emitter resistor".to_string(),
                    format!("{n} reset diodes with series resistors, one into each stage's Q2 base"),
                ],
            }
        }
        MethodKind::SkipFeedback => {
            let receivers = rule.preset_mask.count_ones();
            ExtraParts {
                diodes: receivers,
                resistors: receivers,
                capacitors: receivers,
                transistors: 0,
                description: vec![format!(
                    "{receivers} preset inputs (a capacitor and a steering diode into the Q2 base, with a bias resistor to ground, each of the stage's Ct and Rt values) fed from the last stage's complement output"
                )],
            }
        }
    }
}

/// Works out one method for a modulus and its stage count.
pub(crate) fn plan_method(modulus: u32, stage_count: u32, kind: MethodKind) -> MethodPlan {
    let rule = Rule::new(modulus, stage_count, kind);
    let steps = count_sequence(&rule);
    let method = match kind {
        MethodKind::PlainBinary => Method::PlainBinary,
        MethodKind::ResetOnCount => {
            Method::ResetOnCount { decoded_stages: bits(rule.decode_mask, stage_count) }
        }
        MethodKind::SkipFeedback => Method::SkipFeedback {
            source_stage: rule.top_stage(),
            receiving_stages: bits(rule.preset_mask, stage_count),
            skipped_states: rule.preset_mask,
        },
    };
    MethodPlan {
        method,
        output: output_cycle(&rule, &steps),
        stages: stage_activity(&rule, &steps),
        glitch_windows: glitch_windows(&rule, &steps),
        longest_ripple_stage_delays: steps.iter().map(|row| row.ripple_stage_delays).max().unwrap_or(0),
        parts: extra_parts(&rule),
        start_up: start_up(&rule, &steps),
        check: check(&rule, &steps),
        count_sequence: steps,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn settled(modulus: u32, stages: u32, kind: MethodKind) -> Vec<u32> {
        count_sequence(&Rule::new(modulus, stages, kind)).iter().map(|row| row.settled_state).collect()
    }

    #[test]
    fn decade_sequences() {
        assert_eq!(settled(10, 4, MethodKind::ResetOnCount), [1, 2, 3, 4, 5, 6, 7, 8, 9, 0]);
        assert_eq!(settled(10, 4, MethodKind::SkipFeedback), [1, 2, 3, 4, 5, 6, 7, 14, 15, 0]);
    }

    #[test]
    fn ripple_from_seven_passes_six_four_and_zero() {
        // 0111 → 0110 → 0100 → 0000 → 1000: each 1 → 0 passes the edge on.
        let row = step(&Rule::new(16, 4, MethodKind::PlainBinary), 8, 7);
        assert_eq!(row.ripple_states, [6, 4, 0]);
        assert_eq!((row.reached_state, row.ripple_stage_delays), (8, 4));
    }

    #[test]
    fn cyclic_spacing_wraps_round_the_cycle() {
        assert_eq!(cyclic_min_spacing(&[2, 4, 6, 8, 10], 10), 2);
        assert_eq!(cyclic_min_spacing(&[8, 10], 10), 2);
        assert_eq!(cyclic_min_spacing(&[8], 10), 10);
        assert_eq!(cyclic_min_spacing(&[], 10), 0);
    }

    #[test]
    fn unused_decade_states_join_the_count() {
        for kind in [MethodKind::ResetOnCount, MethodKind::SkipFeedback] {
            let plan = plan_method(10, 4, kind);
            assert_eq!(plan.start_up.unused_states, 6);
            assert!(plan.start_up.every_state_enters_cycle, "{kind:?}");
        }
    }
}
