//! Whole columns in scripts: a table column as values in SI with its dimension;
//! arithmetic, unit conversion and statistics run in Rust over the whole column.

use polars::prelude::DataType;
use rhai::{Array, Dynamic, NativeCallContext};
use stagna::*;

use super::tables::{Tbl, perr};
use super::*;
use crate::catalog::Doc;

fn col_binop(a: &Col, b: &Col, op: char) -> Res<Col> {
    if a.si.len() != b.si.len() {
        return Err(rt(format!(
            "columns '{}' ({} rows) and '{}' ({} rows) differ in length",
            a.name,
            a.si.len(),
            b.name,
            b.si.len()
        )));
    }
    let (qa, qb) = (
        Quantity { si: 1.0, dimension: a.dimension, absolute_temperature: a.absolute_temperature },
        Quantity { si: 1.0, dimension: b.dimension, absolute_temperature: b.absolute_temperature },
    );
    let (dim, abs_t) = match op {
        '+' => {
            let q = lib(qa.try_add(qb))?;
            (q.dimension, q.absolute_temperature)
        }
        '-' => {
            let q = lib(qa.try_sub(qb))?;
            (q.dimension, q.absolute_temperature)
        }
        '*' => (lib(qa.try_mul(qb))?.dimension, false),
        _ => (lib(qa.try_div(qb))?.dimension, false),
    };
    let v: Vec<f64> =
        a.si.iter()
            .zip(b.si.iter())
            .map(|(x, y)| match op {
                '+' => x + y,
                '-' => x - y,
                '*' => x * y,
                _ => x / y,
            })
            .collect();
    finite_rows(&v, &a.si, &b.si, || format!("'{}' {op} '{}'", a.name, b.name))?;
    let unit = if matches!(op, '+' | '-') && abs_t == a.absolute_temperature { a.unit.clone() } else { None };
    Ok(Col { name: a.name.clone(), si: std::sync::Arc::new(v), dimension: dim, absolute_temperature: abs_t, unit })
}

/// Refuses a result column with a non-finite value where the inputs were finite (a
/// division by zero or an overflow), naming the first such row (counted from 1).
/// Missing inputs (NaN) stay missing and are left to the functions that read them.
fn finite_rows(out: &[f64], a: &[f64], b: &[f64], op: impl Fn() -> String) -> Res<()> {
    let at = |c: &[f64], i: usize| if c.len() == 1 { c[0] } else { c[i] };
    if let Some(i) = (0..out.len()).find(|&i| !out[i].is_finite() && at(a, i).is_finite() && at(b, i).is_finite()) {
        return Err(rt(format!("row {}: {} is not a finite number (a division by zero or an overflow)", i + 1, op())));
    }
    Ok(())
}

fn col_scale(a: &Col, k: f64, q: Option<&Q>, divide: bool, q_first: bool) -> Res<Col> {
    let (dim, kk) = match q {
        Some(q) => {
            if q.q.absolute_temperature || a.absolute_temperature {
                return Err(rt("cannot multiply or divide absolute temperatures; use differences or .si"));
            }
            let (ad, qd) = (a.dimension, q.q.dimension);
            let d =
                if divide { if q_first { qd.checked_div(ad) } else { ad.checked_div(qd) } } else { ad.checked_mul(qd) }
                    .ok_or_else(|| {
                        rt(format!("column '{}': a dimension exponent would leave the range ±127", a.name))
                    })?;
            (d, q.q.si)
        }
        None => {
            if a.absolute_temperature {
                return Err(rt("cannot scale an absolute temperature column"));
            }
            (a.dimension, k)
        }
    };
    let v: Vec<f64> =
        a.si.iter()
            .map(|x| match (divide, q_first) {
                (false, _) => x * kk,
                (true, false) => x / kk,
                (true, true) => kk / x,
            })
            .collect();
    finite_rows(&v, &a.si, &[kk], || {
        let k = q.map_or_else(|| format_number(kk), |q| q.show(&DisplayUnits::si()));
        match (divide, q_first) {
            (false, _) => format!("'{}' × {k}", a.name),
            (true, false) => format!("'{}' / {k}", a.name),
            (true, true) => format!("{k} / '{}'", a.name),
        }
    })?;
    let unit = if q.is_none() && !divide || q.is_none() && !q_first { a.unit.clone() } else { None };
    Ok(Col { name: a.name.clone(), si: std::sync::Arc::new(v), dimension: dim, absolute_temperature: false, unit })
}

fn col_stat(c: &Col, f: impl Fn(&[f64]) -> f64) -> Q {
    let v = f(&c.si);
    let q = Quantity { si: v, dimension: c.dimension, absolute_temperature: c.absolute_temperature };
    Q { q, unit: c.unit.clone() }
}

/// Registers the package.
pub fn register(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.engine.register_type_with_name::<Col>("Column");
    r.group("Columns");
    arithmetic(r, prefs);
    conversions(r, prefs);
    statistics(r, prefs);
}

