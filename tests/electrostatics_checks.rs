//! Self-consistent electrostatics against two closed forms: the built-in
//! potential of a junction and the Debye screening length.
//!
//! Both devices are long and coherent. Electrons whose energy lies
//! between two band edges of the profile are reflected, and the local
//! density of states away from the step carries standing waves
//! cos(2k(E)x + φ) that a uniform energy grid aliases near a band bottom
//! (2x·Δk > π between neighbouring grid energies within 15–30 nm for
//! steps of 0.04–2 meV). For a coherent device the engine therefore counts
//! the equilibrium part of the electrons on the complex energy plane
//! (`electrostatics::contour`), where the Green's function is smooth, and
//! only the non-equilibrium rest (zero here) on the grid: the count of a
//! cell is then that of the exact density of states, and the references
//! below are the exact density of states of the infinite chain.

use qheat::electrostatics::{self, Boundary, Coupling, Electrostatics, VACUUM_PERMITTIVITY};
use qheat::scba::{ScbaParams, Silent};
use qheat::units::ELEMENTARY_CHARGE;

#[path = "support/chain_density.rs"]
mod chain_density;
use chain_density::{T, chain, exact_neutral_edge};

fn settings(permittivity: f64, area: f64, donors: Vec<f64>) -> Electrostatics {
    let cells = donors.len();
    Electrostatics {
        permittivity: vec![permittivity; cells],
        acceptors_cm3: vec![0.0; cells],
        donors_cm3: donors,
        area_nm2: area,
        gate: None,
        left: Boundary::Neutral,
        right: Boundary::Neutral,
        tolerance_ev: 1e-10,
        max_iterations: 80,
        mixing_depth: 5,
        mixing_factor: 0.5,
        coupling: Coupling::default(),
    }
}

/// The middle and the spread (largest minus smallest) of the potential
/// energy `u` over the cells `range`.
fn bulk(u: &[f64], range: std::ops::Range<usize>) -> (f64, f64) {
    let (lo, hi) = u[range.clone()]
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |m, &x| {
            (m.0.min(x), m.1.max(x))
        });
    (0.5 * (lo + hi), hi - lo)
}

/// Junction at equilibrium: a 240 nm coherent wire (mass 0.25, cells of
/// 0.5 nm, 25 nm², ε_r = 12) whose halves carry 1e18 and 4e18 donors per
/// cm³, leads continuing both ends at Fermi level 0. Deep inside each half
/// (the 15 nm next to each end, more than 100 nm from the junction, over
/// 25 screening lengths of either side: at 120 cells the excess charge of
/// the 1e18 side's end cells was measured at 1e-6 of the doping, the
/// tail of the screening cloud, e^(−x/L_D) with L_D = 4.1 nm) the band must be flat and the
/// charge neutral, and the step of the band across the junction must be
/// the difference of the neutral-bulk µ − Ec of the two sides (common
/// practice: the built-in potential of a junction, e.g. S. M. Sze,
/// Physics of Semiconductor Devices, 1981, ch. 2).
///
/// Which density of states: deep in a long flat coherent region the
/// spectral function of a cell is that of the infinite chain, and the
/// engine's contour count integrates it exactly, so the neutral edge of
/// each side is that of the chain's exact density of states
/// ([`exact_neutral_edge`]).
///
/// Tolerance 1e-6 eV: the outer tolerance is 1e-10 eV, the screening
/// tails reach the bulk cells as e^(−25) of the 43 meV step, the contour count and the references are exact to
/// ~1e-12 relative in the electrons (≈ 3e-14 eV in the edge), and the
/// references are bisected to 1e-13 eV.
/// Neutrality: |n_i − D_i| below 1e-6 of the cell's doping.
#[test]
fn junction_step_is_the_difference_of_the_neutral_levels() {
    let (cells, a, mass) = (480, 0.5, 0.25);
    let p = chain(cells, a, mass, (-0.1507, 0.45, 0.002));
    let t = qheat::units::hopping_ev(mass, a);
    let kt = qheat::units::thermal_energy_ev(T);
    let (n_left, n_right, area) = (1e18, 4e18, 25.0);
    let donors: Vec<f64> = (0..cells)
        .map(|i| if i < cells / 2 { n_left } else { n_right })
        .collect();
    let es = settings(12.0, area, donors);
    let sc =
        electrostatics::solve(&p, &es, &ScbaParams::default(), None, None, &mut Silent).unwrap();
    assert!(sc.report.converged, "{:?}", sc.report.history);
    let d = es.net_doping_per_cell(a);
    let ec_left = exact_neutral_edge(d[0], t, kt);
    let ec_right = exact_neutral_edge(d[cells - 1], t, kt);
    let deep = 30;
    let (u_left, spread_left) = bulk(&sc.potential_ev, 0..deep);
    let (u_right, spread_right) = bulk(&sc.potential_ev, cells - deep..cells);
    assert!(
        spread_left < 1e-6 && spread_right < 1e-6,
        "{spread_left} {spread_right}"
    );
    for i in (0..deep).chain(cells - deep..cells) {
        let excess = sc.electrons[i] - d[i];
        assert!(excess.abs() < 1e-6 * d[i], "cell {i}: {excess} electrons");
    }
    // µ = 0 on both sides, so µ − Ec = −U deep inside each.
    let step = u_right - u_left;
    let expected = ec_right - ec_left;
    eprintln!(
        "outer {}, step {step} eV, neutral levels {expected} eV",
        sc.report.outer_iterations
    );
    assert!(
        (step - expected).abs() < 1e-6,
        "step {step} eV, difference of the neutral levels {expected} eV"
    );
}

