//! The reset of a reset-on-count chain with a driver transistor: the diode AND gate and its hold
//! switch a transistor of the stages' own type, which drives every stage to 0; its values, the
//! closed-form timeline, the race, the gate's load on the decoded outputs, and its parts.
//!
//! Why a driver: a passive gate (see [`super::reset`]) must pass the whole reset base current
//! of every stage through its pull-up, and a decoded ON collector sinks that pull-up's current
//! at rest, so for stages of a few milliamperes it overloads the decoded stages and cannot
//! stretch the reset. An emitter follower between the hold node and the reset bus divides the
//! current the gate and the hold capacitor must give by hFE + 1, so the pull-up can be high
//! enough to leave the decoded stages their overdrive and the hold capacitor small enough to
//! charge before the gate removes itself (common practice: buffer a diode gate with a
//! transistor before it drives several loads).
//!
//! Circuit (our own, NPN frame): decoding diodes from the gate node G (anodes) to the Q of
//! every stage that is 1 in N (cathodes); the pull-up Rp from G to the collector supply; the
//! hold diode Dh from G to the hold node H, and the hold capacitor Ch from H to ground. A
//! divider Rr (H to B) and Rx (B to the base return, −VBB or ground) biases the driver's
//! base B; the driver Qr (collector to the supply, emitter on the reset bus X, Re from X to the
//! base return) follows B. From X one series resistor Rs and one reset diode per stage run to
//! that stage's Q2 base, so an asserted bus turns every Q2 on (Q = 0), each with the current
//! Rs sets (the diodes keep the stages apart). At rest a decoded Q is low, H sits at about that
//! level, and the divider keeps X below every OFF Q2 base: the reset diodes are reverse-biased.
//!
//! The race is the passive gate's: the gate removes itself when the fastest decoded Q falls;
//! Dh then blocks and Ch alone keeps the driver on, discharging through Rr into its base
//! current and the divider. The reset must keep every stage driven until the slowest has
//! latched in 0 and the edges its clearing sends on have passed. Each phase is one capacitor
//! with linear branches, so it is a closed-form exponential; the transient simulation
//! (`verify`) is the arbiter.

use serde::{Deserialize, Serialize};

use super::reset::{
    reset_levels, smallest_hold_capacitor, RaceCheck, ResetLevels, ResetStage, ResetTimeline,
    HOLD_CAPACITOR_MAX_F, HOLD_CAPACITOR_MIN_F, RESET_DIVIDER_RATIO_MAX, RESET_HEADROOM_SHARE,
    RESET_RACE_SAFETY, RESET_REST_MARGIN_V, RESET_SINK_SHARE_MAX,
};
use super::timing::StageTiming;
use super::{check_range, ChainError, ChainPlan, Method, MethodKind, MethodPlan};
use crate::stage::{Load, StageDesign};

/// Reset current each stage gets at assertion over what it needs (our choice, as for the
/// passive gate).
pub const DRIVER_DRIVE_SAFETY: f64 = 2.0;
/// Current in the driver's emitter resistor at assertion, as a share of the reset current
/// (our choice: enough to define the bus at rest, little waste).
pub const DRIVER_EMITTER_SHARE: f64 = 0.1;
/// Drops of the driver's base current across the divider (Rr ∥ Rx), as shares of the bus
/// headroom above the knee, tried in order until the gate's load on a decoded stage at rest is
/// within `RESET_SINK_SHARE_MAX` (our choice, from simulation: 0.2 made the demo decade's
/// decoded outputs sink 112 % of their collector current; 0.6 cut it to 36–48 % and every
/// corner still counted right).
pub const DRIVER_DIVIDER_DROP_SHARES: [f64; 5] = [0.6, 0.7, 0.8, 0.85, 0.9];
/// The driver's base–emitter voltage at its rest current, as a share of VBE(sat) (our choice:
/// 0.7 puts a silicon device at about 0.5 V, a germanium one at about 0.2 V; a low value
/// places the bus higher at rest, which is the safe side for the rest margin).
pub const DRIVER_CUT_IN_SHARE: f64 = 0.7;

