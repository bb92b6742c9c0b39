//! From a validated stage design to a transient circuit: one stage driven by an input pulse
//! train, or a ripple chain of identical stages, each triggered by the previous stage's
//! output. Everything is built in the NPN frame (see the crate's invariants); a PNP design is
//! simulated as its mirror and front ends multiply by the polarity sign.

use serde::{Deserialize, Serialize};

use crate::chain::reset_driver::DriverValues;
use crate::device::ebers_moll::EbersMoll;
use crate::device::Polarity;
use crate::stage::{BiasScheme, Load, StageDesign, Steering};
use crate::transient::{Circuit, DiodeModel, Element, OperatingPointHints, Waveform};

/// Most stages a simulated chain may have (a divide-by-65536 chain; longer runs are not
/// useful in a browser tab).
pub const MAX_CHAIN_STAGES: usize = 16;

/// The input pulse train, NPN frame: it rests at 0 V and steps *down* by `amplitude_v` (the
/// active edge of a negative-edge toggle input), holds for `duty` of the period, and returns.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct InputPulse {
    pub amplitude_v: f64,
    pub rate_hz: f64,
    /// Fall and rise time of each edge, s (capped at a tenth of the period).
    pub edge_s: f64,
    /// Fraction of the period at the stepped-down level (0.5 is a square wave, as a driving
    /// stage gives).
    pub duty: f64,
}

impl InputPulse {
    pub fn period_s(&self) -> f64 {
        1.0 / self.rate_hz
    }
    /// The edge time actually used.
    pub fn effective_edge_s(&self) -> f64 {
        self.edge_s.min(0.1 * self.period_s())
    }
    /// Time of the first active (falling) edge; the circuit settles for one period first.
    pub fn first_edge_s(&self) -> f64 {
        self.period_s()
    }
    /// Time at which the `k`-th active edge (0-based) starts.
    pub fn edge_time_s(&self, k: usize) -> f64 {
        self.first_edge_s() + k as f64 * self.period_s()
    }
    fn check(&self) -> Result<(), BuildError> {
        let bad = |field: &str, message: &str| {
            Err(BuildError::InvalidPulse { field: field.to_string(), message: message.to_string() })
        };
        if !(self.amplitude_v > 0.0 && self.amplitude_v <= 1000.0) {
            return bad("amplitude_v", "must be a positive amplitude up to 1000 V");
        }
        if !(self.rate_hz > 0.0 && self.rate_hz <= 1e10) {
            return bad("rate_hz", "must be a positive rate up to 10 GHz");
        }
        if !(self.edge_s > 0.0 && self.edge_s.is_finite()) {
            return bad("edge_s", "must be a positive edge time");
        }
        if !(self.duty > 0.05 && self.duty < 0.95) {
            return bad("duty", "must be a fraction between 0.05 and 0.95");
        }
        Ok(())
    }
    fn waveform(&self) -> Waveform {
        let period = self.period_s();
        let edge = self.effective_edge_s();
        Waveform::PulseTrain {
            initial_value: 0.0,
            pulsed_value: -self.amplitude_v,
            delay_s: self.first_edge_s(),
            rise_time_s: edge,
            fall_time_s: edge,
            width_s: (self.duty * period - edge).max(edge),
            period_s: period,
        }
    }
}

/// Where in the tolerance space a simulation runs. Nominal is 25 °C, every factor 1, hFE
/// typical.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct SimulationCorner {
    pub temperature_c: f64,
    /// Multiplies both supply rails.
    pub supply_factor: f64,
    /// Multiplies every resistor of the stage.
    pub resistor_factor: f64,
    /// Multiplies every capacitor of the stage.
    pub capacitor_factor: f64,
    /// hFE position: −1 minimum, 0 typical, +1 maximum (datasheet spread).
    pub hfe_spread: f64,
}

