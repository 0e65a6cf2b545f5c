//! Sweeps through the library: I–V antisymmetry of a mirror-symmetric
//! device, zero current at zero bias and equal temperatures, grid order,
//! warm starts, and the CLI end to end.

use qheat::case::Case;
use qheat::progress::Silent;
use qheat::sweep::{Axis, Grid, MemoryStore, ObservablesTask, SweepOptions, run};
use std::path::Path;

/// A mirror-symmetric chain: a barrier in the middle, optional phonons
/// over the whole device, bias dropped at the leads.
fn symmetric_case(phonons: bool) -> Case {
    let mut text = String::from(
        r#"
name = "mirror"
[device]
kind = "chain"
spacing_nm = 0.25
length_nm = 5.0
effective_mass = 0.1
[[device.region]]
from_nm = 2.0
to_nm = 3.0
offset_ev = 0.06
[leads.left]
fermi_level_ev = 0.04
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.04
temperature_k = 300.0
[grid]
step_ev = 0.004
[solver]
tolerance = 1e-11
"#,
    );
    if phonons {
        text.push_str(
            "[[phonon]]\nenergy_ev = 0.04\ncoupling_ev2 = 3e-3\nfrom_nm = 0.0\nto_nm = 5.0\n",
        );
    }
    Case::parse(&text, "mirror.toml", Path::new(".")).unwrap()
}

/// Mirror symmetry: reflecting the device swaps the leads, so
/// I(−V) = −I(V) exactly (symmetry of the model, common practice). The
/// coherent case is one linear solve per energy (rounding only: 1e-12);
/// with phonons each point is a Born loop converged to 1e-11, whose
/// residual bounds the mismatch (1e-8 leaves room for the amplification
/// by the current's sensitivity to Σ0).
#[test]
fn current_is_odd_in_voltage_and_zero_at_zero_bias() {
    for (phonons, tol) in [(false, 1e-12), (true, 1e-8)] {
        let case = symmetric_case(phonons);
        let grid = Grid::new(vec![Axis::parse("bias.voltage_v=-0.04:0.04:9").unwrap()]).unwrap();
        let t = run(
            &case,
            &grid,
            &ObservablesTask::default(),
            &MemoryStore::new(),
            SweepOptions::default(),
            &mut Silent,
        )
        .unwrap();
        let i = t.column("current_a").unwrap();
        let conv = t.column("converged").unwrap();
        let imax = t.rows[8][i].abs();
        assert!(imax > 1e-8, "a real current flows: {imax}");
        for k in 0..9 {
            assert_eq!(t.rows[k][conv], 1.0);
            let (a, b) = (t.rows[k][i], t.rows[8 - k][i]);
            assert!(
                (a + b).abs() <= tol * imax,
                "phonons {phonons}: I({}) = {a}, I({}) = {b}",
                t.rows[k][0],
                t.rows[8 - k][0]
            );
        }
        // I = 0 at V = 0 and equal temperatures (detailed balance; with
        // phonons the bath sits at the lead temperature).
        assert!(
            t.rows[4][i].abs() <= 1e-10 * imax,
            "I(0) = {}",
            t.rows[4][i]
        );
        if phonons {
            // Warm starts: the later points of the line need fewer Born
            // iterations than the cold first one.
            let it = t.column("iterations").unwrap();
            let first = t.rows[0][it];
            let later: f64 = (1..9).map(|k| t.rows[k][it]).sum::<f64>() / 8.0;
            assert!(later < first, "warm {later} vs cold {first}");
        }
    }
}

/// Row-major order, last axis fastest, and each row's inputs really set.
#[test]
fn grid_order_and_inputs() {
    let case = symmetric_case(false);
    let grid = Grid::new(vec![
        Axis::parse("leads.left.temperature_k=300:320:2").unwrap(),
        Axis::parse("bias.voltage_v=0:0.02:3").unwrap(),
    ])
    .unwrap();
    let t = run(
        &case,
        &grid,
        &ObservablesTask::default(),
        &MemoryStore::new(),
        SweepOptions {
            max_parallel_lines: Some(2),
            memory_budget_bytes: None,
        },
        &mut Silent,
    )
    .unwrap();
    assert_eq!(t.columns[0], "leads.left.temperature_k");
    assert_eq!(t.columns[1], "bias.voltage_v");
    let v = t.column("voltage_v").unwrap();
    let expect = [
        (300.0, 0.0),
        (300.0, 0.01),
        (300.0, 0.02),
        (320.0, 0.0),
        (320.0, 0.01),
        (320.0, 0.02),
    ];
    for (row, (tk, volt)) in t.rows.iter().zip(expect) {
        assert_eq!(row[0], tk);
        assert_eq!(row[1], volt);
        assert!((row[v] - volt).abs() < 1e-15, "{row:?}");
    }
    // A hot left lead drives a thermoelectric current at V = 0.
    let i = t.column("current_a").unwrap();
    assert!(t.rows[0][i].abs() < 1e-20, "{}", t.rows[0][i]);
    assert!(t.rows[3][i].abs() > 1e-10, "{}", t.rows[3][i]);
    // A bad key is bad input before anything runs: the axis is refused
    // where it is read, with the close match.
    let e = Axis::parse("bias.voltage=0:1:2").unwrap_err();
    assert!(e.to_string().contains("bias.voltage_v"), "{e}");
}

