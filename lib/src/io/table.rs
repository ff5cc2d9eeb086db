//! Reading and writing tables of readings: CSV, Parquet and spreadsheets (xlsx, xls, ods).
//!
//! polars does the parsing and writing; spreadsheets go through calamine. Every
//! failure names the file (and, for spreadsheets, the sheet, row and column). Writes go
//! to a temporary file in the same folder and are renamed into place, so a failed write
//! never leaves a half-written file under the final name.

use std::fs::File;
use std::path::{Path, PathBuf};

use polars::prelude::*;
use polars_io::prelude::{CsvReadOptions, CsvWriter, ParquetReader, ParquetWriter};
use polars_io::{SerReader, SerWriter};

use crate::error::{Error, Result};

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

/// Reads a CSV file with a header row; column types are inferred from the first rows;
/// lines starting with `#` are comments.
pub fn read_csv(path: &Path) -> Result<DataFrame> {
    check_readable(path)?;
    let df = CsvReadOptions::default()
        .with_has_header(true)
        .with_infer_schema_length(Some(10_000))
        .map_parse_options(|o| o.with_comment_prefix(Some("#")))
        .try_into_reader_with_file_path(Some(path.to_path_buf()))
        .and_then(|r| r.finish())
        .map_err(|e| file_err(path, format!("not a readable CSV table: {e}")))?;
    if df.width() == 0 {
        return Err(file_err(path, "no columns"));
    }
    Ok(df)
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
            Err(file_err(path, format!("cannot write: {e}")))
        }
    }
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
    let mut df = df.clone();
    write_atomically(path, |f| ParquetWriter::new(f).finish(&mut df).map(|_| ()).map_err(io_err))
}

/// Writes by extension: `.csv` or `.parquet`.
pub fn write_table(df: &DataFrame, path: &Path) -> Result<()> {
    match extension(path).as_str() {
        "csv" => write_csv(df, path),
        "parquet" | "pq" => write_parquet(df, path),
        other => Err(file_err(path, format!("cannot write '.{other}' tables (csv or parquet)"))),
    }
}

/// A float column of `df` as a contiguous vector (integers converted, nulls as NaN).
pub fn float_column(df: &DataFrame, name: &str) -> Result<Vec<f64>> {
    let col = df.column(name).map_err(|_| Error::Column {
        column: name.to_string(),
        message: format!(
            "no such column; the table has: {}",
            df.get_column_names().iter().map(|s| s.as_str()).collect::<Vec<_>>().join(", ")
        ),
    })?;
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