/// Debye screening: a 120 nm coherent wire (mass 1, cells of 0.5 nm,
/// 20 nm², ε_r = 12, 1.7e17 donors per cm³) at equilibrium, first with
/// both ends neutral (flat band U_n), then with the left end held 1 meV
/// above U_n. In the non-degenerate limit the potential decays as
/// e^(−x/L_D), L_D = (ε k_BT/(e² N_D))^(1/2) = 10.0 nm (common practice:
/// Debye screening, e.g. N. W. Ashcroft and N. D. Mermin, Solid State
/// Physics, 1976, ch. 17; S. M. Sze, Physics of Semiconductor Devices,
/// 1981). The nonlinear Poisson–Boltzmann profile tanh(u/4) =
/// tanh(u_0/4) e^(−x/L_D) decays with exactly L_D once u ≪ 1, so the
/// 1 meV (0.04 k_BT) step adds nothing at the fit's precision.
///
/// Fit: least squares of ln(U_i − U_n) against x_i over 2 L_D ≤ x ≤
/// 6 L_D (away from the pinned end and 60 nm from the neutral right end,
/// whose reflected tail is e^(−12) there). Tolerance 2 %, against these
/// expected deviations: the lattice, whose discrete decay constant is
/// (2/a) asinh(a/2L_D), (a/L_D)²/24 ≈ 1e-4; the degeneracy left at
/// µ − Ec ≈ −4.9 k_BT, dn/dµ = (n/k_BT)(1 − 0.71 e^(η)), ≈ 0.3 %; the
/// non-locality of the quantum density over the thermal wavelength
/// (4.3 nm), ħ²/(24 m k_BT L_D²) ≈ 0.1 % (from memory: the leading
/// gradient correction of a Boltzmann gas); the energy grid (1 meV) in
/// the count (only the predictor's Jacobian uses the grid; the count is
/// the contour's), none.
#[test]
fn weak_perturbation_decays_over_the_debye_length() {
    let (cells, a, mass) = (240, 0.5, 1.0);
    let p = chain(cells, a, mass, (-0.0207, 0.6, 0.001));
    let kt = qheat::units::thermal_energy_ev(T);
    let (nd, area, eps) = (1.7e17, 20.0, 12.0);
    let es = settings(eps, area, vec![nd; cells]);
    let params = ScbaParams::default();
    let flat = electrostatics::solve(&p, &es, &params, None, None, &mut Silent).unwrap();
    assert!(flat.report.converged, "{:?}", flat.report.history);
    let (un, spread) = bulk(&flat.potential_ev, 0..cells);
    assert!(spread < 1e-9, "the uniform wire is not flat: {spread} eV");
    assert!(-un / kt < -3.0, "degenerate: µ − Ec = {} k_BT", -un / kt);
    let delta = 1e-3;
    let mut pinned = es.clone();
    pinned.left = Boundary::Fixed {
        potential_v: -(un + delta),
    };
    let start = &flat.potential_ev;
    let sc = electrostatics::solve(&p, &pinned, &params, None, Some(start), &mut Silent).unwrap();
    assert!(sc.report.converged, "{:?}", sc.report.history);
    let ld = (VACUUM_PERMITTIVITY * eps * kt / (ELEMENTARY_CHARGE * nd * 1e6)).sqrt() * 1e9;
    let points: Vec<(f64, f64)> = (0..cells)
        .map(|i| (i as f64 * a, sc.potential_ev[i] - un))
        .filter(|(x, _)| (2.0 * ld..=6.0 * ld).contains(x))
        .collect();
    assert!(
        points.iter().all(|(_, du)| *du > 0.0),
        "the perturbation changes sign: {points:?}"
    );
    let m = points.len() as f64;
    let mean_x = points.iter().map(|p| p.0).sum::<f64>() / m;
    let mean_y = points.iter().map(|p| p.1.ln()).sum::<f64>() / m;
    let (sxy, sxx) = points.iter().fold((0.0, 0.0), |s, p| {
        let dx = p.0 - mean_x;
        (s.0 + dx * (p.1.ln() - mean_y), s.1 + dx * dx)
    });
    let fitted = -sxx / sxy;
    eprintln!(
        "decay length {fitted} nm, L_D {ld} nm, outer {} and {}",
        flat.report.outer_iterations, sc.report.outer_iterations
    );
    assert!(
        (fitted / ld - 1.0).abs() < 0.02,
        "decay length {fitted} nm against L_D = {ld} nm"
    );
}

