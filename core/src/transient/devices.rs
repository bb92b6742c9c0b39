//! Junction laws shared by the diode and transistor stamps: depletion charge, diffusion
//! current, and the Newton junction-voltage limit.

use crate::device::ebers_moll::limited_exp;
use crate::numeric::elementary::pow_positive;

/// Fraction of the junction potential beyond which Cj0/(1 − V/φ)^m is continued linearly
/// (the domain brief: "linearised past about half of φ"); keeps charge finite at V ≥ φ.
pub const DEPLETION_LINEAR_FRACTION: f64 = 0.5;

/// Depletion charge and capacitance (q, dq/dV) of Cj0/(1 − V/φ)^m, with the capacitance
/// continued as its tangent line beyond V = ½φ (standard textbook continuation).
pub fn depletion_charge(voltage_v: f64, zero_bias_f: f64, potential_v: f64, grading: f64) -> (f64, f64) {
    DepletionLaw::new(zero_bias_f, potential_v, grading).charge(voltage_v)
}

/// One junction's depletion law with what does not depend on the voltage worked out once: a
/// forward-biased junction (a saturated transistor's two, a conducting diode) is past the
/// knee at every evaluation, where the power (1 − fc)^(−m) and the knee's charge are
/// constants.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DepletionLaw {
    zero_bias_f: f64,
    potential_v: f64,
    grading: f64,
    knee_v: f64,
    knee_charge_c: f64,
    /// Capacitance per unit of the linear continuation: Cj0·(1 − fc)^(−m)/(1 − fc).
    scale_f: f64,
}

impl DepletionLaw {
    pub fn new(zero_bias_f: f64, potential_v: f64, grading: f64) -> DepletionLaw {
        let fc = DEPLETION_LINEAR_FRACTION;
        let (m, phi) = (grading, potential_v);
        // (1 − fc)^(1 + m) = (1 − fc)/(1 − fc)^(−m).
        let inverse = inverse_power(1.0 - fc, m);
        DepletionLaw {
            zero_bias_f,
            potential_v,
            grading,
            knee_v: fc * phi,
            knee_charge_c: zero_bias_f * phi / (1.0 - m) * (1.0 - (1.0 - fc) * inverse),
            scale_f: zero_bias_f * inverse / (1.0 - fc),
        }
    }

    /// (q, dq/dV) at `voltage_v`, as [`depletion_charge`].
    pub fn charge(&self, voltage_v: f64) -> (f64, f64) {
        if self.zero_bias_f == 0.0 {
            return (0.0, 0.0);
        }
        let fc = DEPLETION_LINEAR_FRACTION;
        let (m, phi, knee_v) = (self.grading, self.potential_v, self.knee_v);
        // One power per call below the knee: x^(1 − m) = x·x^(−m) (a power is the costliest
        // operation of a junction on wasm32).
        if voltage_v < knee_v {
            let x = 1.0 - voltage_v / phi;
            let inverse = inverse_power(x, m);
            let charge = self.zero_bias_f * phi / (1.0 - m) * (1.0 - x * inverse);
            (charge, self.zero_bias_f * inverse)
        } else {
            let scale = self.scale_f;
            let dv = voltage_v - knee_v;
            let charge = self.knee_charge_c
                + scale
                    * ((1.0 - fc * (1.0 + m)) * dv + m / (2.0 * phi) * (voltage_v.powi(2) - knee_v.powi(2)));
            (charge, scale * (1.0 - fc * (1.0 + m) + m * voltage_v / phi))
        }
    }
}

/// x^(−m) for x > 0: by a square root for the abrupt junction's m = ½ (the diodes the
/// verification builds), which is one instruction on wasm32 and within an ulp of the power;
/// otherwise by [`pow_positive`] (table-driven on wasm32, where a library power is a costly
/// call).
fn inverse_power(x: f64, m: f64) -> f64 {
    if m == 0.5 {
        1.0 / x.sqrt()
    } else {
        pow_positive(x, -m)
    }
}

/// I = IS·(e^(V/(n·VT)) − 1) and its derivative.
pub fn junction_current(voltage_v: f64, saturation_current_a: f64, n_vt: f64) -> (f64, f64) {
    let (e, de) = limited_exp(voltage_v / n_vt);
    (saturation_current_a * (e - 1.0), saturation_current_a * de / n_vt)
}

