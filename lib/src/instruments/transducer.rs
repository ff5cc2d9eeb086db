//! Differential-pressure transducers and their calibration against a reference.
//!
//! A transducer logs Δp in some pressure unit. Its calibration is a set of points, each
//! an indicated reading x_i beside the reference Δp y_i applied (a deadweight tester or a
//! reference manometer), and a least-squares polynomial through them that turns every
//! later reading into a corrected Δp. The scatter of the points about the curve and the
//! uncertainty of the curve itself become the calibration's term in a budget.
//!
//! # Formula
//! With x' = (x − x̄)/s_x (centred and scaled indicated readings, for conditioning),
//! the fit y(x) = Σ_{j=0..m} a_j x'^j (m = 1 linear, 2 quadratic, 3 cubic) minimises
//! Σ (y_i − y(x_i))² (ordinary least squares; normal equations XᵀX a = Xᵀy solved with
//! partial pivoting). Residuals r_i = y_i − y(x_i); residual standard deviation
//! s = √(Σ r_i² / ν), ν = n − (m + 1) degrees of freedom (n ≥ m + 2 points, so that ν ≥ 1).
//! The standard uncertainty of the curve at x is u_curve(x) = s √(gᵀ (XᵀX)⁻¹ g),
//! g = (1, x', …, x'^m); the standard uncertainty of one corrected reading from the
//! calibration is u_cal(x) = √(s² + u_curve(x)²) (the least-squares prediction variance:
//! one reading scatters about the curve as the calibration points did).
//!
//! # References
//! - JCGM 100:2008 (GUM) Annex H.3, calibration of a thermometer: a straight line fitted by
//!   least squares, s² = Σ r_k²/(n − 2), the variance of a predicted correction from the
//!   coefficients' variances and covariance (the test below uses its Table H.6 data).
//! - The prediction variance s² + u_curve² for one new reading: common practice of
//!   least-squares calibration (from memory; ISO/TS 28037:2010 treats straight-line
//!   calibration functions, not re-read here).

use crate::error::{Error, Result, Warning, finite};
use crate::units::quantity::Pressure;

/// The highest polynomial degree a calibration may use.
pub const MAX_DEGREE: usize = 3;

/// A calibration point: the transducer's indicated reading and the reference Δp, both in Pa.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CalibrationPoint {
    /// Indicated reading, Pa.
    pub indicated_pa: f64,
    /// Reference Δp applied, Pa.
    pub reference_pa: f64,
}

/// A least-squares calibration curve of a transducer.
#[derive(Debug, Clone, PartialEq)]
pub struct TransducerCalibration {
    /// The points it was fitted to.
    pub points: Vec<CalibrationPoint>,
    /// Polynomial degree (1 linear, 2 quadratic, 3 cubic).
    pub degree: usize,
    /// Calibration date, `YYYY-MM-DD`.
    pub date: String,
    /// Who calibrated, where, with which reference (free text).
    pub by: String,
    x_mean: f64,
    x_scale: f64,
    /// Coefficients in the scaled variable x' (constant first), Pa.
    coefficients: Vec<f64>,
    /// (XᵀX)⁻¹ in the scaled variable, row-major (m+1)².
    inverse: Vec<f64>,
    /// Residual standard deviation s, Pa.
    pub residual_sd_pa: f64,
    /// Degrees of freedom ν = n − (m + 1).
    pub dof: usize,
}

fn inconsistent(message: String) -> Error {
    Error::Inconsistent { context: "transducer calibration", message }
}

