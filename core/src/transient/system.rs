//! Modified nodal analysis: the validated circuit compiled into unknowns and stamps, and the
//! Newton–Raphson loop with junction-voltage limiting that solves it at one instant.

use std::collections::BTreeMap;

use super::circuit::{is_ground, Circuit, Element};
use super::devices::{critical_voltage, junction_current, limit_junction_voltage, DepletionLaw};
use super::error::SimulationError;
use super::linear::{fill_with_zeros, LinearSolver};
use super::waveform::Waveform;
use crate::device::ebers_moll::{BjtOperatingPoint, EbersMoll};
use crate::numeric::larger;
use crate::physics::thermal_voltage;

/// Device series resistances below this are treated as none: an internal node behind a
/// femto-ohm resistance (rounding left over from a derivation) makes the matrix singular in
/// all but name, while a milliohm changes no voltage the engine reports.
pub const MIN_INTERNAL_RESISTANCE_OHM: f64 = 1e-3;

/// Conductance from every node to ground and across every junction: keeps the matrix regular
/// when a node is reached only through capacitors or cut-off junctions. 1 pS shifts a 10 V,
/// 10 kΩ node by about 1 µV.
pub const GMIN_S: f64 = 1e-12;

/// Share of the Newton relative tolerance that reusing a junction's last evaluation may cost
/// (bypass, see [`Evaluations`]). Continuing an exponential I(V) linearly from V0 errs by
/// ½(ΔV/(n·VT))² of its current, so a device is reused while every junction voltage lies
/// within n·VT·√(2·share·relative) of where it was last evaluated: at the default relative
/// tolerance 1e-3, 0.01·n·VT (0.26 mV), an error of 5e-5 of the current — a twentieth of what
/// the residual test accepts anyway.
pub const BYPASS_SHARE_OF_TOLERANCE: f64 = 0.05;

/// A transistor's operating point continued linearly by (ΔVBE, ΔVBC) from where it was
/// evaluated; the derivatives stay those of the evaluation.
fn continued(op: &BjtOperatingPoint, dvbe: f64, dvbc: f64) -> BjtOperatingPoint {
    BjtOperatingPoint {
        collector_current_a: op.collector_current_a + op.dic_dvbe * dvbe + op.dic_dvbc * dvbc,
        base_current_a: op.base_current_a + op.dib_dvbe * dvbe + op.dib_dvbc * dvbc,
        forward_current_a: op.forward_current_a + op.forward_conductance_s * dvbe,
        reverse_current_a: op.reverse_current_a + op.reverse_conductance_s * dvbc,
        ..*op
    }
}

/// A terminal: an unknown's index, or `None` for ground.
type Pin = Option<usize>;

#[derive(Debug, Clone)]
enum Stamp {
    Conductance {
        a: Pin,
        b: Pin,
        conductance_s: f64,
    },
    Capacitor {
        a: Pin,
        b: Pin,
        capacitance_f: f64,
        charge: usize,
    },
    VoltageSource {
        positive: Pin,
        negative: Pin,
        row: usize,
        waveform: Waveform,
    },
    CurrentSource {
        from: Pin,
        to: Pin,
        waveform: Waveform,
    },
    Diode {
        anode: Pin,
        cathode: Pin,
        law: DiodeLaw,
        charge: usize,
        junction: usize,
    },
    Transistor {
        collector: Pin,
        base: Pin,
        emitter: Pin,
        law: TransistorLaw,
        charges: [usize; 2],
        junctions: [usize; 2],
    },
}

impl Stamp {
    /// The order of kinds in a compiled system.
    fn kind_rank(&self) -> u8 {
        match self {
            Stamp::Conductance { .. } => 0,
            Stamp::VoltageSource { .. } => 1,
            Stamp::CurrentSource { .. } => 2,
            Stamp::Capacitor { .. } => 3,
            Stamp::Diode { .. } => 4,
            Stamp::Transistor { .. } => 5,
        }
    }
}

#[derive(Debug, Clone, Copy)]
struct DiodeLaw {
    saturation_current_a: f64,
    n_vt: f64,
    critical_v: f64,
    depletion: DepletionLaw,
    transit_time_s: f64,
}

#[derive(Debug, Clone, Copy)]
struct TransistorLaw {
    model: EbersMoll,
    /// +1 NPN, −1 PNP: real voltages times `sign` are NPN-frame voltages.
    sign: f64,
    vt: f64,
    critical_v: f64,
    emitter_depletion: DepletionLaw,
    collector_depletion: DepletionLaw,
}

/// How charges turn into currents at this solve: i = a·(q − q_previous) + b·i_previous.
/// Backward Euler: a = 1/h, b = 0. Trapezoidal: a = 2/h, b = −1.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Integration {
    pub a: f64,
    pub b: f64,
}

/// Everything that varies between solves besides the unknowns.
#[derive(Debug, Clone)]
pub(crate) struct Conditions<'a> {
    pub time_s: f64,
    /// Multiplies every independent source (source stepping); 1 normally.
    pub source_scale: f64,
    /// Added to [`GMIN_S`] from every node to ground (gmin stepping); 0 normally.
    pub extra_gmin_s: f64,
    /// `None` for DC: charges carry no current.
    pub integration: Option<Integration>,
    pub previous_charges: &'a [f64],
    pub previous_charge_currents: &'a [f64],
    /// (unknown, volts, siemens): nodes pulled toward a hinted voltage.
    pub pulls: &'a [(usize, f64, f64)],
}

/// Newton–Raphson tolerances and budget.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct NewtonTolerances {
    pub relative: f64,
    pub voltage_v: f64,
    pub current_a: f64,
    pub max_iterations: usize,
}

/// A junction device's last full evaluation: the junction voltages it was made at and what
/// the stamp needs from the device law there.
#[derive(Debug, Clone, Copy)]
enum Evaluation {
    None,
    Diode {
        v: f64,
        current_a: f64,
        conductance_s: f64,
        charge_c: f64,
        capacitance_f: f64,
    },
    Transistor {
        vbe: f64,
        vbc: f64,
        op: BjtOperatingPoint,
        /// Charge and capacitance of the B–E and B–C branches (NPN frame).
        q_be: f64,
        c_be: f64,
        q_bc: f64,
        c_bc: f64,
    },
}

