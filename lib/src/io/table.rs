//! Reading and writing tables of readings: CSV, Parquet and spreadsheets (xlsx, xls, ods).
//!
//! polars does the parsing and writing; spreadsheets go through calamine. Every
//! failure names the file (and, for spreadsheets, the sheet, row and column). Writes go
//! to a temporary file in the same folder and are renamed into place, so a failed write
//! never leaves a half-written file under the final name.

use std::collections::BTreeMap;
use std::fs::File;
use std::path::{Path, PathBuf};

use polars::prelude::*;
use polars_io::prelude::{CsvReadOptions, CsvWriter, ParquetReader, ParquetWriter};
use polars_io::{SerReader, SerWriter};

use crate::error::{Error, Result, shorten};

fn file_err(path: &Path, message: impl Into<String>) -> Error {
    Error::File { path: path.display().to_string(), message: message.into() }
}

fn check_readable(path: &Path) -> Result<()> {
    match std::fs::metadata(path) {
        Ok(m) if m.is_file() && m.len() == 0 => Err(file_err(path, "the file is empty")),
        Ok(m) if m.is_file() => Ok(()),
        Ok(_) => Err(file_err(path, "not a file")),
        Err(e) => Err(file_err(path, format!("cannot open: {e}"))),
    }
}

/// How a CSV file is laid out.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct CsvLayout {
    /// Field separator (`,` by default; `;` where the decimal mark is a comma).
    pub separator: u8,
    /// Numbers are written with a decimal comma (`12,5`).
    pub decimal_comma: bool,
}

impl Default for CsvLayout {
    fn default() -> Self {
        Self { separator: b',', decimal_comma: false }
    }
}

/// Longest piece of a parser's message quoted in an error (a 50 MB field is not
/// repeated in full).
const MAX_QUOTED: usize = 300;

/// Reads a CSV file with a header row; column types are inferred from the first rows;
/// lines starting with `#` are comments.
pub fn read_csv(path: &Path) -> Result<DataFrame> {
    read_csv_with(path, CsvLayout::default())
}

/// Reads a CSV file laid out as `layout` says. The header must name every column once;
/// a file with a header and no data rows, rows with more or fewer fields than the
/// header, or text that is not UTF-8 are refused with the line to look at.
pub fn read_csv_with(path: &Path, layout: CsvLayout) -> Result<DataFrame> {
    check_readable(path)?;
    let (header_line, header) = csv_header(path, layout)?;
    // A large file in batches (parallel, and for plain lines without polars' per-field
    // dispatch); a small one in one call, which costs less than the scan's set-up.
    let large = std::fs::metadata(path).is_ok_and(|m| m.len() > 4 << 20);
    if large && let Some(df) = read_csv_in_batches(path, layout) {
        return Ok(df);
    }
    // The whole file through polars' reader: a file the batches could not read comes here,
    // so that its error names the line to look at.
    let df = CsvReadOptions::default()
        .with_has_header(true)
        .with_infer_schema_length(Some(10_000))
        .map_parse_options(|o| {
            o.with_comment_prefix(Some("#")).with_separator(layout.separator).with_decimal_comma(layout.decimal_comma)
        })
        .try_into_reader_with_file_path(Some(path.to_path_buf()))
        .and_then(|r| r.finish())
        .map_err(|e| {
            let why = csv_problem(path, layout, header.len(), header_line)
                .unwrap_or_else(|| format!("not a readable CSV table: {}", shorten(&e.to_string(), MAX_QUOTED)));
            file_err(path, why)
        })?;
    if df.width() == 0 {
        return Err(file_err(path, "no columns"));
    }
    if df.height() == 0 {
        return Err(file_err(
            path,
            format!(
                "no data rows: the header (line {header_line}) names {} column(s) and nothing follows",
                header.len()
            ),
        ));
    }
    Ok(df)
}

/// The file read as a scan reads it (types from the first 10 000 rows, as polars' reader
/// infers them; runs of whole lines, plain ones parsed in parallel, the rest by polars'
/// reader) and joined into one chunk a column; `None` when anything fails or nothing is
/// read, for the caller to read the file whole and report. On the 10 M-reading bench
/// CSV (546 MiB): see DEVELOPERS.md.
fn read_csv_in_batches(path: &Path, layout: CsvLayout) -> Option<DataFrame> {
    let scan = super::scan::TableScan::of_files(vec![path.to_path_buf()], layout).ok()?;
    let mut out: Option<DataFrame> = None;
    for batch in scan.batches(&[], 1 << 17).ok()? {
        let (df, _) = batch.ok()?;
        match &mut out {
            None => out = Some(df),
            Some(o) => {
                o.vstack_mut_owned(df).ok()?;
            }
        }
    }
    let mut df = out.filter(|d| d.height() > 0)?;
    df.rechunk_mut_par();
    Some(df)
}

