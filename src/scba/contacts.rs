//! Contacts attached along the channel, inside the energy pass and the
//! Born loop.
//!
//! An attached contact p is a wide-band reservoir on the orbital sites of
//! some cells: broadening Γ_p (γ_p·1, or γ_p (1 + P σ·n̂) on each spin pair
//! of a polarised contact, see [`crate::model::AttachedContact`]),
//! retarded self-energy −iΓ_p/2 and in-scattering Γ_p f_p(E). In the pass
//! they join Σ0 exactly like a scattering self-energy, but they are never
//! rebuilt or mixed: only their levels (µ_p, T_p) can change.
//!
//! # What the pass records per energy and contact
//!
//! - the net flow Tr[Γ_p A] f_p − Tr[Γ_p G^n] (into the device; times g_s/h
//!   a particle flow per unit energy) and the gross exchange
//!   |Tr[Γ_p A] f_p| + |Tr[Γ_p G^n]|;
//! - D_p = Tr[Γ_p A];
//! - for every probe q, R_pq = Tr[Γ_p G Γ_q G†]: how Tr[Γ_p G^n] moves per
//!   unit of f_q. It is the G^n of a second recursion whose only
//!   in-scattering is Γ_q (leads and Σ^in_0 switched off), so it costs one
//!   extra recursion per probe and energy.
//!
//! # Floating contacts
//!
//! With Σ0 held fixed, G^n is linear in the occupations f_q of the
//! contacts, so a change of the probe levels changes the net flow of p at
//! every energy by exactly D_p Δf_p − Σ_q R_pq Δf_q. The zero-current
//! conditions (particle flow, and for a temperature probe also heat flow
//! ∫ (E − µ_p) j_p dE) are then a small nonlinear system in the probe
//! levels alone, solved by Newton to rounding after each pass. For a
//! coherent device the next pass confirms the answer; with scattering the
//! levels and Σ0 converge together in the Born loop.

use super::Pass;
use crate::C64;
use crate::model::{AttachedContact, ContactMode, Problem};
use crate::units::BOLTZMANN_EV_PER_K;

/// The level (µ, T) of every attached contact, in the order of
/// [`Problem::contacts`].
pub type Levels = Vec<(f64, f64)>;

/// The levels written in the problem (given, or the starting guesses of
/// the probes).
pub fn given_levels(problem: &Problem) -> Levels {
    problem
        .contacts
        .iter()
        .map(|c| (c.fermi_level_ev, c.temperature_k))
        .collect()
}

/// The starting levels of a solve: fixed contacts as given, probes at the
/// mean of the two leads' levels.
pub fn starting_levels(problem: &Problem) -> Levels {
    let mu = 0.5 * (problem.left.fermi_level_ev + problem.right.fermi_level_ev);
    let t = 0.5 * (problem.left.temperature_k + problem.right.temperature_k);
    problem
        .contacts
        .iter()
        .map(|c| match c.mode {
            ContactMode::Fixed => (c.fermi_level_ev, c.temperature_k),
            ContactMode::Voltage => (mu, c.temperature_k),
            ContactMode::Temperature => (mu, t),
        })
        .collect()
}

/// `problem` with the attached contacts at `levels`.
pub fn with_levels(problem: &Problem, levels: &[(f64, f64)]) -> Problem {
    let mut p = problem.clone();
    for (c, &(mu, t)) in p.contacts.iter_mut().zip(levels) {
        c.fermi_level_ev = mu;
        c.temperature_k = t;
    }
    p
}

/// Fermi function at E for a level (µ, T).
fn occupation((mu, t): (f64, f64), e: f64) -> f64 {
    crate::units::fermi(e, mu, t)
}

/// True when some contact needs the b × b block route (a polarised
/// contact has spin-off-diagonal broadening).
pub fn needs_blocks(problem: &Problem) -> bool {
    problem.contacts.iter().any(|c| c.polarisation.is_some())
}

