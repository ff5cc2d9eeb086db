//! Checks a US EPA stack test makes on the site and the readings before it reports a
//! flow: cyclonic flow (Method 1), small stacks and ducts (Method 1A), gauge sensitivity
//! at low velocity heads (Method 2), and whether a Method 2H default wall factor may be
//! used.
//!
//! # Formula
//! - Cyclonic flow: the null (yaw) angle α_i at each point, mean of |α_i| against 20°.
//! - Gauge sensitivity, eq. 2-1: T = Σ √(Δp_i + K) / Σ √Δp_i with K = 0.127 mm H₂O
//!   (0.005 in. H₂O); a more sensitive gauge is needed when T > 1.05. Also: the mean Δp
//!   below 1.3 mm (0.05 in.) H₂O, or more than 10 % of the readings below it (12 or more
//!   points), or more than one reading below it (fewer than 12 points).
//! - Method 1A (small stacks and ducts): 0.10 m ≤ D < 0.30 m, or 0.0081 m² ≤ A < 0.071 m²
//!   for other shapes. Particulate site preferably ≥ 8 equivalent diameters after and
//!   ≥ 10 before the nearest disturbances, the standard pitot's velocity site 8 diameters
//!   after it; where that cannot be had, ≥ 2 after and ≥ 2.5 before, velocity site 2
//!   diameters after. Steady flow when the flow from a velocity traverse after the
//!   sampling run is within 10 % of the one before.
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
//! measurements"; the clause names no point count for them); Method 1A §1.2 (the size
//! range, and not in cyclonic or swirling flow). From memory: the site distances and the
//! 10 % steady-flow criterion of Method 1A §11.1 (a secondary summary of the method agrees
//! with them; the method's own clause was not read); the 20° limit
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

/// A small stack or duct where particulate sampling and velocity measurement follow
/// US EPA Method 1A. Distances are in (equivalent) diameters, counted along the flow:
/// `straight_upstream_d` is the straight length between the nearest disturbance before the
/// sampling site and the site, `straight_downstream_d` the straight length from the site
/// to the nearest disturbance after it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SmallDuctSite {
    /// Inside diameter, m (circular), or None for other shapes.
    pub diameter_m: Option<f64>,
    /// Cross-sectional area, m².
    pub area_m2: f64,
    /// Straight length before the particulate site, equivalent diameters.
    pub straight_upstream_d: f64,
    /// Straight length after the particulate site, equivalent diameters.
    pub straight_downstream_d: f64,
    /// Distance of the (standard pitot) velocity site after the particulate site,
    /// equivalent diameters, when the two are separate (unsteady flow).
    pub velocity_site_d: Option<f64>,
}

/// US EPA Method 1A checks of a small-duct site: the size range of the method, the
/// straight lengths around the particulate site (preferred or alternative location) and,
/// when given, where the velocity site stands.
///
/// ```
/// use stagna::methods::us_epa::site_checks::{method1a_site, SmallDuctSite};
/// let d = 0.20;
/// let site = SmallDuctSite { diameter_m: Some(d), area_m2: std::f64::consts::PI * d * d / 4.0,
///     straight_upstream_d: 9.0, straight_downstream_d: 11.0, velocity_site_d: Some(8.0) };
/// let checks = method1a_site(&site).unwrap();
/// assert!(checks.iter().all(|c| c.pass));
/// ```
pub fn method1a_site(s: &SmallDuctSite) -> Result<Vec<MethodCheck>> {
    let ctx = "EPA Method 1A";
    let area = finite(ctx, "area", s.area_m2)?;
    if area <= 0.0 {
        return Err(Error::OutOfRange {
            context: ctx,
            param: "area",
            value: area,
            unit: "m²",
            allowed: "more than 0".into(),
        });
    }
    for (name, v) in [
        ("straight length upstream of the site", s.straight_upstream_d),
        ("straight length downstream of the site", s.straight_downstream_d),
    ] {
        if finite(ctx, name, v)? < 0.0 {
            return Err(Error::OutOfRange {
                context: ctx,
                param: name,
                value: v,
                unit: "D",
                allowed: "0 or more".into(),
            });
        }
    }
    let mut checks = vec![match s.diameter_m {
        Some(d) => MethodCheck {
            name: "stack diameter for Method 1A".into(),
            value: finite(ctx, "diameter", d)?,
            unit: "m",
            decimals: 3,
            limit: "0.10 m to under 0.30 m (Method 1 at 0.30 m and over)".into(),
            pass: (0.10..0.30).contains(&d),
            source: "US EPA Method 1A §1.2",
            citation: Citation::Verified,
        },
        None => MethodCheck {
            name: "duct area for Method 1A".into(),
            value: area,
            unit: "m²",
            decimals: 4,
            limit: "0.0081 m² to under 0.071 m² (Method 1 at 0.071 m² and over)".into(),
            pass: (0.0081..0.071).contains(&area),
            source: "US EPA Method 1A §1.2",
            citation: Citation::Verified,
        },
    }];
    let preferred = s.straight_upstream_d >= 8.0 && s.straight_downstream_d >= 10.0;
    let (up, down, vel) = if preferred { (8.0, 10.0, 8.0) } else { (2.0, 2.5, 2.0) };
    let which = if preferred { "preferred location" } else { "alternative location" };
    checks.push(MethodCheck {
        name: format!("straight length upstream of the particulate site ({which})"),
        value: s.straight_upstream_d,
        unit: "D",
        decimals: 1,
        limit: format!("≥ {up} D (≥ 8 D preferred, ≥ 2 D at the least)"),
        pass: s.straight_upstream_d >= up,
        source: "US EPA Method 1A §11.1.1",
        citation: Citation::FromMemory,
    });
    checks.push(MethodCheck {
        name: format!("straight length downstream of the particulate site ({which})"),
        value: s.straight_downstream_d,
        unit: "D",
        decimals: 1,
        limit: format!("≥ {down} D (≥ 10 D preferred, ≥ 2.5 D at the least)"),
        pass: s.straight_downstream_d >= down,
        source: "US EPA Method 1A §11.1.1",
        citation: Citation::FromMemory,
    });
    if let Some(v) = s.velocity_site_d {
        finite(ctx, "velocity site distance", v)?;
        checks.push(MethodCheck {
            name: "velocity site (standard pitot) after the particulate site".into(),
            value: v,
            unit: "D",
            decimals: 1,
            limit: format!("≥ {vel} D with the {which}"),
            pass: v >= vel,
            source: "US EPA Method 1A §11.1.1",
            citation: Citation::FromMemory,
        });
    }
    Ok(checks)
}

