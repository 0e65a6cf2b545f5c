//! The library's command-level runs (`qheat::session`) give the same
//! result folder as the command line, byte for byte, and their in-memory
//! tables hold exactly the numbers of the CSV files; an observer can stop
//! a solve between Born iterations, a coefficient run at its next Born
//! iteration and a curve after its solve in progress, and nothing is
//! returned.

use qheat::leads::Side;
use qheat::output::OtherFiles;
use qheat::progress::{IterationRecord, Observer, Silent};
use qheat::session::{self, Loaded, SessionError, SolveOptions, WriteOptions};
use std::collections::BTreeMap;
use std::path::Path;
use std::process::Command;

/// A small barrier with one phonon mode: every file of a solve with
/// scattering (self-energy, convergence record with several iterations).
const PHONON_CASE: &str = r#"name = "session-phonon"
[device]
kind = "chain"
spacing_nm = 0.5
length_nm = 10.0
effective_mass = 0.1
[[device.region]]
from_nm = 4.0
to_nm = 6.0
offset_ev = 0.08
[leads.left]
fermi_level_ev = 0.05
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.05
temperature_k = 300.0
[bias]
voltage_v = 0.02
[[phonon]]
energy_ev = 0.03
coupling_ev2 = 2e-3
[grid]
step_ev = 0.005
"#;

fn cli_solve(case: &Path, out: &Path) {
    cli(&["solve"], case, &[], out);
}

/// `qheat COMMAND CASE EXTRA -o OUT --quiet --threads 1`, which must succeed.
fn cli(command: &[&str], case: &Path, extra: &[&str], out: &Path) {
    let o = Command::new(env!("CARGO_BIN_EXE_qheat"))
        .args(command)
        .args([case.to_str().unwrap()])
        .args(extra)
        .args(["-o", out.to_str().unwrap()])
        .args(["--quiet", "--threads", "1"])
        .output()
        .unwrap();
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
}

/// Every file of a folder (hidden ones included) by name.
fn files(dir: &Path) -> BTreeMap<String, Vec<u8>> {
    std::fs::read_dir(dir)
        .unwrap()
        .map(|e| {
            let e = e.unwrap();
            assert!(
                e.path().is_file(),
                "unexpected folder {}",
                e.path().display()
            );
            (
                e.file_name().to_string_lossy().into_owned(),
                std::fs::read(e.path()).unwrap(),
            )
        })
        .collect()
}

/// The numeric columns of a CSV file as written.
fn csv_columns(bytes: &[u8]) -> Vec<(String, Vec<f64>)> {
    let mut r = csv::Reader::from_reader(bytes);
    let names: Vec<String> = r.headers().unwrap().iter().map(String::from).collect();
    let mut cols: Vec<Vec<f64>> = vec![Vec::new(); names.len()];
    for row in r.records() {
        for (c, v) in cols.iter_mut().zip(row.unwrap().iter()) {
            c.push(match v {
                "true" => 1.0,
                "false" => 0.0,
                v => v.parse().unwrap(),
            });
        }
    }
    names.into_iter().zip(cols).collect()
}

/// Equal numbers (the files write −0 as 0, and NaN where a value is
/// undetermined, in both).
fn same_numbers(a: &[(String, Vec<f64>)], b: &[(&str, Vec<f64>)], file: &str) {
    let names = |v: Vec<&str>| v.join(",");
    assert_eq!(
        names(a.iter().map(|c| c.0.as_str()).collect()),
        names(b.iter().map(|c| c.0).collect()),
        "{file}: columns"
    );
    for ((name, x), (_, y)) in a.iter().zip(b) {
        let same = x.len() == y.len()
            && x.iter()
                .zip(y)
                .all(|(p, q)| p == q || (p.is_nan() && q.is_nan()));
        assert!(same, "{file}: column {name} differs: {x:?} against {y:?}");
    }
}

/// The two folders hold the same files with the same bytes.
fn same_folders(cli: &Path, lib: &Path) -> BTreeMap<String, Vec<u8>> {
    let (a, b) = (files(cli), files(lib));
    assert_eq!(
        a.keys().collect::<Vec<_>>(),
        b.keys().collect::<Vec<_>>(),
        "the same files"
    );
    for (name, bytes) in &a {
        assert!(bytes == &b[name], "{name} differs between CLI and library");
    }
    a
}

fn compare(case: &Path) {
    let dir = tempfile::tempdir().unwrap();
    let (cli, lib) = (dir.path().join("cli"), dir.path().join("lib"));
    cli_solve(case, &cli);
    let loaded = Loaded::from_file(case).unwrap();
    let options = SolveOptions {
        warm_start: None,
        threads: 1,
    };
    let solved = session::solve(loaded, &options, &mut Silent).unwrap();
    assert!(solved.converged() && solved.not_converged("results").is_none());
    solved.write(&lib, &WriteOptions::default()).unwrap();
    let a = same_folders(&cli, &lib);
    same_numbers(&csv_columns(&a["sites.csv"]), &solved.sites(), "sites.csv");
    same_numbers(
        &csv_columns(&a["spectrum.csv"]),
        &solved.spectrum(),
        "spectrum.csv",
    );
    same_numbers(
        &csv_columns(&a["convergence.csv"]),
        &solved.convergence(),
        "convergence.csv",
    );
}

#[test]
fn library_writes_the_cli_folder_of_a_coherent_demo() {
    let case = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo/thermionic-barrier.toml");
    compare(&case);
}

#[test]
fn library_writes_the_cli_folder_of_a_phonon_solve() {
    let dir = tempfile::tempdir().unwrap();
    let case = dir.path().join("phonon.toml");
    std::fs::write(&case, PHONON_CASE).unwrap();
    compare(&case);
}

