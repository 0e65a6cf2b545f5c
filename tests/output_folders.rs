//! Result folders: qheat records what it wrote (`.qheat-manifest.json`),
//! replaces only that, never removes or overwrites files it did not write
//! unless `--overwrite` says so for same-named files, never removes a
//! sweep's point store, works with `-o .`, and cleans what killed runs left.
//!
//! All runs use a small coherent chain (no Born loop), so each solve takes
//! well under a second.

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

const MANIFEST: &str = ".qheat-manifest.json";

fn chain_case(name: &str, phonons: bool) -> String {
    let phonon = if phonons {
        "[[phonon]]\nenergy_ev = 0.04\ncoupling_ev2 = 1e-3\n"
    } else {
        ""
    };
    format!(
        r#"name = "{name}"
[device]
kind = "chain"
spacing_nm = 0.5
length_nm = 5.0
effective_mass = 0.1
[[device.region]]
from_nm = 1.0
to_nm = 2.0
offset_ev = 0.05
[leads.left]
fermi_level_ev = 0.05
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.05
temperature_k = 300.0
[bias]
voltage_v = 0.02
{phonon}[grid]
step_ev = 0.005
"#
    )
}

fn write(dir: &Path, file: &str, text: &str) -> PathBuf {
    let p = dir.join(file);
    std::fs::write(&p, text).unwrap();
    p
}

fn qheat(dir: Option<&Path>, args: &[&str]) -> Output {
    let mut c = Command::new(env!("CARGO_BIN_EXE_qheat"));
    c.args(args).args(["--threads", "1"]);
    if let Some(d) = dir {
        c.current_dir(d);
    }
    c.output().expect("run qheat")
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}

/// Every entry of a folder, hidden ones included, sorted.
fn entries(dir: &Path) -> BTreeSet<String> {
    std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect()
}

fn manifest(dir: &Path) -> serde_json::Value {
    let text = std::fs::read_to_string(dir.join(MANIFEST))
        .unwrap_or_else(|e| panic!("{} has no manifest: {e}", dir.display()));
    serde_json::from_str(&text).unwrap()
}

fn manifest_entries(dir: &Path) -> BTreeSet<String> {
    manifest(dir)["entries"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_str().unwrap().to_string())
        .collect()
}

/// Every file below `dir` with its bytes, by relative path.
fn snapshot(dir: &Path) -> Vec<(PathBuf, Vec<u8>)> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else {
                let bytes = std::fs::read(&p).unwrap();
                out.push((p.strip_prefix(dir).unwrap().to_path_buf(), bytes));
            }
        }
    }
    out.sort();
    out
}

/// A process id that is certainly not running: a child that has exited.
fn dead_pid() -> u32 {
    let mut child = Command::new(env!("CARGO_BIN_EXE_qheat"))
        .arg("--version")
        .stdout(std::process::Stdio::null())
        .spawn()
        .unwrap();
    let pid = child.id();
    child.wait().unwrap();
    pid
}

#[test]
fn a_folder_with_files_of_the_user_is_refused_and_left_as_it_was() {
    let tmp = tempfile::tempdir().unwrap();
    let case_text = chain_case("chain", false);
    let case = write(tmp.path(), "chain.toml", &case_text);
    let out = tmp.path().join("mine");
    std::fs::create_dir(&out).unwrap();
    write(&out, "chain.toml", &case_text);
    write(&out, "notes.txt", "what I tried today\n");
    let before = snapshot(&out);
    for command in [
        vec!["solve", s(&case)],
        vec!["coefficients", s(&case)],
        vec!["sweep", s(&case), "--vary", "bias.voltage_v=0:0.02:2"],
    ] {
        let mut args = command.clone();
        args.extend(["-o", s(&out), "--quiet"]);
        let o = qheat(None, &args);
        assert_eq!(o.status.code(), Some(1), "{command:?}: {}", stderr(&o));
        let e = stderr(&o);
        assert!(e.contains(s(&out)), "names the folder: {e}");
        assert!(
            e.contains("notes.txt") && e.contains("chain.toml"),
            "lists the files: {e}"
        );
        assert!(e.contains("--overwrite"), "gives the way out: {e}");
        assert_eq!(snapshot(&out), before, "{command:?} touched the folder");
        assert_eq!(
            entries(&out),
            ["chain.toml", "notes.txt"].map(String::from).into(),
            "{command:?} left something behind"
        );
    }
    // A long list is cut short with a count.
    for i in 0..12 {
        write(&out, &format!("data{i:02}.csv"), "1\n");
    }
    let o = qheat(None, &["solve", s(&case), "-o", s(&out), "--quiet"]);
    assert_eq!(o.status.code(), Some(1));
    let e = stderr(&o);
    assert!(e.contains("holds 14 entries"), "{e}");
    assert!(e.contains("and 4 more"), "{e}");
}

