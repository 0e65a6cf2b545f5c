//! `qheat check` prints the resolved case; the Hermitian part of the
//! self-energy is a setting of scattering, so the summary names it only
//! when the case scatters (phonons or dephasing).

use std::path::Path;
use std::process::Command;

fn check(case: &Path) -> String {
    let o = Command::new(env!("CARGO_BIN_EXE_qheat"))
        .arg("check")
        .arg(case)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    String::from_utf8_lossy(&o.stdout).into_owned() + &String::from_utf8_lossy(&o.stderr)
}

#[test]
fn hermitian_part_is_mentioned_only_with_scattering() {
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo");
    // thermionic-barrier is coherent, peltier-barrier has a phonon mode.
    let coherent = check(&demo.join("thermionic-barrier.toml"));
    assert!(coherent.contains("none (coherent)"), "{coherent}");
    assert!(!coherent.contains("Hermitian"), "{coherent}");
    let phonons = check(&demo.join("peltier-barrier.toml"));
    assert!(
        phonons.contains("Hermitian part of Σ_phonon neglected"),
        "{phonons}"
    );
    // dephasing alone also scatters
    let text = std::fs::read_to_string(demo.join("thermionic-barrier.toml")).unwrap()
        + "\n[dephasing]\nstrength_ev2 = 1e-4\n";
    let tmp = tempfile::tempdir().unwrap();
    let path = tmp.path().join("dephased.toml");
    std::fs::write(&path, text).unwrap();
    let dephased = check(&path);
    assert!(
        dephased.contains("Hermitian part of Σ_phonon"),
        "{dephased}"
    );
}
