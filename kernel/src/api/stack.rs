//! Stack tests by the US EPA methods in scripts: S-type calibrations and their record
//! files, Method 3 molecular weight, Method 4 moisture trains, the Method 1/2/2H checks,
//! and run sheets that reduce each run by the methods' own equations beside the
//! physics route.

use rhai::{Array, Dynamic, Map};
use stagna::methods::us_epa::calibration::{CalibrationPair, CalibrationRecord, STypeCalibration};
use stagna::methods::us_epa::check::MethodCheck;
use stagna::methods::us_epa::directional::{
    self, DirectionalPoint, DirectionalProbe, DirectionalTraverse, PitchCurves, PitchCurvesRecord,
};
use stagna::methods::us_epa::moisture::{self, LeakCheck, MoistureResult, MoistureTrain, StackConditions};
use stagna::methods::us_epa::run_sheet::{self, Coefficient, GasInput, MoistureInput, Route, RunSheet, StackRun};
use stagna::methods::us_epa::site_checks::{self, Construction};
use stagna::methods::us_epa::wall_factor::{self, CalculatedWallFactor, WallSector};
use stagna::methods::us_epa::{self as epa, MethodUnits};
use stagna::units::dimension::Dimension as D;
use stagna::units::quantity::format_number;
use stagna::{Probe, ProbeKind};

use super::tables::{Tbl, out_path};
use super::*;
use crate::catalog::Doc;

/// An S-type calibration with its record, as scripts see it.
#[derive(Debug, Clone)]
pub struct Calibration {
    /// The record (what is saved).
    pub record: CalibrationRecord,
    /// The reduced calibration.
    pub cal: STypeCalibration,
}

/// One or more reduced runs.
#[derive(Debug, Clone)]
pub struct Sheets(pub Vec<RunSheet>);

/// The text of a record file. A relative path that is not here may be a record this run
/// wrote into its output folder (where `.save` writes), so that is tried next.
fn read_record(prefs: &SharedPrefs, path: &str) -> Res<String> {
    std::fs::read_to_string(super::tables::in_path(prefs, path)).map_err(|e| rt(format!("{path}: cannot read: {e}")))
}

/// Writes a record's text into the session's output folder, atomically.
fn write_record(prefs: &SharedPrefs, path: &str, text: &str) -> Res<()> {
    let target = out_path(prefs, path)?;
    lib(stagna::io::table::write_atomically(&target, |f| std::io::Write::write_all(f, text.as_bytes())))
}

/// The section's area (m²) and, for a circular stack, its diameter (m), from `diameter`
/// or `area` in a spec.
fn section_of(s: &Map, what: &str) -> Res<(f64, Option<f64>)> {
    match (field(s, "diameter"), field(s, "area")) {
        (Some(d), None) => {
            let d = length(d, "diameter")?.si();
            Ok((std::f64::consts::PI * d * d / 4.0, Some(d)))
        }
        (None, Some(a)) => Ok((si_of(a, D::AREA, "area")?, None)),
        _ => {
            Err(rt(format!("{what}: give the stack's diameter (circular) or its area (other shapes), one of the two")))
        }
    }
}

/// A pressure argument in the methods' mmHg.
fn mm_hg(d: &Dynamic, what: &str) -> Res<f64> {
    Ok(pressure(d, what)?.si() / epa::PA_PER_MM_HG)
}

/// A pressure argument in the methods' mm H₂O.
fn mm_h2o(d: &Dynamic, what: &str) -> Res<f64> {
    Ok(pressure(d, what)?.si() / epa::PA_PER_MM_H2O)
}

/// Today as days since 1970-01-01 (UTC).
pub fn today_days() -> i64 {
    let s = std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).unwrap_or_default().as_secs();
    (s / 86_400) as i64
}

/// Registers the package.
pub fn register(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.engine
        .register_type_with_name::<Calibration>("SCalibration")
        .register_type_with_name::<MoistureResult>("Moisture")
        .register_type_with_name::<MethodCheck>("MethodCheck")
        .register_type_with_name::<Sheets>("RunSheet");
    r.engine.register_fn("to_string", |c: &mut MethodCheck| c.to_string());
    r.group("Stack tests (US EPA Methods 1–4, 2H)");
    calibrations(r, prefs);
    gas_and_moisture(r);
    checks(r);
    runs(r);
    directional_probes(r, prefs);
}

fn pairs(a: &Array, side: &str) -> Res<Vec<CalibrationPair>> {
    a.iter()
        .enumerate()
        .map(|(i, d)| {
            let what = format!("side {side}, reading {}", i + 1);
            let p: Array = d
                .clone()
                .try_cast()
                .ok_or_else(|| rt(format!("{what}: expected [dp_std, dp_s], got {}", describe(d))))?;
            if p.len() != 2 {
                return Err(rt(format!("{what}: expected two readings [dp_std, dp_s], got {}", p.len())));
            }
            let value = |x: &Dynamic, n: &str| -> Res<f64> {
                if let Some(q) = x.clone().try_cast::<Q>() {
                    if q.q.dimension != D::PRESSURE {
                        return Err(rt(format!(
                            "{what}: {n} must be a pressure or a plain number, got {}",
                            describe(x)
                        )));
                    }
                    return Ok(q.q.si);
                }
                number(x, &format!("{what}: {n}"))
            };
            Ok(CalibrationPair { dp_std: value(&p[0], "dp_std")?, dp_s: value(&p[1], "dp_s")? })
        })
        .collect()
}

fn calibration_text(c: &Calibration) -> String {
    let r = &c.record;
    let mut s = format!(
        "S-type calibration {} of {} (C_p(std) = {}{}): C_p(A) = {:.4}, C_p(B) = {:.4}, C_p = {:.4}{}\n",
        r.probe_id,
        r.date,
        r.cp_std,
        if r.standard_id.is_empty() { String::new() } else { format!(", standard {}", r.standard_id) },
        c.cal.cp_a,
        c.cal.cp_b,
        c.cal.cp(),
        r.u_cp.map(|u| format!(", u(C_p) = {u} (k = 1)")).unwrap_or_default()
    );
    s.push_str("  side  Δp_std   Δp_s     C_p(s)\n");
    for (side, pts, cps) in [("A", &c.cal.side_a, &c.cal.cp_a_points), ("B", &c.cal.side_b, &c.cal.cp_b_points)] {
        for (p, cp) in pts.iter().zip(cps.iter()) {
            s.push_str(&format!("  {side}     {:<8} {:<8} {cp:.4}\n", format_number(p.dp_std), format_number(p.dp_s)));
        }
    }
    for k in &c.cal.checks {
        s.push_str(&format!("  {k}\n"));
    }
    if !r.performed_by.is_empty() {
        s.push_str(&format!("  performed by: {}\n", r.performed_by));
    }
    if !r.note.is_empty() {
        s.push_str(&format!("  note: {}\n", r.note));
    }
    s.trim_end().to_string()
}

