//! Typed errors for quantity text, IEC 60062 codes and IEC 60063 series look-ups.

use super::iec60062::{code_letters_description, code_value_range, CODE_MAXIMUM_DIGITS};
use super::Unit;
use std::fmt;

/// What is wrong with text that was offered as an IEC 60062 letter-and-digit code.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CodeProblem {
    /// Occurs when the text has digits only, with no multiplier letter in place of the decimal point.
    MissingLetter,
    /// Occurs when the text has two or more multiplier letters ("4K7K").
    MoreThanOneLetter,
    /// Occurs when the text is a lone multiplier letter without digits ("K").
    NoDigits,
    /// Occurs when the text holds a character that is neither a digit nor a multiplier letter for the unit.
    UnexpectedCharacter(char),
}

impl fmt::Display for CodeProblem {
    fn fmt(&self, formatter: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CodeProblem::MissingLetter => formatter.write_str("it has no multiplier letter"),
            CodeProblem::MoreThanOneLetter => formatter.write_str("it has more than one multiplier letter"),
            CodeProblem::NoDigits => formatter.write_str("it has no digits"),
            CodeProblem::UnexpectedCharacter(character) => {
                write!(formatter, "'{character}' is not a digit or a multiplier letter")
            }
        }
    }
}

/// Why a quantity, code or series request could not be served.
#[derive(Debug, Clone, PartialEq)]
pub enum QuantityError {
    /// Occurs when the text is empty or holds only whitespace.
    Empty { expected_unit: Unit },
    /// Occurs when the text does not start with a number (optional sign, digits, at most one decimal point).
    NotANumber { text: String, expected_unit: Unit },
    /// Occurs when the number is NaN or infinite, written so ("inf") or too large for `f64` ("1e999").
    NotFinite { text: String },
    /// Occurs when the number holds more than one decimal point ("1.2.3").
    MultipleDecimalPoints { text: String },
    /// Occurs when the text names a unit other than the expected one ("10 V" where ohms are expected).
    UnitMismatch { text: String, found_unit: Unit, expected_unit: Unit },
    /// Occurs when what follows the number is neither an SI prefix nor the unit symbol, or has trailing garbage.
    UnknownSuffix { text: String, suffix: String, expected_unit: Unit },
    /// Occurs when a resistance carries a bare lowercase "m" ("1m"), which could mean milliohm or megohm.
    AmbiguousResistancePrefix { text: String },
    /// Occurs when a capacitance carries a bare "M" ("1M"): megafarads are almost certainly a slip for µ or m.
    ImplausibleCapacitancePrefix { text: String },
    /// Occurs when an IEC 60062 code is requested for a unit other than ohm or farad.
    CodeUnsupportedUnit { unit: Unit },
    /// Occurs when text is not a well-formed IEC 60062 code for the unit.
    InvalidCode { text: String, unit: Unit, problem: CodeProblem },
    /// Occurs when a value cannot be written as an IEC 60062 code: negative, not finite, zero
    /// capacitance, or beyond what the multiplier letters reach.
    CodeValueNotRepresentable { value: f64, unit: Unit },
    /// Occurs when a code is asked for with zero or more than [`CODE_MAXIMUM_DIGITS`] significant digits.
    InvalidSignificantDigits { requested: usize },
    /// Occurs when a series name is not one of E3, E6, E12, E24, E48, E96, E192.
    UnknownSeries { text: String },
    /// Occurs when a series look-up gets a value that is zero, negative, NaN or infinite.
    SeriesValueNotPositive { value: f64 },
    /// Occurs when the series value asked for lies beyond the range of `f64` (about 1e-308 to 1e308).
    SeriesOutOfRange { value: f64 },
}

