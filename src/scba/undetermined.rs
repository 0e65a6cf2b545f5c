//! Orbital sites whose occupation the Born loop cannot determine.
//!
//! Elastic dephasing moves electrons between states of the same energy and
//! conserves their number at that energy. Group the orbital sites of the
//! device into connected parts: two sites belong together when the
//! Hamiltonian couples them (on-site or cell-to-cell blocks), when a
//! coupling matrix of the scattering joins them, or when a lead's
//! self-energy does. A part that carries no lead broadening at energy E and
//! is reached by dephasing alone (no phonon on any of its sites links E to
//! other energies) exchanges electrons with nothing at E: any filling of
//! its states is a fixed point of the Born equations, so its occupation is
//! undetermined and the iteration has nothing that pulls it to one answer.
//!
//! # When the loop is stopped
//!
//! Before the loop the parts and their lead weight per energy are found
//! once. A part counts as cut off at E when its lead broadening L (the
//! diagonal of Γ_1 + Γ_2 summed over its sites in the end cells) is at most
//! the solver tolerance times L + S, with S = Σ 2√d over its sites, d the
//! dephasing strength on the site (eV²): 2√d is the broadening elastic
//! dephasing gives a state at full weight. Per Born pass an electron in the
//! part leaves to the leads with a probability of about L/(L + Γ0), Γ0 ≤ S
//! its dephasing broadening, and the occupation error shrinks by that
//! fraction per pass; below the tolerance the stopping test can no longer
//! tell a settled filling from one that drifts, so the filling there is
//! not determined by the loop at any useful tolerance.
//!
//! Being cut off alone does not stop anything: a part that stays quiet (no
//! states at those energies, or a filling that never moves from where it
//! started) lets the loop converge as before. The loop is stopped only when
//! the cut-off parts hold the wandering: for [`WINDOW`] iterations in a row
//! at least [`SHARE`] of the squared change of Σ0 lay on their sites and
//! energies, and that change did not shrink tenfold over the window (a
//! slowly settling part is left alone). A nearly isolated part whose lead
//! weight lies above the threshold is never stopped; it converges or runs
//! to the iteration limit as any other case.

use super::SolveError;
use crate::model::Problem;
use crate::scattering::ScatteringSelfEnergy;
use std::collections::VecDeque;

use super::LeadTable;

/// Iterations in a row the cut-off parts must hold the change of Σ0.
pub const WINDOW: usize = 8;
/// Least fraction of the squared change of Σ0 on the cut-off parts.
pub const SHARE: f64 = 0.9;

/// One connected part of the orbital sites that is cut off from the leads
/// at some energies, as reported when the loop is stopped.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct IsolatedPart {
    /// First and last cell (0-based) holding a site of the part.
    pub cells: (usize, usize),
    /// The orbitals (0-based, within a cell) of its sites.
    pub orbitals: Vec<usize>,
    /// Orbital sites in the part.
    pub sites: usize,
    /// Energy ranges (eV, first and last grid energy of each run) where
    /// the part is cut off from the leads and its Σ0 kept changing.
    pub energy_ranges_ev: Vec<(f64, f64)>,
    /// Largest ratio L/(L + S) of lead broadening to dephasing scale over
    /// those energies (0 when no lead reaches the part at all).
    pub lead_weight_ratio: f64,
}

/// Why the Born loop was stopped: the occupation of some orbital sites is
/// undetermined (see the module docs).
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct UndeterminedOccupation {
    /// Born iteration (1-based) at which the loop was stopped.
    pub iteration: usize,
    /// Relative change of Σ0 in that iteration.
    pub residual: f64,
    /// Fraction of the squared change of Σ0 on the cut-off parts.
    pub share: f64,
    /// The parts that kept changing.
    pub parts: Vec<IsolatedPart>,
}

impl UndeterminedOccupation {
    /// The lowest energy and first cell named, for the fault location.
    pub fn location(&self) -> Option<(f64, Option<usize>)> {
        self.parts
            .iter()
            .filter_map(|p| p.energy_ranges_ev.first().map(|r| (r.0, p.cells.0)))
            .min_by(|a, b| a.0.total_cmp(&b.0))
            .map(|(e, c)| (e, Some(c)))
    }
}

