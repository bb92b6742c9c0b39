//! Source waveforms (constant, pulse train, piecewise linear): values and their corners.

use serde::{Deserialize, Serialize};

/// Bound on the search for the next corner of a pulse train: periods scanned forward from the
/// one that holds the query time. Two always suffice; the bound keeps the loop finite.
const CORNER_SEARCH_PERIODS: usize = 3;

/// Value of an independent source against time. The unit of every value is the source's own:
/// volts for a voltage source, amperes for a current source.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "shape", rename_all = "snake_case")]
pub enum Waveform {
    /// A constant value.
    Constant { value: f64 },
    /// `initial_value` until `delay_s`, then a linear rise over `rise_time_s` to
    /// `pulsed_value`, held for `width_s`, a linear fall over `fall_time_s`, back at
    /// `initial_value` until the period ends; repeats every `period_s`.
    PulseTrain {
        initial_value: f64,
        pulsed_value: f64,
        delay_s: f64,
        rise_time_s: f64,
        fall_time_s: f64,
        width_s: f64,
        period_s: f64,
    },
    /// Straight lines between `(time_s, value)` points with strictly increasing times; the
    /// first value holds before the first point and the last after the last point.
    PiecewiseLinear { points: Vec<(f64, f64)> },
}

/// `elapsed % period` for elapsed ≥ 0 and period > 0, by a floor and a product: `f64::floor`
/// is an instruction on wasm32, where `%` is a library call that took 2 % of a stage run
/// under Node. It differs from `%` only by the rounding of the product (an ulp of `elapsed`,
/// as the subtraction that gave `elapsed` already does); a result that rounding puts just
/// outside [0, period) is brought back in, and one further out (a quotient past 2⁵² or
/// overflowing, with an absurdly short period) is replaced by `%`'s.
#[inline]
fn phase(elapsed: f64, period: f64) -> f64 {
    let mut local = elapsed - (elapsed / period).floor() * period;
    if local < 0.0 {
        local = (local + period).min(period * (1.0 - f64::EPSILON));
    } else if local >= period {
        local = (local - period).max(0.0);
    }
    if local >= 0.0 && local < period {
        local
    } else {
        elapsed % period
    }
}

impl Waveform {
    /// The value at time `time_s` (before any scaling for source stepping).
    pub fn value_at(&self, time_s: f64) -> f64 {
        match self {
            Waveform::Constant { value } => *value,
            Waveform::PulseTrain {
                initial_value,
                pulsed_value,
                delay_s,
                rise_time_s,
                fall_time_s,
                width_s,
                period_s,
            } => {
                if time_s < *delay_s || !(*period_s > 0.0) {
                    return *initial_value;
                }
                let local = phase(time_s - delay_s, *period_s);
                let step = pulsed_value - initial_value;
                if local < *rise_time_s {
                    initial_value + step * local / rise_time_s
                } else if local < rise_time_s + width_s {
                    *pulsed_value
                } else if local < rise_time_s + width_s + fall_time_s {
                    pulsed_value - step * (local - rise_time_s - width_s) / fall_time_s
                } else {
                    *initial_value
                }
            }
            Waveform::PiecewiseLinear { points } => {
                let Some(&(first_t, first_v)) = points.first() else { return 0.0 };
                if time_s <= first_t {
                    return first_v;
                }
                for pair in points.windows(2) {
                    let (t0, v0) = pair[0];
                    let (t1, v1) = pair[1];
                    if time_s <= t1 {
                        let span = t1 - t0;
                        return if span > 0.0 { v0 + (v1 - v0) * (time_s - t0) / span } else { v1 };
                    }
                }
                points.last().map(|p| p.1).unwrap_or(first_v)
            }
        }
    }

    /// The first corner (slope discontinuity) strictly after `time_s`, if any. The integrator
    /// lands a step on every corner and restarts there, because the truncation-error estimate
    /// assumes smooth charges across a step.
    pub fn next_corner_after(&self, time_s: f64) -> Option<f64> {
        match self {
            Waveform::Constant { .. } => None,
            Waveform::PulseTrain { delay_s, rise_time_s, fall_time_s, width_s, period_s, .. } => {
                if !(*period_s > 0.0) {
                    return None;
                }
                let offsets = [0.0, *rise_time_s, rise_time_s + width_s, rise_time_s + width_s + fall_time_s];
                let first_period =
                    if time_s < *delay_s { 0.0 } else { ((time_s - delay_s) / period_s).floor() };
                for k in 0..CORNER_SEARCH_PERIODS {
                    let start = delay_s + (first_period + k as f64) * period_s;
                    for offset in offsets {
                        let corner = start + offset;
                        if corner > time_s {
                            return Some(corner);
                        }
                    }
                }
                None
            }
            Waveform::PiecewiseLinear { points } => points.iter().map(|p| p.0).find(|&t| t > time_s),
        }
    }

