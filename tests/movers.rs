//! Right- and left-moving quasi-Fermi levels: ballistic chains, a barrier
//! in the Landauer–Büttiker picture, and the average of the two levels.

mod common;
use common::*;
use qheat::grid::EnergyGrid;
use qheat::observables::{MoverStatus, local_fermi_levels, mover_levels, uniform_pairs};
use qheat::scba::{ScbaParams, Silent, solve};
use qheat::units::fermi;

const T: f64 = 300.0;

/// In a uniform ballistic device every right-mover comes from the left
/// lead and every left-mover from the right one, so µ₊ = µ_L and µ₋ = µ_R
/// in every cell ("Landauer–Büttiker scattering picture; common
/// practice"). Both sides of the density match are plain sums over the
/// same grid at the contacts' temperature, so the only error is the
/// rounding of f± (about 1e-12): the tolerance 1e-9 eV is that, with room.
/// Checked on a chain (b = 1) and on a three-wide strip (b = 3: up to three
/// propagating modes each way, others evanescent).
#[test]
fn uniform_ballistic_movers_carry_the_levels_of_their_leads() {
    let (mu_l, mu_r) = (0.08, 0.03);
    let step = 0.002;
    let chain = barrier_chain(20, 0.5, 0.07, 0, 0, 0.0);
    let t = qheat::units::hopping_ev(0.1, 0.5);
    let strip = qheat::device::strip(3, 0.5, t, 0.0, vec![0.0; 10]);
    let lowest = strip.band_edge_ev[0];
    for (device, e0) in [(chain, 0.0), (strip, lowest)] {
        let grid = EnergyGrid::covering(e0 + 0.5 * step, e0 + 0.35, step);
        let n = device.cells();
        let p = coherent_problem(device, (e0 + mu_l, T), (e0 + mu_r, T), grid);
        assert!(uniform_pairs(&p).iter().all(|&u| u));
        let sol = solve(&p, &ScbaParams::default(), None, &mut Silent).unwrap();
        let m = mover_levels(&sol);
        for i in 0..n - 1 {
            assert_eq!(m.status[i], MoverStatus::Matched, "cell {i}");
            assert!(
                (m.right_ev[i] - e0 - mu_l).abs() < 1e-9,
                "µ₊[{i}] = {}",
                m.right_ev[i]
            );
            assert!(
                (m.left_ev[i] - e0 - mu_r).abs() < 1e-9,
                "µ₋[{i}] = {}",
                m.left_ev[i]
            );
        }
        assert_eq!(m.status[n - 1], MoverStatus::LastCell);
        assert!(m.right_ev[n - 1].is_nan());
    }
}

/// Across a barrier of transmission T(E) and reflection R = 1 − T (one
/// mode), left of it the right-movers come only from the left lead,
/// f₊ = f_L, and the left-movers are the reflected part of the left
/// lead's electrons plus the transmitted part of the right lead's,
/// f₋ = R f_L + T f_R; right of it, mirrored ("Landauer–Büttiker
/// scattering picture; common practice"). T(E) is the coherent
/// transmission of the same solve. Tolerance 1e-10 at each energy:
/// both sides are computed from Green's functions good to rounding.
/// The two pairs that straddle a barrier edge are flagged as not uniform
/// (the pairs inside the barrier are uniform again).
#[test]
fn movers_fillings_beside_a_barrier_follow_reflection_and_transmission() {
    let (mu_l, mu_r) = (0.09, 0.03);
    let step = 0.002;
    let grid = EnergyGrid::covering(0.5 * step, 0.3, step);
    let (n, b0, b1) = (24, 10, 13);
    let d = barrier_chain(n, 0.5, 0.07, b0, b1, 0.06);
    let p = coherent_problem(d, (mu_l, T), (mu_r, T), grid.clone());
    let sol = solve(&p, &ScbaParams::default(), None, &mut Silent).unwrap();
    let m = mover_levels(&sol);
    for i in 0..n - 1 {
        if i + 1 == b0 || i + 1 == b1 {
            assert_eq!(m.status[i], MoverStatus::NotUniform, "cell {i}");
        } else if i + 1 < b0 || i >= b1 {
            assert_eq!(m.status[i], MoverStatus::Matched, "cell {i}");
        }
    }
    let mut checked = 0;
    for k in 0..grid.count {
        let e = grid.energy(k);
        let t = sol.pass.flows[k].transmission;
        let (fl, fr) = (fermi(e, mu_l, T), fermi(e, mu_r, T));
        for i in (0..b0 - 1).chain(b1..n - 1) {
            let (fp, fm) = (m.occupation_right[(i, k)], m.occupation_left[(i, k)]);
            let (ep, em) = if i < b0 {
                (fl, (1.0 - t) * fl + t * fr)
            } else {
                (t * fl + (1.0 - t) * fr, fr)
            };
            assert!(
                (fp - ep).abs() < 1e-10,
                "cell {i} E = {e}: f₊ = {fp} vs {ep}"
            );
            assert!(
                (fm - em).abs() < 1e-10,
                "cell {i} E = {e}: f₋ = {fm} vs {em}"
            );
            checked += 1;
        }
    }
    assert_eq!(checked, grid.count * (b0 - 1 + n - 1 - b1));
    // The levels split at the barrier: left of it µ₊ = µ_L and µ₋ above
    // µ_R; right of it µ₋ = µ_R and µ₊ below µ_L.
    assert!((m.right_ev[0] - mu_l).abs() < 1e-9 && m.left_ev[0] > mu_r + 1e-3);
    assert!((m.left_ev[n - 2] - mu_r).abs() < 1e-9 && m.right_ev[n - 2] < mu_l - 1e-3);
}

