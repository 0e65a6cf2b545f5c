//! The figures of a solved operating point.

use super::style::*;
use super::{
    Area, DrawError, MARGIN_LEFT, MARGIN_RIGHT, MapSpec, Mark, Overlay, Y_AREA, centred_note,
    desc_font, draw_legend, heat_map, legend_height, plot_error, render, short, tick_font,
    title_font,
};
use crate::observables::{Observables, bond_current_map};
use crate::output::OutputError;
use crate::scba::Solution;
use crate::units::{BOLTZMANN_EV_PER_K, ELEMENTARY_CHARGE};
use plotters::coord::types::RangedCoordf64;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

type Chart<'a, 'b> = ChartContext<'a, SVGBackend<'b>, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

const WIDTH: u32 = 1000;

/// Energies in meV when everything shown is below 2 eV, else in eV.
fn energy_unit(values: impl IntoIterator<Item = f64>) -> (f64, &'static str) {
    let m = values
        .into_iter()
        .filter(|v| v.is_finite())
        .fold(0.0f64, |m, v| m.max(v.abs()));
    if m < 2.0 { (1e3, "meV") } else { (1.0, "eV") }
}

/// A panel with the shared look; `x_desc` only on the lowest panel of a
/// stack.
fn panel<'a, 'b>(
    area: &'a Area<'b>,
    x: (f64, f64),
    y: (f64, f64),
    x_desc: Option<&str>,
    y_desc: &str,
    shade: &[(f64, f64)],
) -> Result<Chart<'a, 'b>, DrawError> {
    let mut chart = ChartBuilder::on(area)
        .margin_left(MARGIN_LEFT)
        .margin_right(MARGIN_RIGHT)
        .margin_top(6)
        .margin_bottom(4)
        .x_label_area_size(if x_desc.is_some() { 56 } else { 28 })
        .y_label_area_size(Y_AREA)
        .build_cartesian_2d(x.0..x.1, y.0..y.1)?;
    for &(a, b) in shade {
        chart.draw_series(std::iter::once(Rectangle::new(
            [(a, y.1), (b, y.0)],
            LEAD_SHADE.filled(),
        )))?;
    }
    let xd = decimals_for(x.1 - x.0, 10);
    let yd = decimals_for(y.1 - y.0, 6);
    let xf = move |v: &f64| tick(*v, xd);
    let yf = move |v: &f64| tick(*v, yd);
    let mut mesh = chart.configure_mesh();
    mesh.y_desc(y_desc)
        .x_labels(11)
        .y_labels(6)
        .x_label_formatter(&xf)
        .y_label_formatter(&yf)
        .label_style(tick_font())
        .axis_desc_style(desc_font())
        .bold_line_style(GRID)
        .light_line_style(WHITE.mix(0.0))
        .axis_style(INK);
    if let Some(d) = x_desc {
        mesh.x_desc(d);
    }
    mesh.draw()?;
    Ok(chart)
}

fn zero_line(chart: &mut Chart<'_, '_>, x: (f64, f64)) -> Result<(), DrawError> {
    chart.draw_series(std::iter::once(PathElement::new(
        vec![(x.0, 0.0), (x.1, 0.0)],
        INK.stroke_width(1),
    )))?;
    Ok(())
}

/// Step outline of per-cell values: flat over each cell of width `a`.
fn steps(x: &[f64], v: &[f64], a: f64, scale: f64) -> Vec<(f64, f64)> {
    let mut p = Vec::with_capacity(2 * x.len());
    for (xi, vi) in x.iter().zip(v) {
        p.push((xi - 0.5 * a, vi * scale));
        p.push((xi + 0.5 * a, vi * scale));
    }
    p
}

/// Energy window (eV) that holds every energy where `weight` exceeds 0.1 %
/// of its peak, together with the `keep` energies, padded by 8 %: a grid
/// chosen to hold every thermal tail is mostly empty to the eye.
fn busy_window(energies: &[f64], weight: &[f64], keep: &[f64]) -> (f64, f64) {
    let peak = max_abs(weight);
    let busy = energies
        .iter()
        .zip(weight)
        .filter(|(_, w)| peak > 0.0 && w.abs() >= 1e-3 * peak)
        .map(|(e, _)| e)
        .chain(keep);
    let (lo, hi) = finite_range(busy).unwrap_or((0.0, 1.0));
    let (lo, hi) = padded(lo, hi, 0.08);
    let (g0, g1) = finite_range(energies).unwrap_or((lo, hi));
    (lo.max(g0), hi.min(g1))
}