/// The header: its line number (from 1) and its names, refusing a repeated name, and a
/// one-column header that holds another likely separator.
fn csv_header(path: &Path, layout: CsvLayout) -> Result<(usize, Vec<String>)> {
    use std::io::{BufRead, BufReader};
    let file = File::open(path).map_err(|e| file_err(path, format!("cannot open: {e}")))?;
    let mut reader = BufReader::new(file);
    let mut buf = Vec::new();
    let mut line_no = 0usize;
    loop {
        buf.clear();
        let n = reader.read_until(b'\n', &mut buf).map_err(|e| file_err(path, format!("cannot read: {e}")))?;
        if n == 0 {
            return Err(file_err(path, "no header row (the file holds only comments or blank lines)"));
        }
        line_no += 1;
        let text = std::str::from_utf8(&buf).map_err(|_| {
            file_err(
                path,
                format!("line {line_no} is not UTF-8 text; save the file as UTF-8 (CSV UTF-8 in spreadsheets)"),
            )
        })?;
        let text = text.trim_start_matches('\u{feff}').trim_end_matches(['\n', '\r']);
        if text.trim().is_empty() || text.starts_with('#') {
            continue;
        }
        let sep = layout.separator as char;
        let names: Vec<String> = text.split(sep).map(|n| n.trim().trim_matches('"').to_string()).collect();
        if names.len() == 1 {
            for (other, name) in [(';', "semicolons"), ('\t', "tabs"), (',', "commas"), ('|', "bars")] {
                if other != sep && text.contains(other) {
                    let hint = if other == ';' {
                        "; files from decimal-comma locales often are: read_csv(path, #{separator: \";\", decimal_comma: true})"
                    } else {
                        ""
                    };
                    return Err(file_err(
                        path,
                        format!(
                            "line {line_no}: the header is one column but is separated by {name}, not '{sep}'; give the separator{hint}"
                        ),
                    ));
                }
            }
        }
        let mut seen = std::collections::HashSet::new();
        if let Some(dup) = names.iter().find(|n| !seen.insert(n.as_str())) {
            return Err(file_err(
                path,
                format!(
                    "line {line_no}: the header names column '{}' more than once; give each column its own name",
                    shorten(dup, 80)
                ),
            ));
        }
        return Ok((line_no, names));
    }
}

/// After a parser failure: the first line whose field count differs from the header's,
/// or that is not UTF-8, with a hint about separators and decimal commas.
fn csv_problem(path: &Path, layout: CsvLayout, fields: usize, header_line: usize) -> Option<String> {
    use std::io::{BufRead, BufReader};
    let reader = BufReader::new(File::open(path).ok()?);
    let sep = layout.separator as char;
    for (i, line) in reader.split(b'\n').enumerate().skip(header_line) {
        let line_no = i + 1;
        let bytes = line.ok()?;
        let Ok(text) = std::str::from_utf8(&bytes) else {
            return Some(format!(
                "line {line_no} is not UTF-8 text; save the file as UTF-8 (CSV UTF-8 in spreadsheets)"
            ));
        };
        let text = text.trim_end_matches('\r');
        if text.trim().is_empty() || text.starts_with('#') {
            continue;
        }
        let mut n = 1;
        let mut quoted = false;
        for c in text.chars() {
            match c {
                '"' => quoted = !quoted,
                c if c == sep && !quoted => n += 1,
                _ => {}
            }
        }
        if n != fields {
            let hint = if sep == ',' && n > fields {
                "; if the numbers are written with decimal commas (12,5), save the file with ';' between fields and read it with #{separator: \";\", decimal_comma: true}"
            } else {
                ""
            };
            return Some(format!(
                "line {line_no} has {n} field(s) where the header has {fields}: {}{hint}",
                shorten(text, 120)
            ));
        }
    }
    None
}

/// Reads a Parquet file.
pub fn read_parquet(path: &Path) -> Result<DataFrame> {
    check_readable(path)?;
    let file = File::open(path).map_err(|e| file_err(path, format!("cannot open: {e}")))?;
    ParquetReader::new(file).finish().map_err(|e| file_err(path, format!("not a readable Parquet file: {e}")))
}

