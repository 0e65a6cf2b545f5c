//! The look shared by every figure: colours, fonts, unit prefixes and tick
//! labels.

use plotters::style::RGBColor;

/// Text face of every label (the viewer's own sans-serif font: SVG text needs
/// no font file).
pub const FONT: &str = "sans-serif";
/// Tick labels.
pub const TICK_SIZE: f64 = 14.0;
/// Axis descriptions.
pub const DESC_SIZE: f64 = 16.0;
/// Figure and panel titles.
pub const TITLE_SIZE: f64 = 19.0;

/// Dark ink for axes, text and the band edge.
pub const INK: RGBColor = RGBColor(0x22, 0x26, 0x2e);
/// Faint grid lines.
pub const GRID: RGBColor = RGBColor(0xe4, 0xe6, 0xea);
/// Shading of the lead regions beside the device.
pub const LEAD_SHADE: RGBColor = RGBColor(0xee, 0xec, 0xe6);
/// Lattice heated (energy flows from the electrons into the lattice): the
/// warm half of the heating/cooling pair, used for nothing else.
pub const HEATING: RGBColor = RGBColor(0xd0, 0x5a, 0x1b);
/// Lattice cooled: the cool half of the heating/cooling pair.
pub const COOLING: RGBColor = RGBColor(0x1f, 0x6c, 0xb0);
/// The local Fermi level.
pub const LOCAL_FERMI: RGBColor = RGBColor(0x8a, 0x3f, 0xa8);
/// Drop of the local Fermi level per cell: a pale tint of the local Fermi
/// level's purple, since it is that level's step from cell to cell.
pub const DROP: RGBColor = RGBColor(0xb3, 0x8f, 0xcb);
/// Things of the left lead: a dark neutral slate, so that the leads never
/// read as heating or cooling.
pub const LEFT: RGBColor = RGBColor(0x55, 0x5b, 0x66);
/// Things of the right lead: a light warm neutral (and dashed where it is
/// a line), told apart from the left lead by lightness, not by hue.
pub const RIGHT: RGBColor = RGBColor(0xa3, 0x9d, 0x94);
/// The scattering bath.
pub const BATH: RGBColor = RGBColor(0xc2, 0x44, 0x7f);
/// Electrons moving towards +x (left to right): the positive end of the
/// direction scale, in the net flow of the spectrum and the bond-current map.
pub const FORWARD: RGBColor = RGBColor(0x1b, 0x7f, 0x79);
/// Electrons moving towards −x (right to left): the negative end of the
/// direction scale.
pub const BACKWARD: RGBColor = RGBColor(0x9a, 0x5c, 0x17);
/// Coherent transmission.
pub const TRANSMISSION: RGBColor = RGBColor(0x39, 0x49, 0xab);
/// Convergence residual.
pub const RESIDUAL: RGBColor = RGBColor(0x1f, 0x4e, 0x5f);
/// Change of the terminal currents between Born iterations.
pub const CURRENT_CHANGE: RGBColor = RGBColor(0xc2, 0x7c, 0x0e);

/// Lattice temperature T_L(x) of a self-heated solve: a dark red, apart
/// from the orange of heating (a power) by lightness and hue.
pub const LATTICE_TEMPERATURE: RGBColor = RGBColor(0x7a, 0x12, 0x2a);

/// The band edge without the potential of the device's charge (the band
/// offsets the case imposes), drawn beside the band edge of a solve with
/// self-consistent electrostatics: an olive green, apart from the teal of
/// the electrons moving to +x by hue and from the lead greys by colour.
pub const BAND_EDGE_IMPOSED: RGBColor = RGBColor(0x7d, 0x8c, 0x1e);

/// Crosses on the points of a curve whose solve did not converge: black,
/// apart from every coloured line and darker than the axes' ink.
pub const NOT_CONVERGED: RGBColor = RGBColor(0x00, 0x00, 0x00);

