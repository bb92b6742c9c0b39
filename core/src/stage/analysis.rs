//! The complete analysis of one stage: both states by both models, every margin at nominal
//! and worst case with what limits it and what to change, switching estimates and cautions.

use serde::Serialize;

use super::exact::{solve_state, ExactState};
use super::handbook::StateAnalysis;
use super::margins::{evaluate_corner, required_value, CornerMetrics, MarginKind};
use super::network::{Corner, StageNetwork};
use super::switching::{estimate, PassiveScale, SwitchingEstimate};
use super::worst_case::{self, models_at, nominal_temperature_c, Parameter, Setting, WorstCaseReport};
use super::{BiasScheme, StageDesign};
use crate::device::ebers_moll::{Derivation, EbersMoll};
use crate::device::Material;

/// Why an analysis could not be completed.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum AnalysisError {
    /// Occurs when the Ebers–Moll model cannot be derived from the datasheet values.
    ModelDerivation { reason: String },
    /// Occurs when the nominal network cannot be solved even with the piecewise model.
    NominalUnsolvable { reason: String },
}

impl std::fmt::Display for AnalysisError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            AnalysisError::ModelDerivation { reason } => {
                write!(f, "cannot derive the Ebers–Moll model: {reason}")
            }
            AnalysisError::NominalUnsolvable { reason } => {
                write!(f, "cannot solve the nominal stage: {reason}")
            }
        }
    }
}

impl std::error::Error for AnalysisError {}

/// One margin as reported.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MarginReport {
    pub kind: MarginKind,
    pub title: String,
    pub unit: String,
    pub nominal: f64,
    pub worst: f64,
    pub required: f64,
    pub pass: bool,
    /// Human-readable settings of the worst corner ("hFE of Q2: low").
    pub worst_corner: Vec<String>,
    /// What limits this margin most at its worst corner.
    pub limiting: Vec<String>,
    /// What to change when it fails (empty when it passes).
    pub advice: String,
}

/// Difference between the handbook and exact states.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ModelAgreement {
    /// Largest node-voltage difference, V.
    pub max_node_difference_v: f64,
    /// Relative difference of the ON collector current.
    pub collector_current_relative: f64,
}

/// The full result.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StageReport {
    /// +1 NPN, −1 PNP: voltages and currents below are real (already multiplied by it).
    pub polarity_sign: f64,
    pub nominal_temperature_c: f64,
    pub model: Derivation,
    /// Piecewise (handbook) states: index 0 has Q1 ON, index 1 has Q2 ON.
    pub handbook_states: Vec<StateAnalysis>,
    /// Exact states, or why each could not be found.
    pub exact_states: Vec<Result<ExactState, String>>,
    pub agreement: Vec<Option<ModelAgreement>>,
    pub margins: Vec<MarginReport>,
    pub all_pass: bool,
    pub switching: SwitchingEstimate,
    /// Toggle-rate estimate at the slow tolerance corner, Hz.
    pub worst_max_toggle_rate_hz: f64,
    pub worst_case: WorstCaseReport,
    pub nominal_metrics: CornerMetrics,
    pub cautions: Vec<String>,
    pub notes: Vec<String>,
}

fn setting_word(setting: Setting) -> &'static str {
    match setting {
        Setting::Low => "low",
        Setting::Nominal => "nominal",
        Setting::High => "high",
    }
}