/// Reads one sheet of a workbook (xlsx, xlsm, xls, ods): the first sheet when `sheet`
/// is `None`. The first non-empty row holds the column names; a column whose cells are
/// all numbers (or empty) becomes a float column with NaN for empty cells, any other
/// column becomes text.
pub fn read_spreadsheet(path: &Path, sheet: Option<&str>) -> Result<DataFrame> {
    use calamine::{Data, Reader, open_workbook_auto};
    check_readable(path)?;
    let mut book = open_workbook_auto(path).map_err(|e| file_err(path, format!("not a readable workbook: {e}")))?;
    let names = book.sheet_names();
    let name = match sheet {
        Some(s) => {
            if !names.iter().any(|n| n == s) {
                return Err(file_err(path, format!("no sheet '{s}'; sheets: {}", names.join(", "))));
            }
            s.to_string()
        }
        None => names.first().cloned().ok_or_else(|| file_err(path, "the workbook has no sheets"))?,
    };
    let range = book.worksheet_range(&name).map_err(|e| file_err(path, format!("sheet '{name}': {e}")))?;
    let mut rows = range.rows().skip_while(|r| r.iter().all(|c| matches!(c, Data::Empty)));
    let header = rows.next().ok_or_else(|| file_err(path, format!("sheet '{name}' is empty")))?;
    let headers: Vec<String> = header
        .iter()
        .enumerate()
        .map(|(i, c)| match c {
            Data::Empty => format!("column_{}", i + 1),
            other => other.to_string().trim().to_string(),
        })
        .collect();
    let body: Vec<&[Data]> = rows.filter(|r| !r.iter().all(|c| matches!(c, Data::Empty))).collect();
    let mut columns = Vec::with_capacity(headers.len());
    for (j, h) in headers.iter().enumerate() {
        let cells = body.iter().map(|r| r.get(j).unwrap_or(&Data::Empty));
        let numeric = body.iter().all(|r| matches!(r.get(j), None | Some(Data::Empty | Data::Int(_) | Data::Float(_))));
        let col = if numeric {
            let v: Vec<f64> = cells
                .map(|c| match c {
                    Data::Int(i) => *i as f64,
                    Data::Float(f) => *f,
                    _ => f64::NAN,
                })
                .collect();
            Column::new(h.as_str().into(), v)
        } else {
            let v: Vec<Option<String>> = cells
                .map(|c| match c {
                    Data::Empty => None,
                    Data::Error(e) => Some(format!("#{e:?}")),
                    other => Some(other.to_string()),
                })
                .collect();
            Column::new(h.as_str().into(), v)
        };
        columns.push(col);
    }
    DataFrame::new_infer_height(columns).map_err(|e| file_err(path, format!("sheet '{name}': {e}")))
}

/// Reads a table by the file's extension: `.csv`/`.txt`, `.parquet`/`.pq`, or a workbook
/// (`.xlsx`, `.xlsm`, `.xls`, `.ods`, first sheet).
pub fn read_table(path: &Path) -> Result<DataFrame> {
    if path.is_dir() {
        return Err(file_err(
            path,
            "is a folder, not a table; give one file (csv, parquet, xlsx, xls, ods), or run a script over every file with `stagna run SCRIPT FOLDER/*.csv`",
        ));
    }
    match extension(path).as_str() {
        "csv" | "txt" => read_csv(path),
        "parquet" | "pq" => read_parquet(path),
        "xlsx" | "xlsm" | "xlsb" | "xls" | "ods" => read_spreadsheet(path, None),
        other => Err(file_err(path, format!("unknown table format '.{other}' (csv, parquet, xlsx, xls, ods)"))),
    }
}

fn extension(path: &Path) -> String {
    path.extension().and_then(|e| e.to_str()).unwrap_or("").to_ascii_lowercase()
}

static TEMP_COUNTER: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(0);

/// The ending of the temporary files [`write_atomically`] writes: `.NAME.PID-N.stagna-tmp`.
pub const TEMP_SUFFIX: &str = ".stagna-tmp";

/// Removes the temporary files that writers killed mid-write (SIGKILL, power loss) left
/// in `dir` and its subfolders: files named `.NAME.PID-N.stagna-tmp` whose process no
/// longer runs (on systems without `/proc`, any such file older than an hour). Returns
/// how many were removed; folders that cannot be read are passed over.
pub fn remove_stale_temporaries(dir: &Path) -> usize {
    let mut removed = 0;
    let Ok(entries) = std::fs::read_dir(dir) else { return 0 };
    for e in entries.flatten() {
        let path = e.path();
        let Ok(ft) = e.file_type() else { continue };
        if ft.is_dir() {
            removed += remove_stale_temporaries(&path);
            continue;
        }
        let name = e.file_name().to_string_lossy().to_string();
        let Some(stem) = name.strip_suffix(TEMP_SUFFIX).filter(|_| name.starts_with('.')) else { continue };
        let pid = stem.rsplit('.').next().and_then(|t| t.split('-').next()).and_then(|p| p.parse::<u32>().ok());
        let Some(pid) = pid else { continue };
        let running = if Path::new("/proc/self").exists() {
            pid == std::process::id() || Path::new("/proc").join(pid.to_string()).exists()
        } else {
            e.metadata()
                .and_then(|m| m.modified())
                .ok()
                .and_then(|t| t.elapsed().ok())
                .is_none_or(|age| age < std::time::Duration::from_secs(3600))
        };
        if !running && std::fs::remove_file(&path).is_ok() {
            removed += 1;
        }
    }
    removed
}

