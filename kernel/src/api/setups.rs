//! Set-up files in scripts: saved instruments, sites and campaigns, and transducers.

use std::path::{Path, PathBuf};

use rhai::{Array, Dynamic, Map};
use stagna::instruments::transducer::Transducer;
use stagna::io::setup::Setup;
use stagna::units::dimension::Dimension as D;
use stagna::units::quantity::{format_number, format_sig};
use stagna::{Conduit, Manometer, Probe, gravity};

use super::*;
use crate::catalog::Doc;

/// The bundled set-up files of the invented scenarios, with the records they name.
const DEMO_SETUPS: &[(&str, &str)] = &[
    ("pretendbury-ahu2", include_str!("../../../demo-data/pretendbury-ahu2.setup.toml")),
    ("neverbrook", include_str!("../../../demo-data/neverbrook.setup.toml")),
    ("nowhere-vale", include_str!("../../../demo-data/nowhere-vale.setup.toml")),
];
const DEMO_RECORDS: &[(&str, &str)] =
    &[("nowhere-vale-sp07-calibration.toml", include_str!("../../../demo-data/nowhere-vale-sp07-calibration.toml"))];

/// A set-up file in scripts.
#[derive(Debug, Clone)]
pub struct SetupV(pub Arc<Setup>);

const EX: &str = "let s = demo_setup(\"pretendbury-ahu2\");";

fn max_age(o: &Map) -> Res<Option<i64>> {
    check_keys(o, &["max_age_days"], "load_setup")?;
    field(o, "max_age_days").map(|d| count(d, "max_age_days").map(|n| n as i64)).transpose()
}

fn load(prefs: &SharedPrefs, path: &str, max_age_days: Option<i64>) -> Res<SetupV> {
    let file = super::tables::in_path(prefs, path);
    Ok(SetupV(Arc::new(lib(Setup::load(&file, super::stack::today_days(), max_age_days))?)))
}

fn demo(name: &str) -> Res<SetupV> {
    let key = name.trim_end_matches(".toml").trim_end_matches(".setup");
    let Some((_, text)) = DEMO_SETUPS.iter().find(|(n, _)| *n == key) else {
        let names: Vec<&str> = DEMO_SETUPS.iter().map(|(n, _)| *n).collect();
        return Err(rt(format!("no demo set-up '{name}'; there are: {}", names.join(", "))));
    };
    let read = |p: &Path| -> std::io::Result<String> {
        let f = p.file_name().map(|f| f.to_string_lossy().into_owned()).unwrap_or_default();
        DEMO_RECORDS
            .iter()
            .find(|(n, _)| *n == f)
            .map(|(_, t)| t.to_string())
            .ok_or_else(|| std::io::Error::new(std::io::ErrorKind::NotFound, "not a bundled record"))
    };
    let path = PathBuf::from(format!("{key}.setup.toml"));
    Ok(SetupV(Arc::new(lib(Setup::from_text(text, &path, false, super::stack::today_days(), None, &read))?)))
}

fn unknown(s: &Setup, what: &str, id: &str, known: Vec<&String>) -> Box<rhai::EvalAltResult> {
    let known: Vec<&str> = known.iter().map(|k| k.as_str()).collect();
    rt(format!(
        "{}: no {what} '{id}'; its {what}s: {}",
        s.path.display(),
        if known.is_empty() { "none".to_string() } else { known.join(", ") }
    ))
}

fn site_gravity(s: &Setup, site: &str) -> Res<stagna::Acceleration> {
    let st = s.sites.get(site).ok_or_else(|| unknown(s, "site", site, s.sites.keys().collect()))?;
    Ok(lib(st.gravity())?.unwrap_or_else(gravity::standard))
}

