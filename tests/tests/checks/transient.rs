//! Transient engine: operating points and waveforms against closed forms and published
//! device formulas, and no panic on arbitrary circuit descriptions.

use flipwright::device::ebers_moll::{saturation_voltage, storage_time_constant, EbersMoll};
use flipwright::device::Polarity;
use flipwright::physics::thermal_voltage;
use flipwright::transient::measure::{crossings, first_crossing_after, Edge};
use flipwright::transient::system::GMIN_S;
use flipwright::transient::{
    operating_point, simulate, simulate_with, Circuit, DenseSolver, DiodeModel, Element, OperatingPointHints,
    SparseSolver, TransientSettings, Waveform,
};
use proptest::prelude::*;

fn resistor(name: &str, a: &str, b: &str, resistance_ohm: f64) -> Element {
    Element::Resistor { name: name.into(), positive_node: a.into(), negative_node: b.into(), resistance_ohm }
}
fn capacitor(name: &str, a: &str, b: &str, capacitance_f: f64) -> Element {
    Element::Capacitor { name: name.into(), positive_node: a.into(), negative_node: b.into(), capacitance_f }
}
fn voltage_source(name: &str, a: &str, b: &str, waveform: Waveform) -> Element {
    Element::VoltageSource { name: name.into(), positive_node: a.into(), negative_node: b.into(), waveform }
}
fn current_source(name: &str, from: &str, to: &str, waveform: Waveform) -> Element {
    Element::CurrentSource { name: name.into(), from_node: from.into(), to_node: to.into(), waveform }
}
fn circuit(elements: Vec<Element>) -> Circuit {
    Circuit { elements, temperature_c: 25.0 }
}
/// A step from 0 to `v` at t = 0 with a 1e-10 s ramp (a pulse whose width outlasts the run).
fn step(v: f64) -> Waveform {
    Waveform::PulseTrain {
        initial_value: 0.0,
        pulsed_value: v,
        delay_s: 0.0,
        rise_time_s: 1e-10,
        fall_time_s: 1e-10,
        width_s: 10.0,
        period_s: 20.0,
    }
}
fn switching_transistor(polarity: Polarity) -> EbersMoll {
    EbersMoll {
        polarity,
        temperature_c: 25.0,
        saturation_current_a: 1e-14,
        beta_forward: 100.0,
        beta_reverse: 2.0,
        forward_transit_s: 0.5e-9,
        reverse_transit_s: 20e-9,
        emitter_junction_capacitance_f: 0.0,
        collector_junction_capacitance_f: 0.0,
        emitter_junction_potential_v: 0.75,
        collector_junction_potential_v: 0.75,
        junction_grading: 0.33,
        base_resistance_ohm: 0.0,
        collector_resistance_ohm: 0.0,
        leakage_a: 0.0,
        band_gap_ev: 1.11,
    }
}

/// Runs and returns (times, node waveform).
fn run(circuit: &Circuit, settings: &TransientSettings, node: &str) -> (Vec<f64>, Vec<f64>) {
    match simulate(circuit, settings, &OperatingPointHints::default()) {
        Ok(result) => (result.time_s.clone(), result.voltage(node).map(|v| v.to_vec()).unwrap_or_default()),
        Err(error) => panic!("simulation failed: {error}"),
    }
}

