//! Phonon probes: the multi-terminal network of a lattice with damping on
//! its sites, the floating lattice temperatures and the conductance with
//! the probes floating.

mod common;
use common::Rng;
use faer::Mat;
use faer::linalg::solvers::DenseSolveCore;
use qheat::C64;
use qheat::lattice::{
    FloatParams, Lattice, PhononLead, PhononSpectrum, ProbeError, ProbeNetwork, SpectrumParams,
    TerminalMatrix,
};
use qheat::leads::broadening;

// A silicon-like mass and a spring of a few N/m: ω_max ≈ 24 rad/ps.
const M: f64 = 28.0855;
const K: f64 = 7.0;

/// Uniform in [0, 1).
fn u01(rng: &mut Rng) -> f64 {
    0.5 * (1.0 + rng.uniform())
}

/// A chain of random masses and springs between leads of their own, with
/// damping on the sites where `damped(i)`.
fn disordered_chain(seed: u64, n: usize, damped: impl Fn(usize) -> bool) -> Lattice {
    let mut rng = Rng::new(seed);
    let masses: Vec<f64> = (0..n).map(|_| 12.0 + 60.0 * u01(&mut rng)).collect();
    let springs: Vec<f64> = (0..n - 1).map(|_| 3.0 + 12.0 * u01(&mut rng)).collect();
    let gamma: Vec<f64> = (0..n)
        .map(|i| {
            if damped(i) {
                0.2 + 2.0 * u01(&mut rng)
            } else {
                0.0
            }
        })
        .collect();
    let left = PhononLead::chain(28.0, 8.0, 5.0);
    let right = PhononLead::chain(40.0, 10.0, 12.0);
    Lattice::chain_with_leads(&masses, &springs, left, right)
        .unwrap()
        .with_damping(gamma)
        .unwrap()
}

/// A 3-wide strip of random cells with damping on two sites in three.
fn damped_strip(seed: u64, n: usize) -> Lattice {
    let mut rng = Rng::new(seed);
    let masses: Vec<f64> = (0..n).map(|_| 20.0 + 30.0 * u01(&mut rng)).collect();
    let long: Vec<f64> = (0..n).map(|_| 5.0 + 10.0 * u01(&mut rng)).collect();
    let trans: Vec<f64> = (0..n).map(|_| 2.0 + 8.0 * u01(&mut rng)).collect();
    let gamma: Vec<f64> = (0..3 * n)
        .map(|s| if s % 3 == 1 { 0.0 } else { 0.1 + u01(&mut rng) })
        .collect();
    Lattice::strip(3, &masses, &long, &trans)
        .unwrap()
        .with_damping(gamma)
        .unwrap()
}

/// T_ab = Tr[Γ_a D Γ_b D†] and Tr[Γ_a A] from a dense inversion of the
/// whole D^r = [ω² − Φ − Π_L − Π_R − Π_s]⁻¹, with Γ_a as full matrices.
fn dense_network(lat: &Lattice, omega: f64) -> TerminalMatrix {
    let (n, b) = (lat.cells(), lat.sites_per_cell());
    let size = n * b;
    let (pl, pr) = lat.lead_self_energies(omega).unwrap();
    let (on, co) = (lat.dynamical_onsite(), lat.dynamical_coupling());
    let gamma = lat.damping_per_ps();
    let mut a = Mat::<C64>::zeros(size, size);
    for i in 0..n {
        for r in 0..b {
            for c in 0..b {
                a[(i * b + r, i * b + c)] = -on[i][(r, c)];
                if i + 1 < n {
                    a[(i * b + r, (i + 1) * b + c)] = -co[i][(r, c)];
                    a[((i + 1) * b + c, i * b + r)] = -co[i][(r, c)].conj();
                }
            }
            a[(i * b + r, i * b + r)] += C64::new(omega * omega, omega * gamma[i * b + r]);
        }
    }
    let mut gammas = Vec::new();
    for (cell, pi) in [(0, &pl), (n - 1, &pr)] {
        let g = broadening(pi);
        for r in 0..b {
            for c in 0..b {
                a[(cell * b + r, cell * b + c)] -= pi[(r, c)];
            }
        }
        gammas.push(Mat::from_fn(size, size, |r, c| {
            let inside = |x: usize| x / b == cell;
            if inside(r) && inside(c) {
                g[(r % b, c % b)]
            } else {
                C64::new(0.0, 0.0)
            }
        }));
    }
    for s in (0..size).filter(|&s| gamma[s] > 0.0) {
        let l = C64::new(2.0 * omega * gamma[s], 0.0);
        gammas.push(Mat::from_fn(size, size, |r, c| {
            if r == s && c == s {
                l
            } else {
                C64::new(0.0, 0.0)
            }
        }));
    }
    let d = a.partial_piv_lu().inverse();
    let spectral = Mat::from_fn(size, size, |r, c| {
        C64::new(0.0, 1.0) * (d[(r, c)] - d[(c, r)].conj())
    });
    let trace = |m: Mat<C64>| (0..size).map(|k| m[(k, k)].re).sum::<f64>();
    let p = gammas.len();
    let mut transmission = vec![0.0; p * p];
    for x in 0..p {
        for y in 0..p {
            transmission[x * p + y] = trace(&gammas[x] * &d * &gammas[y] * d.adjoint());
        }
    }
    let absorption = gammas.iter().map(|g| trace(g * &spectral)).collect();
    TerminalMatrix {
        terminals: p,
        transmission,
        absorption,
    }
}

