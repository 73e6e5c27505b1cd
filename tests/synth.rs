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
        // The benchmark setting: TRT with Λ = 3/16 and halfway bounce-back, which
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
fn poiseuille_at_the_demo_settings_and_with_solid_halfway_walls() {
    // Same parabola (Batchelor 1967, §4.2), 16 nodes across, at the demo sites' Λ = 1/4
    // (`synth::setup`) and with the walls the demo obstacles use: solid nodes with halfway
    // bounce-back (`Some(0.5)`: solid rows outside the fluid, wall half a link away), rather
    // than the edge rule. Halfway bounce-back at a solid node is the same link rule as the
    // edge one, so the two must agree to round-off.
    //
    // Ginzburg, Verhaeghe & d'Humières (2008): a TRT steady state depends on τ only through
    // Λ, and Λ = 3/16 is the value that puts the bounce-back wall exactly halfway for this
    // flow; any other Λ leaves a viscosity-independent slip of second order in the spacing.
    // So: round-off at 3/16; at 1/4 an error below the 1e-2 that is the same for
    // every τ, including the demo's τ ≈ 0.51.
    let mut quarter = Vec::new();
    for tau in [0.51, 0.6, 0.8, 1.0] {
        let edge = poiseuille_error_magic(16, tau, None, 0.25);
        let solid = poiseuille_error_magic(16, tau, Some(0.5), 0.25);
        let exact_walls = poiseuille_error(16, tau, Some(0.5));
        eprintln!(
            "Poiseuille, 16 nodes, tau {tau}: Λ 1/4 edge {edge:.4e}, Λ 1/4 solid {solid:.4e}, \
             Λ 3/16 solid {exact_walls:.2e}"
        );
        assert!(
            exact_walls < 1e-9,
            "Λ 3/16, solid halfway walls, tau {tau}: {exact_walls}"
        );
        assert!(
            edge < 1e-2 && solid < 1e-2,
            "Λ 1/4, tau {tau}: {edge}, {solid}"
        );
        assert!(
            (edge - solid).abs() < 1e-9 * edge,
            "Λ 1/4, tau {tau}: edge {edge} vs solid {solid}"
        );
        quarter.push(solid);
    }
    let (lo, hi) = quarter
        .iter()
        .fold((f64::INFINITY, 0.0f64), |(lo, hi), &e| {
            (lo.min(e), hi.max(e))
        });
    assert!(
        hi - lo < 1e-6 * hi,
        "Λ 1/4 error depends on τ: {quarter:?} (Ginzburg et al. 2008: it must not)"
    );
    // And it is a second-order slip: doubling the resolution cuts it by 4.
    let fine = poiseuille_error_magic(32, 0.8, Some(0.5), 0.25);
    let order = (quarter[2] / fine).log2();
    eprintln!("Poiseuille, Λ 1/4, solid walls: 16 -> 32 nodes, order {order:.3}");
    assert!((1.8..=2.2).contains(&order), "order {order}");
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

/// Mode amplitude of a Taylor–Green vortex on an `n`² doubly periodic lattice after
/// `n_steps`, started at amplitude `u0` with the analytic pressure.
fn taylor_green_amplitude(n: usize, u0: f64, collision: Collision, n_steps: usize) -> f64 {
    let k = 2.0 * std::f64::consts::PI / n as f64;
    let mut lattice = Lattice::new(LatticeSetup {
        nx: n,
        ny: n,
        collision,
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
    num / den
}

#[test]
fn taylor_green_vortex_decays_at_the_viscous_rate() {
    // Taylor (1923), Phil. Mag. 46: u = −U cos(kx) sin(ky), v = U sin(kx) cos(ky) decays as
    // exp(−2νk²t) on a doubly periodic square. Issue target: within 1 %. Both TRT parameters:
    // Λ = 3/16 (the benchmarks) and Λ = 1/4 (the demo sites, `synth::setup`).
    let n = 64;
    let k = 2.0 * std::f64::consts::PI / n as f64;
    for magic in [MAGIC, 0.25] {
        for tau in [0.6, 0.8, 1.0] {
            let nu = viscosity_of_tau(tau);
            let u0 = 0.03;
            // Run for one e-folding time of the amplitude.
            let n_steps = (1.0 / (2.0 * nu * k * k)).round() as usize;
            let c = Collision {
                magic,
                ..collision(tau, [0.0, 0.0])
            };
            let amplitude = taylor_green_amplitude(n, u0, c, n_steps);
            let expected = u0 * (-2.0 * nu * k * k * n_steps as f64).exp();
            let rel = (amplitude - expected).abs() / expected;
            eprintln!(
                "Taylor–Green, Λ {magic}, tau {tau}: amplitude {amplitude:.6e} vs \
                 {expected:.6e}, rel {rel:.2e}"
            );
            assert!(
                rel < 1e-2,
                "Λ {magic}, tau {tau}: amplitude {amplitude}, expected {expected}, rel {rel}"
            );
        }
    }
}

#[test]
fn taylor_green_at_the_demo_settings_low_viscosity_and_smagorinsky() {
    // The demo sites run TRT with Λ = 1/4, τ₀ ≈ 0.506–0.509 (cell Reynolds number 20 at the
    // lattice speed of the mean wind) and the Smagorinsky model with C_S = 0.15
    // (`synth::setup`). Same Taylor (1923) vortex, 64², τ₀ = 0.51, amplitude 0.04 (the demo's
    // mean-wind lattice speed), one e-folding time of the laminar decay.
    let n = 64;
    let k = 2.0 * std::f64::consts::PI / n as f64;
    let tau = 0.51;
    let nu = viscosity_of_tau(tau);
    let u0 = 0.04;
    let c_s = 0.15;
    let n_steps = (1.0 / (2.0 * nu * k * k)).round() as usize;
    let t = n_steps as f64;
    let laminar_expected = u0 * (-2.0 * nu * k * k * t).exp();
    let demo = |smagorinsky: f64| Collision {
        tau,
        magic: 0.25,
        smagorinsky,
        accel: [0.0, 0.0],
    };

    // 1. Smagorinsky off: the low-viscosity TRT step keeps Taylor's rate within 1 %.
    let laminar = taylor_green_amplitude(n, u0, demo(0.0), n_steps);
    let rel = (laminar - laminar_expected).abs() / laminar_expected;
    eprintln!(
        "Taylor–Green, Λ 1/4, tau {tau}: {laminar:.6e} vs {laminar_expected:.6e}, rel {rel:.2e}"
    );
    assert!(
        rel < 1e-2,
        "laminar: {laminar} vs {laminar_expected}, rel {rel}"
    );

    // 2. Smagorinsky on. The model adds ν_t = (C_S Δ)²|S| with |S| = √(2 S:S) (Smagorinsky
    // 1963; Hou et al. 1996 with Δ = 1). For this vortex |S| = 2Uk|sin kx sin ky|, so the
    // strain-weighted eddy viscosity that drains the mode is
    //   ν_t,eff = C_S² ⟨|S|³⟩/⟨|S|²⟩ = C_S² · 2Uk · (4/(3π))² / (1/4) = C_S² U k · 128/(9π²)
    // (⟨|sin|³⟩ = 4/(3π), ⟨sin²⟩ = 1/2; derived here), about 3.8 % of ν at U = 0.04. The check:
    // (a) the eddy viscosity stays small on this smooth, resolved flow — the amplitude lies
    //     below the laminar one by less than 4 % after one e-folding time;
    // (b) it is the model's size, not a defect — the amplitude follows
    //     dU/dt = −2k²(ν + ν_t,eff(U)) U within 0.5 %.
    let smag = taylor_green_amplitude(n, u0, demo(c_s), n_steps);
    let factor = c_s * c_s * k * 128.0 / (9.0 * std::f64::consts::PI.powi(2));
    // Integrate the amplitude equation with RK4 in lattice time.
    let rhs = |u: f64| -2.0 * k * k * (nu + factor * u) * u;
    let mut u = u0;
    let h = 1.0;
    for _ in 0..n_steps {
        let k1 = rhs(u);
        let k2 = rhs(u + 0.5 * h * k1);
        let k3 = rhs(u + 0.5 * h * k2);
        let k4 = rhs(u + h * k3);
        u += h / 6.0 * (k1 + 2.0 * k2 + 2.0 * k3 + k4);
    }
    let deficit = 1.0 - smag / laminar;
    let rel_model = (smag - u).abs() / u;
    eprintln!(
        "Taylor–Green + Smagorinsky: {smag:.6e}, laminar run {laminar:.6e} (deficit {deficit:.3e}), \
         eddy-viscosity model {u:.6e} (rel {rel_model:.2e}); ν_t,eff/ν at t = 0: {:.3e}",
        factor * u0 / nu
    );
    assert!(
        deficit > 0.0 && deficit < 0.04,
        "Smagorinsky drains {deficit} of the amplitude (expected small, < 4 %)"
    );
    assert!(
        rel_model < 5e-3,
        "amplitude {smag} vs eddy-viscosity model {u}, rel {rel_model}"
    );
}

#[test]
fn schaefer_turek_2d1_drag_coefficient() {
    // Schäfer & Turek (1996), "Benchmark computations of laminar flow around a cylinder",
    // Notes Numer. Fluid Mech. 52, case 2D-1: channel 2.2 × 0.41, cylinder D = 0.1 centred at
    // (0.2, 0.2), parabolic inflow with U_max = 0.3, ν = 1e-3 (Re = Ū D / ν = 20); reference
    // drag coefficient C_D in [5.57, 5.59]. Issue target: within 3 % of that interval.
    // D = 16 lattice units: 352 × 66 nodes. D = 20 gave C_D = 5.607 in 64 s of CPU time;
    // D = 16 stays within the target at about half the cost (docs/performance.md).
    let diameter: f64 = 16.0; // lattice units
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

/// One run of the outflow test: a channel `nx` long with uniform inflow `u` on the west and
/// far-field sides, the east edge `east` (with the demo's sponge when convective), and an
/// isolated vortex started at `x0`. Returns the velocity of the first `window` columns at
/// every `every` steps up to `n_steps`.
fn vortex_channel(
    nx: usize,
    east: Edge,
    window: usize,
    every: usize,
    n_steps: usize,
) -> Vec<Vec<[f64; 2]>> {
    let ny = 48;
    let u = 0.04;
    // The demo sites' collision: τ₀ from a cell Reynolds number u/ν = 20, Λ = 1/4, C_S = 0.15.
    let collision = Collision {
        tau: 0.5 + 3.0 * u / 20.0,
        magic: 0.25,
        smagorinsky: 0.15,
        accel: [0.0, 0.0],
    };
    // The demo sponge (`synth::setup`): 6 nodes (30 m at 5 m), extra viscosity rising
    // quadratically to 0.05 at the edge.
    let sponge_nodes = 6.0;
    let sponge = (0..nx * ny)
        .map(|idx| {
            let distance = (nx - 1 - idx % nx) as f64;
            if east == Edge::Convective && distance < sponge_nodes {
                let depth = (sponge_nodes - distance) / sponge_nodes;
                0.05 * depth * depth
            } else {
                0.0
            }
        })
        .collect();
    let mut lattice = Lattice::new(LatticeSetup {
        nx,
        ny,
        collision,
        edges: [Edge::Velocity, east, Edge::Velocity, Edge::Velocity],
        solid: Vec::new(),
        wall_fraction: Vec::new(),
        sponge,
    });
    for side in [Side::West, Side::South, Side::North] {
        for v in lattice.edge_velocity_mut(side).iter_mut() {
            *v = [u, 0.0];
        }
    }
    if east == Edge::Velocity {
        for v in lattice.edge_velocity_mut(Side::East).iter_mut() {
            *v = [u, 0.0];
        }
    }
    // Vortex u_θ = V (r/R) exp(½(1 − r²/R²)) with its balancing pressure
    // p = −ρV²/2 exp(1 − r²/R²) (ρ = 1 + 3p), so the start emits little sound.
    let (x0, y0, radius, v) = (32.0, 23.5, 5.0, 0.02);
    lattice.initialise(|i, j| {
        let (dx, dy) = (i as f64 - x0, j as f64 - y0);
        let r2 = (dx * dx + dy * dy) / (radius * radius);
        let g = (0.5 * (1.0 - r2)).exp();
        let p = -0.5 * v * v * (1.0 - r2).exp();
        (1.0 + 3.0 * p, u - v * g * dy / radius, v * g * dx / radius)
    });
    let mut frames = Vec::new();
    for step in 1..=n_steps {
        lattice.step();
        if step % every == 0 {
            let mut frame = Vec::with_capacity(window * ny);
            for j in 0..ny {
                for i in 0..window {
                    let m = lattice.moments_at(i, j);
                    frame.push([m[1], m[2]]);
                }
            }
            frames.push(frame);
        }
    }
    frames
}

#[test]
fn convective_outflow_with_sponge_barely_reflects_a_vortex() {
    // The issue asks for an outflow that does not reflect. Test by the extended-domain
    // comparison that is common practice for artificial boundaries (e.g. Colonius 2004,
    // Annu. Rev. Fluid Mech. 36, "Modeling artificial boundary conditions for compressible
    // flow"): the same vortex is advected through (A) a channel of length L ending in the
    // convective outflow (Yang 2013, Phys. Rev. E 88, 013303) with the demo sponge, and
    // (B) a channel of length 2L. Over the window x < L − 16 the two runs differ only by
    // what A's outflow sends back until B's own outflow can be felt there: the vortex
    // reaches B's outflow only after the run ends, and B's start-up sound has to cross
    // 2L − 16 and back. Measure Σ|u_A − u_B|² over the window at every sample and divide by
    // the vortex's own perturbation energy Σ|u_B(0) − U|².
    let nx = 128;
    let window = nx - 16;
    let every = 50;
    // The vortex (V = 0.02, R = 5 at x = 32, U = 0.04) reaches x = L after 2 400 steps and
    // has left by about 3 000; 4 000 steps also cover what comes back.
    let n_steps = 4000;
    let a = vortex_channel(nx, Edge::Convective, window, every, n_steps);
    let b = vortex_channel(2 * nx, Edge::Convective, window, every, n_steps);
    let initial = vortex_channel(2 * nx, Edge::Convective, window, 1, 1);
    let u = 0.04;
    let vortex_energy: f64 = initial[0]
        .iter()
        .map(|w| (w[0] - u).powi(2) + w[1].powi(2))
        .sum();
    let difference = |x: &[Vec<[f64; 2]>]| -> Vec<f64> {
        x.iter()
            .zip(&b)
            .map(|(fa, fb)| {
                fa.iter()
                    .zip(fb)
                    .map(|(p, q)| (p[0] - q[0]).powi(2) + (p[1] - q[1]).powi(2))
                    .sum::<f64>()
                    / vortex_energy
            })
            .collect()
    };
    let reflected = difference(&a);
    let peak = reflected.iter().cloned().fold(0.0, f64::max);
    // The same measure for an outflow that is not open: the east edge prescribes the uniform
    // stream, so the vortex must be pushed back. It shows the measure can see a reflection.
    let closed = vortex_channel(nx, Edge::Velocity, window, every, n_steps);
    let closed_peak = difference(&closed).iter().cloned().fold(0.0, f64::max);
    eprintln!(
        "outflow reflection: peak reflected/vortex energy {peak:.3e} (convective + sponge), \
         {closed_peak:.3e} (prescribed-velocity east edge)"
    );
    // Measured 1.4e-4 (docs/synth.md); a prescribed edge gives about 1e-2.
    assert!(
        peak < 1e-3,
        "reflected energy {peak} of the vortex's (expected below 0.1 %)"
    );
    assert!(
        closed_peak > 10.0 * peak,
        "the measure does not tell an open outflow ({peak}) from a closed one ({closed_peak})"
    );
}
