//! The design file: a versioned JSON document holding requirements, device data and
//! (optionally) chosen component values, with validation that reports every bad field by
//! path and never half-applies a file.
//!
//! Quantities are numbers in SI base units; a string with a unit or an IEC 60062 code is
//! also accepted where a field holds a quantity (`"4k7"`, `"100 nF"`). The field name's suffix
//! tells the unit: `_ohm`, `_f`, `_v`, `_a`, `_s`, `_hz`, `_w`, `_c` (°C).

use serde::Serialize;
use serde_json::{Map, Value};

use crate::chain::{ChainRequest, MethodKind};
use crate::device::archetypes;
use crate::device::{DiodeDatasheet, Material, Polarity, StorageTimeTest, TransistorDatasheet};
use crate::stage::{
    BiasScheme, Conditions, FieldError, Load, Requirements, StageDesign, StageInput, StageValues, Steering,
    Supplies, TriggerNetwork,
};
use crate::units::{parse_quantity, ESeries, Unit};

/// Value of the `format` field.
pub const FORMAT_NAME: &str = "flipwright-design";
/// The version this build reads and writes.
pub const FORMAT_VERSION: u64 = 1;

/// A device given by archetype identifier or in full.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(untagged)]
pub enum DeviceChoice<T> {
    Archetype(String),
    Custom(T),
}

/// The parsed design file.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DesignFile {
    pub format: String,
    pub version: u64,
    pub name: String,
    pub notes: String,
    pub transistor: DeviceChoice<TransistorDatasheet>,
    pub diode: DeviceChoice<DiodeDatasheet>,
    pub supplies: Supplies,
    pub conditions: Conditions,
    pub requirements: Requirements,
    pub loads: [Load; 2],
    /// Chosen values; `None` asks for synthesis.
    pub values: Option<StageValues>,
    /// The counter chain the stage is for; `None` (files written before the section existed)
    /// is a single stage.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub chain: Option<ChainSection>,
}

/// Largest division ratio a design file asks for: the page shows and verifies one row per
/// count, and 4096 (12 stages) covers the dividers the tool is for.
pub const MAX_DIVIDE_BY: u32 = 4096;

/// Which chain method the user wants built.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ChainMethodChoice {
    /// Whatever the planner recommends for N (and the reset network's race).
    Recommended,
    PlainBinary,
    ResetOnCount,
    SkipFeedback,
}

impl ChainMethodChoice {
    /// The planner's method this choice names, `None` for [`ChainMethodChoice::Recommended`].
    pub fn method(self) -> Option<MethodKind> {
        match self {
            ChainMethodChoice::Recommended => None,
            ChainMethodChoice::PlainBinary => Some(MethodKind::PlainBinary),
            ChainMethodChoice::ResetOnCount => Some(MethodKind::ResetOnCount),
            ChainMethodChoice::SkipFeedback => Some(MethodKind::SkipFeedback),
        }
    }
}

/// The optional `chain` section: divide by N with a chain of identical stages.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct ChainSection {
    /// Division ratio N, 2 to [`MAX_DIVIDE_BY`].
    pub divide_by: u32,
    pub method: ChainMethodChoice,
    /// The stage outputs must read as natural binary 0 … N − 1 (8-4-2-1 for a decoder).
    pub natural_binary_code: bool,
}

impl ChainSection {
    pub fn request(&self) -> ChainRequest {
        ChainRequest { modulus: self.divide_by, natural_binary_code: self.natural_binary_code }
    }
}

/// How a reader's message for a key it does not know begins.
pub(crate) const UNKNOWN_FIELD: &str = "unknown field";

/// Collects every problem of a document while it is read (shared with the circuit file).
pub(crate) struct Reader {
    pub(crate) errors: Vec<FieldError>,
}

pub(crate) fn join(path: &str, key: &str) -> String {
    if path.is_empty() {
        key.to_string()
    } else {
        format!("{path}.{key}")
    }
}

fn unit_for(key: &str) -> Option<Unit> {
    let suffixes = [
        ("_ohm", Unit::Ohm),
        ("_f", Unit::Farad),
        ("_v", Unit::Volt),
        ("_a", Unit::Ampere),
        ("_s", Unit::Second),
        ("_hz", Unit::Hertz),
        ("_w", Unit::Watt),
    ];
    suffixes.iter().find(|(suffix, _)| key.ends_with(suffix)).map(|(_, unit)| *unit)
}

/// An object being read: records which keys were used so unknown ones can be reported.
pub(crate) struct ObjectReader<'a> {
    pub(crate) map: &'a Map<String, Value>,
    pub(crate) path: String,
    pub(crate) used: Vec<&'static str>,
}

impl Reader {
    pub(crate) fn error(&mut self, path: String, message: impl Into<String>) {
        self.errors.push(FieldError { path, message: message.into() });
    }

