// Browser tests of the offline page: Debian's Chromium via playwright-core, opened from file://.
// Any console error, page error, failed request or non-local request fails the test.
import { test, before, after } from "node:test";
import assert from "node:assert/strict";
import { execFileSync } from "node:child_process";
import { existsSync, mkdirSync, writeFileSync, readFileSync } from "node:fs";
import { join, resolve } from "node:path";
import { chromium } from "playwright-core";

const root = resolve(import.meta.dirname, "../..");
const pagePath = process.env.FLIPWRIGHT_PAGE || join(root, "out/flipwright.html");
const hooksPagePath = process.env.FLIPWRIGHT_TEST_PAGE || join(root, "out/flipwright-test-hooks.html");
const shots = join(root, "out/browser-test");
mkdirSync(shots, { recursive: true });

let browser;
before(async () => {
  const executablePath = process.env.CHROMIUM || "/usr/bin/chromium";
  assert.ok(existsSync(executablePath), `Chromium not found at ${executablePath}: install Debian's chromium package`);
  assert.ok(existsSync(pagePath), `page not built: ${pagePath} (run cargo xtask page)`);
  browser = await chromium.launch({
    executablePath,
    args: ["--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run", "--disable-background-networking",
      "--disable-component-update", "--disable-sync"],
  });
});
after(async () => { await browser?.close(); });

/** Opens the page with strict watchers; returns { page, problems }. */
async function open(path = pagePath, context = null) {
  const ctx = context || await browser.newContext({ acceptDownloads: true, viewport: { width: 1280, height: 900 } });
  const page = await ctx.newPage();
  const problems = [];
  page.on("console", (m) => { if (m.type() === "error") problems.push("console: " + m.text()); });
  page.on("pageerror", (e) => problems.push("pageerror: " + e.message));
  page.on("requestfailed", (r) => problems.push("requestfailed: " + r.url()));
  page.on("request", (r) => { if (!/^(file|data|blob):/.test(r.url())) problems.push("network request: " + r.url()); });
  await page.goto("file://" + path);
  await page.waitForSelector("body[data-ready=true]", { timeout: 30000 });
  return { page, problems, context: ctx };
}

async function setField(page, path, value) {
  const id = "#f-" + path.replace(/\W/g, "-");
  await page.fill(id, String(value));
}

async function waitCompute(page) {
  await page.waitForFunction(() => !document.querySelector("#verdict.busy"), null, { timeout: 30000 });
}

/** Share of a canvas's pixels that are not white, and how many are in Q1's trace blue. */
async function canvasInk(page, selector) {
  return page.$eval(selector, (canvas) => {
    const { data } = canvas.getContext("2d").getImageData(0, 0, canvas.width, canvas.height);
    let ink = 0;
    let blue = 0;
    for (let i = 0; i < data.length; i += 4) {
      if (data[i] < 200 || data[i + 1] < 200 || data[i + 2] < 200) ink++;
      if (data[i + 2] > 120 && data[i] < 60) blue++;
    }
    return { width: canvas.width, height: canvas.height, cssWidth: canvas.clientWidth, cssHeight: canvas.clientHeight, ink: ink / (data.length / 4), blue };
  });
}

/** Runs the stage verification from its button and waits for the result. */
async function verifyStage(page, { measure = true } = {}) {
  if (!measure) await page.uncheck("#verify-measure");
  await page.click("#verify-run");
  await page.waitForSelector("#stage-result:not([hidden])", { timeout: 120000 });
}

async function simulateChain(page, stages) {
  await page.fill("#chain-stages", String(stages));
  await page.click("#chain-run");
  await page.waitForSelector("#chain-result:not([hidden])", { timeout: 120000 });
}

test("loads offline with no errors and no network, and shows a complete design", async () => {
  const { page, problems, context } = await open();
  const verdict = await page.textContent("#verdict");
  assert.match(verdict, /margin/i);
  const margins = await page.$$eval("#margins tbody tr", (rows) => rows.length);
  assert.ok(margins >= 8, `expected the margin table, got ${margins} rows`);
  assert.ok(await page.$("#schematic svg"), "schematic drawn");
  // Regression: the page's number formatter once turned 300 mV into "3 mV".
  assert.match(await page.textContent("#margins"), /≥ 300 mV/);
  const parts = await page.textContent("#parts");
  assert.match(parts, /R101/);
  assert.match(parts, /Q101/);
  await page.screenshot({ path: join(shots, "page.png"), fullPage: true });
  assert.deepEqual(problems, []);
  await context.close();
});

test("editing a requirement updates the margins; a bad entry is flagged at the field and nothing breaks", async () => {
  const { page, problems, context } = await open();
  const before = await page.textContent("#margins");
  await setField(page, "supplies.collector_supply_v", "12");
  await page.waitForFunction((b) => document.querySelector("#margins").textContent !== b, before, { timeout: 30000 });
  await waitCompute(page);
  const after = await page.textContent("#margins");
  assert.notEqual(after, before);
  // A malformed value: field-level message, last results kept.
  await setField(page, "requirements.toggle_rate_hz", "fast");
  await page.waitForSelector('.field.invalid[data-path="requirements.toggle_rate_hz"] .error', { timeout: 30000 });
  const message = await page.textContent('.field.invalid[data-path="requirements.toggle_rate_hz"] .error');
  assert.match(message, /number|hertz|Hz/i);
  assert.equal(await page.textContent("#margins"), after, "results of the last valid design stay");
  // Fix it: the error goes away.
  await setField(page, "requirements.toggle_rate_hz", "50k");
  await page.waitForFunction(() => !document.querySelector(".field.invalid"), null, { timeout: 30000 });
  const ms = Number(await page.getAttribute("body", "data-last-compute-ms"));
  assert.ok(ms > 0, "compute time recorded");
  assert.deepEqual(problems, []);
  await context.close();
});

test("an edit that leaves a table's cells alone keeps its rows; one that changes them, or a cleared table, rebuilds it", async () => {
  const { page, problems, context } = await open();
  await page.fill("#f-chain-divide_by", "1024");
  await page.waitForFunction(() => /divide by 1024/.test(document.querySelector("#plan-title").textContent), null, { timeout: 60000 });
  await waitCompute(page);
  await page.evaluate(() => { window.countBody = document.querySelector("#plan-count tbody"); window.partsText = document.querySelector("#parts").textContent; });
  // The toggle rate changes the values, not the count sequence.
  await setField(page, "requirements.toggle_rate_hz", "61k");
  await page.waitForFunction(() => document.querySelector("#parts").textContent !== window.partsText, null, { timeout: 30000 });
  await waitCompute(page);
  assert.ok(await page.evaluate(() => document.querySelector("#plan-count tbody") === window.countBody), "the count table's rows were kept");
  // A new divide ratio rebuilds it with the new sequence.
  await page.fill("#f-chain-divide_by", "16");
  await page.waitForFunction(() => /divide by 16\b/.test(document.querySelector("#plan-title").textContent), null, { timeout: 60000 });
  const rebuilt = await page.evaluate(() => ({ same: document.querySelector("#plan-count tbody") === window.countBody, rows: document.querySelectorAll("#plan-count tbody tr").length }));
  assert.equal(rebuilt.same, false);
  assert.equal(rebuilt.rows, 16, "one row per count of the new cycle");
  // The helper itself: the same cells keep the body, a cleared table is built again.
  const helper = await page.evaluate(() => {
    const el = document.createElement("table");
    table(el, ["A"], [["1"], ["2"]]);
    const first = el.tBodies[0];
    table(el, ["A"], [["1"], ["2"]]);
    const kept = el.tBodies[0] === first;
    el.textContent = "";
    table(el, ["A"], [["1"], ["2"]]);
    const afterClear = el.tBodies[0] ? el.tBodies[0].rows.length : 0;
    table(el, ["A"], [["1"], ["3"]]);
    return { kept, afterClear, changed: el.textContent };
  });
  assert.deepEqual(helper, { kept: true, afterClear: 2, changed: "A13" });
  assert.deepEqual(problems, []);
  await context.close();
});

