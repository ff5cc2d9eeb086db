//! Campaign reductions over a [`TableScan`]: the readings read a batch at a time, only the
//! columns the spec names, reduced as they arrive, so that memory holds a batch or two
//! and the results, never the table.
//!
//! A reader thread decodes the next batch while the current one is reduced. Each batch
//! is cut after its last complete traverse; the rows of the traverse still open are
//! carried into the next batch (and the next file: a traverse whose rows run on from the
//! end of one file into the start of the next is one traverse). A traverse is its rows
//! *next to each other*: a key met again after other traverses is refused, naming it,
//! because a stream cannot hold every earlier row to merge it (read the table whole with
//! `read_table` for that). The result is the same as [`super::reduce_campaign`] over the
//! whole table for traverses stored together, in the same order.

use std::cmp::Ordering;

use polars::prelude::*;

use super::reduction::{CampaignResult, CampaignSpec, TraverseFailure, reduce_campaign_with};
use crate::error::{Error, Result, Warning};
use crate::io::scan::TableScan;

/// Rows per batch by default. Row groups are merged into a batch only while they fit, and a
/// batch of several row groups arrives in several chunks that the reduction copies into one;
/// at 2¹⁷ the row groups of the usual writers (python-polars writes about 123 000 rows a
/// group at 10 M rows, polars' Rust writer 512² = 262 144) each make one batch, read in place.
pub const DEFAULT_BATCH_ROWS: usize = 1 << 17;

/// How a scan is read.
#[derive(Debug, Clone, Default)]
pub struct ScanOptions {
    /// Rows per batch (0: [`DEFAULT_BATCH_ROWS`]).
    pub batch_rows: usize,
    /// Stops the reduction between batches ([`Error::Interrupted`]) when set.
    pub cancel: Option<std::sync::Arc<std::sync::atomic::AtomicBool>>,
}

impl ScanOptions {
    fn rows(&self) -> usize {
        if self.batch_rows == 0 { DEFAULT_BATCH_ROWS } else { self.batch_rows }
    }
}

/// What a scan reduction did, besides the traverse rows it handed on.
#[derive(Debug, Clone, Default)]
pub struct ScanReduction {
    /// Traverses reduced.
    pub traverses: usize,
    /// Readings (rows) read.
    pub rows: u64,
    /// Batches read.
    pub batches: usize,
    /// Traverses that failed, with the reason.
    pub failures: Vec<TraverseFailure>,
    /// Warnings that hold for every traverse.
    pub warnings: Vec<Warning>,
}

fn table_err(e: PolarsError) -> Error {
    Error::Inconsistent { context: "campaign scan", message: e.to_string() }
}

/// The traverse keys of one batch, compared row with row.
enum Keys {
    Int(Int64Chunked),
    Text(StringChunked),
}

/// One key value, kept from batch to batch.
#[derive(Debug, Clone, PartialEq, PartialOrd)]
enum Key {
    Int(Option<i64>),
    Text(Option<String>),
}

impl std::fmt::Display for Key {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Key::Int(Some(v)) => write!(f, "{v}"),
            Key::Text(Some(v)) => write!(f, "{v}"),
            _ => f.write_str("(empty)"),
        }
    }
}

impl Keys {
    fn of(df: &DataFrame, name: &str) -> Result<Self> {
        let s = df.column(name).map_err(table_err)?.as_materialized_series();
        Ok(if s.dtype().is_integer() {
            let c = s.cast(&DataType::Int64).map_err(table_err)?;
            Keys::Int(c.i64().map_err(table_err)?.rechunk().into_owned())
        } else {
            let c = s.cast(&DataType::String).map_err(table_err)?;
            Keys::Text(c.str().map_err(table_err)?.rechunk().into_owned())
        })
    }

    fn at(&self, i: usize) -> Key {
        match self {
            Keys::Int(c) => Key::Int(c.get(i)),
            Keys::Text(c) => Key::Text(c.get(i).map(str::to_string)),
        }
    }

