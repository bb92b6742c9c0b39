//! The fast DC margin kernel: the piecewise (handbook) model's two stable states and the eight
//! DC margins of `stage::margins` in closed form, without allocation, for Monte Carlo.
//!
//! The piecewise network of one state has at most three free nodes (the OFF collector, the
//! OFF base and, in self bias, the common emitter); the ON transistor pins its base and
//! collector to the emitter. With the emitter voltage E as a parameter every node and both ON
//! currents are affine in E, and the emitter's own balance `E·(1/RE) = IB + IC` fixes E. This
//! is the same linear network `StageNetwork::solve_piecewise` solves by LU (including the
//! GMIN conductance on every node), so the two agree to rounding; a test checks it at nominal
//! and at corners. Transcendental functions use `libm`, so results are bit-identical natively
//! and in wasm.

use std::collections::HashMap;

use serde::Serialize;

use crate::device::Material;
use crate::physics::{kelvin, BOLTZMANN_J_PER_K, ELEMENTARY_CHARGE_C, REFERENCE_TEMPERATURE_C};
use crate::stage::margins::{max_junction_temperature_c, DC_MARGINS};
use crate::stage::network::Corner;
use crate::stage::worst_case::{corner_for_distinct, parameters, search_until, Parameter, Setting};
use crate::stage::{BiasScheme, Load, StageDesign, Steering};

/// Number of DC margins the kernel evaluates, in the order of [`DC_MARGINS`].
pub const MARGIN_COUNT: usize = DC_MARGINS.len();

/// The eight DC margins of one stage (larger is better), in the order of [`DC_MARGINS`].
pub type DcMargins = [f64; MARGIN_COUNT];

/// Same value as the stage network's node conductance to ground, so both solve one network.
const GMIN_S: f64 = 1e-12;

/// Capacitor values of one built stage, per side (C1 across the cross resistor from that
/// side's collector; Ct on that side's steering input). They enter only the transient
/// estimate of the reverse base–emitter voltage.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Capacitors {
    pub commutating_f: [f64; 2],
    pub trigger_f: [f64; 2],
}

impl Capacitors {
    /// The capacitor values a worst-case corner carries.
    pub fn of(corner: &Corner) -> Capacitors {
        Capacitors { commutating_f: corner.commutating_capacitor_f, trigger_f: corner.trigger_capacitor_f }
    }
}

/// Everything that depends only on the temperature (shared by every stage of a build, which
/// sits at one ambient temperature).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ThermalPoint {
    pub temperature_c: f64,
    /// Multiplies the 25 °C hFE (the linear tempco with the floor of `hfe_at`).
    pub hfe_factor: f64,
    /// VBE(sat) and cut-off shift from 25 °C, V.
    pub vbe_shift_v: f64,
    pub icbo_a: f64,
    /// Steering diode: saturation current and n·VT at this temperature.
    pub diode_saturation_a: f64,
    pub diode_n_vt_v: f64,
    pub derated_ptot_w: f64,
}

fn thermal_voltage(temperature_c: f64) -> f64 {
    BOLTZMANN_J_PER_K * kelvin(temperature_c) / ELEMENTARY_CHARGE_C
}

/// Piecewise values of one transistor at a spread point.
#[derive(Debug, Clone, Copy)]
struct Device {
    hfe: f64,
    vce_sat_v: f64,
    vbe_sat_v: f64,
    vbe_cutoff_v: f64,
}

fn interpolate(low: f64, typ: f64, high: f64, position: f64) -> f64 {
    if position < 0.0 {
        typ + (typ - low) * position
    } else {
        typ + (high - typ) * position
    }
}

/// A load on one collector at a corner, as conductance to a return plus a drawn current.
#[derive(Debug, Clone, Copy)]
struct LoadTerms {
    conductance_s: f64,
    return_v: f64,
    drawn_a: f64,
}

/// One state by the piecewise model, only what the margins need.
#[derive(Debug, Clone, Copy)]
struct State {
    on_side: usize,
    ic: f64,
    ib: f64,
    overdrive: f64,
    cutoff_margin_v: f64,
    swing_v: f64,
    off_vbe_v: f64,
    off_vce_v: f64,
    on_dissipation_w: f64,
    off_dissipation_w: f64,
}

