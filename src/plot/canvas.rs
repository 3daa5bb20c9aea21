//! Drawing surface and layout helpers shared by the line charts and the heat maps.
//!
//! A [`Canvas`] wraps plotters' SVG backend and takes every coordinate and length in CSS pixels
//! of the final picture (1x, `f64`); it draws at [`OVERSAMPLE`] times that size so positions are
//! exact to a tenth of a pixel, and [`finish_svg`] sets the picture size back while keeping the
//! large `viewBox`. Also here: axis ticks and their labels, clipping of lines and polygons to a
//! plot area, a coarse occupancy grid used to keep legends and labels off the data, legends,
//! and the embedding of bitmaps (heat maps) as base64 PNG images.

use plotters::coord::types::RangedCoordf64;
use plotters::coord::Shift;
use plotters::element::{Circle, DashedPathElement, PathElement, Polygon, Rectangle, Text};
use plotters::prelude::{DrawingArea, IntoDrawingArea, Ranged, SVGBackend};
use plotters::style::text_anchor::{HPos, Pos, VPos};
use plotters::style::{Color, FontTransform, RGBAColor, RGBColor, ShapeStyle};
use resvg::tiny_skia;

use super::style::{self, Sizes, BLACK, FRAME_GREY, OVERSAMPLE, WHITE};
use super::PlotError;

/// Largest accepted picture side, in pixels (a 10000 x 10000 RGBA PNG needs 400 MB to render).
pub const MAX_SIDE_PX: u32 = 10_000;
/// Smallest accepted picture side, in pixels.
pub const MIN_SIDE_PX: u32 = 64;

/// Checks a requested picture size.
pub fn check_size(width_px: u32, height_px: u32) -> Result<(), PlotError> {
    let ok = |v: u32| (MIN_SIDE_PX..=MAX_SIDE_PX).contains(&v);
    if ok(width_px) && ok(height_px) {
        Ok(())
    } else {
        Err(PlotError::BadSize {
            width: width_px,
            height: height_px,
            min: MIN_SIDE_PX,
            max: MAX_SIDE_PX,
        })
    }
}

/// An axis-aligned rectangle in 1x pixels (y grows downwards).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Rect {
    /// Left edge.
    pub x0: f64,
    /// Top edge.
    pub y0: f64,
    /// Right edge.
    pub x1: f64,
    /// Bottom edge.
    pub y1: f64,
}

impl Rect {
    /// Rectangle from its top-left corner and size.
    pub fn at(x: f64, y: f64, w: f64, h: f64) -> Rect {
        Rect {
            x0: x,
            y0: y,
            x1: x + w,
            y1: y + h,
        }
    }
    /// Width.
    pub fn w(&self) -> f64 {
        self.x1 - self.x0
    }
    /// Height.
    pub fn h(&self) -> f64 {
        self.y1 - self.y0
    }
    /// Whether `other` lies entirely inside `self`.
    pub fn contains(&self, other: &Rect) -> bool {
        other.x0 >= self.x0 && other.x1 <= self.x1 && other.y0 >= self.y0 && other.y1 <= self.y1
    }
    /// Whether the two rectangles overlap (touching edges do not count).
    pub fn overlaps(&self, other: &Rect) -> bool {
        self.x0 < other.x1 && other.x0 < self.x1 && self.y0 < other.y1 && other.y0 < self.y1
    }
    /// The rectangle grown by `d` on every side.
    pub fn inflate(&self, d: f64) -> Rect {
        Rect {
            x0: self.x0 - d,
            y0: self.y0 - d,
            x1: self.x1 + d,
            y1: self.y1 + d,
        }
    }
}

/// Linear map from data coordinates to the pixels of a plot area (y axis pointing up).
#[derive(Debug, Clone, Copy)]
pub struct Mapping {
    /// Plot area in pixels.
    pub area: Rect,
    /// Data range shown along x.
    pub x: (f64, f64),
    /// Data range shown along y.
    pub y: (f64, f64),
}

impl Mapping {
    /// Pixel position of the data point `(x, y)`.
    pub fn px(&self, x: f64, y: f64) -> (f64, f64) {
        (
            self.area.x0 + (x - self.x.0) / (self.x.1 - self.x.0) * self.area.w(),
            self.area.y1 - (y - self.y.0) / (self.y.1 - self.y.0) * self.area.h(),
        )
    }
}

/// Pieces of a clipped line, each a list of pixel positions.
pub type Pieces = Vec<Vec<(f64, f64)>>;

/// Converts 1x pixels to the oversampled integer units plotters works in.
fn k(v: f64) -> i32 {
    (v * OVERSAMPLE).round() as i32
}

fn kp(p: (f64, f64)) -> (i32, i32) {
    (k(p.0), k(p.1))
}

fn stroke(colour: RGBAColor, width: f64) -> ShapeStyle {
    ShapeStyle {
        color: colour,
        filled: false,
        stroke_width: (width * OVERSAMPLE).round().max(1.0) as u32,
    }
}

fn draw_err(e: impl std::fmt::Display) -> PlotError {
    PlotError::Drawing(e.to_string())
}

/// Horizontal and vertical anchoring of a text.
#[derive(Clone, Copy)]
pub struct Anchor {
    /// Horizontal: left, centre or right end at the given point.
    pub h: HPos,
    /// Vertical: top, centre or bottom at the given point.
    pub v: VPos,
}

impl Anchor {
    /// Anchor from its two parts.
    pub const fn new(h: HPos, v: VPos) -> Anchor {
        Anchor { h, v }
    }
}

/// Shape of a point marker.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PointShape {
    /// Filled disc.
    Disc,
    /// Filled triangle pointing up.
    Up,
    /// Filled triangle pointing down.
    Down,
}

/// A drawing surface in 1x pixels over plotters' SVG backend; it also records where every
/// text, legend and plot area went (see [`LayoutReport`]).
pub struct Canvas<'a> {
    root: DrawingArea<SVGBackend<'a>, Shift>,
    report: std::cell::RefCell<LayoutReport>,
}

/// One text as placed: its string and the box it takes, in 1x pixels.
#[derive(Debug, Clone, PartialEq)]
pub struct TextBox {
    /// The text.
    pub text: String,
    /// Its bounding box (width as measured with the embedded font, height the font's
    /// ascent plus descent).
    pub rect: Rect,
}

/// A plot area and the data drawn in it, in pixels, for checks that a legend covers none.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct PlotData {
    /// The plot area (inside the frame).
    pub area: Rect,
    /// Every drawn line as a polyline, every marker or dot as a one-point line, every shaded
    /// band as its closed outline.
    pub lines: Vec<Vec<(f64, f64)>>,
}

