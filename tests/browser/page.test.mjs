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

test("printing gives A4 and Letter pages with the component table and cautions", async () => {
  const { page, problems, context } = await open();
  await page.emulateMedia({ media: "print" });
  for (const format of ["A4", "Letter"]) {
    const file = join(shots, `print-${format}.pdf`);
    await page.pdf({ path: file, format, printBackground: true, preferCSSPageSize: true });
    const info = execFileSync("pdfinfo", [file]).toString();
    const pages = Number(/Pages:\s+(\d+)/.exec(info)?.[1]);
    assert.ok(pages >= 1 && pages <= 4, `${format}: ${pages} pages`);
    const text = execFileSync("pdftotext", ["-layout", file, "-"]).toString();
    for (const expected of ["Component table", "R101", "C101", "Q101", "Margins", "Cautions", "Printed"]) {
      assert.ok(text.includes(expected), `${format} PDF lacks "${expected}"`);
    }
    assert.ok(!text.includes("Open…"), "buttons are not printed");
    assert.ok(!text.includes("Verify by simulation"), "no verification section until one was run");
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
