//! Bad input through the real binary: every case in tests/bad-cases, a
//! missing case file, an unwritable result folder, bad command-line options
//! and a case too large for memory. Each must end with its exit code and a
//! message that says what is wrong, never with a panic.
//!
//! Exit codes (the CLI's contract, README): 0 ok, 1 bad input, 2 solver fault, 3 I/O.
//! A case file that cannot be read (missing, a folder, no permission) is
//! bad input (1): the user named the wrong thing. Only failing to write
//! results is an I/O failure (3).

use qheat::case::Case;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn qheat(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_qheat"))
        .args(args)
        .env_remove("RUST_BACKTRACE")
        .output()
        .expect("run qheat")
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// No panic, no backtrace hint: what a user must never see.
fn assert_no_panic(o: &Output, what: &str) {
    let e = stderr(o);
    for bad in ["panicked", "backtrace", "RUST_BACKTRACE"] {
        assert!(!e.contains(bad), "{what}: stderr shows `{bad}`:\n{e}");
    }
}

fn bad_cases() -> Vec<PathBuf> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/bad-cases");
    let mut files: Vec<_> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "toml"))
        .collect();
    files.sort();
    files
}

fn expectations(text: &str) -> Vec<String> {
    text.lines()
        .take_while(|l| l.starts_with('#'))
        .filter_map(|l| l.strip_prefix("# expect:"))
        .map(|s| s.trim().to_string())
        .collect()
}