test("printing gives A4 and Letter pages with the component table and cautions", async () => {
  const { page, problems, context } = await open();
  await page.emulateMedia({ media: "print" });
  for (const format of ["A4", "Letter"]) {
    const file = join(shots, `print-${format}.pdf`);
    await page.pdf({ path: file, format, printBackground: true, preferCSSPageSize: true });
    const info = execFileSync("pdfinfo", [file]).toString();
    const pages = Number(/Pages:\s+(\d+)/.exec(info)?.[1]);
    // Stage, margins, states, switching, the chain worst-case table and the temperature chart,
    // parts and cautions: 5 pages on A4 and Letter when the tolerance section was added.
    assert.ok(pages >= 1 && pages <= 6, `${format}: ${pages} pages`);
    const text = execFileSync("pdftotext", ["-layout", file, "-"]).toString();
    for (const expected of ["Component table", "R101", "C101", "Q101", "Margins", "Cautions", "Printed"]) {
      assert.ok(text.includes(expected), `${format} PDF lacks "${expected}"`);
    }
    assert.ok(!text.includes("Open…"), "buttons are not printed");
    assert.ok(!text.includes("Verify by simulation"), "no verification section until one was run");
    // Every page is numbered in its footer, and the summary line gives figures as a reader
    // writes them (SI prefixes, per cent), not as the file stores them.
    for (let k = 1; k <= pages; k++) assert.ok(text.includes(`page ${k} of ${pages}`), `${format}: no "page ${k} of ${pages}"`);
    assert.ok(/toggle\s+rate\s+100\s+kHz/.test(text) && /resistors\s+±5\s+%/.test(text), `${format}: summary line not in SI: ${text.slice(0, 400)}`);
  }
  execFileSync("pdftoppm", ["-png", "-r", "60", join(shots, "print-A4.pdf"), join(shots, "print-A4")]);
  assert.deepEqual(problems, []);
  await context.close();
});

test("a malformed or newer file is refused with the design intact; reload restores the autosave", async () => {
  const { page, problems, context } = await open();
  await setField(page, "name", "Autosave check");
  await page.waitForFunction(() => window.flipwright.current && window.flipwright.current.name === "Autosave check", null, { timeout: 30000 });
  const bad = join(shots, "bad.json");
  writeFileSync(bad, '{"format": "flipwright-design", "version": 1, "name": 3');
  await page.setInputFiles("#open-file", bad);
  await page.waitForSelector("#banner.error", { timeout: 10000 });
  assert.match(await page.textContent("#banner"), /Cannot open bad\.json/);
  const newer = join(shots, "newer.json");
  const demo = JSON.parse(await page.evaluate(() => JSON.stringify(window.flipwright.current)));
  demo.version = 99;
  writeFileSync(newer, JSON.stringify(demo));
  await page.setInputFiles("#open-file", newer);
  await page.waitForFunction(() => /newer/.test(document.querySelector("#banner").textContent), null, { timeout: 10000 });
  assert.equal(await page.inputValue("#f-name"), "Autosave check", "design untouched");
  await page.reload();
  await page.waitForSelector("body[data-ready=true]", { timeout: 30000 });
  assert.equal(await page.inputValue("#f-name"), "Autosave check");
  assert.match(await page.textContent("#banner"), /Restored/);
  // Save and open the saved file round trip.
  const [download] = await Promise.all([page.waitForEvent("download"), page.click("#save-file")]);
  const saved = join(shots, "saved.json");
  await download.saveAs(saved);
  assert.equal(JSON.parse(readFileSync(saved, "utf8")).name, "Autosave check");
  const [csv] = await Promise.all([page.waitForEvent("download"), page.click("#export-csv")]);
  const csvPath = join(shots, "parts.csv");
  await csv.saveAs(csvPath);
  assert.match(readFileSync(csvPath, "utf8"), /^designator,part,/);
  assert.deepEqual(problems.filter((p) => !/Cannot open/.test(p)), []);
  await context.close();
});

test("a failure inside the engine is reported and the page recovers", async () => {
  assert.ok(existsSync(hooksPagePath), `test-hooks page not built: ${hooksPagePath}`);
  const { page, problems, context } = await open(hooksPagePath);
  await page.evaluate(() => window.flipwright.call("force_panic"));
  await page.waitForSelector("#banner.error", { timeout: 10000 });
  assert.match(await page.textContent("#banner"), /restarted/);
  await setField(page, "supplies.collector_supply_v", "10");
  await page.waitForFunction(() => document.querySelector("#f-supplies-collector_supply_v").value === "10");
  await waitCompute(page);
  await page.waitForFunction(() => window.flipwright.current.supplies.collector_supply_v === "10", null, { timeout: 30000 });
  // The panic message is logged to the console by the panic hook; that is the one expected error.
  assert.deepEqual(problems.filter((p) => !/forced failure|unreachable|RuntimeError/.test(p)), []);
  await context.close();
});

test("a verification runs in the worker with progress, shows PASS for the demo, the measured table and drawn charts", async () => {
  const context = await browser.newContext({ viewport: { width: 1280, height: 900 }, deviceScaleFactor: 2 });
  const { page, problems } = await open(pagePath, context);
  await verifyStage(page);
  assert.match(await page.textContent("#stage-verdict"), /^PASS/);
  assert.equal((await page.textContent("#stage-counts")).trim(), "1 0 1 0 1 0 1 0");
  assert.ok(Number(await page.getAttribute("body", "data-verify-progress-calls")) >= 3, "progress from every run of the searches");
  const measured = await page.textContent("#stage-measured");
  for (const expected of ["Minimum trigger amplitude", "Maximum toggle rate", "resolution", "runs"]) {
    assert.ok(measured.includes(expected), `measured table lacks "${expected}"`);
  }
  assert.match(await page.textContent("#verify-assumptions"), /Ebers–Moll/);
  // HiDPI: the backing store is CSS size × devicePixelRatio, and the traces are drawn.
  const chart = await canvasInk(page, "#stage-canvas");
  assert.equal(chart.width, Math.round(chart.cssWidth * 2), `canvas ${chart.width} px for ${chart.cssWidth} CSS px`);
  assert.equal(chart.height, Math.round(chart.cssHeight * 2));
  assert.ok(chart.ink > 0.01, `waveform canvas nearly blank (${chart.ink})`);
  assert.ok(chart.blue > 500, `no Q1 trace drawn (${chart.blue} blue pixels)`);
  assert.ok(await page.$("#stage-svg svg"), "print SVG rendered");
  await page.screenshot({ path: join(shots, "verify.png"), fullPage: true });
  assert.deepEqual(problems, []);
  await context.close();
});

