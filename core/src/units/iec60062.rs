//! IEC 60062 letter-and-digit value codes ("4K7", "2n2") and tolerance letters ("J" = ±5 %).

use super::decimal::{decimal_to_f64, RoundedDecimal};
use super::error::{CodeProblem, QuantityError};
use super::Unit;

/// Most significant digits [`format_code`] accepts; beyond 15 an `f64` no longer holds them all.
pub(crate) const CODE_MAXIMUM_DIGITS: usize = 15;

/// Resistor multiplier letters read by [`parse_code`]; lowercase 'k' is tolerated because it is common.
const RESISTOR_INPUT_LETTERS: [(char, i32); 6] =
    [('R', 0), ('K', 3), ('k', 3), ('M', 6), ('G', 9), ('T', 12)];

/// Capacitor multiplier letters read by [`parse_code`]; micro in ASCII and both Unicode forms.
const CAPACITOR_INPUT_LETTERS: [(char, i32); 7] =
    [('p', -12), ('n', -9), ('u', -6), ('µ', -6), ('μ', -6), ('m', -3), ('F', 0)];

/// Letters written by [`format_code`], lowest multiplier first.
const RESISTOR_OUTPUT_LETTERS: [(char, i32); 5] = [('R', 0), ('K', 3), ('M', 6), ('G', 9), ('T', 12)];
/// ASCII 'u' for micro so that codes stay printable on any label or terminal.
const CAPACITOR_OUTPUT_LETTERS: [(char, i32); 5] = [('p', -12), ('n', -9), ('u', -6), ('m', -3), ('F', 0)];

/// Tolerance letters and their tolerances as fractions.
const TOLERANCE_LETTERS: [(char, f64); 8] = [
    ('B', 0.001),
    ('C', 0.0025),
    ('D', 0.005),
    ('F', 0.01),
    ('G', 0.02),
    ('J', 0.05),
    ('K', 0.10),
    ('M', 0.20),
];

fn input_letters(unit: Unit) -> Option<&'static [(char, i32)]> {
    match unit {
        Unit::Ohm => Some(&RESISTOR_INPUT_LETTERS),
        Unit::Farad => Some(&CAPACITOR_INPUT_LETTERS),
        _ => None,
    }
}

fn output_letters(unit: Unit) -> Option<&'static [(char, i32); 5]> {
    match unit {
        Unit::Ohm => Some(&RESISTOR_OUTPUT_LETTERS),
        Unit::Farad => Some(&CAPACITOR_OUTPUT_LETTERS),
        _ => None,
    }
}

/// The letters of a unit's code, for error messages.
pub(crate) fn code_letters_description(unit: Unit) -> &'static str {
    match unit {
        Unit::Ohm => "R, K or k, M, G, T",
        Unit::Farad => "p, n, u or µ, m, F",
        _ => "none for this unit",
    }
}

/// The range [lowest, below) that [`format_code`] can write: from a thousandth of the smallest
/// multiplier (three zeros after the letter, "R001") to below a thousand of the largest ("999T").
pub(crate) fn code_value_range(unit: Unit) -> Option<(f64, f64)> {
    let letters = output_letters(unit)?;
    let (_, lowest_exponent) = letters.first()?;
    let (_, highest_exponent) = letters.last()?;
    Some((10f64.powi(lowest_exponent - 3), 10f64.powi(highest_exponent + 3)))
}

/// Whether text has the shape of a code: digits with exactly one multiplier letter of the
/// unit ("4K7", "R47", "100R", "20T", "n47"). Forms such as "10K" or "100n" are codes and plain
/// prefixed numbers at once, with the same value either way; "1m" for ohms is not a code shape
/// and so reaches the ambiguity check of the quantity grammar.
pub(crate) fn looks_like_code(text: &str, unit: Unit) -> bool {
    let Some(letters) = input_letters(unit) else {
        return false;
    };
    let is_letter = |character: char| letters.iter().any(|(letter, _)| *letter == character);
    if !text.chars().all(|character| character.is_ascii_digit() || is_letter(character)) {
        return false;
    }
    let letter_count = text.chars().filter(|character| is_letter(*character)).count();
    letter_count == 1 && text.chars().any(|character| character.is_ascii_digit())
}