/// The indices of the floating contacts.
fn floating(problem: &Problem) -> Vec<usize> {
    (0..problem.contacts.len())
        .filter(|&p| problem.contacts[p].mode.is_floating())
        .collect()
}

/// The per-energy records of the attached contacts (module docs).
#[derive(Clone, Debug, Default)]
pub struct ContactFlows {
    /// Number of attached contacts.
    pub contacts: usize,
    /// Number of floating contacts (the columns of R).
    pub floating: usize,
    /// Per energy and contact: net flow, gross exchange, D_p, then R_pq for
    /// each floating q.
    pub data: Vec<f64>,
}

impl ContactFlows {
    /// All-zero records for `problem` on its grid.
    pub fn zeros(problem: &Problem) -> Self {
        let contacts = problem.contacts.len();
        let floating = floating(problem).len();
        let mut out = Self {
            contacts,
            floating,
            data: Vec::new(),
        };
        out.data = vec![0.0; problem.grid.count * out.row_len().max(1)];
        out
    }

    /// Numbers per contact and energy.
    fn per_contact(&self) -> usize {
        3 + self.floating
    }

    /// Numbers per energy (0 without contacts).
    pub fn row_len(&self) -> usize {
        self.contacts * self.per_contact()
    }

    /// The record of contact p at energy k.
    fn at(&self, k: usize, p: usize) -> &[f64] {
        let start = k * self.row_len() + p * self.per_contact();
        &self.data[start..start + self.per_contact()]
    }

    /// Net flow Tr[Γ_p A] f_p − Tr[Γ_p G^n] of contact p at energy k
    /// (multiply by g_s/h for particles per unit energy).
    pub fn net(&self, k: usize, p: usize) -> f64 {
        self.at(k, p)[0]
    }

    /// Inflow plus outflow of contact p at energy k (a scale for the net).
    pub fn gross(&self, k: usize, p: usize) -> f64 {
        self.at(k, p)[1]
    }

    /// Tr[Γ_p A] of contact p at energy k.
    pub fn spectral(&self, k: usize, p: usize) -> f64 {
        self.at(k, p)[2]
    }

    /// R_pq = Tr[Γ_p G Γ_q G†] at energy k, q the `qi`-th floating contact.
    pub fn response(&self, k: usize, p: usize, qi: usize) -> f64 {
        self.at(k, p)[3 + qi]
    }
}

/// The orbital sites of contact `c` in a device of `b` orbitals per cell.
pub fn contact_sites(c: &AttachedContact, b: usize) -> impl Iterator<Item = usize> + '_ {
    c.cells.iter().flat_map(move |&i| i * b..(i + 1) * b)
}

/// Γ of one cell of contact `c` as a row-major b × b block.
pub fn gamma_block(c: &AttachedContact, b: usize) -> Vec<C64> {
    let mut g = vec![C64::new(0.0, 0.0); b * b];
    for o in 0..b {
        g[o * b + o] = C64::new(c.gamma_ev, 0.0);
    }
    if let Some(pol) = c.polarisation {
        let h = b / 2;
        let [nx, ny, nz] = pol.direction;
        let s = c.gamma_ev * pol.strength;
        for o in 0..h {
            let (u, d) = (o, o + h);
            g[u * b + u] += s * nz;
            g[d * b + d] -= s * nz;
            g[u * b + d] = C64::new(s * nx, -s * ny);
            g[d * b + u] = C64::new(s * nx, s * ny);
        }
    }
    g
}

/// Add −iΓ_p/2 and Γ_p f_p of every contact to the diagonal self-energies
/// of one energy (`sr`, `si`: one value per orbital site).
pub fn add_diagonal(
    problem: &Problem,
    levels: &[(f64, f64)],
    e: f64,
    sr: &mut [C64],
    si: &mut [f64],
) {
    let b = problem.device.orbitals;
    for (c, &level) in problem.contacts.iter().zip(levels) {
        let f = occupation(level, e);
        for s in contact_sites(c, b) {
            sr[s] += C64::new(0.0, -0.5 * c.gamma_ev);
            si[s] += c.gamma_ev * f;
        }
    }
}