/// Where everything went in a finished picture: the boxes of all texts, of the legends, the
/// plot areas with their data, and the colours of a categorical map's classes. The drawing
/// code fills it as it draws, so checks (tests/picture_quality.rs) need no pixel parsing.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct LayoutReport {
    /// Picture size in pixels.
    pub width: f64,
    /// Picture height in pixels.
    pub height: f64,
    /// Every text drawn.
    pub texts: Vec<TextBox>,
    /// Every legend box drawn.
    pub legends: Vec<Rect>,
    /// Plot areas and their data.
    pub plots: Vec<PlotData>,
    /// Classes of a categorical map: name and colour (sRGB).
    pub classes: Vec<(String, (u8, u8, u8))>,
    /// Areas of a categorical map's classes: class index (as in `classes`) and polygon in
    /// pixels.
    pub regions: Vec<(usize, Vec<(f64, f64)>)>,
    /// Leader lines: (marked point, end at its label) in pixels (the line drawn starts at the
    /// ring around the point).
    pub leaders: Vec<((f64, f64), (f64, f64))>,
}

impl Default for Rect {
    fn default() -> Rect {
        Rect::at(0.0, 0.0, 0.0, 0.0)
    }
}

/// Box of a text of `width` x `height` anchored at `at`; `upright` texts read upwards (the
/// box turns by a quarter: the text's top faces left).
pub fn text_rect(at: (f64, f64), (width, height): (f64, f64), anchor: Anchor, upright: bool) -> Rect {
    let along = |h: HPos, p: f64, len: f64| match h {
        HPos::Left => p,
        HPos::Center => p - 0.5 * len,
        HPos::Right => p - len,
    };
    let across = |v: VPos, p: f64, len: f64| match v {
        VPos::Top => p,
        VPos::Center => p - 0.5 * len,
        VPos::Bottom => p - len,
    };
    if upright {
        // Reading upwards: "left" of the text is its bottom end; "top" faces left.
        let y1 = match anchor.h {
            HPos::Left => at.1,
            HPos::Center => at.1 + 0.5 * width,
            HPos::Right => at.1 + width,
        };
        let x0 = across(anchor.v, at.0, height);
        Rect::at(x0, y1 - width, height, width)
    } else {
        Rect::at(
            along(anchor.h, at.0, width),
            across(anchor.v, at.1, height),
            width,
            height,
        )
    }
}

/// `text` broken at spaces into lines no wider than `max_w` pixels (a single word wider than
/// that keeps its own line).
pub fn wrap_text(text: &str, size: f64, bold: bool, max_w: f64) -> Vec<String> {
    let mut lines: Vec<String> = Vec::new();
    let mut cur = String::new();
    for word in text.split_whitespace() {
        let trial = if cur.is_empty() {
            word.to_string()
        } else {
            format!("{cur} {word}")
        };
        if !cur.is_empty() && style::text_width(&trial, size, bold) > max_w {
            lines.push(std::mem::replace(&mut cur, word.to_string()));
        } else {
            cur = trial;
        }
    }
    if !cur.is_empty() {
        lines.push(cur);
    }
    lines
}

/// Draws a bold title, wrapped to `lines`, centred at `cx` from `top` down.
pub fn draw_title(c: &Canvas, lines: &[String], cx: f64, top: f64, sizes: &Sizes) -> Result<(), PlotError> {
    for (i, l) in lines.iter().enumerate() {
        c.text(
            l,
            (cx, top + 1.25 * i as f64 * style::em(sizes.title)),
            sizes.title,
            true,
            Anchor::new(HPos::Center, VPos::Top),
            false,
            BLACK,
        )?;
    }
    Ok(())
}

/// Height of a title of `n` lines including the space below it.
pub fn title_height(n: usize, sizes: &Sizes) -> f64 {
    if n == 0 {
        0.0
    } else {
        (1.25 * n as f64 + 0.25) * style::em(sizes.title)
    }
}

/// Height of a line of text at plotters size `size`: DejaVu Sans ascent plus descent
/// (0.928 + 0.236 em, from the font's hhea table as fontdb reports it).
pub fn text_height(size: f64) -> f64 {
    1.164 * style::em(size)
}

/// Drops the points of a polyline that lie within `tol` pixels of the straight line between
/// the kept points around them (so flat stretches of long series do not bloat the SVG); the
/// first and last points stay. Every dropped point is checked against the segment that
/// replaces it, so the drawn line moves by at most `tol`.
pub fn simplify(pts: &[(f64, f64)], tol: f64) -> Vec<(f64, f64)> {
    if pts.len() < 3 {
        return pts.to_vec();
    }
    let dist = |p: (f64, f64), a: (f64, f64), b: (f64, f64)| {
        let (dx, dy) = (b.0 - a.0, b.1 - a.1);
        let len2 = dx * dx + dy * dy;
        let t = if len2 > 0.0 {
            (((p.0 - a.0) * dx + (p.1 - a.1) * dy) / len2).clamp(0.0, 1.0)
        } else {
            0.0
        };
        (p.0 - a.0 - t * dx).hypot(p.1 - a.1 - t * dy)
    };
    // Longest run of points one segment may replace (bounds the work on long straight runs).
    const MAX_RUN: usize = 256;
    let mut out = vec![pts[0]];
    let mut a = 0;
    let mut j = 2;
    while j < pts.len() {
        let ok = j - a <= MAX_RUN && (a + 1..j).all(|i| dist(pts[i], pts[a], pts[j]) <= tol);
        if !ok {
            a = j - 1;
            out.push(pts[a]);
        }
        j += 1;
    }
    out.push(pts[pts.len() - 1]);
    out
}

/// Largest distance a drawn line may move when its points are thinned, in pixels.
const SIMPLIFY_TOL: f64 = 0.05;