/// Showing columns, and arithmetic between columns and quantities.
fn arithmetic(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    let p = prefs.clone();
    r.engine.register_fn("to_string", move |c: &mut Col| c.show(&super::display_of(&p)));
    let p = prefs.clone();
    r.engine.register_fn("to_debug", move |c: &mut Col| c.show(&super::display_of(&p)));
    let e = &mut *r.engine;
    for op in ['+', '-', '*', '/'] {
        let s = op.to_string();
        e.register_fn(s.as_str(), move |a: Col, b: Col| col_binop(&a, &b, op));
        if op == '*' || op == '/' {
            let div = op == '/';
            e.register_fn(s.as_str(), move |a: Col, k: f64| col_scale(&a, k, None, div, false));
            e.register_fn(s.as_str(), move |a: Col, k: i64| col_scale(&a, k as f64, None, div, false));
            e.register_fn(s.as_str(), move |a: Col, q: Q| col_scale(&a, 1.0, Some(&q), div, false));
            e.register_fn(s.as_str(), move |k: f64, a: Col| col_scale(&a, k, None, div, true));
            e.register_fn(s.as_str(), move |q: Q, a: Col| col_scale(&a, 1.0, Some(&q), div, true));
        } else {
            e.register_fn(s.as_str(), move |a: Col, q: Q| -> Res<Col> {
                let n = a.si.len();
                let b = Col {
                    name: a.name.clone(),
                    si: std::sync::Arc::new(vec![q.q.si; n]),
                    dimension: q.q.dimension,
                    absolute_temperature: q.q.absolute_temperature,
                    unit: q.unit.clone(),
                };
                col_binop(&a, &b, op)
            });
        }
    }
}

/// Values in a unit, single rows, length.
fn conversions(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.method(
        "Column",
        "to",
        &Doc::new("column.to(unit) -> Column", "The same column shown (and written) in another compatible unit.")
            .example("let t = table_from(#{h: [12.5, 14.0]}).unit(\"h\", \"mm\");\nprint(t[\"h\"].to(\"in\"));")
            .source("unit factors: NIST SP 811 (2008) Appendix B.8"),
        |c: &mut Col, u: &str| -> Res<Col> {
            lib(c.values_in(u))?;
            let mut out = c.clone();
            out.unit = Some(u.into());
            Ok(out)
        },
    );
    r.method(
        "Column",
        "values",
        &Doc::new(
            "column.values() -> array",
            "The values as numbers in the column's display unit (for small columns; domain work stays in columns).",
        )
        .example("print(table_from(#{h: [1.0, 2.0]}).unit(\"h\", \"mm\")[\"h\"].values());")
        .source("common practice, no source"),
        {
            let p = prefs.clone();
            move |c: &mut Col| -> Res<Array> {
                let prefs = super::prefs(&p);
                if c.si.len() > prefs.max_array {
                    return Err(rt(format!(
                        "column '{}'.values(): {} rows is past the session's array limit of {} (--max-array); work on the column itself, or take .head(n) of the table first",
                        c.name,
                        c.si.len(),
                        prefs.max_array
                    )));
                }
                let v = match c.out_unit(&prefs.display) {
                    Some(u) => lib(c.values_in(&u))?,
                    None => c.si.to_vec(),
                };
                Ok(v.into_iter().map(Dynamic::from).collect())
            }
        },
    );
    r.method(
        "Column",
        "at",
        &Doc::new(
            "column.at(row) -> Quantity",
            "One value (rows counted from 0) as a quantity, for worked steps of a single reading.",
        )
        .example("let t = table_from(#{h: [41.5, 42.0]}).unit(\"h\", \"mm\");\nprint(t[\"h\"].at(0));")
        .source("common practice, no source"),
        |c: &mut Col, i: i64| -> Res<Q> {
            let v = *c
                .si
                .get(usize::try_from(i).unwrap_or(usize::MAX))
                .ok_or_else(|| rt(format!("row {i} of a column of {} rows", c.si.len())))?;
            Ok(Q {
                q: Quantity { si: v, dimension: c.dimension, absolute_temperature: c.absolute_temperature },
                unit: c.unit.clone(),
            })
        },
    );
    r.property(
        "Column",
        "len",
        &Doc::new("column.len -> integer", "Number of rows.")
            .example("print(table_from(#{h: [1.0, 2.0]})[\"h\"].len);")
            .source("common practice, no source"),
        |c: &mut Col| c.si.len() as i64,
    );
}