fn calibrations(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.func(
        "s_type_calibration",
        &Doc::new("s_type_calibration(cp_std, side_a, side_b, record) -> SCalibration", "Reduces a calibration of an S-type tube against a standard pitot tube: C_p(s) per pair of readings, the side means C_p(A) and C_p(B), the average deviations σ_A, σ_B and the side difference, each checked against 0.01. The record map names the tube and date and may carry standard_id, performed_by, note, dp_unit and u_cp (standard uncertainty of C_p, k = 1).")
            .param("cp_std", "coefficient of the standard tube (0.99 when it was not calibrated itself)")
            .param("side_a", "readings with side A facing the flow: [[dp_std, dp_s], ...], at least 3 (numbers in one unit, or pressures)")
            .param("side_b", "the same with side B facing the flow")
            .param("record", "#{probe_id, date: \"YYYY-MM-DD\", standard_id, performed_by, note, dp_unit, u_cp}")
            .example("let cal = s_type_calibration(0.99, [[12.0, 16.8], [10.0, 14.1], [15.0, 21.0]], [[12.0, 16.9], [10.0, 14.0], [15.0, 21.1]], #{probe_id: \"SP-07\", date: \"2026-10-14\"});\nprint(cal);\nprint(cal.cp);")
            .source("US EPA Method 2 §10.1 (40 CFR 60 App. A-1): C_p(s) = C_p(std) √(Δp_std/Δp_s); limits 0.01 from memory, unverified"),
        |cp_std: Dynamic, a: Array, b: Array, info: Map| -> Res<Calibration> {
            check_keys(&info, &["probe_id", "date", "standard_id", "performed_by", "note", "dp_unit", "u_cp"], "s_type_calibration record")?;
            let cal = lib(STypeCalibration::new(number(&cp_std, "cp_std")?, pairs(&a, "A")?, pairs(&b, "B")?))?;
            let get = |k: &str| -> Res<String> { field(&info, k).map(|d| text(d, k)).transpose().map(Option::unwrap_or_default) };
            let probe_id = get("probe_id")?;
            let date = get("date")?;
            let mut record = lib(CalibrationRecord::new(&probe_id, &date, &cal))?;
            record.standard_id = get("standard_id")?;
            record.performed_by = get("performed_by")?;
            record.note = get("note")?;
            record.dp_unit = get("dp_unit")?;
            record.u_cp = field(&info, "u_cp").map(|d| number(d, "u_cp")).transpose()?;
            lib(record.calibration())?;
            Ok(Calibration { record, cal })
        },
    );
    r.engine.register_fn("to_string", |c: &mut Calibration| calibration_text(c));
    let pp = prefs.clone();
    r.method(
        "SCalibration",
        "save",
        &Doc::new("cal.save(path)", "Saves the calibration record as a TOML file (Stagna's own versioned format, `docs/records.md`) through a temporary file and a rename; the derived figures go in a header comment and are recomputed from the readings whenever the file is loaded.")
            .example("let cal = s_type_calibration(0.99, [[12.0, 16.8], [10.0, 14.1], [15.0, 21.0]], [[12.0, 16.9], [10.0, 14.0], [15.0, 21.1]], #{probe_id: \"SP-07\", date: \"2026-10-14\"});\ncal.save(\"sp07-example.toml\");")
            .source("Stagna record format stagna-s-type-calibration, version 1"),
        move |c: &mut Calibration, path: &str| -> Res<()> { write_record(&pp, path, &lib(c.record.to_toml())?) },
    );
    r.func(
        "demo_calibration",
        &Doc::new("demo_calibration(name) -> SCalibration", "A bundled calibration record of the invented scenarios: \"nowhere-vale-sp07\" (the S-type tube SP-07 of the fictional Nowhere Vale stack test).")
            .example("print(demo_calibration(\"nowhere-vale-sp07\").cp);")
            .source("invented demo data bundled with stagna"),
        |name: &str| -> Res<Calibration> {
            let (file, text) = match name.trim_end_matches(".toml").trim_end_matches("-calibration") {
                "nowhere-vale-sp07" => ("nowhere-vale-sp07-calibration.toml", include_str!("../../../demo-data/nowhere-vale-sp07-calibration.toml")),
                other => return Err(rt(format!("no demo calibration '{other}'; there is: nowhere-vale-sp07"))),
            };
            let record = lib(CalibrationRecord::from_toml(text, file))?;
            let cal = lib(record.calibration())?;
            Ok(Calibration { record, cal })
        },
    );
    let pl = prefs.clone();
    r.func(
        "load_calibration",
        &Doc::new("load_calibration(path) -> SCalibration", "Reads an S-type calibration record (TOML) and recomputes its figures from the readings (a relative path not found here is looked for in the run's output folder, where cal.save writes). Unknown keys, wrong types, a bad date, a record from a newer Stagna or fewer than 3 readings per side are refused with the file, line and key.")
            .example("let cal = s_type_calibration(0.99, [[12.0, 16.8], [10.0, 14.1], [15.0, 21.0]], [[12.0, 16.9], [10.0, 14.0], [15.0, 21.1]], #{probe_id: \"SP-07\", date: \"2026-10-14\"});\ncal.save(\"sp07-load-example.toml\");\nprint(load_calibration(\"sp07-load-example.toml\").cp);")
            .source("Stagna record format stagna-s-type-calibration, version 1"),
        move |path: &str| -> Res<Calibration> {
            let text = read_record(&pl, path)?;
            let record = lib(CalibrationRecord::from_toml(&text, path))?;
            let cal = lib(record.calibration())?;
            Ok(Calibration { record, cal })
        },
    );
    for (name, summary) in [
        ("cp", "C_p to use: the mean of the two side means."),
        ("cp_a", "Side-A mean C_p(A)."),
        ("cp_b", "Side-B mean C_p(B)."),
    ] {
        r.property(
            "SCalibration",
            name,
            &Doc::new(&format!("cal.{name} -> f64"), summary)
                .example(&format!("let cal = s_type_calibration(0.99, [[12.0, 16.8], [10.0, 14.1], [15.0, 21.0]], [[12.0, 16.9], [10.0, 14.0], [15.0, 21.1]], #{{probe_id: \"SP-07\", date: \"2026-10-14\"}});\nprint(cal.{name});"))
                .source("US EPA Method 2 §10.1 (from memory, unverified)"),
            move |c: &mut Calibration| -> f64 {
                match name {
                    "cp" => c.cal.cp(),
                    "cp_a" => c.cal.cp_a,
                    _ => c.cal.cp_b,
                }
            },
        );
    }
    r.property(
        "SCalibration",
        "passed",
        &Doc::new("cal.passed -> bool", "Whether every acceptance check of the calibration passes.")
            .example("let cal = s_type_calibration(0.99, [[12.0, 16.8], [10.0, 14.1], [15.0, 21.0]], [[12.0, 16.9], [10.0, 14.0], [15.0, 21.1]], #{probe_id: \"SP-07\", date: \"2026-10-14\"});\nprint(cal.passed);")
            .source("US EPA Method 2 §10.1 (from memory, unverified)"),
        |c: &mut Calibration| c.cal.passed(),
    );
    r.func(
        "s_type",
        &Doc::new("s_type(calibration, options) -> Probe", "An S-type probe whose C_p comes from a calibration record; options: max_age_days (a calibration older than this warns on every velocity). A calibration that fails its checks warns on every velocity too.")
            .example("let cal = s_type_calibration(0.99, [[12.0, 16.8], [10.0, 14.1], [15.0, 21.0]], [[12.0, 16.9], [10.0, 14.0], [15.0, 21.1]], #{probe_id: \"SP-07\", date: \"2026-10-14\"});\nlet p = s_type(cal, #{max_age_days: 365});\nprint(p.velocity(120.Pa, 0.85.kg_m3).velocity);")
            .source("US EPA Method 2 §10.1"),
        |c: Calibration, o: Map| -> Res<Probe> {
            check_keys(&o, &["max_age_days"], "s_type options")?;
            let age = field(&o, "max_age_days").map(|d| count(d, "max_age_days")).transpose()?.map(|d| d as i64);
            lib(Probe::from_calibration(&c.record, today_days(), age))
        },
    );
}

fn gas_and_moisture(r: &mut Registrar<'_>) {
    r.func(
        "method3_dry_molar_mass",
        &Doc::new("method3_dry_molar_mass(co2_pct, o2_pct, n2_co_pct) -> Quantity", "Dry molecular weight by US EPA Method 3 with the method's coefficients exactly: 0.440 %CO₂ + 0.320 %O₂ + 0.280 (%N₂ + %CO). It differs from a mixture built from CIAAW molar masses (flue_gas) by about 0.01 g/mol; use this one where the method is followed.")
            .param("co2_pct", "CO₂, % by volume, dry")
            .param("o2_pct", "O₂, %")
            .param("n2_co_pct", "N₂ + CO, % (the balance)")
            .example("print(method3_dry_molar_mass(9.8, 8.6, 81.6));")
            .source("US EPA Method 3 (40 CFR 60 App. A-2) nomenclature: 0.440, 0.320, 0.280; eq. 3-1 (number from memory)"),
        |a: Dynamic, b: Dynamic, c: Dynamic| -> Res<Q> {
            let md = lib(epa::dry_molecular_weight(number(&a, "CO2 %")?, number(&b, "O2 %")?, number(&c, "N2 + CO %")?))?;
            lib(Q::with_unit(md, "kg/kmol"))
        },
    );
    r.func(
        "method4_moisture",
        &Doc::new("method4_moisture(train) -> Moisture", "Moisture of one run by US EPA Method 4 (reference procedure): condensed water, silica-gel gain and dry gas at 20 °C, 760 mmHg, B_ws, and — when the stack state is given — the saturation value, reporting the lower. Keys: water_initial_ml, water_final_ml, gel_initial_g, gel_final_g (plain numbers), meter_volume (a volume, e.g. 0.9.m3), meter_factor (Y), meter_temperature, barometric, orifice_dp (optional pressure), stack_temperature and stack_pressure (absolute; optional), leak_rate and sampling_rate (volume flows; optional leak check).")
            .example("let m = method4_moisture(#{water_initial_ml: 200, water_final_ml: 281, gel_initial_g: 200, gel_final_g: 209, meter_volume: 0.9.m3, meter_factor: 0.998, meter_temperature: 24.degC, barometric: 745.mmHg, stack_temperature: 160.degC, stack_pressure: 744.mmHg});\nprint(m);\nprint(m.bws);")
            .source("US EPA Method 4 (40 CFR 60 App. A-3): symbols and constants read in the nomenclature; equation numbers and the lower-of-two rule from memory"),
        |m: Map| -> Res<MoistureResult> { moisture_of(&m) },
    );
    r.engine.register_fn("to_string", |m: &mut MoistureResult| {
        let mut s = format!(
            "Method 4 moisture: V_wc(std) = {:.5} m³, V_wsg(std) = {:.5} m³, V_m(std) = {:.4} dscm (20 °C, 760 mmHg), B_ws measured {:.4}",
            m.vwc_std, m.vwsg_std, m.vm_std, m.bws_measured
        );
        if let Some(sat) = m.bws_saturated {
            s.push_str(&format!(", saturated {sat:.4}"));
        }
        s.push_str(&format!(", reported {:.4}", m.bws));
        for c in &m.checks {
            s.push_str(&format!("\n  {c}"));
        }
        s
    });
    r.property(
        "Moisture",
        "bws",
        &Doc::new("moisture.bws -> f64", "The B_ws to report: the lower of measured and saturated moisture.")
            .example("print(method4_moisture(#{water_initial_ml: 200, water_final_ml: 281, gel_initial_g: 200, gel_final_g: 209, meter_volume: 0.9.m3, meter_factor: 0.998, meter_temperature: 24.degC, barometric: 745.mmHg}).bws);")
            .source("US EPA Method 4"),
        |m: &mut MoistureResult| m.bws,
    );
}

