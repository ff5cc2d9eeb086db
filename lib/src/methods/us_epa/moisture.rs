//! Moisture of stack gas by US EPA Method 4: water caught in impingers and silica
//! gel, dry gas through a calibrated meter, and the saturation limit at stack
//! temperature.
//!
//! # Formula (reference procedure, in the method's symbolic form)
//! - V_wc(std) = (V_f − V_i) ρ_w R T_std / (P_std M_w) — condensed water vapour;
//! - V_wsg(std) = (W_f − W_i) R T_std / (P_std M_w) — water caught in the silica gel;
//! - V_m(std) = V_m Y (P_m T_std) / (P_std T_m) — dry gas through the meter, with
//!   P_m = P_bar, or P_bar + ΔH/13.6 when the meter sits behind an orifice (Method 5 form);
//! - B_ws = (V_wc(std) + V_wsg(std)) / (V_wc(std) + V_wsg(std) + V_m(std));
//! - saturation: B_ws(sat) = p_sat(T_s) / P_s; the lower of measured and saturated
//!   moisture is reported.
//!
//! Metric: ρ_w = 0.9982 g/ml, R = 0.06236 mmHg·m³/(g-mol·K), M_w = 18.0 g/g-mol,
//! T_std = 293 K, P_std = 760 mmHg, volumes in m³ (dscm), T = t + 273.
//! English: ρ_w = 0.002201 lb/ml, R = 21.85 in.Hg·ft³/(lb-mol·°R), M_w = 18.0,
//! T_std = 528 °R, P_std = 29.92 in.Hg, volumes in ft³ (dscf), T = t + 460, silica-gel
//! gain converted with 453.592 37 g/lb (NIST SP 811, exact).
//!
//! # References
//! US EPA 40 CFR Part 60 Appendix A-3, Method 4. Read in the published text: the
//! symbols and constants above (Method 4 nomenclature: ρ_w, R, M_w, T_std, P_std, and
//! "P_m ... same as barometric pressure"), and the leak limit L_a = 0.00057 m³/min
//! (0.020 cfm) or 4 % of the average sampling rate, whichever is less (Method 5
//! nomenclature). From memory: the equation numbers (4-1 to 4-4), the rule "use the
//! lower of measured and saturated B_ws", the approximation procedure's B_wm = 0.025.
//! The method prints K-constants rounded from the same products (e.g. 0.001333 m³/ml);
//! the symbolic form is used here, which differs from them in the fourth digit.
//! Saturation pressure: IAPWS-IF97 region 4.

use super::check::{Citation, MethodCheck};
use super::{MethodUnits, PA_PER_MM_HG};
use crate::error::{Error, Result, finite, positive, within};
use crate::fluids::water::saturation_pressure;
use crate::units::quantity::Temperature;

const CONTEXT: &str = "EPA Method 4";
/// Grams per avoirdupois pound (NIST SP 811 B.8, exact).
const G_PER_LB: f64 = 453.592_37;
/// Pascals per conventional in. Hg (NIST SP 811 B.8).
const PA_PER_IN_HG: f64 = 3_386.389;

/// The method's constants in one unit system.
struct Constants {
    rho_w: f64,
    r: f64,
    m_w: f64,
    t_std: f64,
    p_std: f64,
    t_offset: f64,
    grams_per_mass_unit: f64,
}

fn constants(units: MethodUnits) -> Constants {
    match units {
        MethodUnits::Metric => Constants {
            rho_w: 0.9982,
            r: 0.062_36,
            m_w: 18.0,
            t_std: 293.0,
            p_std: 760.0,
            t_offset: 273.0,
            grams_per_mass_unit: 1.0,
        },
        MethodUnits::English => Constants {
            rho_w: 0.002_201,
            r: 21.85,
            m_w: 18.0,
            t_std: 528.0,
            p_std: 29.92,
            t_offset: 460.0,
            grams_per_mass_unit: G_PER_LB,
        },
    }
}

