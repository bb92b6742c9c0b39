//! Human-readable rendering of analysis results for the terminal.

use std::fmt::Write;

use flipwright::design_file::DesignFile;
use flipwright::device::archetypes;
use flipwright::stage::analysis::StageReport;
use flipwright::stage::{BiasScheme, StageDesign, Steering};
use flipwright::units::{format_quantity, Unit};

fn q(value: f64, unit: Unit) -> String {
    format_quantity(value, unit)
}

fn margin_value(value: f64, unit: &str) -> String {
    if !value.is_finite() {
        return "—".to_string();
    }
    match Unit::from_symbol(unit) {
        Some(u) => q(value, u),
        None => format!("{value:.2}"),
    }
}

/// The full report of one stage.
pub fn render(file: &DesignFile, design: &StageDesign, report: &StageReport) -> String {
    let mut out = String::new();
    let input = design.input();
    let values = design.values();
    let sheet = design.transistor();
    let sign = report.polarity_sign;
    let _ = writeln!(out, "{}", file.name);
    let _ = writeln!(out, "{}", "=".repeat(file.name.chars().count()));
    let _ = writeln!(
        out,
        "Transistor: {}{}",
        sheet.label,
        if sheet.approximate { " (generic archetype, approximate values)" } else { "" }
    );
    let _ = writeln!(out, "Diode:      {}", design.diode().label);
    let _ = writeln!(
        out,
        "Supplies:   collector {}, bias {} (±{:.0} %); {} bias",
        q(sign * input.supplies.collector_supply_v, Unit::Volt),
        q(-sign * input.supplies.bias_supply_v, Unit::Volt),
        100.0 * input.supplies.tolerance,
        match values.bias {
            BiasScheme::Fixed => "fixed",
            BiasScheme::SelfBias => "self",
        }
    );
    let _ = writeln!(
        out,
        "Conditions: {} °C to {} °C, resistors ±{:.1} %, capacitors ±{:.1} %",
        input.conditions.t_min_c,
        input.conditions.t_max_c,
        100.0 * input.conditions.resistor_tolerance,
        100.0 * input.conditions.capacitor_tolerance
    );
    let _ = writeln!(out, "\nValues (each half):");
    let _ = writeln!(
        out,
        "  RC {}   R1 {}   R2 {}",
        q(values.collector_resistor_ohm, Unit::Ohm),
        q(values.cross_resistor_ohm, Unit::Ohm),
        q(values.base_resistor_ohm, Unit::Ohm)
    );
    if values.bias == BiasScheme::SelfBias {
        let _ = writeln!(
            out,
            "  RE {} (common) bypassed by {}",
            q(values.emitter_resistor_ohm, Unit::Ohm),
            q(values.emitter_bypass_capacitor_f, Unit::Farad)
        );
    }
    let _ = writeln!(out, "  C1 {} across each R1", q(values.commutating_capacitor_f, Unit::Farad));
    if let Some(t) = values.trigger {
        let _ = writeln!(
            out,
            "  trigger: {}-steered, Ct {}, Rt {}",
            match t.steering {
                Steering::Base => "base",
                Steering::Collector => "collector",
            },
            q(t.trigger_capacitor_f, Unit::Farad),
            q(t.trigger_resistor_ohm, Unit::Ohm)
        );
    }
    let _ = writeln!(
        out,
        "\nStable states at {} °C (handbook model | exact Ebers–Moll model):",
        report.nominal_temperature_c
    );
    for (index, state) in report.handbook_states.iter().enumerate() {
        let _ = writeln!(out, "  Q{} ON, Q{} OFF", state.on_side + 1, 2 - state.on_side);
        let exact = report.exact_states.get(index).and_then(|r| r.as_ref().ok());
        for (name, v) in &state.node_voltages {
            let e = exact
                .and_then(|x| x.node_voltages.iter().find(|(n, _)| n == name))
                .map(|(_, v)| q(*v, Unit::Volt))
                .unwrap_or_else(|| "—".to_string());
            let shown = if name.starts_with('S') { "(diodes open)".to_string() } else { q(*v, Unit::Volt) };
            let _ = writeln!(out, "    V({name:<2}) {:>14} | {e}", shown);
        }
        let _ = writeln!(
            out,
            "    ON: IC {}, IB {}, overdrive {:.2} at hFE used;  OFF: VBE {}, {} below cut-off",
            q(state.on_collector_current_a, Unit::Ampere),
            q(state.on_base_current_a, Unit::Ampere),
            state.overdrive,
            q(state.off_base_emitter_v, Unit::Volt),
            q(state.cutoff_margin_v, Unit::Volt)
        );
        let currents: Vec<String> =
            state.branch_currents.iter().map(|(n, i)| format!("{n} {}", q(*i, Unit::Ampere))).collect();
        let _ = writeln!(out, "    branch currents: {}", currents.join(", "));
        match report.exact_states.get(index) {
            Some(Ok(x)) => {
                let _ = writeln!(
                    out,
                    "    exact: IC {} / {}, IB {} / {}, ON forced gain {:.1}, {} Newton iterations",
                    q(x.collector_current_a[0], Unit::Ampere),
                    q(x.collector_current_a[1], Unit::Ampere),
                    q(x.base_current_a[0], Unit::Ampere),
                    q(x.base_current_a[1], Unit::Ampere),
                    x.on_forced_gain,
                    x.newton_iterations
                );
                if let Some(Some(a)) = report.agreement.get(index) {
                    let _ = writeln!(
                        out,
                        "    models agree within {} on node voltages, {:+.1} % on IC",
                        q(a.max_node_difference_v, Unit::Volt),
                        100.0 * a.collector_current_relative
                    );
                }
            }
            Some(Err(e)) => {
                let _ = writeln!(out, "    exact model: {e}");
            }
            None => {}
        }
    }
    let _ = writeln!(
        out,
        "\nMargins (worst case over tolerances, supplies, hFE spread and temperature; each figure is the headroom,\nhow far the quantity stays from its limit, or a ratio for overdrive, loop gain and rates):"
    );
    let _ = writeln!(
        out,
        "  {:<52} {:>10} {:>10} {:>10}  result",
        "margin", "at nominal", "at worst", "required"
    );
    for m in &report.margins {
        let required = if m.kind == flipwright::stage::margins::MarginKind::Overdrive
            || m.kind == flipwright::stage::margins::MarginKind::LoopGain
            || m.unit.is_empty()
        {
            format!("≥ {:.2}", m.required)
        } else {
            format!("≥ {}", margin_value(m.required, &m.unit))
        };
        let _ = writeln!(
            out,
            "  {:<52} {:>10} {:>10} {:>10}  {}",
            m.title,
            margin_value(m.nominal, &m.unit),
            margin_value(m.worst, &m.unit),
            required,
            if m.pass { "PASS" } else { "FAIL" }
        );
        if !m.worst_corner.is_empty() && (!m.pass || m.limiting.is_empty()) {
            let _ = writeln!(out, "      worst corner: {}", m.worst_corner.join("; "));
        }
        if let Some(first) = m.limiting.first() {
            let _ = writeln!(out, "      limited by: {first}");
        }
        if !m.pass {
            let _ = writeln!(out, "      what to change: {}", m.advice);
        }
    }
    let _ =
        writeln!(out, "  => {}", if report.all_pass { "every margin passes" } else { "SOME MARGIN FAILS" });
    let s = &report.switching;
    let _ = writeln!(out, "\nSwitching estimates (charge control; estimates, not measurements):");
    let _ = writeln!(
        out,
        "  delay {}, rise {}, storage {}, fall {} (no C1: IB1 {}, IB2 {}, β {:.0})",
        q(s.delay_s, Unit::Second),
        s.rise_s.map(|t| q(t, Unit::Second)).unwrap_or_else(|| "— (not saturating)".to_string()),
        q(s.storage_s, Unit::Second),
        q(s.fall_s, Unit::Second),
        q(s.point.forward_base_current_a, Unit::Ampere),
        q(s.point.reverse_base_current_a, Unit::Ampere),
        s.point.beta
    );
    let _ = writeln!(
        out,
        "  charge to move {:.1} pC → C1 ≥ {};  rule C1 = 10·t(switch)/(R1∥R2) gives {};  C1 ≤ {} for the rate",
        s.charge.total_c * 1e12,
        q(s.commutating_min_f, Unit::Farad),
        s.commutating_rule_f.map(|c| q(c, Unit::Farad)).unwrap_or_else(|| "—".to_string()),
        s.commutating_max_f.map(|c| q(c, Unit::Farad)).unwrap_or_else(|| "—".to_string())
    );
    let _ = writeln!(
        out,
        "  transition {}, C1·(R1∥R2) {}, trigger recovery {}; collector voltage rise 10–90 % {} (2.2·RC·(C1 + Cob + Ct))",
        q(s.transition_s, Unit::Second),
        q(s.recovery_time_constant_s, Unit::Second),
        q(s.trigger_recovery_s, Unit::Second),
        q(s.collector_voltage_rise_s, Unit::Second)
    );
    let _ = writeln!(
        out,
        "  maximum toggle rate: {} nominal, {} at the slow corner (rules: 1/(2.3·C1·R∥) {}, 1/(2·C1·R∥) {}); required {} × {}",
        q(s.max_toggle_rate_hz, Unit::Hertz),
        q(report.worst_max_toggle_rate_hz, Unit::Hertz),
        q(s.max_rate_rule_bell_hz, Unit::Hertz),
        q(s.max_rate_rule_half_hz, Unit::Hertz),
        q(input.requirements.toggle_rate_hz, Unit::Hertz),
        input.requirements.toggle_rate_margin
    );
    if let Some(a) = s.min_trigger_amplitude_v {
        let _ = writeln!(
            out,
            "  trigger: estimated minimum amplitude {}, available {}",
            q(a, Unit::Volt),
            q(s.available_trigger_amplitude_v, Unit::Volt)
        );
    }
    let _ = writeln!(out, "\nDissipation (worst case):");
    let parts: Vec<String> = report
        .worst_case
        .resistor_dissipation_w
        .iter()
        .map(|(n, w)| format!("{n} {}", q(*w, Unit::Watt)))
        .collect();
    let _ = writeln!(out, "  {}", parts.join(", "));
    let _ = writeln!(
        out,
        "  transistor {} nominal, {} worst case (derated Ptot {}); supply power {} nominal, {} worst case",
        q(report.nominal_metrics.max_transistor_dissipation_w, Unit::Watt),
        q(report.worst_case.transistor_dissipation_w, Unit::Watt),
        q(report.nominal_metrics.derated_ptot_w, Unit::Watt),
        q(report.nominal_metrics.supply_power_w, Unit::Watt),
        q(report.worst_case.supply_power_w, Unit::Watt)
    );
    let _ = writeln!(out, "  ({} corners evaluated)", report.worst_case.total_evaluations);
    let _ = writeln!(out, "\nModel notes:");
    for note in &report.notes {
        let _ = writeln!(out, "  - {note}");
    }
    let _ = writeln!(out, "\nCautions:");
    for caution in &report.cautions {
        let _ = writeln!(out, "  ! {caution}");
    }
    out
}

