//! Checks of the chain planner: stage counts, the decade by reset and by feedback, the
//! ripple-chain f(max), every count sequence against an independent event-level simulation of
//! toggle flip-flops, the reset timeline against a numerical integration of its hold node, the
//! chain loads in the stage analysis, and no panic on any input.

use std::collections::VecDeque;

use flipwright::chain::loads::{chain_stage_loads, combine_loads, stage_design_with_loads};
use flipwright::chain::reset::{
    design_reset_for_stage, design_reset_network, evaluate_reset_network, ResetDevices, ResetNetwork,
    ResetStage, ResetValues, RESET_SINK_SHARE_MAX,
};
use flipwright::chain::reset_driver::{
    design_reset_driver, design_reset_driver_for_stage, evaluate_reset_driver, DrivenResetNetwork,
    DriverValues,
};
use flipwright::chain::timing::{chain_timing, ripple_delay_s, ripple_max_input_rate_hz, StageTiming};
use flipwright::chain::{
    plan_chain, stage_count, ChainError, ChainPlan, ChainRequest, CorrectionKind, Method, MethodKind,
    MethodPlan, MAX_MODULUS,
};
use flipwright::stage::analysis::analyse;
use flipwright::stage::margins::evaluate_corner;
use flipwright::stage::network::Corner;
use flipwright::stage::switching::{estimate, PassiveScale};
use flipwright::stage::{BiasScheme, Load, StageDesign, StageValues, Supplies};
use flipwright::units::ESeries;
use proptest::prelude::*;

use crate::design_file::demo_with_values;

fn plan(modulus: u32) -> ChainPlan {
    plan_chain(&ChainRequest { modulus, natural_binary_code: false })
        .unwrap_or_else(|e| panic!("N = {modulus}: {e}"))
}

fn method(plan: &ChainPlan, kind: MethodKind) -> &MethodPlan {
    plan.method(kind).unwrap_or_else(|| panic!("N = {}: no {kind:?} plan", plan.modulus))
}

fn settled_states(plan: &MethodPlan) -> Vec<u32> {
    plan.count_sequence.iter().map(|row| row.settled_state).collect()
}

fn demo_design() -> StageDesign {
    let file = demo_with_values();
    StageDesign::new(file.stage_input(None).expect("the demo has values")).expect("the demo is valid")
}

fn demo_timing(design: &StageDesign) -> StageTiming {
    let (_, states) = evaluate_corner(design, &Corner::nominal(design, 25.0)).expect("the demo solves");
    StageTiming::from_switching(&estimate(design, &states[1], PassiveScale::NOMINAL), 0.2)
}

// ---------------------------------------------------------------------------------------------
// Stage counts and the textbook decades.
// ---------------------------------------------------------------------------------------------

#[test]
fn stage_count_is_the_ceiling_of_log2_n() {
    // n binaries have 2^n states, so N needs the smallest n with 2^n ≥ N (definition of the
    // binary counter; common practice). Stated cases, then every N up to 4096 against the
    // bracket 2^(n−1) < N ≤ 2^n.
    for (modulus, stages) in
        [(2, 1), (3, 2), (4, 2), (5, 3), (6, 3), (10, 4), (12, 4), (16, 4), (17, 5), (60, 6), (100, 7)]
    {
        assert_eq!(stage_count(modulus), Ok(stages), "N = {modulus}");
    }
    for (modulus, stages) in [(1000, 10), (1024, 10), (1025, 11), (4095, 12), (4096, 12)] {
        assert_eq!(stage_count(modulus), Ok(stages), "N = {modulus}");
    }
    for modulus in 2..=4096u32 {
        let n = stage_count(modulus).expect("in range");
        assert!(
            1u64 << (n - 1) < u64::from(modulus) && u64::from(modulus) <= 1u64 << n,
            "N = {modulus}: {n}"
        );
    }
}

#[test]
fn plans_round_trip_through_json() {
    // The CLI and the page read plans as JSON: what is written must read back the same
    // (serde_json writes the shortest decimal that reads back to the same f64).
    for modulus in [10, 16, 1000] {
        let plan = plan(modulus);
        let text = serde_json::to_string(&plan).expect("serialises");
        let back: ChainPlan = serde_json::from_str(&text).expect("reads back");
        assert_eq!(back, plan, "N = {modulus}");
    }
}

#[test]
fn out_of_range_moduli_are_refused_with_the_range() {
    for modulus in [0, 1, MAX_MODULUS + 1, u32::MAX] {
        let error = plan_chain(&ChainRequest { modulus, natural_binary_code: false });
        assert_eq!(error, Err(ChainError::ModulusOutOfRange { modulus: u64::from(modulus) }));
        let text = error.err().map(|e| e.to_string()).unwrap_or_default();
        assert!(text.contains("from 2 to 65536"), "{text}");
    }
}

#[test]
fn decade_by_reset_decodes_1010_from_two_outputs() {
    // Floyd, *Digital Fundamentals*, chapter on counters, the asynchronous decade counter: a
    // gate on Q1 and Q3 (the outputs that are 1 in 1010) detects count ten and clears every
    // flip-flop, so the counter runs 0000 … 1001 (8421 BCD) and 1010 exists only for the
    // clearing. (Stages here are numbered from 0 as Floyd numbers Q0 … Q3; chapter from memory.)
    let plan = plan(10);
    let reset = method(&plan, MethodKind::ResetOnCount);
    assert_eq!(plan.stage_count, 4);
    assert_eq!(reset.method, Method::ResetOnCount { decoded_stages: vec![1, 3] });
    assert_eq!(settled_states(reset), [1, 2, 3, 4, 5, 6, 7, 8, 9, 0]);
    let tenth = &reset.count_sequence[9];
    assert_eq!((tenth.from_state, tenth.reached_state), (0b1001, 0b1010));
    let correction = tenth.correction.as_ref().expect("the tenth pulse is reset");
    assert_eq!((correction.kind, correction.changed_stages.as_slice()), (CorrectionKind::Reset, &[1, 3][..]));
    // Q3 is high for counts 8 and 9 only (the 8421 code): 2 of 10 periods.
    assert!((reset.output.duty_cycle - 0.2).abs() < 1e-15);
    assert_eq!(reset.parts.diodes - 1 - 4, 2, "two decoding diodes");
}

