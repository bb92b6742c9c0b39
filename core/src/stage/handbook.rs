//! The handbook (piecewise) analysis of a stage and the published first-cut design procedure.
//!
//! The piecewise model holds the ON transistor at VBE(sat), VCE(sat) and lets the OFF one carry
//! only its leakage ICBO from collector to base. Solved as a linear network, it reproduces the
//! handbook closed forms exactly when there are no loads, e.g. for fixed bias
//! `VB(off) = VCE(sat)·R2/(R1+R2) − VBB·R1/(R1+R2) + ICBO·(R1∥R2)` and
//! `IB(on) = (VCC − VBE(sat))/(RC + R1) − (VBE(sat) + VBB)/R2` (Venkata Rao et al., *Pulse and
//! Digital Circuits*, ch. 9; D. A. Bell, *Solid State Pulse Circuits*, ch. 13), and extends
//! them to loads, self bias and the leakage of every branch.

use serde::Serialize;

use super::network::{SolveError, StageNetwork, NODE_B1, NODE_B2, NODE_C1, NODE_C2};
use crate::device::PiecewiseTransistor;

/// One stable state by the piecewise model (NPN frame).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StateAnalysis {
    /// 0 when Q1 is ON, 1 when Q2 is ON.
    pub on_side: usize,
    pub node_voltages: Vec<(&'static str, f64)>,
    pub branch_currents: Vec<(&'static str, f64)>,
    pub on_collector_current_a: f64,
    pub on_base_current_a: f64,
    /// hFE·IB/IC of the ON transistor at the hFE of this analysis.
    pub overdrive: f64,
    /// VBE of the OFF transistor, V.
    pub off_base_emitter_v: f64,
    /// Volts the OFF base sits below its cut-off threshold (positive is good).
    pub cutoff_margin_v: f64,
    pub on_collector_v: f64,
    pub off_collector_v: f64,
    /// Collector–emitter voltage of the OFF transistor, V.
    pub off_collector_emitter_v: f64,
    pub output_swing_v: f64,
    /// Dissipation of the ON and OFF transistors, W.
    pub on_transistor_dissipation_w: f64,
    pub off_transistor_dissipation_w: f64,
    /// Current drawn from the collector supply and the bias rail (magnitudes), A.
    pub collector_supply_current_a: f64,
    pub bias_supply_current_a: f64,
}

/// Analyses one state of the network with the piecewise model.
pub fn analyse_state(
    network: &StageNetwork,
    on_side: usize,
    devices: [PiecewiseTransistor; 2],
) -> Result<StateAnalysis, SolveError> {
    let solution = network.solve_piecewise(on_side, devices)?;
    let on_side = solution.on_side;
    let off_side = 1 - on_side;
    let v = &solution.node_voltages;
    let node = |index: usize| v.get(index).copied().unwrap_or(0.0);
    let collector = [node(NODE_C1), node(NODE_C2)];
    let base = [node(NODE_B1), node(NODE_B2)];
    let emitter = StageNetwork::voltage(network.transistors[0].emitter, v);
    let on_device = devices[on_side];
    let off_device = devices[off_side];
    let ic = solution.on_collector_current_a;
    let ib = solution.on_base_current_a;
    // IC ≤ 0 means the ON transistor is not switching any current: no usable state.
    let overdrive = if ic > 0.0 { on_device.hfe * ib / ic } else { 0.0 };
    let off_vbe = base[off_side] - emitter;
    let branch_currents: Vec<(&'static str, f64)> =
        network.resistors.iter().map(|r| (r.name, StageNetwork::resistor_current(r, v))).collect();
    let supply_v = network.corner.collector_supply_v;
    let bias_v = network.corner.bias_supply_v;
    let mut collector_supply_current = 0.0;
    let mut bias_supply_current = 0.0;
    for r in &network.resistors {
        let current = StageNetwork::resistor_current(r, v);
        if r.from == super::network::Terminal::Fixed(supply_v) && supply_v != 0.0 {
            collector_supply_current += current;
        }
        if bias_v > 0.0 && r.to == super::network::Terminal::Fixed(-bias_v) {
            bias_supply_current += current;
        }
    }
    let off_vce = collector[off_side] - emitter;
    Ok(StateAnalysis {
        on_side,
        node_voltages: network.node_names.iter().zip(v).map(|(name, value)| (*name, *value)).collect(),
        branch_currents,
        on_collector_current_a: ic,
        on_base_current_a: ib,
        overdrive,
        off_base_emitter_v: off_vbe,
        cutoff_margin_v: off_device.vbe_cutoff_v - off_vbe,
        on_collector_v: collector[on_side],
        off_collector_v: collector[off_side],
        off_collector_emitter_v: off_vce,
        output_swing_v: collector[off_side] - collector[on_side],
        on_transistor_dissipation_w: on_device.vce_sat_v * ic + on_device.vbe_sat_v * ib,
        off_transistor_dissipation_w: (collector[off_side] - base[off_side]).max(0.0) * off_device.icbo_a,
        collector_supply_current_a: collector_supply_current,
        bias_supply_current_a: bias_supply_current,
    })
}

/// Inputs of the published first-cut procedure for a fixed-bias stage.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ProcedureInput {
    pub collector_supply_v: f64,
    /// Bias rail magnitude (the rail is −VBB for NPN).
    pub bias_supply_v: f64,
    pub vce_sat_v: f64,
    pub vbe_sat_v: f64,
    pub collector_current_a: f64,
    pub hfe_min: f64,
    /// IB = overdrive·IC/hFE(min).
    pub overdrive: f64,
    /// Current in R2 as a fraction of IC.
    pub divider_current_fraction: f64,
}

/// RC, R1, R2 of a procedure.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ProcedureResult {
    pub collector_resistor_ohm: f64,
    pub cross_resistor_ohm: f64,
    pub base_resistor_ohm: f64,
}

