//! Mixing of successive scattering self-energies.
//!
//! The mixed quantity is the vector (Re Σ^r_0, Im Σ^r_0, Σ^in_0) over all
//! energies and orbital sites. Anderson acceleration in the form of
//! H. F. Walker and P. Ni, SIAM J. Numer. Anal. 49, 1715 (2011) (after
//! D. G. Anderson, J. ACM 12, 547 (1965)): with residuals r_j = F(x_j) − x_j
//! and differences ΔR, ΔX of the last m iterates, solve
//! min_γ ‖r_k − ΔR γ‖ and take x_k+1 = x_k + β r_k − (ΔX + β ΔR) γ.
//! Safeguard: when the residual norm grows, the history is dropped and a
//! damped linear step is taken.

#![allow(clippy::needless_range_loop)] // small dense linear algebra reads best with indices

use super::params::Mixing;
use crate::C64;
use crate::scattering::ScatteringSelfEnergy;
use std::collections::VecDeque;

/// Mixing state across Born iterations.
///
/// Internally a Σ0 is a vector of L = 3·E·N·b numbers, the three parts of
/// each orbital site side by side (Re Σ^r_0, Im Σ^r_0, Σ^in_0).
///
/// Memory: the Anderson state holds the last input x and residual r, and
/// for each of the m stored steps the residual difference ΔR_j and
/// U_j = ΔX_j + β ΔR_j, plus one buffer for the next residual:
/// (2m + 3)·L f64, i.e. (2m + 3)·24 bytes per energy and orbital site.
/// Linear mixing keeps nothing.
///
/// Cost: each iteration reads and writes these vectors in two fused
/// passes (residual, new differences and every inner product in the first;
/// the update in the second), in parallel over fixed chunks whose partial
/// sums are added in order, so any thread count gives the same numbers.
pub struct Mixer {
    kind: Mixing,
    /// Numbers mixed per orbital site: 3, or 2 when Re Σ^r_0 is zero for
    /// every input (no Hermitian part, no dephasing) and is left out.
    parts: usize,
    /// Last input x_{k−1} and residual r_{k−1}.
    prev: Option<(Vec<f64>, Vec<f64>)>,
    /// ΔR_j and U_j of the stored steps, oldest first.
    dr: VecDeque<Vec<f64>>,
    u: VecDeque<Vec<f64>>,
    /// Gram[i][j] = ΔR_i·ΔR_j of the stored steps (same order).
    gram: VecDeque<VecDeque<f64>>,
    /// Buffers no longer in use, reused before allocating.
    spare: Vec<Vec<f64>>,
    last_norm: f64,
}

/// Orbital sites per parallel chunk (three numbers each).
const CHUNK_SITES: usize = 1 << 12;

impl Mixer {
    /// A fresh mixer.
    pub fn new(kind: Mixing) -> Self {
        Self::with_real_part(kind, true)
    }

    /// A fresh mixer that mixes Re Σ^r_0 only when `real_part` is true;
    /// otherwise the next input takes Re Σ^r_0 from the image F(x), which
    /// must then be zero everywhere, and a third less memory is streamed.
    pub fn with_real_part(kind: Mixing, real_part: bool) -> Self {
        Self {
            kind,
            parts: if real_part { 3 } else { 2 },
            prev: None,
            dr: VecDeque::new(),
            u: VecDeque::new(),
            gram: VecDeque::new(),
            spare: Vec::new(),
            last_norm: f64::INFINITY,
        }
    }

    /// A buffer of `len` numbers whose contents will all be overwritten.
    fn buffer(&mut self, len: usize) -> Vec<f64> {
        match self.spare.pop() {
            Some(mut v) => {
                v.resize(len, 0.0);
                v
            }
            // Fresh zeroed memory from the allocator: no separate pass that
            // writes zeros before the pass that writes the contents.
            None => vec![0.0; len],
        }
    }

