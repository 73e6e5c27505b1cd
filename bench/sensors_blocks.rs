//! Benchmark: measurement operators for 1,000,000 point candidates × 50 modes on a 500 × 500
//! grid with two channels (the size `select` ranks at). Times `sensors::build_packed` and,
//! on a tenth of the candidates, `sensors::build_blocks` (one `Block` each). Prints
//! `name seconds` lines for `bench/sensors_blocks.sh`. No timing is asserted.

use std::path::PathBuf;
use std::time::Instant;

use crowsnest::basis::Basis;
use crowsnest::io::*;
use crowsnest::sensors::{build_blocks, build_packed};
use rand::{Rng, SeedableRng};
use rand_distr::StandardNormal;

const NX: usize = 500;
const NY: usize = 500;
const N_MODES: usize = 50;
const N_CANDIDATES: usize = 1_000_000;

fn main() {
    let spacing = 2.0;
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(2024);
    let mut solid = vec![false; NX * NY];
    // A few solid blocks so some stencils are renormalised.
    for j in 100..140 {
        for i in 200..260 {
            solid[j * NX + i] = true;
        }
    }
    let channels = ["u", "v"]
        .iter()
        .zip([ChannelRole::VelocityX, ChannelRole::VelocityY])
        .map(|(name, role)| Channel {
            name: name.to_string(),
            unit: "m/s".into(),
            role,
        })
        .collect::<Vec<_>>();
    let extent = [(NX - 1) as f64 * spacing, (NY - 1) as f64 * spacing];
    let candidates: Vec<Candidate> = (0..N_CANDIDATES)
        .filter_map(|k| {
            let p = [
                rng.random_range(0.0..extent[0]),
                rng.random_range(0.0..extent[1]),
            ];
            let (i, j) = (
                (p[0] / spacing).round() as usize,
                (p[1] / spacing).round() as usize,
            );
            (!solid[j * NX + i]).then(|| Candidate {
                id: format!("c{k}"),
                position: p,
                height: None,
                kind_idx: vec![0],
                mount_cost: 0.0,
                zone: String::new(),
                heading_deg: 0.0,
            })
        })
        .collect();
    let site = Site {
        name: "bench".into(),
        root: PathBuf::from("."),
        plane: Plane::Xy,
        domain: Domain::Grid(Grid {
            origin: [0.0, 0.0],
            spacing: [spacing, spacing],
            nx: NX,
            ny: NY,
            weight: solid
                .iter()
                .map(|&s| if s { 0.0 } else { spacing * spacing })
                .collect(),
            solid,
        }),
        channels,
        flow: FlowSource::Basis(BasisFiles {
            modes: "modes.npy".into(),
            mean: "mean.npy".into(),
            energies: "energies.csv".into(),
            dt: None,
        }),
        kinds: vec![SensorKind {
            name: "sonic-u".into(),
            measurement: Measurement::Point {
                channel_idx: vec![0],
            },
            noise_sd: 0.2,
            interval: 1.0,
            cost: 1000.0,
        }],
        candidates,
        zones: Vec::new(),
        obstacles: Vec::new(),
        existing: Vec::new(),
        currency: String::new(),
        geo_origin: None,
        synth: None,
        warnings: Vec::new(),
    };
    let n_dof = site.n_dof();
    let basis = Basis {
        n_points: site.n_points(),
        n_channels: 2,
        mean: (0..n_dof).map(|_| rng.sample(StandardNormal)).collect(),
        modes: faer::Mat::from_fn(n_dof, N_MODES, |_, _| rng.sample(StandardNormal)),
        energies: vec![1.0; N_MODES],
        weights: site.domain.weights().to_vec(),
    };
    println!(
        "# {} candidates, {} modes, {} threads",
        site.candidates.len(),
        N_MODES,
        rayon::current_num_threads()
    );

    let mut best = f64::INFINITY;
    let mut checksum = 0.0;
    for _ in 0..3 {
        let start = Instant::now();
        let packed = build_packed(&site, &basis).expect("bench site is valid");
        best = best.min(start.elapsed().as_secs_f64());
        checksum = packed.h.iter().step_by(9973).sum::<f64>();
    }
    println!("build_packed {best:.4}");
    println!("# checksum {checksum:.6}");

    // The same candidates in row order, as a candidates.csv laid out by hand usually is.
    // Rebuilt in that order (not sorted in place), so each candidate's own allocations lie in
    // order too, as when a site is loaded from a sorted file.
    let mut order: Vec<usize> = (0..site.candidates.len()).collect();
    let key = |c: &Candidate| ((c.position[1] / spacing) as usize, c.position[0]);
    order.sort_by(|&a, &b| {
        let (ka, kb) = (key(&site.candidates[a]), key(&site.candidates[b]));
        ka.0.cmp(&kb.0).then(ka.1.total_cmp(&kb.1))
    });
    let mut sorted = site.clone();
    sorted.candidates = order.iter().map(|&k| site.candidates[k].clone()).collect();
    let mut best_sorted = f64::INFINITY;
    for _ in 0..3 {
        let start = Instant::now();
        let packed = build_packed(&sorted, &basis).expect("bench site is valid");
        best_sorted = best_sorted.min(start.elapsed().as_secs_f64());
        std::hint::black_box(&packed);
    }
    println!("build_packed_sorted {best_sorted:.4}");

    let mut tenth = site.clone();
    tenth.candidates.truncate(N_CANDIDATES / 10);
    let start = Instant::now();
    let set = build_blocks(&tenth, &basis).expect("bench site is valid");
    println!("build_blocks_tenth {:.4}", start.elapsed().as_secs_f64());
    println!("# blocks {}", set.blocks.len());
}
