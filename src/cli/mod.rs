//! Command line: argument definitions and the command handlers. This is the
//! only part of the crate that prints.

mod coefficients;
mod contacts;
mod curves;
mod format;
mod lattice;
mod progress;
mod report;
mod screen;
mod solve;
mod sweep;

use clap::{Parser, Subcommand};
use qheat::cluster::{Cluster, Fault};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Electro-thermal quantum transport: charge and heat currents,
/// thermoelectric coefficients and where the lattice is heated or cooled.
#[derive(Parser, Debug)]
#[command(name = "qheat", version, about, long_about = None)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
    /// Worker threads for the energy loop (default: all cores).
    #[arg(long, global = true)]
    pub threads: Option<usize>,
    /// Print nothing but errors (and the JSON summary with --json).
    #[arg(long, global = true)]
    pub quiet: bool,
    /// Print the summary as JSON on stdout.
    #[arg(long, global = true)]
    pub json: bool,
}

/// The commands.
#[derive(Subcommand, Debug)]
pub enum Command {
    /// Parse and validate a case; print the resolved case and warnings.
    Check {
        /// Case file (TOML).
        case: PathBuf,
    },
    /// Solve one operating point: currents, heat currents, ledger,
    /// lattice-power map, local Fermi level, spectra.
    Solve {
        /// Case file (TOML).
        case: PathBuf,
        /// Result folder (default: runs/<case name>).
        #[arg(short, long)]
        out: Option<PathBuf>,
        /// Write into a result folder that also holds files qheat did not
        /// write: they are kept, and only those with the same name as a file
        /// of this result (such as summary.json) are overwritten.
        #[arg(long)]
        overwrite: bool,
        /// Start the Born loop from the self-energy stored in this result folder.
        #[arg(long, value_name = "DIR")]
        warm_start: Option<PathBuf>,
        /// Write every array whole (maps and the self-energy for warm
        /// starts), whatever their size; by default larger maps are
        /// written as block means and a large self-energy is left out.
        #[arg(long)]
        full_arrays: bool,
        /// Size budget of the result files in MB (10^6 bytes): each map at
        /// most an eighth of it, each figure at most a tenth (and 5 MB).
        #[arg(long, value_name = "MB", default_value_t = 50.0)]
        result_budget_mb: f64,
        /// Run even when the memory estimate (shown by `qheat check`)
        /// exceeds 80 % of the memory available.
        #[arg(long)]
        ignore_memory_estimate: bool,
    },
    /// Linear response: G, S, Π, κe, Lorenz ratio, power factor, ZT and the
    /// Onsager (Kelvin) residual.
    Coefficients {
        /// Case file (TOML).
        case: PathBuf,
        /// Result folder (default: runs/<case name>-coefficients).
        #[arg(short, long)]
        out: Option<PathBuf>,
        /// Write into a result folder that also holds files qheat did not
        /// write: they are kept, and only those with the same name as a file
        /// of this result (such as summary.json) are overwritten.
        #[arg(long)]
        overwrite: bool,
    },
    /// Any numeric case key over a grid (several --vary: row-major, last
    /// fastest); resumable; one row per point in sweep.csv.
    Sweep {
        /// Case file (TOML).
        case: PathBuf,
        /// KEY=START:STOP:COUNT (KEY1+KEY2 sets several keys together).
        #[arg(long, required = true, value_name = "KEY=START:STOP:COUNT")]
        vary: Vec<String>,
        /// Result folder, also holding the finished points (default:
        /// runs/<case name>-sweep).
        #[arg(short, long)]
        out: Option<PathBuf>,
        /// Write into a result folder that also holds files qheat did not
        /// write: they are kept, and only those with the same name as a file
        /// of this result (such as summary.json) are overwritten.
        #[arg(long)]
        overwrite: bool,
    },
    /// Power and efficiency against load voltage with the left lead hot and
    /// the right lead cold; maximum power, efficiency there, η_C, η_CA.
    Generator {
        /// Case file (TOML).
        case: PathBuf,
        /// Hot (left) lead temperature (K).
        #[arg(long, value_name = "K", allow_negative_numbers = true)]
        hot: f64,
        /// Cold (right) lead temperature (K).
        #[arg(long, value_name = "K", allow_negative_numbers = true)]
        cold: f64,
        /// Load voltages from 0 to the open-circuit voltage.
        #[arg(long, default_value_t = 41)]
        points: usize,
        /// Result folder (default: runs/<case name>-generator).
        #[arg(short, long)]
        out: Option<PathBuf>,
        /// Write into a result folder that also holds files qheat did not
        /// write: they are kept, and only those with the same name as a file
        /// of this result (such as summary.json) are overwritten.
        #[arg(long)]
        overwrite: bool,
    },
    /// Cooling power and COP against current; maximum cooling power.
    Cooler {
        /// Case file (TOML).
        case: PathBuf,
        /// Hot lead temperature (K).
        #[arg(long, value_name = "K", allow_negative_numbers = true)]
        hot: f64,
        /// Cold lead temperature (K).
        #[arg(long, value_name = "K", allow_negative_numbers = true)]
        cold: f64,
        /// Bias points on the curve.
        #[arg(long, default_value_t = 41)]
        points: usize,
        /// Which lead is cooled.
        #[arg(long, value_parser = curves::side_parser(), default_value = "right")]
        cold_lead: qheat::leads::Side,
        /// Result folder (default: runs/<case name>-cooler).
        #[arg(short, long)]
        out: Option<PathBuf>,
        /// Write into a result folder that also holds files qheat did not
        /// write: they are kept, and only those with the same name as a file
        /// of this result (such as summary.json) are overwritten.
        #[arg(long)]
        overwrite: bool,
    },
    /// Figure-of-merit screening over a grid, ranked best first.
    Screen {
        /// Case file (TOML).
        case: PathBuf,
        /// KEY=START:STOP:COUNT (KEY1+KEY2 sets several keys together).
        #[arg(long, required = true, value_name = "KEY=START:STOP:COUNT")]
        vary: Vec<String>,
        /// Ranking quantity.
        #[arg(long, value_parser = screen::rank_parser())]
        rank: qheat::sweep::screen::Rank,
        /// Hot (left) lead temperature for --rank cooling (K).
        #[arg(long, value_name = "K", allow_negative_numbers = true)]
        hot: Option<f64>,
        /// Cold (right) lead temperature for --rank cooling (K).
        #[arg(long, value_name = "K", allow_negative_numbers = true)]
        cold: Option<f64>,
        /// Bias points per cooler curve for --rank cooling [default: 21].
        #[arg(long)]
        points: Option<usize>,
        /// Result folder, also holding the finished points (default:
        /// runs/<case name>-screen).
        #[arg(short, long)]
        out: Option<PathBuf>,
        /// Write into a result folder that also holds files qheat did not
        /// write: they are kept, and only those with the same name as a file
        /// of this result (such as summary.json) are overwritten.
        #[arg(long)]
        overwrite: bool,
    },
    /// Write DIR/report.html: one self-contained page with the values,
    /// figures and resolved case of a result folder.
    Report {
        /// Result folder.
        dir: PathBuf,
    },
}

