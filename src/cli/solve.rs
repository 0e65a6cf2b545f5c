//! `qheat check` and `qheat solve`.

use super::format::{number, residual, si};
use super::progress::{BornProgress, enabled};
use super::{Common, Failure, available_memory_bytes, default_out, folder, print_warnings};
use qheat::case::{Case, Resolved};
use qheat::electrostatics;
use qheat::observables::{Observables, ObserveOptions, observe_with};
use qheat::output::phonons::{lattice_summary, write_phonon_files};
use qheat::output::results::{
    LATTICE_TEMPERATURE_FILE, RunInfo, header, read_lattice_temperature, read_self_energy,
    solve_summary, write_solve_files_within,
};
use qheat::output::schema::summary::{
    CheckOutput, CheckPhonon, ElectrostaticsSummary, FailedSolveSummary, Fault, FermiLevelInfo,
    SelfHeatingSummary, SolveResults, SolveSummary, to_text,
};
use qheat::output::schema::tables::cell_lattice_temperature;
use qheat::output::sizes::ResultLimits;
use qheat::output::{OtherFiles, Staging, manifest::check_folder};
use qheat::progress::Observer;
use qheat::scattering::ScatteringSelfEnergy;
use qheat::scba::{Solution, SolveError, solve as born_solve};
use qheat::selfheat::{self, FloatingProbes, SelfHeatReport, SelfHeatStart};
use std::path::Path;

/// Load and resolve a case, printing its warnings.
pub fn load(path: &Path, common: &Common) -> Result<(Case, Resolved), Failure> {
    let case = Case::load(path)?;
    let resolved = case.resolve()?;
    print_warnings(&resolved.warnings, &resolved.notes, common);
    Ok((case, resolved))
}

