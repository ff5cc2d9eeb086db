//! One stack-test run reduced by US EPA Methods 2, 3 and 4 in their own equations and
//! constants, beside Stagna's physics route, with every check and its numbers: the
//! sheet a tester signs.
//!
//! # Formula (method route, metric units of the methods)
//! - P_s = P_bar + P_g / 13.6 (mmHg; P_g read in mm H₂O);
//! - M_d = 0.440 %CO₂ + 0.320 %O₂ + 0.280 (%N₂ + %CO); M_s = M_d (1 − B_ws) + 18.0 B_ws;
//! - v_s = K_p C_p (√Δp)_avg √(T_s(avg) / (P_s M_s)), K_p = 34.97, T = t + 273;
//! - with a Method 2H factor: v_s,adj = WAF · v_s;
//! - Q_s = 3600 v_s A (actual, wet, m³/h); Q_sd = 3600 (1 − B_ws) v_s A (T_std P_s)/(T_s(avg) P_std),
//!   T_std = 293 K, P_std = 760 mmHg (dscm/h).
//!
//! # Formula (physics route)
//! ρ_i = P_s M_s / (R T_i) per point (R = 8.314 462 618 J/(mol·K), T = t + 273.15),
//! v_i = C_p √(2 Δp_i / ρ_i) with Δp in Pa (1 mm H₂O = 9.806 65 Pa), v̄ = mean of v_i;
//! Q_sd at 20 °C and 101.325 kPa (= 760 mmHg) from v̄ and the mean absolute temperature.
//! The two routes differ by the method's rounded constants and by averaging √Δp
//! before taking the velocity; the sheet prints the difference.
//!
//! # References
//! US EPA 40 CFR Part 60 Appendix A-1 (Methods 1, 2, 2H), A-2 (Method 3), A-3
//! (Method 4). Read in the published text: the symbols and constants of Methods 2, 3
//! and 4 (nomenclature: K_p 34.97, T_std 293 K, P_std 760 mmHg, 18.0, 0.440/0.320/0.280,
//! 13.6), Method 2 §1.2, Method 2H §1–2. Equation numbers (2-5, 2-7, 2-10, 3-1) are
//! cited from memory.

use std::fmt::Write as _;

use polars::prelude::*;

use super::calibration::CalibrationRecord;
use super::check::{Citation, MethodCheck};
use super::moisture::{LeakCheck, MoistureResult, MoistureTrain, StackConditions};
use super::site_checks::{Averaging, Construction, cyclonic_flow, default_wall_factor, gauge_sensitivity};
use super::{
    KP_METRIC, MethodUnits, PA_PER_MM_H2O, PA_PER_MM_HG, dry_molecular_weight, mean_sqrt_dp, stack_pressure,
    wet_molecular_weight,
};
use crate::error::{Error, Result, Warning, finite, positive, within};
use crate::units::constants::MOLAR_GAS_CONSTANT;

const CONTEXT: &str = "stack run";

/// The cautions printed with every stack result.
pub const CAUTIONS: &str = "Stack gas may be hot, toxic or oxygen-deficient and sampling ports are at height: \
work under the site's permit-to-work with gas monitoring, fall protection and the personal protective \
equipment it requires, never open a port under positive pressure without controls, and have results used \
for compliance reviewed under licensed practice and the local regulator's rules.";

/// The dry gas composition, or a dry molecular weight stated directly.
#[derive(Debug, Clone, PartialEq)]
pub enum GasInput {
    /// Orsat or analyser results, % by volume dry.
    Analysis {
        /// CO₂, %.
        co2_pct: f64,
        /// O₂, %.
        o2_pct: f64,
        /// N₂ + CO, %.
        n2_co_pct: f64,
    },
    /// M_d given (g/g-mol) with where it comes from.
    DryMolecularWeight {
        /// M_d, g/g-mol.
        md: f64,
        /// Its source, e.g. "Method 3 §1.3 assigned value 30.0 (approved)".
        source: String,
    },
}

/// The run's moisture.
#[derive(Debug, Clone, PartialEq)]
pub enum MoistureInput {
    /// B_ws stated with its source.
    Given {
        /// B_ws, fraction.
        bws: f64,
        /// Where it comes from.
        source: String,
    },
    /// A Method 4 train, reduced on the sheet, with an optional leak check.
    Train(MoistureTrain, Option<LeakCheck>),
}

