//! `flipwright simulate DESIGN`: the designed stage (or a ripple chain of it, or a planned
//! divide-by-N chain by any method, at chosen corners) simulated, its count checked after
//! every input edge, and trigger sensitivity and maximum toggle rate measured beside the
//! handbook estimates; the waveforms go to a CSV only when `--csv OUT` asks.

use std::fmt::Write;
use std::io::{IsTerminal, Write as _};
use std::path::Path;

use flipwright::chain::{plan_chain, ChainRequest, Method, MethodKind};
use flipwright::stage::StageDesign;
use flipwright::transient::export::parse_probe;
use flipwright::transient::{Probe, TransientResult};
use flipwright::units::{format_quantity, Unit};
use flipwright::verify::{
    self, in_real_polarity, BuiltCircuit, CountCheck, Measured, RunAccuracy, SearchOutcome, SearchSettings,
    SimulationCorner, VerifyError, VerifyOptions,
};

use crate::simulate::{waveform_line, write_waveforms};
use crate::{load_design, usage, Failure, EXIT_MARGINS_FAIL};

/// Design-file options of `simulate`.
pub struct DesignRequest {
    pub stages: usize,
    /// `--divide N`: the planned chain for N (plain binary, skip feedback or reset on count).
    pub divide: Option<u32>,
    pub edges: Option<usize>,
    pub temperature_c: Option<f64>,
    pub measure: bool,
    /// `--method binary|feedback|reset`: which planned method; none is the recommendation.
    pub method: Option<MethodKind>,
    pub corners: CornerChoice,
}

/// `--corners`: which simulation corners a planned chain runs at.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CornerChoice {
    /// 25 °C, nominal values (or `--temperature`).
    Nominal,
    /// The two worst corners (slow and fast, from the design's tolerances).
    Worst,
    /// Nominal, then the two worst.
    All,
}

impl DesignRequest {
    pub fn parse(
        stages: Option<&str>,
        divide: Option<&str>,
        edges: Option<&str>,
        temperature: Option<&str>,
        quick: bool,
    ) -> Result<DesignRequest, Failure> {
        let stages = match stages {
            None => 1,
            Some(text) => text
                .parse::<usize>()
                .ok()
                .filter(|n| (1..=verify::build::MAX_CHAIN_STAGES).contains(n))
                .ok_or_else(|| {
                    usage(format!(
                        "--stages wants a whole number from 1 to {}, got \"{text}\"",
                        verify::build::MAX_CHAIN_STAGES
                    ))
                })?,
        };
        let edges = match edges {
            None => None,
            Some(text) => Some(
                text.parse::<usize>()
                    .ok()
                    .filter(|n| (1..=verify::count::MAX_EDGES).contains(n))
                    .ok_or_else(|| {
                        usage(format!(
                            "--edges wants a whole number from 1 to {}, got \"{text}\"",
                            verify::count::MAX_EDGES
                        ))
                    })?,
            ),
        };
        let temperature_c = match temperature {
            None => None,
            Some(text) => Some(
                text.trim_end_matches("°C")
                    .trim_end_matches('C')
                    .trim()
                    .replace('−', "-")
                    .parse::<f64>()
                    .ok()
                    .filter(|t| (-70.0..=150.0).contains(t))
                    .ok_or_else(|| {
                        usage(format!("--temperature wants °C from −70 to 150, got \"{text}\""))
                    })?,
            ),
        };
        let divide = match divide {
            None => None,
            Some(text) => {
                Some(text.parse::<u32>().ok().filter(|n| (2..=4096).contains(n)).ok_or_else(|| {
                    usage(format!("--divide wants a division ratio from 2 to 4096, got \"{text}\""))
                })?)
            }
        };
        if divide.is_some() && stages != 1 {
            return Err(usage("give --divide N or --stages N, not both (--divide sets the stages)"));
        }
        Ok(DesignRequest {
            stages,
            divide,
            edges,
            temperature_c,
            measure: !quick,
            method: None,
            corners: CornerChoice::Nominal,
        })
    }