/// Device bypass across Newton iterations and time steps: each junction device's last full
/// evaluation, reused, continued linearly to the present junction voltages, while those stay
/// within `window_share · n·VT` of it (the device law is a pure function of its junction
/// voltages, so an evaluation never goes stale otherwise). The continuation makes the
/// stamp exactly the one of the reused evaluation, and the charges first-order right, so
/// charge bookkeeping stays consistent; only the second-order remainder is lost (see
/// [`BYPASS_SHARE_OF_TOLERANCE`]).
#[derive(Debug, Clone)]
pub(crate) struct Evaluations {
    window_share: f64,
    /// Indexed by the device's first junction.
    slots: Vec<Evaluation>,
    pub reused: usize,
    pub evaluated: usize,
}

/// A device's cached evaluation, its bypass window in volts, and the reuse and evaluation
/// counters, for the stamping loop.
type Slot<'a> = (&'a mut Evaluation, f64, &'a mut usize, &'a mut usize);

impl Evaluations {
    /// The cached evaluation of the device whose first junction is `junction`, with the window
    /// for a junction law of thermal scale `scale_v` (n·VT of a diode, VT of a transistor).
    fn slot(&mut self, junction: usize, scale_v: f64) -> Option<Slot<'_>> {
        let window = self.window_share * scale_v;
        self.slots.get_mut(junction).map(|slot| (slot, window, &mut self.reused, &mut self.evaluated))
    }

    /// For Newton solves at `relative` tolerance (the window shrinks with it).
    pub(crate) fn new(relative: f64) -> Evaluations {
        Evaluations {
            window_share: (2.0 * BYPASS_SHARE_OF_TOLERANCE * relative).sqrt(),
            slots: Vec::new(),
            reused: 0,
            evaluated: 0,
        }
    }
}

/// What a Newton solve may reuse from earlier work.
#[derive(Debug)]
pub(crate) struct Reuse<'a> {
    /// Device bypass, when given.
    pub evaluations: Option<&'a mut Evaluations>,
    /// The constant matrix entries (conductances, gmin, source incidences) from the solver's
    /// base ([`LinearSolver::save_base`]) after the first assembly; only for solves whose
    /// conditions keep `extra_gmin_s`, as a transient run does.
    pub constants: bool,
    /// Vectors to work in instead of allocating them, when given.
    pub buffers: Option<&'a mut NewtonBuffers>,
}

impl Reuse<'_> {
    /// Every device evaluated and every matrix factorised at every iteration.
    pub(crate) fn nothing() -> Reuse<'static> {
        Reuse { evaluations: None, constants: false, buffers: None }
    }
}

/// The vectors a Newton solve works in, kept across the solves of a run so that a step
/// allocates none (allocation showed in profiles of a stage run, under Node especially): a
/// solve takes them and gives back those it does not return, and the run hands back the
/// returned ones once it no longer needs them ([`NewtonBuffers::recycle`]).
#[derive(Debug, Default)]
pub(crate) struct NewtonBuffers {
    unknowns: Vec<f64>,
    next: Vec<f64>,
    product: Vec<f64>,
    magnitude: Vec<f64>,
    rhs: Vec<f64>,
    charges: Vec<f64>,
    charge_currents: Vec<f64>,
}

impl NewtonBuffers {
    /// Takes back the vectors of a solve whose result is no longer needed.
    pub(crate) fn recycle(&mut self, solved: Solved) {
        self.recycle_unknowns(solved.unknowns);
        self.recycle_charges(solved.charges, solved.charge_currents);
    }
    /// Takes back one unknowns vector (the point before the last, once it moves on).
    pub(crate) fn recycle_unknowns(&mut self, unknowns: Vec<f64>) {
        self.unknowns = unknowns;
    }
    /// Takes back a charge and a charge-current vector replaced by a newer solve's.
    pub(crate) fn recycle_charges(&mut self, charges: Vec<f64>, charge_currents: Vec<f64>) {
        self.charges = charges;
        self.charge_currents = charge_currents;
    }
}

/// What one assembly produces besides the matrix: the right-hand side, and the charges and
/// charge currents at the linearisation point.
struct Linearised {
    rhs: Vec<f64>,
    charges: Vec<f64>,
    charge_currents: Vec<f64>,
}

/// A converged solve.
#[derive(Debug, Clone)]
pub(crate) struct Solved {
    pub unknowns: Vec<f64>,
    pub charges: Vec<f64>,
    pub charge_currents: Vec<f64>,
    pub iterations: usize,
}

/// A failed solve: where the largest update was, or the singular unknown.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum Failure {
    Singular { unknown: usize },
    NotConverged { unknown: usize, largest_update: f64, iterations: usize },
}

/// One junction's terminals and limiting constants, in junction-slot order: the Newton loop
/// reads and limits every junction at every iteration, and walking this short table instead
/// of every stamp (each as large as its biggest variant) is several times cheaper on wasm32.
#[derive(Debug, Clone, Copy)]
struct JunctionPins {
    positive: Pin,
    negative: Pin,
    /// +1, or −1 for a PNP transistor's junctions (NPN-frame voltage = sign·real voltage).
    sign: f64,
    n_vt: f64,
    critical_v: f64,
}

/// The compiled circuit.
#[derive(Debug, Clone)]
pub struct System {
    /// Names of the node unknowns: the circuit's nodes, then internal ones ("Q1.base").
    pub node_names: Vec<String>,
    /// Names of the voltage sources, one current unknown each after the nodes.
    pub source_names: Vec<String>,
    /// Grouped by kind, conductances first.
    stamps: Vec<Stamp>,
    /// Index of the first stamp that is not a conductance.
    varying_from: usize,
    /// `junction_count` entries, slot by slot.
    junction_pins: Vec<JunctionPins>,
    pub(crate) charge_count: usize,
    pub(crate) junction_count: usize,
}