/// How a command failed; each kind has its exit code.
#[derive(Debug)]
pub enum Failure {
    /// Bad input: exit 1.
    BadInput(String),
    /// The solver did not converge or met a numerical fault; results, if
    /// any, are written and flagged: exit 2.
    Solver(String),
    /// Reading or writing files failed: exit 3.
    Io(String),
}

impl Failure {
    fn code(&self) -> u8 {
        match self {
            Failure::BadInput(_) => 1,
            Failure::Solver(_) => 2,
            Failure::Io(_) => 3,
        }
    }
    fn message(&self) -> &str {
        match self {
            Failure::BadInput(m) | Failure::Solver(m) | Failure::Io(m) => m,
        }
    }
}

impl From<qheat::case::CaseError> for Failure {
    fn from(e: qheat::case::CaseError) -> Self {
        Failure::BadInput(e.to_string())
    }
}

impl From<qheat::output::OutputError> for Failure {
    fn from(e: qheat::output::OutputError) -> Self {
        use qheat::output::OutputError as E;
        match e {
            E::InTheWay { .. } => Failure::BadInput(format!(
                "{e}\nhint: choose another folder with -o DIR, or pass --overwrite to write qheat's files \
                 beside them (only files with the same name as one of this result's, such as summary.json, \
                 are then overwritten)"
            )),
            E::StoreInTheWay { .. } => Failure::BadInput(format!(
                "{e}\nhint: choose another folder with -o DIR; a sweep or screen started again into this \
                 folder resumes from the store"
            )),
            E::Busy { .. } => Failure::BadInput(format!(
                "{e}\nhint: wait for that run to finish, or choose another folder with -o DIR"
            )),
            other => Failure::Io(other.to_string()),
        }
    }
}

