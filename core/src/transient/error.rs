//! Why a simulation stopped: typed errors that say when and where, and what to change.

use serde::Serialize;

use super::circuit::CircuitError;

#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum SimulationError {
    /// Occurs when the circuit description fails validation; lists every problem.
    InvalidCircuit(Vec<CircuitError>),
    /// Occurs when a run setting is out of range.
    InvalidSettings { field: String, problem: String },
    /// Occurs when an operating-point hint names a node the circuit does not have.
    UnknownHintNode { node: String },
    /// Occurs when the linear system has no unique solution: a loop of voltage sources or a
    /// node whose voltage nothing sets.
    Singular { time_s: f64, node: String },
    /// Occurs when the operating point was not found even with source and gmin stepping.
    OperatingPointNonConvergence { node: String, largest_update_v: f64 },
    /// Occurs when Newton–Raphson fails at every step size down to the minimum.
    NonConvergence { time_s: f64, node: String },
    /// Occurs when the truncation error stays above tolerance down to the minimum step.
    TimestepTooSmall { time_s: f64, step_s: f64 },
    /// Occurs when the run needs more accepted steps than `max_steps` allows.
    StepLimit { time_s: f64, max_steps: usize },
}

impl std::fmt::Display for SimulationError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            SimulationError::InvalidCircuit(errors) => {
                write!(f, "the circuit is not valid:")?;
                for error in errors {
                    write!(f, " {error};")?;
                }
                Ok(())
            }
            SimulationError::InvalidSettings { field, problem } => write!(f, "setting {field} {problem}"),
            SimulationError::UnknownHintNode { node } => {
                write!(f, "the operating-point hint names node {node}, which no element uses: correct the name")
            }
            SimulationError::Singular { time_s, node } => write!(
                f,
                "at t = {time_s:.4e} s the equations are singular at {node}: check for a loop of voltage sources or a node that only capacitors or current sources reach"
            ),
            SimulationError::OperatingPointNonConvergence { node, largest_update_v } => write!(
                f,
                "the operating point did not converge (largest update {largest_update_v:.3e} V at {node}): give a hint for that node's voltage or check the element values around it"
            ),
            SimulationError::NonConvergence { time_s, node } => write!(
                f,
                "at t = {time_s:.4e} s Newton–Raphson did not converge at node {node}, even at the minimum step: check the elements at that node or lower the minimum step"
            ),
            SimulationError::TimestepTooSmall { time_s, step_s } => write!(
                f,
                "at t = {time_s:.4e} s the step fell to {step_s:.3e} s without meeting the error tolerance: loosen relative_tolerance, slow the source edges, or lower min_step_s"
            ),
            SimulationError::StepLimit { time_s, max_steps } => write!(
                f,
                "the run reached {max_steps} steps at t = {time_s:.4e} s: shorten stop_time_s, raise max_steps, or loosen the tolerance"
            ),
        }
    }
}

impl std::error::Error for SimulationError {}