fn pin_voltage(unknowns: &[f64], pin: Pin) -> f64 {
    pin.and_then(|i| unknowns.get(i).copied()).unwrap_or(0.0)
}

/// Matrix and right-hand side being assembled.
struct Assembly<'s, S: LinearSolver> {
    solver: &'s mut S,
    rhs: &'s mut Vec<f64>,
}

impl<S: LinearSolver> Assembly<'_, S> {
    #[inline]
    fn matrix(&mut self, row: Pin, column: Pin, value: f64) {
        if let (Some(r), Some(c)) = (row, column) {
            self.solver.add(r, c, value);
        }
    }
    #[inline]
    fn rhs(&mut self, row: Pin, value: f64) {
        if let Some(entry) = row.and_then(|r| self.rhs.get_mut(r)) {
            *entry += value;
        }
    }
    /// A branch current i = equivalent + g·(V(a) − V(b)) leaving node a for node b.
    #[inline]
    fn branch(&mut self, a: Pin, b: Pin, conductance_s: f64, equivalent_a: f64) {
        self.conductance(a, b, conductance_s);
        self.rhs(a, -equivalent_a);
        self.rhs(b, equivalent_a);
    }
    /// The matrix part of [`Assembly::branch`]. Always inlined: as a call it took 8 % of a
    /// chain run (perf, 2026-12-04), and its pins are often known at the call site.
    #[inline(always)]
    fn conductance(&mut self, a: Pin, b: Pin, conductance_s: f64) {
        self.matrix(a, a, conductance_s);
        self.matrix(b, b, conductance_s);
        self.matrix(a, b, -conductance_s);
        self.matrix(b, a, -conductance_s);
    }
}

impl System {
    /// Compiles a circuit that passed [`Circuit::validate`] (validation runs again here).
    pub fn compile(circuit: &Circuit) -> Result<System, SimulationError> {
        circuit.validate().map_err(SimulationError::InvalidCircuit)?;
        let mut node_index: BTreeMap<String, usize> = BTreeMap::new();
        let mut node_names = Vec::new();
        // External nodes first, in order of appearance, so results list them as written.
        for element in &circuit.elements {
            for (_, node) in element.terminals() {
                if !is_ground(node) && !node_index.contains_key(node) {
                    node_index.insert(node.to_string(), node_names.len());
                    node_names.push(node.to_string());
                }
            }
        }
        let pin = |name: &str| -> Pin {
            if is_ground(name) {
                None
            } else {
                node_index.get(name).copied()
            }
        };
        let mut internal = Vec::new();
        let mut source_names = Vec::new();
        let mut stamps = Vec::new();
        let mut charge_count = 0;
        let mut junction_count = 0;
        let add_internal = |internal: &mut Vec<String>, name: String| -> Pin {
            internal.push(name);
            Some(node_names.len() + internal.len() - 1)
        };
        let mut sources = Vec::new();
        for element in &circuit.elements {
            match element {
                Element::Resistor { positive_node, negative_node, resistance_ohm, .. } => {
                    stamps.push(Stamp::Conductance {
                        a: pin(positive_node),
                        b: pin(negative_node),
                        conductance_s: 1.0 / resistance_ohm,
                    });
                }
                Element::Capacitor { positive_node, negative_node, capacitance_f, .. } => {
                    stamps.push(Stamp::Capacitor {
                        a: pin(positive_node),
                        b: pin(negative_node),
                        capacitance_f: *capacitance_f,
                        charge: charge_count,
                    });
                    charge_count += 1;
                }
                Element::VoltageSource { name, positive_node, negative_node, waveform } => {
                    sources.push((pin(positive_node), pin(negative_node), waveform.clone()));
                    source_names.push(name.clone());
                }
                Element::CurrentSource { from_node, to_node, waveform, .. } => {
                    stamps.push(Stamp::CurrentSource {
                        from: pin(from_node),
                        to: pin(to_node),
                        waveform: waveform.clone(),
                    });
                }
                Element::Diode { name, anode, cathode, model } => {
                    let n_vt = model.emission_coefficient * thermal_voltage(circuit.temperature_c);
                    let mut inner_anode = pin(anode);
                    if model.series_resistance_ohm >= MIN_INTERNAL_RESISTANCE_OHM {
                        inner_anode = add_internal(&mut internal, format!("{name}.anode"));
                        stamps.push(Stamp::Conductance {
                            a: pin(anode),
                            b: inner_anode,
                            conductance_s: 1.0 / model.series_resistance_ohm,
                        });
                    }
                    stamps.push(Stamp::Diode {
                        anode: inner_anode,
                        cathode: pin(cathode),
                        law: DiodeLaw {
                            saturation_current_a: model.saturation_current_a,
                            n_vt,
                            critical_v: critical_voltage(model.saturation_current_a, n_vt),
                            depletion: DepletionLaw::new(
                                model.junction_capacitance_f,
                                model.junction_potential_v,
                                model.junction_grading,
                            ),
                            transit_time_s: model.transit_time_s,
                        },
                        charge: charge_count,
                        junction: junction_count,
                    });
                    charge_count += 1;
                    junction_count += 1;
                }
                Element::Transistor { name, collector, base, emitter, model } => {
                    let mut inner_base = pin(base);
                    if model.base_resistance_ohm >= MIN_INTERNAL_RESISTANCE_OHM {
                        inner_base = add_internal(&mut internal, format!("{name}.base"));
                        stamps.push(Stamp::Conductance {
                            a: pin(base),
                            b: inner_base,
                            conductance_s: 1.0 / model.base_resistance_ohm,
                        });
                    }
                    let mut inner_collector = pin(collector);
                    if model.collector_resistance_ohm >= MIN_INTERNAL_RESISTANCE_OHM {
                        inner_collector = add_internal(&mut internal, format!("{name}.collector"));
                        stamps.push(Stamp::Conductance {
                            a: pin(collector),
                            b: inner_collector,
                            conductance_s: 1.0 / model.collector_resistance_ohm,
                        });
                    }
                    let vt = thermal_voltage(model.temperature_c);
                    stamps.push(Stamp::Transistor {
                        collector: inner_collector,
                        base: inner_base,
                        emitter: pin(emitter),
                        law: TransistorLaw {
                            model: *model,
                            sign: model.polarity.sign(),
                            vt,
                            critical_v: critical_voltage(model.saturation_current_a, vt),
                            emitter_depletion: DepletionLaw::new(
                                model.emitter_junction_capacitance_f,
                                model.emitter_junction_potential_v,
                                model.junction_grading,
                            ),
                            collector_depletion: DepletionLaw::new(
                                model.collector_junction_capacitance_f,
                                model.collector_junction_potential_v,
                                model.junction_grading,
                            ),
                        },
                        charges: [charge_count, charge_count + 1],
                        junctions: [junction_count, junction_count + 1],
                    });
                    charge_count += 2;
                    junction_count += 2;
                }
            }
        }
        let node_count = node_names.len() + internal.len();
        for (index, (positive, negative, waveform)) in sources.into_iter().enumerate() {
            stamps.push(Stamp::VoltageSource { positive, negative, row: node_count + index, waveform });
        }
        node_names.extend(internal);
        // Grouped by kind, so the assembly's dispatch on the kind runs in long predictable
        // stretches, and the conductances, which only the constant part stamps, come first
        // for the rest of each assembly to skip (the slots they carry keep their meaning).
        stamps.sort_by_key(Stamp::kind_rank);
        let varying_from =
            stamps.iter().take_while(|stamp| matches!(stamp, Stamp::Conductance { .. })).count();
        let mut junction_pins =
            vec![
                JunctionPins { positive: None, negative: None, sign: 1.0, n_vt: 1.0, critical_v: 0.0 };
                junction_count
            ];
        for stamp in &stamps {
            let mut set = |slot: usize, pins: JunctionPins| {
                if let Some(entry) = junction_pins.get_mut(slot) {
                    *entry = pins;
                }
            };
            match stamp {
                Stamp::Diode { anode, cathode, law, junction, .. } => set(
                    *junction,
                    JunctionPins {
                        positive: *anode,
                        negative: *cathode,
                        sign: 1.0,
                        n_vt: law.n_vt,
                        critical_v: law.critical_v,
                    },
                ),
                Stamp::Transistor { collector, base, emitter, law, junctions: [je, jc], .. } => {
                    let pins = |negative: Pin| JunctionPins {
                        positive: *base,
                        negative,
                        sign: law.sign,
                        n_vt: law.vt,
                        critical_v: law.critical_v,
                    };
                    set(*je, pins(*emitter));
                    set(*jc, pins(*collector));
                }
                _ => {}
            }
        }
        Ok(System {
            node_names,
            source_names,
            stamps,
            varying_from,
            junction_pins,
            charge_count,
            junction_count,
        })
    }

