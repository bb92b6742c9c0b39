//! Checks that the piecewise and Ebers–Moll stage models agree, that NPN and PNP mirror exactly, and that worst cases never beat nominal.

use std::sync::OnceLock;

use flipwright::design_file::{DesignFile, DeviceChoice};
use flipwright::device::Polarity;
use flipwright::stage::analysis::{analyse, StageReport};
use flipwright::stage::synthesis::synthesise;
use flipwright::stage::{BiasScheme, StageDesign, StageInput};

/// Synthesises values for a requirements-only input and returns the validated design.
pub(crate) fn synthesised(input: &StageInput, what: &str) -> StageDesign {
    let outcome = synthesise(input).unwrap_or_else(|e| panic!("{what}: synthesis failed: {e}"));
    let mut complete = input.clone();
    complete.values = outcome.values;
    StageDesign::new(complete).unwrap_or_else(|e| panic!("{what}: synthesised values invalid: {e:?}"))
}

/// The shipped demo (9 V, fixed bias, silicon NPN archetype) with synthesised values.
pub(crate) fn demo_design() -> &'static StageDesign {
    static DESIGN: OnceLock<StageDesign> = OnceLock::new();
    DESIGN.get_or_init(|| {
        let input = DesignFile::demo().synthesis_input().expect("demo has valid requirements");
        synthesised(&input, "demo")
    })
}

fn demo_report() -> &'static StageReport {
    static REPORT: OnceLock<StageReport> = OnceLock::new();
    REPORT.get_or_init(|| analyse(demo_design()).expect("demo analyses"))
}

/// The demo's requirements with self bias from the single 9 V supply, with values designed by
/// hand with the handbook steps (IC 4 mA, emitter at about 1.2 V: RE 270 Ω, RC 1.8 kΩ,
/// divider current IC/10: R2 4.7 kΩ, overdrive 2 at hFE(min) 40: R1 10 kΩ, E24). Synthesis
/// of the same requirements takes about 18 s in a debug build (588 candidates, each with a
/// full worst-case search), too slow for this suite.
fn self_bias_design() -> StageDesign {
    let mut file = DesignFile::demo();
    file.requirements.bias = BiasScheme::SelfBias;
    file.supplies.bias_supply_v = 0.0;
    let mut input = file.synthesis_input().expect("valid requirements");
    input.values = flipwright::stage::StageValues {
        bias: BiasScheme::SelfBias,
        collector_resistor_ohm: 1.8e3,
        cross_resistor_ohm: 10e3,
        base_resistor_ohm: 4.7e3,
        emitter_resistor_ohm: 270.0,
        emitter_bypass_capacitor_f: 1e-6,
        commutating_capacitor_f: 47e-12,
        trigger: None,
    };
    StageDesign::new(input).unwrap_or_else(|e| panic!("hand-designed self-bias stage invalid: {e:?}"))
}

/// A germanium PNP board: the alloy-junction archetype with point-contact steering diodes,
/// −9 V supply with +3 V bias rail, 0–45 °C, 10 kHz.
pub(crate) fn germanium_design() -> StageDesign {
    let mut file = DesignFile::demo();
    file.transistor = DeviceChoice::Archetype("ge-pnp-alloy-15v".to_string());
    file.diode = DeviceChoice::Archetype("ge-point-contact-diode".to_string());
    file.supplies.collector_supply_v = 9.0;
    file.supplies.bias_supply_v = 3.0;
    file.conditions.t_max_c = 45.0;
    file.requirements.toggle_rate_hz = 10e3;
    file.requirements.collector_current_a = Some(3e-3);
    file.loads = [flipwright::stage::Load::None, flipwright::stage::Load::None];
    synthesised(&file.synthesis_input().expect("valid requirements"), "germanium PNP")
}

#[test]
fn demo_has_both_exact_states() {
    let report = demo_report();
    assert_eq!(report.exact_states.len(), 2);
    for (index, state) in report.exact_states.iter().enumerate() {
        let state = state.as_ref().unwrap_or_else(|e| panic!("exact state {index} not found: {e}"));
        assert_eq!(state.on_side, index);
        // Saturated: the ON transistor's IC/IB is below its βF (hFE typ 120 at 25 °C), and
        // the OFF one carries only leakage (the archetype's ICBO is 50 nA).
        assert!(
            state.on_forced_gain > 0.0 && state.on_forced_gain < 120.0,
            "forced gain {}",
            state.on_forced_gain
        );
        let off = 1 - index;
        assert!(
            state.collector_current_a[off].abs() < 1e-6,
            "OFF collector current {}",
            state.collector_current_a[off]
        );
    }
}

