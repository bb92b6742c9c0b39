//! Checks of the design-file reader: round trip, every bad field reported by path, version and format guards, quantity strings, semantic validation.

use flipwright::design_file::{ChainMethodChoice, ChainSection, DesignFile, DeviceChoice, FORMAT_VERSION};
use flipwright::device::archetypes;
use flipwright::stage::{BiasScheme, FieldError, StageValues, Steering, TriggerNetwork};
use serde_json::{json, Value};

/// The demo with a complete set of values, as the CLI's `demo` command writes it.
pub(crate) fn demo_with_values() -> DesignFile {
    let mut file = DesignFile::demo();
    file.values = Some(StageValues {
        bias: BiasScheme::Fixed,
        collector_resistor_ohm: 2.4e3,
        cross_resistor_ohm: 8.2e3,
        base_resistor_ohm: 13e3,
        emitter_resistor_ohm: 0.0,
        emitter_bypass_capacitor_f: 0.0,
        commutating_capacitor_f: 33e-12,
        trigger: Some(TriggerNetwork {
            steering: Steering::Base,
            trigger_capacitor_f: 27e-12,
            trigger_resistor_ohm: 6.2e3,
        }),
    });
    file
}

fn demo_json() -> Value {
    serde_json::from_str(&demo_with_values().to_json()).expect("to_json writes JSON")
}

/// Parses `document` expecting failure; returns the errors.
fn errors_of(document: &Value) -> Vec<FieldError> {
    match DesignFile::parse(&document.to_string()) {
        Ok(_) => panic!("parse accepted a bad file: {document}"),
        Err(errors) => errors,
    }
}

fn paths(errors: &[FieldError]) -> Vec<&str> {
    errors.iter().map(|e| e.path.as_str()).collect()
}

/// Demands an error at every path in `expected` (and lists what was reported when not).
fn check_paths(errors: &[FieldError], expected: &[&str]) {
    let reported = paths(errors);
    for path in expected {
        assert!(reported.contains(path), "no error at {path:?}; reported: {errors:#?}");
    }
}

#[test]
fn demo_round_trips_through_json() {
    // A file written by the tool must read back to the same content (common practice for a
    // save format; serde_json writes the shortest decimal that reads back to the same f64).
    for file in [DesignFile::demo(), demo_with_values()] {
        let text = file.to_json();
        let back = DesignFile::parse(&text).unwrap_or_else(|e| panic!("own output refused: {e:#?}"));
        assert_eq!(back, file);
        // And the text is stable: writing the parsed file again gives the same bytes.
        assert_eq!(back.to_json(), text);
    }
}

#[test]
fn custom_devices_round_trip_through_json() {
    let mut file = demo_with_values();
    file.transistor = DeviceChoice::Custom(archetypes::transistor("ge-pnp-alloy-15v").expect("archetype"));
    file.diode = DeviceChoice::Custom(archetypes::diode("ge-point-contact-diode").expect("archetype"));
    let back =
        DesignFile::parse(&file.to_json()).unwrap_or_else(|e| panic!("custom devices refused: {e:#?}"));
    assert_eq!(back, file);
}

#[test]
fn every_bad_field_is_reported_by_path() {
    let mut doc = demo_json();
    doc["supplies"]["collector_supply_v"] = json!("abc");
    doc["requirements"].as_object_mut().expect("object").remove("min_overdrive");
    let values = doc["values"].as_object_mut().expect("object");
    let rc = values.remove("collector_resistor_ohm").expect("field");
    values.insert("colector_resistor_ohm".to_string(), rc);
    doc["conditions"]["t_min_c"] = json!(true);
    let errors = errors_of(&doc);
    check_paths(
        &errors,
        &[
            "supplies.collector_supply_v",
            "requirements.min_overdrive",
            "values.colector_resistor_ohm",
            "values.collector_resistor_ohm",
            "conditions.t_min_c",
        ],
    );
    // Exactly these five, each once: nothing half-applied, nothing invented.
    assert_eq!(errors.len(), 5, "{errors:#?}");
    let by_path = |p: &str| errors.iter().find(|e| e.path == p).expect("reported").message.clone();
    assert!(by_path("requirements.min_overdrive").contains("missing"));
    assert!(by_path("values.colector_resistor_ohm").contains("unknown field"));
    // The unknown-field message lists what was expected, so the typo is easy to spot.
    assert!(by_path("values.colector_resistor_ohm").contains("collector_resistor_ohm"));
}

