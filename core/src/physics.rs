//! Physical constants (CODATA 2018 exact values) and the thermal voltage.

/// Boltzmann constant, J/K (CODATA 2018, exact since the 2019 SI redefinition).
pub const BOLTZMANN_J_PER_K: f64 = 1.380_649e-23;
/// Elementary charge, C (CODATA 2018, exact).
pub const ELEMENTARY_CHARGE_C: f64 = 1.602_176_634e-19;
/// Offset between the Celsius and Kelvin scales.
pub const ZERO_CELSIUS_K: f64 = 273.15;
/// Reference temperature of datasheet values, °C.
pub const REFERENCE_TEMPERATURE_C: f64 = 25.0;

/// Kelvin from degrees Celsius.
pub fn kelvin(temperature_c: f64) -> f64 {
    temperature_c + ZERO_CELSIUS_K
}

/// Thermal voltage kT/q in volts at a temperature in °C.
pub fn thermal_voltage(temperature_c: f64) -> f64 {
    BOLTZMANN_J_PER_K * kelvin(temperature_c) / ELEMENTARY_CHARGE_C
}
