//! Every file in tests/bad-cases/*.toml holds one mistake and names, in
//! `# expect: …` comment lines at its top, fragments its error must show
//! (the dotted key, what was expected, what was found). Loading must fail
//! with exactly such an error, never succeed and never panic.

#![allow(clippy::needless_range_loop)]

use qheat::case::Case;
use std::path::Path;

fn expectations(text: &str) -> Vec<String> {
    text.lines()
        .take_while(|l| l.starts_with('#'))
        .filter_map(|l| l.strip_prefix("# expect:"))
        .map(|s| s.trim().to_string())
        .collect()
}

#[test]
fn every_bad_case_fails_with_its_expected_message() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/bad-cases");
    let mut files: Vec<_> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "toml"))
        .collect();
    files.sort();
    assert!(files.len() >= 94, "only {} bad cases", files.len());
    let mut failures = Vec::new();
    for path in &files {
        let text = std::fs::read_to_string(path).unwrap();
        let expect = expectations(&text);
        assert!(
            !expect.is_empty(),
            "{} has no `# expect:` line",
            path.display()
        );
        let result = Case::load(path).and_then(|c| c.resolve());
        let err = match result {
            Ok(_) => {
                failures.push(format!("{}: loaded without error", path.display()));
                continue;
            }
            Err(e) => e,
        };
        let shown = err.to_string();
        println!("{shown}");
        // every message starts with the file it is about
        if !shown.starts_with(&path.display().to_string()) {
            failures.push(format!(
                "{}: message does not start with the file: {shown}",
                path.display()
            ));
        }
        for fragment in &expect {
            if !shown.contains(fragment.as_str()) {
                failures.push(format!(
                    "{}: `{fragment}` missing in\n    {shown}",
                    path.display()
                ));
            }
        }
        // syntax errors aside, every message names a key and says what was
        // expected and what was found
        if !shown.contains("invalid TOML") && !shown.contains("duplicate key") {
            for part in ["key `", "expected ", "found"] {
                if !shown.contains(part) {
                    failures.push(format!(
                        "{}: `{part}` missing in\n    {shown}",
                        path.display()
                    ));
                }
            }
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

#[test]
fn positions_point_at_the_offending_line() {
    // line 3 holds the bad temperature; column 17 is where its value starts
    // (the rest of the case is valid so that validation reaches it)
    let text = "name = \"p\"\n[leads.left]\ntemperature_k = -1.0\nfermi_level_ev = 0.0\n\
                [leads.right]\ntemperature_k = 300.0\nfermi_level_ev = 0.0\n\
                [device]\nkind = \"chain\"\nspacing_nm = 0.5\nlength_nm = 5.0\neffective_mass = 0.1\n";
    let err = Case::parse(text, "mem.toml", Path::new(".")).unwrap_err();
    assert_eq!(err.location, Some((3, 17)), "{err}");
    assert!(
        err.to_string()
            .starts_with("mem.toml:3:17: key `leads.left.temperature_k`: expected"),
        "{err}"
    );
}

#[test]
fn a_missing_case_file_is_an_io_error() {
    let err = Case::load(Path::new("/nonexistent/dir/case.toml")).unwrap_err();
    assert_eq!(err.kind, qheat::case::CaseErrorKind::Io);
    assert!(
        err.to_string().contains("/nonexistent/dir/case.toml"),
        "{err}"
    );
}
