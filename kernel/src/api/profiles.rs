//! Velocity profiles in scripts: developed-flow models, fits through measured points
//! and the single-point method.

use rhai::{Array, Dynamic, Map};
use stagna::section::profile::{KAPPA, StraightLengths};
use stagna::units::dimension::Dimension as D;
use stagna::*;

use super::fluids::State;
use super::*;
use crate::catalog::Doc;

/// Registers the package.
pub fn register(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.engine
        .register_type_with_name::<ProfileModel>("ProfileModel")
        .register_type_with_name::<SinglePointResult>("SinglePoint");
    r.group("Conduits, profiles and flows");
    models(r);
    fits_and_single_point(r, prefs);
}

/// Power-law and developed-flow profile models.
fn models(r: &mut Registrar<'_>) {
    r.func(
        "power_law",
        &Doc::new("power_law(n) -> ProfileModel", "The power-law profile u/U_c = (y/R)^(1/n).")
            .param("n", "exponent, 4 to 12 typical (7 is the classic 1/7 law)")
            .example("let m = power_law(7);\nprint(m.mean_to_centreline);")
            .source("U/U_c = 2n²/((n+1)(2n+1)); Schlichting, Boundary-Layer Theory"),
        |n: Dynamic| -> Res<ProfileModel> { lib(ProfileModel::power_law(number(&n, "n")?)) },
    );
    r.func(
        "profile_for",
        &Doc::new("profile_for(reynolds, relative_roughness, family) -> ProfileModel", "The developed-flow profile for a Reynolds number: family \"power-law\" (n = 1/√f) or \"log-law\" (velocity-defect law, κ = 0.41); laminar below Re 2300.")
            .example("print(profile_for(2e5, 1e-4, \"log-law\"));")
            .source("friction factor by Colebrook 1939; n = 1/√f after Zagarola & Smits 1998; log law κ = 0.41"),
        |re: Dynamic, rr: Dynamic, fam: &str| -> Res<ProfileModel> {
            let family = profile_family(fam)?;
            lib(ProfileModel::for_flow(family, number(&re, "Reynolds number")?, number(&rr, "relative roughness")?))
        },
    );
    r.engine.register_fn("to_string", |m: &mut ProfileModel| format!("ProfileModel: {}", m.name()));
    r.property(
        "ProfileModel",
        "mean_to_centreline",
        &Doc::new("model.mean_to_centreline -> number", "Ratio of mean to centreline velocity U/U_c.")
            .example("print(power_law(7).mean_to_centreline);")
            .source("integral of the profile over the circle"),
        |m: &mut ProfileModel| m.mean_to_centreline(),
    );
    r.method(
        "ProfileModel",
        "ratio",
        &Doc::new("model.ratio(r_over_R) -> number", "u/U_c at a radius ratio r/R.")
            .example("print(power_law(7).ratio(0.5));")
            .source("the model's law"),
        |m: &mut ProfileModel, x: Dynamic| -> Res<f64> { Ok(m.velocity_ratio(number(&x, "r/R")?)) },
    );
}

