//! The wasm bridge: a handful of exports that take design-file JSON, call the core, and return
//! plain transfer objects for the page to render. No engineering happens here.

#[cfg(feature = "bench")]
mod bench;
pub mod chain;
mod packed;
pub mod plots;
mod schematic;
pub mod tolerance_plots;
pub mod traces;

use serde::Serialize;
use wasm_bindgen::prelude::*;

use flipwright::design_file::DesignFile;
use flipwright::stage::analysis::{analyse, StageReport};
use flipwright::stage::synthesis::{synthesise, SynthesisOutcome};
use flipwright::stage::{FieldError, StageDesign};
use flipwright::table::{component_table, to_csv, ComponentRow};
use flipwright::tolerance::{
    chain_worst_case, loaded_chain, margins_against_temperature, monte_carlo_yield_with_progress, ChainShape,
    ChainWorstCase, LoadedChain, MonteCarloOptions, TemperatureSweep, ToleranceError, YieldReport,
};
use flipwright::tolerance::{synthesise_for_yield, YieldGoal, YieldSynthesis};
use flipwright::verify::{
    self, in_real_polarity, BuiltCircuit, CountCheck, InputPulse, Progress, RunAccuracy, SearchSettings,
    SimulationCorner, StageVerification, VerifyOptions,
};

use plots::{Panel, Pen, TimingDiagram, WaveformChart};
use tolerance_plots::{HistogramChart, TemperatureChart};

#[wasm_bindgen(start)]
pub fn start() {
    console_error_panic_hook::set_once();
}

/// What every export returns: either the result, or field errors the page shows beside the
/// fields (the design in the page is left as it was).
#[derive(Serialize)]
#[serde(tag = "status", rename_all = "snake_case")]
pub enum Outcome<T: Serialize> {
    Ok(T),
    Invalid { errors: Vec<FieldError> },
    Failed { message: String },
}

/// Everything the page shows for one analysed stage.
#[derive(Serialize)]
pub struct AnalysisView {
    /// The design file as the core understood it (normalised JSON text).
    pub design_json: String,
    pub name: String,
    pub report: StageReport,
    pub table: Vec<ComponentRow>,
    pub table_csv: String,
    pub schematic_svg: String,
    /// The chain plan when the file divides by N (its `chain` section).
    pub chain: Option<Outcome<chain::ChainPlanView>>,
}

/// Result of synthesis: the completed design and its analysis.
#[derive(Serialize)]
pub struct SynthesisView {
    pub analysis: AnalysisView,
    pub met: bool,
    pub steps: Vec<String>,
    pub shortfalls: Vec<String>,
}

fn to_js<T: Serialize>(value: &T) -> Result<JsValue, JsError> {
    // Plain objects and null as JSON would give them, but bytes as a Uint8Array: the packed
    // series (`packed`) are handed over in one copy instead of element by element.
    let serializer = serde_wasm_bindgen::Serializer::json_compatible().serialize_bytes_as_arrays(false);
    value
        .serialize(&serializer)
        .map_err(|e| JsError::new(&format!("cannot pass the result to the page: {e}")))
}

fn view(file: &DesignFile, design: &StageDesign, report: StageReport) -> AnalysisView {
    let table = component_table(design, &report, 1);
    let chain = chain::chain_view(file.chain.as_ref(), design, &report);
    // The CSV holds what the page's table shows: stage 1's parts, then the chain's own.
    let chain_parts = match &chain {
        Some(Outcome::Ok(plan)) => plan.parts.as_slice(),
        _ => &[],
    };
    let table_csv = to_csv(&[table.as_slice(), chain_parts].concat());
    AnalysisView {
        chain,
        design_json: file.to_json(),
        name: file.name.clone(),
        table_csv,
        schematic_svg: schematic::stage_svg(design),
        table,
        report,
    }
}

fn analyse_text(text: &str) -> Outcome<AnalysisView> {
    let (file, design) = match DesignFile::load(text) {
        Ok(pair) => pair,
        Err(errors) => return Outcome::Invalid { errors },
    };
    match analyse(&design) {
        Ok(report) => Outcome::Ok(view(&file, &design, report)),
        Err(e) => Outcome::Failed { message: e.to_string() },
    }
}

fn synthesise_text(text: &str) -> Outcome<SynthesisView> {
    let mut file = match DesignFile::parse(text) {
        Ok(file) => file,
        Err(errors) => return Outcome::Invalid { errors },
    };
    let input = match file.synthesis_input() {
        Ok(input) => input,
        Err(errors) => return Outcome::Invalid { errors },
    };
    let outcome: SynthesisOutcome = match synthesise(&input) {
        Ok(outcome) => outcome,
        Err(flipwright::stage::synthesis::SynthesisError::Invalid(errors)) => {
            return Outcome::Invalid { errors }
        }
        Err(e) => return Outcome::Failed { message: e.to_string() },
    };
    file.values = Some(outcome.values);
    let design = match file.stage_input(None).and_then(StageDesign::new) {
        Ok(design) => design,
        Err(errors) => return Outcome::Invalid { errors },
    };
    Outcome::Ok(SynthesisView {
        analysis: view(&file, &design, outcome.report),
        met: outcome.met,
        steps: outcome.steps,
        shortfalls: outcome.shortfalls,
    })
}

