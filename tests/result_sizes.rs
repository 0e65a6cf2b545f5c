//! Result files stay within their size budget: larger maps are written as
//! block means that keep sums, a large self-energy is left out, and
//! summary.json says so; `full_arrays` writes every array whole, equal to
//! the arrays in memory; small results are unchanged.

use ndarray::{Array1, Array2, ArrayD};
use qheat::C64;
use qheat::case::Case;
use qheat::observables::{Observables, bond_current_map, observe, occupation_map};
use qheat::output::Staging;
use qheat::output::plots::write_solve_plots_within;
use qheat::output::results::{RunInfo, solve_summary, write_solve_files_within};
use qheat::output::schema::summary::SolveSummary;
use qheat::output::sizes::ResultLimits;
use qheat::scba::{Silent, Solution, solve};
use std::path::Path;

/// A 90 nm chain (300 cells) with one phonon mode on about 300 energies:
/// each map about 0.7 MB, the self-energy about 2 MB.
const CHAIN: &str = r#"name = "sizes"
[device]
kind = "chain"
spacing_nm = 0.3
length_nm = 90.0
effective_mass = 0.07
[[device.region]]
from_nm = 43.5
to_nm = 46.5
offset_ev = 0.1
[leads.left]
fermi_level_ev = 0.05
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.05
temperature_k = 300.0
[bias]
voltage_v = -0.05
[[phonon]]
energy_ev = 0.036
coupling_ev2 = 1e-3
[grid]
step_ev = 0.002
[solver]
tolerance = 1e-6
"#;

fn solved(toml: &str) -> (Solution, Observables, String) {
    let case = Case::parse(toml, "sizes.toml", Path::new(".")).unwrap();
    let resolved = case.resolve().unwrap();
    let sol = solve(&resolved.problem, &resolved.scba, None, &mut Silent).unwrap();
    assert!(sol.report.converged);
    let o = observe(&sol);
    (sol, o, case.to_toml_string())
}

/// Write the files and figures of a solve into `out` within `limits`.
fn write(sol: &Solution, o: &Observables, toml: &str, out: &Path, limits: &ResultLimits) {
    let info = RunInfo {
        case_name: "sizes",
        case_file: "sizes.toml",
        case_toml: toml,
        warnings: &[],
        notes: &[],
        threads: 1,
    };
    let mut summary = solve_summary(sol, o, &info);
    let stage = Staging::new(out).unwrap();
    write_solve_files_within(&stage, sol, o, &mut summary, limits).unwrap();
    write_solve_plots_within(&stage, sol, o, limits).unwrap();
    stage.commit().unwrap();
}

fn summary(out: &Path) -> SolveSummary {
    serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap()
}

fn folder_bytes(out: &Path) -> u64 {
    std::fs::read_dir(out)
        .unwrap()
        .map(|e| e.unwrap().metadata().unwrap().len())
        .sum()
}

fn npz_array<T: ndarray_npy::ReadableElement, D: ndarray::Dimension>(
    path: &Path,
    name: &str,
) -> ndarray::Array<T, D> {
    let mut npz = ndarray_npy::NpzReader::new(std::fs::File::open(path).unwrap()).unwrap();
    npz.by_name(name).unwrap()
}