/// The CLI end to end: sweep.csv with one row per point, summary.json,
/// exit code 0; a malformed --vary is exit 1.
#[test]
fn cli_sweep_end_to_end() {
    let tmp = tempfile::tempdir().unwrap();
    let case = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo/thermionic-barrier.toml");
    let out = tmp.path().join("s");
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_qheat"))
        .args(["sweep", case.to_str().unwrap(), "--vary"])
        .arg("device.region.0.offset_ev=0.08:0.12:3")
        .arg("-o")
        .arg(&out)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let stdout = String::from_utf8_lossy(&o.stdout);
    assert!(stdout.contains("3 points"), "{stdout}");
    let csv = std::fs::read_to_string(out.join("sweep.csv")).unwrap();
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    assert_eq!(header[0], "device.region.0.offset_ev");
    for col in [
        "current_a",
        "heat_current_left_w",
        "heat_current_right_w",
        "energy_current_left_w",
        "lattice_power_w",
        "electrical_power_w",
        "conductance_s",
        "ledger_energy_relative",
        "iterations",
        "converged",
    ] {
        assert!(header.contains(&col), "{col} missing from {header:?}");
    }
    let g = header.iter().position(|c| *c == "conductance_s").unwrap();
    let gs: Vec<f64> = lines
        .map(|l| l.split(',').nth(g).unwrap().parse().unwrap())
        .collect();
    assert_eq!(gs.len(), 3);
    // A higher barrier conducts less.
    assert!(gs[0] > gs[1] && gs[1] > gs[2], "{gs:?}");
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    assert_eq!(summary["points"], 3);
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_qheat"))
        .args([
            "sweep",
            case.to_str().unwrap(),
            "--vary",
            "bias.voltage_v=0:1",
        ])
        .arg("-o")
        .arg(&out)
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&o.stderr).contains("START:STOP:COUNT"));
}

/// A voltage probe scanned along the channel: every point of the sweep
/// carries the probe's level, temperature, current and heat current. A
/// floating probe draws no net current (its defining condition, solved to
/// the loop's tolerance) and, in a coherent device under a small bias, reads
/// a level between the two leads' (it averages what the two leads inject;
/// M. Büttiker, Phys. Rev. Lett. 57, 1761 (1986)).
#[test]
fn a_probe_scan_reads_the_probe_at_every_point() {
    let mut text = String::from(
        r#"
name = "scan"
[device]
kind = "chain"
spacing_nm = 0.25
length_nm = 5.0
effective_mass = 0.1
[leads.left]
fermi_level_ev = 0.04
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.04
temperature_k = 300.0
[bias]
voltage_v = -0.01
[grid]
step_ev = 0.004
[solver]
tolerance = 1e-11
"#,
    );
    text.push_str(
        "[[contact]]\nname = \"p\"\nfirst_cell = 3\ngamma_ev = 0.002\nmode = \"voltage\"\n",
    );
    let case = Case::parse(&text, "scan.toml", Path::new(".")).unwrap();
    let task = ObservablesTask::of(&case.resolve().unwrap());
    let grid = Grid::new(vec![Axis::parse("contact.0.first_cell=3:15:3").unwrap()]).unwrap();
    let t = run(
        &case,
        &grid,
        &task,
        &MemoryStore::new(),
        SweepOptions::default(),
        &mut Silent,
    )
    .unwrap();
    let col = |n: &str| {
        t.column(n)
            .unwrap_or_else(|| panic!("no column {n} in {:?}", t.columns))
    };
    let (mu, cur) = (col("contact_p_fermi_level_ev"), col("contact_p_current_a"));
    let gross = col("current_a");
    col("contact_p_temperature_k");
    col("contact_p_heat_current_w");
    assert_eq!(t.rows.len(), 3);
    for row in &t.rows {
        // µ_L = 0.045 eV, µ_R = 0.035 eV with V = −0.01 V split evenly.
        assert!(
            row[mu] > 0.035 && row[mu] < 0.045,
            "probe reads {}",
            row[mu]
        );
        // Zero net current: the Born loop's tolerance (1e-11) on the
        // probe's residual, relative to the device current.
        assert!(
            row[cur].abs() <= 1e-9 * row[gross].abs(),
            "probe draws {}",
            row[cur]
        );
    }
}
