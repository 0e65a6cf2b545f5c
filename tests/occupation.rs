//! The occupation map f(x, E) = Σ_o G^n_ii / Σ_o A_ii: equilibrium filling
//! and the exclusion principle under bias with phonons.

mod common;
use common::*;
use qheat::grid::EnergyGrid;
use qheat::observables::{OCCUPATION_THRESHOLD, occupation_map};
use qheat::scba::{ScbaParams, Silent, solve};
use qheat::units::fermi;

/// In equilibrium (both contacts at µ, T) without scattering,
/// G^n = G^r (Γ1 + Γ2) G^a f = A f exactly, so every cell of any device is
/// filled to the contacts' Fermi function ("fluctuation–dissipation in
/// equilibrium; common practice"). Checked on a chain with a barrier and on
/// a two-orbital strip (orbitals summed in numerator and denominator) to
/// 1e-10: G^n and A come from different recursions, which agree to
/// rounding relative to the states of the cell.
#[test]
fn ballistic_equilibrium_fills_every_cell_to_the_fermi_function() {
    let (mu, temp) = (0.06, 300.0);
    let step = 0.002;
    let grid = EnergyGrid::covering(0.5 * step, 0.3, step);
    let chain = barrier_chain(30, 0.5, 0.07, 12, 16, 0.08);
    let t = qheat::units::hopping_ev(0.2, 0.5);
    let strip = qheat::device::strip(2, 0.5, t, 0.0, vec![0.0; 12]);
    let lowest = strip.band_edge_ev[0];
    let strip_grid = EnergyGrid::covering(lowest + 0.5 * step, lowest + 0.3, step);
    for (device, grid, mu) in [(chain, grid, mu), (strip, strip_grid, lowest + mu)] {
        let p = coherent_problem(device, (mu, temp), (mu, temp), grid.clone());
        let sol = solve(&p, &ScbaParams::default(), None, &mut Silent).unwrap();
        let map = occupation_map(&sol);
        assert_eq!(map.dim(), (p.device.cells(), grid.count));
        let mut defined = 0;
        for ((_, k), f) in map.indexed_iter() {
            if f.is_nan() {
                continue;
            }
            defined += 1;
            let expect = fermi(grid.energy(k), mu, temp);
            assert!(
                (f - expect).abs() < 1e-10,
                "E = {}: f = {f} vs {expect}",
                grid.energy(k)
            );
        }
        // Only the evanescent tails under the barrier may be masked.
        assert!(
            defined as f64 > 0.9 * map.len() as f64,
            "{defined} of {}",
            map.len()
        );
    }
}

/// Under bias with inelastic phonons the filling is no Fermi function, but
/// the exclusion principle still holds: G^n ≥ 0 and G^p = A − G^n ≥ 0, so
/// 0 ≤ f ≤ 1 wherever f is defined (the in- and out-scattering functions
/// are built with the filled and empty states: see the scattering module).
/// The 1e-9 margin is rounding over the masking threshold of 1e-8.
/// The biased map must also differ from both contacts' Fermi functions
/// somewhere, or the check would not be exercising a non-equilibrium case.
#[test]
fn biased_filling_with_phonons_stays_between_empty_and_full() {
    let temp = 300.0;
    let step = 0.002;
    let grid = EnergyGrid::covering(0.5 * step, 0.4, step);
    let n = 30;
    let d = barrier_chain(n, 0.5, 0.07, 12, 16, 0.1);
    let mut p = coherent_problem(d, (0.1, temp), (0.02, temp), grid.clone());
    let mask: Vec<bool> = (0..n).map(|i| i >= 16).collect();
    p.scattering
        .phonons
        .push(phonon(&grid, 0.03, 4e-3, &mask, temp));
    let sol = solve(&p, &ScbaParams::default(), None, &mut Silent).unwrap();
    assert!(sol.report.converged);
    let map = occupation_map(&sol);
    let mut off_equilibrium: f64 = 0.0;
    for ((i, k), &f) in map.indexed_iter() {
        if f.is_nan() {
            continue;
        }
        assert!(
            (-1e-9..=1.0 + 1e-9).contains(&f),
            "cell {i}, E = {}: f = {f}",
            grid.energy(k)
        );
        let e = grid.energy(k);
        let nearest = (f - fermi(e, 0.1, temp))
            .abs()
            .min((f - fermi(e, 0.02, temp)).abs());
        off_equilibrium = off_equilibrium.max(nearest);
    }
    assert!(off_equilibrium > 0.05, "{off_equilibrium}");
    // Masked entries are exactly those with negligible states.
    let ns = sol.pass.green.sites;
    let largest = sol
        .pass
        .green
        .retarded
        .iter()
        .fold(0.0f64, |m, g| m.max(-2.0 * g.im));
    for ((i, k), f) in map.indexed_iter() {
        let a = sol.pass.green.spectral(k * ns + i);
        assert_eq!(
            f.is_nan(),
            a <= OCCUPATION_THRESHOLD * largest,
            "cell {i} k {k}"
        );
    }
}