    pub(crate) fn object<'a>(&mut self, value: Option<&'a Value>, path: &str) -> Option<ObjectReader<'a>> {
        match value {
            Some(Value::Object(map)) => Some(ObjectReader { map, path: path.to_string(), used: Vec::new() }),
            Some(_) => {
                self.error(path.to_string(), "must be an object { … }");
                None
            }
            None => {
                self.error(path.to_string(), "is missing");
                None
            }
        }
    }

    pub(crate) fn number_at(&mut self, value: &Value, path: &str, key: &str) -> Option<f64> {
        match value {
            Value::Number(n) => n.as_f64(),
            Value::String(text) => match unit_for(key) {
                Some(unit) => match parse_quantity(text, unit) {
                    Ok(v) => Some(v),
                    Err(e) => {
                        self.error(path.to_string(), e.to_string());
                        None
                    }
                },
                None => match text.trim().parse::<f64>() {
                    Ok(v) if v.is_finite() => Some(v),
                    _ => {
                        self.error(path.to_string(), format!("must be a number, got \"{text}\""));
                        None
                    }
                },
            },
            _ => {
                let unit = unit_for(key)
                    .map(|u| format!(" (in {}, or a string such as \"4.7k\")", u.symbol()))
                    .unwrap_or_default();
                self.error(path.to_string(), format!("must be a number{unit}"));
                None
            }
        }
    }

    pub(crate) fn finish(&mut self, object: ObjectReader<'_>) {
        for key in object.map.keys() {
            if !object.used.iter().any(|u| u == key) {
                let expected = object.used.join(", ");
                self.error(join(&object.path, key), format!("{UNKNOWN_FIELD} (expected one of: {expected})"));
            }
        }
    }

    pub(crate) fn number(&mut self, object: &mut ObjectReader<'_>, key: &'static str) -> Option<f64> {
        object.used.push(key);
        let path = join(&object.path, key);
        match object.map.get(key) {
            Some(value) => self.number_at(value, &path, key),
            None => {
                self.error(path, "is missing");
                None
            }
        }
    }

    pub(crate) fn optional_number(
        &mut self,
        object: &mut ObjectReader<'_>,
        key: &'static str,
    ) -> Option<Option<f64>> {
        object.used.push(key);
        let path = join(&object.path, key);
        match object.map.get(key) {
            None | Some(Value::Null) => Some(None),
            Some(value) => self.number_at(value, &path, key).map(Some),
        }
    }

    pub(crate) fn text(
        &mut self,
        object: &mut ObjectReader<'_>,
        key: &'static str,
        default: Option<&str>,
    ) -> Option<String> {
        object.used.push(key);
        let path = join(&object.path, key);
        match object.map.get(key) {
            Some(Value::String(s)) => Some(s.clone()),
            None if default.is_some() => default.map(String::from),
            None => {
                self.error(path, "is missing");
                None
            }
            Some(_) => {
                self.error(path, "must be a string");
                None
            }
        }
    }

    pub(crate) fn choice<T: Copy>(
        &mut self,
        object: &mut ObjectReader<'_>,
        key: &'static str,
        options: &[(&str, T)],
        default: Option<T>,
    ) -> Option<T> {
        object.used.push(key);
        let path = join(&object.path, key);
        let names: Vec<String> = options.iter().map(|(n, _)| format!("\"{n}\"")).collect();
        match object.map.get(key) {
            Some(Value::String(s)) => match options.iter().find(|(n, _)| n == s) {
                Some((_, v)) => Some(*v),
                None => {
                    self.error(path, format!("\"{s}\" is not one of {}", names.join(", ")));
                    None
                }
            },
            None if default.is_some() => default,
            None => {
                self.error(path, format!("is missing (one of {})", names.join(", ")));
                None
            }
            Some(_) => {
                self.error(path, format!("must be one of {}", names.join(", ")));
                None
            }
        }
    }

    pub(crate) fn boolean(
        &mut self,
        object: &mut ObjectReader<'_>,
        key: &'static str,
        default: bool,
    ) -> Option<bool> {
        object.used.push(key);
        match object.map.get(key) {
            None => Some(default),
            Some(Value::Bool(b)) => Some(*b),
            Some(_) => {
                self.error(join(&object.path, key), "must be true or false");
                None
            }
        }
    }
}

/// The document's JSON, or one error giving the line and column where it stops being JSON.
pub(crate) fn parse_json(text: &str) -> Result<Value, Vec<FieldError>> {
    serde_json::from_str(text).map_err(|e| {
        vec![FieldError {
            path: format!("(line {}, column {})", e.line(), e.column()),
            message: format!("not valid JSON: {e}"),
        }]
    })
}

