//! Scattering within a cell as full b × b blocks.
//!
//! A cell's scattering is a set of independent fluctuation sources, each a
//! Hermitian b × b coupling matrix M_k (eV). The local self-consistent Born
//! self-energy of cell i is the sum over sources of M_k G_ii M_k: for
//! dephasing Σ^r_ii = Σ_k M_k G^r_ii M_k and Σ^in_ii = Σ_k M_k G^n_ii M_k; for
//! a phonon mode the same sandwich of G^n (in) and G^p (out) at E ± ħω with
//! the Bose weights N + 1 and N. The matrix of a source carries the
//! square root of a strength: a single-orbital source M = √D e_s e_sᵀ gives
//! D G_ss on orbital s alone, which is the diagonal model (one value D per
//! orbital site). Sources with off-diagonal entries move electrons between
//! orbitals of a cell (interband, intervalley, spin-flip) and keep the
//! coherence between them.
//!
//! # Storage
//!
//! Every block is kept row-major, b² numbers per cell, cells one after the
//! other, energies one after the other (index k·N·b² + i·b² + r·b + c).
//! Σ^r_0 and G^r, G^n are stored as complex numbers; the Hermitian Σ^in_0 is
//! packed into b² real numbers: the diagonal as it is, the element above
//! the diagonal at (r, c), r < c, as its real part and its imaginary part
//! at the mirrored place (c, r). Packing is real-linear, so mixing and
//! convergence measures work on the packed numbers as on any vector.

use crate::C64;
use faer::Mat;

/// Coupling matrices of one mechanism, per cell: `per_cell[i]` lists the
/// sources M_k (Hermitian b × b, eV) acting in cell i; every list may be
/// empty, and `per_cell` itself is empty when the mechanism has no
/// matrix sources anywhere.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct CouplingMatrices {
    /// Sources per cell.
    pub per_cell: Vec<Vec<Mat<C64>>>,
}

impl CouplingMatrices {
    /// True when no cell holds a source.
    pub fn is_empty(&self) -> bool {
        self.per_cell.iter().all(Vec::is_empty)
    }

    /// True when no source has a non-zero entry.
    pub fn is_zero(&self) -> bool {
        self.per_cell.iter().flatten().all(|m| {
            (0..m.nrows()).all(|r| (0..m.ncols()).all(|c| m[(r, c)] == C64::new(0.0, 0.0)))
        })
    }

    /// The sources of cell `i` (none when the mechanism has no matrices).
    pub fn cell(&self, i: usize) -> &[Mat<C64>] {
        self.per_cell.get(i).map_or(&[], Vec::as_slice)
    }
}

impl serde::Serialize for CouplingMatrices {
    /// Each source as rows of [re, im] pairs (eV).
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        let v: Vec<Vec<Vec<Vec<[f64; 2]>>>> = self
            .per_cell
            .iter()
            .map(|cell| {
                cell.iter()
                    .map(|m| {
                        (0..m.nrows())
                            .map(|r| {
                                (0..m.ncols())
                                    .map(|c| [m[(r, c)].re, m[(r, c)].im])
                                    .collect()
                            })
                            .collect()
                    })
                    .collect()
            })
            .collect();
        serde::Serialize::serialize(&v, s)
    }
}

/// Diagonal blocks G^r_ii and G^n_ii of every cell at every energy (see
/// the module docs for the layout).
#[derive(Clone, Debug, PartialEq)]
pub struct GreenBlocks {
    /// Orbitals per cell b.
    pub orbitals: usize,
    /// Numbers per energy, N·b².
    pub per_energy: usize,
    /// G^r_ii (1/eV).
    pub retarded: Vec<C64>,
    /// G^n_ii = −iG^<_ii (1/eV), Hermitian.
    pub filled: Vec<C64>,
}

impl GreenBlocks {
    /// All zero, for `energies` energies, `cells` cells of `orbitals`.
    pub fn zeros(energies: usize, cells: usize, orbitals: usize) -> Self {
        let per_energy = cells * orbitals * orbitals;
        Self {
            orbitals,
            per_energy,
            retarded: vec![C64::new(0.0, 0.0); energies * per_energy],
            filled: vec![C64::new(0.0, 0.0); energies * per_energy],
        }
    }
}