const MOISTURE_KEYS: &[&str] = &[
    "water_initial_ml",
    "water_final_ml",
    "gel_initial_g",
    "gel_final_g",
    "meter_volume",
    "meter_factor",
    "meter_temperature",
    "barometric",
    "orifice_dp",
    "stack_temperature",
    "stack_pressure",
    "leak_rate",
    "sampling_rate",
];

/// A Method 4 train from a script map, reduced.
fn moisture_of(m: &Map) -> Res<MoistureResult> {
    let (train, stack, leak) = train_of(m)?;
    lib(moisture::reduce(&train, stack, leak))
}

/// A Method 4 train, its stack conditions and leak check from a script map.
fn train_of(m: &Map) -> Res<(MoistureTrain, Option<StackConditions>, Option<LeakCheck>)> {
    check_keys(m, MOISTURE_KEYS, "method4_moisture")?;
    let need = |k: &str| field(m, k).ok_or_else(|| rt(format!("method4_moisture: '{k}' is missing")));
    let train = MoistureTrain {
        units: MethodUnits::Metric,
        water_initial_ml: number(need("water_initial_ml")?, "water_initial_ml")?,
        water_final_ml: number(need("water_final_ml")?, "water_final_ml")?,
        gel_initial_g: number(need("gel_initial_g")?, "gel_initial_g")?,
        gel_final_g: number(need("gel_final_g")?, "gel_final_g")?,
        meter_volume: si_of(need("meter_volume")?, D::VOLUME, "meter_volume")?,
        meter_factor: number(need("meter_factor")?, "meter_factor")?,
        meter_temperature: temperature(need("meter_temperature")?, "meter_temperature")?.k() - 273.15,
        barometric: mm_hg(need("barometric")?, "barometric")?,
        orifice_dp: field(m, "orifice_dp").map(|d| mm_h2o(d, "orifice_dp")).transpose()?.unwrap_or(0.0),
    };
    let stack = match (field(m, "stack_temperature"), field(m, "stack_pressure")) {
        (Some(t), Some(p)) => Some(StackConditions {
            temperature: temperature(t, "stack_temperature")?.k() - 273.15,
            pressure: mm_hg(p, "stack_pressure")?,
        }),
        (None, None) => None,
        _ => {
            return Err(rt(
                "method4_moisture: give stack_temperature and stack_pressure together (for the saturation check)",
            ));
        }
    };
    let leak = match (field(m, "leak_rate"), field(m, "sampling_rate")) {
        (Some(l), Some(s)) => Some(LeakCheck {
            leak_rate: si_of(l, D::VOLUME_FLOW, "leak_rate")? * 60.0,
            sampling_rate: si_of(s, D::VOLUME_FLOW, "sampling_rate")? * 60.0,
        }),
        (None, None) => None,
        _ => return Err(rt("method4_moisture: give leak_rate and sampling_rate together (for the leak check)")),
    };
    Ok((train, stack, leak))
}

/// Angles in degrees from an array (plain numbers are degrees; `4.deg` too) or a
/// column (a column declared in "deg" or "rad" is converted; undeclared means degrees).
fn degrees(d: &Dynamic, what: &str) -> Res<Vec<f64>> {
    if let Some(c) = d.clone().try_cast::<Col>() {
        return degrees_of_column(&c);
    }
    let a: Array = d
        .clone()
        .try_cast()
        .ok_or_else(|| rt(format!("{what}: expected an array or a column, got {}", describe(d))))?;
    a.iter()
        .map(|x| match x.clone().try_cast::<Q>() {
            Some(q) if q.q.dimension == D::NONE && q.unit.is_some() => lib(q.q.value_in("deg")),
            _ => number(x, what),
        })
        .collect()
}

fn degrees_of_column(c: &Col) -> Res<Vec<f64>> {
    if c.dimension != D::NONE {
        return Err(rt(format!(
            "yaw: column '{}' must hold angles (degrees), not a {}",
            c.name,
            c.dimension.name().unwrap_or("quantity")
        )));
    }
    if c.unit.is_some() { lib(c.values_in("deg")) } else { Ok(c.si.to_vec()) }
}

/// Velocity heads in mm H₂O from pressures (array or column).
fn heads_mm(d: &Dynamic, what: &str) -> Res<Vec<f64>> {
    if let Some(c) = d.clone().try_cast::<Col>() {
        if c.dimension != D::PRESSURE {
            return Err(rt(format!("{what} must be a pressure column (declare its unit), got {}", describe(d))));
        }
        return Ok(c.si.iter().map(|p| p / epa::PA_PER_MM_H2O).collect());
    }
    let a: Array = d
        .clone()
        .try_cast()
        .ok_or_else(|| rt(format!("{what}: expected pressures (array or column), got {}", describe(d))))?;
    a.iter().map(|x| mm_h2o(x, what)).collect()
}

/// Temperatures in °C from a quantity, an array or a column.
fn temps_c(d: &Dynamic, what: &str) -> Res<Vec<f64>> {
    if let Some(c) = d.clone().try_cast::<Col>() {
        if c.dimension != D::TEMPERATURE {
            return Err(rt(format!("{what} must be a temperature column (declare its unit), got {}", describe(d))));
        }
        return Ok(c.si.iter().map(|k| k - 273.15).collect());
    }
    if let Ok(a) = d.as_array_ref() {
        return a.iter().map(|x| Ok(temperature(x, what)?.k() - 273.15)).collect();
    }
    Ok(vec![temperature(d, what)?.k() - 273.15])
}

