//! Uncertainty budgets in scripts: the GUM budget of a traverse's flow (or mean
//! velocity), its chart, and a JCGM 101 Monte Carlo check.

use rhai::{Dynamic, Map};
use stagna::io::plot::Chart;
use stagna::uncertainty::flow_models::{MethodTerm, TraverseUncertainty, dp_inputs, transducer_dp_inputs};
use stagna::uncertainty::monte_carlo::{
    AdaptiveResult, McOptions, McResult, Validation, adaptive_with, monte_carlo, monte_carlo_adaptive, sample_with,
    summarize, validate,
};
use stagna::uncertainty::{Correlations, GumResult, Input};
use stagna::units::dimension::Dimension as D;
use stagna::units::quantity::{format_number, format_sig, format_with_uncertainty};

use super::charts::Plot;
use super::tables::Tbl;
use super::*;
use crate::catalog::Doc;

/// A budget: the GUM result and the model it came from.
#[derive(Debug, Clone)]
pub struct Budget {
    /// GUM result.
    pub g: GumResult,
    /// The model and inputs (for Monte Carlo).
    pub model: BudgetModel,
    /// Output unit.
    pub unit: String,
}

/// Where a budget's model lives.
#[derive(Debug, Clone)]
pub enum BudgetModel {
    /// A traverse's flow or mean velocity, in the library.
    Traverse(TraverseUncertainty),
    /// A script's own function of named inputs.
    Script(ScriptModel),
}

/// A measurement model written in a script: a function of a map of named input values.
#[derive(Debug, Clone)]
pub struct ScriptModel {
    f: rhai::FnPtr,
    names: Vec<String>,
    inputs: Vec<Input>,
    correlations: Correlations,
}

impl ScriptModel {
    /// The model's value at `x` (in input order).
    fn eval(&self, ctx: &rhai::NativeCallContext, x: &[f64]) -> stagna::Result<f64> {
        let mut m = Map::new();
        for (n, v) in self.names.iter().zip(x) {
            m.insert(n.as_str().into(), Dynamic::from(*v));
        }
        let fail = |message: String| stagna::Error::Inconsistent { context: "measurement model", message };
        let r: Dynamic =
            self.f.call_within_context(ctx, (m,)).map_err(|e| fail(format!("the model function failed: {e}")))?;
        if let Some(q) = r.clone().try_cast::<Q>() {
            return Ok(q.q.si);
        }
        r.as_float()
            .or_else(|_| r.as_int().map(|i| i as f64))
            .map_err(|t| fail(format!("the model function must return a number, got {t}")))
    }
}

/// Per-point mean Δp (Pa), its Type A standard uncertainty (Pa) and degrees of freedom.
type Sampled = (Vec<f64>, Vec<f64>, Vec<f64>);

/// The per-point columns of a `sample_stats` table, or `None` for other dp.
fn sampled_of(d: &Dynamic) -> Res<Option<Sampled>> {
    let Some(t) = d.clone().try_cast::<super::tables::Tbl>() else { return Ok(None) };
    let has = |c: &str| t.df.get_column_names().iter().any(|n| n.as_str() == c);
    if !(has("mean_dp") && has("u_mean_dp") && has("dof")) {
        return Err(rt(
            "traverse_budget: a table as dp must be the result of sample_stats (columns mean_dp, u_mean_dp, dof)",
        ));
    }
    let (m, u, nu) = (t.column("mean_dp")?, t.column("u_mean_dp")?, t.column("dof")?);
    Ok(Some((m.si.to_vec(), u.si.to_vec(), nu.si.to_vec())))
}

fn dps_of(d: &Dynamic) -> Res<Vec<f64>> {
    if let Some((m, _, _)) = sampled_of(d)? {
        return Ok(m);
    }
    if let Some(c) = d.clone().try_cast::<Col>() {
        if c.dimension != D::PRESSURE {
            return Err(rt(format!("traverse_budget: dp must be a pressure column, got {}", describe(d))));
        }
        return Ok(c.si.to_vec());
    }
    if let Some(a) = d.clone().try_cast::<rhai::Array>() {
        return a.iter().map(|x| si_of(x, D::PRESSURE, "traverse_budget: dp")).collect();
    }
    Err(rt(format!("traverse_budget: dp must be a pressure column or an array of pressures, got {}", describe(d))))
}

/// Registers budgets.
pub fn register(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.engine.register_type_with_name::<Budget>("Budget");
    r.engine.register_type_with_name::<McCheck>("MonteCarlo");
    r.group("Uncertainty");
    budgets(r, prefs);
    budget_members(r, prefs);
}

