//! Measurement operators (`sensors`): line-of-sight rows, range gates, blocking, point
//! interpolation and the consistency of `h`, `offset` and `stencil`, on hand-built sites.

#![allow(clippy::unwrap_used, clippy::needless_range_loop)]

use std::path::PathBuf;

use crowsnest::basis::Basis;
use crowsnest::io::*;
use crowsnest::sensors::{
    beam_traces, build_blocks, build_packed, weighting, BeamStop, Block, SensorError,
};

use crate::common::assert_close;

type FieldFn = Box<dyn Fn(PlanePoint, usize) -> f64>;

fn channel(name: &str, role: ChannelRole) -> Channel {
    Channel {
        name: name.into(),
        unit: "m/s".into(),
        role,
    }
}

fn uvw() -> Vec<Channel> {
    vec![
        channel("u", ChannelRole::VelocityX),
        channel("v", ChannelRole::VelocityY),
        channel("w", ChannelRole::VelocityZ),
    ]
}

fn grid_site(plane: Plane, nx: usize, ny: usize, spacing: f64, channels: Vec<Channel>) -> Site {
    Site {
        name: "hand-built".into(),
        root: PathBuf::from("."),
        plane,
        domain: Domain::Grid(Grid {
            origin: [0.0, 0.0],
            spacing: [spacing, spacing],
            nx,
            ny,
            solid: vec![false; nx * ny],
            weight: vec![spacing * spacing; nx * ny],
        }),
        channels,
        flow: FlowSource::Basis(BasisFiles {
            modes: "modes.npy".into(),
            mean: "mean.npy".into(),
            energies: "energies.csv".into(),
            dt: None,
        }),
        kinds: Vec::new(),
        candidates: Vec::new(),
        zones: Vec::new(),
        obstacles: Vec::new(),
        existing: Vec::new(),
        currency: String::new(),
        geo_origin: None,
        synth: None,
        warnings: Vec::new(),
    }
}

fn point_position(site: &Site, point_idx: usize) -> PlanePoint {
    match &site.domain {
        Domain::Grid(g) => [
            g.origin[0] + (point_idx % g.nx) as f64 * g.spacing[0],
            g.origin[1] + (point_idx / g.nx) as f64 * g.spacing[1],
        ],
        Domain::Points(c) => c.points[point_idx],
    }
}

/// A "basis" whose mean and modes are the given fields (not orthonormal: the operators do
/// not need it).
fn field_basis(site: &Site, mean: &FieldFn, modes: &[FieldFn]) -> Basis {
    let n_channels = site.n_channels();
    let value =
        |f: &FieldFn, dof: usize| f(point_position(site, dof / n_channels), dof % n_channels);
    Basis {
        n_points: site.n_points(),
        n_channels,
        mean: (0..site.n_dof()).map(|dof| value(mean, dof)).collect(),
        modes: faer::Mat::from_fn(site.n_dof(), modes.len(), |dof, m| value(&modes[m], dof)),
        energies: vec![1.0; modes.len()],
        weights: site.domain.weights().to_vec(),
    }
}

fn lidar(beams: &[(f64, f64)], first_gate: f64, n_gates: usize) -> SensorKind {
    SensorKind {
        name: "lidar".into(),
        measurement: Measurement::Beam(BeamPattern {
            beams: beams
                .iter()
                .map(|&(azimuth_deg, elevation_deg)| BeamDirection {
                    azimuth_deg,
                    elevation_deg,
                })
                .collect(),
            first_gate,
            gate_spacing: 20.0,
            n_gates,
            gate_length: 15.0,
            pulse_width: 10.0,
        }),
        noise_sd: 0.2,
        interval: 1.0,
        cost: 40_000.0,
    }
}

fn candidate(id: &str, position: PlanePoint, kind_idx: Vec<usize>) -> Candidate {
    Candidate {
        id: id.into(),
        position,
        height: None,
        kind_idx,
        mount_cost: 500.0,
        zone: String::new(),
        heading_deg: 0.0,
    }
}

