//! Resumable sweeps through the real binary: an interrupted sweep (by the
//! abort hook, and by SIGKILL) started again with the same command
//! recomputes only the missing points and writes a sweep.csv byte-identical
//! to an uninterrupted run.

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::{Duration, Instant};

/// A small phonon case (warm starts and stored self-energies are exercised).
fn phonon_case(length_nm: f64) -> String {
    format!(
        r#"
name = "resume-phonon"
[device]
kind = "chain"
spacing_nm = 0.25
length_nm = {length_nm}
effective_mass = 0.1
[[device.region]]
from_nm = 1.0
to_nm = 2.0
offset_ev = 0.05
[leads.left]
fermi_level_ev = 0.05
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.05
temperature_k = 300.0
[[phonon]]
energy_ev = 0.04
coupling_ev2 = 2e-3
from_nm = 0.0
to_nm = {length_nm}
[grid]
step_ev = 0.004
[solver]
tolerance = 1e-9
"#
    )
}

fn write_case(dir: &Path, text: &str) -> PathBuf {
    let p = dir.join("case.toml");
    std::fs::write(&p, text).unwrap();
    p
}

fn qheat() -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_qheat"));
    c.env_remove("QHEAT_ABORT_AFTER_POINTS");
    c
}

fn sweep_args(case: &Path, out: &Path) -> Vec<String> {
    vec![
        "sweep".into(),
        case.display().to_string(),
        "--vary".into(),
        "leads.left.temperature_k=300:330:3".into(),
        "--vary".into(),
        "bias.voltage_v=-0.03:0.03:5".into(),
        "-o".into(),
        out.display().to_string(),
        "--quiet".into(),
        "--threads".into(),
        "2".into(),
    ]
}

fn stored_rows(out: &Path) -> usize {
    let Ok(dirs) = std::fs::read_dir(out.join("points")) else {
        return 0;
    };
    dirs.flatten()
        .filter_map(|d| std::fs::read_dir(d.path()).ok())
        .flat_map(|it| it.flatten())
        .filter(|f| f.path().extension().is_some_and(|e| e == "row"))
        .count()
}

#[test]
fn abort_hook_then_resume_gives_identical_bytes() {
    let tmp = tempfile::tempdir().unwrap();
    let case = write_case(tmp.path(), &phonon_case(4.0));
    let whole = tmp.path().join("whole");
    let st = qheat().args(sweep_args(&case, &whole)).status().unwrap();
    assert!(st.success(), "{st:?}");
    let reference = std::fs::read(whole.join("sweep.csv")).unwrap();
    assert_eq!(
        String::from_utf8_lossy(&reference).lines().count(),
        16,
        "header + 15 points"
    );

    let cut = tmp.path().join("cut");
    let st = qheat()
        .args(sweep_args(&case, &cut))
        .env("QHEAT_ABORT_AFTER_POINTS", "4")
        .status()
        .unwrap();
    assert_eq!(st.code(), Some(75), "the hook ends the process with 75");
    assert!(!cut.join("sweep.csv").exists());
    // Two lines run at once, so a few more points may have been stored by
    // the other worker before the exit; never all of them.
    let stored = stored_rows(&cut);
    assert!((4..15).contains(&stored), "{stored} points stored");

    // A second interruption on top of the first, then the finish.
    let st = qheat()
        .args(sweep_args(&case, &cut))
        .env("QHEAT_ABORT_AFTER_POINTS", "3")
        .status()
        .unwrap();
    assert_eq!(st.code(), Some(75));
    let out = qheat()
        .args(sweep_args(&case, &cut))
        .arg("--json")
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let summary: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let computed = summary["computed_this_run"].as_u64().unwrap();
    assert!(
        computed <= 15 - 7,
        "only the missing points are computed, {computed} were"
    );
    assert_eq!(std::fs::read(cut.join("sweep.csv")).unwrap(), reference);

    // A finished sweep started again computes nothing.
    let out = qheat()
        .args(sweep_args(&case, &cut))
        .arg("--json")
        .output()
        .unwrap();
    let summary: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(summary["computed_this_run"].as_u64(), Some(0));
    assert_eq!(std::fs::read(cut.join("sweep.csv")).unwrap(), reference);

    // A changed command (another range) does not reuse these points.
    let mut args = sweep_args(&case, &cut);
    args[5] = "bias.voltage_v=-0.03:0.03:3".into();
    let out = qheat().args(&args).arg("--json").output().unwrap();
    let summary: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(summary["computed_this_run"].as_u64(), Some(9));
}

#[test]
fn sigkill_then_resume_gives_identical_bytes() {
    let tmp = tempfile::tempdir().unwrap();
    // Longer device: each point takes long enough to be killed mid-sweep.
    let case = write_case(tmp.path(), &phonon_case(30.0));
    let whole = tmp.path().join("whole");
    let st = qheat().args(sweep_args(&case, &whole)).status().unwrap();
    assert!(st.success());
    let reference = std::fs::read(whole.join("sweep.csv")).unwrap();

    let cut = tmp.path().join("cut");
    let mut child = qheat().args(sweep_args(&case, &cut)).spawn().unwrap();
    let start = Instant::now();
    while stored_rows(&cut) < 3 {
        assert!(start.elapsed() < Duration::from_secs(120), "no progress");
        std::thread::sleep(Duration::from_millis(2));
    }
    child.kill().unwrap(); // SIGKILL on Unix
    child.wait().unwrap();
    let stored = stored_rows(&cut);
    assert!(
        !cut.join("sweep.csv").exists() && stored < 15,
        "the sweep finished before it could be killed ({stored} points): make the case heavier"
    );
    let st = qheat().args(sweep_args(&case, &cut)).status().unwrap();
    assert!(st.success());
    assert_eq!(std::fs::read(cut.join("sweep.csv")).unwrap(), reference);
}
