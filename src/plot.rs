//! SVG plots of mixtures and fits, rendered to `String`s (writing a file is
//! the caller's business). Three figures:
//!
//! - [`density_vs_composition`]: ρ against mass fraction, one curve per
//!   temperature, with measured rows drawn as points;
//! - [`excess_volume_vs_x`]: V^E against mole fraction, curves and rows;
//! - [`partial_molar_volumes_vs_x`]: V̄₁ and V̄₂ against mole fraction in two
//!   panels, with tangent-intercept points from data rows and a ±2u band
//!   when a fitted model is given.
//!
//! Every function takes any `&dyn Mixture` (the reference equation as well
//! as a fitted model). Data rows are drawn only when their temperature is
//! within [`ROW_T_TOL_C`] of a plotted temperature; rows at other
//! temperatures are left out of the figure (they belong to no curve).

use plotters::coord::types::RangedCoordf64;
use plotters::coord::Shift;
use plotters::prelude::*;

use crate::kernel::composition::{w_from_x, x_from_w};
use crate::kernel::fit::{tangent_intercept, FitRow, FittedMixture, TangentWindow};
use crate::kernel::{Error, Mixture, Result};

/// Rows within this many kelvin of a plotted temperature are drawn with it.
pub const ROW_T_TOL_C: f64 = 0.05;
/// Points per plotted curve.
const SAMPLES: usize = 201;

/// Size and an optional title in place of the default one.
#[derive(Debug, Clone, PartialEq)]
pub struct PlotOptions {
    /// Width in pixels.
    pub width: u32,
    /// Height in pixels.
    pub height: u32,
    /// Title; `None` for the default title of each figure.
    pub title: Option<String>,
}

impl Default for PlotOptions {
    fn default() -> Self {
        Self {
            width: 800,
            height: 560,
            title: None,
        }
    }
}

const COLORS: [RGBColor; 6] = [
    RGBColor(31, 119, 180),
    RGBColor(214, 39, 40),
    RGBColor(44, 160, 44),
    RGBColor(148, 103, 189),
    RGBColor(255, 127, 14),
    RGBColor(23, 190, 207),
];

fn color(i: usize) -> RGBColor {
    COLORS[i % COLORS.len()]
}

fn plot_err<E: std::fmt::Display>(e: E) -> Error {
    Error::Invalid(format!("plot: {e}"))
}

fn check_size(o: &PlotOptions) -> Result<()> {
    if !(200..=10_000).contains(&o.width) || !(150..=10_000).contains(&o.height) {
        return Err(Error::Invalid(format!(
            "plot size must be 200–10000 × 150–10000 pixels, got {} × {}",
            o.width, o.height
        )));
    }
    Ok(())
}

fn check_temps(m: &dyn Mixture, temps: &[f64]) -> Result<()> {
    if temps.is_empty() {
        return Err(Error::Invalid("plot: give at least one temperature".into()));
    }
    for &t in temps {
        m.check_t(t)?;
    }
    Ok(())
}

/// Index of the plotted temperature a row belongs to.
fn temp_slot(temps: &[f64], t: f64) -> Option<usize> {
    temps.iter().position(|&tp| (tp - t).abs() <= ROW_T_TOL_C)
}

/// Lower and upper plot limits with 5 % padding (and a minimum span).
fn padded(lo: f64, hi: f64) -> (f64, f64) {
    let span = (hi - lo).abs().max(1e-6 * hi.abs().max(1.0));
    (lo - 0.05 * span, hi + 0.05 * span)
}

fn bounds(values: impl Iterator<Item = f64>) -> Result<(f64, f64)> {
    let (lo, hi) = values.fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), v| {
        (l.min(v), h.max(v))
    });
    if !(lo.is_finite() && hi.is_finite()) {
        return Err(Error::Invalid(
            "plot: the model gave no finite values to draw".into(),
        ));
    }
    Ok(padded(lo, hi))
}