fn with_zero(range: Option<(f64, f64)>) -> (f64, f64) {
    let (lo, hi) = range.unwrap_or((0.0, 0.0));
    (lo.min(0.0), hi.max(0.0))
}

/// device.svg: band edge with the local and lead Fermi levels; the drop of
/// the local Fermi level per cell (where the resistance sits); the lattice
/// power per cell (where heat is deposited or taken), on one position axis.
pub fn device_svg(sol: &Solution, o: &Observables) -> Result<String, OutputError> {
    const FIGURE: &str = "device.svg";
    let p = &sol.problem;
    let s = &o.sites;
    let n = s.x_nm.len();
    if n == 0 {
        return Err(plot_error(FIGURE, "the device has no cells"));
    }
    let a = p.device.spacing_nm;
    let (xa, xb) = (s.x_nm[0] - 0.5 * a, s.x_nm[n - 1] + 0.5 * a);
    let lead_w = (0.06 * (xb - xa)).max(2.0 * a);
    let x = (xa - lead_w, xb + lead_w);
    let shade = [(x.0, xa), (xb, x.1)];
    let (mu_l, mu_r) = (p.left.fermi_level_ev, p.right.fermi_level_ev);
    let coherent = p.scattering.is_coherent();

    // Top: energies.
    let (ef, eu) = energy_unit(
        s.band_edge_ev
            .iter()
            .chain(&s.fermi_level_ev)
            .copied()
            .chain([mu_l, mu_r]),
    );
    let e_range = finite_range(
        s.band_edge_ev
            .iter()
            .chain(&s.fermi_level_ev)
            .chain([&mu_l, &mu_r]),
    )
    .unwrap_or((0.0, 1.0));
    let e_range = padded(e_range.0 * ef, e_range.1 * ef, 0.08);
    let top_entries = vec![
        (Mark::Line(INK, false), "band edge".to_string()),
        (
            Mark::Line(LOCAL_FERMI, false),
            "local Fermi level".to_string(),
        ),
        (
            Mark::Line(LEFT, false),
            format!("left lead Fermi level {} {eu}", short(mu_l * ef)),
        ),
        (
            Mark::Line(RIGHT, false),
            format!("right lead Fermi level {} {eu}", short(mu_r * ef)),
        ),
    ];

    // Middle: drops of the local Fermi level, contacts included.
    let mut drop_x = vec![s.x_nm[0] - 0.5 * a];
    let mut drop_v = vec![o.contact_drop_left_v];
    for i in 0..n {
        drop_x.push(s.x_nm[i] + 0.5 * a);
        drop_v.push(if i + 1 < n {
            s.voltage_drop_v[i]
        } else {
            o.contact_drop_right_v
        });
    }
    let (vf, vp) = prefix_for(max_abs(&drop_v));
    let drop_range = with_zero(finite_range(&drop_v));
    let drop_range = padded(drop_range.0 * vf, drop_range.1 * vf, 0.08);
    let biggest = drop_v
        .iter()
        .enumerate()
        .filter(|(_, v)| v.is_finite())
        .max_by(|l, r| l.1.abs().total_cmp(&r.1.abs()));
    let mid_entries = vec![(
        Mark::Block(DROP, 1.0),
        match biggest {
            Some((i, v)) => format!(
                "drop of the local Fermi level, cell to cell and into each contact (largest {} {vp}V {})",
                short(v * vf),
                if i == 0 {
                    "into the left contact".to_string()
                } else if i == n {
                    "into the right contact".to_string()
                } else {
                    format!("at x = {:.1} nm", drop_x[i])
                }
            ),
            None => "drop of the local Fermi level, cell to cell".to_string(),
        },
    )];

    // Bottom: lattice power.
    let pw = &s.lattice_power_w;
    let (pf, pp) = prefix_for(max_abs(pw));
    let heat: f64 = pw.iter().filter(|v| **v > 0.0).sum();
    let cool: f64 = pw.iter().filter(|v| **v < 0.0).sum();
    let all_zero = pw.iter().all(|v| *v == 0.0);
    let p_range = if all_zero {
        (-1.0, 1.0)
    } else {
        let r = with_zero(finite_range(pw));
        padded(r.0 * pf, r.1 * pf, 0.08)
    };
    let (tf, tp) = prefix_for(heat.abs().max(cool.abs()));
    let bottom_entries = if all_zero {
        vec![
            (Mark::Block(HEATING, 1.0), "lattice heated".to_string()),
            (Mark::Block(COOLING, 1.0), "lattice cooled".to_string()),
        ]
    } else {
        vec![
            (
                Mark::Block(HEATING, 1.0),
                format!("lattice heated: {} {tp}W in all", short(heat * tf)),
            ),
            (
                Mark::Block(COOLING, 1.0),
                format!("lattice cooled: {} {tp}W in all", short(cool * tf)),
            ),
        ]
    };

    let left = (MARGIN_LEFT + Y_AREA) as i32;
    let lh = |e: &[(Mark, String)]| legend_height(e, left, WIDTH as i32);
    let (h_top, h_mid, h_bot) = (300u32, 200u32, 250u32);
    let (l_top, l_mid, l_bot) = (lh(&top_entries), lh(&mid_entries), lh(&bottom_entries));
    let height = 44 + l_top + h_top + l_mid + h_mid + l_bot + h_bot + 30;
    let title = format!(
        "Along the device: V = {} mV, T left {} K, T right {} K, I = {} {}A",
        short(o.voltage_v * 1e3),
        short(p.left.temperature_k),
        short(p.right.temperature_k),
        short(o.current_a * prefix_for(o.current_a.abs()).0),
        prefix_for(o.current_a.abs()).1,
    );
    render(FIGURE, (WIDTH, height), |root, _| {
        let body = root.titled(&title, title_font())?;
        let (strip, rest) = body.split_vertically(l_top);
        draw_legend(&strip, &top_entries, left)?;
        let (top, rest) = rest.split_vertically(h_top);
        let (strip, rest) = rest.split_vertically(l_mid);
        draw_legend(&strip, &mid_entries, left)?;
        let (mid, rest) = rest.split_vertically(h_mid);
        let (strip, bottom) = rest.split_vertically(l_bot);
        draw_legend(&strip, &bottom_entries, left)?;

        let mut chart = panel(&top, x, e_range, None, &format!("energy ({eu})"), &shade)?;
        for (text, xc) in [
            ("left lead", 0.5 * (x.0 + xa)),
            ("right lead", 0.5 * (xb + x.1)),
        ] {
            chart.draw_series(std::iter::once(Text::new(
                text,
                (xc, e_range.1 - 0.015 * (e_range.1 - e_range.0)),
                tick_font().pos(Pos::new(HPos::Center, VPos::Top)),
            )))?;
        }
        for (mu, c, from, to) in [(mu_l, LEFT, x.0, xa), (mu_r, RIGHT, xb, x.1)] {
            chart.draw_series(std::iter::once(PathElement::new(
                vec![(from, mu * ef), (to, mu * ef)],
                c.stroke_width(4),
            )))?;
            chart.draw_series(DashedLineSeries::new(
                vec![(xa, mu * ef), (xb, mu * ef)],
                6,
                6,
                c.mix(0.55).stroke_width(1),
            ))?;
        }
        chart.draw_series(LineSeries::new(
            steps(&s.x_nm, &s.band_edge_ev, a, ef),
            INK.stroke_width(3),
        ))?;
        // Cells without a local Fermi level (NaN: no states, or a match
        // outside the search interval) break the line instead of being
        // joined across.
        let mut runs: Vec<Vec<(f64, f64)>> = vec![Vec::new()];
        for (xi, m) in s.x_nm.iter().zip(&s.fermi_level_ev) {
            if m.is_finite() {
                runs.last_mut().expect("a run").push((*xi, m * ef));
            } else if !runs.last().expect("a run").is_empty() {
                runs.push(Vec::new());
            }
        }
        for run in runs.into_iter().filter(|r| !r.is_empty()) {
            chart.draw_series(LineSeries::new(run, LOCAL_FERMI.stroke_width(2)))?;
        }

        let mut chart = panel(
            &mid,
            x,
            drop_range,
            None,
            &format!("Fermi-level drop ({vp}V)"),
            &shade,
        )?;
        chart.draw_series(
            drop_x
                .iter()
                .zip(&drop_v)
                .filter(|(_, v)| v.is_finite())
                .map(|(xi, v)| {
                    Rectangle::new([(xi - 0.4 * a, v * vf), (xi + 0.4 * a, 0.0)], DROP.filled())
                }),
        )?;
        zero_line(&mut chart, x)?;

        let mut chart = panel(
            &bottom,
            x,
            p_range,
            Some("position x (nm)"),
            &if all_zero {
                "lattice power per cell (W)".to_string()
            } else {
                format!("lattice power per cell ({pp}W)")
            },
            &shade,
        )?;
        chart.draw_series(
            s.x_nm
                .iter()
                .zip(pw)
                .filter(|(_, v)| v.is_finite() && **v != 0.0)
                .map(|(xi, v)| {
                    let c = if *v > 0.0 { HEATING } else { COOLING };
                    Rectangle::new([(xi - 0.4 * a, v * pf), (xi + 0.4 * a, 0.0)], c.filled())
                }),
        )?;
        zero_line(&mut chart, x)?;
        if all_zero {
            let note = if coherent {
                "coherent transport: no scattering, so no power reaches the lattice"
            } else {
                "the lattice power is zero in every cell"
            };
            centred_note(&bottom, &chart, note)?;
        }
        Ok(())
    })
}

