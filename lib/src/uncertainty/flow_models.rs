//! Uncertainty models of the differential-pressure chain: point velocity,
//! traverse mean velocity and flow, with method terms as named budget lines.
//!
//! # Formula
//! - Point: v = C √(2 Δp/ρ).
//! - Traverse: Q = Π f_k · (π D²/4) · (1/N) Σ_i C √(2 Δp_i/ρ), where the probe
//!   coefficient C, density ρ and diameter D are single inputs shared by all
//!   points (so fully correlated across points, as they should be), each Δp_i
//!   is its own input (point-to-point scatter independent), and each method
//!   term f_k (layout/integration bias, positioning, unsteadiness, turbulence,
//!   alignment) is a factor of value 1 with a relative standard uncertainty.
//!
//! # References
//! JCGM 100:2008; the method terms' typical magnitudes as collected in
//! `shared/reference/check-values.md` §7.3 (common practice, no source) and
//! the layout biases of §5.4.

use crate::error::{Error, Result};
use crate::uncertainty::{Correlations, GumResult, Input, Model, Real, gum};

/// v = C √(2 Δp/ρ); inputs in the order C, Δp (Pa), ρ (kg/m³).
#[derive(Debug, Clone, Copy, Default)]
pub struct PointVelocityModel;

impl Model for PointVelocityModel {
    fn eval<R: Real>(&self, x: &[R]) -> R {
        x[0] * (R::constant(2.0) * x[1] / x[2]).sqrt()
    }
}

/// The distribution of a method term about 1.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum TermDistribution {
    /// Normal (a stated standard uncertainty).
    #[default]
    Normal,
    /// Rectangular: equally likely anywhere within ±a, u = a/√3 (JCGM 100 §4.3.7).
    Rectangular,
    /// Triangular: ±a, u = a/√6 (JCGM 100 §4.3.9).
    Triangular,
}

impl TermDistribution {
    /// From its name ("normal", "rectangular", "triangular").
    pub fn parse(s: &str) -> Result<Self> {
        match s {
            "normal" => Ok(Self::Normal),
            "rectangular" | "uniform" => Ok(Self::Rectangular),
            "triangular" => Ok(Self::Triangular),
            _ => Err(Error::Inconsistent {
                context: "method term",
                message: format!("distribution \"{s}\" is not one of normal, rectangular, triangular"),
            }),
        }
    }
}

/// A method term: a factor of value 1 with a relative standard uncertainty.
#[derive(Debug, Clone, PartialEq)]
pub struct MethodTerm {
    /// Name of the budget line.
    pub name: String,
    /// The factor's value: 1 for a term that only carries uncertainty, another value for a
    /// correction applied in the model (e.g. 0.9968 for ISO 3966 local corrections).
    pub value: f64,
    /// Relative standard uncertainty (e.g. 0.005 for 0.5 %), relative to `value`.
    pub relative_u: f64,
    /// Where the value comes from.
    pub source: String,
    /// Its distribution about 1 (the standard uncertainty is `relative_u` whatever it is).
    pub distribution: TermDistribution,
}

impl MethodTerm {
    /// A term of your own (normal).
    pub fn new(name: &str, relative_u: f64, source: &str) -> Result<Self> {
        crate::error::within("method term", "relative standard uncertainty", relative_u, "", 0.0, 0.5)?;
        Ok(Self {
            name: name.into(),
            value: 1.0,
            relative_u,
            source: source.into(),
            distribution: TermDistribution::Normal,
        })
    }

    /// The same term as a correction: a factor `value` (0.5 … 2) applied in the model, its
    /// relative standard uncertainty unchanged.
    pub fn with_value(mut self, value: f64) -> Result<Self> {
        self.value = crate::error::within("method term", "value (a factor)", value, "", 0.5, 2.0)?;
        Ok(self)
    }