/// A stage verification as the page shows it.
#[derive(Serialize)]
pub struct StageVerificationView {
    pub verification: StageVerification,
    /// +1 for NPN, −1 for PNP: the verification's pulse amplitude and levels are NPN-frame
    /// magnitudes; the chart is already in the real polarity.
    pub polarity_sign: f64,
    /// The simulated circuit's assumptions, with the polarity note for a PNP stage.
    pub assumptions: Vec<String>,
    /// The nominal run's input, collectors and bases, decimated.
    pub chart: WaveformChart,
}

/// A ripple-chain verification as the page shows it.
#[derive(Serialize)]
pub struct ChainVerificationView {
    pub check: CountCheck,
    pub pulse: InputPulse,
    pub polarity_sign: f64,
    pub assumptions: Vec<String>,
    /// The input and every stage's output, decimated, with the count after each edge.
    pub diagram: TimingDiagram,
}

/// Rejects a key the defaults do not have, so a misspelt option is an error, not ignored.
fn overlay(base: &mut serde_json::Value, patch: serde_json::Value, path: &str) -> Result<(), FieldError> {
    match (base, patch) {
        (serde_json::Value::Object(base), serde_json::Value::Object(patch)) => {
            for (key, value) in patch {
                let here = format!("{path}.{key}");
                match base.get_mut(&key) {
                    Some(slot) => overlay(slot, value, &here)?,
                    None => {
                        return Err(FieldError {
                            path: here,
                            message: "is not a verification option".to_string(),
                        })
                    }
                }
            }
            Ok(())
        }
        (base, patch) => {
            *base = patch;
            Ok(())
        }
    }
}

/// The verification options: the core's defaults with the fields `text` gives replaced
/// (`{"measure": false}` skips the searches).
fn verify_options(text: Option<&str>) -> Result<VerifyOptions, Vec<FieldError>> {
    let Some(text) = text.filter(|t| !t.trim().is_empty()) else { return Ok(VerifyOptions::default()) };
    let bad = |message: String| vec![FieldError { path: "options".to_string(), message }];
    let patch: serde_json::Value =
        serde_json::from_str(text).map_err(|e| bad(format!("is not JSON: {e}")))?;
    let mut merged = serde_json::to_value(VerifyOptions::default()).map_err(|e| bad(e.to_string()))?;
    overlay(&mut merged, patch, "options").map_err(|e| vec![e])?;
    serde_json::from_value(merged).map_err(|e| bad(e.to_string()))
}

fn polarity_assumptions(mut assumptions: Vec<String>, sign: f64) -> Vec<String> {
    if sign < 0.0 {
        assumptions.push(
            "simulated as the NPN mirror; the waveforms are shown in the real (negative) PNP polarity"
                .to_string(),
        );
    }
    assumptions
}

fn node_pair(nodes: &[String; 2], what: &str) -> [(String, String); 2] {
    [(nodes[0].clone(), format!("Q1 {what}")), (nodes[1].clone(), format!("Q2 {what}"))]
}

/// Input, both collectors and both bases of a single stage, in three panels.
fn stage_chart(built: &BuiltCircuit, result: &flipwright::transient::TransientResult) -> WaveformChart {
    let mut nodes = vec![(built.input_node.clone(), "input".to_string())];
    if let Some(stage) = built.stages.first() {
        nodes.extend(node_pair(&stage.collectors, "collector"));
        nodes.extend(node_pair(&stage.bases, "base"));
    }
    let run = traces::decimate(result, &nodes);
    let find = |node: &str| run.traces.iter().position(|t| t.node == node);
    let panel = |title: &str, members: &[(usize, Pen)]| {
        let traces: Vec<(usize, Pen)> = members
            .iter()
            .filter_map(|&(i, pen)| nodes.get(i).and_then(|(node, _)| find(node)).map(|t| (t, pen)))
            .collect();
        Panel { title: title.to_string(), traces }
    };
    let panels = vec![
        panel("Input", &[(0, Pen::Input)]),
        panel("Collectors", &[(1, Pen::First), (2, Pen::Second)]),
        panel("Bases", &[(3, Pen::First), (4, Pen::Second)]),
    ];
    WaveformChart { run, panels }
}

fn verify_text(
    design_json: &str,
    options_json: Option<&str>,
    progress: &mut dyn FnMut(Progress) -> bool,
) -> Outcome<StageVerificationView> {
    let (_, design) = match DesignFile::load(design_json) {
        Ok(pair) => pair,
        Err(errors) => return Outcome::Invalid { errors },
    };
    let options = match verify_options(options_json) {
        Ok(options) => options,
        Err(errors) => return Outcome::Invalid { errors },
    };
    let (verification, result) = match verify::verify_stage(&design, &options, progress) {
        Ok(pair) => pair,
        Err(e) => return Outcome::Failed { message: format!("the verification failed: {e}") },
    };
    // Rebuilt only for its node names; the same inputs built the run's circuit.
    let built = match verify::stage_circuit(&design, &verification.pulse, &verification.corner) {
        Ok(built) => built,
        Err(e) => return Outcome::Failed { message: format!("the verification failed: {e}") },
    };
    let sign = design.transistor().polarity.sign();
    let result = in_real_polarity(result, sign);
    Outcome::Ok(StageVerificationView {
        chart: stage_chart(&built, &result),
        assumptions: polarity_assumptions(verification.assumptions.clone(), sign),
        polarity_sign: sign,
        verification,
    })
}