#[test]
fn rc_charging_follows_the_exponential() {
    // Closed form of a first-order RC step response (any circuits text): v = V(1 − e^(−t/RC)).
    // The 1e-10 s source ramp is accounted for by delaying the step by half the ramp, exact
    // for t beyond the ramp. Tolerance 1e-4·V: with relative_tolerance 1e-5 per step the
    // trapezoidal rule's accumulated error on this decaying response stays an order below.
    let (r, c, v) = (1e3, 1e-6, 1.0);
    let tau = r * c;
    let net = circuit(vec![
        voltage_source("V1", "in", "0", step(v)),
        resistor("R1", "in", "out", r),
        capacitor("C1", "out", "0", c),
    ]);
    let mut settings = TransientSettings::new(5.0 * tau);
    settings.relative_tolerance = 1e-5;
    let (times, out) = run(&net, &settings, "out");
    assert!(times.len() > 20, "too few points: {}", times.len());
    let mut worst: f64 = 0.0;
    for (&t, &value) in times.iter().zip(&out) {
        if t < 1e-9 {
            continue;
        }
        let expected = v * (1.0 - (-(t - 0.5e-10) / tau).exp());
        worst = worst.max((value - expected).abs());
    }
    eprintln!("RC: largest deviation {worst:e} V over {} points", times.len());
    assert!(worst < 1e-4 * v, "largest deviation {worst:e} V over {} points", times.len());
    assert!((times.last().copied().unwrap_or(0.0) - 5.0 * tau).abs() < 1e-15);
}

#[test]
fn rc_ladder_step_matches_its_two_eigenmodes() {
    // Two-section RC ladder, state equations (nodal analysis by hand):
    //   C1·v1' = (V − v1)/R1 − (v1 − v2)/R2,   C2·v2' = (v1 − v2)/R2.
    // x' = A·x + b with A = [[−(g1+g2)/C1, g2/C1], [g2/C2, −g2/C2]]; for a step from rest
    // x(t) = V·[1, 1] + k1·e^(λ1 t)·w1 + k2·e^(λ2 t)·w2 with λ the roots of
    // λ² − tr(A)·λ + det(A) = 0 and w = [a12, λ − a11]. Tolerance 2e-4·V as for the single RC
    // (two modes, one ten times faster).
    let (r1, r2, c1, c2, v): (f64, f64, f64, f64, f64) = (1e3, 2e3, 1e-6, 0.5e-7, 2.0);
    let (g1, g2) = (1.0 / r1, 1.0 / r2);
    let (a11, a12, a21, a22) = (-(g1 + g2) / c1, g2 / c1, g2 / c2, -g2 / c2);
    let trace = a11 + a22;
    let det = a11 * a22 - a12 * a21;
    let root = (trace * trace / 4.0 - det).sqrt();
    let (l1, l2) = (trace / 2.0 + root, trace / 2.0 - root);
    let (w1, w2) = ([a12, l1 - a11], [a12, l2 - a11]);
    // k1·w1 + k2·w2 = −V·[1, 1] (Cramer's rule).
    let d = w1[0] * w2[1] - w2[0] * w1[1];
    let k1 = (-v * w2[1] + v * w2[0]) / d;
    let k2 = (-v * w1[0] + v * w1[1]) / d;
    let net = circuit(vec![
        voltage_source("V1", "in", "ground", step(v)),
        resistor("R1", "in", "n1", r1),
        capacitor("C1", "n1", "ground", c1),
        resistor("R2", "n1", "n2", r2),
        capacitor("C2", "n2", "ground", c2),
    ]);
    let slow = 1.0 / l1.abs();
    let mut settings = TransientSettings::new(4.0 * slow);
    settings.relative_tolerance = 1e-5;
    let result = simulate(&net, &settings, &OperatingPointHints::default());
    let Ok(result) = result else { panic!("{result:?}") };
    let (n1, n2) = (result.voltage("n1").unwrap_or(&[]), result.voltage("n2").unwrap_or(&[]));
    let mut worst: f64 = 0.0;
    for ((&t, &x1), &x2) in result.time_s.iter().zip(n1).zip(n2) {
        if t < 1e-9 {
            continue;
        }
        let ts = t - 0.5e-10;
        let e1 = (l1 * ts).exp();
        let e2 = (l2 * ts).exp();
        let expected = [v + k1 * e1 * w1[0] + k2 * e2 * w2[0], v + k1 * e1 * w1[1] + k2 * e2 * w2[1]];
        worst = worst.max((x1 - expected[0]).abs()).max((x2 - expected[1]).abs());
    }
    eprintln!("RC ladder: largest deviation {worst:e} V over {} points", result.time_s.len());
    assert!(worst < 2e-4 * v, "largest deviation {worst:e} V");
}

