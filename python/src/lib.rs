//! qheat from Python: load a case (a TOML file or a dict), check it, solve
//! it, compute its coefficients, generator and cooler curves, sweep and
//! screen it, and get the results as numpy arrays and plain Python values,
//! or write the same result folder as the command line.
//!
//! Every run goes through the library's command-level functions
//! (`qheat::session`), so the numbers and files are those of the command
//! line. Runs release the GIL; Ctrl-C stops them (KeyboardInterrupt,
//! nothing written): a solve or a coefficient run at its next Born
//! iteration, a curve after its solve in progress, a sweep or screen
//! after its points in flight (which stay in its store for the next run).

mod curves;
mod errors;
mod observer;

use errors::{NotConverged, case_error, session_error, with_message};
use numpy::{PyArray1, PyArray2};
use observer::PyObserver;
use pyo3::prelude::*;
use pyo3::types::{PyBool, PyDict, PyFloat, PyInt, PyList, PyString, PyTuple};
use qheat::output::OtherFiles;
use qheat::output::memory::available_memory_bytes;
use qheat::output::sizes::ResultLimits;
use qheat::session::{self, Loaded, SessionError, SolveOptions, Solved, WriteOptions};
use std::path::PathBuf;

/// A case, read and resolved: the device, contacts, scattering, energy
/// grid and solver settings of one operating point.
#[pyclass(module = "qheat", name = "Case", frozen)]
struct Case {
    loaded: Loaded,
}

#[pymethods]
impl Case {
    /// The case's name.
    #[getter]
    fn name(&self) -> String {
        self.loaded.case.name.clone()
    }

    /// Where the case came from: the file name, or "<dict>".
    #[getter]
    fn file(&self) -> String {
        self.loaded.case_file.clone()
    }

    /// Warnings from resolving the case.
    #[getter]
    fn warnings(&self) -> Vec<String> {
        self.loaded.resolved.warnings.clone()
    }

    /// Check the case without solving: a dict with the number of cells,
    /// orbitals per cell, the energy grid, the phonon modes, the memory and
    /// time estimates, warnings and notes (what `qheat check --json`
    /// prints).
    fn check(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        let v = self.loaded.check_output(rayon::current_num_threads());
        json_value(py, &qheat::output::schema::summary::to_text(&v))
    }

    /// The case as TOML text (the `resolved_case` of every summary).
    fn to_toml(&self) -> String {
        self.loaded.case.to_toml_string()
    }

    /// Two cases are equal when their documents hold the same keys and
    /// values (comments, layout and origin aside).
    fn __eq__(&self, other: &Bound<'_, PyAny>) -> bool {
        let table = |c: &Case| c.to_toml().parse::<toml::Table>().ok();
        other
            .cast::<Case>()
            .is_ok_and(|o| table(o.get()).is_some_and(|t| Some(t) == table(self)))
    }

    fn __repr__(&self) -> String {
        format!("<qheat.Case {:?} from {}>", self.name(), self.file())
    }
}

/// A Python value from JSON text (summaries are built by the library as
/// JSON, the same text summary.json holds).
fn json_value(py: Python<'_>, text: &str) -> PyResult<Py<PyAny>> {
    Ok(py.import("json")?.call_method1("loads", (text,))?.unbind())
}

/// A TOML value from a Python value of a case dict; `key` names it in
/// errors.
fn toml_value(v: &Bound<'_, PyAny>, key: &str) -> PyResult<toml::Value> {
    use toml::Value as T;
    if v.is_instance_of::<PyBool>() {
        return Ok(T::Boolean(v.extract()?));
    }
    if v.is_instance_of::<PyInt>() {
        return Ok(T::Integer(v.extract()?));
    }
    if v.is_instance_of::<PyFloat>() {
        return Ok(T::Float(v.extract()?));
    }
    if v.is_instance_of::<PyString>() {
        return Ok(T::String(v.extract()?));
    }
    if let Ok(d) = v.cast::<PyDict>() {
        return Ok(T::Table(toml_table(d, key)?));
    }
    if v.is_instance_of::<PyList>() || v.is_instance_of::<PyTuple>() {
        let items = v
            .try_iter()?
            .enumerate()
            .map(|(i, x)| toml_value(&x?, &format!("{key}[{i}]")))
            .collect::<PyResult<Vec<_>>>()?;
        return Ok(T::Array(items));
    }
    Err(with_message::<errors::InputError>(
        v.py(),
        format!(
            "case dict key `{key}`: expected a bool, number, string, list or dict, found a \
             value of type {}; hint: convert it (numpy numbers with float(...))",
            v.get_type().name()?
        ),
    ))
}