/// Which route's velocity and flow the sheet reports.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Route {
    /// The methods' equations and constants.
    Method,
    /// Per-point density and velocity (Stagna's physics).
    Physics,
}

/// The probe coefficient and where it comes from.
#[derive(Debug, Clone, PartialEq)]
pub enum Coefficient {
    /// A number with its source.
    Given {
        /// C_p.
        cp: f64,
        /// Source text.
        source: String,
    },
    /// A calibration record, with the age limit (days) set for this test and today's
    /// date (days since 1970-01-01).
    Calibration {
        /// The record.
        record: Box<CalibrationRecord>,
        /// Age limit in days, if any.
        max_age_days: Option<i64>,
        /// Today, days since 1970-01-01.
        today_days: i64,
    },
}

/// Everything one run needs, in the methods' metric units.
#[derive(Debug, Clone, PartialEq)]
pub struct StackRun {
    /// Run name.
    pub run: String,
    /// Velocity head at each traverse point, mm H₂O.
    pub dp_mm_h2o: Vec<f64>,
    /// Stack temperature at each point (or one value for all), °C.
    pub ts_c: Vec<f64>,
    /// Barometric pressure, mmHg.
    pub p_bar_mm_hg: f64,
    /// Stack static pressure (gauge), mm H₂O.
    pub p_g_mm_h2o: f64,
    /// Gas composition.
    pub gas: GasInput,
    /// Moisture.
    pub moisture: MoistureInput,
    /// Probe coefficient.
    pub coefficient: Coefficient,
    /// Stack area, m².
    pub area_m2: f64,
    /// Stack diameter, m, for circular stacks.
    pub diameter_m: Option<f64>,
    /// Method 2H default wall factor by construction, if one is applied.
    pub wall: Option<Construction>,
    /// Null (yaw) angle at each point, degrees, if the cyclonic check was made.
    pub yaw_deg: Vec<f64>,
    /// Which route the sheet reports.
    pub report: Route,
}

/// The groups of a sheet, in printing order.
pub const GROUPS: [&str; 5] = ["input", "intermediate", "result (method)", "result (physics)", "reported"];

/// One line of the sheet.
#[derive(Debug, Clone, PartialEq)]
pub struct SheetLine {
    /// "input", "intermediate", "result (method)", "result (physics)", "reported".
    pub group: &'static str,
    /// Symbol as the methods write it.
    pub symbol: &'static str,
    /// What it is.
    pub quantity: String,
    /// Value.
    pub value: f64,
    /// Unit.
    pub unit: &'static str,
    /// Decimals printed.
    pub decimals: usize,
    /// Where the value or its equation comes from.
    pub source: String,
}

/// A reduced run.
#[derive(Debug, Clone, PartialEq)]
pub struct RunSheet {
    /// Run name.
    pub run: String,
    /// The lines, inputs first.
    pub lines: Vec<SheetLine>,
    /// Method checks with their numbers.
    pub checks: Vec<MethodCheck>,
    /// Warnings (calibration age or failure, saturation used, ...).
    pub warnings: Vec<Warning>,
    /// Notes on sources.
    pub notes: Vec<String>,
    /// The route reported.
    pub route: Route,
    /// The Method 4 reduction, when a train was given.
    pub moisture: Option<MoistureResult>,
}

impl RunSheet {
    /// The value of the first line with this symbol.
    pub fn value(&self, symbol: &str) -> Option<f64> {
        self.lines.iter().find(|l| l.symbol == symbol).map(|l| l.value)
    }

    /// Whether every check passed.
    pub fn passed(&self) -> bool {
        self.checks.iter().all(|c| c.pass)
    }
}

fn line(
    group: &'static str,
    symbol: &'static str,
    quantity: &str,
    value: f64,
    unit: &'static str,
    decimals: usize,
    source: impl Into<String>,
) -> SheetLine {
    SheetLine { group, symbol, quantity: quantity.into(), value, unit, decimals, source: source.into() }
}

