//! The range-weighting function of a pulsed Doppler lidar and its exact integral over
//! sub-intervals, used as quadrature weights along a beam.
//!
//! A gate reading is the along-beam average of the line-of-sight velocity weighted by
//! `W(s)`, `s = r − R` the offset from the gate centre `R`: a Gaussian pulse of standard
//! deviation σ (FWHM = 2√(2 ln 2) σ) convolved with a rectangular gate of length `L`,
//!
//! `W(s) = [erf((s + L/2)/(√2 σ)) − erf((s − L/2)/(√2 σ))] / (2L)`,
//!
//! which integrates to 1 (Frehlich 1997, "Effects of wind turbulence on coherent Doppler lidar
//! performance", J. Atmos. Oceanic Technol. 14; Banakh & Smalikho 2013, "Coherent Doppler Wind
//! Lidars in a Turbulent Atmosphere", ch. 1 — common practice in lidar processing). As σ → 0 it
//! tends to the rectangle `1/L` on `|s| < L/2`; as `L → 0` to the Gaussian pulse.
//!
//! The mass of `W` over `[a, b]` has a closed form through the antiderivative of erf,
//! `∫ erf(x/(√2σ)) dx = x·erf(x/(√2σ)) + √(2/π) σ exp(−x²/(2σ²))`, so quadrature weights are
//! exact cell integrals and sum to the exact window mass. erf comes from `libm` (a port of the
//! FreeBSD msun implementation, accurate to about 1 ulp). Pure numerics: no IO, no state.

use std::f64::consts::{LN_2, PI, SQRT_2};

/// Half-width of the window a gate reads, in pulse standard deviations beyond the gate
/// edges; 3σ leaves less than 0.14 % of the weight outside (then renormalised).
pub const WINDOW_SIGMAS: f64 = 3.0;

/// Standard deviation σ (m) of a Gaussian pulse of full width at half maximum `fwhm` (m).
pub fn pulse_sigma(fwhm: f64) -> f64 {
    fwhm / (2.0 * (2.0 * LN_2).sqrt())
}

/// Half-width (m) of the window around a gate centre that the gate reads.
pub fn window_half_width(gate_length: f64, pulse_width: f64) -> f64 {
    0.5 * gate_length + WINDOW_SIGMAS * pulse_sigma(pulse_width)
}

/// `W(s)`, 1/m, at offset `s` (m) from the gate centre.
pub fn range_weight(offset: f64, gate_length: f64, pulse_width: f64) -> f64 {
    let half = 0.5 * gate_length;
    let sigma = pulse_sigma(pulse_width);
    if sigma <= 0.0 {
        if gate_length <= 0.0 {
            return 0.0; // a Dirac delta has no pointwise value; masses handle it
        }
        return if offset.abs() < half {
            1.0 / gate_length
        } else if offset.abs() > half {
            0.0
        } else {
            0.5 / gate_length
        };
    }
    let scale = SQRT_2 * sigma;
    if gate_length <= 0.0 {
        return (-(offset * offset) / (2.0 * sigma * sigma)).exp() / (sigma * (2.0 * PI).sqrt());
    }
    (libm::erf((offset + half) / scale) - libm::erf((offset - half) / scale)) / (2.0 * gate_length)
}

/// `∫ erf(x/(√2σ)) dx`, the antiderivative used by [`range_weight_mass`]; `|x|` when σ = 0.
fn erf_antiderivative(x: f64, sigma: f64) -> f64 {
    if sigma <= 0.0 {
        return x.abs();
    }
    let scale = SQRT_2 * sigma;
    x * libm::erf(x / scale) + (2.0 / PI).sqrt() * sigma * (-(x * x) / (scale * scale)).exp()
}

