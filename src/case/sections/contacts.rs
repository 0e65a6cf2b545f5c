//! `[[contact]]`: contacts attached along the channel (voltage and
//! temperature probes, fixed reservoirs, polarised contacts with explicit
//! spin).

use super::super::check::{Checker, Choice, MAX_ENERGY_EV, show};
use super::super::error::CaseError;
use super::super::raw::{RawCase, RawContact};
use super::device::DeviceSpec;
use crate::model::{AttachedContact, ContactMode, Polarisation};
use toml::Spanned;

impl Choice for ContactMode {
    const CHOICES: &'static [(&'static str, Self)] = &[
        ("fixed", ContactMode::Fixed),
        ("voltage", ContactMode::Voltage),
        ("temperature", ContactMode::Temperature),
    ];
}

/// The validated attached contacts, in file order.
#[derive(Clone, Debug, Default)]
pub(crate) struct ContactsSpec {
    pub contacts: Vec<AttachedContact>,
}

impl ContactsSpec {
    /// Validate every `[[contact]]` against the device; `mean_lead_t` is
    /// the default temperature of a fixed contact or voltage probe, and the
    /// starting guess of the probes' levels is set at resolve time.
    pub fn from_raw(
        raw: &RawCase,
        ck: &Checker<'_>,
        device: &DeviceSpec,
        mean_lead_t: f64,
    ) -> Result<Self, CaseError> {
        let entries = raw.contact.as_deref().unwrap_or_default();
        let mut contacts = Vec::with_capacity(entries.len());
        for (i, e) in entries.iter().enumerate() {
            let c = one_contact(i, e, ck, device, mean_lead_t)?;
            if let Some(j) = contacts
                .iter()
                .position(|o: &AttachedContact| o.name == c.name)
            {
                return Err(ck.ctx.invalid(
                    e.get_ref().name.as_ref().map(|s| s.span()),
                    &format!("contact.{i}.name"),
                    &format!(
                        "a name no other contact has (contact.{j} is \"{}\")",
                        c.name
                    ),
                    format!("\"{}\"", c.name),
                ));
            }
            contacts.push(c);
        }
        Ok(Self { contacts })
    }
}

/// Entry `i` of `[[contact]]`.
fn one_contact(
    i: usize,
    e: &Spanned<RawContact>,
    ck: &Checker<'_>,
    device: &DeviceSpec,
    mean_lead_t: f64,
) -> Result<AttachedContact, CaseError> {
    let span = Some(e.span());
    let r = e.get_ref();
    let key = |k: &str| format!("contact.{i}.{k}");
    let name = match &r.name {
        Some(n) if !n.get_ref().trim().is_empty() => n.get_ref().clone(),
        Some(n) => {
            return Err(ck
                .ctx
                .invalid(Some(n.span()), &key("name"), "a non-empty name", "\"\""));
        }
        None => {
            return Err(ck
                .ctx
                .missing(span.clone(), &key("name"), "the contact's name"));
        }
    };
    let cells = contact_cells(i, r, ck, device, span.clone())?;
    let gamma_ev = ck.positive(&r.gamma_ev, &key("gamma_ev"), "a coupling in eV")?;
    let gamma_ev = ck.required(
        gamma_ev,
        span.clone(),
        &key("gamma_ev"),
        "the coupling γ in eV (> 0)",
    )?;
    if gamma_ev > MAX_ENERGY_EV {
        return Err(ck.ctx.invalid(
            span,
            &key("gamma_ev"),
            "a coupling ≤ 1e6 eV",
            show(gamma_ev),
        ));
    }
    let mode = ck
        .choice::<ContactMode>(&r.mode, &key("mode"))?
        .unwrap_or(ContactMode::Fixed);
    let (fermi_level_ev, temperature_k) = levels(i, r, ck, mode, mean_lead_t, span)?;
    let polarisation = polarisation(i, r, ck, device)?;
    Ok(AttachedContact {
        name,
        cells,
        gamma_ev,
        mode,
        fermi_level_ev,
        temperature_k,
        polarisation,
    })
}

/// `cells = [..]`, or `first_cell` with `cell_count` (default 1): inside
/// the device, ascending, no repeats.
fn contact_cells(
    i: usize,
    r: &RawContact,
    ck: &Checker<'_>,
    device: &DeviceSpec,
    span: Option<std::ops::Range<usize>>,
) -> Result<Vec<usize>, CaseError> {
    let n = device.cells;
    let key = |k: &str| format!("contact.{i}.{k}");
    let inside = format!("a cell index from 0 to {}", n.saturating_sub(1));
    match (&r.cells, &r.first_cell) {
        (Some(_), Some(f)) => Err(ck.ctx.invalid(
            Some(f.span()),
            &key("first_cell"),
            "either cells = [..] or first_cell (+ cell_count), not both (hint: remove one)",
            f.get_ref(),
        )),
        (Some(list), None) => {
            ck.unused(
                &r.cell_count,
                &key("cell_count"),
                "beside cells = [..] (it goes with first_cell)",
            )?;
            let v = list.get_ref();
            let bad = v.iter().position(|&c| c < 0 || c as usize >= n);
            let sorted = v.windows(2).all(|w| w[0] < w[1]);
            if v.is_empty() || bad.is_some() || !sorted {
                let what = format!("a non-empty ascending list of distinct cells, each {inside}");
                return Err(ck.ctx.invalid(
                    Some(list.span()),
                    &key("cells"),
                    &what,
                    format!("{v:?}"),
                ));
            }
            Ok(v.iter().map(|&c| c as usize).collect())
        }
        (None, Some(_)) => {
            let first = ck.int(&r.first_cell, &key("first_cell"), &inside, |c| {
                c >= 0 && (c as usize) < n
            })?;
            let first = first.unwrap_or(0);
            let left = n - first;
            let count = ck.int(
                &r.cell_count,
                &key("cell_count"),
                &format!("a count from 1 to {left} (the contact must end inside the device)"),
                |c| c >= 1 && (c as usize) <= left,
            )?;
            Ok((first..first + count.unwrap_or(1)).collect())
        }
        (None, None) => Err(ck.ctx.missing(
            span,
            &key("cells"),
            "the cells the contact touches: cells = [..] or first_cell (+ cell_count)",
        )),
    }
}

