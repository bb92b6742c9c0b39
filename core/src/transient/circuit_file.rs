//! The circuit file: a versioned JSON document holding a transient circuit, its run settings,
//! operating-point hints and the probes to record, read with every bad field reported by path.
//!
//! The `circuit` object has the field names of [`Circuit`] (what `serde` writes for it), so a
//! circuit built in code can be saved with [`CircuitFile::to_json`] and read back unchanged.
//! Numbers are SI; where a field name carries a unit suffix (`_ohm`, `_f`, `_v`, `_a`, `_s`)
//! a string with that unit or an IEC 60062 code is accepted too (`"4k7"`, `"100 pF"`).

use std::collections::BTreeMap;

use serde::Serialize;
use serde_json::Value;

use super::circuit::{default_junction_grading, default_junction_potential_v, Circuit, CircuitError};
use super::circuit::{is_ground, DiodeModel, Element};
use super::export::Probe;
use super::integrator::TransientSettings;
use super::operating_point::OperatingPointHints;
use super::system::System;
use super::waveform::Waveform;
use crate::design_file::{join, parse_json, read_header, ObjectReader, Reader};
use crate::device::ebers_moll::EbersMoll;
use crate::device::{Material, Polarity};
use crate::physics::REFERENCE_TEMPERATURE_C;
use crate::stage::FieldError;

/// Value of the `format` field.
pub const FORMAT_NAME: &str = "flipwright-circuit";
/// The version this build reads and writes.
pub const FORMAT_VERSION: u64 = 1;

/// What a run records besides time. Node names may be internal ones (`Q1.base`).
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct Probes {
    pub node_voltages: Vec<String>,
    /// Names of voltage sources; each records the current through it, from its positive
    /// terminal to its negative one.
    pub source_currents: Vec<String>,
}

/// The parsed circuit file.
#[derive(Debug, Clone, PartialEq)]
pub struct CircuitFile {
    pub format: String,
    pub version: u64,
    pub name: String,
    pub notes: String,
    pub circuit: Circuit,
    pub run: TransientSettings,
    pub operating_point_hints: OperatingPointHints,
    /// `None`: every node named in the circuit, in order of first use, and no currents.
    pub probes: Option<Probes>,
}

/// The document as written, fields in reading order.
#[derive(Serialize)]
struct Document<'a> {
    format: &'a str,
    version: u64,
    name: &'a str,
    notes: &'a str,
    circuit: &'a Circuit,
    run: &'a TransientSettings,
    operating_point_hints: HintsDocument,
    #[serde(skip_serializing_if = "Option::is_none")]
    probes: Option<&'a Probes>,
}

#[derive(Serialize)]
struct HintsDocument {
    node_voltages_v: BTreeMap<String, f64>,
}

const POLARITIES: [(&str, Polarity); 2] = [("npn", Polarity::Npn), ("pnp", Polarity::Pnp)];

#[derive(Debug, Clone, Copy)]
enum Kind {
    Resistor,
    Capacitor,
    VoltageSource,
    CurrentSource,
    Diode,
    Transistor,
}

const KINDS: [(&str, Kind); 6] = [
    ("resistor", Kind::Resistor),
    ("capacitor", Kind::Capacitor),
    ("voltage_source", Kind::VoltageSource),
    ("current_source", Kind::CurrentSource),
    ("diode", Kind::Diode),
    ("transistor", Kind::Transistor),
];

#[derive(Debug, Clone, Copy)]
enum Shape {
    Constant,
    PulseTrain,
    PiecewiseLinear,
}

const SHAPES: [(&str, Shape); 3] = [
    ("constant", Shape::Constant),
    ("pulse_train", Shape::PulseTrain),
    ("piecewise_linear", Shape::PiecewiseLinear),
];

/// A number with a default when the field is absent or null.
fn number_or(reader: &mut Reader, o: &mut ObjectReader<'_>, key: &'static str, default: f64) -> Option<f64> {
    reader.optional_number(o, key).map(|v| v.unwrap_or(default))
}

