//! Measurement uncertainty by the law of propagation (JCGM 100, the GUM):
//! inputs with their distributions, exact sensitivity coefficients by
//! forward-mode automatic differentiation, correlations, effective degrees of
//! freedom, expanded uncertainty, and the budget table. Monte Carlo
//! (JCGM 101) is in [`crate::uncertainty::monte_carlo`].
//!
//! # Formula
//! For y = f(x₁…x_N): c_i = ∂f/∂x_i at the best estimates (exact, by dual
//! numbers), u_c²(y) = Σ_i Σ_j c_i c_j u(x_i) u(x_j) r(x_i, x_j) (JCGM 100
//! eq. 13/16), ν_eff = u_c⁴ / Σ (c_i u_i)⁴/ν_i (Welch–Satterthwaite, G.2b),
//! U = k u_c with k = t_p(ν_eff) (G.3). Standard uncertainties: normal σ;
//! rectangular a/√3; triangular a/√6; Type A s/√n with ν = n − 1; a
//! certificate's U and k give U/k.
//!
//! # References
//! JCGM 100:2008 (GUM) §4–6 and Annex G; JCGM 101:2008 §6 for the distributions.

use std::fmt;
use std::ops::{Add, Div, Mul, Neg, Sub};
use std::sync::Arc;

use crate::error::{Error, Result, finite};

/// A number type the models are written over: `f64` for values, [`Dual`] for derivatives.
pub trait Real:
    Copy + Add<Output = Self> + Sub<Output = Self> + Mul<Output = Self> + Div<Output = Self> + Neg<Output = Self>
{
    /// A constant.
    fn constant(x: f64) -> Self;
    /// The value part.
    fn value(self) -> f64;
    /// Square root.
    fn sqrt(self) -> Self;
    /// Power with a constant exponent.
    fn powf(self, e: f64) -> Self;
    /// Natural logarithm.
    fn ln(self) -> Self;
    /// Exponential.
    fn exp(self) -> Self;
    /// Absolute value.
    fn abs(self) -> Self;
}

impl Real for f64 {
    fn constant(x: f64) -> Self {
        x
    }
    fn value(self) -> f64 {
        self
    }
    fn sqrt(self) -> Self {
        f64::sqrt(self)
    }
    fn powf(self, e: f64) -> Self {
        f64::powf(self, e)
    }
    fn ln(self) -> Self {
        f64::ln(self)
    }
    fn exp(self) -> Self {
        f64::exp(self)
    }
    fn abs(self) -> Self {
        f64::abs(self)
    }
}

/// A dual number v + d·ε (ε² = 0): carries one directional derivative exactly.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Dual {
    /// Value.
    pub v: f64,
    /// Derivative.
    pub d: f64,
}

impl Add for Dual {
    type Output = Self;
    fn add(self, o: Self) -> Self {
        Dual { v: self.v + o.v, d: self.d + o.d }
    }
}
impl Sub for Dual {
    type Output = Self;
    fn sub(self, o: Self) -> Self {
        Dual { v: self.v - o.v, d: self.d - o.d }
    }
}
impl Mul for Dual {
    type Output = Self;
    fn mul(self, o: Self) -> Self {
        Dual { v: self.v * o.v, d: self.d * o.v + self.v * o.d }
    }
}
impl Div for Dual {
    type Output = Self;
    fn div(self, o: Self) -> Self {
        Dual { v: self.v / o.v, d: (self.d * o.v - self.v * o.d) / (o.v * o.v) }
    }
}
impl Neg for Dual {
    type Output = Self;
    fn neg(self) -> Self {
        Dual { v: -self.v, d: -self.d }
    }
}

impl Real for Dual {
    fn constant(x: f64) -> Self {
        Dual { v: x, d: 0.0 }
    }
    fn value(self) -> f64 {
        self.v
    }
    fn sqrt(self) -> Self {
        let s = self.v.sqrt();
        Dual { v: s, d: self.d / (2.0 * s) }
    }
    fn powf(self, e: f64) -> Self {
        Dual { v: self.v.powf(e), d: e * self.v.powf(e - 1.0) * self.d }
    }
    fn ln(self) -> Self {
        Dual { v: self.v.ln(), d: self.d / self.v }
    }
    fn exp(self) -> Self {
        let e = self.v.exp();
        Dual { v: e, d: e * self.d }
    }
    fn abs(self) -> Self {
        if self.v < 0.0 { -self } else { self }
    }
}

/// A measurement model y = f(x).
pub trait Model: Sync {
    /// Evaluates the model at `x` (in the order of the inputs).
    fn eval<R: Real>(&self, x: &[R]) -> R;