/// List of the shipped archetypes.
pub fn devices() -> String {
    let mut out = String::from("Transistor archetypes (generic classes, approximate values):\n");
    for id in archetypes::TRANSISTOR_ARCHETYPE_IDS {
        if let Some(sheet) = archetypes::transistor(id) {
            let _ = writeln!(out, "  {id:<22} {}", sheet.label);
        }
    }
    out.push_str("Diode archetypes:\n");
    for id in archetypes::DIODE_ARCHETYPE_IDS {
        if let Some(sheet) = archetypes::diode(id) {
            let _ = writeln!(out, "  {id:<22} {}", sheet.label);
        }
    }
    out
}

/// The driven reset network's chosen values in one phrase, as `chain` and `simulate --divide`
/// both print them.
pub fn reset_values(values: &flipwright::chain::reset_driver::DriverValues) -> String {
    format!(
        "pull-up {}, driver base divider {} / {}, hold capacitor {}, emitter resistor {}, series resistors {}",
        q(values.pull_up_ohm, Unit::Ohm),
        q(values.divider_upper_ohm, Unit::Ohm),
        q(values.divider_lower_ohm, Unit::Ohm),
        q(values.hold_capacitor_f, Unit::Farad),
        q(values.emitter_resistor_ohm, Unit::Ohm),
        q(values.series_resistor_ohm, Unit::Ohm)
    )
}