/// Writes `bytes` to `path` through a temporary file in the same folder and a rename.
pub fn write_atomically(path: &Path, write: impl FnOnce(&mut File) -> std::io::Result<()>) -> Result<()> {
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => PathBuf::from("."),
    };
    let name = path.file_name().ok_or_else(|| file_err(path, "not a file name"))?.to_string_lossy().to_string();
    // Unique per writer: the process id and a per-process counter, so that parallel
    // writers (threads of one run, or several runs) never share a temporary file.
    let n = TEMP_COUNTER.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
    let tmp = dir.join(format!(".{name}.{}-{n}{TEMP_SUFFIX}", std::process::id()));
    let result = File::create(&tmp).and_then(|mut f| {
        write(&mut f)?;
        f.sync_all()
    });
    match result.and_then(|()| std::fs::rename(&tmp, path)) {
        Ok(()) => Ok(()),
        Err(e) => {
            let _ = std::fs::remove_file(&tmp);
            Err(write_failure(path, &e))
        }
    }
}

/// The error of a failed write to `path`, saying so when the disk (or a size limit) is full.
pub fn write_failure(path: &Path, e: &std::io::Error) -> Error {
    // Writers that go through polars report the system's error as text.
    let text = e.to_string();
    let full = matches!(
        e.kind(),
        std::io::ErrorKind::StorageFull | std::io::ErrorKind::FileTooLarge | std::io::ErrorKind::QuotaExceeded
    ) || ["(os error 28)", "(os error 27)", "(os error 122)"].iter().any(|c| text.contains(c));
    let hint = if full {
        "; the disk (or a size limit on it) is full: free space or write elsewhere. Nothing under this name was \
         changed (an earlier file stays as it was)"
    } else {
        ""
    };
    file_err(path, format!("cannot write: {e}{hint}"))
}

fn io_err(e: PolarsError) -> std::io::Error {
    std::io::Error::other(e.to_string())
}

/// Writes a CSV file (header row, `.` decimal point).
pub fn write_csv(df: &DataFrame, path: &Path) -> Result<()> {
    let mut df = df.clone();
    write_atomically(path, |f| CsvWriter::new(f).include_header(true).finish(&mut df).map_err(io_err))
}

/// Writes a Parquet file (zstd compression).
pub fn write_parquet(df: &DataFrame, path: &Path) -> Result<()> {
    write_parquet_with_units(df, path, &BTreeMap::new())
}

/// Key of a column's unit in a Parquet file's key-value metadata: `stagna.unit:<column>`.
pub const UNIT_KEY_PREFIX: &str = "stagna.unit:";

/// Writes a Parquet file with each column's unit in the file's key-value metadata
/// (`stagna.unit:<column>` = unit), so that the units travel with the data.
pub fn write_parquet_with_units(df: &DataFrame, path: &Path, units: &BTreeMap<String, String>) -> Result<()> {
    let mut df = df.clone();
    let kv: Vec<(String, String)> = units.iter().map(|(c, u)| (format!("{UNIT_KEY_PREFIX}{c}"), u.clone())).collect();
    let meta = (!kv.is_empty()).then(|| polars_io::parquet::write::KeyValueMetadata::from_static(kv));
    write_atomically(path, |f| {
        ParquetWriter::new(f).with_key_value_metadata(meta).finish(&mut df).map(|_| ()).map_err(io_err)
    })
}

