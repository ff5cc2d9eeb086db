//! Logged samples in scripts: a table of timestamped Δp samples (a transducer or data
//! logger) reduced per point in Rust over whole columns.

use std::collections::BTreeMap;

use polars::prelude::{DataFrame, NamedFrom, Series};
use rhai::Map;
use stagna::campaign::samples::{SampleOptions, all_block_stats, assign_windows, blocks_by_point, blocks_of};
use stagna::units::dimension::Dimension as D;

use super::tables::Tbl;
use super::*;
use crate::catalog::Doc;

/// Registers the package.
pub fn register(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.group("Logged samples");
    let p = prefs.clone();
    r.func(
        "sample_stats",
        &Doc::new(
            "sample_stats(samples, options) -> Table",
            "Per-point statistics of logged Δp samples, one row per point: samples used and dropped, duration, mean Δp and standard deviation, mean of √Δp beside √(mean Δp) and their difference, turbulence intensity from the Δp fluctuation (an upper estimate: it includes the transducer's noise), negative samples, drift from the first to the last third (and in standard uncertainties), lag-1 autocorrelation, effective number of independent samples, and the Type A standard uncertainty of the mean Δp with its degrees of freedom; `warnings` names what the checks found (reversing, drifting, few independent samples, long correlation), each also printed. Options: time (column of seconds, increasing within a point; default \"time_s\"), dp (a column with a pressure unit; default \"dp\"), point (column naming each sample's point; default \"point\") or windows (a table with columns point, start_s, stop_s that assigns samples by time), settle (a time dropped from the start of each block, default 0 s), transducer (a calibrated Transducer: each sample is corrected by its calibration curve first).",
        )
        .param("samples", "table of samples")
        .param("options", "map: time, dp, point or windows, settle, transducer")
        .example("let s = table_from(#{point: [\"P1\", \"P1\", \"P1\", \"P1\", \"P2\", \"P2\", \"P2\", \"P2\"],\n    time_s: [0.0, 1.0, 2.0, 3.0, 10.0, 11.0, 12.0, 13.0],\n    dp: [101.0, 98.0, 103.0, 99.0, 121.0, 118.0, 124.0, 119.0]}).unit(\"dp\", \"Pa\");\nprint(sample_stats(s, #{}));")
        .source("JCGM 100:2008 §4.2 (Type A of a mean) with the effective number of autocorrelated samples (see the library's campaign::samples docs for each formula and its standing)"),
        move |t: Tbl, o: Map| -> Res<Tbl> { sample_stats(&p, &t, &o) },
    );
    let p = prefs.clone();
    r.func(
        "sample_stats",
        &Doc::new(
            "sample_stats(scan, options) -> Table",
            "sample_stats over a scan (scan_table of a file or a folder too large to hold): the same per-point table, read a batch at a time, only the time, Δp and point columns, holding one batch and the block that runs on from it (a block may run on from one file into the next; a point met again after other points is an error naming its row). Options as for a table, without windows; the Δp column's unit comes from the files or scan.unit.",
        )
        .param("scan", "scan_table(path)")
        .param("options", "map: time, dp, point, settle, transducer")
        .example("table_from(#{point: [\"P1\", \"P1\", \"P1\", \"P2\", \"P2\", \"P2\"], time_s: [0.0, 1.0, 2.0, 0.0, 1.0, 2.0], dp: [101.0, 98.0, 103.0, 121.0, 118.0, 124.0]})\n    .write(\"samples.parquet\");\nprint(sample_stats(scan_table(\"samples.parquet\").unit(\"dp\", \"Pa\"), #{}));")
        .source("as sample_stats of a table"),
        move |sc: super::scans::Scan, o: Map| -> Res<Tbl> { sample_stats_scan(&p, &sc, &o) },
    );
}

