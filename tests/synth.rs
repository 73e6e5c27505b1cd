//! Validation of the built-in flow solver against analytic solutions and a published
//! benchmark: plane Poiseuille flow, the decaying Taylor–Green vortex and the Schäfer & Turek
//! (1996) cylinder case 2D-1.

use crowsnest::synth::lattice::{viscosity_of_tau, Collision};
use crowsnest::synth::shapes::{rasterise, wall_fractions};
use crowsnest::synth::{Edge, Lattice, LatticeSetup, Shape, Side};

const MAGIC: f64 = 3.0 / 16.0;

fn collision(tau: f64, accel: [f64; 2]) -> Collision {
    Collision {
        tau,
        magic: MAGIC,
        smagorinsky: 0.0,
        accel,
    }
}

/// Relative L2 error of the steady profile of a body-force driven channel of `n_across`
/// fluid nodes against the parabola `u(y) = g/(2ν) (y − y0)(y1 − y)`.
///
/// `wall_offset = None` uses edge bounce-back (walls halfway outside the first and last
/// node); `Some(q)` places solid rows beyond the fluid and puts the walls at fraction `q` of
/// the last link, handled by the interpolated bounce-back.
fn poiseuille_error(n_across: usize, tau: f64, wall_offset: Option<f64>) -> f64 {
    poiseuille_error_magic(n_across, tau, wall_offset, MAGIC)
}

fn poiseuille_error_magic(n_across: usize, tau: f64, wall_offset: Option<f64>, magic: f64) -> f64 {
    let nu = viscosity_of_tau(tau);
    let nx = 3;
    let (ny, y0, y1, solid, fractions) = match wall_offset {
        None => (
            n_across,
            -0.5,
            n_across as f64 - 0.5,
            Vec::new(),
            Vec::new(),
        ),
        Some(q) => {
            let ny = n_across + 2;
            let y0 = 1.0 - q;
            let y1 = n_across as f64 + q;
            let shapes = [
                Shape::Polygon(vec![[-5.0, -5.0], [10.0, -5.0], [10.0, y0], [-5.0, y0]]),
                Shape::Polygon(vec![
                    [-5.0, y1],
                    [10.0, y1],
                    [10.0, 50.0 + y1],
                    [-5.0, 50.0 + y1],
                ]),
            ];
            let solid = rasterise(nx, ny, &shapes);
            let fractions = wall_fractions(nx, ny, &solid, &shapes);
            (ny, y0, y1, solid, fractions)
        }
    };
    let width = y1 - y0;
    // Fix the peak velocity (Mach number) at 0.05 so only the resolution changes.
    let u_max = 0.05;
    let g = 8.0 * nu * u_max / (width * width);
    let mut lattice = Lattice::new(LatticeSetup {
        nx,
        ny,
        collision: Collision {
            magic,
            ..collision(tau, [g, 0.0])
        },
        edges: [
            Edge::Periodic,
            Edge::Periodic,
            Edge::Velocity,
            Edge::Velocity,
        ],
        solid,
        wall_fraction: fractions,
        sponge: Vec::new(),
    });
    let exact = |y: f64| g / (2.0 * nu) * (y - y0) * (y1 - y);
    lattice.initialise(|_, j| (1.0, exact(j as f64), 0.0));
    // Started from the exact profile, the slowest transient decays as exp(−π²νt/H²); six
    // diffusion times leave e^-59 of it. (Interpolated walls do not conserve mass exactly, so a
    // periodic channel never reaches a bit-wise steady state; a fixed span avoids waiting.)
    let n_steps = (6.0 * width * width / nu).ceil() as usize;
    for _ in 0..n_steps {
        lattice.step();
    }
    let mut num = 0.0;
    let mut den = 0.0;
    for j in 0..ny {
        if lattice.is_solid(1, j) {
            continue;
        }
        let u = lattice.moments_at(1, j)[1];
        let e = exact(j as f64);
        num += (u - e) * (u - e);
        den += e * e;
    }
    (num / den).sqrt()
}