impl From<qheat::session::SessionError> for Failure {
    fn from(e: qheat::session::SessionError) -> Self {
        use qheat::session::SessionError as E;
        match e {
            E::Case(e) => e.into(),
            E::BadInput(m) => Failure::BadInput(m),
            E::Output(e) => e.into(),
            E::Io(m) => Failure::Io(m),
            other => Failure::Solver(other.to_string()),
        }
    }
}

/// What `--overwrite` says about files in the result folder that qheat did
/// not write.
fn others(overwrite: bool) -> qheat::output::OtherFiles {
    if overwrite {
        qheat::output::OtherFiles::KeepBeside
    } else {
        qheat::output::OtherFiles::Refuse
    }
}

/// How a result of `kind` goes into its folder.
pub fn folder(kind: &str, other_files: qheat::output::OtherFiles) -> qheat::output::FolderOptions {
    qheat::session::folder(kind, other_files)
}

/// Options every command shares.
#[derive(Clone, Copy, Debug)]
pub struct Common {
    /// Threads in the pool.
    pub threads: usize,
    /// Suppress progress and the human summary.
    pub quiet: bool,
    /// Print JSON on stdout.
    pub json: bool,
    /// Write result folders: false on every rank but 0 of a command whose
    /// Born solves share their energies over MPI ranks.
    pub writes: bool,
}

/// Parse the command line, run, and map the outcome to an exit code.
pub fn run() -> ExitCode {
    // Under an MPI launcher every rank runs this; rank 0 alone prints.
    // Failures up to the command are the same on every rank (same
    // arguments), so each rank leaves alone; past that they go through the
    // cluster's collectives.
    let cluster = Cluster::start();
    let root = cluster.is_root();
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let code = if e.use_stderr() { 1 } else { 0 };
            if root {
                let _ = e.print();
            }
            return ExitCode::from(code);
        }
    };
    let threads = match thread_count(cli.threads) {
        Ok(n) => n,
        Err(message) => {
            if root {
                eprintln!("error: {message}");
            }
            return ExitCode::from(1);
        }
    };
    if let Err(f) = check_paths(&cli.command) {
        if root {
            eprintln!("error: {}", f.message());
        }
        return ExitCode::from(f.code());
    }
    // The global pool can be set once; tests run commands in fresh processes.
    let _ = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build_global();
    let common = Common {
        threads: rayon::current_num_threads(),
        quiet: cli.quiet || !root,
        json: cli.json && root,
        writes: root,
    };
    let outcome = match &cli.command {
        Command::Sweep { .. } | Command::Screen { .. } => {
            split_points(&cli.command, &common, &cluster)
        }
        Command::Solve { .. } if cluster.size() > 1 => {
            split_energies(&cluster, || dispatch(&cli.command, &common, &cluster))
        }
        Command::Coefficients {
            case,
            out,
            overwrite,
        } if cluster.size() > 1 => split_energies(&cluster, || {
            let ready = coefficients_ready(case, out.as_deref(), others(*overwrite), &cluster);
            agreed(&cluster, ready)?;
            dispatch(&cli.command, &common, &cluster)
        }),
        other => on_root(&cluster, || dispatch(other, &common, &cluster)),
    };
    match outcome {
        Ok(()) => ExitCode::SUCCESS,
        Err(f) => {
            if root {
                eprintln!("error: {}", f.message());
            }
            ExitCode::from(f.code())
        }
    }
}

/// A command that is not split over ranks: rank 0 runs it, the others wait
/// for its outcome and end with the same exit code.
fn on_root(
    cluster: &Cluster,
    command: impl FnOnce() -> Result<(), Failure>,
) -> Result<(), Failure> {
    if cluster.size() == 1 {
        return command();
    }
    let outcome = if cluster.is_root() { command() } else { Ok(()) };
    agreed(cluster, outcome)
}

/// A command whose Born solves share their energies over the ranks (see
/// `qheat::scba::split`): every rank runs it; its outcome is agreed on so
/// that every rank ends with the same exit code.
fn split_energies(
    cluster: &Cluster,
    command: impl FnOnce() -> Result<(), Failure>,
) -> Result<(), Failure> {
    let split = std::rc::Rc::new(qheat::scba::ClusterSplit::new(cluster.clone()));
    let outcome = qheat::scba::with_energy_split(split, command);
    agreed(cluster, outcome)
}