/// One run's moisture train, in the method's units (metric: ml, g, m³, °C, mmHg,
/// mm H₂O; English: ml, g, ft³, °F, in. Hg, in. H₂O).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MoistureTrain {
    /// Unit system of every field.
    pub units: MethodUnits,
    /// Water in the impingers before the run, V_i (ml).
    pub water_initial_ml: f64,
    /// Water in the impingers after the run, V_f (ml).
    pub water_final_ml: f64,
    /// Silica gel (or gel plus impinger) before, W_i (g).
    pub gel_initial_g: f64,
    /// Silica gel after, W_f (g).
    pub gel_final_g: f64,
    /// Dry gas volume read on the meter, V_m (m³ or ft³).
    pub meter_volume: f64,
    /// Dry gas meter calibration factor Y.
    pub meter_factor: f64,
    /// Mean meter temperature t_m (°C or °F).
    pub meter_temperature: f64,
    /// Barometric pressure P_bar (mmHg or in. Hg).
    pub barometric: f64,
    /// Mean orifice differential ΔH (mm or in. H₂O); 0 when the meter reads at P_bar.
    pub orifice_dp: f64,
}

/// Method 4 results for one run.
#[derive(Debug, Clone, PartialEq)]
pub struct MoistureResult {
    /// The inputs.
    pub train: MoistureTrain,
    /// V_wc(std), m³ or ft³ at 20 °C, 760 mmHg.
    pub vwc_std: f64,
    /// V_wsg(std).
    pub vwsg_std: f64,
    /// V_m(std), dry standard m³ or ft³.
    pub vm_std: f64,
    /// Measured B_ws.
    pub bws_measured: f64,
    /// Saturated B_ws at stack conditions, when the stack state was given and the stack
    /// is below the boiling point at its pressure (otherwise saturation does not limit).
    pub bws_saturated: Option<f64>,
    /// The B_ws to report (the lower of the two).
    pub bws: f64,
    /// Checks (leak rate, saturation) with their numbers.
    pub checks: Vec<MethodCheck>,
}

impl MoistureResult {
    /// Whether the saturated value was reported instead of the measured one.
    pub fn saturation_used(&self) -> bool {
        self.bws_saturated.is_some_and(|s| s < self.bws_measured)
    }
}

/// The stack conditions the saturation limit needs: temperature (°C or °F) and
/// absolute pressure (mmHg or in. Hg), in the train's units.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StackConditions {
    /// Stack temperature t_s.
    pub temperature: f64,
    /// Absolute stack pressure P_s.
    pub pressure: f64,
}

/// A leak check of the train: observed leak rate and average sampling rate (m³/min
/// metric, ft³/min English).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LeakCheck {
    /// Leak rate observed.
    pub leak_rate: f64,
    /// Average sampling rate of the run.
    pub sampling_rate: f64,
}

