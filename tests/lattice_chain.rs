//! Phonon transport along one-dimensional chains: the uniform chain against
//! its closed forms, acoustic mismatch at a mass or spring junction, mirror
//! symmetry, and the interface spring that transmits most.

use qheat::lattice::{
    Lattice, PhononLead, PhononSpectrum, SpectrumParams, TransmissionScratch, chain_band_top,
};
use qheat::units::{BOLTZMANN, HBAR, PLANCK};

// A silicon-like mass and a spring of a few N/m: ω_max ≈ 24 rad/ps, ħω_max ≈ 16 meV.
const M: f64 = 28.0855;
const K: f64 = 7.0;

fn xi(lat: &Lattice, omega: f64) -> f64 {
    let mut s = TransmissionScratch::new(lat);
    lat.transmission(omega, &mut s).unwrap()
}

fn spectrum(lat: &Lattice, temps: &[f64]) -> PhononSpectrum {
    let p = SpectrumParams {
        temperatures_k: temps.to_vec(),
        ..Default::default()
    };
    PhononSpectrum::compute(lat, &p).unwrap()
}

/// Ξ = 1 inside the band 0 < ω < 2(k/M)^(1/2) and 0 above (common
/// practice: the uniform chain has one travelling wave per frequency and no
/// scatterer). Tolerance 1e-12: only rounding separates Ξ from 1.
#[test]
fn uniform_chain_transmits_one_channel_inside_its_band() {
    let lat = Lattice::chain(&[M; 12], &[K; 12]).unwrap();
    let top = chain_band_top(M, K);
    assert!((lat.band_top_rad_per_ps() - top).abs() < 1e-12 * top);
    for f in [1e-4, 0.01, 0.3, 0.7, 0.999] {
        let x = xi(&lat, f * top);
        assert!((x - 1.0).abs() < 1e-12, "Ξ({f} ω_max) = {x}");
    }
    for f in [1.001, 1.5] {
        let x = xi(&lat, f * top);
        assert!(x.abs() < 1e-12, "Ξ({f} ω_max) = {x}");
    }
}

/// Composite Simpson rule of g on [a, b] with `n` (even) intervals.
fn simpson(g: impl Fn(f64) -> f64, a: f64, b: f64, n: usize) -> f64 {
    let h = (b - a) / n as f64;
    let inner: f64 = (1..n)
        .map(|j| g(a + j as f64 * h) * if j % 2 == 1 { 4.0 } else { 2.0 })
        .sum();
    (g(a) + g(b) + inner) * h / 3.0
}

/// κ_ph(T) of the uniform chain is (1/h)∫₀^{ħω_max} E ∂n/∂T dE (Landauer
/// formula for one channel, common practice), here by a plain Simpson rule
/// in E written independently of the library's quadrature (4·10⁴ intervals:
/// error ~1e-13 relative). Tolerance 1e-8 is the refinement criterion of
/// the spectrum.
#[test]
fn uniform_chain_conductance_matches_an_independent_quadrature() {
    let lat = Lattice::chain(&[M; 8], &[K; 8]).unwrap();
    let temps = [4.0, 40.0, 300.0];
    let s = spectrum(&lat, &temps);
    let e_max = HBAR * chain_band_top(M, K) * 1e12; // J
    for t in temps {
        let kt = BOLTZMANN * t;
        // E ∂n/∂T = (E²/(kB T²)) e^x/(e^x − 1)², x = E/kT; finite at E → 0.
        let g = |e: f64| {
            if e == 0.0 {
                return BOLTZMANN;
            }
            let x = e / kt;
            let h = 0.5 * x / (0.5 * x).sinh();
            BOLTZMANN * h * h
        };
        let reference = simpson(g, 0.0, e_max, 40_000) / PLANCK;
        let got = s.conductance(t);
        assert!(
            (got / reference - 1.0).abs() < 1e-8,
            "T = {t}: {got:e} vs {reference:e}"
        );
    }
}

