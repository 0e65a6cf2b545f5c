//! Currents of the contacts attached along the channel.
//!
//! Contact p exchanges with the device, per unit energy, the particle flow
//! j_p(E) = (g_s/h) (Tr[Γ_p A] f_p − Tr[Γ_p G^n]) (positive into the
//! device), the same expression as for the two leads. From it, like for
//! the leads: the electric current I_p = −e ∫ j_p dE, the energy current
//! J_E,p = ∫ E j_p dE and the heat current J_Q,p = ∫ (E − µ_p) j_p dE out
//! of the contact into the device. A voltage probe carries I_p = 0, a
//! temperature probe also J_Q,p = 0 (at the fixed point of the Born loop,
//! to its tolerance).

use super::flow_scale;
use crate::model::ContactMode;
use crate::scba::Solution;
use crate::units::ELEMENTARY_CHARGE;

/// What one attached contact reads and carries.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct ContactReading {
    /// Name of the contact.
    pub name: String,
    /// "fixed", "voltage" or "temperature".
    pub mode: ContactMode,
    /// Cells it touches.
    pub cells: Vec<usize>,
    /// Position of its first cell (nm).
    pub x_nm: f64,
    /// Fermi level µ_p (eV): given, or solved for a probe.
    pub fermi_level_ev: f64,
    /// Temperature T_p (K): given, or solved for a temperature probe.
    pub temperature_k: f64,
    /// Particle current into the device, ∫ j_p dE (1/s).
    pub particle_current_per_s: f64,
    /// Electric current into the device, I_p = −e ∫ j_p dE (A).
    pub current_a: f64,
    /// Energy current into the device, J_E,p = ∫ E j_p dE (W).
    pub energy_current_w: f64,
    /// Heat current out of the contact into the device,
    /// J_Q,p = ∫ (E − µ_p) j_p dE (W).
    pub heat_current_w: f64,
    /// Gross particle exchange, ∫ (|Tr[Γ_p A] f_p| + |Tr[Γ_p G^n]|) g_s/h dE
    /// (1/s): the scale a probe's zero current is measured against.
    pub gross_particle_per_s: f64,
    /// Gross heat exchange ∫ |E − µ_p| (inflow + outflow) dE (W).
    pub gross_heat_w: f64,
}

/// The readings of every attached contact of a solution (empty for a
/// two-terminal device).
pub fn contact_readings(sol: &Solution) -> Vec<ContactReading> {
    let p = &sol.problem;
    let flows = &sol.pass.contact_flows;
    let de = p.grid.step_ev;
    let js = flow_scale(p);
    p.contacts
        .iter()
        .enumerate()
        .map(|(q, c)| {
            let mu = c.fermi_level_ev;
            let (mut n, mut en, mut gross, mut gross_q) = (0.0, 0.0, 0.0, 0.0);
            for k in 0..p.grid.count {
                let e = p.grid.energy(k);
                let j = js * flows.net(k, q);
                let g = js * flows.gross(k, q);
                n += j;
                en += e * j;
                gross += g;
                gross_q += (e - mu).abs() * g;
            }
            let x_nm = c
                .cells
                .first()
                .and_then(|&i| p.device.x_nm.get(i))
                .copied()
                .unwrap_or(f64::NAN);
            ContactReading {
                name: c.name.clone(),
                mode: c.mode,
                cells: c.cells.clone(),
                x_nm,
                fermi_level_ev: mu,
                temperature_k: c.temperature_k,
                particle_current_per_s: n * de,
                current_a: -ELEMENTARY_CHARGE * n * de,
                energy_current_w: ELEMENTARY_CHARGE * en * de,
                heat_current_w: ELEMENTARY_CHARGE * (en - mu * n) * de,
                gross_particle_per_s: gross * de,
                gross_heat_w: ELEMENTARY_CHARGE * gross_q * de,
            }
        })
        .collect()
}

/// Sums over the attached contacts that the ledger adds to the leads'
/// terms: (Σ I_p, Σ J_E,p, Σ J_Q,p, −Σ (µ_p − µ_2) I_p (the contacts'
/// share of the electrical power, W), Σ gross heat, Σ gross energy).
pub(super) fn ledger_terms(sol: &Solution, readings: &[ContactReading]) -> [f64; 6] {
    let mu2 = sol.problem.right.fermi_level_ev;
    let p = &sol.problem;
    let js = flow_scale(p);
    let mut gross_e = 0.0;
    for k in 0..p.grid.count {
        let e = p.grid.energy(k);
        for q in 0..p.contacts.len() {
            gross_e += e.abs() * js * p.grid.step_ev * sol.pass.contact_flows.gross(k, q);
        }
    }
    let mut t = [0.0, 0.0, 0.0, 0.0, 0.0, ELEMENTARY_CHARGE * gross_e];
    for r in readings {
        t[0] += r.current_a;
        t[1] += r.energy_current_w;
        t[2] += r.heat_current_w;
        t[3] -= (r.fermi_level_ev - mu2) * r.current_a;
        t[4] += r.gross_heat_w;
    }
    t
}
