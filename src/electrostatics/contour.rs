//! The equilibrium part of the electron count of a coherent device,
//! integrated on the complex energy plane.
//!
//! # Why
//!
//! In a long coherent region the local density of states carries standing
//! waves whose phase changes quickly with energy near a band bottom; on the
//! uniform real grid they are aliased and no choice of real-axis weights
//! can recover their integral. The retarded Green's function is analytic in
//! the upper half plane, and a distance of the order of k_BT above the real
//! axis those oscillations are damped: there a few dozen energies give the
//! integral to rounding.
//!
//! # The count
//!
//! For a device without a scattering self-energy the filled function splits
//! as G^n(E) = A(E) f_ref(E) + [G^n(E) − A(E) f_ref(E)], with f_ref the
//! Fermi function of a reference lead (the one with the lower Fermi level,
//! the left one on a tie, see [`reference_contact`]). The second term
//! vanishes at equilibrium and under bias lives in the bias window: it is
//! integrated on the real grid as before (in `density.rs`). The first term,
//! per cell i,
//!
//! ```text
//! n_eq,i = (g_s/2π) ∫ Σ_o A_oo(E) f_ref(E) dE
//! ```
//!
//! is written with the pole expansion of the Fermi function
//! (T. Ozaki, Phys. Rev. B 75, 035123 (2007)): with
//! x = (E − µ)/k_BT,
//!
//! ```text
//! f(x) = ½ − Σ_p R_p [1/(x − i z_p) + 1/(x + i z_p)]
//! ```
//!
//! where z_p = 1/b_p and R_p = |v_p,1|²/(4 b_p²) come from the positive
//! eigenvalues b_p and normalised eigenvectors v_p of the symmetric
//! tridiagonal 2P × 2P matrix with off-diagonal 1/(2√((2m−1)(2m+1))),
//! m = 1 … 2P − 1 (the continued fraction of tanh truncated at depth 2P).
//! Every pole lies on the imaginary axis, and with
//! G(w) = ∫ A(E)/(2π(w − E)) dE for Im w > 0 and G(w̄) = conj G(w) for the
//! diagonal,
//!
//! ```text
//! n_eq,i = g_s [ N0_i/2 + 2 k_BT Σ_p R_p Re Tr G_ii(µ + i z_p k_BT) ]
//! ```
//!
//! with N0_i the zeroth moment of the cell's spectral function,
//! ∫ Tr A_ii dE/2π, which is its orbital count b exactly: G_ii(w) → 1/w
//! at large |w| for any Hamiltonian and lead self-energy that stays
//! bounded there (Ozaki takes it from G at a large imaginary energy, which
//! gives the same number to O(1/R²)).
//!
//! # Where it applies
//!
//! The contour counts every state below µ; the real grid only those above
//! `grid.min_ev`. The contour is therefore used only when no state of the
//! device and its leads can lie below `grid.min_ev`: when a lower bound of
//! the spectrum (see [`spectrum_bounds`]) is at or above it. A device with
//! scattering, attached contacts along the channel or a wide-band lead
//! (whose Lorentzian tails reach every energy) keeps the real-axis count.

use crate::C64;
use crate::device::Device;
use crate::leads::{DecimationParams, Lead, LeadError, Side, surface_green_function};
use crate::model::{Contact, Problem};
use faer::Mat;
use faer::linalg::solvers::DenseSolveCore;
use rayon::prelude::*;

/// Fewest poles P of the Fermi expansion. With P = 60 the expansion
/// matches the Fermi function to 1e-13 absolute over |x| ≤ 960, 25 eV at
/// 300 K (`contour::tests::covering_reaches_what_it_promises`).
pub const POLES: usize = 60;

/// The expansion with P poles matches the Fermi function to 1e-13 over
/// |x| ≤ `REACH_PER_POLE_SQUARED`·P² (measured: 0.26 P² for P = 20 … 120,
/// x = (E − µ)/k_BT; see [`FermiPoles::covering`]).
const REACH_PER_POLE_SQUARED: f64 = 0.25;

