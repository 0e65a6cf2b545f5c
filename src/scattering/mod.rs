//! Scattering self-energies inside the device (Σ0).
//!
//! All mechanisms are local: diagonal in the orbital basis (site i,
//! orbital o). Index s = i·b + o runs over the N·b orbital sites.
//!
//! - Elastic dephasing: Σ^r_0 = d G^r, Σ^in_0 = d G^n (no energy exchange).
//! - Einstein phonons in the self-consistent Born approximation, with
//!   emission and absorption written so that scattering into E needs a filled
//!   state at the source energy and scattering out of E needs an empty state
//!   at the target energy (exclusion principle):
//!   Σ^in(E) = Σ_m D_m [(N_m+1) G^n(E+ħω_m) + N_m G^n(E−ħω_m)],
//!   Σ^out(E) = Σ_m D_m [(N_m+1) G^p(E−ħω_m) + N_m G^p(E+ħω_m)].
//!   The retarded part is −iΓ0/2 plus, optionally, the Hermitian part from
//!   the Hilbert transform of Γ0 over the grid.
//!
//! # Lattice temperature
//!
//! The occupation N_m is the Bose function of ħω_m at the temperature of
//! the lattice where the electron meets the phonon. Without a profile that
//! is the mode's bath temperature, one value for the whole device. When the
//! lattice heats up unevenly (its own heat transport, solved elsewhere,
//! turns the power the electrons deposit into a temperature per site), the
//! caller passes a lattice-temperature profile T_L,s with one value (K) per
//! orbital site s, and site s then uses N_m,s = 1/(exp(ħω_m/k_B T_L,s) − 1)
//! in both Σ^in and Σ^out. A hotter site has more phonons to absorb (the
//! N term grows) and stimulates more emission (N + 1 grows by as much), so
//! for electrons that would otherwise emit, the net energy handed to that
//! site falls. The profile is passed as an argument rather than stored on
//! [`Scattering`], because it is a state of the lattice that changes while
//! the electron and lattice problems are solved together, not a setting of
//! the model; [`Scattering::self_energy_into`] is the profile-free form
//! (every site at the bath temperature).

use crate::C64;

mod block_rebuild;
mod blocks;
mod hilbert;
pub use blocks::{
    CouplingMatrices, GreenBlocks, add_sandwich, pack_hermitian, packed_broadening, spectral_into,
    trace_product_re, unpack_hermitian,
};
pub use hilbert::HilbertTransform;

/// One Einstein phonon mode.
#[derive(Clone, Debug, Default, PartialEq, serde::Serialize)]
pub struct PhononMode {
    /// Energy asked for (eV).
    pub requested_energy_ev: f64,
    /// Energy snapped to a whole number of grid steps (eV).
    pub energy_ev: f64,
    /// ħω in grid steps.
    pub steps: usize,
    /// Coupling D_m on each orbital site (eV²), length N·b: one
    /// single-orbital source per site (see [`CouplingMatrices`]).
    pub coupling_ev2: Vec<f64>,
    /// Sources that act on several orbitals of a cell (coupling matrices in
    /// eV, per cell); empty for the diagonal model. Any source here puts
    /// the Born loop on full b × b blocks.
    pub coupling_matrices: CouplingMatrices,
    /// Bath temperature (K).
    pub bath_temperature_k: f64,
}

impl PhononMode {
    /// Bose occupation N_m at the bath temperature.
    pub fn occupation(&self) -> f64 {
        self.occupation_at(self.bath_temperature_k)
    }

    /// Bose occupation of this mode at a lattice temperature (K).
    pub fn occupation_at(&self, temperature_k: f64) -> f64 {
        crate::units::bose(self.energy_ev, temperature_k)
    }

    /// Occupation at each of `sites` orbital sites: from the
    /// lattice-temperature profile (K, one value per orbital site) when
    /// given, else the bath occupation everywhere. The bath temperature and
    /// a uniform profile equal to it give the same numbers bit for bit.
    pub fn site_occupations(
        &self,
        sites: usize,
        lattice_temperature_k: Option<&[f64]>,
    ) -> Vec<f64> {
        match lattice_temperature_k {
            Some(t) => t.iter().map(|&t| self.occupation_at(t)).collect(),
            None => vec![self.occupation(); sites],
        }
    }
}

