//! Parsing and formatting of numbers with SI prefixes and unit symbols ("4.7 kΩ", "100nF").

use super::decimal::{decimal_to_f64, RoundedDecimal};
use super::error::QuantityError;
use super::iec60062;
use super::Unit;

/// Exponents beyond this over- or underflow `f64` anyway; clamping keeps the arithmetic in range.
const EXPONENT_CLAMP: i64 = 100_000;

/// Engineering prefixes used when formatting, lowest first; micro is U+00B5 MICRO SIGN.
const OUTPUT_PREFIXES: [(i32, &str); 8] =
    [(-12, "p"), (-9, "n"), (-6, "µ"), (-3, "m"), (0, ""), (3, "k"), (6, "M"), (9, "G")];

/// Reads a value in `unit` from text such as "4.7k", "4.7 kΩ", "2.2 µF", "1.5e-9 F", "-5 V"
/// or an IEC 60062 code ("4K7", "2n2") where the unit has codes.
///
/// A resistance with a bare lowercase "m" ("1m") and a capacitance with a bare "M" ("1M") are
/// refused as ambiguous or implausible; "1 mΩ" and "1 MF" spell the unit out and are accepted.
/// The result is the `f64` nearest to the decimal value written, so "4.7k" is exactly 4700.0.
pub fn parse_quantity(text: &str, unit: Unit) -> Result<f64, QuantityError> {
    let trimmed = text.trim();
    if trimmed.is_empty() {
        return Err(QuantityError::Empty { expected_unit: unit });
    }
    if iec60062::looks_like_code(trimmed, unit) {
        return iec60062::parse_code(trimmed, unit);
    }
    let number = scan_number(trimmed, unit)?;
    let prefix_exponent = parse_suffix(trimmed, number.rest.trim_start(), unit)?;
    let total_exponent = number.exponent + i64::from(prefix_exponent);
    let value = decimal_to_f64(number.mantissa, total_exponent)
        .ok_or_else(|| QuantityError::NotANumber { text: trimmed.to_string(), expected_unit: unit })?;
    if !value.is_finite() {
        return Err(QuantityError::NotFinite { text: trimmed.to_string() });
    }
    Ok(value)
}

/// Writes `value` with 3 significant digits, trailing zeros trimmed and an engineering prefix:
/// "4.7 kΩ", "100 nF", "2.2 µF", "0 V", "-5 V", "1.25 MHz".
pub fn format_quantity(value: f64, unit: Unit) -> String {
    format_quantity_digits(value, unit, 3)
}

/// Like [`format_quantity`] with a chosen number of significant digits (clamped to 1..=17).
///
/// Values whose magnitude lies outside 1e-12..1e12 have no prefix in the pico–giga range and
/// are written in exponent form ("1.5e-15 F"), which [`parse_quantity`] reads back.
/// NaN and infinities are written as Rust prints them ("NaN V", "inf V").
pub fn format_quantity_digits(value: f64, unit: Unit, significant_digits: usize) -> String {
    let symbol = unit.symbol();
    let Some(rounded) = RoundedDecimal::new(value, significant_digits) else {
        if value == 0.0 {
            // Covers -0.0 too: a signed zero means nothing to the reader.
            return format!("0 {symbol}");
        }
        return format!("{value} {symbol}");
    };
    let sign = if rounded.negative { "-" } else { "" };
    let engineering_exponent = rounded.exponent.div_euclid(3) * 3;
    let prefix = OUTPUT_PREFIXES
        .iter()
        .find(|(exponent, _)| *exponent == engineering_exponent)
        .map(|(_, prefix)| *prefix);
    let Some(prefix) = prefix else {
        let (first_digit, fraction) = rounded.split_at_point(1);
        let mantissa = join_number(&first_digit, &fraction);
        return format!("{sign}{mantissa}e{} {symbol}", rounded.exponent);
    };
    let (integer, fraction) = rounded.split_at_point(rounded.exponent - engineering_exponent + 1);
    format!("{sign}{} {prefix}{symbol}", join_number(&integer, &fraction))
}

