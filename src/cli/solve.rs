//! `qheat check` and `qheat solve`.

use super::format::{number, residual, si};
use super::progress::{BornProgress, enabled};
use super::{Common, Failure, agreed, available_memory_bytes, default_out, folder, print_warnings};
use qheat::cluster::Cluster;
use qheat::observables::Observables;
use qheat::output::schema::summary::{
    ElectrostaticsSummary, FermiLevelInfo, SelfHeatingSummary, SolveResults, SolveSummary, to_text,
};
use qheat::output::sizes::ResultLimits;
use qheat::output::{OtherFiles, manifest::check_folder};
use qheat::scba::Solution;
use qheat::session::{self, Loaded, SessionError, SolveOptions, WriteOptions, write_failure};
use std::path::Path;

/// `qheat check CASE`.
pub fn check(path: &Path, common: &Common) -> Result<(), Failure> {
    let loaded = Loaded::from_file(path)?;
    if common.json {
        println!("{}", to_text(&loaded.check_output(common.threads)));
    } else if !common.quiet {
        print!("{}", loaded.resolved.describe());
    }
    Ok(())
}

/// Human summary of one operating point. Every number shown is a value of
/// the summary (`summary.json`), so the file holds all the terminal shows.
pub fn print_summary(sol: &Solution, o: &Observables, summary: &SolveSummary, out: &Path) {
    let r = &summary.results;
    let op = &summary.operating_point;
    println!(
        "operating point   V = {}, T = {} K / {} K",
        si(r.voltage_v, "V", 4),
        number(op.temperature_left_k),
        number(op.temperature_right_k)
    );
    print_born_loop(sol);
    println!("current           I = {}", si(r.current_a, "A", 4));
    if let Some(g) = r.conductance_s {
        println!("conductance       G = I/V = {}", si(g, "S", 4));
    }
    println!(
        "heat current      left {}  right {}  (out of each contact into the device)",
        si(r.heat_current_left_w, "W", 4),
        si(r.heat_current_right_w, "W", 4)
    );
    println!(
        "electrical power  I·V = {}",
        si(r.electrical_power_w, "W", 4)
    );
    print_lattice_power(sol, r);
    if let Some(c) = &summary.channels {
        print_channels(c);
    }
    super::contacts::print_contacts(&summary.contacts, sol.report.probe_residual);
    print_drops(r);
    print_fermi_level_flags(&summary.local_fermi_level);
    if let Some(l) = &summary.lattice {
        super::lattice::print_lattice(l);
    }
    if let Some(h) = &summary.self_heating {
        print_self_heating(h);
    }
    if let Some(e) = &summary.electrostatics {
        print_electrostatics(e);
    }
    let l = &o.ledger;
    println!(
        "ledger            charge {}  lattice {}  leads-lattice {}  heat {}  (relative residuals; \
         energy identity {})",
        residual(l.charge_relative),
        residual(l.lattice_relative),
        residual(l.leads_lattice_relative),
        residual(l.heat_relative),
        residual(l.energy_relative)
    );
    println!("results           {}", out.display());
}
/// The lattice power lines: the total by one or both routes, then the
/// most heated and the most cooled (or least heated) cell.
fn print_lattice_power(sol: &Solution, r: &qheat::output::schema::summary::SolveResults) {
    if sol.problem.scattering.phonons.is_empty() {
        println!(
            "lattice power     {} in total (electron side)",
            si(r.lattice_power_w, "W", 4)
        );
    } else {
        // The two routes agree at the fixed point of the Born loop.
        println!(
            "lattice power     electron side {}  phonon side {}",
            si(r.lattice_power_w, "W", 4),
            si(r.lattice_power_phonon_side_w, "W", 4)
        );
    }
    // Lattice power, not temperature: the lattice temperature has lines of
    // its own with self-heating.
    let least = match &r.coolest_cell_w {
        Some(c) if c.value < 0.0 => "  most cooled  ",
        _ => "  least heated ",
    };
    for (label, cell) in [
        ("  most heated  ", &r.hottest_cell_w),
        (least, &r.coolest_cell_w),
    ] {
        if let Some(c) = cell {
            println!(
                "{label}   x = {} nm: {}",
                number(c.x_nm),
                si(c.value, "W", 3)
            );
        }
    }
}

/// Terminal lines of the results split by channel.
fn print_channels(c: &qheat::output::schema::summary::ChannelSummary) {
    for (i, name) in c.names.iter().enumerate() {
        println!(
            "  channel {name:<8} I = {}  heat current left {}  right {}  lattice {}",
            si(c.current_left_a[i], "A", 4),
            si(c.heat_current_left_w[i], "W", 4),
            si(c.heat_current_right_w[i], "W", 4),
            si(c.lattice_power_w[i], "W", 3)
        );
    }
    if let Some(p) = c.polarization {
        println!(
            "  polarisation      (I_{a} − I_{b})/(I_{a} + I_{b}) = {p:.4}",
            a = c.names[0],
            b = c.names[1]
        );
    }
}