#[test]
fn decade_by_feedback_presets_the_second_and_third_binaries() {
    // The classic decade of four binaries with feedback: when the fourth binary sets (count 8),
    // its transition sets the second and third, so the count jumps to 14 and six states
    // (2^4 − 10) are skipped (value from memory: the arrangement described in pulse-circuit
    // texts such as Millman & Taub, *Pulse, Digital and Switching Waveforms*).
    let plan = plan(10);
    let feedback = method(&plan, MethodKind::SkipFeedback);
    assert_eq!(
        feedback.method,
        Method::SkipFeedback { source_stage: 3, receiving_stages: vec![1, 2], skipped_states: 6 }
    );
    assert_eq!(settled_states(feedback), [1, 2, 3, 4, 5, 6, 7, 14, 15, 0]);
    let eighth = &feedback.count_sequence[7];
    assert_eq!((eighth.reached_state, eighth.settled_state), (8, 14));
    assert_eq!(eighth.correction.as_ref().map(|c| c.kind), Some(CorrectionKind::Preset));
    assert!((feedback.output.duty_cycle - 0.2).abs() < 1e-15);
}

#[test]
fn glitch_windows_of_the_decade_show_the_ripple_states() {
    // Ripple of a toggle chain (common practice): from 0111 the first stage falls after one
    // delay (0110), the second after two (0100), the third after three (0000), the fourth rises
    // after four (1000). A decoder of 6, 4 or 0 sees a one-delay spike there.
    let plan = plan(10);
    let reset = method(&plan, MethodKind::ResetOnCount);
    let eighth: Vec<_> = reset.glitch_windows.iter().filter(|w| w.pulse == 8).collect();
    let spans: Vec<_> = eighth.iter().map(|w| (w.state, w.from_stage_delays, w.to_stage_delays)).collect();
    assert_eq!(spans, [(6, 1, Some(2)), (4, 2, Some(3)), (0, 3, Some(4))]);
    // The gate decodes Q1 and Q3: 0110 has one of its inputs high, 0100 and 0000 none.
    let partial: Vec<_> = eighth.iter().map(|w| w.decoded_inputs_high).collect();
    assert_eq!(partial, [1, 0, 0]);
    assert_eq!(reset.check.false_resets, 0);
}

// ---------------------------------------------------------------------------------------------
// Timing.
// ---------------------------------------------------------------------------------------------

#[test]
fn ripple_chain_f_max_is_one_over_n_tpd() {
    // f(max) = 1/(n·tpd) when every stage must settle within a period (domain brief §8, after
    // Floyd, *Digital Fundamentals*). Four stages of 10 ns: 40 ns accumulated, 25 MHz
    // (evaluated by hand). Tolerance: a few ulps of the division.
    assert!((ripple_delay_s(4, 10e-9) - 40e-9).abs() < 1e-22);
    assert!((ripple_max_input_rate_hz(4, 10e-9) - 25e6).abs() < 1e-6);
    assert!((ripple_max_input_rate_hz(12, 25e-9) - 1.0 / 300e-9).abs() < 1e-6);
    // The chain timing of a plain 16-divider at zero spread gives the same figure.
    let timing = StageTiming {
        propagation_delay_s: 10e-9,
        reset_output_fall_s: 0.0,
        reset_clear_s: 0.0,
        trigger_pulse_s: 0.0,
        spread: 0.0,
        max_toggle_rate_hz: None,
    };
    let plan = plan(16);
    let chain = chain_timing(method(&plan, MethodKind::PlainBinary), &timing, 1e6, None).expect("valid");
    assert!((chain.settling_max_input_rate_hz - 25e6).abs() < 1e-6);
    assert!((chain.max_input_rate_hz - 25e6).abs() < 1e-6);
    // Each binary halves the rate (definition of the binary divider): 1 MHz, 500, 250, 125 kHz.
    let rates: Vec<f64> = chain.stages.iter().map(|s| s.average_trigger_rate_hz).collect();
    assert_eq!(rates, [1e6, 5e5, 2.5e5, 1.25e5]);
}

#[test]
fn feedback_settles_one_stage_delay_after_the_full_ripple() {
    // Derived from the plan: the preset follows the ripple 0111 → 1000 through all n stages,
    // then takes one more stage transition, so the longest settling is (n + 1)·tpd.
    let timing = StageTiming {
        propagation_delay_s: 10e-9,
        reset_output_fall_s: 0.0,
        reset_clear_s: 0.0,
        trigger_pulse_s: 0.0,
        spread: 0.0,
        max_toggle_rate_hz: None,
    };
    let plan = plan(10);
    let chain = chain_timing(method(&plan, MethodKind::SkipFeedback), &timing, 1e6, None).expect("valid");
    assert!((chain.worst_settling_s - 50e-9).abs() < 1e-21);
    // With the feedback, stages 2 and 3 see trigger edges two periods apart (pulses 8 and 10).
    let required: Vec<f64> = chain.stages.iter().map(|s| s.required_toggle_rate_hz).collect();
    assert_eq!(required, [1e6, 5e5, 5e5, 5e5]);
}