/// Reduces one run.
pub fn run_sheet(r: &StackRun) -> Result<RunSheet> {
    let n = r.dp_mm_h2o.len();
    if n == 0 {
        return Err(Error::Inconsistent { context: CONTEXT, message: format!("run {}: no traverse points", r.run) });
    }
    if r.ts_c.len() != n && r.ts_c.len() != 1 {
        return Err(Error::Inconsistent {
            context: CONTEXT,
            message: format!(
                "run {}: {} stack temperatures for {n} points (give one per point, or one)",
                r.run,
                r.ts_c.len()
            ),
        });
    }
    for (i, &t) in r.ts_c.iter().enumerate() {
        finite(CONTEXT, "stack temperature", t).map_err(|e| e.at_row(i))?;
        if t + 273.0 <= 0.0 {
            return Err(Error::OutOfRange {
                context: CONTEXT,
                param: "stack temperature",
                value: t,
                unit: "°C",
                allowed: "above absolute zero".into(),
            }
            .at_row(i));
        }
    }
    positive(CONTEXT, "stack area", r.area_m2, "m²")?;
    let mut lines = Vec::new();
    let mut checks = Vec::new();
    let mut warnings = Vec::new();
    let mut notes = vec![
        "Equation numbers of Methods 2, 3 and 4 are unverified (recalled, not read in the published text); the constants and symbols were read in the methods' published nomenclature (40 CFR 60 App. A).".to_string(),
    ];

    // Probe coefficient.
    let (cp, cp_source) = match &r.coefficient {
        Coefficient::Given { cp, source } => (*cp, source.clone()),
        Coefficient::Calibration { record, max_age_days, today_days } => {
            let c = record.calibration()?;
            warnings.extend(record.warnings(*today_days, *max_age_days));
            checks.extend(c.checks.iter().cloned().map(|mut k| {
                k.name = format!("calibration {}: {}", record.probe_id, k.name);
                k
            }));
            (
                c.cp(),
                format!(
                    "S-type calibration {} of {} (mean of sides A {:.4} and B {:.4}; US EPA Method 2 §10.1)",
                    record.probe_id, record.date, c.cp_a, c.cp_b
                ),
            )
        }
    };
    within(CONTEXT, "pitot coefficient C_p", cp, "", 0.5, 1.2)?;

    lines.push(line("input", "n", "traverse points", n as f64, "", 0, "Method 1 layout"));
    lines.push(line("input", "C_p", "pitot coefficient", cp, "", 4, cp_source));
    lines.push(line(
        "input",
        "P_bar",
        "barometric pressure",
        positive(CONTEXT, "barometric pressure", r.p_bar_mm_hg, "mmHg")?,
        "mmHg",
        1,
        "measured",
    ));
    lines.push(line(
        "input",
        "P_g",
        "stack static pressure (gauge)",
        finite(CONTEXT, "stack static pressure", r.p_g_mm_h2o)?,
        "mm H₂O",
        1,
        "measured",
    ));
    lines.push(line("input", "A", "stack area", r.area_m2, "m²", 4, "measured dimensions"));

    // Gas.
    let md = match &r.gas {
        GasInput::Analysis { co2_pct, o2_pct, n2_co_pct } => {
            lines.push(line("input", "%CO₂", "carbon dioxide, dry", *co2_pct, "%", 1, "gas analysis (Method 3)"));
            lines.push(line("input", "%O₂", "oxygen, dry", *o2_pct, "%", 1, "gas analysis (Method 3)"));
            lines.push(line(
                "input",
                "%N₂+%CO",
                "nitrogen and carbon monoxide, dry",
                *n2_co_pct,
                "%",
                1,
                "gas analysis (Method 3)",
            ));
            let md = dry_molecular_weight(*co2_pct, *o2_pct, *n2_co_pct)?;
            lines.push(line(
                "intermediate",
                "M_d",
                "dry molecular weight",
                md,
                "g/g-mol",
                2,
                "US EPA Method 3, eq. 3-1",
            ));
            md
        }
        GasInput::DryMolecularWeight { md, source } => {
            positive(CONTEXT, "dry molecular weight", *md, "g/g-mol")?;
            lines.push(line("input", "M_d", "dry molecular weight", *md, "g/g-mol", 2, source.clone()));
            *md
        }
    };

    let p_s = stack_pressure(r.p_bar_mm_hg, r.p_g_mm_h2o)?;
    lines.push(line(
        "intermediate",
        "P_s",
        "absolute stack pressure, P_bar + P_g/13.6",
        p_s,
        "mmHg",
        1,
        "US EPA Method 2 (P_s = P_bar + P_g)",
    ));
    let t_mean_c = r.ts_c.iter().sum::<f64>() / r.ts_c.len() as f64;
    let ts_abs = t_mean_c + 273.0;
    lines.push(line(
        "intermediate",
        "T_s(avg)",
        "mean absolute stack temperature, t + 273",
        ts_abs,
        "K",
        1,
        "US EPA Method 2",
    ));

    // Moisture.
    let mut moisture = None;
    let bws = match &r.moisture {
        MoistureInput::Given { bws, source } => {
            let b = finite(CONTEXT, "moisture fraction B_ws", *bws)?;
            if !(0.0..1.0).contains(&b) {
                return Err(Error::OutOfRange {
                    context: CONTEXT,
                    param: "moisture fraction B_ws",
                    value: b,
                    unit: "",
                    allowed: "in [0, 1)".into(),
                });
            }
            lines.push(line("input", "B_ws", "water vapour, fraction by volume", b, "", 4, source.clone()));
            b
        }
        MoistureInput::Train(train, leak) => {
            if train.units != MethodUnits::Metric {
                return Err(Error::Inconsistent {
                    context: CONTEXT,
                    message: "the run sheet works in the methods' metric units; give the train in ml, g, m³, °C, mmHg"
                        .into(),
                });
            }
            let m =
                super::moisture::reduce(train, Some(StackConditions { temperature: t_mean_c, pressure: p_s }), *leak)?;
            lines.push(line(
                "input",
                "V_f − V_i",
                "impinger water gain",
                train.water_final_ml - train.water_initial_ml,
                "ml",
                1,
                "moisture train (Method 4)",
            ));
            lines.push(line(
                "input",
                "W_f − W_i",
                "silica gel gain",
                train.gel_final_g - train.gel_initial_g,
                "g",
                1,
                "moisture train (Method 4)",
            ));
            lines.push(line("input", "V_m", "dry gas meter volume", train.meter_volume, "m³", 4, "dry gas meter"));
            lines.push(line("input", "Y", "dry gas meter factor", train.meter_factor, "", 3, "meter calibration"));
            lines.push(line("input", "t_m", "mean meter temperature", train.meter_temperature, "°C", 1, "measured"));
            lines.push(line(
                "intermediate",
                "V_wc(std)",
                "condensed water vapour at 20 °C, 760 mmHg",
                m.vwc_std,
                "m³",
                5,
                "US EPA Method 4, eq. 4-1",
            ));
            lines.push(line(
                "intermediate",
                "V_wsg(std)",
                "water vapour in silica gel at 20 °C, 760 mmHg",
                m.vwsg_std,
                "m³",
                5,
                "US EPA Method 4, eq. 4-2",
            ));
            lines.push(line(
                "intermediate",
                "V_m(std)",
                "dry gas volume at 20 °C, 760 mmHg",
                m.vm_std,
                "dscm",
                4,
                "US EPA Method 4, eq. 4-3",
            ));
            lines.push(line(
                "intermediate",
                "B_ws(meas)",
                "measured moisture",
                m.bws_measured,
                "",
                4,
                "US EPA Method 4, eq. 4-4",
            ));
            match m.bws_saturated {
                Some(s) => lines.push(line("intermediate", "B_ws(sat)", "saturation moisture at T_s(avg), P_s", s, "", 4, "IAPWS-IF97 saturation pressure / P_s")),
                None => notes.push(format!(
                    "Saturation does not limit B_ws: the stack ({t_mean_c:.1} °C) is above the boiling point of water at P_s ({p_s:.1} mmHg)."
                )),
            }
            if m.saturation_used() {
                warnings.push(Warning::new("moisture-saturation", format!(
                    "run {}: measured B_ws {:.4} exceeds saturation {:.4} at the stack: the saturation value is reported (water droplets in the gas?)",
                    r.run, m.bws_measured, m.bws)));
            }
            lines.push(line(
                "intermediate",
                "B_ws",
                "moisture used (lower of measured and saturated)",
                m.bws,
                "",
                4,
                "US EPA Method 4 (lower of the two; unverified, recalled)",
            ));
            checks.extend(m.checks.iter().cloned());
            let b = m.bws;
            moisture = Some(m);
            b
        }
    };
    let ms = wet_molecular_weight(md, bws)?;
    lines.push(line(
        "intermediate",
        "M_s",
        "wet molecular weight, M_d(1 − B_ws) + 18.0 B_ws",
        ms,
        "g/g-mol",
        2,
        "US EPA Method 2, eq. 2-5",
    ));
    let s = mean_sqrt_dp(&r.dp_mm_h2o)?;
    lines.push(line(
        "intermediate",
        "(√Δp)avg",
        "mean of the square roots of the velocity heads",
        s,
        "(mm H₂O)^½",
        4,
        "US EPA Method 2 (√Δp averaged over the points)",
    ));

    // Method route.
    let v_method = KP_METRIC * cp * s * (ts_abs / (p_s * ms)).sqrt();
    lines.push(line(
        "result (method)",
        "v_s",
        "mean stack gas velocity",
        v_method,
        "m/s",
        2,
        "US EPA Method 2, eq. 2-7 (K_p = 34.97)",
    ));
    // Physics route.
    let rho_k = p_s * PA_PER_MM_HG * ms / 1000.0 / MOLAR_GAS_CONSTANT;
    let mut v_sum = 0.0;
    let mut t_k_sum = 0.0;
    for i in 0..n {
        let t_k = r.ts_c[if r.ts_c.len() == 1 { 0 } else { i }] + 273.15;
        t_k_sum += t_k;
        v_sum += cp * (2.0 * r.dp_mm_h2o[i] * PA_PER_MM_H2O * t_k / rho_k).sqrt();
    }
    let v_physics = v_sum / n as f64;
    let t_k_mean = t_k_sum / n as f64;
    lines.push(line(
        "result (physics)",
        "v̄",
        "mean of point velocities, per-point ideal-gas density",
        v_physics,
        "m/s",
        2,
        "v = C_p √(2Δp/ρ), ρ = P_s M_s/(R T); ISO 3966:2008 §7 form",
    ));
    lines.push(line(
        "result (physics)",
        "Δv",
        "physics route against the method's equation",
        100.0 * (v_physics / v_method - 1.0),
        "%",
        2,
        "difference of the two routes",
    ));

    // Wall factor.
    let mut waf = 1.0;
    if let Some(c) = r.wall {
        let (w, k) = default_wall_factor(c, r.diameter_m, Averaging::EqualAreaMean)?;
        waf = w;
        checks.extend(k);
        lines.push(line(
            "input",
            "WAF",
            "wall effects adjustment factor (default)",
            w,
            "",
            4,
            match c {
                Construction::BrickAndMortar => "US EPA Method 2H §2.2.2, brick-and-mortar default",
                Construction::Other => "US EPA Method 2H §2.2.2, default for other stacks",
            },
        ));
    }

    let area = r.area_m2;
    let flows = |v: f64| {
        let q_s = 3600.0 * waf * v * area;
        (q_s, q_s * (1.0 - bws))
    };
    let qs_m = flows(v_method).0;
    let qsd_m = 3600.0 * (1.0 - bws) * waf * v_method * area * (293.0 * p_s) / (ts_abs * 760.0);
    let (qs_p, qw_p) = flows(v_physics);
    let qsd_p = qw_p * (p_s * PA_PER_MM_HG / 101_325.0) * (293.15 / t_k_mean);
    if waf != 1.0 {
        lines.push(line(
            "result (method)",
            "v_s,adj",
            "velocity with the wall factor, WAF · v_s",
            waf * v_method,
            "m/s",
            2,
            "US EPA Method 2H",
        ));
    }
    let (qs_text, qsd_source) = if waf != 1.0 {
        ("actual wet flow, 3600 WAF v_s A", "US EPA Method 2, eq. 2-10, with v_s,adj (Method 2H)")
    } else {
        ("actual wet flow, 3600 v_s A", "US EPA Method 2, eq. 2-10")
    };
    lines.push(line("result (method)", "Q_s", qs_text, qs_m, "m³/h", 0, "definition (actual conditions)"));
    lines.push(line("result (method)", "Q_sd", "dry flow at 20 °C, 760 mmHg", qsd_m, "dscm/h", 0, qsd_source));
    let qs_p_source = if waf != 1.0 { "Q = WAF v̄ A" } else { "Q = v̄ A" };
    lines.push(line("result (physics)", "Q_s", "actual wet flow", qs_p, "m³/h", 0, qs_p_source));
    lines.push(line(
        "result (physics)",
        "Q_sd",
        "dry flow at 20 °C, 101.325 kPa",
        qsd_p,
        "dscm/h",
        0,
        "ideal gas, (1 − B_ws)",
    ));
    let (v_rep, qsd_rep, name) = match r.report {
        Route::Method => (waf * v_method, qsd_m, "method equations"),
        Route::Physics => (waf * v_physics, qsd_p, "physics route"),
    };
    lines.push(line("reported", "v_s", "reported mean velocity", v_rep, "m/s", 2, name));
    lines.push(line(
        "reported",
        "Q_sd",
        "reported dry flow at 20 °C, 760 mmHg (101.325 kPa)",
        qsd_rep,
        "dscm/h",
        0,
        name,
    ));

    // Checks on the readings.
    checks.extend(gauge_sensitivity(&r.dp_mm_h2o, MethodUnits::Metric)?);
    if r.yaw_deg.is_empty() {
        notes.push("No yaw angles given: the Method 1 cyclonic-flow check was not made on this sheet (Method 2 §1.2 does not apply in cyclonic flow).".into());
    } else {
        checks.push(cyclonic_flow(&r.yaw_deg)?);
    }
    // Method 1 §1.2: not below 0.30 m across or 0.071 m² (read in the text, check-values.md §5.1).
    let size_check = match r.diameter_m {
        Some(d) => MethodCheck {
            name: "stack diameter for Method 1".into(),
            value: d,
            unit: "m",
            decimals: 2,
            limit: "≥ 0.30 m, else Method 1A (small stacks)".into(),
            pass: d >= 0.30,
            source: "US EPA Method 1 §1.2",
            citation: Citation::Verified,
        },
        None => MethodCheck {
            name: "stack area for Method 1".into(),
            value: r.area_m2,
            unit: "m²",
            decimals: 3,
            limit: "≥ 0.071 m², else Method 1A (small ducts)".into(),
            pass: r.area_m2 >= 0.071,
            source: "US EPA Method 1 §1.2",
            citation: Citation::Verified,
        },
    };
    checks.push(size_check);
    // Inputs first, then intermediate values and results (stable within a group).
    let rank = |g: &str| GROUPS.iter().position(|x| *x == g).unwrap_or(GROUPS.len());
    lines.sort_by_key(|l| rank(l.group));
    Ok(RunSheet { run: r.run.clone(), lines, checks, warnings, notes, route: r.report, moisture })
}