/// Budgets of point velocities and traverses.
fn budgets(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    let tb_prefs = prefs.clone();
    r.func(
        "traverse_budget",
        &Doc::new("traverse_budget(dp, options) -> Budget", "GUM uncertainty budget of a traverse's volume flow Q = k D² · C √(2/ρ) · mean √Δp × method terms, from the point Δp values and the standard uncertainties of the shared inputs. Options: coefficient, u_coefficient; density, u_density; diameter, u_diameter for a round section, or width, u_width, height, u_height for a rectangle (its own area W·H, each side an input; sources.diameter names their source); u_rel_dp (relative standard uncertainty of each Δp, a fraction, default 0.005) and u_dp (absolute standard uncertainty of each Δp, default 0.5 Pa), combined in quadrature; transducer (a calibrated Transducer: each Δp's u comes from its calibration, √(s² + u_curve²), and u_rel_dp and u_dp count only when given). The earlier dp_rel and dp_abs still work, with a deprecation warning; sources #{coefficient, density, diameter, dp} (where each value and its u come from, printed in the budget's source column); rule (the layout/integration term: \"equal-area\", \"log-linear\", \"log-chebyshev\"); terms (method terms: by default only the layout term, which is derived; a map sets, adds or removes terms: name: () removes, name: u_rel or #{u_rel, distribution: \"normal\"|\"rectangular\"|\"triangular\", source, value} sets (value: a correction factor the model applies, default 1, e.g. local_corrections(...).budget_term()); known names layout, positioning, unsteadiness, turbulence, alignment, any other name adds a term; typical_method_terms() gives typical unsourced magnitudes to opt into); coverage (0.95); output (\"flow\" or \"velocity\"). dp may also be the table of sample_stats: each point's mean Δp then carries its Type A u from the samples, combined with u_rel_dp and u_dp (which default to 0 there), with Welch–Satterthwaite degrees of freedom.")
            .param("dp", "pressure column or array of pressures, one per point (all > 0)")
            .example("let dps = [98.Pa, 112.Pa, 118.Pa, 115.Pa, 101.Pa, 95.Pa];\nlet b = traverse_budget(dps, #{coefficient: 0.998, u_coefficient: 0.0025, density: 1.19.kg_m3, u_density: 0.0018.kg_m3, diameter: 600.mm, u_diameter: 0.9.mm, u_rel_dp: 0.005, u_dp: 0.4.Pa});\nprint(b);")
            .source("JCGM 100:2008 (GUM) §5, §G; method terms as documented in the library (ISO 3966 §10 and common practice)"),
        move |d: Dynamic, o: Map| -> Res<Budget> {
            check_keys_or_old(&o, &["coefficient", "u_coefficient", "density", "u_density", "diameter", "u_diameter", "width", "u_width", "height", "u_height", "u_rel_dp", "u_dp", "transducer", "sources", "rule", "terms", "coverage", "output"], &["dp_rel", "dp_abs"], "traverse_budget")?;
            let rel_dp = renamed_option(&o, "u_rel_dp", "dp_rel", &tb_prefs, "traverse_budget");
            let abs_dp = renamed_option(&o, "u_dp", "dp_abs", &tb_prefs, "traverse_budget");
            let sources: Map = match field(&o, "sources") {
                None => Map::new(),
                Some(m) => m.clone().try_cast().ok_or_else(|| rt("traverse_budget: 'sources' must be a map, e.g. #{coefficient: \"calibration certificate 2291\"}"))?,
            };
            check_keys(&sources, &["coefficient", "density", "diameter", "dp"], "traverse_budget sources")?;
            let source_of = |k: &str, default: &str| -> Res<String> {
                Ok(field(&sources, k).map(|d| text(d, &format!("sources.{k}"))).transpose()?.unwrap_or_else(|| default.to_string()))
            };
            const GIVEN: &str = "value and u as given in the script (no source stated)";
            let dps = dps_of(&d)?;
            let req = |k: &str| field(&o, k).ok_or_else(|| rt(format!("traverse_budget: option '{k}' is required")));
            let c = number(req("coefficient")?, "coefficient")?;
            let uc = number(req("u_coefficient")?, "u_coefficient")?;
            let rho = si_of(req("density")?, D::DENSITY, "density")?;
            let urho = si_of(req("u_density")?, D::DENSITY, "u_density")?;
            // A round section by its diameter, or a rectangle by its own width and height.
            let sides = match (field(&o, "width"), field(&o, "height"), field(&o, "diameter")) {
                (Some(_), Some(_), None) => Some((
                    si_of(req("width")?, D::LENGTH, "width")?,
                    si_of(req("u_width")?, D::LENGTH, "u_width")?,
                    si_of(req("height")?, D::LENGTH, "height")?,
                    si_of(req("u_height")?, D::LENGTH, "u_height")?,
                )),
                (None, None, Some(_)) => None,
                _ => return Err(rt("traverse_budget: give diameter and u_diameter (a round section), or width, u_width, height and u_height (a rectangle)")),
            };
            let (dd, ud) = match sides {
                None => (si_of(req("diameter")?, D::LENGTH, "diameter")?, si_of(req("u_diameter")?, D::LENGTH, "u_diameter")?),
                Some((w, uw, _, _)) => (w, uw),
            };
            let transducer: Option<stagna::instruments::transducer::Transducer> = match field(&o, "transducer") {
                None => None,
                Some(t) => Some(t.clone().try_cast().ok_or_else(|| rt("traverse_budget: 'transducer' must be a Transducer (setup.transducer(id))"))?),
            };
            // With a calibrated transducer its calibration is the measured Δp term; the
            // other terms count only when given.
            let sampled = sampled_of(&d)?;
            let (rel_default, abs_default) = if transducer.is_some() || sampled.is_some() { (0.0, 0.0) } else { (0.005, 0.5) };
            let defaulted = transducer.is_none() && sampled.is_none() && (rel_dp.is_none() || abs_dp.is_none());
            let dp_rel = rel_dp.map(|x| number(x, "u_rel_dp")).transpose()?.unwrap_or(rel_default);
            let dp_abs = abs_dp.map(|x| si_of(x, D::PRESSURE, "u_dp")).transpose()?.unwrap_or(abs_default);
            let dp_source = source_of(
                "dp",
                if defaulted {
                    "default u(Δp) = 0.5 % of Δp with 0.5 Pa (common practice, no source): give u_rel_dp and u_dp"
                } else {
                    "u_rel_dp and u_dp as given in the script (no source stated)"
                },
            )?;
            let coverage = field(&o, "coverage").map(|x| number(x, "coverage")).transpose()?.unwrap_or(0.95);
            let rule = match field(&o, "rule").map(|x| text(x, "rule")).transpose()?.as_deref() {
                None | Some("equal-area") => stagna::LayoutRule::EqualArea,
                Some("log-linear") => stagna::LayoutRule::LogLinear,
                Some("log-chebyshev") => stagna::LayoutRule::LogChebyshev,
                Some(o) => return Err(rt(format!("traverse_budget: unknown rule \"{o}\""))),
            };
            let velocity = match field(&o, "output").map(|x| text(x, "output")).transpose()?.as_deref() {
                None | Some("flow") => false,
                Some("velocity") => true,
                Some(o) => return Err(rt(format!("traverse_budget: output is \"flow\" or \"velocity\", got \"{o}\""))),
            };
            let points = match (&transducer, &sampled) {
                (Some(_), Some(_)) => {
                    return Err(rt("traverse_budget: give the transducer to sample_stats (it corrects the samples) and the resulting table here, not both"));
                }
                (None, Some((m, ua, nu))) => {
                    let src = source_of(
                        "dp",
                        &format!(
                            "Type A from the logged samples (u of each mean from its effective number of independent samples){}",
                            if dp_rel > 0.0 || dp_abs > 0.0 { ", with u_rel_dp and u_dp as given" } else { "" }
                        ),
                    )?;
                    lib(stagna::uncertainty::flow_models::sampled_dp_inputs(m, ua, nu, dp_rel, dp_abs, &src))?
                }
                (None, None) => lib(dp_inputs(&dps, dp_rel, dp_abs))?.into_iter().map(|i| i.with_source(&dp_source)).collect(),
                (Some(t), None) if field(&sources, "dp").is_some() => {
                    lib(transducer_dp_inputs(t, &dps, dp_rel, dp_abs))?.into_iter().map(|i| i.with_source(&dp_source)).collect()
                }
                (Some(t), None) => lib(transducer_dp_inputs(t, &dps, dp_rel, dp_abs))?,
            };
            let coefficient = lib(Input::normal("probe coefficient C", "1", c, uc))?.with_source(&source_of("coefficient", GIVEN)?);
            let density = lib(Input::normal("density ρ", "kg/m³", rho, urho))?.with_source(&source_of("density", GIVEN)?);
            let terms = method_terms(field(&o, "terms"), rule, "traverse_budget")?;
            let mut t = match sides {
                None => lib(TraverseUncertainty::new(
                    coefficient,
                    density,
                    lib(Input::normal("diameter D", "m", dd, ud))?.with_source(&source_of("diameter", GIVEN)?),
                    &terms,
                    points,
                ))?,
                Some((w, uw, h, uh)) => lib(TraverseUncertainty::rectangular(
                    coefficient,
                    density,
                    lib(Input::normal("width W", "m", w, uw))?.with_source(&source_of("diameter", GIVEN)?),
                    lib(Input::normal("height H", "m", h, uh))?.with_source(&source_of("diameter", GIVEN)?),
                    &terms,
                    points,
                ))?,
            };
            if velocity {
                t = t.for_mean_velocity();
            }
            let g = lib(t.gum(coverage))?;
            Ok(Budget { g, model: BudgetModel::Traverse(t), unit: if velocity { "m/s" } else { "m³/s" }.into() })
        },
    );
    r.engine.register_fn("to_string", |b: &mut Budget| {
        // The table, then the result line with the output's unit.
        let text = b.g.to_string();
        let table = text.trim_end().rsplit_once('\n').map_or(text.as_str(), |(t, _)| t);
        format!("Budget (output in {}):\n{table}\n{}", b.unit, b.g.result_line_in(&b.unit))
    });
    for (name, summary) in [
        ("value", "The output estimate y (SI: m³/s or m/s)."),
        ("u", "Combined standard uncertainty u_c(y) (k = 1), absolute, SI."),
        ("u_rel_pct", "Relative combined standard uncertainty u_c/y, %."),
        ("U", "Expanded uncertainty U = k u_c, absolute, SI (its coverage factor in .k)."),
        ("U_rel_pct", "Relative expanded uncertainty U/y, %."),
        ("k", "Coverage factor of U (Student t at the effective degrees of freedom)."),
        ("expanded", "Deprecated: write .U (expanded uncertainty); works for this release, with a warning."),
        (
            "relative",
            "Deprecated: write .U_rel_pct (relative expanded uncertainty, %); works for this release, with a warning.",
        ),
    ] {
        let p = prefs.clone();
        r.property(
            "Budget",
            name,
            &Doc::new(&format!("budget.{name} -> number"), summary)
                .example(&format!("let b = traverse_budget([100.Pa, 110.Pa, 105.Pa, 98.Pa], #{{coefficient: 1.0, u_coefficient: 0.005, density: 1.2.kg_m3, u_density: 0.002.kg_m3, diameter: 500.mm, u_diameter: 1.mm}});\nprint(b.{name});"))
                .source("JCGM 100:2008 (GUM) §5–6, §G"),
            move |b: &mut Budget| match name {
                "value" => b.g.value,
                "u" => b.g.u,
                "u_rel_pct" => 100.0 * b.g.u / b.g.value,
                "U" => b.g.expanded,
                "k" => b.g.k,
                "expanded" => {
                    super::warn_once(&p, "budget.expanded is deprecated and will be removed in the next release; write budget.U");
                    b.g.expanded
                }
                "relative" => {
                    super::warn_once(&p, "budget.relative is deprecated and will be removed in the next release; write budget.U_rel_pct");
                    100.0 * b.g.expanded / b.g.value
                }
                _ => 100.0 * b.g.expanded / b.g.value,
            },
        );
    }
}

