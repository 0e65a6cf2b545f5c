//! The binary under `mpirun` (built with the `mpi` feature): one solve's
//! energy grid shared over 1, 2 and 4 ranks writes the result folder of
//! one process byte for byte (summary.json aside from `threads` and
//! `energy_split_ranks`, which describe the run), in red-black and in
//! simultaneous order, with a warm start and with a floating probe; a
//! numerical fault on one rank's energies ends every rank with one message
//! and the failed-solve summary of one process.
//!
//! These tests need `mpirun` (Open MPI, oversubscribed on a small machine);
//! without it they fail with a hint rather than pass.
#![cfg(feature = "mpi")]

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
#[path = "support/mpi_run.rs"]
mod mpi_run;

use mpi_run::{alone, ranks, stderr, write};

/// A small phonon case: one mode of 10 grid steps, so the Born loop runs
/// in red-black order (bands of 10 energies).
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
[bias]
voltage_v = -0.02
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

/// Elastic dephasing alone: the Born loop runs in simultaneous order.
const DEPHASING_CASE: &str = r#"
name = "mpi-dephasing"
[device]
kind = "chain"
spacing_nm = 0.25
length_nm = 4.0
effective_mass = 0.1
[[device.region]]
from_nm = 1.5
to_nm = 2.5
offset_ev = 0.06
[leads.left]
fermi_level_ev = 0.05
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.05
temperature_k = 300.0
[bias]
voltage_v = 0.01
[dephasing]
strength_ev2 = 5e-4
[grid]
step_ev = 0.003
[solver]
tolerance = 1e-9
"#;

/// A coherent chain with a voltage probe: its level floats inside the
/// Born loop (a coherent device with a probe iterates).
const PROBE_CASE: &str = r#"
name = "mpi-probe"
[device]
kind = "chain"
spacing_nm = 0.25
length_nm = 5.0
effective_mass = 0.07
[[device.region]]
from_nm = 2.25
to_nm = 2.75
offset_ev = 0.06
[leads.left]
fermi_level_ev = 0.04
temperature_k = 30.0
[leads.right]
fermi_level_ev = 0.04
temperature_k = 30.0
[bias]
voltage_v = 0.002
drop = "leads"
[grid]
step_ev = 0.001
max_ev = 0.1
[[contact]]
name = "probe"
first_cell = 5
cell_count = 2
gamma_ev = 0.0005
mode = "voltage"
"#;

/// The fields of summary.json that describe the run, not its results:
/// they may differ between one process and a split run.
const RUN_FIELDS: [&str; 2] = ["threads", "energy_split_ranks"];

/// Every file under `dir` (hidden ones too) by relative path, with the
/// [`RUN_FIELDS`] of summary.json taken out; `ranks` is what
/// `energy_split_ranks` must say (absent for one rank).
fn folder_files(dir: &Path, ranks: usize) -> BTreeMap<String, Vec<u8>> {
    let mut files = BTreeMap::new();
    let mut todo = vec![dir.to_path_buf()];
    while let Some(d) = todo.pop() {
        for entry in std::fs::read_dir(&d).unwrap() {
            let path = entry.unwrap().path();
            if path.is_dir() {
                todo.push(path);
                continue;
            }
            let name = path
                .strip_prefix(dir)
                .unwrap()
                .to_string_lossy()
                .into_owned();
            let mut bytes = std::fs::read(&path).unwrap();
            if name == "summary.json" {
                let mut v: serde_json::Value = serde_json::from_slice(&bytes).unwrap();
                let o = v.as_object_mut().unwrap();
                // Only a solve's summary records the split.
                let split = o.get("energy_split_ranks").and_then(|r| r.as_u64());
                let want = (ranks > 1 && o["kind"] == "solve").then_some(ranks as u64);
                assert_eq!(split, want, "energy_split_ranks in {}", dir.display());
                for field in RUN_FIELDS {
                    o.remove(field);
                }
                bytes = serde_json::to_vec_pretty(&v).unwrap();
            }
            files.insert(name, bytes);
        }
    }
    assert!(!files.is_empty(), "no files in {}", dir.display());
    files
}