    /// Adds `--method` and `--corners`, which only a planned chain (`--divide N`) takes.
    pub fn with_chain_choices(
        mut self,
        method: Option<&str>,
        corners: Option<&str>,
    ) -> Result<Self, Failure> {
        if self.divide.is_none() && (method.is_some() || corners.is_some()) {
            return Err(usage(
                "--method and --corners choose how a planned chain runs: give --divide N with them",
            ));
        }
        self.method = method.map(method_kind).transpose()?;
        self.corners = match corners {
            None | Some("nominal") => CornerChoice::Nominal,
            Some("worst") => CornerChoice::Worst,
            Some("all") => CornerChoice::All,
            Some(other) => {
                return Err(usage(format!("--corners wants nominal, worst or all, got \"{other}\"")))
            }
        };
        if self.corners != CornerChoice::Nominal && self.temperature_c.is_some() {
            return Err(usage(
                "--temperature sets the nominal run only; the worst corners take their temperatures from the design's conditions: drop one of them",
            ));
        }
        Ok(self)
    }
}

fn verify_failure(error: VerifyError) -> Failure {
    Failure { code: EXIT_MARGINS_FAIL, message: format!("the verification failed: {error}") }
}

/// Runs the design route of `simulate`.
pub fn simulate_design_file(
    path: &Path,
    request: &DesignRequest,
    csv: Option<&Path>,
    probes: Option<&str>,
) -> Result<u8, Failure> {
    let (_, design) = load_design(path)?;
    let sign = design.transistor().polarity.sign();
    let mut corner = SimulationCorner::nominal();
    if let Some(t) = request.temperature_c {
        corner.temperature_c = t;
    }
    let mut out = String::new();
    let mut what = String::from("one stage");
    // The temperature of the run whose waveforms are written (a worst corner's, when the
    // nominal one is not run).
    let mut shown_temperature_c = corner.temperature_c;
    let (check, result, built) = if request.stages == 1 && request.divide.is_none() {
        let options = VerifyOptions {
            nominal_edges: request.edges.unwrap_or(8),
            corner,
            measure: request.measure,
            ..VerifyOptions::default()
        };
        // Progress on a terminal only; logs get the result alone.
        let mut stderr = std::io::stderr();
        let show = stderr.is_terminal();
        let (verification, result) = verify::verify_stage(&design, &options, &mut |p| {
            if show {
                let _ = write!(
                    stderr,
                    "\r{:<22} run {:>2} of at most {:>2}",
                    p.phase,
                    p.done_runs + 1,
                    p.total_runs
                );
                let _ = stderr.flush();
            }
            true
        })
        .map_err(verify_failure)?;
        if show {
            let _ = write!(stderr, "\r{:<50}\r", "");
        }
        let built = verify::stage_circuit(&design, &verification.pulse, &corner)
            .map_err(|e| verify_failure(e.into()))?;
        render_timings(&mut out, &verification);
        for measured in verification.sensitivity.iter().chain(verification.max_rate.iter()) {
            render_measured(&mut out, measured);
        }
        if !request.measure {
            let _ = writeln!(out, "Sensitivity and toggle-rate searches skipped (--quick).");
        }
        (verification.nominal, result, built)
    } else {
        // The first stage sees what one stage would: the required trigger amplitude, or the
        // swing of an identical driving stage.
        let pulse =
            verify::service_pulse(&design, SearchSettings::default().edge_s).map_err(verify_failure)?;
        let accuracy = RunAccuracy::for_counting();
        match request.divide {
            None => {
                let edges = request.edges.unwrap_or(2usize << request.stages);
                what = format!(
                    "a ripple chain of {} stages (divide by {})",
                    request.stages,
                    1u64 << request.stages
                );
                verify::verify_chain(&design, request.stages, edges, &pulse, &corner, &accuracy)
                    .map_err(verify_failure)?
            }
            Some(modulus) => {
                let plan = plan_chain(&ChainRequest { modulus, natural_binary_code: false })
                    .map_err(|e| usage(format!("--divide: {e}")))?;
                let kind = match request.method {
                    Some(kind) => kind,
                    None if modulus.is_power_of_two() => MethodKind::PlainBinary,
                    None => MethodKind::SkipFeedback,
                };
                let Some(method) = plan.method(kind) else {
                    return Err(usage(if modulus.is_power_of_two() {
                        format!("--method: {modulus} is a power of two, planned as plain binary only; give --method binary or leave it out")
                    } else {
                        format!("--method: {modulus} is not a power of two; give --method feedback or --method reset")
                    }));
                };
                what = format!(
                    "a chain of {} stages dividing by {modulus} ({})",
                    plan.stage_count,
                    match &method.method {
                        Method::SkipFeedback { receiving_stages, skipped_states, .. } => format!(
                            "the last stage presets stage(s) {} and skips {skipped_states} states",
                            stage_list(receiving_stages)
                        ),
                        Method::ResetOnCount { decoded_stages } => format!(
                            "reset on reaching {modulus}, decoded from stage(s) {}, through a driver transistor",
                            stage_list(decoded_stages)
                        ),
                        Method::PlainBinary => "plain binary".to_string(),
                    }
                );
                if request.method.is_none() && !modulus.is_power_of_two() {
                    let _ = writeln!(
                        out,
                        "Method: feedback that skips states (the default); --method reset simulates reset on reaching N."
                    );
                }
                let corners = match request.corners {
                    CornerChoice::Nominal => {
                        vec![verify::NamedCorner { name: "nominal".to_string(), corner }]
                    }
                    CornerChoice::Worst => verify::chain_corners(&design).into_iter().skip(1).collect(),
                    CornerChoice::All => verify::chain_corners(&design),
                };
                let options = verify::PlannedChainOptions {
                    edges: request.edges.unwrap_or(2 * modulus as usize),
                    pulse,
                    corners,
                    accuracy,
                    reset_values: None,
                };
                let mut stderr = std::io::stderr();
                let show = stderr.is_terminal();
                let (verification, result, built) = verify::verify_planned_chain_at_corners(
                    &design,
                    method,
                    plan.stage_count as usize,
                    &options,
                    &mut |p| {
                        if show {
                            let _ = write!(stderr, "\rcorner {} of {}", p.done_runs + 1, p.total_runs);
                            let _ = stderr.flush();
                        }
                        true
                    },
                )
                .map_err(verify_failure)?;
                if show {
                    let _ = write!(stderr, "\r{:<30}\r", "");
                }
                render_planned(&mut out, &verification);
                let shown =
                    verification.corners.first().ok_or_else(|| usage("--corners: no corner was run"))?;
                if shown.name != "nominal" {
                    what = format!("{what}, the {} corner's run", shown.name);
                }
                shown_temperature_c = shown.corner.temperature_c;
                let check = shown.check.clone();
                let mut check = check;
                check.correct = verification.all_correct;
                (check, result, built)
            }
        }
    };
    let result = in_real_polarity(result, sign);
    let probes = choose_probes(&built, &result, probes)?;
    let written = write_waveforms(csv, &result, &probes, usage)?;
    let mut head = String::new();
    render_run(&mut head, &what, &design, &built, &check, shown_temperature_c);
    let _ = writeln!(head, "{}", waveform_line(written, result.time_s.len(), probes.len()));
    print!("{head}{}", if out.is_empty() { String::new() } else { format!("\n{out}") });
    println!("\nAssumptions of the simulated circuit:");
    for line in &built.assumptions {
        println!("  - {line}");
    }
    if sign < 0.0 && written.is_some() {
        println!("  - simulated as the NPN mirror; the CSV holds the real (negative) PNP voltages");
    } else if sign < 0.0 {
        println!("  - simulated as the NPN mirror");
    }
    Ok(if check.correct { 0 } else { EXIT_MARGINS_FAIL })
}