    pub fn node_count(&self) -> usize {
        self.node_names.len()
    }

    /// Number of unknowns: node voltages, then voltage-source currents.
    pub fn size(&self) -> usize {
        self.node_names.len() + self.source_names.len()
    }

    /// Index of a node unknown by name; `None` for ground or an unknown name.
    pub fn node(&self, name: &str) -> Option<usize> {
        self.node_names.iter().position(|n| n == name)
    }

    /// A readable name for unknown `index`.
    pub fn unknown_name(&self, index: usize) -> String {
        if let Some(name) = self.node_names.get(index) {
            return name.clone();
        }
        match self.source_names.get(index.saturating_sub(self.node_names.len())) {
            Some(source) => format!("the current of {source}"),
            None => format!("unknown #{index}"),
        }
    }

    /// Every corner of every source waveform strictly after `time_s`: the earliest.
    pub fn next_corner_after(&self, time_s: f64) -> Option<f64> {
        self.stamps
            .iter()
            .filter_map(|stamp| match stamp {
                Stamp::VoltageSource { waveform, .. } | Stamp::CurrentSource { waveform, .. } => {
                    waveform.next_corner_after(time_s)
                }
                _ => None,
            })
            .min_by(f64::total_cmp)
    }

    /// Junction voltages (NPN frame for transistors) implied by the unknowns.
    pub(crate) fn junction_voltages(&self, unknowns: &[f64]) -> Vec<f64> {
        let mut junctions = vec![0.0; self.junction_count];
        self.junction_voltages_into(unknowns, &mut junctions);
        junctions
    }

    /// [`System::junction_voltages`] into a buffer of `junction_count` entries.
    fn junction_voltages_into(&self, unknowns: &[f64], junctions: &mut [f64]) {
        for (slot, pins) in junctions.iter_mut().zip(&self.junction_pins) {
            *slot = pins.sign * (pin_voltage(unknowns, pins.positive) - pin_voltage(unknowns, pins.negative));
        }
    }

    /// Starting junction voltages for limiting: those of `unknowns`, but never above the
    /// critical voltage, so a wild start is limited on the first iteration.
    pub(crate) fn starting_junctions(&self, unknowns: &[f64]) -> Vec<f64> {
        let mut junctions = self.junction_voltages(unknowns);
        for stamp in &self.stamps {
            match stamp {
                Stamp::Diode { law, junction, .. } => {
                    if let Some(v) = junctions.get_mut(*junction) {
                        *v = v.min(law.critical_v);
                    }
                }
                Stamp::Transistor { law, junctions: pair, .. } => {
                    for j in pair {
                        if let Some(v) = junctions.get_mut(*j) {
                            *v = v.min(law.critical_v);
                        }
                    }
                }
                _ => {}
            }
        }
        junctions
    }