#[test]
fn the_stage_toggle_rate_caps_the_chain_input_rate() {
    // A chain cannot take input faster than its busiest stage can toggle: the first stage of
    // any ripple divider sees every input edge (spacing 1, from the plan), so with stages of
    // 10 ns delay (settling limit 1/(5·10 ns) = 20 MHz for the divide-by-10 feedback chain, as
    // above) and a stage toggle limit of 1 MHz, the chain is limited to 1 MHz by the toggle
    // rate. With a toggle limit above the settling limit, the settling limit stays.
    let slow_stage = StageTiming {
        propagation_delay_s: 10e-9,
        reset_output_fall_s: 0.0,
        reset_clear_s: 0.0,
        trigger_pulse_s: 0.0,
        spread: 0.0,
        max_toggle_rate_hz: Some(1e6),
    };
    let plan = plan(10);
    let feedback = method(&plan, MethodKind::SkipFeedback);
    let chain = chain_timing(feedback, &slow_stage, 3e6, None).expect("valid");
    assert!((chain.worst_settling_s - 50e-9).abs() < 1e-21);
    assert_eq!(chain.toggle_max_input_rate_hz, Some(1e6));
    assert_eq!(chain.max_input_rate_hz, 1e6);
    assert!(!chain.meets_input_rate, "3 MHz into stages that toggle at 1 MHz at most");
    assert!(
        chain.limited_by.contains("toggle rate") && chain.limited_by.contains("stage 1"),
        "{}",
        chain.limited_by
    );
    let fast_stage = StageTiming { max_toggle_rate_hz: Some(100e6), ..slow_stage };
    let chain = chain_timing(feedback, &fast_stage, 3e6, None).expect("valid");
    assert!((chain.max_input_rate_hz - 20e6).abs() < 1e-6);
    assert!(chain.meets_input_rate && chain.limited_by.contains("settling"), "{}", chain.limited_by);
    let unknown = StageTiming { max_toggle_rate_hz: None, ..slow_stage };
    let chain = chain_timing(feedback, &unknown, 3e6, None).expect("valid");
    assert_eq!(chain.toggle_max_input_rate_hz, None);
    assert!((chain.max_input_rate_hz - 20e6).abs() < 1e-6);
}

#[test]
fn bad_timing_is_refused_by_field() {
    let plan = plan(10);
    let timing = StageTiming {
        propagation_delay_s: f64::NAN,
        reset_output_fall_s: 0.0,
        reset_clear_s: 0.0,
        trigger_pulse_s: 0.0,
        spread: 0.0,
        max_toggle_rate_hz: None,
    };
    let error = chain_timing(method(&plan, MethodKind::SkipFeedback), &timing, 1e6, None);
    assert!(
        matches!(&error, Err(ChainError::InvalidInput { field, .. }) if field == "timing.propagation_delay_s"),
        "{error:?}"
    );
}

// ---------------------------------------------------------------------------------------------
// Every count sequence against an independent event-level model.
// ---------------------------------------------------------------------------------------------

/// What caused a change in the event-level model.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Cause {
    Toggle,
    Preset,
    Reset,
}

enum Event {
    Toggle(usize),
    Set(usize),
}

/// Toggle flip-flops in a ripple chain, written for this test alone and sharing no code with
/// the planner: each flip-flop toggles when the one before it falls; the decoding gate is
/// looked at after every change and, once all its inputs are high, clears every flip-flop and
/// swallows every trigger edge until the pulse is over; the feedback sets its flip-flops when
/// the last one rises.
struct ToggleChain {
    q: Vec<bool>,
    decoded: Vec<usize>,
    preset: Vec<usize>,
    queue: VecDeque<Event>,
    trace: Vec<(Cause, u64)>,
}

impl ToggleChain {
    fn new(stages: usize, decoded: Vec<usize>, preset: Vec<usize>) -> ToggleChain {
        ToggleChain { q: vec![false; stages], decoded, preset, queue: VecDeque::new(), trace: Vec::new() }
    }

    fn state(&self) -> u64 {
        self.q.iter().rev().fold(0, |word, bit| word << 1 | u64::from(*bit))
    }

    /// Applies one input pulse; `trace` holds every state the chain passes through.
    fn pulse(&mut self) {
        self.trace.clear();
        self.queue.push_back(Event::Toggle(0));
        let last = self.q.len() - 1;
        let mut reset_held = false;
        let mut events = 0;
        while let Some(event) = self.queue.pop_front() {
            events += 1;
            assert!(events < 10 * self.q.len() + 10, "runaway event queue");
            let cause = match event {
                Event::Toggle(_) if reset_held => continue,
                Event::Toggle(stage) => {
                    self.q[stage] = !self.q[stage];
                    if !self.q[stage] && stage < last {
                        self.queue.push_back(Event::Toggle(stage + 1));
                    }
                    if self.q[stage] && stage == last {
                        self.queue.extend(self.preset.iter().map(|s| Event::Set(*s)));
                    }
                    Cause::Toggle
                }
                Event::Set(stage) => {
                    self.q[stage] = true;
                    Cause::Preset
                }
            };
            self.trace.push((cause, self.state()));
            if !reset_held && !self.decoded.is_empty() && self.decoded.iter().all(|d| self.q[*d]) {
                reset_held = true;
                self.q.iter_mut().for_each(|q| *q = false);
                self.trace.push((Cause::Reset, self.state()));
            }
        }
    }
}

