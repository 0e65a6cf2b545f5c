//! Leads of their own on devices of blocks, through the case file: lead
//! blocks read from files, the block that joins lead and device, and
//! wide-band Γ per orbital or as a matrix. Each check names its reference
//! and why its tolerance is what it is.

#![allow(clippy::needless_range_loop)]

use faer::Mat;
use faer::linalg::solvers::DenseSolveCore;
use qheat::C64;
use qheat::case::{Case, Resolved};
use qheat::leads::{DecimationParams, Lead, Side};
use qheat::scba::{Silent, solve};
use std::path::Path;

fn c(re: f64, im: f64) -> C64 {
    C64::new(re, im)
}

/// One complex block as a complex128 .npy of shape (b, b).
fn write_block(path: &Path, m: &Mat<C64>) {
    let b = m.nrows();
    let a = ndarray::Array2::from_shape_fn((b, b), |(r, k)| m[(r, k)]);
    ndarray_npy::write_npy(path, &a).unwrap();
}

/// A stack of complex blocks as a complex128 .npy of shape (n, b, b).
fn write_stack(path: &Path, blocks: &[Mat<C64>]) {
    let b = blocks[0].nrows();
    let a = ndarray::Array3::from_shape_fn((blocks.len(), b, b), |(i, r, k)| blocks[i][(r, k)]);
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

/// Transmission at every energy of the case's grid (coherent solve).
fn transmissions(r: &Resolved) -> Vec<f64> {
    let sol = solve(&r.problem, &r.scba, None, &mut Silent).unwrap();
    sol.pass.flows.iter().map(|f| f.transmission).collect()
}

const CELLS: usize = 5;

/// A two-orbital device whose cells differ (the ends from each other and
/// from the middle), with complex off-diagonal elements so that a
/// transpose in place of an adjoint shows.
fn device_blocks() -> (Vec<Mat<C64>>, Mat<C64>) {
    let onsite = (0..CELLS)
        .map(|i| {
            let x = i as f64;
            Mat::from_fn(2, 2, |r, k| match (r, k) {
                (0, 0) => c(0.10 + 0.02 * x, 0.0),
                (1, 1) => c(0.45 - 0.01 * x * x, 0.0),
                (0, 1) => c(0.05, 0.02 + 0.01 * x),
                _ => c(0.05, -0.02 - 0.01 * x),
            })
        })
        .collect();
    let coupling = Mat::from_fn(2, 2, |r, k| match (r, k) {
        (0, 0) => c(-0.30, 0.0),
        (1, 1) => c(-0.25, 0.0),
        (0, 1) => c(0.04, 0.03),
        _ => c(-0.02, 0.01),
    });
    (onsite, coupling)
}

/// The case text around a device of blocks; `left` and `right` are extra
/// lines of the lead tables, `more` any further tables.
fn case_text(left: &str, right: &str, more: &str) -> String {
    format!(
        "name = \"own leads\"\n[device]\nkind = \"blocks\"\nspacing_nm = 0.5\n\
         onsite_file = \"onsite.npy\"\ncoupling_file = \"coupling.npy\"\n\
         [leads.left]\nfermi_level_ev = 0.2\ntemperature_k = 300.0\n{left}\n\
         [leads.right]\nfermi_level_ev = 0.2\ntemperature_k = 300.0\n{right}\n\
         [grid]\nstep_ev = 0.005\nmin_ev = -0.6\nmax_ev = 1.1\n{more}"
    )
}

fn write_device(dir: &Path) -> (Vec<Mat<C64>>, Mat<C64>) {
    let (onsite, coupling) = device_blocks();
    write_stack(&dir.join("onsite.npy"), &onsite);
    write_block(&dir.join("coupling.npy"), &coupling);
    (onsite, coupling)
}

/// A lead given by files that hold the device's own end blocks is the
/// continuation lead: the same matrices, so the same transmission to the
/// last bit (1e-14 asked; both runs do the same floating-point operations,
/// so they agree exactly). Checked with a bias dropped linearly inside the
/// device, which moves both kinds of lead with the bias at their end cell,
/// and with a joining block given equal to the lead's coupling.
#[test]
fn a_lead_from_files_equal_to_the_continuation_is_the_continuation() {
    let dir = tempfile::tempdir().unwrap();
    let (onsite, _) = write_device(dir.path());
    write_block(&dir.path().join("left-onsite.npy"), &onsite[0]);
    write_block(&dir.path().join("right-onsite.npy"), &onsite[CELLS - 1]);
    let bias = "[bias]\nvoltage_v = 0.05\ndrop = { linear = { from_nm = 0.5, to_nm = 1.5 } }\n";
    let plain = load(dir.path(), &case_text("", "", bias));
    let files = |join: &str| {
        let left =
            format!("onsite_file = \"left-onsite.npy\"\ncoupling_file = \"coupling.npy\"\n{join}");
        let right = "onsite_file = \"right-onsite.npy\"\ncoupling_file = \"coupling.npy\"";
        load(dir.path(), &case_text(&left, right, bias))
    };
    let reference = transmissions(&plain);
    assert!(reference.iter().any(|&t| t > 0.5), "no band in the window");
    for join in ["", "join_file = \"coupling.npy\""] {
        let own = files(join);
        for (a, b) in [
            (&plain.problem.left.lead, &own.problem.left.lead),
            (&plain.problem.right.lead, &own.problem.right.lead),
        ] {
            match (a, b) {
                (
                    Lead::Periodic { onsite, hopping },
                    Lead::Periodic {
                        onsite: o2,
                        hopping: h2,
                    },
                ) => {
                    assert_eq!(onsite, o2, "{join}");
                    assert_eq!(hopping, h2, "{join}");
                }
                other => panic!("not two periodic leads: {other:?}"),
            }
        }
        // the bias moved the file leads with their end cells (±V/2)
        for (lead, raw) in [
            (&own.problem.left.lead, &onsite[0]),
            (&own.problem.right.lead, &onsite[CELLS - 1]),
        ] {
            let Lead::Periodic { onsite: moved, .. } = lead else {
                unreachable!()
            };
            assert!((moved[(0, 0)].re - raw[(0, 0)].re).abs() > 0.02, "{join}");
        }
        let t = transmissions(&own);
        let worst = reference
            .iter()
            .zip(&t)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max);
        println!("continuation vs files ({join:?}): largest |ΔT| = {worst:e}");
        assert!(worst <= 1e-14, "{join}: {worst:e}");
    }
}