    /// The first row of every run of equal keys.
    fn run_starts(&self) -> Vec<usize> {
        fn starts<T: PartialEq>(v: impl Iterator<Item = T>) -> Vec<usize> {
            let mut out = Vec::new();
            let mut last: Option<T> = None;
            for (i, x) in v.enumerate() {
                if last.as_ref() != Some(&x) {
                    out.push(i);
                    last = Some(x);
                }
            }
            out
        }
        match self {
            Keys::Int(c) => match c.cont_slice() {
                Ok(s) => starts(s.iter()),
                Err(_) => starts(c.iter()),
            },
            Keys::Text(c) => starts(c.iter()),
        }
    }

    /// Whether the keys at the run starts rise strictly.
    fn rising(&self, starts: &[usize]) -> bool {
        match self {
            Keys::Int(c) => match c.cont_slice() {
                Ok(s) => starts.windows(2).all(|w| s[w[0]] < s[w[1]]),
                Err(_) => starts.windows(2).all(|w| c.get(w[0]) < c.get(w[1])),
            },
            Keys::Text(c) => starts.windows(2).all(|w| c.get(w[0]) < c.get(w[1])),
        }
    }
}

/// The stream's state between batches.
struct Stream<'a, 'f> {
    spec: &'a CampaignSpec,
    each: &'f mut dyn FnMut(DataFrame) -> Result<()>,
    out: ScanReduction,
    /// The rows of the traverse still open, its key and the input row it starts at.
    carry: Option<(DataFrame, Key, usize)>,
    /// The key of the last traverse seen, and whether keys have risen so far.
    last: Option<Key>,
    rising: bool,
    /// The keys of the traverses handed on (for the duplicate check when keys did not rise).
    seen: Vec<Series>,
}

impl Stream<'_, '_> {
    fn note_key(&mut self, k: &Key) {
        if let Some(l) = &self.last
            && l.partial_cmp(k) != Some(Ordering::Less)
        {
            self.rising = false;
        }
        self.last = Some(k.clone());
    }

    /// Reduces a frame of `runs` complete traverses, starting at input row `at`, and hands
    /// the rows on.
    fn reduce(&mut self, part: &DataFrame, runs: usize, at: usize) -> Result<()> {
        if part.height() == 0 {
            return Ok(());
        }
        let key = &self.spec.columns.traverse;
        let r: CampaignResult = reduce_campaign_with(part, self.spec, None, at)?;
        if r.traverses.height() + r.failures.len() < runs {
            // group_by merged a key met twice inside the batch: name it.
            let keys = Keys::of(part, key)?;
            let mut set = std::collections::HashSet::new();
            for s in keys.run_starts() {
                let k = keys.at(s).to_string();
                if !set.insert(k.clone()) {
                    return Err(split_traverse(key, &k));
                }
            }
        }
        if self.out.warnings.is_empty() {
            self.out.warnings = r.warnings;
        }
        self.out.traverses += r.traverses.height();
        self.out.failures.extend(r.failures);
        if let Ok(c) = r.traverses.column(key) {
            self.seen.push(c.as_materialized_series().clone());
        }
        (self.each)(r.traverses)
    }

    fn batch(&mut self, df: DataFrame) -> Result<()> {
        let n = df.height();
        if n == 0 {
            return Ok(());
        }
        let base = self.out.rows as usize;
        self.out.rows += n as u64;
        self.out.batches += 1;
        let keys = Keys::of(&df, &self.spec.columns.traverse)?;
        let starts = keys.run_starts();
        let mut lo = 0;
        if let Some((mut open, k, at)) = self.carry.take() {
            if keys.at(0) == k {
                let head = starts.get(1).copied().unwrap_or(n);
                open.vstack_mut(&df.slice(0, head)).map_err(table_err)?;
                if head == n {
                    self.carry = Some((open, k, at));
                    return Ok(());
                }
                self.reduce(&open, 1, at)?;
                lo = head;
            } else {
                self.reduce(&open, 1, at)?;
            }
        }
        let from = starts.partition_point(|&s| s < lo);
        let body = &starts[from..];
        if let (Some(&a), Some(&b)) = (body.first(), body.last()) {
            self.note_key(&keys.at(a));
            if b != a {
                self.note_key(&keys.at(b));
            }
        }
        if !keys.rising(body) {
            self.rising = false;
        }
        let last = *body.last().unwrap_or(&lo);
        if last > lo {
            self.reduce(&df.slice(lo as i64, last - lo), body.len() - 1, base + lo)?;
        }
        self.carry = Some((df.slice(last as i64, n - last), keys.at(last), base + last));
        Ok(())
    }

