//! `flipwright design FILE --min-yield Y`: synthesis aimed at a Monte Carlo yield over the
//! chain the stage is for; prints every candidate tried, the chosen one's yield with its
//! Wilson bound, and why the goal is not reached when it is not. Writes the chosen design.

use std::path::PathBuf;

use flipwright::design_file::DesignFile;
use flipwright::stage::StageDesign;
use flipwright::tolerance::{synthesise_for_yield, ToleranceError, YieldGoal};

use crate::yield_report::{number, shape_and_draws, DRAW_FLAGS};
use crate::{field_errors, parse_options, read, report, usage, write, Failure, EXIT_MARGINS_FAIL};

pub fn run(args: &[String]) -> Result<u8, Failure> {
    let mut with_value = vec!["out", "min-yield", "confidence"];
    with_value.extend(DRAW_FLAGS);
    let options = parse_options(args, &with_value, &["json"])?;
    let path = options.one_file("design")?;
    let min_yield: f64 =
        number(&options, "min-yield", "a fraction above 0 and below 1 (e.g. --min-yield 0.99)")?
            .unwrap_or(YieldGoal::default().min_yield);
    let confidence: f64 =
        number(&options, "confidence", "a fraction above 0 and below 1 (e.g. --confidence 0.95)")?
            .unwrap_or(YieldGoal::default().confidence);
    let (shape, trials, seed, distribution) = shape_and_draws(&options)?;
    let goal = YieldGoal { min_yield, confidence, shape, trials, seed, distribution };
    let text = read(&path)?;
    let mut file = DesignFile::parse(&text).map_err(|e| field_errors(&path, &e))?;
    let input = file.synthesis_input().map_err(|e| field_errors(&path, &e))?;
    let quiet = options.has("json");
    let mut progress = |done: usize, total: usize| {
        if !quiet {
            eprintln!("  candidate {done} of {total} done");
        }
        true
    };
    let result = synthesise_for_yield(&input, &goal, &mut progress).map_err(|e| match e {
        ToleranceError::InvalidOption { .. } => usage(format!("{e} (--min-yield, --confidence, --trials)")),
        other => Failure { code: EXIT_MARGINS_FAIL, message: other.to_string() },
    })?;
    file.requirements = result.input.requirements;
    file.values = Some(result.synthesis.values);
    let out = options.value("out").map(PathBuf::from).unwrap_or_else(|| path.with_extension("designed.json"));
    write(&out, &file.to_json())?;
    if quiet {
        let json = serde_json::json!({ "design": file, "yield_synthesis": result });
        println!("{}", serde_json::to_string_pretty(&json).unwrap_or_default());
        return Ok(if result.met { 0 } else { EXIT_MARGINS_FAIL });
    }
    println!(
        "Synthesis for a yield of at least {:.2} % at {:.0} % confidence over {} ({} trials per candidate, seed {}, {}):",
        100.0 * goal.min_yield,
        100.0 * goal.confidence,
        result.chain,
        result.trials,
        goal.seed,
        goal.distribution.name()
    );
    for (k, c) in result.candidates.iter().enumerate() {
        let mark = if k == result.chosen { "→" } else { " " };
        match &c.problem {
            Some(problem) => println!("  {mark} {}: could not be run: {problem}", c.change),
            None => println!(
                "  {mark} {}: {} of {} pass, yield {:.2} %, at least {:.2} %{}{}",
                c.change,
                c.passed,
                c.trials,
                100.0 * c.yield_fraction,
                100.0 * c.lower_bound,
                if c.worst_case_met {
                    "; every worst-case margin met"
                } else {
                    "; some worst-case margin fails"
                },
                if c.reaches_goal { " — reaches the goal" } else { "" }
            ),
        }
    }
    if result.met {
        println!("Goal reached.");
    } else {
        println!("GOAL NOT REACHED:");
        for line in &result.explanation {
            println!("  - {line}");
        }
    }
    println!("seed {}, digest {} (the chosen design's run)", goal.seed, result.report.digest);
    println!("wrote {}", out.display());
    println!();
    let stage = StageDesign::new(file.stage_input(None).map_err(|e| field_errors(&out, &e))?)
        .map_err(|e| field_errors(&out, &e))?;
    print!("{}", report::render(&file, &stage, &result.synthesis.report));
    Ok(if result.met { 0 } else { EXIT_MARGINS_FAIL })
}
