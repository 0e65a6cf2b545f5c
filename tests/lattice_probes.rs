//! Phonon probes: the multi-terminal network of a lattice with damping on
//! its sites, the floating lattice temperatures and the conductance with
//! the probes floating.

mod common;
use common::Rng;
use faer::Mat;
use faer::linalg::solvers::DenseSolveCore;
use qheat::C64;
use qheat::lattice::{
    FloatParams, Lattice, PhononLead, PhononSpectrum, ProbeError, ProbeNetwork, SpectrumParams,
    TerminalMatrix,
};
use qheat::leads::broadening;

// A silicon-like mass and a spring of a few N/m: ω_max ≈ 24 rad/ps.
const M: f64 = 28.0855;
const K: f64 = 7.0;

/// Uniform in [0, 1).
fn u01(rng: &mut Rng) -> f64 {
    0.5 * (1.0 + rng.uniform())
}

/// A chain of random masses and springs between leads of their own, with
/// damping on the sites where `damped(i)`.
fn disordered_chain(seed: u64, n: usize, damped: impl Fn(usize) -> bool) -> Lattice {
    let mut rng = Rng::new(seed);
    let masses: Vec<f64> = (0..n).map(|_| 12.0 + 60.0 * u01(&mut rng)).collect();
    let springs: Vec<f64> = (0..n - 1).map(|_| 3.0 + 12.0 * u01(&mut rng)).collect();
    let gamma: Vec<f64> = (0..n)
        .map(|i| {
            if damped(i) {
                0.2 + 2.0 * u01(&mut rng)
            } else {
                0.0
            }
        })
        .collect();
    let left = PhononLead::chain(28.0, 8.0, 5.0);
    let right = PhononLead::chain(40.0, 10.0, 12.0);
    Lattice::chain_with_leads(&masses, &springs, left, right)
        .unwrap()
        .with_damping(gamma)
        .unwrap()
}

/// A 3-wide strip of random cells with damping on two sites in three.
fn damped_strip(seed: u64, n: usize) -> Lattice {
    let mut rng = Rng::new(seed);
    let masses: Vec<f64> = (0..n).map(|_| 20.0 + 30.0 * u01(&mut rng)).collect();
    let long: Vec<f64> = (0..n).map(|_| 5.0 + 10.0 * u01(&mut rng)).collect();
    let trans: Vec<f64> = (0..n).map(|_| 2.0 + 8.0 * u01(&mut rng)).collect();
    let gamma: Vec<f64> = (0..3 * n)
        .map(|s| if s % 3 == 1 { 0.0 } else { 0.1 + u01(&mut rng) })
        .collect();
    Lattice::strip(3, &masses, &long, &trans)
        .unwrap()
        .with_damping(gamma)
        .unwrap()
}

/// T_ab = Tr[Γ_a D Γ_b D†] and Tr[Γ_a A] from a dense inversion of the
/// whole D^r = [ω² − Φ − Π_L − Π_R − Π_s]⁻¹, with Γ_a as full matrices.
fn dense_network(lat: &Lattice, omega: f64) -> TerminalMatrix {
    let (n, b) = (lat.cells(), lat.sites_per_cell());
    let size = n * b;
    let (pl, pr) = lat.lead_self_energies(omega).unwrap();
    let (on, co) = (lat.dynamical_onsite(), lat.dynamical_coupling());
    let gamma = lat.damping_per_ps();
    let mut a = Mat::<C64>::zeros(size, size);
    for i in 0..n {
        for r in 0..b {
            for c in 0..b {
                a[(i * b + r, i * b + c)] = -on[i][(r, c)];
                if i + 1 < n {
                    a[(i * b + r, (i + 1) * b + c)] = -co[i][(r, c)];
                    a[((i + 1) * b + c, i * b + r)] = -co[i][(r, c)].conj();
                }
            }
            a[(i * b + r, i * b + r)] += C64::new(omega * omega, omega * gamma[i * b + r]);
        }
    }
    let mut gammas = Vec::new();
    for (cell, pi) in [(0, &pl), (n - 1, &pr)] {
        let g = broadening(pi);
        for r in 0..b {
            for c in 0..b {
                a[(cell * b + r, cell * b + c)] -= pi[(r, c)];
            }
        }
        gammas.push(Mat::from_fn(size, size, |r, c| {
            let inside = |x: usize| x / b == cell;
            if inside(r) && inside(c) {
                g[(r % b, c % b)]
            } else {
                C64::new(0.0, 0.0)
            }
        }));
    }
    for s in (0..size).filter(|&s| gamma[s] > 0.0) {
        let l = C64::new(2.0 * omega * gamma[s], 0.0);
        gammas.push(Mat::from_fn(size, size, |r, c| {
            if r == s && c == s {
                l
            } else {
                C64::new(0.0, 0.0)
            }
        }));
    }
    let d = a.partial_piv_lu().inverse();
    let spectral = Mat::from_fn(size, size, |r, c| {
        C64::new(0.0, 1.0) * (d[(r, c)] - d[(c, r)].conj())
    });
    let trace = |m: Mat<C64>| (0..size).map(|k| m[(k, k)].re).sum::<f64>();
    let p = gammas.len();
    let mut transmission = vec![0.0; p * p];
    for x in 0..p {
        for y in 0..p {
            transmission[x * p + y] = trace(&gammas[x] * &d * &gammas[y] * d.adjoint());
        }
    }
    let absorption = gammas.iter().map(|g| trace(g * &spectral)).collect();
    TerminalMatrix {
        terminals: p,
        transmission,
        absorption,
    }
}

