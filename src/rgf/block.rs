//! The b > 1 path: block recursion on preallocated matrices.
//!
//! Per cell, with X_i = g_i τ_i kept from the forward sweep and
//! W = τ† g_i, GW = G_{i+1} W, Q = τ† g^n_i, P = G_{i+1} Q, V = G^n_{i+1} X_i†,
//! Z = X_i P:
//!
//! ```text
//! forward:  M_i = E − H_ii − Σ_ii − τ† X_{i−1};  g_i = M_i⁻¹ (one LU);
//!           S_i = Σ^in_ii + τ† (g^n_{i−1} τ);    g^n_i = (g_i S_i) g_i†;
//!           X_i = g_i τ_i
//! backward: G_ii   = g_i + X_i GW
//!           G^n_ii = g^n_i + X_i V + Z + Z†   (X_i V = X_i G^n_{i+1} X_i†)
//!           G_{i+1,i} = GW,   G^n_{i+1,i} = P + V
//! ```
//!
//! Z + Z† is the pair g τ G τ† g^n + g^n τ G† τ† g† of the module formula
//! (g^n is Hermitian). Counting an LU plus inverse as one b³ complex
//! multiply-add, a cell costs 7 (forward) + 8 (backward) b³ complex
//! multiply-adds, i.e. 120 b³ real flops; the transmission adds 8 b³.
//!
//! The inverse g_i is formed explicitly because the backward sweep needs the
//! whole block (G_ii = g_i + …); the one LU factorisation of M_i serves both
//! G^r and G^n. Every matrix lives in the [`Workspace`]: the loop over cells
//! does not allocate.

use super::{BlockExchange, EnergyInput, EnergyOutput, RgfError, TerminalFlows, Workspace};
use crate::C64;
use faer::dyn_stack::{MemBuffer, MemStack, StackReq};
use faer::linalg::lu::partial_pivoting::{factor, inverse};
use faer::linalg::matmul::matmul;
use faer::{Accum, Mat, MatMut, MatRef, Par};

const ZERO: C64 = C64::new(0.0, 0.0);
const ONE: C64 = C64::new(1.0, 0.0);
const MINUS_ONE: C64 = C64::new(-1.0, 0.0);

/// Scratch matrices of the block path (all b × b).
pub(super) struct BlockScratch {
    x: Vec<Mat<C64>>,
    m: Mat<C64>,
    t: [Mat<C64>; 7],
    perm: Vec<usize>,
    perm_inv: Vec<usize>,
    stack: MemBuffer,
}

impl BlockScratch {
    pub(super) fn new(cells: usize, b: usize) -> Self {
        let req = StackReq::any_of(&[
            factor::lu_in_place_scratch::<usize, C64>(b, b, Par::Seq, Default::default()),
            inverse::inverse_scratch::<usize, C64>(b, Par::Seq),
        ]);
        Self {
            x: (0..cells.saturating_sub(1))
                .map(|_| Mat::zeros(b, b))
                .collect(),
            m: Mat::zeros(b, b),
            t: std::array::from_fn(|_| Mat::zeros(b, b)),
            perm: vec![0; b],
            perm_inv: vec![0; b],
            stack: MemBuffer::new(req),
        }
    }
}

/// An operand: a block, or its adjoint.
#[derive(Clone, Copy)]
enum Op<'a> {
    N(MatRef<'a, C64>),
    H(MatRef<'a, C64>),
}

impl Op<'_> {
    #[inline(always)]
    fn at(&self, r: usize, c: usize) -> C64 {
        match self {
            Op::N(m) => m[(r, c)],
            Op::H(m) => m[(c, r)].conj(),
        }
    }
}