/// Principal branch of Lambert W for x ≥ 0 by Halley iteration (Corless et al., "On the
/// Lambert W function", Adv. Comput. Math. 5, 1996, eq. 5.9), from a logarithmic start.
fn lambert_w(x: f64) -> f64 {
    let mut w = if x < 1.0 { x } else { x.ln() - x.ln().ln().max(0.0) };
    for _ in 0..100 {
        let e = w.exp();
        let f = w * e - x;
        let next = w - f / (e * (w + 1.0) - (w + 2.0) * f / (2.0 * w + 2.0));
        if (next - w).abs() <= 1e-15 * next.abs().max(1e-300) {
            return next;
        }
        w = next;
    }
    w
}

#[test]
fn diode_resistor_operating_point_matches_lambert_w() {
    // Closed form of the series diode–resistor circuit (Banwell & Jayakumar, "Exact analytical
    // solution for current flow through diode with series resistance", Electronics Letters
    // 36(4), 2000): I = (n·VT/R)·W((IS·R/(n·VT))·e^((V + IS·R)/(n·VT))) − IS.
    // The engine puts gmin (1 pS) from the node to ground and across the junction; that
    // known 2·gmin·V(a) is taken off the resistor current before comparing (it is 2.5e-4 of
    // the 2.4 nA case). Tolerance 1e-5 relative: the node voltage is good to about 1e-9 V
    // (Newton's last update was below 1e-6 relative and convergence is quadratic), and in the
    // 0.3 V / 100 kΩ case the resistor drops only 0.24 mV, so that is 4e-6 of the current.
    for (v, r, is, n) in
        [(5.0, 1e3, 1e-14, 1.0), (5.0, 1e3, 1e-9, 1.8), (0.3, 1e5, 1e-12, 1.5), (12.0, 47.0, 2e-15, 1.2)]
    {
        let diode = DiodeModel {
            saturation_current_a: is,
            emission_coefficient: n,
            series_resistance_ohm: 0.0,
            junction_capacitance_f: 0.0,
            junction_potential_v: 0.75,
            junction_grading: 0.33,
            transit_time_s: 0.0,
        };
        let net = circuit(vec![
            voltage_source("V1", "in", "0", Waveform::Constant { value: v }),
            resistor("R1", "in", "a", r),
            Element::Diode { name: "D1".into(), anode: "a".into(), cathode: "0".into(), model: diode },
        ]);
        let op = operating_point(&net, &OperatingPointHints::default());
        let Ok(op) = op else { panic!("{op:?}") };
        let anode_v = op.voltage("a").unwrap_or(f64::NAN);
        let simulated = (v - anode_v) / r - 2.0 * GMIN_S * anode_v;
        let n_vt = n * thermal_voltage(25.0);
        let expected = n_vt / r * lambert_w(is * r / n_vt * ((v + is * r) / n_vt).exp()) - is;
        assert!(
            ((simulated - expected) / expected).abs() < 1e-5,
            "V {v} R {r}: {simulated:e} A vs closed form {expected:e} A"
        );
    }
}

#[test]
fn saturated_switch_vce_sat_matches_jaeger_blalock() {
    // VCE(sat) = VT·ln{[1 + (βf + 1)/βR] / [1 − βf/βF]} (Jaeger & Blalock, Microelectronic
    // Circuit Design, Ebers–Moll saturation voltage), forced gain set by two current sources.
    // Tolerance 1 µV: the formula drops the "−1" terms (relative IS/IB ≈ 1e-11) and Newton
    // converges quadratically below its 1 nV update limit. The PNP case must mirror exactly.
    for (ic, forced_gain) in [(10e-3, 10.0), (1e-3, 50.0), (5e-3, 2.0)] {
        for polarity in [Polarity::Npn, Polarity::Pnp] {
            let sign = polarity.sign();
            let net = circuit(vec![
                current_source("IC", "0", "c", Waveform::Constant { value: sign * ic }),
                current_source("IB", "0", "b", Waveform::Constant { value: sign * ic / forced_gain }),
                Element::Transistor {
                    name: "Q1".into(),
                    collector: "c".into(),
                    base: "b".into(),
                    emitter: "0".into(),
                    model: switching_transistor(polarity),
                },
            ]);
            let op = operating_point(&net, &OperatingPointHints::default());
            let Ok(op) = op else { panic!("{op:?}") };
            let model = switching_transistor(polarity);
            let expected = saturation_voltage(
                thermal_voltage(25.0),
                forced_gain,
                model.beta_forward,
                model.beta_reverse,
            )
            .unwrap_or(f64::NAN);
            let simulated = sign * op.voltage("c").unwrap_or(f64::NAN);
            assert!(
                (simulated - expected).abs() < 1e-6,
                "{polarity:?} IC {ic} βf {forced_gain}: {simulated} V vs {expected} V"
            );
        }
    }
}

