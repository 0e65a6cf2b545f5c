//! The Hermitian (principal-value) part of the scattering self-energy against
//! Hilbert transforms known in closed form, with the discretisation error
//! bounded analytically.
//!
//! Convention: Σ^r is analytic in the upper half plane and Im Σ^r = −Γ/2, so
//! by Kramers-Kronig Re Σ^r(E) = P(E) = (1/2π) P∫ Γ(E')/(E − E') dE'
//! (common practice; e.g. any text on dispersion relations). The engine
//! replaces Γ by its value at the bin centre on each grid bin
//! [E_k − h/2, E_k + h/2] and integrates 1/(E − E') exactly over each bin:
//! P_h(E_k) = (1/2π) Σ_k' K(k − k') Γ(E_k'), K(m) = ln|(m + ½)/(m − ½)|.
//!
//! Error bound for a smooth Γ (derived here). Write u = E_k − E' and pair
//! the bins at ±m h; with φ(u) = Γ(E_k + u) − Γ(E_k − u) (odd in u),
//!
//!   2π (P_h − P)(E_k) = ∫_0^{h/2} φ(u)/u du
//!                     + Σ_{m≥1} ∫_{bin m} [φ(u) − φ(mh)]/u du.
//!
//! The central term is at most 2 M1 · h/2 = M1 h (|φ(u)/u| ≤ 2 M1 with M1 =
//! max|Γ'|). In bin m, Taylor's theorem gives
//! φ(u) − φ(mh) = φ'(mh)(u − mh) + R with |R| ≤ M2 (u − mh)²
//! (|φ''| ≤ 2 M2, M2 = max|Γ''|). The linear part
//! integrates to −φ'(mh) h (m K(m) − 1), and
//! m K(m) − 1 = Σ_j x^{2j}/(2j + 1) ≤ x²/(3(1 − x²)) = 1/(3(4m² − 1)) with
//! x = 1/(2m), whose sum over m ≥ 1 is 1/6 (telescoping); so all bins
//! together give at most 2 M1 h/6 = M1 h/3. The remainder of bin m is at
//! most M2 (h³/12)/((m − ½)h). Hence
//!
//!   |P_h − P| ≤ (1/2π) [ (4/3) M1 h + (M2 h²/12) Σ_{m=1}^{n} 1/(m − ½) ],
//!
//! first order in h (the error of the central bin does not cancel).
//! Σ_{m=1}^{n} 1/(m − ½) ≤ 2 + ln(2n − 1). For a Γ constant on every bin
//! the transform is exact (bound 0), which the box check uses.

#![allow(clippy::needless_range_loop)]

use qheat::C64;
use qheat::grid::EnergyGrid;
use qheat::scattering::{HilbertTransform, LocalGreen, PhononMode, Scattering};
use std::f64::consts::PI;

/// Box Γ = A on the bins ka..=kb: its transform is
/// (A/2π) ln|(E − a)/(E − b)| with a, b the outer bin edges, and the bin
/// kernel reproduces it exactly (K(m) is the exact bin integral and the sum
/// telescopes). Tolerance 1e-12 of the largest |P|: FFT rounding only.
#[test]
fn box_transform_is_exact_on_bin_edges() {
    let n = 300;
    let (e0, h) = (-1.5, 0.01);
    let (ka, kb) = (90usize, 171usize);
    let amp = 0.7;
    let gamma: Vec<f64> = (0..n)
        .map(|k| if (ka..=kb).contains(&k) { amp } else { 0.0 })
        .collect();
    let got = HilbertTransform::new(n).apply(&gamma);
    let a = e0 + (ka as f64 - 0.5) * h;
    let b = e0 + (kb as f64 + 0.5) * h;
    let exact: Vec<f64> = (0..n)
        .map(|k| {
            let e = e0 + k as f64 * h;
            amp / (2.0 * PI) * ((e - a) / (e - b)).abs().ln()
        })
        .collect();
    let scale = exact.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    assert!(scale > 0.5, "the edges must show a large principal value");
    for k in 0..n {
        assert!(
            (got[k] - exact[k]).abs() <= 1e-12 * scale,
            "k = {k}: {} vs {}",
            got[k],
            exact[k]
        );
    }
}

/// Γ(E) = A (1 − x²)², x = (E − c)/w on |x| < 1, zero outside (a C¹ bump
/// with bounded Γ''). Closed form (partial fractions, derived here and
/// checked against 30-digit quadrature):
/// P(E) = (A/2π) [ (1 − x²)² ln|(x + 1)/(x − 1)| − 2x³ + (10/3) x ].
fn bump_exact(e: f64, c: f64, w: f64, amp: f64) -> f64 {
    let x = (e - c) / w;
    let p = (1.0 - x * x).powi(2);
    let log = if p == 0.0 {
        0.0
    } else {
        ((x + 1.0) / (x - 1.0)).abs().ln()
    };
    amp / (2.0 * PI) * (p * log - 2.0 * x.powi(3) + 10.0 / 3.0 * x)
}

fn bump(e: f64, c: f64, w: f64, amp: f64) -> f64 {
    let x = (e - c) / w;
    if x.abs() < 1.0 {
        amp * (1.0 - x * x).powi(2)
    } else {
        0.0
    }
}

