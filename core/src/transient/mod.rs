//! Transient simulation of small transistor circuits: description, modified nodal analysis,
//! operating point, integration and waveform measurements.
//!
//! - [`circuit`]: the serde description (named nodes, SI units) and its validation;
//! - [`circuit_file`]: the versioned JSON document (circuit, run settings, hints, probes);
//! - [`waveform`]: source waveforms and their corners;
//! - [`devices`]: junction laws (depletion charge, limiting) shared by the stamps;
//! - [`system`]: the compiled MNA system and Newton–Raphson at one instant;
//! - [`linear`]: the linear solver trait, dense and sparse LU and the automatic choice;
//! - [`operating_point`]: DC with hints, source stepping and gmin stepping;
//! - [`integrator`]: trapezoidal/backward-Euler integration with truncation-error control;
//! - [`measure`]: crossings, delays, edges, toggle counts and waveform summaries;
//! - [`export`]: CSV of chosen probes;
//! - [`error`]: the typed failures.
//!
//! Devices are evaluated in their NPN frame; PNP transistors flip voltages and currents at
//! the stamp, so the rest of the engine never looks at polarity.

pub mod circuit;
pub mod circuit_file;
pub mod devices;
pub mod error;
pub mod export;
pub mod integrator;
pub mod linear;
pub mod measure;
pub mod operating_point;
pub mod system;
pub mod waveform;

pub use circuit::{Circuit, CircuitError, DiodeModel, Element};
pub use circuit_file::{CircuitFile, Probes};
pub use error::SimulationError;
pub use export::{ExportError, Probe};
pub use integrator::{simulate, simulate_with, RunStatistics, TransientResult, TransientSettings};
pub use linear::{AutomaticSolver, DenseSolver, FillOrdering, LinearSolver, SingularColumn, SparseSolver};
pub use operating_point::{operating_point, OperatingPoint, OperatingPointHints, OperatingPointMethod};
pub use waveform::Waveform;