fn toml_table(d: &Bound<'_, PyDict>, prefix: &str) -> PyResult<toml::Table> {
    let mut t = toml::Table::new();
    for (k, v) in d.iter() {
        let Ok(name) = k.extract::<String>() else {
            return Err(with_message::<errors::InputError>(
                d.py(),
                format!("case dict: expected text keys, found {k:?} in `{prefix}`"),
            ));
        };
        let path = if prefix.is_empty() {
            name.clone()
        } else {
            format!("{prefix}.{name}")
        };
        t.insert(name, toml_value(&v, &path)?);
    }
    Ok(t)
}

/// Read a case: `source` is the path of a TOML case file, or a dict with
/// the same keys and tables as the file (``{"device": {"kind": "chain",
/// ...}, "leads": {...}}``). Files the case names (Hamiltonian blocks) are
/// looked for beside the case file, or in `base_dir` (default: the current
/// folder) for a dict. Raises CaseError (with file, line, key) when the
/// case is wrong.
#[pyfunction]
#[pyo3(signature = (source, /, *, base_dir = None))]
fn load(py: Python<'_>, source: &Bound<'_, PyAny>, base_dir: Option<PathBuf>) -> PyResult<Case> {
    let loaded = if let Ok(d) = source.cast::<PyDict>() {
        let text = toml::to_string(&toml_table(d, "")?)
            .map_err(|e| with_message::<errors::InputError>(py, format!("case dict: {e}")))?;
        let base = base_dir.unwrap_or_else(|| PathBuf::from("."));
        Loaded::from_text(&text, "<dict>", &base)
    } else {
        let path: PathBuf = source.extract()?;
        Loaded::from_file(&path)
    };
    loaded
        .map(|loaded| Case { loaded })
        .map_err(|e| case_error(py, &e))
}

/// Columns of a table as a dict of numpy arrays, in file order.
fn table_dict<'py>(py: Python<'py>, cols: Vec<(&str, Vec<f64>)>) -> PyResult<Bound<'py, PyDict>> {
    let d = PyDict::new(py);
    for (name, values) in cols {
        d.set_item(name, PyArray1::from_vec(py, values))?;
    }
    Ok(d)
}

/// The results of one operating point (what `qheat solve` computes).
///
/// `summary` is a dict with the values of summary.json; `sites`,
/// `spectrum` and `convergence` are dicts of numpy arrays with the columns
/// of sites.csv, spectrum.csv and convergence.csv; `bond_current` holds the
/// energy-resolved bond-current map with its axes. `write(folder)` writes
/// the result folder of the command line.
#[pyclass(module = "qheat", name = "SolveResult", frozen)]
struct SolveResult {
    solved: Solved,
}

#[pymethods]
impl SolveResult {
    /// The summary as a dict (the values of summary.json; its
    /// `result_files` entry is filled only in the written file).
    #[getter]
    fn summary(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        json_value(
            py,
            &qheat::output::schema::summary::to_text(&self.solved.summary),
        )
    }

    /// Whether every loop converged; an unconverged solve raises
    /// NotConverged, whose `result` is this object with `converged` False.
    #[getter]
    fn converged(&self) -> bool {
        self.solved.converged()
    }

    /// Per-cell table: dict of numpy arrays (x_nm, band_edge_ev,
    /// lattice_power_w, local Fermi level, ...), one entry per cell.
    #[getter]
    fn sites<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyDict>> {
        table_dict(py, self.solved.sites())
    }

    /// Per-energy table: dict of numpy arrays (energy_ev, transmission,
    /// current spectra, ...), one entry per grid energy.
    #[getter]
    fn spectrum<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyDict>> {
        table_dict(py, self.solved.spectrum())
    }

    /// The Born loop's record: dict of numpy arrays, one entry per iteration.
    #[getter]
    fn convergence<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyDict>> {
        table_dict(py, self.solved.convergence())
    }

