//! SVG figures: the four figures of a solved operating point and generic
//! charts (lines, heat maps, bars) for sweeps and other commands.
//!
//! Every figure is plain SVG text: labels are `<text>` elements drawn in
//! the viewer's sans-serif font, so no font file is needed to write them.
//! Dense maps are embedded as one uncompressed PNG `<image>` (see
//! [`raster`]) to keep the files small. Legends sit in a strip above each
//! panel, never on top of the data.
//!
//! Colours: within a figure each colour stands for one thing, and a thing
//! keeps its colour in every figure (the table is
//! [`style::MEANINGS`]). Heating is burnt orange and cooling blue; the
//! leads are two neutral greys told apart by lightness (the right lead
//! dashed where it is a line); the direction of electron motion is teal
//! (to +x, left to right) against brown (to −x), both in the net flow of
//! the spectrum and in the brown–white–teal diverging scale of signed maps;
//! the local Fermi level is purple, its drop a pale purple, the scattering
//! bath rose. Orange against blue and teal against brown stay apart for
//! the common forms of colour blindness, and the two greys differ in
//! lightness alone. The bond-current map colours a signed logarithm of the
//! current ([`style::signed_log`]) so that a weak counter-flow shows.

mod curves;
mod figures;
pub mod raster;
pub mod style;

pub use curves::{cooler_figures, generator_figures, grid_figures, ranking_figure};
pub use figures::{
    band_edge_without_potential, bond_current_svg, bond_current_svg_within, convergence_svg,
    device_svg, device_svg_with_potential, net_flow, occupation_svg, occupation_svg_within,
    spectrum_svg,
};

use super::sizes::ResultLimits;
use super::{OutputError, Staging};
use crate::observables::Observables;
use crate::scba::Solution;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use style::*;

/// One named curve of a line chart.
#[derive(Clone, Copy, Debug)]
pub struct Series<'a> {
    /// Legend text.
    pub label: &'a str,
    /// Abscissae.
    pub x: &'a [f64],
    /// Ordinates (same length as `x`; non-finite values break the line).
    pub y: &'a [f64],
}

pub(crate) type Area<'a> = DrawingArea<SVGBackend<'a>, Shift>;
pub(crate) type DrawError = DrawingAreaErrorKind<std::io::Error>;

/// Colour of the stand-in rectangle that marks where a raster map goes; it
/// is replaced by the `<image>` after drawing (no figure uses this colour).
const RASTER_MARK: RGBColor = RGBColor(0x01, 0x02, 0x03);

fn plot_error(figure: &str, message: impl std::fmt::Display) -> OutputError {
    OutputError::Plot {
        figure: figure.to_string(),
        message: message.to_string(),
    }
}

/// Draw a figure of `size` pixels into an SVG string; `raster` holds the
/// data URIs of raster maps drawn with [`RASTER_MARK`] stand-ins, in order.
pub(crate) fn render(
    figure: &str,
    size: (u32, u32),
    draw: impl FnOnce(&Area<'_>, &mut Vec<String>) -> Result<(), DrawError>,
) -> Result<String, OutputError> {
    let mut svg = String::new();
    let mut rasters = Vec::new();
    {
        let root = SVGBackend::with_string(&mut svg, size).into_drawing_area();
        root.fill(&WHITE).map_err(|e| plot_error(figure, e))?;
        draw(&root, &mut rasters).map_err(|e| plot_error(figure, e))?;
        root.present().map_err(|e| plot_error(figure, e))?;
    }
    for uri in rasters {
        svg = replace_raster_mark(&svg, &uri).ok_or_else(|| {
            plot_error(
                figure,
                "the stand-in of a colour map was not found in the SVG",
            )
        })?;
    }
    Ok(svg)
}

/// Replace the first stand-in rectangle by an `<image>` with the same box.
fn replace_raster_mark(svg: &str, uri: &str) -> Option<String> {
    let fill = format!(
        "fill=\"#{:02X}{:02X}{:02X}\"",
        RASTER_MARK.0, RASTER_MARK.1, RASTER_MARK.2
    );
    let at = svg.find(&fill)?;
    let start = svg[..at].rfind("<rect")?;
    let end = at + svg[at..].find("/>")? + 2;
    let tag = &svg[start..end];
    let attr = |name: &str| -> Option<String> {
        let key = format!(" {name}=\"");
        let i = tag.find(&key)? + key.len();
        let j = tag[i..].find('"')? + i;
        Some(tag[i..j].to_string())
    };
    let image = format!(
        "<image x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" preserveAspectRatio=\"none\" \
         style=\"image-rendering:pixelated;image-rendering:crisp-edges\" href=\"{uri}\"/>",
        attr("x")?,
        attr("y")?,
        attr("width")?,
        attr("height")?
    );
    Some(format!("{}{}{}", &svg[..start], image, &svg[end..]))
}

/// Text style of tick labels.
pub(crate) fn tick_font() -> TextStyle<'static> {
    (FONT, TICK_SIZE).into_font().color(&INK)
}

/// Text style of axis descriptions.
pub(crate) fn desc_font() -> TextStyle<'static> {
    (FONT, DESC_SIZE).into_font().color(&INK)
}

