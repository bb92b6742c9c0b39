//! `flipwright`: the command-line front end — write the demo design, analyse a design file,
//! synthesise values from requirements, print the component table, and simulate circuits.

mod chain;
mod report;
mod simulate;
mod simulate_design;
mod yield_design;
mod yield_report;

use std::path::{Path, PathBuf};
use std::process::ExitCode;

use flipwright::design_file::DesignFile;
use flipwright::stage::analysis::analyse;
use flipwright::stage::synthesis::{synthesise, SynthesisError};
use flipwright::stage::{FieldError, StageDesign};
use flipwright::table::{component_table, to_csv, to_text};

/// Exit codes (documented in `flipwright help`).
const EXIT_MARGINS_FAIL: u8 = 1;
const EXIT_USAGE: u8 = 2;
const EXIT_INPUT: u8 = 3;

const HELP: &str = "\
flipwright — design and check saturated transistor bistable (binary) stages

USAGE
  flipwright demo [FILE]              write the demo design (default: demo-design.json)
  flipwright check FILE [--json]      analyse the design in FILE: both states, every margin
                                      at nominal and worst case, switching estimates
  flipwright design FILE [--out OUT] [--json]
                                      choose every component value from the requirements
                                      in FILE; writes the completed design to OUT
                                      (default: FILE with .designed.json)
  flipwright design FILE --min-yield Y [--confidence C] [--stages N | --divide N
                    [--method binary|feedback|reset]] [--trials K] [--seed S]
                    [--distribution uniform|normal] [--out OUT] [--json]
                                      synthesis aimed at a Monte Carlo yield: the design
                                      aims (target overdrive, divider current) are raised
                                      step by step until the one-sided Wilson lower bound
                                      of the yield over the chain reaches Y at confidence C
                                      (default 0.95); prints every candidate and, when no
                                      step gets there, why and what would. Exit 1 then
  flipwright parts FILE [--csv] [--stage N]
                                      print the component table (text or CSV)
  flipwright simulate FILE [--csv OUT] [--probe NAME,...] [--stop TIME]
                                      transient run of the circuit file FILE: prints the
                                      run and each probe's min/max, toggles and edges, and
                                      with --csv writes the waveforms to OUT (none without
                                      it); NAME is a node, a voltage source (its current),
                                      or voltage(NODE) / current(SOURCE)
  flipwright simulate DESIGN [--stages N | --divide N] [--edges K] [--temperature T]
                      [--method binary|feedback|reset] [--corners nominal|worst|all]
                      [--quick] [--csv OUT] [--probe NAME,...]
                                      verify the design in DESIGN by simulation: the stage
                                      (or a ripple chain of N stages) driven for K input
                                      edges (default 8, or two full output periods of a
                                      chain), the count checked after every edge; for one
                                      stage also the measured trigger sensitivity and
                                      maximum toggle rate beside the estimates (--quick
                                      skips the searches). --divide N (2 to 4096) builds
                                      the planned chain for N (skip-state feedback when N
                                      is not a power of two; --method reset for reset on
                                      reaching N with its driven reset network) and checks
                                      its count sequence over two output periods at each
                                      corner asked for (worst: slow and fast from the
                                      design's tolerances), with the reset pulse measured.
                                      --csv OUT writes the waveforms (input, collectors,
                                      bases; --probe chooses others), none without it.
                                      Exit 1 if any count is wrong.
  flipwright chain N [DESIGN] [--json] [--natural-binary]
                                      plan a divide-by-N chain (N from 2 to 65536): stages,
                                      reset-on-count and skip-state feedback methods, count
                                      sequence, duty cycle, start-up, glitch states, the
                                      recommended method; with DESIGN also ripple timing,
                                      per-stage toggle rates and the reset network's race
  flipwright yield DESIGN [--stages N | --divide N [--method binary|feedback|reset]]
                   [--trials K] [--seed S] [--distribution uniform|normal] [--json]
                                      tolerances of a chain of the design's stages (default
                                      one stage; --divide N the planned chain with its
                                      loads, by the method named or, when none is, binary
                                      for a power of two and feedback otherwise): the worst case of every DC margin with its
                                      limiting stage and parameter, the Monte Carlo yield
                                      over K builds (default 10000, seed 1) with its 95 %
                                      Wilson interval and lower bound, trials needed for
                                      ±1 %, the most frequent failure, histograms of the
                                      tightest margins and margins against temperature.
                                      Exit 1 if any margin fails at worst case.
  flipwright devices                  list the generic device archetypes
  flipwright series-tables            print the stored IEC 60063 E-series tables
  flipwright help                     this text
  flipwright --version                the version of this program

