//! Lattice thermal conductance κ_ph(T) at 100 temperatures of a 1000-cell
//! chain: one transmission spectrum (the costly part, one recursive solve
//! per frequency point) reused for every temperature. Two devices: a mass
//! junction (light half, heavy half: Ξ smooth below the heavy band top)
//! and a mass superlattice in the middle half (Ξ with hundreds of
//! resonances and gaps, which the refinement must resolve to 1e-8).
//!
//! Measured (2-core shared host, rustc 1.95.0, release, medians): junction
//! 13.8 ms for the spectrum and 100 temperatures (7.7 ms spectrum, 0.32 ms
//! for the 100 sums); superlattice 2.8 s (2.7 s spectrum, 94 ms for the
//! 100 sums: its spectrum needs tens of thousands of frequency points).
//!
//! Run: `cargo bench --bench lattice -- --sample-size 10 --warm-up-time 1 --measurement-time 5`

use criterion::{Criterion, criterion_group, criterion_main};
use qheat::lattice::{Lattice, PhononSpectrum, SpectrumParams};
use std::hint::black_box;

fn junction(cells: usize) -> Lattice {
    let masses: Vec<f64> = (0..cells)
        .map(|i| if i < cells / 2 { 28.0 } else { 42.0 })
        .collect();
    Lattice::chain(&masses, &vec![7.0; cells]).expect("valid chain")
}

fn superlattice(cells: usize) -> Lattice {
    // Every third site of the middle half is 1.5 times heavier.
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
    bench_device(c, "lattice_kappa_junction_1000", &junction(1000));
    bench_device(c, "lattice_kappa_superlattice_1000", &superlattice(1000));
}

fn bench_device(c: &mut Criterion, name: &str, lat: &Lattice) {
    let temps = temperatures();
    let params = SpectrumParams {
        temperatures_k: vec![1.0, 10.0, 100.0, 1000.0],
        ..Default::default()
    };
    let mut g = c.benchmark_group(name);
    g.bench_function("spectrum_and_100_temperatures", |b| {
        b.iter(|| {
            let s = PhononSpectrum::compute(black_box(lat), &params).expect("converges");
            temps.iter().map(|&t| s.conductance(t)).sum::<f64>()
        })
    });
    g.bench_function("spectrum_only", |b| {
        b.iter(|| PhononSpectrum::compute(black_box(lat), &params).expect("converges"))
    });
    let s = PhononSpectrum::compute(lat, &params).expect("converges");
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
