//! Tables read a batch at a time: one file or a folder of files (CSV or Parquet), only the
//! columns a reduction needs, in batches of about a given number of rows.
//!
//! A [`TableScan`] holds what is known before any data is read: the files, their columns
//! and types, the units stored with them (as [`super::table::read_units`] finds them) and,
//! for Parquet, the row count. [`TableScan::batches`] then yields `DataFrame`s in file
//! order. Parquet batches are whole row groups (merged up to the batch size; a row group
//! larger than the batch is one batch); CSV batches are runs of whole lines cut at a line
//! end outside quotes. Memory therefore holds a batch or two, not the table.

use std::collections::BTreeMap;
use std::fs::File;
use std::io::{BufRead, BufReader, Read};
use std::path::{Path, PathBuf};
use std::sync::Arc;

use polars::prelude::*;
use polars_io::SerReader;
use polars_io::prelude::{CsvReadOptions, ParquetReader};

use super::table::{CsvLayout, read_units};
use crate::error::{Error, Result, shorten};

fn file_err(path: &Path, message: impl Into<String>) -> Error {
    Error::File { path: path.display().to_string(), message: message.into() }
}

/// The kind of files a scan reads.
#[derive(Debug, Clone)]
enum Kind {
    /// Parquet files and each file's row-group sizes.
    Parquet(Vec<Vec<usize>>),
    /// CSV files in this layout; the byte offset just past each file's header.
    Csv(CsvLayout, Vec<u64>),
}

/// One file or a folder of files read batch by batch (see the module doc).
#[derive(Debug, Clone)]
pub struct TableScan {
    files: Vec<PathBuf>,
    kind: Kind,
    schema: SchemaRef,
    units: BTreeMap<String, String>,
}

fn extension(path: &Path) -> String {
    path.extension().and_then(|e| e.to_str()).unwrap_or("").to_ascii_lowercase()
}

/// The table files under `dir`, in name order, folders included (hive partitions), hidden
/// entries (`.stagna` run records, temporaries) left out.
fn files_under(dir: &Path, out: &mut Vec<PathBuf>) -> Result<()> {
    let mut entries: Vec<PathBuf> = std::fs::read_dir(dir)
        .map_err(|e| file_err(dir, format!("cannot list the folder: {e}")))?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| !p.file_name().and_then(|n| n.to_str()).is_some_and(|n| n.starts_with('.')))
        .collect();
    entries.sort();
    for p in entries {
        if p.is_dir() {
            files_under(&p, out)?;
        } else if matches!(extension(&p).as_str(), "parquet" | "pq" | "csv" | "txt") && !is_sidecar(&p) {
            out.push(p);
        }
    }
    Ok(())
}

fn is_sidecar(p: &Path) -> bool {
    p.file_name().and_then(|n| n.to_str()).is_some_and(|n| n.ends_with(".units.csv"))
}

impl TableScan {
    /// A scan of one CSV or Parquet file, or of every such file in a folder and its
    /// sub-folders, in name order (all of one format, all with the same columns).
    pub fn open(path: &Path) -> Result<Self> {
        Self::open_with(path, CsvLayout::default())
    }

    /// As [`TableScan::open`], CSV files laid out as `layout` says.
    pub fn open_with(path: &Path, layout: CsvLayout) -> Result<Self> {
        let files = if path.is_dir() {
            let mut v = Vec::new();
            files_under(path, &mut v)?;
            if v.is_empty() {
                return Err(file_err(path, "the folder holds no CSV or Parquet files"));
            }
            v
        } else if path.exists() {
            vec![path.to_path_buf()]
        } else {
            return Err(file_err(path, "no such file or folder"));
        };
        Self::of_files(files, layout)
    }

    /// A scan of these files in this order.
    pub fn of_files(files: Vec<PathBuf>, layout: CsvLayout) -> Result<Self> {
        let first =
            files.first().ok_or_else(|| Error::Inconsistent { context: "scan", message: "no files to scan".into() })?;
        let parquet = matches!(extension(first).as_str(), "parquet" | "pq");
        for f in &files {
            let ok = match extension(f).as_str() {
                "parquet" | "pq" => parquet,
                "csv" | "txt" => !parquet,
                other => {
                    return Err(file_err(f, format!("a scan reads CSV or Parquet files, not '.{other}'")));
                }
            };
            if !ok {
                return Err(file_err(
                    f,
                    format!("a scan reads files of one format; {} is {}", first.display(), extension(first)),
                ));
            }
        }
        let (schema, kind) = if parquet { parquet_schema(&files)? } else { csv_schema(&files, layout)? };
        let mut empty = DataFrame::empty_with_schema(&schema);
        let units = read_units(first, &mut empty)?;
        Ok(Self { files, kind, schema: Arc::new(schema), units })
    }

