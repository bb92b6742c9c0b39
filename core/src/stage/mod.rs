//! One saturated collector-coupled bistable stage: its description, validation, and the
//! analyses built on it (DC states, margins, worst case, switching, triggering, synthesis).
//!
//! Circuit (NPN frame; a PNP stage is the exact mirror with every voltage negated):
//! Q1, Q2 with collector resistors RC to the collector supply; each collector drives the
//! other base through the cross resistor R1, bridged by the commutating capacitor C1; each
//! base returns through R2 to the bias rail (−VBB) in fixed bias, or to ground with a
//! common, bypassed emitter resistor RE in self bias. Toggle triggering goes through
//! steering diodes fed by trigger capacitors Ct with bias resistors Rt.

pub mod analysis;
pub mod exact;
pub mod handbook;
pub mod margins;
pub mod network;
pub mod switching;
pub mod synthesis;
pub mod worst_case;

use serde::{Deserialize, Serialize};

use crate::device::{DiodeDatasheet, TransistorDatasheet};
use crate::units::ESeries;

/// How the OFF transistor is held off.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum BiasScheme {
    /// R2 returns to a separate bias rail of opposite polarity to the collector supply.
    Fixed,
    /// R2 returns to ground; a common emitter resistor RE (bypassed) lifts both emitters.
    SelfBias,
}

/// Where the steering diodes deliver the trigger.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Steering {
    /// One Ct, Rt and diode per side; the diode pulls the ON base, Rt biases it from its own
    /// collector. Needs less trigger amplitude.
    Base,
    /// One common Ct; diodes from each collector to a node biased to the supply through Rt;
    /// the trigger pulls the OFF collector down and C1 carries the step to the ON base.
    Collector,
}

/// The toggle trigger network.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct TriggerNetwork {
    pub steering: Steering,
    pub trigger_capacitor_f: f64,
    pub trigger_resistor_ohm: f64,
}

/// A load on one output (collector), NPN frame.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Load {
    None,
    /// A resistance from the collector to a fixed voltage (0 for ground).
    Resistance {
        resistance_ohm: f64,
        return_v: f64,
    },
    /// A constant current drawn out of the collector node (negative: pushed in).
    Current {
        current_a: f64,
    },
}

/// The component values of one stage (both halves equal, as built).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct StageValues {
    pub bias: BiasScheme,
    pub collector_resistor_ohm: f64,
    pub cross_resistor_ohm: f64,
    pub base_resistor_ohm: f64,
    /// Common emitter resistor, self bias only (0 in fixed bias).
    #[serde(default)]
    pub emitter_resistor_ohm: f64,
    /// Emitter bypass capacitor, self bias only (0 in fixed bias).
    #[serde(default)]
    pub emitter_bypass_capacitor_f: f64,
    pub commutating_capacitor_f: f64,
    #[serde(default)]
    pub trigger: Option<TriggerNetwork>,
}

/// Supply rails, as magnitudes in the NPN frame.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Supplies {
    /// Collector supply magnitude, V (positive for NPN, negative rail for PNP).
    pub collector_supply_v: f64,
    /// Bias rail magnitude of opposite polarity, V (fixed bias; 0 in self bias).
    pub bias_supply_v: f64,
    /// Fractional tolerance of both rails (0.05 = ±5 %).
    pub tolerance: f64,
}

/// Tolerances and temperature range the design must hold over.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Conditions {
    pub t_min_c: f64,
    pub t_max_c: f64,
    pub resistor_tolerance: f64,
    pub capacitor_tolerance: f64,
}

