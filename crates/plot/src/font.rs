//! Fonts compiled into the binary.
//!
//! Plotters' `ab_glyph` text back end looks fonts up only in its own table, never on the
//! system, so a bare machine without fontconfig still draws text once the DejaVu Sans faces
//! are registered under the family name every style in this crate asks for.

use std::sync::OnceLock;

use plotters::style::{register_font, FontStyle};

use crate::PlotError;

/// The only font family that exists for plotters in this crate.
pub(crate) const FAMILY: &str = "sans-serif";

/// Registers DejaVu Sans (regular, bold, oblique) as [`FAMILY`], once per process.
pub(crate) fn ensure_fonts() -> Result<(), PlotError> {
    static REGISTERED: OnceLock<Result<(), String>> = OnceLock::new();
    REGISTERED
        .get_or_init(|| {
            let faces: [(FontStyle, &'static [u8]); 3] = [
                (FontStyle::Normal, dejavu::sans::regular()),
                (FontStyle::Bold, dejavu::sans::bold()),
                (FontStyle::Oblique, dejavu::sans::oblique()),
            ];
            for (style, bytes) in faces {
                register_font(FAMILY, style, bytes).map_err(|_| {
                    format!("the embedded DejaVu Sans {} face is not a valid font", style.as_str())
                })?;
            }
            Ok(())
        })
        .clone()
        .map_err(PlotError::Render)
}
