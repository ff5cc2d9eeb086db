//! Reading a small CSV of field readings into named numeric columns, with
//! errors that name the file, the row and the column.
//!
//! Lines starting with `#` are notes and are skipped. (Tables proper, with
//! Parquet and spreadsheets, come with the script session.)

use std::collections::HashMap;
use std::fmt;

/// A CSV file read into columns of text, by header name.
pub struct Readings {
    /// Name used in messages.
    pub source: String,
    headers: Vec<String>,
    rows: Vec<(usize, Vec<String>)>,
    index: HashMap<String, usize>,
}

/// A problem with a readings file.
#[derive(Debug)]
pub struct ReadingsError(pub String);

impl fmt::Display for ReadingsError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for ReadingsError {}

impl Readings {
    /// Parses CSV text; `source` names it in messages.
    pub fn parse(source: &str, text: &str) -> Result<Self, ReadingsError> {
        let mut reader = csv::ReaderBuilder::new()
            .comment(Some(b'#'))
            .trim(csv::Trim::All)
            .flexible(false)
            .from_reader(text.as_bytes());
        let headers: Vec<String> = reader
            .headers()
            .map_err(|e| ReadingsError(format!("{source}: cannot read the header line: {e}")))?
            .iter()
            .map(str::to_string)
            .collect();
        if headers.iter().all(String::is_empty) {
            return Err(ReadingsError(format!("{source}: the file is empty (no header line)")));
        }
        let mut rows = Vec::new();
        for rec in reader.records() {
            let rec = rec.map_err(|e| {
                let line = e.position().map_or(0, |p| p.line());
                ReadingsError(format!(
                    "{source}, line {line}: malformed row ({e}); every row needs {} fields",
                    headers.len()
                ))
            })?;
            let line = rec.position().map_or(0, |p| p.line() as usize);
            rows.push((line, rec.iter().map(str::to_string).collect()));
        }
        if rows.is_empty() {
            return Err(ReadingsError(format!("{source}: no readings below the header line")));
        }
        let index = headers.iter().enumerate().map(|(i, h)| (h.clone(), i)).collect();
        Ok(Self { source: source.to_string(), headers, rows, index })
    }

    /// Number of readings.
    pub fn len(&self) -> usize {
        self.rows.len()
    }

    /// A text column.
    pub fn text(&self, name: &str) -> Result<Vec<String>, ReadingsError> {
        let i = self.column_index(name)?;
        Ok(self.rows.iter().map(|(_, r)| r[i].clone()).collect())
    }

    /// A numeric column; every cell must be a finite number.
    pub fn numbers(&self, name: &str, unit: &str) -> Result<Vec<f64>, ReadingsError> {
        let i = self.column_index(name)?;
        self.rows
            .iter()
            .map(|(line, r)| {
                let cell = &r[i];
                match cell.parse::<f64>() {
                    Ok(v) if v.is_finite() => Ok(v),
                    _ => Err(ReadingsError(format!(
                        "{}, line {line}, column '{name}' ({unit}): '{cell}' is not a finite number",
                        self.source
                    ))),
                }
            })
            .collect()
    }

    /// The file line of reading `i` (for messages about a row).
    pub fn line(&self, i: usize) -> usize {
        self.rows[i].0
    }

    fn column_index(&self, name: &str) -> Result<usize, ReadingsError> {
        self.index.get(name).copied().ok_or_else(|| {
            ReadingsError(format!(
                "{}: missing column '{name}'; columns present: {}",
                self.source,
                self.headers.join(", ")
            ))
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn errors_name_file_line_and_column() {
        let r = Readings::parse("t.csv", "# note\na,b\n1,2\n3,x\n").unwrap();
        assert_eq!(r.len(), 2);
        let e = r.numbers("b", "mm").unwrap_err().to_string();
        assert_eq!(e, "t.csv, line 4, column 'b' (mm): 'x' is not a finite number");
        let e = r.numbers("c", "mm").unwrap_err().to_string();
        assert_eq!(e, "t.csv: missing column 'c'; columns present: a, b");
        let e = Readings::parse("t.csv", "a,b\n1,2,3\n").err().unwrap().to_string();
        assert!(e.starts_with("t.csv, line 2: malformed row"), "{e}");
        assert!(Readings::parse("e.csv", "").is_err());
        assert!(Readings::parse("h.csv", "a,b\n").is_err());
        let e = Readings::parse("n.csv", "a\nNaN\n").unwrap().numbers("a", "Pa").unwrap_err();
        assert!(e.to_string().contains("'NaN' is not a finite number"));
    }
}