fn sample_stats(p: &SharedPrefs, t: &Tbl, o: &Map) -> Res<Tbl> {
    check_keys(o, &["time", "dp", "point", "windows", "settle", "transducer"], "sample_stats")?;
    let name = |k: &str, default: &str| -> Res<String> {
        Ok(field(o, k).map(|d| text(d, k)).transpose()?.unwrap_or_else(|| default.to_string()))
    };
    let (time_name, dp_name) = (name("time", "time_s")?, name("dp", "dp")?);
    let time = t.column(&time_name)?;
    if time.dimension != D::NONE && time.dimension != D::TIME {
        return Err(rt(format!("sample_stats: '{time_name}' must hold seconds, got a column of {}", time.dimension)));
    }
    let dp = t.column(&dp_name)?;
    if dp.dimension != D::PRESSURE {
        return Err(rt(format!(
            "sample_stats: '{dp_name}' must be a pressure column; give it its unit, e.g. samples.unit(\"{dp_name}\", \"Pa\")"
        )));
    }
    // The columns were converted for this call: take their values without a copy.
    let take = |c: Col| std::sync::Arc::try_unwrap(c.si).unwrap_or_else(|a| a.to_vec());
    let mut dp_si: Vec<f64> = take(dp);
    if let Some(cal) = calibration_of(o)? {
        dp_si.iter_mut().for_each(|x| *x = cal.correct_pa(*x));
    }
    let settle = settle_of(o)?;
    let time_si: Vec<f64> = take(time);
    let (blocks, time_si, dp_si) = match (field(o, "windows"), field(o, "point")) {
        (Some(_), Some(_)) => {
            return Err(rt("sample_stats: give either point (a column) or windows (a table), not both"));
        }
        (Some(w), None) => {
            let w: Tbl = w
                .clone()
                .try_cast()
                .ok_or_else(|| rt("sample_stats: 'windows' must be a table with columns point, start_s, stop_s"))?;
            let names = lib(stagna::io::table::text_column(&w.df, "point"))?;
            let (a, b) = (w.column("start_s")?, w.column("stop_s")?);
            let windows: Vec<(String, f64, f64)> =
                names.into_iter().zip(a.si.iter().zip(b.si.iter())).map(|(n, (a, b))| (n, *a, *b)).collect();
            let which = lib(assign_windows(&time_si, &windows))?;
            // Samples in time order keep their order; samples outside every window are left out.
            let mut rows: Vec<usize> = (0..time_si.len()).filter(|&i| which[i].is_some()).collect();
            rows.sort_by_key(|&i| which[i]);
            if rows.is_empty() {
                return Err(rt("sample_stats: no sample falls inside any window"));
            }
            let ids = rows.iter().map(|&i| windows[which[i].unwrap_or(0)].0.clone()).collect::<Vec<_>>();
            let ts = rows.iter().map(|&i| time_si[i]).collect::<Vec<_>>();
            let ds = rows.iter().map(|&i| dp_si[i]).collect::<Vec<_>>();
            (lib(blocks_by_point(&ids))?, ts, ds)
        }
        (None, point) => {
            let col = match point {
                Some(d) => text(d, "point")?,
                None => "point".into(),
            };
            // The ids are read in place: one string per point, not one per sample.
            (lib(stagna::io::table::with_text_column(&t.df, &col, |ids| blocks_of(ids)))?, time_si, dp_si)
        }
    };
    let opts = SampleOptions { settle_s: settle, ..Default::default() };
    let stats = lib(all_block_stats(&time_si, &dp_si, &blocks, &opts))?;
    stats_table(p, blocks.into_iter().map(|b| b.0).collect(), stats)
}

/// The settling time of `sample_stats` options (a time, or seconds as a number; 0 if not given).
fn settle_of(o: &Map) -> Res<f64> {
    match field(o, "settle") {
        None => Ok(0.0),
        Some(d) if d.is_float() || d.is_int() => number(d, "settle"),
        Some(d) => si_of(d, D::TIME, "settle"),
    }
}

/// The calibration of the transducer in `sample_stats` options, if one is given.
fn calibration_of(o: &Map) -> Res<Option<stagna::instruments::transducer::TransducerCalibration>> {
    let Some(tr) = field(o, "transducer") else { return Ok(None) };
    let tr: stagna::instruments::transducer::Transducer = tr
        .clone()
        .try_cast()
        .ok_or_else(|| rt("sample_stats: 'transducer' must be a Transducer (setup.transducer(id))"))?;
    tr.calibration.clone().map(Some).ok_or_else(|| {
        rt(format!("sample_stats: transducer {} has no calibration points to correct the samples with", tr.id))
    })
}

