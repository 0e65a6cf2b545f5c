//! Generator and cooler curves: the closed-form bounds, a narrow resonant
//! level in linear response, and a thermionic barrier as a cooler.

use qheat::case::{Case, CaseKey};
use qheat::leads::Side;
use qheat::progress::Silent;
use qheat::thermo::cooler::{CoolerReport, CoolerSettings, cooler};
use qheat::thermo::generator::{
    GeneratorSettings, carnot_cop, carnot_efficiency, curzon_ahlborn_efficiency,
    efficiency_at_max_power_linear, generator, ioffe_max_cop, ioffe_max_efficiency,
};
use std::path::Path;

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs()
}

/// Reference list §8 (Th = 310 K, Tc = 300 K, ZT = 1), numbers computed at
/// 30 digits and quoted to 10: Carnot; Ioffe maximum efficiency and COP
/// (A. F. Ioffe, Semiconductor Thermoelements and Thermoelectric Cooling
/// (1957) [from memory]); Curzon-Ahlborn (F. L. Curzon, B. Ahlborn,
/// Am. J. Phys. 43, 22 (1975) [from memory]); linear-response efficiency at
/// maximum power (C. Van den Broeck, PRL 95, 190602 (2005) [from memory]).
/// Tolerance rel 1e-9: the closed forms are exact and the references carry
/// ten digits.
#[test]
fn closed_forms_match_the_reference_list() {
    let (th, tc) = (310.0, 300.0);
    assert!(rel(carnot_efficiency(th, tc), 0.03225806452) < 1e-9);
    assert!(rel(ioffe_max_efficiency(1.0, th, tc), 0.005609562324) < 1e-9);
    assert!(rel(carnot_cop(th, tc), 30.0) < 1e-12);
    assert!(rel(ioffe_max_cop(1.0, th, tc), 4.732972695) < 1e-9);
    assert!(rel(curzon_ahlborn_efficiency(th, tc), 0.01626124632) < 1e-9);
    assert!(rel(efficiency_at_max_power_linear(1.0, th, tc), 0.005376344086) < 1e-9);
    assert!(rel(efficiency_at_max_power_linear(1e12, th, tc), 0.01612903226) < 1e-9);
}

/// A single level ε = µ + 0.1 eV between two wide-band leads with
/// Γ_L = Γ_R = Γ/2, grid step Γ/20 (resolves the Lorentzian, as in the
/// reference list §4).
fn resonant_level(gamma: f64) -> Case {
    let text = |band_edge: f64| {
        format!(
            r#"
name = "level"
[device]
kind = "chain"
spacing_nm = 1.0
length_nm = 1.0
effective_mass = 1.0
band_edge_ev = {band_edge}
[leads.left]
fermi_level_ev = 0.0
temperature_k = 300.0
wide_band_ev = {half}
[leads.right]
fermi_level_ev = 0.0
temperature_k = 300.0
wide_band_ev = {half}
[grid]
step_ev = {step}
"#,
            half = gamma / 2.0,
            step = gamma / 20.0
        )
    };
    let probe = Case::parse(&text(0.0), "level.toml", Path::new(".")).unwrap();
    // The chain's on-site energy is Ec + 2t: place it at 0.1 eV.
    let t = probe.resolve().unwrap().hopping_ev.unwrap();
    Case::parse(&text(0.1 - 2.0 * t), "level.toml", Path::new(".")).unwrap()
}