    /// Replace `x` by the next input given its image `fx`; returns which
    /// step was taken ("linear", "anderson" or "restart" when the residual
    /// grew and the history was dropped for a damped linear step).
    pub fn update(
        &mut self,
        x: &mut ScatteringSelfEnergy,
        fx: &ScatteringSelfEnergy,
    ) -> &'static str {
        let (depth, beta) = match self.kind {
            Mixing::Linear { factor } => {
                linear_step(x, fx, factor);
                return "linear";
            }
            Mixing::Anderson { depth, damping } => (depth, damping),
        };
        let len = self.parts * x.inscatter.len();
        let mut r = self.buffer(len);
        let mut prev = self.prev.take();
        let old = if prev.is_some() { self.dr.len() } else { 0 };
        let sums = self.residual_pass(x, fx, &mut r, prev.as_mut(), beta, old);
        let norm = sums[0].sqrt();
        let grew = norm > self.last_norm;
        self.last_norm = norm;
        let rhs = self.record_step(&sums, prev, grew, depth, old);
        let m = self.dr.len();
        let gamma = least_squares(&self.gram, &rhs);
        // Pass 2: x_{k+1} = x_k + β r_k − Σ_j γ_j U_j, keeping x_k.
        let step = if m == 0 && grew { 0.5 * beta } else { beta };
        let mut keep = self.buffer(len);
        self.step_pass(x, fx, &r, &gamma, step, &mut keep);
        self.prev = Some((keep, r));
        if m > 0 {
            "anderson"
        } else if grew {
            "restart"
        } else {
            "linear"
        }
    }

    /// Pass 1, per site chunk: r = F(x) − x; with a previous step also
    /// ΔR_new = r − r_prev (in r_prev's buffer) and U_new = x − x_prev +
    /// β ΔR_new (in x_prev's buffer). Returns the sums ‖r‖²,
    /// ΔR_new·ΔR_new, ΔR_new·r, then ΔR_j·ΔR_new and ΔR_j·r for each of
    /// the `old` stored steps j.
    fn residual_pass(
        &self,
        x: &ScatteringSelfEnergy,
        fx: &ScatteringSelfEnergy,
        r: &mut [f64],
        prev: Option<&mut (Vec<f64>, Vec<f64>)>,
        beta: f64,
        old: usize,
    ) -> Vec<f64> {
        use rayon::prelude::*;
        let parts = self.parts;
        let width = 3 + 2 * old;
        let dr = &self.dr;
        let xr = x;
        let cs = parts * CHUNK_SITES;
        let body = |c: usize, rc: &mut [f64], pair: Option<(&mut [f64], &mut [f64])>| {
            let mut acc = vec![0.0; width];
            let first = c * CHUNK_SITES;
            let sites = first..first + rc.len() / parts;
            for ((t, xs), fs) in rc
                .chunks_exact_mut(parts)
                .zip(site_values(xr, sites.clone(), parts))
                .zip(site_values(fx, sites.clone(), parts))
            {
                for p in 0..parts {
                    t[p] = fs[p] - xs[p];
                }
            }
            acc[0] = dot(rc, rc);
            if let Some((xp, rp)) = pair {
                for (t, xs) in xp
                    .chunks_exact_mut(parts)
                    .zip(site_values(xr, sites, parts))
                {
                    for p in 0..parts {
                        t[p] = xs[p] - t[p];
                    }
                }
                for ((d, u), ri) in rp.iter_mut().zip(xp.iter_mut()).zip(rc.iter()) {
                    *d = ri - *d;
                    *u += beta * *d;
                }
                let (dd, dr_) = dot2(rp, rp, rc);
                acc[1] = dd;
                acc[2] = dr_;
                let g = c * cs..c * cs + rc.len();
                for (j, drj) in dr.iter().enumerate() {
                    let (a, b) = dot2(&drj[g.clone()], rp, rc);
                    acc[3 + 2 * j] = a;
                    acc[4 + 2 * j] = b;
                }
            }
            acc
        };
        let parts: Vec<Vec<f64>> = match prev {
            Some((xp, rp)) => r
                .par_chunks_mut(cs)
                .zip(xp.par_chunks_mut(cs).zip(rp.par_chunks_mut(cs)))
                .enumerate()
                .map(|(c, (rc, (xc, pc)))| body(c, rc, Some((xc, pc))))
                .collect(),
            None => r
                .par_chunks_mut(cs)
                .enumerate()
                .map(|(c, rc)| body(c, rc, None))
                .collect(),
        };
        let mut tot = vec![0.0; width];
        for part in &parts {
            for (t, v) in tot.iter_mut().zip(part) {
                *t += v;
            }
        }
        tot
    }

    /// Keep the step just formed (`prev`: U_new and ΔR_new) in the
    /// history, or drop the whole history when the residual grew; returns
    /// ΔR_j·r for the steps kept.
    fn record_step(
        &mut self,
        sums: &[f64],
        mut prev: Option<(Vec<f64>, Vec<f64>)>,
        grew: bool,
        depth: usize,
        old: usize,
    ) -> Vec<f64> {
        let mut rhs: Vec<f64> = (0..old).map(|j| sums[4 + 2 * j]).collect();
        if grew {
            // Drop the whole history, the step just formed included.
            self.spare.extend(self.dr.drain(..));
            self.spare.extend(self.u.drain(..));
            self.gram.clear();
            rhs.clear();
            if let Some((xp, rp)) = prev.take() {
                self.spare.push(xp);
                self.spare.push(rp);
            }
        } else if let Some((u_new, dr_new)) = prev.take() {
            if depth > 0 {
                for (j, row) in self.gram.iter_mut().enumerate() {
                    row.push_back(sums[3 + 2 * j]);
                }
                let mut row: VecDeque<f64> = (0..old).map(|j| sums[3 + 2 * j]).collect();
                row.push_back(sums[1]);
                self.gram.push_back(row);
                self.dr.push_back(dr_new);
                self.u.push_back(u_new);
                rhs.push(sums[2]);
                if self.dr.len() > depth {
                    self.spare.push(self.dr.pop_front().expect("non-empty"));
                    self.spare.push(self.u.pop_front().expect("non-empty"));
                    self.gram.pop_front();
                    for row in &mut self.gram {
                        row.pop_front();
                    }
                    rhs.remove(0);
                }
            } else {
                self.spare.push(u_new);
                self.spare.push(dr_new);
            }
        }
        rhs
    }

    /// Pass 2: x ← x + step·r − Σ_j γ_j U_j, the old x kept in `keep`.
    fn step_pass(
        &self,
        x: &mut ScatteringSelfEnergy,
        fx: &ScatteringSelfEnergy,
        r: &[f64],
        gamma: &[f64],
        step: f64,
        keep: &mut [f64],
    ) {
        use rayon::prelude::*;
        let parts = self.parts;
        {
            let u = &self.u;
            x.retarded
                .par_chunks_mut(CHUNK_SITES)
                .zip(x.inscatter.par_chunks_mut(CHUNK_SITES))
                .zip(keep.par_chunks_mut(parts * CHUNK_SITES))
                .enumerate()
                .for_each(|(c, ((xr, xi), kc))| {
                    let first = c * CHUNK_SITES;
                    let g = parts * first..parts * first + kc.len();
                    for ((t, zr), zi) in kc.chunks_exact_mut(parts).zip(xr.iter()).zip(xi.iter()) {
                        if parts == 3 {
                            t.copy_from_slice(&[zr.re, zr.im, *zi]);
                        } else {
                            t.copy_from_slice(&[zr.im, *zi]);
                        }
                    }
                    let mut next: Vec<f64> = kc
                        .iter()
                        .zip(&r[g.clone()])
                        .map(|(x, r)| x + step * r)
                        .collect();
                    for (uj, &gj) in u.iter().zip(gamma) {
                        if gj != 0.0 {
                            for (v, w) in next.iter_mut().zip(&uj[g.clone()]) {
                                *v -= gj * w;
                            }
                        }
                    }
                    for (s, ((t, zr), zi)) in next
                        .chunks_exact(parts)
                        .zip(xr.iter_mut())
                        .zip(xi.iter_mut())
                        .enumerate()
                    {
                        if parts == 3 {
                            *zr = C64::new(t[0], t[1]);
                            *zi = t[2];
                        } else {
                            *zr = C64::new(fx.retarded[first + s].re, t[0]);
                            *zi = t[1];
                        }
                    }
                });
        }
    }
}

