//! `qheat solve` on a case whose lattice is damped runs the joint
//! electron–lattice loop through the real binary: sites.csv carries the
//! lattice temperature, summary.json the hottest point, the heat out of the
//! phonon leads and the lattice-heat ledger, and an undamped case keeps
//! the bath temperature.

use std::path::{Path, PathBuf};
use std::process::Command;

/// 12 cells of 0.5 nm, m* = 0.07, a 0.1 eV barrier on cells 5..7, one
/// 40 meV mode everywhere; a light, soft lattice (12 u, 2 N/m) so that a
/// 60 mV bias warms it by tens of kelvins. `extra` goes into [lattice].
fn case(dir: &Path, lattice_extra: &str, voltage_v: f64) -> PathBuf {
    let text = format!(
        r#"name = "selfheat"
[device]
kind = "chain"
spacing_nm = 0.5
length_nm = 6.0
effective_mass = 0.07
[[device.region]]
from_nm = 2.5
to_nm = 4.0
offset_ev = 0.1
[leads.left]
fermi_level_ev = 0.06
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.06
temperature_k = 300.0
[bias]
voltage_v = {voltage_v}
[[phonon]]
energy_ev = 0.04
coupling_ev2 = 2e-3
[grid]
step_ev = 0.005
[solver]
tolerance = 1e-11
[lattice]
mass_u = 12.0
spring_n_per_m = 2.0
{lattice_extra}
"#
    );
    let p = dir.join("case.toml");
    std::fs::write(&p, text).unwrap();
    p
}

/// Runs `qheat solve`; returns the exit code, stdout, summary.json and the
/// sites.csv column `lattice_temperature_k`.
fn solve(dir: &Path, case: &Path) -> (i32, String, serde_json::Value, Vec<f64>) {
    let out = dir.join("out");
    let o = Command::new(env!("CARGO_BIN_EXE_qheat"))
        .args(["solve", case.to_str().unwrap(), "-o", out.to_str().unwrap()])
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&o.stdout).into_owned();
    let summary = serde_json::from_str(
        &std::fs::read_to_string(out.join("summary.json"))
            .unwrap_or_else(|e| panic!("{e}: {}", String::from_utf8_lossy(&o.stderr))),
    )
    .unwrap();
    let sites = std::fs::read_to_string(out.join("sites.csv")).unwrap();
    let mut lines = sites.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = header
        .iter()
        .position(|&h| h == "lattice_temperature_k")
        .expect("sites.csv has a lattice_temperature_k column");
    let t = lines
        .map(|l| l.split(',').nth(col).unwrap().parse().unwrap())
        .collect();
    (o.status.code().unwrap(), stdout, summary, t)
}

/// Under bias the damped lattice warms above the contacts (300 K), the
/// hottest cell of sites.csv is the one summary.json names, and the
/// lattice-heat ledger closes to 1e-8: the probes net zero to their Newton
/// tolerance (1e-10) and the Born loop converges to 1e-11, so what is left
/// is the loop's temperature tolerance (1e-6 K) times ∂P/∂T, far below.
#[test]
fn a_damped_lattice_heats_up_and_its_heat_leaves_through_the_phonon_leads() {
    let dir = tempfile::tempdir().unwrap();
    let case_path = case(dir.path(), "damping_per_ps = 4.0", 0.06);
    let (code, stdout, s, t) = solve(dir.path(), &case_path);
    assert_eq!(code, 0, "{stdout}");
    let h = &s["self_heating"];
    assert_eq!(h["converged"], true, "{h}");
    let hottest = h["hottest_lattice_k"].as_f64().unwrap();
    assert!(hottest > 301.0, "hottest lattice {hottest} K");
    let max = t.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    assert_eq!(max, hottest);
    let cell = t.iter().position(|&x| x == max).unwrap();
    assert_eq!(h["hottest_x_nm"].as_f64().unwrap(), 0.5 * cell as f64);
    assert!(t.iter().all(|&x| x > 300.0), "{t:?}");
    let ledger = h["ledger_relative"].as_f64().unwrap();
    assert!(ledger <= 1e-8, "lattice-heat ledger {ledger:e}");
    for side in ["left", "right"] {
        let w = h[format!("{side}_phonon_lead_heat_w")].as_f64().unwrap();
        assert!(w > 0.0, "{side} phonon lead takes {w:e} W");
    }
    assert!(h["outer_iterations"].as_u64().unwrap() >= 2);
    // The κph the summary reports is the one ZT uses: with damping, the
    // floating-probe conductance at the mean lead temperature (300 K).
    let resolved = qheat::case::Case::load(&case_path)
        .unwrap()
        .resolve()
        .unwrap();
    let kappa = resolved.phonon_conductance_at(300.0).unwrap();
    // (1e-14 relative: serde_json's default float parsing may miss the
    // last bit; a two-terminal κph instead is about 24 times smaller here.)
    let reported = s["lattice"]["phonon_conductance_w_per_k"].as_f64().unwrap();
    assert!(
        (reported - kappa).abs() <= 1e-14 * kappa,
        "summary κph {reported:e}, ZT uses {kappa:e}"
    );
    assert!(stdout.contains("self-heating      converged"), "{stdout}");
    assert!(stdout.contains("hottest lattice"), "{stdout}");
}

