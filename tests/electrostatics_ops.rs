//! The potential of the device's charge solved at every operating point:
//! linear response, sweeps, generator, cooler and screen go through the
//! same self-consistent solve as `qheat solve`, never the imposed
//! potential.

use qheat::case::{Case, CaseKey};
use qheat::observables::observe;
use qheat::progress::Silent;
use qheat::sweep::screen::{Rank, ScreenTask};
use qheat::sweep::{Grid, MemoryStore, ObservablesTask, PointTask, SweepOptions};
use qheat::thermo::cooler::{CoolerSettings, cooler};
use qheat::thermo::generator::{GeneratorSettings, generator};
use qheat::thermo::of_case::{case_at, case_coefficients, reference_point};
use qheat::thermo::point::{PointStart, solve_point};
use qheat::thermo::response::{Around, difference_steps, linear_response_with, operating_point};
use std::path::Path;

/// A 12 nm doped wire (m* = 0.07, 25 nm², ε_r = 12, 2e18 cm⁻³) with an
/// undoped 0.1 eV barrier layer of 3 nm in the middle, as the demo doped
/// barrier cooler but half as long on a 4 meV grid. `phonon`: one weak
/// optical phonon; `es`: the `[electrostatics]` section (else the
/// potential is the imposed one, as before electrostatics existed).
fn barrier_case(phonon: bool, es: bool, extra: &str) -> Case {
    let text = barrier_text(phonon, es, extra);
    Case::parse(&text, "ops.toml", Path::new(".")).unwrap()
}

/// The text of [`barrier_case`].
fn barrier_text(phonon: bool, es: bool, extra: &str) -> String {
    let mut text = String::from(
        r#"
name = "ops-barrier"
[device]
kind = "chain"
spacing_nm = 0.5
length_nm = 12.0
effective_mass = 0.07
[[device.region]]
from_nm = 4.5
to_nm = 7.5
offset_ev = 0.1
[leads.left]
fermi_level_ev = 0.03
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.03
temperature_k = 300.0
[grid]
step_ev = 0.004
min_ev = -0.1
max_ev = 0.6
"#,
    );
    if phonon {
        text.push_str("[[phonon]]\nenergy_ev = 0.036\ncoupling_ev2 = 1e-3\n");
    }
    if es {
        text.push_str(
            r#"
[electrostatics]
permittivity = 12.0
area_nm2 = 25.0
donors_cm3 = 2e18
[[electrostatics.region]]
from_nm = 4.5
to_nm = 7.5
donors_cm3 = 0.0
"#,
        );
    }
    text.push_str(extra);
    text
}

/// Current of `case` at its operating point `op` (a linear-response run),
/// solved self-consistently from nothing (no warm start), as `qheat solve`
/// does.
fn full_solve_current(case: &Case, op: &qheat::thermo::response::OperatingPoint) -> f64 {
    let r = case_at(case, op).unwrap().resolve().unwrap();
    let es = r.electrostatics.as_ref();
    assert!(es.is_some());
    let params = r.scba.with_tolerance(1e-12);
    let p = solve_point(&r.problem, es, &params, PointStart::default(), &mut Silent).unwrap();
    assert!(p.converged(), "{:?}", p.electrostatics.map(|e| e.report));
    observe(&p.solution).current_a
}

