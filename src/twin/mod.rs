//! `twin` owns twin experiments: a reduced model fitted on training coefficients, filters that
//! assimilate noisy readings from a layout's sensors, and Monte Carlo scoring of the recovered
//! field against the held-out truth.
//!
//! Plan (not built yet): linear (DMD-style least squares) and quadratic (operator inference)
//! models; Kalman, ensemble Kalman, optimal interpolation, nudging and free run; field RMSE as
//! modal error plus truncation residual; seeded, thread-count-independent Monte Carlo.
