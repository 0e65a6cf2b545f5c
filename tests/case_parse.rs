//! Case files that should load: defaults, edits, snapping, warnings, and the
//! blocks device kind against the chain kind.

#![allow(clippy::needless_range_loop)]

use qheat::case::{Case, CaseErrorKind, CaseKey, Resolved, ResponseSplit};
use qheat::device::{BiasDrop, strip_mode_energy};
use qheat::leads::{Lead, Side};
use qheat::scba::Mixing;
use qheat::units::{hopping_ev, thermal_energy_ev};
use std::path::Path;

const BASE: &str = r#"
name = "base"
[device]
kind = "chain"
spacing_nm = 0.5
length_nm = 20.0
effective_mass = 0.1
[[device.region]]
from_nm = 8.0
to_nm = 12.0
offset_ev = 0.1
[leads.left]
fermi_level_ev = 0.05
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.05
temperature_k = 300.0
"#;

fn parse(text: &str) -> Case {
    Case::parse(text, "test.toml", Path::new(".")).unwrap_or_else(|e| panic!("{e}"))
}

fn with(extra: &str) -> Case {
    parse(&format!("{BASE}{extra}"))
}

fn resolved(extra: &str) -> Resolved {
    with(extra).resolve().unwrap()
}

#[test]
fn defaults_are_the_documented_ones() {
    let case = with("");
    assert_eq!(case.name, "base");
    let r = case.resolve().unwrap();
    let p = &r.problem;
    assert_eq!(p.device.cells(), 40);
    assert_eq!(p.device.orbitals, 1);
    assert_eq!(p.spin_degeneracy, 2.0);
    assert_eq!(r.voltage_v, 0.0);
    assert_eq!(r.bias_drop, BiasDrop::Leads);
    assert_eq!(r.response_split, ResponseSplit::Symmetric);
    assert_eq!(r.phonon_conductance_w_per_k, 0.0);
    assert!(
        r.notes.iter().any(|n| n.contains("κ_ph = 0")),
        "{:?}",
        r.notes
    );
    assert!(p.scattering.is_coherent());
    assert!(p.scattering.dephasing_ev2.is_empty());
    assert!(!p.scattering.hermitian_part);
    assert_eq!(r.scba.tolerance, 1e-7);
    assert_eq!(r.scba.max_iterations, 300);
    assert_eq!(r.scba.current_floor_a, 1e-18);
    assert_eq!(
        r.scba.mixing,
        Mixing::Anderson {
            depth: 6,
            damping: 1.0
        }
    );
    assert_eq!(r.scba.energy_order, qheat::scba::EnergyOrder::Auto);
    assert_eq!(p.decimation.eta_ev, 1e-7);
    assert_eq!(p.decimation.tolerance_ev, 1e-13);
    // grid: step kT/10, from half a step above the band edge (0 here) to
    // the first point at or above µ + 20 kT.
    let kt = thermal_energy_ev(300.0);
    assert!((p.grid.step_ev - kt / 10.0).abs() < 1e-15);
    assert!((p.grid.min_ev - 0.5 * p.grid.step_ev).abs() < 1e-15);
    assert!(p.grid.max_ev() >= 0.05 + 20.0 * kt - 1e-12);
    assert!(p.grid.max_ev() < 0.05 + 20.0 * kt + p.grid.step_ev);
    // chain: on-site Ec + U + 2t, coupling −t; the barrier covers cells
    // with 8 ≤ x < 12 nm (x = 8.0 … 11.5: 8 cells).
    let t = hopping_ev(0.1, 0.5);
    assert!((p.device.onsite[0][(0, 0)].re - 2.0 * t).abs() < 1e-12);
    assert!((p.device.coupling[0][(0, 0)].re + t).abs() < 1e-12);
    let raised = p.device.potential_ev.iter().filter(|&&u| u == 0.1).count();
    assert_eq!(raised, 8);
    assert_eq!(p.device.potential_ev[16], 0.1);
    assert_eq!(p.device.potential_ev[24], 0.0);
    assert!(r.warnings.is_empty(), "{:?}", r.warnings);
    // leads continue the end cells
    match &p.left.lead {
        Lead::Periodic { onsite, hopping } => {
            assert_eq!(onsite[(0, 0)], p.device.onsite[0][(0, 0)]);
            assert_eq!(hopping[(0, 0)], p.device.coupling[0][(0, 0)]);
        }
        other => panic!("{other:?}"),
    }
    let text = r.describe();
    for want in ["40 cells", "t = ", "energies", "memory", "phonons     none"] {
        assert!(text.contains(want), "{want} missing in\n{text}");
    }
}

