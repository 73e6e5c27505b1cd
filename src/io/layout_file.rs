//! `layout.csv`: a ranked sensor layout as written by the planner and read back for
//! re-scoring. Columns `rank,candidate,kind,x,y,marginal_gain,cumulative_criterion,
//! cumulative_cost,kept` (the second coordinate is z on vertical-slice sites). Only
//! `candidate` and `kind` are required, so a user can hand-write a layout; a missing or empty
//! number reads as NaN ("not given"), a missing rank as the row number, a missing `kept` as
//! true. Resolving ids against a site is the caller's job; this file only reads and writes.

use std::path::Path;

use super::atomic::write_atomic;
use super::csv_in::CsvTable;
use super::IoError;

/// The columns of `layout.csv`, in the order they are written.
pub const LAYOUT_COLUMNS: [&str; 9] = [
    "rank",
    "candidate",
    "kind",
    "x",
    "y",
    "marginal_gain",
    "cumulative_criterion",
    "cumulative_cost",
    "kept",
];

/// One chosen (candidate, kind) of a layout.
#[derive(Debug, Clone, PartialEq)]
pub struct LayoutRow {
    /// 1-based order in which the planner chose it.
    pub rank: usize,
    /// Candidate id from `candidates.csv`.
    pub candidate: String,
    /// Kind name from `[[kinds]]`.
    pub kind: String,
    /// Mount position, m (second coordinate is z on "xz" sites); NaN when not given.
    pub x: f64,
    pub y: f64,
    /// Criterion gain from adding this sensor; NaN when not given.
    pub marginal_gain: f64,
    /// Criterion value with the sensors up to this rank; NaN when not given.
    pub cumulative_criterion: f64,
    /// Cost of the sensors up to this rank, site currency; NaN when not given.
    pub cumulative_cost: f64,
    /// `false` for a sensor listed but dropped (for instance a failure study).
    pub kept: bool,
}

/// Reads a layout; rows keep file order. Duplicate (candidate, kind) pairs are refused.
pub fn read_layout_csv(path: &Path) -> Result<Vec<LayoutRow>, IoError> {
    layout_from_table(&CsvTable::read(path)?)
}

/// [`read_layout_csv`] on file content already in memory; `path` only names the file in
/// messages.
pub fn parse_layout_csv(path: &Path, bytes: &[u8]) -> Result<Vec<LayoutRow>, IoError> {
    layout_from_table(&CsvTable::parse(path, bytes)?)
}

fn layout_from_table(t: &CsvTable) -> Result<Vec<LayoutRow>, IoError> {
    let optional: Vec<&str> = LAYOUT_COLUMNS
        .iter()
        .copied()
        .filter(|c| *c != "candidate" && *c != "kind")
        .collect();
    t.check_columns(&["candidate", "kind"], &optional)?;
    let (c_candidate, c_kind) = (t.col_req("candidate")?, t.col_req("kind")?);
    let number =
        |row: usize, name: &str, what: &str| t.opt_number(row, t.col(name), what, f64::NAN);
    let mut rows: Vec<LayoutRow> = Vec::with_capacity(t.n_rows());
    for row in 0..t.n_rows() {
        let candidate = t.text(row, c_candidate).to_string();
        if candidate.is_empty() {
            return Err(t.err(row, c_candidate, "empty cell, expected a candidate id"));
        }
        let kind = t.text(row, c_kind).to_string();
        if kind.is_empty() {
            return Err(t.err(row, c_kind, "empty cell, expected a kind name"));
        }
        if let Some(first) = rows
            .iter()
            .position(|r| r.candidate == candidate && r.kind == kind)
        {
            return Err(t.err(
                row,
                c_candidate,
                format!(
                    "`{candidate}` with kind `{kind}` already listed in row {}",
                    first + 1
                ),
            ));
        }
        let rank = match t.col("rank") {
            Some(c) if !t.text(row, c).is_empty() => {
                let text = t.text(row, c);
                text.parse::<usize>()
                    .ok()
                    .filter(|&r| r >= 1)
                    .ok_or_else(|| {
                        t.err(row, c, format!("found `{text}`, expected a rank 1, 2, ..."))
                    })?
            }
            _ => row + 1,
        };
        let kept = match t.col("kept") {
            Some(c) => match t.text(row, c).to_lowercase().as_str() {
                "" | "true" | "1" | "yes" => true,
                "false" | "0" | "no" => false,
                other => {
                    return Err(t.err(row, c, format!("found `{other}`, expected true or false")))
                }
            },
            None => true,
        };
        rows.push(LayoutRow {
            rank,
            candidate,
            kind,
            x: number(row, "x", "a coordinate in m")?,
            y: number(row, "y", "a coordinate in m")?,
            marginal_gain: number(row, "marginal_gain", "a criterion gain")?,
            cumulative_criterion: number(row, "cumulative_criterion", "a criterion value")?,
            cumulative_cost: number(row, "cumulative_cost", "a cost")?,
            kept,
        });
    }
    Ok(rows)
}

