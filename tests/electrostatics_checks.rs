//! Self-consistent electrostatics against two closed forms: the built-in
//! potential of a junction and the Debye screening length.
//!
//! Both checks fail today and are ignored (run them with `cargo test
//! --release --test electrostatics_checks -- --ignored`). In a long
//! coherent wire, electrons whose energy lies between two band edges of
//! the profile (the built-in step of a junction, or the step a fixed end
//! puts on the band) are reflected, and the local density of states away
//! from the step carries standing waves cos(2k(E)x + φ). Integrated over
//! energy they decay with the distance x, but on a uniform grid of step
//! ΔE they do not once 2x·Δk exceeds π between neighbouring nodes, which
//! near a band bottom (Δk ≈ √(2mΔE)/ħ) happens within x ≈ 15–30 nm for
//! ΔE = 0.04–2 meV. The band-edge-aware count samples the standing-wave
//! factor at the first node above each cell's edge and holds it down to
//! the edge, so a share ≈ 1.1 √(ΔE/k_BT) of the electrons of every far
//! cell (a few per cent) carries an uncontrolled factor between 0 and 2:
//! far more than the 1e-6 eV of the junction check or the e^(−6) tail
//! the Debye fit reads. The outer loop then does not converge (80
//! iterations, potential changes of 1–30 meV), or converges to a profile
//! that is neither flat nor neutral far from the junction.

use qheat::electrostatics::{self, Boundary, Coupling, Electrostatics, VACUUM_PERMITTIVITY};
use qheat::scba::{ScbaParams, Silent};
use qheat::units::ELEMENTARY_CHARGE;

#[path = "support/chain_density.rs"]
mod chain_density;
use chain_density::{T, chain, chain_electrons};

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

/// The band edge at which [`chain_electrons`] equals `electrons`, by
/// bisection (the count falls monotonically with the edge).
fn grid_neutral_edge(electrons: f64, t: f64, e: &[f64], kt: f64) -> f64 {
    let (mut lo, mut hi) = (-0.5, 0.5);
    assert!(chain_electrons(lo, t, e, kt) > electrons);
    assert!(chain_electrons(hi, t, e, kt) < electrons);
    while hi - lo > 1e-13 {
        let mid = 0.5 * (lo + hi);
        if chain_electrons(mid, t, e, kt) > electrons {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
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

/// Junction at equilibrium: a 120 nm coherent wire (mass 0.25, cells of
/// 0.5 nm, 25 nm², ε_r = 12) whose halves carry 1e18 and 4e18 donors per
/// cm³, leads continuing both ends at Fermi level 0. Deep inside each half
/// (the 15 nm next to each end, more than 40 nm from the junction, over
/// ten screening lengths of either side) the band must be flat and the
/// charge neutral, and the step of the band across the junction must be
/// the difference of the neutral-bulk µ − Ec of the two sides (common
/// practice: the built-in potential of a junction, e.g. S. M. Sze,
/// Physics of Semiconductor Devices, 1981, ch. 2).
///
/// Which density of states: the engine counts the electrons of a cell by
/// integrating the device's spectral function on the energy grid with the
/// band-edge-aware weights; deep in a long flat coherent region that
/// spectral function is the chain's, so the neutral edge of each side is
/// computed from the analytic chain density on the same grid with the
/// same weights ([`chain_electrons`]). The band integral over wave number
/// (`uniform_band_electrons`) differs from it by the quadrature error of
/// the grid (0.2–0.7 % of the electrons at 2 meV, ≈ 0.1 meV in the edge),
/// which is no error of the self-consistency.
///
/// Tolerance 1e-6 eV: the outer tolerance is 1e-10 eV, the screening
/// tails reach the bulk cells as e^(−10) of the 36 meV step (< 2e-6 of
/// it, ≈ 6e-8 eV), and the references are bisected to 1e-13 eV.
/// Neutrality: |n_i − D_i| below 1e-6 of the cell's doping.
#[test]
#[ignore = "fails: coherent standing waves near the band bottom are aliased by the energy grid (see the file's text)"]
fn junction_step_is_the_difference_of_the_neutral_levels() {
    let (cells, a, mass) = (240, 0.5, 0.25);
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
    let e = p.grid.energies();
    let d = es.net_doping_per_cell(a);
    let ec_left = grid_neutral_edge(d[0], t, &e, kt);
    let ec_right = grid_neutral_edge(d[cells - 1], t, &e, kt);
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
/// the count, ≈ 0.1 %.
#[test]
#[ignore = "fails: coherent standing waves near the band bottom are aliased by the energy grid (see the file's text)"]
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
    assert!(
        (fitted / ld - 1.0).abs() < 0.02,
        "decay length {fitted} nm against L_D = {ld} nm"
    );
}
