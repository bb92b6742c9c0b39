//! The reset of a reset-on-count chain: its diode AND decoding gate, the hold that stretches
//! the reset, the reset inputs, and the race the reset must win.
//!
//! Circuit (our own, NPN frame): decoding diodes from the gate node G (anodes) to the Q of
//! every stage that is 1 in N (cathodes); the pull-up Rp from G to the collector supply. G
//! feeds the hold node H through the hold diode Dh; the hold capacitor Ch sits from H to
//! ground. A divider Rr (H to X) and Rx (X to the base return, −VBB or ground) sets the reset
//! bus X, and one reset diode per stage runs from X to that stage's Q2 base, so a reset turns
//! every Q2 on (Q = 0). At rest some decoded Q is low, so G sits a diode above it and H at
//! about that Q's level: the divider holds X below every OFF base, and the reset diodes are
//! reverse-biased (no DC load on the bases). When all decoded outputs are high, Rp lifts G
//! and charges Ch; X clamps a diode and a VBE above the emitters and drives the bases.
//!
//! The race: as soon as the fastest decoded stage's Q falls, that diode pulls G down and the
//! gate removes itself; Dh then blocks and Ch alone keeps the reset driven, discharging
//! through Rr. The reset must stay driven until the slowest stage has latched in 0 and the
//! edges its clearing sends to the next stage's trigger input have passed.
//!
//! Between the phases each node is one capacitor with linear branches, so every phase is a
//! closed-form exponential; the transient simulation is the arbiter.

use serde::{Deserialize, Serialize};

use super::timing::StageTiming;
use super::{check_range, ChainError, ChainPlan, Method, MethodKind, MethodPlan};
use crate::device::SpreadPoint;
use crate::numeric::bisect;
use crate::stage::{BiasScheme, Load, StageDesign, StageValues, Supplies};
use crate::units::ESeries;

/// Base current at assertion over the least that turns every Q2 on (our choice).
pub const RESET_DRIVE_SAFETY: f64 = 2.0;
/// Share of the headroom between the reset diodes' conduction and the gate's ceiling dropped
/// across Rp at assertion (our choice: half, so Rp neither starves the bus nor loads the
/// stages needlessly).
pub const RESET_HEADROOM_SHARE: f64 = 0.5;
/// Largest current a decoded ON collector may sink from Rp at rest, as a share of its collector
/// current (our choice: beyond half, the decoded stages' overdrive is usually gone; the stage
/// analysis with the chain loads is the arbiter).
pub const RESET_SINK_SHARE_MAX: f64 = 0.5;
/// Volts by which the reset diodes stay below conduction at rest (our choice).
pub const RESET_REST_MARGIN_V: f64 = 0.3;
/// Factor on the hold the slowest stage needs, for what the closed-form timeline leaves out
/// (our choice).
pub const RESET_RACE_SAFETY: f64 = 1.2;
/// Largest divider ratio Rx/(Rr + Rx): Rx must exist, it returns H to rest (our choice).
pub const RESET_DIVIDER_RATIO_MAX: f64 = 0.9;
/// Current at which the diodes' forward drop is taken (our choice).
pub const RESET_DIODE_CURRENT_A: f64 = 1e-3;

/// Current at which a reset diode counts as conducting when the reset pulse is measured at a
/// corner (our choice: a tenth of the design point `RESET_DIODE_CURRENT_A`, a small share of
/// the reset current a base gets).
pub const CONDUCTION_THRESHOLD_CURRENT_A: f64 = 1e-4;

/// Device values the reset is designed with (worst-case ends chosen by the caller).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ResetDevices {
    /// Highest VCE(sat) of the stage transistors, V.
    pub vce_sat_v: f64,
    /// Highest VBE(sat), V (the coldest temperature).
    pub vbe_sat_v: f64,
    /// Lowest hFE (the coldest temperature).
    pub hfe_min: f64,
    /// Forward drop of the gate and reset diodes, V.
    pub diode_forward_v: f64,
    pub diode_capacitance_f: f64,
    /// Overdrive the reset must give the Q2 it turns on.
    pub overdrive: f64,
    /// Resistor tolerance (0.05 = ±5 %).
    pub resistor_tolerance: f64,
}