/// Reduces a moisture train by the reference procedure.
///
/// ```
/// use stagna::methods::us_epa::MethodUnits;
/// use stagna::methods::us_epa::moisture::{MoistureTrain, reduce};
/// let t = MoistureTrain { units: MethodUnits::Metric, water_initial_ml: 200.0, water_final_ml: 281.0,
///     gel_initial_g: 200.0, gel_final_g: 209.0, meter_volume: 0.900, meter_factor: 0.998,
///     meter_temperature: 24.0, barometric: 745.0, orifice_dp: 0.0 };
/// let m = reduce(&t, None, None).unwrap();
/// assert!((m.bws - 0.1214).abs() < 1e-4); // hand calculation in this module's tests
/// ```
pub fn reduce(
    train: &MoistureTrain,
    stack: Option<StackConditions>,
    leak: Option<LeakCheck>,
) -> Result<MoistureResult> {
    let c = constants(train.units);
    let t = train;
    for (name, v) in [
        ("initial impinger water V_i", t.water_initial_ml),
        ("final impinger water V_f", t.water_final_ml),
        ("initial silica gel W_i", t.gel_initial_g),
        ("final silica gel W_f", t.gel_final_g),
    ] {
        finite(CONTEXT, "moisture train", v)?;
        if v < 0.0 {
            return Err(Error::Inconsistent { context: CONTEXT, message: format!("{name} is negative ({v})") });
        }
    }
    if t.water_final_ml < t.water_initial_ml {
        return Err(Error::Inconsistent {
            context: CONTEXT,
            message: format!(
                "impinger water gain is negative: V_f {} ml < V_i {} ml; check the readings (a loss means a leak or spill)",
                t.water_final_ml, t.water_initial_ml
            ),
        });
    }
    if t.gel_final_g < t.gel_initial_g {
        return Err(Error::Inconsistent {
            context: CONTEXT,
            message: format!("silica gel weight gain is negative: W_f {} g < W_i {} g", t.gel_final_g, t.gel_initial_g),
        });
    }
    positive(
        CONTEXT,
        "dry gas meter volume V_m",
        t.meter_volume,
        if t.units == MethodUnits::Metric { "m³" } else { "ft³" },
    )?;
    positive(CONTEXT, "dry gas meter factor Y", t.meter_factor, "")?;
    within(CONTEXT, "dry gas meter factor Y", t.meter_factor, "", 0.5, 1.5)?;
    positive(
        CONTEXT,
        "barometric pressure",
        t.barometric,
        if t.units == MethodUnits::Metric { "mmHg" } else { "in. Hg" },
    )?;
    finite(CONTEXT, "orifice differential ΔH", t.orifice_dp)?;
    if t.orifice_dp < 0.0 {
        return Err(Error::Inconsistent {
            context: CONTEXT,
            message: format!("orifice differential ΔH is negative ({})", t.orifice_dp),
        });
    }
    let t_m = positive(CONTEXT, "absolute meter temperature", t.meter_temperature + c.t_offset, "K or °R")?;

    let k = c.r * c.t_std / (c.p_std * c.m_w);
    let vwc_std = (t.water_final_ml - t.water_initial_ml) * c.rho_w * k;
    let vwsg_std = (t.gel_final_g - t.gel_initial_g) / c.grams_per_mass_unit * k;
    let p_m = t.barometric + t.orifice_dp / 13.6;
    let vm_std = t.meter_volume * t.meter_factor * p_m * c.t_std / (c.p_std * t_m);
    let water = vwc_std + vwsg_std;
    let bws_measured = water / (water + vm_std);

    let mut checks = Vec::new();
    let mut bws_saturated = None;
    if let Some(s) = stack {
        let p_pa = positive(CONTEXT, "absolute stack pressure", s.pressure, "")?
            * if t.units == MethodUnits::Metric { PA_PER_MM_HG } else { PA_PER_IN_HG };
        let t_k = match t.units {
            MethodUnits::Metric => s.temperature + 273.15,
            MethodUnits::English => (s.temperature + 459.67) * 5.0 / 9.0,
        };
        finite(CONTEXT, "stack temperature", t_k)?;
        // At or above the boiling point at P_s (sat ≥ 1) saturation does not limit B_ws.
        let sat =
            if t_k < 647.096 { saturation_pressure(Temperature::kelvin(t_k))?.si() / p_pa } else { f64::INFINITY };
        if sat < 1.0 {
            bws_saturated = Some(sat);
            checks.push(MethodCheck {
                name: "measured B_ws against saturation at stack conditions".into(),
                value: bws_measured,
                unit: "",
                decimals: 4,
                limit: format!("≤ B_ws(sat) = {sat:.4}, else B_ws(sat) is reported"),
                pass: bws_measured <= sat,
                source: "US EPA Method 4 (lower of measured and saturated moisture)",
                citation: Citation::FromMemory,
            });
        }
    }
    if let Some(l) = leak {
        let (abs_limit, unit): (f64, &str) = match t.units {
            MethodUnits::Metric => (0.000_57, "m³/min"),
            MethodUnits::English => (0.020, "ft³/min"),
        };
        finite(CONTEXT, "leak rate", l.leak_rate)?;
        if l.leak_rate < 0.0 {
            return Err(Error::Inconsistent {
                context: CONTEXT,
                message: format!("leak rate is negative ({})", l.leak_rate),
            });
        }
        positive(CONTEXT, "average sampling rate", l.sampling_rate, unit)?;
        let limit = abs_limit.min(0.04 * l.sampling_rate);
        checks.push(MethodCheck {
            name: "leak rate of the train, L".into(),
            value: l.leak_rate,
            unit,
            decimals: 5,
            limit: format!("≤ L_a = {limit:.5} {unit} (the lesser of {abs_limit} {unit} and 4 % of the sampling rate)"),
            pass: l.leak_rate <= limit,
            source: "US EPA Method 5 nomenclature, L_a",
            citation: Citation::Verified,
        });
    }
    let bws = bws_saturated.map_or(bws_measured, |s| s.min(bws_measured));
    Ok(MoistureResult { train: *train, vwc_std, vwsg_std, vm_std, bws_measured, bws_saturated, bws, checks })
}