fn verify_chain_text(design_json: &str, stages: usize, edges: usize) -> Outcome<ChainVerificationView> {
    let (_, design) = match DesignFile::load(design_json) {
        Ok(pair) => pair,
        Err(errors) => return Outcome::Invalid { errors },
    };
    let failed =
        |e: verify::VerifyError| Outcome::Failed { message: format!("the chain verification failed: {e}") };
    let pulse = match verify::service_pulse(&design, SearchSettings::default().edge_s) {
        Ok(pulse) => pulse,
        Err(e) => return failed(e),
    };
    let corner = SimulationCorner::nominal();
    let (check, result, built) =
        match verify::verify_chain(&design, stages, edges, &pulse, &corner, &RunAccuracy::for_counting()) {
            Ok(triple) => triple,
            Err(e) => return failed(e),
        };
    let sign = design.transistor().polarity.sign();
    let result = in_real_polarity(result, sign);
    let diagram = chain_diagram(&built, &result, &check, &pulse);
    Outcome::Ok(ChainVerificationView {
        check,
        pulse,
        polarity_sign: sign,
        assumptions: polarity_assumptions(built.assumptions, sign),
        diagram,
    })
}

/// The input and every stage's output of a chain run, decimated, with the count after each edge.
fn chain_diagram(
    built: &BuiltCircuit,
    result: &flipwright::transient::TransientResult,
    check: &CountCheck,
    pulse: &InputPulse,
) -> TimingDiagram {
    let nodes: Vec<(String, String)> = std::iter::once((built.input_node.clone(), "input".to_string()))
        .chain(
            built
                .stages
                .iter()
                .enumerate()
                .map(|(k, stage)| (stage.output().to_string(), format!("stage {} · bit {k}", k + 1))),
        )
        .collect();
    TimingDiagram {
        run: traces::decimate(result, &nodes),
        edge_times_s: (0..=check.edges).map(|k| pulse.edge_time_s(k)).collect(),
        counts: check.observed.clone(),
        logic: false,
    }
}

fn from_js<T: serde::de::DeserializeOwned>(value: JsValue, what: &str) -> Result<T, JsError> {
    serde_wasm_bindgen::from_value(value).map_err(|e| JsError::new(&format!("not a {what}: {e}")))
}

fn canvas_backend(canvas: web_sys::HtmlCanvasElement) -> Result<plotters_canvas::CanvasBackend, JsError> {
    plotters_canvas::CanvasBackend::with_canvas_object(canvas)
        .ok_or_else(|| JsError::new("the canvas has no 2D drawing context"))
}

/// The demo design file as JSON text (values not yet chosen).
#[wasm_bindgen]
pub fn demo_design() -> String {
    DesignFile::demo().to_json()
}

/// Validates and analyses a design file with values.
#[wasm_bindgen]
pub fn analyse_design(design_json: &str) -> Result<JsValue, JsError> {
    to_js(&analyse_text(design_json))
}

/// Chooses every value from the requirements of a design file, then analyses the result.
#[wasm_bindgen]
pub fn synthesise_design(design_json: &str) -> Result<JsValue, JsError> {
    to_js(&synthesise_text(design_json))
}

/// Checks a design file's structure only (for opening files): field errors or the
/// normalised JSON.
#[wasm_bindgen]
pub fn check_design_file(design_json: &str) -> Result<JsValue, JsError> {
    let outcome = match DesignFile::parse(design_json) {
        // A tagged enum cannot carry a bare string: wrap the normalised text in an object.
        Ok(file) => Outcome::Ok(serde_json::json!({ "design_json": file.to_json() })),
        Err(errors) => Outcome::Invalid { errors },
    };
    to_js(&outcome)
}

/// Names and labels of the device archetypes, for the page's pickers.
#[wasm_bindgen]
pub fn archetypes() -> Result<JsValue, JsError> {
    use flipwright::device::archetypes as a;
    let transistors: Vec<(String, String)> = a::TRANSISTOR_ARCHETYPE_IDS
        .iter()
        .filter_map(|id| a::transistor(id).map(|s| (id.to_string(), s.label)))
        .collect();
    let diodes: Vec<(String, String)> = a::DIODE_ARCHETYPE_IDS
        .iter()
        .filter_map(|id| a::diode(id).map(|s| (id.to_string(), s.label)))
        .collect();
    to_js(&serde_json::json!({ "transistors": transistors, "diodes": diodes }))
}

/// The datasheet values of a transistor archetype (to start the page's datasheet form from),
/// or null for an unknown name.
#[wasm_bindgen]
pub fn transistor_datasheet(archetype: &str) -> Result<JsValue, JsError> {
    to_js(&flipwright::device::archetypes::transistor(archetype))
}