#[test]
fn storage_time_of_a_current_driven_switch_matches_charge_control() {
    // ts = τS·ln[(IB1 + IB2)/(IC/β + IB2)] (charge control; Moll, Proc. IRE 1954), τS from
    // Moll's transit-time form. Junction capacitances are zero so only the diffusion charges
    // of the model store charge. The end of storage is taken where the collector voltage has
    // risen 10 % of its swing (IC down to 90 %), which adds a small part of the fall.
    // Tolerance 15 %: the formula is first-order charge control (constant τS, IC/β edge).
    let model = switching_transistor(Polarity::Npn);
    let tau_s = storage_time_constant(&model);
    let (vcc, rc) = (5.0, 500.0);
    let delay_s = 100e-9;
    for (ib1, ib2) in [(2e-3, 1e-3), (2e-3, 2e-3), (1e-3, 0.5e-3)] {
        let base_drive = Waveform::PulseTrain {
            initial_value: ib1,
            pulsed_value: -ib2,
            delay_s,
            rise_time_s: 0.1e-9,
            fall_time_s: 0.1e-9,
            width_s: 1e-3,
            period_s: 2e-3,
        };
        let clamp = DiodeModel {
            saturation_current_a: 1e-15,
            emission_coefficient: 1.0,
            series_resistance_ohm: 0.0,
            junction_capacitance_f: 0.0,
            junction_potential_v: 0.75,
            junction_grading: 0.33,
            transit_time_s: 0.0,
        };
        let net = circuit(vec![
            voltage_source("VCC", "vcc", "0", Waveform::Constant { value: vcc }),
            resistor("RC", "vcc", "c", rc),
            current_source("IB", "0", "b", base_drive),
            // Holds the base near −0.7 V after turn-off, so the reverse drive has somewhere to go.
            Element::Diode { name: "DCLAMP".into(), anode: "0".into(), cathode: "b".into(), model: clamp },
            Element::Transistor {
                name: "Q1".into(),
                collector: "c".into(),
                base: "b".into(),
                emitter: "0".into(),
                model,
            },
        ]);
        let settings = TransientSettings::new(delay_s + 6.0 * tau_s);
        let (times, collector) = run(&net, &settings, "c");
        let vce_sat = collector.first().copied().unwrap_or(f64::NAN);
        let ic = (vcc - vce_sat) / rc;
        let expected = tau_s * ((ib1 + ib2) / (ic / model.beta_forward + ib2)).ln();
        let threshold = vce_sat + 0.1 * (vcc - vce_sat);
        let end =
            first_crossing_after(&times, &collector, threshold, Edge::Rising, delay_s).unwrap_or(f64::NAN);
        let simulated = end - (delay_s + 0.05e-9);
        eprintln!("storage IB1 {ib1} IB2 {ib2}: {simulated:e} s vs {expected:e} s");
        assert!(
            ((simulated - expected) / expected).abs() < 0.15,
            "IB1 {ib1} IB2 {ib2}: ts {simulated:e} s vs charge control {expected:e} s (τS {tau_s:e} s)"
        );
    }
}