/// The per-design constants of the kernel; build once, evaluate many corners.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MarginKernel {
    bias: BiasScheme,
    loads: [Load; 2],
    steering: Option<Steering>,
    nominal_capacitors: Capacitors,
    trigger_amplitude_v: Option<f64>,
    hfe: [f64; 3],
    vce_sat: [f64; 3],
    vbe_sat: [f64; 3],
    vbe_cutoff_v: f64,
    vbe_tempco_v_per_c: f64,
    hfe_tempco_per_c: f64,
    icbo_25c_a: f64,
    icbo_doubling_c: f64,
    material: Material,
    ptot_w: f64,
    base_capacitance_f: f64,
    vebo_v: f64,
    vceo_v: f64,
    vcbo_v: f64,
    ic_max_a: f64,
    diode_saturation_25c_a: f64,
    diode_emission: f64,
    diode_band_gap_ev: f64,
}

impl MarginKernel {
    pub fn new(design: &StageDesign) -> MarginKernel {
        let sheet = design.transistor();
        let diode = design.diode();
        let values = design.values();
        let trigger_f = values.trigger.map_or(0.0, |t| t.trigger_capacitor_f);
        let n = diode.emission_coefficient;
        let vt25 = thermal_voltage(REFERENCE_TEMPERATURE_C);
        let diode_saturation_25c_a =
            diode.forward_test_current_a / (libm::exp(diode.forward_voltage_v / (n * vt25)) - 1.0);
        MarginKernel {
            bias: values.bias,
            loads: design.input().loads,
            steering: values.trigger.map(|t| t.steering),
            nominal_capacitors: Capacitors {
                commutating_f: [values.commutating_capacitor_f; 2],
                trigger_f: [trigger_f; 2],
            },
            trigger_amplitude_v: design.input().requirements.trigger_amplitude_v,
            hfe: [sheet.hfe_min, sheet.hfe_typ, sheet.hfe_max],
            vce_sat: [0.5 * sheet.vce_sat_typ_v, sheet.vce_sat_typ_v, sheet.vce_sat_max_v],
            vbe_sat: [sheet.vbe_sat_min_v, sheet.vbe_sat_typ_v, sheet.vbe_sat_max_v],
            vbe_cutoff_v: sheet.vbe_cutoff_v,
            vbe_tempco_v_per_c: sheet.vbe_tempco_v_per_c,
            hfe_tempco_per_c: sheet.hfe_tempco_per_c,
            icbo_25c_a: sheet.icbo_25c_a,
            icbo_doubling_c: sheet.icbo_doubling_c,
            material: sheet.material,
            ptot_w: sheet.ptot_w,
            base_capacitance_f: sheet.cib_f + sheet.cob_f,
            vebo_v: sheet.vebo_v,
            vceo_v: sheet.vceo_v,
            vcbo_v: sheet.vcbo_v,
            ic_max_a: sheet.ic_max_a,
            diode_saturation_25c_a,
            diode_emission: n,
            diode_band_gap_ev: diode.material.band_gap_ev(),
        }
    }

    /// The design's own capacitor values.
    pub fn nominal_capacitors(&self) -> Capacitors {
        self.nominal_capacitors
    }