fn checks(r: &mut Registrar<'_>) {
    r.func(
        "cyclonic_check",
        &Doc::new("cyclonic_check(yaw) -> MethodCheck", "The Method 1 cyclonic-flow check: the mean of the absolute null (yaw) angles over the points against 20°. Angles in degrees, within ±90°.")
            .param("yaw", "null angle at each point, degrees (array or column)")
            .example("print(cyclonic_check([4, -6, 12, 0, -3, 8]));")
            .source("US EPA Method 1 §11.4 (limit and averaging from memory, unverified); Method 2 §1.2"),
        |y: Dynamic| -> Res<MethodCheck> { lib(site_checks::cyclonic_flow(&degrees(&y, "yaw")?)) },
    );
    r.func(
        "method1a_site",
        &Doc::new("method1a_site(conduit, options) -> Array", "US EPA Method 1A checks of a small stack or duct (0.10 m to under 0.30 m across, or 0.0081 m² to under 0.071 m²): the size range, the straight lengths before and after the particulate site (preferred: 8 D before and 10 D after; alternative: 2 D and 2.5 D) and where the standard pitot's velocity site stands (8 D, or 2 D at the alternative location, after the particulate site). Distances in equivalent diameters along the flow.")
            .param("conduit", "the stack or duct (round_section or rect_section)")
            .param("options", "map: straight_upstream_D (straight length from the nearest disturbance before the site to the site), straight_downstream_D (from the site to the nearest disturbance after it), velocity_site_D (optional: velocity site after the particulate site)")
            .example("for c in method1a_site(round_section(200.mm), #{straight_upstream_D: 9, straight_downstream_D: 11, velocity_site_D: 8}) { print(c); }")
            .source("US EPA Method 1A §1.2 (size range, read in the published text); §11.1.1 site distances from memory, unverified"),
        |c: stagna::Conduit, o: Map| -> Res<Array> {
            check_keys(&o, &["straight_upstream_D", "straight_downstream_D", "velocity_site_D"], "method1a_site")?;
            let need = |k: &str| {
                field(&o, k)
                    .ok_or_else(|| rt(format!("method1a_site: option '{k}' is required (equivalent diameters)")))
                    .and_then(|d| number(d, k))
            };
            let site = site_checks::SmallDuctSite {
                diameter_m: match c.section {
                    stagna::section::conduit::Section::Circular { diameter } => Some(diameter.si()),
                    _ => None,
                },
                area_m2: c.area().si(),
                straight_upstream_d: need("straight_upstream_D")?,
                straight_downstream_d: need("straight_downstream_D")?,
                velocity_site_d: field(&o, "velocity_site_D").map(|d| number(d, "velocity_site_D")).transpose()?,
            };
            Ok(lib(site_checks::method1a_site(&site))?.into_iter().map(Dynamic::from).collect())
        },
    );
    r.func(
        "method1a_steady_flow",
        &Doc::new("method1a_steady_flow(before, after) -> MethodCheck", "US EPA Method 1A steady-flow check where sampling and velocity share one location: the flow (or mean velocity) from a complete velocity traverse after the sampling run against the one before it; the run is acceptable when they differ by 10 % or less.")
            .param("before", "flow or mean velocity from the traverse before the run")
            .param("after", "the same quantity from the traverse after the run")
            .example("print(method1a_steady_flow(0.412.m3_s, 0.437.m3_s));")
            .source("US EPA Method 1A §11.1.2 (10 % criterion from memory, unverified)"),
        |a: Dynamic, b: Dynamic| -> Res<MethodCheck> {
            let qa = a.clone().try_cast::<Q>();
            let qb = b.clone().try_cast::<Q>();
            let (x, y) = match (qa, qb) {
                (Some(x), Some(y)) if x.q.dimension == y.q.dimension => (x.q.si, y.q.si),
                (Some(_), Some(_)) => return Err(rt("method1a_steady_flow: before and after must be the same kind of quantity (both flows or both velocities)")),
                _ => (number(&a, "before")?, number(&b, "after")?),
            };
            lib(site_checks::method1a_steady_flow(x, y))
        },
    );
    r.func(
        "gauge_sensitivity",
        &Doc::new("gauge_sensitivity(dp) -> Array", "Method 2 checks of whether a more sensitive gauge is needed: the sensitivity factor T = Σ√(Δp + K)/Σ√Δp (K = 0.127 mm H₂O) against 1.05, the mean Δp and the count of readings below 1.3 mm H₂O.")
            .param("dp", "velocity heads of one traverse (pressures: array or column)")
            .example("for c in gauge_sensitivity([1.2.mmH2O, 2.4.mmH2O, 3.1.mmH2O, 0.9.mmH2O]) { print(c); }")
            .source("US EPA Method 2 nomenclature (T, K = 0.127 mm H₂O, read in the text); §6.2.1 limits from memory, unverified"),
        |dp: Dynamic| -> Res<Array> {
            let c = lib(site_checks::gauge_sensitivity(&heads_mm(&dp, "dp")?, MethodUnits::Metric))?;
            Ok(c.into_iter().map(Dynamic::from).collect())
        },
    );
    r.func(
        "method2h_default_factor",
        &Doc::new("method2h_default_factor(construction, diameter) -> f64", "The Method 2H default wall adjustment factor: 0.9900 for brick-and-mortar stacks, 0.9950 for all others; refused for stacks under 1.0 m.")
            .param("construction", "\"brick and mortar\" or \"other\"")
            .param("diameter", "inside diameter of the circular stack")
            .example("print(method2h_default_factor(\"other\", 1.8.m));")
            .source("US EPA Method 2H §1.2, §2.2.2 (40 CFR 60 App. A-2; read in the published text)"),
        |c: &str, d: Dynamic| -> Res<f64> {
            let k = lib(Construction::parse(c))?;
            Ok(lib(site_checks::default_wall_factor(k, Some(length(&d, "diameter")?.si()), site_checks::Averaging::EqualAreaMean))?.0)
        },
    );
}

/// The inputs of one run from a spec map and, per run, a row of a runs table.
struct RunInputs<'a> {
    spec: &'a Map,
    row: Option<(&'a Tbl, usize)>,
    run: Option<&'a str>,
}

impl RunInputs<'_> {
    /// A per-run value: the runs table's column named by `columns.<key>` (or `<key>`), else
    /// the spec's constant.
    fn get(&self, key: &str) -> Res<Option<Dynamic>> {
        if let Some((t, i)) = self.row {
            let name = field(self.spec, "run_columns")
                .and_then(|c| c.read_lock::<Map>().and_then(|m| field(&m, key).map(|v| v.to_string())))
                .unwrap_or_else(|| key.to_string());
            if t.df.get_column_names().iter().any(|c| c.as_str() == name) {
                let c = t.column(&name)?;
                let v = c.si[i];
                if !v.is_finite() {
                    return Err(rt(format!("runs table: column '{name}', row {}: missing value", i + 1)));
                }
                if c.dimension == D::NONE {
                    return Ok(Some(Dynamic::from(v)));
                }
                let mut q = Q::si(v, c.dimension);
                q.q.absolute_temperature = c.absolute_temperature;
                return Ok(Some(Dynamic::from(q)));
            }
        }
        // A map keyed by run name gives each run its own value.
        Ok(field(self.spec, key).map(|v| match (v.read_lock::<Map>(), self.run) {
            (Some(m), Some(run)) if m.contains_key(run) => m.get(run).cloned().unwrap_or(Dynamic::UNIT),
            _ => v.clone(),
        }))
    }
    fn need(&self, key: &str, run: &str) -> Res<Dynamic> {
        self.get(key)?.ok_or_else(|| {
            rt(format!("run {run}: '{key}' is missing: give it in the spec or as a column of the runs table"))
        })
    }
}

const RUN_KEYS: &[&str] = &[
    "run",
    "dp",
    "stack_temperature",
    "barometric",
    "static_pressure",
    "co2",
    "o2",
    "n2_co",
    "dry_molar_mass",
    "dry_molar_mass_source",
    "moisture",
    "moisture_source",
    "probe",
    "calibration",
    "max_age_days",
    "diameter",
    "area",
    "wall",
    "yaw",
    "report",
    "runs",
    "run_columns",
    "columns",
];