    /// The bond-current map: dict with `map` (bonds × energies, A/eV),
    /// `bond_x_nm` (bond midpoints) and `energy_ev`.
    #[getter]
    fn bond_current<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyDict>> {
        let b = self.solved.bond_current();
        let d = PyDict::new(py);
        d.set_item("map", PyArray2::from_owned_array(py, b.map))?;
        d.set_item("bond_x_nm", PyArray1::from_vec(py, b.bond_x_nm))?;
        d.set_item("energy_ev", PyArray1::from_vec(py, b.energy_ev))?;
        Ok(d)
    }

    /// Write the result folder `qheat solve` writes (same files, same
    /// bytes) and return the summary as written. `overwrite` keeps files
    /// qheat did not write beside the result instead of refusing the
    /// folder; `full_arrays` and `result_budget_mb` are the size limits of
    /// the command line's options of the same names.
    #[pyo3(signature = (folder, *, overwrite = false, full_arrays = false, result_budget_mb = 50.0))]
    fn write(
        &self,
        py: Python<'_>,
        folder: PathBuf,
        overwrite: bool,
        full_arrays: bool,
        result_budget_mb: f64,
    ) -> PyResult<Py<PyAny>> {
        let options = write_options(py, overwrite, full_arrays, result_budget_mb)?;
        let solved = &self.solved;
        let summary = py
            .detach(|| solved.write(&folder, &options))
            .map_err(|e| session_error(py, e, None))?;
        json_value(py, &qheat::output::schema::summary::to_text(&summary))
    }

    fn __repr__(&self) -> String {
        let r = &self.solved.summary.results;
        format!(
            "<qheat.SolveResult {:?}: I = {:e} A, lattice power {:e} W, converged {}>",
            self.solved.loaded.case.name,
            r.current_a,
            r.lattice_power_w,
            self.converged()
        )
    }
}

/// The write options of the command line's `--overwrite`, `--full-arrays`
/// and `--result-budget-mb`.
fn write_options(
    py: Python<'_>,
    overwrite: bool,
    full_arrays: bool,
    budget_mb: f64,
) -> PyResult<WriteOptions> {
    if !(budget_mb.is_finite() && budget_mb >= 1.0) {
        return Err(with_message::<errors::InputError>(
            py,
            format!(
                "result_budget_mb = {budget_mb}: expected a size of at least 1 MB; hint: the \
                 default is 50 MB, and full_arrays=True writes every array whole"
            ),
        ));
    }
    Ok(WriteOptions {
        other_files: if overwrite {
            OtherFiles::KeepBeside
        } else {
            OtherFiles::Refuse
        },
        limits: ResultLimits {
            budget_bytes: (budget_mb * 1e6) as u64,
            full_arrays,
        },
    })
}

/// Solve one operating point of `case` (a Case from `qheat.load`): the
/// Born loop (with the joint lattice loop when the lattice is heated, or
/// the electrostatics when the case asks for it), currents, heat currents,
/// lattice power, ledger and local Fermi level. Returns a SolveResult;
/// nothing is written until `result.write(folder)`.
///
/// `warm_start`: a result folder of an earlier solve whose self-energy
/// starts the Born loop. `progress`: a callable given a dict for each
/// event (``{"event": "born iteration", "iteration": 3, "residual": ...}``).
/// The GIL is released while solving; Ctrl-C (KeyboardInterrupt) or an
/// exception raised by `progress` stops the solve at the next Born
/// iteration, is raised here, and nothing is written. Raises NotConverged
/// (with `.result`) when a loop did not converge, SolverError on a
/// numerical fault, and InputError, before any work, when the case's
/// memory estimate exceeds 80 % of the memory available (as the command
/// line does; `ignore_memory_estimate=True` runs anyway).
#[pyfunction]
#[pyo3(signature = (case, /, *, warm_start = None, progress = None, ignore_memory_estimate = false))]
fn solve(
    py: Python<'_>,
    case: &Case,
    warm_start: Option<PathBuf>,
    progress: Option<Py<PyAny>>,
    ignore_memory_estimate: bool,
) -> PyResult<SolveResult> {
    let loaded = case.loaded.clone();
    if !ignore_memory_estimate {
        loaded
            .refuse_beyond_memory_as(available_memory_bytes(), session::Spelling::Keywords)
            .map_err(|e| session_error(py, e, None))?;
    }
    let mut observer = PyObserver::new(progress);
    let options = SolveOptions {
        warm_start: warm_start.as_deref(),
        threads: rayon::current_num_threads(),
    };
    let out = py.detach(|| session::solve(loaded, &options, &mut observer));
    let pending = observer.take_error();
    let solved = match (out, pending) {
        (Ok(_), Some(e)) => return Err(e),
        (Ok(s), None) => s,
        (Err(SessionError::Born { error, failure }), _) => {
            let err = with_message::<errors::SolverError>(py, error.to_string());
            let text = qheat::output::schema::summary::to_text(&*failure);
            err.value(py).setattr("summary", json_value(py, &text)?)?;
            return Err(err);
        }
        (Err(e), pending) => return Err(session_error(py, e, pending)),
    };
    match solved.not_converged("the results") {
        Some(message) => {
            let err = with_message::<NotConverged>(py, message);
            err.value(py)
                .setattr("result", Py::new(py, SolveResult { solved })?)?;
            Err(err)
        }
        None => Ok(SolveResult { solved }),
    }
}