#[test]
fn memory_estimate_follows_its_formula() {
    let r = resolved("[[phonon]]\nenergy_ev = 0.03\ncoupling_ev2 = 1e-3\n");
    let e = r.problem.grid.count as u64;
    let n = 40u64;
    let t = rayon::current_num_threads() as u64;
    // b = 1, Anderson depth 6 with its history in f64 (A = 2·6 + 2 vectors
    // of 8-byte numbers), no Hermitian part and no dephasing, so P = 2
    // numbers mixed per site (src/scba module doc). The phonon alone links
    // the two colours of the red-black order (bands of w = ħω/ΔE energies),
    // so only the red rows carry a history:
    // E·N·72 + E_red·N·8·2·A + 8·E·(N − 1) + 2·E·(16 + 64) + T·24·N
    let fixed = 8 * e * (n - 1) + 2 * e * 80 + t * 24 * n;
    let w = (0.03 / r.problem.grid.step_ev).round() as u64;
    let red = (0..e).filter(|k| (k / w).is_multiple_of(2)).count() as u64;
    assert!(
        red < e && red >= e / 2 - w,
        "red rows {red} of {e} (w = {w})"
    );
    assert_eq!(
        r.memory_estimate_bytes(),
        e * n * 72 + red * n * 16 * 14 + fixed
    );
    // With the Hermitian part Re Σ^r is mixed too (P = 3) on every row (the
    // black rows then depend on black energies), and the rebuild holds the
    // broadening and its transform (16 per site).
    let r = resolved(
        "[[phonon]]\nenergy_ev = 0.03\ncoupling_ev2 = 1e-3\n[solver]\nhermitian_part = \"include\"\n",
    );
    assert_eq!(r.problem.grid.count as u64, e);
    assert_eq!(
        r.memory_estimate_bytes(),
        e * n * (72 + 24 * 14 + 16) + fixed
    );
}

#[test]
fn round_trip_through_text_gives_the_same_problem() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo");
    for name in ["peltier-barrier", "strip-constriction", "resonant-filter"] {
        let case = Case::load(&dir.join(format!("{name}.toml"))).unwrap();
        let again = Case::parse(&case.to_toml_string(), "again", &dir).unwrap();
        let (a, b) = (case.resolve().unwrap(), again.resolve().unwrap());
        assert_eq!(a.problem.grid, b.problem.grid);
        assert_eq!(a.problem.scattering, b.problem.scattering);
        assert_eq!(a.problem.device.potential_ev, b.problem.device.potential_ev);
        assert_eq!(a.describe(), b.describe());
        // and through an edit, whose text is generated
        let edited = case.with(CaseKey::BiasVoltage, 0.02).unwrap();
        let text = edited.to_toml_string();
        assert!(
            text.starts_with('#') && text.contains("bias.voltage_v = 0.02"),
            "{text}"
        );
        let back = Case::parse(&text, "edited", &dir).unwrap();
        assert_eq!(back.resolve().unwrap().voltage_v, 0.02);
        assert_eq!(
            back.resolve().unwrap().problem.grid,
            edited.resolve().unwrap().problem.grid
        );
    }
}