/// What `qheat coefficients` checks before its runs, checked on every rank
/// (and agreed on) before any rank starts one, so that no rank waits in a
/// Born solve for one that stopped: the case, the memory of this rank's
/// share of the machine and, on rank 0, the result folder.
fn coefficients_ready(
    path: &Path,
    out: Option<&Path>,
    other_files: qheat::output::OtherFiles,
    cluster: &Cluster,
) -> Result<(), Failure> {
    let loaded = qheat::session::Loaded::from_file(path)?;
    let here = ranks_on_this_machine(cluster) as u64;
    check_memory(loaded.resolved.memory_estimate_bytes().saturating_mul(here))?;
    if cluster.is_root() {
        let dir = out
            .map(Path::to_path_buf)
            .unwrap_or_else(|| default_out(&loaded.case.name, "-coefficients"));
        qheat::output::manifest::check_folder(&dir, &folder("coefficients", other_files))?;
    }
    Ok(())
}

/// How many ranks of `cluster` the launcher started on this machine (as
/// Open MPI and MPICH's Hydra tell each process; all of them when it does
/// not say).
pub fn ranks_on_this_machine(cluster: &Cluster) -> usize {
    ["OMPI_COMM_WORLD_LOCAL_SIZE", "MPI_LOCALNRANKS"]
        .iter()
        .find_map(|v| std::env::var(v).ok()?.parse::<usize>().ok())
        .unwrap_or(cluster.size())
        .clamp(1, cluster.size())
}

/// `local` where every rank succeeded, else on every rank the failure of
/// the lowest failing rank. Every rank must call it.
pub fn agreed<T>(cluster: &Cluster, local: Result<T, Failure>) -> Result<T, Failure> {
    match local {
        Ok(value) => cluster.agree(Ok(())).map(|()| value).map_err(Failure::from),
        Err(f) => {
            let fault = Fault::from(f);
            Err(cluster
                .agree(Err(fault.clone()))
                .err()
                .unwrap_or(fault)
                .into())
        }
    }
}

impl From<Failure> for Fault {
    fn from(f: Failure) -> Self {
        Fault {
            code: f.code(),
            message: f.message().to_string(),
        }
    }
}

impl From<Fault> for Failure {
    fn from(f: Fault) -> Self {
        match f.code {
            1 => Failure::BadInput(f.message),
            2 => Failure::Solver(f.message),
            _ => Failure::Io(f.message),
        }
    }
}

/// The worker threads asked for (all cores when not given), within
/// 1…MAX_THREADS.
fn thread_count(asked: Option<usize>) -> Result<usize, String> {
    let threads = asked.unwrap_or_else(|| {
        std::thread::available_parallelism()
            .map(|n| n.get())
            .unwrap_or(1)
    });
    if threads == 0 {
        return Err("--threads must be at least 1".into());
    }
    if threads > MAX_THREADS {
        return Err(format!(
            "--threads must be at most {MAX_THREADS}, found {threads}; \
             hint: one thread per core is the fastest (leave --threads out to use all cores)"
        ));
    }
    Ok(threads)
}

/// Run one command.
fn dispatch(command: &Command, common: &Common, cluster: &Cluster) -> Result<(), Failure> {
    match command {
        Command::Check { case } => {
            solve::check(case, common)?;
            if cluster.size() > 1 && !common.quiet && !common.json {
                println!(
                    "mpi ranks   {}: each holds every array of a solve, so the memory above is \
                     per rank (the energy split saves time, not memory)",
                    cluster.size()
                );
            }
            Ok(())
        }
        Command::Solve {
            case,
            out,
            overwrite,
            warm_start,
            full_arrays,
            result_budget_mb,
            ignore_memory_estimate,
        } => solve::solve(
            case,
            out.as_deref(),
            others(*overwrite),
            warm_start.as_deref(),
            &solve::SolveLimits {
                files: solve::result_limits(*result_budget_mb, *full_arrays)?,
                ignore_memory: *ignore_memory_estimate,
            },
            common,
            cluster,
        ),
        Command::Coefficients {
            case,
            out,
            overwrite,
        } => coefficients::coefficients(case, out.as_deref(), others(*overwrite), common),
        Command::Sweep { .. } | Command::Screen { .. } => split_points(command, common, cluster),
        Command::Generator {
            case,
            hot,
            cold,
            points,
            out,
            overwrite,
        } => curves::generator(
            case,
            *hot,
            *cold,
            *points,
            out.as_deref(),
            others(*overwrite),
            common,
        ),
        Command::Cooler {
            case,
            hot,
            cold,
            points,
            cold_lead,
            out,
            overwrite,
        } => curves::cooler(
            case,
            *hot,
            *cold,
            *points,
            *cold_lead,
            out.as_deref(),
            others(*overwrite),
            common,
        ),
        Command::Report { dir } => report::report(dir, common),
    }
}

