//! `flipwright simulate FILE`: a transient run of the document in FILE, chosen by its
//! `format` field (circuit files today), with a summary of the run and of every probe printed
//! and the waveforms written as CSV when `--csv OUT` asks for them.

use std::fmt::Write;
use std::path::{Path, PathBuf};

use flipwright::design_file;
use flipwright::stage::FieldError;
use flipwright::transient::circuit_file::{self, CircuitFile};
use flipwright::transient::export::{parse_probe, probe_waveform, to_csv};
use flipwright::transient::measure::summarise;
use flipwright::transient::system::System;
use flipwright::transient::{simulate, OperatingPointMethod, Probe, SimulationError, TransientResult};
use flipwright::units::{format_quantity, parse_quantity, Unit};

use crate::simulate_design::{simulate_design_file, DesignRequest};
use crate::{input_error, parse_options, read, usage, write, Failure, EXIT_MARGINS_FAIL};

/// Runs `simulate` with the arguments after the command name.
pub fn run(args: &[String]) -> Result<u8, Failure> {
    let options = parse_options(
        args,
        &["csv", "probe", "stop", "stages", "divide", "edges", "temperature", "method", "corners"],
        &["quick"],
    )?;
    let path = match options.positional.as_slice() {
        [file] => PathBuf::from(file),
        [] => return Err(usage("`simulate` needs a design file or a circuit file")),
        _ => return Err(usage("`simulate` takes one design file or circuit file")),
    };
    let text = read(&path)?;
    let request = Request {
        // Only on request: a long chain's run has hundreds of millions of samples, more than a
        // gigabyte of CSV that used to land beside the input unasked.
        csv: options.value("csv").map(PathBuf::from),
        probes: options.value("probe").map(String::from),
        stop: options.value("stop").map(String::from),
    };
    match document_format(&path, &text)?.as_str() {
        circuit_file::FORMAT_NAME => simulate_circuit_file(&path, &text, &request),
        design_file::FORMAT_NAME => {
            if request.stop.is_some() {
                return Err(usage("--stop is for circuit files; a design run is set by --edges"));
            }
            if request.probes.is_some() && request.csv.is_none() {
                return Err(usage("--probe chooses the columns of the waveform CSV: give --csv OUT too"));
            }
            let design_request = DesignRequest::parse(
                options.value("stages"),
                options.value("divide"),
                options.value("edges"),
                options.value("temperature"),
                options.has("quick"),
            )?
            .with_chain_choices(options.value("method"), options.value("corners"))?;
            simulate_design_file(&path, &design_request, request.csv.as_deref(), request.probes.as_deref())
        }
        other => Err(input_error(format!(
            "{}: format \"{other}\" is not one `simulate` runs (expected \"{}\" or \"{}\")",
            path.display(),
            circuit_file::FORMAT_NAME,
            design_file::FORMAT_NAME
        ))),
    }
}

/// What the command line asks of the run, whatever the kind of file.
struct Request {
    /// `--csv OUT`: where to write the waveforms; none are written without it.
    csv: Option<PathBuf>,
    /// `--probe` as written: comma-separated names.
    probes: Option<String>,
    /// `--stop` as written: a time with or without unit.
    stop: Option<String>,
}

/// The document's `format` field, which decides how the rest is read.
fn document_format(path: &Path, text: &str) -> Result<String, Failure> {
    let root: serde_json::Value = serde_json::from_str(text).map_err(|e| {
        input_error(format!(
            "{}: not valid JSON (line {}, column {}): {e}",
            path.display(),
            e.line(),
            e.column()
        ))
    })?;
    match root.get("format") {
        Some(serde_json::Value::String(format)) => Ok(format.clone()),
        _ => Err(input_error(format!(
            "{}: format: is missing or not a string (a circuit file has \"format\": \"{}\")",
            path.display(),
            circuit_file::FORMAT_NAME
        ))),
    }
}

fn file_problems(path: &Path, errors: &[FieldError]) -> Failure {
    let mut message = format!("{}: the circuit file has {} problem(s):", path.display(), errors.len());
    for e in errors {
        let _ = write!(message, "\n  {}: {}", e.path, e.message);
    }
    input_error(message)
}

fn simulate_circuit_file(path: &Path, text: &str, request: &Request) -> Result<u8, Failure> {
    let mut file = CircuitFile::load(text).map_err(|errors| file_problems(path, &errors))?;
    if let Some(stop) = &request.stop {
        let stop_time_s = parse_quantity(stop, Unit::Second).ok().filter(|t| *t > 0.0).ok_or_else(|| {
            usage(format!("--stop wants a positive time such as 2u or \"2 µs\", got \"{stop}\""))
        })?;
        file.run.stop_time_s = stop_time_s;
    }
    let probes = match &request.probes {
        None => file.recorded_probes(),
        Some(list) => {
            // Validation passed, so the circuit compiles; its names include internal nodes.
            let system = System::compile(&file.circuit).map_err(|e| input_error(e.to_string()))?;
            list.split(',')
                .filter(|name| !name.trim().is_empty())
                .map(|name| parse_probe(name, &system.node_names, &system.source_names))
                .collect::<Result<Vec<Probe>, _>>()
                .map_err(|e| usage(format!("--probe: {e}")))?
        }
    };
    if probes.is_empty() {
        return Err(usage("--probe names nothing: give node or source names, such as --probe c1,c2"));
    }
    let result = simulate(&file.circuit, &file.run, &file.operating_point_hints).map_err(|e| match e {
        // The file was validated, so these would be a gap in validation: still the file's fault.
        SimulationError::InvalidCircuit(_)
        | SimulationError::InvalidSettings { .. }
        | SimulationError::UnknownHintNode { .. } => input_error(format!("{}: {e}", path.display())),
        other => Failure { code: EXIT_MARGINS_FAIL, message: format!("the simulation failed: {other}") },
    })?;
    let written = write_waveforms(request.csv.as_deref(), &result, &probes, input_error)?;
    print!("{}", render(&file, &result, &probes, written));
    Ok(0)
}

