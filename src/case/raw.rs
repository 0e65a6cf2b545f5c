//! The case file as written: serde structs that mirror the TOML, every value
//! with its byte span, unknown keys refused. Nothing here is checked beyond
//! TOML types; [`super::spec`] turns these into validated values.

use super::error::{CaseError, CaseErrorKind, ErrorContext, close_matches};
use super::keys::{KEYS, Node, ValueType, children, section_description};
use serde::Deserialize;
use std::ops::Range;
use toml::Spanned;

/// A spanned optional value.
pub(crate) type Opt<T> = Option<Spanned<T>>;

#[derive(Deserialize, Debug, Clone, Default)]
#[serde(deny_unknown_fields, expecting = "a case table")]
pub(crate) struct RawCase {
    pub name: Opt<String>,
    pub spin_degeneracy: Opt<i64>,
    pub device: Opt<RawDevice>,
    pub leads: Opt<RawLeads>,
    pub bias: Opt<RawBias>,
    pub phonon: Option<Vec<Spanned<RawPhonon>>>,
    pub dephasing: Opt<RawDephasing>,
    pub grid: Opt<RawGrid>,
    pub solver: Opt<RawSolver>,
    pub response: Opt<RawResponse>,
    pub thermal: Opt<RawThermal>,
    pub profile: Opt<RawProfile>,
    pub lattice: Opt<RawLattice>,
    pub electrostatics: Opt<RawElectrostatics>,
    pub channel: Option<Vec<Spanned<RawChannel>>>,
    pub contact: Option<Vec<Spanned<RawContact>>>,
}

#[derive(Deserialize, Debug, Clone, Default)]
#[serde(
    deny_unknown_fields,
    expecting = "a table with a name, cells, gamma_ev and a mode"
)]
pub(crate) struct RawContact {
    pub name: Opt<String>,
    pub cells: Opt<Vec<i64>>,
    pub first_cell: Opt<i64>,
    pub cell_count: Opt<i64>,
    pub gamma_ev: Opt<f64>,
    pub mode: Opt<String>,
    pub fermi_level_ev: Opt<f64>,
    pub temperature_k: Opt<f64>,
    pub polarisation: Opt<f64>,
    pub polarisation_direction: Opt<Vec<f64>>,
}

#[derive(Deserialize, Debug, Clone, Default)]
#[serde(
    deny_unknown_fields,
    expecting = "a table with a name and the orbitals it holds"
)]
pub(crate) struct RawChannel {
    pub name: Opt<String>,
    pub orbitals: Opt<Vec<i64>>,
}

#[derive(Deserialize, Debug, Clone, Default)]
#[serde(deny_unknown_fields, expecting = "a table of device settings")]
pub(crate) struct RawDevice {
    pub kind: Opt<String>,
    /// The key of earlier versions, refused with a message naming `kind`.
    pub builder: Opt<toml::Value>,
    pub spacing_nm: Opt<f64>,
    pub length_nm: Opt<f64>,
    pub effective_mass: Opt<f64>,
    pub band_edge_ev: Opt<f64>,
    pub width_sites: Opt<i64>,
    pub onsite_file: Opt<String>,
    pub coupling_file: Opt<String>,
    pub cells: Opt<i64>,
    pub region: Option<Vec<Spanned<RawRegion>>>,
    pub spin: Opt<String>,
}

#[derive(Deserialize, Debug, Clone, Default)]
#[serde(
    deny_unknown_fields,
    expecting = "a table with from_nm, to_nm and offset_ev or start_ev + end_ev"
)]
pub(crate) struct RawRegion {
    pub from_nm: Opt<f64>,
    pub to_nm: Opt<f64>,
    pub offset_ev: Opt<f64>,
    pub start_ev: Opt<f64>,
    pub end_ev: Opt<f64>,
    /// Names of the channels whose orbitals the region shifts (all
    /// orbitals when left out).
    pub channels: Opt<Vec<String>>,
}

#[derive(Deserialize, Debug, Clone, Default)]
#[serde(
    deny_unknown_fields,
    expecting = "a table with [leads.left] and [leads.right]"
)]
pub(crate) struct RawLeads {
    pub left: Opt<RawLead>,
    pub right: Opt<RawLead>,
}