/// A line's value as printed: its decimals, and large whole numbers (flows) to four
/// significant figures (the long table keeps every digit).
fn fmt_value(l: &SheetLine) -> String {
    if l.decimals == 0 && l.value.abs() >= 1e4 {
        let step = 10f64.powi(l.value.abs().log10().floor() as i32 - 3);
        return format!("{:.0}", (l.value / step).round() * step);
    }
    format!("{:.*}", l.decimals, l.value)
}

/// The sheet as text, inputs first, then intermediate values, results, checks,
/// warnings, notes and the cautions.
pub fn to_text(sheets: &[RunSheet]) -> String {
    let mut s = String::new();
    for sh in sheets {
        let _ = writeln!(
            s,
            "Stack run {} — US EPA Methods 1–4 (reported: {})",
            sh.run,
            match sh.route {
                Route::Method => "method equations",
                Route::Physics => "physics route",
            }
        );
        let mut group = "";
        for l in &sh.lines {
            if l.group != group {
                group = l.group;
                let _ = writeln!(s, "  {group}");
            }
            let v = format!("{} {}", fmt_value(l), l.unit);
            let _ = writeln!(s, "    {:<11} {:>16}  {} — {}", l.symbol, v.trim_end(), l.quantity, l.source);
        }
        let _ = writeln!(s, "  checks");
        for c in &sh.checks {
            let _ = writeln!(s, "    {c}");
        }
        if !sh.warnings.is_empty() {
            let _ = writeln!(s, "  warnings");
            for w in &sh.warnings {
                let _ = writeln!(s, "    {}", w.message);
            }
        }
        for n in &sh.notes {
            let _ = writeln!(s, "  note: {n}");
        }
        s.push('\n');
    }
    let _ = write!(s, "Caution: {CAUTIONS}");
    s
}