    /// The files, in the order they are read.
    pub fn files(&self) -> &[PathBuf] {
        &self.files
    }

    /// Column names and types.
    pub fn schema(&self) -> &SchemaRef {
        &self.schema
    }

    /// The units stored with the first file (Parquet metadata or a CSV units sidecar).
    pub fn units(&self) -> &BTreeMap<String, String> {
        &self.units
    }

    /// The row count when the files record it (Parquet), else `None`.
    pub fn rows(&self) -> Option<usize> {
        match &self.kind {
            Kind::Parquet(groups) => Some(groups.iter().flatten().sum()),
            Kind::Csv(..) => None,
        }
    }

    /// Total bytes of the files (the measure of progress through a CSV scan).
    pub fn bytes(&self) -> u64 {
        self.files.iter().filter_map(|f| f.metadata().ok()).map(|m| m.len()).sum()
    }

    /// Batches of the named columns (all columns when `columns` is empty), about
    /// `rows` rows each, in file order. Each item reports its work (rows for Parquet,
    /// bytes for CSV) with the batch.
    pub fn batches(&self, columns: &[String], rows: usize) -> Result<Batches<'_>> {
        for c in columns {
            if self.schema.get(c).is_none() {
                return Err(Error::Inconsistent {
                    context: "scan",
                    message: format!(
                        "missing column '{c}'; the files have: {}",
                        self.schema.iter_names().map(|s| s.as_str()).collect::<Vec<_>>().join(", ")
                    ),
                });
            }
        }
        let columns = if columns.is_empty() {
            self.schema.iter_names().map(|s| s.to_string()).collect()
        } else {
            columns.to_vec()
        };
        Ok(Batches { scan: self, columns, rows: rows.max(1), file: 0, group: 0, offset: 0, csv: None })
    }
}

fn parquet_schema(files: &[PathBuf]) -> Result<(Schema, Kind)> {
    let mut schema: Option<Schema> = None;
    let mut groups = Vec::with_capacity(files.len());
    for f in files {
        let file = File::open(f).map_err(|e| file_err(f, format!("cannot open: {e}")))?;
        let mut r = ParquetReader::new(file);
        let bad =
            |e: PolarsError| file_err(f, format!("not a readable Parquet file: {}", shorten(&e.to_string(), 300)));
        let s = Schema::from_arrow_schema(r.schema().map_err(bad)?.as_ref());
        let md = r.get_metadata().map_err(bad)?;
        groups.push(md.row_groups.iter().map(|g| g.num_rows()).collect());
        match &schema {
            None => schema = Some(s),
            Some(first) if first != &s => {
                return Err(file_err(
                    f,
                    format!(
                        "its columns ({}) differ from the first file's ({}); a scan reads files of one layout",
                        describe(&s),
                        describe(first)
                    ),
                ));
            }
            Some(_) => {}
        }
    }
    Ok((schema.unwrap_or_default(), Kind::Parquet(groups)))
}

fn describe(s: &Schema) -> String {
    s.iter().map(|(n, t)| format!("{n}: {t}")).collect::<Vec<_>>().join(", ")
}

fn csv_options(layout: CsvLayout) -> CsvReadOptions {
    CsvReadOptions::default().map_parse_options(|o| {
        o.with_comment_prefix(Some("#")).with_separator(layout.separator).with_decimal_comma(layout.decimal_comma)
    })
}