fn manometer(s: &Setup, id: &str, site: Option<&str>) -> Res<Manometer> {
    let g = s.gauges.get(id).ok_or_else(|| unknown(s, "gauge", id, s.gauges.keys().collect()))?;
    let gravity = match site {
        Some(site) => site_gravity(s, site)?,
        None => {
            let located: Vec<&String> =
                s.sites.iter().filter(|(_, st)| st.entry.latitude_deg.is_some()).map(|(k, _)| k).collect();
            match located.as_slice() {
                [] => gravity::standard(),
                [one] => site_gravity(s, one)?,
                many => {
                    return Err(rt(format!(
                        "setup.gauge(\"{id}\"): the file has several sites ({}); say which: setup.gauge(\"{id}\", site)",
                        many.iter().map(|k| k.as_str()).collect::<Vec<_>>().join(", ")
                    )));
                }
            }
        }
    };
    lib(g.manometer(gravity))
}

/// Registers the package.
pub fn register(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.engine.register_type_with_name::<SetupV>("Setup").register_type_with_name::<Transducer>("Transducer");
    r.group("Set-up files (instruments, sites, campaigns)");
    loading(r, prefs);
    members(r, prefs);
    transducers(r, prefs);
}

fn loading(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    let doc = Doc::new(
        "load_setup(path[, #{max_age_days}]) -> Setup",
        "Reads a set-up file (Stagna's own format stagna-setup, TOML; JSON when the name ends in .json): probes (coefficient or S-type calibration record), liquid gauges, transducers with calibration points, sites with their sections, and campaigns. The whole file is checked first — unknown keys, wrong types, unknown units, duplicated instrument ids, too few calibration points, missing records, a newer version — and refused with the file, line and key; nothing is half-loaded. Record paths inside are relative to the file. max_age_days makes an older S-type calibration warn on every velocity.",
    )
    .param("path", "the set-up file (a relative path not found here is looked for in the run's output folder)")
    .example("demo_setup(\"neverbrook\").save(\"neverbrook-example.setup.toml\");\nlet s = load_setup(\"neverbrook-example.setup.toml\");\nprint(s.probe(\"WT-2\"));")
    .source("Stagna set-up format stagna-setup, version 1 (docs/records.md)");
    let p = prefs.clone();
    r.func("load_setup", &doc, move |path: &str| load(&p, path, None));
    let p = prefs.clone();
    r.func("load_setup", &doc, move |path: &str, o: Map| load(&p, path, max_age(&o)?));
    r.func(
        "demo_setup",
        &Doc::new("demo_setup(name) -> Setup", "A bundled set-up file of the invented scenarios: \"pretendbury-ahu2\" (ventilation duct: pitot-static tube, oil gauge, transducer), \"neverbrook\" (water main: wall-tap pitot, mercury U-tube), \"nowhere-vale\" (stack: S-type tube with its calibration record, oil gauge).")
            .example("print(demo_setup(\"nowhere-vale\"));")
            .source("invented demo data bundled with stagna"),
        demo,
    );
    let p = prefs.clone();
    r.method(
        "Setup",
        "save",
        &Doc::new("setup.save(path)", "Writes the set-up file (TOML, or JSON when the name ends in .json) through a temporary file and a rename. Record paths inside stay as written: save beside the records they name.")
            .example(&format!("{EX}\ns.save(\"ahu2-copy.setup.toml\");"))
            .source("Stagna set-up format stagna-setup, version 1"),
        move |s: &mut SetupV, path: &str| -> Res<()> {
            let text = if path.to_ascii_lowercase().ends_with(".json") { lib(s.0.to_json())? } else { lib(s.0.to_toml())? };
            let target = super::tables::out_path(&p, path)?;
            lib(stagna::io::table::write_atomically(&target, |f| std::io::Write::write_all(f, text.as_bytes())))
        },
    );
    r.engine.register_fn("to_string", |s: &mut SetupV| show(&s.0));
    r.engine.register_fn("to_debug", |s: &mut SetupV| show(&s.0));
}

