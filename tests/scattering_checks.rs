//! Scattering inside the device: conservation laws, detailed balance,
//! elastic dephasing, the dense reference, the Peltier signature and
//! Onsager reciprocity.

#![allow(clippy::needless_range_loop)]

mod common;
use common::dense_scba::dense_scba;
use common::*;
use qheat::grid::EnergyGrid;
use qheat::model::Problem;
use qheat::observables::{Observables, observe};
use qheat::scba::{ScbaParams, Silent, Solution, solve};
use qheat::units::{BOLTZMANN_EV_PER_K, ELEMENTARY_CHARGE, PLANCK_EV_S};

fn tight() -> ScbaParams {
    ScbaParams::default()
        .with_tolerance(1e-10)
        .with_max_iterations(200)
}

fn solved(p: &Problem, params: &ScbaParams) -> (Solution, Observables) {
    let sol = solve(p, params, None, &mut Silent).unwrap();
    assert!(
        sol.report.converged,
        "did not converge: {:?}",
        sol.report.history.last()
    );
    let o = observe(&sol);
    (sol, o)
}

/// A biased barrier (cells 25..35 of 60, 0.1 eV, m* = 0.07, a = 0.5 nm)
/// with phonon modes over the whole device.
fn barrier_with_phonons(mu: (f64, f64), temps: (f64, f64), modes: &[(f64, f64)]) -> Problem {
    let d = barrier_chain(60, 0.5, 0.07, 25, 35, 0.1);
    let step = 0.002;
    let grid = EnergyGrid::covering(0.5 * step, 0.45, step);
    let mut p = coherent_problem(d, (mu.0, temps.0), (mu.1, temps.1), grid.clone());
    let bath = 0.5 * (temps.0 + temps.1);
    for &(w, c) in modes {
        p.scattering
            .phonons
            .push(phonon(&grid, w, c, &[true; 60], bath));
    }
    p
}

/// Gross power the electrons hand to the phonons by emission alone (W):
/// ħω (g_s/h) Σ_k Σ_s D (N+1) G^n(E+ħω) G^p(E) ΔE · e.
fn gross_emission_power(sol: &Solution) -> f64 {
    let p = &sol.problem;
    let g = &sol.pass.green;
    let ns = g.sites;
    let ne = p.grid.count;
    let mut acc = 0.0;
    for m in &p.scattering.phonons {
        let n = m.occupation();
        for k in 0..ne.saturating_sub(m.steps) {
            for s in 0..ns {
                let up = (k + m.steps) * ns + s;
                acc += m.coupling_ev2[s]
                    * (n + 1.0)
                    * g.filled[up]
                    * g.empty(k * ns + s)
                    * m.energy_ev;
            }
        }
    }
    acc * p.spin_degeneracy / PLANCK_EV_S * p.grid.step_ev * ELEMENTARY_CHARGE
}

/// Detailed balance: at V = 0, equal temperatures and the bath at the same
/// T, current and every P_i vanish to 1e-10 of the gross emission power
/// (R. Lake, S. Datta, PRB 46, 4757 (1992), from memory; the exclusion-
/// principle form of the in/out-scattering makes this exact on the grid, up
/// to the Born tolerance 1e-12 used here).
#[test]
fn equilibrium_detailed_balance() {
    let p = barrier_with_phonons((0.05, 0.05), (300.0, 300.0), &[(0.04, 3e-3), (0.012, 1e-3)]);
    let params = tight().with_tolerance(1e-12);
    let (sol, o) = solved(&p, &params);
    let gross = gross_emission_power(&sol);
    assert!(gross > 0.0);
    let i_scale = gross / 0.04; // an electron flow of the same size, in A
    assert!(
        o.current_a.abs() < 1e-10 * i_scale,
        "I = {} vs {i_scale}",
        o.current_a
    );
    for (i, pw) in o.sites.lattice_power_w.iter().enumerate() {
        assert!(pw.abs() < 1e-10 * gross, "P[{i}] = {pw} vs gross {gross}");
    }
    // At zero current the charge entry is measured against the solver's
    // current floor, where rounding of the sums shows; hold the charge
    // residual to the same gross scale as the current above, and the power
    // entries (measured against gross exchanges) to 1e-10.
    let l = &o.ledger;
    assert!(l.charge_a.abs() < 1e-10 * i_scale, "{l:?}");
    for r in [
        l.lattice_relative,
        l.leads_lattice_relative,
        l.heat_relative,
    ] {
        assert!(r < 1e-10, "{l:?}");
    }
    // The local Fermi level is flat and equal to the contacts'.
    for mu in &o.sites.fermi_level_ev {
        assert!((mu - 0.05).abs() < 1e-6, "µ_i = {mu}");
    }
}

