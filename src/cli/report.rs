//! `qheat report DIR`.

use super::{Common, Failure};
use qheat::output::manifest::add_file;
use qheat::output::report::build_report;
use qheat::output::schema::summary::ReportOutput;
use std::path::Path;

/// Write DIR/report.html: one self-contained page with the folder's
/// values, figures and resolved case, recorded in the folder's manifest;
/// print its path. A report.html that qheat did not write is left alone.
pub fn report(dir: &Path, common: &Common) -> Result<(), Failure> {
    if !dir.is_dir() {
        return Err(Failure::BadInput(format!(
            "{} is not a result folder (no such directory)",
            dir.display()
        )));
    }
    let html = build_report(dir).map_err(|e| match e {
        qheat::output::OutputError::Report { .. } => Failure::BadInput(e.to_string()),
        other => Failure::from(other),
    })?;
    let path = add_file(dir, "report.html", html.as_bytes()).map_err(|e| match e {
        qheat::output::OutputError::InTheWay { .. } => Failure::BadInput(format!(
            "{e}\nhint: move or rename that report.html, then run the report again"
        )),
        other => Failure::from(other),
    })?;
    if common.json {
        let shown = ReportOutput {
            report: path.display().to_string(),
            bytes: html.len(),
        };
        println!(
            "{}",
            serde_json::to_string(&shown).expect("JSON of plain values")
        );
    } else if !common.quiet {
        println!("{}", path.display());
    }
    Ok(())
}
