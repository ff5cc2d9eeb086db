//! US EPA stack-test equations in the form the methods print them, with the
//! methods' own rounded constants, for results that must match a method
//! calculation digit for digit. Inputs carry the method's units in their names.
//!
//! Submodules: [`calibration`] (S-type calibration, Method 2 §10.1, and its record
//! file), [`moisture`] (Method 4), [`site_checks`] (cyclonic flow, gauge sensitivity,
//! Method 2H default wall factors), [`directional`] (Methods 2F and 2G: yaw- and
//! pitch-resolved axial velocities), [`run_sheet`] (one run by the methods' equations
//! beside the physics route, with every check), [`check`] (a check with its number).
//!
//! # Formula
//! - Method 3, eq. 3-1: M_d = 0.440 (%CO₂) + 0.320 (%O₂) + 0.280 (%N₂ + %CO)
//! - Method 2, eq. 2-5: M_s = M_d (1 − B_ws) + 18.0 B_ws
//! - Method 2, eq. 2-6: P_s = P_bar + P_g / 13.6 (P in mmHg, P_g in mm H₂O)
//! - Method 2, eq. 2-7: v_s = K_p C_p (√Δp)_avg √(T_s / (P_s M_s)),
//!   K_p = 34.97 m/s·[(g/g-mol)(mmHg)/((K)(mm H₂O))]^½ (metric) or
//!   85.49 ft/s·[(lb/lb-mole)(in. Hg)/((°R)(in. H₂O))]^½ (English),
//!   T_s = t_s + 273 (K) or t_s + 460 (°R)
//! - Method 2, eq. 2-10: Q_sd = 3600 (1 − B_ws) v_s A (T_std P_s)/(T_s P_std),
//!   T_std = 293 K, P_std = 760 mmHg (dry standard m³/h)
//!
//! The method averages √Δp, not Δp. A first-principles result
//! ([`crate::Probe`] with [`crate::GasMixture`]) differs from these by about
//! 0.03 % through the rounded constants.
//!
//! # References
//! US EPA, 40 CFR Part 60 Appendix A-1, Method 2 (*Determination of stack gas
//! velocity and volumetric flow rate (Type S pitot tube)*) §12, and Method 3
//! §12 (dry molecular weight). The constants (K_p 34.97 and 85.49, 18.0, 13.6,
//! 0.440/0.320/0.280, T_std 293 K, P_std 760 mmHg) were read in the methods' published
//! nomenclature; equation numbers are from memory. Method 3's coefficients give a dry
//! molecular weight about 0.012 g/mol below a mixture of CIAAW molar masses
//! ([`crate::GasMixture::flue_gas`]), a separate route.

use crate::error::{Error, Result, finite, positive, within};

pub mod calibration;
pub mod check;
pub mod directional;
pub mod moisture;
pub mod run_sheet;
pub mod site_checks;
pub mod wall_factor;

/// Pascals per conventional millimetre of mercury (NIST SP 811 B.8).
pub const PA_PER_MM_HG: f64 = 133.322_387_415;
/// Pascals per conventional millimetre of water, g_n × 1 kg/m² (NIST SP 811 B.8).
pub const PA_PER_MM_H2O: f64 = 9.806_65;

/// Method 2 metric pitot constant K_p.
pub const KP_METRIC: f64 = 34.97;
/// Method 2 English pitot constant K_p.
pub const KP_ENGLISH: f64 = 85.49;

/// Method 3 dry molecular weight, g/g-mol, from dry-basis percentages.
pub fn dry_molecular_weight(co2_pct: f64, o2_pct: f64, n2_plus_co_pct: f64) -> Result<f64> {
    let c = "EPA Method 3";
    let a = within(c, "CO2 percentage", co2_pct, "%", 0.0, 100.0)?;
    let b = within(c, "O2 percentage", o2_pct, "%", 0.0, 100.0)?;
    let n = within(c, "N2 + CO percentage", n2_plus_co_pct, "%", 0.0, 100.0)?;
    if (a + b + n - 100.0).abs() > 0.5 {
        return Err(Error::Inconsistent {
            context: c,
            message: format!("percentages add up to {:.2}, not 100", a + b + n),
        });
    }
    Ok(0.440 * a + 0.320 * b + 0.280 * n)
}

/// Method 2 wet molecular weight, g/g-mol.
pub fn wet_molecular_weight(m_d: f64, b_ws: f64) -> Result<f64> {
    positive("EPA Method 2", "dry molecular weight", m_d, "g/g-mol")?;
    within("EPA Method 2", "moisture fraction B_ws", b_ws, "", 0.0, 1.0)?;
    Ok(m_d * (1.0 - b_ws) + 18.0 * b_ws)
}