/// Checks a lattice-temperature profile against a device of `sites`
/// orbital sites: one finite, positive temperature (K) per site. The error
/// says which entry is wrong and what was expected.
pub fn check_lattice_temperature(profile: &[f64], sites: usize) -> Result<(), String> {
    if profile.len() != sites {
        return Err(format!(
            "lattice-temperature profile has {} values, the device {sites} orbital sites \
             (give one temperature in K per orbital site)",
            profile.len()
        ));
    }
    match profile.iter().position(|t| !(t.is_finite() && *t > 0.0)) {
        Some(s) => Err(format!(
            "lattice temperature at orbital site {s} is {} K; expected a finite \
             temperature above 0 K (check the lattice response that produced it)",
            profile[s]
        )),
        None => Ok(()),
    }
}

/// What scatters electrons inside the device.
#[derive(Clone, Debug, Default, PartialEq, serde::Serialize)]
pub struct Scattering {
    /// Elastic dephasing strength on each orbital site (eV²), length N·b;
    /// empty when there is none.
    pub dephasing_ev2: Vec<f64>,
    /// Dephasing sources that act on several orbitals of a cell (coupling
    /// matrices in eV, per cell), besides `dephasing_ev2`.
    pub dephasing_matrices: CouplingMatrices,
    /// Phonon modes.
    pub phonons: Vec<PhononMode>,
    /// Include the Hermitian (principal-value) part of the phonon self-energy.
    pub hermitian_part: bool,
}

impl Scattering {
    /// True when nothing scatters (the coherent case).
    pub fn is_coherent(&self) -> bool {
        self.dephasing_ev2.iter().all(|&d| d == 0.0)
            && self.dephasing_matrices.is_zero()
            && self
                .phonons
                .iter()
                .all(|m| m.coupling_ev2.iter().all(|&d| d == 0.0) && m.coupling_matrices.is_zero())
    }

    /// True when some source is a coupling matrix: Σ0 is then kept as full
    /// b × b blocks per cell ([`ScatteringSelfEnergy::blocks`]).
    pub fn uses_blocks(&self) -> bool {
        !self.dephasing_matrices.is_empty()
            || self.phonons.iter().any(|m| !m.coupling_matrices.is_empty())
    }

    /// True when dephasing acts anywhere (per-site strengths or matrices).
    pub fn has_dephasing(&self) -> bool {
        self.dephasing_ev2.iter().any(|&d| d != 0.0) || !self.dephasing_matrices.is_zero()
    }

    /// Largest phonon energy (eV), 0 without phonons.
    pub fn max_phonon_energy(&self) -> f64 {
        self.phonons.iter().map(|m| m.energy_ev).fold(0.0, f64::max)
    }
}

/// Σ0 on every energy, stored flat. Two layouts:
///
/// - diagonal (`blocks` = None): one value per orbital site, index
///   k·(N·b) + s;
/// - blocks (`blocks` = Some(b)): the b × b block of every cell, index
///   k·(N·b²) + i·b² + r·b + c, Σ^in_0 packed as b² reals (see
///   [`pack_hermitian`]).
#[derive(Clone, Debug, PartialEq)]
pub struct ScatteringSelfEnergy {
    /// Values per energy: orbital sites N·b, or N·b² with blocks.
    pub sites: usize,
    /// Retarded Σ^r_0 (eV).
    pub retarded: Vec<C64>,
    /// In-scattering Σ^in_0 = −iΣ^< (eV): real on the diagonal; packed
    /// Hermitian blocks with blocks.
    pub inscatter: Vec<f64>,
    /// `Some(b)` when the values are the b × b blocks of every cell.
    pub blocks: Option<usize>,
}

impl ScatteringSelfEnergy {
    /// All zero.
    pub fn zeros(energies: usize, sites: usize) -> Self {
        Self {
            sites,
            retarded: vec![C64::new(0.0, 0.0); energies * sites],
            inscatter: vec![0.0; energies * sites],
            blocks: None,
        }
    }

