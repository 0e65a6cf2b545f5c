//! Phonon probes: anharmonic and boundary scattering as a network of
//! heat reservoirs, one on every damped site, and the lattice temperature
//! they float to.
//!
//! ## Terminals
//!
//! A damping γ_i > 0 on site i ([`Lattice::with_damping`]) is read as a
//! reservoir attached to that site: its self-energy Π_i = −iωγ_i gives the
//! broadening Λ_i = i(Π_i − Π_i†) = 2ωγ_i on site i alone. With the two
//! leads (Λ_L, Λ_R on the end cells) the network has 2 + (number of damped
//! sites) terminals, numbered 0 = left lead, 1 = right lead, 2 + p = the
//! p-th damped site in site order. Between any two of them
//!
//! ```text
//! T_ab(ω) = Tr[Λ_a D^r Λ_b D^a],   D^r = [ω² − Φ − Π_L − Π_R − Σ_i Π_i]⁻¹
//! ```
//!
//! Since Φ is real symmetric and every self-energy is symmetric, D^r is
//! complex symmetric and T_ab = T_ba (reciprocity). All loss of D^r goes
//! into the terminals, so Σ_b T_ab = Tr[Λ_a A] with A = i(D^r − D^a) the
//! spectral function (the sum includes T_aa).
//!
//! ## Heat
//!
//! With n(ω, T) the Bose–Einstein occupation, the heat that flows into
//! terminal a from all the others is
//!
//! ```text
//! J_a = Σ_b ∫₀^∞ (dω/2π) ħω T_ab(ω) [n(ω, T_b) − n(ω, T_a)]
//! ```
//!
//! and Σ_a J_a = 0 exactly (each pair's flow enters once with each sign).
//!
//! ## Cost
//!
//! At one frequency the whole D^r of the device is formed from the
//! left- and right-connected blocks of the recursion: G_ij = g^L_i Φ_i,i+1
//! G_i+1,j above the diagonal and G_ij = g^R_i Φ_i−1,i† G_i−1,j below it.
//! That is O(N b³) for the sweeps plus O(N² b³) for the off-diagonal blocks
//! (N cells of b sites) and O(N² b²) memory per thread; then O(P² b²) for
//! the P terminals' transmissions. [`ProbeNetwork`] keeps T_ab for a < b
//! on every frequency node: K·P(P − 1)/2 numbers for K nodes (a 200-site
//! chain on 300 nodes: 6·10⁶ numbers, 48 MB).
//!
//! ## Floating temperatures and conductance
//!
//! [`ProbeNetwork::float_temperatures`] holds the leads at their
//! temperatures and lets every probe float to the temperature at which the
//! heat it sends to all other terminals equals the power the electrons
//! deposit on its site (Newton's method; see the method). Then the heat
//! leaving through the two leads is the total deposited power (the
//! ledger). [`ProbeNetwork::floating_conductance`] is the linear-response
//! two-terminal conductance with the probes floating at zero power.

use super::{Lattice, LatticeError, PhononSpectrum, conductance_density, invalid};
use crate::C64;
use crate::units::{BOLTZMANN, HBAR};
use faer::Mat;
use faer::linalg::solvers::{DenseSolveCore, Solve};
use rayon::prelude::*;

/// 1 rad/ps in rad/s.
const PER_PS: f64 = 1e12;

/// One terminal of the network: where it touches the device and its Λ.
#[derive(Clone, Debug)]
enum Terminal {
    /// A lead on a whole end cell.
    Cell { cell: usize, lambda: Mat<C64> },
    /// A probe on one site (orbital `orb` of cell `cell`), Λ = 2ωγ.
    Site {
        cell: usize,
        orb: usize,
        lambda: f64,
    },
}

/// All blocks of D^r of the device at one frequency, block (i, j) stored
/// row-major at ((i·N + j)·b²).
struct FullGreen {
    n: usize,
    b: usize,
    g: Vec<C64>,
}

impl FullGreen {
    fn at(&self, i: usize, j: usize, r: usize, c: usize) -> C64 {
        self.g[(i * self.n + j) * self.b * self.b + r * self.b + c]
    }
}

fn inverse(m: &Mat<C64>) -> Mat<C64> {
    if m.nrows() == 1 {
        Mat::from_fn(1, 1, |_, _| m[(0, 0)].inv())
    } else {
        m.partial_piv_lu().inverse()
    }
}

