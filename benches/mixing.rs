//! Born iterations to convergence on cases-demo/peltier-barrier.toml:
//! Anderson mixing (the case's settings) against linear mixing with factors
//! 0.1 … 1.0, all at the case's tolerance. Prints a table: this counts
//! iterations, it does not time anything.
//!
//! Run: `cargo bench --bench mixing`

use qheat::case::Case;
use qheat::scba::{self, Mixing, ScbaParams, Silent};
use std::path::Path;

fn main() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo/peltier-barrier.toml");
    let r = Case::load(&path).unwrap().resolve().unwrap();
    let base = ScbaParams {
        max_iterations: 2000,
        ..r.scba
    };
    let anderson = scba::solve(&r.problem, &base, None, &mut Silent).unwrap();
    let (al, _) = scba::terminal_currents(&r.problem, &anderson.pass.flows);
    println!("case: {} (tolerance {:e})", path.display(), base.tolerance);
    println!("mixing,iterations,converged,current_left_a,rel_diff_sigma_vs_anderson");
    println!(
        "{:?},{},{},{:.12e},0",
        base.mixing, anderson.report.iterations, anderson.report.converged, al
    );
    let mut best: Option<(f64, usize)> = None;
    for i in 1..=10 {
        let factor = i as f64 / 10.0;
        let p = ScbaParams {
            mixing: Mixing::Linear { factor },
            ..base
        };
        let s = scba::solve(&r.problem, &p, None, &mut Silent).unwrap();
        let (l, _) = scba::terminal_currents(&r.problem, &s.pass.flows);
        println!(
            "linear {factor:.1},{},{},{:.12e},{:.3e}",
            s.report.iterations,
            s.report.converged,
            l,
            scba::relative_change(&s.sigma, &anderson.sigma)
        );
        if s.report.converged && best.is_none_or(|(_, n)| s.report.iterations < n) {
            best = Some((factor, s.report.iterations));
        }
    }
    if let Some((f, n)) = best {
        println!(
            "best linear factor {f:.1}: {n} iterations; anderson {}: ratio {:.2}",
            anderson.report.iterations,
            n as f64 / anderson.report.iterations as f64
        );
    }
}