    /// Evaluates the model for consecutive Monte Carlo trials: `rows` holds each trial's
    /// input values in turn (`y.len()` rows of equal length) and `y` receives the model
    /// values. The default calls [`Model::eval`] row by row. A model may override it to
    /// compute the same values, with the same operations in the same order, several
    /// trials at a time, so that the arithmetic vectorises across trials.
    fn eval_rows(&self, rows: &[f64], y: &mut [f64]) {
        if y.is_empty() {
            return;
        }
        let n = rows.len() / y.len();
        for (row, y) in rows.chunks_exact(n).zip(y) {
            *y = self.eval(row);
        }
    }
}

/// How an input's value is distributed about its best estimate.
#[derive(Debug, Clone, PartialEq)]
pub enum Distribution {
    /// Normal with standard deviation σ.
    Normal {
        /// σ.
        sd: f64,
    },
    /// Rectangular (uniform) of half-width a.
    Rectangular {
        /// a.
        half_width: f64,
    },
    /// Symmetric triangular of half-width a.
    Triangular {
        /// a.
        half_width: f64,
    },
    /// The user's samples (deviations are drawn from them with replacement).
    Samples(Arc<Vec<f64>>),
}

/// Type A (statistics of repeated readings) or Type B (other information).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Evaluation {
    /// From repeated readings.
    TypeA,
    /// From other information (certificate, specification, experience).
    TypeB,
}

/// One input quantity of a measurement model.
#[derive(Debug, Clone, PartialEq)]
pub struct Input {
    /// Name, for the budget.
    pub name: String,
    /// Unit label, for the budget.
    pub unit: String,
    /// Best estimate.
    pub value: f64,
    /// Distribution about the best estimate.
    pub distribution: Distribution,
    /// Degrees of freedom (∞ for most Type B inputs).
    pub dof: f64,
    /// Type A or B.
    pub evaluation: Evaluation,
    /// Where the value and its uncertainty come from.
    pub source: String,
}

fn non_negative(name: &str, what: &'static str, v: f64) -> Result<f64> {
    finite("uncertainty", what, v)?;
    if v < 0.0 {
        return Err(Error::Inconsistent {
            context: "uncertainty",
            message: format!("input '{name}': {what} must not be negative, got {v}"),
        });
    }
    Ok(v)
}

impl Input {
    fn new(
        name: &str,
        unit: &str,
        value: f64,
        distribution: Distribution,
        dof: f64,
        evaluation: Evaluation,
    ) -> Result<Self> {
        finite("uncertainty", "input value", value)?;
        Ok(Self { name: name.into(), unit: unit.into(), value, distribution, dof, evaluation, source: String::new() })
    }

    /// Normal input with standard uncertainty `u` (Type B, ν = ∞).
    pub fn normal(name: &str, unit: &str, value: f64, u: f64) -> Result<Self> {
        let u = non_negative(name, "standard uncertainty", u)?;
        Self::new(name, unit, value, Distribution::Normal { sd: u }, f64::INFINITY, Evaluation::TypeB)
    }

    /// Rectangular input of half-width `a` (u = a/√3).
    pub fn rectangular(name: &str, unit: &str, value: f64, half_width: f64) -> Result<Self> {
        let a = non_negative(name, "half-width", half_width)?;
        Self::new(name, unit, value, Distribution::Rectangular { half_width: a }, f64::INFINITY, Evaluation::TypeB)
    }

    /// Triangular input of half-width `a` (u = a/√6).
    pub fn triangular(name: &str, unit: &str, value: f64, half_width: f64) -> Result<Self> {
        let a = non_negative(name, "half-width", half_width)?;
        Self::new(name, unit, value, Distribution::Triangular { half_width: a }, f64::INFINITY, Evaluation::TypeB)
    }

    /// From a certificate's expanded uncertainty U and coverage factor k (normal, u = U/k).
    pub fn from_expanded(name: &str, unit: &str, value: f64, expanded: f64, k: f64) -> Result<Self> {
        let e = non_negative(name, "expanded uncertainty", expanded)?;
        if !(k.is_finite() && k >= 1.0) {
            return Err(Error::Inconsistent {
                context: "uncertainty",
                message: format!("input '{name}': coverage factor must be at least 1, got {k}"),
            });
        }
        Self::normal(name, unit, value, e / k)
    }

