//! Linear-response coefficients and the generator and cooler curves:
//! `qheat.coefficients`, `qheat.generator` and `qheat.cooler`, with the
//! options of the command line's commands of the same names.

use crate::errors::{self, NotConverged, session_error, with_message};
use crate::observer::PyObserver;
use crate::{Case, json_value, table_dict};
use pyo3::prelude::*;
use pyo3::types::PyDict;
use qheat::leads::Side;
use qheat::output::OtherFiles;
use qheat::output::memory::available_memory_bytes;
use qheat::output::schema::summary::to_text;
use qheat::session::{self, CoefficientsRun, CoolerRun, GeneratorRun, SessionError, Spelling};
use std::path::PathBuf;

/// Run `work` with the GIL released, its events going to `progress`; an
/// exception raised by `progress` or by Ctrl-C stops it and is raised.
/// The case's memory estimate is checked first, as the command line does.
fn detached<T: Send>(
    py: Python<'_>,
    case: &Case,
    progress: Option<Py<PyAny>>,
    work: impl FnOnce(session::Loaded, &mut PyObserver) -> Result<T, SessionError> + Send,
) -> PyResult<T> {
    let loaded = case.loaded.clone();
    let estimate = loaded.resolved.memory_estimate_bytes();
    session::refuse_arrays_beyond_memory(estimate, available_memory_bytes())
        .map_err(|e| session_error(py, e, None))?;
    let mut observer = PyObserver::new(progress);
    let out = py.detach(|| work(loaded, &mut observer));
    match (out, observer.take_error()) {
        (_, Some(pending)) => Err(pending),
        (Ok(v), None) => Ok(v),
        (Err(e), None) => Err(session_error(py, e, None)),
    }
}

/// What files already in a result folder do: `overwrite` keeps files
/// qheat did not write beside the result, else the folder is refused.
fn other_files(overwrite: bool) -> OtherFiles {
    if overwrite {
        OtherFiles::KeepBeside
    } else {
        OtherFiles::Refuse
    }
}

/// Linear-response coefficients of a case (what `qheat coefficients`
/// computes): `summary` is a dict with the values of summary.json
/// (`coefficients`, `response`, `energy_grid`, and `lattice` and
/// `channels` when the case has them); `coefficients` is its
/// `coefficients` entry (G, S, Π, κe, Lorenz ratio, power factor, ZT,
/// Kelvin residual). `write(folder)` writes the command line's folder.
#[pyclass(module = "qheat", name = "CoefficientsResult", frozen)]
pub struct CoefficientsResult {
    run: CoefficientsRun,
}

#[pymethods]
impl CoefficientsResult {
    /// The summary as a dict (the values of summary.json).
    #[getter]
    fn summary(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        json_value(py, &to_text(&self.run.summary))
    }

    /// The coefficients as a dict (the `coefficients` entry of the
    /// summary): conductance_s, seebeck_v_per_k, peltier_v,
    /// thermal_conductance_w_per_k, lorenz_ratio, power_factor_w_per_k2,
    /// zt, kelvin_residual, ...
    #[getter]
    fn coefficients(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        json_value(py, &to_text(&self.run.summary.coefficients))
    }

    /// Write the result folder `qheat coefficients` writes (same files,
    /// same bytes) and return the summary. `overwrite` keeps files qheat
    /// did not write beside the result instead of refusing the folder.
    #[pyo3(signature = (folder, *, overwrite = false))]
    fn write(&self, py: Python<'_>, folder: PathBuf, overwrite: bool) -> PyResult<Py<PyAny>> {
        let run = &self.run;
        py.detach(|| run.write(&folder, other_files(overwrite)))
            .map_err(|e| session_error(py, e, None))?;
        self.summary(py)
    }

    fn __repr__(&self) -> String {
        let c = &self.run.summary.coefficients;
        format!(
            "<qheat.CoefficientsResult {:?}: G = {:e} S, S = {:e} V/K, ZT = {:.4}>",
            self.run.loaded.case.name, c.conductance_s, c.seebeck_v_per_k, c.zt
        )
    }
}