/// Surface Green's function of a semi-infinite chain with on-site ε and
/// hopping t at real energy E: g = (x − i√(4t² − x²))/(2t²) in the band,
/// x = E − ε, the decaying root outside (common practice; E. N. Economou,
/// Green's Functions in Quantum Physics, ch. 5, from memory).
fn chain_surface(e: f64, eps: f64, t: f64) -> C64 {
    let x = e - eps;
    let d = 4.0 * t * t - x * x;
    let root = if d >= 0.0 {
        c(0.0, -d.sqrt())
    } else {
        c(-x.signum() * (-d).sqrt(), 0.0)
    };
    (c(x, 0.0) + root) / (2.0 * t * t)
}

/// A one-orbital device that continues the right lead, joined by a bond τ
/// to a left chain lead of another band (ε_L, t_L): the whole system is
/// two semi-infinite chains joined by one bond, whose transmission is
/// T = 4τ² Im g_L Im g_R / |1 − τ² g_L g_R|² with the surface Green's
/// functions g of the two chains (a mismatched junction; common practice,
/// the Caroli formula for one bond, e.g. S. Datta, Electronic Transport in
/// Mesoscopic Systems, 1995, ch. 3, from memory). The closed form is
/// evaluated in double precision and the chain self-energies are exact,
/// so the only difference is rounding in the recursion: 1e-8 absolute
/// (T ≤ 1) leaves a wide margin.
#[test]
fn a_chain_joined_to_a_lead_of_another_band_gives_the_junction_transmission() {
    let dir = tempfile::tempdir().unwrap();
    let (eps_d, t_d) = (0.3, -0.4);
    let (eps_l, t_l, tau) = (0.1, -0.25, -0.15);
    let d = dir.path();
    let one = |v: f64| Mat::from_fn(1, 1, |_, _| c(v, 0.0));
    write_block(&d.join("onsite.npy"), &one(eps_d));
    write_block(&d.join("coupling.npy"), &one(t_d));
    write_block(&d.join("lead-onsite.npy"), &one(eps_l));
    write_block(&d.join("lead-coupling.npy"), &one(t_l));
    write_block(&d.join("join.npy"), &one(tau));
    let text = "name = \"junction\"\n[device]\nkind = \"blocks\"\nspacing_nm = 0.5\ncells = 4\n\
         onsite_file = \"onsite.npy\"\ncoupling_file = \"coupling.npy\"\n\
         [leads.left]\nfermi_level_ev = 0.2\ntemperature_k = 300.0\n\
         onsite_file = \"lead-onsite.npy\"\ncoupling_file = \"lead-coupling.npy\"\njoin_file = \"join.npy\"\n\
         [leads.right]\nfermi_level_ev = 0.2\ntemperature_k = 300.0\n\
         [grid]\nstep_ev = 0.005\nmin_ev = -0.6\nmax_ev = 1.2\n";
    let r = load(d, text);
    assert!(matches!(r.problem.left.lead, Lead::Joined { .. }));
    let t = transmissions(&r);
    let energies = r.problem.grid.energies();
    let mut inside = 0;
    let mut worst: f64 = 0.0;
    for (e, got) in energies.iter().zip(&t) {
        let gl = chain_surface(*e, eps_l, t_l);
        let gr = chain_surface(*e, eps_d, t_d);
        let want =
            4.0 * tau * tau * gl.im * gr.im / (c(1.0, 0.0) - gl * gr * (tau * tau)).norm_sqr();
        if want > 1e-3 {
            inside += 1;
        }
        assert!((got - want).abs() <= 1e-8, "E = {e}: {got} vs {want}");
        worst = worst.max((got - want).abs());
    }
    println!(
        "junction: largest |ΔT| = {worst:e} over {} energies",
        energies.len()
    );
    assert!(inside > 20, "only {inside} energies in both bands");
}