/// Reads `format` and `version`: a document of another format, or of a version newer than
/// `current_version`, is refused at once with that single error (its other fields would only
/// add noise). Shared by every versioned document of the tool.
pub(crate) fn read_header(
    reader: &mut Reader,
    o: &mut ObjectReader<'_>,
    format_name: &str,
    current_version: u64,
    what: &str,
) -> Result<(Option<String>, Option<u64>), Vec<FieldError>> {
    let format = reader.text(o, "format", None);
    if let Some(f) = &format {
        if f != format_name {
            return Err(vec![FieldError {
                path: "format".to_string(),
                message: format!("\"{f}\" is not {what} of this tool (expected \"{format_name}\")"),
            }]);
        }
    }
    o.used.push("version");
    let version = match o.map.get("version") {
        Some(Value::Number(n)) if n.as_u64().is_some() => n.as_u64(),
        _ => {
            reader.error(
                "version".to_string(),
                format!("must be a whole number (this build reads version {current_version})"),
            );
            None
        }
    };
    if let Some(v) = version {
        if v > current_version {
            return Err(vec![FieldError {
                path: "version".to_string(),
                message: format!(
                    "version {v} is newer than this build understands ({current_version}); update the tool"
                ),
            }]);
        }
        if v < 1 {
            reader.error("version".to_string(), "must be 1 or more");
        }
    }
    Ok((format, version))
}

const POLARITIES: [(&str, Polarity); 2] = [("npn", Polarity::Npn), ("pnp", Polarity::Pnp)];
const MATERIALS: [(&str, Material); 2] = [("silicon", Material::Silicon), ("germanium", Material::Germanium)];
const BIASES: [(&str, BiasScheme); 2] = [("fixed", BiasScheme::Fixed), ("self_bias", BiasScheme::SelfBias)];
const STEERINGS: [(&str, Steering); 2] = [("base", Steering::Base), ("collector", Steering::Collector)];

fn series_options() -> Vec<(&'static str, ESeries)> {
    ESeries::ALL.iter().map(|s| (s.name(), *s)).collect()
}

fn read_transistor(reader: &mut Reader, value: Option<&Value>) -> Option<DeviceChoice<TransistorDatasheet>> {
    if let Some(Value::String(id)) = value {
        if archetypes::transistor(id).is_some() {
            return Some(DeviceChoice::Archetype(id.clone()));
        }
        reader.error(
            "transistor".to_string(),
            format!(
                "\"{id}\" is not a known archetype (known: {}); or give the datasheet as an object",
                archetypes::TRANSISTOR_ARCHETYPE_IDS.join(", ")
            ),
        );
        return None;
    }
    let mut o = reader.object(value, "transistor")?;
    let label = reader.text(&mut o, "label", Some("user transistor"));
    let polarity = reader.choice(&mut o, "polarity", &POLARITIES, None);
    let material = reader.choice(&mut o, "material", &MATERIALS, None);
    let approximate = reader.boolean(&mut o, "approximate", false);
    let mut n = |reader: &mut Reader, key: &'static str| reader.number(&mut o, key);
    let hfe_min = n(reader, "hfe_min");
    let hfe_typ = n(reader, "hfe_typ");
    let hfe_max = n(reader, "hfe_max");
    let hfe_test_current_a = n(reader, "hfe_test_current_a");
    let hfe_tempco_per_c = n(reader, "hfe_tempco_per_c");
    let vce_sat_typ_v = n(reader, "vce_sat_typ_v");
    let vce_sat_max_v = n(reader, "vce_sat_max_v");
    let vbe_sat_min_v = n(reader, "vbe_sat_min_v");
    let vbe_sat_typ_v = n(reader, "vbe_sat_typ_v");
    let vbe_sat_max_v = n(reader, "vbe_sat_max_v");
    let sat_forced_gain = n(reader, "sat_forced_gain");
    let sat_test_current_a = n(reader, "sat_test_current_a");
    let vbe_cutoff_v = n(reader, "vbe_cutoff_v");
    let vbe_tempco_v_per_c = n(reader, "vbe_tempco_v_per_c");
    let icbo_25c_a = n(reader, "icbo_25c_a");
    let icbo_doubling_c = n(reader, "icbo_doubling_c");
    let ft_hz = n(reader, "ft_hz");
    let cob_f = n(reader, "cob_f");
    let cib_f = n(reader, "cib_f");
    let vceo_v = n(reader, "vceo_v");
    let vcbo_v = n(reader, "vcbo_v");
    let vebo_v = n(reader, "vebo_v");
    let ic_max_a = n(reader, "ic_max_a");
    let ptot_w = n(reader, "ptot_w");
    let storage_time_constant_s = reader.optional_number(&mut o, "storage_time_constant_s");
    o.used.push("storage_test");
    let storage_test = match o.map.get("storage_test") {
        None | Some(Value::Null) => Some(None),
        Some(v) => {
            let path = join(&o.path, "storage_test");
            let mut t = reader.object(Some(v), &path)?;
            let ts = reader.number(&mut t, "storage_time_s");
            let ic = reader.number(&mut t, "collector_current_a");
            let ib1 = reader.number(&mut t, "forward_base_current_a");
            let ib2 = reader.number(&mut t, "reverse_base_current_a");
            reader.finish(t);
            Some(Some(StorageTimeTest {
                storage_time_s: ts?,
                collector_current_a: ic?,
                forward_base_current_a: ib1?,
                reverse_base_current_a: ib2?,
            }))
        }
    };
    reader.finish(o);
    Some(DeviceChoice::Custom(TransistorDatasheet {
        label: label?,
        polarity: polarity?,
        material: material?,
        approximate: approximate?,
        hfe_min: hfe_min?,
        hfe_typ: hfe_typ?,
        hfe_max: hfe_max?,
        hfe_test_current_a: hfe_test_current_a?,
        hfe_tempco_per_c: hfe_tempco_per_c?,
        vce_sat_typ_v: vce_sat_typ_v?,
        vce_sat_max_v: vce_sat_max_v?,
        vbe_sat_min_v: vbe_sat_min_v?,
        vbe_sat_typ_v: vbe_sat_typ_v?,
        vbe_sat_max_v: vbe_sat_max_v?,
        sat_forced_gain: sat_forced_gain?,
        sat_test_current_a: sat_test_current_a?,
        vbe_cutoff_v: vbe_cutoff_v?,
        vbe_tempco_v_per_c: vbe_tempco_v_per_c?,
        icbo_25c_a: icbo_25c_a?,
        icbo_doubling_c: icbo_doubling_c?,
        ft_hz: ft_hz?,
        cob_f: cob_f?,
        cib_f: cib_f?,
        storage_time_constant_s: storage_time_constant_s?,
        storage_test: storage_test?,
        vceo_v: vceo_v?,
        vcbo_v: vcbo_v?,
        vebo_v: vebo_v?,
        ic_max_a: ic_max_a?,
        ptot_w: ptot_w?,
    }))
}

