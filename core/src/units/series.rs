//! IEC 60063 preferred-number series E3…E192 as stored tables, with look-ups across decades.
//!
//! The tables are typed in rather than computed: 10^(i/n) rounded gives wrong values for the
//! historical E6–E24 members (2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 8.2) and for E192's 9.20.

use super::decimal::decimal_to_f64;
use super::error::QuantityError;

const E3_MANTISSAS: [f64; 3] = [1.0, 2.2, 4.7];

const E6_MANTISSAS: [f64; 6] = [1.0, 1.5, 2.2, 3.3, 4.7, 6.8];

const E12_MANTISSAS: [f64; 12] = [1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2];

const E24_MANTISSAS: [f64; 24] = [
    1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0, //
    3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1,
];

const E48_MANTISSAS: [f64; 48] = [
    1.00, 1.05, 1.10, 1.15, 1.21, 1.27, 1.33, 1.40, 1.47, 1.54, 1.62, 1.69, //
    1.78, 1.87, 1.96, 2.05, 2.15, 2.26, 2.37, 2.49, 2.61, 2.74, 2.87, 3.01, //
    3.16, 3.32, 3.48, 3.65, 3.83, 4.02, 4.22, 4.42, 4.64, 4.87, 5.11, 5.36, //
    5.62, 5.90, 6.19, 6.49, 6.81, 7.15, 7.50, 7.87, 8.25, 8.66, 9.09, 9.53,
];

const E96_MANTISSAS: [f64; 96] = [
    1.00, 1.02, 1.05, 1.07, 1.10, 1.13, 1.15, 1.18, 1.21, 1.24, 1.27, 1.30, //
    1.33, 1.37, 1.40, 1.43, 1.47, 1.50, 1.54, 1.58, 1.62, 1.65, 1.69, 1.74, //
    1.78, 1.82, 1.87, 1.91, 1.96, 2.00, 2.05, 2.10, 2.15, 2.21, 2.26, 2.32, //
    2.37, 2.43, 2.49, 2.55, 2.61, 2.67, 2.74, 2.80, 2.87, 2.94, 3.01, 3.09, //
    3.16, 3.24, 3.32, 3.40, 3.48, 3.57, 3.65, 3.74, 3.83, 3.92, 4.02, 4.12, //
    4.22, 4.32, 4.42, 4.53, 4.64, 4.75, 4.87, 4.99, 5.11, 5.23, 5.36, 5.49, //
    5.62, 5.76, 5.90, 6.04, 6.19, 6.34, 6.49, 6.65, 6.81, 6.98, 7.15, 7.32, //
    7.50, 7.68, 7.87, 8.06, 8.25, 8.45, 8.66, 8.87, 9.09, 9.31, 9.53, 9.76,
];

const E192_MANTISSAS: [f64; 192] = [
    1.00, 1.01, 1.02, 1.04, 1.05, 1.06, 1.07, 1.09, 1.10, 1.11, 1.13, 1.14, //
    1.15, 1.17, 1.18, 1.20, 1.21, 1.23, 1.24, 1.26, 1.27, 1.29, 1.30, 1.32, //
    1.33, 1.35, 1.37, 1.38, 1.40, 1.42, 1.43, 1.45, 1.47, 1.49, 1.50, 1.52, //
    1.54, 1.56, 1.58, 1.60, 1.62, 1.64, 1.65, 1.67, 1.69, 1.72, 1.74, 1.76, //
    1.78, 1.80, 1.82, 1.84, 1.87, 1.89, 1.91, 1.93, 1.96, 1.98, 2.00, 2.03, //
    2.05, 2.08, 2.10, 2.13, 2.15, 2.18, 2.21, 2.23, 2.26, 2.29, 2.32, 2.34, //
    2.37, 2.40, 2.43, 2.46, 2.49, 2.52, 2.55, 2.58, 2.61, 2.64, 2.67, 2.71, //
    2.74, 2.77, 2.80, 2.84, 2.87, 2.91, 2.94, 2.98, 3.01, 3.05, 3.09, 3.12, //
    3.16, 3.20, 3.24, 3.28, 3.32, 3.36, 3.40, 3.44, 3.48, 3.52, 3.57, 3.61, //
    3.65, 3.70, 3.74, 3.79, 3.83, 3.88, 3.92, 3.97, 4.02, 4.07, 4.12, 4.17, //
    4.22, 4.27, 4.32, 4.37, 4.42, 4.48, 4.53, 4.59, 4.64, 4.70, 4.75, 4.81, //
    4.87, 4.93, 4.99, 5.05, 5.11, 5.17, 5.23, 5.30, 5.36, 5.42, 5.49, 5.56, //
    5.62, 5.69, 5.76, 5.83, 5.90, 5.97, 6.04, 6.12, 6.19, 6.26, 6.34, 6.42, //
    6.49, 6.57, 6.65, 6.73, 6.81, 6.90, 6.98, 7.06, 7.15, 7.23, 7.32, 7.41, //
    7.50, 7.59, 7.68, 7.77, 7.87, 7.96, 8.06, 8.16, 8.25, 8.35, 8.45, 8.56, //
    8.66, 8.76, 8.87, 8.98, 9.09, 9.20, 9.31, 9.42, 9.53, 9.65, 9.76, 9.88,
];

