//! Self-heating with the real lattice side: a biased electron chain whose
//! Einstein phonons deposit power into a damped harmonic chain of the same
//! sites, the probe temperatures floating. The loop must end at a joint
//! fixed point, the heat must leave through the two phonon leads exactly
//! as the electron leads lose it, and an unbiased device must stay at the
//! contact temperature.

mod common;
use common::*;
use qheat::grid::EnergyGrid;
use qheat::lattice::{Lattice, PhononSpectrum, ProbeNetwork, SpectrumParams};
use qheat::model::Problem;
use qheat::observables::observe;
use qheat::scba::{ScbaParams, Silent};
use qheat::selfheat::{self, FloatingProbes, SelfHeatParams, SelfHeatSolution, SelfHeatStart};

/// Contacts, bath and phonon leads (K).
const T0: f64 = 300.0;
const CELLS: usize = 12;

/// 12 cells of 0.5 nm, m* = 0.07, a 0.1 eV barrier on cells 5..8, one
/// Einstein mode of 40 meV on every cell (coupling 2e-3 eV²); `bias_v`
/// across, contacts at T0.
fn electrons(bias_v: f64) -> Problem {
    let dev = barrier_chain(CELLS, 0.5, 0.07, 5, 8, 0.1);
    let step = 0.005;
    let grid = EnergyGrid::covering(0.5 * step, 0.40, step);
    let mu = 0.06;
    let mut p = coherent_problem(
        dev,
        (mu + 0.5 * bias_v, T0),
        (mu - 0.5 * bias_v, T0),
        grid.clone(),
    );
    p.scattering
        .phonons
        .push(phonon(&grid, 0.04, 2e-3, &[true; CELLS], T0));
    p
}

/// A light, soft chain (12 u, 2 N/m) damped at 4/ps on every site: weak
/// enough that the electrons' power warms it by kelvins.
fn network() -> ProbeNetwork {
    let lattice = Lattice::chain(&[12.0; CELLS], &[2.0; CELLS])
        .unwrap()
        .with_damping(vec![4.0; CELLS])
        .unwrap();
    let params = SpectrumParams {
        temperatures_k: vec![T0],
        ..Default::default()
    };
    let spectrum = PhononSpectrum::compute(&lattice, &params).unwrap();
    ProbeNetwork::compute(&lattice, &spectrum).unwrap()
}

fn run(p: &Problem, net: &ProbeNetwork) -> (SelfHeatSolution, f64, f64) {
    let mut probes = FloatingProbes::new(net, T0, T0);
    let born = ScbaParams::default().with_tolerance(1e-11);
    let params = SelfHeatParams::default();
    let s = selfheat::solve(
        p,
        &born,
        &params,
        &mut probes,
        SelfHeatStart::default(),
        &mut Silent,
    )
    .unwrap();
    let last = probes.last().unwrap();
    (s, last.left_lead_heat_w, last.right_lead_heat_w)
}

/// Under bias the lattice warms, the profile reproduces itself through the
/// probes (the loop's tolerance, 1e-6 K), and the lattice-heat ledger
/// closes: the energy the electron leads lose, J_E,1 + J_E,2, leaves
/// through the two phonon leads, to 1e-8 relative (the probes net zero to
/// the Newton tolerance 1e-10 and the Born loop to 1e-11; 1e-8 leaves room
/// for the temperature tolerance times ∂P/∂T).
#[test]
fn biased_device_warms_its_lattice_and_the_heat_leaves_through_the_phonon_leads() {
    let net = network();
    let (s, left_w, right_w) = run(&electrons(0.06), &net);
    assert!(s.report.converged, "{:?}", s.report);
    let rise = s
        .lattice_temperature_k
        .iter()
        .fold(f64::NEG_INFINITY, |m, &t| m.max(t))
        - T0;
    assert!(rise > 0.5, "hottest site only {rise} K above the contacts");
    for (u, r) in s
        .lattice_temperature_k
        .iter()
        .zip(&s.response_temperature_k)
    {
        assert!((u - r).abs() <= 1e-6, "{u} vs {r}");
    }
    let o = observe(&s.solution);
    let electron_loss = o.energy_current_left_w + o.energy_current_right_w;
    let phonon_out = left_w + right_w;
    let rel = (electron_loss - phonon_out).abs() / electron_loss.abs();
    assert!(
        rel <= 1e-8,
        "electron leads lose {electron_loss:e} W, phonon leads carry {phonon_out:e} W ({rel:e})"
    );
    // Both phonon leads take heat out of a device heated inside.
    assert!(left_w > 0.0 && right_w > 0.0, "{left_w:e} {right_w:e}");
}

/// Without bias (contacts, bath and phonon leads all at T0) the electrons
/// deposit nothing but rounding, and every site stays at T0: to 1e-9 K,
/// rounding of the powers (about 1e-25 W) times the lattice's thermal
/// resistance (about 1e11 K/W) being far below that.
#[test]
fn unbiased_device_leaves_the_lattice_at_the_contact_temperature() {
    let net = network();
    let (s, _, _) = run(&electrons(0.0), &net);
    assert!(s.report.converged, "{:?}", s.report);
    for t in &s.lattice_temperature_k {
        assert!((t - T0).abs() <= 1e-9, "{t}");
    }
}
