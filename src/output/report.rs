//! One self-contained HTML page for a result folder: the case name, a
//! table of the recorded values with units, the conservation ledger, every
//! figure (inline SVG, the headline figure first), tables of sweep files
//! and the resolved case. No external resources: the page opens offline
//! and can be mailed as one file.
//!
//! The page shows what the folder holds and nothing else, so that a folder
//! with only a summary (coefficients) or only a sweep table and its figures
//! reports as well as a full solve.

use super::OutputError;
use super::schema::summary::SolveSummary;
use serde_json::{Map, Value};
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// Figures in the order a reader wants them; others follow by name.
const FIGURE_ORDER: [&str; 5] = [
    "device.svg",
    "spectrum.svg",
    "bond_current.svg",
    "occupation.svg",
    "convergence.svg",
];

/// Data files of a solve, listed but not tabulated (they are long).
const DATA_FILES: [(&str, &str); 9] = [
    (
        "sites.csv",
        "per cell: position, band edge, local Fermi level and its status, lattice power, density, drop to the next cell",
    ),
    (
        "spectrum.csv",
        "per energy: flows from each lead and from the bath",
    ),
    (
        "convergence.csv",
        "per Born iteration: residual and terminal currents",
    ),
    (
        "bond_current.npy",
        "energy-resolved bond current, (cells − 1) × energies, A/eV",
    ),
    (
        "bond_current.npz",
        "the bond-current map with its axes: bond positions (nm) and energies (eV)",
    ),
    (
        "occupation.npz",
        "occupation f(x, E) of each cell's states, cells × energies, with its axes",
    ),
    (
        "self_energy_retarded.npy",
        "scattering self-energy (retarded) for warm starts",
    ),
    (
        "self_energy_in.npy",
        "scattering in-scattering function for warm starts",
    ),
    (
        "summary.json",
        "every scalar result, the ledger and the resolved case",
    ),
];

/// Rows of a tabulated CSV shown at most.
const MAX_TABLE_ROWS: usize = 500;

fn report_error(path: &Path, message: impl Into<String>) -> OutputError {
    OutputError::Report {
        path: path.to_path_buf(),
        message: message.into(),
    }
}

/// Escape text for HTML element content and attribute values.
pub fn escape(text: &str) -> String {
    let mut s = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => s.push_str("&amp;"),
            '<' => s.push_str("&lt;"),
            '>' => s.push_str("&gt;"),
            '"' => s.push_str("&quot;"),
            '\'' => s.push_str("&#39;"),
            _ => s.push(c),
        }
    }
    s
}

/// A number with an SI prefix and four significant figures.
pub fn si(value: f64, unit: &str) -> String {
    super::format_si(value, unit, 4)
}

/// Unit of a summary key from the output schema, looked up by its path
/// (`results.current_a`); `None` for plain numbers, text and flags.
fn unit_of(path: &str) -> Option<&'static str> {
    super::schema::keys::key_doc(path)
        .map(|(u, _)| u)
        .filter(|u| !matches!(*u, "1" | "-") && !u.contains(' '))
}

/// Units shown with SI prefixes.
const PREFIXED: [&str; 9] = ["A", "W", "V", "S", "W/K", "V/K", "W/K²", "A/eV", "eV"];

/// Keys shown first, in this order; others follow alphabetically.
const ORDER: [&str; 34] = [
    "voltage_v",
    "current_a",
    "conductance_s",
    "electrical_power_w",
    "heat_current_left_w",
    "heat_current_right_w",
    "lattice_power_w",
    "lattice_power_phonon_side_w",
    "energy_current_left_w",
    "energy_current_right_w",
    "current_left_a",
    "current_right_a",
    "contact_drop_left_v",
    "interior_drop_v",
    "contact_drop_right_v",
    "fermi_level_left_ev",
    "fermi_level_right_ev",
    "temperature_left_k",
    "temperature_right_k",
    "worst_relative",
    "charge_a",
    "charge_scale_a",
    "charge_relative",
    "lattice_w",
    "lattice_relative",
    "leads_lattice_w",
    "leads_lattice_relative",
    "power_scale_w",
    "heat_w",
    "heat_relative",
    "energy_w",
    "energy_relative",
    "conductance_s",
    "seebeck_v_per_k",
];

