//! The binary under `mpirun` (built with the `mpi` feature): sweep and
//! screen points split over 1, 2 and 4 ranks give result files identical
//! to one process, a failing point on one rank ends every rank with one
//! message, bad input is refused once, and a sweep interrupted on some
//! ranks resumes under another rank count to the same table.
//!
//! These tests need `mpirun` (Open MPI, oversubscribed on a small machine);
//! without it they fail with a hint rather than pass.
#![cfg(feature = "mpi")]

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
#[path = "support/mpi_run.rs"]
mod mpi_run;

use mpi_run::{alone, ranks, stderr, write};

/// A small phonon case: warm starts along a line and stored self-energies
/// are exercised, and each point is a real Born loop.
const PHONON_CASE: &str = r#"
name = "mpi-phonon"
[device]
kind = "chain"
spacing_nm = 0.25
length_nm = 3.0
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
to_nm = 3.0
[grid]
step_ev = 0.004
[solver]
tolerance = 1e-9
"#;

/// Every result file of a folder (the point store aside) by name, with
/// summary.json's fields that describe the run rather than the result
/// (folder, threads, lines at once, points computed now) taken out.
fn result_files(dir: &Path) -> BTreeMap<String, Vec<u8>> {
    let mut files = BTreeMap::new();
    for entry in std::fs::read_dir(dir).unwrap() {
        let path = entry.unwrap().path();
        let name = path.file_name().unwrap().to_string_lossy().into_owned();
        if path.is_dir() || name.starts_with('.') {
            continue;
        }
        let mut bytes = std::fs::read(&path).unwrap();
        if name == "summary.json" {
            let mut v: serde_json::Value = serde_json::from_slice(&bytes).unwrap();
            let o = v.as_object_mut().unwrap();
            for run_field in [
                "point_store",
                "threads",
                "parallel_lines",
                "computed_this_run",
                "from_earlier_runs",
            ] {
                assert!(o.remove(run_field).is_some(), "summary has {run_field}");
            }
            bytes = serde_json::to_vec_pretty(&v).unwrap();
        }
        files.insert(name, bytes);
    }
    assert!(
        files.len() >= 3,
        "too few result files in {}",
        dir.display()
    );
    files
}

fn assert_same_results(one: &Path, many: &Path) {
    let (a, b) = (result_files(one), result_files(many));
    assert_eq!(
        a.keys().collect::<Vec<_>>(),
        b.keys().collect::<Vec<_>>(),
        "{} and {} hold different files",
        one.display(),
        many.display()
    );
    for (name, bytes) in &a {
        assert!(
            bytes == &b[name],
            "{name} differs between {} and {}",
            one.display(),
            many.display()
        );
    }
}

/// sweep.csv holds the rows the computing ranks stored, digit for digit:
/// what came through the gather lost no bit (the store writes and the
/// table prints the shortest text that reads back to the same double; the
/// store keeps `converged` as 1 or 0, the table as true or false).
fn assert_table_is_the_stored_rows(dir: &Path, points: usize) {
    let csv = std::fs::read_to_string(dir.join("sweep.csv")).unwrap();
    let lines: Vec<&str> = csv.lines().skip(1).collect();
    assert_eq!(lines.len(), points);
    let stores: Vec<PathBuf> = std::fs::read_dir(dir.join("points"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    assert_eq!(stores.len(), 1, "one point store in {}", dir.display());
    for (index, line) in lines.iter().enumerate() {
        let row = std::fs::read_to_string(stores[0].join(format!("{index:08}.row"))).unwrap();
        let head = |t: &str| t.trim_end().rsplit_once(',').unwrap().0.to_string();
        assert_eq!(head(&row), head(line), "point {index} in {}", dir.display());
    }
}

const SWEEP_AXES: [&str; 4] = [
    "--vary",
    "leads.left.temperature_k=290:310:3",
    "--vary",
    "bias.voltage_v=-0.04:0.04:4",
];

fn sweep_args<'a>(case: &'a str, out: &'a str) -> Vec<&'a str> {
    let mut a = vec!["sweep", case, "-o", out, "--quiet"];
    a.extend(SWEEP_AXES);
    a
}

#[test]
fn sweeps_on_1_2_and_4_ranks_write_the_files_of_one_process() {
    let tmp = tempfile::tempdir().unwrap();
    let case = write(tmp.path(), "case.toml", PHONON_CASE);
    let case = case.to_str().unwrap();
    let one = tmp.path().join("one");
    let o = alone(1, &sweep_args(case, one.to_str().unwrap()));
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert_table_is_the_stored_rows(&one, 12);
    // 3 lines of 4 points: with 2 and 4 ranks the lines are split unevenly
    // and with 4 one rank has none.
    for k in [1, 2, 4] {
        let out = tmp.path().join(format!("ranks{k}"));
        let o = ranks(k, &sweep_args(case, out.to_str().unwrap()), &[]);
        assert_eq!(o.status.code(), Some(0), "{k} ranks: {}", stderr(&o));
        assert_same_results(&one, &out);
        assert_table_is_the_stored_rows(&out, 12);
        let s: serde_json::Value =
            serde_json::from_slice(&std::fs::read(out.join("summary.json")).unwrap()).unwrap();
        assert_eq!(s["computed_this_run"], 12, "{k} ranks");
    }
}

#[test]
fn a_screen_split_over_2_ranks_ranks_like_one_process() {
    let tmp = tempfile::tempdir().unwrap();
    let case = write(tmp.path(), "case.toml", PHONON_CASE);
    let case = case.to_str().unwrap();
    let run = |out: &Path, k: usize| {
        let args = [
            "screen",
            case,
            "--vary",
            "leads.left.fermi_level_ev+leads.right.fermi_level_ev=0.03:0.07:3",
            "--rank",
            "power-factor",
            "-o",
            out.to_str().unwrap(),
            "--quiet",
        ];
        let o = if k == 0 {
            alone(1, &args)
        } else {
            ranks(k, &args, &[])
        };
        assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    };
    let (one, two) = (tmp.path().join("one"), tmp.path().join("two"));
    run(&one, 0);
    run(&two, 2);
    assert!(one.join("ranking.csv").is_file());
    assert_same_results(&one, &two);
}

/// The non-finite Green's function of an isolated level at E = 0 (no
/// coupling to anything) when the energy grid holds E = 0 exactly: with
/// min_ev = -0.1 and step 0.0025 it does, with -0.099 it does not.
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
min_ev = -0.099
max_ev = 0.1
"#,
    )
}