#[test]
fn poiseuille_profile_matches_the_parabola() {
    // Plane Poiseuille flow between parallel plates: u(y) = g/(2ν) y (H − y), the textbook
    // analytic solution of the Navier–Stokes equations (e.g. Batchelor 1967, §4.2).
    // Issue target: relative L2 error below 1e-2 with 16 nodes across, τ in 0.6–1.0.
    for tau in [0.6, 0.7, 0.8, 0.9, 1.0] {
        // The production setting: TRT with Λ = 3/16 and halfway bounce-back, which
        // Ginzburg et al. (2008) show reproduces the parabola exactly (round-off only).
        let trt = poiseuille_error(16, tau, None);
        let bgk_report = poiseuille_error_magic(16, tau, None, (tau - 0.5) * (tau - 0.5));
        eprintln!(
            "Poiseuille, 16 nodes, tau {tau}: TRT {trt:.2e}, BGK-equivalent {bgk_report:.2e}"
        );
        assert!(trt < 1e-9, "TRT, tau {tau}: rel L2 {trt}");
        // The single-relaxation (BGK) equivalent Λ = (τ − ½)² has the viscosity-dependent
        // wall slip analysed by He, Zou, Luo & Dembo (1997), J. Stat. Phys. 87; still within
        // the target at 16 nodes.
        let bgk = poiseuille_error_magic(16, tau, None, (tau - 0.5) * (tau - 0.5));
        assert!(bgk < 1e-2, "BGK-equivalent, tau {tau}: rel L2 {bgk}");
    }
}

#[test]
fn poiseuille_error_converges_at_second_order() {
    // Doubling the resolution at fixed τ and Mach number cuts the bounce-back slip error by
    // 4: second-order accuracy (He et al. 1997). Shown with the BGK-equivalent Λ because the
    // production Λ = 3/16 has no discretisation error to converge on this flow.
    for tau in [0.6, 0.8, 1.0] {
        let magic = (tau - 0.5) * (tau - 0.5);
        let coarse = poiseuille_error_magic(16, tau, None, magic);
        let fine = poiseuille_error_magic(32, tau, None, magic);
        let order = (coarse / fine).log2();
        eprintln!(
            "Poiseuille convergence, tau {tau}: {coarse:.3e} -> {fine:.3e}, order {order:.3}"
        );
        assert!(
            (1.8..=2.2).contains(&order),
            "tau {tau}: errors {coarse:e} -> {fine:e}, order {order}"
        );
    }
}

#[test]
fn taylor_green_vortex_decays_at_the_viscous_rate() {
    // Taylor (1923), Phil. Mag. 46: u = −U cos(kx) sin(ky), v = U sin(kx) cos(ky) decays as
    // exp(−2νk²t) on a doubly periodic square. Issue target: within 1 %.
    let n = 64;
    for tau in [0.6, 0.8, 1.0] {
        let nu = viscosity_of_tau(tau);
        let k = 2.0 * std::f64::consts::PI / n as f64;
        let u0 = 0.03;
        let mut lattice = Lattice::new(LatticeSetup {
            nx: n,
            ny: n,
            collision: collision(tau, [0.0, 0.0]),
            edges: [Edge::Periodic; 4],
            solid: Vec::new(),
            wall_fraction: Vec::new(),
            sponge: Vec::new(),
        });
        let shape_u = |i: usize, j: usize| -(k * i as f64).cos() * (k * j as f64).sin();
        let shape_v = |i: usize, j: usize| (k * i as f64).sin() * (k * j as f64).cos();
        lattice.initialise(|i, j| {
            let (x, y) = (k * i as f64, k * j as f64);
            // Pressure of the analytic solution, ρ = 1 + 3p in lattice units.
            let p = -0.25 * u0 * u0 * ((2.0 * x).cos() + (2.0 * y).cos());
            (1.0 + 3.0 * p, u0 * shape_u(i, j), u0 * shape_v(i, j))
        });
        // Run for one e-folding time of the amplitude.
        let n_steps = (1.0 / (2.0 * nu * k * k)).round() as usize;
        for _ in 0..n_steps {
            lattice.step();
        }
        let mut num = 0.0;
        let mut den = 0.0;
        for j in 0..n {
            for i in 0..n {
                let m = lattice.moments_at(i, j);
                num += m[1] * shape_u(i, j) + m[2] * shape_v(i, j);
                den += shape_u(i, j).powi(2) + shape_v(i, j).powi(2);
            }
        }
        let amplitude = num / den;
        let expected = u0 * (-2.0 * nu * k * k * n_steps as f64).exp();
        let rel = (amplitude - expected).abs() / expected;
        eprintln!(
            "Taylor–Green, tau {tau}: amplitude {amplitude:.6e} vs {expected:.6e}, rel {rel:.2e}"
        );
        assert!(
            rel < 1e-2,
            "tau {tau}: amplitude {amplitude}, expected {expected}, rel {rel}"
        );
    }
}

