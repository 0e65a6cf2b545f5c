//! The `[[contact]]` section: what it builds, what it refuses (naming key,
//! expectation and a hint), and a probe moved along the channel by
//! setting `contact.0.first_cell`.

use qheat::case::{Case, CaseKey};
use qheat::model::ContactMode;
use std::path::Path;

const BASE: &str = r#"
name = "probe"

[device]
kind = "chain"
spacing_nm = 0.5
length_nm = 10.0
effective_mass = 0.2

[[device.region]]
from_nm = 5.0
to_nm = 5.5
offset_ev = 0.1

[leads.left]
fermi_level_ev = 0.05
temperature_k = 40.0

[leads.right]
fermi_level_ev = 0.04
temperature_k = 60.0
"#;

fn parse(extra: &str) -> Result<Case, qheat::case::CaseError> {
    Case::parse(&format!("{BASE}{extra}"), "test.toml", Path::new("."))
}

fn error(extra: &str) -> String {
    match parse(extra) {
        Ok(_) => panic!("accepted:\n{extra}"),
        Err(e) => e.to_string(),
    }
}

#[test]
fn contacts_resolve_into_the_problem() {
    let case = parse(
        r#"
[[contact]]
name = "probe"
first_cell = 4
cell_count = 2
gamma_ev = 0.001
mode = "voltage"

[[contact]]
name = "drain"
cells = [15, 17]
gamma_ev = 0.002
fermi_level_ev = 0.0
temperature_k = 30.0

[[contact]]
name = "thermometer"
cells = [8]
gamma_ev = 0.003
mode = "temperature"
"#,
    )
    .unwrap_or_else(|e| panic!("{e}"));
    let r = case.resolve().unwrap();
    let c = &r.problem.contacts;
    assert_eq!(c.len(), 3);
    assert_eq!(c[0].cells, vec![4, 5]);
    assert_eq!(c[0].mode, ContactMode::Voltage);
    // a voltage probe keeps the mean lead temperature and starts at the mean µ
    assert!((c[0].temperature_k - 50.0).abs() < 1e-12);
    assert!((c[0].fermi_level_ev - 0.045).abs() < 1e-12);
    assert_eq!(c[1].cells, vec![15, 17]);
    assert_eq!((c[1].fermi_level_ev, c[1].temperature_k), (0.0, 30.0));
    assert_eq!(c[2].mode, ContactMode::Temperature);
    assert!(c[2].polarisation.is_none());
    let text = r.describe();
    assert!(text.contains("\"probe\" on cells 4–5"), "{text}");
    assert!(text.contains("temperature probe"), "{text}");
    // the first cell is a numeric key: a probe scan is a sweep over it
    let moved = case.with(CaseKey::ContactFirstCell(0), 9.0).unwrap();
    assert_eq!(
        moved.resolve().unwrap().problem.contacts[0].cells,
        vec![9, 10]
    );
    assert!("contact.0.first_cell".parse::<CaseKey>().is_ok());
}

#[test]
fn bad_contacts_are_refused_with_key_and_hint() {
    let e = error("[[contact]]\nname = \"p\"\ngamma_ev = 0.001\nmode = \"voltage\"\n");
    assert!(
        e.contains("contact.0.cells") && e.contains("first_cell"),
        "{e}"
    );
    let e =
        error("[[contact]]\nname = \"p\"\ncells = [3, 25]\ngamma_ev = 0.001\nmode = \"voltage\"\n");
    assert!(
        e.contains("contact.0.cells") && e.contains("0 to 19"),
        "{e}"
    );
    let e = error("[[contact]]\nname = \"p\"\ncells = [3]\ngamma_ev = 0.001\n");
    assert!(
        e.contains("contact.0.fermi_level_ev") && e.contains("voltage"),
        "{e}"
    );
    let e = error(
        "[[contact]]\nname = \"p\"\ncells = [3]\ngamma_ev = 0.001\nmode = \"temperature\"\ntemperature_k = 3.0\n",
    );
    assert!(
        e.contains("contact.0.temperature_k") && e.contains("hint"),
        "{e}"
    );
    let e = error("[[contact]]\nname = \"p\"\ncells = [3]\ngamma_ev = 0.001\nmode = \"volts\"\n");
    assert!(e.contains("contact.0.mode") && e.contains("voltage"), "{e}");
    let e = error(
        "[[contact]]\nname = \"p\"\ncells = [3]\ngamma_ev = 0.001\nmode = \"voltage\"\npolarisation = 0.5\n",
    );
    assert!(
        e.contains("contact.0.polarisation") && e.contains("explicit"),
        "{e}"
    );
    let e = error("[[contact]]\nname = \"p\"\ncells = [3]\ngamma_ev = -1.0\nmode = \"voltage\"\n");
    assert!(e.contains("contact.0.gamma_ev"), "{e}");
    let e = error(
        "[[contact]]\nname = \"p\"\ncells = [3]\ngamma_ev = 0.1\nmode = \"voltage\"\n\
         [[contact]]\nname = \"p\"\ncells = [4]\ngamma_ev = 0.1\nmode = \"voltage\"\n",
    );
    assert!(e.contains("contact.1.name"), "{e}");
    let e = error("[contact]\nname = \"p\"\n");
    assert!(e.contains("[[contact]]"), "{e}");
}