/// `sample_stats` over a scan: the same options but windows, read a batch at a time.
fn sample_stats_scan(p: &SharedPrefs, sc: &super::scans::Scan, o: &Map) -> Res<Tbl> {
    check_keys(o, &["time", "dp", "point", "settle", "transducer"], "sample_stats (scan)")?;
    let name = |k: &str, default: &str| -> Res<String> {
        Ok(field(o, k).map(|d| text(d, k)).transpose()?.unwrap_or_else(|| default.to_string()))
    };
    let (time_name, dp_name, point_name) = (name("time", "time_s")?, name("dp", "dp")?, name("point", "point")?);
    let scale = |c: &str, dim: D, what: &str| -> Res<f64> {
        match sc.units.get(c) {
            None if dim == D::TIME => Ok(1.0),
            None => Err(rt(format!(
                "sample_stats: '{c}' must be a {what} column; give it its unit, e.g. scan.unit(\"{c}\", \"Pa\")"
            ))),
            Some(u) => {
                let q = lib(Quantity::new(1.0, u))?;
                if q.dimension != dim {
                    return Err(rt(format!("sample_stats: '{c}' is in {u}, not a {what} unit")));
                }
                Ok(q.si)
            }
        }
    };
    let cols = stagna::campaign::samples::SampleColumns {
        time: &time_name,
        dp: &dp_name,
        point: &point_name,
        time_scale: scale(&time_name, D::TIME, "time")?,
        dp_scale: scale(&dp_name, D::PRESSURE, "pressure")?,
    };
    let settle = settle_of(o)?;
    let cal = calibration_of(o)?;
    let correct = cal.as_ref().map(|c| move |x: f64| c.correct_pa(x));
    let opts = SampleOptions { settle_s: settle, ..Default::default() };
    let interrupt = super::prefs(p).interrupt;
    let r = lib(stagna::campaign::samples::scan_block_stats(
        &sc.scan,
        &cols,
        correct.as_ref().map(|f| f as &(dyn Fn(f64) -> f64 + Sync)),
        &opts,
        0,
        Some(&interrupt),
    ))?;
    let (ids, stats) = r.into_iter().unzip();
    stats_table(p, ids, stats)
}

/// The per-point table of `sample_stats`, with each point's warnings printed once.
fn stats_table(p: &SharedPrefs, ids: Vec<String>, stats: Vec<stagna::campaign::samples::BlockStats>) -> Res<Tbl> {
    for (id, s) in ids.iter().zip(&stats) {
        for w in &s.warnings {
            warn_once(p, &format!("point {id}: {}", w.message));
        }
    }
    let f = |g: fn(&stagna::campaign::samples::BlockStats) -> f64| stats.iter().map(g).collect::<Vec<f64>>();
    let df = DataFrame::new_infer_height(vec![
        Series::new("point".into(), ids).into(),
        Series::new("n".into(), stats.iter().map(|s| s.n as i64).collect::<Vec<_>>()).into(),
        Series::new("dropped".into(), stats.iter().map(|s| s.dropped as i64).collect::<Vec<_>>()).into(),
        Series::new("duration_s".into(), f(|s| s.duration_s)).into(),
        Series::new("mean_dp".into(), f(|s| s.mean_dp)).into(),
        Series::new("sd_dp".into(), f(|s| s.sd_dp)).into(),
        Series::new("mean_sqrt_dp_sqrtPa".into(), f(|s| s.mean_sqrt)).into(),
        Series::new("sqrt_mean_dp_sqrtPa".into(), f(|s| s.sqrt_mean)).into(),
        Series::new("sqrt_difference_pct".into(), f(|s| s.sqrt_difference_pct)).into(),
        Series::new("turbulence_pct".into(), f(|s| s.turbulence_pct)).into(),
        Series::new("negative_pct".into(), f(|s| s.negative_pct)).into(),
        Series::new("drift_pct".into(), f(|s| s.drift_pct)).into(),
        Series::new("drift_z".into(), f(|s| s.drift_z)).into(),
        Series::new("r1".into(), f(|s| s.r1)).into(),
        Series::new("n_effective".into(), f(|s| s.n_effective)).into(),
        Series::new("u_mean_dp".into(), f(|s| s.u_mean_dp)).into(),
        Series::new("dof".into(), f(|s| s.dof)).into(),
        Series::new(
            "warnings".into(),
            stats.iter().map(|s| s.warnings.iter().map(|w| w.kind).collect::<Vec<_>>().join(", ")).collect::<Vec<_>>(),
        )
        .into(),
    ])
    .map_err(|e| rt(e.to_string()))?;
    let units: BTreeMap<String, String> = [
        ("duration_s", "s"),
        ("mean_dp", "Pa"),
        ("sd_dp", "Pa"),
        ("sqrt_difference_pct", "%"),
        ("turbulence_pct", "%"),
        ("negative_pct", "%"),
        ("drift_pct", "%"),
        ("u_mean_dp", "Pa"),
    ]
    .iter()
    .map(|(k, v)| (k.to_string(), v.to_string()))
    .collect();
    Ok(Tbl { df, units })
}
