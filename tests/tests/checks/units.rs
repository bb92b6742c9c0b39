//! Checks of quantity text and IEC 60062 codes against SI prefix definitions and IEC 60062 examples.

use flipwright::units::{
    format_code, format_quantity, format_quantity_digits, parse_code, parse_quantity, tolerance_from_letter,
    tolerance_letter, QuantityError, Unit,
};
use proptest::prelude::*;

/// Parses `input` as `unit` and demands exactly `expected`: the parser promises the `f64`
/// nearest to the decimal value written, which is what the literal `expected` also is.
fn check(input: &str, unit: Unit, expected: f64) {
    match parse_quantity(input, unit) {
        Ok(value) => assert_eq!(value, expected, "parse_quantity({input:?}, {unit:?})"),
        Err(error) => panic!("parse_quantity({input:?}, {unit:?}) failed: {error}"),
    }
}

/// Parses `input` expecting an error whose message contains every one of `fragments`.
fn check_error(input: &str, unit: Unit, fragments: &[&str]) -> QuantityError {
    let error = match parse_quantity(input, unit) {
        Ok(value) => panic!("parse_quantity({input:?}, {unit:?}) gave {value}, expected an error"),
        Err(error) => error,
    };
    let message = error.to_string();
    for fragment in fragments {
        assert!(message.contains(fragment), "message for {input:?} lacks {fragment:?}: {message}");
    }
    error
}

#[test]
fn plain_numbers_and_si_prefixes() {
    // Prefix factors: BIPM SI Brochure, 9th edition (2019), table 7.
    check("0.47", Unit::Ohm, 0.47);
    check("1e3", Unit::Ohm, 1000.0);
    check("4.7k", Unit::Ohm, 4700.0);
    check("4.7 k", Unit::Ohm, 4700.0);
    check("4.7kΩ", Unit::Ohm, 4700.0);
    check("4.7 kΩ", Unit::Ohm, 4700.0);
    check("4.7 k\u{2126}", Unit::Ohm, 4700.0); // U+2126 OHM SIGN, Unicode's compatibility form of omega
    check("4.7 kohm", Unit::Ohm, 4700.0);
    check("4.7kOhm", Unit::Ohm, 4700.0);
    check("4.7K", Unit::Ohm, 4700.0); // upper-case K for kilo: common practice
    check("1M", Unit::Ohm, 1e6);
    check("1 mΩ", Unit::Ohm, 1e-3);
    check("2.2G", Unit::Ohm, 2.2e9);
    check("100nF", Unit::Farad, 100e-9);
    check("100 n", Unit::Farad, 100e-9);
    check("2.2 µF", Unit::Farad, 2.2e-6); // U+00B5 MICRO SIGN
    check("2.2 μF", Unit::Farad, 2.2e-6); // U+03BC GREEK SMALL LETTER MU
    check("2.2 uF", Unit::Farad, 2.2e-6); // ASCII u for micro: common practice
    check("1.5e-9 F", Unit::Farad, 1.5e-9);
    check("1mF", Unit::Farad, 1e-3);
    check("10 pF", Unit::Farad, 10e-12);
    check("10 mA", Unit::Ampere, 10e-3);
    check("10mA", Unit::Ampere, 10e-3);
    check("-5 V", Unit::Volt, -5.0);
    check("+12V", Unit::Volt, 12.0);
    check("  3.3 V \t", Unit::Volt, 3.3);
    check("1 MHz", Unit::Hertz, 1e6);
    check("32.768 kHz", Unit::Hertz, 32_768.0);
    check("1.5 µs", Unit::Second, 1.5e-6);
    check("250 mW", Unit::Watt, 0.25);
    check(".5", Unit::Volt, 0.5);
    check("1E-3", Unit::Second, 1e-3);
    check("1e3k", Unit::Ohm, 1e6);
}

#[test]
fn iec_60062_codes_inside_quantities() {
    // Letter-and-digit codes: IEC 60062 multiplier letters in place of the decimal point.
    check("4K7", Unit::Ohm, 4700.0);
    check("R47", Unit::Ohm, 0.47);
    check("100R", Unit::Ohm, 100.0);
    check("2n2", Unit::Farad, 2.2e-9);
    check("n47", Unit::Farad, 0.47e-9);
    check("10K", Unit::Ohm, 10_000.0);
    check("20T", Unit::Ohm, 20e12); // T = tera, an IEC 60062 resistor letter though not an input prefix
}

