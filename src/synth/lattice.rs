//! The D2Q9 velocity set and the local collision: two-relaxation-time (TRT) collision with a
//! Smagorinsky subgrid viscosity and Guo forcing. Everything here is per node and pure; the
//! solver (`solver.rs`) owns the arrays, streaming and boundaries.
//!
//! References:
//! - D2Q9 lattice and equilibrium: Qian, d'Humières & Lallemand (1992), *Europhys. Lett.* 17.
//! - TRT collision and the "magic" parameter Λ = (τ⁺ − ½)(τ⁻ − ½); Λ = 3/16 puts a halfway
//!   bounce-back wall exactly midway for Poiseuille flow whatever the viscosity:
//!   Ginzburg, Verhaeghe & d'Humières (2008), *Commun. Comput. Phys.* 3.
//! - Smagorinsky closure written through the non-equilibrium momentum flux, solved for the
//!   local relaxation time in closed form: Hou, Sterling, Chen & Doolen (1996), *Fields Inst.
//!   Commun.* 6, "A lattice Boltzmann subgrid model for high Reynolds number flows".
//! - Forcing term: Guo, Zheng & Shi (2002), *Phys. Rev. E* 65, 046308, split into its even
//!   and odd parts so each relaxes with its own rate (as is usual for TRT).
//!
//! Lattice units throughout: spacing 1, time step 1, sound speed c_s = 1/√3.

/// Number of discrete velocities.
pub const Q: usize = 9;

/// Lattice velocities: rest, four axis links, four diagonals.
pub const CX: [i32; Q] = [0, 1, 0, -1, 0, 1, -1, -1, 1];
pub const CY: [i32; Q] = [0, 0, 1, 0, -1, 1, 1, -1, -1];

/// Quadrature weights of the D2Q9 equilibrium.
pub const W: [f64; Q] = [
    4.0 / 9.0,
    1.0 / 9.0,
    1.0 / 9.0,
    1.0 / 9.0,
    1.0 / 9.0,
    1.0 / 36.0,
    1.0 / 36.0,
    1.0 / 36.0,
    1.0 / 36.0,
];

/// Index of the opposite velocity, `c[OPP[q]] = -c[q]`.
pub const OPP: [usize; Q] = [0, 3, 4, 1, 2, 7, 8, 5, 6];

/// Index of the velocity mirrored in a horizontal wall (`cy → −cy`), for free-slip edges.
pub const MIRROR_Y: [usize; Q] = [0, 1, 4, 3, 2, 8, 7, 6, 5];

/// Index of the velocity mirrored in a vertical wall (`cx → −cx`).
pub const MIRROR_X: [usize; Q] = [0, 3, 2, 1, 4, 6, 5, 8, 7];

/// Kinematic viscosity (lattice units) of relaxation time `tau`: ν = c_s²(τ − ½).
pub fn viscosity_of_tau(tau: f64) -> f64 {
    (tau - 0.5) / 3.0
}

/// Relaxation time giving kinematic viscosity `nu` (lattice units).
pub fn tau_of_viscosity(nu: f64) -> f64 {
    3.0 * nu + 0.5
}

/// Second-order equilibrium of density `rho` and velocity `(ux, uy)`.
#[inline]
pub fn equilibrium(rho: f64, ux: f64, uy: f64) -> [f64; Q] {
    let usq = 1.5 * (ux * ux + uy * uy);
    let mut feq = [0.0; Q];
    for q in 0..Q {
        let cu = 3.0 * (CX[q] as f64 * ux + CY[q] as f64 * uy);
        feq[q] = W[q] * rho * (1.0 + cu + 0.5 * cu * cu - usq);
    }
    feq
}