/// A finished grid of a sweep or screen (see `qheat.sweep`,
/// `qheat.screen`): `table` (dict of numpy arrays, one entry per point,
/// the columns of sweep.csv or screen.csv), `ranking` (point indices best
/// first, screens only), `summary` (dict of summary.json). The folder was
/// written when the grid finished.
#[pyclass(module = "qheat", name = "GridResult", frozen)]
struct GridResult {
    run: session::GridRun,
}

#[pymethods]
impl GridResult {
    /// The summary as a dict (the values of summary.json).
    #[getter]
    fn summary(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        json_value(
            py,
            &qheat::output::schema::summary::to_text(&self.run.summary),
        )
    }

    /// One numpy array per column, one entry per point (row-major, last
    /// axis fastest).
    #[getter]
    fn table<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyDict>> {
        let t = &self.run.table;
        let cols = t
            .columns
            .iter()
            .enumerate()
            .map(|(c, name)| (name.as_str(), t.rows.iter().map(|r| r[c]).collect()))
            .collect();
        table_dict(py, cols)
    }

    /// Point indices, best first (empty for a sweep).
    #[getter]
    fn ranking(&self) -> Vec<usize> {
        self.run.order.clone()
    }

    /// Whether every point converged.
    #[getter]
    fn converged(&self) -> bool {
        self.run.unconverged().is_empty()
    }
}

/// Run a grid and raise NotConverged (with the result) when some point did
/// not converge.
fn run_grid(
    py: Python<'_>,
    case: &Case,
    vary: Vec<String>,
    kind: session::GridKind,
    folder: PathBuf,
    overwrite: bool,
    progress: Option<Py<PyAny>>,
) -> PyResult<GridResult> {
    let loaded = case.loaded.clone();
    let available = available_memory_bytes();
    session::refuse_arrays_beyond_memory(loaded.resolved.memory_estimate_bytes(), available)
        .map_err(|e| session_error(py, e, None))?;
    let mut observer = PyObserver::new(progress);
    let out = py.detach(|| {
        let grid = session::parse_grid(&loaded.case, &vary)?;
        let cluster = qheat::cluster::Cluster::single();
        let place = session::GridPlace {
            dir: &folder,
            other_files: if overwrite {
                OtherFiles::KeepBeside
            } else {
                OtherFiles::Refuse
            },
            threads: rayon::current_num_threads(),
            memory_budget_bytes: available.map(|b| b / 10 * 8),
            cluster: &cluster,
        };
        session::grid_run(&loaded, grid, kind, &place, &mut observer)
    });
    let pending = observer.take_error();
    let run = match (out, pending) {
        (_, Some(e)) => return Err(e),
        (Ok(run), None) => run,
        (Err(e), None) => return Err(session_error(py, e, None)),
    };
    match run.not_converged(&folder.display().to_string()) {
        Some(message) => {
            let err = with_message::<NotConverged>(py, message);
            err.value(py)
                .setattr("result", Py::new(py, GridResult { run })?)?;
            Err(err)
        }
        None => Ok(GridResult { run }),
    }
}

