//! The figures of a solve read at a glance: within a figure no colour
//! stands for two legend entries; the spectrum under a pure temperature
//! difference shows the net flow changing direction at the Fermi level and
//! adding up to the reported current; the bond-current map colours a
//! signed logarithm of the current, with a colour bar symmetric about zero.
//!
//! Each check reads the SVG the program wrote (parsed with roxmltree), not
//! the plotting code's intentions.

#[path = "support/base64.rs"]
mod base64;
use base64::decode_base64;
use qheat::case::Case;
use qheat::observables::{Observables, bond_current_map, observe};
use qheat::output::plots::{self, style};
use qheat::scba::{Silent, Solution, solve};
use qheat::units::{ELEMENTARY_CHARGE, PLANCK_EV_S, fermi};
use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};
use std::process::Command;

fn demo(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("cases-demo")
        .join(format!("{name}.toml"))
}

/// Solve a demo with the real program into `out` (figures and
/// summary.json as a user gets them).
fn run_solve(name: &str, out: &Path) {
    let run = Command::new(env!("CARGO_BIN_EXE_qheat"))
        .args(["--quiet", "--threads", "1", "solve"])
        .arg(demo(name))
        .arg("-o")
        .arg(out)
        .output()
        .unwrap();
    assert!(
        run.status.success(),
        "{}",
        String::from_utf8_lossy(&run.stderr)
    );
}

/// The same operating point through the library.
fn solve_lib(name: &str) -> (Solution, Observables) {
    let r = Case::load(&demo(name)).unwrap().resolve().unwrap();
    let sol = solve(&r.problem, &r.scba, None, &mut Silent).unwrap();
    let o = observe(&sol);
    (sol, o)
}

fn read(dir: &Path, name: &str) -> String {
    std::fs::read_to_string(dir.join(name)).unwrap_or_else(|e| panic!("{name}: {e}"))
}

fn num(n: roxmltree::Node<'_, '_>, attr: &str) -> f64 {
    n.attribute(attr)
        .unwrap_or_else(|| panic!("<{}> without {attr}", n.tag_name().name()))
        .parse()
        .unwrap()
}

fn points(n: roxmltree::Node<'_, '_>) -> Vec<(f64, f64)> {
    n.attribute("points")
        .unwrap()
        .split_whitespace()
        .map(|xy| {
            let (x, y) = xy.split_once(',').unwrap();
            (x.parse().unwrap(), y.parse().unwrap())
        })
        .collect()
}

fn colour_of(n: roxmltree::Node<'_, '_>, attr: &str) -> Option<String> {
    n.attribute(attr)
        .filter(|v| v.starts_with('#'))
        .map(|v| v.to_ascii_lowercase())
}

/// The colour of a legend mark drawn just before a legend label that
/// starts at `text_x`, `text_y`: a 24 px line (solid, or three 5 px dashes
/// from the same start) or a 20 × 14 px block, 30 px to the left of the
/// label and centred on its line.
fn mark_colour(mark: roxmltree::Node<'_, '_>, text_x: f64, text_y: f64) -> Option<String> {
    match mark.tag_name().name() {
        "polyline" if mark.attribute("stroke-width") == Some("3") => {
            let p = points(mark);
            let flat = p.len() == 2 && p[0].1 == text_y && p[1].1 == text_y;
            let len = p.last()?.0 - p[0].0;
            let from_mark = (text_x - 30.0 - p[0].0).abs() <= 18.0;
            (flat && (len == 24.0 || len == 5.0) && from_mark)
                .then(|| colour_of(mark, "stroke"))
                .flatten()
        }
        "rect" => {
            let (x, y) = (num(mark, "x"), num(mark, "y"));
            let block = num(mark, "width") == 20.0 && num(mark, "height") == 14.0;
            (block && x + 28.0 == text_x && y + 7.0 == text_y)
                .then(|| colour_of(mark, "fill"))
                .flatten()
        }
        _ => None,
    }
}

/// Legend entries of a figure: the label of every `<text>` drawn right
/// after a legend mark, with the colours of its mark.
fn legend(doc: &roxmltree::Document<'_>) -> Vec<(String, BTreeSet<String>)> {
    let mut out = Vec::new();
    for t in doc.descendants().filter(|n| n.has_tag_name("text")) {
        let (x, y) = (num(t, "x"), num(t, "y"));
        let mut colours = BTreeSet::new();
        let mut prev = t.prev_sibling_element();
        while let Some(c) = prev.and_then(|m| mark_colour(m, x, y)) {
            colours.insert(c);
            prev = prev.and_then(|m| m.prev_sibling_element());
        }
        if !colours.is_empty() {
            out.push((t.text().unwrap_or("").trim().to_string(), colours));
        }
    }
    out
}