impl fmt::Display for QuantityError {
    fn fmt(&self, formatter: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            QuantityError::Empty { expected_unit } => write!(
                formatter,
                "no value given: expected a number in {}, such as \"{}\"",
                expected_unit.plural_name(),
                expected_unit.example_entry()
            ),
            QuantityError::NotANumber { text, expected_unit } => write!(
                formatter,
                "\"{text}\" is not a number: expected digits with an optional sign, decimal point, \
                 exponent, SI prefix and unit symbol, such as \"{}\"",
                expected_unit.example_entry()
            ),
            QuantityError::NotFinite { text } => write!(
                formatter,
                "\"{text}\" is not a finite number: expected an ordinary value \
                 (not NaN or infinity, and within about ±1e308)"
            ),
            QuantityError::MultipleDecimalPoints { text } => write!(
                formatter,
                "\"{text}\" has more than one decimal point: expected at most one, as in \"4.7\""
            ),
            QuantityError::UnitMismatch { text, found_unit, expected_unit } => write!(
                formatter,
                "\"{text}\" is in {} ({}), but a value in {} ({}) was expected",
                found_unit.plural_name(),
                found_unit.symbol(),
                expected_unit.plural_name(),
                expected_unit.symbol()
            ),
            QuantityError::UnknownSuffix { text, suffix, expected_unit } => write!(
                formatter,
                "\"{text}\": \"{suffix}\" is not an SI prefix or unit symbol; expected an optional \
                 prefix (p, n, u or µ, m, k or K, M, G) followed by an optional \"{}\", such as \"{}\"",
                expected_unit.symbol(),
                expected_unit.example_entry()
            ),
            QuantityError::AmbiguousResistancePrefix { text } => write!(
                formatter,
                "\"{text}\" is ambiguous: a bare \"m\" could mean milliohm or megohm; write \"M\" \
                 (as in \"1M\") for megohm or \"mΩ\" (as in \"1 mΩ\") for milliohm"
            ),
            QuantityError::ImplausibleCapacitancePrefix { text } => write!(
                formatter,
                "\"{text}\" would mean megafarads, which is almost certainly a mistake: write \"u\" \
                 or \"µ\" for microfarad (as in \"1 µF\"), \"m\" for millifarad, or \"MF\" if you \
                 really mean megafarads"
            ),
            QuantityError::CodeUnsupportedUnit { unit } => write!(
                formatter,
                "IEC 60062 letter-and-digit codes exist only for resistance (Ω) and capacitance (F), \
                 not for {} ({})",
                unit.plural_name(),
                unit.symbol()
            ),
            QuantityError::InvalidCode { text, unit, problem } => write!(
                formatter,
                "\"{text}\" is not an IEC 60062 code for {}: {problem}; expected digits with one \
                 multiplier letter ({}) in place of the decimal point, such as \"{}\"",
                unit.plural_name(),
                code_letters_description(*unit),
                if *unit == Unit::Farad { "2n2" } else { "4K7" }
            ),
            QuantityError::CodeValueNotRepresentable { value, unit } => match code_value_range(*unit) {
                Some((lowest, below)) => write!(
                    formatter,
                    "{value} {} cannot be written as an IEC 60062 code: expected a finite value \
                         from {lowest:e} {} up to (not including) {below:e} {}{}",
                    unit.symbol(),
                    unit.symbol(),
                    unit.symbol(),
                    if *unit == Unit::Ohm { ", or exactly 0 (\"0R\")" } else { "" }
                ),
                None => write!(
                    formatter,
                    "{value} {} cannot be written as an IEC 60062 code: codes exist only for \
                         ohms and farads",
                    unit.symbol()
                ),
            },
            QuantityError::InvalidSignificantDigits { requested } => write!(
                formatter,
                "{requested} significant digits requested: expected 1 to {CODE_MAXIMUM_DIGITS}"
            ),
            QuantityError::UnknownSeries { text } => write!(
                formatter,
                "\"{text}\" is not an E-series: expected one of E3, E6, E12, E24, E48, E96, E192"
            ),
            QuantityError::SeriesValueNotPositive { value } => {
                write!(formatter, "{value} has no E-series neighbour: expected a positive finite value")
            }
            QuantityError::SeriesOutOfRange { value } => write!(
                formatter,
                "no E-series value exists there for {value}: the result would lie beyond the range \
                 of floating-point numbers (about 1e-308 to 1e308)"
            ),
        }
    }
}

impl std::error::Error for QuantityError {}
