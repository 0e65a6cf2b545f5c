//! The binary under `mpirun` (built with the `mpi` feature): one solve's
//! energy grid shared over 1, 2 and 4 ranks writes the result folder of
//! one process (summary.json aside from `threads` and
//! `energy_split_ranks`, which describe the run), byte for byte with
//! linear mixing and to 1e-13 with Anderson mixing (see [`RELATIVE`]), in
//! red-black and in simultaneous order, with a warm start and with a
//! floating probe; a
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

/// How far a number of a split run may stray from one process's: 1e-13 of
/// the largest magnitude among the numbers it is reported with (its CSV
/// column, its array, its JSON key across records, its figure). The split
/// adds the mixer's inner products per process and then across processes,
/// another order than one process's, so Σ0 moves by rounding (~1e-16
/// relative) at each Anderson step; the loop contracts such changes, and
/// 1e-13 leaves a factor of a thousand for their growth over the
/// iterations. Scaled by the largest of its kind, not by itself, because
/// some outputs are differences of nearly equal numbers (the residual and
/// the change of the currents of late iterations, the flow into the bath),
/// whose own relative rounding is as large as that cancellation.
const RELATIVE: f64 = 1e-13;

/// The folders hold the same files; those whose bytes differ hold the same
/// text or arrays with numbers within [`RELATIVE`]. With `bitwise`, every
/// byte must be the same.
fn assert_same_folder(one: &Path, many: &Path, ranks: usize, bitwise: bool) {
    let (a, b) = (folder_files(one, 1), folder_files(many, ranks));
    assert_eq!(
        a.keys().collect::<Vec<_>>(),
        b.keys().collect::<Vec<_>>(),
        "{} and {} hold different files",
        one.display(),
        many.display()
    );
    for (name, bytes) in &a {
        if bytes == &b[name] {
            continue;
        }
        let what = format!("{name} of {} vs {} ranks", one.display(), ranks);
        assert!(!bitwise, "{what}: not the same bytes");
        let (x, y) = (numbers_of(name, bytes), numbers_of(name, &b[name]));
        assert_eq!(
            x.text, y.text,
            "{what}: the text around the numbers differs"
        );
        assert_eq!(
            x.groups.len(),
            y.groups.len(),
            "{what}: numbers differ in count"
        );
        for (g, (u, v)) in x.groups.iter().zip(&y.groups).enumerate() {
            assert_eq!(u.len(), v.len(), "{what}: group {g}");
            let scale = u
                .iter()
                .chain(v)
                .filter(|t| t.is_finite())
                .fold(0.0, |m: f64, t| m.max(t.abs()));
            for (i, (p, q)) in u.iter().zip(v).enumerate() {
                let same = p.to_bits() == q.to_bits() || (p - q).abs() <= RELATIVE * scale;
                assert!(
                    same,
                    "{what}: group {g}, number {i}: {p:e} vs {q:e} (scale {scale:e})"
                );
            }
        }
    }
}

/// The numbers of a result file in groups compared on one scale, and the
/// text around them (which must match exactly).
#[derive(Default)]
struct Numbers {
    text: Vec<String>,
    groups: Vec<Vec<f64>>,
}

/// Split `bytes` of the file `name` into [`Numbers`]: arrays of .npy and
/// .npz files (one group each), CSV columns, JSON values by key, and the
/// numbers of any other text file as one group.
fn numbers_of(name: &str, bytes: &[u8]) -> Numbers {
    let mut n = Numbers::default();
    if name.ends_with(".npy") {
        n.groups.push(npy_numbers(bytes));
    } else if name.ends_with(".npz") {
        let mut z = ndarray_npy::NpzReader::new(std::io::Cursor::new(bytes)).unwrap();
        for array in z.names().unwrap() {
            let a: ndarray::ArrayD<f64> = z.by_name(&array).unwrap();
            n.text.push(array);
            n.groups.push(a.iter().copied().collect());
        }
    } else if name.ends_with(".json") {
        let v: serde_json::Value = serde_json::from_slice(bytes).unwrap();
        let mut by_key = BTreeMap::new();
        json_numbers(&v, String::new(), &mut by_key, &mut n.text);
        n.groups = by_key.into_values().collect();
    } else {
        let text = String::from_utf8_lossy(bytes);
        let csv = name.ends_with(".csv");
        let mut columns: BTreeMap<usize, Vec<f64>> = BTreeMap::new();
        for line in text.lines() {
            let cells: Vec<&str> = if csv {
                line.split(',').collect()
            } else {
                vec![line]
            };
            for (c, cell) in cells.iter().enumerate() {
                for (i, piece) in split_numbers(cell).into_iter().enumerate() {
                    match piece {
                        Ok(v) => columns.entry(if csv { c } else { 0 }).or_default().push(v),
                        Err(t) => n.text.push(format!("{c}:{i}:{t}")),
                    }
                }
            }
        }
        n.groups = columns.into_values().collect();
    }
    n
}