/// In a uniform ballistic region the movers' levels weighted by their
/// electrons, (n₊µ₊ + n₋µ₋)/(n₊ + n₋), reproduce µ(x): both equal the
/// mean of the contacts' levels to first order in the bias, and differ at
/// second order. At a bias of 2 mV and µ − E_c = 60 meV that difference is
/// about (1 meV)²/(60 meV) ≈ 2e-5 eV, so the check allows 5e-5 eV (2.5 %
/// of the bias); a level taken from one mover alone misses by 1 meV.
#[test]
fn density_weighted_movers_levels_give_the_local_level() {
    let step = 0.001;
    let grid = EnergyGrid::covering(0.5 * step, 0.3, step);
    let d = barrier_chain(16, 0.5, 0.07, 0, 0, 0.0);
    let p = coherent_problem(d, (0.061, T), (0.059, T), grid);
    let sol = solve(&p, &ScbaParams::default(), None, &mut Silent).unwrap();
    let m = mover_levels(&sol);
    let local = local_fermi_levels(&sol);
    for i in 0..15 {
        let (np, nm) = (m.electrons_right[i], m.electrons_left[i]);
        let avg = (np * m.right_ev[i] + nm * m.left_ev[i]) / (np + nm);
        let mu = local.fermi_level_ev[i];
        assert!((avg - mu).abs() < 5e-5, "cell {i}: {avg} vs µ = {mu}");
        // The movers' electrons add up to the cell's (no interference in a
        // uniform ballistic chain), to rounding.
        assert!(
            rel(np + nm, local.electrons[i]) < 1e-9,
            "{np} + {nm} vs {}",
            local.electrons[i]
        );
    }
}

/// With phonons on, the levels are still found in the uniform stretches,
/// bracketed by the contacts' levels, and the bath region's movers are no
/// longer filled to the leads' levels.
#[test]
fn movers_levels_with_phonons_lie_between_the_contacts() {
    let step = 0.002;
    let grid = EnergyGrid::covering(0.5 * step, 0.4, step);
    let n = 24;
    let d = barrier_chain(n, 0.5, 0.07, 10, 13, 0.08);
    let (mu_l, mu_r) = (0.1, 0.04);
    let mut p = coherent_problem(d, (mu_l, T), (mu_r, T), grid.clone());
    let mask: Vec<bool> = (0..n).map(|i| i >= 13).collect();
    p.scattering
        .phonons
        .push(phonon(&grid, 0.03, 4e-3, &mask, T));
    let sol = solve(&p, &ScbaParams::default(), None, &mut Silent).unwrap();
    let m = mover_levels(&sol);
    let matched: Vec<usize> = (0..n)
        .filter(|&i| m.status[i] == MoverStatus::Matched)
        .collect();
    assert!(matched.len() >= 15, "{matched:?}");
    for &i in &matched {
        for mu in [m.right_ev[i], m.left_ev[i]] {
            assert!(mu > mu_r - 1e-6 && mu < mu_l + 1e-6, "cell {i}: {mu}");
        }
    }
    // Just right of the barrier, without phonons, the left-movers would
    // all come from the right lead (µ₋ = µ_R, see the barrier test); the
    // phonons to the right scatter right-movers (filled above f_R) back.
    assert!(
        m.left_ev[13] > mu_r + 1e-4,
        "µ₋ beside the bath: {}",
        m.left_ev[13]
    );
}