/// Writes a layout atomically; NaN numbers become empty cells, so reading gives them back.
pub fn write_layout_csv(path: &Path, rows: &[LayoutRow]) -> Result<(), IoError> {
    write_atomic(path, |w| write_layout_records(w, rows))
}

/// The text [`write_layout_csv`] writes, for embedding a layout in a report.
pub fn layout_csv_text(rows: &[LayoutRow]) -> String {
    let mut bytes = Vec::new();
    // Writing to memory cannot fail.
    let _ = write_layout_records(&mut bytes, rows);
    String::from_utf8_lossy(&bytes).into_owned()
}

fn write_layout_records(w: &mut dyn std::io::Write, rows: &[LayoutRow]) -> std::io::Result<()> {
    let cell = |v: f64| {
        if v.is_nan() {
            String::new()
        } else {
            format!("{v}")
        }
    };
    let mut writer = csv::Writer::from_writer(w);
    writer
        .write_record(LAYOUT_COLUMNS)
        .map_err(std::io::Error::other)?;
    for r in rows {
        writer
            .write_record([
                r.rank.to_string(),
                r.candidate.clone(),
                r.kind.clone(),
                cell(r.x),
                cell(r.y),
                cell(r.marginal_gain),
                cell(r.cumulative_criterion),
                cell(r.cumulative_cost),
                r.kept.to_string(),
            ])
            .map_err(std::io::Error::other)?;
    }
    writer.flush()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_trip_and_hand_written() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("layout.csv");
        let rows = vec![
            LayoutRow {
                rank: 1,
                candidate: "mast-a".into(),
                kind: "cup".into(),
                x: 10.0,
                y: 40.0,
                marginal_gain: 3.25,
                cumulative_criterion: 3.25,
                cumulative_cost: 3000.0,
                kept: true,
            },
            LayoutRow {
                rank: 2,
                candidate: "roof, c".into(),
                kind: "lidar".into(),
                x: 0.1 + 0.2,
                y: -1e-300,
                marginal_gain: f64::NAN,
                cumulative_criterion: 4.0,
                cumulative_cost: 63000.0,
                kept: false,
            },
        ];
        write_layout_csv(&path, &rows).unwrap();
        let back = read_layout_csv(&path).unwrap();
        assert_eq!(back.len(), 2);
        assert_eq!(back[0], rows[0]);
        assert_eq!(back[1].candidate, "roof, c");
        // `{}` of f64 prints the shortest string that parses back exactly.
        assert_eq!(back[1].x.to_bits(), (0.1f64 + 0.2).to_bits());
        assert!(back[1].marginal_gain.is_nan());
        assert!(!back[1].kept);

        std::fs::write(&path, "candidate,kind\nmast-b,cup\nmast-a,cup\n").unwrap();
        let hand = read_layout_csv(&path).unwrap();
        assert_eq!((hand[1].rank, hand[1].kept), (2, true));
        assert!(hand[0].x.is_nan());

        std::fs::write(&path, "candidate,kind,cost\nmast-b,cup,1\n").unwrap();
        let e = read_layout_csv(&path).unwrap_err().to_string();
        assert!(e.contains("unknown column `cost`"), "{e}");
        std::fs::write(&path, "candidate,kind\nmast-b,cup\nmast-b,cup\n").unwrap();
        let e = read_layout_csv(&path).unwrap_err().to_string();
        assert!(
            e.contains("row 2 (line 3)") && e.contains("already listed in row 1"),
            "{e}"
        );
        std::fs::write(&path, "rank,candidate\n1,mast-b\n").unwrap();
        let e = read_layout_csv(&path).unwrap_err().to_string();
        assert!(e.contains("missing column `kind`"), "{e}");
    }
}
