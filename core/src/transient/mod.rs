//! Transient simulation of small transistor circuits: description, modified nodal analysis,
//! operating point, integration and waveform measurements.
//!
//! - [`circuit`]: the serde description (named nodes, SI units) and its validation;
//! - [`waveform`]: source waveforms and their corners;
//! - [`devices`]: junction laws (depletion charge, limiting) shared by the stamps;
//! - [`system`]: the compiled MNA system and Newton–Raphson at one instant;
//! - [`linear`]: the linear solver trait and the dense implementation;
//! - [`operating_point`]: DC with hints, source stepping and gmin stepping;
//! - [`integrator`]: trapezoidal/backward-Euler integration with truncation-error control;
//! - [`measure`]: crossings, delays, edges and toggle counts;
//! - [`error`]: the typed failures.
//!
//! Devices are evaluated in their NPN frame; PNP transistors flip voltages and currents at
//! the stamp, so the rest of the engine never looks at polarity.

pub mod circuit;
pub mod devices;
pub mod error;
pub mod integrator;
pub mod linear;
pub mod measure;
pub mod operating_point;
pub mod system;
pub mod waveform;

pub use circuit::{Circuit, CircuitError, DiodeModel, Element};
pub use error::SimulationError;
pub use integrator::{simulate, simulate_with, RunStatistics, TransientResult, TransientSettings};
pub use linear::{DenseSolver, LinearSolver};
pub use operating_point::{operating_point, OperatingPoint, OperatingPointHints, OperatingPointMethod};
pub use waveform::Waveform;
