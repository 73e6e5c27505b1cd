//! Evaluating a list of cells with a resumable journal and optional sharding.

use std::path::Path;

use crate::io::table::{append_journal_line, read_journal_lines};
use crate::io::IoError;

use super::cells::{Cell, Shard};
use super::tidy::CellOutcome;

#[derive(Debug, thiserror::Error)]
pub enum SweepError {
    #[error(transparent)]
    Io(#[from] IoError),
    /// A journal line could not be read back.
    #[error("{path}: line {line}: {message}; delete the file to start the study afresh")]
    Journal {
        path: std::path::PathBuf,
        line: usize,
        message: String,
    },
    /// A cell failed in the stage named by its source.
    #[error("study cell {key}")]
    Cell {
        key: String,
        #[source]
        source: Box<dyn std::error::Error + Send + Sync>,
    },
    /// Setting up the study failed (basis, sensor blocks, selection problem, model).
    #[error("{stage}")]
    Stage {
        stage: String,
        #[source]
        source: Box<dyn std::error::Error + Send + Sync>,
    },
}

impl SweepError {
    /// A problem the user can fix (a file, or a damaged journal to delete), not a bug.
    pub fn is_bad_input(&self) -> bool {
        matches!(self, SweepError::Io(_) | SweepError::Journal { .. })
    }

    pub fn cell(
        key: impl Into<String>,
        source: impl Into<Box<dyn std::error::Error + Send + Sync>>,
    ) -> Self {
        SweepError::Cell {
            key: key.into(),
            source: source.into(),
        }
    }

    pub fn stage(
        stage: impl Into<String>,
        source: impl Into<Box<dyn std::error::Error + Send + Sync>>,
    ) -> Self {
        SweepError::Stage {
            stage: stage.into(),
            source: source.into(),
        }
    }
}

/// Evaluates one cell: ranks its layout and scores it (`cell_idx` of the outcome is set by
/// the caller). Implementations must derive every
/// random stream from the cell itself (its key) and a master seed, never from call order.
pub trait CellEvaluator {
    fn evaluate(&self, cell: &Cell) -> Result<CellOutcome, SweepError>;
}

/// Evaluates the cells this shard owns, in order, skipping those already recorded in the
/// journal (one tidy CSV row per line) and recording each new one as soon as it finishes.
/// Returns the outcomes of the owned cells in cell order.
pub fn run_cells(
    cells: &[Cell],
    evaluator: &dyn CellEvaluator,
    shard: Shard,
    journal: Option<&Path>,
    progress: &mut dyn FnMut(usize, usize),
) -> Result<Vec<CellOutcome>, SweepError> {
    let mut done: Vec<CellOutcome> = Vec::new();
    if let Some(path) = journal {
        for (line_idx, line) in read_journal_lines(path)?.iter().enumerate() {
            let fields = parse_journal_line(line).map_err(|message| SweepError::Journal {
                path: path.to_path_buf(),
                line: line_idx + 1,
                message,
            })?;
            done.push(
                CellOutcome::from_row(&fields).map_err(|message| SweepError::Journal {
                    path: path.to_path_buf(),
                    line: line_idx + 1,
                    message,
                })?,
            );
        }
    }
    let owned: Vec<(usize, &Cell)> = cells
        .iter()
        .enumerate()
        .filter(|(idx, _)| shard.owns(*idx))
        .collect();
    let mut outcomes = Vec::with_capacity(owned.len());
    for (done_idx, (cell_idx, cell)) in owned.iter().enumerate() {
        progress(done_idx, owned.len());
        let key = cell.key();
        if let Some(previous) = done.iter().find(|o| o.cell.key() == key) {
            outcomes.push(previous.clone());
            continue;
        }
        let mut outcome = evaluator.evaluate(cell)?;
        outcome.cell_idx = *cell_idx;
        if let Some(path) = journal {
            append_journal_line(path, &journal_line(&outcome.to_row()))?;
        }
        outcomes.push(outcome);
    }
    progress(owned.len(), owned.len());
    Ok(outcomes)
}

fn journal_line(fields: &[String]) -> String {
    let mut writer = csv::WriterBuilder::new().from_writer(Vec::new());
    // Writing to memory cannot fail.
    let _ = writer.write_record(fields);
    let bytes = writer.into_inner().unwrap_or_default();
    String::from_utf8_lossy(&bytes).trim_end().to_string()
}

fn parse_journal_line(line: &str) -> Result<Vec<String>, String> {
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(false)
        .from_reader(line.as_bytes());
    match reader.records().next() {
        Some(Ok(record)) => Ok(record.iter().map(str::to_string).collect()),
        Some(Err(e)) => Err(e.to_string()),
        None => Err("empty line".to_string()),
    }
}

#[cfg(test)]
mod tests {
    use std::cell::RefCell;