/// Statistics of a column and distinct values of a table column.
fn statistics(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    type Stat = fn(&[f64]) -> f64;
    let stats: [(&str, &str, Stat); 5] = [
        ("mean", "Arithmetic mean, as a quantity.", |v| v.iter().sum::<f64>() / v.len() as f64),
        ("sum", "Sum, as a quantity (e.g. the flows of several branches).", |v| v.iter().sum::<f64>()),
        ("min", "Smallest value, as a quantity.", |v| v.iter().copied().fold(f64::INFINITY, f64::min)),
        ("max", "Largest value, as a quantity.", |v| v.iter().copied().fold(f64::NEG_INFINITY, f64::max)),
        ("std", "Sample standard deviation (n − 1), as a quantity.", |v| {
            let n = v.len() as f64;
            let m = v.iter().sum::<f64>() / n;
            (v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (n - 1.0)).sqrt()
        }),
    ];
    for (name, summary, f) in stats {
        r.method(
            "Column",
            name,
            &Doc::new(&format!("column.{name}() -> Quantity"), summary)
                .example(&format!(
                    "let t = table_from(#{{v: [1.0, 2.0, 4.0]}}).unit(\"v\", \"m/s\");\nprint(t[\"v\"].{name}());"
                ))
                .source("common practice, no source"),
            move |c: &mut Col| -> Res<Q> {
                if c.si.is_empty() {
                    return Err(rt(format!("{name} of an empty column")));
                }
                if let Some(i) = c.si.iter().position(|v| !v.is_finite()) {
                    let n = c.si.iter().filter(|v| !v.is_finite()).count();
                    return Err(rt(format!(
                        "column '{}': row {} is empty or not a number ({n} of {} rows are); to leave such rows out, write .drop_missing().{name}()",
                        c.name,
                        i + 1,
                        c.si.len()
                    )));
                }
                if name == "std" && c.si.len() < 2 {
                    return Err(rt(format!(
                        "column '{}': a standard deviation needs at least 2 values, the column has 1",
                        c.name
                    )));
                }
                let mut q = col_stat(c, f);
                if name == "std" || name == "sum" {
                    q.q.absolute_temperature = false;
                    if c.absolute_temperature {
                        q.unit = None;
                    }
                }
                Ok(q)
            },
        );
    }
    r.method(
        "Column",
        "drop_missing",
        &Doc::new("column.drop_missing() -> Column", "The column without its empty or not-a-number rows (as CSV files give empty cells); says on the error stream how many rows were left out, so that nothing is skipped silently.")
            .example("let t = table_from(#{v: [1.0, 2.0, 4.0]}).unit(\"v\", \"m/s\");\nprint(t[\"v\"].drop_missing().mean());")
            .source("common practice, no source"),
        |ctx: NativeCallContext, c: &mut Col| -> Res<Col> {
            let kept: Vec<f64> = c.si.iter().copied().filter(|v| v.is_finite()).collect();
            let dropped = c.si.len() - kept.len();
            if dropped > 0 {
                let msg = format!("column '{}': {dropped} of {} rows empty or not a number, left out", c.name, c.si.len());
                ctx.call_native_fn::<()>("eprint", (rhai::ImmutableString::from(msg),))?;
            }
            Ok(Col { si: std::sync::Arc::new(kept), ..c.clone() })
        },
    );
    r.method(
        "Column",
        "mean_of_sqrt",
        &Doc::new("column.mean_of_sqrt(unit) -> number", "Mean of the square roots of the values expressed in `unit` (the average √Δp of US EPA Method 2, with Δp in mm H₂O or in. H₂O), not the root of the mean. Negative values are refused with their row.")
            .example("let t = table_from(#{dp: [100.0, 121.0]}).unit(\"dp\", \"Pa\");\nprint(t[\"dp\"].mean_of_sqrt(\"mmH2O\"));")
            .source("US EPA Method 2 (40 CFR 60 App. A-1) Eq. 2-7"),
        |c: &mut Col, unit: &str| -> Res<f64> { lib(stagna::methods::us_epa::mean_sqrt_dp(&lib(c.values_in(unit))?)) },
    );
    let p = prefs.clone();
    r.method(
        "Column",
        "sqrt_mean",
        &Doc::new("column.sqrt_mean(unit) -> number", "Deprecated spelling of column.mean_of_sqrt(unit) (the name read as the root of the mean); works for this release, with a warning.")
            .example("let t = table_from(#{dp: [100.0, 121.0]}).unit(\"dp\", \"Pa\");\nprint(t[\"dp\"].mean_of_sqrt(\"mmH2O\"));")
            .source("US EPA Method 2 (40 CFR 60 App. A-1) Eq. 2-7"),
        move |c: &mut Col, unit: &str| -> Res<f64> {
            super::warn_once(&p, "column.sqrt_mean is deprecated and will be removed in the next release; write column.mean_of_sqrt (the mean of the square roots)");
            lib(stagna::methods::us_epa::mean_sqrt_dp(&lib(c.values_in(unit))?))
        },
    );
    r.method(
        "Table",
        "distinct",
        &Doc::new(
            "t.distinct(column) -> array",
            "The distinct values of a column as text, in first-seen order (e.g. the traverses of a campaign).",
        )
        .example("print(table_from(#{tr: [\"a\", \"a\", \"b\"]}).distinct(\"tr\"));")
        .source("common practice, no source"),
        |t: &mut Tbl, c: &str| -> Res<Array> {
            let s =
                t.df.column(c)
                    .map_err(|_| rt(format!("column '{c}': no such column")))?
                    .cast(&DataType::String)
                    .map_err(perr)?;
            let ca = s.str().map_err(perr)?;
            let mut seen: Vec<String> = Vec::new();
            for v in ca.iter() {
                let v = v.unwrap_or("").to_string();
                if !seen.contains(&v) {
                    seen.push(v);
                }
            }
            Ok(seen.into_iter().map(Dynamic::from).collect())
        },
    );
}