/// Narrow level, small ΔT (300.5 K / 299.5 K, η_C = 3.3e-3).
/// - Efficiency at maximum power against the linear-response law
///   (η_C/2) ZT/(ZT + 2) (Van den Broeck 2005 [from memory]) within 1 %:
///   the next order is O(η_C) relative (≈ 0.2 % here), the rest is the
///   refinement of the maximum; it approaches η_C/2 as the level narrows.
/// - Never above η_CA by more than the second-order term η_C²/8
///   (η_CA = η_C/2 + η_C²/8 + …, Curzon-Ahlborn 1975 [from memory]).
/// - Maximum efficiency ≤ η_C, and within 2 % of Ioffe's formula with the
///   device's own ZT (Ioffe 1957 [from memory]): the formula is exact in
///   linear response and ΔT/T = 0.3 % bounds the nonlinear correction.
#[test]
fn narrow_level_generator_in_linear_response() {
    let settings = GeneratorSettings::new(300.5, 299.5, 11);
    let eta_c = carnot_efficiency(settings.hot_k, settings.cold_k);
    let eta_ca = curzon_ahlborn_efficiency(settings.hot_k, settings.cold_k);
    let mut ratios = Vec::new();
    for gamma in [1e-2, 1e-3, 1e-4] {
        let r = generator(&resonant_level(gamma), &settings, &mut Silent).unwrap();
        assert!(r.converged);
        let zt = r.coefficients.zt;
        let law = efficiency_at_max_power_linear(zt, settings.hot_k, settings.cold_k);
        println!(
            "Γ {gamma:e}: ZT {zt:.4}, η(Pmax) {:.6e} law {law:.6e}, η_max {:.6e} Ioffe {:.6e}, η_C {eta_c:.6e}, V_oc {:.4e} (linear {:.4e})",
            r.efficiency_at_max_power,
            r.max_efficiency,
            r.ioffe_max_efficiency,
            r.open_circuit_voltage_v,
            r.open_circuit_voltage_estimate_v
        );
        assert!(
            rel(r.efficiency_at_max_power, law) < 1e-2,
            "Γ {gamma}: {} vs {law}",
            r.efficiency_at_max_power
        );
        assert!(r.efficiency_at_max_power <= eta_ca + eta_c * eta_c / 8.0);
        assert!(r.max_efficiency <= eta_c);
        assert!(r.max_efficiency >= r.efficiency_at_max_power);
        assert!(
            rel(r.max_efficiency, r.ioffe_max_efficiency) < 2e-2,
            "Γ {gamma}: {} vs Ioffe {}",
            r.max_efficiency,
            r.ioffe_max_efficiency
        );
        // The curve: P = 0 at both ends and positive between.
        let c = &r.curve;
        assert_eq!(c[0].power_w, 0.0);
        assert!(c.last().unwrap().power_w.abs() < 1e-9 * r.max_power_w);
        assert!(c[1..c.len() - 1].iter().all(|p| p.power_w > 0.0));
        assert!(c.iter().all(|p| p.power_w <= r.max_power_w));
        ratios.push(r.efficiency_at_max_power / (0.5 * eta_c));
    }
    // Narrower level, tighter coupling: η(Pmax) → η_C/2.
    assert!(ratios[0] < ratios[1] && ratios[1] < ratios[2], "{ratios:?}");
    assert!(ratios[2] > 0.99 && ratios[2] < 1.0 + eta_c, "{ratios:?}");
}

/// Far from linear response (310 K / 300 K) the bounds still hold.
#[test]
fn narrow_level_generator_bounds_at_larger_difference() {
    let settings = GeneratorSettings::new(310.0, 300.0, 21);
    let eta_c = carnot_efficiency(310.0, 300.0);
    let eta_ca = curzon_ahlborn_efficiency(310.0, 300.0);
    let r = generator(&resonant_level(1e-3), &settings, &mut Silent).unwrap();
    assert!(r.max_efficiency <= eta_c, "{}", r.max_efficiency);
    assert!(r.efficiency_at_max_power <= eta_ca + eta_c * eta_c / 8.0);
    assert!(r.efficiency_at_max_power > 0.4 * eta_c);
}

