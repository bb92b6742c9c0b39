//! The stage as a small nodal network at one concrete set of parameter values (a "corner"),
//! solved with the piecewise (handbook) device model or the exact Ebers–Moll model.
//!
//! Both solvers share one netlist, so the two analyses differ only in the device law.
//! Everything is in the NPN frame. Sign convention: the residual of a node is the sum of
//! currents leaving it.

use serde::Serialize;

use super::{BiasScheme, Load, StageDesign, Steering};
use crate::device::ebers_moll::{limited_exp, EbersMoll};
use crate::device::{PiecewiseTransistor, SpreadPoint};
use crate::numeric::DenseMatrix;
use crate::physics::thermal_voltage;

/// Node indices of the fixed part of the stage network.
pub const NODE_C1: usize = 0;
pub const NODE_C2: usize = 1;
pub const NODE_B1: usize = 2;
pub const NODE_B2: usize = 3;

/// Conductance from every free node to ground that keeps the matrices regular.
const GMIN_S: f64 = 1e-12;
/// Bound on Newton iterations per solve (each continuation step has its own budget).
pub const MAX_NEWTON_ITERATIONS: usize = 150;

/// One concrete value of every uncertain quantity in the stage.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Corner {
    pub temperature_c: f64,
    pub collector_supply_v: f64,
    pub bias_supply_v: f64,
    /// Per side: index 0 belongs to Q1 (its collector resistor, the cross resistor from its
    /// collector to Q2's base, its base resistor).
    pub collector_resistor_ohm: [f64; 2],
    pub cross_resistor_ohm: [f64; 2],
    pub base_resistor_ohm: [f64; 2],
    pub emitter_resistor_ohm: f64,
    pub load_resistance_factor: [f64; 2],
    pub trigger_resistor_ohm: [f64; 2],
    /// Per side: C1 from that side's collector to the other base, and Ct on that side's
    /// steering input. They enter only the transient estimate of the reverse base–emitter
    /// voltage (and the collector–base voltage it adds to), not the DC network.
    pub commutating_capacitor_f: [f64; 2],
    pub trigger_capacitor_f: [f64; 2],
    #[serde(skip)]
    pub spread: [SpreadPoint; 2],
}

impl Corner {
    /// Every value at nominal, at the given temperature.
    pub fn nominal(design: &StageDesign, temperature_c: f64) -> Corner {
        let values = design.values();
        let supplies = &design.input().supplies;
        let rt = values.trigger.map(|t| t.trigger_resistor_ohm).unwrap_or(0.0);
        let ct = values.trigger.map(|t| t.trigger_capacitor_f).unwrap_or(0.0);
        Corner {
            temperature_c,
            collector_supply_v: supplies.collector_supply_v,
            bias_supply_v: match values.bias {
                BiasScheme::Fixed => supplies.bias_supply_v,
                BiasScheme::SelfBias => 0.0,
            },
            collector_resistor_ohm: [values.collector_resistor_ohm; 2],
            cross_resistor_ohm: [values.cross_resistor_ohm; 2],
            base_resistor_ohm: [values.base_resistor_ohm; 2],
            emitter_resistor_ohm: values.emitter_resistor_ohm,
            load_resistance_factor: [1.0; 2],
            trigger_resistor_ohm: [rt; 2],
            commutating_capacitor_f: [values.commutating_capacitor_f; 2],
            trigger_capacitor_f: [ct; 2],
            spread: [SpreadPoint::default(); 2],
        }
    }
}

/// One end of an element: a free node or a fixed voltage.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Terminal {
    Node(usize),
    Fixed(f64),
}

#[derive(Debug, Clone, PartialEq)]
pub struct Resistor {
    pub name: &'static str,
    pub from: Terminal,
    pub to: Terminal,
    pub resistance_ohm: f64,
}

#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TransistorPins {
    pub collector: Terminal,
    pub base: Terminal,
    pub emitter: Terminal,
}

#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DiodePins {
    pub name: &'static str,
    pub anode: Terminal,
    pub cathode: Terminal,
}