/// Colours that stand for more than one legend entry, with the entries.
fn shared_colours(entries: &[(String, BTreeSet<String>)]) -> BTreeMap<String, Vec<String>> {
    let mut by_colour: BTreeMap<String, Vec<String>> = BTreeMap::new();
    for (label, colours) in entries {
        for c in colours {
            by_colour.entry(c.clone()).or_default().push(label.clone());
        }
    }
    by_colour.retain(|_, labels| labels.len() > 1);
    by_colour
}

#[test]
fn no_colour_stands_for_two_legend_entries_in_a_solve_figure() {
    let tmp = tempfile::tempdir().unwrap();
    let figures = [
        "device.svg",
        "spectrum.svg",
        "bond_current.svg",
        "occupation.svg",
    ];
    for (case, extra) in [
        ("peltier-barrier", Some("convergence.svg")),
        ("resonant-filter", None),
    ] {
        let dir = tmp.path().join(case);
        run_solve(case, &dir);
        for name in figures.iter().copied().chain(extra) {
            let text = read(&dir, name);
            let doc = roxmltree::Document::parse(&text).unwrap();
            let entries = legend(&doc);
            // The reader sees every entry the figure has: the legend
            // parser must not miss them (or this test proves nothing).
            let expected = match name {
                // The two movers' levels join the device figure's legend.
                "device.svg" => 9,
                "spectrum.svg" if case == "peltier-barrier" => 5,
                "spectrum.svg" => 4,
                "bond_current.svg" | "occupation.svg" => 2,
                _ => 2,
            };
            assert_eq!(
                entries.len(),
                expected,
                "{case}/{name}: legend entries found: {entries:?}"
            );
            let shared = shared_colours(&entries);
            assert!(
                shared.is_empty(),
                "{case}/{name}: one colour, several meanings: {shared:?}"
            );
        }
    }
}

/// Pixel columns of the dashed vertical lines drawn in `colour` (the
/// Fermi-level markers): columns holding at least ten vertical dashes, so
/// that a dash of a steep curve is not taken for one.
fn vertical_lines(doc: &roxmltree::Document<'_>, colour: plotters::style::RGBColor) -> Vec<f64> {
    let want = style::hex(colour);
    let mut dashes: BTreeMap<i64, usize> = BTreeMap::new();
    for p in doc
        .descendants()
        .filter(|n| n.has_tag_name("polyline"))
        .filter(|n| colour_of(*n, "stroke").as_deref() == Some(want.as_str()))
        .map(points)
        .filter(|p| p.len() == 2 && p[0].0 == p[1].0 && p[0].1 != p[1].1)
    {
        *dashes.entry(p[0].0 as i64).or_default() += 1;
    }
    dashes
        .into_iter()
        .filter(|(_, n)| *n >= 10)
        .map(|(x, _)| x as f64)
        .collect()
}

/// Pixel extents in x of the areas filled with `colour`.
fn areas(doc: &roxmltree::Document<'_>, colour: plotters::style::RGBColor) -> Vec<(f64, f64)> {
    let want = style::hex(colour);
    doc.descendants()
        .filter(|n| n.has_tag_name("polygon"))
        .filter(|n| colour_of(*n, "fill").as_deref() == Some(want.as_str()))
        .map(|n| {
            let p = points(n);
            let lo = p.iter().map(|q| q.0).fold(f64::INFINITY, f64::min);
            let hi = p.iter().map(|q| q.0).fold(f64::NEG_INFINITY, f64::max);
            (lo, hi)
        })
        .collect()
}

