//! Column lists of every CSV file and the axes of every array file.

use super::{Cell, CellKind, Column, FieldDoc, FileDoc, Table};
use crate::observables::Observables;
use crate::scba::Solution;
use crate::thermo::cooler::CoolerReport;
use crate::thermo::generator::GeneratorReport;
use crate::units::ELEMENTARY_CHARGE;

/// A solved operating point and its observables: the data of a solve's
/// tables.
pub struct SolvePoint<'a> {
    /// The solution.
    pub sol: &'a Solution,
    /// Its observables.
    pub o: &'a Observables,
    /// The self-consistent electrostatics of the point, when it has one.
    pub electrostatics: Option<&'a super::summary::ElectrostaticsSummary>,
}

fn col<S>(
    name: &'static str,
    unit: &'static str,
    meaning: &'static str,
    value: fn(&S, usize) -> Cell,
) -> Column<S> {
    Column {
        name,
        unit,
        meaning,
        only_when: None,
        value,
    }
}

/// Lattice temperature of cell `cell` (K): the mean over its orbital
/// sites of the solve's lattice profile, else the bath temperature of the
/// first phonon mode, else the mean contact temperature.
pub fn cell_lattice_temperature(sol: &crate::scba::Solution, cell: usize) -> f64 {
    let p = &sol.problem;
    match &sol.lattice_temperature_k {
        Some(t) => {
            let b = p.device.orbitals;
            t[cell * b..(cell + 1) * b].iter().sum::<f64>() / b as f64
        }
        None => p
            .scattering
            .phonons
            .first()
            .map_or(0.5 * (p.left.temperature_k + p.right.temperature_k), |m| {
                m.bath_temperature_k
            }),
    }
}

