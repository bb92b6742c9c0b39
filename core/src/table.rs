//! The component table: every part of a stage with its reference designator, preferred value,
//! IEC 60062 code, tolerance, worst-case stress and the rating to buy.
//!
//! Designators follow the usual stage numbering (R101 … for stage 1, common practice).
//! Ratings: resistor power rating at least twice the worst-case dissipation; capacitor voltage
//! rating at least 1.5 times the largest voltage across it (both common practice).

use serde::{Deserialize, Serialize};

use crate::stage::analysis::StageReport;
use crate::stage::{BiasScheme, StageDesign, Steering};
use crate::units::{format_code, format_quantity, tolerance_letter, Unit};

/// Standard resistor power ratings, W (common practice).
pub const RESISTOR_POWER_RATINGS_W: [f64; 10] = [0.125, 0.25, 0.4, 0.5, 0.6, 1.0, 2.0, 3.0, 5.0, 10.0];
/// Standard capacitor voltage ratings, V (common practice).
pub const CAPACITOR_VOLTAGE_RATINGS_V: [f64; 14] =
    [6.3, 10.0, 16.0, 25.0, 35.0, 50.0, 63.0, 100.0, 160.0, 200.0, 250.0, 400.0, 630.0, 1000.0];
/// Derating factors (common practice).
pub const RESISTOR_POWER_DERATING: f64 = 2.0;
pub const CAPACITOR_VOLTAGE_DERATING: f64 = 1.5;

/// One line of the table.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ComponentRow {
    pub designator: String,
    pub part: String,
    /// What the part does in the circuit.
    pub function: String,
    /// Value in SI units (resistors Ω, capacitors F), if it has one.
    pub value: Option<f64>,
    pub value_text: String,
    /// IEC 60062 letter-and-digit code.
    pub code: String,
    pub tolerance_text: String,
    /// Worst-case stress: dissipation (resistors, transistors) or voltage (capacitors).
    pub stress_text: String,
    /// What to buy: rating or device requirements.
    pub rating_text: String,
    /// False when the fitted device does not meet the requirement stated.
    pub meets: bool,
}

fn tolerance_text(tolerance: f64) -> String {
    let letter = tolerance_letter(tolerance).map(|c| format!(" ({c})")).unwrap_or_default();
    format!("±{}%{letter}", trim(100.0 * tolerance))
}

fn trim(value: f64) -> String {
    let text = format!("{value:.2}");
    text.trim_end_matches('0').trim_end_matches('.').to_string()
}

/// Smallest standard power rating ≥ derating × dissipation.
pub fn power_rating_w(dissipation_w: f64) -> Option<f64> {
    RESISTOR_POWER_RATINGS_W.iter().copied().find(|r| *r >= RESISTOR_POWER_DERATING * dissipation_w)
}

/// Smallest standard voltage rating ≥ derating × voltage.
pub fn voltage_rating_v(voltage_v: f64) -> Option<f64> {
    CAPACITOR_VOLTAGE_RATINGS_V.iter().copied().find(|r| *r >= CAPACITOR_VOLTAGE_DERATING * voltage_v.abs())
}

