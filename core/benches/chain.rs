//! Benchmark: a ten-stage ripple chain (divide by 1024) for one full output period, and one
//! stage for 1000 toggles, each with the dense and the sparse solver. Run with
//! `cargo bench -p flipwright-core --bench chain`; prints medians, quartiles and ratios.
//!
//! The stage is the demo design with the values synthesis chose for it, kept as a file
//! (`chain-design.json`) so the figures do not move when synthesis changes; the circuit is
//! built by `verify::chain_circuit`. Options after `--`: `quick` (fewer repetitions),
//! `accuracy` (also the edge-time error against a run at relative tolerance 1e-5),
//! `sparse-only` (skip the dense runs), `stage-only` (skip the ten-stage chain, as the wasm
//! benchmark's option of that name does), `crossover` (only the dense/sparse crossover table),
//! `once dense|sparse|column|pivoting STAGES EDGES` (one run, for a profiler, with its steps by decade of
//! size), `accuracy-only STAGES EDGES [CHARGE_TOLERANCE_C [RELATIVE_TOLERANCE]]` (only the edge-time
//! error, every stage's edges, against relative 1e-5 and 1 fC).

mod common;

use common::median_and_quartiles;
use std::hint::black_box;
use std::time::Instant;

use flipwright::design_file::DesignFile;
use flipwright::stage::StageDesign;
use flipwright::transient::system::System;
use flipwright::transient::{
    simulate_with, AutomaticSolver, DenseSolver, FillOrdering, LinearSolver, SparseSolver, TransientResult,
};
use flipwright::verify::count::{check_counts, run_settings};
use flipwright::verify::{chain_circuit, service_pulse, BuiltCircuit, RunAccuracy, SimulationCorner};

const DESIGN: &str = include_str!("chain-design.json");

fn fail(message: String) -> ! {
    eprintln!("chain benchmark: {message}");
    std::process::exit(1);
}

fn design() -> StageDesign {
    match DesignFile::load(DESIGN) {
        Ok((_, design)) => design,
        Err(errors) => fail(format!("chain-design.json is not valid: {errors:?}")),
    }
}

/// The chain (or one stage) driven as in service: the design's rate, the amplitude a driving
/// stage gives, 20 ns edges (as the verification tests use).
fn built(design: &StageDesign, stages: usize) -> BuiltCircuit {
    let pulse = service_pulse(design, 20e-9).unwrap_or_else(|e| fail(format!("analysis failed: {e}")));
    chain_circuit(design, stages, &pulse, &SimulationCorner::nominal())
        .unwrap_or_else(|e| fail(format!("cannot build the chain: {e}")))
}

fn run<S: LinearSolver>(
    built: &BuiltCircuit,
    edges: usize,
    accuracy: &RunAccuracy,
    solver: &mut S,
) -> TransientResult {
    let settings = run_settings(built, edges, accuracy);
    simulate_with(&built.circuit, &settings, &built.hints, solver)
        .unwrap_or_else(|e| fail(format!("the run failed: {e}")))
}

/// Times of the last stage's output (Q1's collector) crossing half the supply, one per change
/// of state: the state changes with hysteresis (below 0.3, above 0.7 of the supply, as the
/// verification tests count), so a spike from the trigger network through the middle is not
/// an edge; each change is timed at its own last crossing of the middle.
fn output_edges(built: &BuiltCircuit, result: &TransientResult) -> Vec<f64> {
    built.stages.len().checked_sub(1).map_or_else(Vec::new, |last| stage_edges(built, result, last))
}

/// [`output_edges`] of any stage.
fn stage_edges(built: &BuiltCircuit, result: &TransientResult, stage: usize) -> Vec<f64> {
    let Some(last) = built.stages.get(stage) else { return Vec::new() };
    let Some(wave) = result.voltage(&last.collectors[0]) else { return Vec::new() };
    let supply = built.collector_supply_v;
    let (low, middle, high) = (0.3 * supply, 0.5 * supply, 0.7 * supply);
    let mut edges = Vec::new();
    let mut state: Option<bool> = None;
    let (mut last_rise, mut last_fall) = (f64::NAN, f64::NAN);
    for (t, v) in result.time_s.windows(2).zip(wave.windows(2)) {
        if (v[0] < middle) != (v[1] < middle) {
            let crossing = t[0] + (middle - v[0]) / (v[1] - v[0]) * (t[1] - t[0]);
            if v[1] > v[0] {
                last_rise = crossing;
            } else {
                last_fall = crossing;
            }
        }
        let next = if v[1] > high {
            Some(true)
        } else if v[1] < low {
            Some(false)
        } else {
            state
        };
        if let (Some(old), Some(new)) = (state, next) {
            if old != new {
                edges.push(if new { last_rise } else { last_fall });
            }
        }
        state = next;
    }
    edges
}