/// A whole number ≥ 0 with a default; JSON's `1e6` is accepted when it is whole.
fn whole_number_or(
    reader: &mut Reader,
    o: &mut ObjectReader<'_>,
    key: &'static str,
    default: usize,
) -> Option<usize> {
    o.used.push(key);
    let path = join(&o.path, key);
    match o.map.get(key) {
        None | Some(Value::Null) => Some(default),
        Some(Value::Number(n)) => {
            let whole = n.as_u64().or_else(|| {
                n.as_f64()
                    .filter(|v| v.fract() == 0.0 && *v >= 0.0 && *v <= u32::MAX as f64)
                    .map(|v| v as u64)
            });
            match whole.and_then(|v| usize::try_from(v).ok()) {
                Some(v) => Some(v),
                None => {
                    reader.error(path, format!("must be a whole number of at least 0 (default {default})"));
                    None
                }
            }
        }
        Some(_) => {
            reader.error(path, format!("must be a whole number (default {default})"));
            None
        }
    }
}

/// A list of strings (an absent list is empty).
fn names(reader: &mut Reader, o: &mut ObjectReader<'_>, key: &'static str) -> Option<Vec<String>> {
    o.used.push(key);
    let path = join(&o.path, key);
    match o.map.get(key) {
        None | Some(Value::Null) => Some(Vec::new()),
        Some(Value::Array(items)) => {
            let mut found = Some(Vec::new());
            for (index, item) in items.iter().enumerate() {
                match item {
                    Value::String(s) => {
                        if let Some(list) = found.as_mut() {
                            list.push(s.clone());
                        }
                    }
                    _ => {
                        reader.error(format!("{path}[{index}]"), "must be a name (a string)");
                        found = None;
                    }
                }
            }
            found
        }
        Some(_) => {
            reader.error(path, "must be a list of names, such as [\"c1\", \"c2\"]");
            None
        }
    }
}

fn read_waveform(reader: &mut Reader, value: Option<&Value>, path: &str) -> Option<Waveform> {
    let mut o = reader.object(value, path)?;
    let shape = reader.choice(&mut o, "shape", &SHAPES, None)?;
    let waveform = match shape {
        Shape::Constant => {
            let value = reader.number(&mut o, "value");
            Some(Waveform::Constant { value: value? })
        }
        Shape::PulseTrain => {
            let mut n = |reader: &mut Reader, key: &'static str| reader.number(&mut o, key);
            let initial_value = n(reader, "initial_value");
            let pulsed_value = n(reader, "pulsed_value");
            let delay_s = n(reader, "delay_s");
            let rise_time_s = n(reader, "rise_time_s");
            let fall_time_s = n(reader, "fall_time_s");
            let width_s = n(reader, "width_s");
            let period_s = n(reader, "period_s");
            Some(Waveform::PulseTrain {
                initial_value: initial_value?,
                pulsed_value: pulsed_value?,
                delay_s: delay_s?,
                rise_time_s: rise_time_s?,
                fall_time_s: fall_time_s?,
                width_s: width_s?,
                period_s: period_s?,
            })
        }
        Shape::PiecewiseLinear => {
            o.used.push("points");
            let points_path = join(&o.path, "points");
            match o.map.get("points") {
                Some(Value::Array(items)) => {
                    let mut points = Some(Vec::new());
                    for (index, item) in items.iter().enumerate() {
                        let point_path = format!("{points_path}[{index}]");
                        let point = match item.as_array().map(Vec::as_slice) {
                            Some([t, v]) => {
                                let t = reader.number_at(t, &format!("{point_path}[0]"), "time_s");
                                let v = reader.number_at(v, &format!("{point_path}[1]"), "value");
                                t.zip(v)
                            }
                            _ => {
                                reader.error(point_path, "must be a pair [time_s, value]");
                                None
                            }
                        };
                        match (point, points.as_mut()) {
                            (Some(p), Some(list)) => list.push(p),
                            _ => points = None,
                        }
                    }
                    points.map(|points| Waveform::PiecewiseLinear { points })
                }
                None => {
                    reader.error(points_path, "is missing (a list of [time_s, value] pairs)");
                    None
                }
                Some(_) => {
                    reader.error(points_path, "must be a list of [time_s, value] pairs");
                    None
                }
            }
        }
    };
    reader.finish(o);
    waveform
}