/// x ← x + factor·(F(x) − x) on every number.
fn linear_step(x: &mut ScatteringSelfEnergy, fx: &ScatteringSelfEnergy, factor: f64) {
    use rayon::prelude::*;
    x.retarded
        .par_iter_mut()
        .zip(x.inscatter.par_iter_mut())
        .zip(fx.retarded.par_iter().zip(&fx.inscatter))
        .for_each(|((r, i), (fr, fi))| {
            *r += (fr - *r) * factor;
            *i += factor * (fi - *i);
        });
}

/// The mixed numbers of the orbital sites `sites` of `s`: (Re Σ^r_0,
/// Im Σ^r_0, Σ^in_0) for 3 parts, (Im Σ^r_0, Σ^in_0, unused) for 2.
fn site_values(
    s: &ScatteringSelfEnergy,
    sites: std::ops::Range<usize>,
    parts: usize,
) -> impl Iterator<Item = [f64; 3]> + '_ {
    s.retarded[sites.clone()]
        .iter()
        .zip(&s.inscatter[sites])
        .map(move |(r, i)| {
            if parts == 3 {
                [r.re, r.im, *i]
            } else {
                [r.im, *i, 0.0]
            }
        })
}

/// a·b with four partial sums (so that the loop vectorises), added in a
/// fixed order.
fn dot(a: &[f64], b: &[f64]) -> f64 {
    let mut s = [0.0; 4];
    let n = a.len() / 4 * 4;
    for (x, y) in a[..n].chunks_exact(4).zip(b[..n].chunks_exact(4)) {
        for l in 0..4 {
            s[l] += x[l] * y[l];
        }
    }
    let mut ab = (s[0] + s[1]) + (s[2] + s[3]);
    for i in n..a.len() {
        ab += a[i] * b[i];
    }
    ab
}

