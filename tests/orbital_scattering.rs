//! Scattering in orbital space: couplings per orbital and, for sources that
//! mix orbitals, full b × b self-energies within a cell.

use qheat::case::{Case, Resolved};
use qheat::scba::{self, Silent, Solution};
use std::path::Path;

/// A two-orbital strip (two sites across, b = 2), short and biased, whose
/// lowest transverse mode opens at about 0.06 eV, below the Fermi level.
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
step_ev = 0.004
min_ev = 0.0
max_ev = 0.6
[solver]
tolerance = 1e-10
"#;

fn case(extra: &str) -> Case {
    Case::parse(&format!("{STRIP}{extra}"), "test.toml", Path::new("."))
        .unwrap_or_else(|e| panic!("{e}"))
}

fn resolved(extra: &str) -> Resolved {
    case(extra).resolve().unwrap_or_else(|e| panic!("{e}"))
}

fn solve(r: &Resolved) -> Solution {
    scba::solve(&r.problem, &r.scba, None, &mut Silent).expect("solve")
}

fn current(s: &Solution) -> f64 {
    scba::terminal_currents(&s.problem, &s.pass.flows).0
}

/// A per-orbital list with the same value on every orbital is the scalar
/// coupling: the same Σ0 on every site, so the same numbers. The 1e-14
/// allows for nothing but the last bit (the path is the same code).
#[test]
fn equal_per_orbital_values_are_the_scalar_coupling() {
    let scalar = resolved(
        "[[phonon]]\nenergy_ev = 0.04\ncoupling_ev2 = 3e-3\n\
         [dephasing]\nstrength_ev2 = 1e-3\n",
    );
    let listed = resolved(
        "[[phonon]]\nenergy_ev = 0.04\ncoupling_per_orbital_ev2 = [3e-3, 3e-3]\n\
         [dephasing]\nstrength_per_orbital_ev2 = [1e-3, 1e-3]\n",
    );
    assert_eq!(
        scalar.problem.scattering, listed.problem.scattering,
        "the resolved couplings differ"
    );
    let (a, b) = (solve(&scalar), solve(&listed));
    assert!(a.report.converged && b.report.converged);
    let (ia, ib) = (current(&a), current(&b));
    assert!(ia.abs() > 1e-9, "the strip carries no current: {ia}");
    assert!((ia - ib).abs() <= 1e-14 * ia.abs(), "{ia} vs {ib}");
}

/// Different values per orbital reach the orbitals they name: the mode
/// couples only to the first orbital of each cell.
#[test]
fn per_orbital_values_land_on_their_orbitals() {
    let r = resolved("[[phonon]]\nenergy_ev = 0.04\ncoupling_per_orbital_ev2 = [2e-3, 0]\n");
    let d = &r.problem.scattering.phonons[0].coupling_ev2;
    assert_eq!(d.len(), 2 * r.problem.device.cells());
    for (s, &v) in d.iter().enumerate() {
        let want = if s % 2 == 0 { 2e-3 } else { 0.0 };
        assert_eq!(v, want, "orbital site {s}");
    }
}

/// Lists of the wrong length, negative strengths and a list next to the
/// scalar key are refused, naming the key and what was expected.
#[test]
fn bad_per_orbital_lists_are_refused_with_the_key() {
    let cases = [
        (
            "[[phonon]]\nenergy_ev = 0.04\ncoupling_per_orbital_ev2 = [1e-3, 1e-3, 1e-3]\n",
            "phonon.0.coupling_per_orbital_ev2",
            "one value per orbital of a cell: 2",
        ),
        (
            "[dephasing]\nstrength_per_orbital_ev2 = [1e-3, -1e-3]\n",
            "dephasing.strength_per_orbital_ev2",
            "at orbital 1",
        ),
        (
            "[[phonon]]\nenergy_ev = 0.04\ncoupling_ev2 = 1e-3\ncoupling_per_orbital_ev2 = [1e-3, 0]\n",
            "phonon.0.coupling_per_orbital_ev2",
            "not both",
        ),
        (
            "[dephasing]\nstrength_per_orbital_ev2 = [1e-3, \"a\"]\n",
            "dephasing.strength_per_orbital_ev2",
            "an array of numbers",
        ),
    ];
    for (extra, key, words) in cases {
        let text = format!("{STRIP}{extra}");
        let e = match Case::parse(&text, "test.toml", Path::new(".")).and_then(|c| c.resolve()) {
            Ok(_) => panic!("accepted: {extra}"),
            Err(e) => e.to_string(),
        };
        assert!(e.contains(key), "{extra}: {e}");
        assert!(e.contains(words), "{extra}: {e}");
    }
}
