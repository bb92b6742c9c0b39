//! Checks of the charge-control switching formulas and Bell's commutating-capacitor rules against published formulas and worked examples.

use flipwright::stage::margins::evaluate_corner;
use flipwright::stage::network::Corner;
use flipwright::stage::switching::{
    commutating_rule_bell_f, estimate, max_rate_rule_bell_hz, max_rate_rule_half_hz, ChargeControlPoint,
    PassiveScale, SwitchingEstimate,
};
use flipwright::stage::StageDesign;

use crate::handbook::{assert_relative, exact_transistor, fixed_bias_input};

fn point(tau_f: f64, beta: f64, tau_s: f64, ic: f64, ib1: f64, ib2: f64) -> ChargeControlPoint {
    ChargeControlPoint {
        forward_transit_s: tau_f,
        beta,
        storage_time_constant_s: tau_s,
        collector_current_a: ic,
        forward_base_current_a: ib1,
        reverse_base_current_a: ib2,
    }
}

/// Storage time for reverse drive `ib2`, against a value quoted to 3 figures: the tolerance is
/// half a unit of the last quoted digit.
fn check_storage(ib2: f64, expected_s: f64, half_unit_s: f64) {
    // τS 10 ns, β 50, IC 10 mA, IB1 2 mA (domain brief §8; derived from the published
    // ts = τS·ln[(IB1 + IB2)/(IC/β + IB2)], Moll 1954 / Beaufoy & Sparkes 1957).
    let p = point(1e-9, 50.0, 10e-9, 10e-3, 2e-3, ib2);
    let ts = p.storage_time_s();
    assert!(
        (ts - expected_s).abs() <= half_unit_s,
        "storage time with IB2 = {ib2} A: {ts:e} s, expected {expected_s:e} ± {half_unit_s:e} s"
    );
}

#[test]
fn storage_time_matches_the_published_formula_cases() {
    // 23.0 ns is quoted to 0.1 ns (±0.05 ns); 9.16 and 5.98 ns to 0.01 ns (±0.005 ns).
    check_storage(0.0, 23.0e-9, 0.05e-9);
    check_storage(1e-3, 9.16e-9, 0.005e-9);
    check_storage(2e-3, 5.98e-9, 0.005e-9);
}

#[test]
fn storage_time_is_zero_without_overdrive() {
    // Charge control: no excess charge is stored when IB1 ≤ IC/β, so there is no storage
    // phase (Beaufoy & Sparkes 1957). IB1 = IC/β exactly, and below it.
    assert_eq!(point(1e-9, 50.0, 10e-9, 10e-3, 0.2e-3, 1e-3).storage_time_s(), 0.0);
    assert_eq!(point(1e-9, 50.0, 10e-9, 10e-3, 0.1e-3, 0.0).storage_time_s(), 0.0);
}

#[test]
fn rise_fall_and_time_to_saturation_match_hand_computed_values() {
    // Stated case: τF 1 ns, β 50 (τBF = β·τF = 50 ns), IC 10 mA (IC/β = 0.2 mA), IB1 0.5 mA,
    // IB2 1 mA, τS 100 ns. Values below evaluated by hand (calculator, 8 figures) from the
    // published charge-control formulas (Beaufoy & Sparkes 1957; Moll 1954):
    //   t(sat) = τBF·ln[IB1/(IB1 − IC/β)]                     = 50 ns·ln(0.5/0.3)   = 25.541281 ns
    //   tr     = τBF·ln[(IB1 − 0.1·IC/β)/(IB1 − 0.9·IC/β)]    = 50 ns·ln(0.48/0.32) = 20.273255 ns
    //   tf     = τBF·ln[(IB2 + 0.9·IC/β)/(IB2 + 0.1·IC/β)]    = 50 ns·ln(1.18/1.02) = 7.2855906 ns
    //   ts     = τS·ln[(IB1 + IB2)/(IC/β + IB2)]              = 100 ns·ln(1.5/1.2)  = 22.314355 ns
    // Tolerance 1e-6 relative: the literals carry 8 significant figures.
    let p = point(1e-9, 50.0, 100e-9, 10e-3, 0.5e-3, 1e-3);
    assert_relative(
        p.time_to_saturation_s().expect("IB1 > IC/β saturates"),
        25.541281e-9,
        1e-6,
        "time to saturation",
    );
    assert_relative(p.rise_time_s().expect("IB1 > 0.9·IC/β"), 20.273255e-9, 1e-6, "rise time");
    assert_relative(p.fall_time_s(), 7.2855906e-9, 1e-6, "fall time");
    assert_relative(p.storage_time_s(), 22.314355e-9, 1e-6, "storage time");
}

#[test]
fn formulas_refuse_drive_that_cannot_reach_the_end_point() {
    // ln of a non-positive ratio has no meaning: IB1 ≤ IC/β never saturates, IB1 ≤ 0.9·IC/β
    // never reaches 90 % of IC (charge control, as above).
    let weak = point(1e-9, 50.0, 10e-9, 10e-3, 0.2e-3, 0.0);
    assert!(weak.time_to_saturation_s().is_none());
    assert!(weak.rise_time_s().is_some(), "0.2 mA > 0.9·0.2 mA still reaches 90 %");
    let weaker = point(1e-9, 50.0, 10e-9, 10e-3, 0.18e-3, 0.0);
    assert!(weaker.rise_time_s().is_none());
}