test("a long chain runs while the page stays usable; cancel stops it; a chain of 4 then counts 1 to 15 and 0", async () => {
  const { page, problems, context } = await open();
  await page.fill("#chain-stages", "10");
  await page.click("#chain-run");
  await page.waitForSelector("#verify-progress:not([hidden])", { timeout: 10000 });
  // While the worker simulates the chain of 10 (1024 edges), the main thread recomputes.
  const before = await page.textContent("#margins");
  await setField(page, "supplies.collector_supply_v", "12");
  await page.waitForFunction((b) => document.querySelector("#margins").textContent !== b, before, { timeout: 30000 });
  assert.equal(await page.isVisible("#verify-progress"), true, "the chain is still running");
  assert.match(await page.textContent("#verify-phase"), /ripple chain of 10/);
  await page.click("#verify-cancel");
  await page.waitForSelector("#verify-progress", { state: "hidden", timeout: 10000 });
  assert.match(await page.textContent("#verify-status"), /Cancelled/);
  assert.equal(await page.isHidden("#chain-result"), true, "no result from the cancelled run");
  // Back to the demo's supply; the replaced worker runs the next job.
  await setField(page, "supplies.collector_supply_v", "9");
  await page.waitForFunction(() => window.flipwright.current.supplies.collector_supply_v === "9", null, { timeout: 30000 });
  await waitCompute(page);
  await simulateChain(page, 4);
  assert.equal((await page.textContent("#chain-counts")).trim(), "1 2 3 4 5 6 7 8 9 10 11 12 13 14 15 0");
  assert.match(await page.textContent("#chain-verdict"), /^PASS/);
  const diagram = await canvasInk(page, "#chain-canvas");
  assert.ok(diagram.ink > 0.01 && diagram.blue > 300, `timing diagram nearly blank (${JSON.stringify(diagram)})`);
  assert.deepEqual(problems, []);
  await context.close();
});

test("a panic inside the simulation worker is reported, the worker is replaced and the next run works", async () => {
  const { page, problems, context } = await open(hooksPagePath);
  const answer = await page.evaluate(() =>
    window.flipwright.workerJob("force_panic").then(() => "resolved", (e) => (e.crashed ? "crashed" : e.message)));
  assert.equal(answer, "crashed");
  assert.match(await page.textContent("#banner"), /simulation engine failed.*restarted/);
  await verifyStage(page, { measure: false });
  assert.match(await page.textContent("#stage-verdict"), /^PASS/);
  assert.deepEqual(problems.filter((p) => !/forced failure|unreachable|RuntimeError/.test(p)), []);
  await context.close();
});

test("printing after a verification carries its summary and the charts as vector graphics", async () => {
  const { page, problems, context } = await open();
  await verifyStage(page);
  await simulateChain(page, 4);
  await page.emulateMedia({ media: "print" });
  const file = join(shots, "print-verify-A4.pdf");
  await page.pdf({ path: file, format: "A4", printBackground: true, preferCSSPageSize: true });
  const text = execFileSync("pdftotext", ["-layout", file, "-"]).toString();
  for (const expected of ["Verify by simulation", "PASS", "Minimum trigger amplitude", "Maximum toggle rate",
    "Waveforms of the nominal run", "Ripple chain of 4 stages", "Assumptions of the simulated circuit"]) {
    assert.ok(text.includes(expected), `PDF lacks "${expected}"`);
  }
  // Chart text is only selectable when the chart printed as SVG, not as a canvas raster.
  assert.ok(text.includes("time (µs)") && text.includes("stage 4 · bit 3"), "charts printed as vector graphics");
  assert.ok(!text.includes("Simulate chain"), "controls are not printed");
  execFileSync("pdftoppm", ["-png", "-r", "60", file, join(shots, "print-verify-A4")]);
  assert.deepEqual(problems, []);
  await context.close();
});

// ---- counter chain: plan, validation, persistence, verification, print ----

/** Enters a divide ratio (optionally choosing the method) and waits until the plan shows it. */
async function planFor(page, n, { method = null } = {}) {
  if (method !== null) await page.selectOption("#f-chain-method", method);
  await setField(page, "chain.divide_by", n);
  await page.waitForFunction((n) => /divide by (\d+)/.exec(document.querySelector("#plan-title").textContent)?.[1] === String(n)
    && !document.querySelector("#plan").hidden, n, { timeout: 30000 });
  await waitCompute(page);
}

/** The count table's data rows as [pulse, count] pairs. */
async function countTable(page) {
  return page.$$eval("#plan-count tbody tr", (rows) => rows.map((r) => [...r.cells].map((c) => c.textContent.trim())));
}

test("divide by 10 with reset on count plans 4 stages counting 1…9, 0; 12 and 60 give ⌈log2 N⌉ stages", async () => {
  const { page, problems, context } = await open();
  assert.equal(await page.isHidden("#plan"), true, "no plan before a divide ratio is entered");
  // The demo stage's reset network fails its own checks, so the recommendation is skip-state
  // feedback (1…7, 14, 15, 0); the decade sequence is the reset-on-count method's.
  await planFor(page, 10, { method: "reset_on_count" });
  assert.match(await page.textContent("#plan-summary"), /^4 binary stages/);
  const rows = await countTable(page);
  // A decade (mod-10) counter steps 0→1→…→9 and returns to 0 on the tenth pulse; this is the
  // textbook sequence of a mod-10 ripple counter with reset (from memory: M. Morris Mano,
  // "Digital Design", chapter on counters).
  const afterPulses = rows.filter((r) => Number(r[0]) >= 1).map((r) => Number(r[1]));
  assert.deepEqual(afterPulses, [1, 2, 3, 4, 5, 6, 7, 8, 9, 0], `count table ${JSON.stringify(rows)}`);
  // The bit column matches the count in natural binary over 4 stages.
  for (const r of rows.filter((r) => Number(r[0]) >= 1)) assert.equal(parseInt(r[2], 2), Number(r[1]), `bits ${r[2]} for ${r[1]}`);
  assert.match(await page.textContent("#plan-run-label"), /divide by 10: 4 stages/);
  await page.screenshot({ path: join(shots, "plan-10.png"), fullPage: true });
  for (const [n, stages] of [[12, 4], [60, 6]]) {
    await planFor(page, n);
    assert.match(await page.textContent("#plan-summary"), new RegExp(`^${stages} binary stages`), `N = ${n}`);
    assert.equal(Math.ceil(Math.log2(n)), stages);
    const counts = (await countTable(page)).filter((r) => Number(r[0]) >= 1).map((r) => Number(r[1]));
    assert.equal(counts.length, n, `N = ${n}: one row per pulse`);
    assert.equal(counts.at(-1), 0, `N = ${n}: back to 0 after N pulses`);
  }
  const diagram = await canvasInk(page, "#plan-canvas");
  assert.ok(diagram.ink > 0.01, `plan timing diagram nearly blank (${JSON.stringify(diagram)})`);
  assert.ok(/R9\d\d|D9\d\d/.test(await page.textContent("#parts")) || /Feedback/.test(await page.textContent("#plan-network-title")),
    "the correction network's parts are in the component table (or the chain uses feedback)");
  assert.deepEqual(problems, []);
  await context.close();
});