impl Canvas<'_> {
    /// Polyline through `pts`.
    pub fn line(&self, pts: &[(f64, f64)], colour: RGBAColor, width: f64) -> Result<(), PlotError> {
        if pts.len() < 2 {
            return Ok(());
        }
        let pts: Vec<(i32, i32)> = simplify(pts, SIMPLIFY_TOL).into_iter().map(kp).collect();
        self.root
            .draw(&PathElement::new(pts, stroke(colour, width)))
            .map_err(draw_err)
    }

    /// Dashed polyline through `pts`; the dash pattern runs on across vertices.
    pub fn dashed(
        &self,
        pts: &[(f64, f64)],
        colour: RGBAColor,
        width: f64,
        (dash, gap): (f64, f64),
    ) -> Result<(), PlotError> {
        if pts.len() < 2 {
            return Ok(());
        }
        let pts: Vec<(i32, i32)> = simplify(pts, SIMPLIFY_TOL).into_iter().map(kp).collect();
        self.root
            .draw(&DashedPathElement::new(
                pts,
                k(dash),
                k(gap),
                stroke(colour, width),
            ))
            .map_err(draw_err)
    }

    /// Filled polygon.
    pub fn polygon(&self, pts: &[(f64, f64)], colour: RGBAColor) -> Result<(), PlotError> {
        if pts.len() < 3 {
            return Ok(());
        }
        let pts: Vec<(i32, i32)> = pts.iter().copied().map(kp).collect();
        self.root
            .draw(&Polygon::new(pts, colour.filled()))
            .map_err(draw_err)
    }

    /// Filled rectangle.
    pub fn fill_rect(&self, r: Rect, colour: RGBAColor) -> Result<(), PlotError> {
        self.root
            .draw(&Rectangle::new(
                [kp((r.x0, r.y0)), kp((r.x1, r.y1))],
                colour.filled(),
            ))
            .map_err(draw_err)
    }

    /// Rectangle outline, drawn as a closed path so the stroke width is written out.
    pub fn frame_rect(&self, r: Rect, colour: RGBAColor, width: f64) -> Result<(), PlotError> {
        self.line(
            &[
                (r.x0, r.y0),
                (r.x1, r.y0),
                (r.x1, r.y1),
                (r.x0, r.y1),
                (r.x0, r.y0),
            ],
            colour,
            width,
        )
    }

    /// A point marker of radius `r` centred on `c`.
    pub fn point(
        &self,
        shape: PointShape,
        c: (f64, f64),
        r: f64,
        colour: RGBAColor,
    ) -> Result<(), PlotError> {
        match shape {
            PointShape::Disc => self
                .root
                .draw(&Circle::new(kp(c), k(r).max(1), colour.filled()))
                .map_err(draw_err),
            PointShape::Up | PointShape::Down => {
                // Equilateral-looking triangle with the same area as the disc.
                let s = if shape == PointShape::Up { 1.0 } else { -1.0 };
                let (h, w) = (1.35 * r, 1.55 * r);
                self.polygon(
                    &[
                        (c.0, c.1 - s * h),
                        (c.0 + w, c.1 + s * 0.75 * h),
                        (c.0 - w, c.1 + s * 0.75 * h),
                    ],
                    colour,
                )
            }
        }
    }

    /// Open circle (a ring) of radius `r`.
    pub fn ring(&self, c: (f64, f64), r: f64, colour: RGBAColor, width: f64) -> Result<(), PlotError> {
        self.root
            .draw(&Circle::new(kp(c), k(r).max(1), stroke(colour, width)))
            .map_err(draw_err)
    }

    /// Text at `at` (plotters font size `size`, 1x), optionally rotated to read upwards.
    #[allow(clippy::too_many_arguments)]
    pub fn text(
        &self,
        s: &str,
        at: (f64, f64),
        size: f64,
        bold: bool,
        anchor: Anchor,
        upright: bool,
        colour: RGBColor,
    ) -> Result<(), PlotError> {
        if s.is_empty() {
            return Ok(());
        }
        let mut ts = style::font(size, bold)
            .color(&colour)
            .pos(Pos::new(anchor.h, anchor.v));
        if upright {
            ts = ts.transform(FontTransform::Rotate270);
        }
        let rect = text_rect(
            at,
            (style::text_width(s, size, bold), text_height(size)),
            anchor,
            upright,
        );
        self.report.borrow_mut().texts.push(TextBox {
            text: s.to_string(),
            rect,
        });
        self.root
            .draw(&Text::new(s.to_string(), kp(at), ts))
            .map_err(draw_err)
    }

    /// Records a legend box (for [`LayoutReport::legends`]).
    pub fn note_legend(&self, r: Rect) {
        self.report.borrow_mut().legends.push(r);
    }

    /// Records a plot area and the data drawn in it.
    pub fn note_plot(&self, data: PlotData) {
        self.report.borrow_mut().plots.push(data);
    }

    /// Records the area of one class of a categorical map (a polygon in pixels).
    pub fn note_region(&self, class: usize, polygon: Vec<(f64, f64)>) {
        self.report.borrow_mut().regions.push((class, polygon));
    }

    /// Records a leader line from a marked point to its label.
    pub fn note_leader(&self, point: (f64, f64), end: (f64, f64)) {
        self.report.borrow_mut().leaders.push((point, end));
    }

    /// Records the classes of a categorical map.
    pub fn note_class(&self, name: &str, c: RGBColor) {
        self.report
            .borrow_mut()
            .classes
            .push((name.to_string(), (c.0, c.1, c.2)));
    }
}

/// A bitmap to place in the SVG as an embedded PNG, scaled to `rect` without smoothing.
pub struct Bitmap {
    /// Where the image goes, in 1x pixels.
    pub rect: Rect,
    /// PNG bytes.
    pub png: Vec<u8>,
    /// Smooth scaling instead of sharp pixels: for images with more columns or rows than a
    /// few per screen pixel, where sharp scaling makes moiré.
    pub smooth: bool,
}

/// Draws a `width_px` x `height_px` picture on a white background with `draw`, then returns the
/// finished SVG text with `bitmaps` placed right above the background (below everything else).
pub fn draw_svg(
    width_px: u32,
    height_px: u32,
    bitmaps: &[Bitmap],
    draw: impl FnOnce(&Canvas) -> Result<(), PlotError>,
) -> Result<(String, LayoutReport), PlotError> {
    check_size(width_px, height_px)?;
    style::ensure_fonts()?;
    let big = (
        (f64::from(width_px) * OVERSAMPLE) as u32,
        (f64::from(height_px) * OVERSAMPLE) as u32,
    );
    let mut buf = String::new();
    let report = {
        let root = SVGBackend::with_string(&mut buf, big).into_drawing_area();
        root.fill(&WHITE).map_err(draw_err)?;
        let canvas = Canvas {
            root,
            report: std::cell::RefCell::new(LayoutReport {
                width: f64::from(width_px),
                height: f64::from(height_px),
                ..LayoutReport::default()
            }),
        };
        draw(&canvas)?;
        canvas.root.present().map_err(draw_err)?;
        canvas.report.into_inner()
    };
    Ok((finish_svg(&buf, (width_px, height_px), big, bitmaps)?, report))
}