fn read_diode_model(reader: &mut Reader, value: Option<&Value>, path: &str) -> Option<DiodeModel> {
    let mut o = reader.object(value, path)?;
    let saturation_current_a = reader.number(&mut o, "saturation_current_a");
    let emission_coefficient = reader.number(&mut o, "emission_coefficient");
    let series_resistance_ohm = number_or(reader, &mut o, "series_resistance_ohm", 0.0);
    let junction_capacitance_f = number_or(reader, &mut o, "junction_capacitance_f", 0.0);
    let junction_potential_v =
        number_or(reader, &mut o, "junction_potential_v", default_junction_potential_v());
    let junction_grading = number_or(reader, &mut o, "junction_grading", default_junction_grading());
    let transit_time_s = number_or(reader, &mut o, "transit_time_s", 0.0);
    reader.finish(o);
    Some(DiodeModel {
        saturation_current_a: saturation_current_a?,
        emission_coefficient: emission_coefficient?,
        series_resistance_ohm: series_resistance_ohm?,
        junction_capacitance_f: junction_capacitance_f?,
        junction_potential_v: junction_potential_v?,
        junction_grading: junction_grading?,
        transit_time_s: transit_time_s?,
    })
}

/// The transistor model. The gains, IS and both transit times must be given (they decide the
/// switching); junction capacitances, resistances and leakage default to zero, potentials and
/// grading to the diode defaults, the temperature to the circuit's.
fn read_transistor_model(
    reader: &mut Reader,
    value: Option<&Value>,
    path: &str,
    circuit_temperature_c: f64,
) -> Option<EbersMoll> {
    let mut o = reader.object(value, path)?;
    let polarity = reader.choice(&mut o, "polarity", &POLARITIES, None);
    let temperature_c = number_or(reader, &mut o, "temperature_c", circuit_temperature_c);
    let saturation_current_a = reader.number(&mut o, "saturation_current_a");
    let beta_forward = reader.number(&mut o, "beta_forward");
    let beta_reverse = reader.number(&mut o, "beta_reverse");
    let forward_transit_s = reader.number(&mut o, "forward_transit_s");
    let reverse_transit_s = reader.number(&mut o, "reverse_transit_s");
    let mut zero = |reader: &mut Reader, key: &'static str| number_or(reader, &mut o, key, 0.0);
    let emitter_junction_capacitance_f = zero(reader, "emitter_junction_capacitance_f");
    let collector_junction_capacitance_f = zero(reader, "collector_junction_capacitance_f");
    let base_resistance_ohm = zero(reader, "base_resistance_ohm");
    let collector_resistance_ohm = zero(reader, "collector_resistance_ohm");
    let leakage_a = zero(reader, "leakage_a");
    let potential = default_junction_potential_v();
    let emitter_junction_potential_v = number_or(reader, &mut o, "emitter_junction_potential_v", potential);
    let collector_junction_potential_v =
        number_or(reader, &mut o, "collector_junction_potential_v", potential);
    let junction_grading = number_or(reader, &mut o, "junction_grading", default_junction_grading());
    // Only the temperature scaling of a model uses the band gap; a transient run does not.
    let band_gap_ev = number_or(reader, &mut o, "band_gap_ev", Material::Silicon.band_gap_ev());
    reader.finish(o);
    Some(EbersMoll {
        polarity: polarity?,
        temperature_c: temperature_c?,
        saturation_current_a: saturation_current_a?,
        beta_forward: beta_forward?,
        beta_reverse: beta_reverse?,
        forward_transit_s: forward_transit_s?,
        reverse_transit_s: reverse_transit_s?,
        emitter_junction_capacitance_f: emitter_junction_capacitance_f?,
        collector_junction_capacitance_f: collector_junction_capacitance_f?,
        emitter_junction_potential_v: emitter_junction_potential_v?,
        collector_junction_potential_v: collector_junction_potential_v?,
        junction_grading: junction_grading?,
        base_resistance_ohm: base_resistance_ohm?,
        collector_resistance_ohm: collector_resistance_ohm?,
        leakage_a: leakage_a?,
        band_gap_ev: band_gap_ev?,
    })
}

