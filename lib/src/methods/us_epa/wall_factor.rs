//! The calculated wall effects adjustment factor of US EPA Method 2H: velocities
//! measured in from the wall replace the Method 1 velocity of each equal-area sector
//! closest to the wall, and the ratio of the adjusted to the plain average velocity is
//! the factor.
//!
//! # Formula
//! For each wall sector (the Method 1 sector closest to the wall on one radius), with
//! wall-effects points at distances d₁ < d₂ < … < d_last from the wall and v₀ = 0 at
//! the wall:
//! - v_dec,d = (v_{d−1} + v_d)/2, the mean velocity of the sub-sector between d_{k−1} and d_k;
//! - A_d = π[(r − d_{k−1})² − (r − d_k)²], its area (as a full ring: every area of the
//!   sector shares the same angular fraction, which cancels);
//! - the sector's inner edge is at r_in = r √(1 − 2/p) (p Method 1 points per diameter);
//!   the rest of the sector, A_rem = π[(r − d_last)² − r_in²], is represented by the
//!   velocity at d_rem = r − √(((r − d_last)² + r_in²)/2), the distance that halves it;
//! - Q_T = Σ v_dec,d A_d + v_drem A_rem; v_e = Q_T / (π (r² − r_in²));
//! - V_AVG = (Σ v_i over interior points + Σ v_e over wall sectors)/n; WAF = V_AVG / v_avg,
//!   v_avg the plain mean of the n Method 1 velocities.
//!
//! When v_drem was not measured it is interpolated linearly (in distance from the wall)
//! between the last wall point and the sector's Method 1 point, or taken as the Method 1
//! point's velocity when d_rem lies beyond it (Stagna's choice, said in the result's notes).
//!
//! # References
//! US EPA 40 CFR Part 60 Appendix A-2, Method 2H. Read in the published text: §1.2
//! (not below 1.0 m), §2.2.1 (16 or more Method 1 points and 8 or more wall points; not
//! for horizontal ducts with deposits at the bottom), and the nomenclature (v_dec,d for
//! the sub-sector between d − 1 (metric d − 2.5 cm) and d, A_d, d_last, A_drem, d_rem
//! "centroid of the area between d_last and the interior edge of the Method 1 sector",
//! Q_T, v_ej, V_AVG, WAF "derived from v_avg and V_AVG", p ≥ 8). From memory: the
//! equations as written above (eq. 2H-1 to 2H-11) — in particular d_rem as the
//! area-halving distance; printed results say so.

use super::check::{Citation, MethodCheck};
use crate::error::{Error, Result, finite, positive};

const CONTEXT: &str = "EPA Method 2H";

/// The wall-effects measurements of one wall sector.
#[derive(Debug, Clone, PartialEq)]
pub struct WallSector {
    /// Index (from 0) of the sector's Method 1 point in the Method 1 velocities.
    pub method1_index: usize,
    /// (distance from the wall in m, velocity in m/s) of each wall-effects point,
    /// distances strictly increasing.
    pub points: Vec<(f64, f64)>,
    /// Velocity measured at d_rem, if it was.
    pub v_drem: Option<f64>,
}

/// The calculated factor and the figures behind it.
#[derive(Debug, Clone, PartialEq)]
pub struct CalculatedWallFactor {
    /// WAF = V_AVG / v_avg.
    pub waf: f64,
    /// Plain mean of the Method 1 velocities v_avg, m/s.
    pub v_avg: f64,
    /// Wall-adjusted mean V_AVG, m/s.
    pub v_avg_adjusted: f64,
    /// Replacement velocity v_e of each wall sector, m/s (in the order given).
    pub v_e: Vec<f64>,
    /// d_rem, m.
    pub d_rem: Vec<f64>,
    /// Checks with their numbers.
    pub checks: Vec<MethodCheck>,
    /// What was assumed (interpolated v_drem).
    pub notes: Vec<String>,
}

