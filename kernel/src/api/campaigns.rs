//! Campaign reductions in scripts: every traverse of a table of readings reduced in
//! one pass in Rust, and per-point velocities.

use std::collections::BTreeMap;

use rhai::{Array, Dynamic, Map};
use stagna::units::dimension::Dimension as D;
use stagna::*;

use super::flows::flow_options;
use super::tables::{Tbl, with_result_units};
use super::*;
use crate::catalog::Doc;
use stagna::campaign::{CampaignColumns, CampaignResult, CampaignSpec, CampaignUncertainty, RectangularColumns};

/// A campaign reduction's result.
#[derive(Debug, Clone)]
pub struct Campaign {
    /// The library result.
    pub res: CampaignResult,
    /// Coverage probability of the expanded uncertainties, when asked for.
    pub coverage: Option<f64>,
}

/// Builds a campaign spec from a script map and the table's declared units.
pub(super) fn campaign_spec(t: &Tbl, o: &Map, p: &SharedPrefs) -> Res<CampaignSpec> {
    check_keys(
        o,
        &[
            "fluid",
            "static_pressure",
            "manometer",
            "probe",
            "columns",
            "averaging",
            "min_points",
            "reference",
            "moisture",
            "wall_factor",
            "uncertainty",
            "runs",
            "run_columns",
            "method2",
        ],
        "campaign",
    )?;
    let need = |k: &str| field(o, k).ok_or_else(|| rt(format!("campaign: option '{k}' is required")));
    let fluid: Fluid = need("fluid")?
        .clone()
        .try_cast()
        .ok_or_else(|| rt("campaign: 'fluid' must be a Fluid (e.g. humid_air(0.45))"))?;
    // A transducer's Δp column needs no manometer; the spec keeps a placeholder that is
    // never read (RowPhysics uses the Δp as it is).
    let dp_columns =
        field(o, "columns").and_then(|c| c.clone().try_cast::<Map>()).is_some_and(|c| c.contains_key("dp"));
    let manometer: Manometer = match field(o, "manometer") {
        None if dp_columns => lib(Manometer::new(
            stagna::instruments::manometer::ManometerKind::UTube,
            stagna::GaugeLiquid::Water(stagna::fluids::water::WaterModel::Tanaka2001),
            stagna::fluids::gravity::standard(),
        ))?,
        _ => need("manometer")?
            .clone()
            .try_cast()
            .ok_or_else(|| rt("campaign: 'manometer' must be a Manometer (e.g. u_tube(gauge_mercury()))"))?,
    };
    let probe: Probe = need("probe")?
        .clone()
        .try_cast()
        .ok_or_else(|| rt("campaign: 'probe' must be a Probe (e.g. pitot_static(0.99))"))?;
    let static_pressure = Pressure::pa(si_of(need("static_pressure")?, D::PRESSURE, "campaign: static_pressure")?);
    let columns = campaign_columns(t, need("columns")?)?;
    let averaging = match field(o, "averaging") {
        None => Averaging::Arithmetic,
        Some(d) if d.is_string() && text(d, "averaging")? == "arithmetic" => Averaging::Arithmetic,
        Some(d) => {
            Averaging::Integrate { wall_exponent: number(d, "averaging (\"arithmetic\" or a wall exponent m)")? }
        }
    };
    let min_points = field(o, "min_points").map(|d| count(d, "min_points")).transpose()?.unwrap_or(4);
    let mut fo = Map::new();
    for k in ["reference", "moisture", "wall_factor"] {
        if let Some(v) = field(o, k) {
            fo.insert(k.into(), v.clone());
        }
    }
    let flow = flow_options(&fo)?;
    let uncertainty = campaign_uncertainty(o, p)?;
    let conditions = match field(o, "runs") {
        Some(r) => {
            let runs: Tbl =
                r.clone().try_cast().ok_or_else(|| rt("campaign: 'runs' must be a table (one row per traverse)"))?;
            Some(traverse_conditions(&runs, o, &columns.traverse, &fluid, static_pressure, flow.moisture)?)
        }
        None if field(o, "run_columns").is_some() => {
            return Err(rt("campaign: 'run_columns' goes with a 'runs' table"));
        }
        None => None,
    };
    let method2 = method2_route(o)?;
    if let Some(m) = &method2
        && m.dry_molecular_weight.is_none()
        && conditions.as_ref().is_none_or(|c| c.dry_molecular_weight.iter().all(Option::is_none))
    {
        return Err(rt(
            "campaign method2: no dry molecular weight M_d: give method2: #{md: ...} (g/g-mol), or a runs table with \
             md, or co2 and o2 (Method 3)",
        ));
    }
    Ok(CampaignSpec {
        columns,
        fluid,
        static_pressure,
        manometer,
        probe,
        averaging,
        min_points,
        flow,
        uncertainty,
        conditions,
        progress: None,
        method2,
    })
}

