//! Worst case over tolerances, supplies, device spread and temperature.
//!
//! Method: for every uncertain parameter, evaluate the stage with that parameter alone at
//! each end of its range (one-at-a-time sensitivities); for each margin, set every parameter
//! to the end that hurt that margin; then refine by coordinate search — flip each parameter
//! (and try the nominal temperature, since temperature effects can cross) and keep any change
//! that makes the margin worse, until a pass changes nothing. A test checks this against
//! exhaustive enumeration of all corners.

use serde::Serialize;

use super::exact::{loop_gain, LoopGain};
use super::margins::{evaluate_corner, margin_value, CornerMetrics, MarginKind, DC_MARGINS};
use super::network::{Corner, SolveError, StageNetwork};
use super::{BiasScheme, Load, StageDesign};
use crate::device::ebers_moll::EbersMoll;

/// One uncertain quantity. Sides are 0 for Q1's half and 1 for Q2's.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(tag = "parameter", content = "side", rename_all = "snake_case")]
pub enum Parameter {
    CollectorResistor(u8),
    CrossResistor(u8),
    BaseResistor(u8),
    EmitterResistor,
    CollectorSupply,
    BiasSupply,
    Hfe(u8),
    VceSat(u8),
    VbeSat(u8),
    Temperature,
    LoadResistance(u8),
    TriggerResistor(u8),
    CommutatingCapacitor(u8),
    TriggerCapacitor(u8),
}

impl Parameter {
    pub fn label(self) -> String {
        match self {
            Parameter::CollectorResistor(s) => format!("RC of Q{}", s + 1),
            Parameter::CrossResistor(s) => format!("R1 from Q{} collector to Q{} base", s + 1, 2 - s),
            Parameter::BaseResistor(s) => format!("R2 of Q{} base", s + 1),
            Parameter::EmitterResistor => "RE".to_string(),
            Parameter::CollectorSupply => "collector supply".to_string(),
            Parameter::BiasSupply => "bias supply".to_string(),
            Parameter::Hfe(s) => format!("hFE of Q{}", s + 1),
            Parameter::VceSat(s) => format!("VCE(sat) of Q{}", s + 1),
            Parameter::VbeSat(s) => format!("VBE(sat) of Q{}", s + 1),
            Parameter::Temperature => "temperature".to_string(),
            Parameter::LoadResistance(s) => format!("load resistance on Q{}", s + 1),
            Parameter::TriggerResistor(s) => format!("steering resistor Rt on the Q{} side", s + 1),
            Parameter::CommutatingCapacitor(s) => format!("C1 from Q{} collector to Q{} base", s + 1, 2 - s),
            Parameter::TriggerCapacitor(s) => format!("trigger capacitor Ct on the Q{} side", s + 1),
        }
    }
}

/// Where a parameter sits: low end, nominal, high end.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Setting {
    Low,
    Nominal,
    High,
}

/// The parameters that apply to a design.
pub fn parameters(design: &StageDesign) -> Vec<Parameter> {
    let values = design.values();
    let mut list = Vec::with_capacity(20);
    for side in 0..2u8 {
        list.push(Parameter::CollectorResistor(side));
        list.push(Parameter::CrossResistor(side));
        list.push(Parameter::BaseResistor(side));
    }
    if values.bias == BiasScheme::SelfBias {
        list.push(Parameter::EmitterResistor);
    }
    list.push(Parameter::CollectorSupply);
    if values.bias == BiasScheme::Fixed {
        list.push(Parameter::BiasSupply);
    }
    for side in 0..2u8 {
        list.push(Parameter::Hfe(side));
        list.push(Parameter::VceSat(side));
        list.push(Parameter::VbeSat(side));
    }
    let conditions = &design.input().conditions;
    if conditions.t_max_c > conditions.t_min_c {
        list.push(Parameter::Temperature);
    }
    for (side, load) in design.input().loads.iter().enumerate() {
        if matches!(load, Load::Resistance { .. }) {
            list.push(Parameter::LoadResistance(side as u8));
        }
    }
    // Base-steering Rt sets the DC current the steering diode takes from the ON base.
    if let Some(trigger) = values.trigger {
        if trigger.steering == super::Steering::Base {
            list.push(Parameter::TriggerResistor(0));
            list.push(Parameter::TriggerResistor(1));
        }
    }
    // C1 and (with base steering) Ct set the charge that drives a base negative at a
    // transition, so they move the reverse base–emitter and collector–base margins.
    if conditions.capacitor_tolerance > 0.0 {
        if values.commutating_capacitor_f > 0.0 {
            list.push(Parameter::CommutatingCapacitor(0));
            list.push(Parameter::CommutatingCapacitor(1));
        }
        if let Some(trigger) = values.trigger {
            if trigger.steering == super::Steering::Base && trigger.trigger_capacitor_f > 0.0 {
                list.push(Parameter::TriggerCapacitor(0));
                list.push(Parameter::TriggerCapacitor(1));
            }
        }
    }
    list
}