#[derive(Deserialize, Debug, Clone, Default)]
#[serde(deny_unknown_fields, expecting = "a table of lead settings")]
pub(crate) struct RawLead {
    pub fermi_level_ev: Opt<f64>,
    pub temperature_k: Opt<f64>,
    pub band_edge_ev: Opt<f64>,
    pub effective_mass: Opt<f64>,
    pub wide_band_ev: Opt<f64>,
    pub wide_band_orbitals_ev: Opt<Vec<f64>>,
    pub wide_band_matrix_ev: Opt<Vec<Vec<f64>>>,
    pub wide_band_file: Opt<String>,
    pub onsite_file: Opt<String>,
    pub coupling_file: Opt<String>,
    pub join_file: Opt<String>,
}

#[derive(Deserialize, Debug, Clone, Default)]
#[serde(deny_unknown_fields, expecting = "a table of bias settings")]
pub(crate) struct RawBias {
    pub voltage_v: Opt<f64>,
    /// `"leads"` or `{ linear = { from_nm, to_nm } }`: read by hand for
    /// clearer messages than an untagged enum gives.
    pub drop: Opt<toml::Value>,
}

#[derive(Deserialize, Debug, Clone, Default)]
#[serde(deny_unknown_fields, expecting = "a table of phonon settings")]
pub(crate) struct RawPhonon {
    pub energy_ev: Opt<f64>,
    pub coupling_ev2: Opt<f64>,
    /// One coupling per orbital of a cell (eV²), read by hand.
    pub coupling_per_orbital_ev2: Opt<toml::Value>,
    /// A blocks file of coupling matrices (eV), one source each.
    pub coupling_matrices_file: Opt<String>,
    /// The coupling matrices (eV) written in the case, read by hand.
    pub coupling_matrices_ev: Opt<toml::Value>,
    pub from_nm: Opt<f64>,
    pub to_nm: Opt<f64>,
    pub bath_temperature_k: Opt<f64>,
}

#[derive(Deserialize, Debug, Clone, Default)]
#[serde(deny_unknown_fields, expecting = "a table of dephasing settings")]
pub(crate) struct RawDephasing {
    pub strength_ev2: Opt<f64>,
    /// One strength per orbital of a cell (eV²), read by hand.
    pub strength_per_orbital_ev2: Opt<toml::Value>,
    /// A blocks file of coupling matrices (eV), one source each.
    pub coupling_matrices_file: Opt<String>,
    /// The coupling matrices (eV) written in the case, read by hand.
    pub coupling_matrices_ev: Opt<toml::Value>,
    pub from_nm: Opt<f64>,
    pub to_nm: Opt<f64>,
}

#[derive(Deserialize, Debug, Clone, Default)]
#[serde(deny_unknown_fields, expecting = "a table of energy grid settings")]
pub(crate) struct RawGrid {
    pub step_ev: Opt<f64>,
    pub min_ev: Opt<f64>,
    pub max_ev: Opt<f64>,
    /// Accept phonon energies moved by more than the snap limit.
    pub allow_coarse_phonon_snap: Opt<bool>,
}

#[derive(Deserialize, Debug, Clone, Default)]
#[serde(deny_unknown_fields, expecting = "a table of solver settings")]
pub(crate) struct RawSolver {
    pub tolerance: Opt<f64>,
    pub max_iterations: Opt<i64>,
    pub mixing: Opt<String>,
    pub mixing_factor: Opt<f64>,
    pub anderson_depth: Opt<i64>,
    pub anderson_damping: Opt<f64>,
    pub anderson_history: Opt<String>,
    pub hermitian_part: Opt<String>,
    pub energy_order: Opt<String>,
    pub coarse_start: Opt<String>,
    pub current_floor_a: Opt<f64>,
    pub decimation_eta_ev: Opt<f64>,
    pub decimation_tolerance_ev: Opt<f64>,
}

#[derive(Deserialize, Debug, Clone, Default)]
#[serde(deny_unknown_fields, expecting = "a table of response settings")]
pub(crate) struct RawResponse {
    pub split: Opt<String>,
}