#[test]
fn piecewise_and_ebers_moll_states_agree_on_the_demo() {
    // The piecewise model holds the ON base at the datasheet VBE(sat) (0.75 V at IC/IB = 10);
    // the Ebers–Moll model, fitted to that point, sits where the circuit's own forced gain
    // puts it (about 10–12 here): ln of the drive ratio times VT plus the fit's neglected
    // terms is tens of mV. 60 mV bounds that and still catches a wrong state (a node off by
    // a junction drop, 0.3 V or more). IC is set by RC and the supply, which both models
    // share: 2 % covers the tens of mV of VCE(sat) difference over about 8.9 V across RC.
    let report = demo_report();
    assert_eq!(report.agreement.len(), 2);
    for (index, agreement) in report.agreement.iter().enumerate() {
        let a = agreement.unwrap_or_else(|| panic!("state {index}: no exact solution to compare"));
        assert!(
            a.max_node_difference_v < 0.060,
            "state {index}: node voltages differ by {} V",
            a.max_node_difference_v
        );
        assert!(
            a.collector_current_relative.abs() < 0.02,
            "state {index}: IC differs by {:+.3} %",
            100.0 * a.collector_current_relative
        );
    }
}

/// The same design with the transistor's polarity flipped.
fn mirrored(design: &StageDesign) -> StageDesign {
    let mut input = design.input().clone();
    input.transistor.polarity = match input.transistor.polarity {
        Polarity::Npn => Polarity::Pnp,
        Polarity::Pnp => Polarity::Npn,
    };
    StageDesign::new(input).expect("mirror is valid")
}

fn assert_negated<N: AsRef<str> + std::fmt::Debug>(a: &[(N, f64)], b: &[(N, f64)], what: &str) {
    assert_eq!(a.len(), b.len(), "{what}: lengths");
    for ((name_a, va), (name_b, vb)) in a.iter().zip(b) {
        assert_eq!(name_a.as_ref(), name_b.as_ref(), "{what}: names");
        assert_eq!(*va, -*vb, "{what}: {name_a:?}");
    }
}

#[test]
fn npn_and_pnp_stages_mirror_exactly() {
    // Circuit symmetry (every PNP voltage and current is the NPN one negated; common
    // practice, e.g. Millman & Taub's treatment of complementary circuits). Exact equality:
    // the negation of an f64 is exact, so any difference is a modelling asymmetry.
    let npn = demo_report();
    let pnp = analyse(&mirrored(demo_design())).expect("PNP mirror analyses");
    assert_eq!(npn.polarity_sign, 1.0);
    assert_eq!(pnp.polarity_sign, -1.0);
    for (a, b) in npn.handbook_states.iter().zip(&pnp.handbook_states) {
        assert_negated(&a.node_voltages, &b.node_voltages, "handbook node voltages");
        assert_negated(&a.branch_currents, &b.branch_currents, "handbook branch currents");
        assert_eq!(a.on_collector_current_a, -b.on_collector_current_a);
        assert_eq!(a.on_base_current_a, -b.on_base_current_a);
        assert_eq!(a.output_swing_v, -b.output_swing_v);
        // Ratios and margins are polarity-free.
        assert_eq!(a.overdrive, b.overdrive);
        assert_eq!(a.cutoff_margin_v, b.cutoff_margin_v);
    }
    for (a, b) in npn.exact_states.iter().zip(&pnp.exact_states) {
        let (a, b) = (a.as_ref().expect("NPN exact"), b.as_ref().expect("PNP exact"));
        assert_negated(&a.node_voltages, &b.node_voltages, "exact node voltages");
        assert_eq!(a.collector_current_a, [-b.collector_current_a[0], -b.collector_current_a[1]]);
        assert_eq!(a.on_forced_gain, b.on_forced_gain);
    }
    assert_eq!(npn.margins.len(), pnp.margins.len());
    for (a, b) in npn.margins.iter().zip(&pnp.margins) {
        assert_eq!(a.kind, b.kind);
        assert_eq!(
            (a.nominal, a.worst, a.required, a.pass),
            (b.nominal, b.worst, b.required, b.pass),
            "{}",
            a.title
        );
    }
}

fn check_worst_not_better(design: &StageDesign, what: &str) {
    let report = analyse(design).unwrap_or_else(|e| panic!("{what}: analysis failed: {e}"));
    assert!(report.margins.len() >= 9, "{what}: only {} margins", report.margins.len());
    // Definition of a worst case: the least favourable value over a set that includes the
    // nominal point can never beat the nominal value (larger is better for every margin).
    for m in &report.margins {
        assert!(
            m.worst.is_finite() && m.nominal.is_finite(),
            "{what}: {} is not finite ({} / {})",
            m.title,
            m.nominal,
            m.worst
        );
        assert!(m.worst <= m.nominal, "{what}: {} worst {} beats nominal {}", m.title, m.worst, m.nominal);
    }
    for wc in &report.worst_case.margins {
        assert!(
            wc.worst <= wc.nominal,
            "{what}: search for {:?} returned {} above nominal {}",
            wc.kind,
            wc.worst,
            wc.nominal
        );
    }
}

#[test]
fn worst_case_is_never_better_than_nominal_on_the_demo() {
    check_worst_not_better(demo_design(), "demo");
}

#[test]
fn worst_case_is_never_better_than_nominal_in_self_bias() {
    check_worst_not_better(&self_bias_design(), "self-bias demo");
}

#[test]
fn worst_case_is_never_better_than_nominal_for_germanium_pnp() {
    check_worst_not_better(&germanium_design(), "germanium PNP");
}
