//! What the lattice adds to a solve: the peltier-barrier demo (100 cells,
//! one optical phonon, self-consistent Born loop) solved as `qheat solve`
//! does, once as written and once with the phonon spectrum of its
//! `[lattice]` computed too (a fresh spectrum every iteration, as the
//! first solve of a case pays it) and κ_ph taken at 300 K.
//!
//! Measured (2-core shared host, rustc 1.95.0, release, medians of 10
//! samples): electrons only 11.6 ms, electrons and lattice 13.1 ms (+13 %),
//! the lattice alone 1.7 ms (420 frequency points).
//!
//! Run: `cargo bench --bench phonon_solve -- --sample-size 10 --warm-up-time 1 --measurement-time 10`

use criterion::{Criterion, criterion_group, criterion_main};
use qheat::case::Case;
use qheat::lattice::{PhononSpectrum, SpectrumParams};
use qheat::scba::{Silent, solve};
use std::hint::black_box;
use std::path::Path;

fn peltier(c: &mut Criterion) {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo/peltier-barrier.toml");
    let r = Case::load(&path)
        .expect("demo loads")
        .resolve()
        .expect("resolves");
    let lattice = r.lattice.clone().expect("the demo has a [lattice]");
    let mut g = c.benchmark_group("peltier-barrier solve");
    g.bench_function("electrons only", |b| {
        b.iter(|| black_box(solve(&r.problem, &r.scba, None, &mut Silent).expect("solves")))
    });
    g.bench_function("electrons and lattice", |b| {
        b.iter(|| {
            let sol = solve(&r.problem, &r.scba, None, &mut Silent).expect("solves");
            let s =
                PhononSpectrum::compute(&lattice, &SpectrumParams::default()).expect("spectrum");
            black_box((sol, s.conductance(300.0)))
        })
    });
    g.bench_function("lattice only", |b| {
        b.iter(|| {
            let s =
                PhononSpectrum::compute(&lattice, &SpectrumParams::default()).expect("spectrum");
            black_box(s.conductance(300.0))
        })
    });
    g.finish();
}

criterion_group!(benches, peltier);
criterion_main!(benches);
