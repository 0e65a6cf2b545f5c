//! Scattering in orbital space: couplings per orbital and, for sources that
//! mix orbitals, full b × b self-energies within a cell.

use qheat::case::{Case, Resolved};
use qheat::scba::{self, Silent, Solution};
use std::path::Path;

/// A two-orbital strip (two sites across, b = 2), short and biased, whose
/// lowest transverse mode opens at about 0.06 eV, below the Fermi level.
const STRIP: &str = r#"
name = "two-orbital strip"
[device]
kind = "strip"
spacing_nm = 0.5
length_nm = 3.0
width_sites = 2
effective_mass = 0.2
band_edge_ev = -0.7
[leads.left]
fermi_level_ev = 0.3
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.3
temperature_k = 300.0
[bias]
voltage_v = 0.02
[grid]
step_ev = 0.004
min_ev = 0.0
max_ev = 0.6
[solver]
tolerance = 1e-10
"#;

fn case(extra: &str) -> Case {
    Case::parse(&format!("{STRIP}{extra}"), "test.toml", Path::new("."))
        .unwrap_or_else(|e| panic!("{e}"))
}

fn resolved(extra: &str) -> Resolved {
    case(extra).resolve().unwrap_or_else(|e| panic!("{e}"))
}

fn solve(r: &Resolved) -> Solution {
    scba::solve(&r.problem, &r.scba, None, &mut Silent).expect("solve")
}

fn current(s: &Solution) -> f64 {
    scba::terminal_currents(&s.problem, &s.pass.flows).0
}

/// A per-orbital list with the same value on every orbital is the scalar
/// coupling: the same Σ0 on every site, so the same numbers. The 1e-14
/// allows for nothing but the last bit (the path is the same code).
#[test]
fn equal_per_orbital_values_are_the_scalar_coupling() {
    let scalar = resolved(
        "[[phonon]]\nenergy_ev = 0.04\ncoupling_ev2 = 3e-3\n\
         [dephasing]\nstrength_ev2 = 1e-3\n",
    );
    let listed = resolved(
        "[[phonon]]\nenergy_ev = 0.04\ncoupling_per_orbital_ev2 = [3e-3, 3e-3]\n\
         [dephasing]\nstrength_per_orbital_ev2 = [1e-3, 1e-3]\n",
    );
    assert_eq!(
        scalar.problem.scattering, listed.problem.scattering,
        "the resolved couplings differ"
    );
    let (a, b) = (solve(&scalar), solve(&listed));
    assert!(a.report.converged && b.report.converged);
    let (ia, ib) = (current(&a), current(&b));
    assert!(ia.abs() > 1e-9, "the strip carries no current: {ia}");
    assert!((ia - ib).abs() <= 1e-14 * ia.abs(), "{ia} vs {ib}");
}

/// Different values per orbital reach the orbitals they name: the mode
/// couples only to the first orbital of each cell.
#[test]
fn per_orbital_values_land_on_their_orbitals() {
    let r = resolved("[[phonon]]\nenergy_ev = 0.04\ncoupling_per_orbital_ev2 = [2e-3, 0]\n");
    let d = &r.problem.scattering.phonons[0].coupling_ev2;
    assert_eq!(d.len(), 2 * r.problem.device.cells());
    for (s, &v) in d.iter().enumerate() {
        let want = if s % 2 == 0 { 2e-3 } else { 0.0 };
        assert_eq!(v, want, "orbital site {s}");
    }
}