fn square(name: &str, lo: PlanePoint, hi: PlanePoint) -> Obstacle {
    Obstacle {
        name: name.into(),
        polygon: Polygon {
            vertices: vec![lo, [hi[0], lo[1]], hi, [lo[0], hi[1]]],
        },
    }
}

/// Linear velocity fields, one per component, so that interpolated readings are exact.
fn linear_component(component: usize) -> FieldFn {
    Box::new(move |p, c| {
        if c == component {
            1.0 + 0.02 * p[0] - 0.03 * p[1]
        } else {
            0.0
        }
    })
}

/// `h` must equal the stencil applied to each mode, and `offset` the stencil applied to the
/// mean (the contract stated on `Block`).
fn assert_consistent(block: &Block, basis: &Basis) {
    for m in 0..basis.n_modes() {
        let column: Vec<f64> = basis.modes.col_as_slice(m).to_vec();
        let read = block.read_field(&column);
        for (row, value) in read.iter().enumerate() {
            assert_close(block.h[(row, m)], *value, 1e-12, 1e-12);
        }
    }
    for (row, value) in block.read_field(&basis.mean).iter().enumerate() {
        assert_close(block.offset[row], *value, 1e-12, 1e-12);
    }
}

#[test]
fn line_of_sight_rows_follow_the_projection_formula() {
    // v_r = u sin(az) cos(el) + v cos(az) cos(el) + w sin(el), az clockwise from north, el
    // above the horizon, positive away from the instrument (common practice for Doppler wind
    // lidar). The field is linear in space, so the bilinear reading and the symmetric range
    // average both return the value at the gate centre exactly.
    let mut site = grid_site(Plane::Xy, 81, 81, 5.0, uvw());
    let beams = [
        (90.0, 0.0),
        (0.0, 0.0),
        (0.0, 90.0),
        (30.0, 10.0),
        (225.0, 5.0),
    ];
    site.kinds = vec![lidar(&beams, 40.0, 4)];
    site.candidates = vec![candidate("roof-1", [200.0, 200.0], vec![0])];
    let zero: FieldFn = Box::new(|_, _| 0.0);
    let basis = field_basis(
        &site,
        &zero,
        &[
            linear_component(0),
            linear_component(1),
            linear_component(2),
        ],
    );
    let set = build_blocks(&site, &basis).unwrap();
    assert!(set.warnings.is_empty(), "{:?}", set.warnings);
    let block = &set.blocks[0];
    assert_eq!(block.n_rows(), beams.len() * 4);
    assert_consistent(block, &basis);
    let traces = beam_traces(&site, 0, 0);
    for (beam_idx, &(az, el)) in beams.iter().enumerate() {
        let (az, el) = (az.to_radians(), el.to_radians());
        let coefficients = [az.sin() * el.cos(), az.cos() * el.cos(), el.sin()];
        for gate_idx in 0..4 {
            let row = beam_idx * 4 + gate_idx;
            let centre = traces[beam_idx].gate_centres[gate_idx];
            let range = 40.0 + 20.0 * gate_idx as f64;
            let expected_centre = [
                200.0 + range * el.cos() * az.sin(),
                200.0 + range * el.cos() * az.cos(),
            ];
            assert_close(centre[0], expected_centre[0], 1e-9, 0.0);
            assert_close(centre[1], expected_centre[1], 1e-9, 0.0);
            for m in 0..3 {
                let expected = coefficients[m] * (1.0 + 0.02 * centre[0] - 0.03 * centre[1]);
                assert_close(block.h[(row, m)], expected, 1e-10, 1e-10);
            }
        }
    }
    // The cardinal cases see one component only, with no leakage at all.
    for m in 0..3 {
        let sees = |row: usize| block.h[(row, m)].abs() > 0.0;
        assert_eq!(sees(0), m == 0, "az 90°, el 0° sees only u");
        assert_eq!(sees(4), m == 1, "az 0°, el 0° sees only v");
        assert_eq!(sees(8), m == 2, "el 90° sees only w");
    }
    assert!(block.noise_var.iter().all(|&v| (v - 0.04).abs() < 1e-15));
    assert_close(block.cost, 40_500.0, 1e-9, 0.0);
}