#[test]
fn with_changes_the_result() {
    let case = with("");
    let biased = case.with(CaseKey::BiasVoltage, 0.1).unwrap();
    let r = biased.resolve().unwrap();
    // µL = µL0 − V/2, µR = µR0 + V/2
    assert!((r.problem.left.fermi_level_ev - 0.0).abs() < 1e-15);
    assert!((r.problem.right.fermi_level_ev - 0.1).abs() < 1e-15);
    assert!((r.problem.voltage_v() - 0.1).abs() < 1e-15);
    assert_eq!(r.zero_bias_fermi_levels_ev, (0.05, 0.05));
    assert_eq!(biased.edits(), &[(CaseKey::BiasVoltage, 0.1)]);

    let hot = case
        .with(CaseKey::LeadTemperature(Side::Left), 350.0)
        .unwrap();
    assert_eq!(hot.resolve().unwrap().problem.left.temperature_k, 350.0);

    let taller = case.with(CaseKey::RegionOffset(0), 0.2).unwrap();
    assert_eq!(
        taller.resolve().unwrap().problem.device.potential_ev[20],
        0.2
    );

    let longer = case.with(CaseKey::DeviceLength, 30.0).unwrap();
    assert_eq!(longer.resolve().unwrap().problem.device.cells(), 60);

    let finer = case.with(CaseKey::GridStep, 0.001).unwrap();
    assert_eq!(finer.resolve().unwrap().problem.grid.step_ev, 0.001);

    let ph = with(
        "[[phonon]]\nenergy_ev = 0.03\ncoupling_ev2 = 1e-3\n[[phonon]]\nenergy_ev = 0.05\ncoupling_ev2 = 1e-3\n",
    );
    let stronger = ph.with(CaseKey::PhononCoupling(1), 4e-3).unwrap();
    let modes = &stronger.resolve().unwrap().problem.scattering.phonons;
    assert!(modes[1].coupling_ev2.iter().all(|&d| d == 4e-3));
    assert!(modes[0].coupling_ev2.iter().all(|&d| d == 1e-3));

    let wide = case.with(CaseKey::RegionTo(0), 14.0).unwrap();
    let raised = wide
        .resolve()
        .unwrap()
        .problem
        .device
        .potential_ev
        .iter()
        .filter(|&&u| u > 0.0)
        .count();
    assert_eq!(raised, 12);

    // edits chain
    let both = biased
        .with(CaseKey::LeadFermiLevel(Side::Right), 0.06)
        .unwrap();
    assert_eq!(both.edits().len(), 2);
    assert!((both.resolve().unwrap().problem.right.fermi_level_ev - 0.11).abs() < 1e-15);
}

#[test]
fn with_refuses_unknown_keys_and_bad_values() {
    let case = with("");
    // Names are read into typed keys once; an unknown one gets the close
    // matches among this case's keys.
    let bad = "bias.voltge_v".parse::<CaseKey>().unwrap_err();
    let e = case.unknown_key_error(&bad);
    assert_eq!(e.kind, CaseErrorKind::UnknownKey);
    assert_eq!(e.suggestion.as_deref(), Some("bias.voltage_v"), "{e}");
    assert!(e.to_string().contains("bias.voltage_v"), "{e}");

    let e = case.with(CaseKey::RegionOffset(3), 0.1).unwrap_err();
    assert!(e.to_string().contains("has 1 entries"), "{e}");

    let e = case.unknown_key_error(&"device.widht_sites".parse::<CaseKey>().unwrap_err());
    assert_eq!(e.suggestion.as_deref(), Some("device.width_sites"), "{e}");

    // a value that fails validation names the key and the edit
    let e = case
        .with(CaseKey::LeadTemperature(Side::Left), -4.0)
        .unwrap_err();
    let s = e.to_string();
    assert!(
        s.contains("leads.left.temperature_k") && s.contains("found -4"),
        "{s}"
    );
    assert!(s.contains("after setting"), "{s}");
    assert_eq!(e.location, None);

    let e = case.with(CaseKey::SpinDegeneracy, 1.5).unwrap_err();
    assert!(e.to_string().contains("whole number"), "{e}");
    assert!(case.with(CaseKey::SpinDegeneracy, 1.0).is_ok());

    let e = case.with(CaseKey::BiasVoltage, f64::NAN).unwrap_err();
    assert!(e.to_string().contains("finite"), "{e}");
}

#[test]
fn phonon_snapping_is_reported() {
    // 37.1 meV on a 2 meV grid snaps to 38 meV (19 steps): a 2.4 % change.
    let r =
        resolved("[grid]\nstep_ev = 0.002\n[[phonon]]\nenergy_ev = 0.0371\ncoupling_ev2 = 1e-3\n");
    let m = &r.problem.scattering.phonons[0];
    assert_eq!(m.steps, 19);
    assert!((m.energy_ev - 0.038).abs() < 1e-15);
    assert_eq!(m.requested_energy_ev, 0.0371);
    assert!(
        r.warnings
            .iter()
            .any(|w| w.contains("snapped") && w.contains("phonon.0")),
        "{:?}",
        r.warnings
    );
    assert!(
        r.describe()
            .contains("37.100 meV -> 38.000 meV (19 grid steps)"),
        "{}",
        r.describe()
    );
    // bath temperature defaults to the mean of the leads
    assert_eq!(m.bath_temperature_k, 300.0);
    // 36.1 meV -> 36 meV on a 2 meV grid is a 0.28 % change: silent
    let r =
        resolved("[grid]\nstep_ev = 0.002\n[[phonon]]\nenergy_ev = 0.0361\ncoupling_ev2 = 1e-3\n");
    assert!(r.warnings.is_empty(), "{:?}", r.warnings);
    // the default max includes ħω
    let kt = thermal_energy_ev(300.0);
    assert!(r.problem.grid.max_ev() >= 0.05 + 20.0 * kt + 0.036 - 1e-12);
}