    /// Type A from repeated readings: the mean, u = s/√n, ν = n − 1 (normal).
    pub fn type_a(name: &str, unit: &str, readings: &[f64]) -> Result<Self> {
        if readings.len() < 2 {
            return Err(Error::Inconsistent {
                context: "uncertainty",
                message: format!("input '{name}': Type A needs at least 2 readings, got {}", readings.len()),
            });
        }
        for (i, r) in readings.iter().enumerate() {
            finite("uncertainty", "reading", *r).map_err(|e| e.at_row(i))?;
        }
        let n = readings.len() as f64;
        let mean = readings.iter().sum::<f64>() / n;
        let s = (readings.iter().map(|r| (r - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
        let mut i = Self::new(name, unit, mean, Distribution::Normal { sd: s / n.sqrt() }, n - 1.0, Evaluation::TypeA)?;
        i.source = format!("Type A, {} readings", readings.len());
        Ok(i)
    }

    /// Input given by samples of its value (e.g. from another Monte Carlo run); the best
    /// estimate is their mean and u their standard deviation.
    pub fn samples(name: &str, unit: &str, samples: Vec<f64>) -> Result<Self> {
        if samples.len() < 2 || samples.iter().any(|s| !s.is_finite()) {
            return Err(Error::Inconsistent {
                context: "uncertainty",
                message: format!("input '{name}': needs at least 2 finite samples"),
            });
        }
        let mean = samples.iter().sum::<f64>() / samples.len() as f64;
        let dev: Vec<f64> = samples.iter().map(|s| s - mean).collect();
        Self::new(name, unit, mean, Distribution::Samples(Arc::new(dev)), f64::INFINITY, Evaluation::TypeB)
    }

    /// The same input with degrees of freedom ν (> 0).
    pub fn with_dof(mut self, dof: f64) -> Result<Self> {
        if dof.is_nan() || dof <= 0.0 {
            return Err(Error::Inconsistent {
                context: "uncertainty",
                message: format!("input '{}': degrees of freedom must be > 0, got {dof}", self.name),
            });
        }
        self.dof = dof;
        Ok(self)
    }

    /// The same input with a note of its source.
    pub fn with_source(mut self, source: &str) -> Self {
        self.source = source.into();
        self
    }

    /// Standard uncertainty u(x).
    pub fn standard_uncertainty(&self) -> f64 {
        match &self.distribution {
            Distribution::Normal { sd } => *sd,
            Distribution::Rectangular { half_width } => half_width / 3f64.sqrt(),
            Distribution::Triangular { half_width } => half_width / 6f64.sqrt(),
            Distribution::Samples(d) => (d.iter().map(|x| x * x).sum::<f64>() / (d.len() as f64 - 1.0)).sqrt(),
        }
    }
}

/// Correlation coefficients between inputs (by index); unlisted pairs are uncorrelated.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Correlations {
    pairs: Vec<(usize, usize, f64)>,
}

impl Correlations {
    /// No correlations.
    pub fn none() -> Self {
        Self::default()
    }

    /// Adds r(x_i, x_j), −1 ≤ r ≤ 1, i ≠ j.
    pub fn with(mut self, i: usize, j: usize, r: f64) -> Result<Self> {
        finite("uncertainty", "correlation coefficient", r)?;
        if !(-1.0..=1.0).contains(&r) {
            return Err(Error::OutOfRange {
                context: "uncertainty",
                param: "correlation coefficient",
                value: r,
                unit: "",
                allowed: "in [-1, 1]".into(),
            });
        }
        if i == j {
            return Err(Error::Inconsistent {
                context: "uncertainty",
                message: format!("a correlation needs two different inputs, got {i} twice"),
            });
        }
        self.pairs.push((i.min(j), i.max(j), r));
        Ok(self)
    }

    /// The full correlation matrix for `n` inputs, checked to be positive semi-definite.
    pub fn matrix(&self, n: usize) -> Result<Vec<Vec<f64>>> {
        let mut m = vec![vec![0.0; n]; n];
        for (i, row) in m.iter_mut().enumerate() {
            row[i] = 1.0;
        }
        for &(i, j, r) in &self.pairs {
            if j >= n {
                return Err(Error::Inconsistent {
                    context: "uncertainty",
                    message: format!("correlation names input {j}, but there are {n} inputs"),
                });
            }
            m[i][j] = r;
            m[j][i] = r;
        }
        cholesky(&m).map_err(|_| Error::Inconsistent {
            context: "uncertainty",
            message: "the correlation matrix is not positive semi-definite; the coefficients contradict each other"
                .into(),
        })?;
        Ok(m)
    }

    /// True when no pair is given.
    pub fn is_empty(&self) -> bool {
        self.pairs.is_empty()
    }
}

/// Lower-triangular L with L·Lᵀ = m for a positive semi-definite m (zero columns allowed).
pub(crate) fn cholesky(m: &[Vec<f64>]) -> std::result::Result<Vec<Vec<f64>>, ()> {
    let n = m.len();
    let mut l = vec![vec![0.0; n]; n];
    for j in 0..n {
        let d = m[j][j] - (0..j).map(|k| l[j][k] * l[j][k]).sum::<f64>();
        if d < -1e-10 {
            return Err(());
        }
        let djj = d.max(0.0).sqrt();
        l[j][j] = djj;
        for i in j + 1..n {
            let s = m[i][j] - (0..j).map(|k| l[i][k] * l[j][k]).sum::<f64>();
            l[i][j] = if djj > 1e-12 {
                s / djj
            } else if s.abs() > 1e-9 {
                return Err(());
            } else {
                0.0
            };
        }
    }
    Ok(l)
}

/// Sensitivity coefficients ∂f/∂x_i at the best estimates, exactly (forward-mode AD).
pub fn sensitivities<M: Model>(model: &M, x: &[f64]) -> Vec<f64> {
    let mut duals: Vec<Dual> = x.iter().map(|&v| Dual { v, d: 0.0 }).collect();
    (0..x.len())
        .map(|i| {
            duals[i].d = 1.0;
            let d = model.eval(&duals).d;
            duals[i].d = 0.0;
            d
        })
        .collect()
}

/// One line of an uncertainty budget.
#[derive(Debug, Clone, PartialEq)]
pub struct BudgetLine {
    /// Input name.
    pub name: String,
    /// Unit of the input.
    pub unit: String,
    /// Best estimate.
    pub value: f64,
    /// Standard uncertainty.
    pub u: f64,
    /// Type A or B.
    pub evaluation: Evaluation,
    /// Degrees of freedom.
    pub dof: f64,
    /// Sensitivity coefficient.
    pub sensitivity: f64,
    /// Contribution c·u (in the output's unit).
    pub contribution: f64,
    /// Share (c·u)²/u_c² of the variance (uncorrelated part).
    pub share: f64,
    /// Source note.
    pub source: String,
}

/// Result of the law of propagation.
#[derive(Debug, Clone, PartialEq)]
pub struct GumResult {
    /// Output estimate y = f(x).
    pub value: f64,
    /// Combined standard uncertainty u_c(y).
    pub u: f64,
    /// Effective degrees of freedom (Welch–Satterthwaite).
    pub dof: f64,
    /// Coverage probability.
    pub coverage: f64,
    /// Coverage factor k = t_p(ν_eff).
    pub k: f64,
    /// Expanded uncertainty U = k u_c.
    pub expanded: f64,
    /// The budget, one line per input.
    pub budget: Vec<BudgetLine>,
}

fn check_inputs(inputs: &[Input]) -> Result<Vec<f64>> {
    if inputs.is_empty() {
        return Err(Error::Inconsistent { context: "uncertainty", message: "no inputs".into() });
    }
    Ok(inputs.iter().map(|i| i.value).collect())
}

/// Law of propagation of uncertainty (see the module doc), coverage probability `p` (e.g. 0.95).
pub fn gum<M: Model>(model: &M, inputs: &[Input], correlations: &Correlations, p: f64) -> Result<GumResult> {
    let x = check_inputs(inputs)?;
    let y = model.eval(&x);
    let c = sensitivities(model, &x);
    gum_from(y, &c, inputs, correlations, p)
}

/// The law of propagation from an output estimate `y` and sensitivity coefficients `c`
/// obtained elsewhere (e.g. by differences, for a model the library cannot differentiate).
pub fn gum_from(y: f64, c: &[f64], inputs: &[Input], correlations: &Correlations, p: f64) -> Result<GumResult> {
    let x = check_inputs(inputs)?;
    if !(p > 0.0 && p < 1.0) {
        return Err(Error::OutOfRange {
            context: "uncertainty",
            param: "coverage probability",
            value: p,
            unit: "",
            allowed: "in (0, 1)".into(),
        });
    }
    if c.len() != x.len() {
        return Err(Error::Inconsistent {
            context: "uncertainty",
            message: format!("{} sensitivity coefficients for {} inputs", c.len(), x.len()),
        });
    }
    if !y.is_finite() {
        return Err(Error::Inconsistent {
            context: "uncertainty",
            message: format!("the model gives {y} at the best estimates"),
        });
    }
    let u: Vec<f64> = inputs.iter().map(Input::standard_uncertainty).collect();
    let r = correlations.matrix(inputs.len())?;
    let mut var = 0.0;
    for i in 0..x.len() {
        for j in 0..x.len() {
            var += c[i] * c[j] * u[i] * u[j] * r[i][j];
        }
    }
    let uc = var.max(0.0).sqrt();
    let denom: f64 = inputs.iter().zip(c).zip(&u).map(|((inp, ci), ui)| (ci * ui).powi(4) / inp.dof).sum();
    let dof = if denom > 0.0 { uc.powi(4) / denom } else { f64::INFINITY };
    let k = student_t_quantile(0.5 + p / 2.0, dof);
    let budget = inputs
        .iter()
        .zip(c)
        .zip(&u)
        .map(|((inp, ci), ui)| BudgetLine {
            name: inp.name.clone(),
            unit: inp.unit.clone(),
            value: inp.value,
            u: *ui,
            evaluation: inp.evaluation,
            dof: inp.dof,
            sensitivity: *ci,
            contribution: ci * ui,
            share: if var > 0.0 { (ci * ui).powi(2) / var } else { 0.0 },
            source: inp.source.clone(),
        })
        .collect();
    Ok(GumResult { value: y, u: uc, dof, coverage: p, k, expanded: k * uc, budget })
}

impl GumResult {
    /// The budget's column heads, as printed in text and HTML alike.
    pub const HEADS: [&'static str; 8] =
        ["input", "value", "u (k = 1)", "type", "sensitivity c", "c·u", "share", "source"];

    /// The budget lines as printed: value and u per GUM 7.2.6, sensitivities to three and
    /// contributions to two significant figures, shares, sources.
    pub fn rows(&self) -> Vec<[String; 8]> {
        use crate::units::quantity::{format_sig, format_with_uncertainty};
        self.budget
            .iter()
            .map(|l| {
                let label = if l.unit == "1" || l.unit.is_empty() {
                    l.name.clone()
                } else {
                    format!("{} ({})", l.name, l.unit)
                };
                let (v, u) = format_with_uncertainty(l.value, l.u);
                [
                    label,
                    v,
                    u,
                    if l.evaluation == Evaluation::TypeA { "A" } else { "B" }.to_string(),
                    format_sig(l.sensitivity, 3),
                    format_sig(l.contribution, 2),
                    format!("{:.1} %", l.share * 100.0),
                    l.source.clone(),
                ]
            })
            .collect()
    }

    /// The result line: y with u_c (standard, k = 1) and U (expanded, with its k and
    /// coverage), rounded per GUM 7.2.6.
    pub fn result_line(&self) -> String {
        self.result_line_in("")
    }

    /// [`GumResult::result_line`] with the output's unit after y, u_c and U
    /// (e.g. "m³/s"; empty for none).
    pub fn result_line_in(&self, unit: &str) -> String {
        use crate::units::quantity::{format_sig, format_with_uncertainty};
        let unit = if unit.is_empty() { String::new() } else { format!(" {unit}") };
        // Whole degrees of freedom from 10 up (JCGM 100 §G.4.1 allows truncating ν_eff to the
        // next lower integer); one decimal below, where t_p moves quickly with ν.
        let dof = match self.dof {
            d if !d.is_finite() => "∞".into(),
            d if d >= 10.0 => format!("{}", d.floor()),
            d => format!("{d:.1}"),
        };
        let (y, u) = format_with_uncertainty(self.value, self.u);
        let (_, big_u) = format_with_uncertainty(self.value, self.expanded);
        format!(
            "y = {y}{unit}, u_c = {u}{unit} (standard, k = 1; {} % of y), ν_eff = {dof}; U = {big_u}{unit} (expanded, k = {:.2}, {:.0} % coverage)",
            format_sig(self.u / self.value.abs() * 100.0, 2),
            self.k,
            self.coverage * 100.0,
        )
    }
}

impl fmt::Display for GumResult {
    /// The budget as a table (see [`GumResult::rows`]) and the result line.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let rows = self.rows();
        let head = Self::HEADS;
        let mut w = head.map(|h| h.chars().count());
        for r in &rows {
            for (k, c) in r.iter().enumerate() {
                w[k] = w[k].max(c.chars().count());
            }
        }
        let line = |cells: &[String]| {
            let mut s = String::new();
            for (k, c) in cells.iter().enumerate() {
                let fill = " ".repeat(w[k].saturating_sub(c.chars().count()));
                // Text columns left, numbers right.
                if k == 0 || k == 3 || k == 7 {
                    s += &format!("{c}{fill}")
                } else {
                    s += &format!("{fill}{c}")
                }
                if k + 1 < cells.len() {
                    s += "  ";
                }
            }
            s.trim_end().to_string()
        };
        writeln!(f, "{}", line(&head.map(String::from)))?;
        writeln!(f, "{}", line(&w.map(|n| "─".repeat(n))))?;
        for r in &rows {
            writeln!(f, "{}", line(r))?;
        }
        writeln!(f, "{}", self.result_line())
    }
}

/// Two-sided Student-t quantile t_p(ν) (p the one-sided probability, e.g. 0.975), by
/// bisection on the regularized incomplete beta function; ν = ∞ gives the normal quantile.
pub fn student_t_quantile(p: f64, dof: f64) -> f64 {
    let cdf = |t: f64| -> f64 {
        if !dof.is_finite() || dof > 1e7 {
            return normal_cdf(t);
        }
        let x = dof / (dof + t * t);
        let tail = 0.5 * incomplete_beta(dof / 2.0, 0.5, x);
        if t > 0.0 { 1.0 - tail } else { tail }
    };
    let (mut lo, mut hi) = (0.0, 1e4);
    for _ in 0..200 {
        let mid = (lo + hi) / 2.0;
        if cdf(mid) < p { lo = mid } else { hi = mid }
    }
    (lo + hi) / 2.0
}

/// Standard normal CDF via erfc (W. J. Cody's rational approximations are not needed at
/// this accuracy: a continued fraction / series to 1e-14).
pub fn normal_cdf(x: f64) -> f64 {
    0.5 * erfc(-x / std::f64::consts::SQRT_2)
}

fn erfc(x: f64) -> f64 {
    // erfc via the regularized upper incomplete gamma Q(1/2, x²) for x ≥ 0.
    if x < 0.0 {
        return 2.0 - erfc(-x);
    }
    gamma_q(0.5, x * x)
}

fn ln_gamma(x: f64) -> f64 {
    // Lanczos approximation (g = 7, n = 9), relative error below 1e-15.
    const G: [f64; 9] = [
        0.999_999_999_999_809_9,
        676.520_368_121_885_1,
        -1_259.139_216_722_402_8,
        771.323_428_777_653_1,
        -176.615_029_162_140_6,
        12.507_343_278_686_905,
        -0.138_571_095_265_720_12,
        9.984_369_578_019_572e-6,
        1.505_632_735_149_311_6e-7,
    ];
    if x < 0.5 {
        return (std::f64::consts::PI / (std::f64::consts::PI * x).sin()).ln() - ln_gamma(1.0 - x);
    }
    let x = x - 1.0;
    let mut a = G[0];
    let t = x + 7.5;
    for (i, g) in G.iter().enumerate().skip(1) {
        a += g / (x + i as f64);
    }
    0.5 * (2.0 * std::f64::consts::PI).ln() + (x + 0.5) * t.ln() - t + a.ln()
}

fn gamma_q(a: f64, x: f64) -> f64 {
    if x <= 0.0 {
        return 1.0;
    }
    if x < a + 1.0 {
        // series for P
        let (mut sum, mut term, mut ap) = (1.0 / a, 1.0 / a, a);
        for _ in 0..500 {
            ap += 1.0;
            term *= x / ap;
            sum += term;
            if term.abs() < sum.abs() * 1e-16 {
                break;
            }
        }
        1.0 - sum * (-x + a * x.ln() - ln_gamma(a)).exp()
    } else {
        // continued fraction for Q (Lentz)
        let tiny = 1e-300;
        let mut b = x + 1.0 - a;
        let mut c = 1.0 / tiny;
        let mut d = 1.0 / b;
        let mut h = d;
        for i in 1..500 {
            let an = -(i as f64) * (i as f64 - a);
            b += 2.0;
            d = an * d + b;
            if d.abs() < tiny {
                d = tiny;
            }
            c = b + an / c;
            if c.abs() < tiny {
                c = tiny;
            }
            d = 1.0 / d;
            let del = d * c;
            h *= del;
            if (del - 1.0).abs() < 1e-16 {
                break;
            }
        }
        (-x + a * x.ln() - ln_gamma(a)).exp() * h
    }
}

/// Regularized incomplete beta I_x(a, b) (continued fraction, Lentz).
fn incomplete_beta(a: f64, b: f64, x: f64) -> f64 {
    if x <= 0.0 {
        return 0.0;
    }
    if x >= 1.0 {
        return 1.0;
    }
    let front = (ln_gamma(a + b) - ln_gamma(a) - ln_gamma(b) + a * x.ln() + b * (1.0 - x).ln()).exp();
    if x > (a + 1.0) / (a + b + 2.0) {
        return 1.0 - incomplete_beta(b, a, 1.0 - x);
    }
    let tiny = 1e-300;
    let guard = |v: f64| if v.abs() < tiny { tiny } else { v };
    let mut c = 1.0;
    let mut d = 1.0 / guard(1.0 - (a + b) * x / (a + 1.0));
    let mut h = d;
    // One Lentz step with numerator `num`; returns the factor applied to h.
    let mut step = |num: f64| {
        d = 1.0 / guard(1.0 + num * d);
        c = guard(1.0 + num / c);
        d * c
    };
    for m in 1..500 {
        let m = m as f64;
        h *= step(m * (b - m) * x / ((a + 2.0 * m - 1.0) * (a + 2.0 * m)));
        let del = step(-(a + m) * (a + b + m) * x / ((a + 2.0 * m) * (a + 2.0 * m + 1.0)));
        h *= del;
        if (del - 1.0).abs() < 1e-16 {
            break;
        }
    }
    front * h / a
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::uncertainty::monte_carlo::{McOptions, monte_carlo};

    struct Sum4;
    impl Model for Sum4 {
        fn eval<R: Real>(&self, x: &[R]) -> R {
            x[0] + x[1] + x[2] + x[3]
        }
    }

    // JCGM 101:2008 §9.2 additive model Y = X1 + X2 + X3 + X4 (numbers as collected in
    // check-values.md §7.2, numpy re-computation of the JCGM 101 example):
    // 9.2.2 all N(0,1): u(y) = 2, GUF ±3.92, MCM [−3.92, 3.92];
    // 9.2.3 all rectangular with σ = 1: u = 2.00, MCM [−3.88, 3.88];
    // 9.2.4 three N(0,1) and one rectangular σ = 10: u = 10.15, MCM [−17.0, 17.0], GUF ±19.9.
    #[test]
    fn jcgm101_additive_models() {
        let n = |name: &str| Input::normal(name, "1", 0.0, 1.0).unwrap();
        let normals = vec![n("X1"), n("X2"), n("X3"), n("X4")];
        let g = gum(&Sum4, &normals, &Correlations::none(), 0.95).unwrap();
        assert!((g.u - 2.0).abs() < 1e-12 && (g.expanded - 3.92).abs() < 0.005);
        let mc = monte_carlo(&Sum4, &normals, &Correlations::none(), &McOptions::default()).unwrap();
        assert!(
            (mc.u - 2.0).abs() < 0.01 && (mc.symmetric.0 + 3.92).abs() < 0.02 && (mc.symmetric.1 - 3.92).abs() < 0.02,
            "{mc:?}"
        );

        let r = |name: &str| Input::rectangular(name, "1", 0.0, 3f64.sqrt()).unwrap();
        let rects = vec![r("X1"), r("X2"), r("X3"), r("X4")];
        let mc = monte_carlo(&Sum4, &rects, &Correlations::none(), &McOptions::default()).unwrap();
        assert!(
            (mc.u - 2.0).abs() < 0.01 && (mc.symmetric.0 + 3.88).abs() < 0.02 && (mc.symmetric.1 - 3.88).abs() < 0.02,
            "{mc:?}"
        );

        let mixed = vec![n("X1"), n("X2"), n("X3"), Input::rectangular("X4", "1", 0.0, 10.0 * 3f64.sqrt()).unwrap()];
        let g = gum(&Sum4, &mixed, &Correlations::none(), 0.95).unwrap();
        assert!((g.u - 10.15).abs() < 0.005 && (g.expanded - 19.9).abs() < 0.05);
        let mc = monte_carlo(&Sum4, &mixed, &Correlations::none(), &McOptions::default()).unwrap();
        assert!((mc.symmetric.0 + 17.0).abs() < 0.05 && (mc.symmetric.1 - 17.0).abs() < 0.05, "{mc:?}");
    }

    struct EndGauge;
    impl Model for EndGauge {
        // JCGM 100 H.1: l = l_s + d − l_s(δα·θ + α_s·δθ); inputs l_s, d, α_s, θ, δα, δθ.
        fn eval<R: Real>(&self, x: &[R]) -> R {
            x[0] + x[1] - x[0] * (x[4] * x[3] + x[2] * x[5])
        }
    }

    // JCGM 100:2008 H.1 (end-gauge calibration), first-order budget (from memory):
    // u(l_s) = 25 nm (ν 18), u(d) = 9.7 nm (ν 25.6), u(α_s) = 1.2e-6 /°C, u(θ) = 0.41 °C,
    // u(δα) = 0.58e-6 /°C (ν 50), u(δθ) = 0.029 °C (ν 2), at l_s = 50 mm, θ = −0.1 °C,
    // α_s = 11.5e-6 /°C: u_c(l) = 32 nm, ν_eff ≈ 16, U₉₉ = t₉₉(16)·u_c ≈ 93 nm.
    #[test]
    fn jcgm100_end_gauge_example() {
        let inputs = vec![
            Input::normal("l_s", "nm", 50_000_623.6, 25.0).unwrap().with_dof(18.0).unwrap(),
            Input::normal("d", "nm", 215.0, 9.7).unwrap().with_dof(25.6).unwrap(),
            Input::rectangular("α_s", "1/°C", 11.5e-6, 2e-6).unwrap(),
            Input::normal("θ", "°C", -0.1, 0.41).unwrap(),
            Input::rectangular("δα", "1/°C", 0.0, 1e-6).unwrap().with_dof(50.0).unwrap(),
            Input::rectangular("δθ", "°C", 0.0, 0.05).unwrap().with_dof(2.0).unwrap(),
        ];
        let g = gum(&EndGauge, &inputs, &Correlations::none(), 0.99).unwrap();
        assert!((g.u - 32.0).abs() < 0.5, "{}", g.u);
        assert_eq!(g.dof.floor(), 16.0, "{}", g.dof);
        assert!((g.expanded - 93.0).abs() < 1.5, "{}", g.expanded);
    }

    // scipy 1.17.1 `stats.t.ppf`: t_0.975(1, 2, 5, 16, 50) = 12.7062, 4.30265, 2.57058,
    // 2.11991, 2.00856; t_0.995(16) = 2.92078; ν = ∞ → 1.95996.
    #[test]
    fn student_t_against_scipy() {
        for (p, nu, t) in [
            (0.975, 1.0, 12.706_204_736),
            (0.975, 2.0, 4.302_652_730),
            (0.975, 5.0, 2.570_581_836),
            (0.975, 16.0, 2.119_905_299),
            (0.975, 50.0, 2.008_559_112),
            (0.995, 16.0, 2.920_781_622),
            (0.975, f64::INFINITY, 1.959_963_985),
        ] {
            assert!((student_t_quantile(p, nu) - t).abs() < 1e-6, "{p} {nu}: {}", student_t_quantile(p, nu));
        }
    }

    #[test]
    fn inputs_and_type_a() {
        // Type A: mean, s/√n, n − 1 (JCGM 100 4.2)
        let a = Input::type_a("Δp", "Pa", &[10.0, 12.0, 11.0, 13.0]).unwrap();
        assert!((a.value - 11.5).abs() < 1e-15 && a.dof == 3.0);
        assert!((a.standard_uncertainty() - (1.666_666_666_666_666_7f64).sqrt() / 2.0).abs() < 1e-12);
        assert!((Input::rectangular("x", "1", 0.0, 3f64.sqrt()).unwrap().standard_uncertainty() - 1.0).abs() < 1e-15);
        assert!((Input::triangular("x", "1", 0.0, 6f64.sqrt()).unwrap().standard_uncertainty() - 1.0).abs() < 1e-15);
        assert!((Input::from_expanded("x", "1", 1.0, 0.2, 2.0).unwrap().standard_uncertainty() - 0.1).abs() < 1e-15);
        let s = Input::samples("x", "1", vec![1.0, 2.0, 3.0]).unwrap();
        assert!((s.value - 2.0).abs() < 1e-15 && (s.standard_uncertainty() - 1.0).abs() < 1e-15);
    }

    #[test]
    fn bad_inputs_are_refused() {
        assert_eq!(
            Input::normal("Δp", "Pa", 1.0, -0.1).unwrap_err().to_string(),
            "uncertainty: input 'Δp': standard uncertainty must not be negative, got -0.1"
        );
        assert!(Input::normal("Δp", "Pa", 1.0, f64::NAN).is_err());
        assert!(Input::type_a("x", "1", &[1.0]).is_err());
        assert!(Input::from_expanded("x", "1", 1.0, 0.2, 0.5).is_err());
        assert!(Correlations::none().with(0, 1, 1.5).is_err());
        let bad = Correlations::none().with(0, 1, 0.9).unwrap().with(1, 2, 0.9).unwrap().with(0, 2, -0.9).unwrap();
        let e = bad.matrix(3).unwrap_err().to_string();
        assert!(e.contains("not positive semi-definite"), "{e}");
        assert!(Correlations::none().with(0, 1, 1.0).unwrap().matrix(2).is_ok(), "full correlation is semi-definite");
    }

    #[test]
    fn correlation_enters_the_combined_uncertainty() {
        // y = x1 + x2 with u = 1 each: r = 1 → u_c = 2, r = 0 → √2, r = −1 → 0 (JCGM 100 5.2.2).
        struct Add2;
        impl Model for Add2 {
            fn eval<R: Real>(&self, x: &[R]) -> R {
                x[0] + x[1]
            }
        }
        let i = vec![Input::normal("a", "1", 1.0, 1.0).unwrap(), Input::normal("b", "1", 2.0, 1.0).unwrap()];
        for (r, u) in [(1.0, 2.0), (0.0, 2f64.sqrt()), (-1.0, 0.0)] {
            let c = if r == 0.0 { Correlations::none() } else { Correlations::none().with(0, 1, r).unwrap() };
            assert!((gum(&Add2, &i, &c, 0.95).unwrap().u - u).abs() < 1e-12);
            let mc = monte_carlo(&Add2, &i, &c, &McOptions { trials: 200_000, ..Default::default() }).unwrap();
            assert!((mc.u - u).abs() < 0.01, "r = {r}: {}", mc.u);
        }
    }

    proptest::proptest! {
        // Sensitivities by dual numbers equal central finite differences (statrs/argmin habit).
        #[test]
        fn sensitivities_match_finite_differences(c in 0.8f64..1.0, dp in 1.0f64..5000.0, rho in 0.5f64..1200.0) {
            let m = crate::uncertainty::flow_models::PointVelocityModel;
            let x = [c, dp, rho];
            let s = sensitivities(&m, &x);
            for i in 0..3 {
                let h = x[i] * 1e-6;
                let mut a = x;
                let mut b = x;
                a[i] += h;
                b[i] -= h;
                let fd = (m.eval(&a) - m.eval(&b)) / (2.0 * h);
                proptest::prop_assert!((s[i] - fd).abs() <= 1e-6 * s[i].abs().max(1e-9), "{i}: {} vs {fd}", s[i]);
            }
        }
    }
}
