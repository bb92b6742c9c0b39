//! Checks of the Ebers–Moll model: saturation voltage (Jaeger & Blalock), datasheet derivation, Moll's storage constant and IS(T).

use flipwright::device::archetypes::{self, TRANSISTOR_ARCHETYPE_IDS};
use flipwright::device::ebers_moll::{
    saturation_voltage, scale_saturation_current, storage_time_constant, EbersMoll,
};
use flipwright::device::Polarity;

use crate::handbook::assert_relative;

/// CODATA 2018 exact constants, written here so the test does not lean on the library's.
const K: f64 = 1.380_649e-23;
const Q: f64 = 1.602_176_634e-19;

fn vt(celsius: f64) -> f64 {
    K * (celsius + 273.15) / Q
}

/// Jaeger & Blalock, *Microelectronic Circuit Design* (also Hodges & Jackson):
/// VCE(sat) = VT·ln{[1 + (βf + 1)/βR] / [1 − βf/βF]}, evaluated in the test.
fn jaeger_blalock(vt: f64, forced: f64, beta_f: f64, beta_r: f64) -> f64 {
    vt * ((1.0 + (forced + 1.0) / beta_r) / (1.0 - forced / beta_f)).ln()
}

/// A plain intrinsic model (no leakage, no series resistances) at `celsius`.
fn intrinsic(beta_f: f64, beta_r: f64, celsius: f64) -> EbersMoll {
    EbersMoll {
        polarity: Polarity::Npn,
        temperature_c: celsius,
        saturation_current_a: 1e-14,
        beta_forward: beta_f,
        beta_reverse: beta_r,
        forward_transit_s: 0.5e-9,
        reverse_transit_s: 50e-9,
        emitter_junction_capacitance_f: 0.0,
        collector_junction_capacitance_f: 0.0,
        emitter_junction_potential_v: 0.75,
        collector_junction_potential_v: 0.75,
        junction_grading: 0.33,
        base_resistance_ohm: 0.0,
        collector_resistance_ohm: 0.0,
        leakage_a: 0.0,
        band_gap_ev: 1.11,
    }
}

/// Bisection on an increasing function `f` for `f(x) = target` in [low, high].
fn solve_increasing(mut f: impl FnMut(f64) -> f64, target: f64, mut low: f64, mut high: f64) -> f64 {
    assert!(f(low) < target && f(high) > target, "not bracketed");
    for _ in 0..200 {
        let middle = 0.5 * (low + high);
        if f(middle) < target {
            low = middle;
        } else {
            high = middle;
        }
        if high - low < 1e-15 {
            break;
        }
    }
    0.5 * (low + high)
}

/// Junction voltages (VBE, VBC) at which `model.evaluate` gives IC = `ic` and IB = `ib`,
/// found independently of the library: for each trial VCE, bisect VBE (with VBC = VBE − VCE)
/// to give IB; then bisect VCE until IC matches (at fixed IB, IC rises from below zero at
/// VCE = 0 towards βF·IB in the active region).
fn saturated_junctions(model: &EbersMoll, ic: f64, ib: f64) -> (f64, f64) {
    let vbe_for =
        |vce: f64| solve_increasing(|vbe| model.evaluate(vbe, vbe - vce).base_current_a, ib, -0.5, 1.5);
    let vce = solve_increasing(
        |vce| model.evaluate(vbe_for(vce), vbe_for(vce) - vce).collector_current_a,
        ic,
        0.0,
        1.0,
    );
    let vbe = vbe_for(vce);
    (vbe, vbe - vce)
}

#[test]
fn saturation_voltage_matches_jaeger_blalock_stated_case() {
    // βF 100, βR 1, βf 10, VT 25.85 mV: 25.85 mV·ln(12/0.9) = 66.958 mV (hand-evaluated; the
    // tolerance is half a unit of the 5th figure).
    let got = saturation_voltage(25.85e-3, 10.0, 100.0, 1.0).expect("βf < βF saturates");
    assert!((got - 66.958e-3).abs() < 0.5e-6, "VCE(sat) {got}");
    // Same formula, other cases, against the test's own evaluation (1e-12: same arithmetic
    // up to operation order).
    for (forced, beta_f, beta_r) in
        [(10.0, 100.0, 1.0), (1.0, 50.0, 0.1), (40.0, 50.0, 5.0), (5.0, 300.0, 0.02)]
    {
        let v = vt(25.0);
        let got = saturation_voltage(v, forced, beta_f, beta_r).expect("saturated");
        assert_relative(
            got,
            jaeger_blalock(v, forced, beta_f, beta_r),
            1e-12,
            &format!("βf {forced}, βF {beta_f}, βR {beta_r}"),
        );
    }
}

