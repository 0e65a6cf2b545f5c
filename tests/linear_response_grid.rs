//! Linear response and generator curves on one common energy grid.
//!
//! The default grid of a case follows its operating point (step kB·T_min/10,
//! window up to max µ + 20 kB·T_max + ħω), so the runs of one
//! finite-difference set would each get their own grid. These tests ask for
//! the coefficients at any temperature with the default grid, compare them
//! with a run on an explicitly given grid equal to the envelope, and run a
//! generator between two different temperatures.

use proptest::prelude::*;
use proptest::test_runner::{Config, RngAlgorithm, TestRng, TestRunner};
use qheat::case::{Case, CaseKey};
use qheat::scba::Silent;
use qheat::thermo::generator::{GeneratorSettings, carnot_efficiency, generator};
use qheat::thermo::of_case::{CaseCoefficients, case_coefficients};
use qheat::thermo::response::difference_steps;
use qheat::units::thermal_energy_ev;
use std::path::Path;

/// What scatters in the test device.
#[derive(Clone, Copy, Debug)]
enum Scatter {
    /// One optical phonon mode (inelastic).
    Phonon,
    /// Elastic dephasing only (no phonons), still solved by finite
    /// differences through the Born loop.
    Dephasing,
}

/// A 24-cell chain (spacing 0.5 nm, m* = 0.07) with a 0.06 eV, 2 nm barrier
/// in the middle, µ = 0.03 eV above the band edge, no grid keys.
fn chain(tl: f64, tr: f64, scatter: Scatter, split: &str) -> String {
    let scattering = match scatter {
        Scatter::Phonon => "[[phonon]]\nenergy_ev = 0.01\ncoupling_ev2 = 1e-3\n",
        Scatter::Dephasing => "[dephasing]\nstrength_ev2 = 1e-3\n",
    };
    format!(
        r#"
name = "grid-chain"
[device]
kind = "chain"
spacing_nm = 0.5
length_nm = 12.0
effective_mass = 0.07
[[device.region]]
from_nm = 5.0
to_nm = 7.0
offset_ev = 0.06
[leads.left]
fermi_level_ev = 0.03
temperature_k = {tl}
[leads.right]
fermi_level_ev = 0.03
temperature_k = {tr}
{scattering}
[response]
split = "{split}"
[solver]
tolerance = 1e-10
"#
    )
}

fn parse(text: &str) -> Case {
    Case::parse(text, "grid-chain.toml", Path::new(".")).unwrap()
}

fn check_finite(set: &CaseCoefficients, what: &str) {
    let c = &set.coefficients;
    let m = set.response.as_ref().expect("finite differences were used");
    assert!(m.converged, "{what}: Born iterations {:?}", m.iterations);
    for (name, x) in [
        ("G", c.conductance_s),
        ("S", c.seebeck_v_per_k),
        ("κ_e", c.thermal_conductance_w_per_k),
        ("ZT", c.zt),
        ("Onsager residual", c.kelvin_residual),
    ] {
        assert!(x.is_finite(), "{what}: {name} = {x}");
    }
    assert!(c.conductance_s > 0.0, "{what}: G = {}", c.conductance_s);
    assert!(
        c.thermal_conductance_w_per_k > 0.0,
        "{what}: κ_e = {}",
        c.thermal_conductance_w_per_k
    );
    // Electrons carried above µ over the barrier: S < 0 (the sign
    // convention of the coefficients).
    assert!(c.seebeck_v_per_k < 0.0, "{what}: S = {}", c.seebeck_v_per_k);
    assert_eq!(
        m.grid, set.grid.grid,
        "{what}: the runs' grid is the one reported"
    );
}

/// Any lead temperatures in 20–600 K, the default grid, phonons or only
/// dephasing, either split: the coefficients are computed, every run
/// converges and the results are finite and of the expected sign. Eight
/// cases from a fixed seed keep the test short and reproducible; the
/// grid stays below about 600 points (µ − E_c = 0.03 eV is 180 steps of
/// kT/10 at 20 K, plus 200 steps for the 20 kT above µ).
#[test]
fn coefficients_at_any_temperature_on_the_default_grid() {
    let mut runner = TestRunner::new_with_rng(
        Config {
            cases: 8,
            failure_persistence: None,
            ..Config::default()
        },
        TestRng::from_seed(RngAlgorithm::ChaCha, &[7; 32]),
    );
    let strategy = (
        20.0f64..600.0,
        20.0f64..600.0,
        prop_oneof![Just(Scatter::Phonon), Just(Scatter::Dephasing)],
        prop_oneof![Just("symmetric"), Just("left-only")],
    );
    runner
        .run(&strategy, |(tl, tr, scatter, split)| {
            let case = parse(&chain(tl, tr, scatter, split));
            let what = format!("T = {tl:.2}/{tr:.2} K, {scatter:?}, {split}");
            let set = case_coefficients(&case, &mut Silent)
                .map_err(|e| TestCaseError::fail(format!("{what}: {e}")))?;
            check_finite(&set, &what);
            Ok(())
        })
        .unwrap();
}