/// Sets the picture size back to 1x (keeping the oversampled `viewBox`), declares the xlink
/// namespace and inserts the bitmaps after the background rectangle.
fn finish_svg(
    svg: &str,
    (w, h): (u32, u32),
    (bw, bh): (u32, u32),
    bitmaps: &[Bitmap],
) -> Result<String, PlotError> {
    let old_root = format!(
        "<svg width=\"{bw}\" height=\"{bh}\" viewBox=\"0 0 {bw} {bh}\" xmlns=\"http://www.w3.org/2000/svg\">"
    );
    let new_root = format!(
        "<svg width=\"{w}\" height=\"{h}\" viewBox=\"0 0 {bw} {bh}\" xmlns=\"http://www.w3.org/2000/svg\" xmlns:xlink=\"http://www.w3.org/1999/xlink\">"
    );
    let Some(rest) = svg.strip_prefix(&old_root) else {
        return Err(PlotError::Drawing(
            "unexpected SVG root element from plotters".into(),
        ));
    };
    // The first element after the root is the white background rectangle.
    let bg_end = rest
        .find("/>\n")
        .map(|i| i + 3)
        .ok_or_else(|| PlotError::Drawing("SVG background missing".into()))?;
    let mut out = String::with_capacity(svg.len() + bitmaps.iter().map(|b| b.png.len() * 2).sum::<usize>());
    out.push_str(&new_root);
    out.push_str(&rest[..bg_end]);
    for b in bitmaps {
        let href = format!("data:image/png;base64,{}", base64(&b.png));
        let rendering = if b.smooth { "optimizeQuality" } else { "pixelated" };
        out.push_str(&format!(
            "<image x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" preserveAspectRatio=\"none\" image-rendering=\"{rendering}\" style=\"image-rendering:{rendering}\" href=\"{href}\" xlink:href=\"{href}\"/>\n",
            k(b.rect.x0),
            k(b.rect.y0),
            k(b.rect.w()),
            k(b.rect.h()),
        ));
    }
    out.push_str(&rest[bg_end..]);
    Ok(out)
}

/// Standard base64 (RFC 4648, with padding).
pub fn base64(bytes: &[u8]) -> String {
    const ABC: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    let mut out = String::with_capacity(bytes.len().div_ceil(3) * 4);
    for chunk in bytes.chunks(3) {
        let b = [
            chunk[0],
            chunk.get(1).copied().unwrap_or(0),
            chunk.get(2).copied().unwrap_or(0),
        ];
        let n = (u32::from(b[0]) << 16) | (u32::from(b[1]) << 8) | u32::from(b[2]);
        for (i, shift) in [18, 12, 6, 0].into_iter().enumerate() {
            if i <= chunk.len() {
                out.push(ABC[((n >> shift) & 63) as usize] as char);
            } else {
                out.push('=');
            }
        }
    }
    out
}

/// Encodes an RGBA image (`None` = transparent pixel), row by row from the top, as PNG.
pub fn encode_rgba_png(width: u32, height: u32, pixels: &[Option<RGBColor>]) -> Result<Vec<u8>, PlotError> {
    let mut pm = tiny_skia::Pixmap::new(width, height).ok_or(PlotError::Render { width, height })?;
    for (dst, src) in pm.pixels_mut().iter_mut().zip(pixels) {
        *dst = match src {
            Some(c) => tiny_skia::ColorU8::from_rgba(c.0, c.1, c.2, 255).premultiply(),
            None => tiny_skia::ColorU8::from_rgba(0, 0, 0, 0).premultiply(),
        };
    }
    pm.encode_png().map_err(|e| PlotError::PngEncode(e.to_string()))
}

// ----------------------------------------------------------------------------------------
// Axes: ranges, ticks and tick labels.

/// Range of the finite values in `values`, or `None` when there are none.
pub fn finite_range<'a>(values: impl IntoIterator<Item = &'a f64>) -> Option<(f64, f64)> {
    values
        .into_iter()
        .filter(|v| v.is_finite())
        .fold(None, |acc, &v| match acc {
            None => Some((v, v)),
            Some((lo, hi)) => Some((lo.min(v), hi.max(v))),
        })
}

/// Widens a degenerate range so that it can be drawn, and pads it by `pad` of its width on
/// each side.
pub fn padded(range: Option<(f64, f64)>, pad: f64) -> (f64, f64) {
    let (lo, hi) = range.unwrap_or((0.0, 1.0));
    let (lo, hi) = if hi - lo > 1e-12 * lo.abs().max(hi.abs()).max(1e-300) {
        (lo, hi)
    } else {
        let d = if lo == 0.0 { 1.0 } else { 0.1 * lo.abs() };
        (lo - d, hi + d)
    };
    let d = (hi - lo) * pad;
    (lo - d, hi + d)
}

/// At most `max_n` round tick positions (steps of 1, 2 or 5 times a power of ten) inside
/// `[lo, hi]`, chosen by plotters.
pub fn ticks(lo: f64, hi: f64, max_n: usize) -> Vec<f64> {
    let r: RangedCoordf64 = (lo..hi).into();
    r.key_points(max_n.max(2))
        .into_iter()
        .filter(|v| *v >= lo && *v <= hi)
        .collect()
}

/// Tick labels with the fewest decimals that still tell neighbouring ticks apart, using a
/// true minus sign; scientific notation for very large or very small magnitudes.
pub fn tick_labels(ticks: &[f64]) -> Vec<String> {
    let step = ticks
        .windows(2)
        .map(|w| (w[1] - w[0]).abs())
        .fold(f64::INFINITY, f64::min);
    let big = ticks.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    let step = if step.is_finite() && step > 0.0 {
        step
    } else {
        big.max(1.0)
    };
    let sci = big >= 1e6 || big < 1e-3 && big > 0.0;
    let fmt = |v: f64, d: usize| {
        if sci {
            format!("{v:.d$e}")
        } else {
            format!("{v:.d$}")
        }
    };
    // Fewest decimals (of the mantissa, in scientific notation) that read back every tick
    // to within a millionth of the step.
    let tol = step * 1e-6;
    let decimals = (0..10)
        .find(|&d| {
            ticks.iter().all(|&v| {
                fmt(v, d)
                    .parse::<f64>()
                    .map(|p| (p - v).abs() <= tol)
                    .unwrap_or(false)
            })
        })
        .unwrap_or(10);
    let labels: Vec<String> = ticks
        .iter()
        .map(|&v| match (v.abs() < step * 1e-9, sci) {
            (true, true) => "0".to_string(),
            (true, false) => fmt(0.0, decimals),
            (false, _) => fmt(v, decimals),
        })
        .collect();
    labels.into_iter().map(|s| s.replace('-', "\u{2212}")).collect()
}