    /// The temperature-dependent data (same laws as `TransistorDatasheet::piecewise_at`,
    /// `DiodeDatasheet::saturation_current_a` and `margins::derated_ptot`, through `libm`).
    pub fn thermal_point(&self, temperature_c: f64) -> ThermalPoint {
        let delta_t = temperature_c - REFERENCE_TEMPERATURE_C;
        let factor = 1.0 + self.hfe_tempco_per_c * delta_t;
        let t0 = kelvin(REFERENCE_TEMPERATURE_C);
        let t = kelvin(temperature_c);
        let n = self.diode_emission;
        let vt0 = thermal_voltage(REFERENCE_TEMPERATURE_C);
        let diode_saturation_a = self.diode_saturation_25c_a
            * libm::pow(t / t0, 3.0 / n)
            * libm::exp((self.diode_band_gap_ev / (n * vt0)) * (1.0 - t0 / t));
        let t_max = max_junction_temperature_c(self.material);
        let derated_ptot_w = if temperature_c <= 25.0 {
            self.ptot_w
        } else {
            (self.ptot_w * (t_max - temperature_c) / (t_max - 25.0)).max(0.0)
        };
        ThermalPoint {
            temperature_c,
            hfe_factor: factor.max(0.1),
            vbe_shift_v: self.vbe_tempco_v_per_c * delta_t,
            icbo_a: self.icbo_25c_a * libm::pow(2.0, delta_t / self.icbo_doubling_c),
            diode_saturation_a,
            diode_n_vt_v: n * thermal_voltage(temperature_c),
            derated_ptot_w,
        }
    }

    /// Margins at a corner with the corner's capacitors, at the corner's temperature.
    pub fn evaluate_corner(&self, corner: &Corner) -> DcMargins {
        self.evaluate(corner, &Capacitors::of(corner), &self.thermal_point(corner.temperature_c))
    }

    /// Margins at a corner; the temperature is the thermal point's (`corner.temperature_c`
    /// is not read). Non-finite results (a corner with no usable state) come out as NaN or
    /// infinities, which fail every threshold.
    pub fn evaluate(&self, corner: &Corner, capacitors: &Capacitors, thermal: &ThermalPoint) -> DcMargins {
        self.evaluate_with(corner, capacitors, thermal, |voltage, resistance_ohm| {
            self.steering_current(voltage, resistance_ohm, thermal)
        })
    }

    /// [`Self::evaluate`] with the steering-diode current, a pure function of (voltage across
    /// diode and Rt, Rt, thermal point), from `steering_current` (which may memoise it).
    fn evaluate_with(
        &self,
        corner: &Corner,
        capacitors: &Capacitors,
        thermal: &ThermalPoint,
        mut steering_current: impl FnMut(f64, f64) -> f64,
    ) -> DcMargins {
        let devices = [self.device(corner, 0, thermal), self.device(corner, 1, thermal)];
        let mut steering_a = [0.0; 2];
        if self.steering == Some(Steering::Base) {
            for (on, current) in steering_a.iter_mut().enumerate() {
                *current = steering_current(
                    devices[on].vbe_sat_v - devices[on].vce_sat_v,
                    corner.trigger_resistor_ohm[on],
                );
            }
        }
        let states = [
            self.state(corner, thermal, &devices, 0, steering_a[0]),
            self.state(corner, thermal, &devices, 1, steering_a[1]),
        ];
        let mut overdrive = f64::INFINITY;
        let mut cutoff = f64::INFINITY;
        let mut swing = f64::INFINITY;
        let mut reverse_be = 0.0f64;
        let mut max_vce = 0.0f64;
        let mut max_vcb = 0.0f64;
        let mut max_ic = 0.0f64;
        let mut max_dissipation = 0.0f64;
        for state in &states {
            let on = state.on_side;
            let off = 1 - on;
            let on_device = devices[on];
            overdrive = overdrive.min(state.overdrive);
            cutoff = cutoff.min(state.cutoff_margin_v);
            swing = swing.min(state.swing_v);
            // As in `margins::evaluate_corner`: the base of the transistor just turned off
            // receives C1's step and, with base steering, the trigger's charge through Ct.
            let c1 = capacitors.commutating_f[on];
            let (trigger_charge, trigger_capacitance) = match self.steering {
                Some(Steering::Base) => {
                    let ct = capacitors.trigger_f[off];
                    let amplitude = self.trigger_amplitude_v.unwrap_or(state.swing_v);
                    let knee = thermal.diode_n_vt_v
                        * libm::log((0.1 * state.ib).max(1e-9) / thermal.diode_saturation_a + 1.0);
                    let gap = (knee - (on_device.vbe_sat_v - on_device.vce_sat_v)).max(0.0);
                    ((amplitude - gap).max(0.0) * ct, ct)
                }
                _ => (0.0, 0.0),
            };
            let base_capacitance = self.base_capacitance_f + c1 + trigger_capacitance;
            let injected = state.swing_v * c1 + trigger_charge;
            let transient_reverse =
                if base_capacitance > 0.0 { injected / base_capacitance - on_device.vbe_sat_v } else { 0.0 };
            reverse_be = reverse_be.max(-state.off_vbe_v).max(transient_reverse);
            max_vce = max_vce.max(state.off_vce_v);
            max_vcb = max_vcb
                .max(state.off_vce_v - state.off_vbe_v)
                .max(state.off_vce_v + transient_reverse.max(0.0));
            max_ic = max_ic.max(state.ic);
            max_dissipation = max_dissipation.max(state.on_dissipation_w).max(state.off_dissipation_w);
        }
        [
            overdrive,
            cutoff,
            swing,
            self.vebo_v - reverse_be,
            self.vceo_v - max_vce,
            self.vcbo_v - max_vcb,
            self.ic_max_a - max_ic,
            thermal.derated_ptot_w - max_dissipation,
        ]
    }

