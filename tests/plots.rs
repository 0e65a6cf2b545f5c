//! Figures of a solve and the generic charts: each SVG parses as XML and
//! holds the series, labels and colour bar it promises, and the drawn marks
//! agree with the numbers they stand for (one heating bar per heated cell,
//! one residual marker per Born iteration, the map's extreme pixel in the
//! right column). How the figures read (colours, net flow, the map's
//! scale) is checked in `figure_reading.rs`.

#[path = "support/base64.rs"]
mod base64;
use base64::decode_base64;
use plotters::style::RGBColor;
use qheat::case::Case;
use qheat::observables::{Observables, bond_current_map, observe};
use qheat::output::Staging;
use qheat::output::plots::{
    self, Flags, Series, bar_chart_svg, flagged_line_chart_svg, heat_map_svg, line_chart_svg,
    style, write_solve_plots,
};
use qheat::output::results::{RunInfo, solve_summary, write_solve_files};
use qheat::scba::{Silent, Solution, solve};
use std::path::{Path, PathBuf};

fn demo(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("cases-demo")
        .join(format!("{name}.toml"))
}

/// Solve a demo case through the library and write its result folder.
fn solve_into(name: &str, out: &Path) -> (Solution, Observables) {
    let case = Case::load(&demo(name)).unwrap();
    let resolved = case.resolve().unwrap();
    let sol = solve(&resolved.problem, &resolved.scba, None, &mut Silent).unwrap();
    let o = observe(&sol);
    let toml = case.to_toml_string();
    let info = RunInfo {
        case_name: &case.name,
        case_file: name,
        case_toml: &toml,
        warnings: &resolved.warnings,
        notes: &resolved.notes,
        threads: 1,
    };
    let summary = solve_summary(&sol, &o, &info);
    let stage = Staging::new(out).unwrap();
    write_solve_files(&stage, &sol, &o, &summary).unwrap();
    write_solve_plots(&stage, &sol, &o).unwrap();
    stage.commit().unwrap();
    (sol, o)
}

fn hex(c: RGBColor) -> String {
    style::hex(c)
}

/// Elements named `tag` whose attribute `attr` is the colour `c`.
fn count(doc: &roxmltree::Document<'_>, tag: &str, attr: &str, c: RGBColor) -> usize {
    let want = hex(c);
    doc.descendants()
        .filter(|n| n.has_tag_name(tag))
        .filter(|n| {
            n.attribute(attr)
                .is_some_and(|v| v.eq_ignore_ascii_case(&want))
        })
        .count()
}

fn texts(doc: &roxmltree::Document<'_>) -> Vec<String> {
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .map(|n| n.text().unwrap_or("").to_string())
        .collect()
}

fn has_text(doc: &roxmltree::Document<'_>, needle: &str) -> bool {
    texts(doc).iter().any(|t| t.contains(needle))
}

fn read(dir: &Path, name: &str) -> String {
    std::fs::read_to_string(dir.join(name)).unwrap_or_else(|e| panic!("{name}: {e}"))
}

