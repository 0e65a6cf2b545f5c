//! Full Born solves of a fixed chain (one phonon, ~1000 energies, a fixed
//! number of iterations) against the dense-matrix Born solver of
//! tests/common/dense_scba.rs, and the speed-up from one to two threads.
//!
//! The dense solver is too slow to run the whole grid: it is timed for one
//! iteration over a handful of energies of the same problem and its time is
//! scaled linearly in energies and iterations (each energy is an
//! independent dense inversion; the rebuild of Σ0 is negligible next to it).
//! Both solvers run on one thread for the ratio.
//!
//! Run: `cargo bench --bench scba -- --sample-size 10 --warm-up-time 1 --measurement-time 3`

use criterion::{BenchmarkId, Criterion, criterion_group, criterion_main};
use qheat::grid::EnergyGrid;
use qheat::model::Problem;
use qheat::scba::{self, EnergyOrder, LeadTable, Mixing, ScbaParams, Silent};
use std::hint::black_box;

#[path = "../tests/common/mod.rs"]
mod common;

/// Energies of the benchmark grid and the dense sample.
const ENERGIES: usize = 1000;
const DENSE_ENERGIES: usize = 4;
const ITERATIONS: usize = 10;

/// Chain of `cells` cells (0.3 nm, m* = 0.07) with a 0.1 eV barrier in the
/// middle tenth, µL = 0.1 eV, µR = 0.05 eV at 300 K, one 36 meV phonon with
/// D = 2e-3 eV² everywhere, on `energies` points of 0.5 meV from 0.
fn problem(cells: usize, energies: usize, first: usize) -> Problem {
    let step = 0.0005;
    let grid = EnergyGrid::new(step * (0.5 + first as f64), step, energies);
    let device = common::barrier_chain(cells, 0.3, 0.07, 9 * cells / 20, 11 * cells / 20, 0.1);
    let mut p = common::coherent_problem(device, (0.1, 300.0), (0.05, 300.0), grid);
    let mask = vec![true; cells];
    // The phonon is snapped on the full grid (72 steps) in both cases.
    let full = EnergyGrid::new(step * 0.5, step, ENERGIES);
    p.scattering.phonons = vec![common::phonon(&full, 0.036, 2e-3, &mask, 300.0)];
    p
}

fn fixed_iterations() -> ScbaParams {
    ScbaParams::default()
        .with_tolerance(0.0)
        .with_current_floor_a(0.0)
        .with_max_iterations(ITERATIONS)
        .with_mixing(Mixing::default())
        // The default: red-black for this one-phonon chain. An iteration is
        // one pass over the grid in either order; this one also rebuilds Σ0
        // on half the grid in between.
        .with_energy_order(EnergyOrder::Auto)
}

fn pool(threads: usize) -> rayon::ThreadPool {
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .unwrap()
}

fn against_dense(c: &mut Criterion) {
    faer::set_global_parallelism(faer::Par::Seq);
    let one = pool(1);
    let params = fixed_iterations();
    for cells in [100, 400, 1000] {
        let mut g = c.benchmark_group(format!("scba_chain_n{cells}"));
        let p = problem(cells, ENERGIES, 0);
        let leads = LeadTable::new(&p).unwrap();
        g.bench_function(
            BenchmarkId::new("rgf_full_solve", format!("{ENERGIES}E_{ITERATIONS}it")),
            |b| {
                b.iter(|| {
                    one.install(|| {
                        let s =
                            scba::solve_with_leads(&p, &leads, &params, None, &mut Silent).unwrap();
                        assert_eq!(s.report.iterations, ITERATIONS);
                        black_box(s.pass.flows.len())
                    })
                })
            },
        );
        // Energies from the middle of the grid (inside the band, near µ).
        let de = if cells >= 1000 { 1 } else { DENSE_ENERGIES };
        let d = problem(cells, de, ENERGIES / 4);
        g.bench_function(
            BenchmarkId::new("dense_one_iteration", format!("{de}E")),
            |b| {
                b.iter(|| {
                    one.install(|| {
                        let r = common::dense_scba::dense_sweeps(&d, 1);
                        black_box(r.iterations)
                    })
                })
            },
        );
        g.finish();
    }
}

fn threads(c: &mut Criterion) {
    let params = fixed_iterations();
    let p = problem(400, ENERGIES, 0);
    let leads = LeadTable::new(&p).unwrap();
    let mut g = c.benchmark_group("scba_threads_n400");
    for t in [1, 2] {
        let pl = pool(t);
        g.bench_with_input(BenchmarkId::from_parameter(t), &t, |b, _| {
            b.iter(|| {
                pl.install(|| {
                    let s = scba::solve_with_leads(&p, &leads, &params, None, &mut Silent).unwrap();
                    black_box(s.pass.flows.len())
                })
            })
        });
    }
    g.finish();
}

criterion_group!(benches, against_dense, threads);
criterion_main!(benches);