test("an invalid divide ratio is flagged at its field and the last plan stays", async () => {
  const { page, problems, context } = await open();
  await planFor(page, 10);
  const plan = await page.textContent("#plan");
  const margins = await page.textContent("#margins");
  const row = '.field.invalid[data-path="chain.divide_by"] .error';
  let previous = "";
  for (const bad of ["1", "5000", "abc"]) {
    await setField(page, "chain.divide_by", bad);
    // Wait for this entry's own message, not the one left from the entry before.
    await page.waitForFunction(([sel, prev]) => { const e = document.querySelector(sel); return e && e.textContent !== prev; },
      [row, previous], { timeout: 30000 });
    await waitCompute(page);
    const message = await page.textContent(row);
    previous = message;
    assert.ok(message.trim().length > 5, `"${bad}": message "${message}"`);
    if (bad !== "abc") assert.match(message, /2|4096/, `"${bad}": the message names the range (${message})`);
    assert.equal(await page.textContent("#plan"), plan, `"${bad}": the previous plan stays`);
    assert.equal(await page.textContent("#margins"), margins, `"${bad}": the previous design stays`);
    assert.equal(await page.isHidden("#plan"), false);
  }
  await planFor(page, 12);
  assert.equal(await page.$(".field.invalid"), null, "error cleared after a valid entry");
  assert.deepEqual(problems, []);
  await context.close();
});

test("the divide ratio survives reload (autosave) and save/open", async () => {
  const { page, problems, context } = await open();
  await planFor(page, 60);
  await page.waitForFunction(() => String(window.flipwright.current?.chain?.divide_by) === "60", null, { timeout: 30000 });
  await page.reload();
  await page.waitForSelector("body[data-ready=true]", { timeout: 30000 });
  assert.equal(await page.inputValue("#f-chain-divide_by"), "60");
  await page.waitForFunction(() => /divide by 60/.test(document.querySelector("#plan-title").textContent), null, { timeout: 30000 });
  const [download] = await Promise.all([page.waitForEvent("download"), page.click("#save-file")]);
  const saved = join(shots, "saved-chain.json");
  await download.saveAs(saved);
  assert.equal(String(JSON.parse(readFileSync(saved, "utf8")).chain.divide_by), "60");
  // Change it, then open the saved file: 60 comes back.
  await planFor(page, 12);
  await page.setInputFiles("#open-file", saved);
  await page.waitForFunction(() => document.querySelector("#f-chain-divide_by").value === "60", null, { timeout: 30000 });
  await page.waitForFunction(() => /divide by 60/.test(document.querySelector("#plan-title").textContent), null, { timeout: 30000 });
  assert.match(await page.textContent("#plan-summary"), /^6 binary stages/);
  assert.deepEqual(problems, []);
  await context.close();
});

test("verifying the planned chain for N = 5 simulates a count that matches the plan", async () => {
  const { page, problems, context } = await open();
  await planFor(page, 5);
  const planned = (await countTable(page)).filter((r) => Number(r[0]) >= 1).map((r) => r[1]);
  assert.equal(planned.length, 5);
  assert.equal(planned.at(-1), "0");
  assert.equal(new Set(planned).size, 5, `five distinct states ${planned}`);
  await page.click("#plan-run");
  await page.waitForSelector("#chain-result:not([hidden])", { timeout: 180000 });
  assert.match(await page.textContent("#chain-title"), /Planned chain: divide by 5, 3 stages/);
  assert.match(await page.textContent("#chain-verdict"), /^PASS/);
  const simulated = (await page.textContent("#chain-counts")).trim().split(/\s+/);
  assert.deepEqual(simulated, planned, "simulated count equals the plan's count table");
  assert.equal(await page.$("#chain-counts .wrong"), null);
  assert.deepEqual(problems, []);
  await context.close();
});

/** Per page of a PDF: the share of the usable text height that carries text, from
 * `pdftotext -layout` (pages split at form feeds): the index of the last non-blank line divided
 * by the line count of the fullest page. A chart without selectable text would count as empty
 * space, so the charts here print as SVG with text labels. */
function pageFill(file) {
  const pages = execFileSync("pdftotext", ["-layout", file, "-"]).toString().split("\f").filter((p, i, all) => i < all.length - 1 || p.trim());
  const used = pages.map((p) => { const lines = p.split("\n"); let last = lines.length - 1; while (last >= 0 && !lines[last].trim()) last--; return last + 1; });
  const full = Math.max(...used);
  return { pages: pages.length, used, fill: used.map((u) => u / full) };
}

test("printing a chain plan carries the count table and the chain section, with no half-empty pages", async () => {
  const { page, problems, context } = await open();
  await planFor(page, 10, { method: "reset_on_count" });
  await page.click("#plan-run");
  await page.waitForSelector("#chain-result:not([hidden])", { timeout: 180000 });
  await page.emulateMedia({ media: "print" });
  const file = join(shots, "print-chain-A4.pdf");
  await page.pdf({ path: file, format: "A4", printBackground: true, preferCSSPageSize: true });
  const text = execFileSync("pdftotext", ["-layout", file, "-"]).toString();
  const network = (await page.textContent("#plan-network-title")).trim().split(/\s+/).slice(0, 2).join(" ");
  for (const expected of ["Chain plan: divide by 10", "Count sequence", network, "Per-stage input rates",
    "Loads each stage sees", "Logic timing of one output period", "Planned chain: divide by 10", "Component table", "Cautions"]) {
    assert.ok(text.includes(expected), `PDF lacks "${expected}"`);
  }
  // The count table's rows 1…9, 0 with their bits.
  for (const [pulse, count] of [[1, 1], [9, 9], [10, 0]]) {
    const bits = count.toString(2).padStart(4, "0").split("").join("\\s?");
    assert.match(text, new RegExp(`\\b${pulse}\\s+${count}\\s+${bits}\\b`), `PDF count table lacks pulse ${pulse}`);
  }
  assert.ok(!text.includes("Verify planned chain"), "controls are not printed");
  const { pages, fill } = pageFill(file);
  writeFileSync(join(shots, "print-chain-A4-fill.json"), JSON.stringify({ pages, fill }));
  for (let i = 0; i < pages - 1; i++) {
    assert.ok(fill[i] >= 0.4, `page ${i + 1} of ${pages} only ${(100 * fill[i]).toFixed(0)} % filled (${fill.map((f) => f.toFixed(2)).join(", ")})`);
  }
  // A heading never ends a page: the last text line of a page is not a section heading.
  const squash = (t) => t.replace(/\s+/g, " ").trim();
  const headings = await page.$$eval("#results h2, #results h3", (hs) => hs.filter((h) => h.offsetParent !== null)
    .flatMap((h) => [h.textContent, h.firstChild?.textContent || ""]));
  const headingSet = new Set(headings.map(squash).filter(Boolean));
  for (const [i, p] of text.split("\f").slice(0, -1).entries()) {
    const last = squash(p.split("\n").filter((l) => l.trim()).at(-1) || "");
    assert.ok(!headingSet.has(last), `page ${i + 1} ends with the heading "${last}"`);
  }
  execFileSync("pdftoppm", ["-png", "-r", "50", file, join(shots, "print-chain-A4")]);
  assert.deepEqual(problems, []);
  await context.close();
});