/// The numbers of a .npy file of f64 or complex f64 (as pairs).
fn npy_numbers(bytes: &[u8]) -> Vec<f64> {
    use ndarray_npy::ReadNpyExt;
    if let Ok(a) = ndarray::ArrayD::<f64>::read_npy(bytes) {
        return a.iter().copied().collect();
    }
    let a = ndarray::ArrayD::<num_complex::Complex64>::read_npy(bytes).unwrap();
    a.iter().flat_map(|z| [z.re, z.im]).collect()
}

/// The numbers of `v` grouped by their key path (array positions left
/// out), and its other values and keys, in order.
fn json_numbers(
    v: &serde_json::Value,
    path: String,
    by_key: &mut BTreeMap<String, Vec<f64>>,
    text: &mut Vec<String>,
) {
    use serde_json::Value;
    match v {
        Value::Number(x) => by_key.entry(path).or_default().push(x.as_f64().unwrap()),
        Value::Array(items) => {
            for item in items {
                json_numbers(item, format!("{path}[]"), by_key, text);
            }
        }
        Value::Object(o) => {
            for (k, item) in o {
                text.push(k.clone());
                json_numbers(item, format!("{path}.{k}"), by_key, text);
            }
        }
        other => text.push(format!("{path}={other}")),
    }
}

/// `text` cut into numbers (Ok) and the text between them (Err).
fn split_numbers(text: &str) -> Vec<Result<f64, String>> {
    let b = text.as_bytes();
    let mut out = Vec::new();
    let (mut i, mut plain) = (0, String::new());
    while i < b.len() {
        let start = i;
        let mut j = i;
        if b[j] == b'-' {
            j += 1;
        }
        let digits = j;
        while j < b.len() && (b[j].is_ascii_digit() || b[j] == b'.') {
            j += 1;
        }
        let starts_number = j > digits && b[digits..j].iter().any(u8::is_ascii_digit);
        if !starts_number {
            let c = text[start..].chars().next().unwrap();
            plain.push(c);
            i += c.len_utf8();
            continue;
        }
        if j < b.len() && (b[j] == b'e' || b[j] == b'E') {
            let mut k = j + 1;
            if k < b.len() && (b[k] == b'-' || b[k] == b'+') {
                k += 1;
            }
            if k < b.len() && b[k].is_ascii_digit() {
                while k < b.len() && b[k].is_ascii_digit() {
                    k += 1;
                }
                j = k;
            }
        }
        match text[start..j].parse::<f64>() {
            Ok(v) => {
                out.push(Err(std::mem::take(&mut plain)));
                out.push(Ok(v));
            }
            Err(_) => plain.push_str(&text[start..j]),
        }
        i = j;
    }
    out.push(Err(plain));
    out
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
        assert_same_folder(&one, &out, k, false);
    }
    one
}

#[test]
fn a_phonon_solve_in_red_black_order_splits_like_one_process() {
    let tmp = tempfile::tempdir().unwrap();
    let case = write(tmp.path(), "case.toml", PHONON_CASE);
    let one = solve_everywhere(tmp.path(), &case, &[]);
    let s = summary(&one);
    assert_eq!(s["scba"]["energy_order"], "red-black", "{}", s["scba"]);
    assert!(s["scba"]["iterations"].as_u64().unwrap() > 3);
}