/// Builds the table of stage `stage_number` (1-based).
pub fn component_table(design: &StageDesign, report: &StageReport, stage_number: u32) -> Vec<ComponentRow> {
    let input = design.input();
    let values = design.values();
    let sheet = design.transistor();
    let r_tol = input.conditions.resistor_tolerance;
    let c_tol = input.conditions.capacitor_tolerance;
    let supply_high =
        (input.supplies.collector_supply_v + input.supplies.bias_supply_v) * (1.0 + input.supplies.tolerance);
    let amplitude = report.switching.available_trigger_amplitude_v;
    let dissipation = |name: &str| -> f64 {
        let piecewise = report
            .worst_case
            .resistor_dissipation_w
            .iter()
            .find(|(n, _)| *n == name)
            .map(|(_, w)| *w)
            .unwrap_or(0.0);
        // The exact states include the steering diodes' current, which the piecewise model
        // leaves out; scale them to the tolerance edge.
        let exact = report
            .exact_states
            .iter()
            .filter_map(|s| s.as_ref().ok())
            .filter_map(|s| s.branch_currents.iter().find(|(n, _)| *n == name).map(|(_, i)| *i))
            .map(|i| i * i)
            .fold(0.0, f64::max);
        let resistance = match name {
            "Rt1" | "Rt2" | "Rt" => values.trigger.map(|t| t.trigger_resistor_ohm).unwrap_or(0.0),
            _ => 0.0,
        };
        let exact_w = exact * resistance * (1.0 + input.supplies.tolerance).powi(2) / (1.0 - r_tol);
        piecewise.max(exact_w)
    };
    let n = stage_number;
    let mut rows = Vec::new();
    let resistor =
        |index: u32, function: &str, ohms: f64, network_name: &str, rows: &mut Vec<ComponentRow>| {
            let watts = dissipation(network_name);
            let rating = power_rating_w(watts);
            rows.push(ComponentRow {
                designator: format!("R{n}{index:02}"),
                part: "resistor".to_string(),
                function: function.to_string(),
                value: Some(ohms),
                value_text: format_quantity(ohms, Unit::Ohm),
                code: format_code(ohms, Unit::Ohm, 3).unwrap_or_default(),
                tolerance_text: tolerance_text(r_tol),
                stress_text: format_quantity(watts, Unit::Watt),
                rating_text: rating
                    .map(|r| format_quantity(r, Unit::Watt))
                    .unwrap_or_else(|| "above 10 W: redesign".to_string()),
                meets: rating.is_some(),
            });
        };
    resistor(1, "collector resistor RC of Q1", values.collector_resistor_ohm, "RC1", &mut rows);
    resistor(2, "collector resistor RC of Q2", values.collector_resistor_ohm, "RC2", &mut rows);
    resistor(3, "cross-coupling R1, Q1 collector to Q2 base", values.cross_resistor_ohm, "R1a", &mut rows);
    resistor(4, "cross-coupling R1, Q2 collector to Q1 base", values.cross_resistor_ohm, "R1b", &mut rows);
    resistor(5, "base resistor R2 of Q1", values.base_resistor_ohm, "R2a", &mut rows);
    resistor(6, "base resistor R2 of Q2", values.base_resistor_ohm, "R2b", &mut rows);
    if values.bias == BiasScheme::SelfBias {
        resistor(7, "common emitter resistor RE", values.emitter_resistor_ohm, "RE", &mut rows);
    }
    if let Some(trigger) = values.trigger {
        match trigger.steering {
            Steering::Base => {
                resistor(8, "steering bias Rt, Q1 side", trigger.trigger_resistor_ohm, "Rt1", &mut rows);
                resistor(9, "steering bias Rt, Q2 side", trigger.trigger_resistor_ohm, "Rt2", &mut rows);
            }
            Steering::Collector => {
                resistor(8, "steering bias Rt to the supply", trigger.trigger_resistor_ohm, "Rt", &mut rows)
            }
        }
    }
    let capacitor = |index: u32,
                     function: &str,
                     farads: f64,
                     volts: f64,
                     tolerance: f64,
                     rows: &mut Vec<ComponentRow>| {
        let rating = voltage_rating_v(volts);
        rows.push(ComponentRow {
            designator: format!("C{n}{index:02}"),
            part: "capacitor".to_string(),
            function: function.to_string(),
            value: Some(farads),
            value_text: format_quantity(farads, Unit::Farad),
            code: format_code(farads, Unit::Farad, 3).unwrap_or_default(),
            tolerance_text: tolerance_text(tolerance),
            stress_text: format!("{} across", format_quantity(volts, Unit::Volt)),
            rating_text: rating
                .map(|r| format!("{} V", trim(r)))
                .unwrap_or_else(|| "above 1 kV: special part".to_string()),
            meets: rating.is_some(),
        });
    };
    if values.commutating_capacitor_f > 0.0 {
        capacitor(
            1,
            "commutating capacitor C1 across R103",
            values.commutating_capacitor_f,
            supply_high,
            c_tol,
            &mut rows,
        );
        capacitor(
            2,
            "commutating capacitor C1 across R104",
            values.commutating_capacitor_f,
            supply_high,
            c_tol,
            &mut rows,
        );
    }
    if let Some(trigger) = values.trigger {
        let across = supply_high + amplitude;
        match trigger.steering {
            Steering::Base => {
                capacitor(
                    3,
                    "trigger capacitor Ct, Q1 side",
                    trigger.trigger_capacitor_f,
                    across,
                    c_tol,
                    &mut rows,
                );
                capacitor(
                    4,
                    "trigger capacitor Ct, Q2 side",
                    trigger.trigger_capacitor_f,
                    across,
                    c_tol,
                    &mut rows,
                );
            }
            Steering::Collector => capacitor(
                3,
                "common trigger capacitor Ct",
                trigger.trigger_capacitor_f,
                across,
                c_tol,
                &mut rows,
            ),
        }
    }
    if values.bias == BiasScheme::SelfBias && values.emitter_bypass_capacitor_f > 0.0 {
        let emitter_v = report
            .handbook_states
            .iter()
            .filter_map(|s| s.node_voltages.iter().find(|(name, _)| *name == "E").map(|(_, v)| v.abs()))
            .fold(0.0, f64::max)
            * (1.0 + input.supplies.tolerance);
        capacitor(
            5,
            "emitter bypass capacitor",
            values.emitter_bypass_capacitor_f,
            emitter_v,
            0.2,
            &mut rows,
        );
    }
    // Diodes.
    if let Some(trigger) = values.trigger {
        let diode = design.diode();
        let reverse_v = supply_high + amplitude;
        let trr_limit = report.switching.transition_s.max(1e-12);
        let meets = diode.piv_v >= 1.25 * reverse_v && diode.reverse_recovery_s <= trr_limit;
        let count = 2;
        for index in 1..=count {
            rows.push(ComponentRow {
                designator: format!("D{n}{index:02}"),
                part: "diode".to_string(),
                function: format!(
                    "{} steering diode, Q{index} side: {}",
                    match trigger.steering {
                        Steering::Base => "base",
                        Steering::Collector => "collector",
                    },
                    diode.label
                ),
                value: None,
                value_text: format!(
                    "{} diode",
                    match diode.material {
                        crate::device::Material::Silicon => "Si",
                        crate::device::Material::Germanium => "Ge",
                    }
                ),
                code: String::new(),
                tolerance_text: String::new(),
                stress_text: format!("{} reverse", format_quantity(reverse_v, Unit::Volt)),
                rating_text: format!(
                    "PIV ≥ {}, trr ≤ {}",
                    format_quantity(1.25 * reverse_v, Unit::Volt),
                    format_quantity(trr_limit, Unit::Second)
                ),
                meets,
            });
        }
    }
    // Transistors: the stresses are the worst cases found by the margin searches.
    use crate::stage::margins::MarginKind as K;
    let worst = |kind: K| report.margins.iter().find(|m| m.kind == kind);
    let vce_needed = worst(K::CollectorEmitterVoltage).map(|m| sheet.vceo_v - m.worst).unwrap_or(0.0);
    let vebo_needed = worst(K::ReverseBaseEmitter).map(|m| sheet.vebo_v - m.worst).unwrap_or(0.0);
    let vcb_needed = worst(K::CollectorBaseVoltage).map(|m| sheet.vcbo_v - m.worst).unwrap_or(0.0);
    let ic_needed = worst(K::CollectorCurrent).map(|m| sheet.ic_max_a - m.worst).unwrap_or(0.0);
    let p_needed = report.worst_case.transistor_dissipation_w;
    // Datasheets rate Ptot at 25 °C; derate linearly to the maximum junction temperature to
    // find the 25 °C rating that still covers the dissipation at t_max.
    let t_junction = crate::stage::margins::max_junction_temperature_c(sheet.material);
    let t_max = input.conditions.t_max_c;
    let ptot_25_needed = if t_max > 25.0 && t_max < t_junction {
        p_needed * (t_junction - 25.0) / (t_junction - t_max)
    } else {
        p_needed
    };
    // hFE(min) at 25 °C that would just give the minimum overdrive at the worst corner.
    let hfe_needed = worst(K::Overdrive)
        .filter(|m| m.worst > 0.0 && m.worst.is_finite())
        .map(|m| sheet.hfe_min * input.requirements.min_overdrive / m.worst)
        .unwrap_or(sheet.hfe_min);
    let transistor_ok = [
        K::Overdrive,
        K::CollectorEmitterVoltage,
        K::ReverseBaseEmitter,
        K::CollectorCurrent,
        K::TransistorDissipation,
    ]
    .iter()
    .all(|k| worst(*k).is_none_or(|m| m.pass));
    let material = match sheet.material {
        crate::device::Material::Silicon => "Si",
        crate::device::Material::Germanium => "Ge",
    };
    for index in 1..=2 {
        rows.push(ComponentRow {
            designator: format!("Q{n}{index:02}"),
            part: format!("{} transistor", sheet.polarity.name()),
            function: format!("bistable transistor Q{index}: {}", sheet.label),
            value: None,
            value_text: format!("{material} {}", sheet.polarity.name()),
            code: String::new(),
            tolerance_text: format!("hFE {:.0}–{:.0}", sheet.hfe_min, sheet.hfe_max),
            stress_text: format!(
                "VCE {}, VEB {} rev., IC {}, {}",
                format_quantity(vce_needed, Unit::Volt),
                format_quantity(vebo_needed, Unit::Volt),
                format_quantity(ic_needed, Unit::Ampere),
                format_quantity(p_needed, Unit::Watt)
            ),
            rating_text: format!(
                "VCEO ≥ {}, VCBO ≥ {}, VEBO ≥ {}, IC ≥ {}, hFE(min) ≥ {:.0}, Ptot(25 °C) ≥ {}",
                format_quantity(vce_needed, Unit::Volt),
                format_quantity(vcb_needed, Unit::Volt),
                format_quantity(vebo_needed, Unit::Volt),
                format_quantity(ic_needed, Unit::Ampere),
                hfe_needed.ceil(),
                format_quantity(ptot_25_needed, Unit::Watt)
            ),
            meets: transistor_ok,
        });
    }
    rows
}