/// The `method2` option: `#{md, report}` (report "physics", the default, or "method").
fn method2_route(o: &Map) -> Res<Option<stagna::campaign::Method2Route>> {
    let Some(d) = field(o, "method2") else { return Ok(None) };
    let m: Map = d.clone().try_cast().ok_or_else(|| {
        rt("campaign: 'method2' must be a map, e.g. #{md: 30.2, report: \"method\"} (md: the dry molecular weight, g/g-mol)")
    })?;
    check_keys(&m, &["md", "report"], "campaign method2")?;
    let md = field(&m, "md").map(|v| number(v, "method2.md (dry molecular weight, g/g-mol)")).transpose()?;
    let report = match field(&m, "report").map(|v| text(v, "method2.report")).transpose()?.as_deref() {
        None | Some("physics") => false,
        Some("method") => true,
        Some(other) => {
            return Err(rt(format!("campaign method2.report: '{other}' unknown; write \"physics\" or \"method\"")));
        }
    };
    Ok(Some(stagna::campaign::Method2Route { dry_molecular_weight: md, report }))
}

/// Per-traverse conditions from a runs table: one row per traverse, keyed by a column of
/// the same name as the campaign's traverse column. Columns (named as `run_columns` maps
/// them, else by the key): static_pressure (absolute), or barometric with static_gauge;
/// co2, o2, co (%, dry; a stack gas of that analysis); moisture (B_ws). What a row does not
/// give comes from the campaign's constants. For the Method 2 route: md (M_d, g/g-mol),
/// else M_d by Method 3 eq. 3-1 from co2 and o2 (N₂ + CO by difference).
fn traverse_conditions(
    runs: &Tbl,
    o: &Map,
    key_col: &str,
    fluid: &Fluid,
    static_pressure: Pressure,
    moisture: Option<f64>,
) -> Res<stagna::campaign::TraverseConditions> {
    const KEYS: [&str; 8] = ["static_pressure", "barometric", "static_gauge", "co2", "o2", "co", "moisture", "md"];
    let names: Map = match field(o, "run_columns") {
        Some(m) => m.clone().try_cast().ok_or_else(|| rt("campaign: 'run_columns' must be a map"))?,
        None => Map::new(),
    };
    check_keys(&names, &KEYS, "campaign run_columns")?;
    let has = |c: &str| runs.df.get_column_names().iter().any(|n| n.as_str() == c);
    let col_of = |k: &str| -> Res<Option<Col>> {
        let name = field(&names, k).map(|d| text(d, k)).transpose()?.unwrap_or_else(|| k.to_string());
        if has(&name) { runs.column(&name).map(Some) } else { Ok(None) }
    };
    let cols: Vec<Option<Col>> = KEYS.iter().map(|k| col_of(k)).collect::<Res<_>>()?;
    let [sp, bar, gauge, co2, o2, co, bws, md_col] =
        <[Option<Col>; 8]>::try_from(cols).map_err(|_| rt("campaign: runs columns"))?;
    for (c, what) in [(&sp, "static_pressure"), (&bar, "barometric"), (&gauge, "static_gauge")] {
        if let Some(c) = c
            && c.dimension != D::PRESSURE
        {
            return Err(rt(format!(
                "campaign runs: column '{}' ({what}) must hold a pressure (declare its unit)",
                c.name
            )));
        }
    }
    if sp.is_some() && (bar.is_some() || gauge.is_some()) {
        return Err(rt("campaign runs: give the absolute static_pressure, or barometric with static_gauge, not both"));
    }
    let keys = lib(stagna::io::table::text_column(&runs.df, key_col))
        .map_err(|e| rt(format!("campaign runs: the runs table needs the traverse column '{key_col}': {e}")))?;
    let at = |c: &Option<Col>, i: usize, what: &str| -> Res<Option<f64>> {
        match c {
            Some(c) if !c.si[i].is_finite() => {
                Err(rt(format!("campaign runs: row {} ({}): {what} is missing", i + 1, keys[i])))
            }
            Some(c) => Ok(Some(c.si[i])),
            None => Ok(None),
        }
    };
    let (mut p, mut fl, mut m, mut mds) = (Vec::new(), Vec::new(), Vec::new(), Vec::new());
    for (i, key) in keys.iter().enumerate() {
        let pressure =
            match (at(&sp, i, "static_pressure")?, at(&bar, i, "barometric")?, at(&gauge, i, "static_gauge")?) {
                (Some(p), ..) => p,
                (None, Some(b), g) => b + g.unwrap_or(0.0),
                (None, None, Some(g)) => static_pressure.si() + g,
                (None, None, None) => static_pressure.si(),
            };
        let b = at(&bws, i, "moisture")?.or(moisture);
        let row_err = |e: stagna::Error| rt(format!("campaign runs: row {} ({key}): {e}", i + 1));
        let md = match (at(&md_col, i, "md")?, at(&co2, i, "co2")?) {
            (Some(md), _) => Some(md),
            (None, Some(c)) => {
                let o = at(&o2, i, "o2")?.unwrap_or(0.0);
                Some(stagna::methods::us_epa::dry_molecular_weight(c, o, 100.0 - c - o).map_err(row_err)?)
            }
            (None, None) => None,
        };
        let f = match at(&co2, i, "co2")? {
            Some(c) => Fluid::Gas(
                lib(GasMixture::flue_gas(
                    c,
                    at(&o2, i, "o2")?.unwrap_or(0.0),
                    at(&co, i, "co")?.unwrap_or(0.0),
                    b.unwrap_or(0.0),
                ))
                .map_err(|e| rt(format!("campaign runs: row {} ({key}): {e}", i + 1)))?,
            ),
            None => fluid.clone(),
        };
        p.push(pressure);
        fl.push(f);
        m.push(b);
        mds.push(md);
    }
    lib(stagna::campaign::TraverseConditions::new(keys, p, fl, m).and_then(|c| c.with_dry_molecular_weight(mds)))
}

