//! The Born update of Σ0 on full b × b blocks (see `blocks.rs` for the
//! model and the layout).

use super::blocks::{add_sandwich, pack_hermitian, unpack_hermitian};
use super::{GreenBlocks, HilbertTransform, PhononMode, Scattering, ScatteringSelfEnergy};
use crate::C64;
use rayon::prelude::*;

const ZERO: C64 = C64::new(0.0, 0.0);

/// Scratch blocks of one energy row (b² each).
struct Row {
    x_in: Vec<C64>,
    x_all: Vec<C64>,
    sin: Vec<C64>,
    gam: Vec<C64>,
    tmp: Vec<C64>,
    packed: Vec<f64>,
}

impl Row {
    fn new(b: usize) -> Self {
        let z = || vec![ZERO; b * b];
        Self {
            x_in: z(),
            x_all: z(),
            sin: z(),
            gam: z(),
            tmp: z(),
            packed: vec![0.0; b * b],
        }
    }
}

impl PhononMode {
    /// Occupation of this mode in each of `cells` cells of `b` orbitals:
    /// with a lattice-temperature profile (one value per orbital site) the
    /// Bose function at the mean temperature of the cell's orbitals (a
    /// source that mixes the orbitals of a cell meets one lattice there),
    /// else the bath occupation.
    pub fn cell_occupations(&self, cells: usize, b: usize, lattice: Option<&[f64]>) -> Vec<f64> {
        match lattice {
            Some(t) => (0..cells)
                .map(|i| {
                    let mean = t[i * b..(i + 1) * b].iter().sum::<f64>() / b as f64;
                    self.occupation_at(mean)
                })
                .collect(),
            None => vec![self.occupation(); cells],
        }
    }
}

impl Scattering {
    /// Build Σ0 as b × b blocks per cell from the diagonal blocks of G on
    /// the whole grid: every source M of a cell adds M G M (phonons with
    /// the energy shifts and Bose weights, dephasing at the same energy);
    /// per-site strengths D act as single-orbital sources (D G_ss on the
    /// diagonal). The Hermitian part, when on, is the Hilbert transform of
    /// the phonon broadening, element by element. Values of G at E ± ħω
    /// outside the grid count as zero.
    ///
    /// # Panics
    ///
    /// When a lattice-temperature profile does not hold one value per
    /// orbital site, or the Hermitian part is on without a plan.
    pub fn self_energy_blocks_into(
        &self,
        green: &GreenBlocks,
        energies: usize,
        hilbert: Option<&HilbertTransform>,
        lattice_temperature_k: Option<&[f64]>,
        out: &mut ScatteringSelfEnergy,
    ) {
        let b = green.orbitals;
        let per = green.per_energy;
        let cells = per / (b * b).max(1);
        if let Some(t) = lattice_temperature_k {
            assert_eq!(t.len(), cells * b, "lattice-temperature profile length");
        }
        out.sites = per;
        out.blocks = Some(b);
        out.retarded.resize(energies * per, ZERO);
        out.inscatter.resize(energies * per, 0.0);
        let occupations: Vec<Vec<f64>> = self
            .phonons
            .iter()
            .map(|m| m.cell_occupations(cells, b, lattice_temperature_k))
            .collect();
        out.inscatter
            .par_chunks_mut(per.max(1))
            .zip(out.retarded.par_chunks_mut(per.max(1)))
            .enumerate()
            .for_each_init(
                || Row::new(b),
                |row, (k, (sin_row, ret_row))| {
                    for i in 0..cells {
                        let cell = i * b * b..(i + 1) * b * b;
                        self.phonon_cell(green, energies, (k, i), &occupations, row);
                        pack_hermitian(&row.sin, b, &mut sin_row[cell.clone()]);
                        for (r, g) in ret_row[cell].iter_mut().zip(&row.gam) {
                            // Σ^r = −iΓ/2
                            *r = C64::new(0.5 * g.im, -0.5 * g.re);
                        }
                    }
                },
            );
        if self.hermitian_part && !self.phonons.is_empty() {
            let h = hilbert.expect("Hilbert transform plan when the Hermitian part is on");
            add_principal_part(h, energies, b, out);
        }
        if self.has_dephasing() {
            self.add_dephasing_blocks(green, energies, out);
        }
    }

