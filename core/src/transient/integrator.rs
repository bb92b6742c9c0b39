//! Transient analysis: trapezoidal rule on charges with a backward-Euler step at the start
//! and after every source corner, step size from the charges' local truncation error.

use serde::{Deserialize, Serialize};

use super::circuit::Circuit;
use super::error::SimulationError;
use super::linear::{AutomaticSolver, LinearSolver};
use super::operating_point::{
    default_tolerances, solve_operating_point, OperatingPointHints, OperatingPointMethod,
};
use super::system::{
    Conditions, Evaluations, Failure, Integration, NewtonBuffers, NewtonTolerances, Reuse, System,
};
use crate::numeric::elementary::cbrt;
use crate::numeric::larger;

/// Step reduction after a failed Newton solve.
const NEWTON_FAILURE_SHRINK: f64 = 0.125;
/// Bounds on the change of step between two steps: growth limits how far the error
/// estimate is trusted; the floor stops one bad estimate collapsing the step.
const MAX_STEP_GROWTH: f64 = 2.0;
const MIN_STEP_SHRINK: f64 = 0.1;
/// Margin on the step predicted from the error estimate, so the next step usually passes.
const STEP_SAFETY: f64 = 0.9;
/// Floor on the remembered error of the last accepted step in the predictive step rule
/// (Hairer & Wanner's RADAU5 uses the same 1e-2), so that a nearly exact step does not make
/// the next one look like a sharp rise of the error.
const PREDICTIVE_ERROR_FLOOR: f64 = 1e-2;

/// The predictive step rule of Gustafsson (ACM TOMS 20, 1994; in the form of Hairer &
/// Wanner, *Solving Ordinary Differential Equations II*, §IV.8, and their RADAU5): after two
/// accepted second-order steps of sizes h_prev and h with error ratios e_prev and e, the next
/// step is at most STEP_SAFETY·h·(h/h_prev)·(e_prev/e²)^(1/3). The plain rule looks at e
/// alone and so lags behind an error that rises from step to step (a bistable regenerating),
/// which showed as runs of rejected steps, a fifth of a stage run's Newton iterations; this
/// one extrapolates the rise. Returns the growth factor the rule allows, capped at `plain`
/// (the plain rule's factor): no cube root is taken when the rule cannot bind.
fn predictive_growth(h: f64, error_ratio: f64, previous: (f64, f64), plain: f64) -> f64 {
    let (previous_h, previous_error) = previous;
    let trend = h / previous_h;
    // The rule's factor is STEP_SAFETY·trend·(e_prev/e²)^(1/3), below `plain` exactly when
    // e²/e_prev > (STEP_SAFETY·trend/plain)³.
    let bound = STEP_SAFETY * trend / plain;
    let rise = error_ratio * error_ratio / previous_error;
    // Also true when the trend or the rise is not finite or not a number: then the plain rule.
    if !(rise > bound * bound * bound) {
        return plain;
    }
    larger(STEP_SAFETY * trend / cbrt(rise), MIN_STEP_SHRINK)
}

/// Settings of one transient run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TransientSettings {
    pub stop_time_s: f64,
    /// Largest step; default stop_time_s / 50.
    #[serde(default)]
    pub max_step_s: Option<f64>,
    /// Step at t = 0 and after each source corner; default stop_time_s · 1e-6.
    #[serde(default)]
    pub initial_step_s: Option<f64>,
    /// Smallest step before the run fails; default stop_time_s · 1e-13.
    #[serde(default)]
    pub min_step_s: Option<f64>,
    /// Allowed local truncation error of each charge relative to its size, and the Newton
    /// relative tolerance.
    pub relative_tolerance: f64,
    pub charge_tolerance_c: f64,
    pub voltage_tolerance_v: f64,
    pub current_tolerance_a: f64,
    pub max_newton_iterations: usize,
    pub max_steps: usize,
}

impl TransientSettings {
    /// Defaults suited to switching circuits: 1e-3 relative, 1 fC, 1 µV, 1 pA.
    pub fn new(stop_time_s: f64) -> Self {
        TransientSettings {
            stop_time_s,
            max_step_s: None,
            initial_step_s: None,
            min_step_s: None,
            relative_tolerance: 1e-3,
            charge_tolerance_c: 1e-15,
            voltage_tolerance_v: 1e-6,
            current_tolerance_a: 1e-12,
            max_newton_iterations: 50,
            max_steps: 1_000_000,
        }
    }

