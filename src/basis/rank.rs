//! How many POD modes to keep: a fixed count, or the fewest modes whose cumulative energy
//! reaches a fraction of the total (the usual truncation criterion, common practice since
//! Sirovich 1987). Validation happens twice: [`Rank::validate`] before any data are read
//! (cheap checks against the number of snapshots) and [`Rank::select`] once the energies are
//! known (against the number of modes with non-zero energy).

use super::BasisError;

/// Truncation rule for the basis.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Rank {
    /// Keep the fewest leading modes whose cumulative energy is at least this fraction of the
    /// total; in (0, 1].
    EnergyFraction(f64),
    /// Keep exactly this many leading modes; at least 1 and at most the number of modes with
    /// non-zero energy (at most `n_snapshots − 1`).
    Count(usize),
}

impl Default for Rank {
    fn default() -> Self {
        Rank::EnergyFraction(0.99)
    }
}

impl Rank {
    /// Checks the rule on its own and against `n_snapshots`, before any numerics.
    pub fn validate(&self, n_snapshots: usize) -> Result<(), BasisError> {
        match *self {
            Rank::EnergyFraction(fraction) => {
                if !(fraction > 0.0 && fraction <= 1.0) {
                    return Err(BasisError::BadEnergyFraction { found: fraction });
                }
            }
            Rank::Count(0) => return Err(BasisError::ZeroModes),
            Rank::Count(requested) => {
                let n_available = n_snapshots.saturating_sub(1);
                if requested > n_available {
                    return Err(BasisError::TooManyModes {
                        requested,
                        n_snapshots,
                        n_available,
                    });
                }
            }
        }
        Ok(())
    }

    /// Number of leading modes to keep, given the non-zero `energies` in descending order.
    pub fn select(&self, energies: &[f64]) -> Result<usize, BasisError> {
        match *self {
            Rank::Count(requested) => {
                if requested == 0 {
                    return Err(BasisError::ZeroModes);
                }
                if requested > energies.len() {
                    return Err(BasisError::TooManyModesForData {
                        requested,
                        n_nonzero: energies.len(),
                    });
                }
                Ok(requested)
            }
            Rank::EnergyFraction(fraction) => {
                if !(fraction > 0.0 && fraction <= 1.0) {
                    return Err(BasisError::BadEnergyFraction { found: fraction });
                }
                let total: f64 = energies.iter().sum();
                if energies.is_empty() || total <= 0.0 {
                    return Err(BasisError::NoFluctuation);
                }
                // A relative slack of a few ulps keeps `1.0` from asking for round-off modes
                // and keeps exact fractions (0.5 of two equal modes) at the lower count.
                let target = fraction * total * (1.0 - 8.0 * f64::EPSILON);
                let mut cumulative = 0.0;
                for (mode_idx, energy) in energies.iter().enumerate() {
                    cumulative += energy;
                    if cumulative >= target {
                        return Ok(mode_idx + 1);
                    }
                }
                Ok(energies.len())
            }
        }
    }
}

/// Energy fraction and cumulative fraction of every mode, in order.
pub fn energy_fractions(energies: &[f64]) -> Vec<(f64, f64)> {
    let total: f64 = energies.iter().sum();
    let mut cumulative = 0.0;
    energies
        .iter()
        .map(|&energy| {
            cumulative += energy;
            if total > 0.0 {
                (energy / total, cumulative / total)
            } else {
                (0.0, 0.0)
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fraction_outside_unit_interval_is_refused() {
        for bad in [0.0, -0.1, 1.5, f64::NAN, f64::INFINITY] {
            assert!(matches!(
                Rank::EnergyFraction(bad).validate(10),
                Err(BasisError::BadEnergyFraction { .. })
            ));
        }
        assert!(Rank::EnergyFraction(1.0).validate(10).is_ok());
        assert!(Rank::EnergyFraction(1e-9).validate(10).is_ok());
    }

    #[test]
    fn count_is_bounded_by_snapshots_minus_one() {
        assert!(Rank::Count(9).validate(10).is_ok());
        assert!(matches!(
            Rank::Count(10).validate(10),
            Err(BasisError::TooManyModes { n_available: 9, .. })
        ));
        assert!(matches!(
            Rank::Count(0).validate(10),
            Err(BasisError::ZeroModes)
        ));
    }

    #[test]
    fn fraction_picks_the_fewest_modes_reaching_it() {
        // Energies 4, 3, 2, 1 (total 10): cumulative 0.4, 0.7, 0.9, 1.0.
        let energies = [4.0, 3.0, 2.0, 1.0];
        assert_eq!(Rank::EnergyFraction(0.4).select(&energies).unwrap(), 1);
        assert_eq!(Rank::EnergyFraction(0.41).select(&energies).unwrap(), 2);
        assert_eq!(Rank::EnergyFraction(0.9).select(&energies).unwrap(), 3);
        assert_eq!(Rank::EnergyFraction(0.95).select(&energies).unwrap(), 4);
        assert_eq!(Rank::EnergyFraction(1.0).select(&energies).unwrap(), 4);
        assert!(matches!(
            Rank::Count(5).select(&energies),
            Err(BasisError::TooManyModesForData { n_nonzero: 4, .. })
        ));
    }

    #[test]
    fn fractions_accumulate_to_one() {
        let fractions = energy_fractions(&[4.0, 3.0, 2.0, 1.0]);
        assert!((fractions[1].0 - 0.3).abs() < 1e-15);
        assert!((fractions[3].1 - 1.0).abs() < 1e-15);
    }
}