fn join_number(integer: &str, fraction: &str) -> String {
    let integer = if integer.is_empty() { "0" } else { integer };
    if fraction.is_empty() {
        integer.to_string()
    } else {
        format!("{integer}.{fraction}")
    }
}

/// The leading number of a quantity, split from whatever follows it.
#[derive(Debug, PartialEq)]
struct ScannedNumber<'text> {
    /// Sign, digits and decimal point, without the exponent ("-4.7").
    mantissa: &'text str,
    /// The written exponent ("e-9"), 0 when absent, clamped to ±[`EXPONENT_CLAMP`].
    exponent: i64,
    rest: &'text str,
}

fn scan_number(text: &str, unit: Unit) -> Result<ScannedNumber<'_>, QuantityError> {
    let bytes = text.as_bytes();
    let mut position = usize::from(matches!(bytes.first(), Some(b'+' | b'-')));
    let sign_length = position;
    let mut digit_count = 0usize;
    let mut decimal_point_count = 0usize;
    while let Some(byte) = bytes.get(position) {
        match byte {
            b'0'..=b'9' => digit_count += 1,
            b'.' => decimal_point_count += 1,
            _ => break,
        }
        position += 1;
    }
    if decimal_point_count > 1 {
        return Err(QuantityError::MultipleDecimalPoints { text: text.to_string() });
    }
    if digit_count == 0 {
        let after_sign = text.get(sign_length..).unwrap_or_default().to_ascii_lowercase();
        if after_sign.starts_with("nan") || after_sign.starts_with("inf") {
            return Err(QuantityError::NotFinite { text: text.to_string() });
        }
        return Err(QuantityError::NotANumber { text: text.to_string(), expected_unit: unit });
    }
    // Positions so far sit on ASCII bytes, so these slices are on character boundaries.
    let mantissa = text.get(..position).unwrap_or_default();
    let (exponent, exponent_end) = scan_exponent(bytes, position);
    Ok(ScannedNumber { mantissa, exponent, rest: text.get(exponent_end..).unwrap_or_default() })
}

/// Reads "e-9" / "E+3" at `start`; an 'e' not followed by digits is left for the suffix
/// check to report, so "4.7e" fails rather than silently meaning 4.7.
fn scan_exponent(bytes: &[u8], start: usize) -> (i64, usize) {
    if !matches!(bytes.get(start), Some(b'e' | b'E')) {
        return (0, start);
    }
    let mut position = start + 1;
    let negative = bytes.get(position) == Some(&b'-');
    if matches!(bytes.get(position), Some(b'+' | b'-')) {
        position += 1;
    }
    let digits_start = position;
    let mut magnitude: i64 = 0;
    while let Some(byte) = bytes.get(position).filter(|byte| byte.is_ascii_digit()) {
        magnitude = (magnitude * 10 + i64::from(byte - b'0')).min(EXPONENT_CLAMP);
        position += 1;
    }
    if position == digits_start {
        return (0, start);
    }
    (if negative { -magnitude } else { magnitude }, position)
}

/// Decimal exponent of an input prefix; 'K' is accepted for kilo as many people write it.
fn prefix_exponent(prefix: char) -> Option<i32> {
    match prefix {
        'p' => Some(-12),
        'n' => Some(-9),
        // Micro: ASCII 'u', U+00B5 MICRO SIGN and U+03BC GREEK SMALL LETTER MU all occur in practice.
        'u' | 'µ' | 'μ' => Some(-6),
        'm' => Some(-3),
        'k' | 'K' => Some(3),
        'M' => Some(6),
        'G' => Some(9),
        _ => None,
    }
}

/// The unit a symbol names; both omega code points and the word "ohm(s)" are accepted.
pub(super) fn unit_from_symbol(symbol: &str) -> Option<Unit> {
    if symbol.eq_ignore_ascii_case("ohm") || symbol.eq_ignore_ascii_case("ohms") {
        return Some(Unit::Ohm);
    }
    match symbol {
        "Ω" | "\u{2126}" => Some(Unit::Ohm),
        "F" => Some(Unit::Farad),
        "V" => Some(Unit::Volt),
        "A" => Some(Unit::Ampere),
        "s" => Some(Unit::Second),
        "Hz" => Some(Unit::Hertz),
        "W" => Some(Unit::Watt),
        _ => None,
    }
}