/// Ticks and labels along a horizontal axis of `len_px` pixels, thinned until neighbouring
/// labels leave at least two ems between them.
pub fn x_ticks(lo: f64, hi: f64, len_px: f64, sizes: &Sizes) -> (Vec<f64>, Vec<String>) {
    let mut n = ((len_px / (70.0 * sizes.tick / 17.0)) as usize).clamp(2, 12);
    loop {
        let t = ticks(lo, hi, n);
        let l = tick_labels(&t);
        let widest = l
            .iter()
            .map(|s| style::text_width(s, sizes.tick, false))
            .fold(0.0, f64::max);
        let room = len_px / (t.len().max(1) as f64);
        if n <= 2 || widest + 2.0 * style::em(sizes.tick) <= room {
            return (t, l);
        }
        n -= 1;
    }
}

/// Labels of the ticks `t` (log10 units) of one logarithmic axis, in one form: plain numbers
/// throughout when every tick lies in 0.001 ..< 100000 (e.g. "0.01", "300", "30000");
/// otherwise plain only for 0.01 ..< 10000 and a mantissa with a power of ten from 10⁴ up and
/// from 10⁻³ down (e.g. "3000", "10⁴", "3×10⁴", "10⁶"), never "10000" beside "10⁵".
pub fn log_labels(t: &[f64]) -> Vec<String> {
    let k = |e: f64| (e + 1e-9).floor();
    let all_plain = t.iter().all(|&e| (-3.0..=4.0).contains(&k(e)));
    let plain = if all_plain { -3.0..=4.0 } else { -2.0..=3.0 };
    t.iter().map(|&e| log_label(e, plain.contains(&k(e)))).collect()
}

/// Label of the value `10^e`: plain (e.g. "0.01", "300") or a mantissa and a power of ten
/// with superscript digits (e.g. "10⁶", "2×10⁵").
fn log_label(e: f64, plain: bool) -> String {
    let v = 10f64.powf(e);
    let k = (e + 1e-9).floor();
    let mant = (v / 10f64.powf(k)).round();
    if plain {
        let decimals = if k < 0.0 { (-k) as usize } else { 0 };
        return format!("{:.*}", decimals, mant * 10f64.powf(k));
    }
    const SUP: [char; 10] = ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'];
    let mut p = String::new();
    if k < 0.0 {
        p.push('⁻');
    }
    for ch in format!("{}", k.abs() as i64).chars() {
        p.push(SUP[ch.to_digit(10).unwrap_or(0) as usize]);
    }
    if mant == 1.0 {
        format!("10{p}")
    } else {
        format!("{mant}×10{p}")
    }
}

/// Ticks of a logarithmic axis whose range `(lo, hi)` is given in log10 units: powers of ten
/// (every second or fifth one when they would crowd), or 1-2-5 steps when the range spans
/// under two decades. Positions are in log10 units; labels show the values.
pub fn log_ticks(lo: f64, hi: f64, len_px: f64, sizes: &Sizes) -> (Vec<f64>, Vec<String>) {
    let fits = |t: &[f64], l: &[String]| {
        let widest = l
            .iter()
            .map(|s| style::text_width(s, sizes.tick, false))
            .fold(0.0, f64::max);
        // Closest pair of neighbouring ticks, in pixels.
        let closest = t
            .windows(2)
            .map(|w| (w[1] - w[0]) / (hi - lo) * len_px)
            .fold(f64::INFINITY, f64::min);
        widest + 1.5 * style::em(sizes.tick) <= closest
    };
    let mut best: Option<(Vec<f64>, Vec<String>)> = None;
    for mantissas in [&[1.0, 2.0, 5.0][..], &[1.0, 3.0][..]] {
        let mut t = Vec::new();
        for k in (lo.floor() as i64)..=(hi.ceil() as i64) {
            for m in mantissas {
                let e = k as f64 + f64::log10(*m);
                if e >= lo - 1e-9 && e <= hi + 1e-9 {
                    t.push(e);
                }
            }
        }
        let l = log_labels(&t);
        if t.len() >= 3 && fits(&t, &l) {
            return (t, l);
        }
        if best.is_none() && t.len() >= 2 && fits(&t, &l) {
            best = Some((t, l));
        }
    }
    if hi - lo >= 1.0 {
        for every in [1i64, 2, 3, 5, 10, 20, 50] {
            let t: Vec<f64> = ((lo - 1e-9).ceil() as i64..=(hi + 1e-9).floor() as i64)
                .filter(|k| k.rem_euclid(every) == 0)
                .map(|k| k as f64)
                .collect();
            let l = log_labels(&t);
            if t.len() >= 2 && fits(&t, &l) {
                return (t, l);
            }
        }
    }
    best.unwrap_or_else(|| {
        let t = vec![lo, hi];
        let l = log_labels(&t);
        (t, l)
    })
}

/// Ticks and labels along a vertical axis of `len_px` pixels (about three ems apart or more).
pub fn y_ticks(lo: f64, hi: f64, len_px: f64, sizes: &Sizes) -> (Vec<f64>, Vec<String>) {
    let n = ((len_px / (3.2 * style::em(sizes.tick))) as usize).clamp(2, 10);
    let t = ticks(lo, hi, n);
    let l = tick_labels(&t);
    (t, l)
}

/// Draws light grid lines at the ticks.
pub fn draw_grid(c: &Canvas, map: &Mapping, xt: &[f64], yt: &[f64], sizes: &Sizes) -> Result<(), PlotError> {
    let a = map.area;
    for &t in xt {
        let (px, _) = map.px(t, map.y.0);
        c.line(
            &[(px, a.y0), (px, a.y1)],
            style::GRID.to_rgba(),
            0.8 * sizes.frame,
        )?;
    }
    for &t in yt {
        let (_, py) = map.px(map.x.0, t);
        c.line(
            &[(a.x0, py), (a.x1, py)],
            style::GRID.to_rgba(),
            0.8 * sizes.frame,
        )?;
    }
    Ok(())
}