/// Low-temperature limit per channel π²kB²T/(3h) = 9.4643115e-13 W/K² · T:
/// L. G. C. Rego and G. Kirczenow, Phys. Rev. Lett. 81, 232 (1998);
/// K. Schwab et al., Nature 404, 974 (2000). At 0.5 K, ħω_max/kBT ≈ 370,
/// so the band top cuts off e^(−370) of the integral: the only error is
/// the integration tolerance (1e-8) and the 8 digits of the quoted value.
#[test]
fn uniform_chain_reaches_the_thermal_conductance_quantum_at_low_temperature() {
    let lat = Lattice::chain(&[M; 6], &[K; 6]).unwrap();
    let s = spectrum(&lat, &[0.5, 2.0]);
    let quantum = std::f64::consts::PI.powi(2) * BOLTZMANN * BOLTZMANN / (3.0 * PLANCK);
    assert!((quantum / 9.4643115e-13 - 1.0).abs() < 1e-7, "{quantum:e}");
    for t in [0.5, 2.0] {
        let per_t = s.conductance(t) / t;
        assert!(
            (per_t / quantum - 1.0).abs() < 2e-8,
            "T = {t}: {per_t:e} W/K² vs {quantum:e}"
        );
    }
}

/// Classical limit kB ω_max/(2π) (equipartition: each mode below ω_max
/// carries kB per unit bandwidth dω/2π; common practice). The next term of
/// ħω ∂n/∂T = kB(1 − x²/12 + …) lowers κ by x_max²/36 = 1.4e-7 at
/// 10⁵ K, hence the tolerance 1e-6.
#[test]
fn uniform_chain_reaches_the_classical_limit_at_high_temperature() {
    let lat = Lattice::chain(&[M; 6], &[K; 6]).unwrap();
    let t = 1e5;
    let s = spectrum(&lat, &[t]);
    let classical = BOLTZMANN * chain_band_top(M, K) * 1e12 / (2.0 * std::f64::consts::PI);
    let got = s.conductance(t);
    assert!(
        (got / classical - 1.0).abs() < 1e-6,
        "{got:e} vs {classical:e}"
    );
}

/// J_ph(T + δ, T − δ)/(2δ) → κ_ph(T): the heat current and the conductance
/// come from the same spectrum by different formulas (an identity of the
/// definitions). The central difference errs by O(δ²): with δ = 0.01 T the
/// relative error is ~1e-5 at most, hence the tolerance 1e-4.
#[test]
fn heat_current_slope_is_the_conductance() {
    let masses = [M, 2.0 * M, M, 0.5 * M, M];
    let lat = Lattice::chain(&masses, &[K, 1.5 * K, K, K, K]).unwrap();
    let s = spectrum(&lat, &[20.0, 300.0]);
    for t in [20.0, 300.0] {
        let d = 0.01 * t;
        let slope = s.heat_current(t + d, t - d) / (2.0 * d);
        let kappa = s.conductance(t);
        assert!(
            (slope / kappa - 1.0).abs() < 1e-4,
            "T = {t}: {slope:e} vs {kappa:e}"
        );
        assert!(
            s.heat_current(t + d, t) > 0.0,
            "heat flows from hot to cold"
        );
    }
}

/// Acoustic mismatch: Ξ(ω → 0) = 4 Z1 Z2/(Z1 + Z2)² with Z = (kM)^(1/2)
/// (long waves see two strings of impedance (kM)^(1/2); common practice,
/// e.g. the acoustic mismatch model of W. A. Little, Can. J. Phys. 37, 334
/// (1959), from memory). The next term is O(ω²): measured 1.3e-5 at ω = 0.01 ω_max, so
/// 1.3e-7 at 1e-3 ω_max, hence the tolerance 1e-6.
#[test]
fn mass_and_spring_junctions_transmit_the_acoustic_mismatch_value_at_low_frequency() {
    let cases = [
        ((M, K), (3.0 * M, K)),
        ((M, K), (M, 4.0 * K)),
        ((M, K), (2.0 * M, 3.0 * K)),
    ];
    for ((m1, k1), (m2, k2)) in cases {
        let masses = [m1, m1, m1, m2, m2, m2];
        let springs = [k1, k1, k1, k2, k2, k2];
        let lat = Lattice::chain(&masses, &springs).unwrap();
        let (z1, z2) = ((k1 * m1).sqrt(), (k2 * m2).sqrt());
        let amm = 4.0 * z1 * z2 / (z1 + z2).powi(2);
        let top = lat.band_top_rad_per_ps();
        let x = xi(&lat, 1e-3 * top);
        assert!(
            (x - amm).abs() < 1e-6,
            "{m1} {k1} | {m2} {k2}: Ξ = {x}, AMM {amm}"
        );
        assert!(amm < 0.99, "the case must be a real mismatch");
    }
}