    /// Stamps the system linearised at `junctions` (already limited) and `unknowns`;
    /// fills the right-hand side, the charges and the charge currents of `out`.
    fn assemble<S: LinearSolver>(
        &self,
        solver: &mut S,
        unknowns: &[f64],
        junctions: &[f64],
        conditions: &Conditions,
        out: &mut Linearised,
        reuse: &mut Reuse,
    ) {
        let Linearised { rhs, charges, charge_currents } = out;
        let constants_from_base = reuse.constants;
        let mut evaluations = reuse.evaluations.as_deref_mut();
        if let Some(cache) = evaluations.as_deref_mut() {
            if cache.slots.len() != self.junction_count {
                cache.slots = vec![Evaluation::None; self.junction_count];
            }
        }
        let size = self.size();
        let from_base = constants_from_base && solver.reset_to_base(size);
        if !from_base {
            solver.reset(size);
        }
        rhs.clear();
        rhs.resize(size, 0.0);
        let mut assembly = Assembly { solver, rhs };
        // First the matrix entries that do not change during a run (no right-hand side):
        // kept as the solver's base when asked, so later assemblies start from them.
        if !from_base {
            let node_gmin = GMIN_S + conditions.extra_gmin_s;
            for node in 0..self.node_count() {
                assembly.matrix(Some(node), Some(node), node_gmin);
            }
            for stamp in &self.stamps {
                match stamp {
                    Stamp::Conductance { a, b, conductance_s } => {
                        assembly.conductance(*a, *b, *conductance_s)
                    }
                    Stamp::VoltageSource { positive, negative, row, .. } => {
                        let r = Some(*row);
                        assembly.matrix(*positive, r, 1.0);
                        assembly.matrix(*negative, r, -1.0);
                        assembly.matrix(r, *positive, 1.0);
                        assembly.matrix(r, *negative, -1.0);
                    }
                    _ => {}
                }
            }
            if constants_from_base {
                assembly.solver.save_base();
            }
        }
        for &(node, voltage_v, conductance_s) in conditions.pulls {
            assembly.matrix(Some(node), Some(node), conductance_s);
            assembly.rhs(Some(node), conductance_s * voltage_v);
        }
        // Charge q(v) with capacitance C(v) in `slot` → its companion current and conductance
        // (none in DC). The devices stamp them together with their own branches, so each
        // junction adds its entries once.
        let mut charge_companion = |slot: usize, q: f64, c: f64| -> (f64, f64) {
            if let Some(entry) = charges.get_mut(slot) {
                *entry = q;
            }
            let Some(integration) = conditions.integration else { return (0.0, 0.0) };
            let q_previous = conditions.previous_charges.get(slot).copied().unwrap_or(0.0);
            let i_previous = conditions.previous_charge_currents.get(slot).copied().unwrap_or(0.0);
            let current = integration.a * (q - q_previous) + integration.b * i_previous;
            if let Some(entry) = charge_currents.get_mut(slot) {
                *entry = current;
            }
            (current, integration.a * c)
        };
        for stamp in self.stamps.get(self.varying_from..).unwrap_or(&[]) {
            match stamp {
                Stamp::Conductance { .. } => {}
                Stamp::Capacitor { a, b, capacitance_f, charge } => {
                    let v = pin_voltage(unknowns, *a) - pin_voltage(unknowns, *b);
                    let (current, conductance) = charge_companion(*charge, capacitance_f * v, *capacitance_f);
                    assembly.branch(*a, *b, conductance, current - conductance * v);
                }
                Stamp::VoltageSource { row, waveform, .. } => {
                    assembly.rhs(Some(*row), conditions.source_scale * waveform.value_at(conditions.time_s));
                }
                Stamp::CurrentSource { from, to, waveform } => {
                    let current = conditions.source_scale * waveform.value_at(conditions.time_s);
                    assembly.rhs(*from, -current);
                    assembly.rhs(*to, current);
                }
                Stamp::Diode { anode, cathode, law, charge, junction } => {
                    let v = junctions.get(*junction).copied().unwrap_or(0.0);
                    let slot = evaluations.as_deref_mut().and_then(|cache| cache.slot(*junction, law.n_vt));
                    let (id, gd, q, c) = match slot {
                        Some((
                            &mut Evaluation::Diode {
                                v: v0,
                                current_a,
                                conductance_s,
                                charge_c,
                                capacitance_f,
                            },
                            window,
                            reused,
                            _,
                        )) if (v - v0).abs() <= window => {
                            *reused += 1;
                            let dv = v - v0;
                            (
                                current_a + conductance_s * dv,
                                conductance_s,
                                charge_c + capacitance_f * dv,
                                capacitance_f,
                            )
                        }
                        other => {
                            let (id, gd) = junction_current(v, law.saturation_current_a, law.n_vt);
                            let (qj, cj) = law.depletion.charge(v);
                            let q = qj + law.transit_time_s * id;
                            let c = cj + law.transit_time_s * gd;
                            if let Some((slot, _, _, evaluated)) = other {
                                *evaluated += 1;
                                *slot = Evaluation::Diode {
                                    v,
                                    current_a: id,
                                    conductance_s: gd,
                                    charge_c: q,
                                    capacitance_f: c,
                                };
                            }
                            (id, gd, q, c)
                        }
                    };
                    let (i, g) = (id + GMIN_S * v, gd + GMIN_S);
                    let (i_charge, g_charge) = charge_companion(*charge, q, c);
                    assembly.branch(*anode, *cathode, g + g_charge, (i - g * v) + (i_charge - g_charge * v));
                }
                Stamp::Transistor {
                    collector,
                    base,
                    emitter,
                    law,
                    charges: [qe, qc],
                    junctions: [je, jc],
                } => {
                    let s = law.sign;
                    let model = &law.model;
                    let vbe = junctions.get(*je).copied().unwrap_or(0.0);
                    let vbc = junctions.get(*jc).copied().unwrap_or(0.0);
                    let slot = evaluations.as_deref_mut().and_then(|cache| cache.slot(*je, law.vt));
                    let (op, q_be, c_be, q_bc, c_bc) = match slot {
                        Some((
                            &mut Evaluation::Transistor { vbe: vbe0, vbc: vbc0, op, q_be, c_be, q_bc, c_bc },
                            window,
                            reused,
                            _,
                        )) if (vbe - vbe0).abs() <= window && (vbc - vbc0).abs() <= window => {
                            *reused += 1;
                            let (dbe, dbc) = (vbe - vbe0, vbc - vbc0);
                            (continued(&op, dbe, dbc), q_be + c_be * dbe, c_be, q_bc + c_bc * dbc, c_bc)
                        }
                        other => {
                            let op = model.evaluate(vbe, vbc);
                            // Charges: τF·IF + emitter depletion on B–E, τR·IR + collector
                            // depletion on B–C.
                            let (qje, cje) = law.emitter_depletion.charge(vbe);
                            let (qjc, cjc) = law.collector_depletion.charge(vbc);
                            let q_be = model.forward_transit_s * op.forward_current_a + qje;
                            let c_be = model.forward_transit_s * op.forward_conductance_s + cje;
                            let q_bc = model.reverse_transit_s * op.reverse_current_a + qjc;
                            let c_bc = model.reverse_transit_s * op.reverse_conductance_s + cjc;
                            if let Some((slot, _, _, evaluated)) = other {
                                *evaluated += 1;
                                *slot = Evaluation::Transistor { vbe, vbc, op, q_be, c_be, q_bc, c_bc };
                            }
                            (op, q_be, c_be, q_bc, c_bc)
                        }
                    };
                    // Real-frame branch voltages at the linearisation point.
                    let (vbe_real, vbc_real) = (s * vbe, s * vbc);
                    let ic = s * op.collector_current_a + GMIN_S * -vbc_real;
                    let ib = s * op.base_current_a + GMIN_S * (vbe_real + vbc_real);
                    let (gc_be, gc_bc) = (op.dic_dvbe, op.dic_dvbc - GMIN_S);
                    let (gb_be, gb_bc) = (op.dib_dvbe + GMIN_S, op.dib_dvbc + GMIN_S);
                    // Real frame: charge s·q at branch voltage s·v; the capacitance is
                    // unchanged. The B–E charge current leaves the base for the emitter, the
                    // B–C one the base for the collector.
                    let (i_qbe, g_qbe) = charge_companion(*qe, s * q_be, c_be);
                    let (i_qbc, g_qbc) = charge_companion(*qc, s * q_bc, c_bc);
                    let rows = [
                        (*collector, ic - i_qbc, gc_be, gc_bc - g_qbc),
                        (*base, ib + i_qbe + i_qbc, gb_be + g_qbe, gb_bc + g_qbc),
                        (*emitter, -(ic + ib) - i_qbe, -(gc_be + gb_be) - g_qbe, -(gc_bc + gb_bc)),
                    ];
                    for (row, current, g_be, g_bc) in rows {
                        assembly.matrix(row, *base, g_be + g_bc);
                        assembly.matrix(row, *emitter, -g_be);
                        assembly.matrix(row, *collector, -g_bc);
                        assembly.rhs(row, -(current - g_be * vbe_real - g_bc * vbc_real));
                    }
                }
            }
        }
    }

