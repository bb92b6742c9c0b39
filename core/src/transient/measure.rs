//! Measurements on simulated waveforms: threshold crossings, delays, 10–90 % edges, toggles.

use serde::Serialize;

/// Direction of a crossing.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Edge {
    Rising,
    Falling,
    Either,
}

/// Why a measurement has no value.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum MeasureError {
    /// Occurs when the time and value series differ in length.
    LengthMismatch { times: usize, values: usize },
    /// Occurs when the waveform never does what the measurement looks for.
    NotFound { what: String },
}

impl std::fmt::Display for MeasureError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            MeasureError::LengthMismatch { times, values } => {
                write!(f, "{times} time points but {values} values: pass one waveform's own series")
            }
            MeasureError::NotFound { what } => {
                write!(f, "the waveform has no {what}: run longer or check the thresholds")
            }
        }
    }
}

fn check_lengths(times: &[f64], values: &[f64]) -> Result<(), MeasureError> {
    if times.len() != values.len() {
        return Err(MeasureError::LengthMismatch { times: times.len(), values: values.len() });
    }
    Ok(())
}

/// Every time the waveform crosses `threshold` in the given direction, by linear
/// interpolation between the bracketing points (the integrator's points are dense enough near
/// edges for this to be within its own error).
pub fn crossings(
    times: &[f64],
    values: &[f64],
    threshold: f64,
    edge: Edge,
) -> Result<Vec<f64>, MeasureError> {
    check_lengths(times, values)?;
    let mut found = Vec::new();
    for (t, v) in times.windows(2).zip(values.windows(2)) {
        let (below0, below1) = (v[0] < threshold, v[1] < threshold);
        if below0 == below1 {
            continue;
        }
        let rising = below0;
        let wanted = match edge {
            Edge::Rising => rising,
            Edge::Falling => !rising,
            Edge::Either => true,
        };
        if wanted {
            let fraction = (threshold - v[0]) / (v[1] - v[0]);
            found.push(t[0] + fraction * (t[1] - t[0]));
        }
    }
    Ok(found)
}

/// The first crossing at or after `after_s`.
pub fn first_crossing_after(
    times: &[f64],
    values: &[f64],
    threshold: f64,
    edge: Edge,
    after_s: f64,
) -> Result<f64, MeasureError> {
    crossings(times, values, threshold, edge)?.into_iter().find(|&t| t >= after_s).ok_or_else(|| {
        MeasureError::NotFound { what: format!("{edge:?} crossing of {threshold} after {after_s:e} s") }
    })
}

/// Delay from the first `edge_from` crossing of `from_threshold` by `from` (at or after
/// `after_s`) to the next `edge_to` crossing of `to_threshold` by `to`. Both waveforms share
/// `times`.
#[allow(clippy::too_many_arguments)]
pub fn delay(
    times: &[f64],
    from: &[f64],
    from_threshold: f64,
    edge_from: Edge,
    to: &[f64],
    to_threshold: f64,
    edge_to: Edge,
    after_s: f64,
) -> Result<f64, MeasureError> {
    let start = first_crossing_after(times, from, from_threshold, edge_from, after_s)?;
    let end = first_crossing_after(times, to, to_threshold, edge_to, start)?;
    Ok(end - start)
}

/// 10–90 % rise time of the first rising edge after `after_s` between levels `low` and
/// `high`; the 90 % crossing is the first one after the 10 % crossing.
pub fn rise_time_10_90(
    times: &[f64],
    values: &[f64],
    low: f64,
    high: f64,
    after_s: f64,
) -> Result<f64, MeasureError> {
    let span = high - low;
    let t10 = first_crossing_after(times, values, low + 0.1 * span, Edge::Rising, after_s)?;
    let t90 = first_crossing_after(times, values, low + 0.9 * span, Edge::Rising, t10)?;
    Ok(t90 - t10)
}

/// 90–10 % fall time of the first falling edge after `after_s` between `low` and `high`.
pub fn fall_time_90_10(
    times: &[f64],
    values: &[f64],
    low: f64,
    high: f64,
    after_s: f64,
) -> Result<f64, MeasureError> {
    let span = high - low;
    let t90 = first_crossing_after(times, values, low + 0.9 * span, Edge::Falling, after_s)?;
    let t10 = first_crossing_after(times, values, low + 0.1 * span, Edge::Falling, t90)?;
    Ok(t10 - t90)
}