/// One run from its inputs; `dp`, `stack_temperature` and `yaw` come as given.
fn stack_run(inp: &RunInputs, run: &str, dp: Vec<f64>, ts: Vec<f64>, yaw: Vec<f64>) -> Res<StackRun> {
    let s = inp.spec;
    let gas = match inp.get("dry_molar_mass")? {
        Some(md) => GasInput::DryMolecularWeight {
            md: si_of(&md, D::MOLAR_MASS, "dry_molar_mass")
                .or_else(|_| number(&md, "dry_molar_mass").map(|v| v / 1000.0))?
                * 1000.0,
            source: inp.get("dry_molar_mass_source")?.map(|d| d.to_string()).unwrap_or_else(|| "given".into()),
        },
        None => GasInput::Analysis {
            co2_pct: number(&inp.need("co2", run)?, "co2")?,
            o2_pct: number(&inp.need("o2", run)?, "o2")?,
            n2_co_pct: number(&inp.need("n2_co", run)?, "n2_co")?,
        },
    };
    let moisture = match inp.need("moisture", run)? {
        m if m.is::<MoistureResult>() => MoistureInput::Train(m.cast::<MoistureResult>().train, None),
        m if m.is_map() => {
            let (train, _, leak) = train_of(&m.cast::<Map>())?;
            MoistureInput::Train(train, leak)
        }
        m if m.is_string() && m.to_string() == "method4" => {
            // The stack state comes from the run itself (the sheet checks saturation).
            let mut train = Map::new();
            for k in MOISTURE_KEYS.iter().filter(|k| !k.starts_with("stack_")) {
                if let Some(v) = inp.get(k)? {
                    train.insert((*k).into(), v);
                }
            }
            let (t, _, leak) =
                train_of(&train).map_err(|e| rt(format!("run {run}: Method 4 train from the runs table: {e}")))?;
            MoistureInput::Train(t, leak)
        }
        m => MoistureInput::Given {
            bws: number(&m, "moisture")?,
            source: inp.get("moisture_source")?.map(|d| d.to_string()).unwrap_or_else(|| "given".into()),
        },
    };
    let coefficient = if let Some(c) = field(s, "calibration") {
        let c: Calibration = c
            .clone()
            .try_cast()
            .ok_or_else(|| rt("calibration must be an SCalibration (s_type_calibration or load_calibration)"))?;
        let age = field(s, "max_age_days").map(|d| count(d, "max_age_days")).transpose()?.map(|d| d as i64);
        Coefficient::Calibration { record: Box::new(c.record), max_age_days: age, today_days: today_days() }
    } else if let Some(p) = field(s, "probe") {
        let p: Probe = p.clone().try_cast().ok_or_else(|| rt("probe must be a Probe (e.g. s_type(0.84))"))?;
        if p.kind != ProbeKind::SType {
            return Err(rt(format!("Method 2 uses an S-type probe; got a {}", p.kind)));
        }
        Coefficient::Given {
            cp: p.coefficient,
            source: p.coefficient_source.clone().unwrap_or_else(|| "given (no calibration record)".into()),
        }
    } else {
        return Err(rt(format!("run {run}: give calibration (an SCalibration) or probe (s_type(C_p))")));
    };
    let (area, diameter) = section_of(s, "method2_run")?;
    let wall = field(s, "wall").map(|w| text(w, "wall").and_then(|w| lib(Construction::parse(&w)))).transpose()?;
    let report = match field(s, "report").map(|d| text(d, "report")).transpose()?.as_deref() {
        None | Some("method") => Route::Method,
        Some("physics") => Route::Physics,
        Some(o) => return Err(rt(format!("report: \"method\" or \"physics\", got \"{o}\""))),
    };
    Ok(StackRun {
        run: run.into(),
        dp_mm_h2o: dp,
        ts_c: ts,
        p_bar_mm_hg: mm_hg(&inp.need("barometric", run)?, "barometric")?,
        p_g_mm_h2o: mm_h2o(&inp.need("static_pressure", run)?, "static_pressure")?,
        gas,
        moisture,
        coefficient,
        area_m2: area,
        diameter_m: diameter,
        wall,
        yaw_deg: yaw,
        report,
    })
}

fn runs(r: &mut Registrar<'_>) {
    r.func(
        "method2_run",
        &Doc::new("method2_run(spec) -> RunSheet", "Reduces one stack run by US EPA Methods 2, 3 and 4 in the methods' own equations and constants (P_s, M_d, M_s, B_ws, (√Δp)avg, T_s, v_s, Q_s, Q_sd at 20 °C and 760 mmHg) beside the physics route (per-point density and velocity), with every check and its numbers, warnings and the cautions. Keys: run, dp (velocity heads), stack_temperature (one or per point), barometric, static_pressure (gauge), co2/o2/n2_co (%, dry) or dry_molar_mass, moisture (B_ws, a Moisture, or a Method 4 train map), calibration (SCalibration, with max_age_days) or probe (s_type(C_p)), diameter or area, wall (\"brick and mortar\" / \"other\" for a Method 2H default factor), yaw (null angles for the cyclonic check), report (\"method\" or \"physics\").")
            .example("let sheet = method2_run(#{run: \"R1\", dp: [10.mmH2O, 12.mmH2O, 14.mmH2O, 15.mmH2O, 13.mmH2O, 11.mmH2O], stack_temperature: 150.degC, barometric: 760.mmHg, static_pressure: -25.mmH2O, co2: 12, o2: 6, n2_co: 82, moisture: 0.10, probe: s_type(0.84), diameter: 1.5.m});\nprint(sheet);\nprint(sheet.reported_flow);")
            .source("US EPA Methods 1, 2, 2H, 3, 4 (40 CFR 60 App. A); equation numbers from memory"),
        |s: Map| -> Res<Sheets> {
            check_keys(&s, RUN_KEYS, "method2_run")?;
            let run = field(&s, "run").map(|d| d.to_string()).unwrap_or_else(|| "1".into());
            let inp = RunInputs { spec: &s, row: None, run: Some(run.as_str()) };
            let dp = heads_mm(&inp.need("dp", &run)?, "dp")?;
            let ts = temps_c(&inp.need("stack_temperature", &run)?, "stack_temperature")?;
            let yaw = field(&s, "yaw").map(|y| degrees(y, "yaw")).transpose()?.unwrap_or_default();
            let sr = stack_run(&inp, &run, dp, ts, yaw)?;
            Ok(Sheets(vec![lib(run_sheet::run_sheet(&sr))?]))
        },
    );
    r.func(
        "method2_runs",
        &Doc::new("method2_runs(points, spec) -> RunSheet", "Reduces every run of a points table (one row per traverse point) by the methods' equations, one sheet per run. spec.columns names the points table's columns: run, dp, stack_temperature and optionally yaw. Per-run inputs (barometric, static_pressure, co2, o2, n2_co, moisture, dry_molar_mass) come from spec.runs — a table with one row per run and a column named like the key (or as spec.run_columns maps it) — or else from a constant in the spec.")
            .example("let pts = table_from(#{run: [\"R1\", \"R1\", \"R1\", \"R2\", \"R2\", \"R2\"], dp: [10.0, 12.0, 14.0, 11.0, 13.0, 12.0], ts: [150.0, 151.0, 149.0, 152.0, 150.0, 151.0]}).units(#{dp: \"mmH2O\", ts: \"degC\"});\nlet runs = table_from(#{run: [\"R1\", \"R2\"], barometric: [760.0, 755.0], moisture: [0.10, 0.11]}).units(#{barometric: \"mmHg\"});\nlet s = method2_runs(pts, #{columns: #{run: \"run\", dp: \"dp\", stack_temperature: \"ts\"}, runs: runs, static_pressure: -25.mmH2O, co2: 12, o2: 6, n2_co: 82, probe: s_type(0.84), diameter: 1.5.m});\nprint(s.table());")
            .source("US EPA Methods 1, 2, 2H, 3, 4 (40 CFR 60 App. A)"),
        |t: Tbl, s: Map| -> Res<Sheets> { runs_of(&t, &s) },
    );
    r.engine.register_fn("to_string", |s: &mut Sheets| run_sheet::to_text(&s.0));
    r.method(
        "RunSheet",
        "table",
        &Doc::new("sheet.table() -> Table", "The sheets as one long table for the record: run, group, symbol, quantity, value, unit, verdict (checks), source; write it with .write(\"runs.csv\" | \".parquet\" | \".xlsx\").")
            .example("let sheet = method2_run(#{dp: [10.mmH2O, 12.mmH2O, 14.mmH2O], stack_temperature: 150.degC, barometric: 760.mmHg, static_pressure: 0.Pa, co2: 12, o2: 6, n2_co: 82, moisture: 0.10, probe: s_type(0.84), diameter: 1.5.m});\nprint(sheet.table());")
            .source("Stagna run-sheet table"),
        |s: &mut Sheets| -> Res<Tbl> { Ok(Tbl::new(lib(run_sheet::to_frame(&s.0))?)) },
    );
    r.property(
        "RunSheet",
        "passed",
        &Doc::new("sheet.passed -> bool", "Whether every check of every run passed.")
            .example("let sheet = method2_run(#{dp: [10.mmH2O, 12.mmH2O, 14.mmH2O], stack_temperature: 150.degC, barometric: 760.mmHg, static_pressure: 0.Pa, co2: 12, o2: 6, n2_co: 82, moisture: 0.10, probe: s_type(0.84), diameter: 1.5.m});\nprint(sheet.passed);")
            .source("the checks listed on the sheet"),
        |s: &mut Sheets| s.0.iter().all(RunSheet::passed),
    );
    r.property(
        "RunSheet",
        "reported_flow",
        &Doc::new("sheet.reported_flow -> Quantity | Array", "The reported dry flow at 20 °C and 760 mmHg (101.325 kPa) of the run (an array for several runs), in m³/h.")
            .example("let sheet = method2_run(#{dp: [10.mmH2O, 12.mmH2O, 14.mmH2O], stack_temperature: 150.degC, barometric: 760.mmHg, static_pressure: 0.Pa, co2: 12, o2: 6, n2_co: 82, moisture: 0.10, probe: s_type(0.84), diameter: 1.5.m});\nprint(sheet.reported_flow);")
            .source("US EPA Method 2, eq. 2-10 (number from memory), or the physics route"),
        |s: &mut Sheets| -> Dynamic {
            let q: Vec<Dynamic> = s
                .0
                .iter()
                .map(|sh| {
                    let v = sh.lines.iter().find(|l| l.group == "reported" && l.symbol == "Q_sd").map_or(f64::NAN, |l| l.value);
                    Q::with_unit(v, "m3/h").map(Dynamic::from).unwrap_or(Dynamic::UNIT)
                })
                .collect();
            if q.len() == 1 { q[0].clone() } else { Dynamic::from(q) }
        },
    );
}

