//! The coarse start of the Born loop: solving every k-th energy first and
//! starting the full grid from the interpolated Σ0 reaches the same fixed
//! point as the plain loop, in fewer full-grid iterations; the setting is
//! read from the case and a given warm start skips it.

mod common;
use common::*;
use qheat::case::Case;
use qheat::grid::EnergyGrid;
use qheat::model::Problem;
use qheat::scba::{self, CoarseStart, ScbaParams, Silent};
use std::path::Path;

/// A 200-cell (100 nm) barrier chain under 80 mV on a 1 meV grid of 401
/// energies with a 36 meV phonon everywhere: 400 steps and 36 steps per
/// phonon share the factor 4, so the coarse level is every 4th energy
/// (9 steps per phonon, 101 energies).
fn relaxing_chain() -> Problem {
    let n = 200;
    let d = barrier_chain(n, 0.5, 0.07, 95, 105, 0.1);
    let grid = EnergyGrid::new(0.0005, 0.001, 401);
    let mut p = coherent_problem(d, (0.09, 300.0), (0.01, 300.0), grid.clone());
    p.scattering
        .phonons
        .push(phonon(&grid, 0.036, 2e-3, &vec![true; n], 300.0));
    p
}

fn params(coarse: CoarseStart) -> ScbaParams {
    ScbaParams::default()
        .with_tolerance(1e-10)
        .with_max_iterations(500)
        .with_coarse_start(coarse)
}

#[test]
fn the_coarse_start_reaches_the_plain_fixed_point() {
    let p = relaxing_chain();
    assert_eq!(scba::coarse::levels(&p, &params(CoarseStart::On)), vec![4]);
    // Auto stays off on a problem this small (80 200 site-energies).
    assert!(scba::coarse::levels(&p, &params(CoarseStart::Auto)).is_empty());
    let plain = scba::solve(&p, &params(CoarseStart::Off), None, &mut Silent).unwrap();
    let coarse = scba::solve(&p, &params(CoarseStart::On), None, &mut Silent).unwrap();
    assert!(plain.report.converged && coarse.report.converged);
    assert!(plain.report.coarse_levels.is_empty());
    let levels = &coarse.report.coarse_levels;
    assert_eq!(levels.len(), 1);
    assert_eq!((levels[0].factor, levels[0].energies), (4, 101));
    assert!(levels[0].converged && levels[0].iterations > 0);
    assert!(!coarse.report.warm_start);
    // Same fixed point: both loops stop when the currents change by less
    // than 1e-10 relative per iteration; with the tail contraction of this
    // loop (well below 0.9) the remaining error is within 10× that, so the
    // two answers agree to 1e-8 (an identity of the method, not an outside
    // reference).
    let (pl, pr) = scba::terminal_currents(&p, &plain.pass.flows);
    let (cl, cr) = scba::terminal_currents(&p, &coarse.pass.flows);
    assert!(rel(cl, pl) < 1e-8, "left {cl} vs {pl}");
    assert!(rel(cr, pr) < 1e-8, "right {cr} vs {pr}");
    assert!(
        scba::relative_change(&coarse.sigma, &plain.sigma) < 1e-7,
        "Σ0 differs by {}",
        scba::relative_change(&coarse.sigma, &plain.sigma)
    );
    // The point of it: the full grid starts near the answer. Counts are
    // deterministic; a start that misses the fine fixed point (a wrong
    // phonon step on the coarse grid, a shifted interpolation) costs the
    // full grid as many iterations as starting from zero or more.
    assert!(
        coarse.report.iterations < plain.report.iterations,
        "full grid: {} iterations after the coarse start, {} plain",
        coarse.report.iterations,
        plain.report.iterations
    );
}

#[test]
fn a_given_warm_start_skips_the_coarse_levels() {
    let p = relaxing_chain();
    let first = scba::solve(&p, &params(CoarseStart::Off), None, &mut Silent).unwrap();
    let warm = scba::solve(
        &p,
        &params(CoarseStart::On),
        Some(&first.sigma),
        &mut Silent,
    )
    .unwrap();
    assert!(warm.report.warm_start);
    assert!(warm.report.coarse_levels.is_empty());
}

const CASE: &str = r#"
name = "coarse-key"
[device]
kind = "chain"
spacing_nm = 0.5
length_nm = 20.0
effective_mass = 0.07
[leads.left]
fermi_level_ev = 0.05
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.05
temperature_k = 300.0
"#;

fn coarse_start_of(extra: &str) -> Result<CoarseStart, String> {
    Case::parse(&format!("{CASE}{extra}"), "test.toml", Path::new("."))
        .map(|c| c.resolve().unwrap().scba.coarse_start)
        .map_err(|e| e.to_string())
}

#[test]
fn the_case_key_reads_auto_on_and_off() {
    assert_eq!(coarse_start_of(""), Ok(CoarseStart::Auto));
    for (word, want) in [
        ("auto", CoarseStart::Auto),
        ("on", CoarseStart::On),
        ("off", CoarseStart::Off),
    ] {
        let got = coarse_start_of(&format!("[solver]\ncoarse_start = \"{word}\"\n"));
        assert_eq!(got, Ok(want), "{word}");
    }
    let err = coarse_start_of("[solver]\ncoarse_start = \"yes\"\n").unwrap_err();
    assert!(err.contains("solver.coarse_start"), "{err}");
    assert!(err.contains("\"auto\" or \"off\" or \"on\""), "{err}");
}
