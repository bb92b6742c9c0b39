//! CSV export of a transient run's waveforms for chosen probes: pure string building.
//!
//! Column names say what, where and in which unit, in the project's suffix convention:
//! `time_s`, `voltage(c1)_v` (node voltage against ground), `current(VCC)_a` (current through
//! a voltage source from its positive terminal to its negative one). Numbers are written in
//! Rust's shortest exponent form (`1.25e-7`), which reads back to the identical `f64`.

use serde::Serialize;

use super::integrator::TransientResult;
use crate::table::csv_field;

/// One recorded waveform.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
#[serde(tag = "kind", content = "name", rename_all = "snake_case")]
pub enum Probe {
    /// The voltage of a node against ground, volts.
    NodeVoltage(String),
    /// The current through a voltage source, amperes.
    SourceCurrent(String),
}

impl Probe {
    /// `voltage(c1)` or `current(VCC)`: the label in reports and the probe syntax.
    pub fn label(&self) -> String {
        match self {
            Probe::NodeVoltage(node) => format!("voltage({node})"),
            Probe::SourceCurrent(source) => format!("current({source})"),
        }
    }

    /// The CSV column name: the label with its unit suffix.
    pub fn column_name(&self) -> String {
        match self {
            Probe::NodeVoltage(_) => format!("{}_v", self.label()),
            Probe::SourceCurrent(_) => format!("{}_a", self.label()),
        }
    }
}

/// Why a probe cannot be exported.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum ExportError {
    /// Occurs when a voltage probe names a node the run did not solve for.
    UnknownNode { node: String, available: Vec<String> },
    /// Occurs when a current probe names something that is not a voltage source of the run.
    UnknownSource { source: String, available: Vec<String> },
    /// Occurs when a probe written as plain text names neither a node nor a voltage source.
    UnknownName { name: String, nodes: Vec<String>, sources: Vec<String> },
}

impl std::fmt::Display for ExportError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            ExportError::UnknownNode { node, available } => write!(
                f,
                "no node \"{node}\" to record; the nodes are: {}",
                available.join(", ")
            ),
            ExportError::UnknownSource { source, available } => write!(
                f,
                "\"{source}\" is not a voltage source, so it has no recorded current; the voltage sources are: {}",
                if available.is_empty() { "(none)".to_string() } else { available.join(", ") }
            ),
            ExportError::UnknownName { name, nodes, sources } => write!(
                f,
                "\"{name}\" is neither a node nor a voltage source; nodes: {}; voltage sources: {}",
                nodes.join(", "),
                if sources.is_empty() { "(none)".to_string() } else { sources.join(", ") }
            ),
        }
    }
}

impl std::error::Error for ExportError {}

/// Reads a probe from text: `voltage(NAME)`, `current(NAME)`, or a plain name, which means
/// the node's voltage when there is such a node and otherwise the source's current.
pub fn parse_probe(text: &str, node_names: &[String], source_names: &[String]) -> Result<Probe, ExportError> {
    let text = text.trim();
    let inner = |prefix: &str| text.strip_prefix(prefix).and_then(|rest| rest.strip_suffix(')'));
    if let Some(node) = inner("voltage(") {
        return if node_names.iter().any(|n| n == node) {
            Ok(Probe::NodeVoltage(node.to_string()))
        } else {
            Err(ExportError::UnknownNode { node: node.to_string(), available: node_names.to_vec() })
        };
    }
    if let Some(source) = inner("current(") {
        return if source_names.iter().any(|s| s == source) {
            Ok(Probe::SourceCurrent(source.to_string()))
        } else {
            Err(ExportError::UnknownSource { source: source.to_string(), available: source_names.to_vec() })
        };
    }
    if node_names.iter().any(|n| n == text) {
        Ok(Probe::NodeVoltage(text.to_string()))
    } else if source_names.iter().any(|s| s == text) {
        Ok(Probe::SourceCurrent(text.to_string()))
    } else {
        Err(ExportError::UnknownName {
            name: text.to_string(),
            nodes: node_names.to_vec(),
            sources: source_names.to_vec(),
        })
    }
}