fn stages_of_bits(word: u64, stages: u32) -> Vec<usize> {
    (0..stages as usize).filter(|s| word >> s & 1 == 1).collect()
}

/// Runs the model over one cycle and compares every pulse with the plan's table.
fn check_against_model(modulus: u32, stages: u32, plan: &MethodPlan) {
    let kind = plan.method.kind().name();
    let (decoded, preset) = match &plan.method {
        Method::PlainBinary => (Vec::new(), Vec::new()),
        Method::ResetOnCount { decoded_stages } => {
            // The gate decodes the 1 bits of N.
            let expected = stages_of_bits(u64::from(modulus), stages);
            assert_eq!(
                decoded_stages.iter().map(|s| *s as usize).collect::<Vec<_>>(),
                expected,
                "N = {modulus}"
            );
            (expected, Vec::new())
        }
        Method::SkipFeedback { receiving_stages, .. } => {
            // The feedback sets the 1 bits of S = 2^n − N.
            let expected = stages_of_bits((1u64 << stages) - u64::from(modulus), stages);
            assert_eq!(
                receiving_stages.iter().map(|s| *s as usize).collect::<Vec<_>>(),
                expected,
                "N = {modulus}"
            );
            (Vec::new(), expected)
        }
    };
    let mut chain = ToggleChain::new(stages as usize, decoded, preset);
    let top = stages - 1;
    let (mut rises, mut falls) = (0, 0);
    let mut returned_after = None;
    for pulse in 1..=(1u32 << stages) + 1 {
        let before = chain.state();
        chain.pulse();
        let mut previous = before;
        for (_, state) in &chain.trace {
            match (previous >> top & 1, state >> top & 1) {
                (0, 1) => rises += 1,
                (1, 0) => falls += 1,
                _ => {}
            }
            previous = *state;
        }
        let row = plan
            .count_sequence
            .get(pulse as usize - 1)
            .unwrap_or_else(|| panic!("N = {modulus} {kind}: the table ends before pulse {pulse}"));
        let rippled: Vec<u64> =
            chain.trace.iter().filter(|(c, _)| *c == Cause::Toggle).map(|(_, s)| *s).collect();
        let mut expected: Vec<u64> = row.ripple_states.iter().map(|s| u64::from(*s)).collect();
        expected.push(u64::from(row.reached_state));
        assert_eq!(rippled, expected, "N = {modulus} {kind}, pulse {pulse}: ripple");
        assert_eq!(
            chain.state(),
            u64::from(row.settled_state),
            "N = {modulus} {kind}, pulse {pulse}: settled"
        );
        let corrected = chain.trace.iter().find(|(c, _)| *c != Cause::Toggle).map(|(c, _)| *c);
        let planned = row.correction.as_ref().map(|c| match c.kind {
            CorrectionKind::Reset => Cause::Reset,
            CorrectionKind::Preset => Cause::Preset,
        });
        assert_eq!(corrected, planned, "N = {modulus} {kind}, pulse {pulse}: correction");
        if chain.state() == 0 {
            returned_after = Some(pulse);
            break;
        }
    }
    assert_eq!(returned_after, Some(modulus), "N = {modulus} {kind}: back at the start after N pulses");
    assert_eq!((rises, falls), (1, 1), "N = {modulus} {kind}: one output cycle per N inputs");
    assert!(plan.check.passed, "N = {modulus} {kind}: {:?}", plan.check.problems);
    assert!(plan.start_up.every_state_enters_cycle, "N = {modulus} {kind}: lock-out");
}

fn check_range_against_model(moduli: std::ops::RangeInclusive<u32>) {
    for modulus in moduli {
        let plan = plan(modulus);
        let expected_methods = if modulus.is_power_of_two() { 1 } else { 2 };
        assert_eq!(plan.methods.len(), expected_methods, "N = {modulus}");
        for method in &plan.methods {
            check_against_model(modulus, plan.stage_count, method);
        }
    }
}

// The exhaustive check is split in ranges so the test runner can spread it over its threads.
#[test]
fn every_sequence_up_to_1024_matches_the_event_model() {
    check_range_against_model(2..=1024);
}

#[test]
fn every_sequence_from_1025_to_2048_matches_the_event_model() {
    check_range_against_model(1025..=2048);
}

#[test]
fn every_sequence_from_2049_to_3072_matches_the_event_model() {
    check_range_against_model(2049..=3072);
}

#[test]
fn every_sequence_from_3073_to_4096_matches_the_event_model() {
    check_range_against_model(3073..=4096);
}

// ---------------------------------------------------------------------------------------------
// The reset network.
// ---------------------------------------------------------------------------------------------

/// Invented stage for the reset checks: a lightly loaded silicon binary (RC 1 kΩ, R1 100 kΩ,
/// R2 220 kΩ, −1.5 V bias, hFE 200), whose reset current is small enough for a passive gate.
fn light_stage() -> ResetStage {
    ResetStage {
        values: StageValues {
            bias: BiasScheme::Fixed,
            collector_resistor_ohm: 1e3,
            cross_resistor_ohm: 100e3,
            base_resistor_ohm: 220e3,
            emitter_resistor_ohm: 0.0,
            emitter_bypass_capacitor_f: 0.0,
            commutating_capacitor_f: 10e-12,
            trigger: None,
        },
        supplies: Supplies { collector_supply_v: 10.0, bias_supply_v: 1.5, tolerance: 0.0 },
        devices: ResetDevices {
            vce_sat_v: 0.1,
            vbe_sat_v: 0.7,
            hfe_min: 200.0,
            diode_forward_v: 0.6,
            diode_capacitance_f: 0.0,
            overdrive: 1.5,
            resistor_tolerance: 0.0,
        },
        resistor_series: ESeries::E96,
        capacitor_series: ESeries::E24,
    }
}

