//! The tidy outcome of one cell and its CSV row (columns in `docs/formats.md`).

use super::cells::{Cell, StudyKind};

/// Summary of one RMSE statistic over the Monte Carlo runs, field units.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct RmseStats {
    pub mean: f64,
    pub std: f64,
    pub p5: f64,
    pub p50: f64,
    pub p95: f64,
}

/// What one cell of a study produced.
#[derive(Debug, Clone, PartialEq)]
pub struct CellOutcome {
    /// Position of the cell in the study's full cell list (merging shards sorts by it).
    pub cell_idx: usize,
    pub cell: Cell,
    pub n_sensors: usize,
    /// Total cost of the layout scored in this cell.
    pub cost: f64,
    /// Criterion value of that layout (log det J for D).
    pub criterion: f64,
    /// Time-mean field RMSE over the test span, per run, summarised.
    pub time_mean_rmse: RmseStats,
    /// RMSE at the last step, per run, summarised.
    pub final_rmse: RmseStats,
    /// Time-mean RMSE of the free run (no readings), mean over runs.
    pub free_time_mean_rmse: f64,
    pub n_runs: usize,
    pub n_diverged: usize,
    /// Candidate ids of the layout, `;`-separated, in rank order (`id:kind`).
    pub sensors: String,
}

/// Column names of the tidy table, in order.
pub const TIDY_HEADER: [&str; 23] = [
    "cell_idx",
    "study",
    "method",
    "setting",
    "n_sensors",
    "cost",
    "criterion",
    "time_mean_rmse_mean",
    "time_mean_rmse_std",
    "time_mean_rmse_p5",
    "time_mean_rmse_p50",
    "time_mean_rmse_p95",
    "final_rmse_mean",
    "final_rmse_std",
    "final_rmse_p5",
    "final_rmse_p50",
    "final_rmse_p95",
    "free_time_mean_rmse",
    "ratio_to_free",
    "n_runs",
    "n_diverged",
    "sensors",
    "key",
];

impl CellOutcome {
    /// Ratio of the time-mean RMSE to the free run's (below 1 means the sensors help).
    pub fn ratio_to_free(&self) -> f64 {
        self.time_mean_rmse.mean / self.free_time_mean_rmse
    }

    /// Upper band used by recommendations: mean + 1 standard deviation of time-mean RMSE.
    pub fn upper_band(&self) -> f64 {
        self.time_mean_rmse.mean + self.time_mean_rmse.std
    }

    /// The CSV row; floats are printed in full precision so a row reads back bit-identical.
    pub fn to_row(&self) -> Vec<String> {
        let s = |x: f64| format!("{x:?}");
        let t = &self.time_mean_rmse;
        let f = &self.final_rmse;
        vec![
            self.cell_idx.to_string(),
            self.cell.study.to_string(),
            self.cell.method.clone(),
            s(self.cell.setting),
            self.n_sensors.to_string(),
            s(self.cost),
            s(self.criterion),
            s(t.mean),
            s(t.std),
            s(t.p5),
            s(t.p50),
            s(t.p95),
            s(f.mean),
            s(f.std),
            s(f.p5),
            s(f.p50),
            s(f.p95),
            s(self.free_time_mean_rmse),
            s(self.ratio_to_free()),
            self.n_runs.to_string(),
            self.n_diverged.to_string(),
            self.sensors.clone(),
            self.cell.key(),
        ]
    }

    /// Reads a row written by [`CellOutcome::to_row`]; `Err` names the first bad column.
    pub fn from_row(row: &[String]) -> Result<Self, String> {
        if row.len() != TIDY_HEADER.len() {
            return Err(format!(
                "found {} fields, expected {}",
                row.len(),
                TIDY_HEADER.len()
            ));
        }
        let num = |idx: usize| -> Result<f64, String> {
            row[idx].parse::<f64>().map_err(|_| {
                format!(
                    "column `{}`: `{}` is not a number",
                    TIDY_HEADER[idx], row[idx]
                )
            })
        };
        let count = |idx: usize| -> Result<usize, String> {
            row[idx].parse::<usize>().map_err(|_| {
                format!(
                    "column `{}`: `{}` is not a count",
                    TIDY_HEADER[idx], row[idx]
                )
            })
        };
        let stats = |first: usize| -> Result<RmseStats, String> {
            Ok(RmseStats {
                mean: num(first)?,
                std: num(first + 1)?,
                p5: num(first + 2)?,
                p50: num(first + 3)?,
                p95: num(first + 4)?,
            })
        };
        let study: StudyKind = row[1].parse()?;
        Ok(CellOutcome {
            cell_idx: count(0)?,
            cell: Cell {
                study,
                method: row[2].clone(),
                setting: num(3)?,
            },
            n_sensors: count(4)?,
            cost: num(5)?,
            criterion: num(6)?,
            time_mean_rmse: stats(7)?,
            final_rmse: stats(12)?,
            free_time_mean_rmse: num(17)?,
            n_runs: count(19)?,
            n_diverged: count(20)?,
            sensors: row[21].clone(),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn row_round_trips_bit_identical() {
        let outcome = CellOutcome {
            cell_idx: 4,
            cell: Cell {
                study: StudyKind::Count,
                method: "greedy-d".into(),
                setting: 3.0,
            },
            n_sensors: 3,
            cost: 7500.0,
            criterion: 12.345678901234567,
            time_mean_rmse: RmseStats {
                mean: 0.1 + 0.2,
                std: 1.0 / 3.0,
                p5: 0.01,
                p50: 0.2,
                p95: 0.9,
            },
            final_rmse: RmseStats::default(),
            free_time_mean_rmse: 1.7,
            n_runs: 30,
            n_diverged: 0,
            sensors: "m1:cup;m2:ultrasonic".into(),
        };
        let back = CellOutcome::from_row(&outcome.to_row()).unwrap();
        assert_eq!(back, outcome);
    }
}