fn ordered(obj: &Map<String, Value>) -> Vec<(&String, &Value)> {
    let mut v: Vec<_> = obj.iter().collect();
    v.sort_by_key(|(k, _)| {
        (
            ORDER.iter().position(|o| o == k).unwrap_or(ORDER.len()),
            k.to_string(),
        )
    });
    v
}

/// A reader's name for well-known keys.
fn known_name(key: &str) -> Option<&'static str> {
    Some(match key {
        "voltage_v" => "applied voltage V",
        "current_a" => "current I",
        "current_left_a" => "current from the left contact I₁",
        "current_right_a" => "current from the right contact I₂",
        "energy_current_left_w" => "energy current from the left contact",
        "energy_current_right_w" => "energy current from the right contact",
        "heat_current_left_w" => "heat current out of the left contact",
        "heat_current_right_w" => "heat current out of the right contact",
        "lattice_power_w" => "lattice power, all cells (electron side ΣP_i)",
        "lattice_power_phonon_side_w" => "lattice power, all modes (phonon side ΣP_m)",
        "electrical_power_w" => "electrical power I·V",
        "conductance_s" => "conductance G = I/V",
        "contact_drop_left_v" => "Fermi-level drop into the left contact",
        "interior_drop_v" => "Fermi-level drop across the device",
        "contact_drop_right_v" => "Fermi-level drop into the right contact",
        "charge_a" => "charge residual I₁ + I₂",
        "charge_scale_a" => "charge scale max(|I₁|, current floor)",
        "charge_relative" => "charge residual, relative",
        "energy_w" => "energy identity J_E1 + J_E2 − ΣP_i",
        "energy_relative" => "energy identity, relative",
        "lattice_w" => "lattice residual ΣP_m − ΣP_i",
        "lattice_relative" => "lattice residual, relative",
        "leads_lattice_w" => "leads vs lattice residual J_E1 + J_E2 − ΣP_m",
        "leads_lattice_relative" => "leads vs lattice residual, relative",
        "power_scale_w" => "power scale of the lattice residuals",
        "worst_relative" => "worst relative residual (physics entries)",
        "heat_w" => "heat residual ΣP − (I·V + J_Q1 + J_Q2)",
        "heat_relative" => "heat residual, relative",
        "seebeck_v_per_k" => "Seebeck coefficient S",
        "peltier_v" => "Peltier coefficient Π",
        "thermal_conductance_w_per_k" => "electronic thermal conductance κe",
        "lorenz_ratio" => "Lorenz ratio κe/(G T L₀)",
        "power_factor_w_per_k2" => "power factor S²G",
        "zt" => "figure of merit ZT",
        "kelvin_residual" => "Kelvin (Onsager) residual",
        "phonon_conductance_w_per_k" => "phonon thermal conductance κph",
        "phonon_conductance_source" => "source of κph (lattice, given or none)",
        "fermi_level_left_ev" => "left lead Fermi level µ₁",
        "fermi_level_right_ev" => "right lead Fermi level µ₂",
        "temperature_left_k" => "left lead temperature",
        "temperature_right_k" => "right lead temperature",
        _ => return None,
    })
}