/// Nominal temperature: 25 °C, or the nearest end of the range when 25 °C is outside it.
pub fn nominal_temperature_c(design: &StageDesign) -> f64 {
    let conditions = &design.input().conditions;
    25.0f64.min(conditions.t_max_c).max(conditions.t_min_c)
}

/// Applies one parameter setting to a corner (which starts at nominal).
pub fn apply(design: &StageDesign, corner: &mut Corner, parameter: Parameter, setting: Setting) {
    let nominal = Corner::nominal(design, corner.temperature_c);
    apply_from(design, &nominal, corner, parameter, setting);
}

/// [`apply`] with the design's nominal corner given (only its temperature-independent values
/// are read), so a corner of many settings builds the nominal corner once.
fn apply_from(
    design: &StageDesign,
    nominal: &Corner,
    corner: &mut Corner,
    parameter: Parameter,
    setting: Setting,
) {
    let input = design.input();
    let r_tol = input.conditions.resistor_tolerance;
    let c_tol = input.conditions.capacitor_tolerance;
    let s_tol = input.supplies.tolerance;
    let factor = |tol: f64| match setting {
        Setting::Low => 1.0 - tol,
        Setting::Nominal => 1.0,
        Setting::High => 1.0 + tol,
    };
    let spread = match setting {
        Setting::Low => -1.0,
        Setting::Nominal => 0.0,
        Setting::High => 1.0,
    };
    let side = |s: u8| usize::from(s.min(1));
    match parameter {
        Parameter::CollectorResistor(s) => {
            corner.collector_resistor_ohm[side(s)] = nominal.collector_resistor_ohm[side(s)] * factor(r_tol)
        }
        Parameter::CrossResistor(s) => {
            corner.cross_resistor_ohm[side(s)] = nominal.cross_resistor_ohm[side(s)] * factor(r_tol)
        }
        Parameter::BaseResistor(s) => {
            corner.base_resistor_ohm[side(s)] = nominal.base_resistor_ohm[side(s)] * factor(r_tol)
        }
        Parameter::EmitterResistor => {
            corner.emitter_resistor_ohm = nominal.emitter_resistor_ohm * factor(r_tol)
        }
        Parameter::CollectorSupply => corner.collector_supply_v = nominal.collector_supply_v * factor(s_tol),
        Parameter::BiasSupply => corner.bias_supply_v = nominal.bias_supply_v * factor(s_tol),
        Parameter::Hfe(s) => corner.spread[side(s)].hfe = spread,
        Parameter::VceSat(s) => corner.spread[side(s)].vce_sat = spread,
        Parameter::VbeSat(s) => corner.spread[side(s)].vbe_sat = spread,
        Parameter::Temperature => {
            corner.temperature_c = match setting {
                Setting::Low => input.conditions.t_min_c,
                Setting::Nominal => nominal_temperature_c(design),
                Setting::High => input.conditions.t_max_c,
            }
        }
        Parameter::LoadResistance(s) => corner.load_resistance_factor[side(s)] = factor(r_tol),
        Parameter::TriggerResistor(s) => {
            corner.trigger_resistor_ohm[side(s)] = nominal.trigger_resistor_ohm[side(s)] * factor(r_tol)
        }
        Parameter::CommutatingCapacitor(s) => {
            corner.commutating_capacitor_f[side(s)] = nominal.commutating_capacitor_f[side(s)] * factor(c_tol)
        }
        Parameter::TriggerCapacitor(s) => {
            corner.trigger_capacitor_f[side(s)] = nominal.trigger_capacitor_f[side(s)] * factor(c_tol)
        }
    }
}

