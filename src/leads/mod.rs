//! Lead self-energies Σ_α(E) of the two semi-infinite contacts.
//!
//! - b = 1 periodic leads: closed form Σ = |τ|² g_s with the surface Green's
//!   function of a tight-binding chain (Economou, *Green's Functions in
//!   Quantum Physics*, ch. 5).
//! - b > 1 periodic leads: the Bloch modes of the lead at real energy
//!   (see [`mode_self_energy`]), checked against the matrix quadratic they
//!   must satisfy; where that check fails, Sancho-Rubio decimation (M. P. López Sancho,
//!   J. M. López Sancho, J. Rubio, J. Phys. F 15, 851 (1985)) with a small
//!   positive imaginary energy η, iterated until the renormalised couplings
//!   fall below a tolerance.
//! - wide-band leads: Σ = −iΓ/2 with a constant matrix Γ.
//! - periodic leads of their own, joined to the device by a block of their
//!   own (see [`Lead::Joined`]): the surface Green's function of the lead
//!   follows from the periodic self-energy of its own blocks by one Dyson
//!   step, g_s = (E − H_L − Σ_bulk)⁻¹, and the joining block carries it
//!   onto the device.
//!
//! Conventions: a periodic lead is given by its cell block `onsite` and its
//! coupling `hopping` = H_n,n+1 along +x. For [`Lead::Periodic`] the same
//! block couples the lead to the device; for [`Lead::Joined`] the block
//! `join` does, also taken along +x (left: from the lead's last cell to
//! the device's first, right: from the device's last cell to the lead's
//! first). With τ the joining block, Σ_left = τ† g_s τ and
//! Σ_right = τ g_s τ†.

use crate::C64;
use faer::Mat;
use faer::linalg::solvers::DenseSolveCore;

mod modes;
pub use modes::{mode_pencil, mode_self_energy};

/// Which contact: the one name of a side everywhere (lead self-energies,
/// the cooled lead of a cooler, the hot lead of a generator, the command
/// line), written `left` / `right` in text and JSON.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Side {
    /// Contact 1, attached to the first cell.
    Left,
    /// Contact 2, attached to the last cell.
    Right,
}

impl Side {
    /// Both sides, in the order of [`Side::NAMES`].
    pub const ALL: [Side; 2] = [Side::Left, Side::Right];
    /// The names of the sides as written in text and JSON.
    pub const NAMES: [&'static str; 2] = ["left", "right"];

    /// The side's name as written in text and JSON.
    pub fn name(self) -> &'static str {
        match self {
            Side::Left => "left",
            Side::Right => "right",
        }
    }
}

impl std::fmt::Display for Side {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.name())
    }
}

impl std::str::FromStr for Side {
    type Err = String;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        Side::ALL
            .into_iter()
            .find(|side| side.name() == s)
            .ok_or_else(|| format!("expected `left` or `right`, found `{s}`"))
    }
}

/// A lead model.
#[derive(Clone, Debug)]
pub enum Lead {
    /// Semi-infinite periodic lead.
    Periodic {
        /// Cell Hamiltonian of the lead (eV).
        onsite: Mat<C64>,
        /// Coupling H_n,n+1 along +x (eV); also couples lead and device.
        hopping: Mat<C64>,
    },
    /// Semi-infinite periodic lead with blocks of its own, joined to the
    /// device by a block of its own.
    Joined {
        /// Cell Hamiltonian of the lead (eV).
        onsite: Mat<C64>,
        /// Coupling H_n,n+1 between lead cells along +x (eV).
        hopping: Mat<C64>,
        /// Block joining lead and device along +x (eV): H_-1,0 from the
        /// left lead's last cell to the device's first cell, or
        /// H_N-1,N from the device's last cell to the right lead's first.
        join: Mat<C64>,
    },
    /// Energy-independent broadening Γ (eV): Σ = −iΓ/2.
    WideBand {
        /// Broadening matrix (Hermitian, positive semi-definite).
        gamma: Mat<C64>,
    },
}

/// Settings of the decimation.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct DecimationParams {
    /// Positive imaginary part added to the energy (eV).
    pub eta_ev: f64,
    /// Stop when the renormalised couplings fall below this (eV).
    pub tolerance_ev: f64,
    /// Iteration limit.
    pub max_iterations: usize,
}

impl Default for DecimationParams {
    fn default() -> Self {
        Self {
            eta_ev: 1e-7,
            tolerance_ev: 1e-13,
            max_iterations: 200,
        }
    }
}

