// Chain benchmark in wasm under Node (not a test): the same runs as
// `cargo bench -p flipwright-core --bench chain`, timed here with performance.now() since
// Instant traps on wasm32. Built and started by `cargo xtask wasm-bench`.
// Arguments: `quick` (3 repetitions instead of 5), `stage-only` (skip the ten-stage chain).
import { createRequire } from "node:module";

const gluePath = process.env.FLIPWRIGHT_WASM_BENCH;
if (!gluePath) throw new Error("FLIPWRIGHT_WASM_BENCH must name the Node glue (cargo xtask wasm-bench)");
const bridge = createRequire(import.meta.url)(gluePath);
const args = process.argv.slice(2);
const repetitions = args.includes("quick") ? 3 : 5;
const quartiles = (xs) => {
  const s = [...xs].sort((a, b) => a - b);
  const at = (q) => s[Math.round((s.length - 1) * q)];
  return { low: at(0.25), median: at(0.5), high: at(0.75) };
};
const cases = [["one stage, 1000 toggles", 1, 1000]];
if (!args.includes("stage-only")) cases.push(["ten-stage chain, 1024 input edges (divide by 1024)", 10, 1024]);
for (const [title, stages, edges] of cases) {
  console.log(`flipwright wasm chain benchmark (Node ${process.version}): ${title}`);
  const bench = new bridge.ChainBench(stages);
  for (const solver of ["sparse", "dense"]) {
    const first = bench.run(edges, solver);
    const s = first.statistics;
    const times = [];
    for (let i = 0; i < repetitions; i++) {
      const start = performance.now();
      bench.run(edges, solver);
      times.push(performance.now() - start);
    }
    const q = quartiles(times);
    console.log(`  ${solver.padEnd(6)}: ${first.unknowns} unknowns; accepted ${s.accepted_steps} steps, rejected ${s.rejected_steps}, ` +
      `${(s.newton_iterations / s.accepted_steps).toFixed(2)} Newton iterations per accepted step; count right after every edge: ${first.count_correct ? "yes" : "NO"}`);
    console.log(`  ${solver.padEnd(6)}: whole run median ${q.median.toFixed(1)} ms (quartiles ${q.low.toFixed(1)}–${q.high.toFixed(1)} ms, n = ${repetitions}); ` +
      `${(q.median * 1e3 / s.accepted_steps).toFixed(2)} µs per accepted step`);
  }
  bench.free();
}