/// Every named colour of the solve figures with what it stands for; each
/// meaning has its own colour, in every figure.
pub const MEANINGS: [(RGBColor, &str); 18] = [
    (INK, "axes, text and the band edge"),
    (LEAD_SHADE, "lead regions"),
    (HEATING, "lattice heated"),
    (COOLING, "lattice cooled"),
    (LOCAL_FERMI, "local Fermi level"),
    (DROP, "drop of the local Fermi level"),
    (LEFT, "left lead"),
    (RIGHT, "right lead"),
    (BATH, "scattering bath"),
    (FORWARD, "electrons moving left to right"),
    (BACKWARD, "electrons moving right to left"),
    (TRANSMISSION, "transmission"),
    (RESIDUAL, "Born-loop residual"),
    (CURRENT_CHANGE, "change of the terminal currents"),
    (GRID, "grid lines"),
    (LATTICE_TEMPERATURE, "lattice temperature"),
    (
        BAND_EDGE_IMPOSED,
        "band edge without the potential of the device's charge",
    ),
    (
        NOT_CONVERGED,
        "points whose solve did not converge (crosses)",
    ),
];

/// Colours of the series of a generic line chart, in order: chosen to stay
/// apart for the common forms of colour blindness (blue, orange, green,
/// purple, ochre, sky, dark grey, rose).
pub const SERIES: [RGBColor; 8] = [
    RGBColor(0x1f, 0x6c, 0xb0),
    RGBColor(0xd0, 0x5a, 0x1b),
    RGBColor(0x2e, 0x93, 0x6b),
    RGBColor(0x8a, 0x3f, 0xa8),
    RGBColor(0xb8, 0x8a, 0x12),
    RGBColor(0x5b, 0xb1, 0xde),
    RGBColor(0x4a, 0x4f, 0x5a),
    RGBColor(0xc4, 0x5b, 0x8c),
];

/// Reference lines of a line chart (dashed).
pub const REFERENCE: [RGBColor; 4] = [
    RGBColor(0x6b, 0x70, 0x7a),
    RGBColor(0xa0, 0x3c, 0x3c),
    RGBColor(0x3c, 0x7a, 0x3c),
    RGBColor(0x3c, 0x3c, 0xa0),
];

/// Anchors of the diverging scale from −1 (brown: electrons moving to −x
/// in a bond-current map) through a warm white at 0 to +1 (teal: to +x).
/// Brown against teal stays apart for red–green colour blindness, and the
/// pair differs from the orange/blue of heating and cooling; the lightness
/// falls symmetrically on both sides.
const DIVERGING: [(f64, [f64; 3]); 5] = [
    (-1.0, [0x5a as f64, 0x33 as f64, 0x08 as f64]),
    (-0.5, [0xd4 as f64, 0xa9 as f64, 0x70 as f64]),
    (0.0, [0xf7 as f64, 0xf5 as f64, 0xf0 as f64]),
    (0.5, [0x86 as f64, 0xc8 as f64, 0xbd as f64]),
    (1.0, [0x0c as f64, 0x4f as f64, 0x4b as f64]),
];

/// Anchors of the sequential scale from 0 (pale) to 1 (deep blue-violet),
/// lightness falling monotonically.
const SEQUENTIAL: [(f64, [f64; 3]); 4] = [
    (0.0, [0xf8 as f64, 0xf4 as f64, 0xe3 as f64]),
    (0.35, [0x9c as f64, 0xd0 as f64, 0xb4 as f64]),
    (0.7, [0x3a as f64, 0x84 as f64, 0xa8 as f64]),
    (1.0, [0x2b as f64, 0x21 as f64, 0x5e as f64]),
];

fn interpolate(anchors: &[(f64, [f64; 3])], t: f64) -> RGBColor {
    let t = t.clamp(anchors[0].0, anchors[anchors.len() - 1].0);
    let i = anchors
        .windows(2)
        .position(|w| t <= w[1].0)
        .unwrap_or(anchors.len() - 2);
    let (t0, c0) = anchors[i];
    let (t1, c1) = anchors[i + 1];
    let f = if t1 > t0 { (t - t0) / (t1 - t0) } else { 0.0 };
    let ch = |k: usize| (c0[k] + f * (c1[k] - c0[k])).round().clamp(0.0, 255.0) as u8;
    RGBColor(ch(0), ch(1), ch(2))
}

