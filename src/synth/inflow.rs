//! The gusty inflow: a mean wind profile plus seeded random gusts and slow direction swings,
//! sampled at the open edges of the domain. Main types: [`WindProfile`], [`GustField`].
//!
//! Gusts are a few cross-wind modes `φ_k(s)` (cosines across the inflow front), each with an
//! along-wind and a cross-wind (or vertical) amplitude that follows an Ornstein–Uhlenbeck
//! process (Uhlenbeck & Ornstein 1930, *Phys. Rev.* 36; exact discretisation
//! `a ← a·e^{−Δt/T} + √(1 − e^{−2Δt/T})·ξ`, Gillespie 1996, *Phys. Rev. E* 54). The direction
//! swings with a slower Ornstein–Uhlenbeck process of its own. Edge nodes downstream of the
//! inflow front see the same gusts later, delayed by their along-wind distance over the
//! mean speed (Taylor's frozen-turbulence hypothesis, Taylor 1938, *Proc. R. Soc. A* 164), so
//! a side that runs along the wind carries the gusts that pass it instead of a steady value.
//!
//! Every random draw comes from one ChaCha stream seeded by the site's `seed`; draws happen in
//! a fixed order on the calling thread. No units conversion happens here: speeds in m/s,
//! times in s, lengths in m.

use std::collections::VecDeque;

use rand::SeedableRng;
use rand_chacha::ChaCha12Rng;
use rand_distr::{Distribution, StandardNormal};

/// Mean wind speed against height above ground.
#[derive(Debug, Clone, Copy)]
pub enum WindProfile {
    /// The same speed everywhere (plan view), m/s.
    Uniform { speed: f64 },
    /// Neutral logarithmic law `U(z) = U_ref ln(z/z0) / ln(z_ref/z0)` (Prandtl; e.g. Stull
    /// 1988, *An Introduction to Boundary Layer Meteorology*, §9.7), for vertical slices.
    Log {
        speed_ref: f64,
        /// Reference height of `speed_ref`, m above ground.
        height_ref: f64,
        /// Aerodynamic roughness length z0, m.
        roughness: f64,
    },
}

impl WindProfile {
    /// Mean speed at `height` m above ground (heights below 2·z0 take the value at 2·z0, so
    /// the first node above a wall keeps a small positive speed).
    pub fn speed_at(&self, height: f64) -> f64 {
        match *self {
            WindProfile::Uniform { speed } => speed,
            WindProfile::Log {
                speed_ref,
                height_ref,
                roughness,
            } => {
                let z = height.max(2.0 * roughness);
                speed_ref * (z / roughness).ln() / (height_ref / roughness).ln()
            }
        }
    }
}

/// Statistics of the gusts and swings.
#[derive(Debug, Clone, Copy)]
pub struct GustSettings {
    /// Standard deviation of the along-wind gust, m/s.
    pub sigma_along: f64,
    /// Standard deviation of the cross-wind (plan view) or vertical (slice) gust, m/s.
    pub sigma_cross: f64,
    /// Integral time scale of the largest gust mode, s; mode k uses `time_scale / (k + 1)`.
    pub time_scale: f64,
    /// Number of cross-wind modes (≥ 1).
    pub n_modes: usize,
    /// Standard deviation of the slow direction swing, degrees.
    pub swing_sd_deg: f64,
    /// Time scale of the direction swing, s.
    pub swing_time_scale: f64,
}

/// State of all processes at one instant.
#[derive(Debug, Clone)]
struct GustState {
    along: Vec<f64>,
    cross: Vec<f64>,
    swing: f64,
}

/// The random processes, advanced once per solver step, with a history long enough for the
/// largest frozen-turbulence delay.
pub struct GustField {
    settings: GustSettings,
    step_seconds: f64,
    rng: ChaCha12Rng,
    /// Newest state at the back.
    history: VecDeque<GustState>,
    max_history: usize,
}