/// dst ← dst + alpha·lhs·rhs (`Accum::Add`) or alpha·lhs·rhs
/// (`Accum::Replace`) on one thread. Blocks of up to [`SMALL`] orbitals use
/// a plain triple loop (faster than the general kernel's dispatch at that
/// size; see `benches/rgf.rs`).
#[inline]
fn mul(dst: MatMut<'_, C64>, accum: Accum, lhs: Op<'_>, rhs: Op<'_>, alpha: C64) {
    if dst.nrows() <= SMALL {
        small_mul(dst, accum, lhs, rhs, alpha);
        return;
    }
    match (lhs, rhs) {
        (Op::N(a), Op::N(b)) => matmul(dst, accum, a, b, alpha, Par::Seq),
        (Op::N(a), Op::H(b)) => matmul(dst, accum, a, b.adjoint(), alpha, Par::Seq),
        (Op::H(a), Op::N(b)) => matmul(dst, accum, a.adjoint(), b, alpha, Par::Seq),
        (Op::H(a), Op::H(b)) => matmul(dst, accum, a.adjoint(), b.adjoint(), alpha, Par::Seq),
    }
}

/// Largest block size handled by [`small_mul`]: measured in benches/rgf.rs
/// (`small_product`), the plain loop wins at b = 2, ties at b = 4 and loses
/// by 5× at b = 8.
const SMALL: usize = 3;

/// Plain product for small blocks.
fn small_mul(mut dst: MatMut<'_, C64>, accum: Accum, lhs: Op<'_>, rhs: Op<'_>, alpha: C64) {
    let (m, n) = (dst.nrows(), dst.ncols());
    let k = m; // square blocks
    for c in 0..n {
        for r in 0..m {
            let mut s = ZERO;
            for l in 0..k {
                s += lhs.at(r, l) * rhs.at(l, c);
            }
            let v = alpha * s;
            match accum {
                Accum::Replace => dst[(r, c)] = v,
                Accum::Add => dst[(r, c)] += v,
            }
        }
    }
}

fn finite(m: &Mat<C64>) -> bool {
    let b = m.nrows();
    (0..b).all(|c| (0..b).all(|r| m[(r, c)].re.is_finite() && m[(r, c)].im.is_finite()))
}

/// Tr[X Y].
fn trace_product(x: MatRef<'_, C64>, y: MatRef<'_, C64>) -> C64 {
    let mut t = ZERO;
    for r in 0..x.nrows() {
        for c in 0..x.ncols() {
            t += x[(r, c)] * y[(c, r)];
        }
    }
    t
}

/// Γ = i(Σ − Σ†) into `dst`.
fn broadening_into(sigma: &Mat<C64>, dst: &mut Mat<C64>) {
    let b = sigma.nrows();
    for c in 0..b {
        for r in 0..b {
            dst[(r, c)] = (sigma[(r, c)] - sigma[(c, r)].conj()) * C64::new(0.0, 1.0);
        }
    }
}

/// Tr[S A] − Tr[Γ G^n] with A = i(G − G†), Γ = i(Σ − Σ†), no temporaries.
/// (net, gross) = (Tr[Σin A − Γ G^n], Tr[Σin A] + Tr[Γ G^n]).
fn terminal_flow(sigma: &Mat<C64>, sin: &Mat<C64>, g: &Mat<C64>, gn: &Mat<C64>) -> (f64, f64) {
    let b = g.nrows();
    let i = C64::new(0.0, 1.0);
    let mut inflow = ZERO;
    let mut outflow = ZERO;
    for r in 0..b {
        for c in 0..b {
            let a_cr = (g[(c, r)] - g[(r, c)].conj()) * i;
            let gamma_rc = (sigma[(r, c)] - sigma[(c, r)].conj()) * i;
            inflow += sin[(r, c)] * a_cr;
            outflow += gamma_rc * gn[(c, r)];
        }
    }
    (inflow.re - outflow.re, inflow.re + outflow.re)
}