/// spectrum.svg: energy-resolved flows into the device from each lead and
/// from the scattering bath, lead Fermi windows shaded; transmission below
/// when the transport is coherent.
pub fn spectrum_svg(sol: &Solution, o: &Observables) -> Result<String, OutputError> {
    const FIGURE: &str = "spectrum.svg";
    let p = &sol.problem;
    let sp = &o.spectrum;
    if sp.energy_ev.is_empty() {
        return Err(plot_error(FIGURE, "the energy grid is empty"));
    }
    let coherent = p.scattering.is_coherent();
    let e = ELEMENTARY_CHARGE;
    let (ef, eu) = energy_unit(sp.energy_ev.iter().copied());
    let weight: Vec<f64> = (0..sp.energy_ev.len())
        .map(|k| sp.flow_left[k].abs() + sp.flow_right[k].abs() + sp.flow_bath[k].abs())
        .collect();
    let keep: Vec<f64> = [&p.left, &p.right]
        .iter()
        .flat_map(|c| {
            let w = 2.0 * BOLTZMANN_EV_PER_K * c.temperature_k;
            [c.fermi_level_ev - w, c.fermi_level_ev + w]
        })
        .collect();
    let x = busy_window(&sp.energy_ev, &weight, &keep);
    let x = (x.0 * ef, x.1 * ef);
    let all: Vec<f64> = sp
        .flow_left
        .iter()
        .chain(&sp.flow_right)
        .chain(&sp.flow_bath)
        .map(|v| v * e)
        .collect();
    let (ff, fp) = prefix_for(max_abs(&all));
    let y = padded(
        with_zero(finite_range(&all)).0 * ff,
        with_zero(finite_range(&all)).1 * ff,
        0.06,
    );
    let window = |c: &crate::model::Contact| {
        let w = 2.0 * BOLTZMANN_EV_PER_K * c.temperature_k;
        (
            (c.fermi_level_ev - w) * ef,
            c.fermi_level_ev * ef,
            (c.fermi_level_ev + w) * ef,
        )
    };
    let (wl, wr) = (window(&p.left), window(&p.right));
    let mut entries = vec![
        (Mark::Line(LEFT, false), "from the left lead".to_string()),
        (Mark::Line(RIGHT, false), "from the right lead".to_string()),
    ];
    if !coherent {
        entries.push((
            Mark::Line(BATH, false),
            "from the scattering bath".to_string(),
        ));
    }
    entries.push((
        Mark::Block(LEFT, 0.18),
        format!("left lead µ ± 2kT ({} K)", short(p.left.temperature_k)),
    ));
    entries.push((
        Mark::Block(RIGHT, 0.18),
        format!("right lead µ ± 2kT ({} K)", short(p.right.temperature_k)),
    ));
    let left = (MARGIN_LEFT + Y_AREA) as i32;
    let lh = legend_height(&entries, left, WIDTH as i32);
    let h_flow = 380u32;
    let h_tr = if coherent { 240u32 } else { 0 };
    let height = 44 + lh + h_flow + h_tr + 30;
    let draw_windows = |chart: &mut Chart<'_, '_>, y: (f64, f64)| -> Result<(), DrawError> {
        for (w, c) in [(wl, LEFT), (wr, RIGHT)] {
            chart.draw_series(std::iter::once(Rectangle::new(
                [(w.0, y.1), (w.2, y.0)],
                c.mix(0.13).filled(),
            )))?;
            chart.draw_series(DashedLineSeries::new(
                vec![(w.1, y.0), (w.1, y.1)],
                6,
                5,
                c.stroke_width(1),
            ))?;
        }
        Ok(())
    };
    let title = if coherent {
        "Energy-resolved flows and transmission"
    } else {
        "Energy-resolved flows into the device"
    };
    render(FIGURE, (WIDTH, height), |root, _| {
        let body = root.titled(title, title_font())?;
        let (strip, rest) = body.split_vertically(lh);
        draw_legend(&strip, &entries, left)?;
        let (top, bottom) = rest.split_vertically(h_flow);
        let x_desc = format!("energy E ({eu})");
        let mut chart = panel(
            &top,
            x,
            y,
            (!coherent).then_some(x_desc.as_str()),
            &format!("electron flow × e ({fp}A/eV)"),
            &[],
        )?;
        draw_windows(&mut chart, y)?;
        zero_line(&mut chart, x)?;
        let inside = |en: &f64| en * ef >= x.0 && en * ef <= x.1;
        let line = |v: &[f64]| -> Vec<(f64, f64)> {
            sp.energy_ev
                .iter()
                .zip(v)
                .filter(|(en, _)| inside(en))
                .map(|(en, f)| (en * ef, f * e * ff))
                .collect()
        };
        chart.draw_series(LineSeries::new(line(&sp.flow_left), LEFT.stroke_width(2)))?;
        chart.draw_series(LineSeries::new(line(&sp.flow_right), RIGHT.stroke_width(2)))?;
        if !coherent {
            chart.draw_series(LineSeries::new(line(&sp.flow_bath), BATH.stroke_width(2)))?;
        }
        if let Some(t) = &sp.transmission {
            let tmax = max_abs(t).max(1.0) * 1.05;
            let mut chart = panel(
                &bottom,
                x,
                (0.0, tmax),
                Some(&x_desc),
                "transmission T(E)",
                &[],
            )?;
            draw_windows(&mut chart, (0.0, tmax))?;
            chart.draw_series(LineSeries::new(
                sp.energy_ev
                    .iter()
                    .zip(t)
                    .filter(|(en, _)| inside(en))
                    .map(|(en, tv)| (en * ef, *tv)),
                TRANSMISSION.stroke_width(2),
            ))?;
        }
        Ok(())
    })
}

