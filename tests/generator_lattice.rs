//! Generator and cooler with the heat the lattice leaks from the hot lead to
//! the cold one: it lowers the efficiency, it comes off the cooling power,
//! and the generator's best efficiency still follows Ioffe's formula with
//! the true ZT (κ_ph included).

use qheat::case::{Case, PhononConductanceSource};
use qheat::scba::Silent;
use qheat::thermo::cooler::{CoolerSettings, cooler};
use qheat::thermo::generator::{GeneratorSettings, generator};
use std::path::Path;

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs()
}

/// A single level ε = µ + 0.1 eV between two wide-band leads with
/// Γ_L = Γ_R = 5e-4 eV (as in tests/generator_cooler.rs), with `extra`
/// appended (a lattice, a given κ_ph).
fn level(extra: &str) -> Case {
    let gamma: f64 = 1e-3;
    let text = |band_edge: f64| {
        format!(
            "name = \"level\"\n[device]\nkind = \"chain\"\nspacing_nm = 1.0\nlength_nm = 1.0\n\
             effective_mass = 1.0\nband_edge_ev = {band_edge}\n[leads.left]\nfermi_level_ev = 0.0\n\
             temperature_k = 300.0\nwide_band_ev = {half}\n[leads.right]\nfermi_level_ev = 0.0\n\
             temperature_k = 300.0\nwide_band_ev = {half}\n[grid]\nstep_ev = {step}\n{extra}",
            half = gamma / 2.0,
            step = gamma / 20.0
        )
    };
    let probe = Case::parse(&text(0.0), "level.toml", Path::new(".")).unwrap();
    let t = probe.resolve().unwrap().hopping_ev.unwrap();
    Case::parse(&text(0.1 - 2.0 * t), "level.toml", Path::new(".")).unwrap()
}

/// A soft, heavy lattice: κ_ph ≈ 7.6e-12 W/K at 300 K, about a hundred
/// times the level's κ_e, so ZT falls from about 49 to 0.4.
const LATTICE: &str = "[lattice]\nmass_u = 200.0\nspring_n_per_m = 1.0\n";

/// Small ΔT (300.5 K / 299.5 K). With the lattice:
/// - the leak is J_ph(T_h, T_c) = κ_ph(300 K) ΔT to O((ΔT/T)²) ≈ 3e-6
///   (the symmetric split cancels the first correction; common practice),
///   checked to 1e-4;
/// - the best efficiency falls below the one without, and matches Ioffe's
///   maximum efficiency with the true ZT within 2 % (A. F. Ioffe,
///   Semiconductor Thermoelements and Thermoelectric Cooling, 1957; exact
///   in linear response, ΔT/T = 0.3 % bounds the nonlinear part: the
///   tolerance of the existing generator tests).
#[test]
fn the_lattice_leak_lowers_the_efficiency_to_ioffe_with_the_true_zt() {
    let settings = GeneratorSettings::new(300.5, 299.5, 11);
    let bare = generator(&level(""), &settings, &mut Silent).unwrap();
    let with_case = level(LATTICE);
    let with = generator(&with_case, &settings, &mut Silent).unwrap();
    assert!(bare.converged && with.converged);
    assert_eq!(bare.lattice_heat_leak_w, 0.0);
    assert_eq!(
        bare.phonon_conductance_source,
        PhononConductanceSource::None
    );
    assert_eq!(
        with.phonon_conductance_source,
        PhononConductanceSource::Lattice
    );
    let kph = with_case
        .resolve()
        .unwrap()
        .phonon_conductance_at(300.0)
        .unwrap();
    assert!(
        rel(with.lattice_heat_leak_w, kph * 1.0) < 1e-4,
        "leak {:e} against κ_ph ΔT {:e}",
        with.lattice_heat_leak_w,
        kph
    );
    assert_eq!(with.coefficients.phonon_conductance_w_per_k, kph);
    let (zt, zt0) = (with.coefficients.zt, bare.coefficients.zt);
    println!(
        "ZT {zt:.4} (without κ_ph {zt0:.4}); η_max {:.4e} (without {:.4e}), Ioffe {:.4e}; κ_ph {kph:e} W/K, κ_e {:e} W/K",
        with.max_efficiency,
        bare.max_efficiency,
        with.ioffe_max_efficiency,
        with.coefficients.thermal_conductance_w_per_k
    );
    assert!(
        zt < 0.8 * zt0,
        "κ_ph must matter here: ZT {zt} against {zt0}"
    );
    assert!(with.max_efficiency < bare.max_efficiency);
    assert!(with.curve.iter().zip(&bare.curve).all(|(a, b)| {
        (a.efficiency <= b.efficiency || a.power_w <= 0.0)
            && a.heat_current_hot_w > b.heat_current_hot_w
    }));
    assert!(
        rel(with.max_efficiency, with.ioffe_max_efficiency) < 2e-2,
        "{} against Ioffe {}",
        with.max_efficiency,
        with.ioffe_max_efficiency
    );
    // Ioffe with ZT without κ_ph would be far off: the test tells them apart.
    let wrong = qheat::thermo::generator::ioffe_max_efficiency(zt0, 300.5, 299.5);
    assert!(rel(with.max_efficiency, wrong) > 0.1);
}

/// With a given κ_ph the leak is κ_ph ΔT exactly, and a cooler loses it
/// from its cooling power at every bias (the electrons do not see the
/// lattice, so the curves differ by that constant; tolerance for the
/// rounding of one subtraction).
#[test]
fn a_given_kappa_leaks_kappa_delta_t_and_comes_off_the_cooling_power() {
    let given = "[thermal]\nphonon_conductance_w_per_k = 2e-12\n";
    let settings = GeneratorSettings::new(301.0, 299.0, 5);
    let g = generator(&level(given), &settings, &mut Silent).unwrap();
    assert_eq!(g.lattice_heat_leak_w, 2e-12 * 2.0);
    assert_eq!(g.phonon_conductance_source, PhononConductanceSource::Given);

    let cs = CoolerSettings::new(301.0, 299.0, 7).with_figure_of_merit(false);
    let bare = cooler(&level(""), &cs, &mut Silent).unwrap();
    let with = cooler(&level(LATTICE), &cs, &mut Silent).unwrap();
    let leak = with.lattice_heat_leak_w;
    assert!(leak > 0.0);
    for (a, b) in with.curve.iter().zip(&bare.curve) {
        assert_eq!(a.voltage_v, b.voltage_v);
        assert!((a.cooling_power_w - (b.cooling_power_w - leak)).abs() <= 1e-12 * leak);
    }
    assert!(
        (with.max_cooling_power_w - (bare.max_cooling_power_w - leak)).abs()
            <= 1e-9 * bare.max_cooling_power_w.abs().max(leak)
    );
}
