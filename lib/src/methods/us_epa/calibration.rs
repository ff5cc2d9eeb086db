//! Calibration of an S-type (reverse-type) pitot tube against a standard pitot tube,
//! as US EPA Method 2 §10.1 does it, and the record that keeps it.
//!
//! # Formula
//! - eq. 2-2: C_p(s) = C_p(std) √(Δp_std / Δp_s), per pair of readings taken at the
//!   same point with the standard tube and with one side (A or B) of the S-type tube;
//! - side means C_p(A), C_p(B); eq. 2-3: deviation of each reading's C_p(s) from its
//!   side mean; eq. 2-4: σ = Σ|C_p(s) − C_p(side)| / n, the average deviation;
//! - acceptance: σ_A ≤ 0.01, σ_B ≤ 0.01 and |C_p(A) − C_p(B)| ≤ 0.01.
//!
//! Δp_std and Δp_s are in any one pressure unit (only their ratio enters).
//! C_p(std) = 0.99 for a standard tube that was not itself calibrated.
//!
//! # References
//! US EPA 40 CFR Part 60 Appendix A-1, Method 2. Read in the published text: the
//! symbols C_p(s), C_p(std), Δp_std, Δp_s and "use 0.99 if the coefficient is
//! unknown" (Method 2 nomenclature). From memory, not yet read in the published
//! text: §10.1.3 (three readings per side), §10.1.4 (eqs. 2-2 to 2-4 and the 0.01
//! limits); printed checks say so.
//!
//! The record file is Stagna's own format (TOML), documented in `docs/records.md`.

use serde::{Deserialize, Serialize};

use super::check::{Citation, MethodCheck};
use crate::error::{Error, Result, Warning, finite, positive, within};
use crate::io::record::{self, Header};

const CONTEXT: &str = "S-type calibration";
/// Fewest readings per side that Method 2 §10.1.3 asks for (from memory).
pub const MIN_READINGS_PER_SIDE: usize = 3;
/// Acceptance limit on σ per side and on |C_p(A) − C_p(B)| (Method 2 §10.1.4, from memory).
pub const LIMIT: f64 = 0.01;
/// Name written in the `format` key of a record file.
pub const RECORD_FORMAT: &str = "stagna-s-type-calibration";
/// Newest record version this build reads and the one it writes.
pub const RECORD_VERSION: u32 = 1;

/// One pair of readings at the same point: standard tube and one side of the S-type.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CalibrationPair {
    /// Δp read with the standard pitot tube.
    pub dp_std: f64,
    /// Δp read with the S-type tube (the side under test facing the flow).
    pub dp_s: f64,
}

/// A Method 2 calibration of an S-type tube: the readings and every derived figure.
#[derive(Debug, Clone, PartialEq)]
pub struct STypeCalibration {
    /// C_p(std) of the standard tube.
    pub cp_std: f64,
    /// Readings with side A facing the flow.
    pub side_a: Vec<CalibrationPair>,
    /// Readings with side B facing the flow.
    pub side_b: Vec<CalibrationPair>,
    /// C_p(s) of each side-A pair (eq. 2-2).
    pub cp_a_points: Vec<f64>,
    /// C_p(s) of each side-B pair.
    pub cp_b_points: Vec<f64>,
    /// Side means C_p(A), C_p(B).
    pub cp_a: f64,
    /// Side-B mean.
    pub cp_b: f64,
    /// Average deviations σ_A, σ_B (eq. 2-4).
    pub sigma_a: f64,
    /// Side-B average deviation.
    pub sigma_b: f64,
    /// The acceptance checks with their numbers.
    pub checks: Vec<MethodCheck>,
}

fn side(cp_std: f64, pairs: &[CalibrationPair], name: &'static str) -> Result<(Vec<f64>, f64, f64)> {
    if pairs.len() < MIN_READINGS_PER_SIDE {
        return Err(Error::Inconsistent {
            context: CONTEXT,
            message: format!(
                "side {name} has {} reading(s); Method 2 §10.1.3 asks for at least {MIN_READINGS_PER_SIDE} per side (unverified, recalled)",
                pairs.len()
            ),
        });
    }
    let mut cps = Vec::with_capacity(pairs.len());
    for (i, p) in pairs.iter().enumerate() {
        let row = |e: Error| Error::Inconsistent {
            context: CONTEXT,
            message: format!("side {name}, reading {}: {e}", i + 1),
        };
        positive(CONTEXT, "Δp of the standard tube", p.dp_std, "(pressure)").map_err(row)?;
        positive(CONTEXT, "Δp of the S-type tube", p.dp_s, "(pressure)").map_err(row)?;
        cps.push(cp_std * (p.dp_std / p.dp_s).sqrt());
    }
    let mean = cps.iter().sum::<f64>() / cps.len() as f64;
    let sigma = cps.iter().map(|c| (c - mean).abs()).sum::<f64>() / cps.len() as f64;
    Ok((cps, mean, sigma))
}

