//! Scans in scripts: a file or a folder of files too large to hold, read a batch at a time
//! by the reduction that needs it (only the columns it reads).

use std::collections::BTreeMap;
use std::path::Path;

use polars::prelude::DataFrame;
use rhai::{Array, Dynamic, Map, NativeCallContext};
use stagna::campaign::stream::{ScanOptions, reduce_campaign_scan, reduce_campaign_scan_to_parquet};
use stagna::io::scan::TableScan;

use super::campaigns::{Campaign, campaign_spec, failures_array};
use super::tables::{Tbl, in_path, numeric_column, out_path, warn_unit_change, with_result_units};
use super::*;
use crate::catalog::Doc;

/// A scan in scripts: the library scan and the declared unit of each numeric column.
#[derive(Debug, Clone)]
pub struct Scan {
    /// The files and their layout.
    pub scan: TableScan,
    /// Column name → unit string.
    pub units: BTreeMap<String, String>,
}

impl Scan {
    /// A table of no rows with the scan's columns and units: what a spec is checked against.
    fn schema_table(&self) -> Tbl {
        Tbl { df: DataFrame::empty_with_schema(self.scan.schema()), units: self.units.clone() }
    }

    fn options(&self, p: &SharedPrefs) -> ScanOptions {
        ScanOptions { batch_rows: 0, cancel: Some(super::prefs(p).interrupt) }
    }

    fn declare(&self, ctx: &NativeCallContext, c: &str, u: &str) -> Res<Self> {
        numeric_column(&DataFrame::empty_with_schema(self.scan.schema()), c)?;
        lib(Unit::parse(u))?;
        let mut out = self.clone();
        if let Some(old) = out.units.insert(c.to_string(), u.to_string()).filter(|o| o != u) {
            warn_unit_change(ctx, c, &old, u)?;
        }
        Ok(out)
    }
}

