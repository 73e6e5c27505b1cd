//! The layout's sensors as rows in modal coordinates ([`SensorRows`]) and the reading
//! schedule ([`Schedule`]): which rows report at which model step. Models advance at the
//! snapshot step `dt`; a kind with sampling interval `τ` reports every `m = round(τ/dt)` steps
//! (at least 1), at test steps `0, m, 2m, …`. A kind whose `m` exceeds the last test step
//! would never report after the start and is refused.

use faer::Mat;

use super::TwinError;

/// The rows of every sensor of a layout, stacked in layout order.
#[derive(Debug, Clone)]
pub struct SensorRows {
    /// `n_rows × n_modes`: reading = offset + h · a for a field inside the basis.
    pub h: Mat<f64>,
    /// Mean-field reading of each row.
    pub offset: Vec<f64>,
    /// Noise standard deviation of each row before `noise_scale`, reading units.
    pub noise_sd: Vec<f64>,
    /// Sampling interval of each row's kind, seconds.
    pub interval_s: Vec<f64>,
    /// Kind name of each row, for messages.
    pub kind_name: Vec<String>,
}

impl SensorRows {
    #[track_caller]
    pub fn new(
        h: Mat<f64>,
        offset: Vec<f64>,
        noise_sd: Vec<f64>,
        interval_s: Vec<f64>,
        kind_name: Vec<String>,
    ) -> Self {
        let n = h.nrows();
        assert!(
            offset.len() == n
                && noise_sd.len() == n
                && interval_s.len() == n
                && kind_name.len() == n
        );
        Self {
            h,
            offset,
            noise_sd,
            interval_s,
            kind_name,
        }
    }

    pub fn n_rows(&self) -> usize {
        self.h.nrows()
    }

    pub fn n_modes(&self) -> usize {
        self.h.ncols()
    }

    /// The rows `rows_idx` only (for failure studies).
    pub fn select(&self, rows_idx: &[usize]) -> Self {
        let h = Mat::from_fn(rows_idx.len(), self.n_modes(), |i, j| {
            self.h[(rows_idx[i], j)]
        });
        let pick_f = |v: &[f64]| rows_idx.iter().map(|&i| v[i]).collect::<Vec<_>>();
        Self {
            h,
            offset: pick_f(&self.offset),
            noise_sd: pick_f(&self.noise_sd),
            interval_s: pick_f(&self.interval_s),
            kind_name: rows_idx
                .iter()
                .map(|&i| self.kind_name[i].clone())
                .collect(),
        }
    }
}

/// Model steps between two readings of a kind: `round(interval / dt)`, at least 1.
pub fn steps_between_readings(interval_s: f64, dt_s: f64) -> usize {
    ((interval_s / dt_s).round() as usize).max(1)
}

/// Which rows report at each step of the test span.
#[derive(Debug, Clone)]
pub struct Schedule {
    /// Distinct sets of reporting rows (sorted row indices), in order of first use.
    pub patterns: Vec<Vec<usize>>,
    /// Per test step, the pattern that reports, or `None` when no sensor reports.
    pub step_pattern: Vec<Option<usize>>,
    /// Steps between readings of each row.
    pub every_row: Vec<usize>,
}

impl Schedule {
    /// Schedule for `n_steps` test steps of `dt_s` seconds; `every` overrides every kind's
    /// interval with a reading every `every` steps.
    pub fn new(
        rows: &SensorRows,
        dt_s: f64,
        n_steps: usize,
        every: Option<usize>,
    ) -> Result<Self, TwinError> {
        assert!(n_steps >= 1);
        let last_step = n_steps - 1;
        let mut every_row = Vec::with_capacity(rows.n_rows());
        for row_idx in 0..rows.n_rows() {
            let m = every.unwrap_or_else(|| steps_between_readings(rows.interval_s[row_idx], dt_s));
            if m > last_step {
                return Err(TwinError::IntervalTooLong {
                    kind: if every.is_some() {
                        format!("{} (with --every {m})", rows.kind_name[row_idx])
                    } else {
                        rows.kind_name[row_idx].clone()
                    },
                    interval_s: m as f64 * dt_s,
                    test_span_s: last_step as f64 * dt_s,
                    n_test_steps: last_step,
                    dt_s,
                });
            }
            every_row.push(m);
        }
        let mut patterns: Vec<Vec<usize>> = Vec::new();
        let mut step_pattern = Vec::with_capacity(n_steps);
        for step in 0..n_steps {
            let due: Vec<usize> = (0..rows.n_rows())
                .filter(|&i| step % every_row[i] == 0)
                .collect();
            if due.is_empty() {
                step_pattern.push(None);
                continue;
            }
            let idx = match patterns.iter().position(|p| *p == due) {
                Some(idx) => idx,
                None => {
                    patterns.push(due);
                    patterns.len() - 1
                }
            };
            step_pattern.push(Some(idx));
        }
        Ok(Self {
            patterns,
            step_pattern,
            every_row,
        })
    }

    pub fn n_steps(&self) -> usize {
        self.step_pattern.len()
    }

    /// The rows reporting at `step` (empty when none).
    pub fn rows_at(&self, step: usize) -> &[usize] {
        match self.step_pattern[step] {
            Some(p) => &self.patterns[p],
            None => &[],
        }
    }
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;

    fn rows(intervals: &[f64]) -> SensorRows {
        let n = intervals.len();
        SensorRows::new(
            Mat::zeros(n, 2),
            vec![0.0; n],
            vec![0.1; n],
            intervals.to_vec(),
            (0..n).map(|i| format!("kind{i}")).collect(),
        )
    }

    #[test]
    fn kinds_report_at_their_own_interval() {
        // dt = 2 s; intervals 2 s (every step), 5 s (round(2.5) = 3 steps), 0.5 s (1 step).
        let s = Schedule::new(&rows(&[2.0, 5.0, 0.5]), 2.0, 10, None).unwrap();
        assert_eq!(s.every_row, vec![1, 3, 1]);
        assert_eq!(s.rows_at(0), &[0, 1, 2]);
        assert_eq!(s.rows_at(1), &[0, 2]);
        assert_eq!(s.rows_at(3), &[0, 1, 2]);
        assert_eq!(s.patterns.len(), 2);
    }

    #[test]
    fn every_overrides_and_interval_too_long_is_refused() {
        let s = Schedule::new(&rows(&[1.0]), 1.0, 10, Some(4)).unwrap();
        assert_eq!(s.rows_at(4), &[0]);
        assert!(s.step_pattern[5].is_none());
        let err = Schedule::new(&rows(&[1.0, 30.0]), 1.0, 10, None).unwrap_err();
        let msg = err.to_string();
        assert!(
            msg.contains("kind1")
                && msg.contains("30 s")
                && msg.contains("longer than the test span"),
            "{msg}"
        );
    }
}