/// Share of the lift drop Rs·I(lift) by which the bus is taken to rise above the knee before
/// the decoded stages fire (our choice, from simulation, on the conservative side: a decoded
/// stage regenerates before its Q2 base reaches the datasheet's VBE(sat), and at the cold end
/// the piecewise VBE(sat) overstates the base level; with 1.0 the closed form held the slow
/// corner of the demo decade 26 % longer than the simulation, with 0.6 it holds every corner
/// shorter for N = 3 … 60 and within 10 % at the slow corner of N = 100).
pub const DRIVER_FIRE_LIFT_SHARE: f64 = 0.6;

/// Component values of the driven reset network.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct DriverValues {
    /// Rp, gate pull-up to the collector supply.
    pub pull_up_ohm: f64,
    /// Rr, from the hold node H to the driver's base B.
    pub divider_upper_ohm: f64,
    /// Rx, from B to the base return.
    pub divider_lower_ohm: f64,
    /// Ch, from H to ground.
    pub hold_capacitor_f: f64,
    /// Re, from the reset bus X (the driver's emitter) to the base return.
    pub emitter_resistor_ohm: f64,
    /// Rs, in series with each stage's reset diode.
    pub series_resistor_ohm: f64,
}

/// One part of the reset network, for the component table.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ResetPart {
    pub designator: String,
    /// "resistor", "capacitor", "diode", "transistor".
    pub kind: String,
    pub function: String,
    /// Ω or F; none for semiconductors.
    pub value: Option<f64>,
    /// Worst-case dissipation for resistors and the driver, W (zero where not computed).
    pub dissipation_w: f64,
    /// Largest voltage across it, V (capacitor rating, diode PIV, driver VCE).
    pub voltage_v: f64,
    /// Largest current through it, A (diodes and the driver).
    pub current_a: f64,
}

/// The designed driven reset network with its checks.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DrivenResetNetwork {
    pub decoded_stages: Vec<u32>,
    pub stage_count: u32,
    pub values: DriverValues,
    pub levels: ResetLevels,
    /// Worst current a decoded ON collector sinks from Rp at rest, A.
    pub gate_sink_current_a: f64,
    /// That over the nominal ON collector current.
    pub gate_sink_share: f64,
    /// The load to put on each decoded stage's Q collector for its DC analysis.
    pub decode_load: Load,
    /// The hold node's levels and times (H is the hold node; "conduction" is where the reset
    /// diodes begin to conduct, "drive" where every stage gets its reset current).
    pub timeline: ResetTimeline,
    pub race: RaceCheck,
    /// The reset bus level at which every stage gets exactly its reset current, V: the
    /// threshold at which the reset pulse is measured.
    pub bus_drive_v: f64,
    /// The bus level at which the decoded stages fire (their OFF Q2 bases lifted to VBE(sat)
    /// and given what R1 and R2 take there), V.
    pub bus_fire_v: f64,
    /// The reset pulse in closed form: the time the bus stays above the knee (the reset diodes
    /// conduct into the bases), s: from the bus passing the knee, through the decoded stages'
    /// firing and the gate's removal, to the release. This is the pulse the simulation
    /// measures on the bus (at each corner's own knee).
    pub pulse_width_s: f64,
    /// Emitter current of the driver at assertion, and its base current at hFE(min), A.
    pub driver_current_a: f64,
    pub driver_base_current_a: f64,
    pub parts: Vec<ResetPart>,
    /// True when the race is won, the reset diodes are off at rest, every stage is driven and
    /// the gate's sink stays within `RESET_SINK_SHARE_MAX`.
    pub passes: bool,
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

/// The hold node's load through the divider and the driver, linear in H while the branches
/// it assumes conduct: I(H) = slope·H + intercept, with B and X following.
#[derive(Debug, Clone, Copy)]
struct HoldLoad {
    rr: f64,
    g: f64,
    c: f64,
    vbe: f64,
}