/// Sweep numeric case keys over a grid (what `qheat sweep` does): `vary`
/// is a list of ``"KEY=START:STOP:COUNT"`` (``"KEY1+KEY2=..."`` sets keys
/// together; several axes are row-major, last fastest). The finished
/// points are kept in `folder`, so the same call again recomputes only
/// what is missing; sweep.csv, the figures and summary.json are written
/// there when the grid is complete. Returns a GridResult. `progress` gets
/// a dict per finished point; Ctrl-C is raised once the points in flight
/// are stored.
#[pyfunction]
#[pyo3(signature = (case, vary, folder, /, *, overwrite = false, progress = None))]
fn sweep(
    py: Python<'_>,
    case: &Case,
    vary: Vec<String>,
    folder: PathBuf,
    overwrite: bool,
    progress: Option<Py<PyAny>>,
) -> PyResult<GridResult> {
    let kind = session::GridKind::Sweep;
    run_grid(py, case, vary, kind, folder, overwrite, progress)
}

/// Screen a figure of merit over a grid and rank the points best first
/// (what `qheat screen` does): `rank` is "zt", "power-factor" or
/// "cooling" (the latter needs `hot` and `cold` lead temperatures in K
/// and runs a cooler curve of `points` biases at each point). Writes
/// screen.csv, ranking.csv, the figures and summary.json into `folder`
/// (which also keeps the finished points). Returns a GridResult whose
/// `ranking` lists the point indices best first.
#[pyfunction]
#[pyo3(signature = (case, vary, folder, /, *, rank = "zt", hot = None, cold = None, points = 21, overwrite = false, progress = None))]
#[allow(clippy::too_many_arguments)]
fn screen(
    py: Python<'_>,
    case: &Case,
    vary: Vec<String>,
    folder: PathBuf,
    rank: &str,
    hot: Option<f64>,
    cold: Option<f64>,
    points: usize,
    overwrite: bool,
    progress: Option<Py<PyAny>>,
) -> PyResult<GridResult> {
    use qheat::sweep::screen::{CoolingCurve, Rank};
    let bad = |m: String| with_message::<errors::InputError>(py, m);
    let rank: Rank = rank
        .parse()
        .map_err(|e| bad(format!("rank = {rank:?}: {e}")))?;
    let cooling = match (rank, hot, cold) {
        (Rank::Cooling, Some(hot_k), Some(cold_k)) => {
            if !(cold_k > 0.0 && hot_k >= cold_k && hot_k.is_finite() && points >= 3) {
                return Err(bad(format!(
                    "hot = {hot_k}, cold = {cold_k}, points = {points}: expected hot ≥ cold > 0                      and at least 3 points"
                )));
            }
            Some(CoolingCurve {
                hot_k,
                cold_k,
                points,
            })
        }
        (Rank::Cooling, _, _) => {
            return Err(bad("rank = \"cooling\" needs hot and cold (K)".into()));
        }
        (_, None, None) => None,
        _ => {
            return Err(bad(
                "hot and cold: expected only with rank = \"cooling\"; hint: leave them out".into(),
            ));
        }
    };
    let kind = session::GridKind::Screen { rank, cooling };
    run_grid(py, case, vary, kind, folder, overwrite, progress)
}

/// The native part of the qheat Python package.
#[pymodule]
fn _qheat(m: &Bound<'_, PyModule>) -> PyResult<()> {
    errors::register(m)?;
    m.add_class::<Case>()?;
    m.add_class::<SolveResult>()?;
    m.add_function(wrap_pyfunction!(load, m)?)?;
    m.add_function(wrap_pyfunction!(solve, m)?)?;
    m.add_class::<GridResult>()?;
    m.add_function(wrap_pyfunction!(sweep, m)?)?;
    m.add_function(wrap_pyfunction!(screen, m)?)?;
    m.add_class::<curves::CoefficientsResult>()?;
    m.add_class::<curves::CurveResult>()?;
    m.add_function(wrap_pyfunction!(curves::coefficients, m)?)?;
    m.add_function(wrap_pyfunction!(curves::generator, m)?)?;
    m.add_function(wrap_pyfunction!(curves::cooler, m)?)?;
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    Ok(())
}
