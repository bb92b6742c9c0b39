//! Exact DC states of the stage with the Ebers–Moll model, and the loop gain at the symmetric
//! (middle) equilibrium that decides whether the circuit is bistable at all.

use serde::Serialize;

use super::handbook::StateAnalysis;
use super::network::{
    DiodeLaw, ExactSolution, SolveError, StageNetwork, Terminal, NODE_B1, NODE_B2, NODE_C1, NODE_C2,
};
use crate::device::ebers_moll::{BjtOperatingPoint, EbersMoll};

/// One state by the exact model (NPN frame).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ExactState {
    pub on_side: usize,
    pub node_voltages: Vec<(&'static str, f64)>,
    pub branch_currents: Vec<(&'static str, f64)>,
    /// Collector and base currents of Q1 and Q2 (into the terminals).
    pub collector_current_a: [f64; 2],
    pub base_current_a: [f64; 2],
    pub diode_currents: Vec<(&'static str, f64)>,
    /// IC/IB of the ON transistor: below βF means it is saturated.
    pub on_forced_gain: f64,
    pub on_collector_emitter_v: f64,
    pub off_base_emitter_v: f64,
    pub newton_iterations: usize,
}

/// Why an exact state was not found.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum ExactError {
    /// Occurs when the solver fails (see [`SolveError`]).
    Solve(SolveError),
    /// Occurs when Newton, started in the requested state, settled in another: the requested
    /// state is not stable with these values.
    StateNotHeld { requested_on_side: usize },
}

impl std::fmt::Display for ExactError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            ExactError::Solve(e) => e.fmt(f),
            ExactError::StateNotHeld { requested_on_side } => write!(
                f,
                "the state with Q{} ON does not hold: the exact solution started there settles elsewhere",
                requested_on_side + 1
            ),
        }
    }
}

/// Values labelled by node or branch name.
type Named = Vec<(&'static str, f64)>;

fn named(network: &StageNetwork, v: &[f64]) -> (Named, Named) {
    let nodes = network.node_names.iter().zip(v).map(|(n, x)| (*n, *x)).collect();
    let branches = network.resistors.iter().map(|r| (r.name, StageNetwork::resistor_current(r, v))).collect();
    (nodes, branches)
}

/// Solves the state with `start.on_side` ON, starting Newton from the piecewise solution.
pub fn solve_state(
    network: &StageNetwork,
    models: &[EbersMoll; 2],
    diode: &DiodeLaw,
    start: &StateAnalysis,
) -> Result<ExactState, ExactError> {
    let initial: Vec<f64> = start.node_voltages.iter().map(|(_, v)| *v).collect();
    let solution = network.solve_exact(models, diode, &initial).map_err(ExactError::Solve)?;
    let on = start.on_side.min(1);
    let off = 1 - on;
    let (ic_on, ib_on) = solution.transistor_currents[on];
    let (ic_off, _) = solution.transistor_currents[off];
    if !(ic_on > 10.0 * ic_off.abs().max(1e-15) && ib_on > 0.0) {
        return Err(ExactError::StateNotHeld { requested_on_side: on });
    }
    Ok(state_from(network, &solution, on))
}

fn state_from(network: &StageNetwork, solution: &ExactSolution, on: usize) -> ExactState {
    let v = &solution.node_voltages;
    let (node_voltages, branch_currents) = named(network, v);
    let emitter = StageNetwork::voltage(network.transistors[0].emitter, v);
    let collector = [v.get(NODE_C1).copied().unwrap_or(0.0), v.get(NODE_C2).copied().unwrap_or(0.0)];
    let base = [v.get(NODE_B1).copied().unwrap_or(0.0), v.get(NODE_B2).copied().unwrap_or(0.0)];
    let (ic_on, ib_on) = solution.transistor_currents[on];
    ExactState {
        on_side: on,
        node_voltages,
        branch_currents,
        collector_current_a: [solution.transistor_currents[0].0, solution.transistor_currents[1].0],
        base_current_a: [solution.transistor_currents[0].1, solution.transistor_currents[1].1],
        diode_currents: network
            .diodes
            .iter()
            .zip(&solution.diode_currents)
            .map(|(d, i)| (d.name, *i))
            .collect(),
        on_forced_gain: if ib_on > 0.0 { ic_on / ib_on } else { f64::INFINITY },
        on_collector_emitter_v: collector[on] - emitter,
        off_base_emitter_v: base[1 - on] - emitter,
        newton_iterations: solution.iterations,
    }
}

/// Loop gain at the middle equilibrium.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LoopGain {
    /// Return ratio around the two-transistor loop (> 1: regenerative, bistable).
    pub loop_gain: f64,
    /// Collector currents at the middle equilibrium, A.
    pub collector_current_a: [f64; 2],
    pub base_voltage_v: [f64; 2],
}