/// Linear-response coefficients of `case` around its reference point (the
/// mean zero-bias Fermi level and lead temperature), what `qheat
/// coefficients` computes: G, S, Π, κe, the Lorenz ratio, the power
/// factor, ZT and the Onsager (Kelvin) residual; from transmission moments
/// for a coherent two-terminal device, else from four solves around the
/// point. Returns a CoefficientsResult; nothing is written until
/// `result.write(folder)`.
///
/// `progress`: a callable given a dict for each Born iteration of the
/// runs. The GIL is released while solving; Ctrl-C (KeyboardInterrupt) or
/// an exception raised by `progress` stops the run at the next Born
/// iteration and is raised here. Raises SolverError when a run did not
/// converge (the coefficients would not be trustworthy), InputError when
/// the case needs more memory than the machine has.
#[pyfunction]
#[pyo3(signature = (case, /, *, progress = None))]
pub fn coefficients(
    py: Python<'_>,
    case: &Case,
    progress: Option<Py<PyAny>>,
) -> PyResult<CoefficientsResult> {
    let threads = rayon::current_num_threads();
    let run = detached(py, case, progress, |loaded, observer| {
        session::coefficients(loaded, threads, observer)
    })?;
    Ok(CoefficientsResult { run })
}

/// A generator or a cooler curve.
enum Curve {
    Generator(GeneratorRun),
    Cooler(CoolerRun),
}

/// A generator or cooler curve (see `qheat.generator`, `qheat.cooler`):
/// `table` (dict of numpy arrays, one entry per voltage, the columns of
/// generator.csv or cooler.csv), `summary` (dict of summary.json: the
/// maxima, efficiencies or COPs, bounds and settings), `kind`
/// ("generator" or "cooler"). `write(folder)` writes the command line's
/// folder.
#[pyclass(module = "qheat", name = "CurveResult", frozen)]
pub struct CurveResult {
    curve: Curve,
}

#[pymethods]
impl CurveResult {
    /// "generator" or "cooler".
    #[getter]
    fn kind(&self) -> &'static str {
        match &self.curve {
            Curve::Generator(_) => "generator",
            Curve::Cooler(_) => "cooler",
        }
    }

    /// The summary as a dict (the values of summary.json).
    #[getter]
    fn summary(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        let text = match &self.curve {
            Curve::Generator(r) => to_text(&r.summary()),
            Curve::Cooler(r) => to_text(&r.summary()),
        };
        json_value(py, &text)
    }

    /// The curve: one numpy array per column, one entry per voltage
    /// (ascending).
    #[getter]
    fn table<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyDict>> {
        match &self.curve {
            Curve::Generator(r) => table_dict(py, r.table()),
            Curve::Cooler(r) => table_dict(py, r.table()),
        }
    }

    /// Whether every solve of the curve converged.
    #[getter]
    fn converged(&self) -> bool {
        self.not_converged().is_none()
    }

    /// Write the result folder the command line writes (same files, same
    /// bytes) and return the summary. `overwrite` keeps files qheat did
    /// not write beside the result instead of refusing the folder.
    #[pyo3(signature = (folder, *, overwrite = false))]
    fn write(&self, py: Python<'_>, folder: PathBuf, overwrite: bool) -> PyResult<Py<PyAny>> {
        let others = other_files(overwrite);
        let curve = &self.curve;
        py.detach(|| match curve {
            Curve::Generator(r) => r.write(&folder, others),
            Curve::Cooler(r) => r.write(&folder, others),
        })
        .map_err(|e| session_error(py, e, None))?;
        self.summary(py)
    }

    fn __repr__(&self) -> String {
        let (name, what) = match &self.curve {
            Curve::Generator(r) => (
                &r.loaded.case.name,
                format!("maximum power {:e} W", r.report.max_power_w),
            ),
            Curve::Cooler(r) => (
                &r.loaded.case.name,
                format!("maximum cooling {:e} W", r.report.max_cooling_power_w),
            ),
        };
        format!("<qheat.CurveResult {} {name:?}: {what}>", self.kind())
    }
}