    /// The same term with another distribution (same standard uncertainty).
    pub fn with_distribution(mut self, d: TermDistribution) -> Self {
        self.distribution = d;
        self
    }

    /// The input this term becomes: a factor of `value` with `relative_u`, of its distribution.
    pub fn input(&self) -> Result<Input> {
        let (x, u) = (self.value, self.relative_u * self.value);
        let i = match self.distribution {
            TermDistribution::Normal => Input::normal(&self.name, "1", x, u)?,
            TermDistribution::Rectangular => Input::rectangular(&self.name, "1", x, u * 3f64.sqrt())?,
            TermDistribution::Triangular => Input::triangular(&self.name, "1", x, u * 6f64.sqrt())?,
        };
        Ok(i.with_source(&self.source))
    }

    /// The layout/integration term of a rule: the bias of the layout's arithmetic mean on
    /// power-law profiles (n = 6 to 10), 0.5 % for equal-area and 0.2 % for the log rules
    /// (check-values.md §5.4; derived, computed in the library's integration tests).
    pub fn layout(rule: crate::section::layout::LayoutRule) -> MethodTerm {
        let u = if rule == crate::section::layout::LayoutRule::EqualArea { 0.005 } else { 0.002 };
        MethodTerm {
            name: format!("layout/integration ({rule})"),
            value: 1.0,
            relative_u: u,
            source: "bias of the layout's arithmetic mean on power-law profiles, n = 6 to 10 (derived: computed in the library's integration tests)".into(),
            distribution: TermDistribution::Normal,
        }
    }

    /// The terms a budget carries unless told otherwise: only those with a derivation
    /// behind them, the layout term. Terms without a source are off by default; add your own
    /// (measured, or from the method followed) or [`MethodTerm::typical`] deliberately.
    pub fn defaults(rule: crate::section::layout::LayoutRule) -> Vec<MethodTerm> {
        vec![Self::layout(rule)]
    }

    /// Typical magnitudes for a calibrated pitot-static traverse, opt-in: the layout term,
    /// positioning 0.25 %, unsteadiness 0.5 %, turbulence 0.5 %, alignment 0.2 %
    /// (check-values.md §7.3; common practice, no source).
    pub fn typical(rule: crate::section::layout::LayoutRule) -> Vec<MethodTerm> {
        let cp = "common practice, no source (typical magnitude)";
        let t = |name: &str, u: f64| MethodTerm {
            name: name.into(),
            value: 1.0,
            relative_u: u,
            source: cp.into(),
            distribution: TermDistribution::Normal,
        };
        vec![
            Self::layout(rule),
            t("probe positioning", 0.0025),
            t("flow unsteadiness", 0.005),
            t("turbulence", 0.005),
            t("probe alignment (yaw/pitch < 5°)", 0.002),
        ]
    }
}

/// Q = Π f_k (π D²/4)(1/N) Σ C √(2 Δp_i/ρ) (or the mean velocity, without the area);
/// inputs C, ρ, D, f_1…f_K, Δp_1…Δp_N.
#[derive(Debug, Clone, Copy)]
pub struct TraverseFlowModel {
    /// Number of method terms K.
    pub terms: usize,
    /// Number of points N.
    pub points: usize,
    /// True for the mean velocity (m/s), false for the volume flow (m³/s).
    pub mean_velocity: bool,
    /// k in A = k·D²: π/4 for a round conduit (the default), 1 for a rectangle given by
    /// its equivalent size √(W·H).
    pub area_factor: f64,
    /// A rectangle given by its own width and height: inputs C, ρ, W, H, then the terms and
    /// the Δp, and A = W·H (the area factor is not used).
    pub rectangular: bool,
}

impl TraverseFlowModel {
    /// Index of the first Δp input.
    fn first_dp(&self) -> usize {
        (if self.rectangular { 4 } else { 3 }) + self.terms
    }