/// Lead errors: the numerical fact is in the error.
#[derive(Debug, thiserror::Error, Clone, PartialEq)]
pub enum LeadError {
    /// Decimation did not converge.
    #[error(
        "{side:?} lead decimation did not converge at E = {energy_ev} eV: coupling norm {residual_ev:.3e} eV after {iterations} iterations"
    )]
    NotConverged {
        /// Which lead.
        side: Side,
        /// Energy (eV).
        energy_ev: f64,
        /// Iterations done.
        iterations: usize,
        /// Norm of the remaining coupling (eV).
        residual_ev: f64,
    },
    /// A singular or non-finite matrix appeared.
    #[error("{side:?} lead self-energy is not finite at E = {energy_ev} eV")]
    NotFinite {
        /// Which lead.
        side: Side,
        /// Energy (eV).
        energy_ev: f64,
    },
}

/// Surface self-energy of a chain with on-site ε and coupling modulus |τ|
/// (both eV), at real energy E: Σ = [x − i√(4τ² − x²)]/2 inside the band
/// (Im Σ ≤ 0), [x − sgn(x)√(x² − 4τ²)]/2 outside (the decaying root).
pub fn chain_self_energy(energy_ev: f64, onsite_ev: f64, coupling_ev: f64) -> C64 {
    let x = energy_ev - onsite_ev;
    let t2 = 4.0 * coupling_ev * coupling_ev;
    if x * x < t2 {
        C64::new(0.5 * x, -0.5 * (t2 - x * x).sqrt())
    } else {
        C64::new(0.5 * (x - x.signum() * (x * x - t2).sqrt()), 0.0)
    }
}

fn frob(m: &Mat<C64>) -> f64 {
    m.norm_l2()
}

fn all_finite(m: &Mat<C64>) -> bool {
    (0..m.nrows())
        .all(|r| (0..m.ncols()).all(|c| m[(r, c)].re.is_finite() && m[(r, c)].im.is_finite()))
}

/// Surface Green's function of a semi-infinite periodic lead with cell block
/// `h00` and coupling `v` from the surface cell to its bulk neighbour, by
/// Sancho-Rubio decimation at E + iη. Returns the surface g and the
/// iteration count.
pub fn surface_green_function(
    energy_ev: f64,
    h00: &Mat<C64>,
    v: &Mat<C64>,
    params: &DecimationParams,
    side: Side,
) -> Result<(Mat<C64>, usize), LeadError> {
    let b = h00.nrows();
    let z = C64::new(energy_ev, params.eta_ev);
    let zi = Mat::<C64>::from_fn(b, b, |r, c| if r == c { z } else { C64::new(0.0, 0.0) });
    let mut eps_s = h00.clone();
    let mut eps = h00.clone();
    let mut alpha = v.clone();
    let mut beta = v.adjoint().to_owned();
    let mut it = 0;
    loop {
        let g = (&zi - &eps).partial_piv_lu().inverse();
        let ag = &alpha * &g;
        let bg = &beta * &g;
        let agb = &ag * &beta;
        let bga = &bg * &alpha;
        eps_s += &agb;
        eps = &eps + &agb + &bga;
        alpha = &ag * &alpha;
        beta = &bg * &beta;
        it += 1;
        let res = frob(&alpha) + frob(&beta);
        if !res.is_finite() {
            return Err(LeadError::NotFinite { side, energy_ev });
        }
        if res < params.tolerance_ev {
            break;
        }
        if it >= params.max_iterations {
            return Err(LeadError::NotConverged {
                side,
                energy_ev,
                iterations: it,
                residual_ev: res,
            });
        }
    }
    let gs = (&zi - &eps_s).partial_piv_lu().inverse();
    if !all_finite(&gs) {
        return Err(LeadError::NotFinite { side, energy_ev });
    }
    Ok((gs, it))
}

impl Lead {
    /// Orbitals per lead cell.
    pub fn orbitals(&self) -> usize {
        match self {
            Lead::Periodic { onsite, .. } | Lead::Joined { onsite, .. } => onsite.nrows(),
            Lead::WideBand { gamma } => gamma.nrows(),
        }
    }

    /// Band range of the lead (eV); `None` for a wide-band lead.
    pub fn band_range(&self) -> Option<(f64, f64)> {
        match self {
            Lead::Periodic { onsite, hopping }
            | Lead::Joined {
                onsite, hopping, ..
            } => Some(crate::device::band_range(onsite, hopping)),
            Lead::WideBand { .. } => None,
        }
    }

