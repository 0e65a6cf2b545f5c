//! Lattice thermal conductance κ_ph(T) at 100 temperatures of a 1000-cell
//! chain with a mass-disordered middle: one transmission spectrum (the
//! costly part, one recursive solve per frequency point) reused for every
//! temperature. Also the spectrum alone and the 100 temperatures alone.
//!
//! Run: `cargo bench --bench lattice -- --sample-size 10 --warm-up-time 1 --measurement-time 5`

use criterion::{Criterion, criterion_group, criterion_main};
use qheat::lattice::{Lattice, PhononSpectrum, SpectrumParams};
use std::hint::black_box;

fn chain(cells: usize) -> Lattice {
    // Every third site of the middle half is 1.5 times heavier: Ξ is not a
    // plain step, so the refinement has work to do.
    let masses: Vec<f64> = (0..cells)
        .map(|i| {
            let middle = i > cells / 4 && i < 3 * cells / 4;
            if middle && i % 3 == 0 { 42.0 } else { 28.0 }
        })
        .collect();
    Lattice::chain(&masses, &vec![7.0; cells]).expect("valid chain")
}

fn temperatures() -> Vec<f64> {
    (0..100).map(|j| 1.0 + 9.99 * j as f64).collect()
}

fn kappa(c: &mut Criterion) {
    let lat = chain(1000);
    let temps = temperatures();
    let params = SpectrumParams {
        temperatures_k: vec![1.0, 10.0, 100.0, 1000.0],
        ..Default::default()
    };
    let mut g = c.benchmark_group("lattice_kappa_chain_1000");
    g.bench_function("spectrum_and_100_temperatures", |b| {
        b.iter(|| {
            let s = PhononSpectrum::compute(black_box(&lat), &params).expect("converges");
            temps.iter().map(|&t| s.conductance(t)).sum::<f64>()
        })
    });
    g.bench_function("spectrum_only", |b| {
        b.iter(|| PhononSpectrum::compute(black_box(&lat), &params).expect("converges"))
    });
    let s = PhononSpectrum::compute(&lat, &params).expect("converges");
    g.bench_function("100_temperatures_only", |b| {
        b.iter(|| {
            temps
                .iter()
                .map(|&t| black_box(&s).conductance(t))
                .sum::<f64>()
        })
    });
    g.finish();
}

criterion_group!(benches, kappa);
criterion_main!(benches);