fn any_waveform() -> impl Strategy<Value = Waveform> {
    prop_oneof![
        (-20.0..20.0f64).prop_map(|value| Waveform::Constant { value }),
        (
            -10.0..10.0f64,
            -10.0..10.0f64,
            -1e-7..1e-6f64,
            -1e-9..1e-7f64,
            0.0..1e-7f64,
            0.0..1e-6f64,
            -1e-7..3e-6f64
        )
            .prop_map(|(a, b, d, r, f, w, p)| Waveform::PulseTrain {
                initial_value: a,
                pulsed_value: b,
                delay_s: d,
                rise_time_s: r,
                fall_time_s: f,
                width_s: w,
                period_s: p,
            }),
        proptest::collection::vec((-1e-7..1e-6f64, -10.0..10.0f64), 0..4)
            .prop_map(|points| Waveform::PiecewiseLinear { points }),
    ]
}

fn any_element(index: usize) -> impl Strategy<Value = Element> {
    let node = || prop_oneof![Just("0"), Just("a"), Just("b"), Just("c"), Just("")].prop_map(String::from);
    let name = format!("X{index}");
    let (n1, n2, n3, n4, n5) = (name.clone(), name.clone(), name.clone(), name.clone(), name.clone());
    prop_oneof![
        (node(), node(), -10.0..1e6f64).prop_map(move |(a, b, r)| resistor(&n1, &a, &b, r)),
        (node(), node(), -1e-9..1e-6f64).prop_map(move |(a, b, c)| capacitor(&n2, &a, &b, c)),
        (node(), node(), any_waveform()).prop_map(move |(a, b, w)| voltage_source(&n3, &a, &b, w)),
        (node(), node(), any_waveform()).prop_map(move |(a, b, w)| current_source(&n4, &a, &b, w.clone())),
        (node(), node(), node(), -1e-15..1e-12f64, 0.0..2e-12f64, 0.0..100.0f64, any::<bool>()).prop_map(
            move |(c, b, e, is, cj, rb, pnp)| {
                let mut model = switching_transistor(if pnp { Polarity::Pnp } else { Polarity::Npn });
                model.saturation_current_a = is;
                model.emitter_junction_capacitance_f = cj;
                model.collector_junction_capacitance_f = cj;
                model.base_resistance_ohm = rb;
                Element::Transistor { name: n5.clone(), collector: c, base: b, emitter: e, model }
            }
        ),
    ]
}

fn any_circuit() -> impl Strategy<Value = Circuit> {
    (1usize..6).prop_flat_map(|count| {
        (0..count)
            .map(any_element)
            .collect::<Vec<_>>()
            .prop_map(|elements| Circuit { elements, temperature_c: 25.0 })
    })
}

proptest! {
    // 40 cases: enough to reach validation failures, singular systems and nonlinear solves
    // in one run while keeping the module well under its time budget.
    #![proptest_config(ProptestConfig { cases: 40, ..ProptestConfig::default() })]
    #[test]
    fn arbitrary_circuits_never_panic(net in any_circuit()) {
        let mut settings = TransientSettings::new(2e-6);
        settings.max_steps = 300;
        // Either outcome is fine; the property is that it returns at all.
        let outcome = simulate(&net, &settings, &OperatingPointHints::default());
        if let Ok(result) = outcome {
            prop_assert!(result.time_s.iter().all(|t| t.is_finite()));
        }
    }
}

