//! DC operating point: Newton–Raphson from optional node hints, falling back to source
//! stepping and then gmin stepping.

use serde::{Deserialize, Serialize};

use super::circuit::Circuit;
use super::error::SimulationError;
use super::linear::{AutomaticSolver, LinearSolver};
use super::system::{Conditions, Failure, NewtonTolerances, Solved, System};

/// Conductance that holds a hinted node near its hint during the first solve: 0.1 S beats the
/// kilohm networks of a stage, so the solve lands in the hinted state; a second solve without
/// it then settles the exact point nearby.
const HINT_CONDUCTANCE_S: f64 = 0.1;
/// Newton budget of each DC attempt (each continuation step has its own).
const DC_NEWTON_ITERATIONS: usize = 150;
/// Bound on source-stepping attempts (successes and halvings together).
const SOURCE_STEPPING_ATTEMPTS: usize = 200;
/// Smallest source-scale increment before source stepping gives up.
const SOURCE_STEPPING_MIN_INCREMENT: f64 = 1e-4;
/// Extra node-to-ground conductance at the start of gmin stepping, reduced tenfold per step.
const GMIN_STEPPING_START_S: f64 = 1e-2;
const GMIN_STEPPING_STEPS: usize = 11;

/// Starting voltages for the operating point, by node name: which transistor starts ON in a
/// bistable, for instance.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct OperatingPointHints {
    pub node_voltages_v: Vec<(String, f64)>,
}

/// How the operating point was found.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum OperatingPointMethod {
    Direct,
    Hinted,
    SourceStepping,
    GminStepping,
}

/// The DC solution.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct OperatingPoint {
    pub node_names: Vec<String>,
    pub node_voltages_v: Vec<f64>,
    pub source_names: Vec<String>,
    /// Current through each voltage source from its positive to its negative terminal.
    pub source_currents_a: Vec<f64>,
    pub method: OperatingPointMethod,
    pub newton_iterations: usize,
}

impl OperatingPoint {
    /// Voltage of a node by name (ground reads 0).
    pub fn voltage(&self, node: &str) -> Option<f64> {
        if super::circuit::is_ground(node) {
            return Some(0.0);
        }
        let index = self.node_names.iter().position(|n| n == node)?;
        self.node_voltages_v.get(index).copied()
    }
}

/// The DC operating point of a circuit at t = 0 (automatic choice of linear solver).
pub fn operating_point(
    circuit: &Circuit,
    hints: &OperatingPointHints,
) -> Result<OperatingPoint, SimulationError> {
    let system = System::compile(circuit)?;
    let mut solver = AutomaticSolver::default();
    let (solved, method, _) = solve_operating_point(&system, &mut solver, hints, default_tolerances())?;
    let node_count = system.node_count();
    Ok(OperatingPoint {
        node_names: system.node_names.clone(),
        node_voltages_v: solved.unknowns.get(..node_count).map(|s| s.to_vec()).unwrap_or_default(),
        source_names: system.source_names.clone(),
        source_currents_a: solved.unknowns.get(node_count..).map(|s| s.to_vec()).unwrap_or_default(),
        method,
        newton_iterations: solved.iterations,
    })
}

pub(crate) fn default_tolerances() -> NewtonTolerances {
    NewtonTolerances {
        relative: 1e-6,
        voltage_v: 1e-9,
        current_a: 1e-15,
        max_iterations: DC_NEWTON_ITERATIONS,
    }
}

fn dc_conditions<'a>(source_scale: f64, extra_gmin_s: f64, pulls: &'a [(usize, f64, f64)]) -> Conditions<'a> {
    Conditions {
        time_s: 0.0,
        source_scale,
        extra_gmin_s,
        integration: None,
        previous_charges: &[],
        previous_charge_currents: &[],
        pulls,
    }
}

fn to_error(system: &System, failure: Failure) -> SimulationError {
    match failure {
        Failure::Singular { unknown } => {
            SimulationError::Singular { time_s: 0.0, node: system.unknown_name(unknown) }
        }
        Failure::NotConverged { unknown, largest_update, .. } => {
            SimulationError::OperatingPointNonConvergence {
                node: system.unknown_name(unknown),
                largest_update_v: largest_update,
            }
        }
    }
}