/// Linear response with the potential solved at every run.
///
/// - G equals the central difference dI/dV of two independent, full
///   self-consistent solves at ±δV (each from zero potential, outer
///   tolerance 1e-10 eV). Tolerance 1e-5 relative: the two solves stop on
///   a Newton update below their tolerance, and the linear response on
///   1e-3 δV ≈ 2.6e-8 eV; a potential error ε moves a current by about
///   ε/kT of itself in the barrier, and over the 1e-3 part of the current
///   that a ±δV difference is, 2.6e-8 eV/kT/1e-3 ≈ 1e-6 of G, with room
///   for Anderson's error being a few times its last update.
/// - G differs from the answer with the imposed potential (the same case
///   without `[electrostatics]`) by far more than that: the charge lifts
///   the band by tens of meV here.
/// - Onsager: |M12 − M21|/|M12| ≤ 1e-5. At equilibrium no current flows
///   whatever the potential, so the potential's own response drops out of
///   the linear response and the reciprocity of the Born solution holds;
///   what is left is the central-difference error (δ/kT)² ≈ 1e-6 and the
///   potential's tolerance as above.
#[test]
fn coefficients_equal_finite_differences_of_self_consistent_solves() {
    let case = barrier_case(true, true, "");
    let set = case_coefficients(&case, &mut Silent).unwrap();
    let c = &set.coefficients;
    let m = set.response.as_ref().expect("finite differences");
    let e = m.electrostatics.as_ref().expect("the potential was solved");
    assert!(e.potential_solved_at_every_run && e.converged, "{e:?}");
    assert_eq!(
        e.outer_iterations.len(),
        5,
        "the unperturbed point, then 4 runs"
    );
    eprintln!(
        "G {} outer {:?} onsager {}",
        c.conductance_s, e.outer_iterations, m.onsager_residual
    );

    let tight = barrier_case(true, true, "")
        .with(CaseKey::EsTolerance, 1e-10)
        .unwrap();
    let (mu, t) = reference_point(&tight).unwrap();
    let (dv, _) = difference_steps(t);
    let split = qheat::case::ResponseSplit::Symmetric;
    let ip = full_solve_current(&tight, &operating_point(mu, t, dv, 0.0, split));
    let im = full_solve_current(&tight, &operating_point(mu, t, -dv, 0.0, split));
    let g_fd = (ip - im) / (2.0 * dv);
    let rel = (c.conductance_s - g_fd).abs() / g_fd.abs();
    eprintln!(
        "G {} finite difference {g_fd} relative {rel:e}",
        c.conductance_s
    );
    assert!(rel < 1e-5, "G {} against dI/dV {g_fd}", c.conductance_s);

    let frozen = case_coefficients(&barrier_case(true, false, ""), &mut Silent).unwrap();
    let g0 = frozen.coefficients.conductance_s;
    eprintln!("imposed potential: G {g0}");
    assert!(
        (g0 - c.conductance_s).abs() > 0.1 * g0,
        "G {} with the charge, {g0} with the imposed potential",
        c.conductance_s
    );
    assert!(m.onsager_residual < 1e-5, "{}", m.onsager_residual);
}

/// A coherent device empty of electrons: band 1 eV above both Fermi
/// levels, a 0.05 eV step in the middle; with `es` an `[electrostatics]`
/// section without doping. (Coherent: with a phonon, the in-scattering of
/// so empty a device is far below what the Born residual controls, and
/// two solves from different starts differ by more than the check.) Its charge is about e^(−1 eV/kT) ≈ 1e-17
/// electrons per cell, which moves the potential by ~1e-16 eV.
fn empty_case(es: bool) -> Case {
    let mut text = String::from(
        r#"
name = "ops-empty"
[device]
kind = "chain"
spacing_nm = 0.5
length_nm = 8.0
effective_mass = 0.1
band_edge_ev = 1.0
[[device.region]]
from_nm = 3.0
to_nm = 5.0
offset_ev = 0.05
[leads.left]
fermi_level_ev = 0.0
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.0
temperature_k = 300.0
[grid]
step_ev = 0.004
min_ev = 0.99
max_ev = 1.4
"#,
    );
    if es {
        text.push_str("[electrostatics]\npermittivity = 11.7\narea_nm2 = 20.0\n");
    }
    Case::parse(&text, "empty.toml", Path::new(".")).unwrap()
}

fn close(a: f64, b: f64, what: &str) {
    let scale = a.abs().max(b.abs());
    assert!(
        (a - b).abs() <= 1e-10 * scale || (a.is_nan() && b.is_nan()),
        "{what}: {a:e} with [electrostatics], {b:e} without"
    );
}