fn read_element(reader: &mut Reader, value: &Value, path: &str, temperature_c: f64) -> Option<Element> {
    let mut o = reader.object(Some(value), path)?;
    // Without a known kind the allowed fields are unknown, so nothing more can be said.
    let kind = reader.choice(&mut o, "kind", &KINDS, None)?;
    let name = reader.text(&mut o, "name", None);
    let mut node = |reader: &mut Reader, key: &'static str| reader.text(&mut o, key, None);
    let element = match kind {
        Kind::Resistor | Kind::Capacitor => {
            let positive_node = node(reader, "positive_node");
            let negative_node = node(reader, "negative_node");
            if let Kind::Resistor = kind {
                let resistance_ohm = reader.number(&mut o, "resistance_ohm");
                Some(Element::Resistor {
                    name: name?,
                    positive_node: positive_node?,
                    negative_node: negative_node?,
                    resistance_ohm: resistance_ohm?,
                })
            } else {
                let capacitance_f = reader.number(&mut o, "capacitance_f");
                Some(Element::Capacitor {
                    name: name?,
                    positive_node: positive_node?,
                    negative_node: negative_node?,
                    capacitance_f: capacitance_f?,
                })
            }
        }
        Kind::VoltageSource => {
            let positive_node = node(reader, "positive_node");
            let negative_node = node(reader, "negative_node");
            o.used.push("waveform");
            let waveform = read_waveform(reader, o.map.get("waveform"), &join(path, "waveform"));
            Some(Element::VoltageSource {
                name: name?,
                positive_node: positive_node?,
                negative_node: negative_node?,
                waveform: waveform?,
            })
        }
        Kind::CurrentSource => {
            let from_node = node(reader, "from_node");
            let to_node = node(reader, "to_node");
            o.used.push("waveform");
            let waveform = read_waveform(reader, o.map.get("waveform"), &join(path, "waveform"));
            Some(Element::CurrentSource {
                name: name?,
                from_node: from_node?,
                to_node: to_node?,
                waveform: waveform?,
            })
        }
        Kind::Diode => {
            let anode = node(reader, "anode");
            let cathode = node(reader, "cathode");
            o.used.push("model");
            let model = read_diode_model(reader, o.map.get("model"), &join(path, "model"));
            Some(Element::Diode { name: name?, anode: anode?, cathode: cathode?, model: model? })
        }
        Kind::Transistor => {
            let collector = node(reader, "collector");
            let base = node(reader, "base");
            let emitter = node(reader, "emitter");
            o.used.push("model");
            let model =
                read_transistor_model(reader, o.map.get("model"), &join(path, "model"), temperature_c);
            Some(Element::Transistor {
                name: name?,
                collector: collector?,
                base: base?,
                emitter: emitter?,
                model: model?,
            })
        }
    };
    reader.finish(o);
    element
}

fn read_circuit(reader: &mut Reader, value: Option<&Value>) -> Option<Circuit> {
    let mut o = reader.object(value, "circuit")?;
    let temperature_c = number_or(reader, &mut o, "temperature_c", REFERENCE_TEMPERATURE_C);
    o.used.push("elements");
    let elements = match o.map.get("elements") {
        Some(Value::Array(items)) => {
            // Read every element, so each one's problems are reported, before giving up.
            let read: Vec<Option<Element>> = items
                .iter()
                .enumerate()
                .map(|(index, item)| {
                    let path = format!("circuit.elements[{index}]");
                    read_element(reader, item, &path, temperature_c.unwrap_or(REFERENCE_TEMPERATURE_C))
                })
                .collect();
            read.into_iter().collect::<Option<Vec<Element>>>()
        }
        None => {
            reader.error("circuit.elements".to_string(), "is missing (the list of elements)");
            None
        }
        Some(_) => {
            reader.error("circuit.elements".to_string(), "must be a list of elements [ … ]");
            None
        }
    };
    reader.finish(o);
    Some(Circuit { elements: elements?, temperature_c: temperature_c? })
}