/// Returns the prefix exponent of `suffix` (what follows the number, leading space removed).
fn parse_suffix(text: &str, suffix: &str, expected_unit: Unit) -> Result<i32, QuantityError> {
    if suffix.is_empty() {
        return Ok(0);
    }
    // A whole-suffix unit match comes first so that e.g. "F" is farad, never a prefix.
    if let Some(found_unit) = unit_from_symbol(suffix) {
        check_unit(text, found_unit, expected_unit)?;
        return Ok(0);
    }
    let unknown_suffix =
        || QuantityError::UnknownSuffix { text: text.to_string(), suffix: suffix.to_string(), expected_unit };
    let mut characters = suffix.chars();
    let Some(prefix) = characters.next() else {
        return Ok(0);
    };
    let exponent = prefix_exponent(prefix).ok_or_else(unknown_suffix)?;
    let unit_text = characters.as_str();
    if unit_text.is_empty() {
        if expected_unit == Unit::Ohm && prefix == 'm' {
            return Err(QuantityError::AmbiguousResistancePrefix { text: text.to_string() });
        }
        if expected_unit == Unit::Farad && prefix == 'M' {
            return Err(QuantityError::ImplausibleCapacitancePrefix { text: text.to_string() });
        }
        return Ok(exponent);
    }
    let found_unit = unit_from_symbol(unit_text).ok_or_else(unknown_suffix)?;
    check_unit(text, found_unit, expected_unit)?;
    Ok(exponent)
}

fn check_unit(text: &str, found_unit: Unit, expected_unit: Unit) -> Result<(), QuantityError> {
    if found_unit == expected_unit {
        return Ok(());
    }
    Err(QuantityError::UnitMismatch { text: text.to_string(), found_unit, expected_unit })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn scanner_splits_number_exponent_and_rest() {
        let scanned = scan_number("-4.7e-3 kΩ", Unit::Ohm);
        assert_eq!(scanned, Ok(ScannedNumber { mantissa: "-4.7", exponent: -3, rest: " kΩ" }));
    }

    #[test]
    fn scanner_leaves_an_e_without_digits_in_the_rest() {
        let scanned = scan_number("4.7e", Unit::Volt);
        assert_eq!(scanned.map(|number| (number.exponent, number.rest)), Ok((0, "e")));
    }

    #[test]
    fn scanner_clamps_huge_exponents() {
        let scanned = scan_number("1e99999999999999999999999", Unit::Volt);
        assert_eq!(scanned.map(|number| number.exponent), Ok(EXPONENT_CLAMP));
    }

    #[test]
    fn huge_and_tiny_exponents_give_not_finite_and_zero() {
        assert!(matches!(
            parse_quantity("1e99999999999999999999", Unit::Volt),
            Err(QuantityError::NotFinite { .. })
        ));
        assert_eq!(parse_quantity("1e-99999999999999999999", Unit::Volt), Ok(0.0));
    }

    #[test]
    fn whole_suffix_unit_wins_over_prefix_reading() {
        assert_eq!(parse_suffix("1F", "F", Unit::Farad), Ok(0));
        assert_eq!(parse_suffix("1ms", "ms", Unit::Second), Ok(-3));
    }

    #[test]
    fn output_stays_in_exponent_form_outside_the_prefix_range() {
        assert_eq!(format_quantity(1.5e-15, Unit::Farad), "1.5e-15 F");
        assert_eq!(format_quantity(2.5e13, Unit::Hertz), "2.5e13 Hz");
        assert_eq!(format_quantity(999.0e9, Unit::Watt), "999 GW");
    }

    #[test]
    fn non_finite_values_are_still_printed() {
        assert_eq!(format_quantity(f64::NAN, Unit::Volt), "NaN V");
        assert_eq!(format_quantity(f64::NEG_INFINITY, Unit::Volt), "-inf V");
        assert_eq!(format_quantity(-0.0, Unit::Volt), "0 V");
    }
}