#[test]
fn heading_rotates_every_beam() {
    let mut site = grid_site(Plane::Xy, 41, 41, 5.0, uvw());
    site.kinds = vec![lidar(&[(0.0, 0.0)], 30.0, 2)];
    let mut mast = candidate("mast", [100.0, 100.0], vec![0]);
    mast.heading_deg = 90.0;
    site.candidates = vec![mast];
    let traces = beam_traces(&site, 0, 0);
    assert_close(traces[0].azimuth_deg, 90.0, 1e-12, 0.0);
    assert_close(traces[0].gate_centres[0][0], 130.0, 1e-9, 0.0);
    assert_close(traces[0].gate_centres[0][1], 100.0, 1e-9, 0.0);
}

#[test]
fn vertical_slice_beams_lie_in_the_plane() {
    // In an x–z slice: az 90° = +x, 270° = −x; direction (sin az cos el, sin el);
    // v_r = u sin(az) cos(el) + w sin(el).
    let channels = vec![
        channel("u", ChannelRole::VelocityX),
        channel("w", ChannelRole::VelocityZ),
    ];
    let mut site = grid_site(Plane::Xz, 101, 41, 4.0, channels);
    let beams = [(90.0, 20.0), (270.0, 35.0), (90.0, 0.0)];
    site.kinds = vec![lidar(&beams, 30.0, 3)];
    site.candidates = vec![candidate("ground-lidar", [200.0, 0.0], vec![0])];
    let basis = field_basis(
        &site,
        &linear_component(0),
        &[linear_component(0), linear_component(1)],
    );
    let set = build_blocks(&site, &basis).unwrap();
    let block = &set.blocks[0];
    assert_consistent(block, &basis);
    let traces = beam_traces(&site, 0, 0);
    for (beam_idx, &(az, el)) in beams.iter().enumerate() {
        let (az, el) = (az.to_radians(), el.to_radians());
        for gate_idx in 0..3 {
            let range = 30.0 + 20.0 * gate_idx as f64;
            let centre = traces[beam_idx].gate_centres[gate_idx];
            assert_close(centre[0], 200.0 + range * az.sin() * el.cos(), 1e-9, 0.0);
            assert_close(centre[1], range * el.sin(), 1e-9, 0.0);
            let linear = 1.0 + 0.02 * centre[0] - 0.03 * centre[1];
            let row = beam_idx * 3 + gate_idx;
            assert_close(
                block.h[(row, 0)],
                az.sin() * el.cos() * linear,
                1e-10,
                1e-10,
            );
            assert_close(block.h[(row, 1)], el.sin() * linear, 1e-10, 1e-10);
            assert_close(
                block.offset[row],
                az.sin() * el.cos() * linear,
                1e-10,
                1e-10,
            );
        }
    }
}

