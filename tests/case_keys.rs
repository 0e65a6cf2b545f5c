//! The key table, the typed keys and `Case::with`: every key of the table
//! is read by the parser, every numeric key has a typed name that reads
//! back, and changing a key on a loaded case gives the same problem as
//! writing the changed value into the file, without touching the disk.

use qheat::case::{Case, CaseErrorKind, CaseKey, KEYS, ValueType};
use qheat::leads::Side;
use std::path::Path;

/// A small valid chain with one region, one phonon, one lattice region,
/// one electrostatics region and one contact, so that every array key has
/// an entry 0.
const BASE: &str = r#"
name = "keys"

[device]
kind = "chain"
spacing_nm = 0.5
length_nm = 10.0
effective_mass = 0.1

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

[[phonon]]
energy_ev = 0.036
coupling_ev2 = 1e-3

[grid]
step_ev = 0.002

[lattice]
mass_u = 28.0
spring_n_per_m = 30.0

[[lattice.region]]
from_nm = 4.0
to_nm = 6.0
mass_u = 72.6

[electrostatics]
permittivity = 11.7
area_nm2 = 20.0
gate_potential_v = 0.0
gate_length_nm = 10.0

[[electrostatics.region]]
from_nm = 4.0
to_nm = 6.0
donors_cm3 = 1e18

[[channel]]
name = "first"
orbitals = [0]

[[contact]]
name = "probe"
first_cell = 5
gamma_ev = 0.001
mode = "voltage"
"#;

fn base() -> Case {
    Case::parse(BASE, "keys.toml", Path::new(".")).unwrap()
}

/// Set a dotted key (`#` read as entry 0) in a TOML table.
fn set(table: &mut toml::Table, parts: &[&str], value: toml::Value) {
    let (first, rest) = parts.split_first().unwrap();
    if rest.is_empty() {
        table.insert(first.to_string(), value);
        return;
    }
    if rest[0] == "#" {
        let Some(toml::Value::Array(a)) = table.get_mut(*first) else {
            panic!("no [[{first}]] entry in the base case");
        };
        let toml::Value::Table(t) = &mut a[0] else {
            panic!("[[{first}]] entry is no table")
        };
        return set(t, &rest[1..], value);
    }
    let entry = table
        .entry(first.to_string())
        .or_insert_with(|| toml::Value::Table(toml::Table::new()));
    let toml::Value::Table(t) = entry else {
        panic!("`{first}` is no table")
    };
    set(t, rest, value);
}

/// Every key of the table, written into a case with a value of its type,
/// gets past the reader: a validation message at most (a key of another
/// device kind, say), never an unknown key or a wrong type.
#[test]
fn every_table_key_is_accepted_by_the_parser() {
    for info in KEYS {
        let value = match info.ty {
            ValueType::Float => toml::Value::Float(0.5),
            ValueType::Int => toml::Value::Integer(1),
            ValueType::Bool => toml::Value::Boolean(true),
            ValueType::Text => toml::Value::String("x.csv".into()),
            ValueType::Choice(names) => toml::Value::String(names()[0].into()),
            ValueType::Drop => toml::Value::String("leads".into()),
            ValueType::FloatList => toml::Value::Array(vec![toml::Value::Float(28.0)]),
            // the old name is read, then refused by name
            ValueType::Renamed => toml::Value::String("chain".into()),
            ValueType::Names => toml::Value::Array(vec![toml::Value::String("up".into())]),
            ValueType::Indices => toml::Value::Array(vec![toml::Value::Integer(0)]),
            ValueType::Matrices => toml::Value::Array(vec![toml::Value::Array(vec![
                toml::Value::Array(vec![toml::Value::Float(0.01)]),
            ])]),
            ValueType::FloatRows => {
                toml::Value::Array(vec![toml::Value::Array(vec![toml::Value::Float(0.1)])])
            }
        };
        let mut doc: toml::Table = toml::from_str(BASE).unwrap();
        let parts: Vec<&str> = info.name.split('.').collect();
        set(&mut doc, &parts, value);
        let text = toml::to_string(&doc).unwrap();
        if let Err(e) = Case::parse(&text, "keys.toml", Path::new(".")) {
            let refused_by_name =
                matches!(info.ty, ValueType::Renamed) && e.to_string().contains("was renamed");
            assert!(
                refused_by_name
                    || !matches!(
                        e.kind,
                        CaseErrorKind::UnknownKey
                            | CaseErrorKind::WrongType
                            | CaseErrorKind::Syntax
                    ),
                "`{}`: {e}",
                info.name
            );
        }
    }
}