impl TransducerCalibration {
    /// Fits a polynomial of `degree` through the points.
    ///
    /// ```
    /// use stagna::instruments::transducer::{CalibrationPoint, TransducerCalibration};
    /// let p = |x, y| CalibrationPoint { indicated_pa: x, reference_pa: y };
    /// let c = TransducerCalibration::fit(vec![p(0.0, 0.2), p(100.0, 100.2), p(200.0, 200.2)], 1, "2026-10-14", "").unwrap();
    /// assert!((c.correct_pa(150.0) - 150.2).abs() < 1e-9);
    /// assert!(TransducerCalibration::fit(vec![p(0.0, 0.2)], 1, "2026-10-14", "").is_err());
    /// ```
    pub fn fit(points: Vec<CalibrationPoint>, degree: usize, date: &str, by: &str) -> Result<Self> {
        if !(1..=MAX_DEGREE).contains(&degree) {
            return Err(inconsistent(format!("degree must be 1 (linear), 2 or 3, got {degree}")));
        }
        let n = points.len();
        if n < degree + 2 {
            return Err(inconsistent(format!(
                "a degree-{degree} fit needs at least {} points (one more than its {} coefficients, so that the scatter about the curve can be estimated); got {n}",
                degree + 2,
                degree + 1
            )));
        }
        for (i, p) in points.iter().enumerate() {
            finite("transducer calibration", "indicated reading", p.indicated_pa)
                .and_then(|_| finite("transducer calibration", "reference Δp", p.reference_pa))
                .map_err(|e| inconsistent(format!("point {}: {e}", i + 1)))?;
        }
        let x_mean = points.iter().map(|p| p.indicated_pa).sum::<f64>() / n as f64;
        let spread = points.iter().map(|p| (p.indicated_pa - x_mean).abs()).fold(0.0, f64::max);
        let mut distinct: Vec<f64> = points.iter().map(|p| p.indicated_pa).collect();
        distinct.sort_by(f64::total_cmp);
        distinct.dedup();
        if spread == 0.0 || distinct.len() < degree + 1 {
            return Err(inconsistent(format!(
                "a degree-{degree} fit needs at least {} different indicated readings; got {}",
                degree + 1,
                distinct.len()
            )));
        }
        let x_scale = spread;
        let k = degree + 1;
        let mut xtx = vec![0.0; k * k];
        let mut xty = vec![0.0; k];
        for p in &points {
            let g = powers((p.indicated_pa - x_mean) / x_scale, degree);
            for r in 0..k {
                xty[r] += g[r] * p.reference_pa;
                for c in 0..k {
                    xtx[r * k + c] += g[r] * g[c];
                }
            }
        }
        let inverse = invert(&xtx, k).ok_or_else(|| {
            inconsistent("the points do not determine the curve (singular normal equations); spread the indicated readings over the range".into())
        })?;
        let coefficients: Vec<f64> = (0..k).map(|r| (0..k).map(|c| inverse[r * k + c] * xty[c]).sum()).collect();
        let mut c = Self {
            points,
            degree,
            date: date.into(),
            by: by.into(),
            x_mean,
            x_scale,
            coefficients,
            inverse,
            residual_sd_pa: 0.0,
            dof: n - k,
        };
        let ss: f64 = c.points.iter().map(|p| (p.reference_pa - c.correct_pa(p.indicated_pa)).powi(2)).sum();
        c.residual_sd_pa = (ss / c.dof as f64).sqrt();
        Ok(c)
    }

    /// The corrected Δp for an indicated reading, Pa.
    pub fn correct_pa(&self, indicated_pa: f64) -> f64 {
        let x = (indicated_pa - self.x_mean) / self.x_scale;
        self.coefficients.iter().rev().fold(0.0, |acc, a| acc * x + a)
    }

    /// The residuals y_i − y(x_i) of the calibration points, Pa.
    pub fn residuals_pa(&self) -> Vec<f64> {
        self.points.iter().map(|p| p.reference_pa - self.correct_pa(p.indicated_pa)).collect()
    }

    /// Standard uncertainty of the fitted curve at an indicated reading, Pa.
    pub fn u_curve_pa(&self, indicated_pa: f64) -> f64 {
        let k = self.degree + 1;
        let g = powers((indicated_pa - self.x_mean) / self.x_scale, self.degree);
        let q: f64 = (0..k).map(|r| (0..k).map(|c| g[r] * self.inverse[r * k + c] * g[c]).sum::<f64>()).sum();
        self.residual_sd_pa * q.max(0.0).sqrt()
    }

