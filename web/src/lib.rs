//! The wasm bridge: a handful of exports that take design-file JSON, call the core, and return
//! plain transfer objects for the page to render. No engineering happens here.

#[cfg(feature = "bench")]
mod bench;
mod schematic;

use serde::Serialize;
use wasm_bindgen::prelude::*;

use flipwright::design_file::DesignFile;
use flipwright::stage::analysis::{analyse, StageReport};
use flipwright::stage::synthesis::{synthesise, SynthesisOutcome};
use flipwright::stage::{FieldError, StageDesign};
use flipwright::table::{component_table, to_csv, ComponentRow};

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
    let serializer = serde_wasm_bindgen::Serializer::json_compatible();
    value
        .serialize(&serializer)
        .map_err(|e| JsError::new(&format!("cannot pass the result to the page: {e}")))
}

fn view(file: &DesignFile, design: &StageDesign, report: StageReport) -> AnalysisView {
    let table = component_table(design, &report, 1);
    AnalysisView {
        design_json: file.to_json(),
        name: file.name.clone(),
        table_csv: to_csv(&table),
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
        Ok(file) => Outcome::Ok(file.to_json()),
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

    fn check_outcome(text: &str) -> Option<Vec<String>> {
        match synthesise_text(text) {
            Outcome::Invalid { errors } => Some(errors.into_iter().map(|e| e.path).collect()),
            _ => None,
        }
    }
}