#[test]
fn an_unreadable_field_and_out_of_range_fields_are_reported_in_one_round() {
    // A hand-edited file with a number that does not read, a misspelt key, and two values
    // out of range elsewhere: all four are named at once (the reader used to stop at the
    // first kind, so the range problems showed only after the unreadable one was fixed).
    let mut doc = demo_json();
    doc["supplies"]["collector_supply_v"] = json!("nine volts");
    doc["conditions"]["t_max_c"] = json!(400.0);
    doc["requirements"]["min_overdrive"] = json!(0.2);
    let values = doc["values"].as_object_mut().expect("object");
    let rc = values.remove("cross_resistor_ohm").expect("field");
    values.insert("cros_resistor_ohm".to_string(), rc);
    let errors = errors_of(&doc);
    check_paths(
        &errors,
        &[
            "supplies.collector_supply_v",
            "values.cros_resistor_ohm",
            "values.cross_resistor_ohm",
            "conditions.t_max_c",
            "requirements.min_overdrive",
        ],
    );
    assert_eq!(errors.len(), 5, "each once, nothing about the stand-in values: {errors:#?}");
    // The range messages are the validator's own, as `load` gives them for a readable file.
    let mut readable = demo_json();
    readable["conditions"]["t_max_c"] = json!(400.0);
    readable["requirements"]["min_overdrive"] = json!(0.2);
    let Err(load_errors) = DesignFile::load(&readable.to_string()) else { panic!("out of range accepted") };
    for path in ["conditions.t_max_c", "requirements.min_overdrive"] {
        let message = |list: &[FieldError]| list.iter().find(|e| e.path == path).map(|e| e.message.clone());
        assert_eq!(message(&errors), message(&load_errors), "{path}");
    }
    // A problem inside a field that stood in is not reported twice or against the stand-in:
    // only the reading problem at the supply, though its stand-in is in range.
    assert_eq!(errors.iter().filter(|e| e.path.starts_with("supplies")).count(), 1);
    // Without values (synthesis), placeholder values stand in and say nothing.
    let mut no_values = doc.clone();
    no_values["values"] = Value::Null;
    let errors = errors_of(&no_values);
    assert!(errors.iter().all(|e| !e.path.starts_with("values")), "{errors:#?}");
    check_paths(
        &errors,
        &["supplies.collector_supply_v", "conditions.t_max_c", "requirements.min_overdrive"],
    );
    // A stand-in never makes a correct field look wrong: with t_min_c unreadable (standing in
    // at the demo's 0 °C), a valid t_max_c of −10 °C is not "below t_min_c"; with the bias
    // scheme unreadable (standing in as fixed), a self-bias emitter resistor is not refused.
    let mut cold = demo_json();
    cold["conditions"]["t_min_c"] = json!("minus forty");
    cold["conditions"]["t_max_c"] = json!(-10.0);
    assert_eq!(paths(&errors_of(&cold)), vec!["conditions.t_min_c"]);
    let mut self_bias = demo_json();
    self_bias["values"]["bias"] = json!("self bias");
    self_bias["values"]["emitter_resistor_ohm"] = json!(470.0);
    assert_eq!(paths(&errors_of(&self_bias)), vec!["values.bias"]);
}

#[test]
fn newer_version_is_refused_with_a_clear_message() {
    let mut doc = demo_json();
    doc["version"] = json!(FORMAT_VERSION + 1);
    let errors = errors_of(&doc);
    assert_eq!(paths(&errors), vec!["version"]);
    let message = &errors[0].message;
    assert!(message.contains(&(FORMAT_VERSION + 1).to_string()), "{message}");
    assert!(message.contains("newer"), "{message}");
}

#[test]
fn version_must_be_a_whole_number() {
    for bad in [json!("1"), json!(1.5), json!(-1), Value::Null] {
        let mut doc = demo_json();
        doc["version"] = bad.clone();
        check_paths(&errors_of(&doc), &["version"]);
    }
    let mut doc = demo_json();
    doc["version"] = json!(0);
    check_paths(&errors_of(&doc), &["version"]);
}