#[test]
fn a_coarse_phonon_snap_is_an_error_unless_allowed() {
    // 3 meV on a 2 meV grid: 1.5 steps round to 2, so ħω becomes 4 meV
    // (+33 %). The limit is 5 %: beyond it the phonon is another phonon.
    let phonon = "[[phonon]]\nenergy_ev = 0.003\ncoupling_ev2 = 1e-3\n";
    let text = format!("{BASE}[grid]\nstep_ev = 0.002\n{phonon}");
    let err = Case::parse(&text, "test.toml", Path::new(".")).unwrap_err();
    assert_eq!(err.key.as_deref(), Some("phonon.0.energy_ev"), "{err}");
    assert!(err.location.is_some(), "{err}");
    let shown = err.to_string();
    for part in [
        "3.0000 meV",
        "snaps to 4.0000 meV",
        "step 2.0000 meV",
        "finer grid.step_ev",
        "allow_coarse_phonon_snap = true",
    ] {
        assert!(shown.contains(part), "`{part}` missing: {shown}");
    }
    // Asked for explicitly: accepted, with a warning, and `check` says so.
    let r = resolved(&format!(
        "[grid]\nstep_ev = 0.002\nallow_coarse_phonon_snap = true\n{phonon}"
    ));
    let m = &r.problem.scattering.phonons[0];
    assert_eq!(m.steps, 2);
    assert!(
        r.warnings
            .iter()
            .any(|w| w.contains("phonon.0") && w.contains("allow_coarse_phonon_snap")),
        "{:?}",
        r.warnings
    );
    let shown = r.describe();
    assert!(
        shown.contains("moved by at most 33.33 %")
            && shown.contains("grid.allow_coarse_phonon_snap = true"),
        "{shown}"
    );
    // Without a coarse snap `check` states the limit and the key.
    let r =
        resolved("[grid]\nstep_ev = 0.002\n[[phonon]]\nenergy_ev = 0.036\ncoupling_ev2 = 1e-3\n");
    assert!(
        r.describe()
            .contains("at most 5 % allowed (grid.allow_coarse_phonon_snap = true accepts more)"),
        "{}",
        r.describe()
    );
    // 21 meV on a 2 meV grid becomes 22 meV (+4.8 %): under the limit, a warning.
    let r =
        resolved("[grid]\nstep_ev = 0.002\n[[phonon]]\nenergy_ev = 0.021\ncoupling_ev2 = 1e-3\n");
    assert!(
        r.warnings.iter().any(|w| w.contains("snapped")),
        "{:?}",
        r.warnings
    );
}

#[test]
fn grid_keys_set_by_with_keep_the_snap_rules() {
    // Linear-response runs set the grid explicitly through `with`: the
    // permission key survives the regenerated document, and without it the
    // same edit is refused with the key named.
    let phonon = "[[phonon]]\nenergy_ev = 0.036\ncoupling_ev2 = 1e-3\n";
    let strict = with(&format!("[grid]\nstep_ev = 0.002\n{phonon}"));
    for (k, v) in [
        (CaseKey::GridMin, -0.05),
        (CaseKey::GridMax, 0.6),
        (CaseKey::GridStep, 0.004),
    ] {
        strict.with(k, v).unwrap_or_else(|e| panic!("{k}: {e}"));
    }
    // 36 meV on a 10 meV grid: 4 steps = 40 meV, +11 %.
    let err = strict.with(CaseKey::GridStep, 0.01).unwrap_err();
    assert_eq!(err.key.as_deref(), Some("phonon.0.energy_ev"), "{err}");
    assert!(
        err.to_string().contains("after setting `grid.step_ev`"),
        "{err}"
    );
    let allowed = with(&format!(
        "[grid]\nstep_ev = 0.002\nallow_coarse_phonon_snap = true\n{phonon}"
    ));
    let r = allowed
        .with(CaseKey::GridStep, 0.01)
        .unwrap()
        .resolve()
        .unwrap();
    assert_eq!(r.problem.scattering.phonons[0].steps, 4);
}

