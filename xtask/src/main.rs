//! Project automation: `cargo xtask demo` (the main job from a fresh clone), `cargo xtask test`
//! (every check, with its own set-up), `cargo xtask bench` (benchmarks).

use std::path::{Path, PathBuf};
use std::process::{Command, ExitCode};

const HELP: &str = "\
cargo xtask <command>

  demo    build the command line, write the demo design to out/demo-design.json,
          analyse it and print its component table
  test    run every check: formatting, lints, unit and cross-check tests, CLI tests,
          and the IEC 60063 table cross-check against the PyPI package eseries
          (installed into target/xtask-venv on first use)
  bench   run the benchmarks (release build) and print medians
";

fn root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).parent().map(Path::to_path_buf).unwrap_or_else(|| PathBuf::from("."))
}

/// Runs a command in the project root, echoing it; Err names the command that failed.
fn run(program: &str, args: &[&str]) -> Result<(), String> {
    eprintln!("$ {program} {}", args.join(" "));
    let status = Command::new(program)
        .args(args)
        .current_dir(root())
        .status()
        .map_err(|e| format!("cannot start {program}: {e}"))?;
    if status.success() {
        Ok(())
    } else {
        Err(format!("`{program} {}` failed ({status})", args.join(" ")))
    }
}

fn output(program: &str, args: &[&str]) -> Result<String, String> {
    let out = Command::new(program)
        .args(args)
        .current_dir(root())
        .output()
        .map_err(|e| format!("cannot start {program}: {e}"))?;
    if !out.status.success() {
        return Err(format!("`{program} {}` failed: {}", args.join(" "), String::from_utf8_lossy(&out.stderr)));
    }
    String::from_utf8(out.stdout).map_err(|e| format!("{program} printed invalid UTF-8: {e}"))
}

fn cli_path() -> PathBuf {
    root().join("target/release/flipwright")
}

fn demo() -> Result<(), String> {
    run("cargo", &["build", "--release", "--quiet", "-p", "flipwright-cli"])?;
    let out_dir = root().join("out");
    std::fs::create_dir_all(&out_dir).map_err(|e| format!("cannot create {}: {e}", out_dir.display()))?;
    let design = out_dir.join("demo-design.json");
    let cli = cli_path();
    let cli = cli.to_string_lossy();
    let design_text = design.to_string_lossy();
    run(&cli, &["demo", &design_text])?;
    // `check` exits 1 when a margin fails; for the demo that is a finding to show, not an error.
    let _ = Command::new(cli.as_ref()).args(["check", &design_text]).current_dir(root()).status();
    run(&cli, &["parts", &design_text])?;
    eprintln!("\nThe demo design is in {design_text}; edit it and run `{cli} check {design_text}`.");
    Ok(())
}

/// A Python virtual environment with the reference package, made on first use.
fn python_with_eseries() -> Result<PathBuf, String> {
    let venv = root().join("target/xtask-venv");
    let python = venv.join("bin/python");
    if !python.exists() {
        run("python3", &["-m", "venv", &venv.to_string_lossy()])?;
    }
    let has_eseries = Command::new(&python).args(["-c", "import eseries"]).status().map(|s| s.success()).unwrap_or(false);
    if !has_eseries {
        run(&python.to_string_lossy(), &["-m", "pip", "install", "--quiet", "--disable-pip-version-check", "eseries==1.2.1"])?;
    }
    Ok(python)
}

fn eseries_check() -> Result<(), String> {
    let python = python_with_eseries()?;
    run("cargo", &["build", "--release", "--quiet", "-p", "flipwright-cli"])?;
    let tables = output(&cli_path().to_string_lossy(), &["series-tables"])?;
    eprintln!("$ flipwright series-tables | python tests/python/eseries_check.py");
    let mut child = Command::new(&python)
        .arg(root().join("tests/python/eseries_check.py"))
        .stdin(std::process::Stdio::piped())
        .current_dir(root())
        .spawn()
        .map_err(|e| format!("cannot start the eseries check: {e}"))?;
    if let Some(mut stdin) = child.stdin.take() {
        use std::io::Write;
        stdin.write_all(tables.as_bytes()).map_err(|e| format!("cannot feed the eseries check: {e}"))?;
    }
    let status = child.wait().map_err(|e| format!("eseries check: {e}"))?;
    if status.success() {
        Ok(())
    } else {
        Err("the IEC 60063 tables differ from the eseries reference (see above)".to_string())
    }
}

fn test() -> Result<(), String> {
    run("cargo", &["fmt", "--all", "--check"])?;
    run("cargo", &["clippy", "--workspace", "--all-targets", "--quiet", "--", "-D", "warnings"])?;
    run("cargo", &["test", "--workspace", "--quiet"])?;
    run("cargo", &["test", "--workspace", "--doc", "--quiet"])?;
    eseries_check()?;
    eprintln!("\nall checks passed");
    Ok(())
}

fn bench() -> Result<(), String> {
    run("cargo", &["bench", "-p", "flipwright-core", "--bench", "stage"])
}

fn main() -> ExitCode {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let result = match args.first().map(String::as_str) {
        Some("demo") => demo(),
        Some("test") => test(),
        Some("bench") => bench(),
        Some("help") | None => {
            print!("{HELP}");
            Ok(())
        }
        Some(other) => Err(format!("unknown xtask command \"{other}\"\n{HELP}")),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(message) => {
            eprintln!("xtask: {message}");
            ExitCode::FAILURE
        }
    }
}
