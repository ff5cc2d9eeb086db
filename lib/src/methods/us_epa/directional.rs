//! Yaw- and pitch-resolved velocities of US EPA Method 2F (three-dimensional probes) and
//! Method 2G (two-dimensional probes): the axial velocity at each point from the
//! nulled yaw angle, the pitch angle from the probe's calibration curves, and the
//! section's average axial velocity and flows.
//!
//! # Formula (metric units of the methods)
//! - yaw θ_y(i): the probe is rotated to null the yaw pair; the reading is corrected by
//!   the angle-measuring device's rotational offset R_ADO;
//! - Method 2F: pitch ratio F1(i) = (P4 − P5)_i / (P1 − P2)_i; pitch θ_p(i) from the
//!   probe's F1(θ_p) curve; F2(i) from its F2(θ_p) curve;
//!   v_a(i) = K_p √(F2(i) (P1 − P2)_i T_s(i) / (P_s M_s)) · cos θ_y(i) · cos θ_p(i);
//! - Method 2G: v_a(i) = K_p C_p √(Δp_i T_s(i) / (P_s M_s)) · cos θ_y(i);
//! - v_a(avg) = mean of v_a(i); Q_sw = 3600 v_a(avg) A (T_std P_s)/(T_s(avg) P_std) and
//!   Q_sd = (1 − B_ws) Q_sw (T_std 293 K, P_std 760 mmHg).
//!
//! Δp in mm H₂O, t in °C (T = t + 273), P in mmHg, M_s in g/g-mol, v in m/s.
//!
//! # References
//! US EPA 40 CFR Part 60 Appendix A-1 (Method 2F) and A-2 (Method 2G). Read in the
//! published text: the symbols (F1 "pitch angle ratio", F2 "3-D probe velocity
//! calibration coefficient", (P4 − P5), (P1 − P2), T_s(i) per point, Q_sw, Q_sd) and
//! Method 2F §1.1 (only when the average velocity is 20 ft/s (6.1 m/s) or more). From
//! memory: the form of the velocity equations (F2 under the root), the averaging of
//! v_a(i), and the 2° limit on R_ADO; printed checks say so.

use serde::{Deserialize, Serialize};

use super::KP_METRIC;
use super::check::{Citation, MethodCheck};
use crate::error::{Error, Result, finite, positive, within};
use crate::io::record::{self, Header};

const CONTEXT: &str = "EPA Method 2F/2G";
/// 20 ft/s in m/s (Method 2F §1.1; 1 ft = 0.3048 m exactly).
const MIN_VELOCITY_2F: f64 = 20.0 * 0.3048;

/// A 3-D probe's calibration curves: pitch ratio F1 and velocity coefficient F2 against
/// pitch angle, as measured in the probe's wind-tunnel calibration.
#[derive(Debug, Clone, PartialEq)]
pub struct PitchCurves {
    /// Pitch angles θ_p, degrees, strictly increasing.
    pub pitch_deg: Vec<f64>,
    /// F1 at each angle, strictly monotonic.
    pub f1: Vec<f64>,
    /// F2 at each angle, positive.
    pub f2: Vec<f64>,
}

fn interpolate(x: &[f64], y: &[f64], at: f64) -> f64 {
    let n = x.len();
    let k = x.windows(2).position(|w| (w[0] <= at && at <= w[1]) || (w[1] <= at && at <= w[0])).unwrap_or(n - 2);
    let t = (at - x[k]) / (x[k + 1] - x[k]);
    y[k] + t * (y[k + 1] - y[k])
}