/// The poles z_p (in units of k_BT, on the positive imaginary axis) and
/// residues R_p of the continued-fraction expansion of the Fermi function
/// (see the module text).
#[derive(Clone, Debug)]
pub struct FermiPoles {
    /// z_p > 0, ascending.
    pub poles: Vec<f64>,
    /// R_p > 0, in the order of `poles`.
    pub residues: Vec<f64>,
}

impl FermiPoles {
    /// The expansion with `count` poles (the eigenvalues of a 2·count
    /// square tridiagonal matrix).
    pub fn new(count: usize) -> Self {
        let m = 2 * count.max(1);
        let b = Mat::<f64>::from_fn(m, m, |r, c| {
            if r.abs_diff(c) == 1 {
                let k = r.min(c) as f64 + 1.0;
                0.5 / ((2.0 * k - 1.0) * (2.0 * k + 1.0)).sqrt()
            } else {
                0.0
            }
        });
        let eig = b
            .self_adjoint_eigen(faer::Side::Lower)
            .expect("the eigenvalues of a small symmetric tridiagonal matrix");
        let (u, s) = (eig.U(), eig.S().column_vector());
        let mut pairs: Vec<(f64, f64)> = (0..m)
            .filter(|&j| s[j] > 0.0)
            .map(|j| (1.0 / s[j], u[(0, j)] * u[(0, j)] / (4.0 * s[j] * s[j])))
            .collect();
        pairs.sort_by(|a, b| a.0.total_cmp(&b.0));
        let (poles, residues) = pairs.into_iter().unzip();
        Self { poles, residues }
    }

    /// The expansion that matches the Fermi function to 1e-13 over
    /// |x| ≤ `reach` (at least [`POLES`] poles, which reach about 900):
    /// the reach grows as the square of the pole count
    /// (`contour::tests::covering_reaches_what_it_promises`).
    pub fn covering(reach: f64) -> std::sync::Arc<Self> {
        // Pole counts rounded up to a multiple of 20 and kept for the
        // process: the eigenvalue problem grows as P³ and the outer loop
        // asks for the same count at every iteration.
        static KEPT: std::sync::Mutex<Vec<(usize, std::sync::Arc<FermiPoles>)>> =
            std::sync::Mutex::new(Vec::new());
        let needed = (reach.max(0.0) / REACH_PER_POLE_SQUARED).sqrt().ceil() as usize;
        let count = needed.max(POLES).div_ceil(20) * 20;
        let mut kept = KEPT.lock().unwrap_or_else(|e| e.into_inner());
        if let Some((_, p)) = kept.iter().find(|(c, _)| *c == count) {
            return p.clone();
        }
        let p = std::sync::Arc::new(Self::new(count));
        kept.push((count, p.clone()));
        p
    }

    /// The expansion's value of 1/(1 + e^x).
    pub fn occupation(&self, x: f64) -> f64 {
        let tail: f64 = self
            .poles
            .iter()
            .zip(&self.residues)
            .map(|(&z, &r)| r * 2.0 * x / (x * x + z * z))
            .sum();
        0.5 - tail
    }
}

/// The contact whose Fermi function f_ref the equilibrium part uses: the
/// one with the lower Fermi level (the left one on a tie).
pub fn reference_contact(problem: &Problem) -> &Contact {
    if problem.right.fermi_level_ev < problem.left.fermi_level_ev {
        &problem.right
    } else {
        &problem.left
    }
}

/// Σ = [x − √(x − 2τ)√(x + 2τ)]/2 of a chain lead (on-site ε, coupling
/// modulus τ) at x = z − ε: the closed form continued off the real axis.
/// The product of principal roots has its cut on [−2τ, 2τ] only and
/// behaves as x at infinity, so Σ → τ²/x there and Im Σ < 0 for Im z > 0.
pub fn chain_self_energy_at(z: C64, onsite_ev: f64, coupling_ev: f64) -> C64 {
    let x = z - onsite_ev;
    let two_t = 2.0 * coupling_ev;
    0.5 * (x - (x - two_t).sqrt() * (x + two_t).sqrt())
}

/// (z·1 − m)⁻¹.
fn resolvent(z: C64, m: &Mat<C64>) -> Mat<C64> {
    let b = m.nrows();
    if b == 1 {
        return Mat::from_fn(1, 1, |_, _| (z - m[(0, 0)]).inv());
    }
    let a = Mat::from_fn(b, b, |r, c| {
        let diag = if r == c { z } else { C64::new(0.0, 0.0) };
        diag - m[(r, c)]
    });
    a.partial_piv_lu().inverse()
}