/// The movers' columns of sites.csv, written when the movers' levels were
/// asked for (every `qheat solve`).
fn mover_columns<'a>() -> Vec<Column<SolvePoint<'a>>> {
    const WHEN: &str = "when the movers' levels were asked for, as every qheat solve does";
    fn movers<'b>(p: &'b SolvePoint<'_>) -> Option<&'b crate::observables::MoverLevels> {
        p.o.sites.movers.as_ref()
    }
    let present: fn(&SolvePoint<'_>) -> bool = |p| movers(p).is_some();
    vec![
        Column {
            name: "fermi_level_right_movers_ev",
            unit: "eV",
            meaning: "level µ₊ to which the electrons moving to +x are filled, from the Bloch \
                      modes of the locally uniform pair of cells (i, i+1); NaN unless \
                      movers_status is 0",
            only_when: Some((WHEN, present)),
            value: |p, i| Cell::Num(movers(p).map_or(f64::NAN, |m| m.right_ev[i])),
        },
        Column {
            name: "fermi_level_left_movers_ev",
            unit: "eV",
            meaning: "level µ₋ of the electrons moving to −x, as fermi_level_right_movers_ev",
            only_when: Some((WHEN, present)),
            value: |p, i| Cell::Num(movers(p).map_or(f64::NAN, |m| m.left_ev[i])),
        },
        Column {
            name: "movers_status",
            unit: "1",
            meaning: "how the movers' levels ended: 0 found, 1 the pair (i, i+1) is not \
                      locally uniform, 2 last cell (no pair), 3 no propagating states of one \
                      direction, 4 a match outside the search interval, 5 kernel failure",
            only_when: Some((WHEN, present)),
            value: |p, i| Cell::Int(movers(p).map_or(5, |m| m.status[i].code())),
        },
    ]
}

/// The electrostatics columns of sites.csv, written when the potential was
/// solved with the transport (`[electrostatics]`).
fn electrostatics_columns<'a>() -> Vec<Column<SolvePoint<'a>>> {
    const WHEN: &str = "with [electrostatics]";
    fn cell(v: &[f64], i: usize) -> f64 {
        v.get(i).copied().unwrap_or(f64::NAN)
    }
    let present: fn(&SolvePoint<'_>) -> bool = |p| p.electrostatics.is_some();
    vec![
        Column {
            name: "electrostatic_potential_energy_ev",
            unit: "eV",
            meaning: "electrostatic potential energy U_es = −eφ of the cell that the device's \
                      charge puts there; band_edge_ev and potential_ev include it",
            only_when: Some((WHEN, present)),
            value: |p, i| {
                Cell::Num(
                    p.electrostatics
                        .map_or(f64::NAN, |e| cell(&e.potential_energy_per_cell_ev, i)),
                )
            },
        },
        Column {
            name: "band_edge_imposed_ev",
            unit: "eV",
            meaning: "local band bottom without the computed potential: band_edge_ev − \
                      electrostatic_potential_energy_ev (the band-offset regions only)",
            only_when: Some((WHEN, present)),
            value: |p, i| {
                Cell::Num(p.electrostatics.map_or(f64::NAN, |e| {
                    p.o.sites.band_edge_ev[i] - cell(&e.potential_energy_per_cell_ev, i)
                }))
            },
        },
        Column {
            name: "electrons_poisson",
            unit: "1",
            meaning: "electrons of the cell (spin included) as the Poisson equation counts \
                      them: G^n integrated over energy with weights that follow the \
                      (E − Ec)^(−1/2) band edge of the cell between grid points; in a device \
                      without scattering whose spectrum lies inside the grid, the part filled \
                      at the lower lead's Fermi level is counted exactly on the complex \
                      energy plane instead and only the bias window stays on the grid. Its \
                      sum neutralises the doping (Gauss's law), where G^n summed point by \
                      point on the grid is off by the sampling error of the band edge (about \
                      1 %); electron_density_per_nm is this count divided by the spacing",
            only_when: Some((WHEN, present)),
            value: |p, i| {
                Cell::Num(
                    p.electrostatics
                        .map_or(f64::NAN, |e| cell(&e.electrons_per_cell, i)),
                )
            },
        },
    ]
}

/// sites.csv: one row per cell of the device.
pub fn sites<'a>() -> Table<SolvePoint<'a>> {
    let mut columns: Vec<Column<SolvePoint<'a>>> = vec![
        col("x_nm", "nm", "position of the cell", |p, i| {
            Cell::Num(p.o.sites.x_nm[i])
        }),
        col(
            "band_edge_ev",
            "eV",
            "local band bottom: the lowest energy of the periodic continuation of the cell, potential included",
            |p, i| Cell::Num(p.o.sites.band_edge_ev[i]),
        ),
        col(
            "potential_ev",
            "eV",
            "potential U(x_i) added to every orbital of the cell, bias included",
            |p, i| Cell::Num(p.sol.problem.device.potential_ev[i]),
        ),
        col(
            "fermi_level_local_ev",
            "eV",
            "local Fermi level µ_i: the level whose equilibrium occupation holds the cell's \
             electrons; NaN where fermi_level_status is not 0",
            |p, i| Cell::Num(p.o.sites.fermi_level_ev[i]),
        ),
        col(
            "fermi_level_status",
            "1",
            "how the density match ended: 0 matched, 1 below the search interval, 2 above it, \
             3 no states in the cell",
            |p, i| Cell::Int(p.o.sites.fermi_level_status[i].code() as i64),
        ),
        col(
            "lattice_power_w",
            "W",
            "power the electrons hand to the lattice in the cell (positive = lattice heated)",
            |p, i| Cell::Num(p.o.sites.lattice_power_w[i]),
        ),
        col(
            "lattice_temperature_k",
            "K",
            "lattice temperature of the cell, the mean over its sites: from the joint \
             electron–lattice loop when the lattice is damped, else the phonon bath \
             temperature (the mean contact temperature without phonons)",
            |p, i| Cell::Num(cell_lattice_temperature(p.sol, i)),
        ),
        electron_density_column(),
        col(
            "voltage_drop_v",
            "V",
            "drop of the local Fermi level to the next cell, (µ_i − µ_i+1)/e, positive where \
             the level falls along +x; 0 in the last cell. The column adds up to \
             results.interior_drop_v of summary.json; the drops into the contacts are \
             results.contact_drop_left_v and results.contact_drop_right_v",
            |p, i| Cell::Num(p.o.sites.voltage_drop_v[i]),
        ),
        col(
            "resistance_ohm",
            "Ω",
            "local resistance voltage_drop_v/(−I); with the two contact drops divided by −I \
             the column adds up to V/I; NaN at I = 0",
            |p, i| Cell::Num(p.o.sites.resistance_ohm[i]),
        ),
    ];
    columns.push(electron_temperature_column());
    columns.extend(mover_columns());
    columns.extend(electrostatics_columns());
    Table {
        file: "sites.csv",
        written_by: "`qheat solve`",
        rows: "cell of the device, left to right",
        len: |p| p.o.sites.x_nm.len(),
        columns,
    }
}

/// The electron density column of sites.csv (the Poisson count with
/// electrostatics).
fn electron_density_column<'a>() -> Column<SolvePoint<'a>> {
    col(
        "electron_density_per_nm",
        "1/nm",
        "electrons per nm, spin included: G^n summed over the energy grid; with \
         [electrostatics] the count the Poisson equation sees, electrons_poisson / spacing \
         (band-edge-aware energy weights, or the complex-plane count), so both columns agree",
        |p, i| {
            Cell::Num(match p.electrostatics {
                Some(e) => {
                    e.electrons_per_cell.get(i).copied().unwrap_or(f64::NAN)
                        / p.sol.problem.device.spacing_nm
                }
                None => p.o.sites.electron_density_per_nm[i],
            })
        },
    )
}

/// The local electron temperature column of sites.csv, written when the
/// case asks for it.
fn electron_temperature_column<'a>() -> Column<SolvePoint<'a>> {
    Column {
        name: "electron_temperature_local_k",
        unit: "K",
        meaning: "temperature of the Fermi function fitted to the cell's occupation",
        only_when: Some(("when the case asks for local electron temperatures", |p| {
            p.o.sites.electron_temperature_k.is_some()
        })),
        value: |p, i| {
            Cell::Num(
                p.o.sites
                    .electron_temperature_k
                    .as_ref()
                    .map_or(f64::NAN, |t| t[i]),
            )
        },
    }
}

/// spectrum.csv: one row per energy of the grid.
pub fn spectrum<'a>() -> Table<SolvePoint<'a>> {
    let columns: Vec<Column<SolvePoint<'a>>> = vec![
        col("energy_ev", "eV", "energy of the grid point", |p, k| {
            Cell::Num(p.o.spectrum.energy_ev[k])
        }),
        col(
            "electron_flow_left_a_per_ev",
            "A/eV",
            "electron flow per unit energy out of the left contact into the device, times e",
            |p, k| Cell::Num(ELEMENTARY_CHARGE * p.o.spectrum.flow_left[k]),
        ),
        col(
            "electron_flow_right_a_per_ev",
            "A/eV",
            "electron flow per unit energy out of the right contact into the device, times e",
            |p, k| Cell::Num(ELEMENTARY_CHARGE * p.o.spectrum.flow_right[k]),
        ),
        col(
            "electron_flow_bath_a_per_ev",
            "A/eV",
            "electron flow per unit energy out of the phonon bath into the device, times e",
            |p, k| Cell::Num(ELEMENTARY_CHARGE * p.o.spectrum.flow_bath[k]),
        ),
        Column {
            name: "transmission",
            unit: "1",
            meaning: "coherent transmission T(E)",
            only_when: Some(("without scattering", |p| {
                p.o.spectrum.transmission.is_some()
            })),
            value: |p, k| {
                Cell::Num(
                    p.o.spectrum
                        .transmission
                        .as_ref()
                        .map_or(f64::NAN, |t| t[k]),
                )
            },
        },
    ];
    Table {
        file: "spectrum.csv",
        written_by: "`qheat solve`",
        rows: "energy of the grid, ascending",
        len: |p| p.o.spectrum.energy_ev.len(),
        columns,
    }
}

