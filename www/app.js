// Flipwright page: reads the form, calls the wasm bridge, renders its results. No engineering here.
"use strict";

const STORAGE_KEY = "flipwright.design.v1";

// Form fields: [path in the design file, label, kind, options]. Text fields accept units and
// IEC 60062 codes ("4k7", "100 nF"); the core parses and validates them.
const FIELDS = [
  ["name", "Design name", "text"],
  ["supplies.collector_supply_v", "Collector supply |V| (V)", "text"],
  ["supplies.bias_supply_v", "Bias rail |V| (V, fixed bias)", "text"],
  ["supplies.tolerance", "Supply tolerance (0.05 = ±5 %)", "text"],
  ["transistor", "Transistor", "transistor"],
  ["diode", "Steering diode", "diode"],
  ["conditions.t_min_c", "Lowest temperature (°C)", "text"],
  ["conditions.t_max_c", "Highest temperature (°C)", "text"],
  ["conditions.resistor_tolerance", "Resistor tolerance", "text"],
  ["conditions.capacitor_tolerance", "Capacitor tolerance", "text"],
  ["requirements.collector_current_a", "ON collector current (A)", "optional"],
  ["requirements.power_budget_w", "or power budget (W)", "optional"],
  ["requirements.toggle_rate_hz", "Input (toggle) rate (Hz)", "text"],
  ["requirements.toggle_rate_margin", "Toggle-rate margin (×)", "text"],
  ["requirements.target_overdrive", "Target overdrive", "text"],
  ["requirements.min_overdrive", "Minimum overdrive (worst case)", "text"],
  ["requirements.min_cutoff_margin_v", "Minimum cut-off margin (V)", "text"],
  ["requirements.min_loop_gain", "Minimum loop gain", "text"],
  ["requirements.min_output_swing_v", "Minimum output swing (V)", "text"],
  ["requirements.trigger_amplitude_v", "Trigger amplitude (V; blank = own swing)", "optional"],
  ["requirements.bias", "Bias", "select", [["fixed", "fixed (bias rail)"], ["self_bias", "self bias (emitter resistor)"]]],
  ["requirements.steering", "Trigger steering", "select", [["base", "base-steered"], ["collector", "collector-steered"]]],
  ["requirements.divider_current_fraction", "Divider current / IC", "text"],
  ["requirements.resistor_series", "Resistor series", "select", ["E6", "E12", "E24", "E48", "E96", "E192"].map(s => [s, s])],
  ["requirements.capacitor_series", "Capacitor series", "select", ["E6", "E12", "E24"].map(s => [s, s])],
  ["loads.1.resistance_ohm", "Load on Q2 output (Ω to 0 V; blank = none)", "optional"],
];

// The counter chain: blank divide ratio = a single stage (no chain section in the file).
const CHAIN_FIELDS = [
  ["chain.divide_by", "Divide by N (2…4096; blank = one stage)", "optional"],
  ["chain.method", "Method", "select", [["recommended", "recommended for N"], ["plain_binary", "plain binary (N = 2^n)"],
    ["reset_on_count", "reset on reaching N"], ["skip_feedback", "skip-state feedback"]]],
  ["chain.natural_binary_code", "Outputs must count in natural binary", "select", [["false", "no"], ["true", "yes (0…N−1, 8-4-2-1)"]]],
];

// The user's own transistor: the datasheet fields of the core's TransistorDatasheet the form
// offers (the rest are kept from the class it started from, or from the file).
const CUSTOM_TRANSISTOR = "custom:entered";
const DATASHEET_FIELDS = [
  ["transistor.label", "Part name", "text"],
  ["transistor.polarity", "Polarity", "select", [["npn", "NPN"], ["pnp", "PNP"]]],
  ["transistor.material", "Material", "select", [["silicon", "silicon"], ["germanium", "germanium"]]],
  ["transistor.hfe_min", "hFE min", "text"],
  ["transistor.hfe_typ", "hFE typ", "text"],
  ["transistor.hfe_max", "hFE max", "text"],
  ["transistor.hfe_test_current_a", "hFE at IC (A)", "text"],
  ["transistor.vce_sat_typ_v", "VCE(sat) typ (V)", "text"],
  ["transistor.vce_sat_max_v", "VCE(sat) max (V)", "text"],
  ["transistor.vbe_sat_min_v", "VBE(sat) min (V)", "text"],
  ["transistor.vbe_sat_typ_v", "VBE(sat) typ (V)", "text"],
  ["transistor.vbe_sat_max_v", "VBE(sat) max (V)", "text"],
  ["transistor.sat_forced_gain", "Saturation at IC/IB =", "text"],
  ["transistor.sat_test_current_a", "Saturation at IC (A)", "text"],
  ["transistor.icbo_25c_a", "ICBO max at 25 °C (A)", "text"],
  ["transistor.ft_hz", "fT (Hz)", "text"],
  ["transistor.cob_f", "Cob (F)", "text"],
  ["transistor.storage_time_constant_s", "Storage time constant τS (s)", "optional"],
  ["transistor.vceo_v", "VCEO (V)", "text"],
  ["transistor.vcbo_v", "VCBO (V)", "text"],
  ["transistor.vebo_v", "VEBO (V)", "text"],
  ["transistor.ic_max_a", "IC max (A)", "text"],
  ["transistor.ptot_w", "Ptot (W)", "text"],
];

const VALUE_FIELDS = [
  ["values.collector_resistor_ohm", "RC (Ω)"],
  ["values.cross_resistor_ohm", "R1 (Ω)"],
  ["values.base_resistor_ohm", "R2 (Ω)"],
  ["values.emitter_resistor_ohm", "RE (Ω, self bias)"],
  ["values.emitter_bypass_capacitor_f", "RE bypass (F)"],
  ["values.commutating_capacitor_f", "C1 (F)"],
  ["values.trigger.trigger_capacitor_f", "Ct (F)"],
  ["values.trigger.trigger_resistor_ohm", "Rt (Ω)"],
];

let engine = null;          // the bridge's exported functions
let wasmModule = null;      // compiled once: re-instantiated after a failure, posted to workers
let current = null;         // the design file object shown in the form
let lastView = null;        // last successful analysis view
let archetypeList = { transistors: [], diodes: [] };
let pending = 0;

const $ = (id) => document.getElementById(id);

function getPath(object, path) {
  return path.split(".").reduce((o, k) => (o == null ? undefined : o[k]), object);
}
function setPath(object, path, value) {
  const keys = path.split(".");
  let o = object;
  keys.slice(0, -1).forEach((k, i) => {
    if (o[k] == null || typeof o[k] !== "object") o[k] = /^\d+$/.test(keys[i + 1]) ? [] : {};
    o = o[k];
  });
  o[keys[keys.length - 1]] = value;
}

function banner(text, kind) {
  const el = $("banner");
  el.textContent = text || "";
  el.className = "banner" + (text ? " show" : "") + (kind === "error" ? " error" : "");
}

// ---- engine start and recovery ----
function decodeBase64(text) {
  const binary = atob(text);
  const bytes = new Uint8Array(binary.length);
  for (let i = 0; i < binary.length; i++) bytes[i] = binary.charCodeAt(i);
  return bytes;
}

async function startEngine() {
  // Evaluate the glue afresh so a failed instance is fully replaced.
  const script = document.createElement("script");
  // Wrapped in a function so its top-level declarations do not clash with the last instance.
  script.textContent = "(function () {\n" + $("glue-source").textContent + "\nwindow.wasm_bindgen = wasm_bindgen;\n})();";
  document.head.appendChild(script);
  script.remove();
  if (!wasmModule) wasmModule = await WebAssembly.compile(decodeBase64(WASM_BASE64));
  await window.wasm_bindgen({ module_or_path: wasmModule });
  engine = window.wasm_bindgen;
  // A restart may have come in the middle of a draw: draw every chart afresh.
  drawn = new WeakMap();
  if (typeof scheduleDraw === "function" && document.body.dataset.ready === "true") scheduleDraw();
}

async function call(name, ...args) {
  try {
    return engine[name](...args);
  } catch (error) {
    if (error instanceof WebAssembly.RuntimeError) {
      banner("The engine failed internally (" + error.message + ") and was restarted; your design is unchanged. Please report what you entered.", "error");
      engine = null;
      await startEngine();
      return null;
    }
    throw error;
  }
}

/** What `callNow` returns when the export did not run (no engine, or it failed and is
 *  restarting), as against the export's own result. */
const NOT_RUN = Symbol("not run");

/** The same for the drawing exports, which the page needs synchronously. */
function callNow(name, ...args) {
  if (!engine) return NOT_RUN;
  try {
    return engine[name](...args);
  } catch (error) {
    if (error instanceof WebAssembly.RuntimeError) {
      banner("The engine failed internally (" + error.message + ") and was restarted; your design is unchanged. Please report what you entered.", "error");
      engine = null;
      startEngine();
      return NOT_RUN;
    }
    throw error;
  }
}

// ---- form ----
function fieldRow(path, label, kind, options) {
  const row = document.createElement("div");
  // A device's description and the design's name are too long for the control column: they
  // take the form's width under their label. A choice is as wide as its longest option.
  const stacked = kind === "transistor" || kind === "diode" || path === "name";
  row.className = "field" + (stacked ? " stacked" : kind === "select" ? " choice" : "");
  row.dataset.path = path;
  const id = "f-" + path.replace(/\W/g, "-");
  const lab = document.createElement("label");
  lab.htmlFor = id;
  lab.textContent = label;
  let input;
  if (kind === "select" || kind === "transistor" || kind === "diode") {
    input = document.createElement("select");
    const list = kind === "transistor" ? archetypeList.transistors : kind === "diode" ? archetypeList.diodes : options;
    for (const [value, text] of list) {
      const option = document.createElement("option");
      option.value = value;
      option.textContent = text;
      input.appendChild(option);
    }
  } else {
    input = document.createElement("input");
    input.type = "text";
    input.spellcheck = false;
  }
  input.id = id;
  input.name = path;
  input.dataset.kind = kind;
  input.addEventListener("input", scheduleCompute);
  input.addEventListener("change", scheduleCompute);
  row.append(lab, input);
  return row;
}

