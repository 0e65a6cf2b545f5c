//! Coherent thermoelectric transport against closed forms (values computed
//! at 30 digits, each with its source beside the check).

#![allow(clippy::needless_range_loop)]

mod common;
use common::*;
use faer::Mat;
use qheat::C64;
use qheat::device;
use qheat::grid::EnergyGrid;
use qheat::leads::Lead;
use qheat::observables::observe;
use qheat::scba::{ScbaParams, Silent, solve};
use qheat::thermo::coherent_coefficients;
use qheat::units::BOLTZMANN_EV_PER_K;

/// A chain whose band starts at `edge` and is wide (t = 10 eV), so that
/// T(E) = θ(E − edge) over any window of a few eV. The grid starts half a
/// step above the edge: the plain sum is then the midpoint rule on
/// [edge, max].
fn step_problem(
    edge: f64,
    mu: (f64, f64),
    temps: (f64, f64),
    step: f64,
    max: f64,
) -> qheat::model::Problem {
    let d = device::chain(0.2, 10.0, edge, vec![0.0; 4]);
    coherent_problem(
        d,
        (mu.0, temps.0),
        (mu.1, temps.1),
        EnergyGrid::covering(edge + 0.5 * step, max, step),
    )
}

/// Step transmission T(E) = θ(E − Eb), Eb − µ = 0.1 eV, 300 K: closed forms
/// with Fermi-Dirac integrals (U. Sivan, Y. Imry, PRB 33, 551 (1986); P. N.
/// Butcher, J. Phys.: Condens. Matter 2, 4869 (1990); both from memory),
/// values recomputed at 30 digits. Tolerance rel 1e-5: Eb on a bin edge and
/// ΔE = kT/200, where the midpoint rule errs by (ΔE/kT)²/24 ≈ 1e-6 relative
/// (at ΔE = kT/50 that is 1.7e-5, measured, so the finer step is needed;
/// κ_e, a difference of moments, needs the margin).
#[test]
fn step_linear_response() {
    let kt = BOLTZMANN_EV_PER_K * 300.0;
    let p = step_problem(0.1, (0.0, 0.0), (300.0, 300.0), kt / 200.0, 0.1 + 45.0 * kt);
    let c = coherent_coefficients(&p, 0.0).unwrap();
    assert!(
        rel(c.conductance_s, 1.58594079e-6) < 1e-5,
        "G {}",
        c.conductance_s
    );
    assert!(
        rel(c.seebeck_v_per_k, -420.4008205e-6) < 1e-5,
        "S {}",
        c.seebeck_v_per_k
    );
    assert!(
        rel(c.peltier_v, -126.1202462e-3) < 1e-5,
        "Π {}",
        c.peltier_v
    );
    assert!(
        rel(c.thermal_conductance_w_per_k, 3.569702009e-12) < 1e-5,
        "κ {}",
        c.thermal_conductance_w_per_k
    );
    assert!(
        rel(c.lorenz_ratio, 0.3071138987) < 1e-5,
        "L {}",
        c.lorenz_ratio
    );
    assert!(rel(c.zt, 23.55609896) < 1e-5, "ZT {}", c.zt);
    // Kelvin relation Π = T S (exact in the coherent formulas).
    assert!(c.kelvin_residual < 1e-12);
}

/// Nonlinear step currents (same sources): electron flow
/// Ṅ = (g_s/h)[kT_L F0(η_L) − kT_R F0(η_R)]. Tolerance 1e-5 with
/// ΔE = kT/100 as above.
#[test]
fn step_nonlinear_currents() {
    let kt = BOLTZMANN_EV_PER_K * 300.0;
    // Thermal bias: T_L = 310 K, T_R = 300 K, µ = 0: e·Ṅ = 7.003643179e-9 A,
    // J_Q = 9.251926835e-10 W out of the hot lead.
    let p = step_problem(0.1, (0.0, 0.0), (310.0, 300.0), kt / 100.0, 0.1 + 50.0 * kt);
    let o = observe(&solve(&p, &ScbaParams::default(), None, &mut Silent).unwrap());
    assert!(
        rel(-o.current_a, 7.003643179e-9) < 1e-5,
        "I {}",
        o.current_a
    );
    assert!(
        rel(o.heat_current_left_w, 9.251926835e-10) < 1e-5,
        "JQ {}",
        o.heat_current_left_w
    );
    assert!(o.ledger.worst_relative() < 1e-12);
    // Voltage bias: µ_L = +25 meV, µ_R = −25 meV, 300 K: e·Ṅ = 9.131908394e-8 A,
    // J_Q,L = 9.246180129e-9 W out of L, J_Q,R = 1.381213433e-8 W into R.
    let p = step_problem(
        0.1,
        (0.025, -0.025),
        (300.0, 300.0),
        kt / 100.0,
        0.1 + 50.0 * kt,
    );
    let o = observe(&solve(&p, &ScbaParams::default(), None, &mut Silent).unwrap());
    assert!(
        rel(-o.current_a, 9.131908394e-8) < 1e-5,
        "I {}",
        o.current_a
    );
    assert!(rel(o.heat_current_left_w, 9.246180129e-9) < 1e-5);
    assert!(rel(-o.heat_current_right_w, 1.381213433e-8) < 1e-5);
    // J_Q,R(into R) − J_Q,L = I·V, and I·V ≥ 0 for a passive device.
    assert!(o.electrical_power_w > 0.0);
    let balance = -o.heat_current_right_w - o.heat_current_left_w - o.electrical_power_w;
    assert!(balance.abs() < 1e-12 * o.electrical_power_w, "{balance}");
    assert!(o.lattice_power_w == 0.0);
}

