//! Born iterations to convergence on cases-demo/peltier-barrier.toml, at the
//! case's tolerance: Anderson mixing (the case's settings) and linear mixing
//! with factors 0.1 … 1.0, each in both energy orders (simultaneous and
//! red-black). Then the same for the demo with 15× the phonon coupling
//! (D = 3e-2 eV²), where plain iteration is slow. Prints tables: this counts
//! iterations, it does not time anything, so the numbers are the same on
//! every machine.
//!
//! Run: `cargo bench --bench mixing`

use qheat::case::{Case, CaseKey};
use qheat::scba::{self, EnergyOrder, MixerHistory, Mixing, Silent};
use std::path::Path;

fn main() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo/peltier-barrier.toml");
    let case = Case::load(&path).unwrap();
    println!("case: {}", path.display());
    table(&case);
    println!("\ncase: the same with phonon.0.coupling_ev2 = 3e-2");
    table(&case.with(CaseKey::PhononCoupling(0), 3e-2).unwrap());
}

fn table(case: &Case) {
    let r = case.resolve().unwrap();
    let base = r.scba.with_max_iterations(2000);
    println!("tolerance {:e}", base.tolerance);
    // The reference answer: the case's own settings.
    let reference = scba::solve(&r.problem, &base, None, &mut Silent).unwrap();
    println!("order,mixing,iterations,converged,current_left_a,rel_diff_sigma_vs_case_settings");
    let mut best_linear: Vec<(EnergyOrder, f64, usize)> = Vec::new();
    let mut anderson: Vec<(EnergyOrder, usize)> = Vec::new();
    for order in [EnergyOrder::Simultaneous, EnergyOrder::RedBlack] {
        let mut kinds = vec![base.mixing];
        kinds.extend((1..=10).map(|i| Mixing::Linear {
            factor: i as f64 / 10.0,
        }));
        let mut best: Option<(f64, usize)> = None;
        for mixing in kinds {
            let p = base.with_mixing(mixing).with_energy_order(order);
            let s = scba::solve(&r.problem, &p, None, &mut Silent).unwrap();
            let (l, _) = scba::terminal_currents(&r.problem, &s.pass.flows);
            let label = match mixing {
                Mixing::Linear { factor } => format!("linear {factor:.1}"),
                Mixing::Anderson { depth, damping } => {
                    format!("anderson depth {depth} damping {damping}")
                }
            };
            println!(
                "{order:?},{label},{},{},{:.12e},{:.3e}",
                s.report.iterations,
                s.report.converged,
                l,
                scba::relative_change(&s.sigma, &reference.sigma)
            );
            match mixing {
                Mixing::Linear { factor } => {
                    if s.report.converged && best.is_none_or(|(_, n)| s.report.iterations < n) {
                        best = Some((factor, s.report.iterations));
                    }
                }
                Mixing::Anderson { .. } => anderson.push((order, s.report.iterations)),
            }
        }
        if let Some((f, n)) = best {
            best_linear.push((order, f, n));
        }
    }
    println!();
    // The compact (f32, default) and full (f64) Anderson history.
    for order in [EnergyOrder::Simultaneous, EnergyOrder::RedBlack] {
        for h in [MixerHistory::Compact, MixerHistory::Full] {
            let p = base.with_energy_order(order).with_history(h);
            let s = scba::solve(&r.problem, &p, None, &mut Silent).unwrap();
            println!(
                "history {h:?}, {order:?} order: {} iterations, converged {}, Σ0 vs case settings {:.3e}",
                s.report.iterations,
                s.report.converged,
                scba::relative_change(&s.sigma, &reference.sigma)
            );
        }
    }
    for (order, f, n) in &best_linear {
        println!("best linear factor, {order:?} order: {f:.1} with {n} iterations");
    }
    for (order, n) in &anderson {
        println!("anderson, {order:?} order: {n} iterations");
        for (lo, _, ln) in &best_linear {
            println!(
                "  ratio best linear ({lo:?}) / anderson ({order:?}): {:.2}",
                *ln as f64 / *n as f64
            );
        }
    }
}