impl PitchCurves {
    /// Checks the curves: at least two angles, angles strictly increasing, F1 strictly
    /// monotonic (so that a pitch ratio gives one angle), F2 positive.
    pub fn new(pitch_deg: Vec<f64>, f1: Vec<f64>, f2: Vec<f64>) -> Result<Self> {
        let ctx = "3-D probe calibration";
        if pitch_deg.len() < 2 || pitch_deg.len() != f1.len() || f1.len() != f2.len() {
            return Err(Error::Inconsistent {
                context: ctx,
                message: format!(
                    "give at least two calibration angles with one F1 and one F2 each (got {} angles, {} F1, {} F2)",
                    pitch_deg.len(),
                    f1.len(),
                    f2.len()
                ),
            });
        }
        for i in 0..pitch_deg.len() {
            within(ctx, "pitch angle", pitch_deg[i], "°", -90.0, 90.0).map_err(|e| e.at_row(i))?;
            finite(ctx, "F1", f1[i]).map_err(|e| e.at_row(i))?;
            positive(ctx, "F2", f2[i], "").map_err(|e| e.at_row(i))?;
        }
        if pitch_deg.windows(2).any(|w| w[1] <= w[0]) {
            return Err(Error::Inconsistent {
                context: ctx,
                message: "pitch angles must be strictly increasing".into(),
            });
        }
        let up = f1.windows(2).all(|w| w[1] > w[0]);
        let down = f1.windows(2).all(|w| w[1] < w[0]);
        if !(up || down) {
            return Err(Error::Inconsistent {
                context: ctx,
                message: "F1 must rise (or fall) steadily with the pitch angle, or a pitch ratio would give two angles"
                    .into(),
            });
        }
        Ok(Self { pitch_deg, f1, f2 })
    }

    /// The pitch angle for a measured pitch ratio, by linear interpolation; a ratio
    /// outside the calibrated range is refused.
    pub fn pitch_for(&self, f1: f64) -> Result<f64> {
        finite(CONTEXT, "pitch ratio F1", f1)?;
        let (lo, hi) = (self.f1[0].min(self.f1[self.f1.len() - 1]), self.f1[0].max(self.f1[self.f1.len() - 1]));
        if f1 < lo || f1 > hi {
            return Err(Error::OutOfRange {
                context: CONTEXT,
                param: "pitch ratio F1",
                value: f1,
                unit: "",
                allowed: format!("within the probe's calibrated range [{lo:.4}, {hi:.4}]"),
            });
        }
        Ok(interpolate(&self.f1, &self.pitch_deg, f1))
    }

    /// F2 at a pitch angle, by linear interpolation within the calibrated angles.
    pub fn f2_at(&self, pitch_deg: f64) -> f64 {
        interpolate(&self.pitch_deg, &self.f2, pitch_deg)
    }
}

/// Name written in the `format` key of a 3-D probe calibration record.
pub const CURVES_FORMAT: &str = "stagna-3d-probe-calibration";
/// Newest version of that record this build reads and the one it writes.
pub const CURVES_VERSION: u32 = 1;

/// One calibrated pitch angle of a 3-D probe.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PitchPoint {
    /// Pitch angle, degrees.
    pub pitch_deg: f64,
    /// Pitch ratio F1 at that angle.
    pub f1: f64,
    /// Velocity coefficient F2 at that angle.
    pub f2: f64,
}

/// A 3-D probe's calibration curves as kept on file (Stagna's own format, `docs/records.md`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PitchCurvesRecord {
    /// Always [`CURVES_FORMAT`].
    pub format: String,
    /// Record version ([`CURVES_VERSION`]).
    pub version: u32,
    /// The probe's identifier.
    pub probe_id: String,
    /// Calibration date, `YYYY-MM-DD`.
    pub date: String,
    /// Who calibrated, where, with what: free text.
    #[serde(default, skip_serializing_if = "String::is_empty")]
    pub performed_by: String,
    /// Free-text remarks.
    #[serde(default, skip_serializing_if = "String::is_empty")]
    pub note: String,
    /// The calibrated angles, increasing.
    pub points: Vec<PitchPoint>,
}

