//! Benchmark: Monte Carlo yield of a ten-stage divide-by-1024 chain (the fixed stage values
//! of `chain-design.json`, loads from the chain plan). Target: 10 000 trials of the DC
//! margins under 200 ms native. Prints median and quartiles; `once TRIALS` runs one
//! Monte Carlo for `valgrind --tool=callgrind`.

mod common;

use std::hint::black_box;

use common::{median_and_quartiles, timed_samples};

use flipwright::chain::{plan_chain, ChainRequest, MethodKind};
use flipwright::design_file::DesignFile;
use flipwright::tolerance::monte_carlo::run_trials;
use flipwright::tolerance::{monte_carlo_yield, Distribution, LoadedChain, MonteCarloOptions};

const DESIGN: &str = include_str!("chain-design.json");

fn fail(message: String) -> ! {
    eprintln!("{message}");
    std::process::exit(1)
}

fn report(label: &str, samples: Vec<f64>, per: f64, per_label: &str) {
    let n = samples.len();
    let (median, q1, q3) = median_and_quartiles(samples);
    println!(
        "{label:<58} median {:>8.2} ms   (quartiles {:.2}–{:.2} ms, n = {n}); {:.3} µs per {per_label}",
        median * 1e3,
        q1 * 1e3,
        q3 * 1e3,
        median * 1e6 / per
    );
}

fn main() {
    let design = match DesignFile::load(DESIGN) {
        Ok((_, design)) => design,
        Err(errors) => fail(format!("chain-design.json is not valid: {errors:?}")),
    };
    let plan = plan_chain(&ChainRequest { modulus: 1024, natural_binary_code: false })
        .unwrap_or_else(|e| fail(e.to_string()));
    let Some(method) = plan.method(MethodKind::PlainBinary) else { fail("no binary plan".to_string()) };
    let chain = LoadedChain::from_plan(&design, method, None).unwrap_or_else(|e| fail(e.to_string()));
    let args: Vec<String> = std::env::args().skip(1).filter(|a| a != "--bench").collect();
    if args.first().map(String::as_str) == Some("once") {
        let trials = args.get(1).and_then(|t| t.parse().ok()).unwrap_or(10_000);
        let options = MonteCarloOptions { trials, ..MonteCarloOptions::default() };
        let report = monte_carlo_yield(&chain, &options).unwrap_or_else(|e| fail(e.to_string()));
        println!("{} trials: yield {:.4}, digest {}", trials, report.yield_fraction, report.digest);
        return;
    }
    println!(
        "flipwright-core yield benchmark: ten-stage chain (divide by 1024), {} distinct loaded stage(s)",
        chain.distinct.len()
    );
    let stage_evaluations = 10_000.0 * chain.stage_count() as f64;
    for distribution in [Distribution::Uniform, Distribution::Normal] {
        let options = MonteCarloOptions { trials: 10_000, distribution, ..MonteCarloOptions::default() };
        let samples = timed_samples(15, 2, || {
            let mut sum = 0.0;
            let result = run_trials(&chain, &options, |_, _, margins| sum += margins[0]);
            black_box(sum);
            result
        });
        report(
            &format!("10 000 trials, DC margins only ({distribution:?})"),
            samples,
            stage_evaluations,
            "stage evaluation",
        );
        let samples = timed_samples(15, 2, || monte_carlo_yield(&chain, &options));
        report(
            &format!("10 000 trials, full yield report ({distribution:?})"),
            samples,
            stage_evaluations,
            "stage evaluation",
        );
    }
}
