//! Property tests: validation, analysis and the design- and circuit-file readers return a result or a typed error on any input, never a panic.

use flipwright::design_file::DesignFile;
use flipwright::device::archetypes::{self, DIODE_ARCHETYPE_IDS, TRANSISTOR_ARCHETYPE_IDS};
use flipwright::stage::analysis::analyse;
use flipwright::stage::{
    BiasScheme, Conditions, Load, Requirements, StageDesign, StageInput, StageValues, Steering, Supplies,
    TriggerNetwork,
};
use flipwright::transient::CircuitFile;
use flipwright::units::ESeries;
use proptest::prelude::*;
use proptest::sample::Index;
use serde_json::{json, Value};

/// Case count: each case runs a full analysis (both models, worst case, switching), a few
/// tens of milliseconds in a debug build; 64 keeps the module well under 30 s.
fn config() -> ProptestConfig {
    ProptestConfig { cases: 64, failure_persistence: None, ..ProptestConfig::default() }
}

/// Log-uniform resistance 10 Ω … 10 MΩ.
fn resistance() -> impl Strategy<Value = f64> {
    (1.0f64..7.0).prop_map(|exponent| 10f64.powf(exponent))
}

fn load() -> impl Strategy<Value = Load> {
    prop_oneof![
        Just(Load::None),
        (resistance(), -20.0f64..20.0)
            .prop_map(|(resistance_ohm, return_v)| Load::Resistance { resistance_ohm, return_v }),
        (-2e-3f64..2e-3).prop_map(|current_a| Load::Current { current_a }),
    ]
}

fn trigger() -> impl Strategy<Value = Option<TriggerNetwork>> {
    prop_oneof![
        Just(None),
        (any::<bool>(), -12.0f64..-8.0, resistance()).prop_map(
            |(base, exponent, trigger_resistor_ohm)| Some(TriggerNetwork {
                steering: if base { Steering::Base } else { Steering::Collector },
                trigger_capacitor_f: 10f64.powf(exponent),
                trigger_resistor_ohm,
            })
        ),
    ]
}

prop_compose! {
    /// A stage input over wide ranges: supplies 1–60 V, resistors 10 Ω–10 MΩ, tolerances up to
    /// 30 %, −55…125 °C, every archetype, every load kind, with or without a trigger network.
    fn stage_input()(
        transistor in 0..TRANSISTOR_ARCHETYPE_IDS.len(),
        diode in 0..DIODE_ARCHETYPE_IDS.len(),
        self_bias in any::<bool>(),
        vcc in 1.0f64..60.0,
        vbb in 0.5f64..30.0,
        supply_tolerance in 0.0f64..0.2,
        (rc, r1, r2, re) in (resistance(), resistance(), resistance(), resistance()),
        c1_exponent in -13.0f64..-7.0,
        trigger in trigger(),
        t_min in -55.0f64..125.0,
        t_span in 0.0f64..120.0,
        resistor_tolerance in 0.0f64..0.3,
        capacitor_tolerance in 0.0f64..0.5,
        loads in (load(), load()),
        overdrive in 1.0f64..4.0,
        current in prop::option::of(1e-4f64..50e-3),
    ) -> StageInput {
        let bias = if self_bias { BiasScheme::SelfBias } else { BiasScheme::Fixed };
        StageInput {
            transistor: archetypes::transistor(TRANSISTOR_ARCHETYPE_IDS[transistor]).expect("listed"),
            diode: archetypes::diode(DIODE_ARCHETYPE_IDS[diode]).expect("listed"),
            supplies: Supplies {
                collector_supply_v: vcc,
                bias_supply_v: if self_bias { 0.0 } else { vbb },
                tolerance: supply_tolerance,
            },
            conditions: Conditions {
                t_min_c: t_min,
                t_max_c: (t_min + t_span).min(125.0),
                resistor_tolerance,
                capacitor_tolerance,
            },
            requirements: Requirements {
                collector_current_a: current,
                power_budget_w: None,
                target_overdrive: overdrive * 1.2,
                min_overdrive: overdrive,
                min_cutoff_margin_v: 0.2,
                min_loop_gain: 2.0,
                min_output_swing_v: 0.5 * vcc,
                toggle_rate_hz: 10e3,
                toggle_rate_margin: 2.0,
                trigger_amplitude_v: None,
                steering: trigger.map(|t| t.steering).unwrap_or(Steering::Base),
                bias,
                divider_current_fraction: 0.1,
                resistor_series: ESeries::E24,
                capacitor_series: ESeries::E12,
            },
            loads: [loads.0, loads.1],
            values: StageValues {
                bias,
                collector_resistor_ohm: rc,
                cross_resistor_ohm: r1,
                base_resistor_ohm: r2,
                emitter_resistor_ohm: if self_bias { re } else { 0.0 },
                emitter_bypass_capacitor_f: if self_bias { 1e-6 } else { 0.0 },
                commutating_capacitor_f: 10f64.powf(c1_exponent),
                trigger,
            },
        }
    }
}