    use super::*;
    use crate::sweep::{RmseStats, StudyKind};

    /// Deterministic stand-in evaluator: its outcome is a function of the cell alone.
    struct Echo {
        calls: RefCell<Vec<String>>,
        fail_at: Option<String>,
    }

    impl CellEvaluator for Echo {
        fn evaluate(&self, cell: &Cell) -> Result<CellOutcome, SweepError> {
            if self.fail_at.as_deref() == Some(&cell.key()) {
                return Err(SweepError::Cell {
                    key: cell.key(),
                    source: "interrupted".into(),
                });
            }
            self.calls.borrow_mut().push(cell.key());
            let v = cell.setting;
            Ok(CellOutcome {
                cell_idx: 0,
                cell: cell.clone(),
                n_sensors: v as usize,
                cost: 100.0 * v,
                criterion: v.ln_1p(),
                time_mean_rmse: RmseStats {
                    mean: 1.0 / (1.0 + v),
                    std: 0.1 / (1.0 + v),
                    p5: 0.0,
                    p50: 0.5,
                    p95: 1.0,
                },
                final_rmse: RmseStats::default(),
                free_time_mean_rmse: 2.0,
                n_runs: 4,
                n_diverged: 0,
                sensors: "a:cup;b, quoted:cup".into(),
            })
        }
    }

    fn cells() -> Vec<Cell> {
        (1..=5)
            .map(|k| Cell {
                study: StudyKind::Count,
                method: "greedy-d".into(),
                setting: k as f64,
            })
            .collect()
    }

    #[test]
    fn resume_skips_recorded_cells_and_gives_the_same_outcomes() {
        let dir = tempfile::tempdir().unwrap();
        let journal = dir.path().join("cells.journal");
        let cells = cells();
        let whole = Echo {
            calls: RefCell::new(vec![]),
            fail_at: None,
        };
        let reference = run_cells(&cells, &whole, Shard::WHOLE, None, &mut |_, _| {}).unwrap();

        let interrupted = Echo {
            calls: RefCell::new(vec![]),
            fail_at: Some(cells[3].key()),
        };
        assert!(run_cells(
            &cells,
            &interrupted,
            Shard::WHOLE,
            Some(&journal),
            &mut |_, _| {}
        )
        .is_err());
        let resumed = Echo {
            calls: RefCell::new(vec![]),
            fail_at: None,
        };
        let outcomes = run_cells(
            &cells,
            &resumed,
            Shard::WHOLE,
            Some(&journal),
            &mut |_, _| {},
        )
        .unwrap();
        assert_eq!(outcomes, reference);
        assert_eq!(
            *resumed.calls.borrow(),
            vec![cells[3].key(), cells[4].key()]
        );
    }

    #[test]
    fn shards_together_give_the_whole() {
        let cells = cells();
        let echo = Echo {
            calls: RefCell::new(vec![]),
            fail_at: None,
        };
        let whole = run_cells(&cells, &echo, Shard::WHOLE, None, &mut |_, _| {}).unwrap();
        let mut parts = Vec::new();
        for index in (0..2).rev() {
            let shard = Shard { index, count: 2 };
            parts.extend(run_cells(&cells, &echo, shard, None, &mut |_, _| {}).unwrap());
        }
        assert_eq!(crate::sweep::merge_outcomes(parts.clone()).unwrap(), whole);
        parts.retain(|o| o.cell_idx != 2);
        assert!(crate::sweep::merge_outcomes(parts).is_err());
    }
}