/// What the stage must achieve; thresholds of the margins and inputs of synthesis.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Requirements {
    /// ON collector current to design for, A (synthesis; `None` uses the power budget).
    pub collector_current_a: Option<f64>,
    /// Total supply power budget of the stage, W (synthesis, when no current is given).
    pub power_budget_w: Option<f64>,
    /// Overdrive factor synthesis aims for at minimum hFE and worst temperature.
    pub target_overdrive: f64,
    /// Worst-case overdrive below which the stage fails.
    pub min_overdrive: f64,
    /// Worst-case volts the OFF base must sit below cut-off.
    pub min_cutoff_margin_v: f64,
    /// Loop gain at the symmetric point below which the stage is not reliably bistable.
    pub min_loop_gain: f64,
    /// Worst-case output swing required, V.
    pub min_output_swing_v: f64,
    /// Input (trigger) rate the stage must toggle at, Hz.
    pub toggle_rate_hz: f64,
    /// Factor by which the estimated maximum toggle rate must exceed `toggle_rate_hz`.
    pub toggle_rate_margin: f64,
    /// Trigger amplitude available at the input, V (`None`: the stage's own swing, as when
    /// driven by an identical stage).
    pub trigger_amplitude_v: Option<f64>,
    pub steering: Steering,
    pub bias: BiasScheme,
    /// Divider (R2) current as a fraction of the collector current in synthesis (the handbook
    /// procedure's usual 1/10).
    pub divider_current_fraction: f64,
    pub resistor_series: ESeries,
    pub capacitor_series: ESeries,
}

/// Everything needed to analyse one stage.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StageInput {
    pub transistor: TransistorDatasheet,
    pub diode: DiodeDatasheet,
    pub supplies: Supplies,
    pub conditions: Conditions,
    pub requirements: Requirements,
    /// Loads on the outputs of Q1 and Q2.
    pub loads: [Load; 2],
    pub values: StageValues,
}

/// A problem with one field of the input, found by validation.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct FieldError {
    /// Dotted path of the field, as in the design file (`values.cross_resistor_ohm`).
    pub path: String,
    /// What is wrong and what is expected.
    pub message: String,
}

impl std::fmt::Display for FieldError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}: {}", self.path, self.message)
    }
}

/// A stage whose every field passed validation; analyses take only this.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StageDesign {
    input: StageInput,
}

impl StageDesign {
    /// Validates all fields at once; either every field is usable or every problem is listed.
    pub fn new(input: StageInput) -> Result<StageDesign, Vec<FieldError>> {
        let mut problems = Problems { errors: Vec::new(), rules: true };
        validate_requirements(&input, &mut problems);
        validate_values(&input.values, &input.supplies, "values", &mut problems);
        if problems.errors.is_empty() {
            Ok(StageDesign { input })
        } else {
            Err(problems.errors)
        }
    }
    pub fn input(&self) -> &StageInput {
        &self.input
    }
    pub fn values(&self) -> &StageValues {
        &self.input.values
    }
    pub fn transistor(&self) -> &TransistorDatasheet {
        &self.input.transistor
    }
    pub fn diode(&self) -> &DiodeDatasheet {
        &self.input.diode
    }
    /// The same design with other component values (validated again).
    pub fn with_values(&self, values: StageValues) -> Result<StageDesign, Vec<FieldError>> {
        let mut input = self.input.clone();
        input.values = values;
        StageDesign::new(input)
    }
}

/// Where validation puts its problems. `rules` false keeps only the checks of one field on its
/// own (ranges, signs) and leaves out the rules that read another field too: the design file
/// validates a repaired file that way, where the other field may be a stand-in.
pub(crate) struct Problems {
    pub(crate) errors: Vec<FieldError>,
    rules: bool,
}

/// Collects field errors with a path prefix.
pub(crate) struct Checker<'a> {
    problems: &'a mut Problems,
    prefix: String,
}