/// Start for Newton near the middle equilibrium: each half solved as if symmetric, with its
/// transistor active (IC = βF·IB, VBE from the Ebers–Moll law at that current), iterated a few
/// times. Newton converges to an unstable equilibrium as readily as to a stable one when it
/// starts close enough.
fn middle_point_guess(network: &StageNetwork, models: &[EbersMoll; 2]) -> Vec<f64> {
    let corner = &network.corner;
    let vt = crate::physics::thermal_voltage(models[0].temperature_c);
    let mut guess: Vec<f64> = vec![0.0; network.node_count()];
    let self_bias = network.node_names.contains(&"E");
    let base_return = if self_bias { 0.0 } else { -corner.bias_supply_v };
    let mut collector_v = [0.0; 2];
    let mut base_v = [0.0; 2];
    let mut emitter_v = 0.0;
    let mut vbe = [0.6; 2];
    for _ in 0..8 {
        let mut emitter_current = 0.0;
        for side in 0..2 {
            let model = &models[side];
            let beta = model.beta_forward;
            let rc = corner.collector_resistor_ohm[side];
            let r1 = corner.cross_resistor_ohm[side];
            let r2 = corner.base_resistor_ohm[side];
            let vb = emitter_v + vbe[side];
            let i_r2 = (vb - base_return) / r2;
            // Load on this collector, as a conductance and a current.
            let (g_load, i_load) = network
                .resistors
                .iter()
                .filter(|r| r.name == if side == 0 { "RL1" } else { "RL2" })
                .map(|r| match r.to {
                    Terminal::Fixed(v) => (1.0 / r.resistance_ohm, -v / r.resistance_ohm),
                    Terminal::Node(_) => (0.0, 0.0),
                })
                .fold((0.0, 0.0), |(g, i), (dg, di)| (g + dg, i + di));
            let sink: f64 = network
                .current_sinks
                .iter()
                .filter(|(name, _, _)| *name == if side == 0 { "IL1" } else { "IL2" })
                .map(|(_, _, i)| *i)
                .sum();
            // (VCC − VC)/RC = β·((VC − VB)/R1 − I_R2) + (VC − VB)/R1 + load(VC)
            let numerator =
                corner.collector_supply_v / rc + beta * i_r2 + (beta + 1.0) * vb / r1 - i_load - sink;
            let denominator = 1.0 / rc + (beta + 1.0) / r1 + g_load;
            // Not `clamp`: with a high emitter level VB can exceed the supply, and clamp panics then.
            let vc = (numerator / denominator).min(corner.collector_supply_v).max(vb);
            let ib = ((vc - vb) / r1 - i_r2).max(0.0);
            let ic = beta * ib;
            collector_v[side] = vc;
            base_v[side] = vb;
            emitter_current += ic + ib;
            if ic > 0.0 {
                vbe[side] = vt * (ic / model.saturation_current_a + 1.0).ln();
            }
        }
        if self_bias {
            emitter_v = emitter_current * corner.emitter_resistor_ohm;
        }
    }
    for (index, name) in network.node_names.iter().enumerate() {
        let value = match *name {
            "C1" => collector_v[0],
            "C2" => collector_v[1],
            "B1" => base_v[0],
            "B2" => base_v[1],
            "E" => emitter_v,
            "S1" => collector_v[0],
            "S2" => collector_v[1],
            "S" => corner.collector_supply_v,
            _ => continue,
        };
        if let Some(slot) = guess.get_mut(index) {
            *slot = value;
        }
    }
    guess
}

/// Finds the middle (unstable) equilibrium from a symmetric active-region start and
/// computes the return ratio of the loop broken at Q1's base, from the transistors'
/// small-signal parameters there. It neglects the transistors' reverse transfer (y12) and
/// the steering network; the emitter is an AC ground (bypassed in self bias).
pub fn loop_gain(
    network: &StageNetwork,
    models: &[EbersMoll; 2],
    diode: &DiodeLaw,
) -> Result<LoopGain, ExactError> {
    let initial = middle_point_guess(network, models);
    let solution = network.solve_exact(models, diode, &initial).map_err(ExactError::Solve)?;
    let v = &solution.node_voltages;
    let volts = |t: Terminal| StageNetwork::voltage(t, v);
    let (ic1, _) = solution.transistor_currents[0];
    let (ic2, _) = solution.transistor_currents[1];
    let larger = ic1.abs().max(ic2.abs()).max(1e-15);
    // The middle equilibrium has both transistors conducting comparably; settling in a
    // stable state instead means Newton slid off it, and the gain there would mislead.
    if (ic1 - ic2).abs() > 0.5 * larger {
        return Err(ExactError::StateNotHeld { requested_on_side: 2 });
    }
    let mut y = [[0.0f64; 3]; 2];
    for (index, pins) in network.transistors.iter().enumerate() {
        let vbe = volts(pins.base) - volts(pins.emitter);
        let vbc = volts(pins.base) - volts(pins.collector);
        let op: BjtOperatingPoint = models[index % 2].evaluate(vbe, vbc);
        // Common-emitter parameters at constant VCE: dVBC = dVBE.
        let y11 = op.dib_dvbe + op.dib_dvbc;
        let y21 = op.dic_dvbe + op.dic_dvbc;
        let y22 = -op.dic_dvbc;
        y[index % 2] = [y11, y21, y22];
    }
    let conductance_to = |node: usize| -> f64 {
        network
            .resistors
            .iter()
            .filter(|r| r.from == Terminal::Node(node) || r.to == Terminal::Node(node))
            .filter(|r| !(r.name == "R1a" || r.name == "R1b" || r.name.starts_with("Rt")))
            .map(|r| 1.0 / r.resistance_ohm)
            .sum()
    };
    let r1 = [network.corner.cross_resistor_ohm[0], network.corner.cross_resistor_ohm[1]];
    // Half k: Q(k) drives, through its cross resistor, the base of the other transistor.
    let half = |k: usize| -> f64 {
        let other = 1 - k;
        let base_other = if other == 0 { NODE_B1 } else { NODE_B2 };
        let collector_k = if k == 0 { NODE_C1 } else { NODE_C2 };
        let z_base = 1.0 / (conductance_to(base_other) + y[other][0]);
        let series = r1[k] + z_base;
        let y_collector = y[k][2] + conductance_to(collector_k) + 1.0 / series;
        y[k][1] * z_base / (series * y_collector)
    };
    Ok(LoopGain {
        loop_gain: half(0) * half(1),
        collector_current_a: [ic1, ic2],
        base_voltage_v: [volts(network.transistors[0].base), volts(network.transistors[1].base)],
    })
}
