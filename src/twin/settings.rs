//! Settings of a twin experiment, checked when built: a [`TwinSettings`] that exists is valid.
//! [`ModelSettings`] drive the per-site work (time split, model fit, damping); [`RunSettings`]
//! drive the Monte Carlo runs of one layout (filter, noise, sampling, background, seeds).
//! Nothing here touches arguments or files; `cli` maps its flags onto the `with_*` builders.

use super::TwinError;

/// Which filter assimilates the readings.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum FilterKind {
    /// Kalman filter on the linear model (covariance and gains shared by all runs).
    Kalman,
    /// Stochastic ensemble Kalman filter with perturbed readings and multiplicative inflation.
    Enkf,
    /// Optimal interpolation: static background covariance `B = scale · diag(POD energies)`.
    Oi,
    /// Linear nudging towards the readings with a fixed or tuned strength.
    Nudge,
    /// No readings: the model runs from the background alone (the baseline).
    Free,
}

impl FilterKind {
    pub fn name(self) -> &'static str {
        match self {
            FilterKind::Kalman => "kalman",
            FilterKind::Enkf => "enkf",
            FilterKind::Oi => "oi",
            FilterKind::Nudge => "nudge",
            FilterKind::Free => "free",
        }
    }

    /// The model a filter uses when none is asked for: EnKF the quadratic, the others linear.
    pub fn default_model(self) -> ModelKind {
        match self {
            FilterKind::Enkf => ModelKind::Quadratic,
            _ => ModelKind::Linear,
        }
    }
}

/// Which reduced model advances the modal coefficients.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum ModelKind {
    /// `a_{t+1} = A a_t + c` (DMD-style least squares).
    Linear,
    /// `a_{t+1} = A a_t + F (a_t ⊗ a_t)_sym + c` (operator inference).
    Quadratic,
}

impl ModelKind {
    pub fn name(self) -> &'static str {
        match self {
            ModelKind::Linear => "linear",
            ModelKind::Quadratic => "quadratic",
        }
    }
}

/// How strongly nudging pulls the state towards the readings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum NudgeGain {
    /// Fixed strength γ in (0, 1]: the fraction of the least-squares innovation applied per reading.
    Fixed(f64),
    /// γ tuned on the training span: the weakest within one standard error of the minimum of
    /// the nudged-to-free error ratio (see `montecarlo::tune_nudging`).
    Tuned,
}

/// Per-site settings: time split and model fit.
#[derive(Debug, Clone, PartialEq)]
pub struct ModelSettings {
    /// Fraction of the snapshots (from the start) used for training, in (0, 1).
    pub train_fraction: f64,
    pub model: ModelKind,
    /// Tikhonov weight relative to the mean squared feature column norm of each operator block, ≥ 0.
    pub tikhonov: f64,
    /// Spectral radius a linear operator above 1 is scaled down to, in (0, 1).
    pub damping: f64,
}

impl Default for ModelSettings {
    fn default() -> Self {
        Self {
            train_fraction: 0.7,
            model: ModelKind::Linear,
            tikhonov: 1e-6,
            damping: 0.999,
        }
    }
}

/// Per-layout Monte Carlo settings.
#[derive(Debug, Clone, PartialEq)]
pub struct RunSettings {
    pub filter: FilterKind,
    /// Number of Monte Carlo runs, ≥ 1.
    pub n_runs: usize,
    /// Multiplies every kind's noise standard deviation, > 0.
    pub noise_scale: f64,
    /// When set, every kind reads every this many model steps, overriding its interval.
    pub every: Option<usize>,
    /// Field RMSE of the background (initial state) error, in field units (e.g. m/s), ≥ 0.
    pub background_sd: f64,
    /// Ensemble size of the EnKF, ≥ 2.
    pub n_ensemble: usize,
    /// Multiplicative inflation of the EnKF forecast anomalies, ≥ 1.
    pub inflation: f64,
    pub nudge_gain: NudgeGain,
    /// Scale of the optimal-interpolation background covariance `B = scale · diag(energies)`, > 0.
    pub oi_scale: f64,
    /// Master seed of every random stream.
    pub seed: u64,
    /// Identifies the setting in the seed derivation; sweeps give each cell its own id, or the
    /// same id for common random numbers across cells.
    pub setting_id: u64,
}

impl Default for RunSettings {
    fn default() -> Self {
        Self {
            filter: FilterKind::Kalman,
            n_runs: 30,
            noise_scale: 1.0,
            every: None,
            background_sd: 0.5,
            n_ensemble: 32,
            inflation: 1.02,
            nudge_gain: NudgeGain::Tuned,
            oi_scale: 1.0,
            seed: 1,
            setting_id: 0,
        }
    }
}

/// All settings of a twin experiment; build with [`TwinSettings::new`] and the `with_*` methods.
#[derive(Debug, Clone, PartialEq)]
pub struct TwinSettings {
    pub model: ModelSettings,
    pub run: RunSettings,
}