fn show(s: &Setup) -> String {
    let mut out = format!("Set-up {} (format stagna-setup v{})", s.path.display(), s.file.version);
    if let Some(n) = &s.file.note {
        out.push_str(&format!("\n  {n}"));
    }
    for (id, p) in &s.probes {
        let u = p
            .coefficient_standard_uncertainty
            .map(|u| format!(", u(C) = {} (standard, k = 1)", format_sig(u, 2)))
            .unwrap_or_default();
        out.push_str(&format!(
            "\n  probe {id}: {}, C = {}{u} — {}",
            p.probe.kind,
            format_number(p.probe.coefficient),
            p.source
        ));
    }
    for (id, g) in &s.gauges {
        out.push_str(&format!("\n  gauge {id}: {} with {}", g.entry.arrangement, g.liquid.name()));
    }
    for t in s.transducers.values() {
        out.push_str(&format!("\n  {}", t.describe()));
    }
    for (id, st) in &s.sites {
        out.push_str(&format!(
            "\n  site {id}: {}{}",
            st.entry.name.as_deref().map(|n| format!("{n}, ")).unwrap_or_default(),
            st.conduit
        ));
    }
    for (id, c) in &s.campaigns {
        let reading = c.gauge.as_deref().or(c.transducer.as_deref()).unwrap_or("");
        out.push_str(&format!("\n  campaign {id}: site {}, probe {}, read on {reading}", c.site, c.probe));
    }
    out
}

