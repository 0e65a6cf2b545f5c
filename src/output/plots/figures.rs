//! The figures of a solved operating point.

use super::raster::MapValues;
use super::style::*;
use super::{
    Area, DrawError, MARGIN_LEFT, MARGIN_RIGHT, MapScale, MapSpec, Mark, Overlay, Y_AREA,
    centred_note, desc_font, draw_legend, heat_map, legend_height, plot_error, render, short,
    tick_font, title_font,
};
use crate::observables::{BondCurrent, Observables, Occupation, Spectrum};
use crate::output::OutputError;
use crate::output::sizes::ResultLimits;
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

/// Position axis of the device figure: the device and a strip of each lead.
struct Span {
    /// Whole axis (nm).
    x: (f64, f64),
    /// Device edges (nm).
    xa: f64,
    xb: f64,
    /// Cell spacing (nm).
    a: f64,
}

impl Span {
    fn shade(&self) -> [(f64, f64); 2] {
        [(self.x.0, self.xa), (self.xb, self.x.1)]
    }
}

/// Top panel of device.svg: band edge, local Fermi level and the lead
/// Fermi levels (thick in each lead, dashed across the device); with
/// self-consistent electrostatics also the band edge without the
/// potential of the device's charge.
struct EnergyPanel {
    range: (f64, f64),
    factor: f64,
    unit: &'static str,
    entries: Vec<(Mark, String)>,
    /// With electrostatics: the band edge of each cell without the
    /// computed potential (eV).
    imposed: Option<Vec<f64>>,
}

/// The band edge of each cell without the electrostatic potential energy
/// `potential_ev` the device's charge put there: what the imposed
/// potential alone (the band offsets; with electrostatics the bias drops
/// at the contacts) gives. sites.csv writes the same numbers as
/// `band_edge_imposed_ev`.
pub fn band_edge_without_potential(band_edge_ev: &[f64], potential_ev: &[f64]) -> Vec<f64> {
    band_edge_ev
        .iter()
        .enumerate()
        .map(|(i, e)| e - potential_ev.get(i).copied().unwrap_or(f64::NAN))
        .collect()
}

/// Legend entries of the band edge: one plain entry, or with
/// electrostatics one for the band edge with the charge's potential and
/// one without it, each with the top of its barrier.
fn band_edge_entries(
    band_edge_ev: &[f64],
    imposed: Option<&[f64]>,
    (factor, unit): (f64, &str),
) -> Vec<(Mark, String)> {
    let Some(imposed) = imposed else {
        return vec![(Mark::Line(INK, false), "band edge".to_string())];
    };
    let top = |v: &[f64]| short(v.iter().copied().fold(f64::NEG_INFINITY, f64::max) * factor);
    vec![
        (
            Mark::Line(INK, false),
            format!(
                "band edge with the potential of the device's charge (top {} {unit})",
                top(band_edge_ev)
            ),
        ),
        (
            Mark::Line(BAND_EDGE_IMPOSED, false),
            format!(
                "band edge without it: band offsets only (top {} {unit})",
                top(imposed)
            ),
        ),
    ]
}

fn energy_panel(sol: &Solution, o: &Observables, potential_ev: Option<&[f64]>) -> EnergyPanel {
    let s = &o.sites;
    let (mu_l, mu_r) = (
        sol.problem.left.fermi_level_ev,
        sol.problem.right.fermi_level_ev,
    );
    let movers = mover_runs(o, 1.0);
    let imposed = potential_ev.map(|u| band_edge_without_potential(&s.band_edge_ev, u));
    let levels = || {
        s.band_edge_ev
            .iter()
            .chain(imposed.iter().flatten())
            .chain(&s.fermi_level_ev)
            .copied()
            .chain([mu_l, mu_r])
            .chain(movers.iter().flatten().flatten().map(|p| p.1))
            .chain(o.contacts.iter().map(|c| c.fermi_level_ev))
    };
    let (factor, unit) = energy_unit(levels());
    let r = finite_range(&levels().collect::<Vec<_>>()).unwrap_or((0.0, 1.0));
    let mut entries = band_edge_entries(&s.band_edge_ev, imposed.as_deref(), (factor, unit));
    entries.extend([
        (
            Mark::Line(LOCAL_FERMI, false),
            "local Fermi level".to_string(),
        ),
        (
            Mark::Line(LEFT, false),
            format!("left lead Fermi level {} {unit}", short(mu_l * factor)),
        ),
        (
            Mark::Line(RIGHT, false),
            format!("right lead Fermi level {} {unit}", short(mu_r * factor)),
        ),
    ]);
    let movers_legend = [
        (FORWARD, "right-movers' level µ₊"),
        (BACKWARD, "left-movers' level µ₋"),
    ];
    for (runs, (colour, label)) in movers.iter().zip(movers_legend) {
        if !runs.is_empty() {
            entries.push((Mark::Line(colour, true), label.to_string()));
        }
    }
    if !o.contacts.is_empty() {
        entries.push((
            Mark::Line(BATH, false),
            "attached contacts: µ over their cells".to_string(),
        ));
    }
    EnergyPanel {
        range: padded(r.0 * factor, r.1 * factor, 0.08),
        factor,
        unit,
        entries,
        imposed,
    }
}