    /// Every out-of-range setting as (field, problem), in field order; empty when a run can
    /// start. Files report them all at once; [`simulate`] stops at the first.
    pub fn problems(&self) -> Vec<(&'static str, &'static str)> {
        let mut found = Vec::new();
        if !(self.stop_time_s > 0.0) || !self.stop_time_s.is_finite() {
            found.push(("stop_time_s", "must be a positive finite time"));
        }
        for (field, value) in [
            ("max_step_s", self.max_step_s),
            ("initial_step_s", self.initial_step_s),
            ("min_step_s", self.min_step_s),
        ] {
            if let Some(v) = value {
                if !(v > 0.0) || !v.is_finite() {
                    found.push((field, "must be a positive finite time when given"));
                }
            }
        }
        if !(self.relative_tolerance > 0.0 && self.relative_tolerance < 1.0) {
            found.push(("relative_tolerance", "must be between 0 and 1 (1e-3 is usual)"));
        }
        for (field, value) in [
            ("charge_tolerance_c", self.charge_tolerance_c),
            ("voltage_tolerance_v", self.voltage_tolerance_v),
            ("current_tolerance_a", self.current_tolerance_a),
        ] {
            if !(value > 0.0) || !value.is_finite() {
                found.push((field, "must be a positive finite number"));
            }
        }
        if self.max_newton_iterations == 0 {
            found.push(("max_newton_iterations", "must be at least 1"));
        }
        if self.max_steps == 0 {
            found.push(("max_steps", "must be at least 1"));
        }
        found
    }

    fn check(&self) -> Result<(), SimulationError> {
        match self.problems().first() {
            Some((field, problem)) => Err(SimulationError::InvalidSettings {
                field: field.to_string(),
                problem: problem.to_string(),
            }),
            None => Ok(()),
        }
    }
}

/// Counts of one run.
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize)]
pub struct RunStatistics {
    pub accepted_steps: usize,
    /// Every rejected step: for truncation error, or because Newton did not converge.
    pub rejected_steps: usize,
    /// Those of the rejected steps whose Newton solve did not converge.
    pub newton_failures: usize,
    pub newton_iterations: usize,
    /// Junction devices evaluated by their law during the steps, and those reused from an
    /// earlier evaluation (bypass; see `system::Evaluations`).
    pub device_evaluations: usize,
    pub bypassed_evaluations: usize,
}

/// Waveforms of a run: one entry per accepted time point.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TransientResult {
    pub time_s: Vec<f64>,
    pub node_names: Vec<String>,
    /// `node_voltages_v[node][point]`.
    pub node_voltages_v: Vec<Vec<f64>>,
    pub source_names: Vec<String>,
    /// `source_currents_a[source][point]`, from the positive terminal through the source.
    pub source_currents_a: Vec<Vec<f64>>,
    pub operating_point_method: OperatingPointMethod,
    pub statistics: RunStatistics,
}

impl TransientResult {
    /// The waveform of a node by name.
    pub fn voltage(&self, node: &str) -> Option<&[f64]> {
        let index = self.node_names.iter().position(|n| n == node)?;
        self.node_voltages_v.get(index).map(|v| v.as_slice())
    }
    /// The current waveform of a voltage source by name.
    pub fn source_current(&self, source: &str) -> Option<&[f64]> {
        let index = self.source_names.iter().position(|n| n == source)?;
        self.source_currents_a.get(index).map(|v| v.as_slice())
    }
}

/// Transient run with the automatic choice of linear solver (dense for small systems).
pub fn simulate(
    circuit: &Circuit,
    settings: &TransientSettings,
    hints: &OperatingPointHints,
) -> Result<TransientResult, SimulationError> {
    simulate_with(circuit, settings, hints, &mut AutomaticSolver::default())
}

/// ratio^(−1/(order + 1)), the step factor that brings an error `ratio` times the allowed one
/// back to it, for the integrator's orders 1 and 2 by square and cube root (cheaper than a
/// general power, on wasm32 especially).
fn step_factor(ratio: f64, order: f64) -> f64 {
    if order >= 2.0 {
        1.0 / cbrt(ratio)
    } else {
        1.0 / ratio.sqrt()
    }
}

