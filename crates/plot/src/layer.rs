//! Top view of one layer of spins.

use std::path::Path;

use plotters::prelude::*;

use crate::axis::{finite_extent, TickFormat};
use crate::colour::cool_warm;
use crate::raster::{
    draw_centred_title, px, render_png, text, y_label_area_width, Area, DESC_FONT, SUPERSAMPLE, TICK,
    TICK_FONT,
};
use crate::PlotError;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// The spins of one layer seen from above (+z towards the viewer).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct LayerView {
    /// Shown above the map.
    pub title: String,
    /// In-plane site positions `(x, y)`, Å.
    pub positions: Vec<[f64; 2]>,
    /// Unit spins `(S_x, S_y, S_z)`, one per position.
    pub spins: Vec<[f64; 3]>,
    /// Nearest-neighbour distance, Å; sets the marker size.
    pub spacing: f64,
}

/// Longest side of the map in the final image, pixels.
const MAP_MAX: f64 = 640.0;
/// Shortest side of the map, pixels, so a thin strip of sites stays readable.
const MAP_MIN: f64 = 220.0;
const TITLE_HEIGHT: u32 = 50;
const MARGIN: u32 = 10;
const X_LABEL_AREA: u32 = 54;
const MARGIN_RIGHT: u32 = 18;
const TICKS: usize = 8;
/// Sites at least this far apart (drawing pixels) are drawn as discs, closer ones as tiles.
const DISC_MIN: f64 = 14.0;
/// Room above the colour bar for its label, final pixels.
const BAR_LABEL: u32 = 30;
/// Width of the column that holds the colour bar, pixels.
const BAR_COLUMN: u32 = 96;
/// About this many arrows are drawn across the longer side of a large layer.
const ARROWS_ACROSS: f64 = 40.0;
const ARROW_COLOUR: RGBColor = RGBColor(25, 25, 25);

/// Top view of one layer: each site a filled marker coloured by `S_z` on Moreland's smooth
/// cool-warm map (blue -1, light grey 0, red +1; see [`cool_warm`]), the in-plane component
/// `(S_x, S_y)` as a short dark arrow centred on the site, a colour bar labelled "m_z" from
/// -1 to 1, equal scales on both axes, axes in Å.
///
/// Layers wider than 40 sites get arrows on a subsample only, about 40 across, so they
/// stay readable. Sites whose position is not finite are skipped; a spin that is not finite
/// is drawn grey without an arrow.
///
/// Errors: [`PlotError::EmptyData`] when no site has a finite position,
/// [`PlotError::InvalidData`] when `positions` and `spins` differ in length or `spacing` is not
/// a positive number, [`PlotError::Io`] when the file cannot be written.
pub fn layer_png(path: &Path, view: &LayerView) -> Result<(), PlotError> {
    if view.positions.len() != view.spins.len() {
        return Err(PlotError::InvalidData {
            what: format!(
                "layer '{}' has {} positions but {} spins",
                view.title,
                view.positions.len(),
                view.spins.len()
            ),
        });
    }
    if !(view.spacing.is_finite() && view.spacing > 0.0) {
        return Err(PlotError::InvalidData {
            what: format!(
                "layer '{}' has spacing {} Å; it must be a positive length",
                view.title, view.spacing
            ),
        });
    }
    let sites: Vec<usize> =
        (0..view.positions.len()).filter(|&i| view.positions[i].iter().all(|c| c.is_finite())).collect();
    let (Some(ex), Some(ey)) = (
        finite_extent(sites.iter().map(|&i| view.positions[i][0])),
        finite_extent(sites.iter().map(|&i| view.positions[i][1])),
    ) else {
        return Err(PlotError::EmptyData {
            what: format!("layer '{}' has no site with a finite position", view.title),
        });
    };
    let geometry = Geometry::new(ex, ey, view.spacing);
    let drawable = [geometry.x.0, geometry.x.1, geometry.y.0, geometry.y.1, geometry.scale]
        .iter()
        .all(|v| v.is_finite())
        && geometry.scale > 0.0;
    if !drawable {
        return Err(PlotError::InvalidData {
            what: format!("layer '{}' spans a range too wide to draw in f64", view.title),
        });
    }
    // The label area is in drawing pixels; the layout below is in final pixels.
    let y_label_area =
        y_label_area_width(&TickFormat::new(geometry.y, TICKS).labels())?.div_ceil(SUPERSAMPLE);
    let width = MARGIN + y_label_area + geometry.pixels.0 + MARGIN_RIGHT + BAR_COLUMN;
    let height = TITLE_HEIGHT + MARGIN + geometry.pixels.1 + X_LABEL_AREA + MARGIN;
    render_png(path, width, height, |root| {
        let (band, body) = root.split_vertically(px(TITLE_HEIGHT));
        draw_centred_title(&band, &view.title, 22.0)?;
        let (map, bar) = body.split_horizontally(px(width - BAR_COLUMN));
        draw_map(&map, view, &sites, &geometry, y_label_area)?;
        draw_colour_bar(&bar)
    })
}

