//! Random valid small cases run end to end (text → load → resolve → solve →
//! observe) without a panic, and every converged one closes its ledger.
//!
//! The ledger (conservation in the self-consistent Born approximation with
//! in/out-scattering; Lake & Datta, Phys. Rev. B 46, 4757 (1992), from
//! memory): charge I_1 + I_2 = 0 and
//! energy J_E,1 + J_E,2 = Σ P_i hold at every energy to rounding with the
//! pass's own Σ0, and for the phonon bath to the SCBA tolerance. At a loop
//! tolerance of 1e-9 the relative residuals stay far below 1e-6; the bound
//! leaves three decades for the spread between a Σ0 change of 1e-9 and its
//! effect on the bath balance (common practice: a conservation check a few
//! decades above the solver tolerance).
//!
//! Fixed seed, 30 cases, ≤ 40 cells and ≤ 150 energies: seconds in release.
//! Run with `cargo test --release --test proptest_cases`.

use proptest::prelude::*;
use proptest::test_runner::{Config, RngSeed};
use qheat::case::Case;
use qheat::observables::observe;
use qheat::scba::{Silent, solve};
use qheat::units::BOLTZMANN_EV_PER_K;
use std::cell::Cell;
use std::path::Path;

#[derive(Clone, Debug)]
struct Region {
    from_cell: usize,
    cells: usize,
    offset_ev: f64,
}

#[derive(Clone, Debug)]
struct Phonon {
    energy_ev: f64,
    coupling_ev2: f64,
}

#[derive(Clone, Debug)]
struct Spec {
    cells: usize,
    mass: f64,
    regions: Vec<Region>,
    fermi_ev: (f64, f64),
    temperature_k: (f64, f64),
    voltage_v: f64,
    phonon: Option<Phonon>,
    anderson: bool,
}

const SPACING_NM: f64 = 0.5;
const STEP_EV: f64 = 0.005;

fn spec() -> impl Strategy<Value = Spec> {
    (4usize..=40).prop_flat_map(|cells| {
        let region =
            (0..cells - 1, 1usize..=8, -0.1f64..0.2).prop_map(move |(from, len, off)| Region {
                from_cell: from,
                cells: len.min(cells - from),
                offset_ev: off,
            });
        let phonon =
            proptest::option::of((0.01f64..0.06, 0.0f64..2e-3).prop_map(|(e, c)| Phonon {
                energy_ev: e,
                coupling_ev2: c,
            }));
        (
            Just(cells),
            0.05f64..0.5,
            proptest::collection::vec(region, 0..=3),
            (0.0f64..0.1, 0.0f64..0.1),
            (150.0f64..350.0, 150.0f64..350.0),
            -0.1f64..0.1,
            phonon,
            any::<bool>(),
        )
            .prop_map(
                |(cells, mass, regions, fermi_ev, temperature_k, voltage_v, phonon, anderson)| {
                    Spec {
                        cells,
                        mass,
                        regions,
                        fermi_ev,
                        temperature_k,
                        voltage_v,
                        phonon,
                        anderson,
                    }
                },
            )
    })
}

