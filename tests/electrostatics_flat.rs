//! Self-consistent electrostatics in long, flat, coherent regions, where
//! the density of states has the one-dimensional band-edge singularity.

use qheat::electrostatics::{self, Boundary, Coupling, Electrostatics};
use qheat::scba::{ScbaParams, Silent};

#[path = "support/chain_density.rs"]
mod chain_density;
use chain_density::{T, chain, chain_electrons};

fn settings(area: f64, donors: Vec<f64>) -> Electrostatics {
    let cells = donors.len();
    Electrostatics {
        permittivity: vec![12.0; cells],
        acceptors_cm3: vec![0.0; cells],
        donors_cm3: donors,
        area_nm2: area,
        gate: None,
        left: Boundary::Neutral,
        right: Boundary::Neutral,
        tolerance_ev: 1e-9,
        max_iterations: 80,
        mixing_depth: 5,
        mixing_factor: 0.5,
        coupling: Coupling::default(),
    }
}

/// The band-edge-aware weights make the electrons of a flat band a
/// smooth, monotone function of its edge. Sweeping the edge of the
/// analytic chain density across two grid steps (step 2 meV, 401 edge
/// positions), the electron number must fall at every step; the plain
/// rectangle rule Σ_k ΔE g(E_k), which samples the (E − Ec)^(−1/2)
/// singularity point by point, rises where the edge approaches a grid
/// energy from below (checked here too, so the sweep does see the defect
/// it guards against).
#[test]
fn flat_band_electrons_fall_monotonically_with_the_edge() {
    let (t, kt) = (0.3, qheat::units::thermal_energy_ev(T));
    let e: Vec<f64> = (0..300).map(|k| -0.1 + 0.002 * k as f64).collect();
    let rect = |edge: f64| -> f64 {
        e.iter()
            .map(|&en| {
                let x = en - edge;
                if x <= 0.0 {
                    return 0.0;
                }
                let rho = 1.0 / (std::f64::consts::PI * (x * (4.0 * t - x)).sqrt());
                2.0 * 0.002 * rho / (1.0 + (en / kt).exp())
            })
            .sum()
    };
    let edges: Vec<f64> = (0..=400).map(|j| 0.0001 + 1e-5 * j as f64).collect();
    let smooth: Vec<f64> = edges
        .iter()
        .map(|&c| chain_electrons(c, t, &e, kt))
        .collect();
    let rising = |v: &[f64]| v.windows(2).filter(|w| w[1] >= w[0]).count();
    assert_eq!(rising(&smooth), 0, "{smooth:?}");
    let plain: Vec<f64> = edges.iter().map(|&c| rect(c)).collect();
    assert!(
        rising(&plain) > 0,
        "the rectangle rule did not show the defect"
    );
    // The weights integrate the singular density accurately too: against
    // the band integral over wave numbers (uniform_band_electrons), within
    // 1e-2 relative at a 2 meV step: holding the smooth factor constant
    // from the edge to the first grid energy errs by O((ΔE/kT)^(3/2)),
    // 0.2 to 0.7 % here depending on where the edge sits.
    let exact = electrostatics::uniform_band_electrons(0.001, t, &[0.0], 0.0, kt, 2.0);
    let ours = chain_electrons(0.001, t, &e, kt);
    assert!((ours / exact - 1.0).abs() < 1e-2, "{ours} {exact}");
}

/// A 40 nm coherent wire whose two halves carry 1e18 and 4e18 donors per
/// cm³ (cross-section 25 nm², mass 0.07): both halves are long and flat,
/// the leads continue them, and nothing broadens the band edges. Summed
/// point by point on the grid, the density of such regions is jagged in
/// the potential and the loop crawled at changes of the order of the grid
/// step (it needed 75 outer iterations to reach 1e-9 eV); with the
/// band-edge-aware weights it converges in 39, within the 50 allowed here.
#[test]
fn long_flat_coherent_junction_converges() {
    let cells = 80;
    let p = chain(cells, 0.5, 0.07, (-0.1507, 0.35, 0.002));
    let donors = (0..cells)
        .map(|i| if i < cells / 2 { 1e18 } else { 4e18 })
        .collect();
    let mut es = settings(25.0, donors);
    es.max_iterations = 50;
    let sc =
        electrostatics::solve(&p, &es, &ScbaParams::default(), None, None, &mut Silent).unwrap();
    assert!(sc.report.converged, "{:?}", sc.report.history);
    eprintln!(
        "outer {} born passes {}",
        sc.report.outer_iterations, sc.report.born_passes
    );
}
