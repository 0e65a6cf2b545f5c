//! Self-consistent electrostatics: the Poisson solve coupled to the Born
//! loop, checked against closed forms and conservation laws.

use qheat::device;
use qheat::electrostatics::{self, Boundary, Coupling, Electrostatics, VACUUM_PERMITTIVITY};
use qheat::grid::EnergyGrid;
use qheat::leads::{DecimationParams, Lead};
use qheat::model::{Contact, Problem};
use qheat::observables::observe;
use qheat::scattering::Scattering;
use qheat::scba::{ScbaParams, Silent};
use qheat::units::ELEMENTARY_CHARGE;

const T: f64 = 300.0;

/// A chain of `cells` cells of `spacing` nm with mass `mass` and band edge
/// `edge` (eV), leads continuing it, Fermi levels `mu`, grid [lo, hi].
fn chain(
    cells: usize,
    spacing: f64,
    mass: f64,
    edge: f64,
    mu: (f64, f64),
    grid: (f64, f64, f64),
) -> Problem {
    let t = qheat::units::hopping_ev(mass, spacing);
    let dev = device::chain(spacing, t, edge, vec![0.0; cells]);
    let lead = Lead::Periodic {
        onsite: dev.onsite[0].clone(),
        hopping: dev.coupling[0].clone(),
    };
    let contact = |m| Contact {
        lead: lead.clone(),
        fermi_level_ev: m,
        temperature_k: T,
    };
    Problem {
        device: dev,
        left: contact(mu.0),
        right: contact(mu.1),
        scattering: Scattering::default(),
        grid: EnergyGrid::covering(grid.0, grid.1, grid.2),
        spin_degeneracy: 2.0,
        decimation: DecimationParams::default(),
        contacts: Vec::new(),
    }
}

fn settings(cells: usize, permittivity: f64, area: f64, donors: Vec<f64>) -> Electrostatics {
    Electrostatics {
        permittivity: vec![permittivity; cells],
        acceptors_cm3: vec![0.0; cells],
        donors_cm3: donors,
        area_nm2: area,
        gate: None,
        left: Boundary::Neutral,
        right: Boundary::Neutral,
        tolerance_ev: 1e-10,
        max_iterations: 100,
        mixing_depth: 5,
        mixing_factor: 0.5,
        coupling: Coupling::default(),
    }
}

/// Electrons per cell from the observables (electrons per nm × a).
fn electrons(sol: &qheat::scba::Solution) -> Vec<f64> {
    let a = sol.problem.device.spacing_nm;
    observe(sol)
        .sites
        .electron_density_per_nm
        .iter()
        .map(|d| d * a)
        .collect()
}

/// With no doping and a device empty of electrons (band 1 eV above both
/// Fermi levels) the charge is zero, so the potential stays the imposed
/// one and every result equals the solve without electrostatics, under
/// bias and with a phonon. Tolerance 1e-10: the residual electrons
/// (≈ e^(−1 eV/kT) ≈ 1e-17 per cell) move the potential by ~1e-18 eV.
#[test]
fn empty_device_keeps_the_imposed_potential() {
    let cells = 30;
    let mut p = chain(cells, 0.5, 0.1, 1.0, (0.05, -0.05), (1.0007, 1.3, 0.002));
    p.scattering.phonons.push(qheat::scattering::PhononMode {
        requested_energy_ev: 0.02,
        energy_ev: 0.02,
        steps: 10,
        coupling_ev2: vec![1e-3; cells],
        bath_temperature_k: T,
        coupling_matrices: Default::default(),
    });
    let es = settings(cells, 11.7, 20.0, vec![0.0; cells]);
    let params = ScbaParams::default();
    let plain = qheat::scba::solve(&p, &params, None, &mut Silent).unwrap();
    let sc = electrostatics::solve(&p, &es, &params, None, None, &mut Silent).unwrap();
    assert!(sc.report.converged, "{:?}", sc.report);
    assert!(
        sc.potential_ev.iter().all(|u| u.abs() < 1e-10),
        "{:?}",
        sc.potential_ev
    );
    let (a, b) = (observe(&plain), observe(&sc.solution));
    let rel = |x: f64, y: f64| (x - y).abs() / x.abs().max(1e-300);
    assert!(a.current_a.abs() > 0.0);
    assert!(
        rel(a.current_a, b.current_a) < 1e-10,
        "{} {}",
        a.current_a,
        b.current_a
    );
    assert!(rel(a.lattice_power_w, b.lattice_power_w) < 1e-10);
    for (x, y) in plain
        .pass
        .green
        .filled
        .iter()
        .zip(&sc.solution.pass.green.filled)
    {
        assert!((x - y).abs() <= 1e-10 * x.abs().max(1e-30), "{x} {y}");
    }
}