/// Plain-text table with aligned columns.
pub fn to_text(rows: &[ComponentRow]) -> String {
    let headers = ["Ref", "Value", "Code", "Tolerance", "Worst-case stress", "Buy (rating)", "Function"];
    let cells: Vec<[String; 7]> = rows
        .iter()
        .map(|r| {
            [
                r.designator.clone(),
                r.value_text.clone(),
                r.code.clone(),
                r.tolerance_text.clone(),
                r.stress_text.clone(),
                if r.meets { r.rating_text.clone() } else { format!("{}  ** NOT MET **", r.rating_text) },
                r.function.clone(),
            ]
        })
        .collect();
    let mut widths = headers.map(|h| h.chars().count());
    for row in &cells {
        for (width, cell) in widths.iter_mut().zip(row) {
            *width = (*width).max(cell.chars().count());
        }
    }
    let mut out = String::new();
    let line = |cols: &[String], out: &mut String| {
        let padded: Vec<String> = cols
            .iter()
            .zip(&widths)
            .map(|(c, w)| format!("{c}{}", " ".repeat(w.saturating_sub(c.chars().count()))))
            .collect();
        out.push_str(padded.join("  ").trim_end());
        out.push('\n');
    };
    line(&headers.map(String::from), &mut out);
    line(&widths.map(|w| "-".repeat(w)), &mut out);
    for row in &cells {
        line(row, &mut out);
    }
    out
}

