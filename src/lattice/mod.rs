//! The lattice's own heat transport: phonon transmission Ξ(ω) and the
//! lattice thermal conductance κ_ph of the device between two phonon leads.
//!
//! ## Model
//!
//! Every orbital site of the electron model carries one scalar displacement
//! u_i and a mass M_i (atomic mass units u). Nearest neighbours are joined by
//! springs k (N/m). The force-constant matrix K is block tridiagonal in the
//! same cells as the electron Hamiltonian: K_ij = −k_ij between bonded sites
//! i ≠ j, and the on-site constant K_ii is the sum of the springs of every
//! bond of site i, including the bond to a lead for an end site. With that
//! rule a rigid translation of the whole (device plus leads) costs no
//! energy (the acoustic sum rule), which is what lets a long wave pass:
//! leaving a lead bond out of K_ii pins the end site and makes Ξ(ω → 0) = 0.
//!
//! The equation of motion M ü = −K u at frequency ω becomes
//! ω² v = Φ v with the mass-weighted dynamical matrix Φ = M^(-1/2) K M^(-1/2)
//! and v = M^(1/2) u. Φ has the block form of a Hamiltonian with ω² in place
//! of the energy, so the electron machinery (lead self-energies, the
//! recursive Green's function kernel) serves unchanged:
//!
//! ```text
//! D^r(ω) = [ω² − Φ − Π_L(ω) − Π_R(ω) − Π_s(ω)]⁻¹
//! Λ_α    = i(Π_α − Π_α†)
//! Ξ(ω)   = Tr[Λ_L D^r_1N Λ_R D^a_N1]
//! ```
//!
//! Π_L, Π_R are the retarded self-energies of the semi-infinite phonon
//! leads ([`PhononLead`]); Π_s,i = −iωγ_i is an optional damping γ_i (1/ps)
//! on site i.
//!
//! ## Working unit
//!
//! Frequencies are angular frequencies in rad/ps and Φ is in (rad/ps)²:
//! k/M in (N/m)/u times [`crate::units::RAD2_PER_PS2_PER_N_PER_M_PER_U`]
//! (≈ 602.2). For springs of 1–100 N/m and masses of 1–200 u every number of
//! the solve sits between about 1 and 10⁵, and ω between 1 and 300 rad/ps
//! (ħω from 0.7 to 200 meV). Conversion to SI (W, W/K) happens only in
//! [`PhononSpectrum`].
//!
//! ## Contents
//!
//! - [`Lattice`]: the device's force constants, masses, leads and damping;
//!   constructors [`Lattice::chain`], [`Lattice::chain_with_leads`],
//!   [`Lattice::strip`], the general [`Lattice::new`] for user blocks and
//!   [`Lattice::continued_blocks`] for user blocks whose leads continue
//!   the end cells.
//! - [`PhononLead`]: a periodic lead and how it joins the device.
//! - [`Lattice::transmission`]: Ξ(ω) at one frequency.
//! - [`PhononSpectrum`]: Ξ on quadrature nodes, reused for κ_ph(T) and the
//!   heat current J_ph(T_L, T_R) at any number of temperatures.
//! - [`ProbeNetwork`]: every damped site as a heat reservoir (a probe); the
//!   terminal transmissions T_ab on the spectrum's nodes, the heat into each
//!   terminal, the floating lattice temperatures for a deposited power
//!   ([`ProbeNetwork::float_temperatures`]) and κ_ph with the probes
//!   floating ([`ProbeNetwork::floating_conductance`]).

use crate::C64;
use crate::units::RAD2_PER_PS2_PER_N_PER_M_PER_U;
use faer::Mat;

mod build;
mod leads;
mod probes;
mod quadrature;
mod spectrum;
mod transmission;

pub use leads::PhononLead;
pub use probes::{FloatParams, FloatingLattice, ProbeError, ProbeNetwork, TerminalMatrix};
pub use spectrum::{PhononSpectrum, SpectrumParams, conductance_density};
pub use transmission::TransmissionScratch;