/// Ledger after convergence at tolerance 1e-10: charge and energy residuals
/// ≤ 1e-8 relative (Lake & Datta 1992, from memory), for
/// a biased barrier with two modes and for a thermally biased one, with the
/// Hermitian part of Σ0 neglected and included.
#[test]
fn ledger_closes_under_bias_and_thermal_bias() {
    let cases = [
        barrier_with_phonons((0.08, 0.02), (300.0, 300.0), &[(0.04, 3e-3), (0.012, 1e-3)]),
        barrier_with_phonons((0.05, 0.05), (330.0, 270.0), &[(0.03, 2e-3)]),
    ];
    for mut p in cases {
        for hermitian in [false, true] {
            p.scattering.hermitian_part = hermitian;
            let (_, o) = solved(&p, &tight());
            let l = &o.ledger;
            assert!(l.charge_relative < 1e-8, "charge {l:?}");
            assert!(l.energy_relative < 1e-8, "energy {l:?}");
            assert!(l.heat_relative < 1e-8, "heat {l:?}");
            assert!(o.current_a.abs() > 1e-12);
        }
    }
}

fn dephased_chain(n: usize, d: f64) -> Problem {
    // t = 1 eV, on-site 0: band [−2, 2]; one energy at the band centre with
    // f1 = 1, f2 = 0 so that the particle flow is T_eff · g_s/h.
    let dev = qheat::device::chain(1.0, 1.0, -2.0, vec![0.0; n]);
    let mut p = coherent_problem(dev, (1.0, 1.0), (-1.0, 1.0), EnergyGrid::new(0.0, 1e-3, 1));
    p.scattering.dephasing_ev2 = vec![d; n];
    p
}

