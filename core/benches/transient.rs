//! Benchmark: a transistor bistable with base steering, triggered 100 times, simulated
//! end to end. Run with `cargo bench -p flipwright-core --bench transient`; prints medians.
//!
//! A plain harness like `stage.rs`: timed repetitions, median and quartiles, plus the run's
//! own counts (steps, Newton iterations per step) and the toggles it measured.

mod common;

use common::median_and_quartiles;
use std::hint::black_box;
use std::time::Instant;

use flipwright::device::ebers_moll::EbersMoll;
use flipwright::device::Polarity;
use flipwright::transient::measure::toggle_count;
use flipwright::transient::{
    simulate, Circuit, DiodeModel, Element, OperatingPointHints, TransientSettings, Waveform,
};

const TRIGGERS: usize = 100;
const PERIOD_S: f64 = 2e-6;

fn transistor() -> EbersMoll {
    EbersMoll {
        polarity: Polarity::Npn,
        temperature_c: 25.0,
        saturation_current_a: 1e-14,
        beta_forward: 100.0,
        beta_reverse: 2.0,
        forward_transit_s: 0.5e-9,
        reverse_transit_s: 10e-9,
        emitter_junction_capacitance_f: 2e-12,
        collector_junction_capacitance_f: 4e-12,
        emitter_junction_potential_v: 0.75,
        collector_junction_potential_v: 0.75,
        junction_grading: 0.33,
        base_resistance_ohm: 50.0,
        collector_resistance_ohm: 1.0,
        leakage_a: 1e-9,
        band_gap_ev: 1.11,
    }
}

fn element_resistor(name: &str, a: &str, b: &str, resistance_ohm: f64) -> Element {
    Element::Resistor { name: name.into(), positive_node: a.into(), negative_node: b.into(), resistance_ohm }
}
fn element_capacitor(name: &str, a: &str, b: &str, capacitance_f: f64) -> Element {
    Element::Capacitor { name: name.into(), positive_node: a.into(), negative_node: b.into(), capacitance_f }
}

fn bistable() -> Circuit {
    let diode = DiodeModel {
        saturation_current_a: 1e-12,
        emission_coefficient: 1.8,
        series_resistance_ohm: 5.0,
        junction_capacitance_f: 1e-12,
        junction_potential_v: 0.7,
        junction_grading: 0.4,
        transit_time_s: 4e-9,
    };
    let mut elements = vec![
        Element::VoltageSource {
            name: "VCC".into(),
            positive_node: "vcc".into(),
            negative_node: "0".into(),
            waveform: Waveform::Constant { value: 6.0 },
        },
        Element::VoltageSource {
            name: "VBB".into(),
            positive_node: "0".into(),
            negative_node: "vbb".into(),
            waveform: Waveform::Constant { value: 6.0 },
        },
        Element::VoltageSource {
            name: "VT".into(),
            positive_node: "trigger".into(),
            negative_node: "0".into(),
            waveform: Waveform::PulseTrain {
                initial_value: 0.0,
                pulsed_value: -4.0,
                delay_s: 0.5e-6,
                rise_time_s: 20e-9,
                fall_time_s: 20e-9,
                width_s: 300e-9,
                period_s: PERIOD_S,
            },
        },
    ];
    for (side, other) in [("1", "2"), ("2", "1")] {
        let (c, b, s) = (format!("c{side}"), format!("b{side}"), format!("s{side}"));
        let b_other = format!("b{other}");
        elements.push(element_resistor(&format!("RC{side}"), "vcc", &c, 1e3));
        elements.push(element_resistor(&format!("R1{side}"), &c, &b_other, 10e3));
        elements.push(element_capacitor(&format!("C1{side}"), &c, &b_other, 100e-12));
        elements.push(element_resistor(&format!("R2{side}"), &b, "vbb", 22e3));
        elements.push(element_resistor(&format!("RT{side}"), &s, &c, 10e3));
        elements.push(element_capacitor(&format!("CT{side}"), "trigger", &s, 47e-12));
        elements.push(Element::Diode {
            name: format!("D{side}"),
            anode: b.clone(),
            cathode: s,
            model: diode,
        });
        elements.push(Element::Transistor {
            name: format!("Q{side}"),
            collector: c,
            base: b,
            emitter: "0".into(),
            model: transistor(),
        });
    }
    Circuit { elements, temperature_c: 25.0 }
}

fn main() {
    let circuit = bistable();
    let settings = TransientSettings::new(0.5e-6 + TRIGGERS as f64 * PERIOD_S);
    // Q1 starts ON: its collector low, Q2's collector high.
    let hints = OperatingPointHints {
        node_voltages_v: vec![
            ("c1".into(), 0.1),
            ("c2".into(), 6.0),
            ("b1".into(), 0.75),
            ("b2".into(), -1.0),
        ],
    };
    let result = match simulate(&circuit, &settings, &hints) {
        Ok(result) => result,
        Err(error) => {
            eprintln!("benchmark circuit failed: {error}");
            std::process::exit(1);
        }
    };
    let stats = result.statistics;
    let toggles = result.voltage("c1").map(|v| toggle_count(v, 1.5, 4.5)).unwrap_or(0);
    println!("flipwright-core transient benchmark (bistable, {TRIGGERS} triggers)");
    println!(
        "accepted steps {}, rejected {}, Newton iterations {} ({:.2} per accepted step), toggles of c1 measured {toggles}",
        stats.accepted_steps,
        stats.rejected_steps,
        stats.newton_iterations,
        stats.newton_iterations as f64 / stats.accepted_steps.max(1) as f64
    );
    let repetitions = 7;
    let samples: Vec<f64> = (0..repetitions)
        .map(|_| {
            let start = Instant::now();
            let _ = black_box(simulate(black_box(&circuit), &settings, &hints));
            start.elapsed().as_secs_f64()
        })
        .collect();
    let (median, q1, q3) = median_and_quartiles(samples);
    println!(
        "whole run median {:.2} ms (quartiles {:.2}–{:.2} ms, n = {repetitions}); {:.2} µs per accepted step",
        median * 1e3,
        q1 * 1e3,
        q3 * 1e3,
        median * 1e6 / stats.accepted_steps.max(1) as f64
    );
}