/// Writes an Excel workbook (one sheet, "readings") with the units in the header row
/// (`name [unit]`, the unit as the parser spells it, so that it reads back): numeric
/// columns as numbers, other columns as text, missing values as empty cells.
pub fn write_xlsx(df: &DataFrame, path: &Path, units: &BTreeMap<String, String>) -> Result<()> {
    use rust_xlsxwriter::{Format, Workbook};
    let xerr = |e: rust_xlsxwriter::XlsxError| file_err(path, format!("cannot write the workbook: {e}"));
    let mut book = Workbook::new();
    let sheet = book.add_worksheet();
    sheet.set_name("readings").map_err(xerr)?;
    let bold = Format::new().set_bold();
    for (j, col) in df.columns().iter().enumerate() {
        let j = u16::try_from(j).map_err(|_| file_err(path, "more than 65 535 columns"))?;
        let name = col.name().to_string();
        let header = match units.get(&name) {
            Some(u) => format!("{name} [{u}]"),
            None => name.clone(),
        };
        sheet.write_string_with_format(0, j, &header, &bold).map_err(xerr)?;
        if col.dtype().is_primitive_numeric() {
            let v = col.cast(&DataType::Float64).map_err(|e| file_err(path, e.to_string()))?;
            for (i, x) in v.f64().map_err(|e| file_err(path, e.to_string()))?.iter().enumerate() {
                if let Some(x) = x.filter(|x| x.is_finite()) {
                    sheet.write_number(i as u32 + 1, j, x).map_err(xerr)?;
                }
            }
        } else {
            let v = col.cast(&DataType::String).map_err(|e| file_err(path, e.to_string()))?;
            for (i, x) in v.str().map_err(|e| file_err(path, e.to_string()))?.iter().enumerate() {
                if let Some(x) = x {
                    sheet.write_string(i as u32 + 1, j, x).map_err(xerr)?;
                }
            }
        }
    }
    let bytes = book.save_to_buffer().map_err(xerr)?;
    write_atomically(path, |f| std::io::Write::write_all(f, &bytes))
}

/// A header of the form `name [unit]`: the name and the unit text.
pub fn split_unit_header(header: &str) -> Option<(&str, &str)> {
    let h = header.trim();
    let open = h.rfind(" [")?;
    let unit = h[open + 2..].strip_suffix(']')?;
    (!unit.is_empty() && open > 0).then(|| (h[..open].trim(), unit.trim()))
}

/// The units sidecar of a CSV file: `<path>.units.csv` with columns `column,unit`.
pub fn units_sidecar(path: &Path) -> PathBuf {
    let mut p = path.as_os_str().to_owned();
    p.push(".units.csv");
    PathBuf::from(p)
}

/// The units stored with a table read from `path`: a Parquet file's key-value
/// metadata, a CSV file's sidecar (`<path>.units.csv`) when there is one, or a
/// workbook's `name [unit]` headers (those columns of `df` are renamed to `name`).
/// Empty when none are stored; the units are returned as written, unchecked.
pub fn read_units(path: &Path, df: &mut DataFrame) -> Result<BTreeMap<String, String>> {
    let mut out = BTreeMap::new();
    match extension(path).as_str() {
        "xlsx" | "xlsm" | "xlsb" | "xls" | "ods" => {
            let names: Vec<String> = df.get_column_names().iter().map(|s| s.to_string()).collect();
            for old in names {
                if let Some((name, unit)) = split_unit_header(&old)
                    && df.column(name).is_err()
                {
                    let (name, unit) = (name.to_string(), unit.to_string());
                    df.rename(&old, name.as_str().into()).map_err(|e| file_err(path, e.to_string()))?;
                    out.insert(name, unit);
                }
            }
        }
        "parquet" | "pq" => {
            let file = File::open(path).map_err(|e| file_err(path, format!("cannot open: {e}")))?;
            let mut reader = ParquetReader::new(file);
            let meta =
                reader.get_metadata().map_err(|e| file_err(path, format!("not a readable Parquet file: {e}")))?;
            for kv in meta.key_value_metadata().iter().flatten() {
                if let (Some(col), Some(unit)) = (kv.key.strip_prefix(UNIT_KEY_PREFIX), kv.value.as_ref()) {
                    out.insert(col.to_string(), unit.clone());
                }
            }
        }
        "csv" | "txt" => {
            let side = units_sidecar(path);
            if side.is_file() {
                let df = read_csv(&side)?;
                let (c, u) = (df.column("column"), df.column("unit"));
                let (Ok(c), Ok(u)) = (c, u) else {
                    return Err(file_err(&side, "a units sidecar has the columns 'column' and 'unit'"));
                };
                let (c, u) = (
                    c.str().map_err(|e| file_err(&side, e.to_string()))?,
                    u.str().map_err(|e| file_err(&side, e.to_string()))?,
                );
                for (c, u) in c.iter().zip(u.iter()) {
                    if let (Some(c), Some(u)) = (c, u) {
                        out.insert(c.to_string(), u.to_string());
                    }
                }
            }
        }
        _ => {}
    }
    Ok(out)
}

/// Writes by extension: `.csv` or `.parquet`.
pub fn write_table(df: &DataFrame, path: &Path) -> Result<()> {
    write_table_with_units(df, path, &BTreeMap::new())
}