#[test]
fn polarisation_needs_explicit_spin_and_a_direction() {
    let spin = BASE.replace(
        "effective_mass = 0.2",
        "effective_mass = 0.2\nspin = \"explicit\"",
    );
    let with = |extra: &str| Case::parse(&format!("{spin}{extra}"), "t.toml", Path::new("."));
    let ok = with(
        "[[contact]]\nname = \"p\"\ncells = [3]\ngamma_ev = 0.001\nfermi_level_ev = 0.05\n\
         polarisation = 0.8\npolarisation_direction = [1, 0, 1]\n",
    )
    .unwrap_or_else(|e| panic!("{e}"));
    let c = &ok.resolve().unwrap().problem.contacts[0];
    let p = c.polarisation.unwrap();
    assert_eq!(p.strength, 0.8);
    let h = 0.5_f64.sqrt();
    assert!((p.direction[0] - h).abs() < 1e-15 && (p.direction[2] - h).abs() < 1e-15);
    let e = with(
        "[[contact]]\nname = \"p\"\ncells = [3]\ngamma_ev = 0.001\nfermi_level_ev = 0.05\n\
         polarisation = 1.5\n",
    )
    .unwrap_err()
    .to_string();
    assert!(
        e.contains("contact.0.polarisation") && e.contains("0 to 1"),
        "{e}"
    );
    let e = with(
        "[[contact]]\nname = \"p\"\ncells = [3]\ngamma_ev = 0.001\nfermi_level_ev = 0.05\n\
         polarisation = 0.5\npolarisation_direction = [0, 0, 0]\n",
    )
    .unwrap_err()
    .to_string();
    assert!(e.contains("contact.0.polarisation_direction"), "{e}");
}

/// The binary on the probe demo: summary.json lists the probe with its
/// solved level, the terminal prints its line, and the probe reads a level
/// between the two leads' (where in between depends on the fringe of the
/// standing wave it sits on) while carrying no current.
#[test]
fn solve_reports_the_probe_in_summary_and_terminal() {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("scan");
    let run = std::process::Command::new(env!("CARGO_BIN_EXE_qheat"))
        .args(["solve", "cases-demo/probe-scan.toml", "-o"])
        .arg(&out)
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&run.stdout);
    assert!(
        run.status.success(),
        "{}",
        String::from_utf8_lossy(&run.stderr)
    );
    assert!(stdout.contains("contact probe"), "{stdout}");
    assert!(stdout.contains("zero-current residual"), "{stdout}");
    let s: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    let c = &s["contacts"][0];
    assert_eq!(c["mode"], "voltage");
    assert_eq!(c["solved"], true);
    let mu = c["fermi_level_ev"].as_f64().unwrap();
    let op = &s["operating_point"];
    let (ml, mr) = (
        op["fermi_level_left_ev"].as_f64().unwrap(),
        op["fermi_level_right_ev"].as_f64().unwrap(),
    );
    // V > 0 puts the left lead below the right one (V = −(µ_L − µ_R)/e)
    assert!(
        mu > ml.min(mr) && mu < ml.max(mr),
        "probe reads {mu}, not between {ml} and {mr}"
    );
    let i = c["current_a"].as_f64().unwrap();
    let i1 = s["results"]["current_a"].as_f64().unwrap();
    assert!(i.abs() < 1e-9 * i1.abs(), "probe current {i} against {i1}");
    assert!(std::fs::read_to_string(out.join("device.svg")).is_ok());
}
