//! Orbitals that no lead reaches at some energies, with dephasing only:
//! their filling is undetermined and the Born loop is stopped early with a
//! diagnosis instead of wandering to the iteration limit.
//!
//! The device: 8 cells of two orbitals and no term between them. Orbital 0
//! is a wide band (on-site 0.5 eV, hopping −0.25 eV: 0 … 1 eV), orbital 1
//! a narrow band (on-site 0.8 eV, hopping −0.02 eV: 0.76 … 0.84 eV); the
//! leads continue the end cells, so they have states on orbital 1 only in
//! 0.76 … 0.84 eV. Local dephasing of strength D broadens every state by up
//! to 2√D (≈ 0.063 eV for D = 1e-3 eV²; the semicircle of the
//! self-consistent Born approximation, common practice), so orbital 1 has
//! states at about 0.70 … 0.90 eV, and between 0.70 and 0.76 eV and
//! between 0.84 and 0.90 eV nothing but dephasing reaches them.

use qheat::case::{Case, Resolved};
use qheat::scba::{self, Silent, SolveError};
use std::path::{Path, PathBuf};
use std::process::Command;

const CELLS: usize = 8;

/// Writes the block files and the case into `dir`; `onsite_01` is the
/// on-site term between the two orbitals (eV), `extra` is appended.
fn write_case(dir: &Path, onsite_01: f64, extra: &str) -> PathBuf {
    let mut onsite = String::from("cell,row,col,re_ev,im_ev\n");
    for i in 0..CELLS {
        onsite.push_str(&format!("{i},0,0,0.5,0\n{i},1,1,0.8,0\n"));
        if onsite_01 != 0.0 {
            onsite.push_str(&format!("{i},0,1,{onsite_01},0\n{i},1,0,{onsite_01},0\n"));
        }
    }
    std::fs::write(dir.join("onsite.csv"), onsite).unwrap();
    std::fs::write(
        dir.join("coupling.csv"),
        "cell,row,col,re_ev,im_ev\n0,0,0,-0.25,0\n0,1,1,-0.02,0\n",
    )
    .unwrap();
    let text = format!(
        r#"name = "cut-off orbital"
[device]
kind = "blocks"
spacing_nm = 0.5
cells = {CELLS}
onsite_file = "onsite.csv"
coupling_file = "coupling.csv"
[leads.left]
fermi_level_ev = 0.5
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.5
temperature_k = 300.0
[bias]
voltage_v = 0.01
[dephasing]
strength_ev2 = 1e-3
{extra}"#
    );
    let path = dir.join("case.toml");
    std::fs::write(&path, text).unwrap();
    path
}

const FULL_GRID: &str = "[grid]\nstep_ev = 0.005\nmin_ev = 0.0\nmax_ev = 1.0\n";

fn resolved(dir: &Path, onsite_01: f64, extra: &str) -> Resolved {
    let path = write_case(dir, onsite_01, extra);
    let case = Case::load(&path).unwrap_or_else(|e| panic!("{e}"));
    case.resolve().unwrap_or_else(|e| panic!("{e}"))
}

/// The reproduction stops within a few iterations and names orbital 1 of
/// every cell and energy ranges in the tails of its band outside the
/// leads' band for it (0.76 … 0.84 eV). Before this check the loop ran to
/// its 300 iterations with a residual near 1.
#[test]
fn a_cut_off_orbital_stops_early_and_is_named() {
    let tmp = tempfile::tempdir().unwrap();
    let r = resolved(tmp.path(), 0.0, FULL_GRID);
    let err = match scba::solve(&r.problem, &r.scba, None, &mut Silent) {
        Ok(s) => panic!(
            "solved: converged {} after {} iterations",
            s.report.converged, s.report.iterations
        ),
        Err(e) => e,
    };
    let SolveError::Undetermined(u) = &err else {
        panic!("wrong error: {err}");
    };
    println!("{err}");
    assert!(
        u.iteration <= 15,
        "stopped only at iteration {}",
        u.iteration
    );
    assert_eq!(u.parts.len(), 1, "{err}");
    let p = &u.parts[0];
    assert_eq!(p.orbitals, vec![1], "{err}");
    assert_eq!(p.cells, (0, CELLS - 1));
    assert_eq!(p.sites, CELLS);
    assert!(p.lead_weight_ratio <= r.scba.tolerance, "{err}");
    assert!(!p.energy_ranges_ev.is_empty());
    for &(a, b) in &p.energy_ranges_ev {
        // Inside the dephasing-broadened band, never well inside the
        // leads' band for orbital 1 (one grid step of slack at its edges,
        // where the lead broadening vanishes).
        assert!(a >= 0.65 && b <= 0.95, "range {a}–{b} eV: {err}");
        assert!(
            b < 0.77 || a > 0.83,
            "range {a}–{b} eV inside the lead band: {err}"
        );
    }
    let text = err.to_string();
    for words in [
        "undetermined",
        "Orbital(s) 1 of cells 0–7",
        "narrow the energy grid",
    ] {
        assert!(text.contains(words), "`{words}` missing: {text}");
    }
    assert_eq!(err.kind(), "undetermined occupation");
    let (e, cell) = err.location().expect("a location");
    assert_eq!(cell, Some(0));
    assert!((0.65..0.77).contains(&e), "{e}");
}