impl std::fmt::Display for UndeterminedOccupation {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "the Born loop was stopped at iteration {}: the occupation of part of the device \
             is undetermined (residual {:e}, {:.0}% of the change of Σ0 on the parts below). ",
            self.iteration,
            self.residual,
            100.0 * self.share
        )?;
        for p in &self.parts {
            let orbitals: Vec<String> = p.orbitals.iter().map(usize::to_string).collect();
            let ranges: Vec<String> = p
                .energy_ranges_ev
                .iter()
                .map(|(a, b)| format!("{a:.4}–{b:.4} eV"))
                .collect();
            write!(
                f,
                "Orbital(s) {} of cells {}–{} ({} sites, indices from 0) have no path to a lead \
                 at {} (lead broadening at most {:.1e} of their dephasing scale) and only elastic \
                 dephasing reaches them there, so every filling of those states is a fixed point. ",
                orbitals.join(", "),
                p.cells.0,
                p.cells.1,
                p.sites,
                ranges.join(", "),
                p.lead_weight_ratio
            )?;
        }
        write!(
            f,
            "Hint: narrow the energy grid to where the leads have states on those orbitals, \
             couple those orbitals to the others (a Hamiltonian term or a coupling matrix of the \
             scattering), add a phonon acting on them, or give the leads states there"
        )
    }
}

/// A connected part that is cut off at some energy: its sites and, per
/// energy, whether it is cut off there.
struct Part {
    sites: Vec<usize>,
    cut_off: Vec<bool>,
    ratio: Vec<f64>,
}

/// The watch the Born loop keeps over the cut-off parts.
pub(super) struct Isolation {
    /// Index into `parts` per orbital site, `usize::MAX` when none.
    part_of: Vec<usize>,
    parts: Vec<Part>,
    tolerance: f64,
    /// (share, change on the parts) of the last iterations, newest last.
    recent: VecDeque<(f64, f64)>,
}

/// Union-find root with path halving.
fn root(parent: &mut [usize], mut i: usize) -> usize {
    while parent[i] != i {
        parent[i] = parent[parent[i]];
        i = parent[i];
    }
    i
}

fn join(parent: &mut [usize], a: usize, b: usize) {
    let (ra, rb) = (root(parent, a), root(parent, b));
    if ra != rb {
        parent[ra.max(rb)] = ra.min(rb);
    }
}

/// Joins the sites coupled by a nonzero entry of the Hamiltonian, of a
/// coupling matrix of the scattering, of a lead self-energy or of an
/// attached contact's broadening.
fn connect(problem: &Problem, leads: &LeadTable, parent: &mut [usize]) {
    let dev = &problem.device;
    let (n, b) = (dev.cells(), dev.orbitals);
    let nz = |z: crate::C64| z.re != 0.0 || z.im != 0.0;
    for i in 0..n {
        let mut blocks: Vec<&faer::Mat<crate::C64>> = vec![&dev.onsite[i]];
        let scat = &problem.scattering;
        blocks.extend(scat.dephasing_matrices.cell(i));
        blocks.extend(
            scat.phonons
                .iter()
                .flat_map(|m| m.coupling_matrices.cell(i)),
        );
        for m in blocks {
            for r in 0..b {
                for c in 0..b {
                    if r != c && nz(m[(r, c)]) {
                        join(parent, i * b + r, i * b + c);
                    }
                }
            }
        }
        if let Some(t) = dev.coupling.get(i).filter(|_| i + 1 < n) {
            for r in 0..b {
                for c in 0..b {
                    if nz(t[(r, c)]) {
                        join(parent, i * b + r, (i + 1) * b + c);
                    }
                }
            }
        }
    }
    // A contact attached along the channel couples the spin orbitals of its
    // cells when it is polarised off the quantisation axis.
    for c in &problem.contacts {
        let g = super::contacts::gamma_block(c, b);
        for &cell in &c.cells {
            for r in 0..b {
                for col in 0..b {
                    if r != col && nz(g[r * b + col]) {
                        join(parent, cell * b + r, cell * b + col);
                    }
                }
            }
        }
    }
    for (table, cell) in [(&leads.left, 0), (&leads.right, n - 1)] {
        for s in table {
            for r in 0..b {
                for c in 0..b {
                    if r != c && nz(s[(r, c)]) {
                        join(parent, cell * b + r, cell * b + c);
                    }
                }
            }
        }
    }
}