/// The bound of the module comment for the bump: M1 = A·8/(3√3)/w,
/// M2 = 8A/w².
fn bump_bound(h: f64, w: f64, amp: f64, n: usize) -> f64 {
    let m1 = amp * 8.0 / (3.0 * 3f64.sqrt()) / w;
    let m2 = 8.0 * amp / (w * w);
    let harmonic = 2.0 + (2.0 * n as f64 - 1.0).ln();
    (4.0 / 3.0 * m1 * h + m2 * h * h / 12.0 * harmonic) / (2.0 * PI)
}

/// Smooth bump against its closed form, at two steps: the error stays within
/// the derived bound at every grid point (the bound is the tolerance), and
/// it shrinks with h as the bound says (first order). Here max|P| = 0.44
/// and the bound is 5.5e-3 at h = 0.01 eV (measured error 2.8e-3, half the
/// bound): a wrong sign, a missing 1/2π, a shifted or wrapped-around
/// convolution each miss by a sizeable part of max|P|. (The cruder kernel
/// 1/m, which drops the bin integral, stays within this first-order bound;
/// the box check is the one that excludes it.)
#[test]
fn smooth_bump_within_the_derived_bound() {
    let (c, w, amp) = (0.13, 0.8, 1.3);
    let mut worst = Vec::new();
    for &h in &[0.01, 0.005] {
        // The grid covers the bump with room on both sides; points are not
        // symmetric about c.
        let e0 = c - 1.7 * w + 0.3 * h;
        let n = ((3.4 * w) / h) as usize;
        let energies: Vec<f64> = (0..n).map(|k| e0 + k as f64 * h).collect();
        let gamma: Vec<f64> = energies.iter().map(|&e| bump(e, c, w, amp)).collect();
        let got = HilbertTransform::new(n).apply(&gamma);
        let bound = bump_bound(h, w, amp, n);
        let mut err: f64 = 0.0;
        let mut scale: f64 = 0.0;
        for (k, &e) in energies.iter().enumerate() {
            let exact = bump_exact(e, c, w, amp);
            scale = scale.max(exact.abs());
            let d = (got[k] - exact).abs();
            assert!(
                d <= bound,
                "h = {h}, E = {e}: {} vs {exact} (error {d:e} > bound {bound:e})",
                got[k]
            );
            err = err.max(d);
        }
        assert!(bound < 0.02 * scale, "the bound must be a tight test");
        worst.push(err);
    }
    // First order: halving h halves the error (ratio 2 up to the O(h²)
    // terms, which are ~5 % of it here).
    let ratio = worst[0] / worst[1];
    assert!(
        (1.7..2.3).contains(&ratio),
        "error ratio {ratio}: {worst:?}"
    );
}

/// The principal value enters Σ^r with the right sign and scale through the
/// self-energy builder. One site, one mode of ħω = 5 steps with a bath so
/// cold that N < 1e-100 (ħω/kT = 290), an empty site (G^n = 0) whose
/// spectral function is a box: then Γ0(E) = D A(E − ħω), a box shifted up
/// by ħω, and Re Σ^r_0 = (D A0/2π) ln|(E − a − ħω)/(E − b − ħω)| exactly
/// (box check above). Tolerance 1e-12 of the largest value: rounding.
#[test]
fn self_energy_carries_the_principal_value() {
    let n = 200;
    let grid = EnergyGrid::new(-0.5, 0.005, n);
    let (ka, kb) = (60usize, 99usize);
    let a0 = 2.0; // spectral function on the box (1/eV)
    let d = 3e-3; // coupling (eV²)
    let steps = 5;
    let mode = PhononMode {
        requested_energy_ev: steps as f64 * grid.step_ev,
        energy_ev: steps as f64 * grid.step_ev,
        steps,
        coupling_ev2: vec![d],
        bath_temperature_k: 1.0,
        ..Default::default()
    };
    assert!(mode.occupation() < 1e-100);
    let green = LocalGreen {
        sites: 1,
        retarded: (0..n)
            .map(|k| {
                let a = if (ka..=kb).contains(&k) { a0 } else { 0.0 };
                C64::new(0.0, -0.5 * a)
            })
            .collect(),
        filled: vec![0.0; n],
    };
    let scattering = Scattering {
        dephasing_ev2: vec![],
        phonons: vec![mode],
        hermitian_part: true,
        ..Default::default()
    };
    let plan = HilbertTransform::new(n);
    let sigma = scattering.self_energy(&green, n, Some(&plan));
    let de = grid.step_ev;
    let a = grid.energy(ka + steps) - 0.5 * de;
    let b = grid.energy(kb + steps) + 0.5 * de;
    let mut scale: f64 = 0.0;
    let exact: Vec<f64> = (0..n)
        .map(|k| {
            let e = grid.energy(k);
            let v = d * a0 / (2.0 * PI) * ((e - a) / (e - b)).abs().ln();
            scale = scale.max(v.abs());
            v
        })
        .collect();
    for k in 0..n {
        let g = sigma.gamma(k);
        let want_gamma = if (ka + steps..=kb + steps).contains(&k) {
            d * a0
        } else {
            0.0
        };
        assert!((g - want_gamma).abs() <= 1e-15, "Γ0 at k = {k}: {g}");
        assert!(
            (sigma.retarded[k].re - exact[k]).abs() <= 1e-12 * scale,
            "Re Σ at k = {k}: {} vs {}",
            sigma.retarded[k].re,
            exact[k]
        );
    }
    // Without the option the Hermitian part is absent.
    let off = Scattering {
        hermitian_part: false,
        ..scattering
    };
    let s0 = off.self_energy(&green, n, None);
    assert!(s0.retarded.iter().all(|r| r.re == 0.0));
}