/// Site-local elastic dephasing D on a chain: 1/T_eff(N) = 1 + N D/(4t² − E²)
/// (Ohmic scaling, R = (h/g_s e²)(1 + L/λ)). The relation is derived here
/// from the out-scattering rate; no published source gives these numbers,
/// which were checked against a dense self-consistent solution (t = 1, E = 0,
/// D = 0.01: 1.05, 1.10, 1.20, 1.40, 1.80 for N = 20 … 320). Model after
/// R. Golizadeh-Mojarad, S. Datta, PRB 75, 081301(R) (2007), from memory.
/// Tolerance: slope within 0.5 % (the relation is first order in D/4t²).
/// The Ohmic part needs only the band centre, so it runs on one energy.
///
/// Dephasing is elastic, so it must deposit no heat. That is checked on a
/// real grid (±10 kT around a 0.1 V bias window, where electrons at many
/// energies flow): P_i = −∫ E j_0,i dE = 0 on every site, and in the same
/// test a phonon mode of the same strength (ħω = 20 meV) on the same chain
/// does show P_i ≠ 0, so a dephasing model that exchanged energy would fail.
#[test]
fn dephasing_is_ohmic_and_deposits_no_heat() {
    let d = 0.01;
    let ns = [20usize, 40, 80, 160, 320];
    let mut inv_t = Vec::new();
    for &n in &ns {
        let p = dephased_chain(n, d);
        let (sol, _) = solved(&p, &tight().with_tolerance(1e-13));
        let t_eff = sol.pass.flows[0].left;
        inv_t.push(1.0 / t_eff);
    }
    // Least-squares slope of 1/T against N.
    let nf: Vec<f64> = ns.iter().map(|&n| n as f64).collect();
    let mx = nf.iter().sum::<f64>() / 5.0;
    let my = inv_t.iter().sum::<f64>() / 5.0;
    let slope = nf
        .iter()
        .zip(&inv_t)
        .map(|(x, y)| (x - mx) * (y - my))
        .sum::<f64>()
        / nf.iter().map(|x| (x - mx).powi(2)).sum::<f64>();
    let expect = d / 4.0;
    assert!(
        rel(slope, expect) < 0.005,
        "slope {slope} vs {expect}; 1/T = {inv_t:?}"
    );
    let listed = [1.05, 1.10, 1.20, 1.40, 1.80];
    for (got, want) in inv_t.iter().zip(listed) {
        assert!(rel(*got, want) < 0.005, "{got} vs {want}");
    }

    // No heat on a real, biased grid.
    let kt = BOLTZMANN_EV_PER_K * 300.0;
    let n = 30;
    let biased = |scattering: &dyn Fn(&mut Problem, &EnergyGrid)| {
        let dev = qheat::device::chain(1.0, 1.0, -2.0, vec![0.0; n]);
        let grid = EnergyGrid::covering(-0.05 - 10.0 * kt, 0.05 + 10.0 * kt, kt / 4.0);
        let mut p = coherent_problem(dev, (0.05, 300.0), (-0.05, 300.0), grid.clone());
        scattering(&mut p, &grid);
        let params = tight().with_tolerance(1e-13);
        solved(&p, &params).1
    };
    let o = biased(&|p: &mut Problem, _: &EnergyGrid| p.scattering.dephasing_ev2 = vec![d; n]);
    let iv = o.electrical_power_w.abs();
    assert!(iv > 1e-7, "the chain carries current: I·V = {iv}");
    let worst = o
        .sites
        .lattice_power_w
        .iter()
        .fold(0.0f64, |m, p| m.max(p.abs()));
    assert!(
        worst <= 1e-12 * iv,
        "dephasing heated a site: max |P_i| = {worst:e} vs I·V {iv:e}"
    );
    // Elastic: what enters from the left at energy E leaves on the right
    // at the same E.
    let gross = o
        .spectrum
        .flow_left
        .iter()
        .fold(0.0f64, |m, j| m.max(j.abs()));
    for (j1, j2) in o.spectrum.flow_left.iter().zip(&o.spectrum.flow_right) {
        assert!((j1 + j2).abs() <= 1e-10 * gross, "j1 {j1} j2 {j2}");
    }
    // The same check sees an inelastic mechanism of the same strength.
    let o = biased(&|p: &mut Problem, grid: &EnergyGrid| {
        p.scattering
            .phonons
            .push(phonon(grid, 0.02, d, &[true; 30], 300.0))
    });
    let worst = o
        .sites
        .lattice_power_w
        .iter()
        .fold(0.0f64, |m, p| m.max(p.abs()));
    assert!(
        worst > 1e-6 * o.electrical_power_w.abs(),
        "phonons should exchange energy: max |P_i| = {worst:e}"
    );
}

/// D → 0 recovers the coherent result (to 1e-8: the change is first order
/// in D = 1e-12 eV²).
#[test]
fn weak_scattering_recovers_coherent() {
    let p0 = barrier_with_phonons((0.08, 0.02), (300.0, 300.0), &[]);
    let (_, o0) = solved(&p0, &tight());
    let mut p = barrier_with_phonons((0.08, 0.02), (300.0, 300.0), &[(0.04, 1e-12)]);
    p.scattering.dephasing_ev2 = vec![1e-12; 60];
    let (_, o) = solved(&p, &tight());
    assert!(rel(o.current_a, o0.current_a) < 1e-8);
    assert!(rel(o.heat_current_left_w, o0.heat_current_left_w) < 1e-8);
}

