//! The same case gives the same numbers with 1 and 2 worker threads and on
//! repeated runs, and summary.json records what is needed to repeat a run:
//! program version, the case as read, the resolved grid and device, and the
//! thread count.
//!
//! Every energy is computed independently and the sums over energies run
//! in grid order whatever the thread count, so the results are expected to
//! be bitwise equal; the check allows 1e-13 relative so that a future
//! parallel reduction (whose order depends on the thread split) would still
//! pass, and prints whether the files were bitwise equal.

use std::path::Path;
use std::process::Command;

const CASE: &str = r#"name = "repeat"
[device]
kind = "chain"
spacing_nm = 0.5
length_nm = 15.0
effective_mass = 0.1
[[device.region]]
from_nm = 6.0
to_nm = 9.0
offset_ev = 0.08
[leads.left]
fermi_level_ev = 0.05
temperature_k = 310.0
[leads.right]
fermi_level_ev = 0.05
temperature_k = 300.0
[bias]
voltage_v = -0.04
[[phonon]]
energy_ev = 0.03
coupling_ev2 = 2e-3
[grid]
step_ev = 0.005
[solver]
tolerance = 1e-10
"#;

fn run(case: &Path, out: &Path, threads: &str) -> serde_json::Value {
    let o = Command::new(env!("CARGO_BIN_EXE_qheat"))
        .args([
            "solve",
            case.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
            "--quiet",
            "--threads",
            threads,
        ])
        .output()
        .unwrap();
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap()
}

fn close(a: f64, b: f64) -> bool {
    a == b || (a - b).abs() <= 1e-13 * a.abs().max(b.abs())
}

/// Every leaf equal, numbers to 1e-13 relative; `skip` keys are not compared.
fn compare(
    a: &serde_json::Value,
    b: &serde_json::Value,
    at: &str,
    skip: &[&str],
    bad: &mut Vec<String>,
) {
    use serde_json::Value::*;
    match (a, b) {
        (Object(x), Object(y)) => {
            let mut keys: Vec<&std::string::String> = x.keys().chain(y.keys()).collect();
            keys.sort();
            keys.dedup();
            for k in keys {
                if skip.contains(&k.as_str()) {
                    continue;
                }
                match (x.get(k), y.get(k)) {
                    (Some(u), Some(v)) => compare(u, v, &format!("{at}.{k}"), skip, bad),
                    _ => bad.push(format!("{at}.{k} in one summary only")),
                }
            }
        }
        (Array(x), Array(y)) if x.len() == y.len() => {
            for (i, (u, v)) in x.iter().zip(y).enumerate() {
                compare(u, v, &format!("{at}[{i}]"), skip, bad);
            }
        }
        (Number(x), Number(y)) => {
            let (u, v) = (x.as_f64().unwrap(), y.as_f64().unwrap());
            if !close(u, v) {
                bad.push(format!("{at}: {u:e} vs {v:e}"));
            }
        }
        _ if a == b => {}
        _ => bad.push(format!("{at}: {a} vs {b}")),
    }
}

fn compare_csv(a: &Path, b: &Path, bad: &mut Vec<String>) {
    let ta = std::fs::read_to_string(a).unwrap();
    let tb = std::fs::read_to_string(b).unwrap();
    let (la, lb): (Vec<&str>, Vec<&str>) = (ta.lines().collect(), tb.lines().collect());
    if la.len() != lb.len() || la.first() != lb.first() {
        bad.push(format!("{}: shape or header differs", a.display()));
        return;
    }
    for (row, (x, y)) in la.iter().zip(&lb).enumerate().skip(1) {
        for (u, v) in x.split(',').zip(y.split(',')) {
            let (u, v): (f64, f64) = (u.parse().unwrap(), v.parse().unwrap());
            // A value flagged NaN in both runs (a cell without a level) agrees.
            let both_nan = u.is_nan() && v.is_nan();
            if !(close(u, v) || both_nan) {
                bad.push(format!("{} row {row}: {u:e} vs {v:e}", a.display()));
            }
        }
    }
}

#[test]
fn one_and_two_threads_and_repeated_runs_agree() {
    let tmp = tempfile::tempdir().unwrap();
    let case = tmp.path().join("repeat.toml");
    std::fs::write(&case, CASE).unwrap();
    let dirs = [
        (tmp.path().join("t1"), "1"),
        (tmp.path().join("t2"), "2"),
        (tmp.path().join("t2-again"), "2"),
        (tmp.path().join("t1-again"), "1"),
    ];
    let summaries: Vec<_> = dirs.iter().map(|(d, t)| run(&case, d, t)).collect();

    // What a summary must record to repeat the run.
    for ((_, threads), s) in dirs.iter().zip(&summaries) {
        assert_eq!(s["program"]["name"], "qheat");
        assert_eq!(s["program"]["version"], env!("CARGO_PKG_VERSION"));
        assert_eq!(s["threads"].as_u64(), Some(threads.parse().unwrap()));
        assert_eq!(s["resolved_case"].as_str(), Some(CASE));
        assert_eq!(s["device"]["cells"], 30);
        assert!(s["grid"]["step_ev"].as_f64().is_some());
        assert!(s["grid"]["count"].as_u64().unwrap() > 10);
        assert_eq!(s["converged"], true);
        assert!(
            s["scba"]["iterations"].as_u64().unwrap() > 1,
            "a real Born loop"
        );
    }

    let mut bad = Vec::new();
    let mut bitwise = true;
    let reference = &dirs[0].0;
    for (i, (dir, _)) in dirs.iter().enumerate().skip(1) {
        compare(
            &summaries[0],
            &summaries[i],
            "summary",
            &["threads"],
            &mut bad,
        );
        for f in ["sites.csv", "spectrum.csv"] {
            compare_csv(&reference.join(f), &dir.join(f), &mut bad);
        }
        for f in ["sites.csv", "spectrum.csv", "bond_current.npy"] {
            bitwise &=
                std::fs::read(reference.join(f)).unwrap() == std::fs::read(dir.join(f)).unwrap();
        }
        let (a, b) = (&summaries[0]["results"], &summaries[i]["results"]);
        bitwise &= a == b && summaries[0]["ledger"] == summaries[i]["ledger"];
    }
    println!("bitwise identical across 1/2 threads and repeats: {bitwise}");
    assert!(bad.is_empty(), "{}", bad.join("\n"));
}
