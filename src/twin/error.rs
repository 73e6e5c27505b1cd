//! The typed error of the `twin` stage. Every message names the offending value and what was
//! expected. Divergence of a filter during a run is not an error: it is data, reported per run
//! in [`super::RunOutcome`].

/// A problem with the inputs or settings of a twin experiment.
#[derive(Debug, thiserror::Error)]
pub enum TwinError {
    /// A setting is out of range (zero runs, ensemble smaller than 2, fraction outside (0, 1), ...).
    #[error("twin setting `{name}`: {message}")]
    BadSetting { name: &'static str, message: String },
    /// The layout names something the site does not have.
    #[error("layout row {row}: {message}")]
    BadLayout { row: usize, message: String },
    /// The snapshot record cannot be split into a training and a test span.
    #[error(
        "too few snapshots for the split: {n_snapshots} snapshots with training fraction \
         {train_fraction} give {n_train} training and {n_test} test snapshots; need at least \
         {need_train} training and {need_test} test snapshots (more snapshots or another \
         --train-fraction)"
    )]
    TooFewSnapshots {
        n_snapshots: usize,
        train_fraction: f64,
        n_train: usize,
        n_test: usize,
        need_train: usize,
        need_test: usize,
    },
    /// A sensor kind reads less often than once in the test span.
    #[error(
        "sensor kind `{kind}`: sampling interval {interval_s} s is longer than the test span \
         ({test_span_s} s = {n_test_steps} steps of {dt_s} s); it would never report"
    )]
    IntervalTooLong {
        kind: String,
        interval_s: f64,
        test_span_s: f64,
        n_test_steps: usize,
        dt_s: f64,
    },
    /// The fitted reduced model grows without bound even after damping.
    #[error("the fitted {model} model is unstable even after damping: {message}")]
    UnstableModel {
        model: &'static str,
        message: String,
    },
    /// The fitted model is not usable (non-finite operator, singular least squares, ...).
    #[error("model fit failed: {0}")]
    FitFailed(String),
    /// The site has no snapshots (a precomputed basis only), so there is no truth trajectory.
    #[error(
        "the site has no [snapshots]; twin experiments need the snapshot record as truth \
         (a [basis]-only site cannot be scored)"
    )]
    NoSnapshots,
    /// Reading the truth snapshots failed.
    #[error("reading truth snapshots: {0}")]
    Io(#[from] crate::io::IoError),
    /// A numerical step of a filter set-up failed for every run (not a per-run divergence).
    #[error("filter set-up failed: {0}")]
    Numerical(String),
}

impl TwinError {
    /// `true` when the user can fix the cause (a setting, the layout, the data); `false` for a
    /// numerical failure of the filter set-up.
    pub fn is_bad_input(&self) -> bool {
        !matches!(self, TwinError::Numerical(_))
    }
}
