//! Ξ(ω) on quadrature nodes, and the heat it carries at any temperature.
//!
//! With n(ω, T) = 1/(exp(ħω/k_B T) − 1) the Bose–Einstein occupation:
//!
//! ```text
//! J_ph(T_L, T_R) = ∫₀^∞ (dω/2π) ħω Ξ(ω) [n(ω, T_L) − n(ω, T_R)]
//! κ_ph(T)        = ∫₀^∞ (dω/2π) ħω Ξ(ω) ∂n/∂T
//! ```
//!
//! J_ph is the heat that flows out of the left phonon lead into the right
//! one; κ_ph is its linear response. Ξ vanishes above the lower of the two
//! lead band tops, so the integral ends there.
//!
//! ## Integration rule and its accuracy
//!
//! [0, ω_top] is cut at every frequency where a lead subband opens or
//! closes ([`super::Lattice::band_edges_rad_per_ps`]), which is where Ξ
//! jumps or has a square-root edge. Each piece is cut into
//! `initial_pieces` equal intervals, each integrated by Gauss–Legendre of
//! `order` nodes through an end-clustering map (the module `quadrature`:
//! square-root edges become smooth). Then every interval is halved and
//! integrated again; an interval whose halves change κ_ph(T) by more than
//! `relative_tolerance` × κ_ph(T) × (its share of [0, ω_top]) at any of the
//! `temperatures_k` is halved again, and so on. The halves are always kept,
//! so at the end the last refinement changed κ_ph at every check temperature
//! by less than `relative_tolerance` relative, and the kept (finer) rule is
//! more accurate than that change since Gauss–Legendre converges
//! geometrically on smooth pieces. The nodes never touch ω = 0 or a band
//! top. The same nodes serve every temperature afterwards
//! ([`PhononSpectrum::conductance`], [`PhononSpectrum::heat_current`]); the
//! stated accuracy holds at the check temperatures and between them (the
//! integrand is smooth in T); below the lowest check temperature the region
//! ω ≲ k_B T/ħ may be under-resolved. A resonance narrower than the
//! initial intervals can be missed if no node lands on it: raise
//! `initial_pieces` for devices with sharp resonances.
//!
//! Rounding floor: near ω = 0 the recursion divides by quantities of size
//! ω² while the force constants are of size ω_top², so Ξ carries a
//! rounding error of about ε (ω_top/ω)² (ε the machine epsilon; with
//! damping the exact Ξ there is small and this noise dominates). A split
//! whose change is below 16 ε (ω_top/ω)² times the interval's own
//! contribution, node by node, is taken as settled: refining further would
//! only chase that noise. Away from ω = 0 this floor is below 1e-13 and
//! never decides.

use super::quadrature::{gauss_legendre_unit, mapped_rule};
use super::{Lattice, LatticeError, TransmissionScratch};
use crate::units::{BOLTZMANN, HBAR};
use rayon::prelude::*;

/// 1 rad/ps in rad/s.
const PER_PS: f64 = 1e12;

/// Settings of the frequency integral.
#[derive(Clone, Debug, PartialEq)]
pub struct SpectrumParams {
    /// Temperatures (K) at which κ_ph must have converged.
    pub temperatures_k: Vec<f64>,
    /// Largest relative change of κ_ph allowed in the last refinement.
    pub relative_tolerance: f64,
    /// Gauss–Legendre nodes per interval.
    pub order: usize,
    /// Equal intervals each piece between subband edges starts with.
    pub initial_pieces: usize,
    /// Most frequency points before giving up.
    pub max_nodes: usize,
}

impl Default for SpectrumParams {
    fn default() -> Self {
        Self {
            temperatures_k: vec![1.0, 3.0, 10.0, 30.0, 100.0, 300.0, 1000.0],
            relative_tolerance: 1e-8,
            order: 10,
            initial_pieces: 4,
            max_nodes: 200_000,
        }
    }
}

/// Ξ on the quadrature nodes of [0, ω_top], reusable for any temperature.
#[derive(Clone, Debug, PartialEq)]
pub struct PhononSpectrum {
    /// Nodes ω_k (rad/ps), ascending.
    pub omega_rad_per_ps: Vec<f64>,
    /// Weights w_k (rad/ps): ∫ g dω ≈ Σ w_k g(ω_k).
    pub weight_rad_per_ps: Vec<f64>,
    /// Ξ(ω_k).
    pub transmission: Vec<f64>,
    /// The cuts of [0, ω_top] (rad/ps): 0, the subband edges, ω_top.
    pub breakpoints_rad_per_ps: Vec<f64>,
}