#[derive(Deserialize, Debug, Clone, Default)]
#[serde(deny_unknown_fields, expecting = "a table of thermal settings")]
pub(crate) struct RawThermal {
    pub phonon_conductance_w_per_k: Opt<f64>,
}

#[derive(Deserialize, Debug, Clone, Default)]
#[serde(deny_unknown_fields, expecting = "a table of profile settings")]
pub(crate) struct RawProfile {
    pub electron_temperature: Opt<String>,
}

#[derive(Deserialize, Debug, Clone, Default)]
#[serde(deny_unknown_fields, expecting = "a table of lattice settings")]
pub(crate) struct RawLattice {
    pub mass_u: Opt<f64>,
    pub spring_n_per_m: Opt<f64>,
    pub transverse_spring_n_per_m: Opt<f64>,
    pub damping_per_ps: Opt<f64>,
    pub self_heating_tolerance_k: Opt<f64>,
    pub self_heating_max_iterations: Opt<i64>,
    pub self_heating_mixing: Opt<f64>,
    pub self_heating_history: Opt<i64>,
    pub masses_u: Opt<Vec<f64>>,
    pub masses_file: Opt<String>,
    pub force_onsite_file: Opt<String>,
    pub force_coupling_file: Opt<String>,
    pub region: Option<Vec<Spanned<RawLatticeRegion>>>,
    pub left: Opt<RawLatticeLead>,
    pub right: Opt<RawLatticeLead>,
}

#[derive(Deserialize, Debug, Clone, Default)]
#[serde(
    deny_unknown_fields,
    expecting = "a table with from_nm, to_nm and mass_u, spring_n_per_m and/or damping_per_ps"
)]
pub(crate) struct RawLatticeRegion {
    pub from_nm: Opt<f64>,
    pub to_nm: Opt<f64>,
    pub mass_u: Opt<f64>,
    pub spring_n_per_m: Opt<f64>,
    pub damping_per_ps: Opt<f64>,
}

#[derive(Deserialize, Debug, Clone, Default)]
#[serde(deny_unknown_fields, expecting = "a table of phonon lead settings")]
pub(crate) struct RawLatticeLead {
    pub mass_u: Opt<f64>,
    pub spring_n_per_m: Opt<f64>,
}

#[derive(Deserialize, Debug, Clone, Default)]
#[serde(deny_unknown_fields, expecting = "a table of electrostatics settings")]
pub(crate) struct RawElectrostatics {
    pub permittivity: Opt<f64>,
    pub area_nm2: Opt<f64>,
    pub donors_cm3: Opt<f64>,
    pub acceptors_cm3: Opt<f64>,
    pub left_potential_v: Opt<f64>,
    pub right_potential_v: Opt<f64>,
    pub gate_potential_v: Opt<f64>,
    pub gate_length_nm: Opt<f64>,
    pub tolerance_ev: Opt<f64>,
    pub max_iterations: Opt<i64>,
    pub coupling: Opt<String>,
    pub ends: Opt<String>,
    pub region: Option<Vec<Spanned<RawElectrostaticsRegion>>>,
}

#[derive(Deserialize, Debug, Clone, Default)]
#[serde(
    deny_unknown_fields,
    expecting = "a table with from_nm, to_nm and donors_cm3, acceptors_cm3 and/or permittivity"
)]
pub(crate) struct RawElectrostaticsRegion {
    pub from_nm: Opt<f64>,
    pub to_nm: Opt<f64>,
    pub permittivity: Opt<f64>,
    pub donors_cm3: Opt<f64>,
    pub acceptors_cm3: Opt<f64>,
}

