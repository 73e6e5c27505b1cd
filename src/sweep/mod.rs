//! `sweep` owns trade-off studies: layouts over sensor count, budget, noise, sampling interval,
//! background error and worst-case sensor loss, for several methods, each cell scored by the
//! Monte Carlo twin, summarised as tidy tables.
//!
//! Plan (not built yet).
