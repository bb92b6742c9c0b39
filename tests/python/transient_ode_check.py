"""Independent cross-check of Flipwright's transient engine against a general-purpose stiff ODE solver.

Reference: scipy.integrate.solve_ivp from SciPy 1.17.1 with NumPy 2.4.6 (the versions
`cargo xtask test` pins in xtask/src/main.rs; the running ones are printed), method "Radau" (implicit Runge-Kutta, Radau IIA of order 5: Hairer & Wanner, "Solving
Ordinary Differential Equations II", 1996), with tolerances far tighter than the engine's, and
scipy.optimize.root (MINPACK hybrd) for the DC operating point. The engine and the reference share
only the circuit file and the device equations as documented; the numerical methods (the engine's
trapezoidal rule on charges with its own Newton loop, junction limiting and step control) are not
used here.

The device equations are re-implemented below from core/src/device/ebers_moll.rs,
core/src/transient/devices.rs and core/src/transient/system.rs:
- Ebers-Moll transport model (Ebers & Moll, Proc. IRE 42, 1954), NPN frame:
  ICC = IS(e^(VBE/VT) - 1), IEC = IS(e^(VBC/VT) - 1),
  IC = ICC - IEC(1 + 1/bR) + IL, IB = ICC/bF + IEC/bR - IL,
  with the collector-base leakage IL = ILEAK tanh(VCB/(2 VT));
- charges: base-emitter tauF ICC + Qje(VBE), base-collector tauR IEC + Qjc(VBC);
- depletion charge of Cj0/(1 - V/phi)^m, continued with its tangent capacitance beyond V = phi/2;
- diode I = IS(e^(V/(n VT)) - 1) with series resistance, charge tau I + Qj(V);
- exponentials continued linearly beyond an exponent of 80; VT = kT/q with CODATA 2018 k and q;
- the engine's 1 pS gmin from every node to ground and across every junction.
The circuit is the one in the circuit file: voltage sources must have one terminal at ground
(they fix that node), every other node must be reached by charge (so the capacitance matrix is
regular and the network is an ODE in the node voltages: C(v) dv/dt = -i(v, t)).

What is compared (tolerances stated and justified beside each check in main()):
1. the DC operating point at t = 0;
2. every probed node voltage at every time point the engine accepted, against the reference's
   dense output there, for the file's run settings and for a copy with the engine's relative
   tolerance 100 times tighter (the difference must shrink: both must converge to one solution);
3. the time every node that swings more than 1 V first crosses half its swing after the first
   source corner (the switching edge);
4. the current of every probed voltage source, relative to its largest magnitude.

Usage:
    python tests/python/transient_ode_check.py [CIRCUIT.json] [--cli PATH]
CIRCUIT.json defaults to tests/python/transient_ode_check_bistable.json; the engine runs as
`cargo run -q -p flipwright-cli -- simulate CIRCUIT.json --csv ...` unless --cli names a built
`flipwright` binary. Exit status: 0 when every check passes (prints "N passed, 0 failed"), 1 on
any failure, 2 when the input, scipy or the engine run is missing or unusable.
"""

from __future__ import annotations

import argparse
import csv
import json
import math
import subprocess
import sys
import tempfile
from pathlib import Path

USAGE_ERROR = 2
MISMATCH = 1

ROOT = Path(__file__).resolve().parents[2]
DEFAULT_CIRCUIT = ROOT / "tests/python/transient_ode_check_bistable.json"

# core/src/physics.rs (CODATA 2018, exact) and the engine's constants.
BOLTZMANN_J_PER_K = 1.380649e-23
ELEMENTARY_CHARGE_C = 1.602176634e-19
ZERO_CELSIUS_K = 273.15
GMIN_S = 1e-12  # core/src/transient/system.rs GMIN_S
EXP_LIMIT = 80.0  # core/src/device/ebers_moll.rs EXP_LIMIT
DEPLETION_LINEAR_FRACTION = 0.5  # core/src/transient/devices.rs
GROUND_NAMES = ("0", "ground")

# Reference solver tolerances: voltages to about 1 nV, far below every limit checked here.
REFERENCE_RTOL = 1e-10
REFERENCE_ATOL_V = 1e-10


