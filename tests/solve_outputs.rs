//! What `qheat solve` writes and prints: every number of the terminal
//! summary is in summary.json, the voltage drops add up for both bias
//! signs, and no CSV cell reads as negative zero.

use serde_json::Value;
use std::path::Path;
use std::process::Command;

fn demo(name: &str) -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("cases-demo")
        .join(format!("{name}.toml"))
}

fn solve(case: &Path, out: &Path) -> String {
    let o = Command::new(env!("CARGO_BIN_EXE_qheat"))
        .args(["--threads", "1", "solve"])
        .arg(case)
        .arg("-o")
        .arg(out)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    String::from_utf8(o.stdout).unwrap()
}

fn summary(out: &Path) -> Value {
    serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap()
}

/// A number as printed, its value in base units and half a unit of its
/// last printed digit (the rounding the text allows).
#[derive(Debug)]
struct Printed {
    value: f64,
    half_step: f64,
}

fn si_scale(word: &str) -> f64 {
    let word = word.trim_end_matches([',', ':', ')', ';']);
    let units = ["V", "A", "W", "S"];
    if units.contains(&word) {
        return 1.0;
    }
    let mut chars = word.chars();
    let Some(p) = chars.next() else { return 1.0 };
    if !units.contains(&chars.as_str()) {
        return 1.0;
    }
    match p {
        'T' => 1e12,
        'G' => 1e9,
        'M' => 1e6,
        'k' => 1e3,
        'm' => 1e-3,
        'µ' => 1e-6,
        'n' => 1e-9,
        'p' => 1e-12,
        'f' => 1e-15,
        'a' => 1e-18,
        _ => 1.0,
    }
}

/// Every number of a line (a digit not inside a word), scaled by the SI
/// prefix of the unit after it.
fn numbers(line: &str) -> Vec<Printed> {
    let words: Vec<&str> = line.split_whitespace().collect();
    let mut out = Vec::new();
    for (w, word) in words.iter().enumerate() {
        let text = word.trim_end_matches([',', ':', ')', ';']);
        let text = text.trim_start_matches('(');
        let Ok(v) = text.parse::<f64>() else { continue };
        let (mantissa, exp) = match text.split_once('e') {
            Some((m, e)) => (m, e.parse::<i32>().unwrap()),
            None => (text, 0),
        };
        let decimals = mantissa.split_once('.').map_or(0, |(_, d)| d.len()) as i32;
        let scale = words.get(w + 1).map_or(1.0, |u| si_scale(u));
        out.push(Printed {
            value: v * scale,
            half_step: 0.5 * 10f64.powi(exp - decimals) * scale,
        });
    }
    out
}

fn at<'a>(v: &'a Value, path: &str) -> &'a Value {
    path.split('.')
        .fold(v, |v, k| match k.strip_suffix("[last]") {
            Some(list) => v[list].as_array().unwrap().last().unwrap(),
            None => &v[k],
        })
}

/// Each line of the terminal summary and the summary.json keys of its
/// numbers, in the order printed. A line that is not listed, or a line
/// with more or fewer numbers, fails the test: a new terminal number must
/// get its key here and in summary.json.
const LINES: [(&str, &[&str]); 16] = [
    (
        "operating point",
        &[
            "results.voltage_v",
            "operating_point.temperature_left_k",
            "operating_point.temperature_right_k",
        ],
    ),
    (
        "Born loop",
        &["scba.iterations", "scba.history[last].residual"],
    ),
    ("current", &["results.current_a"]),
    ("conductance", &["results.conductance_s"]),
    (
        "heat current",
        &[
            "results.heat_current_left_w",
            "results.heat_current_right_w",
        ],
    ),
    ("electrical power", &["results.electrical_power_w"]),
    (
        "lattice power",
        &[
            "results.lattice_power_w",
            "results.lattice_power_phonon_side_w",
        ],
    ),
    (
        "most heated",
        &[
            "results.hottest_cell_w.x_nm",
            "results.hottest_cell_w.value",
        ],
    ),
    // The cell of least lattice power: cooled (negative) or heated least.
    (
        "most cooled",
        &[
            "results.coolest_cell_w.x_nm",
            "results.coolest_cell_w.value",
        ],
    ),
    (
        "least heated",
        &[
            "results.coolest_cell_w.x_nm",
            "results.coolest_cell_w.value",
        ],
    ),
    (
        "largest drop",
        &[
            "results.largest_drop_v.x_nm",
            "results.largest_drop_v.value",
        ],
    ),
    (
        "Fermi-level drop",
        &[
            "results.contact_drop_left_v",
            "results.interior_drop_v",
            "results.contact_drop_right_v",
        ],
    ),
    (
        "lattice",
        &[
            "lattice.phonon_conductance_w_per_k",
            "lattice.temperature_k",
            "lattice.band_top_mev",
            "lattice.frequency_points",
        ],
    ),
    ("κ_ph", &[]),
    ("spectrum in", &[]),
    (
        "ledger",
        &[
            "ledger.charge_relative",
            "ledger.lattice_relative",
            "ledger.leads_lattice_relative",
            "ledger.heat_relative",
            "ledger.energy_relative",
        ],
    ),
];

