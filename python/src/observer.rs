//! Progress and interrupts of a run that holds no GIL: at every event the
//! observer takes the GIL for a moment, lets Python handle pending signals
//! (Ctrl-C raises KeyboardInterrupt there) and calls the user's progress
//! callback. The first exception either raises is kept and stops the run
//! at the next Born iteration; the run then returns it.

use pyo3::prelude::*;
use pyo3::types::PyDict;
use qheat::progress::{IterationRecord, LatticeIterationRecord, Observer, PointEvent};

/// The observer handed to the library while the GIL is released.
pub struct PyObserver {
    callback: Option<Py<PyAny>>,
    error: Option<PyErr>,
}

impl PyObserver {
    /// An observer calling `callback` (if any) with each event as a dict.
    pub fn new(callback: Option<Py<PyAny>>) -> Self {
        Self {
            callback,
            error: None,
        }
    }

    /// The exception that stopped the run, if any.
    pub fn take_error(&mut self) -> Option<PyErr> {
        self.error.take()
    }

    /// Handle pending signals, then pass the event built by `record` to
    /// the callback; keep the first exception.
    fn event<F>(&mut self, record: F)
    where
        F: for<'py> FnOnce(&Bound<'py, PyDict>) -> PyResult<()>,
    {
        if self.error.is_some() {
            return;
        }
        let outcome = Python::attach(|py| -> PyResult<()> {
            py.check_signals()?;
            if let Some(cb) = &self.callback {
                let d = PyDict::new(py);
                record(&d)?;
                cb.call1(py, (d,))?;
            }
            Ok(())
        });
        if let Err(e) = outcome {
            self.error = Some(e);
        }
    }
}

impl Observer for PyObserver {
    fn iteration(&mut self, r: &IterationRecord) {
        let r = r.clone();
        self.event(move |d| {
            d.set_item("event", "born iteration")?;
            d.set_item("iteration", r.iteration)?;
            d.set_item("residual", r.residual)?;
            d.set_item("current_left_a", r.current_left_a)?;
            d.set_item("current_right_a", r.current_right_a)?;
            d.set_item("current_change", r.current_change)?;
            d.set_item("step", r.step)
        });
    }

    fn lattice_iteration(&mut self, r: &LatticeIterationRecord) {
        let r = r.clone();
        self.event(move |d| {
            d.set_item("event", "lattice iteration")?;
            d.set_item("iteration", r.iteration)?;
            d.set_item("temperature_change_k", r.temperature_change_k)?;
            d.set_item("born_iterations", r.born_iterations)?;
            d.set_item("born_converged", r.born_converged)?;
            d.set_item("lattice_power_w", r.lattice_power_w)
        });
    }

    fn curve_solved(&mut self, stage: &'static str, voltage_v: f64) {
        self.event(move |d| {
            d.set_item("event", "curve solve")?;
            d.set_item("stage", stage)?;
            d.set_item("voltage_v", voltage_v)
        });
    }

    fn point_finished(&mut self, e: &PointEvent) {
        let e = *e;
        self.event(move |d| {
            d.set_item("event", "point finished")?;
            d.set_item("index", e.index)?;
            d.set_item("finished", e.finished)?;
            d.set_item("total", e.total)?;
            d.set_item("computed", e.computed)?;
            d.set_item("converged", e.converged)
        });
    }

    fn cancelled(&self) -> bool {
        self.error.is_some()
    }
}