/// A short doped wire between wide-band contacts (Σ = −iΓ/2 on the end
/// cells, Γ = 0.1 eV), where the density of states is smooth on the grid.
fn doped_wire(mu: (f64, f64), phonon: bool) -> (Problem, Electrostatics) {
    let cells = 10;
    let mut p = chain(cells, 0.5, 0.5, 0.0, mu, (-0.6, 1.0, 0.002));
    let gamma = faer::Mat::from_fn(1, 1, |_, _| qheat::C64::new(0.1, 0.0));
    p.left.lead = Lead::WideBand {
        gamma: gamma.clone(),
    };
    p.right.lead = Lead::WideBand { gamma };
    if phonon {
        p.scattering.phonons.push(qheat::scattering::PhononMode {
            requested_energy_ev: 0.02,
            energy_ev: 0.02,
            steps: 10,
            coupling_ev2: vec![2e-3; cells],
            bath_temperature_k: T,
            coupling_matrices: Default::default(),
        });
    }
    // 6e20 cm⁻³ in 1 nm² × 0.5 nm: 0.3 donors per cell, more on the right.
    let donors = (0..cells)
        .map(|i| if i < 5 { 6e20 } else { 1.2e21 })
        .collect();
    (p, settings(cells, 10.0, 1.0, donors))
}

/// Gauss's law for the whole wire at equilibrium: with zero field at both
/// ends and no gate the device is neutral as a whole, Σ_i (D_i − n_i) = 0
/// with n_i the transport electrons (observables), to 1e-8 of the doping
/// (the outer tolerance 1e-10 eV times the ≈ 10 electrons/eV response of
/// a cell is ≈ 1e-9 electrons). With a gate (λ = 2 nm, φ_g = 0.1 V) the
/// device charge is the gate's image charge instead: Σ_i (n_i − D_i) =
/// Σ_i ε A a/(e λ²) (U_i − U_g), computed here from the inputs. The
/// equilibrium current is zero to 1e-10 of the one-way thermal flow of a
/// channel (detailed balance: common practice).
#[test]
fn doped_wire_obeys_gauss_law_and_carries_no_equilibrium_current() {
    for gate in [None, Some(2.0)] {
        let (p, mut es) = doped_wire((0.1, 0.1), false);
        es.gate = gate.map(|l| qheat::electrostatics::Gate {
            potential_v: 0.1,
            length_nm: l,
        });
        let sc = electrostatics::solve(&p, &es, &ScbaParams::default(), None, None, &mut Silent)
            .unwrap();
        assert!(sc.report.converged, "{:?}", sc.report.history);
        let n = &sc.electrons;
        let d = es.net_doping_per_cell(0.5);
        let total_d: f64 = d.iter().sum();
        let image: f64 = match gate {
            None => 0.0,
            Some(l) => {
                let g = VACUUM_PERMITTIVITY * 10.0 * 1e-18 * 0.5e-9
                    / (ELEMENTARY_CHARGE * (l * 1e-9).powi(2));
                sc.potential_ev.iter().map(|u| g * (u + 0.1)).sum()
            }
        };
        let charge: f64 = n.iter().zip(&d).map(|(n, d)| n - d).sum();
        // The observables sum G^n point by point on the grid. The
        // band-edge-aware count assumes a (E − Ec)^(−1/2) edge in every
        // cell; where the wide-band contacts have smoothed it away the two
        // differ by the hold of the first node down to the edge,
        // O((ΔE/kT)^(3/2)) ≈ 1 % at most (0.14 % here).
        let plain: f64 = electrons(&sc.solution).iter().sum();
        let counted: f64 = n.iter().sum();
        eprintln!("observables {plain} counted {counted}");
        assert!((plain / counted - 1.0).abs() < 1e-2, "{plain} {counted}");
        assert!(
            (charge - image).abs() < 1e-8 * total_d,
            "gate {gate:?}: electrons − donors {charge}, image {image}, doping {total_d}"
        );
        let o = observe(&sc.solution);
        // One-way thermal flow of one open channel, g_s e/h · kT (the
        // wide-band contacts pass about one channel).
        let kt = qheat::units::thermal_energy_ev(T);
        let one_way = qheat::units::CONDUCTANCE_QUANTUM * kt;
        assert!(
            o.current_a.abs() <= 1e-10 * one_way,
            "I = {} A against {one_way} A",
            o.current_a
        );
    }
}