/// Packs the Hermitian block `x` (row-major, b²) into b² reals `out`.
pub fn pack_hermitian(x: &[C64], b: usize, out: &mut [f64]) {
    for r in 0..b {
        for c in 0..b {
            out[r * b + c] = match r.cmp(&c) {
                std::cmp::Ordering::Equal => x[r * b + c].re,
                std::cmp::Ordering::Less => x[r * b + c].re,
                std::cmp::Ordering::Greater => x[c * b + r].im,
            };
        }
    }
}

/// The Hermitian block (row-major, b²) packed in `p` (see the module docs).
pub fn unpack_hermitian(p: &[f64], b: usize, out: &mut [C64]) {
    for r in 0..b {
        for c in 0..b {
            out[r * b + c] = match r.cmp(&c) {
                std::cmp::Ordering::Equal => C64::new(p[r * b + c], 0.0),
                std::cmp::Ordering::Less => C64::new(p[r * b + c], p[c * b + r]),
                std::cmp::Ordering::Greater => C64::new(p[c * b + r], -p[r * b + c]),
            };
        }
    }
}

/// The packed element (r, c) of Γ = i(Σ − Σ†) for the block Σ (row-major).
#[inline]
pub fn packed_broadening(sigma: &[C64], b: usize, r: usize, c: usize) -> f64 {
    let (x, y) = (sigma[r * b + c], sigma[c * b + r]);
    match r.cmp(&c) {
        std::cmp::Ordering::Equal => -2.0 * x.im,
        // Re Γ_rc = −(Im Σ_rc + Im Σ_cr)
        std::cmp::Ordering::Less => -(x.im + y.im),
        // Im Γ_cr = Re Σ_cr − Re Σ_rc
        std::cmp::Ordering::Greater => y.re - x.re,
    }
}

/// acc ← acc + w · M X M for b × b blocks (X row-major, b²).
pub fn add_sandwich(m: &Mat<C64>, x: &[C64], w: f64, acc: &mut [C64], tmp: &mut [C64]) {
    let b = m.nrows();
    // tmp = X M
    for r in 0..b {
        for c in 0..b {
            let mut s = C64::new(0.0, 0.0);
            for l in 0..b {
                s += x[r * b + l] * m[(l, c)];
            }
            tmp[r * b + c] = s;
        }
    }
    for r in 0..b {
        for c in 0..b {
            let mut s = C64::new(0.0, 0.0);
            for l in 0..b {
                s += m[(r, l)] * tmp[l * b + c];
            }
            acc[r * b + c] += s * w;
        }
    }
}

/// The spectral block A = i(G − G†) of the retarded block `g` into `out`.
pub fn spectral_into(g: &[C64], b: usize, out: &mut [C64]) {
    for r in 0..b {
        for c in 0..b {
            let d = g[r * b + c] - g[c * b + r].conj();
            out[r * b + c] = C64::new(-d.im, d.re);
        }
    }
}

/// Re Tr[X Y] for b × b blocks.
pub fn trace_product_re(x: &[C64], y: &[C64], b: usize) -> f64 {
    let mut t = 0.0;
    for r in 0..b {
        for c in 0..b {
            t += (x[r * b + c] * y[c * b + r]).re;
        }
    }
    t
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn packing_a_hermitian_block_round_trips() {
        let b = 3;
        let mut x = vec![C64::new(0.0, 0.0); 9];
        for r in 0..b {
            for c in r..b {
                let v = if r == c {
                    C64::new(1.0 + r as f64, 0.0)
                } else {
                    C64::new(0.3 * (r + 2 * c) as f64, -0.7 + r as f64)
                };
                x[r * b + c] = v;
                x[c * b + r] = v.conj();
            }
        }
        let mut p = vec![0.0; 9];
        pack_hermitian(&x, b, &mut p);
        let mut back = vec![C64::new(9.0, 9.0); 9];
        unpack_hermitian(&p, b, &mut back);
        assert_eq!(back, x);
        // Σ = −iΓ/2 with Γ = 2x: the packed broadening is that of 2x.
        let sigma: Vec<C64> = x.iter().map(|v| v * C64::new(0.0, -1.0)).collect();
        for r in 0..b {
            for c in 0..b {
                let want = 2.0 * p[r * b + c];
                let got = packed_broadening(&sigma, b, r, c);
                assert!((got - want).abs() < 1e-15, "({r},{c}): {got} vs {want}");
            }
        }
    }
}