function buildForm() {
  const fields = $("fields");
  fields.textContent = "";
  for (const [path, label, kind, options] of FIELDS) fields.appendChild(fieldRow(path, label, kind, options));
  const sheet = $("datasheet-fields");
  sheet.textContent = "";
  for (const [path, label, kind, options] of DATASHEET_FIELDS) sheet.appendChild(fieldRow(path, label, kind, options));
  const picker = $("f-transistor");
  const own = document.createElement("option");
  own.value = CUSTOM_TRANSISTOR;
  own.textContent = "enter your part's datasheet…";
  picker.appendChild(own);
  picker.addEventListener("change", startDatasheet);
  const chain = $("chain-fields");
  chain.textContent = "";
  for (const [path, label, kind, options] of CHAIN_FIELDS) chain.appendChild(fieldRow(path, label, kind, options));
  const values = $("value-fields");
  values.textContent = "";
  for (const [path, label] of VALUE_FIELDS) values.appendChild(fieldRow(path, label, "optional"));
  $("auto-values").addEventListener("change", () => { syncValueLock(); scheduleCompute(); });
}

/** Opens the datasheet form, filled from the class picked before (or the part in the file). */
let lastTransistorSheet = null;
function startDatasheet() {
  const picker = $("f-transistor");
  const custom = picker.value.startsWith("custom:");
  $("datasheet").hidden = !custom;
  if (!custom) { lastTransistorSheet = null; return; }
  if (picker.value !== CUSTOM_TRANSISTOR) return;
  const from = typeof current.transistor === "object" && current.transistor ? current.transistor : callNow("transistor_datasheet", current.transistor);
  if (!from || from === NOT_RUN) return;
  lastTransistorSheet = Object.assign({}, from, { label: (from.label || "my part").replace(/^generic /, "my ") , approximate: false });
  fillDatasheet(lastTransistorSheet);
}

function fillDatasheet(sheet) {
  for (const [path] of DATASHEET_FIELDS) {
    const value = getPath({ transistor: sheet }, path);
    $("f-" + path.replace(/\W/g, "-")).value = value == null ? "" : String(value);
  }
}

function readDatasheet() {
  const sheet = Object.assign({}, lastTransistorSheet || (typeof current.transistor === "object" ? current.transistor : {}));
  for (const [path, , kind] of DATASHEET_FIELDS) {
    const text = $("f-" + path.replace(/\W/g, "-")).value.trim();
    const key = path.slice("transistor.".length);
    sheet[key] = kind === "optional" && text === "" ? null : text;
  }
  return sheet;
}

function syncValueLock() {
  const auto = $("auto-values").checked;
  for (const input of $("value-fields").querySelectorAll("input")) input.disabled = auto;
}

function showInForm(design) {
  for (const [path, , kind] of FIELDS) {
    const input = $("f-" + path.replace(/\W/g, "-"));
    let value = getPath(design, path);
    if (kind === "transistor" || kind === "diode") {
      if (kind === "transistor" && typeof value === "object" && value) {
        lastTransistorSheet = value;
        fillDatasheet(value);
        input.value = CUSTOM_TRANSISTOR;
        $("datasheet").hidden = false;
        continue;
      }
      if (kind === "transistor") { $("datasheet").hidden = true; lastTransistorSheet = null; }
      if (typeof value === "object" && value) {
        // A datasheet typed in by the user: keep it, offer it by its label.
        const custom = "custom:" + (value.label || "user part");
        if (![...input.options].some(o => o.value === custom)) {
          const option = document.createElement("option");
          option.value = custom;
          option.textContent = "your part: " + (value.label || "user part");
          input.appendChild(option);
        }
        value = custom;
      }
    }
    if (path === "loads.1.resistance_ohm") {
      const load = getPath(design, "loads.1");
      value = load && load.kind === "resistance" ? load.resistance_ohm : "";
    }
    input.value = value == null ? "" : String(value);
  }
  const chain = design.chain || {};
  $("f-chain-divide_by").value = chain.divide_by == null ? "" : String(chain.divide_by);
  $("f-chain-method").value = chain.method || "recommended";
  $("f-chain-natural_binary_code").value = chain.natural_binary_code ? "true" : "false";
  showValues(design.values);
}

function showValues(values) {
  for (const [path] of VALUE_FIELDS) {
    const input = $("f-" + path.replace(/\W/g, "-"));
    const value = values ? getPath({ values }, path) : undefined;
    input.value = value == null ? "" : String(value);
  }
}

function readForm() {
  const design = JSON.parse(JSON.stringify(current));
  for (const [path, , kind] of FIELDS) {
    const input = $("f-" + path.replace(/\W/g, "-"));
    const text = input.value.trim();
    if (kind === "transistor" || kind === "diode") {
      if (kind === "transistor" && text === CUSTOM_TRANSISTOR) design.transistor = readDatasheet();
      else if (!text.startsWith("custom:")) design[path] = text;
      continue;
    }
    if (path === "loads.1.resistance_ohm") {
      design.loads = design.loads || [{ kind: "none" }, { kind: "none" }];
      design.loads[1] = text === "" ? { kind: "none" } : { kind: "resistance", resistance_ohm: text, return_v: 0 };
      continue;
    }
    if (kind === "optional" && text === "") { setPath(design, path, null); continue; }
    setPath(design, path, text);
  }
  const divideBy = $("f-chain-divide_by").value.trim();
  if (divideBy === "") delete design.chain;
  else design.chain = { divide_by: divideBy, method: $("f-chain-method").value, natural_binary_code: $("f-chain-natural_binary_code").value === "true" };
  if ($("auto-values").checked) {
    design.values = null;
  } else {
    const values = { bias: getPath(design, "requirements.bias") };
    for (const [path] of VALUE_FIELDS) {
      const text = $("f-" + path.replace(/\W/g, "-")).value.trim();
      if (text !== "") setPath({ values }, path, text);
    }
    if (values.trigger) values.trigger.steering = getPath(design, "requirements.steering");
    design.values = values;
  }
  return design;
}

function clearFieldErrors() {
  for (const row of document.querySelectorAll(".field.invalid")) {
    row.classList.remove("invalid");
    row.querySelector(".error")?.remove();
  }
}

function showFieldErrors(errors) {
  clearFieldErrors();
  const unplaced = [];
  for (const error of errors) {
    const path = error.path.replace(/\[(\d+)\]/g, ".$1");
    let row = document.querySelector(`.field[data-path="${CSS.escape(path)}"]`);
    if (!row && path.startsWith("loads.1")) row = document.querySelector('.field[data-path="loads.1.resistance_ohm"]');
    if (!row) { unplaced.push(`${error.path}: ${error.message}`); continue; }
    row.classList.add("invalid");
    const note = document.createElement("div");
    note.className = "error";
    note.textContent = error.message;
    row.appendChild(note);
  }
  banner(`${errors.length} entr${errors.length === 1 ? "y needs" : "ies need"} attention; the results below are from the last valid design.` + (unplaced.length ? " " + unplaced.join("; ") : ""), "error");
}

// ---- compute ----
let timer = null;
function scheduleCompute() {
  clearTimeout(timer);
  timer = setTimeout(compute, 120);
}

async function compute() {
  const design = readForm();
  const text = JSON.stringify(design);
  const auto = design.values == null;
  $("verdict").className = "verdict busy";
  $("verdict").textContent = "Computing…";
  const started = performance.now();
  const result = await call(auto ? "synthesise_design" : "analyse_design", text);
  const elapsed = performance.now() - started;
  document.body.dataset.lastComputeMs = elapsed.toFixed(2);
  if (!result) return;
  if (result.status === "invalid") {
    showFieldErrors(result.errors);
    renderVerdictFromLast();
    return;
  }
  if (result.status === "failed") {
    banner(result.message, "error");
    renderVerdictFromLast();
    return;
  }
  clearFieldErrors();
  banner("");
  const view = auto ? result.analysis : result;
  current = design;
  if (auto) current.values = JSON.parse(view.design_json).values;
  try { localStorage.setItem(STORAGE_KEY, JSON.stringify(current)); } catch (_) { /* storage full or blocked */ }
  lastView = view;
  const renderStarted = performance.now();
  render(view, auto ? result : null);
  if (auto) showValues(current.values);
  document.body.dataset.lastRenderMs = (performance.now() - renderStarted).toFixed(2);
  document.body.dataset.ready = "true";
  // From the start of the recompute to the next frame on screen: layout, the charts drawn in
  // that frame, and paint included.
  requestAnimationFrame(() => setTimeout(() => {
    document.body.dataset.lastPaintMs = (performance.now() - started).toFixed(2);
  }, 0));
  computeTolerance();
}

function renderVerdictFromLast() {
  if (lastView) render(lastView, null);
  else { $("verdict").className = "verdict fail"; $("verdict").textContent = "No valid design yet."; }
}

// ---- rendering ----
const PREFIXES = [[1e9, "G"], [1e6, "M"], [1e3, "k"], [1, ""], [1e-3, "m"], [1e-6, "µ"], [1e-9, "n"], [1e-12, "p"]];
function si(value, unit) {
  if (value == null || !isFinite(value)) return "—";
  if (value === 0) return "0 " + unit;
  const magnitude = Math.abs(value);
  const [scale, prefix] = PREFIXES.find(([s]) => magnitude >= s * 0.9995) || PREFIXES[PREFIXES.length - 1];
  // Trim trailing zeros of the fraction only ("300" stays, "4.70" becomes "4.7").
  const digits = (value / scale).toPrecision(3);
  const trimmed = digits.includes(".") ? digits.replace(/0+$/, "").replace(/\.$/, "") : digits;
  return trimmed + " " + prefix + unit;
}

function cell(row, text, className) {
  const td = document.createElement(row.parentElement && row.parentElement.tagName === "THEAD" ? "th" : "td");
  td.textContent = text;
  if (className) td.className = className;
  row.appendChild(td);
  return td;
}

/** What each table last showed (its cells as JSON) and the body holding it: an edit that
 *  leaves a table's cells as they were (the count table, the plan's methods) keeps its
 *  DOM instead of rebuilding it; a table cleared elsewhere has lost that body, so it is
 *  built again. */
const shownTables = new WeakMap();

function table(el, headers, rows) {
  const key = JSON.stringify([headers, rows]);
  const shown = shownTables.get(el);
  if (shown && shown.key === key && el.tBodies[0] === shown.body) return;
  el.textContent = "";
  const head = el.createTHead().insertRow();
  for (const h of headers) { const th = document.createElement("th"); th.textContent = h; head.appendChild(th); }
  const body = el.createTBody();
  for (const r of rows) {
    const tr = body.insertRow();
    for (const c of r) {
      const td = tr.insertCell();
      if (c && typeof c === "object") {
        td.textContent = c.text;
        if (c.className) td.className = c.className;
        if (c.html) td.innerHTML = c.html;
        if (c.sub) { const sub = document.createElement("div"); sub.className = "sub"; sub.textContent = c.sub; td.appendChild(sub); }
      }
      else td.textContent = c;
    }
  }
  shownTables.set(el, { key, body });
}