/// Where the map sits: data ranges with equal scales and the size of the map in final pixels.
struct Geometry {
    x: (f64, f64),
    y: (f64, f64),
    pixels: (u32, u32),
    /// Final pixels per Å, the same along x and y.
    scale: f64,
}

impl Geometry {
    fn new(ex: (f64, f64), ey: (f64, f64), spacing: f64) -> Geometry {
        // One spacing of margin keeps the edge markers whole.
        let (wide, high) = (ex.1 - ex.0 + 2.0 * spacing, ey.1 - ey.0 + 2.0 * spacing);
        let (pw, ph) = if wide >= high {
            (MAP_MAX, (MAP_MAX * high / wide).clamp(MAP_MIN, MAP_MAX))
        } else {
            ((MAP_MAX * wide / high).clamp(MAP_MIN, MAP_MAX), MAP_MAX)
        };
        let (pw, ph) = (pw.round(), ph.round());
        let scale = (pw / wide).min(ph / high);
        let (cx, cy) = ((ex.0 + ex.1) / 2.0, (ey.0 + ey.1) / 2.0);
        let (hx, hy) = (pw / (2.0 * scale), ph / (2.0 * scale));
        Geometry { x: (cx - hx, cx + hx), y: (cy - hy, cy + hy), pixels: (pw as u32, ph as u32), scale }
    }
}

fn draw_map(
    area: &Area,
    view: &LayerView,
    sites: &[usize],
    geometry: &Geometry,
    y_label_area: u32,
) -> Result<(), PlotError> {
    let (x, y) = (geometry.x, geometry.y);
    let mut chart = ChartBuilder::on(area)
        .margin(px(MARGIN))
        .margin_right(px(MARGIN_RIGHT))
        .x_label_area_size(px(X_LABEL_AREA))
        .y_label_area_size(px(y_label_area))
        .build_cartesian_2d(x.0..x.1, y.0..y.1)
        .map_err(PlotError::render)?;
    let (fx, fy) = (TickFormat::new(x, TICKS), TickFormat::new(y, TICKS));
    let (format_x, format_y) = (|v: &f64| fx.format(*v), |v: &f64| fy.format(*v));
    chart
        .configure_mesh()
        .disable_mesh()
        .x_labels(TICKS)
        .y_labels(TICKS)
        .x_label_formatter(&format_x)
        .y_label_formatter(&format_y)
        .x_desc("x (Å)")
        .y_desc("y (Å)")
        .label_style(text(TICK_FONT))
        .axis_desc_style(text(DESC_FONT))
        .axis_style(RGBColor(70, 70, 70))
        .set_all_tick_mark_size(px(TICK))
        .draw()
        .map_err(PlotError::render)?;

    let spacing_px = view.spacing * geometry.scale * SUPERSAMPLE as f64;
    let colour = |i: usize| {
        let s = view.spins[i];
        let [r, g, b] = if s.iter().all(|c| c.is_finite()) { cool_warm(s[2]) } else { [128, 128, 128] };
        RGBColor(r, g, b)
    };
    if spacing_px >= DISC_MIN {
        // Touching discs show the lattice; a thin rim keeps light neighbours apart.
        let radius = (0.5 * spacing_px).round() as i32;
        let rim = RGBColor(150, 150, 150).stroke_width(1);
        chart
            .draw_series(sites.iter().flat_map(|&i| {
                let p = (view.positions[i][0], view.positions[i][1]);
                [Circle::new(p, radius, colour(i).filled()), Circle::new(p, radius, rim)]
            }))
            .map_err(PlotError::render)?;
    } else {
        // Too dense for discs, whose gaps would speckle the map: squares one spacing wide
        // (plus one drawing pixel against seams) tile any lattice into a continuous map.
        let pixel = 1.0 / (geometry.scale * SUPERSAMPLE as f64);
        let half = 0.5 * (view.spacing + pixel).max(2.0 * pixel);
        chart
            .draw_series(sites.iter().map(|&i| {
                let [x, y] = view.positions[i];
                Rectangle::new([(x - half, y - half), (x + half, y + half)], colour(i).filled())
            }))
            .map_err(PlotError::render)?;
    }

    let (arrow_sites, cell) = arrow_subsample(&view.positions, sites, view.spacing);
    let length = 0.8 * cell;
    let width = ((cell * geometry.scale / 12.0).round() as u32).clamp(1, 3) * SUPERSAMPLE;
    let min_length = 3.0 / geometry.scale;
    let arrows = arrow_sites.into_iter().filter_map(|i| {
        let [sx, sy, sz] = view.spins[i];
        if !(sx.is_finite() && sy.is_finite() && sz.is_finite()) {
            return None;
        }
        let (dx, dy) = (sx * length, sy * length);
        let l = dx.hypot(dy);
        if l < min_length {
            return None;
        }
        let [x0, y0] = view.positions[i];
        Some(arrow((x0, y0), (dx, dy), l))
    });
    chart
        .draw_series(arrows.flat_map(|a| {
            [
                PathElement::new(a.shaft, ARROW_COLOUR.stroke_width(width)).into_dyn(),
                Polygon::new(a.head, ARROW_COLOUR.filled()).into_dyn(),
            ]
        }))
        .map_err(PlotError::render)?;
    Ok(())
}