    /// Standard uncertainty of one corrected reading from the calibration, Pa:
    /// √(s² + u_curve²).
    pub fn u_reading_pa(&self, indicated_pa: f64) -> f64 {
        self.residual_sd_pa.hypot(self.u_curve_pa(indicated_pa))
    }

    /// The span of indicated readings the calibration covers, Pa.
    pub fn span_pa(&self) -> (f64, f64) {
        let lo = self.points.iter().map(|p| p.indicated_pa).fold(f64::INFINITY, f64::min);
        let hi = self.points.iter().map(|p| p.indicated_pa).fold(f64::NEG_INFINITY, f64::max);
        (lo, hi)
    }

    /// Slope and intercept in the indicated reading (a linear fit), for display.
    pub fn linear_terms(&self) -> Option<(f64, f64)> {
        (self.degree == 1).then(|| {
            let slope = self.coefficients[1] / self.x_scale;
            (self.coefficients[0] - slope * self.x_mean, slope)
        })
    }
}

fn powers(x: f64, degree: usize) -> Vec<f64> {
    let mut g = Vec::with_capacity(degree + 1);
    let mut v = 1.0;
    for _ in 0..=degree {
        g.push(v);
        v *= x;
    }
    g
}

/// Inverse of a small symmetric positive matrix by Gauss–Jordan with partial pivoting.
fn invert(a: &[f64], k: usize) -> Option<Vec<f64>> {
    let mut m = a.to_vec();
    let mut inv: Vec<f64> = (0..k * k).map(|i| if i / k == i % k { 1.0 } else { 0.0 }).collect();
    let scale = a.iter().fold(0.0f64, |s, v| s.max(v.abs()));
    for col in 0..k {
        let pivot = (col..k).max_by(|&i, &j| m[i * k + col].abs().total_cmp(&m[j * k + col].abs()))?;
        if m[pivot * k + col].abs() <= 1e-12 * scale {
            return None;
        }
        for c in 0..k {
            m.swap(col * k + c, pivot * k + c);
            inv.swap(col * k + c, pivot * k + c);
        }
        let d = m[col * k + col];
        for c in 0..k {
            m[col * k + c] /= d;
            inv[col * k + c] /= d;
        }
        for r in 0..k {
            if r != col {
                let f = m[r * k + col];
                for c in 0..k {
                    m[r * k + c] -= f * m[col * k + c];
                    inv[r * k + c] -= f * inv[col * k + c];
                }
            }
        }
    }
    Some(inv)
}

/// A differential-pressure transducer: its identity, the unit it logs in, its range and
/// (optionally) its calibration.
#[derive(Debug, Clone, PartialEq)]
pub struct Transducer {
    /// Identifier (tag or serial).
    pub id: String,
    /// The unit its readings are logged in (`Pa`, `inH2O`, `mbar`, ...).
    pub unit: String,
    /// Rated range, Pa (low, high).
    pub range_pa: (f64, f64),
    /// Calibration against a reference, if any.
    pub calibration: Option<TransducerCalibration>,
}

impl Transducer {
    /// A transducer with its rated range.
    pub fn new(id: &str, unit: &str, range: (Pressure, Pressure)) -> Result<Self> {
        crate::units::quantity::Quantity::new(1.0, unit)
            .and_then(|q| {
                if q.dimension == crate::units::dimension::Dimension::PRESSURE {
                    Ok(())
                } else {
                    Err(inconsistent(format!("the reading unit '{unit}' is not a pressure unit")))
                }
            })
            .map_err(|e| Error::Inconsistent { context: "transducer", message: format!("{id}: {e}") })?;
        let (lo, hi) = (range.0.si(), range.1.si());
        if !(lo.is_finite() && hi.is_finite() && hi > lo) {
            return Err(Error::Inconsistent {
                context: "transducer",
                message: format!("{id}: the range's high end must be above its low end (got {lo} Pa to {hi} Pa)"),
            });
        }
        Ok(Self { id: id.into(), unit: unit.into(), range_pa: (lo, hi), calibration: None })
    }

