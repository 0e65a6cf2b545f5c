//! Linear response and the two curves of a case: the thermoelectric
//! coefficients (`qheat coefficients`), power and efficiency against load
//! voltage (`qheat generator`) and cooling power and COP against current
//! (`qheat cooler`). Each returns its result in memory; its folder is
//! written only when asked, with exactly the files of the command line.
//!
//! Each of these runs many solves. Coefficients stop at the next Born
//! iteration once the observer asks; the curves stop after the solve in
//! progress (the curve code hands its events to the observer between
//! solves, and the run is unwound from there; nothing of it is kept).

use super::solve::phonon_spectrum;
use super::tables::columns;
use super::{Loaded, SessionError, folder};
use crate::leads::Side;
use crate::output::phonons::{lattice_summary, write_phonon_files};
use crate::output::results::header;
use crate::output::schema::summary::{CoefficientsSummary, CurveSummary, to_text};
use crate::output::schema::tables;
use crate::output::{OtherFiles, Staging};
use crate::progress::{
    CurvePointRecord, IterationRecord, LatticeIterationRecord, Observer, PointEvent,
};
use crate::thermo::cooler::{CoolerReport, CoolerSettings, cooler as cooler_curve};
use crate::thermo::generator::{
    CurveError, GeneratorReport, GeneratorSettings, generator as generator_curve,
};
use crate::thermo::of_case::{self, CoefficientError};
use std::fmt::Display;
use std::path::Path;

/// Most points on one curve: each is a full solve, and curves this fine
/// show nothing a coarser one does not.
pub const MAX_CURVE_POINTS: usize = 10_000;

/// How options are named in messages: as on the command line (`--hot
/// 300`) or as keyword arguments (`hot = 300`).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Spelling {
    /// Command-line options.
    Cli,
    /// Keyword arguments (Python).
    Keywords,
}

impl Spelling {
    /// The option `name` (`--name` or `name`).
    pub fn name(self, name: &str) -> String {
        match self {
            Spelling::Cli => format!("--{}", name.replace('_', "-")),
            Spelling::Keywords => name.to_string(),
        }
    }

    /// The option `name` given `value`.
    pub fn given(self, name: &str, value: impl Display) -> String {
        match self {
            Spelling::Cli => format!("{} {value}", self.name(name)),
            Spelling::Keywords => format!("{name} = {value}"),
        }
    }
}

/// Check the hot and cold lead temperatures (K) and the point count of a
/// curve before any work. `strict`: the hot lead must be strictly hotter
/// (a generator needs a temperature difference; a cooler may also pump at
/// ΔT = 0).
pub fn check_curve_options(
    hot: f64,
    cold: f64,
    points: usize,
    strict: bool,
    s: Spelling,
) -> Result<(), SessionError> {
    let bad = |m: String| Err(SessionError::BadInput(m));
    for (name, t) in [("hot", hot), ("cold", cold)] {
        if !(t.is_finite() && t > 0.0) {
            return bad(format!(
                "{}: expected a lead temperature in K > 0, found {t}",
                s.name(name)
            ));
        }
    }
    let (h, c) = (s.name("hot"), s.name("cold"));
    let sep = if s == Spelling::Cli { " " } else { ", " };
    let given = format!("{}{sep}{}", s.given("hot", hot), s.given("cold", cold));
    if strict && hot <= cold {
        let hint = if hot == cold {
            "a generator needs the hot lead hotter than the cold one"
        } else {
            "swap the two values"
        };
        return bad(format!(
            "{given}: expected {h} > {c} (the hot lead drives the generator), found {h} ≤ {c}; \
             hint: {hint}"
        ));
    }
    if !strict && hot < cold {
        return bad(format!(
            "{given}: expected {h} ≥ {c} (the cooler pumps heat from the cold lead to the hot \
             one), found {h} < {c}; hint: swap the two values"
        ));
    }
    if !(3..=MAX_CURVE_POINTS).contains(&points) {
        return bad(format!(
            "{}: expected 3 to {MAX_CURVE_POINTS} points on the curve, found {points}",
            s.name("points")
        ));
    }
    Ok(())
}

