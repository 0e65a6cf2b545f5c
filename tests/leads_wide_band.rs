//! Wide-band leads whose Γ differs between orbitals (a list, one value per
//! orbital, or a full matrix inline or from a file) against a dense
//! Green's function, and the channel check for the blocks of leads of
//! their own.

#![allow(clippy::needless_range_loop)]

use faer::Mat;
use faer::linalg::solvers::DenseSolveCore;
use qheat::C64;
use qheat::case::{Case, Resolved};
use qheat::leads::Lead;
use qheat::scba::{Silent, solve};
use std::path::Path;

fn c(re: f64, im: f64) -> C64 {
    C64::new(re, im)
}

fn write_block(path: &Path, m: &Mat<C64>) {
    let b = m.nrows();
    let a = ndarray::Array2::from_shape_fn((b, b), |(r, k)| m[(r, k)]);
    ndarray_npy::write_npy(path, &a).unwrap();
}

fn load(dir: &Path, text: &str) -> Resolved {
    let path = dir.join("case.toml");
    std::fs::write(&path, text).unwrap();
    Case::load(&path)
        .unwrap_or_else(|e| panic!("{e}"))
        .resolve()
        .unwrap_or_else(|e| panic!("{e}"))
}

fn transmissions(r: &Resolved) -> Vec<f64> {
    let sol = solve(&r.problem, &r.scba, None, &mut Silent).unwrap();
    sol.pass.flows.iter().map(|f| f.transmission).collect()
}

const CELLS: usize = 4;

/// Two orbitals per cell, complex on-site mixing, a single coupling block.
fn device(dir: &Path) -> (Mat<C64>, Mat<C64>) {
    let onsite = Mat::from_fn(2, 2, |r, k| match (r, k) {
        (0, 0) => c(0.1, 0.0),
        (1, 1) => c(0.35, 0.0),
        (0, 1) => c(0.04, 0.03),
        _ => c(0.04, -0.03),
    });
    let coupling = Mat::from_fn(2, 2, |r, k| match (r, k) {
        (0, 0) => c(-0.3, 0.0),
        (1, 1) => c(-0.2, 0.0),
        (0, 1) => c(0.05, 0.01),
        _ => c(0.02, 0.0),
    });
    write_block(&dir.join("onsite.npy"), &onsite);
    write_block(&dir.join("coupling.npy"), &coupling);
    (onsite, coupling)
}

fn case_text(left: &str, right: &str, more: &str) -> String {
    format!(
        "name = \"wide band\"\n[device]\nkind = \"blocks\"\nspacing_nm = 0.5\ncells = {CELLS}\n\
         onsite_file = \"onsite.npy\"\ncoupling_file = \"coupling.npy\"\n{more}\n\
         [leads.left]\nfermi_level_ev = 0.2\ntemperature_k = 300.0\n{left}\n\
         [leads.right]\nfermi_level_ev = 0.2\ntemperature_k = 300.0\n{right}\n\
         [grid]\nstep_ev = 0.005\nmin_ev = -0.8\nmax_ev = 1.2\n"
    )
}

/// T = Tr[Γ_L G_1N Γ_R G_1N†] from the dense inverse of E − H − Σ_L − Σ_R
/// with Σ = −iΓ/2 on the end cells (the Caroli formula; common practice).
fn dense_transmission(
    onsite: &Mat<C64>,
    coupling: &Mat<C64>,
    n: usize,
    energy: f64,
    gamma_l: &Mat<C64>,
    gamma_r: &Mat<C64>,
) -> f64 {
    let b = onsite.nrows();
    let dim = b * n;
    let last = (n - 1) * b;
    let mut m = Mat::<C64>::zeros(dim, dim);
    for i in 0..n {
        for r in 0..b {
            for k in 0..b {
                m[(i * b + r, i * b + k)] = -onsite[(r, k)];
                if i + 1 < n {
                    m[(i * b + r, (i + 1) * b + k)] = -coupling[(r, k)];
                    m[((i + 1) * b + k, i * b + r)] = -coupling[(r, k)].conj();
                }
            }
            m[(i * b + r, i * b + r)] += c(energy, 0.0);
        }
    }
    for r in 0..b {
        for k in 0..b {
            m[(r, k)] += gamma_l[(r, k)] * c(0.0, 0.5);
            m[(last + r, last + k)] += gamma_r[(r, k)] * c(0.0, 0.5);
        }
    }
    let g = m.partial_piv_lu().inverse();
    let g1n = Mat::from_fn(b, b, |r, k| g[(r, last + k)]);
    let prod = gamma_l * &g1n * gamma_r * g1n.adjoint();
    (0..b).map(|i| prod[(i, i)].re).sum()
}

/// Largest |T_engine − T_dense| over the grid.
fn worst_against_dense(
    r: &Resolved,
    (onsite, coupling): (&Mat<C64>, &Mat<C64>),
    gamma_l: &Mat<C64>,
    gamma_r: &Mat<C64>,
) -> f64 {
    let t = transmissions(r);
    let energies = r.problem.grid.energies();
    let mut conducting = 0;
    let mut worst: f64 = 0.0;
    for (e, got) in energies.iter().zip(&t) {
        let want = dense_transmission(onsite, coupling, CELLS, *e, gamma_l, gamma_r);
        if want > 1e-2 {
            conducting += 1;
        }
        worst = worst.max((got - want).abs());
    }
    assert!(conducting > 20, "only {conducting} conducting energies");
    println!("wide band against dense: largest |ΔT| = {worst:e}");
    worst
}