    fn finish(mut self) -> Result<ScanReduction> {
        if let Some((open, _, at)) = self.carry.take() {
            self.reduce(&open, 1, at)?;
        }
        if !self.rising {
            let mut set = std::collections::HashSet::new();
            for s in &self.seen {
                let text = s.cast(&DataType::String).map_err(table_err)?;
                for k in text.str().map_err(table_err)?.iter() {
                    let k = k.unwrap_or("(empty)");
                    if !set.insert(k.to_string()) {
                        return Err(split_traverse(&self.spec.columns.traverse, k));
                    }
                }
            }
        }
        Ok(self.out)
    }
}

fn split_traverse(column: &str, key: &str) -> Error {
    Error::Inconsistent {
        context: "campaign scan",
        message: format!(
            "traverse {key} (column '{column}') has rows in two places, with other traverses between them; a scan \
             reduces each traverse from rows stored together (a traverse may run on from one file into the next): \
             sort the readings by traverse, or read the table whole with read_table"
        ),
    }
}

/// Reduces every traverse of a scan, a batch of about `opts.batch_rows` rows at a time, and
/// hands each batch's traverse rows to `each` in order (see the module doc). Progress
/// goes to the spec's `progress` as rows (Parquet) or bytes (CSV) read of the total.
pub fn reduce_campaign_scan_each(
    scan: &TableScan,
    spec: &CampaignSpec,
    opts: &ScanOptions,
    each: &mut dyn FnMut(DataFrame) -> Result<()>,
) -> Result<ScanReduction> {
    let names = spec.columns.names();
    let batches = scan.batches(&names, opts.rows())?;
    let total = scan.rows().map_or_else(|| scan.bytes(), |r| r as u64);
    let counter = crate::progress::Counter::new(spec.progress.as_ref(), total);
    let mut stream =
        Stream { spec, each, out: ScanReduction::default(), carry: None, last: None, rising: true, seen: Vec::new() };
    // One batch decoded ahead while this one is reduced.
    batches.read_ahead("campaign scan", opts.cancel.as_deref(), |df, work| {
        stream.batch(df)?;
        counter.add(work);
        Ok(())
    })?;
    stream.finish()
}

/// Reduces every traverse of a scan into one result held in memory (one row per
/// traverse; the readings themselves are never all held).
pub fn reduce_campaign_scan(scan: &TableScan, spec: &CampaignSpec, opts: &ScanOptions) -> Result<CampaignResult> {
    let mut parts: Vec<DataFrame> = Vec::new();
    let summary = reduce_campaign_scan_each(scan, spec, opts, &mut |df| {
        parts.push(df);
        Ok(())
    })?;
    let mut traverses = match parts.len() {
        0 => {
            return Err(Error::Inconsistent {
                context: "campaign scan",
                message: match summary.failures.first() {
                    Some(f) => format!(
                        "no traverse could be reduced ({} failed; the first, {}: {})",
                        summary.failures.len(),
                        f.traverse,
                        f.message
                    ),
                    None => "the scan holds no readings".into(),
                },
            });
        }
        _ => {
            let mut it = parts.into_iter();
            let mut first = it.next().unwrap_or_default();
            for p in it {
                first.vstack_mut(&p).map_err(table_err)?;
            }
            first
        }
    };
    traverses.rechunk_mut_par();
    Ok(CampaignResult { traverses, failures: summary.failures, warnings: summary.warnings })
}