#[test]
fn gate_readings_carry_the_range_weighting_spread() {
    // Along the beam u = (x − x_R)², so a gate reads the second moment of its weighting about
    // the gate centre. For the Gaussian pulse ⊗ rectangular gate, that is L²/12 + σ² (variances
    // of convolved densities add; Frehlich 1997 for the weighting) before the 3σ window cut; the
    // cut window's moment is computed here independently by Simpson's rule. Bilinear
    // interpolation of x² on spacing dx adds at most dx²/4.
    let dx = 0.25;
    let channels = vec![
        channel("u", ChannelRole::VelocityX),
        channel("v", ChannelRole::VelocityY),
    ];
    let mut site = grid_site(Plane::Xy, 1201, 3, dx, channels);
    let kind = lidar(&[(90.0, 0.0)], 100.0, 1);
    let Measurement::Beam(pattern) = kind.measurement.clone() else {
        unreachable!()
    };
    site.kinds = vec![kind];
    site.candidates = vec![candidate("pier", [20.0, 0.25], vec![0])];
    let centre_x = 120.0;
    let quadratic: FieldFn = Box::new(move |p, c| {
        if c == 0 {
            (p[0] - centre_x).powi(2)
        } else {
            0.0
        }
    });
    let basis = field_basis(&site, &quadratic, &[]);
    let set = build_blocks(&site, &basis).unwrap();
    let reading = set.blocks[0].offset[0];
    let half = weighting::window_half_width(pattern.gate_length, pattern.pulse_width);
    let n = 20_000;
    let h = 2.0 * half / n as f64;
    let (mut mass, mut moment) = (0.0, 0.0);
    for k in 0..=n {
        let s = -half + k as f64 * h;
        let simpson = if k == 0 || k == n {
            1.0
        } else if k % 2 == 1 {
            4.0
        } else {
            2.0
        };
        let w = weighting::range_weight(s, pattern.gate_length, pattern.pulse_width);
        mass += simpson * w;
        moment += simpson * w * s * s;
    }
    let expected = moment / mass;
    assert_close(reading, expected, dx * dx / 4.0 + 1e-6, 0.0);
    let sigma = weighting::pulse_sigma(pattern.pulse_width);
    let untruncated = pattern.gate_length.powi(2) / 12.0 + sigma * sigma;
    assert!(expected < untruncated && expected > 0.95 * untruncated);
}

#[test]
fn beam_blocked_at_its_first_gate_warns_and_leaves_no_block() {
    let mut site = grid_site(Plane::Xy, 61, 61, 5.0, uvw());
    site.kinds = vec![lidar(&[(90.0, 0.0)], 60.0, 5)];
    site.candidates = vec![candidate("behind-shed", [100.0, 100.0], vec![0])];
    site.obstacles = vec![square("shed", [120.0, 90.0], [140.0, 110.0])];
    let zero: FieldFn = Box::new(|_, _| 0.0);
    let basis = field_basis(&site, &zero, &[linear_component(0)]);
    let set = build_blocks(&site, &basis).unwrap();
    assert!(set.blocks.is_empty());
    assert_eq!(set.warnings.len(), 2, "{:?}", set.warnings);
    for needle in [
        "behind-shed",
        "lidar",
        "beam 0",
        "first gate",
        "obstacle 'shed'",
    ] {
        assert!(
            set.warnings[0].contains(needle),
            "{needle} in {}",
            set.warnings[0]
        );
    }
    assert!(set.warnings[1].contains("left out"));

    // With a second, clear beam the block keeps that beam's gates only.
    site.kinds = vec![lidar(&[(90.0, 0.0), (0.0, 0.0)], 60.0, 5)];
    let set = build_blocks(&site, &basis).unwrap();
    assert_eq!(set.blocks.len(), 1);
    assert_eq!(set.blocks[0].n_rows(), 5);
    assert_eq!(set.warnings.len(), 1);
    assert_consistent(&set.blocks[0], &basis);
}

#[test]
fn a_beam_through_an_obstacle_stops_at_it() {
    let mut site = grid_site(Plane::Xy, 81, 41, 5.0, uvw());
    site.kinds = vec![lidar(&[(90.0, 0.0), (270.0, 0.0)], 30.0, 10)];
    site.candidates = vec![candidate("quay-mast", [100.0, 100.0], vec![0])];
    site.obstacles = vec![square("warehouse-a", [210.0, 80.0], [260.0, 120.0])];
    let traces = beam_traces(&site, 0, 0);
    let east = &traces[0];
    assert_eq!(
        east.stop,
        BeamStop::Obstacle {
            name: "warehouse-a".into()
        }
    );
    assert_close(east.end_range, 110.0, 1e-9, 0.0);
    assert_close(east.end[0], 210.0, 1e-9, 0.0);
    // Gates kept: whole window (centre + L/2 + 3σ) before the wall.
    let half = weighting::window_half_width(15.0, 10.0);
    let expected = (0..10)
        .filter(|&g| 30.0 + 20.0 * g as f64 + half <= 110.0)
        .count();
    assert_eq!(east.gate_ranges.len(), expected);
    assert!(expected > 0 && expected < 10);
    assert!(east.gate_centres.iter().all(|c| c[0] < 210.0));
    // The westward beam runs to the domain edge at x = 0.
    let west = &traces[1];
    assert_eq!(west.stop, BeamStop::DomainEdge);
    assert_close(west.end_range, 100.0, 1e-9, 0.0);
}

