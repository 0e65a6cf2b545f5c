//! The b = 1 path: the same recursion in complex scalars.

use super::{EnergyInput, EnergyOutput, RgfError, TerminalFlows, Workspace};
use crate::C64;

pub(super) fn solve_energy_scalar(
    input: &EnergyInput<'_>,
    ws: &mut Workspace,
    mut out: EnergyOutput<'_>,
) -> Result<TerminalFlows, RgfError> {
    let n = input.onsite.len();
    let last = n - 1;
    let e = input.energy_ev;
    let sl = input.sigma_left[(0, 0)];
    let sr = input.sigma_right[(0, 0)];
    let inl = input.inscatter_left[(0, 0)].re;
    let inr = input.inscatter_right[(0, 0)].re;
    let g = &mut ws.sg;
    let gn = &mut ws.sgn;

    let mut prev_g = C64::new(0.0, 0.0);
    let mut prev_gn = 0.0;
    for i in 0..n {
        let mut m = C64::new(e, 0.0) - input.onsite[i][(0, 0)] - input.scatter_retarded[i];
        let mut sin = input.scatter_in[i];
        if i == 0 {
            m -= sl;
            sin += inl;
        }
        if i == last {
            m -= sr;
            sin += inr;
        }
        if i > 0 {
            let t2 = input.coupling[i - 1][(0, 0)].norm_sqr();
            m -= prev_g * t2;
            sin += prev_gn * t2;
        }
        let gi = m.inv();
        if !(gi.re.is_finite() && gi.im.is_finite()) {
            return Err(RgfError::NotFinite {
                energy_ev: e,
                cell: i,
            });
        }
        let gni = gi.norm_sqr() * sin;
        g[i] = gi;
        gn[i] = gni;
        prev_g = gi;
        prev_gn = gni;
    }

    out.retarded[last] = g[last];
    out.filled[last] = gn[last];
    if let Some(f) = out.full.as_deref_mut() {
        f.prepare(n, 1);
        f.retarded_diagonal[last][(0, 0)] = g[last];
        f.filled_diagonal[last][(0, 0)] = C64::new(gn[last], 0.0);
    }
    // G^r_1N for the transmission: G_iN = g_i τ_i G_i+1,N (left-connected g).
    let mut q = g[last];
    for i in (0..last).rev() {
        if input.want_transmission {
            q = g[i] * input.coupling[i][(0, 0)] * q;
        }
        let t2 = input.coupling[i][(0, 0)].norm_sqr();
        let gi = g[i];
        let gni = gn[i];
        let big = g[i + 1];
        let bign = gn[i + 1];
        let gr_full = gi + gi * gi * big * t2;
        let gn_full = gni + gi.norm_sqr() * t2 * bign + 2.0 * t2 * gni * (gi * big).re;
        // −2 Im[τ G^n_{i+1,i}] with G^n_{i+1,i} = τ*(G_{i+1} g^n_i + G^n_{i+1} g_i*)
        out.bond[i] = -2.0 * t2 * (big * gni + gi.conj() * bign).im;
        if !(gr_full.re.is_finite() && gr_full.im.is_finite() && gn_full.is_finite()) {
            return Err(RgfError::NotFinite {
                energy_ev: e,
                cell: i,
            });
        }
        out.retarded[i] = gr_full;
        out.filled[i] = gn_full;
        if let Some(f) = out.full.as_deref_mut() {
            // G_{i+1,i} = G_{i+1} τ* g_i and G^n_{i+1,i} as in the bond flow.
            let tc = input.coupling[i][(0, 0)].conj();
            f.retarded_diagonal[i][(0, 0)] = gr_full;
            f.filled_diagonal[i][(0, 0)] = C64::new(gn_full, 0.0);
            f.retarded_lower[i][(0, 0)] = big * tc * gi;
            f.filled_lower[i][(0, 0)] = tc * (big * gni + bign * gi.conj());
        }
        g[i] = gr_full;
        gn[i] = gn_full;
    }

    let gamma_l = -2.0 * sl.im;
    let gamma_r = -2.0 * sr.im;
    let a0 = -2.0 * g[0].im;
    let an = -2.0 * g[last].im;
    let left = inl * a0 - gamma_l * gn[0];
    let right = inr * an - gamma_r * gn[last];
    let transmission = if input.want_transmission {
        gamma_l * gamma_r * q.norm_sqr()
    } else {
        0.0
    };
    Ok(TerminalFlows {
        left,
        right,
        transmission,
        left_gross: inl * a0 + gamma_l * gn[0],
        right_gross: inr * an + gamma_r * gn[last],
    })
}
