//! The RGB pixel buffer that plotters draws into, and its PNG file.

use std::path::Path;

use crate::PlotError;

/// Writes an 8-bit RGB buffer of `width * height * 3` bytes, rows top to bottom, as PNG.
///
/// The file is encoded in memory and written in one call, so that every failure of the
/// file system (including one that a buffered writer would only meet when dropped) is
/// reported as [`PlotError::Io`].
pub(crate) fn write_png(path: &Path, width: u32, height: u32, rgb: &[u8]) -> Result<(), PlotError> {
    let mut bytes = Vec::with_capacity(rgb.len() / 4);
    {
        let mut encoder = png::Encoder::new(&mut bytes, width, height);
        encoder.set_color(png::ColorType::Rgb);
        encoder.set_depth(png::BitDepth::Eight);
        let mut writer = encoder.write_header().map_err(PlotError::render)?;
        writer.write_image_data(rgb).map_err(PlotError::render)?;
        writer.finish().map_err(PlotError::render)?;
    }
    std::fs::write(path, bytes).map_err(|source| PlotError::Io { path: path.to_path_buf(), source })
}

use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::font::FAMILY;

/// The drawing area of a whole figure.
pub(crate) type Area<'a> = DrawingArea<BitMapBackend<'a>, Shift>;

/// Figures are drawn at this multiple of their final size and then averaged down, so lines
/// and marker edges come out anti-aliased (plotters' bitmap back end draws hard edges).
pub(crate) const SUPERSAMPLE: u32 = 2;

/// The largest figure drawn, in final pixels (about 4600 x 3600); the drawing itself holds
/// `SUPERSAMPLE^2` times as many, three bytes each.
pub(crate) const MAX_PIXELS: u64 = 16_000_000;

/// A length of `v` final pixels in drawing pixels.
pub(crate) fn px(v: u32) -> u32 {
    v * SUPERSAMPLE
}

/// A font size of `v` final pixels in drawing pixels.
pub(crate) fn pt(v: f64) -> f64 {
    v * SUPERSAMPLE as f64
}

/// A text style of the embedded family, `size` in final pixels.
pub(crate) fn text(size: f64) -> TextStyle<'static> {
    (FAMILY, pt(size)).into_font().color(&BLACK)
}

/// Draws a figure of `width x height` final pixels with `draw` and writes it to `path` as PNG.
pub(crate) fn render_png(
    path: &Path,
    width: u32,
    height: u32,
    draw: impl FnOnce(&Area) -> Result<(), PlotError>,
) -> Result<(), PlotError> {
    if width as u64 * height as u64 > MAX_PIXELS {
        return Err(PlotError::InvalidData {
            what: format!(
                "a figure of {width} x {height} pixels is larger than the limit of {MAX_PIXELS} pixels"
            ),
        });
    }
    crate::font::ensure_fonts()?;
    let (big_w, big_h) = (px(width), px(height));
    let mut big = vec![255u8; big_w as usize * big_h as usize * 3];
    {
        let root = BitMapBackend::with_buffer(&mut big, (big_w, big_h)).into_drawing_area();
        root.fill(&WHITE).map_err(PlotError::render)?;
        draw(&root)?;
        root.present().map_err(PlotError::render)?;
    }
    write_png(path, width, height, &downsample(&big, width, height))
}

/// Averages each `SUPERSAMPLE x SUPERSAMPLE` block of the drawing into one final pixel.
fn downsample(big: &[u8], width: u32, height: u32) -> Vec<u8> {
    let s = SUPERSAMPLE as usize;
    let (w, h) = (width as usize, height as usize);
    let big_row = w * s * 3;
    let mut out = vec![0u8; w * h * 3];
    for y in 0..h {
        for x in 0..w {
            for c in 0..3 {
                let mut sum = 0u32;
                for dy in 0..s {
                    for dx in 0..s {
                        sum += big[(y * s + dy) * big_row + (x * s + dx) * 3 + c] as u32;
                    }
                }
                out[(y * w + x) * 3 + c] = ((sum + (s * s / 2) as u32) / (s * s) as u32) as u8;
            }
        }
    }
    out
}

/// The largest font size, at most `size` final pixels, at which `label` fits `max_width`
/// drawing pixels, so that long titles shrink instead of running off the figure.
pub(crate) fn fitted_text(
    area: &Area,
    label: &str,
    size: f64,
    max_width: u32,
) -> Result<TextStyle<'static>, PlotError> {
    let mut size = size;
    loop {
        let style = text(size);
        let (w, _) = area.estimate_text_size(label, &style).map_err(PlotError::render)?;
        if w <= max_width || size <= 9.0 {
            return Ok(style);
        }
        size -= 1.0;
    }
}

/// Tick marks are this long, final pixels; plotters leaves twice this between axis and label.
pub(crate) const TICK: u32 = 5;
/// Tick labels' font size, final pixels.
pub(crate) const TICK_FONT: f64 = 14.0;
/// Axis descriptions' font size, final pixels.
pub(crate) const DESC_FONT: f64 = 16.0;

/// The width (drawing pixels) of a left label area that holds `labels` right-aligned next to
/// the axis and a rotated axis description at its outer edge, with a small gap between, so
/// the description sits close to the numbers whatever their length.
pub(crate) fn y_label_area_width(labels: &[String]) -> Result<u32, PlotError> {
    crate::font::ensure_fonts()?;
    let style = text(TICK_FONT);
    let mut widest = 0;
    for label in labels {
        widest = widest.max(style.font.box_size(label).map_err(PlotError::render)?.0);
    }
    Ok(widest + px(2 * TICK + 10) + pt(DESC_FONT * 1.25) as u32)
}

/// Draws `label` centred in `area` (a title band), shrunk to fit its width.
pub(crate) fn draw_centred_title(area: &Area, label: &str, size: f64) -> Result<(), PlotError> {
    if label.trim().is_empty() {
        return Ok(());
    }
    let (w, h) = area.dim_in_pixel();
    let style =
        fitted_text(area, label, size, w.saturating_sub(px(24)))?.pos(Pos::new(HPos::Center, VPos::Center));
    area.draw_text(label, &style, ((w / 2) as i32, (h / 2) as i32)).map_err(PlotError::render)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn downsample_averages_blocks() {
        let (w, h) = (2u32, 1u32);
        let s = SUPERSAMPLE as usize;
        let mut big = vec![0u8; w as usize * s * h as usize * s * 3];
        // Left output pixel: all white; right output pixel: half white, half black.
        for y in 0..s {
            for x in 0..(w as usize * s) {
                let white = x < s || y % 2 == 0;
                let v = if white { 255 } else { 0 };
                for c in 0..3 {
                    big[(y * w as usize * s + x) * 3 + c] = v;
                }
            }
        }
        let out = downsample(&big, w, h);
        assert_eq!(&out[0..3], &[255, 255, 255]);
        assert_eq!(&out[3..6], &[128, 128, 128]);
    }
}
