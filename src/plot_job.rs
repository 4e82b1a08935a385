//! Grouped bar charts as SVG text, for reports of a day's work such as
//! litres of pure alcohol per tank and the water added to each: one group
//! of bars per category (a tank), one bar per series, a legend, and the
//! value over each bar when there are few enough bars to read them.
//! Rendering only; writing the file is the caller's business.

use plotters::prelude::*;

use crate::kernel::{Error, Result};

/// Most categories a chart takes (beyond this the labels cannot be read).
pub const MAX_CATEGORIES: usize = 200;
/// Most series a chart takes (one colour each).
pub const MAX_SERIES: usize = 6;
/// Bars at most for which the values are printed over the bars.
const MAX_LABELLED_BARS: usize = 48;

const COLORS: [RGBColor; MAX_SERIES] = [
    RGBColor(31, 119, 180),
    RGBColor(44, 160, 44),
    RGBColor(255, 127, 14),
    RGBColor(148, 103, 189),
    RGBColor(214, 39, 40),
    RGBColor(23, 190, 207),
];

/// One series: a value per category.
#[derive(Debug, Clone, PartialEq)]
pub struct BarSeries {
    /// Legend text.
    pub name: String,
    /// One finite value per category, in category order.
    pub values: Vec<f64>,
}

/// A grouped bar chart.
#[derive(Debug, Clone, PartialEq)]
pub struct BarChart {
    /// Title over the chart.
    pub title: String,
    /// Category names along the x axis (e.g. tanks).
    pub categories: Vec<String>,
    /// The series, drawn side by side within each category.
    pub series: Vec<BarSeries>,
    /// Text of the y axis, with its unit.
    pub y_label: String,
    /// Width in pixels (200–10000).
    pub width: u32,
    /// Height in pixels (150–10000).
    pub height: u32,
}

fn plot_err<E: std::fmt::Display>(e: E) -> Error {
    Error::Invalid(format!("plot: {e}"))
}

fn check(c: &BarChart) -> Result<()> {
    if !(200..=10_000).contains(&c.width) || !(150..=10_000).contains(&c.height) {
        return Err(Error::Invalid(format!(
            "plot size must be 200–10000 × 150–10000 pixels, got {} × {}",
            c.width, c.height
        )));
    }
    if c.categories.is_empty() || c.categories.len() > MAX_CATEGORIES {
        return Err(Error::Invalid(format!(
            "a bar chart needs 1 to {MAX_CATEGORIES} categories, got {}",
            c.categories.len()
        )));
    }
    if c.series.is_empty() || c.series.len() > MAX_SERIES {
        return Err(Error::Invalid(format!(
            "a bar chart needs 1 to {MAX_SERIES} series, got {}",
            c.series.len()
        )));
    }
    for (j, s) in c.series.iter().enumerate() {
        if s.values.len() != c.categories.len() {
            return Err(Error::Invalid(format!(
                "series {} (\"{}\") has {} values for {} categories",
                j + 1,
                s.name,
                s.values.len(),
                c.categories.len()
            )));
        }
        if let Some(i) = s.values.iter().position(|v| !v.is_finite()) {
            return Err(Error::Invalid(format!(
                "series {} (\"{}\"), value {}: must be a finite number, got {}",
                j + 1,
                s.name,
                i + 1,
                s.values[i]
            )));
        }
    }
    Ok(())
}

/// A value over a bar: whole numbers for large values, else 3 significant
/// digits.
fn bar_label(v: f64) -> String {
    if v == 0.0 {
        "0".to_string()
    } else if v.abs() >= 100.0 {
        format!("{v:.0}")
    } else if v.abs() >= 1.0 {
        format!("{v:.1}")
    } else {
        format!("{v:.3}")
    }
}

