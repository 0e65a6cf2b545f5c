//! The keys of every summary.json, with units and meanings, and the sign
//! conventions they follow.

use super::{FieldDoc, FileDoc};

/// A documented key: path, unit, meaning.
pub type Key = (&'static str, &'static str, &'static str);

/// Sign conventions shared by every file (Markdown).
pub const CONVENTIONS: &str = "## Conventions\n\n\
- Lead 1 is the left contact, lead 2 the right one; +x points from left to right.\n\
- The applied voltage is V = V_1 − V_2, with the lead Fermi levels µ_1,2 = µ ∓ eV/2, so \
  µ_1 − µ_2 = −eV (e > 0).\n\
- Currents, energy currents and heat currents of a contact are counted positive out of \
  that contact into the device; the current I is I_1.\n\
- Lattice power is positive where the electrons heat the lattice.\n\
- **Voltage drops** are drops of the (local) Fermi level, in volts: the drop from a to b is \
  (µ_a − µ_b)/e, positive where the level falls along +x. The same formula holds for both \
  bias signs, so the drops change sign with the bias. The drop into the left contact \
  (µ_1 − µ_first)/e, the per-cell drops of sites.csv (which add up to the drop across the \
  device, (µ_first − µ_last)/e) and the drop into the right contact (µ_last − µ_2)/e \
  together add up to (µ_1 − µ_2)/e = −V.\n";

/// Keys every summary starts with.
const HEADER: [Key; 5] = [
    ("program.name", "-", "`qheat`"),
    (
        "program.version",
        "-",
        "version of the program that wrote the file",
    ),
    (
        "kind",
        "-",
        "the command: solve, coefficients, sweep, screen, generator or cooler",
    ),
    ("case_name", "-", "name of the case"),
    ("case_file", "-", "case file as given on the command line"),
];

const RUN: [Key; 4] = [
    ("threads", "1", "worker threads used"),
    ("warnings", "-", "warnings from resolving the case"),
    ("notes", "-", "notes from resolving the case"),
    (
        "resolved_case",
        "-",
        "the case as TOML text, after any edits from the command line",
    ),
];

const GRID: [Key; 3] = [
    ("count", "1", "number of energies"),
    ("min_ev", "eV", "lowest energy"),
    ("step_ev", "eV", "energy step"),
];

const COMMON_GRID: [Key; 7] = [
    ("grid.count", "1", "number of energies of the shared grid"),
    ("grid.min_ev", "eV", "lowest energy of the shared grid"),
    ("grid.step_ev", "eV", "energy step of the shared grid"),
    ("max_ev", "eV", "highest energy of the shared grid"),
    (
        "phonon_energies_ev",
        "eV",
        "phonon energies the grid resolves in whole steps",
    ),
    ("operating_points", "1", "runs that share the grid"),
    (
        "case_keys",
        "-",
        "energy-grid keys to put into the case to reproduce the grid (step_ev, min_ev, max_ev in eV), or null when the case's own grid was used",
    ),
];

const COEFFICIENTS: [Key; 13] = [
    ("fermi_level_ev", "eV", "reference Fermi level µ"),
    ("temperature_k", "K", "reference temperature T"),
    ("conductance_s", "S", "electrical conductance G"),
    ("seebeck_v_per_k", "V/K", "Seebeck coefficient S"),
    ("peltier_v", "V", "Peltier coefficient Π"),
    (
        "thermal_conductance_w_per_k",
        "W/K",
        "electronic thermal conductance κe at zero current",
    ),
    (
        "lorenz_ratio",
        "1",
        "Lorenz ratio κe/(G T L0), L0 = (π²/3)(k_B/e)²",
    ),
    ("power_factor_w_per_k2", "W/K²", "power factor S²G"),
    (
        "phonon_conductance_w_per_k",
        "W/K",
        "phonon thermal conductance κph used for ZT",
    ),
    (
        "phonon_conductance_source",
        "-",
        "where κph came from: lattice (computed from [lattice] at T), given (thermal.phonon_conductance_w_per_k) or none (κph = 0: ZT is an upper bound)",
    ),
    ("zt", "1", "figure of merit ZT = S²GT/(κe + κph)"),
    (
        "kelvin_residual",
        "1",
        "Kelvin relation residual |Π − TS|/|Π| (Onsager residual for finite differences)",
    ),
    ("method", "-", "how the coefficients were obtained"),
];

const SOLVE: [Key; 46] = [
    (
        "converged",
        "-",
        "whether the Born loop met its tolerance (always true without scattering)",
    ),
    (
        "trustworthy",
        "-",
        "whether the results may be used (false when not converged)",
    ),
    ("coherent", "-", "true without scattering inside the device"),
    (
        "hermitian_part",
        "-",
        "Hermitian part of the phonon self-energy: include or neglect",
    ),
    (
        "operating_point.fermi_level_left_ev",
        "eV",
        "Fermi level µ_1 of the left lead",
    ),
    (
        "operating_point.fermi_level_right_ev",
        "eV",
        "Fermi level µ_2 of the right lead",
    ),
    (
        "operating_point.temperature_left_k",
        "K",
        "temperature of the left lead",
    ),
    (
        "operating_point.temperature_right_k",
        "K",
        "temperature of the right lead",
    ),
    (
        "operating_point.voltage_v",
        "V",
        "applied voltage V = V_1 − V_2",
    ),
    ("device.cells", "1", "cells of the device"),
    ("device.orbitals_per_cell", "1", "orbitals per cell"),
    ("device.spacing_nm", "nm", "cell spacing"),
    ("device.spin_degeneracy", "1", "spin degeneracy g_s"),
    (
        "phonons[].requested_energy_ev",
        "eV",
        "phonon energy ħω asked for",
    ),
    (
        "phonons[].energy_ev",
        "eV",
        "phonon energy used: a whole number of grid steps",
    ),
    ("phonons[].grid_steps", "1", "ħω in grid steps"),
    (
        "phonons[].bath_temperature_k",
        "K",
        "temperature of the phonon bath",
    ),
    (
        "phonons[].max_coupling_ev2",
        "eV²",
        "largest coupling of the mode",
    ),
    ("results.voltage_v", "V", "applied voltage V"),
    ("results.current_a", "A", "current I = I_1"),
    (
        "results.current_left_a",
        "A",
        "current I_1 out of the left contact",
    ),
    (
        "results.current_right_a",
        "A",
        "current I_2 out of the right contact",
    ),
    (
        "results.energy_current_left_w",
        "W",
        "energy current out of the left contact",
    ),
    (
        "results.energy_current_right_w",
        "W",
        "energy current out of the right contact",
    ),
    (
        "results.heat_current_left_w",
        "W",
        "heat current J_Q,1 out of the left contact",
    ),
    (
        "results.heat_current_right_w",
        "W",
        "heat current J_Q,2 out of the right contact",
    ),
    (
        "results.lattice_power_w",
        "W",
        "power handed to the lattice, all cells (electron side ΣP_i)",
    ),
    (
        "results.lattice_power_phonon_side_w",
        "W",
        "power handed to the lattice, all modes (phonon side ΣP_m); equals the electron side at the fixed point",
    ),
    (
        "results.electrical_power_w",
        "W",
        "electrical power I·V the contacts deliver",
    ),
    (
        "results.conductance_s",
        "S",
        "conductance I/V; null at V = 0",
    ),
    (
        "results.contact_drop_left_v",
        "V",
        "drop of the Fermi level from the left contact into the first cell, (µ_1 − µ_first)/e",
    ),
    (
        "results.interior_drop_v",
        "V",
        "drop of the local Fermi level across the device, (µ_first − µ_last)/e: the sum of voltage_drop_v in sites.csv",
    ),
    (
        "results.contact_drop_right_v",
        "V",
        "drop of the Fermi level from the last cell into the right contact, (µ_last − µ_2)/e",
    ),
    (
        "results.largest_drop_v.cell",
        "1",
        "cell (from 0) with the largest drop to its next cell in magnitude (the whole object is null for a one-cell device)",
    ),
    ("results.largest_drop_v.x_nm", "nm", "position of that cell"),
    (
        "results.largest_drop_v.value",
        "V",
        "its drop to the next cell",
    ),
    (
        "results.hottest_cell_w.cell",
        "1",
        "cell with the largest lattice power (the whole object is null without scattering)",
    ),
    ("results.hottest_cell_w.x_nm", "nm", "position of that cell"),
    ("results.hottest_cell_w.value", "W", "its lattice power"),
    (
        "results.coolest_cell_w.cell",
        "1",
        "cell with the smallest (most negative) lattice power (null without scattering)",
    ),
    ("results.coolest_cell_w.x_nm", "nm", "position of that cell"),
    ("results.coolest_cell_w.value", "W", "its lattice power"),
    (
        "phonon_modes[].energy_ev",
        "eV",
        "phonon energy of the mode",
    ),
    (
        "phonon_modes[].emission_per_s",
        "1/s",
        "phonons emitted per second",
    ),
    (
        "phonon_modes[].absorption_per_s",
        "1/s",
        "phonons absorbed per second",
    ),
    (
        "phonon_modes[].power_w",
        "W",
        "power the electrons hand to the mode (emission minus absorption times ħω)",
    ),
];

const LEDGER: [Key; 19] = [
    ("ledger.charge_a", "A", "charge residual I_1 + I_2"),
    (
        "ledger.charge_scale_a",
        "A",
        "scale of the charge residual: max(|I_1|, current floor)",
    ),
    (
        "ledger.charge_relative",
        "1",
        "charge residual over its scale",
    ),
    (
        "ledger.energy_w",
        "W",
        "energy identity J_E,1 + J_E,2 − ΣP_i (bookkeeping check)",
    ),
    (
        "ledger.energy_relative",
        "1",
        "energy identity over the gross energy flow",
    ),
    ("ledger.lattice_w", "W", "lattice residual ΣP_m − ΣP_i"),
    (
        "ledger.lattice_relative",
        "1",
        "lattice residual over power_scale_w",
    ),
    (
        "ledger.leads_lattice_w",
        "W",
        "leads against lattice J_E,1 + J_E,2 − ΣP_m",
    ),
    (
        "ledger.leads_lattice_relative",
        "1",
        "leads against lattice over power_scale_w",
    ),
    (
        "ledger.power_scale_w",
        "W",
        "scale of the lattice residuals (see ledger.power_scale)",
    ),
    (
        "ledger.heat_w",
        "W",
        "heat residual ΣP_i − (I·V + J_Q,1 + J_Q,2)",
    ),
    (
        "ledger.heat_relative",
        "1",
        "heat residual over the gross heat flow",
    ),
    (
        "ledger.compares.charge",
        "-",
        "what the charge entry compares",
    ),
    (
        "ledger.compares.energy",
        "-",
        "what the energy entry compares",
    ),
    ("ledger.compares.heat", "-", "what the heat entry compares"),
    (
        "ledger.compares.lattice",
        "-",
        "what the lattice entry compares",
    ),
    (
        "ledger.compares.leads_lattice",
        "-",
        "what the leads-lattice entry compares",
    ),
    ("ledger.power_scale", "-", "what power_scale_w is"),
    (
        "ledger.worst_relative",
        "1",
        "largest relative residual of the physics entries (named in worst_relative_of)",
    ),
];

const SOLVE_TAIL: [Key; 25] = [
    (
        "ledger.worst_relative_of",
        "-",
        "the entries worst_relative is taken over",
    ),
    (
        "local_fermi_level.search_interval_ev",
        "eV",
        "interval searched for µ_i: the energy grid widened by 60 k_B T on each side",
    ),
    (
        "local_fermi_level.outside_interval",
        "1",
        "cells whose match lies outside the interval",
    ),
    (
        "local_fermi_level.cells_below_interval",
        "1",
        "those below it (cell indices)",
    ),
    (
        "local_fermi_level.cells_above_interval",
        "1",
        "those above it (cell indices)",
    ),
    (
        "local_fermi_level.cells_without_states",
        "1",
        "cells without states (cell indices)",
    ),
    (
        "local_fermi_level.flagged_value",
        "-",
        "what flagged cells hold in sites.csv",
    ),
    (
        "scba.converged",
        "-",
        "whether the Born loop met its tolerance",
    ),
    (
        "scba.iterations",
        "1",
        "Born iterations done (0 without scattering)",
    ),
    (
        "scba.history[]",
        "-",
        "every iteration, with the keys of convergence.csv and `step`",
    ),
    (
        "scba.history[].step",
        "-",
        "update used next: linear, anderson or restart",
    ),
    (
        "scba.params.tolerance",
        "1",
        "relative tolerance of the Born loop",
    ),
    (
        "scba.params.current_floor_a",
        "A",
        "current below which changes count as converged",
    ),
    (
        "scba.params.max_iterations",
        "1",
        "most Born iterations allowed",
    ),
    ("scba.params.energy_order", "-", "energy order asked for"),
    (
        "scba.params.mixing.kind",
        "-",
        "mixing of successive self-energies",
    ),
    ("scba.params.mixing.damping", "1", "mixing factor"),
    (
        "scba.params.mixing.depth",
        "1",
        "history depth of Anderson mixing",
    ),
    (
        "scba.params.history",
        "-",
        "storage of the Anderson history: compact (f32) or full (f64)",
    ),
    (
        "scba.hermitian_part",
        "-",
        "whether the Hermitian part of the phonon self-energy was included",
    ),
    (
        "scba.warm_start",
        "-",
        "whether the loop started from a stored self-energy",
    ),
    (
        "scba.energy_order",
        "-",
        "energy order used: simultaneous or red-black",
    ),
    (
        "scba.params.coarse_start",
        "-",
        "coarse start setting: auto, on or off",
    ),
    (
        "scba.coarse_levels",
        "-",
        "coarse levels run before the full grid, coarsest first: factor (every k-th energy), energies, iterations, converged",
    ),
    (
        "grid",
        "-",
        "the energy grid: count, min_ev (eV), step_ev (eV)",
    ),
];

const FAILED: [Key; 6] = [
    ("converged", "-", "false"),
    (
        "trustworthy",
        "-",
        "false: nothing trustworthy was computed",
    ),
    ("error", "-", "the error"),
    ("fault.kind", "-", "what failed"),
    ("fault.energy_ev", "eV", "energy of the failure, or null"),
    ("fault.cell", "1", "cell of the failure, or null"),
];

const GRID_RUN: [Key; 17] = [
    (
        "axes[].keys",
        "-",
        "case keys set to the axis values (several move together)",
    ),
    ("axes[].start", "unit of the key", "first value"),
    ("axes[].stop", "unit of the key", "last value"),
    ("axes[].count", "1", "number of values, evenly spaced"),
    (
        "order",
        "-",
        "order of the points: row-major, last axis fastest",
    ),
    ("points", "1", "points of the grid"),
    ("computed_this_run", "1", "points computed by this run"),
    ("from_earlier_runs", "1", "points read from the point store"),
    ("parallel_lines", "1", "grid lines run at once"),
    (
        "point_store",
        "-",
        "folder of the stored points (kept for resuming)",
    ),
    (
        "unconverged_points",
        "1",
        "points whose Born loop did not converge (grid indices)",
    ),
    ("converged", "-", "whether every point converged"),
    ("columns", "-", "column names of the table"),
    (
        "warm_start",
        "-",
        "how points warm-start the Born loop (sweep only)",
    ),
    (
        "rank_by",
        "-",
        "ranking quantity (screen only); for cooling, an object holding the cooler-curve settings of each point",
    ),
    (
        "ranked_column",
        "-",
        "column ranked by, largest first (screen only)",
    ),
    (
        "phonon_conductance_source",
        "-",
        "where the κph of ZT came from: lattice, given or none (ZT is then an upper bound); screen by ZT or power factor only",
    ),
];

const BEST: [Key; 3] = [
    (
        "best[].point",
        "1",
        "grid index of one of the five best points (screen only)",
    ),
    (
        "best[].values",
        "unit of each key",
        "its axis values by axis name",
    ),
    (
        "best[].<ranked column>",
        "unit of the column",
        "its ranked value",
    ),
];

const LATTICE: [Key; 5] = [
    (
        "temperature_k",
        "K",
        "operating temperature of κph and of the integrand in phonon_spectrum.csv (mean lead temperature; the reference temperature for coefficients)",
    ),
    (
        "phonon_conductance_w_per_k",
        "W/K",
        "lattice thermal conductance κph of the case's [lattice] at temperature_k: two-terminal, or with damping the conductance with every damped site a floating probe",
    ),
    (
        "phonon_conductance_source",
        "-",
        "the κph ZT uses: lattice (this one) or given (thermal.phonon_conductance_w_per_k overrides it)",
    ),
    (
        "band_top_mev",
        "meV",
        "top ħω of the phonon band both phonon leads carry (Ξ = 0 above)",
    ),
    (
        "frequency_points",
        "1",
        "frequency nodes of the κph quadrature",
    ),
];

const MOVERS: [Key; 6] = [
    (
        "right_movers_range_ev",
        "eV",
        "lowest and highest level µ₊ of the electrons moving to +x over the cells where it was \
         found (null when none)",
    ),
    (
        "left_movers_range_ev",
        "eV",
        "the same for µ₋, the electrons moving to −x",
    ),
    (
        "cells_matched",
        "1",
        "cells whose pair (i, i+1) is locally uniform and where both levels were found",
    ),
    (
        "cells_not_uniform",
        "1",
        "cells whose pair (i, i+1) is not locally uniform (cell indices)",
    ),
    (
        "cells_without_propagating_states",
        "1",
        "uniform pairs without propagating states of one direction in the window (cell indices)",
    ),
    (
        "cells_outside_interval",
        "1",
        "uniform pairs where a mover's match lies outside the search interval of µ_i (cell indices)",
    ),
];

const SELF_HEATING: [Key; 10] = [
    (
        "hottest_lattice_k",
        "K",
        "hottest lattice temperature of sites.csv (lattice_temperature_k, the mean over a cell's sites)",
    ),
    ("hottest_x_nm", "nm", "x of that cell"),
    (
        "left_phonon_lead_heat_w",
        "W",
        "heat leaving the device through the left phonon lead (held at the left contact temperature)",
    ),
    (
        "right_phonon_lead_heat_w",
        "W",
        "heat leaving the device through the right phonon lead (held at the right contact temperature)",
    ),
    (
        "ledger_relative",
        "1",
        "lattice-heat ledger |J_E,1 + J_E,2 − (heat out of both phonon leads)| / |J_E,1 + J_E,2|: the energy the electron leads lose must leave through the phonon leads",
    ),
    (
        "outer_iterations",
        "1",
        "outer iterations of the joint electron–lattice loop (one Born solve each)",
    ),
    (
        "born_iterations",
        "1",
        "Born iterations summed over the outer iterations",
    ),
    (
        "last_change_k",
        "K",
        "largest change of a site's lattice temperature in the last outer iteration",
    ),
    (
        "tolerance_k",
        "K",
        "the loop stops when last_change_k is at most this",
    ),
    (
        "converged",
        "-",
        "the loop met tolerance_k and its last Born solve converged",
    ),
];

const GENERATOR: [Key; 26] = [
    ("settings.hot_k", "K", "temperature of the hot (left) lead"),
    (
        "settings.cold_k",
        "K",
        "temperature of the cold (right) lead",
    ),
    ("settings.points", "1", "load voltages on the curve"),
    ("hot_lead", "-", "which lead is hot"),
    ("fermi_level_ev", "eV", "reference Fermi level µ"),
    (
        "open_circuit_voltage_estimate_v",
        "V",
        "linear estimate of the open-circuit voltage, −SΔT",
    ),
    (
        "open_circuit_voltage_v",
        "V",
        "open-circuit voltage (zero current)",
    ),
    ("short_circuit_current_a", "A", "current at V = 0"),
    ("max_power_w", "W", "largest power delivered to the load"),
    (
        "voltage_at_max_power_v",
        "V",
        "voltage of the largest power",
    ),
    (
        "current_at_max_power_a",
        "A",
        "current of the largest power",
    ),
    (
        "efficiency_at_max_power",
        "1",
        "efficiency at the largest power",
    ),
    ("max_efficiency", "1", "largest efficiency on the curve"),
    (
        "voltage_at_max_efficiency_v",
        "V",
        "voltage of the largest efficiency",
    ),
    (
        "carnot_efficiency",
        "1",
        "Carnot efficiency η_C = 1 − T_cold/T_hot",
    ),
    (
        "curzon_ahlborn_efficiency",
        "1",
        "Curzon-Ahlborn efficiency 1 − √(T_cold/T_hot)",
    ),
    (
        "ioffe_max_efficiency",
        "1",
        "largest efficiency of a device with this ZT (Ioffe)",
    ),
    (
        "efficiency_at_max_power_linear",
        "1",
        "linear-response efficiency at maximum power (η_C/2)ZT/(ZT+2)",
    ),
    (
        "lattice_heat_leak_w",
        "W",
        "heat the lattice carries from the hot to the cold lead (J_ph from [lattice], κph ΔT when κph is given, 0 with neither); added to the heat drawn from the hot side",
    ),
    (
        "phonon_conductance_source",
        "-",
        "where the lattice's heat and the κph of ZT come from: lattice, given or none",
    ),
    (
        "curve[]",
        "-",
        "the curve, one object per row of generator.csv with its columns as keys",
    ),
    ("converged", "-", "whether every Born loop converged"),
    ("solves", "1", "operating points solved"),
    CURVE_ES[0],
    CURVE_ES[1],
    CURVE_ES[2],
];

/// The `electrostatics` object of a generator or cooler summary.
const CURVE_ES: [Key; 3] = [
    (
        "electrostatics.potential_solved_at_every_point",
        "-",
        "with [electrostatics]: true, the potential of the device's charge was solved at every point of the curve (none imposed); each curve[] row gives its potential_drop_v and outer_iterations",
    ),
    (
        "electrostatics.outer_iterations",
        "1",
        "outer iterations of the potential in all solves of the curve",
    ),
    (
        "electrostatics.converged",
        "-",
        "whether the potential converged at every point",
    ),
];

const COOLER: [Key; 29] = [
    ("settings.hot_k", "K", "temperature of the hot lead"),
    ("settings.cold_k", "K", "temperature of the cold lead"),
    ("settings.points", "1", "bias voltages on the curve"),
    (
        "settings.cold_lead",
        "-",
        "which lead is cold: left or right",
    ),
    (
        "settings.figure_of_merit",
        "-",
        "whether linear-response coefficients were computed",
    ),
    ("fermi_level_ev", "eV", "reference Fermi level µ"),
    (
        "cooling_power_at_zero_bias_w",
        "W",
        "cooling power at V = 0 (negative: heat leaks into the cold lead)",
    ),
    (
        "max_cooling_power_w",
        "W",
        "largest cooling power on the curve",
    ),
    (
        "voltage_at_max_v",
        "V",
        "voltage of the largest cooling power",
    ),
    (
        "current_at_max_a",
        "A",
        "current of the largest cooling power",
    ),
    (
        "max_at_range_end",
        "-",
        "true when the largest cooling power lies at the end of a range cut short (a solve past it did not converge, or a limit of the march) while still rising: a lower bound, and a higher bias may cool more",
    ),
    ("cop_at_max", "1", "COP at the largest cooling power"),
    (
        "max_cop",
        "1",
        "largest COP on the curve; null at equal temperatures, where it grows without bound as V → 0",
    ),
    (
        "voltage_at_max_cop_v",
        "V",
        "voltage of the largest COP (0, the limit, at equal temperatures)",
    ),
    ("carnot_cop", "1", "Carnot COP T_cold/(T_hot − T_cold)"),
    (
        "ioffe_max_cop",
        "1",
        "largest COP of a device with this ZT (Ioffe), or null",
    ),
    (
        "lattice_heat_leak_w",
        "W",
        "heat the lattice carries from the hot to the cold lead (J_ph from [lattice], κph ΔT when κph is given, 0 with neither); subtracted from the cooling power",
    ),
    (
        "phonon_conductance_source",
        "-",
        "where the lattice's heat (and the κph of ZT, when computed) come from: lattice, given or none",
    ),
    (
        "curve[]",
        "-",
        "the curve, one object per row of cooler.csv with its columns as keys",
    ),
    ("converged", "-", "whether every Born loop converged"),
    ("solves", "1", "operating points solved"),
    CURVE_ES[0],
    CURVE_ES[1],
    CURVE_ES[2],
    (
        "range.end_v",
        "V",
        "end of the bias range the curve covers (it runs from 0 to here), found by a march out in steps of kT/e",
    ),
    ("range.steps", "1", "steps of kT/e the march took"),
    (
        "range.reason",
        "-",
        "why the march stopped: fell_back (past its maximum the cooling power fell back by half of its rise), levelled_off (with [electrostatics]: it changed by less than 1 % of its rise over each of the last two steps), bias_limit (with [electrostatics]: range.limit_v reached), not_converged (a solve of the march did not converge; the range ends before it and the result is flagged) or step_limit (400 steps)",
    ),
    (
        "range.limit_v",
        "V",
        "with [electrostatics]: the largest |V| the march may reach, (2 Φ0 + 10 kT)/e with Φ0 the zero-bias barrier top above µ; null without",
    ),
    (
        "range.not_converged_at_v",
        "V",
        "the voltage of the march solve that did not converge, when that ended the march; else null",
    ),
];

const ELECTROSTATICS: [Key; 13] = [
    (
        "computed_drop_replaces_imposed",
        "-",
        "true: the potential inside the device, and with it the bias drop, is computed from the charge; bias.drop is not imposed",
    ),
    (
        "potential_drop_v",
        "V",
        "electrostatic potential of the first cell minus that of the last, φ(x_0) − φ(x_N−1)",
    ),
    (
        "lowest_potential_energy_ev",
        "eV",
        "lowest electrostatic potential energy U_es of a cell (sites.csv potential_ev includes it)",
    ),
    (
        "highest_potential_energy_ev",
        "eV",
        "highest electrostatic potential energy U_es of a cell",
    ),
    (
        "highest_band_edge_ev",
        "eV",
        "highest local band bottom with the computed potential (the top of a barrier)",
    ),
    (
        "outer_iterations",
        "1",
        "outer iterations: a Born solve at a fixed potential, then Newton on the Poisson equation (joint coupling: one Born pass, then Newton)",
    ),
    (
        "born_passes",
        "1",
        "passes over the energy grid summed over all outer iterations",
    ),
    (
        "potential_change_ev",
        "eV",
        "largest change of the potential Newton asked for in the last outer iteration",
    ),
    (
        "tolerance_ev",
        "eV",
        "the loop stops when potential_change_ev is at most this and the Born loop converged",
    ),
    (
        "poisson_residual",
        "1",
        "largest charge imbalance of a cell in the Poisson equation with the transport density (electrons)",
    ),
    (
        "born_residual",
        "1",
        "last relative change of Σ0 of the returned Born solve (0 without scattering)",
    ),
    (
        "converged",
        "-",
        "whether the potential and the last Born loop both converged",
    ),
    (
        "coupling",
        "-",
        "the outer scheme that ran: joint (one Born pass and one Newton solve per step, one Anderson vector) or nested (a Born loop at each potential)",
    ),
];

/// The `result_files` object of a solve (present only when an array was
/// reduced or left out to stay within the size budget).
const RESULT_FILES: [Key; 11] = [
    (
        "budget_bytes",
        "bytes",
        "size budget of the result files (`--result-budget-mb`): each map at most an eighth, each figure at most a tenth and 5 MB",
    ),
    (
        "reduced",
        "-",
        "the maps written as block means instead of whole, one entry per file",
    ),
    ("reduced[].file", "-", "file name"),
    (
        "reduced[].full_shape",
        "1",
        "shape of the whole map (positions, energies)",
    ),
    ("reduced[].written_shape", "1", "shape of the written map"),
    (
        "reduced[].block",
        "1",
        "values per block along each axis (the last block of an axis may be shorter)",
    ),
    (
        "reduced[].full_bytes",
        "bytes",
        "size of the whole map's numbers",
    ),
    (
        "reduced[].reduction",
        "-",
        "how the map was reduced: block means, whose mean × size is the block's sum, so sums and energy integrals are kept",
    ),
    (
        "left_out",
        "-",
        "arrays not written (file, bytes, consequence), such as the self-energy for warm starts",
    ),
    (
        "how_to_get_all",
        "-",
        "how to write every array whole (`qheat solve --full-arrays`)",
    ),
    (
        "left_out[].consequence",
        "-",
        "what is lost without the file",
    ),
];

fn keys(out: &mut Vec<FieldDoc>, prefix: &str, list: &[Key]) {
    out.extend(list.iter().map(|(k, u, m)| FieldDoc {
        name: format!("{prefix}{k}"),
        unit: u,
        meaning: m.to_string(),
    }));
}

fn doc(file: &str, written_by: &'static str, about: &str, fields: Vec<FieldDoc>) -> FileDoc {
    FileDoc {
        file: file.into(),
        written_by,
        about: about.into(),
        fields,
    }
}

fn solve_keys() -> Vec<FieldDoc> {
    let mut f = Vec::new();
    keys(&mut f, "", &HEADER);
    keys(&mut f, "", &SOLVE);
    keys(&mut f, "", &LEDGER);
    keys(&mut f, "", &SOLVE_TAIL);
    keys(&mut f, "grid.", &GRID);
    keys(&mut f, "lattice.", &LATTICE);
    keys(&mut f, "self_heating.", &SELF_HEATING);
    keys(&mut f, "movers.", &MOVERS);
    keys(&mut f, "electrostatics.", &ELECTROSTATICS);
    keys(&mut f, "", &RUN);
    keys(&mut f, "channels.", &CHANNELS);
    keys(&mut f, "result_files.", &RESULT_FILES);
    keys(&mut f, "", &CONTACTS);
    keys(&mut f, "", &ENERGY_SPLIT);
    f
}

/// How a solve shared its energies between processes (only under MPI).
const ENERGY_SPLIT: [Key; 1] = [(
    "energy_split_ranks",
    "1",
    "MPI ranks that shared the energies of each Born pass (only under `mpirun` with more than one rank); the results are those of one process, bit for bit",
)];

/// The `contacts` list of a solve (only with `[[contact]]` entries).
const CONTACTS: [Key; 15] = [
    (
        "contacts[]",
        "-",
        "one entry per contact attached along the channel ([[contact]], in file order)",
    ),
    ("contacts[].name", "-", "contact name"),
    (
        "contacts[].mode",
        "-",
        "\"fixed\" (µ, T given), \"voltage\" (µ solved for zero current) or \"temperature\" (µ and T solved for zero particle and heat current)",
    ),
    ("contacts[].cells", "1", "cells the contact touches"),
    ("contacts[].x_nm", "nm", "position of its first cell"),
    (
        "contacts[].gamma_ev",
        "eV",
        "coupling γ (broadening per orbital site)",
    ),
    (
        "contacts[].fermi_level_ev",
        "eV",
        "Fermi level µ_p: given, or the probe's reading",
    ),
    (
        "contacts[].temperature_k",
        "K",
        "temperature T_p: given, or a temperature probe's reading",
    ),
    (
        "contacts[].solved",
        "-",
        "true when µ_p (and for a temperature probe T_p) was solved",
    ),
    (
        "contacts[].particle_current_per_s",
        "1/s",
        "particles into the device from the contact, ∫ j_p dE with j_p = (g_s/h)(Tr[Γ_p A] f_p − Tr[Γ_p G^n]); zero for a probe to the solver tolerance",
    ),
    (
        "contacts[].current_a",
        "A",
        "electric current into the device, I_p = −e ∫ j_p dE; the currents of the leads and all contacts add up to zero (ledger.charge_a)",
    ),
    (
        "contacts[].heat_current_w",
        "W",
        "heat current out of the contact into the device, ∫ (E − µ_p) j_p dE; zero for a temperature probe",
    ),
    (
        "contacts[].energy_current_w",
        "W",
        "energy current into the device, ∫ E j_p dE",
    ),
    (
        "contacts[].polarisation",
        "1",
        "spin polarisation strength P (polarised contacts only)",
    ),
    (
        "contacts[].polarisation_direction",
        "1",
        "unit vector n̂ = [x, y, z] of the majority spin (polarised contacts only)",
    ),
];

/// The `channels` object of coefficients (only when the case names
/// channels): either `given` or `not_given`.
const CHANNEL_SEEBECK: [Key; 5] = [
    (
        "given[]",
        "-",
        "one entry per channel when the channels do not mix (no element of H, the leads or the scattering couples two of them) and transport is coherent; each channel is then a conductor of its own in parallel with the others, so coefficients.seebeck_v_per_k = Σ G_c S_c / Σ G_c",
    ),
    ("given[].name", "-", "channel name"),
    (
        "given[].conductance_s",
        "S",
        "conductance of the channel from its own transmission, (g_s e²/h) L0_c",
    ),
    (
        "given[].seebeck_v_per_k",
        "V/K",
        "Seebeck coefficient of the channel, −L1_c/(e T L0_c)",
    ),
    (
        "not_given",
        "-",
        "why no channel coefficients are given: the first element that couples two channels, or scattering in the device",
    ),
];

/// The `channels` object of a solve (only when the case names channels).
const CHANNELS: [Key; 8] = [
    (
        "names",
        "-",
        "channel names: the [[channel]] entries in order, then \"other\" for the orbitals none holds; \"up\", \"down\" with explicit spin. Every list below has one entry per name; the `channel` column of channel_sites.csv and channel_spectrum.csv indexes this list",
    ),
    ("orbitals", "1", "orbitals of a cell each channel holds"),
    (
        "current_left_a",
        "A",
        "current out of the left contact into the device carried in each channel, −e∫ Re Tr[P_c(Σ^in_1 A − Γ_1 G^n)] dE g_s/h on the first cell; the entries add up to results.current_left_a",
    ),
    (
        "current_right_a",
        "A",
        "the same out of the right contact (last cell); adds up to results.current_right_a",
    ),
    (
        "heat_current_left_w",
        "W",
        "heat current out of the left contact per channel, ∫(E − µ_1) j_1,c dE; adds up to results.heat_current_left_w",
    ),
    (
        "heat_current_right_w",
        "W",
        "heat current out of the right contact per channel; adds up to results.heat_current_right_w",
    ),
    (
        "lattice_power_w",
        "W",
        "power handed to the lattice on the orbitals of each channel, all cells; adds up to results.lattice_power_w",
    ),
    (
        "polarization",
        "1",
        "(I_a − I_b)/(I_a + I_b) of the left-contact currents when there are exactly two channels (a = the first), else null; NaN (null) at zero current",
    ),
];

fn grid_keys() -> Vec<FieldDoc> {
    let mut f = Vec::new();
    keys(&mut f, "", &HEADER);
    keys(&mut f, "", &GRID_RUN);
    keys(&mut f, "", &BEST);
    keys(&mut f, "", &RUN[..1]);
    keys(&mut f, "", &RUN[3..]);
    f
}

fn curve_keys(specific: &[Key], with_coefficient_grid: &str) -> Vec<FieldDoc> {
    let mut f = Vec::new();
    keys(&mut f, "", &HEADER);
    keys(&mut f, "", specific);
    keys(&mut f, "coefficients.", &COEFFICIENTS);
    keys(&mut f, "energy_grid.", &COMMON_GRID);
    keys(&mut f, "coefficient_grid.", &COMMON_GRID);
    f.push(FieldDoc {
        name: "coefficient_grid".into(),
        unit: "-",
        meaning: format!("energy grid of the linear-response runs{with_coefficient_grid}"),
    });
    f.push(FieldDoc {
        name: "conventions".into(),
        unit: "-",
        meaning: "the sign conventions of the curve in words".into(),
    });
    keys(&mut f, "", &RUN[3..]);
    f
}

/// Documentation of every summary.json.
pub fn summary_docs() -> Vec<FileDoc> {
    let mut failed = Vec::new();
    keys(&mut failed, "", &HEADER);
    keys(&mut failed, "", &FAILED);
    keys(&mut failed, "", &RUN[..2]);
    keys(&mut failed, "", &RUN[3..]);
    let mut coefficients = Vec::new();
    keys(&mut coefficients, "", &HEADER);
    keys(&mut coefficients, "coefficients.", &COEFFICIENTS);
    keys(
        &mut coefficients,
        "",
        &[(
            "response",
            "-",
            "how the coefficients were obtained: {method} for transmission moments, else the finite-difference runs (converged, delta_t_k in K, delta_v in V, grid, iterations, the response matrix m11 = ∂I/∂V in S, m12 = T ∂I/∂ΔT in A, m21 = ∂J_Q/∂V in A (W/V), m22 = T ∂J_Q/∂ΔT in W, onsager_residual |m12 − m21|/|m12|, phonon_energies_ev in eV, split; with [electrostatics] also electrostatics: potential_solved_at_every_run, outer_iterations and potential_drop_v in V of the unperturbed point then the four runs, tolerance_ev, converged)",
        )],
    );
    keys(&mut coefficients, "energy_grid.", &COMMON_GRID);
    keys(&mut coefficients, "lattice.", &LATTICE);
    keys(&mut coefficients, "", &RUN);
    keys(&mut coefficients, "channels.", &CHANNEL_SEEBECK);
    vec![
        doc(
            "summary.json of solve",
            "`qheat solve`",
            "One operating point.",
            solve_keys(),
        ),
        doc(
            "summary.json of a failed solve",
            "`qheat solve` when the solver fails",
            "Replaces the previous result so that old files are not taken for this run.",
            failed,
        ),
        doc(
            "summary.json of coefficients",
            "`qheat coefficients`",
            "Linear response.",
            coefficients,
        ),
        doc(
            "summary.json of sweep and screen",
            "`qheat sweep`, `qheat screen`",
            "A grid of case variants.",
            grid_keys(),
        ),
        doc(
            "summary.json of generator",
            "`qheat generator`",
            "Power and efficiency against load voltage.",
            curve_keys(&GENERATOR, ""),
        ),
        doc(
            "summary.json of cooler",
            "`qheat cooler`",
            "Cooling power and COP against bias.",
            curve_keys(&COOLER, ", or null when not computed"),
        ),
    ]
}

/// Unit and meaning of a summary key: by its full path (`results.current_a`)
/// when documented so, else by its last part (`zt`, `current_a`): units
/// belong to the key name, whichever object holds it.
pub fn key_doc(path: &str) -> Option<(&'static str, String)> {
    let docs = summary_docs();
    let all = || docs.iter().flat_map(|d| d.fields.iter());
    let found = all().find(|f| f.name == path).or_else(|| {
        let leaf = path.rsplit('.').next().unwrap_or(path);
        all().find(|f| f.name.rsplit(['.', ']']).next() == Some(leaf))
    });
    found.map(|f| (f.unit, f.meaning.clone()))
}