/// Method 2H calculated wall factor for one traverse of a circular stack.
pub fn calculated_wall_factor(
    diameter_m: f64,
    points_per_diameter: usize,
    method1_velocities: &[f64],
    method1_wall_distance_m: &[f64],
    sectors: &[WallSector],
) -> Result<CalculatedWallFactor> {
    let d = positive(CONTEXT, "stack diameter", diameter_m, "m")?;
    if d < 1.0 {
        return Err(Error::Inconsistent {
            context: CONTEXT,
            message: format!("the stack is {d:.3} m across; Method 2H does not apply below 1.0 m (3.3 ft) (§1.2)"),
        });
    }
    let p = points_per_diameter;
    if p < 8 || !p.is_multiple_of(2) {
        return Err(Error::Inconsistent {
            context: CONTEXT,
            message: format!("{p} Method 1 points per diameter; the calculated factor needs an even number, 8 or more"),
        });
    }
    let n = method1_velocities.len();
    if method1_wall_distance_m.len() != n {
        return Err(Error::Inconsistent {
            context: CONTEXT,
            message: format!("{n} Method 1 velocities but {} wall distances", method1_wall_distance_m.len()),
        });
    }
    for (i, &v) in method1_velocities.iter().enumerate() {
        finite(CONTEXT, "Method 1 velocity", v).map_err(|e| e.at_row(i))?;
    }
    if sectors.is_empty() {
        return Err(Error::Inconsistent { context: CONTEXT, message: "no wall sectors measured".into() });
    }
    let r = d / 2.0;
    let r_in = r * (1.0 - 2.0 / p as f64).sqrt();
    let sector_area = std::f64::consts::PI * (r * r - r_in * r_in);
    let ring = |a: f64, b: f64| std::f64::consts::PI * ((r - a).powi(2) - (r - b).powi(2));
    let mut replaced = method1_velocities.to_vec();
    let mut v_e = Vec::new();
    let mut d_rems = Vec::new();
    let mut notes = Vec::new();
    let mut seen = Vec::new();
    let mut wall_points = 0;
    for (s, sec) in sectors.iter().enumerate() {
        let ctx_err =
            |m: String| Error::Inconsistent { context: CONTEXT, message: format!("wall sector {}: {m}", s + 1) };
        let i = sec.method1_index;
        if i >= n {
            return Err(ctx_err(format!("Method 1 point index {i} is out of range (there are {n})")));
        }
        if seen.contains(&i) {
            return Err(ctx_err(format!("Method 1 point {i} is replaced twice")));
        }
        seen.push(i);
        if sec.points.is_empty() {
            return Err(ctx_err("no wall-effects points".into()));
        }
        wall_points += sec.points.len();
        let mut q = 0.0;
        let (mut d_prev, mut v_prev) = (0.0, 0.0);
        for &(dist, v) in &sec.points {
            finite(CONTEXT, "wall point distance", dist)?;
            finite(CONTEXT, "wall point velocity", v)?;
            if dist <= d_prev {
                return Err(ctx_err("wall-point distances must increase from the wall".into()));
            }
            if r - dist <= r_in {
                return Err(ctx_err(format!(
                    "the wall point at {:.3} m lies beyond the sector's inner edge ({:.3} m from the wall)",
                    dist,
                    r - r_in
                )));
            }
            q += 0.5 * (v_prev + v) * ring(d_prev, dist);
            (d_prev, v_prev) = (dist, v);
        }
        let d_rem = r - (((r - d_prev).powi(2) + r_in * r_in) / 2.0).sqrt();
        let v_drem = match sec.v_drem {
            Some(v) => finite(CONTEXT, "v_drem", v)?,
            None => {
                let (d1, v1) = (method1_wall_distance_m[i], method1_velocities[i]);
                if d1 <= d_prev {
                    return Err(ctx_err(
                        "v_drem not given and the Method 1 point is not beyond the last wall point to interpolate"
                            .into(),
                    ));
                }
                if d_rem >= d1 {
                    notes.push(format!(
                        "wall sector {}: v_drem not measured; d_rem ({d_rem:.3} m) lies beyond the Method 1 point ({d1:.3} m), whose velocity is used",
                        s + 1
                    ));
                    v1
                } else {
                    notes.push(format!(
                        "wall sector {}: v_drem not measured; interpolated between the last wall point ({d_prev:.3} m) and the Method 1 point ({d1:.3} m)",
                        s + 1
                    ));
                    v_prev + (v1 - v_prev) * (d_rem - d_prev) / (d1 - d_prev)
                }
            }
        };
        q += v_drem * std::f64::consts::PI * ((r - d_prev).powi(2) - r_in * r_in);
        let ve = q / sector_area;
        replaced[i] = ve;
        v_e.push(ve);
        d_rems.push(d_rem);
    }
    let v_avg = method1_velocities.iter().sum::<f64>() / n as f64;
    positive(CONTEXT, "average velocity", v_avg, "m/s")?;
    let v_adj = replaced.iter().sum::<f64>() / n as f64;
    let checks = vec![
        MethodCheck {
            name: "Method 1 points for the calculated factor".into(),
            value: n as f64,
            unit: "",
            decimals: 0,
            limit: "≥ 16".into(),
            pass: n >= 16,
            source: "US EPA Method 2H §2.2.1",
            citation: Citation::Verified,
        },
        MethodCheck {
            name: "wall-effects points in total".into(),
            value: wall_points as f64,
            unit: "",
            decimals: 0,
            limit: "≥ 8".into(),
            pass: wall_points >= 8,
            source: "US EPA Method 2H §2.2.1",
            citation: Citation::Verified,
        },
    ];
    Ok(CalculatedWallFactor { waf: v_adj / v_avg, v_avg, v_avg_adjusted: v_adj, v_e, d_rem: d_rems, checks, notes })
}

