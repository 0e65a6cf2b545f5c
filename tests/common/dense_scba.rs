//! A dense-matrix self-consistent Born solver, independent of the product's
//! recursion, self-energy builder and mixing: every energy inverts the whole
//! E − H − Σ and forms G^n = G Σ^in G†; phonon and dephasing self-energies
//! are written out again here from their defining sums; plain linear
//! mixing. Used as the reference for small devices and in the benchmarks.
//! With coupling matrices the self-energy is the full b × b block of every
//! cell, Σ_ii = Σ_M M G_ii M, written out here again with dense products.
#![allow(dead_code)]

use faer::Mat;
use faer::linalg::solvers::DenseSolveCore;
use qheat::C64;
use qheat::leads::broadening;
use qheat::model::Problem;
use qheat::rgf::TerminalFlows;
use qheat::scattering::{GreenBlocks, LocalGreen, ScatteringSelfEnergy};
use qheat::scba::{LeadTable, Pass};

pub struct DenseResult {
    pub pass: Pass,
    pub sigma: ScatteringSelfEnergy,
    pub iterations: usize,
}

/// Diagonals of G^r and G^n, bond flows, terminal flows and the diagonal
/// blocks [G^r_ii, G^n_ii] of one energy.
type DenseEnergy = (Vec<C64>, Vec<f64>, Vec<f64>, TerminalFlows, [Vec<C64>; 2]);

fn dense_energy(
    p: &Problem,
    leads: &LeadTable,
    k: usize,
    sig: &ScatteringSelfEnergy,
) -> DenseEnergy {
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
            m[(s, s)] += C64::new(e, 0.0);
            if sig.blocks.is_none() {
                m[(s, s)] -= sig.retarded[k * ns + s];
                sin[(s, s)] += C64::new(sig.inscatter[k * ns + s], 0.0);
            }
        }
        if sig.blocks.is_some() {
            let base = k * sig.sites + i * b * b;
            let p = &sig.inscatter[base..base + b * b];
            for r in 0..b {
                for c in 0..b {
                    m[(i * b + r, i * b + c)] -= sig.retarded[base + r * b + c];
                    // packed Hermitian: diagonal, real parts above, imaginary parts below
                    let v = if r == c {
                        C64::new(p[r * b + c], 0.0)
                    } else if r < c {
                        C64::new(p[r * b + c], p[c * b + r])
                    } else {
                        C64::new(p[c * b + r], -p[r * b + c])
                    };
                    sin[(i * b + r, i * b + c)] += v;
                }
            }
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
    let mut blocks = [Vec::new(), Vec::new()];
    for i in 0..n {
        for r in 0..b {
            for c in 0..b {
                blocks[0].push(g[(i * b + r, i * b + c)]);
                blocks[1].push(gn[(i * b + r, i * b + c)]);
            }
        }
    }
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
        blocks,
    )
}

fn scaled(m: &Mat<C64>, w: C64) -> Mat<C64> {
    Mat::from_fn(m.nrows(), m.ncols(), |r, c| m[(r, c)] * w)
}