impl HoldLoad {
    /// `stages` reset branches conducting into bases at `knee` (0: before they conduct).
    fn new(values: &DriverValues, levels: &ResetLevels, vbe: f64, beta: f64, stages: u32) -> HoldLoad {
        let (rr, rx, re, rs) = (
            values.divider_upper_ohm,
            values.divider_lower_ohm,
            values.emitter_resistor_ohm,
            values.series_resistor_ohm,
        );
        let n = f64::from(stages);
        let ret = levels.base_return_v;
        // Emitter current a·X − b: the conducting reset branches and Re.
        let a = n / rs + 1.0 / re;
        let b = n * levels.knee_v / rs + ret / re;
        let g = 1.0 / rr + a / (beta + 1.0) + 1.0 / rx;
        let c = (a * vbe + b) / (beta + 1.0) + ret / rx;
        HoldLoad { rr, g, c, vbe }
    }
    fn base(&self, hold_v: f64) -> f64 {
        (hold_v / self.rr + self.c) / self.g
    }
    fn bus(&self, hold_v: f64) -> f64 {
        self.base(hold_v) - self.vbe
    }
    /// H for a given bus level.
    fn hold_for_bus(&self, bus_v: f64) -> f64 {
        self.rr * (self.g * (bus_v + self.vbe) - self.c)
    }
    /// dI/dH, S.
    fn slope(&self) -> f64 {
        (1.0 - 1.0 / (self.g * self.rr)) / self.rr
    }
    fn current(&self, hold_v: f64) -> f64 {
        (hold_v - self.base(hold_v)) / self.rr
    }
    /// H at which the load current would vanish (the decay's asymptote).
    fn asymptote(&self) -> f64 {
        let slope = self.slope();
        hold_v_at_zero(self.current(0.0), slope)
    }
    /// Where H settles when fed from `source_v` through `pull_up_ohm`.
    fn fed_level(&self, source_v: f64, pull_up_ohm: f64) -> f64 {
        let intercept = self.current(0.0);
        (source_v / pull_up_ohm - intercept) / (1.0 / pull_up_ohm + self.slope())
    }
}

fn hold_v_at_zero(intercept_a: f64, slope: f64) -> f64 {
    -intercept_a / slope
}

/// The driver's device values: its VBE when conducting hard and its gain (the stages' own
/// transistor at the cold end, as the stage devices give them).
fn driver_device(stage: &ResetStage) -> (f64, f64) {
    (stage.devices.vbe_sat_v, stage.devices.hfe_min)
}