function marginText(value, unit) {
  if (value == null || !isFinite(value)) return "—";
  return unit ? si(value, unit) : value.toFixed(2);
}

/** The schematic's SVG as last shown (only `render` writes that element). */
let shownSchematic = null;

function render(view, synthesis) {
  const report = view.report;
  const verdict = $("verdict");
  verdict.className = "verdict " + (report.all_pass ? "pass" : "fail");
  verdict.textContent = report.all_pass ? "Every margin passes at worst case." : "Some margin fails at worst case — see below for what to change.";
  if (shownSchematic !== view.schematic_svg) {
    $("schematic").innerHTML = view.schematic_svg;
    shownSchematic = view.schematic_svg;
  }
  table($("margins"), ["Margin (headroom to the limit)", "At nominal", "At worst", "Required", "Result", "Limited by / what to change"],
    report.margins.map(m => [
      m.title,
      { text: marginText(m.nominal, m.unit), className: "num" },
      { text: marginText(m.worst, m.unit), className: "num" },
      { text: "≥ " + marginText(m.required, m.unit), className: "num" },
      { text: m.pass ? "PASS" : "FAIL", className: m.pass ? "pass" : "fail" },
      { text: (m.limiting[0] || "") + (m.pass ? "" : " — " + m.advice), className: "advice" },
    ]));
  const steps = $("synthesis-steps");
  steps.textContent = "";
  if (synthesis) {
    const list = document.createElement("ul");
    for (const s of synthesis.steps.concat(synthesis.shortfalls.map(x => "SHORTFALL: " + x))) {
      const li = document.createElement("li"); li.textContent = s; list.appendChild(li);
    }
    steps.append("How the values were chosen:", list);
  }
  const states = $("states");
  states.textContent = "";
  states.className = "states";
  report.handbook_states.forEach((state, i) => {
    const box = document.createElement("div");
    const exact = report.exact_states[i] && report.exact_states[i].Ok;
    const t = document.createElement("table");
    t.className = "grid";
    const rows = state.node_voltages.map(([name, v]) => {
      const e = exact ? exact.node_voltages.find(([n]) => n === name) : null;
      return [name, { text: name.startsWith("S") ? "(diodes open)" : si(v, "V"), className: "num" }, { text: e ? si(e[1], "V") : "—", className: "num" }];
    });
    rows.push(["IC (ON)", { text: si(state.on_collector_current_a, "A"), className: "num" }, { text: exact ? si(exact.collector_current_a[state.on_side], "A") : "—", className: "num" }]);
    rows.push(["IB (ON)", { text: si(state.on_base_current_a, "A"), className: "num" }, { text: exact ? si(exact.base_current_a[state.on_side], "A") : "—", className: "num" }]);
    table(t, [`Q${state.on_side + 1} ON`, "handbook", "Ebers–Moll"], rows);
    box.appendChild(t);
    states.appendChild(box);
  });
  const s = report.switching;
  table($("switching"), ["Quantity", "Estimate"], [
    ["Delay / rise / storage / fall (no C1)", `${si(s.delay_s, "s")} / ${si(s.rise_s, "s")} / ${si(s.storage_s, "s")} / ${si(s.fall_s, "s")}`],
    ["Charge to move at a transition", si(s.charge.total_c, "C")],
    ["C1: charge criterion minimum · rule 10·t/(R1∥R2) · rate maximum", `${si(s.commutating_min_f, "F")} · ${si(s.commutating_rule_f, "F")} · ${si(s.commutating_max_f, "F")}`],
    ["Transition time with C1", si(s.transition_s, "s")],
    ["Collector voltage rise 10–90 % at turn-off, 2.2·RC·(C1 + Cob + Ct)", si(s.collector_voltage_rise_s, "s")],
    ["Maximum toggle rate (nominal · slow corner)", `${si(s.max_toggle_rate_hz, "Hz")} · ${si(report.worst_max_toggle_rate_hz, "Hz")}`],
    ["Rules 1/(2.3·C1·R1∥R2) · 1/(2·C1·R1∥R2)", `${si(s.max_rate_rule_bell_hz, "Hz")} · ${si(s.max_rate_rule_half_hz, "Hz")}`],
    ["Trigger: estimated minimum · available", `${si(s.min_trigger_amplitude_v, "V")} · ${si(s.available_trigger_amplitude_v, "V")}`],
  ]);
  const plan = view.chain && view.chain.status === "ok" ? view.chain : null;
  const partRow = (r) => [r.designator, r.value_text, r.code, r.tolerance_text, r.stress_text,
    { text: r.rating_text + (r.meets ? "" : "  — NOT MET"), className: r.meets ? "" : "fail" }, r.function];
  table($("parts"), ["Ref", "Value", "Code", "Tolerance", "Worst-case stress", "Buy (rating)", "Function"],
    view.table.concat(plan ? plan.parts : []).map(partRow));
  $("parts-chain-note").textContent = plan
    ? `Stage 1 is listed; stages 2…${plan.stage_count} repeat its parts as R201…, R${plan.stage_count}01… ` +
      (plan.parts.length ? `The ${plan.chosen_name} parts are numbered 9xx, with their own stresses and ratings.` : "")
    : "";
  renderPlan(view.chain);
  const cautions = $("cautions");
  cautions.textContent = "";
  for (const c of report.cautions) { const li = document.createElement("li"); li.textContent = c; cautions.appendChild(li); }
  const notes = $("notes");
  notes.textContent = "";
  for (const n of report.notes) { const li = document.createElement("li"); li.textContent = n; notes.appendChild(li); }
  markStale();
  markToleranceStale();
  const d = current;
  $("print-header").innerHTML = "";
  const h = document.createElement("h1"); h.textContent = view.name;
  const p = document.createElement("p");
  const percent = (x) => `±${+(100 * x).toFixed(2)} %`;
  const named = (list, key) => (list.find(([value]) => value === key) || [key, key])[1];
  const transistorName = typeof d.transistor === "string" ? named(archetypeList.transistors, d.transistor) : d.transistor.label;
  p.textContent = `Printed ${new Date().toISOString().slice(0, 10)} · collector supply ${si(d.supplies.collector_supply_v, "V")}, bias supply ${si(d.supplies.bias_supply_v, "V")} (magnitudes) ${percent(d.supplies.tolerance)} · ${d.conditions.t_min_c}…${d.conditions.t_max_c} °C · resistors ${percent(d.conditions.resistor_tolerance)}, capacitors ${percent(d.conditions.capacitor_tolerance)} · toggle rate ${si(d.requirements.toggle_rate_hz, "Hz")} · transistor ${transistorName}` +
    (plan ? ` · divide by ${plan.divide_by} (${plan.stage_count} stages, ${plan.chosen_name})` : "");
  $("print-header").append(h, p);
}

// ---- chain plan ----
let planShown = null;       // the plan view on screen, for redrawing its diagram

function bitsHeader(stages) {
  return `Q stage ${stages}…1`;
}

/** The count table as the bridge sends it (a long one as its first and last rows), with a
 *  marker row where rows are left out. */
function countRows(plan) {
  const rows = plan.count_table;
  if (!plan.count_rows_omitted) return rows;
  return rows.slice(0, plan.count_head_rows).concat([null], rows.slice(plan.count_head_rows));
}

function loadText(load) {
  if (!load || load.kind === "none") return "—";
  if (load.kind === "resistance") return `${si(load.resistance_ohm, "Ω")} to ${si(load.return_v, "V")}`;
  return `${si(load.current_a, "A")} drawn`;
}

