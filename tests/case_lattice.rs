//! The `[lattice]` section of a case file: per-site masses and springs from
//! the uniform values and the regions, the phonon leads, the keys that
//! sweeps change, κ_ph for ZT and where it comes from, and the phonon
//! spectrum shared between operating points.

use qheat::case::{Case, CaseKey, PhononConductanceSource};
use qheat::lattice::PhononSide;
use qheat::leads::Side;
use std::path::Path;

const CHAIN: &str = r#"
name = "lattice"
[device]
kind = "chain"
spacing_nm = 0.5
length_nm = 5.0
effective_mass = 0.1
[leads.left]
fermi_level_ev = 0.05
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.05
temperature_k = 300.0
"#;

const STRIP: &str = r#"
name = "strip lattice"
[device]
kind = "strip"
spacing_nm = 0.5
length_nm = 2.0
width_sites = 3
effective_mass = 0.1
[leads.left]
fermi_level_ev = 1.0
temperature_k = 300.0
[leads.right]
fermi_level_ev = 1.0
temperature_k = 300.0
"#;

/// Low-temperature lattice thermal conductance per open channel,
/// π² kB² T/(3h) per kelvin of T (W/K²): L. G. C. Rego and G. Kirczenow,
/// Phys. Rev. Lett. 81, 232 (1998), from kB = 1.380649e-23 J/K and
/// h = 6.62607015e-34 J s (exact SI values).
const QUANTUM_PER_K: f64 = 9.464_311_5e-13;

fn case(base: &str, extra: &str) -> Case {
    Case::parse(&format!("{base}{extra}"), "test.toml", Path::new("."))
        .unwrap_or_else(|e| panic!("{e}"))
}

#[test]
fn regions_replace_the_uniform_values_and_a_later_region_wins() {
    // 10 cells at x = 0, 0.5, …, 4.5 nm. The first region takes cells 2–5
    // (x in [1, 3)), the second cells 4–6 (x in [2, 3.5)): cell 4 and 5 get
    // the second region's mass; the first region's spring stays on 2–5.
    let c = case(
        CHAIN,
        r#"
[lattice]
mass_u = 28.0
spring_n_per_m = 30.0
[[lattice.region]]
from_nm = 1.0
to_nm = 3.0
mass_u = 72.6
spring_n_per_m = 20.0
[[lattice.region]]
from_nm = 2.0
to_nm = 3.5
mass_u = 100.0
"#,
    );
    let r = c.resolve().unwrap();
    let l = r.lattice.as_ref().expect("a lattice");
    assert_eq!(l.cells(), 10);
    let m = [
        28.0, 28.0, 72.6, 72.6, 100.0, 100.0, 100.0, 28.0, 28.0, 28.0,
    ];
    assert_eq!(l.masses_u(), &m);
    // The spring of bond (i, i+1) is the value at site i: bonds 2..=5 are
    // 20 N/m, the others 30 N/m.
    let k: Vec<f64> = l.force_coupling().iter().map(|b| -b[(0, 0)]).collect();
    let want = [30.0, 30.0, 20.0, 20.0, 20.0, 20.0, 30.0, 30.0, 30.0];
    assert_eq!(k, want);
    // Acoustic sum rule on an inner site: K_ii is the sum of its springs.
    assert_eq!(l.force_onsite()[2][(0, 0)], 30.0 + 20.0);
    // Default leads continue the end sites, joined by their spring.
    let left = l.lead(PhononSide::Left);
    assert_eq!((left.masses_u[0], -left.contact[(0, 0)]), (28.0, 30.0));
    assert_eq!(
        r.phonon_conductance_source(),
        PhononConductanceSource::Lattice
    );
    let text = r.describe();
    assert!(text.contains("phonon band top ħω = "), "{text}");
    assert!(text.contains("masses 28 to 100 u"), "{text}");
}

#[test]
fn own_leads_set_their_mass_and_the_joining_spring() {
    let c = case(
        CHAIN,
        r#"
[lattice]
mass_u = 28.0
spring_n_per_m = 30.0
[lattice.left]
mass_u = 12.0
spring_n_per_m = 50.0
[lattice.right]
mass_u = 72.6
"#,
    );
    let r = c.resolve().unwrap();
    let l = r.lattice.as_ref().unwrap();
    let left = l.lead(PhononSide::Left);
    assert_eq!(left.masses_u[0], 12.0);
    assert_eq!(-left.coupling[(0, 0)], 50.0);
    assert_eq!(-left.contact[(0, 0)], 50.0);
    // The end site's force constant includes the joining bond.
    assert_eq!(l.force_onsite()[0][(0, 0)], 50.0 + 30.0);
    let right = l.lead(PhononSide::Right);
    assert_eq!((right.masses_u[0], -right.contact[(0, 0)]), (72.6, 30.0));
}