/// Reduces every traverse of a scan straight into a Parquet file at `path` (written
/// through a temporary file and renamed when complete: a failure, a full disk included,
/// leaves any earlier file of that name as it was), with the units `units` gives for
/// the result's columns in the file's metadata. Memory holds a batch, not the result.
pub fn reduce_campaign_scan_to_parquet(
    scan: &TableScan,
    spec: &CampaignSpec,
    opts: &ScanOptions,
    path: &std::path::Path,
    units: &dyn Fn(&DataFrame) -> std::collections::BTreeMap<String, String>,
) -> Result<ScanReduction> {
    use polars_io::parquet::write::{BatchedWriter, KeyValueMetadata, ParquetWriter};
    /// The file under the Parquet writer, keeping the system's last error: the writer
    /// reports a failed write as a garbled encoding error.
    struct Recording {
        file: std::fs::File,
        last: std::sync::Arc<std::sync::Mutex<Option<std::io::Error>>>,
    }
    impl std::io::Write for Recording {
        fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
            self.file.write(buf).inspect_err(|e| self.keep(e))
        }
        fn flush(&mut self) -> std::io::Result<()> {
            self.file.flush().inspect_err(|e| self.keep(e))
        }
    }
    impl Recording {
        fn keep(&self, e: &std::io::Error) {
            if let Ok(mut g) = self.last.lock() {
                *g = Some(std::io::Error::new(e.kind(), e.to_string()));
            }
        }
    }
    let last_io: std::sync::Arc<std::sync::Mutex<Option<std::io::Error>>> = Default::default();
    let written_error = |e: PolarsError| -> Error {
        match last_io.lock().ok().and_then(|mut g| g.take()) {
            Some(io) => crate::io::table::write_failure(path, &io),
            None => Error::File { path: path.display().to_string(), message: e.to_string() },
        }
    };
    let mut failed: Option<Error> = None;
    let mut summary = None;
    let written = crate::io::table::write_atomically(path, |f| {
        // The writer owns a second handle of the temporary file; write_atomically syncs
        // and renames it when this returns Ok.
        let handle = f.try_clone()?;
        let mut handle = Some(handle);
        let mut writer: Option<BatchedWriter<Recording>> = None;
        let mut sink = |df: DataFrame| -> Result<()> {
            let w = match &mut writer {
                Some(w) => w,
                None => {
                    let kv: Vec<(String, String)> = units(&df)
                        .into_iter()
                        .map(|(c, u)| (format!("{}{c}", crate::io::table::UNIT_KEY_PREFIX), u))
                        .collect();
                    let meta = (!kv.is_empty()).then(|| KeyValueMetadata::from_static(kv));
                    let file = handle.take().ok_or_else(|| Error::Inconsistent {
                        context: "campaign scan",
                        message: "the output file was already taken".into(),
                    })?;
                    let w = ParquetWriter::new(Recording { file, last: last_io.clone() })
                        .with_key_value_metadata(meta)
                        .batched(&df.schema().clone())
                        .map_err(table_err)?;
                    writer.insert(w)
                }
            };
            w.write_batch(&df).map_err(written_error)
        };
        match reduce_campaign_scan_each(scan, spec, opts, &mut sink) {
            Ok(s) => summary = Some(s),
            Err(e) => {
                failed = Some(e);
                return Err(std::io::Error::other("the reduction failed"));
            }
        }
        match writer {
            Some(w) => w.finish().map(|_| ()).map_err(|e| {
                failed = Some(written_error(e));
                std::io::Error::other("the write failed")
            }),
            None => {
                failed = Some(Error::Inconsistent {
                    context: "campaign scan",
                    message: "no traverse could be reduced; nothing was written".into(),
                });
                Err(std::io::Error::other("nothing to write"))
            }
        }
    });
    if let Some(e) = failed {
        return Err(e);
    }
    written?;
    summary.ok_or_else(|| Error::Inconsistent { context: "campaign scan", message: "no summary".into() })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::campaign::reduce_campaign;
    use crate::campaign::reduction::tests::air_spec;
    use crate::io::table::{write_csv, write_parquet};
    use std::path::PathBuf;

    fn o(batch_rows: usize) -> ScanOptions {
        ScanOptions { batch_rows, cancel: None }
    }

    fn tmp(name: &str) -> PathBuf {
        crate::testdir::fresh("stream", name)
    }

    /// 60 traverses of 4 to 7 points in a 500 mm duct, keys rising; traverse 17 has a
    /// NaN reading (a failure).
    fn readings() -> DataFrame {
        let (mut id, mut h, mut t, mut d, mut y) = (vec![], vec![], vec![], vec![], vec![]);
        for k in 0..60i64 {
            let n = 4 + (k % 4) as usize;
            for i in 0..n {
                id.push(k);
                h.push(if k == 17 && i == 2 { f64::NAN } else { 15.0 + (k % 9) as f64 + i as f64 });
                t.push(12.0 + (k % 5) as f64);
                d.push(500.0);
                y.push((i as f64 + 0.5) / n as f64 * 500.0);
            }
        }
        df!("traverse" => id, "deflection_mm" => h, "fluid_temp_c" => t, "diameter_mm" => d, "position_mm" => y)
            .expect("frame")
    }

    fn parquet_groups(df: &DataFrame, path: &std::path::Path, group: usize) {
        let mut w = df.clone();
        polars_io::prelude::ParquetWriter::new(std::fs::File::create(path).expect("create"))
            .with_row_group_size(Some(group))
            .finish(&mut w)
            .expect("write");
    }

    /// Row groups of 37 rows cut traverses in two; three files cut them again; CSV
    /// batches cut them at other rows: every way, the scan gives the in-memory result.
    #[test]
    fn scans_reduce_as_the_whole_table() {
        let spec = air_spec();
        let df = readings();
        let whole = reduce_campaign(&df, &spec).expect("whole");
        assert_eq!(whole.failures.len(), 1);
        let d = tmp("whole");
        let (a, b) = (df.height() / 3, 2 * df.height() / 3 + 1);
        for (i, (lo, hi)) in [(0, a), (a, b), (b, df.height())].iter().enumerate() {
            parquet_groups(&df.slice(*lo as i64, hi - lo), &d.join(format!("part-{i}.parquet")), 37);
        }
        let csv = tmp("csv");
        write_csv(&df.slice(0, a), &csv.join("a.csv")).expect("csv");
        write_csv(&df.slice(a as i64, df.height() - a), &csv.join("b.csv")).expect("csv");
        for folder in [&d, &csv] {
            let scan = TableScan::open(folder).expect("scan");
            for rows in [1, 37, 50, 100_000] {
                let r = reduce_campaign_scan(&scan, &spec, &o(rows)).expect("scan reduction");
                assert!(
                    r.traverses.equals(&whole.traverses),
                    "{rows} rows a batch:\n{}\n{}",
                    r.traverses,
                    whole.traverses
                );
                assert_eq!(r.failures.len(), 1);
                assert_eq!(r.failures[0].traverse, whole.failures[0].traverse);
                // Row numbers in messages count from the start of the input, as in memory.
                assert_eq!(r.failures[0].message, whole.failures[0].message);
            }
        }
    }

    #[test]
    fn a_traverse_met_twice_is_refused_by_name() {
        let spec = air_spec();
        let df = readings();
        let d = tmp("twice");
        // Traverse 3 again after traverse 40, in another batch and in the same batch.
        let mut again = df.clone();
        let three = df.filter(&df.column("traverse").unwrap().as_materialized_series().equal(3).unwrap()).unwrap();
        again.vstack_mut(&three).unwrap();
        write_parquet(&again, &d.join("t.parquet")).unwrap();
        let scan = TableScan::open(&d.join("t.parquet")).unwrap();
        for rows in [10, 100_000] {
            let e = reduce_campaign_scan(&scan, &spec, &o(rows)).unwrap_err().to_string();
            assert!(e.contains("traverse 3 ") && e.contains("two places") && e.contains("read_table"), "{e}");
        }
        // Text keys out of order but each together are fine.
        let mut text = df.clone();
        let keys: Vec<String> =
            df.column("traverse").unwrap().i64().unwrap().into_no_null_iter().map(|k| format!("T{}", 59 - k)).collect();
        text.with_column(Column::new("traverse".into(), keys)).unwrap();
        write_parquet(&text, &d.join("text.parquet")).unwrap();
        let scan = TableScan::open(&d.join("text.parquet")).unwrap();
        let r = reduce_campaign_scan(&scan, &spec, &o(30)).unwrap();
        assert_eq!(r.traverses.height(), 59);
    }

    #[test]
    fn straight_to_parquet_with_units_and_nothing_on_failure() {
        let spec = air_spec();
        let df = readings();
        let d = tmp("sink");
        write_parquet(&df, &d.join("in.parquet")).unwrap();
        let scan = TableScan::open(&d.join("in.parquet")).unwrap();
        let out = d.join("out").join("traverses.parquet");
        std::fs::create_dir_all(out.parent().unwrap()).unwrap();
        let units = |_: &DataFrame| [("volume_flow_m3_s".to_string(), "m3/s".to_string())].into_iter().collect();
        let s = reduce_campaign_scan_to_parquet(&scan, &spec, &o(50), &out, &units).unwrap();
        assert_eq!((s.traverses, s.failures.len(), s.rows), (59, 1, df.height() as u64));
        let back = crate::io::table::read_parquet(&out).unwrap();
        let whole = reduce_campaign(&df, &spec).unwrap();
        assert!(back.equals(&whole.traverses));
        let mut empty = DataFrame::default();
        let u = crate::io::table::read_units(&out, &mut empty).unwrap();
        assert_eq!(u.get("volume_flow_m3_s").map(String::as_str), Some("m3/s"));
        // A failing reduction leaves the earlier file as it was, and no temporary.
        let before = std::fs::read(&out).unwrap();
        let mut bad = spec.clone();
        bad.columns.fluid_temperature.0 = "no_such_column".into();
        let e = reduce_campaign_scan_to_parquet(&scan, &bad, &o(50), &out, &units).unwrap_err().to_string();
        assert!(e.contains("no_such_column"), "{e}");
        assert_eq!(std::fs::read(&out).unwrap(), before);
        assert_eq!(std::fs::read_dir(out.parent().unwrap()).unwrap().count(), 1);
    }

    #[test]
    fn progress_reaches_the_total() {
        let mut spec = air_spec();
        let seen = std::sync::Arc::new(std::sync::Mutex::new(Vec::new()));
        let s2 = seen.clone();
        spec.progress = Some(crate::progress::Progress::new(move |d, t| s2.lock().unwrap().push((d, t))));
        let d = tmp("progress");
        parquet_groups(&readings(), &d.join("t.parquet"), 40);
        let scan = TableScan::open(&d.join("t.parquet")).unwrap();
        reduce_campaign_scan(&scan, &spec, &o(40)).unwrap();
        // A set cancel flag stops the scan.
        let cancel = std::sync::Arc::new(std::sync::atomic::AtomicBool::new(true));
        let e = reduce_campaign_scan(&scan, &spec, &ScanOptions { batch_rows: 40, cancel: Some(cancel) }).unwrap_err();
        assert_eq!(e, Error::Interrupted { context: "campaign scan" });
        let seen = seen.lock().unwrap();
        let n = readings().height() as u64;
        assert!(seen.len() > 5);
        assert_eq!(seen.last(), Some(&(n, n)));
    }
}
