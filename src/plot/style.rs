//! Colours, line styles and font sizes shared by every icefold figure.
//!
//! Series colours are samples of viridis (a perceptually uniform map whose lightness rises
//! monotonically, so neighbouring palette entries stay apart when printed in greyscale);
//! further distinction comes from dashes and marker shapes, chosen by the caller through
//! [`Stroke`](super::Stroke). All lengths here are CSS pixels of the final picture (1x); the
//! drawing code multiplies them by [`OVERSAMPLE`] before handing them to plotters.

use std::sync::OnceLock;

use plotters::style::colors::colormaps::{ColorMap, ViridisRGB};
use plotters::style::{Color, FontDesc, FontFamily, FontStyle, RGBAColor, RGBColor};

use super::PlotError;

/// Font family written into the SVG and registered with plotters: the embedded DejaVu Sans,
/// with a generic fallback for viewers that lack it.
pub const FONT_FAMILY: &str = "DejaVu Sans, sans-serif";

/// Everything is drawn this many times larger than the requested picture and scaled back by
/// the SVG `viewBox`, because plotters' SVG backend writes whole-unit coordinates and line
/// widths; at 10x, positions are exact to 0.1 px and widths can be fractional.
pub const OVERSAMPLE: f64 = 10.0;

/// Viridis positions of the series palette: dark purple, blue, teal-green, light green.
/// Lightness rises with the index, so the four stay distinct in greyscale; the light end of
/// viridis (yellow) is left out because it is hard to see on white.
const SERIES_T: [f64; 4] = [0.0, 0.36, 0.62, 0.84];

/// Colour of a palette entry (`index` wraps around the palette).
pub fn series_colour(index: usize) -> RGBColor {
    viridis(SERIES_T[index % SERIES_T.len()])
}

/// Viridis at `t` in [0, 1] (clamped; NaN gives the low end).
pub fn viridis(t: f64) -> RGBColor {
    let t = if t.is_nan() { 0.0 } else { t.clamp(0.0, 1.0) };
    ColorMap::<RGBColor, f64>::get_color(&ViridisRGB, t)
}

/// Core colour and casing colour of an overlay line drawn on a heat map: even indices are
/// white on a black casing, odd ones black on a white casing, so every overlay shows on both
/// the dark and the light end of viridis.
pub fn overlay_colours(index: usize) -> (RGBColor, RGBColor) {
    if index % 2 == 0 {
        (WHITE, BLACK)
    } else {
        (BLACK, WHITE)
    }
}

/// Pure white.
pub const WHITE: RGBColor = RGBColor(255, 255, 255);
/// Near black used for text, axes and frames.
pub const BLACK: RGBColor = RGBColor(20, 20, 20);
/// Light grey of grid lines.
pub const GRID: RGBColor = RGBColor(221, 221, 221);
/// Light grey of shaded x spans (e.g. ice-covered latitudes).
pub const SHADE: RGBColor = RGBColor(228, 232, 238);
/// Mid grey of legend frames.
pub const FRAME_GREY: RGBColor = RGBColor(140, 140, 140);

/// Opacity of shaded bands (e.g. an ensemble's 5-95 % range).
pub const BAND_OPACITY: f64 = 0.25;

/// A pale tint of `c` (60 % of the way to white), for thin background lines; as light in
/// greyscale as it looks in colour.
pub fn faint(c: RGBColor) -> RGBColor {
    let mix = |v: u8| (f64::from(v) + 0.6 * (255.0 - f64::from(v))).round() as u8;
    RGBColor(mix(c.0), mix(c.1), mix(c.2))
}

/// `c` with opacity `alpha`.
pub fn with_alpha(c: RGBColor, alpha: f64) -> RGBAColor {
    c.mix(alpha)
}

/// Font sizes and line metrics for one picture, in 1x pixels. Font sizes are plotters sizes
/// (plotters writes `font-size = size / 1.24` into the SVG, so the em is `size / 1.24`).
#[derive(Debug, Clone, Copy)]
pub struct Sizes {
    /// Figure title (bold).
    pub title: f64,
    /// Panel title.
    pub panel_title: f64,
    /// Axis names.
    pub axis_label: f64,
    /// Tick labels.
    pub tick: f64,
    /// Legend entries.
    pub legend: f64,
    /// Marker and contour labels.
    pub annotation: f64,
    /// Series line width.
    pub line: f64,
    /// Axis frame and tick width.
    pub frame: f64,
    /// Tick length (outwards).
    pub tick_len: f64,
    /// Point marker radius.
    pub marker: f64,
    /// Width of the contrasting halo on each side of lines drawn over a heat map.
    pub halo: f64,
    /// Dash length and gap of dashed series.
    pub dash: (f64, f64),
    /// Outer margin of the picture.
    pub margin: f64,
    /// Small gap between a text and what it labels.
    pub gap: f64,
}

