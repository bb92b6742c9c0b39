//! Benchmark exports (feature `bench`, never in the page): the chain benchmark of
//! `core/benches/chain.rs` in wasm, for the wasm/native ratio. The caller times each call in
//! JS (`performance.now()`), since `Instant` traps on wasm32.

use serde::Serialize;
use wasm_bindgen::prelude::*;

use flipwright::design_file::DesignFile;
use flipwright::transient::{simulate_with, AutomaticSolver, DenseSolver, RunStatistics, SparseSolver};
use flipwright::verify::count::{check_counts, run_settings};
use flipwright::verify::{chain_circuit, service_pulse, BuiltCircuit, RunAccuracy, SimulationCorner};

/// The same stage as the native benchmark.
const DESIGN: &str = include_str!("../../core/benches/chain-design.json");

/// One run's counts, for comparison with the native figures.
#[derive(Serialize)]
struct BenchRun {
    statistics: RunStatistics,
    count_correct: bool,
    unknowns: usize,
}

fn built(stages: usize) -> Result<BuiltCircuit, JsError> {
    let (_, design) = DesignFile::load(DESIGN).map_err(|e| JsError::new(&format!("design: {e:?}")))?;
    let pulse = service_pulse(&design, 20e-9).map_err(|e| JsError::new(&e.to_string()))?;
    chain_circuit(&design, stages, &pulse, &SimulationCorner::nominal())
        .map_err(|e| JsError::new(&e.to_string()))
}

/// A built chain, so that the timed call is the run alone.
#[wasm_bindgen]
pub struct ChainBench {
    built: BuiltCircuit,
}

#[wasm_bindgen]
impl ChainBench {
    /// Builds a chain of `stages` stages (1 for the stage alone), with the design's analysis.
    #[wasm_bindgen(constructor)]
    pub fn new(stages: usize) -> Result<ChainBench, JsError> {
        Ok(ChainBench { built: built(stages)? })
    }

    /// Runs `edges` input edges with `solver` ("dense", "sparse" or "automatic"); returns the
    /// run's statistics and whether the count was right after every edge.
    pub fn run(&self, edges: usize, solver: &str) -> Result<JsValue, JsError> {
        let built = &self.built;
        let settings = run_settings(built, edges, &RunAccuracy::for_stages(built.stages.len()));
        let result = match solver {
            "dense" => simulate_with(&built.circuit, &settings, &built.hints, &mut DenseSolver::default()),
            "sparse" => simulate_with(&built.circuit, &settings, &built.hints, &mut SparseSolver::default()),
            _ => simulate_with(&built.circuit, &settings, &built.hints, &mut AutomaticSolver::default()),
        }
        .map_err(|e| JsError::new(&e.to_string()))?;
        let check = check_counts(built, &result, edges);
        let unknowns = result.node_names.len() + result.source_names.len();
        let outcome = BenchRun { statistics: result.statistics, count_correct: check.correct, unknowns };
        serde_wasm_bindgen::to_value(&outcome).map_err(|e| JsError::new(&e.to_string()))
    }
}