/// Lists of the wrong length, negative strengths and a list next to the
/// scalar key are refused, naming the key and what was expected.
#[test]
fn bad_per_orbital_lists_are_refused_with_the_key() {
    let cases = [
        (
            "[[phonon]]\nenergy_ev = 0.04\ncoupling_per_orbital_ev2 = [1e-3, 1e-3, 1e-3]\n",
            "phonon.0.coupling_per_orbital_ev2",
            "one value per orbital of a cell: 2",
        ),
        (
            "[dephasing]\nstrength_per_orbital_ev2 = [1e-3, -1e-3]\n",
            "dephasing.strength_per_orbital_ev2",
            "at orbital 1",
        ),
        (
            "[[phonon]]\nenergy_ev = 0.04\ncoupling_ev2 = 1e-3\ncoupling_per_orbital_ev2 = [1e-3, 0]\n",
            "phonon.0.coupling_per_orbital_ev2",
            "not both",
        ),
        (
            "[dephasing]\nstrength_per_orbital_ev2 = [1e-3, \"a\"]\n",
            "dephasing.strength_per_orbital_ev2",
            "an array of numbers",
        ),
    ];
    for (extra, key, words) in cases {
        let text = format!("{STRIP}{extra}");
        let e = match Case::parse(&text, "test.toml", Path::new(".")).and_then(|c| c.resolve()) {
            Ok(_) => panic!("accepted: {extra}"),
            Err(e) => e.to_string(),
        };
        assert!(e.contains(key), "{extra}: {e}");
        assert!(e.contains(words), "{extra}: {e}");
    }
}

// ---------------------------------------------------------------------
// Full b × b blocks: sources that mix the orbitals of a cell.
// ---------------------------------------------------------------------

mod common;

use common::dense_scba::dense_scba;
use faer::Mat;
use qheat::C64;
use qheat::grid::EnergyGrid;
use qheat::leads::Lead;
use qheat::model::Problem;
use qheat::observables::{lattice_power, observe};
use qheat::scattering::{CouplingMatrices, PhononMode};
use qheat::scba::{LeadTable, Mixing, ScbaParams};

/// A two-band p–n tunnel junction with no interband term in H: orbital 0
/// a conduction band (E_c = 0.25 eV, hopping −0.1 eV), orbital 1 a valence
/// band (E_v = −0.25 eV, hopping +0.1 eV), both raised by 0.3 eV on the
/// left half and lowered by 0.3 eV on the right half. The left valence
/// band (−0.35 … 0.05 eV) and the right conduction band (−0.05 … 0.35 eV)
/// overlap, the left and right copies of the same band do not: every
/// electron that crosses has to change band, which only an interband
/// source can make it do.
fn junction(cells: usize) -> Problem {
    let (ec, ev, t) = (0.25, -0.25, 0.1);
    let onsite: Vec<Mat<C64>> = (0..cells)
        .map(|i| {
            let u = if i < cells / 2 { 0.3 } else { -0.3 };
            Mat::from_fn(2, 2, |r, c| match (r, c) {
                (0, 0) => C64::new(ec + 2.0 * t + u, 0.0),
                (1, 1) => C64::new(ev - 2.0 * t + u, 0.0),
                _ => C64::new(0.0, 0.0),
            })
        })
        .collect();
    let hop = Mat::from_fn(2, 2, |r, c| match (r, c) {
        (0, 0) => C64::new(-t, 0.0),
        (1, 1) => C64::new(t, 0.0),
        _ => C64::new(0.0, 0.0),
    });
    let device = qheat::device::blocks(0.5, onsite, vec![hop], vec![0.0; cells]).unwrap();
    let grid = EnergyGrid::new(-0.15, 0.005, 61);
    common::coherent_problem(device, (0.03, 300.0), (-0.03, 300.0), grid)
}

/// σ_x scaled by `g` (eV): a source that moves electrons between the bands.
fn interband(g: f64) -> Mat<C64> {
    Mat::from_fn(2, 2, |r, c| C64::new(if r != c { g } else { 0.0 }, 0.0))
}

/// A phonon mode of ħω = 4 grid steps at 300 K with the same sources in
/// every one of `cells` cells and per-site strengths `diag`.
fn mode(grid: &EnergyGrid, cells: usize, sources: &[Mat<C64>], diag: Vec<f64>) -> PhononMode {
    PhononMode {
        requested_energy_ev: 4.0 * grid.step_ev,
        energy_ev: 4.0 * grid.step_ev,
        steps: 4,
        coupling_ev2: diag,
        coupling_matrices: CouplingMatrices {
            per_cell: vec![sources.to_vec(); cells],
        },
        bath_temperature_k: 300.0,
    }
}