/// Constant T(E) = 1 at V = 50 mV: each lead receives exactly I·V/2 and the
/// lattice nothing (same sources; symmetric Joule split of a ballistic
/// conductor). Tolerance 1e-6: T = 1 exactly, the integrands are Fermi
/// functions summed on a fine grid far from the band edges.
#[test]
fn ballistic_joule_heat_splits_evenly() {
    let kt = BOLTZMANN_EV_PER_K * 300.0;
    let d = device::chain(0.2, 5.0, -3.0, vec![0.0; 5]);
    let p = coherent_problem(
        d,
        (0.025, 300.0),
        (-0.025, 300.0),
        EnergyGrid::covering(-0.025 - 40.0 * kt, 0.025 + 40.0 * kt, kt / 20.0),
    );
    let o = observe(&solve(&p, &ScbaParams::default(), None, &mut Silent).unwrap());
    let half = 0.5 * o.electrical_power_w;
    assert!(
        rel(-o.heat_current_left_w, half) < 1e-6,
        "{} vs {half}",
        o.heat_current_left_w
    );
    assert!(rel(-o.heat_current_right_w, half) < 1e-6);
    // G = g_s e²/h exactly for one open channel.
    assert!(rel(o.conductance_s.unwrap(), qheat::units::CONDUCTANCE_QUANTUM) < 1e-6);
}

fn resonant_level(gamma: f64, step: f64) -> qheat::model::Problem {
    let kt = BOLTZMANN_EV_PER_K * 300.0;
    let eps = 0.1;
    let mut d = device::chain(1.0, 1.0, 0.0, vec![0.0]);
    d.onsite[0] = Mat::from_fn(1, 1, |_, _| C64::new(eps, 0.0));
    let half = Mat::from_fn(1, 1, |_, _| C64::new(0.5 * gamma, 0.0));
    let mut p = coherent_problem(
        d,
        (0.0, 300.0),
        (0.0, 300.0),
        EnergyGrid::covering(-40.0 * kt, 40.0 * kt, step),
    );
    p.left.lead = Lead::WideBand {
        gamma: half.clone(),
    };
    p.right.lead = Lead::WideBand { gamma: half };
    p
}