/// Errors of the lattice model, each with the offending value and a hint.
#[derive(Debug, thiserror::Error, Clone, PartialEq)]
pub enum LatticeError {
    /// An input has the wrong size, sign or shape.
    #[error("lattice input {what}: {problem}; {hint}")]
    Invalid {
        /// Which input (for example `masses_u[3]`).
        what: String,
        /// What was found against what was expected.
        problem: String,
        /// How to fix it.
        hint: String,
    },
    /// A lead self-energy could not be formed at this frequency.
    #[error("phonon lead self-energy at ω = {omega_rad_per_ps} rad/ps: {source}")]
    Lead {
        /// Angular frequency (rad/ps).
        omega_rad_per_ps: f64,
        /// The lead solver's error.
        source: crate::leads::LeadError,
    },
    /// The recursive Green's function met a singular block.
    #[error(
        "phonon Green's function at ω = {omega_rad_per_ps} rad/ps: {source}; keep frequencies off ω = 0 and off the lead band tops"
    )]
    Kernel {
        /// Angular frequency (rad/ps).
        omega_rad_per_ps: f64,
        /// The kernel's error.
        source: crate::rgf::RgfError,
    },
    /// The frequency integral did not reach its tolerance.
    #[error(
        "phonon frequency integral not converged: relative change {relative_change:.3e} at T = {temperature_k} K after {nodes} frequency points (limit {max_nodes}); raise SpectrumParams::max_nodes or loosen relative_tolerance"
    )]
    NotConverged {
        /// Temperature whose κ_ph still changed the most (K).
        temperature_k: f64,
        /// Its relative change in the last refinement.
        relative_change: f64,
        /// Frequency points used.
        nodes: usize,
        /// The limit that stopped the refinement.
        max_nodes: usize,
    },
}

pub(crate) fn invalid(what: impl Into<String>, problem: String, hint: &str) -> LatticeError {
    LatticeError::Invalid {
        what: what.into(),
        problem,
        hint: hint.into(),
    }
}

/// A device lattice between two phonon leads, in block-tridiagonal form.
///
/// Build it with [`Lattice::chain`], [`Lattice::chain_with_leads`],
/// [`Lattice::strip`] or [`Lattice::new`]. The dynamical blocks are formed
/// once at construction.
#[derive(Clone, Debug)]
pub struct Lattice {
    masses_u: Vec<f64>,
    force_onsite: Vec<Mat<f64>>,
    force_coupling: Vec<Mat<f64>>,
    left: PhononLead,
    right: PhononLead,
    damping_per_ps: Vec<f64>,
    dyn_onsite: Vec<Mat<C64>>,
    dyn_coupling: Vec<Mat<C64>>,
    left_dyn: leads::LeadDynamics,
    right_dyn: leads::LeadDynamics,
    /// Settings of the decimation used when a lead's mode solve fails.
    pub decimation: crate::leads::DecimationParams,
}

/// Which lead of a lattice.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum PhononSide {
    /// The lead attached to the first cell.
    Left,
    /// The lead attached to the last cell.
    Right,
}