/// Mean period and duty cycle of a two-state waveform after `after_s`, with hysteresis: the
/// state goes high above `high` and low below `low`, and each change is timed at the last
/// crossing of the middle, (low + high)/2, before it, so spikes that do not complete a change
/// are ignored. The period is the mean spacing of successive rising changes, the duty cycle
/// the mean share of those periods spent high (the pulse-period and duty-factor definitions
/// of IEEE Std 181, from memory). Needs at least two rising changes.
pub fn period_and_duty(
    times: &[f64],
    values: &[f64],
    low: f64,
    high: f64,
    after_s: f64,
) -> Result<(f64, f64), MeasureError> {
    check_lengths(times, values)?;
    let middle = 0.5 * (low + high);
    let mut state_high = values.first().is_some_and(|&v| v > middle);
    let mut last_middle = times.first().copied().unwrap_or(0.0);
    let mut rising = Vec::new();
    let mut falling = Vec::new();
    for (t, v) in times.windows(2).zip(values.windows(2)) {
        if (v[0] < middle) != (v[1] < middle) {
            last_middle = t[0] + (middle - v[0]) / (v[1] - v[0]) * (t[1] - t[0]);
        }
        if !state_high && v[1] > high {
            state_high = true;
            rising.push(last_middle);
        } else if state_high && v[1] < low {
            state_high = false;
            falling.push(last_middle);
        }
    }
    rising.retain(|&t| t >= after_s);
    let (Some(&first), Some(&last)) = (rising.first(), rising.last()) else {
        return Err(MeasureError::NotFound { what: "rising change of state".to_string() });
    };
    if rising.len() < 2 {
        return Err(MeasureError::NotFound { what: "second rising change (a full period)".to_string() });
    }
    let mut high_time = 0.0;
    for pair in rising.windows(2) {
        let fall = falling.iter().copied().find(|&t| t > pair[0] && t <= pair[1]).unwrap_or(pair[1]);
        high_time += fall - pair[0];
    }
    let span = last - first;
    Ok((span / (rising.len() - 1) as f64, high_time / span))
}

/// Number of changes of logic state with hysteresis: the state goes high above `high` and low
/// below `low`, so noise between the two is not counted. The starting state is not a toggle.
pub fn toggle_count(values: &[f64], low: f64, high: f64) -> usize {
    let mut state: Option<bool> = None;
    let mut toggles = 0;
    for &v in values {
        let next = if v > high {
            Some(true)
        } else if v < low {
            Some(false)
        } else {
            state
        };
        if let (Some(old), Some(new)) = (state, next) {
            if old != new {
                toggles += 1;
            }
        }
        state = next;
    }
    toggles
}

/// Bins of the histogram that finds the state levels.
const LEVEL_HISTOGRAM_BINS: usize = 100;
/// The second state level is looked for at least this fraction of the range from the first.
const LEVEL_SEPARATION: f64 = 0.25;

