//! A dense-matrix self-consistent Born solver, independent of the product's
//! recursion, self-energy builder and mixing: every energy inverts the whole
//! E − H − Σ and forms G^n = G Σ^in G†; phonon and dephasing self-energies
//! are written out again here from their defining sums; plain linear
//! mixing. Used as the reference for small devices and in the benchmarks.
#![allow(dead_code)]

use faer::Mat;
use faer::linalg::solvers::DenseSolveCore;
use qheat::C64;
use qheat::leads::broadening;
use qheat::model::Problem;
use qheat::rgf::TerminalFlows;
use qheat::scattering::{LocalGreen, ScatteringSelfEnergy};
use qheat::scba::{LeadTable, Pass};

pub struct DenseResult {
    pub pass: Pass,
    pub sigma: ScatteringSelfEnergy,
    pub iterations: usize,
}

fn dense_energy(
    p: &Problem,
    leads: &LeadTable,
    k: usize,
    sig: &ScatteringSelfEnergy,
) -> (Vec<C64>, Vec<f64>, Vec<f64>, TerminalFlows) {
    let d = &p.device;
    let (n, b) = (d.cells(), d.orbitals);
    let dim = n * b;
    let ns = dim;
    let e = p.grid.energy(k);
    let mut m = Mat::<C64>::zeros(dim, dim);
    let mut sin = Mat::<C64>::zeros(dim, dim);
    for i in 0..n {
        for r in 0..b {
            for c in 0..b {
                m[(i * b + r, i * b + c)] = -d.onsite[i][(r, c)];
            }
            let s = i * b + r;
            m[(s, s)] += C64::new(e, 0.0) - sig.retarded[k * ns + s];
            sin[(s, s)] += C64::new(sig.inscatter[k * ns + s], 0.0);
        }
        if i + 1 < n {
            for r in 0..b {
                for c in 0..b {
                    m[(i * b + r, (i + 1) * b + c)] = -d.coupling[i][(r, c)];
                    m[((i + 1) * b + c, i * b + r)] = -d.coupling[i][(r, c)].conj();
                }
            }
        }
    }
    let gl = broadening(&leads.left[k]);
    let gr = broadening(&leads.right[k]);
    let fl = p.left.occupation(e);
    let fr = p.right.occupation(e);
    let last = (n - 1) * b;
    for r in 0..b {
        for c in 0..b {
            m[(r, c)] -= leads.left[k][(r, c)];
            m[(last + r, last + c)] -= leads.right[k][(r, c)];
            sin[(r, c)] += gl[(r, c)] * fl;
            sin[(last + r, last + c)] += gr[(r, c)] * fr;
        }
    }
    let g = m.partial_piv_lu().inverse();
    let gn = &g * &sin * g.adjoint();
    let diag_r = (0..dim).map(|s| g[(s, s)]).collect();
    let diag_n = (0..dim).map(|s| gn[(s, s)].re).collect();
    let mut bond = Vec::new();
    for i in 0..n.saturating_sub(1) {
        let mut t = C64::new(0.0, 0.0);
        for r in 0..b {
            for c in 0..b {
                let h = d.coupling[i][(r, c)];
                // i (H G^n_{i+1,i} − G^n_{i,i+1} H†)
                t += h * gn[((i + 1) * b + c, i * b + r)]
                    - gn[(i * b + r, (i + 1) * b + c)] * h.conj();
            }
        }
        bond.push((t * C64::new(0.0, 1.0)).re);
    }
    let flow = |off: usize, gamma: &Mat<C64>, f: f64| {
        let (mut inflow, mut outflow) = (0.0, 0.0);
        for r in 0..b {
            for c in 0..b {
                let a = (g[(off + c, off + r)] - g[(off + r, off + c)].conj()) * C64::new(0.0, 1.0);
                inflow += (gamma[(r, c)] * f * a).re;
                outflow += (gamma[(r, c)] * gn[(off + c, off + r)]).re;
            }
        }
        (inflow - outflow, inflow + outflow)
    };
    let (left, left_gross) = flow(0, &gl, fl);
    let (right, right_gross) = flow(last, &gr, fr);
    let t1n = {
        let g1n = Mat::from_fn(b, b, |r, c| g[(r, last + c)]);
        let prod = &gl * &g1n * &gr * g1n.adjoint();
        (0..b).map(|i| prod[(i, i)].re).sum()
    };
    (
        diag_r,
        diag_n,
        bond,
        TerminalFlows {
            left,
            right,
            transmission: t1n,
            left_gross,
            right_gross,
        },
    )
}