fn stage_list(stages: &[u32]) -> String {
    stages.iter().map(|s| (s + 1).to_string()).collect::<Vec<_>>().join(", ")
}

/// The per-corner count checks and, for a reset plan, the reset network and its pulses.
fn render_planned(out: &mut String, verification: &verify::PlannedChainVerification) {
    if let Some(reset) = &verification.reset {
        let _ = writeln!(
            out,
            "Reset network (planner): {}; driver current {}, gate sink {:.0} % of a stage's collector current.",
            crate::report::reset_values(&reset.values),
            format_quantity(reset.driver_current_a, Unit::Ampere),
            100.0 * reset.gate_sink_share
        );
        let _ = writeln!(
            out,
            "  closed form (cold end): the decoded stages fire at a bus of {}; reset pulse {} with the bus above the knee {}; race {} ({} held after the gate's removal of {} needed)",
            format_quantity(reset.bus_fire_v, Unit::Volt),
            format_quantity(reset.pulse_width_s, Unit::Second),
            format_quantity(reset.levels.knee_v, Unit::Volt),
            if reset.race.won { "won" } else { "LOST" },
            format_quantity(reset.race.available_hold_s, Unit::Second),
            format_quantity(reset.race.required_hold_s, Unit::Second)
        );
        for problem in &reset.problems {
            let _ = writeln!(out, "  problem: {problem}");
        }
    }
    for corner in &verification.corners {
        let c = &corner.corner;
        let pulses = corner.reset_pulses.as_ref().map_or_else(String::new, |p| {
            let time = |t: Option<f64>| t.map_or_else(|| "-".to_string(), |w| format_quantity(w, Unit::Second));
            format!(
                "; {} reset pulse(s) above the knee {}, shortest {} (closed form {}), held after the gate's removal {} (closed form {})",
                p.widths_s.len(),
                format_quantity(p.level_v, Unit::Volt),
                time(p.shortest_s()),
                time(p.closed_form_pulse_s),
                time(p.shortest_hold_after_removal_s()),
                time(p.closed_form_hold_after_removal_s)
            )
        });
        let _ = writeln!(
            out,
            "Corner {:<8} ({:.0} °C, supply ×{:.2}, resistors ×{:.2}, capacitors ×{:.2}, hFE {:+.0}): {} after {} edges{}",
            corner.name,
            c.temperature_c,
            c.supply_factor,
            c.resistor_factor,
            c.capacitor_factor,
            c.hfe_spread,
            match corner.check.first_error {
                None => "PASS".to_string(),
                Some(k) => format!("FAIL at edge {}", k + 1),
            },
            corner.check.edges,
            pulses
        );
    }
}