#[test]
fn phonon_energies_beyond_lattices_or_the_window_are_refused() {
    // No lattice vibrates above about 0.2 eV; 0.5 eV is the limit so that a
    // value in meV written as eV cannot pass.
    let err = Case::parse(
        &format!("{BASE}[[phonon]]\nenergy_ev = 0.55\ncoupling_ev2 = 1e-3\n"),
        "test.toml",
        Path::new("."),
    )
    .unwrap_err();
    assert_eq!(err.key.as_deref(), Some("phonon.0.energy_ev"), "{err}");
    assert!(err.to_string().contains("≤ 0.5"), "{err}");
    assert!(err.to_string().contains("found 0.55 eV"), "{err}");
    // An explicit window 0.2 eV wide cannot hold a 0.25 eV phonon.
    let err = Case::parse(
        &format!(
            "{BASE}[grid]\nmin_ev = 0.0\nmax_ev = 0.2\n[[phonon]]\nenergy_ev = 0.25\ncoupling_ev2 = 1e-3\n"
        ),
        "test.toml",
        Path::new("."),
    )
    .unwrap_err();
    assert_eq!(err.key.as_deref(), Some("phonon.0.energy_ev"), "{err}");
    assert!(err.to_string().contains("0 < ħω <"), "{err}");
    assert!(err.to_string().contains("found 0.25 eV"), "{err}");
}

#[test]
fn phonon_and_dephasing_regions_cover_cells_from_le_x_lt_to() {
    let r = resolved(
        "[[phonon]]\nenergy_ev = 0.03\ncoupling_ev2 = 1e-3\nfrom_nm = 5.0\nto_nm = 7.0\nbath_temperature_k = 77.0\n[dephasing]\nstrength_ev2 = 2e-3\nfrom_nm = 0.0\nto_nm = 1.0\n",
    );
    let s = &r.problem.scattering;
    let on: Vec<usize> = (0..40)
        .filter(|&i| s.phonons[0].coupling_ev2[i] > 0.0)
        .collect();
    assert_eq!(on, vec![10, 11, 12, 13]); // x = 5.0, 5.5, 6.0, 6.5
    assert_eq!(s.phonons[0].bath_temperature_k, 77.0);
    let d: Vec<usize> = (0..40).filter(|&i| s.dephasing_ev2[i] > 0.0).collect();
    assert_eq!(d, vec![0, 1]);
    assert!(!s.is_coherent());
}

#[test]
fn warnings_appear() {
    // step above kT/4 (kT = 25.85 meV at 300 K): 10 meV warns
    let r = resolved("[grid]\nstep_ev = 0.01\n");
    assert!(
        r.warnings.iter().any(|w| w.contains("kB·T_min/4")),
        "{:?}",
        r.warnings
    );
    // a window that clips the occupied range at both ends
    let r = resolved("[grid]\nmin_ev = 0.02\nmax_ev = 0.2\n");
    assert!(
        r.warnings.iter().any(|w| w.contains("grid.min_ev")),
        "{:?}",
        r.warnings
    );
    assert!(
        r.warnings.iter().any(|w| w.contains("grid.max_ev")),
        "{:?}",
        r.warnings
    );
    // continuum dispersion: a 1 nm spacing and m* = 1 give t = 38 meV, far
    // below the default window top (~0.57 eV, above the band top 4t).
    let text = BASE
        .replace("spacing_nm = 0.5", "spacing_nm = 1.0")
        .replace("effective_mass = 0.1", "effective_mass = 1.0");
    let r = parse(&text).resolve().unwrap();
    assert!(
        r.warnings
            .iter()
            .any(|w| w.contains("·t (t = ") && w.contains("4t")),
        "{:?}",
        r.warnings
    );
    // a region that covers no cell
    let r = resolved("[[device.region]]\nfrom_nm = 1.1\nto_nm = 1.3\noffset_ev = 0.1\n");
    assert!(
        r.warnings.iter().any(|w| w.contains("covers no cell")),
        "{:?}",
        r.warnings
    );
    // linear mixing with Anderson settings
    let r = resolved("[solver]\nmixing = \"linear\"\nanderson_depth = 3\n");
    assert_eq!(r.scba.mixing, Mixing::Linear { factor: 0.5 });
    assert!(
        r.warnings.iter().any(|w| w.contains("ignored")),
        "{:?}",
        r.warnings
    );
}