struct Quartiles {
    low: f64,
    median: f64,
    high: f64,
}

fn quartiles(samples: Vec<f64>) -> Quartiles {
    let (median, low, high) = median_and_quartiles(samples);
    Quartiles { low, median, high }
}

/// One case with one solver: the run's counts and check, then timed repetitions.
fn case<S: LinearSolver>(
    label: &str,
    built: &BuiltCircuit,
    edges: usize,
    repetitions: usize,
    make: impl Fn() -> S,
) -> f64 {
    let accuracy = RunAccuracy::for_stages(built.stages.len());
    let result = run(built, edges, &accuracy, &mut make());
    let check = check_counts(built, &result, edges);
    let stats = result.statistics;
    let last_toggles = output_edges(built, &result).len();
    let attempts = stats.accepted_steps + stats.rejected_steps;
    println!(
        "  {label}: accepted {} steps, rejected {} ({:.1} %; {} of them Newton failures), {:.2} Newton iterations per accepted step; count right after every edge: {}; last-stage output edges {last_toggles}",
        stats.accepted_steps,
        stats.rejected_steps,
        100.0 * stats.rejected_steps as f64 / attempts.max(1) as f64,
        stats.newton_failures,
        stats.newton_iterations as f64 / stats.accepted_steps.max(1) as f64,
        if check.correct { "yes".to_string() } else { format!("NO (first wrong after edge {:?})", check.first_error) },
    );
    let samples: Vec<f64> = (0..repetitions)
        .map(|_| {
            let mut solver = make();
            let start = Instant::now();
            let _ = black_box(run(black_box(built), edges, &accuracy, &mut solver));
            start.elapsed().as_secs_f64()
        })
        .collect();
    let q = quartiles(samples);
    println!(
        "  {label}: whole run median {:.1} ms (quartiles {:.1}–{:.1} ms, n = {repetitions}); {:.2} µs per accepted step",
        q.median * 1e3,
        q.low * 1e3,
        q.high * 1e3,
        q.median * 1e6 / stats.accepted_steps.max(1) as f64
    );
    q.median
}

/// Edge times of the last stage at the default tolerance against a run at 1e-5.
fn accuracy(built: &BuiltCircuit, edges: usize, loose_accuracy: &RunAccuracy) {
    let loose = run(built, edges, loose_accuracy, &mut AutomaticSolver::default());
    let tight_accuracy =
        RunAccuracy { relative_tolerance: 1e-5, charge_tolerance_c: 1e-15, ..RunAccuracy::default() };
    let tight = run(built, edges, &tight_accuracy, &mut AutomaticSolver::default());
    let every_stage = |result: &TransientResult| -> Vec<f64> {
        (0..built.stages.len()).flat_map(|stage| stage_edges(built, result, stage)).collect()
    };
    let (a, b) = (every_stage(&loose), every_stage(&tight));
    if a.len() != b.len() {
        println!("  accuracy: {} output edges at 1e-3 but {} at 1e-5", a.len(), b.len());
        return;
    }
    let errors: Vec<f64> = a.iter().zip(&b).map(|(x, y)| (x - y).abs()).collect();
    let worst = errors.iter().copied().fold(0.0, f64::max);
    let q = quartiles(errors);
    println!(
        "  accuracy: {} output edges of all stages; |t − t(tight)| median {:.3} ns, largest {:.3} ns ({} vs {} accepted steps)",
        a.len(),
        q.median * 1e9,
        worst * 1e9,
        loose.statistics.accepted_steps,
        tight.statistics.accepted_steps
    );
}