/// One input of a script's model from its map.
fn model_input(name: &str, spec: &Dynamic) -> Res<Input> {
    let what = format!("model_budget input '{name}'");
    let m: Map = spec.clone().try_cast().ok_or_else(|| {
        rt(format!("{what}: give a map such as #{{value: 1.0, u: 0.01}}, #{{value, distribution: \"rectangular\", half_width}}, #{{value, U, k}} or #{{readings: [...]}}"))
    })?;
    check_keys(
        &m,
        &["value", "u", "distribution", "half_width", "U", "k", "readings", "samples", "dof", "unit", "source"],
        &what,
    )?;
    let unit = field(&m, "unit").map(|d| text(d, "unit")).transpose()?.unwrap_or_default();
    let nums = |k: &str| -> Res<Vec<f64>> {
        let a: rhai::Array = field(&m, k)
            .and_then(|d| d.clone().try_cast())
            .ok_or_else(|| rt(format!("{what}: {k} must be an array of numbers")))?;
        a.iter().map(|x| number(x, k)).collect()
    };
    let value = || {
        field(&m, "value")
            .map(|d| number(d, "value"))
            .transpose()?
            .ok_or_else(|| rt(format!("{what}: value is required")))
    };
    let given = |k: &str| field(&m, k).is_some();
    let mut input = if given("readings") {
        lib(Input::type_a(name, &unit, &nums("readings")?))?
    } else if given("samples") {
        lib(Input::samples(name, &unit, nums("samples")?))?
    } else if given("U") {
        let k = field(&m, "k")
            .map(|d| number(d, "k"))
            .transpose()?
            .ok_or_else(|| rt(format!("{what}: U needs its coverage factor k")))?;
        lib(Input::from_expanded(name, &unit, value()?, number(field(&m, "U").unwrap_or(&Dynamic::UNIT), "U")?, k))?
    } else {
        let dist =
            field(&m, "distribution").map(|d| text(d, "distribution")).transpose()?.unwrap_or_else(|| "normal".into());
        match dist.as_str() {
            "normal" => {
                let u = field(&m, "u")
                    .map(|d| number(d, "u"))
                    .transpose()?
                    .ok_or_else(|| rt(format!("{what}: a normal input needs u (its standard uncertainty)")))?;
                lib(Input::normal(name, &unit, value()?, u))?
            }
            "rectangular" | "triangular" => {
                let a = field(&m, "half_width")
                    .map(|d| number(d, "half_width"))
                    .transpose()?
                    .ok_or_else(|| rt(format!("{what}: a {dist} input needs half_width")))?;
                if dist == "rectangular" {
                    lib(Input::rectangular(name, &unit, value()?, a))?
                } else {
                    lib(Input::triangular(name, &unit, value()?, a))?
                }
            }
            o => return Err(rt(format!("{what}: distribution \"{o}\" is not one of normal, rectangular, triangular"))),
        }
    };
    if let Some(d) = field(&m, "dof") {
        input = lib(input.with_dof(number(d, "dof")?))?;
    }
    let source = field(&m, "source")
        .map(|d| text(d, "source"))
        .transpose()?
        .unwrap_or_else(|| "as given in the script (no source stated)".into());
    Ok(input.with_source(&source))
}