/// Axis tick text without a "-0".
fn tick(v: &f64) -> String {
    let v = if v.abs() < 1e-12 { 0.0 } else { *v };
    let s = format!("{v:.3}");
    let s = s.trim_end_matches('0');
    s.strip_suffix('.')
        .map_or_else(|| s.to_string(), |t| format!("{t}.0"))
}

fn fmt_t(t: f64) -> String {
    let s = format!("{t:.2}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    format!("{s} °C")
}

/// Density against mass fraction of component 1, one curve per
/// temperature in `temps` (°C, each within the model's range), with the
/// rows of `data` at those temperatures as points.
pub fn density_vs_composition(
    m: &dyn Mixture,
    temps: &[f64],
    data: Option<&[FitRow]>,
    opts: &PlotOptions,
) -> Result<String> {
    check_size(opts)?;
    check_temps(m, temps)?;
    let v = m.validity();
    let [c1, _] = m.components();
    let mut curves = Vec::new();
    for &t in temps {
        let pts: Vec<(f64, f64)> = (0..SAMPLES)
            .map(|i| {
                let w = v.w_min + (v.w_max - v.w_min) * i as f64 / (SAMPLES - 1) as f64;
                Ok((w, m.density(w, t)?))
            })
            .collect::<Result<_>>()?;
        curves.push(pts);
    }
    let rows: Vec<(usize, f64, f64)> = data
        .unwrap_or(&[])
        .iter()
        .filter(|r| r.w.is_finite() && r.rho.is_finite())
        .filter_map(|r| temp_slot(temps, r.t).map(|s| (s, r.w, r.rho)))
        .collect();
    let (y0, y1) = bounds(
        curves
            .iter()
            .flatten()
            .map(|p| p.1)
            .chain(rows.iter().map(|r| r.2)),
    )?;
    let (x0, x1) = bounds(
        [v.w_min, v.w_max]
            .into_iter()
            .chain(rows.iter().map(|r| r.1)),
    )?;
    let title = opts
        .title
        .clone()
        .unwrap_or_else(|| format!("Density of {}", m.name()));
    curves_and_points_svg(
        &title,
        opts,
        (x0, x1),
        (y0, y1),
        &format!("mass fraction of {} w", c1.name),
        "density ρ / (kg/m³)",
        temps,
        &curves,
        &rows,
    )
}

/// One SVG chart of model curves (one per temperature of `temps`) and the
/// data points `rows` (temperature slot, x, y) in the same colours, with a
/// legend in the emptiest corner.
#[allow(clippy::too_many_arguments)]
fn curves_and_points_svg(
    title: &str,
    opts: &PlotOptions,
    (x0, x1): (f64, f64),
    (y0, y1): (f64, f64),
    x_desc: &str,
    y_desc: &str,
    temps: &[f64],
    curves: &[Vec<(f64, f64)>],
    rows: &[(usize, f64, f64)],
) -> Result<String> {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (opts.width, opts.height)).into_drawing_area();
        root.fill(&WHITE).map_err(plot_err)?;
        let mut chart = ChartBuilder::on(&root)
            .caption(title, ("sans-serif", 22))
            .margin(12)
            .x_label_area_size(48)
            .y_label_area_size(72)
            .build_cartesian_2d(x0..x1, y0..y1)
            .map_err(plot_err)?;
        chart
            .configure_mesh()
            .y_label_formatter(&tick)
            .x_desc(x_desc)
            .y_desc(y_desc)
            .draw()
            .map_err(plot_err)?;
        for (i, (pts, &t)) in curves.iter().zip(temps).enumerate() {
            let c = color(i);
            chart
                .draw_series(LineSeries::new(pts.iter().copied(), c.stroke_width(2)))
                .map_err(plot_err)?
                .label(format!("model {}", fmt_t(t)))
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 20, y)], c.stroke_width(2))
                });
            let mine: Vec<(f64, f64)> = rows
                .iter()
                .filter(|r| r.0 == i)
                .map(|r| (r.1, r.2))
                .collect();
            if !mine.is_empty() {
                chart
                    .draw_series(PointSeries::of_element(mine, 4, c, &|p, s, st| {
                        EmptyElement::at(p) + Circle::new((0, 0), s, st.filled())
                    }))
                    .map_err(plot_err)?
                    .label(format!("data {}", fmt_t(t)))
                    .legend(move |(x, y)| Circle::new((x + 10, y), 4, c.filled()));
            }
        }
        let all: Vec<(f64, f64)> = curves
            .iter()
            .flatten()
            .copied()
            .chain(rows.iter().map(|r| (r.1, r.2)))
            .collect();
        draw_legend(&mut chart, legend_corner(&all, (x0, x1), (y0, y1)))?;
        root.present().map_err(plot_err)?;
    }
    Ok(svg)
}