/// Breit-Wigner level, ε − µ = 0.1 eV, 300 K, Γ_L = Γ_R = Γ/2:
/// T(E) = Γ_LΓ_R/((E − ε)² + Γ²/4), and the table of G, S, κ_e/(L0 G T),
/// ZT_el (computed at 30 digits; narrow-level limit after
/// G. D. Mahan, J. O. Sofo, PNAS 93, 7436 (1996)). Tolerance rel 1e-6 with
/// ΔE = Γ/20 over ±40 kT: the plain sum of a Lorentzian is exponentially
/// accurate once the step resolves Γ.
#[test]
fn breit_wigner_table() {
    let table = [
        (1e-2, 1.1633264e-6, -269.0315229e-6, 0.576679, 5.13745),
        (1e-3, 9.6722381e-8, -325.319509e-6, 0.0883413, 49.0379),
        (1e-4, 9.462561e-9, -332.5114081e-6, 0.00928142, 487.612),
    ];
    for (gamma, g, s, lr, zt) in table {
        let p = resonant_level(gamma, gamma / 20.0);
        let c = coherent_coefficients(&p, 0.0).unwrap();
        // The table carries 6–8 digits; compare at the digits given.
        assert!(
            rel(c.conductance_s, g) < 1e-6,
            "Γ {gamma}: G {}",
            c.conductance_s
        );
        assert!(
            rel(c.seebeck_v_per_k, s) < 1e-6,
            "Γ {gamma}: S {}",
            c.seebeck_v_per_k
        );
        assert!(
            rel(c.lorenz_ratio, lr) < 1e-5,
            "Γ {gamma}: L {}",
            c.lorenz_ratio
        );
        assert!(rel(c.zt, zt) < 1e-5, "Γ {gamma}: ZT {}", c.zt);
    }
    // Narrow-level limit S → −(ε − µ)/(eT) = −333.3333 µV/K (Mahan & Sofo
    // 1996). At Γ = 1e-4 eV the finite width still shifts S by 0.82 µV/K,
    // which the table above resolves (1e-6 relative is 3.3e-4 µV/K). The
    // shift is linear in Γ (the Lorentzian tails), so the Γ → 0 limit is
    // taken by Richardson extrapolation from Γ and Γ/2, whose remainder is
    // second order, ≈ 1e-3 µV/K here (from the Γ² part of the table's
    // shifts); tolerance 0.01 µV/K, 80 times below the finite-width shift.
    let s_at = |gamma: f64| {
        coherent_coefficients(&resonant_level(gamma, gamma / 20.0), 0.0)
            .unwrap()
            .seebeck_v_per_k
    };
    let (s1, s2) = (s_at(1e-4), s_at(5e-5));
    let limit = 2.0 * s2 - s1;
    let exact = -0.1 / 300.0;
    assert!(
        (limit - exact).abs() < 0.01e-6,
        "extrapolated S {limit:e} vs {exact:e} (S(1e-4) = {s1:e}, S(5e-5) = {s2:e})"
    );
    assert!((s1 - exact).abs() > 0.5e-6 && (s2 - exact).abs() > 0.25e-6);
    // T(E) itself at the level and one width away.
    let sol = solve(
        &resonant_level(1e-2, 5e-4),
        &ScbaParams::default(),
        None,
        &mut Silent,
    )
    .unwrap();
    for (k, f) in sol.pass.flows.iter().enumerate() {
        let e = sol.problem.grid.energy(k);
        let exact = 0.25e-4 / ((e - 0.1).powi(2) + 0.25e-4);
        assert!((f.transmission - exact).abs() < 1e-12);
    }
}

/// Mott formula and Wiedemann-Franz law for a smooth transmission made by a
/// device (a thin tunnel barrier far above a degenerate Fermi sea), not a
/// formula: S from the moments against the Mott estimate
/// −(π²/3)(kB/e) kT d ln T/dE at µ (M. Cutler, N. F. Mott, Phys. Rev. 181,
/// 1336 (1969), from memory), and L/L0 → 1. Tolerance 1%: the Sommerfeld
/// corrections are of order (kT)² d² ln T/dE² ≈ 1e-3 here. The device is
/// chosen so that ln T is nearly linear over the Fermi window (both the
/// interface prefactor and the tunnelling exponent vary slowly at
/// E − Ec = 2 eV, V0 − E = 2 eV).
#[test]
fn mott_and_wiedemann_franz_for_a_tunnel_barrier() {
    let kt = BOLTZMANN_EV_PER_K * 300.0;
    let mass = 0.067;
    let a = 0.1;
    let t = qheat::units::hopping_ev(mass, a);
    let mut u = vec![0.0; 30];
    for x in u.iter_mut().skip(8).take(5) {
        *x = 4.0;
    }
    let mu = 2.0;
    let d = device::chain(a, t, 0.0, u);
    let p = coherent_problem(
        d.clone(),
        (mu, 300.0),
        (mu, 300.0),
        EnergyGrid::covering(mu - 30.0 * kt, mu + 30.0 * kt, kt / 40.0),
    );
    let c = coherent_coefficients(&p, 0.0).unwrap();
    let h = 1e-3;
    let tr = |e: f64| {
        let q = coherent_problem(
            d.clone(),
            (mu, 300.0),
            (mu, 300.0),
            EnergyGrid::new(e, 1.0, 1),
        );
        solve(&q, &ScbaParams::default(), None, &mut Silent)
            .unwrap()
            .pass
            .flows[0]
            .transmission
    };
    let dlnt = (tr(mu + h).ln() - tr(mu - h).ln()) / (2.0 * h);
    let e0 = 1.0 / dlnt;
    assert!(e0 > 0.5 && e0 < 5.0, "E0 = {e0}");
    let mott = -(std::f64::consts::PI.powi(2) / 3.0) * BOLTZMANN_EV_PER_K * kt * dlnt;
    assert!(
        rel(c.seebeck_v_per_k, mott) < 0.01,
        "S {} vs Mott {mott}",
        c.seebeck_v_per_k
    );
    assert!(
        (c.lorenz_ratio - 1.0).abs() < 0.01,
        "L/L0 {}",
        c.lorenz_ratio
    );
}

