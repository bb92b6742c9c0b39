//! Binomial statistics of a yield estimate: the Wilson score interval, the one-sided lower
//! bound, the normal quantile they need, the sample size for an interval half-width, and
//! histograms as data.

use serde::Serialize;

/// Standard normal quantile: the z with Φ(z) = `probability`, by bisection on
/// Φ(z) = erfc(−z/√2)/2 (`libm::erfc`); bounded to 200 halvings of [−40, 40].
pub fn normal_quantile(probability: f64) -> f64 {
    if !(probability > 0.0 && probability < 1.0) {
        return f64::NAN;
    }
    let cdf = |z: f64| 0.5 * libm::erfc(-z / core::f64::consts::SQRT_2);
    let (mut low, mut high) = (-40.0f64, 40.0f64);
    for _ in 0..200 {
        let middle = 0.5 * (low + high);
        if cdf(middle) < probability {
            low = middle;
        } else {
            high = middle;
        }
        if high - low <= 1e-15 * middle.abs().max(1.0) {
            break;
        }
    }
    0.5 * (low + high)
}

/// A confidence interval for a proportion.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Interval {
    pub low: f64,
    pub high: f64,
}

/// Wilson score interval for `successes` of `trials` at critical value `z` (E. B. Wilson,
/// *Probable inference, the law of succession, and statistical inference*, JASA 22, 1927;
/// recommended by Agresti & Coull 1998 and Newcombe 1998):
/// `(p̂ + z²/2n ± z·√(p̂(1−p̂)/n + z²/4n²)) / (1 + z²/n)`.
pub fn wilson_interval(successes: u64, trials: u64, z: f64) -> Interval {
    if trials == 0 {
        return Interval { low: 0.0, high: 1.0 };
    }
    let n = trials as f64;
    let p = successes.min(trials) as f64 / n;
    let z2 = z * z;
    let denominator = 1.0 + z2 / n;
    let centre = (p + z2 / (2.0 * n)) / denominator;
    let half = z / denominator * (p * (1.0 - p) / n + z2 / (4.0 * n * n)).sqrt();
    // The Wilson interval always contains p; at p = 0 or 1 the two ends meet p only up to
    // rounding (a property test found 89 trials where the high end fell short), so hold p inside.
    Interval { low: (centre - half).max(0.0).min(p), high: (centre + half).min(1.0).max(p) }
}

/// Two-sided Wilson interval at a confidence level (0.95 → z = 1.96).
pub fn wilson_two_sided(successes: u64, trials: u64, confidence: f64) -> Interval {
    wilson_interval(successes, trials, normal_quantile(0.5 + 0.5 * confidence))
}

/// One-sided Wilson lower bound at a confidence level (0.95 → z = 1.645): the yield is at
/// least this with that confidence.
pub fn wilson_lower_bound(successes: u64, trials: u64, confidence: f64) -> f64 {
    wilson_interval(successes, trials, normal_quantile(confidence)).low
}

/// Trials needed so that the normal-approximation interval of a proportion near `p` has
/// half-width `half_width` at a confidence level: n = z²·p(1−p)/E², rounded up (the usual
/// sample-size formula for a proportion, W. G. Cochran, *Sampling Techniques*, 3rd ed. 1977,
/// §4.4). At p = 0 or 1 the formula gives 0; use a p from a pilot run or 0.5 for the most
/// conservative size. `None` for inputs outside (0, 1).
pub fn sample_size(p: f64, half_width: f64, confidence: f64) -> Option<u64> {
    if !((0.0..=1.0).contains(&p)
        && half_width > 0.0
        && half_width < 1.0
        && confidence > 0.0
        && confidence < 1.0)
    {
        return None;
    }
    let z = normal_quantile(0.5 + 0.5 * confidence);
    let n = (z * z * p * (1.0 - p) / (half_width * half_width)).ceil();
    (n.is_finite() && n < 1e15).then_some(n as u64)
}

/// A histogram as data: `counts[i]` values fell in `[edges[i], edges[i+1])` (the last bin
/// includes its upper edge); values that are not finite are counted apart.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Histogram {
    pub edges: Vec<f64>,
    pub counts: Vec<u32>,
    pub not_finite: u32,
}

/// Equal-width bins from the smallest to the largest finite value.
pub fn histogram(values: &[f64], bins: usize) -> Histogram {
    let bins = bins.clamp(1, 1000);
    let finite = values.iter().copied().filter(|v| v.is_finite());
    let (low, high) = finite.fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), v| (l.min(v), h.max(v)));
    let not_finite = values.iter().filter(|v| !v.is_finite()).count() as u32;
    if !(low <= high) {
        return Histogram { edges: Vec::new(), counts: Vec::new(), not_finite };
    }
    // A single value still gets a bin of non-zero width around it.
    let (low, high) = if high > low {
        (low, high)
    } else {
        (low - 0.5 * low.abs().max(1e-12), high + 0.5 * high.abs().max(1e-12))
    };
    let width = (high - low) / bins as f64;
    let edges: Vec<f64> = (0..=bins).map(|i| if i == bins { high } else { low + width * i as f64 }).collect();
    let mut counts = vec![0u32; bins];
    for v in values.iter().copied().filter(|v| v.is_finite()) {
        let index = (((v - low) / width) as usize).min(bins - 1);
        if let Some(count) = counts.get_mut(index) {
            *count += 1;
        }
    }
    Histogram { edges, counts, not_finite }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The interval holds the observed fraction at both ends of the range, for every trial
    /// count up to 2000 and levels across (0, 1): the Wilson interval contains p by its
    /// construction (Wilson 1927), so a rounding that leaves p outside is a defect.
    #[test]
    fn the_interval_always_holds_the_observed_fraction() {
        for trials in 1..=2000u64 {
            for confidence in [0.01, 0.3, 0.6938121161068759, 0.9, 0.95, 0.999] {
                for successes in [0, 1, trials / 2, trials - 1, trials] {
                    let p = successes as f64 / trials as f64;
                    let i = wilson_two_sided(successes, trials, confidence);
                    assert!(i.low <= p && p <= i.high, "{successes}/{trials} at {confidence}: {i:?}");
                }
            }
        }
    }

    #[test]
    fn normal_quantiles_match_the_usual_table() {
        // Common practice: z(0.975) = 1.959964, z(0.95) = 1.644854 (normal table).
        assert!((normal_quantile(0.975) - 1.959_964).abs() < 1e-6);
        assert!((normal_quantile(0.95) - 1.644_854).abs() < 1e-6);
        assert!(normal_quantile(1.0).is_nan() && normal_quantile(f64::NAN).is_nan());
    }

    #[test]
    fn histogram_counts_every_finite_value_once() {
        let values = [0.0, 0.1, 0.5, 0.9, 1.0, f64::NAN];
        let h = histogram(&values, 2);
        assert_eq!(h.counts, [2, 3]);
        assert_eq!(h.not_finite, 1);
        assert_eq!(h.edges.len(), 3);
    }
}
