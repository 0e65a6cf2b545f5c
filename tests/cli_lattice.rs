//! The lattice through the real binary: `qheat coefficients` and
//! `qheat screen --rank zt` use κ_ph computed from the case's `[lattice]`,
//! say where κ_ph came from, and the ranking by the true ZT differs from
//! the one with κ_ph = 0.

use qheat::case::Case;
use std::path::{Path, PathBuf};
use std::process::Command;

const LATTICE: &str = "\n[lattice]\nmass_u = 28.0\nspring_n_per_m = 30.0\n";
const HEIGHT: &str = "device.region.0.offset_ev=0.0:0.2:5";

fn barrier() -> String {
    let p = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo/thermionic-barrier.toml");
    std::fs::read_to_string(p).unwrap()
}

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

fn qheat(args: &[&str]) -> std::process::Output {
    let o = Command::new(env!("CARGO_BIN_EXE_qheat"))
        .args(args)
        .output()
        .unwrap();
    assert!(
        o.status.success(),
        "qheat {args:?}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    o
}

/// ranking.csv as (point, column values by name).
fn ranking(dir: &Path) -> (Vec<String>, Vec<Vec<f64>>) {
    let text = std::fs::read_to_string(dir.join("ranking.csv")).unwrap();
    let mut lines = text.lines();
    let header: Vec<String> = lines
        .next()
        .unwrap()
        .split(',')
        .map(str::to_string)
        .collect();
    let cell = |x: &str| match x {
        "true" => 1.0,
        "false" => 0.0,
        _ => x.parse().unwrap(),
    };
    let rows = lines.map(|l| l.split(',').map(cell).collect()).collect();
    (header, rows)
}

fn summary(dir: &Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(dir.join("summary.json")).unwrap()).unwrap()
}

#[test]
fn screen_by_zt_ranks_with_the_lattice_conductance() {
    let tmp = tempfile::tempdir().unwrap();
    let with = write(tmp.path(), "lat.toml", &format!("{}{LATTICE}", barrier()));
    let without = write(tmp.path(), "bare.toml", &barrier());
    let (lo, no) = (tmp.path().join("L"), tmp.path().join("N"));
    let o = qheat(&[
        "screen",
        with.to_str().unwrap(),
        "--vary",
        HEIGHT,
        "--rank",
        "zt",
        "-o",
        lo.to_str().unwrap(),
    ]);
    let shown = String::from_utf8_lossy(&o.stdout);
    assert!(
        shown.contains("κ_ph computed from the case's [lattice]"),
        "{shown}"
    );
    qheat(&[
        "screen",
        without.to_str().unwrap(),
        "--vary",
        HEIGHT,
        "--rank",
        "zt",
        "-o",
        no.to_str().unwrap(),
    ]);
    assert_eq!(summary(&lo)["phonon_conductance_source"], "lattice");
    assert_eq!(summary(&no)["phonon_conductance_source"], "none");

    // κ_ph does not depend on the barrier: the lattice's conductance at
    // the reference temperature on every row (the same computation, so
    // equal to rounding in the CSV).
    let kph = Case::load(&with)
        .unwrap()
        .resolve()
        .unwrap()
        .phonon_conductance_at(300.0)
        .unwrap();
    assert!(kph > 1e-11, "κ_ph {kph:e}");
    let (h, rows) = ranking(&lo);
    let col = |n: &str| h.iter().position(|c| c == n).unwrap();
    let (g, s, ke, kp, zt, t) = (
        col("conductance_s"),
        col("seebeck_v_per_k"),
        col("thermal_conductance_w_per_k"),
        col("phonon_conductance_w_per_k"),
        col("zt"),
        col("temperature_k"),
    );
    for r in &rows {
        assert!(
            (r[kp] / kph - 1.0).abs() < 1e-12,
            "{} against {kph:e}",
            r[kp]
        );
        // ZT = S²GT/(κe + κph) (the definition, to rounding).
        let want = r[s] * r[s] * r[g] * r[t] / (r[ke] + r[kp]);
        assert!(
            (r[zt] / want - 1.0).abs() < 1e-12,
            "{} against {want}",
            r[zt]
        );
    }
    let (hn, bare) = ranking(&no);
    let pn = hn.iter().position(|c| c == "point").unwrap();
    let order = |rows: &[Vec<f64>], p: usize| rows.iter().map(|r| r[p]).collect::<Vec<_>>();
    // κ_e falls with the barrier height and κ_ph does not: with κ_ph the
    // best barrier is a lower one than without.
    assert_ne!(order(&rows, col("point")), order(&bare, pn));
    assert_ne!(rows[0][col("point")], bare[0][pn]);
}