/// The `columns` map of a campaign spec: which table column holds what, each checked
/// against the table and its declared unit.
fn campaign_columns(t: &Tbl, cols: &Dynamic) -> Res<CampaignColumns> {
    let cols: Map = cols.clone().try_cast().ok_or_else(|| rt("campaign: 'columns' must be a map of column names"))?;
    check_keys(
        &cols,
        &[
            "traverse",
            "deflection",
            "dp",
            "fluid_temperature",
            "size",
            "position",
            "line",
            "gauge_temperature",
            "height",
            "across",
        ],
        "campaign columns",
    )?;
    let with_unit = |key: &str, dim: D| -> Res<Option<(String, Unit)>> {
        let Some(d) = field(&cols, key) else { return Ok(None) };
        let name = text(d, key)?;
        if t.df.column(&name).is_err() {
            return Err(rt(format!(
                "campaign: column '{name}' (for {key}) is not in the table; it has: {}",
                t.df.get_column_names().iter().map(|s| s.as_str()).collect::<Vec<_>>().join(", ")
            )));
        }
        let u = t.unit_of(&name).ok_or_else(|| {
            rt(format!(
                "campaign: column '{name}' (for {key}) has no unit; declare it with t.unit(\"{name}\", \"...\")"
            ))
        })?;
        let unit = lib(Unit::parse(u))?;
        if Quantity::from_unit(1.0, &unit).dimension != dim {
            return Err(rt(format!(
                "campaign: column '{name}' (for {key}) is in {u}, which is not a {}",
                dim.name().unwrap_or("quantity")
            )));
        }
        Ok(Some((name, unit)))
    };
    let req = |key: &str, dim: D| -> Res<(String, Unit)> {
        with_unit(key, dim)?.ok_or_else(|| rt(format!("campaign: columns.{key} is required")))
    };
    let rectangular = match (with_unit("height", D::LENGTH)?, with_unit("across", D::LENGTH)?) {
        (Some(height), Some(across)) => Some(RectangularColumns { height, across }),
        (None, None) => None,
        _ => return Err(rt("campaign: a rectangular conduit needs both columns.height and columns.across")),
    };
    Ok(CampaignColumns {
        traverse: text(
            field(&cols, "traverse").ok_or_else(|| rt("campaign: columns.traverse is required"))?,
            "traverse",
        )?,
        reading: match (with_unit("deflection", D::LENGTH)?, with_unit("dp", D::PRESSURE)?) {
            (Some(d), None) => d,
            (None, Some(dp)) => dp,
            (Some(_), Some(_)) => {
                return Err(rt(
                    "campaign: give columns.deflection (a manometer) or columns.dp (a transducer's Δp), not both",
                ));
            }
            (None, None) => {
                return Err(rt(
                    "campaign: columns.deflection (a manometer reading) or columns.dp (a transducer's Δp) is required",
                ));
            }
        },
        fluid_temperature: req("fluid_temperature", D::TEMPERATURE)?,
        size: req("size", D::LENGTH)?,
        rectangular,
        position: with_unit("position", D::LENGTH)?,
        line: field(&cols, "line").map(|d| text(d, "line")).transpose()?,
        gauge_temperature: with_unit("gauge_temperature", D::TEMPERATURE)?,
    })
}

