//! The Ebers–Moll transport model (Ebers & Moll, Proc. IRE 42, 1954), its derivation from
//! datasheet values, and its temperature scaling.
//!
//! Derivation from a [`TransistorDatasheet`] (each assumption is listed in
//! [`Derivation::assumptions`]):
//! - βF = hFE typ at 25 °C, scaled with the datasheet hFE tempco;
//! - βR from VCE(sat) at the datasheet forced gain βf by inverting
//!   VCE(sat) = VT·ln{[1 + (βf + 1)/βR] / [1 − βf/βF]} (Jaeger & Blalock); the intrinsic model
//!   cannot reach large VCE(sat), so βR is clamped to [`BETA_R_RANGE`] and any excess voltage
//!   is assigned to a collector series resistance;
//! - IS so that the model reproduces VBE(sat) at the datasheet saturation test point;
//! - τF = 1/(2π·fT); τR from τS by inverting Moll's τS = (αF·τF + αR·τR)/(1 − αF·αR);
//! - zero-bias junction capacitances from the datasheet Cib and Cob (which are specified at a
//!   small reverse bias, so this slightly understates them);
//! - ICBO is carried as a separate leakage current from collector to base, because the ideal
//!   law's own reverse current (IS/αR) is far below real silicon leakage.

use serde::{Deserialize, Serialize};

use super::{Polarity, TransistorDatasheet};
use crate::numeric::elementary;
use crate::physics::{kelvin, thermal_voltage, REFERENCE_TEMPERATURE_C};

/// Range βR is held to when derived from VCE(sat).
pub const BETA_R_RANGE: (f64, f64) = (0.02, 20.0);

/// Exponent beyond which `exp` is continued linearly, to keep Newton iterates finite.
const EXP_LIMIT: f64 = 80.0;

/// Ebers–Moll transport-model parameters at a stated temperature (NPN frame).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct EbersMoll {
    pub polarity: Polarity,
    /// Temperature these values hold at, °C.
    pub temperature_c: f64,
    pub saturation_current_a: f64,
    pub beta_forward: f64,
    pub beta_reverse: f64,
    pub forward_transit_s: f64,
    pub reverse_transit_s: f64,
    pub emitter_junction_capacitance_f: f64,
    pub collector_junction_capacitance_f: f64,
    /// Built-in potentials and grading coefficients of the junction capacitances.
    pub emitter_junction_potential_v: f64,
    pub collector_junction_potential_v: f64,
    pub junction_grading: f64,
    #[serde(default)]
    pub base_resistance_ohm: f64,
    #[serde(default)]
    pub collector_resistance_ohm: f64,
    /// Collector–base leakage, A (see the module notes).
    pub leakage_a: f64,
    /// Band gap for IS(T), eV.
    pub band_gap_ev: f64,
}

/// Terminal currents and small-signal derivatives at one bias point (NPN frame, currents
/// flowing into the collector and base terminals).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BjtOperatingPoint {
    pub collector_current_a: f64,
    pub base_current_a: f64,
    /// ∂IC/∂VBE, ∂IC/∂VBC, ∂IB/∂VBE, ∂IB/∂VBC.
    pub dic_dvbe: f64,
    pub dic_dvbc: f64,
    pub dib_dvbe: f64,
    pub dib_dvbc: f64,
    /// The junction diffusion currents IF = IS·(e^(VBE/VT) − 1), IR = IS·(e^(VBC/VT) − 1) and
    /// their derivatives: the transient engine's diffusion charges are τF·IF and τR·IR.
    pub forward_current_a: f64,
    pub reverse_current_a: f64,
    pub forward_conductance_s: f64,
    pub reverse_conductance_s: f64,
}

/// Exponential with a linear continuation beyond [`EXP_LIMIT`]; returns (value, derivative).
/// The exponential is [`elementary::exp`] (table-driven on wasm32, where the library's is slow).
pub fn limited_exp(x: f64) -> (f64, f64) {
    if x > EXP_LIMIT {
        let at_limit = elementary::exp(EXP_LIMIT);
        (at_limit * (1.0 + x - EXP_LIMIT), at_limit)
    } else {
        let value = elementary::exp(x);
        (value, value)
    }
}

