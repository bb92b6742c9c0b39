//! Device descriptions: datasheet-level transistor and diode data, their validation, and
//! temperature scaling of the datasheet values.
//!
//! All voltages and currents are stored as *magnitudes in the NPN frame*: a PNP part has the
//! same positive numbers as its NPN mirror, and [`Polarity`] flips the signs when results are
//! reported. This keeps NPN and PNP analyses mirror-exact by construction.

pub mod archetypes;
pub mod ebers_moll;

use serde::{Deserialize, Serialize};

use crate::physics::REFERENCE_TEMPERATURE_C;

/// Transistor polarity.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Polarity {
    Npn,
    Pnp,
}

impl Polarity {
    /// +1 for NPN, −1 for PNP: multiplies NPN-frame voltages and currents into real ones.
    pub fn sign(self) -> f64 {
        match self {
            Polarity::Npn => 1.0,
            Polarity::Pnp => -1.0,
        }
    }
    pub fn name(self) -> &'static str {
        match self {
            Polarity::Npn => "NPN",
            Polarity::Pnp => "PNP",
        }
    }
}

/// Semiconductor material; sets the band gap used for temperature scaling.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Material {
    Silicon,
    Germanium,
}

impl Material {
    /// Band gap in eV used in the IS(T) law (standard device-physics texts: Si 1.11 eV,
    /// Ge 0.67 eV).
    pub fn band_gap_ev(self) -> f64 {
        match self {
            Material::Silicon => 1.11,
            Material::Germanium => 0.67,
        }
    }
    pub fn name(self) -> &'static str {
        match self {
            Material::Silicon => "silicon",
            Material::Germanium => "germanium",
        }
    }
}

/// Storage-time test condition from a datasheet, used to derive the storage time constant
/// τS by inverting the charge-control storage-time formula.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct StorageTimeTest {
    pub storage_time_s: f64,
    pub collector_current_a: f64,
    pub forward_base_current_a: f64,
    pub reverse_base_current_a: f64,
}

/// Datasheet-level description of a bipolar transistor (NPN-frame magnitudes).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TransistorDatasheet {
    /// Free text naming the part or its class.
    pub label: String,
    pub polarity: Polarity,
    pub material: Material,
    /// True for the shipped generic archetypes: values typical of a class, not of a part.
    #[serde(default)]
    pub approximate: bool,
    pub hfe_min: f64,
    pub hfe_typ: f64,
    pub hfe_max: f64,
    /// Collector current at which hFE is specified, A.
    pub hfe_test_current_a: f64,
    /// Fractional change of hFE per °C (silicon about +0.005/°C, common practice).
    pub hfe_tempco_per_c: f64,
    /// Typical and maximum collector–emitter saturation voltage at the forced gain below, V.
    pub vce_sat_typ_v: f64,
    pub vce_sat_max_v: f64,
    /// Base–emitter saturation voltage range at the forced gain below, V.
    pub vbe_sat_min_v: f64,
    pub vbe_sat_typ_v: f64,
    pub vbe_sat_max_v: f64,
    /// Forced gain IC/IB of the saturation specification.
    pub sat_forced_gain: f64,
    /// Collector current of the saturation specification, A.
    pub sat_test_current_a: f64,
    /// Base–emitter voltage below which the device counts as cut off at 25 °C, V (NPN frame;
    /// may be negative for germanium, which must be reverse biased).
    pub vbe_cutoff_v: f64,
    /// Change of VBE per °C at constant current (about −2 mV/°C, common practice).
    pub vbe_tempco_v_per_c: f64,
    /// Collector–base leakage at 25 °C (the maximum for worst case), A.
    pub icbo_25c_a: f64,
    /// Temperature rise that doubles ICBO, °C (10 is common practice; some use 13 for Ge).
    pub icbo_doubling_c: f64,
    /// Transition frequency, Hz.
    pub ft_hz: f64,
    /// Output (collector–base) capacitance, F.
    pub cob_f: f64,
    /// Input (emitter–base) capacitance, F.
    pub cib_f: f64,
    /// Saturation storage time constant τS, s. Either this or `storage_test` must be given.
    #[serde(default)]
    pub storage_time_constant_s: Option<f64>,
    #[serde(default)]
    pub storage_test: Option<StorageTimeTest>,
    pub vceo_v: f64,
    pub vcbo_v: f64,
    pub vebo_v: f64,
    pub ic_max_a: f64,
    pub ptot_w: f64,
}

/// Datasheet-level description of a small-signal (steering) diode.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DiodeDatasheet {
    pub label: String,
    pub material: Material,
    #[serde(default)]
    pub approximate: bool,
    /// Forward drop at the test current, V.
    pub forward_voltage_v: f64,
    pub forward_test_current_a: f64,
    /// Emission coefficient of the exponential law (1 ideal; small-signal silicon 1.5–2).
    pub emission_coefficient: f64,
    /// Reverse leakage at 25 °C, A, and its doubling interval, °C.
    pub reverse_leakage_25c_a: f64,
    pub leakage_doubling_c: f64,
    /// Junction capacitance, F.
    pub capacitance_f: f64,
    /// Reverse recovery time, s.
    pub reverse_recovery_s: f64,
    /// Peak inverse voltage rating, V, and forward current rating, A.
    pub piv_v: f64,
    pub if_max_a: f64,
}