/// The optional `uncertainty` map of a campaign spec (relative standard uncertainties of
/// the inputs, the coverage probability and the layout rule for the method terms).
fn campaign_uncertainty(o: &Map, p: &SharedPrefs) -> Res<Option<CampaignUncertainty>> {
    Ok(match field(o, "uncertainty") {
        None => None,
        Some(d) => {
            let u: Map = d.clone().try_cast().ok_or_else(|| rt("campaign: 'uncertainty' must be a map"))?;
            const OLD: [(&str, &str); 5] = [
                ("u_rel_coefficient", "coefficient"),
                ("u_rel_density", "density"),
                ("u_rel_diameter", "diameter"),
                ("u_rel_dp", "dp_rel"),
                ("u_dp", "dp_abs"),
            ];
            check_keys_or_old(
                &u,
                &[
                    "u_rel_coefficient",
                    "u_rel_density",
                    "u_rel_diameter",
                    "u_rel_dp",
                    "u_dp",
                    "coverage",
                    "rule",
                    "terms",
                ],
                &OLD.map(|(_, old)| old),
                "campaign uncertainty",
            )?;
            let get = |k: &str| {
                let old = OLD.iter().find(|(n, _)| *n == k).map_or(k, |(_, o)| *o);
                renamed_option(&u, k, old, p, "campaign uncertainty")
            };
            let rel = |k: &str, default: f64| -> Res<f64> {
                get(k).map(|d| number(d, k)).transpose().map(|v| v.unwrap_or(default))
            };
            let rule = match field(&u, "rule") {
                Some(d) => match text(d, "rule")?.as_str() {
                    "log-linear" => stagna::LayoutRule::LogLinear,
                    "log-chebyshev" => stagna::LayoutRule::LogChebyshev,
                    _ => stagna::LayoutRule::EqualArea,
                },
                None => stagna::LayoutRule::EqualArea,
            };
            Some(CampaignUncertainty {
                coefficient_rel: rel("u_rel_coefficient", 0.005)?,
                density_rel: rel("u_rel_density", 0.002)?,
                diameter_rel: rel("u_rel_diameter", 0.002)?,
                dp_rel: rel("u_rel_dp", 0.005)?,
                dp_abs_pa: get("u_dp").map(|d| si_of(d, D::PRESSURE, "u_dp")).transpose()?.unwrap_or(0.5),
                terms: super::uncertainty::method_terms(field(&u, "terms"), rule, "campaign uncertainty")?,
                coverage: rel("coverage", 0.95)?,
            })
        }
    })
}

/// Registers the package.
pub fn register(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.engine.register_type_with_name::<Campaign>("Campaign");
    r.group("Campaign reductions");
    reductions(r, prefs);
}