#[test]
fn wrong_format_is_refused() {
    for bad in [json!("some-other-tool"), json!(""), json!(42)] {
        let mut doc = demo_json();
        doc["format"] = bad.clone();
        check_paths(&errors_of(&doc), &["format"]);
    }
    let mut doc = demo_json();
    doc.as_object_mut().expect("object").remove("format");
    check_paths(&errors_of(&doc), &["format"]);
}

#[test]
fn not_json_and_not_an_object_are_refused() {
    let errors = DesignFile::parse("{ \"format\": ").expect_err("truncated JSON");
    assert_eq!(errors.len(), 1);
    assert!(errors[0].path.contains("line 1"), "{:?}", errors[0]);
    let errors = DesignFile::parse("[1, 2]").expect_err("array");
    assert_eq!(paths(&errors), vec!["(document)"]);
}

/// Sets one quantity field to a string and demands the parsed value.
fn check(section: &str, field: &str, text: &str, expected: f64) {
    let mut doc = demo_json();
    doc[section][field] = json!(text);
    let file = DesignFile::parse(&doc.to_string())
        .unwrap_or_else(|e| panic!("{section}.{field} = {text:?} refused: {e:#?}"));
    let got = match (section, field) {
        ("values", "collector_resistor_ohm") => file.values.expect("values").collector_resistor_ohm,
        ("values", "commutating_capacitor_f") => file.values.expect("values").commutating_capacitor_f,
        ("supplies", "collector_supply_v") => file.supplies.collector_supply_v,
        ("requirements", "toggle_rate_hz") => file.requirements.toggle_rate_hz,
        _ => unreachable!("field not wired into the test"),
    };
    // IEC 60062 codes and SI prefixes (BIPM SI Brochure table 7) name exact decimal values;
    // the reader promises the f64 nearest to them, which the literal also is.
    assert_eq!(got, expected, "{section}.{field} = {text:?}");
}

#[test]
fn quantities_may_be_written_as_strings() {
    check("values", "collector_resistor_ohm", "4k7", 4700.0); // IEC 60062: 4K7 = 4.7 kΩ
    check("values", "collector_resistor_ohm", "2.4 kΩ", 2400.0);
    check("values", "commutating_capacitor_f", "100 nF", 100e-9);
    check("values", "commutating_capacitor_f", "2n2", 2.2e-9); // IEC 60062: 2n2 = 2.2 nF
    check("supplies", "collector_supply_v", "9 V", 9.0);
    check("requirements", "toggle_rate_hz", "100 kHz", 100e3);
}

#[test]
fn malformed_quantity_strings_are_reported_by_path() {
    let mut doc = demo_json();
    doc["values"]["commutating_capacitor_f"] = json!("100 nV");
    doc["values"]["cross_resistor_ohm"] = json!("8k2k");
    let errors = errors_of(&doc);
    check_paths(&errors, &["values.commutating_capacitor_f", "values.cross_resistor_ohm"]);
}

#[test]
fn unknown_archetype_is_reported_with_the_known_ones() {
    let mut doc = demo_json();
    doc["transistor"] = json!("si-npn-imaginary");
    let errors = errors_of(&doc);
    check_paths(&errors, &["transistor"]);
    let message = &errors.iter().find(|e| e.path == "transistor").expect("reported").message;
    assert!(message.contains("si-npn-switch-40v"), "{message}");
}

#[test]
fn load_lists_every_semantic_problem_by_path() {
    let mut doc = demo_json();
    doc["values"]["cross_resistor_ohm"] = json!(-8200.0);
    doc["supplies"]["tolerance"] = json!(0.5);
    doc["conditions"]["t_max_c"] = json!(-10.0);
    let text = doc.to_string();
    // Structurally fine: parse accepts it …
    DesignFile::parse(&text).unwrap_or_else(|e| panic!("structurally valid file refused: {e:#?}"));
    // … and load reports every range problem at once.
    let errors = DesignFile::load(&text).expect_err("semantically invalid");
    check_paths(&errors, &["values.cross_resistor_ohm", "supplies.tolerance", "conditions.t_max_c"]);
}

#[test]
fn load_without_values_points_at_the_values_field() {
    let errors = DesignFile::load(&DesignFile::demo().to_json()).expect_err("no values");
    assert_eq!(paths(&errors), vec!["values"]);
}