/// The demo with values, as JSON.
fn demo_json() -> Value {
    serde_json::from_str(&crate::design_file::demo_with_values().to_json()).expect("own JSON")
}

/// Every leaf and inner node of a JSON document, as a list of JSON-pointer paths.
fn pointers(value: &Value, prefix: String, out: &mut Vec<String>) {
    match value {
        Value::Object(map) => {
            for (key, child) in map {
                let path = format!("{prefix}/{key}");
                out.push(path.clone());
                pointers(child, path, out);
            }
        }
        Value::Array(items) => {
            for (index, child) in items.iter().enumerate() {
                let path = format!("{prefix}/{index}");
                out.push(path.clone());
                pointers(child, path, out);
            }
        }
        _ => {}
    }
}

/// The committed example circuit file, the base of the circuit-file mutations.
const EXAMPLE_CIRCUIT: &str = include_str!("../../../examples/binary-stage-9v.circuit.json");

fn json_value() -> impl Strategy<Value = Value> {
    prop_oneof![
        Just(Value::Null),
        any::<bool>().prop_map(Value::Bool),
        any::<i64>().prop_map(|n| json!(n)),
        any::<f64>().prop_map(|x| json!(x)),
        (-1e4f64..1e4).prop_map(|x| json!(x)),
        "[0-9a-zA-Zµ .,+-]{0,10}".prop_map(Value::String),
        Just(json!([])),
        Just(json!({})),
        Just(json!([1, 2, 3])),
        Just(json!({ "kind": "resistance" })),
    ]
}

/// Applies `(location, replacement)` edits to the demo: replace the value at a path, or
/// remove it when the replacement is `{}` and the path is inside an object.
fn mutated_demo(edits: &[(Index, Value)]) -> String {
    mutated(demo_json(), edits)
}

/// The same edits on any document.
fn mutated(mut doc: Value, edits: &[(Index, Value)]) -> String {
    for (location, replacement) in edits {
        let mut all = Vec::new();
        pointers(&doc, String::new(), &mut all);
        if all.is_empty() {
            break;
        }
        let path = location.get(&all).clone();
        if let Some(slot) = doc.pointer_mut(&path) {
            *slot = replacement.clone();
        }
    }
    doc.to_string()
}