fn flat(m: &Mat<C64>) -> Vec<C64> {
    let b = m.nrows();
    (0..b * b).map(|k| m[(k / b, k % b)]).collect()
}

/// The blocks ω² − Φ_ii − Π_ii of the device (leads and damping included).
fn diagonal_blocks(lattice: &Lattice, omega: f64) -> Result<Vec<Mat<C64>>, LatticeError> {
    let (pl, pr) = lattice.lead_self_energies(omega)?;
    let (n, b) = (lattice.cells(), lattice.sites_per_cell());
    let gamma = lattice.damping_per_ps();
    let z = omega * omega;
    Ok((0..n)
        .map(|i| {
            let mut a = Mat::from_fn(b, b, |r, c| -lattice.dynamical_onsite()[i][(r, c)]);
            for r in 0..b {
                a[(r, r)] += C64::new(z, omega * gamma[i * b + r]);
            }
            if i == 0 {
                a -= &pl;
            }
            if i == n - 1 {
                a -= &pr;
            }
            a
        })
        .collect())
}

/// D^r of the whole device at ω (rad/ps) from the left- and
/// right-connected blocks (see the module notes).
fn full_green(lattice: &Lattice, omega: f64) -> Result<FullGreen, LatticeError> {
    let a = diagonal_blocks(lattice, omega)?;
    let t = lattice.dynamical_coupling();
    let td: Vec<Mat<C64>> = t.iter().map(|m| m.adjoint().to_owned()).collect();
    let (n, b) = (a.len(), a[0].nrows());
    // Self-energies of the parts left and right of each cell.
    let mut from_left: Vec<Mat<C64>> = vec![Mat::zeros(b, b); n];
    let mut gl: Vec<Mat<C64>> = Vec::with_capacity(n);
    for i in 0..n {
        if i > 0 {
            from_left[i] = &td[i - 1] * &gl[i - 1] * &t[i - 1];
        }
        gl.push(inverse(&(&a[i] - &from_left[i])));
    }
    let mut from_right: Vec<Mat<C64>> = vec![Mat::zeros(b, b); n];
    let mut gr: Vec<Mat<C64>> = vec![Mat::zeros(b, b); n];
    for i in (0..n).rev() {
        if i + 1 < n {
            from_right[i] = &t[i] * &gr[i + 1] * &td[i];
        }
        gr[i] = inverse(&(&a[i] - &from_right[i]));
    }
    let up: Vec<Vec<C64>> = (0..n.saturating_sub(1))
        .map(|i| flat(&(&gl[i] * &t[i])))
        .collect();
    let down: Vec<Vec<C64>> = (1..n).map(|i| flat(&(&gr[i] * &td[i - 1]))).collect();
    let bb = b * b;
    let mut g = vec![C64::new(0.0, 0.0); n * n * bb];
    for j in 0..n {
        let gjj = inverse(&(&a[j] - &from_left[j] - &from_right[j]));
        g[(j * n + j) * bb..(j * n + j + 1) * bb].copy_from_slice(&flat(&gjj));
        for i in (0..j).rev() {
            block_product(&mut g, &up[i], (i * n + j) * bb, ((i + 1) * n + j) * bb, b);
        }
        for i in j + 1..n {
            block_product(
                &mut g,
                &down[i - 1],
                (i * n + j) * bb,
                ((i - 1) * n + j) * bb,
                b,
            );
        }
    }
    if let Some(k) = g
        .iter()
        .position(|v| !(v.re.is_finite() && v.im.is_finite()))
    {
        return Err(LatticeError::Kernel {
            omega_rad_per_ps: omega,
            source: crate::rgf::RgfError::NotFinite {
                energy_ev: omega * omega,
                cell: k / bb / n,
            },
        });
    }
    Ok(FullGreen { n, b, g })
}

/// g[out..] = m · g[src..] for b×b row-major blocks.
fn block_product(g: &mut [C64], m: &[C64], out: usize, src: usize, b: usize) {
    for r in 0..b {
        for c in 0..b {
            let mut s = C64::new(0.0, 0.0);
            for k in 0..b {
                s += m[r * b + k] * g[src + k * b + c];
            }
            g[out + r * b + c] = s;
        }
    }
}