/// The stage network at one corner.
#[derive(Debug, Clone, PartialEq)]
pub struct StageNetwork {
    pub node_names: Vec<&'static str>,
    pub resistors: Vec<Resistor>,
    /// Constant currents (name, leaving terminal, amperes).
    pub current_sinks: Vec<(&'static str, Terminal, f64)>,
    pub transistors: [TransistorPins; 2],
    pub diodes: Vec<DiodePins>,
    pub corner: Corner,
    /// The steering diodes' law at this corner's temperature.
    pub diode_law: DiodeLaw,
}

/// Why a network could not be solved.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum SolveError {
    /// Occurs when the piecewise network is singular (a node floats).
    Singular { node: String },
    /// Occurs when Newton and its continuation did not converge.
    NonConvergence { iterations: usize, node: String, residual_a: f64 },
}

impl std::fmt::Display for SolveError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            SolveError::Singular { node } => write!(f, "the network is singular at node {node}"),
            SolveError::NonConvergence { iterations, node, residual_a } => write!(
                f,
                "the Ebers–Moll DC solution did not converge after {iterations} iterations (largest residual {residual_a:.3e} A at node {node})"
            ),
        }
    }
}

/// Solution of the piecewise model for one state.
#[derive(Debug, Clone, PartialEq)]
pub struct PiecewiseSolution {
    pub node_voltages: Vec<f64>,
    pub on_side: usize,
    pub on_base_current_a: f64,
    pub on_collector_current_a: f64,
}

/// Solution of the exact model.
#[derive(Debug, Clone, PartialEq)]
pub struct ExactSolution {
    pub node_voltages: Vec<f64>,
    /// Per transistor: (collector current, base current), into the terminals.
    pub transistor_currents: [(f64, f64); 2],
    pub diode_currents: Vec<f64>,
    pub iterations: usize,
}

