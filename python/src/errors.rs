//! The exception hierarchy: every error of a run becomes a subclass of
//! `qheat.QheatError` carrying the message the command line prints.

use pyo3::exceptions::PyException;
use pyo3::prelude::*;
use qheat::case::CaseError as RustCaseError;
use qheat::session::SessionError;

pyo3::create_exception!(
    qheat,
    QheatError,
    PyException,
    "Base class of every error qheat raises; `message` holds the text the command line prints."
);
pyo3::create_exception!(
    qheat,
    CaseError,
    QheatError,
    "The case is wrong. Attributes: message, file, line, column, key (dotted key path), \
     suggestion (a close match, or None), kind (syntax, unknown key, wrong type, missing, \
     invalid, file, io)."
);
pyo3::create_exception!(
    qheat,
    InputError,
    QheatError,
    "Other input that cannot be used: options, a warm-start folder, a grid specification."
);
pyo3::create_exception!(
    qheat,
    SolverError,
    QheatError,
    "A solver met a numerical fault and left no trustworthy result."
);
pyo3::create_exception!(
    qheat,
    NotConverged,
    SolverError,
    "A loop stopped before converging; `result` holds the result, flagged as not converged \
     (its summary says converged = false), which can still be inspected and written."
);
pyo3::create_exception!(
    qheat,
    OutputError,
    QheatError,
    "A result folder could not be written or read (or holds files qheat did not write)."
);

/// A `CaseError` with its file, line, column, key and suggestion.
pub fn case_error(py: Python<'_>, e: &RustCaseError) -> PyErr {
    let err = CaseError::new_err(e.to_string());
    let v = err.value(py);
    let (line, column) = e.location.map_or((None, None), |(l, c)| (Some(l), Some(c)));
    let kind = format!("{:?}", e.kind).to_lowercase();
    let set = || -> PyResult<()> {
        v.setattr("message", e.to_string())?;
        v.setattr("file", e.origin.clone())?;
        v.setattr("line", line)?;
        v.setattr("column", column)?;
        v.setattr("key", e.key.clone())?;
        v.setattr("suggestion", e.suggestion.clone())?;
        v.setattr("kind", kind)
    };
    match set() {
        Ok(()) => err,
        Err(e) => e,
    }
}

/// An exception of class `T` with its `message` attribute set.
pub fn with_message<T: pyo3::PyTypeInfo>(py: Python<'_>, message: String) -> PyErr {
    let err = PyErr::new::<T, _>(message.clone());
    match err.value(py).setattr("message", message) {
        Ok(()) => err,
        Err(e) => e,
    }
}

/// The Python exception of a failed run. A cancelled run raises the
/// pending interrupt (`pending`) when there is one.
pub fn session_error(py: Python<'_>, e: SessionError, pending: Option<PyErr>) -> PyErr {
    match e {
        SessionError::Cancelled => pending.unwrap_or_else(|| {
            pyo3::exceptions::PyKeyboardInterrupt::new_err("the run was cancelled")
        }),
        SessionError::Case(c) => case_error(py, &c),
        SessionError::BadInput(m) => with_message::<InputError>(py, m),
        SessionError::Output(o) => with_message::<OutputError>(py, o.to_string()),
        other => with_message::<SolverError>(py, other.to_string()),
    }
}

/// Add the exception classes to the module.
pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    let py = m.py();
    m.add("QheatError", py.get_type::<QheatError>())?;
    m.add("CaseError", py.get_type::<CaseError>())?;
    m.add("InputError", py.get_type::<InputError>())?;
    m.add("SolverError", py.get_type::<SolverError>())?;
    m.add("NotConverged", py.get_type::<NotConverged>())?;
    m.add("OutputError", py.get_type::<OutputError>())?;
    Ok(())
}
