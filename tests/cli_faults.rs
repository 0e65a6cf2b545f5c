//! Numerical faults and interrupted runs.
//!
//! - A non-finite Green's function, a non-finite scattering self-energy, a
//!   runaway Born loop and a loop that does not settle are each reported
//!   with what happened and where (energy, cell), never silently and never
//!   by a panic; the binary exits with 2 and writes a summary.json that says
//!   `"trustworthy": false`.
//! - A solve killed at any moment leaves the old complete result folder or
//!   a complete new one, and the next run clears what the killed run left.

use qheat::case::Case;
use qheat::scattering::ScatteringSelfEnergy;
use qheat::scba::{Silent, SolveError, solve};
use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use std::time::Instant;

fn qheat(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_qheat"))
        .args(args)
        .env_remove("RUST_BACKTRACE")
        .output()
        .expect("run qheat")
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn assert_no_panic(o: &Output) {
    let e = stderr(o);
    for bad in ["panicked", "backtrace", "RUST_BACKTRACE"] {
        assert!(!e.contains(bad), "stderr shows `{bad}`:\n{e}");
    }
}

fn summary(dir: &Path) -> serde_json::Value {
    let text = std::fs::read_to_string(dir.join("summary.json")).expect("summary.json");
    serde_json::from_str(&text).expect("summary.json is JSON")
}

/// A chain case with one phonon mode; `extra` is appended verbatim.
fn chain_case(name: &str, length_nm: f64, coupling_ev2: f64, extra: &str) -> String {
    format!(
        r#"name = "{name}"
[device]
kind = "chain"
spacing_nm = 0.5
length_nm = {length_nm:.1}
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
[bias]
voltage_v = 0.02
[[phonon]]
energy_ev = 0.04
coupling_ev2 = {coupling_ev2:e}
[grid]
step_ev = 0.005
{extra}"#
    )
}

fn write(dir: &Path, file: &str, text: &str) -> PathBuf {
    let p = dir.join(file);
    std::fs::write(&p, text).unwrap();
    p
}

// ---------------------------------------------------------------- binary

/// Three cells with zero coupling between them and wide-band leads: the
/// middle cell is an isolated level at 0 eV, and 0 eV is a grid point, so
/// (E − H_11 − Σ) is exactly zero there and its inverse is not finite. The
/// case is valid input; the fault is numerical.
fn isolated_level_case(dir: &Path) -> PathBuf {
    write(
        dir,
        "onsite.csv",
        "cell,row,col,re_ev,im_ev\n0,0,0,0.0,0\n1,0,0,0.0,0\n2,0,0,0.0,0\n",
    );
    write(
        dir,
        "coupling.csv",
        "cell,row,col,re_ev,im_ev\n0,0,0,0.0,0\n1,0,0,0.0,0\n",
    );
    write(
        dir,
        "isolated.toml",
        r#"name = "isolated"
[device]
kind = "blocks"
spacing_nm = 0.5
onsite_file = "onsite.csv"
coupling_file = "coupling.csv"
[leads.left]
fermi_level_ev = 0.0
temperature_k = 300.0
wide_band_ev = 0.1
[leads.right]
fermi_level_ev = 0.0
temperature_k = 300.0
wide_band_ev = 0.1
[grid]
step_ev = 0.0025
min_ev = -0.1
max_ev = 0.1
"#,
    )
}

#[test]
fn a_non_finite_greens_function_exits_2_and_names_energy_and_cell() {
    let tmp = tempfile::tempdir().unwrap();
    let case = isolated_level_case(tmp.path());
    let out = tmp.path().join("out");
    // An old result in the folder must not survive as if it were this run's.
    let good = write(tmp.path(), "good.toml", &chain_case("good", 5.0, 0.0, ""));
    let o = qheat(&[
        "solve",
        good.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
        "--quiet",
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(out.join("sites.csv").exists());

    let o = qheat(&[
        "solve",
        case.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
        "--quiet",
    ]);
    assert_no_panic(&o);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    let e = stderr(&o);
    assert!(e.contains("non-finite Green's function"), "{e}");
    assert!(e.contains("E = 0 eV in cell 1"), "{e}");
    let s = summary(&out);
    assert_eq!(s["trustworthy"], false);
    assert_eq!(s["converged"], false);
    assert_eq!(s["case_name"], "isolated");
    assert_eq!(s["fault"]["kind"], "non-finite Green's function");
    assert_eq!(s["fault"]["energy_ev"], 0.0);
    assert_eq!(s["fault"]["cell"], 1);
    assert!(
        !out.join("sites.csv").exists(),
        "old result files left beside a failure summary"
    );
    // `check` warns about the zero couplings that isolate the level.
    let o = qheat(&["check", case.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(0));
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(text.contains("are not coupled"), "{text}");
}

#[test]
fn a_born_loop_that_does_not_settle_exits_2_and_is_flagged() {
    // Absurdly strong coupling (1000 eV², against a hopping of 1.5 eV) with
    // undamped linear mixing: the loop oscillates instead of settling.
    let tmp = tempfile::tempdir().unwrap();
    let case = write(
        tmp.path(),
        "strong.toml",
        &chain_case(
            "strong",
            5.0,
            1000.0,
            "[solver]\nmixing = \"linear\"\nmixing_factor = 1.0\nmax_iterations = 40\n",
        ),
    );
    let out = tmp.path().join("out");
    let o = qheat(&[
        "solve",
        case.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
        "--quiet",
    ]);
    assert_no_panic(&o);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("did not converge in 40 iterations"),
        "{}",
        stderr(&o)
    );
    let s = summary(&out);
    assert_eq!(s["trustworthy"], false);
    assert_eq!(s["converged"], false);
    let history = s["scba"]["history"].as_array().unwrap();
    assert_eq!(history.len(), 40);
    let last = history.last().unwrap()["residual"].as_f64().unwrap();
    assert!(last > 1e-7, "flagged although the residual is {last}");
}

// --------------------------------------------------------------- library

/// The error of a solve; a short message (not the whole solution) if it
/// succeeded.
fn expect_err(r: Result<qheat::scba::Solution, SolveError>) -> SolveError {
    match r {
        Ok(sol) => panic!(
            "solved without an error: converged {} after {} iterations, residuals {:?}",
            sol.report.converged,
            sol.report.iterations,
            sol.report
                .history
                .iter()
                .map(|h| h.residual)
                .collect::<Vec<_>>()
        ),
        Err(e) => e,
    }
}

fn resolved(text: &str) -> qheat::case::Resolved {
    Case::parse(text, "mem.toml", Path::new("."))
        .unwrap()
        .resolve()
        .unwrap()
}

#[test]
fn a_non_finite_coupling_is_caught_in_the_rebuilt_self_energy() {
    // Validation refuses NaN in a file; a problem built in code is not
    // validated, so the loop must catch it itself, at the first energy and
    // the first cell where it shows.
    let mut r = resolved(&chain_case("nan", 5.0, 1e-3, ""));
    r.problem.scattering.phonons[0].coupling_ev2[6] = f64::NAN;
    let err = expect_err(solve(&r.problem, &r.scba, None, &mut Silent));
    match &err {
        SolveError::SelfEnergyNotFinite {
            iteration,
            energy_ev,
            cell,
            ..
        } => {
            assert_eq!(*iteration, 1);
            assert_eq!(*cell, 6);
            assert_eq!(*energy_ev, r.problem.grid.energy(0));
        }
        other => panic!("wrong error: {other}"),
    }
    assert_eq!(err.location(), Some((r.problem.grid.energy(0), Some(6))));
    assert!(err.to_string().contains("in cell 6"), "{err}");
}

#[test]
fn a_runaway_self_energy_is_reported_as_diverged() {
    // Σ0 of 1e200 eV on every site (what an overshooting update could
    // give): G underflows to exactly zero, and so does the rebuilt Σ0; this
    // once passed for converged with zero current.
    let r = resolved(&chain_case("runaway", 5.0, 1e-3, ""));
    let ne = r.problem.grid.count;
    let ns = r.problem.sites();
    let mut warm = ScatteringSelfEnergy::zeros(ne, ns);
    for z in &mut warm.retarded {
        z.im = -1e200;
    }
    let err = expect_err(solve(&r.problem, &r.scba, Some(&warm), &mut Silent));
    match err {
        SolveError::Diverged {
            iteration,
            residual,
            ..
        } => {
            assert_eq!(iteration, 1);
            assert!(!residual.is_finite());
        }
        other => panic!("wrong error: {other}"),
    }
}

#[test]
fn huge_onsite_energies_give_a_typed_error_or_finite_results() {
    // 1e308 eV on one cell: the arithmetic sits at the edge of overflow.
    // Whatever happens, it is a typed error naming an energy on the grid
    // and a cell of the device, or a result whose numbers are all finite.
    for value in [1e308, -1e308, f64::MAX, f64::INFINITY] {
        for coupling in [0.0, 1e-3] {
            let mut r = resolved(&chain_case("huge", 5.0, coupling, ""));
            let cells = r.problem.device.cells();
            r.problem.device.onsite[4][(0, 0)].re = value;
            let outcome = solve(&r.problem, &r.scba, None, &mut Silent);
            println!(
                "on-site {value:e} eV, coupling {coupling} eV²: {}",
                match &outcome {
                    Ok(s) => format!("solved, converged {}", s.report.converged),
                    Err(e) => e.to_string(),
                }
            );
            match outcome {
                Ok(sol) => {
                    let o = qheat::observables::observe(&sol);
                    for (name, v) in [
                        ("current", o.current_a),
                        ("heat left", o.heat_current_left_w),
                        ("heat right", o.heat_current_right_w),
                        ("lattice power", o.lattice_power_w),
                    ] {
                        assert!(v.is_finite(), "{value:e}: {name} = {v} without an error");
                    }
                }
                Err(e) => {
                    let (energy, cell) = e
                        .location()
                        .unwrap_or_else(|| panic!("{value:e}: no place in {e}"));
                    let g = &r.problem.grid;
                    assert!((0..g.count).any(|k| g.energy(k) == energy), "{e}");
                    if let Some(c) = cell {
                        assert!(c < cells, "{e}");
                    }
                }
            }
        }
    }
}

#[test]
fn a_non_finite_lead_self_energy_is_reported_at_its_energy() {
    let mut r = resolved(&chain_case("lead", 5.0, 1e-3, ""));
    if let qheat::leads::Lead::Periodic { hopping, .. } = &mut r.problem.right.lead {
        hopping[(0, 0)].re = f64::NAN;
    } else {
        panic!("chain leads are periodic");
    }
    let err = expect_err(solve(&r.problem, &r.scba, None, &mut Silent));
    let (energy, _) = err.location().expect("a place");
    assert_eq!(energy, r.problem.grid.energy(0), "{err}");
    assert!(
        matches!(
            err,
            SolveError::Lead(_) | SolveError::Rgf(qheat::rgf::RgfError::NotFinite { .. })
        ),
        "{err}"
    );
}

// ------------------------------------------------------- interrupted runs

/// Files every complete solve result holds.
const RESULT_FILES: &[&str] = &[
    "summary.json",
    "sites.csv",
    "spectrum.csv",
    "bond_current.npy",
];

fn assert_complete(dir: &Path, allowed_names: &[&str]) {
    for f in RESULT_FILES {
        assert!(dir.join(f).exists(), "{} lacks {f}", dir.display());
    }
    let s = summary(dir);
    let name = s["case_name"].as_str().unwrap();
    assert!(allowed_names.contains(&name), "unexpected result {name}");
    // sites.csv is whole: as many rows as cells, plus the header.
    let cells = s["device"]["cells"].as_u64().unwrap() as usize;
    let rows = std::fs::read_to_string(dir.join("sites.csv"))
        .unwrap()
        .lines()
        .count();
    assert_eq!(rows, cells + 1, "sites.csv of {name}");
}

/// A folder left by a run killed inside its commit: every entry in it
/// (hidden staging folders of dead runs aside) is listed in its manifest.
fn assert_all_listed(dir: &Path) {
    let manifest: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.join(".qheat-manifest.json"))
            .unwrap_or_else(|e| panic!("{} has no manifest: {e}", dir.display())),
    )
    .unwrap();
    let listed: Vec<&str> = manifest["entries"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_str().unwrap())
        .collect();
    for name in visible_entries(dir) {
        assert!(
            listed.contains(&name.as_str()),
            "{name} in {} is not in its manifest {listed:?}",
            dir.display()
        );
    }
}

fn visible_entries(parent: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(parent)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| !n.starts_with('.'))
        .collect();
    v.sort();
    v
}