/// Builds the corner for a full assignment of settings.
pub fn corner_for(design: &StageDesign, assignment: &[(Parameter, Setting)]) -> Corner {
    let mut corner = Corner::nominal(design, nominal_temperature_c(design));
    let nominal = corner;
    // `apply` reads the nominal passive values, which do not depend on the temperature.
    for &(parameter, setting) in assignment {
        apply_from(design, &nominal, &mut corner, parameter, setting);
    }
    corner
}

/// [`corner_for`] for an assignment that names each parameter at most once (as every
/// assignment over [`parameters`] does): nominal settings are skipped, since applying one to
/// the nominal corner writes back the value already there (a value times 1.0, spread 0, the
/// nominal temperature).
pub(crate) fn corner_for_distinct(design: &StageDesign, assignment: &[(Parameter, Setting)]) -> Corner {
    let mut corner = Corner::nominal(design, nominal_temperature_c(design));
    let nominal = corner;
    for &(parameter, setting) in assignment {
        if setting != Setting::Nominal {
            apply_from(design, &nominal, &mut corner, parameter, setting);
        }
    }
    corner
}

/// The worst case of one margin.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct WorstCase {
    pub kind: MarginKind,
    pub nominal: f64,
    pub worst: f64,
    /// Settings of the parameters that are off nominal at the worst corner.
    pub corner: Vec<(Parameter, Setting)>,
    pub temperature_c: f64,
    /// Parameters that move the margin most at the worst corner, largest first, with the
    /// improvement a flip of each would give.
    pub limiting: Vec<(Parameter, f64)>,
    /// Corners evaluated for this margin.
    pub evaluations: usize,
}

/// Worst cases of every margin, plus the largest resistor dissipations and supply power.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct WorstCaseReport {
    pub margins: Vec<WorstCase>,
    /// Per resistor of the network: the largest dissipation found over all corners evaluated,
    /// W, and at the corner set for maximum dissipation of that resistor.
    pub resistor_dissipation_w: Vec<(&'static str, f64)>,
    pub supply_power_w: f64,
    /// Largest transistor dissipation found over all corners evaluated, W.
    pub transistor_dissipation_w: f64,
    pub total_evaluations: usize,
}

/// Worst value, the off-nominal settings there, the limiting parameters, evaluations used.
pub(crate) type SearchResult = (f64, Vec<(Parameter, Setting)>, Vec<(Parameter, f64)>, usize);

/// Generic search: `evaluate` gives the margin (larger is better) at a corner, or `None`
/// when it cannot be evaluated there (treated as no information).
pub(crate) fn search(
    params: &[Parameter],
    sensitivities: &[(Option<f64>, Option<f64>)],
    nominal: f64,
    evaluate: impl FnMut(&[(Parameter, Setting)]) -> Option<f64>,
) -> SearchResult {
    search_until(params, sensitivities, nominal, evaluate, |_| false).0
}

