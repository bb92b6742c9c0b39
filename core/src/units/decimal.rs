//! Decimal rounding, digit placement and exact decimal-to-`f64` conversion shared by the formatters.

/// A finite non-zero value rounded to a number of significant digits, held as decimal digits.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) struct RoundedDecimal {
    pub(crate) negative: bool,
    /// Significant digits, most significant first, ASCII; the first is never '0'.
    pub(crate) digits: String,
    /// Power of ten of the first digit: the value is d1.d2d3… × 10^exponent.
    pub(crate) exponent: i32,
}

/// More digits than this add nothing: 17 significant digits identify every `f64`.
pub(crate) const MAXIMUM_USEFUL_DIGITS: usize = 17;

impl RoundedDecimal {
    /// Rounds `value`; `None` for zero and non-finite values, which have no leading digit.
    /// `significant_digits` is clamped to 1..=17.
    pub(crate) fn new(value: f64, significant_digits: usize) -> Option<Self> {
        if !value.is_finite() || value == 0.0 {
            return None;
        }
        let precision = significant_digits.clamp(1, MAXIMUM_USEFUL_DIGITS) - 1;
        // `{:e}` formatting is correctly rounded from the exact binary value, so these digits
        // are the true decimal rounding, with no float arithmetic of our own to drift.
        let text = format!("{:.*e}", precision, value.abs());
        let (mantissa, exponent_text) = text.split_once('e')?;
        let exponent = exponent_text.parse::<i32>().ok()?;
        let digits: String = mantissa.chars().filter(char::is_ascii_digit).collect();
        Some(RoundedDecimal { negative: value.is_sign_negative(), digits, exponent })
    }

    /// Splits the digits into integer and fraction text with `integer_digit_count` digits
    /// before the point, padding with zeros either side; trailing zeros of the fraction are dropped.
    pub(crate) fn split_at_point(&self, integer_digit_count: i32) -> (String, String) {
        let digit_count = i32::try_from(self.digits.len()).unwrap_or(i32::MAX);
        let (integer, fraction) = if integer_digit_count <= 0 {
            let leading_zeros = "0".repeat(integer_digit_count.unsigned_abs() as usize);
            (String::new(), leading_zeros + &self.digits)
        } else if integer_digit_count >= digit_count {
            let trailing_zeros = "0".repeat((integer_digit_count - digit_count) as usize);
            (self.digits.clone() + &trailing_zeros, String::new())
        } else {
            let split = integer_digit_count as usize;
            let integer = self.digits.get(..split).unwrap_or_default().to_string();
            let fraction = self.digits.get(split..).unwrap_or_default().to_string();
            (integer, fraction)
        };
        (integer, fraction.trim_end_matches('0').to_string())
    }
}

/// The `f64` nearest to `mantissa × 10^exponent`, where `mantissa` is decimal text such as
/// "-4.7"; the standard parser rounds correctly, so "4.7" and exponent 3 give exactly 4700.0.
pub(crate) fn decimal_to_f64(mantissa: &str, exponent: i64) -> Option<f64> {
    format!("{mantissa}e{exponent}").parse::<f64>().ok()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rounded(value: f64, digits: usize) -> Option<RoundedDecimal> {
        RoundedDecimal::new(value, digits)
    }

    #[test]
    fn rounding_carries_into_the_next_decade() {
        let result = rounded(999.6, 3);
        assert_eq!(result.as_ref().map(|r| r.digits.as_str()), Some("100"));
        assert_eq!(result.map(|r| r.exponent), Some(3));
    }

    #[test]
    fn rounding_keeps_sign_and_exponent_of_small_values() {
        let result = rounded(-0.004_749, 2);
        assert_eq!(result, Some(RoundedDecimal { negative: true, digits: "47".to_string(), exponent: -3 }));
    }

    #[test]
    fn zero_and_non_finite_have_no_digits() {
        assert_eq!(rounded(0.0, 3), None);
        assert_eq!(rounded(-0.0, 3), None);
        assert_eq!(rounded(f64::NAN, 3), None);
        assert_eq!(rounded(f64::INFINITY, 3), None);
    }

    #[test]
    fn digit_count_is_clamped() {
        assert_eq!(rounded(4.7, 0).map(|r| r.digits), Some("5".to_string()));
        assert_eq!(rounded(0.1, 40).map(|r| r.digits.len()), Some(17));
    }

    #[test]
    fn split_pads_and_trims() {
        let value = RoundedDecimal { negative: false, digits: "470".to_string(), exponent: 0 };
        assert_eq!(value.split_at_point(1), ("4".into(), "7".into()));
        assert_eq!(value.split_at_point(0), ("".into(), "47".into()));
        assert_eq!(value.split_at_point(-2), ("".into(), "0047".into()));
        assert_eq!(value.split_at_point(3), ("470".into(), "".into()));
        assert_eq!(value.split_at_point(5), ("47000".into(), "".into()));
    }

    #[test]
    fn decimal_conversion_is_exact_where_multiplication_is_not() {
        // 0.1 * 3 drifts to 0.30000000000000004; the decimal route must not.
        assert_eq!(decimal_to_f64("3", -1), Some(0.3));
        assert_eq!(decimal_to_f64("4.7", 3), Some(4700.0));
        assert_eq!(decimal_to_f64("2.2", -6), Some(2.2e-6));
    }
}