/// With linear mixing no sum runs across the energy rows but the change of
/// Σ0, which the split adds row by row in the order of one process: every
/// byte of the result folder is that of one process.
#[test]
fn a_linearly_mixed_solve_splits_to_the_bits_of_one_process() {
    let tmp = tempfile::tempdir().unwrap();
    let text = PHONON_CASE.replace("[solver]\n", "[solver]\nmixing = \"linear\"\n");
    assert_ne!(text, PHONON_CASE);
    let case = write(tmp.path(), "case.toml", &text);
    let (one, two) = (tmp.path().join("one"), tmp.path().join("two"));
    let args = |out: &Path| {
        ["solve", case.to_str().unwrap(), "-o", out.to_str().unwrap()].map(String::from)
    };
    let o = alone(1, &args(&one).each_ref().map(String::as_str));
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let o = ranks(2, &args(&two).each_ref().map(String::as_str), &[]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert_same_folder(&one, &two, 2, true);
    assert!(summary(&one)["scba"]["iterations"].as_u64().unwrap() > 3);
}

/// On a chain of 4096 sites the Anderson mixer takes its sums over chunks
/// of one energy row, so each rank's rows are whole chunks of one
/// process's, and the split adds every chunk's sums in the order of one
/// process: the result folder is byte for byte that of one process.
#[test]
fn anderson_mixing_on_a_long_chain_splits_to_the_bits_of_one_process() {
    let tmp = tempfile::tempdir().unwrap();
    let text = PHONON_CASE
        .replace("length_nm = 3.0", "length_nm = 1024.0")
        .replace("to_nm = 3.0", "to_nm = 1024.0");
    let case = write(tmp.path(), "case.toml", &text);
    let one = tmp.path().join("one");
    let args = |out: &Path| {
        ["solve", case.to_str().unwrap(), "-o", out.to_str().unwrap()].map(String::from)
    };
    let o = alone(1, &args(&one).each_ref().map(String::as_str));
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    for k in [2, 3] {
        let out = tmp.path().join(format!("ranks{k}"));
        let o = ranks(k, &args(&out).each_ref().map(String::as_str), &[]);
        assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
        assert_same_folder(&one, &out, k, true);
    }
    let s = summary(&one);
    assert_eq!(s["scba"]["energy_order"], "red-black", "{}", s["scba"]);
    assert!(s["scba"]["iterations"].as_u64().unwrap() > 3);
}

/// The coarse start: a 32-step phonon on a 256-step grid gives one coarse
/// level of every 4th energy (8 phonon steps, 65 energies). The coarse
/// solves go through the same split of the energy rows as the full grid's,
/// so 1, 2 and 4 ranks write what one process writes.
#[test]
fn a_coarse_start_splits_like_one_process() {
    let tmp = tempfile::tempdir().unwrap();
    let text = PHONON_CASE
        .replace("energy_ev = 0.04", "energy_ev = 0.032")
        .replace(
            "step_ev = 0.004",
            "step_ev = 0.001\nmin_ev = -0.05\nmax_ev = 0.206",
        )
        .replace("[solver]\n", "[solver]\ncoarse_start = \"on\"\n");
    let case = write(tmp.path(), "case.toml", &text);
    let one = solve_everywhere(tmp.path(), &case, &[]);
    let s = summary(&one);
    let levels = s["scba"]["coarse_levels"].as_array().unwrap();
    assert_eq!(levels.len(), 1, "{}", s["scba"]);
    assert!(s["scba"]["iterations"].as_u64().unwrap() > 3);
}

#[test]
fn a_dephasing_solve_in_simultaneous_order_splits_like_one_process() {
    let tmp = tempfile::tempdir().unwrap();
    let case = write(tmp.path(), "case.toml", DEPHASING_CASE);
    let one = solve_everywhere(tmp.path(), &case, &[]);
    let s = summary(&one);
    assert_eq!(s["scba"]["energy_order"], "simultaneous", "{}", s["scba"]);
    assert!(s["scba"]["iterations"].as_u64().unwrap() > 3);
}

#[test]
fn a_floating_probe_and_a_warm_start_split_like_one_process() {
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
    assert_same_folder(&p1, &p2, 2, false);
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
    assert_same_folder(&w1, &w2, 2, false);
    assert_eq!(summary(&w1)["scba"]["warm_start"], true);
}

#[test]
fn coefficients_whose_solves_split_write_what_one_process_writes() {
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
        assert_same_folder(&one, &out, k, false);
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