fn draw_energy_panel(
    area: &Area<'_>,
    sol: &Solution,
    o: &Observables,
    span: &Span,
    ep: &EnergyPanel,
) -> Result<(), DrawError> {
    let s = &o.sites;
    let (x, ef, e_range) = (span.x, ep.factor, ep.range);
    let y_desc = format!("energy ({})", ep.unit);
    let mut chart = panel(area, x, e_range, None, &y_desc, &span.shade())?;
    for (text, xc) in [
        ("left lead", 0.5 * (x.0 + span.xa)),
        ("right lead", 0.5 * (span.xb + x.1)),
    ] {
        chart.draw_series(std::iter::once(Text::new(
            text,
            (xc, e_range.1 - 0.015 * (e_range.1 - e_range.0)),
            tick_font().pos(Pos::new(HPos::Center, VPos::Top)),
        )))?;
    }
    let (mu_l, mu_r) = (
        sol.problem.left.fermi_level_ev,
        sol.problem.right.fermi_level_ev,
    );
    for (mu, c, from, to) in [(mu_l, LEFT, x.0, span.xa), (mu_r, RIGHT, span.xb, x.1)] {
        chart.draw_series(std::iter::once(PathElement::new(
            vec![(from, mu * ef), (to, mu * ef)],
            c.stroke_width(4),
        )))?;
        chart.draw_series(DashedLineSeries::new(
            vec![(span.xa, mu * ef), (span.xb, mu * ef)],
            6,
            6,
            c.stroke_width(1),
        ))?;
    }
    // The band edge without the charge's potential goes under the one
    // with it: where the charge moved nothing, the reader sees one line.
    if let Some(imposed) = &ep.imposed {
        chart.draw_series(LineSeries::new(
            steps(&s.x_nm, imposed, span.a, ef),
            BAND_EDGE_IMPOSED.stroke_width(2),
        ))?;
    }
    chart.draw_series(LineSeries::new(
        steps(&s.x_nm, &s.band_edge_ev, span.a, ef),
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
    for (runs, colour) in mover_runs(o, ef).into_iter().zip([FORWARD, BACKWARD]) {
        for run in runs {
            chart.draw_series(DashedLineSeries::new(run, 5, 4, colour.stroke_width(2)))?;
        }
    }
    draw_attached_contacts(&mut chart, o, span.a, ef)
}

/// Each attached contact as a thick bar at its level µ_p (given or read)
/// over its cells, with a dot at each cell: a probe's reading beside the
/// local Fermi level.
fn draw_attached_contacts(
    chart: &mut Chart<'_, '_>,
    o: &Observables,
    a: f64,
    ef: f64,
) -> Result<(), DrawError> {
    let x = &o.sites.x_nm;
    for c in &o.contacts {
        let y = c.fermi_level_ev * ef;
        let xs: Vec<f64> = c.cells.iter().filter_map(|&i| x.get(i).copied()).collect();
        let (Some(lo), Some(hi)) = (xs.first(), xs.last()) else {
            continue;
        };
        chart.draw_series(std::iter::once(PathElement::new(
            vec![(lo - 0.5 * a, y), (hi + 0.5 * a, y)],
            BATH.stroke_width(4),
        )))?;
        chart.draw_series(xs.iter().map(|&xi| Circle::new((xi, y), 3, BATH.filled())))?;
    }
    Ok(())
}

/// The right- and the left-movers' levels (scaled by `ef`) at the middle
/// of each pair of cells, split into runs where they are found: empty
/// when the movers were not asked for or found nowhere.
fn mover_runs(o: &Observables, ef: f64) -> [Vec<Vec<(f64, f64)>>; 2] {
    let s = &o.sites;
    let Some(m) = s.movers.as_ref() else {
        return [Vec::new(), Vec::new()];
    };
    let x: Vec<f64> = s.x_nm.windows(2).map(|w| 0.5 * (w[0] + w[1])).collect();
    [&m.right_ev, &m.left_ev].map(|levels| {
        let mut runs: Vec<Vec<(f64, f64)>> = vec![Vec::new()];
        for (xi, mu) in x.iter().zip(levels.iter()) {
            if mu.is_finite() {
                runs.last_mut().expect("a run").push((*xi, mu * ef));
            } else if !runs.last().expect("a run").is_empty() {
                runs.push(Vec::new());
            }
        }
        runs.retain(|r| !r.is_empty());
        runs
    })
}

/// Middle panel of device.svg: drops of the local Fermi level, contacts
/// included, as bars at the cell boundaries.
struct DropPanel {
    x: Vec<f64>,
    v: Vec<f64>,
    range: (f64, f64),
    factor: f64,
    prefix: &'static str,
    entries: Vec<(Mark, String)>,
}

fn drop_panel(o: &Observables, a: f64) -> DropPanel {
    let s = &o.sites;
    let n = s.x_nm.len();
    let mut x = vec![s.x_nm[0] - 0.5 * a];
    let mut v = vec![o.contact_drop_left_v];
    for i in 0..n {
        x.push(s.x_nm[i] + 0.5 * a);
        // The last cell's own entry is zero by definition; its bar is the
        // drop into the right contact.
        v.push(if i + 1 < n {
            s.voltage_drop_v[i]
        } else {
            o.contact_drop_right_v
        });
    }
    let (factor, prefix) = prefix_for(max_abs(&v));
    let r = with_zero(finite_range(&v));
    let biggest = v
        .iter()
        .enumerate()
        .filter(|(_, v)| v.is_finite())
        .max_by(|l, r| l.1.abs().total_cmp(&r.1.abs()));
    let label = match biggest {
        Some((i, d)) => format!(
            "drop of the local Fermi level, cell to cell and into each contact (largest {} {prefix}V {})",
            short(d * factor),
            if i == 0 {
                "into the left contact".to_string()
            } else if i == n {
                "into the right contact".to_string()
            } else {
                format!("at x = {:.1} nm", x[i])
            }
        ),
        None => "drop of the local Fermi level, cell to cell".to_string(),
    };
    DropPanel {
        range: padded(r.0 * factor, r.1 * factor, 0.08),
        x,
        v,
        factor,
        prefix,
        entries: vec![(Mark::Block(DROP, 1.0), label)],
    }
}

fn draw_drop_panel(area: &Area<'_>, span: &Span, dp: &DropPanel) -> Result<(), DrawError> {
    let y_desc = format!("Fermi-level drop ({}V)", dp.prefix);
    let mut chart = panel(area, span.x, dp.range, None, &y_desc, &span.shade())?;
    let (a, vf) = (span.a, dp.factor);
    chart.draw_series(
        dp.x.iter()
            .zip(&dp.v)
            .filter(|(_, v)| v.is_finite())
            .map(|(xi, v)| {
                Rectangle::new([(xi - 0.4 * a, v * vf), (xi + 0.4 * a, 0.0)], DROP.filled())
            }),
    )?;
    zero_line(&mut chart, span.x)
}

/// Legend of the bottom panel of device.svg: heated and cooled, with the
/// totals when there is lattice power.
fn power_entries(pw: &[f64]) -> Vec<(Mark, String)> {
    let heat: f64 = pw.iter().filter(|v| **v > 0.0).sum();
    let cool: f64 = pw.iter().filter(|v| **v < 0.0).sum();
    if pw.iter().all(|v| *v == 0.0) {
        return vec![
            (Mark::Block(HEATING, 1.0), "lattice heated".to_string()),
            (Mark::Block(COOLING, 1.0), "lattice cooled".to_string()),
        ];
    }
    let (tf, tp) = prefix_for(heat.abs().max(cool.abs()));
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
}

/// Bottom panel of device.svg: lattice power per cell, heated and cooled
/// cells in their own colours; a note when there is no power at all.
fn draw_power_panel(
    area: &Area<'_>,
    span: &Span,
    (pw, x_nm): (&[f64], &[f64]),
    coherent: bool,
    lowest: bool,
) -> Result<(), DrawError> {
    let (pf, pp) = prefix_for(max_abs(pw));
    let all_zero = pw.iter().all(|v| *v == 0.0);
    let p_range = if all_zero {
        (-1.0, 1.0)
    } else {
        let r = with_zero(finite_range(pw));
        padded(r.0 * pf, r.1 * pf, 0.08)
    };
    let y_desc = if all_zero {
        "lattice power per cell (W)".to_string()
    } else {
        format!("lattice power per cell ({pp}W)")
    };
    let x_desc = lowest.then_some("position x (nm)");
    let mut chart = panel(area, span.x, p_range, x_desc, &y_desc, &span.shade())?;
    let a = span.a;
    chart.draw_series(
        x_nm.iter()
            .zip(pw)
            .filter(|(_, v)| v.is_finite() && **v != 0.0)
            .map(|(xi, v)| {
                let c = if *v > 0.0 { HEATING } else { COOLING };
                Rectangle::new([(xi - 0.4 * a, v * pf), (xi + 0.4 * a, 0.0)], c.filled())
            }),
    )?;
    zero_line(&mut chart, span.x)?;
    if all_zero {
        let note = if coherent {
            "coherent transport: no scattering, so no power reaches the lattice"
        } else {
            "the lattice power is zero in every cell"
        };
        centred_note(area, &chart, note)?;
    }
    Ok(())
}

/// Entries of a panel's legend.
type Legend = Vec<(Mark, String)>;

/// The lattice temperature of a self-heated solve, per cell (K), and the
/// legend of its panel; `None` without self-heating.
fn temperature_panel(sol: &Solution) -> Option<(Vec<f64>, Legend)> {
    sol.lattice_temperature_k.as_ref()?;
    let p = &sol.problem;
    let t: Vec<f64> = (0..p.device.cells())
        .map(|c| crate::output::schema::tables::cell_lattice_temperature(sol, c))
        .collect();
    let hot = t.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let entries = vec![
        (
            Mark::Line(LATTICE_TEMPERATURE, false),
            format!("lattice temperature T_L, hottest {hot:.1} K"),
        ),
        (
            Mark::Line(LEFT, true),
            format!("left contact {} K", short(p.left.temperature_k)),
        ),
        (
            Mark::Line(RIGHT, true),
            format!("right contact {} K", short(p.right.temperature_k)),
        ),
    ];
    Some((t, entries))
}

/// Lowest panel of device.svg with self-heating: T_L per cell as steps,
/// the contact (phonon lead) temperatures dashed.
fn draw_temperature_panel(
    area: &Area<'_>,
    span: &Span,
    sol: &Solution,
    (x_nm, t): (&[f64], &[f64]),
) -> Result<(), DrawError> {
    let p = &sol.problem;
    let (tl, tr) = (p.left.temperature_k, p.right.temperature_k);
    let (lo, hi) = finite_range(t.iter().chain([&tl, &tr])).unwrap_or((tl, tr));
    let range = padded(lo, hi.max(lo + 1e-3), 0.08);
    let x_desc = Some("position x (nm)");
    let y_desc = "lattice temperature (K)";
    let mut chart = panel(area, span.x, range, x_desc, y_desc, &span.shade())?;
    for (temp, colour) in [(tl, LEFT), (tr, RIGHT)] {
        chart.draw_series(DashedLineSeries::new(
            vec![(span.x.0, temp), (span.x.1, temp)],
            6,
            4,
            colour.stroke_width(2),
        ))?;
    }
    chart.draw_series(LineSeries::new(
        steps(x_nm, t, span.a, 1.0),
        LATTICE_TEMPERATURE.stroke_width(3),
    ))?;
    Ok(())
}

/// device.svg: band edge with the local and lead Fermi levels; the drop of
/// the local Fermi level per cell (where the resistance sits); the lattice
/// power per cell (where heat is deposited or taken), on one position axis;
/// with self-heating, below it the lattice temperature per cell against the
/// contact temperatures (where the heat piles up). The leads are drawn in neutral greys, heating and cooling in orange and
/// blue, so no colour stands for two things.
pub fn device_svg(sol: &Solution, o: &Observables) -> Result<String, OutputError> {
    device_svg_with_potential(sol, o, None)
}

/// [`device_svg`] of a solve with self-consistent electrostatics:
/// `potential_ev` is the electrostatic potential energy U_es of each cell
/// that the device's charge put there (included in the solution's band
/// edge). The top panel then shows the band edge with it and, beside it,
/// the band edge without it (the band offsets the case imposes), so that a
/// reader sees how far the charge moved the barrier; the legend says which
/// is which and gives the top of each. With `None` the figure is
/// [`device_svg`]'s.
pub fn device_svg_with_potential(
    sol: &Solution,
    o: &Observables,
    potential_ev: Option<&[f64]>,
) -> Result<String, OutputError> {
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
    let span = Span {
        x: (xa - lead_w, xb + lead_w),
        xa,
        xb,
        a,
    };
    if let Some(u) = potential_ev.filter(|u| u.len() != n) {
        return Err(plot_error(
            FIGURE,
            format!(
                "expected one electrostatic potential value per cell ({n}), found {}",
                u.len()
            ),
        ));
    }
    let ep = energy_panel(sol, o, potential_ev);
    let dp = drop_panel(o, a);
    let bottom_entries = power_entries(&s.lattice_power_w);
    let heat = temperature_panel(sol);
    let left = (MARGIN_LEFT + Y_AREA) as i32;
    let lh = |e: &[(Mark, String)]| legend_height(e, left, WIDTH as i32);
    let (h_top, h_mid) = (300u32, 200u32);
    let (l_top, l_mid, l_bot) = (lh(&ep.entries), lh(&dp.entries), lh(&bottom_entries));
    let (l_heat, h_heat) = heat.as_ref().map_or((0, 0), |(_, e)| (lh(e), 220));
    let h_power = if heat.is_some() { 200 } else { 250 };
    let height = 44 + l_top + h_top + l_mid + h_mid + l_bot + h_power + l_heat + h_heat + 30;
    let (cf, cp) = prefix_for(o.current_a.abs());
    let title = format!(
        "Along the device: V = {} mV, T left {} K, T right {} K, I = {} {cp}A",
        short(o.voltage_v * 1e3),
        short(p.left.temperature_k),
        short(p.right.temperature_k),
        short(o.current_a * cf),
    );
    render(FIGURE, (WIDTH, height), |root, _| {
        let body = root.titled(&title, title_font())?;
        let (strip, rest) = body.split_vertically(l_top);
        draw_legend(&strip, &ep.entries, left)?;
        let (top, rest) = rest.split_vertically(h_top);
        let (strip, rest) = rest.split_vertically(l_mid);
        draw_legend(&strip, &dp.entries, left)?;
        let (mid, rest) = rest.split_vertically(h_mid);
        let (strip, rest) = rest.split_vertically(l_bot);
        draw_legend(&strip, &bottom_entries, left)?;
        let (power, rest) = rest.split_vertically(h_power);
        draw_energy_panel(&top, sol, o, &span, &ep)?;
        draw_drop_panel(&mid, &span, &dp)?;
        let coherent = p.scattering.is_coherent();
        let pw = (s.lattice_power_w.as_slice(), s.x_nm.as_slice());
        draw_power_panel(&power, &span, pw, coherent, heat.is_none())?;
        if let Some((t, entries)) = &heat {
            let (strip, lowest) = rest.split_vertically(l_heat);
            draw_legend(&strip, entries, left)?;
            draw_temperature_panel(&lowest, &span, sol, (&s.x_nm, t))?;
        }
        Ok(())
    })
}

/// Net electron flow through the device per unit energy, 1/(eV s):
/// n(E) = (j_L(E) − j_R(E))/2, what enters from the left lead and what
/// leaves into the right lead, averaged. Positive: electrons move from left
/// to right at that energy. In coherent transport j_R = −j_L, so n(E) is
/// (g_s/h)(f_L − f_R) T(E), the difference of the lead occupations times
/// the transmission. Charge conservation (∫j_L = −∫j_R) makes
/// −e Σ_k n(E_k) ΔE the current I of the operating point.
pub fn net_flow(spectrum: &Spectrum) -> Vec<f64> {
    spectrum
        .flow_left
        .iter()
        .zip(&spectrum.flow_right)
        .map(|(l, r)| 0.5 * (l - r))
        .collect()
}

/// Closed areas between a curve and zero, one per run of one sign, split
/// where the curve crosses zero (linear interpolation between samples):
/// `(positive, polygon)`. Zero and non-finite samples end a run.
fn signed_areas(points: &[(f64, f64)]) -> Vec<(bool, Vec<(f64, f64)>)> {
    let sign = |y: f64| {
        if y > 0.0 {
            1
        } else if y < 0.0 {
            -1
        } else {
            0
        }
    };
    let mut areas = Vec::new();
    let mut run: Vec<(f64, f64)> = Vec::new();
    let mut last = 0;
    for (i, &(x, y)) in points.iter().enumerate() {
        let s = if y.is_finite() { sign(y) } else { 0 };
        if s != last {
            let edge = match i.checked_sub(1).map(|j| points[j]) {
                Some((x0, y0)) if last != 0 && s != 0 => x0 + (x - x0) * y0 / (y0 - y),
                Some((x0, _)) if last == 0 => x0,
                _ => x,
            };
            if last != 0 {
                run.push((edge, 0.0));
                areas.push((last > 0, std::mem::take(&mut run)));
            }
            if s != 0 {
                run.push((edge, 0.0));
            }
            last = s;
        }
        if s != 0 {
            run.push((x, y));
        }
    }
    if let Some(&(x, _)) = run.last() {
        run.push((x, 0.0));
        areas.push((last > 0, run));
    }
    areas
}

/// A lead's Fermi window µ ± 2kT and its Fermi level, in plot units.
struct Window {
    lo: f64,
    mu: f64,
    hi: f64,
    colour: RGBColor,
    label: String,
}

fn windows(p: &crate::model::Problem, ef: f64) -> [Window; 2] {
    let window = |c: &crate::model::Contact, colour, side: &str| {
        let w = 2.0 * BOLTZMANN_EV_PER_K * c.temperature_k;
        Window {
            lo: (c.fermi_level_ev - w) * ef,
            mu: c.fermi_level_ev * ef,
            hi: (c.fermi_level_ev + w) * ef,
            colour,
            label: format!("{side} lead µ ± 2kT ({} K)", short(c.temperature_k)),
        }
    };
    [
        window(&p.left, LEFT, "left"),
        window(&p.right, RIGHT, "right"),
    ]
}

/// Each lead's Fermi level as a dashed vertical line in the lead's colour;
/// with `brackets`, its window µ ± 2kT as a labelled bar near the top of
/// the panel, one row per lead so that equal windows never merge.
fn draw_windows(
    chart: &mut Chart<'_, '_>,
    x: (f64, f64),
    y: (f64, f64),
    ws: &[Window; 2],
    brackets: bool,
) -> Result<(), DrawError> {
    let span = y.1 - y.0;
    for (row, w) in ws.iter().enumerate() {
        chart.draw_series(DashedLineSeries::new(
            vec![(w.mu, y.0), (w.mu, y.1)],
            6,
            5,
            w.colour.stroke_width(1),
        ))?;
        if !brackets {
            continue;
        }
        let at = y.1 - (0.05 + 0.07 * row as f64) * span;
        let tip = 0.02 * span;
        chart.draw_series(std::iter::once(PathElement::new(
            vec![(w.lo, at - tip), (w.lo, at), (w.hi, at), (w.hi, at - tip)],
            w.colour.stroke_width(2),
        )))?;
        let gap = 0.006 * (x.1 - x.0);
        let (anchor, hpos) = if w.hi < x.0 + 0.6 * (x.1 - x.0) {
            (w.hi + gap, HPos::Left)
        } else {
            (w.lo - gap, HPos::Right)
        };
        chart.draw_series(std::iter::once(Text::new(
            w.label.clone(),
            (anchor, at),
            tick_font().pos(Pos::new(hpos, VPos::Center)),
        )))?;
    }
    Ok(())
}

fn spectrum_entries(coherent: bool) -> Vec<(Mark, String)> {
    let mut entries = vec![
        (Mark::Line(LEFT, false), "from the left lead".to_string()),
        (Mark::Line(RIGHT, true), "from the right lead".to_string()),
    ];
    if !coherent {
        entries.push((
            Mark::Line(BATH, false),
            "from the scattering bath".to_string(),
        ));
    }
    entries.push((
        Mark::Block(FORWARD, NET_OPACITY),
        "net flow (j_L − j_R)/2: electrons move left → right".to_string(),
    ));
    entries.push((
        Mark::Block(BACKWARD, NET_OPACITY),
        "net flow: electrons move right → left".to_string(),
    ));
    entries
}

/// Opacity of the net-flow areas (the lead flows stay readable on top).
const NET_OPACITY: f64 = 0.45;

/// The flows panel: net flow as areas coloured by direction, lead and
/// bath flows as lines on top, Fermi windows.
fn draw_flows(
    chart: &mut Chart<'_, '_>,
    sol: &Solution,
    o: &Observables,
    x: (f64, f64),
    y: (f64, f64),
    scale: (f64, f64),
) -> Result<(), DrawError> {
    let sp = &o.spectrum;
    let (ef, ff) = scale;
    let e = ELEMENTARY_CHARGE;
    let line = |v: &[f64]| -> Vec<(f64, f64)> {
        sp.energy_ev
            .iter()
            .zip(v)
            .filter(|(en, _)| **en * ef >= x.0 && **en * ef <= x.1)
            .map(|(en, f)| (en * ef, f * e * ff))
            .collect()
    };
    draw_windows(chart, x, y, &windows(&sol.problem, ef), true)?;
    zero_line(chart, x)?;
    for (forward, area) in signed_areas(&line(&net_flow(sp))) {
        let c = if forward { FORWARD } else { BACKWARD };
        chart.draw_series(std::iter::once(Polygon::new(
            area,
            c.mix(NET_OPACITY).filled(),
        )))?;
    }
    if !sol.problem.scattering.is_coherent() {
        chart.draw_series(LineSeries::new(line(&sp.flow_bath), BATH.stroke_width(2)))?;
    }
    chart.draw_series(LineSeries::new(line(&sp.flow_left), LEFT.stroke_width(2)))?;
    chart.draw_series(DashedLineSeries::new(
        line(&sp.flow_right),
        7,
        4,
        RIGHT.stroke_width(2),
    ))?;
    Ok(())
}

/// The transmission of each channel, dashed, one colour per channel.
fn draw_channel_transmissions(
    chart: &mut Chart<'_, '_>,
    energies: &[f64],
    channel_t: &Option<Vec<(&String, &Vec<f64>)>>,
    x: (f64, f64),
    ef: f64,
) -> Result<(), DrawError> {
    for (i, (_, tc)) in channel_t.iter().flatten().enumerate() {
        let colour = SERIES[i % SERIES.len()];
        chart.draw_series(DashedLineSeries::new(
            energies
                .iter()
                .zip(tc.iter())
                .filter(|(en, _)| **en * ef >= x.0 && **en * ef <= x.1)
                .map(|(en, tv)| (en * ef, *tv)),
            6,
            4,
            colour.stroke_width(2),
        ))?;
    }
    Ok(())
}

/// spectrum.svg: energy-resolved flows into the device from each lead and
/// from the scattering bath, the net flow through the device coloured by
/// its direction, the lead Fermi windows; transmission below when the
/// transport is coherent.
pub fn spectrum_svg(sol: &Solution, o: &Observables) -> Result<String, OutputError> {
    const FIGURE: &str = "spectrum.svg";
    let p = &sol.problem;
    let sp = &o.spectrum;
    if sp.energy_ev.is_empty() {
        return Err(plot_error(FIGURE, "the energy grid is empty"));
    }
    let coherent = p.scattering.is_coherent();
    let (ef, eu) = energy_unit(sp.energy_ev.iter().copied());
    let weight: Vec<f64> = (0..sp.energy_ev.len())
        .map(|k| sp.flow_left[k].abs() + sp.flow_right[k].abs() + sp.flow_bath[k].abs())
        .collect();
    let keep: Vec<f64> = windows(p, 1.0).iter().flat_map(|w| [w.lo, w.hi]).collect();
    let x = busy_window(&sp.energy_ev, &weight, &keep);
    let x = (x.0 * ef, x.1 * ef);
    let all: Vec<f64> = [&sp.flow_left, &sp.flow_right, &sp.flow_bath]
        .into_iter()
        .flatten()
        .map(|v| v * ELEMENTARY_CHARGE)
        .collect();
    let (ff, fp) = prefix_for(max_abs(&all));
    let r = with_zero(finite_range(&all));
    // Room at the top for the two window bars.
    let y = padded(r.0 * ff, r.1 * ff, 0.06);
    let y = (y.0, y.1 + 0.2 * (y.1 - y.0));
    let mut entries = spectrum_entries(coherent);
    let channel_t = o.channels.as_ref().and_then(|c| {
        let t = c.transmission.as_ref()?;
        Some(c.names.iter().zip(t).collect::<Vec<_>>())
    });
    for (i, (name, _)) in channel_t.iter().flatten().enumerate() {
        let colour = SERIES[i % SERIES.len()];
        entries.push((Mark::Line(colour, true), format!("T of channel {name}")));
    }
    let left = (MARGIN_LEFT + Y_AREA) as i32;
    let lh = legend_height(&entries, left, WIDTH as i32);
    let h_flow = 400u32;
    let h_tr = if coherent { 240u32 } else { 0 };
    let title = if coherent {
        "Energy-resolved flows and transmission"
    } else {
        "Energy-resolved flows into the device"
    };
    render(FIGURE, (WIDTH, 44 + lh + h_flow + h_tr + 30), |root, _| {
        let body = root.titled(title, title_font())?;
        let (strip, rest) = body.split_vertically(lh);
        draw_legend(&strip, &entries, left)?;
        let (top, bottom) = rest.split_vertically(h_flow);
        let x_desc = format!("energy E ({eu})");
        let y_desc = format!("electron flow × e ({fp}A/eV)");
        let x_here = (!coherent).then_some(x_desc.as_str());
        let mut chart = panel(&top, x, y, x_here, &y_desc, &[])?;
        draw_flows(&mut chart, sol, o, x, y, (ef, ff))?;
        if let Some(t) = &sp.transmission {
            let tmax = max_abs(t).max(1.0) * 1.05;
            let yt = (0.0, tmax);
            let mut chart = panel(&bottom, x, yt, Some(&x_desc), "transmission T(E)", &[])?;
            draw_windows(&mut chart, x, yt, &windows(p, ef), false)?;
            chart.draw_series(LineSeries::new(
                sp.energy_ev
                    .iter()
                    .zip(t)
                    .filter(|(en, _)| **en * ef >= x.0 && **en * ef <= x.1)
                    .map(|(en, tv)| (en * ef, *tv)),
                TRANSMISSION.stroke_width(2),
            ))?;
            draw_channel_transmissions(&mut chart, &sp.energy_ev, &channel_t, x, ef)?;
        }
        Ok(())
    })
}

/// bond_current.svg: the energy-resolved current between neighbouring
/// cells over position and energy, with the band edge and the local Fermi
/// level drawn on top. The colours follow a signed logarithm of the
/// current (see [`style::signed_log`](super::style::signed_log)) over
/// [`SIGNED_LOG_DECADES`] decades below the largest magnitude, teal for
/// electrons moving to +x and brown for −x: a current flowing against the
/// main stream a thousand times weaker still shows its colour.
pub fn bond_current_svg(sol: &Solution, o: &Observables) -> Result<String, OutputError> {
    bond_current_svg_within(sol, o, ResultLimits::default().map_pixels())
}

/// [`bond_current_svg`] with a raster image of at most `max_pixels`
/// pixels (block means of the map where it has more values).
pub fn bond_current_svg_within(
    sol: &Solution,
    o: &Observables,
    max_pixels: usize,
) -> Result<String, OutputError> {
    const FIGURE: &str = "bond_current.svg";
    let p = &sol.problem;
    let s = &o.sites;
    let bond = BondCurrent::of(sol);
    let (pairs, ne) = (bond.pairs, bond.energies);
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
    let (weight, largest) = bond_weights(&bond);
    let keep = [p.left.fermi_level_ev, p.right.fermi_level_ev];
    let (e0, e1) = busy_window(energies, &weight, &keep);
    let rows: Vec<usize> = (0..ne)
        .filter(|&k| energies[k] >= e0 && energies[k] <= e1)
        .collect();
    let y: Vec<f64> = rows.iter().map(|&k| energies[k] * ef).collect();
    let (vf, vp) = prefix_for(largest);
    let fill = |r: usize, out: &mut [f64]| {
        for (v, b) in out.iter_mut().zip(bond.at_energy(rows[r])) {
            *v = b * vf;
        }
    };
    let values = MapValues::Rows {
        dim: (rows.len(), pairs),
        fill: &fill,
    };
    let band = steps(&s.x_nm, &s.band_edge_ev, a, ef);
    let fermi: Vec<(f64, f64)> = s
        .x_nm
        .iter()
        .zip(&s.fermi_level_ev)
        .map(|(xi, m)| (*xi, m * ef))
        .collect();
    let colour_label = format!("bond current ({vp}A/eV), signed log; + = electrons to +x");
    let title = format!(
        "Energy-resolved current between neighbouring cells (signed log colour scale over {} decades)",
        SIGNED_LOG_DECADES
    );
    heat_map(&MapSpec {
        title: &title,
        x_label: "position x (nm)",
        y_label: &format!("energy E ({eu})"),
        x: &x,
        y: &y,
        values,
        colour_label: &colour_label,
        scale: MapScale::SignedLog {
            decades: SIGNED_LOG_DECADES,
        },
        overlays: band_and_fermi(&band, &fermi),
        size: (WIDTH, 640),
        max_pixels,
    })
}

/// Per energy the largest magnitude of the bond current (the busy
/// window's weight), and the largest finite magnitude of all (the colour
/// unit's): maxima, so the energies in parallel give the numbers of one
/// pass over the map.
fn bond_weights(bond: &BondCurrent<'_>) -> (Vec<f64>, f64) {
    use rayon::prelude::*;
    let (weight, finite): (Vec<f64>, Vec<f64>) = (0..bond.energies)
        .into_par_iter()
        .map(|k| {
            let row = bond.at_energy(k);
            row.fold((0.0f64, 0.0f64), |(m, f), v| {
                let f = if v.is_finite() { f.max(v.abs()) } else { f };
                (m.max(v.abs()), f)
            })
        })
        .unzip();
    (weight, finite.iter().copied().fold(0.0, f64::max))
}

/// The band edge (solid) and the local Fermi level (dashed) drawn over a
/// position–energy map.
fn band_and_fermi<'a>(band: &'a [(f64, f64)], fermi: &'a [(f64, f64)]) -> Vec<Overlay<'a>> {
    vec![
        Overlay {
            label: "band edge".into(),
            points: band,
            colour: INK,
            dashed: false,
        },
        Overlay {
            label: "local Fermi level".into(),
            points: fermi,
            colour: LOCAL_FERMI,
            dashed: true,
        },
    ]
}

/// occupation.svg: how full the states of each cell are at each energy,
/// f(x, E) = Σ_o G^n_ii / Σ_o A_ii, over position and energy on a fixed
/// colour scale from 0 (empty, palest) to 1 (full, darkest), grey where the
/// cell has no states, with the band edge and the local Fermi level drawn
/// on top. The energy window holds the energies where some cell has
/// electrons (down to 0.1 % of the fullest) and both contacts' Fermi
/// levels.
pub fn occupation_svg(sol: &Solution, o: &Observables) -> Result<String, OutputError> {
    occupation_svg_within(sol, o, ResultLimits::default().map_pixels())
}

/// [`occupation_svg`] with a raster image of at most `max_pixels` pixels
/// (means of the cells with states where the map has more values).
pub fn occupation_svg_within(
    sol: &Solution,
    o: &Observables,
    max_pixels: usize,
) -> Result<String, OutputError> {
    const FIGURE: &str = "occupation.svg";
    use rayon::prelude::*;
    let p = &sol.problem;
    let s = &o.sites;
    let occupation = Occupation::of(sol);
    let (n, ne) = (occupation.cells, occupation.energies);
    if n == 0 || ne == 0 {
        return Err(plot_error(
            FIGURE,
            format!(
                "an occupation map needs at least one cell and one energy ({n} cells, {ne} energies)"
            ),
        ));
    }
    let energies = &o.spectrum.energy_ev;
    let (ef, eu) = energy_unit(energies.iter().copied());
    let ns = sol.pass.green.sites;
    let weight: Vec<f64> = (0..ne)
        .into_par_iter()
        .map(|k| {
            sol.pass.green.filled[k * ns..(k + 1) * ns]
                .iter()
                .fold(0.0f64, |m, v| m.max(v.abs()))
        })
        .collect();
    let keep = [p.left.fermi_level_ev, p.right.fermi_level_ev];
    let (e0, e1) = busy_window(energies, &weight, &keep);
    let rows: Vec<usize> = (0..ne)
        .filter(|&k| energies[k] >= e0 && energies[k] <= e1)
        .collect();
    let y: Vec<f64> = rows.iter().map(|&k| energies[k] * ef).collect();
    let fill = |r: usize, out: &mut [f64]| {
        for (c, f) in out.iter_mut().enumerate() {
            *f = occupation.value(c, rows[r]);
        }
    };
    let values = MapValues::Rows {
        dim: (rows.len(), n),
        fill: &fill,
    };
    let a = p.device.spacing_nm;
    let band = steps(&s.x_nm, &s.band_edge_ev, a, ef);
    let fermi: Vec<(f64, f64)> = s
        .x_nm
        .iter()
        .zip(&s.fermi_level_ev)
        .map(|(xi, m)| (*xi, m * ef))
        .collect();
    heat_map(&MapSpec {
        title: "Occupation of the states of each cell, f = Gⁿ/A (grey: no states)",
        x_label: "position x (nm)",
        y_label: &format!("energy E ({eu})"),
        x: &s.x_nm,
        y: &y,
        values,
        colour_label: "occupation f (0 empty, 1 full)",
        scale: MapScale::Bounded { lo: 0.0, hi: 1.0 },
        overlays: band_and_fermi(&band, &fermi),
        size: (WIDTH, 640),
        max_pixels,
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
    // One entry per colour: each curve's dashed line is its own limit.
    let entries = vec![
        (
            Mark::Line(RESIDUAL, false),
            format!(
                "residual: relative change of the scattering self-energy (dashed: tolerance {tol:.0e})"
            ),
        ),
        (
            Mark::Line(CURRENT_CHANGE, false),
            "change of the terminal currents / allowance (dashed: the allowance, 1)".to_string(),
        ),
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
        let curves = [
            (&residual[..], tol, RESIDUAL),
            (&change[..], 1.0, CURRENT_CHANGE),
        ];
        draw_convergence(&plot, x, (lo, hi), &curves)
    })?;
    Ok(Some(svg))
}

/// A convergence curve: its points, its limit and its colour.
type Curve<'a> = (&'a [(f64, f64)], f64, RGBColor);

/// The log-scale chart of convergence.svg: each curve with markers and its
/// limit as a dashed line of the same colour.
fn draw_convergence(
    plot: &Area<'_>,
    x: (f64, f64),
    (lo, hi): (f64, f64),
    curves: &[Curve<'_>],
) -> Result<(), DrawError> {
    let mut chart = ChartBuilder::on(plot)
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
    for &(_, level, c) in curves {
        chart.draw_series(DashedLineSeries::new(
            vec![(x.0, level), (x.1, level)],
            8,
            5,
            c.stroke_width(1),
        ))?;
    }
    for &(pts, _, c) in curves {
        chart.draw_series(LineSeries::new(pts.iter().copied(), c.stroke_width(2)))?;
        chart.draw_series(pts.iter().map(|&q| Circle::new(q, 3, c.filled())))?;
    }
    Ok(())
}