/// Verifies a design (with values) by simulation: the nominal run at the design's rate, then
/// the sensitivity and toggle-rate searches. `options_json` replaces fields of the default
/// options (`{"measure": false}`, `{"nominal_edges": 16}`). `progress` is called with
/// `{done_runs, total_runs, phase}` before every run; returning `false` cancels. Returns an
/// Outcome with the verification and the nominal run's waveforms, decimated. Runs for
/// seconds: call it from a worker.
#[wasm_bindgen]
pub fn verify_design(
    design_json: &str,
    options_json: Option<String>,
    progress: &js_sys::Function,
) -> Result<JsValue, JsError> {
    let mut report = |step: Progress| -> bool {
        let Ok(value) = to_js(&step) else { return true };
        match progress.call1(&JsValue::NULL, &value) {
            Ok(answer) => answer.as_bool() != Some(false),
            // A progress function that throws has nowhere to report to: stop.
            Err(_) => false,
        }
    };
    to_js(&verify_text(design_json, options_json.as_deref(), &mut report))
}

/// Verifies a ripple chain of `stages` copies of the design's stage over `edges` input edges
/// at the design's rate: the count after every edge and the timing diagram of every stage's
/// output, decimated. Runs for seconds to minutes: call it from a worker.
#[wasm_bindgen]
pub fn verify_chain_design(design_json: &str, stages: usize, edges: usize) -> Result<JsValue, JsError> {
    to_js(&verify_chain_text(design_json, stages, edges))
}

/// Draws a verification's waveform chart on a canvas whose size is already CSS size ×
/// `scale` (the device-pixel ratio). Main thread only: text measurement needs the DOM.
#[wasm_bindgen]
pub fn draw_waveform_chart(
    canvas: web_sys::HtmlCanvasElement,
    chart: JsValue,
    scale: f64,
) -> Result<(), JsError> {
    let chart: WaveformChart = from_js(chart, "waveform chart")?;
    let root = plotters::prelude::IntoDrawingArea::into_drawing_area(canvas_backend(canvas)?);
    plots::draw_waveforms(&root, &chart, scale).map_err(|e| JsError::new(&e))
}

/// The waveform chart as SVG text, `width` × `height` user units, for print.
#[wasm_bindgen]
pub fn waveform_chart_svg(chart: JsValue, width: u32, height: u32) -> Result<String, JsError> {
    let chart: WaveformChart = from_js(chart, "waveform chart")?;
    plots::waveforms_svg(&chart, width, height).map_err(|e| JsError::new(&e))
}

/// Draws a chain's timing diagram on a canvas sized CSS size × `scale`. Main thread only.
#[wasm_bindgen]
pub fn draw_timing_diagram(
    canvas: web_sys::HtmlCanvasElement,
    diagram: JsValue,
    scale: f64,
) -> Result<(), JsError> {
    let diagram: TimingDiagram = from_js(diagram, "timing diagram")?;
    let root = plotters::prelude::IntoDrawingArea::into_drawing_area(canvas_backend(canvas)?);
    plots::draw_timing_diagram(&root, &diagram, scale).map_err(|e| JsError::new(&e))
}

/// The timing diagram as SVG text, for print.
#[wasm_bindgen]
pub fn timing_diagram_svg(diagram: JsValue, width: u32, height: u32) -> Result<String, JsError> {
    let diagram: TimingDiagram = from_js(diagram, "timing diagram")?;
    plots::timing_diagram_svg(&diagram, width, height).map_err(|e| JsError::new(&e))
}

/// Largest seed the page can hold exactly (a JS number is exact up to 2^53 − 1).
pub const MAX_PAGE_SEED: u64 = (1 << 53) - 1;

/// A tolerance request's parts, read from the page: the design (with values), the chain
/// (`{"kind": "stages", "stages": 10}` or `{"kind": "divide", "modulus": 10, "method":
/// "reset_on_count"}`) and, for Monte Carlo, the options.
fn tolerance_chain(design_json: &str, chain_json: &str) -> Result<(LoadedChain, String), Outcome<()>> {
    let (_, design) = DesignFile::load(design_json).map_err(|errors| Outcome::Invalid { errors })?;
    let shape: ChainShape = serde_json::from_str(chain_json).map_err(|e| Outcome::Invalid {
        errors: vec![FieldError {
            path: "chain".to_string(),
            message: format!(
                "is not a chain: {e}; give {{\"kind\": \"stages\", \"stages\": N}} or {{\"kind\": \"divide\", \"modulus\": N}}"
            ),
        }],
    })?;
    loaded_chain(&design, shape).map_err(tolerance_outcome)
}

fn tolerance_outcome<T: Serialize>(error: ToleranceError) -> Outcome<T> {
    match error {
        ToleranceError::InvalidOption { field, value, expected } => Outcome::Invalid {
            errors: vec![FieldError {
                path: format!("options.{field}"),
                message: format!("must be {expected}, got {value}"),
            }],
        },
        other => Outcome::Failed { message: other.to_string() },
    }
}

fn reshape<T: Serialize>(outcome: Outcome<()>) -> Outcome<T> {
    match outcome {
        Outcome::Ok(()) => Outcome::Failed { message: "no result".to_string() },
        Outcome::Invalid { errors } => Outcome::Invalid { errors },
        Outcome::Failed { message } => Outcome::Failed { message },
    }
}

