//! A `[lattice]` of force-constant blocks on a device of blocks: the same
//! lattice written as a strip and as blocks gives the same phonon
//! transmission and κ_ph; regions and damping act per cell on every site;
//! a broken acoustic sum rule is warned about.

use faer::Mat;
use qheat::case::{Case, Resolved};
use qheat::lattice::TransmissionScratch;
use std::path::Path;

const WIDTH: usize = 3;
const CELLS: usize = 6;
const MASS_U: f64 = 28.0;
const SPRING: f64 = 30.0;
const TRANSVERSE: f64 = 10.0;

/// Writes real blocks as a float64 .npy of shape (n, b, b).
fn write_blocks(path: &Path, blocks: &[Mat<f64>]) {
    let b = blocks[0].nrows();
    let a = ndarray::Array3::from_shape_fn((blocks.len(), b, b), |(i, r, c)| blocks[i][(r, c)]);
    ndarray_npy::write_npy(path, &a).unwrap();
}

/// The electron part of a strip of blocks (any Hermitian cell will do: the
/// lattice does not depend on it) and its leads.
fn electron_files(dir: &Path) -> String {
    let on = Mat::from_fn(WIDTH, WIDTH, |r, c| match r.abs_diff(c) {
        0 => 0.4,
        1 => -0.1,
        _ => 0.0,
    });
    let co = Mat::from_fn(WIDTH, WIDTH, |r, c| if r == c { -0.1 } else { 0.0 });
    let single = |m: &Mat<f64>| ndarray::Array2::from_shape_fn((WIDTH, WIDTH), |(r, c)| m[(r, c)]);
    ndarray_npy::write_npy(dir.join("h-onsite.npy"), &single(&on)).unwrap();
    ndarray_npy::write_npy(dir.join("h-coupling.npy"), &single(&co)).unwrap();
    format!(
        "name = \"blocks lattice\"\n[device]\nkind = \"blocks\"\nspacing_nm = 0.5\ncells = {CELLS}\n\
         onsite_file = \"h-onsite.npy\"\ncoupling_file = \"h-coupling.npy\"\n\
         [leads.left]\nfermi_level_ev = 0.05\ntemperature_k = 300.0\n\
         [leads.right]\nfermi_level_ev = 0.05\ntemperature_k = 300.0\n"
    )
}

/// K_ii of a strip cell with free edges: every bond on the diagonal (two
/// along x, one or two across).
fn strip_onsite(k: f64, kt: f64) -> Mat<f64> {
    Mat::from_fn(WIDTH, WIDTH, |r, c| {
        if r == c {
            let across = f64::from(u8::from(r > 0)) + f64::from(u8::from(r + 1 < WIDTH));
            2.0 * k + across * kt
        } else if r.abs_diff(c) == 1 {
            -kt
        } else {
            0.0
        }
    })
}

fn load(dir: &Path, text: &str) -> Resolved {
    let path = dir.join("case.toml");
    std::fs::write(&path, text).unwrap();
    Case::load(&path).unwrap().resolve().unwrap()
}

/// The same strip lattice from `[lattice]` springs on a strip device and
/// from force blocks on a device of blocks: the force constants are the
/// same numbers up to rounding of the end blocks (a lead bond subtracted
/// and added back), so Ξ(ω) and κ_ph agree to 1e-12 relative.
#[test]
fn a_strip_written_as_force_blocks_gives_the_strips_transmission_and_kappa() {
    let dir = tempfile::tempdir().unwrap();
    let strip_case = format!(
        "name = \"strip\"\n[device]\nkind = \"strip\"\nspacing_nm = 0.5\nlength_nm = {}\n\
         effective_mass = 0.2\nwidth_sites = {WIDTH}\n\
         [leads.left]\nfermi_level_ev = 0.05\ntemperature_k = 300.0\n\
         [leads.right]\nfermi_level_ev = 0.05\ntemperature_k = 300.0\n\
         [lattice]\nmass_u = {MASS_U}\nspring_n_per_m = {SPRING}\ntransverse_spring_n_per_m = {TRANSVERSE}\n",
        CELLS as f64 * 0.5
    );
    let strip = load(dir.path(), &strip_case);
    write_blocks(
        &dir.path().join("k-onsite.npy"),
        &vec![strip_onsite(SPRING, TRANSVERSE); CELLS],
    );
    let k01 = Mat::from_fn(WIDTH, WIDTH, |r, c| if r == c { -SPRING } else { 0.0 });
    write_blocks(&dir.path().join("k-coupling.npy"), &vec![k01; CELLS - 1]);
    let blocks_case = electron_files(dir.path())
        + &format!(
            "[lattice]\nmasses_u = [{MASS_U}, {MASS_U}, {MASS_U}]\n\
             force_onsite_file = \"k-onsite.npy\"\nforce_coupling_file = \"k-coupling.npy\"\n"
        );
    let blocks = load(dir.path(), &blocks_case);
    assert!(blocks.warnings.is_empty(), "{:?}", blocks.warnings);
    let (a, b) = (
        strip.lattice.as_ref().unwrap(),
        blocks.lattice.as_ref().unwrap(),
    );
    assert_eq!(b.sites_per_cell(), WIDTH);
    let top = a.band_top_rad_per_ps();
    assert!((b.band_top_rad_per_ps() - top).abs() < 1e-12 * top);
    let (mut sa, mut sb) = (TransmissionScratch::new(a), TransmissionScratch::new(b));
    for f in [0.02, 0.17, 0.33, 0.5, 0.71, 0.93] {
        let (xa, xb) = (
            a.transmission(f * top, &mut sa).unwrap(),
            b.transmission(f * top, &mut sb).unwrap(),
        );
        assert!(
            xa > 0.1,
            "Ξ({f} ω_top) = {xa}: the check needs open channels"
        );
        assert!(
            (xa - xb).abs() < 1e-12 * xa,
            "Ξ({f} ω_top): strip {xa}, blocks {xb}"
        );
    }
    for t in [20.0, 300.0] {
        let (ka, kb) = (
            strip.phonon_conductance_at(t).unwrap(),
            blocks.phonon_conductance_at(t).unwrap(),
        );
        assert!(
            (ka - kb).abs() < 1e-12 * ka,
            "κ_ph({t} K): strip {ka}, blocks {kb}"
        );
    }
}