    /// The model from its inputs and Σ √Δp_i (added point after point from 0).
    fn combine<R: Real>(&self, x: &[R], sum_root_dp: R) -> R {
        let (c, rho) = (x[0], x[1]);
        let mut factor = R::constant(1.0);
        for f in &x[self.first_dp() - self.terms..self.first_dp()] {
            factor = factor * *f;
        }
        // Σ √(2Δp_i/ρ) = √(2/ρ)·Σ √Δp_i: one division and one root for the shared factor
        // instead of one division a point.
        let mean = factor * c * (R::constant(2.0) / rho).sqrt() * sum_root_dp / R::constant(self.points as f64);
        match (self.mean_velocity, self.rectangular) {
            (true, _) => mean,
            (false, true) => mean * x[2] * x[3],
            (false, false) => mean * R::constant(self.area_factor) * x[2] * x[2],
        }
    }
}

impl Model for TraverseFlowModel {
    fn eval<R: Real>(&self, x: &[R]) -> R {
        let mut sum = R::constant(0.0);
        for dp in &x[self.first_dp()..] {
            sum = sum + dp.sqrt();
        }
        self.combine(x, sum)
    }

    /// As `eval` trial by trial (the same sums in the same order, so the same values to the
    /// bit), but point by point across the trials so that the square roots vectorise.
    fn eval_rows(&self, rows: &[f64], y: &mut [f64]) {
        if y.is_empty() {
            return;
        }
        let n = rows.len() / y.len();
        y.fill(0.0);
        for k in self.first_dp()..n {
            for (s, row) in y.iter_mut().zip(rows.chunks_exact(n)) {
                *s += row[k].sqrt();
            }
        }
        for (s, row) in y.iter_mut().zip(rows.chunks_exact(n)) {
            *s = self.combine(row, *s);
        }
    }
}

/// One normal Δp input per reading, named "Δp point i", with
/// u = √((rel·Δp)² + abs²): a relative part (gauge liquid, scale, calibration) and an
/// absolute part in Pa (resolution, zero drift).
pub fn dp_inputs(dps: &[f64], rel: f64, abs_pa: f64) -> Result<Vec<Input>> {
    dps.iter()
        .enumerate()
        .map(|(i, dp)| {
            Input::normal(&format!("Δp point {}", i + 1), "Pa", *dp, ((rel * dp).powi(2) + abs_pa * abs_pa).sqrt())
        })
        .collect()
}

/// Δp inputs from logged samples: each point's mean Δp with u² = u_A² + (rel·Δp)² + abs²,
/// u_A the Type A standard uncertainty of the mean from the samples (with ν_A degrees of
/// freedom) and the other two the instrument's Type B part; the input's degrees of freedom
/// by Welch–Satterthwaite over the two parts, ν = u⁴ ν_A / u_A⁴ (JCGM 100 §G.4.1). The
/// input is labelled Type A when the instrument part is zero.
pub fn sampled_dp_inputs(
    means: &[f64],
    u_a: &[f64],
    dof_a: &[f64],
    rel: f64,
    abs_pa: f64,
    source: &str,
) -> Result<Vec<Input>> {
    if means.len() != u_a.len() || means.len() != dof_a.len() {
        return Err(Error::Inconsistent {
            context: "traverse uncertainty",
            message: format!(
                "{} mean Δp values, {} u_A and {} degrees of freedom",
                means.len(),
                u_a.len(),
                dof_a.len()
            ),
        });
    }
    means
        .iter()
        .zip(u_a.iter().zip(dof_a))
        .enumerate()
        .map(|(i, (&dp, (&ua, &nu)))| {
            let ub2 = (rel * dp).powi(2) + abs_pa * abs_pa;
            let u = (ua * ua + ub2).sqrt();
            let mut input = Input::normal(&format!("Δp point {}", i + 1), "Pa", dp, u)?.with_source(source);
            input.dof =
                if ua > 0.0 && nu.is_finite() && nu > 0.0 { u.powi(4) * nu / ua.powi(4) } else { f64::INFINITY };
            if ub2 == 0.0 {
                input.evaluation = crate::uncertainty::Evaluation::TypeA;
            }
            Ok(input)
        })
        .collect()
}