/// The folders hold the same files with the same bytes.
fn assert_same_folder(one: &Path, many: &Path, ranks: usize) {
    let (a, b) = (folder_files(one, 1), folder_files(many, ranks));
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
            "{name} differs between {} and {} ({ranks} ranks)",
            one.display(),
            many.display()
        );
    }
}

fn summary(dir: &Path) -> serde_json::Value {
    serde_json::from_slice(&std::fs::read(dir.join("summary.json")).unwrap()).unwrap()
}

/// Solve `case` alone and on 1, 2 and 4 ranks (with `extra` arguments)
/// and compare the folders; returns the folder of the lone run.
fn solve_everywhere(dir: &Path, case: &Path, extra: &[&str]) -> PathBuf {
    let run = |out: &Path, k: usize| {
        let mut args = vec!["solve", case.to_str().unwrap(), "-o", out.to_str().unwrap()];
        args.extend(extra);
        let o = if k == 0 {
            alone(1, &args)
        } else {
            ranks(k, &args, &[])
        };
        assert_eq!(o.status.code(), Some(0), "{k} ranks: {}", stderr(&o));
        o
    };
    let one = dir.join("one");
    run(&one, 0);
    for k in [1, 2, 4] {
        let out = dir.join(format!("ranks{k}"));
        let o = run(&out, k);
        let text = String::from_utf8_lossy(&o.stdout);
        assert_eq!(text.matches("results ").count(), 1, "printed once:\n{text}");
        assert_same_folder(&one, &out, k);
    }
    one
}

#[test]
fn a_phonon_solve_in_red_black_order_splits_to_the_bits_of_one_process() {
    let tmp = tempfile::tempdir().unwrap();
    let case = write(tmp.path(), "case.toml", PHONON_CASE);
    let one = solve_everywhere(tmp.path(), &case, &[]);
    let s = summary(&one);
    assert_eq!(s["scba"]["energy_order"], "red-black", "{}", s["scba"]);
    assert!(s["scba"]["iterations"].as_u64().unwrap() > 3);
}

#[test]
fn a_dephasing_solve_in_simultaneous_order_splits_to_the_bits_of_one_process() {
    let tmp = tempfile::tempdir().unwrap();
    let case = write(tmp.path(), "case.toml", DEPHASING_CASE);
    let one = solve_everywhere(tmp.path(), &case, &[]);
    let s = summary(&one);
    assert_eq!(s["scba"]["energy_order"], "simultaneous", "{}", s["scba"]);
    assert!(s["scba"]["iterations"].as_u64().unwrap() > 3);
}

#[test]
fn a_floating_probe_and_a_warm_start_split_to_the_bits_of_one_process() {
    let tmp = tempfile::tempdir().unwrap();
    let probe = write(tmp.path(), "probe.toml", PROBE_CASE);
    let two = |out: &Path, args: &[&str]| {
        let mut a = vec!["solve", "-o", out.to_str().unwrap()];
        a.extend(args);
        let o = ranks(2, &a, &[]);
        assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    };
    let lone = |out: &Path, args: &[&str]| {
        let mut a = vec!["solve", "-o", out.to_str().unwrap()];
        a.extend(args);
        let o = alone(1, &a);
        assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    };
    let (p1, p2) = (tmp.path().join("probe1"), tmp.path().join("probe2"));
    lone(&p1, &[probe.to_str().unwrap()]);
    two(&p2, &[probe.to_str().unwrap()]);
    assert_same_folder(&p1, &p2, 2);
    assert!(summary(&p1)["scba"]["iterations"].as_u64().unwrap() > 1);
    // A warm start from a solve with a weaker phonon (the same grid).
    let start = tmp.path().join("start");
    let other = PHONON_CASE.replace("coupling_ev2 = 2e-3", "coupling_ev2 = 1.5e-3");
    let other = write(tmp.path(), "other.toml", &other);
    lone(&start, &[other.to_str().unwrap()]);
    let case = write(tmp.path(), "case.toml", PHONON_CASE);
    let warm = [
        "--warm-start",
        start.to_str().unwrap(),
        case.to_str().unwrap(),
    ];
    let (w1, w2) = (tmp.path().join("warm1"), tmp.path().join("warm2"));
    lone(&w1, &warm);
    two(&w2, &warm);
    assert_same_folder(&w1, &w2, 2);
    assert_eq!(summary(&w1)["scba"]["warm_start"], true);
}