/// The byte offset just past the header line (comment and blank lines before it
/// skipped) and the header's raw text.
fn csv_header_end(path: &Path) -> Result<(u64, Vec<u8>)> {
    let file = File::open(path).map_err(|e| file_err(path, format!("cannot open: {e}")))?;
    let mut r = BufReader::new(file);
    let (mut at, mut buf) = (0u64, Vec::new());
    loop {
        buf.clear();
        let n = r.read_until(b'\n', &mut buf).map_err(|e| file_err(path, format!("cannot read: {e}")))?;
        if n == 0 {
            return Err(file_err(path, "empty file: no header row"));
        }
        at += n as u64;
        let line = String::from_utf8_lossy(&buf);
        let t = line.trim();
        if !t.is_empty() && !t.starts_with('#') {
            return Ok((at, buf.clone()));
        }
    }
}

fn csv_schema(files: &[PathBuf], layout: CsvLayout) -> Result<(Schema, Kind)> {
    let first = &files[0];
    // Types as `read_table` infers them: from the first 10 000 rows of the first file, read
    // from the file's head (given the path, polars' reader maps and counts the whole file:
    // 0.9 s and 400 MB for a 546 MiB CSV before the first batch).
    let head = csv_head(first, 10_100)?;
    let sample = csv_options(layout)
        .with_has_header(true)
        .with_n_rows(Some(10_000))
        .with_infer_schema_length(Some(10_000))
        .into_reader_with_file_handle(std::io::Cursor::new(head))
        .finish()
        .map_err(|e| file_err(first, format!("not a readable CSV table: {}", shorten(&e.to_string(), 300))))?;
    if sample.width() == 0 {
        return Err(file_err(first, "no columns"));
    }
    let schema = sample.schema().as_ref().clone();
    let mut ends = Vec::with_capacity(files.len());
    let mut header0: Option<Vec<u8>> = None;
    for f in files {
        let (end, header) = csv_header_end(f)?;
        match &header0 {
            None => header0 = Some(header),
            Some(h) if trim_eol(h) != trim_eol(&header) => {
                return Err(file_err(
                    f,
                    format!(
                        "its header ({}) differs from the first file's ({}); a scan reads files of one layout",
                        String::from_utf8_lossy(trim_eol(&header)),
                        String::from_utf8_lossy(trim_eol(h))
                    ),
                ));
            }
            Some(_) => {}
        }
        ends.push(end);
    }
    Ok((schema, Kind::Csv(layout, ends)))
}

/// The head of a file holding at least `lines` lines, cut after the last whole line
/// (outside quotes); the whole file when it is shorter.
fn csv_head(path: &Path, lines: usize) -> Result<Vec<u8>> {
    let err = |e: std::io::Error| file_err(path, format!("cannot read: {e}"));
    let mut f = BufReader::new(File::open(path).map_err(err)?);
    let mut head = Vec::new();
    let mut step = 1u64 << 20;
    loop {
        let got = (&mut f).take(step).read_to_end(&mut head).map_err(err)?;
        if (got as u64) < step {
            return Ok(head); // the whole file
        }
        if memchr::memchr_iter(b'\n', &head).count() > lines
            && let Some(c) = cut_point(&head)
        {
            head.truncate(c);
            return Ok(head);
        }
        step *= 2;
    }
}

fn trim_eol(b: &[u8]) -> &[u8] {
    let mut e = b.len();
    while e > 0 && matches!(b[e - 1], b'\n' | b'\r') {
        e -= 1;
    }
    &b[..e]
}

/// The frame's columns in the order asked for (readers give them in file order).
fn in_order(df: DataFrame, columns: &[String], path: &Path) -> Result<DataFrame> {
    df.select(columns.iter().map(|s| s.as_str())).map_err(|e| file_err(path, e.to_string()))
}

/// An open CSV file being cut into runs of lines.
struct CsvCursor {
    file: File,
    /// Offset in the file of the next byte not yet read.
    at: u64,
    /// The run being cut: `buf[..filled]` holds bytes read and not yet parsed (it starts
    /// with the part line the last cut left). The buffer is kept from batch to batch and
    /// only grows, so its pages are the process's already and it is never zeroed again.
    buf: Vec<u8>,
    filled: usize,
    done: bool,
    /// Shown every byte range read (see [`super::tap`]).
    tap: Option<Arc<dyn super::tap::ReadTap>>,
}

