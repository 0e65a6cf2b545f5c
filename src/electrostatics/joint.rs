//! The joint outer scheme: one Anderson vector over Σ0 and the potential.
//!
//! Each step is one Born pass at the current potential U with the current
//! Σ0 = x, giving the image F(x) of the Born map, and one Poisson–Newton
//! solve on the predicted density of that pass, giving N(U). The pair
//! (x, U) is a fixed point of (F, N) exactly when the nested loop has
//! converged: Σ0 is self-consistent at U and the Newton update vanishes.
//! Both residuals F(x) − x and N(U) − U go into one Anderson mixer, so the
//! history learns how the two move each other, and no pass is spent
//! converging Σ0 at a potential that is still wrong.
//!
//! Scaling: the Anderson least-squares problem needs one norm over both
//! parts. Σ0 is measured relative to the norm of the first image F(x),
//! the measure of the Born loop's own residual; U is measured in units of
//! k_B T per cell (root mean square over the cells). A potential error δU
//! moves the occupation of the states, and so Σ0, by a relative amount of
//! order δU/k_B T, so an error of the same size in either part weighs the
//! same; the potential part is then weighted up by `POTENTIAL_WEIGHT`
//! (measured). Each part keeps its own mixing factor: the Born loop's damping
//! for Σ0, the outer mixing factor for U.
//!
//! Σ0 enters the vector as its imaginary part and Σ^in_0, and its real
//! part when something puts one there (the Hermitian part of the phonon
//! self-energy, dephasing, coupling matrices); in red-black order with
//! phonons that two-colour the grid only the red energies are mixed, since
//! the black ones are rebuilt from them before they are used (as the Born
//! loop's own mixer does).

use super::mixing::PotentialMixer;
use super::poisson::Poisson;
use super::{
    CellDensity, Coupling, Electrostatics, OuterRecord, SelfConsistent, pin_fixed_ends,
    with_potential,
};
use crate::C64;
use crate::model::Problem;
use crate::progress::IterationRecord;
use crate::scattering::{HilbertTransform, ScatteringSelfEnergy};
use crate::scba::{self, LeadTable, Mixing, Observer, ScbaParams, Solution, SolveError};

/// Which numbers of Σ0 the joint vector holds.
struct SigmaLayout {
    /// Energy rows mixed.
    rows: Vec<usize>,
    /// Values per energy.
    ns: usize,
    /// Re Σ^r_0 mixed too.
    real: bool,
}

impl SigmaLayout {
    fn new(problem: &Problem, params: &ScbaParams, ns: usize) -> Self {
        let scat = &problem.scattering;
        let hermitian = scat.hermitian_part && !scat.phonons.is_empty();
        let ne = problem.grid.count;
        let red = scba::red_rows_only(problem, params.energy_order);
        Self {
            rows: (0..ne)
                .filter(|k| red.is_none_or(|w| (k / w).is_multiple_of(2)))
                .collect(),
            ns,
            real: hermitian || scat.has_dephasing() || scat.uses_blocks(),
        }
    }

    /// Append the mixed numbers of `s`, times `scale`, to `out`.
    fn pack(&self, s: &ScatteringSelfEnergy, scale: f64, out: &mut Vec<f64>) {
        for &k in &self.rows {
            let at = k * self.ns..(k + 1) * self.ns;
            out.extend(s.retarded[at.clone()].iter().map(|z| z.im * scale));
            out.extend(s.inscatter[at.clone()].iter().map(|v| v * scale));
            if self.real {
                out.extend(s.retarded[at].iter().map(|z| z.re * scale));
            }
        }
    }

    /// Numbers in the vector.
    fn len(&self) -> usize {
        self.rows.len() * self.ns * if self.real { 3 } else { 2 }
    }

    /// Write the numbers `v` (divided by `scale`) back into `x`; Re Σ^r_0,
    /// when not mixed, is taken from `image`.
    fn unpack(
        &self,
        v: &[f64],
        scale: f64,
        image: &ScatteringSelfEnergy,
        x: &mut ScatteringSelfEnergy,
    ) {
        let ns = self.ns;
        let per = if self.real { 3 * ns } else { 2 * ns };
        for (j, &k) in self.rows.iter().enumerate() {
            let row = &v[j * per..(j + 1) * per];
            for s in 0..ns {
                let i = k * ns + s;
                let re = if self.real {
                    row[2 * ns + s] / scale
                } else {
                    image.retarded[i].re
                };
                x.retarded[i] = C64::new(re, row[s] / scale);
                x.inscatter[i] = row[ns + s] / scale;
            }
        }
    }
}