/// ħω ∂n/∂T / 2π per unit ω: the heat conducted per kelvin and per rad/ps
/// of bandwidth by one fully open channel at ω (rad/ps) and T (K), in
/// W/K per (rad/ps). Equals (k_B/2π)(x/2)²/sinh²(x/2) × 10¹², x = ħω/k_B T;
/// it tends to k_B/2π per rad/s at x → 0 and vanishes as x² e^(−x).
pub fn conductance_density(omega_rad_per_ps: f64, temperature_k: f64) -> f64 {
    let half = 0.5 * HBAR * omega_rad_per_ps * PER_PS / (BOLTZMANN * temperature_k);
    let s = if half == 0.0 { 1.0 } else { half / half.sinh() };
    BOLTZMANN / (2.0 * std::f64::consts::PI) * PER_PS * s * s
}

/// One interval with its nodes, weights and Ξ.
struct Leaf {
    lo: f64,
    hi: f64,
    nodes: Vec<(f64, f64)>,
    xi: Vec<f64>,
}

impl Leaf {
    fn conductance(&self, t: f64) -> f64 {
        self.nodes
            .iter()
            .zip(&self.xi)
            .map(|(&(w, wt), &x)| wt * x * conductance_density(w, t))
            .sum()
    }

    /// The rounding noise of [`Leaf::conductance`]: each node's full-channel
    /// contribution times the recursion's relative error 16 ε (ω_top/ω)²
    /// (at most 1: Ξ of a channel is at most 1 per open mode there).
    fn rounding_floor(&self, t: f64, top: f64) -> f64 {
        self.nodes
            .iter()
            .zip(&self.xi)
            .map(|(&(w, wt), &x)| {
                let noise = (16.0 * f64::EPSILON * (top / w).powi(2)).min(1.0);
                wt * noise * x.abs().max(1.0) * conductance_density(w, t)
            })
            .sum()
    }
}

fn evaluate(
    lattice: &Lattice,
    unit: &[(f64, f64)],
    intervals: &[(f64, f64)],
) -> Result<Vec<Leaf>, LatticeError> {
    intervals
        .par_iter()
        .map_init(
            || TransmissionScratch::new(lattice),
            |scratch, &(a, b)| {
                let nodes = mapped_rule(unit, a, b);
                let xi = nodes
                    .iter()
                    .map(|&(w, _)| lattice.transmission(w, scratch))
                    .collect::<Result<Vec<f64>, _>>()?;
                Ok(Leaf {
                    lo: a,
                    hi: b,
                    nodes,
                    xi,
                })
            },
        )
        .collect()
}

fn check_params(p: &SpectrumParams) -> Result<(), LatticeError> {
    let bad_t = p
        .temperatures_k
        .iter()
        .find(|t| !(t.is_finite() && **t > 0.0));
    if p.temperatures_k.is_empty() || bad_t.is_some() {
        return Err(super::invalid(
            "SpectrumParams::temperatures_k",
            format!("{:?}", p.temperatures_k),
            "give at least one temperature, each finite and > 0 K",
        ));
    }
    let tolerance_ok = p.relative_tolerance.is_finite() && p.relative_tolerance > 0.0;
    if !tolerance_ok || p.order < 2 || p.initial_pieces == 0 {
        return Err(super::invalid(
            "SpectrumParams",
            format!(
                "relative_tolerance {}, order {}, initial_pieces {}",
                p.relative_tolerance, p.order, p.initial_pieces
            ),
            "the tolerance must be > 0, the order ≥ 2 and initial_pieces ≥ 1",
        ));
    }
    Ok(())
}

impl PhononSpectrum {
    /// Ξ on nodes refined until κ_ph converges (see the module notes for
    /// the rule and its accuracy).
    pub fn compute(lattice: &Lattice, params: &SpectrumParams) -> Result<Self, LatticeError> {
        check_params(params)?;
        let unit = gauss_legendre_unit(params.order);
        let top = lattice.band_top_rad_per_ps();
        let mut cuts = vec![0.0];
        cuts.extend(lattice.band_edges_rad_per_ps());
        cuts.push(top);
        let np = params.initial_pieces;
        let pieces: Vec<(f64, f64)> = cuts
            .windows(2)
            .flat_map(|c| {
                let h = (c[1] - c[0]) / np as f64;
                (0..np).map(move |j| (c[0] + j as f64 * h, c[0] + (j + 1) as f64 * h))
            })
            .collect();
        let mut leaves = evaluate(lattice, &unit, &pieces)?;
        let mut pending: Vec<usize> = (0..leaves.len()).collect();
        while !pending.is_empty() {
            pending = refine(lattice, &unit, &mut leaves, &pending, top, params)?;
        }
        Ok(Self::from_leaves(leaves, cuts))
    }