/// Everything about one stage the reset is designed from.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ResetStage {
    pub values: StageValues,
    pub supplies: Supplies,
    pub devices: ResetDevices,
    pub resistor_series: ESeries,
    pub capacitor_series: ESeries,
}

impl ResetStage {
    /// The stage of a validated design, with its worst ends: highest VBE(sat) and lowest hFE at
    /// the lowest temperature, highest VCE(sat), diode drop at 1 mA and the lowest temperature.
    pub fn from_design(design: &StageDesign) -> ResetStage {
        let input = design.input();
        let sheet = design.transistor();
        let t_min = input.conditions.t_min_c;
        let cold = sheet.piecewise_at(t_min, SpreadPoint { hfe: -1.0, vce_sat: 1.0, vbe_sat: 1.0 });
        ResetStage {
            values: input.values,
            supplies: input.supplies,
            devices: ResetDevices {
                vce_sat_v: sheet.vce_sat_max_v,
                vbe_sat_v: cold.vbe_sat_v,
                hfe_min: cold.hfe,
                diode_forward_v: design.diode().forward_voltage_at(RESET_DIODE_CURRENT_A, t_min),
                diode_capacitance_f: design.diode().capacitance_f,
                overdrive: input.requirements.target_overdrive,
                resistor_tolerance: input.conditions.resistor_tolerance,
            },
            resistor_series: input.requirements.resistor_series,
            capacitor_series: input.requirements.capacitor_series,
        }
    }

    /// The stage at one point of its tolerance space rather than at its worst ends: devices at
    /// `temperature_c` and hFE position `hfe_spread` (−1 … +1, VCE(sat) and VBE(sat) typical),
    /// the diodes' drop at [`CONDUCTION_THRESHOLD_CURRENT_A`] (so the knee is where a reset
    /// diode begins to conduct at that temperature, not the 1 mA design point),
    /// supplies and stage resistors multiplied by their factors, no further tolerance. This is
    /// what a simulation corner holds, so the closed form can be put beside its measurement.
    pub fn at_point(
        design: &StageDesign,
        temperature_c: f64,
        hfe_spread: f64,
        supply_factor: f64,
        resistor_factor: f64,
    ) -> ResetStage {
        let worst = ResetStage::from_design(design);
        let sheet = design.transistor();
        let point =
            sheet.piecewise_at(temperature_c, SpreadPoint { hfe: hfe_spread, vce_sat: 0.0, vbe_sat: 0.0 });
        let mut values = worst.values;
        values.collector_resistor_ohm *= resistor_factor;
        values.cross_resistor_ohm *= resistor_factor;
        values.base_resistor_ohm *= resistor_factor;
        values.emitter_resistor_ohm *= resistor_factor;
        let mut supplies = worst.supplies;
        supplies.collector_supply_v *= supply_factor;
        supplies.bias_supply_v *= supply_factor;
        supplies.tolerance = 0.0;
        ResetStage {
            values,
            supplies,
            devices: ResetDevices {
                vce_sat_v: point.vce_sat_v,
                vbe_sat_v: point.vbe_sat_v,
                hfe_min: point.hfe,
                diode_forward_v: design
                    .diode()
                    .forward_voltage_at(CONDUCTION_THRESHOLD_CURRENT_A, temperature_c),
                resistor_tolerance: 0.0,
                ..worst.devices
            },
            ..worst
        }
    }
}

/// Levels of the stage the reset works between (NPN frame, handbook closed forms).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ResetLevels {
    pub supply_min_v: f64,
    pub supply_nominal_v: f64,
    pub supply_max_v: f64,
    /// Emitter level: 0 in fixed bias; in self bias about VCC·RE/(RC + RE) (the ON
    /// collector current through RC and RE, base and divider currents neglected).
    pub emitter_v: f64,
    /// Where R2 returns: −VBB in fixed bias, ground in self bias.
    pub base_return_v: f64,
    /// An ON collector, and so H at rest: emitter + VCE(sat), V.
    pub on_collector_v: f64,
    /// Lowest OFF collector: VCC − RC·(VCC − VE − VBE)/(RC + R1) at the low supply and the
    /// resistor extremes that pull it down, V.
    pub off_collector_min_v: f64,
    /// Highest OFF base (leakage neglected): the R1–R2 divider from an ON collector, V.
    pub off_base_max_v: f64,
    /// X at which a reset diode starts to drive a base to VBE(sat): VE + VBE(sat) + VF, V.
    pub knee_v: f64,
    /// Base current a reset must give each Q2 while Q1 is still ON:
    /// k·IC/hFE(min) + (VBE − VCE)/R1 + (VE + VBE − V(return))/R2, A.
    pub reset_current_per_stage_a: f64,
    /// Nominal ON collector current (VCC − VE − VCE)/RC, A.
    pub on_collector_current_a: f64,
}

