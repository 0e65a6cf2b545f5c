//! The resolved case as text for people (what `qheat check` prints).

use super::check::choice_name;
use super::resolve::{MAX_SNAP, Resolved};
use crate::device::BiasDrop;
use crate::leads::Lead;
use crate::scba::Mixing;
use std::fmt::Write as _;

fn lead_text(lead: &Lead) -> String {
    match lead {
        Lead::Periodic { .. } => {
            let (lo, hi) = lead.band_range().unwrap_or((f64::NAN, f64::NAN));
            format!("periodic, band {lo:.4} to {hi:.4} eV")
        }
        Lead::Joined { .. } => {
            let (lo, hi) = lead.band_range().unwrap_or((f64::NAN, f64::NAN));
            format!("periodic, band {lo:.4} to {hi:.4} eV, joined to the device by its own block")
        }
        Lead::WideBand { gamma } => wide_band_text(gamma),
    }
}

/// A wide-band Γ as people read it: one value for all orbitals, one per
/// orbital, or the range of the eigenvalues of a full matrix.
fn wide_band_text(gamma: &faer::Mat<crate::C64>) -> String {
    let b = gamma.nrows();
    let diagonal = (0..b).all(|r| (0..b).all(|c| r == c || gamma[(r, c)].norm() == 0.0));
    let values: Vec<f64> = (0..b).map(|o| gamma[(o, o)].re).collect();
    if diagonal && values.iter().all(|&g| g == values[0]) {
        return format!("wide band, Γ = {:.4} eV per orbital", values[0]);
    }
    if diagonal {
        let list: Vec<String> = values.iter().map(|g| format!("{g:.4}")).collect();
        return format!("wide band, Γ per orbital = [{}] eV", list.join(", "));
    }
    let ev = gamma
        .self_adjoint_eigenvalues(faer::Side::Lower)
        .unwrap_or_default();
    let (lo, hi) = (
        ev.iter().copied().fold(f64::INFINITY, f64::min),
        ev.iter().copied().fold(f64::NEG_INFINITY, f64::max),
    );
    format!("wide band, Γ a {b}×{b} matrix with eigenvalues {lo:.4} to {hi:.4} eV")
}

impl Resolved {
    /// The resolved case as text for people (what `qheat check` prints).
    pub fn describe(&self) -> String {
        let mut s = String::new();
        self.describe_device(&mut s);
        self.describe_contacts(&mut s);
        s.push_str(&super::sections::contacts::describe(&self.problem.contacts));
        self.describe_phonons(&mut s);
        self.describe_lattice(&mut s);
        self.describe_scattering(&mut s);
        self.describe_settings(&mut s);
        for n in &self.notes {
            let _ = writeln!(s, "note: {n}");
        }
        for w in &self.warnings {
            let _ = writeln!(s, "warning: {w}");
        }
        s
    }

    /// Device, hopping and potential.
    fn describe_device(&self, s: &mut String) {
        let d = &self.problem.device;
        let _ = writeln!(
            s,
            "device      {}, {} cells × {} orbital(s) per cell, spacing {} nm, length {:.4} nm",
            self.device_kind,
            d.cells(),
            d.orbitals,
            d.spacing_nm,
            d.length_nm()
        );
        if let Some(t) = self.hopping_ev {
            let _ = writeln!(
                s,
                "hopping     t = {t:.6} eV (band width 4t = {:.4} eV)",
                4.0 * t
            );
        }
        let umin = d.potential_ev.iter().copied().fold(f64::INFINITY, f64::min);
        let umax = d
            .potential_ev
            .iter()
            .copied()
            .fold(f64::NEG_INFINITY, f64::max);
        let _ = writeln!(
            s,
            "potential   {umin:.4} to {umax:.4} eV (bias included); lowest band edge in the device {:.4} eV",
            d.lowest_band_edge()
        );
    }

    /// Leads, bias and energy grid.
    fn describe_contacts(&self, s: &mut String) {
        let p = &self.problem;
        let _ = writeln!(
            s,
            "left lead   {}; µ = {:.4} eV (µ0 = {:.4} eV), T = {} K",
            lead_text(&p.left.lead),
            p.left.fermi_level_ev,
            self.zero_bias_fermi_levels_ev.0,
            p.left.temperature_k
        );
        let _ = writeln!(
            s,
            "right lead  {}; µ = {:.4} eV (µ0 = {:.4} eV), T = {} K",
            lead_text(&p.right.lead),
            p.right.fermi_level_ev,
            self.zero_bias_fermi_levels_ev.1,
            p.right.temperature_k
        );
        let drop = match &self.bias_drop {
            BiasDrop::Leads => "at the leads".to_string(),
            BiasDrop::Linear { from_nm, to_nm } => format!("linearly over [{from_nm}, {to_nm}] nm"),
        };
        let _ = writeln!(s, "bias        V = {} V, dropped {drop}", self.voltage_v);
        let g = &p.grid;
        let _ = writeln!(
            s,
            "energies    {:.4} to {:.4} eV, step {:.4} meV, {} points",
            g.min_ev,
            g.max_ev(),
            g.step_ev * 1e3,
            g.count
        );
    }

