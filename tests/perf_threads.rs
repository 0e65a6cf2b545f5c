//! Determinism across thread counts, warm starts and mixing, on the demo
//! cases. Speed itself is measured in `benches/`, not here.

use qheat::case::{Case, CaseKey};
use qheat::scba::{self, Mixing, ScbaParams, Silent, Solution};
use std::path::Path;

fn demo(name: &str) -> Case {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo");
    Case::load(&dir.join(format!("{name}.toml"))).unwrap()
}

fn solve_on(threads: usize, case: &Case, params: &ScbaParams) -> Solution {
    let r = case.resolve().unwrap();
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .unwrap()
        .install(|| scba::solve(&r.problem, params, None, &mut Silent))
        .unwrap()
}

/// Largest |a − b| / max|b| over a slice.
fn max_rel(a: &[f64], b: &[f64]) -> f64 {
    let scale = b
        .iter()
        .fold(0.0f64, |m, x| m.max(x.abs()))
        .max(f64::MIN_POSITIVE);
    a.iter()
        .zip(b)
        .fold(0.0f64, |m, (x, y)| m.max((x - y).abs() / scale))
}

fn compare_threads(case: &Case, params: &ScbaParams) {
    let one = solve_on(1, case, params);
    let two = solve_on(2, case, params);
    assert_eq!(one.report.iterations, two.report.iterations);
    let re = |s: &Solution| -> Vec<f64> {
        s.sigma
            .retarded
            .iter()
            .flat_map(|z| [z.re, z.im])
            .chain(s.pass.green.retarded.iter().flat_map(|z| [z.re, z.im]))
            .collect()
    };
    let re_ = |s: &Solution| -> Vec<f64> {
        s.sigma
            .inscatter
            .iter()
            .chain(&s.pass.green.filled)
            .chain(&s.pass.bond)
            .copied()
            .collect()
    };
    // Energies are independent and every reduction (Σ0 rebuild, mixing,
    // currents) runs serially in a fixed order, so the results are
    // bitwise identical; the requirement is 1e-13 relative.
    assert!(max_rel(&re(&two), &re(&one)) <= 1e-13);
    assert!(max_rel(&re_(&two), &re_(&one)) <= 1e-13);
    assert_eq!(re(&two), re(&one), "not bitwise identical");
    assert_eq!(re_(&two), re_(&one), "not bitwise identical");
}

#[test]
fn one_and_two_threads_agree_on_a_chain_with_a_phonon() {
    let case = demo("peltier-barrier");
    let mut params = case.resolve().unwrap().scba;
    params.max_iterations = 8;
    compare_threads(&case, &params);
}

#[test]
fn one_and_two_threads_agree_on_a_strip_with_a_phonon_and_hermitian_part() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo");
    let text = std::fs::read_to_string(dir.join("strip-constriction.toml")).unwrap()
        + "\n[[phonon]]\nenergy_ev = 0.04\ncoupling_ev2 = 2e-3\n";
    let case = Case::parse(&text, "strip-with-phonon", &dir).unwrap();
    let r = case.resolve().unwrap();
    let mut params = r.scba;
    params.max_iterations = 4;
    let mut problem = r.problem.clone();
    problem.scattering.hermitian_part = true;
    let run = |threads: usize| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap()
            .install(|| scba::solve(&problem, &params, None, &mut Silent))
            .unwrap()
    };
    let (one, two) = (run(1), run(2));
    assert_eq!(one.sigma, two.sigma);
    assert_eq!(one.pass.green, two.pass.green);
    assert_eq!(one.pass.bond, two.pass.bond);
}

#[test]
fn warm_start_from_the_converged_self_energy_takes_at_most_two_iterations() {
    let case = demo("peltier-barrier");
    let r = case.resolve().unwrap();
    let cold = scba::solve(&r.problem, &r.scba, None, &mut Silent).unwrap();
    assert!(cold.report.converged);
    let warm = scba::solve(&r.problem, &r.scba, Some(&cold.sigma), &mut Silent).unwrap();
    assert!(warm.report.converged && warm.report.warm_start);
    assert!(
        warm.report.iterations <= 2,
        "warm start took {} iterations",
        warm.report.iterations
    );
    // Same answer to the tolerance (1e-10 relative on Σ0 and currents).
    let tol = r.scba.tolerance;
    assert!(scba::relative_change(&warm.sigma, &cold.sigma) <= 10.0 * tol);
    let (cl, cr) = scba::terminal_currents(&r.problem, &cold.pass.flows);
    let (wl, wr) = scba::terminal_currents(&r.problem, &warm.pass.flows);
    assert!((cl - wl).abs() <= 10.0 * tol * cl.abs() + r.scba.current_floor_a);
    assert!((cr - wr).abs() <= 10.0 * tol * cr.abs() + r.scba.current_floor_a);
}

#[test]
fn warm_start_from_a_neighbouring_bias_saves_iterations() {
    let case = demo("peltier-barrier");
    let r0 = case.resolve().unwrap();
    let near = scba::solve(&r0.problem, &r0.scba, None, &mut Silent).unwrap();
    let r1 = case
        .with(CaseKey::BiasVoltage, -0.082)
        .unwrap()
        .resolve()
        .unwrap();
    assert_eq!(r1.problem.grid.count, r0.problem.grid.count);
    let cold = scba::solve(&r1.problem, &r1.scba, None, &mut Silent).unwrap();
    let warm = scba::solve(&r1.problem, &r1.scba, Some(&near.sigma), &mut Silent).unwrap();
    assert!(cold.report.converged && warm.report.converged);
    assert!(
        warm.report.iterations < cold.report.iterations,
        "warm {} vs cold {}",
        warm.report.iterations,
        cold.report.iterations
    );
    let tol = r1.scba.tolerance;
    assert!(scba::relative_change(&warm.sigma, &cold.sigma) <= 100.0 * tol);
}

#[test]
fn anderson_needs_fewer_iterations_than_linear_half() {
    let case = demo("peltier-barrier");
    let r = case.resolve().unwrap();
    let anderson = scba::solve(&r.problem, &r.scba, None, &mut Silent).unwrap();
    let linear_params = r.scba.with_mixing(Mixing::Linear { factor: 0.5 });
    let linear = scba::solve(&r.problem, &linear_params, None, &mut Silent).unwrap();
    assert!(anderson.report.converged && linear.report.converged);
    assert!(
        anderson.report.iterations < linear.report.iterations,
        "anderson {} vs linear {}",
        anderson.report.iterations,
        linear.report.iterations
    );
    // Same fixed point to the tolerance.
    assert!(scba::relative_change(&anderson.sigma, &linear.sigma) <= 100.0 * r.scba.tolerance);
}