/// Frequencies spread over the band of `lat`, off its edges.
fn band_samples(lat: &Lattice) -> Vec<f64> {
    let top = lat.band_top_rad_per_ps();
    [0.004, 0.13, 0.38, 0.61, 0.87, 0.993]
        .iter()
        .map(|f| f * top)
        .collect()
}

/// The recursion's T_ab against the dense inversion (the same equations
/// evaluated a second, independent way: only rounding separates them,
/// ~1e-14 here; 1e-10 of the largest Tr[Λ_a A] leaves room for the
/// conditioning near resonances). Chain (one site per cell, half the sites
/// damped) and strip (b = 3: lead–lead, lead–site and site–site paths).
#[test]
fn terminal_transmissions_match_a_dense_inversion() {
    let chain = disordered_chain(3, 14, |i| i % 2 == 0 || i == 13);
    let strip = damped_strip(9, 5);
    for lat in [&chain, &strip] {
        let mut seen: f64 = 0.0;
        for w in band_samples(lat) {
            let rec = lat.terminal_matrix(w).unwrap();
            let dense = dense_network(lat, w);
            assert_eq!(rec.terminals, 2 + lat.probe_sites().len());
            assert_eq!(rec.terminals, dense.terminals);
            let scale = dense.absorption.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
            for (x, y) in rec.transmission.iter().zip(&dense.transmission) {
                assert!((x - y).abs() <= 1e-10 * scale, "ω = {w}: {x} vs {y}");
                seen = seen.max(x.abs() / scale);
            }
            for (x, y) in rec.absorption.iter().zip(&dense.absorption) {
                assert!((x - y).abs() <= 1e-10 * scale, "ω = {w}: {x} vs {y}");
            }
        }
        assert!(seen > 0.05, "the comparison must see transmission");
    }
}

/// Sum rules of a lossless network whose only losses are its terminals:
/// Σ_b T_ab = Tr[Λ_a A] = Σ_b T_ba, and reciprocity T_ab = T_ba (common
/// practice for a reciprocal harmonic network: D^r is complex symmetric).
/// Tolerance 1e-10 of Tr[Λ_a A], rounding with room for conditioning.
#[test]
fn terminal_transmissions_obey_sum_rules_and_reciprocity() {
    for lat in [disordered_chain(21, 30, |i| i % 3 != 1), damped_strip(4, 6)] {
        for w in band_samples(&lat) {
            let t = lat.terminal_matrix(w).unwrap();
            let p = t.terminals;
            let scale = t.absorption.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
            assert!(scale > 0.0);
            for a in 0..p {
                let row: f64 = (0..p).map(|b| t.get(a, b)).sum();
                let col: f64 = (0..p).map(|b| t.get(b, a)).sum();
                let abs = t.absorption[a];
                assert!(
                    (row - abs).abs() <= 1e-10 * scale,
                    "ω {w}, a {a}: {row} vs {abs}"
                );
                assert!(
                    (col - abs).abs() <= 1e-10 * scale,
                    "ω {w}, a {a}: {col} vs {abs}"
                );
                for b in 0..p {
                    let d = (t.get(a, b) - t.get(b, a)).abs();
                    assert!(d <= 1e-10 * scale, "ω {w}: T_{a}{b} − T_{b}{a} = {d}");
                }
            }
        }
    }
}

/// The spectrum and the network of `lat`, the frequency integral refined
/// to `tolerance` at `temps`.
fn network(lat: &Lattice, temps: &[f64], tolerance: f64) -> (PhononSpectrum, ProbeNetwork) {
    let p = SpectrumParams {
        temperatures_k: temps.to_vec(),
        relative_tolerance: tolerance,
        ..Default::default()
    };
    let s = PhononSpectrum::compute(lat, &p).unwrap();
    let n = ProbeNetwork::compute(lat, &s).unwrap();
    (s, n)
}