/// One table cell for a JSON value at `path` (its unit from the schema).
fn show_value(path: &str, v: &Value) -> String {
    let key = path.rsplit('.').next().unwrap_or(path);
    match v {
        Value::Null => "—".into(),
        Value::Bool(b) => if *b { "yes" } else { "no" }.into(),
        Value::String(s) => escape(s),
        Value::Number(n) => {
            let Some(x) = n.as_f64() else {
                return escape(&n.to_string());
            };
            if n.is_i64() || n.is_u64() {
                return match unit_of(path) {
                    Some(u) => format!("{n} {u}"),
                    None => n.to_string(),
                };
            }
            match unit_of(path) {
                // Prefixes only where they read naturally (no "mnm", no
                // "meV²" for 1e-3 eV²).
                Some(u) if PREFIXED.contains(&u) => escape(&si(x, u)),
                Some(u) => format!("{} {}", trim(x), escape(u)),
                None if key.contains("relative") || key.contains("residual") => {
                    format!("{x:.2e}")
                }
                None => trim(x),
            }
        }
        Value::Array(a) => {
            if a.len() <= 8 && a.iter().all(|x| !x.is_object() && !x.is_array()) {
                a.iter()
                    .map(|x| show_value(path, x))
                    .collect::<Vec<_>>()
                    .join(", ")
            } else {
                format!("[{} entries]", a.len())
            }
        }
        Value::Object(o) => format!("{{{} entries}}", o.len()),
    }
}

/// Plain number with up to six significant figures.
fn trim(x: f64) -> String {
    if x == 0.0 {
        return "0".into();
    }
    let a = x.abs();
    if (1e-3..1e6).contains(&a) {
        let d = (5 - a.log10().floor() as i32).clamp(0, 9) as usize;
        let s = format!("{x:.d$}");
        if s.contains('.') {
            s.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            s
        }
    } else {
        format!("{x:.4e}")
    }
}

fn label_of(key: &str) -> String {
    match known_name(key) {
        Some(n) => n.to_string(),
        None => key.replace('_', " "),
    }
}

fn join(path: &str, key: &str) -> String {
    if path.is_empty() {
        key.to_string()
    } else {
        format!("{path}.{key}")
    }
}

/// Rows (label, value) of the object at `path`, nested objects flattened
/// with a "parent / child" label.
fn rows_of(path: &str, prefix: &str, obj: &Map<String, Value>, out: &mut Vec<(String, String)>) {
    for (k, v) in ordered(obj) {
        let label = if prefix.is_empty() {
            label_of(k)
        } else {
            format!("{prefix} / {}", label_of(k))
        };
        let at = join(path, k);
        match v {
            Value::Object(inner) => rows_of(&at, &label, inner, out),
            Value::Array(items) if items.iter().all(Value::is_object) && !items.is_empty() => {
                for (i, item) in items.iter().enumerate() {
                    if let Value::Object(inner) = item {
                        rows_of(
                            &format!("{at}[]"),
                            &format!("{label} {}", i + 1),
                            inner,
                            out,
                        );
                    }
                }
            }
            _ => out.push((escape(&label), show_value(&at, v))),
        }
    }
}

fn table(html: &mut String, rows: &[(String, String)]) {
    html.push_str("<table class=\"values\"><tbody>\n");
    for (k, v) in rows {
        let _ = writeln!(html, "<tr><th>{k}</th><td>{v}</td></tr>");
    }
    html.push_str("</tbody></table>\n");
}

/// The convergence section of a solve summary.
fn convergence_rows(summary: &Map<String, Value>) -> Vec<(String, String)> {
    let mut rows = Vec::new();
    if let Some(Value::Bool(c)) = summary.get("coherent") {
        rows.push((
            "transport".into(),
            if *c {
                "coherent (no scattering inside the device, no Born loop)".into()
            } else {
                "with scattering (self-consistent Born loop)".into()
            },
        ));
    }
    if let Some(Value::Bool(c)) = summary.get("converged") {
        rows.push((
            "converged".into(),
            if *c {
                "yes".into()
            } else {
                "<strong class=\"bad\">NO: results are flagged as not trustworthy</strong>".into()
            },
        ));
    }
    if let Some(Value::Object(scba)) = summary.get("scba") {
        if let Some(n) = scba.get("iterations") {
            rows.push(("Born iterations".into(), show_value("scba.iterations", n)));
        }
        if let Some(Value::Array(h)) = scba.get("history")
            && let Some(Value::Object(last)) = h.last()
            && let Some(r) = last.get("residual")
        {
            rows.push((
                "last residual".into(),
                show_value("scba.history[].residual", r),
            ));
        }
        if let Some(Value::Object(p)) = scba.get("params")
            && let Some(t) = p.get("tolerance")
        {
            rows.push(("tolerance".into(), show_value("relative", t)));
        }
    }
    if let Some(h) = summary.get("hermitian_part") {
        rows.push((
            "Hermitian part of the phonon self-energy".into(),
            show_value("hermitian_part", h),
        ));
    }
    rows
}