/// One transistor's datasheet values evaluated at a temperature and at chosen points of
/// their spread. This is what the piecewise (handbook) analysis consumes.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PiecewiseTransistor {
    pub hfe: f64,
    pub vce_sat_v: f64,
    pub vbe_sat_v: f64,
    pub vbe_cutoff_v: f64,
    pub icbo_a: f64,
}

/// Where in its datasheet spread each transistor parameter sits: −1 low end, 0 typical,
/// +1 high end.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct SpreadPoint {
    pub hfe: f64,
    pub vce_sat: f64,
    pub vbe_sat: f64,
}

fn interpolate(low: f64, typ: f64, high: f64, position: f64) -> f64 {
    if position < 0.0 {
        typ + (typ - low) * position
    } else {
        typ + (high - typ) * position
    }
}

impl TransistorDatasheet {
    /// hFE at a temperature for a spread position (−1 min, 0 typ, +1 max).
    pub fn hfe_at(&self, temperature_c: f64, spread: f64) -> f64 {
        let at_25 = interpolate(self.hfe_min, self.hfe_typ, self.hfe_max, spread);
        let factor = 1.0 + self.hfe_tempco_per_c * (temperature_c - REFERENCE_TEMPERATURE_C);
        // A linear tempco goes negative far outside its range; keep a physical floor.
        at_25 * factor.max(0.1)
    }

    /// ICBO at a temperature (doubling law, common practice).
    pub fn icbo_at(&self, temperature_c: f64) -> f64 {
        let doublings = (temperature_c - REFERENCE_TEMPERATURE_C) / self.icbo_doubling_c;
        self.icbo_25c_a * 2f64.powf(doublings)
    }

    /// The piecewise description at a temperature and spread point.
    pub fn piecewise_at(&self, temperature_c: f64, spread: SpreadPoint) -> PiecewiseTransistor {
        let delta_t = temperature_c - REFERENCE_TEMPERATURE_C;
        // The low end of VCE(sat) is not on datasheets; half the typical value is assumed.
        let vce_sat =
            interpolate(0.5 * self.vce_sat_typ_v, self.vce_sat_typ_v, self.vce_sat_max_v, spread.vce_sat);
        let vbe_sat = interpolate(self.vbe_sat_min_v, self.vbe_sat_typ_v, self.vbe_sat_max_v, spread.vbe_sat)
            + self.vbe_tempco_v_per_c * delta_t;
        PiecewiseTransistor {
            hfe: self.hfe_at(temperature_c, spread.hfe),
            vce_sat_v: vce_sat,
            vbe_sat_v: vbe_sat,
            vbe_cutoff_v: self.vbe_cutoff_v + self.vbe_tempco_v_per_c * delta_t,
            icbo_a: self.icbo_at(temperature_c),
        }
    }

    /// Forward transit time from fT: τF ≈ 1/(2π·fT). This ignores the junction-capacitance
    /// share of fT, so it slightly overstates τF at low currents.
    pub fn forward_transit_time_s(&self) -> f64 {
        1.0 / (2.0 * std::f64::consts::PI * self.ft_hz)
    }

    /// Storage time constant τS: given directly, or from the datasheet storage-time test by
    /// inverting ts = τS·ln[(IB1 + IB2)/(IC/β + IB2)] (charge control, Moll 1954) with β = hFE typ.
    pub fn storage_time_constant(&self) -> Option<f64> {
        if let Some(tau_s) = self.storage_time_constant_s {
            return Some(tau_s);
        }
        let test = self.storage_test?;
        let ib_edge = test.collector_current_a / self.hfe_typ;
        let ratio = (test.forward_base_current_a + test.reverse_base_current_a)
            / (ib_edge + test.reverse_base_current_a);
        if !(ratio > 1.0) {
            return None;
        }
        Some(test.storage_time_s / ratio.ln())
    }
}

impl DiodeDatasheet {
    /// Saturation current of the exponential law fitted to the forward-drop point, A.
    pub fn saturation_current_a(&self, temperature_c: f64) -> f64 {
        let vt = crate::physics::thermal_voltage(REFERENCE_TEMPERATURE_C);
        let is_25 = self.forward_test_current_a
            / ((self.forward_voltage_v / (self.emission_coefficient * vt)).exp() - 1.0);
        ebers_moll::scale_saturation_current(
            is_25,
            REFERENCE_TEMPERATURE_C,
            temperature_c,
            self.material.band_gap_ev(),
            self.emission_coefficient,
        )
    }

    pub fn leakage_at(&self, temperature_c: f64) -> f64 {
        let doublings = (temperature_c - REFERENCE_TEMPERATURE_C) / self.leakage_doubling_c;
        self.reverse_leakage_25c_a * 2f64.powf(doublings)
    }

    /// Forward drop at a current and temperature from the exponential law, V.
    pub fn forward_voltage_at(&self, current_a: f64, temperature_c: f64) -> f64 {
        let n_vt = self.emission_coefficient * crate::physics::thermal_voltage(temperature_c);
        n_vt * (current_a / self.saturation_current_a(temperature_c) + 1.0).ln()
    }
}