/// Zero doping and zero charge: every command gives the numbers it gives
/// without `[electrostatics]`, to 1e-10 relative (the issue's check; the
/// charge moves the potential by ~1e-16 eV, so what is left is rounding).
/// Without electrostatics a coherent device's coefficients come from the
/// moments of T(E), with it from finite differences (every run solves its
/// potential), so for coefficients and screen the identity is checked on
/// the finite differences with and without the electrostatics on one grid
/// (1e-10), and the screen's ZT is the coefficients' of that point, bit for
/// bit. Against the moments: G to 1e-6 (central-difference error
/// (δV/kT)²/24 ≈ 4e-8) and S to 2e-4, because the states that carry the
/// current sit x = (E − µ)/kT ≈ 39 above µ, where a step δT = 1e-3 T
/// changes f by x·1e-3 and the central difference errs by
/// (x·1e-3)²/24 ≈ 6e-5 (common practice: Taylor remainder).
#[test]
fn zero_charge_gives_every_command_the_imposed_numbers() {
    let (with, without) = (empty_case(true), empty_case(false));
    // Coefficients.
    let a = case_coefficients(&with, &mut Silent).unwrap();
    let b = case_coefficients(&without, &mut Silent).unwrap();
    let m = a.response.as_ref().unwrap();
    assert!(m.electrostatics.is_some());
    let (ca, cb) = (&a.coefficients, &b.coefficients);
    for (x, y, bound, what) in [
        (ca.conductance_s, cb.conductance_s, 1e-6, "G"),
        (ca.seebeck_v_per_k, cb.seebeck_v_per_k, 2e-4, "S"),
    ] {
        assert!((x - y).abs() < bound * y.abs(), "{what}: {x:e} {y:e}");
    }
    let resolved = with.resolve().unwrap();
    let (mu, t) = reference_point(&with).unwrap();
    let build = |op: &qheat::thermo::response::OperatingPoint| {
        case_at(&with, op)
            .and_then(|c| a.grid.apply(&c))
            .and_then(|c| c.resolve())
            .map(|r| r.problem)
            .map_err(|e| e.to_string())
    };
    let at = Around {
        mu_ev: mu,
        temperature_k: t,
        split: resolved.response_split,
    };
    let fd = |es| {
        linear_response_with(&build, es, at, &resolved.scba, 0.0, &mut Silent)
            .unwrap()
            .1
    };
    let (ma, mb) = (fd(resolved.electrostatics.as_ref()), fd(None));
    assert!(ma.electrostatics.is_some() && mb.electrostatics.is_none());
    for (x, y, what) in [
        (ma.m11, mb.m11, "M11"),
        (ma.m12, mb.m12, "M12"),
        (ma.m21, mb.m21, "M21"),
        (ma.m22, mb.m22, "M22"),
    ] {
        close(x, y, what);
    }
    // Sweep over bias.
    let grid = Grid::new(vec![
        qheat::sweep::Axis::parse("bias.voltage_v=0:0.04:3").unwrap(),
    ])
    .unwrap();
    let sweep = |case: &Case| {
        let task = ObservablesTask::of(&case.resolve().unwrap());
        let t = qheat::sweep::run(
            case,
            &grid,
            &task,
            &MemoryStore::new(),
            SweepOptions::default(),
            &mut Silent,
        )
        .unwrap();
        (t, task.columns().len())
    };
    let ((ta, na), (tb, nb)) = (sweep(&with), sweep(&without));
    assert_eq!(na, nb + 4, "the sweep with the potential has its 4 columns");
    for (ra, rb) in ta.rows.iter().zip(&tb.rows) {
        for (k, name) in tb.columns.iter().enumerate() {
            close(ra[k], rb[k], name);
        }
    }
    // Generator and cooler.
    let gs = GeneratorSettings::new(320.0, 280.0, 4);
    let (ga, gb) = (
        generator(&with, &gs, &mut Silent).unwrap(),
        generator(&without, &gs, &mut Silent).unwrap(),
    );
    assert!(ga.electrostatics.is_some() && gb.electrostatics.is_none());
    close(ga.max_power_w, gb.max_power_w, "generator P_max");
    close(ga.open_circuit_voltage_v, gb.open_circuit_voltage_v, "V_oc");
    let cs = CoolerSettings::new(310.0, 290.0, 4).with_figure_of_merit(false);
    let (ka, kb) = (
        cooler(&with, &cs, &mut Silent).unwrap(),
        cooler(&without, &cs, &mut Silent).unwrap(),
    );
    // The cooler marches out in bias until its cooling power falls back;
    // without the charge that is where the higher Fermi level nears the
    // band, so the device is no longer empty there (with the potential
    // solved, the undoped wire's band rises with it and blocks the
    // current), and the two curves span different ranges. Compared: the
    // zero-bias point, where the device is empty.
    assert!(
        ka.electrostatics
            .is_some_and(|e| e.potential_solved_at_every_point)
    );
    close(
        ka.cooling_power_at_zero_bias_w,
        kb.cooling_power_at_zero_bias_w,
        "cooling at V = 0",
    );
    close(ka.curve[0].current_a, kb.curve[0].current_a, "cooler I(0)");
    // Screen by ZT: the coefficients of each point as above.
    let axis = Grid::new(vec![
        qheat::sweep::Axis::parse("leads.left.fermi_level_ev=0:0.02:2").unwrap(),
    ])
    .unwrap();
    let screen = |case: &Case, es: bool| {
        let task = ScreenTask::new(Rank::Zt, None)
            .unwrap()
            .with_electrostatics(es);
        let store = MemoryStore::new();
        qheat::sweep::run(
            case,
            &axis,
            &task,
            &store,
            SweepOptions::default(),
            &mut Silent,
        )
        .unwrap()
    };
    let sa = screen(&with, true);
    let zt = sa.column("zt").unwrap();
    for (i, row) in sa.rows.iter().enumerate() {
        let mu = axis.values(i)[0];
        let c = with
            .with(CaseKey::LeadFermiLevel(qheat::leads::Side::Left), mu)
            .unwrap();
        let k = case_coefficients(&c, &mut Silent).unwrap();
        assert!(k.response.unwrap().electrostatics.is_some());
        assert_eq!(row[zt], k.coefficients.zt, "point {i}");
    }
}

