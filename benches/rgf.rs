//! RGF kernel per energy: scaling with the number of cells, effective flop
//! rate at large blocks against faer's own complex product, and the small
//! block product (plain loop against faer) that decides the kernel's
//! small-block path.
//!
//! Run: `cargo bench --bench rgf -- --sample-size 10 --warm-up-time 1 --measurement-time 3`

use criterion::{BenchmarkId, Criterion, Throughput, criterion_group, criterion_main};
use faer::Mat;
use qheat::C64;
use qheat::rgf::{EnergyInput, EnergyOutput, Workspace, solve_energy};
use std::hint::black_box;

#[path = "../tests/common/mod.rs"]
mod common;
use common::{Rng, random_hermitian, random_matrix, random_psd, random_self_energy};

struct Case {
    onsite: Vec<Mat<C64>>,
    coupling: Vec<Mat<C64>>,
    sl: Mat<C64>,
    sr: Mat<C64>,
    inl: Mat<C64>,
    inr: Mat<C64>,
    sc_r: Vec<C64>,
    sc_in: Vec<f64>,
}

fn case(n: usize, b: usize) -> Case {
    let mut rng = Rng::new(7 + n as u64 + 1000 * b as u64);
    let onsite = (0..n).map(|_| random_hermitian(&mut rng, b)).collect();
    let coupling = (0..n - 1).map(|_| random_matrix(&mut rng, b)).collect();
    Case {
        onsite,
        coupling,
        sl: random_self_energy(&mut rng, b),
        sr: random_self_energy(&mut rng, b),
        inl: random_psd(&mut rng, b, 0.5),
        inr: random_psd(&mut rng, b, 0.5),
        sc_r: (0..n * b).map(|_| C64::new(0.0, -0.01)).collect(),
        sc_in: (0..n * b).map(|_| 0.005).collect(),
    }
}

struct Runner {
    c: Case,
    ws: Workspace,
    gr: Vec<C64>,
    gn: Vec<f64>,
    bond: Vec<f64>,
}

impl Runner {
    fn new(n: usize, b: usize) -> Self {
        Self {
            c: case(n, b),
            ws: Workspace::new(n, b),
            gr: vec![C64::new(0.0, 0.0); n * b],
            gn: vec![0.0; n * b],
            bond: vec![0.0; n - 1],
        }
    }
    fn run(&mut self) {
        let c = &self.c;
        let input = EnergyInput {
            energy_ev: 0.3,
            onsite: &c.onsite,
            coupling: &c.coupling,
            sigma_left: &c.sl,
            sigma_right: &c.sr,
            inscatter_left: &c.inl,
            inscatter_right: &c.inr,
            scatter_retarded: &c.sc_r,
            scatter_in: &c.sc_in,
            want_transmission: false,
        };
        let f = solve_energy(
            &input,
            &mut self.ws,
            EnergyOutput {
                retarded: &mut self.gr,
                filled: &mut self.gn,
                bond: &mut self.bond,
                full: None,
            },
        )
        .unwrap();
        black_box(f);
    }
}

fn chain(c: &mut Criterion) {
    let mut g = c.benchmark_group("rgf_chain_b1");
    for n in [250, 1000, 4000] {
        let mut r = Runner::new(n, 1);
        g.bench_with_input(BenchmarkId::from_parameter(n), &n, |bch, _| {
            bch.iter(|| r.run())
        });
    }
    g.finish();
}

fn strip(c: &mut Criterion) {
    let mut g = c.benchmark_group("rgf_strip_b16");
    for n in [50, 200] {
        let mut r = Runner::new(n, 16);
        g.bench_with_input(BenchmarkId::from_parameter(n), &n, |bch, _| {
            bch.iter(|| r.run())
        });
    }
    g.finish();
}

/// Real flops of one energy of the block algorithm (see src/rgf/block.rs):
/// 15 b³ complex multiply-adds per cell, 8 real flops each.
fn rgf_flops(n: usize, b: usize) -> u64 {
    (n * 15 * 8 * b * b * b) as u64
}

fn wide(c: &mut Criterion) {
    let mut g = c.benchmark_group("rgf_wide_n64");
    let n = 64;
    for b in [64, 128] {
        let mut r = Runner::new(n, b);
        g.throughput(Throughput::Elements(rgf_flops(n, b)));
        g.bench_with_input(BenchmarkId::new("rgf", b), &b, |bch, _| {
            bch.iter(|| r.run())
        });
        let mut rng = Rng::new(b as u64);
        let x = random_matrix(&mut rng, b);
        let y = random_matrix(&mut rng, b);
        let mut z = Mat::<C64>::zeros(b, b);
        g.throughput(Throughput::Elements((8 * b * b * b) as u64));
        g.bench_with_input(BenchmarkId::new("faer_product", b), &b, |bch, _| {
            bch.iter(|| {
                faer::linalg::matmul::matmul(
                    z.as_mut(),
                    faer::Accum::Replace,
                    x.as_ref(),
                    y.as_ref(),
                    C64::new(1.0, 0.0),
                    faer::Par::Seq,
                );
                black_box(&z);
            })
        });
    }
    g.finish();
}

/// The plain loop of the kernel's small-block path.
fn plain_product(z: &mut Mat<C64>, x: &Mat<C64>, y: &Mat<C64>) {
    let b = x.nrows();
    for c in 0..b {
        for r in 0..b {
            let mut s = C64::new(0.0, 0.0);
            for l in 0..b {
                s += x[(r, l)] * y[(l, c)];
            }
            z[(r, c)] = s;
        }
    }
}

fn small(c: &mut Criterion) {
    let mut g = c.benchmark_group("small_product");
    for b in [2, 4, 8, 12, 16] {
        let mut rng = Rng::new(b as u64);
        let x = random_matrix(&mut rng, b);
        let y = random_matrix(&mut rng, b);
        let mut z = Mat::<C64>::zeros(b, b);
        g.bench_with_input(BenchmarkId::new("plain", b), &b, |bch, _| {
            bch.iter(|| {
                plain_product(&mut z, black_box(&x), black_box(&y));
                black_box(&z);
            })
        });
        g.bench_with_input(BenchmarkId::new("faer", b), &b, |bch, _| {
            bch.iter(|| {
                faer::linalg::matmul::matmul(
                    z.as_mut(),
                    faer::Accum::Replace,
                    black_box(&x).as_ref(),
                    black_box(&y).as_ref(),
                    C64::new(1.0, 0.0),
                    faer::Par::Seq,
                );
                black_box(&z);
            })
        });
    }
    g.finish();
}

criterion_group!(benches, chain, strip, wide, small);
criterion_main!(benches);
