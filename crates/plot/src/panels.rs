//! Line plots: panels of curves with error bars, arranged in a grid.

use std::path::Path;

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::axis::{finite_extent, padded_range, TickFormat};
use crate::colour::curve_colour;
use crate::raster::{
    draw_centred_title, fitted_text, px, render_png, text, y_label_area_width, Area, DESC_FONT, TICK,
    TICK_FONT,
};
use crate::PlotError;

/// One data series of a panel.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Curve {
    /// The name shown in the legend (the legend appears when a panel has two curves or more).
    pub label: String,
    /// Abscissae, in whatever unit the panel's `x_label` names.
    pub x: Vec<f64>,
    /// Ordinates, one per abscissa. Points where `x` or `y` is not finite are skipped and
    /// break the line.
    pub y: Vec<f64>,
    /// Symmetric error bars, `y ± err`, one per point; a non-finite or zero entry draws no bar.
    pub err: Option<Vec<f64>>,
}

/// One chart of a figure: a title, axis labels (with units, e.g. `"time (ps)"`) and curves.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Panel {
    /// Shown above the chart.
    pub title: String,
    /// Label of the horizontal axis.
    pub x_label: String,
    /// Label of the vertical axis.
    pub y_label: String,
    /// The series, drawn in the colours of [`crate::OKABE_ITO`], in order.
    pub curves: Vec<Curve>,
}

/// Size of one panel in the final image, pixels.
const PANEL_WIDTH: u32 = 640;
const PANEL_HEIGHT: u32 = 420;
/// Height of the band that holds the figure's title, pixels; kept even without a title so
/// figures of the same grid always have the same size.
const TITLE_HEIGHT: u32 = 56;
const X_TICKS: usize = 8;
const Y_TICKS: usize = 7;
/// Curves with at most this many finite points also get a marker on every point.
const MARKER_LIMIT: usize = 60;

/// A figure of panels in a grid of `columns`, with an overall title, written as PNG.
///
/// The image is `640 * columns` pixels wide and `56 + 420 * rows` high, panels filling the
/// grid row by row; `columns` is clamped to `1..=panels.len()`. A panel without any finite
/// point shows "no finite data"; a figure where no panel has one is
/// [`PlotError::EmptyData`], as is an empty `panels`. Curves whose lengths disagree, or a
/// grid larger than 16 million pixels, are [`PlotError::InvalidData`]; a file that cannot
/// be written is [`PlotError::Io`].
pub fn panels_png(path: &Path, title: &str, panels: &[Panel], columns: usize) -> Result<(), PlotError> {
    if panels.is_empty() {
        return Err(PlotError::EmptyData { what: "the figure has no panels".into() });
    }
    for panel in panels {
        validate(panel)?;
    }
    if panels.iter().all(|p| Extent::of(p).is_none()) {
        return Err(PlotError::EmptyData { what: "no panel has a finite data point".into() });
    }
    let columns = columns.clamp(1, panels.len());
    let rows = panels.len().div_ceil(columns);
    let width = PANEL_WIDTH * columns as u32;
    let height = TITLE_HEIGHT + PANEL_HEIGHT * rows as u32;
    render_png(path, width, height, |root| {
        let (band, body) = root.split_vertically(px(TITLE_HEIGHT));
        draw_centred_title(&band, title, 26.0)?;
        for (panel, area) in panels.iter().zip(body.split_evenly((rows, columns))) {
            draw_panel(&area, panel)?;
        }
        Ok(())
    })
}

fn validate(panel: &Panel) -> Result<(), PlotError> {
    for curve in &panel.curves {
        let bad = |detail: String| PlotError::InvalidData {
            what: format!("curve '{}' of panel '{}': {detail}", curve.label, panel.title),
        };
        if curve.x.len() != curve.y.len() {
            return Err(bad(format!("{} x values but {} y values", curve.x.len(), curve.y.len())));
        }
        if let Some(err) = &curve.err {
            if err.len() != curve.y.len() {
                return Err(bad(format!("{} error bars for {} points", err.len(), curve.y.len())));
            }
        }
    }
    if let Some(e) = Extent::of(panel) {
        let (xr, yr) = (padded_range(e.x.0, e.x.1), padded_range(e.y.0, e.y.1));
        if ![xr.0, xr.1, yr.0, yr.1, xr.1 - xr.0, yr.1 - yr.0].iter().all(|v| v.is_finite()) {
            return Err(PlotError::InvalidData {
                what: format!("panel '{}' spans a range too wide to draw in f64", panel.title),
            });
        }
    }
    Ok(())
}

