//! Reading user CSV tables (`candidates.csv`, `points.csv`, snapshot CSV, layouts) with
//! errors that name the file, the 1-based data row and the column. Columns are matched by
//! header name (surrounding spaces trimmed); unknown columns are refused with a "did you
//! mean" so a typo never silently drops a value. Ragged rows are refused, not padded.

use std::path::{Path, PathBuf};

use super::keys::did_you_mean;
use super::IoError;

/// A whole CSV file as text cells, every row as long as the header.
#[derive(Debug, Clone)]
pub struct CsvTable {
    pub path: PathBuf,
    pub header: Vec<String>,
    pub rows: Vec<Vec<String>>,
}

impl CsvTable {
    pub fn read(path: &Path) -> Result<Self, IoError> {
        let bytes = std::fs::read(path).map_err(|e| IoError::file(path, e))?;
        Self::parse(path, &bytes)
    }

    /// [`CsvTable::read`] on file content already in memory; `path` only names the file in
    /// messages.
    pub fn parse(path: &Path, bytes: &[u8]) -> Result<Self, IoError> {
        let mut reader = csv::ReaderBuilder::new()
            .has_headers(false)
            .flexible(true)
            .trim(csv::Trim::All)
            .from_reader(bytes);
        let mut records = reader.records();
        let header: Vec<String> = match records.next() {
            Some(record) => record
                .map_err(|e| csv_error(path, e))?
                .iter()
                .map(str::to_string)
                .collect(),
            None => {
                return Err(IoError::invalid(
                    path,
                    "header",
                    "empty file; expected a header row",
                ))
            }
        };
        for (col_idx, name) in header.iter().enumerate() {
            if header[..col_idx].contains(name) {
                return Err(IoError::invalid(
                    path,
                    "header",
                    format!("column `{name}` appears twice"),
                ));
            }
        }
        let mut rows = Vec::new();
        for (row_idx, record) in records.enumerate() {
            let record = record.map_err(|e| csv_error(path, e))?;
            if record.len() == 1 && record.get(0) == Some("") {
                continue; // blank line
            }
            if record.len() != header.len() {
                return Err(IoError::invalid(
                    path,
                    format!("row {} (line {})", row_idx + 1, row_idx + 2),
                    format!(
                        "ragged row: found {} fields, expected {} like the header ({})",
                        record.len(),
                        header.len(),
                        header.join(",")
                    ),
                ));
            }
            rows.push(record.iter().map(str::to_string).collect());
        }
        Ok(Self {
            path: path.to_path_buf(),
            header,
            rows,
        })
    }

    pub fn n_rows(&self) -> usize {
        self.rows.len()
    }

    pub fn col(&self, name: &str) -> Option<usize> {
        self.header.iter().position(|h| h == name)
    }

    /// Index of a column that must exist.
    pub fn col_req(&self, name: &str) -> Result<usize, IoError> {
        self.col(name).ok_or_else(|| {
            IoError::invalid(
                &self.path,
                "header",
                format!(
                    "missing column `{name}`; found columns: {}",
                    self.header.join(", ")
                ),
            )
        })
    }

    /// Refuses missing `required` columns and any column outside `required ∪ optional`.
    pub fn check_columns(&self, required: &[&str], optional: &[&str]) -> Result<(), IoError> {
        let known: Vec<&str> = required.iter().chain(optional).copied().collect();
        for name in required {
            if self.col(name).is_none() {
                return Err(IoError::invalid(
                    &self.path,
                    "header",
                    format!(
                        "missing column `{name}`; found columns: {}; required: {}",
                        self.header.join(", "),
                        required.join(", ")
                    ),
                ));
            }
        }
        for name in &self.header {
            if !known.contains(&name.as_str()) {
                return Err(IoError::invalid(
                    &self.path,
                    "header",
                    format!(
                        "unknown column `{name}`{}; expected: {}",
                        did_you_mean(name, known.iter().copied()),
                        known.join(", ")
                    ),
                ));
            }
        }
        Ok(())
    }

    /// "row 3 (line 4), column `x`" for 0-based `row_idx`.
    pub fn place(&self, row_idx: usize, col_idx: usize) -> String {
        format!(
            "row {} (line {}), column `{}`",
            row_idx + 1,
            row_idx + 2,
            self.header[col_idx]
        )
    }

    pub fn err(&self, row_idx: usize, col_idx: usize, message: impl Into<String>) -> IoError {
        IoError::invalid(&self.path, self.place(row_idx, col_idx), message)
    }

    pub fn text(&self, row_idx: usize, col_idx: usize) -> &str {
        &self.rows[row_idx][col_idx]
    }

    /// A finite number in the cell.
    pub fn number(&self, row_idx: usize, col_idx: usize, what: &str) -> Result<f64, IoError> {
        let text = self.text(row_idx, col_idx);
        match text.parse::<f64>() {
            Ok(v) if v.is_finite() => Ok(v),
            Ok(v) => Err(self.err(
                row_idx,
                col_idx,
                format!("found {v}, expected a finite {what}"),
            )),
            Err(_) if text.is_empty() => {
                Err(self.err(row_idx, col_idx, format!("empty cell, expected {what}")))
            }
            Err(_) => Err(self.err(row_idx, col_idx, format!("found `{text}`, expected {what}"))),
        }
    }

    /// A number in an optional column; `default` when the column is absent or the cell empty.
    pub fn opt_number(
        &self,
        row_idx: usize,
        col_idx: Option<usize>,
        what: &str,
        default: f64,
    ) -> Result<f64, IoError> {
        match col_idx {
            Some(c) if !self.text(row_idx, c).is_empty() => self.number(row_idx, c, what),
            _ => Ok(default),
        }
    }
}

fn csv_error(path: &Path, err: csv::Error) -> IoError {
    let place = match err.position() {
        Some(pos) => format!("line {}", pos.line()),
        None => "file".to_string(),
    };
    match err.into_kind() {
        csv::ErrorKind::Io(e) => IoError::file(path, e),
        csv::ErrorKind::Utf8 { err, .. } => {
            IoError::invalid(path, place, format!("not valid UTF-8 text ({err})"))
        }
        other => IoError::invalid(path, place, format!("{other:?}")),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn table(text: &str) -> Result<CsvTable, IoError> {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("t.csv");
        std::fs::write(&path, text).unwrap();
        CsvTable::read(&path)
    }

    #[test]
    fn errors_name_row_and_column() {
        let t = table("id, x ,y\na,1,2\n\nb,zz,3\n").unwrap();
        assert_eq!(t.n_rows(), 2);
        assert_eq!(t.col("x"), Some(1));
        let e = t
            .number(1, 1, "an x coordinate in m")
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("row 2 (line 3), column `x`: found `zz`, expected an x coordinate in m"),
            "{e}"
        );
        let e = t
            .check_columns(&["id", "x", "y", "kinds"], &[])
            .unwrap_err()
            .to_string();
        assert!(e.contains("missing column `kinds`"), "{e}");
        let e = t
            .check_columns(&["id", "x"], &["z"])
            .unwrap_err()
            .to_string();
        assert!(e.contains("unknown column `y`"), "{e}");
        let e = table("a,b\n1,2\n3\n").unwrap_err().to_string();
        assert!(
            e.contains("row 2 (line 3): ragged row: found 1 fields, expected 2"),
            "{e}"
        );
        let e = table("").unwrap_err().to_string();
        assert!(e.contains("empty file"), "{e}");
        let t = table("a\nNaN\n").unwrap();
        assert!(t
            .number(0, 0, "a number")
            .unwrap_err()
            .to_string()
            .contains("finite"));
    }
}