/// Run a command whose points are split over the ranks of a job.
fn split_points(command: &Command, common: &Common, cluster: &Cluster) -> Result<(), Failure> {
    match command {
        Command::Sweep {
            case,
            vary,
            out,
            overwrite,
        } => sweep::sweep(
            case,
            vary,
            out.as_deref(),
            others(*overwrite),
            common,
            cluster,
        ),
        Command::Screen {
            case,
            vary,
            rank,
            hot,
            cold,
            points,
            out,
            overwrite,
        } => screen::screen(
            case,
            vary,
            *rank,
            *hot,
            *cold,
            points.as_ref().copied(),
            out.as_deref(),
            others(*overwrite),
            common,
            cluster,
        ),
        _ => unreachable!("only sweep and screen split their points"),
    }
}

/// Most worker threads accepted: far beyond any core count, and each
/// thread reserves its own stack.
const MAX_THREADS: usize = 1024;

/// The first existing ancestor of `path` (itself included), if any.
fn existing_ancestor(path: &Path) -> Option<&Path> {
    path.ancestors()
        .find(|a| !a.as_os_str().is_empty() && std::fs::symlink_metadata(a).is_ok())
}

/// Check a given result folder before any work: a regular file in its
/// place or above it cannot hold results (I/O failure, exit 3, for root
/// too). Whether an existing folder may take the results is decided by
/// its manifest when the results are staged (`qheat::output`).
pub fn check_out_dir(out: &Path) -> Result<(), Failure> {
    let shown = out.display();
    if let Some(a) = existing_ancestor(out)
        && !a.is_dir()
    {
        let what = if a == out {
            format!("`{shown}` is a regular file, not a folder")
        } else {
            format!("`{}` above it is a regular file, not a folder", a.display())
        };
        return Err(Failure::Io(format!(
            "-o {shown}: expected a result folder that can be created, found that {what}; \
             hint: choose another -o folder"
        )));
    }
    Ok(())
}

/// Options that name files and folders, checked before any case is read.
fn check_paths(command: &Command) -> Result<(), Failure> {
    match command {
        Command::Solve {
            out, warm_start, ..
        } => {
            if let Some(dir) = warm_start {
                let shown = dir.display();
                if !dir.is_dir() {
                    return Err(Failure::BadInput(format!(
                        "--warm-start {shown}: expected the result folder of an earlier solve, \
                         found no such folder"
                    )));
                }
                let needed = qheat::output::results::SELF_ENERGY_FILES[0];
                if !dir.join(needed).is_file() {
                    return Err(Failure::BadInput(format!(
                        "--warm-start {shown}: expected a result folder with {needed} \
                         (written by a solve with scattering), found none; \
                         hint: leave --warm-start out to start from the coherent solution"
                    )));
                }
            }
            out.as_deref().map_or(Ok(()), check_out_dir)
        }
        Command::Coefficients { out, .. }
        | Command::Generator { out, .. }
        | Command::Cooler { out, .. } => out.as_deref().map_or(Ok(()), check_out_dir),
        Command::Sweep { out, .. } | Command::Screen { out, .. } => {
            out.as_deref().map_or(Ok(()), check_out_dir)
        }
        Command::Check { .. } | Command::Report { .. } => Ok(()),
    }
}

/// Default result folder: runs/<case name><suffix>.
pub fn default_out(case_name: &str, suffix: &str) -> PathBuf {
    let safe: String = case_name
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' || c == '_' || c == '.' {
                c
            } else {
                '_'
            }
        })
        .collect();
    PathBuf::from("runs").join(format!("{safe}{suffix}"))
}

/// Print warnings and notes on stderr unless quiet.
pub fn print_warnings(warnings: &[String], notes: &[String], common: &Common) {
    if common.quiet {
        return;
    }
    for w in warnings {
        eprintln!("warning: {w}");
    }
    for n in notes {
        eprintln!("note: {n}");
    }
}

/// Refuse a case whose arrays would not fit in memory, with the estimate.
pub fn check_memory(estimate_bytes: u64) -> Result<(), Failure> {
    Ok(qheat::session::refuse_arrays_beyond_memory(
        estimate_bytes,
        available_memory_bytes(),
    )?)
}

/// The memory a run may use (see [`qheat::output::memory`]).
pub fn available_memory_bytes() -> Option<u64> {
    qheat::output::memory::available_memory_bytes()
}