/// Δp inputs whose uncertainty comes from a transducer's calibration: √(s² + u_curve²)
/// at each point (evaluated at the corrected Δp, the curve being close to identity), with
/// `rel`·Δp and `abs_pa` beside it when given. Alone, the term is Type A with the
/// calibration's ν degrees of freedom. The calibration is named as each input's source.
pub fn transducer_dp_inputs(
    t: &crate::instruments::transducer::Transducer,
    dps: &[f64],
    rel: f64,
    abs_pa: f64,
) -> Result<Vec<Input>> {
    let c = t.calibration.as_ref().ok_or_else(|| Error::Inconsistent {
        context: "traverse uncertainty",
        message: format!("transducer {} has no calibration points; give dp_rel and dp_abs instead", t.id),
    })?;
    let alone = rel == 0.0 && abs_pa == 0.0;
    let source = format!(
        "transducer {} calibration of {}: s = {} Pa (ν = {}) with the curve's own uncertainty{}",
        t.id,
        c.date,
        crate::units::quantity::format_sig(c.residual_sd_pa, 2),
        c.dof,
        if alone { "" } else { ", plus dp_rel and dp_abs as given" }
    );
    dps.iter()
        .enumerate()
        .map(|(i, &dp)| {
            let u = ((rel * dp).powi(2) + abs_pa * abs_pa + c.u_reading_pa(dp).powi(2)).sqrt();
            let mut input = Input::normal(&format!("Δp point {}", i + 1), "Pa", dp, u)?.with_source(&source);
            if alone {
                input.dof = c.dof as f64;
                input.evaluation = crate::uncertainty::Evaluation::TypeA;
            }
            Ok(input)
        })
        .collect()
}

/// A traverse flow with its uncertainty inputs, ready for [`gum`] or Monte Carlo.
#[derive(Debug, Clone)]
pub struct TraverseUncertainty {
    /// The model.
    pub model: TraverseFlowModel,
    /// Its inputs, in model order.
    pub inputs: Vec<Input>,
}

impl TraverseUncertainty {
    /// From the shared inputs (probe coefficient, density, diameter), the method terms and
    /// one Δp input per point.
    pub fn new(
        coefficient: Input,
        density: Input,
        diameter: Input,
        terms: &[MethodTerm],
        dps: Vec<Input>,
    ) -> Result<Self> {
        if dps.is_empty() {
            return Err(Error::Inconsistent { context: "traverse uncertainty", message: "no points".into() });
        }
        for (i, dp) in dps.iter().enumerate() {
            if dp.value <= 0.0 {
                return Err(Error::Inconsistent {
                    context: "traverse uncertainty",
                    message: format!(
                        "point {}: Δp = {} Pa; the √Δp model needs positive Δp (reverse flow is not a velocity-area measurement)",
                        i + 1,
                        dp.value
                    ),
                });
            }
        }
        let mut inputs = vec![coefficient, density, diameter];
        for t in terms {
            inputs.push(t.input()?);
        }
        let points = dps.len();
        inputs.extend(dps);
        Ok(Self {
            model: TraverseFlowModel {
                terms: terms.len(),
                points,
                mean_velocity: false,
                area_factor: std::f64::consts::FRAC_PI_4,
                rectangular: false,
            },
            inputs,
        })
    }

    /// A rectangular section with its own width and height as inputs (A = W·H).
    pub fn rectangular(
        coefficient: Input,
        density: Input,
        width: Input,
        height: Input,
        terms: &[MethodTerm],
        dps: Vec<Input>,
    ) -> Result<Self> {
        let mut t = Self::new(coefficient, density, width, terms, dps)?;
        t.inputs.insert(3, height);
        t.model.rectangular = true;
        Ok(t)
    }