/// Diverging colour of `t` in [−1, 1] (NaN maps to grey).
pub fn diverging(t: f64) -> RGBColor {
    if t.is_nan() {
        return RGBColor(0x99, 0x99, 0x99);
    }
    interpolate(&DIVERGING, t)
}

/// Sequential colour of `t` in [0, 1] (NaN maps to grey).
pub fn sequential(t: f64) -> RGBColor {
    if t.is_nan() {
        return RGBColor(0x99, 0x99, 0x99);
    }
    interpolate(&SEQUENTIAL, t)
}

/// Decades below the largest magnitude that a signed logarithmic colour
/// scale spans (see [`signed_log`]).
pub const SIGNED_LOG_DECADES: f64 = 4.0;

/// Position in [−1, 1] of `v` on a signed logarithmic scale whose ends are
/// ±`max`: sign(v) · log10(1 + |v|/v0) / log10(1 + max/v0) with
/// v0 = max · 10^(−decades). Near zero the scale is linear (no jump of
/// colour at the sign change); from v0 up it is logarithmic, so a value a
/// thousand times below the largest still lands a quarter of the way
/// out. `max ≤ 0` or non-finite gives 0; NaN stays NaN.
pub fn signed_log(v: f64, max: f64, decades: f64) -> f64 {
    if v.is_nan() {
        return f64::NAN;
    }
    if !(max.is_finite() && max > 0.0) {
        return 0.0;
    }
    let v0 = max * 10f64.powf(-decades);
    let t = (v.abs() / v0).ln_1p() / (max / v0).ln_1p();
    v.signum() * t.min(1.0)
}

/// The value at position `t` in [−1, 1] of [`signed_log`] (its inverse).
pub fn signed_log_inverse(t: f64, max: f64, decades: f64) -> f64 {
    let v0 = max * 10f64.powf(-decades);
    t.signum() * v0 * (t.abs() * (max / v0).ln_1p()).exp_m1()
}

/// `#rrggbb` of a colour, lower case.
pub fn hex(c: RGBColor) -> String {
    format!("#{:02x}{:02x}{:02x}", c.0, c.1, c.2)
}

/// An SI prefix for numbers whose largest magnitude is `max_abs`: the
/// factor to multiply by and the prefix, so that the shown numbers lie in
/// [1, 1000) (zero and non-finite magnitudes keep the base unit).
pub fn prefix_for(max_abs: f64) -> (f64, &'static str) {
    const PREFIXES: [(&str, f64); 9] = [
        ("G", 1e9),
        ("M", 1e6),
        ("k", 1e3),
        ("", 1.0),
        ("m", 1e-3),
        ("µ", 1e-6),
        ("n", 1e-9),
        ("p", 1e-12),
        ("f", 1e-15),
    ];
    if !(max_abs.is_finite() && max_abs > 0.0) {
        return (1.0, "");
    }
    let (p, s) = PREFIXES
        .iter()
        .copied()
        .find(|(_, s)| max_abs >= *s * 0.9995)
        .unwrap_or(("a", 1e-18));
    (1.0 / s, p)
}

/// Largest finite magnitude of the values (0 when there is none).
pub fn max_abs<'a>(values: impl IntoIterator<Item = &'a f64>) -> f64 {
    values
        .into_iter()
        .filter(|v| v.is_finite())
        .fold(0.0, |m, v| m.max(v.abs()))
}

/// Finite (min, max) of the values, or `None`.
pub fn finite_range<'a>(values: impl IntoIterator<Item = &'a f64>) -> Option<(f64, f64)> {
    values
        .into_iter()
        .filter(|v| v.is_finite())
        .fold(None, |acc, &v| match acc {
            None => Some((v, v)),
            Some((lo, hi)) => Some((lo.min(v), hi.max(v))),
        })
}