/// The two-site cell of a diatomic chain along x (one bond inside the
/// cell, one to the next cell), with a spring `k_end` on the last cell's
/// bond to the right lead when it differs from `k`.
fn diatomic(dir: &Path, k_inside: f64, k_between: f64, sum_rule: bool) -> String {
    let on = Mat::from_fn(2, 2, |r, c| match (r, c) {
        (0, 0) | (1, 1) => k_inside + k_between,
        _ => -k_inside,
    });
    let mut last = on.clone();
    if !sum_rule {
        last[(1, 1)] += 0.5;
    }
    let mut onsite = vec![on; 4];
    onsite[3] = last;
    let co = Mat::from_fn(2, 2, |r, c| if (r, c) == (1, 0) { -k_between } else { 0.0 });
    write_blocks(&dir.join("d-onsite.npy"), &onsite);
    write_blocks(&dir.join("d-coupling.npy"), std::slice::from_ref(&co));
    let hon = Mat::from_fn(2, 2, |r, c| if r == c { 0.3 } else { -0.1 });
    let hco = Mat::from_fn(2, 2, |r, c| if (r, c) == (1, 0) { -0.1 } else { 0.0 });
    write_blocks(&dir.join("h2-onsite.npy"), &vec![hon; 4]);
    write_blocks(&dir.join("h2-coupling.npy"), std::slice::from_ref(&hco));
    "name = \"diatomic\"\n[device]\nkind = \"blocks\"\nspacing_nm = 0.5\n\
     onsite_file = \"h2-onsite.npy\"\ncoupling_file = \"h2-coupling.npy\"\n\
     [leads.left]\nfermi_level_ev = 0.05\ntemperature_k = 300.0\n\
     [leads.right]\nfermi_level_ev = 0.05\ntemperature_k = 300.0\n\
     [lattice]\nmasses_u = [28.0, 12.0]\n\
     force_onsite_file = \"d-onsite.npy\"\nforce_coupling_file = \"d-coupling.npy\"\n"
        .to_string()
}

/// Masses per orbital site, a region's mass and damping on every site of
/// its cells, and the leads repeating the end cells.
#[test]
fn masses_regions_and_damping_act_per_site_and_leads_continue_the_end_cells() {
    let dir = tempfile::tempdir().unwrap();
    let text = diatomic(dir.path(), 40.0, 25.0, true)
        + "damping_per_ps = 0.5\n[[lattice.region]]\nfrom_nm = 0.5\nto_nm = 1.0\nmass_u = 50.0\ndamping_per_ps = 2.0\n";
    let r = load(dir.path(), &text);
    assert!(r.warnings.is_empty(), "{:?}", r.warnings);
    let l = r.lattice.unwrap();
    assert_eq!(
        l.masses_u(),
        &[28.0, 12.0, 50.0, 50.0, 28.0, 12.0, 28.0, 12.0]
    );
    assert_eq!(
        l.damping_per_ps(),
        &[0.5, 0.5, 2.0, 2.0, 0.5, 0.5, 0.5, 0.5]
    );
    use qheat::lattice::PhononSide::{Left, Right};
    for side in [Left, Right] {
        let lead = l.lead(side);
        assert_eq!(lead.masses_u, vec![28.0, 12.0]);
        assert_eq!(lead.onsite[(0, 0)], 65.0);
        assert_eq!(lead.coupling[(1, 0)], -25.0);
    }
    // the stored end blocks hold the bonds to the leads exactly once
    assert_eq!(l.force_onsite()[0][(0, 0)], 65.0);
    assert_eq!(l.force_onsite()[3][(1, 1)], 65.0);
}

/// A row of the force constants that does not sum to zero is warned about,
/// naming the cell and the file; the intact lattice has no warning.
#[test]
fn a_broken_acoustic_sum_rule_is_warned_about() {
    let dir = tempfile::tempdir().unwrap();
    let r = load(dir.path(), &diatomic(dir.path(), 40.0, 25.0, false));
    let w = r.warnings.join("\n");
    assert!(w.contains("acoustic sum rule"), "{w}");
    assert!(
        w.contains("row 1 of cell 3") && w.contains("d-onsite.npy"),
        "{w}"
    );
    let r = load(dir.path(), &diatomic(dir.path(), 40.0, 25.0, true));
    assert!(r.warnings.is_empty(), "{:?}", r.warnings);
}