fn advice(kind: MarginKind, limiting: &[(Parameter, f64)], design: &StageDesign) -> String {
    let top = limiting.first().map(|(p, _)| p.label()).unwrap_or_else(|| "the tolerances".to_string());
    match kind {
        MarginKind::Overdrive => format!(
            "lower R1 (more base drive) or raise RC (less collector current), or fit a transistor with higher hFE(min); most limiting: {top}"
        ),
        MarginKind::Cutoff => match design.values().bias {
            BiasScheme::Fixed => format!(
                "lower R2 or raise the bias supply to hold the OFF base further down; leakage at the highest temperature counts here; most limiting: {top}"
            ),
            BiasScheme::SelfBias => format!("raise RE (higher emitter level) or lower R2; most limiting: {top}"),
        },
        MarginKind::LoopGain => format!(
            "the middle point is not regenerative enough: reduce the bias (raise R2) or the loading of the collectors, or fit a transistor with more gain; most limiting: {top}"
        ),
        MarginKind::OutputSwing => format!("raise R1 and R2 together (less loading of the OFF collector) or raise the supply; most limiting: {top}"),
        MarginKind::ReverseBaseEmitter => "reduce the bias supply or C1, add a clamp diode from base to emitter, or fit a transistor with a higher VEBO".to_string(),
        MarginKind::CollectorEmitterVoltage => "fit a transistor with a higher VCEO or lower the supply".to_string(),
        MarginKind::CollectorBaseVoltage => {
            "fit a transistor with a higher VCBO, lower the supply or the bias rail, or reduce C1".to_string()
        }
        MarginKind::CollectorCurrent => "raise RC to lower the collector current, or fit a transistor rated for more current".to_string(),
        MarginKind::TransistorDissipation => "raise RC (less current) or fit a transistor with a higher Ptot; check the derating at the highest temperature".to_string(),
        MarginKind::ToggleRate => "lower C1 or R1∥R2 (raise the stage current), shorten the trigger network's recovery (smaller Rt·Ct), or fit a faster transistor".to_string(),
        MarginKind::TriggerAmplitude => "raise Ct, use base steering, or supply a larger trigger".to_string(),
    }
}