fn fast_timing() -> StageTiming {
    StageTiming {
        propagation_delay_s: 20e-9,
        reset_output_fall_s: 50e-9,
        reset_clear_s: 60e-9,
        trigger_pulse_s: 5e-9,
        spread: 0.05,
        max_toggle_rate_hz: None,
    }
}

fn light_network(modulus: u32) -> ResetNetwork {
    let plan = plan(modulus);
    design_reset_network(method(&plan, MethodKind::ResetOnCount), &light_stage(), &fast_timing())
        .unwrap_or_else(|e| panic!("N = {modulus}: {e}"))
}

#[test]
fn reset_levels_follow_the_handbook_closed_forms() {
    // Domain brief §3 (Venkata Rao et al., ch. 9; Bell, ch. 13), no tolerances: OFF collector
    // VCC − RC·(VCC − VBE)/(RC + R1) = 10 − 1k·9.3/101k = 9.907921 V; OFF base from the ON
    // collector through R1–R2: −1.5 + 1.6·220/320 = −0.4 V (evaluated by hand).
    let network = light_network(3);
    assert!((network.levels.off_collector_min_v - (10.0 - 9.3 / 101.0)).abs() < 1e-12);
    assert!((network.levels.off_base_max_v - (-0.4)).abs() < 1e-12);
    // Reset current per stage: k·IC/hFE + (VBE − VCE)/R1 + (VBE + VBB)/R2
    // = 1.5·9.9 mA/200 + 0.6/100k + 2.2/220k = 74.25 + 6 + 10 µA.
    assert!((network.levels.reset_current_per_stage_a - 90.25e-6).abs() < 1e-15);
}

#[test]
fn a_light_fast_stage_wins_the_reset_race() {
    // Our design procedure on an invented light stage: the stated race condition holds and
    // the reported margins agree with the condition's terms.
    let network = light_network(3);
    assert!(network.passes, "{:#?}", network.problems);
    assert!(network.race.won);
    let needed = 1.2 * (60e-9 * 1.05 + 5e-9 * 1.05);
    assert!((network.race.required_hold_s - needed).abs() < 1e-18);
    assert!((network.race.gate_removal_s - 50e-9 * 0.95).abs() < 1e-18);
    assert!(network.race.available_hold_s >= network.race.required_hold_s);
    assert!(network.race.most_hold_s >= network.race.available_hold_s);
    assert!(network.timeline.rest_reverse_margin_v >= 0.3 - 1e-9, "{:?}", network.timeline);
    assert!(network.timeline.drive_ratio >= 1.0, "{:?}", network.timeline);
    // A slow stage (long storage) loses it, and the network says so.
    let plan = plan(3);
    let slow = StageTiming { reset_clear_s: 2e-6, ..fast_timing() };
    let lost = design_reset_network(method(&plan, MethodKind::ResetOnCount), &light_stage(), &slow)
        .expect("designable");
    assert!(!lost.race.won && !lost.passes);
    assert!(lost.problems.iter().any(|p| p.contains("race is lost")), "{:?}", lost.problems);
    let recommendation = plan.recommend_with_reset(&lost);
    assert_eq!(recommendation.method, MethodKind::SkipFeedback);
}

/// Integrates the hold node by small explicit steps with its piecewise-linear branches, as an
/// independent check of the closed-form phases (first-order RC response, standard circuit
/// theory). Returns (time the drive becomes sufficient, hold after the gate's removal).
fn integrate_hold_node(network: &ResetNetwork, stage: &ResetStage, timing: &StageTiming) -> (f64, f64) {
    let v = &network.values;
    let l = &network.levels;
    let source = l.supply_min_v - stage.devices.diode_forward_v;
    let ratio = v.divider_lower_ohm / (v.divider_upper_ohm + v.divider_lower_ohm);
    let need = f64::from(network.stage_count) * l.reset_current_per_stage_a;
    let base_current = |h: f64| {
        let unloaded = l.base_return_v + (h - l.base_return_v) * ratio;
        if unloaded > l.knee_v {
            (h - l.knee_v) / v.divider_upper_ohm - (l.knee_v - l.base_return_v) / v.divider_lower_ohm
        } else {
            0.0
        }
    };
    let out = |h: f64| {
        let unloaded = l.base_return_v + (h - l.base_return_v) * ratio;
        if unloaded > l.knee_v {
            (h - l.knee_v) / v.divider_upper_ohm
        } else {
            (h - l.base_return_v) / (v.divider_upper_ohm + v.divider_lower_ohm)
        }
    };
    let capacitance = v.hold_capacitor_f + stage.devices.diode_capacitance_f;
    let dt = 1e-12;
    let mut h = l.on_collector_v;
    let mut t = 0.0;
    let mut effective = None;
    let mut removal = None;
    for _ in 0..200_000_000u64 {
        let gate_up = match removal {
            Some(r) => t < r,
            None => true,
        };
        let inflow = if gate_up { ((source - h) / v.pull_up_ohm).max(0.0) } else { 0.0 };
        h += dt * (inflow - out(h)) / capacitance;
        t += dt;
        if effective.is_none() && base_current(h) >= need {
            effective = Some(t);
            removal = Some(t + timing.fastest(timing.reset_output_fall_s));
        }
        if let Some(r) = removal {
            if t > r && base_current(h) < need {
                return (effective.unwrap_or(0.0), t - r);
            }
        }
    }
    panic!("the integration did not finish");
}