#[test]
fn phonon_demo_figures_show_heating_cooling_flows_map_and_convergence() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("peltier");
    let (sol, o) = solve_into("peltier-barrier", &dir);

    // device.svg: three panels, units on the axes, one bar per cell.
    let text = read(&dir, "device.svg");
    let doc = roxmltree::Document::parse(&text).unwrap();
    for label in [
        "energy (meV)",
        "Fermi-level drop (mV)",
        "lattice power per cell (pW)",
        "position x (nm)",
        "band edge",
        "local Fermi level",
        "left lead Fermi level 90.0 meV",
        "right lead Fermi level 10.0 meV",
    ] {
        assert!(
            has_text(&doc, label),
            "device.svg lacks {label:?}: {:?}",
            texts(&doc)
        );
    }
    let p = &o.sites.lattice_power_w;
    let heated = p.iter().filter(|v| **v > 0.0).count();
    let cooled = p.iter().filter(|v| **v < 0.0).count();
    // The demo is built to show both (its case file says so).
    assert!(heated > 0 && cooled > 0, "heated {heated}, cooled {cooled}");
    // One bar per cell plus one legend swatch per colour.
    assert_eq!(count(&doc, "rect", "fill", style::HEATING), heated + 1);
    assert_eq!(count(&doc, "rect", "fill", style::COOLING), cooled + 1);
    // Drop bars: every cell plus the left contact, and the legend swatch.
    let drops = 1 + o.sites.voltage_drop_v.len();
    assert_eq!(count(&doc, "rect", "fill", style::DROP), drops + 1);
    assert!(
        count(&doc, "polyline", "stroke", style::INK) >= 1,
        "band edge"
    );
    assert!(
        count(&doc, "polyline", "stroke", style::LOCAL_FERMI) >= 1,
        "local Fermi level"
    );

    // spectrum.svg: three flows, the two Fermi windows, units.
    let text = read(&dir, "spectrum.svg");
    let doc = roxmltree::Document::parse(&text).unwrap();
    for c in [style::LEFT, style::RIGHT, style::BATH] {
        assert!(
            count(&doc, "polyline", "stroke", c) >= 2,
            "line and legend of {}",
            hex(c)
        );
    }
    assert!(
        has_text(&doc, "electron flow × e (µA/eV)"),
        "{:?}",
        texts(&doc)
    );
    assert!(has_text(&doc, "energy E (meV)"));
    assert!(has_text(&doc, "from the scattering bath"));
    assert!(
        !has_text(&doc, "transmission"),
        "no transmission with scattering"
    );
    // One window bar µ ± 2kT per lead: a bracket of four points in the
    // lead's colour, labelled with the lead's temperature.
    for c in [style::LEFT, style::RIGHT] {
        let brackets = doc
            .descendants()
            .filter(|n| n.has_tag_name("polyline"))
            .filter(|n| {
                n.attribute("stroke")
                    .is_some_and(|v| v.eq_ignore_ascii_case(&hex(c)))
            })
            .filter(|n| {
                let p: Vec<(f64, f64)> = n
                    .attribute("points")
                    .unwrap()
                    .split_whitespace()
                    .map(|xy| {
                        let (x, y) = xy.split_once(',').unwrap();
                        (x.parse().unwrap(), y.parse().unwrap())
                    })
                    .collect();
                // ⊓-shaped: up, across, down to the same height.
                p.len() == 4
                    && p[0].0 == p[1].0
                    && p[2].0 == p[3].0
                    && p[1].1 == p[2].1
                    && p[0].1 == p[3].1
                    && p[0].1 > p[1].1
                    && p[2].0 > p[1].0
            })
            .count();
        assert_eq!(brackets, 1, "one Fermi window bar of {}", hex(c));
    }
    assert!(has_text(&doc, "left lead µ ± 2kT (300 K)"));
    assert!(has_text(&doc, "right lead µ ± 2kT (300 K)"));

    // bond_current.svg: the map as one image, a diverging colour bar, band edge.
    let text = read(&dir, "bond_current.svg");
    let doc = roxmltree::Document::parse(&text).unwrap();
    assert!(has_text(
        &doc,
        "bond current (µA/eV), signed log; + = electrons to +x"
    ));
    assert!(has_text(&doc, "position x (nm)"));
    assert!(has_text(&doc, "energy E (meV)"));
    assert!(
        count(&doc, "polyline", "stroke", style::INK) >= 1,
        "band edge over the map"
    );
    let ends = [
        style::diverging(-1.0 + 1.0 / 96.0),
        style::diverging(1.0 - 1.0 / 96.0),
    ];
    for c in ends {
        assert_eq!(
            count(&doc, "rect", "fill", c),
            1,
            "colour bar end {}",
            hex(c)
        );
    }
    let bar_rects = doc
        .descendants()
        .filter(|n| n.has_tag_name("rect") && n.attribute("fill") != Some("none"))
        .count();
    assert!(bar_rects >= 96, "colour bar of 96 steps: {bar_rects} rects");
    let image = doc
        .descendants()
        .find(|n| n.has_tag_name("image"))
        .expect("map image");
    let href = image.attribute("href").unwrap();
    let b64 = href
        .strip_prefix("data:image/png;base64,")
        .expect("PNG data URI");
    let png_bytes = decode_base64(b64);
    let decoder = png::Decoder::new(std::io::Cursor::new(png_bytes));
    let mut reader = decoder.read_info().unwrap();
    let mut buf = vec![0; reader.output_buffer_size().unwrap()];
    let info = reader.next_frame(&mut buf).unwrap();
    let map = bond_current_map(&sol);
    let (pairs, ne) = map.dim();
    assert_eq!(info.width as usize, pairs, "one pixel column per bond");
    assert!(info.height as usize > 10 && info.height as usize <= ne);
    // The largest value maps to the end of the scale, in its own column.
    let (mut best, mut at) = (0.0f64, 0usize);
    for ((i, _), v) in map.indexed_iter() {
        if v.abs() > best {
            best = v.abs();
            at = i;
        }
    }
    let extreme = style::diverging(
        map.iter()
            .copied()
            .fold(0.0, |m: f64, v| if v.abs() > m.abs() { v } else { m })
            .signum(),
    );
    let w = info.width as usize;
    let found: Vec<usize> = buf
        .chunks(3)
        .enumerate()
        .filter(|(_, px)| px[0] == extreme.0 && px[1] == extreme.1 && px[2] == extreme.2)
        .map(|(k, _)| k % w)
        .collect();
    assert!(
        found.contains(&at),
        "extreme colour in column {at}: found in {found:?}"
    );

    // convergence.svg: one marker per iteration on each curve.
    let text = read(&dir, "convergence.svg");
    let doc = roxmltree::Document::parse(&text).unwrap();
    let residuals = sol
        .report
        .history
        .iter()
        .filter(|h| h.residual > 0.0)
        .count();
    assert_eq!(count(&doc, "circle", "fill", style::RESIDUAL), residuals);
    assert!(residuals == sol.report.iterations && residuals > 1);
    assert!(has_text(&doc, "Born iteration"));
    assert!(has_text(&doc, "relative change (log scale)"));
    assert!(has_text(&doc, "tolerance 1e-10"));
}

