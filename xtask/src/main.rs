//! Project automation: `cargo xtask demo` (the main job from a fresh clone), `cargo xtask test`
//! (every check, with its own set-up), `cargo xtask bench` (benchmarks), `cargo xtask
//! wasm-bench` (the chain benchmark in wasm).

use std::path::{Path, PathBuf};
use std::process::{Command, ExitCode};

const HELP: &str = "\
cargo xtask <command>

  demo    build the command line, write the demo design to out/demo-design.json,
          analyse it and print its component table
  test    run every check: formatting, lints, unit and cross-check tests, CLI tests,
          the IEC 60063 table cross-check against the PyPI package eseries, and the
          transient engine against scipy's stiff ODE solver (both installed into
          target/xtask-venv on first use), the long simulated chains (divide by 60,
          100, 1000), the Monte Carlo digests native against wasm, and the browser tests
  long-chains  only the long simulated chains (release CLI)
  wasm-digest  only the Monte Carlo digests: the release CLI against the wasm bridge
          under Node, on the same seeds
  bench   run the benchmarks (core, release build; the chain in wasm under Node; the page
          in Chromium) and print medians
  wasm-bench [quick] [stage-only]  only the chain benchmark in wasm under Node (compare with
          `cargo bench -p flipwright-core --bench chain`)
  browser-test  build the page and run only the browser tests
  page    build the offline page out/flipwright.html and open it in a browser
          (or print its path where none can be opened)
";