/// Designs the driven reset of a reset-on-count plan for chains of identical stages.
///
/// Steps: the divider ratio from the rest condition (the bus a margin below conduction into
/// the highest OFF base, the driver at its cut-in); H at assertion half-way
/// (`RESET_HEADROOM_SHARE`) between where the reset diodes begin to conduct and the gate's
/// ceiling; Rs for `DRIVER_DRIVE_SAFETY` times each stage's reset current at the bus level
/// that H gives, Re for `DRIVER_EMITTER_SHARE` more; Rr from the driver's base current at
/// hFE(min) so that it drops the first of `DRIVER_DIVIDER_DROP_SHARES` of the headroom that keeps
/// the gate's load within `RESET_SINK_SHARE_MAX`; Rp to hold H there;
/// Ch, the smallest preferred value that wins the race. Resistors are rounded down in the
/// preferred series (more drive), Re up; then the network is evaluated as built.
pub fn design_reset_driver(
    plan: &MethodPlan,
    stage: &ResetStage,
    timing: &StageTiming,
) -> Result<DrivenResetNetwork, ChainError> {
    let Method::ResetOnCount { .. } = &plan.method else {
        return Err(ChainError::WrongMethod { expected: MethodKind::ResetOnCount, got: plan.method.kind() });
    };
    timing.validate()?;
    let levels = reset_levels(stage)?;
    let stage_count = u32::try_from(plan.stages.len()).unwrap_or(u32::MAX);
    let n = f64::from(stage_count);
    let forward = stage.devices.diode_forward_v;
    let (vbe, beta) = driver_device(stage);
    let cut_in = DRIVER_CUT_IN_SHARE * vbe;
    let ret = levels.base_return_v;
    let knee = levels.knee_v;
    let rest = levels.on_collector_v;
    let ceiling = (levels.supply_min_v - forward).min(levels.off_collector_min_v);
    let highest_rest_bus = levels.off_base_max_v + forward - RESET_REST_MARGIN_V;
    let ratio_rest = (highest_rest_bus + cut_in - ret) / (rest - ret);
    if !(ratio_rest > 0.0) {
        return Err(unbuildable(format!(
            "the OFF bases sit at {:.3} V, too close to the base return ({ret:.3} V) for the driver's divider to keep the reset diodes off: raise R2 or the bias rail",
            levels.off_base_max_v
        )));
    }
    let ratio = ratio_rest.min(RESET_DIVIDER_RATIO_MAX);
    let conduction = ret + (knee + vbe - ret) / ratio;
    if !(ceiling > conduction) {
        return Err(unbuildable(format!(
            "the reset diodes conduct only with H above {conduction:.3} V but the gate rises to {ceiling:.3} V at most: raise the collector supply or lower the bias rail"
        )));
    }
    let asserted = conduction + RESET_HEADROOM_SHARE * (ceiling - conduction);
    let need = levels.reset_current_per_stage_a;
    let unloaded_base = ret + (asserted - ret) * ratio;
    let headroom = unloaded_base - vbe - knee;
    let reset_current = n * DRIVER_DRIVE_SAFETY * need;
    let emitter_current = (1.0 + DRIVER_EMITTER_SHARE) * reset_current;
    let base_current = emitter_current / (beta + 1.0);
    let series_r = stage.resistor_series;
    let round = |value: f64, field: &str, up: bool| {
        let rounded = if up { series_r.next_up(value) } else { series_r.next_down(value) };
        rounded.map_err(|_| {
            unbuildable(format!(
                "{field} of {value:.4e} Ω is outside the preferred values: check the stage's resistors"
            ))
        })
    };
    // The values for one divider drop: the softer the divider (the larger its drop), the less
    // standing current H must be fed through Rp, so the higher Rp and the lighter the gate's
    // load on the decoded stages at rest.
    let values_for = |drop_share: f64| -> Result<DriverValues, ChainError> {
        let drop = drop_share * headroom;
        let rr = drop / (ratio * base_current);
        let rx = rr * ratio / (1.0 - ratio);
        let bus = unloaded_base - drop - vbe;
        let rs = (bus - knee) / (DRIVER_DRIVE_SAFETY * need);
        let re = (bus - ret) / (DRIVER_EMITTER_SHARE * reset_current);
        let hold_current = (asserted - (unloaded_base - drop)) / rr;
        let rp = (levels.supply_min_v - forward - asserted) / hold_current;
        Ok(DriverValues {
            pull_up_ohm: round(rp, "Rp", false)?,
            divider_upper_ohm: round(rr, "Rr", false)?,
            divider_lower_ohm: round(rx, "Rx", false)?,
            hold_capacitor_f: 0.0,
            emitter_resistor_ohm: round(re, "Re", true)?,
            series_resistor_ohm: round(rs, "Rs", false)?,
        })
    };
    let mut values = values_for(DRIVER_DIVIDER_DROP_SHARES[0])?;
    for &share in &DRIVER_DIVIDER_DROP_SHARES {
        values = values_for(share)?;
        if gate_sink(&values, &levels, stage).1 <= RESET_SINK_SHARE_MAX {
            break;
        }
    }
    let race_with = |capacitor_f: f64| {
        let trial = DriverValues { hold_capacitor_f: capacitor_f, ..values };
        timeline(&trial, &levels, stage, stage_count, timing).map(|(_, race, _)| race)
    };
    let Some(race_small) = race_with(HOLD_CAPACITOR_MIN_F) else {
        return Err(unbuildable(
            "with preferred values the driver no longer drives every stage: use a finer resistor series"
                .to_string(),
        ));
    };
    let target_s = race_small.required_hold_s;
    let exact_c = smallest_hold_capacitor(&race_small, target_s, race_with);
    values.hold_capacitor_f = stage.capacitor_series.next_up(exact_c).unwrap_or(exact_c);
    evaluate_reset_driver(plan, stage, timing, &values)
}

