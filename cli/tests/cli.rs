//! End-to-end checks of the `flipwright` binary: commands, files written, output formats and documented exit codes.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use flipwright::design_file::DesignFile;
use serde_json::Value;

const BIN: &str = env!("CARGO_BIN_EXE_flipwright");

/// A fresh scratch directory per test (removed when dropped).
struct Scratch(PathBuf);

impl Scratch {
    fn new(name: &str) -> Scratch {
        let dir = std::env::temp_dir().join(format!("flipwright-cli-{}-{name}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(&dir).expect("create scratch directory");
        Scratch(dir)
    }
    fn path(&self, file: &str) -> PathBuf {
        self.0.join(file)
    }
}

impl Drop for Scratch {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

fn run(args: &[&str], dir: &Path) -> Output {
    Command::new(BIN).args(args).current_dir(dir).output().expect("binary runs")
}

fn stdout(output: &Output) -> String {
    String::from_utf8_lossy(&output.stdout).into_owned()
}

fn stderr(output: &Output) -> String {
    String::from_utf8_lossy(&output.stderr).into_owned()
}

/// Demands the exit code (documented in `flipwright help`: 0 success, 1 margins fail,
/// 2 bad command line, 3 invalid design file).
fn check_exit(output: &Output, code: i32, what: &str) {
    assert_eq!(
        output.status.code(),
        Some(code),
        "{what}: exit {:?}\n--- stdout\n{}\n--- stderr\n{}",
        output.status.code(),
        stdout(output),
        stderr(output)
    );
}

/// Writes the demo design into `scratch` and returns its path.
fn demo_file(scratch: &Scratch) -> PathBuf {
    let path = scratch.path("demo.json");
    let output = run(&["demo", path.to_str().expect("utf-8 path")], &scratch.0);
    check_exit(&output, 0, "demo");
    path
}

/// Splits one CSV record per RFC 4180 (quoted fields may hold commas and doubled quotes).
fn csv_fields(line: &str) -> Vec<String> {
    let mut fields = vec![String::new()];
    let mut quoted = false;
    let mut chars = line.chars().peekable();
    while let Some(c) = chars.next() {
        match (c, quoted) {
            ('"', true) if chars.peek() == Some(&'"') => {
                chars.next();
                fields.last_mut().expect("field").push('"');
            }
            ('"', _) => quoted = !quoted,
            (',', false) => fields.push(String::new()),
            (c, _) => fields.last_mut().expect("field").push(c),
        }
    }
    fields
}

#[test]
fn demo_writes_a_design_with_values() {
    let scratch = Scratch::new("demo");
    let path = demo_file(&scratch);
    let text = std::fs::read_to_string(&path).expect("demo file written");
    let (file, design) = DesignFile::load(&text).unwrap_or_else(|e| panic!("demo file invalid: {e:#?}"));
    assert!(file.values.is_some());
    assert!(design.values().collector_resistor_ohm > 0.0);
}

#[test]
fn check_passes_the_demo_and_prints_pass_lines() {
    let scratch = Scratch::new("check");
    let path = demo_file(&scratch);
    let output = run(&["check", path.to_str().expect("utf-8")], &scratch.0);
    check_exit(&output, 0, "check demo");
    let text = stdout(&output);
    let pass_lines = text.lines().filter(|l| l.trim_end().ends_with("PASS")).count();
    // Ten margins are reported for a toggle stage with a trigger network (DC, loop gain,
    // toggle rate, trigger amplitude); every one passes for the demo.
    assert!(pass_lines >= 9, "only {pass_lines} PASS lines:\n{text}");
    assert!(!text.lines().any(|l| l.trim_end().ends_with("FAIL")), "{text}");
}

#[test]
fn check_json_is_valid_json_with_the_margins() {
    let scratch = Scratch::new("json");
    let path = demo_file(&scratch);
    let output = run(&["check", path.to_str().expect("utf-8"), "--json"], &scratch.0);
    check_exit(&output, 0, "check --json");
    let json: Value =
        serde_json::from_str(&stdout(&output)).unwrap_or_else(|e| panic!("not JSON (RFC 8259): {e}"));
    let margins = json["report"]["margins"].as_array().expect("report.margins is an array");
    assert!(margins.len() >= 9, "{} margins", margins.len());
    for m in margins {
        assert!(m["pass"].is_boolean() && m["worst"].is_number() && m["title"].is_string(), "{m}");
    }
    assert_eq!(json["design"]["format"], "flipwright-design");
}

#[test]
fn parts_csv_has_a_header_and_stage_one_designators() {
    let scratch = Scratch::new("parts");
    let path = demo_file(&scratch);
    let output = run(&["parts", path.to_str().expect("utf-8"), "--csv"], &scratch.0);
    check_exit(&output, 0, "parts --csv");
    let text = stdout(&output);
    let mut lines = text.lines();
    let header = csv_fields(lines.next().expect("header line"));
    assert_eq!(header.first().map(String::as_str), Some("designator"));
    let rows: Vec<Vec<String>> = lines.map(csv_fields).collect();
    // RFC 4180: every record has the same number of fields as the header.
    for row in &rows {
        assert_eq!(row.len(), header.len(), "{row:?}");
    }
    // Stage numbering R101 … for stage 1 (common practice); R101 is Q1's collector resistor,
    // whose value must be the one in the file.
    let r101 = rows.iter().find(|r| r[0] == "R101").unwrap_or_else(|| panic!("no R101 in:\n{text}"));
    let value_column = header.iter().position(|h| h == "value_si").expect("value_si column");
    let (_, design) = DesignFile::load(&std::fs::read_to_string(&path).expect("read")).expect("valid");
    let value: f64 = r101[value_column].parse().expect("numeric value_si");
    assert_eq!(value, design.values().collector_resistor_ohm);
    // Stage 2 renumbers from 201.
    let output = run(&["parts", path.to_str().expect("utf-8"), "--csv", "--stage", "2"], &scratch.0);
    check_exit(&output, 0, "parts --stage 2");
    assert!(stdout(&output).lines().any(|l| l.starts_with("R201,")));
}

#[test]
fn bad_fields_exit_3_and_are_named_on_stderr() {
    let scratch = Scratch::new("bad");
    let path = demo_file(&scratch);
    let mut doc: Value = serde_json::from_str(&std::fs::read_to_string(&path).expect("read")).expect("JSON");
    doc["supplies"]["collector_supply_v"] = Value::String("abc".into());
    doc["requirements"].as_object_mut().expect("object").remove("min_overdrive");
    let bad = scratch.path("bad.json");
    std::fs::write(&bad, doc.to_string()).expect("write");
    for command in ["check", "parts", "design"] {
        let output = run(&[command, bad.to_str().expect("utf-8")], &scratch.0);
        check_exit(&output, 3, command);
        let err = stderr(&output);
        assert!(err.contains("supplies.collector_supply_v"), "{command}: {err}");
        assert!(err.contains("requirements.min_overdrive"), "{command}: {err}");
    }
    // A semantic problem is reported by path too.
    doc = serde_json::from_str(&std::fs::read_to_string(&path).expect("read")).expect("JSON");
    doc["values"]["cross_resistor_ohm"] = serde_json::json!(-1.0);
    std::fs::write(&bad, doc.to_string()).expect("write");
    let output = run(&["check", bad.to_str().expect("utf-8")], &scratch.0);
    check_exit(&output, 3, "check negative R1");
    assert!(stderr(&output).contains("values.cross_resistor_ohm"), "{}", stderr(&output));
}

#[test]
fn missing_file_exits_3() {
    let scratch = Scratch::new("missing");
    let output = run(&["check", "no-such-file.json"], &scratch.0);
    check_exit(&output, 3, "check missing file");
    assert!(stderr(&output).contains("no-such-file.json"));
}

#[test]
fn bad_command_lines_exit_2() {
    let scratch = Scratch::new("usage");
    for args in [
        vec!["frobnicate"],
        vec!["check"],
        vec!["check", "a.json", "b.json"],
        vec!["check", "a.json", "--bogus"],
        vec!["parts", "a.json", "--stage", "0"],
    ] {
        let output = run(&args, &scratch.0);
        check_exit(&output, 2, &args.join(" "));
        assert!(stderr(&output).contains("flipwright help"), "{args:?}: {}", stderr(&output));
    }
}

#[test]
fn version_names_the_package_version() {
    let scratch = Scratch::new("version");
    for flag in ["--version", "-V", "version"] {
        let output = run(&[flag], &scratch.0);
        check_exit(&output, 0, flag);
        assert_eq!(stdout(&output).trim(), format!("flipwright {}", env!("CARGO_PKG_VERSION")));
    }
}

#[test]
fn help_documents_the_exit_codes() {
    let scratch = Scratch::new("help");
    for args in [vec![], vec!["help"], vec!["--help"]] {
        let output = run(&args, &scratch.0);
        check_exit(&output, 0, "help");
        let text = stdout(&output);
        assert!(
            text.contains("EXIT CODES") && text.contains("3  unreadable or invalid design file"),
            "{text}"
        );
    }
}

#[test]
fn design_completes_a_requirements_only_file() {
    let scratch = Scratch::new("design");
    let input = scratch.path("wanted.json");
    std::fs::write(&input, DesignFile::demo().to_json()).expect("write");
    // Without values, `check` points at `design`.
    let output = run(&["check", input.to_str().expect("utf-8")], &scratch.0);
    check_exit(&output, 3, "check requirements-only");
    assert!(stderr(&output).contains("flipwright design"), "{}", stderr(&output));
    let out = scratch.path("done.json");
    let output =
        run(&["design", input.to_str().expect("utf-8"), "--out", out.to_str().expect("utf-8")], &scratch.0);
    // The demo's requirements are met (exit 0); 1 would mean a shortfall was reported.
    check_exit(&output, 0, "design");
    let text = std::fs::read_to_string(&out).expect("completed file written");
    let (file, _) = DesignFile::load(&text).unwrap_or_else(|e| panic!("completed file invalid: {e:#?}"));
    assert!(file.values.is_some());
    assert_eq!(file.requirements, DesignFile::demo().requirements, "requirements must be kept as given");
    // The completed file checks clean.
    let output = run(&["check", out.to_str().expect("utf-8")], &scratch.0);
    check_exit(&output, 0, "check completed file");
    // Default output name: FILE with .designed.json.
    let output = run(&["design", input.to_str().expect("utf-8")], &scratch.0);
    check_exit(&output, 0, "design, default output");
    assert!(scratch.path("wanted.designed.json").exists());
}

/// The committed example circuit (examples/binary-stage-9v.circuit.json).
fn example_circuit() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../examples/binary-stage-9v.circuit.json")
}

/// An RC low-pass fed by one 5 V pulse: small enough to write out in a test.
fn rc_circuit() -> Value {
    serde_json::json!({
        "format": "flipwright-circuit", "version": 1, "name": "RC test",
        "circuit": {"elements": [
            {"kind": "voltage_source", "name": "VIN", "positive_node": "in", "negative_node": "0",
             "waveform": {"shape": "pulse_train", "initial_value": 0, "pulsed_value": 5, "delay_s": "1u",
                          "rise_time_s": "10n", "fall_time_s": "10n", "width_s": "20u", "period_s": "50u"}},
            {"kind": "resistor", "name": "R1", "positive_node": "in", "negative_node": "out", "resistance_ohm": "1k"},
            {"kind": "capacitor", "name": "C1", "positive_node": "out", "negative_node": "0", "capacitance_f": "1n"}
        ]},
        "run": {"stop_time_s": "30u"}
    })
}

fn write_json(scratch: &Scratch, name: &str, doc: &Value) -> PathBuf {
    let path = scratch.path(name);
    std::fs::write(&path, doc.to_string()).expect("write");
    path
}

/// Reads the CSV `simulate` wrote: header and numeric rows (RFC 4180, every row as wide as
/// the header).
fn read_waveform_csv(path: &Path) -> (Vec<String>, Vec<Vec<f64>>) {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("no CSV at {}: {e}", path.display()));
    let mut lines = text.lines();
    let header = csv_fields(lines.next().expect("header line"));
    let rows: Vec<Vec<f64>> = lines
        .map(|line| csv_fields(line).iter().map(|f| f.parse::<f64>().expect("numeric field")).collect())
        .collect();
    for row in &rows {
        assert_eq!(row.len(), header.len(), "{row:?}");
    }
    (header, rows)
}

#[test]
fn simulate_runs_the_example_and_every_clock_edge_toggles_it() {
    let scratch = Scratch::new("simulate-example");
    let csv = scratch.path("wave.csv");
    let output = run(
        &["simulate", example_circuit().to_str().expect("utf-8"), "--csv", csv.to_str().expect("utf-8")],
        &scratch.0,
    );
    check_exit(&output, 0, "simulate example");
    let (header, rows) = read_waveform_csv(&csv);
    assert_eq!(
        header,
        ["time_s", "voltage(c1)_v", "voltage(c2)_v", "voltage(b1)_v", "voltage(b2)_v", "current(VCC)_a"]
    );
    assert!(rows.len() > 100, "{} rows", rows.len());
    // Times strictly increase from 0 to the file's 40 µs stop.
    assert_eq!(rows.first().map(|r| r[0]), Some(0.0));
    assert!(rows.windows(2).all(|w| w[1][0] > w[0][0]));
    assert!((rows.last().map(|r| r[0]).unwrap_or(0.0) - 40e-6).abs() < 1e-15);
    // A toggle (divide-by-two) stage changes state once per falling clock edge (domain brief
    // §6); the example has four. The report's c1 line says so.
    let text = stdout(&output);
    let c1 =
        text.lines().find(|l| l.starts_with("voltage(c1)")).unwrap_or_else(|| panic!("no c1 line:\n{text}"));
    let toggles: Vec<&str> = c1.split_whitespace().collect();
    assert_eq!(toggles.get(9).copied(), Some("4"), "{c1}");
    assert!(text.contains("accepted steps") && text.contains("Newton iterations"), "{text}");
}

#[test]
fn simulate_probe_and_stop_override_the_file() {
    let scratch = Scratch::new("simulate-options");
    let path = write_json(&scratch, "rc.json", &rc_circuit());
    let output = run(
        &[
            "simulate",
            path.to_str().expect("utf-8"),
            "--probe",
            "out,VIN,voltage(in)",
            "--stop",
            "5 us",
            "--csv",
            "rc.csv",
        ],
        &scratch.0,
    );
    check_exit(&output, 0, "simulate --probe --stop");
    let (header, rows) = read_waveform_csv(&scratch.path("rc.csv"));
    assert_eq!(header, ["time_s", "voltage(out)_v", "current(VIN)_a", "voltage(in)_v"]);
    // RC step response (closed form, any circuits text): at the 5 µs stop, 4 time constants
    // after the 1 µs delay, the output is 5·(1 − e^−4) = 4.908 V; 10 mV covers the 10 ns ramp
    // and the engine's default 1e-3 relative tolerance.
    let last = rows.last().cloned().unwrap_or_default();
    assert!((last[0] - 5e-6).abs() < 1e-18, "{last:?}");
    assert!((last[1] - 5.0 * (1.0 - (-4.0f64).exp())).abs() < 0.01, "{last:?}");
    // Without --probe, the file's default probes: every named node.
    let output = run(&["simulate", path.to_str().expect("utf-8"), "--csv", "rc.csv"], &scratch.0);
    check_exit(&output, 0, "simulate, default probes");
    let (header, _) = read_waveform_csv(&scratch.path("rc.csv"));
    assert_eq!(header, ["time_s", "voltage(in)_v", "voltage(out)_v"]);
}

#[test]
fn simulate_refuses_bad_probes_and_stop_times_with_exit_2() {
    let scratch = Scratch::new("simulate-usage");
    let path = write_json(&scratch, "rc.json", &rc_circuit());
    let file = path.to_str().expect("utf-8");
    let output = run(&["simulate", file, "--probe", "out,R1"], &scratch.0);
    check_exit(&output, 2, "unknown probe");
    let err = stderr(&output);
    assert!(err.contains("\"R1\"") && err.contains("nodes: in, out") && err.contains("VIN"), "{err}");
    for stop in ["-1u", "soon"] {
        let output = run(&["simulate", file, "--stop", stop], &scratch.0);
        check_exit(&output, 2, &format!("--stop {stop}"));
    }
    let output = run(&["simulate"], &scratch.0);
    check_exit(&output, 2, "simulate without a file");
}

#[test]
fn invalid_circuit_files_exit_3_and_name_the_field() {
    let scratch = Scratch::new("simulate-invalid");
    let mut doc = rc_circuit();
    doc["circuit"]["elements"][1]["resistance_ohm"] = Value::String("abc".into());
    doc["circuit"]["elements"][2]["capacitance_f"] = serde_json::json!(-1e-9);
    doc["run"]["stop_after"] = serde_json::json!(1);
    let path = write_json(&scratch, "bad.json", &doc);
    let output = run(&["simulate", path.to_str().expect("utf-8")], &scratch.0);
    check_exit(&output, 3, "invalid circuit file");
    let err = stderr(&output);
    // Structure problems are all listed together, each by its path.
    assert!(err.contains("circuit.elements[1].resistance_ohm"), "{err}");
    assert!(err.contains("run.stop_after: unknown field"), "{err}");
    // With the structure fixed, the value problem is named the same way.
    doc["circuit"]["elements"][1]["resistance_ohm"] = serde_json::json!(1e3);
    doc["run"].as_object_mut().expect("run").remove("stop_after");
    let path = write_json(&scratch, "bad.json", &doc);
    let output = run(&["simulate", path.to_str().expect("utf-8")], &scratch.0);
    check_exit(&output, 3, "negative capacitance");
    assert!(stderr(&output).contains("circuit.elements[2].capacitance_f"), "{}", stderr(&output));
    // A newer version, another format, and a design file are refused by name.
    let mut newer = rc_circuit();
    newer["version"] = serde_json::json!(2);
    // A design file without component values cannot be simulated until `design` chose them.
    let design = scratch.path("requirements-only.json");
    std::fs::write(&design, DesignFile::demo().to_json()).expect("write design");
    for (path, expected) in [
        (write_json(&scratch, "newer.json", &newer), "version 2 is newer"),
        (
            write_json(&scratch, "other.json", &serde_json::json!({"format": "spreadsheet"})),
            "\"spreadsheet\"",
        ),
        (design, "flipwright design"),
    ] {
        let output = run(&["simulate", path.to_str().expect("utf-8")], &scratch.0);
        check_exit(&output, 3, expected);
        assert!(stderr(&output).contains(expected), "{}", stderr(&output));
    }
    let output = run(&["simulate", "no-such-circuit.json"], &scratch.0);
    check_exit(&output, 3, "missing circuit file");
}

/// Writes the demo design (values chosen) into the scratch directory.
fn demo_design_file(scratch: &Scratch) -> PathBuf {
    let path = scratch.path("demo.json");
    check_exit(&run(&["demo", path.to_str().expect("utf-8")], &scratch.0), 0, "demo");
    path
}

#[test]
fn simulate_a_design_verifies_the_stage_and_measures_beside_the_estimates() {
    let scratch = Scratch::new("simulate-design");
    let design = demo_design_file(&scratch);
    let output = run(&["simulate", design.to_str().expect("utf-8"), "--csv", "waves.csv"], &scratch.0);
    check_exit(&output, 0, "simulate demo design");
    let text = stdout(&output);
    // A toggle stage changes state on every edge (common practice): 8 edges give 1 0 1 0 ….
    assert!(text.contains("PASS: the count was right after every one of the 8 edges"), "{text}");
    assert!(text.contains("Count after each edge: 1 0 1 0 1 0 1 0"), "{text}");
    for quantity in ["Minimum trigger amplitude: estimate", "Maximum toggle rate: estimate"] {
        let line =
            text.lines().find(|l| l.starts_with(quantity)).unwrap_or_else(|| panic!("{quantity}:\n{text}"));
        assert!(
            line.contains("measured") && line.contains("passes at") && line.contains("fails at"),
            "{line}"
        );
    }
    assert!(text.contains("resolution") && text.contains("searched"), "{text}");
    // The waveforms asked for: the input and both collectors and bases.
    let (header, rows) = read_waveform_csv(&scratch.path("waves.csv"));
    assert_eq!(
        header,
        ["time_s", "voltage(in)_v", "voltage(c1)_v", "voltage(c2)_v", "voltage(b1)_v", "voltage(b2)_v"]
    );
    assert!(rows.len() > 100);
}

#[test]
fn simulate_a_chain_of_the_design_counts_modulo_its_length() {
    let scratch = Scratch::new("simulate-chain");
    let design = demo_design_file(&scratch);
    let csv = scratch.path("chain.csv");
    let output = run(
        &[
            "simulate",
            design.to_str().expect("utf-8"),
            "--stages",
            "3",
            "--csv",
            csv.to_str().expect("utf-8"),
        ],
        &scratch.0,
    );
    check_exit(&output, 0, "three-stage chain");
    let text = stdout(&output);
    // Three binaries in ripple count 0…7 (Mano & Ciletti, Digital Design, ripple counters);
    // the default is two full output periods, 16 edges.
    assert!(text.contains("divide by 8"), "{text}");
    assert!(text.contains("Count after each edge: 1 2 3 4 5 6 7 0 1 2 3 4 5 6 7 0"), "{text}");
    let (header, _) = read_waveform_csv(&csv);
    assert!(header.contains(&"voltage(s3.c1)_v".to_string()), "{header:?}");
}

/// The size the report gives for a written CSV, in bytes, read back from "…, 12.3 kB)."
fn reported_size_bytes(text: &str) -> f64 {
    let line =
        text.lines().find(|l| l.starts_with("Wrote ")).unwrap_or_else(|| panic!("no Wrote line:\n{text}"));
    let size = line.rsplit(", ").next().unwrap_or("").trim_end_matches(").");
    let (number, unit) = size.split_once(' ').unwrap_or_else(|| panic!("{line}"));
    let scale = match unit {
        "bytes" => 1.0,
        "kB" => 1e3,
        "MB" => 1e6,
        other => panic!("unit {other} in {line}"),
    };
    number.parse::<f64>().unwrap_or_else(|_| panic!("{line}")) * scale
}

/// Regression: `simulate DESIGN --stages 11 --quick` wrote more than a gigabyte of CSV beside
/// the design unasked. Waveforms are written only with --csv, and the report gives the size.
#[test]
fn simulate_writes_waveforms_only_when_asked_and_reports_their_size() {
    let scratch = Scratch::new("simulate-no-csv");
    let design = demo_design_file(&scratch);
    let file = design.to_str().expect("utf-8");
    let listing = || {
        let mut names: Vec<String> = std::fs::read_dir(&scratch.0)
            .expect("scratch listing")
            .map(|e| e.expect("entry").file_name().to_string_lossy().into_owned())
            .collect();
        names.sort();
        names
    };
    let before = listing();
    let output = run(&["simulate", file, "--stages", "2", "--quick"], &scratch.0);
    check_exit(&output, 0, "a chain of two without --csv");
    assert_eq!(listing(), before, "no file written without --csv");
    assert!(
        stdout(&output).contains("Waveforms not written") && stdout(&output).contains("--csv OUT"),
        "{}",
        stdout(&output)
    );
    let circuit = write_json(&scratch, "rc.json", &rc_circuit());
    let before = listing();
    let output = run(&["simulate", circuit.to_str().expect("utf-8")], &scratch.0);
    check_exit(&output, 0, "a circuit file without --csv");
    assert_eq!(listing(), before, "no file written for a circuit file without --csv");
    assert!(stdout(&output).contains("Waveforms not written"), "{}", stdout(&output));
    // With --csv the report's size is the file's, to the one decimal it prints.
    for (args, out) in [
        (vec!["simulate", file, "--stages", "2", "--quick", "--csv", "chain.csv"], "chain.csv"),
        (vec!["simulate", circuit.to_str().expect("utf-8"), "--csv", "rc.csv"], "rc.csv"),
    ] {
        let output = run(&args, &scratch.0);
        check_exit(&output, 0, &args.join(" "));
        let bytes = std::fs::metadata(scratch.path(out)).expect("CSV written").len() as f64;
        let reported = reported_size_bytes(&stdout(&output));
        let resolution = if bytes < 1e3 {
            0.5
        } else if bytes < 1e6 {
            50.0
        } else {
            5e4
        };
        assert!((reported - bytes).abs() <= resolution, "{out}: reported {reported} bytes, file has {bytes}");
    }
}

#[test]
fn simulate_a_design_refuses_bad_options_with_exit_2() {
    let scratch = Scratch::new("simulate-design-usage");
    let design = demo_design_file(&scratch);
    let file = design.to_str().expect("utf-8");
    for (args, says) in [
        (vec!["simulate", file, "--stages", "0"], "--stages"),
        (vec!["simulate", file, "--stages", "40"], "--stages"),
        (vec!["simulate", file, "--edges", "many"], "--edges"),
        (vec!["simulate", file, "--temperature", "900"], "--temperature"),
        (vec!["simulate", file, "--stop", "1m"], "--stop"),
        (vec!["simulate", file, "--quick", "--csv", "w.csv", "--probe", "nowhere"], "nowhere"),
        (vec!["simulate", file, "--quick", "--probe", "c1"], "give --csv OUT too"),
    ] {
        let output = run(&args, &scratch.0);
        check_exit(&output, 2, &args.join(" "));
        assert!(stderr(&output).contains(says), "{args:?}: {}", stderr(&output));
    }
}

#[test]
fn simulate_divide_by_ten_follows_the_feedback_decade() {
    let scratch = Scratch::new("simulate-divide");
    let design = demo_design_file(&scratch);
    let output = run(&["simulate", design.to_str().expect("utf-8"), "--divide", "10", "--quick"], &scratch.0);
    check_exit(&output, 0, "divide by ten");
    let text = stdout(&output);
    // The feedback decade counts 0–7, then 14, 15 and back to 0 (Millman & Taub, from
    // memory; the planner's sequence is checked exhaustively in the chain checks).
    assert!(text.contains("dividing by 10"), "{text}");
    assert!(text.contains("Count after each edge: 1 2 3 4 5 6 7 14 15 0 1 2 3 4 5 6 7 14 15 0"), "{text}");
    let both =
        run(&["simulate", design.to_str().expect("utf-8"), "--divide", "10", "--stages", "4"], &scratch.0);
    check_exit(&both, 2, "--divide with --stages");
    let huge = run(&["simulate", design.to_str().expect("utf-8"), "--divide", "5000"], &scratch.0);
    check_exit(&huge, 2, "--divide beyond 4096");
}

#[test]
fn simulate_divide_by_five_by_reset_at_every_corner() {
    let scratch = Scratch::new("simulate-reset");
    let design = demo_design_file(&scratch);
    let path = design.to_str().expect("utf-8");
    let output =
        run(&["simulate", path, "--divide", "5", "--method", "reset", "--corners", "all"], &scratch.0);
    check_exit(&output, 0, "divide by five by reset");
    let text = stdout(&output);
    // A counter cleared on reaching 5 counts 0 … 4 (common practice).
    assert!(text.contains("Count after each edge: 1 2 3 4 0 1 2 3 4 0"), "{text}");
    for corner in ["Corner nominal", "Corner slow", "Corner fast"] {
        assert!(text.contains(corner), "{corner}: {text}");
    }
    assert!(text.contains("reset pulse(s)"), "{text}");
    // Without the nominal run the waveforms are the slow corner's, at the cold end (0 °C in
    // the demo), and the header says so.
    let worst = run(&["simulate", path, "--divide", "3", "--corners", "worst"], &scratch.0);
    check_exit(&worst, 0, "divide by three at the worst corners");
    let text = stdout(&worst);
    assert!(text.contains("the slow corner's run at 0.0 °C"), "{text}");
    for (args, says) in [
        (vec!["--divide", "5", "--method", "skip"], "--method wants binary, feedback or reset"),
        (vec!["--divide", "8", "--method", "reset"], "--method: 8 is a power of two"),
        (vec!["--divide", "5", "--corners", "every"], "--corners wants nominal, worst or all"),
        (vec!["--method", "reset"], "give --divide N with them"),
    ] {
        let mut full = vec!["simulate", path];
        full.extend(args.iter().copied());
        let output = run(&full, &scratch.0);
        check_exit(&output, 2, &full.join(" "));
        assert!(stderr(&output).contains(says), "{full:?}: {}", stderr(&output));
    }
}

#[test]
fn chain_plans_a_decade_both_ways_and_recommends_one() {
    let scratch = Scratch::new("chain-plan");
    let design = demo_design_file(&scratch);
    let output = run(&["chain", "10", design.to_str().expect("utf-8")], &scratch.0);
    check_exit(&output, 0, "chain 10");
    let text = stdout(&output);
    // ⌈log2 10⌉ = 4 stages; the decade by reset is decoded at 1010 (Floyd, Digital
    // Fundamentals, from memory) and the feedback decade jumps from 8 to 14.
    assert!(text.contains("Divide by 10: 4 binary stages"), "{text}");
    assert!(text.contains("reset from 10 (1010)"), "{text}");
    assert!(text.contains("preset from 8 (1000)"), "{text}");
    assert!(text.contains("Recommended:"), "{text}");
    assert!(text.contains("f(max) = 1/(n·tpd)"), "{text}");
    let json = run(&["chain", "12", "--json"], &scratch.0);
    check_exit(&json, 0, "chain 12 --json");
    let value: Value = serde_json::from_str(&stdout(&json)).expect("JSON");
    assert_eq!(value["plan"]["stage_count"], 4);
    for bad in ["1", "70000", "ten"] {
        check_exit(&run(&["chain", bad], &scratch.0), 2, bad);
    }
}

/// Regression: a reader that stops early (`flipwright chain 4095 --json | head`) used to make
/// the command panic on the broken pipe; it must end without a panic message. The plan's JSON
/// is megabytes, far beyond a pipe's buffer, so the write after the close is certain. Common
/// practice for Unix command-line tools.
#[cfg(unix)]
#[test]
fn a_closed_output_pipe_ends_the_command_without_a_panic() {
    use std::io::{BufRead, BufReader};
    use std::process::Stdio;
    let mut child = Command::new(BIN)
        .args(["chain", "4095", "--json"])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("binary starts");
    let mut first_line = String::new();
    let mut reader = BufReader::new(child.stdout.take().expect("piped stdout"));
    reader.read_line(&mut first_line).expect("one line");
    assert!(first_line.starts_with('{'), "unexpected first line {first_line:?}");
    drop(reader);
    let output = child.wait_with_output().expect("binary ends");
    let message = stderr(&output);
    assert!(!message.contains("panicked"), "panic on a closed pipe: {message}");
}

/// `flipwright yield`: report on a demo chain, the same digest for the same seed in the JSON,
/// a different one for another seed, and usage errors naming the flag.
#[test]
fn yield_reports_worst_case_and_yield_with_a_reproducible_digest() {
    let scratch = Scratch::new("yield");
    let design = demo_file(&scratch);
    let design = design.to_str().expect("utf-8 path");
    let text = run(&["yield", design, "--stages", "2", "--trials", "500"], &scratch.0);
    check_exit(&text, 0, "yield on the demo");
    let out = stdout(&text);
    for needle in [
        "Chain worst case",
        "Monte Carlo yield",
        "Wilson",
        "trials for ±1 %",
        "digest",
        "Margins against temperature",
    ] {
        assert!(out.contains(needle), "missing {needle:?} in\n{out}");
    }
    let digest = |seed: &str, distribution: &str| {
        let output = run(
            &[
                "yield",
                design,
                "--stages",
                "2",
                "--trials",
                "300",
                "--seed",
                seed,
                "--distribution",
                distribution,
                "--json",
            ],
            &scratch.0,
        );
        check_exit(&output, 0, "yield --json");
        let json: Value = serde_json::from_str(&stdout(&output)).expect("JSON");
        json["report"]["digest"].as_str().expect("digest").to_string()
    };
    assert_eq!(digest("7", "normal"), digest("7", "normal"));
    assert_ne!(digest("7", "normal"), digest("8", "normal"));
    assert_ne!(digest("7", "uniform"), digest("7", "normal"));
    for (args, flag) in [
        (vec!["--trials", "0"], "--trials"),
        (vec!["--trials", "many"], "--trials"),
        (vec!["--distribution", "flat"], "--distribution"),
        (vec!["--stages", "2", "--divide", "10"], "--divide"),
        (vec!["--stages", "0"], "--stages"),
    ] {
        let mut all = vec!["yield", design];
        all.extend(args.iter());
        let output = run(&all, &scratch.0);
        check_exit(&output, 2, &format!("{args:?}"));
        assert!(stderr(&output).contains(flag), "{args:?}: {}", stderr(&output));
    }
    check_exit(&run(&["yield", "missing.json"], &scratch.0), 3, "missing file");
}

/// `flipwright design --min-yield`: with wide tolerances the plain synthesis falls short of
/// 99 % over four stages; the yield synthesis says which aim reached it, writes the design,
/// and `flipwright yield` on the written file (same seed and trials) confirms the bound.
#[test]
fn design_for_a_yield_writes_a_design_whose_yield_reaches_the_goal() {
    let scratch = Scratch::new("design-yield");
    let demo = demo_file(&scratch);
    let mut doc: Value = serde_json::from_str(&std::fs::read_to_string(&demo).expect("demo")).expect("JSON");
    doc["supplies"]["tolerance"] = serde_json::json!(0.1);
    doc["conditions"]["resistor_tolerance"] = serde_json::json!(0.1);
    doc["conditions"]["capacitor_tolerance"] = serde_json::json!(0.2);
    doc["conditions"]["t_min_c"] = serde_json::json!(-40.0);
    doc["conditions"]["t_max_c"] = serde_json::json!(85.0);
    doc["requirements"]["min_overdrive"] = serde_json::json!(1.5);
    if let Some(map) = doc.as_object_mut() {
        map.remove("values");
    }
    let input = write_json(&scratch, "wide.json", &doc);
    let input = input.to_str().expect("utf-8 path");
    let out = scratch.path("wide-yield.json");
    let out = out.to_str().expect("utf-8 path");
    let output = run(&["design", input, "--min-yield", "0.99", "--stages", "4", "--out", out], &scratch.0);
    check_exit(&output, 0, "design --min-yield");
    let text = stdout(&output);
    for needle in ["the requirements as given", "reaches the goal", "Goal reached.", "digest"] {
        assert!(text.contains(needle), "missing {needle:?} in\n{text}");
    }
    let check =
        run(&["yield", out, "--stages", "4", "--trials", "10000", "--seed", "1", "--json"], &scratch.0);
    let json: Value = serde_json::from_str(&stdout(&check)).expect("yield JSON");
    let lower = json["report"]["lower_bound"].as_f64().expect("lower bound");
    assert!(lower >= 0.99, "the written design's lower bound {lower}");
    for (args, flag) in
        [(vec!["--min-yield", "1.5"], "--min-yield"), (vec!["--min-yield", "most"], "--min-yield")]
    {
        let mut all = vec!["design", input];
        all.extend(args.iter());
        let output = run(&all, &scratch.0);
        check_exit(&output, 2, &format!("{args:?}"));
        assert!(stderr(&output).contains(flag), "{args:?}: {}", stderr(&output));
    }
}
