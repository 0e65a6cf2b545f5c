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

/// In-scattering of one source set of [`solve_two_sources_scalar`]: the
/// lead terms Σ^in_1, Σ^in_2 (real for b = 1) and Σ^in_0 per cell.
#[derive(Clone, Copy)]
pub struct ScalarSources<'a> {
    /// Σ^in of the left lead on the first cell.
    pub left: f64,
    /// Σ^in of the right lead on the last cell.
    pub right: f64,
    /// Σ^in_0 per cell (N).
    pub scatter_in: &'a [f64],
}

/// The G^n blocks of one source set on a chain with b = 1: G^n_ii per cell
/// and G^n_i+1,i per pair of neighbours.
#[derive(Clone, Debug, Default)]
pub struct ScalarFilled {
    /// G^n_ii (N), 1/eV.
    pub diagonal: Vec<f64>,
    /// G^n_i+1,i (N − 1), 1/eV.
    pub lower: Vec<C64>,
}

/// Scratch and results of [`solve_two_sources_scalar`], reused for every
/// energy: the recursion allocates only when the chain length changes.
#[derive(Clone, Debug, Default)]
pub struct TwoSourceScratch {
    g: Vec<C64>,
    gn: [Vec<f64>; 2],
    /// G^n blocks of the two source sets, in the order given.
    pub filled: [ScalarFilled; 2],
}

impl TwoSourceScratch {
    fn prepare(&mut self, n: usize) {
        self.g.resize(n, C64::new(0.0, 0.0));
        for (gn, f) in self.gn.iter_mut().zip(&mut self.filled) {
            gn.resize(n, 0.0);
            f.diagonal.resize(n, 0.0);
            f.lower.resize(n.saturating_sub(1), C64::new(0.0, 0.0));
        }
    }
}