/// The channel results of a solve point (panics without them: the
/// channel tables are written only when the case names channels).
fn ch<'p>(p: &'p SolvePoint<'_>) -> &'p crate::observables::channels::ChannelObservables {
    p.o.channels.as_ref().expect("channel results")
}

/// Rows of a long table over (outer, channel): outer-major.
fn channel_rows(p: &SolvePoint<'_>, outer: usize) -> usize {
    p.o.channels.as_ref().map_or(0, |c| c.names.len() * outer)
}

/// channel_sites.csv: one row per cell and channel (only when the case
/// names channels).
pub fn channel_sites<'a>() -> Table<SolvePoint<'a>> {
    Table {
        file: "channel_sites.csv",
        written_by: "`qheat solve` when the case names channels",
        rows: "cell and channel: cell 0 with every channel, then cell 1, …",
        len: |p| channel_rows(p, p.o.sites.x_nm.len()),
        columns: vec![
            col("x_nm", "nm", "position of the cell", |p, r| {
                Cell::Num(p.o.sites.x_nm[r / ch(p).names.len()])
            }),
            col(
                "channel",
                "1",
                "channel index into channels.names of summary.json",
                |p, r| Cell::Int((r % ch(p).names.len()) as i64),
            ),
            col(
                "electrons",
                "1",
                "electrons in the cell on the channel's orbitals, g_s Σ G^n ΔE/2π (spin included when g_s = 2); the channels of a cell add up to electron_density_per_nm × spacing of sites.csv",
                |p, r| {
                    let n = ch(p).names.len();
                    Cell::Num(ch(p).electrons[r % n][r / n])
                },
            ),
            col(
                "fermi_level_local_ev",
                "eV",
                "the channel's own local Fermi level: its equilibrium occupation of the channel's states holds the channel's electrons; NaN where fermi_level_status is not 0",
                |p, r| {
                    let n = ch(p).names.len();
                    Cell::Num(ch(p).fermi_level_ev[r % n][r / n])
                },
            ),
            col(
                "fermi_level_status",
                "1",
                "how the channel's density match ended, coded as in sites.csv",
                |p, r| {
                    let n = ch(p).names.len();
                    Cell::Int(ch(p).fermi_level_status[r % n][r / n].code() as i64)
                },
            ),
            col(
                "lattice_power_w",
                "W",
                "power the electrons hand to the lattice on the channel's orbitals in the cell; the channels of a cell add up to lattice_power_w of sites.csv",
                |p, r| {
                    let n = ch(p).names.len();
                    Cell::Num(ch(p).cell_lattice_power_w[r % n][r / n])
                },
            ),
        ],
    }
}