/// Analyses a validated stage.
pub fn analyse(design: &StageDesign) -> Result<StageReport, AnalysisError> {
    let sheet = design.transistor();
    let derivation = EbersMoll::from_datasheet(sheet).ok_or_else(|| AnalysisError::ModelDerivation {
        reason: "the saturation or storage data are inconsistent (see the datasheet fields)".to_string(),
    })?;
    let t_nominal = nominal_temperature_c(design);
    let corner = Corner::nominal(design, t_nominal);
    let (nominal_metrics, states) = evaluate_corner(design, &corner)
        .map_err(|e| AnalysisError::NominalUnsolvable { reason: e.to_string() })?;
    let network = StageNetwork::build(design, &corner);
    let models = models_at(design, &derivation.model, &corner);
    let diode = network.diode_law;
    let mut exact_states = Vec::new();
    let mut agreement = Vec::new();
    for state in &states {
        match solve_state(&network, &models, &diode, state) {
            Ok(exact) => {
                let max_node_difference_v = state
                    .node_voltages
                    .iter()
                    .zip(&exact.node_voltages)
                    .filter(|((name, _), _)| !name.starts_with('S'))
                    .map(|((_, a), (_, b))| (a - b).abs())
                    .fold(0.0, f64::max);
                let ic_exact = exact.collector_current_a[state.on_side];
                agreement.push(Some(ModelAgreement {
                    max_node_difference_v,
                    collector_current_relative: (ic_exact - state.on_collector_current_a)
                        / state.on_collector_current_a,
                }));
                exact_states.push(Ok(exact));
            }
            Err(e) => {
                agreement.push(None);
                exact_states.push(Err(e.to_string()));
            }
        }
    }
    let worst_case = worst_case::analyse(design, &derivation.model)
        .map_err(|e| AnalysisError::NominalUnsolvable { reason: e.to_string() })?;
    let mut margins = Vec::new();
    for wc in &worst_case.margins {
        let required = required_value(wc.kind, design);
        let pass = wc.worst >= required && wc.worst.is_finite();
        margins.push(MarginReport {
            kind: wc.kind,
            title: wc.kind.title().to_string(),
            unit: wc.kind.unit().to_string(),
            nominal: wc.nominal,
            worst: wc.worst,
            required,
            pass,
            worst_corner: wc
                .corner
                .iter()
                .map(|(p, s)| format!("{}: {}", p.label(), setting_word(*s)))
                .collect(),
            // Parameters whose other end would help noticeably, with that gain in the margin's
            // own unit; a gain below 0.1 % of the worst value is noise, not a limit.
            limiting: wc
                .limiting
                .iter()
                .filter(|(_, gain)| *gain > 1e-3 * wc.worst.abs().max(1e-12))
                .map(|(p, gain)| {
                    let amount = match crate::units::Unit::from_symbol(wc.kind.unit()) {
                        Some(unit) => crate::units::format_quantity(*gain, unit),
                        None => format!("{gain:.3}"),
                    };
                    format!(
                        "{} (at the other end of its range the margin would be {amount} larger)",
                        p.label()
                    )
                })
                .collect(),
            advice: if pass { String::new() } else { advice(wc.kind, &wc.limiting, design) },
        });
    }
    // Switching and rate: nominal estimate, and the slow corner (passives high, hFE both ends).
    let input = design.input();
    let switching = estimate(design, &states[1], PassiveScale::NOMINAL);
    let slow = |hfe_spread: f64| {
        estimate(
            design,
            &states[1],
            PassiveScale {
                resistor: 1.0 + input.conditions.resistor_tolerance,
                capacitor: 1.0 + input.conditions.capacitor_tolerance,
                hfe_spread,
            },
        )
    };
    let slow_estimates = [slow(-1.0), slow(1.0)];
    let worst_max_toggle_rate_hz =
        slow_estimates.iter().map(|e| e.max_toggle_rate_hz).fold(f64::INFINITY, f64::min);
    let required_rate = input.requirements.toggle_rate_hz * input.requirements.toggle_rate_margin;
    let rate_pass = worst_max_toggle_rate_hz >= required_rate;
    margins.push(MarginReport {
        kind: MarginKind::ToggleRate,
        title: MarginKind::ToggleRate.title().to_string(),
        unit: String::new(),
        nominal: switching.max_toggle_rate_hz / required_rate,
        worst: worst_max_toggle_rate_hz / required_rate,
        required: 1.0,
        pass: rate_pass,
        worst_corner: vec![
            "resistors: high".to_string(),
            "capacitors: high".to_string(),
            "hFE: the slower end".to_string(),
        ],
        limiting: vec!["C1·(R1∥R2) recovery and the trigger network's 5·Rt·Ct".to_string()],
        advice: if rate_pass {
            String::new()
        } else {
            format!(
                "estimated maximum {} at the slow corner against {} required ({} × margin {}); {}",
                crate::units::format_quantity(worst_max_toggle_rate_hz, crate::units::Unit::Hertz),
                crate::units::format_quantity(required_rate, crate::units::Unit::Hertz),
                crate::units::format_quantity(input.requirements.toggle_rate_hz, crate::units::Unit::Hertz),
                input.requirements.toggle_rate_margin,
                advice(MarginKind::ToggleRate, &[], design)
            )
        },
    });
    if let Some(min_amplitude) = switching.min_trigger_amplitude_v {
        let worst_min = slow_estimates
            .iter()
            .chain(std::iter::once(&estimate(
                design,
                &states[1],
                PassiveScale {
                    resistor: 1.0,
                    capacitor: 1.0 - input.conditions.capacitor_tolerance,
                    hfe_spread: 1.0,
                },
            )))
            .filter_map(|e| e.min_trigger_amplitude_v)
            .fold(min_amplitude, f64::max);
        let available = switching.available_trigger_amplitude_v;
        // Driven by an identical stage, the trigger at the worst corner is the worst-case swing.
        let worst_available = match input.requirements.trigger_amplitude_v {
            Some(amplitude) => amplitude,
            None => worst_case
                .margins
                .iter()
                .find(|m| m.kind == MarginKind::OutputSwing)
                .map_or(available, |m| m.worst.min(available)),
        };
        let required = required_value(MarginKind::TriggerAmplitude, design);
        let pass = worst_available / worst_min >= required;
        margins.push(MarginReport {
            kind: MarginKind::TriggerAmplitude,
            title: MarginKind::TriggerAmplitude.title().to_string(),
            unit: String::new(),
            nominal: available / min_amplitude,
            worst: worst_available / worst_min,
            required,
            pass,
            worst_corner: vec![
                "Ct: low".to_string(),
                "hFE: high (most stored charge)".to_string(),
                "trigger: the worst-case swing when none is given".to_string(),
            ],
            limiting: vec!["trigger charge through Ct".to_string()],
            advice: if pass { String::new() } else { advice(MarginKind::TriggerAmplitude, &[], design) },
        });
    }
    let all_pass = margins.iter().all(|m| m.pass);
    let sign = sheet.polarity.sign();
    let handbook_states = states.iter().map(|s| mirror_state(s, sign)).collect();
    let exact_states = exact_states.into_iter().map(|r| r.map(|s| mirror_exact(s, sign))).collect();
    let mut notes: Vec<String> = derivation.assumptions.clone();
    if sheet.approximate {
        notes.push(format!("transistor \"{}\" is a generic archetype with approximate values: enter the datasheet of the part you fit", sheet.label));
    }
    if design.diode().approximate {
        notes.push(format!(
            "diode \"{}\" is a generic archetype with approximate values",
            design.diode().label
        ));
    }
    notes.push(
        "the handbook (piecewise) model treats the steering diodes as open; the exact model includes them"
            .to_string(),
    );
    notes.push(
        "switching, toggle-rate and trigger figures are charge-control estimates, not measurements"
            .to_string(),
    );
    Ok(StageReport {
        polarity_sign: sign,
        nominal_temperature_c: t_nominal,
        model: derivation,
        handbook_states,
        exact_states,
        agreement,
        margins,
        all_pass,
        switching,
        worst_max_toggle_rate_hz,
        cautions: cautions(design, &worst_case),
        worst_case,
        nominal_metrics,
        notes,
    })
}