/// The retarded Green's function block G_{first,last} of a dense chain of
/// cells with self-energies on its two ends, and Γ of the two ends.
fn dense_end_to_end(
    onsite: &[Mat<C64>],
    coupling: &[Mat<C64>],
    energy: f64,
    sigma_l: &Mat<C64>,
    sigma_r: &Mat<C64>,
) -> f64 {
    let b = onsite[0].nrows();
    let n = onsite.len();
    let dim = b * n;
    let mut m = Mat::<C64>::zeros(dim, dim);
    for i in 0..n {
        for r in 0..b {
            for k in 0..b {
                m[(i * b + r, i * b + k)] = -onsite[i][(r, k)];
                if i + 1 < n {
                    m[(i * b + r, (i + 1) * b + k)] = -coupling[i][(r, k)];
                    m[((i + 1) * b + k, i * b + r)] = -coupling[i][(r, k)].conj();
                }
            }
        }
        for r in 0..b {
            m[(i * b + r, i * b + r)] += c(energy, 0.0);
        }
    }
    let last = (n - 1) * b;
    for r in 0..b {
        for k in 0..b {
            m[(r, k)] -= sigma_l[(r, k)];
            m[(last + r, last + k)] -= sigma_r[(r, k)];
        }
    }
    let g = m.partial_piv_lu().inverse();
    let g1n = Mat::from_fn(b, b, |r, k| g[(r, last + k)]);
    let gl = qheat::leads::broadening(sigma_l);
    let gr = qheat::leads::broadening(sigma_r);
    let prod = &gl * &g1n * &gr * g1n.adjoint();
    (0..b).map(|i| prod[(i, i)].re).sum()
}

