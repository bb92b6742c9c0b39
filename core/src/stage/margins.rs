//! Margins of a stage at one corner: what each margin measures, how it is computed from the
//! two piecewise states, and the pass thresholds.

use serde::Serialize;

use super::handbook::{analyse_state, StateAnalysis};
use super::network::{Corner, SolveError, StageNetwork};
use super::switching::{base_steering_gap_v, steering_diode_knee_v};
use super::{StageDesign, Steering};
use crate::device::{Material, PiecewiseTransistor};

/// The margins the tool reports, each with a pass threshold.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, PartialOrd, Ord)]
#[serde(rename_all = "snake_case")]
pub enum MarginKind {
    /// hFE·IB/IC of the ON transistor (≥ required overdrive).
    Overdrive,
    /// Volts the OFF base sits below cut-off (≥ required margin).
    Cutoff,
    /// Return ratio of the regenerative loop at the middle equilibrium (≥ required gain).
    LoopGain,
    /// OFF collector minus ON collector voltage (≥ required swing).
    OutputSwing,
    /// VEBO minus the largest reverse base–emitter voltage, DC or transient (≥ 0).
    ReverseBaseEmitter,
    /// VCEO minus the largest collector–emitter voltage (≥ 0).
    CollectorEmitterVoltage,
    /// VCBO minus the largest collector–base voltage, DC or transient (≥ 0).
    CollectorBaseVoltage,
    /// IC(max) rating minus the largest collector current (≥ 0).
    CollectorCurrent,
    /// Derated Ptot minus the largest transistor dissipation (≥ 0).
    TransistorDissipation,
    /// Estimated maximum toggle rate over the required rate times its margin (≥ 1).
    ToggleRate,
    /// Trigger amplitude available over the estimated minimum (≥ 1.5, common practice).
    TriggerAmplitude,
}

impl MarginKind {
    pub fn title(self) -> &'static str {
        match self {
            MarginKind::Overdrive => "overdrive factor of the ON transistor",
            MarginKind::Cutoff => "cut-off margin of the OFF base",
            MarginKind::LoopGain => "loop gain at the symmetric point",
            MarginKind::OutputSwing => "output swing",
            MarginKind::ReverseBaseEmitter => "reverse base–emitter voltage against VEBO",
            MarginKind::CollectorEmitterVoltage => "collector–emitter voltage against VCEO",
            MarginKind::CollectorBaseVoltage => "collector–base voltage against VCBO",
            MarginKind::CollectorCurrent => "collector current against IC(max)",
            MarginKind::TransistorDissipation => "transistor dissipation against derated Ptot",
            MarginKind::ToggleRate => "estimated maximum toggle rate against the requirement",
            MarginKind::TriggerAmplitude => "trigger amplitude against the estimated minimum",
        }
    }
    /// Unit of the value, for display ("" for ratios).
    pub fn unit(self) -> &'static str {
        match self {
            MarginKind::Cutoff
            | MarginKind::OutputSwing
            | MarginKind::ReverseBaseEmitter
            | MarginKind::CollectorEmitterVoltage
            | MarginKind::CollectorBaseVoltage => "V",
            MarginKind::CollectorCurrent => "A",
            MarginKind::TransistorDissipation => "W",
            _ => "",
        }
    }
}

/// All quantities the margins are computed from, at one corner.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CornerMetrics {
    pub overdrive: f64,
    pub cutoff_margin_v: f64,
    pub output_swing_v: f64,
    /// Largest reverse VBE of either transistor (DC, or the transient estimate), V.
    pub reverse_base_emitter_v: f64,
    pub max_collector_emitter_v: f64,
    /// Largest collector–base voltage of the OFF transistor, DC or while its base is pushed
    /// down at turn-off, V.
    pub max_collector_base_v: f64,
    pub max_collector_current_a: f64,
    pub max_transistor_dissipation_w: f64,
    /// Ptot derated linearly to zero at the maximum junction temperature.
    pub derated_ptot_w: f64,
    /// Largest dissipation of each resistor over both states, W.
    pub resistor_dissipation_w: Vec<(&'static str, f64)>,
    /// Supply power (both rails), the larger of the two states, W.
    pub supply_power_w: f64,
}

