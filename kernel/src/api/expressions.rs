//! Column expressions in scripts: polars expressions built with `col(...)` and
//! operators, run by polars over a table.

use polars::prelude::{DataType, Expr, RoundMode, col, lit};
use rhai::{Array, Dynamic};

use super::*;
use crate::catalog::Doc;

/// A column expression (polars), built in scripts and run by polars over the table.
#[derive(Debug, Clone)]
pub struct Ex(pub Expr);

pub(super) fn expr_of(d: &Dynamic, what: &str) -> Res<Expr> {
    if let Some(e) = d.clone().try_cast::<Ex>() {
        return Ok(e.0);
    }
    if let Ok(s) = d.clone().into_immutable_string() {
        return Ok(col(s.as_str()));
    }
    if let Ok(f) = d.as_float() {
        return Ok(lit(f));
    }
    if let Ok(i) = d.as_int() {
        return Ok(lit(i));
    }
    Err(rt(format!("{what}: expected a column expression (col(\"name\")) or a column name, got {}", describe(d))))
}

pub(super) fn exprs_of(d: &Dynamic, what: &str) -> Res<Vec<Expr>> {
    match d.clone().try_cast::<Array>() {
        Some(a) => a.iter().map(|x| expr_of(x, what)).collect(),
        None => Ok(vec![expr_of(d, what)?]),
    }
}

pub(super) fn names_of(d: &Dynamic, what: &str) -> Res<Vec<String>> {
    match d.clone().try_cast::<Array>() {
        Some(a) => a.iter().map(|x| text(x, what)).collect(),
        None => Ok(vec![text(d, what)?]),
    }
}

macro_rules! expr_binops {
    ($e:expr, $( $op:literal => $f:expr ),* $(,)?) => {{
        $(
            $e.register_fn($op, |a: Ex, b: Ex| Ex($f(a.0, b.0)));
            $e.register_fn($op, |a: Ex, b: f64| Ex($f(a.0, lit(b))));
            $e.register_fn($op, |a: Ex, b: i64| Ex($f(a.0, lit(b))));
            $e.register_fn($op, |a: f64, b: Ex| Ex($f(lit(a), b.0)));
            $e.register_fn($op, |a: i64, b: Ex| Ex($f(lit(a), b.0)));
        )*
    }};
}

/// Registers the package.
pub fn register(r: &mut Registrar<'_>, _prefs: &SharedPrefs) {
    r.engine.register_type_with_name::<Ex>("Expr");
    r.group("Column expressions");
    expressions(r);
}