fn members(r: &mut Registrar<'_>, _prefs: &SharedPrefs) {
    r.method(
        "Setup",
        "probe",
        &Doc::new("setup.probe(id) -> Probe", "The probe of that id, with its coefficient (or its S-type calibration record's C_p and warnings) and head diameter; its worked steps name the set-up file and entry the coefficient came from.")
            .example(&format!("{EX}\nlet v = s.probe(\"PS-12\").velocity(118.Pa, 1.2.kg_m3);\nprint(v.steps());"))
            .source("Stagna set-up format stagna-setup, version 1"),
        |s: &mut SetupV, id: &str| -> Res<Probe> {
            s.0.probes.get(id).map(|p| p.probe.clone()).ok_or_else(|| unknown(&s.0, "probe", id, s.0.probes.keys().collect()))
        },
    );
    r.method(
        "Setup",
        "probe_u",
        &Doc::new("setup.probe_u(id) -> f64", "The standard uncertainty (k = 1, absolute) of that probe's coefficient as the file states it (coefficient_standard_uncertainty); an error when the file gives none.")
            .example(&format!("{EX}\nprint(s.probe_u(\"PS-12\"));"))
            .source("Stagna set-up format stagna-setup, version 1"),
        |s: &mut SetupV, id: &str| -> Res<f64> {
            let p = s.0.probes.get(id).ok_or_else(|| unknown(&s.0, "probe", id, s.0.probes.keys().collect()))?;
            p.coefficient_standard_uncertainty.ok_or_else(|| {
                rt(format!("{}: probe '{id}' has no coefficient_standard_uncertainty", s.0.path.display()))
            })
        },
    );
    let doc = Doc::new("setup.gauge(id[, site]) -> Manometer", "The liquid gauge of that id at the local gravity of the site (WGS 84 normal gravity from the site's latitude and elevation). Without a site: the file's only site with a latitude, or standard gravity when none has one; with several, name the site.")
        .example(&format!("{EX}\nlet g = s.gauge(\"MN-3\");\nprint(g.dp(12.mm, 20.degC, 1.2.kg_m3));"))
        .source("Stagna set-up format stagna-setup, version 1; gravity: WGS 84 normal gravity");
    r.method("Setup", "gauge", &doc, |s: &mut SetupV, id: &str| manometer(&s.0, id, None));
    r.method("Setup", "gauge", &doc, |s: &mut SetupV, id: &str, site: &str| manometer(&s.0, id, Some(site)));
    r.method(
        "Setup",
        "transducer",
        &Doc::new(
            "setup.transducer(id) -> Transducer",
            "The transducer of that id with its calibration curve fitted to the file's points.",
        )
        .example(&format!("{EX}\nprint(s.transducer(\"DPT-1\"));"))
        .source("Stagna set-up format stagna-setup, version 1"),
        |s: &mut SetupV, id: &str| -> Res<Transducer> {
            s.0.transducers
                .get(id)
                .cloned()
                .ok_or_else(|| unknown(&s.0, "transducer", id, s.0.transducers.keys().collect()))
        },
    );
    r.method(
        "Setup",
        "section",
        &Doc::new("setup.section(site) -> Conduit", "The measuring section of a site (circular from its diameter or the mean of its measured diameters, or rectangular), with its roughness when given.")
            .example(&format!("{EX}\nprint(s.section(\"ahu2-supply\"));"))
            .source("Stagna set-up format stagna-setup, version 1"),
        |s: &mut SetupV, id: &str| -> Res<Conduit> {
            s.0.sites.get(id).map(|st| st.conduit.clone()).ok_or_else(|| unknown(&s.0, "site", id, s.0.sites.keys().collect()))
        },
    );
    r.method(
        "Setup",
        "site",
        &Doc::new("setup.site(id) -> Map", "What the file says of a site: name, section, ports, straight_upstream and straight_downstream (straight lengths before and after the measuring section in the flow direction), elevation, latitude_deg and the local gravity.")
            .example(&format!("{EX}\nprint(s.site(\"ahu2-supply\").gravity);"))
            .source("Stagna set-up format stagna-setup, version 1; gravity: WGS 84 normal gravity"),
        |s: &mut SetupV, id: &str| -> Res<Map> {
            let st = s.0.sites.get(id).ok_or_else(|| unknown(&s.0, "site", id, s.0.sites.keys().collect()))?;
            let mut m = Map::new();
            m.insert("id".into(), Dynamic::from(id.to_string()));
            m.insert("name".into(), st.entry.name.clone().map(Dynamic::from).unwrap_or(Dynamic::UNIT));
            m.insert("section".into(), Dynamic::from(st.conduit.clone()));
            m.insert("ports".into(), st.entry.ports.map(|p| Dynamic::from(p as i64)).unwrap_or(Dynamic::UNIT));
            let q = |l: Option<stagna::Length>| l.map(|l| Dynamic::from(Q::si(l.si(), D::LENGTH))).unwrap_or(Dynamic::UNIT);
            m.insert("straight_upstream".into(), q(st.straight_upstream));
            m.insert("straight_downstream".into(), q(st.straight_downstream));
            m.insert("elevation".into(), q(st.elevation));
            m.insert("latitude_deg".into(), st.entry.latitude_deg.map(Dynamic::from).unwrap_or(Dynamic::UNIT));
            m.insert(
                "gravity".into(),
                Dynamic::from(Q { q: site_gravity(&s.0, id)?.into(), unit: Some("m/s^2".into()) }),
            );
            Ok(m)
        },
    );
    r.method(
        "Setup",
        "campaign",
        &Doc::new("setup.campaign(id) -> Map", "A campaign's part of a reduce_campaign spec: probe, manometer (at the site's gravity), columns and reference as the file gives them. Add the day's conditions (fluid, static_pressure) with `+`.")
            .example("let s = demo_setup(\"pretendbury-ahu2\");\nlet spec = s.campaign(\"monthly-traverse\") + #{fluid: humid_air(0.45), static_pressure: 100.8.kPa};\nprint(spec.keys());")
            .source("Stagna set-up format stagna-setup, version 1"),
        |s: &mut SetupV, id: &str| -> Res<Map> {
            let c = s.0.campaigns.get(id).ok_or_else(|| unknown(&s.0, "campaign", id, s.0.campaigns.keys().collect()))?;
            let mut m = Map::new();
            m.insert("probe".into(), Dynamic::from(s.0.probes[&c.probe].probe.clone()));
            if let Some(g) = &c.gauge {
                m.insert("manometer".into(), Dynamic::from(manometer(&s.0, g, Some(&c.site))?));
            }
            if !c.columns.is_empty() {
                let cols: Map = c.columns.iter().map(|(k, v)| (k.as_str().into(), Dynamic::from(v.clone()))).collect();
                m.insert("columns".into(), Dynamic::from(cols));
            }
            if let Some(r) = &c.reference {
                m.insert("reference".into(), Dynamic::from(r.clone()));
            }
            Ok(m)
        },
    );
    r.method(
        "Setup",
        "units",
        &Doc::new("setup.units(campaign) -> Map", "The units of the readings' columns as the campaign gives them, for table.units(...).")
            .example("let s = demo_setup(\"neverbrook\");\nlet t = demo_table(\"neverbrook-main\").units(s.units(\"centreline-survey\"));\nprint(t[\"hg_deflection_mm\"]);")
            .source("Stagna set-up format stagna-setup, version 1"),
        |s: &mut SetupV, id: &str| -> Res<Map> {
            let c = s.0.campaigns.get(id).ok_or_else(|| unknown(&s.0, "campaign", id, s.0.campaigns.keys().collect()))?;
            Ok(c.units.iter().map(|(k, v)| (k.as_str().into(), Dynamic::from(v.clone()))).collect())
        },
    );
    r.property(
        "Setup",
        "ids",
        &Doc::new(
            "setup.ids -> Map",
            "The ids in the file: #{probes, gauges, transducers, sites, campaigns}, each an array.",
        )
        .example(&format!("{EX}\nprint(s.ids);"))
        .source("Stagna set-up format stagna-setup, version 1"),
        |s: &mut SetupV| -> Map {
            let list =
                |k: Vec<&String>| Dynamic::from(k.into_iter().map(|s| Dynamic::from(s.clone())).collect::<Array>());
            let mut m = Map::new();
            m.insert("probes".into(), list(s.0.probes.keys().collect()));
            m.insert("gauges".into(), list(s.0.gauges.keys().collect()));
            m.insert("transducers".into(), list(s.0.transducers.keys().collect()));
            m.insert("sites".into(), list(s.0.sites.keys().collect()));
            m.insert("campaigns".into(), list(s.0.campaigns.keys().collect()));
            m
        },
    );
}

