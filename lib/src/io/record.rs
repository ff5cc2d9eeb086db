//! Record files: Stagna's own versioned TOML formats for the records behind a
//! coefficient (calibrations), read with the file, line and key in every error.
//!
//! Every record starts with `format` (its name) and `version`; a version newer than this
//! build reads is refused rather than half-read. Dates are calendar dates `YYYY-MM-DD`.
//! The formats are documented in `docs/records.md`.

use serde::de::DeserializeOwned;

use crate::error::{Error, Result};

/// The identity of a record file: its who-and-when fields checked alike in every format.
#[derive(Debug, Clone, Copy)]
pub struct Header<'a> {
    /// Value of the `format` key.
    pub format: &'a str,
    /// Value of the `version` key.
    pub version: u32,
    /// Identifier of the instrument.
    pub id: &'a str,
    /// Date, `YYYY-MM-DD`.
    pub date: &'a str,
}

impl Header<'_> {
    /// Checks the header against the expected format and the newest version read.
    pub fn check(&self, context: &'static str, expected: &str, newest: u32) -> Result<()> {
        let err = |message: String| Err(Error::Inconsistent { context, message });
        if self.format != expected {
            return err(format!("format is '{}', expected '{expected}'", self.format));
        }
        if self.version > newest {
            return err(format!(
                "record version {} was written by a newer Stagna (this one reads up to {newest}); update Stagna",
                self.version
            ));
        }
        if self.version == 0 {
            return err("version must be 1 or more".into());
        }
        if self.id.trim().is_empty() {
            return err("the instrument's identifier is empty: name the instrument".into());
        }
        if days_from_iso_date(self.date).is_none() {
            return err(format!("date '{}' is not a calendar date written YYYY-MM-DD", self.date));
        }
        Ok(())
    }
}

/// Parses a record's TOML text; `origin` (the file's path) prefixes every message, and
/// syntax, type and unknown-key errors carry the line and the key.
pub fn from_toml<T: DeserializeOwned>(text: &str, origin: &str) -> Result<T> {
    toml::from_str(text)
        .map_err(|e| Error::File { path: origin.into(), message: e.to_string().trim_end().replace('\n', "\n  ") })
}

/// A record as TOML text behind a header comment.
pub fn to_toml<T: serde::Serialize>(record: &T, comment: &str, context: &'static str) -> Result<String> {
    let body = toml::to_string(record)
        .map_err(|e| Error::Inconsistent { context, message: format!("cannot write record: {e}") })?;
    let head: String = comment.lines().map(|l| format!("# {l}\n")).collect();
    Ok(format!("{head}\n{body}"))
}

/// A calendar date from `YYYY-MM-DD`, as days since 1970-01-01.
pub fn days_from_iso_date(s: &str) -> Option<i64> {
    let mut it = s.trim().splitn(3, '-');
    let y: i64 = it.next()?.parse().ok()?;
    let m: i64 = it.next()?.parse().ok()?;
    let d: i64 = it.next()?.parse().ok()?;
    let leap = (y % 4 == 0 && y % 100 != 0) || y % 400 == 0;
    let month_len = [31, if leap { 29 } else { 28 }, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31];
    if !(1..=12).contains(&m) || d < 1 || d > month_len[(m - 1) as usize] || !(1900..=9999).contains(&y) {
        return None;
    }
    // Days from civil (H. Hinnant's algorithm, public domain).
    let y = if m <= 2 { y - 1 } else { y };
    let era = y.div_euclid(400);
    let yoe = y - era * 400;
    let mp = (m + 9) % 12;
    let doy = (153 * mp + 2) / 5 + d - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    Some(era * 146_097 + doe - 719_468)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dates() {
        // Python 3.11: (date(2026,12,3) - date(1970,1,1)).days = 20790; 2024-02-29 → 19782.
        assert_eq!(days_from_iso_date("2026-12-03"), Some(20_790));
        assert_eq!(days_from_iso_date("1970-01-01"), Some(0));
        assert_eq!(days_from_iso_date("2024-02-29"), Some(19_782));
        assert_eq!(days_from_iso_date("2023-02-29"), None);
        assert_eq!(days_from_iso_date("14/10/2026"), None);
    }

    #[test]
    fn headers() {
        let h = |format, version, id, date| Header { format, version, id, date };
        assert!(h("x", 1, "P1", "2026-01-02").check("r", "x", 1).is_ok());
        assert!(h("y", 1, "P1", "2026-01-02").check("r", "x", 1).unwrap_err().to_string().contains("expected 'x'"));
        assert!(h("x", 2, "P1", "2026-01-02").check("r", "x", 1).unwrap_err().to_string().contains("newer Stagna"));
        assert!(h("x", 1, " ", "2026-01-02").check("r", "x", 1).is_err());
        assert!(h("x", 1, "P1", "2026-1-32").check("r", "x", 1).unwrap_err().to_string().contains("YYYY-MM-DD"));
    }
}