/// Reads an IEC 60062 code, where the multiplier letter stands in place of the decimal point:
/// for `Unit::Ohm` R, K (or k), M, G, T ("4K7" = 4700 Ω, "R47" = 0.47 Ω); for `Unit::Farad`
/// p, n, u/µ/μ, m, F ("2n2" = 2.2 nF, "n47" = 0.47 nF). Other units have no codes.
pub fn parse_code(text: &str, unit: Unit) -> Result<f64, QuantityError> {
    let letters = input_letters(unit).ok_or(QuantityError::CodeUnsupportedUnit { unit })?;
    let trimmed = text.trim();
    if trimmed.is_empty() {
        return Err(QuantityError::Empty { expected_unit: unit });
    }
    let invalid =
        |problem: CodeProblem| QuantityError::InvalidCode { text: trimmed.to_string(), unit, problem };
    let mut found_letter: Option<(usize, char, i32)> = None;
    for (index, character) in trimmed.char_indices() {
        if character.is_ascii_digit() {
            continue;
        }
        let Some((_, exponent)) = letters.iter().find(|(letter, _)| *letter == character) else {
            return Err(invalid(CodeProblem::UnexpectedCharacter(character)));
        };
        if found_letter.is_some() {
            return Err(invalid(CodeProblem::MoreThanOneLetter));
        }
        found_letter = Some((index, character, *exponent));
    }
    let (index, letter, exponent) = found_letter.ok_or_else(|| invalid(CodeProblem::MissingLetter))?;
    let before = trimmed.get(..index).unwrap_or_default();
    let after = trimmed.get(index + letter.len_utf8()..).unwrap_or_default();
    if before.is_empty() && after.is_empty() {
        return Err(invalid(CodeProblem::NoDigits));
    }
    let integer = if before.is_empty() { "0" } else { before };
    let mantissa = if after.is_empty() { integer.to_string() } else { format!("{integer}.{after}") };
    let value =
        decimal_to_f64(&mantissa, i64::from(exponent)).ok_or_else(|| invalid(CodeProblem::NoDigits))?;
    if !value.is_finite() {
        return Err(QuantityError::NotFinite { text: trimmed.to_string() });
    }
    Ok(value)
}

/// Writes `value` as an IEC 60062 code rounded to `significant_digits` (1..=15), e.g. 4700 Ω
/// → "4K7", 0.47 Ω → "R47", 100 Ω → "100R", 2.2e-9 F → "2n2", 100e-9 F → "100n".
///
/// The largest multiplier not above the value is chosen, so 470 pF is "470p", not "n47".
/// Following common practice, a single leading digit with nothing after the letter gets a
/// "0" so the letter is not last ("1K0", "1p0"), while "10K" and "100n" stay as they are.
/// Zero ohms is "0R" (the zero-ohm link); zero farads has no code.
pub fn format_code(value: f64, unit: Unit, significant_digits: usize) -> Result<String, QuantityError> {
    let letters = output_letters(unit).ok_or(QuantityError::CodeUnsupportedUnit { unit })?;
    if significant_digits == 0 || significant_digits > CODE_MAXIMUM_DIGITS {
        return Err(QuantityError::InvalidSignificantDigits { requested: significant_digits });
    }
    let not_representable = QuantityError::CodeValueNotRepresentable { value, unit };
    if unit == Unit::Ohm && value == 0.0 {
        return Ok("0R".to_string());
    }
    let rounded = match RoundedDecimal::new(value, significant_digits) {
        Some(rounded) if !rounded.negative => rounded,
        _ => return Err(not_representable),
    };
    // The range check uses the rounded exponent, since rounding can carry into the next decade.
    let (_, lowest_exponent) = letters.first().ok_or(not_representable.clone())?;
    let (_, highest_exponent) = letters.last().ok_or(not_representable.clone())?;
    if rounded.exponent < lowest_exponent - 3 || rounded.exponent >= highest_exponent + 3 {
        return Err(not_representable);
    }
    let (letter, letter_exponent) = letters
        .iter()
        .rev()
        .find(|(_, exponent)| *exponent <= rounded.exponent)
        .or(letters.first())
        .ok_or(not_representable)?;
    let (integer, mut fraction) = rounded.split_at_point(rounded.exponent - letter_exponent + 1);
    if integer.len() == 1 && fraction.is_empty() {
        fraction.push('0');
    }
    Ok(format!("{integer}{letter}{fraction}"))
}