/// One CSV field per RFC 4180: quoted, with doubled quotes, when it holds a comma, a quote
/// or a line break; as it is otherwise.
pub fn csv_field(field: &str) -> String {
    if field.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", field.replace('"', "\"\""))
    } else {
        field.to_string()
    }
}

/// CSV (RFC 4180 quoting) with a header line.
pub fn to_csv(rows: &[ComponentRow]) -> String {
    let quote = csv_field;
    let mut out = String::from(
        "designator,part,value_si,value,code,tolerance,worst_case_stress,rating,meets,function\n",
    );
    for r in rows {
        let fields = [
            r.designator.clone(),
            r.part.clone(),
            r.value.map(|v| format!("{v:e}")).unwrap_or_default(),
            r.value_text.clone(),
            r.code.clone(),
            r.tolerance_text.clone(),
            r.stress_text.clone(),
            r.rating_text.clone(),
            r.meets.to_string(),
            r.function.clone(),
        ];
        out.push_str(&fields.iter().map(|f| quote(f)).collect::<Vec<_>>().join(","));
        out.push('\n');
    }
    out
}

/// The rows of a driven reset network's parts (`chain::reset_driver`), with the same rating
/// rules as the stage's parts: resistors at least twice their worst dissipation, the hold
/// capacitor at least 1.5 times the supply, diodes and the driver with the voltage and
/// current they must stand (common practice). Resistors and the capacitor carry the design's
/// tolerances.
pub fn reset_network_table(
    network: &crate::chain::reset_driver::DrivenResetNetwork,
    resistor_tolerance: f64,
    capacitor_tolerance: f64,
) -> Vec<ComponentRow> {
    network
        .parts
        .iter()
        .map(|part| {
            let (value_text, code, stress_text, rating_text, meets) = match (part.kind.as_str(), part.value) {
                ("resistor", Some(value)) => {
                    let rating = power_rating_w(part.dissipation_w);
                    (
                        format_quantity(value, Unit::Ohm),
                        format_code(value, Unit::Ohm, 3).unwrap_or_default(),
                        format_quantity(part.dissipation_w, Unit::Watt),
                        rating.map_or_else(
                            || "above 10 W: redesign".to_string(),
                            |r| format_quantity(r, Unit::Watt),
                        ),
                        rating.is_some(),
                    )
                }
                ("capacitor", Some(value)) => {
                    let rating = voltage_rating_v(part.voltage_v);
                    (
                        format_quantity(value, Unit::Farad),
                        format_code(value, Unit::Farad, 3).unwrap_or_default(),
                        format_quantity(part.voltage_v, Unit::Volt),
                        rating.map_or_else(
                            || "above 1 kV: redesign".to_string(),
                            |r| format_quantity(r, Unit::Volt),
                        ),
                        rating.is_some(),
                    )
                }
                _ => (
                    String::new(),
                    String::new(),
                    format!(
                        "{}, {}",
                        format_quantity(part.voltage_v, Unit::Volt),
                        format_quantity(part.current_a, Unit::Ampere)
                    ),
                    format!(
                        "rated for at least {} and {}",
                        format_quantity(part.voltage_v, Unit::Volt),
                        format_quantity(part.current_a, Unit::Ampere)
                    ),
                    true,
                ),
            };
            let tolerance_text = match part.kind.as_str() {
                "resistor" => tolerance_text(resistor_tolerance),
                "capacitor" => tolerance_text(capacitor_tolerance),
                _ => String::new(),
            };
            ComponentRow {
                designator: part.designator.clone(),
                part: part.kind.clone(),
                function: part.function.clone(),
                value: part.value,
                value_text,
                code,
                tolerance_text,
                stress_text,
                rating_text,
                meets,
            }
        })
        .collect()
}