/// Draws the frame of a plot area, ticks pointing outwards, tick labels and the axis names
/// (`None` leaves a name out; the number is the top edge of the x name or the left edge of
/// the rotated y name).
pub fn draw_axes(
    c: &Canvas,
    map: &Mapping,
    xt: &(Vec<f64>, Vec<String>),
    yt: &(Vec<f64>, Vec<String>),
    x_name: Option<(&str, f64)>,
    y_name: Option<(&str, f64)>,
    sizes: &Sizes,
) -> Result<(), PlotError> {
    let a = map.area;
    let ink = BLACK.to_rgba();
    for (&t, s) in xt.0.iter().zip(&xt.1) {
        let (px, _) = map.px(t, map.y.0);
        c.line(&[(px, a.y1), (px, a.y1 + sizes.tick_len)], ink, sizes.frame)?;
        c.text(
            s,
            (px, a.y1 + sizes.tick_len + 0.5 * sizes.gap),
            sizes.tick,
            false,
            Anchor::new(HPos::Center, VPos::Top),
            false,
            BLACK,
        )?;
    }
    for (&t, s) in yt.0.iter().zip(&yt.1) {
        let (_, py) = map.px(map.x.0, t);
        c.line(&[(a.x0 - sizes.tick_len, py), (a.x0, py)], ink, sizes.frame)?;
        c.text(
            s,
            (a.x0 - sizes.tick_len - 0.5 * sizes.gap, py),
            sizes.tick,
            false,
            Anchor::new(HPos::Right, VPos::Center),
            false,
            BLACK,
        )?;
    }
    c.frame_rect(a, ink, sizes.frame)?;
    if let Some((name, y)) = x_name {
        c.text(
            name,
            ((a.x0 + a.x1) / 2.0, y),
            sizes.axis_label,
            false,
            Anchor::new(HPos::Center, VPos::Top),
            false,
            BLACK,
        )?;
    }
    if let Some((name, x)) = y_name {
        c.text(
            name,
            (x, (a.y0 + a.y1) / 2.0),
            sizes.axis_label,
            false,
            Anchor::new(HPos::Center, VPos::Top),
            true,
            BLACK,
        )?;
    }
    Ok(())
}

/// Width taken left of a plot area by y tick labels, ticks and (optionally) a rotated axis name.
pub fn y_axis_width(labels: &[String], with_name: bool, sizes: &Sizes) -> f64 {
    let widest = labels
        .iter()
        .map(|s| style::text_width(s, sizes.tick, false))
        .fold(0.0, f64::max);
    let name = if with_name {
        1.25 * style::em(sizes.axis_label) + sizes.gap
    } else {
        0.0
    };
    widest + sizes.tick_len + 0.5 * sizes.gap + name
}

/// Height taken below a plot area by x tick labels, ticks and (optionally) the axis name.
pub fn x_axis_height(with_name: bool, sizes: &Sizes) -> f64 {
    let name = if with_name {
        1.3 * style::em(sizes.axis_label) + 0.5 * sizes.gap
    } else {
        0.0
    };
    sizes.tick_len + 0.5 * sizes.gap + 1.25 * style::em(sizes.tick) + name
}

// ----------------------------------------------------------------------------------------
// Clipping.

/// Splits the points `(x[i], y[i])` into runs of consecutive finite points (NaN makes a gap).
pub fn finite_runs(x: &[f64], y: &[f64]) -> Vec<Vec<(f64, f64)>> {
    let mut runs = Vec::new();
    let mut cur = Vec::new();
    for (&a, &b) in x.iter().zip(y) {
        if a.is_finite() && b.is_finite() {
            cur.push((a, b));
        } else if !cur.is_empty() {
            runs.push(std::mem::take(&mut cur));
        }
    }
    if !cur.is_empty() {
        runs.push(cur);
    }
    runs
}

/// Clips a polyline (pixels) to `r` (Liang-Barsky per segment); returns the visible pieces.
pub fn clip_polyline(pts: &[(f64, f64)], r: &Rect) -> Vec<Vec<(f64, f64)>> {
    let mut out: Vec<Vec<(f64, f64)>> = Vec::new();
    let mut cur: Vec<(f64, f64)> = Vec::new();
    if pts.len() == 1 {
        let p = pts[0];
        if p.0 >= r.x0 && p.0 <= r.x1 && p.1 >= r.y0 && p.1 <= r.y1 {
            out.push(vec![p]);
        }
        return out;
    }
    for w in pts.windows(2) {
        let (a, b) = (w[0], w[1]);
        match clip_segment(a, b, r) {
            Some((p, q)) => {
                let continues = cur
                    .last()
                    .is_some_and(|l| (l.0 - p.0).abs() < 1e-9 && (l.1 - p.1).abs() < 1e-9);
                if !continues {
                    if cur.len() > 1 {
                        out.push(std::mem::take(&mut cur));
                    }
                    cur.clear();
                    cur.push(p);
                }
                cur.push(q);
            }
            None => {
                if cur.len() > 1 {
                    out.push(std::mem::take(&mut cur));
                }
                cur.clear();
            }
        }
    }
    if cur.len() > 1 {
        out.push(cur);
    }
    out
}

fn clip_segment(a: (f64, f64), b: (f64, f64), r: &Rect) -> Option<((f64, f64), (f64, f64))> {
    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
    let mut t0: f64 = 0.0;
    let mut t1: f64 = 1.0;
    for (p, q) in [
        (-dx, a.0 - r.x0),
        (dx, r.x1 - a.0),
        (-dy, a.1 - r.y0),
        (dy, r.y1 - a.1),
    ] {
        if p == 0.0 {
            if q < 0.0 {
                return None;
            }
        } else {
            let t = q / p;
            if p < 0.0 {
                t0 = t0.max(t);
            } else {
                t1 = t1.min(t);
            }
        }
    }
    if t0 > t1 {
        return None;
    }
    Some(((a.0 + t0 * dx, a.1 + t0 * dy), (a.0 + t1 * dx, a.1 + t1 * dy)))
}

/// Clips a polygon (pixels) to `r` (Sutherland-Hodgman).
pub fn clip_polygon(pts: &[(f64, f64)], r: &Rect) -> Vec<(f64, f64)> {
    type Edge = (
        fn(&(f64, f64), &Rect) -> bool,
        fn((f64, f64), (f64, f64), &Rect) -> (f64, f64),
    );
    fn lerp_x(a: (f64, f64), b: (f64, f64), x: f64) -> (f64, f64) {
        (x, a.1 + (b.1 - a.1) * (x - a.0) / (b.0 - a.0))
    }
    fn lerp_y(a: (f64, f64), b: (f64, f64), y: f64) -> (f64, f64) {
        (a.0 + (b.0 - a.0) * (y - a.1) / (b.1 - a.1), y)
    }
    let edges: [Edge; 4] = [
        (|p, r| p.0 >= r.x0, |a, b, r| lerp_x(a, b, r.x0)),
        (|p, r| p.0 <= r.x1, |a, b, r| lerp_x(a, b, r.x1)),
        (|p, r| p.1 >= r.y0, |a, b, r| lerp_y(a, b, r.y0)),
        (|p, r| p.1 <= r.y1, |a, b, r| lerp_y(a, b, r.y1)),
    ];
    let mut poly = pts.to_vec();
    for (inside, cut) in edges {
        if poly.is_empty() {
            break;
        }
        let mut next = Vec::with_capacity(poly.len() + 4);
        for i in 0..poly.len() {
            let cur = poly[i];
            let prev = poly[(i + poly.len() - 1) % poly.len()];
            match (inside(&prev, r), inside(&cur, r)) {
                (true, true) => next.push(cur),
                (true, false) => next.push(cut(prev, cur, r)),
                (false, true) => {
                    next.push(cut(prev, cur, r));
                    next.push(cur);
                }
                (false, false) => {}
            }
        }
        poly = next;
    }
    poly
}

