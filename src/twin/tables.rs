//! Tabular views of a [`ScoreResult`] for the CSV writers of `io` (`curves.csv`, `runs.csv`;
//! columns in docs/formats.md). Numbers use Rust's shortest round-trip form; a value that does
//! not exist (NaN: no spread for OI, a diverged run) is an empty cell. Pure formatting: no IO.

use super::montecarlo::ScoreResult;

/// Columns of `curves.csv`: one row per test step, statistics over the runs.
pub const CURVES_HEADER: [&str; 10] = [
    "step",
    "time_s",
    "mean_rmse",
    "std_rmse",
    "free_mean_rmse",
    "free_std_rmse",
    "mean_modal_rmse",
    "mean_spread",
    "truncation_rmse",
    "n_runs_ok",
];

/// Columns of `runs.csv`: one row per Monte Carlo run.
pub const RUNS_HEADER: [&str; 9] = [
    "run",
    "mean_rmse",
    "final_rmse",
    "free_mean_rmse",
    "ratio_to_free",
    "mean_modal_rmse",
    "mean_spread",
    "diverged_step",
    "divergence",
];

/// A number as a CSV cell; non-finite values become empty.
pub fn cell(v: f64) -> String {
    if v.is_finite() {
        format!("{v}")
    } else {
        String::new()
    }
}

pub fn curves_rows(result: &ScoreResult) -> Vec<Vec<String>> {
    result
        .curves
        .iter()
        .map(|c| {
            vec![
                c.step.to_string(),
                cell(c.time_s),
                cell(c.mean_rmse),
                cell(c.std_rmse),
                cell(c.free_mean_rmse),
                cell(c.free_std_rmse),
                cell(c.mean_modal_rmse),
                cell(c.mean_spread),
                cell(c.truncation_rmse),
                c.n_runs_ok.to_string(),
            ]
        })
        .collect()
}

pub fn runs_rows(result: &ScoreResult) -> Vec<Vec<String>> {
    result
        .runs
        .iter()
        .map(|r| {
            vec![
                r.run_idx.to_string(),
                cell(r.mean_rmse),
                cell(r.final_rmse),
                cell(r.free_mean_rmse),
                cell(r.ratio_to_free),
                cell(r.mean_modal_rmse),
                cell(r.mean_spread),
                r.divergence
                    .as_ref()
                    .map(|d| d.step.to_string())
                    .unwrap_or_default(),
                r.divergence
                    .as_ref()
                    .map(|d| d.reason.clone())
                    .unwrap_or_default(),
            ]
        })
        .collect()
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;
    use crate::twin::testcase::{synthetic_case, SyntheticSpec};
    use crate::twin::{prepare, run_monte_carlo, FilterKind, TwinSettings};

    #[test]
    fn rows_match_headers_and_oi_has_no_spread() {
        let s = TwinSettings::new(FilterKind::Oi).with_runs(3).unwrap();
        let prep = prepare(synthetic_case(&SyntheticSpec::default()), "t", &s.model).unwrap();
        let res = run_monte_carlo(&prep, &s.run, &|_, _| {}).unwrap();
        let curves = curves_rows(&res);
        assert_eq!(curves.len(), prep.split.n_test);
        assert!(curves.iter().all(|r| r.len() == CURVES_HEADER.len()));
        assert!(
            curves[0][7].is_empty(),
            "OI has no own covariance, so no spread"
        );
        let runs = runs_rows(&res);
        assert_eq!(runs.len(), 3);
        assert!(runs
            .iter()
            .all(|r| r.len() == RUNS_HEADER.len() && r[7].is_empty()));
    }
}