/// (a·b, a·c) in one pass over a, with four partial sums each.
fn dot2(a: &[f64], b: &[f64], c: &[f64]) -> (f64, f64) {
    let mut s = [0.0; 4];
    let mut t = [0.0; 4];
    let n = a.len() / 4 * 4;
    for ((x, y), z) in a[..n]
        .chunks_exact(4)
        .zip(b[..n].chunks_exact(4))
        .zip(c[..n].chunks_exact(4))
    {
        for l in 0..4 {
            s[l] += x[l] * y[l];
            t[l] += x[l] * z[l];
        }
    }
    let mut ab = (s[0] + s[1]) + (s[2] + s[3]);
    let mut ac = (t[0] + t[1]) + (t[2] + t[3]);
    for i in n..a.len() {
        ab += a[i] * b[i];
        ac += a[i] * c[i];
    }
    (ab, ac)
}

/// Least squares min ‖r − ΔR γ‖ from the Gram matrix and ΔR·r, by a
/// Cholesky factorisation that drops columns whose pivot falls below 1e-14
/// of their squared norm (numerically dependent differences).
fn least_squares(gram: &VecDeque<VecDeque<f64>>, rhs: &[f64]) -> Vec<f64> {
    let m = rhs.len();
    let mut gamma = vec![0.0; m];
    let mut l = vec![vec![0.0; m]; m];
    let mut kept = vec![false; m];
    for j in 0..m {
        let mut d = gram[j][j];
        for k in 0..j {
            if kept[k] {
                d -= l[j][k] * l[j][k];
            }
        }
        if d <= 1e-14 * gram[j][j] || d <= 0.0 {
            continue;
        }
        kept[j] = true;
        let dj = d.sqrt();
        l[j][j] = dj;
        for i in j + 1..m {
            let mut s = gram[i][j];
            for k in 0..j {
                if kept[k] {
                    s -= l[i][k] * l[j][k];
                }
            }
            l[i][j] = s / dj;
        }
    }
    let mut y = vec![0.0; m];
    for i in 0..m {
        if kept[i] {
            let mut s = rhs[i];
            for k in 0..i {
                if kept[k] {
                    s -= l[i][k] * y[k];
                }
            }
            y[i] = s / l[i][i];
        }
    }
    for i in (0..m).rev() {
        if kept[i] {
            let mut s = y[i];
            for k in i + 1..m {
                if kept[k] {
                    s -= l[k][i] * gamma[k];
                }
            }
            gamma[i] = s / l[i][i];
        }
    }
    gamma
}

#[cfg(test)]
mod tests {
    use super::*;

    fn state(v: &[f64]) -> ScatteringSelfEnergy {
        let n = v.len() / 3;
        let mut s = ScatteringSelfEnergy::zeros(1, n);
        unflatten(v, &mut s);
        s
    }

    fn unflatten(v: &[f64], s: &mut ScatteringSelfEnergy) {
        let n = s.inscatter.len();
        for i in 0..n {
            s.retarded[i] = C64::new(v[i], v[n + i]);
            s.inscatter[i] = v[2 * n + i];
        }
    }

    fn flat(s: &ScatteringSelfEnergy) -> Vec<f64> {
        let mut v: Vec<f64> = s.retarded.iter().map(|z| z.re).collect();
        v.extend(s.retarded.iter().map(|z| z.im));
        v.extend_from_slice(&s.inscatter);
        v
    }

