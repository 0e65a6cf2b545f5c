//! The recursive Green's function kernel against a dense inversion of the
//! whole matrix. This identity is the definition of correct signs: the
//! diagonal and first off-diagonal blocks of G^r and G^n, the terminal flows,
//! the bond flows and the transmission must agree to 1e-10 relative (dense
//! LU and the recursion differ only by rounding, ~1e-14 at these sizes; 1e-10
//! leaves room for the condition number of random blocks). Source of the
//! recursion: R. Lake, G. Klimeck, R. C. Bowen, D. Jovanovic, J. Appl. Phys.
//! 81, 7845 (1997); the dense inverse is the definition it must reproduce.

#![allow(clippy::needless_range_loop)]

mod common;
use common::*;
use faer::Mat;
use faer::linalg::solvers::DenseSolveCore;
use qheat::C64;
use qheat::rgf::{EnergyInput, EnergyOutput, FullBlocks, Workspace, solve_energy};

struct Case {
    b: usize,
    n: usize,
    onsite: Vec<Mat<C64>>,
    coupling: Vec<Mat<C64>>,
    sl: Mat<C64>,
    sr: Mat<C64>,
    inl: Mat<C64>,
    inr: Mat<C64>,
    sc_r: Vec<C64>,
    sc_in: Vec<f64>,
    energy: f64,
}

fn random_case(seed: u64, b: usize, n: usize) -> Case {
    let mut rng = Rng::new(seed);
    let onsite = (0..n).map(|_| random_hermitian(&mut rng, b)).collect();
    let coupling = (0..n - 1).map(|_| random_matrix(&mut rng, b)).collect();
    let sl = random_self_energy(&mut rng, b);
    let sr = random_self_energy(&mut rng, b);
    let gl = qheat::leads::broadening(&sl);
    let gr = qheat::leads::broadening(&sr);
    let (fl, fr) = (0.7, 0.2);
    let inl = Mat::from_fn(b, b, |r, c| gl[(r, c)] * fl);
    let inr = Mat::from_fn(b, b, |r, c| gr[(r, c)] * fr);
    let sc_r = (0..n * b)
        .map(|_| C64::new(0.1 * rng.uniform(), -0.05 * (1.0 + rng.uniform())))
        .collect::<Vec<_>>();
    let sc_in = sc_r
        .iter()
        .map(|s| -2.0 * s.im * 0.5 * (1.0 + rng.uniform()))
        .collect();
    Case {
        b,
        n,
        onsite,
        coupling,
        sl,
        sr,
        inl,
        inr,
        sc_r,
        sc_in,
        energy: 0.3 * rng.uniform(),
    }
}

struct Dense {
    g: Mat<C64>,
    gn: Mat<C64>,
}

fn dense(c: &Case) -> Dense {
    let (b, n) = (c.b, c.n);
    let dim = b * n;
    let mut m = Mat::<C64>::zeros(dim, dim);
    let mut sin = Mat::<C64>::zeros(dim, dim);
    for i in 0..n {
        for r in 0..b {
            for s in 0..b {
                m[(i * b + r, i * b + s)] = -c.onsite[i][(r, s)];
            }
            m[(i * b + r, i * b + r)] += C64::new(c.energy, 0.0) - c.sc_r[i * b + r];
            sin[(i * b + r, i * b + r)] += C64::new(c.sc_in[i * b + r], 0.0);
        }
        if i + 1 < n {
            for r in 0..b {
                for s in 0..b {
                    m[(i * b + r, (i + 1) * b + s)] = -c.coupling[i][(r, s)];
                    m[((i + 1) * b + s, i * b + r)] = -c.coupling[i][(r, s)].conj();
                }
            }
        }
    }
    let last = (n - 1) * b;
    for r in 0..b {
        for s in 0..b {
            m[(r, s)] -= c.sl[(r, s)];
            m[(last + r, last + s)] -= c.sr[(r, s)];
            sin[(r, s)] += c.inl[(r, s)];
            sin[(last + r, last + s)] += c.inr[(r, s)];
        }
    }
    let g = m.partial_piv_lu().inverse();
    let gn = &g * &sin * g.adjoint();
    Dense { g, gn }
}

fn spectral(g: &Mat<C64>) -> Mat<C64> {
    Mat::from_fn(g.nrows(), g.ncols(), |r, c| {
        (g[(r, c)] - g[(c, r)].conj()) * C64::new(0.0, 1.0)
    })
}

fn trace(m: &Mat<C64>) -> C64 {
    (0..m.nrows()).map(|i| m[(i, i)]).sum()
}