/// The numeric rows of the table are exactly the typed keys, in order, and
/// every typed key reads back from its name.
#[test]
fn typed_keys_cover_the_numeric_rows_and_read_back() {
    let numeric: Vec<&str> = KEYS
        .iter()
        .filter(|k| k.ty.is_numeric())
        .map(|k| k.name)
        .collect();
    let typed: Vec<&str> = CaseKey::templates().iter().map(|k| k.pattern()).collect();
    assert_eq!(numeric, typed);
    for t in CaseKey::templates() {
        for k in [*t, t.at_index(3)] {
            assert_eq!(k.to_string().parse::<CaseKey>(), Ok(k), "{k}");
        }
    }
    assert_eq!(
        "phonon.2.bath_temperature_k".parse::<CaseKey>(),
        Ok(CaseKey::PhononBathTemperature(2))
    );
    assert_eq!(
        "leads.right.temperature_k".parse::<CaseKey>(),
        Ok(CaseKey::LeadTemperature(Side::Right))
    );
    let e = "bias.voltge_v".parse::<CaseKey>().unwrap_err();
    assert_eq!(e.close.first().map(String::as_str), Some("bias.voltage_v"));
    assert!(
        e.to_string().contains("did you mean `bias.voltage_v`?"),
        "{e}"
    );
    // a string key is no numeric key
    assert!("device.kind".parse::<CaseKey>().is_err());
}

/// `with` on the typed values gives the problem that the file with the
/// changed value gives (read through TOML), key by key.
#[test]
fn with_matches_the_edited_file() {
    let case = base();
    let changes = [
        (CaseKey::BiasVoltage, 0.02),
        (CaseKey::LeadTemperature(Side::Left), 320.0),
        (CaseKey::LeadFermiLevel(Side::Right), 0.07),
        (CaseKey::PhononBathTemperature(0), 310.0),
        (CaseKey::PhononCoupling(0), 2e-3),
        (CaseKey::RegionOffset(0), 0.15),
        (CaseKey::RegionTo(0), 7.0),
        (CaseKey::DeviceLength, 12.0),
        (CaseKey::GridStep, 0.001),
        (CaseKey::SpinDegeneracy, 1.0),
        (CaseKey::DephasingStrength, 1e-4),
        (CaseKey::SolverAndersonDepth, 4.0),
        (CaseKey::ThermalPhononConductance, 1e-10),
    ];
    for (key, value) in changes {
        let typed = case
            .with(key, value)
            .unwrap_or_else(|e| panic!("{key}: {e}"));
        let text = typed.to_toml_string();
        assert!(
            text.starts_with(&format!("# keys.toml with {key} = {value}")),
            "{text}"
        );
        let reread = Case::parse(&text, "again", Path::new(".")).unwrap();
        let (a, b) = (typed.resolve().unwrap(), reread.resolve().unwrap());
        assert_eq!(a.describe(), b.describe(), "{key}");
        assert_eq!(a.problem.grid, b.problem.grid, "{key}");
        assert_eq!(a.problem.scattering, b.problem.scattering, "{key}");
        assert_eq!(
            a.problem.device.potential_ev, b.problem.device.potential_ev,
            "{key}"
        );
        assert_eq!(typed.edits(), &[(key, value)]);
    }
    // the ends of a linear drop, changed one after the other (each change
    // is validated, so the drop must be there with both ends)
    let dropped =
        format!("{BASE}\n[bias]\ndrop = {{ linear = {{ from_nm = 1.0, to_nm = 9.0 }} }}\n");
    let linear = Case::parse(&dropped, "keys.toml", Path::new("."))
        .unwrap()
        .with(CaseKey::BiasDropFrom, 2.0)
        .and_then(|c| c.with(CaseKey::BiasDropTo, 8.0))
        .and_then(|c| c.with(CaseKey::BiasVoltage, 0.05))
        .unwrap();
    let text = linear.to_toml_string();
    assert!(
        text.starts_with(
            "# keys.toml with bias.drop.linear.from_nm = 2; bias.drop.linear.to_nm = 8; \
             bias.voltage_v = 0.05\n"
        ),
        "{text}"
    );
    let reread = Case::parse(&text, "again", Path::new(".")).unwrap();
    let (a, b) = (linear.resolve().unwrap(), reread.resolve().unwrap());
    assert_eq!(a.describe(), b.describe());
    assert!(a.describe().contains("dropped linearly over [2, 8] nm"));
}

