//! Terminal lines of the contacts attached along the channel.

use super::format::{number, residual, si};
use qheat::output::schema::summary::ContactSummary;

/// One line per attached contact: where it sits, its level (given or
/// read) and what it carries; then the probes' residual.
pub fn print_contacts(contacts: &[ContactSummary], probe_residual: Option<f64>) {
    for c in contacts {
        let level = match c.mode.as_str() {
            "voltage" => format!("reads µ = {} eV", number(c.fermi_level_ev)),
            "temperature" => format!(
                "reads µ = {} eV, T = {} K",
                number(c.fermi_level_ev),
                number(c.temperature_k)
            ),
            _ => format!(
                "at µ = {} eV, T = {} K",
                number(c.fermi_level_ev),
                number(c.temperature_k)
            ),
        };
        println!(
            "contact {:<9} {} at x = {} nm {level}; I = {}, heat {}",
            c.name,
            c.mode,
            number(c.x_nm),
            si(c.current_a, "A", 4),
            si(c.heat_current_w, "W", 4)
        );
    }
    if let Some(r) = probe_residual {
        println!(
            "probes            zero-current residual {} (relative to each probe's gross exchange)",
            residual(r)
        );
    }
}
