//! SVG to PNG with resvg and the embedded DejaVu Sans.
//!
//! The font database starts empty (no system fonts are looked up), gets DejaVu Sans regular
//! and bold from the binary, and has every generic family (`sans-serif`, `serif`, ...)
//! pointed at it, so text renders the same on every machine. resvg drops text silently when
//! no font matches, which is why the tests count dark pixels where text should be. Image
//! references to files are refused: only images embedded in the SVG are drawn.

use std::sync::{Arc, OnceLock};

use resvg::tiny_skia;
use resvg::usvg::{self, fontdb};

use super::PlotError;

/// Family name of the embedded font as fontdb knows it.
const FAMILY: &str = "DejaVu Sans";

static FONT_DB: OnceLock<Arc<fontdb::Database>> = OnceLock::new();

/// The shared font database holding only the embedded fonts.
fn font_db() -> Arc<fontdb::Database> {
    FONT_DB
        .get_or_init(|| {
            let mut db = fontdb::Database::new();
            for bytes in [dejavu::sans::regular(), dejavu::sans::bold()] {
                db.load_font_source(fontdb::Source::Binary(Arc::new(bytes)));
            }
            db.set_sans_serif_family(FAMILY);
            db.set_serif_family(FAMILY);
            db.set_monospace_family(FAMILY);
            db.set_cursive_family(FAMILY);
            db.set_fantasy_family(FAMILY);
            Arc::new(db)
        })
        .clone()
}

/// Parses `svg` with the embedded fonts and no access to files.
fn parse(svg: &str) -> Result<usvg::Tree, PlotError> {
    let mut opt = usvg::Options {
        font_family: FAMILY.to_string(),
        fontdb: font_db(),
        ..usvg::Options::default()
    };
    // Default resolvers would read image files named in the SVG; this module reads no files.
    opt.image_href_resolver.resolve_string = Box::new(|_, _| None);
    usvg::Tree::from_str(svg, &opt).map_err(|e| PlotError::SvgParse(e.to_string()))
}

/// Renders `svg` at the size its `width` and `height` give, on its own background (pixels
/// the SVG leaves empty stay transparent).
pub fn svg_to_pixmap(svg: &str) -> Result<tiny_skia::Pixmap, PlotError> {
    let tree = parse(svg)?;
    let size = tree.size().to_int_size();
    let mut pixmap = tiny_skia::Pixmap::new(size.width(), size.height()).ok_or(PlotError::Render {
        width: size.width(),
        height: size.height(),
    })?;
    resvg::render(&tree, tiny_skia::Transform::default(), &mut pixmap.as_mut());
    Ok(pixmap)
}

/// PNG bytes of `svg`, rendered with the embedded font at the size the SVG states: 8-bit RGB
/// when every pixel is opaque (all our pictures have a white background), else RGBA, with the
/// png crate's strongest compression (the gallery must stay small).
pub fn svg_to_png(svg: &str) -> Result<Vec<u8>, PlotError> {
    let pm = svg_to_pixmap(svg)?;
    let opaque = pm.pixels().iter().all(|p| p.alpha() == 255);
    let (colour, data): (png::ColorType, Vec<u8>) = if opaque {
        let rgb = pm
            .pixels()
            .iter()
            .flat_map(|p| [p.red(), p.green(), p.blue()])
            .collect();
        (png::ColorType::Rgb, rgb)
    } else {
        let rgba = pm
            .pixels()
            .iter()
            .flat_map(|p| {
                let c = p.demultiply();
                [c.red(), c.green(), c.blue(), c.alpha()]
            })
            .collect();
        (png::ColorType::Rgba, rgba)
    };
    let mut out = Vec::new();
    {
        let mut enc = png::Encoder::new(&mut out, pm.width(), pm.height());
        enc.set_color(colour);
        enc.set_depth(png::BitDepth::Eight);
        enc.set_compression(png::Compression::High);
        let mut w = enc
            .write_header()
            .map_err(|e| PlotError::PngEncode(e.to_string()))?;
        w.write_image_data(&data)
            .map_err(|e| PlotError::PngEncode(e.to_string()))?;
        w.finish().map_err(|e| PlotError::PngEncode(e.to_string()))?;
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Pixels darker than mid grey in a rectangle of an opaque rendering.
    fn dark_pixels(pm: &tiny_skia::Pixmap, x0: u32, y0: u32, x1: u32, y1: u32) -> usize {
        let mut n = 0;
        for y in y0..y1 {
            for x in x0..x1 {
                let p = pm.pixel(x, y).unwrap().demultiply();
                if p.alpha() > 200
                    && u32::from(p.red()) + u32::from(p.green()) + u32::from(p.blue()) < 3 * 128
                {
                    n += 1;
                }
            }
        }
        n
    }

    #[test]
    fn text_renders_with_the_embedded_font_under_any_generic_family() {
        for family in ["DejaVu Sans, sans-serif", "sans-serif", "serif", "NoSuchFont"] {
            let svg = format!(
                r#"<svg xmlns="http://www.w3.org/2000/svg" width="200" height="60"><rect width="200" height="60" fill="white"/><text x="10" y="40" font-family="{family}" font-size="28">25 °C</text></svg>"#
            );
            let pm = svg_to_pixmap(&svg).unwrap();
            assert_eq!((pm.width(), pm.height()), (200, 60));
            // "25 °C" at 28 px covers several hundred pixels; without a font it would be 0.
            let n = dark_pixels(&pm, 0, 0, 200, 60);
            assert!(n > 300, "{family}: only {n} dark pixels");
        }
    }

    #[test]
    fn degree_sign_has_a_glyph() {
        // A lone degree sign: if DejaVu lacked it, resvg would draw nothing.
        let svg = r#"<svg xmlns="http://www.w3.org/2000/svg" width="60" height="60"><rect width="60" height="60" fill="white"/><text x="10" y="50" font-size="50">°</text></svg>"#;
        let pm = svg_to_pixmap(svg).unwrap();
        assert!(dark_pixels(&pm, 0, 0, 60, 60) > 50);
    }

    #[test]
    fn files_named_in_the_svg_are_not_read() {
        let path = std::env::temp_dir().join(format!("icefold-render-{}.png", std::process::id()));
        let mut pm = tiny_skia::Pixmap::new(4, 4).unwrap();
        pm.fill(tiny_skia::Color::BLACK);
        pm.save_png(&path).unwrap();
        let svg = format!(
            r#"<svg xmlns="http://www.w3.org/2000/svg" width="40" height="40"><rect width="40" height="40" fill="white"/><image width="40" height="40" href="{}"/></svg>"#,
            path.display()
        );
        let out = svg_to_pixmap(&svg).unwrap();
        std::fs::remove_file(&path).unwrap();
        assert_eq!(dark_pixels(&out, 0, 0, 40, 40), 0);
    }

    #[test]
    fn malformed_svg_is_an_error() {
        let err = svg_to_png("<svg").unwrap_err();
        assert!(matches!(err, PlotError::SvgParse(_)), "{err}");
    }
}