    /// Checks the waveform's numbers; returns (field, problem) pairs.
    pub(crate) fn problems(&self) -> Vec<(String, String)> {
        let mut found = Vec::new();
        let mut finite = |field: &str, value: f64| {
            if !value.is_finite() {
                found.push((field.to_string(), "must be a finite number".to_string()));
            }
        };
        match self {
            Waveform::Constant { value } => finite("value", *value),
            Waveform::PulseTrain {
                initial_value,
                pulsed_value,
                delay_s,
                rise_time_s,
                fall_time_s,
                width_s,
                period_s,
            } => {
                finite("initial_value", *initial_value);
                finite("pulsed_value", *pulsed_value);
                let times = [
                    ("delay_s", *delay_s),
                    ("rise_time_s", *rise_time_s),
                    ("fall_time_s", *fall_time_s),
                    ("width_s", *width_s),
                ];
                for (field, value) in times {
                    if !(value >= 0.0) || !value.is_finite() {
                        found.push((field.to_string(), "must be zero or a positive finite time".to_string()));
                    }
                }
                // A zero-length edge would be a jump; the integrator needs a ramp to follow.
                for (field, value) in [("rise_time_s", *rise_time_s), ("fall_time_s", *fall_time_s)] {
                    if value == 0.0 {
                        found.push((
                            field.to_string(),
                            "must be positive: give the edge a duration".to_string(),
                        ));
                    }
                }
                let busy = rise_time_s + width_s + fall_time_s;
                if !(*period_s > 0.0) || !period_s.is_finite() {
                    found.push(("period_s".to_string(), "must be a positive finite time".to_string()));
                } else if busy > *period_s {
                    found.push((
                        "period_s".to_string(),
                        format!("must be at least rise + width + fall = {busy:.4e} s"),
                    ));
                }
            }
            Waveform::PiecewiseLinear { points } => {
                if points.is_empty() {
                    found
                        .push(("points".to_string(), "needs at least one (time_s, value) point".to_string()));
                }
                for (index, &(t, v)) in points.iter().enumerate() {
                    if !t.is_finite() || !v.is_finite() || t < 0.0 {
                        found.push((
                            format!("points[{index}]"),
                            "time must be finite and not negative, value finite".to_string(),
                        ));
                    }
                }
                for (index, pair) in points.windows(2).enumerate() {
                    if !(pair[1].0 > pair[0].0) {
                        found.push((
                            format!("points[{}]", index + 1),
                            "times must increase strictly".to_string(),
                        ));
                    }
                }
            }
        }
        found
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pulse() -> Waveform {
        Waveform::PulseTrain {
            initial_value: 1.0,
            pulsed_value: 5.0,
            delay_s: 1.0,
            rise_time_s: 0.5,
            fall_time_s: 0.5,
            width_s: 2.0,
            period_s: 5.0,
        }
    }

    #[test]
    fn pulse_values_follow_the_definition() {
        let w = pulse();
        // Hand-computed from the definition above.
        for (t, expected) in [(0.0, 1.0), (1.25, 3.0), (2.0, 5.0), (3.75, 3.0), (4.5, 1.0), (6.25, 3.0)] {
            assert!((w.value_at(t) - expected).abs() < 1e-12, "t = {t}: {}", w.value_at(t));
        }
    }

    #[test]
    fn the_phase_matches_the_remainder_to_an_ulp_of_the_elapsed_time() {
        // Against `%` (IEEE 754's exact fmod), over a thousand periods of 10 µs at uneven
        // times and at multiples of the period, where the remainder is 0.
        let period = 10e-6;
        for i in 0..100_000 {
            let elapsed = i as f64 * 0.1234567e-6;
            let (local, exact) = (phase(elapsed, period), elapsed % period);
            assert!((0.0..period).contains(&local), "{elapsed}: {local}");
            let gap = (local - exact).abs().min(period - (local - exact).abs());
            assert!(gap <= 2.0 * f64::EPSILON * elapsed, "{elapsed}: {local} vs {exact}");
        }
        for n in 0..1000 {
            let elapsed = n as f64 * period;
            let local = phase(elapsed, period);
            assert!(local.min(period - local) <= 2.0 * f64::EPSILON * elapsed, "{elapsed}: {local}");
        }
        // A period so short that the quotient overflows: `%`'s answer, not −∞.
        assert_eq!(phase(1.0, 1e-310), 1.0 % 1e-310);
        assert!((0.0..1e-300).contains(&phase(1.0, 1e-300)));
    }

    #[test]
    fn pulse_corners_repeat_every_period() {
        let w = pulse();
        let mut t = 0.0;
        let mut corners = Vec::new();
        for _ in 0..8 {
            match w.next_corner_after(t) {
                Some(c) => {
                    corners.push(c);
                    t = c;
                }
                None => break,
            }
        }
        assert_eq!(corners, vec![1.0, 1.5, 3.5, 4.0, 6.0, 6.5, 8.5, 9.0]);
    }

    #[test]
    fn piecewise_linear_interpolates_and_holds() {
        let w = Waveform::PiecewiseLinear { points: vec![(1.0, 0.0), (2.0, 4.0), (4.0, 0.0)] };
        for (t, expected) in [(0.0, 0.0), (1.5, 2.0), (3.0, 2.0), (9.0, 0.0)] {
            assert!((w.value_at(t) - expected).abs() < 1e-12);
        }
        assert_eq!(w.next_corner_after(2.0), Some(4.0));
        assert_eq!(w.next_corner_after(4.0), None);
    }
}