/// Ohmic ends: each end cell is held where it, continued as its lead is,
/// is a charge-neutral bulk at its lead's Fermi level. The same junction
/// as above, half as long, first at equilibrium and then with the leads'
/// Fermi levels at ±10 mV (a coherent device under bias).
///
/// Checks: the end cells sit at the exact neutral edge of their doping
/// (from the chain's exact density of states, [`exact_neutral_edge`],
/// an independent path: the engine's end value comes from its own
/// midpoint rule over the band, 4000 points of a smooth periodic
/// integrand, exact to rounding) plus their lead's Fermi level, to 1e-9
/// eV (the references are bisected to 1e-13 eV; the rest is rounding of
/// the two counts); and at equilibrium the cells deep in each half (30
/// cells, more than 60 nm from the junction, 15 screening lengths of the
/// 1e18 side) agree with the zero-field solve of the same device to 1e-6
/// eV, where both are the neutral bulk (the tolerance of the junction
/// check above: the screening tails reach those cells as e^(−15) of the
/// 43 meV step, 1.3e-8 eV).
#[test]
fn ohmic_ends_hold_the_neutral_bulk_levels_of_their_leads() {
    let (cells, a, mass) = (240, 0.5, 0.25);
    let t = qheat::units::hopping_ev(mass, a);
    let kt = qheat::units::thermal_energy_ev(T);
    let donors: Vec<f64> = (0..cells)
        .map(|i| if i < cells / 2 { 1e18 } else { 4e18 })
        .collect();
    let zero_field = settings(12.0, 25.0, donors);
    let ohmic = Electrostatics {
        left: Boundary::Ohmic,
        right: Boundary::Ohmic,
        ..zero_field.clone()
    };
    let d = ohmic.net_doping_per_cell(a);
    let edges = (
        exact_neutral_edge(d[0], t, kt),
        exact_neutral_edge(d[cells - 1], t, kt),
    );
    let solve = |es: &Electrostatics, mu: (f64, f64)| {
        let mut p = chain(cells, a, mass, (-0.1507, 0.45, 0.002));
        (p.left.fermi_level_ev, p.right.fermi_level_ev) = mu;
        let sc =
            electrostatics::solve(&p, es, &ScbaParams::default(), None, None, &mut Silent).unwrap();
        assert!(sc.report.converged, "{:?}", sc.report.history);
        sc.potential_ev
    };
    for mu in [(0.0, 0.0), (0.01, -0.01)] {
        let u = solve(&ohmic, mu);
        let (left, right) = (u[0] - (edges.0 + mu.0), u[cells - 1] - (edges.1 + mu.1));
        eprintln!("µ {mu:?}: end cells off their neutral levels by {left:e}, {right:e} eV");
        assert!(
            left.abs() < 1e-9 && right.abs() < 1e-9,
            "{left:e} {right:e}"
        );
        if mu.0 == 0.0 {
            let floating = solve(&zero_field, mu);
            let deep = 30;
            for i in (0..deep).chain(cells - deep..cells) {
                let gap = u[i] - floating[i];
                assert!(
                    gap.abs() < 1e-6,
                    "cell {i}: {gap:e} eV from the zero-field solve"
                );
            }
        }
    }
}