function renderPlan(outcome) {
  const box = $("plan");
  planShown = null;
  const runLabel = $("plan-run-label");
  if (!outcome) {
    box.hidden = true;
    runLabel.textContent = "enter a divide ratio to plan a chain";
    scheduleDraw();
    return;
  }
  box.hidden = false;
  $("plan-problem").textContent = outcome.status === "ok" ? "" : "The chain cannot be planned: " + (outcome.message || outcomeProblem(outcome));
  if (outcome.status !== "ok") return;
  const plan = outcome;
  planShown = plan;
  const n = plan.stage_count;
  runLabel.textContent = `divide by ${plan.divide_by}: ${n} stages, ${plan.chosen_name}, ${plan.divide_by} input edges`;
  $("plan-title").textContent = `Chain plan: divide by ${plan.divide_by}`;
  $("plan-summary").textContent = `${n} binary stage${n === 1 ? "" : "s"} (⌈log2 ${plan.divide_by}⌉ = ${n}); building ${plan.chosen_name}` +
    (plan.chosen_by_user ? (plan.chosen === plan.recommended ? " (your choice, also the recommendation)." : ` (your choice; recommended: ${plan.methods.find(m => m.recommended)?.name}).`) : " (recommended).");
  table($("plan-methods"), ["Method considered", "Extra parts", "Output duty", "Natural binary", "Max input rate", "Start-up"],
    plan.methods.map(m => [
      { text: m.name + (m.recommended ? " — recommended" : "") + (m.chosen ? " — building" : ""), className: m.chosen ? "strong" : "", sub: m.parts_description.join("; ") },
      { text: String(m.extra_parts), className: "num" },
      { text: `${(100 * m.output.duty_cycle).toFixed(1)} %`, className: "num", sub: `high ${m.output.high_counts} of ${plan.divide_by}` },
      m.natural_binary ? "yes" : "no",
      { text: m.timing ? si(m.timing.max_input_rate_hz, "Hz") : "—", className: "num" + (m.timing && !m.timing.meets_input_rate ? " fail" : ""), sub: m.timing ? (m.timing.meets_input_rate ? "meets the input rate" : "TOO SLOW for the input rate") + " · limited by " + m.timing.limited_by : (m.timing_problem || "") },
      m.start_up.unused_states === 0 ? "no unused states" : (m.start_up.every_state_enters_cycle ? `${m.start_up.unused_states} unused, join within ${m.start_up.most_pulses_to_enter} pulse(s)` : { text: "LOCK-OUT possible", className: "fail" }),
    ]));
  const reasons = $("plan-reasons");
  reasons.textContent = "";
  for (const r of plan.recommendation_reasons) { const li = document.createElement("li"); li.textContent = r; reasons.appendChild(li); }
  const shown = countRows(plan);
  table($("plan-count"), ["Pulse", "Count", bitsHeader(n), "Output", "Correction"],
    shown.map(r => r === null
      ? [{ text: "…" }, { text: `${plan.count_rows_omitted} rows` }, "", "", ""]
      : [{ text: String(r.pulse), className: "num" }, { text: String(r.state), className: "num" }, { text: r.bits, className: "bits" }, r.output_high ? "1" : "0", r.correction || ""]));
  $("plan-count-note").textContent = plan.count_rows_omitted
    ? `First ${plan.count_head_rows} and last ${plan.count_table.length - plan.count_head_rows} of ${plan.count_rows} rows. The cycle starts from 0 (all stages cleared).`
    : "The cycle starts from 0 (all stages cleared).";
  const chosen = plan.methods.find(m => m.chosen);
  const t = chosen && chosen.timing;
  table($("plan-timing"), ["Quantity", "Value"], t ? [
    ["Stage delay tpd (slowest)", { text: si(t.propagation_delay_s, "s"), className: "num" }],
    [`Ripple delay n·tpd (n = ${n})`, { text: si(t.ripple_delay_s, "s"), className: "num" }],
    ["f(max) = 1/(n·tpd)", { text: si(t.settling_max_input_rate_hz, "Hz"), className: "num" }],
    ["Correction after the ripple", { text: t.correction_s == null ? "none" : si(t.correction_s, "s"), className: "num" }],
    ["Worst settling · 1/settling", { text: `${si(t.worst_settling_s, "s")} · ${si(1 / t.worst_settling_s, "Hz")}`, className: "num" }],
    ["Toggle limit: busiest stage at its maximum toggle rate", { text: t.toggle_max_input_rate_hz == null ? "not known" : si(t.toggle_max_input_rate_hz, "Hz"), className: "num" }],
    ["Max input rate (the lower)", { text: si(t.max_input_rate_hz, "Hz"), className: "num" + (t.meets_input_rate ? "" : " fail"), sub: "limited by " + t.limited_by }],
    ["Input rate (requirement)", { text: si(t.input_rate_hz, "Hz"), className: "num" }],
  ] : [["Timing", (chosen && chosen.timing_problem) || "—"]]);
  table($("plan-rates"), ["Stage", "Average rate", "Must toggle at", "Stage limit (est.)"], t ? t.stages.map(r => [
    { text: String(r.stage + 1), className: "num" },
    { text: si(r.average_trigger_rate_hz, "Hz"), className: "num" },
    { text: si(r.required_toggle_rate_hz, "Hz"), className: "num" + (r.required_toggle_rate_hz > plan.stage_max_toggle_rate_hz ? " fail" : "") },
    { text: si(plan.stage_max_toggle_rate_hz, "Hz"), className: "num" },
  ]) : []);
  const networkNotes = $("plan-network-notes");
  networkNotes.textContent = "";
  const note = (text, className) => { const li = document.createElement("li"); li.textContent = text; if (className) li.className = className; networkNotes.appendChild(li); };
  if (plan.reset) {
    const r = plan.reset;
    const v = r.values;
    $("plan-network-title").textContent = `Reset network — decodes ${plan.divide_by} (${plan.divide_by.toString(2)}) from stages ${plan.decoded_stages.map(k => k + 1).join(" and ")}`;
    table($("plan-network"), ["Part", "Value"], [
      ["Gate pull-up (R901)", { text: si(v.pull_up_ohm, "Ω"), className: "num" }],
      ["Driver base divider upper · lower (R902 · R903)", { text: `${si(v.divider_upper_ohm, "Ω")} · ${si(v.divider_lower_ohm, "Ω")}`, className: "num" }],
      ["Reset bus resistor (R904) · series resistor per stage (R911 …)", { text: `${si(v.emitter_resistor_ohm, "Ω")} · ${si(v.series_resistor_ohm, "Ω")}`, className: "num" }],
      ["Hold capacitor (C901)", { text: si(v.hold_capacitor_f, "F"), className: "num" }],
      ["Gate sink at rest (share of a stage's collector current)", { text: `${(100 * r.gate_sink_share).toFixed(0)} %`, className: "num" }],
      ["Reset cycle", { text: si(r.timeline.reset_cycle_s, "s"), className: "num" }],
      ["Race: hold needed · available", { text: `${si(r.race.required_hold_s, "s")} · ${si(r.race.available_hold_s, "s")}`, className: "num " + (r.race.won ? "pass" : "fail") }],
    ]);
    note(`Race ${r.race.won ? "won" : "LOST"}: ${r.race.condition}`, r.race.won ? "" : "fail");
    for (const p of r.problems) note("Problem: " + p, "fail");
  } else if (plan.feedback) {
    const f = plan.feedback;
    $("plan-network-title").textContent = "Feedback connections";
    table($("plan-network"), ["From", "To", "Effect"], f.receiving_stages.map(k => [
      `stage ${f.source_stage + 1} Q̄ (its 0 → 1 transition)`, `stage ${k + 1} preset input (sets it to 1)`, `skips ${f.skipped_states} states: ${f.jumps_from} → ${f.jumps_to}`]));
  } else {
    $("plan-network-title").textContent = "Correction network";
    table($("plan-network"), ["Part", "Value"], [[plan.reset_problem ? "Reset network" : "None needed", plan.reset_problem || "the ripple chain alone divides by N"]]);
  }
  const g = plan.glitches;
  $("plan-glitches").textContent = `${g.ripple} ripple state(s) between stage transitions` +
    (g.reset_transient ? `, ${g.reset_transient} reset transient(s) (N shows until the reset clears it)` : "") +
    (g.preset_transient ? `, ${g.preset_transient} preset transient(s) (one stage delay)` : "") +
    ". A decoder of the outputs sees spikes there: strobe it after the worst settling time. " + g.examples.slice(0, 3).join("; ") + (g.examples.length ? "." : "");
  table($("plan-loads"), ["Stage", "Q̄ (Q1 collector)", "Q (Q2 collector)", "Capacitance Q̄ · Q", "From"],
    plan.loads.map(l => [{ text: String(l.stage + 1), className: "num" }, loadText(l.loads[0]), loadText(l.loads[1]),
      { text: `${si(l.capacitance_f[0], "F")} · ${si(l.capacitance_f[1], "F")}`, className: "num" }, { text: l.sources.join("; "), className: "advice" }]));
  if (plan.loads_problem) $("plan-problem").textContent = "Loads: " + plan.loads_problem;
  const notes = $("plan-notes");
  notes.textContent = "";
  for (const x of plan.notes) { const li = document.createElement("li"); li.textContent = x; notes.appendChild(li); }
  $("plan-canvas").style.height = chainHeight(n) + "px";
  scheduleDraw();
  schedulePrintChart("plan", () => {
    $("plan-svg").innerHTML = printChart("timing_diagram_svg", plan.diagram, 600, Math.round(0.8 * chainHeight(n)));
  });
}

// ---- workers ----
// Every worker is a classic worker built from a single Blob (the glue, then www/worker.js) and
// given the compiled module. Each lane owns one and runs one job at a time.
let workerUrl = null;

/** The one Blob URL every worker of the page is made from. */
function workerBlobUrl() {
  if (!workerUrl) {
    const source = [$("glue-source").textContent, "\n;\n", $("worker-source").textContent];
    workerUrl = URL.createObjectURL(new Blob(source, { type: "text/javascript" }));
  }
  return workerUrl;
}

// A worker that cannot even start would fail again at once: a lane gives up after this many
// crashes in a row without a result.
const MAX_CRASHES = 3;

/** A worker lane. With `replaceRunning` a new job replaces the running one; otherwise it is
 * refused while one runs. Cancel terminates the worker and starts a fresh one; so does a
 * crash (a panic inside it, or a worker that cannot start), reported to `onCrash`. */
function workerLane({ onCrash, onUnavailable = onCrash, replaceRunning = false }) {
  let laneWorker = null;
  let laneJob = null;         // { id, resolve, reject, onProgress }
  let counter = 0;
  let crashes = 0;
  let unavailable = false;
  const stop = () => { if (laneWorker) laneWorker.terminate(); laneWorker = null; };
  const take = () => { const taken = laneJob; laneJob = null; return taken; };
  const crashed = (message) => {
    const failed = take();
    stop();
    crashes += 1;
    if (crashes > MAX_CRASHES) { unavailable = true; onUnavailable(message); }
    else { start(); onCrash(message); }
    if (failed) failed.reject(Object.assign(new Error(message), { crashed: true }));
  };
  function start() {
    laneWorker = new Worker(workerBlobUrl());
    laneWorker.onmessage = (event) => {
      const m = event.data;
      if (m.type === "crashed" && (m.id === undefined || (laneJob && m.id === laneJob.id))) { crashed(m.message); return; }
      if (!laneJob || m.id !== laneJob.id) return;
      if (m.type === "progress") laneJob.onProgress(m);
      else if (m.type === "result") { crashes = 0; take().resolve(m.result); }
      else if (m.type === "error") take().reject(new Error(m.message));
    };
    laneWorker.onerror = (event) => { event.preventDefault(); crashed(event.message || "the worker stopped"); };
    laneWorker.postMessage({ type: "init", module: wasmModule });
  }
  return {
    /** Runs a job of worker.js; resolves with the export's Outcome. */
    run(name, args, onProgress) {
      if (unavailable) return Promise.reject(new Error("the engine cannot run in a worker in this browser"));
      if (laneJob && !replaceRunning) return Promise.reject(new Error("a job is already running"));
      if (laneJob) this.cancel();
      if (!laneWorker) start();
      return new Promise((resolve, reject) => {
        laneJob = { id: ++counter, resolve, reject, onProgress: onProgress || (() => {}) };
        laneWorker.postMessage({ type: "run", id: laneJob.id, job: name, args: args || {} });
      });
    },
    cancel() {
      const cancelled = take();
      stop();
      if (!unavailable) start();
      if (cancelled) cancelled.reject(Object.assign(new Error("cancelled"), { cancelled: true }));
    },
    /** Starts the worker ahead of the first job. */
    warm() { if (!laneWorker && !unavailable) start(); },
    get busy() { return laneJob !== null; },
    get unavailable() { return unavailable; },
  };
}