#[test]
fn resistor_codes_read_as_iec_60062_says() {
    // Each pair: IEC 60062 resistor code examples.
    let cases = [
        ("R47", 0.47),
        ("4R7", 4.7),
        ("4K7", 4700.0),
        ("47K3", 47_300.0),
        ("4M7", 4.7e6),
        ("1K0", 1000.0),
        ("100R", 100.0),
        ("10K", 10_000.0),
        ("4G7", 4.7e9),
        ("1T0", 1e12),
        ("4k7", 4700.0), // lower-case k: common practice, tolerated
    ];
    for (code, expected) in cases {
        assert_eq!(parse_code(code, Unit::Ohm), Ok(expected), "{code}");
    }
}

#[test]
fn capacitor_codes_read_as_iec_60062_says() {
    // Each pair: IEC 60062 capacitor code examples.
    let cases = [
        ("1p0", 1e-12),
        ("6p8", 6.8e-12),
        ("2n2", 2.2e-9),
        ("2u2", 2.2e-6),
        ("2µ2", 2.2e-6),
        ("2μ2", 2.2e-6),
        ("100n", 100e-9),
        ("n47", 0.47e-9),
        ("4m7", 4.7e-3),
        ("1F5", 1.5),
    ];
    for (code, expected) in cases {
        assert_eq!(parse_code(code, Unit::Farad), Ok(expected), "{code}");
    }
}

#[test]
fn codes_are_written_as_iec_60062_says() {
    // Each pair: IEC 60062 examples; "1K0"/"1p0" keep a trailing 0 by common practice.
    let resistor_cases = [
        (4700.0, "4K7"),
        (0.47, "R47"),
        (4.7, "4R7"),
        (100.0, "100R"),
        (1000.0, "1K0"),
        (47_300.0, "47K3"),
        (4.7e6, "4M7"),
        (10_000.0, "10K"),
    ];
    for (value, expected) in resistor_cases {
        assert_eq!(format_code(value, Unit::Ohm, 3), Ok(expected.to_string()), "{value}");
    }
    let capacitor_cases = [
        (2.2e-9, "2n2"),
        (1e-12, "1p0"),
        (100e-9, "100n"),
        (6.8e-12, "6p8"),
        (2.2e-6, "2u2"),
        (470e-12, "470p"),
    ];
    for (value, expected) in capacitor_cases {
        assert_eq!(format_code(value, Unit::Farad, 3), Ok(expected.to_string()), "{value}");
    }
}

#[test]
fn code_formatting_rounds_to_the_requested_digits() {
    // Rounding to significant figures: ordinary arithmetic.
    assert_eq!(format_code(4749.0, Unit::Ohm, 2), Ok("4K7".to_string()));
    assert_eq!(format_code(4751.0, Unit::Ohm, 2), Ok("4K8".to_string()));
    assert_eq!(format_code(4751.0, Unit::Ohm, 4), Ok("4K751".to_string()));
    assert_eq!(format_code(0.0, Unit::Ohm, 3), Ok("0R".to_string())); // zero-ohm link: common practice
}

#[test]
fn code_errors_say_what_was_expected() {
    let not_a_code_unit = parse_code("4K7", Unit::Volt).map_err(|error| error.to_string());
    assert!(
        matches!(not_a_code_unit, Err(message) if message.contains("resistance") && message.contains("volts"))
    );
    let cases = [
        ("470", Unit::Ohm, "no multiplier letter"),
        ("4K7K", Unit::Ohm, "more than one multiplier letter"),
        ("K", Unit::Ohm, "no digits"),
        ("4m7", Unit::Ohm, "'m' is not a digit or a multiplier letter"),
        ("4.7K", Unit::Ohm, "'.' is not a digit"),
        ("4R7", Unit::Farad, "'R' is not a digit"),
    ];
    for (text, unit, fragment) in cases {
        let message = parse_code(text, unit).map_err(|error| error.to_string()).err().unwrap_or_default();
        assert!(message.contains(fragment), "{text}: {message}");
        assert!(message.contains("expected digits"), "{text}: {message}");
    }
    let writing_errors = [
        format_code(-1.0, Unit::Ohm, 3),
        format_code(f64::NAN, Unit::Ohm, 3),
        format_code(0.0, Unit::Farad, 3),
        format_code(1e16, Unit::Ohm, 3),
        format_code(1e-4, Unit::Ohm, 3),
        format_code(1e4, Unit::Farad, 3),
    ];
    for result in writing_errors {
        let message = result.err().map(|error| error.to_string()).unwrap_or_default();
        assert!(message.contains("cannot be written as an IEC 60062 code"), "{message}");
    }
    assert!(matches!(
        format_code(4700.0, Unit::Ohm, 0),
        Err(QuantityError::InvalidSignificantDigits { requested: 0 })
    ));
    assert!(format_code(4700.0, Unit::Ohm, 16).is_err());
    assert!(format_code(4700.0, Unit::Hertz, 3).is_err());
}