/// Every run of a points table.
fn runs_of(t: &Tbl, s: &Map) -> Res<Sheets> {
    check_keys(s, RUN_KEYS, "method2_runs")?;
    let cols: Map = field(s, "columns")
        .and_then(|c| c.clone().try_cast())
        .ok_or_else(|| rt("method2_runs: spec.columns (a map: run, dp, stack_temperature, yaw) is missing"))?;
    check_keys(&cols, &["run", "dp", "stack_temperature", "yaw"], "method2_runs columns")?;
    let name = |k: &str| -> Res<Option<String>> { field(&cols, k).map(|d| text(d, k)).transpose() };
    let run_col = name("run")?.ok_or_else(|| rt("method2_runs: columns.run is missing"))?;
    let runs = lib(stagna::io::table::text_column(&t.df, &run_col))?;
    let dp = t.column(&name("dp")?.ok_or_else(|| rt("method2_runs: columns.dp is missing"))?)?;
    let dp_mm = heads_mm(&Dynamic::from(dp), "dp")?;
    let ts =
        t.column(&name("stack_temperature")?.ok_or_else(|| rt("method2_runs: columns.stack_temperature is missing"))?)?;
    let ts_c = temps_c(&Dynamic::from(ts), "stack_temperature")?;
    let yaw = name("yaw")?.map(|c| t.column(&c).and_then(|c| degrees_of_column(&c))).transpose()?;
    let runs_tbl: Option<Tbl> = field(s, "runs")
        .map(|d| d.clone().try_cast().ok_or_else(|| rt("method2_runs: runs must be a table")))
        .transpose()?;
    let run_names_tbl = runs_tbl.as_ref().map(|r| lib(stagna::io::table::text_column(&r.df, "run"))).transpose()?;
    let mut order: Vec<String> = Vec::new();
    for r in &runs {
        if !order.contains(r) {
            order.push(r.clone());
        }
    }
    let mut sheets = Vec::new();
    for run in &order {
        let idx: Vec<usize> = (0..runs.len()).filter(|&i| &runs[i] == run).collect();
        let row = match (&runs_tbl, &run_names_tbl) {
            (Some(rt_), Some(names)) => match names.iter().position(|n| n == run) {
                Some(i) => Some((rt_, i)),
                None => {
                    return Err(rt(format!(
                        "runs table has no row for run {run} (its 'run' column lists {})",
                        names.join(", ")
                    )));
                }
            },
            _ => None,
        };
        let inp = RunInputs { spec: s, row, run: Some(run.as_str()) };
        let y = yaw.as_ref().map(|c| idx.iter().map(|&i| c[i]).collect()).unwrap_or_default();
        let sr =
            stack_run(&inp, run, idx.iter().map(|&i| dp_mm[i]).collect(), idx.iter().map(|&i| ts_c[i]).collect(), y)?;
        sheets.push(lib(run_sheet::run_sheet(&sr)).map_err(|e| rt(format!("run {run}: {e}")))?);
    }
    Ok(Sheets(sheets))
}

/// A Method 2F or 2G traverse as scripts see it: per-point results, flows, checks.
#[derive(Debug, Clone)]
pub struct Directional {
    /// The traverse.
    pub t: DirectionalTraverse,
    /// Absolute stack pressure, mmHg.
    pub p_s: f64,
    /// Wet molecular weight, g/g-mol.
    pub m_s: f64,
    /// Moisture.
    pub bws: f64,
    /// Section area, m².
    pub area: f64,
}

fn directional_text(d: &Directional) -> String {
    let t = &d.t;
    let (q_sw, q_sd) = t.flows(d.area, d.p_s, d.bws).unwrap_or((f64::NAN, f64::NAN));
    let mut s = format!(
        "{} traverse, {} points: v_a(avg) = {:.2} m/s (P_s {:.1} mmHg, M_s {:.2} g/g-mol, T_s(avg) {:.1} K); Q_sw = {} m³/h, Q_sd = {} dscm/h at 20 °C, 760 mmHg (B_ws {:.4})",
        t.method,
        t.axial_velocity.len(),
        t.mean_axial_velocity,
        d.p_s,
        d.m_s,
        t.ts_avg_k,
        format_number((q_sw / 10.0).round() * 10.0),
        format_number((q_sd / 10.0).round() * 10.0),
        d.bws
    );
    for c in &t.checks {
        s.push_str(&format!("\n  {c}"));
    }
    s.push_str("\n  note: velocity equations of Methods 2F/2G as recalled (F2 under the root; cos θ_y, cos θ_p), not yet read in the published text.");
    s.push_str(&format!("\nCaution: {}", run_sheet::CAUTIONS));
    s
}

/// P_s (mmHg), M_s and B_ws from a spec (barometric, static_pressure, co2/o2/n2_co or
/// dry_molar_mass, moisture as a fraction or a Moisture).
fn gas_of(s: &Map) -> Res<(f64, f64, f64)> {
    let need = |k: &str| field(s, k).ok_or_else(|| rt(format!("'{k}' is missing")));
    let p_s = lib(epa::stack_pressure(
        mm_hg(need("barometric")?, "barometric")?,
        mm_h2o(need("static_pressure")?, "static_pressure")?,
    ))?;
    let md = match field(s, "dry_molar_mass") {
        Some(m) => si_of(m, D::MOLAR_MASS, "dry_molar_mass")? * 1000.0,
        None => lib(epa::dry_molecular_weight(
            number(need("co2")?, "co2")?,
            number(need("o2")?, "o2")?,
            number(need("n2_co")?, "n2_co")?,
        ))?,
    };
    let m = need("moisture")?;
    let bws = match m.clone().try_cast::<MoistureResult>() {
        Some(r) => r.bws,
        None => number(m, "moisture")?,
    };
    if !(0.0..1.0).contains(&bws) {
        return Err(rt(format!("moisture B_ws must be in [0, 1), got {}", format_number(bws))));
    }
    Ok((p_s, lib(epa::wet_molecular_weight(md, bws))?, bws))
}

/// Numbers from an array or a column (a column's SI values; angles through `degrees`).
fn numbers(d: &Dynamic, what: &str) -> Res<Vec<f64>> {
    if let Some(c) = d.clone().try_cast::<Col>() {
        return Ok(c.si.to_vec());
    }
    let a: Array = d
        .clone()
        .try_cast()
        .ok_or_else(|| rt(format!("{what}: expected an array or a column, got {}", describe(d))))?;
    a.iter().map(|x| number(x, what)).collect()
}

fn directional_traverse(probe: DirectionalProbe, t: &Tbl, s: &Map, what: &str) -> Res<Directional> {
    check_keys(
        s,
        &[
            "columns",
            "rado",
            "barometric",
            "static_pressure",
            "co2",
            "o2",
            "n2_co",
            "dry_molar_mass",
            "moisture",
            "diameter",
            "area",
        ],
        what,
    )?;
    let cols: Map = field(s, "columns")
        .and_then(|c| c.clone().try_cast())
        .ok_or_else(|| rt(format!("{what}: spec.columns (yaw, dp, pitch_dp, stack_temperature) is missing")))?;
    check_keys(&cols, &["yaw", "dp", "pitch_dp", "stack_temperature"], &format!("{what} columns"))?;
    let col = |k: &str| -> Res<Col> {
        let name = field(&cols, k)
            .map(|d| text(d, k))
            .transpose()?
            .ok_or_else(|| rt(format!("{what}: columns.{k} is missing")))?;
        t.column(&name)
    };
    let yaw = degrees_of_column(&col("yaw")?)?;
    let dp = heads_mm(&Dynamic::from(col("dp")?), "dp")?;
    let pitch_dp = match (&probe, field(&cols, "pitch_dp")) {
        (DirectionalProbe::ThreeD(_), Some(_)) => Some(heads_mm(&Dynamic::from(col("pitch_dp")?), "pitch_dp")?),
        (DirectionalProbe::ThreeD(_), None) => {
            return Err(rt(format!("{what}: a 3-D probe needs columns.pitch_dp (P4 − P5)")));
        }
        _ => None,
    };
    let ts = temps_c(&Dynamic::from(col("stack_temperature")?), "stack_temperature")?;
    let points: Vec<DirectionalPoint> = (0..dp.len())
        .map(|i| DirectionalPoint {
            yaw_reading_deg: yaw[i],
            dp_mm_h2o: dp[i],
            pitch_dp_mm_h2o: pitch_dp.as_ref().map(|p| p[i]),
            ts_c: ts[i],
        })
        .collect();
    let (p_s, m_s, bws) = gas_of(s).map_err(|e| rt(format!("{what}: {e}")))?;
    let rado = field(s, "rado").map(|d| number(d, "rado")).transpose()?.unwrap_or(0.0);
    let area = section_of(s, what)?.0;
    let tr = lib(directional::axial_velocities(&probe, &points, rado, p_s, m_s))?;
    Ok(Directional { t: tr, p_s, m_s, bws, area })
}