// ---- tolerances: chain worst case, margins against temperature, Monte Carlo yield ----

async function waitTolerance(page, { chainKind = null } = {}) {
  await page.waitForFunction((kind) => document.body.dataset.tolerance === "ready"
    && window.flipwright.tolerance && window.flipwright.tolerance.designJson === window.flipwright.designJson
    && (kind === null || window.flipwright.tolerance.chain.kind === kind), chainKind, { timeout: 60000 });
}

/** The worst-case table's rows as { margin, worst, stage, parameter }. */
async function worstRows(page) {
  return page.$$eval("#worst-table tbody tr", (rows) => rows.map((r) => ({
    margin: r.cells[0].textContent.trim(),
    worst: r.cells[2].textContent.trim(),
    result: r.cells[4].textContent.trim(),
    stage: r.cells[5].firstChild.textContent.trim(),
    parameter: r.cells[6].firstChild.textContent.trim(),
  })));
}

/** Runs Monte Carlo from the controls and waits for its outcome; returns the body's state. */
async function runYield(page, { trials, seed }) {
  await page.fill("#yield-trials", String(trials));
  await page.fill("#yield-seed", String(seed));
  const before = await page.evaluate(() => window.flipwright.yieldRun);
  await page.click("#yield-run");
  await page.waitForFunction((had) => ["ready", "invalid", "failed"].includes(document.body.dataset.yield)
    && (document.body.dataset.yield !== "ready" || window.flipwright.yieldRun !== had), before, { timeout: 120000 });
  return page.getAttribute("body", "data-yield");
}

test("the chain worst case names a limiting stage and parameter; for one stage it equals the stage's own margins", async () => {
  const { page, problems, context } = await open();
  await waitTolerance(page, { chainKind: "stages" });
  const rows = await worstRows(page);
  assert.ok(rows.length >= 8, `expected every DC margin, got ${rows.length} rows`);
  // The same core worst-case search over the same stage answers both tables: every margin the
  // stage table lists must show the same worst value here.
  const stageWorst = new Map(await page.$$eval("#margins tbody tr", (trs) => trs.map((r) => [r.cells[0].textContent.trim(), r.cells[2].textContent.trim()])));
  let compared = 0;
  for (const r of rows) {
    assert.equal(r.stage, "stage 1", `${r.margin}: a single stage limits itself`);
    assert.ok(r.parameter.length > 2 && r.parameter !== "—", `${r.margin}: limiting parameter "${r.parameter}"`);
    if (stageWorst.has(r.margin)) { assert.equal(r.worst, stageWorst.get(r.margin), `${r.margin}: worst value`); compared++; }
  }
  assert.ok(compared >= 8, `only ${compared} margins in both tables`);
  // A planned decade chain: 4 stages, each row limited by one of them.
  await planFor(page, 10);
  await waitTolerance(page, { chainKind: "divide" });
  assert.match(await page.textContent("#tolerance-chain"), /divide-by-10 chain.*4 stages/);
  for (const r of await worstRows(page)) {
    const k = Number(/^stage (\d+)$/.exec(r.stage)?.[1]);
    assert.ok(k >= 1 && k <= 4, `${r.margin}: limiting stage "${r.stage}" is not one of the 4`);
    assert.match(r.result, /^(PASS|FAIL)$/);
  }
  assert.deepEqual(problems, []);
  await context.close();
});

test("margins against temperature draw on a sharp canvas and as SVG, over the design's range, worst never above nominal", async () => {
  const context = await browser.newContext({ viewport: { width: 1280, height: 900 }, deviceScaleFactor: 2 });
  const { page, problems } = await open(pagePath, context);
  await waitTolerance(page);
  const chart = await canvasInk(page, "#temperature-canvas");
  assert.equal(chart.width, Math.round(chart.cssWidth * 2), `canvas ${chart.width} px for ${chart.cssWidth} CSS px`);
  assert.ok(chart.ink > 0.01, `temperature canvas nearly blank (${chart.ink})`);
  assert.ok(chart.blue > 500, `no nominal curve drawn (${chart.blue} blue pixels)`);
  const svg = await page.$eval("#temperature-svg", (d) => d.innerHTML);
  assert.ok(svg.startsWith("<svg") && svg.includes("temperature (°C)") && svg.includes("required"), "print SVG with labelled axes");
  const sweep = await page.evaluate(() => window.flipwright.tolerance.temperature.sweep);
  const t = sweep.temperatures_c;
  assert.equal(t[0], Number(await page.inputValue("#f-conditions-t_min_c")), "sweep starts at the lowest temperature entered");
  assert.equal(t.at(-1), Number(await page.inputValue("#f-conditions-t_max_c")), "and ends at the highest");
  assert.equal(sweep.margins.length, 8);
  for (const m of sweep.margins) {
    // The worst case at a temperature searches the other parameters from nominal, so it can
    // never be above the nominal value there.
    m.worst.forEach((w, i) => assert.ok(w <= m.nominal[i] + 1e-9 * Math.abs(m.nominal[i]), `${m.title} at ${t[i]} °C: worst ${w} above nominal ${m.nominal[i]}`));
  }
  assert.deepEqual(problems, []);
  await context.close();
});

/** Wilson score interval (E. B. Wilson, JASA 22, 1927), written out here independently of the core. */
function wilson(successes, n, z) {
  const p = successes / n;
  const centre = (p + z * z / (2 * n)) / (1 + z * z / n);
  const half = (z / (1 + z * z / n)) * Math.sqrt(p * (1 - p) / n + z * z / (4 * n * n));
  return [Math.max(0, centre - half), Math.min(1, centre + half)];
}

