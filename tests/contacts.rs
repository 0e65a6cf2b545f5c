//! Contacts attached along the channel: voltage and temperature probes,
//! multi-terminal reciprocity, polarised contacts, and the ledger with
//! every contact.

#![allow(clippy::needless_range_loop)] // conductance matrices read best by index

mod common;

use common::coherent_problem;
use qheat::device;
use qheat::grid::EnergyGrid;
use qheat::model::{AttachedContact, ContactMode, Polarisation, Problem};
use qheat::observables::contacts::contact_readings;
use qheat::observables::observe;
use qheat::scba::{ScbaParams, Silent, Solution, solve};

/// Hopping of the test chains (eV): band [0, 0.4 eV], centre 0.2 eV.
const T_HOP: f64 = 0.1;
const CENTRE: f64 = 2.0 * T_HOP;

fn contact(name: &str, cells: Vec<usize>, gamma: f64, mode: ContactMode) -> AttachedContact {
    AttachedContact {
        name: name.into(),
        cells,
        gamma_ev: gamma,
        mode,
        fermi_level_ev: CENTRE,
        temperature_k: 5.0,
        polarisation: None,
    }
}

/// A chain of `cells` cells with potential `u` (eV per cell) around the band
/// centre, the leads at (µ, T) each, the grid covering µ ± 12 kT_max.
fn chain(u: Vec<f64>, left: (f64, f64), right: (f64, f64)) -> Problem {
    let dev = device::chain(0.25, T_HOP, 0.0, u);
    let kt_max = qheat::units::thermal_energy_ev(left.1.max(right.1));
    let kt_min = qheat::units::thermal_energy_ev(left.1.min(right.1));
    let mu = 0.5 * (left.0 + right.0);
    let grid = EnergyGrid::covering(mu - 12.0 * kt_max, mu + 12.0 * kt_max, kt_min / 5.0);
    coherent_problem(dev, left, right, grid)
}

/// Tight settings; the current floor (1e-18 A) sits above the rounding
/// noise of currents whose gross flows are ~1e-7 A.
fn tight() -> ScbaParams {
    ScbaParams::default()
        .with_tolerance(1e-12)
        .with_current_floor_a(1e-18)
        .with_max_iterations(60)
}

fn solved(p: &Problem) -> Solution {
    let sol = solve(p, &tight(), None, &mut Silent).expect("solve");
    assert!(
        sol.report.converged,
        "not converged: {:?}",
        sol.report.probe_residual
    );
    sol
}

/// Büttiker's phase-breaking voltage probe beside a scatterer of
/// transmission T: left of it the probe reads µ_L − T(µ_L − µ_R)/2, right
/// of it µ_R + T(µ_L − µ_R)/2, so the drop across the scatterer is
/// (1 − T)(µ_L − µ_R) (M. Büttiker, Phys. Rev. Lett. 57, 1761 (1986);
/// R. Landauer, IBM J. Res. Dev. 1, 223 (1957)).
///
/// The scatterer is one site raised by U in a chain of hopping t; at the
/// band centre (ka = π/2) its transmission is 4t²/(4t² + U²) (closed form
/// of a single impurity in a tight-binding chain; common practice). The
/// interference fringes of the standing wave have a period of two cells
/// there (2ka = π), so each probe spans an even number of cells: the
/// densities it samples are averaged over position, which is the phase
/// averaging the formula assumes. Tolerance 2e-3 of µ_L − µ_R: the probes
/// take a fraction ≈ n_cells·γ/(2t) ≈ 1e-3 of the flux (a first-order
/// correction to the reading), and k drifts by ~1e-2 rad across the
/// thermal window at 5 K, which leaves a fringe residue of that order.
#[test]
fn voltage_probes_read_the_buttiker_levels_beside_a_scatterer() {
    let n = 41;
    let mid = 20;
    let u_imp = 0.3;
    let mut u = vec![0.0; n];
    u[mid] = u_imp;
    let dmu = 1e-4;
    let mut p = chain(u, (CENTRE + dmu / 2.0, 5.0), (CENTRE - dmu / 2.0, 5.0));
    let gamma = 1e-5;
    p.contacts = vec![
        contact("left", (2..18).collect(), gamma, ContactMode::Voltage),
        contact("right", (23..39).collect(), gamma, ContactMode::Voltage),
    ];
    let sol = solved(&p);
    let r = contact_readings(&sol);
    let tr = 4.0 * T_HOP * T_HOP / (4.0 * T_HOP * T_HOP + u_imp * u_imp);
    let frac = |mu: f64| (mu - p.right.fermi_level_ev) / dmu;
    let (left, right) = (frac(r[0].fermi_level_ev), frac(r[1].fermi_level_ev));
    println!(
        "T = {tr:.6}: left reads {left:.6} (expect {:.6}), right {right:.6} (expect {:.6})",
        1.0 - tr / 2.0,
        tr / 2.0
    );
    assert!((left - (1.0 - tr / 2.0)).abs() < 2e-3, "left probe {left}");
    assert!((right - tr / 2.0).abs() < 2e-3, "right probe {right}");
    assert!(
        ((left - right) - (1.0 - tr)).abs() < 4e-3,
        "drop {}",
        left - right
    );
    // a probe carries no current: relative to its gross exchange
    for c in &r {
        assert!(
            c.particle_current_per_s.abs() <= 1e-10 * c.gross_particle_per_s,
            "{c:?}"
        );
    }
}

