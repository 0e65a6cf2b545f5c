//! Tables of grid and curve commands read as people write numbers: sweep
//! axes without float noise, flags as true/false, no negative zero.

use std::path::Path;
use std::process::Command;

fn qheat(args: &[&str], out: &Path) {
    let o = Command::new(env!("CARGO_BIN_EXE_qheat"))
        .args(["--quiet", "--threads", "1"])
        .args(args)
        .arg("-o")
        .arg(out)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
}

fn demo(name: &str) -> String {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("cases-demo")
        .join(format!("{name}.toml"))
        .display()
        .to_string()
}

/// Cells of a CSV file by column name.
fn cells(text: &str, name: &str) -> Vec<String> {
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let c = header.iter().position(|h| *h == name).unwrap();
    lines
        .map(|l| l.split(',').nth(c).unwrap().to_string())
        .collect()
}

fn no_negative_zero(path: &Path) {
    let text = std::fs::read_to_string(path).unwrap();
    for (i, line) in text.lines().enumerate() {
        for cell in line.split(',') {
            let bad = cell.starts_with('-') && cell.parse::<f64>().is_ok_and(|v| v == 0.0);
            assert!(!bad, "{} line {}: `{cell}`", path.display(), i + 1);
        }
    }
}

/// A sweep over 0 to 0.1 V in 11 points (step 0.01) writes the axis as
/// 0, 0.01, …, 0.1: the plain formula gave 0.030000000000000002 and
/// 0.06999999999999999 for two of them.
#[test]
fn sweep_axis_has_no_float_noise_and_flags_read_true() {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("s");
    let case = demo("thermionic-barrier");
    qheat(&["sweep", &case, "--vary", "bias.voltage_v=0:0.1:11"], &out);
    let csv = std::fs::read_to_string(out.join("sweep.csv")).unwrap();
    let axis = cells(&csv, "bias.voltage_v");
    let want: Vec<String> = (0..=10)
        .map(|i| match i {
            0 => "0".to_string(),
            10 => "0.1".to_string(),
            i => format!("0.{i:02}"),
        })
        .collect();
    assert_eq!(axis, want);
    assert!(
        cells(&csv, "converged").iter().all(|c| c == "true"),
        "{csv}"
    );
    assert!(cells(&csv, "iterations").iter().all(|c| c == "0"), "{csv}");
    no_negative_zero(&out.join("sweep.csv"));
}

/// The cooler's input power I·V is −0.0 at V = 0 for a negative current;
/// the CSV writes 0, and the converged column true.
#[test]
fn cooler_table_has_no_negative_zero() {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("c");
    let case = demo("thermionic-barrier");
    qheat(
        &[
            "cooler", &case, "--hot", "305", "--cold", "300", "--points", "3",
        ],
        &out,
    );
    let path = out.join("cooler.csv");
    let csv = std::fs::read_to_string(&path).unwrap();
    assert_eq!(cells(&csv, "input_power_w")[0], "0", "{csv}");
    assert!(
        cells(&csv, "converged").iter().all(|c| c == "true"),
        "{csv}"
    );
    no_negative_zero(&path);
}