/// Reducing campaigns and what a reduction gives.
fn reductions(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    let pp = prefs.clone();
    r.func(
        "reduce_campaign",
        &Doc::new("reduce_campaign(table_or_scan, spec) -> Campaign", "Reduces every traverse in a table of readings in one pass in Rust: Δp, density and velocity per point, section mean, flows and (optionally) a GUM uncertainty per traverse. Column units come from the table's declared units. Traverses that fail are listed with the reason; the rest are reduced. Given a scan (scan_table) instead of a table, the readings are read a batch at a time, only the columns the spec names, with the same result for traverses whose rows lie together.")
            .param("spec", "map: fluid, static_pressure, manometer, probe, columns #{traverse, deflection (a manometer reading, length unit) or dp (a transducer's Δp, pressure unit; then no manometer is needed), fluid_temperature, size, position?, line?, gauge_temperature?, height?, across?}, averaging (\"arithmetic\" or a wall exponent m), min_points, reference, moisture, wall_factor, uncertainty #{u_rel_coefficient, u_rel_density, u_rel_diameter, u_rel_dp (relative standard uncertainties, fractions), u_dp (absolute standard uncertainty of each Δp), coverage, rule, terms (method terms as in traverse_budget: only the layout term by default)}, runs (a table, one row per traverse, keyed by the traverse column: static_pressure or barometric + static_gauge, co2/o2/co for a stack gas of that run, moisture, md) with run_columns (key → column name); method2 #{md?, report: \"physics\" | \"method\"} adds each traverse by US EPA Method 2 eq. 2-7 and 2-10 (epa_m2_velocity_m_s, epa_m2_dry_flow_20C_760mmHg_m3_h, physics_velocity_m_s, epa_m2_minus_physics_pct, reported_route; M_d per run from md, else Method 3 eq. 3-1 from co2/o2)")
            .returns("Campaign (.traverses table, .failures)")
            .example("let t = table_from(#{tr: [\"T1\",\"T1\",\"T1\",\"T1\"], h: [20.0, 30.0, 30.0, 20.0], t: [20.0, 20.0, 20.0, 20.0], d: [500.0, 500.0, 500.0, 500.0], y: [33.5, 125.0, 375.0, 466.5]})\n    .units(#{h: \"mm\", t: \"degC\", d: \"mm\", y: \"mm\"});\nlet spec = #{fluid: dry_air(), static_pressure: 101.kPa, manometer: u_tube(gauge_water()), probe: pitot_static(1.0),\n    columns: #{traverse: \"tr\", deflection: \"h\", fluid_temperature: \"t\", size: \"d\", position: \"y\"}};\nprint(reduce_campaign(t, spec).traverses);")
            .source("velocity-area method, ISO 3966:2008 §9–10; point physics as in Manometer.dp and Probe.velocity"),
        move |t: Tbl, o: Map| -> Res<Campaign> {
            let mut spec = campaign_spec(&t, &o, &pp)?;
            spec.progress = super::progress_for(&pp, "reduce_campaign: traverses");
            let coverage = spec.uncertainty.as_ref().map(|u| u.coverage);
            Ok(Campaign { res: lib(stagna::campaign::reduce_campaign(&t.df, &spec))?, coverage })
        },
    );
    let pv = prefs.clone();
    r.func(
        "point_velocities",
        &Doc::new("point_velocities(table, spec) -> Table", "The table with dp_pa, density_kg_m3 and velocity_m_s per row, computed in Rust with the same spec as reduce_campaign (stops at the first bad row, naming it).")
            .example("let t = table_from(#{tr: [\"T1\",\"T1\"], h: [20.0, 30.0], t: [20.0, 20.0], d: [500.0, 500.0]}).units(#{h: \"mm\", t: \"degC\", d: \"mm\"});\nlet spec = #{fluid: dry_air(), static_pressure: 101.kPa, manometer: u_tube(gauge_water()), probe: pitot_static(1.0), columns: #{traverse: \"tr\", deflection: \"h\", fluid_temperature: \"t\", size: \"d\"}};\nprint(point_velocities(t, spec));")
            .source("as Manometer.dp and Probe.velocity"),
        move |t: Tbl, o: Map| -> Res<Tbl> {
            let spec = campaign_spec(&t, &o, &pv)?;
            let df = lib(stagna::campaign::point_velocities(&t.df, &spec))?;
            Ok(with_result_units(df, t.units.clone()))
        },
    );
    r.engine.register_fn("to_string", |c: &mut Campaign| {
        let mut s =
            format!("Campaign: {} traverse(s) reduced, {} failed", c.res.traverses.height(), c.res.failures.len());
        for f in &c.res.failures {
            s.push_str(&format!("\n  traverse {}: {}", f.traverse, f.message));
        }
        for w in &c.res.warnings {
            s.push_str(&format!("\n  warning: {}", w.message));
        }
        s
    });
    r.property(
        "Campaign",
        "traverses",
        &Doc::new("campaign.traverses -> Table", "One row per reduced traverse: points, mean velocity, volume and mass flow, mean density, max velocity, flatness, reversed points; reference flows and uncertainty columns when asked. Units are declared.")
            .example("// see reduce_campaign\nprint(\"see reduce_campaign\");")
            .source("velocity-area method"),
        |c: &mut Campaign| with_result_units(c.res.traverses.clone(), BTreeMap::new()),
    );
    r.property(
        "Campaign",
        "failures",
        &Doc::new("campaign.failures -> array", "Traverses that could not be reduced: maps #{traverse, message}.")
            .example("// see reduce_campaign\nprint(\"see reduce_campaign\");")
            .source("common practice, no source"),
        |c: &mut Campaign| failures_array(&c.res.failures),
    );
}

/// Traverses that failed, as script maps `#{traverse, message}`.
pub(super) fn failures_array(failures: &[stagna::campaign::TraverseFailure]) -> Array {
    failures
        .iter()
        .map(|f| {
            let mut m = Map::new();
            m.insert("traverse".into(), Dynamic::from(f.traverse.clone()));
            m.insert("message".into(), Dynamic::from(f.message.clone()));
            Dynamic::from(m)
        })
        .collect()
}