#[test]
fn tolerance_letters_follow_iec_60062() {
    // Each pair: IEC 60062 tolerance letter table.
    let table = [
        ('B', 0.001),
        ('C', 0.0025),
        ('D', 0.005),
        ('F', 0.01),
        ('G', 0.02),
        ('J', 0.05),
        ('K', 0.10),
        ('M', 0.20),
    ];
    for (letter, tolerance) in table {
        assert_eq!(tolerance_from_letter(letter), Some(tolerance), "{letter}");
        assert_eq!(tolerance_letter(tolerance), Some(letter), "{tolerance}");
        assert_eq!(tolerance_letter(tolerance * (1.0 + 5e-10)), Some(letter));
    }
    assert_eq!(tolerance_letter(0.03), None);
    assert_eq!(tolerance_letter(0.05 * 1.000_001), None);
    assert_eq!(tolerance_letter(f64::NAN), None);
    assert_eq!(tolerance_from_letter('A'), None);
    assert_eq!(tolerance_from_letter('j'), None);
}

#[test]
fn quantities_are_written_with_engineering_prefixes() {
    // Prefix symbols: BIPM SI Brochure, 9th edition (2019), table 7; U+00B5 for micro.
    let cases = [
        (4700.0, Unit::Ohm, "4.7 kΩ"),
        (100e-9, Unit::Farad, "100 nF"),
        (2.2e-6, Unit::Farad, "2.2 µF"),
        (10e-3, Unit::Ampere, "10 mA"),
        (0.0, Unit::Volt, "0 V"),
        (-5.0, Unit::Volt, "-5 V"),
        (1.25e6, Unit::Hertz, "1.25 MHz"),
        (1e-3, Unit::Ohm, "1 mΩ"),
        (999.6, Unit::Ohm, "1 kΩ"),
        (1.234_56e-11, Unit::Second, "12.3 ps"),
        (2.5e9, Unit::Watt, "2.5 GW"),
    ];
    for (value, unit, expected) in cases {
        assert_eq!(format_quantity(value, unit), expected, "{value}");
    }
    assert_eq!(format_quantity_digits(4_712.0, Unit::Ohm, 2), "4.7 kΩ");
    assert_eq!(format_quantity_digits(4_712.0, Unit::Ohm, 4), "4.712 kΩ");
    assert_eq!(format_quantity_digits(4_712.0, Unit::Ohm, 1), "5 kΩ");
}

#[test]
fn wrong_input_is_refused_with_a_helpful_message() {
    check_error("", Unit::Ohm, &["no value given", "ohms"]);
    check_error("   ", Unit::Farad, &["no value given", "farads"]);
    check_error("abc", Unit::Ohm, &["\"abc\" is not a number", "4.7 kΩ"]);
    check_error("k", Unit::Ohm, &["not a number"]);
    check_error("NaN", Unit::Volt, &["not a finite number"]);
    check_error("-inf V", Unit::Volt, &["not a finite number"]);
    check_error("1e999", Unit::Volt, &["not a finite number"]);
    check_error("10 V", Unit::Ohm, &["volts (V)", "ohms (Ω)"]);
    check_error("1 mohm", Unit::Farad, &["ohms", "farads"]);
    check_error("4.7 x", Unit::Ohm, &["\"x\" is not an SI prefix", "Ω"]);
    check_error("4.7 kV", Unit::Ohm, &["volts", "ohms"]);
    check_error("4.7 kx", Unit::Ohm, &["\"kx\""]);
    check_error("1.2.3", Unit::Volt, &["more than one decimal point"]);
    check_error("4.7kΩ abc", Unit::Ohm, &["\"kΩ abc\""]);
    check_error("4.7e", Unit::Volt, &["\"e\""]);
    check_error("5 V V", Unit::Volt, &["\"V V\""]);
    check_error("4.7 k Ω", Unit::Ohm, &["\"k Ω\""]);
    check_error("1f", Unit::Farad, &["\"f\""]);
}

#[test]
fn ambiguous_prefixes_are_refused() {
    // Bare "m" on a resistance: milliohm by SI, megohm by shop habit; refused by design.
    let error = check_error("1m", Unit::Ohm, &["ambiguous", "\"M\"", "mΩ"]);
    assert!(matches!(error, QuantityError::AmbiguousResistancePrefix { .. }));
    let error = check_error("1M", Unit::Farad, &["megafarads", "µ"]);
    assert!(matches!(error, QuantityError::ImplausibleCapacitancePrefix { .. }));
    // Spelled-out units are unambiguous.
    check("1 mΩ", Unit::Ohm, 1e-3);
    check("1 MF", Unit::Farad, 1e6);
    check("1m", Unit::Volt, 1e-3);
}

