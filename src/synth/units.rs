//! Conversion between lattice units (node spacing 1, time step 1) and physical units (m, s).
//! Main type: [`LatticeUnits`].
//!
//! The lattice Boltzmann method is weakly compressible: its error against incompressible flow
//! grows like Ma² with the lattice Mach number Ma = u/c_s, c_s = 1/√3 (e.g. Krüger et al.
//! 2017, *The Lattice Boltzmann Method*, §7.3). The time step is therefore chosen from the
//! node spacing and the fastest expected wind so that this speed maps to a small lattice
//! velocity; the physical viscosity follows from the relaxation time.

/// Lattice speed of sound.
pub const SOUND_SPEED: f64 = 0.577_350_269_189_625_8;

/// Scales of one run.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LatticeUnits {
    /// Node spacing, m.
    pub spacing: f64,
    /// Time step, s.
    pub step: f64,
}

impl LatticeUnits {
    /// Units that map `speed` (m/s) to lattice velocity `lattice_speed`, with the time step
    /// shortened so that `interval` (s) is a whole number of steps. Returns the units and
    /// the number of steps per interval.
    #[track_caller]
    pub fn for_speed(spacing: f64, speed: f64, lattice_speed: f64, interval: f64) -> (Self, u64) {
        assert!(spacing > 0.0 && speed > 0.0 && lattice_speed > 0.0 && interval > 0.0);
        let nominal = lattice_speed * spacing / speed;
        let steps_per_interval = (interval / nominal).ceil().max(1.0) as u64;
        let units = LatticeUnits {
            spacing,
            step: interval / steps_per_interval as f64,
        };
        (units, steps_per_interval)
    }

    /// Lattice velocity of a physical one (m/s).
    pub fn velocity_to_lattice(&self, u: f64) -> f64 {
        u * self.step / self.spacing
    }

    /// Physical velocity (m/s) of a lattice one.
    pub fn velocity_to_physical(&self, u: f64) -> f64 {
        u * self.spacing / self.step
    }

    /// Physical kinematic viscosity (m²/s) of a lattice one.
    pub fn viscosity_to_physical(&self, nu: f64) -> f64 {
        nu * self.spacing * self.spacing / self.step
    }

    /// Whole steps in `seconds` (rounded).
    pub fn steps_in(&self, seconds: f64) -> u64 {
        (seconds / self.step).round().max(0.0) as u64
    }

    /// Lattice Mach number of a physical speed.
    pub fn mach(&self, u: f64) -> f64 {
        self.velocity_to_lattice(u).abs() / SOUND_SPEED
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_trip_and_interval() {
        let (units, n) = LatticeUnits::for_speed(5.0, 8.0, 0.03, 2.0);
        // Nominal step 0.03·5/8 = 0.01875 s → 107 steps per 2 s.
        assert_eq!(n, 107);
        assert!((units.step * n as f64 - 2.0).abs() < 1e-12);
        assert!(units.velocity_to_lattice(8.0) <= 0.03 + 1e-12);
        assert!((units.velocity_to_physical(units.velocity_to_lattice(7.3)) - 7.3).abs() < 1e-12);
        assert!((units.mach(8.0) - units.velocity_to_lattice(8.0) * 3f64.sqrt()).abs() < 1e-12);
        // ν_phys = ν_lat h²/Δt.
        assert!((units.viscosity_to_physical(0.01) - 0.01 * 25.0 / units.step).abs() < 1e-12);
        assert_eq!(units.steps_in(2.0), 107);
    }
}