    /// Limits every junction's voltage at `unknowns` against `junctions` (updated in place);
    /// true when any was limited.
    fn limit_junctions(&self, unknowns: &[f64], junctions: &mut [f64]) -> bool {
        let mut limited_any = false;
        for (previous, pins) in junctions.iter_mut().zip(&self.junction_pins) {
            let proposed =
                pins.sign * (pin_voltage(unknowns, pins.positive) - pin_voltage(unknowns, pins.negative));
            let (value, limited) = limit_junction_voltage(proposed, *previous, pins.n_vt, pins.critical_v);
            *previous = value;
            limited_any |= limited;
        }
        limited_any
    }

    /// Newton–Raphson from `start`; `junctions` holds the limiting history and is left at the
    /// last evaluated junction voltages.
    ///
    /// Converged means both: the last update is within tolerance of every node voltage (and no
    /// junction was limited), and the equations hold at the new point — each row's residual
    /// within the relative tolerance of the sum of the magnitudes of its terms plus the
    /// absolute current (node rows) or voltage (source rows) tolerance. The update alone can
    /// be small while a steep junction is still far from balance; the residual alone cannot
    /// tell a flat valley from a solution. The residual comes from the assembly at the new
    /// point, which the next iteration uses if the test fails, so it costs no extra solve, and
    /// a good start may converge after one iteration.
    ///
    /// The update test covers the node voltages only. A voltage source's current drives no
    /// element and appears only in the current balances of its terminals, so the residual
    /// test bounds it as it bounds every device current (to the relative tolerance of the
    /// currents meeting there, plus the absolute current tolerance). Testing its update as
    /// well cost iterations for nothing: an input source carrying almost no current between
    /// edges moved by more than 1 pA from one iterate to the next on most steps (11 % fewer
    /// iterations on one stage, 3.5 % on the ten-stage chain, with the same steps and edges).
    pub(crate) fn newton<S: LinearSolver>(
        &self,
        solver: &mut S,
        start: &[f64],
        junctions: &mut Vec<f64>,
        conditions: &Conditions,
        tolerances: NewtonTolerances,
    ) -> Result<Solved, Failure> {
        self.newton_with(solver, start, junctions, conditions, tolerances, Reuse::nothing())
    }