def fail_usage(message: str) -> None:
    print(f"transient_ode_check: {message}", file=sys.stderr)
    sys.exit(USAGE_ERROR)


def thermal_voltage(temperature_c: float) -> float:
    return BOLTZMANN_J_PER_K * (temperature_c + ZERO_CELSIUS_K) / ELEMENTARY_CHARGE_C


def limited_exp(x: float) -> tuple[float, float]:
    if x > EXP_LIMIT:
        at_limit = math.exp(EXP_LIMIT)
        return at_limit * (1.0 + x - EXP_LIMIT), at_limit
    value = math.exp(x)
    return value, value


def junction_current(v: float, saturation_current_a: float, n_vt: float) -> tuple[float, float]:
    e, de = limited_exp(v / n_vt)
    return saturation_current_a * (e - 1.0), saturation_current_a * de / n_vt


def depletion_charge(v: float, cj0: float, phi: float, m: float) -> tuple[float, float]:
    """(charge, capacitance) of Cj0/(1 - V/phi)^m, linear capacitance beyond phi/2."""
    if cj0 == 0.0:
        return 0.0, 0.0
    fc = DEPLETION_LINEAR_FRACTION
    knee = fc * phi
    if v < knee:
        x = 1.0 - v / phi
        return cj0 * phi / (1.0 - m) * (1.0 - x ** (1.0 - m)), cj0 * x ** (-m)
    knee_charge = cj0 * phi / (1.0 - m) * (1.0 - (1.0 - fc) ** (1.0 - m))
    scale = cj0 / (1.0 - fc) ** (1.0 + m)
    dv = v - knee
    charge = knee_charge + scale * ((1.0 - fc * (1.0 + m)) * dv + m / (2.0 * phi) * (v * v - knee * knee))
    return charge, scale * (1.0 - fc * (1.0 + m) + m * v / phi)


# Fields that hold names, not numbers.
TEXT_FIELDS = {"kind", "name", "positive_node", "negative_node", "from_node", "to_node", "anode", "cathode",
               "collector", "base", "emitter", "polarity", "shape"}


def require_plain_numbers(spec: dict, where: str) -> None:
    """The engine also reads "4k7"-style strings; this script reads only plain SI numbers."""
    for key, value in spec.items():
        if isinstance(value, dict):
            require_plain_numbers(value, f"{where}.{key}")
        elif key not in TEXT_FIELDS and isinstance(value, str):
            fail_usage(f"{where}.{key}: write plain SI numbers in the cross-check file (got {value!r})")


class Waveform:
    """A source waveform as core/src/transient/waveform.rs defines it."""

    def __init__(self, spec: dict, where: str):
        self.shape = spec.get("shape")
        self.spec = spec
        if self.shape not in ("constant", "pulse_train", "piecewise_linear"):
            fail_usage(f"{where}: waveform shape {self.shape!r} is not supported")

    def value(self, t: float) -> float:
        s = self.spec
        if self.shape == "constant":
            return s["value"]
        if self.shape == "piecewise_linear":
            points = s["points"]
            if t <= points[0][0]:
                return points[0][1]
            for (t0, v0), (t1, v1) in zip(points, points[1:]):
                if t <= t1:
                    return v0 + (v1 - v0) * (t - t0) / (t1 - t0)
            return points[-1][1]
        if t < s["delay_s"]:
            return s["initial_value"]
        local = math.fmod(t - s["delay_s"], s["period_s"])
        step = s["pulsed_value"] - s["initial_value"]
        rise, width, fall = s["rise_time_s"], s["width_s"], s["fall_time_s"]
        if local < rise:
            return s["initial_value"] + step * local / rise
        if local < rise + width:
            return s["pulsed_value"]
        if local < rise + width + fall:
            return s["pulsed_value"] - step * (local - rise - width) / fall
        return s["initial_value"]

    def corners(self, stop: float) -> list[float]:
        """Slope discontinuities in (0, stop)."""
        s = self.spec
        if self.shape == "constant":
            return []
        if self.shape == "piecewise_linear":
            return [p[0] for p in s["points"] if 0.0 < p[0] < stop]
        found = []
        start = s["delay_s"]
        offsets = (0.0, s["rise_time_s"], s["rise_time_s"] + s["width_s"],
                   s["rise_time_s"] + s["width_s"] + s["fall_time_s"])
        while start < stop:
            found += [start + o for o in offsets if 0.0 < start + o < stop]
            start += s["period_s"]
        return found

    def slope_between(self, t0: float, t1: float) -> float:
        """The constant slope between two consecutive corners."""
        return (self.value(t1) - self.value(t0)) / (t1 - t0)