/// The recursion-based Born loop against the dense reference (whole-matrix
/// inversion, self-energies written out again, linear mixing) on a 24-site
/// barrier with two phonon modes and dephasing: currents, P_i and µ_i agree
/// to 1e-8 relative (both converged to 1e-12; what remains is the
/// difference of two fixed-point approximations).
#[test]
fn recursion_matches_dense_born_loop() {
    let n = 24;
    let d = barrier_chain(n, 0.5, 0.07, 10, 14, 0.1);
    let step = 0.004;
    let grid = EnergyGrid::covering(0.5 * step, 0.4, step);
    let mut p = coherent_problem(d, (0.09, 300.0), (0.03, 320.0), grid.clone());
    p.scattering
        .phonons
        .push(phonon(&grid, 0.036, 4e-3, &[true; 24], 310.0));
    let mask: Vec<bool> = (0..n).map(|i| i >= 14).collect();
    p.scattering
        .phonons
        .push(phonon(&grid, 0.012, 2e-3, &mask, 310.0));
    p.scattering.dephasing_ev2 = (0..n).map(|i| if i < 8 { 1e-3 } else { 0.0 }).collect();
    let params = tight().with_tolerance(1e-12);
    let (sol, o) = solved(&p, &params);
    let dense = dense_scba(&p, 1e-13, 2000);
    let dsol = Solution {
        problem: p.clone(),
        pass: dense.pass,
        sigma: dense.sigma,
        report: qheat::scba::ScbaReport {
            converged: true,
            iterations: dense.iterations,
            history: vec![],
            params,
            hermitian_part: false,
            warm_start: false,
            energy_order: qheat::scba::EnergyOrder::Simultaneous,
            probe_residual: None,
            coarse_levels: vec![],
        },
        lattice_temperature_k: None,
    };
    let od = observe(&dsol);
    assert!(
        rel(o.current_a, od.current_a) < 1e-8,
        "{} vs {}",
        o.current_a,
        od.current_a
    );
    assert!(rel(o.heat_current_left_w, od.heat_current_left_w) < 1e-8);
    assert!(rel(o.heat_current_right_w, od.heat_current_right_w) < 1e-8);
    let dp = profile_deviation(&o.sites.lattice_power_w, &od.sites.lattice_power_w);
    assert!(dp < 1e-8, "lattice power per cell differs by {dp:e}");
    for (a, b) in o.sites.fermi_level_ev.iter().zip(&od.sites.fermi_level_ev) {
        assert!((a - b).abs() < 1e-8 * 0.06, "µ {a} vs {b}");
    }
    // Energy-resolved flows and bond currents, relative to their largest value.
    let jmax = od
        .spectrum
        .flow_left
        .iter()
        .fold(0.0f64, |a, b| a.max(b.abs()));
    for (a, b) in o.spectrum.flow_bath.iter().zip(&od.spectrum.flow_bath) {
        assert!((a - b).abs() < 1e-8 * jmax, "j0 {a} vs {b}");
    }
    let rgf_map = qheat::observables::bond_current_map(&sol);
    let dense_map = qheat::observables::bond_current_map(&dsol);
    let bmax = dense_map.iter().fold(0.0f64, |a, b| a.max(b.abs()));
    for (a, b) in rgf_map.iter().zip(dense_map.iter()) {
        assert!((a - b).abs() < 1e-8 * bmax, "bond {a} vs {b}");
    }
}

/// Peltier signature: electrons driven over a barrier absorb phonons before
/// it (the lattice is cooled where they arrive below the barrier top) and
/// emit after it (heated); µ_i drops at the barrier; Σ P_i = I·V + J_Q,1 +
/// J_Q,2 (the ledger). Invented case: 0.1 eV barrier, 40 meV phonon
/// everywhere, 60 mV bias.
#[test]
fn peltier_cooling_before_and_heating_after_the_barrier() {
    let p = barrier_with_phonons((0.08, 0.02), (300.0, 300.0), &[(0.04, 3e-3)]);
    let (_, o) = solved(&p, &tight());
    let pw = &o.sites.lattice_power_w;
    let before: f64 = pw[15..25].iter().sum();
    let after: f64 = pw[35..45].iter().sum();
    assert!(
        o.current_a < 0.0,
        "electrons flow left to right (I_1 < 0 for V < 0)"
    );
    assert!(
        before < 0.0,
        "lattice before the barrier should be cooled: {before}"
    );
    assert!(
        after > 0.0,
        "lattice after the barrier should be heated: {after}"
    );
    let mu = &o.sites.fermi_level_ev;
    let drop_barrier = mu[23] - mu[37];
    let drop_left = mu[5] - mu[20];
    assert!(
        drop_barrier > 0.5 * (0.08 - 0.02),
        "µ drops mostly at the barrier: {drop_barrier}"
    );
    assert!(drop_barrier > 5.0 * drop_left.abs());
    let balance =
        o.lattice_power_w - (o.electrical_power_w + o.heat_current_left_w + o.heat_current_right_w);
    assert!(balance.abs() < 1e-8 * o.electrical_power_w);
}