/// A budget of a script's own model: GUM with sensitivities by central differences.
fn model_budget(ctx: &rhai::NativeCallContext, f: rhai::FnPtr, spec: &Map) -> Res<Budget> {
    check_keys(spec, &["inputs", "correlations", "coverage", "unit"], "model_budget")?;
    let inputs_spec = field(spec, "inputs")
        .ok_or_else(|| rt("model_budget: inputs is required (a map of name → input, or an array of #{name, ...})"))?;
    let mut named: Vec<(String, Dynamic)> = Vec::new();
    if let Some(m) = inputs_spec.clone().try_cast::<Map>() {
        named.extend(m.into_iter().map(|(k, v)| (k.to_string(), v)));
    } else if let Some(a) = inputs_spec.clone().try_cast::<rhai::Array>() {
        for d in a {
            let m: Map =
                d.clone().try_cast().ok_or_else(|| rt("model_budget: each input in the array is a map with a name"))?;
            let n = field(&m, "name")
                .map(|d| text(d, "name"))
                .transpose()?
                .ok_or_else(|| rt("model_budget: each input in the array needs a name"))?;
            let mut rest = m.clone();
            rest.remove("name");
            named.push((n, Dynamic::from(rest)));
        }
    } else {
        return Err(rt("model_budget: inputs must be a map of name → input or an array of #{name, ...}"));
    }
    if named.is_empty() {
        return Err(rt("model_budget: no inputs"));
    }
    let names: Vec<String> = named.iter().map(|(n, _)| n.clone()).collect();
    let inputs: Vec<Input> = named.iter().map(|(n, d)| model_input(n, d)).collect::<Res<_>>()?;
    let mut correlations = Correlations::none();
    if let Some(c) = field(spec, "correlations") {
        let a: rhai::Array =
            c.clone().try_cast().ok_or_else(|| rt("model_budget: correlations is an array of [name, name, r]"))?;
        for e in a {
            let t: rhai::Array = e.try_cast().ok_or_else(|| rt("model_budget: each correlation is [name, name, r]"))?;
            if t.len() != 3 {
                return Err(rt("model_budget: each correlation is [name, name, r]"));
            }
            let idx = |d: &Dynamic| -> Res<usize> {
                let n = text(d, "correlation input")?;
                names
                    .iter()
                    .position(|x| *x == n)
                    .ok_or_else(|| rt(format!("model_budget: correlation names '{n}', which is not an input")))
            };
            correlations = lib(correlations.with(idx(&t[0])?, idx(&t[1])?, number(&t[2], "r")?))?;
        }
    }
    let coverage = field(spec, "coverage").map(|d| number(d, "coverage")).transpose()?.unwrap_or(0.95);
    let unit = field(spec, "unit").map(|d| text(d, "unit")).transpose()?.unwrap_or_default();
    let model = ScriptModel { f, names, inputs: inputs.clone(), correlations: correlations.clone() };
    let x: Vec<f64> = inputs.iter().map(|i| i.value).collect();
    let y = lib(model.eval(ctx, &x))?;
    // ∂f/∂x_i by central differences with a step of u(x_i)/1000 (or 10⁻⁶ of the value where
    // u is zero): second-order accurate, exact for a linear model up to rounding.
    let mut c = Vec::with_capacity(x.len());
    let mut xs = x.clone();
    for (i, inp) in inputs.iter().enumerate() {
        let u = inp.standard_uncertainty();
        let h = if u > 0.0 { u * 1e-3 } else { 1e-6 * x[i].abs().max(1.0) };
        xs[i] = x[i] + h;
        let up = lib(model.eval(ctx, &xs))?;
        xs[i] = x[i] - h;
        let down = lib(model.eval(ctx, &xs))?;
        xs[i] = x[i];
        c.push((up - down) / (2.0 * h));
    }
    let g = lib(stagna::uncertainty::gum_from(y, &c, &inputs, &correlations, coverage))?;
    Ok(Budget { g, model: BudgetModel::Script(model), unit })
}