impl StageNetwork {
    /// Builds the network; with `include_trigger`, the steering network is added (it only
    /// matters for the exact model: its diodes are open in the piecewise model).
    pub fn build(design: &StageDesign, corner: &Corner) -> StageNetwork {
        let values = design.values();
        let input = design.input();
        let vcc = Terminal::Fixed(corner.collector_supply_v);
        let ground = Terminal::Fixed(0.0);
        let mut node_names = vec!["C1", "C2", "B1", "B2"];
        let c = [Terminal::Node(NODE_C1), Terminal::Node(NODE_C2)];
        let b = [Terminal::Node(NODE_B1), Terminal::Node(NODE_B2)];
        let emitter = match values.bias {
            BiasScheme::Fixed => ground,
            BiasScheme::SelfBias => {
                node_names.push("E");
                Terminal::Node(node_names.len() - 1)
            }
        };
        let base_return = match values.bias {
            BiasScheme::Fixed => Terminal::Fixed(-corner.bias_supply_v),
            BiasScheme::SelfBias => ground,
        };
        let mut resistors = vec![
            Resistor { name: "RC1", from: vcc, to: c[0], resistance_ohm: corner.collector_resistor_ohm[0] },
            Resistor { name: "RC2", from: vcc, to: c[1], resistance_ohm: corner.collector_resistor_ohm[1] },
            Resistor { name: "R1a", from: c[0], to: b[1], resistance_ohm: corner.cross_resistor_ohm[0] },
            Resistor { name: "R1b", from: c[1], to: b[0], resistance_ohm: corner.cross_resistor_ohm[1] },
            Resistor {
                name: "R2a",
                from: b[0],
                to: base_return,
                resistance_ohm: corner.base_resistor_ohm[0],
            },
            Resistor {
                name: "R2b",
                from: b[1],
                to: base_return,
                resistance_ohm: corner.base_resistor_ohm[1],
            },
        ];
        if values.bias == BiasScheme::SelfBias {
            resistors.push(Resistor {
                name: "RE",
                from: emitter,
                to: ground,
                resistance_ohm: corner.emitter_resistor_ohm,
            });
        }
        let mut current_sinks = Vec::new();
        const LOAD_NAMES: [&str; 2] = ["RL1", "RL2"];
        const SINK_NAMES: [&str; 2] = ["IL1", "IL2"];
        for side in 0..2 {
            match input.loads.get(side).copied().unwrap_or(Load::None) {
                Load::None => {}
                Load::Resistance { resistance_ohm, return_v } => resistors.push(Resistor {
                    name: LOAD_NAMES[side % 2],
                    from: c[side % 2],
                    to: Terminal::Fixed(return_v),
                    resistance_ohm: resistance_ohm * corner.load_resistance_factor[side % 2],
                }),
                Load::Current { current_a } => {
                    current_sinks.push((SINK_NAMES[side % 2], c[side % 2], current_a))
                }
            }
        }
        let mut diodes = Vec::new();
        if let Some(trigger) = values.trigger {
            match trigger.steering {
                Steering::Base => {
                    const RT: [&str; 2] = ["Rt1", "Rt2"];
                    const S: [&str; 2] = ["S1", "S2"];
                    const D: [&str; 2] = ["D1", "D2"];
                    for side in 0..2 {
                        node_names.push(S[side]);
                        let steering_node = Terminal::Node(node_names.len() - 1);
                        resistors.push(Resistor {
                            name: RT[side],
                            from: steering_node,
                            to: c[side],
                            resistance_ohm: corner.trigger_resistor_ohm[side],
                        });
                        diodes.push(DiodePins { name: D[side], anode: b[side], cathode: steering_node });
                    }
                }
                Steering::Collector => {
                    node_names.push("S");
                    let steering_node = Terminal::Node(node_names.len() - 1);
                    resistors.push(Resistor {
                        name: "Rt",
                        from: steering_node,
                        to: vcc,
                        resistance_ohm: corner.trigger_resistor_ohm[0],
                    });
                    diodes.push(DiodePins { name: "D1", anode: c[0], cathode: steering_node });
                    diodes.push(DiodePins { name: "D2", anode: c[1], cathode: steering_node });
                }
            }
        }
        StageNetwork {
            node_names,
            resistors,
            current_sinks,
            transistors: [
                TransistorPins { collector: c[0], base: b[0], emitter },
                TransistorPins { collector: c[1], base: b[1], emitter },
            ],
            diodes,
            corner: *corner,
            diode_law: DiodeLaw::at_temperature(design.diode(), corner.temperature_c),
        }
    }

    pub fn node_count(&self) -> usize {
        self.node_names.len()
    }

    fn node_name(&self, index: usize) -> String {
        self.node_names.get(index).map(|n| n.to_string()).unwrap_or_else(|| format!("#{index}"))
    }

    /// Voltage of a terminal in a solution vector.
    pub fn voltage(terminal: Terminal, node_voltages: &[f64]) -> f64 {
        match terminal {
            Terminal::Fixed(v) => v,
            Terminal::Node(i) => node_voltages.get(i).copied().unwrap_or(0.0),
        }
    }

    /// Current through a resistor from its `from` to its `to` terminal.
    pub fn resistor_current(resistor: &Resistor, node_voltages: &[f64]) -> f64 {
        (Self::voltage(resistor.from, node_voltages) - Self::voltage(resistor.to, node_voltages))
            / resistor.resistance_ohm
    }

    /// Stamps resistors and current sinks; `skipped` nodes get a unit diagonal only (their
    /// value is filled in afterwards), so they cost nothing in the elimination.
    fn stamp_linear_except(&self, matrix: &mut DenseMatrix, rhs: &mut [f64], skipped: &[(usize, Terminal)]) {
        for index in 0..self.node_count() {
            let is_skipped = skipped.iter().any(|(i, _)| *i == index);
            matrix.add(index, index, if is_skipped { 1.0 } else { GMIN_S });
        }
        let touches_skipped =
            |t: Terminal| matches!(t, Terminal::Node(i) if skipped.iter().any(|(s, _)| *s == i));
        for resistor in self.resistors.iter().filter(|r| !touches_skipped(r.from) && !touches_skipped(r.to)) {
            let g = 1.0 / resistor.resistance_ohm;
            stamp_conductance(matrix, rhs, resistor.from, resistor.to, g);
        }
        for &(_, terminal, current) in &self.current_sinks {
            if let Terminal::Node(i) = terminal {
                if let Some(entry) = rhs.get_mut(i) {
                    *entry -= current;
                }
            }
        }
    }