    /// All zero, as b × b blocks of `cells` cells.
    pub fn zeros_blocks(energies: usize, cells: usize, b: usize) -> Self {
        Self {
            blocks: Some(b),
            ..Self::zeros(energies, cells * b * b)
        }
    }

    /// All zero in the layout `scattering` needs, for `energies` energies
    /// and `cells` cells of `orbitals` orbitals.
    pub fn zeros_for(
        scattering: &Scattering,
        energies: usize,
        cells: usize,
        orbitals: usize,
    ) -> Self {
        if scattering.uses_blocks() {
            Self::zeros_blocks(energies, cells, orbitals)
        } else {
            Self::zeros(energies, cells * orbitals)
        }
    }

    /// The layout in words, for messages.
    pub fn layout(&self) -> String {
        match self.blocks {
            None => format!("{} orbital-site values per energy (diagonal)", self.sites),
            Some(b) => format!(
                "{b}×{b} blocks of {} cells per energy (coupling matrices)",
                self.sites / (b * b).max(1)
            ),
        }
    }

    /// Number of energies.
    pub fn energies(&self) -> usize {
        self.inscatter.len() / self.sites.max(1)
    }

    /// Broadening Γ0 = −2 Im Σ^r_0 at flat index; with blocks, the
    /// packed element of Γ0 = i(Σ^r_0 − Σ^r_0†) (the layout of Σ^in_0).
    #[inline]
    pub fn gamma(&self, idx: usize) -> f64 {
        match self.blocks {
            None => -2.0 * self.retarded[idx].im,
            Some(b) => {
                let o = idx % (b * b);
                let base = idx - o;
                packed_broadening(&self.retarded[base..base + b * b], b, o / b, o % b)
            }
        }
    }

    /// Out-scattering Σ^out_0 = Γ0 − Σ^in_0 at flat index.
    #[inline]
    pub fn outscatter(&self, idx: usize) -> f64 {
        self.gamma(idx) - self.inscatter[idx]
    }
}

/// Diagonal Green's functions on every energy and orbital site, stored flat
/// (index k·(N·b) + s): what the local self-energies need.
#[derive(Clone, Debug, PartialEq)]
pub struct LocalGreen {
    /// Orbital sites per energy (N·b).
    pub sites: usize,
    /// Diagonal of G^r (1/eV).
    pub retarded: Vec<C64>,
    /// Diagonal of G^n = −iG^< (1/eV), real.
    pub filled: Vec<f64>,
}

impl LocalGreen {
    /// Spectral function A = −2 Im G^r at flat index.
    #[inline]
    pub fn spectral(&self, idx: usize) -> f64 {
        -2.0 * self.retarded[idx].im
    }

    /// G^p = A − G^n at flat index.
    #[inline]
    pub fn empty(&self, idx: usize) -> f64 {
        self.spectral(idx) - self.filled[idx]
    }
}

impl Scattering {
    /// Build Σ0 from the local Green's functions on the whole grid (the
    /// "rebuild" step of the Born loop). Values of G at E ± ħω outside the
    /// grid count as zero.
    pub fn self_energy(
        &self,
        green: &LocalGreen,
        energies: usize,
        hilbert: Option<&HilbertTransform>,
    ) -> ScatteringSelfEnergy {
        let mut out = ScatteringSelfEnergy::zeros(0, green.sites);
        self.self_energy_into(green, energies, hilbert, &mut out);
        out
    }

    /// [`Scattering::self_energy`] written into `out`, whose storage is
    /// reused (the Born loop rebuilds Σ0 every iteration). Diagonal layout
    /// only: sources with coupling matrices need
    /// [`Scattering::self_energy_blocks_into`].
    pub fn self_energy_into(
        &self,
        green: &LocalGreen,
        energies: usize,
        hilbert: Option<&HilbertTransform>,
        out: &mut ScatteringSelfEnergy,
    ) {
        self.self_energy_at_into(green, energies, hilbert, None, out);
    }