fn check(seed: u64, b: usize, n: usize, full: bool) {
    let c = random_case(seed, b, n);
    let d = dense(&c);
    let input = EnergyInput {
        energy_ev: c.energy,
        onsite: &c.onsite,
        coupling: &c.coupling,
        sigma_left: &c.sl,
        sigma_right: &c.sr,
        inscatter_left: &c.inl,
        inscatter_right: &c.inr,
        scatter_retarded: &c.sc_r,
        scatter_in: &c.sc_in,
        want_transmission: true,
    };
    let mut ws = Workspace::new(n, b);
    let mut gr = vec![C64::new(0.0, 0.0); n * b];
    let mut gn = vec![0.0; n * b];
    let mut bond = vec![0.0; n - 1];
    let mut blocks = FullBlocks::default();
    let flows = solve_energy(
        &input,
        &mut ws,
        EnergyOutput {
            retarded: &mut gr,
            filled: &mut gn,
            bond: &mut bond,
            full: if full { Some(&mut blocks) } else { None },
        },
    )
    .unwrap();
    let scale_g = max_abs(&d.g);
    let scale_n = max_abs(&d.gn);
    let tol = 1e-10;
    for i in 0..n {
        for o in 0..b {
            let s = i * b + o;
            assert!(
                (gr[s] - d.g[(s, s)]).norm() <= tol * scale_g,
                "G^r diag b={b} cell {i}"
            );
            assert!(
                (gn[s] - d.gn[(s, s)].re).abs() <= tol * scale_n,
                "G^n diag b={b} cell {i}"
            );
        }
    }
    if full {
        for i in 0..n {
            let dd = block(&d.g, b, i, i);
            assert!(max_diff(&blocks.retarded_diagonal[i], &dd) <= tol * scale_g);
            let dn = block(&d.gn, b, i, i);
            assert!(max_diff(&blocks.filled_diagonal[i], &dn) <= tol * scale_n);
            if i + 1 < n {
                let lo = block(&d.g, b, i + 1, i);
                assert!(
                    max_diff(&blocks.retarded_lower[i], &lo) <= tol * scale_g,
                    "G^r_i+1,i"
                );
                let lon = block(&d.gn, b, i + 1, i);
                assert!(
                    max_diff(&blocks.filled_lower[i], &lon) <= tol * scale_n,
                    "G^n_i+1,i"
                );
            }
        }
    }
    // Bond flows: Tr[i(H_i,i+1 G^n_i+1,i − G^n_i,i+1 H_i+1,i)].
    for i in 0..n - 1 {
        let h = &c.coupling[i];
        let lower = block(&d.gn, b, i + 1, i);
        let upper = block(&d.gn, b, i, i + 1);
        let x = h * &lower - &upper * h.adjoint();
        let expect = (trace(&x) * C64::new(0.0, 1.0)).re;
        let scale = max_abs(h) * scale_n * b as f64;
        assert!(
            (bond[i] - expect).abs() <= tol * scale,
            "bond {i}: {} vs {expect}",
            bond[i]
        );
    }
    // Terminal flows Tr[Σin A − Γ G^n] on the end blocks, and transmission.
    let last = n - 1;
    let a0 = spectral(&block(&d.g, b, 0, 0));
    let an = spectral(&block(&d.g, b, last, last));
    let gl = qheat::leads::broadening(&c.sl);
    let grr = qheat::leads::broadening(&c.sr);
    let left = trace(&(&c.inl * &a0 - &gl * block(&d.gn, b, 0, 0))).re;
    let right = trace(&(&c.inr * &an - &grr * block(&d.gn, b, last, last))).re;
    let scale = max_abs(&gl).max(max_abs(&grr)) * scale_g.max(scale_n) * (b * b) as f64;
    assert!((flows.left - left).abs() <= tol * scale);
    assert!((flows.right - right).abs() <= tol * scale);
    let g1n = block(&d.g, b, 0, last);
    let t = trace(&(&gl * &g1n * &grr * g1n.adjoint())).re;
    assert!(
        (flows.transmission - t).abs() <= tol * scale * scale_g,
        "T {} vs {t}",
        flows.transmission
    );
}

#[test]
fn scalar_chain_matches_dense() {
    for seed in 0..5 {
        check(seed, 1, 17, false);
    }
}

#[test]
fn scalar_chain_full_blocks_match_dense() {
    check(11, 1, 9, true);
}

#[test]
fn three_orbital_blocks_match_dense() {
    for seed in 0..3 {
        check(100 + seed, 3, 12, true);
        check(200 + seed, 3, 12, false);
    }
}

#[test]
fn eight_orbital_blocks_match_dense() {
    check(7, 8, 10, true);
}

#[test]
fn two_cells() {
    check(5, 2, 2, true);
    check(6, 1, 2, false);
}

/// N = 1: both leads and the scattering self-energy act on the same block,
/// there is no bond, and G_1N is G_11 (T = Tr[Γ1 G Γ2 G†]).
#[test]
fn one_cell_both_leads_on_the_same_block() {
    check(21, 1, 1, true);
    check(22, 1, 1, false);
    check(23, 3, 1, true);
    check(24, 3, 1, false);
}