/// A bistable with base steering (the circuit family of the domain brief §2 and §6): two
/// cross-coupled NPN switches, speed-up capacitors, steering diodes fed from a common
/// trigger through small capacitors. `sign` −1 builds the PNP mirror with every source
/// reversed.
fn bistable(triggers: usize, period_s: f64, polarity: Polarity) -> (Circuit, OperatingPointHints, f64) {
    let sign = polarity.sign();
    let mut model = switching_transistor(polarity);
    model.reverse_transit_s = 10e-9;
    model.emitter_junction_capacitance_f = 2e-12;
    model.collector_junction_capacitance_f = 4e-12;
    model.base_resistance_ohm = 50.0;
    model.leakage_a = 1e-9;
    let steering = DiodeModel {
        saturation_current_a: 1e-12,
        emission_coefficient: 1.8,
        series_resistance_ohm: 5.0,
        junction_capacitance_f: 1e-12,
        junction_potential_v: 0.7,
        junction_grading: 0.4,
        transit_time_s: 4e-9,
    };
    let anode = |b: &str, s: &str| -> (String, String) {
        if sign > 0.0 {
            (b.into(), s.into())
        } else {
            (s.into(), b.into())
        }
    };
    let mut elements = vec![
        voltage_source("VCC", "vcc", "0", Waveform::Constant { value: sign * 6.0 }),
        voltage_source("VBB", "0", "vbb", Waveform::Constant { value: sign * 6.0 }),
        voltage_source(
            "VT",
            "trigger",
            "0",
            Waveform::PulseTrain {
                initial_value: 0.0,
                pulsed_value: sign * -4.0,
                delay_s: 0.5e-6,
                rise_time_s: 20e-9,
                fall_time_s: 20e-9,
                width_s: 300e-9,
                period_s,
            },
        ),
    ];
    for (side, other) in [("1", "2"), ("2", "1")] {
        let (c, b, s) = (format!("c{side}"), format!("b{side}"), format!("s{side}"));
        elements.push(resistor(&format!("RC{side}"), "vcc", &c, 1e3));
        elements.push(resistor(&format!("R1{side}"), &c, &format!("b{other}"), 10e3));
        elements.push(capacitor(&format!("C1{side}"), &c, &format!("b{other}"), 100e-12));
        elements.push(resistor(&format!("R2{side}"), &b, "vbb", 22e3));
        elements.push(resistor(&format!("RT{side}"), &s, &c, 10e3));
        elements.push(capacitor(&format!("CT{side}"), "trigger", &s, 47e-12));
        let (a, k) = anode(&b, &s);
        elements.push(Element::Diode { name: format!("D{side}"), anode: a, cathode: k, model: steering });
        elements.push(Element::Transistor {
            name: format!("Q{side}"),
            collector: c,
            base: b,
            emitter: "0".into(),
            model,
        });
    }
    let hints = OperatingPointHints {
        node_voltages_v: vec![
            ("c1".into(), sign * 0.1),
            ("c2".into(), sign * 6.0),
            ("b1".into(), sign * 0.75),
        ],
    };
    (Circuit { elements, temperature_c: 25.0 }, hints, 0.5e-6 + triggers as f64 * period_s)
}