/// The two state levels (low, high) of a two-state waveform by the histogram method of
/// IEEE Std 181 (transitions, pulses and related waveforms; from memory): a level is where the
/// waveform spends the most time, so overshoot and coupled spikes do not move it the way they
/// move min and max. Adapted: instead of splitting the range at its middle, the second level is
/// the most-visited one at least a quarter of the range away from the first, so a node whose
/// spikes reach far beyond one state still gets that state's level. Time-weighted, because the
/// integrator's points crowd at the edges.
pub fn state_levels(times: &[f64], values: &[f64]) -> Result<(f64, f64), MeasureError> {
    check_lengths(times, values)?;
    let min = values.iter().copied().fold(f64::INFINITY, f64::min);
    let max = values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    if !(min <= max) || times.len() < 2 {
        return Err(MeasureError::NotFound { what: "two or more points".to_string() });
    }
    let range = max - min;
    if !(range > 0.0) {
        return Ok((min, max));
    }
    // Per bin: total time and time-weighted sum of values (for a level finer than a bin).
    let mut weight = [0.0f64; LEVEL_HISTOGRAM_BINS];
    let mut weighted_sum = [0.0f64; LEVEL_HISTOGRAM_BINS];
    let last = times.len() - 1;
    for (i, &v) in values.iter().enumerate() {
        let before = if i > 0 { times[i] - times[i - 1] } else { 0.0 };
        let after = if i < last { times[i + 1] - times[i] } else { 0.0 };
        let dt = 0.5 * (before + after);
        let bin = (((v - min) / range) * LEVEL_HISTOGRAM_BINS as f64) as usize;
        let bin = bin.min(LEVEL_HISTOGRAM_BINS - 1);
        weight[bin] += dt;
        weighted_sum[bin] += dt * v;
    }
    let level = |bin: usize| if weight[bin] > 0.0 { weighted_sum[bin] / weight[bin] } else { min };
    let modal = |allowed: &dyn Fn(usize) -> bool| {
        (0..LEVEL_HISTOGRAM_BINS).filter(|&b| allowed(b)).max_by(|&a, &b| weight[a].total_cmp(&weight[b]))
    };
    let Some(first) = modal(&|_| true) else { return Ok((min, max)) };
    let separation = (LEVEL_SEPARATION * LEVEL_HISTOGRAM_BINS as f64).ceil() as usize;
    let second = modal(&|b| b.abs_diff(first) >= separation && weight[b] > 0.0);
    let (a, b) = match second {
        Some(second) => (level(first), level(second)),
        // Only one level is ever visited away from the edges: the other is the far extreme.
        None => {
            let here = level(first);
            (here, if here - min > max - here { min } else { max })
        }
    };
    Ok((a.min(b), a.max(b)))
}

/// Basic measurements of one waveform, as a run report shows them.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct WaveformSummary {
    pub min: f64,
    pub max: f64,
    /// State levels from [`state_levels`].
    pub low_level: f64,
    pub high_level: f64,
    /// Changes of state with hysteresis between 10 % and 90 % of low level → high level.
    pub toggles: usize,
    /// 10–90 % time of the first rising edge between the levels, if there is one.
    pub first_rise_s: Option<f64>,
    /// 90–10 % time of the first falling edge between the levels, if there is one.
    pub first_fall_s: Option<f64>,
}