/// The finite points of a curve: `(x, y, half-width of the error bar)`.
fn finite_points(curve: &Curve) -> impl Iterator<Item = (f64, f64, f64)> + '_ {
    (0..curve.x.len()).filter(|&i| curve.x[i].is_finite() && curve.y[i].is_finite()).map(|i| {
        let e = curve.err.as_ref().map_or(0.0, |e| e[i].abs());
        (curve.x[i], curve.y[i], if e.is_finite() { e } else { 0.0 })
    })
}

/// The data ranges of a panel, error bars included, before padding.
struct Extent {
    x: (f64, f64),
    y: (f64, f64),
}

impl Extent {
    fn of(panel: &Panel) -> Option<Extent> {
        let points = || panel.curves.iter().flat_map(finite_points);
        let x = finite_extent(points().map(|p| p.0))?;
        let y = finite_extent(points().flat_map(|(_, y, e)| [y - e, y + e]))?;
        Some(Extent { x, y })
    }
}

fn draw_panel(area: &Area, panel: &Panel) -> Result<(), PlotError> {
    let (area_w, _) = area.dim_in_pixel();
    let extent = Extent::of(panel);
    let ranges = extent.as_ref().map(|e| (padded_range(e.x.0, e.x.1), padded_range(e.y.0, e.y.1)));
    let formats = ranges.map(|(xr, yr)| (TickFormat::new(xr, X_TICKS), TickFormat::new(yr, Y_TICKS)));
    let y_area = match &formats {
        Some((_, fy)) => y_label_area_width(&fy.labels())?,
        None => px(40),
    };
    let mut builder = ChartBuilder::on(area);
    builder.margin(px(10)).margin_right(px(24)).x_label_area_size(px(52)).y_label_area_size(y_area);
    if !panel.title.trim().is_empty() {
        builder.caption(&panel.title, fitted_text(area, &panel.title, 19.0, area_w.saturating_sub(px(30)))?);
    }
    let (Some((xr, yr)), Some((fx, fy))) = (ranges, formats) else {
        let mut chart = builder.build_cartesian_2d(0.0..1.0, 0.0..1.0).map_err(PlotError::render)?;
        let note = text(16.0).color(&RGBColor(110, 110, 110)).pos(Pos::new(HPos::Center, VPos::Center));
        chart
            .draw_series(std::iter::once(Text::new("no finite data", (0.5, 0.5), note)))
            .map_err(PlotError::render)?;
        return Ok(());
    };
    let mut chart = builder.build_cartesian_2d(xr.0..xr.1, yr.0..yr.1).map_err(PlotError::render)?;
    let (format_x, format_y) = (|v: &f64| fx.format(*v), |v: &f64| fy.format(*v));
    chart
        .configure_mesh()
        .x_labels(X_TICKS)
        .y_labels(Y_TICKS)
        .x_label_formatter(&format_x)
        .y_label_formatter(&format_y)
        .x_desc(panel.x_label.as_str())
        .y_desc(panel.y_label.as_str())
        .label_style(text(TICK_FONT))
        .axis_desc_style(text(DESC_FONT))
        .bold_line_style(RGBColor(226, 226, 226))
        .light_line_style(TRANSPARENT)
        .axis_style(RGBColor(70, 70, 70))
        .set_all_tick_mark_size(px(TICK))
        .draw()
        .map_err(PlotError::render)?;

    let cap = 0.006 * (xr.1 - xr.0);
    let with_legend = panel.curves.len() > 1;
    for (index, curve) in panel.curves.iter().enumerate() {
        let colour = curve_colour(index);
        let points: Vec<(f64, f64, f64)> = finite_points(curve).collect();
        // Error bars first, so the line and markers stay on top of them.
        let bars = points.iter().filter(|p| p.2 > 0.0).map(|&(x, y, e)| {
            PathElement::new(
                vec![
                    (x - cap, y - e),
                    (x + cap, y - e),
                    (x, y - e),
                    (x, y + e),
                    (x - cap, y + e),
                    (x + cap, y + e),
                ],
                colour.stroke_width(px(1)),
            )
        });
        chart.draw_series(bars).map_err(PlotError::render)?;
        for run in finite_runs(curve) {
            chart.draw_series(LineSeries::new(run, colour.stroke_width(px(2)))).map_err(PlotError::render)?;
        }
        // A point between two gaps has no line; it gets a marker whatever the density.
        let markers: Vec<_> = if points.len() <= MARKER_LIMIT {
            points.iter().map(|&(x, y, _)| Circle::new((x, y), px(3), colour.filled())).collect()
        } else {
            isolated_points(curve).into_iter().map(|p| Circle::new(p, px(3), colour.filled())).collect()
        };
        let drawn = chart.draw_series(markers).map_err(PlotError::render)?;
        if with_legend {
            drawn.label(curve.label.as_str()).legend(move |(x, y)| {
                PathElement::new(vec![(x, y), (x + px(24) as i32, y)], colour.stroke_width(px(2)))
            });
        }
    }
    if with_legend {
        chart
            .configure_series_labels()
            .position(emptiest_corner(panel, xr, yr))
            .margin(px(8))
            .legend_area_size(px(30))
            .label_font(text(14.0))
            .background_style(WHITE.mix(0.85))
            .border_style(RGBColor(170, 170, 170))
            .draw()
            .map_err(PlotError::render)?;
    }
    Ok(())
}