/// What a budget gives: table, chart, Monte Carlo.
fn budget_members(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.func(
        "model_budget",
        &Doc::new(
            "model_budget(model, spec) -> Budget",
            "A GUM budget of your own measurement model: `model` is a function of a map of named input values returning the output (a number, or a quantity in SI); spec has inputs (a map of name → input, or an array of #{name, ...} to keep their order), correlations ([[name, name, r], ...]), coverage (0.95) and unit (the output's unit label). Each input is #{value, u} (normal), #{value, distribution: \"rectangular\"|\"triangular\", half_width}, #{value, U, k} (a certificate's expanded uncertainty), #{readings: [...]} (Type A: mean, s/√n, n − 1 degrees of freedom) or #{samples: [...]}, with optional dof, unit and source. Sensitivities by central differences (step u/1000; numerical, second-order); budget.monte_carlo() then propagates the distributions through the same function (JCGM 101, one trial at a time, adaptive up to 2·10⁶ trials) and says which interval to report.",
        )
        .param("model", "a function (closure) of one map argument")
        .param("spec", "map: inputs, correlations, coverage, unit")
        .example("let b = model_budget(|x| x.a + x.b * x.c, #{\n    inputs: #{a: #{value: 1.0, u: 0.1}, b: #{value: 2.0, distribution: \"rectangular\", half_width: 0.2}, c: #{readings: [3.01, 2.98, 3.02, 2.99]}},\n    unit: \"mm\"});\nprint(b);")
        .source("JCGM 100:2008 §5 (law of propagation; c_i numerically as §5.1.3 allows), §G (ν_eff); JCGM 101:2008 §7–8 for its Monte Carlo"),
        |ctx: rhai::NativeCallContext, f: rhai::FnPtr, spec: Map| -> Res<Budget> { model_budget(&ctx, f, &spec) },
    );
    r.func(
        "typical_method_terms",
        &Doc::new("typical_method_terms() -> Map", "Typical magnitudes of the method terms of a calibrated pitot-static traverse, as a terms map for traverse_budget or a campaign's uncertainty: positioning 0.25 %, unsteadiness 0.5 %, turbulence 0.5 %, alignment 0.2 % (relative standard uncertainties). They have no published source, are off by default, and print as such in the budget's source column: replace them with measured values (sample_stats) or the method's own where you have them.")
            .example("let b = traverse_budget([100.Pa, 110.Pa, 105.Pa, 98.Pa], #{coefficient: 1.0, u_coefficient: 0.005, density: 1.2.kg_m3, u_density: 0.002.kg_m3, diameter: 500.mm, u_diameter: 1.mm, terms: typical_method_terms()});\nprint(b);")
            .source("common practice, no source (typical magnitudes)"),
        typical_terms_map,
    );
    r.method(
        "Budget",
        "table",
        &Doc::new("budget.table() -> Table", "The budget lines: input, unit, value, standard uncertainty, sensitivity, contribution, share of the variance, source.")
            .example("let b = traverse_budget([100.Pa, 110.Pa, 105.Pa, 98.Pa], #{coefficient: 1.0, u_coefficient: 0.005, density: 1.2.kg_m3, u_density: 0.002.kg_m3, diameter: 500.mm, u_diameter: 1.mm});\nprint(b.table().head(4));")
            .source("JCGM 100:2008 (GUM) §8"),
        |b: &mut Budget| -> Res<Tbl> {
            use polars::prelude::{DataFrame, NamedFrom, Series};
            let l = &b.g.budget;
            let df = DataFrame::new_infer_height(vec![
                Series::new("input".into(), l.iter().map(|x| x.name.clone()).collect::<Vec<_>>()).into(),
                Series::new("unit".into(), l.iter().map(|x| x.unit.clone()).collect::<Vec<_>>()).into(),
                Series::new("value".into(), l.iter().map(|x| x.value).collect::<Vec<_>>()).into(),
                Series::new("u".into(), l.iter().map(|x| x.u).collect::<Vec<_>>()).into(),
                Series::new("sensitivity".into(), l.iter().map(|x| x.sensitivity).collect::<Vec<_>>()).into(),
                Series::new("contribution".into(), l.iter().map(|x| x.contribution).collect::<Vec<_>>()).into(),
                Series::new("share_pct".into(), l.iter().map(|x| 100.0 * x.share).collect::<Vec<_>>()).into(),
                Series::new("source".into(), l.iter().map(|x| x.source.clone()).collect::<Vec<_>>()).into(),
            ])
            .map_err(|e| rt(e.to_string()))?;
            Ok(Tbl::new(df))
        },
    );
    r.method(
        "Budget",
        "by_stage",
        &Doc::new("budget.by_stage() -> Table", "The budget summed by the stages of the velocity-area method, in its order: local velocity (probe coefficient, Δp, fluid), local corrections and flow conditions, probe position, integration over the section (layout or profile model), section area, and other (a script's own inputs). Columns: stage, inputs, u (root sum of squares of the stage's c·u, in the output's unit), u_rel_pct and share_pct of the combined variance. The stages' order is the one in which a velocity-area method accounts for its errors; ISO 3966's error clause's own headings were not read here.")
            .example("let b = traverse_budget([100.Pa, 110.Pa, 105.Pa, 98.Pa], #{coefficient: 1.0, u_coefficient: 0.005, density: 1.2.kg_m3, u_density: 0.002.kg_m3, diameter: 500.mm, u_diameter: 1.mm, terms: #{positioning: 0.002}});\ndisplay(b.by_stage());")
            .source("JCGM 100:2008 §5.1.2 (uncorrelated contributions add in quadrature); the stages of the velocity-area method (ISO 3966 treats local velocity, corrections and integration in turn: clause titles read, error clause not re-read)"),
        |b: &mut Budget| -> Res<Tbl> {
            use polars::prelude::{DataFrame, NamedFrom, Series};
            let parts = stagna::uncertainty::flow_models::by_stage(&b.g);
            let y = b.g.value.abs();
            let df = DataFrame::new_infer_height(vec![
                Series::new("stage".into(), parts.iter().map(|p| p.stage.to_string()).collect::<Vec<_>>()).into(),
                Series::new("inputs".into(), parts.iter().map(|p| p.inputs as i64).collect::<Vec<_>>()).into(),
                Series::new("u".into(), parts.iter().map(|p| p.u).collect::<Vec<_>>()).into(),
                Series::new("u_rel_pct".into(), parts.iter().map(|p| 100.0 * p.u / y).collect::<Vec<_>>()).into(),
                Series::new("share_pct".into(), parts.iter().map(|p| 100.0 * p.share).collect::<Vec<_>>()).into(),
            ])
            .map_err(|e| rt(e.to_string()))?;
            let mut t = Tbl::new(df);
            if !b.unit.is_empty() {
                t.units.insert("u".into(), b.unit.clone());
            }
            t.units.insert("u_rel_pct".into(), "%".into());
            t.units.insert("share_pct".into(), "%".into());
            Ok(t)
        },
    );
    r.method(
        "Budget",
        "chart",
        &Doc::new("budget.chart() -> Plot", "Each input's share of the combined variance as bars.")
            .example("let b = traverse_budget([100.Pa, 110.Pa, 105.Pa, 98.Pa], #{coefficient: 1.0, u_coefficient: 0.005, density: 1.2.kg_m3, u_density: 0.002.kg_m3, diameter: 500.mm, u_diameter: 1.mm});\nprint(b.chart());")
            .source("JCGM 100:2008 (GUM) §8"),
        |b: &mut Budget| Plot::Chart(Chart::budget("uncertainty budget", &b.g)),
    );
    for arity in [0usize, 1] {
        let pp = prefs.clone();
        let sig =
            if arity == 0 { "budget.monte_carlo() -> MonteCarlo" } else { "budget.monte_carlo(trials) -> MonteCarlo" };
        let summary = if arity == 0 {
            "Propagation of distributions (JCGM 101:2008) with the budget's model and inputs, by the adaptive procedure (§7.9): sequences of 10⁴ trials until the mean, u and interval ends are stable to 2 significant digits of u (at most 10⁷ trials). Then the GUM interval y ± U is compared with the Monte Carlo interval (§8) and the result says which interval to report and why. Seeded, so repeatable."
        } else {
            "As monte_carlo(), with a fixed number of trials instead of the adaptive procedure."
        };
        let mut doc = Doc::new(sig, summary)
            .example(&format!("let b = traverse_budget([100.Pa, 110.Pa, 105.Pa, 98.Pa], #{{coefficient: 1.0, u_coefficient: 0.005, density: 1.2.kg_m3, u_density: 0.002.kg_m3, diameter: 500.mm, u_diameter: 1.mm}});\nprint(b.monte_carlo({}));", if arity == 0 { "" } else { "20000" }))
            .source("JCGM 101:2008 §7 (trials, intervals), §7.9 (adaptive procedure), §8 (validation)");
        if arity == 1 {
            doc = doc.param("trials", "number of trials, from 10 000 to 50 000 000");
        }
        let f = move |ctx: &rhai::NativeCallContext, b: &mut Budget, n: Option<i64>| -> Res<McCheck> {
            let cancel = Some(super::prefs(&pp).interrupt);
            // A script's model runs in one thread through the engine: fewer trials at most.
            let script_cap: i64 = 2_000_000;
            let (mc, adaptive) = match (n, &b.model) {
                (Some(n), _) if !(10_000..=50_000_000).contains(&n) => {
                    return Err(rt("monte_carlo: trials from 10 000 to 50 000 000"));
                }
                (Some(n), BudgetModel::Script(_)) if n > script_cap => {
                    return Err(rt(format!(
                        "monte_carlo: a script's model runs at most {script_cap} trials (it is evaluated one trial at a time by the script engine)"
                    )));
                }
                (Some(n), BudgetModel::Traverse(t)) => {
                    let progress = super::progress_for(&pp, "Monte Carlo trials");
                    let opts = McOptions {
                        trials: n as usize,
                        coverage: b.g.coverage,
                        cancel,
                        progress,
                        ..Default::default()
                    };
                    (lib(monte_carlo(&t.model, &t.inputs, &Correlations::none(), &opts))?, None)
                }
                (Some(n), BudgetModel::Script(m)) => {
                    let opts = McOptions { trials: n as usize, coverage: b.g.coverage, ..Default::default() };
                    let v =
                        lib(sample_with(&m.inputs, &m.correlations, opts.trials, opts.seed, cancel.as_deref(), |x| {
                            m.eval(ctx, x)
                        }))?;
                    (lib(summarize(v, opts.coverage))?, None)
                }
                (None, BudgetModel::Traverse(t)) => {
                    let opts = McOptions { trials: 10_000_000, coverage: b.g.coverage, cancel, ..Default::default() };
                    let a = lib(monte_carlo_adaptive(&t.model, &t.inputs, &Correlations::none(), 2, &opts))?;
                    (a.result.clone(), Some(a))
                }
                (None, BudgetModel::Script(m)) => {
                    let opts = McOptions {
                        trials: script_cap as usize,
                        coverage: b.g.coverage,
                        cancel: cancel.clone(),
                        ..Default::default()
                    };
                    let a = lib(adaptive_with(
                        |k, seed| {
                            sample_with(&m.inputs, &m.correlations, k, seed, cancel.as_deref(), |x| m.eval(ctx, x))
                        },
                        2,
                        &opts,
                    ))?;
                    (a.result.clone(), Some(a))
                }
            };
            let v = validate(&b.g, &mc, 2);
            Ok(McCheck { gum: b.g.clone(), mc, v, adaptive, unit: b.unit.clone() })
        };
        if arity == 0 {
            r.method("Budget", "monte_carlo", &doc, move |ctx: rhai::NativeCallContext, b: &mut Budget| {
                f(&ctx, b, None)
            });
        } else {
            r.method("Budget", "monte_carlo", &doc, move |ctx: rhai::NativeCallContext, b: &mut Budget, n: i64| {
                f(&ctx, b, Some(n))
            });
        }
    }
    mc_members(r);
}