#[test]
fn coherent_demo_has_transmission_no_lattice_power_and_no_convergence_figure() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("filter");
    let (sol, o) = solve_into("resonant-filter", &dir);
    assert!(sol.problem.scattering.is_coherent());
    assert!(
        !dir.join("convergence.svg").exists(),
        "no Born loop, no figure"
    );

    let text = read(&dir, "spectrum.svg");
    let doc = roxmltree::Document::parse(&text).unwrap();
    assert!(has_text(&doc, "transmission T(E)"));
    assert!(count(&doc, "polyline", "stroke", style::TRANSMISSION) >= 1);
    assert!(!has_text(&doc, "from the scattering bath"));

    let text = read(&dir, "device.svg");
    let doc = roxmltree::Document::parse(&text).unwrap();
    assert!(o.sites.lattice_power_w.iter().all(|p| *p == 0.0));
    assert!(has_text(&doc, "coherent transport: no scattering"));
    // Only the legend swatches carry the heating and cooling colours.
    assert_eq!(count(&doc, "rect", "fill", style::HEATING), 1);
    assert_eq!(count(&doc, "rect", "fill", style::COOLING), 1);
    for name in ["device.svg", "spectrum.svg", "bond_current.svg"] {
        roxmltree::Document::parse(&read(&dir, name)).unwrap();
    }
}

#[test]
fn line_chart_draws_each_series_and_labelled_reference_lines() {
    let x = [0.0, 0.1, 0.2, 0.3, 0.4];
    let p = [0.0, 1.5, 2.0, 1.5, 0.0];
    let eta = [0.0, 0.02, 0.035, 0.04, 0.03];
    let svg = line_chart_svg(
        "Generator",
        "load voltage (mV)",
        "power (nW)",
        &[
            Series {
                label: "power",
                x: &x,
                y: &p,
            },
            Series {
                label: "efficiency",
                x: &x,
                y: &eta,
            },
        ],
        &[("η_C", 0.0645), ("η_CA", 0.0328)],
    )
    .unwrap();
    let doc = roxmltree::Document::parse(&svg).unwrap();
    // The line plus the legend mark.
    assert_eq!(count(&doc, "polyline", "stroke", style::SERIES[0]), 2);
    assert_eq!(count(&doc, "polyline", "stroke", style::SERIES[1]), 2);
    // Few points: a marker on each.
    assert_eq!(count(&doc, "circle", "fill", style::SERIES[0]), 5);
    assert!(has_text(&doc, "η_C = 0.0645"), "{:?}", texts(&doc));
    // Dashed: several short pieces per reference line.
    assert!(count(&doc, "polyline", "stroke", style::REFERENCE[0]) > 5);
    assert!(count(&doc, "polyline", "stroke", style::REFERENCE[1]) > 5);
    assert!(has_text(&doc, "η_CA = 0.0328"));
    assert!(has_text(&doc, "load voltage (mV)") && has_text(&doc, "power (nW)"));

    let err = line_chart_svg(
        "bad",
        "x",
        "y",
        &[Series {
            label: "a",
            x: &x,
            y: &p[..3],
        }],
        &[],
    )
    .unwrap_err()
    .to_string();
    assert!(err.contains("5 x values but 3 y values"), "{err}");

    // No finite point: a frame that says so, not an empty plot.
    let nan = [f64::NAN; 5];
    let svg = line_chart_svg(
        "empty",
        "x",
        "y",
        &[Series {
            label: "a",
            x: &x,
            y: &nan,
        }],
        &[],
    )
    .unwrap();
    let doc = roxmltree::Document::parse(&svg).unwrap();
    assert!(has_text(&doc, "no finite values to show"));
}