// ----------------------------------------------------------------------------------------
// Occupancy grid: where the data are, so that legends and labels can avoid them.

/// A coarse grid over a plot area counting how much ink falls in each cell.
pub struct Occupancy {
    area: Rect,
    cell: f64,
    nx: usize,
    ny: usize,
    count: Vec<u32>,
}

impl Occupancy {
    /// Empty grid over `area` with square cells of `cell` pixels.
    pub fn new(area: Rect, cell: f64) -> Occupancy {
        let nx = (area.w() / cell).ceil().max(1.0) as usize;
        let ny = (area.h() / cell).ceil().max(1.0) as usize;
        Occupancy {
            area,
            cell,
            nx,
            ny,
            count: vec![0; nx * ny],
        }
    }

    fn index(&self, x: f64, y: f64) -> Option<usize> {
        let i = ((x - self.area.x0) / self.cell).floor();
        let j = ((y - self.area.y0) / self.cell).floor();
        if i < 0.0 || j < 0.0 || i >= self.nx as f64 || j >= self.ny as f64 {
            None
        } else {
            Some(j as usize * self.nx + i as usize)
        }
    }

    /// Marks one point.
    pub fn mark_point(&mut self, x: f64, y: f64) {
        if let Some(i) = self.index(x, y) {
            self.count[i] += 1;
        }
    }

    /// Marks a polyline, sampled every half cell.
    pub fn mark_polyline(&mut self, pts: &[(f64, f64)]) {
        if let [p] = pts {
            self.mark_point(p.0, p.1);
        }
        for w in pts.windows(2) {
            let (a, b) = (w[0], w[1]);
            let n = ((b.0 - a.0).hypot(b.1 - a.1) / (0.5 * self.cell)).ceil().max(1.0) as usize;
            for s in 0..=n {
                let t = s as f64 / n as f64;
                self.mark_point(a.0 + t * (b.0 - a.0), a.1 + t * (b.1 - a.1));
            }
        }
    }

    /// Marks every cell a rectangle touches.
    pub fn mark_rect(&mut self, r: &Rect) {
        let mut y = r.y0;
        while y <= r.y1 + 0.5 * self.cell {
            let mut x = r.x0;
            while x <= r.x1 + 0.5 * self.cell {
                self.mark_point(x.min(r.x1), y.min(r.y1));
                x += 0.5 * self.cell;
            }
            y += 0.5 * self.cell;
        }
    }

    /// Marks the vertical span between `ya` and `yb` at `x`.
    pub fn mark_column(&mut self, x: f64, ya: f64, yb: f64) {
        let (lo, hi) = (ya.min(yb), ya.max(yb));
        let mut y = lo;
        while y <= hi {
            self.mark_point(x, y);
            y += 0.5 * self.cell;
        }
        self.mark_point(x, hi);
    }

    /// Ink in the cells a rectangle touches.
    pub fn ink_in(&self, r: &Rect) -> u64 {
        let i0 = ((r.x0 - self.area.x0) / self.cell).floor().max(0.0) as usize;
        let j0 = ((r.y0 - self.area.y0) / self.cell).floor().max(0.0) as usize;
        let i1 = (((r.x1 - self.area.x0) / self.cell).ceil().max(0.0) as usize).min(self.nx);
        let j1 = (((r.y1 - self.area.y0) / self.cell).ceil().max(0.0) as usize).min(self.ny);
        let mut s = 0u64;
        for j in j0..j1 {
            for i in i0..i1 {
                s += u64::from(self.count[j * self.nx + i]);
            }
        }
        s
    }
}

// ----------------------------------------------------------------------------------------
// Legends.

/// What a legend entry shows beside its text.
#[derive(Debug, Clone)]
pub enum Swatch {
    /// A short line, solid or dashed, optionally on a wider casing of another colour.
    Line {
        /// Line colour.
        colour: RGBColor,
        /// Dashed instead of solid.
        dashed: bool,
        /// Colour of a wider line drawn beneath (heat-map overlays).
        casing: Option<RGBColor>,
    },
    /// A point marker.
    Point {
        /// Marker colour.
        colour: RGBColor,
        /// Marker shape.
        shape: PointShape,
        /// Colour of an outline drawn beneath (heat-map overlays).
        casing: Option<RGBColor>,
    },
    /// A filled box.
    Fill(RGBAColor),
}

/// One legend line.
#[derive(Debug, Clone)]
pub struct LegendEntry {
    /// The text.
    pub label: String,
    /// The symbol.
    pub swatch: Swatch,
}

/// Legend geometry: sample width, row height and padding.
fn legend_metrics(sizes: &Sizes) -> (f64, f64, f64) {
    let em = style::em(sizes.legend);
    (2.1 * em + 2.0 * sizes.dash.0, 1.45 * em, 0.6 * em)
}

/// Size of a legend box: entries stacked (`horizontal = false`) or in one row.
pub fn legend_size(entries: &[LegendEntry], horizontal: bool, sizes: &Sizes) -> (f64, f64) {
    let (sample, row, pad) = legend_metrics(sizes);
    let widths: Vec<f64> = entries
        .iter()
        .map(|e| sample + 0.5 * pad + style::text_width(&e.label, sizes.legend, false))
        .collect();
    if horizontal {
        let w: f64 = widths.iter().sum::<f64>() + 2.0 * pad * (entries.len().max(1) as f64);
        (w, row + pad)
    } else {
        let w = widths.iter().fold(0.0, |a: f64, &b| a.max(b)) + 2.0 * pad;
        (w, row * entries.len() as f64 + pad)
    }
}