#[test]
fn a_beam_stops_at_the_first_solid_cell() {
    let mut site = grid_site(Plane::Xy, 81, 41, 5.0, uvw());
    if let Domain::Grid(g) = &mut site.domain {
        for j in 0..g.ny {
            g.solid[j * g.nx + 40] = true; // a wall of cells at x = 200 m
        }
    }
    site.kinds = vec![lidar(&[(90.0, 0.0)], 30.0, 10)];
    site.candidates = vec![candidate("yard", [100.0, 100.0], vec![0])];
    let traces = beam_traces(&site, 0, 0);
    assert_eq!(traces[0].stop, BeamStop::Solid);
    // The solid cell starts half a spacing before its node.
    assert_close(traces[0].end_range, 97.5, 1e-6, 0.0);
}

#[test]
fn point_kinds_interpolate_and_renormalise_over_fluid_nodes() {
    let mut site = grid_site(Plane::Xy, 11, 11, 2.0, uvw());
    site.kinds = vec![
        SensorKind {
            name: "sonic".into(),
            measurement: Measurement::Point {
                channel_idx: vec![0, 1],
            },
            noise_sd: 0.1,
            interval: 1.0,
            cost: 3000.0,
        },
        SensorKind {
            name: "vane".into(),
            measurement: Measurement::Scalar { channel_idx: 2 },
            noise_sd: 0.5,
            interval: 1.0,
            cost: 300.0,
        },
    ];
    site.candidates = vec![
        candidate("a", [3.3, 7.1], vec![0, 1]),
        candidate("node", [4.0, 6.0], vec![0]),
        candidate("near-solid", [9.0, 9.0], vec![0]),
    ];
    if let Domain::Grid(g) = &mut site.domain {
        g.solid[4 * 11 + 5] = true; // node (5, 4) at (10, 8)
    }
    let mean: FieldFn = Box::new(|p, c| (c + 1) as f64 * (2.0 + 0.5 * p[0] - 0.25 * p[1]));
    let basis = field_basis(
        &site,
        &mean,
        &[
            linear_component(0),
            linear_component(1),
            linear_component(2),
        ],
    );
    let set = build_blocks(&site, &basis).unwrap();
    assert_eq!(set.blocks.len(), 4);
    let linear = |p: PlanePoint| 1.0 + 0.02 * p[0] - 0.03 * p[1];
    let a = &set.blocks[0];
    assert_eq!((a.kind_idx, a.n_rows()), (0, 2));
    assert_close(a.h[(0, 0)], linear([3.3, 7.1]), 1e-12, 1e-12);
    assert_close(a.h[(1, 1)], linear([3.3, 7.1]), 1e-12, 1e-12);
    assert_close(a.h[(0, 1)], 0.0, 1e-15, 0.0);
    assert_close(
        a.offset[1],
        2.0 * (2.0 + 0.5 * 3.3 - 0.25 * 7.1),
        1e-12,
        1e-12,
    );
    let vane = &set.blocks[1];
    assert_eq!((vane.kind_idx, vane.n_rows()), (1, 1));
    assert_close(vane.h[(0, 2)], linear([3.3, 7.1]), 1e-12, 1e-12);
    assert_close(vane.cost, 800.0, 1e-12, 0.0);
    // At a node: that node's value, one stencil entry per row.
    assert_eq!(set.blocks[2].stencil[0].len(), 1);
    assert_close(set.blocks[2].offset[0], 2.0 + 2.0 - 1.5, 1e-12, 0.0);
    // Beside a solid node: weights over the three fluid nodes sum to one, linear field exact
    // only up to the dropped node, so check the weights themselves.
    let near = &set.blocks[3];
    assert_eq!(near.stencil[0].len(), 3);
    assert!(near.stencil[0]
        .iter()
        .all(|&(dof, _)| dof / 3 != 4 * 11 + 5));
    assert_close(
        near.stencil[0].iter().map(|&(_, w)| w).sum::<f64>(),
        1.0,
        1e-14,
        0.0,
    );
    for block in &set.blocks {
        assert_consistent(block, &basis);
    }
}