/// IS(T) = IS(T0)·(T/T0)^(3/n)·exp[(Eg/(n·VT0))·(1 − T0/T)] (standard device-physics form).
pub fn scale_saturation_current(
    is_at_reference: f64,
    reference_c: f64,
    temperature_c: f64,
    band_gap_ev: f64,
    emission_coefficient: f64,
) -> f64 {
    let t0 = kelvin(reference_c);
    let t = kelvin(temperature_c);
    let vt0 = thermal_voltage(reference_c);
    let n = emission_coefficient;
    is_at_reference * (t / t0).powf(3.0 / n) * ((band_gap_ev / (n * vt0)) * (1.0 - t0 / t)).exp()
}

/// VCE(sat) of the intrinsic Ebers–Moll model at forced gain βf (Jaeger & Blalock):
/// VT·ln{[1 + (βf + 1)/βR] / [1 − βf/βF]}. `None` when βf ≥ βF (not saturated).
pub fn saturation_voltage(
    thermal_voltage_v: f64,
    forced_gain: f64,
    beta_forward: f64,
    beta_reverse: f64,
) -> Option<f64> {
    let denominator = 1.0 - forced_gain / beta_forward;
    if !(denominator > 0.0) || !(beta_reverse > 0.0) {
        return None;
    }
    Some(thermal_voltage_v * ((1.0 + (forced_gain + 1.0) / beta_reverse) / denominator).ln())
}

/// Moll's storage time constant in transit-time form: (αF·τF + αR·τR)/(1 − αF·αR).
pub fn storage_time_constant(model: &EbersMoll) -> f64 {
    let alpha_f = model.beta_forward / (1.0 + model.beta_forward);
    let alpha_r = model.beta_reverse / (1.0 + model.beta_reverse);
    (alpha_f * model.forward_transit_s + alpha_r * model.reverse_transit_s) / (1.0 - alpha_f * alpha_r)
}

/// Result of deriving a model from a datasheet.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Derivation {
    pub model: EbersMoll,
    /// Plain sentences stating what was assumed, for the report.
    pub assumptions: Vec<String>,
}

impl EbersMoll {
    /// Derives the model at 25 °C from a datasheet; `None` when the datasheet has no usable
    /// storage-time data or inconsistent saturation data (validation reports which).
    pub fn from_datasheet(sheet: &TransistorDatasheet) -> Option<Derivation> {
        let vt = thermal_voltage(REFERENCE_TEMPERATURE_C);
        let beta_forward = sheet.hfe_typ;
        let forced_gain = sheet.sat_forced_gain;
        let mut assumptions = vec![
            "βF is hFE(typ) at 25 °C; τF = 1/(2π·fT)".to_string(),
            "junction capacitances at zero bias taken as the datasheet Cib and Cob".to_string(),
        ];
        // Invert the VCE(sat) formula: 1 + (βf+1)/βR = e^(VCE/VT)·(1 − βf/βF).
        let a = (sheet.vce_sat_typ_v / vt).exp() * (1.0 - forced_gain / beta_forward);
        let unclamped = if a > 1.0 { (forced_gain + 1.0) / (a - 1.0) } else { f64::INFINITY };
        let beta_reverse = unclamped.clamp(BETA_R_RANGE.0, BETA_R_RANGE.1);
        let intrinsic_vce = saturation_voltage(vt, forced_gain, beta_forward, beta_reverse)?;
        // Below a microvolt the difference is rounding, not a resistance to model.
        let excess_v = Some(sheet.vce_sat_typ_v - intrinsic_vce).filter(|v| *v > 1e-6).unwrap_or(0.0);
        let collector_resistance_ohm = excess_v / sheet.sat_test_current_a;
        if beta_reverse != unclamped {
            assumptions.push(format!(
                "βR from VCE(sat) would be {unclamped:.3}; held at {beta_reverse:.3} and {:.1} Ω collector resistance added to reach the datasheet VCE(sat)",
                collector_resistance_ohm
            ));
        } else {
            assumptions.push(format!("βR = {beta_reverse:.3} from VCE(sat) at βf = {forced_gain}"));
        }
        // IS from VBE(sat): in saturation IB = IS/βF·e^(VBE/VT) + IS/βR·e^(VBC/VT) and
        // IC = IS·e^(VBE/VT) − IS/αR·e^(VBC/VT); eliminate e^(VBC/VT) using IC = βf·IB.
        let ic = sheet.sat_test_current_a;
        let ib = ic / forced_gain;
        let vce_intrinsic = intrinsic_vce;
        // e^(VBC/VT) = e^(VBE/VT)·e^(−VCE/VT): IB = IS·e^(VBE/VT)·[1/βF + e^(−VCE/VT)/βR].
        let bracket = 1.0 / beta_forward + (-vce_intrinsic / vt).exp() / beta_reverse;
        let saturation_current_a = ib / ((sheet.vbe_sat_typ_v / vt).exp() * bracket);
        let forward_transit_s = sheet.forward_transit_time_s();
        let tau_s = sheet.storage_time_constant()?;
        let alpha_f = beta_forward / (1.0 + beta_forward);
        let alpha_r = beta_reverse / (1.0 + beta_reverse);
        let reverse_transit_s =
            ((tau_s * (1.0 - alpha_f * alpha_r) - alpha_f * forward_transit_s) / alpha_r).max(0.0);
        if reverse_transit_s == 0.0 {
            assumptions.push("τS is shorter than αF·τF allows; τR set to zero".to_string());
        } else {
            assumptions.push(format!(
                "τR from τS = {} by Moll's relation",
                crate::units::format_quantity(tau_s, crate::units::Unit::Second)
            ));
        }
        let junction_potential = match sheet.material {
            super::Material::Silicon => 0.75,
            super::Material::Germanium => 0.35,
        };
        assumptions.push(format!(
            "junction potentials {junction_potential} V, grading 0.33 (typical of the material)"
        ));
        Some(Derivation {
            model: EbersMoll {
                polarity: sheet.polarity,
                temperature_c: REFERENCE_TEMPERATURE_C,
                saturation_current_a,
                beta_forward,
                beta_reverse,
                forward_transit_s,
                reverse_transit_s,
                emitter_junction_capacitance_f: sheet.cib_f,
                collector_junction_capacitance_f: sheet.cob_f,
                emitter_junction_potential_v: junction_potential,
                collector_junction_potential_v: junction_potential,
                junction_grading: 0.33,
                base_resistance_ohm: 0.0,
                collector_resistance_ohm,
                leakage_a: sheet.icbo_25c_a,
                band_gap_ev: sheet.material.band_gap_ev(),
            },
            assumptions,
        })
    }

