// Page benchmark (not a test): open-to-interactive time of the single file, the median
// recompute time after an edit (values chosen by synthesis, and the user's own values), and the
// verification by simulation in the page's worker beside the command line's native run of the
// same design file.
import { spawnSync } from "node:child_process";
import { existsSync, mkdtempSync, readFileSync, statSync, writeFileSync } from "node:fs";
import { tmpdir } from "node:os";
import { join, resolve } from "node:path";
import { chromium } from "playwright-core";

const root = resolve(import.meta.dirname, "../..");
const pagePath = process.env.FLIPWRIGHT_PAGE || join(root, "out/flipwright.html");
if (!existsSync(pagePath)) throw new Error(`page not built: ${pagePath}`);
const browser = await chromium.launch({
  executablePath: process.env.CHROMIUM || "/usr/bin/chromium",
  args: ["--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run", "--disable-background-networking",
    "--disable-component-update", "--disable-sync"],
});
const median = (xs) => { const s = [...xs].sort((a, b) => a - b); return s[Math.floor(s.length / 2)]; };
const opens = [];
for (let i = 0; i < 5; i++) {
  const context = await browser.newContext();
  const page = await context.newPage();
  const start = Date.now();
  await page.goto("file://" + pagePath);
  await page.waitForSelector("body[data-ready=true]", { timeout: 60000 });
  opens.push(Date.now() - start);
  await context.close();
}
const context = await browser.newContext();
const page = await context.newPage();
await page.goto("file://" + pagePath);
await page.waitForSelector("body[data-ready=true]", { timeout: 60000 });
async function recomputeTimes(count) {
  const times = [];
  for (let i = 0; i < count; i++) {
    await page.evaluate(() => { delete document.body.dataset.lastComputeMs; });
    await page.fill("#f-requirements-toggle_rate_hz", String(90000 + 1000 * i));
    await page.waitForFunction(() => document.body.dataset.lastComputeMs !== undefined, null, { timeout: 60000 });
    times.push(Number(await page.getAttribute("body", "data-last-compute-ms")));
  }
  return times;
}
// A ten-stage design (divide by 1024): the engine call, the page's rendering of its result
// (margins, plan with the count table, component table), and the time to the next frame on
// screen (layout, the charts drawn in that frame, paint), after each edit; first with the
// values chosen by synthesis on every edit, then with the user's own values.
async function chainRecompute(count) {
  await page.fill("#f-chain-divide_by", "1024");
  await page.waitForFunction(() => /divide by 1024/.test(document.querySelector("#plan-title").textContent), null, { timeout: 60000 });
  const pass = async (rate0) => {
    const calls = [];
    const renders = [];
    const paints = [];
    for (let i = 0; i < count; i++) {
      await page.evaluate(() => { for (const k of ["lastComputeMs", "lastRenderMs", "lastPaintMs"]) delete document.body.dataset[k]; });
      await page.fill("#f-requirements-toggle_rate_hz", String(rate0 + 1000 * i));
      await page.waitForFunction(() => document.body.dataset.lastPaintMs !== undefined, null, { timeout: 60000 });
      calls.push(Number(await page.getAttribute("body", "data-last-compute-ms")));
      renders.push(Number(await page.getAttribute("body", "data-last-render-ms")));
      paints.push(Number(await page.getAttribute("body", "data-last-paint-ms")));
    }
    return { calls, renders, paints, totals: calls.map((c, i) => c + renders[i]) };
  };
  const chosen = await pass(60000);
  await page.uncheck("#auto-values");
  await page.waitForFunction(() => document.body.dataset.lastPaintMs !== undefined, null, { timeout: 60000 });
  const own = await pass(80000);
  await page.check("#auto-values");
  const stages = /^(\d+) binary stages/.exec(await page.textContent("#plan-summary"))?.[1];
  await page.fill("#f-chain-divide_by", "");
  await page.fill("#f-requirements-toggle_rate_hz", "50k");
  await page.waitForFunction(() => document.querySelector("#plan").hidden, null, { timeout: 60000 });
  return { chosen, own, stages };
}
const chainEdits = await chainRecompute(15);
const chainLine = () => {
  for (const [label, r] of [["values chosen by synthesis", chainEdits.chosen], ["your own values", chainEdits.own]]) {
    console.log(`recompute after an edit, divide by 1024 (${chainEdits.stages} stages), ${label}: ` +
      `median engine call ${median(r.calls).toFixed(1)} ms + rendering ${median(r.renders).toFixed(1)} ms ` +
      `(median of the sums ${median(r.totals).toFixed(1)} ms); to the next frame on screen ${median(r.paints).toFixed(1)} ms ` +
      `(n = ${r.totals.length}; target 16 ms)`);
  }
};
if (process.env.FLIPWRIGHT_BENCH_ONLY === "recompute") {
  chainLine();
  await browser.close();
  process.exit(0);
}
const synthesis = await recomputeTimes(7);
await page.uncheck("#auto-values");
await page.waitForFunction(() => document.body.dataset.lastComputeMs !== undefined, null, { timeout: 60000 });
const analysis = await recomputeTimes(15);