#[test]
fn every_number_the_terminal_prints_is_in_summary_json() {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("pb");
    let text = solve(&demo("peltier-barrier"), &out);
    let s = summary(&out);
    let mut checked = 0;
    for line in text.lines() {
        let trimmed = line.trim_start();
        if trimmed.starts_with("results ") {
            continue;
        }
        let (label, keys) = LINES
            .iter()
            .find(|(l, _)| trimmed.starts_with(l))
            .unwrap_or_else(|| panic!("terminal line without its summary keys: {line}"));
        let printed = numbers(trimmed.strip_prefix(label).unwrap());
        assert_eq!(
            printed.len(),
            keys.len(),
            "{line}: {printed:?} for {keys:?}"
        );
        for (p, key) in printed.iter().zip(keys.iter()) {
            let v = at(&s, key)
                .as_f64()
                .unwrap_or_else(|| panic!("{key} missing from summary.json ({line})"));
            // The printed text is the value rounded to its last digit.
            assert!(
                (v - p.value).abs() <= p.half_step * (1.0 + 1e-9),
                "{line}: printed {} but {key} = {v}",
                p.value
            );
            checked += 1;
        }
    }
    // The demo has scattering and a lattice, so all fifteen lines are
    // printed (the lattice line with four numbers).
    assert_eq!(checked, 30, "{text}");
}

/// A short barrier with a phonon, small enough to solve in well under a
/// second, at a bias of `v` volts.
fn small_case(v: f64) -> String {
    format!(
        "name = \"drops\"\n\
         [device]\nkind = \"chain\"\nspacing_nm = 0.5\nlength_nm = 12.0\neffective_mass = 0.07\n\
         [[device.region]]\nfrom_nm = 5.0\nto_nm = 7.0\noffset_ev = 0.1\n\
         [leads.left]\nfermi_level_ev = 0.05\ntemperature_k = 300.0\n\
         [leads.right]\nfermi_level_ev = 0.05\ntemperature_k = 300.0\n\
         [bias]\nvoltage_v = {v}\n\
         [[phonon]]\nenergy_ev = 0.036\ncoupling_ev2 = 2e-3\n\
         [grid]\nstep_ev = 0.004\n\
         [solver]\ntolerance = 1e-9\nmixing = \"anderson\"\n"
    )
}

fn column(csv: &str, name: &str) -> Vec<f64> {
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let c = header.iter().position(|h| *h == name).unwrap();
    lines
        .map(|l| l.split(',').nth(c).unwrap().parse().unwrap())
        .collect()
}

fn no_negative_zero(dir: &Path) {
    for entry in std::fs::read_dir(dir).unwrap() {
        let path = entry.unwrap().path();
        if path.extension().is_some_and(|e| e == "csv") {
            let text = std::fs::read_to_string(&path).unwrap();
            for (i, line) in text.lines().enumerate() {
                for cell in line.split(',') {
                    let negative_zero = cell
                        .parse::<f64>()
                        .is_ok_and(|v| v == 0.0 && cell.starts_with('-'));
                    assert!(
                        !negative_zero,
                        "{} line {}: `{cell}`",
                        path.display(),
                        i + 1
                    );
                }
            }
        }
    }
}

/// The per-cell drops of sites.csv add up to the interior drop of
/// summary.json, which is the drop of the local Fermi level from the first
/// to the last cell; with the two contact drops they add up to
/// (µ_1 − µ_2)/e = −V. All three are identities of the bookkeeping, so the
/// tolerance is rounding of a few hundred additions (1e-12 V). The same
/// convention holds for both bias signs: the drops change sign with V.
#[test]
fn voltage_drops_add_up_for_both_bias_signs() {
    let tmp = tempfile::tempdir().unwrap();
    for v in [0.02, -0.02] {
        let case = tmp.path().join(format!("drops{v}.toml"));
        std::fs::write(&case, small_case(v)).unwrap();
        let out = tmp.path().join(format!("out{v}"));
        solve(&case, &out);
        let s = summary(&out);
        let r = &s["results"];
        let f = |k: &str| r[k].as_f64().unwrap();
        let sites = std::fs::read_to_string(out.join("sites.csv")).unwrap();
        let drops = column(&sites, "voltage_drop_v");
        let mu = column(&sites, "fermi_level_local_ev");
        let sum: f64 = drops.iter().sum();
        assert!(
            (sum - f("interior_drop_v")).abs() < 1e-12,
            "V = {v}: {sum} vs {r}"
        );
        let across = mu[0] - mu[mu.len() - 1];
        assert!(
            (across - f("interior_drop_v")).abs() < 1e-12,
            "V = {v}: {across}"
        );
        assert_eq!(
            *drops.last().unwrap(),
            0.0,
            "the last cell has no next cell"
        );
        let total = f("contact_drop_left_v") + f("interior_drop_v") + f("contact_drop_right_v");
        assert!(
            (total + v).abs() < 1e-12,
            "V = {v}: drops add up to {total}"
        );
        // Each piece is a drop along the current's push: the same sign as −V.
        for k in [
            "contact_drop_left_v",
            "interior_drop_v",
            "contact_drop_right_v",
        ] {
            assert!(f(k) * -v > 0.0, "V = {v}: {k} = {}", f(k));
        }
        no_negative_zero(&out);
    }
}