/// [`search`] that gives up as soon as `enough(worst)` holds for the worst value found so far,
/// for a caller that only needs to know whether the margin falls that low (the worst value
/// only decreases as the search goes on, and never exceeds `nominal`). Returns the result so
/// far and whether it gave up; without giving up the result is exactly [`search`]'s.
pub(crate) fn search_until(
    params: &[Parameter],
    sensitivities: &[(Option<f64>, Option<f64>)],
    nominal: f64,
    mut evaluate: impl FnMut(&[(Parameter, Setting)]) -> Option<f64>,
    mut enough: impl FnMut(f64) -> bool,
) -> (SearchResult, bool) {
    let mut evaluations = 0;
    let mut assignment: Vec<(Parameter, Setting)> = params
        .iter()
        .zip(sensitivities)
        .map(|(&p, &(low, high))| {
            let setting = match (low, high) {
                (Some(l), Some(h)) if l <= h && l < nominal => Setting::Low,
                (Some(l), Some(h)) if h < l && h < nominal => Setting::High,
                (Some(_), None) => Setting::Low,
                (None, Some(_)) => Setting::High,
                _ => Setting::Nominal,
            };
            (p, setting)
        })
        .collect();
    evaluations += 1;
    let mut worst = match evaluate(&assignment) {
        Some(value) if value <= nominal => value,
        // The combined corner was no worse than nominal (or could not be solved): start the
        // coordinate search from nominal instead.
        _ => {
            assignment.iter_mut().for_each(|(_, s)| *s = Setting::Nominal);
            nominal
        }
    };
    // Values at the opposite end of each parameter, from the last pass: when a pass changes
    // nothing, they say how much each parameter limits the margin.
    let mut limiting: Vec<(Parameter, f64)> = Vec::new();
    let mut gave_up = enough(worst);
    for pass in 0..5 {
        if gave_up {
            break;
        }
        let mut changed = false;
        // The first pass skips parameters that did nothing on their own at nominal; later
        // passes try every one, because a parameter can matter only once others have moved
        // (for example a transistor's VBE(sat) when the other state becomes the limiting one).
        let skip_inert = pass == 0;
        limiting.clear();
        for index in 0..assignment.len() {
            let Some(&(parameter, current)) = assignment.get(index) else { continue };
            // Temperature is always tried, since its effects can cancel at the ends and show
            // in between.
            let inert = sensitivities.get(index).is_some_and(|&(low, high)| match (low, high) {
                (Some(l), Some(h)) => {
                    (l - nominal).abs() <= 1e-12 * nominal.abs().max(1e-30)
                        && (h - nominal).abs() <= 1e-12 * nominal.abs().max(1e-30)
                }
                _ => false,
            });
            if skip_inert && inert && parameter != Parameter::Temperature {
                continue;
            }
            let candidates: &[Setting] = match parameter {
                Parameter::Temperature => &[Setting::Low, Setting::Nominal, Setting::High],
                _ => &[Setting::Low, Setting::High],
            };
            for &candidate in candidates {
                if candidate == current {
                    continue;
                }
                // Try the candidate in place; it is put back unless it makes the margin worse.
                if let Some(slot) = assignment.get_mut(index) {
                    slot.1 = candidate;
                }
                evaluations += 1;
                if let Some(value) = evaluate(&assignment) {
                    if value < worst - 1e-12 * worst.abs().max(1e-30) {
                        worst = value;
                        changed = true;
                        break;
                    }
                    let opposite = matches!(
                        (current, candidate),
                        (Setting::Low, Setting::High) | (Setting::High, Setting::Low)
                    );
                    if opposite && value > worst {
                        limiting.push((parameter, value - worst));
                    }
                }
                if let Some(slot) = assignment.get_mut(index) {
                    slot.1 = current;
                }
            }
            if changed && enough(worst) {
                gave_up = true;
                break;
            }
        }
        if gave_up {
            break;
        }
        if !changed && !skip_inert {
            break;
        }
    }
    limiting.sort_by(|a, b| b.1.total_cmp(&a.1));
    limiting.truncate(4);
    let off_nominal = assignment.into_iter().filter(|(_, s)| *s != Setting::Nominal).collect();
    ((worst, off_nominal, limiting, evaluations), gave_up)
}