impl STypeCalibration {
    /// Reduces the readings of both sides and runs the acceptance checks.
    ///
    /// ```
    /// use stagna::methods::us_epa::calibration::{CalibrationPair, STypeCalibration};
    /// let p = |a, b| CalibrationPair { dp_std: a, dp_s: b };
    /// let c = STypeCalibration::new(0.99, vec![p(12.0, 16.8); 3], vec![p(12.0, 16.9); 3]).unwrap();
    /// assert!((c.cp_a - 0.8367).abs() < 1e-4); // check-values.md §4.2 example
    /// assert!(c.passed());
    /// ```
    pub fn new(cp_std: f64, side_a: Vec<CalibrationPair>, side_b: Vec<CalibrationPair>) -> Result<Self> {
        within(CONTEXT, "standard pitot coefficient C_p(std)", cp_std, "", 0.9, 1.05)?;
        let (cp_a_points, cp_a, sigma_a) = side(cp_std, &side_a, "A")?;
        let (cp_b_points, cp_b, sigma_b) = side(cp_std, &side_b, "B")?;
        let check = |name: &str, value: f64, source: &'static str| MethodCheck {
            name: name.into(),
            value,
            unit: "",
            decimals: 4,
            limit: format!("≤ {LIMIT}"),
            pass: value <= LIMIT + 1e-12,
            source,
            citation: Citation::FromMemory,
        };
        let checks = vec![
            check("average deviation of side A, σ_A", sigma_a, "US EPA Method 2 §10.1.4, eq. 2-4"),
            check("average deviation of side B, σ_B", sigma_b, "US EPA Method 2 §10.1.4, eq. 2-4"),
            check("difference of the side means, |C_p(A) − C_p(B)|", (cp_a - cp_b).abs(), "US EPA Method 2 §10.1.4"),
        ];
        Ok(Self { cp_std, side_a, side_b, cp_a_points, cp_b_points, cp_a, cp_b, sigma_a, sigma_b, checks })
    }

    /// Whether every acceptance check passes.
    pub fn passed(&self) -> bool {
        self.checks.iter().all(|c| c.pass)
    }

    /// The coefficient to use: the mean of the two side means.
    pub fn cp(&self) -> f64 {
        0.5 * (self.cp_a + self.cp_b)
    }
}

/// A calibration as kept on file: who, when, which tubes, the readings, and an
/// optional standard uncertainty of the coefficient. The derived figures are
/// recomputed from the readings on every load, never trusted from the file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CalibrationRecord {
    /// Always [`RECORD_FORMAT`].
    pub format: String,
    /// Record version ([`RECORD_VERSION`]).
    pub version: u32,
    /// The S-type tube's identifier (serial or asset number).
    pub probe_id: String,
    /// Calibration date, `YYYY-MM-DD`.
    pub date: String,
    /// C_p(std) of the standard tube (0.99 if it was not calibrated itself).
    pub cp_std: f64,
    /// Identifier of the standard tube.
    #[serde(default, skip_serializing_if = "String::is_empty")]
    pub standard_id: String,
    /// Who calibrated, where, with what: free text.
    #[serde(default, skip_serializing_if = "String::is_empty")]
    pub performed_by: String,
    /// Free-text remarks (wind tunnel, velocity, probe assembly).
    #[serde(default, skip_serializing_if = "String::is_empty")]
    pub note: String,
    /// Unit both Δp columns were read in (only their ratio enters C_p).
    #[serde(default, skip_serializing_if = "String::is_empty")]
    pub dp_unit: String,
    /// Standard uncertainty u(C_p) (k = 1) of the coefficient, when the calibration states one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub u_cp: Option<f64>,
    /// Readings with side A facing the flow.
    pub side_a: Vec<CalibrationPair>,
    /// Readings with side B facing the flow.
    pub side_b: Vec<CalibrationPair>,
}

pub use crate::io::record::days_from_iso_date;