fn read_diode(reader: &mut Reader, value: Option<&Value>) -> Option<DeviceChoice<DiodeDatasheet>> {
    if let Some(Value::String(id)) = value {
        if archetypes::diode(id).is_some() {
            return Some(DeviceChoice::Archetype(id.clone()));
        }
        reader.error(
            "diode".to_string(),
            format!(
                "\"{id}\" is not a known archetype (known: {}); or give the datasheet as an object",
                archetypes::DIODE_ARCHETYPE_IDS.join(", ")
            ),
        );
        return None;
    }
    let mut o = reader.object(value, "diode")?;
    let label = reader.text(&mut o, "label", Some("user diode"));
    let material = reader.choice(&mut o, "material", &MATERIALS, None);
    let approximate = reader.boolean(&mut o, "approximate", false);
    let mut n = |reader: &mut Reader, key: &'static str| reader.number(&mut o, key);
    let forward_voltage_v = n(reader, "forward_voltage_v");
    let forward_test_current_a = n(reader, "forward_test_current_a");
    let emission_coefficient = n(reader, "emission_coefficient");
    let reverse_leakage_25c_a = n(reader, "reverse_leakage_25c_a");
    let leakage_doubling_c = n(reader, "leakage_doubling_c");
    let capacitance_f = n(reader, "capacitance_f");
    let reverse_recovery_s = n(reader, "reverse_recovery_s");
    let piv_v = n(reader, "piv_v");
    let if_max_a = n(reader, "if_max_a");
    reader.finish(o);
    Some(DeviceChoice::Custom(DiodeDatasheet {
        label: label?,
        material: material?,
        approximate: approximate?,
        forward_voltage_v: forward_voltage_v?,
        forward_test_current_a: forward_test_current_a?,
        emission_coefficient: emission_coefficient?,
        reverse_leakage_25c_a: reverse_leakage_25c_a?,
        leakage_doubling_c: leakage_doubling_c?,
        capacitance_f: capacitance_f?,
        reverse_recovery_s: reverse_recovery_s?,
        piv_v: piv_v?,
        if_max_a: if_max_a?,
    }))
}

fn read_load(reader: &mut Reader, value: &Value, path: &str) -> Option<Load> {
    let mut o = reader.object(Some(value), path)?;
    let kinds = [("none", 0u8), ("resistance", 1), ("current", 2)];
    let kind = reader.choice(&mut o, "kind", &kinds, None);
    let load = match kind {
        Some(0) => Some(Load::None),
        Some(1) => {
            let r = reader.number(&mut o, "resistance_ohm");
            let v = reader.optional_number(&mut o, "return_v");
            Some(Load::Resistance { resistance_ohm: r?, return_v: v?.unwrap_or(0.0) })
        }
        Some(2) => {
            let i = reader.number(&mut o, "current_a");
            Some(Load::Current { current_a: i? })
        }
        _ => None,
    };
    reader.finish(o);
    load
}