// The verifications' lane: a second run is refused while one runs.
let simulation = null;

function workerJob(name, args, onProgress) {
  return simulation.run(name, args, onProgress);
}

function cancelWorkerJob() {
  simulation.cancel();
}

// ---- verification view ----
let stageRun = null;        // { view, designJson, ms } of the last stage verification
let chainRun = null;        // { view, designJson, ms, stages } of the last chain run
let assumptionsDesignJson = null;  // the design of the run whose assumptions are shown
// Bumped when a new or opened design clears every result: a job started before must not
// report into the new design's page.
let resultsEpoch = 0;
let elapsedTimer = null;

function setRunning(text) {
  const running = text != null;
  $("verify-run").disabled = running || simulation.unavailable;
  $("chain-run").disabled = running || simulation.unavailable;
  $("plan-run").disabled = running || simulation.unavailable;
  $("verify-progress").hidden = !running;
  clearInterval(elapsedTimer);
  if (running) {
    $("verify-status").textContent = "";
    $("verify-status").className = "status";
    $("verify-phase").textContent = text;
    $("verify-bar").removeAttribute("value");
  }
}

function showStatus(text, kind) {
  $("verify-status").textContent = text;
  $("verify-status").className = "status" + (kind ? " " + kind : "");
}

/** The design the results show, with its values, or null when there is none. */
function designForSimulation() {
  return lastView ? lastView.design_json : null;
}

async function runJob(name, args, label, onProgress) {
  setRunning(label);
  const started = performance.now();
  const epoch = resultsEpoch;
  try {
    const outcome = await workerJob(name, args, onProgress);
    if (epoch !== resultsEpoch) return null;
    return { outcome, ms: performance.now() - started };
  } catch (error) {
    if (simulation.unavailable) { /* onUnavailable said why */ }
    else if (epoch !== resultsEpoch) showStatus("Stopped: the run was for the previous design.");
    else if (error.cancelled) showStatus("Cancelled; any results shown are from earlier runs.");
    else if (error.crashed) showStatus("The simulation engine failed: " + error.message + ". It was restarted; try again or change the design.", "error");
    else showStatus("The simulation could not run: " + error.message, "error");
    return null;
  } finally {
    setRunning(null);
  }
}

function outcomeProblem(outcome) {
  if (outcome.status === "invalid") return outcome.errors.map(e => `${e.path}: ${e.message}`).join("; ");
  if (outcome.status === "failed") return outcome.message;
  return null;
}

async function verifyStage() {
  const design = designForSimulation();
  if (!design) { showStatus("There is no valid design to simulate yet.", "error"); return; }
  const options = $("verify-measure").checked ? null : JSON.stringify({ measure: false });
  let progressCalls = 0;
  const onProgress = (step) => {
    progressCalls += 1;
    const bar = $("verify-bar");
    bar.max = step.total_runs;
    bar.value = step.done_runs;
    $("verify-phase").textContent = `${step.phase}: run ${step.done_runs + 1} of at most ${step.total_runs}`;
  };
  const done = await runJob("verify_design", { design, options }, "starting…", onProgress);
  document.body.dataset.verifyProgressCalls = String(progressCalls);
  if (!done) return;
  const problem = outcomeProblem(done.outcome);
  if (problem) { showStatus("The verification could not run: " + problem, "error"); return; }
  stageRun = { view: done.outcome, designJson: design, ms: done.ms };
  document.body.dataset.lastVerifyMs = done.ms.toFixed(0);
  showStatus("");
  renderStageRun();
}

async function verifyChain() {
  const design = designForSimulation();
  if (!design) { showStatus("There is no valid design to simulate yet.", "error"); return; }
  const stages = Number($("chain-stages").value);
  if (!Number.isInteger(stages) || stages < 1 || stages > 10) {
    showStatus("The chain needs a whole number of stages from 1 to 10.", "error");
    $("chain-stages").classList.add("invalid");
    return;
  }
  $("chain-stages").classList.remove("invalid");
  const edges = 2 ** stages;
  const started = performance.now();
  const label = () => `ripple chain of ${stages}, ${edges} edges: running for ${((performance.now() - started) / 1000).toFixed(0)} s`;
  const run = runJob("verify_chain_design", { design, stages, edges }, label());
  elapsedTimer = setInterval(() => { $("verify-phase").textContent = label(); }, 1000);
  const done = await run;
  if (!done) return;
  const problem = outcomeProblem(done.outcome);
  if (problem) { showStatus("The chain verification could not run: " + problem, "error"); return; }
  chainRun = { view: done.outcome, designJson: design, ms: done.ms, stages };
  document.body.dataset.lastChainMs = done.ms.toFixed(0);
  showStatus("");
  renderChainRun();
}

async function verifyPlanned() {
  const design = designForSimulation();
  const plan = planShown;
  if (!design || !plan) { showStatus("Enter a divide ratio N and let the plan compute first.", "error"); return; }
  const started = performance.now();
  const label = () => `planned chain, divide by ${plan.divide_by} (${plan.stage_count} stages, ${plan.divide_by} edges): running for ${((performance.now() - started) / 1000).toFixed(0)} s`;
  const run = runJob("verify_planned_chain_design", { design }, label());
  elapsedTimer = setInterval(() => { $("verify-phase").textContent = label(); }, 1000);
  const done = await run;
  if (!done) return;
  const problem = outcomeProblem(done.outcome);
  if (problem) { showStatus("The planned chain could not be verified: " + problem, "error"); return; }
  const v = done.outcome;
  chainRun = { view: v, designJson: design, ms: done.ms, stages: v.stage_count, planned: v };
  document.body.dataset.lastPlannedStatus = "ok";
  document.body.dataset.lastChainMs = done.ms.toFixed(0);
  showStatus("");
  renderChainRun();
}

/** The counts after each edge; a long run shows its first edges and its last eight. */
function countsInto(el, check, limit) {
  el.textContent = "";
  const n = check.observed.length;
  const tail = 8;
  const shown = n > limit ? [...Array(limit - tail).keys(), null, ...Array.from({ length: tail }, (_, i) => n - tail + i)] : [...Array(n).keys()];
  for (const k of shown) {
    if (k === null) { el.append(`… (${n} edges in all) … `); continue; }
    const count = check.observed[k];
    const span = document.createElement("span");
    span.textContent = count == null ? "?" : String(count);
    if (count !== check.expected[k]) { span.className = "wrong"; span.title = `after edge ${k + 1}: expected ${check.expected[k]}`; }
    el.append(span, " ");
  }
  // The first wrong count is always shown, even deep inside a long run.
  const k = check.first_error;
  if (k != null && n > limit && k >= limit - tail && k < n - tail) {
    el.append(`first wrong count after edge ${k + 1}: ${check.observed[k] == null ? "?" : check.observed[k]} (expected ${check.expected[k]})`);
  }
}

function checkVerdict(el, check, what) {
  const k = check.first_error;
  el.className = "verdict " + (check.correct ? "pass" : "fail");
  if (check.correct) {
    el.textContent = `PASS — ${what} counted correctly after every one of the ${check.edges} input edges.`;
  } else if (k === 0 && check.initial !== 0) {
    el.textContent = `FAIL — ${what} did not start at count 0 (read ${check.initial == null ? "undecided" : check.initial}).`;
  } else {
    const got = check.observed[k];
    el.textContent = `FAIL — after edge ${k + 1} the count should be ${check.expected[k]} but was ${got == null ? "undecided (a stage between its states)" : got}.`;
  }
}

function engineLine(stats, ms, pulse, sign) {
  const perStep = stats.newton_iterations / Math.max(1, stats.accepted_steps);
  // The pulse is an NPN-frame step down by its amplitude; a PNP stage's real input steps up.
  return `Input: square wave from 0 V to ${si(-pulse.amplitude_v * sign, "V")} at ${si(pulse.rate_hz, "Hz")}, ${si(Math.min(pulse.edge_s, 0.1 / pulse.rate_hz), "s")} edges. ` +
    `Engine: ${stats.accepted_steps} time steps (${stats.rejected_steps} rejected), ${perStep.toFixed(2)} Newton iterations per step; ${(ms / 1000).toFixed(2)} s in this browser.`;
}

function searchResult(m) {
  const unit = m.unit;
  const o = m.outcome;
  if (o.kind === "bracketed") return { measured: si(o.passing, unit), bracket: `passes at ${si(o.passing, unit)}, fails at ${si(o.failing, unit)}` };
  if (o.kind === "fails_at_best_bound") return { measured: "—", bracket: "fails even at the most favourable bound" };
  return { measured: "beyond the search", bracket: "passes at the far bound" };
}

function renderStageRun() {
  if (!stageRun) return;
  const { view, ms } = stageRun;
  const v = view.verification;
  $("stage-result").hidden = false;
  checkVerdict($("stage-verdict"), v.nominal, "the stage");
  countsInto($("stage-counts"), v.nominal, 64);
  $("stage-engine").textContent = engineLine(v.nominal.statistics, ms, v.pulse, view.polarity_sign);
  const searches = [v.sensitivity, v.max_rate].filter(Boolean);
  const measured = $("stage-measured");
  measured.hidden = searches.length === 0;
  table(measured, ["Measured by bisection", "Estimate", "Measured", "Searched", "Runs"],
    searches.map(m => {
      const r = searchResult(m);
      return [
        { text: m.quantity.charAt(0).toUpperCase() + m.quantity.slice(1), sub: m.conditions },
        { text: m.estimate == null ? "—" : si(m.estimate, m.unit), className: "num" },
        { text: r.measured, className: "num strong", sub: r.bracket },
        { text: `${si(m.search_low, m.unit)} – ${si(m.search_high, m.unit)}`, sub: "resolution " + m.resolution_text },
        { text: `${m.runs} runs`, className: "num", sub: `of ${m.edges_per_run} edges each` },
      ];
    }));
  const t = v.timings;
  const timings = $("stage-timings");
  timings.hidden = !t;
  if (t) {
    const s = (x) => x == null ? "—" : si(x, "s");
    table(timings, ["Switching, measured on the first two edges", "Measured", "Estimate (charge control)"], [
      ["Input edge to output half swing", { text: s(t.toggle_delay_s), className: "num" }, "—"],
      ["Storage (input edge to 10 % of the collector rise)", { text: s(t.storage_s), className: "num" }, { text: s(v.estimated_storage_s) + " (storage alone)", className: "num" }],
      ["Collector fall 90–10 % (turn-on)", { text: s(t.collector_fall_s), className: "num" }, { text: s(v.estimated_current_rise_s) + " (current rise)", className: "num" }],
      ["Collector rise 10–90 % (turn-off)", { text: s(t.collector_rise_s), className: "num" }, { text: s(v.estimated_collector_rise_s) + " (2.2·RC·(C1 + Cob + Ct))", className: "num", sub: `the current falls in ${s(v.estimated_current_fall_s)}; RC and the capacitors set the voltage edge` }],
      ["Output period · duty cycle", { text: t.output_period_s == null ? "—" : `${s(t.output_period_s)} · ${(100 * t.output_duty).toFixed(1)} %`, className: "num" }, { text: `${si(2 / v.pulse.rate_hz, "s")} · 50 % (two input periods)`, className: "num" }],
    ]);
  }
  showAssumptions(view.assumptions, stageRun.designJson);
  drawCharts();
  $("stage-svg").innerHTML = printChart("waveform_chart_svg", view.chart, 600, 400);
  $("verify").classList.add("has-results");
  markStale();
}