    /// Solves the piecewise model with `on_side` (0 or 1) saturated and the other cut off
    /// (carrying only its leakage from collector to base). Steering diodes are open.
    pub fn solve_piecewise(
        &self,
        on_side: usize,
        devices: [PiecewiseTransistor; 2],
    ) -> Result<PiecewiseSolution, SolveError> {
        // With the diodes open, a steering node hangs on its one bias resistor and carries no
        // current: it takes that resistor's other end's voltage and stays out of the matrix.
        let dangling: Vec<(usize, Terminal)> = self
            .diodes
            .iter()
            .flat_map(|d| [d.anode, d.cathode])
            .filter_map(|t| match t {
                Terminal::Node(i) => Some(i),
                Terminal::Fixed(_) => None,
            })
            .filter(|&i| {
                self.transistors
                    .iter()
                    .all(|p| ![p.collector, p.base, p.emitter].contains(&Terminal::Node(i)))
            })
            .filter_map(|i| {
                let mut touching = self
                    .resistors
                    .iter()
                    .filter(|r| r.from == Terminal::Node(i) || r.to == Terminal::Node(i));
                let only = touching.next()?;
                if touching.next().is_some()
                    || self.current_sinks.iter().any(|(_, t, _)| *t == Terminal::Node(i))
                {
                    return None;
                }
                Some((i, if only.from == Terminal::Node(i) { only.to } else { only.from }))
            })
            .collect();
        let n = self.node_count();
        let size = n + 2;
        let mut matrix = DenseMatrix::zeros(size);
        let mut rhs = vec![0.0; size];
        self.stamp_linear_except(&mut matrix, &mut rhs, &dangling);
        let off_side = 1 - on_side.min(1);
        let on = self.transistors[on_side.min(1)];
        let off = self.transistors[off_side];
        let on_device = devices[on_side.min(1)];
        let off_device = devices[off_side];
        // Leakage of the OFF transistor flows from its collector into its base.
        stamp_current(&mut rhs, off.collector, off.base, off_device.icbo_a);
        // A base-steering diode on the ON side sits between the base (VBE(sat)) and, through
        // Rt, its own collector (VCE(sat)): it is forward biased by VBE(sat) − VCE(sat) and
        // takes a real DC current from the base. Both ends are pinned by the ON transistor,
        // so the current follows from VF(I) + I·Rt = VBE(sat) − VCE(sat) alone.
        let mut steering_current = None;
        for pins in &self.diodes {
            if pins.anode != on.base {
                continue;
            }
            let Some(rt) = self.resistors.iter().find(|r| r.from == pins.cathode || r.to == pins.cathode)
            else {
                continue;
            };
            let bias = on_device.vbe_sat_v - on_device.vce_sat_v;
            let current = self.diode_law.conduction_current(bias, rt.resistance_ohm);
            if current > 0.0 {
                stamp_current(&mut rhs, on.base, on.collector, current);
                steering_current = Some((pins.cathode, current * rt.resistance_ohm));
            }
        }
        // ON transistor: VBE and VCE held by two sources whose currents are IB and IC.
        let base_row = n;
        let collector_row = n + 1;
        stamp_voltage_source(&mut matrix, &mut rhs, base_row, on.base, on.emitter, on_device.vbe_sat_v);
        stamp_voltage_source(
            &mut matrix,
            &mut rhs,
            collector_row,
            on.collector,
            on.emitter,
            on_device.vce_sat_v,
        );
        let solution =
            matrix.solve(&rhs).map_err(|e| SolveError::Singular { node: self.node_name(e.column) })?;
        let mut node_voltages = solution.get(..n).map(|s| s.to_vec()).unwrap_or_default();
        for &(node, other_end) in &dangling {
            let mut v = Self::voltage(other_end, &node_voltages);
            // The conducting steering node sits above its collector by the drop across Rt.
            if let Some((Terminal::Node(steering), drop_v)) = steering_current {
                if steering == node {
                    v += drop_v;
                }
            }
            if let Some(slot) = node_voltages.get_mut(node) {
                *slot = v;
            }
        }
        Ok(PiecewiseSolution {
            node_voltages,
            on_side: on_side.min(1),
            on_base_current_a: solution.get(base_row).copied().unwrap_or(0.0),
            on_collector_current_a: solution.get(collector_row).copied().unwrap_or(0.0),
        })
    }

