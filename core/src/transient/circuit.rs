//! The circuit description a transient run takes: named nodes, elements in SI units, and
//! its validation into typed, per-field errors.

use serde::{Deserialize, Serialize};

use super::waveform::Waveform;
use crate::device::ebers_moll::EbersMoll;

/// Node names that mean the reference node.
pub const GROUND_NAMES: [&str; 2] = ["0", "ground"];

/// True when `name` is the reference node.
pub fn is_ground(name: &str) -> bool {
    GROUND_NAMES.contains(&name)
}

/// Exponential-law junction diode with series resistance and charge storage.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct DiodeModel {
    pub saturation_current_a: f64,
    /// n in I = IS·(e^(V/(n·VT)) − 1).
    pub emission_coefficient: f64,
    #[serde(default)]
    pub series_resistance_ohm: f64,
    /// Zero-bias depletion capacitance Cj0 of Cj0/(1 − V/φ)^m.
    #[serde(default)]
    pub junction_capacitance_f: f64,
    #[serde(default = "default_junction_potential_v")]
    pub junction_potential_v: f64,
    #[serde(default = "default_junction_grading")]
    pub junction_grading: f64,
    /// Diffusion charge τ·I.
    #[serde(default)]
    pub transit_time_s: f64,
}

pub(crate) fn default_junction_potential_v() -> f64 {
    0.75
}
pub(crate) fn default_junction_grading() -> f64 {
    0.33
}
fn default_temperature_c() -> f64 {
    crate::physics::REFERENCE_TEMPERATURE_C
}

/// One element. Currents of sources are reported flowing *through the source* from its
/// first terminal to its second.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Element {
    Resistor {
        name: String,
        positive_node: String,
        negative_node: String,
        resistance_ohm: f64,
    },
    Capacitor {
        name: String,
        positive_node: String,
        negative_node: String,
        capacitance_f: f64,
    },
    /// V(positive_node) − V(negative_node) = waveform (volts).
    VoltageSource {
        name: String,
        positive_node: String,
        negative_node: String,
        waveform: Waveform,
    },
    /// A current (amperes) leaving `from_node`, passing through the source and entering
    /// `to_node`.
    CurrentSource {
        name: String,
        from_node: String,
        to_node: String,
        waveform: Waveform,
    },
    Diode {
        name: String,
        anode: String,
        cathode: String,
        model: DiodeModel,
    },
    /// Ebers–Moll transistor; `model.polarity` selects NPN or PNP, its `temperature_c` sets
    /// the thermal voltage, its base and collector resistances add internal nodes.
    Transistor {
        name: String,
        collector: String,
        base: String,
        emitter: String,
        model: EbersMoll,
    },
}

impl Element {
    pub fn name(&self) -> &str {
        match self {
            Element::Resistor { name, .. }
            | Element::Capacitor { name, .. }
            | Element::VoltageSource { name, .. }
            | Element::CurrentSource { name, .. }
            | Element::Diode { name, .. }
            | Element::Transistor { name, .. } => name,
        }
    }

    /// (field, node name) of every terminal.
    pub fn terminals(&self) -> Vec<(&'static str, &str)> {
        match self {
            Element::Resistor { positive_node, negative_node, .. }
            | Element::Capacitor { positive_node, negative_node, .. }
            | Element::VoltageSource { positive_node, negative_node, .. } => {
                vec![("positive_node", positive_node), ("negative_node", negative_node)]
            }
            Element::CurrentSource { from_node, to_node, .. } => {
                vec![("from_node", from_node), ("to_node", to_node)]
            }
            Element::Diode { anode, cathode, .. } => vec![("anode", anode), ("cathode", cathode)],
            Element::Transistor { collector, base, emitter, .. } => {
                vec![("collector", collector), ("base", base), ("emitter", emitter)]
            }
        }
    }
}

/// A whole circuit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Circuit {
    pub elements: Vec<Element>,
    /// Temperature of the diodes' thermal voltage, °C (transistors carry their own).
    #[serde(default = "default_temperature_c")]
    pub temperature_c: f64,
}

/// One problem found by [`Circuit::validate`]: which element, which field, what is wrong.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CircuitError {
    /// Element name, or `"circuit"` for problems of the whole.
    pub element: String,
    pub field: String,
    pub problem: String,
}