/// Γ per orbital on the left, a full real matrix inline on the right, and
/// a complex Hermitian matrix from a file, against the dense inverse
/// (dense LU and the block recursion differ by rounding only, ~1e-14 at
/// this size: 1e-10 absolute on T ≤ 2 as in the kernel's own dense check).
#[test]
fn gamma_per_orbital_and_as_a_matrix_match_a_dense_green_function() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let (onsite, coupling) = device(d);
    let diag = Mat::from_fn(2, 2, |r, k| {
        c(if r == k { [0.05, 0.2][r] } else { 0.0 }, 0.0)
    });
    let inline = Mat::from_fn(2, 2, |r, k| c([[0.1, 0.03], [0.03, 0.05]][r][k], 0.0));
    let complex = Mat::from_fn(2, 2, |r, k| match (r, k) {
        (0, 0) => c(0.12, 0.0),
        (1, 1) => c(0.08, 0.0),
        (0, 1) => c(0.02, 0.05),
        _ => c(0.02, -0.05),
    });
    write_block(&d.join("gamma.npy"), &complex);
    let left = "wide_band_orbitals_ev = [0.05, 0.2]";
    let r = load(
        d,
        &case_text(
            left,
            "wide_band_matrix_ev = [[0.1, 0.03], [0.03, 0.05]]",
            "",
        ),
    );
    for (lead, want) in [
        (&r.problem.left.lead, &diag),
        (&r.problem.right.lead, &inline),
    ] {
        let Lead::WideBand { gamma } = lead else {
            panic!("not wide band: {lead:?}")
        };
        assert_eq!(gamma, want);
    }
    let worst = worst_against_dense(&r, (&onsite, &coupling), &diag, &inline);
    assert!(worst <= 1e-10, "list and inline matrix: {worst:e}");
    let r = load(d, &case_text(left, "wide_band_file = \"gamma.npy\"", ""));
    let worst = worst_against_dense(&r, (&onsite, &coupling), &diag, &complex);
    assert!(worst <= 1e-10, "matrix from a file: {worst:e}");
}

/// With explicit spin, a list of one Γ per spin-orbital (up orbitals
/// first) makes the lead spin-selective: the device is two copies, one per
/// spin, each with its own Γ, so T is the sum of two dense transmissions
/// (1e-10 as above). A list per spatial orbital gives both spins the same Γ.
#[test]
fn gamma_per_spin_orbital_makes_a_spin_selective_lead() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let (onsite, coupling) = device(d);
    let text = case_text(
        "wide_band_orbitals_ev = [0.05, 0.2, 0.3, 0.01]",
        "wide_band_orbitals_ev = [0.1, 0.1]",
        "",
    )
    .replace("cells = 4\n", "cells = 4\nspin = \"explicit\"\n");
    let r = load(d, &text);
    let g =
        |a: f64, b: f64| Mat::from_fn(2, 2, |r, k| c(if r == k { [a, b][r] } else { 0.0 }, 0.0));
    let right = g(0.1, 0.1);
    let t = transmissions(&r);
    let mut worst: f64 = 0.0;
    let mut spin_split = 0.0f64;
    for (e, got) in r.problem.grid.energies().iter().zip(&t) {
        let up = dense_transmission(&onsite, &coupling, CELLS, *e, &g(0.05, 0.2), &right);
        let down = dense_transmission(&onsite, &coupling, CELLS, *e, &g(0.3, 0.01), &right);
        worst = worst.max((got - (up + down)).abs());
        spin_split = spin_split.max((up - down).abs());
    }
    println!(
        "spin-selective wide band: largest |ΔT| = {worst:e}, largest |T_up − T_down| = {spin_split}"
    );
    assert!(spin_split > 0.05, "the spins do not differ: {spin_split}");
    assert!(worst <= 1e-10, "{worst:e}");
}

/// Channels split by orbital on a device that keeps them apart: a lead
/// whose Γ matrix, or whose joining block, joins the two channels must be
/// found (channel Seebeck is then refused), and leads that keep them apart
/// must not be.
#[test]
fn lead_blocks_that_join_channels_are_found() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let diagonal =
        |a: f64, b: f64| Mat::from_fn(2, 2, |r, k| c(if r == k { [a, b][r] } else { 0.0 }, 0.0));
    write_block(&d.join("onsite.npy"), &diagonal(0.1, 0.3));
    write_block(&d.join("coupling.npy"), &diagonal(-0.3, -0.2));
    write_block(&d.join("lead-on.npy"), &diagonal(0.0, 0.2));
    write_block(&d.join("lead-co.npy"), &diagonal(-0.4, -0.25));
    write_block(&d.join("join-apart.npy"), &diagonal(-0.1, -0.15));
    let mixing = Mat::from_fn(2, 2, |r, k| c(if r == k { -0.1 } else { 0.04 }, 0.0));
    write_block(&d.join("join-mixing.npy"), &mixing);
    let channels =
        "[[channel]]\nname = \"a\"\norbitals = [0]\n[[channel]]\nname = \"b\"\norbitals = [1]\n";
    let own = |join: &str| {
        format!(
            "onsite_file = \"lead-on.npy\"\ncoupling_file = \"lead-co.npy\"\njoin_file = \"{join}\""
        )
    };
    let mixing_of = |left: &str| {
        let r = load(d, &case_text(left, "", channels));
        let ch = r.channels.clone().expect("channels");
        qheat::thermo::channels::channel_mixing(&r.problem, &ch)
    };
    assert_eq!(mixing_of(&own("join-apart.npy")), None);
    assert_eq!(mixing_of("wide_band_orbitals_ev = [0.1, 0.3]"), None);
    let why = mixing_of(&own("join-mixing.npy")).expect("a joining block that mixes");
    assert!(why.contains("left lead's joining block"), "{why}");
    let why =
        mixing_of("wide_band_matrix_ev = [[0.1, 0.02], [0.02, 0.1]]").expect("a Γ that mixes");
    assert!(why.contains("left lead's broadening block"), "{why}");
}