/// What the diagnosis proposes cures it, and none of the cures is flagged:
/// an interband term of 0.02 eV, a phonon acting on every orbital, or a
/// grid inside the leads' band for orbital 1.
#[test]
fn coupled_phonon_or_narrow_grid_is_not_flagged_and_converges() {
    let variants = [
        ("interband term 0.02 eV", 0.02, FULL_GRID.to_string()),
        (
            "phonon",
            0.0,
            format!("{FULL_GRID}[[phonon]]\nenergy_ev = 0.02\ncoupling_ev2 = 1e-3\n"),
        ),
        (
            "grid inside the band",
            0.0,
            "[grid]\nstep_ev = 0.005\nmin_ev = 0.77\nmax_ev = 0.83\n".to_string(),
        ),
    ];
    for (what, t01, extra) in variants {
        let tmp = tempfile::tempdir().unwrap();
        let r = resolved(tmp.path(), t01, &extra);
        match scba::solve(&r.problem, &r.scba, None, &mut Silent) {
            Ok(s) => {
                println!("{what}: {} iterations", s.report.iterations);
                assert!(s.report.converged, "{what}: not converged");
            }
            Err(e) => panic!("{what}: {e}"),
        }
    }
}

/// A weak interband term (2 meV) joins orbital 1 to the leads through
/// orbital 0: its tails now hold a small but nonzero lead weight and the
/// loop is not stopped early (it runs to its iteration limit, slowly
/// settling, as any hard case does).
#[test]
fn a_nearly_cut_off_orbital_is_not_stopped() {
    let tmp = tempfile::tempdir().unwrap();
    let extra = format!("{FULL_GRID}[solver]\nmax_iterations = 40\n");
    let r = resolved(tmp.path(), 0.002, &extra);
    match scba::solve(&r.problem, &r.scba, None, &mut Silent) {
        Ok(s) => println!(
            "weak interband term: converged {} after {} iterations",
            s.report.converged, s.report.iterations
        ),
        Err(e) => panic!("refused: {e}"),
    }
}

/// A weak contact attached along the channel (γ = 0.1 meV on one cell) is
/// a path to a reservoir like a lead: orbital 1 is then reached and its
/// filling determined, however slowly the loop settles, so it is not
/// stopped as undetermined.
#[test]
fn a_contact_along_the_channel_is_a_path_out() {
    let tmp = tempfile::tempdir().unwrap();
    let extra = format!(
        "{FULL_GRID}[solver]\nmax_iterations = 40\n[[contact]]\nname = \"tap\"\n\
         cells = [3]\ngamma_ev = 1e-4\nfermi_level_ev = 0.5\n"
    );
    let r = resolved(tmp.path(), 0.0, &extra);
    match scba::solve(&r.problem, &r.scba, None, &mut Silent) {
        Ok(s) => println!(
            "weak contact: converged {} after {} iterations",
            s.report.converged, s.report.iterations
        ),
        Err(e) => panic!("refused: {e}"),
    }
}

/// The command line exits with 2, says why, and writes a summary that
/// flags the run and names the fault.
#[test]
fn the_cli_exits_2_with_the_diagnosis() {
    let tmp = tempfile::tempdir().unwrap();
    let case = write_case(tmp.path(), 0.0, FULL_GRID);
    let out = tmp.path().join("out");
    let o = Command::new(env!("CARGO_BIN_EXE_qheat"))
        .args(["solve", case.to_str().unwrap(), "-o", out.to_str().unwrap()])
        .arg("--quiet")
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{stderr}");
    assert!(!stderr.contains("panicked"), "{stderr}");
    for words in ["undetermined", "Orbital(s) 1", "Hint:"] {
        assert!(stderr.contains(words), "`{words}` missing: {stderr}");
    }
    let text = std::fs::read_to_string(out.join("summary.json")).unwrap();
    let s: serde_json::Value = serde_json::from_str(&text).unwrap();
    assert_eq!(s["trustworthy"], false);
    assert_eq!(s["fault"]["kind"], "undetermined occupation");
    assert_eq!(s["fault"]["cell"], 0);
}
