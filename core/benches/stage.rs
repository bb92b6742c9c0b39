//! Benchmark: full analysis of the demo stage (both states, both models, worst case of every
//! margin). Run with `cargo bench -p flipwright-core` or `cargo xtask bench`; prints medians.
//!
//! A plain harness (no framework): many timed repetitions, report median and spread.
//!
//! Options: `once` runs one demo synthesis (for `valgrind --tool=callgrind`); `values` prints
//! the values, steps and a digest of the report that synthesis chooses for the demo and a grid
//! of variations of it, so a change meant to make synthesis faster can be checked to choose
//! exactly the same (compare the output before and after with `diff`).

mod common;

use common::{median_and_quartiles, timed_samples};

use flipwright::design_file::{DesignFile, DeviceChoice};
use flipwright::stage::analysis::analyse;
use flipwright::stage::synthesis::synthesise;
use flipwright::stage::worst_case;
use flipwright::stage::{BiasScheme, StageDesign, Steering};

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

/// FNV-1a of a text, 64 bits.
fn fnv1a(text: &str) -> u64 {
    text.bytes().fold(0xcbf2_9ce4_8422_2325u64, |h, b| (h ^ u64::from(b)).wrapping_mul(0x0100_0000_01b3))
}

/// The demo with every combination of transistor, bias, steering, supply and current source.
fn variations() -> Vec<(String, DesignFile)> {
    let mut list = Vec::new();
    for transistor in flipwright::device::archetypes::TRANSISTOR_ARCHETYPE_IDS {
        for bias in [BiasScheme::Fixed, BiasScheme::SelfBias] {
            for steering in [Steering::Base, Steering::Collector] {
                for supply_v in [6.0, 9.0, 15.0] {
                    for current in [Some(4e-3), Some(1e-3), None] {
                        let mut file = DesignFile::demo();
                        file.transistor = DeviceChoice::Archetype(transistor.to_string());
                        file.requirements.bias = bias;
                        file.requirements.steering = steering;
                        file.supplies.collector_supply_v = supply_v;
                        file.requirements.min_output_swing_v = 0.5 * supply_v;
                        file.requirements.collector_current_a = current;
                        file.requirements.power_budget_w = current.is_none().then_some(0.06);
                        let label =
                            format!("{transistor} {bias:?} {steering:?} {supply_v} V current {current:?}");
                        list.push((label, file));
                    }
                }
            }
        }
    }
    list
}

/// Prints what synthesis chooses for each variation (or why it cannot).
fn print_values() {
    let mut all = vec![("demo".to_string(), DesignFile::demo())];
    all.extend(variations());
    for (label, file) in all {
        let line = match file.synthesis_input() {
            Err(errors) => format!("invalid requirements {errors:?}"),
            Ok(input) => match synthesise(&input) {
                Err(e) => format!("error {e}"),
                Ok(outcome) => {
                    let report = serde_json::to_string(&outcome.report).unwrap_or_default();
                    format!(
                        "{:?} met {} report {:016x}\n  steps {:?}\n  shortfalls {:?}",
                        outcome.values,
                        outcome.met,
                        fnv1a(&report),
                        outcome.steps,
                        outcome.shortfalls
                    )
                }
            },
        };
        println!("{label}: {line}");
    }
}

fn main() {
    // `cargo bench` adds `--bench` to the arguments, so look for the option among them.
    let option = |name: &str| std::env::args().any(|a| a == name);
    if option("values") {
        print_values();
        return;
    }
    let file = DesignFile::demo();
    let Ok(input) = file.synthesis_input() else {
        eprintln!("demo design does not validate");
        std::process::exit(1);
    };
    if option("once") {
        std::hint::black_box(synthesise(&input).is_ok());
        return;
    }
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