const CSS: &str = "
body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;color:#22262e;margin:0;background:#fafaf7}
main{max-width:1060px;margin:0 auto;padding:24px 28px 60px}
h1{font-size:1.7em;margin:0.2em 0 0.1em}
h2{font-size:1.25em;margin:1.6em 0 0.5em;border-bottom:2px solid #e4e6ea;padding-bottom:4px}
p.meta{color:#5a606b;margin:0 0 1em}
table{border-collapse:collapse;margin:0.4em 0;font-size:0.95em;background:#fff}
table.values th{text-align:left;font-weight:normal;color:#3b475c;padding:4px 18px 4px 8px}
table.values td{font-variant-numeric:tabular-nums;padding:4px 8px}
table.values tr:nth-child(even){background:#f3f2ee}
table.data th,table.data td{border:1px solid #e4e6ea;padding:3px 8px;text-align:right;font-variant-numeric:tabular-nums}
table.data th{background:#f3f2ee}
figure{margin:1.2em 0;background:#fff;border:1px solid #e4e6ea;padding:8px}
figure svg{display:block;max-width:100%;height:auto}
figcaption{color:#5a606b;font-size:0.9em;margin-bottom:6px}
pre{background:#fff;border:1px solid #e4e6ea;padding:12px;overflow-x:auto;font-size:0.9em}
.bad{color:#a02c2c}
ul.notes li{margin:0.3em 0}
.banner{background:#fbe9e4;border:1px solid #d9a89a;padding:10px 14px;margin:1em 0}
";

/// The file name of `p` as text (empty when it has none).
fn name_of(p: &Path) -> String {
    p.file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default()
}

/// Read a text file of the folder.
fn read_text(p: &Path) -> Result<String, OutputError> {
    std::fs::read_to_string(p).map_err(|source| OutputError::Io {
        action: "reading",
        path: p.to_path_buf(),
        source,
    })
}

/// The visible files of the folder, sorted by name.
fn folder_files(dir: &Path) -> Result<Vec<PathBuf>, OutputError> {
    let entries = std::fs::read_dir(dir).map_err(|source| OutputError::Io {
        action: "listing",
        path: dir.to_path_buf(),
        source,
    })?;
    let mut files: Vec<PathBuf> = entries
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.is_file())
        .filter(|p| {
            p.file_name()
                .and_then(|n| n.to_str())
                .is_some_and(|n| !n.starts_with('.'))
        })
        .collect();
    files.sort();
    Ok(files)
}

/// summary.json as an object, or the reason it cannot be shown (neither
/// when the folder has none).
type SummaryRead = (Option<Map<String, Value>>, Option<String>);

fn read_summary(dir: &Path) -> Result<SummaryRead, OutputError> {
    let path = dir.join("summary.json");
    if !path.is_file() {
        return Ok((None, None));
    }
    Ok(match serde_json::from_str::<Value>(&read_text(&path)?) {
        Ok(Value::Object(m)) => (Some(m), None),
        Ok(_) => (
            None,
            Some("summary.json does not hold a JSON object".to_string()),
        ),
        Err(e) => (
            None,
            Some(format!("summary.json cannot be read as JSON: {e}")),
        ),
    })
}

/// The SVG figures of the folder, the headline ones first.
fn ordered_figures(files: &[PathBuf]) -> Vec<PathBuf> {
    let mut figures: Vec<PathBuf> = files
        .iter()
        .filter(|p| p.extension().is_some_and(|e| e == "svg"))
        .cloned()
        .collect();
    figures.sort_by_key(|p| {
        let n = name_of(p);
        (
            FIGURE_ORDER
                .iter()
                .position(|f| *f == n)
                .unwrap_or(FIGURE_ORDER.len()),
            n,
        )
    });
    figures
}

/// A string value at the top level of the summary.
fn summary_str(summary: Option<&Map<String, Value>>, key: &str) -> Option<String> {
    summary
        .and_then(|s| s.get(key))
        .and_then(Value::as_str)
        .map(str::to_string)
}

/// The page head, title, meta line and the failure or not-converged banner.
fn page_head(
    html: &mut String,
    summary: Option<&Map<String, Value>>,
    summary_problem: Option<&str>,
    folder_name: &str,
) {
    let case_name = summary_str(summary, "case_name").unwrap_or_else(|| folder_name.to_string());
    let _ = write!(
        html,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n\
         <title>{} — qheat report</title>\n<style>{CSS}</style>\n</head>\n<body>\n<main>\n",
        escape(&case_name)
    );
    let _ = writeln!(html, "<h1>{}</h1>", escape(&case_name));
    let mut meta = Vec::new();
    if let Some(k) = summary_str(summary, "kind") {
        meta.push(format!("{} run", escape(&k)));
    }
    if let Some(f) = summary_str(summary, "case_file") {
        meta.push(format!("case file <code>{}</code>", escape(&f)));
    }
    if let Some(Value::Object(p)) = summary.and_then(|s| s.get("program")) {
        meta.push(format!(
            "{} {}",
            escape(p.get("name").and_then(Value::as_str).unwrap_or("")),
            escape(p.get("version").and_then(Value::as_str).unwrap_or(""))
        ));
    }
    meta.push(format!("folder <code>{}</code>", escape(folder_name)));
    let _ = writeln!(html, "<p class=\"meta\">{}</p>", meta.join(" · "));

    if let Some(problem) = summary_problem {
        let _ = writeln!(html, "<div class=\"banner\">{}</div>", escape(problem));
    }
    let Some(s) = summary else { return };
    if let Some(e) = s.get("error").and_then(Value::as_str) {
        let _ = writeln!(
            html,
            "<div class=\"banner\"><strong>This run failed:</strong> {}</div>",
            escape(e)
        );
    } else if s.get("trustworthy") == Some(&Value::Bool(false)) {
        html.push_str(
            "<div class=\"banner\"><strong>Not converged:</strong> the values below are \
             flagged as not trustworthy.</div>\n",
        );
    }
}

/// Every figure inlined, each with its file name as caption.
fn figures_html(figures: &[PathBuf]) -> Result<String, OutputError> {
    let mut html = String::new();
    if figures.is_empty() {
        return Ok(html);
    }
    html.push_str("<h2>Figures</h2>\n");
    for f in figures {
        let svg = read_text(f)?;
        let Some(i) = svg.find("<svg") else {
            return Err(report_error(f, "not an SVG figure: no <svg> element found"));
        };
        let _ = writeln!(
            html,
            "<figure id=\"{}\"><figcaption>{}</figcaption>\n{}\n</figure>",
            escape(&name_of(f)),
            escape(&name_of(f)),
            svg[i..].trim_end()
        );
    }
    Ok(html)
}

/// The known data files present in the folder, with what each holds and
/// its size.
fn data_files_html(html: &mut String, dir: &Path) {
    let data: Vec<(String, &str, u64)> = DATA_FILES
        .iter()
        .filter_map(|(n, what)| {
            let p = dir.join(n);
            std::fs::metadata(&p)
                .ok()
                .filter(|m| m.is_file())
                .map(|m| (n.to_string(), *what, m.len()))
        })
        .collect();
    if data.is_empty() {
        return;
    }
    html.push_str("<h2>Data files in this folder</h2>\n<table class=\"values\"><tbody>\n");
    for (n, what, len) in &data {
        let _ = writeln!(
            html,
            "<tr><th><code>{}</code></th><td>{}</td><td>{}</td></tr>",
            escape(n),
            escape(what),
            escape(&si(*len as f64, "B"))
        );
    }
    html.push_str("</tbody></table>\n");
}

/// Build the HTML page of a result folder.
///
/// Errors when the folder cannot be read, holds nothing to show (no
/// summary.json, figure or CSV table) or a file in it cannot be read.
pub fn build_report(dir: &Path) -> Result<String, OutputError> {
    let files = folder_files(dir)?;
    let (summary, summary_problem) = read_summary(dir)?;
    let figures = ordered_figures(&files);
    let known_data = |n: &str| DATA_FILES.iter().any(|(f, _)| *f == n);
    let tables: Vec<PathBuf> = files
        .iter()
        .filter(|p| p.extension().is_some_and(|e| e == "csv") && !known_data(&name_of(p)))
        .cloned()
        .collect();
    if summary.is_none() && summary_problem.is_none() && figures.is_empty() && tables.is_empty() {
        return Err(report_error(
            dir,
            "nothing to report: the folder has no summary.json, no .svg figure and no .csv table",
        ));
    }
    let folder_name = dir
        .canonicalize()
        .ok()
        .and_then(|p| p.file_name().map(|n| n.to_string_lossy().into_owned()))
        .unwrap_or_else(|| dir.display().to_string());

    let mut html = String::with_capacity(1 << 20);
    page_head(
        &mut html,
        summary.as_ref(),
        summary_problem.as_deref(),
        &folder_name,
    );
    // The figures come right after the headline values: the page answers
    // where the heat goes and where the resistance sits before it turns to
    // convergence, the ledger and the other recorded values.
    let figure_html = figures_html(&figures)?;
    match summary.as_ref() {
        Some(s) => summary_sections(&mut html, s, &figure_html),
        None => html.push_str(&figure_html),
    }
    for t in &tables {
        let _ = writeln!(html, "<h2>Table {}</h2>", escape(&name_of(t)));
        csv_table(&mut html, t, &read_text(t)?)?;
    }
    data_files_html(&mut html, dir);
    if let Some(case) = summary_str(summary.as_ref(), "resolved_case") {
        html.push_str("<h2>Resolved case</h2>\n");
        let _ = writeln!(html, "<pre>{}</pre>", escape(&case));
    }
    html.push_str("</main>\n</body>\n</html>\n");
    Ok(html)
}

/// The results of a solve, read as the typed summary: every value with
/// the unit the schema gives it. A summary that does not read as a solve
/// summary of this version is shown key by key instead.
fn solve_result_rows(
    s: &Map<String, Value>,
    o: &Map<String, Value>,
    rows: &mut Vec<(String, String)>,
) {
    let typed = (s.get("kind").and_then(Value::as_str) == Some("solve"))
        .then(|| serde_json::from_value::<SolveSummary>(Value::Object(s.clone())).ok())
        .flatten();
    let Some(t) = typed else {
        return rows_of("results", "", o, rows);
    };
    let r = &t.results;
    let mut add = |key: &str, v: f64| {
        let at = format!("results.{key}");
        rows.push((escape(&label_of(key)), show_value(&at, &Value::from(v))));
    };
    for (key, v) in [("voltage_v", r.voltage_v), ("current_a", r.current_a)] {
        add(key, v);
    }
    if let Some(g) = r.conductance_s {
        add("conductance_s", g);
    }
    for (key, v) in [
        ("electrical_power_w", r.electrical_power_w),
        ("heat_current_left_w", r.heat_current_left_w),
        ("heat_current_right_w", r.heat_current_right_w),
        ("lattice_power_w", r.lattice_power_w),
        ("lattice_power_phonon_side_w", r.lattice_power_phonon_side_w),
        ("energy_current_left_w", r.energy_current_left_w),
        ("energy_current_right_w", r.energy_current_right_w),
        ("current_left_a", r.current_left_a),
        ("current_right_a", r.current_right_a),
        ("contact_drop_left_v", r.contact_drop_left_v),
        ("interior_drop_v", r.interior_drop_v),
        ("contact_drop_right_v", r.contact_drop_right_v),
    ] {
        add(key, v);
    }
    for (what, unit, c) in [
        ("largest drop to the next cell", "V", &r.largest_drop_v),
        ("hottest cell", "W", &r.hottest_cell_w),
        ("coolest cell", "W", &r.coolest_cell_w),
    ] {
        if let Some(c) = c {
            rows.push((
                what.into(),
                escape(&format!(
                    "{} at x = {} nm (cell {})",
                    si(c.value, unit),
                    trim(c.x_nm),
                    c.cell
                )),
            ));
        }
    }
}

/// Tables of a summary: results, operating point, convergence, ledger,
/// warnings and notes, then every other recorded object.
/// The sections of a summary, with `figures` (ready HTML) placed after the
/// headline values.
fn summary_sections(html: &mut String, s: &Map<String, Value>, figures: &str) {
    let mut shown: Vec<&str> = vec![
        "program",
        "kind",
        "case_name",
        "case_file",
        "resolved_case",
        "error",
        "trustworthy",
        "converged",
        "coherent",
        "hermitian_part",
        "scba",
        "warnings",
        "notes",
    ];
    for (key, heading) in [
        ("results", "Results"),
        ("coefficients", "Coefficients"),
        ("operating_point", "Operating point"),
    ] {
        if let Some(Value::Object(o)) = s.get(key) {
            let _ = writeln!(html, "<h2>{heading}</h2>");
            let mut rows = Vec::new();
            match key {
                "results" => solve_result_rows(s, o, &mut rows),
                _ => rows_of(key, "", o, &mut rows),
            }
            table(html, &rows);
            shown.push(key);
        }
    }
    html.push_str(figures);
    let conv = convergence_rows(s);
    if !conv.is_empty() {
        html.push_str("<h2>Convergence</h2>\n");
        table(html, &conv);
    }
    if let Some(Value::Object(l)) = s.get("ledger") {
        html.push_str(
            "<h2>Ledger</h2>\n<p>Conservation checks, each an absolute residual, its \
             scale and their ratio: charge (I₁ + I₂ = 0, against the current), lattice \
             (phonon-side ΣP_m from the final Green's functions against electron-side ΣP_i \
             from the bath flow), leads against lattice (J_E1 + J_E2 = ΣP_m) and heat \
             (ΣP_i = I·V + J_Q1 + J_Q2). These vanish at the fixed point of the Born loop. \
             The energy entry (J_E1 + J_E2 = ΣP_i) holds in every pass by construction and \
             checks only the bookkeeping. The table's <code>compares</code> rows say what \
             each entry compares and relative to what.</p>\n",
        );
        let mut rows = Vec::new();
        rows_of("ledger", "", l, &mut rows);
        table(html, &rows);
        shown.push("ledger");
    }
    warnings_and_notes(html, s);
    other_values(html, s, &shown);
}

/// The warnings and notes of the summary as a list.
fn warnings_and_notes(html: &mut String, s: &Map<String, Value>) {
    let list = |k: &str| -> Vec<String> {
        s.get(k)
            .and_then(Value::as_array)
            .map(|a| {
                a.iter()
                    .map(|v| {
                        v.as_str()
                            .map(str::to_string)
                            .unwrap_or_else(|| v.to_string())
                    })
                    .collect()
            })
            .unwrap_or_default()
    };
    let (warnings, notes) = (list("warnings"), list("notes"));
    html.push_str("<h2>Warnings and notes</h2>\n");
    if warnings.is_empty() && notes.is_empty() {
        html.push_str("<p>None.</p>\n");
    } else {
        html.push_str("<ul class=\"notes\">\n");
        for w in &warnings {
            let _ = writeln!(
                html,
                "<li><strong class=\"bad\">warning:</strong> {}</li>",
                escape(w)
            );
        }
        for n in &notes {
            let _ = writeln!(html, "<li>note: {}</li>", escape(n));
        }
        html.push_str("</ul>\n");
    }
}

/// Every value of the summary not shown in a section of its own.
fn other_values(html: &mut String, s: &Map<String, Value>, shown: &[&str]) {
    let mut rest = Vec::new();
    for (k, v) in s {
        if shown.contains(&k.as_str()) {
            continue;
        }
        match v {
            Value::Object(o) => rows_of(k, &label_of(k), o, &mut rest),
            Value::Array(items) if items.iter().all(Value::is_object) && !items.is_empty() => {
                for (i, item) in items.iter().enumerate() {
                    if let Value::Object(o) = item {
                        let at = format!("{k}[]");
                        rows_of(&at, &format!("{} {}", label_of(k), i + 1), o, &mut rest);
                    }
                }
            }
            Value::Array(items) if items.is_empty() => {}
            _ => rest.push((escape(&label_of(k)), show_value(k, v))),
        }
    }
    if !rest.is_empty() {
        html.push_str("<h2>Other recorded values</h2>\n");
        table(html, &rest);
    }
}

/// A CSV file as an HTML table (header row, then at most
/// [`MAX_TABLE_ROWS`] rows).
fn csv_table(html: &mut String, path: &Path, text: &str) -> Result<(), OutputError> {
    let mut r = csv::ReaderBuilder::new()
        .has_headers(true)
        .flexible(true)
        .from_reader(text.as_bytes());
    let headers = r
        .headers()
        .map_err(|e| report_error(path, format!("reading the CSV header: {e}")))?
        .clone();
    html.push_str("<table class=\"data\"><thead><tr>");
    for h in &headers {
        let _ = write!(html, "<th>{}</th>", escape(h));
    }
    html.push_str("</tr></thead><tbody>\n");
    let mut total = 0usize;
    for rec in r.records() {
        let rec = rec.map_err(|e| report_error(path, format!("reading row {}: {e}", total + 1)))?;
        total += 1;
        if total > MAX_TABLE_ROWS {
            continue;
        }
        html.push_str("<tr>");
        for cell in &rec {
            let shown = match cell.parse::<f64>() {
                Ok(x) if cell.contains(['e', 'E', '.']) => trim(x),
                _ => cell.to_string(),
            };
            let _ = write!(html, "<td>{}</td>", escape(&shown));
        }
        html.push_str("</tr>\n");
    }
    html.push_str("</tbody></table>\n");
    if total > MAX_TABLE_ROWS {
        let _ = writeln!(
            html,
            "<p>First {MAX_TABLE_ROWS} of {total} rows shown; the file holds them all.</p>"
        );
    } else {
        let _ = writeln!(html, "<p>{total} rows.</p>");
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn units_come_from_the_schema() {
        assert_eq!(unit_of("results.heat_current_left_w"), Some("W"));
        assert_eq!(unit_of("coefficients.power_factor_w_per_k2"), Some("W/K²"));
        assert_eq!(unit_of("coefficients.zt"), None);
        assert_eq!(unit_of("results.hottest_cell_w.value"), Some("W"));
        assert_eq!(unit_of("results.largest_drop_v.value"), Some("V"));
        assert_eq!(
            show_value("results.current_a", &serde_json::json!(-2.434e-6)),
            "-2.434 µA"
        );
        assert_eq!(
            show_value(
                "operating_point.temperature_left_k",
                &serde_json::json!(300.0)
            ),
            "300 K"
        );
        assert_eq!(
            show_value("ledger.charge_relative", &serde_json::json!(8.5e-13)),
            "8.50e-13"
        );
    }

    #[test]
    fn escaping_covers_markup() {
        assert_eq!(escape("a<b & \"c\""), "a&lt;b &amp; &quot;c&quot;");
    }
}