/// The chain's worst case as the page shows it.
#[derive(Serialize)]
pub struct ChainWorstCaseView {
    /// What chain was analysed, in words.
    pub chain: String,
    /// Per margin: nominal and worst (smallest over the stages), required, pass, the
    /// limiting stage (0 takes the input) and parameter, the worst corner.
    pub worst_case: ChainWorstCase,
}

/// A Monte Carlo run as the page shows it.
#[derive(Serialize)]
pub struct YieldView {
    pub chain: String,
    /// Yield with its Wilson interval and lower bound, per-margin statistics with histograms
    /// (bin edges and counts of the tightest stage's value per trial), the most frequent
    /// failure, the seed (in `options`) and the run's digest.
    pub report: YieldReport,
    /// The histograms again, in the form the drawing exports take back.
    pub histograms: HistogramChart,
}

/// Margins against temperature as the page shows it.
#[derive(Serialize)]
pub struct TemperatureView {
    pub chain: String,
    /// `temperatures_c`, and per margin the nominal and worst curves with the stage of each
    /// worst point.
    pub sweep: TemperatureSweep,
    /// The curves again, in the form the drawing exports take back.
    pub chart: TemperatureChart,
}

fn chain_worst_case_text(design_json: &str, chain_json: &str) -> Outcome<ChainWorstCaseView> {
    let (chain, description) = match tolerance_chain(design_json, chain_json) {
        Ok(pair) => pair,
        Err(outcome) => return reshape(outcome),
    };
    match chain_worst_case(&chain) {
        Ok(worst_case) => Outcome::Ok(ChainWorstCaseView { chain: description, worst_case }),
        Err(e) => tolerance_outcome(e),
    }
}

fn yield_options(text: &str) -> Result<MonteCarloOptions, Vec<FieldError>> {
    let bad = |path: &str, message: String| vec![FieldError { path: path.to_string(), message }];
    let options: MonteCarloOptions = if text.trim().is_empty() {
        MonteCarloOptions::default()
    } else {
        serde_json::from_str(text).map_err(|e| {
            bad(
                "options",
                format!("is not Monte Carlo options: {e}; fields trials, seed, distribution (\"uniform\" | \"normal\"), confidence, histogram_bins, half_width"),
            )
        })?
    };
    if options.seed > MAX_PAGE_SEED {
        return Err(bad(
            "options.seed",
            format!(
                "must be a whole number from 0 to {MAX_PAGE_SEED} so the page can hold it exactly, got {}",
                options.seed
            ),
        ));
    }
    Ok(options)
}

fn monte_carlo_text(
    design_json: &str,
    chain_json: &str,
    options_json: &str,
    progress: &mut dyn FnMut(u32, u32) -> bool,
) -> Outcome<YieldView> {
    let options = match yield_options(options_json) {
        Ok(options) => options,
        Err(errors) => return Outcome::Invalid { errors },
    };
    let (chain, description) = match tolerance_chain(design_json, chain_json) {
        Ok(pair) => pair,
        Err(outcome) => return reshape(outcome),
    };
    match monte_carlo_yield_with_progress(&chain, &options, progress) {
        Ok(report) => Outcome::Ok(YieldView {
            chain: description,
            histograms: HistogramChart::from_report(&report),
            report,
        }),
        Err(e) => tolerance_outcome(e),
    }
}

fn temperature_text(design_json: &str, chain_json: &str, points: u32) -> Outcome<TemperatureView> {
    let (chain, description) = match tolerance_chain(design_json, chain_json) {
        Ok(pair) => pair,
        Err(outcome) => return reshape(outcome),
    };
    match margins_against_temperature(&chain, points) {
        Ok(sweep) => Outcome::Ok(TemperatureView {
            chain: description,
            chart: TemperatureChart::from_sweep(&sweep),
            sweep,
        }),
        Err(e) => tolerance_outcome(e),
    }
}

/// Worst case of every margin over every stage of a chain (`chain_json` as in
/// `monte_carlo_yield`). Runs the stage worst case once per distinct loaded stage: tens of
/// milliseconds per stage; call it from a worker.
#[wasm_bindgen]
pub fn chain_worst_case_design(design_json: &str, chain_json: &str) -> Result<JsValue, JsError> {
    to_js(&chain_worst_case_text(design_json, chain_json))
}

/// Monte Carlo yield of a chain. `chain_json`: `{"kind": "stages", "stages": N}` or
/// `{"kind": "divide", "modulus": N, "method": "plain_binary" | "reset_on_count" |
/// "skip_feedback"}` (method optional). `options_json`: any of `{"trials": 10000, "seed": 1,
/// "distribution": "uniform" | "normal", "confidence": 0.95, "histogram_bins": 24,
/// "half_width": 0.01}` (empty text: all defaults). The same seed gives the same `digest`
/// as the command line. 10 000 trials of ten stages take a few hundred milliseconds in wasm.
/// `progress`, when given, is called with `{done_trials, trials}` before the first trial and
/// every 5000 after (`tolerance::monte_carlo::PROGRESS_EVERY_TRIALS`); returning `false`
/// cancels (status `failed`).
#[wasm_bindgen]
pub fn monte_carlo_yield_design(
    design_json: &str,
    chain_json: &str,
    options_json: &str,
    progress: Option<js_sys::Function>,
) -> Result<JsValue, JsError> {
    let mut report = |done_trials: u32, trials: u32| -> bool {
        let Some(progress) = progress.as_ref() else { return true };
        let step = TrialProgress { done_trials, trials };
        let Ok(value) = to_js(&step) else { return true };
        match progress.call1(&JsValue::NULL, &value) {
            Ok(answer) => answer.as_bool() != Some(false),
            Err(_) => false,
        }
    };
    to_js(&monte_carlo_text(design_json, chain_json, options_json, &mut report))
}