/// bond_current.svg: the energy-resolved current between neighbouring
/// cells over position and energy, with the band edge and the local Fermi
/// level drawn on top.
pub fn bond_current_svg(sol: &Solution, o: &Observables) -> Result<String, OutputError> {
    const FIGURE: &str = "bond_current.svg";
    let p = &sol.problem;
    let s = &o.sites;
    let map = bond_current_map(sol);
    let (pairs, ne) = map.dim();
    if pairs == 0 || ne == 0 {
        return Err(plot_error(
            FIGURE,
            format!(
                "a bond-current map needs at least two cells and one energy ({} cells, {ne} energies)",
                pairs + 1
            ),
        ));
    }
    let a = p.device.spacing_nm;
    let x: Vec<f64> = s.x_nm[..pairs].iter().map(|xi| xi + 0.5 * a).collect();
    let energies = &o.spectrum.energy_ev;
    let (ef, eu) = energy_unit(energies.iter().copied());
    let weight: Vec<f64> = (0..ne)
        .map(|k| map.column(k).iter().fold(0.0f64, |m, v| m.max(v.abs())))
        .collect();
    let keep = [p.left.fermi_level_ev, p.right.fermi_level_ev];
    let (e0, e1) = busy_window(energies, &weight, &keep);
    let rows: Vec<usize> = (0..ne)
        .filter(|&k| energies[k] >= e0 && energies[k] <= e1)
        .collect();
    let y: Vec<f64> = rows.iter().map(|&k| energies[k] * ef).collect();
    let (vf, vp) = prefix_for(max_abs(map.iter()));
    let values =
        ndarray::Array2::from_shape_fn((rows.len(), pairs), |(r, c)| map[(c, rows[r])] * vf);
    let band = steps(&s.x_nm, &s.band_edge_ev, a, ef);
    let fermi: Vec<(f64, f64)> = s
        .x_nm
        .iter()
        .zip(&s.fermi_level_ev)
        .map(|(xi, m)| (*xi, m * ef))
        .collect();
    let colour_label = format!("current density ({vp}A/eV), + = electrons to +x");
    heat_map(&MapSpec {
        title: "Energy-resolved current between neighbouring cells",
        x_label: "position x (nm)",
        y_label: &format!("energy E ({eu})"),
        x: &x,
        y: &y,
        values: &values,
        colour_label: &colour_label,
        diverging: true,
        overlays: vec![
            Overlay {
                label: "band edge".into(),
                points: &band,
                colour: INK,
                dashed: false,
            },
            Overlay {
                label: "local Fermi level".into(),
                points: &fermi,
                colour: LOCAL_FERMI,
                dashed: true,
            },
        ],
        size: (WIDTH, 640),
    })
}