fn mirror_state(state: &StateAnalysis, sign: f64) -> StateAnalysis {
    let mut s = state.clone();
    s.node_voltages.iter_mut().for_each(|(_, v)| *v *= sign);
    s.branch_currents.iter_mut().for_each(|(_, i)| *i *= sign);
    s.on_collector_current_a *= sign;
    s.on_base_current_a *= sign;
    s.off_base_emitter_v *= sign;
    s.on_collector_v *= sign;
    s.off_collector_v *= sign;
    s.off_collector_emitter_v *= sign;
    s.output_swing_v *= sign;
    s
}

fn mirror_exact(state: ExactState, sign: f64) -> ExactState {
    let mut s = state;
    s.node_voltages.iter_mut().for_each(|(_, v)| *v *= sign);
    s.branch_currents.iter_mut().for_each(|(_, i)| *i *= sign);
    s.collector_current_a.iter_mut().for_each(|i| *i *= sign);
    s.base_current_a.iter_mut().for_each(|i| *i *= sign);
    s.diode_currents.iter_mut().for_each(|(_, i)| *i *= sign);
    s.on_collector_emitter_v *= sign;
    s.off_base_emitter_v *= sign;
    s
}

/// The usual cautions that apply to this design.
pub fn cautions(design: &StageDesign, worst: &WorstCaseReport) -> Vec<String> {
    let input = design.input();
    let mut list = Vec::new();
    let total_v = input.supplies.collector_supply_v + input.supplies.bias_supply_v;
    if total_v > 50.0 {
        list.push(format!(
            "the rails span {total_v:.0} V: above about 50 V a shock can be dangerous; follow local electrical codes and licensed practice"
        ));
    }
    list.push("if a rail is derived from the mains, the supply itself is hazardous: build and test it according to local electrical codes and licensed practice".to_string());
    if design.transistor().material == Material::Germanium {
        list.push("germanium leakage rises steeply with temperature: check the cut-off margin at the highest temperature and avoid thermal runaway (never exceed the stated t_max)".to_string());
    }
    let hot: Vec<&str> =
        worst.resistor_dissipation_w.iter().filter(|(_, w)| *w > 0.25).map(|(n, _)| *n).collect();
    if !hot.is_empty() {
        list.push(format!(
            "{} dissipate over 0.25 W and run hot: keep clearance and do not touch in operation",
            hot.join(", ")
        ));
    }
    list.push(
        "inductive loads on the outputs (relays, electromechanical counters) need a flyback diode"
            .to_string(),
    );
    list
}