    #[test]
    fn a_growing_residual_drops_the_history_and_damps_the_step() {
        let beta = 0.8;
        let mut m = Mixer::new(Mixing::Anderson {
            depth: 4,
            damping: beta,
        });
        let mut x = state(&[0.0; 6]);
        assert_eq!(m.update(&mut x, &state(&[1.0; 6])), "linear");
        // Residual 10 per element: larger than the first one (1).
        let x0 = flat(&x);
        let fx: Vec<f64> = x0.iter().map(|v| v + 10.0).collect();
        assert_eq!(m.update(&mut x, &state(&fx)), "restart");
        for (a, b) in flat(&x).iter().zip(&x0) {
            assert!((a - (b + 0.5 * beta * 10.0)).abs() < 1e-14);
        }
        // With a shrinking residual the history builds up again.
        let x1 = flat(&x);
        let fx: Vec<f64> = x1.iter().map(|v| v + 1.0).collect();
        assert_eq!(m.update(&mut x, &state(&fx)), "anderson");
    }

    /// F(x) = A x + c with a contraction A whose slowest mode decays by
    /// 0.95 per step: linear mixing crawls, Anderson solves the linear
    /// problem in about as many steps as A has distinct eigenvalues.
    #[test]
    fn anderson_beats_linear_mixing_on_a_linear_map() {
        let eig = [0.95, 0.5, -0.3, 0.1, 0.8, 0.0];
        let c = [1.0, -2.0, 0.5, 3.0, 0.25, -1.0];
        let f = |x: &[f64]| -> Vec<f64> { (0..6).map(|i| eig[i] * x[i] + c[i]).collect() };
        let fixed: Vec<f64> = (0..6).map(|i| c[i] / (1.0 - eig[i])).collect();
        let run = |kind: Mixing| {
            let mut m = Mixer::new(kind);
            let mut x = state(&[0.0; 6]);
            for it in 1..=2000 {
                let fx = f(&flat(&x));
                let err = flat(&x)
                    .iter()
                    .zip(&fixed)
                    .map(|(a, b)| (a - b).abs())
                    .fold(0.0, f64::max);
                if err < 1e-10 {
                    return it;
                }
                m.update(&mut x, &state(&fx));
            }
            usize::MAX
        };
        let anderson = run(Mixing::Anderson {
            depth: 6,
            damping: 0.8,
        });
        let linear = run(Mixing::Linear { factor: 1.0 });
        assert!(anderson <= 20, "anderson took {anderson}");
        assert!(
            linear > 5 * anderson,
            "linear {linear} vs anderson {anderson}"
        );
    }

    /// With Re Σ^r_0 zero in every image, leaving it out of the mixed
    /// vector changes nothing but rounding; a non-zero real part of the
    /// start is replaced by the image's zero.
    #[test]
    fn leaving_out_a_zero_real_part_gives_the_same_iterates() {
        // Sites: 4; F(x) = A x + c on (Im, in), Re part of F always zero.
        let eig = [0.9, -0.6, 0.3, 0.7, -0.2, 0.5, 0.1, 0.8];
        let c = [1.0, -2.0, 0.5, 3.0, 0.25, -1.0, 2.0, -0.5];
        let f = |x: &[f64]| -> Vec<f64> {
            let mut out = vec![0.0; 12];
            for i in 0..8 {
                out[4 + i] = eig[i] * x[4 + i] + c[i];
            }
            state(&out)
                .retarded
                .iter()
                .for_each(|z| assert_eq!(z.re, 0.0));
            out
        };
        let kind = Mixing::Anderson {
            depth: 3,
            damping: 1.0,
        };
        let mut three = Mixer::new(kind);
        let mut two = Mixer::with_real_part(kind, false);
        let mut x3 = state(&[0.0; 12]);
        let mut x2 = state(&[0.0; 12]);
        for _ in 0..12 {
            let (f3, f2) = (f(&flat(&x3)), f(&flat(&x2)));
            let s3 = three.update(&mut x3, &state(&f3));
            let s2 = two.update(&mut x2, &state(&f2));
            assert_eq!(s3, s2);
            for (a, b) in flat(&x3).iter().zip(&flat(&x2)) {
                assert!((a - b).abs() <= 1e-12 * (1.0 + a.abs()), "{a} vs {b}");
            }
        }
        // A start with a real part (say, warm from a case with dephasing).
        let mut two = Mixer::with_real_part(kind, false);
        let mut start = vec![0.0; 12];
        start[..4].copy_from_slice(&[0.5, -0.25, 1.0, 2.0]);
        let mut x = state(&start);
        for _ in 0..3 {
            let fx = f(&flat(&x));
            two.update(&mut x, &state(&fx));
            assert!(flat(&x)[..4].iter().all(|&v| v == 0.0));
        }
    }
}
