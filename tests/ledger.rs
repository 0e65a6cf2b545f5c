//! The conservation ledger compares quantities computed independently, so
//! it reports how far a solve is from the fixed point of the Born loop;
//! the phonon-side lattice power agrees with the electron side at
//! convergence; the local Fermi level is flagged, not clamped, when a
//! cell's electron number needs a µ outside the search interval.

mod common;
use common::*;
use qheat::grid::EnergyGrid;
use qheat::model::Problem;
use qheat::observables::{FermiLevelStatus, Observables, observe};
use qheat::scattering::{Scattering, ScatteringSelfEnergy};
use qheat::scba::{Mixing, ScbaParams, Silent, Solution, solve};
use qheat::units::{ELEMENTARY_CHARGE, PLANCK_EV_S};

/// A biased barrier (cells 12..18 of 30, 0.1 eV, m* = 0.07, a = 0.5 nm)
/// with phonon modes (energy eV, coupling eV²) on every cell. Coarse grid
/// (4 meV steps, k_B T = 26 meV) keeps the solves fast.
fn biased_barrier(modes: &[(f64, f64)]) -> Problem {
    let d = barrier_chain(30, 0.5, 0.07, 12, 18, 0.1);
    let step = 0.004;
    let grid = EnergyGrid::covering(0.5 * step, 0.42, step);
    let mut p = coherent_problem(d, (0.09, 300.0), (0.03, 300.0), grid.clone());
    for &(w, c) in modes {
        p.scattering
            .phonons
            .push(phonon(&grid, w, c, &[true; 30], 300.0));
    }
    p
}

fn solved(p: &Problem, tolerance: f64) -> (Solution, Observables) {
    solved_with(p, tolerance, ScbaParams::default().mixing)
}

fn solved_with(p: &Problem, tolerance: f64, mixing: Mixing) -> (Solution, Observables) {
    let params = ScbaParams::default()
        .with_tolerance(tolerance)
        .with_max_iterations(300)
        .with_mixing(mixing);
    let sol = solve(p, &params, None, &mut Silent).unwrap();
    assert!(sol.report.converged, "{:?}", sol.report.history.last());
    let o = observe(&sol);
    (sol, o)
}

/// Stopped early (tolerance 1e-3 with plain linear mixing, a few Born
/// iterations), the ledger shows
/// a residual above 1e-6; the same case at tolerance 1e-10 brings every
/// entry below 1e-8 (the reference list for this project asks for 1e-8 at a
/// tight tolerance; Lake & Datta, PRB 46, 4757 (1992), from memory: the
/// in/out-scattering form conserves charge and energy exactly at the fixed
/// point). The 1e-6 threshold is the level the physics notes call a bug
/// when seen after convergence, so a solve stopped at 1e-3 must exceed it.
#[test]
fn early_stop_shows_in_the_ledger_and_convergence_closes_it() {
    let p = biased_barrier(&[(0.04, 4e-3)]);
    let (early, o) = solved_with(&p, 1e-3, Mixing::Linear { factor: 0.5 });
    let l = &o.ledger;
    eprintln!(
        "early stop after {} iterations: {l:?}",
        early.report.iterations
    );
    assert!(early.report.iterations < 30, "{}", early.report.iterations);
    assert!(l.worst_relative() > 1e-6, "{l:?}");
    assert!(l.charge_relative > 1e-6, "{l:?}");
    // Measured 1.5e-6 here; demand ten times the converged bound at least.
    assert!(
        l.lattice_relative > 1e-7,
        "lattice entry {:e} hides an unconverged solve: {l:?}",
        l.lattice_relative
    );
    // The energy entry is an identity of each pass: it stays at rounding
    // level even here, which is why it does not decide anything.
    assert!(l.energy_relative < 1e-12, "{l:?}");
    let (_, o) = solved(&p, 1e-10);
    let l = &o.ledger;
    eprintln!("converged: {l:?}");
    for (name, r) in l.relative_entries() {
        assert!(r < 1e-8, "{name} = {r:e} after convergence: {l:?}");
    }
    assert!(l.worst_relative() < 1e-8);
    // summary.json says what every entry compares.
    let j = qheat::output::results::ledger_json(l);
    for (name, _) in l.relative_entries() {
        assert!(j["compares"][name].is_string(), "{name}: {j}");
    }
}

/// Phonon-side lattice power of two modes, from the final Green's functions
/// alone, against (a) the same power written as −∫ E j_0 dE with Σ0 of each
/// mode rebuilt from those Green's functions (algebraically equal at any
/// point of the loop: tolerance 1e-12 relative, rounding of sums over
/// ~10⁴ terms), and (b) at convergence (tolerance 1e-10) Σ_i P_i from the
/// bath flow and J_E,1 + J_E,2, to 1e-8 relative (the physics notes: exact
/// on the grid at the fixed point).
#[test]
fn phonon_side_power_matches_electron_side_with_two_modes() {
    let p = biased_barrier(&[(0.04, 3e-3), (0.012, 1.5e-3)]);
    let (sol, o) = solved(&p, 1e-10);
    assert_eq!(o.phonon_modes.len(), 2);
    for (m, mode) in o.phonon_modes.iter().enumerate() {
        let only = Scattering {
            dephasing_ev2: Vec::new(),
            phonons: vec![p.scattering.phonons[m].clone()],
            hermitian_part: false,
            ..Default::default()
        };
        let sigma = only.self_energy(&sol.pass.green, p.grid.count, None);
        let direct = electron_side_power(&sol, &sigma);
        assert!(mode.emission_per_s > 0.0 && mode.absorption_per_s > 0.0);
        assert!(
            (mode.power_w - direct).abs() <= 1e-12 * mode.gross_w(),
            "mode {m}: {} vs {direct} (gross {})",
            mode.power_w,
            mode.gross_w()
        );
        // Biased: both modes heat the lattice.
        assert!(mode.power_w > 0.0, "mode {m}: {}", mode.power_w);
    }
    let sum: f64 = o.phonon_modes.iter().map(|m| m.power_w).sum();
    assert_eq!(sum, o.lattice_power_phonon_side_w);
    let electron_side: f64 = o.sites.lattice_power_w.iter().sum();
    assert!(
        rel(sum, electron_side) < 1e-8,
        "Σ_m P_m = {sum} vs Σ_i P_i = {electron_side}"
    );
    let leads = o.energy_current_left_w + o.energy_current_right_w;
    assert!(rel(sum, leads) < 1e-8, "Σ_m P_m = {sum} vs J_E = {leads}");
}

