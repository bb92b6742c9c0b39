//! Checks the sensitivity-guided worst-case search against exhaustive enumeration of every corner.

use flipwright::device::archetypes;
use flipwright::device::ebers_moll::EbersMoll;
use flipwright::stage::margins::{MarginKind, DC_MARGINS};
use flipwright::stage::worst_case::{analyse, exhaustive_worst, parameters, Parameter};
use flipwright::stage::{BiasScheme, StageDesign};

use crate::handbook::fixed_bias_input;

/// A small stage on the silicon NPN archetype (hFE 40/120/300, VCE(sat) and VBE(sat) with
/// spread): 5 % resistors, 5 % rails, 0–60 °C, no loads, no trigger network.
fn small_design(bias: BiasScheme) -> StageDesign {
    let sheet = archetypes::transistor("si-npn-switch-40v").expect("archetype");
    let mut input = match bias {
        BiasScheme::Fixed => fixed_bias_input(sheet, 9.0, 4.5, 2.4e3, 8.2e3, 13e3),
        BiasScheme::SelfBias => {
            let mut input = fixed_bias_input(sheet, 9.0, 0.0, 1.8e3, 10e3, 4.7e3);
            input.requirements.bias = BiasScheme::SelfBias;
            input.values.bias = BiasScheme::SelfBias;
            input.values.emitter_resistor_ohm = 270.0;
            input.values.emitter_bypass_capacitor_f = 1e-6;
            input
        }
    };
    input.conditions.t_min_c = 0.0;
    input.conditions.t_max_c = 60.0;
    input.conditions.resistor_tolerance = 0.05;
    input.supplies.tolerance = 0.05;
    StageDesign::new(input).unwrap_or_else(|e| panic!("test design invalid: {e:?}"))
}

/// Runs the guided search once and compares every DC margin with the exhaustive worst.
/// Tolerance 1e-9 relative: both evaluate the very same corner function, so an agreeing
/// search returns the identical corner value; anything above rounding means the search
/// stopped at a different (less bad, or the exhaustive missed a worse) corner.
fn check(design: &StageDesign, what: &str) {
    let params = parameters(design);
    assert!(params.len() <= 16, "{what}: {} parameters make enumeration too slow", params.len());
    assert!(params.contains(&Parameter::Temperature), "{what}: temperature must be a parameter");
    let model = EbersMoll::from_datasheet(design.transistor()).expect("model").model;
    let report = analyse(design, &model).unwrap_or_else(|e| panic!("{what}: worst case failed: {e}"));
    let mut mismatches = Vec::new();
    for kind in DC_MARGINS {
        let guided = report
            .margins
            .iter()
            .find(|m| m.kind == kind)
            .unwrap_or_else(|| panic!("{what}: no worst case for {kind:?}"));
        let exhaustive = exhaustive_worst(design, kind)
            .unwrap_or_else(|| panic!("{what}: exhaustive found nothing for {kind:?}"));
        let scale = exhaustive.abs().max(1e-12);
        if (guided.worst - exhaustive).abs() > 1e-9 * scale {
            mismatches.push(format!(
                "{kind:?}: search {} vs exhaustive {} (difference {:+.3e}, corner {:?})",
                guided.worst,
                exhaustive,
                guided.worst - exhaustive,
                guided.corner
            ));
        }
    }
    assert!(
        mismatches.is_empty(),
        "{what}: the guided search misses the worst corner:\n  {}",
        mismatches.join("\n  ")
    );
}

#[test]
fn guided_search_finds_the_exhaustive_worst_in_fixed_bias() {
    // 15 parameters (6 resistors, 2 rails, 6 device spreads, temperature): 2^14·3 = 49 152
    // corners per margin, under a second per margin in a debug build.
    check(&small_design(BiasScheme::Fixed), "fixed bias");
}

#[test]
fn guided_search_finds_the_exhaustive_worst_in_self_bias() {
    // Guards: a parameter that is inert at nominal (a margin taken as the max over both states
    // hides one transistor's VBE(sat) when the other state dominates) can matter at the worst
    // corner; the search must still try it.
    // 15 parameters (6 resistors, RE, the collector rail, 6 device spreads, temperature).
    check(&small_design(BiasScheme::SelfBias), "self bias");
}

#[test]
fn exhaustive_worst_is_never_better_than_nominal() {
    // Sanity of the reference itself: the enumeration includes corners at least as bad as
    // nominal for every margin (it covers both ends of every parameter, and each margin is
    // monotonic in some parameter, e.g. hFE for overdrive, VCC for swing).
    let design = small_design(BiasScheme::Fixed);
    let model = EbersMoll::from_datasheet(design.transistor()).expect("model").model;
    let report = analyse(&design, &model).expect("worst case");
    for kind in [MarginKind::Overdrive, MarginKind::OutputSwing] {
        let nominal = report.margins.iter().find(|m| m.kind == kind).expect("margin").nominal;
        let exhaustive = exhaustive_worst(&design, kind).expect("exhaustive");
        assert!(exhaustive < nominal, "{kind:?}: exhaustive {exhaustive} not below nominal {nominal}");
    }
}