    /// Corrects readings (Pa, as logged and converted) in place through the calibration
    /// and returns what the caller should know: readings outside the rated range or
    /// outside the calibrated span (an extrapolated curve).
    pub fn correct_column(&self, readings_pa: &mut [f64]) -> Vec<Warning> {
        let mut out_of_range = 0usize;
        let mut outside_span = 0usize;
        let span = self.calibration.as_ref().map(TransducerCalibration::span_pa);
        for v in readings_pa.iter_mut() {
            if v.is_nan() {
                continue;
            }
            if *v < self.range_pa.0 || *v > self.range_pa.1 {
                out_of_range += 1;
            }
            if let Some(c) = &self.calibration {
                if let Some((lo, hi)) = span
                    && (*v < lo || *v > hi)
                {
                    outside_span += 1;
                }
                *v = c.correct_pa(*v);
            }
        }
        let mut w = Vec::new();
        if out_of_range > 0 {
            w.push(Warning::new(
                "outside-range",
                format!(
                    "transducer {}: {out_of_range} reading(s) outside its rated range {} to {} Pa",
                    self.id,
                    crate::units::quantity::format_number(self.range_pa.0),
                    crate::units::quantity::format_number(self.range_pa.1)
                ),
            ));
        }
        if let (Some((lo, hi)), true) = (span, outside_span > 0) {
            w.push(Warning::new(
                "extrapolated",
                format!(
                "transducer {}: {outside_span} reading(s) outside the calibrated span {} to {} Pa; the curve is extrapolated there",
                self.id,
                crate::units::quantity::format_number(lo),
                crate::units::quantity::format_number(hi)
            ),
            ));
        }
        w
    }