#[test]
fn coefficients_say_where_kappa_came_from() {
    let tmp = tempfile::tempdir().unwrap();
    let with = write(tmp.path(), "lat.toml", &format!("{}{LATTICE}", barrier()));
    let given = write(
        tmp.path(),
        "given.toml",
        &format!(
            "{}{LATTICE}\n[thermal]\nphonon_conductance_w_per_k = 1e-12\n",
            barrier()
        ),
    );
    let out = tmp.path().join("c");
    let o = qheat(&[
        "coefficients",
        with.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
    ]);
    let shown = String::from_utf8_lossy(&o.stdout);
    assert!(
        shown.contains("κ_ph computed from the case's [lattice]"),
        "{shown}"
    );
    let s = summary(&out);
    assert_eq!(s["coefficients"]["phonon_conductance_source"], "lattice");
    let kph = Case::load(&with)
        .unwrap()
        .resolve()
        .unwrap()
        .phonon_conductance_at(300.0)
        .unwrap();
    let got = s["coefficients"]["phonon_conductance_w_per_k"]
        .as_f64()
        .unwrap();
    assert!((got / kph - 1.0).abs() < 1e-12, "{got:e} against {kph:e}");

    let out = tmp.path().join("g");
    let o = qheat(&[
        "coefficients",
        given.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
    ]);
    let shown = String::from_utf8_lossy(&o.stdout);
    assert!(shown.contains("κ_ph given"), "{shown}");
    let s = summary(&out);
    assert_eq!(s["coefficients"]["phonon_conductance_source"], "given");
    assert_eq!(s["coefficients"]["phonon_conductance_w_per_k"], 1e-12);
    let warned = s["warnings"].as_array().unwrap();
    assert!(
        warned
            .iter()
            .any(|w| w.as_str().unwrap().contains("overrides")),
        "{warned:?}"
    );
}

#[test]
fn solve_writes_the_phonon_spectrum_and_its_figure() {
    let tmp = tempfile::tempdir().unwrap();
    let with = write(tmp.path(), "lat.toml", &format!("{}{LATTICE}", barrier()));
    let out = tmp.path().join("s");
    let o = qheat(&["solve", with.to_str().unwrap(), "-o", out.to_str().unwrap()]);
    let shown = String::from_utf8_lossy(&o.stdout);
    assert!(shown.contains("phonon band top ħω"), "{shown}");
    let s = summary(&out);
    let l = &s["lattice"];
    assert_eq!(l["phonon_conductance_source"], "lattice");
    assert_eq!(l["temperature_k"], 300.0);
    let kph = l["phonon_conductance_w_per_k"].as_f64().unwrap();
    let csv = std::fs::read_to_string(out.join("phonon_spectrum.csv")).unwrap();
    let mut lines = csv.lines();
    assert_eq!(
        lines.next().unwrap(),
        "omega_rad_per_ps,energy_mev,transmission,kappa_integrand_w_per_k_per_rad_per_ps,weight_rad_per_ps"
    );
    let rows: Vec<Vec<f64>> = lines
        .map(|r| r.split(',').map(|x| x.parse().unwrap()).collect())
        .collect();
    assert_eq!(rows.len() as u64, l["frequency_points"].as_u64().unwrap());
    // The file holds κ_ph: Σ weight × integrand (rounding of the printed
    // numbers only).
    let sum: f64 = rows.iter().map(|r| r[3] * r[4]).sum();
    assert!((sum / kph - 1.0).abs() < 1e-10, "{sum:e} against {kph:e}");
    // A uniform chain: Ξ = 1 below the band top (common practice: the
    // perfect chain transmits every travelling wave), ħω = ħ × ω.
    let top = l["band_top_mev"].as_f64().unwrap();
    for r in &rows {
        assert!((r[2] - 1.0).abs() < 1e-9, "Ξ = {} at {} meV", r[2], r[1]);
        assert!(r[1] < top);
        assert!((r[1] / (r[0] * 0.658_211_956_9) - 1.0).abs() < 1e-9);
    }
    let svg = std::fs::read_to_string(out.join("phonon_transmission.svg")).unwrap();
    assert!(svg.contains("Phonon transmission"), "figure title missing");

    // Without a lattice, neither the files nor the summary object.
    let bare = write(tmp.path(), "bare.toml", &barrier());
    let out = tmp.path().join("b");
    qheat(&["solve", bare.to_str().unwrap(), "-o", out.to_str().unwrap()]);
    assert!(!out.join("phonon_spectrum.csv").exists());
    assert!(summary(&out).get("lattice").is_none());
}