    /// Solves the exact Ebers–Moll network by damped Newton from `initial` node voltages,
    /// with source stepping as the fallback.
    pub fn solve_exact(
        &self,
        models: &[EbersMoll; 2],
        diode: &DiodeLaw,
        initial: &[f64],
    ) -> Result<ExactSolution, SolveError> {
        let expanded = ExpandedNetwork::new(self, models);
        let mut start = initial.to_vec();
        start.resize(expanded.size, 0.0);
        expanded.initialise_internal(&mut start);
        match expanded.newton(models, diode, &start, 1.0) {
            Ok(solution) => Ok(expanded.finish(models, diode, solution)),
            Err(first_error) => {
                // Source stepping: ramp every fixed voltage from a fraction up to full value,
                // starting each step from the last solution.
                let mut state = start.iter().map(|v| v * 0.1).collect::<Vec<_>>();
                let mut total_iterations = 0;
                for step in 1..=10 {
                    let scale = step as f64 / 10.0;
                    match expanded.newton(models, diode, &state, scale) {
                        Ok((solution, iterations)) => {
                            total_iterations += iterations;
                            state = solution;
                        }
                        Err(_) => return Err(first_error),
                    }
                }
                Ok(expanded.finish(models, diode, (state, total_iterations)))
            }
        }
    }
}

/// Exponential diode law with temperature-scaled saturation current.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DiodeLaw {
    pub saturation_current_a: f64,
    pub emission_coefficient: f64,
    pub temperature_c: f64,
}

impl DiodeLaw {
    /// The law of a datasheet diode at a temperature.
    pub fn at_temperature(diode: &crate::device::DiodeDatasheet, temperature_c: f64) -> DiodeLaw {
        DiodeLaw {
            saturation_current_a: diode.saturation_current_a(temperature_c),
            emission_coefficient: diode.emission_coefficient,
            temperature_c,
        }
    }

    /// Current through the diode in series with a resistance across `voltage`: solves
    /// V = n·VT·ln(1 + I/IS) + I·R, zero when not forward biased. The left side is concave and
    /// increasing in I, so Newton started at I = V/R (where it is positive) lands left of the
    /// root once and then climbs to it monotonically; iterations are bounded.
    pub fn conduction_current(&self, voltage: f64, resistance_ohm: f64) -> f64 {
        if !(voltage > 0.0 && resistance_ohm > 0.0 && self.saturation_current_a > 0.0) {
            return 0.0;
        }
        let n_vt = self.emission_coefficient * thermal_voltage(self.temperature_c);
        let is = self.saturation_current_a;
        let mut current = voltage / resistance_ohm;
        for _ in 0..60 {
            let excess = n_vt * (current / is + 1.0).ln() + current * resistance_ohm - voltage;
            let slope = n_vt / (is + current) + resistance_ohm;
            let next = (current - excess / slope).max(0.0);
            let converged = (next - current).abs() <= 1e-12 * current.max(1e-18);
            current = next;
            if converged {
                break;
            }
        }
        if current.is_finite() {
            current
        } else {
            0.0
        }
    }

    fn current(&self, voltage: f64) -> (f64, f64) {
        let n_vt = self.emission_coefficient * thermal_voltage(self.temperature_c);
        let (e, de) = limited_exp(voltage / n_vt);
        (self.saturation_current_a * (e - 1.0), self.saturation_current_a * de / n_vt)
    }
}

