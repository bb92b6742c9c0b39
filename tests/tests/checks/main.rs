//! Cross-checks of the core against outside references (standards, handbooks, formulas).
//!
//! One test binary; each module holds the checks for one area and names its sources.

mod series;
mod units;
mod physics;
mod handbook;
mod charge_control;
mod ebers_moll;
mod stage_models;