/// A Monte Carlo run on a budget's model and its comparison with the GUM result.
#[derive(Debug, Clone)]
pub struct McCheck {
    gum: GumResult,
    mc: McResult,
    v: Validation,
    adaptive: Option<AdaptiveResult>,
    unit: String,
}

impl McCheck {
    /// Which interval to report, and why (JCGM 101 §8).
    fn verdict(&self) -> (&'static str, String) {
        // Differences to 3 figures, so that one just past δ does not print as δ; δ is a
        // half unit of a decade and prints exactly.
        let d = |x: f64| stagna::units::quantity::format_figures(x, 3);
        let unit = &self.unit;
        if self.v.passed {
            (
                "GUM",
                format!(
                    "the GUM interval's ends lie within δ = {} {unit} of the Monte Carlo ones ({} and {} {unit} apart), so the GUM result is validated at 2 significant digits of u (JCGM 101:2008 §8): report y ± U.",
                    stagna::units::quantity::format_figures(self.v.tolerance, 1),
                    d(self.v.d_low),
                    d(self.v.d_high)
                ),
            )
        } else {
            let stable = match &self.adaptive {
                Some(a) if !a.stabilized => {
                    " The Monte Carlo run reached its trial limit before it stabilised, so its last digit is uncertain too."
                }
                Some(_) => "",
                None => {
                    " With a fixed number of trials the Monte Carlo ends carry sampling noise of their own; budget.monte_carlo() without a number runs the adaptive procedure (§7.9) until they are stable."
                }
            };
            (
                "Monte Carlo",
                format!(
                    "the GUM interval's ends differ from the Monte Carlo ones by {} and {} {unit}, more than δ = {} {unit} for 2 significant digits of u (JCGM 101:2008 §8): report the Monte Carlo interval. It propagates the input distributions through the model itself, where the GUM result linearises the model and assumes a normal or t output.{stable}",
                    d(self.v.d_low),
                    d(self.v.d_high),
                    stagna::units::quantity::format_figures(self.v.tolerance, 1)
                ),
            )
        }
    }
}