/// Key paths of a JSON value: `a.b` inside objects, `a[]` for the elements
/// of a list of objects; lists of plain values and empty lists are leaves.
fn paths(v: &Value, at: &str, out: &mut Vec<String>) {
    match v {
        Value::Object(m) => {
            for (k, x) in m {
                let p = if at.is_empty() {
                    k.clone()
                } else {
                    format!("{at}.{k}")
                };
                paths(x, &p, out);
            }
        }
        Value::Array(a) if a.first().is_some_and(Value::is_object) => {
            for x in a {
                paths(x, &format!("{at}[]"), out);
            }
        }
        _ => out.push(at.to_string()),
    }
}

/// A small case whose lattice is damped (so its summary has the
/// `self_heating` object the demo's undamped lattice does not give).
const DAMPED: &str = r#"name = "damped"
[device]
kind = "chain"
spacing_nm = 0.5
length_nm = 4.0
effective_mass = 0.07
[leads.left]
fermi_level_ev = 0.06
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.06
temperature_k = 300.0
[bias]
voltage_v = 0.04
[[phonon]]
energy_ev = 0.04
coupling_ev2 = 2e-3
[grid]
step_ev = 0.005
[lattice]
mass_u = 12.0
spring_n_per_m = 2.0
damping_per_ps = 4.0
"#;

/// Every key of a real solve summary is documented in docs/outputs.md (by
/// its path, or inside an object documented as a whole), and every
/// documented key is in the file: the document and the file cannot drift.
/// The keys are those of the Peltier demo and of a case with a damped
/// lattice together.
#[test]
fn solve_summary_keys_and_documentation_agree() {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("pb");
    solve(&demo("peltier-barrier"), &out);
    let s = summary(&out);
    let mut found = Vec::new();
    paths(&s, "", &mut found);
    let damped = tmp.path().join("damped.toml");
    std::fs::write(&damped, DAMPED).unwrap();
    solve(&damped, &tmp.path().join("damped"));
    paths(&summary(&tmp.path().join("damped")), "", &mut found);
    // The electrostatics object comes from a case with [electrostatics].
    solve(&demo("doped-barrier-cooler"), &tmp.path().join("es"));
    paths(&summary(&tmp.path().join("es")), "", &mut found);
    // a case with channels writes the `channels` object
    let spin = tmp.path().join("spin");
    solve(&demo("spin-valve-seebeck"), &spin);
    let mut spin_paths = Vec::new();
    paths(&summary(&spin), "", &mut spin_paths);
    found.extend(spin_paths.into_iter().filter(|p| p.starts_with("channels")));
    // A result reduced to a small size budget has the `result_files` object.
    let small = tmp.path().join("small");
    let o = Command::new(env!("CARGO_BIN_EXE_qheat"))
        .args(["--threads", "1", "--quiet", "solve"])
        .arg(demo("peltier-barrier"))
        .args(["--result-budget-mb", "1", "-o"])
        .arg(&small)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    paths(&summary(&small), "", &mut found);
    // a case with attached (polarised) contacts writes the `contacts` list
    let attached = tmp.path().join("attached");
    solve(&demo("spin-detector"), &attached);
    let mut contact_paths = Vec::new();
    paths(&summary(&attached), "", &mut contact_paths);
    found.extend(
        contact_paths
            .into_iter()
            .filter(|p| p.starts_with("contacts")),
    );
    found.sort();
    found.dedup();
    let docs = qheat::output::schema::keys::summary_docs();
    let solve_doc = docs
        .iter()
        .find(|d| d.file == "summary.json of solve")
        .unwrap();
    let documented: Vec<&str> = solve_doc.fields.iter().map(|f| f.name.as_str()).collect();
    for p in &found {
        let covered = documented
            .iter()
            .any(|d| p == d || p.starts_with(&format!("{d}.")) || p.starts_with(&format!("{d}[]")));
        assert!(covered, "summary.json key {p} is not documented");
    }
    // Written only by a solve split over more than one MPI rank (a build
    // with the `mpi` feature under mpirun): tests/mpi_energy.rs checks that
    // it is there.
    let only_under_mpi = ["energy_split_ranks"];
    for d in documented.iter().filter(|d| !only_under_mpi.contains(d)) {
        let present = found
            .iter()
            .any(|p| p == d || p.starts_with(&format!("{d}.")) || p.starts_with(&format!("{d}[]")));
        assert!(present, "documented key {d} is not in a solve summary");
    }
}
