//! Red-black energy ordering of the Born loop: same answer as the
//! simultaneous order, fewer iterations, and the colouring rules.

mod common;
use common::*;
use qheat::case::Case;
use qheat::grid::EnergyGrid;
use qheat::model::Problem;
use qheat::observables::observe;
use qheat::scba::{self, EnergyOrder, Mixing, ScbaParams, Silent};
use std::path::Path;

fn demo(name: &str) -> Case {
    Case::load(&Path::new(env!("CARGO_MANIFEST_DIR")).join(format!("cases-demo/{name}.toml")))
        .unwrap()
}

/// A 40-cell barrier chain on a 2 meV grid with the given phonon energies.
fn chain_with_modes(modes: &[f64], dephasing: f64) -> Problem {
    let d = barrier_chain(40, 0.5, 0.07, 15, 25, 0.1);
    let step = 0.002;
    let grid = EnergyGrid::covering(0.5 * step, 0.4, step);
    let mut p = coherent_problem(d, (0.09, 300.0), (0.01, 300.0), grid.clone());
    for &w in modes {
        p.scattering
            .phonons
            .push(phonon(&grid, w, 2e-3, &[true; 40], 300.0));
    }
    p.scattering.dephasing_ev2 = vec![dephasing; 40];
    p
}

#[test]
fn the_colouring_follows_the_phonon_steps() {
    let steps =
        |p: &Problem| -> Vec<usize> { p.scattering.phonons.iter().map(|m| m.steps).collect() };
    // 36 meV on a 2 meV grid: 18 steps, bands of 18.
    let p = chain_with_modes(&[0.036], 0.0);
    assert_eq!(steps(&p), vec![18]);
    assert_eq!(
        scba::red_black_colouring(&p, EnergyOrder::Auto),
        Some((18, true))
    );
    assert_eq!(
        scba::red_black_colouring(&p, EnergyOrder::Simultaneous),
        None
    );
    // 18 and 54 steps: 54 = 3·18 is an odd multiple, still two colours.
    let p = chain_with_modes(&[0.036, 0.108], 0.0);
    assert_eq!(
        scba::red_black_colouring(&p, EnergyOrder::Auto),
        Some((18, true))
    );
    // 18 and 12 steps: gcd 6, 12/6 even: no two-colouring, auto declines,
    // a forced red-black order uses bands of 6.
    let p = chain_with_modes(&[0.036, 0.024], 0.0);
    assert_eq!(steps(&p), vec![18, 12]);
    assert_eq!(scba::red_black_colouring(&p, EnergyOrder::Auto), None);
    assert_eq!(
        scba::red_black_colouring(&p, EnergyOrder::RedBlack),
        Some((6, false))
    );
    // Dephasing alone couples nothing across energies: no colouring.
    let p = chain_with_modes(&[], 1e-3);
    assert_eq!(scba::red_black_colouring(&p, EnergyOrder::RedBlack), None);
}

/// Solve `p` in both orders with the same mixing; return (simultaneous,
/// red-black) after checking they agree.
fn both_orders(p: &Problem, mixing: Mixing, warm: bool) -> (usize, usize) {
    let tol = 1e-10;
    let params = |order| {
        ScbaParams::default()
            .with_tolerance(tol)
            .with_max_iterations(500)
            .with_mixing(mixing)
            .with_energy_order(order)
    };
    let start = warm.then(|| {
        // A neighbouring operating point: the same device 5 mV further biased.
        let mut q = p.clone();
        q.left.fermi_level_ev += 0.0025;
        q.right.fermi_level_ev -= 0.0025;
        scba::solve(&q, &params(EnergyOrder::Simultaneous), None, &mut Silent)
            .unwrap()
            .sigma
    });
    let a = scba::solve(
        p,
        &params(EnergyOrder::Simultaneous),
        start.as_ref(),
        &mut Silent,
    )
    .unwrap();
    let b = scba::solve(
        p,
        &params(EnergyOrder::RedBlack),
        start.as_ref(),
        &mut Silent,
    )
    .unwrap();
    assert!(a.report.converged && b.report.converged);
    assert_eq!(a.report.energy_order, EnergyOrder::Simultaneous);
    assert_eq!(b.report.energy_order, EnergyOrder::RedBlack);
    // Both stop within about tol/(1 − ρ) of the same fixed point (ρ ≤ 0.5
    // here): 1e-8 leaves a wide margin and would still catch a red-black
    // pass that paired a G with the wrong Σ0 (a change of order 1e-3).
    assert!(scba::relative_change(&a.sigma, &b.sigma) < 1e-8);
    let (oa, ob) = (observe(&a), observe(&b));
    assert!(
        rel(oa.current_a, ob.current_a) < 1e-8,
        "{} vs {}",
        oa.current_a,
        ob.current_a
    );
    let dp = profile_deviation(&ob.sites.lattice_power_w, &oa.sites.lattice_power_w);
    assert!(dp < 1e-8, "lattice power per cell differs by {dp:e}");
    // The red-black solution is a solution in its own right: its ledger
    // closes as tightly as the simultaneous one's.
    assert!(ob.ledger.worst_relative() < 1e-8, "{:?}", ob.ledger);
    (a.report.iterations, b.report.iterations)
}