/// Writes the probes' waveforms to `out` as CSV when it is given; returns where and how many
/// bytes, for [`waveform_line`]. `export_failure` turns a probe the export refuses into the
/// caller's kind of failure.
pub fn write_waveforms<'a>(
    out: Option<&'a Path>,
    result: &TransientResult,
    probes: &[Probe],
    export_failure: fn(String) -> Failure,
) -> Result<Option<(&'a Path, usize)>, Failure> {
    let Some(out) = out else { return Ok(None) };
    let table = to_csv(result, probes).map_err(|e| export_failure(e.to_string()))?;
    write(out, &table)?;
    Ok(Some((out, table.len())))
}

/// What became of the waveforms: the CSV written with its size, or how to ask for it.
pub fn waveform_line(written: Option<(&Path, usize)>, time_points: usize, probe_count: usize) -> String {
    match written {
        Some((path, bytes)) => format!(
            "Wrote {} ({time_points} time points, {probe_count} probe(s), {}).",
            path.display(),
            byte_size(bytes)
        ),
        None => format!(
            "Waveforms not written ({time_points} time points, {probe_count} probe(s)); --csv OUT writes them."
        ),
    }
}

/// A size in bytes, kB or MB (decimal prefixes), for a line the reader glances at.
fn byte_size(bytes: usize) -> String {
    let b = bytes as f64;
    if b < 1e3 {
        format!("{bytes} bytes")
    } else if b < 1e6 {
        format!("{:.1} kB", b / 1e3)
    } else {
        format!("{:.1} MB", b / 1e6)
    }
}

fn method_name(method: OperatingPointMethod) -> &'static str {
    match method {
        OperatingPointMethod::Direct => "direct Newton",
        OperatingPointMethod::Hinted => "from the hints",
        OperatingPointMethod::SourceStepping => "source stepping",
        OperatingPointMethod::GminStepping => "gmin stepping",
    }
}

/// The run statistics and one line of measurements per probe.
fn render(
    file: &CircuitFile,
    result: &TransientResult,
    probes: &[Probe],
    written: Option<(&Path, usize)>,
) -> String {
    let mut out = String::new();
    let stats = result.statistics;
    let _ = writeln!(out, "{}", file.name);
    let _ = writeln!(
        out,
        "Run: 0 to {}; operating point {}; {} accepted steps, {} rejected, {} Newton iterations",
        format_quantity(file.run.stop_time_s, Unit::Second),
        method_name(result.operating_point_method),
        stats.accepted_steps,
        stats.rejected_steps,
        stats.newton_iterations
    );
    let _ = writeln!(out, "{}", waveform_line(written, result.time_s.len(), probes.len()));
    let _ = writeln!(out);
    let labels: Vec<String> = probes.iter().map(Probe::label).collect();
    let width = labels.iter().map(|l| l.chars().count()).max().unwrap_or(0).max("probe".len());
    let _ = writeln!(
        out,
        "{:<width$}  {:>10}  {:>10}  {:>10}  {:>10}  {:>7}  {:>10}  {:>10}",
        "probe", "min", "max", "low level", "high level", "toggles", "rise 10-90", "fall 90-10"
    );
    for (probe, label) in probes.iter().zip(&labels) {
        let (unit, flat_below) = match probe {
            // Changes below ten times the Newton tolerance are solver noise, not switching.
            Probe::NodeVoltage(_) => (Unit::Volt, 10.0 * file.run.voltage_tolerance_v),
            Probe::SourceCurrent(_) => (Unit::Ampere, 10.0 * file.run.current_tolerance_a),
        };
        let summary =
            probe_waveform(result, probe).ok().and_then(|v| summarise(&result.time_s, v, flat_below).ok());
        let Some(summary) = summary else {
            let _ = writeln!(out, "{label:<width$}  (no points)");
            continue;
        };
        let edge = |t: Option<f64>| t.map_or_else(|| "-".to_string(), |t| format_quantity(t, Unit::Second));
        let _ = writeln!(
            out,
            "{label:<width$}  {:>10}  {:>10}  {:>10}  {:>10}  {:>7}  {:>10}  {:>10}",
            format_quantity(summary.min, unit),
            format_quantity(summary.max, unit),
            format_quantity(summary.low_level, unit),
            format_quantity(summary.high_level, unit),
            summary.toggles,
            edge(summary.first_rise_s),
            edge(summary.first_fall_s)
        );
    }
    let _ = writeln!(
        out,
        "\nLevels are where each probe spends most time in its two states; toggles count changes of\n\
         state between 10 % and 90 % of the way from low to high level; rise and fall are the 10-90 %\n\
         times of the first edge between the levels (\"-\": none)."
    );
    out
}