/// The tolerance (as a fraction, 0.05 for ±5 %) that an IEC 60062 tolerance letter stands for:
/// B 0.1 %, C 0.25 %, D 0.5 %, F 1 %, G 2 %, J 5 %, K 10 %, M 20 %. Letters are upper case
/// only, as the standard prints them; anything else gives `None`.
pub fn tolerance_from_letter(letter: char) -> Option<f64> {
    TOLERANCE_LETTERS.iter().find(|(candidate, _)| *candidate == letter).map(|(_, tolerance)| *tolerance)
}

/// The IEC 60062 letter for a tolerance fraction, matched within 1e-9 relative; `None` when
/// the tolerance has no letter (e.g. 0.03).
pub fn tolerance_letter(tolerance_fraction: f64) -> Option<char> {
    TOLERANCE_LETTERS
        .iter()
        .find(|(_, tolerance)| (tolerance - tolerance_fraction).abs() <= 1e-9 * tolerance)
        .map(|(letter, _)| *letter)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn code_shape_detection() {
        assert!(looks_like_code("4K7", Unit::Ohm));
        assert!(looks_like_code("R47", Unit::Ohm));
        assert!(looks_like_code("100R", Unit::Ohm));
        assert!(looks_like_code("n47", Unit::Farad));
        assert!(looks_like_code("2µ2", Unit::Farad));
        assert!(looks_like_code("20T", Unit::Ohm));
        assert!(looks_like_code("10K", Unit::Ohm));
        // Malformed or foreign forms are left to the quantity grammar and its messages.
        assert!(!looks_like_code("1m", Unit::Ohm));
        assert!(!looks_like_code("1M", Unit::Farad));
        assert!(!looks_like_code("K", Unit::Ohm));
        assert!(!looks_like_code("1m5", Unit::Ohm));
        assert!(!looks_like_code("4K7K", Unit::Ohm));
        assert!(!looks_like_code("4.7K", Unit::Ohm));
        assert!(!looks_like_code("4V7", Unit::Volt));
    }

    #[test]
    fn code_range_matches_the_letters() {
        assert_eq!(code_value_range(Unit::Ohm), Some((1e-3, 1e15)));
        assert_eq!(code_value_range(Unit::Farad), Some((1e-15, 1e3)));
        assert_eq!(code_value_range(Unit::Volt), None);
    }

    #[test]
    fn rounding_that_leaves_the_range_is_refused() {
        // 999.96 T rounds to 1.00e15, past the largest multiplier.
        assert!(matches!(
            format_code(999.96e12, Unit::Ohm, 3),
            Err(QuantityError::CodeValueNotRepresentable { .. })
        ));
        assert_eq!(format_code(999.0e12, Unit::Ohm, 3), Ok("999T".to_string()));
    }

    #[test]
    fn tiny_values_get_leading_zeros_after_the_letter() {
        assert_eq!(format_code(0.047, Unit::Ohm, 2), Ok("R047".to_string()));
        assert_eq!(format_code(0.001, Unit::Ohm, 2), Ok("R001".to_string()));
        assert_eq!(format_code(4.7e-15, Unit::Farad, 2), Ok("p0047".to_string()));
    }
}