function renderChainRun() {
  if (!chainRun) return;
  const { view, ms, stages } = chainRun;
  $("chain-result").hidden = false;
  const planned = chainRun.planned;
  $("chain-title").textContent = planned
    ? `Planned chain: divide by ${planned.divide_by}, ${stages} stages (${planned.method_name}) — simulated count against the plan's count table`
    : `Ripple chain of ${stages} stage${stages === 1 ? "" : "s"} (divide by ${2 ** stages})`;
  checkVerdict($("chain-verdict"), view.check, planned ? `the planned divide-by-${planned.divide_by} chain` : `a ripple chain of ${stages}`);
  countsInto($("chain-counts"), view.check, 64);
  $("chain-engine").textContent = engineLine(view.check.statistics, ms, view.pulse, view.polarity_sign);
  $("chain-canvas").style.height = chainHeight(stages) + "px";
  showAssumptions(view.assumptions, chainRun.designJson);
  drawCharts();
  $("chain-svg").innerHTML = printChart("timing_diagram_svg", view.diagram, 600, Math.round(0.85 * chainHeight(stages)));
  $("verify").classList.add("has-results");
  markStale();
}

function chainHeight(stages) {
  return 70 + 46 * (stages + 1);
}

function showAssumptions(list, designJson) {
  assumptionsDesignJson = designJson;
  $("verify-assumptions-box").hidden = false;
  const ul = $("verify-assumptions");
  ul.textContent = "";
  for (const a of list) { const li = document.createElement("li"); li.textContent = a; ul.appendChild(li); }
}

/** Canvases at CSS size × devicePixelRatio; plotters draws with the same factor. */
// What each canvas last showed: its data object and drawing size. A frame redraws only the
// charts whose data or size changed (an edit replaces the plan's diagram, not the
// verification's waveforms), so the frame after an edit draws one chart instead of all.
// A canvas that loses its pixels (the browser may drop a 2D context) is drawn afresh.
let drawn = new WeakMap();
function drawOn(canvas, exportName, data) {
  // The content box: the border is not part of the drawing surface.
  const width = canvas.clientWidth;
  const height = canvas.clientHeight;
  if (width === 0 || height === 0 || !engine) return;
  const ratio = window.devicePixelRatio || 1;
  const last = drawn.get(canvas);
  if (last && last.data === data && last.width === width && last.height === height && last.ratio === ratio) return;
  if (!canvas.dataset.watched) {
    canvas.dataset.watched = "true";
    canvas.addEventListener("contextrestored", () => { drawn.delete(canvas); scheduleDraw(); });
  }
  canvas.width = Math.round(width * ratio);
  canvas.height = Math.round(height * ratio);
  try {
    if (callNow(exportName, canvas, data, ratio) === NOT_RUN) drawn.delete(canvas);
    else drawn.set(canvas, { data, width, height, ratio });
  } catch (error) {
    drawn.delete(canvas);
    showStatus("Cannot draw the chart: " + error.message, "error");
  }
}

/** The chart as SVG for the printout (vector, with selectable text). */
// The print-only (SVG) copies of charts that change on every edit are built just after the
// next frame, off the edit's path to the screen; printing builds any still pending first.
const printJobs = new Map();
function schedulePrintChart(key, job) {
  const first = printJobs.size === 0;
  printJobs.set(key, job);
  if (first) requestAnimationFrame(() => setTimeout(flushPrintCharts, 0));
}
function flushPrintCharts() {
  const jobs = [...printJobs.values()];
  printJobs.clear();
  for (const job of jobs) job();
}
window.addEventListener("beforeprint", flushPrintCharts);

function printChart(exportName, data, width, height) {
  try {
    const svg = callNow(exportName, data, width, height);
    return svg === NOT_RUN ? "" : svg || "";
  } catch (error) {
    showStatus("Cannot draw the chart for print: " + error.message, "error");
    return "";
  }
}

// Charts are drawn in the next animation frame, once the browser lays the page out anyway,
// so reading the canvas sizes does not force an extra layout in the middle of rendering.
let drawPending = false;
function scheduleDraw() {
  if (drawPending) return;
  drawPending = true;
  requestAnimationFrame(() => { drawPending = false; drawCharts(); });
}

function drawCharts() {
  const started = performance.now();
  if (stageRun && !$("stage-result").hidden) drawOn($("stage-canvas"), "draw_waveform_chart", stageRun.view.chart);
  if (chainRun && !$("chain-result").hidden) drawOn($("chain-canvas"), "draw_timing_diagram", chainRun.view.diagram);
  if (planShown && !$("plan").hidden) drawOn($("plan-canvas"), "draw_timing_diagram", planShown.diagram);
  drawToleranceCharts();
  document.body.dataset.lastDrawMs = (performance.now() - started).toFixed(1);
}

/** Marks each run made for another version of the design; print leaves those out. */
function markStale() {
  const design = designForSimulation();
  const staleStage = Boolean(stageRun && stageRun.designJson !== design);
  const staleChain = Boolean(chainRun && chainRun.designJson !== design);
  $("stage-result").classList.toggle("stale-run", staleStage);
  $("chain-result").classList.toggle("stale-run", staleChain);
  $("verify-assumptions-box").classList.toggle("stale-run", assumptionsDesignJson !== design);
  $("verify-stale").hidden = !(staleStage || staleChain);
}

function initVerification() {
  $("verify-run").addEventListener("click", verifyStage);
  $("chain-run").addEventListener("click", verifyChain);
  $("plan-run").addEventListener("click", verifyPlanned);
  $("verify-cancel").addEventListener("click", cancelWorkerJob);
  initTolerance();
  let resizeTimer = null;
  window.addEventListener("resize", () => { clearTimeout(resizeTimer); resizeTimer = setTimeout(drawCharts, 150); });
  simulation = workerLane({
    onCrash: (message) => banner("The simulation engine failed internally (" + message + ") and was restarted; your design is unchanged. Please report what you ran.", "error"),
    onUnavailable: (message) => {
      setRunning(null);
      showStatus("The simulation engine cannot run in this browser (" + message + "); the estimates above still stand.", "error");
    },
  });
  simulation.warm();
}

// ---- tolerance views ----
const TEMPERATURE_POINTS = 41;
let overviewLane = null;    // the worst case and the temperature sweep, after every edit
let yieldLane = null;       // Monte Carlo runs, from the Run button
let toleranceShown = null;  // { worst, temperature, designJson, chain } on screen
let yieldRun = null;        // { view, designJson, ms } of the last Monte Carlo run
let yieldTimer = null;

/** What the tolerance exports analyse: the planned chain, or one stage when there is none. */
function toleranceChain(view) {
  if (!view.chain) return { kind: "stages", stages: 1 };
  if (view.chain.status !== "ok") return null;
  return { kind: "divide", modulus: view.chain.divide_by, method: view.chain.chosen };
}

function toleranceStatus(text, kind) {
  $("tolerance-status").textContent = text;
  $("tolerance-status").className = "status" + (kind ? " " + kind : "");
}

async function computeTolerance() {
  if (!lastView) return;
  const design = designForSimulation();
  const chain = toleranceChain(lastView);
  if (!chain) { toleranceStatus("The chain cannot be planned, so its tolerances are not computed; the values below are from the last plan.", "error"); return; }
  document.body.dataset.tolerance = "busy";
  toleranceStatus("Computing the worst case and the temperature sweep…");
  const started = performance.now();
  let result;
  const epoch = resultsEpoch;
  try {
    result = await overviewLane.run("tolerance_overview", { design, chain: JSON.stringify(chain), points: TEMPERATURE_POINTS });
  } catch (error) {
    if (error.cancelled || epoch !== resultsEpoch) return;  // a newer design replaced it
    toleranceStatus("The tolerances could not be computed: " + error.message, "error");
    document.body.dataset.tolerance = "failed";
    return;
  }
  if (epoch !== resultsEpoch) return;
  const problem = outcomeProblem(result.worst_case) || outcomeProblem(result.temperature);
  if (problem) {
    toleranceStatus("The tolerances could not be computed: " + problem, "error");
    document.body.dataset.tolerance = "failed";
    return;
  }
  document.body.dataset.lastToleranceMs = (performance.now() - started).toFixed(0);
  toleranceShown = { worst: result.worst_case, temperature: result.temperature, designJson: design, chain };
  toleranceStatus("");
  renderTolerance();
  document.body.dataset.tolerance = "ready";
}

function stageName(k) {
  return `stage ${k + 1}`;
}

/** The worst corner in a line: its temperature and its first few off-nominal settings. */
function cornerText(m) {
  const shown = m.worst_corner.filter(c => !/^temperature/.test(c));
  const first = shown.slice(0, 3).join(", ");
  return `worst corner at ${m.temperature_c.toFixed(0)} °C` + (first ? `: ${first}` : "") +
    (shown.length > 3 ? ` and ${shown.length - 3} more` : "");
}