/// Per orbital site: the dephasing strength d (eV², per-site value plus
/// the diagonal of Σ M² of the matrix sources) and whether a phonon acts.
fn site_strengths(problem: &Problem) -> (Vec<f64>, Vec<bool>) {
    let (n, b) = (problem.device.cells(), problem.device.orbitals);
    let scat = &problem.scattering;
    let mut d = vec![0.0; n * b];
    let mut phonon = vec![false; n * b];
    for (s, v) in scat.dephasing_ev2.iter().enumerate().take(n * b) {
        d[s] += v;
    }
    let row_weight =
        |m: &faer::Mat<crate::C64>, o: usize| -> f64 { (0..b).map(|l| m[(o, l)].norm_sqr()).sum() };
    for i in 0..n {
        for o in 0..b {
            let s = i * b + o;
            d[s] += scat
                .dephasing_matrices
                .cell(i)
                .iter()
                .map(|m| row_weight(m, o))
                .sum::<f64>();
            phonon[s] = scat.phonons.iter().any(|m| {
                m.coupling_ev2.get(s).is_some_and(|&v| v != 0.0)
                    || m.coupling_matrices
                        .cell(i)
                        .iter()
                        .any(|x| row_weight(x, o) > 0.0)
            });
        }
    }
    (d, phonon)
}

impl Isolation {
    /// The parts cut off at some grid energy, or `None` when there are none
    /// (then the loop runs as it always did).
    pub fn new(problem: &Problem, leads: &LeadTable, tolerance: f64) -> Option<Self> {
        if !problem.scattering.has_dephasing() {
            return None;
        }
        let (n, b) = (problem.device.cells(), problem.device.orbitals);
        let ns = n * b;
        let mut parent: Vec<usize> = (0..ns).collect();
        connect(problem, leads, &mut parent);
        let (d, phonon) = site_strengths(problem);
        let mut groups: std::collections::BTreeMap<usize, Vec<usize>> = Default::default();
        for s in 0..ns {
            groups.entry(root(&mut parent, s)).or_default().push(s);
        }
        let mut part_of = vec![usize::MAX; ns];
        let mut parts = Vec::new();
        for sites in groups.into_values() {
            if sites.iter().any(|&s| phonon[s]) {
                continue;
            }
            let scale: f64 = sites.iter().map(|&s| 2.0 * d[s].max(0.0).sqrt()).sum();
            if scale <= 0.0 {
                continue;
            }
            let ratio = lead_ratios(problem, leads, &sites, scale);
            let cut_off: Vec<bool> = ratio.iter().map(|&r| r <= tolerance).collect();
            if cut_off.iter().any(|&c| c) {
                for &s in &sites {
                    part_of[s] = parts.len();
                }
                parts.push(Part {
                    sites,
                    cut_off,
                    ratio,
                });
            }
        }
        (!parts.is_empty()).then(|| Self {
            part_of,
            parts,
            tolerance,
            recent: VecDeque::new(),
        })
    }
}

/// L/(L + S) per grid energy for the part of `sites`: L its lead
/// broadening (leads and attached contacts), S its dephasing scale.
fn lead_ratios(problem: &Problem, leads: &LeadTable, sites: &[usize], scale: f64) -> Vec<f64> {
    let (n, b) = (problem.device.cells(), problem.device.orbitals);
    (0..problem.grid.count)
        .map(|k| {
            let mut lead = 0.0;
            for &s in sites {
                let (cell, o) = (s / b, s % b);
                // Contacts attached along the channel broaden like leads.
                for c in problem.contacts.iter().filter(|c| c.cells.contains(&cell)) {
                    lead += super::contacts::gamma_block(c, b)[o * b + o].re.max(0.0);
                }
                if cell == 0 {
                    lead += (-2.0 * leads.left[k][(o, o)].im).max(0.0);
                }
                if cell == n - 1 {
                    lead += (-2.0 * leads.right[k][(o, o)].im).max(0.0);
                }
            }
            lead / (lead + scale)
        })
        .collect()
}