impl<'a> Checker<'a> {
    pub(crate) fn new(problems: &'a mut Problems, prefix: &str) -> Self {
        Checker { problems, prefix: prefix.to_string() }
    }
    fn push(&mut self, field: &str, message: String) {
        let path =
            if self.prefix.is_empty() { field.to_string() } else { format!("{}.{field}", self.prefix) };
        self.problems.errors.push(FieldError { path, message });
    }
    pub(crate) fn positive(&mut self, field: &str, value: f64, unit: &str) {
        if !(value.is_finite() && value > 0.0) {
            self.push(field, format!("must be a positive number of {unit}, got {value}"));
        }
    }
    pub(crate) fn within(&mut self, field: &str, value: f64, low: f64, high: f64, what: &str) {
        if !(value.is_finite() && value >= low && value <= high) {
            self.push(field, format!("must be {what} between {low} and {high}, got {value}"));
        }
    }
    /// A rule that reads other fields besides `field`.
    pub(crate) fn rule(&mut self, field: &str, holds: bool, message: &str) {
        if !holds && self.problems.rules {
            self.push(field, message.to_string());
        }
    }
}

/// The problems of `input` that each concern one field alone: every range and sign check,
/// none of the rules relating two fields (see [`Problems`]).
pub(crate) fn single_field_problems(input: &StageInput) -> Vec<FieldError> {
    let mut problems = Problems { errors: Vec::new(), rules: false };
    validate_requirements(input, &mut problems);
    validate_values(&input.values, &input.supplies, "values", &mut problems);
    problems.errors
}

fn validate_requirements(input: &StageInput, errors: &mut Problems) {
    validate_transistor(&input.transistor, "transistor", errors);
    validate_diode(&input.diode, "diode", errors);
    let mut check = Checker::new(errors, "supplies");
    let supplies = &input.supplies;
    check.within(
        "collector_supply_v",
        supplies.collector_supply_v,
        0.5,
        1000.0,
        "a supply magnitude in volts",
    );
    check.within("bias_supply_v", supplies.bias_supply_v, 0.0, 1000.0, "a bias-rail magnitude in volts");
    check.within("tolerance", supplies.tolerance, 0.0, 0.3, "a fraction (0.05 = ±5 %)");
    let mut check = Checker::new(errors, "conditions");
    let conditions = &input.conditions;
    check.within("t_min_c", conditions.t_min_c, -70.0, 150.0, "a temperature in °C");
    check.within("t_max_c", conditions.t_max_c, -70.0, 150.0, "a temperature in °C");
    check.rule("t_max_c", conditions.t_max_c >= conditions.t_min_c, "must not be below t_min_c");
    check.within("resistor_tolerance", conditions.resistor_tolerance, 0.0, 0.3, "a fraction");
    check.within("capacitor_tolerance", conditions.capacitor_tolerance, 0.0, 0.5, "a fraction");
    let mut check = Checker::new(errors, "requirements");
    let r = &input.requirements;
    if let Some(current) = r.collector_current_a {
        check.within("collector_current_a", current, 1e-6, 10.0, "a current in amperes");
    }
    if let Some(power) = r.power_budget_w {
        check.within("power_budget_w", power, 1e-6, 100.0, "a power in watts");
    }
    check.within("target_overdrive", r.target_overdrive, 1.0, 20.0, "a factor");
    check.within("min_overdrive", r.min_overdrive, 1.0, 20.0, "a factor");
    check.rule(
        "target_overdrive",
        r.target_overdrive >= r.min_overdrive,
        "must be at least min_overdrive (synthesis aims above the pass threshold)",
    );
    check.within("min_cutoff_margin_v", r.min_cutoff_margin_v, 0.0, 100.0, "volts");
    check.within("min_loop_gain", r.min_loop_gain, 1.0, 1e6, "a gain");
    check.within("min_output_swing_v", r.min_output_swing_v, 0.0, 1000.0, "volts");
    check.within("toggle_rate_hz", r.toggle_rate_hz, 1e-3, 1e10, "a rate in hertz");
    check.within("toggle_rate_margin", r.toggle_rate_margin, 1.0, 100.0, "a factor");
    if let Some(amplitude) = r.trigger_amplitude_v {
        check.within("trigger_amplitude_v", amplitude, 0.01, 1000.0, "volts");
    }
    check.within("divider_current_fraction", r.divider_current_fraction, 0.01, 2.0, "a fraction");
    if r.bias == BiasScheme::Fixed {
        check.rule(
            "bias",
            input.supplies.bias_supply_v > 0.0,
            "fixed bias needs supplies.bias_supply_v above zero; use \"self_bias\" for a single supply",
        );
    }
    for (index, load) in input.loads.iter().enumerate() {
        let mut check = Checker::new(errors, &format!("loads[{index}]"));
        match *load {
            Load::None => {}
            Load::Resistance { resistance_ohm, return_v } => {
                check.positive("resistance_ohm", resistance_ohm, "ohms");
                check.within("return_v", return_v, -1000.0, 1000.0, "volts");
            }
            Load::Current { current_a } => check.within("current_a", current_a, -1.0, 1.0, "amperes"),
        }
    }
}