/// With the damping γ → 0 the probes decouple and κ_ph with the probes
/// floating tends to the ballistic two-terminal κ_ph of the undamped
/// lattice; the difference is first order in γ (the probes add a
/// resistance proportional to their coupling), so it shrinks tenfold when
/// γ does (common practice; the ratio is held to 0.1 ± 0.015, which leaves
/// room for the second-order term at γ = 1e-2/ps). Mass junction inside the
/// chain, so the limit is not a trivial Ξ = 1. Floating probes re-emit the
/// heat they take in, so they lose less than the same damping does when it
/// only absorbs (the damped Ξ alone): 0.44 of that loss here, 0.7 allowed.
#[test]
fn floating_conductance_tends_to_the_ballistic_value_as_damping_vanishes() {
    let n = 12;
    let masses: Vec<f64> = (0..n)
        .map(|i| if i < n / 2 { M } else { 2.5 * M })
        .collect();
    let bare = Lattice::chain(&masses, &vec![K; n]).unwrap();
    let temps = [30.0, 300.0];
    let ballistic = PhononSpectrum::compute(
        &bare,
        &SpectrumParams {
            temperatures_k: temps.to_vec(),
            ..Default::default()
        },
    )
    .unwrap();
    let difference = |gamma: f64| -> Vec<f64> {
        let lat = bare.clone().with_damping(vec![gamma; n]).unwrap();
        let (absorbed, net) = network(&lat, &temps, 1e-8);
        assert_eq!(net.terminals(), n + 2);
        temps
            .iter()
            .map(|&t| {
                let k0 = ballistic.conductance(t);
                let floating = (net.floating_conductance(t) - k0) / k0;
                // Probes that only absorbed (Ξ of the damped lattice) would
                // lose more: floating probes re-emit what they take in.
                let lost = (absorbed.conductance(t) - k0) / k0;
                assert!(floating.abs() < 0.7 * lost.abs(), "{floating} vs {lost}");
                floating
            })
            .collect()
    };
    let (coarse, fine) = (difference(1e-2), difference(1e-3));
    for (c, f) in coarse.iter().zip(&fine) {
        assert!(c.abs() > 1e-4 && c.abs() < 0.1, "relative difference {c}");
        let ratio = f / c;
        assert!((ratio - 0.1).abs() < 0.015, "{f} / {c} = {ratio}");
    }
}

/// A uniform chain with a probe on every site, much longer than the phonon
/// mean free path ℓ ≈ v/γ (v ≈ 12 sites/ps, γ = 5/ps: ℓ ≈ 2.4 sites), is a
/// diffusive conductor: its thermal resistance 1/κ_ph grows linearly with
/// length, R = R_c + ρL (Fourier's law; common practice for harmonic chains
/// with self-consistent reservoirs, from memory: F. Bonetto, J. L.
/// Lebowitz and J. Lukkarinen, J. Stat. Phys. 116, 783 (2004)). Lengths of
/// 3 to 13 ℓ; the straight line must fit every length to 5e-4 of R (the
/// deviation left at these lengths is ~1e-4: the exponential tails of the
/// contact regions) and its slope must carry most of R at the longest.
#[test]
fn long_damped_chain_obeys_fourier_law() {
    let lengths = [8, 12, 16, 20, 24, 28, 32];
    let t = 300.0;
    let r: Vec<f64> = lengths
        .iter()
        .map(|&n| {
            let (_, net) = network(&uniform_damped(n, 5.0), &[t], 1e-5);
            1.0 / net.floating_conductance(t)
        })
        .collect();
    let x: Vec<f64> = lengths.iter().map(|&n| n as f64).collect();
    let (c, rho) = line_fit(&x, &r);
    for (xi, ri) in x.iter().zip(&r) {
        let fit = c + rho * xi;
        assert!(
            (ri - fit).abs() < 1e-3 * ri,
            "L = {xi}: R {ri:e} vs fit {fit:e}"
        );
    }
    assert!(rho > 0.0 && c > 0.0, "R_c {c:e}, ρ {rho:e}");
    assert!(
        rho * 32.0 > 0.5 * r[6],
        "ρL {:e} of R {:e}",
        rho * 32.0,
        r[6]
    );
    // Without probes the same chain is ballistic: R does not grow.
    let bare = Lattice::chain(&[M; 32], &[K; 32]).unwrap();
    // Without probes it is the two-terminal κ_ph itself (the same sum).
    let (spectrum, net) = network(&bare, &[t], 1e-8);
    assert_eq!(net.terminals(), 2);
    let (k, k0) = (net.floating_conductance(t), spectrum.conductance(t));
    assert!((k - k0).abs() <= 1e-12 * k0, "{k:e} vs {k0:e}");
    assert!(1.0 / k < 0.5 * r[6]);
}

