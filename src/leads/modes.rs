//! Lead self-energy from the Bloch modes of the lead.
//!
//! In a periodic lead with cell block H00 and coupling V = H_n,n+1, a wave
//! ψ_n = λⁿ u solves V λ² u − (E − H00) λ u + V† u = 0, linearised as the
//! generalized eigenproblem
//! [[E − H00, −V†], [I, 0]] x = λ [[V, 0], [0, I]] x, x = (λu, u).
//! The right lead keeps the b modes that decay to the right (|λ| < 1) or
//! propagate to the right (|λ| = 1, particle flow −2 Im(λ u†V u) > 0);
//! ψ_n+1 = F ψ_n with F = U Λ U⁻¹ and Σ_right = V F. The left lead keeps
//! the modes that decay or travel to the left, ψ_n−1 = F⁻ ψ_n with
//! F⁻ = U Λ⁻¹ U⁻¹, and Σ_left = V† F⁻. This works at real energy (no η);
//! the result is checked against the matrix quadratic it must satisfy, and
//! the caller falls back to decimation when the check fails (for instance
//! exactly at a band edge, where two modes merge).

use super::Side;
use crate::C64;
use faer::diag::DiagRef;
use faer::linalg::solvers::DenseSolveCore;
use faer::{Mat, MatRef};

fn norm(m: &Mat<C64>) -> f64 {
    m.norm_l2()
}

/// The linearised pencil (A, B) of the Bloch modes of a periodic chain
/// with cell block `h00` and coupling `v` = H_n,n+1 at real energy: a
/// generalized eigenvector x = (λu, u) of A x = λ B x gives the wave
/// ψ_n = λⁿ u, A = [[E − H00, −V†], [I, 0]], B = [[V, 0], [0, I]].
pub fn mode_pencil(energy_ev: f64, h00: &Mat<C64>, v: &Mat<C64>) -> (Mat<C64>, Mat<C64>) {
    let b = h00.nrows();
    let e = C64::new(energy_ev, 0.0);
    let zero = C64::new(0.0, 0.0);
    let one = C64::new(1.0, 0.0);
    let a = Mat::from_fn(2 * b, 2 * b, |r, c| match (r < b, c < b) {
        (true, true) => {
            if r == c {
                e - h00[(r, c)]
            } else {
                -h00[(r, c)]
            }
        }
        (true, false) => -v[(c - b, r)].conj(),
        (false, true) => {
            if r - b == c {
                one
            } else {
                zero
            }
        }
        (false, false) => zero,
    });
    let bm = Mat::from_fn(2 * b, 2 * b, |r, c| match (r < b, c < b) {
        (true, true) => v[(r, c)],
        (false, false) => {
            if r == c {
                one
            } else {
                zero
            }
        }
        _ => zero,
    });
    (a, bm)
}

/// Σ from the modes, or `None` when the modes do not give a trustworthy
/// answer (the caller then decimates).
pub fn mode_self_energy(
    energy_ev: f64,
    h00: &Mat<C64>,
    v: &Mat<C64>,
    side: Side,
) -> Option<Mat<C64>> {
    let b = h00.nrows();
    let (a, bm) = mode_pencil(energy_ev, h00, v);
    let eig = a.generalized_eigen(&bm).ok()?;
    let (u, sa, sb) = (eig.U(), eig.S_a(), eig.S_b());
    let chosen = lead_modes(u, sa, sb, v, side);
    if chosen.len() != b {
        return None;
    }
    let f = cell_transfer(u, &chosen, side);
    let vd = v.adjoint().to_owned();
    let (near, far) = match side {
        Side::Right => (v, &vd),
        Side::Left => (&vd, v),
    };
    if !solves_quadratic(energy_ev, h00, v, near, far, &f) {
        return None;
    }
    let sigma = near * &f;
    // Γ must be positive semi-definite: its trace at least.
    let gamma_trace: f64 = (0..b).map(|i| -2.0 * sigma[(i, i)].im).sum();
    if gamma_trace.is_nan() || gamma_trace < -1e-10 * norm(&sigma) {
        return None;
    }
    Some(sigma)
}