class Network:
    """The circuit as node voltages: free nodes (unknowns) and nodes fixed by sources."""

    def __init__(self, document: dict):
        circuit = document["circuit"]
        self.temperature_c = circuit.get("temperature_c", 25.0)
        self.nodes: list[str] = []  # every non-ground node, external then internal
        self.fixed: dict[str, tuple[Waveform, float, str]] = {}  # node -> (waveform, sign, source)
        self.conductances: list[tuple[str, str, float]] = []
        self.capacitors: list[tuple[str, str, float]] = []
        self.current_sources: list[tuple[str, str, Waveform]] = []
        self.diodes: list[dict] = []
        self.transistors: list[dict] = []
        self.sources: dict[str, tuple[str, float]] = {}  # source -> (fixed node, sign)

        def node(name: str) -> str | None:
            if name in GROUND_NAMES:
                return None
            if name not in self.nodes:
                self.nodes.append(name)
            return name

        elements = circuit["elements"]
        for index, element in enumerate(elements):
            require_plain_numbers(element, f"circuit.elements[{index}]")
        for element in elements:
            for key in ("positive_node", "negative_node", "from_node", "to_node", "anode", "cathode",
                        "collector", "base", "emitter"):
                if key in element:
                    node(element[key])
        for index, element in enumerate(elements):
            where = f"circuit.elements[{index}]"
            kind, name = element["kind"], element["name"]
            if kind == "resistor":
                self.conductances.append((node(element["positive_node"]), node(element["negative_node"]),
                                          1.0 / element["resistance_ohm"]))
            elif kind == "capacitor":
                self.capacitors.append((node(element["positive_node"]), node(element["negative_node"]),
                                        element["capacitance_f"]))
            elif kind == "voltage_source":
                positive, negative = node(element["positive_node"]), node(element["negative_node"])
                waveform = Waveform(element["waveform"], f"{where}.waveform")
                if positive is not None and negative is None:
                    self.fixed[positive] = (waveform, 1.0, name)
                    self.sources[name] = (positive, 1.0)
                elif positive is None and negative is not None:
                    self.fixed[negative] = (waveform, -1.0, name)
                    self.sources[name] = (negative, -1.0)
                else:
                    fail_usage(f"{where}: only voltage sources with one terminal at ground are supported")
            elif kind == "current_source":
                self.current_sources.append((node(element["from_node"]), node(element["to_node"]),
                                             Waveform(element["waveform"], f"{where}.waveform")))
            elif kind == "diode":
                model = element["model"]
                anode = node(element["anode"])
                if model.get("series_resistance_ohm", 0.0) > 0.0:
                    inner = node(f"{name}.anode")
                    self.conductances.append((anode, inner, 1.0 / model["series_resistance_ohm"]))
                    anode = inner
                self.diodes.append({
                    "anode": anode, "cathode": node(element["cathode"]),
                    "is": model["saturation_current_a"],
                    "n_vt": model["emission_coefficient"] * thermal_voltage(self.temperature_c),
                    "cj0": model.get("junction_capacitance_f", 0.0),
                    "phi": model.get("junction_potential_v", 0.75),
                    "m": model.get("junction_grading", 0.33),
                    "tau": model.get("transit_time_s", 0.0),
                })
            elif kind == "transistor":
                model = element["model"]
                base, collector = node(element["base"]), node(element["collector"])
                if model.get("base_resistance_ohm", 0.0) > 0.0:
                    inner = node(f"{name}.base")
                    self.conductances.append((base, inner, 1.0 / model["base_resistance_ohm"]))
                    base = inner
                if model.get("collector_resistance_ohm", 0.0) > 0.0:
                    inner = node(f"{name}.collector")
                    self.conductances.append((collector, inner, 1.0 / model["collector_resistance_ohm"]))
                    collector = inner
                self.transistors.append({
                    "c": collector, "b": base, "e": node(element["emitter"]),
                    "sign": 1.0 if model["polarity"] == "npn" else -1.0,
                    "vt": thermal_voltage(model.get("temperature_c", self.temperature_c)),
                    "is": model["saturation_current_a"], "bf": model["beta_forward"],
                    "br": model["beta_reverse"], "tf": model["forward_transit_s"],
                    "tr": model["reverse_transit_s"],
                    "cje": model.get("emitter_junction_capacitance_f", 0.0),
                    "cjc": model.get("collector_junction_capacitance_f", 0.0),
                    "phie": model.get("emitter_junction_potential_v", 0.75),
                    "phic": model.get("collector_junction_potential_v", 0.75),
                    "m": model.get("junction_grading", 0.33),
                    "leak": model.get("leakage_a", 0.0),
                })
            else:
                fail_usage(f"{where}: element kind {kind!r} is not supported")
        self.free = [n for n in self.nodes if n not in self.fixed]
        self.free_index = {n: i for i, n in enumerate(self.free)}

    def smallest_capacitance(self) -> float:
        """The smallest capacitor or zero-bias junction capacitance in the circuit."""
        values = [c for _, _, c in self.capacitors]
        values += [d["cj0"] for d in self.diodes]
        values += [q[key] for q in self.transistors for key in ("cje", "cjc")]
        return min(c for c in values if c > 0.0)

    def corners(self, stop: float) -> list[float]:
        found = set()
        for waveform, _, _ in self.fixed.values():
            found.update(waveform.corners(stop))
        for _, _, waveform in self.current_sources:
            found.update(waveform.corners(stop))
        return sorted(found)

    def voltages(self, x, t: float) -> dict:
        v = {n: x[i] for n, i in self.free_index.items()}
        for n, (waveform, sign, _) in self.fixed.items():
            v[n] = sign * waveform.value(t)
        v[None] = 0.0
        return v

    def evaluate(self, x, t: float):
        """Static currents leaving each node and the charge branches (a, b, capacitance)."""
        v = self.voltages(x, t)
        leaving = {n: GMIN_S * v[n] for n in self.nodes}
        leaving[None] = 0.0
        charges: list[tuple[str | None, str | None, float]] = []

        def branch(a, b, current):
            leaving[a] += current
            leaving[b] -= current

        for a, b, g in self.conductances:
            branch(a, b, g * (v[a] - v[b]))
        for a, b, c in self.capacitors:
            charges.append((a, b, c))
        for a, b, waveform in self.current_sources:
            branch(a, b, waveform.value(t))
        for d in self.diodes:
            vd = v[d["anode"]] - v[d["cathode"]]
            i, g = junction_current(vd, d["is"], d["n_vt"])
            branch(d["anode"], d["cathode"], i + GMIN_S * vd)
            _, cj = depletion_charge(vd, d["cj0"], d["phi"], d["m"])
            charges.append((d["anode"], d["cathode"], cj + d["tau"] * g))
        for q in self.transistors:
            s = q["sign"]
            vbe = s * (v[q["b"]] - v[q["e"]])
            vbc = s * (v[q["b"]] - v[q["c"]])
            icc, gf = junction_current(vbe, q["is"], q["vt"])
            iec, gr = junction_current(vbc, q["is"], q["vt"])
            leak = q["leak"] * math.tanh(-vbc / (2.0 * q["vt"]))
            ic = icc - iec * (1.0 + 1.0 / q["br"]) + leak
            ib = icc / q["bf"] + iec / q["br"] - leak
            # Currents into the collector and base terminals (real frame) leave those nodes;
            # gmin across both junctions; the emitter returns their sum.
            into_c = s * ic + GMIN_S * (v[q["c"]] - v[q["b"]])
            into_b = s * ib + GMIN_S * (v[q["b"]] - v[q["e"]]) + GMIN_S * (v[q["b"]] - v[q["c"]])
            leaving[q["c"]] += into_c
            leaving[q["b"]] += into_b
            leaving[q["e"]] -= into_c + into_b
            _, cje = depletion_charge(vbe, q["cje"], q["phie"], q["m"])
            _, cjc = depletion_charge(vbc, q["cjc"], q["phic"], q["m"])
            charges.append((q["b"], q["e"], q["tf"] * gf + cje))
            charges.append((q["b"], q["c"], q["tr"] * gr + cjc))
        return v, leaving, charges

    def fixed_slopes(self, t0: float, t1: float) -> dict[str, float]:
        return {n: sign * waveform.slope_between(t0, t1) for n, (waveform, sign, _) in self.fixed.items()}

    def derivative(self, t: float, x, slopes: dict[str, float]):
        """dx/dt from C(v) dx/dt = -(static currents + charge currents driven by the sources)."""
        import numpy as np

        _, leaving, charges = self.evaluate(x, t)
        size = len(self.free)
        matrix = np.zeros((size, size))
        rhs = np.array([-leaving[n] for n in self.free])
        for a, b, c in charges:
            ia, ib = self.free_index.get(a), self.free_index.get(b)
            # Known derivative of a fixed node (ground: 0) moves to the right-hand side.
            known = slopes.get(a, 0.0) if ia is None else 0.0
            known -= slopes.get(b, 0.0) if ib is None else 0.0
            for row, sign in ((ia, 1.0), (ib, -1.0)):
                if row is None:
                    continue
                rhs[row] -= sign * c * known
                if ia is not None:
                    matrix[row, ia] += sign * c
                if ib is not None:
                    matrix[row, ib] -= sign * c
        try:
            return np.linalg.solve(matrix, rhs)
        except np.linalg.LinAlgError:
            # Only a wild Newton trial of the solver gets here (a junction forward-biased by
            # volts, its diffusion capacitance 1e25 times the others); a non-finite derivative
            # makes Radau reject the trial and retry with a fresh Jacobian or a shorter step.
            return np.full(size, np.nan)

    def source_currents(self, t: float, x, xdot, slopes: dict[str, float]) -> dict[str, float]:
        """Current through each voltage source from its positive terminal to its negative one."""
        _, leaving, charges = self.evaluate(x, t)
        rate = {n: xdot[i] for n, i in self.free_index.items()}
        rate.update(slopes)
        rate[None] = 0.0
        total = dict(leaving)
        for a, b, c in charges:
            current = c * (rate[a] - rate[b])
            total[a] += current
            total[b] -= current
        # KCL at the fixed node: the source takes what the other branches do not.
        return {name: (-total[n] if sign > 0 else total[n]) for name, (n, sign) in self.sources.items()}