/// Σ0 from the defining sums (phonons: emission/absorption with G^n and
/// G^p at E ± ħω; dephasing: d G).
fn rebuild(p: &Problem, green: &LocalGreen) -> ScatteringSelfEnergy {
    let ne = p.grid.count;
    let ns = green.sites;
    let mut s = ScatteringSelfEnergy::zeros(ne, ns);
    for k in 0..ne {
        for site in 0..ns {
            let idx = k * ns + site;
            let mut sin = 0.0;
            let mut sout = 0.0;
            for m in &p.scattering.phonons {
                let d = m.coupling_ev2[site];
                let nb = m.occupation();
                let w = m.steps;
                let gn_at = |kk: Option<usize>| {
                    kk.filter(|&x| x < ne)
                        .map(|x| green.filled[x * ns + site])
                        .unwrap_or(0.0)
                };
                let gp_at = |kk: Option<usize>| {
                    kk.filter(|&x| x < ne)
                        .map(|x| {
                            -2.0 * green.retarded[x * ns + site].im - green.filled[x * ns + site]
                        })
                        .unwrap_or(0.0)
                };
                let up = Some(k + w);
                let down = k.checked_sub(w);
                sin += d * ((nb + 1.0) * gn_at(up) + nb * gn_at(down));
                sout += d * ((nb + 1.0) * gp_at(down) + nb * gp_at(up));
            }
            let mut sr = C64::new(0.0, -0.5 * (sin + sout));
            if let Some(&dd) = p.scattering.dephasing_ev2.get(site) {
                sr += green.retarded[idx] * dd;
                sin += dd * green.filled[idx];
            }
            s.retarded[idx] = sr;
            s.inscatter[idx] = sin;
        }
    }
    s
}

/// Self-consistent Born loop to a relative change ≤ `tol` in Σ0. Panics when
/// `max_iter` iterations do not reach it: a caller comparing against this
/// reference must never receive an unconverged result.
pub fn dense_scba(p: &Problem, tol: f64, max_iter: usize) -> DenseResult {
    born_loop(p, tol, max_iter, true)
}

/// Exactly `sweeps` iterations of the same loop, with no claim of
/// convergence (for timing one sweep in the benchmarks).
pub fn dense_sweeps(p: &Problem, sweeps: usize) -> DenseResult {
    born_loop(p, 0.0, sweeps, false)
}

fn born_loop(p: &Problem, tol: f64, max_iter: usize, must_converge: bool) -> DenseResult {
    assert!(
        !p.scattering.hermitian_part,
        "the dense reference neglects the Hermitian part"
    );
    let leads = LeadTable::new(p).unwrap();
    let ne = p.grid.count;
    let ns = p.sites();
    let mut sigma = ScatteringSelfEnergy::zeros(ne, ns);
    let mut iterations = 0;
    loop {
        let mut green = LocalGreen {
            sites: ns,
            retarded: Vec::with_capacity(ne * ns),
            filled: Vec::with_capacity(ne * ns),
        };
        let mut bond = Vec::new();
        let mut flows = Vec::new();
        for k in 0..ne {
            let (r, n, b, f) = dense_energy(p, &leads, k, &sigma);
            green.retarded.extend(r);
            green.filled.extend(n);
            bond.extend(b);
            flows.push(f);
        }
        iterations += 1;
        let next = rebuild(p, &green);
        let diff: f64 = next
            .inscatter
            .iter()
            .zip(&sigma.inscatter)
            .map(|(a, b)| (a - b).powi(2))
            .sum::<f64>()
            + next
                .retarded
                .iter()
                .zip(&sigma.retarded)
                .map(|(a, b)| (a - b).norm_sqr())
                .sum::<f64>();
        let scale: f64 = next.inscatter.iter().map(|a| a * a).sum::<f64>()
            + next.retarded.iter().map(|a| a.norm_sqr()).sum::<f64>();
        let residual = diff.sqrt() / scale.sqrt().max(1e-300);
        if residual <= tol || (!must_converge && iterations >= max_iter) {
            return DenseResult {
                pass: Pass { green, bond, flows },
                sigma,
                iterations,
            };
        }
        // A reference that stopped short is no reference: never hand back an
        // unconverged Σ0 as if it were the answer.
        assert!(
            iterations < max_iter,
            "dense reference did not converge: relative change {residual:e} > {tol:e} \
             after {iterations} iterations (raise max_iter or weaken the coupling)"
        );
        for i in 0..ne * ns {
            sigma.inscatter[i] = 0.5 * (sigma.inscatter[i] + next.inscatter[i]);
            sigma.retarded[i] = (sigma.retarded[i] + next.retarded[i]) * 0.5;
        }
    }
}