#[test]
fn reset_timeline_matches_an_integration_of_the_hold_node() {
    // Tolerance 1 %: the explicit step (1 ps) against time constants of tens of ns leaves an
    // error well below that; 1 % is far inside what matters for a race margin.
    let stage = light_stage();
    let timing = fast_timing();
    let network = light_network(3);
    let (effective_s, hold_s) = integrate_hold_node(&network, &stage, &timing);
    let relative = |a: f64, b: f64| (a - b).abs() / b.abs();
    assert!(
        relative(effective_s, network.timeline.assert_s) < 0.01,
        "{effective_s:e} vs {:?}",
        network.timeline
    );
    assert!(
        relative(hold_s, network.timeline.hold_after_removal_s) < 0.01,
        "{hold_s:e} vs {:?}",
        network.timeline
    );
}

#[test]
fn the_demo_stage_is_too_heavy_for_a_passive_reset_gate() {
    // The demo binary (invented values) needs about 0.8 mA of reset base current per stage:
    // a passive gate that could give four of them would sink many times a stage's collector
    // current into a decoded output at rest. The network must say so and the recommendation
    // must fall back to feedback.
    let design = demo_design();
    let timing = demo_timing(&design);
    let plan = plan_chain(&ChainRequest { modulus: 10, natural_binary_code: true }).expect("in range");
    assert_eq!(plan.recommendation.method, MethodKind::ResetOnCount, "natural binary asked for");
    let network = design_reset_for_stage(&plan, &design, &timing).expect("designable");
    assert!(!network.passes);
    assert!(network.gate_sink_share > 0.5, "{}", network.gate_sink_share);
    assert!(network.problems.iter().any(|p| p.contains("passive gate")), "{:?}", network.problems);
    assert_eq!(plan.recommend_with_reset(&network).method, MethodKind::SkipFeedback);
}

// ---------------------------------------------------------------------------------------------
// Loads into the stage analysis.
// ---------------------------------------------------------------------------------------------

#[test]
fn chain_loads_enter_the_stage_analysis() {
    let design = demo_design();
    let timing = demo_timing(&design);
    let plan = plan(10);
    let network = design_reset_for_stage(&plan, &design, &timing).expect("designable");
    let own = design.input().loads;
    let trigger = design.values().trigger.expect("the demo has a trigger network");
    let reset = method(&plan, MethodKind::ResetOnCount);
    assert_eq!(chain_stage_loads(reset, &design, None), Err(ChainError::MissingResetNetwork));
    let loads = chain_stage_loads(reset, &design, Some(&network)).expect("loads");
    for stage in &loads {
        let decoded = [1, 3].contains(&stage.stage);
        let expected = if decoded { combine_loads(own[1], network.decode_load) } else { own[1] };
        assert_eq!(stage.loads, [own[0], expected], "stage {}", stage.stage);
        // Base steering: both trigger capacitors of the next stage hang on Q.
        let expected_f = if stage.stage < 3 { 2.0 * trigger.trigger_capacitor_f } else { 0.0 };
        assert_eq!(stage.capacitance_f, [0.0, expected_f]);
        let loaded = stage_design_with_loads(&design, stage).expect("valid loads");
        let report = analyse(&loaded).expect("the loaded stage analyses");
        // The gate's sink shows up in the decoded stages' overdrive, nowhere else.
        let overdrive = report.margins.iter().find(|m| m.title.contains("overdrive")).expect("reported");
        assert_eq!(decoded, !overdrive.pass, "stage {}: {overdrive:?}", stage.stage);
    }
    // Feedback: no DC load at all; the last stage's complement output drives two preset Ct.
    let feedback = chain_stage_loads(method(&plan, MethodKind::SkipFeedback), &design, None).expect("loads");
    assert!(feedback.iter().all(|s| s.loads == own));
    assert_eq!(feedback[3].capacitance_f[0], 2.0 * trigger.trigger_capacitor_f);
}

#[test]
fn a_stage_without_a_trigger_network_cannot_be_chained() {
    let design = demo_design();
    let mut values = *design.values();
    values.trigger = None;
    let bare = design.with_values(values).expect("valid without a trigger network");
    let plan = plan(8);
    let error = chain_stage_loads(method(&plan, MethodKind::PlainBinary), &bare, None);
    assert_eq!(error, Err(ChainError::MissingTriggerNetwork));
}

// ---------------------------------------------------------------------------------------------
// No panic on any input.
// ---------------------------------------------------------------------------------------------

fn any_number() -> impl Strategy<Value = f64> {
    prop_oneof![any::<f64>(), -1e3f64..1e3, (1e-15f64..1e-3), Just(0.0), Just(f64::NAN), Just(f64::INFINITY),]
}

prop_compose! {
    fn any_timing()(
        propagation_delay_s in any_number(),
        reset_output_fall_s in any_number(),
        reset_clear_s in any_number(),
        trigger_pulse_s in any_number(),
        spread in any_number(),
    ) -> StageTiming {
        StageTiming {
            propagation_delay_s,
            reset_output_fall_s,
            reset_clear_s,
            trigger_pulse_s,
            spread,
            max_toggle_rate_hz: None,
        }
    }
}