/// Extremes, state levels, toggles and first edges of a waveform. A swing between the levels
/// of at most `flat_below` (in the waveform's unit) counts as no switching at all, so solver
/// noise on a held node is not reported as edges.
pub fn summarise(times: &[f64], values: &[f64], flat_below: f64) -> Result<WaveformSummary, MeasureError> {
    let (low, high) = state_levels(times, values)?;
    let min = values.iter().copied().fold(f64::INFINITY, f64::min);
    let max = values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let mut summary = WaveformSummary {
        min,
        max,
        low_level: low,
        high_level: high,
        toggles: 0,
        first_rise_s: None,
        first_fall_s: None,
    };
    let swing = high - low;
    if swing > flat_below {
        summary.toggles = toggle_count(values, low + 0.1 * swing, low + 0.9 * swing);
        summary.first_rise_s = rise_time_10_90(times, values, low, high, f64::NEG_INFINITY).ok();
        summary.first_fall_s = fall_time_90_10(times, values, low, high, f64::NEG_INFINITY).ok();
    }
    Ok(summary)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn period_and_duty_of_a_sampled_pulse_train() {
        // A 30 % duty pulse train of period 10 with unit ramps: each pulse rises 0 → 1 over
        // [10k, 10k+1], holds to 10k+3, falls by 10k+4. At threshold 0.5 the pulse is above
        // from 10k+0.5 to 10k+3.5: 3 of every 10 (closed form).
        let mut t = Vec::new();
        let mut v = Vec::new();
        for k in 0..5 {
            let base = 10.0 * k as f64;
            for (dt, value) in [(0.0, 0.0), (1.0, 1.0), (3.0, 1.0), (4.0, 0.0)] {
                t.push(base + dt);
                v.push(value);
            }
        }
        let (period, duty) = period_and_duty(&t, &v, 0.1, 0.9, 0.0).unwrap_or((f64::NAN, f64::NAN));
        assert!((period - 10.0).abs() < 1e-12 && (duty - 0.3).abs() < 1e-12, "{period} {duty}");
        assert!(period_and_duty(&t[..4], &v[..4], 0.1, 0.9, 0.0).is_err(), "one pulse is no period");
        // A spike from the high state to just below the middle and back is no change of state.
        let mut spiky_t = t.clone();
        let mut spiky_v = v.clone();
        spiky_t.insert(2, 2.0);
        spiky_v.insert(2, 0.3);
        let again = period_and_duty(&spiky_t, &spiky_v, 0.1, 0.9, 0.0).unwrap_or((f64::NAN, f64::NAN));
        assert!((again.0 - 10.0).abs() < 1e-12, "{again:?}");
    }

    #[test]
    fn crossings_interpolate_linearly() {
        // A triangle 0 → 2 → 0 over t = 0, 1, 2: 1.0 is crossed at 0.5 (rising) and 1.5.
        let t = [0.0, 1.0, 2.0];
        let v = [0.0, 2.0, 0.0];
        assert_eq!(crossings(&t, &v, 1.0, Edge::Rising), Ok(vec![0.5]));
        assert_eq!(crossings(&t, &v, 1.0, Edge::Falling), Ok(vec![1.5]));
        assert_eq!(crossings(&t, &v, 1.0, Edge::Either), Ok(vec![0.5, 1.5]));
        assert!(crossings(&t, &v[..2], 1.0, Edge::Rising).is_err());
    }

    #[test]
    fn edges_and_toggles_of_a_trapezoid() {
        // 0 V until 1, ramp to 10 V by 2, hold to 3, ramp down by 5: rise 0.8, fall 1.6.
        let t = [0.0, 1.0, 2.0, 3.0, 5.0, 6.0];
        let v = [0.0, 0.0, 10.0, 10.0, 0.0, 0.0];
        let rise = rise_time_10_90(&t, &v, 0.0, 10.0, 0.0).unwrap_or(f64::NAN);
        let fall = fall_time_90_10(&t, &v, 0.0, 10.0, 0.0).unwrap_or(f64::NAN);
        assert!((rise - 0.8).abs() < 1e-12 && (fall - 1.6).abs() < 1e-12, "{rise} {fall}");
        assert_eq!(toggle_count(&v, 3.0, 7.0), 2);
        let d = delay(&t, &v, 5.0, Edge::Rising, &v, 5.0, Edge::Falling, 0.0).unwrap_or(f64::NAN);
        assert!((d - 2.5).abs() < 1e-12, "{d}");
    }

    #[test]
    fn summary_of_a_trapezoid_and_of_a_flat_line() {
        // The trapezoid of the test above: levels 0 and 10 V, rise 0.8, fall 1.6, two toggles.
        let t = [0.0, 1.0, 2.0, 3.0, 5.0, 6.0];
        let v = [0.0, 0.0, 10.0, 10.0, 0.0, 0.0];
        let summary = summarise(&t, &v, 1e-6);
        assert!(summary.is_ok(), "{summary:?}");
        let Ok(summary) = summary else { return };
        assert_eq!((summary.min, summary.max, summary.toggles), (0.0, 10.0, 2));
        assert_eq!((summary.low_level, summary.high_level), (0.0, 10.0));
        assert!(summary.first_rise_s.is_some_and(|r| (r - 0.8).abs() < 1e-12));
        assert!(summary.first_fall_s.is_some_and(|f| (f - 1.6).abs() < 1e-12));
        let flat = summarise(&t, &[5.0, 5.0, 5.0 + 1e-9, 5.0, 5.0, 5.0], 1e-6);
        assert_eq!(flat.map(|s| (s.toggles, s.first_rise_s)), Ok((0, None)));
        assert!(summarise(&[], &[], 1e-6).is_err());
    }

    #[test]
    fn state_levels_ignore_a_spike_beyond_one_state() {
        // Low at 0 V for 4 s, high at 5 V for 4 s, with a 0.1 s spike to 8 V on top: the levels
        // stay 0 and 5 V (max would say 8 V), so edges are measured between the real states.
        let t = [0.0, 4.0, 4.1, 4.2, 4.3, 8.0, 8.1, 12.0];
        let v = [0.0, 0.0, 5.0, 8.0, 5.0, 5.0, 0.0, 0.0];
        assert_eq!(state_levels(&t, &v), Ok((0.0, 5.0)));
        let summary = summarise(&t, &v, 1e-6);
        assert!(
            summary.is_ok_and(|s| s.toggles == 2 && s.first_rise_s.is_some_and(|r| (r - 0.08).abs() < 1e-12))
        );
    }
}