fn read_run(reader: &mut Reader, value: Option<&Value>) -> Option<TransientSettings> {
    let mut o = reader.object(value, "run")?;
    let stop_time_s = reader.number(&mut o, "stop_time_s");
    // Defaults are the engine's own, so they are stated in one place.
    let defaults = TransientSettings::new(stop_time_s.unwrap_or(1.0));
    let max_step_s = reader.optional_number(&mut o, "max_step_s");
    let initial_step_s = reader.optional_number(&mut o, "initial_step_s");
    let min_step_s = reader.optional_number(&mut o, "min_step_s");
    let relative_tolerance = number_or(reader, &mut o, "relative_tolerance", defaults.relative_tolerance);
    let charge_tolerance_c = number_or(reader, &mut o, "charge_tolerance_c", defaults.charge_tolerance_c);
    let voltage_tolerance_v = number_or(reader, &mut o, "voltage_tolerance_v", defaults.voltage_tolerance_v);
    let current_tolerance_a = number_or(reader, &mut o, "current_tolerance_a", defaults.current_tolerance_a);
    let max_newton_iterations =
        whole_number_or(reader, &mut o, "max_newton_iterations", defaults.max_newton_iterations);
    let max_steps = whole_number_or(reader, &mut o, "max_steps", defaults.max_steps);
    reader.finish(o);
    Some(TransientSettings {
        stop_time_s: stop_time_s?,
        max_step_s: max_step_s?,
        initial_step_s: initial_step_s?,
        min_step_s: min_step_s?,
        relative_tolerance: relative_tolerance?,
        charge_tolerance_c: charge_tolerance_c?,
        voltage_tolerance_v: voltage_tolerance_v?,
        current_tolerance_a: current_tolerance_a?,
        max_newton_iterations: max_newton_iterations?,
        max_steps: max_steps?,
    })
}

fn read_hints(reader: &mut Reader, value: Option<&Value>) -> Option<OperatingPointHints> {
    if matches!(value, None | Some(Value::Null)) {
        return Some(OperatingPointHints::default());
    }
    let mut o = reader.object(value, "operating_point_hints")?;
    o.used.push("node_voltages_v");
    let path = join(&o.path, "node_voltages_v");
    let hints = match o.map.get("node_voltages_v") {
        None | Some(Value::Null) => Some(OperatingPointHints::default()),
        Some(Value::Object(map)) => {
            let mut node_voltages_v = Some(Vec::new());
            for (node, value) in map {
                // The key's unit is the map's: volts, so "0.7 V" reads too.
                let voltage = reader.number_at(value, &join(&path, node), "node_voltages_v");
                match (voltage, node_voltages_v.as_mut()) {
                    (Some(v), Some(list)) => list.push((node.clone(), v)),
                    _ => node_voltages_v = None,
                }
            }
            node_voltages_v.map(|node_voltages_v| OperatingPointHints { node_voltages_v })
        }
        Some(_) => {
            reader.error(path, "must be an object of node names and volts, such as {\"c1\": 0.1}");
            None
        }
    };
    reader.finish(o);
    hints
}

fn read_probes(reader: &mut Reader, value: Option<&Value>) -> Option<Option<Probes>> {
    if matches!(value, None | Some(Value::Null)) {
        return Some(None);
    }
    let mut o = reader.object(value, "probes")?;
    let node_voltages = names(reader, &mut o, "node_voltages");
    let source_currents = names(reader, &mut o, "source_currents");
    reader.finish(o);
    let probes = Probes { node_voltages: node_voltages?, source_currents: source_currents? };
    if probes.node_voltages.is_empty() && probes.source_currents.is_empty() {
        reader.error(
            "probes".to_string(),
            "records nothing: list node_voltages or source_currents, or leave probes out to record every node",
        );
        return None;
    }
    Some(Some(probes))
}

/// Turns [`Circuit::validate`]'s problems (named by element) into paths in the file
/// (`circuit.elements[3].resistance_ohm`). The validation reports elements in order, each
/// element's problems together, and a repeated or empty name as that element's first problem;
/// that is enough to tell which of two same-named elements a problem belongs to.
fn circuit_error_paths(circuit: &Circuit, errors: &[CircuitError]) -> Vec<FieldError> {
    let mut found = Vec::new();
    let mut next_index = 0;
    let mut current: Option<(usize, String)> = None;
    for error in errors {
        let whole_circuit =
            error.element == "circuit" && (error.field == "elements" || error.field == "temperature_c");
        if whole_circuit {
            found.push(FieldError {
                path: format!("circuit.{}", error.field),
                message: error.problem.clone(),
            });
            continue;
        }
        let name = if error.element == "(unnamed)" { "" } else { error.element.as_str() };
        let continues = error.field != "name" && current.as_ref().is_some_and(|(_, n)| n == name);
        let index = if continues {
            current.as_ref().map(|(i, _)| *i)
        } else {
            let first_use = circuit.elements.iter().position(|e| e.name() == name);
            let mut candidates = (next_index..circuit.elements.len())
                .filter(|&i| circuit.elements.get(i).map(Element::name) == Some(name));
            if error.field == "name" && !name.is_empty() {
                // A repeated name is never reported at its first use.
                candidates.find(|&i| Some(i) != first_use)
            } else {
                candidates.next()
            }
        };
        let path = match index {
            Some(i) => {
                current = Some((i, name.to_string()));
                next_index = i + 1;
                format!("circuit.elements[{i}].{}", error.field)
            }
            None => format!("circuit.elements (element \"{}\").{}", error.element, error.field),
        };
        found.push(FieldError { path, message: error.problem.clone() });
    }
    found
}