/// Checks component values against each other and the supplies.
pub(crate) fn validate_values(
    values: &StageValues,
    supplies: &Supplies,
    prefix: &str,
    errors: &mut Problems,
) {
    let mut check = Checker::new(errors, prefix);
    check.within("collector_resistor_ohm", values.collector_resistor_ohm, 1.0, 1e8, "ohms");
    check.within("cross_resistor_ohm", values.cross_resistor_ohm, 1.0, 1e9, "ohms");
    check.within("base_resistor_ohm", values.base_resistor_ohm, 1.0, 1e9, "ohms");
    check.within("commutating_capacitor_f", values.commutating_capacitor_f, 0.0, 1e-3, "farads");
    match values.bias {
        BiasScheme::Fixed => {
            check.rule(
                "emitter_resistor_ohm",
                values.emitter_resistor_ohm == 0.0,
                "must be 0 in fixed bias (emitters are grounded); choose \"self_bias\" to use one",
            );
            check.rule(
                "bias",
                supplies.bias_supply_v > 0.0,
                "fixed bias needs supplies.bias_supply_v above zero",
            );
        }
        BiasScheme::SelfBias => {
            check.within("emitter_resistor_ohm", values.emitter_resistor_ohm, 1.0, 1e7, "ohms");
            check.within("emitter_bypass_capacitor_f", values.emitter_bypass_capacitor_f, 0.0, 1.0, "farads");
        }
    }
    if let Some(trigger) = values.trigger {
        check.within("trigger.trigger_capacitor_f", trigger.trigger_capacitor_f, 1e-15, 1e-3, "farads");
        check.within("trigger.trigger_resistor_ohm", trigger.trigger_resistor_ohm, 1.0, 1e9, "ohms");
    }
}