fn stamp_conductance(matrix: &mut DenseMatrix, rhs: &mut [f64], a: Terminal, b: Terminal, g: f64) {
    match (a, b) {
        (Terminal::Node(i), Terminal::Node(j)) => {
            matrix.add(i, i, g);
            matrix.add(j, j, g);
            matrix.add(i, j, -g);
            matrix.add(j, i, -g);
        }
        (Terminal::Node(i), Terminal::Fixed(v)) | (Terminal::Fixed(v), Terminal::Node(i)) => {
            matrix.add(i, i, g);
            if let Some(entry) = rhs.get_mut(i) {
                *entry += g * v;
            }
        }
        (Terminal::Fixed(_), Terminal::Fixed(_)) => {}
    }
}

/// A current `current` flowing out of terminal `from` into terminal `to` (through the network
/// element, not through the nodes).
fn stamp_current(rhs: &mut [f64], from: Terminal, to: Terminal, current: f64) {
    if let Terminal::Node(i) = from {
        if let Some(entry) = rhs.get_mut(i) {
            *entry -= current;
        }
    }
    if let Terminal::Node(j) = to {
        if let Some(entry) = rhs.get_mut(j) {
            *entry += current;
        }
    }
}

/// Voltage source V(plus) − V(minus) = value; its unknown current (row `row`) flows from the
/// network into `plus`, through the source, and out of `minus`.
fn stamp_voltage_source(
    matrix: &mut DenseMatrix,
    rhs: &mut [f64],
    row: usize,
    plus: Terminal,
    minus: Terminal,
    value: f64,
) {
    let mut constraint_value = value;
    if let Terminal::Node(p) = plus {
        matrix.add(p, row, 1.0);
        matrix.add(row, p, 1.0);
    } else if let Terminal::Fixed(v) = plus {
        constraint_value -= v;
    }
    if let Terminal::Node(m) = minus {
        matrix.add(m, row, -1.0);
        matrix.add(row, m, -1.0);
    } else if let Terminal::Fixed(v) = minus {
        constraint_value += v;
    }
    if let Some(entry) = rhs.get_mut(row) {
        *entry = constraint_value;
    }
}

/// The network with internal base and collector nodes for series resistances.
struct ExpandedNetwork<'a> {
    network: &'a StageNetwork,
    size: usize,
    /// Intrinsic (collector, base) terminals per transistor.
    intrinsic: [(Terminal, Terminal); 2],
    /// Series resistors added: (external, internal, resistance).
    series: Vec<(Terminal, Terminal, f64)>,
}

impl<'a> ExpandedNetwork<'a> {
    fn new(network: &'a StageNetwork, models: &[EbersMoll; 2]) -> Self {
        let mut size = network.node_count();
        let mut series = Vec::new();
        let mut intrinsic = [(Terminal::Fixed(0.0), Terminal::Fixed(0.0)); 2];
        for (index, pins) in network.transistors.iter().enumerate() {
            let model = &models[index % 2];
            let mut collector = pins.collector;
            let mut base = pins.base;
            if model.collector_resistance_ohm > 0.0 {
                collector = Terminal::Node(size);
                series.push((pins.collector, collector, model.collector_resistance_ohm));
                size += 1;
            }
            if model.base_resistance_ohm > 0.0 {
                base = Terminal::Node(size);
                series.push((pins.base, base, model.base_resistance_ohm));
                size += 1;
            }
            intrinsic[index % 2] = (collector, base);
        }
        ExpandedNetwork { network, size, intrinsic, series }
    }

    fn initialise_internal(&self, voltages: &mut [f64]) {
        for &(external, internal, _) in &self.series {
            if let Terminal::Node(i) = internal {
                let v = StageNetwork::voltage(external, voltages);
                if let Some(entry) = voltages.get_mut(i) {
                    *entry = v;
                }
            }
        }
    }

    fn scaled(terminal: Terminal, scale: f64) -> Terminal {
        match terminal {
            Terminal::Fixed(v) => Terminal::Fixed(v * scale),
            node => node,
        }
    }