/// Whole runs of chains of growing length with both solvers, to place the automatic choice.
fn crossover(design: &StageDesign, repetitions: usize) {
    println!("flipwright-core chain benchmark: dense/sparse crossover (16 input edges)");
    for stages in [1, 2, 3, 4, 6, 8] {
        let built = built(design, stages);
        let unknowns = System::compile(&built.circuit).map(|s| s.size()).unwrap_or(0);
        let time = |sparse: bool| {
            let samples: Vec<f64> = (0..repetitions)
                .map(|_| {
                    let start = Instant::now();
                    if sparse {
                        let _ =
                            black_box(run(&built, 16, &RunAccuracy::default(), &mut SparseSolver::default()));
                    } else {
                        let _ =
                            black_box(run(&built, 16, &RunAccuracy::default(), &mut DenseSolver::default()));
                    }
                    start.elapsed().as_secs_f64()
                })
                .collect();
            quartiles(samples).median
        };
        let (dense, sparse) = (time(false), time(true));
        println!(
            "  {stages} stage(s), {unknowns} unknowns: dense {:.2} ms, sparse {:.2} ms (medians, n = {repetitions}), dense/sparse {:.2}",
            dense * 1e3,
            sparse * 1e3,
            dense / sparse
        );
    }
}

/// Accepted steps by decade of step size, to see where a run spends them.
fn print_step_histogram(result: &TransientResult) {
    let mut decades = std::collections::BTreeMap::new();
    for pair in result.time_s.windows(2) {
        let step = pair[1] - pair[0];
        if step > 0.0 {
            *decades.entry(step.log10().floor() as i32).or_insert(0usize) += 1;
        }
    }
    for (decade, count) in decades {
        println!("  steps of 1e{decade}…1e{} s: {count}", decade + 1);
    }
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let has = |flag: &str| args.iter().any(|a| a == flag);
    let design = design();
    let repetitions = if has("quick") { 3 } else { 5 };
    // `once SOLVER STAGES EDGES`: a single run to profile (valgrind --tool=callgrind).
    if let Some(at) = args.iter().position(|a| a == "once") {
        let get = |offset: usize| args.get(at + offset).map(String::as_str).unwrap_or("");
        let stages = get(2).parse().unwrap_or(10);
        let edges = get(3).parse().unwrap_or(32);
        let built = built(&design, stages);
        let result = match get(1) {
            "dense" => {
                run(&built, edges, &RunAccuracy::for_stages(built.stages.len()), &mut DenseSolver::default())
            }
            "column" => {
                let mut solver = SparseSolver::with_ordering(FillOrdering::Column);
                let result = run(&built, edges, &RunAccuracy::for_stages(built.stages.len()), &mut solver);
                println!("{:?}; factors {:?}", solver.statistics(), solver.factor_entries());
                result
            }
            "pivoting" => run(
                &built,
                edges,
                &RunAccuracy::for_stages(built.stages.len()),
                &mut SparseSolver::always_pivoting(),
            ),
            _ => {
                let mut solver = SparseSolver::default();
                let result = run(&built, edges, &RunAccuracy::for_stages(built.stages.len()), &mut solver);
                println!(
                    "{:?}; pattern {} entries, factors {:?}",
                    solver.statistics(),
                    solver.pattern_entries(),
                    solver.factor_entries()
                );
                result
            }
        };
        println!("{:?}", result.statistics);
        print_step_histogram(&result);
        return;
    }
    // `accuracy-only STAGES EDGES`: the edge-time error of one chain alone.
    if let Some(at) = args.iter().position(|a| a == "accuracy-only") {
        let get = |offset: usize| args.get(at + offset).map(String::as_str).unwrap_or("");
        let built = built(&design, get(1).parse().unwrap_or(10));
        let charge_tolerance_c = get(3).parse().unwrap_or(RunAccuracy::default().charge_tolerance_c);
        let relative_tolerance = get(4).parse().unwrap_or(RunAccuracy::default().relative_tolerance);
        accuracy(
            &built,
            get(2).parse().unwrap_or(128),
            &RunAccuracy { charge_tolerance_c, relative_tolerance, ..RunAccuracy::default() },
        );
        return;
    }
    if has("crossover") {
        crossover(&design, repetitions);
        return;
    }
    for (title, stages, edges) in [
        ("one stage, 1000 toggles", 1, 1000),
        ("ten-stage chain, 1024 input edges (divide by 1024)", 10, 1024),
    ] {
        if stages > 1 && has("stage-only") {
            continue;
        }
        let built = built(&design, stages);
        println!("flipwright-core chain benchmark: {title}");
        let sparse = case("sparse", &built, edges, repetitions, SparseSolver::default);
        if !has("sparse-only") {
            let dense = case("dense ", &built, edges, repetitions, DenseSolver::default);
            println!("  dense/sparse median ratio {:.2}", dense / sparse);
        }
        if has("accuracy") {
            accuracy(&built, edges, &RunAccuracy::for_stages(built.stages.len()));
        }
    }
}