/// Least-squares line y = c + m x.
fn line_fit(x: &[f64], y: &[f64]) -> (f64, f64) {
    let n = x.len() as f64;
    let (mx, my) = (x.iter().sum::<f64>() / n, y.iter().sum::<f64>() / n);
    let sxy: f64 = x.iter().zip(y).map(|(a, b)| (a - mx) * (b - my)).sum();
    let sxx: f64 = x.iter().map(|a| (a - mx) * (a - mx)).sum();
    let m = sxy / sxx;
    (my - m * mx, m)
}

fn uniform_damped(n: usize, gamma: f64) -> Lattice {
    Lattice::chain(&vec![M; n], &vec![K; n])
        .unwrap()
        .with_damping(vec![gamma; n])
        .unwrap()
}

/// Uniform heating P_i = P of a diffusive chain (32 sites, ℓ ≈ 2.4 sites)
/// between leads at the same temperature: the heat equation with a uniform
/// source gives a parabolic T_L(x) peaked in the middle (common practice).
/// Mirror symmetry of the chain makes the profile symmetric to rounding
/// (1e-9 K allowed, the Newton tolerance being ~1e-12 of the rise). The
/// parabola through the sites away from the contacts (the contacts'
/// boundary layers are a few ℓ wide) must fit to 1e-3 of the rise (1e-4 seen): the
/// conductances change slightly with temperature over a 2 K rise, and the
/// probe-to-probe kernel has exponential tails of length ℓ.
/// With P = 0 every probe sits at the contact temperature to 1e-12.
#[test]
fn uniform_heating_gives_a_symmetric_parabolic_lattice_temperature() {
    let n = 32;
    let lat = uniform_damped(n, 5.0);
    let (_, net) = network(&lat, &[300.0], 1e-5);
    let params = FloatParams::default();
    let idle = net
        .float_temperatures(300.0, 300.0, &vec![0.0; n], &params)
        .unwrap();
    for &t in &idle.temperatures_k {
        assert!((t - 300.0).abs() <= 1e-12 * 300.0, "{t}");
    }
    let p = 2.5e-12;
    let hot = net
        .float_temperatures(300.0, 300.0, &vec![p; n], &params)
        .unwrap();
    let t = &hot.temperatures_k;
    let rise = t.iter().fold(0.0_f64, |m, &v| m.max(v - 300.0));
    assert!(rise > 0.5 && rise < 5.0, "rise {rise} K");
    for i in 0..n {
        assert!(
            (t[i] - t[n - 1 - i]).abs() < 1e-9,
            "site {i}: {} vs {}",
            t[i],
            t[n - 1 - i]
        );
    }
    let peak = (0..n).max_by(|&a, &b| t[a].total_cmp(&t[b])).unwrap();
    assert!(peak == n / 2 || peak == n / 2 - 1, "peak at {peak}");
    let inner: Vec<usize> = (6..n - 6).collect();
    let x: Vec<f64> = inner
        .iter()
        .map(|&i| i as f64 - 0.5 * (n - 1) as f64)
        .collect();
    let y: Vec<f64> = inner.iter().map(|&i| t[i]).collect();
    let x2: Vec<f64> = x.iter().map(|v| v * v).collect();
    // Symmetric profile: fit T = a + c x² (the odd part is zero above).
    let (a, c) = line_fit(&x2, &y);
    assert!(c < 0.0, "the profile must bend down, c = {c}");
    for (xi, yi) in x.iter().zip(&y) {
        let fit = a + c * xi * xi;
        assert!((yi - fit).abs() < 1e-3 * rise, "x {xi}: {yi} vs {fit}");
    }
}

