// Flipwright simulation worker. The page appends this to the bridge's glue in one Blob (a
// file:// page can load nothing else into a worker) and posts it the compiled module. It runs
// the long verifications so the page stays usable; the page cancels by terminating it.
// Rendering stays on the page: plotters needs the DOM, which a worker does not have.
"use strict";

const JOBS = {
  verify_design: (args, progress) => wasm_bindgen.verify_design(args.design, args.options ?? undefined, progress),
  verify_chain_design: (args) => wasm_bindgen.verify_chain_design(args.design, args.stages, args.edges),
  verify_planned_chain_design: (args) => wasm_bindgen.verify_planned_chain_design(args.design, args.edges ?? undefined),
  // Exists only in the test-hooks build: a panic inside the worker, for the recovery test.
  force_panic: () => wasm_bindgen.force_panic(),
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
    self.postMessage({ type: "progress", id, done_runs: step.done_runs, total_runs: step.total_runs, phase: step.phase });
    return true;
  };
  try {
    const run = JOBS[job];
    if (!run || typeof wasm_bindgen[job] !== "function") throw new Error("this build has no job " + job);
    self.postMessage({ type: "result", id, result: run(args || {}, progress) });
  } catch (error) {
    // A RuntimeError is a panic or trap: the instance is unusable and the page replaces the
    // worker. Anything else (a JsError from the bridge) leaves it fit for the next job.
    const crashed = error instanceof WebAssembly.RuntimeError;
    self.postMessage({ type: crashed ? "crashed" : "error", id, message: describe(error) });
  }
};
