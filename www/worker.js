// Flipwright worker (simulations and tolerance runs). The page appends this to the bridge's glue in one Blob (a
// file:// page can load nothing else into a worker) and posts it the compiled module. It runs
// the long verifications so the page stays usable; the page cancels by terminating it.
// Rendering stays on the page: plotters needs the DOM, which a worker does not have.
"use strict";

/** A bridge export, or an error naming it when this build has none. */
function exported(name) {
  const run = wasm_bindgen[name];
  if (typeof run !== "function") throw new Error("this build has no export " + name);
  return run;
}

const JOBS = {
  verify_design: (args, progress) => exported("verify_design")(args.design, args.options ?? undefined, progress),
  verify_chain_design: (args) => exported("verify_chain_design")(args.design, args.stages, args.edges),
  verify_planned_chain_design: (args) => exported("verify_planned_chain_design")(args.design, args.edges ?? undefined),
  // The tolerance views' automatic part, in one job so one message brings both.
  tolerance_overview: (args) => ({
    worst_case: exported("chain_worst_case_design")(args.design, args.chain),
    temperature: exported("margins_against_temperature_design")(args.design, args.chain, args.points),
  }),
  // Progress as {done_candidates, candidates}: the export reports two numbers.
  synthesise_for_yield_design: (args, progress) => exported("synthesise_for_yield_design")(
    args.design, args.goal, (done, total) => progress({ done_candidates: done, candidates: total })),
  monte_carlo_yield_design: (args, progress) => exported("monte_carlo_yield_design")(args.design, args.chain, args.options, progress),
  // Exists only in the test-hooks build: a panic inside the worker, for the recovery test.
  force_panic: () => exported("force_panic")(),
};

function describe(error) {
  return String((error && error.message) || error);
}

self.onmessage = (event) => {
  const message = event.data;
  if (message.type === "init") {
    try {
      wasm_bindgen.initSync({ module: message.module });
    } catch (error) {
      self.postMessage({ type: "crashed", message: "the simulation engine could not start: " + describe(error) });
    }
    return;
  }
  if (message.type !== "run") return;
  const { id, job, args } = message;
  const progress = (step) => {
    // Whatever the export reports ({done_runs, total_runs, phase} or {done_trials, trials}).
    self.postMessage(Object.assign({}, step, { type: "progress", id }));
    return true;
  };
  try {
    const run = JOBS[job];
    if (!run) throw new Error("this page has no job " + job);
    self.postMessage({ type: "result", id, result: run(args || {}, progress) });
  } catch (error) {
    // A RuntimeError is a panic or trap: the instance is unusable and the page replaces the
    // worker. Anything else (a JsError from the bridge) leaves it fit for the next job.
    const crashed = error instanceof WebAssembly.RuntimeError;
    self.postMessage({ type: crashed ? "crashed" : "error", id, message: describe(error) });
  }
};