/// Checks what a hand-built [`ResetStage`] holds (a validated design always passes).
fn validate(stage: &ResetStage) -> Result<(), ChainError> {
    let v = &stage.values;
    let d = &stage.devices;
    check_range("values.collector_resistor_ohm", v.collector_resistor_ohm, 1.0, 1e8, "ohms")?;
    check_range("values.cross_resistor_ohm", v.cross_resistor_ohm, 1.0, 1e9, "ohms")?;
    check_range("values.base_resistor_ohm", v.base_resistor_ohm, 1.0, 1e9, "ohms")?;
    if v.bias == BiasScheme::SelfBias {
        check_range("values.emitter_resistor_ohm", v.emitter_resistor_ohm, 1.0, 1e7, "ohms")?;
    }
    check_range("supplies.collector_supply_v", stage.supplies.collector_supply_v, 0.5, 1000.0, "volts")?;
    check_range("supplies.bias_supply_v", stage.supplies.bias_supply_v, 0.0, 1000.0, "volts")?;
    check_range("supplies.tolerance", stage.supplies.tolerance, 0.0, 0.3, "a fraction")?;
    check_range("devices.vce_sat_v", d.vce_sat_v, 0.0, 2.0, "volts")?;
    check_range("devices.vbe_sat_v", d.vbe_sat_v, 0.05, 2.0, "volts")?;
    check_range("devices.hfe_min", d.hfe_min, 1.0, 5000.0, "a current gain")?;
    check_range("devices.diode_forward_v", d.diode_forward_v, 0.05, 3.0, "volts")?;
    check_range("devices.diode_capacitance_f", d.diode_capacitance_f, 0.0, 1e-8, "farads")?;
    check_range("devices.overdrive", d.overdrive, 1.0, 20.0, "a factor")?;
    check_range("devices.resistor_tolerance", d.resistor_tolerance, 0.0, 0.3, "a fraction")
}

/// The levels of a stage from its values, supplies and device values.
pub fn reset_levels(stage: &ResetStage) -> Result<ResetLevels, ChainError> {
    validate(stage)?;
    let v = &stage.values;
    let d = &stage.devices;
    let low = 1.0 - d.resistor_tolerance;
    let high = 1.0 + d.resistor_tolerance;
    let supply_nominal_v = stage.supplies.collector_supply_v;
    let supply_min_v = supply_nominal_v * (1.0 - stage.supplies.tolerance);
    let supply_max_v = supply_nominal_v * (1.0 + stage.supplies.tolerance);
    let (rc, r1, r2) = (v.collector_resistor_ohm, v.cross_resistor_ohm, v.base_resistor_ohm);
    let (emitter_v, bias) = match v.bias {
        BiasScheme::Fixed => (0.0, stage.supplies.bias_supply_v),
        BiasScheme::SelfBias => {
            (supply_nominal_v * v.emitter_resistor_ohm / (rc + v.emitter_resistor_ohm), 0.0)
        }
    };
    let base_return_v = -bias;
    let on_collector_v = emitter_v + d.vce_sat_v;
    let on_collector_current_a = ((supply_nominal_v - on_collector_v) / rc).max(0.0);
    let most_collector_current = ((supply_max_v - on_collector_v) / (rc * low)).max(0.0);
    let return_lowest = -bias * (1.0 + stage.supplies.tolerance);
    let return_highest = -bias * (1.0 - stage.supplies.tolerance);
    let reset_current_per_stage_a = d.overdrive * most_collector_current / d.hfe_min
        + ((d.vbe_sat_v - d.vce_sat_v) / (r1 * low)).max(0.0)
        + ((emitter_v + d.vbe_sat_v - return_lowest) / (r2 * low)).max(0.0);
    let off_collector_min_v =
        supply_min_v - rc * high * (supply_min_v - emitter_v - d.vbe_sat_v).max(0.0) / (rc * high + r1 * low);
    let off_base_max_v = return_highest + (on_collector_v - return_highest) * r2 / (r1 + r2);
    Ok(ResetLevels {
        supply_min_v,
        supply_nominal_v,
        supply_max_v,
        emitter_v,
        base_return_v,
        on_collector_v,
        off_collector_min_v,
        off_base_max_v,
        knee_v: emitter_v + d.vbe_sat_v + d.diode_forward_v,
        reset_current_per_stage_a,
        on_collector_current_a,
    })
}