fn case_text(s: &Spec) -> String {
    let length = s.cells as f64 * SPACING_NM;
    let mut t = format!(
        "name = \"random\"\n[device]\nkind = \"chain\"\nspacing_nm = {SPACING_NM:?}\n\
         length_nm = {length:?}\neffective_mass = {:?}\n",
        s.mass
    );
    for r in &s.regions {
        t += &format!(
            "[[device.region]]\nfrom_nm = {:?}\nto_nm = {:?}\noffset_ev = {:?}\n",
            r.from_cell as f64 * SPACING_NM,
            (r.from_cell + r.cells) as f64 * SPACING_NM,
            r.offset_ev
        );
    }
    t += &format!(
        "[leads.left]\nfermi_level_ev = {:?}\ntemperature_k = {:?}\n\
         [leads.right]\nfermi_level_ev = {:?}\ntemperature_k = {:?}\n\
         [bias]\nvoltage_v = {:?}\n",
        s.fermi_ev.0, s.temperature_k.0, s.fermi_ev.1, s.temperature_k.1, s.voltage_v
    );
    let mut phonon_ev = 0.0;
    if let Some(p) = &s.phonon {
        phonon_ev = p.energy_ev;
        t += &format!(
            "[[phonon]]\nenergy_ev = {:?}\ncoupling_ev2 = {:?}\n",
            p.energy_ev, p.coupling_ev2
        );
    }
    // A window of 12 kT above the higher Fermi level keeps the grid small;
    // the default (20 kT) would pass 150 energies.
    let mu_max = (s.fermi_ev.0 - s.voltage_v / 2.0).max(s.fermi_ev.1 + s.voltage_v / 2.0);
    let kt_max = BOLTZMANN_EV_PER_K * s.temperature_k.0.max(s.temperature_k.1);
    let max_ev = mu_max + 12.0 * kt_max + phonon_ev + STEP_EV;
    t += &format!(
        // Random phonon energies land anywhere between grid points; the
        // ledger must close for the snapped energy, so coarse snaps are allowed.
        "[grid]\nstep_ev = {STEP_EV:?}\nmax_ev = {max_ev:?}\nallow_coarse_phonon_snap = true\n\
         [solver]\ntolerance = 1e-9\nmax_iterations = 300\nmixing = \"{}\"\n",
        if s.anderson { "anderson" } else { "linear" }
    );
    t
}

#[test]
fn random_small_cases_solve_and_close_the_ledger() {
    let config = Config {
        cases: 30,
        rng_seed: RngSeed::Fixed(0x9e37_79b9),
        failure_persistence: None,
        ..Config::default()
    };
    let mut runner = proptest::test_runner::TestRunner::new(config);
    let converged = Cell::new(0usize);
    let scattering = Cell::new(0usize);
    let ran = Cell::new(0usize);
    runner
        .run(&spec(), |s| {
            let text = case_text(&s);
            let case = Case::parse(&text, "random.toml", Path::new(".")).map_err(|e| {
                TestCaseError::fail(format!("a valid case was refused: {e}\n{text}"))
            })?;
            let r = case.resolve().unwrap();
            prop_assert!(r.problem.device.cells() <= 40);
            prop_assert!(
                r.problem.grid.count <= 150,
                "{} energies",
                r.problem.grid.count
            );
            let sol = solve(&r.problem, &r.scba, None, &mut Silent)
                .map_err(|e| TestCaseError::fail(format!("solve failed: {e}\n{text}")))?;
            let o = observe(&sol);
            for (name, v) in [
                ("current", o.current_a),
                ("heat left", o.heat_current_left_w),
                ("heat right", o.heat_current_right_w),
                ("lattice power", o.lattice_power_w),
            ] {
                prop_assert!(v.is_finite(), "{name} = {v}\n{text}");
            }
            ran.set(ran.get() + 1);
            if !r.problem.scattering.is_coherent() {
                scattering.set(scattering.get() + 1);
            }
            if sol.report.converged {
                converged.set(converged.get() + 1);
                let l = &o.ledger;
                prop_assert!(
                    l.worst_relative() <= 1e-6,
                    "ledger charge {:e} energy {:e} heat {:e}\n{text}",
                    l.charge_relative,
                    l.energy_relative,
                    l.heat_relative
                );
            }
            Ok(())
        })
        .unwrap();
    let (ran, scattering, converged) = (ran.get(), scattering.get(), converged.get());
    println!("{ran} cases, {scattering} with a phonon, {converged} converged");
    // The ledger is only checked on converged runs: most must converge, or
    // the test checks little.
    assert!(converged * 10 >= ran * 9, "{converged} of {ran} converged");
    assert!(scattering >= 5, "only {scattering} cases had a phonon");
}