/// What a Monte Carlo run's progress callback receives.
#[derive(Serialize)]
struct TrialProgress {
    done_trials: u32,
    trials: u32,
}

/// Every DC margin at `points` temperatures from t_min to t_max, nominal and worst over the
/// other parameters (41 points is a good chart).
#[wasm_bindgen]
pub fn margins_against_temperature_design(
    design_json: &str,
    chain_json: &str,
    points: u32,
) -> Result<JsValue, JsError> {
    to_js(&temperature_text(design_json, chain_json, points))
}

/// Synthesis aimed at a yield, as the page shows it: the completed design (requirements with
/// the chosen aims, and values) analysed, and the yield synthesis with every candidate.
#[derive(Serialize)]
pub struct YieldSynthesisView {
    pub analysis: AnalysisView,
    pub result: YieldSynthesis,
}

fn yield_synthesis_text(
    design_json: &str,
    goal_json: &str,
    progress: &mut dyn FnMut(usize, usize) -> bool,
) -> Outcome<YieldSynthesisView> {
    let mut file = match DesignFile::parse(design_json) {
        Ok(file) => file,
        Err(errors) => return Outcome::Invalid { errors },
    };
    let input = match file.synthesis_input() {
        Ok(input) => input,
        Err(errors) => return Outcome::Invalid { errors },
    };
    let goal: YieldGoal = match serde_json::from_str(goal_json) {
        Ok(goal) => goal,
        Err(e) => {
            return Outcome::Invalid {
                errors: vec![FieldError {
                    path: "goal".to_string(),
                    message: format!(
                        "is not a yield goal: {e}; fields min_yield, confidence, shape ({{\"kind\": \"stages\", \"stages\": N}} or {{\"kind\": \"divide\", \"modulus\": N}}), trials, seed, distribution"
                    ),
                }],
            }
        }
    };
    if goal.seed > MAX_PAGE_SEED {
        return Outcome::Invalid {
            errors: vec![FieldError {
                path: "options.seed".to_string(),
                message: format!("must be a whole number from 0 to {MAX_PAGE_SEED} so the page can hold it exactly, got {}", goal.seed),
            }],
        };
    }
    let result = match synthesise_for_yield(&input, &goal, progress) {
        Ok(result) => result,
        Err(e) => return tolerance_outcome(e),
    };
    file.requirements = result.input.requirements;
    file.values = Some(result.synthesis.values);
    let design = match file.stage_input(None).and_then(StageDesign::new) {
        Ok(design) => design,
        Err(errors) => return Outcome::Invalid { errors },
    };
    Outcome::Ok(YieldSynthesisView {
        analysis: view(&file, &design, result.synthesis.report.clone()),
        result,
    })
}

/// Synthesis aimed at a Monte Carlo yield over a chain. `goal_json`: `{"min_yield": 0.99,
/// "confidence": 0.95, "shape": {"kind": "divide", "modulus": 10}, "trials": 10000, "seed": 1,
/// "distribution": "uniform"}` (any field may be left out). `progress(done, total)` after each
/// candidate; returning `false` stops with the best so far. Seconds: call it from a worker.
#[wasm_bindgen]
pub fn synthesise_for_yield_design(
    design_json: &str,
    goal_json: &str,
    progress: &js_sys::Function,
) -> Result<JsValue, JsError> {
    let mut report = |done: usize, total: usize| -> bool {
        match progress.call2(&JsValue::NULL, &JsValue::from(done as u32), &JsValue::from(total as u32)) {
            Ok(answer) => answer.as_bool() != Some(false),
            Err(_) => false,
        }
    };
    to_js(&yield_synthesis_text(design_json, goal_json, &mut report))
}

/// Draws the margins-against-temperature chart (`TemperatureView.chart`) on a canvas sized
/// CSS size × `scale`. Main thread only.
#[wasm_bindgen]
pub fn draw_temperature_chart(
    canvas: web_sys::HtmlCanvasElement,
    chart: JsValue,
    scale: f64,
) -> Result<(), JsError> {
    let chart: TemperatureChart = from_js(chart, "temperature chart")?;
    let root = plotters::prelude::IntoDrawingArea::into_drawing_area(canvas_backend(canvas)?);
    tolerance_plots::draw_temperature_chart(&root, &chart, scale).map_err(|e| JsError::new(&e))
}

/// The temperature chart as SVG text, for print.
#[wasm_bindgen]
pub fn temperature_chart_svg(chart: JsValue, width: u32, height: u32) -> Result<String, JsError> {
    let chart: TemperatureChart = from_js(chart, "temperature chart")?;
    tolerance_plots::temperature_chart_svg(&chart, width, height).map_err(|e| JsError::new(&e))
}