/// The current a decoded ON collector sinks from Rp at rest (supply high, Rp at its low
/// tolerance), A, and that over the stage's nominal ON collector current.
fn gate_sink(values: &DriverValues, levels: &ResetLevels, stage: &ResetStage) -> (f64, f64) {
    let forward = stage.devices.diode_forward_v;
    let low = 1.0 - stage.devices.resistor_tolerance;
    let current =
        ((levels.supply_max_v - forward - levels.on_collector_v) / (values.pull_up_ohm * low)).max(0.0);
    let share = if levels.on_collector_current_a > 0.0 {
        current / levels.on_collector_current_a
    } else {
        f64::INFINITY
    };
    (current, share)
}

/// What the timeline gives beside the shared structs: the bus drive level and pulse width.
struct Extra {
    bus_drive_v: f64,
    bus_fire_v: f64,
    pulse_width_s: f64,
    driver_current_a: f64,
    driver_base_current_a: f64,
}

/// Times one reset with given values; `None` when the values cannot drive the reset at all.
///
/// The phases follow what the circuit does (seen in the transient simulation of the demo):
/// 1. every decoded output is high: Rp charges Ch; the bus rises and, through the reset
///    diodes, lifts the OFF Q2 bases of the decoded stages along with it (so the stage's own
///    turn-on delay, charging its OFF base from its own network, is spent here);
/// 2. the decoded stages fire when the bus has lifted their Q2 bases to conduction and gives
///    them the current their R1 and R2 take there: bus = knee + s·Rs·I(lift), I(lift) =
///    (VBE − VCE)/R1 + (VE + VBE − V(return))/R2, s = `DRIVER_FIRE_LIFT_SHARE`. The stage
///    regenerates, and its Q falls within one transition (rise and C1 commutation), which
///    removes the gate;
/// 3. Ch alone keeps the driver on while H decays through Rr into the driver and the divider;
///    the reset diodes conduct (the bases are held at 0) while the bus stays above the knee.
///
/// The race: after the gate's removal the bus must stay above the knee until the decoded
/// stages' falling edges have passed their neighbours (one transition) and every stage those
/// edges pushed, and every decoded stage, has latched in 0 (Q1's storage and fall and the
/// transition that latches: `reset_clear_s − reset_output_fall_s` is storage + fall of the
/// stage's estimate, `propagation_delay_s` its transition). After its edge a trigger network
/// draws from the ON base only through Rt from a low collector, well under the reset current,
/// so the trigger's decay (`trigger_pulse_s`) is not part of the race.
fn timeline(
    values: &DriverValues,
    levels: &ResetLevels,
    stage: &ResetStage,
    stage_count: u32,
    timing: &StageTiming,
) -> Option<(ResetTimeline, RaceCheck, Extra)> {
    let forward = stage.devices.diode_forward_v;
    let (vbe, beta) = driver_device(stage);
    let knee = levels.knee_v;
    let need = levels.reset_current_per_stage_a;
    let rp = values.pull_up_ohm;
    let source_v = levels.supply_min_v - forward;
    let ceiling = (levels.supply_min_v - forward).min(levels.off_collector_min_v);
    let idle = HoldLoad::new(values, levels, vbe, beta, 0);
    let driving = HoldLoad::new(values, levels, vbe, beta, stage_count);
    let rest = levels.on_collector_v;
    let on = idle.hold_for_bus(knee);
    let bus_drive_v = knee + values.series_resistor_ohm * need;
    let drive = driving.hold_for_bus(bus_drive_v);
    let bus_fire_v =
        knee + DRIVER_FIRE_LIFT_SHARE * values.series_resistor_ohm * lift_current_a(stage, levels);
    let fire = driving.hold_for_bus(bus_fire_v);
    let asserted = driving.fed_level(source_v, rp).min(ceiling);
    let idle_target = idle.fed_level(source_v, rp);
    let asymptote = driving.asymptote();
    if !(asserted > fire && asserted > drive && idle_target > on && fire > on && fire > asymptote) {
        return None;
    }
    let capacitance = values.hold_capacitor_f + stage.devices.diode_capacitance_f;
    let tau_idle = capacitance / (1.0 / rp + idle.slope());
    let tau_charge = capacitance / (1.0 / rp + driving.slope());
    let tau_hold = capacitance / driving.slope();
    let to_conduction = if rest < on { time_to(rest, idle_target, on, tau_idle)? } else { 0.0 };
    let to_fire = time_to(on.max(rest), asserted, fire, tau_charge)?;
    let assert_s = to_conduction + to_fire;
    let gate_removal_s = timing.fastest(timing.propagation_delay_s);
    let at_removal = asserted - (asserted - fire) * (-gate_removal_s / tau_charge).exp();
    let release_after_removal_s = time_to(at_removal, asymptote, on, tau_hold).unwrap_or(0.0);
    let hold_after_removal_s = time_to(at_removal, asymptote, drive, tau_hold).unwrap_or(0.0);
    let storage_and_fall = (timing.reset_clear_s - timing.reset_output_fall_s).max(0.0);
    let needed = timing.slowest(2.0 * timing.propagation_delay_s + storage_and_fall);
    let required_hold_s = RESET_RACE_SAFETY * needed;
    let available_hold_s = release_after_removal_s;
    // At rest the driver conducts only Re's current, at about its cut-in voltage.
    let rest_bus = idle.base(rest) - DRIVER_CUT_IN_SHARE * vbe;
    let rest_reverse_margin_v = levels.off_base_max_v + forward - rest_bus;
    let bus_asserted = driving.bus(asserted);
    let drive_ratio = (bus_asserted - knee) / values.series_resistor_ohm / need;
    let driver_current_a = f64::from(stage_count) * (bus_asserted - knee) / values.series_resistor_ohm
        + (bus_asserted - levels.base_return_v) / values.emitter_resistor_ohm;
    let conduction_pulse_s = to_fire + gate_removal_s + release_after_removal_s;
    Some((
        ResetTimeline {
            rest_hold_v: rest,
            conduction_hold_v: on,
            drive_hold_v: drive,
            asserted_hold_v: asserted,
            drive_ratio,
            rest_reverse_margin_v,
            assert_s,
            hold_at_removal_v: at_removal,
            hold_after_removal_s,
            release_after_removal_s,
            reset_cycle_s: assert_s + gate_removal_s + release_after_removal_s.max(needed),
            recovery_time_constant_s: tau_idle,
        },
        RaceCheck {
            gate_removal_s,
            required_hold_s,
            available_hold_s,
            // The gate fires at a bus level, not at a time, so the hold grows with Ch (at the
            // cost of a slower assertion): the most is the largest Ch the planner would fit.
            most_hold_s: release_after_removal_s * (HOLD_CAPACITOR_MAX_F + stage.devices.diode_capacitance_f)
                / capacitance,
            won: available_hold_s >= required_hold_s && rest_reverse_margin_v > 0.0,
            condition: format!(
                "t(bus above the knee after the gate's removal) ≥ {RESET_RACE_SAFETY} × (2·t(transition) + t(storage) + t(fall)), slowest stage: the decoded stages fire when the bus has lifted their Q2 bases, the first decoded output to fall removes the gate, and Ch must keep the reset diodes conducting until that edge has passed the next stage and every stage it pushed has latched in 0 again"
            ),
        },
        Extra {
            bus_drive_v,
            bus_fire_v,
            pulse_width_s: conduction_pulse_s,
            driver_current_a,
            driver_base_current_a: driver_current_a / (beta + 1.0),
        },
    ))
}