#[test]
fn points_that_did_not_converge_are_crossed_and_counted() {
    let x = [0.0, 0.1, 0.2, 0.3, 0.4];
    let p = [0.0, 1.5, 2.0, 1.5, 0.0];
    let series = [Series {
        label: "power",
        x: &x,
        y: &p,
    }];
    let plain = line_chart_svg("Cooler", "current (nA)", "power (nW)", &series, &[]).unwrap();
    // Nothing flagged: the same figure as the plain chart, byte for byte.
    let none = flagged_line_chart_svg(
        "Cooler",
        "current (nA)",
        "power (nW)",
        &series,
        &[],
        &Flags::none(),
    )
    .unwrap();
    assert_eq!(plain, none);
    let doc = roxmltree::Document::parse(&plain).unwrap();
    assert_eq!(count(&doc, "line", "stroke", style::NOT_CONVERGED), 0);
    assert!(!has_text(&doc, "not converged"));

    let flags = Flags::where_(&x, &p, |i| i == 1 || i == 3);
    assert_eq!(flags.points, vec![(0.1, 1.5), (0.3, 1.5)]);
    let svg = flagged_line_chart_svg("Cooler", "current (nA)", "power (nW)", &series, &[], &flags)
        .unwrap();
    let doc = roxmltree::Document::parse(&svg).unwrap();
    // Two strokes per cross: two points and the legend's mark.
    assert_eq!(count(&doc, "line", "stroke", style::NOT_CONVERGED), 6);
    assert!(
        has_text(&doc, "not converged (2 of 5 points)"),
        "{:?}",
        texts(&doc)
    );
    // With a flag the single series is named too, so the legend says what
    // the crosses sit on.
    assert!(has_text(&doc, "power"));
}

#[test]
fn heat_map_uses_cells_on_uneven_grids_and_an_image_on_even_ones() {
    let x = [1.0, 2.0, 4.0];
    let y = [10.0, 20.0];
    let v = ndarray::array![[-1.0, 0.0, 1.0], [0.5, -0.5, 0.25]];
    let svg = heat_map_svg("map", "x (nm)", "y (eV)", &x, &y, &v, "value (A/eV)", true).unwrap();
    let doc = roxmltree::Document::parse(&svg).unwrap();
    assert!(has_text(&doc, "value (A/eV)") && has_text(&doc, "x (nm)"));
    assert_eq!(
        count(&doc, "rect", "fill", style::diverging(1.0)),
        1,
        "the +1 cell"
    );
    assert_eq!(
        count(&doc, "rect", "fill", style::diverging(-1.0)),
        1,
        "the −1 cell"
    );
    assert_eq!(
        count(&doc, "rect", "fill", style::diverging(0.0)),
        1,
        "the 0 cell"
    );
    assert!(doc.descendants().all(|n| !n.has_tag_name("image")));

    let xs: Vec<f64> = (0..40).map(|i| i as f64).collect();
    let ys: Vec<f64> = (0..30).map(|i| 0.01 * i as f64).collect();
    let big = ndarray::Array2::from_shape_fn((30, 40), |(r, c)| (r * c) as f64);
    let svg = heat_map_svg("big", "x", "y", &xs, &ys, &big, "count", false).unwrap();
    let doc = roxmltree::Document::parse(&svg).unwrap();
    assert_eq!(
        doc.descendants()
            .filter(|n| n.has_tag_name("image"))
            .count(),
        1
    );
    assert!(has_text(&doc, "count"));

    let err = heat_map_svg("bad", "x", "y", &x, &y, &big, "c", true)
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("30×40") && err.contains("2 y and 3 x"),
        "{err}"
    );
}