#[test]
fn saturation_voltage_is_undefined_at_or_beyond_the_forward_gain() {
    // βf ≥ βF: the denominator 1 − βf/βF ≤ 0, the transistor is not saturated (Jaeger & Blalock).
    assert!(saturation_voltage(25.85e-3, 100.0, 100.0, 1.0).is_none());
    assert!(saturation_voltage(25.85e-3, 150.0, 100.0, 1.0).is_none());
}

#[test]
fn ebers_moll_equations_solved_numerically_give_the_closed_form_saturation_voltage() {
    // Solving the Ebers–Moll equations (Ebers & Moll 1954, as in `evaluate`) for a forced
    // IC/IB must land on the closed form, which is derived from the same equations with the
    // "−1" terms dropped; these are IS/IB ≈ 1e-10 relative, i.e. far below the 1 µV tolerance.
    for (celsius, forced, beta_f, beta_r, ic) in [
        (25.0, 10.0, 100.0, 1.0, 1e-3),
        (25.0, 10.0, 120.0, 0.25, 10e-3),
        (75.0, 30.0, 60.0, 2.0, 5e-3),
        (-40.0, 5.0, 40.0, 0.05, 2e-3),
    ] {
        let model = intrinsic(beta_f, beta_r, celsius);
        let (vbe, vbc) = saturated_junctions(&model, ic, ic / forced);
        let expected = jaeger_blalock(vt(celsius), forced, beta_f, beta_r);
        let got = vbe - vbc;
        assert!(
            (got - expected).abs() < 1e-6,
            "{celsius} °C, βf {forced}, βF {beta_f}, βR {beta_r}: numerical VCE(sat) {got} V, closed form {expected} V"
        );
    }
}

#[test]
fn derived_models_reproduce_the_archetype_saturation_data() {
    for id in TRANSISTOR_ARCHETYPE_IDS {
        let sheet = archetypes::transistor(id).expect("listed archetype");
        let model = EbersMoll::from_datasheet(&sheet).unwrap_or_else(|| panic!("{id}: no model")).model;
        let ic = sheet.sat_test_current_a;
        let (vbe, vbc) = saturated_junctions(&model, ic, ic / sheet.sat_forced_gain);
        // VBE(sat) at the datasheet test point: IS is fitted to it, so the model must land
        // within 5 mV (the fit drops the −1 terms and the leakage, which move VBE by well under
        // 1 mV; 5 mV is the resolution a datasheet quotes VBE(sat) to).
        assert!(
            (vbe - sheet.vbe_sat_typ_v).abs() < 5e-3,
            "{id}: VBE at the saturation test point {vbe:.4} V, datasheet {} V",
            sheet.vbe_sat_typ_v
        );
        // VCE(sat) = intrinsic VCE + IC·RC(series): within 1 mV of the datasheet value.
        let vce = vbe - vbc + ic * model.collector_resistance_ohm;
        assert!(
            (vce - sheet.vce_sat_typ_v).abs() < 1e-3,
            "{id}: VCE(sat) {vce:.4} V, datasheet {} V",
            sheet.vce_sat_typ_v
        );
    }
}