/// A floating temperature probe in a ballistic chain between a hot and a
/// cold lead reads a temperature between theirs and, at its solved
/// (µ_p, T_p), carries neither particles nor heat: both to 1e-10 of its
/// gross exchange (the zero-current conditions are solved by Newton to
/// rounding; the tolerance leaves room for sums over ~400 energies).
#[test]
fn temperature_probe_between_hot_and_cold_leads_carries_nothing() {
    let mut p = chain(vec![0.0; 12], (CENTRE, 40.0), (CENTRE, 20.0));
    p.contacts = vec![contact(
        "thermometer",
        vec![6],
        0.02,
        ContactMode::Temperature,
    )];
    let sol = solved(&p);
    let r = &contact_readings(&sol)[0];
    println!("{r:?}");
    assert!(
        r.temperature_k > 20.0 && r.temperature_k < 40.0,
        "T_p = {}",
        r.temperature_k
    );
    assert!(r.particle_current_per_s.abs() <= 1e-10 * r.gross_particle_per_s);
    assert!(r.heat_current_w.abs() <= 1e-10 * r.gross_heat_w);
    // the leads' heat flows balance once the probe carries none; the charge
    // balance (the leads carry almost no current at this symmetric point)
    // is measured against the probe's gross exchange
    let o = observe(&sol);
    assert!(o.ledger.heat_relative < 1e-10, "{:?}", o.ledger);
    let gross = qheat::units::ELEMENTARY_CHARGE * r.gross_particle_per_s;
    assert!(o.ledger.charge_a.abs() < 1e-10 * gross, "{:?}", o.ledger);
}

/// Multi-terminal reciprocity without a magnetic field
/// (L. Onsager, Phys. Rev. 37, 405 (1931); M. Büttiker, Phys. Rev. Lett.
/// 57, 1761 (1986)): with every contact fixed at one equilibrium level,
/// G_pq = ∂I_p/∂µ_q is symmetric and each row sums to zero. Central
/// differences of ±δ in µ_q alone give exactly Σ_E T_pq(E) Δf(E) with the
/// same Δf for every q (all contacts share µ and T), so symmetry and zero
/// row sums hold to rounding for any δ: 1e-10 of the largest element.
#[test]
fn multi_terminal_conductance_is_symmetric_and_rows_sum_to_zero() {
    let mut u = vec![0.0; 16];
    u[5] = 0.05;
    u[6] = 0.08;
    u[11] = -0.03;
    let mut base = chain(u, (CENTRE, 10.0), (CENTRE, 10.0));
    base.contacts = vec![
        contact("a", vec![3], 0.02, ContactMode::Fixed),
        contact("b", vec![9, 10], 0.005, ContactMode::Fixed),
    ];
    for c in &mut base.contacts {
        c.temperature_k = 10.0;
    }
    let terminals = 4;
    let delta = 1e-4;
    let currents = |p: &Problem| -> Vec<f64> {
        let o = observe(&solved(p));
        let mut v = vec![o.current_left_a, o.current_right_a];
        v.extend(o.contacts.iter().map(|c| c.current_a));
        v
    };
    let shifted = |q: usize, d: f64| -> Problem {
        let mut p = base.clone();
        match q {
            0 => p.left.fermi_level_ev += d,
            1 => p.right.fermi_level_ev += d,
            _ => p.contacts[q - 2].fermi_level_ev += d,
        }
        p
    };
    let mut g = vec![vec![0.0; terminals]; terminals];
    for q in 0..terminals {
        let (plus, minus) = (currents(&shifted(q, delta)), currents(&shifted(q, -delta)));
        for pp in 0..terminals {
            g[pp][q] = (plus[pp] - minus[pp]) / (2.0 * delta);
        }
    }
    let scale = g.iter().flatten().fold(0.0_f64, |m, v| m.max(v.abs()));
    println!("G (S) = {g:?}");
    for pp in 0..terminals {
        let row: f64 = g[pp].iter().sum();
        assert!(row.abs() <= 1e-10 * scale, "row {pp} sums to {row}");
        for q in 0..terminals {
            assert!((g[pp][q] - g[q][pp]).abs() <= 1e-10 * scale, "G[{pp}][{q}]");
        }
        // raising µ_p pushes electrons in: the conventional current I_p falls
        assert!(g[pp][pp] < 0.0, "G[{pp}][{pp}] = {}", g[pp][pp]);
    }
    // every pair of terminals is coupled
    assert!(g[2][3].abs() > 1e-6 * scale && g[0][1].abs() > 1e-3 * scale);
}

