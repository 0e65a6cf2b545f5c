//! Figures of sweeps, generator and cooler curves and screening grids,
//! built on the generic charts of this module.

use super::style::{max_abs, prefix_for};
use super::{Flags, Series, bar_chart_svg, flagged_line_chart_svg, heat_map_svg};
use crate::output::OutputError;
use crate::sweep::{Grid, SweepTable};
use crate::thermo::cooler::CoolerReport;
use crate::thermo::generator::GeneratorReport;

/// Values scaled to an SI prefix and the unit with that prefix.
fn scaled(values: &[f64], unit: &str) -> (Vec<f64>, String) {
    let (f, p) = prefix_for(max_abs(values));
    (values.iter().map(|v| v * f).collect(), format!("{p}{unit}"))
}

/// Values of column `name` of a table.
fn column(table: &SweepTable, name: &str) -> Option<Vec<f64>> {
    let c = table.column(name)?;
    Some(table.rows.iter().map(|r| r[c]).collect())
}

/// `generator_power.svg` and `generator_efficiency.svg`: output power and
/// efficiency against the load voltage, with η_C and η_CA beside the
/// efficiency.
pub fn generator_figures(r: &GeneratorReport) -> Result<Vec<(&'static str, String)>, OutputError> {
    let v: Vec<f64> = r.curve.iter().map(|p| p.voltage_v).collect();
    let (vs, vu) = scaled(&v, "V");
    let p: Vec<f64> = r.curve.iter().map(|p| p.power_w).collect();
    let (ps, pu) = scaled(&p, "W");
    let eta: Vec<f64> = r.curve.iter().map(|p| p.efficiency).collect();
    let failed = |i: usize| !r.curve[i].converged;
    let power = flagged_line_chart_svg(
        "Generator: power delivered to the load",
        &format!("load voltage ({vu})"),
        &format!("power P = −I·V ({pu})"),
        &[Series {
            label: "P",
            x: &vs,
            y: &ps,
        }],
        &[],
        &Flags::where_(&vs, &ps, failed),
    )?;
    let efficiency = flagged_line_chart_svg(
        "Generator: efficiency P / J_Q,hot",
        &format!("load voltage ({vu})"),
        "efficiency (1)",
        &[Series {
            label: "η",
            x: &vs,
            y: &eta,
        }],
        &[
            ("Carnot η_C", r.carnot_efficiency),
            ("Curzon-Ahlborn η_CA", r.curzon_ahlborn_efficiency),
        ],
        &Flags::where_(&vs, &eta, failed),
    )?;
    Ok(vec![
        ("generator_power.svg", power),
        ("generator_efficiency.svg", efficiency),
    ])
}

/// `cooler_power.svg` and `cooler_cop.svg`: cooling power and coefficient
/// of performance against the current, with the Carnot COP.
pub fn cooler_figures(r: &CoolerReport) -> Result<Vec<(&'static str, String)>, OutputError> {
    let i: Vec<f64> = r.curve.iter().map(|p| p.current_a).collect();
    let (is, iu) = scaled(&i, "A");
    let q: Vec<f64> = r.curve.iter().map(|p| p.cooling_power_w).collect();
    let (qs, qu) = scaled(&q, "W");
    let power = flagged_line_chart_svg(
        "Cooler: heat drawn from the cold lead",
        &format!("current ({iu})"),
        &format!("cooling power ({qu})"),
        &[Series {
            label: "J_Q,cold",
            x: &is,
            y: &qs,
        }],
        &[],
        &Flags::where_(&is, &qs, |i| !r.curve[i].converged),
    )?;
    // COP only where it is defined (cooling and power input both positive).
    let ((ci, cop), ok): ((Vec<f64>, Vec<f64>), Vec<bool>) = r
        .curve
        .iter()
        .zip(&is)
        .filter(|(p, _)| p.cop.is_finite())
        .map(|(p, x)| ((*x, p.cop), p.converged))
        .unzip();
    let mut figures = vec![("cooler_power.svg", power)];
    if !ci.is_empty() {
        let cop_svg = flagged_line_chart_svg(
            "Cooler: coefficient of performance",
            &format!("current ({iu})"),
            "COP = J_Q,cold / (I·V)",
            &[Series {
                label: "COP",
                x: &ci,
                y: &cop,
            }],
            &[("Carnot COP", r.carnot_cop)],
            &Flags::where_(&ci, &cop, |i| !ok[i]),
        )?;
        figures.push(("cooler_cop.svg", cop_svg));
    }
    Ok(figures)
}

/// Unit of a result column from its name.
fn unit_of(name: &str) -> &'static str {
    if name.ends_with("_a") {
        "A"
    } else if name.ends_with("_w") {
        "W"
    } else if name.ends_with("_s") {
        "S"
    } else if name.ends_with("_v_per_k") {
        "V/K"
    } else if name.ends_with("_w_per_k2") {
        "W/K²"
    } else if name.ends_with("_w_per_k") {
        "W/K"
    } else {
        ""
    }
}

/// Figures of a grid: for one axis, line charts of `quantities` against
/// it (currents in one, powers in another); for two axes, a heat map of
/// the first quantity over the grid. Nothing for more axes.
pub fn grid_figures(
    grid: &Grid,
    table: &SweepTable,
    quantities: &[&str],
    prefix: &str,
) -> Result<Vec<(String, String)>, OutputError> {
    let names: Vec<String> = grid.axes.iter().map(|a| a.name()).collect();
    match grid.axes.len() {
        1 => line_figures(table, quantities, prefix, &names[0]),
        2 => Ok(map_figure(grid, table, quantities, prefix, &names)?
            .into_iter()
            .collect()),
        _ => Ok(Vec::new()),
    }
}