/// Method 2 absolute stack pressure, mmHg (or in. Hg with in. H₂O).
pub fn stack_pressure(p_bar: f64, p_g_water: f64) -> Result<f64> {
    positive("EPA Method 2", "barometric pressure", p_bar, "mmHg")?;
    finite("EPA Method 2", "stack static pressure", p_g_water)?;
    Ok(p_bar + p_g_water / 13.6)
}

/// Unit system of a Method 2 calculation.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MethodUnits {
    /// Δp mm H₂O, t °C, P mmHg, result m/s.
    Metric,
    /// Δp in. H₂O, t °F, P in. Hg, result ft/s.
    English,
}

/// Mean of √Δp over the points, as Method 2 averages it. Δp must be ≥ 0.
pub fn mean_sqrt_dp(dp: &[f64]) -> Result<f64> {
    if dp.is_empty() {
        return Err(Error::Inconsistent { context: "EPA Method 2", message: "no velocity heads given".into() });
    }
    let mut sum = 0.0;
    for (i, &d) in dp.iter().enumerate() {
        finite("EPA Method 2", "velocity head", d).map_err(|e| e.at_row(i))?;
        if d < 0.0 {
            return Err(Error::OutOfRange {
                context: "EPA Method 2",
                param: "velocity head",
                value: d,
                unit: "(water column)",
                allowed: "0 or more; Method 2 does not apply to reverse or cyclonic flow".into(),
            }
            .at_row(i));
        }
        sum += d.sqrt();
    }
    Ok(sum / dp.len() as f64)
}

/// Method 2 average stack gas velocity (m/s metric, ft/s English) from the
/// point velocity heads, with the method's constants exactly.
///
/// ```
/// use stagna::methods::us_epa::{velocity, MethodUnits};
/// let v = velocity(0.84, &[10.0, 12.0, 14.0, 15.0, 13.0, 11.0], 150.0, 758.1618, 28.944, MethodUnits::Metric).unwrap();
/// assert!((v - 14.3852).abs() < 1e-4); // check-values.md §4.2 worked example
/// ```
pub fn velocity(cp: f64, dp: &[f64], t_s: f64, p_s: f64, m_s: f64, units: MethodUnits) -> Result<f64> {
    velocity_from_mean_sqrt(cp, mean_sqrt_dp(dp)?, t_s, p_s, m_s, units)
}

/// Method 2 eq. 2-7 from the mean of √Δp already formed (Δp in mm H₂O metric, in. H₂O
/// English), as a campaign reduction accumulates it.
pub fn velocity_from_mean_sqrt(cp: f64, s: f64, t_s: f64, p_s: f64, m_s: f64, units: MethodUnits) -> Result<f64> {
    within("EPA Method 2", "pitot coefficient C_p", cp, "", 0.5, 1.2)?;
    finite("EPA Method 2", "mean of √Δp", s)?;
    finite("EPA Method 2", "stack temperature", t_s)?;
    positive(
        "EPA Method 2",
        "absolute stack pressure",
        p_s,
        if units == MethodUnits::Metric { "mmHg" } else { "in. Hg" },
    )?;
    positive("EPA Method 2", "wet molecular weight", m_s, "g/g-mol")?;
    let (kp, t_abs) = match units {
        MethodUnits::Metric => (KP_METRIC, t_s + 273.0),
        MethodUnits::English => (KP_ENGLISH, t_s + 460.0),
    };
    positive("EPA Method 2", "absolute stack temperature", t_abs, "K or °R")?;
    Ok(kp * cp * s * (t_abs / (p_s * m_s)).sqrt())
}

/// Method 2 dry volumetric flow at standard conditions (20 °C, 760 mmHg),
/// dscm/h, from metric inputs (v_s m/s, A m², t_s °C, P_s mmHg).
pub fn dry_standard_flow_metric(b_ws: f64, v_s: f64, area_m2: f64, t_s_c: f64, p_s_mm_hg: f64) -> Result<f64> {
    within("EPA Method 2", "moisture fraction B_ws", b_ws, "", 0.0, 1.0)?;
    finite("EPA Method 2", "velocity", v_s)?;
    positive("EPA Method 2", "stack area", area_m2, "m²")?;
    positive("EPA Method 2", "absolute stack pressure", p_s_mm_hg, "mmHg")?;
    let t_abs = positive("EPA Method 2", "absolute stack temperature", t_s_c + 273.0, "K")?;
    Ok(3600.0 * (1.0 - b_ws) * v_s * area_m2 * (293.0 / t_abs) * (p_s_mm_hg / 760.0))
}