/// The terminals at ω: the two leads, then one probe per damped site.
fn terminals(lattice: &Lattice, omega: f64) -> Result<Vec<Terminal>, LatticeError> {
    let (pl, pr) = lattice.lead_self_energies(omega)?;
    let (n, b) = (lattice.cells(), lattice.sites_per_cell());
    let mut out = vec![
        Terminal::Cell {
            cell: 0,
            lambda: crate::leads::broadening(&pl),
        },
        Terminal::Cell {
            cell: n - 1,
            lambda: crate::leads::broadening(&pr),
        },
    ];
    for (s, &g) in lattice.damping_per_ps().iter().enumerate() {
        if g > 0.0 {
            out.push(Terminal::Site {
                cell: s / b,
                orb: s % b,
                lambda: 2.0 * omega * g,
            });
        }
    }
    Ok(out)
}

/// T_ab = Tr[Λ_a G_{ca,cb} Λ_b G_{ca,cb}†].
fn pair_transmission(g: &FullGreen, a: &Terminal, b: &Terminal) -> f64 {
    let nb = g.b;
    match (a, b) {
        (
            Terminal::Site {
                cell: ci,
                orb: r,
                lambda: li,
            },
            Terminal::Site {
                cell: cj,
                orb: c,
                lambda: lj,
            },
        ) => li * lj * g.at(*ci, *cj, *r, *c).norm_sqr(),
        (
            Terminal::Site { cell, orb, lambda },
            Terminal::Cell {
                cell: cj,
                lambda: l,
            },
        ) => {
            let row = |p: usize| g.at(*cell, *cj, *orb, p);
            let mut s = C64::new(0.0, 0.0);
            for p in 0..nb {
                for q in 0..nb {
                    s += row(p) * l[(p, q)] * row(q).conj();
                }
            }
            lambda * s.re
        }
        (
            Terminal::Cell {
                cell: ci,
                lambda: l,
            },
            Terminal::Site { cell, orb, lambda },
        ) => {
            let col = |p: usize| g.at(*ci, *cell, p, *orb);
            let mut s = C64::new(0.0, 0.0);
            for p in 0..nb {
                for q in 0..nb {
                    s += l[(p, q)] * col(q) * col(p).conj();
                }
            }
            lambda * s.re
        }
        (
            Terminal::Cell {
                cell: ci,
                lambda: la,
            },
            Terminal::Cell {
                cell: cj,
                lambda: lb,
            },
        ) => {
            let blk = Mat::from_fn(nb, nb, |r, c| g.at(*ci, *cj, r, c));
            let t = la * &blk * lb * blk.adjoint();
            (0..nb).map(|k| t[(k, k)].re).sum()
        }
    }
}

/// Tr[Λ_a A] with A = i(D^r − D^a) on the terminal's cell.
fn absorption(g: &FullGreen, a: &Terminal) -> f64 {
    match a {
        Terminal::Site { cell, orb, lambda } => -2.0 * lambda * g.at(*cell, *cell, *orb, *orb).im,
        Terminal::Cell { cell, lambda } => {
            let i = C64::new(0.0, 1.0);
            let mut s = C64::new(0.0, 0.0);
            for p in 0..g.b {
                for q in 0..g.b {
                    let aqp = i * (g.at(*cell, *cell, q, p) - g.at(*cell, *cell, p, q).conj());
                    s += lambda[(p, q)] * aqp;
                }
            }
            s.re
        }
    }
}

/// Every T_ab and Tr[Λ_a A] of the network at one frequency (for checks
/// and analysis; [`ProbeNetwork`] keeps only the pairs it needs).
#[derive(Clone, Debug, PartialEq)]
pub struct TerminalMatrix {
    /// Number of terminals P (2 leads + one probe per damped site).
    pub terminals: usize,
    /// T_ab row-major (P×P), the diagonal T_aa included.
    pub transmission: Vec<f64>,
    /// Tr[Λ_a A] per terminal.
    pub absorption: Vec<f64>,
}

impl TerminalMatrix {
    /// T_ab.
    pub fn get(&self, a: usize, b: usize) -> f64 {
        self.transmission[a * self.terminals + b]
    }
}