/// Component values of the reset network.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ResetValues {
    /// Rp, gate pull-up to the collector supply.
    pub pull_up_ohm: f64,
    /// Rr, from the hold node H to the reset bus X.
    pub divider_upper_ohm: f64,
    /// Rx, from X to the base return.
    pub divider_lower_ohm: f64,
    /// Ch, from H to ground.
    pub hold_capacitor_f: f64,
}

/// Hold-node levels and the times of one reset, measured from the moment every decoded
/// output is high.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ResetTimeline {
    /// H at rest (a decoded output low), V.
    pub rest_hold_v: f64,
    /// H at which the reset diodes begin to conduct, V.
    pub conduction_hold_v: f64,
    /// H below which the reset no longer gives every stage its reset current, V.
    pub drive_hold_v: f64,
    /// H that Rp would charge it to if the gate stayed up, V.
    pub asserted_hold_v: f64,
    /// Reset current into all bases at `asserted_hold_v` over what they need (≥ 1 drives).
    pub drive_ratio: f64,
    /// Volts by which the reset diodes stay below conduction at rest (> 0: no DC base load).
    pub rest_reverse_margin_v: f64,
    /// From every decoded output high to the reset driving every stage, s.
    pub assert_s: f64,
    /// H when the fastest decoded output removes the gate, V.
    pub hold_at_removal_v: f64,
    /// After the gate's removal: drive kept, and reset diodes released, s.
    pub hold_after_removal_s: f64,
    pub release_after_removal_s: f64,
    /// From every decoded output high until the reset has let go and every stage has
    /// latched: the correction time after reaching N, s.
    pub reset_cycle_s: f64,
    /// Ch·(Rr + Rx): H's return to rest; about five of them must pass before the next reset, s.
    pub recovery_time_constant_s: f64,
}

/// The race of the reset against its own removal.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RaceCheck {
    /// Reset effective to the fastest decoded output's fall, which removes the gate, s.
    pub gate_removal_s: f64,
    /// What the slowest stage needs, with the safety factor, s.
    pub required_hold_s: f64,
    /// Gate removal plus the hold Ch gives after it, s.
    pub available_hold_s: f64,
    /// The most any hold capacitor could give with this Rp and Rr (Ch charges only until the
    /// gate is removed), s.
    pub most_hold_s: f64,
    pub won: bool,
    /// The condition, in words and symbols.
    pub condition: String,
}

/// The designed reset network with its checks.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ResetNetwork {
    pub decoded_stages: Vec<u32>,
    pub stage_count: u32,
    pub values: ResetValues,
    pub levels: ResetLevels,
    /// Worst current a decoded ON collector sinks from Rp at rest, A (it is the only low one).
    pub gate_sink_current_a: f64,
    /// That over the nominal ON collector current.
    pub gate_sink_share: f64,
    /// The load to put on each decoded stage's Q collector for its DC analysis.
    pub decode_load: Load,
    pub timeline: ResetTimeline,
    pub race: RaceCheck,
    /// True when the race is won, the reset diodes are off at rest and the gate's sink stays
    /// within `RESET_SINK_SHARE_MAX`.
    pub passes: bool,
    /// What fails and what to change (empty when it passes).
    pub problems: Vec<String>,
    pub notes: Vec<String>,
}

fn unbuildable(reason: String) -> ChainError {
    ChainError::ResetUnbuildable { reason }
}

/// Time for an exponential from `start` towards `target` to reach `level`; `None` if it never does.
fn time_to(start: f64, target: f64, level: f64, time_constant_s: f64) -> Option<f64> {
    let ratio = (target - start) / (target - level);
    (ratio.is_finite() && ratio >= 1.0).then(|| time_constant_s * ratio.ln())
}

