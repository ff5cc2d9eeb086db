//! Checks a US EPA stack test makes on the site and the readings before it reports a
//! flow: cyclonic flow (Method 1), gauge sensitivity at low velocity heads (Method 2),
//! and whether a Method 2H default wall factor may be used.
//!
//! # Formula
//! - Cyclonic flow: the null (yaw) angle α_i at each point, mean of |α_i| against 20°.
//! - Gauge sensitivity, eq. 2-1: T = Σ √(Δp_i + K) / Σ √Δp_i with K = 0.127 mm H₂O
//!   (0.005 in. H₂O); a more sensitive gauge is needed when T > 1.05. Also: the mean Δp
//!   below 1.3 mm (0.05 in.) H₂O, or more than 10 % of the readings below it (12 or more
//!   points), or more than one reading below it (fewer than 12 points).
//! - Method 2H default wall adjustment factor: 0.9900 for brick-and-mortar stacks,
//!   0.9950 for all other stacks and ducts; circular stacks of 1.0 m (3.3 ft) or more.
//!
//! # References
//! US EPA 40 CFR Part 60 Appendix A-1. Read in the published text: Method 2 nomenclature
//! (T, "sensitivity factor for differential pressure gauges"; K = 0.127 mm H₂O,
//! 0.005 in. H₂O); Method 2 §1.2 (not for cyclonic or swirling streams; Method 1 §11.4
//! shows how to tell); Method 2H §1.1 (circular stacks and ducts), §1.2 (not below
//! 3.3 ft, 1.0 m), §2.2.1 (the calculated factor needs 16 or more Method 1 points and 8
//! or more wall points) and §2.2.2 (the defaults, "without taking wall effects
//! measurements"; the clause names no point count for them). From memory: the 20° limit
//! and averaging of Method 1 §11.4, the 1.05 limit on T and the 1.3 mm criteria of
//! Method 2 §6.2.1 / §12; printed checks say so.

use super::MethodUnits;
use super::check::{Citation, MethodCheck};
use crate::error::{Error, Result, finite};

/// Method 1 cyclonic-flow check from the null (yaw) angle at each traverse point, in
/// degrees (signed or not; |α| ≤ 90°).
///
/// ```
/// use stagna::methods::us_epa::site_checks::cyclonic_flow;
/// let c = cyclonic_flow(&[4.0, -6.0, 12.0, 0.0, -3.0, 8.0]).unwrap();
/// assert!((c.value - 5.5).abs() < 1e-12 && c.pass);
/// ```
pub fn cyclonic_flow(yaw_deg: &[f64]) -> Result<MethodCheck> {
    if yaw_deg.is_empty() {
        return Err(Error::Inconsistent { context: "EPA Method 1", message: "no yaw angles given".into() });
    }
    let mut sum = 0.0;
    for (i, &a) in yaw_deg.iter().enumerate() {
        finite("EPA Method 1", "yaw angle", a).map_err(|e| e.at_row(i))?;
        if a.abs() > 90.0 {
            return Err(Error::OutOfRange {
                context: "EPA Method 1",
                param: "yaw angle",
                value: a,
                unit: "°",
                allowed: "within ±90° (the null angle of the probe from the stack axis)".into(),
            }
            .at_row(i));
        }
        sum += a.abs();
    }
    let mean = sum / yaw_deg.len() as f64;
    Ok(MethodCheck {
        name: format!("cyclonic flow: mean |yaw| over {} points", yaw_deg.len()),
        value: mean,
        unit: "°",
        decimals: 1,
        limit: "≤ 20 °".into(),
        pass: mean <= 20.0,
        source: "US EPA Method 1 §11.4",
        citation: Citation::FromMemory,
    })
}