/// Fits through measured points and the single-point method.
fn fits_and_single_point(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.func(
        "fit_power_law",
        &Doc::new("fit_power_law(r_over_R, velocity) -> map", "Least-squares power law u = U_c (1 − |r/R|)^(1/n) through measured points: #{n, centreline, r_squared}. Points at the wall or with u ≤ 0 are left out.")
            .param("r_over_R", "signed radius ratio of each point (column or array of numbers)")
            .param("velocity", "velocity column (or array of velocities)")
            .example("let t = table_from(#{r: [-0.9, -0.5, 0.0, 0.5, 0.9], v: [8.6, 10.6, 12.0, 10.6, 8.6]}).unit(\"v\", \"m/s\");\nprint(fit_power_law(t[\"r\"], t[\"v\"]));")
            .source("linear regression of ln u on ln(y/R) (common practice, no source)"),
        |x: Dynamic, v: Dynamic| -> Res<Map> {
            let xs: Vec<f64> = match x.clone().try_cast::<Col>() {
                Some(c) => c.si.to_vec(),
                None => x.clone().try_cast::<Array>().ok_or_else(|| rt("fit_power_law: r_over_R must be a column or an array"))?.iter().map(|d| number(d, "r/R")).collect::<Res<_>>()?,
            };
            let vs: Vec<f64> = match v.clone().try_cast::<Col>() {
                Some(c) if c.dimension == D::VELOCITY => c.si.to_vec(),
                Some(_) => return Err(rt("fit_power_law: velocity must be a velocity column (declare its unit)")),
                None => v.clone().try_cast::<Array>().ok_or_else(|| rt("fit_power_law: velocity must be a column or an array"))?.iter().map(|d| si_of(d, D::VELOCITY, "velocity")).collect::<Res<_>>()?,
            };
            if xs.len() != vs.len() {
                return Err(rt(format!("fit_power_law: {} positions but {} velocities", xs.len(), vs.len())));
            }
            let (yr, u): (Vec<f64>, Vec<f64>) = xs.iter().zip(&vs).map(|(x, v)| (1.0 - x.abs(), *v)).filter(|(y, v)| *y > 0.0 && *v > 0.0).unzip();
            let f = lib(stagna::section::profile_analysis::fit_power_law(&yr, &u))?;
            let mut m = Map::new();
            m.insert("n".into(), Dynamic::from(f.n));
            m.insert("centreline".into(), Dynamic::from(Q::si(f.centreline, D::VELOCITY)));
            m.insert("r_squared".into(), Dynamic::from(f.r_squared));
            Ok(m)
        },
    );
    let sp_prefs = prefs.clone();
    r.func(
        "single_point",
        &Doc::new("single_point(centreline_velocity, state, conduit, options) -> SinglePoint", "Mean velocity and flow from one centreline velocity, iterating the Reynolds number with the profile model. Assumes fully developed, swirl-free flow in a straight round pipe; options: family (\"power-law\" default or \"log-law\"), straight_upstream_D and straight_downstream_D (the straight lengths before and after the measuring section in the flow direction, in diameters, for warnings; the earlier upstream_D and downstream_D still work, with a deprecation warning).")
            .example("let w = water().state(350.kPa, 11.degC);\nlet sp = single_point(1.62.m_s, w, round_section(400.mm).roughness(0.05.mm), #{straight_upstream_D: 30, straight_downstream_D: 8});\nprint(sp);")
            .source("ISO 3966:2008 / ISO 7145:1982 (single point at the centre); profile models as in profile_for"),
        move |v: Dynamic, s: State, c: Conduit, o: Map| -> Res<SinglePointResult> {
            check_keys_or_old(&o, &["family", "straight_upstream_D", "straight_downstream_D"], &["upstream_D", "downstream_D"], "single_point")?;
            let family = match field(&o, "family") {
                Some(f) => profile_family(&text(f, "family")?)?,
                None => ProfileFamily::PowerLawFromFriction,
            };
            let up = renamed_option(&o, "straight_upstream_D", "upstream_D", &sp_prefs, "single_point");
            let down = renamed_option(&o, "straight_downstream_D", "downstream_D", &sp_prefs, "single_point");
            let straight = match (up, down) {
                (Some(u), Some(d)) => Some(StraightLengths {
                    upstream_diameters: number(u, "straight_upstream_D")?,
                    downstream_diameters: number(d, "straight_downstream_D")?,
                }),
                (None, None) => None,
                _ => return Err(rt("single_point: give both straight_upstream_D and straight_downstream_D")),
            };
            lib(single_point(Velocity::m_s(si_of(&v, D::VELOCITY, "centreline velocity")?), &s.s, &c, family, straight))
        },
    );
    let mp_prefs = prefs.clone();
    r.engine.register_type_with_name::<stagna::section::profile::MeanPointResult>("MeanPoint");
    r.func(
        "mean_point",
        &Doc::new("mean_point(velocity_or_two, state, conduit, options) -> MeanPoint", "Single-point method with the probe at the point of mean velocity: one reading, or an array of two readings at that distance from opposite walls (their mean is taken and their difference checked, options.tolerance_pct, default 3 %: common practice, no source). The distance from the wall is where the profile model's local velocity equals its mean at the mean's Reynolds number, y/R = (U/U_c)^n for the power law (0.242 for n = 7) or e^(−3/2) = 0.223 for the log law: derived from the model, not read from a standard's table. Options: family, straight_upstream_D and straight_downstream_D as for single_point, tolerance_pct. Properties: mean_velocity, volume_flow, from_wall, y_over_R, reynolds, asymmetry_pct, warnings; budget_terms(#{u_position, asymmetry}) gives the terms for traverse_budget of the readings.")
            .example("let w = water().state(350.kPa, 11.degC);\nlet pipe = round_section(400.mm).roughness(0.05.mm);\nprint(mean_point([1.52.m_s, 1.49.m_s], w, pipe, #{straight_upstream_D: 30, straight_downstream_D: 8}));")
            .source("the point where the profile law's local velocity equals its mean (derived); ISO 7145 names the point of mean velocity as a measuring position (its clause not re-read here)"),
        move |v: Dynamic, s: State, c: Conduit, o: Map| -> Res<stagna::section::profile::MeanPointResult> {
            check_keys(&o, &["family", "straight_upstream_D", "straight_downstream_D", "tolerance_pct"], "mean_point")?;
            let family = match field(&o, "family") {
                Some(f) => profile_family(&text(f, "family")?)?,
                None => ProfileFamily::PowerLawFromFriction,
            };
            let straight = match (field(&o, "straight_upstream_D"), field(&o, "straight_downstream_D")) {
                (Some(u), Some(d)) => Some(StraightLengths {
                    upstream_diameters: number(u, "straight_upstream_D")?,
                    downstream_diameters: number(d, "straight_downstream_D")?,
                }),
                (None, None) => None,
                _ => return Err(rt("mean_point: give both straight_upstream_D and straight_downstream_D")),
            };
            let tol = field(&o, "tolerance_pct").map(|d| number(d, "tolerance_pct")).transpose()?.unwrap_or(stagna::section::profile::MEAN_POINT_ASYMMETRY_PCT);
            let readings: Vec<Velocity> = match v.clone().try_cast::<Array>() {
                Some(a) => a.iter().map(|d| si_of(d, D::VELOCITY, "mean_point velocity").map(Velocity::m_s)).collect::<Res<_>>()?,
                None => vec![Velocity::m_s(si_of(&v, D::VELOCITY, "mean_point velocity")?)],
            };
            let r = lib(stagna::section::profile::single_point_at_mean(&readings, &s.s, &c, family, straight, tol))?;
            for w in &r.warnings {
                warn_once(&mp_prefs, &format!("mean_point: {}", w.message));
            }
            Ok(r)
        },
    );
    let p = prefs.clone();
    r.engine.register_fn("to_string", move |m: &mut stagna::section::profile::MeanPointResult| {
        let mut out = format!(
            "point of mean velocity ({}): {} from the wall (y/R = {}); mean velocity {}, Q = {}, Re = {}",
            m.model.name(),
            show_q_sig(m.from_wall.si(), D::LENGTH, &p, 3),
            stagna::units::quantity::format_sig(m.y_over_r, 3),
            show_q_sig(m.mean_velocity.si(), D::VELOCITY, &p, 4),
            show_q_sig(m.volume_flow.si(), D::VOLUME_FLOW, &p, 4),
            stagna::units::quantity::format_sig(m.reynolds, 3)
        );
        if let Some(a) = m.asymmetry_pct {
            out.push_str(&format!("; the two readings differ by {} %", stagna::units::quantity::format_sig(a, 2)));
        }
        out
    });
    type Mp = stagna::section::profile::MeanPointResult;
    type Getter = fn(&mut Mp) -> Dynamic;
    let props: [(&str, &str, Getter); 7] = [
        ("mean_velocity", "Mean velocity (the reading, or the mean of the two).", |m| {
            Dynamic::from(Q::si(m.mean_velocity.si(), D::VELOCITY))
        }),
        ("volume_flow", "Volume flow at the measuring conditions.", |m| {
            Dynamic::from(Q::si(m.volume_flow.si(), D::VOLUME_FLOW))
        }),
        ("from_wall", "Distance of the point of mean velocity from the wall.", |m| {
            Dynamic::from(Q::si(m.from_wall.si(), D::LENGTH))
        }),
        ("y_over_R", "That distance as a fraction of the radius.", |m| Dynamic::from(m.y_over_r)),
        ("reynolds", "Reynolds number of the mean velocity.", |m| Dynamic::from(m.reynolds)),
        ("asymmetry_pct", "|v₁ − v₂| / mean of two symmetric readings, %; () for one reading.", |m| {
            m.asymmetry_pct.map_or(Dynamic::UNIT, Dynamic::from)
        }),
        ("warnings", "Remarks: asymmetry, straight lengths, the wall's regime.", |m| {
            Dynamic::from(warnings_of(&m.warnings))
        }),
    ];
    for (name, summary, get) in props {
        r.property(
            "MeanPoint",
            name,
            &Doc::new(&format!("result.{name}"), summary)
                .example(&format!("let w = water().state(350.kPa, 11.degC);\nprint(mean_point(1.5.m_s, w, round_section(400.mm), #{{}}).{name});"))
                .source("point of mean velocity (derived from the profile law)"),
            get,
        );
    }
    let terms_doc = "The method terms of this result for traverse_budget of its one or two readings' Δp, in place of a traverse's layout term: #{layout: () (removed), profile_model: the largest |u(y)/U − 1| of the profile laws (power law with n = 1/√f and from Nikuradse's table, log law with κ = 0.41 and 0.40) at this point and Reynolds number, as a rectangular half-width; positioning: (d ln u/dy)·u_position when options.u_position (a length, standard uncertainty of the distance from the wall) is given; asymmetry: half the two readings' difference as a rectangular half-width when options.asymmetry is true (common practice, no source; off by default)}. All derived from the profile laws; ISO 7145's own uncertainty clause could not be read here, so add what it asks for as further terms.";
    let terms_example = "let w = water().state(350.kPa, 11.degC);\nlet mp = mean_point([1.52.m_s, 1.49.m_s], w, round_section(400.mm), #{});\nlet b = traverse_budget([1150.Pa, 1105.Pa], #{coefficient: 1.0, u_coefficient: 0.004, density: w.density, u_density: 0.2.kg_m3, diameter: 400.mm, u_diameter: 0.5.mm, terms: mp.budget_terms(#{u_position: 2.mm, asymmetry: true})});\nprint(b);";
    r.method(
        "MeanPoint",
        "budget_terms",
        &Doc::new("result.budget_terms(options) -> map", terms_doc)
            .example(terms_example)
            .source("profile laws at the point of mean velocity (derived); ISO 7145's uncertainty clause not re-read"),
        |m: &mut stagna::section::profile::MeanPointResult, o: Map| -> Res<Map> {
            check_keys(&o, &["u_position", "asymmetry"], "budget_terms")?;
            let u_y = field(&o, "u_position").map(|d| si_of(d, D::LENGTH, "u_position")).transpose()?;
            let asym = match field(&o, "asymmetry") {
                None => false,
                Some(d) => d.as_bool().map_err(|_| rt("budget_terms: asymmetry is true or false"))?,
            };
            let terms = lib(stagna::section::profile::mean_point_terms(m, u_y, asym))?;
            let mut out = Map::new();
            out.insert("layout".into(), Dynamic::UNIT);
            let keys = [Some("profile_model"), u_y.map(|_| "positioning"), asym.then_some("asymmetry")];
            for (key, t) in keys.iter().flatten().zip(terms) {
                let mut e = Map::new();
                e.insert("u_rel".into(), Dynamic::from(t.relative_u));
                let dist = match t.distribution {
                    stagna::uncertainty::flow_models::TermDistribution::Rectangular => "rectangular",
                    stagna::uncertainty::flow_models::TermDistribution::Triangular => "triangular",
                    stagna::uncertainty::flow_models::TermDistribution::Normal => "normal",
                };
                e.insert("distribution".into(), Dynamic::from(dist.to_string()));
                e.insert("source".into(), Dynamic::from(t.source));
                out.insert((*key).into(), Dynamic::from(e));
            }
            Ok(out)
        },
    );
    let p = prefs.clone();
    r.engine.register_fn("to_string", move |s: &mut SinglePointResult| {
        // Four significant figures: the profile model alone is uncertain to about 1 %.
        let mut out = format!(
            "single-point mean ({}): U/U_c = {:.4}, mean velocity {}, Q = {}, Re = {}",
            s.model.name(),
            s.ratio,
            show_q_sig(s.mean_velocity.si(), D::VELOCITY, &p, 4),
            show_q_sig(s.volume_flow.si(), D::VOLUME_FLOW, &p, 4),
            stagna::units::quantity::format_sig(s.reynolds, 3)
        );
        for w in &s.warnings {
            out.push_str(&format!("\n  warning: {}", w.message));
        }
        out
    });
    r.property(
        "SinglePoint",
        "mean_velocity",
        &Doc::new("result.mean_velocity -> Quantity", "Mean velocity.").example("let w = water().state(350.kPa, 11.degC);\nprint(single_point(1.6.m_s, w, round_section(400.mm), #{}).mean_velocity);").source("single-point method"),
        |s: &mut SinglePointResult| Q::si(s.mean_velocity.si(), D::VELOCITY),
    );
    r.property(
        "SinglePoint",
        "volume_flow",
        &Doc::new("result.volume_flow -> Quantity", "Volume flow at the measuring conditions.").example("let w = water().state(350.kPa, 11.degC);\nprint(single_point(1.6.m_s, w, round_section(400.mm), #{}).volume_flow.to(\"L/s\"));").source("Q = U A"),
        |s: &mut SinglePointResult| Q::si(s.volume_flow.si(), D::VOLUME_FLOW),
    );
    r.property(
        "SinglePoint",
        "ratio",
        &Doc::new("result.ratio -> number", "U/U_c used.").example("let w = water().state(350.kPa, 11.degC);\nprint(single_point(1.6.m_s, w, round_section(400.mm), #{}).ratio);").source("profile model"),
        |s: &mut SinglePointResult| s.ratio,
    );
    r.property(
        "SinglePoint",
        "warnings",
        &Doc::new("result.warnings -> array", "Remarks (straight lengths, regime).").example("let w = water().state(350.kPa, 11.degC);\nprint(single_point(1.6.m_s, w, round_section(400.mm), #{straight_upstream_D: 10, straight_downstream_D: 3}).warnings);").source("common practice, no source (25 D / 5 D)"),
        |s: &mut SinglePointResult| warnings_of(&s.warnings),
    );
}

fn profile_family(s: &str) -> Res<ProfileFamily> {
    match s.to_ascii_lowercase().replace(['_', ' '], "-").as_str() {
        "power-law" | "power" => Ok(ProfileFamily::PowerLawFromFriction),
        "log-law" | "log" => Ok(ProfileFamily::LogLaw { kappa: KAPPA }),
        _ => Err(rt(format!("profile family: \"power-law\" or \"log-law\", got \"{s}\""))),
    }
}