/// A spin-doubled chain (g_s = 1) with an injector and a detector
/// attached at cells 4 and 11, polarised with strengths (p1 along +z,
/// p2 at angle θ in the x-z plane); the leads and detector at µ, the
/// injector at µ + δ. Returns the detector's current.
fn detector_current(p1: f64, p2: f64, theta: f64, gamma: f64) -> f64 {
    let dev = device::channels::spin_doubled(&device::chain(0.25, T_HOP, 0.0, vec![0.0; 16]));
    let kt = qheat::units::thermal_energy_ev(5.0);
    let grid = EnergyGrid::covering(CENTRE - 12.0 * kt, CENTRE + 12.0 * kt, kt / 5.0);
    let mut p = coherent_problem(dev, (CENTRE, 5.0), (CENTRE, 5.0), grid);
    p.spin_degeneracy = 1.0;
    let mut inj = contact("injector", vec![4], gamma, ContactMode::Fixed);
    inj.fermi_level_ev += 1e-4;
    inj.polarisation = Some(Polarisation {
        strength: p1,
        direction: [0.0, 0.0, 1.0],
    });
    let mut det = contact("detector", vec![11], gamma, ContactMode::Fixed);
    det.polarisation = Some(Polarisation {
        strength: p2,
        direction: [theta.sin(), 0.0, theta.cos()],
    });
    p.contacts = vec![inj, det];
    let o = observe(&solved(&p));
    // charge balance of all four terminals, to rounding of the gross flows
    let gross = qheat::units::ELEMENTARY_CHARGE * o.contacts[0].gross_particle_per_s;
    assert!(o.ledger.charge_a.abs() < 1e-10 * gross, "{:?}", o.ledger);
    o.contacts[1].current_a
}

/// Ideal polarisers: an up-polarised injector into a detector polarised
/// at angle θ transmits ∝ |⟨n̂|↑⟩|² = cos²(θ/2) (spinor projection; common
/// practice). It holds where the contacts barely disturb the spin-blind
/// channel (γ = 1e-5 eV against t = 0.1 eV): tolerance 1e-3, the size of
/// a first-order correction in γ/t over the ~10 cells between them.
#[test]
fn ideal_polarisers_transmit_as_the_spinor_projection() {
    let gamma = 1e-5;
    let g0 = detector_current(1.0, 1.0, 0.0, gamma);
    assert!(g0.abs() > 0.0);
    for theta in [0.5, 1.2, 2.0, 3.0, std::f64::consts::PI] {
        let ratio = detector_current(1.0, 1.0, theta, gamma) / g0;
        let expect = (theta / 2.0).cos().powi(2);
        println!("θ = {theta}: {ratio:.6} against cos²(θ/2) = {expect:.6}");
        assert!(
            (ratio - expect).abs() < 1e-3,
            "θ = {theta}: {ratio} vs {expect}"
        );
    }
}

