//! The largest eigenvalues of the Born iteration's Jacobian at the converged
//! Σ0 of cases-demo/peltier-barrier.toml, in both energy orders, and what
//! they allow a mixer to gain.
//!
//! The Jacobian J of Σ0 ↦ F(Σ0) (`scba::born_map`, the sweep the solver
//! runs, red-then-black in red-black order) is applied by finite
//! differences and its outer eigenvalues are estimated by
//! 40 Arnoldi steps (Ritz values). Linear mixing with factor 1 contracts the
//! error by the largest |λ| = ρ per iteration. Any Krylov-type mixer,
//! Anderson included, cannot beat the best polynomial on the spectrum: on a
//! spectrum filling [−ρ, ρ] that is ρ / (1 + √(1 − ρ²)) per iteration, on
//! [0, ρ] it is (1 − √(1 − ρ)) / (1 + √(1 − ρ)) (Chebyshev polynomials;
//! Y. Saad, Iterative Methods for Sparse Linear Systems, 2nd ed., 2003,
//! §6.11), so asymptotically the iteration count can shrink by at most
//! ln(bound)/ln(ρ) against linear mixing. (A spectrum of a few isolated
//! eigenvalues would allow more; these Ritz values are dense.)
//!
//! Run: `cargo bench --bench born_spectrum`

use faer::Mat;
use qheat::C64;
use qheat::case::Case;
use qheat::scattering::ScatteringSelfEnergy;
use qheat::scba::{self, EnergyOrder, LeadTable, Silent};
use std::path::Path;

const ARNOLDI_STEPS: usize = 40;

fn flatten(s: &ScatteringSelfEnergy) -> Vec<f64> {
    let mut v: Vec<f64> = s.retarded.iter().map(|z| z.re).collect();
    v.extend(s.retarded.iter().map(|z| z.im));
    v.extend_from_slice(&s.inscatter);
    v
}

fn unflatten(v: &[f64], s: &mut ScatteringSelfEnergy) {
    let n = s.inscatter.len();
    for i in 0..n {
        s.retarded[i] = C64::new(v[i], v[n + i]);
        s.inscatter[i] = v[2 * n + i];
    }
}

fn norm(v: &[f64]) -> f64 {
    v.iter().map(|x| x * x).sum::<f64>().sqrt()
}

fn main() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo/peltier-barrier.toml");
    let r = Case::load(&path).unwrap().resolve().unwrap();
    let p = &r.problem;
    let params = r.scba.with_tolerance(1e-13).with_max_iterations(500);
    let fixed = scba::solve(p, &params, None, &mut Silent).unwrap();
    assert!(fixed.report.converged);
    let leads = LeadTable::new(p).unwrap();
    println!("case: {}", path.display());
    for order in [EnergyOrder::Simultaneous, EnergyOrder::RedBlack] {
        let map = |v: &[f64]| -> Vec<f64> {
            let mut s = fixed.sigma.clone();
            unflatten(v, &mut s);
            flatten(&scba::born_map(p, &leads, &s, order).unwrap().1)
        };
        let x0 = flatten(&fixed.sigma);
        let f0 = map(&x0);
        let h_step = 1e-6 * norm(&x0);
        // Start vector: a fixed pseudo-random pattern scaled like Σ0.
        let mut q: Vec<Vec<f64>> = Vec::new();
        let mut v: Vec<f64> = x0
            .iter()
            .enumerate()
            .map(|(i, x)| ((i * 7919 % 1000) as f64 / 1000.0 - 0.5) * x.abs())
            .collect();
        let n0 = norm(&v);
        v.iter_mut().for_each(|x| *x /= n0);
        q.push(v);
        let mut h = Mat::<f64>::zeros(ARNOLDI_STEPS + 1, ARNOLDI_STEPS);
        let mut steps = ARNOLDI_STEPS;
        for k in 0..ARNOLDI_STEPS {
            let xp: Vec<f64> = x0.iter().zip(&q[k]).map(|(a, b)| a + h_step * b).collect();
            let mut w: Vec<f64> = map(&xp)
                .iter()
                .zip(&f0)
                .map(|(a, b)| (a - b) / h_step)
                .collect();
            for (j, qj) in q.iter().enumerate() {
                let c: f64 = w.iter().zip(qj).map(|(a, b)| a * b).sum();
                h[(j, k)] = c;
                w.iter_mut().zip(qj).for_each(|(a, b)| *a -= c * b);
            }
            let nw = norm(&w);
            h[(k + 1, k)] = nw;
            if nw < 1e-14 {
                steps = k + 1;
                break;
            }
            w.iter_mut().for_each(|a| *a /= nw);
            q.push(w);
        }
        let hk = h.subrows(0, steps).subcols(0, steps).to_owned();
        let mut ev: Vec<C64> = hk.eigenvalues().unwrap();
        ev.sort_by(|a, b| b.norm().total_cmp(&a.norm()));
        let rho = ev[0].norm();
        println!(
            "\n{order:?} order: largest Ritz values of the Born Jacobian ({steps} Arnoldi steps)"
        );
        for e in ev.iter().take(8) {
            println!("  {:+.4} {:+.4}i   |λ| = {:.4}", e.re, e.im, e.norm());
        }
        let negative = ev.iter().take(8).any(|e| e.re < -0.5 * rho);
        let s = (1.0 - rho * rho).sqrt();
        // Spectrum filling [−ρ, ρ] (pairs ±λ) or [0, ρ] (no negative ones).
        let best = if negative {
            rho / (1.0 + s)
        } else {
            let s1 = (1.0 - rho).sqrt();
            (1.0 - s1) / (1.0 + s1)
        };
        println!(
            "  spectrum on {}: linear mixing contracts by {rho:.4} per iteration, \
             the best polynomial by {best:.4}: a mixer can cut iterations by at most {:.2}×",
            if negative { "[−ρ, ρ]" } else { "[0, ρ]" },
            best.ln() / rho.ln()
        );
    }
}