/// Registers the package.
pub fn register(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.engine.register_type_with_name::<Scan>("Scan");
    r.group("Scans (tables read a batch at a time)");
    let ps = prefs.clone();
    r.func(
        "scan_table",
        &Doc::new(
            "scan_table(path) -> Scan",
            "A CSV or Parquet file, or a folder of them (sub-folders such as hive partitions included, name order, hidden entries left out), read only when a reduction needs it: a batch at a time (a Parquet row group, or a run of whole CSV lines), only the columns the reduction reads. Units stored with the first file (Parquet metadata, a CSV units sidecar) are taken; declare others with .unit/.units. reduce_campaign(scan, spec) then holds a batch or two and the results in memory, never the readings; reduce_campaign_to(scan, spec, path) writes the results as it goes. A traverse's rows must lie together (they may run on from one file into the next).",
        )
        .example("table_from(#{tr: [1, 1, 1, 1], h: [20.0, 30.0, 30.0, 20.0], t: [20.0, 20.0, 20.0, 20.0], d: [500.0, 500.0, 500.0, 500.0]})\n    .write(\"readings.parquet\");\nlet s = scan_table(\"readings.parquet\").units(#{h: \"mm\", t: \"degC\", d: \"mm\"});\nprint(s);")
        .source("polars Parquet and CSV readers"),
        move |path: &str| -> Res<Scan> {
            let file = in_path(&ps, path);
            let scan = lib(TableScan::open(&file))?;
            let mut units = BTreeMap::new();
            let empty = DataFrame::empty_with_schema(scan.schema());
            for (c, u) in scan.units() {
                if numeric_column(&empty, c).is_ok() && Unit::parse(u).is_ok() {
                    units.insert(c.clone(), u.clone());
                }
            }
            Ok(Scan { scan, units })
        },
    );
    r.method(
        "Scan",
        "unit",
        &Doc::new(
            "scan.unit(column, unit) -> Scan",
            "Declares the unit of a numeric column of a scan, as t.unit does for a table.",
        )
        .example(
            "table_from(#{h: [12.5]}).write(\"h.parquet\");\nprint(scan_table(\"h.parquet\").unit(\"h\", \"mm\"));",
        )
        .source("unit factors: NIST SP 811 (2008) Appendix B.8"),
        |ctx: NativeCallContext, s: &mut Scan, c: &str, u: &str| -> Res<Scan> { s.declare(&ctx, c, u) },
    );
    r.method(
        "Scan",
        "units",
        &Doc::new("scan.units(map) -> Scan", "Declares several column units of a scan at once.")
            .example("table_from(#{h: [12.5], t: [20.0]}).write(\"ht.parquet\");\nprint(scan_table(\"ht.parquet\").units(#{h: \"mm\", t: \"degC\"}));")
            .source("unit factors: NIST SP 811 (2008) Appendix B.8"),
        |ctx: NativeCallContext, s: &mut Scan, m: Map| -> Res<Scan> {
            let mut out = s.clone();
            for (c, u) in &m {
                out = out.declare(&ctx, c, &text(u, c)?)?;
            }
            Ok(out)
        },
    );
    r.property(
        "Scan",
        "files",
        &Doc::new("scan.files -> array", "The files a scan reads, in order.")
            .example("table_from(#{h: [12.5]}).write(\"f.parquet\");\nprint(scan_table(\"f.parquet\").files.len());")
            .source("common practice, no source"),
        |s: &mut Scan| s.scan.files().iter().map(|f| Dynamic::from(f.display().to_string())).collect::<Array>(),
    );
    r.property(
        "Scan",
        "columns",
        &Doc::new("scan.columns -> array", "Column names of a scan.")
            .example("table_from(#{h: [12.5]}).write(\"c.parquet\");\nprint(scan_table(\"c.parquet\").columns);")
            .source("common practice, no source"),
        |s: &mut Scan| s.scan.schema().iter_names().map(|n| Dynamic::from(n.to_string())).collect::<Array>(),
    );
    r.engine.register_fn("to_string", |s: &mut Scan| {
        let rows = match s.scan.rows() {
            Some(n) => format!("{n} rows"),
            None => format!("{} bytes of CSV", s.scan.bytes()),
        };
        let cols: Vec<String> = s
            .scan
            .schema()
            .iter()
            .map(|(n, t)| match s.units.get(n.as_str()) {
                Some(u) => format!("{n} [{u}]"),
                None => format!("{n} ({t})"),
            })
            .collect();
        format!("Scan: {} file(s), {rows}; columns: {}", s.scan.files().len(), cols.join(", "))
    });
    let pc = prefs.clone();
    // Documented with reduce_campaign (one name, a table or a scan).
    r.engine.register_fn("reduce_campaign", move |s: Scan, o: Map| -> Res<Campaign> {
        let mut spec = campaign_spec(&s.schema_table(), &o, &pc)?;
        spec.progress = super::progress_for(&pc, "reduce_campaign: readings");
        let coverage = spec.uncertainty.as_ref().map(|u| u.coverage);
        Ok(Campaign { res: lib(reduce_campaign_scan(&s.scan, &spec, &s.options(&pc)))?, coverage })
    });
    let pt = prefs.clone();
    r.func(
        "reduce_campaign_to",
        &Doc::new(
            "reduce_campaign_to(scan, spec, path) -> map",
            "Reduces every traverse of a scan as reduce_campaign does and writes the traverse rows to a Parquet file as they come (units in the file's metadata), so that memory holds a batch, not the result. The file appears only when complete: a failure (a full disk included) leaves an earlier file of that name as it was. Returns #{file, traverses, readings, batches, failures}.",
        )
        .param("spec", "as reduce_campaign")
        .param("path", "a .parquet file (relative paths go to the run's output folder)")
        .example("table_from(#{tr: [1, 1, 1, 1], h: [20.0, 30.0, 30.0, 20.0], t: [20.0, 20.0, 20.0, 20.0], d: [500.0, 500.0, 500.0, 500.0]})\n    .write(\"r.parquet\");\nlet s = scan_table(\"r.parquet\").units(#{h: \"mm\", t: \"degC\", d: \"mm\"});\nlet spec = #{fluid: dry_air(), static_pressure: 101.kPa, manometer: u_tube(gauge_water()), probe: pitot_static(1.0),\n    columns: #{traverse: \"tr\", deflection: \"h\", fluid_temperature: \"t\", size: \"d\"}};\nprint(reduce_campaign_to(s, spec, \"traverses.parquet\").traverses);")
        .source("velocity-area method, ISO 3966:2008 §9–10, as reduce_campaign"),
        move |s: Scan, o: Map, path: &str| -> Res<Map> {
            if !matches!(Path::new(path).extension().and_then(|e| e.to_str()), Some("parquet" | "pq")) {
                return Err(rt(format!("reduce_campaign_to: '{path}' must be a .parquet file")));
            }
            let target = out_path(&pt, path)?;
            let mut spec = campaign_spec(&s.schema_table(), &o, &pt)?;
            spec.progress = super::progress_for(&pt, "reduce_campaign_to: readings");
            let units = |df: &DataFrame| with_result_units(df.clone(), BTreeMap::new()).units;
            let r = lib(reduce_campaign_scan_to_parquet(&s.scan, &spec, &s.options(&pt), &target, &units))?;
            let mut m = Map::new();
            m.insert("file".into(), Dynamic::from(target.display().to_string()));
            m.insert("traverses".into(), Dynamic::from(r.traverses as i64));
            m.insert("readings".into(), Dynamic::from(r.rows as i64));
            m.insert("batches".into(), Dynamic::from(r.batches as i64));
            m.insert("failures".into(), Dynamic::from(failures_array(&r.failures)));
            Ok(m)
        },
    );
}