/// Σ0 on b × b blocks from the defining sums: for each source M of a cell
/// (a per-site D as the source √D on that orbital) phonons give
/// Σ^in = M[(N+1) G^n(E+ħω) + N G^n(E−ħω)]M and
/// Σ^out = M[(N+1) G^p(E−ħω) + N G^p(E+ħω)]M, Σ^r = −i(Σ^in + Σ^out)/2;
/// dephasing Σ^r = M G^r M, Σ^in = M G^n M.
fn rebuild_blocks(p: &Problem, green: &GreenBlocks) -> ScatteringSelfEnergy {
    let ne = p.grid.count;
    let (n, b) = (p.device.cells(), p.device.orbitals);
    let bb = b * b;
    let mut s = ScatteringSelfEnergy::zeros_blocks(ne, n, b);
    let get = |v: &[C64], k: usize, i: usize| {
        let base = k * n * bb + i * bb;
        Mat::from_fn(b, b, |r, c| v[base + r * b + c])
    };
    let sources = |diag: &[f64], mats: &[Mat<C64>], i: usize| -> Vec<Mat<C64>> {
        let mut out: Vec<Mat<C64>> = mats.to_vec();
        for o in 0..b {
            if let Some(&d) = diag.get(i * b + o).filter(|d| **d != 0.0) {
                out.push(Mat::from_fn(b, b, |r, c| {
                    C64::new(if r == o && c == o { d.sqrt() } else { 0.0 }, 0.0)
                }));
            }
        }
        out
    };
    for k in 0..ne {
        for i in 0..n {
            let mut sin = Mat::<C64>::zeros(b, b);
            let mut sout = Mat::<C64>::zeros(b, b);
            for m in &p.scattering.phonons {
                let nb = m.occupation();
                let w = m.steps;
                for src in sources(&m.coupling_ev2, m.coupling_matrices.cell(i), i) {
                    for (kk, win, wout) in
                        [(k + w, nb + 1.0, nb), (k.wrapping_sub(w), nb, nb + 1.0)]
                    {
                        if kk >= ne {
                            continue;
                        }
                        let g = get(&green.retarded, kk, i);
                        let gn = get(&green.filled, kk, i);
                        let a = Mat::from_fn(b, b, |r, c| {
                            (g[(r, c)] - g[(c, r)].conj()) * C64::new(0.0, 1.0)
                        });
                        let gp = &a - &gn;
                        sin += scaled(&(&src * &gn * &src), C64::new(win, 0.0));
                        sout += scaled(&(&src * &gp * &src), C64::new(wout, 0.0));
                    }
                }
            }
            let mut sr = scaled(&(&sin + &sout), C64::new(0.0, -0.5));
            let sc = &p.scattering;
            for src in sources(&sc.dephasing_ev2, sc.dephasing_matrices.cell(i), i) {
                sr += &src * get(&green.retarded, k, i) * &src;
                sin += &src * get(&green.filled, k, i) * &src;
            }
            let base = k * n * bb + i * bb;
            for r in 0..b {
                for c in 0..b {
                    s.retarded[base + r * b + c] = sr[(r, c)];
                    s.inscatter[base + r * b + c] = if r <= c {
                        sin[(r, c)].re
                    } else {
                        sin[(c, r)].im
                    };
                }
            }
        }
    }
    s
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
    let mut sigma =
        ScatteringSelfEnergy::zeros_for(&p.scattering, ne, p.device.cells(), p.device.orbitals);
    let blocked = p.scattering.uses_blocks();
    let (n, b) = (p.device.cells(), p.device.orbitals);
    let mut iterations = 0;
    loop {
        let mut green = LocalGreen {
            sites: ns,
            retarded: Vec::with_capacity(ne * ns),
            filled: Vec::with_capacity(ne * ns),
        };
        let mut bond = Vec::new();
        let mut flows = Vec::new();
        let mut blocks = GreenBlocks::zeros(0, n, b);
        for k in 0..ne {
            let (r, nn, bd, f, [gb, gnb]) = dense_energy(p, &leads, k, &sigma);
            green.retarded.extend(r);
            green.filled.extend(nn);
            bond.extend(bd);
            flows.push(f);
            blocks.retarded.extend(gb);
            blocks.filled.extend(gnb);
        }
        iterations += 1;
        let next = if blocked {
            rebuild_blocks(p, &blocks)
        } else {
            rebuild(p, &green)
        };
        let blocks = blocked.then_some(blocks);
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
                pass: Pass {
                    green,
                    bond,
                    flows,
                    blocks,
                    contact_flows: Default::default(),
                },
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
        for i in 0..sigma.inscatter.len() {
            sigma.inscatter[i] = 0.5 * (sigma.inscatter[i] + next.inscatter[i]);
            sigma.retarded[i] = (sigma.retarded[i] + next.retarded[i]) * 0.5;
        }
    }
}
