//! # qheat: electro-thermal quantum transport in nanoscale devices
//!
//! qheat solves the non-equilibrium Green's function (NEGF) equations of a
//! device between two leads, with elastic dephasing and inelastic phonon
//! scattering in the self-consistent Born approximation, and reports charge
//! and heat currents, a conservation ledger, where the lattice is heated or
//! cooled beside where the electrochemical potential drops, energy-resolved
//! current maps and thermoelectric coefficients.
//!
//! ## The model in brief
//!
//! The device is a chain of N cells with b orbitals each; its Hamiltonian is
//! block tridiagonal (H_ii, H_i,i+1). Leads 1 (left) and 2 (right) enter
//! through retarded self-energies Σ1, Σ2 on the end blocks, with broadenings
//! Γ_α = i(Σ_α − Σ_α†) and in-scattering Σ^in_α = Γ_α f_α. Scattering inside
//! the device adds local self-energies Σ0 (dephasing and Einstein phonons,
//! [`scattering`]). With G^n = −iG^<, G^p = iG^>, A = G^n + G^p:
//!
//! ```text
//! G^r = [E − H − Σ1 − Σ2 − Σ^r_0]⁻¹,   G^n = G^r (Σ^in_1 + Σ^in_2 + Σ^in_0) G^a
//! j_α(E) = (g_s/h) Tr[Σ^in_α A − Γ_α G^n]          (particles into the device)
//! I_α = −e ∫ j_α dE,  J_E,α = ∫ E j_α dE,  J_Q,α = ∫ (E − µ_α) j_α dE
//! P_i = −∫ E j_0,i dE                              (power into the lattice)
//! ```
//!
//! Conventions: e > 0; V = V_1 − V_2 = −(µ_1 − µ_2)/e; the reported current
//! is I = I_1, so a passive device has I·V ≥ 0; S < 0 for transport above µ.
//! Energies are in eV, lengths in nm, temperatures in K, currents in A,
//! powers in W ([`units`]). Every energy integral is the plain sum
//! Σ_k g(E_k) ΔE on a uniform grid ([`grid`]) with every ħω an integer number
//! of steps, which makes the phonon exchange conserve particles and energy
//! exactly on the grid. The ledger ([`observables::Ledger`]) checks
//! I_1 + I_2 = 0, that the lattice power computed mode by mode from the
//! phonon side (ħω × (emission − absorption) from the final G^n and G^p)
//! equals the electron side Σ_i P_i and the leads' energy loss
//! J_E,1 + J_E,2, and Σ_i P_i = I·V + J_Q,1 + J_Q,2; these hold only at the
//! fixed point of the Born loop, so an unconverged solve shows in them.
//!
//! ## Data flow and main types
//!
//! case file → [`case::Case`] → [`case::Resolved`] ([`model::Problem`]:
//! [`device::Device`], [`model::Contact`] with a [`leads::Lead`],
//! [`scattering::Scattering`], [`grid::EnergyGrid`]) → [`scba::solve`]
//! (calls [`rgf::solve_energy`] for every energy, in parallel) →
//! [`scba::Solution`] → [`observables::observe`] → [`output`].
//! Thermoelectric coefficients: [`thermo`].
//! The lattice's own heat transport (phonon transmission, κ_ph): [`lattice`].
//! Electrons and lattice temperatures solved together: [`selfheat`].
//! Transport and the electrostatic potential of the device's own charge
//! solved together: [`electrostatics`].
//! Whole commands (check, solve, coefficients, curves, sweeps, screens) as
//! calls that return results and write their folders when asked:
//! [`session`].
//!
//! ## Example
//!
//! A uniform tight-binding chain between two leads that continue it
//! transmits every electron in its band (T = 1), and one open channel
//! conducts g_s e²/h when the Fermi level sits well inside the band:
//!
//! ```
//! use qheat::device;
//! use qheat::grid::EnergyGrid;
//! use qheat::leads::{DecimationParams, Lead};
//! use qheat::model::{Contact, Problem};
//! use qheat::scattering::Scattering;
//! use qheat::scba::{ScbaParams, Silent, solve};
//!
//! // Effective-mass chain: 20 cells of 0.25 nm, m* = 0.07, flat band edge.
//! let t = qheat::units::hopping_ev(0.07, 0.25);
//! let dev = device::chain(0.25, t, 0.0, vec![0.0; 20]);
//! let lead = Lead::Periodic { onsite: dev.onsite[0].clone(), hopping: dev.coupling[0].clone() };
//! let contact = |mu| Contact { lead: lead.clone(), fermi_level_ev: mu, temperature_k: 300.0 };
//! let problem = Problem {
//!     device: dev,
//!     left: contact(0.3),
//!     right: contact(0.3),
//!     scattering: Scattering::default(),
//!     grid: EnergyGrid::covering(0.001, 0.9, 0.002),
//!     spin_degeneracy: 2.0,
//!     decimation: DecimationParams::default(),
//!     contacts: Vec::new(),
//! };
//! let sol = solve(&problem, &ScbaParams::default(), None, &mut Silent).unwrap();
//! assert!(sol.pass.flows.iter().all(|f| (f.transmission - 1.0).abs() < 1e-9));
//! let c = qheat::thermo::coherent_coefficients(&problem, 0.0).unwrap();
//! let g0 = qheat::units::CONDUCTANCE_QUANTUM;
//! assert!((c.conductance_s / g0 - 1.0).abs() < 1e-3);
//! ```
//!
//! ## References
//!
//! 1. R. Lake, G. Klimeck, R. C. Bowen, D. Jovanovic, J. Appl. Phys. 81,
//!    7845 (1997): recursive Green's functions with scattering.
//! 2. M. P. Anantram, M. S. Lundstrom, D. E. Nikonov, Proc. IEEE 96, 1511
//!    (2008): NEGF for nanoscale devices.
//! 3. M. P. López Sancho, J. M. López Sancho, J. Rubio, J. Phys. F 15, 851
//!    (1985): decimation for lead surface Green's functions.
//! 4. D. G. Anderson, J. ACM 12, 547 (1965); H. F. Walker, P. Ni, SIAM J.
//!    Numer. Anal. 49, 1715 (2011): Anderson acceleration.
//! 5. R. Lake, S. Datta, Phys. Rev. B 46, 4757 (1992): energy exchange and
//!    conservation with inelastic scattering.
//! 6. U. Sivan, Y. Imry, Phys. Rev. B 33, 551 (1986); P. N. Butcher, J. Phys.:
//!    Condens. Matter 2, 4869 (1990): thermoelectric transport coefficients.
//! 7. F. L. Curzon, B. Ahlborn, Am. J. Phys. 43, 22 (1975): efficiency at
//!    maximum power.
//!
//! Results are model estimates: temperatures and currents that matter for
//! safety or reliability must be confirmed by measurement and by the
//! applicable standards and licensed practice.
#![warn(missing_docs)]

/// Complex double, the scalar of every Green's function.
pub type C64 = num_complex::Complex64;

pub mod case;
pub mod cluster;
pub mod device;
pub mod electrostatics;
pub mod grid;
pub mod lattice;
pub mod leads;
pub mod model;
pub mod numerics;
pub mod observables;
pub mod output;
pub mod progress;
pub mod rgf;
pub mod scattering;
pub mod scba;
pub mod selfheat;
pub mod session;
pub mod sweep;
pub mod thermo;
pub mod units;