/// Reads `file` from `offset` into `buf` (the whole of it unless the file ends first) and
/// gives the bytes read: large reads in up to four pieces at once on rayon's threads, as
/// the copy from the page cache is a good part of a plain CSV scan's time and one thread
/// copies at a time otherwise. What is read ends at the first piece that comes up short
/// (the end of the file).
fn read_run(file: &File, offset: u64, buf: &mut [u8]) -> std::io::Result<usize> {
    const PIECE: usize = 1 << 20;
    fn fill(file: &File, mut offset: u64, mut buf: &mut [u8]) -> std::io::Result<usize> {
        let mut got = 0;
        while !buf.is_empty() {
            #[cfg(unix)]
            let n = std::os::unix::fs::FileExt::read_at(file, buf, offset);
            #[cfg(windows)]
            let n = std::os::windows::fs::FileExt::seek_read(file, buf, offset);
            match n {
                Ok(0) => break,
                Ok(n) => {
                    got += n;
                    offset += n as u64;
                    buf = &mut buf[n..];
                }
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
                Err(e) => return Err(e),
            }
        }
        Ok(got)
    }
    if buf.len() < 2 * PIECE {
        return fill(file, offset, buf);
    }
    use rayon::prelude::*;
    let size = buf.len().div_ceil(4);
    let got: Vec<(usize, std::io::Result<usize>)> = buf
        .par_chunks_mut(size)
        .enumerate()
        .map(|(k, piece)| (piece.len(), fill(file, offset + (k * size) as u64, piece)))
        .collect();
    let mut total = 0;
    for (len, g) in got {
        let g = g?;
        total += g;
        if g < len {
            break;
        }
    }
    Ok(total)
}

/// The batches of a [`TableScan`]: `(frame, work done by this batch)`.
pub struct Batches<'a> {
    scan: &'a TableScan,
    columns: Vec<String>,
    rows: usize,
    file: usize,
    group: usize,
    offset: usize,
    csv: Option<CsvCursor>,
}

/// Where a run of lines may be cut: after the last line end that lies outside quotes
/// (an even number of `"` before it in `buf`, counting from a line start).
fn cut_point(buf: &[u8]) -> Option<usize> {
    if memchr::memchr(b'"', buf).is_none() {
        return memchr::memrchr(b'\n', buf).map(|i| i + 1);
    }
    let mut inside = false;
    let mut last = None;
    for (i, &b) in buf.iter().enumerate() {
        match b {
            b'"' => inside = !inside,
            b'\n' if !inside => last = Some(i + 1),
            _ => {}
        }
    }
    last
}

