//! A uniform strip W sites across with free edges transmits one channel per
//! open transverse mode: a staircase.

use qheat::lattice::{Lattice, PhononSpectrum, SpectrumParams, TransmissionScratch};
use qheat::units::{BOLTZMANN, PLANCK, RAD2_PER_PS2_PER_N_PER_M_PER_U};

const W: usize = 4;
const M: f64 = 28.0855;
const KL: f64 = 9.0;
const KT: f64 = 4.0;

fn uniform_strip(cells: usize) -> Lattice {
    Lattice::strip(W, &vec![M; cells], &vec![KL; cells], &vec![KT; cells]).unwrap()
}

/// Subband n spans ω² ∈ [λ_n, λ_n + 4kl/M], λ_n = (2kt/M)(1 − cos(nπ/W)),
/// n = 0..W−1: the eigenvalues of the free-edge transverse chain (path-graph
/// Laplacian, common practice). Ξ(ω) must equal the number of subbands
/// that contain ω² (the transverse modes decouple and each travels
/// without scattering). Tolerance 1e-8: the lead self-energy comes from a
/// mode solve whose residual check is 1e-9 relative; points closer than
/// 1e-3 ω_top to a subband edge are skipped (two modes merge there).
#[test]
fn uniform_strip_counts_open_transverse_modes() {
    let lat = uniform_strip(5);
    let s = RAD2_PER_PS2_PER_N_PER_M_PER_U;
    let lambda: Vec<f64> = (0..W)
        .map(|n| 2.0 * KT / M * s * (1.0 - (n as f64 * std::f64::consts::PI / W as f64).cos()))
        .collect();
    let width = 4.0 * KL / M * s;
    let top = (lambda[W - 1] + width).sqrt();
    assert!((lat.band_top_rad_per_ps() - top).abs() < 1e-9 * top);
    let mut scratch = TransmissionScratch::new(&lat);
    let mut seen = [false; W + 1];
    for j in 1..400 {
        let w = top * j as f64 / 400.0;
        let w2 = w * w;
        let edges = lambda.iter().flat_map(|l| [*l, l + width]);
        if edges
            .clone()
            .any(|e| (e.max(0.0).sqrt() - w).abs() < 1e-3 * top)
        {
            continue;
        }
        let count = lambda.iter().filter(|&&l| l < w2 && w2 < l + width).count();
        let xi = lat.transmission(w, &mut scratch).unwrap();
        assert!(
            (xi - count as f64).abs() < 1e-8,
            "ω = {w}: Ξ = {xi}, open modes {count}"
        );
        seen[count] = true;
    }
    assert!(
        seen[1..].iter().all(|&s| s),
        "every step of the staircase was visited: {seen:?}"
    );
}

/// At low temperature only the acoustic subband (n = 0, open from ω = 0)
/// carries heat: κ_ph/T → π²kB²/(3h) (L. G. C. Rego and G. Kirczenow, Phys.
/// Rev. Lett. 81, 232 (1998)). The next subband opens at √λ_1 ≈ 10 rad/ps
/// (ħω/kB ≈ 80 K), so at 0.5 K its share is ~e^(−160); tolerance 1e-7 is
/// the spectrum's tolerance with room for the mode solve's rounding.
#[test]
fn uniform_strip_has_one_quantum_of_conductance_at_low_temperature() {
    let lat = uniform_strip(3);
    let p = SpectrumParams {
        temperatures_k: vec![0.5, 300.0],
        ..Default::default()
    };
    let s = PhononSpectrum::compute(&lat, &p).unwrap();
    let quantum = std::f64::consts::PI.powi(2) * BOLTZMANN * BOLTZMANN / (3.0 * PLANCK);
    let per_t = s.conductance(0.5) / 0.5;
    assert!(
        (per_t / quantum - 1.0).abs() < 1e-7,
        "{per_t:e} vs {quantum:e}"
    );
    // At 300 K several subbands are open: more than one quantum's worth.
    assert!(s.conductance(300.0) > 1.5 * quantum * 300.0 * 0.3);
}