pub(super) fn solve_energy_blocks(
    input: &EnergyInput<'_>,
    ws: &mut Workspace,
    mut out: EnergyOutput<'_>,
    exchange: Option<&mut BlockExchange<'_>>,
) -> Result<TerminalFlows, RgfError> {
    let n = input.onsite.len();
    let b = input.onsite[0].nrows();
    let last = n - 1;
    let Workspace { g, gn, block, .. } = ws;
    let s = block.as_mut().expect("block scratch for b > 1");
    forward_sweep(input, exchange.as_deref(), g, gn, s)?;
    let transmission = if input.want_transmission {
        transmission(input, g, s)
    } else {
        0.0
    };
    if let Some(f) = out.full.as_deref_mut() {
        f.prepare(n, b);
    }
    backward_sweep(input, g, gn, s, &mut out)?;
    if let Some(f) = out.full.as_deref_mut() {
        for i in 0..n {
            f.retarded_diagonal[i].copy_from(&g[i]);
            f.filled_diagonal[i].copy_from(&gn[i]);
        }
    }
    if let Some(x) = exchange {
        for i in 0..n {
            for r in 0..b {
                for c in 0..b {
                    x.green_retarded[i * b * b + r * b + c] = g[i][(r, c)];
                    x.green_filled[i * b * b + r * b + c] = gn[i][(r, c)];
                }
            }
        }
    }
    let left = terminal_flow(input.sigma_left, input.inscatter_left, &g[0], &gn[0]);
    let right = terminal_flow(
        input.sigma_right,
        input.inscatter_right,
        &g[last],
        &gn[last],
    );
    Ok(TerminalFlows {
        left: left.0,
        right: right.0,
        transmission,
        left_gross: left.1,
        right_gross: right.1,
    })
}

/// M = E − H_ii − Σ_ii and S = Σ^in_ii of cell `i` from the scattering
/// self-energy alone (diagonal, or the block of `exchange`); the leads and
/// the left-connected part are added by the caller.
fn cell_inputs(
    input: &EnergyInput<'_>,
    exchange: Option<&BlockExchange<'_>>,
    i: usize,
    m: &mut Mat<C64>,
    sin: &mut Mat<C64>,
) {
    let h = &input.onsite[i];
    let b = h.nrows();
    let e = C64::new(input.energy_ev, 0.0);
    match exchange {
        None => {
            for c in 0..b {
                for r in 0..b {
                    m[(r, c)] = -h[(r, c)];
                    sin[(r, c)] = ZERO;
                }
                m[(c, c)] += e - input.scatter_retarded[i * b + c];
                sin[(c, c)] = C64::new(input.scatter_in[i * b + c], 0.0);
            }
        }
        Some(x) => {
            let base = i * b * b;
            let p = &x.scatter_in[base..base + b * b];
            for c in 0..b {
                for r in 0..b {
                    m[(r, c)] = -h[(r, c)] - x.scatter_retarded[base + r * b + c];
                    sin[(r, c)] = match r.cmp(&c) {
                        std::cmp::Ordering::Equal => C64::new(p[r * b + c], 0.0),
                        std::cmp::Ordering::Less => C64::new(p[r * b + c], p[c * b + r]),
                        std::cmp::Ordering::Greater => C64::new(p[c * b + r], -p[r * b + c]),
                    };
                }
                m[(c, c)] += e;
            }
        }
    }
}

/// Forward sweep: g_i, g^n_i and X_i = g_i τ_i for every cell.
fn forward_sweep(
    input: &EnergyInput<'_>,
    exchange: Option<&BlockExchange<'_>>,
    g: &mut [Mat<C64>],
    gn: &mut [Mat<C64>],
    s: &mut BlockScratch,
) -> Result<(), RgfError> {
    let n = input.onsite.len();
    let last = n - 1;
    let [t0, t1, ..] = &mut s.t;
    for i in 0..n {
        let left = (i > 0).then(|| (&s.x[i - 1], &gn[i - 1]));
        cell_system(input, exchange, i, left, &mut s.m, t0, t1);
        invert_into(
            &mut s.m,
            &mut g[i],
            &mut s.perm,
            &mut s.perm_inv,
            &mut s.stack,
        );
        if !finite(&g[i]) {
            return Err(RgfError::NotFinite {
                energy_ev: input.energy_ev,
                cell: i,
            });
        }
        filled_into(&g[i], t0, t1, &mut gn[i]);
        if i < last {
            let tau = input.coupling[i].as_ref();
            mul(
                s.x[i].as_mut(),
                Accum::Replace,
                Op::N(g[i].as_ref()),
                Op::N(tau),
                ONE,
            );
        }
    }
    Ok(())
}