impl Lattice {
    /// The general constructor (user force-constant blocks).
    ///
    /// - `masses_u`: one mass per site (u), cell by cell (N·b entries).
    /// - `force_onsite`: K_ii (N/m, symmetric b×b) with the device's own
    ///   bonds and any on-site pinning, but without the bonds to the leads:
    ///   those are added here from each lead's contact block, so that the
    ///   end sites obey the acoustic sum rule.
    /// - `force_coupling`: K_i,i+1 (N/m), N − 1 blocks.
    /// - `left`, `right`: the leads ([`PhononLead`]).
    pub fn new(
        masses_u: Vec<f64>,
        force_onsite: Vec<Mat<f64>>,
        force_coupling: Vec<Mat<f64>>,
        left: PhononLead,
        right: PhononLead,
    ) -> Result<Self, LatticeError> {
        build::validate(&masses_u, &force_onsite, &force_coupling)?;
        let b = force_onsite[0].nrows();
        left.validate("left lead", b)?;
        right.validate("right lead", b)?;
        let mut force_onsite = force_onsite;
        let n = force_onsite.len();
        build::add_lead_bonds(&mut force_onsite[0], &left.contact, PhononSide::Left);
        build::add_lead_bonds(&mut force_onsite[n - 1], &right.contact, PhononSide::Right);
        let (dyn_onsite, dyn_coupling) =
            build::dynamical_blocks(&masses_u, &force_onsite, &force_coupling);
        let first = &masses_u[..b];
        let last = &masses_u[(n - 1) * b..];
        let left_dyn = left.dynamics(first, PhononSide::Left);
        let right_dyn = right.dynamics(last, PhononSide::Right);
        Ok(Self {
            damping_per_ps: vec![0.0; masses_u.len()],
            masses_u,
            force_onsite,
            force_coupling,
            left,
            right,
            dyn_onsite,
            dyn_coupling,
            left_dyn,
            right_dyn,
            decimation: crate::leads::DecimationParams::default(),
        })
    }

    /// A chain (one site per cell) whose leads continue its end sites.
    ///
    /// `masses_u[i]` is the mass of site i (u) and `springs_n_per_m[i]` the
    /// spring of the bond (i, i+1) (N/m); both have one entry per site, so
    /// the last spring is the bond from the last site to the right lead.
    /// The left lead continues site 0 (its mass and spring, joined by that
    /// spring too); the right lead continues the last site likewise.
    pub fn chain(masses_u: &[f64], springs_n_per_m: &[f64]) -> Result<Self, LatticeError> {
        let n = masses_u.len();
        if n == 0 || springs_n_per_m.len() != n {
            return Err(invalid(
                "springs_n_per_m",
                format!(
                    "{} springs for {} sites",
                    springs_n_per_m.len(),
                    masses_u.len()
                ),
                "give one mass and one spring per site (at least one site); the spring of bond (i, i+1) sits at site i",
            ));
        }
        let (m0, k0) = (masses_u[0], springs_n_per_m[0]);
        let (mn, kn) = (masses_u[n - 1], springs_n_per_m[n - 1]);
        Self::chain_with_leads(
            masses_u,
            &springs_n_per_m[..n - 1],
            PhononLead::chain(m0, k0, k0),
            PhononLead::chain(mn, kn, kn),
        )
    }

    /// A chain between leads of their own: `internal_springs_n_per_m` has
    /// N − 1 entries (bond (i, i+1) at index i); the two joining bonds are
    /// the leads' contact springs.
    pub fn chain_with_leads(
        masses_u: &[f64],
        internal_springs_n_per_m: &[f64],
        left: PhononLead,
        right: PhononLead,
    ) -> Result<Self, LatticeError> {
        let n = masses_u.len();
        if n == 0 || internal_springs_n_per_m.len() + 1 != n {
            return Err(invalid(
                "internal_springs_n_per_m",
                format!(
                    "{} internal springs for {} sites",
                    internal_springs_n_per_m.len(),
                    n
                ),
                "a chain of N ≥ 1 sites has N − 1 internal bonds; the leads name the joining bonds",
            ));
        }
        let (onsite, coupling) = build::strip_blocks(1, internal_springs_n_per_m, &vec![0.0; n], n);
        Self::new(masses_u.to_vec(), onsite, coupling, left, right)
    }

