//! Figures as SVG text and PNG bytes, drawn from plain data with no system libraries.
//!
//! Every figure is drawn once, with plotters' SVG backend, into SVG text; the PNG is that same
//! SVG rendered by resvg with the DejaVu Sans font compiled into the binary, so the two always
//! agree and no font or library of the machine is used. The functions here are pure: they take
//! plain vectors (no files, no model types) and return text or bytes;
//! [`save_svg_and_png`] is the only one that writes, and only the two files it is asked for.
//!
//! - [`figure_svg`]: line charts, one or more panels stacked over a shared x range, with
//!   solid, dashed and point series, shaded bands, labelled markers and a legend kept off
//!   the data.
//! - [`heatmap_svg`]: a field over two coordinates (e.g. latitude and time) in viridis with a
//!   colour bar, labelled contours and overlay lines, or a categorical map with a legend.
//! - [`svg_to_png`]: the PNG of any SVG made here.
//!
//! The DejaVu fonts are under the Bitstream Vera / Arev licence; its text ships beside this
//! module as `FONT-LICENSE.txt` and is available as [`FONT_LICENSE`].

mod canvas;
pub mod chart;
mod class_regions;
pub mod contour;
pub mod heatmap;
pub mod render;
pub mod style;

use std::path::{Path, PathBuf};

pub use canvas::{LayoutReport, PlotData, Rect, TextBox};
pub use chart::{figure_layout, figure_svg, Arrow, Band, Figure, Marker, Panel, Series, Stroke};
pub use contour::{contour_lines, Polyline};
pub use heatmap::{heatmap_layout, heatmap_svg, HeatMap};
pub use render::svg_to_png;

/// Licence of the embedded DejaVu Sans font (Bitstream Vera and Arev terms); it must ship
/// with any program that embeds the font.
pub const FONT_LICENSE: &str = include_str!("FONT-LICENSE.txt");

/// Everything that can go wrong while drawing, rendering or saving a figure.
#[derive(Debug, thiserror::Error)]
pub enum PlotError {
    /// Two sequences that must pair up element by element differ in length.
    #[error("{what}: expected {expected} values, got {found}")]
    LengthMismatch {
        /// Which data, e.g. `panel 0, series "stable": y`.
        what: String,
        /// Length required by the partner sequence.
        expected: usize,
        /// Length given.
        found: usize,
    },
    /// A coordinate that must increase strictly does not.
    #[error("{what} must increase strictly: value {index} is {value} after {previous}")]
    NotIncreasing {
        /// Which coordinate.
        what: String,
        /// Index of the offending value.
        index: usize,
        /// The offending value.
        value: f64,
        /// The value before it.
        previous: f64,
    },
    /// A requested axis range is not finite or not increasing.
    #[error("{what}: range ({lo}, {hi}) must be finite with lower < upper")]
    BadRange {
        /// Which range.
        what: String,
        /// Lower end given.
        lo: f64,
        /// Upper end given.
        hi: f64,
    },
    /// The picture size is outside the accepted range.
    #[error("picture size {width} x {height} px is outside {min} ..= {max} px per side")]
    BadSize {
        /// Width asked for.
        width: u32,
        /// Height asked for.
        height: u32,
        /// Smallest accepted side.
        min: u32,
        /// Largest accepted side.
        max: u32,
    },
    /// The picture is too small for its text and panels.
    #[error("{width} x {height} px leaves {plot_height:.0} px per panel for {panels} panel(s); make the picture larger")]
    TooSmall {
        /// Picture width.
        width: u32,
        /// Picture height.
        height: u32,
        /// Number of panels.
        panels: usize,
        /// Height left for each panel's plot area.
        plot_height: f64,
    },
    /// A figure without any panel.
    #[error("figure \"{0}\" has no panels")]
    NoPanels(String),
    /// A categorical map holds a value that is none of its classes.
    #[error(
        "categorical map: value {value} at x index {i}, y index {j} is not one of the classes {classes:?}"
    )]
    UnknownClass {
        /// The offending value.
        value: f64,
        /// Its x index.
        i: usize,
        /// Its y index.
        j: usize,
        /// The class values allowed.
        classes: Vec<f64>,
    },
    /// The embedded font could not be registered with plotters.
    #[error("embedded font could not be loaded: {0}")]
    Font(String),
    /// plotters failed while drawing.
    #[error("drawing failed: {0}")]
    Drawing(String),
    /// resvg could not read the SVG text.
    #[error("SVG could not be parsed for rendering: {0}")]
    SvgParse(String),
    /// A pixel buffer of this size could not be made.
    #[error("cannot make a {width} x {height} px image")]
    Render {
        /// Width asked for.
        width: u32,
        /// Height asked for.
        height: u32,
    },
    /// PNG encoding failed.
    #[error("PNG encoding failed: {0}")]
    PngEncode(String),
    /// A file could not be written.
    #[error("cannot write {path}: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// The cause.
        source: std::io::Error,
    },
}