/// Writes a table by the file's extension with each column's unit where the format keeps
/// it: Parquet key-value metadata, the workbook's header row, or for CSV the sidecar
/// [`units_sidecar`] (written only when there are units). [`read_units`] reads them back.
pub fn write_table_with_units(df: &DataFrame, path: &Path, units: &BTreeMap<String, String>) -> Result<()> {
    match extension(path).as_str() {
        "csv" => {
            write_csv(df, path)?;
            if units.is_empty() {
                return Ok(());
            }
            let sidecar = DataFrame::new_infer_height(vec![
                Column::new("column".into(), units.keys().cloned().collect::<Vec<_>>()),
                Column::new("unit".into(), units.values().cloned().collect::<Vec<_>>()),
            ])
            .map_err(|e| file_err(path, e.to_string()))?;
            write_csv(&sidecar, &units_sidecar(path))
        }
        "parquet" | "pq" => write_parquet_with_units(df, path, units),
        "xlsx" => write_xlsx(df, path, units),
        other => Err(file_err(path, format!("cannot write '.{other}' tables (csv, parquet or xlsx)"))),
    }
}

/// The column `name` of `df`, or an error listing the columns there are.
fn find_column<'a>(df: &'a DataFrame, name: &str) -> Result<&'a Column> {
    df.column(name).map_err(|_| Error::Column {
        column: name.to_string(),
        message: format!(
            "no such column; the table has: {}",
            df.get_column_names().iter().map(|s| s.as_str()).collect::<Vec<_>>().join(", ")
        ),
    })
}

/// Calls `f` with the values of column `name` as text, read in place (numbers written out;
/// a missing value is `None`), without a string per row.
pub fn with_text_column<T>(
    df: &DataFrame,
    name: &str,
    f: impl FnOnce(&mut dyn Iterator<Item = Option<&str>>) -> Result<T>,
) -> Result<T> {
    let col = find_column(df, name)?;
    let s =
        col.cast(&DataType::String).map_err(|e| Error::Column { column: name.to_string(), message: e.to_string() })?;
    let ca = s.str().map_err(|e| Error::Column { column: name.to_string(), message: e.to_string() })?;
    f(&mut ca.iter())
}

/// A column of `df` as text (numbers written out; a missing value is an error naming
/// its row).
pub fn text_column(df: &DataFrame, name: &str) -> Result<Vec<String>> {
    let col = find_column(df, name)?;
    let s =
        col.cast(&DataType::String).map_err(|e| Error::Column { column: name.to_string(), message: e.to_string() })?;
    let ca = s.str().map_err(|e| Error::Column { column: name.to_string(), message: e.to_string() })?;
    ca.iter()
        .enumerate()
        .map(|(i, v)| {
            v.map(str::to_string).ok_or_else(|| Error::Column {
                column: name.to_string(),
                message: format!("row {}: missing value", i + 1),
            })
        })
        .collect()
}

/// Writes `df` as hive-partitioned Parquet under `root`: one file
/// `root/<col>=<value>/…/<name>.parquet` per combination of the `by` columns' values, those
/// columns left out of the files (engines that read hive partitions — DuckDB's
/// `read_parquet(..., hive_partitioning = true)`, polars' `scan_parquet(...,
/// hive_partitioning=True)` — restore them from the path), each file with its columns'
/// units in its metadata and written through a temporary file and a rename. Values must
/// be path-safe (letters, digits, `.`, `-`, `_`, not starting with `.`); `name` likewise.
/// Returns the files written, in partition order.
pub fn write_hive_partitioned(
    df: &DataFrame,
    root: &Path,
    by: &[String],
    name: &str,
    units: &BTreeMap<String, String>,
) -> Result<Vec<PathBuf>> {
    let safe = |v: &str| {
        !v.is_empty() && !v.starts_with('.') && v.chars().all(|c| c.is_ascii_alphanumeric() || ".-_".contains(c))
    };
    if !safe(name) {
        return Err(Error::Inconsistent {
            context: "partitioned write",
            message: format!("file name '{name}' must be letters, digits, '.', '-' or '_' (not starting with '.')"),
        });
    }
    if by.is_empty() {
        return Err(Error::Inconsistent {
            context: "partitioned write",
            message: "give at least one column to partition by".into(),
        });
    }
    let keys: Vec<Vec<String>> = by.iter().map(|c| text_column(df, c)).collect::<Result<_>>()?;
    let mut groups: BTreeMap<Vec<String>, Vec<IdxSize>> = BTreeMap::new();
    for row in 0..df.height() {
        let key: Vec<String> = keys.iter().map(|k| k[row].clone()).collect();
        for (c, v) in by.iter().zip(&key) {
            if !safe(v) {
                return Err(Error::Column {
                    column: c.clone(),
                    message: format!(
                        "row {}: value '{v}' cannot name a partition folder (letters, digits, '.', '-', '_')",
                        row + 1
                    ),
                });
            }
        }
        groups.entry(key).or_default().push(row as IdxSize);
    }
    let keep: Vec<String> = df.get_column_names().iter().map(|c| c.to_string()).filter(|c| !by.contains(c)).collect();
    let units: BTreeMap<String, String> =
        units.iter().filter(|(c, _)| keep.contains(c)).map(|(c, u)| (c.clone(), u.clone())).collect();
    let mut written = Vec::new();
    for (key, rows) in groups {
        let idx = IdxCa::from_vec("idx".into(), rows);
        let part = df
            .take(&idx)
            .and_then(|p| p.select(keep.iter().map(|c| c.as_str())))
            .map_err(|e| Error::Inconsistent { context: "partitioned write", message: e.to_string() })?;
        let mut dir = root.to_path_buf();
        for (c, v) in by.iter().zip(&key) {
            dir.push(format!("{c}={v}"));
        }
        std::fs::create_dir_all(&dir)
            .map_err(|e| Error::File { path: dir.display().to_string(), message: e.to_string() })?;
        let path = dir.join(format!("{name}.parquet"));
        write_parquet_with_units(&part, &path, &units)?;
        written.push(path);
    }
    Ok(written)
}