impl std::fmt::Display for CircuitError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}: {} {}", self.element, self.field, self.problem)
    }
}

fn positive(errors: &mut Vec<CircuitError>, element: &str, field: &str, value: f64) {
    if !(value > 0.0) || !value.is_finite() {
        errors.push(CircuitError {
            element: element.to_string(),
            field: field.to_string(),
            problem: format!("must be a positive finite number (got {value})"),
        });
    }
}

fn not_negative(errors: &mut Vec<CircuitError>, element: &str, field: &str, value: f64) {
    if !(value >= 0.0) || !value.is_finite() {
        errors.push(CircuitError {
            element: element.to_string(),
            field: field.to_string(),
            problem: format!("must be zero or a positive finite number (got {value})"),
        });
    }
}

fn grading(errors: &mut Vec<CircuitError>, element: &str, field: &str, value: f64) {
    // m ≥ 1 makes the depletion-charge integral diverge at the junction potential.
    if !(0.0..0.95).contains(&value) {
        errors.push(CircuitError {
            element: element.to_string(),
            field: field.to_string(),
            problem: format!("must be at least 0 and below 0.95 (got {value}); 0.33–0.5 is usual"),
        });
    }
}

impl Circuit {
    /// Every problem in the description, or `Ok` when a run can start.
    pub fn validate(&self) -> Result<(), Vec<CircuitError>> {
        let mut errors = Vec::new();
        let mut names = std::collections::BTreeSet::new();
        let mut touches_ground = false;
        if self.elements.is_empty() {
            errors.push(CircuitError {
                element: "circuit".into(),
                field: "elements".into(),
                problem: "is empty: add at least a source and a load".into(),
            });
        }
        if !(self.temperature_c > -273.15) || !self.temperature_c.is_finite() {
            errors.push(CircuitError {
                element: "circuit".into(),
                field: "temperature_c".into(),
                problem: "must be a finite temperature above absolute zero".into(),
            });
        }
        for element in &self.elements {
            let name = element.name();
            if name.is_empty() {
                errors.push(CircuitError {
                    element: "(unnamed)".into(),
                    field: "name".into(),
                    problem: "must not be empty".into(),
                });
            } else if !names.insert(name.to_string()) {
                errors.push(CircuitError {
                    element: name.into(),
                    field: "name".into(),
                    problem: "is used by another element: names must be unique".into(),
                });
            }
            for (field, node) in element.terminals() {
                if node.is_empty() {
                    errors.push(CircuitError {
                        element: name.into(),
                        field: field.into(),
                        problem: "must name a node".into(),
                    });
                }
                touches_ground |= is_ground(node);
            }
            match element {
                Element::Resistor { resistance_ohm, .. } => {
                    positive(&mut errors, name, "resistance_ohm", *resistance_ohm)
                }
                Element::Capacitor { capacitance_f, .. } => {
                    not_negative(&mut errors, name, "capacitance_f", *capacitance_f)
                }
                Element::VoltageSource { positive_node, negative_node, waveform, .. } => {
                    if positive_node == negative_node
                        || (is_ground(positive_node) && is_ground(negative_node))
                    {
                        errors.push(CircuitError {
                            element: name.into(),
                            field: "negative_node".into(),
                            problem: "is the same node as positive_node: a voltage source cannot be shorted"
                                .into(),
                        });
                    }
                    for (field, problem) in waveform.problems() {
                        errors.push(CircuitError {
                            element: name.into(),
                            field: format!("waveform.{field}"),
                            problem,
                        });
                    }
                }
                Element::CurrentSource { waveform, .. } => {
                    for (field, problem) in waveform.problems() {
                        errors.push(CircuitError {
                            element: name.into(),
                            field: format!("waveform.{field}"),
                            problem,
                        });
                    }
                }
                Element::Diode { model, .. } => {
                    positive(&mut errors, name, "model.saturation_current_a", model.saturation_current_a);
                    positive(&mut errors, name, "model.emission_coefficient", model.emission_coefficient);
                    not_negative(
                        &mut errors,
                        name,
                        "model.series_resistance_ohm",
                        model.series_resistance_ohm,
                    );
                    not_negative(
                        &mut errors,
                        name,
                        "model.junction_capacitance_f",
                        model.junction_capacitance_f,
                    );
                    positive(&mut errors, name, "model.junction_potential_v", model.junction_potential_v);
                    grading(&mut errors, name, "model.junction_grading", model.junction_grading);
                    not_negative(&mut errors, name, "model.transit_time_s", model.transit_time_s);
                }
                Element::Transistor { model, .. } => {
                    positive(&mut errors, name, "model.saturation_current_a", model.saturation_current_a);
                    positive(&mut errors, name, "model.beta_forward", model.beta_forward);
                    positive(&mut errors, name, "model.beta_reverse", model.beta_reverse);
                    not_negative(&mut errors, name, "model.forward_transit_s", model.forward_transit_s);
                    not_negative(&mut errors, name, "model.reverse_transit_s", model.reverse_transit_s);
                    not_negative(
                        &mut errors,
                        name,
                        "model.emitter_junction_capacitance_f",
                        model.emitter_junction_capacitance_f,
                    );
                    not_negative(
                        &mut errors,
                        name,
                        "model.collector_junction_capacitance_f",
                        model.collector_junction_capacitance_f,
                    );
                    positive(
                        &mut errors,
                        name,
                        "model.emitter_junction_potential_v",
                        model.emitter_junction_potential_v,
                    );
                    positive(
                        &mut errors,
                        name,
                        "model.collector_junction_potential_v",
                        model.collector_junction_potential_v,
                    );
                    grading(&mut errors, name, "model.junction_grading", model.junction_grading);
                    not_negative(&mut errors, name, "model.base_resistance_ohm", model.base_resistance_ohm);
                    not_negative(
                        &mut errors,
                        name,
                        "model.collector_resistance_ohm",
                        model.collector_resistance_ohm,
                    );
                    not_negative(&mut errors, name, "model.leakage_a", model.leakage_a);
                    if !(model.temperature_c > -273.15) || !model.temperature_c.is_finite() {
                        errors.push(CircuitError {
                            element: name.into(),
                            field: "model.temperature_c".into(),
                            problem: "must be a finite temperature above absolute zero".into(),
                        });
                    }
                }
            }
        }
        if !self.elements.is_empty() && !touches_ground {
            errors.push(CircuitError {
                element: "circuit".into(),
                field: "elements".into(),
                problem: "no element connects to ground: name the reference node \"0\" or \"ground\"".into(),
            });
        }
        if errors.is_empty() {
            Ok(())
        } else {
            Err(errors)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn json_round_trip_and_field_names() {
        let text = r#"{"elements": [
            {"kind": "voltage_source", "name": "V1", "positive_node": "in", "negative_node": "0",
             "waveform": {"shape": "constant", "value": 5.0}},
            {"kind": "resistor", "name": "R1", "positive_node": "in", "negative_node": "out", "resistance_ohm": 1000.0},
            {"kind": "diode", "name": "D1", "anode": "out", "cathode": "ground",
             "model": {"saturation_current_a": 1e-14, "emission_coefficient": 1.0}}
        ]}"#;
        let parsed: Result<Circuit, _> = serde_json::from_str(text);
        assert!(parsed.is_ok(), "{parsed:?}");
        let Ok(circuit) = parsed else { return };
        assert_eq!(circuit.temperature_c, 25.0);
        assert_eq!(circuit.validate(), Ok(()));
        let again: Result<Circuit, _> =
            serde_json::to_string(&circuit).and_then(|s| serde_json::from_str(&s));
        assert_eq!(again.ok(), Some(circuit));
    }

    #[test]
    fn validation_names_element_and_field() {
        let circuit = Circuit {
            elements: vec![
                Element::Resistor {
                    name: "R1".into(),
                    positive_node: "a".into(),
                    negative_node: "0".into(),
                    resistance_ohm: -1.0,
                },
                Element::VoltageSource {
                    name: "V1".into(),
                    positive_node: "a".into(),
                    negative_node: "a".into(),
                    waveform: Waveform::PiecewiseLinear { points: vec![(1.0, 0.0), (0.5, 1.0)] },
                },
            ],
            temperature_c: 25.0,
        };
        let errors = circuit.validate().err().unwrap_or_default();
        let found: Vec<(&str, &str)> =
            errors.iter().map(|e| (e.element.as_str(), e.field.as_str())).collect();
        assert_eq!(
            found,
            vec![("R1", "resistance_ohm"), ("V1", "negative_node"), ("V1", "waveform.points[1]")]
        );
    }
}