test("a seeded Monte Carlo run shows yield, interval and digest; the same seed repeats it, another seed differs", async () => {
  const { page, problems, context } = await open();
  await planFor(page, 10);
  await waitTolerance(page, { chainKind: "divide" });
  // Normal draws so the run exercises the other distribution too.
  await page.selectOption("#yield-distribution", "normal");
  assert.equal(await runYield(page, { trials: 3000, seed: 7 }), "ready");
  const summary = await page.textContent("#yield-summary");
  const digest = /7 · ([0-9a-f]{16})/.exec(summary)?.[1];
  assert.ok(digest, `seed and digest shown: ${summary}`);
  assert.match(await page.textContent("#yield-verdict"), /^Yield \d+\.\d\d %/);
  const report = await page.evaluate(() => window.flipwright.yieldRun.view.report);
  assert.equal(report.options.trials, 3000);
  assert.equal(report.stage_count, 4);
  assert.equal(report.yield_fraction, report.passed / 3000);
  // z for 95 % two-sided from a normal table: 1.959964.
  const [low, high] = wilson(report.passed, 3000, 1.959964);
  assert.ok(Math.abs(report.interval.low - low) < 1e-6 && Math.abs(report.interval.high - high) < 1e-6,
    `Wilson interval ${JSON.stringify(report.interval)} against ${low}…${high}`);
  assert.ok(summary.includes(`${(100 * report.interval.low).toFixed(2)} % … ${(100 * report.interval.high).toFixed(2)} %`), "interval shown");
  for (const m of report.margins) {
    const binned = m.histogram.counts.reduce((a, b) => a + b, 0) + m.histogram.not_finite;
    assert.equal(binned, 3000, `${m.title}: every trial in one bin`);
    assert.equal(m.failures_per_stage.length, 4);
  }
  const bars = await canvasInk(page, "#yield-canvas");
  assert.ok(bars.ink > 0.01, `histogram canvas nearly blank (${bars.ink})`);
  assert.ok((await page.$eval("#yield-svg", (d) => d.innerHTML)).includes("trials"), "histograms as SVG for print");
  assert.equal(await runYield(page, { trials: 3000, seed: 7 }), "ready");
  assert.equal(await page.evaluate(() => window.flipwright.yieldRun.view.report.digest), digest, "same seed, same digest");
  assert.equal(await runYield(page, { trials: 3000, seed: 8 }), "ready");
  const other = await page.evaluate(() => window.flipwright.yieldRun.view.report.digest);
  assert.notEqual(other, digest, "another seed, another digest");
  assert.match(await page.textContent("#yield-summary"), new RegExp(`8 · ${other}`));
  await page.screenshot({ path: join(shots, "yield.png"), fullPage: true });
  assert.deepEqual(problems, []);
  await context.close();
});

test("a yield below 100 % agrees with its failures, its histogram and an independent Wilson interval", async () => {
  const { page, problems, context } = await open();
  await waitTolerance(page);
  // Keep the chosen values and ask for more swing than the worst case gives: some builds fail.
  await page.uncheck("#auto-values");
  await waitCompute(page);
  await setField(page, "requirements.min_output_swing_v", "6.5");
  await page.waitForFunction(() => window.flipwright.current.requirements.min_output_swing_v === "6.5", null, { timeout: 30000 });
  await waitCompute(page);
  await waitTolerance(page);
  const swingRow = (await worstRows(page)).find((r) => r.margin === "output swing");
  assert.equal(swingRow?.result, "FAIL", "the worst case fails the raised requirement");
  await page.selectOption("#yield-confidence", "0.99");
  assert.equal(await runYield(page, { trials: 4000, seed: 11 }), "ready");
  const r = await page.evaluate(() => window.flipwright.yieldRun.view.report);
  assert.ok(r.passed > 0 && r.passed < 4000, `some but not all builds pass: ${r.passed}`);
  // A build fails when at least one margin fails in some stage.
  const failing = r.margins.map((m) => m.failing_trials);
  assert.ok(Math.max(...failing) <= 4000 - r.passed && 4000 - r.passed <= failing.reduce((a, b) => a + b, 0),
    `failed builds ${4000 - r.passed} against per-margin failures ${failing}`);
  const swing = r.margins.find((m) => m.title === "output swing");
  assert.ok(swing.failing_trials > 0);
  // The histogram holds the tightest stage's value: the bins wholly below the requirement
  // cannot hold more trials than failed, and with the bin across it they hold at least as many.
  const { edges, counts } = swing.histogram;
  const below = counts.filter((_, i) => edges[i + 1] <= swing.required).reduce((a, b) => a + b, 0);
  const upTo = counts.filter((_, i) => edges[i] < swing.required).reduce((a, b) => a + b, 0);
  assert.ok(below <= swing.failing_trials && swing.failing_trials <= upTo, `${below} ≤ ${swing.failing_trials} ≤ ${upTo}`);
  // z for 99 % two-sided from a normal table: 2.575829.
  const [low, high] = wilson(r.passed, 4000, 2.575829);
  assert.ok(Math.abs(r.interval.low - low) < 1e-6 && Math.abs(r.interval.high - high) < 1e-6,
    `Wilson interval ${JSON.stringify(r.interval)} against ${low}…${high}`);
  assert.ok(r.interval.low < r.yield_fraction && r.yield_fraction < r.interval.high);
  const failures = await page.$$eval("#yield-failures tbody tr", (trs) => trs.map((t) => [t.cells[0].textContent, t.cells[4].textContent]));
  assert.deepEqual(failures.find(([m]) => m === "output swing"), ["output swing", String(swing.failing_trials)]);
  assert.match(await page.textContent("#yield-verdict"), new RegExp(`${r.passed} of 4000`));
  await page.screenshot({ path: join(shots, "yield-failing.png"), fullPage: true });
  assert.deepEqual(problems, []);
  await context.close();
});

test("a long Monte Carlo run reports progress, leaves the page usable, and Cancel stops it", async () => {
  const { page, problems, context } = await open();
  await waitTolerance(page);
  await page.fill("#yield-trials", "1000000");
  await page.click("#yield-run");
  await page.waitForSelector("#yield-progress:not([hidden])", { timeout: 10000 });
  const before = await page.textContent("#margins");
  await setField(page, "supplies.collector_supply_v", "12");
  await page.waitForFunction((b) => document.querySelector("#margins").textContent !== b, before, { timeout: 30000 });
  await page.fill("#yield-seed", "42");
  assert.equal(await page.inputValue("#yield-seed"), "42");
  assert.equal(await page.getAttribute("body", "data-yield"), "busy", "the run is still going while the form recomputed");
  assert.equal(await page.isVisible("#yield-progress"), true);
  // Progress arrives from the worker as the trials go by.
  await page.waitForFunction(() => Number(document.body.dataset.yieldProgress) >= 5000, null, { timeout: 30000 });
  const bar = await page.$eval("#yield-bar", (b) => ({ value: b.value, max: b.max }));
  assert.ok(bar.max === 1000000 && bar.value >= 5000 && bar.value < 1000000, `progress bar ${JSON.stringify(bar)}`);
  assert.match(await page.textContent("#yield-phase"), /trial \d+ of 1000000/);
  await page.click("#yield-cancel");
  await page.waitForSelector("#yield-progress", { state: "hidden", timeout: 10000 });
  assert.equal(await page.getAttribute("body", "data-yield"), "cancelled");
  assert.match(await page.textContent("#yield-status"), /Cancelled/);
  assert.equal(await page.isHidden("#yield-result"), true, "no result from the cancelled run");
  // The replaced worker runs the next job.
  assert.equal(await runYield(page, { trials: 500, seed: 42 }), "ready");
  assert.deepEqual(problems, []);
  await context.close();
});

test("a panic in the Monte Carlo worker is reported, the worker is replaced and the next run works", async () => {
  const { page, problems, context } = await open(hooksPagePath);
  await waitTolerance(page);
  const answer = await page.evaluate(() =>
    window.flipwright.yieldLaneJob("force_panic").then(() => "resolved", (e) => (e.crashed ? "crashed" : e.message)));
  assert.equal(answer, "crashed");
  assert.match(await page.textContent("#banner"), /tolerance worker failed.*replaced/);
  assert.equal(await runYield(page, { trials: 300, seed: 2 }), "ready");
  assert.match(await page.textContent("#yield-verdict"), /^Yield/);
  assert.deepEqual(problems.filter((p) => !/forced failure|unreachable|RuntimeError/.test(p)), []);
  await context.close();
});