/// Readings of a transducer in Pa: a pressure column or quantity as it is, plain numbers
/// in the transducer's reading unit.
fn readings_pa(t: &Transducer, d: &Dynamic) -> Res<(Vec<f64>, bool)> {
    if let Some(c) = d.clone().try_cast::<Col>() {
        if c.dimension == D::PRESSURE {
            return Ok((c.si.to_vec(), true));
        }
        if c.dimension == D::NONE {
            let f = lib(stagna::Quantity::new(1.0, &t.unit))?.si;
            return Ok((c.si.iter().map(|v| v * f).collect(), true));
        }
        return Err(rt(format!(
            "transducer {}: readings must be pressures or plain numbers in {}, got {}",
            t.id,
            t.unit,
            describe(d)
        )));
    }
    let f = lib(stagna::Quantity::new(1.0, &t.unit))?.si;
    if d.is_int() || d.is_float() {
        return Ok((vec![number(d, "reading")? * f], false));
    }
    if let Some(a) = d.clone().try_cast::<Array>() {
        let what = format!("transducer {} reading", t.id);
        let v = a
            .iter()
            .map(|x| {
                if x.is_int() || x.is_float() { number(x, &what).map(|v| v * f) } else { si_of(x, D::PRESSURE, &what) }
            })
            .collect::<Res<Vec<f64>>>()?;
        return Ok((v, true));
    }
    Ok((vec![si_of(d, D::PRESSURE, &format!("transducer {} reading", t.id))?], false))
}

