//! Helpers shared by the whole-column kernels: length checks and broadcasting.
//!
//! Column kernels take `&[f64]` slices in SI units and write into a caller's
//! `&mut [f64]`, so a campaign of millions of rows is one pass with no
//! allocation. An input of length 1 is broadcast to every row.

use crate::error::{Error, Result};

/// Checks that every input has length 1 or `n` and the output has length `n`.
pub(crate) fn check_lengths(context: &'static str, n: usize, inputs: &[(&str, usize)], out: usize) -> Result<()> {
    for (name, len) in inputs {
        if *len != 1 && *len != n {
            return Err(Error::Inconsistent {
                context,
                message: format!("column '{name}' has {len} rows, expected 1 or {n}"),
            });
        }
    }
    if out != n {
        return Err(Error::Inconsistent { context, message: format!("output column has {out} rows, expected {n}") });
    }
    Ok(())
}

/// Value of a possibly broadcast column at `row`.
#[inline(always)]
pub(crate) fn at(col: &[f64], row: usize) -> f64 {
    if col.len() == 1 { col[0] } else { col[row] }
}