impl Isolation {
    /// Looks at one Born iteration (input `x`, image `fx`): fails with the
    /// diagnosis when the cut-off parts have held the wandering of Σ0 for
    /// [`WINDOW`] iterations (see the module docs).
    pub fn observe(
        &mut self,
        problem: &Problem,
        x: &ScatteringSelfEnergy,
        fx: &ScatteringSelfEnergy,
        iteration: usize,
        residual: f64,
    ) -> Result<(), SolveError> {
        let (per_part, total) = self.changes(problem, x, fx);
        let on_parts: f64 = per_part.iter().sum();
        let share = if total > 0.0 { on_parts / total } else { 0.0 };
        self.recent.push_back((share, on_parts));
        if self.recent.len() > WINDOW {
            self.recent.pop_front();
        }
        let held = self.recent.len() == WINDOW
            && self.recent.iter().all(|&(s, _)| s >= SHARE)
            && on_parts >= 0.01 * self.recent[0].1
            && residual > self.tolerance;
        if !held {
            return Ok(());
        }
        Err(SolveError::Undetermined(Box::new(UndeterminedOccupation {
            iteration,
            residual,
            share,
            parts: self.report(problem, &per_part),
        })))
    }

    /// Squared change of Σ0 (Σ^in, Σ^out, Re Σ^r) per (part, energy), index
    /// p·E + k, and over everything.
    fn changes(
        &self,
        problem: &Problem,
        x: &ScatteringSelfEnergy,
        fx: &ScatteringSelfEnergy,
    ) -> (Vec<f64>, f64) {
        let ne = problem.grid.count;
        let b = problem.device.orbitals;
        let per = x.sites.max(1);
        let mut per_part = vec![0.0; self.parts.len() * ne];
        let mut total = 0.0;
        for idx in 0..x.inscatter.len().min(fx.inscatter.len()) {
            let di = fx.inscatter[idx] - x.inscatter[idx];
            let dout = fx.outscatter(idx) - x.outscatter(idx);
            let dre = fx.retarded[idx].re - x.retarded[idx].re;
            let c = di * di + dout * dout + dre * dre;
            total += c;
            let (k, j) = (idx / per, idx % per);
            let site = match x.blocks {
                None => j,
                Some(bb) => (j / (bb * bb)) * b + (j % (bb * bb)) / bb,
            };
            let p = self.part_of[site];
            if p != usize::MAX && self.parts[p].cut_off[k] {
                per_part[p * ne + k] += c;
            }
        }
        (per_part, total)
    }

    /// The parts whose Σ0 kept changing, with the energy runs where it did
    /// (at least 1e-3 of the largest change of any part and energy).
    fn report(&self, problem: &Problem, per_part: &[f64]) -> Vec<IsolatedPart> {
        let ne = problem.grid.count;
        let b = problem.device.orbitals;
        let largest = per_part.iter().copied().fold(0.0, f64::max);
        let mut out = Vec::new();
        for (p, part) in self.parts.iter().enumerate() {
            let moving: Vec<usize> = (0..ne)
                .filter(|&k| per_part[p * ne + k] > 1e-3 * largest && largest > 0.0)
                .collect();
            if moving.is_empty() {
                continue;
            }
            let mut ranges: Vec<(f64, f64)> = Vec::new();
            let mut start = moving[0];
            for w in moving.windows(2) {
                if w[1] != w[0] + 1 {
                    ranges.push((problem.grid.energy(start), problem.grid.energy(w[0])));
                    start = w[1];
                }
            }
            let last = *moving.last().unwrap_or(&start);
            ranges.push((problem.grid.energy(start), problem.grid.energy(last)));
            let mut orbitals: Vec<usize> = part.sites.iter().map(|s| s % b).collect();
            orbitals.sort_unstable();
            orbitals.dedup();
            let cells = part.sites.iter().map(|s| s / b);
            out.push(IsolatedPart {
                cells: (cells.clone().min().unwrap_or(0), cells.max().unwrap_or(0)),
                orbitals,
                sites: part.sites.len(),
                energy_ranges_ev: ranges,
                lead_weight_ratio: moving.iter().map(|&k| part.ratio[k]).fold(0.0, f64::max),
            });
        }
        out
    }
}