impl Lattice {
    /// Sites that carry a probe (damping γ > 0), in site order; probe p is
    /// terminal 2 + p of the network.
    pub fn probe_sites(&self) -> Vec<usize> {
        (0..self.damping_per_ps.len())
            .filter(|&s| self.damping_per_ps[s] > 0.0)
            .collect()
    }

    /// All terminal transmissions T_ab at ω (rad/ps), by the full D^r of
    /// the device (see the module `probes`).
    pub fn terminal_matrix(&self, omega: f64) -> Result<TerminalMatrix, LatticeError> {
        check_omega(omega)?;
        let g = full_green(self, omega)?;
        let terms = terminals(self, omega)?;
        let p = terms.len();
        let mut transmission = vec![0.0; p * p];
        for a in 0..p {
            for b in 0..p {
                transmission[a * p + b] = pair_transmission(&g, &terms[a], &terms[b]);
            }
        }
        let absorption = terms.iter().map(|t| absorption(&g, t)).collect();
        Ok(TerminalMatrix {
            terminals: p,
            transmission,
            absorption,
        })
    }
}

fn check_omega(omega: f64) -> Result<(), LatticeError> {
    if omega.is_finite() && omega > 0.0 {
        Ok(())
    } else {
        Err(invalid(
            "omega_rad_per_ps",
            format!("{omega} is not a positive finite frequency"),
            "transmissions are evaluated at ω > 0 (D^r is singular at ω = 0)",
        ))
    }
}

/// T_ab for a < b, packed: the pair (a, b) of P terminals.
fn pair_index(a: usize, b: usize, p: usize) -> usize {
    a * p - a * (a + 1) / 2 + (b - a - 1)
}

/// The multi-terminal phonon network of a lattice on the frequency nodes
/// of its two-terminal [`PhononSpectrum`]: computed once, then reused for
/// heat currents, floating temperatures and conductances at any
/// temperatures.
#[derive(Clone, Debug, PartialEq)]
pub struct ProbeNetwork {
    /// Nodes ω_k (rad/ps), the spectrum's.
    pub omega_rad_per_ps: Vec<f64>,
    /// Weights w_k (rad/ps), the spectrum's.
    pub weight_rad_per_ps: Vec<f64>,
    probe_sites: Vec<usize>,
    sites: usize,
    /// T_ab (a < b) node by node: pairs[k·npairs + pair_index(a, b)].
    pairs: Vec<f64>,
}

/// Errors of the network and of the floating temperatures.
#[derive(Debug, thiserror::Error, Clone, PartialEq)]
pub enum ProbeError {
    /// An error of the lattice model or of an input.
    #[error(transparent)]
    Lattice(#[from] LatticeError),
    /// A probe temperature was driven towards 0 K: no positive temperature
    /// lets the site give up the heat asked of it.
    #[error(
        "lattice temperature of site {site} fell to {temperature_k:.4e} K (below the floor {floor_k:.4e} K) with {power_w:.4e} W deposited there; too much power for this lattice: the electrons draw more heat from this site than its phonons can bring in at any positive temperature; lower the heat drawn, raise the lead temperatures or the damping that couples the site to the rest"
    )]
    TooCold {
        /// The site (0-based, cell by cell).
        site: usize,
        /// Its temperature when the solve stopped (K).
        temperature_k: f64,
        /// The floor below which the solve stops (K).
        floor_k: f64,
        /// The power deposited on that site (W; negative = drawn out).
        power_w: f64,
    },
    /// Newton did not reach the tolerance.
    #[error(
        "floating lattice temperatures not converged after {iterations} Newton steps: heat balance of the probes off by {residual_w:.3e} W in total, most at site {site} (tolerance {tolerance_w:.3e} W); raise FloatParams::max_iterations or loosen relative_tolerance, or lower the deposited power"
    )]
    NotConverged {
        /// Newton steps taken.
        iterations: usize,
        /// Total heat imbalance of the probes, Σ_p |F_p| (W).
        residual_w: f64,
        /// The site with that imbalance.
        site: usize,
        /// The tolerance it had to reach (W).
        tolerance_w: f64,
    },
}