/// Exponential transmission T(E) = T0 exp((E − µ)/E0), E0 = 0.5 eV, 300 K,
/// through the moment formulas: with a = kT/E0 the exact results are
/// S = −(kB/e)[1/a − π cot(πa)] = −14.68387494 µV/K and
/// L/L0 = (3/π²)[π²/sin²(πa) − 1/a²] = 1.005299071, while the Mott
/// estimate −(kB/e)(π²/3)a = −14.65802705 µV/K is 0.18 % off (M. Cutler,
/// N. F. Mott, Phys. Rev. 181, 1336 (1969), from memory; the integrals are
/// of the form of M. Abramowitz, I. Stegun 6.1.17, from memory; values
/// recomputed at 30 digits). The plain sum of these smooth, exponentially
/// decaying integrands on ΔE = kT/50 over ±60 kT is accurate far beyond
/// 1e-8 (the error terms are e^(−2π² kT/ΔE) and e^(−60·(1 − a))), so the
/// tolerance is rel 1e-8, tight enough that the Mott value would fail.
#[test]
fn exponential_transmission_seebeck_and_lorenz_exact() {
    let kt = BOLTZMANN_EV_PER_K * 300.0;
    let (mu, e0) = (0.0, 0.5);
    let step = kt / 50.0;
    let energies: Vec<f64> = (-3000..=3000).map(|k| mu + k as f64 * step).collect();
    let tr: Vec<f64> = energies
        .iter()
        .map(|e| 0.3 * ((e - mu) / e0).exp())
        .collect();
    let c = qheat::thermo::from_transmission(&energies, &tr, step, mu, 300.0, 2.0, 0.0);
    assert!(
        rel(c.seebeck_v_per_k, -14.68387494e-6) < 1e-8,
        "S {}",
        c.seebeck_v_per_k
    );
    assert!(
        rel(c.lorenz_ratio, 1.005299071) < 1e-8,
        "L/L0 {}",
        c.lorenz_ratio
    );
    let mott = -14.65802705e-6;
    assert!(rel(c.seebeck_v_per_k, mott) > 1e-3 && rel(c.seebeck_v_per_k, mott) < 0.01);
}

/// Pendry's bound: the heat one spinless channel can carry between
/// reservoirs at Th and Tc is π² kB² (Th² − Tc²)/(6h), reached by T(E) = 1
/// (J. B. Pendry, J. Phys. A 16, 2161 (1983), from memory): 2.886615012e-9 W
/// for Th = 310 K, Tc = 300 K (computed at 30 digits). A wide ballistic chain
/// (T = 1 over the whole Fermi window, g_s = 1) must carry exactly that
/// out of the hot lead; a tunnel barrier carries less. Tolerance rel 1e-8:
/// the plain sum of a smooth integrand that decays as e^(−E/kT), on
/// ΔE = kT/40 over ±45 kT.
#[test]
fn single_channel_heat_flow_reaches_the_pendry_bound() {
    let kt = BOLTZMANN_EV_PER_K * 300.0;
    let d = device::chain(0.2, 5.0, -3.0, vec![0.0; 5]);
    let mut p = coherent_problem(
        d,
        (0.0, 310.0),
        (0.0, 300.0),
        EnergyGrid::covering(-45.0 * kt, 45.0 * kt, kt / 40.0),
    );
    p.spin_degeneracy = 1.0;
    let o = observe(&solve(&p, &ScbaParams::default(), None, &mut Silent).unwrap());
    let bound = 2.886615012e-9;
    assert!(
        rel(o.heat_current_left_w, bound) < 1e-8,
        "J_Q {} vs {bound}",
        o.heat_current_left_w
    );
    // The same window with a barrier in the way stays below the bound.
    let mut u = vec![0.0; 5];
    u[2] = 4.0;
    let d = device::chain(0.2, 5.0, -3.0, u);
    let mut q = coherent_problem(d, (0.0, 310.0), (0.0, 300.0), p.grid.clone());
    q.spin_degeneracy = 1.0;
    let o = observe(&solve(&q, &ScbaParams::default(), None, &mut Silent).unwrap());
    assert!(o.heat_current_left_w > 0.0 && o.heat_current_left_w < 0.99 * bound);
}