/// US EPA Method 1A steady-flow check for sampling and velocity at one location: the
/// flow from a complete velocity traverse after the sampling run against the one before
/// it (any one unit), deviation within 10 %.
///
/// ```
/// use stagna::methods::us_epa::site_checks::method1a_steady_flow;
/// assert!(method1a_steady_flow(1000.0, 1080.0).unwrap().pass);
/// assert!(!method1a_steady_flow(1000.0, 1120.0).unwrap().pass);
/// ```
pub fn method1a_steady_flow(before: f64, after: f64) -> Result<MethodCheck> {
    let ctx = "EPA Method 1A";
    for (name, v) in [("flow before the run", before), ("flow after the run", after)] {
        if finite(ctx, name, v)? <= 0.0 {
            return Err(Error::OutOfRange {
                context: ctx,
                param: name,
                value: v,
                unit: "",
                allowed: "more than 0".into(),
            });
        }
    }
    let dev = (after - before).abs() / before * 100.0;
    Ok(MethodCheck {
        name: "steady flow: deviation of the flow after the run from the flow before".into(),
        value: dev,
        unit: "%",
        decimals: 1,
        limit: "≤ 10 %".into(),
        pass: dev <= 10.0 + 1e-9,
        source: "US EPA Method 1A §11.1.2",
        citation: Citation::FromMemory,
    })
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

    // Method 1A §1.2 size range (read in the published text: "less than about 0.30 meter
    // (12 in.) in diameter, or 0.071 m2 (113 in.2) ... but equal to or greater than about
    // 0.10 meter (4 in.) in diameter, or 0.0081 m2 (12.57 in.2)"); §11.1 site distances
    // and the 10 % steady-flow deviation from memory, unverified.
    #[test]
    fn method1a_limits_on_both_sides() {
        let round = |d: f64, up: f64, down: f64, vel: Option<f64>| SmallDuctSite {
            diameter_m: Some(d),
            area_m2: std::f64::consts::PI * d * d / 4.0,
            straight_upstream_d: up,
            straight_downstream_d: down,
            velocity_site_d: vel,
        };
        let size = |s: &SmallDuctSite| method1a_site(s).unwrap()[0].pass;
        assert!(size(&round(0.10, 8.0, 10.0, None)));
        assert!(!size(&round(0.099, 8.0, 10.0, None)));
        assert!(size(&round(0.299, 8.0, 10.0, None)));
        assert!(!size(&round(0.30, 8.0, 10.0, None)), "0.30 m and over is Method 1");
        let rect = |a: f64| SmallDuctSite {
            diameter_m: None,
            area_m2: a,
            straight_upstream_d: 8.0,
            straight_downstream_d: 10.0,
            velocity_site_d: None,
        };
        assert!(size(&rect(0.0081)) && !size(&rect(0.0080)) && size(&rect(0.0709)) && !size(&rect(0.071)));
        // Preferred location: 8 D before, 10 D after, velocity site 8 D after the sampling site.
        let c = method1a_site(&round(0.2, 8.0, 10.0, Some(8.0))).unwrap();
        assert!(c.iter().all(|c| c.pass) && c[1].name.contains("preferred"));
        assert!(!method1a_site(&round(0.2, 8.0, 10.0, Some(7.9))).unwrap()[3].pass);
        // Alternative location: 2 D and 2.5 D; the velocity site then 2 D after.
        let c = method1a_site(&round(0.2, 7.9, 10.0, Some(2.0))).unwrap();
        assert!(c.iter().all(|c| c.pass) && c[1].name.contains("alternative"), "{c:?}");
        assert!(!method1a_site(&round(0.2, 1.9, 10.0, None)).unwrap()[1].pass);
        assert!(!method1a_site(&round(0.2, 2.0, 2.4, None)).unwrap()[2].pass);
        assert!(method1a_site(&round(0.2, 2.0, 2.5, None)).unwrap()[2].pass);
        assert!(c[1].to_string().contains("from memory, unverified"));
        assert!(!c[0].to_string().contains("unverified"));
        // Bad input names what to fix.
        let e = method1a_site(&round(0.2, -1.0, 10.0, None)).unwrap_err().to_string();
        assert!(e.contains("straight length upstream"), "{e}");
        assert!(method1a_site(&rect(0.0)).is_err());
        assert!(method1a_site(&round(f64::NAN, 8.0, 10.0, None)).is_err());
        // Steady flow: within 10 % on either side.
        assert!(method1a_steady_flow(100.0, 110.0).unwrap().pass);
        assert!(method1a_steady_flow(100.0, 90.0).unwrap().pass);
        assert!(!method1a_steady_flow(100.0, 110.5).unwrap().pass);
        assert!(!method1a_steady_flow(100.0, 89.0).unwrap().pass);
        assert!(method1a_steady_flow(0.0, 1.0).unwrap_err().to_string().contains("flow before the run"));
    }

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