impl std::fmt::Display for McCheck {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let (u, unit, p) = (self.mc.u, &self.unit, 100.0 * self.mc.coverage);
        let at_u = |x: f64| format_with_uncertainty(x, u).0;
        let how = match &self.adaptive {
            Some(a) if a.stabilized => format!(
                "adaptive procedure (§7.9), stable at 2 significant digits of u after {} sequences of {}",
                a.sequences, a.per_sequence
            ),
            Some(a) => format!(
                "adaptive procedure (§7.9), NOT stable: stopped at the limit after {} sequences of {}",
                a.sequences, a.per_sequence
            ),
            None => "fixed number of trials".into(),
        };
        writeln!(f, "Monte Carlo (JCGM 101:2008): {} trials, {how}", self.mc.trials)?;
        let (ys, us) = format_with_uncertainty(self.mc.mean, u);
        writeln!(f, "  y = {ys} {unit}, u = {us} {unit} (standard)")?;
        writeln!(
            f,
            "  {} % interval, probabilistically symmetric: [{}, {}] {unit}; shortest: [{}, {}] {unit}",
            format_number(p),
            at_u(self.mc.symmetric.0),
            at_u(self.mc.symmetric.1),
            at_u(self.mc.shortest.0),
            at_u(self.mc.shortest.1)
        )?;
        writeln!(
            f,
            "  GUM: y ± U = [{}, {}] {unit} (k = {})",
            at_u(self.gum.value - self.gum.expanded),
            at_u(self.gum.value + self.gum.expanded),
            format_sig(self.gum.k, 3)
        )?;
        write!(f, "  Verdict: {}", self.verdict().1)
    }
}