fn validate_transistor(sheet: &TransistorDatasheet, prefix: &str, errors: &mut Problems) {
    let mut check = Checker::new(errors, prefix);
    check.within("hfe_min", sheet.hfe_min, 1.0, 5000.0, "a current gain");
    check.within("hfe_typ", sheet.hfe_typ, 1.0, 5000.0, "a current gain");
    check.within("hfe_max", sheet.hfe_max, 1.0, 5000.0, "a current gain");
    check.rule(
        "hfe_typ",
        sheet.hfe_min <= sheet.hfe_typ && sheet.hfe_typ <= sheet.hfe_max,
        "hFE values must satisfy hfe_min ≤ hfe_typ ≤ hfe_max",
    );
    check.positive("hfe_test_current_a", sheet.hfe_test_current_a, "amperes");
    check.within("hfe_tempco_per_c", sheet.hfe_tempco_per_c, -0.05, 0.05, "a fraction per °C");
    check.within("vce_sat_typ_v", sheet.vce_sat_typ_v, 0.005, 2.0, "volts");
    check.within("vce_sat_max_v", sheet.vce_sat_max_v, 0.005, 2.0, "volts");
    check.rule("vce_sat_max_v", sheet.vce_sat_max_v >= sheet.vce_sat_typ_v, "must be at least vce_sat_typ_v");
    check.within("vbe_sat_min_v", sheet.vbe_sat_min_v, 0.05, 2.0, "volts");
    check.within("vbe_sat_typ_v", sheet.vbe_sat_typ_v, 0.05, 2.0, "volts");
    check.within("vbe_sat_max_v", sheet.vbe_sat_max_v, 0.05, 2.0, "volts");
    check.rule(
        "vbe_sat_typ_v",
        sheet.vbe_sat_min_v <= sheet.vbe_sat_typ_v && sheet.vbe_sat_typ_v <= sheet.vbe_sat_max_v,
        "VBE(sat) values must satisfy vbe_sat_min_v ≤ vbe_sat_typ_v ≤ vbe_sat_max_v",
    );
    check.within("sat_forced_gain", sheet.sat_forced_gain, 1.0, 100.0, "a forced gain IC/IB");
    check.rule(
        "sat_forced_gain",
        sheet.sat_forced_gain < sheet.hfe_typ,
        "must be below hfe_typ, or the transistor is not saturated at the test point",
    );
    check.positive("sat_test_current_a", sheet.sat_test_current_a, "amperes");
    check.within("vbe_cutoff_v", sheet.vbe_cutoff_v, -2.0, 1.0, "volts");
    check.rule("vbe_cutoff_v", sheet.vbe_cutoff_v < sheet.vbe_sat_min_v, "must be below vbe_sat_min_v");
    check.within("vbe_tempco_v_per_c", sheet.vbe_tempco_v_per_c, -0.01, 0.0, "volts per °C");
    check.within("icbo_25c_a", sheet.icbo_25c_a, 0.0, 1e-2, "amperes");
    check.within("icbo_doubling_c", sheet.icbo_doubling_c, 3.0, 30.0, "°C");
    check.within("ft_hz", sheet.ft_hz, 1e4, 1e11, "hertz");
    check.within("cob_f", sheet.cob_f, 0.0, 1e-8, "farads");
    check.within("cib_f", sheet.cib_f, 0.0, 1e-8, "farads");
    match (sheet.storage_time_constant_s, sheet.storage_test) {
        (Some(tau), _) => check.within("storage_time_constant_s", tau, 1e-12, 1e-3, "seconds"),
        (None, Some(_)) => check.rule(
            "storage_test",
            sheet.storage_time_constant().is_some(),
            "storage test currents must give (IB1 + IB2) > (IC/hFE + IB2); check the datasheet conditions",
        ),
        (None, None) => check.rule(
            "storage_time_constant_s",
            false,
            "give storage_time_constant_s or a storage_test from the datasheet",
        ),
    }
    check.within("vceo_v", sheet.vceo_v, 1.0, 2000.0, "volts");
    check.within("vcbo_v", sheet.vcbo_v, 1.0, 2000.0, "volts");
    check.within("vebo_v", sheet.vebo_v, 0.5, 100.0, "volts");
    check.positive("ic_max_a", sheet.ic_max_a, "amperes");
    check.positive("ptot_w", sheet.ptot_w, "watts");
}

fn validate_diode(sheet: &DiodeDatasheet, prefix: &str, errors: &mut Problems) {
    let mut check = Checker::new(errors, prefix);
    check.within("forward_voltage_v", sheet.forward_voltage_v, 0.05, 3.0, "volts");
    check.positive("forward_test_current_a", sheet.forward_test_current_a, "amperes");
    check.within("emission_coefficient", sheet.emission_coefficient, 0.8, 4.0, "a factor");
    check.within("reverse_leakage_25c_a", sheet.reverse_leakage_25c_a, 0.0, 1e-2, "amperes");
    check.within("leakage_doubling_c", sheet.leakage_doubling_c, 3.0, 30.0, "°C");
    check.within("capacitance_f", sheet.capacitance_f, 0.0, 1e-8, "farads");
    check.within("reverse_recovery_s", sheet.reverse_recovery_s, 0.0, 1e-3, "seconds");
    check.within("piv_v", sheet.piv_v, 1.0, 10000.0, "volts");
    check.positive("if_max_a", sheet.if_max_a, "amperes");
}