/// Maximum junction temperature assumed for Ptot derating (common practice; values from
/// memory: 150 °C silicon, 85 °C germanium).
pub fn max_junction_temperature_c(material: Material) -> f64 {
    match material {
        Material::Silicon => 150.0,
        Material::Germanium => 85.0,
    }
}

/// Devices at a corner, piecewise.
pub fn devices_at(design: &StageDesign, corner: &Corner) -> [PiecewiseTransistor; 2] {
    let sheet = design.transistor();
    [
        sheet.piecewise_at(corner.temperature_c, corner.spread[0]),
        sheet.piecewise_at(corner.temperature_c, corner.spread[1]),
    ]
}

/// Trigger amplitude available at the stage input: the requirement, or the stage's own swing.
pub fn available_trigger_amplitude(design: &StageDesign, nominal_swing_v: f64) -> f64 {
    design.input().requirements.trigger_amplitude_v.unwrap_or(nominal_swing_v)
}

/// Analyses both states at a corner and derives every DC metric.
pub fn evaluate_corner(
    design: &StageDesign,
    corner: &Corner,
) -> Result<(CornerMetrics, [StateAnalysis; 2]), SolveError> {
    let network = StageNetwork::build(design, corner);
    let devices = devices_at(design, corner);
    let states = [analyse_state(&network, 0, devices)?, analyse_state(&network, 1, devices)?];
    let sheet = design.transistor();
    let values = design.values();
    let mut metrics = CornerMetrics {
        overdrive: f64::INFINITY,
        cutoff_margin_v: f64::INFINITY,
        output_swing_v: f64::INFINITY,
        reverse_base_emitter_v: 0.0,
        max_collector_emitter_v: 0.0,
        max_collector_base_v: 0.0,
        max_collector_current_a: 0.0,
        max_transistor_dissipation_w: 0.0,
        derated_ptot_w: derated_ptot(sheet.ptot_w, sheet.material, corner.temperature_c),
        resistor_dissipation_w: network.resistors.iter().map(|r| (r.name, 0.0)).collect(),
        supply_power_w: 0.0,
    };
    for state in &states {
        let on_device = devices[state.on_side];
        // C1 from the collector that falls (the side turning on) to the base turning off, and
        // that base's own Ct, at the corner's values.
        let c1 = corner.commutating_capacitor_f[state.on_side];
        let ct = corner.trigger_capacitor_f[1 - state.on_side];
        metrics.overdrive = metrics.overdrive.min(state.overdrive);
        metrics.cutoff_margin_v = metrics.cutoff_margin_v.min(state.cutoff_margin_v);
        metrics.output_swing_v = metrics.output_swing_v.min(state.output_swing_v);
        // The transistor turned off when this state is entered had its base at VBE(sat). A
        // base-steered trigger first pulls that base down through Ct (beyond the diode's
        // knee); then the other collector falls by the swing and C1 carries that step to the
        // same base. Both charges land within the transition, far faster than the base
        // recovers through R1∥R2, so they add, shared by the base node's capacitance (Cib,
        // Cob, C1, and Ct while the diode conducts). The charge spent removing the stored base
        // charge is not subtracted, which keeps the estimate on the safe side.
        let (trigger_charge, trigger_capacitance) = match values.trigger {
            Some(t) if t.steering == Steering::Base => {
                let amplitude = available_trigger_amplitude(design, state.output_swing_v);
                let knee = steering_diode_knee_v(design, state.on_base_current_a, corner.temperature_c);
                let gap = base_steering_gap_v(knee, on_device.vbe_sat_v, on_device.vce_sat_v);
                ((amplitude - gap).max(0.0) * ct, ct)
            }
            _ => (0.0, 0.0),
        };
        let base_capacitance = sheet.cib_f + sheet.cob_f + c1 + trigger_capacitance;
        let injected = state.output_swing_v * c1 + trigger_charge;
        let transient_reverse =
            if base_capacitance > 0.0 { injected / base_capacitance - on_device.vbe_sat_v } else { 0.0 };
        let dc_reverse = -state.off_base_emitter_v;
        metrics.reverse_base_emitter_v =
            metrics.reverse_base_emitter_v.max(dc_reverse).max(transient_reverse);
        metrics.max_collector_emitter_v = metrics.max_collector_emitter_v.max(state.off_collector_emitter_v);
        let off_collector_base_dc = state.off_collector_emitter_v - state.off_base_emitter_v;
        let off_collector_base_transient = state.off_collector_emitter_v + transient_reverse.max(0.0);
        metrics.max_collector_base_v =
            metrics.max_collector_base_v.max(off_collector_base_dc).max(off_collector_base_transient);
        metrics.max_collector_current_a = metrics.max_collector_current_a.max(state.on_collector_current_a);
        metrics.max_transistor_dissipation_w = metrics
            .max_transistor_dissipation_w
            .max(state.on_transistor_dissipation_w)
            .max(state.off_transistor_dissipation_w);
        let resistor_currents = network.resistors.iter().zip(&state.branch_currents);
        for ((_, worst), (resistor, (_, current))) in
            metrics.resistor_dissipation_w.iter_mut().zip(resistor_currents)
        {
            *worst = worst.max(current * current * resistor.resistance_ohm);
        }
        let power = corner.collector_supply_v * state.collector_supply_current_a
            + corner.bias_supply_v * state.bias_supply_current_a;
        metrics.supply_power_w = metrics.supply_power_w.max(power);
    }
    Ok((metrics, states))
}