#[test]
fn bar_chart_has_one_bar_per_label_signed_colours_and_labels() {
    let labels: Vec<String> = ["barrier 0.10 eV", "barrier 0.15 eV", "well 5 nm"]
        .iter()
        .map(|s| s.to_string())
        .collect();
    let svg = bar_chart_svg("ranking", &labels, &[0.8, 1.2, -0.3], "ZT").unwrap();
    let doc = roxmltree::Document::parse(&svg).unwrap();
    assert_eq!(count(&doc, "rect", "fill", style::SERIES[0]), 2);
    assert_eq!(count(&doc, "rect", "fill", style::SERIES[1]), 1);
    for l in &labels {
        assert!(has_text(&doc, l), "{l}");
    }
    assert!(has_text(&doc, "ZT") && has_text(&doc, "1.20") && has_text(&doc, "-0.300"));
    assert!(bar_chart_svg("x", &labels, &[1.0], "v").is_err());
}

#[test]
fn solve_figures_are_reachable_one_by_one() {
    // The four figure functions are public for callers that write their
    // own folders (sweeps write a device figure per point, for example).
    let case = Case::load(&demo("thermionic-barrier")).unwrap();
    let r = case.resolve().unwrap();
    let sol = solve(&r.problem, &r.scba, None, &mut Silent).unwrap();
    let o = observe(&sol);
    for svg in [
        plots::device_svg(&sol, &o).unwrap(),
        plots::spectrum_svg(&sol, &o).unwrap(),
        plots::bond_current_svg(&sol, &o).unwrap(),
    ] {
        let doc = roxmltree::Document::parse(&svg).unwrap();
        let root = doc.root_element();
        assert!(root.attribute("width").unwrap().parse::<u32>().unwrap() > 0);
        assert!(root.attribute("height").unwrap().parse::<u32>().unwrap() > 0);
    }
    assert!(plots::convergence_svg(&sol).unwrap().is_none());
}

/// A 12 nm doped wire with an undoped 0.1 eV barrier layer in the middle
/// at a bias of 0.05 V (coherent, 4 meV grid); with `es` its
/// `[electrostatics]` section (2e18 cm⁻³ outside the barrier).
fn doped_barrier_text(es: bool) -> String {
    let mut text = String::from(
        r#"
name = "figure-barrier"
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
[bias]
voltage_v = 0.05
[grid]
step_ev = 0.004
min_ev = -0.15
max_ev = 0.6
"#,
    );
    if es {
        text.push_str(
            "[electrostatics]\npermittivity = 12.0\narea_nm2 = 25.0\ndonors_cm3 = 2e18\n\
             [[electrostatics.region]]\nfrom_nm = 4.5\nto_nm = 7.5\ndonors_cm3 = 0.0\n",
        );
    }
    text
}

/// Solve `text` with the program into `out`; return the named columns of
/// its sites.csv (a column missing from the file is `None`).
fn cli_sites(text: &str, out: &Path, names: &[&str]) -> Vec<Option<Vec<f64>>> {
    let case = out.with_extension("toml");
    std::fs::write(&case, text).unwrap();
    let run = std::process::Command::new(env!("CARGO_BIN_EXE_qheat"))
        .args(["--quiet", "--threads", "1", "solve"])
        .arg(&case)
        .arg("-o")
        .arg(out)
        .output()
        .unwrap();
    assert!(
        run.status.success(),
        "{}",
        String::from_utf8_lossy(&run.stderr)
    );
    let sites = read(out, "sites.csv");
    let mut lines = sites.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let rows: Vec<Vec<f64>> = lines
        .map(|l| l.split(',').map(|x| x.parse().unwrap()).collect())
        .collect();
    names
        .iter()
        .map(|n| {
            let c = header.iter().position(|h| h == n)?;
            Some(rows.iter().map(|r| r[c]).collect())
        })
        .collect()
}

/// Polylines of `colour` with stroke width `width`, as pixel points.
fn lines_of(doc: &roxmltree::Document<'_>, colour: RGBColor, width: &str) -> Vec<Vec<(f64, f64)>> {
    let want = hex(colour);
    doc.descendants()
        .filter(|n| n.has_tag_name("polyline"))
        .filter(|n| n.attribute("stroke-width") == Some(width))
        .filter(|n| {
            n.attribute("stroke")
                .is_some_and(|v| v.eq_ignore_ascii_case(&want))
        })
        .map(|n| {
            n.attribute("points")
                .unwrap()
                .split_whitespace()
                .map(|xy| {
                    let (x, y) = xy.split_once(',').unwrap();
                    (x.parse().unwrap(), y.parse().unwrap())
                })
                .collect()
        })
        .collect()
}