/// Ξ of a device equals Ξ of its mirror image with the leads swapped
/// (time-reversal symmetry of a harmonic lattice, common practice).
/// Tolerance 1e-12: rounding only.
#[test]
fn transmission_is_mirror_symmetric() {
    let masses = [M, 1.7 * M, 0.6 * M, 2.2 * M, M, 1.3 * M, 0.9 * M];
    let springs = [K, 0.5 * K, 2.0 * K, 1.2 * K, 0.8 * K, 1.6 * K];
    let left = PhononLead::chain(0.8 * M, 1.1 * K, 0.7 * K);
    let right = PhononLead::chain(1.9 * M, 0.9 * K, 1.3 * K);
    let lat = Lattice::chain_with_leads(&masses, &springs, left.clone(), right.clone()).unwrap();
    let mut rm = masses;
    rm.reverse();
    let mut rs = springs;
    rs.reverse();
    let rev = Lattice::chain_with_leads(&rm, &rs, right, left).unwrap();
    let top = lat.band_top_rad_per_ps();
    assert_eq!(top, rev.band_top_rad_per_ps());
    let mut seen_partial = false;
    for j in 1..40 {
        let w = top * j as f64 / 40.0;
        let (a, b) = (xi(&lat, w), xi(&rev, w));
        assert!((a - b).abs() < 1e-12, "ω = {w}: {a} vs {b}");
        seen_partial |= a > 0.05 && a < 0.95;
    }
    assert!(
        seen_partial,
        "the device must scatter for the check to mean anything"
    );
}

/// Between two different chains the interface spring that transmits most
/// is the harmonic mean 2k1k2/(k1 + k2) (L. Zhang, P. Keblinski, J.-S. Wang,
/// B. Li, Phys. Rev. B 83, 064303 (2011), for the junction conductance; it
/// holds here at every frequency). Checked as: Ξ and κ_ph at the harmonic
/// mean exceed their values 2% above and below it. A 2% step changes Ξ
/// by ~1e-4, far above rounding, so the strict inequality is a real test.
#[test]
fn interface_spring_at_the_harmonic_mean_transmits_most() {
    for ((m1, k1), (m2, k2)) in [((M, K), (M, 3.0 * K)), ((M, K), (2.0 * M, 0.5 * K))] {
        let hm = 2.0 * k1 * k2 / (k1 + k2);
        let junction = |kc: f64| {
            let left = PhononLead::chain(m1, k1, k1);
            let right = PhononLead::chain(m2, k2, k2);
            Lattice::chain_with_leads(&[m1, m2], &[kc], left, right).unwrap()
        };
        let (best, lo, hi) = (junction(hm), junction(0.98 * hm), junction(1.02 * hm));
        let top = best.band_top_rad_per_ps();
        for f in [0.1, 0.4, 0.7, 0.95] {
            let (b, l, h) = (xi(&best, f * top), xi(&lo, f * top), xi(&hi, f * top));
            assert!(b > l && b > h, "ω = {f} ω_top: {l} {b} {h}");
        }
        for t in [30.0, 300.0] {
            let k = |lat: &Lattice| spectrum(lat, &[t]).conductance(t);
            let (b, l, h) = (k(&best), k(&lo), k(&hi));
            assert!(b > l && b > h, "T = {t}: {l:e} {b:e} {h:e}");
        }
    }
}

/// Bad inputs name the input, the value and a remedy.
#[test]
fn bad_lattice_inputs_are_named() {
    let e = Lattice::chain(&[M, -1.0], &[K, K]).unwrap_err().to_string();
    assert!(e.contains("masses_u[1]") && e.contains("-1"), "{e}");
    let e = Lattice::chain(&[M, M], &[K]).unwrap_err().to_string();
    assert!(
        e.contains("springs_n_per_m") && e.contains("one spring per site"),
        "{e}"
    );
    let lat = Lattice::chain(&[M; 3], &[K; 3]).unwrap();
    let e = lat.with_damping(vec![0.1; 2]).unwrap_err().to_string();
    assert!(
        e.contains("damping_per_ps") && e.contains("2 values for 3 sites"),
        "{e}"
    );
}