/// Draws a legend with its top-left corner at `origin`, on a white, framed box if `framed`.
pub fn draw_legend(
    c: &Canvas,
    entries: &[LegendEntry],
    origin: (f64, f64),
    horizontal: bool,
    framed: bool,
    sizes: &Sizes,
) -> Result<(), PlotError> {
    let (sample, row, pad) = legend_metrics(sizes);
    let (w, h) = legend_size(entries, horizontal, sizes);
    let bx = Rect::at(origin.0, origin.1, w, h);
    c.note_legend(bx);
    if framed {
        c.fill_rect(bx, WHITE.mix(0.88))?;
        c.frame_rect(bx, FRAME_GREY.to_rgba(), 0.8 * sizes.frame)?;
    }
    let mut x = origin.0 + pad;
    let mut y = origin.1 + 0.5 * pad + 0.5 * row;
    for e in entries {
        let (s0, s1) = (x, x + sample);
        match &e.swatch {
            Swatch::Line {
                colour,
                dashed,
                casing,
            } => {
                let pts = [(s0, y), (s1, y)];
                if let Some(cs) = casing {
                    c.line(&pts, cs.to_rgba(), sizes.line + 2.0 * sizes.halo)?;
                }
                if *dashed {
                    c.dashed(&pts, colour.to_rgba(), sizes.line, sizes.dash)?;
                } else {
                    c.line(&pts, colour.to_rgba(), sizes.line)?;
                }
            }
            Swatch::Point {
                colour,
                shape,
                casing,
            } => {
                // One marker in the middle of the sample (two read as a doubled symbol).
                let p = (s0 + 0.5 * sample, y);
                if let Some(cs) = casing {
                    c.point(*shape, p, sizes.marker + 1.5 * sizes.halo, cs.to_rgba())?;
                }
                c.point(*shape, p, sizes.marker, colour.to_rgba())?;
            }
            Swatch::Fill(colour) => {
                let r = Rect::at(s0, y - 0.38 * row, sample, 0.76 * row);
                c.fill_rect(r, *colour)?;
            }
        }
        c.text(
            &e.label,
            (s1 + 0.5 * pad, y),
            sizes.legend,
            false,
            Anchor::new(HPos::Left, VPos::Center),
            false,
            BLACK,
        )?;
        if horizontal {
            x = s1 + 0.5 * pad + style::text_width(&e.label, sizes.legend, false) + 2.0 * pad;
        } else {
            y += row;
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn base64_matches_rfc4648_test_vectors() {
        // Test vectors from RFC 4648, section 10.
        let cases = [
            ("", ""),
            ("f", "Zg=="),
            ("fo", "Zm8="),
            ("foo", "Zm9v"),
            ("foob", "Zm9vYg=="),
            ("fooba", "Zm9vYmE="),
            ("foobar", "Zm9vYmFy"),
        ];
        for (raw, enc) in cases {
            assert_eq!(base64(raw.as_bytes()), enc, "{raw:?}");
        }
    }

    #[test]
    fn tick_labels_use_just_enough_decimals() {
        assert_eq!(tick_labels(&[0.0, 0.5, 1.0]), ["0.0", "0.5", "1.0"]);
        assert_eq!(tick_labels(&[1280.0, 1300.0, 1320.0]), ["1280", "1300", "1320"]);
        // Float noise from accumulating steps must not leak into labels.
        assert_eq!(
            tick_labels(&[0.1, 0.2, 0.30000000000000004]),
            ["0.1", "0.2", "0.3"]
        );
        assert_eq!(tick_labels(&[-20.0, -1e-14, 20.0]), ["\u{2212}20", "0", "20"]);
        assert_eq!(tick_labels(&[0.0, 2e6, 4e6]), ["0", "2e6", "4e6"]);
    }

    #[test]
    fn ticks_are_round_and_inside() {
        let t = ticks(-0.3, 87.2, 8);
        assert!(t.len() >= 4 && t.len() <= 8, "{t:?}");
        assert!(t.iter().all(|v| (-0.3..=87.2).contains(v)));
        let step = t[1] - t[0];
        assert!(
            [1.0, 2.0, 5.0, 10.0, 20.0]
                .iter()
                .any(|s| (step - s).abs() < 1e-9),
            "{step}"
        );
    }

    #[test]
    fn polyline_clipping_cuts_at_the_frame() {
        let r = Rect::at(0.0, 0.0, 10.0, 10.0);
        let pieces = clip_polyline(
            &[(-5.0, 5.0), (5.0, 5.0), (5.0, 20.0), (8.0, 20.0), (8.0, 5.0)],
            &r,
        );
        assert_eq!(pieces.len(), 2, "{pieces:?}");
        assert_eq!(pieces[0], vec![(0.0, 5.0), (5.0, 5.0), (5.0, 10.0)]);
        assert_eq!(pieces[1], vec![(8.0, 10.0), (8.0, 5.0)]);
    }

    #[test]
    fn polygon_clipping_keeps_the_inside() {
        let r = Rect::at(0.0, 0.0, 10.0, 10.0);
        // A square half outside on the right: the clipped area is half (shoelace formula).
        let p = clip_polygon(&[(5.0, 2.0), (15.0, 2.0), (15.0, 8.0), (5.0, 8.0)], &r);
        let area: f64 = (0..p.len())
            .map(|i| {
                let (a, b) = (p[i], p[(i + 1) % p.len()]);
                a.0 * b.1 - b.0 * a.1
            })
            .sum::<f64>()
            .abs()
            / 2.0;
        assert!((area - 30.0).abs() < 1e-9, "{area} {p:?}");
    }

    #[test]
    fn simplify_keeps_corners_and_drops_straight_runs() {
        let line: Vec<(f64, f64)> = (0..=100)
            .map(|i| (f64::from(i), 0.0))
            .chain([(100.0, 50.0)])
            .collect();
        let s = simplify(&line, 0.05);
        assert_eq!(s, vec![(0.0, 0.0), (100.0, 0.0), (100.0, 50.0)]);
        // A curve keeps every point that is needed to stay within the tolerance.
        let arc: Vec<(f64, f64)> = (0..=200)
            .map(|i| {
                let t = f64::from(i) / 200.0 * std::f64::consts::PI;
                (100.0 * t.cos(), 100.0 * t.sin())
            })
            .collect();
        let s = simplify(&arc, 0.05);
        assert!(s.len() > 10 && s.len() < arc.len(), "{}", s.len());
        for p in &arc {
            let d = s
                .windows(2)
                .map(|w| {
                    let (a, b) = (w[0], w[1]);
                    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
                    let t = (((p.0 - a.0) * dx + (p.1 - a.1) * dy) / (dx * dx + dy * dy)).clamp(0.0, 1.0);
                    (p.0 - a.0 - t * dx).hypot(p.1 - a.1 - t * dy)
                })
                .fold(f64::INFINITY, f64::min);
            assert!(d <= 0.05 + 1e-12, "{p:?} moved by {d}");
        }
    }

    #[test]
    fn nan_splits_runs() {
        let x = [0.0, 1.0, 2.0, 3.0, 4.0];
        let y = [1.0, f64::NAN, 2.0, 3.0, f64::NAN];
        let runs = finite_runs(&x, &y);
        assert_eq!(runs, vec![vec![(0.0, 1.0)], vec![(2.0, 2.0), (3.0, 3.0)]]);
    }
}