/// Node levels that follow from the values (independent of Ch).
struct Levels {
    rest: f64,
    on: f64,
    drive: f64,
    asserted: f64,
    idle_target: f64,
}

fn node_levels(values: &ResetValues, levels: &ResetLevels, stage: &ResetStage, stage_count: u32) -> Levels {
    let forward = stage.devices.diode_forward_v;
    let (rp, rr, rx) = (values.pull_up_ohm, values.divider_upper_ohm, values.divider_lower_ohm);
    let ratio = rx / (rr + rx);
    let ret = levels.base_return_v;
    let knee = levels.knee_v;
    let source_v = levels.supply_min_v - forward;
    let need = f64::from(stage_count) * levels.reset_current_per_stage_a;
    Levels {
        rest: levels.on_collector_v,
        on: ret + (knee - ret) / ratio,
        drive: knee + rr * (need + (knee - ret) / rx),
        // With the diodes conducting, X is clamped at the knee: H sees Rp from the source
        // and Rr to the knee.
        asserted: (source_v / rp + knee / rr) / (1.0 / rp + 1.0 / rr),
        // Before they conduct, H sees Rp and the whole divider to the base return.
        idle_target: (source_v / rp + ret / (rr + rx)) / (1.0 / rp + 1.0 / (rr + rx)),
    }
}

/// Times one reset with given values; `None` when the values cannot drive the reset at all.
fn timeline(
    values: &ResetValues,
    levels: &ResetLevels,
    stage: &ResetStage,
    stage_count: u32,
    timing: &StageTiming,
) -> Option<(ResetTimeline, RaceCheck)> {
    let l = node_levels(values, levels, stage, stage_count);
    let (rp, rr, rx) = (values.pull_up_ohm, values.divider_upper_ohm, values.divider_lower_ohm);
    let knee = levels.knee_v;
    if !(l.asserted > l.drive && l.idle_target > l.on && l.on > knee) {
        return None;
    }
    let capacitance = values.hold_capacitor_f + stage.devices.diode_capacitance_f;
    let tau_idle = capacitance / (1.0 / rp + 1.0 / (rr + rx));
    let tau_charge = capacitance / (1.0 / rp + 1.0 / rr);
    let tau_hold = capacitance * rr;
    let to_conduction = if l.rest < l.on { time_to(l.rest, l.idle_target, l.on, tau_idle)? } else { 0.0 };
    let to_drive = time_to(l.on.max(l.rest), l.asserted, l.drive, tau_charge)?;
    let assert_s = to_conduction + to_drive;
    let gate_removal_s = timing.fastest(timing.reset_output_fall_s);
    let at_removal = l.asserted - (l.asserted - l.drive) * (-gate_removal_s / tau_charge).exp();
    let hold_after_removal_s = time_to(at_removal, knee, l.drive, tau_hold).unwrap_or(0.0);
    let release_after_removal_s = time_to(at_removal, knee, l.on, tau_hold).unwrap_or(0.0);
    let needed = timing.slowest(timing.reset_clear_s) + timing.slowest(timing.trigger_pulse_s);
    let required_hold_s = RESET_RACE_SAFETY * needed;
    let available_hold_s = gate_removal_s + hold_after_removal_s;
    // As Ch grows, H reaches less far before removal and decays more slowly; the product
    // tends to this limit (the charge Rp can deliver before the gate is removed).
    let most_hold_s = gate_removal_s * (1.0 + (1.0 + rr / rp) * (l.asserted - l.drive) / (l.drive - knee));
    let ret = levels.base_return_v;
    let rest_bus = ret + (l.rest - ret) * rx / (rr + rx);
    let rest_reverse_margin_v = levels.off_base_max_v + stage.devices.diode_forward_v - rest_bus;
    let need = f64::from(stage_count) * levels.reset_current_per_stage_a;
    let drive_ratio = ((l.asserted - knee) / rr - (knee - ret) / rx) / need;
    Some((
        ResetTimeline {
            rest_hold_v: l.rest,
            conduction_hold_v: l.on,
            drive_hold_v: l.drive,
            asserted_hold_v: l.asserted,
            drive_ratio,
            rest_reverse_margin_v,
            assert_s,
            hold_at_removal_v: at_removal,
            hold_after_removal_s,
            release_after_removal_s,
            reset_cycle_s: assert_s + (gate_removal_s + release_after_removal_s).max(needed),
            recovery_time_constant_s: capacitance * (rr + rx),
        },
        RaceCheck {
            gate_removal_s,
            required_hold_s,
            available_hold_s,
            most_hold_s,
            won: available_hold_s >= required_hold_s && rest_reverse_margin_v > 0.0,
            condition: format!(
                "t(fall, fastest decoded) + t(hold by Ch) ≥ {RESET_RACE_SAFETY} × (t(clear, slowest) + t(trigger pulse, slowest)): the gate removes itself when the first decoded output falls, and Ch must keep every stage driven until the slowest has latched in 0 and the edges its clearing sends on have passed"
            ),
        },
    ))
}