    fn device(&self, corner: &Corner, side: usize, thermal: &ThermalPoint) -> Device {
        let spread = corner.spread[side];
        let [h_low, h_typ, h_high] = self.hfe;
        let [s_low, s_typ, s_high] = self.vce_sat;
        let [b_low, b_typ, b_high] = self.vbe_sat;
        Device {
            hfe: interpolate(h_low, h_typ, h_high, spread.hfe) * thermal.hfe_factor,
            vce_sat_v: interpolate(s_low, s_typ, s_high, spread.vce_sat),
            vbe_sat_v: interpolate(b_low, b_typ, b_high, spread.vbe_sat) + thermal.vbe_shift_v,
            vbe_cutoff_v: self.vbe_cutoff_v + thermal.vbe_shift_v,
        }
    }

    fn load_terms(&self, corner: &Corner, side: usize) -> LoadTerms {
        match self.loads[side] {
            Load::None => LoadTerms { conductance_s: 0.0, return_v: 0.0, drawn_a: 0.0 },
            Load::Resistance { resistance_ohm, return_v } => LoadTerms {
                conductance_s: 1.0 / (resistance_ohm * corner.load_resistance_factor[side]),
                return_v,
                drawn_a: 0.0,
            },
            Load::Current { current_a } => {
                LoadTerms { conductance_s: 0.0, return_v: 0.0, drawn_a: current_a }
            }
        }
    }

    /// Current of the ON side's base-steering diode in series with its Rt across
    /// VBE(sat) − VCE(sat) (as `DiodeLaw::conduction_current`, bounded Newton).
    fn steering_current(&self, voltage: f64, resistance_ohm: f64, thermal: &ThermalPoint) -> f64 {
        let is = thermal.diode_saturation_a;
        if !(voltage > 0.0 && resistance_ohm > 0.0 && is > 0.0) {
            return 0.0;
        }
        let n_vt = thermal.diode_n_vt_v;
        let mut current = voltage / resistance_ohm;
        for _ in 0..60 {
            let excess = n_vt * libm::log(current / is + 1.0) + current * resistance_ohm - voltage;
            let slope = n_vt / (is + current) + resistance_ohm;
            let next = (current - excess / slope).max(0.0);
            let converged = (next - current).abs() <= 1e-12 * current.max(1e-18);
            current = next;
            if converged {
                break;
            }
        }
        if current.is_finite() {
            current
        } else {
            0.0
        }
    }