/// Without bias nothing heats the damped lattice: every cell stays at the
/// contact temperature (to 1e-6 K, the loop's tolerance).
#[test]
fn an_unbiased_damped_lattice_stays_at_the_contact_temperature() {
    let dir = tempfile::tempdir().unwrap();
    let (code, _, s, t) = solve(dir.path(), &case(dir.path(), "damping_per_ps = 4.0", 0.0));
    assert_eq!(code, 0);
    assert!(s["self_heating"].is_object());
    for x in t {
        assert!((x - 300.0).abs() <= 1e-6, "{x}");
    }
}

/// An undamped lattice is not heated: the plain Born solve runs, sites.csv
/// holds the bath temperature, and summary.json has no self_heating.
#[test]
fn an_undamped_lattice_keeps_the_bath_temperature() {
    let dir = tempfile::tempdir().unwrap();
    let (code, _, s, t) = solve(dir.path(), &case(dir.path(), "", 0.06));
    assert_eq!(code, 0);
    assert!(s.get("self_heating").is_none(), "{s}");
    assert!(t.iter().all(|&x| x == 300.0), "{t:?}");
}

/// The hot-spot demo says the hottest lattice point, the largest power
/// deposition and the largest Fermi-level drop sit in three places (more
/// than a nanometre apart, two cells or more); this holds it to that.
#[test]
fn the_hot_spot_demo_puts_heat_power_and_drop_in_three_places() {
    let dir = tempfile::tempdir().unwrap();
    let case = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo/hot-spot-apart.toml");
    let (code, _, s, _) = solve(dir.path(), &case);
    assert_eq!(code, 0);
    let x = |v: &serde_json::Value| v.as_f64().unwrap();
    let hot = x(&s["self_heating"]["hottest_x_nm"]);
    let power = x(&s["results"]["hottest_cell_w"]["x_nm"]);
    let drop = x(&s["results"]["largest_drop_v"]["x_nm"]);
    for (a, b) in [(hot, power), (hot, drop), (power, drop)] {
        assert!(
            (a - b).abs() >= 1.0,
            "hot {hot} power {power} drop {drop} nm"
        );
    }
    // The device figure shows T_L(x) below the lattice power, its legend
    // naming the hottest temperature of summary.json (to 0.1 K as shown).
    let svg = std::fs::read_to_string(dir.path().join("out/device.svg")).unwrap();
    assert!(svg.contains("lattice temperature (K)"), "no T_L panel");
    let hottest = s["self_heating"]["hottest_lattice_k"].as_f64().unwrap();
    assert!(
        svg.contains(&format!("hottest {:.1} K", hottest)),
        "legend lacks the hottest temperature {hottest}"
    );
}

/// Without self-heating the device figure keeps its three panels.
#[test]
fn without_damping_the_device_figure_has_no_temperature_panel() {
    let dir = tempfile::tempdir().unwrap();
    let (code, _, _, _) = solve(dir.path(), &case(dir.path(), "", 0.06));
    assert_eq!(code, 0);
    let svg = std::fs::read_to_string(dir.path().join("out/device.svg")).unwrap();
    assert!(svg.contains("lattice power per cell"));
    assert!(!svg.contains("lattice temperature (K)"));
}