/// The modes (column of the eigenvectors `u` of the pencil, λ) that belong
/// to the lead on `side`, from the generalized eigenvalues λ = α/β
/// (`sa`, `sb`): those that decay away from the device, and of those with
/// |λ| = 1 the ones whose particle flow −2 Im(λ u†V u) points away from it.
fn lead_modes(
    u: MatRef<'_, C64>,
    sa: DiagRef<'_, C64>,
    sb: DiagRef<'_, C64>,
    v: &Mat<C64>,
    side: Side,
) -> Vec<(usize, C64)> {
    let b = v.nrows();
    let zero = C64::new(0.0, 0.0);
    let mut chosen: Vec<(usize, C64)> = Vec::with_capacity(b);
    let tol_unit = 1e-8;
    for j in 0..2 * b {
        let (alpha, beta) = (sa[j], sb[j]);
        // λ = α/β; β = 0 is λ = ∞ (grows to the right without bound).
        let (lam, mag) = if beta.norm() <= 1e-14 * alpha.norm() {
            (C64::new(f64::INFINITY, 0.0), f64::INFINITY)
        } else {
            let l = alpha / beta;
            (l, l.norm())
        };
        let keep = if (mag - 1.0).abs() < tol_unit {
            let uvec = Mat::from_fn(b, 1, |r, _| u[(b + r, j)]);
            let vu = v * &uvec;
            let mut s = zero;
            for r in 0..b {
                s += uvec[(r, 0)].conj() * vu[(r, 0)];
            }
            let flow = -2.0 * (lam * s).im;
            match side {
                Side::Right => flow > 0.0,
                Side::Left => flow < 0.0,
            }
        } else {
            match side {
                Side::Right => mag < 1.0,
                Side::Left => mag > 1.0,
            }
        };
        if keep {
            chosen.push((j, lam));
        }
    }
    chosen
}

/// The cell-to-cell transfer matrix away from the device built from the
/// `chosen` modes of the pencil eigenvectors `u`: F = U Λ U⁻¹ on the right,
/// F⁻ = U Λ⁻¹ U⁻¹ on the left (a mode with λ = ∞ contributes 0 there).
fn cell_transfer(u: MatRef<'_, C64>, chosen: &[(usize, C64)], side: Side) -> Mat<C64> {
    let b = chosen.len();
    let zero = C64::new(0.0, 0.0);
    let umat = Mat::from_fn(b, b, |r, c| u[(b + r, chosen[c].0)]);
    let uinv = umat.partial_piv_lu().inverse();
    let factor = |l: C64| match side {
        Side::Right => l,
        Side::Left => {
            if l.norm().is_infinite() {
                zero
            } else {
                l.inv()
            }
        }
    };
    let lam = Mat::from_fn(b, b, |r, c| if r == c { factor(chosen[r].1) } else { zero });
    &umat * &lam * &uinv
}

/// Whether `f` satisfies the matrix quadratic (E − H00) F − near F² − far = 0
/// to a relative 10⁻⁹ (right lead: near = V, far = V†; left lead the other
/// way round).
fn solves_quadratic(
    energy_ev: f64,
    h00: &Mat<C64>,
    v: &Mat<C64>,
    near: &Mat<C64>,
    far: &Mat<C64>,
    f: &Mat<C64>,
) -> bool {
    let b = h00.nrows();
    let e = C64::new(energy_ev, 0.0);
    let ehm = Mat::from_fn(b, b, |r, c| {
        if r == c {
            e - h00[(r, c)]
        } else {
            -h00[(r, c)]
        }
    });
    let res = &ehm * f - near * f * f - far;
    let scale = (norm(&ehm) + norm(v)) * (1.0 + norm(f)) * (1.0 + norm(f));
    !(norm(&res).is_nan() || norm(&res) > 1e-9 * scale)
}