#[test]
fn a_killed_solve_leaves_a_whole_result_or_one_the_next_run_replaces() {
    let tmp = tempfile::tempdir().unwrap();
    let runs = tmp.path().join("runs");
    let out = runs.join("result");
    let old = write(tmp.path(), "old.toml", &chain_case("old", 5.0, 1e-3, ""));
    // A longer device with a tight tolerance: long enough to be killed in
    // the Born loop, in the writing, or not at all.
    let slow = write(
        tmp.path(),
        "slow.toml",
        &chain_case(
            "slow",
            100.0,
            2e-3,
            "[solver]\ntolerance = 1e-12\nmixing = \"linear\"\nmax_iterations = 400\n",
        ),
    );
    let run = |case: &Path| {
        let mut c = Command::new(env!("CARGO_BIN_EXE_qheat"));
        c.args([
            "solve",
            case.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
            "--quiet",
            "--threads",
            "1",
        ])
        .stderr(std::process::Stdio::null())
        .stdout(std::process::Stdio::null());
        c
    };
    let status = run(&old).status().unwrap();
    assert!(status.success() || status.code() == Some(2));
    assert_complete(&out, &["old"]);

    // How long a whole run takes here (debug or release build).
    let t0 = Instant::now();
    let status = run(&slow).status().unwrap();
    let full = t0.elapsed();
    assert!(status.code().is_some());
    assert_complete(&out, &["slow"]);
    let status = run(&old).status().unwrap();
    assert!(status.code().is_some());
    assert_complete(&out, &["old"]);

    let mut killed = 0;
    let mut interrupted_commits = 0;
    for fraction in [0.1, 0.3, 0.5, 0.7, 0.85, 0.95, 0.99, 1.02] {
        let mut child = run(&slow).spawn().unwrap();
        std::thread::sleep(full.mul_f64(fraction));
        if child.try_wait().unwrap().is_none() {
            child.kill().unwrap(); // SIGKILL: no cleanup code runs
            killed += 1;
        }
        child.wait().unwrap();
        // The folder is the old result, the complete new one, or (killed
        // inside the commit, a window of a few renames) a folder without
        // `summary.json` whose every entry is listed in its manifest: no
        // reader takes it for a result and the next run replaces it
        // without asking; check that below.
        let visible = visible_entries(&runs);
        assert_eq!(visible, vec!["result".to_string()], "after {fraction}");
        if out.join("summary.json").exists() {
            assert_complete(&out, &["old", "slow"]);
        } else {
            assert_all_listed(&out);
            interrupted_commits += 1;
        }
        // The next run clears what the killed one left and writes anew.
        let status = run(&old).status().unwrap();
        assert!(status.code().is_some());
        assert_complete(&out, &["old"]);
        let hidden: Vec<String> = std::fs::read_dir(&runs)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .filter(|n| n.starts_with('.'))
            .collect();
        assert!(hidden.is_empty(), "left behind: {hidden:?}");
    }
    println!(
        "a whole run took {full:?}; {killed} of 8 runs were killed, \
         {interrupted_commits} inside the commit"
    );
    assert!(
        killed >= 3,
        "only {killed} runs were killed (a run takes {full:?})"
    );
}