/// A 3-D probe's calibration curves with their record.
#[derive(Debug, Clone)]
pub struct Curves {
    /// The curves.
    pub curves: PitchCurves,
    /// The record (what is saved).
    pub record: PitchCurvesRecord,
}

fn directional_probes(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.engine
        .register_type_with_name::<Curves>("PitchCurves")
        .register_type_with_name::<Directional>("DirectionalTraverse")
        .register_type_with_name::<CalculatedWallFactor>("WallFactor");
    r.func(
        "pitch_curves",
        &Doc::new("pitch_curves(pitch_deg, f1, f2, record) -> PitchCurves", "A 3-D probe's calibration curves (Method 2F): the pitch ratio F1 and the velocity coefficient F2 at each calibrated pitch angle (degrees, increasing; F1 must rise or fall steadily). The record map names the probe and date (#{probe_id, date: \"YYYY-MM-DD\", performed_by, note}); save it with .save(path).")
            .example("let c = pitch_curves([-10, 0, 10], [0.40, 0.0, -0.38], [1.02, 1.00, 1.03], #{probe_id: \"3D-11\", date: \"2026-08-30\"});\nprint(c);")
            .source("US EPA Method 2F nomenclature (F1, F2; read in the text); Stagna record format stagna-3d-probe-calibration, version 1"),
        |p: Dynamic, f1: Dynamic, f2: Dynamic, info: Map| -> Res<Curves> {
            check_keys(&info, &["probe_id", "date", "performed_by", "note"], "pitch_curves record")?;
            let curves = lib(PitchCurves::new(numbers(&p, "pitch_deg")?, numbers(&f1, "f1")?, numbers(&f2, "f2")?))?;
            let get = |k: &str| -> Res<String> { field(&info, k).map(|d| text(d, k)).transpose().map(Option::unwrap_or_default) };
            let mut record = lib(PitchCurvesRecord::new(&get("probe_id")?, &get("date")?, &curves))?;
            record.performed_by = get("performed_by")?;
            record.note = get("note")?;
            Ok(Curves { curves, record })
        },
    );
    r.engine.register_fn("to_string", |c: &mut Curves| {
        let p = &c.curves.pitch_deg;
        format!(
            "3-D probe {} calibration of {}: {} pitch angles from {}° to {}°",
            c.record.probe_id,
            c.record.date,
            p.len(),
            p[0],
            p[p.len() - 1]
        )
    });
    let pp = prefs.clone();
    r.method(
        "PitchCurves",
        "save",
        &Doc::new("curves.save(path)", "Saves the 3-D probe's calibration curves as a TOML record (Stagna's own versioned format, `docs/records.md`) through a temporary file and a rename.")
            .example("let c = pitch_curves([-10, 0, 10], [0.40, 0.0, -0.38], [1.02, 1.00, 1.03], #{probe_id: \"3D-11\", date: \"2026-08-30\"});\nc.save(\"3d-11-example.toml\");")
            .source("Stagna record format stagna-3d-probe-calibration, version 1"),
        move |c: &mut Curves, path: &str| -> Res<()> { write_record(&pp, path, &lib(c.record.to_toml())?) },
    );
    let pl = prefs.clone();
    r.func(
        "load_pitch_curves",
        &Doc::new("load_pitch_curves(path) -> PitchCurves", "Reads a 3-D probe's calibration curves (TOML record); unknown keys, wrong types, a bad date, curves that do not rise or fall steadily, or a record from a newer Stagna are refused with the file, line and key.")
            .example("let c = pitch_curves([-10, 0, 10], [0.40, 0.0, -0.38], [1.02, 1.00, 1.03], #{probe_id: \"3D-11\", date: \"2026-08-30\"});\nc.save(\"3d-11-load-example.toml\");\nprint(load_pitch_curves(\"3d-11-load-example.toml\"));")
            .source("Stagna record format stagna-3d-probe-calibration, version 1"),
        move |path: &str| -> Res<Curves> {
            let text = read_record(&pl, path)?;
            let record = lib(PitchCurvesRecord::from_toml(&text, path))?;
            Ok(Curves { curves: lib(record.curves())?, record })
        },
    );
    let spec_doc = "Keys: columns #{yaw (null reading, deg), dp (velocity head), pitch_dp (P4 − P5, 3-D only), stack_temperature}, rado (rotational offset of the angle device, deg), barometric, static_pressure, co2/o2/n2_co or dry_molar_mass, moisture (B_ws or a Moisture), diameter or area.";
    r.func(
        "method2f_traverse",
        &Doc::new("method2f_traverse(curves, points, spec) -> DirectionalTraverse", &format!("Axial velocities of a traverse with a 3-D probe by US EPA Method 2F: the yaw from nulling (less the device offset), the pitch from the pitch ratio on the probe's curves, F2 at that pitch, v_a per point, their average and the wet and dry flows at 20 °C, 760 mmHg, with the method's checks. {spec_doc}"))
            .example("let c = pitch_curves([-10, 0, 10], [0.40, 0.0, -0.38], [1.02, 1.00, 1.03], #{probe_id: \"3D-11\", date: \"2026-08-30\"});\nlet t = table_from(#{yaw: [4.0, -3.0, 6.0], dp: [10.0, 12.0, 11.0], pdp: [1.0, -0.5, 0.2], ts: [150.0, 151.0, 150.0]}).units(#{dp: \"mmH2O\", pdp: \"mmH2O\", ts: \"degC\"});\nprint(method2f_traverse(c, t, #{columns: #{yaw: \"yaw\", dp: \"dp\", pitch_dp: \"pdp\", stack_temperature: \"ts\"}, barometric: 760.mmHg, static_pressure: -25.mmH2O, co2: 12, o2: 6, n2_co: 82, moisture: 0.1, diameter: 1.5.m}));")
            .source("US EPA Method 2F (40 CFR 60 App. A-1): §1.1 and nomenclature read in the text; velocity equation form from memory"),
        |c: Curves, t: Tbl, s: Map| -> Res<Directional> { directional_traverse(DirectionalProbe::ThreeD(c.curves), &t, &s, "method2f_traverse") },
    );
    r.func(
        "method2g_traverse",
        &Doc::new("method2g_traverse(coefficient, points, spec) -> DirectionalTraverse", &format!("Near-axial velocities of a traverse with a 2-D probe (or a Type S probe) by US EPA Method 2G: v_a = K_p C_p √(Δp T_s/(P_s M_s)) cos θ_y per point, their average and flows. The coefficient is a number or an S-type calibration. {spec_doc}"))
            .example("let t = table_from(#{yaw: [4.0, -3.0, 6.0], dp: [10.0, 12.0, 11.0], ts: [150.0, 151.0, 150.0]}).units(#{dp: \"mmH2O\", ts: \"degC\"});\nprint(method2g_traverse(0.84, t, #{columns: #{yaw: \"yaw\", dp: \"dp\", stack_temperature: \"ts\"}, barometric: 760.mmHg, static_pressure: -25.mmH2O, co2: 12, o2: 6, n2_co: 82, moisture: 0.1, diameter: 1.5.m}));")
            .source("US EPA Method 2G (40 CFR 60 App. A-2): nomenclature read in the text; velocity equation form from memory"),
        |c: Dynamic, t: Tbl, s: Map| -> Res<Directional> {
            let cp = match c.clone().try_cast::<Calibration>() {
                Some(cal) => cal.cal.cp(),
                None => number(&c, "coefficient")?,
            };
            directional_traverse(DirectionalProbe::TwoD { cp }, &t, &s, "method2g_traverse")
        },
    );
    r.engine.register_fn("to_string", |d: &mut Directional| directional_text(d));
    r.method(
        "DirectionalTraverse",
        "table",
        &Doc::new("traverse.table() -> Table", "The per-point results: yaw (after the offset), pitch and F2 (3-D probes) and the axial velocity.")
            .example("let t = table_from(#{yaw: [4.0, -3.0], dp: [10.0, 12.0], ts: [150.0, 151.0]}).units(#{dp: \"mmH2O\", ts: \"degC\"});\nprint(method2g_traverse(0.84, t, #{columns: #{yaw: \"yaw\", dp: \"dp\", stack_temperature: \"ts\"}, barometric: 760.mmHg, static_pressure: 0.Pa, co2: 12, o2: 6, n2_co: 82, moisture: 0.1, diameter: 1.5.m}).table());")
            .source("US EPA Methods 2F/2G"),
        |d: &mut Directional| -> Res<Tbl> {
            use polars::prelude::{Column, DataFrame};
            let mut cols = vec![Column::new("yaw_deg".into(), d.t.yaw_deg.clone())];
            if !d.t.pitch_deg.is_empty() {
                cols.push(Column::new("pitch_deg".into(), d.t.pitch_deg.clone()));
                cols.push(Column::new("f2".into(), d.t.f2.clone()));
            }
            cols.push(Column::new("axial_velocity".into(), d.t.axial_velocity.clone()));
            let df = DataFrame::new_infer_height(cols).map_err(rt)?;
            let mut t = Tbl::new(df);
            t.units.insert("yaw_deg".into(), "deg".into());
            t.units.insert("axial_velocity".into(), "m/s".into());
            if !d.t.pitch_deg.is_empty() {
                t.units.insert("pitch_deg".into(), "deg".into());
            }
            Ok(t)
        },
    );
    r.property(
        "DirectionalTraverse",
        "mean_axial_velocity",
        &Doc::new("traverse.mean_axial_velocity -> Quantity", "The average axial velocity v_a(avg).")
            .example("let t = table_from(#{yaw: [4.0, -3.0], dp: [10.0, 12.0], ts: [150.0, 151.0]}).units(#{dp: \"mmH2O\", ts: \"degC\"});\nprint(method2g_traverse(0.84, t, #{columns: #{yaw: \"yaw\", dp: \"dp\", stack_temperature: \"ts\"}, barometric: 760.mmHg, static_pressure: 0.Pa, co2: 12, o2: 6, n2_co: 82, moisture: 0.1, diameter: 1.5.m}).mean_axial_velocity);")
            .source("US EPA Methods 2F/2G"),
        |d: &mut Directional| Q::with_unit(d.t.mean_axial_velocity, "m/s").map(Dynamic::from).unwrap_or(Dynamic::UNIT),
    );
    r.func(
        "method2h_calculated_factor",
        &Doc::new("method2h_calculated_factor(spec) -> WallFactor", "The calculated wall effects adjustment factor of US EPA Method 2H from velocities measured in from the wall. Keys: diameter, points_per_diameter (p ≥ 8), velocities and wall_distances (the Method 1 points: arrays or columns), sectors: [#{index (Method 1 point replaced, from 0), points: [[distance, velocity], ...], v_drem}], distances and velocities as quantities.")
            .example("let v = []; let y = [];\nfor i in 0..16 { v.push(10.0.m_s); y.push(if i == 0 { 64.mm } else { 500.mm }); }\nlet w = method2h_calculated_factor(#{diameter: 2.m, points_per_diameter: 8, velocities: v, wall_distances: y,\n    sectors: [#{index: 0, points: [[25.mm, 9.0.m_s], [50.mm, 9.6.m_s], [75.mm, 9.8.m_s], [100.mm, 9.9.m_s]], v_drem: 10.0.m_s}]});\nprint(w);")
            .source("US EPA Method 2H (40 CFR 60 App. A-2): §1.2, §2.2.1 and nomenclature read in the text; equations from memory"),
        |s: Map| -> Res<CalculatedWallFactor> { wall_factor_of(&s) },
    );
    r.engine.register_fn("to_string", |w: &mut CalculatedWallFactor| {
        let mut s = format!(
            "Method 2H calculated wall factor: WAF = {:.4} (V_AVG {:.3} m/s over v_avg {:.3} m/s; v_e {})",
            w.waf,
            w.v_avg_adjusted,
            w.v_avg,
            w.v_e.iter().map(|v| format!("{v:.3}")).collect::<Vec<_>>().join(", ")
        );
        for c in &w.checks {
            s.push_str(&format!("\n  {c}"));
        }
        for n in &w.notes {
            s.push_str(&format!("\n  note: {n}"));
        }
        s.push_str("\n  note: equations of Method 2H §12 as recalled (sub-sector means, d_rem halving the rest of the sector), not yet read in the published text.");
        s
    });
    r.property(
        "WallFactor",
        "waf",
        &Doc::new("wall_factor.waf -> f64", "The calculated factor WAF = V_AVG / v_avg.")
            .example("let v = []; let y = [];\nfor i in 0..16 { v.push(10.0.m_s); y.push(500.mm); }\nprint(method2h_calculated_factor(#{diameter: 2.m, points_per_diameter: 8, velocities: v, wall_distances: y, sectors: [#{index: 0, points: [[25.mm, 9.0.m_s]], v_drem: 10.0.m_s}]}).waf);")
            .source("US EPA Method 2H"),
        |w: &mut CalculatedWallFactor| w.waf,
    );
}

