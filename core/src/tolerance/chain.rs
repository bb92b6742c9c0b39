//! A chain of loaded stages and its worst case: the stage worst case run once per distinct
//! loaded stage, combined into the worst value of each margin with the stage and the
//! parameter that limit it.

use serde::Serialize;

use super::ToleranceError;
use crate::chain::loads::{chain_stage_loads_with_decode, stage_design_with_loads, StageLoads};
use crate::chain::reset_driver::design_reset_driver_for_stage;
use crate::chain::timing::StageTiming;
use crate::chain::{plan_chain, ChainRequest, MethodKind, MethodPlan};
use crate::device::ebers_moll::EbersMoll;
use crate::stage::analysis::analyse;
use crate::stage::margins::{required_value, MarginKind};
use crate::stage::worst_case::{self, Setting};
use crate::stage::{Load, StageDesign};

/// Largest chain the tolerance analyses take (the chain planner's 16 stages, with room).
pub const MAX_STAGES: usize = 64;

/// N stages of one design, each with its own loads; stages with equal loads share one
/// design (`distinct`), so each distinct stage is analysed once.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LoadedChain {
    /// The distinct loaded stage designs.
    pub distinct: Vec<StageDesign>,
    /// For each stage of the chain (stage 0 takes the input), its index into `distinct`.
    pub stage_to_distinct: Vec<usize>,
}

impl LoadedChain {
    /// `stages` copies of `design` with the design's own loads (a plain ripple chain, whose
    /// next-stage trigger capacitors put no DC load on Q).
    pub fn uniform(design: &StageDesign, stages: usize) -> Result<LoadedChain, ToleranceError> {
        if !(1..=MAX_STAGES).contains(&stages) {
            return Err(super::invalid("stages", stages, &format!("a stage count from 1 to {MAX_STAGES}")));
        }
        Ok(LoadedChain { distinct: vec![design.clone()], stage_to_distinct: vec![0; stages] })
    }

    /// The stages of a planned chain with the loads the plan puts on each; a reset plan needs
    /// its decoding gate's load on each decoded Q (`DrivenResetNetwork::decode_load`).
    pub fn from_plan(
        design: &StageDesign,
        plan: &MethodPlan,
        decode_load: Option<Load>,
    ) -> Result<LoadedChain, ToleranceError> {
        let loads = chain_stage_loads_with_decode(plan, design, decode_load)
            .map_err(|e| ToleranceError::InvalidChain { reason: e.to_string() })?;
        LoadedChain::from_loads(design, &loads)
    }

    /// The stages with the given loads, one entry per stage.
    pub fn from_loads(design: &StageDesign, loads: &[StageLoads]) -> Result<LoadedChain, ToleranceError> {
        if !(1..=MAX_STAGES).contains(&loads.len()) {
            return Err(super::invalid(
                "stages",
                loads.len(),
                &format!("a stage count from 1 to {MAX_STAGES}"),
            ));
        }
        let mut distinct: Vec<StageDesign> = Vec::new();
        let mut seen: Vec<[Load; 2]> = Vec::new();
        let mut stage_to_distinct = Vec::with_capacity(loads.len());
        for stage_loads in loads {
            match seen.iter().position(|l| *l == stage_loads.loads) {
                Some(index) => stage_to_distinct.push(index),
                None => {
                    let loaded = stage_design_with_loads(design, stage_loads).map_err(|errors| {
                        ToleranceError::InvalidChain {
                            reason: format!(
                                "stage {} with the chain's loads does not validate: {}",
                                stage_loads.stage + 1,
                                errors.iter().map(|e| e.to_string()).collect::<Vec<_>>().join("; ")
                            ),
                        }
                    })?;
                    seen.push(stage_loads.loads);
                    distinct.push(loaded);
                    stage_to_distinct.push(distinct.len() - 1);
                }
            }
        }
        Ok(LoadedChain { distinct, stage_to_distinct })
    }

    pub fn stage_count(&self) -> usize {
        self.stage_to_distinct.len()
    }

    /// The first stage that uses distinct design `index`.
    pub fn first_stage_of(&self, index: usize) -> u32 {
        self.stage_to_distinct.iter().position(|&d| d == index).unwrap_or(0) as u32
    }

    /// The stages that use distinct design `index`.
    pub fn stages_of(&self, index: usize) -> Vec<u32> {
        self.stage_to_distinct
            .iter()
            .enumerate()
            .filter(|(_, &d)| d == index)
            .map(|(s, _)| s as u32)
            .collect()
    }
}

/// The chain's worst case of one margin.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ChainMarginWorst {
    pub kind: MarginKind,
    pub title: String,
    pub unit: String,
    /// Smallest nominal value over the stages.
    pub nominal: f64,
    /// Smallest worst-case value over the stages.
    pub worst: f64,
    pub required: f64,
    pub pass: bool,
    /// The stage (0 takes the input) whose worst case is the chain's; the first such stage
    /// when several stages share the limiting loads (`same_stages` lists them all).
    pub limiting_stage: u32,
    pub same_stages: Vec<u32>,
    /// The parameter that moves this margin most at the worst corner of that stage.
    pub limiting_parameter: Option<String>,
    /// The worst corner's off-nominal settings ("hFE of Q2: low").
    pub worst_corner: Vec<String>,
    pub temperature_c: f64,
}