    /// [`System::newton`] with device bypass and the solver's base of constant entries as
    /// `reuse` allows; the convergence tests are the same.
    pub(crate) fn newton_with<S: LinearSolver>(
        &self,
        solver: &mut S,
        start: &[f64],
        junctions: &mut Vec<f64>,
        conditions: &Conditions,
        tolerances: NewtonTolerances,
        reuse: Reuse,
    ) -> Result<Solved, Failure> {
        let mut reuse = reuse;
        let size = self.size();
        let node_count = self.node_count();
        let mut own = NewtonBuffers::default();
        let buffers = reuse.buffers.take().unwrap_or(&mut own);
        let mut unknowns = std::mem::take(&mut buffers.unknowns);
        unknowns.clear();
        unknowns.extend_from_slice(start);
        unknowns.resize(size, 0.0);
        junctions.resize(self.junction_count, 0.0);
        let mut out = Linearised {
            rhs: std::mem::take(&mut buffers.rhs),
            charges: std::mem::take(&mut buffers.charges),
            charge_currents: std::mem::take(&mut buffers.charge_currents),
        };
        fill_with_zeros(&mut out.charges, self.charge_count);
        fill_with_zeros(&mut out.charge_currents, self.charge_count);
        let mut next = std::mem::take(&mut buffers.next);
        // Sized and overwritten by `LinearSolver::multiply` before they are read.
        let mut product = std::mem::take(&mut buffers.product);
        let mut magnitude = std::mem::take(&mut buffers.magnitude);
        let mut worst = (0, f64::INFINITY);
        let mut limited = self.limit_junctions(&unknowns, junctions);
        self.assemble(solver, &unknowns, junctions, conditions, &mut out, &mut reuse);
        for iteration in 1..=tolerances.max_iterations {
            next.clone_from(&out.rhs);
            solver.solve_in_place(&mut next).map_err(|e| Failure::Singular { unknown: e.column })?;
            // Largest node-voltage update relative to its tolerance decides convergence and
            // names the culprit when the budget runs out (source currents: see above).
            let mut worst_ratio = 0.0;
            worst = (0, 0.0);
            for (index, (&new, &old)) in next.iter().zip(&unknowns).enumerate().take(node_count) {
                let allowed = tolerances.relative * larger(old.abs(), new.abs()) + tolerances.voltage_v;
                let ratio = (new - old).abs() / allowed;
                if !(ratio <= worst_ratio) {
                    worst_ratio = ratio;
                    worst = (index, (new - old).abs());
                }
            }
            if !worst_ratio.is_finite() {
                return Err(Failure::NotConverged {
                    unknown: worst.0,
                    largest_update: worst.1,
                    iterations: iteration,
                });
            }
            let small_update = worst_ratio <= 1.0 && !limited;
            std::mem::swap(&mut unknowns, &mut next);
            limited = self.limit_junctions(&unknowns, junctions);
            // Linearised at the new point (at its exact junction voltages when none was
            // limited): the next iteration's system, and the charges of the solution.
            self.assemble(solver, &unknowns, junctions, conditions, &mut out, &mut reuse);
            if small_update && !limited {
                solver.multiply(&unknowns, &mut product, &mut magnitude);
                let balanced = product.iter().zip(&magnitude).zip(&out.rhs).enumerate().all(
                    |(index, ((&ax, &terms), &b))| {
                        let absolute =
                            if index < node_count { tolerances.current_a } else { tolerances.voltage_v };
                        (ax - b).abs() <= tolerances.relative * (terms + b.abs()) + absolute
                    },
                );
                if balanced {
                    let Linearised { rhs, charges, charge_currents } = out;
                    // Failed solves keep nothing: they are rare, and their vectors are
                    // simply allocated again.
                    (buffers.next, buffers.product, buffers.magnitude, buffers.rhs) =
                        (next, product, magnitude, rhs);
                    return Ok(Solved { unknowns, charges, charge_currents, iterations: iteration });
                }
            }
        }
        Err(Failure::NotConverged {
            unknown: worst.0,
            largest_update: worst.1,
            iterations: tolerances.max_iterations,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::device::Polarity;
    use crate::transient::circuit::DiodeModel;
    use crate::transient::linear::{DenseSolver, SparseSolver};

    /// A diode fed from 5 V through 1 kΩ, and a transistor switch with its base fed through
    /// 100 kΩ, both with junction and diffusion charges.
    fn test_system() -> Result<System, String> {
        let resistor = |name: &str, a: &str, b: &str, resistance_ohm: f64| Element::Resistor {
            name: name.into(),
            positive_node: a.into(),
            negative_node: b.into(),
            resistance_ohm,
        };
        let diode = DiodeModel {
            saturation_current_a: 1e-14,
            emission_coefficient: 1.0,
            series_resistance_ohm: 0.0,
            junction_capacitance_f: 2e-12,
            junction_potential_v: 0.7,
            junction_grading: 0.5,
            transit_time_s: 5e-9,
        };
        let transistor = EbersMoll {
            polarity: Polarity::Npn,
            temperature_c: 25.0,
            saturation_current_a: 1e-14,
            beta_forward: 100.0,
            beta_reverse: 2.0,
            forward_transit_s: 0.5e-9,
            reverse_transit_s: 20e-9,
            emitter_junction_capacitance_f: 3e-12,
            collector_junction_capacitance_f: 2e-12,
            emitter_junction_potential_v: 0.75,
            collector_junction_potential_v: 0.75,
            junction_grading: 0.33,
            base_resistance_ohm: 0.0,
            collector_resistance_ohm: 0.0,
            leakage_a: 1e-9,
            band_gap_ev: 1.11,
        };
        let circuit = Circuit {
            elements: vec![
                Element::VoltageSource {
                    name: "VCC".into(),
                    positive_node: "vcc".into(),
                    negative_node: "0".into(),
                    waveform: Waveform::Constant { value: 5.0 },
                },
                resistor("R1", "vcc", "a", 1e3),
                Element::Diode { name: "D1".into(), anode: "a".into(), cathode: "0".into(), model: diode },
                resistor("RB", "vcc", "b", 100e3),
                resistor("RC", "vcc", "c", 1e3),
                Element::Transistor {
                    name: "Q1".into(),
                    collector: "c".into(),
                    base: "b".into(),
                    emitter: "0".into(),
                    model: transistor,
                },
                Element::Capacitor {
                    name: "C1".into(),
                    positive_node: "c".into(),
                    negative_node: "0".into(),
                    capacitance_f: 10e-12,
                },
            ],
            temperature_c: 25.0,
        };
        System::compile(&circuit).map_err(|error| format!("the test circuit must compile: {error}"))
    }

    /// Every column of the assembled matrix, through `multiply` with unit vectors.
    fn columns<S: LinearSolver>(solver: &S, size: usize) -> Vec<Vec<f64>> {
        (0..size)
            .map(|column| {
                let unit: Vec<f64> = (0..size).map(|i| if i == column { 1.0 } else { 0.0 }).collect();
                let (mut product, mut magnitude) = (Vec::new(), Vec::new());
                solver.multiply(&unit, &mut product, &mut magnitude);
                product
            })
            .collect()
    }

    fn close(a: &[f64], b: &[f64], relative: f64) -> bool {
        let scale = b.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        a.len() == b.len() && a.iter().zip(b).all(|(x, y)| (x - y).abs() <= relative * scale)
    }

    /// The state at `a_v` on the diode node (other nodes fixed), and its linearisation.
    fn assembled(
        system: &System,
        a_v: f64,
        evaluations: Option<&mut Evaluations>,
    ) -> (Vec<Vec<f64>>, Linearised, Vec<f64>) {
        let unknowns = [5.0, a_v, 0.65, 0.2, 0.0];
        let previous = vec![0.0; system.charge_count];
        let conditions = Conditions {
            time_s: 1e-9,
            source_scale: 1.0,
            extra_gmin_s: 0.0,
            integration: Some(Integration { a: 2e9, b: -1.0 }),
            previous_charges: &previous,
            previous_charge_currents: &previous,
            pulls: &[],
        };
        let junctions = system.junction_voltages(&unknowns);
        let mut out = Linearised {
            rhs: Vec::new(),
            charges: vec![0.0; system.charge_count],
            charge_currents: vec![0.0; system.charge_count],
        };
        let mut solver = DenseSolver::default();
        let mut reuse = Reuse { evaluations, constants: false, buffers: None };
        system.assemble(&mut solver, &unknowns, &junctions, &conditions, &mut out, &mut reuse);
        (columns(&solver, system.size()), out, junctions)
    }

    #[test]
    fn bypass_reuses_an_evaluation_only_within_its_window_and_keeps_its_stamp() -> Result<(), String> {
        let system = test_system()?;
        assert_eq!(system.node("a"), Some(1));
        let mut cache = Evaluations::new(1e-3);
        let window = cache.window_share * thermal_voltage(25.0);
        let (fresh_matrix, fresh, junctions) = assembled(&system, 0.6, Some(&mut cache));
        assert_eq!((cache.evaluated, cache.reused), (2, 0));
        // Inside the window both devices are reused (the transistor did not move at all):
        // the linear system is the one of the evaluation at 0.6 V, and the diode's charge
        // follows its capacitance.
        let dv = 0.4 * window;
        let (matrix, inside, _) = assembled(&system, 0.6 + dv, Some(&mut cache));
        assert_eq!((cache.evaluated, cache.reused), (2, 2));
        for (column, fresh_column) in matrix.iter().zip(&fresh_matrix) {
            assert!(close(column, fresh_column, 1e-14), "{column:?} vs {fresh_column:?}");
        }
        assert!(close(&inside.rhs, &fresh.rhs, 1e-12), "{:?} vs {:?}", inside.rhs, fresh.rhs);
        let (_, exact, _) = assembled(&system, 0.6 + dv, None);
        let diode_charge = 0;
        let (q0, q, q_exact) =
            (fresh.charges[diode_charge], inside.charges[diode_charge], exact.charges[diode_charge]);
        assert!(q != q0, "the reused charge must follow the voltage");
        // Second-order remainder ½·q''·ΔV² with q'' ≈ q/(n·VT)² (diffusion-dominated).
        assert!((q - q_exact).abs() <= 0.5 * (dv / thermal_voltage(25.0)).powi(2) * q_exact.abs() * 1.5);
        assert!(junctions[0] == 0.6);
        // Outside it the diode is evaluated afresh and the stamp is the exact one.
        let (matrix, outside, _) = assembled(&system, 0.6 + 2.0 * window, Some(&mut cache));
        assert_eq!((cache.evaluated, cache.reused), (3, 3));
        let (exact_matrix, exact, _) = assembled(&system, 0.6 + 2.0 * window, None);
        assert_eq!(matrix, exact_matrix);
        assert_eq!(outside.rhs, exact.rhs);
        Ok(())
    }

    #[test]
    fn bypass_and_the_constant_base_converge_to_the_newton_answer() -> Result<(), String> {
        let system = test_system()?;
        let size = system.size();
        let previous = vec![0.0; system.charge_count];
        let conditions = Conditions {
            time_s: 1e-9,
            source_scale: 1.0,
            extra_gmin_s: 0.0,
            integration: Some(Integration { a: 1e8, b: 0.0 }),
            previous_charges: &previous,
            previous_charge_currents: &previous,
            pulls: &[],
        };
        let tolerances =
            NewtonTolerances { relative: 1e-3, voltage_v: 1e-6, current_a: 1e-12, max_iterations: 100 };
        // A start far from the answer, so that the solve takes several iterations.
        let start = vec![5.0, 0.0, 0.0, 5.0, 0.0];
        let mut plain_solver = SparseSolver::default();
        let mut plain_junctions = system.starting_junctions(&start);
        let plain = system.newton(&mut plain_solver, &start, &mut plain_junctions, &conditions, tolerances);
        let mut reusing_solver = SparseSolver::default();
        let mut reusing_junctions = system.starting_junctions(&start);
        let mut cache = Evaluations::new(tolerances.relative);
        let reuse = Reuse { evaluations: Some(&mut cache), constants: true, buffers: None };
        let reusing = system.newton_with(
            &mut reusing_solver,
            &start,
            &mut reusing_junctions,
            &conditions,
            tolerances,
            reuse,
        );
        let (plain, reusing) = (plain.map_err(|e| format!("{e:?}"))?, reusing.map_err(|e| format!("{e:?}"))?);
        // Each answer is within the Newton tolerance of the solution, so within twice of
        // each other.
        for (index, (x, y)) in plain.unknowns.iter().zip(&reusing.unknowns).enumerate() {
            let absolute =
                if index < system.node_count() { tolerances.voltage_v } else { tolerances.current_a };
            assert!(
                (x - y).abs() <= 2.0 * (tolerances.relative * x.abs().max(y.abs()) + absolute),
                "{index}: {x} vs {y}"
            );
        }
        assert_eq!(plain.unknowns.len(), size);
        // Several iterations, some of them reusing devices (else this would check plain
        // Newton).
        assert!(
            plain.iterations >= 4 && reusing.iterations >= 4,
            "{} {}",
            plain.iterations,
            reusing.iterations
        );
        assert!(cache.reused > 0 && cache.evaluated > 0, "{cache:?}");
        Ok(())
    }
}