Values in files are SI numbers (ohms, farads, volts, amperes, seconds) or strings with a
unit or IEC 60062 code (\"4k7\", \"100 nF\").

EXIT CODES
  0  success (check/design: every margin passes at worst case)
  1  the analysis ran but some margin fails at worst case, or no design meets
     the requirements (the message says which and by how much), or a
     simulation failed (the message says when and where)
  2  bad command line
  3  unreadable or invalid design file or circuit file (each bad field is listed)
";

struct Failure {
    code: u8,
    message: String,
}

fn usage(message: impl Into<String>) -> Failure {
    Failure { code: EXIT_USAGE, message: format!("{}\nRun `flipwright help` for usage.", message.into()) }
}

fn input_error(message: impl Into<String>) -> Failure {
    Failure { code: EXIT_INPUT, message: message.into() }
}

fn field_errors(file: &Path, errors: &[FieldError]) -> Failure {
    let mut message = format!("{}: the design file has {} problem(s):", file.display(), errors.len());
    for e in errors {
        message.push_str(&format!("\n  {}: {}", e.path, e.message));
    }
    input_error(message)
}

fn read(path: &Path) -> Result<String, Failure> {
    std::fs::read_to_string(path).map_err(|e| input_error(format!("cannot read {}: {e}", path.display())))
}

fn write(path: &Path, text: &str) -> Result<(), Failure> {
    std::fs::write(path, text).map_err(|e| input_error(format!("cannot write {}: {e}", path.display())))
}

/// Parsed options: positional arguments and flags with optional values.
struct Options {
    positional: Vec<String>,
    flags: Vec<(String, Option<String>)>,
}

fn parse_options(args: &[String], with_value: &[&str], known: &[&str]) -> Result<Options, Failure> {
    let mut positional = Vec::new();
    let mut flags = Vec::new();
    let mut iter = args.iter();
    while let Some(arg) = iter.next() {
        if let Some(name) = arg.strip_prefix("--") {
            if with_value.contains(&name) {
                let value = iter.next().ok_or_else(|| usage(format!("--{name} needs a value")))?;
                flags.push((name.to_string(), Some(value.clone())));
            } else if known.contains(&name) {
                flags.push((name.to_string(), None));
            } else {
                return Err(usage(format!("unknown option --{name}")));
            }
        } else {
            positional.push(arg.clone());
        }
    }
    Ok(Options { positional, flags })
}

impl Options {
    fn has(&self, name: &str) -> bool {
        self.flags.iter().any(|(n, _)| n == name)
    }
    fn value(&self, name: &str) -> Option<&str> {
        self.flags.iter().find(|(n, _)| n == name).and_then(|(_, v)| v.as_deref())
    }
    fn one_file(&self, command: &str) -> Result<PathBuf, Failure> {
        match self.positional.as_slice() {
            [file] => Ok(PathBuf::from(file)),
            [] => Err(usage(format!("`{command}` needs a design file"))),
            _ => Err(usage(format!("`{command}` takes one design file"))),
        }
    }
}

fn load_design(path: &Path) -> Result<(DesignFile, StageDesign), Failure> {
    let text = read(path)?;
    DesignFile::load(&text).map_err(|errors| {
        let mut failure = field_errors(path, &errors);
        if errors.iter().any(|e| e.path == "values") {
            failure
                .message
                .push_str(&format!("\nTo choose the values: flipwright design {}", path.display()));
        }
        failure
    })
}

fn run(args: &[String]) -> Result<u8, Failure> {
    let Some((command, rest)) = args.split_first() else {
        print!("{HELP}");
        return Ok(0);
    };
    match command.as_str() {
        "help" | "--help" | "-h" => {
            print!("{HELP}");
            Ok(0)
        }
        "version" | "--version" | "-V" => {
            println!("flipwright {}", env!("CARGO_PKG_VERSION"));
            Ok(0)
        }
        "demo" => {
            let options = parse_options(rest, &[], &[])?;
            let path = options
                .positional
                .first()
                .map(PathBuf::from)
                .unwrap_or_else(|| PathBuf::from("demo-design.json"));
            // Write the demo with its values chosen, so `check` works on it straight away.
            let mut file = DesignFile::demo();
            let input = file.synthesis_input().map_err(|e| field_errors(&path, &e))?;
            let outcome = synthesise(&input).map_err(|e| input_error(e.to_string()))?;
            file.values = Some(outcome.values);
            write(&path, &file.to_json())?;
            println!("wrote {}", path.display());
            println!(
                "next: flipwright check {}   (or edit it; delete \"values\" to let `design` choose them)",
                path.display()
            );
            Ok(0)
        }
        "check" => {
            let options = parse_options(rest, &[], &["json"])?;
            let path = options.one_file("check")?;
            let (file, design) = load_design(&path)?;
            let report = analyse(&design).map_err(|e| input_error(e.to_string()))?;
            if options.has("json") {
                let json = serde_json::json!({ "design": file, "report": report });
                println!("{}", serde_json::to_string_pretty(&json).unwrap_or_default());
            } else {
                print!("{}", report::render(&file, &design, &report));
            }
            Ok(if report.all_pass { 0 } else { EXIT_MARGINS_FAIL })
        }
        "design" if rest.iter().any(|a| a == "--min-yield") => yield_design::run(rest),
        "design" => {
            let options = parse_options(rest, &["out"], &["json"])?;
            let path = options.one_file("design")?;
            let text = read(&path)?;
            let mut file = DesignFile::parse(&text).map_err(|e| field_errors(&path, &e))?;
            let input = file.synthesis_input().map_err(|e| field_errors(&path, &e))?;
            let outcome = synthesise(&input).map_err(|e| match e {
                SynthesisError::Invalid(errors) => field_errors(&path, &errors),
                other => Failure {
                    code: EXIT_MARGINS_FAIL,
                    message: format!("cannot meet the requirements: {other}"),
                },
            })?;
            file.values = Some(outcome.values);
            let out = options
                .value("out")
                .map(PathBuf::from)
                .unwrap_or_else(|| path.with_extension("designed.json"));
            write(&out, &file.to_json())?;
            if options.has("json") {
                let json = serde_json::json!({ "design": file, "synthesis": outcome });
                println!("{}", serde_json::to_string_pretty(&json).unwrap_or_default());
            } else {
                println!("Synthesis steps:");
                for step in &outcome.steps {
                    println!("  - {step}");
                }
                if outcome.met {
                    println!("Every margin passes at worst case.");
                } else {
                    println!("NOT every requirement can be met; best design found. Shortfalls:");
                    for s in &outcome.shortfalls {
                        println!("  - {s}");
                    }
                }
                println!("wrote {}", out.display());
                println!();
                let stage = StageDesign::new(file.stage_input(None).map_err(|e| field_errors(&out, &e))?)
                    .map_err(|e| field_errors(&out, &e))?;
                print!("{}", report::render(&file, &stage, &outcome.report));
            }
            Ok(if outcome.met { 0 } else { EXIT_MARGINS_FAIL })
        }
        "parts" => {
            let options = parse_options(rest, &["stage"], &["csv"])?;
            let path = options.one_file("parts")?;
            let stage_number = match options.value("stage") {
                None => 1,
                Some(text) => text.parse::<u32>().ok().filter(|n| (1..=99).contains(n)).ok_or_else(|| {
                    usage(format!("--stage wants a stage number from 1 to 99, got \"{text}\""))
                })?,
            };
            let (_, design) = load_design(&path)?;
            let report = analyse(&design).map_err(|e| input_error(e.to_string()))?;
            let rows = component_table(&design, &report, stage_number);
            if options.has("csv") {
                print!("{}", to_csv(&rows));
            } else {
                print!("{}", to_text(&rows));
            }
            Ok(0)
        }
        "simulate" => simulate::run(rest),
        "chain" => chain::run(rest),
        "yield" => yield_report::run(rest),
        "devices" => {
            print!("{}", report::devices());
            Ok(0)
        }
        "series-tables" => {
            print!("{}", flipwright::units::series_table_text());
            Ok(0)
        }
        other => Err(usage(format!("unknown command \"{other}\""))),
    }
}

/// Lets the process end quietly when its reader goes away (`flipwright parts | head`), as
/// Unix tools do, instead of `print!` panicking on the broken pipe: Rust starts programs
/// with SIGPIPE ignored, so this puts back the default action.
#[cfg(unix)]
fn end_quietly_on_broken_pipe() {
    extern "C" {
        fn signal(signal: i32, handler: usize) -> usize;
    }
    const SIGPIPE: i32 = 13;
    const DEFAULT_ACTION: usize = 0;
    // SAFETY: restores the default disposition of one signal before any thread starts;
    // no handler code of ours runs.
    unsafe {
        signal(SIGPIPE, DEFAULT_ACTION);
    }
}

#[cfg(not(unix))]
fn end_quietly_on_broken_pipe() {}

fn main() -> ExitCode {
    end_quietly_on_broken_pipe();
    let args: Vec<String> = std::env::args().skip(1).collect();
    match run(&args) {
        Ok(code) => ExitCode::from(code),
        Err(failure) => {
            eprintln!("error: {}", failure.message);
            ExitCode::from(failure.code)
        }
    }
}