/// Linear-response coefficients of a case (what `qheat coefficients`
/// computes).
#[derive(Clone, Debug)]
pub struct CoefficientsRun {
    /// The case.
    pub loaded: Loaded,
    /// The summary, as summary.json holds it: the coefficients, how they
    /// were obtained (`response`), the energy grid the runs shared, the
    /// lattice and the channel Seebeck coefficients when the case has them.
    pub summary: CoefficientsSummary,
}

/// The linear-response coefficients of `loaded` around its reference
/// point (what `qheat coefficients` computes), reporting each Born
/// iteration of its runs to `observer`, which may also stop them.
pub fn coefficients(
    loaded: Loaded,
    threads: usize,
    observer: &mut dyn Observer,
) -> Result<CoefficientsRun, SessionError> {
    let case = &loaded.case;
    let set = of_case::case_coefficients(case, observer)
        .map_err(|e| coefficient_error(e, "", &*observer))?;
    let response = match &set.response {
        Some(m) => serde_json::to_value(m).expect("JSON of plain values"),
        None => serde_json::json!({ "method": "transmission moments" }),
    };
    let channels = of_case::case_channel_seebeck(case)
        .map_err(|e| coefficient_error(e, "channel coefficients: ", &*observer))?;
    let resolved = &loaded.resolved;
    let t = set.coefficients.temperature_k;
    let lattice = phonon_spectrum(resolved)?.map(|s| lattice_summary(resolved, s, t));
    let summary = CoefficientsSummary {
        header: header("coefficients", &case.name, &loaded.case_file),
        threads,
        coefficients: set.coefficients,
        response,
        energy_grid: set.grid,
        lattice,
        channels,
        warnings: resolved.warnings.clone(),
        notes: resolved.notes.clone(),
        resolved_case: case.to_toml_string(),
    };
    Ok(CoefficientsRun { loaded, summary })
}

/// The session error of a coefficient run (`what` prefixes a solver
/// fault); a run the observer stopped is cancelled.
fn coefficient_error(e: CoefficientError, what: &str, observer: &dyn Observer) -> SessionError {
    match e {
        CoefficientError::Case(e) => SessionError::Case(e),
        _ if observer.cancelled() => SessionError::Cancelled,
        other => SessionError::Solver(format!("{what}{other}")),
    }
}

impl CoefficientsRun {
    /// Write the result folder `qheat coefficients` writes into `dir`
    /// (staged and put in place at once).
    pub fn write(&self, dir: &Path, other_files: OtherFiles) -> Result<(), SessionError> {
        let spectrum = phonon_spectrum(&self.loaded.resolved)?;
        let stage = Staging::with_options(dir, &folder("coefficients", other_files))?;
        stage.write("summary.json", to_text(&self.summary).as_bytes())?;
        if let Some(s) = spectrum {
            write_phonon_files(&stage, s, self.summary.coefficients.temperature_k)?;
        }
        stage.commit()?;
        Ok(())
    }
}

/// What summary.json of a generator says about its conventions.
const GENERATOR_CONVENTIONS: &str = "hot lead = left (lead 1) at T_hot, cold lead = right (lead 2) at T_cold; V = V1 - V2 = -(µ1 - µ2)/e with µ1,2 = µ ∓ eV/2; I = I_1 into the device from lead 1; P = -I V delivered to the load; efficiency = P / J_Q,hot";

/// A generator curve (what `qheat generator` computes).
#[derive(Clone, Debug)]
pub struct GeneratorRun {
    /// The case.
    pub loaded: Loaded,
    /// The curve and its summary values.
    pub report: GeneratorReport,
}