/// Method 2 gauge-sensitivity checks on one traverse's velocity heads (mm H₂O metric,
/// in. H₂O English): the sensitivity factor T (eq. 2-1) and the low-reading criteria.
pub fn gauge_sensitivity(dp: &[f64], units: MethodUnits) -> Result<Vec<MethodCheck>> {
    let s = super::mean_sqrt_dp(dp)? * dp.len() as f64;
    if s <= 0.0 {
        return Err(Error::Inconsistent { context: "EPA Method 2", message: "every velocity head is zero".into() });
    }
    let (k, low, unit) = match units {
        MethodUnits::Metric => (0.127, 1.3, "mm H₂O"),
        MethodUnits::English => (0.005, 0.05, "in. H₂O"),
    };
    let t = dp.iter().map(|d| (d + k).sqrt()).sum::<f64>() / s;
    let n = dp.len();
    let mean = dp.iter().sum::<f64>() / n as f64;
    let below = dp.iter().filter(|&&d| d < low).count();
    let mut checks = vec![
        MethodCheck {
            name: format!("gauge sensitivity factor T (eq. 2-1, K = {k} {unit})"),
            value: t,
            unit: "",
            decimals: 3,
            limit: "≤ 1.05, else a more sensitive gauge".into(),
            pass: t <= 1.05,
            source: "US EPA Method 2 §6.2.1, eq. 2-1",
            citation: Citation::FromMemory,
        },
        MethodCheck {
            name: "mean velocity head".into(),
            value: mean,
            unit,
            decimals: 2,
            limit: format!("≥ {low} {unit}, else a more sensitive gauge"),
            pass: mean >= low,
            source: "US EPA Method 2 §6.2.1",
            citation: Citation::FromMemory,
        },
    ];
    let (limit, pass) = if n >= 12 {
        (format!("≤ 10 % of the {n} readings below {low} {unit}"), below as f64 <= 0.1 * n as f64)
    } else {
        (format!("at most 1 of the {n} readings below {low} {unit}"), below <= 1)
    };
    checks.push(MethodCheck {
        name: format!("readings below {low} {unit}"),
        value: below as f64,
        unit: "",
        decimals: 0,
        limit,
        pass,
        source: "US EPA Method 2 §6.2.1",
        citation: Citation::FromMemory,
    });
    Ok(checks)
}

/// Stack construction, for the Method 2H default wall factor.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Construction {
    /// Brick and mortar.
    BrickAndMortar,
    /// Any other stack or duct (steel, lined steel, concrete, ...).
    Other,
}

impl Construction {
    /// From a name: "brick" / "brick and mortar", or "other" / "steel" / "metal".
    pub fn parse(s: &str) -> Result<Self> {
        match s.trim().to_ascii_lowercase().replace(['-', '_'], " ").as_str() {
            "brick" | "brick and mortar" | "masonry" => Ok(Self::BrickAndMortar),
            "other" | "steel" | "metal" | "concrete" | "lined steel" | "frp" => Ok(Self::Other),
            other => Err(Error::Inconsistent {
                context: "EPA Method 2H",
                message: format!("construction '{other}' unknown; write \"brick and mortar\" or \"other\""),
            }),
        }
    }
}

/// How the section mean velocity was obtained, for the wall-factor conditions.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Averaging {
    /// Arithmetic mean of Method 1 equal-area points (what Method 2H corrects).
    EqualAreaMean,
    /// An integration that already models the wall region (e.g. a power-law wall zone).
    WallZoneIntegration,
}

/// The Method 2H default wall adjustment factor, refused where the method does not
/// allow it: a non-circular section, a stack under 1.0 m, or a mean that already
/// accounts for the wall.
///
/// ```
/// use stagna::methods::us_epa::site_checks::{default_wall_factor, Averaging, Construction};
/// let (waf, checks) = default_wall_factor(Construction::Other, Some(1.80), Averaging::EqualAreaMean).unwrap();
/// assert_eq!(waf, 0.9950);
/// assert!(checks.iter().all(|c| c.pass));
/// assert!(default_wall_factor(Construction::Other, Some(0.9), Averaging::EqualAreaMean).is_err());
/// ```
pub fn default_wall_factor(
    construction: Construction,
    diameter_m: Option<f64>,
    averaging: Averaging,
) -> Result<(f64, Vec<MethodCheck>)> {
    let ctx = "EPA Method 2H";
    let Some(d) = diameter_m else {
        return Err(Error::Inconsistent {
            context: ctx,
            message: "wall adjustment factors apply to circular stacks and ducts only (Method 2H §1.1)".into(),
        });
    };
    finite(ctx, "stack diameter", d)?;
    if d < 1.0 {
        return Err(Error::Inconsistent {
            context: ctx,
            message: format!("the stack is {d:.3} m across; Method 2H does not apply below 1.0 m (3.3 ft) (§1.2)"),
        });
    }
    if averaging == Averaging::WallZoneIntegration {
        return Err(Error::Inconsistent {
            context: ctx,
            message: "the mean velocity already comes from an integration with a wall zone; a wall adjustment factor \
                      on top would correct the wall twice. Use the arithmetic equal-area mean with the factor, or the \
                      integration without it"
                .into(),
        });
    }
    let waf = match construction {
        Construction::BrickAndMortar => 0.9900,
        Construction::Other => 0.9950,
    };
    let checks = vec![MethodCheck {
        name: "stack diameter for a Method 2H wall factor".into(),
        value: d,
        unit: "m",
        decimals: 2,
        limit: "≥ 1.0 m (3.3 ft)".into(),
        pass: true,
        source: "US EPA Method 2H §1.2",
        citation: Citation::Verified,
    }];
    Ok((waf, checks))
}