/// Frequencies spread over the band of `lat`, off its edges.
fn band_samples(lat: &Lattice) -> Vec<f64> {
    let top = lat.band_top_rad_per_ps();
    [0.004, 0.13, 0.38, 0.61, 0.87, 0.993]
        .iter()
        .map(|f| f * top)
        .collect()
}

/// The recursion's T_ab against the dense inversion (the same equations
/// evaluated a second, independent way: only rounding separates them,
/// ~1e-14 here; 1e-10 of the largest Tr[Λ_a A] leaves room for the
/// conditioning near resonances). Chain (one site per cell, half the sites
/// damped) and strip (b = 3: lead–lead, lead–site and site–site paths).
#[test]
fn terminal_transmissions_match_a_dense_inversion() {
    let chain = disordered_chain(3, 14, |i| i % 2 == 0 || i == 13);
    let strip = damped_strip(9, 5);
    for lat in [&chain, &strip] {
        let mut seen: f64 = 0.0;
        for w in band_samples(lat) {
            let rec = lat.terminal_matrix(w).unwrap();
            let dense = dense_network(lat, w);
            assert_eq!(rec.terminals, 2 + lat.probe_sites().len());
            assert_eq!(rec.terminals, dense.terminals);
            let scale = dense.absorption.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
            for (x, y) in rec.transmission.iter().zip(&dense.transmission) {
                assert!((x - y).abs() <= 1e-10 * scale, "ω = {w}: {x} vs {y}");
                seen = seen.max(x.abs() / scale);
            }
            for (x, y) in rec.absorption.iter().zip(&dense.absorption) {
                assert!((x - y).abs() <= 1e-10 * scale, "ω = {w}: {x} vs {y}");
            }
        }
        assert!(seen > 0.05, "the comparison must see transmission");
    }
}

/// Sum rules of a lossless network whose only losses are its terminals:
/// Σ_b T_ab = Tr[Λ_a A] = Σ_b T_ba, and reciprocity T_ab = T_ba (common
/// practice for a reciprocal harmonic network: D^r is complex symmetric).
/// Tolerance 1e-10 of Tr[Λ_a A], rounding with room for conditioning.
#[test]
fn terminal_transmissions_obey_sum_rules_and_reciprocity() {
    for lat in [disordered_chain(21, 30, |i| i % 3 != 1), damped_strip(4, 6)] {
        for w in band_samples(&lat) {
            let t = lat.terminal_matrix(w).unwrap();
            let p = t.terminals;
            let scale = t.absorption.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
            assert!(scale > 0.0);
            for a in 0..p {
                let row: f64 = (0..p).map(|b| t.get(a, b)).sum();
                let col: f64 = (0..p).map(|b| t.get(b, a)).sum();
                let abs = t.absorption[a];
                assert!(
                    (row - abs).abs() <= 1e-10 * scale,
                    "ω {w}, a {a}: {row} vs {abs}"
                );
                assert!(
                    (col - abs).abs() <= 1e-10 * scale,
                    "ω {w}, a {a}: {col} vs {abs}"
                );
                for b in 0..p {
                    let d = (t.get(a, b) - t.get(b, a)).abs();
                    assert!(d <= 1e-10 * scale, "ω {w}: T_{a}{b} − T_{b}{a} = {d}");
                }
            }
        }
    }
}