/// Settings of the Newton solve for the floating temperatures.
#[derive(Clone, Debug, PartialEq)]
pub struct FloatParams {
    /// Largest total heat imbalance Σ_p |F_p| of the probes allowed,
    /// relative to the net heat Σ_i |P_i| + |heat through the left lead| +
    /// |heat through the right lead|. A rounding floor of 256 ε times the
    /// gross exchange Σ_p K_p T_p is added (K_p the probe's conductance to
    /// all other terminals at its temperature T_p): F is the difference of
    /// flows of that size and cannot be evaluated more finely.
    pub relative_tolerance: f64,
    /// Most Newton steps.
    pub max_iterations: usize,
}

impl Default for FloatParams {
    fn default() -> Self {
        Self {
            relative_tolerance: 1e-10,
            max_iterations: 100,
        }
    }
}

/// The floating lattice temperatures and where the heat goes.
#[derive(Clone, Debug, PartialEq)]
pub struct FloatingLattice {
    /// T_L,i per site (K); NaN on sites without a probe (γ_i = 0), which
    /// have no temperature of their own.
    pub temperatures_k: Vec<f64>,
    /// Heat leaving the device into the left phonon lead (W).
    pub left_lead_heat_w: f64,
    /// Heat leaving the device into the right phonon lead (W).
    pub right_lead_heat_w: f64,
    /// Total heat imbalance of the probes at the end, Σ_i |Σ_j (heat from
    /// i to j) − P_i| (W). The ledger closes to it: the heat leaving
    /// through the two leads differs from Σ_i P_i by at most this.
    pub residual_w: f64,
    /// Newton steps taken.
    pub iterations: usize,
}

/// Bose–Einstein occupation at ω (rad/ps) and T (K).
fn occupation(omega: f64, temperature_k: f64) -> f64 {
    1.0 / (HBAR * omega * PER_PS / (BOLTZMANN * temperature_k)).exp_m1()
}

/// Heat per unit transmission, per rad/ps of bandwidth and per unit
/// occupation at ω (rad/ps): ħω/2π in W per (rad/ps).
fn heat_per_occupation(omega: f64) -> f64 {
    PER_PS / (2.0 * std::f64::consts::PI) * HBAR * PER_PS * omega
}

impl ProbeNetwork {
    /// T_ab on every node of `spectrum`, which must have been computed for
    /// this same `lattice` (the left-right transmission of the network is
    /// compared with the spectrum's Ξ node by node).
    pub fn compute(lattice: &Lattice, spectrum: &PhononSpectrum) -> Result<Self, LatticeError> {
        let probe_sites = lattice.probe_sites();
        let p = probe_sites.len() + 2;
        let npairs = p * (p - 1) / 2;
        let rows = spectrum
            .omega_rad_per_ps
            .par_iter()
            .zip(&spectrum.transmission)
            .map(|(&w, &xi)| {
                let g = full_green(lattice, w)?;
                let terms = terminals(lattice, w)?;
                let mut row = vec![0.0; npairs];
                for a in 0..p {
                    for b in a + 1..p {
                        row[pair_index(a, b, p)] = pair_transmission(&g, &terms[a], &terms[b]);
                    }
                }
                if (row[0] - xi).abs() > 1e-6 * xi.abs().max(1.0) {
                    return Err(invalid(
                        "spectrum",
                        format!("Ξ({w} rad/ps) is {xi} but this lattice gives {}", row[0]),
                        "compute the PhononSpectrum from the same lattice (with its damping)",
                    ));
                }
                Ok(row)
            })
            .collect::<Result<Vec<Vec<f64>>, LatticeError>>()?;
        Ok(Self {
            omega_rad_per_ps: spectrum.omega_rad_per_ps.clone(),
            weight_rad_per_ps: spectrum.weight_rad_per_ps.clone(),
            probe_sites,
            sites: lattice.damping_per_ps().len(),
            pairs: rows.concat(),
        })
    }

    /// Number of terminals P: 0 = left lead, 1 = right lead, 2 + p = probe p.
    pub fn terminals(&self) -> usize {
        self.probe_sites.len() + 2
    }

    /// The site of each probe (probe p is terminal 2 + p).
    pub fn probe_sites(&self) -> &[usize] {
        &self.probe_sites
    }