fn read_values(reader: &mut Reader, value: &Value) -> Option<StageValues> {
    let mut o = reader.object(Some(value), "values")?;
    let bias = reader.choice(&mut o, "bias", &BIASES, None);
    let rc = reader.number(&mut o, "collector_resistor_ohm");
    let r1 = reader.number(&mut o, "cross_resistor_ohm");
    let r2 = reader.number(&mut o, "base_resistor_ohm");
    let re = reader.optional_number(&mut o, "emitter_resistor_ohm");
    let ce = reader.optional_number(&mut o, "emitter_bypass_capacitor_f");
    let c1 = reader.number(&mut o, "commutating_capacitor_f");
    o.used.push("trigger");
    let trigger = match o.map.get("trigger") {
        None | Some(Value::Null) => Some(None),
        Some(v) => {
            let path = join(&o.path, "trigger");
            let mut t = reader.object(Some(v), &path)?;
            let steering = reader.choice(&mut t, "steering", &STEERINGS, None);
            let ct = reader.number(&mut t, "trigger_capacitor_f");
            let rt = reader.number(&mut t, "trigger_resistor_ohm");
            reader.finish(t);
            Some(Some(TriggerNetwork {
                steering: steering?,
                trigger_capacitor_f: ct?,
                trigger_resistor_ohm: rt?,
            }))
        }
    };
    reader.finish(o);
    Some(StageValues {
        bias: bias?,
        collector_resistor_ohm: rc?,
        cross_resistor_ohm: r1?,
        base_resistor_ohm: r2?,
        emitter_resistor_ohm: re?.unwrap_or(0.0),
        emitter_bypass_capacitor_f: ce?.unwrap_or(0.0),
        commutating_capacitor_f: c1?,
        trigger: trigger?,
    })
}

const CHAIN_METHODS: [(&str, ChainMethodChoice); 4] = [
    ("recommended", ChainMethodChoice::Recommended),
    ("plain_binary", ChainMethodChoice::PlainBinary),
    ("reset_on_count", ChainMethodChoice::ResetOnCount),
    ("skip_feedback", ChainMethodChoice::SkipFeedback),
];

fn read_chain(reader: &mut Reader, value: &Value) -> Option<ChainSection> {
    let mut o = reader.object(Some(value), "chain")?;
    let path = join(&o.path, "divide_by");
    let range = format!("a whole number from {} to {MAX_DIVIDE_BY}", crate::chain::MIN_MODULUS);
    let divide_by = match reader.number(&mut o, "divide_by") {
        Some(n)
            if n.fract() == 0.0
                && n >= f64::from(crate::chain::MIN_MODULUS)
                && n <= f64::from(MAX_DIVIDE_BY) =>
        {
            // In range and whole, so the conversion is exact.
            Some(n as u32)
        }
        Some(n) => {
            reader.error(path, format!("must be {range}, got {n}"));
            None
        }
        None => {
            // The reader's own message says "a number"; say which numbers.
            if let Some(last) = reader.errors.last_mut() {
                if last.path == path {
                    last.message = format!("must be {range} ({})", last.message);
                }
            }
            None
        }
    };
    let method = reader.choice(&mut o, "method", &CHAIN_METHODS, Some(ChainMethodChoice::Recommended));
    let natural_binary_code = reader.boolean(&mut o, "natural_binary_code", false);
    reader.finish(o);
    let (divide_by, method, natural_binary_code) = (divide_by?, method?, natural_binary_code?);
    // A method that cannot divide by this N is the user's entry to fix, at the method field.
    let power_of_two = divide_by.is_power_of_two();
    let method_path = "chain.method".to_string();
    match method {
        ChainMethodChoice::PlainBinary if !power_of_two => {
            reader.error(
                method_path,
                format!("plain binary divides only by a power of two; for {divide_by} choose reset on count or skip-state feedback"),
            );
            return None;
        }
        ChainMethodChoice::ResetOnCount | ChainMethodChoice::SkipFeedback if power_of_two => {
            reader.error(
                method_path,
                format!("{divide_by} is a power of two: the plain binary chain divides by it with no extra parts; choose plain binary or recommended"),
            );
            return None;
        }
        ChainMethodChoice::SkipFeedback if natural_binary_code => {
            reader.error(
                method_path,
                "skip-state feedback does not count in natural binary; choose reset on count, or untick natural binary code",
            );
            return None;
        }
        _ => {}
    }
    Some(ChainSection { divide_by, method, natural_binary_code })
}

/// One step of a field path: a key or a list index (`loads[0].kind` is `loads`, 0, `kind`).
#[derive(Debug, Clone, PartialEq)]
enum Step {
    Key(String),
    Index(usize),
}

/// The steps of a field path as the reader writes them, `None` for a path that names no
/// field (`(document)`).
fn steps(path: &str) -> Option<Vec<Step>> {
    let mut out = Vec::new();
    for part in path.split('.') {
        let (key, mut rest) = part.split_once('[').map_or((part, ""), |(k, r)| (k, r));
        if key.is_empty() || !key.chars().all(|c| c.is_ascii_alphanumeric() || c == '_') {
            return None;
        }
        out.push(Step::Key(key.to_string()));
        while !rest.is_empty() {
            let (index, after) = rest.split_once(']')?;
            out.push(Step::Index(index.parse().ok()?));
            rest = after.strip_prefix('[').unwrap_or(after);
        }
    }
    Some(out)
}