/// Parse the text: TOML syntax first (with positions), then the schema.
pub(crate) fn parse_raw(text: &str, ctx: &ErrorContext<'_>) -> Result<RawCase, CaseError> {
    let index = match toml::de::DeTable::parse(text) {
        Ok(doc) => {
            check_brackets(doc.get_ref(), text, ctx)?;
            check_shape(doc.get_ref(), "", "", ctx)?;
            let mut index = SpanIndex::default();
            index.walk_table(doc.get_ref(), "");
            index
        }
        Err(e) => {
            // Quote the offending text when it is short (a duplicate key's
            // span is the key itself).
            let near = e
                .span()
                .and_then(|s| text.get(s))
                .filter(|t| !t.trim().is_empty() && t.len() <= 60 && !t.contains('\n'))
                .map(|t| format!(" at `{}`", t.trim()))
                .unwrap_or_default();
            return Err(ctx.error(
                CaseErrorKind::Syntax,
                e.span(),
                None,
                format!("invalid TOML: {}{near}", e.message().trim()),
            ));
        }
    };
    toml::from_str::<RawCase>(text).map_err(|e| {
        // The shape check above refuses every unknown key and wrong type
        // with its own message; this is the fallback for a document that
        // still does not fit the raw structs, passed on as the library
        // words it.
        let span = e.span();
        let path = span.as_ref().and_then(|s| index.path_at(s)).map(|(_, p)| p);
        ctx.error(
            CaseErrorKind::WrongType,
            span,
            path.as_deref(),
            e.message().trim().to_string(),
        )
    })
}

/// Keys that hold one table, written `[key]` (or `key = { … }`).
const TABLE_KEYS: &[&str] = &[
    "device",
    "leads",
    "leads.left",
    "leads.right",
    "bias",
    "dephasing",
    "grid",
    "solver",
    "response",
    "thermal",
    "profile",
    "lattice",
    "lattice.left",
    "lattice.right",
    "electrostatics",
];

/// Keys that hold a list of tables, each entry written under its own
/// `[[key]]` header.
const ARRAY_KEYS: &[&str] = &[
    "phonon",
    "device.region",
    "lattice.region",
    "electrostatics.region",
    "channel",
    "contact",
];

/// The value at a dotted path and the span of its key.
fn lookup<'t, 'a>(
    table: &'t toml::de::DeTable<'a>,
    path: &str,
) -> Option<(&'t Spanned<toml::de::DeValue<'a>>, Range<usize>)> {
    let (first, rest) = match path.split_once('.') {
        Some((f, r)) => (f, Some(r)),
        None => (path, None),
    };
    let (k, v) = table.iter().find(|(k, _)| {
        let k: &str = k.get_ref();
        k == first
    })?;
    match (rest, v.get_ref()) {
        (None, _) => Some((v, k.span())),
        (Some(r), toml::de::DeValue::Table(t)) => lookup(t, r),
        _ => None,
    }
}

/// Single against double brackets: `[phonon]` where each phonon needs its
/// own `[[phonon]]` header, or `[[grid]]` where one `[grid]` table belongs.
/// Serde would only say that the TOML type is wrong; this says which
/// header to write.
fn check_brackets(
    doc: &toml::de::DeTable<'_>,
    text: &str,
    ctx: &ErrorContext<'_>,
) -> Result<(), CaseError> {
    // The header line itself is the clearest place to point at.
    let at = |value: &Range<usize>, key: &Range<usize>| -> Range<usize> {
        let line_start = text[..key.start.min(text.len())]
            .rfind('\n')
            .map_or(0, |p| p + 1);
        if text[line_start..].trim_start().starts_with('[') {
            line_start..key.end
        } else {
            value.clone()
        }
    };
    for key in ARRAY_KEYS {
        if let Some((v, kspan)) = lookup(doc, key)
            && let toml::de::DeValue::Table(_) = v.get_ref()
        {
            return Err(ctx.error(
                CaseErrorKind::WrongType,
                Some(at(&v.span(), &kspan)),
                Some(key),
                format!(
                    "expected a list of tables, each entry under its own `[[{key}]]` header \
                     (double brackets), found a single table (`[{key}]` or `{key} = {{ … }}`); \
                     hint: it must be written `[[{key}]]`"
                ),
            ));
        }
    }
    for key in TABLE_KEYS {
        if let Some((v, kspan)) = lookup(doc, key)
            && let toml::de::DeValue::Array(_) = v.get_ref()
        {
            return Err(ctx.error(
                CaseErrorKind::WrongType,
                Some(at(&v.span(), &kspan)),
                Some(key),
                format!(
                    "expected one table under a `[{key}]` header (single brackets), \
                     found a list (`[[{key}]]` or `{key} = [ … ]`); \
                     hint: it must be written `[{key}]`, once"
                ),
            ));
        }
    }
    Ok(())
}