/// Node names in order of first use, without ground: what a run records when the file
/// names no probes.
fn named_nodes(circuit: &Circuit) -> Vec<String> {
    let mut nodes: Vec<String> = Vec::new();
    for element in &circuit.elements {
        for (_, node) in element.terminals() {
            if !is_ground(node) && !nodes.iter().any(|n| n == node) {
                nodes.push(node.to_string());
            }
        }
    }
    nodes
}

impl CircuitFile {
    /// Parses and checks the structure; [`CircuitFile::validate`] checks values and names,
    /// [`CircuitFile::load`] does both.
    pub fn parse(text: &str) -> Result<CircuitFile, Vec<FieldError>> {
        let root = parse_json(text)?;
        let mut reader = Reader { errors: Vec::new() };
        let mut o = reader.object(Some(&root), "").ok_or_else(|| {
            vec![FieldError { path: "(document)".to_string(), message: "must be a JSON object".to_string() }]
        })?;
        let (format, version) =
            read_header(&mut reader, &mut o, FORMAT_NAME, FORMAT_VERSION, "a circuit file")?;
        let name = reader.text(&mut o, "name", Some("untitled circuit"));
        let notes = reader.text(&mut o, "notes", Some(""));
        o.used.push("circuit");
        let circuit = read_circuit(&mut reader, o.map.get("circuit"));
        o.used.push("run");
        let run = read_run(&mut reader, o.map.get("run"));
        o.used.push("operating_point_hints");
        let hints = read_hints(&mut reader, o.map.get("operating_point_hints"));
        o.used.push("probes");
        let probes = read_probes(&mut reader, o.map.get("probes"));
        reader.finish(o);
        if !reader.errors.is_empty() {
            return Err(reader.errors);
        }
        let missing =
            || vec![FieldError { path: "(document)".to_string(), message: "incomplete".to_string() }];
        Ok(CircuitFile {
            format: format.ok_or_else(missing)?,
            version: version.ok_or_else(missing)?,
            name: name.ok_or_else(missing)?,
            notes: notes.ok_or_else(missing)?,
            circuit: circuit.ok_or_else(missing)?,
            run: run.ok_or_else(missing)?,
            operating_point_hints: hints.ok_or_else(missing)?,
            probes: probes.ok_or_else(missing)?,
        })
    }

