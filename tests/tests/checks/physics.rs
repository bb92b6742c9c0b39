//! Checks of the physical constants and the thermal voltage kT/q against CODATA 2018.

use flipwright::physics::{kelvin, thermal_voltage, BOLTZMANN_J_PER_K, ELEMENTARY_CHARGE_C, ZERO_CELSIUS_K};

/// CODATA 2018 (exact since the 2019 SI redefinition): k = 1.380 649 × 10⁻²³ J/K.
const CODATA_K: f64 = 1.380_649e-23;
/// CODATA 2018 (exact): e = 1.602 176 634 × 10⁻¹⁹ C.
const CODATA_Q: f64 = 1.602_176_634e-19;

/// kT/q in volts at `kelvin_t`, from the constants written in this file.
fn reference_vt(kelvin_t: f64) -> f64 {
    CODATA_K * kelvin_t / CODATA_Q
}

/// Demands `thermal_voltage(celsius)` within `tolerance_v` of `expected_v`.
fn check(celsius: f64, expected_v: f64, tolerance_v: f64, source: &str) {
    let got = thermal_voltage(celsius);
    assert!(
        (got - expected_v).abs() <= tolerance_v,
        "VT at {celsius} °C = {got:.9} V, expected {expected_v:.9} V ± {tolerance_v:e} V ({source})"
    );
}

#[test]
fn constants_are_the_codata_2018_exact_values() {
    // CODATA 2018 / SI Brochure 9th ed.: both are exact defining constants, so the stored
    // values must be the same decimal literals (bit-identical f64).
    assert_eq!(BOLTZMANN_J_PER_K, CODATA_K);
    assert_eq!(ELEMENTARY_CHARGE_C, CODATA_Q);
    // SI Brochure: t/°C = T/K − 273.15 (definition of the Celsius scale).
    assert_eq!(ZERO_CELSIUS_K, 273.15);
    assert_eq!(kelvin(0.0), 273.15);
    assert_eq!(kelvin(-273.15), 0.0);
}

#[test]
fn thermal_voltage_at_300_kelvin_is_25_852_millivolts() {
    // 300 K = 26.85 °C. Computed here from the CODATA constants: a different operation order
    // from the library's may differ by an ulp or two, hence 1e-15 V (≈ 4e-14 relative).
    let t_c = 300.0 - 273.15;
    check(t_c, reference_vt(300.0), 1e-15, "CODATA 2018, computed in the test");
    // CODATA 2018: k/e = 8.617 333 262… × 10⁻⁵ V/K, so VT(300 K) = 25.8520 mV to 5 digits
    // (half a unit in the 5th digit: 0.05 µV).
    check(t_c, 25.8520e-3, 0.05e-6, "CODATA 2018, 5 significant digits");
    // Value from memory: "VT is 25.85 mV at 300 K", good to ±0.01 mV.
    check(t_c, 25.85e-3, 0.01e-3, "value from memory");
}

#[test]
fn thermal_voltage_at_25_celsius_is_25_693_millivolts() {
    // 25 °C = 298.15 K; CODATA 2018 gives 25.6926 mV, i.e. 25.693 mV to 5 digits (±0.5 µV).
    check(25.0, reference_vt(298.15), 1e-15, "CODATA 2018, computed in the test");
    check(25.0, 25.693e-3, 0.5e-6, "CODATA 2018, 5 significant digits");
}

#[test]
fn thermal_voltage_is_proportional_to_absolute_temperature() {
    // VT = kT/q is linear through absolute zero (definition): check a few temperatures over
    // the full range a stage is specified for, each against the constants of this file.
    for (celsius, kelvin_t) in [(-55.0, 218.15), (0.0, 273.15), (85.0, 358.15), (125.0, 398.15)] {
        check(celsius, reference_vt(kelvin_t), 1e-15, "CODATA 2018, computed in the test");
    }
    // Slope k/q = 86.173 µV/K (CODATA 2018), over 100 K.
    let slope = (thermal_voltage(125.0) - thermal_voltage(25.0)) / 100.0;
    assert!((slope - 86.173_33e-6).abs() < 1e-10, "slope {slope:e} V/K");
}