/// channel_spectrum.csv: one row per energy and channel (only when the
/// case names channels).
pub fn channel_spectrum<'a>() -> Table<SolvePoint<'a>> {
    Table {
        file: "channel_spectrum.csv",
        written_by: "`qheat solve` when the case names channels",
        rows: "energy and channel: the lowest energy with every channel, then the next, …",
        len: |p| channel_rows(p, p.o.spectrum.energy_ev.len()),
        columns: vec![
            col("energy_ev", "eV", "energy of the grid point", |p, r| {
                Cell::Num(p.o.spectrum.energy_ev[r / ch(p).names.len()])
            }),
            col(
                "channel",
                "1",
                "channel index into channels.names of summary.json",
                |p, r| Cell::Int((r % ch(p).names.len()) as i64),
            ),
            col(
                "electron_flow_left_a_per_ev",
                "A/eV",
                "electron flow per unit energy out of the left contact into the device in the channel, e·(g_s/h) Re Tr[P_c(Σ^in_1 A − Γ_1 G^n)] on the first cell; the channels add up to the column of spectrum.csv",
                |p, r| {
                    let n = ch(p).names.len();
                    Cell::Num(ELEMENTARY_CHARGE * ch(p).flow_left[r % n][r / n])
                },
            ),
            col(
                "electron_flow_right_a_per_ev",
                "A/eV",
                "the same out of the right contact (last cell)",
                |p, r| {
                    let n = ch(p).names.len();
                    Cell::Num(ELEMENTARY_CHARGE * ch(p).flow_right[r % n][r / n])
                },
            ),
            Column {
                name: "transmission",
                unit: "1",
                meaning: "coherent transmission of the channel, projected at the receiving (right) \
                          lead: Re Tr[P_c Γ_2 G^r_N1 Γ_1 G^a_1N], the part of the flux from the left \
                          lead that arrives in the channel; the channels add up to T(E)",
                only_when: Some(("without scattering", |p| {
                    p.o.channels
                        .as_ref()
                        .is_some_and(|c| c.transmission.is_some())
                })),
                value: |p, r| {
                    let n = ch(p).names.len();
                    Cell::Num(
                        ch(p)
                            .transmission
                            .as_ref()
                            .map_or(f64::NAN, |t| t[r % n][r / n]),
                    )
                },
            },
        ],
    }
}

/// convergence.csv: one row per Born iteration.
pub fn convergence<'a>() -> Table<SolvePoint<'a>> {
    Table {
        file: "convergence.csv",
        written_by: "`qheat solve`",
        rows: "Born iteration (no rows without scattering)",
        len: |p| p.sol.report.history.len(),
        columns: vec![
            col("iteration", "1", "iteration number, from 1", |p, i| {
                Cell::Int(p.sol.report.history[i].iteration as i64)
            }),
            col(
                "residual",
                "1",
                "relative change of the in- and out-scattering self-energies between the input and output of the iteration",
                |p, i| Cell::Num(p.sol.report.history[i].residual),
            ),
            col(
                "current_left_a",
                "A",
                "current I_1 out of the left contact, with the iteration's input self-energy",
                |p, i| Cell::Num(p.sol.report.history[i].current_left_a),
            ),
            col(
                "current_right_a",
                "A",
                "current I_2 out of the right contact, with the iteration's input self-energy",
                |p, i| Cell::Num(p.sol.report.history[i].current_right_a),
            ),
            col(
                "current_change",
                "1",
                "largest change of a terminal current since the last iteration, over tolerance·|I| + current floor (converged when ≤ 1)",
                |p, i| Cell::Num(p.sol.report.history[i].current_change),
            ),
        ],
    }
}

/// The phonon spectrum of a case's lattice at one temperature.
pub struct PhononPoints<'a> {
    /// Ξ on the quadrature nodes.
    pub spectrum: &'a crate::lattice::PhononSpectrum,
    /// Temperature of the κ_ph integrand (K).
    pub temperature_k: f64,
}