/// Current an OFF Q2 base takes from a reset diode once lifted to VBE(sat): what R1 carries
/// to the ON Q1's collector and R2 to the base return (the stage's own divider at that level).
fn lift_current_a(stage: &ResetStage, levels: &ResetLevels) -> f64 {
    let v = &stage.values;
    let d = &stage.devices;
    ((d.vbe_sat_v - d.vce_sat_v) / v.cross_resistor_ohm).max(0.0)
        + ((levels.emitter_v + d.vbe_sat_v - levels.base_return_v) / v.base_resistor_ohm).max(0.0)
}

/// Checks given driver values against a plan, a stage and its timing: the levels, the
/// timeline, the race, the gate's load on the decoded stages, and the parts.
pub fn evaluate_reset_driver(
    plan: &MethodPlan,
    stage: &ResetStage,
    timing: &StageTiming,
    values: &DriverValues,
) -> Result<DrivenResetNetwork, ChainError> {
    let Method::ResetOnCount { decoded_stages } = &plan.method else {
        return Err(ChainError::WrongMethod { expected: MethodKind::ResetOnCount, got: plan.method.kind() });
    };
    timing.validate()?;
    check_range("reset.pull_up_ohm", values.pull_up_ohm, 1.0, 1e9, "ohms")?;
    check_range("reset.divider_upper_ohm", values.divider_upper_ohm, 1.0, 1e9, "ohms")?;
    check_range("reset.divider_lower_ohm", values.divider_lower_ohm, 1.0, 1e9, "ohms")?;
    check_range("reset.hold_capacitor_f", values.hold_capacitor_f, 0.0, 1e-3, "farads")?;
    check_range("reset.emitter_resistor_ohm", values.emitter_resistor_ohm, 1.0, 1e9, "ohms")?;
    check_range("reset.series_resistor_ohm", values.series_resistor_ohm, 1.0, 1e9, "ohms")?;
    let levels = reset_levels(stage)?;
    let stage_count = u32::try_from(plan.stages.len()).unwrap_or(u32::MAX);
    let Some((timeline, race, extra)) = timeline(values, &levels, stage, stage_count, timing) else {
        return Err(unbuildable(
            "these values do not lift the reset bus far enough to drive every stage: lower Rp, Rr or Rs, or raise Rx"
                .to_string(),
        ));
    };
    let forward = stage.devices.diode_forward_v;
    let (gate_sink_current_a, gate_sink_share) = gate_sink(values, &levels, stage);
    let mut problems = Vec::new();
    if gate_sink_share > RESET_SINK_SHARE_MAX {
        problems.push(format!(
            "at rest a decoded stage sinks {} from Rp, {:.0} % of its collector current: raise Rp (and Ch with it) or give the driver more gain",
            crate::units::format_quantity(gate_sink_current_a, crate::units::Unit::Ampere),
            100.0 * gate_sink_share
        ));
    }
    if !(race.available_hold_s >= race.required_hold_s) {
        problems.push(format!(
            "the race is lost: after the gate's removal the bus stays above the knee for {} of the {} needed: raise Ch (up to {} with the largest), shorten the stages' storage, or use the feedback method",
            crate::units::format_quantity(race.available_hold_s, crate::units::Unit::Second),
            crate::units::format_quantity(race.required_hold_s, crate::units::Unit::Second),
            crate::units::format_quantity(race.most_hold_s, crate::units::Unit::Second)
        ));
    }
    if !(timeline.rest_reverse_margin_v > 0.0) {
        problems.push(
            "at rest the reset bus would conduct into the OFF bases: lower Rx relative to Rr".to_string(),
        );
    }
    if !(timeline.drive_ratio >= 1.0) {
        problems.push(format!(
            "the driver gives the bases only {:.2} of the current they need: lower Rs or Rr",
            timeline.drive_ratio
        ));
    }
    let notes = vec![
        format!(
            "design choices: stage drive ×{DRIVER_DRIVE_SAFETY}, emitter resistor {:.0} % of the reset current, divider drop the first of {:?} of the bus headroom that keeps the gate's load within {:.0} % of a stage's collector current, driver cut-in {DRIVER_CUT_IN_SHARE} × VBE(sat), race safety ×{RESET_RACE_SAFETY}",
            100.0 * DRIVER_EMITTER_SHARE,
            DRIVER_DIVIDER_DROP_SHARES,
            100.0 * RESET_SINK_SHARE_MAX
        ),
        "the driver is the stages' own transistor at its cold end (lowest hFE, highest VBE); a typical device holds the reset longer".to_string(),
        format!(
            "the decoded stages fire when the bus reaches {:.3} V (their Q2 bases lifted to VBE(sat) against R1 and R2), not at full drive; Ch then holds the bus above the knee {:.3} V",
            extra.bus_fire_v, levels.knee_v
        ),
    ];
    let parts = reset_parts(decoded_stages, stage_count, values, &levels, &extra, forward);
    Ok(DrivenResetNetwork {
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
        bus_drive_v: extra.bus_drive_v,
        bus_fire_v: extra.bus_fire_v,
        pulse_width_s: extra.pulse_width_s,
        driver_current_a: extra.driver_current_a,
        driver_base_current_a: extra.driver_base_current_a,
        parts,
        passes: problems.is_empty(),
        problems,
        notes,
    })
}

