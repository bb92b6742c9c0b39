// Page benchmark (not a test): open-to-interactive time of the single file and the median
// recompute time after an edit, with values chosen by synthesis and with the user's own values.
import { existsSync, statSync } from "node:fs";
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
const synthesis = await recomputeTimes(7);
await page.uncheck("#auto-values");
await page.waitForFunction(() => document.body.dataset.lastComputeMs !== undefined, null, { timeout: 60000 });
const analysis = await recomputeTimes(15);
await browser.close();
console.log(`page file ${(statSync(pagePath).size / 1024).toFixed(0)} KiB`);
console.log(`open to interactive: median ${median(opens)} ms (n = ${opens.length}; ${opens.join(", ")})`);
console.log(`recompute after an edit, own values (analysis with worst case): median ${median(analysis).toFixed(1)} ms (n = ${analysis.length})`);
console.log(`recompute after an edit, values chosen (synthesis): median ${median(synthesis).toFixed(0)} ms (n = ${synthesis.length})`);