    /// The same traverse with another area factor k (A = k·D²).
    pub fn with_area_factor(mut self, k: f64) -> Self {
        self.model.area_factor = k;
        self
    }

    /// The same traverse with the mean velocity (m/s) as the output instead of the flow.
    pub fn for_mean_velocity(mut self) -> Self {
        self.model.mean_velocity = true;
        self
    }

    /// GUM budget of the flow (m³/s) at coverage probability `p`.
    pub fn gum(&self, p: f64) -> Result<GumResult> {
        gum(&self.model, &self.inputs, &Correlations::none(), p)
    }
}

/// The stage of the velocity-area method a traverse budget's input belongs to: the local
/// velocity (probe coefficient, Δp, fluid density), the local corrections and flow
/// conditions, the probe's position, the integration over the section (layout, profile
/// model) and the section's area. This is the order in which a velocity-area method accounts
/// for its errors (ISO 3966 treats local velocity, corrections and integration in turn; its
/// error clause's own headings were not read here). Inputs of a script's own model or terms
/// of another name are "other".
pub fn traverse_stage(input: &str) -> &'static str {
    let n = input.to_lowercase();
    let has = |k: &[&str]| k.iter().any(|k| n.contains(k));
    if has(&["probe coefficient", "Δp point", "δp point", "density"]) {
        "local velocity: probe, Δp, fluid"
    } else if has(&["local correction", "turbulence", "unsteadiness", "alignment", "blockage", "wall proximity"]) {
        "local corrections and flow conditions"
    } else if has(&["positioning"]) {
        "probe position"
    } else if has(&["layout", "profile model", "integration"]) {
        "integration over the section"
    } else if has(&["diameter", "width", "height", "area"]) {
        "section area"
    } else {
        "other"
    }
}

/// One stage's part of a budget: its inputs' number, the root sum of squares of their
/// contributions c·u (the inputs of a traverse model are uncorrelated) and its share of u_c².
#[derive(Debug, Clone, PartialEq)]
pub struct StagePart {
    /// Stage name (see [`traverse_stage`]).
    pub stage: &'static str,
    /// Number of inputs.
    pub inputs: usize,
    /// √Σ(c·u)², in the output's unit.
    pub u: f64,
    /// Σ share of the combined variance.
    pub share: f64,
}