/// A value the key cannot take is refused as the file would refuse it,
/// naming the key and the change.
#[test]
fn with_refuses_bad_values_like_the_file() {
    let case = base();
    let msg = |k: CaseKey, v: f64| case.with(k, v).unwrap_err().to_string();
    let m = msg(CaseKey::LeadTemperature(Side::Left), -4.0);
    assert!(
        m.contains("key `leads.left.temperature_k`: expected a temperature in K > 0, found -4")
            && m.contains("(after setting `leads.left.temperature_k` = -4)"),
        "{m}"
    );
    let m = msg(CaseKey::RegionFrom(0), 40.0);
    assert!(
        m.contains("a position inside the device, 0 to 10 nm"),
        "{m}"
    );
    let m = msg(CaseKey::DeviceLength, 10.2);
    assert!(m.contains("a whole multiple (≥ 1) of spacing_nm"), "{m}");
    let m = msg(CaseKey::SpinDegeneracy, 1.5);
    assert!(m.contains("expected a whole number, found 1.5"), "{m}");
    let m = msg(CaseKey::PhononEnergy(1), 0.02);
    assert!(
        m.contains("expected an index below 1 ([[phonon]] has 1 entries), found 1"),
        "{m}"
    );
    let coherent = case.with(CaseKey::DeviceWidthSites, 3.0).unwrap_err();
    assert!(
        coherent.to_string().contains("only for \"strip\""),
        "{coherent}"
    );
}

/// Block files are read when the case is loaded, not at every change: a
/// case whose files have gone still takes new operating points.
#[test]
fn with_does_not_read_block_files_again() {
    let tmp = tempfile::tempdir().unwrap();
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/bad-cases");
    for f in ["good-onsite.csv", "good-coupling.csv"] {
        std::fs::copy(src.join(f), tmp.path().join(f)).unwrap();
    }
    let text = r#"
name = "blocks"
[device]
kind = "blocks"
spacing_nm = 0.5
onsite_file = "good-onsite.csv"
coupling_file = "good-coupling.csv"
[leads.left]
fermi_level_ev = 0.05
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.05
temperature_k = 300.0
"#;
    let path = tmp.path().join("blocks.toml");
    std::fs::write(&path, text).unwrap();
    let case = Case::load(&path).unwrap();
    for f in ["good-onsite.csv", "good-coupling.csv"] {
        std::fs::remove_file(tmp.path().join(f)).unwrap();
    }
    let biased = case.with(CaseKey::BiasVoltage, 0.01).unwrap();
    let hot = biased
        .with(CaseKey::LeadTemperature(Side::Left), 330.0)
        .unwrap();
    let r = hot.resolve().unwrap();
    assert_eq!(r.voltage_v, 0.01);
    assert_eq!(r.problem.left.temperature_k, 330.0);
    assert_eq!(
        r.problem.device.onsite,
        case.resolve().unwrap().problem.device.onsite
    );
}