function renderTolerance() {
  const { worst, temperature } = toleranceShown;
  const wc = worst.worst_case;
  $("tolerance-chain").textContent = wc.stage_count === 1 ? "One stage with the design's own loads."
    : `${worst.chain}; its ${wc.stage_count} stages carry ${wc.distinct_stages === 1 ? "the same loads" : wc.distinct_stages + " different sets of loads"}, each set analysed once.`;
  const verdict = $("worst-verdict");
  verdict.className = "verdict " + (wc.all_pass ? "pass" : "fail");
  const failing = wc.margins.filter(m => !m.pass).map(m => m.title);
  verdict.textContent = wc.all_pass ? "Every margin of every stage passes at its worst case." : `At worst case the chain fails: ${failing.join("; ")}.`;
  table($("worst-table"), ["Margin (headroom to the limit)", "At nominal", "At worst", "Required", "Result", "Limiting stage", "Limiting parameter"],
    wc.margins.map(m => {
      const others = m.same_stages.filter(k => k !== m.limiting_stage);
      return [
        m.title,
        { text: marginText(m.nominal, m.unit), className: "num" },
        { text: marginText(m.worst, m.unit), className: "num" },
        { text: "≥ " + marginText(m.required, m.unit), className: "num" },
        { text: m.pass ? "PASS" : "FAIL", className: m.pass ? "pass" : "fail" },
        { text: stageName(m.limiting_stage), sub: others.length ? `same loads: ${others.map(k => k + 1).join(", ")}` : "" },
        { text: m.limiting_parameter || "—", className: "advice", sub: cornerText(m) },
      ];
    }));
  const t = temperature.sweep.temperatures_c;
  $("temperature-hint").textContent = `${t.length} points from ${t[0]} to ${t[t.length - 1]} °C; worst case over every other parameter at each temperature`;
  drawCharts();
  $("temperature-svg").innerHTML = printChart("temperature_chart_svg", temperature.chart, 680, 540);
  markToleranceStale();
}

function yieldFieldError(id, message) {
  const row = $(id + "-row");
  row.classList.toggle("invalid", Boolean(message));
  row.querySelector(".error")?.remove();
  if (message) {
    const note = document.createElement("div");
    note.className = "error";
    note.textContent = message;
    row.appendChild(note);
  }
}

function yieldStatus(text, kind) {
  $("yield-status").textContent = text;
  $("yield-status").className = "status" + (kind ? " " + kind : "");
}

/** The run's options from the controls; whole numbers are checked here, ranges by the core. */
function yieldOptions() {
  let ok = true;
  const whole = (id, what) => {
    const text = $(id).value.trim();
    if (/^\d+$/.test(text)) { yieldFieldError(id, ""); return Number(text); }
    yieldFieldError(id, `enter the ${what} as a whole number (digits only)`);
    ok = false;
    return null;
  };
  const trials = whole("yield-trials", "number of trials");
  const seed = whole("yield-seed", "seed");
  if (!ok) return null;
  return { trials, seed, distribution: $("yield-distribution").value, confidence: Number($("yield-confidence").value) };
}

function setYieldRunning(text) {
  const running = text != null;
  $("yield-run").disabled = running;
  $("yield-progress").hidden = !running;
  clearInterval(yieldTimer);
  if (running) { $("yield-phase").textContent = text; $("yield-bar").removeAttribute("value"); }
}

async function runYield() {
  const design = designForSimulation();
  const chain = lastView && toleranceChain(lastView);
  if (!design || !chain) { yieldStatus("There is no valid design and chain to run yet.", "error"); return; }
  const options = yieldOptions();
  if (!options) { yieldStatus("Correct the marked entries to run.", "error"); return; }
  yieldStatus("");
  const started = performance.now();
  let done = 0;
  const label = () => `trial ${done} of ${options.trials}: running for ${((performance.now() - started) / 1000).toFixed(0)} s`;
  const onProgress = (step) => {
    done = step.done_trials;
    const bar = $("yield-bar");
    bar.max = step.trials;
    bar.value = step.done_trials;
    $("yield-phase").textContent = label();
    document.body.dataset.yieldProgress = String(step.done_trials);
  };
  document.body.dataset.yield = "busy";
  document.body.dataset.yieldProgress = "";
  setYieldRunning(label());
  yieldTimer = setInterval(() => { $("yield-phase").textContent = label(); }, 500);
  let outcome;
  const epoch = resultsEpoch;
  try {
    outcome = await yieldLane.run("monte_carlo_yield_design", { design, chain: JSON.stringify(chain), options: JSON.stringify(options) }, onProgress);
  } catch (error) {
    setYieldRunning(null);
    document.body.dataset.yield = error.cancelled ? "cancelled" : "failed";
    if (epoch !== resultsEpoch) yieldStatus("Stopped: the run was for the previous design.");
    else if (error.cancelled) yieldStatus("Cancelled; any result shown is from an earlier run.");
    else yieldStatus("The Monte Carlo run failed: " + error.message + (error.crashed ? ". Its worker was replaced; try again." : ""), "error");
    return;
  }
  setYieldRunning(null);
  if (epoch !== resultsEpoch) return;
  const ms = performance.now() - started;
  if (outcome.status === "invalid") {
    const rest = [];
    for (const e of outcome.errors) {
      const id = { "options.trials": "yield-trials", "options.seed": "yield-seed" }[e.path];
      if (id) yieldFieldError(id, e.message); else rest.push(`${e.path}: ${e.message}`);
    }
    yieldStatus(rest.length ? "The run could not start: " + rest.join("; ") : "Correct the marked entries to run.", "error");
    document.body.dataset.yield = "invalid";
    return;
  }
  if (outcome.status !== "ok") { yieldStatus("The Monte Carlo run failed: " + outcomeProblem(outcome), "error"); document.body.dataset.yield = "failed"; return; }
  yieldRun = { view: outcome, designJson: design, ms };
  yieldStatus("");
  renderYield();
  document.body.dataset.yield = "ready";
}

function percent(fraction, digits = 2) {
  return fraction == null || !isFinite(fraction) ? "—" : (100 * fraction).toFixed(digits) + " %";
}

function renderYield() {
  const { view, ms } = yieldRun;
  const r = view.report;
  const o = r.options;
  $("yield-result").hidden = false;
  const verdict = $("yield-verdict");
  verdict.className = "verdict " + (r.passed === o.trials ? "pass" : "fail");
  verdict.textContent = `Yield ${percent(r.yield_fraction)} — ${r.passed} of ${o.trials} builds pass every DC margin of every stage.`;
  const f = r.most_frequent_failure;
  table($("yield-summary"), ["Quantity", "Value"], [
    ["Chain", view.chain],
    ["Yield (builds passing / trials)", { text: `${percent(r.yield_fraction)} (${r.passed} / ${o.trials})`, className: "num strong" }],
    [`Wilson interval at ${percent(o.confidence, 1)}`, { text: `${percent(r.interval.low)} … ${percent(r.interval.high)}`, className: "num" }],
    [`Lower bound at ${percent(o.confidence, 1)} (one-sided)`, { text: percent(r.lower_bound), className: "num" }],
    ["Trials for an interval of ±" + percent(o.half_width, 1), { text: r.trials_for_half_width == null ? "—" : String(r.trials_for_half_width), className: "num" }],
    ["Parts drawn", o.distribution === "normal" ? "normal, tolerance at 3σ (truncated at ±3σ)" : "uniform within tolerance"],
    ["Seed · digest of every margin of every trial", { text: `${o.seed} · ${r.digest}`, className: "num digest" }],
    ["Most frequent failure", f ? `${r.margins.find(m => m.kind === f.kind)?.title || f.kind} in ${stageName(f.stage)}: ${f.failures} trials (${percent(f.fraction)})` : "none"],
    ["Run time in this browser", { text: `${(ms / 1000).toFixed(2)} s`, className: "num" }],
  ]);
  const stages = r.stage_count;
  table($("yield-failures"), ["Margin", "Required", "Nominal", "Lowest · mean", "Failing trials"].concat(stages > 1 ? Array.from({ length: stages }, (_, k) => `St. ${k + 1}`) : []),
    r.margins.map(m => [
      m.title,
      { text: "≥ " + marginText(m.required, m.unit), className: "num" },
      { text: marginText(m.nominal, m.unit), className: "num" },
      { text: `${marginText(m.min, m.unit)} · ${marginText(m.mean, m.unit)}`, className: "num" },
      { text: String(m.failing_trials), className: "num" + (m.failing_trials ? " fail" : "") },
    ].concat(stages > 1 ? m.failures_per_stage.map(n => ({ text: String(n), className: "num" })) : [])));
  const notes = $("yield-notes");
  notes.textContent = "";
  for (const n of r.notes) { const li = document.createElement("li"); li.textContent = n; notes.appendChild(li); }
  drawCharts();
  $("yield-svg").innerHTML = printChart("yield_histograms_svg", view.histograms, 680, 540);
  $("tolerance").classList.add("has-yield");
  markToleranceStale();
}

// ---- values chosen for a yield ----
let aimRun = null;          // { view, designJson } of the last yield-aimed synthesis
let aimLane = null;

function aimStatus(text, kind) {
  const box = $("aim-status");
  box.textContent = text;
  box.className = "status" + (kind ? " " + kind : "");
}

async function runAim() {
  const design = designForSimulation();
  const chain = lastView && toleranceChain(lastView);
  if (!design || !chain) { aimStatus("There is no valid design and chain to aim at yet.", "error"); return; }
  const options = yieldOptions();
  yieldFieldError("aim-yield", "");
  const text = $("aim-yield").value.trim();
  const percentAsked = Number(text);
  if (!/^\d+(\.\d+)?$/.test(text) || !(percentAsked > 0 && percentAsked < 100)) {
    yieldFieldError("aim-yield", "must be a percentage above 0 and below 100, such as 99 or 99.9");
  }
  if (!options || $("aim-yield-row").classList.contains("invalid")) { aimStatus("Correct the marked entries to run.", "error"); return; }
  const goal = { min_yield: percentAsked / 100, confidence: options.confidence, shape: chain, trials: options.trials, seed: options.seed, distribution: options.distribution };
  aimStatus("");
  $("aim-run").disabled = true;
  $("aim-progress").hidden = false;
  $("aim-bar").removeAttribute("value");
  $("aim-phase").textContent = "synthesis and Monte Carlo of the first design aim…";
  document.body.dataset.aim = "busy";
  const onProgress = (step) => {
    $("aim-bar").max = step.candidates;
    $("aim-bar").value = step.done_candidates;
    $("aim-phase").textContent = `${step.done_candidates} of at most ${step.candidates} design aims tried`;
  };
  let outcome;
  const epoch = resultsEpoch;
  try {
    outcome = await aimLane.run("synthesise_for_yield_design", { design, goal: JSON.stringify(goal) }, onProgress);
  } catch (error) {
    document.body.dataset.aim = error.cancelled ? "cancelled" : "failed";
    if (epoch !== resultsEpoch) { aimStatus("Stopped: the run was for the previous design."); return; }
    aimStatus(error.cancelled ? "Cancelled; the design is unchanged." : "The run failed: " + error.message + (error.crashed ? ". Its worker was replaced; try again." : ""), error.cancelled ? "" : "error");
    return;
  } finally {
    $("aim-run").disabled = false;
    $("aim-progress").hidden = true;
  }
  if (epoch !== resultsEpoch) return;
  if (outcome.status === "invalid") {
    const ids = { "options.min_yield": "aim-yield", "options.trials": "yield-trials", "options.seed": "yield-seed" };
    const rest = [];
    for (const e of outcome.errors) {
      if (ids[e.path]) yieldFieldError(ids[e.path], e.message); else rest.push(`${e.path}: ${e.message}`);
    }
    aimStatus(rest.length ? "The run could not start: " + rest.join("; ") : "Correct the marked entries to run.", "error");
    document.body.dataset.aim = "invalid";
    return;
  }
  if (outcome.status !== "ok") { aimStatus("The run failed: " + outcomeProblem(outcome), "error"); document.body.dataset.aim = "failed"; return; }
  aimRun = { view: outcome, designJson: design };
  renderAim();
  document.body.dataset.aim = outcome.result.met ? "met" : "not-met";
}

