//! Phonon leads: semi-infinite periodic lattices and their self-energies.
//!
//! A lead is a periodic lattice of cells with force constants K00 (inside a
//! bulk cell, every bond of a site on its diagonal) and K01 (from a cell to
//! its neighbour further along +x), joined to the device by a contact block.
//! Its surface cell, the one touching the device, differs from a bulk cell:
//! the bond that a bulk cell has towards the device side is replaced by the
//! contact bonds, on the diagonal too (acoustic sum rule).
//!
//! The self-energy on the device end cell follows in two steps, with
//! z = ω² in place of the energy of the electron problem:
//!
//! ```text
//! S   = self-energy of the bulk lead beyond the surface cell
//! g_s = [z − Φ_s − S]⁻¹                    (surface cell)
//! Π_L = Cᵀ g_s C,  C = Φ_lead,device      (left)
//! Π_R = C g_s Cᵀ,  C = Φ_device,lead      (right)
//! ```
//!
//! S is the closed form of the uniform chain for one site per cell
//! ([`crate::leads::chain_self_energy`] with E → ω²: no imaginary shift, so
//! exact at low frequency), and for wider cells the Bloch-mode solve of
//! [`crate::leads::mode_self_energy`], falling back to decimation
//! ([`crate::leads::surface_green_function`]) where the modes are not
//! trustworthy. Both are exact for a lead whose surface cell equals a bulk
//! cell, and the two-step form keeps them exact for any contact spring.

use super::build::{check_block, check_masses, mass_weight, transverse_block};
use super::{LatticeError, PhononSide, invalid};
use crate::C64;
use crate::leads::{DecimationParams, Lead, Side, chain_self_energy};
use faer::Mat;
use faer::linalg::solvers::DenseSolveCore;

/// A semi-infinite periodic phonon lead and its contact with the device.
#[derive(Clone, Debug, PartialEq)]
pub struct PhononLead {
    /// Mass of each site of a lead cell (u).
    pub masses_u: Vec<f64>,
    /// Force constants of a bulk lead cell K00 (N/m, symmetric), the
    /// springs of all its bonds on the diagonal.
    pub onsite: Mat<f64>,
    /// Force constants K01 from a lead cell to its neighbour along +x (N/m).
    pub coupling: Mat<f64>,
    /// Force constants between the lead's surface cell and the device end
    /// cell (N/m): K_lead,device (lead sites × device sites) for the left
    /// lead, K_device,lead (device sites × lead sites) for the right lead.
    pub contact: Mat<f64>,
}

/// The mass-weighted lead, ready for self-energies.
#[derive(Clone, Debug)]
pub(super) struct LeadDynamics {
    bulk: Lead,
    surface: Mat<C64>,
    contact: Mat<C64>,
    /// Top of the lead's band (rad/ps).
    pub band_top: f64,
    /// Lowest and highest ω² of the lead's Bloch bands ((rad/ps)²); a
    /// stable lead has no ω² below zero.
    pub band_range: (f64, f64),
    /// Subband edges at q = 0 and q = π (rad/ps).
    pub edges: Vec<f64>,
}

impl PhononLead {
    /// A uniform chain lead: mass (u), spring (N/m), and the spring of the
    /// bond that joins it to the device (N/m).
    pub fn chain(mass_u: f64, spring_n_per_m: f64, contact_n_per_m: f64) -> Self {
        Self::strip(1, mass_u, spring_n_per_m, 0.0, contact_n_per_m)
    }

    /// A uniform strip lead W sites wide with free edges: mass of every
    /// site (u), longitudinal and transverse springs (N/m), and the
    /// longitudinal spring of the bonds that join it to the device, site r
    /// of the lead to site r of the device (N/m).
    pub fn strip(
        width: usize,
        mass_u: f64,
        longitudinal_n_per_m: f64,
        transverse_n_per_m: f64,
        contact_n_per_m: f64,
    ) -> Self {
        let diag = |k: f64| Mat::from_fn(width, width, |r, c| if r == c { k } else { 0.0 });
        let mut onsite = transverse_block(width, transverse_n_per_m);
        for r in 0..width {
            onsite[(r, r)] += 2.0 * longitudinal_n_per_m;
        }
        Self {
            masses_u: vec![mass_u; width],
            onsite,
            coupling: diag(-longitudinal_n_per_m),
            contact: diag(-contact_n_per_m),
        }
    }

    /// A lead that continues a device end cell: its cells repeat the end
    /// cell's masses and force constants (`onsite` holding the springs of
    /// every bond on its diagonal), `coupling` is the block from a cell to
    /// its neighbour along +x, and the lead joins the device with that
    /// same block.
    pub fn continuing(masses_u: &[f64], onsite: &Mat<f64>, coupling: &Mat<f64>) -> Self {
        Self {
            masses_u: masses_u.to_vec(),
            onsite: onsite.clone(),
            coupling: coupling.clone(),
            contact: coupling.clone(),
        }
    }

    /// Sites per lead cell.
    pub fn sites_per_cell(&self) -> usize {
        self.masses_u.len()
    }

