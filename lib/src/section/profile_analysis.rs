//! Profile analysis for research work: fitted power-law exponent and log-law
//! friction velocity with goodness of fit, asymmetry, flatness, the cyclonic
//! flow check, and the comparison of a measured with a fully developed profile.
//!
//! # Formula
//! - Power-law fit: least squares of ln u = ln U_c + (1/n) ln(y/R).
//! - Log-law fit: u = u_τ [ln(y u_τ/ν)/κ + B], u_τ by a one-dimensional least-squares
//!   search (golden section on ln u_τ); κ = 0.41, B = 5.0 by default (from memory).
//! - Flatness: mean/maximum of the point velocities. Asymmetry: each line's
//!   mean against the section mean, and each diameter's two halves against each other.
//! - Cyclonic flow (US EPA Method 1 §11.4): the mean of the absolute yaw
//!   (null) angles over the points must not exceed 20°.
//!
//! # References
//! US EPA 40 CFR 60 App. A-1 Method 1 §11.4 (from memory); log-law constants
//! from memory (Coles κ = 0.41, B = 5.0).

use crate::error::{Error, Result, finite, positive};
use crate::section::layout::Position;
use crate::section::profile::ProfileModel;

/// A fitted power law.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PowerLawFit {
    /// Exponent n.
    pub n: f64,
    /// Fitted centreline velocity U_c.
    pub centreline: f64,
    /// Coefficient of determination of the log-log fit.
    pub r_squared: f64,
}

/// Fits u = U_c (y/R)^{1/n} to points with 0 < y/R ≤ 1 and u > 0.
pub fn fit_power_law(y_over_r: &[f64], u: &[f64]) -> Result<PowerLawFit> {
    if y_over_r.len() != u.len() {
        return Err(Error::Inconsistent {
            context: "power-law fit",
            message: "positions and velocities differ in length".into(),
        });
    }
    let pts: Vec<(f64, f64)> = y_over_r
        .iter()
        .zip(u)
        .filter(|(y, v)| **y > 0.0 && **y <= 1.0 && **v > 0.0)
        .map(|(y, v)| (y.ln(), v.ln()))
        .collect();
    if pts.len() < 3 {
        return Err(Error::Inconsistent {
            context: "power-law fit",
            message: format!("needs at least 3 points with 0 < y/R ≤ 1 and u > 0, got {}", pts.len()),
        });
    }
    let n = pts.len() as f64;
    let mx = pts.iter().map(|p| p.0).sum::<f64>() / n;
    let my = pts.iter().map(|p| p.1).sum::<f64>() / n;
    let sxx: f64 = pts.iter().map(|p| (p.0 - mx).powi(2)).sum();
    let sxy: f64 = pts.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
    let syy: f64 = pts.iter().map(|p| (p.1 - my).powi(2)).sum();
    if sxx == 0.0 || sxy <= 0.0 {
        return Err(Error::Inconsistent {
            context: "power-law fit",
            message: "velocity does not rise away from the wall; no power law fits".into(),
        });
    }
    let slope = sxy / sxx;
    let intercept = my - slope * mx;
    let r2 = if syy == 0.0 { 1.0 } else { sxy * sxy / (sxx * syy) };
    Ok(PowerLawFit { n: 1.0 / slope, centreline: intercept.exp(), r_squared: r2 })
}

/// A fitted log law.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LogLawFit {
    /// Friction velocity u_τ, m/s.
    pub friction_velocity: f64,
    /// Coefficient of determination.
    pub r_squared: f64,
    /// Root-mean-square residual, m/s.
    pub rms_residual: f64,
}

/// Fits u = u_τ [ln(y u_τ/ν)/κ + B] to wall distances y (m) and velocities u (m/s).
pub fn fit_log_law(y_m: &[f64], u: &[f64], nu: f64, kappa: f64, b: f64) -> Result<LogLawFit> {
    positive("log-law fit", "kinematic viscosity", nu, "m²/s")?;
    positive("log-law fit", "von Kármán constant", kappa, "")?;
    finite("log-law fit", "B", b)?;
    if y_m.len() != u.len() || y_m.len() < 3 {
        return Err(Error::Inconsistent {
            context: "log-law fit",
            message: "needs at least 3 points, positions and velocities of equal length".into(),
        });
    }
    for (i, (&y, &v)) in y_m.iter().zip(u).enumerate() {
        positive("log-law fit", "wall distance", y, "m").map_err(|e| e.at_row(i))?;
        finite("log-law fit", "velocity", v).map_err(|e| e.at_row(i))?;
    }
    let sse = |ut: f64| -> f64 {
        y_m.iter().zip(u).map(|(&y, &v)| (v - ut * ((y * ut / nu).ln() / kappa + b)).powi(2)).sum()
    };
    let umax = u.iter().cloned().fold(f64::MIN, f64::max).max(1e-9);
    let (mut lo, mut hi) = ((umax * 1e-5).ln(), umax.ln());
    let g = (5f64.sqrt() - 1.0) / 2.0;
    for _ in 0..200 {
        let a = hi - g * (hi - lo);
        let c = lo + g * (hi - lo);
        if sse(a.exp()) < sse(c.exp()) { hi = c } else { lo = a }
    }
    let ut = ((lo + hi) / 2.0).exp();
    let s = sse(ut);
    let mean = u.iter().sum::<f64>() / u.len() as f64;
    let sst: f64 = u.iter().map(|v| (v - mean).powi(2)).sum();
    Ok(LogLawFit {
        friction_velocity: ut,
        r_squared: if sst > 0.0 { 1.0 - s / sst } else { 1.0 },
        rms_residual: (s / u.len() as f64).sqrt(),
    })
}