/// Text style of titles.
pub(crate) fn title_font() -> TextStyle<'static> {
    (FONT, TITLE_SIZE).into_font().color(&INK)
}

/// A legend entry's mark.
#[derive(Clone, Copy, Debug)]
pub(crate) enum Mark {
    /// A line segment (solid or dashed).
    Line(RGBColor, bool),
    /// A filled box with an opacity.
    Block(RGBColor, f64),
    /// A diagonal cross, the mark of a point drawn on top of a line.
    Cross(RGBColor),
}

/// Rough text width in pixels: SVG text is laid out by the viewer, so this
/// only has to be generous enough that entries do not collide.
pub(crate) fn text_width(text: &str, size: f64) -> i32 {
    (text.chars().count() as f64 * size * 0.56).ceil() as i32
}

const LEGEND_ROW: i32 = 22;

/// Rows that a legend of `entries` takes in `width` pixels from `left`.
fn legend_rows(entries: &[(Mark, String)], left: i32, width: i32) -> Vec<Vec<usize>> {
    let mut rows: Vec<Vec<usize>> = vec![Vec::new()];
    let mut x = left;
    for (i, (_, label)) in entries.iter().enumerate() {
        let w = 30 + text_width(label, TICK_SIZE) + 22;
        if x + w > width && !rows.last().is_some_and(|r| r.is_empty()) {
            rows.push(Vec::new());
            x = left;
        }
        rows.last_mut().expect("one row").push(i);
        x += w;
    }
    rows
}

/// Height in pixels of a legend strip.
pub(crate) fn legend_height(entries: &[(Mark, String)], left: i32, width: i32) -> u32 {
    if entries.is_empty() {
        return 0;
    }
    (legend_rows(entries, left, width).len() as i32 * LEGEND_ROW + 6) as u32
}

/// Draw a legend strip: marks and labels in rows, starting at `left`.
pub(crate) fn draw_legend(
    area: &Area<'_>,
    entries: &[(Mark, String)],
    left: i32,
) -> Result<(), DrawError> {
    let width = area.dim_in_pixel().0 as i32;
    let font = tick_font().pos(Pos::new(HPos::Left, VPos::Center));
    for (r, row) in legend_rows(entries, left, width).iter().enumerate() {
        let y = 4 + LEGEND_ROW / 2 + r as i32 * LEGEND_ROW;
        let mut x = left;
        for &i in row {
            let (mark, label) = &entries[i];
            match *mark {
                Mark::Line(c, dashed) => {
                    if dashed {
                        for k in 0..3 {
                            area.draw(&PathElement::new(
                                vec![(x + 9 * k, y), (x + 9 * k + 5, y)],
                                c.stroke_width(3),
                            ))?;
                        }
                    } else {
                        area.draw(&PathElement::new(
                            vec![(x, y), (x + 24, y)],
                            c.stroke_width(3),
                        ))?;
                    }
                }
                Mark::Block(c, alpha) => {
                    area.draw(&Rectangle::new(
                        [(x + 2, y - 7), (x + 22, y + 7)],
                        c.mix(alpha).filled(),
                    ))?;
                }
                Mark::Cross(c) => {
                    area.draw(&Cross::new((x + 12, y), 6, c.stroke_width(2)))?;
                }
            }
            area.draw(&Text::new(label.clone(), (x + 30, y), font.clone()))?;
            x += 30 + text_width(label, TICK_SIZE) + 22;
        }
    }
    Ok(())
}

/// Draw `text` centred in the plotting area of a chart (for panels that
/// have nothing to plot and must say why).
pub(crate) fn centred_note<X: Ranged, Y: Ranged>(
    root: &Area<'_>,
    chart: &ChartContext<'_, SVGBackend<'_>, Cartesian2d<X, Y>>,
    text: &str,
) -> Result<(), DrawError> {
    let (xr, yr) = chart.plotting_area().get_pixel_range();
    let (x0, y0) = root.get_base_pixel();
    // A little above the middle, clear of a zero line there.
    let centre = (
        (xr.start + xr.end) / 2 - x0,
        (yr.start + yr.end) / 2 - y0 - 14,
    );
    root.draw(&Text::new(
        text.to_string(),
        centre,
        desc_font().pos(Pos::new(HPos::Center, VPos::Bottom)),
    ))
}

/// Left edge of the plotting area in every figure (room for tick labels and
/// the axis description).
pub(crate) const Y_AREA: u32 = 86;
/// Left margin before the label area.
pub(crate) const MARGIN_LEFT: u32 = 8;
/// Right margin after the plotting area.
pub(crate) const MARGIN_RIGHT: u32 = 28;

/// Encode a grid of colours (rows top to bottom) as a PNG data URI.
pub(crate) fn raster_uri(
    width: usize,
    height: usize,
    colour: impl Fn(usize, usize) -> RGBColor,
) -> String {
    let mut rgb = Vec::with_capacity(3 * width * height);
    for r in 0..height {
        for c in 0..width {
            let RGBColor(red, green, blue) = colour(r, c);
            rgb.extend_from_slice(&[red, green, blue]);
        }
    }
    format!(
        "data:image/png;base64,{}",
        raster::base64(&raster::png_rgb(width, height, &rgb))
    )
}