/// Σ of a periodic lead's own blocks on its surface neighbour at complex
/// z: the closed form for one orbital, otherwise decimation with the
/// imaginary part of z as the broadening.
fn periodic_at(
    onsite: &Mat<C64>,
    hopping: &Mat<C64>,
    side: Side,
    z: C64,
    params: &DecimationParams,
) -> Result<Mat<C64>, LeadError> {
    if onsite.nrows() == 1 {
        let s = chain_self_energy_at(z, onsite[(0, 0)].re, hopping[(0, 0)].norm());
        return Ok(Mat::from_fn(1, 1, |_, _| s));
    }
    let at = DecimationParams {
        eta_ev: z.im,
        ..*params
    };
    let (g, _) = match side {
        Side::Left => {
            surface_green_function(z.re, onsite, &hopping.adjoint().to_owned(), &at, side)?
        }
        Side::Right => surface_green_function(z.re, onsite, hopping, &at, side)?,
    };
    Ok(match side {
        Side::Left => hopping.adjoint() * &g * hopping,
        Side::Right => hopping * &g * hopping.adjoint(),
    })
}

/// Retarded self-energy of a lead on the device end cell at complex z
/// (Im z > 0).
pub fn lead_self_energy_at(
    lead: &Lead,
    side: Side,
    z: C64,
    params: &DecimationParams,
) -> Result<Mat<C64>, LeadError> {
    match lead {
        Lead::WideBand { gamma } => Ok(Mat::from_fn(gamma.nrows(), gamma.ncols(), |r, c| {
            gamma[(r, c)] * C64::new(0.0, -0.5)
        })),
        Lead::Periodic { onsite, hopping } => periodic_at(onsite, hopping, side, z, params),
        Lead::Joined {
            onsite,
            hopping,
            join,
        } => {
            let bulk = periodic_at(onsite, hopping, side, z, params)?;
            let g = resolvent(z, &(onsite + &bulk));
            Ok(match side {
                Side::Left => join.adjoint() * &g * join,
                Side::Right => join * &g * join.adjoint(),
            })
        }
    }
}

/// The diagonal blocks G_ii(z) of the device's retarded Green's function
/// (z − H − Σ_L(z) − Σ_R(z))⁻¹, with `sigma_left` on the first cell and
/// `sigma_right` on the last: the self-energy of everything left of cell i
/// is carried forward, s^L_0 = Σ_L, s^L_i = H_i,i−1 (z − H_i−1 − s^L_i−1)⁻¹
/// H_i−1,i, that of everything right of it backward, and
/// G_ii = (z − H_ii − s^L_i − s^R_i)⁻¹.
pub fn diagonal_blocks(
    device: &Device,
    sigma_left: &Mat<C64>,
    sigma_right: &Mat<C64>,
    z: C64,
) -> Vec<Mat<C64>> {
    let n = device.cells();
    let h = &device.onsite;
    let c = &device.coupling;
    let mut left = Vec::with_capacity(n);
    left.push(sigma_left.clone());
    for i in 1..n {
        let g = resolvent(z, &(&h[i - 1] + &left[i - 1]));
        left.push(c[i - 1].adjoint() * &g * &c[i - 1]);
    }
    let mut right = vec![sigma_right.clone(); n];
    for i in (0..n.saturating_sub(1)).rev() {
        let g = resolvent(z, &(&h[i + 1] + &right[i + 1]));
        right[i] = &c[i] * &g * c[i].adjoint();
    }
    (0..n)
        .map(|i| resolvent(z, &(&h[i] + &left[i] + &right[i])))
        .collect()
}