/// Terminal lines of the joint electron–lattice loop.
fn print_self_heating(h: &SelfHeatingSummary) {
    println!(
        "self-heating      {} after {} outer iterations ({} Born iterations), last change {} K",
        if h.converged {
            "converged"
        } else {
            "NOT CONVERGED"
        },
        h.outer_iterations,
        h.born_iterations,
        residual(h.last_change_k)
    );
    println!(
        "  hottest lattice x = {} nm: {:.3} K",
        number(h.hottest_x_nm),
        h.hottest_lattice_k
    );
    println!(
        "  phonon leads    heat out left {}  right {}  (lattice ledger {})",
        si(h.left_phonon_lead_heat_w, "W", 4),
        si(h.right_phonon_lead_heat_w, "W", 4),
        residual(h.ledger_relative)
    );
}

fn print_born_loop(sol: &Solution) {
    let r = &sol.report;
    if sol.problem.scattering.is_coherent() {
        println!("transport         coherent (no scattering inside the device)");
        return;
    }
    println!(
        "Born loop         {} after {} iterations ({} energy order), residual {}{}",
        if r.converged {
            "converged"
        } else {
            "NOT CONVERGED"
        },
        r.iterations,
        match r.energy_order {
            qheat::scba::EnergyOrder::RedBlack => "red-black",
            _ => "simultaneous",
        },
        r.history
            .last()
            .map(|h| residual(h.residual))
            .unwrap_or_default(),
        if r.hermitian_part {
            ", Hermitian part included"
        } else {
            ""
        }
    );
    if !r.coarse_levels.is_empty() {
        let levels: Vec<String> = (r.coarse_levels.iter())
            .map(|l| format!("{} on every {}th energy", l.iterations, l.factor))
            .collect();
        println!(
            "coarse start      iterations before the full grid: {}",
            levels.join(", ")
        );
    }
}

/// Where the applied voltage goes: into the contacts (including the
/// quantum contact resistance) or across the device itself.
fn print_drops(r: &SolveResults) {
    if let Some(d) = &r.largest_drop_v {
        println!(
            "largest drop      of the local Fermi level at x = {} nm: {}",
            number(d.x_nm),
            si(d.value, "V", 3)
        );
    }
    println!(
        "Fermi-level drop  left contact {}, inside the device {}, right contact {}",
        si(r.contact_drop_left_v, "V", 3),
        si(r.interior_drop_v, "V", 3),
        si(r.contact_drop_right_v, "V", 3)
    );
}

fn print_fermi_level_flags(f: &FermiLevelInfo) {
    let mut outside: Vec<usize> = f
        .cells_below_interval
        .iter()
        .chain(&f.cells_above_interval)
        .copied()
        .collect();
    if outside.is_empty() {
        return;
    }
    outside.sort_unstable();
    let list: Vec<String> = outside.iter().map(usize::to_string).collect();
    let [lo, hi] = f.search_interval_ev;
    println!(
        "local Fermi level outside [{lo:.3}, {hi:.3}] eV in {} cell(s): {} (written as NaN, \
         flagged in sites.csv)",
        outside.len(),
        list.join(", ")
    );
}

/// What `qheat solve` may write and use: the size limits of the result
/// files and whether the memory estimate is checked.
pub struct SolveLimits {
    /// Size limits of the result files.
    pub files: ResultLimits,
    /// Run even when the memory estimate exceeds the memory available.
    pub ignore_memory: bool,
}

impl std::ops::Deref for SolveLimits {
    type Target = ResultLimits;
    fn deref(&self) -> &ResultLimits {
        &self.files
    }
}

/// The size limits of `--result-budget-mb` and `--full-arrays`.
pub fn result_limits(budget_mb: f64, full_arrays: bool) -> Result<ResultLimits, Failure> {
    if !(budget_mb.is_finite() && budget_mb >= 1.0) {
        return Err(Failure::BadInput(format!(
            "--result-budget-mb {budget_mb}: expected a size of at least 1 MB; hint: the \
             default is {} MB, and --full-arrays writes every array whole",
            ResultLimits::DEFAULT_BUDGET_BYTES / 1_000_000
        )));
    }
    Ok(ResultLimits {
        budget_bytes: (budget_mb * 1e6) as u64,
        full_arrays,
    })
}