/// Building expressions: col, lit, operators, functions.
fn expressions(r: &mut Registrar<'_>) {
    r.func(
        "col",
        &Doc::new("col(name) -> Expr", "A column expression: combine with + − × ÷, comparisons, & and |, and methods (sqrt, abs, mean, ...); run by polars over the table.")
            .example("let t = table_from(#{a: [1.0, 4.0, 9.0]});\nprint(t.with_column(\"r\", col(\"a\").sqrt() * 2));")
            .source("polars expressions"),
        |n: &str| Ex(col(n)),
    );
    r.func(
        "lit",
        &Doc::new("lit(value) -> Expr", "A constant as an expression: a number, or a text constant (never a column name; write col(\"name\") for a column).")
            .example("print(table_from(#{a: [1.0]}).with_column(\"k\", lit(2.5)).with_column(\"site\", lit(\"T1\")));")
            .source("polars expressions"),
        |d: Dynamic| -> Res<Ex> {
            if let Ok(s) = d.clone().into_immutable_string() {
                return Ok(Ex(lit(s.to_string())));
            }
            Ok(Ex(expr_of(&d, "lit")?))
        },
    );
    let e = &mut *r.engine;
    expr_binops!(e,
        "+" => |a: Expr, b: Expr| a + b,
        "-" => |a: Expr, b: Expr| a - b,
        "*" => |a: Expr, b: Expr| a * b,
        "/" => |a: Expr, b: Expr| a / b,
        ">" => |a: Expr, b: Expr| a.gt(b),
        ">=" => |a: Expr, b: Expr| a.gt_eq(b),
        "<" => |a: Expr, b: Expr| a.lt(b),
        "<=" => |a: Expr, b: Expr| a.lt_eq(b),
        "==" => |a: Expr, b: Expr| a.eq(b),
        "!=" => |a: Expr, b: Expr| a.neq(b),
    );
    e.register_fn("&", |a: Ex, b: Ex| Ex(a.0.and(b.0)));
    e.register_fn("|", |a: Ex, b: Ex| Ex(a.0.or(b.0)));
    e.register_fn("-", |a: Ex| Ex(lit(0.0) - a.0));
    e.register_fn("==", |a: Ex, b: &str| Ex(a.0.eq(lit(b.to_string()))));
    e.register_fn("!=", |a: Ex, b: &str| Ex(a.0.neq(lit(b.to_string()))));
    e.register_fn("to_string", |a: &mut Ex| format!("Expr: {}", a.0));
    type ExprFn = fn(Expr) -> Expr;
    let simple: [(&str, &str, ExprFn); 13] = [
        ("sqrt", "Square root of each value.", |x| x.sqrt()),
        ("abs", "Absolute value of each value.", |x| x.abs()),
        ("exp", "e to the power of each value.", |x| x.exp()),
        ("ln", "Natural logarithm of each value.", |x| x.log(lit(std::f64::consts::E))),
        ("mean", "Mean (an aggregate).", |x| x.mean()),
        ("sum", "Sum (an aggregate).", |x| x.sum()),
        ("min", "Minimum (an aggregate).", |x| x.min()),
        ("max", "Maximum (an aggregate).", |x| x.max()),
        ("std", "Sample standard deviation, n − 1 (an aggregate).", |x| x.std(1)),
        ("median", "Median (an aggregate).", |x| x.median()),
        ("count", "Number of non-null values (an aggregate).", |x| x.count()),
        ("first", "First value (an aggregate).", |x| x.first()),
        ("last", "Last value (an aggregate).", |x| x.last()),
    ];
    for (name, summary, f) in simple {
        r.method(
            "Expr",
            name,
            &Doc::new(&format!("expr.{name}() -> Expr"), summary)
                .example(&format!("let t = table_from(#{{g: [\"a\", \"a\"], v: [4.0, 9.0]}});\nprint(t.group_by(\"g\").agg([col(\"v\").{name}()]));"))
                .source("polars expressions"),
            move |x: &mut Ex| Ex(f(x.0.clone())),
        );
    }
    r.method(
        "Expr",
        "alias",
        &Doc::new("expr.alias(name) -> Expr", "Names the result column.")
            .example("print(table_from(#{a: [1.0]}).select([(col(\"a\") * 2).alias(\"b\")]));")
            .source("polars expressions"),
        |x: &mut Ex, n: &str| Ex(x.0.clone().alias(n)),
    );
    r.method(
        "Expr",
        "pow",
        &Doc::new("expr.pow(exponent) -> Expr", "Each value to a power.")
            .example("print(table_from(#{a: [2.0]}).with_column(\"c\", col(\"a\").pow(3)));")
            .source("polars expressions"),
        |x: &mut Ex, p: Dynamic| -> Res<Ex> { Ok(Ex(x.0.clone().pow(expr_of(&p, "pow")?))) },
    );
    r.method(
        "Expr",
        "round",
        &Doc::new("expr.round(decimals) -> Expr", "Rounded to a number of decimals (half to even).")
            .example("print(table_from(#{a: [2.345]}).with_column(\"r\", col(\"a\").round(2)));")
            .source("polars expressions"),
        |x: &mut Ex, d: i64| Ex(x.0.clone().round(d.clamp(0, 15) as u32, RoundMode::HalfToEven)),
    );
    r.method(
        "Expr",
        "not",
        &Doc::new("expr.not() -> Expr", "Logical negation of a condition.")
            .example("print(table_from(#{a: [1.0, 2.0]}).filter((col(\"a\") > 1).not()));")
            .source("polars expressions"),
        |x: &mut Ex| Ex(x.0.clone().not()),
    );
    r.method(
        "Expr",
        "float",
        &Doc::new("expr.float() -> Expr", "Cast to 64-bit float.")
            .example("print(table_from(#{a: [1, 2]}).with_column(\"a\", col(\"a\").float()));")
            .source("polars expressions"),
        |x: &mut Ex| Ex(x.0.clone().cast(DataType::Float64)),
    );
}