/// Bounds of the hold-capacitor search, F.
pub(super) const HOLD_CAPACITOR_MIN_F: f64 = 1e-13;
pub(super) const HOLD_CAPACITOR_MAX_F: f64 = 1e-5;
const HOLD_SEARCH_ITERATIONS: usize = 80;

/// Designs the reset of a reset-on-count plan for chains of identical stages.
///
/// Steps: the divider ratio from the rest condition (X at rest a margin below conduction into
/// the highest OFF base); H at assertion half-way (`RESET_HEADROOM_SHARE`) between the level
/// where the reset diodes begin to conduct and the gate's ceiling (the lower of VCC − VF and
/// the lowest OFF collector, where the decoding diodes would start to conduct); Rr for
/// `RESET_DRIVE_SAFETY` times the base current of every stage at that level; Rp to hold H
/// there; Ch, the smallest preferred value that wins the race (or, when none can, one close to
/// the most any can give). Values are rounded down in the preferred series (more drive), then
/// the whole network is evaluated as built; what fails is listed in `problems`.
pub fn design_reset_network(
    plan: &MethodPlan,
    stage: &ResetStage,
    timing: &StageTiming,
) -> Result<ResetNetwork, ChainError> {
    let Method::ResetOnCount { .. } = &plan.method else {
        return Err(ChainError::WrongMethod { expected: MethodKind::ResetOnCount, got: plan.method.kind() });
    };
    timing.validate()?;
    let levels = reset_levels(stage)?;
    let stage_count = u32::try_from(plan.stages.len()).unwrap_or(u32::MAX);
    let forward = stage.devices.diode_forward_v;
    let ret = levels.base_return_v;
    let knee = levels.knee_v;
    let rest = levels.on_collector_v;
    let ceiling = (levels.supply_min_v - forward).min(levels.off_collector_min_v);
    let ratio_rest = (levels.off_base_max_v + forward - RESET_REST_MARGIN_V - ret) / (rest - ret);
    if !(ratio_rest > 0.0) {
        return Err(unbuildable(format!(
            "the OFF bases sit at {:.3} V, too close to the base return ({ret:.3} V) for a reset divider to keep the reset diodes off: raise R2 or the bias rail",
            levels.off_base_max_v
        )));
    }
    let ratio = ratio_rest.min(RESET_DIVIDER_RATIO_MAX);
    // H at which the unloaded divider puts X at the knee: the reset diodes start to conduct.
    let conduction = ret + (knee - ret) / ratio;
    if !(ceiling > conduction) {
        return Err(unbuildable(format!(
            "the reset diodes conduct only with H above {conduction:.3} V but the gate rises to {ceiling:.3} V at most (the decoding diodes clamp it a diode above the lowest OFF collector): raise the collector supply or lower the bias rail"
        )));
    }
    let asserted = conduction + RESET_HEADROOM_SHARE * (ceiling - conduction);
    let need = f64::from(stage_count) * levels.reset_current_per_stage_a;
    // Above the conduction level, every volt on H drives 1/Rr into the bases.
    let rr = (asserted - conduction) / (RESET_DRIVE_SAFETY * need);
    let rx = rr * ratio / (1.0 - ratio);
    let rp = (levels.supply_min_v - forward - asserted) * rr / (asserted - knee);
    let series_r = stage.resistor_series;
    // Rounding down keeps the drive; Rx rounds down too, which lowers X at rest.
    let rounded = |value: f64, field: &str| {
        series_r.next_down(value).map_err(|_| {
            unbuildable(format!(
                "{field} of {value:.4e} Ω is outside the preferred values: check the stage's resistors"
            ))
        })
    };
    let mut values = ResetValues {
        pull_up_ohm: rounded(rp, "Rp")?,
        divider_upper_ohm: rounded(rr, "Rr")?,
        divider_lower_ohm: rounded(rx, "Rx")?,
        hold_capacitor_f: 0.0,
    };
    let available = |capacitor_f: f64| {
        let trial = ResetValues { hold_capacitor_f: capacitor_f, ..values };
        timeline(&trial, &levels, stage, stage_count, timing).map(|(_, race)| race)
    };
    let Some(race_small) = available(HOLD_CAPACITOR_MIN_F) else {
        return Err(unbuildable(
            "with preferred values the reset no longer drives every stage: use a finer resistor series"
                .to_string(),
        ));
    };
    let target_s = if race_small.most_hold_s > race_small.required_hold_s {
        race_small.required_hold_s
    } else {
        // Cannot be won: come within a tenth of the limit (more Ch only lengthens the cycle).
        race_small.gate_removal_s + 0.9 * (race_small.most_hold_s - race_small.gate_removal_s)
    };
    let exact_c = smallest_hold_capacitor(&race_small, target_s, available);
    values.hold_capacitor_f = stage.capacitor_series.next_up(exact_c).unwrap_or(exact_c);
    evaluate_reset_network(plan, stage, timing, &values)
}