#[test]
fn a_reduced_result_stays_within_its_budget_and_says_what_it_reduced() {
    let (sol, o, toml) = solved(CHAIN);
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("small");
    let limits = ResultLimits {
        budget_bytes: 2_000_000,
        full_arrays: false,
    };
    write(&sol, &o, &toml, &out, &limits);
    let total = folder_bytes(&out);
    assert!(total <= limits.budget_bytes, "{total} bytes written");
    for e in std::fs::read_dir(&out).unwrap() {
        let e = e.unwrap();
        let name = e.file_name().to_string_lossy().to_string();
        let len = e.metadata().unwrap().len();
        if name.ends_with(".svg") {
            assert!(len <= limits.figure_bytes(), "{name}: {len} bytes");
        }
        if name.ends_with(".npy") || name.ends_with(".npz") {
            assert!(len <= limits.array_bytes(), "{name}: {len} bytes");
        }
    }
    // The self-energy is left out, and the summary says so and how to get it.
    assert!(!out.join("self_energy_in.npy").exists());
    let files = summary(&out).result_files.expect("result_files");
    assert_eq!(files.budget_bytes, limits.budget_bytes);
    assert_eq!(files.left_out.len(), 1);
    assert_eq!(
        files.left_out[0].bytes,
        24 * sol.sigma.inscatter.len() as u64
    );
    assert!(files.how_to_get_all.contains("--full-arrays"));
    // The bond-current map: block means whose sums are the map's sums.
    let full = bond_current_map(&sol);
    let entry = files
        .reduced
        .iter()
        .find(|r| r.file == "bond_current.npz")
        .expect("bond_current.npz reduced");
    assert_eq!(entry.full_shape, full.shape());
    let [k0, k1] = [entry.block[0], entry.block[1]];
    assert!(k0 * k1 > 1);
    let map: Array2<f64> = npz_array(&out.join("bond_current.npz"), "map");
    assert_eq!(map.shape(), entry.written_shape.as_slice());
    let (n0, n1) = full.dim();
    for ((bi, bj), v) in map.indexed_iter() {
        let block = full.slice(ndarray::s![
            bi * k0..((bi + 1) * k0).min(n0),
            bj * k1..((bj + 1) * k1).min(n1)
        ]);
        let sum: f64 = block.iter().sum();
        let scale = block.iter().map(|x| x.abs()).sum::<f64>().max(1e-300);
        assert!(
            (v * block.len() as f64 - sum).abs() <= 1e-12 * scale,
            "block ({bi}, {bj})"
        );
    }
    // Its energy axis: the means of the blocks' energies.
    let e: Array1<f64> = npz_array(&out.join("bond_current.npz"), "energy_ev");
    let grid = sol.problem.grid.energies();
    assert_eq!(e.len(), map.ncols());
    assert!((e[0] - grid[..k1].iter().sum::<f64>() / k1 as f64).abs() < 1e-12);
}

#[test]
fn full_arrays_writes_every_array_as_it_is_in_memory() {
    let (sol, o, toml) = solved(CHAIN);
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("full");
    let limits = ResultLimits {
        budget_bytes: 2_000_000,
        full_arrays: true,
    };
    write(&sol, &o, &toml, &out, &limits);
    assert!(summary(&out).result_files.is_none());
    let bond: Array2<f64> = ndarray_npy::read_npy(out.join("bond_current.npy")).unwrap();
    assert_eq!(bond, bond_current_map(&sol));
    let occ: Array2<f64> = npz_array(&out.join("occupation.npz"), "map");
    let want = occupation_map(&sol);
    assert!(
        occ.iter()
            .zip(want.iter())
            .all(|(a, b)| a.to_bits() == b.to_bits())
    );
    let r: ArrayD<C64> = ndarray_npy::read_npy(out.join("self_energy_retarded.npy")).unwrap();
    let i: ArrayD<f64> = ndarray_npy::read_npy(out.join("self_energy_in.npy")).unwrap();
    assert_eq!(r.iter().copied().collect::<Vec<_>>(), sol.sigma.retarded);
    assert_eq!(i.iter().copied().collect::<Vec<_>>(), sol.sigma.inscatter);
}

/// Within the default budget the Peltier demo is written whole, with no
/// `result_files` object: small results are what they were.
#[test]
fn a_small_result_is_written_whole() {
    let toml = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo/peltier-barrier.toml"),
    )
    .unwrap();
    let (sol, o, toml) = solved(&toml);
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("pb");
    write(&sol, &o, &toml, &out, &ResultLimits::default());
    assert!(summary(&out).result_files.is_none());
    let bond: Array2<f64> = ndarray_npy::read_npy(out.join("bond_current.npy")).unwrap();
    assert_eq!(bond, bond_current_map(&sol));
    assert!(out.join("self_energy_in.npy").exists());
}
