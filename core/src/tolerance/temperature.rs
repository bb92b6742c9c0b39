//! Each DC margin across the temperature range, with the other parameters at nominal and at
//! their worst (the stage worst-case search at that one temperature, on the fast kernel), for
//! every distinct stage of a chain: data for a chart.

use serde::Serialize;

use super::chain::LoadedChain;
use super::kernel::MarginKernel;
use super::{invalid, ToleranceError};
use crate::stage::margins::{required_value, MarginKind, DC_MARGINS};
use crate::stage::worst_case::{corner_for, parameters, search, Parameter, Setting};

/// Most points a sweep takes.
pub const MAX_POINTS: u32 = 1001;

/// One margin over the sweep.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MarginCurve {
    pub kind: MarginKind,
    pub title: String,
    pub unit: String,
    pub required: f64,
    /// Smallest value over the stages with every other parameter nominal, per temperature.
    pub nominal: Vec<f64>,
    /// Smallest worst-case value over the stages, per temperature.
    pub worst: Vec<f64>,
    /// The stage whose worst case that is, per temperature.
    pub worst_stage: Vec<u32>,
}

/// The sweep.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TemperatureSweep {
    pub temperatures_c: Vec<f64>,
    pub margins: Vec<MarginCurve>,
}

/// `points` temperatures evenly from t_min to t_max (41 gives 2.5 °C steps over −25 … 75 °C).
pub fn margins_against_temperature(
    chain: &LoadedChain,
    points: u32,
) -> Result<TemperatureSweep, ToleranceError> {
    if !(2..=MAX_POINTS).contains(&points) {
        return Err(invalid("points", points, &format!("a point count from 2 to {MAX_POINTS}")));
    }
    let Some(first) = chain.distinct.first() else {
        return Err(ToleranceError::InvalidChain { reason: "the chain has no stage".to_string() });
    };
    let conditions = first.input().conditions;
    let temperatures_c: Vec<f64> = (0..points)
        .map(|i| {
            conditions.t_min_c
                + (conditions.t_max_c - conditions.t_min_c) * f64::from(i) / f64::from(points - 1)
        })
        .collect();
    let mut margins: Vec<MarginCurve> = DC_MARGINS
        .iter()
        .map(|&kind| MarginCurve {
            kind,
            title: kind.title().to_string(),
            unit: kind.unit().to_string(),
            required: required_value(kind, first),
            nominal: vec![f64::INFINITY; temperatures_c.len()],
            worst: vec![f64::INFINITY; temperatures_c.len()],
            worst_stage: vec![0; temperatures_c.len()],
        })
        .collect();
    for (index, design) in chain.distinct.iter().enumerate() {
        let stage = chain.first_stage_of(index);
        let kernel = MarginKernel::new(design);
        let params: Vec<Parameter> =
            parameters(design).into_iter().filter(|p| *p != Parameter::Temperature).collect();
        for (point, &temperature_c) in temperatures_c.iter().enumerate() {
            let thermal = kernel.thermal_point(temperature_c);
            let capacitors = kernel.nominal_capacitors();
            let at = |assignment: &[(Parameter, Setting)]| {
                let mut corner = corner_for(design, assignment);
                corner.temperature_c = temperature_c;
                kernel.evaluate(&corner, &capacitors, &thermal)
            };
            let nominal = at(&[]);
            let one_at_a_time: Vec<([f64; 8], [f64; 8])> =
                params.iter().map(|&p| (at(&[(p, Setting::Low)]), at(&[(p, Setting::High)]))).collect();
            for (k, curve) in margins.iter_mut().enumerate() {
                let sensitivities: Vec<(Option<f64>, Option<f64>)> =
                    one_at_a_time.iter().map(|(low, high)| (Some(low[k]), Some(high[k]))).collect();
                let (worst, _, _, _) =
                    search(&params, &sensitivities, nominal[k], |assignment| Some(at(assignment)[k]));
                if let Some(slot) = curve.nominal.get_mut(point) {
                    *slot = slot.min(nominal[k]);
                }
                if let (Some(slot), Some(stage_slot)) =
                    (curve.worst.get_mut(point), curve.worst_stage.get_mut(point))
                {
                    if worst < *slot || worst.is_nan() {
                        *slot = worst;
                        *stage_slot = stage;
                    }
                }
            }
        }
    }
    Ok(TemperatureSweep { temperatures_c, margins })
}
