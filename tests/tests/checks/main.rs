//! Cross-checks of the core against outside references (standards, handbooks, formulas).
//!
//! One test binary; each module holds the checks for one area and names its sources.

mod series;
mod units;
mod physics;
mod handbook;