#[test]
fn bistable_changes_state_once_per_trigger_and_pnp_mirrors_it() {
    // Definition of a toggle (divide-by-two) stage, domain brief §6: each trigger edge of the
    // chosen polarity changes the state once. Ten triggers must give exactly ten changes of
    // c1 (hysteresis 1.5–4.5 V of the 6 V swing), the hinted state must hold before the first
    // trigger, and the PNP mirror must give the same waveform with the sign flipped: every
    // crossing of the middle of the swing within 2 ps (0.11 ps measured), and the whole
    // waveform, interpolated onto the NPN run's times, within 1 mV (95 µV measured). The two
    // runs need not take identical steps: a Newton test or a bypass window that one run passes
    // by a rounding error and the other not changes the later steps slightly (42 ps at most).
    let (npn, hints, stop) = bistable(10, 2e-6, Polarity::Npn);
    let result = simulate(&npn, &TransientSettings::new(stop), &hints);
    let Ok(result) = result else { panic!("{result:?}") };
    let c1 = result.voltage("c1").unwrap_or(&[]);
    assert!(c1.first().copied().unwrap_or(f64::NAN) < 0.5, "Q1 must start ON as hinted: {:?}", c1.first());
    assert_eq!(flipwright::transient::measure::toggle_count(c1, 1.5, 4.5), 10);
    let (pnp, hints, _) = bistable(10, 2e-6, Polarity::Pnp);
    let mirrored = simulate(&pnp, &TransientSettings::new(stop), &hints);
    let Ok(mirrored) = mirrored else { panic!("{mirrored:?}") };
    let c1_pnp: Vec<f64> = mirrored.voltage("c1").unwrap_or(&[]).iter().map(|v| -v).collect();
    let npn_edges = crossings(&result.time_s, c1, 3.0, Edge::Either).unwrap_or_default();
    let pnp_edges = crossings(&mirrored.time_s, &c1_pnp, 3.0, Edge::Either).unwrap_or_default();
    assert_eq!(npn_edges.len(), pnp_edges.len(), "{npn_edges:?} against {pnp_edges:?}");
    assert_eq!(npn_edges.len(), 10, "{npn_edges:?}");
    let worst = npn_edges.iter().zip(&pnp_edges).map(|(a, b)| (a - b).abs()).fold(0.0, f64::max);
    assert!(worst < 2e-12, "PNP mirror's edges differ by {worst:e} s");
    // The mirrored waveform at each NPN time, by linear interpolation between its own points.
    let times_pnp = &mirrored.time_s;
    let mut worst_v: f64 = 0.0;
    let mut k = 0;
    for (&t, &v) in result.time_s.iter().zip(c1) {
        while k + 2 < times_pnp.len() && times_pnp[k + 1] < t {
            k += 1;
        }
        let (t0, t1) = (times_pnp[k], times_pnp[(k + 1).min(times_pnp.len() - 1)]);
        let (v0, v1) = (c1_pnp[k], c1_pnp[(k + 1).min(c1_pnp.len() - 1)]);
        let at = if t1 > t0 { v0 + (v1 - v0) * ((t - t0) / (t1 - t0)).clamp(0.0, 1.0) } else { v0 };
        worst_v = worst_v.max((v - at).abs());
    }
    assert!(worst_v < 1e-3, "PNP mirror differs by {worst_v} V");
}

#[test]
fn failures_are_typed_and_say_where() {
    // Regression guard for the error contract (DEVELOPERS.md, "No panics on user input"):
    // each bad input gives its own variant naming the place to fix.
    use flipwright::transient::SimulationError;
    let parallel_sources = circuit(vec![
        voltage_source("V1", "a", "0", Waveform::Constant { value: 1.0 }),
        voltage_source("V2", "a", "0", Waveform::Constant { value: 2.0 }),
        resistor("R1", "a", "0", 1e3),
    ]);
    let outcome = operating_point(&parallel_sources, &OperatingPointHints::default());
    assert!(
        matches!(&outcome, Err(SimulationError::Singular { node, .. }) if node.contains("V2") || node.contains("V1")),
        "{outcome:?}"
    );
    let rc = circuit(vec![
        voltage_source("V1", "in", "0", step(1.0)),
        resistor("R1", "in", "out", 1e3),
        capacitor("C1", "out", "0", 1e-6),
    ]);
    let hints = OperatingPointHints { node_voltages_v: vec![("nowhere".into(), 1.0)] };
    let outcome = operating_point(&rc, &hints);
    assert_eq!(outcome.err(), Some(SimulationError::UnknownHintNode { node: "nowhere".into() }));
    let outcome = simulate(&rc, &TransientSettings::new(0.0), &OperatingPointHints::default());
    assert!(
        matches!(&outcome, Err(SimulationError::InvalidSettings { field, .. }) if field == "stop_time_s")
    );
    let mut few = TransientSettings::new(5e-3);
    few.max_steps = 3;
    let outcome = simulate(&rc, &few, &OperatingPointHints::default());
    assert!(matches!(outcome, Err(SimulationError::StepLimit { max_steps: 3, .. })), "{outcome:?}");
    let mut invalid = rc.clone();
    invalid.elements.push(capacitor("C1", "out", "0", f64::NAN));
    let outcome = simulate(&invalid, &TransientSettings::new(1e-3), &OperatingPointHints::default());
    let Err(SimulationError::InvalidCircuit(errors)) = outcome else { panic!("{outcome:?}") };
    let fields: Vec<(&str, &str)> = errors.iter().map(|e| (e.element.as_str(), e.field.as_str())).collect();
    assert_eq!(fields, vec![("C1", "name"), ("C1", "capacitance_f")]);
}