proptest! {
    #![proptest_config(config())]

    #[test]
    fn analysis_of_any_input_returns_a_result_or_typed_errors(input in stage_input()) {
        // A panic anywhere in validation or analysis fails the property (proptest catches it).
        match StageDesign::new(input) {
            Err(errors) => {
                prop_assert!(!errors.is_empty());
                for e in &errors {
                    prop_assert!(!e.path.is_empty() && !e.message.is_empty(), "{:?}", e);
                }
            }
            Ok(design) => {
                if let Ok(report) = analyse(&design) {
                    prop_assert_eq!(report.handbook_states.len(), 2);
                    prop_assert_eq!(report.all_pass, report.margins.iter().all(|m| m.pass));
                }
            }
        }
    }

    #[test]
    fn parse_never_panics_on_arbitrary_text(text in any::<String>()) {
        let _ = DesignFile::parse(&text);
    }

    #[test]
    fn parse_never_panics_on_json_shaped_noise(text in "[{}\\[\\]\":,0-9a-z_. -]{0,80}") {
        let _ = DesignFile::parse(&text);
    }

    #[test]
    fn load_never_panics_on_a_mutated_demo(edits in prop::collection::vec((any::<Index>(), json_value()), 1..4)) {
        let text = mutated_demo(&edits);
        match DesignFile::load(&text) {
            Err(errors) => prop_assert!(!errors.is_empty()),
            // Edits that keep the file valid must still analyse without panicking.
            Ok((_, design)) => { let _ = analyse(&design); }
        }
    }

    #[test]
    fn circuit_file_load_never_panics_on_a_mutated_example(edits in prop::collection::vec((any::<Index>(), json_value()), 1..4)) {
        let example: Value = serde_json::from_str(EXAMPLE_CIRCUIT).unwrap_or(Value::Null);
        let text = mutated(example, &edits);
        match CircuitFile::load(&text) {
            Err(errors) => {
                prop_assert!(!errors.is_empty());
                for e in &errors {
                    prop_assert!(!e.path.is_empty() && !e.message.is_empty(), "{:?}", e);
                }
            }
            Ok(file) => prop_assert!(!file.recorded_probes().is_empty()),
        }
    }

    #[test]
    fn circuit_file_parse_never_panics_on_arbitrary_text(text in any::<String>()) {
        let _ = CircuitFile::parse(&text);
    }

    #[test]
    fn parse_never_panics_on_a_truncated_or_spliced_demo(cut in any::<Index>(), insert in "[\"{}\\[\\],:0-9a-z]{0,4}") {
        let text = demo_json().to_string();
        let boundaries: Vec<usize> = text.char_indices().map(|(i, _)| i).chain(std::iter::once(text.len())).collect();
        let at = *cut.get(&boundaries);
        let spliced = format!("{}{}{}", &text[..at], insert, &text[at..]);
        let _ = DesignFile::parse(&spliced);
        let _ = DesignFile::parse(&text[..at]);
    }
}

/// A stage that passes validation, built from the shrunk failing case of the property above.
fn overshooting_self_bias() -> StageInput {
    let mut input = crate::handbook::fixed_bias_input(
        archetypes::transistor("si-npn-switch-40v").expect("archetype"),
        47.1,
        0.0,
        10.0,
        10.0,
        10.0,
    );
    input.requirements.bias = BiasScheme::SelfBias;
    input.values.bias = BiasScheme::SelfBias;
    input.values.emitter_resistor_ohm = 10.0;
    input.values.emitter_bypass_capacitor_f = 1e-6;
    input
}

#[test]
fn middle_point_guess_does_not_panic_when_the_emitter_guess_overshoots_the_supply() {
    // Guards the f64::clamp panic the property above found (fixed in 2dff953). Self bias,
    // every resistor 10 Ω, 47.1 V: valid by `StageDesign::new`, so analysis must return a
    // report or a typed error.
    let design =
        StageDesign::new(overshooting_self_bias()).unwrap_or_else(|e| panic!("valid input refused: {e:?}"));
    let _ = analyse(&design);
}

#[test]
fn middle_point_guess_does_not_panic_on_a_supply_below_the_base_guess() {
    // Guards the same clamp, reached from the other side (fails on the code before 2dff953):
    // 0.5 V is the smallest collector supply validation accepts, and the guess starts the
    // bases at 0.6 V, above it.
    let input = crate::handbook::fixed_bias_input(
        archetypes::transistor("si-npn-switch-40v").expect("archetype"),
        0.5,
        1.0,
        100.0,
        1e3,
        10e3,
    );
    let design = StageDesign::new(input).unwrap_or_else(|e| panic!("valid input refused: {e:?}"));
    let _ = analyse(&design);
}