/// `stem` with `.ext` appended (unlike `Path::with_extension`, keeps dots already in the name).
fn with_suffix(stem: &Path, ext: &str) -> PathBuf {
    let mut s = stem.as_os_str().to_owned();
    s.push(".");
    s.push(ext);
    PathBuf::from(s)
}

/// Writes `bytes` to `path` through a temporary file in the same directory, so a failure
/// never leaves a half-written file under the final name.
fn write_atomically(path: &Path, bytes: &[u8]) -> Result<(), PlotError> {
    let io = |source| PlotError::Io {
        path: path.to_path_buf(),
        source,
    };
    let tmp = with_suffix(path, "partial");
    std::fs::write(&tmp, bytes).map_err(io)?;
    std::fs::rename(&tmp, path).map_err(|e| {
        let _ = std::fs::remove_file(&tmp);
        io(e)
    })
}

/// Writes `svg` to `<stem>.svg` and its rendering to `<stem>.png` and returns the two paths.
/// The PNG is rendered before anything is written, so a rendering error writes nothing.
pub fn save_svg_and_png(stem: &Path, svg: &str) -> Result<(PathBuf, PathBuf), PlotError> {
    let png = svg_to_png(svg)?;
    let (svg_path, png_path) = (with_suffix(stem, "svg"), with_suffix(stem, "png"));
    write_atomically(&svg_path, svg.as_bytes())?;
    write_atomically(&png_path, &png)?;
    Ok((svg_path, png_path))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn suffix_keeps_dots_in_the_stem() {
        assert_eq!(
            with_suffix(Path::new("out/sweep.s0"), "svg"),
            PathBuf::from("out/sweep.s0.svg")
        );
    }

    #[test]
    fn save_writes_both_files_and_reports_bad_directories() {
        let dir = std::env::temp_dir().join(format!("icefold-plot-save-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let fig = Figure {
            title: "Save test".into(),
            panels: vec![Panel::new("x (1)", "y (1)")],
            width_px: 320,
            height_px: 240,
        };
        let svg = figure_svg(&fig).unwrap();
        let (s, p) = save_svg_and_png(&dir.join("fig"), &svg).unwrap();
        assert_eq!(std::fs::read_to_string(&s).unwrap(), svg);
        assert_eq!(&std::fs::read(&p).unwrap()[..8], b"\x89PNG\r\n\x1a\n");
        assert!(!with_suffix(&s, "partial").exists());
        let err = save_svg_and_png(&dir.join("missing-dir").join("fig"), &svg).unwrap_err();
        assert!(matches!(err, PlotError::Io { .. }), "{err}");
        std::fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn font_licence_is_the_bitstream_vera_and_arev_text() {
        assert!(FONT_LICENSE.contains("Bitstream Vera Fonts Copyright"));
        assert!(FONT_LICENSE.contains("Arev Fonts Copyright"));
    }
}