/// Dotted key paths of every key and value of the document, by span: lets
/// a serde error (which carries only a span) name its key.
#[derive(Default)]
struct SpanIndex {
    /// (span of the key, path)
    keys: Vec<(Range<usize>, String)>,
    /// (span of the value, path)
    values: Vec<(Range<usize>, String)>,
}

impl SpanIndex {
    fn walk_table(&mut self, table: &toml::de::DeTable<'_>, prefix: &str) {
        for (k, v) in table {
            let path = join(prefix, k.get_ref());
            self.keys.push((k.span(), path.clone()));
            self.walk_value(v, &path);
        }
    }

    fn walk_value(&mut self, v: &Spanned<toml::de::DeValue<'_>>, path: &str) {
        self.values.push((v.span(), path.to_string()));
        match v.get_ref() {
            toml::de::DeValue::Table(t) => self.walk_table(t, path),
            toml::de::DeValue::Array(a) => {
                for (i, item) in a.iter().enumerate() {
                    self.walk_value(item, &format!("{path}.{i}"));
                }
            }
            _ => {}
        }
    }

    /// The key whose key text or value sits at `span`: an exact match first,
    /// then the narrowest value containing it.
    fn path_at(&self, span: &Range<usize>) -> Option<(bool, String)> {
        if let Some((_, p)) = self.keys.iter().find(|(s, _)| s == span) {
            return Some((true, p.clone()));
        }
        if let Some((_, p)) = self.values.iter().find(|(s, _)| s == span) {
            return Some((false, p.clone()));
        }
        self.values
            .iter()
            .filter(|(s, _)| s.start <= span.start && span.end <= s.end)
            .min_by_key(|(s, _)| s.end - s.start)
            .map(|(_, p)| (false, p.clone()))
    }
}

fn join(prefix: &str, key: &str) -> String {
    if prefix.is_empty() {
        key.to_string()
    } else {
        format!("{prefix}.{key}")
    }
}

/// What a TOML value is, in the words of the messages: `string "x"`,
/// ``integer `5` ``, ``floating point `6.0` ``, ``boolean `true` ``, a
/// table, an array.
fn found(v: &toml::de::DeValue<'_>) -> String {
    use toml::de::DeValue;
    match v {
        DeValue::String(s) => format!("string {s:?}"),
        DeValue::Integer(i) => match i64::from_str_radix(i.as_str(), i.radix()) {
            Ok(n) => format!("integer `{n}`"),
            Err(_) => format!("integer `{i}`"),
        },
        DeValue::Float(x) => match x.as_str().replace('_', "").parse::<f64>() {
            Ok(f) if f.is_finite() && !format!("{f}").contains('.') => {
                format!("floating point `{f}.0`")
            }
            Ok(f) => format!("floating point `{f}`"),
            Err(_) => format!("floating point `{x}`"),
        },
        DeValue::Boolean(b) => format!("boolean `{b}`"),
        DeValue::Datetime(d) => format!("a date-time `{d}`"),
        DeValue::Array(_) => "an array".into(),
        DeValue::Table(_) => "a table".into(),
    }
}

/// True when `v` is a value of type `ty` (an integer counts as a number).
fn fits(v: &toml::de::DeValue<'_>, ty: ValueType) -> bool {
    use toml::de::DeValue;
    let int_ok = |i: &toml::de::DeInteger<'_>| i64::from_str_radix(i.as_str(), i.radix()).is_ok();
    match (ty, v) {
        (ValueType::Float, DeValue::Float(_)) => true,
        (ValueType::Float | ValueType::Int, DeValue::Integer(i)) => int_ok(i),
        (ValueType::Bool, DeValue::Boolean(_)) => true,
        (ValueType::Text | ValueType::Choice(_), DeValue::String(_)) => true,
        (ValueType::Drop | ValueType::Renamed, _) => true,
        (ValueType::FloatList, DeValue::Array(a)) => a.iter().all(|x| match x.get_ref() {
            DeValue::Float(_) => true,
            DeValue::Integer(i) => int_ok(i),
            _ => false,
        }),
        (ValueType::Names, DeValue::Array(a)) => {
            a.iter().all(|x| matches!(x.get_ref(), DeValue::String(_)))
        }
        (ValueType::Indices, DeValue::Array(a)) => a
            .iter()
            .all(|x| matches!(x.get_ref(), DeValue::Integer(i) if int_ok(i))),
        // The shape and the entries are checked with the scattering.
        (ValueType::Matrices, DeValue::Array(_)) => true,
        (ValueType::FloatRows, DeValue::Array(rows)) => rows
            .iter()
            .all(|row| fits(row.get_ref(), ValueType::FloatList)),
        _ => false,
    }
}