impl CurveResult {
    fn not_converged(&self) -> Option<String> {
        match &self.curve {
            Curve::Generator(r) => r.not_converged("the results"),
            Curve::Cooler(r) => r.not_converged("the results"),
        }
    }

    /// The result, or NotConverged carrying it when a solve did not
    /// converge.
    fn checked(self, py: Python<'_>) -> PyResult<Self> {
        match self.not_converged() {
            Some(message) => {
                let err = with_message::<NotConverged>(py, message);
                err.value(py).setattr("result", Py::new(py, self)?)?;
                Err(err)
            }
            None => Ok(self),
        }
    }
}

/// The options of a curve checked as the command line checks them.
fn check_curve(py: Python<'_>, hot: f64, cold: f64, points: usize, strict: bool) -> PyResult<()> {
    session::check_curve_options(hot, cold, points, strict, Spelling::Keywords)
        .map_err(|e| session_error(py, e, None))
}

/// Power and efficiency of `case` as a generator against load voltage
/// (what `qheat generator` computes): the left lead (lead 1) at `hot`, the
/// right lead (lead 2) at `cold` (K), `points` load voltages from short
/// circuit to open circuit, the maximum power and the efficiency there,
/// the maximum efficiency, Carnot and Curzon-Ahlborn bounds and the
/// linear-response estimates. Returns a CurveResult; nothing is written
/// until `result.write(folder)`.
///
/// `progress`: a callable given a dict for each solve of the curve
/// (``{"event": "curve solve", "stage": ..., "voltage_v": ...}``). The GIL
/// is released while solving; Ctrl-C (KeyboardInterrupt) or an exception
/// raised by `progress` stops the curve after the solve in progress and is
/// raised here. Raises NotConverged (with `.result`) when a solve did not
/// converge, SolverError when no curve can be made, InputError for bad
/// options.
#[pyfunction]
#[pyo3(signature = (case, /, hot, cold, *, points = 41, progress = None))]
pub fn generator(
    py: Python<'_>,
    case: &Case,
    hot: f64,
    cold: f64,
    points: usize,
    progress: Option<Py<PyAny>>,
) -> PyResult<CurveResult> {
    check_curve(py, hot, cold, points, true)?;
    let run = detached(py, case, progress, |loaded, observer| {
        session::generator(loaded, hot, cold, points, observer)
    })?;
    CurveResult {
        curve: Curve::Generator(run),
    }
    .checked(py)
}

/// Cooling power and COP of `case` against bias (what `qheat cooler`
/// computes): the `cold_lead` ("right", lead 2, or "left", lead 1) at
/// `cold`, the other at `hot` (K), `points` bias voltages, the maximum
/// cooling power, the COP there and at best, the Carnot COP and the
/// linear-response ZT with Ioffe's COP. Returns a CurveResult; nothing is
/// written until `result.write(folder)`.
///
/// `progress`: a callable given a dict for each solve of the curve. The
/// GIL is released while solving; Ctrl-C (KeyboardInterrupt) or an
/// exception raised by `progress` stops the curve after the solve in
/// progress and is raised here. Raises NotConverged (with `.result`) when
/// a solve did not converge, SolverError when no curve can be made,
/// InputError for bad options.
#[pyfunction]
#[pyo3(signature = (case, /, hot, cold, *, points = 41, cold_lead = "right", progress = None))]
pub fn cooler(
    py: Python<'_>,
    case: &Case,
    hot: f64,
    cold: f64,
    points: usize,
    cold_lead: &str,
    progress: Option<Py<PyAny>>,
) -> PyResult<CurveResult> {
    check_curve(py, hot, cold, points, false)?;
    let side: Side = cold_lead.parse().map_err(|_| {
        with_message::<errors::InputError>(
            py,
            format!("cold_lead = {cold_lead:?}: expected \"left\" or \"right\""),
        )
    })?;
    let run = detached(py, case, progress, |loaded, observer| {
        session::cooler(loaded, hot, cold, points, side, observer)
    })?;
    CurveResult {
        curve: Curve::Cooler(run),
    }
    .checked(py)
}