/// A line chart: one coloured line per series (markers too when a series
/// has few points) and dashed horizontal reference lines named with their
/// values in the legend (for example the Carnot and Curzon–Ahlborn
/// efficiencies).
pub fn line_chart_svg(
    title: &str,
    x_label: &str,
    y_label: &str,
    series: &[Series<'_>],
    reference_lines: &[(&str, f64)],
) -> Result<String, OutputError> {
    flagged_line_chart_svg(
        title,
        x_label,
        y_label,
        series,
        reference_lines,
        &Flags::none(),
    )
}

/// Points of a line chart to mark with a cross on top of their line, and
/// how many points the chart has in all (for the legend's "k of n").
#[derive(Clone, Debug, Default)]
pub struct Flags {
    /// The marked points, in the chart's (scaled) units.
    pub points: Vec<(f64, f64)>,
    /// Solves they stand for (fewer than the points when several series
    /// share the solves).
    pub count: usize,
    /// Solves of the chart in all.
    pub of: usize,
}

impl Flags {
    /// Nothing marked.
    pub fn none() -> Self {
        Self::default()
    }

    /// The points `(x[i], y[i])` of every `i` with `flagged(i)` true.
    pub fn where_(x: &[f64], y: &[f64], flagged: impl Fn(usize) -> bool) -> Self {
        let points: Vec<(f64, f64)> = (0..x.len().min(y.len()))
            .filter(|&i| flagged(i))
            .map(|i| (x[i], y[i]))
            .collect();
        Self {
            count: points.len(),
            points,
            of: x.len().min(y.len()),
        }
    }
}

/// [`line_chart_svg`] with the points of a solve that did not converge
/// marked by crosses (colour `NOT_CONVERGED`) and named in the legend
/// with their count, so a kink that such a point makes in a curve is not
/// read as physics. With nothing flagged it draws exactly
/// [`line_chart_svg`]'s figure.
pub fn flagged_line_chart_svg(
    title: &str,
    x_label: &str,
    y_label: &str,
    series: &[Series<'_>],
    reference_lines: &[(&str, f64)],
    flags: &Flags,
) -> Result<String, OutputError> {
    check_series_lengths(title, series)?;
    let ((x0, x1), (y0, y1), have_data) = line_chart_ranges(series, reference_lines);
    let width = 900u32;
    let entries = line_chart_legend(series, reference_lines, flags);
    let legend_h = legend_height(&entries, (MARGIN_LEFT + Y_AREA) as i32, width as i32);
    let height = 520 + legend_h;
    render(title, (width, height), |root, _| {
        let body = root.titled(title, title_font())?;
        let (strip, plot) = body.split_vertically(legend_h);
        draw_legend(&strip, &entries, (MARGIN_LEFT + Y_AREA) as i32)?;
        let mut chart = ChartBuilder::on(&plot)
            .margin_left(MARGIN_LEFT)
            .margin_right(MARGIN_RIGHT)
            .margin_top(8)
            .margin_bottom(8)
            .x_label_area_size(56)
            .y_label_area_size(Y_AREA)
            .build_cartesian_2d(x0..x1, y0..y1)?;
        let xd = decimals_for(x1 - x0, 8);
        let yd = decimals_for(y1 - y0, 8);
        let xf = move |v: &f64| tick(*v, xd);
        let yf = move |v: &f64| tick(*v, yd);
        chart
            .configure_mesh()
            .x_desc(x_label)
            .y_desc(y_label)
            .x_labels(9)
            .y_labels(8)
            .x_label_formatter(&xf)
            .y_label_formatter(&yf)
            .label_style(tick_font())
            .axis_desc_style(desc_font())
            .bold_line_style(GRID)
            .light_line_style(WHITE.mix(0.0))
            .axis_style(INK)
            .draw()?;
        for (k, (_, value)) in reference_lines.iter().enumerate() {
            if !value.is_finite() {
                continue;
            }
            let c = REFERENCE[k % REFERENCE.len()];
            chart.draw_series(DashedLineSeries::new(
                vec![(x0, *value), (x1, *value)],
                8,
                5,
                c.stroke_width(2),
            ))?;
        }
        for (i, s) in series.iter().enumerate() {
            let c = SERIES[i % SERIES.len()];
            let pieces = finite_pieces(s);
            let n: usize = pieces.iter().map(Vec::len).sum();
            for p in &pieces {
                chart.draw_series(LineSeries::new(p.iter().copied(), c.stroke_width(2)))?;
                if n <= 40 {
                    chart.draw_series(p.iter().map(|&q| Circle::new(q, 4, c.filled())))?;
                }
            }
        }
        let marks = flags
            .points
            .iter()
            .filter(|p| p.0.is_finite() && p.1.is_finite());
        chart.draw_series(marks.map(|&q| Cross::new(q, 7, NOT_CONVERGED.stroke_width(2))))?;
        if !have_data {
            centred_note(&plot, &chart, "no finite values to show")?;
        }
        Ok(())
    })
}

/// Every series has as many x values as y values.
fn check_series_lengths(title: &str, series: &[Series<'_>]) -> Result<(), OutputError> {
    match series.iter().find(|s| s.x.len() != s.y.len()) {
        Some(s) => Err(plot_error(
            title,
            format!(
                "series \"{}\" has {} x values but {} y values",
                s.label,
                s.x.len(),
                s.y.len()
            ),
        )),
        None => Ok(()),
    }
}

/// The finite points of a series, in runs broken where a value is not
/// finite (so a gap shows as a gap, not as a line across it).
fn finite_pieces(s: &Series<'_>) -> Vec<Vec<(f64, f64)>> {
    let mut piece: Vec<(f64, f64)> = Vec::new();
    let mut pieces = Vec::new();
    for (a, b) in s.x.iter().zip(s.y) {
        if a.is_finite() && b.is_finite() {
            piece.push((*a, *b));
        } else if !piece.is_empty() {
            pieces.push(std::mem::take(&mut piece));
        }
    }
    if !piece.is_empty() {
        pieces.push(piece);
    }
    pieces
}

/// Axis ranges of a line chart (the finite points and the reference
/// lines, y padded by 6 %) and whether any series has a finite point.
fn line_chart_ranges(
    series: &[Series<'_>],
    reference_lines: &[(&str, f64)],
) -> ((f64, f64), (f64, f64), bool) {
    let points: Vec<(f64, f64)> = series.iter().flat_map(finite_pieces).flatten().collect();
    let xs: Vec<f64> = points.iter().map(|p| p.0).collect();
    let mut ys: Vec<f64> = points.iter().map(|p| p.1).collect();
    ys.extend(
        reference_lines
            .iter()
            .map(|r| r.1)
            .filter(|v| v.is_finite()),
    );
    let (x0, x1) = finite_range(&xs).unwrap_or((0.0, 1.0));
    let x = if x1 > x0 {
        (x0, x1)
    } else {
        padded(x0, x1, 0.0)
    };
    let (y0, y1) = finite_range(&ys).unwrap_or((0.0, 1.0));
    (x, padded(y0, y1, 0.06), !xs.is_empty())
}

/// Legend entries of a line chart: the series by name (only when there
/// are two or more, or reference lines or flagged points beside them),
/// then the reference lines with their values, then the flagged points
/// with their count. Reference lines are named in the legend: labels
/// written at the lines collide when two references lie close.
fn line_chart_legend(
    series: &[Series<'_>],
    reference_lines: &[(&str, f64)],
    flags: &Flags,
) -> Vec<(Mark, String)> {
    let mut entries: Vec<(Mark, String)> = series
        .iter()
        .enumerate()
        .filter(|(_, s)| !s.label.is_empty())
        .map(|(i, s)| {
            (
                Mark::Line(SERIES[i % SERIES.len()], false),
                s.label.to_string(),
            )
        })
        .collect();
    if entries.len() < 2 && reference_lines.is_empty() && flags.points.is_empty() {
        entries.clear();
    }
    entries.extend(
        reference_lines
            .iter()
            .enumerate()
            .filter(|(_, r)| r.1.is_finite())
            .map(|(k, (label, value))| {
                (
                    Mark::Line(REFERENCE[k % REFERENCE.len()], true),
                    format!("{label} = {}", short(*value)),
                )
            }),
    );
    if !flags.points.is_empty() {
        entries.push((
            Mark::Cross(NOT_CONVERGED),
            format!("not converged ({} of {} points)", flags.count, flags.of),
        ));
    }
    entries
}

/// A number in three significant figures for labels.
pub(crate) fn short(v: f64) -> String {
    if v == 0.0 {
        return "0".into();
    }
    let a = v.abs();
    if (1e-3..1e4).contains(&a) {
        let d = (2 - a.log10().floor() as i32).max(0) as usize;
        tick(v, d)
    } else {
        format!("{v:.2e}")
    }
}

/// What a heat map draws on top of the colours.
pub(crate) struct Overlay<'a> {
    pub label: String,
    pub points: &'a [(f64, f64)],
    pub colour: RGBColor,
    pub dashed: bool,
}

/// Cell edges around centres: midpoints, ends extended by half a step.
fn edges(c: &[f64]) -> Vec<f64> {
    let n = c.len();
    if n == 1 {
        return vec![c[0] - 0.5, c[0] + 0.5];
    }
    let mut e = Vec::with_capacity(n + 1);
    e.push(c[0] - 0.5 * (c[1] - c[0]));
    for i in 0..n - 1 {
        e.push(0.5 * (c[i] + c[i + 1]));
    }
    e.push(c[n - 1] + 0.5 * (c[n - 1] - c[n - 2]));
    e
}

fn uniform(c: &[f64]) -> bool {
    if c.len() < 3 {
        return true;
    }
    let step = (c[c.len() - 1] - c[0]) / (c.len() - 1) as f64;
    c.windows(2)
        .all(|w| ((w[1] - w[0]) - step).abs() <= 1e-6 * step.abs().max(f64::MIN_POSITIVE))
}

/// How a heat map turns values into colours.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) enum MapScale {
    /// Pale to dark, linear over the data range.
    Sequential,
    /// Pale to dark, linear over the fixed range [lo, hi] whatever the data
    /// (a quantity with natural bounds, such as an occupation in [0, 1]).
    Bounded {
        /// Value drawn palest.
        lo: f64,
        /// Value drawn darkest.
        hi: f64,
    },
    /// Centred on zero, linear, ends at ± the largest magnitude.
    Diverging,
    /// Centred on zero, logarithmic in the magnitude over `decades` decades
    /// below the largest (see [`signed_log`]): values of the rarer sign keep
    /// their colour even when they are far smaller than the others.
    SignedLog {
        /// Decades below the largest magnitude that the scale spans.
        decades: f64,
    },
}

/// The colour scale of one map: positions on the colour bar, colours and
/// tick labels.
struct ColourScale {
    scale: MapScale,
    /// Ends of the data range (±largest magnitude when centred).
    lo: f64,
    hi: f64,
}

impl ColourScale {
    fn of<'a>(scale: MapScale, values: impl IntoIterator<Item = &'a f64> + Clone) -> Self {
        let (lo, hi) = match scale {
            MapScale::Sequential => {
                let (a, b) = finite_range(values).unwrap_or((0.0, 1.0));
                if b > a { (a, b) } else { padded(a, b, 0.0) }
            }
            MapScale::Bounded { lo, hi } => (lo, hi),
            MapScale::Diverging | MapScale::SignedLog { .. } => {
                let m = max_abs(values);
                let m = if m > 0.0 { m } else { 1.0 };
                (-m, m)
            }
        };
        ColourScale { scale, lo, hi }
    }

    /// [`ColourScale::of`] the values of a map: the largest magnitude of
    /// rows given by a function is taken row by row in parallel (the same
    /// number as a serial pass: a maximum does not depend on the order),
    /// a sequential scale's range row by row in order.
    fn of_map(scale: MapScale, values: &raster::MapValues<'_>) -> Self {
        use rayon::prelude::*;
        let (ny, nx) = values.dim();
        match (values, scale) {
            (raster::MapValues::Dense(v), _) => Self::of(scale, v.iter()),
            (_, MapScale::Bounded { .. }) => Self::of(scale, std::iter::empty()),
            (_, MapScale::Sequential) => {
                let mut row = vec![0.0; nx];
                let mut range: Option<(f64, f64)> = None;
                for r in 0..ny {
                    values.fill_row(r, &mut row);
                    let edge = range.map(|(lo, hi)| [lo, hi]);
                    range = finite_range(edge.iter().flatten().chain(&row));
                }
                let (lo, hi) = range.unwrap_or((0.0, 1.0));
                Self::of(scale, [lo, hi].iter())
            }
            (_, MapScale::Diverging | MapScale::SignedLog { .. }) => {
                let m = (0..ny)
                    .into_par_iter()
                    .map_init(
                        || vec![0.0; nx],
                        |row, r| {
                            values.fill_row(r, row);
                            max_abs(row.iter())
                        },
                    )
                    .reduce(|| 0.0, f64::max);
                Self::of(scale, [m].iter())
            }
        }
    }

    /// Ends of the colour bar's axis.
    fn bar_range(&self) -> (f64, f64) {
        match self.scale {
            MapScale::SignedLog { .. } => (-1.0, 1.0),
            _ => (self.lo, self.hi),
        }
    }

    /// Position of a value on the colour bar's axis.
    fn position(&self, v: f64) -> f64 {
        match self.scale {
            MapScale::SignedLog { decades } => signed_log(v, self.hi, decades),
            _ => v,
        }
    }

    /// Colour at a position of the colour bar's axis.
    fn colour_at(&self, p: f64) -> RGBColor {
        match self.scale {
            MapScale::Sequential | MapScale::Bounded { .. } => {
                sequential((p - self.lo) / (self.hi - self.lo))
            }
            MapScale::Diverging => diverging(p / self.hi),
            MapScale::SignedLog { .. } => diverging(p),
        }
    }

    fn colour(&self, v: f64) -> RGBColor {
        self.colour_at(self.position(v))
    }

    /// Tick positions and labels of the colour bar: on a linear scale
    /// about seven evenly spaced round values; on a signed logarithmic
    /// one zero and ± each power of ten inside the span, those too close
    /// to zero to label left out.
    fn bar_ticks(&self) -> Vec<(f64, String)> {
        let MapScale::SignedLog { decades } = self.scale else {
            let (lo, hi) = self.bar_range();
            let yd = decimals_for(hi - lo, 6);
            let linear: plotters::coord::types::RangedCoordf64 = (lo..hi).into();
            return linear
                .key_points(7)
                .into_iter()
                .map(|v| (v, tick(v, yd)))
                .collect();
        };
        let m = self.hi;
        let mut ticks = vec![(0.0, "0".to_string())];
        let top = m.log10().floor() as i32;
        for k in (top - decades.ceil() as i32)..=top {
            let p = signed_log(10f64.powi(k), m, decades);
            if p >= 0.12 {
                ticks.push((p, decade_label(k)));
                ticks.push((-p, format!("-{}", decade_label(k))));
            }
        }
        ticks.sort_by(|a, b| a.0.total_cmp(&b.0));
        ticks
    }
}

/// 10^k written plainly between 0.01 and 1000, else as 1e-3.
fn decade_label(k: i32) -> String {
    if (-2..=3).contains(&k) {
        tick(10f64.powi(k), (-k).max(0) as usize)
    } else {
        format!("1e{k}")
    }
}

/// Everything a heat map needs.
pub(crate) struct MapSpec<'a> {
    pub title: &'a str,
    pub x_label: &'a str,
    pub y_label: &'a str,
    pub x: &'a [f64],
    pub y: &'a [f64],
    pub values: raster::MapValues<'a>,
    pub colour_label: &'a str,
    pub scale: MapScale,
    pub overlays: Vec<Overlay<'a>>,
    pub size: (u32, u32),
    /// Most pixels of the raster image (see [`raster::pixel_means`]).
    pub max_pixels: usize,
}

/// The shape and coordinates of a map are usable: values of shape
/// `y.len() × x.len()`, coordinates finite and strictly increasing.
fn check_map(spec: &MapSpec<'_>) -> Result<(), OutputError> {
    let (ny, nx) = spec.values.dim();
    if ny != spec.y.len() || nx != spec.x.len() || nx == 0 || ny == 0 {
        return Err(plot_error(
            spec.title,
            format!(
                "values have shape {ny}×{nx} but there are {} y and {} x coordinates (need y.len() × x.len(), both > 0)",
                spec.y.len(),
                spec.x.len()
            ),
        ));
    }
    let increasing =
        |c: &[f64]| c.windows(2).all(|w| w[1] > w[0]) && c.iter().all(|v| v.is_finite());
    if !increasing(spec.x) || !increasing(spec.y) {
        return Err(plot_error(
            spec.title,
            "map coordinates must be finite and strictly increasing",
        ));
    }
    Ok(())
}

/// Draw a heat map with its colour bar into a figure.
pub(crate) fn heat_map(spec: &MapSpec<'_>) -> Result<String, OutputError> {
    check_map(spec)?;
    let scale = ColourScale::of_map(spec.scale, &spec.values);
    let entries: Vec<(Mark, String)> = spec
        .overlays
        .iter()
        .map(|o| (Mark::Line(o.colour, o.dashed), o.label.clone()))
        .collect();
    let bar_w = 150u32;
    let legend_h = legend_height(
        &entries,
        (MARGIN_LEFT + Y_AREA) as i32,
        (spec.size.0 - bar_w) as i32,
    );
    let size = (spec.size.0, spec.size.1 + legend_h);
    render(spec.title, size, |root, rasters| {
        let body = root.titled(spec.title, title_font())?;
        let (strip, rest) = body.split_vertically(legend_h);
        draw_legend(&strip, &entries, (MARGIN_LEFT + Y_AREA) as i32)?;
        let (main, bar) = rest.split_horizontally(rest.dim_in_pixel().0 - bar_w);
        map_panel(&main, spec, &scale, rasters)?;
        colour_bar(&bar, &scale, spec.colour_label)
    })
}

/// The map itself with its axes and overlays.
fn map_panel(
    main: &Area<'_>,
    spec: &MapSpec<'_>,
    scale: &ColourScale,
    rasters: &mut Vec<String>,
) -> Result<(), DrawError> {
    let (ny, nx) = spec.values.dim();
    let xe = edges(spec.x);
    let ye = edges(spec.y);
    let (x0, x1) = (xe[0], xe[nx]);
    let (y0, y1) = (ye[0], ye[ny]);
    let mut chart = ChartBuilder::on(main)
        .margin_left(MARGIN_LEFT)
        .margin_right(12)
        .margin_top(8)
        .margin_bottom(8)
        .x_label_area_size(56)
        .y_label_area_size(Y_AREA)
        .build_cartesian_2d(x0..x1, y0..y1)?;
    if uniform(spec.x) && uniform(spec.y) && nx * ny > 400 {
        chart.draw_series(std::iter::once(Rectangle::new(
            [(x0, y1), (x1, y0)],
            RASTER_MARK.filled(),
        )))?;
        let pixels = raster::pixel_means_of(&spec.values, spec.max_pixels);
        let (py, px) = pixels.dim();
        rasters.push(raster_uri(px, py, |r, c| {
            scale.colour(pixels[(py - 1 - r, c)])
        }));
    } else {
        let values = spec.values.to_array();
        chart.draw_series((0..ny).flat_map(|r| {
            let (xe, ye, values) = (&xe, &ye, &values);
            (0..nx).map(move |c| {
                Rectangle::new(
                    [(xe[c], ye[r + 1]), (xe[c + 1], ye[r])],
                    scale.colour(values[(r, c)]).filled(),
                )
            })
        }))?;
    }
    let xd = decimals_for(x1 - x0, 8);
    let yd = decimals_for(y1 - y0, 8);
    let xf = move |v: &f64| tick(*v, xd);
    let yf = move |v: &f64| tick(*v, yd);
    chart
        .configure_mesh()
        .disable_mesh()
        .x_desc(spec.x_label)
        .y_desc(spec.y_label)
        .x_labels(9)
        .y_labels(8)
        .x_label_formatter(&xf)
        .y_label_formatter(&yf)
        .label_style(tick_font())
        .axis_desc_style(desc_font())
        .axis_style(INK)
        .draw()?;
    for o in &spec.overlays {
        for piece in clip_to_band(o.points, y0, y1) {
            let style = o.colour.stroke_width(2);
            if o.dashed {
                chart.draw_series(DashedLineSeries::new(piece, 7, 5, style))?;
            } else {
                chart.draw_series(LineSeries::new(piece, style))?;
            }
        }
    }
    Ok(())
}

/// A vertical colour bar with its scale and label: evenly spaced ticks on
/// a linear scale, zero and the powers of ten on a signed logarithmic one.
fn colour_bar(area: &Area<'_>, scale: &ColourScale, label: &str) -> Result<(), DrawError> {
    let steps = 96;
    let (lo, hi) = scale.bar_range();
    let ticks = scale.bar_ticks();
    let chart = ChartBuilder::on(area)
        .margin_top(8)
        .margin_bottom(64)
        .margin_left(4)
        .margin_right(4)
        .y_label_area_size(0)
        .x_label_area_size(0)
        .right_y_label_area_size(84)
        .build_cartesian_2d(0.0..1.0, lo..hi)?;
    let mut chart = chart.set_secondary_coord(0.0..1.0, lo..hi);
    let d = (hi - lo) / steps as f64;
    chart.draw_series((0..steps).map(|k| {
        let a = lo + k as f64 * d;
        Rectangle::new(
            [(0.0, a + d), (1.0, a)],
            scale.colour_at(a + 0.5 * d).filled(),
        )
    }))?;
    chart.draw_series(std::iter::once(Rectangle::new(
        [(0.0, hi), (1.0, lo)],
        INK.stroke_width(1),
    )))?;
    chart
        .configure_secondary_axes()
        .y_desc(label)
        .y_labels(0)
        .label_style(tick_font())
        .axis_desc_style(desc_font())
        .axis_style(INK)
        .draw()?;
    // Ticks drawn here rather than by the axis: a logarithmic bar needs
    // them at the powers of ten, not evenly spaced.
    let (bx, by) = area.get_base_pixel();
    let font = tick_font().pos(Pos::new(HPos::Left, VPos::Center));
    for (p, text) in &ticks {
        let (px, py) = chart.backend_coord(&(1.0, *p));
        let (px, py) = (px - bx, py - by);
        area.draw(&PathElement::new(
            vec![(px, py), (px + 5, py)],
            INK.stroke_width(1),
        ))?;
        area.draw(&Text::new(text.clone(), (px + 8, py), font.clone()))?;
    }
    Ok(())
}

/// A heat map of `values` (shape `(y.len(), x.len())`) with a colour bar.
/// `diverging` centres a brown–white–teal scale on zero (signed
/// quantities); otherwise a pale-to-dark sequential scale spans the data.
/// Uniform grids are embedded as one image; others as one rectangle per
/// cell.
#[allow(clippy::too_many_arguments)]
pub fn heat_map_svg(
    title: &str,
    x_label: &str,
    y_label: &str,
    x: &[f64],
    y: &[f64],
    values: &ndarray::Array2<f64>,
    colour_label: &str,
    diverging: bool,
) -> Result<String, OutputError> {
    heat_map(&MapSpec {
        title,
        x_label,
        y_label,
        x,
        y,
        values: raster::MapValues::Dense(values),
        colour_label,
        scale: if diverging {
            MapScale::Diverging
        } else {
            MapScale::Sequential
        },
        overlays: Vec::new(),
        size: (1000, 620),
        max_pixels: crate::output::sizes::ResultLimits::default().map_pixels(),
    })
}

/// A horizontal bar chart: one bar per label, values signed (positive bars
/// blue, negative orange), each bar with its value written beside it.
pub fn bar_chart_svg(
    title: &str,
    labels: &[String],
    values: &[f64],
    value_label: &str,
) -> Result<String, OutputError> {
    check_bars(title, labels, values)?;
    let n = labels.len();
    let label_w = bar_label_width(labels);
    let (lo, hi) = bar_value_range(values);
    let width = 900u32;
    let height = 110 + 30 * n as u32;
    render(title, (width, height), |root, _| {
        let body = root.titled(title, title_font())?;
        let mut chart = ChartBuilder::on(&body)
            .margin_left(MARGIN_LEFT)
            .margin_right(MARGIN_RIGHT)
            .margin_top(8)
            .margin_bottom(8)
            .x_label_area_size(56)
            .y_label_area_size(label_w)
            .build_cartesian_2d(lo..hi, 0.0..n as f64)?;
        let xd = decimals_for(hi - lo, 8);
        let xf = move |v: &f64| tick(*v, xd);
        chart
            .configure_mesh()
            .disable_y_mesh()
            .y_labels(0)
            .x_labels(9)
            .x_desc(value_label)
            .x_label_formatter(&xf)
            .label_style(tick_font())
            .axis_desc_style(desc_font())
            .bold_line_style(GRID)
            .light_line_style(WHITE.mix(0.0))
            .axis_style(INK)
            .draw()?;
        for (i, (label, &v)) in labels.iter().zip(values).enumerate() {
            // First label at the top.
            let row = (n - 1 - i) as f64;
            let (a, b) = (row + 0.18, row + 0.82);
            if v.is_finite() {
                let c = if v >= 0.0 { SERIES[0] } else { SERIES[1] };
                chart.draw_series(std::iter::once(Rectangle::new(
                    [(0.0, b), (v, a)],
                    c.filled(),
                )))?;
            }
            let pos = if v < 0.0 { HPos::Right } else { HPos::Left };
            let nudge = if v < 0.0 { -0.01 } else { 0.01 } * (hi - lo);
            let shown = if v.is_finite() {
                short(v)
            } else {
                format!("{v}")
            };
            chart.draw_series(std::iter::once(Text::new(
                shown,
                (if v.is_finite() { v } else { 0.0 } + nudge, row + 0.5),
                tick_font().pos(Pos::new(pos, VPos::Center)),
            )))?;
            let (px, py) = chart.backend_coord(&(lo, row + 0.5));
            let (bx, by) = body.get_base_pixel();
            body.draw(&Text::new(
                label.clone(),
                (px - bx - 8, py - by),
                tick_font().pos(Pos::new(HPos::Right, VPos::Center)),
            ))?;
        }
        chart.draw_series(std::iter::once(PathElement::new(
            vec![(0.0, 0.0), (0.0, n as f64)],
            INK.stroke_width(1),
        )))?;
        Ok(())
    })
}

/// One value per label and at least one bar.
fn check_bars(title: &str, labels: &[String], values: &[f64]) -> Result<(), OutputError> {
    if labels.len() != values.len() {
        return Err(plot_error(
            title,
            format!("{} labels but {} values", labels.len(), values.len()),
        ));
    }
    if labels.is_empty() {
        return Err(plot_error(title, "no bars to draw"));
    }
    Ok(())
}

/// Room for the bar labels left of the chart (pixels): the widest label,
/// between 60 and 360, plus a gap.
fn bar_label_width(labels: &[String]) -> u32 {
    labels
        .iter()
        .map(|l| text_width(l, TICK_SIZE))
        .max()
        .unwrap_or(0)
        .clamp(60, 360) as u32
        + 16
}

/// Value axis of a bar chart: the values and zero, with 18 % of room
/// beyond the bar ends for the value text.
fn bar_value_range(values: &[f64]) -> (f64, f64) {
    let (lo, hi) = finite_range(values).unwrap_or((0.0, 1.0));
    let (lo, hi) = (lo.min(0.0), hi.max(0.0));
    let (lo, hi) = if hi > lo { (lo, hi) } else { (0.0, 1.0) };
    // Room for the value text at the bar ends.
    let span = hi - lo;
    (
        if lo < 0.0 { lo - 0.18 * span } else { lo },
        hi + 0.18 * span,
    )
}

/// Write device.svg, spectrum.svg, bond_current.svg, occupation.svg and
/// (with a Born loop) convergence.svg for a solved operating point.
pub fn write_solve_plots(
    stage: &Staging,
    sol: &Solution,
    o: &Observables,
) -> Result<(), OutputError> {
    write_solve_plots_within(stage, sol, o, &ResultLimits::default())
}

/// [`write_solve_plots`] with the maps' raster images sized to the
/// figure limit of `limits`.
pub fn write_solve_plots_within(
    stage: &Staging,
    sol: &Solution,
    o: &Observables,
    limits: &ResultLimits,
) -> Result<(), OutputError> {
    write_solve_plots_with_potential(stage, sol, o, None, limits)
}

/// [`write_solve_plots_within`] for a solve with self-consistent
/// electrostatics: `potential_ev` is the electrostatic potential energy of
/// each cell (eV), and device.svg shows the band edge with and without it
/// ([`device_svg_with_potential`]).
pub fn write_solve_plots_with_potential(
    stage: &Staging,
    sol: &Solution,
    o: &Observables,
    potential_ev: Option<&[f64]>,
    limits: &ResultLimits,
) -> Result<(), OutputError> {
    let pixels = limits.map_pixels();
    use crate::observables::timed;
    let device = timed("device.svg", || {
        device_svg_with_potential(sol, o, potential_ev)
    })?;
    stage.write("device.svg", device.as_bytes())?;
    stage.write("spectrum.svg", spectrum_svg(sol, o)?.as_bytes())?;
    let bond = timed("bond_current.svg", || {
        bond_current_svg_within(sol, o, pixels)
    })?;
    stage.write("bond_current.svg", bond.as_bytes())?;
    let occupation = timed("occupation.svg", || occupation_svg_within(sol, o, pixels))?;
    stage.write("occupation.svg", occupation.as_bytes())?;
    if let Some(svg) = convergence_svg(sol)? {
        stage.write("convergence.svg", svg.as_bytes())?;
    }
    Ok(())
}