/// Mean over maximum point velocity.
pub fn flatness(u: &[f64]) -> Result<f64> {
    let max = u.iter().cloned().fold(f64::MIN, f64::max);
    if u.is_empty() || max <= 0.0 {
        return Err(Error::Inconsistent {
            context: "flatness",
            message: "needs points with a positive maximum velocity".into(),
        });
    }
    Ok(u.iter().sum::<f64>() / u.len() as f64 / max)
}

/// Asymmetry of a circular traverse.
#[derive(Debug, Clone, PartialEq)]
pub struct Asymmetry {
    /// Each line's mean over the section mean, minus 1.
    pub line_deviation: Vec<f64>,
    /// Each diameter's (port-side half mean − far half mean)/diameter mean.
    pub half_difference: Vec<f64>,
}

/// Asymmetry between lines and between the halves of each diameter.
pub fn asymmetry(lines: &[usize], positions: &[Position], u: &[f64]) -> Result<Asymmetry> {
    if lines.len() != u.len() || positions.len() != u.len() || u.is_empty() {
        return Err(Error::Inconsistent {
            context: "asymmetry",
            message: "one line and position per velocity is needed".into(),
        });
    }
    let n_lines = lines.iter().max().map_or(0, |m| m + 1);
    let mut sums = vec![(0.0, 0usize, 0.0, 0usize, 0.0, 0usize); n_lines];
    for ((&l, p), &v) in lines.iter().zip(positions).zip(u) {
        let e = &mut sums[l];
        e.0 += v;
        e.1 += 1;
        let near = match p {
            Position::Radial { r_over_r, .. } => *r_over_r < 0.0,
            Position::Grid { y_over_h, .. } => *y_over_h < 0.5,
        };
        if near {
            e.2 += v;
            e.3 += 1;
        } else {
            e.4 += v;
            e.5 += 1;
        }
    }
    let mean = u.iter().sum::<f64>() / u.len() as f64;
    let line_deviation = sums.iter().filter(|s| s.1 > 0).map(|s| s.0 / s.1 as f64 / mean - 1.0).collect();
    let half_difference = sums
        .iter()
        .filter(|s| s.3 > 0 && s.5 > 0)
        .map(|s| (s.2 / s.3 as f64 - s.4 / s.5 as f64) / (s.0 / s.1 as f64))
        .collect();
    Ok(Asymmetry { line_deviation, half_difference })
}

/// Result of the cyclonic-flow check.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CyclonicCheck {
    /// Mean of the absolute yaw angles, degrees.
    pub mean_abs_yaw_deg: f64,
    /// True when the mean does not exceed 20° (US EPA Method 1 §11.4).
    pub acceptable: bool,
}

/// US EPA Method 1 §11.4 cyclonic-flow check from the yaw (null) angles at the points.
pub fn cyclonic_flow_check(yaw_deg: &[f64]) -> Result<CyclonicCheck> {
    if yaw_deg.is_empty() {
        return Err(Error::Inconsistent { context: "cyclonic flow check", message: "no yaw angles".into() });
    }
    for (i, a) in yaw_deg.iter().enumerate() {
        finite("cyclonic flow check", "yaw angle", *a).map_err(|e| e.at_row(i))?;
        if a.abs() > 90.0 {
            return Err(Error::OutOfRange {
                context: "cyclonic flow check",
                param: "yaw angle",
                value: *a,
                unit: "°",
                allowed: "in [-90, 90]".into(),
            }
            .at_row(i));
        }
    }
    let m = yaw_deg.iter().map(|a| a.abs()).sum::<f64>() / yaw_deg.len() as f64;
    Ok(CyclonicCheck { mean_abs_yaw_deg: m, acceptable: m <= 20.0 })
}