/// One line chart per unit of `quantities` against the single axis
/// `axis`: currents in one, powers in another; the points of the rows
/// that did not converge are marked.
fn line_figures(
    table: &SweepTable,
    quantities: &[&str],
    prefix: &str,
    axis: &str,
) -> Result<Vec<(String, String)>, OutputError> {
    let mut out = Vec::new();
    let x = column(table, axis).unwrap_or_default();
    let failed: Vec<usize> = (table.unconverged().into_iter())
        .filter(|&i| i < x.len())
        .collect();
    type Group<'q> = (&'static str, Vec<(&'q str, Vec<f64>)>);
    let mut by_unit: Vec<Group<'_>> = Vec::new();
    for q in quantities {
        let Some(y) = column(table, q) else { continue };
        let u = unit_of(q);
        match by_unit.iter_mut().find(|(unit, _)| *unit == u) {
            Some((_, v)) => v.push((q, y)),
            None => by_unit.push((u, vec![(q, y)])),
        }
    }
    for (unit, group) in by_unit {
        let all: Vec<f64> = group.iter().flat_map(|(_, y)| y.iter().copied()).collect();
        let (f, p) = prefix_for(max_abs(&all));
        let ys: Vec<Vec<f64>> = group
            .iter()
            .map(|(_, y)| y.iter().map(|v| v * f).collect())
            .collect();
        let series: Vec<Series<'_>> = group
            .iter()
            .zip(&ys)
            .map(|((label, _), y)| Series { label, x: &x, y })
            .collect();
        let stem = if unit.is_empty() {
            "value".to_string()
        } else {
            unit.replace('/', "_per_").replace('²', "2")
        };
        let what = match unit {
            "A" => "Currents",
            "W" => "Heat currents and powers",
            _ => "Results",
        };
        let y_label = if group.len() == 1 {
            format!("{} ({p}{unit})", group[0].0)
        } else {
            format!("{p}{unit}")
        };
        let flags = Flags {
            points: (ys.iter())
                .flat_map(|y| failed.iter().map(|&i| (x[i], y[i])))
                .collect(),
            count: failed.len(),
            of: x.len(),
        };
        let svg = flagged_line_chart_svg(
            &format!("{what} against {axis}"),
            axis,
            &y_label,
            &series,
            &[],
            &flags,
        )?;
        out.push((format!("{prefix}_{stem}.svg"), svg));
    }
    Ok(out)
}

/// The heat map of the first of `quantities` that the table has, over a
/// two-axis grid (first axis up, second across); None when it has none.
fn map_figure(
    grid: &Grid,
    table: &SweepTable,
    quantities: &[&str],
    prefix: &str,
    names: &[String],
) -> Result<Option<(String, String)>, OutputError> {
    let Some(q) = quantities.iter().find(|q| table.column(q).is_some()) else {
        return Ok(None);
    };
    let (ny, nx) = (grid.axes[0].count, grid.axes[1].count);
    let x: Vec<f64> = (0..nx).map(|i| grid.axes[1].value(i)).collect();
    let y: Vec<f64> = (0..ny).map(|i| grid.axes[0].value(i)).collect();
    let v = column(table, q).unwrap_or_default();
    let (f, p) = prefix_for(max_abs(&v));
    let values = ndarray::Array2::from_shape_fn((ny, nx), |(r, c)| v[r * nx + c] * f);
    let signed = v.iter().any(|x| *x < 0.0) && v.iter().any(|x| *x > 0.0);
    let svg = heat_map_svg(
        &format!("{q} over the grid"),
        &names[1],
        &names[0],
        &x,
        &y,
        &values,
        &format!("{q} ({p}{})", unit_of(q)),
        signed,
    )?;
    Ok(Some((format!("{prefix}_map.svg"), svg)))
}

/// `ranking.svg`: the best points of a screening as bars, best on top.
pub fn ranking_figure(
    grid: &Grid,
    table: &SweepTable,
    order: &[usize],
    ranked: &str,
) -> Result<Option<String>, OutputError> {
    let Some(c) = table.column(ranked) else {
        return Ok(None);
    };
    let names: Vec<String> = grid.axes.iter().map(|a| a.name()).collect();
    let top: Vec<usize> = order
        .iter()
        .copied()
        .filter(|&i| table.rows[i][c].is_finite())
        .take(15)
        .collect();
    if top.is_empty() {
        return Ok(None);
    }
    let labels: Vec<String> = top
        .iter()
        .map(|&i| {
            names
                .iter()
                .map(|n| format!("{n} = {:.4}", table.rows[i][table.column(n).unwrap_or(0)]))
                .collect::<Vec<_>>()
                .join(", ")
        })
        .collect();
    let values: Vec<f64> = top.iter().map(|&i| table.rows[i][c]).collect();
    let (vs, u) = scaled(&values, unit_of(ranked));
    Ok(Some(bar_chart_svg(
        &format!("Best points by {ranked}"),
        &labels,
        &vs,
        &format!("{ranked} ({u})"),
    )?))
}