/// Stops the Born loop once `after` iterations are done.
struct StopAfter {
    after: usize,
    seen: usize,
}

impl Observer for StopAfter {
    fn iteration(&mut self, r: &IterationRecord) {
        self.seen = r.iteration;
    }
    fn cancelled(&self) -> bool {
        self.seen >= self.after
    }
}

#[test]
fn an_observer_stops_a_solve_between_born_iterations() {
    let loaded = Loaded::from_text(PHONON_CASE, "inline", Path::new(".")).unwrap();
    let mut stop = StopAfter { after: 2, seen: 0 };
    let r = session::solve(loaded.clone(), &SolveOptions::default(), &mut stop);
    assert!(matches!(r, Err(SessionError::Cancelled)), "{r:?}");
    assert_eq!(stop.seen, 2, "stopped right after the second iteration");
    let p = &loaded.resolved;
    let mut stop = StopAfter { after: 3, seen: 0 };
    let e = qheat::scba::solve(&p.problem, &p.scba, None, &mut stop).unwrap_err();
    assert_eq!(e, qheat::scba::SolveError::Cancelled { iteration: 3 });
    assert_eq!(e.kind(), "cancelled");
}

fn demo(name: &str) -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("cases-demo")
        .join(name)
}

#[test]
fn library_writes_the_cli_folder_of_coefficients() {
    // With a phonon mode: the four finite-difference runs and their
    // response matrix go into summary.json.
    let dir = tempfile::tempdir().unwrap();
    let case = dir.path().join("phonon.toml");
    std::fs::write(&case, PHONON_CASE).unwrap();
    let (cli_dir, lib) = (dir.path().join("cli"), dir.path().join("lib"));
    cli(&["coefficients"], &case, &[], &cli_dir);
    let loaded = Loaded::from_file(&case).unwrap();
    let run = session::coefficients(loaded, 1, &mut Silent).unwrap();
    assert!(run.summary.response.get("iterations").is_some());
    run.write(&lib, OtherFiles::Refuse).unwrap();
    same_folders(&cli_dir, &lib);
}

#[test]
fn library_writes_the_cli_folders_of_generator_and_cooler() {
    let dir = tempfile::tempdir().unwrap();
    let case = demo("thermionic-barrier.toml");
    let (cli_dir, lib) = (dir.path().join("cli-g"), dir.path().join("lib-g"));
    let temps = ["--hot", "330", "--cold", "300", "--points", "3"];
    cli(&["generator"], &case, &temps, &cli_dir);
    let loaded = Loaded::from_file(&case).unwrap();
    let run = session::generator(loaded.clone(), 330.0, 300.0, 3, &mut Silent).unwrap();
    assert!(run.not_converged("results").is_none());
    run.write(&lib, OtherFiles::Refuse).unwrap();
    let a = same_folders(&cli_dir, &lib);
    same_numbers(
        &csv_columns(&a["generator.csv"]),
        &run.table(),
        "generator.csv",
    );
    let (cli_dir, lib) = (dir.path().join("cli-c"), dir.path().join("lib-c"));
    let temps = ["--hot", "300", "--cold", "290", "--points", "3"];
    cli(
        &["cooler"],
        &case,
        &[&temps[..], &["--cold-lead", "left"]].concat(),
        &cli_dir,
    );
    let run = session::cooler(loaded, 300.0, 290.0, 3, Side::Left, &mut Silent).unwrap();
    run.write(&lib, OtherFiles::Refuse).unwrap();
    let a = same_folders(&cli_dir, &lib);
    same_numbers(&csv_columns(&a["cooler.csv"]), &run.table(), "cooler.csv");
}

/// Stops whatever runs once `after` solves of a curve are done; counts the
/// solves and their records (each solve reports both).
struct StopAfterSolves {
    after: usize,
    solves: usize,
    records: usize,
}

impl Observer for StopAfterSolves {
    fn curve_solved(&mut self, _stage: &'static str, _voltage_v: f64) {
        self.solves += 1;
    }
    fn curve_point(&mut self, _record: &qheat::progress::CurvePointRecord) {
        self.records += 1;
    }
    fn cancelled(&self) -> bool {
        self.solves >= self.after
    }
}

#[test]
fn an_observer_stops_coefficients_and_curves() {
    let loaded = Loaded::from_text(PHONON_CASE, "inline", Path::new(".")).unwrap();
    let mut stop = StopAfter { after: 2, seen: 0 };
    let r = session::coefficients(loaded, 1, &mut stop);
    assert!(matches!(r, Err(SessionError::Cancelled)), "{r:?}");
    assert_eq!(
        stop.seen, 2,
        "stopped right after the second Born iteration"
    );
    let loaded = Loaded::from_file(&demo("thermionic-barrier.toml")).unwrap();
    let mut stop = StopAfterSolves {
        after: 2,
        solves: 0,
        records: 0,
    };
    let r = session::generator(loaded.clone(), 330.0, 300.0, 9, &mut stop);
    assert!(matches!(r, Err(SessionError::Cancelled)), "{r:?}");
    assert_eq!(stop.solves, 2, "no solve after the one that asked to stop");
    assert_eq!(stop.records, 2, "each solve's record reaches the observer");
    let mut stop = StopAfterSolves {
        after: 1,
        solves: 0,
        records: 0,
    };
    let r = session::cooler(loaded, 300.0, 290.0, 9, Side::Right, &mut stop);
    assert!(matches!(r, Err(SessionError::Cancelled)), "{r:?}");
    assert_eq!(stop.solves, 1);
}