fn params() -> ScbaParams {
    ScbaParams::default()
        .with_tolerance(1e-11)
        .with_current_floor_a(1e-24)
}

fn solved(p: &Problem) -> Solution {
    let s = scba::solve(p, &params(), None, &mut Silent).expect("solve");
    assert!(s.report.converged, "{:?}", s.report.history.last());
    s
}

/// Single-orbital sources √D e_s e_sᵀ on blocks are the diagonal model: the
/// block path must give the diagonal path's currents, lattice power per
/// cell and local Fermi levels. 1e-12: the two paths add the same terms in
/// another order and both loops stop at a relative change of 1e-11.
#[test]
fn single_orbital_sources_on_blocks_are_the_diagonal_model() {
    let mut diag = junction(8);
    let n = diag.device.cells();
    let d = [2e-3, 1e-3];
    let per_site: Vec<f64> = (0..2 * n).map(|s| d[s % 2]).collect();
    diag.scattering.phonons = vec![mode(&diag.grid, n, &[], per_site.clone())];
    diag.scattering.phonons[0].coupling_matrices = CouplingMatrices::default();
    diag.scattering.dephasing_ev2 = vec![5e-4; 2 * n];
    // Some interband H so that the current is not zero.
    for tau in &mut diag.device.coupling {
        tau[(0, 1)] = C64::new(0.02, 0.0);
        tau[(1, 0)] = C64::new(0.02, 0.0);
    }
    diag.left = common::coherent_problem(
        diag.device.clone(),
        (0.03, 300.0),
        (-0.03, 300.0),
        diag.grid.clone(),
    )
    .left;
    diag.right = common::coherent_problem(
        diag.device.clone(),
        (0.03, 300.0),
        (-0.03, 300.0),
        diag.grid.clone(),
    )
    .right;
    let single = |o: usize, v: f64| {
        Mat::from_fn(2, 2, |r, c| {
            C64::new(if r == o && c == o { v.sqrt() } else { 0.0 }, 0.0)
        })
    };
    let mut blocks = diag.clone();
    blocks.scattering.phonons = vec![mode(
        &diag.grid,
        n,
        &[single(0, d[0]), single(1, d[1])],
        vec![],
    )];
    blocks.scattering.dephasing_ev2 = Vec::new();
    blocks.scattering.dephasing_matrices = CouplingMatrices {
        per_cell: vec![vec![single(0, 5e-4), single(1, 5e-4)]; n],
    };
    assert!(blocks.scattering.uses_blocks() && !diag.scattering.uses_blocks());
    let (a, b) = (solved(&diag), solved(&blocks));
    assert!(a.sigma.blocks.is_none() && b.sigma.blocks == Some(2));
    let (oa, ob) = (observe(&a), observe(&b));
    assert!(oa.current_a.abs() > 1e-12, "no current: {}", oa.current_a);
    assert!(
        common::rel(ob.current_a, oa.current_a) < 1e-12,
        "{} vs {}",
        ob.current_a,
        oa.current_a
    );
    assert!(
        common::profile_deviation(&ob.sites.lattice_power_w, &oa.sites.lattice_power_w) < 1e-12
    );
    let scale = oa
        .sites
        .fermi_level_ev
        .iter()
        .fold(0.0f64, |m, v| m.max(v.abs()));
    for (x, y) in ob.sites.fermi_level_ev.iter().zip(&oa.sites.fermi_level_ev) {
        assert!((x - y).abs() <= 1e-12 * scale, "µ {x} vs {y}");
    }
}