impl SimulationCorner {
    pub fn nominal() -> SimulationCorner {
        SimulationCorner {
            temperature_c: crate::physics::REFERENCE_TEMPERATURE_C,
            supply_factor: 1.0,
            resistor_factor: 1.0,
            capacitor_factor: 1.0,
            hfe_spread: 0.0,
        }
    }
    fn check(&self) -> Result<(), BuildError> {
        let bad = |field: &str, message: &str| {
            Err(BuildError::InvalidCorner { field: field.to_string(), message: message.to_string() })
        };
        if !(self.temperature_c >= -70.0 && self.temperature_c <= 150.0) {
            return bad("temperature_c", "must be between −70 and 150 °C");
        }
        for (field, value) in [
            ("supply_factor", self.supply_factor),
            ("resistor_factor", self.resistor_factor),
            ("capacitor_factor", self.capacitor_factor),
        ] {
            if !(0.5..=1.5).contains(&value) {
                return bad(field, "must be a factor between 0.5 and 1.5");
            }
        }
        if !(self.hfe_spread >= -1.0 && self.hfe_spread <= 1.0) {
            return bad("hfe_spread", "must be between −1 (minimum hFE) and +1 (maximum)");
        }
        Ok(())
    }
}

impl Default for SimulationCorner {
    fn default() -> Self {
        SimulationCorner::nominal()
    }
}

/// Why no circuit could be built.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum BuildError {
    /// Occurs when the stage has no trigger network to toggle it.
    NoTriggerNetwork,
    /// Occurs when the datasheet gives no usable Ebers–Moll model.
    ModelDerivation,
    InvalidPulse {
        field: String,
        message: String,
    },
    InvalidCorner {
        field: String,
        message: String,
    },
    /// Occurs when a chain asks for no stages or more than [`MAX_CHAIN_STAGES`].
    StageCount {
        requested: usize,
    },
}

impl std::fmt::Display for BuildError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            BuildError::NoTriggerNetwork => write!(
                f,
                "the stage has no trigger network (values.trigger): add one, or let synthesis choose it"
            ),
            BuildError::ModelDerivation => write!(
                f,
                "no Ebers–Moll model follows from the transistor datasheet: check its saturation and storage data"
            ),
            BuildError::InvalidPulse { field, message } => write!(f, "input pulse {field} {message}"),
            BuildError::InvalidCorner { field, message } => write!(f, "simulation corner {field} {message}"),
            BuildError::StageCount { requested } => {
                write!(f, "a simulated chain needs 1 to {MAX_CHAIN_STAGES} stages, not {requested}")
            }
        }
    }
}

impl std::error::Error for BuildError {}

/// Node names of one simulated stage.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StageNodes {
    /// Collectors of Q1 and Q2. The stage's output Q (its count bit) is Q2's collector: high
    /// means Q2 is OFF, the bit is 1 (the chain planner's convention, `crate::chain`).
    pub collectors: [String; 2],
    pub bases: [String; 2],
    /// Node the stage's trigger network is driven from.
    pub input: String,
}

impl StageNodes {
    /// The stage's output Q (Q2's collector): high is bit 1.
    pub fn output(&self) -> &str {
        &self.collectors[1]
    }
}

/// A circuit ready to simulate, with the names a measurement needs.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BuiltCircuit {
    pub circuit: Circuit,
    /// Every stage starts with Q2 ON (Q low, bit 0).
    pub hints: OperatingPointHints,
    pub stages: Vec<StageNodes>,
    /// The input pulse source's name and node.
    pub source: String,
    pub input_node: String,
    pub pulse: InputPulse,
    /// Collector supply at this corner, V (for thresholds).
    pub collector_supply_v: f64,
    /// The reset network's nodes, in a reset-on-count chain.
    pub reset: Option<ResetNodes>,
    /// Plain sentences stating what the circuit assumes beyond the design.
    pub assumptions: Vec<String>,
}

/// The transistor model at a corner (NPN frame).
pub fn transistor_model(design: &StageDesign, corner: &SimulationCorner) -> Result<EbersMoll, BuildError> {
    let sheet = design.transistor();
    let derivation = EbersMoll::from_datasheet(sheet).ok_or(BuildError::ModelDerivation)?;
    let mut model = derivation.model;
    model.polarity = Polarity::Npn;
    // βF follows the datasheet spread at 25 °C; at_temperature applies the tempco.
    model.beta_forward = sheet.hfe_at(crate::physics::REFERENCE_TEMPERATURE_C, corner.hfe_spread);
    Ok(model.at_temperature(corner.temperature_c, sheet.hfe_tempco_per_c, sheet.icbo_doubling_c))
}