/// Relative slack within which a value counts as already being a series value, so that
/// 4700.000000001 is treated as 4700 rather than stepping past it.
const SAME_VALUE_RELATIVE_TOLERANCE: f64 = 1e-9;

/// An IEC 60063 preferred-number series.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
pub enum ESeries {
    E3,
    E6,
    E12,
    E24,
    E48,
    E96,
    E192,
}

impl ESeries {
    /// Every series, coarsest first.
    pub const ALL: [ESeries; 7] =
        [ESeries::E3, ESeries::E6, ESeries::E12, ESeries::E24, ESeries::E48, ESeries::E96, ESeries::E192];

    /// The series' name, e.g. "E24".
    pub fn name(self) -> &'static str {
        match self {
            ESeries::E3 => "E3",
            ESeries::E6 => "E6",
            ESeries::E12 => "E12",
            ESeries::E24 => "E24",
            ESeries::E48 => "E48",
            ESeries::E96 => "E96",
            ESeries::E192 => "E192",
        }
    }

    /// Reads a series name in either case ("E24", "e24"), ignoring surrounding whitespace.
    pub fn from_name(text: &str) -> Result<ESeries, QuantityError> {
        let trimmed = text.trim();
        ESeries::ALL
            .into_iter()
            .find(|series| series.name().eq_ignore_ascii_case(trimmed))
            .ok_or_else(|| QuantityError::UnknownSeries { text: trimmed.to_string() })
    }

    /// The values of one decade, 1.0 ≤ m < 10, ascending.
    pub fn mantissas(self) -> &'static [f64] {
        match self {
            ESeries::E3 => &E3_MANTISSAS,
            ESeries::E6 => &E6_MANTISSAS,
            ESeries::E12 => &E12_MANTISSAS,
            ESeries::E24 => &E24_MANTISSAS,
            ESeries::E48 => &E48_MANTISSAS,
            ESeries::E96 => &E96_MANTISSAS,
            ESeries::E192 => &E192_MANTISSAS,
        }
    }

    /// Significant figures of the series' values: 2 up to E24, 3 from E48.
    pub fn significant_figures(self) -> usize {
        match self {
            ESeries::E3 | ESeries::E6 | ESeries::E12 | ESeries::E24 => 2,
            ESeries::E48 | ESeries::E96 | ESeries::E192 => 3,
        }
    }

    /// The tolerance the series is usually made in, as a fraction. IEC 60063 assigns E3 only to
    /// tolerances wider than ±20 %; 0.4 (±40 %) is the figure customarily quoted for it.
    pub fn tolerance(self) -> f64 {
        match self {
            ESeries::E3 => 0.4,
            ESeries::E6 => 0.2,
            ESeries::E12 => 0.1,
            ESeries::E24 => 0.05,
            ESeries::E48 => 0.02,
            ESeries::E96 => 0.01,
            ESeries::E192 => 0.005,
        }
    }

    /// The series value nearest to `value` in logarithmic (ratio) terms, in any decade:
    /// E12 nearest(5000) is 4700 because 5000/4700 < 5600/5000.
    pub fn nearest(self, value: f64) -> Result<f64, QuantityError> {
        let position = self.nearest_position(check_positive(value)?)?;
        self.value_at(position)
    }

    /// The smallest series value at or above `value`; a value within 1e-9 relative of a
    /// series value returns that series value.
    pub fn next_up(self, value: f64) -> Result<f64, QuantityError> {
        let position = self.next_up_position(check_positive(value)?)?;
        self.value_at(position)
    }

    /// The largest series value at or below `value`; a value within 1e-9 relative of a
    /// series value returns that series value.
    pub fn next_down(self, value: f64) -> Result<f64, QuantityError> {
        let position = self.next_down_position(check_positive(value)?)?;
        self.value_at(position)
    }

    /// Moves `steps` series positions from the value nearest to `value` (negative steps go
    /// down), crossing decades: E12 step(4700, 2) is 6800, step(1000, -1) is 820.
    pub fn step(self, value: f64, steps: i32) -> Result<f64, QuantityError> {
        let start = self.nearest_position(check_positive(value)?)?;
        self.value_at(start.saturating_add(i64::from(steps)))
    }

    /// Every series value from `low` to `high`, both included (within 1e-9 relative), ascending.
    /// Empty when the bounds are not finite, `low` is not positive, or `high` < `low`.
    pub fn values_between(self, low: f64, high: f64) -> Vec<f64> {
        if !(low.is_finite() && high.is_finite() && low > 0.0 && high >= low) {
            return Vec::new();
        }
        let (Ok(first), Ok(last)) = (self.next_up_position(low), self.next_down_position(high)) else {
            return Vec::new();
        };
        // Positions whose value over- or underflows f64 are simply not part of the answer.
        (first..=last).filter_map(|position| self.value_at(position).ok()).collect()
    }

    fn length(self) -> i64 {
        self.mantissas().len() as i64
    }

    /// The mantissa in hundredths (4.7 → 470): exact integers free of binary fractions.
    fn hundredths_at(self, index_in_decade: i64) -> Option<i64> {
        let index = usize::try_from(index_in_decade).ok()?;
        self.mantissas().get(index).map(|mantissa| (mantissa * 100.0).round() as i64)
    }

    /// Series values are numbered across decades: position `decade * n + i` is the i-th
    /// mantissa times 10^decade, so position 0 is 1.0 and position n is 10.
    fn value_at(self, position: i64) -> Result<f64, QuantityError> {
        let (value, decade_exponent) = self.approximate_value_at(position);
        let out_of_range = QuantityError::SeriesOutOfRange { value };
        let index_in_decade = position.rem_euclid(self.length());
        let hundredths = self.hundredths_at(index_in_decade).ok_or(out_of_range.clone())?;
        // Parsing the decimal text gives the f64 nearest the exact value, so 4700.0 and not
        // 4699.999999999999 as a product of binary floats could.
        let exact =
            decimal_to_f64(&hundredths.to_string(), decade_exponent - 2).ok_or(out_of_range.clone())?;
        if !exact.is_finite() || exact == 0.0 {
            return Err(out_of_range);
        }
        Ok(exact)
    }

    /// A value close enough to the series value for searching (a few ulps off) and its decade.
    fn approximate_value_at(self, position: i64) -> (f64, i64) {
        let decade = position.div_euclid(self.length());
        let index_in_decade = position.rem_euclid(self.length());
        let mantissa = usize::try_from(index_in_decade)
            .ok()
            .and_then(|index| self.mantissas().get(index))
            .copied()
            .unwrap_or(1.0);
        let decade_clamped = decade.clamp(-400, 400) as i32;
        (mantissa * 10f64.powi(decade_clamped), decade)
    }

    /// Positions of the decades around `value`: one decade either side covers any error in
    /// the floating-point logarithm at decade boundaries.
    fn candidate_positions(self, value: f64) -> std::ops::RangeInclusive<i64> {
        let decade = value.log10().floor() as i64;
        let length = self.length();
        ((decade - 1) * length)..=((decade + 2) * length)
    }

    fn nearest_position(self, value: f64) -> Result<i64, QuantityError> {
        let target = value.log10();
        let mut best: Option<(i64, f64)> = None;
        for position in self.candidate_positions(value) {
            let (candidate, _) = self.approximate_value_at(position);
            let distance = (candidate.log10() - target).abs();
            // Strictly closer only: an exact geometric tie keeps the lower value.
            let is_closer = match best {
                None => true,
                Some((_, best_distance)) => distance < best_distance,
            };
            if is_closer {
                best = Some((position, distance));
            }
        }
        best.map(|(position, _)| position).ok_or(QuantityError::SeriesOutOfRange { value })
    }

    fn next_up_position(self, value: f64) -> Result<i64, QuantityError> {
        let threshold = value * (1.0 - SAME_VALUE_RELATIVE_TOLERANCE);
        self.candidate_positions(value)
            .find(|position| self.approximate_value_at(*position).0 >= threshold)
            .ok_or(QuantityError::SeriesOutOfRange { value })
    }

    fn next_down_position(self, value: f64) -> Result<i64, QuantityError> {
        let threshold = value * (1.0 + SAME_VALUE_RELATIVE_TOLERANCE);
        self.candidate_positions(value)
            .rev()
            .find(|position| self.approximate_value_at(*position).0 <= threshold)
            .ok_or(QuantityError::SeriesOutOfRange { value })
    }
}