#[test]
fn red_black_reaches_the_same_answer_in_fewer_iterations() {
    // One 36 meV mode. The simultaneous iteration's Jacobian has eigenvalue
    // pairs ±λ; red-black ordering squares them (D. M. Young, Iterative
    // Solution of Large Linear Systems, Academic Press, 1971: for
    // consistently ordered systems the Gauss–Seidel rate is the square of the Jacobi
    // rate), so plain iteration needs about half the steps. 0.7 leaves room
    // for the first steps, where the rate has not settled.
    let p = chain_with_modes(&[0.036], 0.0);
    let (sim, rb) = both_orders(&p, Mixing::Linear { factor: 1.0 }, false);
    assert!(
        (rb as f64) <= 0.7 * sim as f64,
        "red-black {rb} vs simultaneous {sim}"
    );
    let (sim, rb) = both_orders(&p, Mixing::default(), false);
    assert!(rb < sim, "anderson: red-black {rb} vs simultaneous {sim}");
}

#[test]
fn red_black_with_dephasing_modes_off_the_colouring_and_warm_starts() {
    // Black Σ0 then also depends on black G (dephasing, the 12-step mode):
    // the order still converges to the same answer, from cold and warm starts.
    let mut p = chain_with_modes(&[0.036, 0.024], 1e-3);
    p.scattering.hermitian_part = true;
    for warm in [false, true] {
        both_orders(&p, Mixing::default(), warm);
    }
}

#[test]
fn the_peltier_demo_converges_in_red_black_order_by_default() {
    let r = demo("peltier-barrier").resolve().unwrap();
    assert_eq!(r.scba.energy_order, EnergyOrder::Auto);
    let s = scba::solve(&r.problem, &r.scba, None, &mut Silent).unwrap();
    assert!(s.report.converged);
    assert_eq!(s.report.energy_order, EnergyOrder::RedBlack);
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo/peltier-barrier.toml");
    let text = std::fs::read_to_string(&path).unwrap();
    for (value, order) in [
        ("simultaneous", EnergyOrder::Simultaneous),
        ("red-black", EnergyOrder::RedBlack),
        ("auto", EnergyOrder::Auto),
    ] {
        let t = text.replace("[solver]", &format!("[solver]\nenergy_order = \"{value}\""));
        let r = Case::parse(&t, "test", path.parent().unwrap())
            .unwrap()
            .resolve()
            .unwrap();
        assert_eq!(r.scba.energy_order, order);
    }
    // Without phonons a requested red-black order cannot apply: say so.
    let i = text.find("[[phonon]]").unwrap();
    let j = text.find("[grid]").unwrap();
    let t = format!("{}{}", &text[..i], &text[j..])
        .replace("[solver]", "[solver]\nenergy_order = \"red-black\"");
    let r = Case::parse(&t, "test", path.parent().unwrap())
        .unwrap()
        .resolve()
        .unwrap();
    assert!(
        r.warnings.iter().any(|w| w.contains("solver.energy_order")),
        "{:?}",
        r.warnings
    );
    let t = text.replace("[solver]", "[solver]\nenergy_order = \"gauss\"");
    let e = Case::parse(&t, "test", path.parent().unwrap())
        .and_then(|c| c.resolve())
        .unwrap_err();
    assert!(e.to_string().contains("solver.energy_order"), "{e}");
}

#[test]
fn the_born_map_fixes_the_converged_self_energy_in_both_orders() {
    // scba::born_map is the sweep the solver runs: at a converged Σ0 its
    // image (and the Σ0 it used) must return Σ0 to about the tolerance; a
    // Σ0 away from the fixed point must move.
    let p = chain_with_modes(&[0.036], 0.0);
    let params = ScbaParams::default()
        .with_tolerance(1e-12)
        .with_max_iterations(500);
    let sol = scba::solve(&p, &params, None, &mut Silent).unwrap();
    assert!(sol.report.converged);
    let leads = scba::LeadTable::new(&p).unwrap();
    for order in [EnergyOrder::Simultaneous, EnergyOrder::RedBlack] {
        let (used, image) = scba::born_map(&p, &leads, &sol.sigma, order).unwrap();
        assert!(
            scba::relative_change(&sol.sigma, &used) < 1e-10,
            "{order:?}"
        );
        assert!(
            scba::relative_change(&sol.sigma, &image) < 1e-10,
            "{order:?}"
        );
        let mut away = sol.sigma.clone();
        away.inscatter.iter_mut().for_each(|v| *v *= 1.5);
        let (_, moved) = scba::born_map(&p, &leads, &away, order).unwrap();
        assert!(scba::relative_change(&away, &moved) > 1e-3, "{order:?}");
    }
}