#[test]
fn schaefer_turek_2d1_drag_coefficient() {
    // Schäfer & Turek (1996), "Benchmark computations of laminar flow around a cylinder",
    // Notes Numer. Fluid Mech. 52, case 2D-1: channel 2.2 × 0.41, cylinder D = 0.1 centred at
    // (0.2, 0.2), parabolic inflow with U_max = 0.3, ν = 1e-3 (Re = Ū D / ν = 20); reference
    // drag coefficient C_D in [5.57, 5.59]. Issue target: within 3 % of that interval.
    let diameter: f64 = 20.0; // lattice units
    let scale = diameter / 0.1;
    let ny = (0.41 * scale).round() as usize;
    let nx = (2.2 * scale).round() as usize;
    let u_max = 0.1;
    let u_mean = 2.0 / 3.0 * u_max;
    let nu = u_mean * diameter / 20.0;
    let tau = 3.0 * nu + 0.5;
    // Walls sit halfway outside the first and last nodes: physical y = (j + 0.5) / scale.
    let to_lattice = |x: f64| x * scale - 0.5;
    let cylinder = Shape::Circle {
        centre: [to_lattice(0.2), to_lattice(0.2)],
        radius: diameter / 2.0,
    };
    let shapes = [cylinder];
    let solid = rasterise(nx, ny, &shapes);
    let fractions = wall_fractions(nx, ny, &solid, &shapes);
    let mut lattice = Lattice::new(LatticeSetup {
        nx,
        ny,
        collision: collision(tau, [0.0, 0.0]),
        edges: [
            Edge::Velocity,
            Edge::Pressure { rho: 1.0 },
            Edge::Velocity,
            Edge::Velocity,
        ],
        solid,
        wall_fraction: fractions,
        sponge: Vec::new(),
    });
    let height = ny as f64;
    let profile = |j: usize| {
        let y = j as f64 + 0.5;
        4.0 * u_max * y * (height - y) / (height * height)
    };
    for (j, u) in lattice.edge_velocity_mut(Side::West).iter_mut().enumerate() {
        *u = [profile(j), 0.0];
    }
    lattice.initialise(|_, j| (1.0, profile(j), 0.0));
    let drag = |l: &Lattice| 2.0 * l.solid_force()[0] / (u_mean * u_mean * diameter);
    let mut previous = f64::INFINITY;
    let mut cd = f64::NAN;
    for _ in 0..100 {
        for _ in 0..500 {
            lattice.step();
        }
        cd = drag(&lattice);
        if (cd - previous).abs() < 5e-5 * cd.abs() {
            break;
        }
        previous = cd;
    }
    eprintln!(
        "Schäfer–Turek 2D-1: C_D = {cd:.4} after {} steps",
        lattice.n_steps()
    );
    assert!(
        cd > 5.57 * 0.97 && cd < 5.59 * 1.03,
        "C_D = {cd}, expected within 3 % of [5.57, 5.59]"
    );
}
