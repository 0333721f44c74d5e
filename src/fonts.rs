//! The one font every chart, scene drawing and replay animation uses, compiled into the binary so text
//! renders without the system's font libraries (no fontconfig, no freetype): DejaVu Sans, free under
//! the Bitstream Vera licence with public-domain DejaVu changes (assets/fonts/DejaVuSans-LICENSE.txt).

use plotters::style::FontStyle;
use std::sync::Once;

/// The font file, embedded at build time.
pub const SANS_TTF: &[u8] = include_bytes!("../assets/fonts/DejaVuSans.ttf");

/// Family name the drawing code asks for.
pub const FAMILY: &str = "sans-serif";

static REGISTER: Once = Once::new();

/// Register the embedded font under [`FAMILY`] for every style (bold and italic fall back to the
/// regular face). Idempotent and cheap after the first call; every drawing entry point calls it.
pub fn register() {
    REGISTER.call_once(|| {
        for style in [
            FontStyle::Normal,
            FontStyle::Bold,
            FontStyle::Italic,
            FontStyle::Oblique,
        ] {
            if plotters::style::register_font(FAMILY, style, SANS_TTF).is_err() {
                // The file is part of the source tree; a parse failure is a build defect.
                panic!("embedded font assets/fonts/DejaVuSans.ttf is not a valid TrueType file");
            }
        }
    });
}

#[cfg(test)]
mod tests {
    use super::*;
    use plotters::prelude::*;

    #[test]
    fn embedded_font_measures_text_like_its_own_metrics() {
        register();
        // DejaVu Sans advance widths from the font's own `hmtx` table (units per em 2048, `head`):
        // 'i' = 569, 'M' = 1767, read from the file with a 30-line parser of the `cmap` format 4 and
        // `hmtx` tables written to the OpenType specification (Microsoft, "OpenType Specification
        // 1.9", cmap/hmtx chapters). Widths scale linearly with size, so "MMMM" is 1767/569 = 3.105x
        // as wide as "iiii" (pixel rounding allows a few percent).
        let font = (FAMILY, 40.0).into_font();
        let (wi, _) = font.box_size("iiii").expect("layout");
        let (wm, _) = font.box_size("MMMM").expect("layout");
        assert!(wi > 0 && wm > 0);
        let ratio = wm as f64 / wi as f64;
        assert!((3.0..3.2).contains(&ratio), "M/i width ratio {ratio}");
    }
}