#[cfg(test)]
mod tests {
    use super::*;

    // check-values.md §2.3 and §4.2 worked example (inputs invented there, arithmetic [C]):
    // 12 % CO2, 6 % O2, 82 % N2 → M_d = 30.160; B_ws = 0.10 → M_s = 28.944;
    // P_bar 760 mmHg, P_g −25 mm H2O → P_s = 758.1618 mmHg; C_p 0.84, six Δp, 150 °C →
    // v_s = 14.3852 m/s; D = 1.50 m, A = 1.76715 m² → Q_sd = 56 912.5 dscm/h;
    // English route (P_s 29.8476 in. Hg, 762 °R) → 47.201 ft/s.
    #[test]
    fn worked_example() {
        let md = dry_molecular_weight(12.0, 6.0, 82.0).unwrap();
        assert!((md - 30.160).abs() < 1e-9);
        let ms = wet_molecular_weight(md, 0.10).unwrap();
        assert!((ms - 28.944).abs() < 1e-9);
        let ps = stack_pressure(760.0, -25.0).unwrap();
        assert!((ps - 758.161_8).abs() < 1e-4);
        let dp = [10.0, 12.0, 14.0, 15.0, 13.0, 11.0];
        assert!((mean_sqrt_dp(&dp).unwrap() - 3.527_20).abs() < 1e-5);
        let v = velocity(0.84, &dp, 150.0, ps, ms, MethodUnits::Metric).unwrap();
        assert!((v - 14.3852).abs() < 1e-4);
        let area = std::f64::consts::PI * 1.5 * 1.5 / 4.0;
        assert!((area - 1.767_15).abs() < 1e-5);
        let q = dry_standard_flow_metric(0.10, v, area, 150.0, ps).unwrap();
        assert!((q - 56_912.5).abs() < 0.5, "{q}");
        let dp_in: Vec<f64> = dp.iter().map(|d| d / 25.4).collect();
        let v_ft = velocity(0.84, &dp_in, 302.0, 29.8476, ms, MethodUnits::English).unwrap();
        assert!((v_ft - 47.201).abs() < 1e-3, "{v_ft}");
    }

    // Derivation check (check-values.md §4.2): K_p = √(2 · (1 mm H2O in Pa) · R · 1000 / (1 mmHg in Pa)) = 34.9736
    // with exact SI constants, so 34.97 is the method's rounding.
    #[test]
    fn kp_metric_derivation() {
        let kp = (2.0 * PA_PER_MM_H2O * crate::units::constants::MOLAR_GAS_CONSTANT * 1000.0 / PA_PER_MM_HG).sqrt();
        assert!((kp - 34.9736).abs() < 1e-4);
        assert!((kp - KP_METRIC).abs() < 5e-3);
    }

    // Two routes to the dry molecular weight: Method 3's rounded coefficients (0.440, 0.320,
    // 0.280; nomenclature read in the text) and CIAAW 2021 molar masses (44.009, 31.998,
    // 28.014 g/mol): 29.912 against 29.924 for 9.8 % CO2, 8.6 % O2, 81.6 % N2 (hand
    // calculation, Python 3.11) — they are kept apart, not called identical.
    #[test]
    fn method3_and_ciaaw_routes_differ() {
        let md = dry_molecular_weight(9.8, 8.6, 81.6).unwrap();
        assert!((md - 29.912).abs() < 1e-9);
        let mix = crate::GasMixture::flue_gas(9.8, 8.6, 0.0, 0.0).unwrap();
        let ciaaw = mix.dry_molar_mass().si() * 1000.0;
        assert!((ciaaw - 29.924).abs() < 2e-3, "{ciaaw}");
        assert!((ciaaw - md - 0.012).abs() < 2e-3);
    }

    #[test]
    fn bad_inputs() {
        let e = velocity(0.84, &[10.0, -1.0], 150.0, 758.0, 29.0, MethodUnits::Metric).unwrap_err();
        assert!(e.to_string().starts_with("row 2: EPA Method 2: velocity head must be 0 or more"), "{e}");
        assert!(velocity(0.84, &[], 150.0, 758.0, 29.0, MethodUnits::Metric).is_err());
        assert!(dry_molecular_weight(12.0, 6.0, 70.0).is_err());
        assert!(stack_pressure(-1.0, 0.0).is_err());
    }
}