    /// The state with `on` conducting; `steering` is the current its base-steering diode takes
    /// from its base (0 without base steering).
    fn state(
        &self,
        corner: &Corner,
        thermal: &ThermalPoint,
        devices: &[Device; 2],
        on: usize,
        steering: f64,
    ) -> State {
        let off = 1 - on;
        let on_device = devices[on];
        let off_device = devices[off];
        let vcc = corner.collector_supply_v;
        let base_return_v = match self.bias {
            BiasScheme::Fixed => -corner.bias_supply_v,
            BiasScheme::SelfBias => 0.0,
        };
        let icbo = thermal.icbo_a;
        let g_rc = [1.0 / corner.collector_resistor_ohm[0], 1.0 / corner.collector_resistor_ohm[1]];
        // cross[k] runs from collector k to the other base.
        let g_x = [1.0 / corner.cross_resistor_ohm[0], 1.0 / corner.cross_resistor_ohm[1]];
        let g_r2 = [1.0 / corner.base_resistor_ohm[0], 1.0 / corner.base_resistor_ohm[1]];
        let load = [self.load_terms(corner, 0), self.load_terms(corner, 1)];
        let vbe = on_device.vbe_sat_v;
        let vce = on_device.vce_sat_v;
        // Affine forms c0 + c1·E of the OFF collector and base.
        let g_coff = g_rc[off] + g_x[off] + load[off].conductance_s + GMIN_S;
        let c_off0 = (g_rc[off] * vcc + g_x[off] * vbe + load[off].conductance_s * load[off].return_v
            - icbo
            - load[off].drawn_a)
            / g_coff;
        let c_off1 = g_x[off] / g_coff;
        let g_boff = g_x[on] + g_r2[off] + GMIN_S;
        let b_off0 = (g_x[on] * vce + g_r2[off] * base_return_v + icbo) / g_boff;
        let b_off1 = g_x[on] / g_boff;
        // ON currents at emitter voltage E, as functions.
        let base_current = |e: f64, c_off: f64| {
            let b_on = e + vbe;
            g_x[off] * (c_off - b_on) + g_r2[on] * (base_return_v - b_on) - GMIN_S * b_on - steering
        };
        let collector_current = |e: f64, b_off: f64| {
            let c_on = e + vce;
            g_rc[on] * (vcc - c_on)
                + g_x[on] * (b_off - c_on)
                + load[on].conductance_s * (load[on].return_v - c_on)
                - GMIN_S * c_on
                - load[on].drawn_a
                + steering
        };
        let emitter_v = match self.bias {
            BiasScheme::Fixed => 0.0,
            BiasScheme::SelfBias => {
                let g_re = 1.0 / corner.emitter_resistor_ohm;
                let at_zero = base_current(0.0, c_off0) + collector_current(0.0, b_off0);
                // d(IB + IC)/dE from the coefficients (negative: a higher emitter starves both).
                let slope = g_x[off] * (c_off1 - 1.0) - g_r2[on] - GMIN_S
                    + (-g_rc[on] + g_x[on] * (b_off1 - 1.0) - load[on].conductance_s - GMIN_S);
                at_zero / (g_re + GMIN_S - slope)
            }
        };
        let c_off_v = c_off0 + c_off1 * emitter_v;
        let b_off_v = b_off0 + b_off1 * emitter_v;
        let ib = base_current(emitter_v, c_off_v);
        let ic = collector_current(emitter_v, b_off_v);
        let c_on_v = emitter_v + vce;
        let overdrive = if ic > 0.0 { on_device.hfe * ib / ic } else { 0.0 };
        let off_vbe = b_off_v - emitter_v;
        State {
            on_side: on,
            ic,
            ib,
            overdrive,
            cutoff_margin_v: off_device.vbe_cutoff_v - off_vbe,
            swing_v: c_off_v - c_on_v,
            off_vbe_v: off_vbe,
            off_vce_v: c_off_v - emitter_v,
            on_dissipation_w: vce * ic + vbe * ib,
            off_dissipation_w: (c_off_v - b_off_v).max(0.0) * icbo,
        }
    }
}

/// A `u64`-keyed hasher for the screening caches: the keys are settings packed into bits or
/// raw bit patterns of floats, so no hash-flooding defence is needed, and SipHash (the
/// default) was a tenth of the screening's time.
#[derive(Debug, Clone, Copy, Default)]
pub struct ScreeningHasher(u64);

impl std::hash::Hasher for ScreeningHasher {
    fn finish(&self) -> u64 {
        self.0
    }