    /// A strip W sites across with free edges, one value per cell: the
    /// mass of every site of cell i, the longitudinal spring of the bonds
    /// from cell i to cell i+1 (the last one joins the right lead), and the
    /// transverse spring between neighbouring sites inside cell i. The
    /// leads continue the end cells (their masses and springs; joined by
    /// their longitudinal spring).
    pub fn strip(
        width: usize,
        masses_u: &[f64],
        longitudinal_n_per_m: &[f64],
        transverse_n_per_m: &[f64],
    ) -> Result<Self, LatticeError> {
        let n = masses_u.len();
        if width == 0 || n == 0 || longitudinal_n_per_m.len() != n || transverse_n_per_m.len() != n
        {
            return Err(invalid(
                "strip",
                format!(
                    "width {width}, {n} cell masses, {} longitudinal and {} transverse springs",
                    longitudinal_n_per_m.len(),
                    transverse_n_per_m.len()
                ),
                "give a width ≥ 1 and one mass, one longitudinal and one transverse spring per cell",
            ));
        }
        let (onsite, coupling) =
            build::strip_blocks(width, &longitudinal_n_per_m[..n - 1], transverse_n_per_m, n);
        let lead = |i: usize| {
            let k = longitudinal_n_per_m[i];
            PhononLead::strip(width, masses_u[i], k, transverse_n_per_m[i], k)
        };
        let masses = masses_u
            .iter()
            .flat_map(|&m| std::iter::repeat_n(m, width))
            .collect();
        Self::new(masses, onsite, coupling, lead(0), lead(n - 1))
    }

    /// A lattice of user blocks whose leads continue its end cells.
    ///
    /// Unlike [`Lattice::new`], `force_onsite` holds the full on-site
    /// blocks K_ii (N/m), the springs of every bond of a site on its
    /// diagonal, the bonds to the leads included, as in a periodic crystal.
    /// `force_coupling` holds K_i,i+1 (N − 1 blocks) and `ends` the blocks
    /// that continue the lattice beyond the first and the last cell (the
    /// bond from lead cell −1 to cell 0, and from cell N − 1 to lead cell
    /// N). Each lead repeats its end cell (masses, on-site block) with the
    /// end block as its cell-to-cell coupling.
    pub fn continued_blocks(
        masses_u: Vec<f64>,
        force_onsite: Vec<Mat<f64>>,
        force_coupling: Vec<Mat<f64>>,
        ends: (Mat<f64>, Mat<f64>),
    ) -> Result<Self, LatticeError> {
        build::validate(&masses_u, &force_onsite, &force_coupling)?;
        let (n, b) = (force_onsite.len(), force_onsite[0].nrows());
        build::check_block("left end coupling".into(), &ends.0, b, false)?;
        build::check_block("right end coupling".into(), &ends.1, b, false)?;
        let left = PhononLead::continuing(&masses_u[..b], &force_onsite[0], &ends.0);
        let right = PhononLead::continuing(&masses_u[(n - 1) * b..], &force_onsite[n - 1], &ends.1);
        // `new` adds the lead bonds to the end blocks; these blocks hold
        // them already.
        let mut onsite = force_onsite;
        let minus = |m: &Mat<f64>| Mat::from_fn(m.nrows(), m.ncols(), |r, c| -m[(r, c)]);
        build::add_lead_bonds(&mut onsite[0], &minus(&ends.0), PhononSide::Left);
        build::add_lead_bonds(&mut onsite[n - 1], &minus(&ends.1), PhononSide::Right);
        Self::new(masses_u, onsite, force_coupling, left, right)
    }

    /// Lowest and highest ω² ((rad/ps)²) of the Bloch bands of one lead.
    /// A lowest value below zero (beyond rounding) means the lead's force
    /// constants are unstable: some wave would grow instead of travel.
    pub fn lead_band_range_rad2_per_ps2(&self, side: PhononSide) -> (f64, f64) {
        match side {
            PhononSide::Left => self.left_dyn.band_range,
            PhononSide::Right => self.right_dyn.band_range,
        }
    }