#[test]
fn point_with_no_fluid_neighbour_is_an_error_naming_the_candidate() {
    let mut site = grid_site(Plane::Xy, 5, 5, 1.0, uvw());
    site.kinds = vec![SensorKind {
        name: "cup".into(),
        measurement: Measurement::Point {
            channel_idx: vec![0],
        },
        noise_sd: 0.3,
        interval: 1.0,
        cost: 1.0,
    }];
    site.candidates = vec![
        candidate("ok", [0.5, 0.5], vec![0]),
        candidate("in-block", [2.5, 2.5], vec![0]),
    ];
    if let Domain::Grid(g) = &mut site.domain {
        for idx in [12, 13, 17, 18] {
            g.solid[idx] = true;
        }
    }
    let zero: FieldFn = Box::new(|_, _| 0.0);
    let basis = field_basis(&site, &zero, &[linear_component(0)]);
    let err = build_blocks(&site, &basis).unwrap_err();
    assert!(matches!(err, SensorError::NoFluidNeighbour { .. }));
    let message = err.to_string();
    assert!(
        message.contains("in-block") && message.contains("cup"),
        "{message}"
    );

    site.candidates = vec![candidate("far", [9.0, 2.0], vec![0])];
    let message = build_blocks(&site, &basis).unwrap_err().to_string();
    assert!(
        message.contains("far") && message.contains("outside"),
        "{message}"
    );
}

#[test]
fn bad_noise_and_mismatched_basis_are_refused() {
    let mut site = grid_site(Plane::Xy, 5, 5, 1.0, uvw());
    let zero: FieldFn = Box::new(|_, _| 0.0);
    let basis = field_basis(&site, &zero, &[linear_component(0)]);
    for noise_sd in [0.0, -0.2, f64::NAN] {
        let mut kind = lidar(&[(0.0, 0.0)], 1.0, 1);
        kind.noise_sd = noise_sd;
        site.kinds = vec![kind];
        let message = build_blocks(&site, &basis).unwrap_err().to_string();
        assert!(
            message.contains("lidar") && message.contains("noise_sd"),
            "{message}"
        );
    }
    site.kinds.clear();
    let small = grid_site(Plane::Xy, 4, 5, 1.0, uvw());
    let other = field_basis(&small, &zero, &[linear_component(0)]);
    let message = build_blocks(&site, &other).unwrap_err().to_string();
    assert!(
        message.contains("basis point count") && message.contains("20"),
        "{message}"
    );
    let mut no_v = grid_site(
        Plane::Xy,
        5,
        5,
        1.0,
        vec![channel("u", ChannelRole::VelocityX)],
    );
    no_v.kinds = vec![lidar(&[(0.0, 0.0)], 1.0, 1)];
    let basis = field_basis(&no_v, &zero, &[]);
    let message = build_blocks(&no_v, &basis).unwrap_err().to_string();
    assert!(message.contains("velocity-y"), "{message}");
}