fn wall_factor_of(s: &Map) -> Res<CalculatedWallFactor> {
    check_keys(
        s,
        &["diameter", "points_per_diameter", "velocities", "wall_distances", "sectors"],
        "method2h_calculated_factor",
    )?;
    let need = |k: &str| field(s, k).ok_or_else(|| rt(format!("method2h_calculated_factor: '{k}' is missing")));
    let si_list = |d: &Dynamic, dim: D, what: &str| -> Res<Vec<f64>> {
        if let Some(c) = d.clone().try_cast::<Col>() {
            if c.dimension != dim {
                return Err(rt(format!("{what} must be a {} column", dim.name().unwrap_or("quantity"))));
            }
            return Ok(c.si.to_vec());
        }
        let a: Array = d.clone().try_cast().ok_or_else(|| rt(format!("{what}: expected an array or a column")))?;
        a.iter().map(|x| si_of(x, dim, what)).collect()
    };
    let v = si_list(need("velocities")?, D::VELOCITY, "velocities")?;
    let y = si_list(need("wall_distances")?, D::LENGTH, "wall_distances")?;
    let sectors: Array = need("sectors")?.clone().try_cast().ok_or_else(|| rt("sectors: expected an array of maps"))?;
    let mut out = Vec::new();
    for (k, sec) in sectors.iter().enumerate() {
        let m: Map = sec
            .clone()
            .try_cast()
            .ok_or_else(|| rt(format!("sector {}: expected a map #{{index, points, v_drem}}", k + 1)))?;
        check_keys(&m, &["index", "points", "v_drem"], "sector")?;
        let index =
            count(field(&m, "index").ok_or_else(|| rt(format!("sector {}: 'index' is missing", k + 1)))?, "index")?;
        let pts: Array = field(&m, "points")
            .and_then(|p| p.clone().try_cast())
            .ok_or_else(|| rt(format!("sector {}: 'points' must be [[distance, velocity], ...]", k + 1)))?;
        let points = pts
            .iter()
            .map(|p| {
                let pair: Array = p
                    .clone()
                    .try_cast()
                    .filter(|a: &Array| a.len() == 2)
                    .ok_or_else(|| rt(format!("sector {}: each point is [distance, velocity]", k + 1)))?;
                Ok((
                    si_of(&pair[0], D::LENGTH, "wall point distance")?,
                    si_of(&pair[1], D::VELOCITY, "wall point velocity")?,
                ))
            })
            .collect::<Res<Vec<_>>>()?;
        let v_drem = field(&m, "v_drem").map(|d| si_of(d, D::VELOCITY, "v_drem")).transpose()?;
        out.push(WallSector { method1_index: index, points, v_drem });
    }
    lib(wall_factor::calculated_wall_factor(
        length(need("diameter")?, "diameter")?.si(),
        count(need("points_per_diameter")?, "points_per_diameter")?,
        &v,
        &y,
        &out,
    ))
}