#[test]
fn kappa_of_a_uniform_chain_is_one_quantum_at_low_temperature() {
    // Silicon-like: M = 28 u, k = 30 N/m, ħω_max ≈ 33 meV, so at 2 K the
    // cut of the band is e^(−190) away and Ξ = 1 below it: κ_ph must be
    // the quantum to the accuracy of the frequency rule (1e-8), so 1e-6
    // leaves room for rounding.
    let c = case(CHAIN, "[lattice]\nmass_u = 28.0\nspring_n_per_m = 30.0\n");
    let r = c.resolve().unwrap();
    let t = 2.0;
    let k = r.phonon_conductance_at(t).unwrap();
    let want = QUANTUM_PER_K * t;
    assert!((k / want - 1.0).abs() < 1e-6, "κ_ph {k:e} against {want:e}");
}

#[test]
fn a_strip_carries_one_quantum_at_low_temperature() {
    // Only the acoustic transverse mode is open at low temperature
    // (Rego and Kirczenow 1998); the transverse spring defaults to the
    // longitudinal one, whose optical modes open at ħω of several meV,
    // e^(−30) or less at 1 K. Tolerance as for the chain.
    let c = case(STRIP, "[lattice]\nmass_u = 28.0\nspring_n_per_m = 30.0\n");
    let r = c.resolve().unwrap();
    let l = r.lattice.as_ref().unwrap();
    assert_eq!(l.sites_per_cell(), 3);
    let k = r.phonon_conductance_at(1.0).unwrap();
    assert!(
        (k / QUANTUM_PER_K - 1.0).abs() < 1e-6,
        "κ_ph {k:e} against {QUANTUM_PER_K:e}"
    );
    // A softer transverse spring moves the optical modes down: at 30 K
    // more heat passes than with the default.
    let soft = case(
        STRIP,
        "[lattice]\nmass_u = 28.0\nspring_n_per_m = 30.0\ntransverse_spring_n_per_m = 3.0\n",
    );
    let ks = soft.resolve().unwrap().phonon_conductance_at(30.0).unwrap();
    let kd = r.phonon_conductance_at(30.0).unwrap();
    assert!(ks > 1.05 * kd, "soft {ks:e} against default {kd:e}");
}

#[test]
fn the_spectrum_is_shared_across_operating_points_and_not_across_lattices() {
    let c = case(CHAIN, "[lattice]\nmass_u = 28.0\nspring_n_per_m = 30.0\n");
    let r0 = c.resolve().unwrap();
    let k300 = r0.phonon_conductance_at(300.0).unwrap();
    assert!(r0.phonon_spectrum_cache.is_computed());
    for (key, value) in [
        (CaseKey::LeadFermiLevel(Side::Left), 0.02),
        (CaseKey::BiasVoltage, 0.01),
        (CaseKey::LeadTemperature(Side::Right), 250.0),
    ] {
        let r = c.with(key, value).unwrap().resolve().unwrap();
        assert!(
            r.phonon_spectrum_cache
                .is_shared_with(&r0.phonon_spectrum_cache),
            "{key} made a new spectrum"
        );
    }
    // A lattice key: a new spectrum, and a heavier lattice conducts less
    // at high temperature (classical limit kB ω_max/2π ∝ M^(-1/2)).
    let heavy = c.with(CaseKey::LatticeMass, 4.0 * 28.0).unwrap();
    let rh = heavy.resolve().unwrap();
    assert!(
        !rh.phonon_spectrum_cache
            .is_shared_with(&r0.phonon_spectrum_cache)
    );
    let kh = rh.phonon_conductance_at(300.0).unwrap();
    assert!(kh < 0.75 * k300, "heavy {kh:e} against {k300:e}");
    let spring = c
        .with(CaseKey::LatticeSpring, 60.0)
        .unwrap()
        .resolve()
        .unwrap();
    assert!(
        !spring
            .phonon_spectrum_cache
            .is_shared_with(&r0.phonon_spectrum_cache)
    );
}

#[test]
fn lattice_keys_are_numeric_case_keys() {
    let c = case(
        CHAIN,
        "[lattice]\nmass_u = 28.0\nspring_n_per_m = 30.0\n[[lattice.region]]\nfrom_nm = 1.0\nto_nm = 2.0\nmass_u = 50.0\n",
    );
    let keys = c.numeric_keys();
    for k in [
        "lattice.mass_u",
        "lattice.spring_n_per_m",
        "lattice.region.0.mass_u",
        "lattice.region.0.spring_n_per_m",
        "lattice.left.mass_u",
        "lattice.right.spring_n_per_m",
    ] {
        assert!(keys.iter().any(|x| x == k), "{k} missing in {keys:?}");
        let parsed: CaseKey = k.parse().unwrap();
        assert_eq!(parsed.to_string(), k);
    }
    assert!(!keys.iter().any(|x| x == "lattice.region.1.mass_u"));
    let edited = c.with(CaseKey::LatticeRegionMass(0), 60.0).unwrap();
    let r = edited.resolve().unwrap();
    assert_eq!(r.lattice.unwrap().masses_u()[2], 60.0);
    assert!(edited.to_toml_string().contains("mass_u = 60.0"));
    // A region that does not exist is an error naming it.
    let e = c.with(CaseKey::LatticeRegionMass(1), 60.0).unwrap_err();
    assert!(e.to_string().contains("lattice.region"), "{e}");
}