    /// Phonon modes and how far snapping moved them.
    fn describe_phonons(&self, s: &mut String) {
        let phonons = &self.problem.scattering.phonons;
        if phonons.is_empty() {
            let _ = writeln!(s, "phonons     none");
            return;
        }
        for (i, m) in phonons.iter().enumerate() {
            let sites = m.coupling_ev2.iter().filter(|&&x| x > 0.0).count();
            let dmax = m.coupling_ev2.iter().copied().fold(0.0, f64::max);
            let per_cell = &m.coupling_matrices.per_cell;
            let coupling = if m.coupling_matrices.is_empty() {
                format!("coupling {dmax:e} eV² on {sites} orbital sites")
            } else {
                format!(
                    "{} coupling matri(x/ces) per cell in {} cells (full {b}×{b} blocks)",
                    per_cell.iter().map(Vec::len).max().unwrap_or(0),
                    per_cell.iter().filter(|c| !c.is_empty()).count(),
                    b = self.problem.device.orbitals
                )
            };
            let _ = writeln!(
                s,
                "phonon {i}    ħω {:.3} meV -> {:.3} meV ({} grid steps), {coupling}, bath {} K, occupation {:.4}",
                m.requested_energy_ev * 1e3,
                m.energy_ev * 1e3,
                m.steps,
                m.bath_temperature_k,
                m.occupation()
            );
        }
        let worst = phonons
            .iter()
            .map(|m| (m.energy_ev / m.requested_energy_ev - 1.0).abs())
            .fold(0.0, f64::max);
        let rule = if self.allow_coarse_phonon_snap {
            "any change accepted (grid.allow_coarse_phonon_snap = true)".to_string()
        } else {
            format!(
                "at most {:.0} % allowed (grid.allow_coarse_phonon_snap = true accepts more)",
                MAX_SNAP * 100.0
            )
        };
        let _ = writeln!(
            s,
            "snapping    ħω moved by at most {:.2} %; {rule}",
            100.0 * worst
        );
    }