/// The ledger: with every probe netting zero, the heat that leaves through
/// the two phonon leads equals the power the electrons deposit,
/// Σ_i P_i, to 1e-8 (energy conservation; the Newton tolerance 1e-10 of
/// the net heat bounds it). Disordered chain, leads at different
/// temperatures, some sites heated and some cooled, undamped sites with no
/// power and no temperature. Also: each probe's heat from the others
/// equals −P_i, and linear response: the right-lead heat for leads at
/// T ± δ with P = 0 is 2δ times κ_ph with the probes floating, to 1e-6
/// (the O(δ²) term at δ = 0.01 K of 300 K is ~1e-9; the integral's own
/// accuracy is 1e-8).
#[test]
fn heat_ledger_closes_and_linear_response_matches() {
    let n = 20;
    let lat = disordered_chain(17, n, |i| i != 3 && i != 11);
    let (_, net) = network(&lat, &[300.0, 320.0], 1e-8);
    let mut rng = Rng::new(2);
    let power: Vec<f64> = (0..n)
        .map(|i| {
            if i == 3 || i == 11 {
                0.0
            } else {
                2e-12 * rng.uniform() + 1e-12
            }
        })
        .collect();
    let total: f64 = power.iter().sum();
    let f = net
        .float_temperatures(300.0, 320.0, &power, &FloatParams::default())
        .unwrap();
    assert!(f.temperatures_k[3].is_nan() && f.temperatures_k[11].is_nan());
    let out = f.left_lead_heat_w + f.right_lead_heat_w;
    assert!((out - total).abs() <= 1e-8 * total, "{out:e} vs {total:e}");
    assert!((out - total).abs() <= f.residual_w * (1.0 + 1e-6) + 1e-30);
    let mut terminal_t = vec![300.0, 320.0];
    terminal_t.extend(net.probe_sites().iter().map(|&s| f.temperatures_k[s]));
    let into = net.heat_into(&terminal_t);
    for (q, &s) in net.probe_sites().iter().enumerate() {
        assert!((into[q + 2] + power[s]).abs() <= 1e-8 * total, "site {s}");
    }
    let (t, d) = (310.0, 0.01);
    let lin = net
        .float_temperatures(t + d, t - d, &vec![0.0; n], &FloatParams::default())
        .unwrap();
    let kappa = net.floating_conductance(t);
    let ratio = lin.right_lead_heat_w / (2.0 * d * kappa);
    assert!((ratio - 1.0).abs() < 1e-6, "{ratio}");
}

/// Inputs the solve cannot honour are refused with the site, the value
/// and a hint: power on a site without damping, more heat drawn from a
/// site than its phonons can bring in at any temperature, and a spectrum
/// of another lattice.
#[test]
fn impossible_requests_are_refused_with_the_site() {
    let n = 10;
    let lat = disordered_chain(5, n, |i| i != 4);
    let (_, net) = network(&lat, &[300.0], 1e-8);
    let mut power = vec![0.0; n];
    power[4] = 1e-12;
    let e = net
        .float_temperatures(300.0, 300.0, &power, &FloatParams::default())
        .unwrap_err()
        .to_string();
    assert!(e.contains("power_w[4]") && e.contains("damping"), "{e}");
    // Drawing heat: the most a site can receive is its conductance times
    // the others' temperatures, about 1e-11 W/K × 300 K here.
    let mut power = vec![0.0; n];
    power[6] = -1e-7;
    match net.float_temperatures(300.0, 300.0, &power, &FloatParams::default()) {
        Err(ProbeError::TooCold { site, power_w, .. }) => {
            assert_eq!(site, 6);
            assert_eq!(power_w, -1e-7);
        }
        other => panic!("expected TooCold, got {other:?}"),
    }
    let other = disordered_chain(6, n, |i| i != 4);
    let (spectrum, _) = network(&other, &[300.0], 1e-8);
    let e = ProbeNetwork::compute(&lat, &spectrum)
        .unwrap_err()
        .to_string();
    assert!(e.contains("same lattice"), "{e}");
}

/// A long, strongly damped chain (96 sites, γ = 5/ps: about 40 mean free
/// paths) at the default tolerance 1e-8. Near ω = 0 the recursion's
/// rounding (about ε (ω_top/ω)² relative) is larger than the tiny exact
/// Ξ, and a refinement without a rounding floor split intervals there
/// until it ran out of nodes (it failed from 48 sites on). The spectrum
/// must now settle, with far fewer nodes than the limit, and the floating
/// conductance must fall as 1/L against half the length (Fourier's law,
/// common practice; 10 % allowed for the contact resistance, which is
/// about 1.5 % of R at 48 sites).
#[test]
fn long_strongly_damped_chain_settles_at_the_default_tolerance() {
    let t = [300.0];
    let (long_s, long_n) = network(&uniform_damped(96, 5.0), &t, 1e-8);
    assert!(long_s.len() < 50_000, "{} nodes", long_s.len());
    let (_, short_n) = network(&uniform_damped(48, 5.0), &t, 1e-8);
    let ratio = short_n.floating_conductance(300.0) / long_n.floating_conductance(300.0);
    assert!((ratio - 2.0).abs() < 0.2, "κ(48)/κ(96) = {ratio}");
}