/// The b = 1 recursion of [`super::solve_energy`] for two sets of
/// in-scattering sources that share one retarded self-energy: G^r does not
/// depend on the sources, so the left-connected g_i and the full G_ii are
/// computed once and G^n is carried for both sets (for example the true
/// sources, and every source filled, whose G^n is the spectral function
/// A = G^r Γ G^a). Each set's G^n_ii and G^n_i+1,i are the same numbers,
/// bit for bit, as the full blocks of a [`super::solve_energy`] call with
/// that set, at about the cost of one such call without full blocks.
/// The sources are read from `sources` only: `input.scatter_in`,
/// `input.inscatter_left` and `input.inscatter_right` are not read.
pub fn solve_two_sources_scalar(
    input: &EnergyInput<'_>,
    sources: [ScalarSources<'_>; 2],
    s: &mut TwoSourceScratch,
) -> Result<(), RgfError> {
    let n = input.onsite.len();
    assert_eq!(input.onsite[0].nrows(), 1, "the scalar path needs b = 1");
    s.prepare(n);
    two_source_forward(input, &sources, s)?;
    two_source_backward(input, s)
}

fn two_source_forward(
    input: &EnergyInput<'_>,
    sources: &[ScalarSources<'_>; 2],
    s: &mut TwoSourceScratch,
) -> Result<(), RgfError> {
    let n = input.onsite.len();
    let last = n - 1;
    let e = input.energy_ev;
    let sl = input.sigma_left[(0, 0)];
    let sr = input.sigma_right[(0, 0)];
    let [gn0, gn1] = &mut s.gn;
    let mut prev_g = C64::new(0.0, 0.0);
    let mut prev_gn = [0.0; 2];
    for i in 0..n {
        let mut m = C64::new(e, 0.0) - input.onsite[i][(0, 0)] - input.scatter_retarded[i];
        let mut sin = [sources[0].scatter_in[i], sources[1].scatter_in[i]];
        if i == 0 {
            m -= sl;
            sin[0] += sources[0].left;
            sin[1] += sources[1].left;
        }
        if i == last {
            m -= sr;
            sin[0] += sources[0].right;
            sin[1] += sources[1].right;
        }
        if i > 0 {
            let t2 = input.coupling[i - 1][(0, 0)].norm_sqr();
            m -= prev_g * t2;
            sin[0] += prev_gn[0] * t2;
            sin[1] += prev_gn[1] * t2;
        }
        let gi = m.inv();
        if !(gi.re.is_finite() && gi.im.is_finite()) {
            return Err(RgfError::NotFinite {
                energy_ev: e,
                cell: i,
            });
        }
        let gni = [gi.norm_sqr() * sin[0], gi.norm_sqr() * sin[1]];
        s.g[i] = gi;
        gn0[i] = gni[0];
        gn1[i] = gni[1];
        prev_g = gi;
        prev_gn = gni;
    }
    Ok(())
}

fn two_source_backward(input: &EnergyInput<'_>, s: &mut TwoSourceScratch) -> Result<(), RgfError> {
    let n = input.onsite.len();
    let last = n - 1;
    let g = &mut s.g;
    for (gn, f) in s.gn.iter().zip(&mut s.filled) {
        f.diagonal[last] = gn[last];
    }
    for i in (0..last).rev() {
        let t2 = input.coupling[i][(0, 0)].norm_sqr();
        let tc = input.coupling[i][(0, 0)].conj();
        let gi = g[i];
        let big = g[i + 1];
        let gr_full = gi + gi * gi * big * t2;
        let mut ok = gr_full.re.is_finite() && gr_full.im.is_finite();
        for (gn, f) in s.gn.iter_mut().zip(&mut s.filled) {
            let gni = gn[i];
            let bign = gn[i + 1];
            let gn_full = gni + gi.norm_sqr() * t2 * bign + 2.0 * t2 * gni * (gi * big).re;
            ok &= gn_full.is_finite();
            f.diagonal[i] = gn_full;
            f.lower[i] = tc * (big * gni + bign * gi.conj());
            gn[i] = gn_full;
        }
        if !ok {
            return Err(RgfError::NotFinite {
                energy_ev: input.energy_ev,
                cell: i,
            });
        }
        g[i] = gr_full;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::super::{EnergyOutput, FullBlocks, solve_energy};
    use super::*;
    use faer::Mat;

    fn one(z: C64) -> Mat<C64> {
        Mat::from_fn(1, 1, |_, _| z)
    }

    /// A chain with uneven on-site energies, complex couplings and a
    /// scattering self-energy on every cell.
    struct Chain {
        onsite: Vec<Mat<C64>>,
        coupling: Vec<Mat<C64>>,
        /// Σ^r of the scattering.
        retarded: Vec<C64>,
        /// One Σ^in of the scattering.
        bath_in: Vec<f64>,
        /// The Σ^in −2 Im Σ^r of a bath that fills every state.
        bath_filled: Vec<f64>,
    }

    /// The [`Chain`] of `n` cells every test here uses.
    fn uneven_chain(n: usize) -> Chain {
        let retarded: Vec<C64> = (0..n)
            .map(|i| C64::new(-0.002 * i as f64, -0.003 - 0.001 * (i % 3) as f64))
            .collect();
        Chain {
            onsite: (0..n)
                .map(|i| one(C64::new(0.1 + 0.013 * (i * i % 5) as f64, 0.0)))
                .collect(),
            coupling: (0..n - 1)
                .map(|i| one(C64::from_polar(0.25 + 0.01 * i as f64, 0.3 * i as f64)))
                .collect(),
            bath_in: (0..n).map(|i| 0.004 + 0.0005 * i as f64).collect(),
            bath_filled: retarded.iter().map(|x| -2.0 * x.im).collect(),
            retarded,
        }
    }

    /// The full blocks of one ordinary call of the general recursion.
    fn ordinary_blocks(input: &EnergyInput<'_>) -> FullBlocks {
        let n = input.onsite.len();
        let mut ws = Workspace::new(n, 1);
        let (mut r, mut f, mut b) = (vec![C64::new(0.0, 0.0); n], vec![0.0; n], vec![0.0; n - 1]);
        let mut full = FullBlocks::default();
        let out = EnergyOutput {
            retarded: &mut r,
            filled: &mut f,
            bond: &mut b,
            full: Some(&mut full),
        };
        solve_energy(input, &mut ws, out).unwrap();
        full
    }

    /// `got` holds G^n_ii and G^n_i+1,i of `full` bit for bit (and G^n_ii
    /// of `full` is real); `what` names the case in a failure.
    fn assert_same_filled(got: &ScalarFilled, full: &FullBlocks, what: &str) {
        let n = full.filled_diagonal.len();
        for i in 0..n {
            let want = full.filled_diagonal[i][(0, 0)];
            assert_eq!(want.im, 0.0);
            assert_eq!(
                got.diagonal[i].to_bits(),
                want.re.to_bits(),
                "{what}, G^n_{i}{i}"
            );
        }
        for i in 0..n - 1 {
            let want = full.filled_lower[i][(0, 0)];
            let have = got.lower[i];
            assert_eq!(
                (have.re.to_bits(), have.im.to_bits()),
                (want.re.to_bits(), want.im.to_bits()),
                "{what}, G^n_{}{i}",
                i + 1
            );
        }
    }

    /// Both source sets of the two-source recursion give, bit for bit, the
    /// full blocks of one ordinary call each: the movers' pass relies on
    /// that to leave its results unchanged. A chain of 7 cells with
    /// uneven on-site energies, complex couplings and a scattering
    /// self-energy on every cell, at energies in and outside the band.
    #[test]
    fn two_sources_equal_two_solves_bit_for_bit() {
        let chain = uneven_chain(7);
        let (sl, sr) = (C64::new(-0.05, -0.12), C64::new(0.02, -0.09));
        let gamma = |s: C64, f: f64| -2.0 * s.im * f;
        for e in [-0.3, 0.05, 0.21, 0.4, 1.7] {
            let sets = [
                (gamma(sl, 0.8), gamma(sr, 0.3), &chain.bath_in),
                (gamma(sl, 1.0), gamma(sr, 1.0), &chain.bath_filled),
            ];
            let sources = sets.map(|(left, right, scatter_in)| ScalarSources {
                left,
                right,
                scatter_in,
            });
            let (sigma_left, sigma_right) = (one(sl), one(sr));
            let mut two = TwoSourceScratch::default();
            for (set, src) in sources.iter().enumerate() {
                let (inl, inr) = (one(C64::new(src.left, 0.0)), one(C64::new(src.right, 0.0)));
                let input = EnergyInput {
                    energy_ev: e,
                    onsite: &chain.onsite,
                    coupling: &chain.coupling,
                    sigma_left: &sigma_left,
                    sigma_right: &sigma_right,
                    inscatter_left: &inl,
                    inscatter_right: &inr,
                    scatter_retarded: &chain.retarded,
                    scatter_in: src.scatter_in,
                    want_transmission: false,
                };
                let full = ordinary_blocks(&input);
                // The other set's sources must not be read from `input`.
                let other = &sources[1 - set];
                let (inl2, inr2) = (
                    one(C64::new(other.left, 0.0)),
                    one(C64::new(other.right, 0.0)),
                );
                let input = EnergyInput {
                    inscatter_left: &inl2,
                    inscatter_right: &inr2,
                    scatter_in: other.scatter_in,
                    ..input
                };
                solve_two_sources_scalar(&input, sources, &mut two).unwrap();
                assert_same_filled(&two.filled[set], &full, &format!("E {e}, set {set}"));
            }
        }
    }

    /// A singular cell is reported as in the ordinary call.
    #[test]
    fn two_sources_report_a_singular_cell() {
        let onsite = vec![one(C64::new(0.5, 0.0)); 3];
        let coupling = vec![one(C64::new(0.0, 0.0)); 2];
        let zero = one(C64::new(0.0, 0.0));
        let retarded = vec![C64::new(0.0, 0.0); 3];
        let none = vec![0.0; 3];
        let input = EnergyInput {
            energy_ev: 0.5,
            onsite: &onsite,
            coupling: &coupling,
            sigma_left: &zero,
            sigma_right: &zero,
            inscatter_left: &zero,
            inscatter_right: &zero,
            scatter_retarded: &retarded,
            scatter_in: &none,
            want_transmission: false,
        };
        let src = ScalarSources {
            left: 0.0,
            right: 0.0,
            scatter_in: &none,
        };
        let err = solve_two_sources_scalar(&input, [src, src], &mut TwoSourceScratch::default());
        assert_eq!(
            err,
            Err(RgfError::NotFinite {
                energy_ev: 0.5,
                cell: 0
            })
        );
    }
}