    /// The block that couples the lead to the device end cell along +x
    /// (the lead's own coupling for [`Lead::Periodic`]); `None` for a
    /// wide-band lead.
    pub fn joining_block(&self) -> Option<&Mat<C64>> {
        match self {
            Lead::Periodic { hopping, .. } => Some(hopping),
            Lead::Joined { join, .. } => Some(join),
            Lead::WideBand { .. } => None,
        }
    }

    /// The cell block of a periodic lead, to move it with a potential;
    /// `None` for a wide-band lead.
    pub fn cell_block_mut(&mut self) -> Option<&mut Mat<C64>> {
        match self {
            Lead::Periodic { onsite, .. } | Lead::Joined { onsite, .. } => Some(onsite),
            Lead::WideBand { .. } => None,
        }
    }

    /// Retarded self-energy Σ_α(E) on the end cell of the device (eV).
    pub fn self_energy(
        &self,
        side: Side,
        energy_ev: f64,
        params: &DecimationParams,
    ) -> Result<Mat<C64>, LeadError> {
        match self {
            Lead::WideBand { gamma } => Ok(Mat::from_fn(gamma.nrows(), gamma.ncols(), |r, c| {
                gamma[(r, c)] * C64::new(0.0, -0.5)
            })),
            Lead::Periodic { onsite, hopping } => {
                periodic_self_energy(onsite, hopping, side, energy_ev, params)
            }
            Lead::Joined {
                onsite,
                hopping,
                join,
            } => joined_self_energy(onsite, hopping, join, side, energy_ev, params),
        }
    }
}

/// Σ on the device end cell of a periodic lead whose own coupling also
/// joins it to the device.
fn periodic_self_energy(
    onsite: &Mat<C64>,
    hopping: &Mat<C64>,
    side: Side,
    energy_ev: f64,
    params: &DecimationParams,
) -> Result<Mat<C64>, LeadError> {
    if onsite.nrows() == 1 {
        let s = chain_self_energy(energy_ev, onsite[(0, 0)].re, hopping[(0, 0)].norm());
        return Ok(Mat::from_fn(1, 1, |_, _| s));
    }
    if let Some(s) = mode_self_energy(energy_ev, onsite, hopping, side) {
        return Ok(s);
    }
    let (g, _) = match side {
        Side::Left => surface_green_function(
            energy_ev,
            onsite,
            &hopping.adjoint().to_owned(),
            params,
            side,
        )?,
        Side::Right => surface_green_function(energy_ev, onsite, hopping, params, side)?,
    };
    Ok(match side {
        Side::Left => hopping.adjoint() * &g * hopping,
        Side::Right => hopping * &g * hopping.adjoint(),
    })
}

/// Σ on the device end cell of a periodic lead joined by its own block τ.
/// The rest of the lead acts on the lead's surface cell as the periodic
/// self-energy Σ_bulk of the lead's own blocks (the lead beyond its first
/// cell is the same semi-infinite lead), so the surface Green's function
/// is g_s = (E − H_L − Σ_bulk)⁻¹, and Σ = τ† g_s τ (left) or τ g_s τ†
/// (right).
fn joined_self_energy(
    onsite: &Mat<C64>,
    hopping: &Mat<C64>,
    join: &Mat<C64>,
    side: Side,
    energy_ev: f64,
    params: &DecimationParams,
) -> Result<Mat<C64>, LeadError> {
    let bulk = periodic_self_energy(onsite, hopping, side, energy_ev, params)?;
    let b = onsite.nrows();
    let e = C64::new(energy_ev, 0.0);
    let inverse = Mat::from_fn(b, b, |r, c| {
        let diag = if r == c { e } else { C64::new(0.0, 0.0) };
        diag - onsite[(r, c)] - bulk[(r, c)]
    });
    let g = if b == 1 {
        Mat::from_fn(1, 1, |_, _| inverse[(0, 0)].inv())
    } else {
        inverse.partial_piv_lu().inverse()
    };
    if !all_finite(&g) {
        return Err(LeadError::NotFinite { side, energy_ev });
    }
    let sigma = match side {
        Side::Left => join.adjoint() * &g * join,
        Side::Right => join * &g * join.adjoint(),
    };
    if !all_finite(&sigma) {
        return Err(LeadError::NotFinite { side, energy_ev });
    }
    Ok(sigma)
}

/// Broadening Γ = i(Σ − Σ†).
pub fn broadening(sigma: &Mat<C64>) -> Mat<C64> {
    let b = sigma.nrows();
    Mat::from_fn(b, b, |r, c| {
        (sigma[(r, c)] - sigma[(c, r)].conj()) * C64::new(0.0, 1.0)
    })
}