/// A sweep over bias with the potential solved at every point: each point
/// equals a separate self-consistent solve at that bias started from
/// nothing (what `qheat solve` does), although the sweep starts each point
/// from its predecessor's potential. Both stop on a Newton update below
/// 1e-9 eV; an error of a few times that moves the current by about
/// ε/kT ≈ 1e-7 of itself, so 1e-6 relative (and 1e-7 V for the drop).
#[test]
fn sweep_points_equal_separate_solves() {
    let case = barrier_case(false, true, "")
        .with(CaseKey::EsTolerance, 1e-9)
        .unwrap();
    let grid = Grid::new(vec![
        qheat::sweep::Axis::parse("bias.voltage_v=0:0.06:3").unwrap(),
    ])
    .unwrap();
    let task = ObservablesTask::of(&case.resolve().unwrap());
    let store = MemoryStore::new();
    let t = qheat::sweep::run(
        &case,
        &grid,
        &task,
        &store,
        SweepOptions::default(),
        &mut Silent,
    )
    .unwrap();
    assert!(
        store.stored_potentials().is_empty(),
        "warm starts are dropped at the end"
    );
    let col = |n: &str| t.column(n).unwrap();
    for (i, row) in t.rows.iter().enumerate() {
        let v = grid.values(i)[0];
        let r = case
            .with(CaseKey::BiasVoltage, v)
            .unwrap()
            .resolve()
            .unwrap();
        let es = r.electrostatics.as_ref();
        let p = solve_point(&r.problem, es, &r.scba, PointStart::default(), &mut Silent).unwrap();
        assert!(p.converged());
        let current = observe(&p.solution).current_a;
        let drop = p.electrostatics.as_ref().unwrap().potential_drop_v();
        eprintln!(
            "V {v}: I {} / {current}, drop {} / {drop}, outer {}",
            row[col("current_a")],
            row[col("potential_drop_v")],
            row[col("outer_iterations")]
        );
        assert_eq!(row[col("converged")], 1.0);
        let rel = (row[col("current_a")] - current).abs() / current.abs().max(1e-300);
        assert!(v == 0.0 || rel < 1e-6, "V = {v}: relative {rel:e}");
        assert!(
            (row[col("potential_drop_v")] - drop).abs() < 1e-7,
            "V = {v}"
        );
        if v > 0.0 {
            // Part of the bias drops inside the device, where the charge
            // puts it (none would with the imposed potential here).
            assert!(drop.abs() > 1e-3 * v, "V = {v}: drop {drop}");
        }
    }
}