    /// Every problem of the values: the circuit's, the run settings', and hints or probes
    /// naming nodes or sources the circuit does not have.
    pub fn validate(&self) -> Result<(), Vec<FieldError>> {
        let mut errors = match self.circuit.validate() {
            Ok(()) => Vec::new(),
            Err(problems) => circuit_error_paths(&self.circuit, &problems),
        };
        for (field, problem) in self.run.problems() {
            errors.push(FieldError { path: format!("run.{field}"), message: problem.to_string() });
        }
        // Names are checked against the compiled system, which also knows internal nodes.
        if let Ok(system) = System::compile(&self.circuit) {
            let node_list = system.node_names.join(", ");
            for (node, voltage) in &self.operating_point_hints.node_voltages_v {
                let path = format!("operating_point_hints.node_voltages_v.{node}");
                if system.node(node).is_none() {
                    errors.push(FieldError {
                        path,
                        message: format!("no element uses node \"{node}\" (nodes: {node_list})"),
                    });
                } else if !voltage.is_finite() {
                    errors.push(FieldError { path, message: "must be a finite voltage".to_string() });
                }
            }
            if let Some(probes) = &self.probes {
                for (index, node) in probes.node_voltages.iter().enumerate() {
                    let message = if is_ground(node) {
                        format!("\"{node}\" is the reference node, always 0 V: record another node")
                    } else if system.node(node).is_none() {
                        format!("no node \"{node}\" in the circuit (nodes: {node_list})")
                    } else {
                        continue;
                    };
                    errors.push(FieldError { path: format!("probes.node_voltages[{index}]"), message });
                }
                for (index, source) in probes.source_currents.iter().enumerate() {
                    if !system.source_names.contains(source) {
                        errors.push(FieldError {
                            path: format!("probes.source_currents[{index}]"),
                            message: format!(
                                "\"{source}\" is not a voltage source of the circuit (voltage sources: {})",
                                system.source_names.join(", ")
                            ),
                        });
                    }
                }
            }
        }
        if errors.is_empty() {
            Ok(())
        } else {
            Err(errors)
        }
    }

    /// Parses and validates, listing every problem.
    pub fn load(text: &str) -> Result<CircuitFile, Vec<FieldError>> {
        let file = CircuitFile::parse(text)?;
        file.validate()?;
        Ok(file)
    }

    /// The probes a run records: the file's, or every named node.
    pub fn recorded_probes(&self) -> Vec<Probe> {
        match &self.probes {
            Some(probes) => probes
                .node_voltages
                .iter()
                .map(|n| Probe::NodeVoltage(n.clone()))
                .chain(probes.source_currents.iter().map(|s| Probe::SourceCurrent(s.clone())))
                .collect(),
            None => named_nodes(&self.circuit).into_iter().map(Probe::NodeVoltage).collect(),
        }
    }

    /// Pretty JSON of the file, readable by [`CircuitFile::parse`].
    pub fn to_json(&self) -> String {
        let document = Document {
            format: &self.format,
            version: self.version,
            name: &self.name,
            notes: &self.notes,
            circuit: &self.circuit,
            run: &self.run,
            operating_point_hints: HintsDocument {
                node_voltages_v: self.operating_point_hints.node_voltages_v.iter().cloned().collect(),
            },
            probes: self.probes.as_ref(),
        };
        serde_json::to_string_pretty(&document).unwrap_or_default() + "\n"
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const RC: &str = r#"{
        "format": "flipwright-circuit", "version": 1, "name": "RC",
        "circuit": {"elements": [
            {"kind": "voltage_source", "name": "V1", "positive_node": "in", "negative_node": "0",
             "waveform": {"shape": "pulse_train", "initial_value": 0, "pulsed_value": 5, "delay_s": "1 us",
                          "rise_time_s": "10n", "fall_time_s": 1e-8, "width_s": 5e-6, "period_s": 1e-5}},
            {"kind": "resistor", "name": "R1", "positive_node": "in", "negative_node": "out", "resistance_ohm": "1k"},
            {"kind": "capacitor", "name": "C1", "positive_node": "out", "negative_node": "0", "capacitance_f": "1n"}
        ]},
        "run": {"stop_time_s": 2e-5},
        "operating_point_hints": {"node_voltages_v": {"out": 0}},
        "probes": {"node_voltages": ["out"], "source_currents": ["V1"]}
    }"#;

    fn paths(text: &str) -> Vec<String> {
        match CircuitFile::load(text) {
            Ok(_) => Vec::new(),
            Err(errors) => errors.into_iter().map(|e| e.path).collect(),
        }
    }

    #[test]
    fn reads_units_and_defaults_and_round_trips() {
        let file = CircuitFile::load(RC);
        assert!(file.is_ok(), "{file:?}");
        let Ok(file) = file else { return };
        assert_eq!(file.circuit.temperature_c, 25.0);
        assert!(
            matches!(file.circuit.elements.get(1), Some(Element::Resistor { resistance_ohm, .. }) if *resistance_ohm == 1e3)
        );
        assert_eq!(file.run, TransientSettings::new(2e-5));
        assert_eq!(
            file.recorded_probes(),
            vec![Probe::NodeVoltage("out".into()), Probe::SourceCurrent("V1".into())]
        );
        let again = CircuitFile::load(&file.to_json());
        assert_eq!(again.as_ref().ok(), Some(&file), "{again:?}\n{}", file.to_json());
    }