/// Conduction-band particles gained per unit time from scattering, over
/// g_s/h: with no interband term in H or in the leads, the conduction band
/// loses particles only to the leads, so −(its flow in from both leads)
/// is the interband transfer. From the lead self-energies and the end
/// cells' blocks: Re[Σ^in_α A − Γ_α G^n]_00 summed over energies.
fn interband_flow(s: &Solution) -> f64 {
    let p = &s.problem;
    let leads = LeadTable::new(p).unwrap();
    let blocks = s.pass.blocks.as_ref().expect("blocks");
    let n = p.device.cells();
    let mut total = 0.0;
    for k in 0..p.grid.count {
        let e = p.grid.energy(k);
        for (cell, sigma, f) in [
            (0, &leads.left[k], p.left.occupation(e)),
            (n - 1, &leads.right[k], p.right.occupation(e)),
        ] {
            let base = k * blocks.per_energy + cell * 4;
            let g = |r: usize, c: usize| blocks.retarded[base + 2 * r + c];
            let gn = |r: usize, c: usize| blocks.filled[base + 2 * r + c];
            let i = C64::new(0.0, 1.0);
            let mut flow = C64::new(0.0, 0.0);
            for c in 0..2 {
                let gamma = (sigma[(0, c)] - sigma[(c, 0)].conj()) * i;
                let a = (g(c, 0) - g(0, c).conj()) * i;
                flow += gamma * (a * f - gn(c, 0));
            }
            total += flow.re;
        }
    }
    -total * p.grid.step_ev
}

/// At weak coupling the interband current is second order in the
/// interband matrix (first order in its square, the strength): doubling
/// the matrix quadruples the current. From common practice (Fermi's golden
/// rule: a rate ∝ |M|²). The next order is relative O(M² A) ~ 1e-4 here,
/// so 1 % leaves room for it and for the 1e-11 stopping test, and still
/// tells 4 from the 2 of a linear or the 8 of a cubic law.
#[test]
fn interband_current_grows_as_the_square_of_the_coupling() {
    let base = junction(8);
    let n = base.device.cells();
    let run = |g: f64| {
        let mut p = base.clone();
        p.scattering.phonons = vec![mode(&p.grid, n, &[interband(g)], vec![])];
        let s = solved(&p);
        (interband_flow(&s), observe(&s))
    };
    let (j1, o1) = run(0.005);
    let (j2, o2) = run(0.01);
    assert!(j1 > 0.0, "no interband transfer: {j1}");
    // Every electron that crosses changes band: the terminal current is
    // the interband transfer (charge −e per electron, per g_s/h).
    let scale = -qheat::units::ELEMENTARY_CHARGE * 2.0 / qheat::units::PLANCK_EV_S;
    assert!(
        common::rel(o1.current_a, j1 * scale) < 1e-8,
        "{} vs {}",
        o1.current_a,
        j1 * scale
    );
    let ratio = j2 / j1;
    assert!((ratio - 4.0).abs() < 0.04, "ratio {ratio}");
    assert!(o2.ledger.worst_relative() < 1e-8, "{:?}", o2.ledger);
    // Without the interband source no electron crosses.
    let (j0, _) = {
        let mut p = base.clone();
        p.scattering.phonons = vec![mode(
            &p.grid,
            n,
            &[Mat::from_fn(2, 2, |r, c| {
                C64::new(if r == c { 0.05 } else { 0.0 }, 0.0)
            })],
            vec![],
        )];
        let s = solved(&p);
        (interband_flow(&s), ())
    };
    assert!(
        j0.abs() < 1e-6 * j1,
        "intraband source moved {j0} between bands"
    );
}