/// The steering diode's model at a temperature: the datasheet's exponential law, its
/// capacitance at zero bias, and a transit time from the recovery time, τ = trr/ln 2 (the
/// charge-control result for recovery with equal forward and reverse current, IF = IR, the
/// usual datasheet test condition).
pub fn diode_model(design: &StageDesign, temperature_c: f64) -> DiodeModel {
    let sheet = design.diode();
    DiodeModel {
        saturation_current_a: sheet.saturation_current_a(temperature_c),
        emission_coefficient: sheet.emission_coefficient,
        series_resistance_ohm: 0.0,
        junction_capacitance_f: sheet.capacitance_f,
        junction_potential_v: match sheet.material {
            crate::device::Material::Silicon => 0.7,
            crate::device::Material::Germanium => 0.3,
        },
        junction_grading: 0.5,
        transit_time_s: sheet.reverse_recovery_s / std::f64::consts::LN_2,
    }
}

struct Builder {
    elements: Vec<Element>,
}

impl Builder {
    fn resistor(&mut self, name: String, a: &str, b: &str, resistance_ohm: f64) {
        self.elements.push(Element::Resistor {
            name,
            positive_node: a.to_string(),
            negative_node: b.to_string(),
            resistance_ohm,
        });
    }
    fn capacitor(&mut self, name: String, a: &str, b: &str, capacitance_f: f64) {
        if capacitance_f > 0.0 {
            self.elements.push(Element::Capacitor {
                name,
                positive_node: a.to_string(),
                negative_node: b.to_string(),
                capacitance_f,
            });
        }
    }
    fn diode(&mut self, name: String, anode: &str, cathode: &str, model: DiodeModel) {
        self.elements.push(Element::Diode {
            name,
            anode: anode.to_string(),
            cathode: cathode.to_string(),
            model,
        });
    }
}

/// Rails and devices shared by every stage of one circuit.
struct Shared {
    transistor: EbersMoll,
    diode: DiodeModel,
    collector_supply_v: f64,
    corner: SimulationCorner,
}