/// The corner of the plot whose quarter-width, third-height box holds the
/// fewest of `pts`, so the legend hides as little as possible.
fn legend_corner(pts: &[(f64, f64)], x: (f64, f64), y: (f64, f64)) -> SeriesLabelPosition {
    let count = |right: bool, upper: bool| {
        pts.iter()
            .filter(|p| {
                let fx = (p.0 - x.0) / (x.1 - x.0);
                let fy = (p.1 - y.0) / (y.1 - y.0);
                (if right { fx > 0.7 } else { fx < 0.3 })
                    && (if upper { fy > 0.6 } else { fy < 0.4 })
            })
            .count()
    };
    [
        (SeriesLabelPosition::UpperRight, count(true, true)),
        (SeriesLabelPosition::LowerRight, count(true, false)),
        (SeriesLabelPosition::UpperLeft, count(false, true)),
        (SeriesLabelPosition::LowerLeft, count(false, false)),
    ]
    .into_iter()
    .min_by_key(|c| c.1)
    .map(|c| c.0)
    .unwrap_or(SeriesLabelPosition::UpperRight)
}

fn draw_legend<'a, 'b: 'a>(
    chart: &mut ChartContext<'a, SVGBackend<'b>, Cartesian2d<RangedCoordf64, RangedCoordf64>>,
    corner: SeriesLabelPosition,
) -> Result<()> {
    chart
        .configure_series_labels()
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK)
        .position(corner)
        .draw()
        .map_err(plot_err)
}

/// Excess molar volume against mole fraction of component 1, one curve per
/// temperature, with V^E of the rows of `data` (from each row's density and
/// the model's pure molar volumes at the row's temperature) as points. The
/// model must cover both pure components.
pub fn excess_volume_vs_x(
    m: &dyn Mixture,
    temps: &[f64],
    data: Option<&[FitRow]>,
    opts: &PlotOptions,
) -> Result<String> {
    check_size(opts)?;
    check_temps(m, temps)?;
    let [c1, c2] = m.components();
    let (m1, m2) = (c1.molar_mass, c2.molar_mass);
    let mut curves = Vec::new();
    for &t in temps {
        m.pure_molar_volumes(t)?;
        let pts: Vec<(f64, f64)> = (0..SAMPLES)
            .map(|i| {
                let x = i as f64 / (SAMPLES - 1) as f64;
                Ok((x, m.excess_molar_volume(w_from_x(x, m1, m2), t)?))
            })
            .collect::<Result<_>>()?;
        curves.push(pts);
    }
    let mut rows = Vec::new();
    for r in data.unwrap_or(&[]) {
        if !(r.w.is_finite() && r.rho.is_finite() && r.rho > 0.0 && (0.0..=1.0).contains(&r.w)) {
            continue;
        }
        let Some(slot) = temp_slot(temps, r.t) else {
            continue;
        };
        // The row's own temperature may differ from the curve's by up to
        // the tolerance; its V^E uses pure volumes at the curve's t.
        let t = temps[slot];
        let [v1, v2] = m.pure_molar_volumes(t)?;
        let x = x_from_w(r.w, m1, m2);
        let mbar = 1.0 / (r.w / m1 + (1.0 - r.w) / m2);
        rows.push((slot, x, 1000.0 * mbar / r.rho - x * v1 - (1.0 - x) * v2));
    }
    let (y0, y1) = bounds(
        curves
            .iter()
            .flatten()
            .map(|p| p.1)
            .chain(rows.iter().map(|r| r.2))
            .chain([0.0]),
    )?;
    let title = opts
        .title
        .clone()
        .unwrap_or_else(|| format!("Excess molar volume of {}", m.name()));
    curves_and_points_svg(
        &title,
        opts,
        (-0.02, 1.02),
        (y0, y1),
        &format!("mole fraction of {} x", c1.name),
        "excess molar volume V^E / (cm³/mol)",
        temps,
        &curves,
        &rows,
    )
}

