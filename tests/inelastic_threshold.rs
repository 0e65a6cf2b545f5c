//! Inelastic tunnelling threshold of a weakly coupled Einstein phonon in a
//! ballistic chain: the second derivative d²I/dV² has an extremum at
//! eV = ħω with the thermal full width at half maximum 5.4392 kB T
//! (source: J. Lambe, R. C. Jaklevic, Phys. Rev. 165, 821 (1968)). For a ballistic
//! chain the conductance falls above threshold (a dip), so |d²I/dV²| is
//! measured and its half maximum is taken from zero. Tolerance ±2% on the
//! width (intrinsic broadening ≪ kT, bias step kT/20, ΔE ≤ kT/2, ħω an exact
//! multiple of ΔE, Born tolerance 1e-11) and 0.1 kT on the position (the
//! extremum shifts by about (ΔG/G) kT with the coupling).

#![allow(clippy::needless_range_loop)]

mod common;
use common::*;
use qheat::grid::EnergyGrid;
use qheat::observables::observe;
use qheat::scba::{ScbaParams, Silent, solve};
use qheat::units::BOLTZMANN_EV_PER_K;

#[test]
fn threshold_width_is_thermal() {
    let temp = 10.0;
    let kt = BOLTZMANN_EV_PER_K * temp;
    let hw = 0.020;
    let de = hw / 48.0;
    assert!(de <= kt / 2.0);
    let mu = 0.0;
    let n = 10;
    let dev = qheat::device::chain(1.0, 1.0, -1.0, vec![0.0; n]);
    let vmax = hw + 10.0 * kt;
    let lo = mu - 0.5 * vmax - hw - 20.0 * kt;
    let hi = mu + 0.5 * vmax + hw + 20.0 * kt;
    // Align the grid so that ħω is an exact multiple of ΔE (it is: 48 steps).
    let grid = EnergyGrid::covering(lo, hi, de);
    let dv = kt / 20.0;
    let v0 = hw - 10.0 * kt;
    let count = ((20.0 * kt) / dv).round() as usize + 1;
    let params = ScbaParams::default()
        .with_tolerance(1e-11)
        .with_current_floor_a(1e-22)
        .with_max_iterations(200);
    let mut warm = None;
    let mut volts = Vec::with_capacity(count);
    let mut current = Vec::with_capacity(count);
    let mut dg = 0.0;
    for j in 0..count {
        let v = v0 + j as f64 * dv;
        let mut p = coherent_problem(
            dev.clone(),
            (mu + 0.5 * v, temp),
            (mu - 0.5 * v, temp),
            grid.clone(),
        );
        p.scattering
            .phonons
            .push(phonon(&grid, hw, 2e-4, &vec![true; n], temp));
        assert_eq!(p.scattering.phonons[0].steps, 48);
        let sol = solve(&p, &params, warm.as_ref(), &mut Silent).unwrap();
        assert!(sol.report.converged);
        let o = observe(&sol);
        if j == count - 1 {
            dg = (o.current_a / p.voltage_v()) / qheat::units::CONDUCTANCE_QUANTUM - 1.0;
        }
        warm = Some(sol.sigma);
        volts.push(v);
        current.push(o.current_a.abs());
    }
    assert!(
        dg < 0.0 && dg.abs() < 0.05,
        "conductance change above threshold {dg}"
    );
    let d2: Vec<f64> = (1..count - 1)
        .map(|j| (current[j + 1] - 2.0 * current[j] + current[j - 1]) / (dv * dv))
        .collect();
    let vs = &volts[1..count - 1];
    let (jmax, peak) = d2
        .iter()
        .enumerate()
        .map(|(j, &y)| (j, y.abs()))
        .fold((0, 0.0), |a, b| if b.1 > a.1 { b } else { a });
    // The dip is negative for a ballistic chain.
    assert!(d2[jmax] < 0.0);
    let half = 0.5 * peak;
    let cross = |range: &mut dyn Iterator<Item = usize>| -> f64 {
        for j in range {
            let (a, b) = (d2[j].abs(), d2[j + 1].abs());
            if (a - half) * (b - half) <= 0.0 {
                return vs[j] + (half - a) / (b - a) * dv;
            }
        }
        panic!("no half-maximum crossing");
    };
    let left = cross(&mut (0..jmax).rev());
    let right = cross(&mut (jmax..d2.len() - 1));
    let fwhm = (right - left) / kt;
    assert!((fwhm - 5.4392).abs() < 0.02 * 5.4392, "FWHM {fwhm} kT");
    // Position of the extremum by a parabola through the three top points.
    let (y0, y1, y2) = (d2[jmax - 1].abs(), d2[jmax].abs(), d2[jmax + 1].abs());
    let offset = 0.5 * (y0 - y2) / (y0 - 2.0 * y1 + y2);
    let v_peak = vs[jmax] + offset * dv;
    assert!(
        (v_peak - hw).abs() < 0.1 * kt,
        "peak at {v_peak} vs ħω {hw}"
    );
}