/// Hands the Born pass of each step on, numbered by the step.
struct Steps<'a> {
    inner: &'a mut dyn Observer,
    step: usize,
}

impl Observer for Steps<'_> {
    fn iteration(&mut self, record: &IterationRecord) {
        let mut r = record.clone();
        r.iteration = self.step;
        r.step = "joint";
        self.inner.iteration(&r);
    }

    fn cancelled(&self) -> bool {
        self.inner.cancelled()
    }
}

/// The image F(Σ0) of the Born map, rebuilt from the pass of `sol`.
fn image(sol: &Solution, hilbert: Option<&HilbertTransform>) -> ScatteringSelfEnergy {
    let p = &sol.problem;
    let (ne, scat) = (p.grid.count, &p.scattering);
    let lattice = sol.lattice_temperature_k.as_deref();
    let mut out = ScatteringSelfEnergy::zeros_for(scat, ne, p.device.cells(), p.device.orbitals);
    match &sol.pass.blocks {
        Some(b) => scat.self_energy_blocks_into(b, ne, hilbert, lattice, &mut out),
        None => scat.self_energy_at_into(&sol.pass.green, ne, hilbert, lattice, &mut out),
    }
    out
}

/// Weight of the potential part against Σ0 (see the module text): an
/// error δU counts as POTENTIAL_WEIGHT·δU/k_B T. 1 is the plain estimate;
/// 10 took the fewest steps on the 400-cell bench device (of 0.1, 1, 10).
const POTENTIAL_WEIGHT: f64 = 10.0;

/// The Born record of step `step` (its current change measured against
/// `previous`, which it updates) and whether it meets the Born tolerances.
fn born_record(
    sol: &Solution,
    params: &ScbaParams,
    step: usize,
    previous: &mut Option<(f64, f64)>,
) -> Result<(IterationRecord, bool), SolveError> {
    let Some(mut record) = sol.report.history.last().cloned() else {
        return Err(SolveError::Invalid(
            "the joint loop needs a Born pass".into(),
        ));
    };
    let currents = (record.current_left_a, record.current_right_a);
    record.iteration = step;
    // The same test as the Born loop's, floor tied to the lead flows.
    let floor = scba::current_floor(params, &sol.problem, &sol.pass.flows);
    record.current_change = scba::current_change(params, currents, *previous, floor);
    *previous = Some(currents);
    let ok = record.residual <= params.tolerance && record.current_change <= 1.0;
    Ok((record, ok))
}

/// The mixing state of the joint loop.
struct JointState {
    layout: SigmaLayout,
    mixer: PotentialMixer,
    /// 1/‖F(Σ0)‖ of the first step (Σ0 part of the vector).
    sigma_scale: Option<f64>,
    /// 1/(k_B T √N) (potential part).
    u_scale: f64,
}

impl JointState {
    fn new(
        problem: &Problem,
        es: &Electrostatics,
        params: &ScbaParams,
        kt: f64,
        ns: usize,
    ) -> Self {
        let layout = SigmaLayout::new(problem, params, ns);
        let beta_sigma = match params.mixing {
            Mixing::Linear { factor } => factor,
            Mixing::Anderson { damping, .. } => damping,
        };
        let mixer =
            PotentialMixer::split(es.mixing_depth, beta_sigma, es.mixing_factor, layout.len());
        let cells = problem.device.cells().max(1) as f64;
        Self {
            layout,
            mixer,
            sigma_scale: None,
            u_scale: POTENTIAL_WEIGHT / (kt * cells.sqrt()),
        }
    }