/// Adds one stage; names are prefixed with `prefix` ("" for a single stage, "s1." …).
fn add_stage(
    builder: &mut Builder,
    hints: &mut Vec<(String, f64)>,
    design: &StageDesign,
    shared: &Shared,
    prefix: &str,
    input: &str,
) -> StageNodes {
    let values = design.values();
    let r = shared.corner.resistor_factor;
    let c = shared.corner.capacitor_factor;
    let name = |base: &str| format!("{prefix}{base}");
    let collectors = [name("c1"), name("c2")];
    let bases = [name("b1"), name("b2")];
    let emitter = match values.bias {
        BiasScheme::Fixed => "0".to_string(),
        BiasScheme::SelfBias => name("e"),
    };
    let base_return = match values.bias {
        BiasScheme::Fixed => "vbb".to_string(),
        BiasScheme::SelfBias => "0".to_string(),
    };
    for side in 0..2 {
        let other = 1 - side;
        let n = side + 1;
        builder.resistor(
            name(&format!("RC{n}")),
            "vcc",
            &collectors[side],
            values.collector_resistor_ohm * r,
        );
        builder.resistor(
            name(&format!("R1{n}")),
            &collectors[side],
            &bases[other],
            values.cross_resistor_ohm * r,
        );
        builder.capacitor(
            name(&format!("C1{n}")),
            &collectors[side],
            &bases[other],
            values.commutating_capacitor_f * c,
        );
        builder.resistor(name(&format!("R2{n}")), &bases[side], &base_return, values.base_resistor_ohm * r);
        builder.elements.push(Element::Transistor {
            name: name(&format!("Q{n}")),
            collector: collectors[side].clone(),
            base: bases[side].clone(),
            emitter: emitter.clone(),
            model: shared.transistor,
        });
        match design.input().loads.get(side).copied().unwrap_or(Load::None) {
            Load::None => {}
            Load::Resistance { resistance_ohm, return_v } => {
                let node = if return_v == 0.0 {
                    "0".to_string()
                } else {
                    let rail = name(&format!("vl{n}"));
                    builder.elements.push(Element::VoltageSource {
                        name: name(&format!("VL{n}")),
                        positive_node: rail.clone(),
                        negative_node: "0".to_string(),
                        waveform: Waveform::Constant { value: return_v },
                    });
                    rail
                };
                builder.resistor(name(&format!("RL{n}")), &collectors[side], &node, resistance_ohm);
            }
            Load::Current { current_a } => builder.elements.push(Element::CurrentSource {
                name: name(&format!("IL{n}")),
                from_node: collectors[side].clone(),
                to_node: "0".to_string(),
                waveform: Waveform::Constant { value: current_a },
            }),
        }
    }
    if values.bias == BiasScheme::SelfBias {
        builder.resistor(name("RE"), &emitter, "0", values.emitter_resistor_ohm * r);
        builder.capacitor(name("CE"), &emitter, "0", values.emitter_bypass_capacitor_f * c);
    }
    if let Some(trigger) = values.trigger {
        match trigger.steering {
            Steering::Base => {
                for side in 0..2 {
                    let n = side + 1;
                    let steering = name(&format!("t{n}"));
                    builder.capacitor(
                        name(&format!("CT{n}")),
                        input,
                        &steering,
                        trigger.trigger_capacitor_f * c,
                    );
                    builder.resistor(
                        name(&format!("RT{n}")),
                        &steering,
                        &collectors[side],
                        trigger.trigger_resistor_ohm * r,
                    );
                    builder.diode(name(&format!("D{n}")), &bases[side], &steering, shared.diode);
                }
            }
            Steering::Collector => {
                let steering = name("t");
                builder.capacitor(name("CT"), input, &steering, trigger.trigger_capacitor_f * c);
                builder.resistor(name("RT"), &steering, "vcc", trigger.trigger_resistor_ohm * r);
                for (side, collector) in collectors.iter().enumerate() {
                    builder.diode(name(&format!("D{}", side + 1)), collector, &steering, shared.diode);
                }
            }
        }
    }
    // Q2 ON (bit 0): its collector near ground, its base one junction up; Q1's collector
    // high, its base held below its emitter.
    let vcc = shared.collector_supply_v;
    let emitter_v = match values.bias {
        BiasScheme::Fixed => 0.0,
        BiasScheme::SelfBias => {
            let re = values.emitter_resistor_ohm;
            vcc * re / (re + values.collector_resistor_ohm)
        }
    };
    hints.push((collectors[1].clone(), emitter_v + 0.1));
    hints.push((collectors[0].clone(), 0.9 * vcc));
    hints.push((bases[1].clone(), emitter_v + 0.7));
    hints.push((bases[0].clone(), emitter_v - 0.3));
    if values.bias == BiasScheme::SelfBias {
        hints.push((emitter, emitter_v));
    }
    StageNodes { collectors, bases, input: input.to_string() }
}

/// Builds `stages` identical stages in a ripple chain (stages = 1: the stage alone), the
/// first driven by `pulse`, each later one from the previous stage's output Q (Q2's
/// collector: its falling edge, bit 1 → 0, is the carry). The design's loads are put on every stage.
pub fn chain_circuit(
    design: &StageDesign,
    stages: usize,
    pulse: &InputPulse,
    corner: &SimulationCorner,
) -> Result<BuiltCircuit, BuildError> {
    chain_circuit_with_feedback(design, stages, &[], pulse, corner)
}