    /// T_ab at node k (a ≠ b; T_ab = T_ba is used, the stored value being
    /// the one with a < b).
    pub fn transmission(&self, k: usize, a: usize, b: usize) -> f64 {
        let p = self.terminals();
        let (lo, hi) = if a < b { (a, b) } else { (b, a) };
        self.pairs[k * p * (p - 1) / 2 + pair_index(lo, hi, p)]
    }

    /// Heat into every terminal from all the others (W), the terminals at
    /// `temperatures_k` (P values: left lead, right lead, then the probes).
    /// Sums to zero.
    pub fn heat_into(&self, temperatures_k: &[f64]) -> Vec<f64> {
        let p = self.terminals();
        assert_eq!(temperatures_k.len(), p, "one temperature per terminal");
        let npairs = p * (p - 1) / 2;
        let mut out = vec![0.0; p];
        let mut occ = vec![0.0; p];
        for (k, (&w, &wt)) in self
            .omega_rad_per_ps
            .iter()
            .zip(&self.weight_rad_per_ps)
            .enumerate()
        {
            for (o, &t) in occ.iter_mut().zip(temperatures_k) {
                *o = occupation(w, t);
            }
            let scale = wt * heat_per_occupation(w);
            let row = &self.pairs[k * npairs..(k + 1) * npairs];
            for a in 0..p {
                for b in a + 1..p {
                    let flow = scale * row[pair_index(a, b, p)] * (occ[b] - occ[a]);
                    out[a] += flow;
                    out[b] -= flow;
                }
            }
        }
        out
    }

    /// Linear-response conductances G_ab(T) = ∫ (dω/2π) ħω T_ab ∂n/∂T
    /// (W/K) at temperature T, row-major P×P with a zero diagonal.
    pub fn conductance_matrix(&self, temperature_k: f64) -> Vec<f64> {
        let p = self.terminals();
        let npairs = p * (p - 1) / 2;
        let mut g = vec![0.0; p * p];
        for (k, (&w, &wt)) in self
            .omega_rad_per_ps
            .iter()
            .zip(&self.weight_rad_per_ps)
            .enumerate()
        {
            let c = wt * conductance_density(w, temperature_k);
            let row = &self.pairs[k * npairs..(k + 1) * npairs];
            for a in 0..p {
                for b in a + 1..p {
                    let v = c * row[pair_index(a, b, p)];
                    g[a * p + b] += v;
                    g[b * p + a] += v;
                }
            }
        }
        g
    }

    /// Two-terminal lattice thermal conductance with the probes floating
    /// (W/K) at T (K): the heat into the right lead per kelvin of
    /// T_left − T_right in linear response, every probe netting zero heat.
    /// With ΔT_L = 1, ΔT_R = 0 the probes' ΔT_p solve
    /// Σ_b G_pb (ΔT_b − ΔT_p) = 0, and κ_ph = G_RL + Σ_p G_Rp ΔT_p.
    /// Without probes it is the spectrum's two-terminal conductance.
    pub fn floating_conductance(&self, temperature_k: f64) -> f64 {
        let p = self.terminals();
        let g = self.conductance_matrix(temperature_k);
        let np = p - 2;
        if np == 0 {
            return g[p];
        }
        let m = Mat::from_fn(np, np, |r, c| {
            if r == c {
                (0..p).map(|b| g[(r + 2) * p + b]).sum()
            } else {
                -g[(r + 2) * p + c + 2]
            }
        });
        let rhs = Mat::from_fn(np, 1, |r, _| g[(r + 2) * p]);
        let dt = m.partial_piv_lu().solve(&rhs);
        g[p] + (0..np).map(|q| g[p + q + 2] * dt[(q, 0)]).sum::<f64>()
    }
}

/// Heat leaving every terminal into the others (W) and, when asked, its
/// derivative with respect to the probe temperatures (np×np, W/K; the
/// diagonal is each probe's conductance K_p to all other terminals).
struct Balance {
    out: Vec<f64>,
    jacobian: Option<Mat<f64>>,
}

