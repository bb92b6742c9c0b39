//! Physical units, SI-prefixed quantities, IEC 60062 codes and IEC 60063 preferred-number series.
//!
//! Values are plain `f64` in SI base units; this module only turns them into text and back,
//! and snaps them to preferred component values.

mod decimal;
mod error;
mod iec60062;
mod quantity;
mod series;

pub use error::{CodeProblem, QuantityError};
pub use iec60062::{format_code, parse_code, tolerance_from_letter, tolerance_letter};
pub use quantity::{format_quantity, format_quantity_digits, parse_quantity};
pub use series::{series_table_text, ESeries};

use std::fmt;

/// The physical units a component value or operating point is expressed in.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub enum Unit {
    Ohm,
    Farad,
    Volt,
    Ampere,
    Second,
    Hertz,
    Watt,
}

impl Unit {
    /// Every unit, for iteration in tests and user interfaces.
    pub const ALL: [Unit; 7] =
        [Unit::Ohm, Unit::Farad, Unit::Volt, Unit::Ampere, Unit::Second, Unit::Hertz, Unit::Watt];

    /// SI symbol; the ohm uses U+03A9 GREEK CAPITAL LETTER OMEGA, which Unicode prefers over U+2126.
    /// The unit whose SI symbol is `symbol` ("V", "A", "Ω" or "ohm", …), if any: the same
    /// lookup the quantity parser uses for a value's unit.
    pub fn from_symbol(symbol: &str) -> Option<Unit> {
        quantity::unit_from_symbol(symbol)
    }

    pub fn symbol(self) -> &'static str {
        match self {
            Unit::Ohm => "Ω",
            Unit::Farad => "F",
            Unit::Volt => "V",
            Unit::Ampere => "A",
            Unit::Second => "s",
            Unit::Hertz => "Hz",
            Unit::Watt => "W",
        }
    }

    /// Plural English name, for messages ("a value in ohms was expected").
    pub fn plural_name(self) -> &'static str {
        match self {
            Unit::Ohm => "ohms",
            Unit::Farad => "farads",
            Unit::Volt => "volts",
            Unit::Ampere => "amperes",
            Unit::Second => "seconds",
            Unit::Hertz => "hertz",
            Unit::Watt => "watts",
        }
    }

    /// A typical well-formed entry, shown in error messages so the user sees what is expected.
    pub(crate) fn example_entry(self) -> &'static str {
        match self {
            Unit::Ohm => "4.7 kΩ",
            Unit::Farad => "100 nF",
            Unit::Volt => "5 V",
            Unit::Ampere => "10 mA",
            Unit::Second => "1.5 µs",
            Unit::Hertz => "1 MHz",
            Unit::Watt => "250 mW",
        }
    }
}

impl fmt::Display for Unit {
    fn fmt(&self, formatter: &mut fmt::Formatter<'_>) -> fmt::Result {
        formatter.write_str(self.symbol())
    }
}