    fn from_leaves(leaves: Vec<Leaf>, cuts: Vec<f64>) -> Self {
        let mut pts: Vec<(f64, f64, f64)> = leaves
            .iter()
            .flat_map(|l| l.nodes.iter().zip(&l.xi).map(|(&(w, wt), &x)| (w, wt, x)))
            .collect();
        pts.sort_by(|a, b| a.0.total_cmp(&b.0));
        Self {
            omega_rad_per_ps: pts.iter().map(|p| p.0).collect(),
            weight_rad_per_ps: pts.iter().map(|p| p.1).collect(),
            transmission: pts.iter().map(|p| p.2).collect(),
            breakpoints_rad_per_ps: cuts,
        }
    }

    /// Two-terminal lattice thermal conductance κ_ph(T) (W/K).
    pub fn conductance(&self, temperature_k: f64) -> f64 {
        self.omega_rad_per_ps
            .iter()
            .zip(&self.weight_rad_per_ps)
            .zip(&self.transmission)
            .map(|((&w, &wt), &x)| wt * x * conductance_density(w, temperature_k))
            .sum()
    }

    /// Heat current J_ph (W) from the left phonon lead at T_L into the
    /// right one at T_R (K); positive when heat flows left to right.
    pub fn heat_current(&self, left_k: f64, right_k: f64) -> f64 {
        let n = |w: f64, t: f64| 1.0 / (HBAR * w * PER_PS / (BOLTZMANN * t)).exp_m1();
        let per_channel = PER_PS / (2.0 * std::f64::consts::PI) * HBAR * PER_PS;
        self.omega_rad_per_ps
            .iter()
            .zip(&self.weight_rad_per_ps)
            .zip(&self.transmission)
            .map(|((&w, &wt), &x)| wt * x * per_channel * w * (n(w, left_k) - n(w, right_k)))
            .sum()
    }

    /// Number of frequency points.
    pub fn len(&self) -> usize {
        self.omega_rad_per_ps.len()
    }

    /// True when there are no frequency points.
    pub fn is_empty(&self) -> bool {
        self.omega_rad_per_ps.is_empty()
    }
}

/// Halves every pending interval, keeps the halves, and returns those that
/// still moved κ_ph more than their share of the tolerance.
fn refine(
    lattice: &Lattice,
    unit: &[(f64, f64)],
    leaves: &mut Vec<Leaf>,
    pending: &[usize],
    top: f64,
    params: &SpectrumParams,
) -> Result<Vec<usize>, LatticeError> {
    let temps = &params.temperatures_k;
    let totals: Vec<f64> = temps
        .iter()
        .map(|&t| leaves.iter().map(|l| l.conductance(t)).sum::<f64>())
        .collect();
    let halves: Vec<(f64, f64)> = pending
        .iter()
        .flat_map(|&i| {
            let (lo, hi) = (leaves[i].lo, leaves[i].hi);
            let mid = 0.5 * (lo + hi);
            [(lo, mid), (mid, hi)]
        })
        .collect();
    let mut new = evaluate(lattice, unit, &halves)?.into_iter();
    let mut next = Vec::new();
    let mut change = vec![0.0; temps.len()];
    for &i in pending {
        let (h1, h2) = (
            new.next().expect("two halves"),
            new.next().expect("two halves"),
        );
        let share = (leaves[i].hi - leaves[i].lo) / top;
        let mut settled = true;
        for (k, &t) in temps.iter().enumerate() {
            let d = h1.conductance(t) + h2.conductance(t) - leaves[i].conductance(t);
            change[k] += d;
            let floor = h1.rounding_floor(t, top) + h2.rounding_floor(t, top);
            settled &= d.abs() <= params.relative_tolerance * totals[k].abs() * share + floor;
        }
        leaves[i] = h1;
        leaves.push(h2);
        if !settled {
            next.extend([i, leaves.len() - 1]);
        }
    }
    let nodes = leaves.len() * unit.len();
    if !next.is_empty() && nodes + next.len() * unit.len() > params.max_nodes {
        let (k, rel) = change
            .iter()
            .zip(&totals)
            .map(|(c, t)| (c / t).abs())
            .enumerate()
            .fold((0, 0.0), |acc, (k, r)| if r > acc.1 { (k, r) } else { acc });
        return Err(LatticeError::NotConverged {
            temperature_k: temps[k],
            relative_change: rel,
            nodes,
            max_nodes: params.max_nodes,
        });
    }
    Ok(next)
}