#[test]
fn every_bad_case_exits_1_with_file_position_and_expected_fragments() {
    let files = bad_cases();
    assert!(files.len() >= 94, "only {} bad cases", files.len());
    let tmp = tempfile::tempdir().unwrap();
    let mut failures = Vec::new();
    for path in &files {
        let shown_path = path.display().to_string();
        let text = std::fs::read_to_string(path).unwrap();
        let expect = expectations(&text);
        assert!(!expect.is_empty(), "{shown_path} has no `# expect:` line");
        // The library tells where the error is; the binary must show it.
        let location = Case::load(path)
            .and_then(|c| c.resolve())
            .expect_err("a bad case must not load")
            .location;
        let out_dir = tmp.path().join(path.file_stem().unwrap());
        let runs = [
            ("check", qheat(&["check", &shown_path])),
            (
                "solve",
                qheat(&["solve", &shown_path, "-o", out_dir.to_str().unwrap()]),
            ),
        ];
        for (cmd, o) in &runs {
            let what = format!("qheat {cmd} {shown_path}");
            assert_no_panic(o, &what);
            let e = stderr(o);
            if o.status.code() != Some(1) {
                failures.push(format!("{what}: exit {:?}, not 1\n{e}", o.status.code()));
            }
            let at = match location {
                Some((l, c)) => format!("{shown_path}:{l}:{c}: "),
                None => format!("{shown_path}: "),
            };
            if !e.contains(&at) {
                failures.push(format!("{what}: `{at}` missing in\n{e}"));
            }
            for fragment in &expect {
                if !e.contains(fragment.as_str()) {
                    failures.push(format!("{what}: `{fragment}` missing in\n{e}"));
                }
            }
            if !o.stdout.is_empty() {
                failures.push(format!(
                    "{what}: printed on stdout: {}",
                    String::from_utf8_lossy(&o.stdout)
                ));
            }
        }
        // Bad input is refused before anything is written.
        if out_dir.exists() {
            failures.push(format!("{shown_path}: solve created {}", out_dir.display()));
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

#[test]
fn a_missing_case_file_is_bad_input() {
    let tmp = tempfile::tempdir().unwrap();
    let missing = tmp.path().join("no-such-case.toml");
    let m = missing.to_str().unwrap();
    for args in [vec!["check", m], vec!["solve", m, "-o", m]] {
        let o = qheat(&args);
        assert_no_panic(&o, m);
        assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
        let e = stderr(&o);
        assert!(e.contains(m), "names the file: {e}");
        assert!(e.contains("readable case file"), "{e}");
    }
    // a folder given as the case
    let o = qheat(&["check", tmp.path().to_str().unwrap()]);
    assert_no_panic(&o, "folder as case");
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
}

fn good_case(dir: &Path) -> PathBuf {
    let path = dir.join("tiny.toml");
    std::fs::write(
        &path,
        r#"name = "tiny"
[device]
kind = "chain"
spacing_nm = 0.5
length_nm = 5.0
effective_mass = 0.1
[leads.left]
fermi_level_ev = 0.05
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.05
temperature_k = 300.0
[bias]
voltage_v = 0.01
[grid]
step_ev = 0.005
"#,
    )
    .unwrap();
    path
}

#[test]
fn an_unwritable_result_folder_is_an_io_failure() {
    let tmp = tempfile::tempdir().unwrap();
    let case = good_case(tmp.path());
    // A regular file where a parent folder should be: no permission trick
    // (tests may run as root, who may write anywhere).
    let blocker = tmp.path().join("a-file");
    std::fs::write(&blocker, "not a folder").unwrap();
    let out = blocker.join("results");
    let o = qheat(&[
        "solve",
        case.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
        "--quiet",
    ]);
    assert_no_panic(&o, "unwritable out");
    assert_eq!(o.status.code(), Some(3), "{}", stderr(&o));
    let e = stderr(&o);
    assert!(e.contains("a-file"), "names the path: {e}");
    assert!(e.starts_with("error: "), "{e}");
    assert_eq!(e.lines().count(), 1, "one clear line: {e}");
}

#[test]
fn bad_command_lines_are_usage_errors_with_exit_1() {
    let tmp = tempfile::tempdir().unwrap();
    let case = good_case(tmp.path());
    let c = case.to_str().unwrap();
    let cases: &[(&[&str], &str)] = &[
        (&[], "Usage"),
        (&["frobnicate", c], "unrecognized subcommand"),
        (&["solve"], "required"),
        (&["solve", c, "--no-such-option"], "unexpected argument"),
        (&["solve", c, "--threads", "many"], "invalid value"),
        (&["solve", c, "--threads=-3"], "invalid value"),
        (
            &["check", c, "--threads", "0"],
            "--threads must be at least 1",
        ),
        (
            &["solve", c, "--threads", "0"],
            "--threads must be at least 1",
        ),
    ];
    for (args, fragment) in cases {
        let o = qheat(args);
        let what = format!("qheat {}", args.join(" "));
        assert_no_panic(&o, &what);
        assert_eq!(o.status.code(), Some(1), "{what}: {}", stderr(&o));
        assert!(stderr(&o).contains(fragment), "{what}: {}", stderr(&o));
    }
    // Help and version are answers, not errors.
    for args in [["--help"], ["--version"]] {
        let o = qheat(&args);
        assert_eq!(o.status.code(), Some(0), "{args:?}");
        assert!(!o.stdout.is_empty());
    }
}

#[test]
fn a_case_too_large_for_memory_is_refused_up_front_with_the_estimate() {
    let tmp = tempfile::tempdir().unwrap();
    let case = good_case(tmp.path());
    let out = tmp.path().join("out");
    let o = Command::new(env!("CARGO_BIN_EXE_qheat"))
        .args(["solve", case.to_str().unwrap(), "-o", out.to_str().unwrap()])
        .env("QHEAT_MEMORY_LIMIT_BYTES", "1000")
        .output()
        .unwrap();
    assert_no_panic(&o, "memory limit");
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    let e = stderr(&o);
    assert!(e.contains("GiB"), "gives the estimate: {e}");
    assert!(e.contains("needs about"), "{e}");
    assert!(
        e.contains("coarser grid.step_ev"),
        "suggests a way out: {e}"
    );
    assert!(!out.exists(), "nothing written before the refusal");
    // The same case runs under a generous limit.
    let o = Command::new(env!("CARGO_BIN_EXE_qheat"))
        .args([
            "solve",
            case.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
            "--quiet",
        ])
        .env("QHEAT_MEMORY_LIMIT_BYTES", "100000000000")
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(out.join("summary.json").exists());
}

/// One command line that must be refused: its exit code and fragments of
/// the message (the option, what was expected, what was found).
struct BadLine {
    args: Vec<String>,
    code: i32,
    expect: &'static [&'static str],
}

#[test]
fn bad_options_are_refused_with_the_option_expected_and_found() {
    let tmp = tempfile::tempdir().unwrap();
    let case = good_case(tmp.path());
    let c = case.to_str().unwrap().to_string();
    let blocker = tmp.path().join("a-file");
    std::fs::write(&blocker, "keep me").unwrap();
    let under_file = blocker.join("results").to_str().unwrap().to_string();
    let b = blocker.to_str().unwrap().to_string();
    // A folder of someone else's files must not be replaced by results.
    let foreign = tmp.path().join("notes");
    std::fs::create_dir(&foreign).unwrap();
    std::fs::write(foreign.join("thesis.txt"), "keep me").unwrap();
    let f = foreign.to_str().unwrap().to_string();
    let out = |name: &str| tmp.path().join(name).to_str().unwrap().to_string();
    let line = |cmd: &[&str], code: i32, expect: &'static [&'static str]| BadLine {
        args: cmd.iter().map(|a| a.replace("CASE", &c)).collect(),
        code,
        expect,
    };
    let vary = |spec: &str, expect: &'static [&'static str]| BadLine {
        args: vec![
            "sweep".into(),
            c.clone(),
            "--vary".into(),
            spec.into(),
            "-o".into(),
            out("sweep"),
        ],
        code: 1,
        expect,
    };
    let cases = vec![
        // --vary strings
        vary(
            "bias.voltage_v",
            &["--vary `bias.voltage_v`", "found no `=`"],
        ),
        vary(
            "bias.voltage_v=0:1",
            &["START:STOP:COUNT", "found 2 field(s)"],
        ),
        vary("=0:1:3", &["expected a case key", "empty key"]),
        vary(
            "bias.voltge_v=0:0.1:3",
            &[
                "--vary `bias.voltge_v=0:0.1:3`",
                "did you mean `bias.voltage_v`",
            ],
        ),
        vary("bias.voltage_v=0:0.1:0", &["COUNT", "found `0`"]),
        vary(
            "bias.voltage_v=0:0.1:2.5",
            &["whole number ≥ 1 for COUNT", "found `2.5`"],
        ),
        vary(
            "bias.voltage_v=nan:0.1:3",
            &["finite number for START", "found `nan`"],
        ),
        vary(
            "bias.voltage_v=0:1e400:3",
            &["finite number for STOP", "found `1e400`"],
        ),
        vary(
            "bias.voltage_v=0.05:0.05:3",
            &[
                "STOP different from START",
                "START = STOP = 0.05",
                "COUNT = 1",
            ],
        ),
        vary(
            "name=0:1:3",
            &[
                "--vary `name=0:1:3`",
                "expected a numeric case key",
                "numeric keys of this case: spin_degeneracy",
            ],
        ),
        vary(
            "device.kind=0:1:3",
            &["key `device.kind`", "expected a numeric case key"],
        ),
        vary(
            "leads.left.temperature_k=300:-1:3",
            &[
                "--vary `leads.left.temperature_k=300:-1:3`",
                "K > 0, found -1",
            ],
        ),
        vary("spin_degeneracy=1:2:3", &["whole number, found 1.5"]),
        vary(
            "phonon.0.energy_ev=0.01:0.02:3",
            &[
                "key `phonon.0.energy_ev`",
                "existing [[phonon]] entry, found none",
            ],
        ),
        line(
            &[
                "sweep",
                "CASE",
                "--vary",
                "bias.voltage_v=0:0.1:2",
                "--vary",
                "leads.left.temperature_k+bias.voltage_v=290:300:2",
            ],
            1,
            &["found `bias.voltage_v` twice", "one --vary per key"],
        ),
        line(
            &[
                "sweep",
                "CASE",
                "--vary",
                "bias.voltage_v=0:0.1:400",
                "--vary",
                "leads.left.temperature_k=290:300:400",
            ],
            1,
            &["at most 100000 grid points", "found 160000"],
        ),
        // generator and cooler
        line(
            &["generator", "CASE", "--hot", "300", "--cold", "300"],
            1,
            &["--hot 300 --cold 300", "expected --hot > --cold"],
        ),
        line(
            &["generator", "CASE", "--hot", "200", "--cold", "300"],
            1,
            &["expected --hot > --cold", "swap the two values"],
        ),
        line(
            &["generator", "CASE", "--hot", "nan", "--cold", "300"],
            1,
            &["--hot: expected a lead temperature in K > 0, found NaN"],
        ),
        line(
            &["generator", "CASE", "--hot", "310", "--cold", "-5"],
            1,
            &["--cold: expected a lead temperature in K > 0, found -5"],
        ),
        line(
            &[
                "generator",
                "CASE",
                "--hot",
                "310",
                "--cold",
                "300",
                "--points",
                "2",
            ],
            1,
            &["--points: expected 3 to 10000", "found 2"],
        ),
        line(
            &["cooler", "CASE", "--hot", "300", "--cold", "310"],
            1,
            &["expected --hot ≥ --cold", "found --hot < --cold"],
        ),
        line(
            &["cooler", "CASE", "--hot", "310", "--cold", "0"],
            1,
            &["--cold: expected a lead temperature in K > 0, found 0"],
        ),
        line(
            &["cooler", "CASE", "--hot", "inf", "--cold", "300"],
            1,
            &["--hot: expected a lead temperature in K > 0, found inf"],
        ),
        line(
            &[
                "cooler", "CASE", "--hot", "310", "--cold", "300", "--points", "10001",
            ],
            1,
            &["--points: expected 3 to 10000", "found 10001"],
        ),
        line(
            &[
                "cooler",
                "CASE",
                "--hot",
                "310",
                "--cold",
                "300",
                "--cold-lead",
                "middle",
            ],
            1,
            &["invalid value 'middle'", "left, right"],
        ),
        // screen
        line(
            &[
                "screen",
                "CASE",
                "--vary",
                "bias.voltage_v=0:0.01:2",
                "--rank",
                "best",
            ],
            1,
            &["invalid value 'best'", "zt, power-factor, cooling"],
        ),
        line(
            &[
                "screen",
                "CASE",
                "--vary",
                "bias.voltage_v=0:0.01:2",
                "--rank",
                "cooling",
            ],
            1,
            &["--rank cooling needs --hot K and --cold K"],
        ),
        line(
            &[
                "screen",
                "CASE",
                "--vary",
                "bias.voltage_v=0:0.01:2",
                "--rank",
                "zt",
                "--hot",
                "310",
                "--cold",
                "300",
            ],
            1,
            &["--hot, --cold: expected only with --rank cooling"],
        ),
        line(
            &[
                "screen",
                "CASE",
                "--vary",
                "bias.voltage_v=0:0.01:2",
                "--rank",
                "cooling",
                "--hot",
                "310",
                "--cold",
                "300",
                "--points",
                "2",
            ],
            1,
            &["--points: expected 3 to 10000", "found 2"],
        ),
        line(
            &[
                "screen",
                "CASE",
                "--vary",
                "bias.voltage_v=0:0.01:2",
                "--rank",
                "cooling",
                "--hot",
                "290",
                "--cold",
                "300",
            ],
            1,
            &["expected --hot ≥ --cold"],
        ),
        line(
            &["solve", "CASE", "--threads", "100000"],
            1,
            &["--threads must be at most 1024, found 100000"],
        ),
        // result folders that cannot be written (a regular file in the way
        // stops root too)
        line(
            &["solve", "CASE", "-o", &b],
            3,
            &["is a regular file, not a folder"],
        ),
        line(
            &["coefficients", "CASE", "-o", &under_file],
            3,
            &["a-file` above it is a regular file"],
        ),
        line(
            &[
                "sweep",
                "CASE",
                "--vary",
                "bias.voltage_v=0:0.01:2",
                "-o",
                &under_file,
            ],
            3,
            &["a-file` above it is a regular file"],
        ),
        line(
            &[
                "generator",
                "CASE",
                "--hot",
                "310",
                "--cold",
                "300",
                "-o",
                &under_file,
            ],
            3,
            &["a-file` above it is a regular file"],
        ),
        line(
            &[
                "screen",
                "CASE",
                "--vary",
                "bias.voltage_v=0:0.01:2",
                "--rank",
                "zt",
                "-o",
                &under_file,
            ],
            3,
            &["a-file` above it is a regular file"],
        ),
        line(
            &["solve", "CASE", "-o", &f],
            1,
            &[
                "that qheat did not write",
                "choose another folder with -o DIR",
            ],
        ),
        line(
            &["solve", "CASE", "--warm-start", &out("no-such-run")],
            1,
            &["--warm-start", "found no such folder"],
        ),
        line(
            &["solve", "CASE", "--warm-start", &f],
            1,
            &["--warm-start", "self_energy_retarded.npy", "found none"],
        ),
    ];
    assert!(cases.len() >= 40, "{} command lines", cases.len());
    let mut failures = Vec::new();
    for (i, case) in cases.iter().enumerate() {
        // Never the default folder under the working directory.
        let unused = out(&format!("unused-{i}"));
        let mut args: Vec<&str> = case.args.iter().map(String::as_str).collect();
        if !args.contains(&"-o") {
            args.extend(["-o", unused.as_str()]);
        }
        // Notes about the case are not part of the answer.
        args.push("--quiet");
        let o = qheat(&args);
        let what = format!("qheat {}", args.join(" "));
        assert_no_panic(&o, &what);
        let e = stderr(&o);
        if o.status.code() != Some(case.code) {
            failures.push(format!(
                "{what}: exit {:?}, not {}\n{e}",
                o.status.code(),
                case.code
            ));
        }
        for fragment in case.expect {
            if !e.contains(fragment) {
                failures.push(format!("{what}: `{fragment}` missing in\n{e}"));
            }
        }
        if !e.starts_with("error: ") {
            failures.push(format!("{what}: stderr does not start with `error: `\n{e}"));
        }
        if tmp.path().join("sweep").exists() {
            failures.push(format!("{what}: a refused sweep created its folder"));
            let _ = std::fs::remove_dir_all(tmp.path().join("sweep"));
        }
    }
    // Nothing was moved, replaced or written where it was refused.
    assert_eq!(std::fs::read_to_string(&blocker).unwrap(), "keep me");
    assert_eq!(
        std::fs::read_to_string(foreign.join("thesis.txt")).unwrap(),
        "keep me"
    );
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}