/// A solve writes occupation.npz (the map with its two axes, the same map
/// the library computes) and occupation.svg (a map on a fixed 0…1 colour
/// scale with the band edge over it).
#[test]
fn a_solve_writes_the_occupation_map_with_its_axes_and_figure() {
    use qheat::case::Case;
    use qheat::observables::observe;
    use qheat::output::Staging;
    use qheat::output::plots::{style, write_solve_plots};
    use qheat::output::results::{RunInfo, solve_summary, write_solve_files};
    let path =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("cases-demo/resonant-filter.toml");
    let case = Case::load(&path).unwrap();
    let resolved = case.resolve().unwrap();
    let sol = solve(&resolved.problem, &resolved.scba, None, &mut Silent).unwrap();
    let o = observe(&sol);
    let toml = case.to_toml_string();
    let info = RunInfo {
        case_name: &case.name,
        case_file: "resonant-filter",
        case_toml: &toml,
        warnings: &resolved.warnings,
        notes: &resolved.notes,
        threads: 1,
    };
    let tmp = tempfile::tempdir().unwrap();
    let stage = Staging::new(tmp.path()).unwrap();
    write_solve_files(&stage, &sol, &o, &solve_summary(&sol, &o, &info)).unwrap();
    write_solve_plots(&stage, &sol, &o).unwrap();
    stage.commit().unwrap();

    let file = std::fs::File::open(tmp.path().join("occupation.npz")).unwrap();
    let mut npz = ndarray_npy::NpzReader::new(file).unwrap();
    let map: ndarray::Array2<f64> = npz.by_name("map").unwrap();
    let x: ndarray::Array1<f64> = npz.by_name("x_nm").unwrap();
    let e: ndarray::Array1<f64> = npz.by_name("energy_ev").unwrap();
    let expect = occupation_map(&sol);
    assert_eq!(map.dim(), (x.len(), e.len()));
    assert_eq!(x.to_vec(), o.sites.x_nm);
    assert_eq!(e.to_vec(), sol.problem.grid.energies());
    for (a, b) in map.iter().zip(expect.iter()) {
        assert!(a == b || (a.is_nan() && b.is_nan()), "{a} vs {b}");
    }

    let text = std::fs::read_to_string(tmp.path().join("occupation.svg")).unwrap();
    let doc = roxmltree::Document::parse(&text).unwrap();
    let texts: Vec<&str> = doc
        .descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| n.text())
        .collect();
    assert!(
        texts
            .iter()
            .any(|t| t.contains("occupation f (0 empty, 1 full)")),
        "{texts:?}"
    );
    let ink = style::hex(style::INK);
    let band_edge = doc
        .descendants()
        .filter(|n| n.has_tag_name("polyline"))
        .any(|n| {
            n.attribute("stroke")
                .is_some_and(|s| s.eq_ignore_ascii_case(&ink))
        });
    assert!(band_edge, "band edge over the map");
    // The colour bar spans exactly 0…1: its lowest and highest steps are
    // the palest and darkest sequential colours of that fixed range.
    let fill = |c: plotters::style::RGBColor| {
        let h = style::hex(c);
        doc.descendants()
            .filter(|n| n.has_tag_name("rect"))
            .filter(|n| {
                n.attribute("fill")
                    .is_some_and(|v| v.eq_ignore_ascii_case(&h))
            })
            .count()
    };
    assert!(
        fill(style::sequential(0.5 / 96.0)) >= 1,
        "palest step of the bar"
    );
    assert!(
        fill(style::sequential(1.0 - 0.5 / 96.0)) >= 1,
        "darkest step of the bar"
    );
}