    /// The same device at another temperature: IS by the band-gap law, βF by the datasheet
    /// tempco (linear, floored), leakage by its doubling interval.
    pub fn at_temperature(
        &self,
        temperature_c: f64,
        hfe_tempco_per_c: f64,
        leakage_doubling_c: f64,
    ) -> EbersMoll {
        let delta_t = temperature_c - self.temperature_c;
        let mut scaled = *self;
        scaled.temperature_c = temperature_c;
        scaled.saturation_current_a = scale_saturation_current(
            self.saturation_current_a,
            self.temperature_c,
            temperature_c,
            self.band_gap_ev,
            1.0,
        );
        scaled.beta_forward = self.beta_forward * (1.0 + hfe_tempco_per_c * delta_t).max(0.1);
        scaled.leakage_a = self.leakage_a * 2f64.powf(delta_t / leakage_doubling_c);
        scaled
    }

    /// Terminal currents of the intrinsic transistor at junction voltages VBE, VBC (NPN frame).
    pub fn evaluate(&self, vbe: f64, vbc: f64) -> BjtOperatingPoint {
        let vt = thermal_voltage(self.temperature_c);
        let is = self.saturation_current_a;
        let (e_be, de_be) = limited_exp(vbe / vt);
        let (e_bc, de_bc) = limited_exp(vbc / vt);
        let forward = is * (e_be - 1.0);
        let reverse = is * (e_bc - 1.0);
        let g_forward = is * de_be / vt;
        let g_reverse = is * de_bc / vt;
        // Leakage from collector to base: saturating in reverse bias, smooth through zero.
        let vcb = -vbc;
        let leak_arg = vcb / (2.0 * vt);
        let leak_tanh = elementary::tanh(leak_arg);
        let leakage = self.leakage_a * leak_tanh;
        let d_leakage_dvbc = -self.leakage_a / (2.0 * vt) * (1.0 - leak_tanh * leak_tanh);
        let inv_beta_r = 1.0 / self.beta_reverse;
        BjtOperatingPoint {
            collector_current_a: forward - reverse * (1.0 + inv_beta_r) + leakage,
            base_current_a: forward / self.beta_forward + reverse * inv_beta_r - leakage,
            dic_dvbe: g_forward,
            dic_dvbc: -g_reverse * (1.0 + inv_beta_r) + d_leakage_dvbc,
            dib_dvbe: g_forward / self.beta_forward,
            dib_dvbc: g_reverse * inv_beta_r - d_leakage_dvbc,
            forward_current_a: forward,
            reverse_current_a: reverse,
            forward_conductance_s: g_forward,
            reverse_conductance_s: g_reverse,
        }
    }
}
