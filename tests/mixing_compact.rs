//! The compact Anderson history (f32) against the full one (f64): the same
//! fixed point, about the same number of iterations, and the memory
//! estimate shrinking by exactly the history's share.

use qheat::case::Case;
use qheat::scba::{self, MixerHistory, Silent};
use std::path::Path;

fn demo() -> qheat::case::Resolved {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo/peltier-barrier.toml");
    Case::load(&path).unwrap().resolve().unwrap()
}

/// Largest |a − b| over the Σ0 values, relative to the largest |b|.
fn sigma_diff(a: &scba::Solution, b: &scba::Solution) -> f64 {
    let scale = b.sigma.inscatter.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let d_in = a.sigma.inscatter.iter().zip(&b.sigma.inscatter);
    let d_r = a.sigma.retarded.iter().zip(&b.sigma.retarded);
    d_in.map(|(x, y)| (x - y).abs())
        .chain(d_r.map(|(x, y)| (x - y).norm()))
        .fold(0.0, f64::max)
        / scale
}

/// Both histories converge on the Peltier demo (tolerance 1e-10) to the
/// same Σ0 and currents. The stopping test bounds each answer's distance
/// from the fixed point by about tol/(1 − ρ) with the contraction ρ ≈ 0.1
/// of the red-black Born map (docs/performance.md), so two converged
/// answers agree to a few times the tolerance: checked at 20·tol. The
/// iteration counts may differ by rounding of the search directions only:
/// at most two apart.
#[test]
fn compact_and_full_history_reach_the_same_answer() {
    let r = demo();
    let tol = r.scba.tolerance;
    let solve = |h: MixerHistory| {
        let p = r.scba.with_history(h);
        scba::solve(&r.problem, &p, None, &mut Silent).unwrap()
    };
    let compact = solve(MixerHistory::Compact);
    let full = solve(MixerHistory::Full);
    assert!(compact.report.converged && full.report.converged);
    let (ic, _) = scba::terminal_currents(&compact.problem, &compact.pass.flows);
    let (i_f, _) = scba::terminal_currents(&full.problem, &full.pass.flows);
    let d = sigma_diff(&compact, &full);
    assert!(d <= 20.0 * tol, "Σ0 differs by {d:e}");
    assert!((ic - i_f).abs() <= 20.0 * tol * i_f.abs(), "{ic} vs {i_f}");
    let (nc, nf) = (compact.report.iterations, full.report.iterations);
    assert!(nc.abs_diff(nf) <= 2, "compact {nc}, full {nf} iterations");
}

/// The history is (2m + 2) vectors of P numbers per site over the mixed
/// energies; compact stores 4 bytes a number instead of 8, so the
/// estimate drops by exactly half the history. On the demo (one phonon of
/// 18 grid steps, no dephasing, no Hermitian part) only the red half of the
/// energies is mixed, with P = 2.
#[test]
fn the_estimate_drops_by_half_the_history() {
    let mut compact = demo();
    compact.scba = compact.scba.with_history(MixerHistory::Compact);
    let mut full = compact.clone();
    full.scba = full.scba.with_history(MixerHistory::Full);
    let (hc, hf) = (compact.mixer_history_bytes(), full.mixer_history_bytes());
    assert_eq!(2 * hc, hf);
    let drop = full.memory_estimate_bytes() - compact.memory_estimate_bytes();
    assert_eq!(drop, hf / 2);
    let p = &compact.problem;
    let (ne, ns) = (p.grid.count, p.sites());
    let red = (0..ne).filter(|k| (k / 18) % 2 == 0).count();
    assert_eq!(p.scattering.phonons[0].steps, 18);
    assert_eq!(scba::mixed_energy_rows(p, compact.scba.energy_order), red);
    let depth = match compact.scba.mixing {
        scba::Mixing::Anderson { depth, .. } => depth,
        other => panic!("the demo mixes with Anderson, not {other:?}"),
    };
    assert_eq!(hc as usize, red * ns * 2 * (2 * depth + 2) * 4);
    // In the simultaneous order every energy is mixed.
    let mut all = compact.clone();
    all.scba = all.scba.with_energy_order(scba::EnergyOrder::Simultaneous);
    assert_eq!(
        all.mixer_history_bytes() as usize,
        ne * ns * 2 * (2 * depth + 2) * 4
    );
}