    pub(super) fn validate(&self, name: &str, device_sites: usize) -> Result<(), LatticeError> {
        let b = self.masses_u.len();
        if b == 0 {
            return Err(invalid(
                format!("{name}.masses_u"),
                "no masses".into(),
                "give one mass per site of a lead cell",
            ));
        }
        check_masses(&format!("{name}.masses_u"), &self.masses_u)?;
        check_block(format!("{name}.onsite"), &self.onsite, b, true)?;
        check_block(format!("{name}.coupling"), &self.coupling, b, false)?;
        let shape = (self.contact.nrows(), self.contact.ncols());
        if shape != (b, device_sites) && shape != (device_sites, b) {
            return Err(invalid(
                format!("{name}.contact"),
                format!("block is {}×{}", shape.0, shape.1),
                &format!(
                    "expected {b}×{device_sites} (left: lead × device) or {device_sites}×{b} (right: device × lead)"
                ),
            ));
        }
        Ok(())
    }

    /// Force constants of the surface cell: the bulk bond towards the
    /// device replaced by the contact bonds on the diagonal.
    fn surface_force(&self, side: PhononSide) -> Mat<f64> {
        let mut ks = self.onsite.clone();
        let (k, c) = (&self.coupling, &self.contact);
        for r in 0..ks.nrows() {
            let (bulk, contact): (f64, f64) = match side {
                PhononSide::Left => (
                    (0..k.ncols()).map(|j| k[(r, j)]).sum(),
                    (0..c.ncols()).map(|j| c[(r, j)]).sum(),
                ),
                PhononSide::Right => (
                    (0..k.nrows()).map(|j| k[(j, r)]).sum(),
                    (0..c.nrows()).map(|j| c[(j, r)]).sum(),
                ),
            };
            ks[(r, r)] += bulk - contact;
        }
        ks
    }

    /// Mass-weighted blocks, band top and subband edges; `device_masses`
    /// are the masses of the device end cell the lead touches.
    pub(super) fn dynamics(&self, device_masses: &[f64], side: PhononSide) -> LeadDynamics {
        let m = &self.masses_u;
        let phi00 = mass_weight(&self.onsite, m, m);
        let phi01 = mass_weight(&self.coupling, m, m);
        let surface = mass_weight(&self.surface_force(side), m, m);
        let contact = match side {
            PhononSide::Left => mass_weight(&self.contact, m, device_masses),
            PhononSide::Right => mass_weight(&self.contact, device_masses, m),
        };
        let (bottom, top) = crate::device::band_range(&phi00, &phi01);
        let edges = band_edges(&phi00, &phi01);
        LeadDynamics {
            bulk: Lead::Periodic {
                onsite: phi00,
                hopping: phi01,
            },
            surface,
            contact,
            band_top: top.max(0.0).sqrt(),
            band_range: (bottom, top),
            edges,
        }
    }
}

/// ω at the Bloch eigenvalues of q = 0 and q = π (where subbands of a
/// lead with symmetric couplings open and close).
fn band_edges(phi00: &Mat<C64>, phi01: &Mat<C64>) -> Vec<f64> {
    let b = phi00.nrows();
    let mut out = Vec::with_capacity(2 * b);
    for sign in [1.0, -1.0] {
        let bloch = Mat::from_fn(b, b, |r, c| {
            phi00[(r, c)] + (phi01[(r, c)] + phi01[(c, r)].conj()) * sign
        });
        let ev = if b == 1 {
            vec![bloch[(0, 0)].re]
        } else {
            bloch
                .self_adjoint_eigenvalues(faer::Side::Lower)
                .unwrap_or_default()
        };
        out.extend(ev.into_iter().filter(|&e| e > 0.0).map(f64::sqrt));
    }
    out
}

impl LeadDynamics {
    /// Retarded self-energy Π on the device end cell at ω (rad/ps).
    pub(super) fn self_energy(
        &self,
        omega: f64,
        side: PhononSide,
        params: &DecimationParams,
    ) -> Result<Mat<C64>, LatticeError> {
        let z = omega * omega;
        let c = &self.contact;
        if let (1, Lead::Periodic { onsite, hopping }) = (self.surface.nrows(), &self.bulk) {
            let s = chain_self_energy(z, onsite[(0, 0)].re, hopping[(0, 0)].norm());
            let g = (C64::new(z, 0.0) - self.surface[(0, 0)] - s).inv();
            let b = match side {
                PhononSide::Left => c.ncols(),
                PhononSide::Right => c.nrows(),
            };
            return Ok(Mat::from_fn(b, b, |r, q| match side {
                PhononSide::Left => c[(0, r)] * g * c[(0, q)],
                PhononSide::Right => c[(r, 0)] * g * c[(q, 0)],
            }));
        }
        let lead_side = match side {
            PhononSide::Left => Side::Left,
            PhononSide::Right => Side::Right,
        };
        let s = self
            .bulk
            .self_energy(lead_side, z, params)
            .map_err(|source| LatticeError::Lead {
                omega_rad_per_ps: omega,
                source,
            })?;
        let b = self.surface.nrows();
        let m = Mat::from_fn(b, b, |r, q| {
            let zi = if r == q {
                C64::new(z, 0.0)
            } else {
                C64::new(0.0, 0.0)
            };
            zi - self.surface[(r, q)] - s[(r, q)]
        });
        let g = m.partial_piv_lu().inverse();
        Ok(match side {
            PhononSide::Left => c.transpose() * &g * c,
            PhononSide::Right => c * &g * c.transpose(),
        })
    }
}