    /// The lattice: masses, springs, leads and the top of the phonon band
    /// that both leads carry.
    fn describe_lattice(&self, s: &mut String) {
        let Some(l) = &self.lattice else {
            let _ = writeln!(s, "lattice     none");
            return;
        };
        let range = |v: &mut dyn Iterator<Item = f64>| {
            v.fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), x| {
                (lo.min(x), hi.max(x))
            })
        };
        let (mlo, mhi) = range(&mut l.masses_u().iter().copied());
        let (klo, khi) = range(&mut l.force_coupling().iter().map(|k| -k[(0, 0)]));
        let springs = if l.cells() > 1 {
            format!("springs along x {klo} to {khi} N/m")
        } else {
            "no internal bond".to_string()
        };
        let _ = writeln!(
            s,
            "lattice     {} site(s) per cell, masses {mlo} to {mhi} u, {springs}",
            l.sites_per_cell()
        );
        use crate::lattice::PhononSide;
        for (name, side) in [("left", PhononSide::Left), ("right", PhononSide::Right)] {
            let lead = l.lead(side);
            let _ = writeln!(
                s,
                "            {name} phonon lead: mass {} u, spring {} N/m, joined by {} N/m",
                lead.masses_u[0],
                -lead.coupling[(0, 0)],
                -lead.contact[(0, 0)]
            );
        }
        let (glo, ghi) = range(&mut l.damping_per_ps().iter().copied());
        let _ = writeln!(
            s,
            "            {}",
            if ghi > 0.0 {
                let p = &self.self_heating;
                format!(
                    "damping {glo} to {ghi} /ps: damped sites are phonon probes; solve heats the \
                     lattice and κ_ph includes the probes\n            joint loop: tolerance {} K, \
                     at most {} outer iteration(s), mixing {}, history {}",
                    p.tolerance_k, p.max_iterations, p.mixing_factor, p.anderson_depth
                )
            } else {
                "no damping: the lattice stays at the bath temperature".to_string()
            }
        );
        let top = l.band_top_rad_per_ps();
        let _ = writeln!(
            s,
            "            phonon band top ħω = {:.3} meV (ω = {top:.3} rad/ps); κ_ph {}",
            super::phonons::phonon_energy_mev(top),
            if self.phonon_conductance_given {
                "given in [thermal] overrides it"
            } else {
                "for ZT computed from it"
            }
        );
    }

    /// Dephasing and the kind of scattering. The
    /// Hermitian part of the self-energy is mentioned only when something
    /// scatters: a coherent case has no self-energy to split.
    fn describe_scattering(&self, s: &mut String) {
        let p = &self.problem;
        let deph = &p.scattering.dephasing_ev2;
        if deph.iter().any(|&x| x > 0.0) {
            let sites = deph.iter().filter(|&&x| x > 0.0).count();
            let dmax = deph.iter().copied().fold(0.0, f64::max);
            let _ = writeln!(s, "dephasing   {dmax:e} eV² on {sites} orbital sites");
        } else {
            let _ = writeln!(s, "dephasing   none");
        }
        if p.scattering.is_coherent() {
            let _ = writeln!(s, "scattering  none (coherent)");
            return;
        }
        let _ = writeln!(
            s,
            "scattering  self-consistent Born; Hermitian part of Σ_phonon {}",
            if p.scattering.hermitian_part {
                "included"
            } else {
                "neglected"
            }
        );
    }

    /// Solver (with the energy order when something scatters), spin,
    /// response and memory.
    fn describe_settings(&self, s: &mut String) {
        let p = &self.problem;
        let mix = match self.scba.mixing {
            Mixing::Anderson { depth, damping } => {
                format!("Anderson (depth {depth}, damping {damping})")
            }
            Mixing::Linear { factor } => format!("linear (factor {factor})"),
        };
        let _ = writeln!(
            s,
            "solver      tolerance {:e}, at most {} iterations, {mix}, current floor {:e} A",
            self.scba.tolerance, self.scba.max_iterations, self.scba.current_floor_a
        );
        if !p.scattering.is_coherent() {
            let order = match crate::scba::red_black_colouring(p, self.scba.energy_order) {
                Some((w, true)) => {
                    format!("red-black in bands of {w} grid steps (phonons link opposite colours)")
                }
                Some((w, false)) => format!(
                    "red-black in bands of {w} grid steps (requested; some phonons link \
                     equal colours, so it gains less)"
                ),
                None => "simultaneous (all energies from the same Σ0)".to_string(),
            };
            let _ = writeln!(s, "order       {order}");
        }
        let _ = writeln!(s, "spin        g_s = {}", p.spin_degeneracy);
        let _ = writeln!(
            s,
            "response    split {}; {}",
            choice_name(self.response_split),
            match self.phonon_conductance_source() {
                super::PhononConductanceSource::Given =>
                    format!("κ_ph = {} W/K (given)", self.phonon_conductance_w_per_k),
                super::PhononConductanceSource::Lattice =>
                    "κ_ph from the lattice at the operating temperature".to_string(),
                super::PhononConductanceSource::None => "κ_ph = 0 (none given)".to_string(),
            }
        );
        let mem = self.memory_estimate_bytes() as f64;
        let _ = write!(s, "memory      about {:.1} MiB", mem / (1024.0 * 1024.0));
        let history = self.mixer_history_bytes();
        if history > 0 {
            let rows = crate::scba::mixed_energy_rows(p, self.scba.energy_order);
            let _ = write!(
                s,
                " ({:.1} MiB of it the mixer history, {} numbers, {} of {} energies)",
                history as f64 / (1024.0 * 1024.0),
                match self.scba.history {
                    crate::scba::MixerHistory::Compact => "f32",
                    crate::scba::MixerHistory::Full => "f64",
                },
                rows,
                p.grid.count
            );
        }
        let _ = writeln!(s);
        let threads = rayon::current_num_threads();
        let _ = writeln!(
            s,
            "time        about {} on {threads} thread(s) (a guess: {} of about {} each)",
            duration(self.time_estimate_seconds(threads)),
            self.iterations_guessed(),
            duration(self.iteration_time_estimate_seconds(threads))
        );
    }

    /// The iterations of the time estimate in words: the full grid's, or
    /// with a coarse start each level's and their full-grid equivalents,
    /// saying that the counts are guesses.
    fn iterations_guessed(&self) -> String {
        let fine = self.iteration_guess();
        let coarse = self.coarse_iteration_guess();
        if coarse.is_empty() {
            return format!("{fine} iteration(s), a count guessed before the run,");
        }
        let levels: Vec<String> = (coarse.iter())
            .map(|&(k, it)| format!("{it} on every {} energy", ordinal(k)))
            .collect();
        format!(
            "iteration counts guessed before the run: {}, then {fine} on the full grid (coarse \
             start), {:.1} full-grid iteration(s) in all, a level of every k-th energy costing \
             1/k of one,",
            levels.join(", "),
            self.iteration_equivalents_guess()
        )
    }
}

/// 4th, 21st, 32nd, 113th.
fn ordinal(k: usize) -> String {
    let suffix = match (k % 10, k % 100) {
        (_, 11..=13) => "th",
        (1, _) => "st",
        (2, _) => "nd",
        (3, _) => "rd",
        _ => "th",
    };
    format!("{k}{suffix}")
}

/// A duration in s, min or h with two or three significant digits.
fn duration(seconds: f64) -> String {
    if seconds < 1.0 {
        format!("{:.2} s", seconds)
    } else if seconds < 120.0 {
        format!("{:.0} s", seconds)
    } else if seconds < 7200.0 {
        format!("{:.0} min", seconds / 60.0)
    } else {
        format!("{:.1} h", seconds / 3600.0)
    }
}
