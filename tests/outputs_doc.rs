//! docs/outputs.md is generated from the output schema: this test fails
//! when the committed file differs from what the schema gives, and
//! rewrites it with QHEAT_REGEN=1.

use std::path::Path;

#[test]
fn outputs_doc_matches_the_schema() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/outputs.md");
    let generated = qheat::output::schema::outputs_markdown();
    if std::env::var_os("QHEAT_REGEN").is_some() {
        std::fs::write(&path, &generated).unwrap();
        return;
    }
    let committed = std::fs::read_to_string(&path).unwrap_or_default();
    if committed != generated {
        let line = committed
            .lines()
            .zip(generated.lines())
            .position(|(a, b)| a != b)
            .map_or_else(
                || "at the end".to_string(),
                |i| format!("at line {}", i + 1),
            );
        panic!(
            "docs/outputs.md differs from the output schema ({line}); regenerate it with\n  \
             QHEAT_REGEN=1 cargo test --release --test outputs_doc"
        );
    }
}

/// Every column of every table is documented once per file with a unit and
/// a meaning, and every file of a solve is in the document.
#[test]
fn every_documented_field_has_a_unit_and_a_meaning() {
    use qheat::output::schema::{keys, tables};
    let mut docs = tables::table_docs();
    docs.extend(tables::array_docs());
    docs.extend(keys::summary_docs());
    for d in &docs {
        let mut names: Vec<&str> = d.fields.iter().map(|f| f.name.as_str()).collect();
        names.sort_unstable();
        let before = names.len();
        names.dedup();
        assert_eq!(before, names.len(), "{}: a name documented twice", d.file);
        for f in &d.fields {
            assert!(
                !f.unit.is_empty() && f.meaning.len() > 3,
                "{} {}",
                d.file,
                f.name
            );
        }
    }
    let text = qheat::output::schema::outputs_markdown();
    for file in [
        "sites.csv",
        "spectrum.csv",
        "convergence.csv",
        "bond_current.npy",
        "bond_current.npz",
        "occupation.npz",
        "self_energy_retarded.npy",
        "self_energy_in.npy",
        "generator.csv",
        "cooler.csv",
        "sweep.csv",
        "screen.csv",
        "ranking.csv",
    ] {
        assert!(text.contains(&format!("### {file}")), "{file}");
    }
}