fn root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .map(Path::to_path_buf)
        .unwrap_or_else(|| PathBuf::from("."))
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
        return Err(format!(
            "`{program} {}` failed: {}",
            args.join(" "),
            String::from_utf8_lossy(&out.stderr)
        ));
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
    let has_eseries =
        Command::new(&python).args(["-c", "import eseries"]).status().map(|s| s.success()).unwrap_or(false);
    if !has_eseries {
        run(
            &python.to_string_lossy(),
            &["-m", "pip", "install", "--quiet", "--disable-pip-version-check", "eseries==1.2.1"],
        )?;
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

/// Versions of the ODE cross-check's reference, checked on PyPI for Python 3.11.
const NUMPY_VERSION: &str = "2.4.6";
const SCIPY_VERSION: &str = "1.17.1";

/// The same virtual environment with the pinned NumPy and SciPy, installed when missing or
/// at another version.
fn python_with_scipy() -> Result<PathBuf, String> {
    let python = python_with_eseries()?;
    let probe = format!(
        "import sys, numpy, scipy; sys.exit(numpy.__version__ != '{NUMPY_VERSION}' or scipy.__version__ != '{SCIPY_VERSION}')"
    );
    let pinned = Command::new(&python).args(["-c", &probe]).status().map(|s| s.success()).unwrap_or(false);
    if !pinned {
        run(
            &python.to_string_lossy(),
            &[
                "-m",
                "pip",
                "install",
                "--quiet",
                "--disable-pip-version-check",
                &format!("numpy=={NUMPY_VERSION}"),
                &format!("scipy=={SCIPY_VERSION}"),
            ],
        )?;
    }
    Ok(python)
}

/// The transient engine (through `flipwright simulate`) against scipy's Radau integrator on
/// the same device equations.
fn transient_ode_check() -> Result<(), String> {
    let python = python_with_scipy()?;
    run("cargo", &["build", "--release", "--quiet", "-p", "flipwright-cli"])?;
    run(
        &python.to_string_lossy(),
        &["tests/python/transient_ode_check.py", "--cli", &cli_path().to_string_lossy()],
    )
    .map_err(|e| format!("{e}: the transient engine differs from the scipy reference (see above)"))
}

fn test() -> Result<(), String> {
    run("cargo", &["fmt", "--all", "--check"])?;
    run("cargo", &["clippy", "--workspace", "--all-targets", "--quiet", "--", "-D", "warnings"])?;
    run("cargo", &["test", "--workspace", "--quiet"])?;
    eseries_check()?;
    transient_ode_check()?;
    long_chain_check()?;
    wasm_digest_check()?;
    browser_tests()?;
    eprintln!("\nall checks passed");
    Ok(())
}

fn base64(bytes: &[u8]) -> String {
    const ALPHABET: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    let mut out = String::with_capacity(bytes.len().div_ceil(3) * 4);
    for chunk in bytes.chunks(3) {
        let b = [
            chunk.first().copied().unwrap_or(0),
            chunk.get(1).copied().unwrap_or(0),
            chunk.get(2).copied().unwrap_or(0),
        ];
        let n = (u32::from(b[0]) << 16) | (u32::from(b[1]) << 8) | u32::from(b[2]);
        for (i, shift) in [18u32, 12, 6, 0].iter().enumerate() {
            if i <= chunk.len() {
                out.push(char::from(ALPHABET[((n >> shift) & 63) as usize]));
            } else {
                out.push('=');
            }
        }
    }
    out
}

fn ensure_wasm_target() -> Result<(), String> {
    let installed = output("rustup", &["target", "list", "--installed"])?;
    if !installed.lines().any(|l| l.trim() == "wasm32-unknown-unknown") {
        run("rustup", &["target", "add", "wasm32-unknown-unknown"])?;
    }
    Ok(())
}

/// Division ratios whose chains are too long to simulate in the debug-profile tests (which
/// cover 3, 5, 10 and 12): each is simulated by the release CLI over two output periods, by
/// skip-state feedback and by reset on count, and must divide by exactly N.
const LONG_CHAIN_RATIOS: [u32; 3] = [60, 100, 1000];

fn long_chain_check() -> Result<(), String> {
    run("cargo", &["build", "--release", "--quiet", "-p", "flipwright-cli"])?;
    let dir = root().join("target/long-chain-check");
    std::fs::create_dir_all(&dir).map_err(|e| format!("cannot create {}: {e}", dir.display()))?;
    let (demo, designed) = (dir.join("demo.json"), dir.join("demo-designed.json"));
    let cli = cli_path().to_string_lossy().into_owned();
    run(&cli, &["demo", &demo.to_string_lossy()])?;
    output(&cli, &["design", &demo.to_string_lossy(), "--out", &designed.to_string_lossy()])?;
    for ratio in LONG_CHAIN_RATIOS {
        for method in ["feedback", "reset"] {
            let started = std::time::Instant::now();
            let n = ratio.to_string();
            let args = [
                "simulate",
                &designed.to_string_lossy(),
                "--divide",
                &n,
                "--method",
                method,
                "--corners",
                "nominal",
            ];
            let report = output(&cli, &args)
                .map_err(|e| format!("divide by {ratio} by {method}: the simulated chain failed: {e}"))?;
            if !report.contains("PASS: the count was right after every one") {
                return Err(format!("divide by {ratio} by {method}: no PASS line in the report:\n{report}"));
            }
            eprintln!("divide by {ratio} by {method}: PASS ({:.1} s)", started.elapsed().as_secs_f64());
        }
    }
    Ok(())
}

/// Monte Carlo cases for the native-against-wasm check: (CLI arguments, chain shape and
/// options as the bridge takes them). A ripple chain, a feedback decade-of-six and a reset
/// decade, both distributions.
const DIGEST_CASES: [(&[&str], &str, &str); 3] = [
    (
        &["--stages", "10", "--trials", "2000", "--seed", "1", "--distribution", "uniform"],
        r#"{"kind": "stages", "stages": 10}"#,
        r#"{"trials": 2000, "seed": 1, "distribution": "uniform"}"#,
    ),
    (
        &[
            "--divide",
            "60",
            "--method",
            "feedback",
            "--trials",
            "1000",
            "--seed",
            "20261202",
            "--distribution",
            "normal",
        ],
        r#"{"kind": "divide", "modulus": 60, "method": "skip_feedback"}"#,
        r#"{"trials": 1000, "seed": 20261202, "distribution": "normal"}"#,
    ),
    (
        &[
            "--divide",
            "10",
            "--method",
            "reset",
            "--trials",
            "1000",
            "--seed",
            "3",
            "--distribution",
            "uniform",
        ],
        r#"{"kind": "divide", "modulus": 10, "method": "reset_on_count"}"#,
        r#"{"trials": 1000, "seed": 3, "distribution": "uniform"}"#,
    ),
];

/// Same seed, same result natively and in wasm: every case's digest (FNV-1a over every
/// margin of every trial) and pass count from the release CLI must equal the wasm bridge's
/// under Node. Fails, never skips, when either side cannot run.
fn wasm_digest_check() -> Result<(), String> {
    run("cargo", &["build", "--release", "--quiet", "-p", "flipwright-cli"])?;
    let glue = build_wasm_bench()?;
    let dir = root().join("target/wasm-digest-check");
    std::fs::create_dir_all(&dir).map_err(|e| format!("cannot create {}: {e}", dir.display()))?;
    let (demo, designed) = (dir.join("demo.json"), dir.join("demo-designed.json"));
    let cli = cli_path().to_string_lossy().into_owned();
    run(&cli, &["demo", &demo.to_string_lossy()])?;
    output(&cli, &["design", &demo.to_string_lossy(), "--out", &designed.to_string_lossy()])?;
    let parse = |text: &str, what: &str| {
        serde_json::from_str::<serde_json::Value>(text).map_err(|e| format!("{what} is not JSON: {e}"))
    };
    let mut native = Vec::new();
    for (args, _, _) in DIGEST_CASES {
        let mut full =
            vec!["yield", &*designed.to_string_lossy()].into_iter().map(str::to_string).collect::<Vec<_>>();
        full.extend(args.iter().map(|a| a.to_string()));
        full.push("--json".to_string());
        let borrowed: Vec<&str> = full.iter().map(String::as_str).collect();
        // Exit 1 means a margin fails at worst case; the report is still printed.
        let report =
            Command::new(&cli).args(&borrowed).output().map_err(|e| format!("cannot start {cli}: {e}"))?;
        let value =
            parse(&String::from_utf8_lossy(&report.stdout), &format!("flipwright {}", borrowed.join(" ")))?;
        native.push((value["report"]["digest"].clone(), value["report"]["passed"].clone()));
    }
    let cases = format!(
        "[{}]",
        DIGEST_CASES
            .iter()
            .map(|(_, chain, options)| format!(r#"{{"chain": {chain}, "options": {options}}}"#))
            .collect::<Vec<_>>()
            .join(", ")
    );
    eprintln!("$ node tests/browser/wasm-digest.mjs");
    let wasm = Command::new("node")
        .args(["wasm-digest.mjs", &designed.to_string_lossy(), &cases])
        .current_dir(root().join("tests/browser"))
        .env("FLIPWRIGHT_WASM_GLUE", &glue)
        .output()
        .map_err(|e| format!("cannot start node: {e}"))?;
    if !wasm.status.success() {
        return Err(format!(
            "the wasm Monte Carlo failed under Node:\n{}",
            String::from_utf8_lossy(&wasm.stderr)
        ));
    }
    let wasm = parse(&String::from_utf8_lossy(&wasm.stdout), "the Node script's output")?;
    for (k, ((digest, passed), (args, _, _))) in native.iter().zip(DIGEST_CASES).enumerate() {
        let (w_digest, w_passed) = (&wasm[k]["digest"], &wasm[k]["passed"]);
        if !digest.is_string() || digest != w_digest || passed != w_passed {
            return Err(format!(
                "Monte Carlo {}: native digest {digest}, {passed} passed; wasm digest {w_digest}, {w_passed} passed",
                args.join(" ")
            ));
        }
        eprintln!("Monte Carlo {}: digest {digest} and {passed} passed, native = wasm", args.join(" "));
    }
    Ok(())
}

/// Builds the single self-contained page; `test_hooks` adds the forced-failure export.
pub fn build_page(test_hooks: bool) -> Result<PathBuf, String> {
    ensure_wasm_target()?;
    let target_dir = if test_hooks { "target/wasm-test-hooks" } else { "target" };
    let mut args = vec![
        "build",
        "-p",
        "flipwright-web",
        "--lib",
        "--target",
        "wasm32-unknown-unknown",
        "--profile",
        "wasm",
        "--target-dir",
        target_dir,
    ];
    if test_hooks {
        args.extend(["--features", "test-hooks"]);
    }
    run("cargo", &args)?;
    let wasm = root().join(target_dir).join("wasm32-unknown-unknown/wasm/flipwright_web.wasm");
    let bindgen_dir = root().join(target_dir).join("page-bindgen");
    std::fs::create_dir_all(&bindgen_dir)
        .map_err(|e| format!("cannot create {}: {e}", bindgen_dir.display()))?;
    let mut bindgen = wasm_bindgen_cli_support::Bindgen::new();
    bindgen.input_path(&wasm).no_modules(true).map_err(|e| format!("bindgen: {e}"))?.typescript(false);
    let mut generated = bindgen.generate_output().map_err(|e| format!("bindgen: {e}"))?;
    generated.emit(&bindgen_dir).map_err(|e| format!("bindgen: {e}"))?;
    let read =
        |name: &str| std::fs::read(bindgen_dir.join(name)).map_err(|e| format!("cannot read {name}: {e}"));
    let glue =
        String::from_utf8(read("flipwright_web.js")?).map_err(|e| format!("glue is not UTF-8: {e}"))?;
    let wasm_bytes = read("flipwright_web_bg.wasm")?;
    let www = |name: &str| {
        std::fs::read_to_string(root().join("www").join(name))
            .map_err(|e| format!("cannot read www/{name}: {e}"))
    };
    let template = www("index.html")?;
    // The glue lives in a text/plain script so the page can re-evaluate it after a failure;
    // it must not contain a closing script tag.
    if glue.contains("</script") {
        return Err("the generated glue contains </script>; cannot inline it".to_string());
    }
    // The worker's handler, also text/plain: the page puts glue and handler in one Blob.
    let worker = www("worker.js")?;
    if worker.contains("</script") {
        return Err("www/worker.js contains </script>; cannot inline it".to_string());
    }
    let page = template
        .replace("/*@STYLE@*/", &www("style.css")?)
        .replace("/*@GLUE@*/", &glue)
        .replace("/*@WORKER@*/", &worker)
        .replace("/*@WASM@*/", &base64(&wasm_bytes))
        .replace("/*@APP@*/", &www("app.js")?);
    let out_dir = root().join("out");
    std::fs::create_dir_all(&out_dir).map_err(|e| format!("cannot create {}: {e}", out_dir.display()))?;
    let path = out_dir.join(if test_hooks { "flipwright-test-hooks.html" } else { "flipwright.html" });
    std::fs::write(&path, page).map_err(|e| format!("cannot write {}: {e}", path.display()))?;
    eprintln!(
        "built {} ({} KiB; wasm {} KiB)",
        path.display(),
        std::fs::metadata(&path).map(|m| m.len() / 1024).unwrap_or(0),
        wasm_bytes.len() / 1024
    );
    Ok(path)
}

fn page() -> Result<(), String> {
    let path = build_page(false)?;
    let url = format!("file://{}", path.display());
    let opener = if cfg!(target_os = "macos") { "open" } else { "xdg-open" };
    let has_display = std::env::var_os("DISPLAY").is_some()
        || std::env::var_os("WAYLAND_DISPLAY").is_some()
        || cfg!(target_os = "macos");
    if has_display && Command::new(opener).arg(&url).status().map(|s| s.success()).unwrap_or(false) {
        eprintln!("opened {url}");
    } else {
        println!("Open this file in a browser (it works offline, no server needed):\n  {url}");
    }
    Ok(())
}

/// Debian's Chromium and poppler (for the print checks), installed when missing.
fn ensure_browser() -> Result<(), String> {
    let have = |program: &str| {
        Command::new("sh")
            .args(["-c", &format!("command -v {program}")])
            .output()
            .map(|o| o.status.success())
            .unwrap_or(false)
    };
    if have("chromium") && have("pdftotext") && have("pdftoppm") {
        return Ok(());
    }
    eprintln!("installing Debian's chromium and poppler-utils for the browser tests");
    run("apt-get", &["update", "-qq"])?;
    run("apt-get", &["install", "-y", "-qq", "chromium", "poppler-utils"])
}

/// The browser-test folder with its npm packages installed (from the lock file) on first use.
fn browser_test_dir() -> Result<PathBuf, String> {
    let dir = root().join("tests/browser");
    if !dir.join("node_modules/playwright-core").exists() {
        run("npm", &["ci", "--prefix", &dir.to_string_lossy(), "--no-audit", "--no-fund"])?;
    }
    Ok(dir)
}

fn browser_tests() -> Result<(), String> {
    ensure_browser()?;
    let page = build_page(false)?;
    let hooks = build_page(true)?;
    let dir = browser_test_dir()?;
    eprintln!("$ node --test tests/browser/page.test.mjs");
    let status = Command::new("node")
        .args(["--test", "--test-concurrency=1", "page.test.mjs"])
        .current_dir(&dir)
        .env("FLIPWRIGHT_PAGE", &page)
        .env("FLIPWRIGHT_TEST_PAGE", &hooks)
        .env("PLAYWRIGHT_SKIP_BROWSER_DOWNLOAD", "1")
        .status()
        .map_err(|e| format!("cannot start node: {e}"))?;
    if status.success() {
        Ok(())
    } else {
        Err("browser tests failed (screenshots and PDFs in out/browser-test/)".to_string())
    }
}

/// The wasm build with the benchmark exports (`--features bench`), bound for Node; returns
/// the glue's path.
fn build_wasm_bench() -> Result<PathBuf, String> {
    ensure_wasm_target()?;
    let target_dir = "target/wasm-bench";
    run(
        "cargo",
        &[
            "build",
            "-p",
            "flipwright-web",
            "--lib",
            "--target",
            "wasm32-unknown-unknown",
            "--profile",
            "wasm",
            "--target-dir",
            target_dir,
            "--features",
            "bench",
        ],
    )?;
    let wasm = root().join(target_dir).join("wasm32-unknown-unknown/wasm/flipwright_web.wasm");
    let out_dir = root().join(target_dir).join("node-bindgen");
    std::fs::create_dir_all(&out_dir).map_err(|e| format!("cannot create {}: {e}", out_dir.display()))?;
    let mut bindgen = wasm_bindgen_cli_support::Bindgen::new();
    bindgen.input_path(&wasm).nodejs(true).map_err(|e| format!("bindgen: {e}"))?.typescript(false);
    let mut generated = bindgen.generate_output().map_err(|e| format!("bindgen: {e}"))?;
    generated.emit(&out_dir).map_err(|e| format!("bindgen: {e}"))?;
    Ok(out_dir.join("flipwright_web.js"))
}

/// The chain benchmark in wasm under Node (`tests/browser/wasm-bench.mjs`); the native
/// figures come from `cargo bench -p flipwright-core --bench chain`.
fn wasm_bench(options: &[String]) -> Result<(), String> {
    let glue = build_wasm_bench()?;
    eprintln!("$ node tests/browser/wasm-bench.mjs {}", options.join(" "));
    let status = Command::new("node")
        .arg("wasm-bench.mjs")
        .args(options)
        .current_dir(root().join("tests/browser"))
        .env("FLIPWRIGHT_WASM_BENCH", &glue)
        .status()
        .map_err(|e| format!("cannot start node: {e}"))?;
    if status.success() {
        Ok(())
    } else {
        Err("wasm benchmark failed".to_string())
    }
}

fn bench() -> Result<(), String> {
    run("cargo", &["bench", "-p", "flipwright-core"])?;
    wasm_bench(&[])?;
    // The page bench compares the browser's verification with the native CLI's.
    run("cargo", &["build", "--release", "--quiet", "-p", "flipwright-cli"])?;
    ensure_browser()?;
    let page = build_page(false)?;
    let dir = browser_test_dir()?;
    eprintln!("$ node tests/browser/page-bench.mjs");
    let status = Command::new("node")
        .arg("page-bench.mjs")
        .current_dir(&dir)
        .env("FLIPWRIGHT_PAGE", &page)
        .env("FLIPWRIGHT_CLI", cli_path())
        .status()
        .map_err(|e| format!("cannot start node: {e}"))?;
    if status.success() {
        Ok(())
    } else {
        Err("page benchmark failed".to_string())
    }
}

fn main() -> ExitCode {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let result = match args.first().map(String::as_str) {
        Some("demo") => demo(),
        Some("test") => test(),
        Some("long-chains") => long_chain_check(),
        Some("wasm-digest") => wasm_digest_check(),
        Some("bench") => bench(),
        Some("wasm-bench") => wasm_bench(args.get(1..).unwrap_or(&[])),
        Some("page") => page(),
        Some("browser-test") => browser_tests(),
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
