//! Flipwright core: models, analysis and synthesis of discrete-transistor bistable stages.
//!
//! Everything here is plain computation on values: no file or network IO, no browser, no
//! clock. Quantities are `f64` in SI base units (volts, amperes, ohms, farads, seconds);
//! temperatures are degrees Celsius in fields named `*_c`.

pub mod chain;
pub mod design_file;
pub mod device;
pub mod numeric;
pub mod physics;
pub mod stage;
pub mod table;
pub mod tolerance;
pub mod transient;
pub mod units;
pub mod verify;