    /// [`Scattering::self_energy_into`] with the phonon occupations taken
    /// from a lattice-temperature profile (K, one value per orbital site;
    /// see the module docs). `None` uses each mode's bath temperature.
    ///
    /// # Panics
    ///
    /// When the profile does not hold one value per orbital site
    /// ([`check_lattice_temperature`] tells before).
    pub fn self_energy_at_into(
        &self,
        green: &LocalGreen,
        energies: usize,
        hilbert: Option<&HilbertTransform>,
        lattice_temperature_k: Option<&[f64]>,
        out: &mut ScatteringSelfEnergy,
    ) {
        let ns = green.sites;
        if let Some(t) = lattice_temperature_k {
            assert_eq!(t.len(), ns, "lattice-temperature profile length");
        }
        out.sites = ns;
        out.retarded.resize(energies * ns, C64::new(0.0, 0.0));
        out.inscatter.resize(energies * ns, 0.0);
        self.phonon_broadening_into(green, energies, lattice_temperature_k, out);
        self.add_hermitian_and_dephasing(green, energies, hilbert, out);
    }

    /// The phonon part of Σ^in_0 and Im Σ^r_0 = −Γ0/2, overwriting `out`.
    fn phonon_broadening_into(
        &self,
        green: &LocalGreen,
        energies: usize,
        lattice_temperature_k: Option<&[f64]>,
        out: &mut ScatteringSelfEnergy,
    ) {
        use rayon::prelude::*;
        let ns = green.sites;
        // Rows (one energy each) are independent: built in parallel, each
        // element summing the modes in the same order whatever the thread
        // count.
        let occupations = self.occupations(ns, lattice_temperature_k);
        out.inscatter
            .par_chunks_mut(ns.max(1))
            .zip(out.retarded.par_chunks_mut(ns.max(1)))
            .enumerate()
            .for_each(|(k, (sin_row, ret_row))| {
                self.phonon_row(green, energies, &occupations, k, sin_row, ret_row);
            });
    }

    /// N_m at every orbital site, per mode.
    fn occupations(&self, ns: usize, lattice_temperature_k: Option<&[f64]>) -> Vec<Vec<f64>> {
        self.phonons
            .iter()
            .map(|m| m.site_occupations(ns, lattice_temperature_k))
            .collect()
    }

    /// The phonon part of row k: Σ^in_0 and Im Σ^r_0 = −Γ0/2 from G at
    /// E_k ± ħω, overwriting the row. The broadening goes into
    /// Im Σ^r = −Γ/2 as it is summed (halving is exact, so this equals
    /// −(Σ Γ_mode)/2).
    fn phonon_row(
        &self,
        green: &LocalGreen,
        energies: usize,
        occupations: &[Vec<f64>],
        k: usize,
        sin_row: &mut [f64],
        ret_row: &mut [C64],
    ) {
        let ns = green.sites;
        sin_row.fill(0.0);
        ret_row.fill(C64::new(0.0, 0.0));
        for (mode, occ) in self.phonons.iter().zip(occupations) {
            let w = mode.steps;
            for s in 0..ns {
                let d = mode.coupling_ev2[s];
                if d == 0.0 {
                    continue;
                }
                let n = occ[s];
                let mut sin = 0.0;
                let mut sout = 0.0;
                if k + w < energies {
                    let up = (k + w) * ns + s;
                    // emission into E from E + ħω; absorption out of E to E + ħω
                    sin += (n + 1.0) * green.filled[up];
                    sout += n * green.empty(up);
                }
                if k >= w {
                    let down = (k - w) * ns + s;
                    sin += n * green.filled[down];
                    sout += (n + 1.0) * green.empty(down);
                }
                sin_row[s] += d * sin;
                ret_row[s].im -= 0.5 * (d * (sin + sout));
            }
        }
    }