/// The maximal runs of consecutive finite points; a non-finite point breaks the line.
fn finite_runs(curve: &Curve) -> Vec<Vec<(f64, f64)>> {
    let mut runs = Vec::new();
    let mut current = Vec::new();
    for (&x, &y) in curve.x.iter().zip(&curve.y) {
        if x.is_finite() && y.is_finite() {
            current.push((x, y));
        } else if !current.is_empty() {
            runs.push(std::mem::take(&mut current));
        }
    }
    runs.push(current);
    runs.retain(|run| run.len() > 1);
    runs
}

fn isolated_points(curve: &Curve) -> Vec<(f64, f64)> {
    let finite = |i: usize| curve.x[i].is_finite() && curve.y[i].is_finite();
    let n = curve.x.len();
    (0..n)
        .filter(|&i| finite(i) && (i == 0 || !finite(i - 1)) && (i + 1 == n || !finite(i + 1)))
        .map(|i| (curve.x[i], curve.y[i]))
        .collect()
}

/// The corner of the chart with the fewest data points, where the legend hides least.
fn emptiest_corner(panel: &Panel, xr: (f64, f64), yr: (f64, f64)) -> SeriesLabelPosition {
    use SeriesLabelPosition::{LowerLeft, LowerRight, UpperLeft, UpperRight};
    let mut counts = [0usize; 4];
    for (x, y, _) in panel.curves.iter().flat_map(finite_points) {
        let u = (x - xr.0) / (xr.1 - xr.0);
        let v = (y - yr.0) / (yr.1 - yr.0);
        let (right, left, top, bottom) = (u > 0.55, u < 0.45, v > 0.6, v < 0.4);
        for (k, inside) in
            [top && right, top && left, bottom && right, bottom && left].into_iter().enumerate()
        {
            counts[k] += inside as usize;
        }
    }
    let corners = [UpperRight, UpperLeft, LowerRight, LowerLeft];
    let best = (0..4).min_by_key(|&k| counts[k]).unwrap_or(0);
    corners.into_iter().nth(best).unwrap_or(UpperRight)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn curve(x: Vec<f64>, y: Vec<f64>) -> Curve {
        Curve { label: "c".into(), x, y, err: None }
    }

    #[test]
    fn nan_points_break_the_line() {
        let c =
            curve(vec![0.0, 1.0, 2.0, 3.0, 4.0, 5.0, 6.0], vec![0.0, 1.0, f64::NAN, 3.0, f64::NAN, 5.0, 6.0]);
        assert_eq!(finite_runs(&c), vec![vec![(0.0, 0.0), (1.0, 1.0)], vec![(5.0, 5.0), (6.0, 6.0)]]);
        assert_eq!(isolated_points(&c), vec![(3.0, 3.0)]);
    }

    #[test]
    fn extent_includes_error_bars_and_skips_nan() {
        let panel = Panel {
            curves: vec![Curve {
                label: "m".into(),
                x: vec![0.0, 1.0, f64::NAN],
                y: vec![1.0, 2.0, 100.0],
                err: Some(vec![0.5, f64::NAN, 0.0]),
            }],
            ..Panel::default()
        };
        let e = Extent::of(&panel).expect("two finite points");
        assert_eq!((e.x, e.y), ((0.0, 1.0), (0.5, 2.0)));
    }

    #[test]
    fn legend_avoids_the_data() {
        // A rising line fills the lower-left and upper-right corners.
        let panel = Panel {
            curves: vec![curve((0..50).map(f64::from).collect(), (0..50).map(f64::from).collect())],
            ..Panel::default()
        };
        let pos = emptiest_corner(&panel, (-2.5, 51.5), (-2.5, 51.5));
        assert!(matches!(pos, SeriesLabelPosition::UpperLeft | SeriesLabelPosition::LowerRight));
    }
}