    /// Residual (currents leaving each node) and Jacobian at `x`, with fixed voltages scaled.
    fn assemble(
        &self,
        models: &[EbersMoll; 2],
        diode: &DiodeLaw,
        x: &[f64],
        scale: f64,
        jacobian: &mut DenseMatrix,
        residual: &mut [f64],
    ) {
        jacobian.clear();
        residual.iter_mut().for_each(|r| *r = 0.0);
        let v = |t: Terminal| StageNetwork::voltage(Self::scaled(t, scale), x);
        let add_residual = |t: Terminal, value: f64, residual: &mut [f64]| {
            if let Terminal::Node(i) = t {
                if let Some(entry) = residual.get_mut(i) {
                    *entry += value;
                }
            }
        };
        for index in 0..self.size {
            jacobian.add(index, index, GMIN_S);
            let value = GMIN_S * x.get(index).copied().unwrap_or(0.0);
            add_residual(Terminal::Node(index), value, residual);
        }
        let conductances = self
            .network
            .resistors
            .iter()
            .map(|r| (r.from, r.to, 1.0 / r.resistance_ohm))
            .chain(self.series.iter().map(|&(a, b, r)| (a, b, 1.0 / r)));
        for (a, b, g) in conductances {
            let current = g * (v(a) - v(b));
            add_residual(a, current, residual);
            add_residual(b, -current, residual);
            stamp_jacobian_pair(jacobian, a, b, g);
        }
        for &(_, terminal, current) in &self.network.current_sinks {
            add_residual(terminal, current * scale, residual);
        }
        for (index, pins) in self.network.transistors.iter().enumerate() {
            let (collector, base) = self.intrinsic[index % 2];
            let emitter = pins.emitter;
            let vbe = v(base) - v(emitter);
            let vbc = v(base) - v(collector);
            let op = models[index % 2].evaluate(vbe, vbc);
            let ie = -(op.collector_current_a + op.base_current_a);
            add_residual(collector, op.collector_current_a, residual);
            add_residual(base, op.base_current_a, residual);
            add_residual(emitter, ie, residual);
            // d(terminal current)/d(node voltage) via the chain rule on VBE, VBC.
            let rows = [
                (collector, op.dic_dvbe, op.dic_dvbc),
                (base, op.dib_dvbe, op.dib_dvbc),
                (emitter, -(op.dic_dvbe + op.dib_dvbe), -(op.dic_dvbc + op.dib_dvbc)),
            ];
            for (row_terminal, d_dvbe, d_dvbc) in rows {
                if let Terminal::Node(row) = row_terminal {
                    // VBE = Vb − Ve, VBC = Vb − Vc.
                    if let Terminal::Node(col) = base {
                        jacobian.add(row, col, d_dvbe + d_dvbc);
                    }
                    if let Terminal::Node(col) = emitter {
                        jacobian.add(row, col, -d_dvbe);
                    }
                    if let Terminal::Node(col) = collector {
                        jacobian.add(row, col, -d_dvbc);
                    }
                }
            }
        }
        for pins in &self.network.diodes {
            let (current, conductance) = diode.current(v(pins.anode) - v(pins.cathode));
            add_residual(pins.anode, current, residual);
            add_residual(pins.cathode, -current, residual);
            stamp_jacobian_pair(jacobian, pins.anode, pins.cathode, conductance);
        }
    }

    /// Junction voltages whose change is limited per Newton step.
    fn junction_voltages(&self, diode_count: usize, x: &[f64], scale: f64) -> Vec<f64> {
        let v = |t: Terminal| StageNetwork::voltage(Self::scaled(t, scale), x);
        let mut junctions = Vec::with_capacity(4 + diode_count);
        for (index, pins) in self.network.transistors.iter().enumerate() {
            let (collector, base) = self.intrinsic[index % 2];
            junctions.push(v(base) - v(pins.emitter));
            junctions.push(v(base) - v(collector));
        }
        for pins in &self.network.diodes {
            junctions.push(v(pins.anode) - v(pins.cathode));
        }
        junctions
    }

