//! `flipwright yield DESIGN`: tolerances across a chain of the design's stages — the chain
//! worst case of every DC margin with its limiting stage and parameter, the Monte Carlo
//! yield with its Wilson interval and lower bound, the trials needed for ±1 %, the most
//! frequent failure, histograms of the tightest margins and margins against temperature.

use std::fmt::Write;

use serde::Serialize;

use flipwright::tolerance::monte_carlo::MAX_TRIALS;
use flipwright::tolerance::{
    chain_worst_case, loaded_chain, margins_against_temperature, monte_carlo_yield, ChainShape,
    ChainWorstCase, Distribution, MonteCarloOptions, TemperatureSweep, YieldReport,
};

use crate::{load_design, parse_options, usage, Failure, EXIT_MARGINS_FAIL};

/// Temperatures in the margin-against-temperature table.
const TEMPERATURE_POINTS: u32 = 7;
/// Margins shown as histograms (the tightest relative to their requirement).
const HISTOGRAMS_SHOWN: usize = 3;
/// Width of the longest histogram bar, characters.
const BAR_WIDTH: u32 = 40;

#[derive(Serialize)]
struct YieldView {
    chain: String,
    worst_case: ChainWorstCase,
    report: YieldReport,
    temperature: TemperatureSweep,
}

pub fn number<T: std::str::FromStr>(
    options: &crate::Options,
    flag: &str,
    what: &str,
) -> Result<Option<T>, Failure> {
    match options.value(flag) {
        None => Ok(None),
        Some(text) => {
            text.parse::<T>().map(Some).map_err(|_| usage(format!("--{flag} wants {what}, got \"{text}\"")))
        }
    }
}

/// The flags `yield` and `design --min-yield` share: which chain, and how its builds are drawn.
pub const DRAW_FLAGS: [&str; 6] = ["stages", "divide", "method", "trials", "seed", "distribution"];

/// The chain shape and the Monte Carlo draws (trials, seed, distribution) from the flags in
/// [`DRAW_FLAGS`].
pub fn shape_and_draws(options: &crate::Options) -> Result<(ChainShape, u32, u64, Distribution), Failure> {
    let stages: Option<u32> = number(options, "stages", "a stage count from 1 to 64 (e.g. --stages 4)")?;
    let divide: Option<u32> =
        number(options, "divide", "a division ratio from 2 to 4096 (e.g. --divide 10)")?;
    let method = options.value("method").map(crate::simulate_design::method_kind).transpose()?;
    if method.is_some() && divide.is_none() {
        return Err(usage("--method chooses how a planned chain is built: give --divide N with it"));
    }
    let shape = match (stages, divide) {
        (Some(_), Some(_)) => {
            return Err(usage("give --stages N or --divide N, not both"));
        }
        (None, Some(modulus)) => ChainShape::Divide { modulus, method },
        (Some(stages), None) => ChainShape::Stages { stages },
        (None, None) => ChainShape::Stages { stages: 1 },
    };
    let trials: u32 = number(options, "trials", &format!("a whole number of trials from 1 to {MAX_TRIALS}"))?
        .unwrap_or(MonteCarloOptions::default().trials);
    if !(1..=MAX_TRIALS).contains(&trials) {
        return Err(usage(format!("--trials wants a whole number from 1 to {MAX_TRIALS}, got {trials}")));
    }
    let seed: u64 = number(options, "seed", "a whole number from 0 to 18446744073709551615")?
        .unwrap_or(MonteCarloOptions::default().seed);
    let distribution = match options.value("distribution") {
        None | Some("uniform") => Distribution::Uniform,
        Some("normal") => Distribution::Normal,
        Some(other) => {
            return Err(usage(format!("--distribution wants uniform or normal, got \"{other}\"")));
        }
    };
    Ok((shape, trials, seed, distribution))
}

pub fn run(args: &[String]) -> Result<u8, Failure> {
    let options = parse_options(args, &DRAW_FLAGS, &["json"])?;
    let path = options.one_file("yield")?;
    let (shape, trials, seed, distribution) = shape_and_draws(&options)?;
    let (_, design) = load_design(&path)?;
    let (chain, description) = loaded_chain(&design, shape).map_err(|e| match e {
        flipwright::tolerance::ToleranceError::InvalidOption { .. } => {
            usage(format!("{e} (--stages takes 1 to 64, --divide 2 to 4096)"))
        }
        other => Failure { code: EXIT_MARGINS_FAIL, message: other.to_string() },
    })?;
    let failed = |e: flipwright::tolerance::ToleranceError| Failure {
        code: EXIT_MARGINS_FAIL,
        message: e.to_string(),
    };
    let worst_case = chain_worst_case(&chain).map_err(failed)?;
    let mc = MonteCarloOptions { trials, seed, distribution, ..MonteCarloOptions::default() };
    let report = monte_carlo_yield(&chain, &mc).map_err(failed)?;
    let temperature = margins_against_temperature(&chain, TEMPERATURE_POINTS).map_err(failed)?;
    let view = YieldView { chain: description, worst_case, report, temperature };
    if options.has("json") {
        let text = serde_json::to_string_pretty(&view).map_err(|e| usage(e.to_string()))?;
        println!("{text}");
    } else {
        print!("{}", render(&view));
    }
    Ok(if view.worst_case.all_pass { 0 } else { EXIT_MARGINS_FAIL })
}