/// Add `weight`·Γ of cell block `gamma` into a block Σ^r (as −iΓ/2 when
/// `retarded` is given) and a packed Hermitian Σ^in (the layout of
/// [`crate::rgf::BlockExchange::scatter_in`]).
pub fn add_block(
    gamma: &[C64],
    b: usize,
    weight: f64,
    retarded: Option<&mut [C64]>,
    packed_in: &mut [f64],
) {
    if let Some(sr) = retarded {
        for (s, g) in sr.iter_mut().zip(gamma) {
            *s += C64::new(0.0, -0.5) * g;
        }
    }
    for r in 0..b {
        for c in r..b {
            let v = gamma[r * b + c] * weight;
            if r == c {
                packed_in[r * b + c] += v.re;
            } else {
                packed_in[r * b + c] += v.re;
                packed_in[c * b + r] += v.im;
            }
        }
    }
}

/// (Tr[Γ A], Tr[Γ G^n]) of one cell from its blocks (row-major).
pub fn block_traces(gamma: &[C64], g: &[C64], gn: &[C64], b: usize) -> (f64, f64) {
    let i = C64::new(0.0, 1.0);
    let (mut ta, mut tn) = (0.0, 0.0);
    for r in 0..b {
        for c in 0..b {
            let a_cr = i * (g[c * b + r] - g[r * b + c].conj());
            ta += (gamma[r * b + c] * a_cr).re;
            tn += (gamma[r * b + c] * gn[c * b + r]).re;
        }
    }
    (ta, tn)
}

/// Write net, gross and D_p of every contact at energy `e` into `row`,
/// from the diagonal of G^r and G^n (`gr`, `gn`: one value per orbital
/// site).
pub fn record_diagonal(
    problem: &Problem,
    levels: &[(f64, f64)],
    e: f64,
    gr: &[C64],
    gn: &[f64],
    per_contact: usize,
    row: &mut [f64],
) {
    let b = problem.device.orbitals;
    for (p, (c, &level)) in problem.contacts.iter().zip(levels).enumerate() {
        let f = occupation(level, e);
        let (mut ta, mut tn) = (0.0, 0.0);
        for s in contact_sites(c, b) {
            ta += -2.0 * gr[s].im * c.gamma_ev;
            tn += gn[s] * c.gamma_ev;
        }
        let rec = &mut row[p * per_contact..];
        rec[0] = ta * f - tn;
        rec[1] = (ta * f).abs() + tn.abs();
        rec[2] = ta;
    }
}

/// Write net, gross and D_p of every contact at energy `e` into `row`,
/// from the diagonal blocks of G^r and G^n (N·b² each, row-major).
pub fn record_blocks(
    problem: &Problem,
    levels: &[(f64, f64)],
    e: f64,
    g: &[C64],
    gn: &[C64],
    per_contact: usize,
    row: &mut [f64],
) {
    let b = problem.device.orbitals;
    let bb = b * b;
    for (p, (c, &level)) in problem.contacts.iter().zip(levels).enumerate() {
        let f = occupation(level, e);
        let gamma = gamma_block(c, b);
        let (mut ta, mut tn) = (0.0, 0.0);
        for &i in &c.cells {
            let (a, n) = block_traces(
                &gamma,
                &g[i * bb..(i + 1) * bb],
                &gn[i * bb..(i + 1) * bb],
                b,
            );
            ta += a;
            tn += n;
        }
        let rec = &mut row[p * per_contact..];
        rec[0] = ta * f - tn;
        rec[1] = (ta * f).abs() + tn.abs();
        rec[2] = ta;
    }
}

/// The floating contacts' indices, for the response solves of the pass.
pub fn floating_indices(problem: &Problem) -> Vec<usize> {
    floating(problem)
}