fn value_at<'a>(value: &'a Value, path: &[Step]) -> Option<&'a Value> {
    path.iter().try_fold(value, |v, step| match step {
        Step::Key(k) => v.get(k.as_str()),
        Step::Index(i) => v.get(*i),
    })
}

fn value_at_mut<'a>(value: &'a mut Value, path: &[Step]) -> Option<&'a mut Value> {
    path.iter().try_fold(value, |v, step| match step {
        Step::Key(k) => v.get_mut(k.as_str()),
        Step::Index(i) => v.get_mut(*i),
    })
}

/// Puts `replacement` at `path` in `document` (adding the last key if the object lacks it).
fn put(document: &mut Value, path: &[Step], replacement: Value) -> bool {
    let Some((last, parent)) = path.split_last() else { return false };
    match (value_at_mut(document, parent), last) {
        (Some(Value::Object(map)), Step::Key(k)) => {
            map.insert(k.clone(), replacement);
            true
        }
        (Some(Value::Array(items)), Step::Index(i)) => {
            items.get_mut(*i).map(|slot| *slot = replacement).is_some()
        }
        _ => false,
    }
}

fn remove(document: &mut Value, path: &[Step]) -> bool {
    let Some((Step::Key(k), parent)) = path.split_last() else { return false };
    match value_at_mut(document, parent) {
        Some(Value::Object(map)) => map.remove(k).is_some(),
        _ => false,
    }
}

/// A complete file to take stand-in values from: the demo with its devices written out as
/// datasheets, placeholder component values and a chain section, so that every field a
/// design file can have is there.
fn stand_in() -> Option<Value> {
    let mut file = DesignFile::demo();
    file.transistor = DeviceChoice::Custom(file.transistor_sheet()?);
    file.diode = DeviceChoice::Custom(file.diode_sheet()?);
    file.values = Some(crate::stage::synthesis::placeholder_values(file.requirements.bias));
    file.chain = Some(ChainSection {
        divide_by: 10,
        method: ChainMethodChoice::Recommended,
        natural_binary_code: false,
    });
    serde_json::to_value(&file).ok()
}

/// The range problems of a file that could not be read, in the fields that did read: each
/// unreadable field (or, where the stand-in lacks it, its nearest enclosing section) takes the
/// stand-in's value, an unknown key is dropped, and the repaired file is read and checked
/// field by field; its problems outside the stand-in parts are the file's own. So one pass
/// names both a misspelt number and an out-of-range supply. Rules relating two fields (t_max_c
/// not below t_min_c) wait for the file to read, as do the fields of a section that stood in
/// whole. Nothing is added for a file whose header (format, version) or JSON is at fault, or
/// that the repair cannot read.
fn range_problems_besides(text: &str, reading: &[FieldError]) -> Vec<FieldError> {
    let (Ok(mut document), Some(fallback)) = (serde_json::from_str::<Value>(text), stand_in()) else {
        return Vec::new();
    };
    let mut stood_in: Vec<Vec<Step>> = Vec::new();
    for error in reading {
        let Some(path) = steps(&error.path) else { return Vec::new() };
        if matches!(path.first(), Some(Step::Key(k)) if k == "format" || k == "version") {
            return Vec::new();
        }
        if error.message.starts_with(UNKNOWN_FIELD) {
            if !remove(&mut document, &path) {
                return Vec::new();
            }
            continue;
        }
        let Some(depth) = (1..=path.len()).rev().find(|&d| value_at(&fallback, &path[..d]).is_some()) else {
            return Vec::new();
        };
        let (section, replacement) = (&path[..depth], value_at(&fallback, &path[..depth]).cloned());
        if !replacement.is_some_and(|r| put(&mut document, section, r)) {
            return Vec::new();
        }
        stood_in.push(section.to_vec());
    }
    let Ok(file) = DesignFile::read(&document.to_string()) else { return Vec::new() };
    let had_values =
        matches!(value_at(&document, &[Step::Key("values".to_string())]), Some(v) if !v.is_null());
    let values =
        file.values.unwrap_or_else(|| crate::stage::synthesis::placeholder_values(file.requirements.bias));
    // Single-field checks only: a rule relating two fields could blame the user's field for
    // the stand-in's value in the other (t_max_c "below t_min_c" when t_min_c stood in).
    let Ok(input) = file.stage_input(Some(values)) else { return Vec::new() };
    let problems = crate::stage::single_field_problems(&input);
    problems
        .into_iter()
        .filter(|p| {
            let Some(path) = steps(&p.path) else { return true };
            let in_stand_in = stood_in.iter().any(|s| path.starts_with(s));
            let in_placeholder_values =
                !had_values && matches!(path.first(), Some(Step::Key(k)) if k == "values");
            !in_stand_in && !in_placeholder_values && !reading.iter().any(|e| e.path == p.path)
        })
        .collect()
}