/// Ebers–Moll models of both transistors at a corner.
pub fn models_at(design: &StageDesign, base: &EbersMoll, corner: &Corner) -> [EbersMoll; 2] {
    let sheet = design.transistor();
    let scaled = base.at_temperature(corner.temperature_c, sheet.hfe_tempco_per_c, sheet.icbo_doubling_c);
    let mut models = [scaled, scaled];
    for (model, spread) in models.iter_mut().zip(corner.spread) {
        model.beta_forward = sheet.hfe_at(corner.temperature_c, spread.hfe);
    }
    models
}

/// Loop gain at a corner (exact model).
pub fn loop_gain_at(design: &StageDesign, base: &EbersMoll, corner: &Corner) -> Option<LoopGain> {
    let network = StageNetwork::build(design, corner);
    let models = models_at(design, base, corner);
    loop_gain(&network, &models, &network.diode_law).ok()
}

/// Runs the worst-case search for every DC margin and the loop gain.
pub fn analyse(design: &StageDesign, base_model: &EbersMoll) -> Result<WorstCaseReport, SolveError> {
    let params = parameters(design);
    let nominal_corner = Corner::nominal(design, nominal_temperature_c(design));
    let (nominal_metrics, _) = evaluate_corner(design, &nominal_corner)?;
    let mut total_evaluations = 1;
    let mut one_at_a_time: Vec<(Option<CornerMetrics>, Option<CornerMetrics>)> =
        Vec::with_capacity(params.len());
    let mut dissipation = nominal_metrics.resistor_dissipation_w.clone();
    let mut supply_power_w = nominal_metrics.supply_power_w;
    let transistor_dissipation = std::cell::Cell::new(nominal_metrics.max_transistor_dissipation_w);
    let record = |metrics: &CornerMetrics, dissipation: &mut Vec<(&'static str, f64)>, power: &mut f64| {
        transistor_dissipation.set(transistor_dissipation.get().max(metrics.max_transistor_dissipation_w));
        for ((_, worst), (_, value)) in dissipation.iter_mut().zip(&metrics.resistor_dissipation_w) {
            *worst = worst.max(*value);
        }
        *power = power.max(metrics.supply_power_w);
    };
    for &parameter in &params {
        let mut pair = (None, None);
        for setting in [Setting::Low, Setting::High] {
            let corner = corner_for(design, &[(parameter, setting)]);
            total_evaluations += 1;
            let metrics = evaluate_corner(design, &corner).ok().map(|(m, _)| m);
            if let Some(m) = &metrics {
                record(m, &mut dissipation, &mut supply_power_w);
            }
            if setting == Setting::Low {
                pair.0 = metrics;
            } else {
                pair.1 = metrics;
            }
        }
        one_at_a_time.push(pair);
    }
    // Margins share corners (and later passes revisit them): evaluate each corner once.
    let mut cache: std::collections::HashMap<Vec<Setting>, Option<CornerMetrics>> =
        std::collections::HashMap::new();
    let cached_metrics = |cache: &mut std::collections::HashMap<Vec<Setting>, Option<CornerMetrics>>,
                          assignment: &[(Parameter, Setting)]|
     -> Option<CornerMetrics> {
        let key: Vec<Setting> = assignment.iter().map(|(_, s)| *s).collect();
        cache
            .entry(key)
            .or_insert_with(|| evaluate_corner(design, &corner_for(design, assignment)).ok().map(|(m, _)| m))
            .clone()
    };
    let mut margins = Vec::new();
    for kind in DC_MARGINS {
        let nominal = margin_value(kind, &nominal_metrics, design).unwrap_or(f64::NAN);
        let sensitivities: Vec<(Option<f64>, Option<f64>)> = one_at_a_time
            .iter()
            .map(|(low, high)| {
                (
                    low.as_ref().and_then(|m| margin_value(kind, m, design)),
                    high.as_ref().and_then(|m| margin_value(kind, m, design)),
                )
            })
            .collect();
        let mut temperature_c = nominal_corner.temperature_c;
        // A corner that cannot be solved counts as failing: a margin must never pass on
        // corners that were not checked.
        let (worst, corner, limiting, evaluations) = search(&params, &sensitivities, nominal, |assignment| {
            match cached_metrics(&mut cache, assignment) {
                Some(metrics) => margin_value(kind, &metrics, design),
                None => Some(f64::NEG_INFINITY),
            }
        });
        if let Some(&(_, setting)) = corner.iter().find(|(p, _)| *p == Parameter::Temperature) {
            let mut probe = nominal_corner;
            apply(design, &mut probe, Parameter::Temperature, setting);
            temperature_c = probe.temperature_c;
        }
        // Record dissipation at this margin's worst corner too.
        if let Ok((metrics, _)) = evaluate_corner(design, &corner_for(design, &corner)) {
            record(&metrics, &mut dissipation, &mut supply_power_w);
        }
        total_evaluations += evaluations + 1;
        margins.push(WorstCase { kind, nominal, worst, corner, temperature_c, limiting, evaluations });
    }
    // Maximum dissipation of each resistor: its own corner from the one-at-a-time signs.
    for (index, (name, worst)) in dissipation.iter_mut().enumerate() {
        let assignment: Vec<(Parameter, Setting)> = params
            .iter()
            .zip(&one_at_a_time)
            .map(|(&p, (low, high))| {
                let pick = |m: &Option<CornerMetrics>| {
                    m.as_ref()
                        .and_then(|m| m.resistor_dissipation_w.get(index))
                        .map(|(_, d)| *d)
                        .unwrap_or(0.0)
                };
                (p, if pick(high) >= pick(low) { Setting::High } else { Setting::Low })
            })
            .collect();
        total_evaluations += 1;
        if let Ok((metrics, _)) = evaluate_corner(design, &corner_for(design, &assignment)) {
            if let Some((other_name, value)) = metrics.resistor_dissipation_w.get(index) {
                if other_name == name {
                    *worst = worst.max(*value);
                }
            }
            supply_power_w = supply_power_w.max(metrics.supply_power_w);
            transistor_dissipation
                .set(transistor_dissipation.get().max(metrics.max_transistor_dissipation_w));
        }
    }
    let (loop_gain_worst, evaluations) = loop_gain_worst_case(design, base_model, &params, &nominal_corner);
    total_evaluations += evaluations;
    margins.push(loop_gain_worst);
    Ok(WorstCaseReport {
        margins,
        resistor_dissipation_w: dissipation,
        supply_power_w,
        transistor_dissipation_w: transistor_dissipation.get(),
        total_evaluations,
    })
}