    fn write(&mut self, bytes: &[u8]) {
        // A slice of words (an array key) arrives as its bytes: fold them a word at a time.
        for chunk in bytes.chunks(8) {
            let mut word = [0u8; 8];
            word[..chunk.len()].copy_from_slice(chunk);
            self.write_u64(u64::from_le_bytes(word));
        }
    }

    fn write_usize(&mut self, value: usize) {
        // Array keys write their length first; one word, not eight bytes one by one.
        self.write_u64(value as u64);
    }

    fn write_u64(&mut self, value: u64) {
        // Folded 128-bit multiply: every input bit reaches the high bits the table probes by.
        let product = u128::from(self.0 ^ value) * 0x9e37_79b9_7f4a_7c15_u128;
        self.0 = (product as u64) ^ ((product >> 64) as u64);
    }
}

type ScreeningMap<K, V> = HashMap<K, V, std::hash::BuildHasherDefault<ScreeningHasher>>;

/// What screening many candidate designs shares between them: the thermal points and the
/// steering-diode currents, pure functions of their inputs memoised under the exact bits of
/// those inputs (so a hit returns the very value a fresh evaluation would), and the corner
/// cache's allocation. Any designs may share one; it only saves work.
#[derive(Debug, Default)]
pub struct ScreeningCache {
    /// The thermal points hold for these constants (`thermal_constants`).
    thermal_constants: [u64; 9],
    thermal_points: Vec<ThermalPoint>,
    steering_currents: ScreeningMap<[u64; 4], f64>,
    corners: ScreeningMap<u64, DcMargins>,
}

/// Everything `MarginKernel::thermal_point` reads besides the temperature, as bits.
fn thermal_constants(kernel: &MarginKernel) -> [u64; 9] {
    [
        kernel.hfe_tempco_per_c.to_bits(),
        kernel.vbe_tempco_v_per_c.to_bits(),
        kernel.icbo_25c_a.to_bits(),
        kernel.icbo_doubling_c.to_bits(),
        max_junction_temperature_c(kernel.material).to_bits(),
        kernel.ptot_w.to_bits(),
        kernel.diode_saturation_25c_a.to_bits(),
        kernel.diode_emission.to_bits(),
        kernel.diode_band_gap_ev.to_bits(),
    ]
}

/// The worst value of each DC margin (order of [`DC_MARGINS`]) over the design's tolerances,
/// supplies, device spread and temperature: the start from one-at-a-time sensitivities and
/// the coordinate search of `worst_case::analyse`, with every corner evaluated by the kernel
/// (each corner once, shared by the eight margins). It screens many candidate designs cheaply
/// (synthesis); the report of the chosen design still comes from `worst_case::analyse`, which
/// finds the same values within the kernel's agreement (a test checks it). A corner with no
/// usable state counts as failing (−∞), as it does there.
pub fn worst_dc_margins(design: &StageDesign) -> DcMargins {
    worst_dc_margins_until(design, &mut ScreeningCache::default(), |_, _| false).0
}