#[test]
fn continuum_warning_quantifies_the_departure() {
    // spacing 0.5 nm, m* = 0.5: t = ħ²/(2 m* a²) ≈ 0.305 eV; a window to
    // 0.6 eV reaches ~1.97 t, where ka = acos(1 − E/2t) and the lattice band
    // lies (t(ka)² − E)/(t(ka)²) below the parabola at the same k.
    let text = BASE.replace("effective_mass = 0.1", "effective_mass = 0.5");
    let r = parse(&format!("{text}[grid]\nmax_ev = 0.6\n"))
        .resolve()
        .unwrap();
    let t = hopping_ev(0.5, 0.5);
    let e = r.problem.grid.max_ev();
    let ka = (1.0 - e / (2.0 * t)).acos();
    let pct = 100.0 * (t * ka * ka - e) / (t * ka * ka);
    let want = format!("{pct:.0} %");
    assert!(
        r.warnings.iter().any(|w| w.contains(&want)),
        "{want} in {:?}",
        r.warnings
    );
}

#[test]
fn bias_and_drop() {
    let r =
        resolved("[bias]\nvoltage_v = 0.1\ndrop = { linear = { from_nm = 8.0, to_nm = 12.0 } }\n");
    let p = &r.problem;
    // (µ1 − µ2)(½ − s): the left end gets (µ1 − µ2)/2 = −0.05, the right +0.05
    assert!((p.device.potential_ev[0] + 0.05).abs() < 1e-14);
    assert!((p.device.potential_ev[39] - 0.05).abs() < 1e-14);
    // with a linear drop the leads follow the end cells
    match (&p.left.lead, &p.right.lead) {
        (Lead::Periodic { onsite: l, .. }, Lead::Periodic { onsite: r, .. }) => {
            assert_eq!(l[(0, 0)], p.device.onsite[0][(0, 0)]);
            assert_eq!(r[(0, 0)], p.device.onsite[39][(0, 0)]);
        }
        other => panic!("{other:?}"),
    }
    assert_eq!(
        r.bias_drop,
        BiasDrop::Linear {
            from_nm: 8.0,
            to_nm: 12.0
        }
    );
    // drop at the leads: the lead bands stay where the unbiased end cells are
    let r = resolved("[bias]\nvoltage_v = 0.1\n");
    let (lo, _) = r.problem.left.lead.band_range().unwrap();
    assert!(lo.abs() < 1e-12, "{lo}");
    assert_eq!(r.problem.device.potential_ev[0], 0.0);
}

#[test]
fn energy_selective_and_wide_band_leads() {
    let text = BASE.replace(
        "[leads.right]\nfermi_level_ev = 0.05",
        "[leads.right]\nband_edge_ev = -0.2\neffective_mass = 0.2\nfermi_level_ev = 0.05",
    );
    let r = parse(&text).resolve().unwrap();
    let t = hopping_ev(0.2, 0.5);
    let (lo, hi) = r.problem.right.lead.band_range().unwrap();
    assert!(
        (lo + 0.2).abs() < 1e-12 && (hi - (-0.2 + 4.0 * t)).abs() < 1e-12,
        "{lo} {hi}"
    );
    // the window starts half a step above the lowest lead band edge
    assert!((r.problem.grid.min_ev - (-0.2 + 0.5 * r.problem.grid.step_ev)).abs() < 1e-12);

    let text = BASE
        .replace("[leads.left]\n", "[leads.left]\nwide_band_ev = 0.01\n")
        .replace("[leads.right]\n", "[leads.right]\nwide_band_ev = 0.02\n");
    let r = parse(&text).resolve().unwrap();
    match &r.problem.right.lead {
        Lead::WideBand { gamma } => assert_eq!(gamma[(0, 0)].re, 0.02),
        other => panic!("{other:?}"),
    }
    // both wide-band: the window starts max(20 kT, 10 Γ) below
    // min(lowest level, µ) = 0 here; 20 kT = 0.52 eV > 10 Γ = 0.2 eV.
    let kt = thermal_energy_ev(300.0);
    assert!(
        (r.problem.grid.min_ev - (0.0 - 20.0 * kt)).abs() < 1e-12,
        "{}",
        r.problem.grid.min_ev
    );
    assert!(
        r.notes.iter().any(|n| n.contains("wide-band")),
        "{:?}",
        r.notes
    );
}

