//! Benchmark: full analysis of the demo stage (both states, both models, worst case of every
//! margin). Run with `cargo bench -p flipwright-core` or `cargo xtask bench`; prints medians.
//!
//! A plain harness (no framework): many timed repetitions, report median and spread.

mod common;

use common::{median_and_quartiles, timed_samples};

use flipwright::design_file::DesignFile;
use flipwright::stage::analysis::analyse;
use flipwright::stage::synthesis::synthesise;
use flipwright::stage::worst_case;
use flipwright::stage::StageDesign;

fn time<T>(label: &str, repetitions: usize, mut work: impl FnMut() -> T) {
    // Warm up caches and branch predictors.
    let samples = timed_samples(repetitions, repetitions.min(20), &mut work);
    let (median, q1, q3) = median_and_quartiles(samples);
    println!(
        "{label:<46} median {:>10.1} µs   (quartiles {:.1}–{:.1} µs, n = {repetitions})",
        median * 1e6,
        q1 * 1e6,
        q3 * 1e6
    );
}

fn main() {
    let file = DesignFile::demo();
    let Ok(input) = file.synthesis_input() else {
        eprintln!("demo design does not validate");
        std::process::exit(1);
    };
    let Ok(outcome) = synthesise(&input) else {
        eprintln!("demo synthesis failed");
        std::process::exit(1);
    };
    let Ok(design) = StageDesign::new({
        let mut i = input.clone();
        i.values = outcome.values;
        i
    }) else {
        eprintln!("demo values do not validate");
        std::process::exit(1);
    };
    let Some(derivation) = flipwright::device::ebers_moll::EbersMoll::from_datasheet(design.transistor())
    else {
        eprintln!("no model");
        std::process::exit(1);
    };
    println!("flipwright-core benchmarks (demo stage)");
    time("worst case of every margin (DC + loop gain)", 400, || {
        worst_case::analyse(&design, &derivation.model)
    });
    time("DC worst case on the closed-form kernel (screening)", 400, || {
        flipwright::tolerance::kernel::worst_dc_margins(&design)
    });
    time("full analysis (states, exact, worst case)", 400, || analyse(&design));
    time("synthesis from requirements", 10, || synthesise(&input));
}