/// Rotating the orbital basis of every cell by the same unitary U (H, the
/// leads' broadening and every coupling matrix, X →
/// U† X U) changes no observable: currents, lattice power per cell and the
/// density summed over a cell's orbitals are traces. Common practice
/// (unitary invariance of the trace); 1e-10 for the rounding of the
/// rotated products (the lead decimation included) through the loop.
#[test]
fn rotating_the_orbital_basis_changes_nothing() {
    let mut p = junction(6);
    let n = p.device.cells();
    let dephase = Mat::from_fn(2, 2, |r, c| match (r, c) {
        (0, 0) => C64::new(0.01, 0.0),
        (0, 1) => C64::new(0.004, 0.003),
        (1, 0) => C64::new(0.004, -0.003),
        _ => C64::new(-0.005, 0.0),
    });
    p.scattering.phonons = vec![mode(&p.grid, n, &[interband(0.03)], vec![])];
    p.scattering.dephasing_matrices = CouplingMatrices {
        per_cell: vec![vec![dephase]; n],
    };
    let (th, ph) = (0.6f64, 0.9f64);
    let u = Mat::from_fn(2, 2, |r, c| match (r, c) {
        (0, 0) => C64::new(th.cos(), 0.0),
        (0, 1) => C64::from_polar(-th.sin(), ph),
        (1, 0) => C64::from_polar(th.sin(), -ph),
        _ => C64::new(th.cos(), 0.0),
    });
    let rot = |x: &Mat<C64>| u.adjoint() * x * &u;
    // Wide-band leads, whose Γ rotates exactly (a decimated lead would add
    // its own stopping test to the comparison).
    let gamma = |a: f64, b: f64| {
        Mat::from_fn(2, 2, |r, c| match (r, c) {
            (0, 0) => C64::new(a, 0.0),
            (1, 1) => C64::new(b, 0.0),
            _ => C64::new(0.01, 0.0),
        })
    };
    p.left.lead = Lead::WideBand {
        gamma: gamma(0.05, 0.08),
    };
    p.right.lead = Lead::WideBand {
        gamma: gamma(0.07, 0.04),
    };
    let mut q = p.clone();
    q.device.onsite = p.device.onsite.iter().map(rot).collect();
    q.device.coupling = p.device.coupling.iter().map(rot).collect();
    q.left.lead = Lead::WideBand {
        gamma: rot(&gamma(0.05, 0.08)),
    };
    q.right.lead = Lead::WideBand {
        gamma: rot(&gamma(0.07, 0.04)),
    };
    q.scattering.phonons[0].coupling_matrices.per_cell = vec![vec![rot(&interband(0.03))]; n];
    q.scattering.dephasing_matrices.per_cell =
        vec![vec![rot(&p.scattering.dephasing_matrices.per_cell[0][0])]; n];
    // Both loops run to a relative change of 1e-13 so that where each one
    // stops does not show at 1e-10.
    let tight = params().with_tolerance(1e-13);
    let solve = |p: &Problem| scba::solve(p, &tight, None, &mut Silent).unwrap();
    let (a, b) = (solve(&p), solve(&q));
    assert!(a.report.converged && b.report.converged);
    let (oa, ob) = (observe(&a), observe(&b));
    assert!(oa.current_a.abs() > 0.0);
    assert!(
        common::rel(ob.current_a, oa.current_a) < 1e-10,
        "{} vs {}",
        ob.current_a,
        oa.current_a
    );
    assert!(common::rel(ob.current_right_a, oa.current_right_a) < 1e-10);
    assert!(common::profile_deviation(&lattice_power(&b), &lattice_power(&a)) < 1e-10);
    let density = |s: &Solution| -> Vec<f64> {
        (0..n)
            .map(|i| {
                (0..s.problem.grid.count)
                    .map(|k| {
                        let g = &s.pass.green;
                        g.filled[k * 2 * n + 2 * i] + g.filled[k * 2 * n + 2 * i + 1]
                    })
                    .sum()
            })
            .collect()
    };
    assert!(common::profile_deviation(&density(&b), &density(&a)) < 1e-10);
}