#[test]
fn strip_band_bottom_is_the_first_transverse_mode() {
    // Closed form (common practice): hard-wall strip modes 2t(1 − cos(nπ/(W+1)))
    // above Ec; tolerance 1e-15 because both sides evaluate the same formula.
    let text = BASE.replace(
        "kind = \"chain\"",
        "kind = \"strip\"\nwidth_sites = 5\nband_edge_ev = -0.1",
    );
    let r = parse(&text).resolve().unwrap();
    let t = hopping_ev(0.1, 0.5);
    let bottom = -0.1 + 2.0 * t * (1.0 - (std::f64::consts::PI / 6.0).cos());
    assert!((bottom - (-0.1 + strip_mode_energy(5, t, 1))).abs() < 1e-15);
    let d = &r.problem.device;
    assert_eq!(d.orbitals, 5);
    assert!((d.lowest_band_edge() - bottom).abs() < 1e-12);
    // the lead band range (sampled and refined for b > 1) finds the same
    // bottom; 1e-9 eV allows for the golden-section refinement
    let (lo, _) = r.problem.left.lead.band_range().unwrap();
    assert!((lo - bottom).abs() < 1e-9, "{lo} vs {bottom}");
    assert!(
        (r.problem.grid.min_ev - (lo.min(bottom) + 0.5 * r.problem.grid.step_ev)).abs() < 1e-12
    );
    assert_eq!(r.problem.sites(), 200);
}

fn write_npy(path: &Path, a: ndarray::ArrayD<f64>) {
    ndarray_npy::write_npy(path, &a).unwrap();
}

fn blocks_text(files: (&str, &str), extra: &str) -> String {
    format!(
        r#"name = "blocks"
[device]
kind = "blocks"
spacing_nm = 0.5
onsite_file = "{}"
coupling_file = "{}"
{extra}
[[device.region]]
from_nm = 8.0
to_nm = 12.0
offset_ev = 0.1
[leads.left]
fermi_level_ev = 0.05
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.05
temperature_k = 300.0
"#,
        files.0, files.1
    )
}

fn assert_same_problem(a: &Resolved, b: &Resolved) {
    let (p, q) = (&a.problem, &b.problem);
    assert_eq!(p.device.cells(), q.device.cells());
    // 1e-12 eV: the csv route prints t to 17 digits and parses it back
    for i in 0..p.device.cells() {
        assert!((p.device.onsite[i][(0, 0)] - q.device.onsite[i][(0, 0)]).norm() < 1e-12);
        assert!((p.device.band_edge_ev[i] - q.device.band_edge_ev[i]).abs() < 1e-12);
    }
    for i in 0..p.device.cells() - 1 {
        assert!((p.device.coupling[i][(0, 0)] - q.device.coupling[i][(0, 0)]).norm() < 1e-12);
    }
    assert_eq!(p.grid.count, q.grid.count);
    assert!((p.grid.min_ev - q.grid.min_ev).abs() < 1e-12);
    assert_eq!(p.device.potential_ev, q.device.potential_ev);
}

#[test]
fn blocks_from_npy_and_csv_equal_the_chain() {
    let chain = resolved("");
    let t = hopping_ev(0.1, 0.5);
    let dir = tempfile::tempdir().unwrap();

    // (N, b, b) stacks
    let on = ndarray::Array3::from_elem((40, 1, 1), 2.0 * t).into_dyn();
    let co = ndarray::Array3::from_elem((39, 1, 1), -t).into_dyn();
    write_npy(&dir.path().join("on.npy"), on);
    write_npy(&dir.path().join("co.npy"), co);
    let case = Case::parse(&blocks_text(("on.npy", "co.npy"), ""), "b.toml", dir.path()).unwrap();
    assert_same_problem(&chain, &case.resolve().unwrap());

    // single (b, b) blocks: on-site repeated `cells` times, one coupling
    write_npy(
        &dir.path().join("on1.npy"),
        ndarray::Array2::from_elem((1, 1), 2.0 * t).into_dyn(),
    );
    write_npy(
        &dir.path().join("co1.npy"),
        ndarray::Array2::from_elem((1, 1), -t).into_dyn(),
    );
    let case = Case::parse(
        &blocks_text(("on1.npy", "co1.npy"), "cells = 40"),
        "b.toml",
        dir.path(),
    )
    .unwrap();
    assert_same_problem(&chain, &case.resolve().unwrap());

    // complex128 coupling with zero imaginary part
    let co_c = ndarray::Array3::from_elem((39, 1, 1), num_complex::Complex64::new(-t, 0.0));
    ndarray_npy::write_npy(dir.path().join("coc.npy"), &co_c).unwrap();
    let case = Case::parse(
        &blocks_text(("on.npy", "coc.npy"), ""),
        "b.toml",
        dir.path(),
    )
    .unwrap();
    assert_same_problem(&chain, &case.resolve().unwrap());

    // csv: every on-site element, one coupling block for every pair
    let mut on_csv = String::from("cell,row,col,re_ev,im_ev\n");
    for i in 0..40 {
        on_csv.push_str(&format!("{i},0,0,{:.17e},0\n", 2.0 * t));
    }
    std::fs::write(dir.path().join("on.csv"), on_csv).unwrap();
    std::fs::write(
        dir.path().join("co.csv"),
        format!("cell,row,col,re_ev,im_ev\n0,0,0,{:.17e},0\n", -t),
    )
    .unwrap();
    let case = Case::parse(&blocks_text(("on.csv", "co.csv"), ""), "b.toml", dir.path()).unwrap();
    assert_same_problem(&chain, &case.resolve().unwrap());
    assert_eq!(case.resolve().unwrap().device_kind, "blocks");

    // load() resolves file names against the case file's folder
    std::fs::write(
        dir.path().join("case.toml"),
        blocks_text(("on.csv", "co.csv"), ""),
    )
    .unwrap();
    let loaded = Case::load(&dir.path().join("case.toml")).unwrap();
    assert_same_problem(&chain, &loaded.resolve().unwrap());
}