function renderAim() {
  const r = aimRun.view.result;
  $("aim-result").hidden = false;
  const verdict = $("aim-verdict");
  verdict.className = "verdict " + (r.met ? "pass" : "fail");
  verdict.textContent = r.met
    ? `Reached: at least ${percent(r.goal.min_yield)} of builds pass with ${percent(r.goal.confidence, 1)} confidence (${r.candidates[r.chosen].change}; ${r.trials} trials, seed ${r.goal.seed}, digest ${r.report.digest}).`
    : `NOT reached: no design aim tried shows ${percent(r.goal.min_yield)} at ${percent(r.goal.confidence, 1)} confidence; the best is offered below.`;
  table($("aim-candidates"), ["Design aims", "Builds passing", "Yield", "Lower bound", "Worst case", "Goal"],
    r.candidates.map((c, k) => [
      { text: c.change + (k === r.chosen ? " — chosen" : ""), className: k === r.chosen ? "strong" : "" },
      { text: c.problem ? "—" : `${c.passed} / ${c.trials}`, className: "num" },
      { text: c.problem ? "—" : percent(c.yield_fraction), className: "num" },
      { text: c.problem ? "—" : percent(c.lower_bound), className: "num" },
      c.problem ? { text: c.problem, className: "fail" } : (c.worst_case_met ? "every margin met" : "some margin fails"),
      { text: c.reaches_goal ? "reached" : "short", className: c.reaches_goal ? "pass" : "fail" },
    ]));
  const list = $("aim-explanation");
  list.textContent = "";
  for (const line of r.explanation) { const li = document.createElement("li"); li.textContent = line; list.appendChild(li); }
  $("aim-use").textContent = r.met ? "Use this design" : "Use the best design found";
  $("tolerance").classList.add("has-aim");
  markToleranceStale();
}

async function useAimedDesign() {
  if (!aimRun) return;
  current = JSON.parse(aimRun.view.analysis.design_json);
  // With values chosen automatically the same synthesis at the new aims gives these values.
  if ($("auto-values").checked) current.values = null;
  showInForm(current);
  syncValueLock();
  banner("The design now uses the aims and values chosen for the yield; run the Monte Carlo to see its histograms.");
  await compute();
}

/** Marks the tolerance results made for another version of the design; print leaves those
 * out. Values chosen for a yield stay current once their design is used. */
function markToleranceStale() {
  const design = designForSimulation();
  $("tolerance").classList.toggle("stale-overview", Boolean(toleranceShown && toleranceShown.designJson !== design));
  const staleYield = Boolean(yieldRun && yieldRun.designJson !== design);
  $("yield-result").classList.toggle("stale-run", staleYield);
  $("yield-stale").hidden = !staleYield;
  const staleAim = Boolean(aimRun && aimRun.designJson !== design && aimRun.view.analysis.design_json !== design);
  $("aim-result").classList.toggle("stale-run", staleAim);
  $("aim-stale").hidden = !staleAim;
}

function drawToleranceCharts() {
  if (toleranceShown) drawOn($("temperature-canvas"), "draw_temperature_chart", toleranceShown.temperature.chart);
  if (yieldRun && !$("yield-result").hidden) drawOn($("yield-canvas"), "draw_yield_histograms", yieldRun.view.histograms);
}

function initTolerance() {
  const crashed = (message) => banner("A tolerance worker failed internally (" + message + ") and was replaced; your design is unchanged. Please report what you ran.", "error");
  // A newer design replaces a running overview; Run is disabled while Monte Carlo runs.
  const unavailable = (message) => toleranceStatus("The tolerance runs cannot work in this browser (" + message + "); the margins above still stand.", "error");
  overviewLane = workerLane({ onCrash: crashed, onUnavailable: unavailable, replaceRunning: true });
  yieldLane = workerLane({ onCrash: crashed, onUnavailable: unavailable, replaceRunning: true });
  $("yield-run").addEventListener("click", runYield);
  aimLane = workerLane({ onCrash: crashed, onUnavailable: unavailable, replaceRunning: true });
  $("aim-run").addEventListener("click", runAim);
  $("aim-cancel").addEventListener("click", () => aimLane.cancel());
  $("aim-use").addEventListener("click", useAimedDesign);
  $("aim-yield").addEventListener("input", () => yieldFieldError("aim-yield", ""));
  $("yield-cancel").addEventListener("click", () => yieldLane.cancel());
  for (const id of ["yield-trials", "yield-seed"]) $(id).addEventListener("input", () => yieldFieldError(id, ""));
}

// ---- a new or opened design ----
/** Stops every running job and clears every result: a new or opened design starts with none
 * of the last design's verification, tolerances, yield or chosen values, on screen or in print. */
function clearResults() {
  resultsEpoch += 1;
  for (const lane of [simulation, overviewLane, yieldLane, aimLane]) if (lane.busy) lane.cancel();
  stageRun = chainRun = toleranceShown = yieldRun = aimRun = null;
  assumptionsDesignJson = null;
  for (const id of ["stage-result", "chain-result", "verify-assumptions-box", "yield-result", "aim-result",
    "verify-stale", "yield-stale", "aim-stale"]) $(id).hidden = true;
  for (const id of ["stage-verdict", "stage-counts", "stage-engine", "stage-measured", "stage-timings", "stage-svg",
    "chain-verdict", "chain-counts", "chain-engine", "chain-svg", "verify-assumptions",
    "tolerance-chain", "worst-verdict", "worst-table", "temperature-hint", "temperature-svg",
    "yield-verdict", "yield-summary", "yield-failures", "yield-svg", "yield-notes",
    "aim-verdict", "aim-candidates", "aim-explanation"]) $(id).textContent = "";
  for (const id of ["worst-verdict", "stage-verdict", "chain-verdict", "yield-verdict", "aim-verdict"]) $(id).className = "verdict";
  for (const id of ["stage-canvas", "chain-canvas", "temperature-canvas", "yield-canvas"]) $(id).width = 0;
  $("verify").classList.remove("has-results");
  $("tolerance").classList.remove("has-yield", "has-aim", "stale-overview");
  showStatus("");
  toleranceStatus("");
  yieldStatus("");
  aimStatus("");
  for (const key of ["yield", "aim", "tolerance"]) delete document.body.dataset[key];
}

// ---- keeping work ----
function download(name, type, text) {
  const url = URL.createObjectURL(new Blob([text], { type }));
  const a = document.createElement("a");
  a.href = url;
  a.download = name;
  document.body.appendChild(a);
  a.click();
  a.remove();
  setTimeout(() => URL.revokeObjectURL(url), 1000);
}

function fileName(extension) {
  return ((current && current.name) || "design").replace(/[^\w.-]+/g, "-").toLowerCase() + extension;
}

async function openFile(file) {
  const text = await file.text();
  const result = await call("check_design_file", text);
  if (!result) return;
  if (result.status !== "ok") {
    const list = (result.errors || []).map(e => `${e.path}: ${e.message}`).join("; ");
    banner(`Cannot open ${file.name}: ${list}. The current design is unchanged.`, "error");
    return;
  }
  clearResults();
  current = JSON.parse(result.design_json);
  $("auto-values").checked = current.values == null;
  showInForm(current);
  syncValueLock();
  banner(`Opened ${file.name}.`);
  await compute();
}

async function init() {
  try {
    await startEngine();
  } catch (error) {
    banner("The design engine could not start in this browser: " + error.message, "error");
    return;
  }
  $("version").textContent = engine.version();
  archetypeList = await call("archetypes");
  buildForm();
  let restored = false;
  try {
    const saved = localStorage.getItem(STORAGE_KEY);
    if (saved) { current = JSON.parse(saved); restored = true; }
  } catch (_) { current = null; }
  if (!current) current = JSON.parse(engine.demo_design());
  $("auto-values").checked = current.values == null;
  showInForm(current);
  syncValueLock();
  $("new-demo").addEventListener("click", () => {
    clearResults();
    current = JSON.parse(engine.demo_design());
    $("auto-values").checked = true;
    showInForm(current);
    syncValueLock();
    compute();
  });
  $("open-file").addEventListener("change", (event) => { const f = event.target.files[0]; if (f) openFile(f); event.target.value = ""; });
  $("save-file").addEventListener("click", () => download(fileName(".json"), "application/json", JSON.stringify(current, null, 2) + "\n"));
  $("export-csv").addEventListener("click", () => { if (lastView) download(fileName("-parts.csv"), "text/csv", lastView.table_csv); });
  $("print").addEventListener("click", () => window.print());
  initVerification();
  await compute();
  if (restored && !document.querySelector(".field.invalid")) banner("Restored your last design from this browser's storage.");
}

window.flipwright = {
  compute, call, workerJob,
  get current() { return current; },
  get tolerance() { return toleranceShown; },
  get yieldRun() { return yieldRun; },
  get aimRun() { return aimRun; },
  // A job in the Monte Carlo lane (the recovery test runs force_panic there).
  yieldLaneJob: (name, args) => yieldLane.run(name, args || {}),
  // The design the results show, with its values (for the benchmark's native comparison).
  get designJson() { return designForSimulation(); },
};
init();