/// The default-grid coefficients against a run whose case gives the grid
/// explicitly, set here by hand to the envelope of the four runs' own
/// grids: step 10 meV/n, the largest at most kB·T_low/10 on which the
/// 10 meV phonon is a whole number of steps, with T_low the lowest lead
/// temperature of any
/// run (T − δT/2 for the symmetric split, T − δT with lead 1 alone), first
/// energy half that step above the band edge (0 eV), last energy
/// 20 kB·T_high + ħω (snapped) above the highest Fermi level of any run
/// (T_high and that level likewise half a step or a step up).
///
/// Tolerance 1e-6 relative on G, S and κ_e: both sides take the same
/// finite differences (so the (δ/kT)²/6 ≈ 2e-7 truncation error cancels),
/// the Born loop is converged to 1e-12 (about 1e-9 of a difference that is
/// 1e-3 of the currents), and the two grids can differ only by the last
/// point, 20 kT above µ, where the Fermi window is e^-20 ≈ 2e-9 of its peak.
/// The step and first energy of the reported grid must equal the hand
/// values to rounding (1e-12 relative).
#[test]
fn default_grid_agrees_with_the_explicit_common_grid() {
    // How far the runs move the lead temperatures and Fermi levels: by half
    // a step each way (symmetric) or a whole step (lead 1 alone).
    for (split, reach) in [("symmetric", 0.5), ("left-only", 1.0)] {
        let t = 100.0;
        let case = parse(&chain(t, t, Scatter::Phonon, split));
        let set = case_coefficients(&case, &mut Silent).unwrap();
        check_finite(&set, split);
        let (dv, dt) = difference_steps(t);
        let (t_low, t_high) = (t - reach * dt, t + reach * dt);
        // The default step: the largest one ≤ kB·T_low/10 that divides the
        // 10 meV phonon energy into whole steps.
        let step = 0.01 / (0.01 / (thermal_energy_ev(t_low) / 10.0)).ceil();
        let hw = (0.01 / step).round() * step;
        let min = 0.5 * step;
        let max = 0.03 + reach * dv + 20.0 * thermal_energy_ev(t_high) + hw;
        let g = &set.grid;
        assert!(
            ((g.grid.step_ev - step) / step).abs() < 1e-12,
            "{split}: {g:?}"
        );
        assert!(
            ((g.grid.min_ev - min) / min).abs() < 1e-12,
            "{split}: {g:?}"
        );
        // Each run's grid ends within a step above its own top, and the
        // common one within a quarter step below the highest of those.
        assert!(
            g.max_ev >= max - 0.25 * step && g.max_ev < max + 2.0 * step,
            "{split}: {g:?} against {max}"
        );
        assert!((g.phonon_energies_ev[0] - hw).abs() < 1e-12 * hw);
        let explicit = case
            .with(CaseKey::GridStep, step)
            .unwrap()
            .with(CaseKey::GridMin, min)
            .unwrap()
            .with(CaseKey::GridMax, max)
            .unwrap();
        let reference = case_coefficients(&explicit, &mut Silent).unwrap();
        assert!(
            reference.grid.case_keys.is_none(),
            "explicit keys are kept as given"
        );
        let (a, b) = (&set.coefficients, &reference.coefficients);
        for (name, x, y) in [
            ("G", a.conductance_s, b.conductance_s),
            ("S", a.seebeck_v_per_k, b.seebeck_v_per_k),
            (
                "κ_e",
                a.thermal_conductance_w_per_k,
                b.thermal_conductance_w_per_k,
            ),
        ] {
            assert!(
                ((x - y) / y).abs() < 1e-6,
                "{split}: {name} {x:e} on the default grid, {y:e} on the explicit one"
            );
        }
    }
}

/// A reduced version of the Peltier-barrier demo (30 cells of 0.5 nm,
/// 0.1 eV barrier, one 36 meV phonon, 2 meV step as in the demo) as a
/// generator between 330 K and 300 K: the curve and its linear-response
/// figure of merit are computed on one grid each, every Born loop
/// converges, and the results are physical: power between 0 and V_oc,
/// efficiency below Carnot (second law).
#[test]
fn generator_between_different_temperatures_with_phonons() {
    let text = r#"
name = "peltier-small"
[device]
kind = "chain"
spacing_nm = 0.5
length_nm = 15.0
effective_mass = 0.07
[[device.region]]
from_nm = 6.5
to_nm = 8.5
offset_ev = 0.1
[leads.left]
fermi_level_ev = 0.05
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.05
temperature_k = 300.0
[[phonon]]
energy_ev = 0.036
coupling_ev2 = 2e-3
[grid]
step_ev = 0.002
[solver]
tolerance = 1e-10
"#;
    let case = Case::parse(text, "peltier-small.toml", Path::new(".")).unwrap();
    let settings = GeneratorSettings::new(330.0, 300.0, 5);
    let r = generator(&case, &settings, &mut Silent).unwrap();
    assert!(r.converged);
    assert!(r.open_circuit_voltage_v.is_finite() && r.open_circuit_voltage_v != 0.0);
    assert!(r.max_power_w > 0.0, "{}", r.max_power_w);
    let v = r.voltage_at_max_power_v / r.open_circuit_voltage_v;
    assert!(v > 0.0 && v < 1.0, "{v}");
    assert!(r.max_efficiency > 0.0 && r.max_efficiency < carnot_efficiency(330.0, 300.0));
    assert!(r.coefficients.zt.is_finite() && r.coefficients.zt > 0.0);
    assert_eq!(r.energy_grid.grid.step_ev, 0.002);
    assert_eq!(r.energy_grid.phonon_energies_ev, vec![18.0 * 0.002]);
}
