//! Benchmark: verification by simulation of the demo stage — the nominal eight-edge run, the
//! whole verification (nominal run plus both bisection searches), and a four-stage
//! divide-by-16 chain over two output periods. Run with
//! `cargo bench -p flipwright-core --bench verify`; prints medians and the engine's counts.

mod common;

use common::{median_and_quartiles, timed_samples};

use flipwright::design_file::DesignFile;
use flipwright::stage::synthesis::synthesise;
use flipwright::stage::StageDesign;
use flipwright::verify::{
    run_and_check, stage_circuit, verify_chain, verify_stage, InputPulse, RunAccuracy, SimulationCorner,
    VerifyOptions,
};

fn time<T>(label: &str, repetitions: usize, mut work: impl FnMut() -> T) {
    let samples = timed_samples(repetitions, 1, &mut work);
    let (median, q1, q3) = median_and_quartiles(samples);
    println!(
        "{label:<52} median {:>9.2} ms   (quartiles {:.2}–{:.2} ms, n = {repetitions})",
        median * 1e3,
        q1 * 1e3,
        q3 * 1e3
    );
}

fn demo() -> Option<StageDesign> {
    let input = DesignFile::demo().synthesis_input().ok()?;
    let outcome = synthesise(&input).ok()?;
    let mut complete = input;
    complete.values = outcome.values;
    StageDesign::new(complete).ok()
}

fn main() {
    let Some(design) = demo() else {
        eprintln!("the demo design could not be synthesised");
        std::process::exit(1);
    };
    let corner = SimulationCorner::nominal();
    let pulse = InputPulse {
        amplitude_v: design.input().supplies.collector_supply_v,
        rate_hz: design.input().requirements.toggle_rate_hz,
        edge_s: 20e-9,
        duty: 0.5,
    };
    let accuracy = RunAccuracy::default();
    println!("flipwright-core verification benchmark (demo stage, 9 V, 100 kHz)");
    if let Ok(built) = stage_circuit(&design, &pulse, &corner) {
        if let Ok((check, _)) = run_and_check(&built, 8, &accuracy) {
            let s = check.statistics;
            println!(
                "nominal run: 8 edges, correct {}, {} accepted / {} rejected steps, {:.2} Newton iterations per step",
                check.correct,
                s.accepted_steps,
                s.rejected_steps,
                s.newton_iterations as f64 / s.accepted_steps.max(1) as f64
            );
        }
        time("one stage, 8 edges (build + run + count check)", 30, || run_and_check(&built, 8, &accuracy));
    }
    let options = VerifyOptions::default();
    let mut runs = 0;
    let _ = verify_stage(&design, &options, &mut |_| {
        runs += 1;
        true
    });
    println!("whole verification: {runs} runs (nominal + sensitivity + toggle rate)");
    time("whole stage verification", 7, || verify_stage(&design, &options, &mut |_| true));
    if let Ok((check, _, _)) = verify_chain(&design, 4, 32, &pulse, &corner, &accuracy) {
        let s = check.statistics;
        println!(
            "four-stage chain, 32 edges: correct {}, {} accepted / {} rejected steps, {:.2} Newton iterations per step",
            check.correct,
            s.accepted_steps,
            s.rejected_steps,
            s.newton_iterations as f64 / s.accepted_steps.max(1) as f64
        );
    }
    time("four-stage divide-by-16 chain, 32 edges", 7, || {
        verify_chain(&design, 4, 32, &pulse, &corner, &accuracy)
    });
}