/// Solves the operating point; returns the solution, the method, and the junction history.
pub(crate) fn solve_operating_point<S: LinearSolver>(
    system: &System,
    solver: &mut S,
    hints: &OperatingPointHints,
    tolerances: NewtonTolerances,
) -> Result<(Solved, OperatingPointMethod, Vec<f64>), SimulationError> {
    let mut start = vec![0.0; system.size()];
    let mut pulls = Vec::new();
    for (node, voltage) in &hints.node_voltages_v {
        let index =
            system.node(node).ok_or_else(|| SimulationError::UnknownHintNode { node: node.clone() })?;
        if !voltage.is_finite() {
            return Err(SimulationError::InvalidSettings {
                field: format!("hint for node {node}"),
                problem: "must be a finite voltage".into(),
            });
        }
        if let Some(slot) = start.get_mut(index) {
            *slot = *voltage;
        }
        pulls.push((index, *voltage, HINT_CONDUCTANCE_S));
    }
    let mut total_iterations = 0;
    if !pulls.is_empty() {
        let mut junctions = system.starting_junctions(&start);
        if let Ok(held) =
            system.newton(solver, &start, &mut junctions, &dc_conditions(1.0, 0.0, &pulls), tolerances)
        {
            total_iterations += held.iterations;
            if let Ok(mut released) = system.newton(
                solver,
                &held.unknowns,
                &mut junctions,
                &dc_conditions(1.0, 0.0, &[]),
                tolerances,
            ) {
                released.iterations += total_iterations;
                return Ok((released, OperatingPointMethod::Hinted, junctions));
            }
        }
    }
    let mut junctions = system.starting_junctions(&start);
    let first_failure =
        match system.newton(solver, &start, &mut junctions, &dc_conditions(1.0, 0.0, &[]), tolerances) {
            Ok(solved) => return Ok((solved, OperatingPointMethod::Direct, junctions)),
            Err(Failure::Singular { unknown }) => {
                return Err(to_error(system, Failure::Singular { unknown }))
            }
            Err(failure) => failure,
        };
    // Source stepping: from all sources off, raise the scale, halving the increment on failure.
    let mut state = vec![0.0; system.size()];
    let mut junctions = system.starting_junctions(&state);
    let mut scale = 0.0;
    let mut increment = 0.1;
    let mut iterations = 0;
    for _ in 0..SOURCE_STEPPING_ATTEMPTS {
        if scale >= 1.0 || increment < SOURCE_STEPPING_MIN_INCREMENT {
            break;
        }
        let trial_scale = (scale + increment).min(1.0);
        let mut trial_junctions = junctions.clone();
        match system.newton(
            solver,
            &state,
            &mut trial_junctions,
            &dc_conditions(trial_scale, 0.0, &[]),
            tolerances,
        ) {
            Ok(solved) => {
                iterations += solved.iterations;
                state = solved.unknowns;
                junctions = trial_junctions;
                scale = trial_scale;
                increment *= 1.5;
            }
            Err(_) => increment *= 0.5,
        }
    }
    if scale >= 1.0 {
        let mut polished = junctions.clone();
        if let Ok(mut solved) =
            system.newton(solver, &state, &mut polished, &dc_conditions(1.0, 0.0, &[]), tolerances)
        {
            solved.iterations += iterations;
            return Ok((solved, OperatingPointMethod::SourceStepping, polished));
        }
    }
    // Gmin stepping: a large conductance to ground makes every node tame; reduce it tenfold
    // per step, each from the last solution, then remove it.
    let mut state = start;
    let mut junctions = system.starting_junctions(&state);
    let mut iterations = 0;
    for step in 0..=GMIN_STEPPING_STEPS {
        let extra =
            if step == GMIN_STEPPING_STEPS { 0.0 } else { GMIN_STEPPING_START_S * 0.1f64.powi(step as i32) };
        match system.newton(solver, &state, &mut junctions, &dc_conditions(1.0, extra, &[]), tolerances) {
            Ok(solved) => {
                iterations += solved.iterations;
                if step == GMIN_STEPPING_STEPS {
                    let mut solved = solved;
                    solved.iterations = iterations;
                    return Ok((solved, OperatingPointMethod::GminStepping, junctions));
                }
                state = solved.unknowns;
            }
            Err(_) => break,
        }
    }
    Err(to_error(system, first_failure))
}
