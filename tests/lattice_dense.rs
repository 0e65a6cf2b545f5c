//! The recursive phonon transmission against a dense inversion of the same
//! dynamical matrix: D^r = [ω² − Φ − Π_L − Π_R − Π_s]⁻¹ built whole, with
//! the lead self-energies on the end blocks, inverted by LU, and
//! Ξ = Tr[Λ_L D^r_1N Λ_R D^a_N1]. The two differ only by rounding (~1e-14
//! at these sizes); 1e-10 leaves room for the conditioning near resonances.

mod common;
use common::Rng;
use faer::Mat;
use faer::linalg::solvers::DenseSolveCore;
use qheat::C64;
use qheat::lattice::{Lattice, PhononLead, TransmissionScratch};
use qheat::leads::broadening;

fn dense_transmission(lat: &Lattice, omega: f64) -> f64 {
    let (n, b) = (lat.cells(), lat.sites_per_cell());
    let (pl, pr) = lat.lead_self_energies(omega).unwrap();
    let on = lat.dynamical_onsite();
    let co = lat.dynamical_coupling();
    let size = n * b;
    let mut a = Mat::<C64>::zeros(size, size);
    for i in 0..n {
        for r in 0..b {
            for c in 0..b {
                let mut v = -on[i][(r, c)];
                if r == c {
                    let gamma = lat.damping_per_ps()[i * b + r];
                    v += C64::new(omega * omega, omega * gamma);
                }
                if i == 0 {
                    v -= pl[(r, c)];
                }
                if i == n - 1 {
                    v -= pr[(r, c)];
                }
                a[(i * b + r, i * b + c)] = v;
                if i + 1 < n {
                    a[(i * b + r, (i + 1) * b + c)] = -co[i][(r, c)];
                    a[((i + 1) * b + c, i * b + r)] = -co[i][(r, c)].conj();
                }
            }
        }
    }
    let d = a.partial_piv_lu().inverse();
    let d1n = Mat::from_fn(b, b, |r, c| d[(r, (n - 1) * b + c)]);
    let t = broadening(&pl) * &d1n * broadening(&pr) * d1n.adjoint();
    (0..b).map(|i| t[(i, i)].re).sum()
}

fn compare(lat: &Lattice, fractions: &[f64]) {
    let top = lat.band_top_rad_per_ps();
    let mut scratch = TransmissionScratch::new(lat);
    let mut largest: f64 = 0.0;
    for &f in fractions {
        let w = f * top;
        let rgf = lat.transmission(w, &mut scratch).unwrap();
        let dense = dense_transmission(lat, w);
        largest = largest.max(dense);
        assert!(
            (rgf - dense).abs() < 1e-10 * dense.abs().max(1e-3),
            "ω = {w}: RGF {rgf} vs dense {dense}"
        );
    }
    assert!(
        largest > 0.05,
        "the comparison must see transmission, got {largest}"
    );
}

#[test]
fn chain_with_disordered_masses_and_springs_matches_dense_inversion() {
    let mut rng = Rng::new(11);
    let n = 24;
    let masses: Vec<f64> = (0..n).map(|_| 12.0 + 60.0 * u01(&mut rng)).collect();
    let springs: Vec<f64> = (0..n - 1).map(|_| 3.0 + 12.0 * u01(&mut rng)).collect();
    let left = PhononLead::chain(28.0, 8.0, 5.0);
    let right = PhononLead::chain(40.0, 10.0, 12.0);
    let lat = Lattice::chain_with_leads(&masses, &springs, left, right).unwrap();
    compare(&lat, &[0.003, 0.11, 0.37, 0.52, 0.81, 0.97]);
    let damping: Vec<f64> = (0..n).map(|_| 0.5 * u01(&mut rng)).collect();
    compare(&lat.with_damping(damping).unwrap(), &[0.05, 0.4, 0.9]);
}

