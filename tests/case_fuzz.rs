//! Random TOML-ish mutations of a valid case never panic in load/resolve:
//! they either load or fail with a [`qheat::case::CaseError`].

#![allow(clippy::needless_range_loop)]

use proptest::prelude::*;
use qheat::case::{Case, CaseKey};
use std::path::Path;

const VALID: &str = r#"name = "fuzz"
spin_degeneracy = 2
[device]
kind = "chain"
spacing_nm = 0.5
length_nm = 10.0
effective_mass = 0.1
band_edge_ev = 0.0
[[device.region]]
from_nm = 4.0
to_nm = 6.0
offset_ev = 0.1
[leads.left]
fermi_level_ev = 0.05
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.05
temperature_k = 300.0
[bias]
voltage_v = 0.01
drop = { linear = { from_nm = 2.0, to_nm = 8.0 } }
[[phonon]]
energy_ev = 0.036
coupling_ev2 = 2e-3
[dephasing]
strength_ev2 = 1e-3
[grid]
step_ev = 0.004
[solver]
mixing = "linear"
mixing_factor = 0.5
"#;

/// Replacement tokens that stress parsing and validation: extreme and
/// special numbers, wrong types, other device kinds, structural characters.
const TOKENS: &[&str] = &[
    "0",
    "-1",
    "1e308",
    "-1e308",
    "1e-308",
    "nan",
    "inf",
    "-inf",
    "0.0",
    "1e9",
    "99999999999999999999",
    "\"strip\"",
    "\"blocks\"",
    "\"leads\"",
    "\"\"",
    "[",
    "]",
    "{",
    "}",
    "=",
    "\n",
    "[[phonon]]",
    "[grid]",
    "true",
    "1979-05-27",
    "width_sites = 3",
    "cells = 2",
    "'x'",
    "#",
    ".",
    "wide_band_ev = 0.01",
    "band_edge_ev = -0.5",
    "min_ev = 0.3",
    "max_ev = 0.1",
    "1e6",
    "3",
    "0.5",
];

fn mutate(text: &str, edits: &[(usize, usize, usize)]) -> String {
    let mut s: Vec<char> = text.chars().collect();
    for &(pos, len, tok) in edits {
        if s.is_empty() {
            break;
        }
        let p = pos % s.len();
        let end = (p + len % 6).min(s.len());
        let token: Vec<char> = TOKENS[tok % TOKENS.len()].chars().collect();
        s.splice(p..end, token);
    }
    s.into_iter().collect()
}

/// Mutate only the value after an `=` on a chosen line (keeps the file
/// mostly well-formed, so validation rather than the parser is exercised).
fn mutate_value(text: &str, line: usize, tok: usize) -> String {
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    let i = line % lines.len();
    if let Some((k, _)) = lines[i].split_once('=') {
        lines[i] = format!("{k}= {}", TOKENS[tok % TOKENS.len()]);
    }
    lines.join("\n")
}

fn run(text: &str) {
    if let Ok(case) = Case::parse(text, "fuzz.toml", Path::new(".")) {
        let r = case.resolve().expect("a loaded case resolves");
        let _ = r.describe();
        let _ = case.to_toml_string();
        let _ = case.with(CaseKey::BiasVoltage, 0.02);
    }
}

#[test]
fn the_unmutated_case_is_valid() {
    Case::parse(VALID, "fuzz.toml", Path::new(".")).unwrap();
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 400, rng_seed: proptest::test_runner::RngSeed::Fixed(20240611), ..ProptestConfig::default() })]

    #[test]
    fn character_mutations_never_panic(edits in proptest::collection::vec((0usize..2000, 0usize..6, 0usize..64), 1..4)) {
        run(&mutate(VALID, &edits));
    }

    #[test]
    fn value_mutations_never_panic(changes in proptest::collection::vec((0usize..64, 0usize..64), 1..4)) {
        let mut text = VALID.to_string();
        for (line, tok) in changes {
            text = mutate_value(&text, line, tok);
        }
        run(&text);
    }

    #[test]
    fn with_never_panics(key in 0usize..60, value in prop_oneof![Just(f64::NAN), Just(f64::INFINITY), Just(0.0), Just(-1.0), Just(1e300), -10.0f64..10.0, Just(1e-300)]) {
        let case = Case::parse(VALID, "fuzz.toml", Path::new(".")).unwrap();
        let keys = case.case_keys();
        let k = keys[key % keys.len()];
        if let Ok(c) = case.with(k, value) {
            c.resolve().unwrap();
        }
    }
}