    #[test]
    fn every_bad_field_is_named_by_path() {
        let mut doc: Value = serde_json::from_str(RC).unwrap_or(Value::Null);
        doc["circuit"]["elements"][1]["resistance_ohm"] = Value::String("abc".into());
        doc["circuit"]["elements"][2]["colour"] = Value::String("blue".into());
        doc["circuit"]["elements"][0]["waveform"].as_object_mut().map(|w| w.remove("period_s"));
        doc["run"]["max_steps"] = serde_json::json!(2.5);
        doc["probes"]["node_voltages"] = serde_json::json!(["out", 3]);
        doc["extra"] = serde_json::json!(true);
        assert_eq!(
            paths(&doc.to_string()),
            vec![
                "circuit.elements[0].waveform.period_s",
                "circuit.elements[1].resistance_ohm",
                "circuit.elements[2].colour",
                "run.max_steps",
                "probes.node_voltages[1]",
                "extra",
            ]
        );
    }

    #[test]
    fn values_and_names_are_checked_after_the_structure() {
        let mut doc: Value = serde_json::from_str(RC).unwrap_or(Value::Null);
        doc["circuit"]["elements"][2]["capacitance_f"] = serde_json::json!(-1.0);
        doc["run"]["relative_tolerance"] = serde_json::json!(2.0);
        assert_eq!(
            paths(&doc.to_string()),
            vec!["circuit.elements[2].capacitance_f", "run.relative_tolerance"]
        );
        let mut doc: Value = serde_json::from_str(RC).unwrap_or(Value::Null);
        doc["operating_point_hints"]["node_voltages_v"]["nowhere"] = serde_json::json!(1.0);
        doc["probes"] = serde_json::json!({"node_voltages": ["0", "out", "c9"], "source_currents": ["R1"]});
        assert_eq!(
            paths(&doc.to_string()),
            vec![
                "operating_point_hints.node_voltages_v.nowhere",
                "probes.node_voltages[0]",
                "probes.node_voltages[2]",
                "probes.source_currents[0]",
            ]
        );
    }

    #[test]
    fn problems_of_same_named_elements_land_on_the_right_index() {
        // Element 3 repeats element 1's name and has its own bad value; element 1 is fine.
        let mut doc: Value = serde_json::from_str(RC).unwrap_or(Value::Null);
        let mut copy = doc["circuit"]["elements"][1].clone();
        copy["resistance_ohm"] = serde_json::json!(0.0);
        if let Some(list) = doc["circuit"]["elements"].as_array_mut() {
            list.push(copy);
            list.push(serde_json::json!({"kind": "resistor", "name": "", "positive_node": "out",
                                          "negative_node": "", "resistance_ohm": 1.0}));
        }
        assert_eq!(
            paths(&doc.to_string()),
            vec![
                "circuit.elements[3].name",
                "circuit.elements[3].resistance_ohm",
                "circuit.elements[4].name",
                "circuit.elements[4].negative_node",
            ]
        );
    }

    #[test]
    fn other_formats_and_newer_versions_are_refused_alone() {
        let newer = RC.replace("\"version\": 1", "\"version\": 2");
        assert_eq!(paths(&newer), vec!["version"]);
        let design = RC.replace("flipwright-circuit", "flipwright-design");
        assert_eq!(paths(&design), vec!["format"]);
        assert_eq!(paths("{\"format\": "), vec!["(line 1, column 11)"]);
    }

    #[test]
    fn without_probes_every_named_node_is_recorded() {
        let mut doc: Value = serde_json::from_str(RC).unwrap_or(Value::Null);
        doc.as_object_mut().map(|o| o.remove("probes"));
        let file = CircuitFile::load(&doc.to_string());
        assert!(file.is_ok(), "{file:?}");
        let Ok(file) = file else { return };
        assert_eq!(
            file.recorded_probes(),
            vec![Probe::NodeVoltage("in".into()), Probe::NodeVoltage("out".into())]
        );
        doc["probes"] = serde_json::json!({});
        assert_eq!(paths(&doc.to_string()), vec!["probes"]);
    }
}