/// A coherent device has no Born loop to loosen while the potential
/// settles: one pass at each potential is its exact answer. Every outer
/// iteration then reports what ran, a converged transport solve, and the
/// record of a loop that took several iterations says so for each.
#[test]
fn coherent_outer_iterations_report_their_transport_converged() {
    let (p, es) = doped_wire((0.15, 0.05), false);
    let sc =
        electrostatics::solve(&p, &es, &ScbaParams::default(), None, None, &mut Silent).unwrap();
    let h = &sc.report.history;
    assert!(sc.report.converged, "{h:?}");
    assert!(h.len() >= 3, "a loop of several iterations: {h:?}");
    assert!(h.iter().all(|r| r.born_converged), "{h:?}");
}

/// Under bias (0.1 V) with an inelastic phonon the self-consistent point
/// keeps the conservation ledger: charge and energy balance to 1e-8
/// relative (the Born tolerance 1e-10 here; the ledger holds only at the
/// Born fixed point).
#[test]
fn doped_wire_ledger_under_bias() {
    let (p, es) = doped_wire((0.15, 0.05), true);
    let params = ScbaParams::default().with_tolerance(1e-10);
    let sc = electrostatics::solve(&p, &es, &params, None, None, &mut Silent).unwrap();
    assert!(sc.report.converged, "{:?}", sc.report.history);
    let o = observe(&sc.solution);
    assert!(o.current_a.abs() > 0.0);
    assert!(o.ledger.charge_relative < 1e-8, "{:?}", o.ledger);
    assert!(o.ledger.energy_relative < 1e-8, "{:?}", o.ledger);
    println!(
        "outer {} born passes {}",
        sc.report.outer_iterations, sc.report.born_passes
    );
}