/// [`worst_dc_margins`] for a screen that only asks whether a margin can fall to some level:
/// `enough(k, bound)` is told, as the search goes on, values that margin `k`'s worst case
/// cannot exceed (its nominal value first, then each worse value the search finds); once it
/// returns true the search stops and the second result is true (the margins are then
/// incomplete). Without stopping the margins are exactly [`worst_dc_margins`]'s: `cache` only
/// memoises.
pub fn worst_dc_margins_until(
    design: &StageDesign,
    cache: &mut ScreeningCache,
    mut enough: impl FnMut(usize, f64) -> bool,
) -> (DcMargins, bool) {
    let kernel = MarginKernel::new(design);
    let params = parameters(design);
    // Each corner once: keyed by its settings, two bits per parameter (a design has at most
    // 20 parameters, so a u64 holds them; a longer list just goes uncached).
    let key_of = |assignment: &[(Parameter, Setting)]| -> Option<u64> {
        (assignment.len() <= 32).then(|| {
            assignment.iter().enumerate().fold(0u64, |key, (i, (_, s))| {
                key | (match s {
                    Setting::Low => 1u64,
                    Setting::Nominal => 0,
                    Setting::High => 2,
                } << (2 * i))
            })
        })
    };
    let ScreeningCache { thermal_constants: constants, thermal_points, steering_currents, corners } = cache;
    let these_constants = thermal_constants(&kernel);
    if *constants != these_constants {
        *constants = these_constants;
        thermal_points.clear();
    }
    corners.clear();
    let mut at = |assignment: &[(Parameter, Setting)]| -> DcMargins {
        let key = key_of(assignment);
        if let Some(hit) = key.and_then(|k| corners.get(&k)) {
            return *hit;
        }
        // Assignments here range over `params`, each parameter once.
        let corner = corner_for_distinct(design, assignment);
        let cached =
            thermal_points.iter().find(|t| t.temperature_c.to_bits() == corner.temperature_c.to_bits());
        let thermal = match cached {
            Some(point) => *point,
            None => {
                let point = kernel.thermal_point(corner.temperature_c);
                thermal_points.push(point);
                point
            }
        };
        let steering = |voltage: f64, resistance_ohm: f64| {
            let key = [
                voltage.to_bits(),
                resistance_ohm.to_bits(),
                thermal.diode_saturation_a.to_bits(),
                thermal.diode_n_vt_v.to_bits(),
            ];
            *steering_currents
                .entry(key)
                .or_insert_with(|| kernel.steering_current(voltage, resistance_ohm, &thermal))
        };
        let margins = kernel.evaluate_with(&corner, &Capacitors::of(&corner), &thermal, steering).map(|m| {
            if m.is_nan() {
                f64::NEG_INFINITY
            } else {
                m
            }
        });
        if let Some(k) = key {
            corners.insert(k, margins);
        }
        margins
    };
    let nominal_assignment: Vec<(Parameter, Setting)> =
        params.iter().map(|&p| (p, Setting::Nominal)).collect();
    let nominal = at(&nominal_assignment);
    // Every worst case is at most its nominal value.
    if nominal.iter().enumerate().any(|(k, &value)| enough(k, value)) {
        return (nominal, true);
    }
    let one_at_a_time: Vec<(DcMargins, DcMargins)> = (0..params.len())
        .map(|i| {
            let mut assignment = nominal_assignment.clone();
            let mut pair = [nominal; 2];
            for (margins, setting) in pair.iter_mut().zip([Setting::Low, Setting::High]) {
                if let Some(slot) = assignment.get_mut(i) {
                    slot.1 = setting;
                }
                *margins = at(&assignment);
            }
            (pair[0], pair[1])
        })
        .collect();
    let mut worst = nominal;
    for (k, slot) in worst.iter_mut().enumerate() {
        let sensitivities: Vec<(Option<f64>, Option<f64>)> =
            one_at_a_time.iter().map(|(low, high)| (Some(low[k]), Some(high[k]))).collect();
        let ((value, _, _, _), gave_up) = search_until(
            &params,
            &sensitivities,
            nominal[k],
            |assignment| Some(at(assignment)[k]),
            |bound| enough(k, bound),
        );
        *slot = value;
        if gave_up {
            return (worst, true);
        }
    }
    (worst, false)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stage::margins::{evaluate_corner, margin_value};
    use crate::stage::worst_case::corner_for;
    use crate::tolerance::test_designs::variants;

    /// Relative agreement the closed form must reach with the LU solve of the same network:
    /// both are exact solutions of one linear system, so they differ by rounding (and
    /// `libm` against the platform's `pow`/`exp`/`ln`, each within an ulp or so); 1e-9 of
    /// the margin's scale leaves room for cancellation in differences such as VCEO − VCE.
    const RELATIVE: f64 = 1e-9;

    fn check_corner(design: &StageDesign, corner: &Corner, what: &str) {
        let kernel = MarginKernel::new(design);
        let fast = kernel.evaluate_corner(corner);
        let (metrics, _) = evaluate_corner(design, corner).unwrap_or_else(|e| unreachable!("{what}: {e}"));
        for (k, kind) in DC_MARGINS.iter().enumerate() {
            let full = margin_value(*kind, &metrics, design).unwrap_or(f64::NAN);
            let scale = full.abs().max(match kind.unit() {
                "V" => 1.0,
                "A" => 1e-3,
                "W" => 1e-3,
                _ => 1.0,
            });
            assert!(
                (fast[k] - full).abs() <= RELATIVE * scale,
                "{what}: {kind:?} kernel {} against stage::margins {}",
                fast[k],
                full
            );
        }
    }

    /// The screening worst case runs the same search as `worst_case::analyse` on corners
    /// that agree within `RELATIVE`, so it must land on the same worst values.
    #[test]
    fn kernel_worst_case_matches_the_stage_worst_case_search() {
        for (name, design) in variants() {
            let Some(model) = crate::device::ebers_moll::EbersMoll::from_datasheet(design.transistor())
            else {
                unreachable!("{name}: no Ebers–Moll model")
            };
            let report = crate::stage::worst_case::analyse(&design, &model.model)
                .unwrap_or_else(|e| unreachable!("{name}: {e}"));
            let fast = worst_dc_margins(&design);
            for (k, kind) in DC_MARGINS.iter().enumerate() {
                let Some(full) = report.margins.iter().find(|m| m.kind == *kind) else {
                    unreachable!("{name}: {kind:?} missing from the report")
                };
                let scale = full.worst.abs().max(1e-3);
                assert!(
                    (fast[k] - full.worst).abs() <= RELATIVE * scale,
                    "{name}: {kind:?} screening worst {} against analyse {}",
                    fast[k],
                    full.worst
                );
            }
        }
    }

    /// Synthesis rejects a candidate on the bounds the screen reports, and shares one cache
    /// between candidates; both are safe only if every bound is at least the margin's final
    /// worst value and the cache never changes a result, whatever design used it before.
    #[test]
    fn screening_bounds_hold_and_a_shared_cache_changes_nothing() {
        let designs = variants();
        let mut shared = ScreeningCache::default();
        // Twice round, so every design meets a cache filled by the others.
        for (name, design) in designs.iter().chain(designs.iter()) {
            let alone = worst_dc_margins(design);
            let mut bounds: Vec<(usize, f64)> = Vec::new();
            let (worst, gave_up) = worst_dc_margins_until(design, &mut shared, |k, bound| {
                bounds.push((k, bound));
                false
            });
            assert!(!gave_up, "{name}: gave up though never told to");
            for (k, (a, b)) in alone.iter().zip(&worst).enumerate() {
                assert_eq!(a.to_bits(), b.to_bits(), "{name}: margin {k} {a} alone, {b} with a shared cache");
            }
            assert!(bounds.len() > MARGIN_COUNT, "{name}: only {} bounds reported", bounds.len());
            for (k, bound) in bounds {
                assert!(bound >= worst[k], "{name}: margin {k} bound {bound} below its worst {}", worst[k]);
            }
        }
    }

    #[test]
    fn kernel_margins_agree_with_the_stage_analysis_at_nominal_and_at_corners() {
        for (name, design) in variants() {
            let params = parameters(&design);
            check_corner(&design, &corner_for(&design, &[]), &format!("{name} nominal"));
            for &p in &params {
                for s in [Setting::Low, Setting::High] {
                    check_corner(&design, &corner_for(&design, &[(p, s)]), &format!("{name} {p:?} {s:?}"));
                }
            }
            for s in [Setting::Low, Setting::High] {
                let all: Vec<_> = params.iter().map(|&p| (p, s)).collect();
                check_corner(&design, &corner_for(&design, &all), &format!("{name} all {s:?}"));
            }
            // Alternating ends, so the two halves differ.
            let mixed: Vec<_> = params
                .iter()
                .enumerate()
                .map(|(i, &p)| (p, if i % 2 == 0 { Setting::Low } else { Setting::High }))
                .collect();
            check_corner(&design, &corner_for(&design, &mixed), &format!("{name} mixed"));
        }
    }
}