/// Largest relative residual of the zero-current conditions of the probes
/// in `pass` (computed at the levels the pass used): |Σ_k j_p| over
/// Σ_k gross_p for the particle flow, and for a temperature probe
/// |Σ_k (E_k − µ_p) j_p| over Σ_k |E_k − µ_p| gross_p. 0 without probes.
pub fn probe_residual(problem: &Problem, levels: &[(f64, f64)], pass: &Pass) -> f64 {
    let flows = &pass.contact_flows;
    let mut worst: f64 = 0.0;
    for p in floating(problem) {
        let mu = levels[p].0;
        let (mut n, mut ng, mut q, mut qg) = (0.0, 0.0, 0.0, 0.0);
        for k in 0..problem.grid.count {
            let e = problem.grid.energy(k);
            n += flows.net(k, p);
            ng += flows.gross(k, p);
            q += (e - mu) * flows.net(k, p);
            qg += (e - mu).abs() * flows.gross(k, p);
        }
        worst = worst.max(ratio(n, ng));
        if problem.contacts[p].mode == ContactMode::Temperature {
            worst = worst.max(ratio(q, qg));
        }
    }
    worst
}

/// |x| / scale, or |x| when the scale is zero.
fn ratio(x: f64, scale: f64) -> f64 {
    if scale > 0.0 {
        x.abs() / scale
    } else {
        x.abs()
    }
}

/// One unknown of the probe system: contact p's Fermi level or temperature.
#[derive(Clone, Copy)]
enum Unknown {
    Mu(usize),
    T(usize),
}

/// The unknowns and the conditions (the same list: a Fermi level pairs
/// with the zero particle flow, a temperature with the zero heat flow).
fn unknowns(problem: &Problem) -> Vec<Unknown> {
    let mut u = Vec::new();
    for p in floating(problem) {
        u.push(Unknown::Mu(p));
        if problem.contacts[p].mode == ContactMode::Temperature {
            u.push(Unknown::T(p));
        }
    }
    u
}

/// Solve the probes' zero-current conditions for the Green's functions of
/// `pass` (Σ0 fixed, module docs) and write the new levels into `levels`.
/// The pass was computed at `levels`. A probe that couples to no state in
/// the window (a singular system) keeps its level.
pub fn float_levels(problem: &Problem, pass: &Pass, levels: &mut Levels) {
    let unknowns = unknowns(problem);
    if unknowns.is_empty() {
        return;
    }
    let old = levels.clone();
    for _ in 0..100 {
        let (res, jac) = probe_system(problem, pass, &old, levels, &unknowns);
        let Some(step) = solve_dense(jac, res) else {
            *levels = old;
            return;
        };
        let mut largest: f64 = 0.0;
        for (u, d) in unknowns.iter().zip(&step) {
            match *u {
                Unknown::Mu(p) => {
                    let kt = BOLTZMANN_EV_PER_K * levels[p].1;
                    let d = d.clamp(-10.0 * kt, 10.0 * kt);
                    levels[p].0 -= d;
                    largest = largest.max(d.abs() / kt);
                }
                Unknown::T(p) => {
                    let t = levels[p].1;
                    let d = d.clamp(-0.5 * t, 0.5 * t);
                    levels[p].1 -= d;
                    largest = largest.max(d.abs() / t);
                }
            }
        }
        if largest < 1e-13 {
            return;
        }
    }
}