fn qheat() -> std::process::Command {
    let mut c = std::process::Command::new(env!("CARGO_BIN_EXE_qheat"));
    c.env_remove("QHEAT_ABORT_AFTER_POINTS");
    c
}

fn run_ok(cmd: &mut std::process::Command) -> String {
    let o = cmd.output().unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    String::from_utf8_lossy(&o.stdout).into_owned()
}

/// Through the binary: an interrupted sweep with the potential solved at
/// every point resumes to a sweep.csv byte-identical to an uninterrupted
/// run (the predecessor's potential is kept in the point store, so a
/// resumed point starts where it would have), and coefficients say that
/// the potential was solved at every run.
#[test]
fn cli_commands_solve_the_potential_and_sweeps_resume() {
    let tmp = tempfile::tempdir().unwrap();
    let case = tmp.path().join("case.toml");
    std::fs::write(&case, barrier_text(false, true, "")).unwrap();
    let sweep = |out: &Path| {
        let mut c = qheat();
        c.args([
            "sweep",
            case.to_str().unwrap(),
            "--vary",
            "bias.voltage_v=0:0.06:4",
        ])
        .args(["-o", out.to_str().unwrap(), "--quiet", "--threads", "1"]);
        c
    };
    let whole = tmp.path().join("whole");
    run_ok(&mut sweep(&whole));
    let reference = std::fs::read_to_string(whole.join("sweep.csv")).unwrap();
    let header = reference.lines().next().unwrap();
    assert!(header.contains("potential_drop_v") && header.contains("outer_iterations"));
    let cut = tmp.path().join("cut");
    let st = sweep(&cut)
        .env("QHEAT_ABORT_AFTER_POINTS", "2")
        .status()
        .unwrap();
    assert_eq!(st.code(), Some(75));
    let kept: Vec<_> = std::fs::read_dir(cut.join("points"))
        .unwrap()
        .flatten()
        .flat_map(|d| std::fs::read_dir(d.path()).unwrap().flatten())
        .filter(|f| f.path().extension().is_some_and(|e| e == "potential"))
        .collect();
    assert!(
        !kept.is_empty(),
        "the store keeps the potential of the last point"
    );
    run_ok(&mut sweep(&cut));
    assert_eq!(
        std::fs::read_to_string(cut.join("sweep.csv")).unwrap(),
        reference
    );

    let out = tmp.path().join("coefficients");
    let text = run_ok(
        qheat()
            .args(["coefficients", case.to_str().unwrap(), "-o"])
            .arg(&out),
    );
    assert!(text.contains("potential solved at every run"), "{text}");
    let s: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    assert_eq!(
        s["response"]["electrostatics"]["potential_solved_at_every_run"],
        true
    );
}