fn transducers(r: &mut Registrar<'_>, _prefs: &SharedPrefs) {
    r.method(
        "Transducer",
        "dp",
        &Doc::new("transducer.dp(readings) -> Column | Quantity", "Corrected differential pressures: each reading through the calibration curve (a pressure column or quantity as it is; plain numbers or an array in the transducer's reading unit). Readings outside the rated range or the calibrated span are counted in a warning printed once.")
            .example(&format!("{EX}\nlet t = s.transducer(\"DPT-1\");\nprint(t.dp(table_from(#{{dp: [48.2, 101.3, 150.0]}})[\"dp\"]));\nprint(t.dp(120.Pa));"))
            .source("least-squares calibration curve (GUM Annex H.3)"),
        |ctx: rhai::NativeCallContext, t: &mut Transducer, d: Dynamic| -> Res<Dynamic> {
            let (mut v, column) = readings_pa(t, &d)?;
            let warnings = t.correct_column(&mut v);
            for w in &warnings {
                let msg = format!("warning: {}", w.message);
                ctx.call_native_fn::<()>("eprint", (rhai::ImmutableString::from(msg),))?;
            }
            if column {
                let name = d.clone().try_cast::<Col>().map(|c| c.name.to_string()).unwrap_or_else(|| "dp".into());
                Ok(Dynamic::from(Col::new(&name, v, D::PRESSURE, None)))
            } else {
                Ok(Dynamic::from(Q::si(v[0], D::PRESSURE)))
            }
        },
    );
    r.method(
        "Transducer",
        "u_reading",
        &Doc::new("transducer.u_reading(reading) -> Quantity", "Standard uncertainty (k = 1) of one corrected reading from the calibration: √(s² + u_curve²), the scatter of the calibration points about the curve and the curve's own uncertainty at that reading.")
            .example(&format!("{EX}\nprint(s.transducer(\"DPT-1\").u_reading(120.Pa));"))
            .source("least-squares prediction variance (common practice, from memory); curve variance as GUM Annex H.3"),
        |t: &mut Transducer, d: Dynamic| -> Res<Q> {
            let c = t.calibration.as_ref().ok_or_else(|| rt(format!("transducer {} has no calibration points", t.id)))?;
            let (v, _) = readings_pa(t, &d)?;
            Ok(Q { q: stagna::Pressure::pa(c.u_reading_pa(v[0])).into(), unit: Some("Pa".into()) })
        },
    );
    r.method(
        "Transducer",
        "calibration_table",
        &Doc::new(
            "transducer.calibration_table() -> Table",
            "The calibration points with the fitted value and the residual of each (Pa).",
        )
        .example(&format!("{EX}\nprint(s.transducer(\"DPT-1\").calibration_table());"))
        .source("least-squares calibration curve (GUM Annex H.3)"),
        |t: &mut Transducer| -> Res<super::tables::Tbl> {
            use polars::prelude::{DataFrame, NamedFrom, Series};
            let c =
                t.calibration.as_ref().ok_or_else(|| rt(format!("transducer {} has no calibration points", t.id)))?;
            let ind: Vec<f64> = c.points.iter().map(|p| p.indicated_pa).collect();
            let reference: Vec<f64> = c.points.iter().map(|p| p.reference_pa).collect();
            let fitted: Vec<f64> = ind.iter().map(|&x| c.correct_pa(x)).collect();
            let df = DataFrame::new_infer_height(vec![
                Series::new("indicated_pa".into(), ind).into(),
                Series::new("reference_pa".into(), reference).into(),
                Series::new("fitted_pa".into(), fitted).into(),
                Series::new("residual_pa".into(), c.residuals_pa()).into(),
            ])
            .map_err(|e| rt(e.to_string()))?;
            Ok(super::tables::with_result_units(df, Default::default()))
        },
    );
    r.engine.register_fn("to_string", |t: &mut Transducer| show_transducer(t));
    r.engine.register_fn("to_debug", |t: &mut Transducer| show_transducer(t));
}

fn show_transducer(t: &Transducer) -> String {
    let mut s = format!(
        "Transducer {}: readings in {}, range {} to {} Pa",
        t.id,
        t.unit,
        format_number(t.range_pa.0),
        format_number(t.range_pa.1)
    );
    match &t.calibration {
        Some(c) => {
            s.push_str(&format!(
                "\n  calibrated {} ({} points, degree {}): residual standard deviation s = {} Pa, ν = {}",
                c.date,
                c.points.len(),
                c.degree,
                format_sig(c.residual_sd_pa, 2),
                c.dof
            ));
            if let Some((a, b)) = c.linear_terms() {
                s.push_str(&format!("\n  Δp = {} Pa + {} × reading", format_number(a), format_number(b)));
            }
            if !c.by.is_empty() {
                s.push_str(&format!("\n  by: {}", c.by));
            }
        }
        None => s.push_str("\n  no calibration: readings are used as logged"),
    }
    s
}