/// Power and efficiency of `loaded` against load voltage with the left
/// lead at `hot_k` and the right at `cold_k` (K), `points` voltages from
/// short circuit to open circuit (what `qheat generator` computes; check
/// the options with [`check_curve_options`] first). `observer` hears of
/// each solve and may stop the curve between solves.
pub fn generator(
    loaded: Loaded,
    hot_k: f64,
    cold_k: f64,
    points: usize,
    observer: &mut dyn Observer,
) -> Result<GeneratorRun, SessionError> {
    let settings = GeneratorSettings::new(hot_k, cold_k, points);
    let report = between_solves(observer, |o| generator_curve(&loaded.case, &settings, o))?;
    Ok(GeneratorRun { loaded, report })
}

impl GeneratorRun {
    /// The summary, as summary.json holds it.
    pub fn summary(&self) -> CurveSummary<&GeneratorReport> {
        let case = &self.loaded.case;
        CurveSummary {
            result: &self.report,
            header: header("generator", &case.name, &self.loaded.case_file),
            conventions: GENERATOR_CONVENTIONS.into(),
            resolved_case: case.to_toml_string(),
        }
    }

    /// The curve, one row per load voltage (the columns of generator.csv).
    pub fn table(&self) -> Vec<(&'static str, Vec<f64>)> {
        columns(&tables::generator(), &self.report)
    }

    /// Write the result folder `qheat generator` writes into `dir`.
    pub fn write(&self, dir: &Path, other_files: OtherFiles) -> Result<(), SessionError> {
        let csv = tables::generator().csv(&self.report);
        let figures = crate::output::plots::generator_figures(&self.report)?;
        let summary = to_text(&self.summary());
        write_curve(dir, "generator", other_files, csv, &summary, figures)
    }

    /// Why the curve is flagged as not converged, or `None`; `results`
    /// names where they are (e.g. "results in DIR").
    pub fn not_converged(&self, results: &str) -> Option<String> {
        curve_flag(self.report.converged, results)
    }
}

/// A cooler curve (what `qheat cooler` computes).
#[derive(Clone, Debug)]
pub struct CoolerRun {
    /// The case.
    pub loaded: Loaded,
    /// The curve and its summary values.
    pub report: CoolerReport,
}

/// Cooling power and COP of `loaded` against bias with the `cold_lead` at
/// `cold_k` and the other at `hot_k` (K), `points` voltages, with the
/// linear-response figure of merit (what `qheat cooler` computes; check
/// the options with [`check_curve_options`] first). `observer` hears of
/// each solve and may stop the curve between solves.
pub fn cooler(
    loaded: Loaded,
    hot_k: f64,
    cold_k: f64,
    points: usize,
    cold_lead: Side,
    observer: &mut dyn Observer,
) -> Result<CoolerRun, SessionError> {
    let settings = CoolerSettings::new(hot_k, cold_k, points)
        .with_cold_lead(cold_lead)
        .with_figure_of_merit(true);
    let report = between_solves(observer, |o| cooler_curve(&loaded.case, &settings, o))?;
    Ok(CoolerRun { loaded, report })
}

impl CoolerRun {
    /// Which lead is cold and which hot, as summary.json and the terminal
    /// name them.
    pub fn lead_names(&self) -> (&'static str, &'static str) {
        match self.report.settings.cold_lead {
            Side::Left => ("left (lead 1)", "right (lead 2)"),
            Side::Right => ("right (lead 2)", "left (lead 1)"),
        }
    }

    /// The summary, as summary.json holds it.
    pub fn summary(&self) -> CurveSummary<&CoolerReport> {
        let case = &self.loaded.case;
        let (cold_name, hot_name) = self.lead_names();
        CurveSummary {
            result: &self.report,
            header: header("cooler", &case.name, &self.loaded.case_file),
            conventions: format!(
                "cold lead = {cold_name} at T_cold, hot lead = {hot_name} at T_hot; V = V1 - V2 = -(µ1 - µ2)/e with µ1,2 = µ ∓ eV/2; I = I_1 into the device from lead 1; cooling power = heat current out of the cold lead into the device; input power = I V; COP = cooling power / (I V), NaN where either is not positive"
            ),
            resolved_case: case.to_toml_string(),
        }
    }

    /// The curve, one row per bias (the columns of cooler.csv).
    pub fn table(&self) -> Vec<(&'static str, Vec<f64>)> {
        columns(&tables::cooler(), &self.report)
    }

