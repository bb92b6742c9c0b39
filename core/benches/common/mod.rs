//! What every benchmark of this plain harness shares: timed repetitions and their median and
//! quartiles. Included by each bench with `mod common;` (a subdirectory is not a bench target).

#![allow(dead_code)] // each bench uses what it needs

use std::hint::black_box;
use std::time::Instant;

/// (median, lower quartile, upper quartile) of the samples, NaN when there are none.
pub fn median_and_quartiles(mut samples: Vec<f64>) -> (f64, f64, f64) {
    samples.sort_by(f64::total_cmp);
    let at =
        |q: f64| samples.get(((samples.len() - 1) as f64 * q).round() as usize).copied().unwrap_or(f64::NAN);
    (at(0.5), at(0.25), at(0.75))
}

/// Seconds of each of `repetitions` calls of `work`, after `warm_ups` untimed calls.
pub fn timed_samples<T>(repetitions: usize, warm_ups: usize, mut work: impl FnMut() -> T) -> Vec<f64> {
    for _ in 0..warm_ups {
        black_box(work());
    }
    (0..repetitions)
        .map(|_| {
            let start = Instant::now();
            black_box(work());
            start.elapsed().as_secs_f64()
        })
        .collect()
}