/// A plotting range around [lo, hi]: padded by `pad` of the span on each
/// side, widened when the span is zero.
pub fn padded(lo: f64, hi: f64, pad: f64) -> (f64, f64) {
    let span = hi - lo;
    if span > 0.0 && span.is_finite() {
        (lo - pad * span, hi + pad * span)
    } else {
        let w = if lo != 0.0 { 0.1 * lo.abs() } else { 1.0 };
        (lo - w, hi + w)
    }
}

/// Decimals that tell apart ticks about `span / ticks` apart.
pub fn decimals_for(span: f64, ticks: usize) -> usize {
    let step = span.abs() / ticks.max(1) as f64;
    if !(step.is_finite() && step > 0.0) {
        return 2;
    }
    let d = -step.log10().floor();
    (d.max(0.0) as usize).min(6)
}

/// A tick label with `decimals` decimals, without a "-0".
pub fn tick(v: f64, decimals: usize) -> String {
    let s = format!("{v:.decimals$}");
    if s.starts_with('-') && s[1..].chars().all(|c| c == '0' || c == '.') {
        s[1..].to_string()
    } else {
        s
    }
}

/// A tick label of a log axis: 1e-3 style.
pub fn log_tick(v: f64) -> String {
    if v <= 0.0 || !v.is_finite() {
        return String::new();
    }
    let e = v.log10().round() as i32;
    if (v / 10f64.powi(e) - 1.0).abs() < 1e-6 {
        format!("1e{e}")
    } else {
        String::new()
    }
}

