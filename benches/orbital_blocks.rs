//! Cost of the block path of the Born loop (coupling matrices, Σ0 as full
//! b × b blocks) against the diagonal path on the same device: a two-band
//! p–n junction of 24 cells, 121 energies, one phonon mode. "diagonal":
//! per-site couplings D on both bands; "blocks-same": the same coupling as
//! single-orbital matrices √D e_s e_sᵀ (same answer, block storage and
//! sandwiches); "blocks-interband": one σ_x source per cell.
//!
//! Run: `cargo bench --bench orbital_blocks -- --sample-size 10 --warm-up-time 1 --measurement-time 5`

use criterion::{Criterion, criterion_group, criterion_main};
use faer::Mat;
use qheat::C64;
use qheat::grid::EnergyGrid;
use qheat::model::Problem;
use qheat::scattering::{CouplingMatrices, PhononMode};
use qheat::scba::{self, ScbaParams, Silent};
use std::hint::black_box;

#[path = "../tests/common/mod.rs"]
mod common;

fn junction(cells: usize) -> Problem {
    let (ec, ev, t) = (0.25, -0.25, 0.1);
    let onsite: Vec<Mat<C64>> = (0..cells)
        .map(|i| {
            let u = if i < cells / 2 { 0.3 } else { -0.3 };
            Mat::from_fn(2, 2, |r, c| match (r, c) {
                (0, 0) => C64::new(ec + 2.0 * t + u, 0.0),
                (1, 1) => C64::new(ev - 2.0 * t + u, 0.0),
                _ => C64::new(0.0, 0.0),
            })
        })
        .collect();
    let hop = Mat::from_fn(2, 2, |r, c| match (r, c) {
        (0, 0) => C64::new(-t, 0.0),
        (1, 1) => C64::new(t, 0.0),
        (_, _) => C64::new(0.01, 0.0),
    });
    let device = qheat::device::blocks(0.5, onsite, vec![hop], vec![0.0; cells]).unwrap();
    let grid = EnergyGrid::new(-0.3, 0.005, 121);
    common::coherent_problem(device, (0.03, 300.0), (-0.03, 300.0), grid)
}

fn with_mode(p: &Problem, diag: Vec<f64>, sources: Vec<Mat<C64>>) -> Problem {
    let mut q = p.clone();
    let n = q.device.cells();
    q.scattering.phonons = vec![PhononMode {
        requested_energy_ev: 0.02,
        energy_ev: 0.02,
        steps: 4,
        coupling_ev2: diag,
        coupling_matrices: CouplingMatrices {
            per_cell: if sources.is_empty() {
                Vec::new()
            } else {
                vec![sources; n]
            },
        },
        bath_temperature_k: 300.0,
    }];
    q
}

fn bench(c: &mut Criterion) {
    let base = junction(24);
    let n = base.device.cells();
    let d: f64 = 9e-4;
    let single = |o: usize| {
        Mat::from_fn(2, 2, |r, c| {
            C64::new(if r == o && c == o { d.sqrt() } else { 0.0 }, 0.0)
        })
    };
    let sigma_x = Mat::from_fn(2, 2, |r, c| C64::new(if r != c { 0.03 } else { 0.0 }, 0.0));
    let cases = [
        ("diagonal", with_mode(&base, vec![d; 2 * n], Vec::new())),
        (
            "blocks-same",
            with_mode(&base, Vec::new(), vec![single(0), single(1)]),
        ),
        (
            "blocks-interband",
            with_mode(&base, Vec::new(), vec![sigma_x]),
        ),
    ];
    let params = ScbaParams::default().with_tolerance(1e-9);
    let mut g = c.benchmark_group("orbital_blocks");
    for (name, p) in &cases {
        let s = scba::solve(p, &params, None, &mut Silent).unwrap();
        println!(
            "{name}: {} Born iterations, converged {}",
            s.report.iterations, s.report.converged
        );
        g.bench_function(*name, |b| {
            b.iter(|| black_box(scba::solve(p, &params, None, &mut Silent).unwrap()))
        });
    }
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