impl ProbeNetwork {
    fn balance(&self, temperatures_k: &[f64], with_jacobian: bool) -> Balance {
        let p = self.terminals();
        let np = p - 2;
        let npairs = p * (p - 1) / 2;
        let mut out = vec![0.0; p];
        let mut jac = with_jacobian.then(|| Mat::<f64>::zeros(np, np));
        let (mut occ, mut dens) = (vec![0.0; p], vec![0.0; p]);
        for (k, (&w, &wt)) in self
            .omega_rad_per_ps
            .iter()
            .zip(&self.weight_rad_per_ps)
            .enumerate()
        {
            for a in 0..p {
                occ[a] = occupation(w, temperatures_k[a]);
                if with_jacobian {
                    dens[a] = conductance_density(w, temperatures_k[a]);
                }
            }
            let hpo = heat_per_occupation(w);
            let row = &self.pairs[k * npairs..(k + 1) * npairs];
            for a in 0..p {
                for b in a + 1..p {
                    let t = wt * row[pair_index(a, b, p)];
                    let flow = t * hpo * (occ[a] - occ[b]);
                    out[a] += flow;
                    out[b] -= flow;
                    if let Some(j) = jac.as_mut() {
                        for (x, y) in [(a, b), (b, a)] {
                            if x >= 2 {
                                j[(x - 2, x - 2)] += t * dens[x];
                                if y >= 2 {
                                    j[(x - 2, y - 2)] -= t * dens[y];
                                }
                            }
                        }
                    }
                }
            }
        }
        Balance { out, jacobian: jac }
    }

    /// Checks the inputs of [`Self::float_temperatures`]; returns the
    /// power on each probe.
    fn probe_powers(
        &self,
        left_k: f64,
        right_k: f64,
        power_w: &[f64],
        params: &FloatParams,
    ) -> Result<Vec<f64>, LatticeError> {
        for (what, t) in [("left_k", left_k), ("right_k", right_k)] {
            if !(t.is_finite() && t > 0.0) {
                return Err(invalid(
                    what,
                    format!("lead temperature {t} K"),
                    "lead temperatures are finite and > 0 K",
                ));
            }
        }
        if power_w.len() != self.sites {
            return Err(invalid(
                "power_w",
                format!("{} values for {} sites", power_w.len(), self.sites),
                "give one deposited power per site (W, 0 for none)",
            ));
        }
        for (s, &q) in power_w.iter().enumerate() {
            if !q.is_finite() {
                return Err(invalid(
                    format!("power_w[{s}]"),
                    format!("{q} W"),
                    "deposited powers are finite numbers in W",
                ));
            }
            if q != 0.0 && self.probe_sites.binary_search(&s).is_err() {
                return Err(invalid(
                    format!("power_w[{s}]"),
                    format!("{q:e} W on a site without damping (no probe, no temperature)"),
                    "put a damping γ > 0 on every site where the electrons deposit heat",
                ));
            }
        }
        let tol_ok = params.relative_tolerance.is_finite() && params.relative_tolerance > 0.0;
        if !tol_ok || params.max_iterations == 0 {
            return Err(invalid(
                "FloatParams",
                format!(
                    "relative_tolerance {}, max_iterations {}",
                    params.relative_tolerance, params.max_iterations
                ),
                "the tolerance must be > 0 and at least one iteration allowed",
            ));
        }
        Ok(self.probe_sites.iter().map(|&s| power_w[s]).collect())
    }