fn check_positive(value: f64) -> Result<f64, QuantityError> {
    if value.is_finite() && value > 0.0 {
        Ok(value)
    } else {
        Err(QuantityError::SeriesValueNotPositive { value })
    }
}

/// All tables as text, one line per series with its name then its mantissas at the series'
/// significant figures: "E3 1.0 2.2 4.7", …, "E192 1.00 1.01 …". For cross-checks by tools.
pub fn series_table_text() -> String {
    let mut text = String::new();
    for series in ESeries::ALL {
        text.push_str(series.name());
        let decimals = series.significant_figures() - 1;
        for mantissa in series.mantissas() {
            text.push_str(&format!(" {mantissa:.decimals$}"));
        }
        text.push('\n');
    }
    text
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_table_has_its_length_and_ascends_within_one_decade() {
        for series in ESeries::ALL {
            let mantissas = series.mantissas();
            let expected_length: usize = series.name().get(1..).unwrap_or("").parse().unwrap_or(0);
            assert_eq!(mantissas.len(), expected_length, "{}", series.name());
            assert_eq!(mantissas.first(), Some(&1.0), "{}", series.name());
            assert!(mantissas.iter().all(|m| (1.0..10.0).contains(m)));
            assert!(
                mantissas.windows(2).all(|pair| pair.first() < pair.get(1)),
                "{} not ascending",
                series.name()
            );
        }
    }

    #[test]
    fn positions_number_values_across_decades() {
        assert_eq!(ESeries::E12.value_at(0), Ok(1.0));
        assert_eq!(ESeries::E12.value_at(12), Ok(10.0));
        assert_eq!(ESeries::E12.value_at(-1), Ok(0.82));
        assert_eq!(ESeries::E12.value_at(12 * 3 + 8), Ok(4700.0));
    }

    #[test]
    fn positions_beyond_f64_are_out_of_range() {
        assert!(ESeries::E3.value_at(3 * 400).is_err());
        assert!(ESeries::E3.value_at(-3 * 400).is_err());
        assert!(ESeries::E3.value_at(i64::MAX).is_err());
        assert!(ESeries::E3.value_at(i64::MIN).is_err());
    }

    #[test]
    fn table_text_has_one_line_per_series() {
        let text = series_table_text();
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(lines.len(), 7);
        assert_eq!(lines.first().copied(), Some("E3 1.0 2.2 4.7"));
        let e192_line = lines.last().copied().unwrap_or_default();
        assert!(e192_line.starts_with("E192 1.00 1.01 1.02 "));
        assert!(e192_line.ends_with(" 9.76 9.88"));
        assert_eq!(e192_line.split(' ').count(), 193);
    }
}