/// A ripple chain with the skip-feedback connection of `crate::chain` (method "feedback that
/// skips states"): the last stage's complement output (Q1's collector, falling as Q goes
/// 0 → 1) drives, through one capacitor (the stage's Ct value) per receiving stage, a diode
/// to that stage's Q2 base, returned to ground by a resistor (the stage's Rt value), so the
/// edge pulls the base down and turns Q2 off (sets Q = 1) whatever state the stage is in or
/// passing through. Returning the resistor to the stage's own collector, as a toggle input
/// does, fails here: the receiving stages have just been cleared by the same ripple, and the
/// diode's bias has not yet followed their collectors down (seen in simulation).
/// `receiving` lists stage indices (0 = first) as the plan gives them.
pub fn chain_circuit_with_feedback(
    design: &StageDesign,
    stages: usize,
    receiving: &[u32],
    pulse: &InputPulse,
    corner: &SimulationCorner,
) -> Result<BuiltCircuit, BuildError> {
    build_chain(design, stages, pulse, corner, |builder, _, nodes, shared| {
        let (Some(trigger), Some(last)) = (design.values().trigger, nodes.last()) else {
            return Ok(None);
        };
        let source = last.collectors[0].clone();
        let c = shared.corner.capacitor_factor;
        let r = shared.corner.resistor_factor;
        for &stage in receiving {
            let Some(target) = nodes.get(stage as usize) else {
                return Err(BuildError::StageCount { requested: stage as usize + 1 });
            };
            let base = target.bases[1].clone();
            let steering = format!("f{}", stage + 1);
            builder.capacitor(
                format!("CF{}", stage + 1),
                &source,
                &steering,
                trigger.trigger_capacitor_f * c,
            );
            builder.resistor(format!("RF{}", stage + 1), &steering, "0", trigger.trigger_resistor_ohm * r);
            builder.diode(format!("DF{}", stage + 1), &base, &steering, shared.diode);
        }
        Ok(None)
    })
}

/// Node names of the driven reset network in a built chain.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ResetNodes {
    /// The decoding gate G, the hold node H, the driver's base B and the reset bus X.
    pub gate: String,
    pub hold: String,
    pub driver_base: String,
    pub bus: String,
}

/// A ripple chain with the driven reset of `crate::chain::reset_driver` (method "reset on
/// reaching N"): decoding diodes from the gate node to the Q (Q2's collector) of every stage in
/// `decoded`, the gate's pull-up to the supply, the hold diode and capacitor, the driver's base
/// divider to the base return, the driver (the stages' transistor model, collector on the
/// supply, emitter on the reset bus) with its emitter resistor, and one series resistor and
/// reset diode from the bus into every stage's Q2 base. The corner's resistor and capacitor
/// factors apply to the reset parts too.
pub fn chain_circuit_with_reset(
    design: &StageDesign,
    stages: usize,
    decoded: &[u32],
    values: &DriverValues,
    pulse: &InputPulse,
    corner: &SimulationCorner,
) -> Result<BuiltCircuit, BuildError> {
    if decoded.is_empty() {
        return Err(BuildError::StageCount { requested: 0 });
    }
    build_chain(design, stages, pulse, corner, |builder, hints, nodes, shared| {
        let r = shared.corner.resistor_factor;
        let c = shared.corner.capacitor_factor;
        let ret = match design.values().bias {
            BiasScheme::Fixed => "vbb",
            BiasScheme::SelfBias => "0",
        };
        let (gate, hold, base, bus) = ("rg", "rh", "rb", "rx");
        for &stage in decoded {
            let Some(target) = nodes.get(stage as usize) else {
                return Err(BuildError::StageCount { requested: stage as usize + 1 });
            };
            builder.diode(format!("DG{}", stage + 1), gate, target.output(), shared.diode);
        }
        builder.resistor("RP".to_string(), "vcc", gate, values.pull_up_ohm * r);
        builder.diode("DH".to_string(), gate, hold, shared.diode);
        builder.capacitor("CH".to_string(), hold, "0", values.hold_capacitor_f * c);
        builder.resistor("RR".to_string(), hold, base, values.divider_upper_ohm * r);
        builder.resistor("RX".to_string(), base, ret, values.divider_lower_ohm * r);
        builder.elements.push(Element::Transistor {
            name: "QR".to_string(),
            collector: "vcc".to_string(),
            base: base.to_string(),
            emitter: bus.to_string(),
            model: shared.transistor,
        });
        builder.resistor("RE".to_string(), bus, ret, values.emitter_resistor_ohm * r);
        for (index, target) in nodes.iter().enumerate() {
            let n = index + 1;
            let series = format!("rs{n}");
            builder.resistor(format!("RS{n}"), bus, &series, values.series_resistor_ohm * r);
            builder.diode(format!("DR{n}"), &series, &target.bases[1], shared.diode);
        }
        // At rest a decoded Q is low: the gate a diode above it, the hold node near it.
        let low = hints.iter().find(|(node, _)| nodes.first().is_some_and(|f| *node == f.collectors[1]));
        let low_v = low.map_or(0.1, |(_, v)| *v);
        hints.push((gate.to_string(), low_v + 0.6));
        hints.push((hold.to_string(), low_v));
        Ok(Some(ResetNodes {
            gate: gate.to_string(),
            hold: hold.to_string(),
            driver_base: base.to_string(),
            bus: bus.to_string(),
        }))
    })
}