/// Onsager reciprocity M12 = M21 (Kelvin relation Π = T S) with an
/// inelastic bath (L. Onsager, Phys. Rev. 37, 405 (1931), from memory). The
/// device is asymmetric on purpose: the barrier sits left of centre and the
/// phonons live only right of it, so the lattice takes up heat at first
/// order in V. Then only the flux conjugate to the symmetric split,
/// J_Q = (J_Q,1 − J_Q,2)/2, is reciprocal; J_Q,1 alone differs from it by
/// half the lattice power and must fail. Both are computed here from the same
/// four solves, and the library's response function must agree with the
/// right one. Tolerance 1e-4 on the residual: finite-difference error
/// (δ/kT)²/6 ≈ 2e-7 and the Born tolerance 1e-12 on currents whose
/// differences are 1e-3 of them; the wrong flux must miss by more than 1 %.
/// Perturbing lead 1 alone (lead 2 and the bath fixed) with its own heat
/// flux J_Q,1 is reciprocal too (three-terminal Onsager relation).
#[test]
fn onsager_reciprocity_with_phonons() {
    use qheat::case::ResponseSplit;
    use qheat::thermo::response::{OperatingPoint, linear_response, operating_point};
    let (mu, temp) = (0.05, 300.0);
    let base = {
        let d = barrier_chain(60, 0.5, 0.07, 15, 25, 0.1);
        let step = 0.002;
        let grid = EnergyGrid::covering(0.5 * step, 0.45, step);
        let mut p = coherent_problem(d, (mu, temp), (mu, temp), grid.clone());
        let mask: Vec<bool> = (0..60).map(|i| i >= 25).collect();
        p.scattering
            .phonons
            .push(phonon(&grid, 0.03, 4e-3, &mask, temp));
        p
    };
    let build = |op: &OperatingPoint| -> Result<Problem, String> {
        let mut p = base.clone();
        p.left.fermi_level_ev = op.fermi_level_left_ev;
        p.right.fermi_level_ev = op.fermi_level_right_ev;
        p.left.temperature_k = op.temperature_left_k;
        p.right.temperature_k = op.temperature_right_k;
        for m in &mut p.scattering.phonons {
            m.bath_temperature_k = op.bath_temperature_k;
        }
        Ok(p)
    };
    // The four runs of the symmetric split, by hand.
    let dv = 1e-3 * BOLTZMANN_EV_PER_K * temp;
    let dt = 1e-3 * temp;
    let params = tight().with_tolerance(1e-12);
    let run = |v: f64, t: f64| {
        let p = build(&operating_point(mu, temp, v, t, ResponseSplit::Symmetric)).unwrap();
        let (_, o) = solved(&p, &params);
        (o.current_a, o.heat_current_left_w, o.heat_current_right_w)
    };
    let (vp, vm, tp, tm) = (run(dv, 0.0), run(-dv, 0.0), run(0.0, dt), run(0.0, -dt));
    let m12 = temp * (tp.0 - tm.0) / (2.0 * dt);
    let m21_right = (0.5 * (vp.1 - vp.2) - 0.5 * (vm.1 - vm.2)) / (2.0 * dv);
    let m21_wrong = (vp.1 - vm.1) / (2.0 * dv);
    let right = rel(m21_right, m12);
    let wrong = rel(m21_wrong, m12);
    assert!(right < 1e-4, "Onsager with (J_Q,1 − J_Q,2)/2: {right:e}");
    assert!(
        wrong > 1e-2 && wrong > 100.0 * right,
        "J_Q,1 alone should break reciprocity here: {wrong:e} (right flux {right:e})"
    );
    for split in [ResponseSplit::Symmetric, ResponseSplit::LeftOnly] {
        let (c, m, _) =
            linear_response(&build, mu, temp, split, &tight(), 0.0, &mut Silent).unwrap();
        assert!(m.converged);
        assert!(
            m.onsager_residual < 1e-4,
            "{split:?}: Onsager {}",
            m.onsager_residual
        );
        assert!((c.peltier_v - temp * c.seebeck_v_per_k).abs() < 1e-4 * c.peltier_v.abs());
        if split == ResponseSplit::Symmetric {
            // Same operating points as the hand-made runs: same matrix.
            assert!(rel(m.m12, m12) < 1e-6, "M12 {} vs {m12}", m.m12);
            assert!(rel(m.m21, m21_right) < 1e-6, "M21 {} vs {m21_right}", m.m21);
        }
        assert!(
            c.conductance_s > 0.0 && c.seebeck_v_per_k < 0.0 && c.thermal_conductance_w_per_k > 0.0
        );
    }
    // Coherent: finite differences against the moments.
    let coh = barrier_with_phonons((0.05, 0.05), (300.0, 300.0), &[]);
    let build = |op: &OperatingPoint| -> Result<Problem, String> {
        let mut p = coh.clone();
        p.left.fermi_level_ev = op.fermi_level_left_ev;
        p.right.fermi_level_ev = op.fermi_level_right_ev;
        p.left.temperature_k = op.temperature_left_k;
        p.right.temperature_k = op.temperature_right_k;
        Ok(p)
    };
    let (fd, _, _) = linear_response(
        &build,
        0.05,
        300.0,
        ResponseSplit::Symmetric,
        &tight(),
        0.0,
        &mut Silent,
    )
    .unwrap();
    let exact = qheat::thermo::coherent_coefficients(&coh, 0.0).unwrap();
    assert!(rel(fd.conductance_s, exact.conductance_s) < 1e-6);
    assert!(
        rel(fd.seebeck_v_per_k, exact.seebeck_v_per_k) < 1e-6,
        "{} vs {}",
        fd.seebeck_v_per_k,
        exact.seebeck_v_per_k
    );
    assert!(
        rel(
            fd.thermal_conductance_w_per_k,
            exact.thermal_conductance_w_per_k
        ) < 1e-5
    );
}