/// Partially polarised contacts in the tunnelling limit:
/// G(θ) = G₀ (1 + P₁P₂ cos θ) (J. C. Slonczewski, Phys. Rev. B 39, 6995
/// (1989)), here with G₀ the mean of G(0) and G(π). Same tolerance and
/// reason as the ideal polarisers.
#[test]
fn partially_polarised_contacts_follow_the_tunnelling_law() {
    let (p1, p2, gamma) = (0.6, 0.4, 1e-5);
    let g_par = detector_current(p1, p2, 0.0, gamma);
    let g_anti = detector_current(p1, p2, std::f64::consts::PI, gamma);
    let g0 = 0.5 * (g_par + g_anti);
    assert!(((g_par - g_anti) / (g_par + g_anti) - p1 * p2).abs() < 1e-3);
    for theta in [0.7, 1.6, 2.5] {
        let g = detector_current(p1, p2, theta, gamma) / g0;
        let expect = 1.0 + p1 * p2 * theta.cos();
        assert!((g - expect).abs() < 1e-3, "θ = {theta}: {g} vs {expect}");
    }
}

/// An unpolarised contact written with polarisation strength 0 takes the
/// b × b block route; it must give the diagonal route's numbers.
#[test]
fn zero_polarisation_equals_the_plain_contact() {
    let dev = device::channels::spin_doubled(&device::chain(0.25, T_HOP, 0.0, vec![0.0; 10]));
    let kt = qheat::units::thermal_energy_ev(10.0);
    let grid = EnergyGrid::covering(CENTRE - 12.0 * kt, CENTRE + 12.0 * kt, kt / 4.0);
    let mut p = coherent_problem(dev, (CENTRE + 2e-3, 10.0), (CENTRE, 10.0), grid);
    p.spin_degeneracy = 1.0;
    let mut c = contact("probe", vec![3, 4], 0.01, ContactMode::Voltage);
    c.temperature_k = 10.0;
    p.contacts = vec![c];
    let plain = contact_readings(&solved(&p))[0].fermi_level_ev;
    p.contacts[0].polarisation = Some(Polarisation {
        strength: 0.0,
        direction: [1.0, 0.0, 0.0],
    });
    let blocks = contact_readings(&solved(&p))[0].fermi_level_ev;
    assert!((plain - blocks).abs() < 1e-12, "{plain} vs {blocks}");
}

/// With dephasing inside, a voltage probe and a fixed third contact, the
/// Born loop converges jointly with the probe level; the charge, energy
/// and heat ledgers with every contact close (charge and heat to the SCBA
/// tolerance of 1e-10 relative; the energy entry is an identity of every
/// pass).
#[test]
fn ledger_closes_with_every_contact_under_scattering() {
    let mut p = chain(vec![0.0; 14], (CENTRE + 5e-3, 20.0), (CENTRE - 5e-3, 20.0));
    p.scattering.dephasing_ev2 = vec![1e-4; 14];
    let mut probe = contact("probe", vec![5], 0.01, ContactMode::Voltage);
    probe.temperature_k = 20.0;
    let mut drain = contact("drain", vec![9, 10], 0.003, ContactMode::Fixed);
    drain.temperature_k = 30.0;
    drain.fermi_level_ev = CENTRE - 2e-3;
    p.contacts = vec![probe, drain];
    let sol = solve(&p, &tight().with_tolerance(1e-10), None, &mut Silent).expect("solve");
    assert!(sol.report.converged);
    assert!(sol.report.iterations > 1);
    let o = observe(&sol);
    let sum =
        o.current_left_a + o.current_right_a + o.contacts.iter().map(|c| c.current_a).sum::<f64>();
    assert!(sum.abs() <= 1e-9 * o.current_left_a.abs(), "Σ I = {sum}");
    assert!(o.contacts[0].current_a.abs() <= 1e-9 * o.current_left_a.abs());
    assert!(o.contacts[1].current_a.abs() > 1e-3 * o.current_left_a.abs());
    assert!(o.ledger.energy_relative < 1e-12, "{:?}", o.ledger);
    assert!(o.ledger.heat_relative < 1e-9, "{:?}", o.ledger);
    let mu = o.contacts[0].fermi_level_ev;
    assert!(mu < p.left.fermi_level_ev && mu > p.right.fermi_level_ev);
}