/// M_i = E − H_ii − Σ_ii − τ† X_{i−1} and S_i = Σ^in_ii + τ† (g^n_{i−1} τ)
/// of cell `i` in full: the scattering self-energy, the lead's at either
/// end, and the left-connected part from `left` = (X_{i−1}, g^n_{i−1})
/// (`None` for the first cell). `t1` is scratch.
fn cell_system(
    input: &EnergyInput<'_>,
    exchange: Option<&BlockExchange<'_>>,
    i: usize,
    left: Option<(&Mat<C64>, &Mat<C64>)>,
    m: &mut Mat<C64>,
    sin: &mut Mat<C64>,
    t1: &mut Mat<C64>,
) {
    cell_inputs(input, exchange, i, m, sin);
    if i == 0 {
        *m -= input.sigma_left;
        *sin += input.inscatter_left;
    }
    if i == input.onsite.len() - 1 {
        *m -= input.sigma_right;
        *sin += input.inscatter_right;
    }
    if let Some((x, gn)) = left {
        let tau = input.coupling[i - 1].as_ref();
        mul(
            m.as_mut(),
            Accum::Add,
            Op::H(tau),
            Op::N(x.as_ref()),
            MINUS_ONE,
        );
        mul(
            t1.as_mut(),
            Accum::Replace,
            Op::N(gn.as_ref()),
            Op::N(tau),
            ONE,
        );
        mul(
            sin.as_mut(),
            Accum::Add,
            Op::H(tau),
            Op::N(t1.as_ref()),
            ONE,
        );
    }
}

/// g^n_i = (g_i S_i) g_i† into `gn`, with `sin` = S_i; `t1` is scratch.
fn filled_into(g: &Mat<C64>, sin: &Mat<C64>, t1: &mut Mat<C64>, gn: &mut Mat<C64>) {
    mul(
        t1.as_mut(),
        Accum::Replace,
        Op::N(g.as_ref()),
        Op::N(sin.as_ref()),
        ONE,
    );
    mul(
        gn.as_mut(),
        Accum::Replace,
        Op::N(t1.as_ref()),
        Op::H(g.as_ref()),
        ONE,
    );
}

/// g ← M⁻¹ by one LU factorisation of `m` (overwritten).
fn invert_into(
    m: &mut Mat<C64>,
    g: &mut Mat<C64>,
    perm: &mut [usize],
    perm_inv: &mut [usize],
    stack: &mut MemBuffer,
) {
    let (_, p) = factor::lu_in_place(
        m.as_mut(),
        perm,
        perm_inv,
        Par::Seq,
        MemStack::new(stack),
        Default::default(),
    );
    inverse::inverse(
        g.as_mut(),
        m.as_ref(),
        m.as_ref(),
        p,
        Par::Seq,
        MemStack::new(stack),
    );
}

/// Tr[Γ1 G^r_1N Γ2 G^a_N1] with G^r_iN = X_i G^r_{i+1,N}, from g_N.
fn transmission(input: &EnergyInput<'_>, g: &[Mat<C64>], s: &mut BlockScratch) -> f64 {
    let last = input.onsite.len() - 1;
    let [_, t1, t2, t3, t4, t5, t6] = &mut s.t;
    let (q, qt) = (&mut *t5, &mut *t6);
    q.copy_from(&g[last]);
    for i in (0..last).rev() {
        mul(
            qt.as_mut(),
            Accum::Replace,
            Op::N(s.x[i].as_ref()),
            Op::N(q.as_ref()),
            ONE,
        );
        std::mem::swap(q, qt);
    }
    broadening_into(input.sigma_left, t1);
    broadening_into(input.sigma_right, t2);
    mul(
        t3.as_mut(),
        Accum::Replace,
        Op::N(t1.as_ref()),
        Op::N(q.as_ref()),
        ONE,
    );
    mul(
        t4.as_mut(),
        Accum::Replace,
        Op::N(t2.as_ref()),
        Op::H(q.as_ref()),
        ONE,
    );
    trace_product(t3.as_ref(), t4.as_ref()).re
}