impl Batches<'_> {
    fn next_parquet(&mut self, groups: &[Vec<usize>]) -> Option<Result<(DataFrame, u64)>> {
        while self.file < groups.len() && self.group >= groups[self.file].len() {
            self.file += 1;
            self.group = 0;
            self.offset = 0;
        }
        let sizes = groups.get(self.file)?;
        let path = &self.scan.files[self.file];
        let (start, mut n) = (self.offset, 0usize);
        while self.group < sizes.len() && (n == 0 || n + sizes[self.group] <= self.rows) {
            n += sizes[self.group];
            self.group += 1;
        }
        self.offset += n;
        let read = || -> Result<DataFrame> {
            let file = File::open(path).map_err(|e| file_err(path, format!("cannot open: {e}")))?;
            ParquetReader::new(file)
                .with_columns(Some(self.columns.clone()))
                .with_slice(Some((start, n)))
                .finish()
                .map_err(|e| file_err(path, format!("cannot read rows {start}…{}: {}", start + n, e)))
        };
        Some(read().and_then(|df| in_order(df, &self.columns, path)).map(|df| (df, n as u64)))
    }

    fn next_csv(&mut self, layout: CsvLayout, ends: &[u64]) -> Option<Result<(DataFrame, u64)>> {
        loop {
            if self.file >= self.scan.files.len() {
                return None;
            }
            let path = self.scan.files[self.file].clone();
            // Never splitting a line: about 64 bytes a row for small batch sizes; otherwise a
            // sixteenth of the file (so that reading and reducing overlap), from 1 to 8 MiB.
            // Measured on 2 cores: a 10 M-reading CSV (546 MiB) took 1.9 s in 3 MB batches and
            // 1.55 s in 16 MiB ones; a 1 M-reading one (53 MiB) 0.18 s in 3 MB batches and
            // 0.27–0.30 s in 16 MiB ones. With the parser and kernel of 2026-12-04, 8 MiB
            // runs of the 10 M CSV against 16 MiB ones (three A/Bs of 11–15 interleaved
            // runs): task-clock median 1184–1437 against 1267–1443 ms, wall 0.64–0.77
            // against 0.68–0.84 s, peak 150–169 against 182–200 MB.
            let file_len = path.metadata().map_or(0, |m| m.len() as usize);
            let target =
                if self.rows < 4096 { (self.rows * 64).max(4096) } else { (file_len / 16).clamp(1 << 20, 8 << 20) };
            if self.csv.is_none() {
                let at = ends[self.file];
                let file = match File::open(&path) {
                    Ok(file) => file,
                    Err(e) => return Some(Err(file_err(&path, format!("cannot open: {e}")))),
                };
                // A tap sees the lines up to the end of the header first.
                let tap = super::tap::tap_for(&path);
                if let Some(t) = &tap {
                    let mut head = vec![0; at as usize];
                    match read_run(&file, 0, &mut head) {
                        Ok(n) => t.read(0, &head[..n]),
                        Err(e) => return Some(Err(file_err(&path, format!("cannot read: {e}")))),
                    }
                }
                self.csv = Some(CsvCursor { file, at, buf: Vec::new(), filled: 0, done: false, tap });
            }
            let cur = self.csv.as_mut()?;
            let mut got = 0u64;
            let mut want = target;
            let cut = loop {
                if !cur.done && cur.filled < want {
                    if cur.buf.len() < want {
                        cur.buf.resize(want, 0);
                    }
                    let ask = want - cur.filled;
                    match read_run(&cur.file, cur.at, &mut cur.buf[cur.filled..want]) {
                        Ok(k) => {
                            if let Some(t) = &cur.tap {
                                t.read(cur.at, &cur.buf[cur.filled..cur.filled + k]);
                            }
                            got += k as u64;
                            cur.at += k as u64;
                            cur.filled += k;
                            cur.done = k < ask;
                        }
                        Err(e) => return Some(Err(file_err(&path, format!("cannot read: {e}")))),
                    }
                }
                if cur.done {
                    break cur.filled;
                }
                match cut_point(&cur.buf[..cur.filled]) {
                    Some(c) => break c,
                    // One line (or a quoted field) longer than the batch: read on.
                    None => want = cur.filled * 2,
                }
            };
            let run = &cur.buf[..cut];
            let finished = cur.done && cut == cur.filled;
            let parsed = if run.iter().all(|b| b.is_ascii_whitespace()) {
                None
            } else {
                Some(parse_run(run, &self.scan.schema, &self.columns, layout, &path))
            };
            // The part line after the cut goes to the front for the next run.
            cur.buf.copy_within(cut..cur.filled, 0);
            cur.filled -= cut;
            if finished {
                self.csv = None;
                self.file += 1;
            }
            match parsed {
                None => continue,
                Some(r) => return Some(r.map(|df| (df, got))),
            }
        }
    }
}

/// A run of whole CSV lines as a frame of `columns`: Stagna's plain-CSV parser when the run
/// is plain, polars' reader otherwise (whose result and errors the user then gets).
fn parse_run(run: &[u8], schema: &SchemaRef, columns: &[String], layout: CsvLayout, path: &Path) -> Result<DataFrame> {
    if let Some(df) = super::plain_csv::parse(run, schema, columns, layout) {
        return Ok(df);
    }
    csv_options(layout)
        .with_has_header(false)
        .with_schema(Some(schema.clone()))
        .with_columns(Some(columns.iter().map(|c| c.as_str().into()).collect()))
        .into_reader_with_file_handle(std::io::Cursor::new(run.to_vec()))
        .finish()
        .map_err(|e| file_err(path, format!("not a readable CSV table: {}", shorten(&e.to_string(), 300))))
        .and_then(|df| in_order(df, columns, path))
}