prop_compose! {
    fn any_reset_stage()(
        rc in any_number(), r1 in any_number(), r2 in any_number(), re in any_number(),
        self_bias in any::<bool>(),
        vcc in any_number(), vbb in any_number(), tolerance in any_number(),
        vce in any_number(), vbe in any_number(), hfe in any_number(), vf in any_number(),
        overdrive in any_number(), resistor_tolerance in any_number(),
    ) -> ResetStage {
        let mut stage = light_stage();
        stage.values.bias = if self_bias { BiasScheme::SelfBias } else { BiasScheme::Fixed };
        stage.values.collector_resistor_ohm = rc;
        stage.values.cross_resistor_ohm = r1;
        stage.values.base_resistor_ohm = r2;
        stage.values.emitter_resistor_ohm = re;
        stage.supplies = Supplies { collector_supply_v: vcc, bias_supply_v: vbb, tolerance };
        stage.devices = ResetDevices {
            vce_sat_v: vce,
            vbe_sat_v: vbe,
            hfe_min: hfe,
            diode_forward_v: vf,
            diode_capacitance_f: 0.0,
            overdrive,
            resistor_tolerance,
        };
        stage
    }
}

proptest! {
    // Each case plans at most a few thousand states or designs one network: milliseconds.
    #![proptest_config(ProptestConfig { cases: 64, failure_persistence: None, ..ProptestConfig::default() })]

    #[test]
    fn planning_never_panics(modulus in prop_oneof![any::<u32>(), 0u32..=5000], natural in any::<bool>()) {
        match plan_chain(&ChainRequest { modulus, natural_binary_code: natural }) {
            Ok(plan) => prop_assert!(plan.methods.iter().all(|m| m.check.passed)),
            Err(error) => prop_assert_eq!(error, ChainError::ModulusOutOfRange { modulus: u64::from(modulus) }),
        }
    }

    #[test]
    fn timing_never_panics(timing in any_timing(), rate in any_number()) {
        let plan = plan(10);
        for method in &plan.methods {
            if let Ok(chain) = chain_timing(method, &timing, rate, None) {
                prop_assert!(chain.worst_settling_s.is_finite() && chain.max_input_rate_hz > 0.0);
            }
        }
    }

    #[test]
    fn reset_design_never_panics(stage in any_reset_stage(), timing in any_timing(), modulus in 3u32..40) {
        let plan = plan(modulus);
        if let Some(reset) = plan.method(MethodKind::ResetOnCount) {
            if let Ok(network) = design_reset_network(reset, &stage, &timing) {
                prop_assert!(network.values.pull_up_ohm > 0.0 && network.values.hold_capacitor_f >= 0.0);
            }
        }
    }

    #[test]
    fn reset_evaluation_never_panics(
        stage in any_reset_stage(),
        timing in any_timing(),
        (rp, rr, rx, ch) in (any_number(), any_number(), any_number(), any_number()),
    ) {
        let plan = plan(10);
        let values = ResetValues { pull_up_ohm: rp, divider_upper_ohm: rr, divider_lower_ohm: rx, hold_capacitor_f: ch };
        let _ = evaluate_reset_network(method(&plan, MethodKind::ResetOnCount), &stage, &timing, &values);
    }

    #[test]
    fn loads_combine_without_panic(
        (a, b, c, d) in (any_number(), any_number(), any_number(), any_number()),
        kinds in (0u8..3, 0u8..3),
    ) {
        let make = |kind: u8, x: f64, y: f64| match kind {
            0 => Load::None,
            1 => Load::Resistance { resistance_ohm: x, return_v: y },
            _ => Load::Current { current_a: x },
        };
        let _ = combine_loads(make(kinds.0, a, b), make(kinds.1, c, d));
    }
}

// ---------------------------------------------------------------------------------------------
// The driven reset network (driver transistor): design rules, monotone behaviour, no panic.
// ---------------------------------------------------------------------------------------------

fn demo_driven(modulus: u32, natural: bool) -> (ChainPlan, DrivenResetNetwork) {
    let design = demo_design();
    let timing = demo_timing(&design);
    let plan = plan_chain(&ChainRequest { modulus, natural_binary_code: natural }).expect("in range");
    let network = design_reset_driver_for_stage(&plan, &design, &timing)
        .unwrap_or_else(|e| panic!("N = {modulus}: {e}"));
    (plan, network)
}

#[test]
fn driven_reset_keeps_the_gate_load_within_the_rule_for_short_demo_chains() {
    // Design rule (our choice, `RESET_SINK_SHARE_MAX`): a decoded ON collector sinks at most
    // half its collector current from the gate at rest. Gate sink = (VCC(max) − VF − VCE(sat))
    // / Rp(min) by Ohm's law, recomputed here from the values the planner chose.
    for modulus in [3u32, 5, 10, 12] {
        let (_, network) = demo_driven(modulus, true);
        let l = &network.levels;
        let forward_v = ResetStage::from_design(&demo_design()).devices.diode_forward_v;
        let rp_min = network.values.pull_up_ohm * (1.0 - demo_design().input().conditions.resistor_tolerance);
        let sink = (l.supply_max_v - forward_v - l.on_collector_v) / rp_min;
        assert!((sink / network.gate_sink_current_a - 1.0).abs() < 1e-9, "N = {modulus}");
        assert!(
            network.gate_sink_share <= RESET_SINK_SHARE_MAX,
            "N = {modulus}: {}",
            network.gate_sink_share
        );
        assert!(network.passes, "N = {modulus}: {:?}", network.problems);
    }
}