/// (µ, T) by mode: a fixed contact needs fermi_level_ev and may give
/// temperature_k (default: the mean of the leads); a voltage probe takes
/// temperature_k only; a temperature probe takes neither. A probe's µ
/// here is a placeholder (the solve starts from the leads' mean level).
fn levels(
    i: usize,
    r: &RawContact,
    ck: &Checker<'_>,
    mode: ContactMode,
    mean_lead_t: f64,
    span: Option<std::ops::Range<usize>>,
) -> Result<(f64, f64), CaseError> {
    let key = |k: &str| format!("contact.{i}.{k}");
    let mu = ck.energy(&r.fermi_level_ev, &key("fermi_level_ev"))?;
    let t = ck.temperature(&r.temperature_k, &key("temperature_k"))?;
    match mode {
        ContactMode::Fixed => {
            let mu = ck.required(
                mu,
                span,
                &key("fermi_level_ev"),
                "the Fermi level in eV of a fixed contact (or mode = \"voltage\" to let it float)",
            )?;
            Ok((mu, t.unwrap_or(mean_lead_t)))
        }
        ContactMode::Voltage => {
            ck.unused(&r.fermi_level_ev, &key("fermi_level_ev"), "for a voltage probe (its Fermi level is solved; hint: remove it, or use mode = \"fixed\")")?;
            Ok((f64::NAN, t.unwrap_or(mean_lead_t)))
        }
        ContactMode::Temperature => {
            let why = "for a temperature probe (its Fermi level and temperature are solved; hint: remove it, or use mode = \"voltage\" or \"fixed\")";
            ck.unused(&r.fermi_level_ev, &key("fermi_level_ev"), why)?;
            ck.unused(&r.temperature_k, &key("temperature_k"), why)?;
            Ok((f64::NAN, mean_lead_t))
        }
    }
}

/// `polarisation` (0 ≤ P ≤ 1) and `polarisation_direction` (three
/// numbers, not all zero; normalised; default +z), explicit spin only.
fn polarisation(
    i: usize,
    r: &RawContact,
    ck: &Checker<'_>,
    device: &DeviceSpec,
) -> Result<Option<Polarisation>, CaseError> {
    let key = |k: &str| format!("contact.{i}.{k}");
    if !device.spin_explicit {
        let why = "without device.spin = \"explicit\" (a polarised contact needs the spin in the orbitals; hint: set device.spin = \"explicit\")";
        ck.unused(&r.polarisation, &key("polarisation"), why)?;
        ck.unused(
            &r.polarisation_direction,
            &key("polarisation_direction"),
            why,
        )?;
        return Ok(None);
    }
    let strength = ck.ranged(
        &r.polarisation,
        &key("polarisation"),
        "a strength from 0 to 1",
        |p| (0.0..=1.0).contains(&p),
    )?;
    let Some(strength) = strength else {
        ck.unused(
            &r.polarisation_direction,
            &key("polarisation_direction"),
            "without contact.#.polarisation (hint: give the strength, 0 to 1)",
        )?;
        return Ok(None);
    };
    let direction = match &r.polarisation_direction {
        None => [0.0, 0.0, 1.0],
        Some(d) => {
            let v = d.get_ref();
            let norm = v.iter().map(|x| x * x).sum::<f64>().sqrt();
            if v.len() != 3 || !(norm.is_finite() && norm > 0.0) {
                return Err(ck.ctx.invalid(
                    Some(d.span()),
                    &key("polarisation_direction"),
                    "three finite numbers [x, y, z], not all zero (z is the spin axis of the orbitals)",
                    format!("{v:?}"),
                ));
            }
            [v[0] / norm, v[1] / norm, v[2] / norm]
        }
    };
    Ok(Some(Polarisation {
        strength,
        direction,
    }))
}

/// One line per attached contact for `qheat check`: name, cells, γ, mode
/// and level (a probe's µ and T are solved; shown as such).
pub(crate) fn describe(contacts: &[AttachedContact]) -> String {
    let mut s = String::new();
    for c in contacts {
        let cells = match c.cells.as_slice() {
            [one] => format!("cell {one}"),
            [first, .., last] if last - first + 1 == c.cells.len() => {
                format!("cells {first}–{last}")
            }
            many => format!("cells {many:?}"),
        };
        let level = match c.mode {
            ContactMode::Fixed => format!(
                "fixed at µ = {:.4} eV, T = {} K",
                c.fermi_level_ev, c.temperature_k
            ),
            ContactMode::Voltage => format!(
                "voltage probe (µ solved for zero current), T = {} K",
                c.temperature_k
            ),
            ContactMode::Temperature => {
                "temperature probe (µ and T solved for zero particle and heat current)".to_string()
            }
        };
        let pol = c.polarisation.map_or(String::new(), |p| {
            let [x, y, z] = p.direction;
            format!(
                ", polarised P = {} along ({x:.3}, {y:.3}, {z:.3})",
                p.strength
            )
        });
        s.push_str(&format!(
            "contact     \"{}\" on {cells}, γ = {} eV; {level}{pol}\n",
            c.name, c.gamma_ev
        ));
    }
    s
}