    /// Adds a damping γ_i (1/ps, one per site, ≥ 0): the self-energy
    /// Π_s,i = −iωγ_i on the diagonal of site i.
    pub fn with_damping(mut self, damping_per_ps: Vec<f64>) -> Result<Self, LatticeError> {
        if damping_per_ps.len() != self.masses_u.len() {
            return Err(invalid(
                "damping_per_ps",
                format!(
                    "{} values for {} sites",
                    damping_per_ps.len(),
                    self.masses_u.len()
                ),
                "give one damping rate per site (0 for none)",
            ));
        }
        if let Some(i) = damping_per_ps
            .iter()
            .position(|g| !(g.is_finite() && *g >= 0.0))
        {
            return Err(invalid(
                format!("damping_per_ps[{i}]"),
                format!("{} is not a finite rate ≥ 0", damping_per_ps[i]),
                "damping rates are in 1/ps and cannot be negative",
            ));
        }
        self.damping_per_ps = damping_per_ps;
        Ok(self)
    }

    /// Number of cells N.
    pub fn cells(&self) -> usize {
        self.force_onsite.len()
    }

    /// Sites per cell b.
    pub fn sites_per_cell(&self) -> usize {
        self.force_onsite[0].nrows()
    }

    /// Masses per site (u), cell by cell.
    pub fn masses_u(&self) -> &[f64] {
        &self.masses_u
    }

    /// Force-constant blocks K_ii (N/m), lead bonds included.
    pub fn force_onsite(&self) -> &[Mat<f64>] {
        &self.force_onsite
    }

    /// Force-constant blocks K_i,i+1 (N/m).
    pub fn force_coupling(&self) -> &[Mat<f64>] {
        &self.force_coupling
    }

    /// Dynamical blocks Φ_ii ((rad/ps)²).
    pub fn dynamical_onsite(&self) -> &[Mat<C64>] {
        &self.dyn_onsite
    }

    /// Dynamical blocks Φ_i,i+1 ((rad/ps)²).
    pub fn dynamical_coupling(&self) -> &[Mat<C64>] {
        &self.dyn_coupling
    }

    /// Damping rates γ_i (1/ps), one per site.
    pub fn damping_per_ps(&self) -> &[f64] {
        &self.damping_per_ps
    }

    /// One of the two leads.
    pub fn lead(&self, side: PhononSide) -> &PhononLead {
        match side {
            PhononSide::Left => &self.left,
            PhononSide::Right => &self.right,
        }
    }

    /// Top of the frequency band that both leads carry (rad/ps): above it
    /// at least one lead has no travelling wave and Ξ = 0.
    pub fn band_top_rad_per_ps(&self) -> f64 {
        self.left_dyn.band_top.min(self.right_dyn.band_top)
    }

    /// Frequencies (rad/ps) where a lead's subband opens or closes
    /// (Bloch eigenvalues at q = 0 and q = π of both leads), below
    /// [`Self::band_top_rad_per_ps`], sorted: the places where Ξ may jump
    /// or have a square-root edge.
    pub fn band_edges_rad_per_ps(&self) -> Vec<f64> {
        let top = self.band_top_rad_per_ps();
        let mut e: Vec<f64> = self
            .left_dyn
            .edges
            .iter()
            .chain(&self.right_dyn.edges)
            .copied()
            .filter(|&w| w > 0.0 && w < top)
            .collect();
        e.sort_by(f64::total_cmp);
        e.dedup_by(|a, b| (*a - *b).abs() <= 1e-12 * top);
        e
    }
}

/// Converts k/M from (N/m)/u to (rad/ps)².
pub fn rad2_per_ps2(spring_n_per_m: f64, mass_u: f64) -> f64 {
    spring_n_per_m / mass_u * RAD2_PER_PS2_PER_N_PER_M_PER_U
}

/// Top of the band of a uniform chain, ω_max = 2 (k/M)^(1/2) (rad/ps).
pub fn chain_band_top(mass_u: f64, spring_n_per_m: f64) -> f64 {
    2.0 * rad2_per_ps2(spring_n_per_m, mass_u).sqrt()
}