/// Voltage above which the junction law is steep enough to need limiting:
/// n·VT·ln(n·VT/(√2·IS)), where the current's curvature radius is smallest.
pub fn critical_voltage(saturation_current_a: f64, n_vt: f64) -> f64 {
    n_vt * (n_vt / (std::f64::consts::SQRT_2 * saturation_current_a)).ln()
}

/// Limits a proposed junction voltage against the previous iterate (logarithmic damping of
/// forward steps, Nagel 1975): an exponential overshoots badly when Newton extrapolates it
/// linearly from far below. Returns the voltage to evaluate at and whether it was limited.
pub fn limit_junction_voltage(proposed_v: f64, previous_v: f64, n_vt: f64, critical_v: f64) -> (f64, bool) {
    if !proposed_v.is_finite() {
        return (previous_v, true);
    }
    if proposed_v > critical_v && (proposed_v - previous_v).abs() > 2.0 * n_vt {
        let limited = if previous_v > 0.0 {
            let argument = 1.0 + (proposed_v - previous_v) / n_vt;
            if argument > 0.0 {
                previous_v + n_vt * argument.ln()
            } else {
                critical_v
            }
        } else {
            n_vt * (proposed_v / n_vt).ln()
        };
        return (limited, true);
    }
    (proposed_v, false)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn depletion_charge_is_continuous_and_its_slope_is_the_capacitance() {
        let (cj0, phi, m) = (2e-12, 0.75, 0.33);
        let knee = DEPLETION_LINEAR_FRACTION * phi;
        let below = depletion_charge(knee - 1e-9, cj0, phi, m);
        let above = depletion_charge(knee + 1e-9, cj0, phi, m);
        assert!((below.0 - above.0).abs() < 1e-20 && (below.1 - above.1).abs() < 1e-17);
        // Central difference of the charge against the returned capacitance, both branches.
        for v in [-5.0, -0.5, 0.0, 0.3, 0.5, 1.2] {
            let h = 1e-6;
            let numeric =
                (depletion_charge(v + h, cj0, phi, m).0 - depletion_charge(v - h, cj0, phi, m).0) / (2.0 * h);
            let analytic = depletion_charge(v, cj0, phi, m).1;
            assert!((numeric - analytic).abs() < 1e-6 * analytic, "v = {v}: {numeric} vs {analytic}");
        }
        // At zero bias the capacitance is Cj0 by definition.
        assert!((depletion_charge(0.0, cj0, phi, m).1 - cj0).abs() < 1e-24);
        // The square-root path of m = ½ against the textbook formulas written with powers:
        // C = Cj0·(1 − V/φ)^(−m), q = Cj0·φ/(1 − m)·(1 − (1 − V/φ)^(1 − m)) below the knee.
        for v in [-5.0, -0.5, 0.0, 0.2, 0.3] {
            let (q, c) = depletion_charge(v, cj0, phi, 0.5);
            let x: f64 = 1.0 - v / phi;
            let (c_power, q_power) = (cj0 * x.powf(-0.5), cj0 * phi / 0.5 * (1.0 - x.powf(0.5)));
            assert!((c - c_power).abs() <= 1e-14 * c_power, "v = {v}: {c} vs {c_power}");
            assert!((q - q_power).abs() <= 1e-13 * q_power.abs().max(cj0 * phi), "v = {v}: {q} vs {q_power}");
        }
    }

    #[test]
    fn limiting_compresses_large_forward_steps_only() {
        let n_vt = 0.02585;
        let critical = critical_voltage(1e-14, n_vt);
        let (v, limited) = limit_junction_voltage(5.0, 0.6, n_vt, critical);
        assert!(limited && v < 0.8 && v > 0.6, "{v}");
        let (v, limited) = limit_junction_voltage(0.61, 0.6, n_vt, critical);
        assert!(!limited && v == 0.61);
        let (v, limited) = limit_junction_voltage(-3.0, 0.6, n_vt, critical);
        assert!(!limited && v == -3.0);
    }
}