/// Local resistances: the drops of the local Fermi level, with the drops
/// from the left contact into the first cell and from the last cell into
/// the right contact, add up to V/I (identity, to rounding); the largest
/// sits at the barrier.
#[test]
fn local_resistances_add_up_to_v_over_i() {
    let p = barrier_with_phonons((0.08, 0.02), (300.0, 300.0), &[(0.04, 3e-3)]);
    let (_, o) = solved(&p, &tight());
    let r_contact = (o.contact_drop_left_v + o.contact_drop_right_v) / -o.current_a;
    let total: f64 = o.sites.resistance_ohm.iter().sum::<f64>() + r_contact;
    let v_over_i = o.voltage_v / o.current_a;
    assert!(rel(total, v_over_i) < 1e-12, "{total} vs {v_over_i}");
    let (imax, _) = o.sites.resistance_ohm[..59].iter().enumerate().fold(
        (0, f64::NEG_INFINITY),
        |a, (i, &r)| if r > a.1 { (i, r) } else { a },
    );
    assert!(
        (22..=37).contains(&imax),
        "largest local resistance at cell {imax}"
    );
}

/// The local Fermi level and electron temperature fit recovers the
/// parameters of a Fermi function it was given (identity; bisection to
/// 1e-10 relative in T, tolerance 1e-6).
#[test]
fn electron_temperature_fit_recovers_a_fermi_function() {
    let energies: Vec<f64> = (0..600).map(|k| -0.1 + k as f64 * 1e-3).collect();
    let a: Vec<f64> = energies
        .iter()
        .map(|e| 1.0 + 0.5 * (e * 7.0).sin())
        .collect();
    let (mu, t) = (0.12, 355.0);
    let n: f64 = energies
        .iter()
        .zip(&a)
        .map(|(&e, &x)| x * qheat::units::fermi(e, mu, t))
        .sum();
    let u: f64 = energies
        .iter()
        .zip(&a)
        .map(|(&e, &x)| e * x * qheat::units::fermi(e, mu, t))
        .sum();
    let (mu_fit, t_fit) = qheat::observables::fit_fermi_level_and_temperature(&energies, &a, n, u);
    assert!((mu_fit - mu).abs() < 1e-6, "{mu_fit}");
    assert!(rel(t_fit, t) < 1e-6, "{t_fit}");
    // In equilibrium the fitted temperature of every cell is the lead temperature.
    let p = barrier_with_phonons((0.05, 0.05), (300.0, 300.0), &[(0.04, 3e-3)]);
    let sol = solve(&p, &tight().with_tolerance(1e-12), None, &mut Silent).unwrap();
    let o = qheat::observables::observe_with(
        &sol,
        &qheat::observables::ObserveOptions {
            electron_temperature: true,
            ..Default::default()
        },
    );
    for t in o.sites.electron_temperature_k.unwrap() {
        assert!(rel(t, 300.0) < 1e-4, "T_e = {t}");
    }
}