/// A gust sample: along-wind and cross-wind velocity perturbations (m/s), direction offset
/// (radians, positive clockwise seen from above, i.e. from north towards east).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GustSample {
    pub along: f64,
    pub cross: f64,
    pub swing_rad: f64,
}

impl GustField {
    /// Starts every process from a draw of its stationary distribution.
    ///
    /// `step_seconds` is the solver time step; `max_delay` the largest delay (s) that
    /// [`GustField::sample`] will be asked for.
    #[track_caller]
    pub fn new(settings: GustSettings, seed: u64, step_seconds: f64, max_delay: f64) -> Self {
        assert!(settings.n_modes >= 1 && step_seconds > 0.0 && settings.time_scale > 0.0);
        let mut rng = ChaCha12Rng::seed_from_u64(seed);
        let mut draw = || -> f64 { StandardNormal.sample(&mut rng) };
        let along = (0..settings.n_modes).map(|_| draw()).collect();
        let cross = (0..settings.n_modes).map(|_| draw()).collect();
        let swing = draw();
        let max_history = (max_delay.max(0.0) / step_seconds).ceil() as usize + 2;
        let mut history = VecDeque::with_capacity(max_history + 1);
        history.push_back(GustState {
            along,
            cross,
            swing,
        });
        GustField {
            settings,
            step_seconds,
            rng,
            history,
            max_history,
        }
    }

    /// Advances every process by one solver step.
    pub fn advance(&mut self) {
        let dt = self.step_seconds;
        let s = self.settings;
        let mut next = self
            .history
            .back()
            .cloned()
            .expect("history is never empty");
        for k in 0..s.n_modes {
            let t = s.time_scale / (k + 1) as f64;
            let decay = (-dt / t).exp();
            let kick = (1.0 - decay * decay).sqrt();
            let xa: f64 = StandardNormal.sample(&mut self.rng);
            let xc: f64 = StandardNormal.sample(&mut self.rng);
            next.along[k] = next.along[k] * decay + kick * xa;
            next.cross[k] = next.cross[k] * decay + kick * xc;
        }
        let decay = (-dt / s.swing_time_scale).exp();
        let xs: f64 = StandardNormal.sample(&mut self.rng);
        next.swing = next.swing * decay + (1.0 - decay * decay).sqrt() * xs;
        self.history.push_back(next);
        while self.history.len() > self.max_history {
            self.history.pop_front();
        }
    }

    /// Mode shapes at cross-wind position `s` in [0, 1]: φ_0 = 1, φ_k = √2 cos(kπs) (unit
    /// mean square over s), divided by √n so the summed variance stays σ² for any `n_modes`.
    pub fn mode_shapes(&self, s: f64) -> Vec<f64> {
        let n = self.settings.n_modes;
        let norm = 1.0 / (n as f64).sqrt();
        (0..n)
            .map(|k| {
                if k == 0 {
                    norm
                } else {
                    norm * std::f64::consts::SQRT_2 * (k as f64 * std::f64::consts::PI * s).cos()
                }
            })
            .collect()
    }

    /// Gust seen at cross-wind position `s` in [0, 1] across the inflow front, `delay`
    /// seconds after it crossed the front (clamped to the stored history).
    pub fn sample(&self, s: f64, delay: f64) -> GustSample {
        self.sample_shaped(&self.mode_shapes(s), delay)
    }