/// The handbook procedure as published (Venkata Rao et al. ch. 9; Bell ch. 13):
/// RC = (VCC − VCE(sat))/IC; R2 = (VBE(sat) + VBB)/I2 with I2 = fraction·IC;
/// IB = k·IC/hFE(min); R1 from (VCC − VBE(sat))/(RC + R1) = IB + I2.
/// It ignores the current the ON collector passes into the other divider.
pub fn published_procedure(input: &ProcedureInput) -> ProcedureResult {
    let rc = (input.collector_supply_v - input.vce_sat_v) / input.collector_current_a;
    let divider_current = input.divider_current_fraction * input.collector_current_a;
    let r2 = (input.vbe_sat_v + input.bias_supply_v) / divider_current;
    let ib = input.overdrive * input.collector_current_a / input.hfe_min;
    let r1 = (input.collector_supply_v - input.vbe_sat_v) / (ib + divider_current) - rc;
    ProcedureResult { collector_resistor_ohm: rc, cross_resistor_ohm: r1, base_resistor_ohm: r2 }
}

/// The same procedure with the exact current balance: RC and R2 as published, then R1 chosen
/// so that hFE(min)·IB equals k times the *actual* ON collector current
/// IC = (VCC − VCE(sat))/RC − (VCE(sat) + VBB)/(R1 + R2), i.e. including the current the ON
/// collector feeds into the OFF side's divider. `None` when no R1 reaches the overdrive.
pub fn refined_procedure(input: &ProcedureInput) -> Option<ProcedureResult> {
    let first = published_procedure(input);
    let rc = first.collector_resistor_ohm;
    let r2 = first.base_resistor_ohm;
    let vcc = input.collector_supply_v;
    let vbb = input.bias_supply_v;
    let shortfall = |r1: f64| {
        let ib = (vcc - input.vbe_sat_v) / (rc + r1) - (input.vbe_sat_v + vbb) / r2;
        let ic = (vcc - input.vce_sat_v) / rc - (input.vce_sat_v + vbb) / (r1 + r2);
        input.hfe_min * ib - input.overdrive * ic
    };
    // The base drive falls monotonically with R1, so bisect between a tiny R1 and a large one.
    let r1 = crate::numeric::bisect(shortfall, 1e-3 * rc, 1e3 * rc.max(r2), 1e-9 * rc, 200)?;
    Some(ProcedureResult { collector_resistor_ohm: rc, cross_resistor_ohm: r1, base_resistor_ohm: r2 })
}