#[test]
fn inverse_distance_on_point_clouds_is_exact_at_a_node() {
    // Shepard (1968) inverse-distance weighting interpolates the data at the data points.
    let points: Vec<PlanePoint> = (0..200)
        .map(|k| {
            [
                (k % 20) as f64 * 3.0 + 0.1 * (k / 20) as f64,
                (k / 20) as f64 * 4.0,
            ]
        })
        .collect();
    let mut site = grid_site(Plane::Xy, 1, 1, 1.0, uvw());
    site.domain = Domain::Points(PointCloud {
        weight: vec![12.0; points.len()],
        points: points.clone(),
    });
    site.kinds = vec![SensorKind {
        name: "cup".into(),
        measurement: Measurement::Point {
            channel_idx: vec![0, 1],
        },
        noise_sd: 0.3,
        interval: 1.0,
        cost: 1.0,
    }];
    site.candidates = vec![
        candidate("on-node", points[57], vec![0]),
        candidate("between", [10.0, 10.0], vec![0]),
    ];
    let mean: FieldFn = Box::new(|p, c| p[0] + 10.0 * p[1] + c as f64);
    let basis = field_basis(&site, &mean, &[linear_component(0)]);
    let set = build_blocks(&site, &basis).unwrap();
    let node = &set.blocks[0];
    assert_eq!(node.stencil[0], vec![(57 * 3, 1.0)]);
    assert_close(
        node.offset[1],
        points[57][0] + 10.0 * points[57][1] + 1.0,
        1e-12,
        0.0,
    );
    let between = &set.blocks[1];
    assert_eq!(between.stencil[0].len(), 4);
    assert_close(
        between.stencil[0].iter().map(|&(_, w)| w).sum::<f64>(),
        1.0,
        1e-14,
        0.0,
    );
    for block in &set.blocks {
        assert_consistent(block, &basis);
    }
}

#[test]
fn blocks_are_identical_whatever_the_thread_count() {
    let mut site = grid_site(Plane::Xy, 41, 41, 5.0, uvw());
    site.kinds = vec![
        lidar(&[(10.0, 3.0), (100.0, 0.0)], 30.0, 4),
        SensorKind {
            name: "cup".into(),
            measurement: Measurement::Point {
                channel_idx: vec![0, 1],
            },
            noise_sd: 0.3,
            interval: 1.0,
            cost: 1.0,
        },
    ];
    site.candidates = (0..300)
        .map(|k| {
            candidate(
                &format!("c{k}"),
                [3.0 + (k % 30) as f64 * 6.5, 3.0 + (k / 30) as f64 * 19.0],
                vec![1, 0],
            )
        })
        .collect();
    site.obstacles = vec![square("block", [90.0, 90.0], [110.0, 130.0])];
    let mean: FieldFn = Box::new(|p, c| (p[0] * 0.013 + c as f64).sin() + p[1] * 0.002);
    let modes: Vec<FieldFn> = (0..5)
        .map(|m| -> FieldFn {
            Box::new(move |p, c| ((m + 1) as f64 * p[0] * 0.01 + c as f64 + p[1] * 0.003).cos())
        })
        .collect();
    let basis = field_basis(&site, &mean, &modes);
    let run = |n_threads: usize| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(n_threads)
            .build()
            .unwrap()
            .install(|| build_blocks(&site, &basis).unwrap())
    };
    let (one, two) = (run(1), run(2));
    assert_eq!(one.blocks.len(), two.blocks.len());
    assert_eq!(one.warnings, two.warnings);
    for (a, b) in one.blocks.iter().zip(&two.blocks) {
        assert_eq!(
            (a.candidate_idx, a.kind_idx, a.n_rows()),
            (b.candidate_idx, b.kind_idx, b.n_rows())
        );
        for row in 0..a.n_rows() {
            for m in 0..5 {
                assert_eq!(a.h[(row, m)].to_bits(), b.h[(row, m)].to_bits());
            }
        }
    }
    for block in one.blocks.iter().step_by(37) {
        assert_consistent(block, &basis);
    }
    // The packed form holds the same blocks, bit for bit, whatever the thread count.
    let packed = |n_threads: usize| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(n_threads)
            .build()
            .unwrap()
            .install(|| build_packed(&site, &basis).unwrap())
    };
    let (p1, p2) = (packed(1), packed(2));
    assert_eq!(
        p1.h.iter().map(|x| x.to_bits()).collect::<Vec<_>>(),
        p2.h.iter().map(|x| x.to_bits()).collect::<Vec<_>>()
    );
    assert_eq!(p1.n_blocks(), one.blocks.len());
    assert_eq!(p1.warnings, one.warnings);
    for (b, block) in one.blocks.iter().enumerate() {
        let unpacked = p1.block(b);
        assert_eq!(
            (unpacked.candidate_idx, unpacked.kind_idx),
            (block.candidate_idx, block.kind_idx)
        );
        assert_eq!(unpacked.stencil, block.stencil);
        assert_eq!(unpacked.offset, block.offset);
        assert_eq!(unpacked.noise_var, block.noise_var);
        assert_eq!(unpacked.cost.to_bits(), block.cost.to_bits());
        for row in 0..block.n_rows() {
            for m in 0..5 {
                assert_eq!(unpacked.h[(row, m)].to_bits(), block.h[(row, m)].to_bits());
            }
        }
    }
}