/// The worst case of the loop gain (exact model) over `params` except the saturation-voltage
/// spreads, which belong to the piecewise model only; with the evaluations used. No middle
/// equilibrium at a corner counts as no regeneration there (gain 0).
pub fn loop_gain_worst_case(
    design: &StageDesign,
    base_model: &EbersMoll,
    params: &[Parameter],
    nominal_corner: &Corner,
) -> (WorstCase, usize) {
    loop_gain_worst_case_until(design, base_model, params, nominal_corner, |_| false).0
}

/// [`loop_gain_worst_case`] that gives up as soon as `enough(bound)` holds for a value the
/// worst gain cannot exceed (the nominal gain, then each lower gain the search finds); the
/// flag says it gave up, and the worst case is then incomplete. Without giving up the result
/// is exactly [`loop_gain_worst_case`]'s.
pub(crate) fn loop_gain_worst_case_until(
    design: &StageDesign,
    base_model: &EbersMoll,
    params: &[Parameter],
    nominal_corner: &Corner,
    mut enough: impl FnMut(f64) -> bool,
) -> ((WorstCase, usize), bool) {
    let Some(nominal_gain) = loop_gain_at(design, base_model, nominal_corner) else {
        let none = WorstCase {
            kind: MarginKind::LoopGain,
            nominal: 0.0,
            worst: 0.0,
            corner: Vec::new(),
            temperature_c: nominal_corner.temperature_c,
            limiting: Vec::new(),
            evaluations: 1,
        };
        return ((none, 0), false);
    };
    let nominal = nominal_gain.loop_gain;
    let gave_up_at_nominal = enough(nominal);
    // The saturation-voltage spreads belong to the piecewise model only.
    let params: Vec<Parameter> = params
        .iter()
        .copied()
        .filter(|p| !matches!(p, Parameter::VceSat(_) | Parameter::VbeSat(_)))
        .collect();
    if gave_up_at_nominal {
        let at_nominal = WorstCase {
            kind: MarginKind::LoopGain,
            nominal,
            worst: nominal,
            corner: Vec::new(),
            temperature_c: nominal_corner.temperature_c,
            limiting: Vec::new(),
            evaluations: 1,
        };
        return ((at_nominal, 0), true);
    }
    let sensitivities: Vec<(Option<f64>, Option<f64>)> = params
        .iter()
        .map(|&p| {
            let at = |s: Setting| {
                loop_gain_at(design, base_model, &corner_for(design, &[(p, s)])).map(|g| g.loop_gain)
            };
            (at(Setting::Low), at(Setting::High))
        })
        .collect();
    let mut gain_cache: std::collections::HashMap<Vec<Setting>, Option<f64>> =
        std::collections::HashMap::new();
    let evaluate = |assignment: &[(Parameter, Setting)]| {
        let key: Vec<Setting> = assignment.iter().map(|(_, s)| *s).collect();
        // No middle equilibrium found at a corner counts as no regeneration there.
        *gain_cache.entry(key).or_insert_with(|| {
            Some(
                loop_gain_at(design, base_model, &corner_for(design, assignment))
                    .map_or(0.0, |g| g.loop_gain),
            )
        })
    };
    let ((worst, corner, limiting, evaluations), gave_up) =
        search_until(&params, &sensitivities, nominal, evaluate, enough);
    let temperature_c = corner_for(design, &corner).temperature_c;
    let worst_case = WorstCase {
        kind: MarginKind::LoopGain,
        nominal,
        worst,
        corner,
        temperature_c,
        limiting,
        evaluations,
    };
    ((worst_case, 2 * params.len() + evaluations), gave_up)
}