/// sites.csv with `[electrostatics]`: electron_density_per_nm is the count
/// the Poisson equation sees (electrons_poisson over the 0.5 nm spacing),
/// not the plain sum over the grid, which is off by the band-edge sampling
/// error (~1 % in flat doped regions); the two columns agree to the
/// rounding of the printed numbers (1e-12 relative).
#[test]
fn sites_density_is_the_poisson_count() {
    let tmp = tempfile::tempdir().unwrap();
    let case = tmp.path().join("case.toml");
    std::fs::write(&case, barrier_text(false, true, "")).unwrap();
    let out = tmp.path().join("solve");
    run_ok(
        qheat()
            .args(["solve", case.to_str().unwrap(), "--quiet", "-o"])
            .arg(&out),
    );
    let sites = std::fs::read_to_string(out.join("sites.csv")).unwrap();
    let mut lines = sites.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = |n: &str| header.iter().position(|&h| h == n).unwrap();
    let (cd, cp) = (col("electron_density_per_nm"), col("electrons_poisson"));
    for l in lines {
        let v: Vec<f64> = l.split(',').map(|x| x.parse().unwrap()).collect();
        let (d, p) = (v[cd] * 0.5, v[cp]);
        assert!((d - p).abs() <= 1e-12 * p.abs(), "{l}");
    }
}

/// [`barrier_text`] with the energy window left to the case (the step
/// alone given), so that it follows the bias as the curves make it.
fn barrier_free_window(phonon: bool) -> Case {
    let text = barrier_text(phonon, true, "").replace("min_ev = -0.1\nmax_ev = 0.6\n", "");
    assert!(!text.contains("min_ev"));
    Case::parse(&text, "ops.toml", Path::new(".")).unwrap()
}

/// The zero-bias current and cold-lead heat current of `case` between the
/// leads at `temps` (left, right; K), both Fermi levels at `mu`, on the
/// grid `grid`, solved from nothing.
fn separate_point(
    case: &Case,
    grid: &qheat::thermo::common_grid::CommonGrid,
    (mu, temps, v): (f64, (f64, f64), f64),
) -> (f64, f64) {
    use qheat::leads::Side;
    let c = case
        .with(CaseKey::LeadFermiLevel(Side::Left), mu)
        .unwrap()
        .with(CaseKey::LeadFermiLevel(Side::Right), mu)
        .unwrap()
        .with(CaseKey::LeadTemperature(Side::Left), temps.0)
        .unwrap()
        .with(CaseKey::LeadTemperature(Side::Right), temps.1)
        .unwrap();
    let c = grid
        .apply(&c)
        .unwrap()
        .with(CaseKey::BiasVoltage, v)
        .unwrap();
    let r = c.resolve().unwrap();
    assert!(grid.matches(&r.problem));
    let es = r.electrostatics.as_ref();
    let p = solve_point(&r.problem, es, &r.scba, PointStart::default(), &mut Silent).unwrap();
    assert!(p.converged());
    let o = observe(&p.solution);
    (o.current_a, o.heat_current_right_w)
}