/// Draws a Monte Carlo run's histograms (`YieldView.histograms`) on a canvas sized CSS size ×
/// `scale`. Main thread only.
#[wasm_bindgen]
pub fn draw_yield_histograms(
    canvas: web_sys::HtmlCanvasElement,
    chart: JsValue,
    scale: f64,
) -> Result<(), JsError> {
    let chart: HistogramChart = from_js(chart, "histogram chart")?;
    let root = plotters::prelude::IntoDrawingArea::into_drawing_area(canvas_backend(canvas)?);
    tolerance_plots::draw_histograms(&root, &chart, scale).map_err(|e| JsError::new(&e))
}

/// The histograms as SVG text, for print.
#[wasm_bindgen]
pub fn yield_histograms_svg(chart: JsValue, width: u32, height: u32) -> Result<String, JsError> {
    let chart: HistogramChart = from_js(chart, "histogram chart")?;
    tolerance_plots::histograms_svg(&chart, width, height).map_err(|e| JsError::new(&e))
}

/// The bridge's version, shown in the page footer and printout.
#[wasm_bindgen]
pub fn version() -> String {
    env!("CARGO_PKG_VERSION").to_string()
}

/// Panics on purpose so the page's recovery path can be tested (test builds only).
#[cfg(feature = "test-hooks")]
#[wasm_bindgen]
pub fn force_panic() {
    #[allow(clippy::panic)]
    {
        panic!("forced failure for the recovery test");
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn demo_synthesises_and_analyses_natively() {
        let Outcome::Ok(view) = synthesise_text(&demo_design()) else {
            unreachable!("demo synthesis must succeed")
        };
        assert!(view.analysis.schematic_svg.starts_with("<svg"));
        assert!(view.analysis.table.iter().any(|r| r.designator == "R101"));
        let Outcome::Ok(again) = analyse_text(&view.analysis.design_json) else {
            unreachable!("the completed design must analyse")
        };
        assert_eq!(again.table.len(), view.analysis.table.len());
    }

    #[test]
    fn bad_field_is_reported_by_path() {
        let text = demo_design().replace("\"collector_supply_v\": 9.0", "\"collector_supply_v\": \"nine\"");
        match check_outcome(&text) {
            Some(paths) => assert!(paths.iter().any(|p| p == "supplies.collector_supply_v"), "{paths:?}"),
            None => unreachable!("expected field errors"),
        }
    }

    /// The goal is read with defaults for what it leaves out, a bad goal is a field error,
    /// and the result carries the completed design file with the aims that reached the goal.
    #[test]
    fn yield_synthesis_returns_the_completed_design_or_a_field_error() {
        let text = demo_design()
            .replace("\"tolerance\": 0.05", "\"tolerance\": 0.1")
            .replace("\"resistor_tolerance\": 0.05", "\"resistor_tolerance\": 0.1")
            .replace("\"t_min_c\": 0.0", "\"t_min_c\": -40.0")
            .replace("\"t_max_c\": 60.0", "\"t_max_c\": 85.0")
            .replace("\"min_overdrive\": 1.25", "\"min_overdrive\": 1.5");
        let goal = r#"{"min_yield": 0.99, "shape": {"kind": "stages", "stages": 2}, "trials": 4000}"#;
        let mut calls = 0;
        let Outcome::Ok(view) = yield_synthesis_text(&text, goal, &mut |_, _| {
            calls += 1;
            true
        }) else {
            unreachable!("yield synthesis must run")
        };
        assert!(calls >= 1 && calls == view.result.candidates.len());
        let file: serde_json::Value = serde_json::from_str(&view.analysis.design_json).unwrap_or_default();
        let chosen = &view.result.candidates[view.result.chosen];
        assert_eq!(file["requirements"]["target_overdrive"].as_f64(), Some(chosen.target_overdrive));
        assert!(file["values"]["collector_resistor_ohm"].as_f64().is_some());
        match yield_synthesis_text(&text, r#"{"min_yield": "high"}"#, &mut |_, _| true) {
            Outcome::Invalid { errors } => assert_eq!(errors[0].path, "goal"),
            _ => unreachable!("a bad goal must be a field error"),
        }
        match yield_synthesis_text(&text, r#"{"min_yield": 1.0}"#, &mut |_, _| true) {
            Outcome::Invalid { errors } => assert_eq!(errors[0].path, "options.min_yield"),
            _ => unreachable!("a yield of 1 must be a field error"),
        }
    }

    fn demo_with_values() -> String {
        let Outcome::Ok(view) = synthesise_text(&demo_design()) else {
            unreachable!("demo synthesis must succeed")
        };
        view.analysis.design_json
    }

    #[test]
    fn demo_verification_passes_and_brings_five_decimated_traces() {
        let mut calls = Vec::new();
        let outcome = verify_text(&demo_with_values(), Some(r#"{"measure": false}"#), &mut |p| {
            calls.push(p);
            true
        });
        let Outcome::Ok(view) = outcome else { unreachable!("the demo verifies") };
        assert!(view.verification.nominal.correct, "{:?}", view.verification.nominal.observed);
        assert_eq!(calls.len(), 1, "one progress call before the one run: {calls:?}");
        let run = &view.chart.run;
        assert_eq!(run.traces.len(), 5, "input, two collectors, two bases");
        assert!(run.buckets > 0 && run.buckets <= traces::MAX_BUCKETS);
        assert!(run.traces.iter().all(|t| t.min_v.len() == run.buckets && t.max_v.len() == run.buckets));
        assert_eq!(view.chart.panels.iter().map(|p| p.traces.len()).collect::<Vec<_>>(), [1, 2, 2]);
    }

    #[test]
    fn a_pnp_stage_is_charted_in_its_real_polarity() {
        let text = demo_design().replace("\"si-npn-switch-40v\"", "\"ge-pnp-alloy-15v\"");
        let Outcome::Ok(synthesised) = synthesise_text(&text) else {
            unreachable!("the PNP demo synthesises")
        };
        let outcome =
            verify_text(&synthesised.analysis.design_json, Some(r#"{"measure": false}"#), &mut |_| true);
        let Outcome::Ok(view) = outcome else { unreachable!("the PNP demo verifies") };
        assert_eq!(view.polarity_sign, -1.0);
        let input = &view.chart.run.traces[0];
        let collector = &view.chart.run.traces[1];
        // The NPN-frame pulse steps down from 0 V; the PNP stage's real input steps up, and its
        // collectors sit between 0 V and the negative supply.
        assert!(input.max_v.iter().copied().fold(f64::MIN, f64::max) > 1.0, "input steps up");
        assert!(collector.min_v.iter().copied().fold(f64::MAX, f64::min) < -1.0, "collector goes negative");
        assert!(view.assumptions.iter().any(|a| a.contains("NPN mirror")));
    }

    #[test]
    fn a_progress_answer_of_false_cancels() {
        let outcome = verify_text(&demo_with_values(), None, &mut |_| false);
        let Outcome::Failed { message } = outcome else { unreachable!("cancelled") };
        assert!(message.contains("cancelled"), "{message}");
    }

    #[test]
    fn a_misspelt_option_is_refused_by_path() {
        let outcome =
            verify_text(&demo_with_values(), Some(r#"{"search": {"edges_per_rum": 3}}"#), &mut |_| true);
        let Outcome::Invalid { errors } = outcome else { unreachable!("refused") };
        assert_eq!(errors.first().map(|e| e.path.as_str()), Some("options.search.edges_per_rum"));
    }

    #[test]
    fn two_stage_chain_counts_to_three_and_back_with_a_lane_per_stage() {
        let Outcome::Ok(view) = verify_chain_text(&demo_with_values(), 2, 4) else {
            unreachable!("the chain verifies")
        };
        assert_eq!(view.check.observed, [Some(1), Some(2), Some(3), Some(0)]);
        let lanes: Vec<&str> = view.diagram.run.traces.iter().map(|t| t.label.as_str()).collect();
        assert_eq!(lanes, ["input", "stage 1 · bit 0", "stage 2 · bit 1"]);
        assert_eq!(view.diagram.edge_times_s.len(), 5);
    }

    #[test]
    fn tolerance_exports_answer_ok_invalid_and_failed_without_panicking() {
        let design = demo_with_values();
        let chain = r#"{"kind": "stages", "stages": 3}"#;
        let Outcome::Ok(view) =
            monte_carlo_text(&design, chain, r#"{"trials": 200, "seed": 5}"#, &mut |_, _| true)
        else {
            unreachable!("the demo runs")
        };
        assert_eq!(view.report.options.seed, 5);
        assert_eq!(view.report.digest.len(), 16);
        let Outcome::Invalid { errors } =
            monte_carlo_text(&design, chain, r#"{"trials": 0}"#, &mut |_, _| true)
        else {
            unreachable!("zero trials is refused")
        };
        assert_eq!(errors.first().map(|e| e.path.as_str()), Some("options.trials"));
        let Outcome::Invalid { errors } =
            monte_carlo_text(&design, chain, r#"{"seed": 9007199254740992}"#, &mut |_, _| true)
        else {
            unreachable!("a seed the page cannot hold is refused")
        };
        assert_eq!(errors.first().map(|e| e.path.as_str()), Some("options.seed"));
        assert!(matches!(monte_carlo_text(&design, "{}", "", &mut |_, _| true), Outcome::Invalid { .. }));
        let Outcome::Ok(sweep) = temperature_text(&design, chain, 5) else { unreachable!("sweep") };
        assert_eq!(sweep.sweep.temperatures_c.len(), 5);
        assert_eq!(sweep.chart.panels.len(), sweep.sweep.margins.len());
        assert!(sweep.chart.panels.iter().all(|p| p.nominal.len() == 5 && p.worst.len() == 5));
        let binned: u32 =
            view.histograms.panels.iter().map(|p| p.counts.iter().sum::<u32>()).max().unwrap_or(0);
        assert!(binned <= 200 && binned > 0, "at most one count per trial per margin: {binned}");
        assert!(matches!(temperature_text(&design, chain, 1), Outcome::Invalid { .. }));
        let Outcome::Ok(worst) = chain_worst_case_text(&design, chain) else { unreachable!("worst case") };
        assert_eq!(worst.worst_case.stage_count, 3);
    }

    fn check_outcome(text: &str) -> Option<Vec<String>> {
        match synthesise_text(text) {
            Outcome::Invalid { errors } => Some(errors.into_iter().map(|e| e.path).collect()),
            _ => None,
        }
    }
}