impl Batches<'_> {
    /// Hands each batch to `each` in order while a reader thread decodes the next one;
    /// stops with [`Error::Interrupted`] (naming `context`) between batches when `cancel`
    /// is set, and at the first error of either side.
    pub fn read_ahead(
        self,
        context: &'static str,
        cancel: Option<&std::sync::atomic::AtomicBool>,
        mut each: impl FnMut(DataFrame, u64) -> Result<()>,
    ) -> Result<()> {
        std::thread::scope(|sc| -> Result<()> {
            let (tx, rx) = std::sync::mpsc::sync_channel(1);
            sc.spawn(move || {
                for b in self {
                    let stop = b.is_err();
                    if tx.send(b).is_err() || stop {
                        break;
                    }
                }
            });
            for item in rx {
                if cancel.is_some_and(|c| c.load(std::sync::atomic::Ordering::Relaxed)) {
                    return Err(Error::Interrupted { context });
                }
                let (df, work) = item?;
                each(df, work)?;
            }
            Ok(())
        })
    }
}

impl Iterator for Batches<'_> {
    type Item = Result<(DataFrame, u64)>;

    fn next(&mut self) -> Option<Self::Item> {
        let scan = self.scan;
        match &scan.kind {
            Kind::Parquet(groups) => self.next_parquet(groups),
            Kind::Csv(layout, ends) => self.next_csv(*layout, ends),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::table::{write_csv, write_parquet};

    fn tmp(name: &str) -> PathBuf {
        crate::testdir::fresh("scan", name)
    }

    #[test]
    fn runs_are_read_whole_in_pieces_and_end_at_the_end_of_the_file() {
        let d = tmp("read-run");
        let path = d.join("bytes.bin");
        let data: Vec<u8> = (0..(5 << 20) + 123u32).map(|i| (i.wrapping_mul(2_654_435_761) >> 24) as u8).collect();
        std::fs::write(&path, &data).unwrap();
        let f = File::open(&path).unwrap();
        // (offset, buffer): pieces read at once (≥ 2 MiB), the end inside the last piece or
        // an earlier one, a small read, a read past the end.
        for (offset, len) in [(0usize, 4 << 20), (7, 3 << 20), ((3 << 20) + 5, 4 << 20), (11, 1000), (data.len(), 10)] {
            let mut buf = vec![0xAA; len];
            let got = read_run(&f, offset as u64, &mut buf).unwrap();
            let want = len.min(data.len() - offset);
            assert_eq!(got, want, "offset {offset}, {len} bytes asked");
            assert!(buf[..got] == data[offset..offset + got], "offset {offset}, {len} bytes asked");
        }
        std::fs::remove_dir_all(&d).unwrap();
    }

    fn frame(n: usize) -> DataFrame {
        let id: Vec<i64> = (0..n as i64).map(|i| i / 7).collect();
        let x: Vec<f64> = (0..n).map(|i| i as f64 * 0.5).collect();
        let s: Vec<String> = (0..n).map(|i| format!("r\"{i}\"")).collect();
        df!("id" => id, "x" => x, "s" => s).unwrap()
    }

    fn collect(scan: &TableScan, cols: &[&str], rows: usize) -> (DataFrame, usize) {
        let cols: Vec<String> = cols.iter().map(|s| s.to_string()).collect();
        let mut n = 0;
        let mut out: Option<DataFrame> = None;
        for b in scan.batches(&cols, rows).unwrap() {
            let (df, _) = b.unwrap();
            n += 1;
            match &mut out {
                None => out = Some(df),
                Some(o) => {
                    o.vstack_mut(&df).unwrap();
                }
            }
        }
        (out.unwrap(), n)
    }

    #[test]
    fn parquet_and_csv_batches_reassemble_the_table() {
        let d = tmp("whole");
        let df = frame(10_000);
        // Parquet in 10 row groups of 1000 rows, as a writer with that group size makes.
        let pq = d.join("t.parquet");
        let mut w = df.clone();
        polars_io::prelude::ParquetWriter::new(File::create(&pq).unwrap())
            .with_row_group_size(Some(1000))
            .finish(&mut w)
            .unwrap();
        let scan = TableScan::open(&pq).unwrap();
        assert_eq!(scan.rows(), Some(10_000));
        let (back, n) = collect(&scan, &["id", "x"], 2500);
        assert_eq!(n, 5, "row groups merged while they fit the batch size: 2 × 1000 a batch");
        assert!(back.equals(&df.select(["id", "x"]).unwrap()));
        // CSV (quoted fields with quotes inside) cut into many batches.
        let csv = d.join("t.csv");
        write_csv(&df, &csv).unwrap();
        let scan = TableScan::open(&csv).unwrap();
        let (back, n) = collect(&scan, &["s", "x"], 1);
        assert!(std::fs::metadata(&csv).unwrap().len() > 3 * (1 << 16));
        assert!(n > 3, "{n} batches");
        assert!(back.equals(&df.select(["s", "x"]).unwrap()), "{back}\n{}", df.select(["s", "x"]).unwrap());
    }

    #[test]
    fn plain_csv_batches_and_their_fallbacks_reassemble_the_table() {
        // Plain lines (the fast path) in many small batches over two files, the second
        // without a last line end, CRLF in the first; one quoted field in the middle of
        // the second file sends that batch, and only it, to polars' reader.
        let d = tmp("plain");
        let mut a = String::from("id,x,s\r\n");
        let mut b = String::from("id,x,s\n");
        for i in 0..3000 {
            let line = |q: bool| format!("{},{},{}", i / 7, i as f64 * 0.1, if q { "\"q,r\"" } else { "p" });
            a.push_str(&line(false));
            a.push_str("\r\n");
            b.push_str(&line(i == 1500));
            b.push_str(if i + 1 < 3000 { "\n" } else { "" });
        }
        std::fs::write(d.join("a.csv"), &a).unwrap();
        std::fs::write(d.join("b.csv"), &b).unwrap();
        let scan = TableScan::open(&d).unwrap();
        let (back, n) = collect(&scan, &["x", "s", "id"], 1);
        assert!(n > 20, "{n} batches");
        let whole = |text: &str| {
            CsvReadOptions::default()
                .with_has_header(true)
                .into_reader_with_file_handle(std::io::Cursor::new(text.as_bytes().to_vec()))
                .finish()
                .unwrap()
        };
        let mut want = whole(&a);
        want.vstack_mut(&whole(&b)).unwrap();
        assert!(back.equals(&want.select(["x", "s", "id"]).unwrap()), "{back}");
        assert_eq!(back.column("s").unwrap().str().unwrap().get(4500), Some("q,r"));
    }

    #[test]
    fn folders_are_read_in_name_order_and_must_agree() {
        let d = tmp("folder");
        let df = frame(3000);
        for (i, part) in ["b", "a", "c"].iter().enumerate() {
            let sub = d.join(format!("site={part}"));
            std::fs::create_dir_all(&sub).unwrap();
            write_parquet(&df.slice((i * 1000) as i64, 1000), &sub.join("part.parquet")).unwrap();
        }
        std::fs::create_dir_all(d.join(".stagna")).unwrap();
        std::fs::write(d.join(".stagna").join("x.parquet"), b"not parquet").unwrap();
        let scan = TableScan::open(&d).unwrap();
        assert_eq!(scan.files().len(), 3, "hidden folders are left out");
        let (back, _) = collect(&scan, &[], 100_000);
        // site=a holds rows 1000…1999, b 0…999, c 2000…2999.
        let x = back.column("x").unwrap().f64().unwrap().get(0).unwrap();
        assert_eq!(x, 500.0);
        // A file with other columns is refused, naming it.
        write_parquet(&df.select(["id"]).unwrap(), &d.join("site=d.parquet")).unwrap();
        let e = TableScan::open(&d).unwrap_err().to_string();
        assert!(e.contains("site=d.parquet") && e.contains("differ"), "{e}");
        let e = TableScan::open(&d.join("none")).unwrap_err().to_string();
        assert!(e.contains("no such file"), "{e}");
        let e = TableScan::open(&tmp("empty")).unwrap_err().to_string();
        assert!(e.contains("no CSV or Parquet"), "{e}");
        let scan = TableScan::open(&d.join("site=a")).unwrap();
        let e = scan.batches(&["nope".into()], 10).err().unwrap().to_string();
        assert!(e.contains("missing column 'nope'") && e.contains("id, x, s"), "{e}");
    }

    #[test]
    fn cut_points_respect_quotes() {
        assert_eq!(cut_point(b"a,b\n1,2\n3,"), Some(8));
        assert_eq!(cut_point(b"a,\"x\ny\"\n1"), Some(8));
        assert_eq!(cut_point(b"a,\"x\ny"), None);
    }
}