/// Ptot derated linearly from 25 °C to zero at the maximum junction temperature.
pub fn derated_ptot(ptot_w: f64, material: Material, ambient_c: f64) -> f64 {
    let t_max = max_junction_temperature_c(material);
    if ambient_c <= 25.0 {
        return ptot_w;
    }
    (ptot_w * (t_max - ambient_c) / (t_max - 25.0)).max(0.0)
}

/// Value of a DC margin in its natural form (larger is better).
pub fn margin_value(kind: MarginKind, metrics: &CornerMetrics, design: &StageDesign) -> Option<f64> {
    let sheet = design.transistor();
    Some(match kind {
        MarginKind::Overdrive => metrics.overdrive,
        MarginKind::Cutoff => metrics.cutoff_margin_v,
        MarginKind::OutputSwing => metrics.output_swing_v,
        MarginKind::ReverseBaseEmitter => sheet.vebo_v - metrics.reverse_base_emitter_v,
        MarginKind::CollectorEmitterVoltage => sheet.vceo_v - metrics.max_collector_emitter_v,
        MarginKind::CollectorBaseVoltage => sheet.vcbo_v - metrics.max_collector_base_v,
        MarginKind::CollectorCurrent => sheet.ic_max_a - metrics.max_collector_current_a,
        MarginKind::TransistorDissipation => metrics.derated_ptot_w - metrics.max_transistor_dissipation_w,
        MarginKind::LoopGain | MarginKind::ToggleRate | MarginKind::TriggerAmplitude => return None,
    })
}

/// Pass threshold of a margin.
pub fn required_value(kind: MarginKind, design: &StageDesign) -> f64 {
    let r = &design.input().requirements;
    match kind {
        MarginKind::Overdrive => r.min_overdrive,
        MarginKind::Cutoff => r.min_cutoff_margin_v,
        MarginKind::LoopGain => r.min_loop_gain,
        MarginKind::OutputSwing => r.min_output_swing_v,
        MarginKind::ToggleRate => 1.0,
        MarginKind::TriggerAmplitude => 1.5,
        _ => 0.0,
    }
}

/// The DC margins found from piecewise corner metrics.
pub const DC_MARGINS: [MarginKind; 8] = [
    MarginKind::Overdrive,
    MarginKind::Cutoff,
    MarginKind::OutputSwing,
    MarginKind::ReverseBaseEmitter,
    MarginKind::CollectorEmitterVoltage,
    MarginKind::CollectorBaseVoltage,
    MarginKind::CollectorCurrent,
    MarginKind::TransistorDissipation,
];