/// phonon_spectrum.csv: one row per frequency node.
pub fn phonon_spectrum<'a>() -> Table<PhononPoints<'a>> {
    type P<'b> = PhononPoints<'b>;
    Table {
        file: "phonon_spectrum.csv",
        written_by: "`qheat solve`, `qheat coefficients` (cases with a `[lattice]`)",
        rows: "frequency node of the κph quadrature, ascending (nodes cluster at the lead subband edges)",
        len: |p| p.spectrum.len(),
        columns: vec![
            col::<P<'_>>(
                "omega_rad_per_ps",
                "rad/ps",
                "angular frequency ω",
                |p, i| Cell::Num(p.spectrum.omega_rad_per_ps[i]),
            ),
            col("energy_mev", "meV", "phonon energy ħω", |p, i| {
                Cell::Num(crate::case::phonon_energy_mev(
                    p.spectrum.omega_rad_per_ps[i],
                ))
            }),
            col(
                "transmission",
                "1",
                "phonon transmission Ξ(ω) between the two phonon leads",
                |p, i| Cell::Num(p.spectrum.transmission[i]),
            ),
            col(
                "kappa_integrand_w_per_k_per_rad_per_ps",
                "W/K per rad/ps",
                "κph integrand Ξ(ω) ħω ∂n/∂T /2π at the operating temperature (summary.json `lattice.temperature_k`)",
                |p, i| {
                    let w = p.spectrum.omega_rad_per_ps[i];
                    Cell::Num(
                        p.spectrum.transmission[i]
                            * crate::lattice::conductance_density(w, p.temperature_k),
                    )
                },
            ),
            col(
                "weight_rad_per_ps",
                "rad/ps",
                "quadrature weight: κph = Σ weight × integrand",
                |p, i| Cell::Num(p.spectrum.weight_rad_per_ps[i]),
            ),
        ],
    }
}

/// generator.csv: one row per load voltage.
pub fn generator() -> Table<GeneratorReport> {
    type G = GeneratorReport;
    Table {
        file: "generator.csv",
        written_by: "`qheat generator`",
        rows: "load voltage, ascending",
        len: |r| r.curve.len(),
        columns: vec![
            col::<G>(
                "voltage_v",
                "V",
                "voltage V = V_1 − V_2 across the device",
                |r, i| Cell::Num(r.curve[i].voltage_v),
            ),
            col(
                "current_a",
                "A",
                "current I_1 into the device from the left (hot) lead",
                |r, i| Cell::Num(r.curve[i].current_a),
            ),
            col(
                "power_w",
                "W",
                "power delivered to the load, −I·V",
                |r, i| Cell::Num(r.curve[i].power_w),
            ),
            col(
                "heat_current_hot_w",
                "W",
                "heat drawn from the hot side: the electrons' heat current out of the hot lead plus the lattice's heat leak (summary.json `lattice_heat_leak_w`)",
                |r, i| Cell::Num(r.curve[i].heat_current_hot_w),
            ),
            col(
                "efficiency",
                "1",
                "power / heat drawn from the hot side",
                |r, i| Cell::Num(r.curve[i].efficiency),
            ),
            col(
                "converged",
                "-",
                "whether the point's Born loop converged",
                |r, i| Cell::Bool(r.curve[i].converged),
            ),
            Column {
                name: "potential_drop_v",
                unit: "V",
                meaning: "computed drop φ(first cell) − φ(last cell) of the potential solved at \
                          the point ([electrostatics]: the potential is solved at every point)",
                only_when: Some((CURVE_ES, |r: &G| r.electrostatics.is_some())),
                value: |r, i| Cell::Num(r.curve[i].potential_drop_v.unwrap_or(f64::NAN)),
            },
            Column {
                name: "outer_iterations",
                unit: "1",
                meaning: "outer iterations of the potential at the point",
                only_when: Some((CURVE_ES, |r: &G| r.electrostatics.is_some())),
                value: |r, i| Cell::Int(r.curve[i].outer_iterations.unwrap_or(0) as i64),
            },
        ],
    }
}

/// When the curve tables carry the columns of the potential.
const CURVE_ES: &str = "with [electrostatics]";