/// Tr G_ii(z) of every cell: [`diagonal_blocks`] with the self-energy of
/// each lead at z; a one-orbital device runs the same recursion on
/// scalars.
pub fn diagonal_traces(problem: &Problem, z: C64) -> Result<Vec<C64>, LeadError> {
    let d = &problem.decimation;
    let sl = lead_self_energy_at(&problem.left.lead, Side::Left, z, d)?;
    let sr = lead_self_energy_at(&problem.right.lead, Side::Right, z, d)?;
    let dev = &problem.device;
    if dev.orbitals != 1 {
        let blocks = diagonal_blocks(dev, &sl, &sr, z);
        return Ok(blocks
            .iter()
            .map(|g| (0..g.nrows()).map(|o| g[(o, o)]).sum())
            .collect());
    }
    let n = dev.cells();
    let h: Vec<C64> = dev.onsite.iter().map(|m| m[(0, 0)]).collect();
    let t2: Vec<f64> = dev.coupling.iter().map(|m| m[(0, 0)].norm_sqr()).collect();
    let mut left = vec![sl[(0, 0)]; n];
    for i in 1..n {
        left[i] = t2[i - 1] / (z - h[i - 1] - left[i - 1]);
    }
    let mut right = vec![sr[(0, 0)]; n];
    for i in (0..n.saturating_sub(1)).rev() {
        right[i] = t2[i] / (z - h[i + 1] - right[i + 1]);
    }
    Ok((0..n)
        .map(|i| (z - h[i] - left[i] - right[i]).inv())
        .collect())
}

/// Largest singular value of a block: √ of the largest eigenvalue of m†m.
fn spectral_norm(m: &Mat<C64>) -> f64 {
    if m.nrows() == 1 && m.ncols() == 1 {
        return m[(0, 0)].norm();
    }
    let g = m.adjoint() * m;
    g.self_adjoint_eigenvalues(faer::Side::Lower)
        .map(|v| v.into_iter().fold(0.0, f64::max).sqrt())
        .unwrap_or_else(|_| m.norm_l2())
}

/// Smallest and largest eigenvalue of a Hermitian block.
fn extremes(m: &Mat<C64>) -> (f64, f64) {
    if m.nrows() == 1 {
        return (m[(0, 0)].re, m[(0, 0)].re);
    }
    match m.self_adjoint_eigenvalues(faer::Side::Lower) {
        Ok(v) => v
            .into_iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), x| {
                (lo.min(x), hi.max(x))
            }),
        Err(_) => (f64::NEG_INFINITY, f64::INFINITY),
    }
}

/// Bounds (eV) of the spectrum of the device with both leads, or `None`
/// with a wide-band lead. For a Hermitian block-tridiagonal operator,
/// x†Hx ≥ Σ_i λ_min(H_ii)|x_i|² − 2 Σ_i ‖H_i,i+1‖ |x_i||x_i+1|, and
/// 2|x_i||x_i+1| ≤ |x_i|² + |x_i+1|² puts every eigenvalue at or above
/// min_i [λ_min(H_ii) − ‖H_i−1,i‖ − ‖H_i,i+1‖] (for a flat chain or strip
/// this is exactly the lowest band bottom); the upper bound likewise.
/// Lead cells count as cells of the same operator.
pub fn spectrum_bounds(problem: &Problem) -> Option<(f64, f64)> {
    let dev = &problem.device;
    let n = dev.cells();
    let norms: Vec<f64> = dev.coupling.iter().map(spectral_norm).collect();
    // (lower, upper) bound of the lead's own cells, and its joining norm.
    let lead_part = |lead: &Lead| -> Option<(f64, f64, f64)> {
        let (onsite, t, j) = match lead {
            Lead::WideBand { .. } => return None,
            Lead::Periodic { onsite, hopping } => {
                let t = spectral_norm(hopping);
                (onsite, t, t)
            }
            Lead::Joined {
                onsite,
                hopping,
                join,
            } => (onsite, spectral_norm(hopping), spectral_norm(join)),
        };
        let (lo, hi) = extremes(onsite);
        let reach = t + t.max(j);
        Some((lo - reach, hi + reach, j))
    };
    let (l_lo, l_hi, l_join) = lead_part(&problem.left.lead)?;
    let (r_lo, r_hi, r_join) = lead_part(&problem.right.lead)?;
    let (mut lo, mut hi) = (l_lo.min(r_lo), l_hi.max(r_hi));
    for i in 0..n {
        let before = if i == 0 { l_join } else { norms[i - 1] };
        let after = if i + 1 == n { r_join } else { norms[i] };
        let (a, b) = extremes(&dev.onsite[i]);
        lo = lo.min(a - before - after);
        hi = hi.max(b + before + after);
    }
    Some((lo, hi))
}