/// Exhaustive search over every low/high combination (and, for temperature, also nominal),
/// for checking [`analyse`]; cost grows as 2^n, so use on designs with few parameters.
pub fn exhaustive_worst(design: &StageDesign, kind: MarginKind) -> Option<f64> {
    let params = parameters(design);
    let n = params.len();
    if n > 20 {
        return None;
    }
    let mut worst = f64::INFINITY;
    let temperature_settings: &[Setting] = &[Setting::Low, Setting::Nominal, Setting::High];
    for mask in 0u32..(1u32 << n) {
        let base: Vec<(Parameter, Setting)> = params
            .iter()
            .enumerate()
            .map(|(i, &p)| (p, if mask & (1 << i) != 0 { Setting::High } else { Setting::Low }))
            .collect();
        let has_temperature = params.contains(&Parameter::Temperature);
        let variants: Vec<Vec<(Parameter, Setting)>> = if has_temperature {
            temperature_settings
                .iter()
                .filter_map(|&t| {
                    // Only the masks with temperature Low enumerate the three settings, so
                    // each combination is visited once.
                    let index = params.iter().position(|p| *p == Parameter::Temperature)?;
                    if mask & (1 << index) != 0 {
                        return None;
                    }
                    let mut v = base.clone();
                    if let Some(slot) = v.get_mut(index) {
                        slot.1 = t;
                    }
                    Some(v)
                })
                .collect()
        } else {
            vec![base]
        };
        for assignment in variants {
            if let Ok((metrics, _)) = evaluate_corner(design, &corner_for(design, &assignment)) {
                if let Some(value) = margin_value(kind, &metrics, design) {
                    worst = worst.min(value);
                }
            }
        }
    }
    worst.is_finite().then_some(worst)
}