/// What a Monte Carlo check gives.
fn mc_members(r: &mut Registrar<'_>) {
    r.engine.register_fn("to_string", |m: &mut McCheck| m.to_string());
    let ex = "let b = traverse_budget([100.Pa, 110.Pa, 105.Pa, 98.Pa], #{coefficient: 1.0, u_coefficient: 0.005, density: 1.2.kg_m3, u_density: 0.002.kg_m3, diameter: 500.mm, u_diameter: 1.mm});\nlet mc = b.monte_carlo();\n";
    type Getter = fn(&McCheck) -> Dynamic;
    let props: [(&str, &str, &str, Getter); 14] = [
        ("trials", "int", "Trials run, M (all sequences for the adaptive procedure).", |m| {
            Dynamic::from(m.mc.trials as i64)
        }),
        (
            "mean",
            "number",
            "Mean of the model values, the Monte Carlo estimate of y (SI, the budget's output unit).",
            |m| Dynamic::from(m.mc.mean),
        ),
        ("u", "number", "Standard deviation of the model values, u(y) (standard, SI).", |m| Dynamic::from(m.mc.u)),
        ("low", "number", "Lower end of the probabilistically symmetric coverage interval (SI).", |m| {
            Dynamic::from(m.mc.symmetric.0)
        }),
        ("high", "number", "Upper end of the probabilistically symmetric coverage interval (SI).", |m| {
            Dynamic::from(m.mc.symmetric.1)
        }),
        ("shortest_low", "number", "Lower end of the shortest coverage interval (SI).", |m| {
            Dynamic::from(m.mc.shortest.0)
        }),
        ("shortest_high", "number", "Upper end of the shortest coverage interval (SI).", |m| {
            Dynamic::from(m.mc.shortest.1)
        }),
        ("coverage", "number", "Coverage probability p of the intervals (a fraction).", |m| {
            Dynamic::from(m.mc.coverage)
        }),
        (
            "validated",
            "bool",
            "Whether both ends of the GUM interval y ± U lie within δ of the Monte Carlo ones (§8).",
            |m| Dynamic::from(m.v.passed),
        ),
        (
            "tolerance",
            "number",
            "The numerical tolerance δ for 2 significant digits of the GUM u (§7.9.2), SI.",
            |m| Dynamic::from(m.v.tolerance),
        ),
        ("d_low", "number", "|y − U − low|, SI.", |m| Dynamic::from(m.v.d_low)),
        ("d_high", "number", "|y + U − high|, SI.", |m| Dynamic::from(m.v.d_high)),
        (
            "stabilized",
            "bool",
            "For the adaptive procedure, whether the results stabilised before the trial limit; true for a fixed number of trials.",
            |m| Dynamic::from(m.adaptive.as_ref().is_none_or(|a| a.stabilized)),
        ),
        ("report", "string", "Which interval to report: \"GUM\" or \"Monte Carlo\" (see .reason).", |m| {
            Dynamic::from(m.verdict().0.to_string())
        }),
    ];
    for (name, ty, summary, get) in props {
        r.property(
            "MonteCarlo",
            name,
            &Doc::new(&format!("mc.{name} -> {ty}"), summary)
                .example(&format!("{ex}print(mc.{name});"))
                .source("JCGM 101:2008 §7–8"),
            move |m: &mut McCheck| get(m),
        );
    }
    r.property(
        "MonteCarlo",
        "reason",
        &Doc::new("mc.reason -> string", "Why that interval: the comparison in words, with δ and the differences.")
            .example(&format!("{ex}print(mc.reason);"))
            .source("JCGM 101:2008 §8"),
        |m: &mut McCheck| m.verdict().1,
    );
}

/// Short names of the known method terms and their budget names.
const KNOWN_TERMS: [(&str, &str); 4] = [
    ("positioning", "probe positioning"),
    ("unsteadiness", "flow unsteadiness"),
    ("turbulence", "turbulence"),
    ("alignment", "probe alignment"),
];

/// The method terms of a budget: the defaults of the rule (the layout term only) changed by
/// a `terms` map: `name: ()` removes a term, `name: u_rel` or `name: #{u_rel, distribution,
/// source}` sets or adds one. `layout` names the layout/integration term.
pub fn method_terms(spec: Option<&Dynamic>, rule: stagna::LayoutRule, what: &str) -> Res<Vec<MethodTerm>> {
    use stagna::uncertainty::flow_models::TermDistribution;
    let mut terms = MethodTerm::defaults(rule);
    let Some(spec) = spec else { return Ok(terms) };
    let m: Map = spec.clone().try_cast().ok_or_else(|| {
        rt(format!("{what}: 'terms' is a map of term name to () (remove), a relative standard uncertainty, or #{{u_rel, distribution, source}}"))
    })?;
    for (key, v) in m {
        let key = key.to_string();
        let name = if key == "layout" {
            MethodTerm::layout(rule).name
        } else {
            KNOWN_TERMS.iter().find(|(k, _)| *k == key).map_or_else(|| key.replace('_', " "), |(_, n)| n.to_string())
        };
        terms.retain(|t| t.name != name);
        if v.is_unit() {
            continue;
        }
        const GIVEN: &str = "as given in the script (no source stated)";
        let term = if v.is_float() || v.is_int() {
            lib(MethodTerm::new(&name, number(&v, &format!("terms.{key}"))?, GIVEN))?
        } else {
            let t: Map = v.try_cast().ok_or_else(|| {
                rt(format!("{what}: terms.{key} must be (), a number (relative standard uncertainty) or #{{u_rel, distribution, source}}"))
            })?;
            check_keys(&t, &["u_rel", "distribution", "source", "value"], &format!("{what} terms.{key}"))?;
            let u = number(
                field(&t, "u_rel").ok_or_else(|| {
                    rt(format!("{what}: terms.{key} needs u_rel (relative standard uncertainty, a fraction)"))
                })?,
                "u_rel",
            )?;
            let source = field(&t, "source").map(|d| text(d, "source")).transpose()?.unwrap_or_else(|| GIVEN.into());
            let dist = match field(&t, "distribution") {
                Some(d) => lib(TermDistribution::parse(&text(d, "distribution")?))?,
                None => TermDistribution::Normal,
            };
            let term = lib(MethodTerm::new(&name, u, &source))?.with_distribution(dist);
            match field(&t, "value") {
                Some(x) => lib(term.with_value(number(x, &format!("terms.{key}.value"))?))?,
                None => term,
            }
        };
        terms.push(term);
    }
    Ok(terms)
}

/// The typical (unsourced) method terms as a `terms` map, for scripts that want them.
fn typical_terms_map() -> Map {
    let mut m = Map::new();
    for t in MethodTerm::typical(stagna::LayoutRule::EqualArea).into_iter().skip(1) {
        let key =
            KNOWN_TERMS.iter().find(|(_, n)| t.name.starts_with(n)).map_or(t.name.clone(), |(k, _)| k.to_string());
        let mut e = Map::new();
        e.insert("u_rel".into(), Dynamic::from(t.relative_u));
        e.insert("source".into(), Dynamic::from(t.source));
        m.insert(key.into(), Dynamic::from(e));
    }
    m
}