#[test]
fn strip_with_transverse_springs_matches_dense_inversion() {
    let mut rng = Rng::new(5);
    let n = 7;
    let masses: Vec<f64> = (0..n).map(|_| 20.0 + 30.0 * u01(&mut rng)).collect();
    let long: Vec<f64> = (0..n).map(|_| 5.0 + 10.0 * u01(&mut rng)).collect();
    let trans: Vec<f64> = (0..n).map(|_| 2.0 + 8.0 * u01(&mut rng)).collect();
    let lat = Lattice::strip(3, &masses, &long, &trans).unwrap();
    assert_eq!(lat.sites_per_cell(), 3);
    compare(&lat, &[0.02, 0.23, 0.48, 0.66, 0.89]);
    let damping: Vec<f64> = (0..3 * n).map(|_| 0.3 * u01(&mut rng)).collect();
    compare(&lat.with_damping(damping).unwrap(), &[0.1, 0.6]);
}

/// Uniform in [0, 1) (the shared generator draws from [−1, 1)).
fn u01(rng: &mut Rng) -> f64 {
    0.5 * (1.0 + rng.uniform())
}

/// A lead of its own contact spring equals the same lead joined by its
/// bulk spring with its surface cell moved into the device (an identity of
/// the semi-infinite lattice: where the device ends is a choice). This
/// checks the surface-cell force constants of the lead self-energy. Chain
/// and strip (the strip's lead goes through the Bloch-mode solve).
/// Tolerance 1e-10 as above.
#[test]
fn lead_surface_cell_can_be_moved_into_the_device() {
    let (ml, kl, kc) = (30.0, 9.0, 4.0);
    let masses = [25.0, 50.0, 35.0];
    let springs = [6.0, 11.0];
    let right = || PhononLead::chain(40.0, 7.0, 7.0);
    let own = Lattice::chain_with_leads(&masses, &springs, PhononLead::chain(ml, kl, kc), right())
        .unwrap();
    let moved = Lattice::chain_with_leads(
        &[ml, 25.0, 50.0, 35.0],
        &[kc, 6.0, 11.0],
        PhononLead::chain(ml, kl, kl),
        right(),
    )
    .unwrap();
    same_transmission(&own, &moved);

    let (w, m, long, trans, contact) = (3, 30.0, 8.0, 3.0, 5.0);
    let strip_lead = |c: f64| PhononLead::strip(w, m, long, trans, c);
    let device = |cells: usize| {
        Lattice::strip(w, &vec![m; cells], &vec![long; cells], &vec![trans; cells]).unwrap()
    };
    let own = {
        let d = device(3);
        Lattice::new(
            d.masses_u().to_vec(),
            onsite_without_leads(&d),
            d.force_coupling().to_vec(),
            strip_lead(contact),
            strip_lead(long),
        )
        .unwrap()
    };
    let moved = {
        let d = device(4);
        let mut coupling = d.force_coupling().to_vec();
        coupling[0] = strip_lead(contact).contact;
        let mut onsite = onsite_without_leads(&d);
        // The first cell is the lead's surface cell: bonds to the bulk lead
        // (added by the constructor) and the contact bonds to the device.
        for r in 0..w {
            onsite[0][(r, r)] += contact - long;
            onsite[1][(r, r)] += contact - long;
        }
        Lattice::new(
            d.masses_u().to_vec(),
            onsite,
            coupling,
            strip_lead(long),
            strip_lead(long),
        )
        .unwrap()
    };
    same_transmission(&own, &moved);
}

/// K_ii of a lattice with its lead bonds taken out again.
fn onsite_without_leads(lat: &Lattice) -> Vec<Mat<f64>> {
    let mut on = lat.force_onsite().to_vec();
    let last = on.len() - 1;
    let b = lat.sites_per_cell();
    for (i, side) in [
        (0, qheat::lattice::PhononSide::Left),
        (last, qheat::lattice::PhononSide::Right),
    ] {
        let c = &lat.lead(side).contact;
        for r in 0..b {
            let s: f64 = (0..b)
                .map(|j| if i == 0 { c[(j, r)] } else { c[(r, j)] })
                .sum();
            on[i][(r, r)] += s;
        }
    }
    on
}