/// cooler.csv: one row per bias voltage.
pub fn cooler() -> Table<CoolerReport> {
    type C = CoolerReport;
    Table {
        file: "cooler.csv",
        written_by: "`qheat cooler`",
        rows: "bias voltage, ascending",
        len: |r| r.curve.len(),
        columns: vec![
            col::<C>(
                "voltage_v",
                "V",
                "voltage V = V_1 − V_2 across the device",
                |r, i| Cell::Num(r.curve[i].voltage_v),
            ),
            col(
                "current_a",
                "A",
                "current I_1 into the device from the left lead",
                |r, i| Cell::Num(r.curve[i].current_a),
            ),
            col(
                "cooling_power_w",
                "W",
                "heat current out of the cold lead into the device, less the lattice's heat leak into the cold lead (summary.json `lattice_heat_leak_w`)",
                |r, i| Cell::Num(r.curve[i].cooling_power_w),
            ),
            col(
                "input_power_w",
                "W",
                "electrical input power I·V",
                |r, i| Cell::Num(r.curve[i].input_power_w),
            ),
            col(
                "heat_current_hot_w",
                "W",
                "heat drawn from the hot side: the electrons' heat current out of the hot lead plus the lattice's heat leak (summary.json `lattice_heat_leak_w`)",
                |r, i| Cell::Num(r.curve[i].heat_current_hot_w),
            ),
            col(
                "cop",
                "1",
                "coefficient of performance, cooling power / input power; NaN where either is \
                 not positive",
                |r, i| Cell::Num(r.curve[i].cop),
            ),
            col(
                "converged",
                "-",
                "whether the point's Born loop converged",
                |r, i| Cell::Bool(r.curve[i].converged),
            ),
            Column {
                name: "potential_drop_v",
                unit: "V",
                meaning: "computed drop φ(first cell) − φ(last cell) of the potential solved at \
                          the point ([electrostatics]: the potential is solved at every point)",
                only_when: Some((CURVE_ES, |r: &CoolerReport| r.electrostatics.is_some())),
                value: |r, i| Cell::Num(r.curve[i].potential_drop_v.unwrap_or(f64::NAN)),
            },
            Column {
                name: "outer_iterations",
                unit: "1",
                meaning: "outer iterations of the potential at the point",
                only_when: Some((CURVE_ES, |r: &CoolerReport| r.electrostatics.is_some())),
                value: |r, i| Cell::Int(r.curve[i].outer_iterations.unwrap_or(0) as i64),
            },
        ],
    }
}

