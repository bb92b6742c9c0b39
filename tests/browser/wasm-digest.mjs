// Monte Carlo in wasm under Node, for the native-against-wasm digest check of
// `cargo xtask test` (step wasm-digest): runs each case of CASES_JSON through the bridge's
// `monte_carlo_yield_design` on the design file DESIGN and prints one JSON array of
// {digest, passed, trials} on stdout. Any failure exits non-zero.
// Usage: FLIPWRIGHT_WASM_GLUE=<node glue> node wasm-digest.mjs DESIGN CASES_JSON
import { readFileSync } from "node:fs";
import { createRequire } from "node:module";

const gluePath = process.env.FLIPWRIGHT_WASM_GLUE;
if (!gluePath) throw new Error("FLIPWRIGHT_WASM_GLUE must name the Node glue (cargo xtask test builds it)");
const [designPath, casesJson] = process.argv.slice(2);
if (!designPath || !casesJson) throw new Error("usage: node wasm-digest.mjs DESIGN CASES_JSON");
const bridge = createRequire(import.meta.url)(gluePath);
const design = readFileSync(designPath, "utf8");
const results = [];
for (const c of JSON.parse(casesJson)) {
  const outcome = bridge.monte_carlo_yield_design(design, JSON.stringify(c.chain), JSON.stringify(c.options));
  if (outcome.status !== "ok") throw new Error(`case ${JSON.stringify(c)}: ${JSON.stringify(outcome)}`);
  results.push({ digest: outcome.report.digest, passed: outcome.report.passed, trials: outcome.report.options.trials });
}
console.log(JSON.stringify(results));