fn same_transmission(a: &Lattice, b: &Lattice) {
    let top = a.band_top_rad_per_ps();
    assert!((top - b.band_top_rad_per_ps()).abs() < 1e-12 * top);
    let (mut sa, mut sb) = (TransmissionScratch::new(a), TransmissionScratch::new(b));
    let mut partial = false;
    for j in 1..30 {
        let w = top * (j as f64 - 0.37) / 30.0;
        let (x, y) = (
            a.transmission(w, &mut sa).unwrap(),
            b.transmission(w, &mut sb).unwrap(),
        );
        assert!((x - y).abs() < 1e-10, "ω = {w}: {x} vs {y}");
        partial |= x > 0.05 && (x - x.round()).abs() > 0.05;
    }
    assert!(
        partial,
        "the contact must scatter for the check to mean anything"
    );
}

/// A lattice of force-constant blocks read from a case (two sites per
/// cell, random positive springs inside a cell and to the next cell, the
/// diagonal the sum of every bond, unequal masses per site from a .npy
/// file) against the dense inversion of the same dynamical matrix; with and
/// without damping. Tolerance 1e-10 as above.
#[test]
fn blocks_lattice_with_unequal_masses_matches_dense_inversion() {
    let (n, b): (usize, usize) = (5, 2);
    let mut rng = Rng::new(23);
    let between: Vec<Mat<f64>> = (0..n - 1)
        .map(|_| Mat::from_fn(b, b, |_, _| -(2.0 + 10.0 * u01(&mut rng))))
        .collect();
    let inside: Vec<f64> = (0..n).map(|_| 5.0 + 20.0 * u01(&mut rng)).collect();
    let onsite: Vec<Mat<f64>> = (0..n)
        .map(|i| {
            let left = &between[i.saturating_sub(1)];
            let right = &between[i.min(n - 2)];
            Mat::from_fn(b, b, |r, c| {
                if r != c {
                    return -inside[i];
                }
                let bonds: f64 = (0..b).map(|j| -right[(r, j)] - left[(j, r)]).sum();
                inside[i] + bonds
            })
        })
        .collect();
    let masses = ndarray::Array2::from_shape_fn((n, b), |_| 10.0 + 60.0 * u01(&mut rng));
    let dir = tempfile::tempdir().unwrap();
    let write = |name: &str, blocks: &[Mat<f64>]| {
        let a = ndarray::Array3::from_shape_fn((blocks.len(), b, b), |(i, r, c)| blocks[i][(r, c)]);
        ndarray_npy::write_npy(dir.path().join(name), &a).unwrap();
    };
    write("k-on.npy", &onsite);
    write("k-co.npy", &between);
    write(
        "h-on.npy",
        &vec![Mat::from_fn(b, b, |r, c| if r == c { 0.3 } else { -0.1 }); n],
    );
    write(
        "h-co.npy",
        &[Mat::from_fn(b, b, |r, c| if r == c { -0.1 } else { 0.0 })],
    );
    ndarray_npy::write_npy(dir.path().join("m.npy"), &masses).unwrap();
    let case = "name = \"blocks\"\n[device]\nkind = \"blocks\"\nspacing_nm = 0.5\n\
         onsite_file = \"h-on.npy\"\ncoupling_file = \"h-co.npy\"\n\
         [leads.left]\nfermi_level_ev = 0.05\ntemperature_k = 300.0\n\
         [leads.right]\nfermi_level_ev = 0.05\ntemperature_k = 300.0\n\
         [lattice]\nmasses_file = \"m.npy\"\nforce_onsite_file = \"k-on.npy\"\n\
         force_coupling_file = \"k-co.npy\"\n";
    std::fs::write(dir.path().join("c.toml"), case).unwrap();
    let r = qheat::case::Case::load(&dir.path().join("c.toml"))
        .unwrap()
        .resolve()
        .unwrap();
    assert!(r.warnings.is_empty(), "{:?}", r.warnings);
    let lat = r.lattice.unwrap();
    assert_eq!(lat.masses_u(), masses.as_slice().unwrap());
    compare(&lat, &[0.004, 0.13, 0.29, 0.47, 0.62, 0.85, 0.96]);
    let damping: Vec<f64> = (0..n * b).map(|_| 0.4 * u01(&mut rng)).collect();
    compare(&lat.with_damping(damping).unwrap(), &[0.07, 0.5, 0.8]);
}