/// What a key of type `ty` expects, in the words of the messages.
fn expected(ty: ValueType) -> &'static str {
    match ty {
        ValueType::Float => "a number",
        ValueType::Int => "an integer",
        ValueType::Bool => "a boolean",
        ValueType::FloatList => "an array of numbers",
        ValueType::Names => "a list of strings",
        ValueType::Indices => "a list of whole numbers",
        ValueType::Matrices => "a list of matrices",
        ValueType::FloatRows => "an array of rows of numbers",
        _ => "a string",
    }
}

/// The shape of the file against the key table: every key known at its
/// place, every value of its type. `pattern` is the table's dotted pattern
/// (`#` for list indices), `path` its dotted path.
fn check_shape(
    table: &toml::de::DeTable<'_>,
    pattern: &str,
    path: &str,
    ctx: &ErrorContext<'_>,
) -> Result<(), CaseError> {
    let allowed = children(pattern);
    for (k, v) in table {
        let name: &str = k.get_ref();
        let key_path = join(path, name);
        let Some(&(_, node)) = allowed.iter().find(|(n, _)| *n == name) else {
            let names: Vec<&str> = allowed.iter().map(|(n, _)| *n).collect();
            let suggestion = close_matches(name, names.iter().copied())
                .into_iter()
                .next()
                .map(|s| join(path, &s));
            let list = if names.is_empty() {
                "no keys".to_string()
            } else {
                names
                    .iter()
                    .map(|n| format!("`{n}`"))
                    .collect::<Vec<_>>()
                    .join(", ")
            };
            return Err(ctx
                .error(
                    CaseErrorKind::UnknownKey,
                    Some(k.span()),
                    Some(&key_path),
                    format!("expected one of {list}, found unknown key `{name}`"),
                )
                .with_suggestion(suggestion));
        };
        check_node(v, node, &join(pattern, name), &key_path, ctx)?;
    }
    Ok(())
}

/// One value against what the key table says belongs at its place.
fn check_node(
    v: &Spanned<toml::de::DeValue<'_>>,
    node: Node,
    pattern: &str,
    path: &str,
    ctx: &ErrorContext<'_>,
) -> Result<(), CaseError> {
    use toml::de::DeValue;
    let wrong = |expected: &str, v: &Spanned<DeValue<'_>>, path: &str| {
        ctx.error(
            CaseErrorKind::WrongType,
            Some(v.span()),
            Some(path),
            format!("expected {expected}, found {}", found(v.get_ref())),
        )
    };
    match (node, v.get_ref()) {
        (Node::Leaf(i), value) if fits(value, KEYS[i].ty) => Ok(()),
        (Node::Leaf(i), _) => Err(wrong(expected(KEYS[i].ty), v, path)),
        (Node::Table, DeValue::Table(t)) => check_shape(t, pattern, path, ctx),
        (Node::Table, _) => Err(wrong(section_description(pattern), v, path)),
        (Node::Array, DeValue::Array(items)) => {
            let entry = format!("{pattern}.#");
            for (i, item) in items.iter().enumerate() {
                let item_path = format!("{path}.{i}");
                match item.get_ref() {
                    DeValue::Table(t) => check_shape(t, &entry, &item_path, ctx)?,
                    _ => return Err(wrong(section_description(&entry), item, &item_path)),
                }
            }
            Ok(())
        }
        (Node::Array, _) => Err(wrong(
            &format!("an array of tables (write each entry as [[{path}]])"),
            v,
            path,
        )),
    }
}