/// A documented column of the grid tables (sweep.csv, screen.csv,
/// ranking.csv): name, unit, kind, meaning.
pub type GridColumn = (&'static str, &'static str, CellKind, &'static str);

/// Every result column a grid table can hold, after its axis columns.
pub const GRID_COLUMNS: [GridColumn; 37] = [
    (
        "rank",
        "1",
        CellKind::Int,
        "place in the ranking, 1 = best (ranking.csv only)",
    ),
    (
        "point",
        "1",
        CellKind::Int,
        "grid index of the point (ranking.csv only)",
    ),
    (
        "voltage_v",
        "V",
        CellKind::Num,
        "voltage V = V_1 − V_2 (sweep)",
    ),
    (
        "current_a",
        "A",
        CellKind::Num,
        "current I = I_1 out of the left contact (sweep)",
    ),
    (
        "current_right_a",
        "A",
        CellKind::Num,
        "current I_2 out of the right contact (sweep)",
    ),
    (
        "heat_current_left_w",
        "W",
        CellKind::Num,
        "heat current out of the left contact (sweep)",
    ),
    (
        "heat_current_right_w",
        "W",
        CellKind::Num,
        "heat current out of the right contact (sweep)",
    ),
    (
        "energy_current_left_w",
        "W",
        CellKind::Num,
        "energy current out of the left contact (sweep)",
    ),
    (
        "energy_current_right_w",
        "W",
        CellKind::Num,
        "energy current out of the right contact (sweep)",
    ),
    (
        "lattice_power_w",
        "W",
        CellKind::Num,
        "power handed to the lattice, all cells (sweep)",
    ),
    (
        "electrical_power_w",
        "W",
        CellKind::Num,
        "electrical power I·V (sweep)",
    ),
    (
        "conductance_s",
        "S",
        CellKind::Num,
        "conductance I/V, NaN at V = 0 (sweep); linear-response G (screen)",
    ),
    (
        "ledger_charge_relative",
        "1",
        CellKind::Num,
        "charge residual of the ledger, relative (sweep)",
    ),
    (
        "ledger_energy_relative",
        "1",
        CellKind::Num,
        "energy identity of the ledger, relative (sweep)",
    ),
    (
        "ledger_heat_relative",
        "1",
        CellKind::Num,
        "heat residual of the ledger, relative (sweep)",
    ),
    (
        "iterations",
        "1",
        CellKind::Int,
        "Born iterations done (sweep)",
    ),
    (
        "final_residual",
        "1",
        CellKind::Num,
        "residual of the last Born iteration (sweep)",
    ),
    (
        "potential_drop_v",
        "V",
        CellKind::Num,
        "computed drop φ(first cell) − φ(last cell) of the potential solved at the point (sweep, with [electrostatics])",
    ),
    (
        "outer_iterations",
        "1",
        CellKind::Int,
        "outer iterations of the potential at the point (sweep, with [electrostatics])",
    ),
    (
        "potential_change_ev",
        "eV",
        CellKind::Num,
        "last Newton update of the potential at the point (sweep, with [electrostatics])",
    ),
    (
        "poisson_residual",
        "1",
        CellKind::Num,
        "largest charge imbalance of a cell, electrons (sweep, with [electrostatics])",
    ),
    (
        "fermi_level_ev",
        "eV",
        CellKind::Num,
        "reference Fermi level µ (screen)",
    ),
    (
        "temperature_k",
        "K",
        CellKind::Num,
        "reference temperature (screen, by ZT or power factor)",
    ),
    (
        "seebeck_v_per_k",
        "V/K",
        CellKind::Num,
        "Seebeck coefficient S (screen)",
    ),
    (
        "thermal_conductance_w_per_k",
        "W/K",
        CellKind::Num,
        "electronic thermal conductance κe (screen)",
    ),
    (
        "power_factor_w_per_k2",
        "W/K²",
        CellKind::Num,
        "power factor S²G (screen)",
    ),
    (
        "phonon_conductance_w_per_k",
        "W/K",
        CellKind::Num,
        "phonon thermal conductance κph used for ZT (screen; its source is `phonon_conductance_source` in summary.json)",
    ),
    ("zt", "1", CellKind::Num, "figure of merit ZT (screen)"),
    (
        "kelvin_residual",
        "1",
        CellKind::Num,
        "Kelvin (Onsager) residual (screen)",
    ),
    (
        "max_cooling_power_w",
        "W",
        CellKind::Num,
        "largest cooling power on the cooler curve (screen, by cooling)",
    ),
    (
        "voltage_at_max_v",
        "V",
        CellKind::Num,
        "voltage of the largest cooling power (screen, by cooling)",
    ),
    (
        "current_at_max_a",
        "A",
        CellKind::Num,
        "current of the largest cooling power (screen, by cooling)",
    ),
    (
        "cop_at_max",
        "1",
        CellKind::Num,
        "COP at the largest cooling power (screen, by cooling)",
    ),
    (
        "carnot_cop",
        "1",
        CellKind::Num,
        "Carnot COP of the two lead temperatures (screen, by cooling)",
    ),
    (
        "max_at_range_end",
        "-",
        CellKind::Bool,
        "whether the largest cooling power sits at the end of the curve's range, still rising: a lower bound (screen, by cooling)",
    ),
    (
        "converged",
        "-",
        CellKind::Bool,
        "whether the point's Born loops (and with [electrostatics] its potential) converged",
    ),
    (
        "<axis key>",
        "unit of the key",
        CellKind::Num,
        "value of a varied case key; one column per --vary, first",
    ),
];

/// The kind of a grid-table column (axis columns are numbers).
pub fn grid_kind(name: &str) -> CellKind {
    GRID_COLUMNS
        .iter()
        .find(|c| c.0 == name)
        .map_or(CellKind::Num, |c| c.2)
}

/// A grid table (rows of stored numbers) as CSV bytes, each column
/// written as its kind: flags `true`/`false`, counts as whole numbers.
pub fn grid_csv(columns: &[String], rows: &[Vec<f64>]) -> Vec<u8> {
    let kinds: Vec<CellKind> = columns.iter().map(|c| grid_kind(c)).collect();
    let headers: Vec<&str> = columns.iter().map(String::as_str).collect();
    super::super::cells_csv_bytes(
        &headers,
        rows.iter()
            .map(|r| r.iter().zip(&kinds).map(|(v, k)| k.cell(*v)).collect()),
    )
}

fn grid_doc(file: &str, written_by: &'static str, about: &str) -> FileDoc {
    let mut fields: Vec<FieldDoc> = GRID_COLUMNS
        .iter()
        .map(|(n, u, _, m)| FieldDoc {
            name: n.to_string(),
            unit: u,
            meaning: m.to_string(),
        })
        .collect();
    fields.rotate_right(1);
    FileDoc {
        file: file.into(),
        written_by,
        about: about.into(),
        fields,
    }
}

/// Documentation of every CSV file.
pub fn table_docs() -> Vec<FileDoc> {
    let mut docs = vec![
        sites().doc(),
        spectrum().doc(),
        convergence().doc(),
        generator().doc(),
        cooler().doc(),
        phonon_spectrum().doc(),
    ];
    docs.push(channel_sites().doc());
    docs.push(channel_spectrum().doc());
    docs.push(grid_doc(
        "sweep.csv",
        "`qheat sweep`",
        "One row per grid point in grid order (row-major, last axis fastest): the axis \
         columns, then the sweep's columns marked (sweep) below.",
    ));
    docs.push(grid_doc(
        "screen.csv",
        "`qheat screen`",
        "One row per grid point in grid order: the axis columns, then the columns marked \
         (screen) below for the chosen --rank.",
    ));
    docs.push(grid_doc(
        "ranking.csv",
        "`qheat screen`",
        "The rows of screen.csv best first, led by `rank` and `point`; unconverged points \
         and points without a value rank last.",
    ));
    docs
}

/// Name of the bond-current file with its axes.
pub const BOND_CURRENT_NPZ: &str = "bond_current.npz";

/// Name of the occupation-map file with its axes.
pub const OCCUPATION_NPZ: &str = "occupation.npz";

/// Documentation of the occupation-map file.
fn occupation_doc(f: impl Fn(&str, &'static str, &str) -> FieldDoc) -> FileDoc {
    FileDoc {
        file: OCCUPATION_NPZ.into(),
        written_by: "`qheat solve`",
        about: "How full the states of each cell are at each energy, with its axes, as named \
                arrays."
            .into(),
        fields: vec![
            f(
                "map",
                "1",
                "occupation f(x, E) = Σ_o G^n_ii / Σ_o A_ii (orbitals of the cell summed): \
                 between 0 (empty) and 1 (full); the Fermi function of the contacts in \
                 equilibrium; NaN where the cell's spectral weight is below 1e-8 of the \
                 largest in the map (no states to fill); shape (cells, energies), axis 0 the \
                 cell, axis 1 the energy",
            ),
            f(
                "x_nm",
                "nm",
                "position of each cell, length cells: the coordinate of axis 0 of `map`",
            ),
            f(
                "energy_ev",
                "eV",
                "energy of each grid point, ascending: the coordinate of axis 1 of `map`",
            ),
        ],
    }
}

/// Documentation of every array file.
pub fn array_docs() -> Vec<FileDoc> {
    let f = |name: &str, unit: &'static str, meaning: &str| FieldDoc {
        name: name.into(),
        unit,
        meaning: meaning.into(),
    };
    let map = "energy-resolved bond current: electron flow per unit energy from cell i to \
               cell i+1 times e, positive for electrons moving to +x; shape (cells − 1, \
               energies), axis 0 the bond, axis 1 the energy";
    vec![
        FileDoc {
            file: "bond_current.npy".into(),
            written_by: "`qheat solve`",
            about: "The bond-current map alone (kept for readers of earlier results); its axes are in bond_current.npz.".into(),
            fields: vec![f("(the array)", "A/eV", map)],
        },
        FileDoc {
            file: BOND_CURRENT_NPZ.into(),
            written_by: "`qheat solve`",
            about: "The bond-current map with its axes, as named arrays.".into(),
            fields: vec![
                f("map", "A/eV", map),
                f(
                    "bond_x_nm",
                    "nm",
                    "position of each bond (midway between cell i and i+1), length cells − 1: \
                     the coordinate of axis 0 of `map`",
                ),
                f(
                    "energy_ev",
                    "eV",
                    "energy of each grid point, ascending: the coordinate of axis 1 of `map`",
                ),
            ],
        },
        occupation_doc(f),
        FileDoc {
            file: "self_energy_retarded.npy".into(),
            written_by: "`qheat solve` with scattering",
            about: "Stored for warm starts (`--warm-start DIR`).".into(),
            fields: vec![f(
                "(the array)",
                "eV",
                "retarded scattering self-energy Σ^r_0 (complex), one value per orbital \
                 site; shape (energies, sites), axis 0 the energy of spectrum.csv, axis 1 \
                 the orbital site (cell-major: cell · orbitals + orbital)",
            )],
        },
        FileDoc {
            file: "lattice_temperature.npy".into(),
            written_by: "`qheat solve` when the damped lattice heats up (the joint loop)",
            about: "Stored for warm starts (`--warm-start DIR` starts the joint loop from it)."
                .into(),
            fields: vec![f(
                "(the array)",
                "K",
                "lattice temperature of each orbital site used by the last Born solve \
                 (the self-consistent profile), shape (sites), cell-major as \
                 self_energy_retarded.npy",
            )],
        },
        FileDoc {
            file: "self_energy_in.npy".into(),
            written_by: "`qheat solve` with scattering",
            about: "Stored for warm starts (`--warm-start DIR`).".into(),
            fields: vec![f(
                "(the array)",
                "eV",
                "in-scattering self-energy Σ^in_0 = −iΣ^<_0 (real), one value per orbital \
                 site; shape (energies, sites) as self_energy_retarded.npy",
            )],
        },
    ]
}
