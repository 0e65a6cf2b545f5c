//! Coefficients of a case file: the coherent moments when nothing scatters,
//! finite differences through converged Born solutions otherwise. The four
//! finite-difference runs share one energy grid, the envelope of the grids
//! the case would give each of them (see [`super::common_grid`]).

use super::Coefficients;
use super::common_grid::CommonGrid;
use super::response::{
    Around, OperatingPoint, ResponseMatrix, difference_points, linear_response_with,
    operating_point,
};
use crate::case::{Case, CaseError, CaseKey, ResponseSplit};
use crate::leads::Side;
use crate::scba::{Observer, SolveError};

/// Why coefficients could not be computed.
#[derive(Debug, thiserror::Error)]
pub enum CoefficientError {
    /// The case could not be set to an operating point.
    #[error(transparent)]
    Case(#[from] CaseError),
    /// A solve failed.
    #[error(transparent)]
    Solve(#[from] SolveError),
    /// The lattice's phonon spectrum (for κ_ph) could not be computed.
    #[error("κ_ph from the case's [lattice]: {0}")]
    Lattice(#[from] crate::lattice::LatticeError),
    /// A finite-difference run failed or did not converge.
    #[error("{0}")]
    Response(String),
}

/// The case at an operating point: the zero-bias Fermi levels and the bias
/// chosen so that the biased levels are µ1 and µ2 (so a linear bias drop
/// follows the voltage), lead and bath temperatures set explicitly.
pub fn case_at(case: &Case, op: &OperatingPoint) -> Result<Case, CaseError> {
    let v = op.voltage_v;
    let mut c = case.with(CaseKey::BiasVoltage, v)?;
    c = c.with(
        CaseKey::LeadFermiLevel(Side::Left),
        op.fermi_level_left_ev + 0.5 * v,
    )?;
    c = c.with(
        CaseKey::LeadFermiLevel(Side::Right),
        op.fermi_level_right_ev - 0.5 * v,
    )?;
    c = c.with(CaseKey::LeadTemperature(Side::Left), op.temperature_left_k)?;
    c = c.with(
        CaseKey::LeadTemperature(Side::Right),
        op.temperature_right_k,
    )?;
    let phonons = c.resolve()?.problem.scattering.phonons.len();
    for i in 0..phonons {
        c = c.with(CaseKey::PhononBathTemperature(i), op.bath_temperature_k)?;
    }
    Ok(c)
}

/// The reference point (µ, T) of a case: the mean zero-bias Fermi level and
/// the mean lead temperature.
pub fn reference_point(case: &Case) -> Result<(f64, f64), CaseError> {
    let r = case.resolve()?;
    let (mu_l, mu_r) = r.zero_bias_fermi_levels_ev;
    let p = &r.problem;
    Ok((
        0.5 * (mu_l + mu_r),
        0.5 * (p.left.temperature_k + p.right.temperature_k),
    ))
}

/// Coefficients of a case and how they were obtained.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct CaseCoefficients {
    /// The coefficients.
    pub coefficients: Coefficients,
    /// The response matrix, when it was obtained by finite differences.
    pub response: Option<ResponseMatrix>,
    /// The energy grid every run shared (one run for a coherent device).
    pub grid: CommonGrid,
}

/// Linear-response coefficients of a case around its reference point; the
/// response matrix too when it was obtained by finite differences, and the
/// energy grid the runs shared.
pub fn case_coefficients(
    case: &Case,
    observer: &mut dyn Observer,
) -> Result<CaseCoefficients, CoefficientError> {
    let resolved = case.resolve()?;
    let (mu, t) = reference_point(case)?;
    // κ_ph at the reference temperature: given, from the lattice, or 0.
    let kph = resolved.phonon_conductance_at(t)?;
    let source = resolved.phonon_conductance_source();
    // Landauer formulas hold for two terminals only: attached contacts take
    // the finite-difference route. So does a device whose potential is
    // solved with its charge: every run solves its own potential.
    let es = resolved.electrostatics.as_ref();
    if resolved.problem.scattering.is_coherent()
        && resolved.problem.contacts.is_empty()
        && es.is_none()
    {
        let eq = case_at(
            case,
            &operating_point(mu, t, 0.0, 0.0, ResponseSplit::Symmetric),
        )?;
        let grid = CommonGrid::choose(std::slice::from_ref(&eq))?;
        let c = super::coherent_coefficients(&eq.resolve()?.problem, kph)?;
        return Ok(CaseCoefficients {
            coefficients: c.with_phonon_source(source),
            response: None,
            grid,
        });
    }
    let split = resolved.response_split;
    let runs = difference_points(mu, t, split)
        .iter()
        .map(|op| case_at(case, op))
        .collect::<Result<Vec<_>, _>>()?;
    let grid = CommonGrid::choose(&runs)?;
    // The grid goes into each run's case after its temperatures are set:
    // the case as written may have a colder lead than any run, and its
    // own validation would refuse the common step.
    let build = |op: &OperatingPoint| -> Result<crate::model::Problem, String> {
        case_at(case, op)
            .and_then(|c| grid.apply(&c))
            .and_then(|c| c.resolve())
            .map(|r| r.problem)
            .map_err(|e| e.to_string())
    };
    let at = Around {
        mu_ev: mu,
        temperature_k: t,
        split,
    };
    let (c, m, _) = linear_response_with(&build, es, at, &resolved.scba, kph, observer)
        .map_err(|e| CoefficientError::Response(e.to_string()))?;
    if !m.converged {
        let outer = match &m.electrostatics {
            Some(e) => format!(
                ", outer iterations of the potential {:?} (unperturbed point first)",
                e.outer_iterations
            ),
            None => String::new(),
        };
        return Err(CoefficientError::Response(format!(
            "a linear-response run did not converge (Born iterations {:?}{outer}); coefficients not trustworthy",
            m.iterations
        )));
    }
    Ok(CaseCoefficients {
        coefficients: c.with_phonon_source(source),
        response: Some(m),
        grid,
    })
}

/// Seebeck coefficient of each channel of a case around its reference
/// point (see [`super::channels`]); `None` when the case names no channels.
pub fn case_channel_seebeck(
    case: &Case,
) -> Result<Option<super::channels::ChannelSeebeck>, CoefficientError> {
    let resolved = case.resolve()?;
    let Some(channels) = &resolved.channels else {
        return Ok(None);
    };
    let (mu, t) = reference_point(case)?;
    let eq = case_at(
        case,
        &operating_point(mu, t, 0.0, 0.0, ResponseSplit::Symmetric),
    )?;
    let r = eq.resolve()?;
    // With electrostatics the channels see the potential the charge puts
    // there at equilibrium, solved here, not the imposed one.
    let problem = match &r.electrostatics {
        // (A scattering device gets no channel coefficients: no solve.)
        Some(es) if r.problem.scattering.is_coherent() => {
            let start = super::point::PointStart::default();
            let point = super::point::solve_point(
                &r.problem,
                Some(es),
                &r.scba,
                start,
                &mut crate::progress::Silent,
            )?;
            if !point.converged() {
                return Err(CoefficientError::Response(
                    "the equilibrium potential for the channel coefficients did not converge"
                        .into(),
                ));
            }
            point.solution.problem
        }
        _ => r.problem,
    };
    Ok(Some(super::channels::channel_seebeck(&problem, channels)?))
}