#[test]
fn a_given_kappa_overrides_the_lattice_with_a_warning() {
    let c = case(
        CHAIN,
        "[lattice]\nmass_u = 28.0\nspring_n_per_m = 30.0\n[thermal]\nphonon_conductance_w_per_k = 1e-10\n",
    );
    let r = c.resolve().unwrap();
    assert_eq!(
        r.phonon_conductance_source(),
        PhononConductanceSource::Given
    );
    assert_eq!(r.phonon_conductance_at(300.0).unwrap(), 1e-10);
    assert!(
        r.warnings.iter().any(|w| w.contains("overrides")),
        "{:?}",
        r.warnings
    );
    let none = case(CHAIN, "").resolve().unwrap();
    assert_eq!(
        none.phonon_conductance_source(),
        PhononConductanceSource::None
    );
    assert!(none.lattice.is_none());
    assert_eq!(none.phonon_conductance_at(300.0).unwrap(), 0.0);
}

/// Damping: uniform, replaced region by region (a later region wins), one
/// value per orbital site (a strip repeats it across), and κ_ph for ZT
/// taken with the probes floating. Damped sites hand part of the heat to
/// their probes and take it back incoherently, which on an ordered chain
/// breaks the ballistic channel up: κ_ph must fall below the undamped
/// value (by more than 1 %, far above the spectrum's 1e-8 accuracy, so a
/// build that dropped the damping, or used the undamped spectrum, fails)
/// yet stay above the direct lead-to-lead part alone. Common practice for phonon probes (a chain with
/// dissipation crosses over from ballistic to diffusive conduction).
#[test]
fn damping_is_set_per_site_and_lowers_kappa_ph() {
    let lat = "[lattice]\nmass_u = 28.0\nspring_n_per_m = 30.0\n";
    let undamped = case(CHAIN, lat).resolve().unwrap();
    assert!(!undamped.lattice_is_damped());
    assert!(undamped.probe_network().is_none());
    let damped = case(
        CHAIN,
        &format!(
            "{lat}damping_per_ps = 3.0\n\
             [[lattice.region]]\nfrom_nm = 1.0\nto_nm = 3.0\ndamping_per_ps = 1.0\n\
             [[lattice.region]]\nfrom_nm = 2.0\nto_nm = 2.6\ndamping_per_ps = 5.0\n"
        ),
    )
    .resolve()
    .unwrap();
    let gamma = damped.lattice.as_ref().unwrap().damping_per_ps().to_vec();
    assert_eq!(
        gamma,
        vec![3.0, 3.0, 1.0, 1.0, 5.0, 5.0, 3.0, 3.0, 3.0, 3.0]
    );
    assert!(damped.lattice_is_damped());
    assert_eq!(
        damped.probe_network().unwrap().unwrap().probe_sites().len(),
        10
    );
    let k0 = undamped.phonon_conductance_at(300.0).unwrap();
    let k1 = damped.phonon_conductance_at(300.0).unwrap();
    assert!(
        k1 > 0.0 && k1 < 0.99 * k0,
        "damped {k1:e} vs undamped {k0:e}"
    );
    // The heat the probes take comes back (they float): more than the
    // coherent transmission alone carries from lead to lead.
    let direct = damped
        .phonon_spectrum()
        .unwrap()
        .unwrap()
        .conductance(300.0);
    assert!(k1 > 1.01 * direct, "floating {k1:e} vs direct {direct:e}");
    // The heat leak of a generator or cooler floats the probes too: across
    // 2 K around 300 K it is κph·ΔT to second order in ΔT/T (relative
    // 1e-4 leaves room for the (ΔT/T)² ≈ 4e-5 curvature, and the
    // lead-to-lead part alone would be far off).
    let leak = damped.phonon_heat_leak(301.0, 299.0).unwrap();
    assert!(
        (leak - 2.0 * k1).abs() <= 1e-4 * 2.0 * k1,
        "leak {leak:e} vs κph ΔT {:e}",
        2.0 * k1
    );

    let strip = case(
        STRIP,
        "[lattice]\nmass_u = 28.0\nspring_n_per_m = 30.0\ndamping_per_ps = 2.0\n",
    )
    .resolve()
    .unwrap();
    assert_eq!(strip.lattice.as_ref().unwrap().damping_per_ps(), &[2.0; 12]);
}

/// A sweep over the damping changes the lattice, so its spectrum is
/// computed again rather than shared.
#[test]
fn damping_is_a_sweepable_key() {
    let c = case(
        CHAIN,
        "[lattice]\nmass_u = 28.0\nspring_n_per_m = 30.0\ndamping_per_ps = 1.0\n",
    );
    let r = c
        .with(CaseKey::LatticeDamping, 4.0)
        .unwrap()
        .resolve()
        .unwrap();
    assert_eq!(r.lattice.as_ref().unwrap().damping_per_ps(), &[4.0; 10]);
}