/// Weights of the divided difference over `times` (2 to 4 of them, oldest first): the
/// divided difference of values q_k is Σ w_k·q_k with w_k = 1 / Π_{j≠k} (t_k − t_j) (the
/// Lagrange form; any numerical-analysis text, e.g. Burden & Faires, *Numerical Analysis*,
/// §3.3). They depend on the times alone, so one step computes them once for all its charges.
/// `None` when two times coincide.
fn divided_difference_weights(times: &[f64]) -> Option<[f64; 4]> {
    let count = times.len().min(4);
    let mut weights = [0.0; 4];
    for (k, weight) in weights.iter_mut().enumerate().take(count) {
        let mut product = 1.0;
        for (j, &t) in times.iter().enumerate().take(count) {
            if j != k {
                product *= times.get(k).copied().unwrap_or(0.0) - t;
            }
        }
        *weight = 1.0 / product;
        if !weight.is_finite() {
            return None;
        }
    }
    Some(weights)
}

/// Transient run with any [`LinearSolver`].
pub fn simulate_with<S: LinearSolver>(
    circuit: &Circuit,
    settings: &TransientSettings,
    hints: &OperatingPointHints,
    solver: &mut S,
) -> Result<TransientResult, SimulationError> {
    settings.check()?;
    let system = System::compile(circuit)?;
    let stop = settings.stop_time_s;
    let max_step = settings.max_step_s.unwrap_or(stop / 50.0).min(stop);
    let initial_step = settings.initial_step_s.unwrap_or(stop * 1e-6).min(max_step);
    let min_step = settings.min_step_s.unwrap_or(stop * 1e-13).min(initial_step);
    let (op, method, mut junctions) = solve_operating_point(&system, solver, hints, default_tolerances())?;
    let tolerances = NewtonTolerances {
        relative: settings.relative_tolerance,
        voltage_v: settings.voltage_tolerance_v,
        current_a: settings.current_tolerance_a,
        max_iterations: settings.max_newton_iterations,
    };
    let node_count = system.node_count();
    let mut result = TransientResult {
        time_s: vec![0.0],
        node_names: system.node_names.clone(),
        node_voltages_v: (0..node_count).map(|i| vec![op.unknowns.get(i).copied().unwrap_or(0.0)]).collect(),
        source_names: system.source_names.clone(),
        source_currents_a: (node_count..system.size())
            .map(|i| vec![op.unknowns.get(i).copied().unwrap_or(0.0)])
            .collect(),
        operating_point_method: method,
        statistics: RunStatistics { newton_iterations: op.iterations, ..RunStatistics::default() },
    };
    let mut time = 0.0;
    let mut unknowns = op.unknowns;
    // The accepted point before the last one, while both lie on one smooth stretch (since
    // the last restart): the start of each Newton solve is extrapolated through the two.
    let mut previous: Option<(f64, Vec<f64>)> = None;
    let mut start = Vec::with_capacity(unknowns.len());
    let mut charges = op.charges;
    // At the operating point no charge changes.
    let mut charge_currents = vec![0.0; charges.len()];
    // Accepted (time, charges) since the last restart, oldest first, at most 3.
    let mut history: Vec<(f64, Vec<f64>)> = vec![(0.0, charges.clone())];
    let mut step = initial_step;
    // Device evaluations are pure functions of the junction voltages, so they carry over
    // rejected steps as well as accepted ones.
    let mut evaluations = Evaluations::new(settings.relative_tolerance);
    let mut buffers = NewtonBuffers::default();
    // The next source corner, once looked up (`Some(None)`: there is none).
    let mut upcoming: Option<Option<f64>> = None;
    // The size and error ratio of the last accepted second-order step since the last restart,
    // for the predictive step rule.
    let mut last_accepted: Option<(f64, f64)> = None;
    // The junction history a step's solve starts from and updates; kept only when accepted.
    let mut trial_junctions = Vec::with_capacity(junctions.len());
    // Every accepted or rejected step counts, so the loop is bounded even if steps shrink.
    let attempt_limit = settings.max_steps.saturating_mul(20);
    for _ in 0..attempt_limit {
        if time >= stop {
            return Ok(result);
        }
        if result.statistics.accepted_steps >= settings.max_steps {
            return Err(SimulationError::StepLimit { time_s: time, max_steps: settings.max_steps });
        }
        // The earliest corner after the time it was found at stays the earliest until the
        // run reaches it, so it is looked up again only then.
        let corner = match upcoming {
            Some(Some(corner)) if corner > time => Some(corner),
            Some(None) => None,
            _ => {
                let corner = system.next_corner_after(time);
                upcoming = Some(corner);
                corner
            }
        };
        let target = corner.map_or(stop, |corner| corner.min(stop));
        let restarting = history.len() < 2;
        if restarting {
            step = step.min(initial_step).min(0.1 * (target - time));
        }
        step = step.min(max_step).max(min_step);
        // Land exactly on the target when close, so no sliver step follows.
        let landing = time + step >= target - 0.01 * step;
        let new_time = if landing { target } else { time + step };
        let h = new_time - time;
        let trapezoidal = !restarting;
        let integration = if trapezoidal {
            Integration { a: 2.0 / h, b: -1.0 }
        } else {
            Integration { a: 1.0 / h, b: 0.0 }
        };
        let conditions = Conditions {
            time_s: new_time,
            source_scale: 1.0,
            extra_gmin_s: 0.0,
            integration: Some(integration),
            previous_charges: &charges,
            previous_charge_currents: &charge_currents,
            pulls: &[],
        };
        start.clone_from(&unknowns);
        if let Some((previous_time, previous_unknowns)) = previous.as_ref().filter(|_| !restarting) {
            let ratio = h / (time - previous_time);
            if ratio.is_finite() {
                for (s, &old) in start.iter_mut().zip(previous_unknowns) {
                    *s += ratio * (*s - old);
                }
            }
        }
        trial_junctions.clone_from(&junctions);
        let reuse =
            Reuse { evaluations: Some(&mut evaluations), constants: true, buffers: Some(&mut buffers) };
        let outcome =
            system.newton_with(solver, &start, &mut trial_junctions, &conditions, tolerances, reuse);
        result.statistics.device_evaluations = evaluations.evaluated;
        result.statistics.bypassed_evaluations = evaluations.reused;
        let solved = match outcome {
            Ok(solved) => solved,
            Err(Failure::Singular { unknown }) => {
                return Err(SimulationError::Singular {
                    time_s: new_time,
                    node: system.unknown_name(unknown),
                })
            }
            Err(Failure::NotConverged { unknown, iterations, .. }) => {
                result.statistics.newton_iterations += iterations;
                result.statistics.rejected_steps += 1;
                result.statistics.newton_failures += 1;
                step = h * NEWTON_FAILURE_SHRINK;
                if step < min_step {
                    return Err(SimulationError::NonConvergence {
                        time_s: time,
                        node: system.unknown_name(unknown),
                    });
                }
                continue;
            }
        };
        result.statistics.newton_iterations += solved.iterations;
        // Local truncation error of every charge from divided differences through the new
        // point: trapezoidal h³·q'''/12 with q''' ≈ 6·DD3; with only three points the
        // backward-Euler form h²·q''/2 with q'' ≈ 2·DD2 (pessimistic for one step).
        let mut worst_ratio: f64 = 0.0;
        let mut order = 1.0;
        if history.len() >= 2 {
            let use_third = history.len() >= 3 && trapezoidal;
            order = if use_third { 2.0 } else { 1.0 };
            let first = if use_third { history.len() - 3 } else { history.len() - 2 };
            let past = history.get(first..).unwrap_or(&[]);
            let mut times = [0.0; 4];
            for (t, (time, _)) in times.iter_mut().zip(past) {
                *t = *time;
            }
            let count = (past.len() + 1).min(4);
            if let Some(t) = times.get_mut(count - 1) {
                *t = new_time;
            }
            // Two coincident times leave no estimate (steps are never that short).
            let weights = divided_difference_weights(&times[..count]).unwrap_or([0.0; 4]);
            let error_scale = if use_third { h.powi(3) / 2.0 } else { h.powi(2) };
            for (slot, &new_charge) in solved.charges.iter().enumerate() {
                // Σ w_k = 0, so the oldest charge comes off every term first: the sum then
                // adds changes, not whole charges.
                let base = past.first().and_then(|(_, q)| q.get(slot)).copied().unwrap_or(new_charge);
                let mut dd = 0.0;
                for (weight, (_, q)) in weights.iter().zip(past) {
                    dd += weight * (q.get(slot).copied().unwrap_or(0.0) - base);
                }
                dd += weights.get(count - 1).copied().unwrap_or(0.0) * (new_charge - base);
                let error = error_scale * dd.abs();
                let old_charge = charges.get(slot).copied().unwrap_or(0.0);
                let allowed = settings.relative_tolerance * larger(old_charge.abs(), new_charge.abs())
                    + settings.charge_tolerance_c;
                worst_ratio = larger(worst_ratio, error / allowed);
            }
            if !worst_ratio.is_finite() {
                worst_ratio = f64::MAX;
            }
            if worst_ratio > 1.0 {
                result.statistics.rejected_steps += 1;
                let factor = larger(STEP_SAFETY * step_factor(worst_ratio, order), MIN_STEP_SHRINK);
                step = h * factor;
                if step < min_step {
                    return Err(SimulationError::TimestepTooSmall { time_s: time, step_s: step });
                }
                buffers.recycle(solved);
                continue;
            }
        }
        // Accept.
        result.statistics.accepted_steps += 1;
        let time_before_step = time;
        time = new_time;
        std::mem::swap(&mut junctions, &mut trial_junctions);
        let before = std::mem::replace(&mut unknowns, solved.unknowns);
        if let Some((_, older)) = previous.replace((time_before_step, before)) {
            buffers.recycle_unknowns(older);
        }
        buffers.recycle_charges(
            std::mem::replace(&mut charges, solved.charges),
            std::mem::replace(&mut charge_currents, solved.charge_currents),
        );
        result.time_s.push(time);
        for (index, series) in result.node_voltages_v.iter_mut().enumerate() {
            series.push(unknowns.get(index).copied().unwrap_or(0.0));
        }
        for (index, series) in result.source_currents_a.iter_mut().enumerate() {
            series.push(unknowns.get(node_count + index).copied().unwrap_or(0.0));
        }
        // Below (safety/growth)^(order + 1) the factor would exceed the largest growth
        // anyway, so no root is taken (a cube root is a library call, on wasm32 especially;
        // most accepted steps land here). The bound is shaded so rounding cannot matter.
        let capped_below =
            (STEP_SAFETY / MAX_STEP_GROWTH).powi(if order >= 2.0 { 3 } else { 2 }) * (1.0 - 1e-9);
        let mut growth = if worst_ratio > capped_below {
            (STEP_SAFETY * step_factor(worst_ratio, order)).min(MAX_STEP_GROWTH)
        } else {
            MAX_STEP_GROWTH
        };
        if order >= 2.0 {
            if let Some(previous) = last_accepted {
                growth = predictive_growth(h, worst_ratio, previous, growth);
            }
            last_accepted = Some((h, larger(worst_ratio, PREDICTIVE_ERROR_FLOOR)));
        }
        step = h * growth;
        if landing && target < stop {
            // A source corner: the charges' derivatives jump, so the old points no longer
            // describe a smooth curve. Restart with backward Euler and a small step.
            history.clear();
            previous = None;
            last_accepted = None;
            history.push((time, charges.clone()));
        } else if history.len() >= 3 {
            // The oldest point leaves; its buffer takes the new one (no allocation per step).
            let mut oldest = history.remove(0);
            oldest.0 = time;
            oldest.1.clone_from(&charges);
            history.push(oldest);
        } else {
            history.push((time, charges.clone()));
        }
    }
    Err(SimulationError::StepLimit { time_s: time, max_steps: settings.max_steps })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_predictive_rule_follows_its_published_formula_when_the_error_rises() {
        // Gustafsson's factor in Hairer & Wanner's form, worked by hand: equal steps, the
        // error ratio rising from 0.1 to 0.8 → 0.9·1·(0.1/0.64)^(1/3) = 0.48475, well below
        // the plain rule's 0.9·0.8^(−1/3) = 0.96950.
        let plain = STEP_SAFETY * step_factor(0.8, 2.0);
        assert!((plain - 0.969_50).abs() < 1e-5, "{plain}");
        let predicted = predictive_growth(1e-9, 0.8, (1e-9, 0.1), plain);
        assert!((predicted - 0.484_75).abs() < 1e-5, "{predicted}");
        // A step twice the last one doubles the factor (the trend term h/h_prev).
        let doubled = predictive_growth(2e-9, 0.8, (1e-9, 0.1), 2.0);
        assert!((doubled - 2.0 * 0.484_75).abs() < 1e-5, "{doubled}");
    }

    #[test]
    fn the_predictive_rule_never_allows_more_than_the_plain_one_nor_less_than_the_floor() {
        // A falling error: the rule would allow more growth, and the plain factor stands.
        assert_eq!(predictive_growth(1e-9, 0.05, (1e-9, 0.5), MAX_STEP_GROWTH), MAX_STEP_GROWTH);
        // A steep rise after a longer step (0.9·½·(0.01/1)^(1/3) = 0.097) is held at the
        // shrink floor, as a rejected step is.
        assert_eq!(predictive_growth(1e-9, 1.0, (2e-9, PREDICTIVE_ERROR_FLOOR), 0.9), MIN_STEP_SHRINK);
        // Degenerate history gives the plain factor, never a NaN.
        assert_eq!(predictive_growth(1e-9, 0.5, (0.0, 0.1), 1.1), 1.1);
        assert_eq!(predictive_growth(1e-9, f64::NAN, (1e-9, 0.1), 1.1), 1.1);
    }
}