/// The smallest hold capacitor (between the search bounds, by bisection in log space) whose
/// race gives at least `target_s` of hold; `race_small` is the race at the smallest one and
/// `race_with` the race at any capacitance (`None` where the network cannot be worked out).
pub(super) fn smallest_hold_capacitor(
    race_small: &RaceCheck,
    target_s: f64,
    race_with: impl Fn(f64) -> Option<RaceCheck>,
) -> f64 {
    if race_small.available_hold_s >= target_s {
        return HOLD_CAPACITOR_MIN_F;
    }
    let shortfall = |log_c: f64| race_with(10f64.powf(log_c)).map_or(-1.0, |r| r.available_hold_s - target_s);
    bisect(
        shortfall,
        HOLD_CAPACITOR_MIN_F.log10(),
        HOLD_CAPACITOR_MAX_F.log10(),
        1e-4,
        HOLD_SEARCH_ITERATIONS,
    )
    .map_or(HOLD_CAPACITOR_MAX_F, |log_c| 10f64.powf(log_c))
}

/// Checks given reset values against a plan, a stage and its timing: the levels, the
/// timeline, the race and the load on the decoded stages.
pub fn evaluate_reset_network(
    plan: &MethodPlan,
    stage: &ResetStage,
    timing: &StageTiming,
    values: &ResetValues,
) -> Result<ResetNetwork, ChainError> {
    let Method::ResetOnCount { decoded_stages } = &plan.method else {
        return Err(ChainError::WrongMethod { expected: MethodKind::ResetOnCount, got: plan.method.kind() });
    };
    timing.validate()?;
    check_range("reset.pull_up_ohm", values.pull_up_ohm, 1.0, 1e9, "ohms")?;
    check_range("reset.divider_upper_ohm", values.divider_upper_ohm, 1.0, 1e9, "ohms")?;
    check_range("reset.divider_lower_ohm", values.divider_lower_ohm, 1.0, 1e9, "ohms")?;
    check_range("reset.hold_capacitor_f", values.hold_capacitor_f, 0.0, 1e-3, "farads")?;
    let levels = reset_levels(stage)?;
    let stage_count = u32::try_from(plan.stages.len()).unwrap_or(u32::MAX);
    let Some((timeline, race)) = timeline(values, &levels, stage, stage_count, timing) else {
        return Err(unbuildable(
            "these values do not lift the reset bus far enough to drive every stage: lower Rp or Rr"
                .to_string(),
        ));
    };
    let forward = stage.devices.diode_forward_v;
    let low = 1.0 - stage.devices.resistor_tolerance;
    let gate_sink_current_a =
        ((levels.supply_max_v - forward - levels.on_collector_v) / (values.pull_up_ohm * low)).max(0.0);
    let gate_sink_share = if levels.on_collector_current_a > 0.0 {
        gate_sink_current_a / levels.on_collector_current_a
    } else {
        f64::INFINITY
    };
    let notes = vec![
        format!(
            "design choices: reset drive ×{RESET_DRIVE_SAFETY}, {:.0} % of the headroom across Rp, reset diodes {RESET_REST_MARGIN_V} V below conduction at rest, race safety ×{RESET_RACE_SAFETY}, gate sink at most {:.0} % of the collector current",
            100.0 * RESET_HEADROOM_SHARE,
            100.0 * RESET_SINK_SHARE_MAX
        ),
        "the reset current shares among the stages' Q2 bases; every stage is cleared, so the edges that the decoded stages' clearing sends on are overridden".to_string(),
        "t(fall) comes from the stage's own base drive: the reset drives Q2 harder, so the gate is removed sooner and the race is tighter than computed; confirm it in a transient simulation".to_string(),
        "the decoding load is modelled as Rp to VCC − VF on each decoded Q: exact while that output is the only low one, a small error while it is high; run the stage analysis with the chain loads (chain::loads) to check the decoded stages".to_string(),
    ];
    let mut problems = Vec::new();
    if gate_sink_share > RESET_SINK_SHARE_MAX {
        problems.push(format!(
            "at rest a decoded stage sinks {} from Rp, {:.0} % of its collector current: a passive gate cannot give {stage_count} stages {} of reset current each without overloading the decoded stages; buffer the gate with a reset driver transistor, or use the feedback method",
            crate::units::format_quantity(gate_sink_current_a, crate::units::Unit::Ampere),
            100.0 * gate_sink_share,
            crate::units::format_quantity(levels.reset_current_per_stage_a, crate::units::Unit::Ampere)
        ));
    }
    if !(race.available_hold_s >= race.required_hold_s) {
        problems.push(format!(
            "the race is lost: the reset holds {} of the {} needed, and no hold capacitor can give more than {} with this Rp (Ch charges only until the gate removes itself); shorten the stages' storage (less overdrive) and the trigger pulse (smaller Rt·Ct), drive the reset from a pulse-forming stage, or use the feedback method",
            crate::units::format_quantity(race.available_hold_s, crate::units::Unit::Second),
            crate::units::format_quantity(race.required_hold_s, crate::units::Unit::Second),
            crate::units::format_quantity(race.most_hold_s, crate::units::Unit::Second)
        ));
    }
    if !(timeline.rest_reverse_margin_v > 0.0) {
        problems.push(
            "at rest the reset bus would conduct into the OFF bases: raise Rr relative to Rx".to_string(),
        );
    }
    if !(timeline.drive_ratio >= 1.0) {
        problems.push(format!(
            "the reset gives the bases only {:.2} of the current they need: lower Rr or Rp",
            timeline.drive_ratio
        ));
    }
    Ok(ResetNetwork {
        decoded_stages: decoded_stages.clone(),
        stage_count,
        values: *values,
        levels,
        gate_sink_current_a,
        gate_sink_share,
        decode_load: Load::Resistance {
            resistance_ohm: values.pull_up_ohm,
            return_v: levels.supply_nominal_v - forward,
        },
        timeline,
        race,
        passes: problems.is_empty(),
        problems,
        notes,
    })
}

/// Designs the reset of a chain plan's reset-on-count method for a validated stage design.
pub fn design_reset_for_stage(
    plan: &ChainPlan,
    design: &StageDesign,
    timing: &StageTiming,
) -> Result<ResetNetwork, ChainError> {
    let method = plan.method(MethodKind::ResetOnCount).ok_or(ChainError::WrongMethod {
        expected: MethodKind::ResetOnCount,
        got: MethodKind::PlainBinary,
    })?;
    design_reset_network(method, &ResetStage::from_design(design), timing)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn time_to_a_level_of_an_exponential() {
        // From 0 towards 1 with τ = 1 s, the level 1 − 1/e is reached after exactly 1 s.
        let t = time_to(0.0, 1.0, 1.0 - (-1.0f64).exp(), 1.0).unwrap_or(f64::NAN);
        assert!((t - 1.0).abs() < 1e-12, "{t}");
        assert_eq!(time_to(0.0, 1.0, 1.5, 1.0), None);
    }
}
