//! Plain text tables and journals: atomic CSV output of string rows, and an append-only
//! journal of finished work that survives `kill -9` (a torn last line is cut off on reading
//! and before appending).

use std::fs::{self, OpenOptions};
use std::io::{Read, Seek, SeekFrom, Write};
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
        csv::ErrorKind::UnequalLengths {
            pos,
            expected_len,
            len,
        } => IoError::invalid(
            path,
            pos.map_or_else(|| "a row".to_string(), |p| format!("line {}", p.line())),
            format!("found {len} fields, expected {expected_len} (as many as the header)"),
        ),
        csv::ErrorKind::Utf8 { pos, .. } => IoError::invalid(
            path,
            pos.map_or_else(|| "a row".to_string(), |p| format!("line {}", p.line())),
            "found bytes that are not UTF-8, expected text",
        ),
        other => IoError::invalid(path, "csv", format!("{other:?}")),
    }
}

/// Appends one line to a journal and syncs it to disk before returning, so a finished piece
/// of work is recorded even if the process is killed right after. A torn last line (a kill
/// in the middle of the previous append) is cut off first, so the new line starts on a line
/// of its own.
pub fn append_journal_line(path: &Path, line: &str) -> Result<(), IoError> {
    assert!(!line.contains('\n'), "journal lines are single lines");
    if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
        fs::create_dir_all(dir).map_err(|e| IoError::file(dir, e))?;
    }
    let mut file = OpenOptions::new()
        .create(true)
        .read(true)
        .append(true)
        .open(path)
        .map_err(|e| IoError::file(path, e))?;
    cut_torn_tail(&mut file).map_err(|e| IoError::file(path, e))?;
    file.write_all(format!("{line}\n").as_bytes())
        .and_then(|()| file.sync_data())
        .map_err(|e| IoError::file(path, e))
}

/// Truncates `file` after its last newline when it does not end with one. Returns whether
/// anything was cut.
fn cut_torn_tail(file: &mut fs::File) -> std::io::Result<bool> {
    let len = file.metadata()?.len();
    if len == 0 {
        return Ok(false);
    }
    let mut last = [0u8; 1];
    file.seek(SeekFrom::Start(len - 1))?;
    file.read_exact(&mut last)?;
    if last[0] == b'\n' {
        return Ok(false);
    }
    // Scan back for the last newline, a block at a time.
    let mut end = len;
    let mut keep = 0;
    let mut block = vec![0u8; 64 * 1024];
    while end > 0 {
        let start = end.saturating_sub(block.len() as u64);
        let chunk = &mut block[..(end - start) as usize];
        file.seek(SeekFrom::Start(start))?;
        file.read_exact(chunk)?;
        if let Some(pos) = chunk.iter().rposition(|&b| b == b'\n') {
            keep = start + pos as u64 + 1;
            break;
        }
        end = start;
    }
    file.set_len(keep)?;
    file.sync_data()?;
    Ok(true)
}

/// Reads the complete lines of a journal. A last line without its newline is a write torn by
/// a kill: it is dropped, and the file is truncated to its last complete line so the next
/// append starts cleanly. A missing journal reads as empty.
pub fn read_journal_lines(path: &Path) -> Result<Vec<String>, IoError> {
    let mut file = match OpenOptions::new().read(true).write(true).open(path) {
        Ok(file) => file,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(Vec::new()),
        Err(e) => return Err(IoError::file(path, e)),
    };
    cut_torn_tail(&mut file).map_err(|e| IoError::file(path, e))?;
    let mut bytes = Vec::new();
    file.seek(SeekFrom::Start(0))
        .and_then(|_| file.read_to_end(&mut bytes))
        .map_err(|e| IoError::file(path, e))?;
    let text = String::from_utf8(bytes).map_err(|e| {
        let line = e.as_bytes()[..e.utf8_error().valid_up_to()]
            .iter()
            .filter(|&&b| b == b'\n')
            .count()
            + 1;
        IoError::invalid(
            path,
            format!("line {line}"),
            "found bytes that are not UTF-8, expected one CSV row per line; the journal is \
             damaged: delete the file to start the study afresh",
        )
    })?;
    Ok(text
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
        // Reading cut the torn tail off the file itself.
        assert_eq!(fs::read_to_string(&path).unwrap(), "a,1\nb,2\n");
    }

    #[test]
    fn append_after_a_torn_tail_starts_a_new_line() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("journal.txt");
        append_journal_line(&path, "a,1").unwrap();
        let mut file = OpenOptions::new().append(true).open(&path).unwrap();
        file.write_all(b"b,2,to").unwrap();
        drop(file);
        append_journal_line(&path, "c,3").unwrap();
        assert_eq!(fs::read_to_string(&path).unwrap(), "a,1\nc,3\n");
        assert_eq!(read_journal_lines(&path).unwrap(), vec!["a,1", "c,3"]);
    }

    #[test]
    fn a_journal_that_is_one_torn_line_reads_empty() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("journal.txt");
        fs::write(&path, "half a li").unwrap();
        assert!(read_journal_lines(&path).unwrap().is_empty());
        assert_eq!(fs::read(&path).unwrap(), b"");
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