impl CalibrationRecord {
    /// A record of a calibration, checked (date format, readings, coefficient).
    pub fn new(probe_id: &str, date: &str, calibration: &STypeCalibration) -> Result<Self> {
        let r = Self {
            format: RECORD_FORMAT.into(),
            version: RECORD_VERSION,
            probe_id: probe_id.trim().into(),
            date: date.trim().into(),
            cp_std: calibration.cp_std,
            standard_id: String::new(),
            performed_by: String::new(),
            note: String::new(),
            dp_unit: String::new(),
            u_cp: None,
            side_a: calibration.side_a.clone(),
            side_b: calibration.side_b.clone(),
        };
        r.validate()?;
        Ok(r)
    }

    /// Checks the fields a file may get wrong and recomputes the calibration.
    pub fn calibration(&self) -> Result<STypeCalibration> {
        self.validate()?;
        STypeCalibration::new(self.cp_std, self.side_a.clone(), self.side_b.clone())
    }

    fn validate(&self) -> Result<()> {
        Header { format: &self.format, version: self.version, id: &self.probe_id, date: &self.date }.check(
            CONTEXT,
            RECORD_FORMAT,
            RECORD_VERSION,
        )?;
        if let Some(u) = self.u_cp {
            finite(CONTEXT, "u_cp", u)?;
            within(CONTEXT, "u_cp (standard uncertainty of C_p)", u, "", 0.0, 0.2)?;
        }
        Ok(())
    }

    /// Reads a record from TOML text; `origin` (a path) prefixes every message.
    pub fn from_toml(text: &str, origin: &str) -> Result<Self> {
        let r: Self = toml::from_str(text).map_err(|e| Error::File {
            path: origin.into(),
            message: e.to_string().trim_end().replace('\n', "\n  "),
        })?;
        r.validate().map_err(|e| Error::File { path: origin.into(), message: e.to_string() })?;
        r.calibration().map_err(|e| Error::File { path: origin.into(), message: e.to_string() })?;
        Ok(r)
    }

    /// The record as TOML text, with a header comment of the derived figures.
    pub fn to_toml(&self) -> Result<String> {
        let c = self.calibration()?;
        let mut head = format!(
            "S-type pitot calibration record (Stagna format {RECORD_FORMAT}, version {RECORD_VERSION}).\n\
             Figures below are recomputed from the readings whenever the file is loaded:\n  \
             C_p(A) = {:.4}, C_p(B) = {:.4}, C_p = {:.4}\n",
            c.cp_a,
            c.cp_b,
            c.cp()
        );
        for k in &c.checks {
            head.push_str(&format!("  {k}\n"));
        }
        record::to_toml(self, &head, CONTEXT)
    }