/// The recorded series of one probe.
pub fn probe_waveform<'a>(result: &'a TransientResult, probe: &Probe) -> Result<&'a [f64], ExportError> {
    match probe {
        Probe::NodeVoltage(node) => result.voltage(node).ok_or_else(|| ExportError::UnknownNode {
            node: node.clone(),
            available: result.node_names.clone(),
        }),
        Probe::SourceCurrent(source) => result.source_current(source).ok_or_else(|| {
            ExportError::UnknownSource { source: source.clone(), available: result.source_names.clone() }
        }),
    }
}

/// CSV with a header row (`time_s`, then one column per probe in the order given) and one
/// row per accepted time point.
pub fn to_csv(result: &TransientResult, probes: &[Probe]) -> Result<String, ExportError> {
    let series: Vec<&[f64]> = probes.iter().map(|p| probe_waveform(result, p)).collect::<Result<_, _>>()?;
    let mut out = String::from("time_s");
    for probe in probes {
        out.push(',');
        out.push_str(&csv_field(&probe.column_name()));
    }
    out.push('\n');
    for (point, time) in result.time_s.iter().enumerate() {
        out.push_str(&format!("{time:e}"));
        for values in &series {
            // Every series has one value per time point; a short one would be an engine bug,
            // and an empty field then shows it rather than hiding it.
            out.push(',');
            if let Some(value) = values.get(point) {
                out.push_str(&format!("{value:e}"));
            }
        }
        out.push('\n');
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::transient::{OperatingPointMethod, RunStatistics};

    fn result() -> TransientResult {
        TransientResult {
            time_s: vec![0.0, 1e-9, 2.5e-9],
            node_names: vec!["c1".into(), "a,b".into()],
            node_voltages_v: vec![vec![0.1, 3.0, 5.875], vec![1.0, 2.0, 3.0]],
            source_names: vec!["VCC".into()],
            source_currents_a: vec![vec![-1e-3, -2e-3, -1.5e-3]],
            operating_point_method: OperatingPointMethod::Direct,
            statistics: RunStatistics::default(),
        }
    }

    #[test]
    fn header_names_kind_place_and_unit_and_values_read_back_exactly() {
        let probes = [Probe::NodeVoltage("c1".into()), Probe::SourceCurrent("VCC".into())];
        let csv = to_csv(&result(), &probes);
        assert_eq!(
            csv.as_deref(),
            Ok("time_s,voltage(c1)_v,current(VCC)_a\n0e0,1e-1,-1e-3\n1e-9,3e0,-2e-3\n2.5e-9,5.875e0,-1.5e-3\n")
        );
        let quoted = to_csv(&result(), &[Probe::NodeVoltage("a,b".into())]);
        assert_eq!(
            quoted.ok().and_then(|s| s.lines().next().map(String::from)),
            Some("time_s,\"voltage(a,b)_v\"".into())
        );
    }

    #[test]
    fn unknown_probes_list_what_there_is() {
        let outcome = to_csv(&result(), &[Probe::NodeVoltage("c9".into())]);
        assert_eq!(
            outcome,
            Err(ExportError::UnknownNode { node: "c9".into(), available: vec!["c1".into(), "a,b".into()] })
        );
        let r = result();
        assert_eq!(parse_probe("c1", &r.node_names, &r.source_names), Ok(Probe::NodeVoltage("c1".into())));
        assert_eq!(
            parse_probe("VCC", &r.node_names, &r.source_names),
            Ok(Probe::SourceCurrent("VCC".into()))
        );
        assert_eq!(
            parse_probe(" current(VCC) ", &r.node_names, &r.source_names),
            Ok(Probe::SourceCurrent("VCC".into()))
        );
        assert!(matches!(
            parse_probe("current(c1)", &r.node_names, &r.source_names),
            Err(ExportError::UnknownSource { .. })
        ));
        let error = parse_probe("R1", &r.node_names, &r.source_names).err().map(|e| e.to_string());
        assert_eq!(
            error.as_deref(),
            Some("\"R1\" is neither a node nor a voltage source; nodes: c1, a,b; voltage sources: VCC")
        );
    }
}
