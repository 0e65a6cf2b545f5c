//! docs/case-keys.md is generated from the key table in src/case/keys.rs.
//! This test fails when the committed file differs from what the table
//! gives; `QHEAT_REGEN=1 cargo test --test case_keys_doc` rewrites it.

use std::path::Path;

#[test]
fn committed_key_reference_matches_the_key_table() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/case-keys.md");
    let generated = qheat::case::keys_markdown();
    if std::env::var_os("QHEAT_REGEN").is_some() {
        std::fs::write(&path, &generated).unwrap();
    }
    let committed = std::fs::read_to_string(&path).unwrap_or_default();
    assert!(
        committed == generated,
        "docs/case-keys.md differs from the key table in src/case/keys.rs; \
         regenerate it with `QHEAT_REGEN=1 cargo test --test case_keys_doc`"
    );
}