    /// Write the result folder `qheat cooler` writes into `dir`.
    pub fn write(&self, dir: &Path, other_files: OtherFiles) -> Result<(), SessionError> {
        let csv = tables::cooler().csv(&self.report);
        let figures = crate::output::plots::cooler_figures(&self.report)?;
        let summary = to_text(&self.summary());
        write_curve(dir, "cooler", other_files, csv, &summary, figures)
    }

    /// Why the curve is flagged as not converged, or `None`; `results`
    /// names where they are (e.g. "results in DIR").
    pub fn not_converged(&self, results: &str) -> Option<String> {
        curve_flag(self.report.converged, results)
    }
}

/// The message of a curve with an unconverged solve.
fn curve_flag(converged: bool, results: &str) -> Option<String> {
    (!converged).then(|| {
        format!(
            "a Born loop (or a solve of the potential) did not converge; {results} are flagged \
             (converged = false)"
        )
    })
}

/// The folder of a curve: its table `KIND.csv`, summary.json and figures.
fn write_curve(
    dir: &Path,
    kind: &str,
    other_files: OtherFiles,
    csv: Vec<u8>,
    summary: &str,
    figures: Vec<(&'static str, String)>,
) -> Result<(), SessionError> {
    let stage = Staging::with_options(dir, &folder(kind, other_files))?;
    stage.write(&format!("{kind}.csv"), &csv)?;
    stage.write("summary.json", summary.as_bytes())?;
    for (name, svg) in figures {
        stage.write(name, svg.as_bytes())?;
    }
    stage.commit()?;
    Ok(())
}

/// The payload that unwinds a curve its observer stopped.
struct Stopped;

/// Passes every event on to the caller's observer; after a solve of the
/// curve (its record heard), when that observer asks to stop, unwinds the curve (without the
/// panic hook, so nothing is printed) up to [`between_solves`].
struct StopBetweenSolves<'a> {
    inner: &'a mut dyn Observer,
}

impl Observer for StopBetweenSolves<'_> {
    fn iteration(&mut self, record: &IterationRecord) {
        self.inner.iteration(record);
    }
    fn born_level(&mut self, factor: usize, energies: usize) {
        self.inner.born_level(factor, energies);
    }
    fn lattice_iteration(&mut self, record: &LatticeIterationRecord) {
        self.inner.lattice_iteration(record);
    }
    fn curve_solved(&mut self, stage: &'static str, voltage_v: f64) {
        self.inner.curve_solved(stage, voltage_v);
    }
    /// The last event of a solve (right after its `curve_solved`): the
    /// place to stop, once the caller has heard all of the solve.
    fn curve_point(&mut self, record: &CurvePointRecord) {
        self.inner.curve_point(record);
        if self.inner.cancelled() {
            std::panic::resume_unwind(Box::new(Stopped));
        }
    }
    fn point_finished(&mut self, event: &PointEvent) {
        self.inner.point_finished(event);
    }
    fn cancelled(&self) -> bool {
        self.inner.cancelled()
    }
}

/// Run a curve, stopping it between solves when `observer` asks; its
/// errors as session errors.
fn between_solves<T>(
    observer: &mut dyn Observer,
    curve: impl FnOnce(&mut dyn Observer) -> Result<T, CurveError>,
) -> Result<T, SessionError> {
    let mut stop = StopBetweenSolves { inner: observer };
    let outcome = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| curve(&mut stop)));
    match outcome {
        Ok(Ok(report)) => Ok(report),
        Ok(Err(_)) if observer.cancelled() => Err(SessionError::Cancelled),
        Ok(Err(CurveError::Case(e))) => Err(SessionError::Case(e)),
        Ok(Err(e @ CurveError::Settings(_))) => Err(SessionError::BadInput(e.to_string())),
        Ok(Err(e)) => Err(SessionError::Solver(e.to_string())),
        Err(payload) if payload.is::<Stopped>() => Err(SessionError::Cancelled),
        Err(payload) => std::panic::resume_unwind(payload),
    }
}