    /// Adds the elastic dephasing of row k (Σ^r_0 += d G^r, Σ^in_0 +=
    /// d G^n) to the row.
    fn dephasing_row(
        &self,
        green: &LocalGreen,
        k: usize,
        ret_row: &mut [C64],
        sin_row: &mut [f64],
    ) {
        let ns = green.sites;
        let (gr, gn) = (
            &green.retarded[k * ns..(k + 1) * ns],
            &green.filled[k * ns..(k + 1) * ns],
        );
        for s in 0..ns {
            let d = self.dephasing_ev2[s];
            if d != 0.0 {
                ret_row[s] += gr[s] * d;
                sin_row[s] += d * gn[s];
            }
        }
    }

    /// True when each energy row of Σ0 needs G only at that energy and
    /// E ± ħω (diagonal layout, no Hermitian part): then
    /// [`Scattering::self_energy_rows_into`] may build any set of rows.
    pub fn row_local(&self) -> bool {
        !self.uses_blocks() && (!self.hermitian_part || self.phonons.is_empty())
    }

    /// [`Scattering::self_energy_at_into`] on the energy rows k with
    /// `rows(k)` true only (other rows of `out` are left as they are), for
    /// a [`Scattering::row_local`] model, with the same numbers. Each row
    /// is built in parallel and handed, while still in cache, to
    /// `each(k, Σ^r_0 row, Σ^in_0 row)`; what `each` returns comes back in
    /// row order. `out` must already hold every energy.
    ///
    /// # Panics
    ///
    /// When the model is not row-local, `out` is too short, or the
    /// lattice-temperature profile does not hold one value per site.
    pub fn self_energy_rows_into<R: Send>(
        &self,
        green: &LocalGreen,
        energies: usize,
        lattice_temperature_k: Option<&[f64]>,
        out: &mut ScatteringSelfEnergy,
        rows: impl Fn(usize) -> bool + Sync,
        each: impl Fn(usize, &[C64], &[f64]) -> R + Sync,
    ) -> Vec<R> {
        use rayon::prelude::*;
        assert!(self.row_local(), "row-by-row rebuild of a non-local model");
        let ns = green.sites;
        assert!(out.sites == ns && out.inscatter.len() >= energies * ns);
        if let Some(t) = lattice_temperature_k {
            assert_eq!(t.len(), ns, "lattice-temperature profile length");
        }
        let occupations = self.occupations(ns, lattice_temperature_k);
        let dephasing = !self.dephasing_ev2.is_empty();
        out.inscatter
            .par_chunks_mut(ns.max(1))
            .zip(out.retarded.par_chunks_mut(ns.max(1)))
            .enumerate()
            .take(energies)
            .filter(|(k, _)| rows(*k))
            .map(|(k, (sin_row, ret_row))| {
                self.phonon_row(green, energies, &occupations, k, sin_row, ret_row);
                if dephasing {
                    self.dephasing_row(green, k, ret_row, sin_row);
                }
                each(k, ret_row, sin_row)
            })
            .collect()
    }

    /// Adds the Hermitian part of the phonon self-energy (when on) and the
    /// elastic dephasing to `out`, which holds the phonon broadening.
    fn add_hermitian_and_dephasing(
        &self,
        green: &LocalGreen,
        energies: usize,
        hilbert: Option<&HilbertTransform>,
        out: &mut ScatteringSelfEnergy,
    ) {
        use rayon::prelude::*;
        let ns = green.sites;
        if self.hermitian_part && !self.phonons.is_empty() {
            let h = hilbert.expect("Hilbert transform plan when the Hermitian part is on");
            let gamma_ph: Vec<f64> = out.retarded.par_iter().map(|r| -2.0 * r.im).collect();
            let principal = h.apply_columns(&gamma_ph, energies, ns);
            out.retarded
                .par_iter_mut()
                .zip(principal.par_iter())
                .for_each(|(r, p)| r.re += p);
        }
        if !self.dephasing_ev2.is_empty() {
            out.retarded
                .par_chunks_mut(ns.max(1))
                .zip(out.inscatter.par_chunks_mut(ns.max(1)))
                .enumerate()
                .take(energies)
                .for_each(|(k, (r, sin))| self.dephasing_row(green, k, r, sin));
        }
    }
}