test("an invalid trials entry is flagged at its field and nothing breaks", async () => {
  const { page, problems, context } = await open();
  await waitTolerance(page);
  const error = "#yield-trials-row.invalid .error";
  await page.fill("#yield-trials", "abc");
  await page.click("#yield-run");
  await page.waitForSelector(error, { timeout: 10000 });
  assert.match(await page.textContent(error), /whole number/);
  assert.equal(await page.isHidden("#yield-progress"), true, "nothing started");
  assert.equal(await runYield(page, { trials: 0, seed: 1 }), "invalid");
  // The range comes from the core's check.
  assert.match(await page.textContent(error), /1 to 1000000.*got 0/);
  assert.equal(await page.isHidden("#yield-result"), true);
  const margins = await page.textContent("#margins");
  assert.match(margins, /PASS/, "the design's results stay");
  assert.equal(await runYield(page, { trials: 400, seed: 1 }), "ready");
  assert.equal(await page.$("#yield-trials-row.invalid"), null, "the message goes once the entry is valid");
  assert.match(await page.textContent("#yield-summary"), /400/);
  assert.deepEqual(problems, []);
  await context.close();
});

test("printing the tolerance section on A4 and Letter keeps headings with their tables and charts", async () => {
  const { page, problems, context } = await open();
  await planFor(page, 10);
  await waitTolerance(page, { chainKind: "divide" });
  assert.equal(await runYield(page, { trials: 2000, seed: 3 }), "ready");
  const digest = await page.evaluate(() => window.flipwright.yieldRun.view.report.digest);
  await page.emulateMedia({ media: "print" });
  const squash = (t) => t.replace(/\s+/g, " ").trim();
  const headings = new Set((await page.$$eval("#results h2, #results h3", (hs) => hs.filter((h) => h.offsetParent !== null)
    .flatMap((h) => [h.textContent, h.firstChild?.textContent || ""]))).map(squash).filter(Boolean));
  for (const format of ["A4", "Letter"]) {
    const file = join(shots, `print-tolerance-${format}.pdf`);
    await page.pdf({ path: file, format, printBackground: true, preferCSSPageSize: true });
    const text = execFileSync("pdftotext", ["-layout", file, "-"]).toString();
    for (const expected of ["Tolerances and yield", "Worst case over the chain", "Margins against temperature",
      "Monte Carlo yield", "Failures per margin and stage", "Distribution of each margin", digest]) {
      assert.ok(text.includes(expected), `${format} PDF lacks "${expected}"`);
    }
    // Chart text is selectable only when the charts printed as SVG.
    assert.ok(text.includes("temperature (°C)") && text.includes("of 2000 fail"), `${format}: charts as vector graphics`);
    assert.ok(!text.includes("Run Monte Carlo"), "controls are not printed");
    for (const [i, p] of text.split("\f").slice(0, -1).entries()) {
      const last = squash(p.split("\n").filter((l) => l.trim()).at(-1) || "");
      assert.ok(!headings.has(last), `${format} page ${i + 1} ends with the heading "${last}"`);
    }
    const pages = Number(/Pages:\s+(\d+)/.exec(execFileSync("pdfinfo", [file]).toString())?.[1]);
    writeFileSync(join(shots, `print-tolerance-${format}.json`), JSON.stringify({ pages }));
    execFileSync("pdftoppm", ["-png", "-r", "50", file, join(shots, `print-tolerance-${format}`)]);
  }
  assert.deepEqual(problems, []);
  await context.close();
});

test("values chosen for a yield: the plain synthesis falls short, a raised aim reaches it, and a Monte Carlo of the design used confirms it", async () => {
  const { page, problems, context } = await open();
  // Wide tolerances (±10 % resistors and rails, ±20 % capacitors, −40 … 85 °C, minimum
  // overdrive 1.5) on a four-stage chain: the worst case cannot pass; the yield says how many
  // builds work.
  for (const [path, value] of [["supplies.tolerance", "0.1"], ["conditions.resistor_tolerance", "0.1"],
    ["conditions.capacitor_tolerance", "0.2"],
    ["conditions.t_min_c", "-40"], ["conditions.t_max_c", "85"], ["requirements.min_overdrive", "1.5"]]) {
    await setField(page, path, value);
  }
  await planFor(page, 16);
  await waitTolerance(page, { chainKind: "divide" });
  // A goal sampling cannot show is refused at its field.
  await page.fill("#aim-yield", "100");
  await page.click("#aim-run");
  await page.waitForSelector("#aim-yield-row.invalid .error");
  await page.fill("#aim-yield", "99");
  await page.fill("#yield-trials", "4000");
  await page.fill("#yield-seed", "5");
  await page.click("#aim-run");
  await page.waitForFunction(() => ["met", "not-met", "failed", "invalid"].includes(document.body.dataset.aim), null, { timeout: 180000 });
  assert.equal(await page.getAttribute("body", "data-aim"), "met", await page.textContent("#aim-status"));
  const result = await page.evaluate(() => window.flipwright.aimRun.view.result);
  assert.equal(result.candidates[0].change, "the requirements as given");
  assert.ok(result.candidates[0].lower_bound < 0.99, `the plain synthesis already reaches 99 %: ${result.candidates[0].lower_bound}`);
  const chosen = result.candidates[result.chosen];
  assert.ok(chosen.reaches_goal && chosen.lower_bound >= 0.99);
  // The one-sided bound at 95 % is the two-sided interval's lower end at z = 1.644854 (normal table).
  const [low] = wilson(chosen.passed, chosen.trials, 1.644854);
  assert.ok(Math.abs(low - chosen.lower_bound) < 1e-9, `${low} against ${chosen.lower_bound}`);
  const rows = await page.$$eval("#aim-candidates tbody tr", (trs) => trs.length);
  assert.equal(rows, result.candidates.length);
  await page.screenshot({ path: join(shots, "aim-yield.png"), fullPage: true });
  // Use it: the form takes the chosen aims, the page re-synthesises to the same values, and
  // the Monte Carlo of the design now shown (same trials and seed) passes the same builds.
  await page.click("#aim-use");
  await page.waitForFunction((t) => Number(window.flipwright.current.requirements.target_overdrive) === t, chosen.target_overdrive, { timeout: 30000 });
  await waitCompute(page);
  await waitTolerance(page, { chainKind: "divide" });
  assert.equal(Number(await page.inputValue("#f-requirements-target_overdrive")), chosen.target_overdrive);
  // The chosen values are the design now shown, so they are not marked as from an earlier one.
  assert.equal(await page.isHidden("#aim-stale"), true, "the aim result is current for the design it chose");
  assert.equal(await runYield(page, { trials: 4000, seed: 5 }), "ready");
  const run = await page.evaluate(() => window.flipwright.yieldRun.view.report);
  assert.equal(run.passed, chosen.passed);
  assert.equal(run.digest, result.report.digest);
  assert.ok(run.lower_bound >= 0.99);
  assert.deepEqual(problems, []);
  await context.close();
});