/// Designators: the reset network is numbered as stage 9 (R901 …), so it never collides with
/// the stages' own R101 … R899 (common practice numbers by board section). Per-stage parts
/// carry the stage number in their last two digits: R911 is stage 1's Rs, D911 its reset diode,
/// D951 the decoding diode on stage 1.
fn reset_parts(
    decoded: &[u32],
    stage_count: u32,
    values: &DriverValues,
    levels: &ResetLevels,
    extra: &Extra,
    forward: f64,
) -> Vec<ResetPart> {
    let vcc = levels.supply_max_v;
    let ret = levels.base_return_v;
    let span = vcc - ret;
    let resistor = |designator: String, function: &str, value: f64, volts: f64| ResetPart {
        designator,
        kind: "resistor".to_string(),
        function: function.to_string(),
        value: Some(value),
        dissipation_w: volts * volts / value,
        voltage_v: volts,
        current_a: volts / value,
    };
    let diode = |designator: String, function: String, voltage_v: f64, current_a: f64| ResetPart {
        designator,
        kind: "diode".to_string(),
        function,
        value: None,
        dissipation_w: forward * current_a,
        voltage_v,
        current_a,
    };
    let per_stage = extra.driver_current_a / f64::from(stage_count.max(1));
    let mut parts = vec![
        resistor(
            "R901".to_string(),
            "gate pull-up Rp",
            values.pull_up_ohm,
            vcc - levels.on_collector_v - forward,
        ),
        resistor("R902".to_string(), "driver base divider, upper (Rr)", values.divider_upper_ohm, span),
        resistor("R903".to_string(), "driver base divider, lower (Rx)", values.divider_lower_ohm, span),
        resistor("R904".to_string(), "reset bus to the base return (Re)", values.emitter_resistor_ohm, span),
        ResetPart {
            designator: "C901".to_string(),
            kind: "capacitor".to_string(),
            function: "hold capacitor Ch".to_string(),
            value: Some(values.hold_capacitor_f),
            dissipation_w: 0.0,
            voltage_v: vcc,
            current_a: 0.0,
        },
        diode("D901".to_string(), "hold diode Dh".to_string(), vcc, vcc / values.pull_up_ohm),
        ResetPart {
            designator: "Q901".to_string(),
            kind: "transistor".to_string(),
            function: "reset driver (emitter follower, the stages' type)".to_string(),
            value: None,
            dissipation_w: extra.driver_current_a * (vcc - extra.bus_drive_v).max(0.0),
            voltage_v: span,
            current_a: extra.driver_current_a,
        },
    ];
    for stage in 0..stage_count {
        let number = stage + 1;
        parts.push(resistor(
            format!("R9{:02}", 10 + number),
            "reset series resistor Rs",
            values.series_resistor_ohm,
            per_stage * values.series_resistor_ohm,
        ));
        parts.push(diode(
            format!("D9{:02}", 10 + number),
            format!("reset diode into stage {number}'s Q2 base"),
            span,
            per_stage,
        ));
        if decoded.contains(&stage) {
            parts.push(diode(
                format!("D9{:02}", 50 + number),
                format!("decoding diode on stage {number}'s Q"),
                vcc,
                vcc / values.pull_up_ohm,
            ));
        }
    }
    parts
}

/// Designs the driven reset of a chain plan's reset-on-count method for a validated design.
pub fn design_reset_driver_for_stage(
    plan: &ChainPlan,
    design: &StageDesign,
    timing: &StageTiming,
) -> Result<DrivenResetNetwork, ChainError> {
    let method = plan.method(MethodKind::ResetOnCount).ok_or(ChainError::WrongMethod {
        expected: MethodKind::ResetOnCount,
        got: MethodKind::PlainBinary,
    })?;
    design_reset_driver(method, &ResetStage::from_design(design), timing)
}