#[test]
fn a_failing_point_on_one_rank_ends_every_rank_with_one_message() {
    let tmp = tempfile::tempdir().unwrap();
    let case = isolated_level_case(tmp.path());
    let out = tmp.path().join("out");
    // Line 0 (min_ev = -0.099) goes to rank 0 and solves; line 1
    // (min_ev = -0.1, points 2 and 3) goes to rank 1 and fails at once.
    let args = [
        "sweep",
        case.to_str().unwrap(),
        "--vary",
        "grid.min_ev=-0.099:-0.1:2",
        "--vary",
        "bias.voltage_v=0:0.01:2",
        "-o",
        out.to_str().unwrap(),
    ];
    let o = ranks(2, &args, &[]);
    let e = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{e}");
    assert_eq!(e.matches("error:").count(), 1, "one message:\n{e}");
    assert!(
        e.contains("error: grid point 2: non-finite Green's function at E = 0 eV in cell 1")
            && e.contains("on rank 1 of 2"),
        "{e}"
    );
    assert!(!e.contains("panicked"), "{e}");
    assert!(
        !out.join("sweep.csv").exists(),
        "a table despite the failure"
    );
    // Rank 0's points were kept for a later run.
    let stored = std::fs::read_dir(out.join("points")).unwrap().count();
    assert_eq!(stored, 1, "one point store folder");
}

#[test]
fn bad_input_is_refused_once_before_any_point() {
    let tmp = tempfile::tempdir().unwrap();
    let case = write(tmp.path(), "case.toml", PHONON_CASE);
    let out = tmp.path().join("out");
    let o = ranks(
        4,
        &[
            "sweep",
            case.to_str().unwrap(),
            "--vary",
            "leads.left.temperature_k=-10:300:2",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    let e = stderr(&o);
    assert_eq!(o.status.code(), Some(1), "{e}");
    assert_eq!(e.matches("error:").count(), 1, "one message:\n{e}");
    assert!(e.contains("leads.left.temperature_k"), "{e}");
    assert!(!out.exists(), "a folder was made for refused input");
}

#[test]
fn a_sweep_cut_short_on_2_ranks_resumes_on_3_to_the_same_table() {
    let tmp = tempfile::tempdir().unwrap();
    let case = write(tmp.path(), "case.toml", PHONON_CASE);
    let case = case.to_str().unwrap();
    let one = tmp.path().join("one");
    let o = alone(1, &sweep_args(case, one.to_str().unwrap()));
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let out = tmp.path().join("out");
    // Each rank ends itself (exit 75) after storing its first point.
    let o = ranks(
        2,
        &sweep_args(case, out.to_str().unwrap()),
        &[("QHEAT_ABORT_AFTER_POINTS", "1")],
    );
    assert_ne!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(!out.join("sweep.csv").exists());
    let o = ranks(3, &sweep_args(case, out.to_str().unwrap()), &[]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert_same_results(&one, &out);
    let s: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("summary.json")).unwrap()).unwrap();
    let earlier = s["from_earlier_runs"].as_u64().unwrap();
    assert!((1..12).contains(&earlier), "points from earlier: {earlier}");
}

/// The generator is not split over ranks: under two ranks rank 0 runs it
/// alone, so its summary is printed once and its folder is the one a single
/// process writes, byte for byte (only the thread count may differ, so the
/// curve table is compared, not the summary).
#[test]
fn the_generator_runs_on_rank_0_alone() {
    let tmp = tempfile::tempdir().unwrap();
    let case = write(tmp.path(), "case.toml", PHONON_CASE);
    let case = case.to_str().unwrap();
    let (one, two) = (tmp.path().join("one"), tmp.path().join("two"));
    let args = |out: &Path| -> Vec<String> {
        [
            "generator",
            case,
            "--hot",
            "310",
            "--cold",
            "300",
            "--points",
            "3",
            "-o",
        ]
        .iter()
        .map(|s| s.to_string())
        .chain([out.to_str().unwrap().to_string()])
        .collect()
    };
    let a = args(&one);
    let o = alone(1, &a.iter().map(String::as_str).collect::<Vec<_>>());
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let b = args(&two);
    let o = ranks(2, &b.iter().map(String::as_str).collect::<Vec<_>>(), &[]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let text = String::from_utf8_lossy(&o.stdout);
    let summaries = text
        .lines()
        .filter(|l| l.starts_with("maximum power"))
        .count();
    assert_eq!(summaries, 1, "printed once:\n{text}");
    let read = |d: &Path| std::fs::read(d.join("generator.csv")).unwrap();
    assert!(read(&one) == read(&two), "generator.csv differs");
}