impl DesignFile {
    /// Parses and checks the structure of a design file. Semantic checks (ranges, consistency)
    /// follow in [`DesignFile::stage_input`]/[`StageDesign::new`]; [`DesignFile::load`] does both.
    /// A file that cannot be read also gets the range problems of the fields that did read
    /// (see `range_problems_besides`), so the user fixes everything in one round.
    pub fn parse(text: &str) -> Result<DesignFile, Vec<FieldError>> {
        DesignFile::read(text).map_err(|mut errors| {
            let more = range_problems_besides(text, &errors);
            errors.extend(more);
            errors
        })
    }

    /// The reading pass alone.
    fn read(text: &str) -> Result<DesignFile, Vec<FieldError>> {
        let root = parse_json(text)?;
        let mut reader = Reader { errors: Vec::new() };
        let mut o = reader.object(Some(&root), "").ok_or_else(|| {
            vec![FieldError { path: "(document)".to_string(), message: "must be a JSON object".to_string() }]
        })?;
        let (format, version) =
            read_header(&mut reader, &mut o, FORMAT_NAME, FORMAT_VERSION, "a design file")?;
        let name = reader.text(&mut o, "name", Some("untitled design"));
        let notes = reader.text(&mut o, "notes", Some(""));
        o.used.push("transistor");
        let transistor = read_transistor(&mut reader, o.map.get("transistor"));
        o.used.push("diode");
        let diode = read_diode(&mut reader, o.map.get("diode"));
        o.used.push("supplies");
        let supplies = reader.object(o.map.get("supplies"), "supplies").and_then(|mut s| {
            let vcc = reader.number(&mut s, "collector_supply_v");
            let vbb = reader.optional_number(&mut s, "bias_supply_v");
            let tol = reader.number(&mut s, "tolerance");
            reader.finish(s);
            Some(Supplies { collector_supply_v: vcc?, bias_supply_v: vbb?.unwrap_or(0.0), tolerance: tol? })
        });
        o.used.push("conditions");
        let conditions = reader.object(o.map.get("conditions"), "conditions").and_then(|mut c| {
            let t_min = reader.number(&mut c, "t_min_c");
            let t_max = reader.number(&mut c, "t_max_c");
            let rt = reader.number(&mut c, "resistor_tolerance");
            let ct = reader.number(&mut c, "capacitor_tolerance");
            reader.finish(c);
            Some(Conditions {
                t_min_c: t_min?,
                t_max_c: t_max?,
                resistor_tolerance: rt?,
                capacitor_tolerance: ct?,
            })
        });
        o.used.push("requirements");
        let requirements = reader.object(o.map.get("requirements"), "requirements").and_then(|mut r| {
            let ic = reader.optional_number(&mut r, "collector_current_a");
            let power = reader.optional_number(&mut r, "power_budget_w");
            let target = reader.number(&mut r, "target_overdrive");
            let min_k = reader.number(&mut r, "min_overdrive");
            let cut = reader.number(&mut r, "min_cutoff_margin_v");
            let loop_gain = reader.number(&mut r, "min_loop_gain");
            let swing = reader.number(&mut r, "min_output_swing_v");
            let rate = reader.number(&mut r, "toggle_rate_hz");
            let rate_margin = reader.number(&mut r, "toggle_rate_margin");
            let amplitude = reader.optional_number(&mut r, "trigger_amplitude_v");
            let steering = reader.choice(&mut r, "steering", &STEERINGS, Some(Steering::Base));
            let bias = reader.choice(&mut r, "bias", &BIASES, Some(BiasScheme::Fixed));
            let fraction = reader.number(&mut r, "divider_current_fraction");
            let options = series_options();
            let rs = reader.choice(&mut r, "resistor_series", &options, Some(ESeries::E24));
            let cs = reader.choice(&mut r, "capacitor_series", &options, Some(ESeries::E12));
            reader.finish(r);
            Some(Requirements {
                collector_current_a: ic?,
                power_budget_w: power?,
                target_overdrive: target?,
                min_overdrive: min_k?,
                min_cutoff_margin_v: cut?,
                min_loop_gain: loop_gain?,
                min_output_swing_v: swing?,
                toggle_rate_hz: rate?,
                toggle_rate_margin: rate_margin?,
                trigger_amplitude_v: amplitude?,
                steering: steering?,
                bias: bias?,
                divider_current_fraction: fraction?,
                resistor_series: rs?,
                capacitor_series: cs?,
            })
        });
        o.used.push("loads");
        let loads = match o.map.get("loads") {
            None | Some(Value::Null) => Some([Load::None, Load::None]),
            Some(Value::Array(items)) if items.len() == 2 => {
                let a = items.first().and_then(|v| read_load(&mut reader, v, "loads[0]"));
                let b = items.get(1).and_then(|v| read_load(&mut reader, v, "loads[1]"));
                a.zip(b).map(|(a, b)| [a, b])
            }
            Some(_) => {
                reader
                    .error("loads".to_string(), "must be a list of two loads, for the outputs of Q1 and Q2");
                None
            }
        };
        o.used.push("values");
        let values = match o.map.get("values") {
            None | Some(Value::Null) => Some(None),
            Some(v) => read_values(&mut reader, v).map(Some),
        };
        o.used.push("chain");
        let chain = match o.map.get("chain") {
            None | Some(Value::Null) => Some(None),
            Some(v) => read_chain(&mut reader, v).map(Some),
        };
        reader.finish(o);
        if !reader.errors.is_empty() {
            return Err(reader.errors);
        }
        let missing =
            || vec![FieldError { path: "(document)".to_string(), message: "incomplete".to_string() }];
        Ok(DesignFile {
            format: format.ok_or_else(missing)?,
            version: version.ok_or_else(missing)?,
            name: name.ok_or_else(missing)?,
            notes: notes.ok_or_else(missing)?,
            transistor: transistor.ok_or_else(missing)?,
            diode: diode.ok_or_else(missing)?,
            supplies: supplies.ok_or_else(missing)?,
            conditions: conditions.ok_or_else(missing)?,
            requirements: requirements.ok_or_else(missing)?,
            loads: loads.ok_or_else(missing)?,
            values: values.ok_or_else(missing)?,
            chain: chain.ok_or_else(missing)?,
        })
    }

