//! One acceptance check of a US EPA method, printed with its number, its limit and
//! where the limit comes from.
//!
//! A check whose clause could not be read in the published text for this release
//! says so plainly when printed ("from memory, unverified"), so that no printed
//! verdict leans on a limit nobody has checked.

use std::fmt;

/// Whether a check's limit was read in the published method text.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Citation {
    /// Read in the published text (40 CFR 60 Appendix A); clause as cited.
    Verified,
    /// Recalled, not yet read in the published text for this release.
    FromMemory,
    /// Follows from geometry or physics by derivation, not from a method's text.
    Derived,
}

/// One acceptance check with its number.
#[derive(Debug, Clone, PartialEq)]
pub struct MethodCheck {
    /// What is checked, in words, with the method's symbol where it has one.
    pub name: String,
    /// The checked value.
    pub value: f64,
    /// Unit of `value` and `limit` ("" for pure numbers).
    pub unit: &'static str,
    /// Decimals to print the value with.
    pub decimals: usize,
    /// The limit as text, e.g. "≤ 0.01".
    pub limit: String,
    /// Whether the value meets the limit.
    pub pass: bool,
    /// Method, clause and equation.
    pub source: &'static str,
    /// Whether the clause was read in the published text.
    pub citation: Citation,
}

impl MethodCheck {
    /// "pass" or "FAIL".
    pub fn verdict(&self) -> &'static str {
        if self.pass { "pass" } else { "FAIL" }
    }

    /// The value with its unit at the check's precision.
    pub fn value_text(&self) -> String {
        let v = format!("{:.*}", self.decimals, self.value);
        if self.unit.is_empty() { v } else { format!("{v} {}", self.unit) }
    }

    /// The source with the verification status spelled out.
    pub fn source_text(&self) -> String {
        match self.citation {
            Citation::Verified => self.source.to_string(),
            Citation::FromMemory => format!("{} (from memory, unverified)", self.source),
            Citation::Derived => format!("{} (derived)", self.source),
        }
    }
}

impl fmt::Display for MethodCheck {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "{:<4}  {}: {} (limit {}; {})",
            self.verdict(),
            self.name,
            self.value_text(),
            self.limit,
            self.source_text()
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn unverified_limits_say_so() {
        let c = MethodCheck {
            name: "mean |yaw|".into(),
            value: 12.345,
            unit: "°",
            decimals: 1,
            limit: "≤ 20 °".into(),
            pass: true,
            source: "US EPA Method 1 §11.4",
            citation: Citation::FromMemory,
        };
        assert_eq!(
            c.to_string(),
            "pass  mean |yaw|: 12.3 ° (limit ≤ 20 °; US EPA Method 1 §11.4 (from memory, unverified))"
        );
    }
}
