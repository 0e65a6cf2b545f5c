//! Helpers shared by the integration tests: a seeded random generator and
//! random block-tridiagonal problems.
#![allow(dead_code)]

pub mod dense_scba;

use faer::Mat;
use qheat::C64;

/// xorshift64*: reproducible random numbers without a dependency.
pub struct Rng(u64);

impl Rng {
    pub fn new(seed: u64) -> Self {
        Self(seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) | 1)
    }
    pub fn next_u64(&mut self) -> u64 {
        let mut x = self.0;
        x ^= x >> 12;
        x ^= x << 25;
        x ^= x >> 27;
        self.0 = x;
        x.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }
    /// Uniform in [-1, 1).
    pub fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64 * 2.0 - 1.0
    }
    pub fn complex(&mut self) -> C64 {
        C64::new(self.uniform(), self.uniform())
    }
}

pub fn random_matrix(rng: &mut Rng, b: usize) -> Mat<C64> {
    Mat::from_fn(b, b, |_, _| rng.complex())
}

pub fn random_hermitian(rng: &mut Rng, b: usize) -> Mat<C64> {
    let a = random_matrix(rng, b);
    Mat::from_fn(b, b, |r, c| (a[(r, c)] + a[(c, r)].conj()) * 0.5)
}

/// Positive semi-definite: X X† scaled.
pub fn random_psd(rng: &mut Rng, b: usize, scale: f64) -> Mat<C64> {
    let a = random_matrix(rng, b);
    let p = &a * a.adjoint();
    Mat::from_fn(b, b, |r, c| p[(r, c)] * scale)
}

/// A retarded self-energy: Hermitian part plus −iΓ/2 with Γ ≥ 0.
pub fn random_self_energy(rng: &mut Rng, b: usize) -> Mat<C64> {
    let h = random_hermitian(rng, b);
    let g = random_psd(rng, b, 0.5);
    Mat::from_fn(b, b, |r, c| {
        h[(r, c)] * 0.3 + g[(r, c)] * C64::new(0.0, -0.5)
    })
}

pub fn max_abs(m: &Mat<C64>) -> f64 {
    let mut v: f64 = 0.0;
    for r in 0..m.nrows() {
        for c in 0..m.ncols() {
            v = v.max(m[(r, c)].norm());
        }
    }
    v
}

pub fn max_diff(a: &Mat<C64>, b: &Mat<C64>) -> f64 {
    let mut v: f64 = 0.0;
    for r in 0..a.nrows() {
        for c in 0..a.ncols() {
            v = v.max((a[(r, c)] - b[(r, c)]).norm());
        }
    }
    v
}

/// Block (i, j) of a dense matrix of b×b blocks.
pub fn block(m: &Mat<C64>, b: usize, i: usize, j: usize) -> Mat<C64> {
    Mat::from_fn(b, b, |r, c| m[(i * b + r, j * b + c)])
}

use qheat::device::Device;
use qheat::grid::EnergyGrid;
use qheat::leads::{DecimationParams, Lead};
use qheat::model::{Contact, Problem};
use qheat::scattering::Scattering;

/// Periodic leads continuing the end cells of a device.
pub fn continuation_leads(device: &Device) -> (Lead, Lead) {
    let n = device.cells();
    let hop = device
        .coupling
        .first()
        .cloned()
        .unwrap_or_else(|| Mat::zeros(device.orbitals, device.orbitals));
    let hop_r = device
        .coupling
        .last()
        .cloned()
        .unwrap_or_else(|| hop.clone());
    (
        Lead::Periodic {
            onsite: device.onsite[0].clone(),
            hopping: hop,
        },
        Lead::Periodic {
            onsite: device.onsite[n - 1].clone(),
            hopping: hop_r,
        },
    )
}

/// A problem with continuation leads, no scattering.
pub fn coherent_problem(
    device: Device,
    (mu_l, t_l): (f64, f64),
    (mu_r, t_r): (f64, f64),
    grid: EnergyGrid,
) -> Problem {
    let (ll, lr) = continuation_leads(&device);
    Problem {
        device,
        left: Contact {
            lead: ll,
            fermi_level_ev: mu_l,
            temperature_k: t_l,
        },
        right: Contact {
            lead: lr,
            fermi_level_ev: mu_r,
            temperature_k: t_r,
        },
        scattering: Scattering::default(),
        grid,
        spin_degeneracy: 2.0,
        decimation: DecimationParams::default(),
        contacts: Vec::new(),
    }
}

/// Relative difference |a − b|/|b|.
pub fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs()
}

/// Largest |a_i − b_i| relative to the largest |b_i|: profiles along the
/// device (lattice power per cell) change sign, so entries near zero are
/// compared on the scale of the whole profile.
pub fn profile_deviation(a: &[f64], b: &[f64]) -> f64 {
    assert_eq!(a.len(), b.len());
    let scale = b.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    a.iter()
        .zip(b)
        .fold(0.0f64, |m, (x, y)| m.max((x - y).abs()))
        / scale
}

use qheat::scattering::PhononMode;

/// A phonon mode of energy ≈ `energy` snapped to the grid, coupling `d` on
/// the orbital sites where `mask` is true.
pub fn phonon(grid: &EnergyGrid, energy: f64, d: f64, mask: &[bool], bath_k: f64) -> PhononMode {
    let steps = grid.steps_for(energy);
    PhononMode {
        requested_energy_ev: energy,
        energy_ev: steps as f64 * grid.step_ev,
        steps,
        coupling_ev2: mask.iter().map(|&m| if m { d } else { 0.0 }).collect(),
        bath_temperature_k: bath_k,
        ..Default::default()
    }
}

/// Effective-mass chain with a barrier of `height` on cells [b0, b1).
pub fn barrier_chain(
    cells: usize,
    spacing: f64,
    mass: f64,
    b0: usize,
    b1: usize,
    height: f64,
) -> Device {
    let t = qheat::units::hopping_ev(mass, spacing);
    let u = (0..cells)
        .map(|i| if i >= b0 && i < b1 { height } else { 0.0 })
        .collect();
    qheat::device::chain(spacing, t, 0.0, u)
}