#[test]
fn driven_reset_hold_grows_with_the_hold_capacitor_and_the_gate_load_falls_with_rp() {
    // After the gate's removal H decays as a first-order RC (standard circuit theory): the time
    // to a fixed level is τ·ln(ratio) with τ ∝ Ch, so the hold grows with Ch; the gate's sink is
    // Ohm's law through Rp, so it falls as Rp rises.
    let design = demo_design();
    let timing = demo_timing(&design);
    let stage = ResetStage::from_design(&design);
    let (plan, network) = demo_driven(10, true);
    let reset = method(&plan, MethodKind::ResetOnCount);
    let with = |ch: f64, rp: f64| {
        let values = DriverValues { hold_capacitor_f: ch, pull_up_ohm: rp, ..network.values };
        evaluate_reset_driver(reset, &stage, &timing, &values).expect("evaluates")
    };
    let v = network.values;
    let holds: Vec<f64> = [1.0, 2.0, 4.0]
        .iter()
        .map(|k| with(k * v.hold_capacitor_f, v.pull_up_ohm).race.available_hold_s)
        .collect();
    assert!(holds[0] < holds[1] && holds[1] < holds[2], "{holds:?}");
    // Doubling a first-order time constant doubles the time to the same level (within the
    // diode's own capacitance, which does not scale).
    assert!((holds[2] / holds[1] - 2.0).abs() < 0.05, "{holds:?}");
    let sinks: Vec<f64> =
        [0.8, 0.9, 1.0].iter().map(|k| with(v.hold_capacitor_f, k * v.pull_up_ohm).gate_sink_share).collect();
    assert!(sinks[0] > sinks[1] && sinks[1] > sinks[2], "{sinks:?}");
    // Exactly inverse: 1/0.8 = 1.25 times the sink at 0.8·Rp.
    assert!((sinks[0] / sinks[2] - 1.25).abs() < 1e-9, "{sinks:?}");
    // The race needs more hold when the stages store longer (the clear includes storage).
    let slow = StageTiming { reset_clear_s: timing.reset_clear_s + 100e-9, ..timing };
    let slower = evaluate_reset_driver(reset, &stage, &slow, &network.values).expect("evaluates");
    assert!(slower.race.required_hold_s > network.race.required_hold_s);
    // And the planner answers a longer storage with a larger hold capacitor.
    let redesigned = design_reset_driver(reset, &stage, &slow).expect("designable");
    assert!(redesigned.values.hold_capacitor_f > network.values.hold_capacitor_f);
    assert!(redesigned.race.won, "{:?}", redesigned.problems);
}

#[test]
fn driven_reset_recommendation_gives_its_reasons() {
    // The demo decade's driven reset now passes its closed-form checks, so asking for natural
    // binary outputs gets the reset; without that, feedback is kept for fewer parts and no race,
    // and the text says the reset would pass.
    let (plan, network) = demo_driven(10, true);
    assert!(network.race.won && network.passes, "{:?}", network.problems);
    let natural = plan.recommend_with_driven_reset(&network);
    assert_eq!(natural.method, MethodKind::ResetOnCount);
    assert!(natural.reasons.iter().any(|r| r.contains("passes its checks")), "{:?}", natural.reasons);
    let (plan, network) = demo_driven(10, false);
    let free = plan.recommend_with_driven_reset(&network);
    assert_eq!(free.method, MethodKind::SkipFeedback);
    assert!(free.reasons.iter().any(|r| r.contains("passes its checks too")), "{:?}", free.reasons);
    // A network that fails (Rr a hundred times too large starves the driver) sends it to
    // feedback with the problem stated.
    let design = demo_design();
    let reset = method(&plan, MethodKind::ResetOnCount);
    let starved =
        DriverValues { divider_upper_ohm: 100.0 * network.values.divider_upper_ohm, ..network.values };
    let evaluated =
        evaluate_reset_driver(reset, &ResetStage::from_design(&design), &demo_timing(&design), &starved);
    assert!(matches!(evaluated, Err(ChainError::ResetUnbuildable { .. })), "{evaluated:?}");
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 64, failure_persistence: None, ..ProptestConfig::default() })]

    #[test]
    fn driven_reset_design_never_panics_and_gives_usable_values(
        stage in any_reset_stage(),
        timing in any_timing(),
        modulus in prop_oneof![3u32..40, 40u32..=65_535],
    ) {
        let plan = plan(modulus);
        if let Some(reset) = plan.method(MethodKind::ResetOnCount) {
            if let Ok(network) = design_reset_driver(reset, &stage, &timing) {
                let v = network.values;
                for value in [v.pull_up_ohm, v.divider_upper_ohm, v.divider_lower_ohm, v.hold_capacitor_f,
                    v.emitter_resistor_ohm, v.series_resistor_ohm] {
                    prop_assert!(value.is_finite() && value > 0.0, "{v:?}");
                }
                let r = &network.race;
                for time in [r.gate_removal_s, r.required_hold_s, r.available_hold_s, r.most_hold_s, network.pulse_width_s] {
                    prop_assert!(time.is_finite() && time >= 0.0, "{r:?}");
                }
                prop_assert!(network.gate_sink_share.is_finite() && network.gate_sink_share >= 0.0);
                prop_assert!(network.driver_current_a.is_finite() && network.driver_current_a > 0.0);
                prop_assert_eq!(network.passes, network.problems.is_empty());
            }
        }
    }

    #[test]
    fn driven_reset_evaluation_never_panics(
        stage in any_reset_stage(),
        [rp, rr, rx, ch, re, rs] in prop::array::uniform6(any_number()),
    ) {
        // Any timing is the design check's; with it here as well the strategy tree outgrows a
        // test thread's stack in the debug profile.
        let timing = fast_timing();
        let plan = plan(10);
        let values = DriverValues {
            pull_up_ohm: rp, divider_upper_ohm: rr, divider_lower_ohm: rx, hold_capacitor_f: ch,
            emitter_resistor_ohm: re, series_resistor_ohm: rs,
        };
        let _ = evaluate_reset_driver(method(&plan, MethodKind::ResetOnCount), &stage, &timing, &values);
    }
}