#[cfg(test)]
mod side_tests {
    use super::Side;

    /// Text, JSON and the parser agree on every side's name, so a side
    /// reads back as itself wherever it was written.
    #[test]
    fn side_names_agree_everywhere() {
        for (side, name) in Side::ALL.into_iter().zip(Side::NAMES) {
            assert_eq!(side.name(), name);
            assert_eq!(side.to_string(), name);
            assert_eq!(serde_json::to_string(&side).unwrap(), format!("\"{name}\""));
            assert_eq!(name.parse::<Side>(), Ok(side));
        }
        assert!("middle".parse::<Side>().unwrap_err().contains("middle"));
    }
}

#[cfg(test)]
mod joined_tests {
    use super::{DecimationParams, Lead, Side};
    use crate::C64;
    use faer::Mat;

    fn c(re: f64, im: f64) -> C64 {
        C64::new(re, im)
    }

    /// A two-orbital lead with complex couplings, so that a transposed or
    /// missing adjoint shows.
    fn blocks() -> (Mat<C64>, Mat<C64>) {
        let onsite = Mat::from_fn(2, 2, |r, k| match (r, k) {
            (0, 0) => c(0.1, 0.0),
            (1, 1) => c(0.4, 0.0),
            (0, 1) => c(0.05, 0.02),
            _ => c(0.05, -0.02),
        });
        let hopping = Mat::from_fn(2, 2, |r, k| match (r, k) {
            (0, 0) => c(-0.3, 0.0),
            (1, 1) => c(-0.25, 0.0),
            (0, 1) => c(0.04, 0.03),
            _ => c(-0.02, 0.01),
        });
        (onsite, hopping)
    }

    /// A lead joined by its own coupling is the plain periodic lead: the
    /// one Dyson step g_s = (E − H − Σ_bulk)⁻¹ followed by τ† g_s τ must
    /// give Σ_bulk back. Both sides, inside and outside the band, b = 1
    /// (closed form) and b = 2 (modes). The two paths differ by one
    /// inversion, so they agree to rounding: 1e-12 relative.
    #[test]
    fn joined_by_its_own_coupling_is_the_periodic_lead() {
        let (on2, hop2) = blocks();
        let on1 = Mat::from_fn(1, 1, |_, _| c(0.2, 0.0));
        let hop1 = Mat::from_fn(1, 1, |_, _| c(-0.3, 0.0));
        let params = DecimationParams::default();
        for (onsite, hopping) in [(on1, hop1), (on2, hop2)] {
            let periodic = Lead::Periodic {
                onsite: onsite.clone(),
                hopping: hopping.clone(),
            };
            let joined = Lead::Joined {
                onsite,
                hopping: hopping.clone(),
                join: hopping,
            };
            for side in Side::ALL {
                for e in [-0.9, -0.35, 0.05, 0.3, 0.61, 1.4] {
                    let a = periodic.self_energy(side, e, &params).unwrap();
                    let b = joined.self_energy(side, e, &params).unwrap();
                    let scale = a.norm_max().max(1e-3);
                    let diff = (&a - &b).norm_max();
                    assert!(diff <= 1e-12 * scale, "{side} E = {e}: {diff:e}");
                }
            }
        }
    }

    /// The joining block scales the self-energy of a one-orbital lead by
    /// |τ_join|²/|t|² against the plain lead (Σ = |τ|² g_s with the same
    /// g_s): a direct check of the τ† g τ form (common practice).
    #[test]
    fn the_join_scales_a_chain_self_energy() {
        let onsite = Mat::from_fn(1, 1, |_, _| c(0.0, 0.0));
        let hopping = Mat::from_fn(1, 1, |_, _| c(-0.5, 0.0));
        let join = Mat::from_fn(1, 1, |_, _| c(0.1, -0.2));
        let params = DecimationParams::default();
        let periodic = Lead::Periodic {
            onsite: onsite.clone(),
            hopping: hopping.clone(),
        };
        let joined = Lead::Joined {
            onsite,
            hopping,
            join,
        };
        for e in [-1.3, -0.2, 0.7] {
            let a = periodic.self_energy(Side::Left, e, &params).unwrap()[(0, 0)];
            let b = joined.self_energy(Side::Right, e, &params).unwrap()[(0, 0)];
            let want = a * (0.05 / 0.25);
            assert!((b - want).norm() <= 1e-14, "E = {e}: {b} vs {want}");
        }
    }
}