/// Density and velocity of populations `f` under body acceleration `accel` (force per unit
/// mass), with the half-step force correction of Guo et al.
#[inline]
pub fn moments(f: &[f64; Q], accel: [f64; 2]) -> (f64, f64, f64) {
    let rho: f64 = f.iter().sum();
    let mut jx = 0.0;
    let mut jy = 0.0;
    for q in 1..Q {
        jx += CX[q] as f64 * f[q];
        jy += CY[q] as f64 * f[q];
    }
    let inv_rho = 1.0 / rho;
    let ux = jx * inv_rho + 0.5 * accel[0];
    let uy = jy * inv_rho + 0.5 * accel[1];
    (rho, ux, uy)
}

/// Parameters of the collision, fixed for a run.
#[derive(Debug, Clone, Copy)]
pub struct Collision {
    /// Relaxation time of the even (viscous) moments without subgrid viscosity; > 0.5.
    pub tau: f64,
    /// TRT magic parameter Λ; 3/16 gives viscosity-independent halfway walls.
    pub magic: f64,
    /// Smagorinsky constant C_S (0 turns the subgrid model off).
    pub smagorinsky: f64,
    /// Body acceleration (force per unit mass), lattice units; the force density is ρ·a, so a
    /// slow drift of the mean density does not change the driven velocity.
    pub accel: [f64; 2],
}