#[test]
fn a_previous_result_is_replaced_and_only_its_files_go() {
    let tmp = tempfile::tempdir().unwrap();
    let inelastic = write(tmp.path(), "born.toml", &chain_case("born", true));
    let coherent = write(tmp.path(), "chain.toml", &chain_case("chain", false));
    let out = tmp.path().join("result");
    let o = qheat(None, &["solve", s(&inelastic), "-o", s(&out), "--quiet"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    // The report of the result belongs to it.
    let o = qheat(None, &["report", s(&out), "--quiet"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let first = manifest_entries(&out);
    assert_eq!(manifest(&out)["kind"], "solve");
    for f in [
        "self_energy_retarded.npy",
        "convergence.svg",
        "report.html",
        "summary.json",
    ] {
        assert!(first.contains(f), "manifest lacks {f}: {first:?}");
    }
    let mut listed = first.clone();
    listed.insert(MANIFEST.into());
    assert_eq!(entries(&out), listed, "the manifest lists every entry");

    // A coherent solve writes no self-energy, no Born-loop figure and no
    // report: those of the old result go, nothing else stays.
    let o = qheat(None, &["solve", s(&coherent), "-o", s(&out), "--quiet"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let second = manifest_entries(&out);
    for gone in ["self_energy_retarded.npy", "convergence.svg", "report.html"] {
        assert!(!out.join(gone).exists(), "old {gone} left");
        assert!(!second.contains(gone));
    }
    let mut listed = second.clone();
    listed.insert(MANIFEST.into());
    assert_eq!(entries(&out), listed);
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    assert_eq!(summary["case_name"], "chain");
    assert!(manifest(&out)["program"]["version"].is_string());

    // Another kind of result replaces it the same way.
    let o = qheat(
        None,
        &["coefficients", s(&coherent), "-o", s(&out), "--quiet"],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert_eq!(manifest(&out)["kind"], "coefficients");
    assert_eq!(
        entries(&out),
        [MANIFEST, "summary.json"].map(String::from).into()
    );
}

#[test]
fn a_solve_into_a_sweep_folder_is_refused_and_the_sweep_still_resumes() {
    let tmp = tempfile::tempdir().unwrap();
    let case = write(tmp.path(), "chain.toml", &chain_case("chain", false));
    let out = tmp.path().join("sweep");
    let sweep = |extra: &[&str]| {
        let mut args = vec![
            "sweep",
            s(&case),
            "--vary",
            "bias.voltage_v=0:0.02:3",
            "-o",
            s(&out),
            "--quiet",
            "--json",
        ];
        args.extend(extra);
        qheat(None, &args)
    };
    let o = sweep(&[]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let table = std::fs::read(out.join("sweep.csv")).unwrap();
    assert!(manifest_entries(&out).contains("points"));
    let store = snapshot(&out.join("points"));
    assert!(store.len() >= 3, "one file per point: {store:?}");
    let folder = snapshot(&out);

    for command in ["solve", "coefficients"] {
        for extra in [&[][..], &["--overwrite"][..]] {
            let mut args = vec![command, s(&case), "-o", s(&out), "--quiet"];
            args.extend(extra);
            let o = qheat(None, &args);
            assert_eq!(o.status.code(), Some(1), "{args:?}: {}", stderr(&o));
            let e = stderr(&o);
            assert!(e.contains("points"), "names the store: {e}");
            assert_eq!(snapshot(&out), folder, "{args:?} changed the folder");
        }
    }
    let o = qheat(
        None,
        &[
            "generator",
            s(&case),
            "--hot",
            "310",
            "--cold",
            "300",
            "--points",
            "3",
            "-o",
            s(&out),
            "--quiet",
        ],
    );
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    assert_eq!(snapshot(&out), folder);

    // Started again, the sweep finds every point and writes the same table.
    let o = sweep(&[]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let summary: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(summary["computed_this_run"].as_u64(), Some(0));
    assert_eq!(std::fs::read(out.join("sweep.csv")).unwrap(), table);
    assert_eq!(snapshot(&out.join("points")), store);
}

#[test]
fn dot_is_a_result_folder_when_empty_or_qheats() {
    let tmp = tempfile::tempdir().unwrap();
    let case = write(tmp.path(), "chain.toml", &chain_case("chain", false));
    let here = tmp.path().join("here");
    std::fs::create_dir(&here).unwrap();
    for round in 0..2 {
        let o = qheat(Some(&here), &["solve", s(&case), "-o", ".", "--quiet"]);
        assert_eq!(o.status.code(), Some(0), "round {round}: {}", stderr(&o));
        assert!(here.join("summary.json").is_file());
        let mut listed = manifest_entries(&here);
        listed.insert(MANIFEST.into());
        assert_eq!(entries(&here), listed, "round {round}");
    }
    // The folder itself was never renamed: the parent holds only it and the
    // case.
    assert_eq!(
        entries(tmp.path()),
        ["chain.toml", "here"].map(String::from).into()
    );
}

#[test]
fn overwrite_writes_beside_the_files_of_the_user() {
    let tmp = tempfile::tempdir().unwrap();
    let case_text = chain_case("chain", false);
    let case = write(tmp.path(), "chain.toml", &case_text);
    let out = tmp.path().join("shared");
    std::fs::create_dir(&out).unwrap();
    write(&out, "chain.toml", &case_text);
    write(&out, "notes.txt", "keep me\n");
    // A file with the name of a result file: --overwrite says it may go.
    write(&out, "sites.csv", "my own table\n");
    let keep = |dir: &Path| {
        (
            std::fs::read(dir.join("chain.toml")).unwrap(),
            std::fs::read(dir.join("notes.txt")).unwrap(),
        )
    };
    let before = keep(&out);
    for round in 0..2 {
        let o = qheat(
            None,
            &["solve", s(&case), "-o", s(&out), "--overwrite", "--quiet"],
        );
        assert_eq!(o.status.code(), Some(0), "round {round}: {}", stderr(&o));
        assert_eq!(keep(&out), before, "round {round}: a user file changed");
        let listed = manifest_entries(&out);
        assert!(listed.contains("summary.json") && listed.contains("sites.csv"));
        assert!(!listed.contains("notes.txt") && !listed.contains("chain.toml"));
        assert!(
            std::fs::read_to_string(out.join("sites.csv"))
                .unwrap()
                .starts_with("x_nm"),
            "sites.csv is qheat's"
        );
    }
    // Without the option the user's files are still in the way.
    let o = qheat(None, &["solve", s(&case), "-o", s(&out), "--quiet"]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    let e = stderr(&o);
    assert!(e.contains("notes.txt") && !e.contains("sites.csv"), "{e}");
    assert_eq!(keep(&out), before);
}

#[test]
fn leftovers_of_killed_runs_are_cleaned_and_never_in_the_way() {
    let tmp = tempfile::tempdir().unwrap();
    let case = write(tmp.path(), "chain.toml", &chain_case("chain", false));
    let dead = dead_pid();

    // A folder a killed run left with nothing but its staging folder.
    let here = tmp.path().join("here");
    let partial = here.join(format!(".qheat-partial-{dead}"));
    std::fs::create_dir_all(&partial).unwrap();
    write(&partial, "summary.json", "{");
    let o = qheat(Some(&here), &["solve", s(&case), "-o", ".", "--quiet"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(!partial.exists(), "the dead run's staging folder is kept");

    // A previous result with a dead run's staging folder and temporary
    // file: both go, the next result replaces the old one.
    let out = tmp.path().join("out");
    let o = qheat(None, &["solve", s(&case), "-o", s(&out), "--quiet"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let partial = out.join(format!(".qheat-partial-{dead}"));
    std::fs::create_dir(&partial).unwrap();
    write(&partial, "sites.csv", "half");
    let tmp_file = write(&out, &format!(".report.html.tmp-{dead}"), "<html");
    // What the previous layout left beside the folder is cleaned as well.
    let beside = tmp.path().join(format!(".out.partial-{dead}"));
    std::fs::create_dir(&beside).unwrap();
    let o = qheat(None, &["solve", s(&case), "-o", s(&out), "--quiet"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(!partial.exists() && !tmp_file.exists() && !beside.exists());
    let mut listed = manifest_entries(&out);
    listed.insert(MANIFEST.into());
    assert_eq!(entries(&out), listed);

    // The staging folder of a run that is still going (pid 1 always
    // runs) makes the folder busy; it is left alone.
    let live = out.join(".qheat-partial-1");
    std::fs::create_dir(&live).unwrap();
    let before = snapshot(&out);
    let o = qheat(None, &["solve", s(&case), "-o", s(&out), "--quiet"]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    assert!(stderr(&o).contains("process 1"), "{}", stderr(&o));
    assert!(live.exists());
    assert_eq!(snapshot(&out), before);
}

/// A commit killed after the old result began to go: the folder has no
/// summary.json, a manifest listing old and new entries, some of each, and
/// the dead run's staging folder. The next result replaces all of it.
#[test]
fn a_folder_left_by_a_killed_commit_is_replaced_without_asking() {
    use qheat::output::{FolderOptions, Staging};
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("out");
    std::fs::create_dir(&out).unwrap();
    let dead = dead_pid();
    write(
        &out,
        MANIFEST,
        r#"{"program": {"name": "qheat", "version": "0"}, "kind": "solve",
            "entries": ["old.csv", "new.csv", "summary.json", "sites.csv"]}"#,
    );
    write(&out, "old.csv", "old");
    write(&out, "new.csv", "new");
    let partial = out.join(format!(".qheat-partial-{dead}"));
    std::fs::create_dir(&partial).unwrap();
    write(&partial, "summary.json", "{}");

    let stage = Staging::with_options(&out, &FolderOptions::new("solve")).unwrap();
    assert!(!partial.exists());
    stage.write("summary.json", b"{\"fresh\": true}").unwrap();
    stage.write("sites.csv", b"x_nm\n").unwrap();
    stage.commit().unwrap();
    assert_eq!(
        entries(&out),
        [MANIFEST, "sites.csv", "summary.json"]
            .map(String::from)
            .into()
    );
    assert_eq!(
        manifest_entries(&out),
        ["sites.csv", "summary.json"].map(String::from).into()
    );
}