    /// Like [`GustField::sample`] with precomputed [`GustField::mode_shapes`].
    #[track_caller]
    pub fn sample_shaped(&self, phi: &[f64], delay: f64) -> GustSample {
        assert_eq!(phi.len(), self.settings.n_modes);
        let back =
            ((delay.max(0.0) / self.step_seconds).round() as usize).min(self.history.len() - 1);
        let state = &self.history[self.history.len() - 1 - back];
        let mut along = 0.0;
        let mut cross = 0.0;
        for (k, p) in phi.iter().enumerate() {
            along += state.along[k] * p;
            cross += state.cross[k] * p;
        }
        GustSample {
            along: self.settings.sigma_along * along,
            cross: self.settings.sigma_cross * cross,
            swing_rad: self.settings.swing_sd_deg.to_radians() * state.swing,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn settings() -> GustSettings {
        GustSettings {
            sigma_along: 1.2,
            sigma_cross: 0.9,
            time_scale: 5.0,
            n_modes: 3,
            swing_sd_deg: 10.0,
            swing_time_scale: 50.0,
        }
    }

    #[test]
    fn log_profile_hits_the_reference_speed() {
        let p = WindProfile::Log {
            speed_ref: 10.0,
            height_ref: 80.0,
            roughness: 0.05,
        };
        assert!((p.speed_at(80.0) - 10.0).abs() < 1e-12);
        // ln(10/0.05)/ln(80/0.05) = 0.7178 (direct evaluation).
        assert!((p.speed_at(10.0) - 10.0 * (200.0f64).ln() / (1600.0f64).ln()).abs() < 1e-12);
        assert!(p.speed_at(0.0) > 0.0);
    }

    #[test]
    fn gust_statistics_match_the_settings() {
        // An Ornstein–Uhlenbeck process has variance σ² and autocorrelation e^{−τ/T}
        // (Uhlenbeck & Ornstein 1930). Check both on a long seeded record.
        let s = settings();
        let dt = 0.5;
        let mut field = GustField::new(s, 42, dt, 0.0);
        let n = 200_000;
        let mut along = Vec::with_capacity(n);
        let mut swing = Vec::with_capacity(n);
        for _ in 0..n {
            field.advance();
            let g = field.sample(0.3, 0.0);
            along.push(g.along);
            swing.push(g.swing_rad);
        }
        let var = |x: &[f64]| {
            let m = x.iter().sum::<f64>() / x.len() as f64;
            x.iter().map(|v| (v - m) * (v - m)).sum::<f64>() / x.len() as f64
        };
        // Variance at s: σ²/n · Σ φ_k(s)²; the modes are independent.
        let phi2: f64 = (0..3)
            .map(|k| {
                if k == 0 {
                    1.0
                } else {
                    2.0 * (k as f64 * std::f64::consts::PI * 0.3).cos().powi(2)
                }
            })
            .sum();
        let expected = 1.2 * 1.2 * phi2 / 3.0;
        let got = var(&along);
        assert!(
            (got - expected).abs() < 0.05 * expected,
            "{got} vs {expected}"
        );
        // Lag-one autocorrelation of the swing: e^{−dt/T}.
        let m = swing.iter().sum::<f64>() / n as f64;
        let c0: f64 = swing.iter().map(|v| (v - m) * (v - m)).sum();
        let c1: f64 = swing.windows(2).map(|w| (w[0] - m) * (w[1] - m)).sum();
        let rho = c1 / c0;
        assert!(
            (rho - (-dt / 50.0f64).exp()).abs() < 2e-3,
            "autocorrelation {rho}"
        );
        let sd = var(&swing).sqrt().to_degrees();
        assert!((sd - 10.0).abs() < 1.5, "swing sd {sd}");
    }

    #[test]
    fn same_seed_same_gusts_and_delay_reads_the_past() {
        let mut a = GustField::new(settings(), 7, 0.1, 1.0);
        let mut b = GustField::new(settings(), 7, 0.1, 1.0);
        let mut past = Vec::new();
        for _ in 0..30 {
            a.advance();
            b.advance();
            past.push(a.sample(0.5, 0.0));
            assert_eq!(a.sample(0.5, 0.0), b.sample(0.5, 0.0));
        }
        // Five steps ago.
        assert_eq!(a.sample(0.5, 0.5), past[past.len() - 6]);
        let mut c = GustField::new(settings(), 8, 0.1, 1.0);
        c.advance();
        assert_ne!(c.sample(0.5, 0.0), past[0]);
    }
}