/// Warm start from a converged Σ0 converges at once to the same answer.
#[test]
fn warm_start_from_a_converged_self_energy() {
    let p = barrier_with_phonons((0.08, 0.02), (300.0, 300.0), &[(0.04, 3e-3)]);
    let (sol, o) = solved(&p, &tight());
    let again = solve(&p, &tight(), Some(&sol.sigma), &mut Silent).unwrap();
    assert!(
        again.report.converged && again.report.iterations <= 2,
        "{}",
        again.report.iterations
    );
    assert!(again.report.warm_start);
    let o2 = observe(&again);
    assert!(rel(o2.current_a, o.current_a) < 1e-9);
}

/// A biased barrier with two phonon modes and dephasing on some cells.
fn busy_barrier() -> Problem {
    let mut p = barrier_with_phonons((0.08, 0.02), (300.0, 300.0), &[(0.04, 3e-3), (0.012, 1e-3)]);
    p.scattering.dephasing_ev2 = (0..60).map(|i| if i < 20 { 2e-3 } else { 0.0 }).collect();
    p
}

/// Particle conservation at every energy: j_1(E) + j_2(E) + j_0(E) = 0,
/// with j_0 the flow from the scattering bath summed over sites (each
/// energy's G is the solution for the Σ0 it is reported with, so this is an
/// identity, to rounding: 1e-10 of the gross exchange at that energy). The
/// bath flow itself is not small: electrons change energy.
#[test]
fn particle_flows_balance_at_every_energy() {
    let p = busy_barrier();
    let (sol, o) = solved(&p, &tight());
    let js = qheat::observables::flow_scale(&p);
    let s = &o.spectrum;
    let mut bath_max: f64 = 0.0;
    for k in 0..p.grid.count {
        let f = &sol.pass.flows[k];
        let gross = (f.left_gross + f.right_gross) * js + s.flow_bath[k].abs();
        let sum = s.flow_left[k] + s.flow_right[k] + s.flow_bath[k];
        assert!(
            sum.abs() <= 1e-12 * gross,
            "E = {}: j1 {} + j2 {} + j0 {} = {sum:e}",
            p.grid.energy(k),
            s.flow_left[k],
            s.flow_right[k],
            s.flow_bath[k]
        );
        bath_max = bath_max.max(s.flow_bath[k].abs() / gross);
    }
    assert!(
        bath_max > 1e-3,
        "the bath must exchange electrons: {bath_max:e}"
    );
    // Summed over energy the bath hands back every electron it takes.
    let i0: f64 = s.flow_bath.iter().sum::<f64>() * p.grid.step_ev;
    let i1: f64 = s.flow_left.iter().sum::<f64>() * p.grid.step_ev;
    assert!(i0.abs() < 1e-8 * i1.abs(), "net bath flow {i0:e} vs {i1:e}");
}