/// Partial molar volumes of both components against mole fraction of
/// component 1 at `t` °C, in two panels (their magnitudes differ). With
/// `data`, the rows at `t` give model-free points: tangent-intercept values
/// at each measured composition over windows chosen from the data
/// ([`TangentWindow::Adaptive`], with the density scatter of `band`'s fit,
/// or else of the rows about `m`), drawn only when the rows at `t` cover 3
/// or more compositions. With
/// `band`, a fitted model, a shaded band of ±2 standard uncertainties of
/// that model is drawn around its curves (the band belongs to `band`, so
/// pass the same model as `m` for a fit's own band).
pub fn partial_molar_volumes_vs_x(
    m: &dyn Mixture,
    t: f64,
    data: Option<&[FitRow]>,
    band: Option<&FittedMixture>,
    opts: &PlotOptions,
) -> Result<String> {
    check_size(opts)?;
    let t = m.check_t(t)?;
    let v = m.validity();
    let [c1, c2] = m.components();
    let (m1, m2) = (c1.molar_mass, c2.molar_mass);
    let (xa, xb) = (x_from_w(v.w_min, m1, m2), x_from_w(v.w_max, m1, m2));
    let xs: Vec<f64> = (0..SAMPLES)
        .map(|i| xa + (xb - xa) * i as f64 / (SAMPLES - 1) as f64)
        .collect();
    let mut curve = [Vec::new(), Vec::new()];
    for &x in &xs {
        let p = m.partial_molar_volumes(w_from_x(x, m1, m2).clamp(v.w_min, v.w_max), t)?;
        curve[0].push((x, p[0]));
        curve[1].push((x, p[1]));
    }
    let mut bands: [Vec<(f64, f64, f64)>; 2] = [Vec::new(), Vec::new()];
    if let Some(f) = band {
        let fv = f.validity();
        let [d1, d2] = f.components();
        for &x in &xs {
            let w = w_from_x(x, d1.molar_mass, d2.molar_mass);
            if w < fv.w_min || w > fv.w_max {
                continue;
            }
            let p = f.partial_molar_volumes_u(w, t)?;
            for k in 0..2 {
                bands[k].push((x, p[k].value - 2.0 * p[k].u, p[k].value + 2.0 * p[k].u));
            }
        }
    }
    let mut points: [Vec<(f64, f64)>; 2] = [Vec::new(), Vec::new()];
    if let Some(rows) = data {
        let at_t: Vec<FitRow> = rows
            .iter()
            .filter(|r| (r.t - t).abs() <= ROW_T_TOL_C)
            .copied()
            .collect();
        let mut xs_data: Vec<f64> = at_t.iter().map(|r| x_from_w(r.w, m1, m2)).collect();
        xs_data.sort_by(f64::total_cmp);
        xs_data.dedup_by(|a, b| (*a - *b).abs() <= 1e-9);
        if xs_data.len() >= 3 {
            let comps = m.components();
            let density_sd = match band {
                Some(f) => f.density_residual_sd(),
                None => {
                    let ss: f64 = at_t.iter().map(|r| (r.rho - m.rho(r.w, r.t)).powi(2)).sum();
                    let sd = (ss / at_t.len() as f64).sqrt();
                    if sd.is_finite() {
                        sd
                    } else {
                        0.0
                    }
                }
            };
            let window = TangentWindow::Adaptive { density_sd };
            for p in tangent_intercept(&at_t, comps, t, ROW_T_TOL_C, &xs_data, window)? {
                points[0].push((p.x, p.v1));
                points[1].push((p.x, p.v2));
            }
        }
    }
    let title = opts
        .title
        .clone()
        .unwrap_or_else(|| format!("Partial molar volumes of {} at {}", m.name(), fmt_t(t)));
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (opts.width, opts.height)).into_drawing_area();
        root.fill(&WHITE).map_err(plot_err)?;
        let root = root.titled(&title, ("sans-serif", 22)).map_err(plot_err)?;
        let panels = root.split_evenly((2, 1));
        for (k, panel) in panels.iter().enumerate() {
            let name = &m.components()[k].name;
            let series = PmvSeries {
                curve: &curve[k],
                band: &bands[k],
                points: &points[k],
            };
            pmv_panel(panel, &series, name, &c1.name, color(k))?;
        }
        root.present().map_err(plot_err)?;
    }
    Ok(svg)
}