/// `qheat solve CASE`. Under an energy split (`mpirun`) every rank of
/// `cluster` runs it; rank 0 alone writes and prints.
pub fn solve(
    path: &Path,
    out: Option<&Path>,
    other_files: OtherFiles,
    warm_start: Option<&Path>,
    limits: &SolveLimits,
    common: &Common,
    cluster: &Cluster,
) -> Result<(), Failure> {
    let loaded = load_case(path, common)?;
    let out_dir = out
        .map(Path::to_path_buf)
        .unwrap_or_else(|| default_out(&loaded.case.name, ""));
    // What may differ between the ranks (the memory of each machine, the
    // folder as each sees it) is agreed on before the Born loop, whose
    // collectives every rank must reach.
    let ready = ready_to_solve(&loaded, &out_dir, other_files, limits, cluster);
    agreed(cluster, ready)?;
    let mut bar = BornProgress::new(
        enabled(common.quiet),
        loaded.resolved.scba.tolerance,
        &loaded.case.name,
    );
    let options = SolveOptions {
        warm_start,
        threads: common.threads,
    };
    let result = session::solve(loaded, &options, &mut bar);
    bar.finish();
    let mut solved = match result {
        Ok(s) => s,
        Err(SessionError::Born { error, failure }) => {
            if cluster.is_root() {
                write_failure(&out_dir, other_files, &failure)?;
            }
            return Err(Failure::Solver(format!(
                "{error}; nothing trustworthy was computed (summary.json in {} says so)",
                out_dir.display()
            )));
        }
        Err(e) => return Err(e.into()),
    };
    let write = WriteOptions {
        other_files,
        limits: limits.files,
    };
    solved.summary.energy_split_ranks = (cluster.size() > 1).then_some(cluster.size());
    if !cluster.is_root() {
        return match solved.not_converged("results") {
            Some(message) => Err(Failure::Solver(message)),
            None => Ok(()),
        };
    }
    let summary = solved.write(&out_dir, &write)?;
    if common.json {
        println!("{}", to_text(&summary));
    } else if !common.quiet {
        print_summary(&solved.solution, &solved.observables, &summary, &out_dir);
    }
    match solved.not_converged(&format!("results in {}", out_dir.display())) {
        Some(message) => Err(Failure::Solver(message)),
        None => Ok(()),
    }
}

/// The checks before a solve: its memory and (on rank 0, the one that
/// writes) the result folder, refused before the work rather than after it.
fn ready_to_solve(
    loaded: &Loaded,
    out_dir: &Path,
    other_files: OtherFiles,
    limits: &SolveLimits,
    cluster: &Cluster,
) -> Result<(), Failure> {
    if !limits.ignore_memory {
        refuse_beyond_rank_memory(loaded, cluster)?;
    }
    if cluster.is_root() {
        check_folder(out_dir, &folder("solve", other_files))?;
    }
    Ok(())
}

/// Refuse a solve whose memory estimate exceeds this rank's share of the
/// machine's memory: under `mpirun` every rank holds every array, so the
/// ranks started on one machine share its memory.
fn refuse_beyond_rank_memory(loaded: &Loaded, cluster: &Cluster) -> Result<(), Failure> {
    let here = super::ranks_on_this_machine(cluster);
    let share = available_memory_bytes().map(|a| a / here as u64);
    loaded.refuse_beyond_memory(share).map_err(|e| {
        let f = Failure::from(e);
        match here {
            1 => f,
            _ => Failure::BadInput(format!(
                "{} (each of the {here} ranks on this machine holds every array of the solve, \
                 so each may use 1/{here} of its memory; hint: start fewer ranks per machine)",
                f.message()
            )),
        }
    })
}

/// Read and resolve a case for a command, printing its warnings.
pub fn load_case(path: &Path, common: &Common) -> Result<Loaded, Failure> {
    let loaded = Loaded::from_file(path)?;
    let r = &loaded.resolved;
    print_warnings(&r.warnings, &r.notes, common);
    Ok(loaded)
}
/// Terminal lines of the self-consistent electrostatics.
fn print_electrostatics(e: &ElectrostaticsSummary) {
    println!(
        "electrostatics    computed drop {:.4} V replaces the imposed one; U_es from {:.4} to {:.4} eV, highest band edge {:.4} eV",
        e.potential_drop_v,
        e.lowest_potential_energy_ev,
        e.highest_potential_energy_ev,
        e.highest_band_edge_ev
    );
    println!(
        "                  {} coupling, {} outer iterations, {} Born passes; Poisson residual {:.2e} electrons, Born residual {}, last change {:.2e} eV{}",
        e.coupling,
        e.outer_iterations,
        e.born_passes,
        e.poisson_residual,
        residual(e.born_residual),
        e.potential_change_ev,
        if e.converged { "" } else { " (NOT converged)" }
    );
}