/// A cooler with the potential solved at every point ends its march out in
/// bias for a reason it states, with every solve converged: on this small
/// doped barrier the charge holds the barrier up under bias, so the
/// cooling power does not fall back by half within the bias limit
/// (2 Φ0 + 10 kT)/e, and the march ends on the limit or where the cooling
/// power levels off, never on a solve that did not converge or on the step
/// limit. The range is whole steps of kT/e within the limit. Its zero-bias
/// point equals a separate self-consistent solve at 0 V from nothing on
/// the same grid: the potential of each is known to its outer tolerance
/// 1e-5 eV, which moves a current over the barrier by about 1e-5 eV/kT ≈
/// 4e-4 of itself, so 2e-3 relative.
#[test]
fn cooler_with_electrostatics_ends_its_march_for_a_stated_reason() {
    use qheat::thermo::cooler::RangeEnd;
    let case = barrier_free_window(false);
    let settings = CoolerSettings::new(300.0, 290.0, 3).with_figure_of_merit(false);
    let r = cooler(&case, &settings, &mut Silent).unwrap();
    let range = r.range;
    eprintln!("{range:?}, {} solves", r.solves);
    for p in &r.curve {
        eprintln!(
            "V {:.4} Q {:.4e} I {:.4e} drop {:?} outer {:?} {}",
            p.voltage_v,
            p.cooling_power_w,
            p.current_a,
            p.potential_drop_v,
            p.outer_iterations,
            p.converged
        );
    }
    assert!(r.converged && r.curve.iter().all(|p| p.converged));
    assert!(r.electrostatics.is_some_and(|e| e.converged));
    assert!(
        matches!(range.reason, RangeEnd::BiasLimit | RangeEnd::LevelledOff),
        "{range:?}"
    );
    assert!(range.not_converged_at_v.is_none());
    let kt = qheat::units::thermal_energy_ev(295.0);
    let limit = range.limit_v.expect("a bias limit with electrostatics");
    assert!((range.end_v.abs() - range.steps as f64 * kt).abs() < 1e-12);
    assert!(range.end_v.abs() <= limit);
    if range.reason == RangeEnd::BiasLimit {
        assert!((range.steps + 1) as f64 * kt > limit);
    }
    // A maximum at the end of a range cut by the bias limit is a lower
    // bound and says so; one where the power levelled off, or inside the
    // range, is not flagged.
    let at_end = (r.voltage_at_max_v - range.end_v).abs() <= 1e-6 * kt;
    assert_eq!(
        r.max_at_range_end,
        at_end && range.reason == RangeEnd::BiasLimit,
        "maximum at {} V, range {range:?}",
        r.voltage_at_max_v
    );
    assert_eq!(r.curve.last().unwrap().voltage_v, range.end_v);

    let mu = r.fermi_level_ev;
    let (i0, q0) = separate_point(&case, &r.energy_grid, (mu, (300.0, 290.0), 0.0));
    let zero = &r.curve[0];
    assert_eq!(zero.voltage_v, 0.0);
    for (x, y, what) in [
        (zero.current_a, i0, "I(0)"),
        (zero.cooling_power_w, q0, "cooling power at 0 V"),
    ] {
        assert!(
            (x - y).abs() <= 2e-3 * y.abs(),
            "{what}: curve {x:e}, separate {y:e}"
        );
    }
}

/// A generator with the potential solved at every point has its
/// open-circuit voltage where the current crosses zero: a separate solve
/// at V_oc from nothing, on the same grid, carries a current below 1 % of
/// the short-circuit current. The root is located to the potential's
/// tolerance 1e-5 V (and each solve's potential is known to 1e-5 eV), so
/// |I(V_oc)| ≲ G·2e-5 V against I(0) = G·V_oc with V_oc of some mV here:
/// about 2e-5/4e-3 ≈ 5e-3 of I(0) at worst, hence 1e-2.
#[test]
fn generator_with_electrostatics_has_zero_current_at_its_open_circuit_voltage() {
    let case = barrier_free_window(false);
    let settings = GeneratorSettings::new(320.0, 280.0, 3);
    let r = generator(&case, &settings, &mut Silent).unwrap();
    eprintln!(
        "V_oc {} (estimate {}), I(0) {}, {} solves",
        r.open_circuit_voltage_v,
        r.open_circuit_voltage_estimate_v,
        r.short_circuit_current_a,
        r.solves
    );
    assert!(r.converged && r.electrostatics.is_some_and(|e| e.converged));
    let voc = r.open_circuit_voltage_v;
    assert!(voc != 0.0 && voc.signum() == r.open_circuit_voltage_estimate_v.signum());
    let mu = r.fermi_level_ev;
    let (i, _) = separate_point(&case, &r.energy_grid, (mu, (320.0, 280.0), voc));
    let i0 = r.short_circuit_current_a;
    assert!(i.abs() <= 1e-2 * i0.abs(), "I(V_oc) {i:e}, I(0) {i0:e}");
    let (j0, _) = separate_point(&case, &r.energy_grid, (mu, (320.0, 280.0), 0.0));
    assert!(
        (j0 - i0).abs() <= 2e-3 * i0.abs(),
        "I(0) {i0:e}, separate {j0:e}"
    );
}