/// The equilibrium part of the count of a coherent device.
#[derive(Clone, Debug)]
pub struct EquilibriumCount {
    /// n_eq,i of every cell (electrons, spin included).
    pub electrons: Vec<f64>,
    /// Fermi level of f_ref (eV).
    pub fermi_level_ev: f64,
    /// Temperature of f_ref (K).
    pub temperature_k: f64,
}

impl EquilibriumCount {
    /// f_ref at `energy_ev`.
    pub fn occupation(&self, energy_ev: f64) -> f64 {
        crate::units::fermi(energy_ev, self.fermi_level_ev, self.temperature_k)
    }
}

/// The equilibrium part n_eq,i of every cell on the complex contour (see
/// the module text), or `None` where the contour does not apply: a device
/// with scattering, with contacts along the channel, with a wide-band lead,
/// or whose spectrum may reach below the energy grid; also when a lead
/// self-energy fails at a complex energy (the real-axis count then stands).
pub fn equilibrium_count(problem: &Problem) -> Option<EquilibriumCount> {
    if !problem.scattering.is_coherent() || !problem.contacts.is_empty() {
        return None;
    }
    let (floor, ceiling) = spectrum_bounds(problem)?;
    if floor < problem.grid.min_ev {
        return None;
    }
    let reference = reference_contact(problem);
    let mu = reference.fermi_level_ev;
    let kt = crate::units::thermal_energy_ev(reference.temperature_k);
    let poles = FermiPoles::covering((mu - floor).max(ceiling - mu) / kt);
    let sums: Vec<Vec<C64>> = poles
        .poles
        .par_iter()
        .map(|&zp| diagonal_traces(problem, C64::new(mu, zp * kt)))
        .collect::<Result<_, _>>()
        .ok()?;
    let cells = problem.device.cells();
    let half = 0.5 * problem.device.orbitals as f64;
    let electrons = (0..cells)
        .map(|i| {
            let tail: f64 = sums
                .iter()
                .zip(&poles.residues)
                .map(|(g, r)| r * g[i].re)
                .sum();
            problem.spin_degeneracy * (half + 2.0 * kt * tail)
        })
        .collect();
    Some(EquilibriumCount {
        electrons,
        fermi_level_ev: mu,
        temperature_k: reference.temperature_k,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::device;
    use crate::grid::EnergyGrid;
    use crate::scattering::Scattering;

    fn c(re: f64, im: f64) -> C64 {
        C64::new(re, im)
    }

    /// The Fermi function 1/(1 + e^x), evaluated without overflow.
    fn exact_fermi(x: f64) -> f64 {
        crate::electrostatics::density::logistic(x)
    }

    /// Largest |expansion − 1/(1 + e^x)| over |x| ≤ `range`.
    fn worst(poles: &FermiPoles, range: f64) -> f64 {
        (0..=40000)
            .map(|j| -range + 2.0 * range * j as f64 / 40000.0)
            .map(|x| (poles.occupation(x) - exact_fermi(x)).abs())
            .fold(0.0, f64::max)
    }

    /// [`FermiPoles::covering`] keeps its promise of 1e-13 over the reach
    /// asked for (measured against the exact Fermi function; the
    /// reach of P poles, 0.26 P² for P = 20 … 120, was measured the same
    /// way), and an expansion of a quarter of the poles does not.
    #[test]
    fn covering_reaches_what_it_promises() {
        for reach in [10.0, 500.0, 964.0, 3000.0] {
            let poles = FermiPoles::covering(reach);
            let err = worst(&poles, reach);
            assert!(err < 1e-13, "{reach}: {err}");
            let few = FermiPoles::new(poles.poles.len() / 4);
            assert!(worst(&few, reach.max(200.0)) > 1e-6, "{reach}");
        }
    }

    /// The expansion with [`POLES`] poles against the exact Fermi function
    /// over |x| ≤ 40, to 1e-12 absolute (T. Ozaki, Phys. Rev. B 75,
    /// 035123 (2007): the truncated continued fraction is exact to
    /// rounding over a range of x that grows in proportion to the pole
    /// count; the bound leaves room for the rounding of the sums).
    #[test]
    fn pole_expansion_matches_the_fermi_function() {
        let poles = FermiPoles::new(POLES);
        assert_eq!(poles.poles.len(), POLES);
        assert!(poles.residues.iter().all(|&r| r > 0.0));
        let err = worst(&poles, 40.0);
        assert!(err < 1e-12, "{err}");
        // Too few poles do not reach: the check can fail.
        assert!(worst(&FermiPoles::new(5), 40.0) > 1e-6);
    }

    /// A chain of on-site energies `onsite` and hopping `t` at
    /// equilibrium (Fermi level 0, 300 K), leads continuing its first
    /// cell on both sides, grid from `grid_min`.
    fn chain_problem(onsite: &[f64], t: f64, grid_min: f64) -> Problem {
        let mut dev = device::chain(0.5, t, 0.0, vec![0.0; onsite.len()]);
        for (h, &e) in dev.onsite.iter_mut().zip(onsite) {
            h[(0, 0)] = c(e, 0.0);
        }
        let lead = Lead::Periodic {
            onsite: Mat::from_fn(1, 1, |_, _| c(onsite[0], 0.0)),
            hopping: Mat::from_fn(1, 1, |_, _| c(-t, 0.0)),
        };
        let contact = |mu: f64| Contact {
            lead: lead.clone(),
            fermi_level_ev: mu,
            temperature_k: 300.0,
        };
        Problem {
            device: dev,
            left: contact(0.0),
            right: contact(0.0),
            scattering: Scattering::default(),
            grid: EnergyGrid::covering(grid_min, 0.5, 0.001),
            spin_degeneracy: 2.0,
            decimation: DecimationParams::default(),
            contacts: Vec::new(),
        }
    }

    /// The dense (z − H − Σ_L − Σ_R)⁻¹ of a block-tridiagonal device.
    fn dense_inverse(dev: &Device, sl: &Mat<C64>, sr: &Mat<C64>, z: C64) -> Mat<C64> {
        let (n, b) = (dev.cells(), dev.orbitals);
        let mut m = Mat::<C64>::zeros(n * b, n * b);
        for i in 0..n {
            for r in 0..b {
                for q in 0..b {
                    let mut v = -dev.onsite[i][(r, q)];
                    if i == 0 {
                        v -= sl[(r, q)];
                    }
                    if i + 1 == n {
                        v -= sr[(r, q)];
                    }
                    if r == q {
                        v += z;
                    }
                    m[(i * b + r, i * b + q)] = v;
                    if i + 1 < n {
                        m[(i * b + r, (i + 1) * b + q)] = -dev.coupling[i][(r, q)];
                        m[((i + 1) * b + r, i * b + q)] = -dev.coupling[i][(q, r)].conj();
                    }
                }
            }
        }
        m.partial_piv_lu().inverse()
    }

    fn check_against_dense(dev: &Device, left: &Lead, right: &Lead, z: C64) {
        let d = DecimationParams::default();
        let sl = lead_self_energy_at(left, Side::Left, z, &d).unwrap();
        let sr = lead_self_energy_at(right, Side::Right, z, &d).unwrap();
        let full = dense_inverse(dev, &sl, &sr, z);
        let b = dev.orbitals;
        for (i, g) in diagonal_blocks(dev, &sl, &sr, z).iter().enumerate() {
            for r in 0..b {
                for q in 0..b {
                    let diff = (g[(r, q)] - full[(i * b + r, i * b + q)]).norm();
                    assert!(diff < 1e-12, "cell {i} ({r},{q}) at {z}: {diff}");
                }
            }
        }
    }

    /// G_ii(z) of the recursion against a dense inverse (common practice:
    /// the recursion is exact algebra, so they agree to rounding; 1e-12
    /// 1/eV for |G| of order 1–10 1/eV) for a chain with a potential and
    /// a two-orbital strip with complex couplings, at energies near and far
    /// from the real axis.
    #[test]
    fn diagonal_blocks_match_a_dense_inverse() {
        let p = chain_problem(&[0.6, 0.7, 0.45, 0.9, 0.6, 0.62, 0.58], 0.3, -1.0);
        for z in [c(0.1, 0.026), c(0.7, 0.3), c(-0.4, 2.0)] {
            check_against_dense(&p.device, &p.left.lead, &p.right.lead, z);
            let tr = diagonal_traces(&p, z).unwrap();
            let d = DecimationParams::default();
            let sl = lead_self_energy_at(&p.left.lead, Side::Left, z, &d).unwrap();
            let sr = lead_self_energy_at(&p.right.lead, Side::Right, z, &d).unwrap();
            for (a, g) in tr.iter().zip(diagonal_blocks(&p.device, &sl, &sr, z)) {
                assert!((a - g[(0, 0)]).norm() < 1e-12);
            }
        }
        let t = 0.2;
        let cells = 5;
        let onsite: Vec<Mat<C64>> = (0..cells)
            .map(|i| {
                let e = 0.8 + 0.05 * i as f64;
                Mat::from_fn(2, 2, |r, q| match (r, q) {
                    (0, 0) => c(e, 0.0),
                    (1, 1) => c(e + 0.1, 0.0),
                    (0, 1) => c(-t, 0.05),
                    _ => c(-t, -0.05),
                })
            })
            .collect();
        let hop = Mat::from_fn(2, 2, |r, q| match (r, q) {
            (0, 0) | (1, 1) => c(-t, 0.0),
            (0, 1) => c(0.03, 0.02),
            _ => c(-0.01, 0.0),
        });
        let dev = Device {
            spacing_nm: 0.5,
            orbitals: 2,
            onsite: onsite.clone(),
            coupling: vec![hop.clone(); cells - 1],
            x_nm: device::cell_positions(cells, 0.5),
            potential_ev: vec![0.0; cells],
            band_edge_ev: vec![0.0; cells],
        };
        let left = Lead::Periodic {
            onsite: onsite[0].clone(),
            hopping: hop.clone(),
        };
        let right = Lead::Joined {
            onsite: onsite[cells - 1].clone(),
            hopping: hop.clone(),
            join: Mat::from_fn(
                2,
                2,
                |r, q| if r == q { c(-0.15, 0.0) } else { c(0.0, 0.0) },
            ),
        };
        for z in [c(0.5, 0.026), c(1.0, 0.4), c(0.0, 3.0)] {
            check_against_dense(&dev, &left, &right, z);
        }
    }

    /// The chain self-energy off the axis continues the closed form on it
    /// (inside the band, Im Σ < 0; outside, the decaying root), and two
    /// uncoupled chains decimated at complex z give the closed form on the
    /// diagonal (common practice: the surface Green's function of a
    /// tight-binding chain; 1e-9 from the decimation's stopping rule).
    #[test]
    fn lead_self_energy_continues_the_real_axis() {
        let (eps, t) = (0.4, 0.2);
        for e in [-0.3, 0.1, 0.4, 0.7, 1.1] {
            let on = crate::leads::chain_self_energy(e, eps, t);
            let off = chain_self_energy_at(c(e, 1e-13), eps, t);
            assert!((on - off).norm() < 1e-6, "{e}: {on} {off}");
        }
        let z = c(0.35, 0.05);
        let s = chain_self_energy_at(z, eps, t);
        assert!(s.im < 0.0);
        let onsite = Mat::from_fn(2, 2, |r, q| {
            if r == q {
                c(eps + 0.1 * r as f64, 0.0)
            } else {
                c(0.0, 0.0)
            }
        });
        let hop = Mat::from_fn(2, 2, |r, q| if r == q { c(-t, 0.0) } else { c(0.0, 0.0) });
        let lead = Lead::Periodic {
            onsite,
            hopping: hop,
        };
        for side in Side::ALL {
            let m = lead_self_energy_at(&lead, side, z, &DecimationParams::default()).unwrap();
            for o in 0..2 {
                let want = chain_self_energy_at(z, eps + 0.1 * o as f64, t);
                assert!((m[(o, o)] - want).norm() < 1e-9, "{side} {o}");
            }
            assert!(m[(0, 1)].norm() < 1e-12);
        }
    }

    /// (g_s/π) ∫_0^π f(E(θ)) dθ with E(θ) = edge + 2t(1 − cos θ), by
    /// adaptive Simpson to `tol`.
    fn band_integral(edge: f64, t: f64, mu: f64, kt: f64) -> f64 {
        /// Simpson on [a, b] (values fa, fb, fm at the ends and the
        /// middle, `whole` the rule on all of it), halved until the
        /// halves agree with the whole to `tol` or `depth` runs out.
        fn simpson(
            f: &dyn Fn(f64) -> f64,
            (a, fa): (f64, f64),
            (b, fb): (f64, f64),
            fm: f64,
            whole: f64,
            (tol, depth): (f64, u32),
        ) -> f64 {
            let m = 0.5 * (a + b);
            let (lm, rm) = (f(0.5 * (a + m)), f(0.5 * (m + b)));
            let left = (m - a) / 6.0 * (fa + 4.0 * lm + fm);
            let right = (b - m) / 6.0 * (fm + 4.0 * rm + fb);
            if depth == 0 || (left + right - whole).abs() < 15.0 * tol {
                return left + right + (left + right - whole) / 15.0;
            }
            let next = (0.5 * tol, depth - 1);
            simpson(f, (a, fa), (m, fm), lm, left, next)
                + simpson(f, (m, fm), (b, fb), rm, right, next)
        }
        let f = |th: f64| exact_fermi((edge + 2.0 * t * (1.0 - th.cos()) - mu) / kt);
        let pi = std::f64::consts::PI;
        let (fa, fm, fb) = (f(0.0), f(0.5 * pi), f(pi));
        let whole = pi / 6.0 * (fa + 4.0 * fm + fb);
        2.0 / pi * simpson(&f, (0.0, fa), (pi, fb), fm, whole, (1e-16, 40))
    }

    /// n_eq of a flat coherent chain (leads continuing it) on the contour
    /// against the band integral of the chain's one-dimensional density of
    /// states by adaptive quadrature (common practice: the tight-binding
    /// chain, whose density of states over θ = ka is uniform, dθ/π). Both
    /// are exact up to rounding and the quadrature's 1e-16 target; 1e-10
    /// relative allows for the rounding of the pole sums at the smallest
    /// count (4e-4 electrons).
    #[test]
    fn flat_chain_count_matches_the_band_integral() {
        let t = 0.3;
        let kt = crate::units::thermal_energy_ev(300.0);
        for edge in [-0.2, -0.02, 0.0, 0.03, 0.15] {
            let p = chain_problem(&[edge + 2.0 * t; 12], t, -0.3);
            let n = equilibrium_count(&p).unwrap();
            let want = band_integral(edge, t, 0.0, kt);
            for (i, got) in n.electrons.iter().enumerate() {
                assert!(
                    (got / want - 1.0).abs() < 1e-10,
                    "edge {edge} cell {i}: {got} {want}"
                );
            }
        }
    }

    /// The contour applies only where no state lies below the grid: a
    /// chain whose band reaches below `grid.min_ev` (a well, or a grid
    /// starting above the band bottom) keeps the real-axis count, as do a
    /// wide-band lead and scattering; the bound is exact for a chain.
    #[test]
    fn contour_refuses_states_below_the_grid() {
        let flat = chain_problem(&[0.6; 6], 0.3, -0.1);
        assert!((spectrum_bounds(&flat).unwrap().0 - 0.0).abs() < 1e-15);
        assert!(equilibrium_count(&flat).is_some());
        let well = chain_problem(&[0.6, 0.6, 0.45, 0.6, 0.6, 0.6], 0.3, -0.1);
        assert!(equilibrium_count(&well).is_none());
        let high = chain_problem(&[0.6; 6], 0.3, 0.01);
        assert!(equilibrium_count(&high).is_none());
        let mut wide = flat.clone();
        wide.right.lead = Lead::WideBand {
            gamma: Mat::from_fn(1, 1, |_, _| c(0.01, 0.0)),
        };
        assert!(equilibrium_count(&wide).is_none());
        let mut scattered = flat.clone();
        scattered.scattering.dephasing_ev2 = vec![1e-4; 6];
        assert!(equilibrium_count(&scattered).is_none());
    }
}