fn esc(s: &str) -> String {
    s.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;")
}

/// The sheet as an HTML fragment (tables with the same columns as the text).
pub fn to_html(sheets: &[RunSheet]) -> String {
    let mut h = String::from("<div class=\"stagna-run-sheet\">\n");
    for sh in sheets {
        let _ = writeln!(h, "<h4>Stack run {} — US EPA Methods 1–4</h4>", esc(&sh.run));
        h.push_str("<table>\n<thead><tr><th>group</th><th>symbol</th><th>quantity</th><th>value</th><th>unit</th><th>source</th></tr></thead>\n<tbody>\n");
        for l in &sh.lines {
            let _ = writeln!(
                h,
                "<tr><td>{}</td><td>{}</td><td>{}</td><td style=\"text-align:right\">{}</td><td>{}</td><td>{}</td></tr>",
                esc(l.group),
                esc(l.symbol),
                esc(&l.quantity),
                fmt_value(l),
                esc(l.unit),
                esc(&l.source)
            );
        }
        h.push_str("</tbody>\n</table>\n<table>\n<thead><tr><th>check</th><th>value</th><th>limit</th><th>verdict</th><th>source</th></tr></thead>\n<tbody>\n");
        for c in &sh.checks {
            let _ = writeln!(
                h,
                "<tr><td>{}</td><td style=\"text-align:right\">{}</td><td>{}</td><td><b>{}</b></td><td>{}</td></tr>",
                esc(&c.name),
                esc(&c.value_text()),
                esc(&c.limit),
                c.verdict(),
                esc(&c.source_text())
            );
        }
        h.push_str("</tbody>\n</table>\n");
        for w in &sh.warnings {
            let _ = writeln!(h, "<p><b>warning:</b> {}</p>", esc(&w.message));
        }
        for n in &sh.notes {
            let _ = writeln!(h, "<p><i>note:</i> {}</p>", esc(n));
        }
    }
    let _ = writeln!(h, "<p><b>Caution:</b> {}</p>\n</div>", esc(CAUTIONS));
    h
}