    /// Floating probe temperatures: with the leads at `left_k` and
    /// `right_k` (K) and `power_w[i]` (W) deposited on site i by the
    /// electrons (positive heats the lattice), finds the probe
    /// temperatures at which the heat each probe sends to all the other
    /// terminals equals its deposited power. A nonzero power on a site
    /// without damping is an error (such a site has no temperature; the
    /// result reports NaN there).
    ///
    /// Newton on F_p(T) = (heat out of probe p) − P_p with the Jacobian
    /// from ∂n/∂T on the same nodes, from all probes at the mean lead
    /// temperature; a step may lower no temperature by more than half, and
    /// is halved until the residual norm drops.
    pub fn float_temperatures(
        &self,
        left_k: f64,
        right_k: f64,
        power_w: &[f64],
        params: &FloatParams,
    ) -> Result<FloatingLattice, ProbeError> {
        let powers = self.probe_powers(left_k, right_k, power_w, params)?;
        let np = powers.len();
        let floor = 1e-3 * left_k.min(right_k);
        let total_power: f64 = powers.iter().map(|q| q.abs()).sum();
        let mut temps = vec![0.5 * (left_k + right_k); np + 2];
        temps[0] = left_k;
        temps[1] = right_k;
        let residual =
            |b: &Balance| -> Vec<f64> { (0..np).map(|q| b.out[q + 2] - powers[q]).collect() };
        let mut iterations = 0;
        loop {
            let bal = self.balance(&temps, true);
            let f = residual(&bal);
            let jac = bal.jacobian.expect("asked for the Jacobian");
            let tolerance_w = tolerance(params, &bal.out, &jac, &temps, total_power);
            let res = f.iter().map(|v| v.abs()).sum::<f64>();
            if res <= tolerance_w {
                return Ok(self.floating_result(&temps, res, iterations));
            }
            if iterations == params.max_iterations {
                return Err(ProbeError::NotConverged {
                    iterations,
                    residual_w: res,
                    site: self.probe_sites[worst(&f)],
                    tolerance_w,
                });
            }
            let rhs = Mat::from_fn(np, 1, |r, _| -f[r]);
            let step = jac.partial_piv_lu().solve(&rhs);
            let step: Vec<f64> = (0..np).map(|r| step[(r, 0)]).collect();
            temps = self.damped_step(&temps, &step, &residual, norm2(&f));
            iterations += 1;
            if let Some(q) = (0..np).find(|&q| temps[q + 2].is_nan() || temps[q + 2] < floor) {
                return Err(ProbeError::TooCold {
                    site: self.probe_sites[q],
                    temperature_k: temps[q + 2],
                    floor_k: floor,
                    power_w: powers[q],
                });
            }
        }
    }

    /// T + λ·step with λ ≤ 1 small enough that no probe temperature drops
    /// by more than half, halved (up to 30 times) until ‖F‖ decreases.
    fn damped_step(
        &self,
        temps: &[f64],
        step: &[f64],
        residual: &dyn Fn(&Balance) -> Vec<f64>,
        norm: f64,
    ) -> Vec<f64> {
        let mut lambda: f64 = 1.0;
        for (q, &d) in step.iter().enumerate() {
            if d < -0.5 * temps[q + 2] {
                lambda = lambda.min(0.5 * temps[q + 2] / -d);
            }
        }
        let trial = |lambda: f64| -> Vec<f64> {
            let mut t = temps.to_vec();
            for (q, &d) in step.iter().enumerate() {
                t[q + 2] += lambda * d;
            }
            t
        };
        for _ in 0..30 {
            let t = trial(lambda);
            let f = residual(&self.balance(&t, false));
            if norm2(&f) < (1.0 - 1e-4 * lambda) * norm {
                return t;
            }
            lambda *= 0.5;
        }
        trial(lambda)
    }

    fn floating_result(&self, temps: &[f64], res: f64, iterations: usize) -> FloatingLattice {
        let mut temperatures_k = vec![f64::NAN; self.sites];
        for (q, &s) in self.probe_sites.iter().enumerate() {
            temperatures_k[s] = temps[q + 2];
        }
        let into = self.heat_into(temps);
        FloatingLattice {
            temperatures_k,
            left_lead_heat_w: into[0],
            right_lead_heat_w: into[1],
            residual_w: res,
            iterations,
        }
    }
}

/// Index of the largest |f_q| (0 when empty).
fn worst(f: &[f64]) -> usize {
    f.iter()
        .map(|v| v.abs())
        .enumerate()
        .fold((0, 0.0), |acc, (q, v)| if v > acc.1 { (q, v) } else { acc })
        .0
}

/// Tolerance on Σ_p |F_p| (W): `relative_tolerance` of the net heat
/// (Σ|P| plus the heat through both leads) plus a rounding floor of
/// 256 ε times the gross exchange Σ_p K_p T_p (K_p = ∂F_p/∂T_p), below
/// which F cannot be evaluated.
fn tolerance(
    params: &FloatParams,
    out: &[f64],
    jac: &Mat<f64>,
    temps: &[f64],
    total_power: f64,
) -> f64 {
    let gross: f64 = (0..jac.nrows()).map(|q| jac[(q, q)] * temps[q + 2]).sum();
    let net = total_power + out[0].abs() + out[1].abs();
    params.relative_tolerance * net + 256.0 * f64::EPSILON * gross
}

fn norm2(f: &[f64]) -> f64 {
    f.iter().map(|v| v * v).sum::<f64>().sqrt()
}
