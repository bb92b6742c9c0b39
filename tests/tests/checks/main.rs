//! Cross-checks of the core against outside references (standards, handbooks, formulas).
//!
//! One test binary; each module holds the checks for one area and names its sources.

mod chain;
mod charge_control;
mod design_file;
mod ebers_moll;
mod handbook;
mod physics;
mod robustness;
mod series;
mod stage_models;
mod tolerance;
mod transient;
mod units;
mod verify;
mod worst_case;