#[test]
fn derived_models_reproduce_the_datasheet_storage_constant_by_molls_relation() {
    for id in TRANSISTOR_ARCHETYPE_IDS {
        let sheet = archetypes::transistor(id).expect("listed archetype");
        let model = EbersMoll::from_datasheet(&sheet).unwrap_or_else(|| panic!("{id}: no model")).model;
        let tau_s = sheet.storage_time_constant().expect("archetypes give τS");
        assert!(model.reverse_transit_s > 0.0, "{id}: τR clamped to zero, relation cannot hold");
        // Round trip through the library's transit-time form.
        assert_relative(storage_time_constant(&model), tau_s, 1e-9, &format!("{id}: τS from derived τF, τR"));
        // Moll (Proc. IRE 1954) in his own terms: τS = (ωN + ωI)/(ωN·ωI·(1 − αN·αI)), with the
        // alpha cut-off frequencies from the transit times by charge control: ωT = 1/τF and
        // ωN = ωT/αN (likewise ωI = 1/(αI·τR)).
        let alpha_n = model.beta_forward / (1.0 + model.beta_forward);
        let alpha_i = model.beta_reverse / (1.0 + model.beta_reverse);
        let omega_n = 1.0 / (alpha_n * model.forward_transit_s);
        let omega_i = 1.0 / (alpha_i * model.reverse_transit_s);
        let moll = (omega_n + omega_i) / (omega_n * omega_i * (1.0 - alpha_n * alpha_i));
        assert_relative(moll, tau_s, 1e-9, &format!("{id}: Moll's frequency form"));
        // τF = 1/(2π·fT) (domain brief §4, common practice).
        assert_relative(
            model.forward_transit_s,
            1.0 / (2.0 * std::f64::consts::PI * sheet.ft_hz),
            1e-12,
            &format!("{id}: τF"),
        );
    }
}

/// IS(T) = IS(T0)·(T/T0)³·exp[(Eg/VT0)·(1 − T0/T)] (standard device-physics texts), in the test.
fn is_ratio(t0_c: f64, t_c: f64, eg: f64) -> f64 {
    let (t0, t) = (t0_c + 273.15, t_c + 273.15);
    (t / t0).powi(3) * ((eg / vt(t0_c)) * (1.0 - t0 / t)).exp()
}

#[test]
fn saturation_current_follows_the_band_gap_law() {
    for (t0, t, eg, label) in [
        (25.0, 35.0, 1.11, "Si 25→35 °C"),
        (25.0, 125.0, 1.11, "Si 25→125 °C"),
        (25.0, -55.0, 1.11, "Si 25→−55 °C"),
        (25.0, 35.0, 0.67, "Ge 25→35 °C"),
        (0.0, 60.0, 0.67, "Ge 0→60 °C"),
    ] {
        // 1e-12 relative: the same law, evaluated independently (different operation order).
        assert_relative(scale_saturation_current(1.0, t0, t, eg, 1.0), is_ratio(t0, t, eg), 1e-12, label);
    }
    // Value from memory: silicon IS roughly doubles every 5–6 °C near room temperature, so
    // 10 °C gives about 4× (accepted: 3.5×–5.5×).
    let ratio = scale_saturation_current(1.0, 25.0, 35.0, 1.11, 1.0);
    assert!((3.5..=5.5).contains(&ratio), "Si IS(35 °C)/IS(25 °C) = {ratio}");
    // The model's own temperature scaling uses the same law (emission coefficient 1).
    let model = intrinsic(100.0, 1.0, 25.0);
    let hot = model.at_temperature(35.0, 0.0, 10.0);
    assert_relative(
        hot.saturation_current_a / model.saturation_current_a,
        is_ratio(25.0, 35.0, 1.11),
        1e-12,
        "at_temperature",
    );
    assert_eq!(hot.temperature_c, 35.0);
}

#[test]
fn base_emitter_voltage_falls_about_two_millivolts_per_degree() {
    // Common practice (Sedra & Smith): VBE at constant current falls about 2 mV/°C for
    // silicon; accepted −1.5 … −2.5 mV/°C. Checked on the derived silicon archetype model
    // between 25 and 35 °C at 1 mA, in the forward-active region (VBC = −2 V).
    let sheet = archetypes::transistor("si-npn-switch-40v").expect("archetype");
    let model = EbersMoll::from_datasheet(&sheet).expect("model").model;
    let vbe_at = |m: &EbersMoll| {
        solve_increasing(|vbe| m.evaluate(vbe, vbe - 2.0).collector_current_a, 1e-3, 0.0, 1.2)
    };
    let cold = vbe_at(&model);
    let hot = vbe_at(&model.at_temperature(35.0, sheet.hfe_tempco_per_c, sheet.icbo_doubling_c));
    let slope = (hot - cold) / 10.0;
    assert!((-2.5e-3..=-1.5e-3).contains(&slope), "dVBE/dT = {:.3} mV/°C", slope * 1e3);
}