def run_engine(cli: list[str], circuit: Path, csv_path: Path) -> dict[str, list[float]]:
    command = cli + ["simulate", str(circuit), "--csv", str(csv_path)]
    completed = subprocess.run(command, cwd=ROOT, capture_output=True, text=True)
    if completed.returncode != 0:
        fail_usage(f"the engine run `{' '.join(command)}` failed ({completed.returncode}):\n{completed.stderr}")
    with open(csv_path, newline="") as handle:
        rows = list(csv.reader(handle))
    header, body = rows[0], rows[1:]
    return {name: [float(row[i]) for row in body] for i, name in enumerate(header)}


def column_node(column: str) -> str | None:
    if column.startswith("voltage(") and column.endswith(")_v"):
        return column[len("voltage("):-len(")_v")]
    return None


def column_source(column: str) -> str | None:
    if column.startswith("current(") and column.endswith(")_a"):
        return column[len("current("):-len(")_a")]
    return None


class Reference:
    """The reference solution: DC point by root finding, then Radau between source corners."""

    def __init__(self, network: Network, start_guess, stop: float):
        import numpy as np
        from scipy.integrate import solve_ivp
        from scipy.optimize import root

        self.network = network
        def dc_residual(x):
            _, leaving, _ = network.evaluate(x, 0.0)
            return np.array([leaving[n] for n in network.free])

        solution = root(dc_residual, np.array(start_guess), method="hybr")
        if not solution.success:
            fail_usage(f"the reference DC solve failed: {solution.message}")
        self.dc = solution.x
        self.dc_residual_a = float(np.max(np.abs(dc_residual(self.dc))))
        self.guess_residual_a = float(np.max(np.abs(dc_residual(np.array(start_guess)))))
        edges = [0.0] + network.corners(stop) + [stop]
        self.segments = []
        state = self.dc
        for t0, t1 in zip(edges, edges[1:]):
            slopes = network.fixed_slopes(t0, t1)
            result = solve_ivp(
                lambda t, x: network.derivative(t, x, slopes),
                (t0, t1), state, method="Radau", rtol=REFERENCE_RTOL, atol=REFERENCE_ATOL_V,
                dense_output=True,
            )
            if not result.success:
                fail_usage(f"the reference integration failed on [{t0:.4e}, {t1:.4e}] s: {result.message}")
            self.segments.append((t0, t1, result.sol, slopes))
            state = result.y[:, -1]
        self.stop = stop

    def segment(self, t: float):
        for segment in self.segments:
            if t <= segment[1]:
                return segment
        return self.segments[-1]

    def state(self, t: float):
        if t <= 0.0:
            return self.dc
        return self.segment(t)[2](t)

    def node_voltage(self, node: str, t: float) -> float:
        if node in self.network.fixed:
            waveform, sign, _ = self.network.fixed[node]
            return sign * waveform.value(t)
        return float(self.state(t)[self.network.free_index[node]])

    def source_current(self, source: str, t: float) -> float:
        slopes = self.segment(t)[3]
        if t <= 0.0:
            slopes = {n: 0.0 for n in self.network.fixed}
        x = self.state(t)
        xdot = self.network.derivative(t, x, slopes) if t > 0.0 else [0.0] * len(x)
        return self.network.source_currents(t, x, xdot, slopes)[source]

    def slope(self, node: str, t: float) -> float:
        """dv/dt of a free node from the equations themselves at time t."""
        slopes = self.segment(t)[3]
        return float(self.network.derivative(t, self.state(t), slopes)[self.network.free_index[node]])

    def crossing(self, node: str, level: float, after: float, rising: bool) -> float | None:
        """First crossing of `level` after `after`, by bisection on the dense output."""
        import numpy as np

        grid = np.linspace(after, self.stop, 20001)
        values = [self.node_voltage(node, t) - level for t in grid]
        for (ta, va), (tb, vb) in zip(zip(grid, values), zip(grid[1:], values[1:])):
            if (va < 0.0 <= vb and rising) or (va >= 0.0 > vb and not rising):
                lo, hi = ta, tb
                for _ in range(60):
                    mid = 0.5 * (lo + hi)
                    below = self.node_voltage(node, mid) < level
                    if below == rising:
                        lo = mid
                    else:
                        hi = mid
                return 0.5 * (lo + hi)
        return None