impl PitchCurvesRecord {
    /// A record of curves, checked.
    pub fn new(probe_id: &str, date: &str, curves: &PitchCurves) -> Result<Self> {
        let points = (0..curves.pitch_deg.len())
            .map(|i| PitchPoint { pitch_deg: curves.pitch_deg[i], f1: curves.f1[i], f2: curves.f2[i] })
            .collect();
        let r = Self {
            format: CURVES_FORMAT.into(),
            version: CURVES_VERSION,
            probe_id: probe_id.trim().into(),
            date: date.trim().into(),
            performed_by: String::new(),
            note: String::new(),
            points,
        };
        r.curves()?;
        Ok(r)
    }

    /// Checks the header and the curves.
    pub fn curves(&self) -> Result<PitchCurves> {
        Header { format: &self.format, version: self.version, id: &self.probe_id, date: &self.date }.check(
            "3-D probe calibration",
            CURVES_FORMAT,
            CURVES_VERSION,
        )?;
        PitchCurves::new(
            self.points.iter().map(|p| p.pitch_deg).collect(),
            self.points.iter().map(|p| p.f1).collect(),
            self.points.iter().map(|p| p.f2).collect(),
        )
    }

    /// Reads a record from TOML; `origin` (a path) prefixes every message.
    pub fn from_toml(text: &str, origin: &str) -> Result<Self> {
        let r: Self = record::from_toml(text, origin)?;
        r.curves().map_err(|e| Error::File { path: origin.into(), message: e.to_string() })?;
        Ok(r)
    }

    /// The record as TOML text.
    pub fn to_toml(&self) -> Result<String> {
        self.curves()?;
        record::to_toml(
            self,
            &format!(
                "3-D probe calibration curves (Stagna format {CURVES_FORMAT}, version {CURVES_VERSION}): F1 and F2 against pitch angle."
            ),
            "3-D probe calibration",
        )
    }
}

/// One traverse point of a directional probe, in the methods' metric units.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DirectionalPoint {
    /// Yaw reading at null, degrees (before the offset correction).
    pub yaw_reading_deg: f64,
    /// Velocity head (P1 − P2) for 3-D probes, Δp for 2-D probes, mm H₂O.
    pub dp_mm_h2o: f64,
    /// Pitch differential (P4 − P5), mm H₂O (3-D probes only).
    pub pitch_dp_mm_h2o: Option<f64>,
    /// Stack temperature at the point, °C.
    pub ts_c: f64,
}

/// The probe of a directional traverse.
#[derive(Debug, Clone, PartialEq)]
pub enum DirectionalProbe {
    /// Method 2F: a 3-D probe with its pitch curves.
    ThreeD(PitchCurves),
    /// Method 2G: a 2-D probe (or a Type S / 3-D probe in yaw mode) with its coefficient
    /// (C_p for a 2-D probe; for a 3-D probe in yaw mode √F2 at zero pitch).
    TwoD {
        /// The coefficient.
        cp: f64,
    },
}

/// The per-point results and the section averages.
#[derive(Debug, Clone, PartialEq)]
pub struct DirectionalTraverse {
    /// Method label ("US EPA Method 2F" or "US EPA Method 2G").
    pub method: &'static str,
    /// Yaw angle at each point after the offset correction, degrees.
    pub yaw_deg: Vec<f64>,
    /// Pitch angle at each point (3-D probes), degrees.
    pub pitch_deg: Vec<f64>,
    /// F2 at each point (3-D probes).
    pub f2: Vec<f64>,
    /// Axial velocity at each point, m/s.
    pub axial_velocity: Vec<f64>,
    /// Average axial velocity v_a(avg), m/s.
    pub mean_axial_velocity: f64,
    /// Mean absolute temperature T_s(avg), K (t + 273).
    pub ts_avg_k: f64,
    /// Checks with their numbers.
    pub checks: Vec<MethodCheck>,
}