/// A float column of `df` as a contiguous vector (integers converted, nulls as NaN).
pub fn float_column(df: &DataFrame, name: &str) -> Result<Vec<f64>> {
    let col = find_column(df, name)?;
    if !col.dtype().is_primitive_numeric() {
        return Err(Error::Column {
            column: name.to_string(),
            message: format!("holds {} values, not numbers", col.dtype()),
        });
    }
    let s =
        col.cast(&DataType::Float64).map_err(|e| Error::Column { column: name.to_string(), message: e.to_string() })?;
    let ca = s.f64().map_err(|e| Error::Column { column: name.to_string(), message: e.to_string() })?;
    Ok(ca.iter().map(|v| v.unwrap_or(f64::NAN)).collect())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn tmp(name: &str) -> PathBuf {
        let d = std::env::temp_dir().join(format!("stagna-table-{}", std::process::id()));
        std::fs::create_dir_all(&d).unwrap();
        d.join(name)
    }

    #[test]
    fn csv_read_in_batches_equals_the_whole_file_read() {
        // Files larger than a batch: one with a comment before the header, a quoted field
        // with a separator inside in every batch and empty fields (nulls), so polars' reader
        // reads every batch; one plain with CRLF line ends, for the fast path; and a small
        // one, read whole. The oracle is polars' reader over the whole file, as read_csv
        // read before.
        let mut big = String::from("# logged by a test\nid,x,s,n\n");
        let mut crlf = String::from("id,x,s,n\r\n");
        for i in 0..300_000i64 {
            let s = if i % 1000 == 0 { "\"a,b\"" } else { "p" };
            let n = if i % 777 == 0 { "" } else { "1.5" };
            big.push_str(&format!("{},{},{s},{n}\n", i / 20, i as f64 * 0.01));
            crlf.push_str(&format!("{},{},p,{}\r\n", i / 20, i as f64 * 0.01, i % 9));
        }
        for (name, text) in [("big.csv", big), ("crlf.csv", crlf), ("small.csv", "a,b\n1,x\n2,y\n".to_string())] {
            let p = tmp(name);
            std::fs::write(&p, &text).unwrap();
            let ours = read_csv(&p).unwrap();
            let whole = CsvReadOptions::default()
                .with_has_header(true)
                .with_infer_schema_length(Some(10_000))
                .map_parse_options(|o| o.with_comment_prefix(Some("#")))
                .try_into_reader_with_file_path(Some(p.clone()))
                .and_then(|r| r.finish())
                .unwrap();
            assert_eq!(ours.schema(), whole.schema(), "{name}");
            assert!(ours.equals_missing(&whole), "{name}");
            assert!(ours.columns().iter().all(|c| c.n_chunks() == 1), "{name}: one chunk a column");
        }
    }

    #[test]
    fn csv_and_parquet_round_trip() {
        let df = DataFrame::new_infer_height(vec![
            Column::new("point".into(), ["A1", "A2"]),
            Column::new("h_mm".into(), [12.5, 14.0]),
        ])
        .unwrap();
        for ext in ["csv", "parquet"] {
            let p = tmp(&format!("rt.{ext}"));
            write_table(&df, &p).unwrap();
            let back = read_table(&p).unwrap();
            assert_eq!(float_column(&back, "h_mm").unwrap(), vec![12.5, 14.0]);
        }
    }

    #[test]
    fn stale_temporaries_of_dead_writers_are_removed_and_live_ones_kept() {
        // Regression (issue 16): a SIGKILL during a write left a hidden temporary behind.
        let d = std::env::temp_dir().join(format!("stagna-stale-{}", std::process::id()));
        std::fs::create_dir_all(d.join("sub")).unwrap();
        // u32::MAX - 1 is above any pid_max, so no such process runs.
        let dead = d.join("sub").join(format!(".out.csv.{}-0{TEMP_SUFFIX}", u32::MAX - 1));
        let live = d.join(format!(".out.csv.{}-7{TEMP_SUFFIX}", std::process::id()));
        let other = d.join(".hidden-user-file.tmp");
        for f in [&dead, &live, &other] {
            std::fs::write(f, "x").unwrap();
        }
        assert_eq!(remove_stale_temporaries(&d), 1);
        assert!(!dead.exists() && live.exists() && other.exists());
        std::fs::remove_dir_all(&d).unwrap();
    }

    #[test]
    fn parallel_writers_of_one_file_never_share_a_temporary() {
        let p = tmp("shared.csv");
        let df = DataFrame::new_infer_height(vec![Column::new("a".into(), [1.0, 2.0])]).unwrap();
        std::thread::scope(|s| {
            for _ in 0..8 {
                s.spawn(|| write_table(&df, &p).unwrap());
            }
        });
        assert_eq!(float_column(&read_table(&p).unwrap(), "a").unwrap(), vec![1.0, 2.0]);
    }

    #[test]
    fn malformed_csv_files_are_refused_with_the_line_to_fix() {
        // Regressions (issue 16): a repeated header name was read as h_duplicated_0, a
        // header-only file said "holds str values", ragged rows, wrong separators,
        // decimal commas and invalid UTF-8 gave parser messages without a line, a folder
        // was an "unknown table format '.'", and a huge field was quoted twice in full.
        let case = |name: &str, text: &[u8]| {
            let p = tmp(name);
            std::fs::write(&p, text).unwrap();
            read_csv(&p).unwrap_err().to_string()
        };
        let e = case("dup.csv", b"point,h,h\nA1,1,2\n");
        assert!(e.contains("line 1") && e.contains("'h' more than once"), "{e}");
        let e = case("header-only.csv", b"# site: Example Works\npoint,h\n");
        assert!(e.contains("no data rows") && e.contains("line 2"), "{e}");
        let e = case("ragged.csv", b"point,h\nA1,1\nA2,2,9\nA3,3\n");
        assert!(e.contains("line 3 has 3 field(s) where the header has 2"), "{e}");
        let e = case("semicolons.csv", b"point;h\nA1;12,5\n");
        assert!(e.contains("separated by semicolons") && e.contains("decimal_comma: true"), "{e}");
        let e = case("decimal-commas.csv", b"point,h\nA1,12,5\n");
        assert!(e.contains("line 2") && e.contains("decimal commas"), "{e}");
        let e = case("latin1.csv", b"point,h\nA1,1\nA\xe92,2\n");
        assert!(e.contains("line 3 is not UTF-8"), "{e}");
        let e = read_table(&std::env::temp_dir()).unwrap_err().to_string();
        assert!(e.contains("is a folder"), "{e}");
        let huge = format!("point,h\nA1,{}\nA2,1,2\n", "9".repeat(1_000_000));
        let e = case("huge.csv", huge.as_bytes());
        assert!(e.len() < 2_000, "the message quotes at most a few hundred characters: {} bytes", e.len());
        // The same file laid out with semicolons and decimal commas reads.
        let p = tmp("eu.csv");
        std::fs::write(&p, "point;h\nA1;12,5\nA2;14,0\n").unwrap();
        let df = read_csv_with(&p, CsvLayout { separator: b';', decimal_comma: true }).unwrap();
        assert_eq!(float_column(&df, "h").unwrap(), vec![12.5, 14.0]);
    }

    #[test]
    fn errors_name_the_file_and_column() {
        let p = tmp("empty.csv");
        std::fs::write(&p, "").unwrap();
        assert!(read_csv(&p).unwrap_err().to_string().contains("empty"));
        let e = read_table(Path::new("/nonexistent/x.csv")).unwrap_err().to_string();
        assert!(e.contains("/nonexistent/x.csv"), "{e}");
        let df = DataFrame::new_infer_height(vec![Column::new("a".into(), ["x"])]).unwrap();
        let e = float_column(&df, "b").unwrap_err().to_string();
        assert!(e.contains("'b'") && e.contains("has: a"), "{e}");
        assert!(float_column(&df, "a").unwrap_err().to_string().contains("not numbers"));
    }
}