/// The chart as SVG text.
pub fn bar_chart(c: &BarChart) -> Result<String> {
    check(c)?;
    let n = c.categories.len();
    let k = c.series.len();
    let values = c.series.iter().flat_map(|s| s.values.iter().copied());
    let (lo, hi) = values.fold((0.0f64, 0.0f64), |(l, h), v| (l.min(v), h.max(v)));
    let span = (hi - lo).max(1e-9);
    let group = 0.8;
    let bar_w = group / k as f64;
    // Headroom above the bars for their values and the legend.
    let (y0, y1) = (
        if lo < 0.0 { lo - 0.08 * span } else { 0.0 },
        hi + 0.22 * span,
    );
    // The x axis counts thousandths of a category (integer coordinates,
    // whose axes take custom key points), category i spanning i·S..(i+1)·S.
    const S: i32 = 1000;
    let centres: Vec<i32> = (0..n as i32).map(|i| i * S + S / 2).collect();
    let label_of = |x: &i32| -> String {
        let i = x.div_euclid(S);
        if x.rem_euclid(S) == S / 2 && i >= 0 && (i as usize) < n {
            c.categories[i as usize].clone()
        } else {
            String::new()
        }
    };
    let pos = |i: usize, j: f64| -> i32 {
        let g = (1.0 - group) / 2.0 + j * bar_w;
        i as i32 * S + (g * S as f64).round() as i32
    };
    let y_fmt = |y: &f64| format!("{y:.0}");
    let label_bars = n * k <= MAX_LABELLED_BARS;

    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (c.width, c.height)).into_drawing_area();
        root.fill(&WHITE).map_err(plot_err)?;
        let mut chart = ChartBuilder::on(&root)
            .caption(&c.title, ("sans-serif", 22))
            .margin(12)
            .x_label_area_size(40)
            .y_label_area_size(72)
            .build_cartesian_2d((0..n as i32 * S).with_key_points(centres), y0..y1)
            .map_err(plot_err)?;
        chart
            .configure_mesh()
            .disable_x_mesh()
            .light_line_style(TRANSPARENT)
            .x_label_formatter(&label_of)
            .y_label_formatter(&y_fmt)
            .y_desc(c.y_label.as_str())
            .draw()
            .map_err(plot_err)?;
        for (j, s) in c.series.iter().enumerate() {
            let col = COLORS[j];
            let bars = s.values.iter().enumerate().map(move |(i, &v)| {
                Rectangle::new(
                    [(pos(i, j as f64), 0.0), (pos(i, j as f64 + 0.92), v)],
                    col.filled(),
                )
            });
            chart
                .draw_series(bars)
                .map_err(plot_err)?
                .label(s.name.as_str())
                .legend(move |(x, y)| Rectangle::new([(x, y - 5), (x + 12, y + 5)], col.filled()));
            if label_bars {
                let style = ("sans-serif", 12).into_font().color(&BLACK).pos(
                    plotters::style::text_anchor::Pos::new(
                        plotters::style::text_anchor::HPos::Center,
                        plotters::style::text_anchor::VPos::Bottom,
                    ),
                );
                let texts = s.values.iter().enumerate().map(|(i, &v)| {
                    Text::new(
                        bar_label(v),
                        (pos(i, j as f64 + 0.46), v.max(0.0)),
                        style.clone(),
                    )
                });
                chart.draw_series(texts).map_err(plot_err)?;
            }
        }
        chart
            .configure_series_labels()
            .background_style(WHITE.mix(0.85))
            .border_style(BLACK)
            .position(SeriesLabelPosition::UpperRight)
            .draw()
            .map_err(plot_err)?;
        root.present().map_err(plot_err)?;
    }
    Ok(svg)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn chart() -> BarChart {
        BarChart {
            title: "Pure alcohol per tank".into(),
            categories: vec!["T01".into(), "T02".into()],
            series: vec![
                BarSeries {
                    name: "LPA".into(),
                    values: vec![12.5, 1480.0],
                },
                BarSeries {
                    name: "water".into(),
                    values: vec![0.0, 210.0],
                },
            ],
            y_label: "litres".into(),
            width: 800,
            height: 500,
        }
    }

    #[test]
    fn draws_every_category_series_and_value() {
        let svg = bar_chart(&chart()).expect("chart");
        assert!(svg.starts_with("<svg"));
        for text in [
            "T01",
            "T02",
            "LPA",
            "water",
            "1480",
            "12.5",
            "Pure alcohol per tank",
        ] {
            assert!(svg.contains(text), "missing {text}");
        }
    }

    #[test]
    fn refuses_bad_input() {
        let mut c = chart();
        c.series[1].values.pop();
        assert!(bar_chart(&c)
            .unwrap_err()
            .to_string()
            .contains("has 1 values for 2 categories"));
        let mut c = chart();
        c.series[0].values[1] = f64::NAN;
        assert!(bar_chart(&c).unwrap_err().to_string().contains("value 2"));
        let mut c = chart();
        c.categories.clear();
        c.series.clear();
        assert!(bar_chart(&c).is_err());
        let mut c = chart();
        c.width = 10;
        assert!(bar_chart(&c).is_err());
    }
}