/// `∫_a^b W(s) ds` for offsets `a ≤ b` (m) from the gate centre, in closed form.
pub fn range_weight_mass(a: f64, b: f64, gate_length: f64, pulse_width: f64) -> f64 {
    let sigma = pulse_sigma(pulse_width);
    if gate_length <= 0.0 {
        if sigma <= 0.0 {
            // Dirac delta at the gate centre.
            return if a <= 0.0 && 0.0 < b { 1.0 } else { 0.0 };
        }
        let scale = SQRT_2 * sigma;
        return 0.5 * (libm::erf(b / scale) - libm::erf(a / scale));
    }
    let half = 0.5 * gate_length;
    let g = |x: f64| erf_antiderivative(x, sigma);
    (g(b + half) - g(b - half) - g(a + half) + g(a - half)) / (2.0 * gate_length)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Composite Simpson rule, for checking the closed forms independently.
    fn simpson(f: impl Fn(f64) -> f64, a: f64, b: f64, n_intervals: usize) -> f64 {
        let n = n_intervals + n_intervals % 2;
        let h = (b - a) / n as f64;
        let mut sum = f(a) + f(b);
        for k in 1..n {
            let weight = if k % 2 == 1 { 4.0 } else { 2.0 };
            sum += weight * f(a + k as f64 * h);
        }
        sum * h / 3.0
    }

    #[test]
    fn erf_matches_handbook_values() {
        // Abramowitz & Stegun (1964), table 7.1.
        for (x, expected) in [
            (0.5, 0.520_499_877_8),
            (1.0, 0.842_700_792_9),
            (2.0, 0.995_322_265_0),
        ] {
            assert!((libm::erf(x) - expected).abs() < 1e-10, "erf({x})");
        }
    }

    #[test]
    fn fwhm_to_sigma() {
        // FWHM = 2√(2 ln 2) σ ≈ 2.354820045 σ for a Gaussian (common practice).
        assert!((pulse_sigma(2.354_820_045) - 1.0).abs() < 1e-9);
    }

    #[test]
    fn weighting_integrates_to_one() {
        // Frehlich (1997): the range-weighting function is normalised to unit area.
        for (gate_length, pulse_width) in [(30.0, 20.0), (18.0, 30.0), (1.0, 50.0), (50.0, 0.5)] {
            let reach = 0.5 * gate_length + 10.0 * pulse_sigma(pulse_width);
            let numeric = simpson(
                |s| range_weight(s, gate_length, pulse_width),
                -reach,
                reach,
                20_000,
            );
            assert!(
                (numeric - 1.0).abs() < 1e-9,
                "L={gate_length} fwhm={pulse_width}: {numeric}"
            );
            let closed = range_weight_mass(-reach, reach, gate_length, pulse_width);
            assert!((closed - 1.0).abs() < 1e-12, "closed form {closed}");
        }
    }

    #[test]
    fn closed_form_mass_agrees_with_quadrature_on_subintervals() {
        let (gate_length, pulse_width) = (30.0, 24.0);
        for (a, b) in [(-40.0, -10.0), (-5.0, 3.0), (12.0, 60.0), (-0.1, 0.1)] {
            let numeric = simpson(|s| range_weight(s, gate_length, pulse_width), a, b, 4000);
            let closed = range_weight_mass(a, b, gate_length, pulse_width);
            assert!(
                (numeric - closed).abs() < 1e-11 + 1e-9 * closed,
                "[{a}, {b}]"
            );
        }
    }

    #[test]
    fn window_holds_nearly_all_the_weight() {
        let (gate_length, pulse_width) = (30.0, 30.0);
        let half = window_half_width(gate_length, pulse_width);
        let inside = range_weight_mass(-half, half, gate_length, pulse_width);
        assert!(inside > 0.998 && inside < 1.0, "{inside}");
    }

    #[test]
    fn short_pulse_limit_is_the_rectangular_gate() {
        // As the pulse width tends to 0 the weighting tends to the rectangular gate 1/L on
        // |s| < L/2 (textbook range weighting; Frehlich 1997).
        let gate_length = 30.0;
        for pulse_width in [1e-3, 1e-6] {
            for s in [-14.0, -7.5, 0.0, 9.0, 14.9] {
                let w = range_weight(s, gate_length, pulse_width);
                assert!((w - 1.0 / gate_length).abs() < 1e-12, "inside, s={s}: {w}");
            }
            for s in [-15.1, 16.0, 40.0] {
                assert!(
                    range_weight(s, gate_length, pulse_width).abs() < 1e-12,
                    "outside s={s}"
                );
            }
            let mass = range_weight_mass(-5.0, 5.0, gate_length, pulse_width);
            assert!((mass - 10.0 / gate_length).abs() < 1e-9);
        }
        let exact = range_weight_mass(-5.0, 5.0, gate_length, 0.0);
        assert!((exact - 10.0 / gate_length).abs() < 1e-14);
    }

    #[test]
    fn short_gate_limit_is_the_gaussian_pulse() {
        // L → 0: the Gaussian pulse itself; half its mass lies within ±0.6745σ (normal quartile).
        let pulse_width = 20.0;
        let sigma = pulse_sigma(pulse_width);
        let q = 0.674_489_750_2 * sigma;
        let mass = range_weight_mass(-q, q, 0.0, pulse_width);
        assert!((mass - 0.5).abs() < 1e-9);
        let tiny_gate = range_weight_mass(-q, q, 1e-4, pulse_width);
        assert!((tiny_gate - 0.5).abs() < 1e-6);
    }
}