#[test]
fn blocks_two_orbitals_from_csv() {
    // Two uncoupled orbitals per cell; the csv lists only non-zero elements.
    let dir = tempfile::tempdir().unwrap();
    let t = 0.5;
    let mut on = String::from("cell,row,col,re_ev,im_ev\n");
    for i in 0..10 {
        on.push_str(&format!(
            "{i},0,0,{},0\n{i},1,1,{},0\n",
            2.0 * t,
            2.0 * t + 0.3
        ));
    }
    std::fs::write(dir.path().join("on.csv"), on).unwrap();
    std::fs::write(
        dir.path().join("co.csv"),
        format!("cell,row,col,re_ev,im_ev\n0,0,0,{},0\n0,1,1,{},0\n", -t, -t),
    )
    .unwrap();
    let text = blocks_text(("on.csv", "co.csv"), "")
        .replace("from_nm = 8.0\nto_nm = 12.0", "from_nm = 1.0\nto_nm = 2.0");
    let r = Case::parse(&text, "b.toml", dir.path())
        .unwrap()
        .resolve()
        .unwrap();
    assert_eq!(r.problem.device.orbitals, 2);
    assert_eq!(r.problem.device.cells(), 10);
    // periodic continuation: two cosine bands [0, 4t] and [0.3, 4t + 0.3]
    let (lo, hi) = r.problem.left.lead.band_range().unwrap();
    assert!(
        lo.abs() < 1e-9 && (hi - (4.0 * t + 0.3)).abs() < 1e-9,
        "{lo} {hi}"
    );
    assert_eq!(r.hopping_ev, None);
}

/// Without grid.step_ev the step is the largest one at most kB·T_min/10
/// that puts every phonon energy on whole steps to 1 %: at 300 K
/// kT/10 = 2.585 meV would snap a 10 meV phonon to 4 steps (10.34 meV,
/// +3.4 %) and a 7 meV one to 3 steps (7.76 meV, +11 %).
#[test]
fn default_step_keeps_phonon_energies_on_the_grid() {
    let r = resolved(
        "[[phonon]]\nenergy_ev = 0.010\ncoupling_ev2 = 1e-3\n\
         [[phonon]]\nenergy_ev = 0.007\ncoupling_ev2 = 1e-3\n",
    );
    let step = r.problem.grid.step_ev;
    assert!(step <= thermal_energy_ev(300.0) / 10.0, "step {step}");
    for m in &r.problem.scattering.phonons {
        let change = (m.energy_ev - m.requested_energy_ev).abs() / m.requested_energy_ev;
        assert!(
            change <= 0.01,
            "{} eV snapped to {} eV",
            m.requested_energy_ev,
            m.energy_ev
        );
    }
    // The largest energy is exact, so the step is 10 meV over whole steps.
    let n = 0.010 / step;
    assert!((n - n.round()).abs() < 1e-9, "10 meV is {n} steps");
    // Without phonons the thermal step stands.
    let plain = resolved("");
    assert_eq!(plain.problem.grid.step_ev, thermal_energy_ev(300.0) / 10.0);
}
