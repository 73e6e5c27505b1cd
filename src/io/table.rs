//! Plain text tables and journals: atomic CSV output of string rows, and an append-only
//! journal of finished work that survives `kill -9` (a torn last line is ignored on reading).

use std::fs::{self, OpenOptions};
use std::io::Write;
use std::path::Path;

use super::atomic::write_atomic;
use super::IoError;

/// Writes a CSV file (header + rows) atomically. Fields are quoted where CSV needs it.
pub fn write_csv_table(path: &Path, header: &[&str], rows: &[Vec<String>]) -> Result<(), IoError> {
    write_atomic(path, |w| {
        let mut writer = csv::Writer::from_writer(w);
        writer.write_record(header).map_err(std::io::Error::other)?;
        for row in rows {
            writer.write_record(row).map_err(std::io::Error::other)?;
        }
        writer.flush()
    })
}

/// Reads a CSV table written by [`write_csv_table`]: the header and the rows as strings.
pub fn read_csv_table(path: &Path) -> Result<(Vec<String>, Vec<Vec<String>>), IoError> {
    let mut reader = csv::Reader::from_path(path).map_err(|e| csv_error(path, e))?;
    let header = reader
        .headers()
        .map_err(|e| csv_error(path, e))?
        .iter()
        .map(str::to_string)
        .collect::<Vec<_>>();
    let mut rows = Vec::new();
    for (row_idx, record) in reader.records().enumerate() {
        let record = record.map_err(|e| csv_error(path, e))?;
        if record.len() != header.len() {
            return Err(IoError::invalid(
                path,
                format!("row {}", row_idx + 1),
                format!("found {} fields, expected {}", record.len(), header.len()),
            ));
        }
        rows.push(record.iter().map(str::to_string).collect());
    }
    Ok((header, rows))
}

fn csv_error(path: &Path, err: csv::Error) -> IoError {
    match err.into_kind() {
        csv::ErrorKind::Io(e) => IoError::file(path, e),
        other => IoError::invalid(path, "csv", format!("{other:?}")),
    }
}

/// Appends one line to a journal and syncs it to disk before returning, so a finished piece
/// of work is recorded even if the process is killed right after.
pub fn append_journal_line(path: &Path, line: &str) -> Result<(), IoError> {
    assert!(!line.contains('\n'), "journal lines are single lines");
    if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
        fs::create_dir_all(dir).map_err(|e| IoError::file(dir, e))?;
    }
    let mut file = OpenOptions::new()
        .create(true)
        .append(true)
        .open(path)
        .map_err(|e| IoError::file(path, e))?;
    file.write_all(format!("{line}\n").as_bytes())
        .and_then(|()| file.sync_data())
        .map_err(|e| IoError::file(path, e))
}

/// Reads the complete lines of a journal; a last line without its newline (torn by a kill) is
/// dropped. A missing journal reads as empty.
pub fn read_journal_lines(path: &Path) -> Result<Vec<String>, IoError> {
    let text = match fs::read_to_string(path) {
        Ok(text) => text,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(Vec::new()),
        Err(e) => return Err(IoError::file(path, e)),
    };
    let complete = match text.rfind('\n') {
        Some(end) => &text[..end],
        None => "",
    };
    Ok(complete
        .lines()
        .filter(|l| !l.is_empty())
        .map(str::to_string)
        .collect())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn torn_journal_line_is_dropped() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("journal.txt");
        append_journal_line(&path, "a,1").unwrap();
        append_journal_line(&path, "b,2").unwrap();
        let mut file = OpenOptions::new().append(true).open(&path).unwrap();
        file.write_all(b"c,3 torn").unwrap();
        assert_eq!(read_journal_lines(&path).unwrap(), vec!["a,1", "b,2"]);
    }

    #[test]
    fn csv_table_round_trips() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("t.csv");
        let rows = vec![
            vec!["x".to_string(), "1.5".to_string()],
            vec!["y, z".into(), "2".into()],
        ];
        write_csv_table(&path, &["name", "value"], &rows).unwrap();
        let (header, back) = read_csv_table(&path).unwrap();
        assert_eq!(header, vec!["name", "value"]);
        assert_eq!(back, rows);
    }
}