// ---- results belong to one design ----

/** The PDF text of the page printed on A4 now. */
async function printedText(page, name) {
  await page.emulateMedia({ media: "print" });
  const file = join(shots, name + ".pdf");
  await page.pdf({ path: file, format: "A4", printBackground: true, preferCSSPageSize: true });
  await page.emulateMedia({ media: "screen" });
  return execFileSync("pdftotext", ["-layout", file, "-"]).toString();
}

test("results of an earlier design never print, and New from demo clears them and stops a running job", async () => {
  const { page, problems, context } = await open();
  await planFor(page, 5);
  await waitTolerance(page, { chainKind: "divide" });
  await page.click("#plan-run");
  await page.waitForSelector("#chain-result:not([hidden])", { timeout: 180000 });
  assert.match(await page.textContent("#chain-verdict"), /^PASS — the planned divide-by-5 chain counted correctly/);
  assert.equal(await runYield(page, { trials: 2000, seed: 3 }), "ready");
  const oldYield = (await page.textContent("#yield-verdict")).trim();
  assert.match(oldYield, /^Yield .* builds pass every DC margin/);
  // Printed for its own design, both results are there (so the checks below can fail).
  const own = await printedText(page, "print-results-own");
  assert.ok(own.includes("planned divide-by-5 chain counted correctly"), "the chain verdict prints for its design");
  assert.ok(own.includes(oldYield.slice(0, 40)), "the yield verdict prints for its design");
  // An edit makes both stale: they stay on screen with the note, but do not print.
  const ran = await page.evaluate(() => window.flipwright.designJson);
  await setField(page, "requirements.min_cutoff_margin_v", "0.35");
  await page.waitForFunction((ran) => window.flipwright.designJson !== ran, ran, { timeout: 30000 });
  await waitCompute(page);
  await waitTolerance(page, { chainKind: "divide" });
  assert.equal(await page.isVisible("#verify-stale"), true);
  assert.equal(await page.isVisible("#yield-stale"), true);
  const edited = await printedText(page, "print-results-stale");
  assert.ok(!edited.includes("counted correctly") && !edited.includes("builds pass every DC margin"), "stale results are not printed");
  assert.ok(edited.includes("Results from an earlier version of the design are not printed"), "the print says why they are missing");
  // A long Monte Carlo is running when New from demo is pressed: it stops, and nothing of the
  // last design is left on screen or in print.
  await page.fill("#yield-trials", "1000000");
  await page.click("#yield-run");
  await page.waitForFunction(() => Number(document.body.dataset.yieldProgress) >= 5000, null, { timeout: 30000 });
  assert.equal(await page.getAttribute("body", "data-yield"), "busy");
  await page.click("#new-demo");
  await waitCompute(page);
  await waitTolerance(page, { chainKind: "stages" });
  assert.equal(await page.isHidden("#yield-progress"), true, "the Monte Carlo run stopped");
  assert.match(await page.textContent("#yield-status"), /previous design/);
  for (const id of ["#stage-result", "#chain-result", "#verify-assumptions-box", "#yield-result", "#aim-result",
    "#verify-stale", "#yield-stale", "#aim-stale"]) {
    assert.equal(await page.isHidden(id), true, `${id} is hidden after New`);
  }
  for (const id of ["#chain-verdict", "#chain-counts", "#yield-verdict", "#yield-summary", "#stage-verdict"]) {
    assert.equal((await page.textContent(id)).trim(), "", `${id} is empty after New`);
  }
  assert.equal(await page.evaluate(() => window.flipwright.yieldRun), null);
  const fresh = await printedText(page, "print-results-new");
  for (const old of ["counted correctly", "divide-by-5", "builds pass every DC margin", "Monte Carlo yield", "Verify by simulation"]) {
    assert.ok(!fresh.includes(old), `the print after New still has "${old}"`);
  }
  assert.ok(fresh.includes("Component table"), "the new design itself prints");
  assert.deepEqual(problems, []);
  await context.close();
});

test("Open of a valid file replaces the design and clears the last design's results", async () => {
  const { page, problems, context } = await open();
  await waitTolerance(page, { chainKind: "stages" });
  assert.equal(await runYield(page, { trials: 2000, seed: 5 }), "ready");
  assert.equal(await page.isVisible("#yield-result"), true, "a result to clear");
  // A file of its own: the demo renamed, with a divide ratio.
  const file = JSON.parse(await page.evaluate(() => window.flipwright.designJson));
  file.name = "Opened divider";
  file.chain = { divide_by: 12 };
  const path = join(shots, "opened-divider.json");
  writeFileSync(path, JSON.stringify(file, null, 2));
  await page.setInputFiles("#open-file", path);
  await page.waitForFunction(() => document.querySelector("#f-name").value === "Opened divider", null, { timeout: 30000 });
  await page.waitForFunction(() => /divide by 12/.test(document.querySelector("#plan-title").textContent), null, { timeout: 30000 });
  await waitCompute(page);
  for (const id of ["#yield-result", "#stage-result", "#chain-result", "#aim-result"]) {
    assert.equal(await page.isHidden(id), true, `${id} is hidden after Open`);
  }
  assert.equal((await page.textContent("#yield-verdict")).trim(), "", "the yield verdict is cleared");
  assert.equal(await page.evaluate(() => window.flipwright.yieldRun), null);
  const printed = await printedText(page, "print-after-open");
  assert.ok(printed.includes("Opened divider"), "the opened design prints under its own name");
  assert.ok(!printed.includes("builds pass every DC margin"), "the last design's yield does not print");
  assert.deepEqual(problems, []);
  await context.close();
});

// ---- layout ----

test("at 1366 × 900 every choice of the form shows its whole text and the design name fits", async () => {
  const context = await browser.newContext({ viewport: { width: 1366, height: 900 } });
  const { page, problems } = await open(pagePath, context);
  // For each select, its longest option against the room inside it (its width less padding and
  // the drop-down arrow, 20 px in Chromium); for the name, the demo's name against the field.
  const cut = await page.$$eval("form select, #f-name", (els) => els.filter((e) => e.offsetParent).map((e) => {
    const style = getComputedStyle(e);
    const measure = document.createElement("canvas").getContext("2d");
    measure.font = style.font;
    const texts = e.tagName === "SELECT" ? [...e.options].map((o) => o.text) : [e.value];
    const widest = Math.max(...texts.map((t) => measure.measureText(t).width));
    const room = e.clientWidth - parseFloat(style.paddingLeft) - parseFloat(style.paddingRight) - (e.tagName === "SELECT" ? 20 : 0);
    return { id: e.id, widest: Math.round(widest), room: Math.round(room) };
  }).filter((f) => f.widest > f.room));
  assert.deepEqual(cut, [], "controls too narrow for their text");
  const labels = await page.$$eval("form .field label", (els) => els.filter((e) => e.scrollWidth > e.clientWidth + 1).map((e) => e.textContent));
  assert.deepEqual(labels, [], "labels cut off");
  await page.screenshot({ path: join(shots, "form-1366.png") });
  assert.deepEqual(problems, []);
  await context.close();
});