#[test]
fn loaded_demo_is_a_valid_design() {
    let (file, design) = DesignFile::load(&demo_with_values().to_json()).unwrap_or_else(|e| panic!("{e:#?}"));
    assert_eq!(file, demo_with_values());
    assert_eq!(design.values().cross_resistor_ohm, 8.2e3);
    assert_eq!(design.transistor(), &archetypes::transistor("si-npn-switch-40v").expect("archetype"));
}

/// The chain section of a file: a version-1 document with `chain` set to `section`.
fn with_chain(section: Value) -> Value {
    let mut doc = demo_json();
    doc["chain"] = section;
    doc
}

#[test]
fn a_file_without_the_chain_section_still_opens_as_one_stage() {
    // Version-1 files written before the section existed have no "chain" key.
    let doc = demo_json();
    assert!(doc.get("chain").is_none(), "the demo writes no chain section");
    let file = DesignFile::parse(&doc.to_string()).unwrap_or_else(|e| panic!("{e:#?}"));
    assert_eq!(file.chain, None);
    let file = DesignFile::parse(&with_chain(Value::Null).to_string()).unwrap_or_else(|e| panic!("{e:#?}"));
    assert_eq!(file.chain, None);
}

#[test]
fn the_chain_section_round_trips_and_defaults_to_the_recommended_method() {
    let file = DesignFile::parse(&with_chain(json!({"divide_by": 10})).to_string())
        .unwrap_or_else(|e| panic!("{e:#?}"));
    let section = file.chain.expect("chain section read");
    assert_eq!(
        section,
        ChainSection { divide_by: 10, method: ChainMethodChoice::Recommended, natural_binary_code: false }
    );
    let mut file = demo_with_values();
    file.chain = Some(ChainSection {
        divide_by: 60,
        method: ChainMethodChoice::ResetOnCount,
        natural_binary_code: true,
    });
    let back = DesignFile::parse(&file.to_json()).unwrap_or_else(|e| panic!("{e:#?}"));
    assert_eq!(back, file);
    // A quantity string is a number too, as everywhere in the file.
    let file = DesignFile::parse(&with_chain(json!({"divide_by": "1024"})).to_string())
        .unwrap_or_else(|e| panic!("{e:#?}"));
    assert_eq!(file.chain.map(|c| c.divide_by), Some(1024));
}

#[test]
fn every_bad_chain_field_is_reported_by_path() {
    for bad in [json!(1), json!(5000), json!("abc"), json!(10.5), json!(-4), json!(true)] {
        let errors = errors_of(&with_chain(json!({"divide_by": bad.clone()})));
        assert_eq!(paths(&errors), vec!["chain.divide_by"], "divide_by = {bad}");
        assert!(errors[0].message.contains("2 to 4096"), "divide_by = {bad}: {}", errors[0].message);
    }
    let errors = errors_of(&with_chain(json!({"divide_by": 0, "method": "fastest", "natural": true})));
    check_paths(&errors, &["chain.divide_by", "chain.method", "chain.natural"]);
    assert_eq!(errors.len(), 3, "{errors:#?}");
    check_paths(&errors_of(&with_chain(json!({}))), &["chain.divide_by"]);
    check_paths(&errors_of(&with_chain(json!(10))), &["chain"]);
}

#[test]
fn a_method_that_cannot_divide_by_n_is_reported_at_the_method() {
    // Plain binary only divides by 2^n; the two corrections only exist when N is not one;
    // only the reset counts in natural binary.
    for (n, method, natural) in [
        (10, "plain_binary", false),
        (16, "reset_on_count", false),
        (16, "skip_feedback", false),
        (12, "skip_feedback", true),
    ] {
        let errors =
            errors_of(&with_chain(json!({"divide_by": n, "method": method, "natural_binary_code": natural})));
        assert_eq!(paths(&errors), vec!["chain.method"], "N = {n}, {method}");
    }
    for (n, method) in
        [(16, "plain_binary"), (10, "reset_on_count"), (10, "skip_feedback"), (4096, "recommended")]
    {
        DesignFile::parse(&with_chain(json!({"divide_by": n, "method": method})).to_string())
            .unwrap_or_else(|e| panic!("N = {n}, {method} refused: {e:#?}"));
    }
}
