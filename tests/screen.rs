//! Screening: the ranking over a grid equals the one from running the
//! coefficients on each point separately; the CLI writes both tables.

use qheat::case::{Case, CaseKey};
use qheat::leads::Side;
use qheat::scba::Silent;
use qheat::sweep::screen::{Rank, ScreenTask, ranking};
use qheat::sweep::{Axis, Grid, MemoryStore, SweepOptions, run};
use qheat::thermo::of_case::case_coefficients;
use std::path::Path;

fn barrier_path() -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo/thermionic-barrier.toml")
}

const HEIGHT: &str = "device.region.0.offset_ev=0.08:0.16:3";
const FERMI: &str = "leads.left.fermi_level_ev+leads.right.fermi_level_ev=0.02:0.08:3";

/// 3×3 grid of barrier heights and Fermi levels: ranking by ZT and by power
/// factor equals the order of coefficients computed point by point (an
/// identity of the machinery, so the values must agree exactly: the same
/// deterministic computation runs either way).
#[test]
fn ranking_equals_pointwise_coefficients() {
    let case = Case::load(&barrier_path()).unwrap();
    let grid = Grid::new(vec![
        Axis::parse(HEIGHT).unwrap(),
        Axis::parse(FERMI).unwrap(),
    ])
    .unwrap();
    let table = run(
        &case,
        &grid,
        &ScreenTask::new(Rank::Zt, None).unwrap(),
        &MemoryStore::new(),
        SweepOptions::default(),
        &mut Silent,
    )
    .unwrap();
    assert_eq!(table.rows.len(), 9);
    let mut zt = Vec::new();
    let mut pf = Vec::new();
    for i in 0..9 {
        let [h, mu] = grid.values(i)[..] else {
            unreachable!()
        };
        let c = case
            .with(CaseKey::RegionOffset(0), h)
            .unwrap()
            .with(CaseKey::LeadFermiLevel(Side::Left), mu)
            .unwrap()
            .with(CaseKey::LeadFermiLevel(Side::Right), mu)
            .unwrap();
        let k = case_coefficients(&c, &mut Silent).unwrap().coefficients;
        assert_eq!(table.rows[i][table.column("zt").unwrap()], k.zt);
        assert_eq!(
            table.rows[i][table.column("fermi_level_ev").unwrap()],
            mu,
            "the Fermi level axis moved both leads"
        );
        zt.push(k.zt);
        pf.push(k.power_factor_w_per_k2);
    }
    let sorted = |v: &[f64]| {
        let mut o: Vec<usize> = (0..v.len()).collect();
        o.sort_by(|&a, &b| v[b].total_cmp(&v[a]).then(a.cmp(&b)));
        o
    };
    assert_eq!(ranking(&table, "zt").unwrap(), sorted(&zt));
    assert_eq!(
        ranking(&table, "power_factor_w_per_k2").unwrap(),
        sorted(&pf)
    );
    // The two rankings differ on this grid, so the test tells them apart.
    assert_ne!(sorted(&zt), sorted(&pf));
}

/// The CLI end to end: screen.csv in grid order, ranking.csv best first
/// with a rank column, for ZT and for cooling power.
#[test]
fn cli_screen_end_to_end() {
    let tmp = tempfile::tempdir().unwrap();
    let exe = env!("CARGO_BIN_EXE_qheat");
    let out = tmp.path().join("s");
    let o = std::process::Command::new(exe)
        .args(["screen", barrier_path().to_str().unwrap()])
        .args(["--vary", HEIGHT, "--vary", FERMI, "--rank", "zt", "-o"])
        .arg(&out)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let screen = std::fs::read_to_string(out.join("screen.csv")).unwrap();
    assert_eq!(screen.lines().count(), 10);
    let ranking = std::fs::read_to_string(out.join("ranking.csv")).unwrap();
    let mut lines = ranking.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    assert_eq!(&header[..2], &["rank", "point"]);
    let z = header.iter().position(|c| *c == "zt").unwrap();
    // Numbers, and the converged flag as true/false.
    let cell = |x: &str| match x {
        "true" => 1.0,
        "false" => 0.0,
        _ => x.parse().unwrap(),
    };
    let rows: Vec<Vec<f64>> = lines.map(|l| l.split(',').map(cell).collect()).collect();
    assert_eq!(rows.len(), 9);
    let conv = header.iter().position(|c| *c == "converged").unwrap();
    assert!(rows.iter().all(|r| r[conv] == 1.0), "{ranking}");
    for (k, r) in rows.iter().enumerate() {
        assert_eq!(r[0], (k + 1) as f64);
        if k > 0 {
            assert!(r[z] <= rows[k - 1][z]);
        }
    }

    let out = tmp.path().join("c");
    let o = std::process::Command::new(exe)
        .args(["screen", barrier_path().to_str().unwrap()])
        .args([
            "--vary",
            "device.region.0.offset_ev=0.08:0.12:2",
            "--rank",
            "cooling",
        ])
        .args([
            "--hot", "305", "--cold", "300", "--points", "9", "--json", "-o",
        ])
        .arg(&out)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let s: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(s["ranked_column"], "max_cooling_power_w");
    // The range-end flag sits before `converged`; these thermionic curves
    // peak inside their range (as the cooler's own test finds), so no
    // point's maximum is a lower bound.
    let ranking = std::fs::read_to_string(out.join("ranking.csv")).unwrap();
    let header: Vec<&str> = ranking.lines().next().unwrap().split(',').collect();
    let end = header.iter().position(|c| *c == "max_at_range_end");
    assert_eq!(end.map(|e| header[e + 1]), Some("converged"), "{ranking}");
    for line in ranking.lines().skip(1) {
        let cells: Vec<&str> = line.split(',').collect();
        assert_eq!(cells[end.unwrap()], "false", "{ranking}");
    }
    let o = std::process::Command::new(exe)
        .args(["screen", barrier_path().to_str().unwrap()])
        .args(["--vary", HEIGHT, "--rank", "cooling", "-o"])
        .arg(&out)
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(1), "cooling needs temperatures");
}