/// The chain's worst case.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ChainWorstCase {
    pub stage_count: u32,
    pub distinct_stages: u32,
    pub margins: Vec<ChainMarginWorst>,
    /// Per distinct stage: its stages and the worst value of each margin (same order as
    /// `margins`).
    pub per_distinct: Vec<(Vec<u32>, Vec<f64>)>,
    pub all_pass: bool,
    pub evaluations: usize,
}

fn setting_word(setting: Setting) -> &'static str {
    match setting {
        Setting::Low => "low",
        Setting::Nominal => "nominal",
        Setting::High => "high",
    }
}

/// The worst case of every margin over every stage of the chain.
pub fn chain_worst_case(chain: &LoadedChain) -> Result<ChainWorstCase, ToleranceError> {
    let mut margins: Vec<ChainMarginWorst> = Vec::new();
    let mut per_distinct = Vec::new();
    let mut evaluations = 0;
    for (index, design) in chain.distinct.iter().enumerate() {
        let stage = chain.first_stage_of(index);
        let model = EbersMoll::from_datasheet(design.transistor())
            .ok_or_else(|| ToleranceError::StageAnalysis {
                stage,
                reason:
                    "the transistor data give no Ebers–Moll model (check the saturation and storage data)"
                        .to_string(),
            })?
            .model;
        let report = worst_case::analyse(design, &model)
            .map_err(|e| ToleranceError::StageAnalysis { stage, reason: e.to_string() })?;
        evaluations += report.total_evaluations;
        per_distinct.push((chain.stages_of(index), report.margins.iter().map(|m| m.worst).collect()));
        for wc in &report.margins {
            let required = required_value(wc.kind, design);
            let candidate = ChainMarginWorst {
                kind: wc.kind,
                title: wc.kind.title().to_string(),
                unit: wc.kind.unit().to_string(),
                nominal: wc.nominal,
                worst: wc.worst,
                required,
                pass: wc.worst >= required && wc.worst.is_finite(),
                limiting_stage: stage,
                same_stages: chain.stages_of(index),
                limiting_parameter: wc.limiting.first().map(|(p, _)| p.label()),
                worst_corner: wc
                    .corner
                    .iter()
                    .map(|(p, s)| format!("{}: {}", p.label(), setting_word(*s)))
                    .collect(),
                temperature_c: wc.temperature_c,
            };
            match margins.iter_mut().find(|m| m.kind == wc.kind) {
                None => margins.push(candidate),
                Some(existing) => {
                    let nominal = existing.nominal.min(candidate.nominal);
                    // NaN (could not be evaluated) counts as the worst.
                    if candidate.worst < existing.worst || candidate.worst.is_nan() {
                        *existing = candidate;
                    }
                    existing.nominal = nominal;
                }
            }
        }
    }
    let all_pass = margins.iter().all(|m| m.pass);
    Ok(ChainWorstCase {
        stage_count: chain.stage_count() as u32,
        distinct_stages: chain.distinct.len() as u32,
        margins,
        per_distinct,
        all_pass,
        evaluations,
    })
}

/// Which chain to analyse, as the front ends ask for it.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, serde::Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum ChainShape {
    /// A ripple chain of this many stages (divide by 2^stages), each with the design's loads.
    Stages { stages: u32 },
    /// The planned chain for a division ratio. `method` defaults as in `flipwright simulate
    /// --divide`: plain binary for a power of two, otherwise skip-state feedback; the reset
    /// method adds the decoding gate's pull-up load on each decoded Q.
    Divide {
        modulus: u32,
        #[serde(default)]
        method: Option<MethodKind>,
    },
}

/// Spread of stage times assumed for the reset network's timing (as `flipwright chain`).
pub const RESET_TIMING_SPREAD: f64 = 0.3;

/// The loaded chain for a shape, with a line saying what it is.
pub fn loaded_chain(
    design: &StageDesign,
    shape: ChainShape,
) -> Result<(LoadedChain, String), ToleranceError> {
    match shape {
        ChainShape::Stages { stages } => {
            let chain = LoadedChain::uniform(design, stages as usize)?;
            Ok((chain, format!("a ripple chain of {stages} stage(s), each with the design's own loads")))
        }
        ChainShape::Divide { modulus, method } => {
            let plan = plan_chain(&ChainRequest { modulus, natural_binary_code: false })
                .map_err(|e| super::invalid("modulus", modulus, &e.to_string()))?;
            let kind = method.unwrap_or(if modulus.is_power_of_two() {
                MethodKind::PlainBinary
            } else {
                MethodKind::SkipFeedback
            });
            let method_plan = plan.method(kind).ok_or_else(|| {
                super::invalid(
                    "method",
                    kind.name(),
                    "a method the plan for this ratio has (plain binary only for a power of two)",
                )
            })?;
            // The driven reset network, as the chain design builds and the verification
            // simulates it: its decoding gate's pull-up loads each decoded Q.
            let decode_load = if kind == MethodKind::ResetOnCount {
                let report = analyse(design)
                    .map_err(|e| ToleranceError::StageAnalysis { stage: 0, reason: e.to_string() })?;
                let timing = StageTiming::from_switching(&report.switching, RESET_TIMING_SPREAD);
                let network = design_reset_driver_for_stage(&plan, design, &timing)
                    .map_err(|e| ToleranceError::InvalidChain { reason: e.to_string() })?;
                Some(network.decode_load)
            } else {
                None
            };
            let chain = LoadedChain::from_plan(design, method_plan, decode_load)?;
            let stages = chain.stage_count();
            Ok((chain, format!("the divide-by-{modulus} chain ({}, {stages} stages) with the loads its plan puts on each stage", kind.name())))
        }
    }
}