/// device.svg with `[electrostatics]`: beside the band edge (with the
/// potential of the device's charge) it draws the band edge without it,
/// and the legend says which is which. Both curves are read back from the
/// SVG: the band edge's steps give the figure's energy-to-pixel map (a
/// straight line, fitted by least squares), and through that map the
/// second curve is sites.csv's band_edge_imposed_ev, cell by cell, to
/// 1.5 pixels (SVG coordinates are whole pixels, so each point is off by
/// up to half a pixel, and the fit by less). The charge moves the band by
/// several pixels here, so the two curves are told apart. Without
/// `[electrostatics]` the figure has neither the second curve nor its
/// legend, and sites.csv has no such column.
#[test]
fn device_figure_shows_the_band_edge_with_and_without_the_charges_potential() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("es");
    let cols = cli_sites(
        &doped_barrier_text(true),
        &dir,
        &["band_edge_ev", "band_edge_imposed_ev"],
    );
    let (band, imposed) = (cols[0].clone().unwrap(), cols[1].clone().unwrap());
    let n = band.len();
    let text = read(&dir, "device.svg");
    let doc = roxmltree::Document::parse(&text).unwrap();
    for label in [
        "band edge with the potential of the device's charge",
        "band edge without it: band offsets only",
        "local Fermi level",
    ] {
        assert!(has_text(&doc, label), "{label:?}: {:?}", texts(&doc));
    }
    let with = lines_of(&doc, style::INK, "3");
    let with: Vec<_> = with.into_iter().filter(|p| p.len() == 2 * n).collect();
    let without = lines_of(&doc, style::BAND_EDGE_IMPOSED, "2");
    assert_eq!(with.len(), 1, "one band edge of {n} steps");
    assert_eq!(without.len(), 1, "one band edge without the potential");
    let (with, without) = (&with[0], &without[0]);
    assert_eq!(without.len(), 2 * n);
    // Energy → pixel: y = a + b E, fitted on the band edge's steps.
    let pts: Vec<(f64, f64)> = (0..2 * n).map(|k| (band[k / 2], with[k].1)).collect();
    let m = pts.len() as f64;
    let (se, sy) = pts.iter().fold((0.0, 0.0), |s, p| (s.0 + p.0, s.1 + p.1));
    let (me, my) = (se / m, sy / m);
    let see: f64 = pts.iter().map(|p| (p.0 - me).powi(2)).sum();
    let sey: f64 = pts.iter().map(|p| (p.0 - me) * (p.1 - my)).sum();
    let b = sey / see;
    let a = my - b * me;
    for (k, p) in pts.iter().enumerate() {
        assert!((a + b * p.0 - p.1).abs() <= 1.0, "band edge point {k}");
    }
    let mut moved: f64 = 0.0;
    for k in 0..2 * n {
        assert_eq!(without[k].0, with[k].0, "same cells");
        let expected = a + b * imposed[k / 2];
        assert!(
            (without[k].1 - expected).abs() <= 1.5,
            "cell {}: drawn at {} px, band_edge_imposed_ev {} gives {expected} px",
            k / 2,
            without[k].1,
            imposed[k / 2]
        );
        moved = moved.max((without[k].1 - with[k].1).abs());
    }
    assert!(
        moved > 5.0,
        "the charge's potential moves the band edge by {moved} px"
    );

    let plain = tmp.path().join("plain");
    let cols = cli_sites(
        &doped_barrier_text(false),
        &plain,
        &["band_edge_imposed_ev"],
    );
    assert!(
        cols[0].is_none(),
        "no band_edge_imposed_ev without [electrostatics]"
    );
    let text = read(&plain, "device.svg");
    let doc = roxmltree::Document::parse(&text).unwrap();
    assert!(has_text(&doc, "band edge"));
    assert!(!has_text(&doc, "without it"), "{:?}", texts(&doc));
    assert!(!has_text(&doc, "potential of the device's charge"));
    assert!(lines_of(&doc, style::BAND_EDGE_IMPOSED, "2").is_empty());
}