/// Log-uniform positive values between 10^low and 10^high.
fn log_uniform(low: f64, high: f64) -> impl Strategy<Value = f64> {
    (low..high).prop_map(|exponent| 10f64.powf(exponent))
}

fn any_unit() -> impl Strategy<Value = Unit> {
    proptest::sample::select(Unit::ALL.to_vec())
}

/// Whether `rounded` is `original` rounded to `digits` significant figures: it has no more
/// digits than that and lies within half a unit of the last kept digit.
fn is_rounding_of(rounded: f64, original: f64, digits: i32) -> bool {
    let last_digit_exponent = original.abs().log10().floor() as i32 - (digits - 1);
    let unit_in_last_place = 10f64.powi(last_digit_exponent);
    let scaled = rounded / unit_in_last_place;
    // Division error stays far below a thousandth of a unit for up to 15 digits.
    let has_few_digits = (scaled - scaled.round()).abs() <= 1e-3;
    // The slack covers a carry into the next decade (9.996 → 10.0) and binary ties.
    let close_enough = (rounded - original).abs() <= 0.5 * unit_in_last_place * (1.0 + 1e-9);
    has_few_digits && close_enough
}

proptest! {
    #[test]
    fn quantities_round_trip_within_three_digits(
        magnitude in log_uniform(-12.0, 9.0),
        negative in any::<bool>(),
        unit in any_unit(),
    ) {
        let value = if negative { -magnitude } else { magnitude };
        let text = format_quantity(value, unit);
        let parsed = parse_quantity(&text, unit);
        prop_assert!(parsed.is_ok(), "{text}: {parsed:?}");
        let parsed = parsed.unwrap_or_default();
        prop_assert!(is_rounding_of(parsed, value, 3), "{value} → {text} → {parsed}");
    }

    #[test]
    fn quantities_round_trip_at_any_digit_count(
        magnitude in log_uniform(-15.0, 15.0),
        digits in 1usize..=12,
        unit in any_unit(),
    ) {
        let text = format_quantity_digits(magnitude, unit, digits);
        let parsed = parse_quantity(&text, unit);
        prop_assert!(parsed.is_ok(), "{text}: {parsed:?}");
        let parsed = parsed.unwrap_or_default();
        prop_assert!(is_rounding_of(parsed, magnitude, digits as i32), "{magnitude} → {text} → {parsed}");
    }

    #[test]
    fn resistor_codes_round_trip(value in log_uniform(-2.999, 14.9), digits in 1usize..=6) {
        let code = format_code(value, Unit::Ohm, digits);
        prop_assert!(code.is_ok(), "{value}: {code:?}");
        let code = code.unwrap_or_default();
        prop_assert!(!code.contains('.'), "{code}");
        prop_assert_eq!(code.chars().filter(|c| !c.is_ascii_digit()).count(), 1, "{}", code);
        let parsed = parse_code(&code, Unit::Ohm).unwrap_or(f64::NAN);
        prop_assert!(is_rounding_of(parsed, value, digits as i32), "{value} → {code} → {parsed}");
        // The quantity parser must read codes too.
        prop_assert_eq!(parse_quantity(&code, Unit::Ohm), Ok(parsed), "{}", code);
    }

    #[test]
    fn capacitor_codes_round_trip(value in log_uniform(-14.999, 2.9), digits in 1usize..=6) {
        let code = format_code(value, Unit::Farad, digits);
        prop_assert!(code.is_ok(), "{value}: {code:?}");
        let code = code.unwrap_or_default();
        prop_assert!(code.is_ascii(), "{code}");
        let parsed = parse_code(&code, Unit::Farad).unwrap_or(f64::NAN);
        prop_assert!(is_rounding_of(parsed, value, digits as i32), "{value} → {code} → {parsed}");
        prop_assert_eq!(parse_quantity(&code, Unit::Farad), Ok(parsed), "{}", code);
    }

    #[test]
    fn parsing_arbitrary_text_never_panics(text in "\\PC*", unit in any_unit()) {
        if let Ok(value) = parse_quantity(&text, unit) {
            prop_assert!(value.is_finite());
        }
        if let Ok(value) = parse_code(&text, unit) {
            prop_assert!(value.is_finite());
        }
    }

    #[test]
    fn parsing_number_like_text_never_panics(
        text in "[-+0-9.eEkKmMunpGµμΩRFVAsHzWoh ]{0,12}",
        unit in any_unit(),
    ) {
        match parse_quantity(&text, unit) {
            Ok(value) => prop_assert!(value.is_finite()),
            Err(error) => prop_assert!(!error.to_string().is_empty()),
        }
        if let Ok(value) = parse_code(&text, unit) {
            prop_assert!(value.is_finite());
        }
    }
}