    /// Warnings every result that uses this calibration must carry: failed acceptance
    /// checks, and an age beyond `max_age_days` (when given) on the day `today_days`
    /// (days since 1970-01-01).
    pub fn warnings(&self, today_days: i64, max_age_days: Option<i64>) -> Vec<Warning> {
        let mut w = Vec::new();
        match self.calibration() {
            Ok(c) => {
                for k in c.checks.iter().filter(|k| !k.pass) {
                    w.push(Warning::new(
                        "calibration-check",
                        format!(
                            "calibration of {} ({}) fails a Method 2 acceptance check: {k}",
                            self.probe_id, self.date
                        ),
                    ));
                }
            }
            Err(e) => w.push(Warning::new("calibration-check", format!("calibration of {}: {e}", self.probe_id))),
        }
        if let (Some(max), Some(d)) = (max_age_days, days_from_iso_date(&self.date)) {
            let age = today_days - d;
            if age > max {
                w.push(Warning::new(
                    "calibration-age",
                    format!(
                        "calibration of {} is {age} days old ({}), older than the {max}-day limit set",
                        self.probe_id, self.date
                    ),
                ));
            } else if age < 0 {
                w.push(Warning::new(
                    "calibration-age",
                    format!("calibration of {} is dated {} days in the future ({})", self.probe_id, -age, self.date),
                ));
            }
        }
        w
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pair(a: f64, b: f64) -> CalibrationPair {
        CalibrationPair { dp_std: a, dp_s: b }
    }

    // Hand calculation written out (eq. 2-2 as recalled; check-values.md §4.2 example
    // C_p(std) 0.99, Δp_std 12.0, Δp_s 16.8 → 0.8367):
    // side A: 0.99·√(12.0/16.8) = 0.836 703; 0.99·√(10.0/14.1) = 0.833 730; 0.99·√(15.0/21.0) = 0.836 703
    // mean 0.835 712, σ_A = (0.000 991 + 0.001 982 + 0.000 991)/3 = 0.001 321 (arithmetic checked with
    // Python 3.11 math.sqrt).
    #[test]
    fn hand_calculation() {
        let c = STypeCalibration::new(
            0.99,
            vec![pair(12.0, 16.8), pair(10.0, 14.1), pair(15.0, 21.0)],
            vec![pair(12.0, 17.0), pair(10.0, 14.0), pair(15.0, 21.2)],
        )
        .unwrap();
        assert!((c.cp_a_points[0] - 0.836_703).abs() < 1e-6);
        assert!((c.cp_a_points[1] - 0.833_730).abs() < 1e-6);
        assert!((c.cp_a - 0.835_712).abs() < 1e-6);
        assert!((c.sigma_a - 0.001_321).abs() < 1e-6);
        assert!(c.passed(), "{:?}", c.checks);
    }

    // Both sides of each limit (0.01): a side whose readings scatter by ±0.02 fails σ;
    // sides 0.012 apart fail the difference check, 0.008 apart pass it.
    #[test]
    fn limits_on_both_sides() {
        let cp_pair = |cp: f64| pair((cp / 0.99_f64).powi(2) * 10.0, 10.0);
        let scatter =
            STypeCalibration::new(0.99, vec![cp_pair(0.82), cp_pair(0.86), cp_pair(0.84)], vec![cp_pair(0.84); 3])
                .unwrap();
        assert!((scatter.sigma_a - 0.04 / 3.0).abs() < 1e-9);
        assert!(!scatter.checks[0].pass && scatter.checks[1].pass);
        let apart = STypeCalibration::new(0.99, vec![cp_pair(0.840); 3], vec![cp_pair(0.852); 3]).unwrap();
        assert!(!apart.checks[2].pass);
        let close = STypeCalibration::new(0.99, vec![cp_pair(0.840); 3], vec![cp_pair(0.848); 3]).unwrap();
        assert!(close.passed());
        assert!((close.cp() - 0.844).abs() < 1e-9);
    }

    #[test]
    fn bad_inputs() {
        let e = STypeCalibration::new(0.99, vec![pair(12.0, 16.8); 2], vec![pair(12.0, 16.8); 3]).unwrap_err();
        assert!(e.to_string().contains("side A has 2 reading(s)"), "{e}");
        let e = STypeCalibration::new(0.99, vec![pair(12.0, -1.0); 3], vec![pair(12.0, 16.8); 3]).unwrap_err();
        assert!(e.to_string().contains("side A, reading 1") && e.to_string().contains("S-type"), "{e}");
        assert!(STypeCalibration::new(1.5, vec![pair(1.0, 1.0); 3], vec![pair(1.0, 1.0); 3]).is_err());
    }

    #[test]
    fn record_round_trip_and_errors() {
        let c = STypeCalibration::new(0.99, vec![pair(12.0, 16.8); 3], vec![pair(12.0, 16.9); 3]).unwrap();
        let mut r = CalibrationRecord::new("SP-07", "2026-10-14", &c).unwrap();
        r.u_cp = Some(0.004);
        let text = r.to_toml().unwrap();
        assert!(text.contains("C_p(A) = 0.8367"), "{text}");
        let back = CalibrationRecord::from_toml(&text, "sp07.toml").unwrap();
        assert_eq!(back, r);
        // unknown key, with file and line
        let bad = text.replace("probe_id", "probe_name");
        let e = CalibrationRecord::from_toml(&bad, "sp07.toml").unwrap_err().to_string();
        assert!(e.starts_with("sp07.toml: ") && e.contains("line") && e.contains("probe_name"), "{e}");
        // future version
        let e = CalibrationRecord::from_toml(&text.replace("version = 1", "version = 9"), "f.toml").unwrap_err();
        assert!(e.to_string().contains("newer Stagna"), "{e}");
        // bad date
        let e = CalibrationRecord::from_toml(&text.replace("2026-10-14", "2026-13-01"), "f.toml").unwrap_err();
        assert!(e.to_string().contains("YYYY-MM-DD"), "{e}");
        // truncated file
        let e = CalibrationRecord::from_toml(&text[..text.len() / 2], "f.toml").unwrap_err();
        assert!(e.to_string().starts_with("f.toml: "), "{e}");
    }

    #[test]
    fn dates_and_age_warnings() {
        let c = STypeCalibration::new(0.99, vec![pair(12.0, 16.8); 3], vec![pair(12.0, 16.9); 3]).unwrap();
        let r = CalibrationRecord::new("SP-07", "2026-06-01", &c).unwrap();
        let today = days_from_iso_date("2026-12-03").unwrap();
        assert!(r.warnings(today, Some(365)).is_empty());
        let w = r.warnings(today, Some(90));
        assert_eq!(w.len(), 1);
        assert!(w[0].message.contains("185 days old"), "{}", w[0].message);
    }
}