/// A point of the map, Å.
type Point = (f64, f64);

/// An arrow drawn as a shaft (tail to the base of the head) and a triangular head.
struct Arrow {
    shaft: [Point; 2],
    head: [Point; 3],
}

/// The arrow of vector `(dx, dy)` (length `l`, Å) centred on `centre`, so that the site
/// sits under the middle of its arrow whatever the direction.
fn arrow(centre: Point, (dx, dy): Point, l: f64) -> Arrow {
    let (ux, uy) = (dx / l, dy / l);
    let tail = (centre.0 - dx / 2.0, centre.1 - dy / 2.0);
    let tip = (centre.0 + dx / 2.0, centre.1 + dy / 2.0);
    let (head_len, head_half) = (0.38 * l, 0.2 * l);
    let base = (tip.0 - ux * head_len, tip.1 - uy * head_len);
    Arrow {
        shaft: [tail, base],
        head: [
            tip,
            (base.0 - uy * head_half, base.1 + ux * head_half),
            (base.0 + uy * head_half, base.1 - ux * head_half),
        ],
    }
}

/// The sites that get an arrow, and the spacing between arrows (Å).
///
/// A layer at most [`ARROWS_ACROSS`] sites wide gets one on every site. A larger one is cut
/// into square cells of 1/40 of its longer side, and the site nearest each cell's centre
/// carries the arrow, which gives an even, lattice-independent grid of arrows.
fn arrow_subsample(positions: &[[f64; 2]], sites: &[usize], spacing: f64) -> (Vec<usize>, f64) {
    let ex = finite_extent(sites.iter().map(|&i| positions[i][0])).unwrap_or((0.0, 0.0));
    let ey = finite_extent(sites.iter().map(|&i| positions[i][1])).unwrap_or((0.0, 0.0));
    let longest = (ex.1 - ex.0).max(ey.1 - ey.0);
    if longest / spacing <= ARROWS_ACROSS {
        return (sites.to_vec(), spacing);
    }
    let cell = longest / ARROWS_ACROSS;
    let nx = ((ex.1 - ex.0) / cell).floor() as usize + 1;
    let ny = ((ey.1 - ey.0) / cell).floor() as usize + 1;
    let mut best: Vec<Option<(usize, f64)>> = vec![None; nx * ny];
    for &i in sites {
        let (u, v) = ((positions[i][0] - ex.0) / cell, (positions[i][1] - ey.0) / cell);
        let (cx, cy) = ((u.floor() as usize).min(nx - 1), (v.floor() as usize).min(ny - 1));
        let d = (u - cx as f64 - 0.5).powi(2) + (v - cy as f64 - 0.5).powi(2);
        let slot = &mut best[cy * nx + cx];
        if slot.is_none_or(|(_, d_best)| d < d_best) {
            *slot = Some((i, d));
        }
    }
    (best.into_iter().flatten().map(|(i, _)| i).collect(), cell)
}