/// The recursion's Born loop on blocks against a dense Born loop that
/// inverts the whole E − H − Σ and writes Σ_ii = Σ_M M G_ii M out again
/// (tests/common/dense_scba.rs): currents and Σ0 agree to 1e-8, set by
/// the two loops' stopping tests (1e-11 here, 1e-12 for the reference,
/// whose linear mixing stops further from the fixed point per step).
#[test]
fn block_born_loop_matches_a_dense_born_loop() {
    let mut p = junction(6);
    let n = p.device.cells();
    let dephase = Mat::from_fn(2, 2, |r, c| {
        C64::new(
            if r == c { 0.01 } else { 0.004 },
            if r < c {
                0.003
            } else if r > c {
                -0.003
            } else {
                0.0
            },
        )
    });
    p.scattering.phonons = vec![mode(
        &p.grid,
        n,
        &[interband(0.03)],
        (0..2 * n)
            .map(|s| if s % 2 == 0 { 1e-3 } else { 0.0 })
            .collect(),
    )];
    p.scattering.dephasing_matrices = CouplingMatrices {
        per_cell: vec![vec![dephase]; n],
    };
    let s = scba::solve(
        &p,
        &params().with_mixing(Mixing::default()),
        None,
        &mut Silent,
    )
    .unwrap();
    assert!(s.report.converged);
    let dense = dense_scba(&p, 1e-12, 400);
    let (il, ir) = scba::terminal_currents(&p, &s.pass.flows);
    let (dl, dr) = scba::terminal_currents(&p, &dense.pass.flows);
    assert!(il.abs() > 0.0);
    assert!(common::rel(il, dl) < 1e-8, "{il} vs {dl}");
    assert!(common::rel(ir, dr) < 1e-8, "{ir} vs {dr}");
    let scale = dense
        .sigma
        .retarded
        .iter()
        .fold(0.0f64, |m, z| m.max(z.norm()));
    let worst = s
        .sigma
        .retarded
        .iter()
        .zip(&dense.sigma.retarded)
        .fold(0.0f64, |m, (a, b)| m.max((a - b).norm()));
    assert!(
        worst < 1e-8 * scale,
        "Σ^r differs by {worst:e} of {scale:e}"
    );
    let worst_in = s
        .sigma
        .inscatter
        .iter()
        .zip(&dense.sigma.inscatter)
        .fold(0.0f64, |m, (a, b)| m.max((a - b).abs()));
    assert!(worst_in < 1e-8 * scale, "Σ^in differs by {worst_in:e}");
}

/// A block self-energy offered to a case without coupling matrices (or
/// the other way round) is refused with both layouts named.
#[test]
fn a_warm_start_of_the_other_layout_is_refused() {
    let mut p = junction(4);
    let n = p.device.cells();
    p.scattering.phonons = vec![mode(&p.grid, n, &[], vec![1e-3; 2 * n])];
    p.scattering.phonons[0].coupling_matrices = CouplingMatrices::default();
    let blocks = qheat::scattering::ScatteringSelfEnergy::zeros_blocks(p.grid.count, n, 2);
    let e = scba::solve(&p, &params(), Some(&blocks), &mut Silent)
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("warm start") && e.contains("2×2 blocks") && e.contains("diagonal"),
        "{e}"
    );
    p.scattering.phonons[0].coupling_matrices = CouplingMatrices {
        per_cell: vec![vec![interband(0.01)]; n],
    };
    let diag = qheat::scattering::ScatteringSelfEnergy::zeros(p.grid.count, 2 * n);
    let e = scba::solve(&p, &params(), Some(&diag), &mut Silent)
        .unwrap_err()
        .to_string();
    assert!(e.contains("warm start") && e.contains("2×2 blocks"), "{e}");
}

/// The demo's coupling matrices file reaches every cell of the region as
/// one source, and its phonon-assisted interband current flows; with the
/// diagonal file of the same strength no electron changes band and the
/// current vanishes to rounding.
#[test]
fn the_demo_junction_carries_only_interband_current() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo");
    let case = Case::load(&dir.join("interband-junction.toml")).unwrap();
    let r = case.resolve().unwrap();
    let m = &r.problem.scattering.phonons[0].coupling_matrices;
    assert_eq!(m.per_cell.len(), 12);
    assert!(m.per_cell.iter().all(|c| c.len() == 1));
    assert_eq!(m.per_cell[5][0][(0, 1)], C64::new(0.03, 0.0));
    let inter = solve(&r);
    let text = std::fs::read_to_string(dir.join("interband-junction.toml"))
        .unwrap()
        .replace("phonon-interband.csv", "phonon-diagonal.csv");
    let diag = Case::parse(&text, "diag.toml", &dir)
        .unwrap()
        .resolve()
        .unwrap();
    assert_eq!(
        diag.problem.scattering.phonons[0]
            .coupling_matrices
            .per_cell[0]
            .len(),
        2
    );
    let within = solve(&diag);
    let (i1, i0) = (current(&inter), current(&within));
    assert!(i1.abs() > 1e-9, "interband current {i1}");
    assert!(
        i0.abs() < 1e-10 * i1.abs(),
        "diagonal coupling moved {i0} A"
    );
}