#[test]
fn staging_clears_folders_of_dead_runs_and_restores_a_stranded_result() {
    let tmp = tempfile::tempdir().unwrap();
    let final_dir = tmp.path().join("result");
    // A process id that is certainly not running: a child that has exited.
    let mut child = Command::new(env!("CARGO_BIN_EXE_qheat"))
        .arg("--version")
        .stdout(std::process::Stdio::null())
        .spawn()
        .unwrap();
    let dead = child.id();
    child.wait().unwrap();
    let dead_partial = tmp.path().join(format!(".result.partial-{dead}"));
    let dead_old = tmp.path().join(format!(".result.old-{dead}"));
    // pid 1 is always running: its folder belongs to a live run.
    let live_partial = tmp.path().join(".result.partial-1");
    let other = tmp.path().join(".other.partial-7");
    for d in [&dead_partial, &dead_old, &live_partial, &other] {
        std::fs::create_dir_all(d).unwrap();
    }
    std::fs::write(dead_old.join("summary.json"), "{}").unwrap();
    std::fs::write(dead_partial.join("summary.json"), "{").unwrap();

    let stage = qheat::output::Staging::new(&final_dir).unwrap();
    assert!(!dead_partial.exists(), "dead run's staging folder kept");
    assert!(!dead_old.exists(), "stranded result not moved back");
    assert!(
        final_dir.join("summary.json").exists(),
        "stranded result lost"
    );
    assert!(live_partial.exists(), "a live run's folder was removed");
    assert!(other.exists(), "another result's folder was touched");
    stage.write("summary.json", b"{\"new\": 1}").unwrap();
    stage.commit().unwrap();
    assert_eq!(
        std::fs::read_to_string(final_dir.join("summary.json")).unwrap(),
        "{\"new\": 1}"
    );
}