#[test]
fn spectrum_under_a_temperature_difference_shows_the_net_flow_turning_at_the_fermi_level() {
    // resonant-filter: coherent, no voltage, left lead at 310 K and right
    // lead at 290 K, both with µ = 0.03 eV.
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("filter");
    run_solve("resonant-filter", &dir);
    let (sol, o) = solve_lib("resonant-filter");
    let p = &sol.problem;
    assert!(p.scattering.is_coherent() && o.voltage_v == 0.0);
    assert!(p.left.temperature_k > p.right.temperature_k);
    let mu = p.left.fermi_level_ev;
    assert_eq!(mu, p.right.fermi_level_ev);

    // The series shown is the Landauer integrand (Landauer formula for two
    // terminals, e.g. S. Datta, "Electronic Transport in Mesoscopic
    // Systems", 1995, ch. 2; from memory): (g_s/h)(f_L − f_R) T(E). The
    // 1e-9 allows for the rounding of the Green's-function products.
    let net = plots::net_flow(&o.spectrum);
    let t = o.spectrum.transmission.as_ref().expect("coherent");
    let scale = p.spin_degeneracy / PLANCK_EV_S;
    let peak = net.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    for (k, &e) in o.spectrum.energy_ev.iter().enumerate() {
        let occ = fermi(e, mu, p.left.temperature_k) - fermi(e, mu, p.right.temperature_k);
        let landauer = scale * occ * t[k];
        assert!(
            (net[k] - landauer).abs() <= 1e-9 * peak,
            "E = {e}: net {} vs Landauer {landauer}",
            net[k]
        );
        // The hot lead has more electrons above µ and fewer below: the
        // net flow runs left to right above µ and back below it.
        if t[k] > 1e-12 && (e - mu).abs() > 1e-9 {
            assert_eq!(
                net[k] > 0.0,
                e > mu,
                "E = {e}: net {} on the wrong side",
                net[k]
            );
        }
    }
    assert!(net.iter().any(|v| *v < 0.0) && net.iter().any(|v| *v > 0.0));

    // Summed over the grid, the net flow is the current the run reports
    // (I = −e Σ n(E) ΔE, rounding only).
    let summary: serde_json::Value = serde_json::from_str(&read(&dir, "summary.json")).unwrap();
    let reported = summary["results"]["current_a"].as_f64().unwrap();
    let summed = -ELEMENTARY_CHARGE * p.grid.step_ev * net.iter().sum::<f64>();
    assert!(
        (summed - reported).abs() <= 1e-12 * reported.abs(),
        "Σ net × ΔE gives {summed} A, summary.json {reported} A"
    );

    // The figure: teal areas (left → right) lie above µ, brown ones
    // (right → left) below, cut where the curve crosses zero, which lies
    // within one grid step of µ. µ is the dashed line of both leads.
    let text = read(&dir, "spectrum.svg");
    let doc = roxmltree::Document::parse(&text).unwrap();
    let mu_px = vertical_lines(&doc, style::LEFT);
    assert_eq!(mu_px.len(), 1, "one left Fermi-level line per panel column");
    assert_eq!(vertical_lines(&doc, style::RIGHT), mu_px);
    let mu_px = mu_px[0];
    let forward = areas(&doc, style::FORWARD);
    let backward = areas(&doc, style::BACKWARD);
    assert!(!forward.is_empty(), "no left → right area drawn");
    assert!(!backward.is_empty(), "no right → left area drawn");
    // Pixels per eV from the window bar of the left lead, µ ± 2kT.
    let bar = doc
        .descendants()
        .filter(|n| n.has_tag_name("polyline"))
        .filter(|n| colour_of(*n, "stroke").as_deref() == Some(style::hex(style::LEFT).as_str()))
        .map(points)
        .find(|q| q.len() == 4)
        .expect("left window bar");
    let kt2 = 2.0 * qheat::units::BOLTZMANN_EV_PER_K * p.left.temperature_k;
    let px_per_ev = (bar[2].0 - bar[1].0) / (2.0 * kt2);
    let slack = px_per_ev * p.grid.step_ev + 1.0;
    for (lo, _) in &forward {
        assert!(
            *lo >= mu_px - slack,
            "left → right area from {lo} px, µ at {mu_px}"
        );
    }
    for (_, hi) in &backward {
        assert!(
            *hi <= mu_px + slack,
            "right → left area to {hi} px, µ at {mu_px}"
        );
    }
}

/// The map image of a figure: width, height, RGB rows top to bottom.
fn map_image(doc: &roxmltree::Document<'_>) -> (usize, usize, Vec<u8>) {
    let image = doc
        .descendants()
        .find(|n| n.has_tag_name("image"))
        .expect("map image");
    let b64 = image
        .attribute("href")
        .unwrap()
        .strip_prefix("data:image/png;base64,")
        .expect("PNG data URI");
    let decoder = png::Decoder::new(std::io::Cursor::new(decode_base64(b64)));
    let mut reader = decoder.read_info().unwrap();
    let mut buf = vec![0; reader.output_buffer_size().unwrap()];
    let info = reader.next_frame(&mut buf).unwrap();
    (info.width as usize, info.height as usize, buf)
}