/// `qheat solve` on the demo at zero bias runs the electrostatics: exit 0,
/// summary.json says the computed drop replaces the imposed one and gives
/// both residuals and the outer iteration count; sites.csv gives U_es and
/// the band edge with and without it, and its electron numbers as the
/// Poisson equation counts them (electrons_poisson) neutralise the doping
/// as a whole (zero field at both ends: Gauss's law), to 1e-3 of the
/// doping, since the default outer tolerance (1e-5 eV) leaves each cell
/// out of balance by ~1e-5 electrons.
#[test]
fn cli_solve_reports_the_computed_potential() {
    let dir = std::env::temp_dir().join(format!("qheat-es-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let text = std::fs::read_to_string(
        std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("cases-demo/doped-barrier-cooler.toml"),
    )
    .unwrap()
    .replace("voltage_v = 0.05", "voltage_v = 0.0")
    .replace("ends = \"ohmic\"", "ends = \"zero-field\"");
    assert!(text.contains("zero-field"), "the demo's ends moved");
    let case = dir.join("case.toml");
    std::fs::write(&case, text).unwrap();
    let out = dir.join("out");
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_qheat"))
        .args(["solve", case.to_str().unwrap(), "-o", out.to_str().unwrap()])
        .output()
        .unwrap();
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let stdout = String::from_utf8_lossy(&o.stdout);
    assert!(stdout.contains("replaces the imposed one"), "{stdout}");
    // The note says how the ends are held.
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert!(stderr.contains("float with zero field"), "{stderr}");
    let s: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    let e = &s["electrostatics"];
    assert_eq!(e["computed_drop_replaces_imposed"], true);
    assert_eq!(e["converged"], true);
    assert_eq!(e["coupling"], "nested", "the default scheme is named: {e}");
    assert!(e["outer_iterations"].as_u64().unwrap() >= 2, "{e}");
    assert!(e["poisson_residual"].as_f64().unwrap() < 1e-3, "{e}");
    assert!(e["born_residual"].as_f64().unwrap() < 1e-6, "{e}");
    let sites = std::fs::read_to_string(out.join("sites.csv")).unwrap();
    let mut lines = sites.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = |name: &str| header.iter().position(|&h| h == name).unwrap();
    let (cx, cn) = (col("x_nm"), col("electrons_poisson"));
    let (cu, ce, ci) = (
        col("electrostatic_potential_energy_ev"),
        col("band_edge_ev"),
        col("band_edge_imposed_ev"),
    );
    let (mut electrons, mut donors) = (0.0, 0.0);
    for l in lines {
        let v: Vec<f64> = l.split(',').map(|x| x.parse().unwrap()).collect();
        // The band edge with the computed potential is the imposed one
        // plus U_es; the imposed one is the 0.1 eV barrier or 0.
        assert!((v[ce] - v[ci] - v[cu]).abs() < 1e-12, "{l}");
        let barrier = if (9.0..15.0).contains(&v[cx]) {
            0.1
        } else {
            0.0
        };
        assert!((v[ci] - barrier).abs() < 1e-12, "{l}");
        electrons += v[cn];
        // 2e18 cm⁻³ × 25 nm² × 0.5 nm outside the undoped [9, 15) nm layer.
        if !(9.0..15.0).contains(&v[cx]) {
            donors += 2e18 * 25.0 * 0.5 * 1e-21;
        }
    }
    assert!(
        (electrons / donors - 1.0).abs() < 1e-3,
        "electrons {electrons}, donors {donors}"
    );
    std::fs::remove_dir_all(&dir).ok();
}

/// The joint scheme (Σ0 and the potential in one Anderson vector, one
/// Born pass per step) and the nested one (a Born loop at each potential,
/// its tolerance tied to the outer progress) share their fixed point: on
/// the doped wire with a phonon under bias they agree on the potential
/// and the current. Both stop at a Born tolerance of 1e-10 and an outer
/// tolerance of 1e-10 eV, so each lies within about that of the fixed
/// point times the error amplification of its loop (≲ 10²); 1e-7 eV and
/// 1e-7 relative allow for that and still catch a scheme that stops
/// early (the first steps move U by ~1e-2 eV) or has another fixed point.
#[test]
fn joint_and_nested_reach_the_same_point() {
    let (p, mut es) = doped_wire((0.15, 0.05), true);
    let params = ScbaParams::default().with_tolerance(1e-10);
    let mut run = |c: Coupling| {
        es.coupling = c;
        let sc = electrostatics::solve(&p, &es, &params, None, None, &mut Silent).unwrap();
        assert!(sc.report.converged, "{c:?}: {:?}", sc.report.history);
        assert!(sc.solution.report.converged, "{c:?}");
        assert_eq!(sc.report.coupling, c);
        eprintln!(
            "{c:?}: {} outer iterations, {} Born passes",
            sc.report.outer_iterations, sc.report.born_passes
        );
        sc
    };
    let joint = run(Coupling::Joint);
    let nested = run(Coupling::Nested);
    let du = joint
        .potential_ev
        .iter()
        .zip(&nested.potential_ev)
        .fold(0.0, |m: f64, (a, b)| m.max((a - b).abs()));
    assert!(du < 1e-7, "potentials differ by {du} eV");
    let (ij, in_) = (
        observe(&joint.solution).current_a,
        observe(&nested.solution).current_a,
    );
    assert!(ij.abs() > 0.0);
    assert!((ij - in_).abs() < 1e-7 * ij.abs(), "{ij} A against {in_} A");
}

/// A run whose outer loop is cut short is flagged, whichever scheme ran,
/// and the summary names the scheme: `qheat solve` on the demo with
/// electrostatics.max_iterations = 2 exits with 2 and summary.json says
/// not converged, for "nested" and "joint" alike.
#[test]
fn cli_flags_a_cut_outer_loop_and_names_the_scheme() {
    let dir = std::env::temp_dir().join(format!("qheat-es-cut-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let demo = std::fs::read_to_string(
        std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("cases-demo/doped-barrier-cooler.toml"),
    )
    .unwrap();
    for scheme in ["nested", "joint"] {
        let text = demo.replace(
            "donors_cm3 = 2e18\n",
            &format!("donors_cm3 = 2e18\nmax_iterations = 2\ncoupling = \"{scheme}\"\n"),
        );
        assert!(
            text.contains("coupling"),
            "the demo's [electrostatics] moved"
        );
        let case = dir.join(format!("{scheme}.toml"));
        std::fs::write(&case, text).unwrap();
        let out = dir.join(scheme);
        let o = std::process::Command::new(env!("CARGO_BIN_EXE_qheat"))
            .args(["solve", case.to_str().unwrap(), "-o", out.to_str().unwrap()])
            .output()
            .unwrap();
        let stderr = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{scheme}: {stderr}");
        assert!(
            stderr.contains("electrostatics did not converge"),
            "{stderr}"
        );
        // The hint says what the last change means, where the known stalls
        // are described, and names the step a user can change.
        for hint in [
            "how far the potential",
            "Known problem",
            "grid.step_ev (2.0e-3 eV now)",
        ] {
            assert!(stderr.contains(hint), "{hint}: {stderr}");
        }
        let s: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap())
                .unwrap();
        let e = &s["electrostatics"];
        assert_eq!(e["coupling"], scheme, "{e}");
        assert_eq!(e["converged"], false, "{e}");
        assert_eq!(e["outer_iterations"], 2, "{e}");
        assert_eq!(s["converged"], false);
    }
    std::fs::remove_dir_all(&dir).ok();
}

/// Under a bias V each charge-neutral end keeps its band where its own
/// lead's Fermi level holds the doping, so the band of the end at the
/// lower Fermi level, µ − eV/2, lies eV/2 below where it is at V = 0 (the
/// band bottom of a neutral region sits at a fixed distance from its
/// Fermi level: common practice). A single solve of the demo starts its
/// window 5 kT below that band (grid.min_ev not given), so at 0.2 V the
/// window starts 0.1 eV lower than at 0 V, at either polarity. Both band
/// bottoms come from the same bisection (to 1e-13 eV) with the same
/// temperature, so they differ by V/2 to far below 1e-9 eV; a window set
/// at the higher Fermi level would start 0.1 eV higher instead.
#[test]
fn single_solve_window_follows_the_lower_fermi_level() {
    let case = qheat::case::Case::load(
        &std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("cases-demo/doped-barrier-cooler.toml"),
    )
    .unwrap();
    let first = |v: f64| {
        let r = case
            .with(qheat::case::CaseKey::BiasVoltage, v)
            .unwrap()
            .resolve()
            .unwrap();
        r.problem.grid.min_ev
    };
    let zero = first(0.0);
    for v in [0.2, -0.2] {
        let shift = first(v) - zero;
        assert!(
            (shift + 0.1).abs() < 1e-9,
            "at {v} V the window starts {shift} eV from where it does at 0 V"
        );
    }
}