/// Current continuity along the chain: the energy-resolved bond current
/// (electrons to +x, times e) summed over energy equals −I_1 on every bond
/// (I_1 is the conventional current into the device from lead 1, so
/// electrons entering from the left move to +x when I_1 < 0). At one energy
/// it is not conserved where phonons act (electrons change energy there),
/// which this also checks, so the sum is the real test. Tolerance 1e-8 of
/// |I_1|: the per-site particle balance of the phonon exchange holds at
/// self-consistency, here to the Born tolerance 1e-10.
#[test]
fn bond_current_summed_over_energy_is_the_terminal_current_on_every_bond() {
    let p = busy_barrier();
    let (sol, o) = solved(&p, &tight());
    let map = qheat::observables::bond_current_map(&sol);
    let (bonds, ne) = map.dim();
    assert_eq!(bonds, 59);
    let i1 = o.current_left_a;
    assert!(i1 < 0.0, "electrons flow left to right: I_1 = {i1}");
    for b in 0..bonds {
        let total: f64 = (0..ne).map(|k| map[[b, k]]).sum::<f64>() * p.grid.step_ev;
        assert!(
            (total + i1).abs() <= 1e-8 * i1.abs(),
            "bond {b}: ∫ j dE · e = {total:e} vs −I_1 = {:e}",
            -i1
        );
    }
    // Energy-resolved: the first and last bonds differ.
    let peak = (0..ne).fold(0.0f64, |m, k| m.max(map[[0, k]].abs()));
    let change = (0..ne).fold(0.0f64, |m, k| m.max((map[[0, k]] - map[[58, k]]).abs()));
    assert!(
        change > 1e-2 * peak,
        "phonons move electrons in energy: {change:e} vs {peak:e}"
    );
}

/// A one-cell device (both leads attached to the same cell) with a phonon
/// mode and dephasing: the recursion against the dense reference, as for
/// the longer device (1e-8 relative; both converged to 1e-12).
#[test]
fn one_cell_device_matches_dense_born_loop() {
    let (ll, lr) = continuation_leads(&qheat::device::chain(1.0, 1.0, -2.0, vec![0.0; 2]));
    let mut p = coherent_problem(
        qheat::device::chain(1.0, 1.0, -2.0, vec![0.3]),
        (0.2, 300.0),
        (-0.2, 300.0),
        EnergyGrid::covering(-1.9, 1.9, 0.02),
    );
    p.left.lead = ll;
    p.right.lead = lr;
    let grid = p.grid.clone();
    p.scattering
        .phonons
        .push(phonon(&grid, 0.1, 0.05, &[true], 300.0));
    p.scattering.dephasing_ev2 = vec![0.02];
    let params = tight().with_tolerance(1e-12);
    let (sol, o) = solved(&p, &params);
    let dense = dense_scba(&p, 1e-13, 2000);
    let dsol = Solution {
        pass: dense.pass,
        sigma: dense.sigma,
        ..sol.clone()
    };
    let od = observe(&dsol);
    assert!(o.current_a.abs() > 1e-7);
    assert!(
        rel(o.current_a, od.current_a) < 1e-8,
        "{} vs {}",
        o.current_a,
        od.current_a
    );
    assert!(rel(o.heat_current_left_w, od.heat_current_left_w) < 1e-8);
    assert!(rel(o.heat_current_right_w, od.heat_current_right_w) < 1e-8);
    assert!(rel(o.lattice_power_w, od.lattice_power_w) < 1e-8);
    for k in 0..grid.count {
        let (a, b) = (sol.pass.green.retarded[k], dsol.pass.green.retarded[k]);
        assert!(
            (a - b).norm() <= 1e-8 * b.norm(),
            "G^r at k = {k}: {a} vs {b}"
        );
    }
}

/// The dense reference refuses to hand back a result it did not converge.
#[test]
#[should_panic(expected = "dense reference did not converge")]
fn dense_reference_fails_loudly_at_its_iteration_limit() {
    let p = busy_barrier();
    let _ = dense_scba(&p, 1e-13, 3);
}