#[cfg(test)]
mod tests {
    use super::*;

    // A uniform profile with a wall layer that is also uniform: every v = 10 m/s everywhere
    // (no decay) except v₀ = 0 at the wall: the sub-sector from the wall to d₁ carries the
    // mean (0 + 10)/2. Hand calculation (Python 3.11) for D = 2.0 m, p = 8, one sector with
    // points at 0.025, 0.05, 0.075, 0.10 m, v_drem = 10:
    //   r_in = √0.75 = 0.866 025 m; sector area π(1 − 0.75) = 0.785 398 m²
    //   Q_T = 10·π(1 − 0.975²) − 5·π(1 − 0.975²) = 10·0.785 398 − 5·0.155 116 = 7.078 400
    //   v_e = 9.012 50 m/s; 16 points: V_AVG = (15·10 + 9.012 50)/16 = 9.938 28; WAF = 0.993 828.
    #[test]
    fn hand_calculation() {
        let v = vec![10.0; 16];
        let wd: Vec<f64> = (0..16).map(|i| if i == 0 { 0.064 } else { 0.5 }).collect();
        let sec = WallSector {
            method1_index: 0,
            points: vec![(0.025, 10.0), (0.05, 10.0), (0.075, 10.0), (0.10, 10.0)],
            v_drem: Some(10.0),
        };
        let w = calculated_wall_factor(2.0, 8, &v, &wd, &[sec]).unwrap();
        assert!((w.v_e[0] - 9.012_50).abs() < 1e-5, "{}", w.v_e[0]);
        assert!((w.waf - 0.993_828).abs() < 1e-6, "{}", w.waf);
        assert!(w.checks[0].pass && !w.checks[1].pass, "4 wall points < 8");
    }

    // d_rem halves the remaining ring: (r − d_rem)² = ((r − d_last)² + r_in²)/2.
    #[test]
    fn d_rem_halves_the_rest_and_interpolation_is_noted() {
        let v = vec![10.0; 16];
        let wd = vec![0.064; 16];
        let sec = WallSector { method1_index: 3, points: vec![(0.025, 6.0), (0.05, 8.0)], v_drem: None };
        let w = calculated_wall_factor(2.0, 8, &v, &wd, &[sec]).unwrap();
        let r_in2 = 0.75;
        assert!(((1.0 - w.d_rem[0]).powi(2) - ((0.95_f64).powi(2) + r_in2) / 2.0).abs() < 1e-12);
        assert_eq!(w.notes.len(), 1);
        assert!(w.waf < 1.0);
    }

    #[test]
    fn bad_inputs() {
        let v = vec![10.0; 16];
        let wd = vec![0.064; 16];
        let sec = |pts: Vec<(f64, f64)>| WallSector { method1_index: 0, points: pts, v_drem: Some(10.0) };
        assert!(
            calculated_wall_factor(0.9, 8, &v, &wd, &[sec(vec![(0.025, 5.0)])])
                .unwrap_err()
                .to_string()
                .contains("below 1.0 m")
        );
        assert!(calculated_wall_factor(2.0, 6, &v, &wd, &[sec(vec![(0.025, 5.0)])]).is_err());
        assert!(calculated_wall_factor(2.0, 8, &v, &wd, &[sec(vec![(0.05, 5.0), (0.025, 5.0)])]).is_err());
        assert!(
            calculated_wall_factor(2.0, 8, &v, &wd, &[sec(vec![(0.2, 5.0)])])
                .unwrap_err()
                .to_string()
                .contains("inner edge")
        );
        assert!(calculated_wall_factor(2.0, 8, &v, &wd, &[]).is_err());
    }
}