fn barrier() -> Case {
    Case::load(&Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo/thermionic-barrier.toml"))
        .unwrap()
}

fn cool(case: &Case, hot: f64, cold: f64, lead: Side) -> CoolerReport {
    cooler(
        case,
        &CoolerSettings::new(hot, cold, 31)
            .with_cold_lead(lead)
            .with_figure_of_merit(false),
        &mut Silent,
    )
    .unwrap()
}

/// The stages of the solves a curve runs, in order.
#[derive(Default)]
struct Stages(Vec<&'static str>);
impl qheat::progress::Observer for Stages {
    fn curve_solved(&mut self, stage: &'static str, _voltage_v: f64) {
        self.0.push(stage);
    }
}

/// Thermionic barrier at equal temperatures: no cooling at zero current
/// (exactly: j(E) ∝ f1 − f2 = 0), a single maximum inside the swept range,
/// the source doing work there (I·V > 0). The mirror device cools either
/// lead equally with the bias reversed (symmetry: common practice).
#[test]
fn thermionic_cooler_has_one_maximum() {
    let case = barrier();
    let r = cool(&case, 300.0, 300.0, Side::Right);
    let q: Vec<f64> = r.curve.iter().map(|p| p.cooling_power_w).collect();
    // Zero bias, equal temperatures: zero current up to rounding.
    assert!(r.curve[0].current_a.abs() <= 1e-12 * r.current_at_max_a.abs());
    assert!(q[0].abs() <= 1e-12 * r.max_cooling_power_w, "{}", q[0]);
    assert!(r.max_cooling_power_w > 0.0);
    let im = (0..q.len()).max_by(|&a, &b| q[a].total_cmp(&q[b])).unwrap();
    assert!(im > 0 && im + 1 < q.len(), "maximum at an end: {im}");
    for k in 1..q.len() {
        if k <= im {
            assert!(q[k] > q[k - 1], "rising before the maximum: {q:?}");
        } else {
            assert!(q[k] < q[k - 1], "falling after the maximum: {q:?}");
        }
    }
    assert!(r.max_cooling_power_w >= q[im]);
    // An interior maximum: a maximum, not a lower bound.
    assert!(!r.max_at_range_end);
    // Equal temperatures: the COP grows without bound as V → 0 (cooling
    // linear, input power quadratic in V), as the Carnot COP does.
    assert!(r.max_cop.is_infinite() && r.carnot_cop.is_infinite());
    assert_eq!(r.voltage_at_max_cop_v, 0.0);
    // That answer needs no solve: none is spent refining the best COP at
    // equal temperatures, while a temperature difference refines it.
    let stages = |hot: f64| {
        let mut seen = Stages::default();
        let settings = CoolerSettings::new(hot, 300.0, 31).with_figure_of_merit(false);
        cooler(&case, &settings, &mut seen).unwrap();
        seen.0
    };
    assert!(!stages(300.0).contains(&"best COP"));
    assert!(stages(301.0).contains(&"best COP"));
    let q1 = &r.curve[1];
    assert!(q1.cop > r.cop_at_max, "COP largest near V = 0: {}", q1.cop);
    assert!(r.current_at_max_a * r.voltage_at_max_v > 0.0);
    let l = cool(&case, 300.0, 300.0, Side::Left);
    assert!(rel(l.max_cooling_power_w, r.max_cooling_power_w) < 1e-9);
    assert!(rel(l.voltage_at_max_v, -r.voltage_at_max_v) < 1e-6);
}

/// COP ≤ Carnot COP T_c/(T_h − T_c) at every point (second law), for the
/// coherent barrier and for a device with phonon scattering.
#[test]
fn cooler_cop_never_beats_carnot() {
    let phonon = barrier()
        .with(CaseKey::GridStep, 0.004)
        .unwrap()
        .with(CaseKey::DeviceLength, 20.0)
        .unwrap()
        .with(CaseKey::RegionFrom(0), 8.0)
        .unwrap()
        .with(CaseKey::RegionTo(0), 12.0)
        .unwrap();
    let text = phonon.to_toml_string()
        + "\n[[phonon]]\nenergy_ev = 0.036\ncoupling_ev2 = 2e-3\nfrom_nm = 0.0\nto_nm = 20.0\n";
    let phonon = Case::parse(&text, "phonon.toml", Path::new(".")).unwrap();
    for case in [barrier(), phonon] {
        for (th, tc) in [(305.0, 300.0), (330.0, 300.0)] {
            let r = cool(&case, th, tc, Side::Right);
            assert!(r.converged);
            let carnot = carnot_cop(th, tc);
            let mut cooled = 0;
            for p in &r.curve {
                if p.cop.is_finite() {
                    cooled += 1;
                    assert!(p.cop <= carnot, "COP {} > Carnot {carnot}", p.cop);
                }
            }
            assert!(cooled > 0, "{}: never cools at {th}/{tc}", case.name);
            // Heat leaks into the cold lead without bias.
            assert!(r.cooling_power_at_zero_bias_w < 0.0);
        }
    }
}

/// The CLI end to end: generator and cooler write their files and JSON.
#[test]
fn cli_generator_and_cooler() {
    let tmp = tempfile::tempdir().unwrap();
    let exe = env!("CARGO_BIN_EXE_qheat");
    let level = tmp.path().join("level.toml");
    std::fs::write(&level, resonant_level(1e-2).to_toml_string()).unwrap();
    let out = tmp.path().join("g");
    let o = std::process::Command::new(exe)
        .args([
            "generator",
            level.to_str().unwrap(),
            "--hot",
            "310",
            "--cold",
            "300",
        ])
        .args(["--points", "9", "--json", "-o", out.to_str().unwrap()])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let s: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(s["kind"], "generator");
    assert!(s["max_power_w"].as_f64().unwrap() > 0.0);
    assert!(rel(s["carnot_efficiency"].as_f64().unwrap(), 0.03225806452) < 1e-9);
    let csv = std::fs::read_to_string(out.join("generator.csv")).unwrap();
    assert!(csv.starts_with("voltage_v,current_a,power_w,heat_current_hot_w,efficiency"));
    assert_eq!(csv.lines().count(), 10);
    assert!(out.join("summary.json").exists());

    let barrier = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo/thermionic-barrier.toml");
    let out = tmp.path().join("c");
    let o = std::process::Command::new(exe)
        .args([
            "cooler",
            barrier.to_str().unwrap(),
            "--hot",
            "305",
            "--cold",
            "300",
        ])
        .args(["--points", "7", "-o", out.to_str().unwrap()])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(
        text.contains("maximum cooling") && text.contains("Carnot 60"),
        "{text}"
    );
    let csv = std::fs::read_to_string(out.join("cooler.csv")).unwrap();
    assert!(csv.starts_with("voltage_v,current_a,cooling_power_w,input_power_w"));
    assert_eq!(csv.lines().count(), 8);
    let o = std::process::Command::new(exe)
        .args([
            "cooler",
            barrier.to_str().unwrap(),
            "--hot",
            "290",
            "--cold",
            "300",
        ])
        .arg("-o")
        .arg(&out)
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(1), "T_hot < T_cold is bad input");
}

/// The cooler's maxima do not depend on the number of curve points: the
/// thermionic barrier demo between 300 K and 290 K with 5, 11 and 41 points
/// gives the same maximum cooling power, best COP and voltages of each to
/// 1e-6 relative. Both maxima are refined on one common energy grid down to
/// 1e-9 of the voltage range; on a flat maximum the voltage is then fixed to
/// about 1e-8 and the value to rounding, so 1e-6 leaves margin (the task's
/// stated requirement; before the refinement of the COP the best COP was
/// 0.82, 2.38 and 3.73 for these point counts).
#[test]
fn cooler_maxima_do_not_depend_on_the_number_of_points() {
    let case = barrier();
    let run = |points: usize| {
        cooler(
            &case,
            &CoolerSettings::new(300.0, 290.0, points)
                .with_cold_lead(Side::Right)
                .with_figure_of_merit(false),
            &mut Silent,
        )
        .unwrap()
    };
    let reference = run(41);
    assert!(reference.max_cop.is_finite() && reference.max_cop > 0.0);
    assert!(reference.max_cop < reference.carnot_cop);
    for points in [5, 11] {
        let r = run(points);
        for (name, a, b) in [
            (
                "max cooling power",
                r.max_cooling_power_w,
                reference.max_cooling_power_w,
            ),
            (
                "V at max cooling",
                r.voltage_at_max_v,
                reference.voltage_at_max_v,
            ),
            ("best COP", r.max_cop, reference.max_cop),
            (
                "V at best COP",
                r.voltage_at_max_cop_v,
                reference.voltage_at_max_cop_v,
            ),
        ] {
            assert!(
                rel(a, b) < 1e-6,
                "{name}: {a:e} with {points} points, {b:e} with 41"
            );
        }
        assert_eq!(r.energy_grid, reference.energy_grid);
    }
}

/// The generator's maxima likewise: the resonant level (coherent, so every
/// solve is deterministic) with 3, 7 and 25 load points gives the same
/// maximum power, maximum efficiency and their voltages to 1e-6 relative
/// (same reasoning as for the cooler).
#[test]
fn generator_maxima_do_not_depend_on_the_number_of_points() {
    let case = resonant_level(1e-2);
    let run = |points: usize| {
        let settings = GeneratorSettings::new(330.0, 300.0, points);
        generator(&case, &settings, &mut Silent).unwrap()
    };
    let reference = run(25);
    for points in [3, 7] {
        let r = run(points);
        for (name, a, b) in [
            ("max power", r.max_power_w, reference.max_power_w),
            (
                "V at max power",
                r.voltage_at_max_power_v,
                reference.voltage_at_max_power_v,
            ),
            ("max efficiency", r.max_efficiency, reference.max_efficiency),
            (
                "V at max efficiency",
                r.voltage_at_max_efficiency_v,
                reference.voltage_at_max_efficiency_v,
            ),
        ] {
            assert!(
                rel(a, b) < 1e-6,
                "{name}: {a:e} with {points} points, {b:e} with 25"
            );
        }
    }
}