/// `qheat check CASE`.
pub fn check(path: &Path, common: &Common) -> Result<(), Failure> {
    let case = Case::load(path)?;
    let resolved = case.resolve()?;
    if common.json {
        let p = &resolved.problem;
        let v = CheckOutput {
            case_name: case.name.clone(),
            cells: p.device.cells(),
            orbitals_per_cell: p.device.orbitals,
            grid: serde_json::to_value(&p.grid).expect("JSON of plain values"),
            phonons: p
                .scattering
                .phonons
                .iter()
                .map(|m| CheckPhonon {
                    requested_energy_ev: m.requested_energy_ev,
                    energy_ev: m.energy_ev,
                    grid_steps: m.steps,
                    bath_temperature_k: m.bath_temperature_k,
                })
                .collect(),
            memory_estimate_bytes: resolved.memory_estimate_bytes(),
            warnings: resolved.warnings.clone(),
            notes: resolved.notes.clone(),
            time_estimate_s: resolved.time_estimate_seconds(common.threads),
            iteration_guess: resolved.iteration_guess(),
        };
        println!("{}", to_text(&v));
    } else if !common.quiet {
        print!("{}", resolved.describe());
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

/// Refuse, before any work, a solve whose memory estimate exceeds 80 % of
/// `available` bytes, naming the settings that would fit with their
/// estimates and the flag that runs it anyway.
pub fn refuse_beyond_memory(resolved: &Resolved, available: Option<u64>) -> Result<(), Failure> {
    let Some(available) = available else {
        return Ok(());
    };
    let limit = available / 10 * 8;
    let need = resolved.memory_estimate_bytes();
    if need <= limit {
        return Ok(());
    }
    let options: Vec<String> = resolved
        .memory_alternatives()
        .into_iter()
        .map(|(keys, bytes)| {
            let fits = if bytes <= limit { "fits" } else { "too much" };
            format!("  {keys}: about {} ({fits})", memory_size(bytes))
        })
        .collect();
    Err(Failure::BadInput(format!(
        "this solve needs about {} by the memory estimate (`qheat check` shows it), more \
         than 80 % of the {} available (GiB = 2^30 bytes); nothing was run. Settings that \
         need less:\n{}\nhint: set one of them in the case (or use fewer cells), or pass \
         --ignore-memory-estimate to run anyway",
        memory_size(need),
        memory_size(available),
        options.join("\n")
    )))
}

/// Bytes in GiB (2^30), or MiB (2^20) below one GiB.
pub fn memory_size(bytes: u64) -> String {
    let b = bytes as f64;
    if b >= (1u64 << 30) as f64 {
        format!("{:.2} GiB", b / (1u64 << 30) as f64)
    } else {
        format!("{:.1} MiB", b / (1u64 << 20) as f64)
    }
}

/// `qheat solve CASE`.
pub fn solve(
    path: &Path,
    out: Option<&Path>,
    other_files: OtherFiles,
    warm_start: Option<&Path>,
    limits: &SolveLimits,
    common: &Common,
) -> Result<(), Failure> {
    let (case, resolved) = load(path, common)?;
    if !limits.ignore_memory {
        refuse_beyond_memory(&resolved, available_memory_bytes())?;
    }
    let out_dir = out
        .map(Path::to_path_buf)
        .unwrap_or_else(|| default_out(&case.name, ""));
    // Refused before the work rather than after it.
    check_folder(&out_dir, &folder("solve", other_files))?;
    let warm = match warm_start {
        Some(dir) => Some(read_warm_start(dir, &resolved)?),
        None => None,
    };
    let mut bar = BornProgress::new(enabled(common.quiet), resolved.scba.tolerance, &case.name);
    let mut es_run = None;
    let result = match &resolved.electrostatics {
        Some(es) => run_electrostatics(&resolved, es, &mut bar).map(|(s, r)| {
            es_run = Some(r);
            (s, None)
        }),
        None => run_solve(&resolved, warm.as_ref(), &mut bar),
    };
    bar.finish();
    let case_toml = case.to_toml_string();
    let info = RunInfo {
        case_name: &case.name,
        case_file: &path.display().to_string(),
        case_toml: &case_toml,
        warnings: &resolved.warnings,
        notes: &resolved.notes,
        threads: common.threads,
    };
    let (sol, heat) = match result {
        Ok(s) => s,
        Err(RunError::Other(message)) => return Err(Failure::Solver(message)),
        Err(RunError::Born(e)) => {
            write_failure(&out_dir, other_files, &info, &e)?;
            return Err(Failure::Solver(format!(
                "{e}; nothing trustworthy was computed (summary.json in {} says so)",
                out_dir.display()
            )));
        }
    };
    let o = observe_solution(&resolved, &sol)?;
    let mut summary = solve_summary(&sol, &o, &info);
    summary.self_heating = heat.as_ref().map(|h| self_heating_summary(&sol, &o, h));
    summary.electrostatics = es_run.as_ref().map(|r| electrostatics_summary(&sol, r));
    let es_stopped_short = es_run.as_ref().is_some_and(|r| !r.report.converged);
    if heat.as_ref().is_some_and(|h| !h.report.converged) || es_stopped_short {
        summary.converged = false;
        summary.trustworthy = false;
    }
    // The lattice at the mean lead temperature.
    let t = 0.5 * (resolved.problem.left.temperature_k + resolved.problem.right.temperature_k);
    let phonons = super::lattice::spectrum(&resolved)?;
    summary.lattice = phonons.map(|s| lattice_summary(&resolved, s, t));
    let stage = Staging::with_options(&out_dir, &folder("solve", other_files))?;
    write_solve_files_within(&stage, &sol, &o, &mut summary, limits)?;
    if let Some(s) = phonons {
        write_phonon_files(&stage, s, t)?;
    }
    qheat::output::plots::write_solve_plots_within(&stage, &sol, &o, limits)?;
    stage.commit()?;
    if common.json {
        println!("{}", to_text(&summary));
    } else if !common.quiet {
        print_summary(&sol, &o, &summary, &out_dir);
    }
    electrostatics_converged(es_run.as_ref(), &out_dir)?;
    not_converged(&sol, heat.as_ref(), &out_dir)
}

/// The observables of a solution, split by channel when the case names
/// channels.
fn observe_solution(resolved: &Resolved, sol: &Solution) -> Result<Observables, Failure> {
    let mut o = observe_with(
        sol,
        &ObserveOptions {
            electron_temperature: resolved.fit_electron_temperature,
            movers: true,
        },
    );
    if let Some(set) = &resolved.channels {
        let split = qheat::observables::channels::observe_channels(sol, set)
            .map_err(|e| Failure::Solver(format!("splitting the results by channel: {e}")))?;
        o.channels = Some(split);
    }
    Ok(o)
}

/// Exit 2 when the self-consistent electrostatics stopped short (the
/// results are written and flagged by then).
fn electrostatics_converged(es_run: Option<&EsRun>, out_dir: &Path) -> Result<(), Failure> {
    if let Some(r) = es_run.filter(|r| !r.report.converged) {
        return Err(Failure::Solver(format!(
            "the electrostatics did not converge in {} outer iterations (last potential change \
             {:.3e} eV against a tolerance of {:.1e} eV, Poisson residual {:.3e} electrons); \
             results in {} are flagged as not converged",
            r.report.outer_iterations,
            r.report.potential_change_ev,
            r.report.tolerance_ev,
            r.report.poisson_residual,
            out_dir.display()
        )));
    }
    Ok(())
}

/// The transport solved with the potential of `[electrostatics]`; a
/// damped lattice (self-heating) is not combined with it yet.
fn run_electrostatics(
    resolved: &Resolved,
    es: &electrostatics::Electrostatics,
    observer: &mut dyn Observer,
) -> Result<(Solution, EsRun), RunError> {
    let p = &resolved.problem;
    if resolved.probe_network().is_some() && !p.scattering.phonons.is_empty() {
        return Err(RunError::Other(
            "[electrostatics] with a damped [lattice] (self-heating) is not available yet \
             (hint: set lattice.damping_per_ps = 0 or leave out [electrostatics]); nothing was written"
                .into(),
        ));
    }
    let sc = electrostatics::solve(p, es, &resolved.scba, None, None, observer)
        .map_err(RunError::Born)?;
    let run = EsRun {
        potential_ev: sc.potential_ev,
        electrons: sc.electrons,
        report: sc.report,
    };
    Ok((sc.solution, run))
}

/// What the self-consistent electrostatics adds to a solve.
struct EsRun {
    potential_ev: Vec<f64>,
    electrons: Vec<f64>,
    report: electrostatics::ElectrostaticsReport,
}

/// The `electrostatics` object of summary.json.
fn electrostatics_summary(sol: &Solution, r: &EsRun) -> ElectrostaticsSummary {
    let u = &r.potential_ev;
    let fold = |f: fn(f64, f64) -> f64, init: f64| u.iter().copied().fold(init, f);
    ElectrostaticsSummary {
        computed_drop_replaces_imposed: true,
        potential_drop_v: u.last().copied().unwrap_or(0.0) - u.first().copied().unwrap_or(0.0),
        lowest_potential_energy_ev: fold(f64::min, f64::INFINITY),
        highest_potential_energy_ev: fold(f64::max, f64::NEG_INFINITY),
        highest_band_edge_ev: sol
            .problem
            .device
            .band_edge_ev
            .iter()
            .copied()
            .fold(f64::NEG_INFINITY, f64::max),
        outer_iterations: r.report.outer_iterations,
        born_passes: r.report.born_passes,
        potential_change_ev: r.report.potential_change_ev,
        tolerance_ev: r.report.tolerance_ev,
        poisson_residual: r.report.poisson_residual,
        born_residual: r.report.born_residual,
        converged: r.report.converged,
        potential_energy_per_cell_ev: r.potential_ev.clone(),
        electrons_per_cell: r.electrons.clone(),
    }
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
        "                  {} outer iterations, {} Born passes; Poisson residual {:.2e} electrons, Born residual {}, last change {:.2e} eV{}",
        e.outer_iterations,
        e.born_passes,
        e.poisson_residual,
        residual(e.born_residual),
        e.potential_change_ev,
        if e.converged { "" } else { " (NOT converged)" }
    );
}

/// Exit 2 when the joint loop or the Born loop stopped short (the results
/// are written and flagged by then).
fn not_converged(
    sol: &Solution,
    heat: Option<&SelfHeatRun>,
    out_dir: &Path,
) -> Result<(), Failure> {
    if let Some(h) = heat.filter(|h| !h.report.converged) {
        return Err(Failure::Solver(format!(
            "the joint electron–lattice loop did not converge in {} outer iterations (last change \
             of the lattice temperature {:.3e} K against a tolerance of {:.1e} K); results in {} \
             are flagged as not converged",
            h.report.iterations,
            h.report.last_change_k,
            h.report.params.tolerance_k,
            out_dir.display()
        )));
    }
    if !sol.report.converged {
        let last = sol.report.history.last();
        return Err(Failure::Solver(format!(
            "the Born loop did not converge in {} iterations (last residual {}, current change {:.2} of the allowance); \
             results in {} are flagged as not converged",
            sol.report.iterations,
            last.map(|h| residual(h.residual)).unwrap_or_default(),
            last.map(|h| h.current_change).unwrap_or(f64::NAN),
            out_dir.display()
        )));
    }
    Ok(())
}

/// What a warm start reads from an earlier result folder: its scattering
/// self-energy and, from a self-heating solve, its lattice temperatures.
struct WarmStart {
    sigma: ScatteringSelfEnergy,
    lattice_temperature_k: Option<Vec<f64>>,
}

/// The warm-start data of `dir`; lattice temperatures of another site
/// count are refused, naming the folder.
fn read_warm_start(dir: &Path, resolved: &Resolved) -> Result<WarmStart, Failure> {
    let sigma = read_self_energy(dir).map_err(|e| Failure::BadInput(format!("warm start: {e}")))?;
    let t =
        read_lattice_temperature(dir).map_err(|e| Failure::BadInput(format!("warm start: {e}")))?;
    let sites = resolved.problem.device.cells() * resolved.problem.device.orbitals;
    if let Some(t) = t.as_ref().filter(|t| t.len() != sites) {
        return Err(Failure::BadInput(format!(
            "--warm-start {}: expected {sites} lattice temperatures (one per orbital site of the \
             case), found {} in {}; hint: warm-start from a solve of the same device, or remove \
             that file to start the lattice from the bath temperature",
            dir.display(),
            t.len(),
            LATTICE_TEMPERATURE_FILE
        )));
    }
    Ok(WarmStart {
        sigma,
        lattice_temperature_k: t,
    })
}

/// What the joint electron–lattice loop adds to a solve.
struct SelfHeatRun {
    report: SelfHeatReport,
    left_lead_heat_w: f64,
    right_lead_heat_w: f64,
}

/// Why a solve gave no solution: a Born fault (written to summary.json)
/// or a fault of the lattice side.
enum RunError {
    Born(SolveError),
    Other(String),
}

/// The plain Born solve, or with a damped lattice the joint loop with the
/// phonon leads at the two contact temperatures.
fn run_solve(
    resolved: &Resolved,
    warm_start: Option<&WarmStart>,
    observer: &mut dyn Observer,
) -> Result<(Solution, Option<SelfHeatRun>), RunError> {
    let p = &resolved.problem;
    let warm = warm_start.map(|w| &w.sigma);
    let network = match resolved.probe_network() {
        Some(n) if !p.scattering.phonons.is_empty() => n.map_err(|e| {
            RunError::Other(format!(
                "phonon probes of the case's [lattice]: {e}; nothing was written"
            ))
        })?,
        _ => {
            return born_solve(p, &resolved.scba, warm, observer)
                .map(|s| (s, None))
                .map_err(RunError::Born);
        }
    };
    let mut probes = FloatingProbes::new(network, p.left.temperature_k, p.right.temperature_k);
    let start = SelfHeatStart {
        sigma: warm,
        lattice_temperature_k: warm_start.and_then(|w| w.lattice_temperature_k.as_deref()),
    };
    let params = resolved.self_heating;
    let s =
        selfheat::solve(p, &resolved.scba, &params, &mut probes, start, observer).map_err(|e| {
            match e {
                selfheat::SelfHeatError::Solve { source, .. } => RunError::Born(source),
                e => RunError::Other(format!("{e}; nothing was written")),
            }
        })?;
    let last = probes.last();
    let run = SelfHeatRun {
        report: s.report,
        left_lead_heat_w: last.map_or(f64::NAN, |l| l.left_lead_heat_w),
        right_lead_heat_w: last.map_or(f64::NAN, |l| l.right_lead_heat_w),
    };
    Ok((s.solution, Some(run)))
}

/// The hottest cell of the lattice, the heat out of each phonon lead, the
/// lattice-heat ledger and the loop's record.
fn self_heating_summary(sol: &Solution, o: &Observables, h: &SelfHeatRun) -> SelfHeatingSummary {
    let (cell, hottest) = (0..sol.problem.device.cells())
        .map(|c| (c, cell_lattice_temperature(sol, c)))
        .fold((0, f64::NEG_INFINITY), |a, b| if b.1 > a.1 { b } else { a });
    let electron_loss = o.energy_current_left_w + o.energy_current_right_w;
    let phonon_out = h.left_lead_heat_w + h.right_lead_heat_w;
    SelfHeatingSummary {
        hottest_lattice_k: hottest,
        hottest_x_nm: o.sites.x_nm[cell],
        left_phonon_lead_heat_w: h.left_lead_heat_w,
        right_phonon_lead_heat_w: h.right_lead_heat_w,
        ledger_relative: (electron_loss - phonon_out).abs() / electron_loss.abs(),
        outer_iterations: h.report.iterations,
        born_iterations: h.report.born_iterations,
        last_change_k: h.report.last_change_k,
        tolerance_k: h.report.params.tolerance_k,
        converged: h.report.converged,
    }
}

/// A summary that says the run failed, so nobody mistakes old files for it.
fn write_failure(
    out_dir: &Path,
    other_files: OtherFiles,
    info: &RunInfo<'_>,
    error: &SolveError,
) -> Result<(), Failure> {
    let location = error.location();
    let v = FailedSolveSummary {
        header: header("solve", info.case_name, info.case_file),
        threads: info.threads,
        converged: false,
        trustworthy: false,
        error: error.to_string(),
        fault: Fault {
            kind: error.kind().into(),
            energy_ev: location.map(|l| l.0),
            cell: location.and_then(|l| l.1),
        },
        warnings: info.warnings.to_vec(),
        resolved_case: info.case_toml.into(),
    };
    let stage = Staging::with_options(out_dir, &folder("failed-solve", other_files))?;
    stage.write("summary.json", to_text(&v).as_bytes())?;
    stage.commit()?;
    Ok(())
}