fn bad(name: &'static str, message: impl Into<String>) -> TwinError {
    TwinError::BadSetting {
        name,
        message: message.into(),
    }
}

impl TwinSettings {
    /// Defaults for `filter`, with the filter's default model.
    pub fn new(filter: FilterKind) -> Self {
        let run = RunSettings {
            filter,
            ..RunSettings::default()
        };
        let model = ModelSettings {
            model: filter.default_model(),
            ..ModelSettings::default()
        };
        Self { model, run }
    }

    pub fn with_model(mut self, model: ModelKind) -> Result<Self, TwinError> {
        if self.run.filter == FilterKind::Kalman && model == ModelKind::Quadratic {
            return Err(bad(
                "model",
                "the Kalman filter needs the linear model; use the enkf filter for the quadratic model",
            ));
        }
        self.model.model = model;
        Ok(self)
    }

    pub fn with_train_fraction(mut self, fraction: f64) -> Result<Self, TwinError> {
        if !(fraction > 0.0 && fraction < 1.0) {
            return Err(bad(
                "train-fraction",
                format!("found {fraction}, expected a value in (0, 1)"),
            ));
        }
        self.model.train_fraction = fraction;
        Ok(self)
    }

    pub fn with_tikhonov(mut self, tikhonov: f64) -> Result<Self, TwinError> {
        if !(tikhonov >= 0.0 && tikhonov.is_finite()) {
            return Err(bad(
                "tikhonov",
                format!("found {tikhonov}, expected a finite value ≥ 0"),
            ));
        }
        self.model.tikhonov = tikhonov;
        Ok(self)
    }

    pub fn with_damping(mut self, damping: f64) -> Result<Self, TwinError> {
        if !(damping > 0.0 && damping < 1.0) {
            return Err(bad(
                "damping",
                format!("found {damping}, expected a value in (0, 1)"),
            ));
        }
        self.model.damping = damping;
        Ok(self)
    }

    pub fn with_runs(mut self, n_runs: usize) -> Result<Self, TwinError> {
        if n_runs == 0 {
            return Err(bad("runs", "found 0, expected at least 1 Monte Carlo run"));
        }
        self.run.n_runs = n_runs;
        Ok(self)
    }

    pub fn with_noise_scale(mut self, scale: f64) -> Result<Self, TwinError> {
        if !(scale > 0.0 && scale.is_finite()) {
            return Err(bad(
                "noise-scale",
                format!("found {scale}, expected a finite value > 0"),
            ));
        }
        self.run.noise_scale = scale;
        Ok(self)
    }

    pub fn with_every(mut self, every: Option<usize>) -> Result<Self, TwinError> {
        if every == Some(0) {
            return Err(bad(
                "every",
                "found 0, expected a reading every N ≥ 1 steps",
            ));
        }
        self.run.every = every;
        Ok(self)
    }

    pub fn with_background_sd(mut self, sd: f64) -> Result<Self, TwinError> {
        if !(sd >= 0.0 && sd.is_finite()) {
            return Err(bad(
                "background-noise",
                format!("found {sd}, expected a finite value ≥ 0 (field units)"),
            ));
        }
        self.run.background_sd = sd;
        Ok(self)
    }

    pub fn with_ensemble(mut self, n_ensemble: usize) -> Result<Self, TwinError> {
        if n_ensemble < 2 {
            return Err(bad(
                "ensemble",
                format!("found {n_ensemble}, expected at least 2 members (a covariance needs two)"),
            ));
        }
        self.run.n_ensemble = n_ensemble;
        Ok(self)
    }

    pub fn with_inflation(mut self, inflation: f64) -> Result<Self, TwinError> {
        if !(inflation >= 1.0 && inflation.is_finite()) {
            return Err(bad(
                "inflation",
                format!("found {inflation}, expected a finite factor ≥ 1"),
            ));
        }
        self.run.inflation = inflation;
        Ok(self)
    }

    pub fn with_nudge_gain(mut self, gain: NudgeGain) -> Result<Self, TwinError> {
        if let NudgeGain::Fixed(g) = gain {
            if !(g > 0.0 && g <= 1.0) {
                return Err(bad(
                    "nudge-gain",
                    format!("found {g}, expected a strength in (0, 1]"),
                ));
            }
        }
        self.run.nudge_gain = gain;
        Ok(self)
    }

    pub fn with_oi_scale(mut self, scale: f64) -> Result<Self, TwinError> {
        if !(scale > 0.0 && scale.is_finite()) {
            return Err(bad(
                "oi-scale",
                format!("found {scale}, expected a finite value > 0"),
            ));
        }
        self.run.oi_scale = scale;
        Ok(self)
    }

    pub fn with_seed(mut self, seed: u64) -> Self {
        self.run.seed = seed;
        self
    }

    pub fn with_setting_id(mut self, setting_id: u64) -> Self {
        self.run.setting_id = setting_id;
        self
    }
}