/// The sheets as one long table for the record (CSV, Parquet): run, group, symbol,
/// quantity, value, unit, verdict (checks only), source.
pub fn to_frame(sheets: &[RunSheet]) -> Result<DataFrame> {
    let mut run = Vec::new();
    let mut group = Vec::new();
    let mut symbol = Vec::new();
    let mut quantity = Vec::new();
    let mut value = Vec::new();
    let mut unit = Vec::new();
    let mut verdict = Vec::new();
    let mut source = Vec::new();
    for sh in sheets {
        for l in &sh.lines {
            run.push(sh.run.clone());
            group.push(l.group.to_string());
            symbol.push(l.symbol.to_string());
            quantity.push(l.quantity.clone());
            value.push(l.value);
            unit.push(l.unit.to_string());
            verdict.push(String::new());
            source.push(l.source.clone());
        }
        for c in &sh.checks {
            run.push(sh.run.clone());
            group.push("check".into());
            symbol.push(String::new());
            quantity.push(format!("{} (limit {})", c.name, c.limit));
            value.push(c.value);
            unit.push(c.unit.to_string());
            verdict.push(c.verdict().to_string());
            source.push(c.source_text());
        }
    }
    DataFrame::new_infer_height(vec![
        Column::new("run".into(), run),
        Column::new("group".into(), group),
        Column::new("symbol".into(), symbol),
        Column::new("quantity".into(), quantity),
        Column::new("value".into(), value),
        Column::new("unit".into(), unit),
        Column::new("verdict".into(), verdict),
        Column::new("source".into(), source),
    ])
    .map_err(|e| Error::Inconsistent { context: CONTEXT, message: e.to_string() })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn run() -> StackRun {
        StackRun {
            run: "R1".into(),
            dp_mm_h2o: vec![10.0, 12.0, 14.0, 15.0, 13.0, 11.0],
            ts_c: vec![150.0],
            p_bar_mm_hg: 760.0,
            p_g_mm_h2o: -25.0,
            gas: GasInput::Analysis { co2_pct: 12.0, o2_pct: 6.0, n2_co_pct: 82.0 },
            moisture: MoistureInput::Given { bws: 0.10, source: "given".into() },
            coefficient: Coefficient::Given { cp: 0.84, source: "given".into() },
            area_m2: std::f64::consts::PI * 1.5 * 1.5 / 4.0,
            diameter_m: Some(1.5),
            wall: None,
            yaw_deg: vec![],
            report: Route::Method,
        }
    }

    // check-values.md §2.3 and §4.2 worked example (inputs invented there, arithmetic [C]):
    // M_d 30.160, M_s 28.944, P_s 758.1618 mmHg, v_s 14.3852 m/s, Q_sd 56 912.5 dscm/h;
    // first-principles SI mean of point velocities 14.3892 m/s.
    #[test]
    fn worked_example_both_routes() {
        let sh = run_sheet(&run()).unwrap();
        assert!((sh.value("M_d").unwrap() - 30.160).abs() < 1e-9);
        assert!((sh.value("M_s").unwrap() - 28.944).abs() < 1e-9);
        assert!((sh.value("P_s").unwrap() - 758.1618).abs() < 1e-4);
        assert!((sh.value("v_s").unwrap() - 14.3852).abs() < 1e-4);
        let qsd = sh.lines.iter().find(|l| l.symbol == "Q_sd" && l.group == "result (method)").unwrap().value;
        assert!((qsd - 56_912.5).abs() < 0.5, "{qsd}");
        assert!((sh.value("v̄").unwrap() - 14.3892).abs() < 1e-3, "{:?}", sh.value("v̄"));
        assert!(sh.passed(), "{:?}", sh.checks);
        let text = to_text(std::slice::from_ref(&sh));
        assert!(text.contains("Caution:") && text.contains("eq. 2-7") && text.contains("unverified"), "{text}");
        let html = to_html(std::slice::from_ref(&sh));
        assert!(html.contains("<td>Q_sd</td>") && html.contains("Caution"));
        let df = to_frame(&[sh]).unwrap();
        assert_eq!(df.width(), 8);
    }

    #[test]
    fn wall_factor_and_physics_route() {
        let mut r = run();
        r.wall = Some(Construction::BrickAndMortar);
        r.report = Route::Physics;
        let sh = run_sheet(&r).unwrap();
        let reported = sh.lines.iter().find(|l| l.group == "reported" && l.symbol == "v_s").unwrap().value;
        assert!((reported - 0.99 * sh.value("v̄").unwrap()).abs() < 1e-12);
        r.diameter_m = Some(0.8);
        assert!(run_sheet(&r).unwrap_err().to_string().contains("below 1.0 m"));
    }

    #[test]
    fn calibration_record_warnings_reach_the_sheet() {
        use super::super::calibration::{CalibrationPair, STypeCalibration};
        let p = |a, b| CalibrationPair { dp_std: a, dp_s: b };
        let c = STypeCalibration::new(0.99, vec![p(12.0, 16.8); 3], vec![p(12.0, 17.3); 3]).unwrap();
        let rec = CalibrationRecord::new("SP-07", "2026-01-10", &c).unwrap();
        let mut r = run();
        r.coefficient = Coefficient::Calibration { record: Box::new(rec), max_age_days: Some(180), today_days: 20_790 };
        let sh = run_sheet(&r).unwrap();
        assert!(!sh.passed(), "side difference > 0.01 must fail");
        assert!(sh.warnings.iter().any(|w| w.kind == "calibration-age"));
        assert!(sh.warnings.iter().any(|w| w.kind == "calibration-check"));
    }

    // Method 1 §1.2 (check-values.md §5.1, read in the text): 0.30 m; 0.071 m² for other shapes.
    #[test]
    fn method_1_size_limit_on_both_sides() {
        let mut r = run();
        r.diameter_m = Some(0.30);
        r.area_m2 = std::f64::consts::PI * 0.09 / 4.0;
        assert!(run_sheet(&r).unwrap().checks.iter().any(|c| c.name == "stack diameter for Method 1" && c.pass));
        r.diameter_m = Some(0.29);
        assert!(run_sheet(&r).unwrap().checks.iter().any(|c| c.name == "stack diameter for Method 1" && !c.pass));
        r.diameter_m = None;
        r.area_m2 = 0.07;
        assert!(run_sheet(&r).unwrap().checks.iter().any(|c| c.name == "stack area for Method 1" && !c.pass));
    }

    #[test]
    fn bad_inputs() {
        let mut r = run();
        r.moisture = MoistureInput::Given { bws: 1.0, source: "x".into() };
        assert!(run_sheet(&r).unwrap_err().to_string().contains("B_ws must be in [0, 1)"));
        let mut r = run();
        r.dp_mm_h2o[2] = -0.5;
        assert!(run_sheet(&r).unwrap_err().to_string().contains("row 3"));
        let mut r = run();
        r.ts_c = vec![150.0, 151.0];
        assert!(run_sheet(&r).is_err());
        let mut r = run();
        r.yaw_deg = vec![10.0, 120.0];
        assert!(run_sheet(&r).unwrap_err().to_string().contains("yaw angle"));
    }
}