/// convergence.svg: the Born-loop residual and the change of the terminal
/// currents (relative to their allowance) per iteration, on a log scale.
/// `None` for coherent transport, which has no iterations.
pub fn convergence_svg(sol: &Solution) -> Result<Option<String>, OutputError> {
    const FIGURE: &str = "convergence.svg";
    let r = &sol.report;
    if r.history.is_empty() {
        return Ok(None);
    }
    let tol = r.params.tolerance;
    let residual: Vec<(f64, f64)> = r
        .history
        .iter()
        .filter(|h| h.residual.is_finite() && h.residual > 0.0)
        .map(|h| (h.iteration as f64, h.residual))
        .collect();
    let change: Vec<(f64, f64)> = r
        .history
        .iter()
        .filter(|h| h.current_change.is_finite() && h.current_change > 0.0)
        .map(|h| (h.iteration as f64, h.current_change))
        .collect();
    let ys: Vec<f64> = residual
        .iter()
        .chain(&change)
        .map(|p| p.1)
        .chain([tol, 1.0])
        .collect();
    let (lo, hi) = finite_range(&ys).unwrap_or((tol, 1.0));
    let (lo, hi) = (lo / 3.0, hi * 3.0);
    let last = r.history.last().map(|h| h.iteration).unwrap_or(1) as f64;
    let x = (0.5, last.max(1.0) + 0.5);
    let entries = vec![
        (
            Mark::Line(RESIDUAL, false),
            "residual: relative change of the scattering self-energy".to_string(),
        ),
        (
            Mark::Line(BATH, false),
            "change of the terminal currents / allowance".to_string(),
        ),
        (Mark::Line(RESIDUAL, true), format!("tolerance {tol:.0e}")),
        (Mark::Line(BATH, true), "current allowance (1)".to_string()),
    ];
    let left = (MARGIN_LEFT + Y_AREA) as i32;
    let lh = legend_height(&entries, left, 900);
    let title = format!(
        "Born loop: {} after {} iterations",
        if r.converged {
            "converged"
        } else {
            "NOT converged"
        },
        r.iterations
    );
    let svg = render(FIGURE, (900, 44 + lh + 420), |root, _| {
        let body = root.titled(&title, title_font())?;
        let (strip, plot) = body.split_vertically(lh);
        draw_legend(&strip, &entries, left)?;
        let mut chart = ChartBuilder::on(&plot)
            .margin_left(MARGIN_LEFT)
            .margin_right(MARGIN_RIGHT)
            .margin_top(8)
            .margin_bottom(8)
            .x_label_area_size(56)
            .y_label_area_size(Y_AREA)
            .build_cartesian_2d(x.0..x.1, (lo..hi).log_scale())?;
        let xf = |v: &f64| {
            if (v - v.round()).abs() < 1e-9 {
                format!("{}", v.round())
            } else {
                String::new()
            }
        };
        let yf = |v: &f64| log_tick(*v);
        chart
            .configure_mesh()
            .x_desc("Born iteration")
            .y_desc("relative change (log scale)")
            .x_labels(12)
            .y_labels(12)
            .x_label_formatter(&xf)
            .y_label_formatter(&yf)
            .label_style(tick_font())
            .axis_desc_style(desc_font())
            .bold_line_style(GRID)
            .light_line_style(WHITE.mix(0.0))
            .axis_style(INK)
            .draw()?;
        for (level, c) in [(tol, RESIDUAL), (1.0, BATH)] {
            chart.draw_series(DashedLineSeries::new(
                vec![(x.0, level), (x.1, level)],
                8,
                5,
                c.stroke_width(1),
            ))?;
        }
        for (pts, c) in [(&residual, RESIDUAL), (&change, BATH)] {
            chart.draw_series(LineSeries::new(pts.iter().copied(), c.stroke_width(2)))?;
            chart.draw_series(pts.iter().map(|&q| Circle::new(q, 3, c.filled())))?;
        }
        Ok(())
    })?;
    Ok(Some(svg))
}
