//! Figures of sweeps, cooler curves and screening grids: written by the
//! real binary, valid SVG, and holding the series they promise.

use std::process::Command;

fn qheat() -> Command {
    Command::new(env!("CARGO_BIN_EXE_qheat"))
}

fn svg_text(path: &std::path::Path) -> String {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    roxmltree::Document::parse(&text)
        .unwrap_or_else(|e| panic!("{} is not valid SVG: {e}", path.display()));
    text
}

#[test]
fn sweep_and_cooler_figures() {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("sweep");
    let run = qheat()
        .args([
            "sweep",
            "cases-demo/thermionic-barrier.toml",
            "--quiet",
            "--vary",
            "bias.voltage_v=-0.02:0.02:5",
            "-o",
        ])
        .arg(&out)
        .output()
        .unwrap();
    assert!(
        run.status.success(),
        "{}",
        String::from_utf8_lossy(&run.stderr)
    );
    let a = svg_text(&out.join("sweep_A.svg"));
    assert!(a.contains("current_a") && a.contains("bias.voltage_v"));
    let w = svg_text(&out.join("sweep_W.svg"));
    for s in [
        "heat_current_left_w",
        "heat_current_right_w",
        "lattice_power_w",
        "electrical_power_w",
    ] {
        assert!(w.contains(s), "missing series {s}");
    }
    // Two axes: a map over the grid.
    let out2 = tmp.path().join("sweep2");
    let run = qheat()
        .args([
            "sweep",
            "cases-demo/thermionic-barrier.toml",
            "--quiet",
            "--vary",
            "leads.left.temperature_k=300:320:3",
            "--vary",
            "bias.voltage_v=-0.01:0.01:3",
            "-o",
        ])
        .arg(&out2)
        .output()
        .unwrap();
    assert!(run.status.success());
    let m = svg_text(&out2.join("sweep_map.svg"));
    assert!(m.contains("current_a"));

    let cool = tmp.path().join("cooler");
    let run = qheat()
        .args([
            "cooler",
            "cases-demo/thermionic-barrier.toml",
            "--hot",
            "310",
            "--cold",
            "300",
            "--quiet",
            "--points",
            "11",
            "-o",
        ])
        .arg(&cool)
        .output()
        .unwrap();
    assert!(
        run.status.success(),
        "{}",
        String::from_utf8_lossy(&run.stderr)
    );
    let p = svg_text(&cool.join("cooler_power.svg"));
    assert!(p.contains("cooling power"));
    // Every point converged: no crosses, no count in the legend.
    assert!(!p.contains("not converged") && !a.contains("not converged"));
    let c = svg_text(&cool.join("cooler_cop.svg"));
    assert!(c.contains("Carnot COP"));
}

/// A sweep whose first point is cut off after two Born iterations: that
/// point is crossed in each figure and counted in its legend, and the
/// run ends with exit 2 as for any point that did not converge.
#[test]
fn sweep_figures_cross_the_points_that_did_not_converge() {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("cut");
    let run = qheat()
        .args([
            "sweep",
            "cases-demo/peltier-barrier.toml",
            "--quiet",
            "--vary",
            "solver.max_iterations=2:40:2",
            "-o",
        ])
        .arg(&out)
        .output()
        .unwrap();
    assert_eq!(
        run.status.code(),
        Some(2),
        "{}",
        String::from_utf8_lossy(&run.stderr)
    );
    for figure in ["sweep_A.svg", "sweep_W.svg"] {
        let text = svg_text(&out.join(figure));
        assert!(
            text.contains("not converged (1 of 2 points)"),
            "{figure} does not count the point cut off"
        );
    }
}
