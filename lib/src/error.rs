//! Typed errors and non-fatal warnings of the domain library.
//!
//! Every message names the object, the parameter, the value and its unit, so
//! that a script front end can show it as is (with position and caret added).

use std::fmt;

/// Result alias for the library.
pub type Result<T, E = Error> = std::result::Result<T, E>;

/// Everything the domain library can refuse.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum Error {
    /// A number that must be finite was NaN or infinite.
    #[error("{context}: {param} must be a finite number, got {value}")]
    NotFinite {
        /// Object or function that refused the value.
        context: &'static str,
        /// Parameter name.
        param: &'static str,
        /// The offending value as typed.
        value: f64,
    },
    /// A finite number outside the range the parameter allows.
    #[error("{context}: {param} must be {allowed}, got {}", with_unit(*value, unit))]
    OutOfRange {
        /// Object or function that refused the value.
        context: &'static str,
        /// Parameter name.
        param: &'static str,
        /// The offending value, in `unit`.
        value: f64,
        /// Unit of `value` and of `allowed`.
        unit: &'static str,
        /// Human description of the allowed range, e.g. "in (0, 90] °".
        allowed: String,
    },
    /// A model asked for outside the range where it is defined (not merely
    /// less accurate: that is a [`Warning`]).
    #[error("{model}: {param} = {} is outside the range where it is defined ({range}){hint}", with_unit(*value, unit))]
    OutsideModel {
        /// The formulation, e.g. "IAPWS-IF97 region 1".
        model: &'static str,
        /// Parameter name.
        param: &'static str,
        /// The offending value, in `unit`.
        value: f64,
        /// Unit of `value` and `range`.
        unit: &'static str,
        /// The defined range.
        range: &'static str,
        /// Optional advice, starting with "; ".
        hint: &'static str,
    },
    /// A manometer whose gauge liquid is not on the right side of the working
    /// fluid in density.
    #[error(
        "manometer: gauge liquid density must {relation} the working fluid's ({working:.4} kg/m³), got {gauge:.4} kg/m³{hint}"
    )]
    DensityOrder {
        /// "exceed" for a U-tube, "be below" for an inverted U-tube.
        relation: &'static str,
        /// Gauge-liquid density, kg/m³.
        gauge: f64,
        /// Working-fluid density, kg/m³.
        working: f64,
        /// Optional advice.
        hint: &'static str,
    },
    /// A unit string that could not be read.
    #[error("unit '{input}': {reason}")]
    UnitSyntax {
        /// The full unit string.
        input: String,
        /// What is wrong and, where possible, what was meant.
        reason: String,
    },
    /// Two quantities or a quantity and a unit of different dimensions.
    #[error("dimension mismatch in {operation}: {left} vs {right}")]
    DimensionMismatch {
        /// What was being done ("conversion", "addition", ...).
        operation: String,
        /// Dimension (or unit) on the left.
        left: String,
        /// Dimension (or unit) on the right.
        right: String,
    },
    /// An error in one row of a whole-column computation (rows counted from 1).
    #[error("row {row}: {source}")]
    Row {
        /// Row number, counted from 1 as in a spreadsheet.
        row: usize,
        /// What went wrong in that row.
        source: Box<Error>,
    },
    /// A file that could not be read or written.
    #[error("{path}: {message}")]
    File {
        /// The file's path as given.
        path: String,
        /// What went wrong (missing, malformed, not writable, ...).
        message: String,
    },
    /// A table column that is missing or holds the wrong kind of data.
    #[error("column '{column}': {message}")]
    Column {
        /// Column name.
        column: String,
        /// What is wrong, with the available columns where useful.
        message: String,
    },
    /// Arithmetic whose result is no usable quantity: not finite (division by zero,
    /// overflow) or a dimension exponent out of range.
    #[error("{operation}: {message}")]
    Arithmetic {
        /// The operation as written, e.g. "1 m / 0".
        operation: String,
        /// What went wrong and what to do.
        message: String,
    },
    /// A long computation stopped on request (an interrupt from the user).
    #[error("{context}: interrupted")]
    Interrupted {
        /// What was stopped.
        context: &'static str,
    },
    /// Inputs that are individually valid but do not fit together.
    #[error("{context}: {message}")]
    Inconsistent {
        /// Object or function.
        context: &'static str,
        /// What does not fit.
        message: String,
    },
}

impl Error {
    /// Wraps the error as happening in the row with zero-based `index`.
    pub fn at_row(self, index: usize) -> Self {
        Error::Row { row: index + 1, source: Box::new(self) }
    }
}

/// Checks that `value` is finite, naming the parameter otherwise.
pub(crate) fn finite(context: &'static str, param: &'static str, value: f64) -> Result<f64> {
    if value.is_finite() { Ok(value) } else { Err(Error::NotFinite { context, param, value }) }
}

/// Checks that `value` is finite and strictly positive.
pub(crate) fn positive(context: &'static str, param: &'static str, value: f64, unit: &'static str) -> Result<f64> {
    finite(context, param, value)?;
    if value > 0.0 {
        Ok(value)
    } else {
        Err(Error::OutOfRange { context, param, value, unit, allowed: "greater than 0".into() })
    }
}

/// Checks that `value` is finite and within `[lo, hi]`.
pub(crate) fn within(
    context: &'static str,
    param: &'static str,
    value: f64,
    unit: &'static str,
    lo: f64,
    hi: f64,
) -> Result<f64> {
    finite(context, param, value)?;
    if (lo..=hi).contains(&value) {
        Ok(value)
    } else {
        Err(Error::OutOfRange { context, param, value, unit, allowed: format!("in [{lo}, {hi}]") })
    }
}

/// A non-fatal remark attached to a result: the value was computed, but the
/// user should know something about how far to trust it.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Warning {
    /// Short machine-friendly kind, e.g. `"outside-validity"`, `"low-velocity"`.
    pub kind: &'static str,
    /// The full sentence shown to the user.
    pub message: String,
}

impl Warning {
    pub(crate) fn new(kind: &'static str, message: impl Into<String>) -> Self {
        Self { kind, message: message.into() }
    }
}

impl fmt::Display for Warning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "warning ({}): {}", self.kind, self.message)
    }
}

/// Cuts a long message in the middle, saying how much was left out.
pub fn shorten(message: &str, max: usize) -> String {
    if message.chars().count() <= max {
        return message.to_string();
    }
    let head: String = message.chars().take(max * 2 / 3).collect();
    let tail: String = message.chars().rev().take(max / 3).collect::<Vec<_>>().into_iter().rev().collect();
    let left = message.chars().count() - head.chars().count() - tail.chars().count();
    format!("{head} … ({left} characters left out) … {tail}")
}

/// A value as printed in messages: six significant digits at most, then its unit.
fn with_unit(value: f64, unit: &str) -> String {
    let v = crate::units::quantity::format_number(value);
    if unit.is_empty() { v } else { format!("{v} {unit}") }
}