/// Split a polyline into the pieces inside y ∈ [lo, hi], cutting segments
/// at the boundary, so that a curve leaving the window is drawn up to the
/// frame and not across the rest of the figure.
pub fn clip_to_band(points: &[(f64, f64)], lo: f64, hi: f64) -> Vec<Vec<(f64, f64)>> {
    let inside = |y: f64| y >= lo && y <= hi;
    let mut pieces: Vec<Vec<(f64, f64)>> = Vec::new();
    let mut current: Vec<(f64, f64)> = Vec::new();
    for w in 0..points.len() {
        let (x1, y1) = points[w];
        if w == 0 {
            if inside(y1) {
                current.push((x1, y1));
            }
            continue;
        }
        let (x0, y0) = points[w - 1];
        // Clip segment (x0,y0)-(x1,y1) to the band.
        let (mut t0, mut t1) = (0.0f64, 1.0f64);
        let dy = y1 - y0;
        let mut visible = true;
        for (p, q) in [(-dy, y0 - lo), (dy, hi - y0)] {
            if p == 0.0 {
                if q < 0.0 {
                    visible = false;
                }
            } else {
                let r = q / p;
                if p < 0.0 {
                    t0 = t0.max(r);
                } else {
                    t1 = t1.min(r);
                }
            }
        }
        if !visible || t0 > t1 {
            if current.len() > 1 {
                pieces.push(std::mem::take(&mut current));
            } else {
                current.clear();
            }
            continue;
        }
        let at = |t: f64| (x0 + t * (x1 - x0), y0 + t * dy);
        if t0 > 0.0 || current.is_empty() {
            if current.len() > 1 {
                pieces.push(std::mem::take(&mut current));
            } else {
                current.clear();
            }
            current.push(at(t0));
        }
        current.push(at(t1));
        if t1 < 1.0 {
            pieces.push(std::mem::take(&mut current));
        }
    }
    if current.len() > 1 {
        pieces.push(current);
    }
    pieces
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn prefixes_put_numbers_between_one_and_a_thousand() {
        assert_eq!(prefix_for(2.4e-10), (1e12, "p"));
        assert_eq!(prefix_for(0.036).1, "m");
        assert_eq!(prefix_for(0.0), (1.0, ""));
        let (f, p) = prefix_for(241e-12);
        assert_eq!(p, "p");
        assert!((241e-12 * f - 241.0).abs() < 1e-9);
    }

    #[test]
    fn ticks_have_no_negative_zero() {
        assert_eq!(tick(-0.0001, 2), "0.00");
        assert_eq!(tick(-1.5, 1), "-1.5");
        assert_eq!(decimals_for(30.0, 6), 0);
        assert_eq!(decimals_for(0.3, 6), 2);
        assert_eq!(log_tick(1e-3), "1e-3");
        assert_eq!(log_tick(2e-3), "");
    }

    #[test]
    fn palettes_are_symmetric_in_lightness_and_end_where_stated() {
        assert_eq!(hex(diverging(0.0)), "#f7f5f0");
        assert_eq!(hex(diverging(-1.0)), "#5a3308");
        assert_eq!(hex(diverging(2.0)), "#0c4f4b");
        let light = |c: RGBColor| 0.2126 * c.0 as f64 + 0.7152 * c.1 as f64 + 0.0722 * c.2 as f64;
        for t in [0.25, 0.5, 0.75] {
            let (a, b) = (light(diverging(-t)), light(diverging(t)));
            assert!((a - b).abs() < 25.0, "t = {t}: {a} vs {b}");
        }
        assert!(light(sequential(0.0)) > light(sequential(0.5)));
        assert!(light(sequential(0.5)) > light(sequential(1.0)));
    }

    #[test]
    fn signed_log_is_odd_monotone_and_inverted() {
        let (m, d) = (25.0, SIGNED_LOG_DECADES);
        assert_eq!(signed_log(m, m, d), 1.0);
        assert_eq!(signed_log(0.0, m, d), 0.0);
        assert!((signed_log(-m, m, d) + 1.0).abs() < 1e-15);
        // A value 1e-3 of the largest sits a quarter of the way out (four
        // decades: log10(11)/log10(10001) ≈ 0.26), so its sign shows.
        let t = signed_log(-1e-3 * m, m, d);
        assert!((t + 0.26).abs() < 0.01, "{t}");
        let mut last = -1.0;
        for k in -20..=20 {
            let v = m * k as f64 / 20.0;
            let t = signed_log(v, m, d);
            assert!(t > last || k == -20, "monotone at {v}");
            assert!((t + signed_log(-v, m, d)).abs() < 1e-15, "odd at {v}");
            assert!(
                (signed_log_inverse(t, m, d) - v).abs() < 1e-12 * m,
                "inverse at {v}"
            );
            last = t;
        }
    }

    #[test]
    fn every_meaning_has_its_own_colour_and_the_leads_are_neutral() {
        let mut seen = std::collections::HashMap::new();
        for (c, what) in MEANINGS {
            if let Some(other) = seen.insert(hex(c), what) {
                panic!("{} is both {other:?} and {what:?}", hex(c));
            }
        }
        // Neutral: the channels of a lead colour lie close together, while
        // heating and cooling are strongly coloured; the two leads differ
        // in lightness, which survives every form of colour blindness.
        let chroma = |c: RGBColor| {
            let v = [c.0, c.1, c.2];
            (*v.iter().max().unwrap() - *v.iter().min().unwrap()) as i32
        };
        assert!(chroma(LEFT) <= 24 && chroma(RIGHT) <= 24);
        assert!(chroma(HEATING) >= 120 && chroma(COOLING) >= 120);
        let light = |c: RGBColor| 0.2126 * c.0 as f64 + 0.7152 * c.1 as f64 + 0.0722 * c.2 as f64;
        assert!(light(RIGHT) - light(LEFT) >= 60.0);
    }

    #[test]
    fn clipping_cuts_at_the_band() {
        let pts = [
            (0.0, 0.0),
            (1.0, 0.0),
            (1.0, 2.0),
            (2.0, 2.0),
            (2.0, 0.0),
            (3.0, 0.0),
        ];
        let pieces = clip_to_band(&pts, -1.0, 1.0);
        assert_eq!(pieces.len(), 2);
        assert_eq!(pieces[0], vec![(0.0, 0.0), (1.0, 0.0), (1.0, 1.0)]);
        assert_eq!(pieces[1], vec![(2.0, 1.0), (2.0, 0.0), (3.0, 0.0)]);
    }
}