/// Measured against fully developed: per point, (u/ū)_measured − (u/ū)_model at the same
/// r/R, each normalised by its own arithmetic mean over the points; and the rms of those.
pub fn deviation_from_model(r_over_r: &[f64], u: &[f64], model: &ProfileModel) -> Result<(Vec<f64>, f64)> {
    if r_over_r.len() != u.len() || u.is_empty() {
        return Err(Error::Inconsistent {
            context: "profile comparison",
            message: "positions and velocities differ in length".into(),
        });
    }
    let mu = u.iter().sum::<f64>() / u.len() as f64;
    let model_u: Vec<f64> = r_over_r.iter().map(|r| model.velocity_ratio(*r)).collect();
    let mm = model_u.iter().sum::<f64>() / model_u.len() as f64;
    if mu == 0.0 || mm == 0.0 {
        return Err(Error::Inconsistent { context: "profile comparison", message: "zero mean velocity".into() });
    }
    let d: Vec<f64> = u.iter().zip(&model_u).map(|(a, b)| a / mu - b / mm).collect();
    let rms = (d.iter().map(|x| x * x).sum::<f64>() / d.len() as f64).sqrt();
    Ok((d, rms))
}

#[cfg(test)]
mod tests {
    use super::*;

    // Synthetic profiles generated from the model equations recover their parameters exactly
    // (common practice, no source: a fit must invert its own model).
    #[test]
    fn power_law_fit_recovers_exponent() {
        let y: Vec<f64> = (1..=10).map(|i| i as f64 / 10.0).collect();
        let u: Vec<f64> = y.iter().map(|y| 12.0 * y.powf(1.0 / 7.0)).collect();
        let f = fit_power_law(&y, &u).unwrap();
        assert!((f.n - 7.0).abs() < 1e-10 && (f.centreline - 12.0).abs() < 1e-10 && (f.r_squared - 1.0).abs() < 1e-12);
        assert!(fit_power_law(&[0.1, 0.2], &[1.0, 2.0]).is_err());
        assert!(fit_power_law(&[0.1, 0.2, 0.3], &[3.0, 2.0, 1.0]).is_err());
    }

    #[test]
    fn log_law_fit_recovers_friction_velocity() {
        let (ut, nu) = (0.45, 1.0e-6);
        let y: Vec<f64> = (1..=12).map(|i| 0.002 * i as f64).collect();
        let u: Vec<f64> = y.iter().map(|y| ut * ((y * ut / nu).ln() / 0.41 + 5.0)).collect();
        let f = fit_log_law(&y, &u, nu, 0.41, 5.0).unwrap();
        assert!((f.friction_velocity - ut).abs() < 1e-8, "{}", f.friction_velocity);
        assert!(f.rms_residual < 1e-7);
        assert!(fit_log_law(&[0.0, 0.1, 0.2], &[1.0, 1.0, 1.0], nu, 0.41, 5.0).is_err());
    }

    #[test]
    fn flatness_asymmetry_and_cyclonic_check() {
        assert!((flatness(&[8.0, 10.0, 9.0]).unwrap() - 0.9).abs() < 1e-15);
        let r = |x: f64| Position::Radial { r_over_r: x, angle_deg: 0.0 };
        let a = asymmetry(&[0, 0, 1, 1], &[r(-0.5), r(0.5), r(-0.5), r(0.5)], &[9.0, 11.0, 10.0, 10.0]).unwrap();
        assert_eq!(a.line_deviation, vec![0.0, 0.0]);
        assert!((a.half_difference[0] + 0.2).abs() < 1e-15 && a.half_difference[1] == 0.0);
        // EPA Method 1 §11.4: mean |yaw| ≤ 20° acceptable
        assert!(cyclonic_flow_check(&[10.0, -15.0, 20.0, 5.0]).unwrap().acceptable);
        let c = cyclonic_flow_check(&[25.0, -30.0, 20.0]).unwrap();
        assert!(!c.acceptable && (c.mean_abs_yaw_deg - 25.0).abs() < 1e-12);
        assert!(cyclonic_flow_check(&[100.0]).is_err());
    }

    #[test]
    fn developed_profile_has_no_deviation() {
        let m = ProfileModel::power_law(7.0).unwrap();
        let r = [-0.9, -0.5, 0.0, 0.5, 0.9];
        let u: Vec<f64> = r.iter().map(|x| 3.0 * m.velocity_ratio(*x)).collect();
        let (d, rms) = deviation_from_model(&r, &u, &m).unwrap();
        assert!(rms < 1e-15 && d.len() == 5);
        let skew: Vec<f64> = u.iter().zip(r).map(|(v, x)| v * (1.0 + 0.1 * x)).collect();
        assert!(deviation_from_model(&r, &skew, &m).unwrap().1 > 0.01);
    }
}