def engine_crossing(times, values, level: float, after: float, rising: bool) -> float | None:
    """First crossing by linear interpolation between the engine's points, as measure.rs does."""
    for (ta, va), (tb, vb) in zip(zip(times, values), zip(times[1:], values[1:])):
        if ta < after:
            continue
        if (va < level <= vb and rising) or (va >= level > vb and not rising):
            return ta + (level - va) / (vb - va) * (tb - ta)
    return None


def compare(label: str, engine: dict[str, list[float]], reference: Reference) -> dict:
    """Largest differences over the run at the engine's own time points."""
    times = engine["time_s"]
    worst_v, worst_v_where = 0.0, ""
    worst_i, worst_i_where = 0.0, ""
    for column, values in engine.items():
        node = column_node(column)
        source = column_source(column)
        if node is not None:
            for t, value in zip(times, values):
                difference = abs(value - reference.node_voltage(node, t))
                if difference > worst_v:
                    worst_v, worst_v_where = difference, f"{node} at t = {t:.4e} s"
        elif source is not None:
            scale = max(max(abs(v) for v in values), 1e-30)
            for t, value in zip(times, values):
                difference = abs(value - reference.source_current(source, t)) / scale
                if difference > worst_i:
                    worst_i, worst_i_where = difference, f"{source} at t = {t:.4e} s"
    print(f"  {label}: {len(times)} engine points; largest |dV| {worst_v:.3e} V ({worst_v_where}); "
          f"largest current difference {worst_i:.3e} of its peak ({worst_i_where})")
    return {"volts": worst_v, "volts_where": worst_v_where, "current": worst_i, "current_where": worst_i_where}


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("circuit", nargs="?", default=str(DEFAULT_CIRCUIT))
    parser.add_argument("--cli", help="a built flipwright binary (default: cargo run -q -p flipwright-cli --)")
    arguments = parser.parse_args()
    try:
        import numpy as np
        import scipy
    except ImportError:
        fail_usage("needs numpy and scipy in this Python, e.g. python3 -m venv /tmp/v && "
                   "/tmp/v/bin/pip install numpy==2.4.6 scipy==1.17.1")
    circuit_path = Path(arguments.circuit).resolve()
    document = json.loads(circuit_path.read_text())
    if document.get("format") != "flipwright-circuit":
        fail_usage(f"{circuit_path} is not a flipwright-circuit file")
    cli = [arguments.cli] if arguments.cli else ["cargo", "run", "-q", "-p", "flipwright-cli", "--"]
    print(f"reference: scipy.integrate.solve_ivp (Radau, rtol {REFERENCE_RTOL:g}, atol {REFERENCE_ATOL_V:g} V) "
          f"and scipy.optimize.root (hybr), SciPy {scipy.__version__}, NumPy {np.__version__}")
    print(f"circuit: {circuit_path.relative_to(ROOT) if circuit_path.is_relative_to(ROOT) else circuit_path}")

    require_plain_numbers(document["run"], "run")
    network = Network(document)
    stop = document["run"]["stop_time_s"]
    passed = 0
    failures: list[str] = []

    def check(ok: bool, description: str) -> None:
        nonlocal passed
        print(f"{'PASS' if ok else 'FAIL'} {description}")
        if ok:
            passed += 1
        else:
            failures.append(description)

    with tempfile.TemporaryDirectory() as scratch:
        scratch_dir = Path(scratch)
        engine = run_engine(cli, circuit_path, scratch_dir / "default.csv")
        # The same circuit with the engine's relative tolerance 100 times tighter.
        tight_document = json.loads(json.dumps(document))
        default_relative = tight_document["run"].get("relative_tolerance", 1e-3)
        tight_document["run"]["relative_tolerance"] = default_relative / 100.0
        tight_path = scratch_dir / "tight.json"
        tight_path.write_text(json.dumps(tight_document))
        tight = run_engine(cli, tight_path, scratch_dir / "tight.csv")

    probed = [n for n in map(column_node, engine) if n is not None]
    missing = [n for n in network.free if n not in probed]
    if missing:
        fail_usage(f"the circuit file must probe every node for the DC comparison; missing: {', '.join(missing)}")
    start_guess = [engine[f"voltage({n})_v"][0] for n in network.free]
    reference = Reference(network, start_guess, stop)

    # 1. DC point. The engine's DC Newton stops when the last update is below 1e-6 relative
    # plus 1 nV; with quadratic convergence the remaining error is far smaller, so 1 µV is a
    # generous bound. The residual of the engine's point in the reference's own equations is
    # printed too (amperes).
    dc_difference = max(abs(engine[f"voltage({n})_v"][0] - reference.dc[i]) for n, i in network.free_index.items())
    print(f"  DC: reference residual {reference.dc_residual_a:.2e} A; the engine's point gives "
          f"{reference.guess_residual_a:.2e} A in the reference equations")
    check(dc_difference < 1e-6, f"DC operating point: largest |dV| {dc_difference:.3e} V < 1e-6 V")

    default_charge = document["run"].get("charge_tolerance_c", 1e-15)
    default = compare(f"relative tolerance {default_relative:g}", engine, reference)
    tightened = compare(f"relative tolerance {default_relative / 100.0:g}", tight, reference)

    # 2. Waveforms. [der] The engine keeps each charge's local truncation error per step below
    # relative_tolerance·|q| + charge_tolerance_c; a node voltage inherits that as about
    # relative_tolerance·swing + charge_tolerance_c/C, with C the smallest capacitance at a
    # node. The limit allows twice that, for the accumulation over the run's edges (the
    # numbers are printed; at 1e-5 the absolute charge tolerance, unchanged, dominates). Model
    # differences show far above it: in trials, tauF 20 % or Cjc 5 % off gave 0.25 V, the
    # diode's transit time 10 % off 46 mV, tauR 5 % off 19 mV (caught by the 1e-5 run).
    swing = max(max(values) - min(values) for column, values in engine.items() if column_node(column))
    smallest_c = network.smallest_capacitance()

    def voltage_limit(relative: float) -> float:
        return 2.0 * (relative * swing + default_charge / smallest_c)

    limits = {"default": voltage_limit(default_relative), "tight": voltage_limit(default_relative / 100.0)}
    print(f"  limits: swing {swing:.3f} V, smallest capacitance {smallest_c:.3e} F -> "
          f"{limits['default']:.3e} V (default), {limits['tight']:.3e} V (tolerance / 100)")
    check(default["volts"] < limits["default"],
          f"node voltages, default tolerance: largest |dV| {default['volts']:.3e} V < {limits['default']:.3e} V")
    check(tightened["volts"] < limits["tight"],
          f"node voltages, tolerance / 100: largest |dV| {tightened['volts']:.3e} V < {limits['tight']:.3e} V")
    check(tightened["volts"] < default["volts"],
          f"tighter engine tolerance moves closer to the reference ({tightened['volts']:.3e} V < "
          f"{default['volts']:.3e} V)")

    # 3. Switching edges: the first half-swing crossing after the first source corner of every
    # node that swings more than 1 V. A voltage error dV at a crossing whose slope is dv/dt is
    # a time error dV/|dv/dt|, so the limit is the voltage limit over the reference's slope there.
    first_corner = min(network.corners(stop), default=0.0)
    for column, values in engine.items():
        node = column_node(column)
        if node is None or max(values) - min(values) < 1.0:
            continue
        level = 0.5 * (min(values) + max(values))
        after = [v for t, v in zip(engine["time_s"], values) if t >= first_corner]
        rising = bool(after) and after[0] < level
        t_reference = reference.crossing(node, level, first_corner, rising)
        t_engine = engine_crossing(engine["time_s"], values, level, first_corner, rising)
        t_tight = engine_crossing(tight["time_s"], tight[column], level, first_corner, rising)
        if t_engine is None or t_reference is None or t_tight is None:
            check(False, f"{node}: a {'rising' if rising else 'falling'} edge through {level:.3f} V in every solution")
            continue
        slope = reference.slope(node, t_reference)
        print(f"  {node} {'rises' if rising else 'falls'} through {level:.3f} V at {t_reference:.6e} s "
              f"(reference, {slope / 1e9:.3f} V/ns), {t_engine:.6e} s (engine), {t_tight:.6e} s "
              f"(engine, tolerance / 100)")
        for name, t_run in (("default tolerance", t_engine), ("tolerance / 100", t_tight)):
            key = "default" if name == "default tolerance" else "tight"
            limit = limits[key] / abs(slope)
            check(abs(t_run - t_reference) < limit,
                  f"{node} edge time, {name}: |dt| {abs(t_run - t_reference):.3e} s < {limit:.3e} s")

    # 4. Source currents, relative to each one's peak. Currents through charges are the
    # charges' time derivatives, which the engine's error control does not watch directly;
    # right after each source corner it restarts with one backward-Euler step, whose current is
    # the step's mean rather than its end value (first order), so there the difference does
    # not shrink with the tolerance. Limits 3 % at the default tolerance and 1 % at 100 times
    # tighter; a missing or wrong charge shows as tens of percent.
    if default["current_where"]:
        check(default["current"] < 0.03,
              f"source currents, default tolerance: largest difference {default['current']:.3e} of peak < 0.03")
        check(tightened["current"] < 0.01,
              f"source currents, tolerance / 100: largest difference {tightened['current']:.3e} of peak < 0.01")

    for description in failures:
        print(f"MISMATCH {description}", file=sys.stderr)
    print(f"{passed} passed, {len(failures)} failed")
    return MISMATCH if failures else 0


if __name__ == "__main__":
    sys.exit(main())
