//! Coupling matrices written in the case (`coupling_matrices_ev`) are the
//! same sources as those read from a blocks file (`coupling_matrices_file`).

use qheat::case::{Case, Resolved};
use qheat::scba::{self, Silent};
use std::path::Path;

/// A two-orbital strip, short and biased (b = 2).
const STRIP: &str = r#"
name = "two-orbital strip"
[device]
kind = "strip"
spacing_nm = 0.5
length_nm = 3.0
width_sites = 2
effective_mass = 0.2
band_edge_ev = -0.7
[leads.left]
fermi_level_ev = 0.3
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.3
temperature_k = 300.0
[bias]
voltage_v = 0.02
[grid]
step_ev = 0.01
min_ev = 0.0
max_ev = 0.6
[solver]
tolerance = 1e-10
"#;

fn resolved(extra: &str, dir: &Path) -> Resolved {
    Case::parse(&format!("{STRIP}{extra}"), "test.toml", dir)
        .and_then(|c| c.resolve())
        .unwrap_or_else(|e| panic!("{e}"))
}

fn current(r: &Resolved) -> f64 {
    let s = scba::solve(&r.problem, &r.scba, None, &mut Silent).expect("solve");
    assert!(s.report.converged, "not converged");
    scba::terminal_currents(&s.problem, &s.pass.flows).0
}

/// A complex Hermitian dephasing source and a real interband phonon
/// source, once inline and once from csv files: the resolved scattering
/// is identical and so is the current (1e-14 relative: the same numbers
/// go through the same code, only the last bit may differ).
#[test]
fn inline_matrices_equal_the_file_form() {
    let tmp = tempfile::tempdir().unwrap();
    std::fs::write(
        tmp.path().join("dephasing.csv"),
        "cell,row,col,re_ev,im_ev\n0,0,0,0.02,0\n0,0,1,0.01,-0.015\n0,1,0,0.01,0.015\n\
         0,1,1,-0.01,0\n1,0,0,0.01,0\n",
    )
    .unwrap();
    std::fs::write(
        tmp.path().join("phonon.csv"),
        "cell,row,col,re_ev,im_ev\n0,0,1,0.03,0\n0,1,0,0.03,0\n",
    )
    .unwrap();
    let from_files = resolved(
        "[dephasing]\ncoupling_matrices_file = \"dephasing.csv\"\n\
         [[phonon]]\nenergy_ev = 0.04\ncoupling_matrices_file = \"phonon.csv\"\n",
        tmp.path(),
    );
    let inline = resolved(
        "[dephasing]\ncoupling_matrices_ev = [\n  [[0.02, [0.01, -0.015]], [[0.01, 0.015], -0.01]],\n  \
         [[0.01, 0], [0, 0]],\n]\n\
         [[phonon]]\nenergy_ev = 0.04\ncoupling_matrices_ev = [[[0, 0.03], [0.03, 0]]]\n",
        tmp.path(),
    );
    let (a, b) = (&from_files.problem.scattering, &inline.problem.scattering);
    assert!(!a.dephasing_matrices.is_empty() && !a.phonons[0].coupling_matrices.is_empty());
    assert_eq!(a, b, "the resolved scattering differs");
    let (ia, ib) = (current(&from_files), current(&inline));
    assert!(ia.abs() > 1e-12, "no current: {ia}");
    assert!((ia - ib).abs() <= 1e-14 * ia.abs(), "{ia} vs {ib}");
}
