//! The demo cases load, stay small enough to solve in seconds, and raise no
//! warnings (a demo that warns teaches the wrong habit).

#![allow(clippy::needless_range_loop)]

use qheat::case::Case;
use std::path::Path;

#[test]
fn demo_cases_load_small_and_clean() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo");
    let mut names: Vec<_> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "toml"))
        .collect();
    names.sort();
    assert!(names.len() >= 5, "{names:?}");
    for path in names {
        let case = Case::load(&path).unwrap_or_else(|e| panic!("{e}"));
        let r = case.resolve().unwrap();
        println!("== {}\n{}", path.display(), r.describe());
        let p = &r.problem;
        assert!(
            p.grid.count <= 600,
            "{}: {} energies",
            case.name,
            p.grid.count
        );
        assert!(
            p.device.cells() <= 200,
            "{}: {} cells",
            case.name,
            p.device.cells()
        );
        assert!(r.warnings.is_empty(), "{}: {:?}", case.name, r.warnings);
        assert_eq!(
            path.file_stem().unwrap().to_str().unwrap(),
            case.name,
            "file name and case name agree"
        );
    }
}