    /// The next (Σ0, U) from the pair used, `x` and `u`, and their images
    /// `fx` and `nu`; `x` and `u` are overwritten.
    fn next(
        &mut self,
        x: &mut ScatteringSelfEnergy,
        fx: &ScatteringSelfEnergy,
        u: &mut [f64],
        nu: &[f64],
    ) {
        let lay = &self.layout;
        let s = *self.sigma_scale.get_or_insert_with(|| {
            let mut v = Vec::with_capacity(lay.len());
            lay.pack(fx, 1.0, &mut v);
            let norm = v.iter().map(|a| a * a).sum::<f64>().sqrt();
            if norm > 0.0 && norm.is_finite() {
                1.0 / norm
            } else {
                1.0
            }
        });
        let mut z = Vec::with_capacity(lay.len() + u.len());
        lay.pack(x, s, &mut z);
        let mut r = Vec::with_capacity(z.capacity());
        lay.pack(fx, s, &mut r);
        for (ri, zi) in r.iter_mut().zip(&z) {
            *ri -= zi;
        }
        z.extend(u.iter().map(|a| a * self.u_scale));
        r.extend(nu.iter().zip(u.iter()).map(|(a, b)| (a - b) * self.u_scale));
        let next = self.mixer.next(&z, &r);
        let cut = lay.len();
        lay.unpack(&next[..cut], s, fx, x);
        for (ui, v) in u.iter_mut().zip(&next[cut..]) {
            *ui = v / self.u_scale;
        }
    }
}

/// The joint loop (see the module text). `start` holds the first potential
/// (its fixed ends already in place) and the discrete Poisson problem,
/// `sigma` an optional first Σ0; the device scatters and has no floating
/// contacts.
pub(super) fn solve_joint(
    problem: &Problem,
    es: &Electrostatics,
    params: &ScbaParams,
    lattice_temperature_k: Option<&[f64]>,
    start: (Vec<f64>, Poisson),
    sigma: Option<&ScatteringSelfEnergy>,
    observer: &mut dyn Observer,
) -> Result<SelfConsistent, SolveError> {
    let (mut u, poisson) = start;
    let temperature = 0.5 * (problem.left.temperature_k + problem.right.temperature_k);
    let kt = crate::units::thermal_energy_ev(temperature);
    let (ne, dev) = (problem.grid.count, &problem.device);
    let mut x = match sigma {
        Some(s) => s.clone(),
        None => ScatteringSelfEnergy::zeros_for(&problem.scattering, ne, dev.cells(), dev.orbitals),
    };
    let scat = &problem.scattering;
    let hilbert =
        (scat.hermitian_part && !scat.phonons.is_empty()).then(|| HilbertTransform::new(ne));
    let mut state = JointState::new(problem, es, params, kt, x.sites);
    let one = params.with_max_iterations(1);
    let (mut history, mut born) = (Vec::new(), Vec::new());
    let mut previous = None;
    let mut levels: Option<Vec<f64>> = None;
    let last = es.max_iterations.max(1);
    for step in 1..=last {
        let p = with_potential(problem, &u);
        let leads = LeadTable::new(&p)?;
        let mut steps = Steps {
            inner: &mut *observer,
            step,
        };
        let mut sol = scba::solve_in_lattice(
            &p,
            &leads,
            lattice_temperature_k,
            &one,
            Some(&x),
            &mut steps,
        )?;
        let (mut record, born_ok) = born_record(&sol, params, step, &mut previous)?;
        let density = CellDensity::near(&sol, temperature, levels.as_deref());
        let outer = super::OuterStep::new(&poisson, &u, &density, es.tolerance_ev);
        history.push(OuterRecord {
            iteration: step,
            potential_change_ev: outer.change,
            poisson_residual: outer.poisson_residual,
            born_iterations: 1,
            born_converged: born_ok,
            newton_iterations: outer.newton.iterations,
        });
        let done = born_ok && outer.change <= es.tolerance_ev && outer.newton.converged;
        record.step = if done || step == last {
            "final"
        } else {
            "joint"
        };
        born.push(record);
        if done || step == last {
            sol.report.converged = born_ok;
            sol.report.iterations = step;
            sol.report.params = *params;
            sol.report.history = born;
            let end = super::Ending {
                history,
                born_passes: step,
                coupling: Coupling::Joint,
                converged: done,
            };
            return Ok(super::finish(sol, u, density, &outer, end, es));
        }
        levels = Some(density.fermi_level_ev);
        let fx = image(&sol, hilbert.as_ref());
        x = sol.sigma;
        state.next(&mut x, &fx, &mut u, &outer.newton.potential);
        pin_fixed_ends(&mut u, &poisson);
    }
    unreachable!("the loop returns on its last step")
}