/// Backward sweep: `g` / `gn` are overwritten with the full G_ii, G^n_ii;
/// the diagonals, bond flows and (when asked) the lower blocks go to `out`.
fn backward_sweep(
    input: &EnergyInput<'_>,
    g: &mut [Mat<C64>],
    gn: &mut [Mat<C64>],
    s: &mut BlockScratch,
    out: &mut EnergyOutput<'_>,
) -> Result<(), RgfError> {
    let n = input.onsite.len();
    let b = input.onsite[0].nrows();
    let last = n - 1;
    let [t0, t1, t2, t3, t4, ..] = &mut s.t;
    write_diagonal(out, last, &g[last], &gn[last]);
    for i in (0..last).rev() {
        let tau = input.coupling[i].as_ref();
        let x = s.x[i].as_ref();
        let (lo, hi) = g.split_at_mut(i + 1);
        let (lon, hin) = gn.split_at_mut(i + 1);
        let (gi, gni) = (&mut lo[i], &mut lon[i]);
        let (big, bign) = (hi[0].as_ref(), hin[0].as_ref());
        let (w, gw, q, p, v) = (&mut *t0, &mut *t1, &mut *t2, &mut *t3, &mut *t4);
        mul(
            w.as_mut(),
            Accum::Replace,
            Op::H(tau),
            Op::N(gi.as_ref()),
            ONE,
        );
        mul(
            gw.as_mut(),
            Accum::Replace,
            Op::N(big),
            Op::N(w.as_ref()),
            ONE,
        );
        mul(
            q.as_mut(),
            Accum::Replace,
            Op::H(tau),
            Op::N(gni.as_ref()),
            ONE,
        );
        mul(
            p.as_mut(),
            Accum::Replace,
            Op::N(big),
            Op::N(q.as_ref()),
            ONE,
        );
        mul(v.as_mut(), Accum::Replace, Op::N(bign), Op::H(x), ONE);
        // G_ii = g_i + X GW
        mul(gi.as_mut(), Accum::Add, Op::N(x), Op::N(gw.as_ref()), ONE);
        // G^n_ii = g^n_i + X V + Z + Z†, Z = X P (w is free again)
        mul(gni.as_mut(), Accum::Add, Op::N(x), Op::N(v.as_ref()), ONE);
        let z = &mut *w;
        mul(z.as_mut(), Accum::Replace, Op::N(x), Op::N(p.as_ref()), ONE);
        for c in 0..b {
            for r in 0..b {
                gni[(r, c)] += z[(r, c)] + z[(c, r)].conj();
            }
        }
        // G^n_{i+1,i} = P + V; bond = −2 Im Tr[τ G^n_{i+1,i}]
        *p += &*v;
        out.bond[i] = -2.0 * trace_product(tau, p.as_ref()).im;
        if let Some(f) = out.full.as_deref_mut() {
            f.retarded_lower[i].copy_from(&*gw);
            f.filled_lower[i].copy_from(&*p);
        }
        if !finite(gi) || !finite(gni) {
            return Err(RgfError::NotFinite {
                energy_ev: input.energy_ev,
                cell: i,
            });
        }
        write_diagonal(out, i, gi, gni);
    }
    Ok(())
}

/// The diagonals of G_ii and G^n_ii into the per-site outputs.
fn write_diagonal(out: &mut EnergyOutput<'_>, i: usize, g: &Mat<C64>, gn: &Mat<C64>) {
    let b = g.nrows();
    for o in 0..b {
        out.retarded[i * b + o] = g[(o, o)];
        out.filled[i * b + o] = gn[(o, o)].re;
    }
}