#[cfg(test)]
mod tests {
    use super::*;

    // Mean of absolute angles (Method 1 §11.4, from memory): hand calculation.
    #[test]
    fn cyclonic_limit_on_both_sides() {
        let ok = cyclonic_flow(&[20.0, -20.0, 19.0, -21.0]).unwrap();
        assert_eq!(ok.value, 20.0);
        assert!(ok.pass);
        let bad = cyclonic_flow(&[20.0, -20.0, 21.0, -21.0]).unwrap();
        assert!(!bad.pass && bad.to_string().contains("from memory, unverified"));
        let e = cyclonic_flow(&[10.0, 95.0]).unwrap_err();
        assert!(e.to_string().starts_with("row 2: EPA Method 1: yaw angle must be within ±90°"), "{e}");
        assert!(cyclonic_flow(&[]).is_err());
    }

    // T = Σ√(Δp+K)/Σ√Δp; hand calculation for Δp = 1.0, 4.0, 9.0 mm H₂O, K = 0.127:
    // (1.061603 + 2.031502 + 3.021093)/(1 + 2 + 3) = 1.019033.
    #[test]
    fn sensitivity_factor() {
        let c = gauge_sensitivity(&[1.0, 4.0, 9.0], MethodUnits::Metric).unwrap();
        assert!((c[0].value - 1.019_033).abs() < 1e-6, "{}", c[0].value);
        assert!(c[0].pass && c[1].pass);
        // one reading of three below 1.3 mm: allowed (fewer than 12 points); two: not.
        assert!(c[2].pass);
        let low = gauge_sensitivity(&[0.4, 0.5, 9.0], MethodUnits::Metric).unwrap();
        assert!(!low[2].pass);
        // very low heads: T = (√0.137 + √0.147)/(√0.01 + √0.02) = 3.1213 → fail
        let t = gauge_sensitivity(&[0.01, 0.02], MethodUnits::Metric).unwrap();
        assert!(!t[0].pass && !t[1].pass);
        // 12 points, 1 below (8 %) passes; 2 below (17 %) fails.
        let mut dp = vec![5.0; 12];
        dp[0] = 1.0;
        assert!(gauge_sensitivity(&dp, MethodUnits::Metric).unwrap()[2].pass);
        dp[1] = 1.0;
        assert!(!gauge_sensitivity(&dp, MethodUnits::Metric).unwrap()[2].pass);
        assert!(gauge_sensitivity(&[0.0, -1.0], MethodUnits::Metric).is_err());
    }

    // Method 2H §1.2 and §2.2.2 (verified): 1.0 m limit and the two defaults.
    #[test]
    fn wall_factor_conditions() {
        assert_eq!(
            default_wall_factor(Construction::BrickAndMortar, Some(1.0), Averaging::EqualAreaMean).unwrap().0,
            0.9900
        );
        assert_eq!(default_wall_factor(Construction::Other, Some(2.5), Averaging::EqualAreaMean).unwrap().0, 0.9950);
        let e = default_wall_factor(Construction::Other, Some(0.99), Averaging::EqualAreaMean).unwrap_err();
        assert!(e.to_string().contains("below 1.0 m"), "{e}");
        let e = default_wall_factor(Construction::Other, Some(2.0), Averaging::WallZoneIntegration).unwrap_err();
        assert!(e.to_string().contains("correct the wall twice"), "{e}");
        assert!(default_wall_factor(Construction::Other, None, Averaging::EqualAreaMean).is_err());
        assert_eq!(Construction::parse("Brick-and-mortar").unwrap(), Construction::BrickAndMortar);
        assert!(Construction::parse("wood").is_err());
    }
}