    fn newton(
        &self,
        models: &[EbersMoll; 2],
        diode: &DiodeLaw,
        start: &[f64],
        scale: f64,
    ) -> Result<(Vec<f64>, usize), SolveError> {
        let mut x = start.to_vec();
        let mut jacobian = DenseMatrix::zeros(self.size);
        let mut residual = vec![0.0; self.size];
        let vt = thermal_voltage(models[0].temperature_c);
        let diode_count = self.network.diodes.len();
        let mut last_residual = (0usize, f64::INFINITY);
        for iteration in 1..=MAX_NEWTON_ITERATIONS {
            self.assemble(models, diode, &x, scale, &mut jacobian, &mut residual);
            let rhs: Vec<f64> = residual.iter().map(|r| -r).collect();
            let delta = jacobian
                .solve(&rhs)
                .map_err(|e| SolveError::Singular { node: self.network.node_name(e.column) })?;
            // Limit the step so no junction rises by more than a few VT at once above its
            // conduction knee (the usual junction limiting, applied as one global damping).
            let before = self.junction_voltages(diode_count, &x, scale);
            let trial: Vec<f64> = x.iter().zip(&delta).map(|(a, d)| a + d).collect();
            let after = self.junction_voltages(diode_count, &trial, scale);
            let mut damping: f64 = 1.0;
            for (old, new) in before.iter().zip(&after) {
                let rise = new - old;
                if *new > 0.3 && rise > 4.0 * vt {
                    let allowed = (4.0 * vt).max(0.3 - old);
                    damping = damping.min(allowed / rise);
                }
            }
            let max_node_step = delta.iter().fold(0.0f64, |m, d| m.max(d.abs()));
            if max_node_step * damping > 2.0 {
                damping = damping.min(2.0 / max_node_step);
            }
            for (value, d) in x.iter_mut().zip(&delta) {
                *value += damping * d;
            }
            let (worst_node, worst_residual) =
                residual.iter().enumerate().fold((0usize, 0.0f64), |(wi, wr), (i, r)| {
                    if r.abs() > wr {
                        (i, r.abs())
                    } else {
                        (wi, wr)
                    }
                });
            last_residual = (worst_node, worst_residual);
            let converged_step = max_node_step * damping < 1e-9 && damping == 1.0;
            if converged_step && worst_residual < 1e-9 {
                return Ok((x, iteration));
            }
            if !x.iter().all(|value| value.is_finite()) {
                break;
            }
        }
        Err(SolveError::NonConvergence {
            iterations: MAX_NEWTON_ITERATIONS,
            node: self.network.node_name(last_residual.0),
            residual_a: last_residual.1,
        })
    }

    fn finish(
        &self,
        models: &[EbersMoll; 2],
        diode: &DiodeLaw,
        (x, iterations): (Vec<f64>, usize),
    ) -> ExactSolution {
        let v = |t: Terminal| StageNetwork::voltage(t, &x);
        let mut transistor_currents = [(0.0, 0.0); 2];
        for (index, pins) in self.network.transistors.iter().enumerate() {
            let (collector, base) = self.intrinsic[index % 2];
            let op = models[index % 2].evaluate(v(base) - v(pins.emitter), v(base) - v(collector));
            transistor_currents[index % 2] = (op.collector_current_a, op.base_current_a);
        }
        let diode_currents =
            self.network.diodes.iter().map(|pins| diode.current(v(pins.anode) - v(pins.cathode)).0).collect();
        ExactSolution {
            node_voltages: x.get(..self.network.node_count()).map(|s| s.to_vec()).unwrap_or_default(),
            transistor_currents,
            diode_currents,
            iterations,
        }
    }
}

fn stamp_jacobian_pair(jacobian: &mut DenseMatrix, a: Terminal, b: Terminal, g: f64) {
    if let Terminal::Node(i) = a {
        jacobian.add(i, i, g);
        if let Terminal::Node(j) = b {
            jacobian.add(i, j, -g);
        }
    }
    if let Terminal::Node(j) = b {
        jacobian.add(j, j, g);
        if let Terminal::Node(i) = a {
            jacobian.add(j, i, -g);
        }
    }
}