/// Equal JSON trees, numbers to 1e-15 relative: serde_json's default float parsing is
/// best-effort and may land one unit in the last place away from the written decimal.
fn same_json(a: &serde_json::Value, b: &serde_json::Value) -> bool {
    use serde_json::Value;
    match (a, b) {
        (Value::Number(x), Value::Number(y)) => match (x.as_f64(), y.as_f64()) {
            (Some(x), Some(y)) => (x - y).abs() <= 1e-15 * x.abs().max(y.abs()),
            _ => x == y,
        },
        (Value::Array(x), Value::Array(y)) => {
            x.len() == y.len() && x.iter().zip(y).all(|(x, y)| same_json(x, y))
        }
        (Value::Object(x), Value::Object(y)) => {
            x.len() == y.len() && x.iter().all(|(k, v)| y.get(k).is_some_and(|w| same_json(v, w)))
        }
        _ => a == b,
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 64, ..ProptestConfig::default() })]
    #[test]
    fn circuit_files_read_back_what_serde_writes(net in any_circuit()) {
        // The circuit file's hand-written reader must accept every field serde writes for a
        // Circuit (all element kinds, waveforms and models), so saving a circuit built in code
        // and loading it gives the same circuit. Validity is not required: that is checked
        // after the structure, by `validate`.
        use flipwright::transient::circuit_file::{CircuitFile, FORMAT_NAME, FORMAT_VERSION};
        let file = CircuitFile {
            format: FORMAT_NAME.into(),
            version: FORMAT_VERSION,
            name: "round trip".into(),
            notes: String::new(),
            circuit: net,
            run: TransientSettings::new(1e-6),
            operating_point_hints: OperatingPointHints { node_voltages_v: vec![("a".into(), 0.5)] },
            probes: None,
        };
        let text = file.to_json();
        let parsed = CircuitFile::parse(&text);
        prop_assert!(parsed.is_ok(), "{:?}\n{}", parsed, text);
        let again = parsed.map(|p| p.to_json()).unwrap_or_default();
        let (first, second): (serde_json::Value, serde_json::Value) =
            (serde_json::from_str(&text).unwrap_or_default(), serde_json::from_str(&again).unwrap_or_default());
        prop_assert!(same_json(&first, &second), "{}\n---\n{}", text, again);
    }
}

#[test]
fn bistable_run_agrees_between_dense_and_sparse_solvers() {
    // Both solvers factor the same matrices by partial pivoting (the sparse one reuses its
    // pivots while they stay acceptable), so they differ only by rounding, about 1e-15 of
    // each entry; Newton and step control then see the same numbers to that level. Checked:
    // the same accepted steps and every node voltage to 1 µV (the Newton voltage tolerance).
    let (circuit, hints, stop) = bistable(10, 2e-6, Polarity::Npn);
    let settings = TransientSettings::new(stop);
    let dense = simulate_with(&circuit, &settings, &hints, &mut DenseSolver::default());
    let mut sparse_solver = SparseSolver::default();
    let sparse = simulate_with(&circuit, &settings, &hints, &mut sparse_solver);
    let (Ok(dense), Ok(sparse)) = (dense, sparse) else { panic!("both runs must succeed") };
    assert_eq!(dense.time_s.len(), sparse.time_s.len(), "{:?} vs {:?}", dense.statistics, sparse.statistics);
    let mut worst: f64 = 0.0;
    for (a, b) in dense.node_voltages_v.iter().zip(&sparse.node_voltages_v) {
        for (x, y) in a.iter().zip(b) {
            worst = worst.max((x - y).abs());
        }
    }
    assert!(worst < 1e-6, "largest difference {worst:e} V");
    assert!(sparse_solver.statistics().frozen_refactorisations > 0, "{:?}", sparse_solver.statistics());
}