/// Residuals (particle and heat flows of the probes, summed over the grid)
/// at `levels` and their Jacobian in the unknowns, from the pass made at
/// `old` (module docs: the flows move by D_p Δf_p − Σ_q R_pq Δf_q).
fn probe_system(
    problem: &Problem,
    pass: &Pass,
    old: &[(f64, f64)],
    levels: &[(f64, f64)],
    unknowns: &[Unknown],
) -> (Vec<f64>, Vec<Vec<f64>>) {
    let flows = &pass.contact_flows;
    let fl = floating(problem);
    let m = unknowns.len();
    let (mut res, mut jac) = (vec![0.0; m], vec![vec![0.0; m]; m]);
    // df[qi] = (∂f_q/∂µ_q, ∂f_q/∂T_q) at E; delta[qi] = f_q(new) − f_q(old)
    let mut df = vec![(0.0, 0.0); fl.len()];
    let mut delta = vec![0.0; fl.len()];
    for k in 0..problem.grid.count {
        let e = problem.grid.energy(k);
        for (qi, &q) in fl.iter().enumerate() {
            let (mu, t) = levels[q];
            let f = occupation(levels[q], e);
            let kt = BOLTZMANN_EV_PER_K * t;
            let w = f * (1.0 - f) / kt;
            df[qi] = (w, w * (e - mu) / t);
            delta[qi] = f - occupation(old[q], e);
        }
        // the flow of each probe p at its new level, and its derivatives
        for (row, u) in unknowns.iter().enumerate() {
            let (Unknown::Mu(p) | Unknown::T(p)) = *u;
            let pi = fl.iter().position(|&q| q == p).unwrap_or(0);
            let mut j = flows.net(k, p) + flows.spectral(k, p) * delta[pi];
            for (qi, d) in delta.iter().enumerate() {
                j -= flows.response(k, p, qi) * d;
            }
            let heat = matches!(u, Unknown::T(_));
            let weight = if heat { e - levels[p].0 } else { 1.0 };
            res[row] += weight * j;
            for (col, v) in unknowns.iter().enumerate() {
                let (Unknown::Mu(q) | Unknown::T(q)) = *v;
                let qi = fl.iter().position(|&x| x == q).unwrap_or(0);
                let dj = if q == p { flows.spectral(k, p) } else { 0.0 } - flows.response(k, p, qi);
                let dfq = match v {
                    Unknown::Mu(_) => df[qi].0,
                    Unknown::T(_) => df[qi].1,
                };
                jac[row][col] += weight * dj * dfq;
                if heat && q == p && matches!(v, Unknown::Mu(_)) {
                    // ∂(E − µ_p)/∂µ_p = −1
                    jac[row][col] -= j;
                }
            }
        }
    }
    (res, jac)
}

/// Solve J x = r by Gaussian elimination with partial pivoting; `None`
/// when J is singular (a pivot below 1e-300 or relative 1e-14 of the
/// largest row entry).
fn solve_dense(mut a: Vec<Vec<f64>>, mut r: Vec<f64>) -> Option<Vec<f64>> {
    let n = r.len();
    let scale = a
        .iter()
        .flat_map(|row| row.iter())
        .fold(0.0_f64, |m, v| m.max(v.abs()));
    for col in 0..n {
        let piv = (col..n).max_by(|&i, &j| a[i][col].abs().total_cmp(&a[j][col].abs()))?;
        if !(a[piv][col].abs() > 1e-14 * scale && a[piv][col].abs() > 1e-300) {
            return None;
        }
        a.swap(col, piv);
        r.swap(col, piv);
        let (top, bottom) = a.split_at_mut(col + 1);
        let pivot = &top[col];
        for (i, row) in bottom.iter_mut().enumerate() {
            let f = row[col] / pivot[col];
            for (x, p) in row[col..].iter_mut().zip(&pivot[col..]) {
                *x -= f * p;
            }
            let rc = r[col];
            r[col + 1 + i] -= f * rc;
        }
    }
    let mut x = vec![0.0; n];
    for (i, row) in a.iter().enumerate().rev() {
        let s: f64 = row[i + 1..]
            .iter()
            .zip(&x[i + 1..])
            .map(|(a, x)| a * x)
            .sum();
        x[i] = (r[i] - s) / row[i];
    }
    x.iter().all(|v| v.is_finite()).then_some(x)
}