/// The one chain construction every chain builder shares: supplies, input, `stages` stages
/// each triggered by the previous Q, then the method's extra parts (`extras` gets the builder,
/// the hints, the stages' nodes and the shared devices, and returns the reset network's nodes
/// if it added one).
fn build_chain(
    design: &StageDesign,
    stages: usize,
    pulse: &InputPulse,
    corner: &SimulationCorner,
    extras: impl FnOnce(
        &mut Builder,
        &mut Vec<(String, f64)>,
        &[StageNodes],
        &Shared,
    ) -> Result<Option<ResetNodes>, BuildError>,
) -> Result<BuiltCircuit, BuildError> {
    if stages == 0 || stages > MAX_CHAIN_STAGES {
        return Err(BuildError::StageCount { requested: stages });
    }
    if design.values().trigger.is_none() {
        return Err(BuildError::NoTriggerNetwork);
    }
    pulse.check()?;
    corner.check()?;
    let supplies = &design.input().supplies;
    let shared = Shared {
        transistor: transistor_model(design, corner)?,
        diode: diode_model(design, corner.temperature_c),
        collector_supply_v: supplies.collector_supply_v * corner.supply_factor,
        corner: *corner,
    };
    let mut builder = Builder { elements: Vec::new() };
    builder.elements.push(Element::VoltageSource {
        name: "VCC".to_string(),
        positive_node: "vcc".to_string(),
        negative_node: "0".to_string(),
        waveform: Waveform::Constant { value: shared.collector_supply_v },
    });
    if design.values().bias == BiasScheme::Fixed {
        builder.elements.push(Element::VoltageSource {
            name: "VBB".to_string(),
            positive_node: "0".to_string(),
            negative_node: "vbb".to_string(),
            waveform: Waveform::Constant { value: supplies.bias_supply_v * corner.supply_factor },
        });
    }
    builder.elements.push(Element::VoltageSource {
        name: "VIN".to_string(),
        positive_node: "in".to_string(),
        negative_node: "0".to_string(),
        waveform: pulse.waveform(),
    });
    let mut hints = Vec::new();
    let mut nodes: Vec<StageNodes> = Vec::new();
    for index in 0..stages {
        let prefix = if stages == 1 { String::new() } else { format!("s{}.", index + 1) };
        let input = nodes.last().map(|n| n.output().to_string()).unwrap_or_else(|| "in".to_string());
        let stage = add_stage(&mut builder, &mut hints, design, &shared, &prefix, &input);
        nodes.push(stage);
    }
    let reset = extras(&mut builder, &mut hints, &nodes, &shared)?;
    let mut assumptions = vec![
        "transistor: Ebers–Moll model derived from the datasheet (see the analysis report), NPN frame".to_string(),
        format!(
            "steering diode: datasheet law, zero-bias capacitance as its junction capacitance, transit time trr/ln 2 = {}",
            crate::units::format_quantity(shared.diode.transit_time_s, crate::units::Unit::Second)
        ),
        "the design's loads are on every stage; each later stage's trigger network loads the output that drives it"
            .to_string(),
        "ideal supplies: no source resistance or supply ringing".to_string(),
    ];
    if reset.is_some() {
        assumptions.push(
            "reset network: its diodes are the steering diode, its driver the stages' transistor, at the same corner"
                .to_string(),
        );
    }
    Ok(BuiltCircuit {
        circuit: Circuit { elements: builder.elements, temperature_c: corner.temperature_c },
        hints: OperatingPointHints { node_voltages_v: hints },
        stages: nodes,
        source: "VIN".to_string(),
        input_node: "in".to_string(),
        pulse: *pulse,
        collector_supply_v: shared.collector_supply_v,
        reset,
        assumptions,
    })
}

/// One stage driven by `pulse`.
pub fn stage_circuit(
    design: &StageDesign,
    pulse: &InputPulse,
    corner: &SimulationCorner,
) -> Result<BuiltCircuit, BuildError> {
    chain_circuit(design, 1, pulse, corner)
}