fn draw_colour_bar(area: &Area) -> Result<(), PlotError> {
    let mut chart = ChartBuilder::on(area)
        .margin_top(px(MARGIN + BAR_LABEL))
        .margin_bottom(px(MARGIN + X_LABEL_AREA))
        .margin_left(px(4))
        .margin_right(px(MARGIN))
        .right_y_label_area_size(px(44))
        .build_cartesian_2d(0.0..1.0, -1.0..1.0)
        .map_err(PlotError::render)?;
    const STEPS: usize = 256;
    chart
        .draw_series((0..STEPS).map(|k| {
            let (v0, v1) = (-1.0 + 2.0 * k as f64 / STEPS as f64, -1.0 + 2.0 * (k + 1) as f64 / STEPS as f64);
            let [r, g, b] = cool_warm((v0 + v1) / 2.0);
            Rectangle::new([(0.0, v0), (1.0, v1)], RGBColor(r, g, b).filled())
        }))
        .map_err(PlotError::render)?;
    chart
        .configure_mesh()
        .disable_mesh()
        .disable_x_axis()
        .y_labels(5)
        .y_label_formatter(&|v| format!("{v:.1}").replace("-0.0", "0.0"))
        .label_style(text(13.0))
        .axis_style(RGBColor(70, 70, 70))
        .set_all_tick_mark_size(px(4))
        .draw()
        .map_err(PlotError::render)?;
    chart
        .draw_series(std::iter::once(Rectangle::new(
            [(0.0, -1.0), (1.0, 1.0)],
            RGBColor(70, 70, 70).stroke_width(px(1)),
        )))
        .map_err(PlotError::render)?;
    // The label sits centred over the bar, in the room left above it.
    let (bar_x, _) = chart.plotting_area().get_pixel_range();
    let (base_x, _) = area.get_base_pixel();
    let centre = ((bar_x.start + bar_x.end) / 2 - base_x, px(MARGIN + BAR_LABEL / 2) as i32);
    area.draw_text("m_z", &text(DESC_FONT).pos(Pos::new(HPos::Center, VPos::Center)), centre)
        .map_err(PlotError::render)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn equal_scales_on_both_axes() {
        let g = Geometry::new((0.0, 100.0), (0.0, 30.0), 2.5);
        let sx = g.pixels.0 as f64 / (g.x.1 - g.x.0);
        let sy = g.pixels.1 as f64 / (g.y.1 - g.y.0);
        assert!((sx - sy).abs() < 1e-9 * sx, "{sx} px/Å along x, {sy} along y");
        assert!(g.x.0 <= -2.5 && g.x.1 >= 102.5 && g.y.0 <= -2.5 && g.y.1 >= 32.5);
    }

    #[test]
    fn small_layers_get_every_arrow_large_ones_about_forty_across() {
        let grid = |n: usize| -> Vec<[f64; 2]> {
            (0..n * n).map(|k| [(k % n) as f64 * 2.0, (k / n) as f64 * 2.0]).collect()
        };
        let small = grid(20);
        let sites: Vec<usize> = (0..small.len()).collect();
        assert_eq!(arrow_subsample(&small, &sites, 2.0).0.len(), 400);

        let large = grid(300);
        let sites: Vec<usize> = (0..large.len()).collect();
        let (chosen, cell) = arrow_subsample(&large, &sites, 2.0);
        assert!((cell - 598.0 / 40.0).abs() < 1e-9);
        // 41 cells along each side (the last one holds the edge row).
        assert!((39 * 39..=41 * 41).contains(&chosen.len()), "{} arrows", chosen.len());
        // No two arrows closer than half a cell, so they never overlap.
        let near = chosen.iter().enumerate().any(|(a, &i)| {
            chosen[a + 1..].iter().any(|&j| {
                let (dx, dy) = (large[i][0] - large[j][0], large[i][1] - large[j][1]);
                dx.hypot(dy) < 0.5 * cell
            })
        });
        assert!(!near);
    }

    #[test]
    fn arrow_is_centred_and_points_along_the_vector() {
        let a = arrow((1.0, 1.0), (2.0, 0.0), 2.0);
        assert_eq!(a.shaft[0], (0.0, 1.0));
        assert_eq!(a.head[0], (2.0, 1.0));
        // The head's back corners sit behind the tip, one on each side of the shaft.
        assert!(a.head[1].0 < 2.0 && a.head[2].0 < 2.0);
        assert!((a.head[1].1 - 1.0) * (a.head[2].1 - 1.0) < 0.0);
        // The shaft ends where the head begins, on the axis of the arrow.
        assert_eq!(a.shaft[1].1, 1.0);
        assert!((a.shaft[1].0 - a.head[1].0).abs() < 1e-12);
    }
}