/// What one partial-molar-volume panel shows.
struct PmvSeries<'a> {
    curve: &'a [(f64, f64)],
    band: &'a [(f64, f64, f64)],
    points: &'a [(f64, f64)],
}

fn pmv_panel(
    area: &DrawingArea<SVGBackend<'_>, Shift>,
    series: &PmvSeries<'_>,
    component: &str,
    x_component: &str,
    c: RGBColor,
) -> Result<()> {
    let PmvSeries {
        curve,
        band,
        points,
    } = *series;
    let (y0, y1) = bounds(
        curve
            .iter()
            .map(|p| p.1)
            .chain(band.iter().flat_map(|b| [b.1, b.2]))
            .chain(points.iter().map(|p| p.1)),
    )?;
    let (x0, x1) = bounds(curve.iter().map(|p| p.0))?;
    let mut chart = ChartBuilder::on(area)
        .caption(
            format!("partial molar volume of {component}"),
            ("sans-serif", 16),
        )
        .margin(10)
        .x_label_area_size(42)
        .y_label_area_size(72)
        .build_cartesian_2d(x0..x1, y0..y1)
        .map_err(plot_err)?;
    chart
        .configure_mesh()
        .y_label_formatter(&tick)
        .x_desc(format!("mole fraction of {x_component} x"))
        .y_desc(format!("V̄ {component} / (cm³/mol)"))
        .draw()
        .map_err(plot_err)?;
    if band.len() >= 2 {
        let mut outline: Vec<(f64, f64)> = band.iter().map(|b| (b.0, b.2)).collect();
        outline.extend(band.iter().rev().map(|b| (b.0, b.1)));
        chart
            .draw_series(std::iter::once(Polygon::new(outline, c.mix(0.2).filled())))
            .map_err(plot_err)?
            .label("±2u band (fit)")
            .legend(move |(x, y)| {
                Rectangle::new([(x, y - 5), (x + 20, y + 5)], c.mix(0.2).filled())
            });
    }
    chart
        .draw_series(LineSeries::new(curve.iter().copied(), c.stroke_width(2)))
        .map_err(plot_err)?
        .label(format!("V̄ {component}"))
        .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], c.stroke_width(2)));
    if !points.is_empty() {
        chart
            .draw_series(PointSeries::of_element(
                points.iter().copied(),
                3,
                BLACK,
                &|p, s, st| EmptyElement::at(p) + Circle::new((0, 0), s, st),
            ))
            .map_err(plot_err)?
            .label("tangent to the data")
            .legend(|(x, y)| Circle::new((x + 10, y), 3, BLACK));
    }
    let all: Vec<(f64, f64)> = curve
        .iter()
        .copied()
        .chain(points.iter().copied())
        .chain(band.iter().flat_map(|b| [(b.0, b.1), (b.0, b.2)]))
        .collect();
    draw_legend(&mut chart, legend_corner(&all, (x0, x1), (y0, y1)))
}