#[test]
fn range_weighting_matches_scipy_reference() {
    // Fixture from tests/fixtures/range-weighting/make.py: numerical convolution of the
    // rectangular gate with the Gaussian pulse density (scipy.integrate.quad, scipy.stats.norm),
    // independent of the erf closed form used here.
    let path =
        crate::common::repo_root().join("tests/fixtures/range-weighting/range_weighting.csv");
    let text = std::fs::read_to_string(path).unwrap();
    let mut n_rows = 0;
    for line in text.lines().skip(1) {
        let v: Vec<f64> = line.split(',').map(|x| x.parse().unwrap()).collect();
        let (gate_length, pulse_width, s, w, a, b, mass) =
            (v[0], v[1], v[2], v[3], v[4], v[5], v[6]);
        assert_close(
            weighting::range_weight(s, gate_length, pulse_width),
            w,
            1e-14,
            1e-10,
        );
        assert_close(
            weighting::range_weight_mass(a, b, gate_length, pulse_width),
            mass,
            1e-13,
            1e-9,
        );
        n_rows += 1;
    }
    assert_eq!(n_rows, 28);
}

#[test]
fn beams_on_point_clouds_stop_at_gaps_and_the_cloud_edge() {
    // A 2 m lattice with a hole (no points) from x = 60 to 80 m: an eastward beam stops where
    // the nearest point is farther than twice the typical spacing; a westward one at x = 0.
    let mut points = Vec::new();
    for j in 0..21 {
        for i in 0..61 {
            let p = [i as f64 * 2.0, j as f64 * 2.0];
            if !(60.0..=80.0).contains(&p[0]) || j < 3 {
                points.push(p);
            }
        }
    }
    let mut site = grid_site(Plane::Xy, 1, 1, 1.0, uvw());
    site.domain = Domain::Points(PointCloud {
        weight: vec![4.0; points.len()],
        points,
    });
    site.kinds = vec![lidar(&[(90.0, 0.0), (270.0, 0.0)], 10.0, 3)];
    site.candidates = vec![candidate("cloud-mast", [30.0, 20.0], vec![0])];
    let traces = beam_traces(&site, 0, 0);
    assert_eq!(traces[0].stop, BeamStop::Solid);
    // Nearest point beyond 4 m once x > 58 + 4 = 62 m, i.e. 32 m of range.
    assert_close(traces[0].end_range, 32.0, 1e-6, 0.0);
    assert_eq!(traces[1].stop, BeamStop::DomainEdge);
    assert_close(traces[1].end_range, 30.0, 1e-9, 0.0);
    let zero: FieldFn = Box::new(|_, _| 0.0);
    let basis = field_basis(&site, &zero, &[linear_component(0)]);
    let set = build_blocks(&site, &basis).unwrap();
    let kept: usize = traces.iter().map(|t| t.gate_ranges.len()).sum();
    assert_eq!(set.blocks[0].n_rows(), kept);
    assert_consistent(&set.blocks[0], &basis);
}