    /// Pretty JSON of the file.
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).unwrap_or_default() + "\n"
    }

    pub fn transistor_sheet(&self) -> Option<TransistorDatasheet> {
        match &self.transistor {
            DeviceChoice::Archetype(id) => archetypes::transistor(id),
            DeviceChoice::Custom(sheet) => Some(sheet.clone()),
        }
    }

    pub fn diode_sheet(&self) -> Option<DiodeDatasheet> {
        match &self.diode {
            DeviceChoice::Archetype(id) => archetypes::diode(id),
            DeviceChoice::Custom(sheet) => Some(sheet.clone()),
        }
    }

    /// The stage input with `values` (or the file's own values when `None`).
    pub fn stage_input(&self, values: Option<StageValues>) -> Result<StageInput, Vec<FieldError>> {
        let values = values.or(self.values).ok_or_else(|| {
            vec![FieldError {
                path: "values".to_string(),
                message: "no component values: run the synthesis to choose them, or add a \"values\" object"
                    .to_string(),
            }]
        })?;
        let missing_device =
            |path: &str| FieldError { path: path.to_string(), message: "unknown archetype".to_string() };
        Ok(StageInput {
            transistor: self.transistor_sheet().ok_or_else(|| vec![missing_device("transistor")])?,
            diode: self.diode_sheet().ok_or_else(|| vec![missing_device("diode")])?,
            supplies: self.supplies,
            conditions: self.conditions,
            requirements: self.requirements,
            loads: self.loads,
            values,
        })
    }

    /// Parses and validates a file with values into a design, listing every problem.
    pub fn load(text: &str) -> Result<(DesignFile, StageDesign), Vec<FieldError>> {
        let file = DesignFile::parse(text)?;
        let design = StageDesign::new(file.stage_input(None)?)?;
        Ok((file, design))
    }

    /// Requirements-only input for synthesis (placeholder values are replaced there).
    pub fn synthesis_input(&self) -> Result<StageInput, Vec<FieldError>> {
        self.stage_input(Some(crate::stage::synthesis::placeholder_values(self.requirements.bias)))
    }

    /// The demo design: a scenario of our own — one toggle stage of a 9 V timebase divider,
    /// fed at up to 100 kHz, for a cabinet between 0 and 60 °C, driving a 47 kΩ indicator
    /// driver input from Q2's collector.
    pub fn demo() -> DesignFile {
        DesignFile {
            format: FORMAT_NAME.to_string(),
            version: FORMAT_VERSION,
            name: "Demo: 100 kHz timebase binary, 9 V".to_string(),
            notes: "Demo scenario: first binary of a 9 V timebase divider; edit freely.".to_string(),
            transistor: DeviceChoice::Archetype("si-npn-switch-40v".to_string()),
            diode: DeviceChoice::Archetype("si-signal-diode".to_string()),
            supplies: Supplies { collector_supply_v: 9.0, bias_supply_v: 4.5, tolerance: 0.05 },
            conditions: Conditions {
                t_min_c: 0.0,
                t_max_c: 60.0,
                resistor_tolerance: 0.05,
                capacitor_tolerance: 0.1,
            },
            requirements: Requirements {
                collector_current_a: Some(4e-3),
                power_budget_w: None,
                target_overdrive: 2.0,
                min_overdrive: 1.25,
                min_cutoff_margin_v: 0.3,
                min_loop_gain: 2.0,
                min_output_swing_v: 4.5,
                toggle_rate_hz: 100e3,
                toggle_rate_margin: 2.0,
                trigger_amplitude_v: None,
                steering: Steering::Base,
                bias: BiasScheme::Fixed,
                divider_current_fraction: 0.1,
                resistor_series: ESeries::E24,
                capacitor_series: ESeries::E12,
            },
            loads: [Load::None, Load::Resistance { resistance_ohm: 47e3, return_v: 0.0 }],
            values: None,
            chain: None,
        }
    }
}