fn choose_probes(
    built: &BuiltCircuit,
    result: &TransientResult,
    list: Option<&str>,
) -> Result<Vec<Probe>, Failure> {
    let names: Vec<String> = match list {
        Some(list) => list.split(',').map(|n| n.trim().to_string()).filter(|n| !n.is_empty()).collect(),
        None => std::iter::once(built.input_node.clone())
            .chain(built.stages.iter().flat_map(|s| s.collectors.iter().chain(s.bases.iter()).cloned()))
            .chain(built.reset.iter().flat_map(|r| [r.hold.clone(), r.bus.clone()]))
            .collect(),
    };
    let probes = names
        .iter()
        .map(|name| parse_probe(name, &result.node_names, &result.source_names))
        .collect::<Result<Vec<Probe>, _>>()
        .map_err(|e| usage(format!("--probe: {e}")))?;
    if probes.is_empty() {
        return Err(usage("--probe names nothing: give node or source names, such as --probe c1,c2"));
    }
    Ok(probes)
}

fn render_run(
    out: &mut String,
    what: &str,
    design: &StageDesign,
    built: &BuiltCircuit,
    check: &CountCheck,
    temperature_c: f64,
) {
    let pulse = &built.pulse;
    let stats = check.statistics;
    let _ = writeln!(
        out,
        "Simulated {what} at {temperature_c:.1} °C: {} input edges of {} at {} ({} edges).",
        check.edges,
        format_quantity(pulse.amplitude_v * design.transistor().polarity.sign(), Unit::Volt),
        format_quantity(pulse.rate_hz, Unit::Hertz),
        format_quantity(pulse.effective_edge_s(), Unit::Second),
    );
    let _ = writeln!(
        out,
        "Engine: {} accepted steps, {} rejected, {:.2} Newton iterations per step.",
        stats.accepted_steps,
        stats.rejected_steps,
        stats.newton_iterations as f64 / stats.accepted_steps.max(1) as f64
    );
    match check.first_error {
        None => {
            let _ = writeln!(out, "PASS: the count was right after every one of the {} edges.", check.edges);
        }
        Some(k) => {
            let got = check.observed.get(k).copied().flatten();
            let _ = writeln!(
                out,
                "FAIL: after edge {} the count should be {} but was {}.",
                k + 1,
                check.expected.get(k).copied().unwrap_or(0),
                got.map_or_else(|| "undecided (a stage between its states)".to_string(), |c| c.to_string())
            );
        }
    }
    let shown = check.edges.min(32);
    let counts: Vec<String> = check
        .observed
        .iter()
        .take(shown)
        .map(|c| c.map_or_else(|| "?".to_string(), |c| c.to_string()))
        .collect();
    let _ = writeln!(
        out,
        "Count after each edge{}: {}",
        if shown < check.edges { format!(" (first {shown})") } else { String::new() },
        counts.join(" ")
    );
}