impl Sizes {
    /// Sizes for a picture of `width_px` x `height_px`: chosen for 1200 x 800 and scaled with
    /// the square root of the area (clamped to 0.5x .. 4x), so text keeps its share of the page.
    pub fn for_picture(width_px: u32, height_px: u32) -> Sizes {
        let s = ((f64::from(width_px) * f64::from(height_px)) / (1200.0 * 800.0))
            .sqrt()
            .clamp(0.5, 4.0);
        Sizes {
            title: 25.0 * s,
            panel_title: 20.0 * s,
            axis_label: 20.0 * s,
            tick: 17.0 * s,
            legend: 17.0 * s,
            annotation: 16.0 * s,
            line: 2.2 * s,
            frame: 1.2 * s,
            tick_len: 6.0 * s,
            marker: 4.5 * s,
            halo: 1.0 * s,
            dash: (10.0 * s, 6.0 * s),
            margin: 14.0 * s,
            gap: 6.0 * s,
        }
    }
}

/// The em (SVG font size) of a plotters font size.
pub fn em(size: f64) -> f64 {
    size / 1.24
}

static FONTS: OnceLock<Result<(), String>> = OnceLock::new();

/// Registers the embedded DejaVu Sans (regular and bold) with plotters, once per process, so
/// text widths are measured with the font the PNG is rendered with.
pub fn ensure_fonts() -> Result<(), PlotError> {
    FONTS
        .get_or_init(|| {
            plotters::style::register_font(FONT_FAMILY, FontStyle::Normal, dejavu::sans::regular())
                .map_err(|_| "DejaVu Sans regular".to_string())?;
            plotters::style::register_font(FONT_FAMILY, FontStyle::Bold, dejavu::sans::bold())
                .map_err(|_| "DejaVu Sans bold".to_string())
        })
        .clone()
        .map_err(PlotError::Font)
}

/// Font description at `size` (1x pixels, scaled by [`OVERSAMPLE`] here).
pub fn font(size: f64, bold: bool) -> FontDesc<'static> {
    let style = if bold { FontStyle::Bold } else { FontStyle::Normal };
    FontDesc::new(FontFamily::Name(FONT_FAMILY), size * OVERSAMPLE, style)
}

/// Width of `text` in 1x pixels at plotters size `size`, as measured by plotters with the
/// embedded font (about 6 % wider than the rendered text, which errs on the safe side).
pub fn text_width(text: &str, size: f64, bold: bool) -> f64 {
    match font(size, bold).box_size(text) {
        Ok((w, _)) => f64::from(w) / OVERSAMPLE,
        // Unreachable once `ensure_fonts` succeeded; a rough estimate keeps layout going.
        Err(_) => 0.6 * em(size) * text.chars().count() as f64,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Relative luminance (ITU-R BT.709 weights on linearised sRGB; common practice).
    fn luminance(c: RGBColor) -> f64 {
        let lin = |v: u8| {
            let v = f64::from(v) / 255.0;
            if v <= 0.04045 {
                v / 12.92
            } else {
                ((v + 0.055) / 1.055).powf(2.4)
            }
        };
        0.2126 * lin(c.0) + 0.7152 * lin(c.1) + 0.0722 * lin(c.2)
    }

    #[test]
    fn palette_is_ordered_and_separated_in_greyscale() {
        // Each entry must be clearly lighter than the previous one so the series stay apart
        // when printed in greyscale; 0.05 in relative luminance is a visible step (from memory).
        for i in 1..SERIES_T.len() {
            let (a, b) = (luminance(series_colour(i - 1)), luminance(series_colour(i)));
            assert!(b - a > 0.05, "entries {} and {i}: {a:.3} vs {b:.3}", i - 1);
        }
        assert_eq!(series_colour(0), series_colour(SERIES_T.len()));
    }

    #[test]
    fn viridis_lightness_rises_monotonically() {
        let mut prev = -1.0;
        for k in 0..=20 {
            let l = luminance(viridis(f64::from(k) / 20.0));
            assert!(l > prev, "viridis not monotonic in lightness at {k}");
            prev = l;
        }
    }

    #[test]
    fn font_measures_text() {
        ensure_fonts().unwrap();
        let narrow = text_width("ii", 20.0, false);
        let wide = text_width("WW", 20.0, false);
        assert!(narrow > 0.0 && wide > 2.0 * narrow, "{narrow} {wide}");
        assert!(text_width("Latitude (°N)", 20.0, true) > text_width("Latitude (°N)", 20.0, false));
    }
}