// ---------------------------------------------------------------------------------------------
// Bell, *Solid State Pulse Circuits*, ex. 13.4: R1 16.1 kΩ, R2 27 kΩ, switching time 260 ns
// → C1 = 10·t/(R1∥R2) ≈ 258 pF and f(max) = 1/(2.3·C1·(R1∥R2)) ≈ 167 kHz.
//
// The rules are checked twice: directly through the pure functions, and through `estimate` on
// a design with Bell's R1 and R2 whose τS is chosen so that the estimated switching time is
// exactly 260 ns (ts is linear in τS; delay, rise and fall do not depend on it).
// ---------------------------------------------------------------------------------------------

/// Bell ex. 13.1/13.4 stage (VCC 5 V, VBB 5 V, RC 2.4 kΩ, R1 16.1 kΩ, R2 27 kΩ) with a
/// transistor of hFE 150 (Bell's hFE(min) 70 would not saturate with R2 = 27 kΩ in this
/// model's exact balance, and the estimate then has no rise time), storage constant `tau_s`
/// and junction capacitances of 0.1 pF.
#[test]
fn pure_rule_functions_reproduce_bell_example_13_4() {
    let (r1, r2) = (16.1e3, 27e3);
    let c1 = commutating_rule_bell_f(260e-9, r1, r2);
    // Bell ex. 13.4: C1 ≈ 258 pF, f(max) ≈ 167 kHz (both quoted to 3 figures: 0.5 %).
    assert_relative(c1, 258e-12, 0.005, "Bell ex. 13.4 C1 (pure rule)");
    assert_relative(max_rate_rule_bell_hz(c1, r1, r2), 167e3, 0.005, "Bell ex. 13.4 f(max) (pure rule)");
    // The 1/(2·C1·R∥) form is larger by exactly 2.3/2.
    let ratio = max_rate_rule_half_hz(c1, r1, r2) / max_rate_rule_bell_hz(c1, r1, r2);
    assert!((ratio - 1.15).abs() < 1e-12, "ratio {ratio}");
    assert!(max_rate_rule_bell_hz(0.0, r1, r2).is_infinite(), "no C1: no recovery limit");
}

fn bell_estimate(tau_s: f64, c1: f64) -> SwitchingEstimate {
    let mut transistor = exact_transistor(150.0, 0.2, 0.7, 0.0);
    transistor.storage_time_constant_s = Some(tau_s);
    // Small junction capacitances keep the turn-on delay well under 260 ns.
    transistor.cib_f = 0.1e-12;
    transistor.cob_f = 0.1e-12;
    let mut input = fixed_bias_input(transistor, 5.0, 5.0, 2.4e3, 16.1e3, 27e3);
    input.values.commutating_capacitor_f = c1;
    let design = StageDesign::new(input).unwrap_or_else(|e| panic!("test design invalid: {e:?}"));
    let (_, states) = evaluate_corner(&design, &Corner::nominal(&design, 25.0)).expect("solvable");
    estimate(&design, &states[1], PassiveScale::NOMINAL)
}

const BELL_R_PARALLEL: f64 = 16.1e3 * 27e3 / (16.1e3 + 27e3);

#[test]
fn commutating_capacitor_rule_reproduces_bell_example_13_4() {
    let a = bell_estimate(50e-9, 0.0);
    let b = bell_estimate(100e-9, 0.0);
    let ta = a.switching_time_s.expect("saturating design has a switching time");
    let tb = b.switching_time_s.expect("saturating design has a switching time");
    // t = A + τS·L; pick τS for t = 260 ns.
    let slope = (tb - ta) / 50e-9;
    assert!(slope > 0.0, "storage time must grow with τS");
    let tau_s = 50e-9 + (260e-9 - ta) / slope;
    let bell = bell_estimate(tau_s, 0.0);
    assert_relative(
        bell.switching_time_s.expect("switching time"),
        260e-9,
        1e-9,
        "constructed switching time",
    );
    // Bell quotes C1 ≈ 258 pF (10 · 260 ns / 10.086 kΩ = 257.79 pF): 0.5 % covers his rounding.
    assert_relative(bell.commutating_rule_f.expect("rule C1"), 258e-12, 0.005, "Bell ex. 13.4 C1");
}

#[test]
fn maximum_rate_rules_reproduce_bell_example_13_4() {
    let e = bell_estimate(50e-9, 258e-12);
    // C1·(R1∥R2) = 258 pF · 10.086 kΩ = 2.602 µs (definition of the time constant).
    assert_relative(e.recovery_time_constant_s, 258e-12 * BELL_R_PARALLEL, 1e-12, "C1·(R1∥R2)");
    // Bell ex. 13.4: f(max) = 1/(2.3·C1·(R1∥R2)) ≈ 167 kHz (quoted to 3 figures: 0.5 %).
    assert_relative(e.max_rate_rule_bell_hz, 167e3, 0.005, "Bell ex. 13.4 f(max)");
    // Millman & Taub style 1/(2·C1·(R1∥R2)) with the same values: 1/(2 · 2.6022 µs)
    // = 192.15 kHz (hand-computed, 5 figures: 1e-4).
    assert_relative(e.max_rate_rule_half_hz, 192.15e3, 1e-4, "1/(2·C1·R∥) rule");
}