    /// A description for worked steps and reports.
    pub fn describe(&self) -> String {
        match &self.calibration {
            Some(c) => format!(
                "transducer {} (readings in {}), calibrated {} (degree {}, {} points, s = {} Pa, ν = {})",
                self.id,
                self.unit,
                c.date,
                c.degree,
                c.points.len(),
                crate::units::quantity::format_sig(c.residual_sd_pa, 2),
                c.dof
            ),
            None => format!("transducer {} (readings in {}), uncalibrated", self.id, self.unit),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// JCGM 100:2008 Annex H.3, Table H.6: thermometer readings t_k and corrections b_k
    /// (the data as published, checked against the GTC documentation of the example,
    /// gtc.readthedocs.io "GUM H3"); t_0 = 20 °C. Fitting b against t is the same
    /// least-squares line as here (x = t, y = b).
    const T: [f64; 11] = [21.521, 22.012, 22.512, 23.003, 23.507, 23.999, 24.513, 25.002, 25.503, 26.010, 26.511];
    const B: [f64; 11] = [-0.171, -0.169, -0.166, -0.159, -0.164, -0.165, -0.156, -0.157, -0.159, -0.161, -0.160];

    fn gum_h3() -> TransducerCalibration {
        let pts = T.iter().zip(B).map(|(&t, b)| CalibrationPoint { indicated_pa: t, reference_pa: b }).collect();
        TransducerCalibration::fit(pts, 1, "2026-10-14", "GUM H.3 data").unwrap()
    }

    #[test]
    fn straight_line_matches_gum_h3() {
        let c = gum_h3();
        // GUM H.3.3 (results from memory, reproduced with numpy 2.4.6 polyfit on the
        // Table H.6 data): y1 = b(20 °C) = −0.1712 °C, y2 = 0.00218 /°C, s = 0.0035 °C, ν = 9.
        assert!((c.correct_pa(20.0) - -0.1712).abs() < 5e-5, "{}", c.correct_pa(20.0));
        let (a, slope) = c.linear_terms().unwrap();
        assert!((slope - 0.00218).abs() < 5e-6, "{slope}");
        assert!((a + slope * 20.0 - -0.1712).abs() < 5e-5);
        assert!((c.residual_sd_pa - 0.0035).abs() < 5e-5, "{}", c.residual_sd_pa);
        assert_eq!(c.dof, 9);
        // GUM H.3.4 (from memory): the predicted correction at 30 °C, b(30) = −0.1494 °C,
        // u = 0.0041 °C (the curve's own uncertainty, from u(y1), u(y2) and r(y1, y2)).
        assert!((c.correct_pa(30.0) - -0.1494).abs() < 5e-5, "{}", c.correct_pa(30.0));
        assert!((c.u_curve_pa(30.0) - 0.0041).abs() < 5e-5, "{}", c.u_curve_pa(30.0));
        // u(y1) = 0.0029 °C at t0 = 20 °C (GUM H.3.3, from memory).
        assert!((c.u_curve_pa(20.0) - 0.0029).abs() < 5e-5, "{}", c.u_curve_pa(20.0));
        // One reading: √(s² + u_curve²)
        assert!((c.u_reading_pa(30.0) - c.residual_sd_pa.hypot(c.u_curve_pa(30.0))).abs() < 1e-15);
    }

    #[test]
    fn exact_polynomials_are_recovered() {
        // y = 2 + 0.98 x + 1e-4 x² through five points: a quadratic fit is exact (algebra).
        let f = |x: f64| 2.0 + 0.98 * x + 1e-4 * x * x;
        let pts = [0.0, 50.0, 100.0, 150.0, 250.0]
            .iter()
            .map(|&x| CalibrationPoint { indicated_pa: x, reference_pa: f(x) })
            .collect();
        let c = TransducerCalibration::fit(pts, 2, "2026-10-14", "").unwrap();
        assert!((c.correct_pa(200.0) - f(200.0)).abs() < 1e-9);
        assert!(c.residual_sd_pa < 1e-9);
        assert!(c.residuals_pa().iter().all(|r| r.abs() < 1e-9));
    }

    #[test]
    fn too_few_or_degenerate_points_are_refused() {
        let p = |x, y| CalibrationPoint { indicated_pa: x, reference_pa: y };
        let e = TransducerCalibration::fit(vec![p(10.0, 10.0)], 1, "2026-10-14", "").unwrap_err().to_string();
        assert!(e.contains("at least 3 points"), "{e}");
        let e = TransducerCalibration::fit(vec![p(10.0, 10.0), p(10.0, 11.0), p(10.0, 9.0)], 1, "d", "")
            .unwrap_err()
            .to_string();
        assert!(e.contains("different indicated readings"), "{e}");
        assert!(TransducerCalibration::fit(vec![p(0.0, 0.0), p(1.0, 1.0), p(2.0, 2.0)], 4, "d", "").is_err());
        assert!(TransducerCalibration::fit(vec![p(0.0, f64::NAN), p(1.0, 1.0), p(2.0, 2.0)], 1, "d", "").is_err());
    }

    #[test]
    fn readings_are_corrected_and_flagged() {
        let p = |x, y| CalibrationPoint { indicated_pa: x, reference_pa: y };
        let mut t = Transducer::new("DPT-1", "Pa", (Pressure::pa(0.0), Pressure::pa(500.0))).unwrap();
        t.calibration =
            Some(TransducerCalibration::fit(vec![p(0.0, 0.5), p(100.0, 101.0), p(200.0, 201.5)], 1, "d", "").unwrap());
        let mut r = vec![50.0, 150.0, 300.0, 600.0, f64::NAN];
        let w = t.correct_column(&mut r);
        // y = 0.5 + 1.005 x exactly through the points (algebra)
        assert!((r[0] - 50.75).abs() < 1e-9 && (r[1] - 151.25).abs() < 1e-9);
        assert!(r[4].is_nan());
        assert_eq!(w.len(), 2);
        assert!(w[0].message.contains("1 reading(s) outside its rated range"), "{}", w[0].message);
        assert!(w[1].message.contains("2 reading(s) outside the calibrated span"), "{}", w[1].message);
        assert!(Transducer::new("X", "m", (Pressure::pa(0.0), Pressure::pa(1.0))).is_err());
        assert!(Transducer::new("X", "Pa", (Pressure::pa(1.0), Pressure::pa(1.0))).is_err());
    }
}