/// −∫ E Σ_s (Σ^in G^p − Σ^out G^n) dE for a given Σ0 (W).
fn electron_side_power(sol: &Solution, sigma: &ScatteringSelfEnergy) -> f64 {
    let p = &sol.problem;
    let g = &sol.pass.green;
    let ns = g.sites;
    let mut acc = 0.0;
    for k in 0..p.grid.count {
        let e = p.grid.energy(k);
        for s in 0..ns {
            let i = k * ns + s;
            acc += e * (sigma.inscatter[i] * g.empty(i) - sigma.outscatter(i) * g.filled[i]);
        }
    }
    -acc * p.spin_degeneracy / PLANCK_EV_S * p.grid.step_ev * ELEMENTARY_CHARGE
}

/// The charge entry is measured against the current itself, max(|I_1|,
/// current floor), not against the gross inflow plus outflow of the leads,
/// which is tens to hundreds of times larger and hid the residual.
#[test]
fn charge_residual_is_relative_to_the_current() {
    let p = biased_barrier(&[(0.04, 4e-3)]);
    let (sol, o) = solved(&p, 1e-3);
    let l = &o.ledger;
    let floor = sol.report.params.current_floor_a;
    assert!(o.current_a.abs() > floor);
    assert_eq!(l.charge_scale_a, o.current_a.abs());
    assert_eq!(l.charge_a, o.current_left_a + o.current_right_a);
    assert!(rel(l.charge_relative, l.charge_a.abs() / o.current_a.abs()) < 1e-15);
    assert!(l.charge_relative > 1e-6, "{l:?}");
}

/// A non-degenerate contact (µ = −50 meV, below the band bottom at 0) at
/// 4 K: every cell holds electrons only in the e^{−(E−µ)/k_BT} tail, so its
/// local Fermi level is ≈ −50 meV, below the search interval that starts
/// 60 k_B T = 21 meV under the grid. It must come out flagged and NaN, not
/// clamped to the interval end. The same device with µ inside the band
/// matches every cell.
#[test]
fn fermi_level_below_the_search_interval_is_flagged() {
    let d = barrier_chain(12, 0.5, 0.07, 4, 8, 0.05);
    let grid = EnergyGrid::covering(0.001, 0.1, 0.001);
    let p = coherent_problem(d.clone(), (-0.05, 4.0), (-0.05, 4.0), grid.clone());
    let sol = solve(&p, &ScbaParams::default(), None, &mut Silent).unwrap();
    let o = observe(&sol);
    let s = &o.sites;
    let (lo, _) = s.fermi_level_interval_ev;
    assert!(lo > -0.05 && lo < 0.0, "interval starts at {lo}");
    assert!(
        s.fermi_level_status
            .iter()
            .all(|&f| f == FermiLevelStatus::BelowInterval),
        "{:?}",
        s.fermi_level_status
    );
    assert!(
        s.fermi_level_ev.iter().all(|m| m.is_nan()),
        "{:?}",
        s.fermi_level_ev
    );
    let j = qheat::output::results::fermi_level_info(&o);
    assert_eq!(j.outside_interval, 12, "{j:?}");
    assert_eq!(j.cells_below_interval.len(), 12);

    let p = coherent_problem(d, (0.03, 4.0), (0.03, 4.0), grid);
    let sol = solve(&p, &ScbaParams::default(), None, &mut Silent).unwrap();
    let s = observe(&sol).sites;
    for (i, (m, f)) in s
        .fermi_level_ev
        .iter()
        .zip(&s.fermi_level_status)
        .enumerate()
    {
        assert_eq!(*f, FermiLevelStatus::Matched, "cell {i}");
        assert!((m - 0.03).abs() < 1e-3, "cell {i}: µ = {m}");
    }
}

/// Elastic dephasing exchanges no energy: with dephasing alone the
/// phonon side is exactly zero and the electron side vanishes at
/// convergence; with dephasing and a phonon the two sides still agree to
/// 1e-8 relative at tolerance 1e-10 (same bound as above).
#[test]
fn dephasing_leaves_the_lattice_comparison_intact() {
    let mut p = biased_barrier(&[]);
    p.scattering.dephasing_ev2 = vec![2e-3; 30];
    let (_, o) = solved(&p, 1e-10);
    assert!(o.phonon_modes.is_empty());
    assert_eq!(o.lattice_power_phonon_side_w, 0.0);
    let l = &o.ledger;
    assert!(l.lattice_relative < 1e-8, "{l:?}");
    assert!(l.worst_relative() < 1e-8, "{l:?}");

    let mut p = biased_barrier(&[(0.04, 3e-3)]);
    p.scattering.dephasing_ev2 = vec![2e-3; 30];
    let (_, o) = solved(&p, 1e-10);
    let l = &o.ledger;
    assert!(o.lattice_power_phonon_side_w > 0.0);
    for (name, r) in l.relative_entries() {
        assert!(r < 1e-8, "{name} = {r:e}: {l:?}");
    }
}