/// Approximation procedure (for setting isokinetic rates, not for reported
/// emissions): B_ws = V_wc(std) / (V_wc(std) + V_m(std)) + B_wm, where B_wm is the
/// moisture leaving the last impinger (0.025 unless known). From memory.
pub fn approximate(vwc_std: f64, vm_std: f64, b_wm: f64) -> Result<f64> {
    finite(CONTEXT, "V_wc(std)", vwc_std)?;
    if vwc_std < 0.0 {
        return Err(Error::Inconsistent { context: CONTEXT, message: format!("V_wc(std) is negative ({vwc_std})") });
    }
    positive(CONTEXT, "V_m(std)", vm_std, "")?;
    within(CONTEXT, "B_wm", b_wm, "", 0.0, 0.2)?;
    Ok(vwc_std / (vwc_std + vm_std) + b_wm)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn train() -> MoistureTrain {
        MoistureTrain {
            units: MethodUnits::Metric,
            water_initial_ml: 200.0,
            water_final_ml: 281.0,
            gel_initial_g: 200.0,
            gel_final_g: 209.0,
            meter_volume: 0.900,
            meter_factor: 0.998,
            meter_temperature: 24.0,
            barometric: 745.0,
            orifice_dp: 0.0,
        }
    }

    // Hand calculation in the method's symbolic form (inputs invented; arithmetic with
    // Python 3.11):
    //   k = 0.06236·293/(760·18.0) = 0.001 335 63 m³/g
    //   V_wc = 81 ml · 0.9982 · k = 0.107 992 m³; V_wsg = 9 g · k = 0.012 020 7 m³
    //   V_m(std) = 0.900 · 0.998 · 745 · 293 / (760 · 297) = 0.868 614 dscm
    //   B_ws = 0.120 012 / (0.120 012 + 0.868 614) = 0.121 393
    // The method's rounded K2 = 0.001333 m³/ml and K3 = 0.001335 m³/g (from memory) give
    // 0.107 973 and 0.012 015: the same B_ws to 4 decimals (0.1214).
    #[test]
    fn hand_calculation() {
        let m = reduce(&train(), None, None).unwrap();
        assert!((m.vwc_std - 0.107_992).abs() < 1e-6, "{}", m.vwc_std);
        assert!((m.vwsg_std - 0.012_020_7).abs() < 1e-7, "{}", m.vwsg_std);
        assert!((m.vm_std - 0.868_614).abs() < 1e-6, "{}", m.vm_std);
        assert!((m.bws - 0.121_393).abs() < 1e-6, "{}", m.bws);
        // Metric constant K1 = T_std/P_std = 293/760 = 0.3855 K/mmHg (Method 4, from memory).
        assert!((293.0_f64 / 760.0 - 0.3855).abs() < 1e-4);
    }

    // Saturation at the stack: water at 60 °C has p_sat = 19.9458 kPa (`iapws` 1.5.5,
    // IAPWS97(T=333.15, x=0).P = 0.0199458 MPa); at P_s = 745 mmHg (99.325 kPa)
    // B_ws(sat) = 0.2008, above the measured 0.1214 → measured reported.
    // At 45 °C p_sat = 9.5944 kPa (IAPWS97(T=318.15, x=0).P) → B_ws(sat) = 0.0966 < 0.1214
    // → saturated reported.
    #[test]
    fn saturation_rule_on_both_sides() {
        let m = reduce(&train(), Some(StackConditions { temperature: 60.0, pressure: 745.0 }), None).unwrap();
        assert!((m.bws_saturated.unwrap() - 0.2008).abs() < 2e-4, "{:?}", m.bws_saturated);
        assert!(!m.saturation_used() && m.checks[0].pass);
        let m = reduce(&train(), Some(StackConditions { temperature: 45.0, pressure: 745.0 }), None).unwrap();
        assert!((m.bws - 0.0966).abs() < 2e-4, "{}", m.bws);
        assert!(m.saturation_used() && !m.checks[0].pass);
    }

    // Leak limit (Method 5 nomenclature, verified): lesser of 0.00057 m³/min and 4 % of the
    // sampling rate. Sampling 0.020 m³/min → limit 0.0008 → 0.00057 applies.
    #[test]
    fn leak_limit_on_both_sides() {
        let ok = reduce(&train(), None, Some(LeakCheck { leak_rate: 0.000_50, sampling_rate: 0.020 })).unwrap();
        assert!(ok.checks[0].pass);
        let bad = reduce(&train(), None, Some(LeakCheck { leak_rate: 0.000_60, sampling_rate: 0.020 })).unwrap();
        assert!(!bad.checks[0].pass);
        // 4 % of 0.010 = 0.0004 is the lesser.
        let slow = reduce(&train(), None, Some(LeakCheck { leak_rate: 0.000_45, sampling_rate: 0.010 })).unwrap();
        assert!(!slow.checks[0].pass, "{}", slow.checks[0]);
    }

    #[test]
    fn bad_inputs() {
        let mut t = train();
        t.gel_final_g = 190.0;
        assert!(reduce(&t, None, None).unwrap_err().to_string().contains("silica gel weight gain is negative"));
        let mut t = train();
        t.meter_factor = 0.0;
        assert!(reduce(&t, None, None).unwrap_err().to_string().contains("meter factor Y"));
        let mut t = train();
        t.water_final_ml = 150.0;
        assert!(reduce(&t, None, None).unwrap_err().to_string().contains("impinger water gain is negative"));
        let mut t = train();
        t.meter_volume = f64::NAN;
        assert!(reduce(&t, None, None).is_err());
    }

    // English units: the same train in ft³, °F, in. Hg gives the same B_ws within the
    // rounding of the two constant sets (R 21.85 vs 0.06236, ρ_w per ml).
    #[test]
    fn english_units_agree() {
        let t = MoistureTrain {
            units: MethodUnits::English,
            meter_volume: 0.900 / 0.028_316_846_592,
            meter_temperature: 24.0 * 1.8 + 32.0,
            barometric: 745.0 * PA_PER_MM_HG / PA_PER_IN_HG,
            ..train()
        };
        let m = reduce(&t, None, None).unwrap();
        assert!((m.bws - 0.121_393).abs() < 3e-4, "{}", m.bws);
    }

    #[test]
    fn approximation() {
        // 0.107 992 / (0.107 992 + 0.868 614) + 0.025 = 0.135 579
        assert!((approximate(0.107_992, 0.868_614, 0.025).unwrap() - 0.135_579).abs() < 1e-6);
        assert!(approximate(-1.0, 1.0, 0.025).is_err());
    }
}