/// A budget's lines summed by stage, in the method's order.
pub fn by_stage(g: &GumResult) -> Vec<StagePart> {
    const ORDER: [&str; 6] = [
        "local velocity: probe, Δp, fluid",
        "local corrections and flow conditions",
        "probe position",
        "integration over the section",
        "section area",
        "other",
    ];
    ORDER
        .iter()
        .filter_map(|stage| {
            let lines: Vec<_> = g.budget.iter().filter(|l| traverse_stage(&l.name) == *stage).collect();
            (!lines.is_empty()).then(|| StagePart {
                stage,
                inputs: lines.len(),
                u: lines.iter().map(|l| l.contribution * l.contribution).sum::<f64>().sqrt(),
                share: lines.iter().map(|l| l.share).sum(),
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::uncertainty::monte_carlo::{McOptions, monte_carlo, validate};
    use crate::uncertainty::sensitivities;

    /// The stages of a traverse budget add up to it: their variances sum to u_c² (the
    /// traverse model's inputs are uncorrelated; JCGM 100 §5.1.2).
    #[test]
    fn stages_add_up_to_the_budget() {
        let dps = dp_inputs(&[100.0, 110.0, 105.0], 0.005, 0.5).unwrap();
        let mut terms = MethodTerm::defaults(crate::section::layout::LayoutRule::EqualArea);
        terms.push(MethodTerm::new("probe positioning", 0.002, "test").unwrap());
        terms.push(MethodTerm::new("local corrections", 0.001, "test").unwrap().with_value(0.995).unwrap());
        let t = TraverseUncertainty::new(
            Input::normal("probe coefficient C", "1", 1.0, 0.004).unwrap(),
            Input::normal("density ρ", "kg/m³", 1.2, 0.002).unwrap(),
            Input::normal("diameter D", "m", 0.6, 0.001).unwrap(),
            &terms,
            dps,
        )
        .unwrap();
        let g = t.gum(0.95).unwrap();
        let parts = by_stage(&g);
        let names: Vec<&str> = parts.iter().map(|p| p.stage).collect();
        assert_eq!(
            names,
            [
                "local velocity: probe, Δp, fluid",
                "local corrections and flow conditions",
                "probe position",
                "integration over the section",
                "section area"
            ]
        );
        assert_eq!(parts[0].inputs, 5);
        let var: f64 = parts.iter().map(|p| p.u * p.u).sum();
        assert!((var.sqrt() - g.u).abs() < 1e-12 * g.u.max(1.0), "{} vs {}", var.sqrt(), g.u);
        assert!((parts.iter().map(|p| p.share).sum::<f64>() - 1.0).abs() < 1e-12);
        // The correction factor is in the value: 0.995 × the uncorrected flow.
        let plain = TraverseUncertainty::new(
            Input::normal("probe coefficient C", "1", 1.0, 0.004).unwrap(),
            Input::normal("density ρ", "kg/m³", 1.2, 0.002).unwrap(),
            Input::normal("diameter D", "m", 0.6, 0.001).unwrap(),
            &[],
            dp_inputs(&[100.0, 110.0, 105.0], 0.005, 0.5).unwrap(),
        )
        .unwrap();
        assert!((g.value / plain.gum(0.95).unwrap().value - 0.995).abs() < 1e-12);
    }

    /// A rectangle's own sides: Q = W·H·C·√(2/ρ)·mean √Δp, so u_rel(Q)² carries
    /// u_rel(W)² + u_rel(H)² (JCGM 100 §5.1.6 for a product), not twice an equivalent size's.
    #[test]
    fn rectangular_sections_use_their_own_area() {
        let dps = dp_inputs(&[100.0, 110.0], 0.0, 0.0).unwrap();
        let t = TraverseUncertainty::rectangular(
            Input::normal("C", "1", 1.0, 0.0).unwrap(),
            Input::normal("ρ", "kg/m³", 1.2, 0.0).unwrap(),
            Input::normal("W", "m", 0.8, 0.004).unwrap(),
            Input::normal("H", "m", 0.5, 0.001).unwrap(),
            &[],
            dps,
        )
        .unwrap();
        let g = t.gum(0.95).unwrap();
        let mean = ((200.0f64 / 1.2).sqrt() + (220.0f64 / 1.2).sqrt()) / 2.0;
        assert!((g.value - 0.4 * mean).abs() < 1e-12);
        let want = ((0.004f64 / 0.8).powi(2) + (0.001f64 / 0.5).powi(2)).sqrt() * g.value;
        assert!((g.u - want).abs() < 1e-12, "{} vs {want}", g.u);
    }

    /// Welch–Satterthwaite for one input with a Type A part (u_A = 1 Pa, ν_A = 9) and a
    /// Type B part (1 Pa, ν = ∞): ν = u⁴/(u_A⁴/ν_A) = 4/(1/9) = 36 (JCGM 100 §G.4.1).
    #[test]
    fn sampled_dp_inputs_combine_type_a_with_welch_satterthwaite() {
        let a = sampled_dp_inputs(&[100.0], &[1.0], &[9.0], 0.0, 0.0, "logged").unwrap();
        assert_eq!(a[0].evaluation, crate::uncertainty::Evaluation::TypeA);
        assert!((a[0].standard_uncertainty() - 1.0).abs() < 1e-12 && (a[0].dof - 9.0).abs() < 1e-9);
        let ab = sampled_dp_inputs(&[100.0], &[1.0], &[9.0], 0.0, 1.0, "logged").unwrap();
        assert!((ab[0].standard_uncertainty() - 2f64.sqrt()).abs() < 1e-12);
        assert!((ab[0].dof - 36.0).abs() < 1e-9, "{}", ab[0].dof);
        assert_eq!(ab[0].evaluation, crate::uncertainty::Evaluation::TypeB);
        assert!(sampled_dp_inputs(&[100.0, 90.0], &[1.0], &[9.0], 0.0, 0.0, "x").is_err());
    }

    /// A term's standard uncertainty is its u_rel whatever its distribution: rectangular
    /// half-width a = u√3 (JCGM 100 §4.3.7), triangular a = u√6 (§4.3.9).
    #[test]
    fn method_terms_keep_their_standard_uncertainty_in_every_distribution() {
        for d in [TermDistribution::Normal, TermDistribution::Rectangular, TermDistribution::Triangular] {
            let t = MethodTerm::new("x", 0.004, "test").unwrap().with_distribution(d);
            assert!((t.input().unwrap().standard_uncertainty() - 0.004).abs() < 1e-15, "{d:?}");
        }
        assert!(TermDistribution::parse("lognormal").unwrap_err().to_string().contains("not one of"));
        assert_eq!(
            MethodTerm::defaults(crate::LayoutRule::EqualArea).len(),
            1,
            "only the derived layout term by default"
        );
    }

    fn point_inputs(dp: Input) -> Vec<Input> {
        vec![Input::normal("C", "1", 0.997, 0.003).unwrap(), dp, Input::normal("ρ", "kg/m³", 1.200, 0.003).unwrap()]
    }

    // check-values.md §7.2 pitot point example [C]: C = 0.997 (u 0.003), Δp = 250 Pa (u 1.5),
    // ρ = 1.200 (u 0.003), all normal: v = 20.35118, GUM u_c = 0.09014, U(k=2) = 0.1803;
    // MCM mean 20.35099, u 0.09017, 95 % [20.1744, 20.5279].
    #[test]
    fn pitot_point_gum_and_monte_carlo() {
        let inputs = point_inputs(Input::normal("Δp", "Pa", 250.0, 1.5).unwrap());
        let g = gum(&PointVelocityModel, &inputs, &Correlations::none(), 0.9545).unwrap();
        assert!((g.value - 20.351_18).abs() < 1e-5);
        assert!((g.u - 0.090_14).abs() < 1e-5);
        assert!((g.expanded - 0.1803).abs() < 2e-4, "k ≈ 2 for ν = ∞ at 95.45 %");
        let mc = monte_carlo(&PointVelocityModel, &inputs, &Correlations::none(), &McOptions::default()).unwrap();
        assert!((mc.mean - 20.350_99).abs() < 3e-4, "{}", mc.mean);
        assert!((mc.u - 0.090_17).abs() < 3e-4, "{}", mc.u);
        assert!(
            (mc.symmetric.0 - 20.1744).abs() < 1e-3 && (mc.symmetric.1 - 20.5279).abs() < 1e-3,
            "{:?}",
            mc.symmetric
        );
        let g95 = gum(&PointVelocityModel, &inputs, &Correlations::none(), 0.95).unwrap();
        assert!(validate(&g95, &mc, 1).passed, "near-linear case validates at 1 significant digit");
    }

    // check-values.md §7.2 low-Δp case [C]: Δp = 5 Pa with u = 0.5 Pa rectangular: v = 2.8781,
    // GUM u 0.1442; MCM mean 2.8742, u 0.1446, 95 % [2.6305, 3.1066]: the non-linearity shifts
    // the mean and makes the interval asymmetric.
    #[test]
    fn low_dp_non_linear_case() {
        let inputs = point_inputs(Input::rectangular("Δp", "Pa", 5.0, 0.5 * 3f64.sqrt()).unwrap());
        let g = gum(&PointVelocityModel, &inputs, &Correlations::none(), 0.95).unwrap();
        assert!((g.value - 2.8781).abs() < 1e-4 && (g.u - 0.1442).abs() < 1e-4);
        let mc = monte_carlo(&PointVelocityModel, &inputs, &Correlations::none(), &McOptions::default()).unwrap();
        assert!((mc.mean - 2.8742).abs() < 1e-3, "{}", mc.mean);
        assert!((mc.u - 0.1446).abs() < 1e-3);
        assert!((mc.symmetric.0 - 2.6305).abs() < 2e-3 && (mc.symmetric.1 - 3.1066).abs() < 2e-3, "{:?}", mc.symmetric);
        assert!(mc.mean < g.value - 0.002, "Monte Carlo mean is shifted below f(x)");
        let (lo, hi) = (g.value - mc.symmetric.0, mc.symmetric.1 - g.value);
        assert!(lo > hi, "asymmetric interval: {lo} below, {hi} above");
    }

    #[test]
    fn traverse_budget_has_named_lines_and_exact_sensitivities() {
        let dps: Vec<Input> = [180.0, 210.0, 230.0, 240.0, 235.0, 225.0, 205.0, 175.0]
            .iter()
            .enumerate()
            .map(|(i, dp)| Input::normal(&format!("Δp point {}", i + 1), "Pa", *dp, 0.01 * dp).unwrap())
            .collect();
        let t = TraverseUncertainty::new(
            Input::normal("C", "1", 0.998, 0.0025).unwrap(),
            Input::normal("ρ", "kg/m³", 1.2, 0.0024).unwrap(),
            Input::normal("D", "m", 0.8, 0.0008).unwrap(),
            &MethodTerm::typical(crate::section::layout::LayoutRule::LogChebyshev),
            dps,
        )
        .unwrap();
        let g = t.gum(0.95).unwrap();
        assert_eq!(g.budget.len(), 3 + 5 + 8);
        assert!(g.budget.iter().any(|l| l.name.starts_with("layout/integration")));
        // Shares add to 1 without correlations (definition).
        assert!((g.budget.iter().map(|l| l.share).sum::<f64>() - 1.0).abs() < 1e-12);
        // Relative sensitivities: ∂Q/∂D·D/Q = 2, ∂Q/∂ρ·ρ/Q = −1/2, ∂Q/∂C·C/Q = 1 (derived, GUM 5.1.6).
        let rel = |i: usize| g.budget[i].sensitivity * g.budget[i].value / g.value;
        assert!((rel(2) - 2.0).abs() < 1e-12 && (rel(1) + 0.5).abs() < 1e-12 && (rel(0) - 1.0).abs() < 1e-12);
        assert!(g.to_string().contains("ν_eff"));
        // Mean velocity: same relative uncertainty without the diameter's share (u(Q)² = u(U)²·A² + …).
        let gv = t.clone().for_mean_velocity().gum(0.95).unwrap();
        let rel_d = g.budget[2].contribution / g.value;
        assert!(((g.u / g.value).powi(2) - (gv.u / gv.value).powi(2) - rel_d * rel_d).abs() < 1e-15);
        assert!((g.value / gv.value - std::f64::consts::PI * 0.16).abs() < 1e-12);
        let e = TraverseUncertainty::new(
            Input::normal("C", "1", 1.0, 0.0).unwrap(),
            Input::normal("ρ", "kg/m³", 1.2, 0.0).unwrap(),
            Input::normal("D", "m", 1.0, 0.0).unwrap(),
            &[],
            vec![Input::normal("Δp", "Pa", -3.0, 0.1).unwrap()],
        )
        .unwrap_err();
        assert!(e.to_string().contains("positive Δp"));
        let _ = sensitivities(&t.model, &t.inputs.iter().map(|i| i.value).collect::<Vec<_>>());
    }
}