// Verification: wall time of the worker job (posting the design to receiving the result) and
// of the main thread's chart drawing; then the native CLI on the very same design file (its CSV
// cut to one probe, so file writing does not weigh on the native figure).
const verifyContext = await browser.newContext({ viewport: { width: 1280, height: 900 } });
const verifyPage = await verifyContext.newPage();
await verifyPage.goto("file://" + pagePath);
await verifyPage.waitForSelector("body[data-ready=true]", { timeout: 60000 });
async function browserRuns(count, start, resultSelector, attribute) {
  const times = [];
  const draws = [];
  for (let i = 0; i < count; i++) {
    await verifyPage.evaluate((a) => { delete document.body.dataset[a]; }, attribute);
    await start();
    await verifyPage.waitForFunction((a) => document.body.dataset[a] !== undefined, attribute, { timeout: 600000 });
    await verifyPage.waitForSelector(resultSelector, { timeout: 60000 });
    times.push(Number(await verifyPage.evaluate((a) => document.body.dataset[a], attribute)));
    draws.push(Number(await verifyPage.getAttribute("body", "data-last-draw-ms")));
  }
  return { times, draws };
}
const stageRuns = await browserRuns(5, () => verifyPage.click("#verify-run"), "#stage-result:not([hidden])", "lastVerifyMs");
const chain = async (stages) => {
  await verifyPage.fill("#chain-stages", String(stages));
  return browserRuns(stages <= 4 ? 5 : 1, () => verifyPage.click("#chain-run"), "#chain-result:not([hidden])", "lastChainMs");
};
const chain4 = await chain(4);
const chain8 = await chain(8);
const designText = await verifyPage.evaluate(() => window.flipwright.designJson);
await verifyContext.close();
await browser.close();

const cli = process.env.FLIPWRIGHT_CLI || join(root, "target/release/flipwright");
const scratch = mkdtempSync(join(tmpdir(), "flipwright-bench-"));
const designPath = join(scratch, "design.json");
writeFileSync(designPath, designText);
function nativeRuns(count, extra) {
  const times = [];
  for (let i = 0; i < count; i++) {
    const start = process.hrtime.bigint();
    const run = spawnSync(cli, ["simulate", designPath, "--csv", join(scratch, "run.csv"), "--probe", "in", ...extra], { encoding: "utf8" });
    times.push(Number(process.hrtime.bigint() - start) / 1e6);
    if (run.status !== 0) throw new Error(`${cli} simulate failed: ${run.stderr}`);
  }
  return times;
}
const haveCli = existsSync(cli);
const native = haveCli ? {
  stage: nativeRuns(5, []),
  chain4: nativeRuns(5, ["--stages", "4", "--edges", "16"]),
  chain8: nativeRuns(1, ["--stages", "8", "--edges", "256"]),
} : null;

const pageText = readFileSync(pagePath, "utf8");
const wasmBase64 = /const WASM_BASE64 = "([^"]*)"/.exec(pageText)?.[1] || "";
console.log(`page file ${(statSync(pagePath).size / 1024).toFixed(0)} KiB (wasm ${(wasmBase64.length * 3 / 4 / 1024).toFixed(0)} KiB, inlined as base64)`);
console.log(`open to interactive: median ${median(opens)} ms (n = ${opens.length}; ${opens.join(", ")})`);
console.log(`recompute after an edit, own values (analysis with worst case): median ${median(analysis).toFixed(1)} ms (n = ${analysis.length})`);
console.log(`recompute after an edit, values chosen (synthesis): median ${median(synthesis).toFixed(0)} ms (n = ${synthesis.length})`);
chainLine();
const row = (what, browserMs, nativeMs) => {
  const b = median(browserMs);
  const line = `${what}: browser worker median ${b.toFixed(0)} ms (n = ${browserMs.length})`;
  if (!nativeMs) return console.log(line + "; native: build the CLI (cargo xtask demo) to compare");
  const n = median(nativeMs);
  console.log(`${line}; native CLI median ${n.toFixed(0)} ms (n = ${nativeMs.length}, whole process); wasm/native ${(b / n).toFixed(2)}`);
};
row("verification of the stage (nominal run and both searches)", stageRuns.times, native?.stage);
row("ripple chain of 4, 16 edges", chain4.times, native?.chain4);
row("ripple chain of 8, 256 edges", chain8.times, native?.chain8);
console.log(`chart drawing on the main thread after a result: median ${median(stageRuns.draws.concat(chain4.draws)).toFixed(1)} ms`);
