//! Waveforms cut down for transfer to the page: each trace reduced to its minimum and maximum
//! in equal time buckets, so a run of a million points crosses the worker boundary as a few
//! thousand numbers and still shows every spike.

use serde::{Deserialize, Serialize};

use flipwright::transient::TransientResult;
use flipwright::verify::count::value_at;

/// Most buckets per trace: more than any plot has pixel columns, even at 2× device pixels.
pub const MAX_BUCKETS: usize = 2000;

/// One waveform as minimum and maximum per bucket.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DecimatedTrace {
    /// The node the trace was recorded at (`c1`, `s3.c1`).
    pub node: String,
    /// What the page calls it (`Q1 collector`).
    pub label: String,
    /// Per bucket, packed for the page (see [`crate::packed`]).
    #[serde(with = "crate::packed")]
    pub min_v: Vec<f64>,
    #[serde(with = "crate::packed")]
    pub max_v: Vec<f64>,
}

/// Several traces of one run over a shared time axis: bucket `i` covers
/// `[start_s + i·w, start_s + (i+1)·w]` with `w = (stop_s − start_s) / buckets`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DecimatedRun {
    pub start_s: f64,
    pub stop_s: f64,
    pub buckets: usize,
    /// Time points the engine recorded (before decimation).
    pub recorded_points: usize,
    pub traces: Vec<DecimatedTrace>,
}

impl DecimatedRun {
    /// Width of one bucket, s.
    pub fn bucket_s(&self) -> f64 {
        (self.stop_s - self.start_s) / self.buckets.max(1) as f64
    }
}

/// Minimum and maximum of `values` (sampled at `times`, ascending) in `buckets` equal
/// intervals of `[start_s, stop_s]`. The interpolated value at every bucket boundary counts
/// in both neighbouring buckets, so a bucket with no recorded point still joins its
/// neighbours and the envelope has no gaps.
pub fn min_max_buckets(
    times: &[f64],
    values: &[f64],
    start_s: f64,
    stop_s: f64,
    buckets: usize,
) -> (Vec<f64>, Vec<f64>) {
    let mut low = vec![f64::INFINITY; buckets];
    let mut high = vec![f64::NEG_INFINITY; buckets];
    let width = (stop_s - start_s) / buckets.max(1) as f64;
    if buckets == 0 || !width.is_finite() || width <= 0.0 || times.is_empty() {
        return (Vec::new(), Vec::new());
    }
    let mut take = |bucket: usize, value: f64| {
        if let (Some(lo), Some(hi)) = (low.get_mut(bucket), high.get_mut(bucket)) {
            *lo = lo.min(value);
            *hi = hi.max(value);
        }
    };
    for boundary in 0..=buckets {
        let Some(value) = value_at(times, values, start_s + boundary as f64 * width) else { continue };
        if boundary > 0 {
            take(boundary - 1, value);
        }
        take(boundary, value);
    }
    let last = buckets - 1;
    for (&time, &value) in times.iter().zip(values) {
        if time < start_s || time > stop_s {
            continue;
        }
        // Float-to-int casts saturate; the clamp keeps the stop time in the last bucket.
        let bucket = (((time - start_s) / width) as usize).min(last);
        take(bucket, value);
    }
    (low, high)
}

/// The named nodes of a run, decimated to at most [`MAX_BUCKETS`] buckets over the whole
/// run. Nodes the run did not record are left out.
pub fn decimate(result: &TransientResult, nodes: &[(String, String)]) -> DecimatedRun {
    let start_s = result.time_s.first().copied().unwrap_or(0.0);
    let stop_s = result.time_s.last().copied().unwrap_or(0.0);
    let buckets = if stop_s > start_s { MAX_BUCKETS.min(result.time_s.len().max(2)) } else { 0 };
    let traces = nodes
        .iter()
        .filter_map(|(node, label)| {
            let values = result.voltage(node)?;
            let (min_v, max_v) = min_max_buckets(&result.time_s, values, start_s, stop_s, buckets);
            Some(DecimatedTrace { node: node.clone(), label: label.clone(), min_v, max_v })
        })
        .collect();
    DecimatedRun { start_s, stop_s, buckets, recorded_points: result.time_s.len(), traces }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn check(times: &[f64], values: &[f64], buckets: usize, expected_low: &[f64], expected_high: &[f64]) {
        let (low, high) = min_max_buckets(times, values, 0.0, 1.0, buckets);
        assert_eq!(low, expected_low, "minima");
        assert_eq!(high, expected_high, "maxima");
    }

    #[test]
    fn a_spike_between_samples_of_the_plot_survives() {
        // One narrow spike inside the second of four buckets.
        let times = [0.0, 0.3, 0.31, 0.32, 1.0];
        let values = [0.0, 0.0, 5.0, 0.0, 0.0];
        check(&times, &values, 4, &[0.0, 0.0, 0.0, 0.0], &[0.0, 5.0, 0.0, 0.0]);
    }

    #[test]
    fn buckets_without_points_take_the_line_between_their_neighbours() {
        // A ramp recorded at its two ends only: every bucket holds its share of the ramp.
        check(&[0.0, 1.0], &[0.0, 4.0], 4, &[0.0, 1.0, 2.0, 3.0], &[1.0, 2.0, 3.0, 4.0]);
    }

    #[test]
    fn an_empty_or_zero_length_run_gives_no_buckets() {
        assert_eq!(min_max_buckets(&[], &[], 0.0, 1.0, 4), (Vec::new(), Vec::new()));
        assert_eq!(min_max_buckets(&[0.5], &[1.0], 0.5, 0.5, 4), (Vec::new(), Vec::new()));
    }
}