#[test]
fn coefficients_whose_solves_split_write_the_bits_of_one_process() {
    let tmp = tempfile::tempdir().unwrap();
    let case = write(tmp.path(), "case.toml", PHONON_CASE);
    let run = |out: &Path, k: usize| {
        let args = [
            "coefficients",
            case.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ];
        let o = if k == 0 {
            alone(1, &args)
        } else {
            ranks(k, &args, &[])
        };
        assert_eq!(o.status.code(), Some(0), "{k} ranks: {}", stderr(&o));
    };
    let one = tmp.path().join("one");
    run(&one, 0);
    // Finite-difference runs of the Born loop, one after another.
    let s = summary(&one);
    assert!(
        s["response"]["runs"].is_array() || s["response"].get("m11").is_some(),
        "{s}"
    );
    for k in [2, 4] {
        let out = tmp.path().join(format!("ranks{k}"));
        run(&out, k);
        assert_same_folder(&one, &out, k);
    }
}

/// The non-finite Green's function of an isolated level at E = 0 (no
/// coupling to anything) when the energy grid holds E = 0 exactly: with
/// min_ev = -0.1 and step 0.0025 the grid has 81 energies and E = 0 is
/// the 41st, which falls to rank 1 of 2 (energies 40…80) alone.
const ISOLATED_CASE: &str = r#"name = "isolated"
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
"#;

#[test]
fn a_fault_on_one_ranks_energies_ends_every_rank_with_one_message() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path();
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
    let coherent = write(dir, "coherent.toml", ISOLATED_CASE);
    // The same fault inside the Born loop: a phonon makes it iterate.
    let born = format!("{ISOLATED_CASE}[[phonon]]\nenergy_ev = 0.01\ncoupling_ev2 = 1e-4\n");
    let born = write(dir, "born.toml", &born);
    for (case, k) in [(&coherent, 2), (&born, 2), (&born, 4)] {
        let tag = format!("{}-{k}", case.file_stem().unwrap().to_string_lossy());
        let (one, many) = (
            dir.join(format!("{tag}-one")),
            dir.join(format!("{tag}-many")),
        );
        let args = |out: &Path| {
            ["solve", case.to_str().unwrap(), "-o", out.to_str().unwrap()]
                .map(String::from)
                .to_vec()
        };
        let a = args(&one);
        let lone = alone(1, &a.iter().map(String::as_str).collect::<Vec<_>>());
        let b = args(&many);
        let o = ranks(k, &b.iter().map(String::as_str).collect::<Vec<_>>(), &[]);
        let e = stderr(&o);
        assert_eq!(o.status.code(), Some(2), "{tag}: {e}");
        assert_eq!(lone.status.code(), Some(2), "{tag}: {}", stderr(&lone));
        assert_eq!(e.matches("error:").count(), 1, "{tag}: one message:\n{e}");
        assert!(
            e.contains("non-finite Green's function at E = 0 eV in cell 1"),
            "{tag}: {e}"
        );
        assert!(!e.contains("panicked"), "{tag}: {e}");
        // The message of one process (mpirun adds its own lines after it).
        let error_line = |t: &str| {
            t.lines()
                .find(|l| l.starts_with("error:"))
                .map(String::from)
        };
        let lone_error = stderr(&lone).replace(one.to_str().unwrap(), many.to_str().unwrap());
        assert_eq!(error_line(&e), error_line(&lone_error), "{tag}");
        // The failed-solve summary is the one of one process.
        let read = |d: &Path| {
            let mut v = summary(d);
            v.as_object_mut().unwrap().remove("threads");
            v
        };
        assert_eq!(read(&one), read(&many), "{tag}");
        assert_eq!(read(&many)["fault"]["energy_ev"], 0.0, "{tag}");
    }
}