impl DirectionalTraverse {
    /// Wet and dry flows at 20 °C, 760 mmHg (m³/h) for a stack area A (m²), absolute
    /// stack pressure P_s (mmHg) and moisture B_ws.
    pub fn flows(&self, area_m2: f64, p_s_mm_hg: f64, b_ws: f64) -> Result<(f64, f64)> {
        positive(CONTEXT, "stack area", area_m2, "m²")?;
        positive(CONTEXT, "absolute stack pressure", p_s_mm_hg, "mmHg")?;
        if !(0.0..1.0).contains(&finite(CONTEXT, "moisture fraction B_ws", b_ws)?) {
            return Err(Error::OutOfRange {
                context: CONTEXT,
                param: "moisture fraction B_ws",
                value: b_ws,
                unit: "",
                allowed: "in [0, 1)".into(),
            });
        }
        let q_sw = 3600.0 * self.mean_axial_velocity * area_m2 * (293.0 * p_s_mm_hg) / (self.ts_avg_k * 760.0);
        Ok((q_sw, (1.0 - b_ws) * q_sw))
    }
}

/// Axial velocities of a traverse by Method 2F (3-D probe) or 2G (2-D probe).
/// `rado_deg` is the angle-measuring device's rotational offset from the pre-test
/// check; `p_s_mm_hg` the absolute stack pressure, `m_s` the wet molecular weight.
pub fn axial_velocities(
    probe: &DirectionalProbe,
    points: &[DirectionalPoint],
    rado_deg: f64,
    p_s_mm_hg: f64,
    m_s: f64,
) -> Result<DirectionalTraverse> {
    if points.is_empty() {
        return Err(Error::Inconsistent { context: CONTEXT, message: "no traverse points".into() });
    }
    finite(CONTEXT, "rotational offset R_ADO", rado_deg)?;
    positive(CONTEXT, "absolute stack pressure", p_s_mm_hg, "mmHg")?;
    positive(CONTEXT, "wet molecular weight", m_s, "g/g-mol")?;
    let n = points.len();
    let (mut yaw, mut pitch, mut f2s, mut va) = (Vec::with_capacity(n), Vec::new(), Vec::new(), Vec::with_capacity(n));
    let mut t_sum = 0.0;
    for (i, p) in points.iter().enumerate() {
        let row = |e: Error| e.at_row(i);
        finite(CONTEXT, "yaw reading", p.yaw_reading_deg).map_err(row)?;
        let y = p.yaw_reading_deg - rado_deg;
        if y.abs() > 90.0 {
            return Err(Error::OutOfRange {
                context: CONTEXT,
                param: "yaw angle",
                value: y,
                unit: "°",
                allowed: "within ±90°".into(),
            }
            .at_row(i));
        }
        finite(CONTEXT, "velocity head", p.dp_mm_h2o).map_err(row)?;
        if p.dp_mm_h2o < 0.0 {
            return Err(Error::OutOfRange {
                context: CONTEXT,
                param: "velocity head",
                value: p.dp_mm_h2o,
                unit: "mm H₂O",
                allowed: "0 or more at the yaw null".into(),
            }
            .at_row(i));
        }
        let t_abs = positive(CONTEXT, "absolute stack temperature", p.ts_c + 273.0, "K").map_err(row)?;
        t_sum += t_abs;
        let base = p.dp_mm_h2o * t_abs / (p_s_mm_hg * m_s);
        let v = match probe {
            DirectionalProbe::ThreeD(curves) => {
                let pd = p.pitch_dp_mm_h2o.ok_or_else(|| {
                    Error::Inconsistent {
                        context: CONTEXT,
                        message: "a 3-D probe needs the pitch differential (P4 − P5) at every point".into(),
                    }
                    .at_row(i)
                })?;
                finite(CONTEXT, "pitch differential", pd).map_err(row)?;
                if p.dp_mm_h2o == 0.0 {
                    return Err(Error::Inconsistent {
                        context: CONTEXT,
                        message: "velocity head (P1 − P2) is 0: no pitch ratio".into(),
                    }
                    .at_row(i));
                }
                let th = curves.pitch_for(pd / p.dp_mm_h2o).map_err(row)?;
                let f2 = curves.f2_at(th);
                pitch.push(th);
                f2s.push(f2);
                KP_METRIC * (f2 * base).sqrt() * y.to_radians().cos() * th.to_radians().cos()
            }
            DirectionalProbe::TwoD { cp } => KP_METRIC * cp * base.sqrt() * y.to_radians().cos(),
        };
        yaw.push(y);
        va.push(v);
    }
    let mean = va.iter().sum::<f64>() / n as f64;
    let (method, three_d) = match probe {
        DirectionalProbe::ThreeD(_) => ("US EPA Method 2F", true),
        DirectionalProbe::TwoD { cp } => {
            within(CONTEXT, "probe coefficient", *cp, "", 0.5, 1.2)?;
            ("US EPA Method 2G", false)
        }
    };
    let mut checks = vec![MethodCheck {
        name: "angle-measuring device rotational offset |R_ADO|".into(),
        value: rado_deg.abs(),
        unit: "°",
        decimals: 1,
        limit: "≤ 2 °".into(),
        pass: rado_deg.abs() <= 2.0,
        source: "US EPA Methods 2F/2G §8.3",
        citation: Citation::FromMemory,
    }];
    if three_d {
        checks.push(MethodCheck {
            name: "average axial velocity for Method 2F".into(),
            value: mean,
            unit: "m/s",
            decimals: 2,
            limit: "≥ 6.10 m/s (20 ft/s)".into(),
            pass: mean >= MIN_VELOCITY_2F,
            source: "US EPA Method 2F §1.1",
            citation: Citation::Verified,
        });
    }
    Ok(DirectionalTraverse {
        method,
        yaw_deg: yaw,
        pitch_deg: pitch,
        f2: f2s,
        axial_velocity: va,
        mean_axial_velocity: mean,
        ts_avg_k: t_sum / n as f64,
        checks,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn curves() -> PitchCurves {
        // Invented calibration: F1 falls with pitch, F2 near 1.0.
        PitchCurves::new(vec![-10.0, 0.0, 10.0], vec![0.40, 0.0, -0.38], vec![1.02, 1.00, 1.03]).unwrap()
    }

    // Hand calculation (Python 3.11): pitch ratio 0.10 → θ_p = −10·(0.10/0.40) = −2.5°,
    // F2 = 1.00 + 0.25·0.02 = 1.005; Δp 10 mm H₂O, t 150 °C (423 K), P_s 758.1618 mmHg,
    // M_s 28.944, yaw 8° (reading 9°, R_ADO 1°):
    // v_a = 34.97 √(1.005·10·423/(758.1618·28.944)) cos 8° cos 2.5° = 15.2275 m/s
    // (the check-values.md §4.2 state; cos factors from the method's form, from memory).
    #[test]
    fn three_d_probe_point() {
        let p = DirectionalPoint { yaw_reading_deg: 9.0, dp_mm_h2o: 10.0, pitch_dp_mm_h2o: Some(1.0), ts_c: 150.0 };
        let t = axial_velocities(&DirectionalProbe::ThreeD(curves()), &[p], 1.0, 758.1618, 28.944).unwrap();
        assert!((t.pitch_deg[0] + 2.5).abs() < 1e-12);
        assert!((t.f2[0] - 1.005).abs() < 1e-12);
        assert!((t.axial_velocity[0] - 15.2275).abs() < 1e-4, "{}", t.axial_velocity[0]);
        assert!(t.checks.iter().all(|c| c.pass));
    }

    // 2G: v_a = 34.97·0.84·√(10·423/(758.1618·28.944))·cos 20° = 12.1191 m/s (hand calculation, Python 3.11);
    // with no yaw it is the Method 2 point velocity of check-values.md §4.2's state.
    #[test]
    fn two_d_probe_and_flows() {
        let p = DirectionalPoint { yaw_reading_deg: 20.0, dp_mm_h2o: 10.0, pitch_dp_mm_h2o: None, ts_c: 150.0 };
        let t = axial_velocities(&DirectionalProbe::TwoD { cp: 0.84 }, &[p], 0.0, 758.1618, 28.944).unwrap();
        assert!((t.axial_velocity[0] - 12.1191).abs() < 1e-4, "{}", t.axial_velocity[0]);
        let (qsw, qsd) = t.flows(1.767_15, 758.1618, 0.10).unwrap();
        // 3600 · 12.1191 · 1.76715 · (293 · 758.1618)/(423 · 760) = 53 275 m³/h; ×0.9 dry.
        assert!((qsw - 53_275.0).abs() < 2.0, "{qsw}");
        assert!((qsd - 0.9 * qsw).abs() < 1e-9);
    }

    // Method 2F §1.1 (read in the text): not below 20 ft/s = 6.096 m/s.
    #[test]
    fn minimum_velocity_and_offset_limits() {
        let slow = DirectionalPoint { yaw_reading_deg: 0.0, dp_mm_h2o: 1.0, pitch_dp_mm_h2o: Some(0.0), ts_c: 20.0 };
        let t = axial_velocities(&DirectionalProbe::ThreeD(curves()), &[slow], 2.5, 760.0, 29.0).unwrap();
        assert!(t.mean_axial_velocity < MIN_VELOCITY_2F);
        assert!(!t.checks[0].pass && !t.checks[1].pass);
    }

    #[test]
    fn curves_record_round_trip_and_errors() {
        let r = PitchCurvesRecord::new("3D-11", "2026-08-30", &curves()).unwrap();
        let text = r.to_toml().unwrap();
        assert_eq!(PitchCurvesRecord::from_toml(&text, "c.toml").unwrap(), r);
        let e = PitchCurvesRecord::from_toml(&text.replace("f2 = 1.0\n", "f2 = -1.0\n"), "c.toml").unwrap_err();
        assert!(e.to_string().starts_with("c.toml: ") && e.to_string().contains("F2"), "{e}");
        let e = PitchCurvesRecord::from_toml(&text.replace("version = 1", "version = 3"), "c.toml").unwrap_err();
        assert!(e.to_string().contains("newer Stagna"), "{e}");
        let e = PitchCurvesRecord::from_toml(&text.replace("pitch_deg = 0.0", "pitch = 0.0"), "c.toml").unwrap_err();
        assert!(e.to_string().contains("line") && e.to_string().contains("pitch"), "{e}");
    }

    #[test]
    fn bad_inputs() {
        let p = DirectionalPoint { yaw_reading_deg: 95.0, dp_mm_h2o: 10.0, pitch_dp_mm_h2o: Some(1.0), ts_c: 150.0 };
        let e = axial_velocities(&DirectionalProbe::ThreeD(curves()), &[p], 0.0, 758.0, 29.0).unwrap_err();
        assert!(e.to_string().contains("yaw angle must be within ±90°"), "{e}");
        let p = DirectionalPoint { yaw_reading_deg: 5.0, dp_mm_h2o: 10.0, pitch_dp_mm_h2o: Some(9.0), ts_c: 150.0 };
        let e = axial_velocities(&DirectionalProbe::ThreeD(curves()), &[p], 0.0, 758.0, 29.0).unwrap_err();
        assert!(e.to_string().contains("calibrated range"), "{e}");
        let p = DirectionalPoint { yaw_reading_deg: 5.0, dp_mm_h2o: 10.0, pitch_dp_mm_h2o: None, ts_c: 150.0 };
        assert!(axial_velocities(&DirectionalProbe::ThreeD(curves()), &[p], 0.0, 758.0, 29.0).is_err());
        assert!(PitchCurves::new(vec![0.0, 10.0, 5.0], vec![0.0, 1.0, 2.0], vec![1.0; 3]).is_err());
        assert!(PitchCurves::new(vec![0.0, 5.0, 10.0], vec![0.0, 1.0, 0.5], vec![1.0; 3]).is_err());
        assert!(PitchCurves::new(vec![0.0], vec![0.0], vec![1.0]).is_err());
    }
}