/// Two-orbital leads of their own, each with a band unlike the device's
/// and joined by a block unlike both its own coupling and the device's,
/// against a dense reference: the device with twelve explicit cells of
/// each lead in front of it, the joining blocks between, and at the far
/// ends the self-energy of the lead continuing itself (the dense inverse
/// is the definition the recursion and the one Dyson step of the joined
/// lead must reproduce; common practice). The two differ by rounding and
/// by how well the periodic self-energies satisfy their own recursion at
/// real energy (checked to 1e-9 relative by the lead code): 1e-8 absolute
/// on T ≤ 2.
#[test]
fn joined_leads_of_their_own_match_explicit_lead_cells() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let (onsite, coupling) = write_device(d);
    let lead_on = [
        Mat::from_fn(2, 2, |r, k| match (r, k) {
            (0, 0) => c(0.0, 0.0),
            (1, 1) => c(0.6, 0.0),
            (0, 1) => c(0.03, -0.05),
            _ => c(0.03, 0.05),
        }),
        Mat::from_fn(2, 2, |r, k| match (r, k) {
            (0, 0) => c(0.25, 0.0),
            (1, 1) => c(0.3, 0.0),
            _ => c(0.1, 0.0),
        }),
    ];
    let lead_co = [
        Mat::from_fn(2, 2, |r, k| match (r, k) {
            (0, 0) => c(-0.35, 0.0),
            (1, 1) => c(-0.2, 0.05),
            (0, 1) => c(0.05, 0.0),
            _ => c(0.0, 0.02),
        }),
        Mat::from_fn(2, 2, |r, k| c(if r == k { -0.28 } else { -0.03 }, 0.0)),
    ];
    let joins = [
        Mat::from_fn(2, 2, |r, k| c(-0.2 + 0.03 * r as f64, 0.02 * k as f64)),
        Mat::from_fn(2, 2, |r, k| {
            c(if r == k { -0.22 } else { 0.06 }, -0.01 * r as f64)
        }),
    ];
    for (i, side) in ["left", "right"].iter().enumerate() {
        write_block(&d.join(format!("{side}-on.npy")), &lead_on[i]);
        write_block(&d.join(format!("{side}-co.npy")), &lead_co[i]);
        write_block(&d.join(format!("{side}-join.npy")), &joins[i]);
    }
    let own = |side: &str| {
        format!(
            "onsite_file = \"{side}-on.npy\"\ncoupling_file = \"{side}-co.npy\"\njoin_file = \"{side}-join.npy\""
        )
    };
    let r = load(d, &case_text(&own("left"), &own("right"), ""));
    let t = transmissions(&r);
    // The dense chain: 12 left lead cells, the device, 12 right lead cells.
    let m = 12;
    let mut cells = vec![lead_on[0].clone(); m];
    cells.extend(onsite.iter().cloned());
    cells.extend(vec![lead_on[1].clone(); m]);
    let mut bonds = vec![lead_co[0].clone(); m - 1];
    bonds.push(joins[0].clone());
    bonds.extend(vec![coupling.clone(); CELLS - 1]);
    bonds.push(joins[1].clone());
    bonds.extend(vec![lead_co[1].clone(); m - 1]);
    let params = DecimationParams::default();
    let bulk = |i: usize| Lead::Periodic {
        onsite: lead_on[i].clone(),
        hopping: lead_co[i].clone(),
    };
    let mut worst: f64 = 0.0;
    let mut conducting = 0;
    for (e, got) in r.problem.grid.energies().iter().zip(&t) {
        let sl = bulk(0).self_energy(Side::Left, *e, &params).unwrap();
        let sr = bulk(1).self_energy(Side::Right, *e, &params).unwrap();
        let want = dense_end_to_end(&cells, &bonds, *e, &sl, &sr);
        if want > 1e-3 {
            conducting += 1;
        }
        worst = worst.max((got - want).abs());
    }
    assert!(conducting > 20, "only {conducting} conducting energies");
    println!("explicit lead cells: largest |ΔT| = {worst:e}");
    assert!(worst <= 1e-8, "largest difference {worst:e}");
}