/// The joint loop's settings come from the case: with one outer iteration
/// allowed, a heated lattice cannot converge, so `solve` exits 2, still
/// writes its results, and summary.json flags the loop (and the run) as
/// not converged with the case's tolerance; `check` shows the settings.
#[test]
fn the_joint_loop_settings_come_from_the_case() {
    let dir = tempfile::tempdir().unwrap();
    let extra = "damping_per_ps = 4.0\nself_heating_max_iterations = 1\n\
                 self_heating_tolerance_k = 1e-4\nself_heating_mixing = 0.7\nself_heating_history = 2";
    let case_path = case(dir.path(), extra, 0.06);
    let (code, stdout, s, t) = solve(dir.path(), &case_path);
    assert_eq!(code, 2, "{stdout}");
    let h = &s["self_heating"];
    assert_eq!(h["converged"], false, "{h}");
    assert_eq!(h["outer_iterations"].as_u64(), Some(1), "{h}");
    assert_eq!(h["tolerance_k"].as_f64(), Some(1e-4), "{h}");
    assert_eq!(s["converged"], false);
    // the one Born solve ran at the starting profile (the bath
    // temperature) and the lattice's answer moved well beyond the tolerance
    assert_eq!(t.len(), 12, "sites.csv written: {t:?}");
    let change = h["last_change_k"].as_f64().unwrap();
    assert!(change > 1e-4, "last change {change} K");
    let o = Command::new(env!("CARGO_BIN_EXE_qheat"))
        .args(["check", case_path.to_str().unwrap()])
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(o.status.success(), "{text}");
    assert!(
        text.contains(
            "joint loop: tolerance 0.0001 K, at most 1 outer iteration(s), mixing 0.7, history 2"
        ),
        "{text}"
    );
}

/// A self-heating solve stores its lattice temperatures beside the
/// self-energy; re-solving the case warm-started from its own result
/// starts the joint loop there, so it converges in at most 2 outer
/// iterations (it took several from the bath) to the same lattice
/// temperatures within the loop's tolerance (1e-6 K, the default). A case
/// of another site count is refused, naming the folder.
#[test]
fn a_warm_start_resumes_the_lattice_temperatures() {
    let dir = tempfile::tempdir().unwrap();
    let case_path = case(dir.path(), "damping_per_ps = 4.0", 0.06);
    let (code, _, first, t0) = solve(dir.path(), &case_path);
    assert_eq!(code, 0);
    let cold_iterations = first["self_heating"]["outer_iterations"].as_u64().unwrap();
    assert!(cold_iterations > 2, "from the bath: {cold_iterations}");
    let stored = dir.path().join("out");
    let a: ndarray::Array1<f64> =
        ndarray_npy::read_npy(stored.join("lattice_temperature.npy")).unwrap();
    assert_eq!(a.to_vec(), t0, "the stored profile is the one of sites.csv");
    let run = |case: &Path, out: &str| {
        Command::new(env!("CARGO_BIN_EXE_qheat"))
            .args(["solve", case.to_str().unwrap(), "-o"])
            .arg(dir.path().join(out))
            .arg("--warm-start")
            .arg(&stored)
            .output()
            .unwrap()
    };
    let o = run(&case_path, "again");
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let again: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("again/summary.json")).unwrap(),
    )
    .unwrap();
    let h = &again["self_heating"];
    assert!(h["outer_iterations"].as_u64().unwrap() <= 2, "{h}");
    assert_eq!(h["converged"], true);
    let t1: ndarray::Array1<f64> =
        ndarray_npy::read_npy(dir.path().join("again/lattice_temperature.npy")).unwrap();
    for (a, b) in t0.iter().zip(t1.iter()) {
        assert!((a - b).abs() <= 1e-6, "{a} K then {b} K");
    }
    // Another device (a longer chain): refused before any work.
    let longer = std::fs::read_to_string(&case_path)
        .unwrap()
        .replace("length_nm = 6.0", "length_nm = 6.5");
    let other = dir.path().join("longer.toml");
    std::fs::write(&other, longer).unwrap();
    let o = run(&other, "other");
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(
        err.contains("expected 13 lattice temperatures") && err.contains("found 12"),
        "{err}"
    );
    assert!(err.contains(&stored.display().to_string()), "{err}");
}