    /// Phonon Σ^in (into `row.sin`) and Γ (into `row.gam`) of cell `i` at
    /// energy `k`.
    fn phonon_cell(
        &self,
        green: &GreenBlocks,
        energies: usize,
        (k, i): (usize, usize),
        occupations: &[Vec<f64>],
        row: &mut Row,
    ) {
        let b = green.orbitals;
        let bb = b * b;
        row.sin.fill(ZERO);
        row.gam.fill(ZERO);
        for (mode, occ) in self.phonons.iter().zip(occupations) {
            let mats = mode.coupling_matrices.cell(i);
            let diag = mode.coupling_ev2.get(i * b..(i + 1) * b);
            let has_diag = diag.is_some_and(|d| d.iter().any(|&x| x != 0.0));
            if mats.is_empty() && !has_diag {
                continue;
            }
            let n = occ[i];
            let w = mode.steps;
            row.x_in.fill(ZERO);
            row.x_all.fill(ZERO);
            // Emission into E from E + ħω (weight N + 1), absorption out of
            // E to E + ħω (N); absorption into E from E − ħω (N), emission
            // out of E to E − ħω (N + 1).
            let shifted = [
                (k + w < energies).then(|| (k + w, n + 1.0, n)),
                (k >= w).then(|| (k - w, n, n + 1.0)),
            ];
            for (kk, w_in, w_out) in shifted.into_iter().flatten() {
                let base = kk * green.per_energy + i * bb;
                let g = &green.retarded[base..base + bb];
                let gn = &green.filled[base..base + bb];
                for r in 0..b {
                    for c in 0..b {
                        let a = (g[r * b + c] - g[c * b + r].conj()) * C64::new(0.0, 1.0);
                        let filled = gn[r * b + c];
                        row.x_in[r * b + c] += filled * w_in;
                        row.x_all[r * b + c] += filled * w_in + (a - filled) * w_out;
                    }
                }
            }
            if let Some(d) = diag {
                for (o, &dv) in d.iter().enumerate().filter(|(_, dv)| **dv != 0.0) {
                    row.sin[o * b + o] += row.x_in[o * b + o] * dv;
                    row.gam[o * b + o] += row.x_all[o * b + o] * dv;
                }
            }
            for m in mats {
                add_sandwich(m, &row.x_in, 1.0, &mut row.sin, &mut row.tmp);
                add_sandwich(m, &row.x_all, 1.0, &mut row.gam, &mut row.tmp);
            }
        }
    }

    /// Adds elastic dephasing on blocks: Σ^r += M G^r M, Σ^in += M G^n M
    /// for every source (D G_ss on the diagonal for per-site strengths).
    fn add_dephasing_blocks(
        &self,
        green: &GreenBlocks,
        energies: usize,
        out: &mut ScatteringSelfEnergy,
    ) {
        let b = green.orbitals;
        let bb = b * b;
        let per = green.per_energy;
        let cells = per / bb.max(1);
        out.inscatter[..energies * per]
            .par_chunks_mut(bb)
            .zip(out.retarded[..energies * per].par_chunks_mut(bb))
            .enumerate()
            .for_each_init(
                || Row::new(b),
                |row, (idx, (sin, ret))| {
                    let i = idx % cells;
                    let base = idx * bb;
                    let g = &green.retarded[base..base + bb];
                    let gn = &green.filled[base..base + bb];
                    row.sin.fill(ZERO);
                    row.gam.fill(ZERO);
                    if let Some(d) = self.dephasing_ev2.get(i * b..(i + 1) * b) {
                        for (o, &dv) in d.iter().enumerate() {
                            row.gam[o * b + o] += g[o * b + o] * dv;
                            row.sin[o * b + o] += gn[o * b + o] * dv;
                        }
                    }
                    for m in self.dephasing_matrices.cell(i) {
                        add_sandwich(m, g, 1.0, &mut row.gam, &mut row.tmp);
                        add_sandwich(m, gn, 1.0, &mut row.sin, &mut row.tmp);
                    }
                    for (r, v) in ret.iter_mut().zip(&row.gam) {
                        *r += v;
                    }
                    pack_hermitian(&row.sin, b, &mut row.packed);
                    for (s, p) in sin.iter_mut().zip(&row.packed) {
                        *s += p;
                    }
                },
            );
    }
}

/// Adds the Hermitian part P = H[Γ] of the phonon broadening held in
/// `out.retarded` (Σ^r = −iΓ/2), element by element of each block: the
/// transform acts on the packed real numbers of Γ, which is the same as
/// acting on the real and imaginary parts of every element.
fn add_principal_part(
    h: &HilbertTransform,
    energies: usize,
    b: usize,
    out: &mut ScatteringSelfEnergy,
) {
    let per = out.sites;
    let bb = b * b;
    let gamma: Vec<f64> = (0..energies * per)
        .into_par_iter()
        .map(|idx| out.gamma(idx))
        .collect();
    let principal = h.apply_columns(&gamma, energies, per);
    out.retarded
        .par_chunks_mut(bb)
        .zip(principal.par_chunks(bb))
        .for_each(|(r, p)| {
            let mut full = vec![ZERO; bb];
            unpack_hermitian(p, b, &mut full);
            for (x, y) in r.iter_mut().zip(&full) {
                *x += y;
            }
        });
}