/// Collides `f` in place; returns `(rho, ux, uy)` of the pre-collision state (with the Guo
/// half-force shift), which are the physical moments of the node at this step.
#[inline]
pub fn collide(f: &mut [f64; Q], c: &Collision) -> (f64, f64, f64) {
    let (rho, ux, uy) = moments(f, c.accel);
    let force = [rho * c.accel[0], rho * c.accel[1]];
    let feq = equilibrium(rho, ux, uy);
    let tau_plus = if c.smagorinsky > 0.0 {
        // Non-equilibrium momentum flux Π = Σ c c (f − f_eq); Hou et al. (1996), eq. for τ_t.
        let mut pxx = 0.0;
        let mut pyy = 0.0;
        let mut pxy = 0.0;
        for q in 1..Q {
            let neq = f[q] - feq[q];
            let cx = CX[q] as f64;
            let cy = CY[q] as f64;
            pxx += cx * cx * neq;
            pyy += cy * cy * neq;
            pxy += cx * cy * neq;
        }
        let q_norm = (2.0 * (pxx * pxx + pyy * pyy + 2.0 * pxy * pxy)).sqrt();
        let cs2 = c.smagorinsky * c.smagorinsky;
        0.5 * (c.tau + (c.tau * c.tau + 18.0 * cs2 * q_norm / rho).sqrt())
    } else {
        c.tau
    };
    // ω⁺ = 1/τ⁺ and ω⁻ = 1/τ⁻ with τ⁻ = ½ + Λ/(τ⁺ − ½), from a single division.
    let excess = tau_plus - 0.5;
    let minus_num = 0.5 * excess + c.magic;
    let inv = 1.0 / (tau_plus * minus_num);
    let omega_plus = inv * minus_num;
    let omega_minus = inv * tau_plus * excess;
    let has_force = c.accel[0] != 0.0 || c.accel[1] != 0.0;
    let uf = ux * force[0] + uy * force[1];
    let f0 = f[0];
    f[0] = f0 - omega_plus * (f0 - feq[0])
        + if has_force {
            (1.0 - 0.5 * omega_plus) * W[0] * (-3.0 * uf)
        } else {
            0.0
        };
    // Pairs (q, opp q) for q in 1, 2, 5, 6 cover the eight moving links once.
    for &q in &[1usize, 2, 5, 6] {
        let o = OPP[q];
        let fp = 0.5 * (f[q] + f[o]);
        let fm = 0.5 * (f[q] - f[o]);
        let ep = 0.5 * (feq[q] + feq[o]);
        let em = 0.5 * (feq[q] - feq[o]);
        let relax_p = omega_plus * (fp - ep);
        let relax_m = omega_minus * (fm - em);
        let (src_p, src_m) = if has_force {
            let cx = CX[q] as f64;
            let cy = CY[q] as f64;
            let cu = cx * ux + cy * uy;
            let cf = cx * force[0] + cy * force[1];
            (
                (1.0 - 0.5 * omega_plus) * W[q] * (-3.0 * uf + 9.0 * cu * cf),
                (1.0 - 0.5 * omega_minus) * W[q] * 3.0 * cf,
            )
        } else {
            (0.0, 0.0)
        };
        f[q] += -relax_p - relax_m + src_p + src_m;
        f[o] += -relax_p + relax_m + src_p - src_m;
    }
    (rho, ux, uy)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn weights_and_velocities_satisfy_isotropy() {
        // Lattice isotropy conditions of D2Q9 (Qian et al. 1992): Σw = 1, Σw c c = c_s² I.
        let sum: f64 = W.iter().sum();
        assert!((sum - 1.0).abs() < 1e-15);
        let mut m = [[0.0; 2]; 2];
        for q in 0..Q {
            let c = [CX[q] as f64, CY[q] as f64];
            for a in 0..2 {
                for b in 0..2 {
                    m[a][b] += W[q] * c[a] * c[b];
                }
            }
            assert_eq!(CX[OPP[q]], -CX[q]);
            assert_eq!(CY[OPP[q]], -CY[q]);
            assert_eq!(CY[MIRROR_Y[q]], -CY[q]);
            assert_eq!(CX[MIRROR_Y[q]], CX[q]);
            assert_eq!(CX[MIRROR_X[q]], -CX[q]);
        }
        assert!((m[0][0] - 1.0 / 3.0).abs() < 1e-15);
        assert!((m[1][1] - 1.0 / 3.0).abs() < 1e-15);
        assert!(m[0][1].abs() < 1e-15);
    }

    #[test]
    fn collision_conserves_mass_and_momentum() {
        let mut f = equilibrium(1.02, 0.04, -0.03);
        // Perturb away from equilibrium so the collision does real work.
        for (q, value) in f.iter_mut().enumerate() {
            *value *= 1.0 + 0.01 * (q as f64 - 4.0);
        }
        let (rho0, ux0, uy0) = moments(&f, [0.0, 0.0]);
        let c = Collision {
            tau: 0.55,
            magic: 3.0 / 16.0,
            smagorinsky: 0.15,
            accel: [0.0, 0.0],
        };
        collide(&mut f, &c);
        let (rho1, ux1, uy1) = moments(&f, [0.0, 0.0]);
        assert!((rho1 - rho0).abs() < 1e-14);
        assert!((rho1 * ux1 - rho0 * ux0).abs() < 1e-14);
        assert!((rho1 * uy1 - rho0 * uy0).abs() < 1e-14);
    }

    #[test]
    fn equilibrium_is_a_fixed_point() {
        let mut f = equilibrium(0.98, 0.05, 0.02);
        let before = f;
        let c = Collision {
            tau: 0.8,
            magic: 0.25,
            smagorinsky: 0.17,
            accel: [0.0, 0.0],
        };
        collide(&mut f, &c);
        for q in 0..Q {
            assert!((f[q] - before[q]).abs() < 1e-15);
        }
    }

    #[test]
    fn force_adds_momentum_at_the_full_rate() {
        // With the Guo scheme the momentum after one collision grows by exactly F (Guo 2002).
        let accel = [1e-5, -2e-5];
        let rho = 1.03;
        let force = [rho * accel[0], rho * accel[1]];
        let mut f = equilibrium(rho, 0.01, 0.0);
        let c = Collision {
            tau: 0.7,
            magic: 3.0 / 16.0,
            smagorinsky: 0.0,
            accel,
        };
        let jx0: f64 = (0..Q).map(|q| CX[q] as f64 * f[q]).sum();
        let jy0: f64 = (0..Q).map(|q| CY[q] as f64 * f[q]).sum();
        collide(&mut f, &c);
        let jx1: f64 = (0..Q).map(|q| CX[q] as f64 * f[q]).sum();
        let jy1: f64 = (0..Q).map(|q| CY[q] as f64 * f[q]).sum();
        assert!((jx1 - jx0 - force[0]).abs() < 1e-15);
        assert!((jy1 - jy0 - force[1]).abs() < 1e-15);
    }
}