fn render_measured(out: &mut String, measured: &Measured) {
    let unit = if measured.unit == "Hz" { Unit::Hertz } else { Unit::Volt };
    let show = |v: Option<f64>| v.map_or_else(|| "-".to_string(), |v| format_quantity(v, unit));
    let result = match measured.outcome {
        SearchOutcome::Bracketed { passing, failing } => format!(
            "{} (passes at {}, fails at {})",
            format_quantity(passing, unit),
            format_quantity(passing, unit),
            format_quantity(failing, unit)
        ),
        SearchOutcome::FailsAtBestBound => "fails even at the most favourable bound".to_string(),
        SearchOutcome::PassesAtWorstBound => "beyond the search (passes at its far bound)".to_string(),
    };
    let _ = writeln!(
        out,
        "{}: estimate {}, measured {}",
        capitalise(&measured.quantity),
        show(measured.estimate),
        result
    );
    let _ = writeln!(
        out,
        "  searched {} to {}, resolution {}, {} runs of {} consecutive edges; {}",
        format_quantity(measured.search_low, unit),
        format_quantity(measured.search_high, unit),
        measured.resolution_text,
        measured.runs,
        measured.edges_per_run,
        measured.conditions
    );
}

fn capitalise(text: &str) -> String {
    let mut chars = text.chars();
    chars.next().map(|c| c.to_uppercase().chain(chars).collect()).unwrap_or_default()
}

fn render_timings(out: &mut String, verification: &verify::StageVerification) {
    let Some(t) = verification.timings else {
        let _ = writeln!(out, "Switching times: not measurable on this run.");
        return;
    };
    let time = |v: Option<f64>| v.map_or_else(|| "-".to_string(), |v| format_quantity(v, Unit::Second));
    let _ =
        writeln!(out, "Switching times measured on the first two edges (estimate beside, charge control):");
    let _ = writeln!(out, "  input edge to output half swing  {:>10}", time(t.toggle_delay_s));
    let _ = writeln!(
        out,
        "  storage (edge to 10 % of rise)   {:>10}   estimate {} (storage alone)",
        time(t.storage_s),
        time(Some(verification.estimated_storage_s))
    );
    let _ = writeln!(
        out,
        "  collector fall 90-10 %           {:>10}   estimate {} (current rise at turn-on)",
        time(t.collector_fall_s),
        time(verification.estimated_current_rise_s)
    );
    let _ = writeln!(
        out,
        "  collector rise 10-90 %           {:>10}   estimate {} (2.2·RC·(C1 + Cob + Ct); the current falls in {})",
        time(t.collector_rise_s),
        time(Some(verification.estimated_collector_rise_s)),
        time(Some(verification.estimated_current_fall_s))
    );
    if let (Some(period), Some(duty)) = (t.output_period_s, t.output_duty) {
        let _ = writeln!(
            out,
            "  output period {} (two input periods expected), duty cycle {:.1} %",
            format_quantity(period, Unit::Second),
            100.0 * duty
        );
    }
}

/// The word of `--method` (binary, feedback or reset) as the planned method it names.
pub fn method_kind(word: &str) -> Result<MethodKind, Failure> {
    match word {
        "binary" => Ok(MethodKind::PlainBinary),
        "feedback" => Ok(MethodKind::SkipFeedback),
        "reset" => Ok(MethodKind::ResetOnCount),
        other => Err(usage(format!("--method wants binary, feedback or reset, got \"{other}\""))),
    }
}