#[test]
fn bond_current_map_colours_a_signed_logarithm_with_a_symmetric_bar() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("filter");
    run_solve("resonant-filter", &dir);
    let (sol, _) = solve_lib("resonant-filter");
    let text = read(&dir, "bond_current.svg");
    let doc = roxmltree::Document::parse(&text).unwrap();
    let texts: Vec<String> = doc
        .descendants()
        .filter(|n| n.has_tag_name("text"))
        .map(|n| n.text().unwrap_or("").trim().to_string())
        .collect();
    assert!(
        texts
            .iter()
            .any(|t| t.contains("signed log colour scale over 4 decades")),
        "the title names the scale: {texts:?}"
    );
    assert!(
        texts
            .iter()
            .any(|t| t == "bond current (µA/eV), signed log; + = electrons to +x"),
        "the colour bar names the quantity, unit, scale and sign: {texts:?}"
    );

    // Every pixel is the documented colour of its value: the diverging
    // scale at signed_log(v, largest |v|, 4 decades). The shown rows are a
    // contiguous energy range; find where it starts.
    let map = bond_current_map(&sol);
    let (pairs, ne) = map.dim();
    let (w, h, rgb) = map_image(&doc);
    assert_eq!(w, pairs);
    let m = map.iter().fold(0.0f64, |a, v| a.max(v.abs()));
    let expected = |r: usize, c: usize, first: usize| {
        let v = map[(c, first + h - 1 - r)];
        style::diverging(style::signed_log(v, m, style::SIGNED_LOG_DECADES))
    };
    let matches = |first: usize| {
        (0..h).all(|r| {
            (0..w).all(|c| {
                let e = expected(r, c, first);
                let px = &rgb[3 * (r * w + c)..3 * (r * w + c) + 3];
                px == [e.0, e.1, e.2]
            })
        })
    };
    let first = (0..=ne - h)
        .find(|&f| matches(f))
        .expect("no energy offset at which every pixel has its documented colour");
    // The counter-flow below µ (at most ~1e-3 of the largest current)
    // must show clearly on the brown side: a quarter of the way out or
    // more, where a linear scale would leave it white.
    let (mut weakest_shown, mut seen) = (0.0f64, 0);
    for r in 0..h {
        for c in 0..w {
            let v = map[(c, first + h - 1 - r)];
            if v < -1e-3 * m {
                seen += 1;
                let t = style::signed_log(v, m, style::SIGNED_LOG_DECADES);
                weakest_shown = weakest_shown.min(t);
                assert!(t <= -0.25, "value {v} drawn at only {t}");
            }
        }
    }
    assert!(
        seen > 100 && weakest_shown < -0.25,
        "{seen} counter-flow cells"
    );

    // The bar: tick labels symmetric about 0 (each +v at the mirror
    // height of −v) and spaced in decades, spanning at least three.
    let ticks: Vec<(f64, f64)> = doc
        .descendants()
        .filter(|n| n.has_tag_name("text") && n.attribute("text-anchor") == Some("start"))
        .filter(|n| num(*n, "x") > (w as f64).max(800.0))
        .filter_map(|n| {
            let v: f64 = n.text()?.trim().parse().ok()?;
            Some((v, num(n, "y")))
        })
        .collect();
    let zero = ticks.iter().find(|t| t.0 == 0.0).expect("a 0 tick").1;
    let positive: Vec<&(f64, f64)> = ticks.iter().filter(|t| t.0 > 0.0).collect();
    assert!(positive.len() >= 3, "ticks {ticks:?}");
    for (v, y) in &positive {
        let mirror = ticks
            .iter()
            .find(|t| t.0 == -v)
            .unwrap_or_else(|| panic!("no tick at -{v}: {ticks:?}"));
        assert!(
            ((y - zero) + (mirror.1 - zero)).abs() <= 1.0,
            "{v} at {y}, -{v} at {}, 0 at {zero}",
            mirror.1
        );
    }
    let mut pos: Vec<f64> = positive.iter().map(|t| t.0).collect();
    pos.sort_by(f64::total_cmp);
    for pair in pos.windows(2) {
        assert!(
            (pair[1] / pair[0] - 10.0).abs() < 1e-9,
            "ticks a decade apart: {pos:?}"
        );
    }
}
