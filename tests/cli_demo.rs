//! The real binary on every demo case: it must succeed and its ledger must
//! close (a residual above 1e-6 relative is a bug, never round-off; the
//! demos converge to 1e-10, so the ledger is held to 1e-10 here).

use std::path::Path;
use std::process::Command;

fn qheat() -> Command {
    Command::new(env!("CARGO_BIN_EXE_qheat"))
}

fn demos() -> Vec<std::path::PathBuf> {
    let mut v: Vec<_> = std::fs::read_dir("cases-demo")
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "toml"))
        .collect();
    v.sort();
    assert!(v.len() >= 5, "demo cases missing");
    v
}

#[test]
fn every_demo_solves_and_its_ledger_closes() {
    let tmp = tempfile::tempdir().unwrap();
    for case in demos() {
        let out = tmp.path().join(case.file_stem().unwrap());
        let run = qheat()
            .args(["solve", case.to_str().unwrap(), "-o"])
            .arg(&out)
            .arg("--quiet")
            .output()
            .unwrap();
        assert!(
            run.status.success(),
            "{}: {}",
            case.display(),
            String::from_utf8_lossy(&run.stderr)
        );
        let summary: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap())
                .unwrap();
        assert_eq!(summary["converged"], true);
        for key in ["charge_relative", "energy_relative", "heat_relative"] {
            let r = summary["ledger"][key].as_f64().unwrap();
            assert!(r <= 1e-10, "{}: ledger {key} = {r}", case.display());
        }
        for f in [
            "sites.csv",
            "spectrum.csv",
            "bond_current.npy",
            "convergence.csv",
        ] {
            assert!(out.join(f).is_file(), "{} missing {f}", case.display());
        }
        assert!(summary["program"]["version"].is_string());
        assert!(summary["resolved_case"].as_str().unwrap().contains("name"));
        assert!(summary["threads"].as_u64().unwrap() >= 1);
    }
}

#[test]
fn check_prints_the_resolved_case() {
    let run = qheat()
        .args(["check", "cases-demo/peltier-barrier.toml"])
        .output()
        .unwrap();
    assert!(run.status.success());
    let text = String::from_utf8_lossy(&run.stdout);
    assert!(text.contains("cells"), "{text}");
    assert!(text.contains("meV"), "snapped phonon energy in meV: {text}");
}

#[test]
fn json_summary_is_pure_json_on_stdout() {
    let tmp = tempfile::tempdir().unwrap();
    let run = qheat()
        .args([
            "solve",
            "cases-demo/thermionic-barrier.toml",
            "--json",
            "-o",
        ])
        .arg(tmp.path().join("r"))
        .output()
        .unwrap();
    assert!(run.status.success());
    let v: serde_json::Value =
        serde_json::from_slice(&run.stdout).expect("stdout is one JSON document");
    assert!(v["results"]["current_a"].as_f64().unwrap() > 0.0);
}

#[test]
fn coefficients_of_a_coherent_and_an_inelastic_demo() {
    let tmp = tempfile::tempdir().unwrap();
    for (case, method) in [
        ("cases-demo/thermionic-barrier.toml", "transmission moments"),
        (
            "cases-demo/peltier-barrier.toml",
            "finite differences, symmetric split",
        ),
    ] {
        let out = tmp.path().join(Path::new(case).file_stem().unwrap());
        let run = qheat()
            .args(["coefficients", case, "--quiet", "-o"])
            .arg(&out)
            .output()
            .unwrap();
        assert!(
            run.status.success(),
            "{}",
            String::from_utf8_lossy(&run.stderr)
        );
        let v: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap())
                .unwrap();
        let c = &v["coefficients"];
        assert_eq!(c["method"], method);
        // A barrier above µ: electron-like transport, S < 0; Kelvin relation.
        assert!(c["seebeck_v_per_k"].as_f64().unwrap() < 0.0);
        assert!(c["conductance_s"].as_f64().unwrap() > 0.0);
        assert!(c["kelvin_residual"].as_f64().unwrap() < 1e-4);
    }
}

/// A Born loop cut short is a flagged result with exit code 2, never a
/// silent answer; a warm start from a stored result converges at once.
#[test]
fn non_convergence_is_flagged_and_warm_start_works() {
    let tmp = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string("cases-demo/peltier-barrier.toml").unwrap();
    let short = text.replace("[solver]", "[solver]\nmax_iterations = 2");
    let case = tmp.path().join("short.toml");
    std::fs::write(&case, short).unwrap();
    let out = tmp.path().join("short");
    let run = qheat()
        .args(["solve", case.to_str().unwrap(), "-o"])
        .arg(&out)
        .output()
        .unwrap();
    assert_eq!(run.status.code(), Some(2));
    let stdout = String::from_utf8_lossy(&run.stdout);
    assert!(stdout.contains("NOT CONVERGED"), "{stdout}");
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    assert_eq!(v["converged"], false);
    assert_eq!(v["trustworthy"], false);

    let full = tmp.path().join("full");
    let run = qheat()
        .args(["solve", "cases-demo/peltier-barrier.toml", "--quiet", "-o"])
        .arg(&full)
        .output()
        .unwrap();
    assert!(run.status.success());
    let warm = tmp.path().join("warm");
    let run = qheat()
        .args([
            "solve",
            "cases-demo/peltier-barrier.toml",
            "--quiet",
            "--warm-start",
        ])
        .arg(&full)
        .arg("-o")
        .arg(&warm)
        .output()
        .unwrap();
    assert!(
        run.status.success(),
        "{}",
        String::from_utf8_lossy(&run.stderr)
    );
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(warm.join("summary.json")).unwrap()).unwrap();
    assert!(v["scba"]["iterations"].as_u64().unwrap() <= 2);
    assert_eq!(v["scba"]["warm_start"], true);
}

/// The printed summary says where the applied voltage drops: the contacts
/// and the device interior add up to |V| (identity of the local Fermi level).
#[test]
fn summary_splits_the_voltage_between_contacts_and_device() {
    let tmp = tempfile::tempdir().unwrap();
    let run = qheat()
        .args(["solve", "cases-demo/peltier-barrier.toml", "-o"])
        .arg(tmp.path().join("p"))
        .output()
        .unwrap();
    assert!(run.status.success());
    let text = String::from_utf8_lossy(&run.stdout);
    let line = text
        .lines()
        .find(|l| l.starts_with("Fermi-level drop"))
        .expect("drop line");
    let mv: Vec<f64> = line
        .split(',')
        .map(|part| {
            let w: Vec<&str> = part.split_whitespace().collect();
            let (v, unit) = (w[w.len() - 2].parse::<f64>().unwrap(), w[w.len() - 1]);
            assert_eq!(unit, "mV", "{line}");
            v
        })
        .collect();
    let total: f64 = mv.iter().sum();
    assert!(
        (total - 80.0).abs() < 0.3,
        "{line}: sums to {total} mV, the demo applies 80 mV"
    );
}