fn value(v: f64, unit: &str) -> String {
    if v.is_finite() {
        if unit.is_empty() {
            format!("{v:.3}")
        } else {
            format!("{v:.4} {unit}")
        }
    } else {
        "not finite".to_string()
    }
}

fn render(view: &YieldView) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "Chain: {}", view.chain);
    let wc = &view.worst_case;
    let _ = writeln!(out, "\n== Chain worst case ({} distinct loaded stage(s)) ==", wc.distinct_stages);
    let _ = writeln!(
        out,
        "  {:<44} {:>14} {:>14} {:>14}  {:<6} limiting stage / parameter",
        "margin", "nominal", "worst", "required", "result"
    );
    for m in &wc.margins {
        let _ = writeln!(
            out,
            "  {:<44} {:>14} {:>14} {:>14}  {:<6} stage {} / {}",
            m.title,
            value(m.nominal, &m.unit),
            value(m.worst, &m.unit),
            value(m.required, &m.unit),
            if m.pass { "pass" } else { "FAIL" },
            m.limiting_stage + 1,
            m.limiting_parameter.as_deref().unwrap_or("—")
        );
    }
    let _ = writeln!(
        out,
        "  {}",
        if wc.all_pass { "every margin passes at worst case" } else { "SOME MARGIN FAILS AT WORST CASE" }
    );
    let r = &view.report;
    let confidence = 100.0 * r.options.confidence;
    let _ = writeln!(out, "\n== Monte Carlo yield ==");
    let _ = writeln!(
        out,
        "  {} of {} builds pass: yield {:.2} %, {confidence:.0} % interval {:.2} … {:.2} % (Wilson), at least {:.2} % with {confidence:.0} % confidence",
        r.passed,
        r.options.trials,
        100.0 * r.yield_fraction,
        100.0 * r.interval.low,
        100.0 * r.interval.high,
        100.0 * r.lower_bound
    );
    match r.trials_for_half_width {
        Some(n) => {
            let _ = writeln!(
                out,
                "  trials for ±{:.0} % at {confidence:.0} %: {n}",
                100.0 * r.options.half_width
            );
        }
        None => {
            let _ = writeln!(out, "  trials for ±{:.0} %: cannot be computed", 100.0 * r.options.half_width);
        }
    }
    match &r.most_frequent_failure {
        Some(f) => {
            let _ = writeln!(
                out,
                "  most frequent failure: {} in stage {} ({} builds, {:.2} %)",
                f.kind.title(),
                f.stage + 1,
                f.failures,
                100.0 * f.fraction
            );
        }
        None => {
            let _ = writeln!(out, "  no margin failed in any build");
        }
    }
    let _ = writeln!(out, "  seed {}, digest {}", r.options.seed, r.digest);
    for note in &r.notes {
        let _ = writeln!(out, "  - {note}");
    }
    // The tightest margins: smallest (min − required) relative to the requirement's scale.
    let mut order: Vec<usize> = (0..r.margins.len()).collect();
    let slack = |i: usize| {
        r.margins.get(i).map_or(f64::INFINITY, |m| {
            let s = (m.min - m.required) / m.required.abs().max(m.nominal.abs()).max(1e-30);
            if s.is_nan() {
                f64::NEG_INFINITY
            } else {
                s
            }
        })
    };
    order.sort_by(|&a, &b| slack(a).total_cmp(&slack(b)));
    for &i in order.iter().take(HISTOGRAMS_SHOWN) {
        let Some(m) = r.margins.get(i) else { continue };
        let _ = writeln!(
            out,
            "\n  {} (tightest stage per build; required {}, {} build(s) fail):",
            m.title,
            value(m.required, &m.unit),
            m.failing_trials
        );
        let most = m.histogram.counts.iter().copied().max().unwrap_or(0).max(1);
        for (k, &count) in m.histogram.counts.iter().enumerate() {
            let (Some(&low), Some(&high)) = (m.histogram.edges.get(k), m.histogram.edges.get(k + 1)) else {
                continue;
            };
            let bar = (u64::from(count) * u64::from(BAR_WIDTH)).div_ceil(u64::from(most)) as usize;
            let _ = writeln!(
                out,
                "    {:>12} … {:<12} {:>7} {}",
                value(low, ""),
                value(high, ""),
                count,
                "#".repeat(bar)
            );
        }
        if m.histogram.not_finite > 0 {
            let _ = writeln!(out, "    not finite: {}", m.histogram.not_finite);
        }
    }
    let t = &view.temperature;
    let _ = writeln!(out, "\n== Margins against temperature (nominal / worst over the other parameters) ==");
    let mut header = format!("  {:<44}", "margin");
    for temperature in &t.temperatures_c {
        let _ = write!(header, " {:>17}", format!("{temperature:.1} °C"));
    }
    let _ = writeln!(out, "{header}");
    for curve in &t.margins {
        let mut line = format!(
            "  {:<44}",
            format!("{} ({})", curve.title, if curve.unit.is_empty() { "ratio" } else { &curve.unit })
        );
        for (n, w) in curve.nominal.iter().zip(&curve.worst) {
            let _ = write!(line, " {:>17}", format!("{n:.3}/{w:.3}"));
        }
        let _ = writeln!(out, "{line}");
    }
    out
}
